"""Block-by-block reading, the cache of parsed captures and results, and binary inputs.

The reference for every check here is pqcheck's own in-memory path on the same data, or numpy
(numpy.testing): streaming, caching and the file format must never change a number.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from pqcheck.analysis import analyze
from pqcheck.capture import Capture, CaptureStream
from pqcheck.errors import CaptureFormatError
from pqcheck.export import analysis_to_dict
from pqcheck.readers import load_capture, open_capture
from pqcheck.run.cache import Cache
from pqcheck.run.check import analyze_file

FS = 10_000.0


def _signal(seconds=3.0, f=50.2):
    n = int(FS * seconds)
    t = np.arange(n) / FS
    th = 2 * np.pi * f * t
    ia = 10 * np.sin(th) + 2.0 * np.sin(5 * th) + 0.5 * np.sin(11 * th)
    va = 325 * np.sin(th + 0.1) + 3 * np.sin(5 * th)
    return t, ia, va


def _write_csv(path, t, ia, va, *, decimals=6):
    df = pd.DataFrame({"time [s]": np.round(t, 7), "ia [A]": np.round(ia, decimals),
                       "va [V]": np.round(va, decimals)})
    df.to_csv(path, index=False)
    return path


def _summary(result):
    d = analysis_to_dict(result)
    d["capture"].pop("reader")
    d["capture"].pop("source")
    return d


@pytest.fixture
def capture_csv(tmp_path):
    t, ia, va = _signal()
    return _write_csv(tmp_path / "cap.csv", t, ia, va)


def test_streamed_equals_in_memory(capture_csv):
    # reference: the in-memory reader and analysis of the same file
    mem = load_capture(capture_csv)
    streamed = open_capture(capture_csv, stream_over_bytes=1000)
    assert isinstance(streamed, CaptureStream)
    r_mem = analyze(mem, nominal_hz=50)
    r_str = analyze(streamed, nominal_hz=50, block_samples=4096)
    assert r_str.sha256 == r_mem.sha256 != ""
    a, b = _summary(r_mem), _summary(r_str)
    # blocks of 4096 samples place a few window edges by a line fit over fewer cycles than
    # one long block does (edges differ by far less than a sample): 1e-6 of reading
    assert a["channels"][0]["thd_percent"] == pytest.approx(b["channels"][0]["thd_percent"],
                                                            rel=1e-6)
    np.testing.assert_allclose(r_mem.windows.rms, r_str.windows.rms, rtol=1e-6)
    # windows at block edges are placed by a line fit over fewer cycles (edges move by far
    # less than a sample), so harmonics agree to 1e-5 of reading plus 1e-6 of the channel's
    # fundamental (the leakage residue in orders with no content)
    a, b = np.abs(r_mem.windows.component), np.abs(r_str.windows.component)
    fund = np.nanmax(a[:, :, 1], axis=0)[None, :, None]
    assert np.all(np.abs(a - b) <= 1e-5 * a + 1e-6 * fund)


def test_block_size_does_not_change_results():
    # the same capture analysed in blocks of 7000 samples and in one block; at block edges the
    # cycle count is extended half a cycle by a line fit, so window frequencies may differ by
    # a few mHz, far inside the IEC 61000-4-7 synchronisation tolerance of 0.03 % (15 mHz)
    t, ia, va = _signal(seconds=4.0)
    cap = Capture.from_arrays(FS, currents={"ia": ia}, voltages={"va": va})
    r1 = analyze(cap, nominal_hz=50, block_samples=1 << 20)
    r2 = analyze(cap, nominal_hz=50, block_samples=7000)
    assert r1.windows.n_windows == r2.windows.n_windows
    np.testing.assert_allclose(r1.windows.freq_hz, r2.windows.freq_hz, atol=5e-3)
    assert r1.channels[0].thd_percent == pytest.approx(r2.channels[0].thd_percent, rel=1e-5)


def test_cache_hit_returns_the_same_result(capture_csv, tmp_path, monkeypatch):
    cache = Cache(tmp_path / "cache")
    monkeypatch.setattr("pqcheck.readers.STREAM_OVER_BYTES", 1000)
    cap1, r1 = analyze_file(capture_csv, cache=cache, nominal_hz=50)
    files = sorted(p.name for p in (tmp_path / "cache").rglob("*") if p.is_file())
    assert any(f.endswith(".f64") for f in files) and any(f.endswith(".npz") for f in files)
    calls = []
    monkeypatch.setattr("pqcheck.run.check.analyze", lambda *a, **k: calls.append(1))
    cap2, r2 = analyze_file(capture_csv, cache=cache, nominal_hz=50)
    assert calls == []  # served from the result cache, no analysis
    assert json.dumps(_summary(r1), sort_keys=True) == json.dumps(_summary(r2), sort_keys=True)
    assert cap2.provenance.settings.get("cache") == "samples read from cache"


def test_cache_misses_when_settings_or_file_change(capture_csv, tmp_path, monkeypatch):
    cache = Cache(tmp_path / "cache")
    monkeypatch.setattr("pqcheck.readers.STREAM_OVER_BYTES", 1000)
    _, r1 = analyze_file(capture_csv, cache=cache, nominal_hz=50)
    _, r2 = analyze_file(capture_csv, cache=cache, nominal_hz=50, max_order=40)
    assert r2.settings.max_order == 40 and r1.settings.max_order == 50
    # change the file: a new SHA-256 and new numbers
    t, ia, va = _signal()
    _write_csv(capture_csv, t, 2 * ia, va)
    st = os.stat(capture_csv)
    os.utime(capture_csv, ns=(st.st_atime_ns, st.st_mtime_ns + 10_000_000))
    _, r3 = analyze_file(capture_csv, cache=cache, nominal_hz=50)
    assert r3.sha256 != r1.sha256
    assert r3.channels[0].rms == pytest.approx(2 * r1.channels[0].rms, rel=1e-6)


def test_streamed_time_gap_left_empty(tmp_path):
    t, ia, va = _signal(seconds=3.0)
    keep = np.ones(t.size, bool)
    keep[12_000:12_050] = False  # 5 ms of missing rows
    path = _write_csv(tmp_path / "gap.csv", t[keep], ia[keep], va[keep])
    cap = open_capture(path, stream_over_bytes=1000)
    res = analyze(cap, nominal_hz=50, block_samples=5000)
    codes = {f.code for f in res.findings}
    assert "time-gap" in codes and "gaps" in codes
    assert res.windows.valid.sum() == res.windows.n_windows - 1  # one window touched
    assert res.n_samples == t.size


def test_streamed_bad_cell_names_the_line(tmp_path):
    # the bad cell lies beyond the first chunk, so it is met while the analysis streams
    t, ia, va = _signal(seconds=9.0)
    path = _write_csv(tmp_path / "bad.csv", t, ia, va)
    lines = path.read_text().splitlines()
    lines[80_000] = lines[80_000].replace(",", ",oops", 1)
    path.write_text("\n".join(lines) + "\n")
    cap = open_capture(path, stream_over_bytes=1000)
    assert isinstance(cap, CaptureStream)
    with pytest.raises(CaptureFormatError, match=r"bad\.csv:80001: ia: cell 'oops.*' is not a"):
        analyze(cap, nominal_hz=50, block_samples=8192)


def test_npy_and_parquet_inputs_match_csv(capture_csv, tmp_path):
    # reference: the same samples read from CSV
    ref = analyze(load_capture(capture_csv), nominal_hz=50)
    t, ia, va = _signal()
    data = np.column_stack([t, np.round(ia, 6), np.round(va, 6)])
    npy = tmp_path / "cap.npy"
    np.save(npy, data)
    (tmp_path / "cap.json").write_text(json.dumps({"columns": ["time [s]", "ia [A]", "va [V]"]}))
    pq = tmp_path / "cap.parquet"
    pd.DataFrame(data, columns=["time [s]", "ia [A]", "va [V]"]).to_parquet(pq, engine="pyarrow",
                                                                           row_group_size=7000)
    for path in (npy, pq):
        res = analyze(open_capture(path), nominal_hz=50, block_samples=5000)
        assert res.channels[0].thd_percent == pytest.approx(ref.channels[0].thd_percent,
                                                            rel=1e-6), path.suffix
        assert [c.quantity for c in res.channels] == ["current", "voltage"]


@pytest.mark.parametrize("block", [1000, 6999, 7000, 7001, 50_000])
def test_parquet_blocks_are_the_table_whatever_the_row_groups(tmp_path, block):
    # each block is cut from the row groups it overlaps; the blocks laid end to end are the
    # columns exactly (reference: the same table through pandas), an integer column read as
    # float64, a null as NaN, and a column in mA scaled to A
    rng = np.random.default_rng(block)
    n = 23_456
    df = pd.DataFrame({"ia [mA]": rng.normal(size=n) * 1e3, "va [V]": rng.normal(size=n),
                       "ib": rng.integers(-5, 5, n)})
    df.loc[12_345, "va [V]"] = None
    pq = tmp_path / "groups.parquet"
    df.to_parquet(pq, engine="pyarrow", row_group_size=7000)
    cap = open_capture(pq, sample_rate_hz=10_000)
    got = np.concatenate(list(cap.blocks(block)), axis=1)
    assert got.shape == (3, n)
    np.testing.assert_array_equal(got[0], df["ia [mA]"].to_numpy() * 1e-3)  # scaled by 1e-3
    np.testing.assert_array_equal(got[1], df["va [V]"].to_numpy())
    np.testing.assert_array_equal(got[2], df["ib"].to_numpy().astype(np.float64))
    assert np.isnan(got[1, 12_345])


def test_parquet_from_a_logger_float32_time_in_ms_and_an_empty_row_group(tmp_path):
    # what a data logger's export can hold: samples stored as float32, the time column in
    # milliseconds, and a row group with no rows (a writer flushed twice); the rate comes
    # from the time column (1 ms steps: 1000 Hz) and the blocks are the float32 values
    # widened exactly (reference: numpy's astype)
    import pyarrow as pa
    import pyarrow.parquet as pq_

    n = 3000
    ia = np.sin(np.arange(n) / 3.0).astype(np.float32)
    tab = pa.table({"time [ms]": np.arange(n, dtype=np.float64), "ia [A]": ia})
    path = tmp_path / "logger.parquet"
    with pq_.ParquetWriter(path, tab.schema) as w:
        w.write_table(tab.slice(0, 1000))
        w.write_table(tab.slice(0, 0))
        w.write_table(tab.slice(1000))
    assert [pq_.ParquetFile(path).metadata.row_group(g).num_rows for g in range(3)] == \
        [1000, 0, 2000]
    cap = open_capture(path)
    assert cap.fs_hz == pytest.approx(1000.0)
    assert [c.name for c in cap.channels] == ["ia"]
    got = np.concatenate(list(cap.blocks(700)), axis=1)
    np.testing.assert_array_equal(got[0], ia.astype(np.float64))


def test_npy_without_rate_is_refused(tmp_path):
    np.save(tmp_path / "x.npy", np.zeros((100, 2)))
    with pytest.raises(CaptureFormatError, match=r"x\.npy: sample rate: no time column and no sample rate"):
        open_capture(tmp_path / "x.npy")
    with pytest.raises(CaptureFormatError, match=r"expected a 2-D numeric array"):
        np.save(tmp_path / "y.npy", np.zeros((2, 2, 2)))
        open_capture(tmp_path / "y.npy", sample_rate_hz=1000)


def test_progress_callback_reaches_the_end(capture_csv):
    seen = []
    cap = open_capture(capture_csv, stream_over_bytes=1000)
    analyze(cap, nominal_hz=50, block_samples=5000, progress=lambda d, n: seen.append(d))
    assert seen and seen[-1] == 30_000
    assert seen == sorted(seen)


def test_high_sample_rate_small_blocks():
    # 1 MS/s with blocks far shorter than a window: windows still cover the record
    fs = 1e6
    n = int(fs * 0.8)
    t = np.arange(n) / fs
    x = np.sin(2 * np.pi * 50 * t) + 0.1 * np.sin(2 * np.pi * 350 * t)
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50,
                  block_samples=50_000)
    assert res.windows.n_windows == 4
    # THD of a 10 % seventh harmonic is 10 % (definition, IEEE 519 clause 3)
    assert res.channels[0].thd_percent == pytest.approx(10.0, rel=1e-4)


def test_window_arrays_spilled_to_disk_give_the_same_result(monkeypatch):
    # the in-memory result is the reference; with a tiny spill threshold the per-window
    # arrays go through a temporary file and come back as a read-only memory map
    from pqcheck import analysis

    t, ia, va = _signal(seconds=4.0)
    cap = Capture.from_arrays(FS, currents={"ia": ia}, voltages={"va": va})
    ref = analyze(cap, nominal_hz=50, block_samples=5000)
    monkeypatch.setattr(analysis._WindowStore, "SPILL_BYTES", 1000)
    res = analyze(cap, nominal_hz=50, block_samples=5000)
    assert isinstance(res.windows.group, np.memmap)
    np.testing.assert_array_equal(res.windows.group, ref.windows.group)
    np.testing.assert_array_equal(res.windows.component, ref.windows.component)
    assert res.channels[0].thd_percent == ref.channels[0].thd_percent


def _thd_in_worker(path):
    res = analyze(open_capture(path, stream_over_bytes=1000), nominal_hz=50, block_samples=5000)
    return res.channels[0].thd_percent


def test_streaming_inside_a_daemonic_worker(capture_csv):
    # multiprocessing pool workers (and Dask's) are daemonic and may not start a parser
    # process of their own: the reader falls back to a parse thread there. Reference: the
    # same file analysed in this process.
    import multiprocessing as mp

    here = _thd_in_worker(str(capture_csv))
    with mp.get_context("fork").Pool(1) as pool:
        (there,) = pool.map(_thd_in_worker, [str(capture_csv)])
    assert there == pytest.approx(here, rel=1e-12)


def test_code_fingerprint_covers_the_computing_modules():
    # The cache key includes a hash of the computing code; every module named must exist, or
    # an edit to it would not invalidate the cache (a moved cache.py once looked in run/).
    from pqcheck.run import cache

    root = Path(cache.__file__).parent.parent
    for name in cache._CODE:
        assert (root / name).exists(), name


def test_binary_cache_hit_without_hashing_and_miss_after_a_rewrite(tmp_path, monkeypatch):
    # reference: hashlib.sha256 of the file (capture_sha256) and the first run's result. A
    # binary capture is hashed beside its analysis; its digest is then recorded for the
    # file's state, so the next run is served from the result cache without hashing, and a
    # rewrite of the same size (other numbers) is analysed again, never given the old result
    from pqcheck import readers

    def write(scale):
        t = np.arange(30_000) / FS
        x = np.column_stack([scale * np.sin(2 * np.pi * 50 * t), 230 * np.sin(2 * np.pi * 50 * t)])
        np.save(tmp_path / "cap.npy", x)
        (tmp_path / "cap.json").write_text(json.dumps({"columns": ["ia", "va"],
                                                        "sample_rate_hz": FS}))
        return tmp_path / "cap.npy"

    path = write(10.0)
    cache = Cache(tmp_path / "cache")
    _, r1 = analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert r1.sha256 == readers.capture_sha256(path)
    hashed, analysed = [], []
    # a .npy file is hashed from the bytes its rows are read with (binary._ReadsHashed)
    real_hash = readers.FedHash.__init__
    monkeypatch.setattr(readers.FedHash, "__init__",
                        lambda self, p, depth=None: hashed.append(p) or real_hash(self, p, depth))
    real_analyze = analyze
    monkeypatch.setattr("pqcheck.run.check.analyze",
                        lambda *a, **k: analysed.append(1) or real_analyze(*a, **k))
    _, r2 = analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert hashed == [] and analysed == []  # from the cache, by the recorded digest
    assert json.dumps(_summary(r1), sort_keys=True) == json.dumps(_summary(r2), sort_keys=True)
    st = os.stat(path)
    write(20.0)  # same shape and size, other numbers, the old modification time restored
    os.utime(path, ns=(st.st_atime_ns, st.st_mtime_ns))
    _, r3 = analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert analysed == [1] and len(hashed) == 1
    assert r3.sha256 == readers.capture_sha256(path) != r1.sha256
    assert r3.channels[0].rms == pytest.approx(2 * r1.channels[0].rms, rel=1e-9)


def test_binary_digest_is_recorded_when_its_hash_finished_before_the_lookup(tmp_path,
                                                                              monkeypatch):
    # reference: hashlib.sha256 of the file (capture_sha256). A small binary capture can be
    # hashed before the result cache is looked up; its digest must still be recorded for the
    # file's state (it was not: the next run hashed again). The hash is made to finish at
    # once, so that this order is the one tested, not the one a thread happens to take. A
    # Parquet file: it is hashed by a read of its own beside the analysis (a .npy file from
    # the bytes its rows are read with, which cannot finish before the lookup)
    import pyarrow as pa
    import pyarrow.parquet as pq

    from pqcheck import readers

    real_init = readers.BackgroundHash.__init__

    def finished_at_once(self, p):
        real_init(self, p)
        self.result()  # done() is True from here on

    monkeypatch.setattr(readers.BackgroundHash, "__init__", finished_at_once)
    t = np.arange(20_000) / FS
    path = tmp_path / "cap.parquet"
    pq.write_table(pa.table({"time": t, "ia": 10 * np.sin(2 * np.pi * 50 * t),
                             "va": 230 * np.sin(2 * np.pi * 50 * t)}), path)
    cache = Cache(tmp_path / "cache")
    _, r1 = analyze_file(path, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert cache.known_sha256(path, {"sample_rate_hz": None, "time_column": None}) \
        == r1.sha256 == readers.capture_sha256(path)


def test_binary_cache_misses_when_only_the_side_car_changes(tmp_path):
    # reference: the side-car's own sample rate (a user correcting a wrong rate in the .json
    # beside an unchanged .npy) and numpy's rms of the samples. The recorded digest covers
    # the array and its side-car, so an edited side-car must not bring back the result
    # analysed with the old rate
    t = np.arange(40_000) / 10_000
    x = np.column_stack([10 * np.sin(2 * np.pi * 50 * t), 230 * np.sin(2 * np.pi * 50 * t)])
    npy = tmp_path / "cap.npy"
    np.save(npy, x)
    side = tmp_path / "cap.json"
    side.write_text(json.dumps({"columns": ["ia", "va"], "sample_rate_hz": 20_000}))  # wrong
    cache = Cache(tmp_path / "cache")
    _, r1 = analyze_file(npy, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert r1.fs_hz == 20_000
    side.write_text(json.dumps({"columns": ["ia", "va"], "sample_rate_hz": 10_000}))  # fixed
    _, r2 = analyze_file(npy, cache=cache, current=["ia"], voltage=["va"], nominal_hz=50)
    assert r2.fs_hz == 10_000
    assert r2.sha256 != r1.sha256
    assert r2.channels[0].fundamental_rms == pytest.approx(10 / np.sqrt(2), rel=1e-6)
