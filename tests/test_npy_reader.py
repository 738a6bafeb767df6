"""The .npy reader reads block by block from the file (numpy.fromfile), not through a resident
memory map: the samples it yields must be the array numpy.load gives, in every layout
numpy.save writes (reference: numpy.load itself)."""

from __future__ import annotations

import gc
import hashlib
import json
import threading

import numpy as np
import pytest

from pqcheck.errors import CaptureFormatError
from pqcheck.readers import binary, capture_sha256, open_capture


def _write(path, arr, columns):
    np.save(path, arr)
    path.with_suffix(".json").write_text(json.dumps({"columns": columns,
                                                     "sample_rate_hz": 10_000}))


def _sha256_of(*files):
    """The digest the provenance records for a .npy capture and its side-car (reference:
    hashlib.sha256 over the files' bytes, the array's first)."""
    return hashlib.sha256(b"".join(f.read_bytes() for f in files)).hexdigest()


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
    real_result, real_blocks = binary._ReadsHashed.result, CaptureStream.blocks
    monkeypatch.setattr(binary._ReadsHashed, "result",
                        lambda self: events.append("hash") or real_result(self))
    # the file is read once: the digest comes from the bytes the rows were read with
    monkeypatch.setattr(readers, "capture_sha256",
                        lambda *a, **k: pytest.fail("the file was hashed a second time"))

    def blocks(self, *a, **k):
        events.append("blocks")
        return real_blocks(self, *a, **k)

    monkeypatch.setattr(CaptureStream, "blocks", blocks)
    cap, res = analyze_file(path, current=["ia"], voltage=["va"], cache=None, nominal_hz=50.0)
    assert isinstance(cap, CaptureStream)
    assert events.index("blocks") < events.index("hash")
    assert res.sha256 == _sha256_of(path, path.with_suffix(".json"))


@pytest.fixture
def read_once(monkeypatch):
    """The .npy file must be read once: a second, separate hash of it fails the test."""
    from pqcheck import readers

    monkeypatch.setattr(readers, "capture_sha256",
                        lambda *a, **k: pytest.fail("the file was hashed a second time"))


@pytest.mark.parametrize("rows", [0, 1, 776, 777, 778, 5_000])
def test_digest_from_the_bytes_read(tmp_path, monkeypatch, read_once, rows):
    # reference: hashlib.sha256 of the array's file then its side-car. Read pieces of 777
    # rows: none, one, exactly one piece, one row either side of it, several
    monkeypatch.setattr(binary, "_READ_ROWS", 777)
    path = tmp_path / "cap.npy"
    _write(path, np.random.default_rng(1).normal(size=(rows, 2)), ["ia", "va"])
    stream = open_capture(path)
    if rows:
        _all_blocks(stream, 1_000)
    assert stream.provenance.sha256 == _sha256_of(path, path.with_suffix(".json"))


def test_digest_covers_bytes_after_the_array(tmp_path, read_once):
    # numpy.load reads the array and ignores what follows it; the digest is still that of
    # the whole file, as sha256sum gives it (reference: hashlib)
    path = tmp_path / "cap.npy"
    _write(path, np.ones((3_000, 2)), ["ia", "va"])
    with open(path, "ab") as fh:
        fh.write(b"appended by another program" * 1000)
    stream = open_capture(path)
    _all_blocks(stream, 1_024)
    assert stream.provenance.sha256 == _sha256_of(path, path.with_suffix(".json"))


def test_digest_without_side_car_and_with_a_time_column(tmp_path, read_once):
    # no side-car: the file's bytes alone; the time column read first (the sample rate from
    # it) is the pass that hashes, the blocks after it read the file again
    path = tmp_path / "timed.npy"
    t = np.arange(4_000) / 8_000
    np.save(path, np.column_stack([t, np.sin(2 * np.pi * 50 * t)]))
    stream = open_capture(path, time_column="col1")
    assert stream.fs_hz == pytest.approx(8_000)
    _all_blocks(stream, 1_000)
    _all_blocks(stream, 1_000)  # a second pass changes nothing
    assert stream.provenance.sha256 == _sha256_of(path)


def test_side_car_hashed_as_read_at_opening(tmp_path, read_once):
    # the digest is of what was analysed: a side-car changed after the file was opened (its
    # column names and sample rate already taken) does not enter it
    path = tmp_path / "cap.npy"
    _write(path, np.ones((2_000, 2)), ["ia", "va"])
    side = path.with_suffix(".json")
    before = side.read_bytes()
    stream = open_capture(path)
    side.write_text(json.dumps({"columns": ["x", "y"], "sample_rate_hz": 1}))
    _all_blocks(stream, 1_024)
    assert stream.provenance.sha256 == hashlib.sha256(path.read_bytes() + before).hexdigest()


def test_digest_asked_for_before_the_rows_are_read(tmp_path):
    # reference: hashlib. The provenance read first: the file is hashed on its own, and the
    # reading after it neither hangs on the stopped hash nor changes the digest
    path = tmp_path / "cap.npy"
    _write(path, np.ones((20_000, 2)), ["ia", "va"])
    stream = open_capture(path)
    first = stream.provenance.sha256
    _all_blocks(stream, 1_024)
    assert first == stream.provenance.sha256 == _sha256_of(path, path.with_suffix(".json"))


def test_hash_thread_stopped_when_the_reading_fails(tmp_path, monkeypatch):
    # a file cut short while it is read fails half-way: the capture dropped, its hashing
    # thread ends (a plan of many files must not collect threads waiting for bytes that
    # never come)
    monkeypatch.setattr(binary, "_READ_ROWS", 500)
    path = tmp_path / "cut.npy"
    _write(path, np.zeros((4_000, 2)), ["ia", "va"])

    def hashing():
        return [t for t in threading.enumerate() if t.name == "pqcheck-hash" and t.is_alive()]

    before = len(hashing())
    stream = open_capture(path)
    assert len(hashing()) == before + 1
    data = path.read_bytes()
    path.write_bytes(data[: len(data) - 8 * 2 * 1_000])  # the last 1000 rows gone
    with pytest.raises(CaptureFormatError, match=r"cut\.npy"):
        _all_blocks(stream, 1_024)
    del stream
    gc.collect()
    for t in hashing():
        t.join(timeout=5)
    assert len(hashing()) == before


def test_digest_after_an_abandoned_pass(tmp_path, monkeypatch):
    # reference: hashlib. A pass stopped after two blocks, then a whole pass from the start:
    # the second pass's pieces do not follow on from the first's, so none is hashed twice
    # (the digest is then taken from the file itself)
    monkeypatch.setattr(binary, "_READ_ROWS", 500)
    path = tmp_path / "cap.npy"
    _write(path, np.random.default_rng(2).normal(size=(6_000, 2)), ["ia", "va"])
    stream = open_capture(path)
    part = stream.blocks(1_000)
    next(part), next(part)
    part.close()
    _all_blocks(stream, 1_000)
    assert stream.provenance.sha256 == _sha256_of(path, path.with_suffix(".json"))


def test_unnamed_time_column_is_named_in_the_error(tmp_path):
    # a .npy saved as np.column_stack([t, i, v]) with no side-car: no name says time and no
    # rate is given; the message names the column that looks like one, and nothing is
    # analysed on a guessed time base
    t = np.arange(3000) / 8000
    timed = tmp_path / "timed.npy"
    np.save(timed, np.column_stack([t, np.sin(2 * np.pi * 50 * t)]))
    with pytest.raises(CaptureFormatError,
                       match=r"timed\.npy.*no sample rate.*column 'col1' increases in uniform "
                             r"steps of 0\.000125 like a time column.*`time_column` \(col1\)"):
        open_capture(timed)
    plain = tmp_path / "plain.npy"
    np.save(plain, np.column_stack([np.sin(2 * np.pi * 50 * t), np.cos(2 * np.pi * 50 * t)]))
    with pytest.raises(CaptureFormatError, match=r"no sample rate; give `sample_rate_hz`$"):
        open_capture(plain)
    assert open_capture(timed, time_column="col1").fs_hz == pytest.approx(8000)


def test_side_car_edited_during_the_analysis_is_an_error_and_not_cached(tmp_path, monkeypatch):
    # a user corrects the side-car's sample rate while a run reads the .npy: that run stops
    # with an error (what it read no longer matches the files), nothing of it is cached, and
    # the next run analyses at the corrected rate (reference: the rms of the closed form
    # 10 sin, whichever rate; the rate the side-car states)
    from pqcheck.run.cache import Cache
    from pqcheck.run.check import analyze_file

    t = np.arange(40_000) / 10_000
    path = tmp_path / "cap.npy"
    np.save(path, np.column_stack([10 * np.sin(2 * np.pi * 50 * t),
                                   230 * np.sin(2 * np.pi * 50 * t)]))
    side = path.with_suffix(".json")
    side.write_text(json.dumps({"columns": ["ia", "va"], "sample_rate_hz": 20_000}))
    real = binary._ReadsHashed.piece
    edited = []

    def piece(self, at, part):
        if not edited:
            side.write_text(json.dumps({"columns": ["ia", "va"], "sample_rate_hz": 10_000}))
            edited.append(1)
        return real(self, at, part)

    monkeypatch.setattr(binary._ReadsHashed, "piece", piece)
    cache = Cache(tmp_path / "cache")
    with pytest.raises(CaptureFormatError, match=r"cap\.npy: .*changed while"):
        analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    monkeypatch.setattr(binary._ReadsHashed, "piece", real)
    _, res = analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert res.fs_hz == 10_000
    assert res.sha256 == _sha256_of(path, side)
    assert res.channels[0].fundamental_rms == pytest.approx(10 / np.sqrt(2), rel=1e-6)
