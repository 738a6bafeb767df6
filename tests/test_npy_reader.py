"""The .npy reader reads block by block from the file (numpy.fromfile), not through a resident
memory map: the samples it yields must be the array numpy.load gives, in every layout
numpy.save writes (reference: numpy.load itself)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from pqcheck.errors import CaptureFormatError
from pqcheck.readers import binary, capture_sha256, open_capture


def _write(path, arr, columns):
    np.save(path, arr)
    path.with_suffix(".json").write_text(json.dumps({"columns": columns,
                                                     "sample_rate_hz": 10_000}))


def _all_blocks(stream, size):
    return np.concatenate(list(stream.blocks(size)), axis=1)


@pytest.mark.parametrize("layout", ["c-float64", "big-endian", "int16-counts", "fortran",
                                    "one-channel"])
def test_blocks_equal_numpy_load(tmp_path, monkeypatch, layout):
    # small read pieces, so that a block spans several of them and a piece several blocks
    monkeypatch.setattr(binary, "_READ_ROWS", 777)
    rng = np.random.default_rng(5)
    x = rng.normal(size=(5_003, 3))
    cols = ["ia", "ib", "va"]
    if layout == "big-endian":
        x = x.astype(">f8")
    elif layout == "int16-counts":  # a scope's raw ADC counts
        x = (x * 3000).astype(np.int16)
    elif layout == "fortran":  # np.save of a transposed (channels x samples) array
        x = np.asfortranarray(x)
    elif layout == "one-channel":
        x, cols = x[:, 0].copy(), ["ia"]
    path = tmp_path / "cap.npy"
    _write(path, x, cols)
    ref = np.load(path).astype(np.float64)
    ref = ref[:, None] if ref.ndim == 1 else ref
    stream = open_capture(path)
    got = _all_blocks(stream, 1_000)
    np.testing.assert_array_equal(got, ref.T)
    # the hash is taken on a thread beside the reading, over the array and its side-car
    assert stream.provenance.sha256 == capture_sha256(path)


def test_truncated_npy_is_a_clear_error(tmp_path):
    path = tmp_path / "cut.npy"
    _write(path, np.zeros((4_000, 2)), ["ia", "va"])
    data = path.read_bytes()
    path.write_bytes(data[: len(data) - 8 * 2 * 1_000])  # the last 1000 rows missing
    with pytest.raises(CaptureFormatError, match=r"cut\.npy"):
        stream = open_capture(path)
        _all_blocks(stream, 1_024)


def test_analysis_reads_blocks_while_the_file_is_hashed(tmp_path, monkeypatch):
    # reference: hashlib.sha256 of the file (via capture_sha256). Without a result cache the
    # digest is not needed before the analysis: the first block is read before the hash is
    # waited for (the hash runs beside the analysis), and the recorded digest is the file's
    from pqcheck import readers
    from pqcheck.capture import CaptureStream
    from pqcheck.run.check import analyze_file

    path = tmp_path / "cap.npy"
    t = np.arange(40_000) / 10_000
    _write(path, np.column_stack([10 * np.sin(2 * np.pi * 50 * t),
                                  325 * np.sin(2 * np.pi * 50 * t)]), ["ia", "va"])
    events = []
    real_result, real_blocks = readers.BackgroundHash.result, CaptureStream.blocks
    monkeypatch.setattr(readers.BackgroundHash, "result",
                        lambda self: events.append("hash") or real_result(self))

    def blocks(self, *a, **k):
        events.append("blocks")
        return real_blocks(self, *a, **k)

    monkeypatch.setattr(CaptureStream, "blocks", blocks)
    cap, res = analyze_file(path, current=["ia"], voltage=["va"], cache=None, nominal_hz=50.0)
    assert isinstance(cap, CaptureStream)
    assert events.index("blocks") < events.index("hash")
    assert res.sha256 == capture_sha256(path)
