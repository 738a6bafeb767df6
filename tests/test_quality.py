"""Data-quality findings: clipping, sample rate, short captures, gaps, DC offset, frequency.

Findings are records carried in the results, not exceptions (issue 2, item 5); only a capture
from which no honest result can come is refused (AnalysisError, message pinned).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import fourier_series, six_pulse_wave, square_wave

from pqcheck import AnalysisError, Capture, analyze

FS, F0 = 20_000.0, 50.0


def _findings(res, code):
    return [f for f in res.findings if f.code == code]


def _run(x, fs=FS, **kw):
    return analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50, **kw)


def _theta(fs=FS, dur=1.0, f0=F0, phase=0.3):
    return 2 * np.pi * f0 * np.arange(int(fs * dur)) / fs + phase


# ---- clipping -------------------------------------------------------------------------------


def _adc(x, full_scale, bits=12):
    """An ideal ADC: quantise to 2^bits codes over +-full_scale and saturate at the rails."""
    step = 2 * full_scale / 2**bits
    return np.clip(np.round(x / step), -(2 ** (bits - 1)), 2 ** (bits - 1) - 1) * step


@pytest.mark.parametrize("kind", ["unquantised", "quantised-12bit", "quantised-8bit"])
def test_clipped_sine_is_flagged(kind):
    # A 10 A peak sine recorded on a +-8 A range: flat at both rails for about 41 % of each
    # cycle (arccos(0.8) / pi on each side) -- the scope artefact the finding exists for.
    x = 10.0 * np.sin(_theta())
    if kind == "unquantised":
        rec = np.clip(x, -8.0, 8.0)
    else:
        rec = _adc(x, 8.0, bits=12 if kind.endswith("12bit") else 8)
    res = _run(rec)
    clip = _findings(res, "clipping")
    assert len(clip) == 2, [f.code for f in res.findings]  # upper and lower rail
    assert {f.severity for f in clip} == {"error"}
    assert all(f.channels == ("i",) for f in clip)
    assert any("upper rail" in f.message for f in clip)
    assert any("lower rail" in f.message for f in clip)


def test_clipped_on_one_rail_only():
    x = 10.0 * np.sin(_theta()) + 2.0  # offset: only the upper side reaches the +-11 A range
    res = _run(np.clip(x, -11.0, 11.0))
    clip = _findings(res, "clipping")
    assert len(clip) == 1 and "upper rail" in clip[0].message


@pytest.mark.parametrize("wave", ["six-pulse", "square"])
@pytest.mark.parametrize("quantised", [False, True])
def test_flat_topped_waveforms_are_not_clipping(wave, quantised):
    # An ideal six-pulse current (120-degree blocks) and a square wave are flat at their
    # extremes by nature: they step onto the plateau instead of running into a rail, and must
    # not be reported as clipped (a false "inconclusive" would hide a real result).
    x = 25.0 * (six_pulse_wave(_theta()) if wave == "six-pulse" else square_wave(_theta()))
    if quantised:
        x = _adc(x, 30.0, bits=12)
    res = _run(x)
    assert not _findings(res, "clipping"), [f.message for f in res.findings]


def test_clean_quantised_sine_is_not_clipping():
    # 8-bit quantisation within range: the codes near the peak repeat (a smooth waveform spends
    # several samples per code there), which is not clipping.
    res = _run(_adc(7.5 * np.sin(_theta()), 8.0, bits=8))
    assert not _findings(res, "clipping")


# ---- sample rate ----------------------------------------------------------------------------


def test_low_sample_rate_leaves_unresolved_orders_out():
    # 4 kHz resolves h f0 <= fs / 2.5 = 1600 Hz, orders up to 32 (pqcheck's rule: Nyquist with a
    # 20 % margin for the recorder's anti-aliasing filter, common practice). Orders 33..50 are
    # NaN, never numbers (issue 2, item 5), and a low-sample-rate finding names them.
    fs = 4_000.0
    x = fourier_series(fs, F0, {1: (10.0, 0.0), 5: (1.0, 0.0), 31: (0.2, 0.0)}, 1.0)
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50, max_order=50)
    assert res.max_resolved_order == 32
    (f,) = _findings(res, "low-sample-rate")
    assert f.severity == "error"
    assert f.orders == tuple(range(33, 51))
    ch = res.channels[0]
    assert np.all(np.isnan(ch.harmonic_rms[33:]))
    assert np.all(np.isnan(ch.phase_deg[33:]))
    assert np.all(np.isfinite(ch.harmonic_rms[:33]))
    assert ch.harmonic_rms[31] == pytest.approx(0.2, rel=1e-6)
    # THD over the resolved orders: sqrt(1^2 + 0.2^2) / 10 (IEEE 519 definition)
    assert ch.thd_percent == pytest.approx(100 * np.hypot(1.0, 0.2) / 10, rel=1e-6)


def test_enough_sample_rate_gives_no_finding():
    x = fourier_series(FS, F0, {1: (10.0, 0.0)}, 0.4)
    res = _run(x)
    assert not _findings(res, "low-sample-rate")
    assert res.max_resolved_order == 50


# ---- duration -------------------------------------------------------------------------------


@pytest.mark.parametrize("nominal, f0", [(50, 50.0), (60, 60.0)])
def test_capture_shorter_than_one_window_is_refused(nominal, f0):
    # IEC 61000-4-7: a 10-cycle (50 Hz) or 12-cycle (60 Hz) window, 0.2 s either way, is the
    # smallest measurement (from memory); 0.15 s is less than one.
    x = fourier_series(FS, f0, {1: (10.0, 0.0)}, 0.15)
    with pytest.raises(AnalysisError, match=r"the capture lasts 0\.15 s; the IEC 61000-4-7 method "
                                            r"needs at least one 10-cycle \(50 Hz\) or 12-cycle"):
        analyze(Capture.from_arrays(FS, currents={"i": x}), nominal_hz=nominal)


# ---- gaps -----------------------------------------------------------------------------------


def test_nan_gap_removes_only_the_windows_it_touches():
    harm = {1: (10.0, 0.0), 5: (2.0, 30.0), 11: (0.5, -20.0)}
    x = fourier_series(FS, F0, harm, 1.0)
    x[9_000:9_100] = np.nan  # inside the third 4000-sample window (8000..12000)
    res = _run(x)
    w = res.windows
    assert w.n_windows == 5
    assert list(w.valid) == [True, True, False, True, True]
    (f,) = _findings(res, "gaps")
    assert f.severity == "warning"
    assert f.value == 100
    assert "1 of 5 windows" in f.message
    ch = res.channels[0]
    # the remaining windows are clean; their edges near the gap come from fitted cycle counts,
    # which leaves them within 1e-7 of reading (the leakage correction then acts on that
    # tiny mismatch)
    for h, (a, _) in harm.items():
        assert ch.harmonic_rms[h] == pytest.approx(a, rel=1e-7)
    assert res.analysed_s == pytest.approx(0.8, rel=1e-6)


def test_all_windows_missing_is_refused():
    x = fourier_series(FS, F0, {1: (10.0, 0.0)}, 0.6)
    x[::1000] = np.nan
    with pytest.raises(AnalysisError, match=r"every window contains missing or non-finite"):
        _run(x)


# ---- DC offset ------------------------------------------------------------------------------


def test_dc_offset_above_two_percent_is_flagged():
    # 0.5 A on a 10 A fundamental: 5 % (pqcheck flags more than 2 %, a probe-zeroing check)
    res = _run(fourier_series(FS, F0, {1: (10.0, 0.0)}, 0.6, dc=0.5))
    (f,) = _findings(res, "dc-offset")
    assert f.severity == "warning"
    assert f.value == pytest.approx(5.0, rel=1e-6)
    assert f.channels == ("i",)
    assert res.channels[0].dc == pytest.approx(0.5, rel=1e-9)


def test_small_dc_offset_is_not_flagged():
    res = _run(fourier_series(FS, F0, {1: (10.0, 0.0)}, 0.6, dc=0.1))  # 1 %
    assert not _findings(res, "dc-offset")


# ---- fundamental frequency ------------------------------------------------------------------


def test_far_off_nominal_frequency_is_flagged():
    # 48.0 Hz on a 50 Hz system: 4 % off (pqcheck flags more than 1 %); windows still follow it
    res = _run(fourier_series(FS, 48.0, {1: (10.0, 0.0), 5: (1.0, 0.0)}, 1.0))
    (f,) = _findings(res, "off-nominal-frequency")
    assert f.severity == "warning"
    assert f.value == pytest.approx(48.0, abs=0.01)
    assert res.channels[0].harmonic_rms[5] == pytest.approx(1.0, rel=1e-3)


def test_slightly_off_nominal_is_not_flagged():
    res = _run(fourier_series(FS, 50.3, {1: (10.0, 0.0)}, 1.0))
    assert not _findings(res, "off-nominal-frequency")
