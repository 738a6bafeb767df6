"""Waveform recordings aggregated as IEC 61000-4-30 Class A does (3 s, 10 min, 2 h values).

References
----------
IEC 61000-4-30:2015, clause 4.5 (from memory): 150/180-cycle values are the RMS of 15
consecutive 10/12-cycle values, resynchronised at every 10 min clock tick; 10 min values are
clock-aligned and the RMS of the shorter values; an interval holding a dip (U_rms(1/2) below
90 % of Udin), swell or interruption is flagged. The synthetic signals below have harmonic
amplitudes known by construction (a sine of rms A has rms A), so every expected value is
computed by hand from them.
"""

from __future__ import annotations

import datetime as dt
import json

import numpy as np
import pytest
from click.testing import CliRunner

from pqcheck.cli import main
from pqcheck.errors import InputError
from pqcheck.readers.intervals import read_interval_logs
from pqcheck.run.recording import aggregate_recording

FS = 1000.0  # 20 samples per cycle at 50 Hz: orders up to 9 resolved
ANALYSIS = {"max_order": 7, "nominal_hz": 50}
START = "2026-03-02T10:03:17+00:00"
T_START = dt.datetime(2026, 3, 2, 10, 3, 17, tzinfo=dt.timezone.utc).timestamp()


def _signal(t, i5_rms, *, dip=None):
    """Phase a: 230 V rms sine, 10 A rms fundamental plus a 5th of ``i5_rms(t)`` A rms."""
    w = 2 * np.pi * 50 * t
    va = np.sqrt(2) * 230 * np.sin(w)
    if dip is not None:
        a, b = dip
        va = np.where((t >= a) & (t < b), 0.5 * va, va)
    ia = np.sqrt(2) * 10 * np.sin(w - 0.3) + np.sqrt(2) * i5_rms(t) * np.sin(5 * w)
    return va, ia


def _npy(path, t, i5_rms, **kw):
    va, ia = _signal(t, i5_rms, **kw)
    np.save(path, np.c_[va, ia])
    path.with_suffix(".json").write_text(json.dumps({"columns": ["va [V]", "ia [A]"],
                                                     "sample_rate_hz": FS}))
    return path


def _csv(path, start_text, t, i5_rms, **kw):
    va, ia = _signal(t, i5_rms, **kw)
    with open(path, "w") as f:
        f.write(f"Start Time,{start_text}\n")
        f.write("time [s],va [V],ia [A]\n")
        np.savetxt(f, np.c_[t - t[0], va, ia], delimiter=",", fmt="%.7g")
    return path


def _i(survey, level):
    s = survey.level(level)
    return s, s.channel_index("current", "a")


def test_three_second_value_is_rms_of_window_values(tmp_path):
    # I5 = 1 A for the first 1.0 s (5 windows of 0.2 s), then 2 A: the first 150-cycle value
    # is sqrt((5 x 1 + 10 x 4) / 15) = sqrt(3) A, the next ones 2 A (by hand)
    t = np.arange(int(9 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.where(x < 1.0, 1.0, 2.0))
    s = aggregate_recording([p], start_time=START, analysis=ANALYSIS)
    three, k = _i(s, "3s")
    assert three.start_s[0] == pytest.approx(T_START)
    assert three.harmonics[0, k, 5] == pytest.approx(np.sqrt(3.0), rel=1e-3)
    assert three.harmonics[1, k, 5] == pytest.approx(2.0, rel=1e-3)
    assert three.complete[:3].tolist() == [True, True, True]


def test_clock_alignment_of_a_recording_starting_at_10_03_17(tmp_path):
    # 18 min from 10:03:17; I5 = 3 A from 10:10:00 on, 1 A before. The 10 min value of
    # 10:00-10:10 holds 6 min 43 s only (incomplete); 10:10-10:20 is complete and 3 A; a
    # 150-cycle value starts exactly on the 10:10 tick (resynchronised), and the one before
    # it is short (the 403 s to the tick hold 2015 windows = 134 x 15 + 5).
    tick = 403.0
    t = np.arange(int(18 * 60 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.where(x < tick, 1.0, 3.0))
    s = aggregate_recording([p], start_time=START, analysis=ANALYSIS)
    ten, k = _i(s, "10min")
    rel = (ten.start_s - T_START + 197) / 60  # minutes after 10:00
    assert rel.tolist() == [0.0, 10.0, 20.0]
    assert ten.complete.tolist() == [False, True, False]
    assert ten.harmonics[1, k, 5] == pytest.approx(3.0, rel=1e-3)
    assert ten.harmonics[0, k, 5] == pytest.approx(1.0, rel=1e-3)
    three, _ = _i(s, "3s")
    at_tick = np.flatnonzero(np.isclose(three.start_s, T_START + tick, rtol=0, atol=1e-6))
    assert at_tick.size == 1
    j = int(at_tick[0])
    assert three.start_s[j] - three.start_s[j - 1] == pytest.approx(1.0, abs=1e-6)  # 5 windows
    assert three.complete[j - 1]  # the short block before a tick is a value of its own


def test_dip_flags_the_intervals_holding_it(tmp_path):
    # a 100 ms dip to 50 % (below 90 % of Udin) at 5.0 s: the 3 s value holding it (3-6 s) is
    # flagged, and so are the 10 min and 2 h values holding it
    t = np.arange(int(12 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.ones_like(x), dip=(5.0, 5.1))
    s = aggregate_recording([p], start_time=START, analysis=ANALYSIS)
    three, _ = _i(s, "3s")
    assert three.flagged.tolist() == [False, True, False, False]
    assert s.level("10min").flagged.all() and s.level("2h").flagged.all()
    assert any(f.code == "voltage-events" and "dip (1)" in f.message for f in s.findings)


def test_short_dip_of_one_cycle_is_found_by_the_half_cycle_rms(tmp_path):
    # 20 ms at 50 %: the 10-cycle window RMS stays at 95 % (above 90 %), but U_rms(1/2) of
    # that cycle is 50 %
    t = np.arange(int(6 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.ones_like(x), dip=(1.0, 1.02))
    s = aggregate_recording([p], start_time=START, analysis=ANALYSIS)
    assert s.level("3s").flagged.tolist() == [True, False]


def test_files_with_a_gap_form_one_recording(tmp_path):
    # file 1: 10:03:17 + 60 s; file 2 starts 30 s after file 1 ends: a gap finding; the 3 s
    # values touching it are incomplete, and so is the 10 min interval holding it
    t = np.arange(int(60 * FS)) / FS
    a = _csv(tmp_path / "a.csv", "2026-03-02T10:03:17", t, lambda x: np.ones_like(x))
    b = _csv(tmp_path / "b.csv", "2026-03-02T10:04:47", t, lambda x: np.ones_like(x))
    s = aggregate_recording([b, a], analysis=ANALYSIS)  # any order: sorted by start time
    assert s.sources == (str(a), str(b))
    gaps = [f for f in s.findings if f.code == "gap"]
    assert len(gaps) == 1 and gaps[0].value == pytest.approx(30.0, abs=0.01)
    three, k = _i(s, "3s")
    assert three.n == 40 and three.complete.sum() == 40  # each file: 20 whole 3 s values
    assert not s.level("10min").complete.any()
    np.testing.assert_allclose(three.harmonics[:, k, 5], 1.0, rtol=1e-3)


def test_overlapping_files_are_refused(tmp_path):
    t = np.arange(int(10 * FS)) / FS
    a = _csv(tmp_path / "a.csv", "2026-03-02T10:03:17", t, lambda x: np.ones_like(x))
    b = _csv(tmp_path / "b.csv", "2026-03-02T10:03:20", t, lambda x: np.ones_like(x))
    with pytest.raises(InputError, match="before the end of .*a.csv.*must not overlap"):
        aggregate_recording([a, b], analysis=ANALYSIS)


def test_a_file_without_a_start_time_is_refused(tmp_path):
    t = np.arange(int(2 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.ones_like(x))
    with pytest.raises(InputError, match="start_time: the absolute start time"):
        aggregate_recording([p], analysis=ANALYSIS)


def test_aggregate_command_writes_a_log_that_check_reads(tmp_path):
    t = np.arange(int(30 * FS)) / FS
    a = _csv(tmp_path / "a.csv", "2026-03-02T10:03:17", t, lambda x: np.full_like(x, 0.5))
    b = _csv(tmp_path / "b.csv", "2026-03-02T10:03:47", t, lambda x: np.full_like(x, 0.5))
    out = tmp_path / "log.csv"
    r = CliRunner().invoke(main, ["aggregate", str(a), str(b), "--interval", "3s",
                                  "--interval", "10min", "-o", str(out), "--max-order", "7",
                                  "--nominal-frequency", "50"])
    assert r.exit_code == 0, r.output
    s = read_interval_logs([out])
    three, k = _i(s, "3s")
    assert three.n == 20 and three.complete.all()
    np.testing.assert_allclose(three.harmonics[:, k, 5], 0.5, rtol=1e-3)
    np.testing.assert_allclose(three.harmonics[:, k, 1], 10.0, rtol=1e-3)
    assert s.level("10min").n == 1 and not s.level("10min").complete.any()
    r = CliRunner().invoke(main, ["aggregate", str(a), "-o", str(out)])
    assert r.exit_code == 2 and "file exists" in r.stderr
    pq = tmp_path / "log.parquet"
    r = CliRunner().invoke(main, ["aggregate", str(a), "-o", str(pq), "--max-order", "7"])
    assert r.exit_code == 0 and pq.stat().st_size > 0


def test_check_on_a_short_multi_file_recording_is_inconclusive_and_says_why(tmp_path):
    t = np.arange(int(12 * FS)) / FS
    a = _csv(tmp_path / "a.csv", "2026-03-02T10:03:17", t, lambda x: np.full_like(x, 0.5))
    b = _csv(tmp_path / "b.csv", "2026-03-02T10:03:29", t, lambda x: np.full_like(x, 0.5))
    r = CliRunner().invoke(main, ["check", str(a), str(b), "--limits", "ieee519-2022",
                                  "--voltage-level", "480", "--isc", "700", "--il", "10",
                                  "--max-order", "7", "--format", "json"])
    assert r.exit_code == 3, r.output
    d = json.loads(r.output)
    assert d["verdict"] == "inconclusive"
    assert any("NOT ASSESSED" in n and "daily" in n for n in d["notes"])
    assert d["capture"]["sources"] == [str(a), str(b)]


def test_a_capture_as_long_as_the_period_is_assessed_period_by_period(tmp_path):
    # A table whose statistics are over 60 s and 120 s periods (an edited IEEE 519 copy) and a
    # 200 s capture: it is at least as long as the shortest period, so it is evaluated per
    # period, never as one whole-capture value. I5 is 30 % of IL (IL = 10 A) from 66 s to
    # 78 s only: the 99th percentile of the 3 s values of 60-120 s is 30 % (above 2 x 10 %),
    # and that period is named.
    from pqcheck.analysis import analyze
    from pqcheck.assess import assess
    from pqcheck.limits import load_table, resolve
    from pqcheck.readers import load_capture

    src = load_table("ieee519-2022").source
    text = open(src, encoding="utf-8").read()
    text = text.replace("period_s = 86400", "period_s = 60").replace("period_s = 604800",
                                                                    "period_s = 120")
    edited = tmp_path / "short-periods.toml"
    edited.write_text(text, encoding="utf-8")
    lim = resolve(load_table(edited), voltage_level_v=480, isc_a=700, il_a=10)
    t = np.arange(int(200 * FS)) / FS
    p = _npy(tmp_path / "rec.npy", t, lambda x: np.where((x >= 66) & (x < 78), 3.0, 0.2))
    result = analyze(load_capture(p), **ANALYSIS, il_a=10)
    a = assess(result, lim, il_a=10)
    (c,) = [c for c in a.checks if c.label == "I5" and c.statistic.startswith("per 60 s")]
    assert c.verdict == "fail" and c.measured == pytest.approx(30.0, rel=2e-3)
    assert (c.period_start, c.period_end) == ("1970-01-01T00:01:00", "1970-01-01T00:02:00")
    assert any("period by period" in n and "own time base" in n for n in a.notes)
    assert not any(k.statistic.startswith("RMS") for k in a.checks)  # no steady-state rule
