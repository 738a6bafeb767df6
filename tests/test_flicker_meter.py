"""The IEC 61000-4-15 flickermeter against the standard's published verification points.

Sources of the expected values (each check names its table beside it):

* IEC 61000-4-15:2010 (Ed. 2.0) Table 1a/1b: sinusoidal voltage fluctuations giving
  Pinst,max = 1.00, for the 230 V and 120 V lamps on 50 Hz and 60 Hz supplies. Accuracy
  required: Pinst,max within +-8 % (clause 6.2, Ed. 2.0).
* IEC 61000-4-15:2010 Table 2a/2b: the same for rectangular fluctuations (50 % duty cycle).
  Accuracy +-8 %.
* IEC 61000-4-15:2010 Table 5: rectangular changes per minute giving Pst = 1.00. Accuracy
  required: Pst within +-5 %.

The table values below were read from a public reproduction of the 2010 edition's tables
(a metrology institute's verification script) and agree with the 2003 edition's values where
those are unchanged; they were not compared with a paper copy of the standard, so treat them
as `from memory` for an audit and check them against your copy. dV/V is the peak-to-peak
relative voltage change in per cent, as the standard defines it.
"""

from __future__ import annotations

import numpy as np
import pytest

from pqcheck.errors import AnalysisError
from pqcheck.flicker.meter import (
    PERCENTILES,
    Flickermeter,
    _Classifier,
    flickermeter,
    plt_from_pst,
    pst_from_percentiles,
)

PINST_TOLERANCE = 0.08  # IEC 61000-4-15:2010 clause 6.2: Pinst,max 1.00 +- 8 %
PST_TOLERANCE = 0.05  # IEC 61000-4-15:2010 Table 5 accuracy: Pst 1.00 +- 5 %

_F1 = [0.5 * k for k in range(1, 17)] + [8.8] + [9.5 + 0.5 * k for k in range(6)] + list(
    range(13, 26))
# IEC 61000-4-15:2010 Table 1a (230 V lamp) and Table 1b (120 V lamp), dV/V [%] for Pinst = 1
TABLE_1 = {
    ("230V", 50): (_F1 + [100 / 3], [
        2.325, 1.397, 1.067, 0.879, 0.747, 0.645, 0.564, 0.497, 0.442, 0.396, 0.357, 0.325,
        0.300, 0.280, 0.265, 0.256, 0.250, 0.254, 0.261, 0.271, 0.283, 0.298, 0.314, 0.351,
        0.393, 0.438, 0.486, 0.537, 0.590, 0.646, 0.704, 0.764, 0.828, 0.894, 0.964, 1.037,
        2.128]),
    ("230V", 60): (_F1 + [100 / 3, 40], [
        2.325, 1.397, 1.067, 0.879, 0.747, 0.645, 0.564, 0.497, 0.442, 0.396, 0.357, 0.325,
        0.300, 0.280, 0.265, 0.256, 0.250, 0.254, 0.261, 0.271, 0.283, 0.298, 0.314, 0.351,
        0.393, 0.438, 0.486, 0.537, 0.590, 0.645, 0.703, 0.764, 0.826, 0.892, 0.959, 1.029,
        1.758, 2.963]),
    ("120V", 60): (_F1 + [100 / 3, 40], [
        2.453, 1.465, 1.126, 0.942, 0.815, 0.717, 0.637, 0.570, 0.514, 0.466, 0.426, 0.393,
        0.366, 0.346, 0.332, 0.323, 0.321, 0.329, 0.341, 0.355, 0.373, 0.394, 0.417, 0.469,
        0.528, 0.592, 0.660, 0.734, 0.811, 0.892, 0.977, 1.067, 1.160, 1.257, 1.359, 1.464,
        2.570, 4.393]),
    ("120V", 50): (_F1 + [100 / 3], [
        2.453, 1.465, 1.126, 0.942, 0.815, 0.717, 0.637, 0.570, 0.514, 0.466, 0.426, 0.393,
        0.366, 0.346, 0.332, 0.323, 0.321, 0.329, 0.341, 0.355, 0.373, 0.394, 0.417, 0.469,
        0.528, 0.592, 0.660, 0.734, 0.811, 0.892, 0.978, 1.068, 1.162, 1.261, 1.365, 1.476,
        3.111]),
}
_F2 = [0.5 * k for k in range(1, 17)] + [8.8] + [9.5 + 0.5 * k for k in range(6)] + list(
    range(13, 22)) + [21.5] + list(range(22, 26)) + [25.5, 28, 30.5, 100 / 3]
# IEC 61000-4-15:2010 Table 2a (230 V lamp) and Table 2b (120 V lamp), rectangular fluctuations
TABLE_2 = {
    ("230V", 50): (_F2, [
        0.509, 0.467, 0.429, 0.398, 0.370, 0.352, 0.342, 0.332, 0.312, 0.291, 0.268, 0.248,
        0.231, 0.216, 0.207, 0.199, 0.196, 0.199, 0.203, 0.212, 0.222, 0.233, 0.245, 0.272,
        0.308, 0.341, 0.376, 0.411, 0.446, 0.497, 0.553, 0.585, 0.592, 0.612, 0.680, 0.743,
        0.764, 0.806, 0.915, 0.847, 1.671]),
    ("230V", 60): (_F2 + [37, 40], [
        0.510, 0.468, 0.429, 0.399, 0.371, 0.351, 0.342, 0.331, 0.313, 0.291, 0.269, 0.249,
        0.231, 0.217, 0.206, 0.200, 0.196, 0.199, 0.203, 0.212, 0.222, 0.233, 0.244, 0.275,
        0.306, 0.338, 0.376, 0.420, 0.457, 0.498, 0.537, 0.584, 0.600, 0.611, 0.678, 0.753,
        0.778, 0.768, 0.962, 1.105, 1.258, 0.975, 2.327]),
    ("120V", 60): (_F2 + [37, 40], [
        0.598, 0.548, 0.503, 0.469, 0.439, 0.419, 0.408, 0.394, 0.373, 0.348, 0.324, 0.302,
        0.283, 0.269, 0.258, 0.253, 0.252, 0.258, 0.266, 0.278, 0.292, 0.308, 0.324, 0.367,
        0.411, 0.457, 0.509, 0.575, 0.626, 0.688, 0.746, 0.815, 0.837, 0.851, 0.946, 1.067,
        1.088, 1.072, 1.383, 1.602, 1.823, 1.304, 3.451]),
    ("120V", 50): (_F2, [
        0.597, 0.547, 0.503, 0.468, 0.438, 0.420, 0.408, 0.394, 0.372, 0.348, 0.323, 0.302,
        0.283, 0.269, 0.259, 0.253, 0.252, 0.258, 0.265, 0.278, 0.293, 0.308, 0.325, 0.363,
        0.413, 0.460, 0.511, 0.562, 0.611, 0.683, 0.768, 0.811, 0.820, 0.852, 0.957, 1.052,
        1.087, 1.148, 1.303, 1.144, 2.443]),
}
# IEC 61000-4-15:2010 Table 5: rectangular changes per minute -> dV/V [%] for Pst = 1.00
TABLE_5 = {
    ("230V", 50): ([1, 2, 7, 39, 110, 1620, 4000],
                   [2.715, 2.191, 1.450, 0.894, 0.722, 0.407, 2.343]),
    ("120V", 60): ([1, 2, 7, 39, 110, 1620, 4800],
                   [3.181, 2.564, 1.694, 1.040, 0.844, 0.548, 4.837]),
}


def _voltage(lamp):
    return 230.0 if lamp == "230V" else 120.0


def _modulated(fs, duration_s, f0, un, dvv_percent, fm_hz, *, rectangular, phase=0.0):
    """u = Un sqrt2 (1 + dV/V / 2 * m(t)) sin(w0 t), m a unit sine or a +-1 square wave."""
    t = np.arange(int(round(duration_s * fs))) / fs
    arg = 2 * np.pi * fm_hz * t + phase
    # a +-1 square wave that never takes the value 0 on a sample
    mod = np.where(np.sin(arg + 1e-3) >= 0.0, 1.0, -1.0) if rectangular else np.sin(arg)
    return un * np.sqrt(2) * (1 + dvv_percent / 200.0 * mod) * np.sin(2 * np.pi * f0 * t)


def _pinst_max_steady(fs, f0, lamp, dvv, fm, *, rectangular):
    """Pinst,max after the filters have settled (the last few modulation periods)."""
    settle = 8.0 + 4.0 / fm
    measure = max(3.0, 3.0 / fm)
    u = _modulated(fs, settle + measure, f0, _voltage(lamp), dvv, fm, rectangular=rectangular)
    r = flickermeter(u, fs_hz=fs, nominal_hz=f0, lamp=lamp)
    n = int(round(measure / r.pinst_step_s))
    return float(r.pinst[-n:].max())


def _cases(table, every_other):
    out = []
    for (lamp, f0), (freqs, dvvs) in table.items():
        rows = list(zip(freqs, dvvs))
        if every_other.get((lamp, f0)):
            rows = rows[::3] + [rows[-1]]
        out += [pytest.param(lamp, f0, f, d, id=f"{lamp}-{f0}Hz-{f:.2f}Hz") for f, d in rows]
    return out


# the two lamps on their own supplies at every point; the crossed pairs at a third of them
_SUBSET = {("230V", 60): True, ("120V", 50): True}


@pytest.mark.parametrize("lamp,f0,fm,dvv", _cases(TABLE_1, _SUBSET))
def test_table1_sinusoidal_pinst_max_is_one(lamp, f0, fm, dvv):
    # IEC 61000-4-15:2010 Table 1a/1b, Pinst,max = 1.00 +- 8 %
    p = _pinst_max_steady(1600.0, f0, lamp, dvv, fm, rectangular=False)
    assert p == pytest.approx(1.0, abs=PINST_TOLERANCE)


@pytest.mark.parametrize("lamp,f0,fm,dvv", _cases(TABLE_2, _SUBSET))
def test_table2_rectangular_pinst_max_is_one(lamp, f0, fm, dvv):
    # IEC 61000-4-15:2010 Table 2a/2b, Pinst,max = 1.00 +- 8 %. Synthesised at 3.2 kS/s: at
    # 1.6 kS/s the sampled square wave's aliased harmonics (e.g. the 43rd of 37 Hz at 9 Hz)
    # would be part of the test signal itself.
    p = _pinst_max_steady(3200.0, f0, lamp, dvv, fm, rectangular=True)
    assert p == pytest.approx(1.0, abs=PINST_TOLERANCE)


@pytest.mark.parametrize("lamp,f0,cpm,dvv", [
    pytest.param(lamp, f0, c, d, id=f"{lamp}-{f0}Hz-{c}cpm")
    for (lamp, f0), (cpms, dvvs) in TABLE_5.items() for c, d in zip(cpms, dvvs)])
def test_table5_rectangular_changes_pst_is_one(lamp, f0, cpm, dvv):
    # IEC 61000-4-15:2010 Table 5, Pst = 1.00 +- 5 % over one 10-minute interval. The square
    # wave starts half a change period before its first change, so the 10 minutes hold
    # exactly 10 x cpm changes (cpm = 120 x modulation frequency).
    fs = 3200.0 if cpm > 2000 else 1600.0
    u = _modulated(fs, 600.0, f0, _voltage(lamp), dvv, cpm / 120.0, rectangular=True,
                   phase=np.pi / 2)
    r = flickermeter(u, fs_hz=fs, nominal_hz=f0, lamp=lamp)
    assert r.complete_intervals and r.interval_s == pytest.approx(600.0)
    assert len(r.pst) == 1
    assert r.pst[0] == pytest.approx(1.0, abs=PST_TOLERANCE)


def test_pst_scales_linearly_with_the_fluctuation():
    # Pst is proportional to the fluctuation size (Pinst ~ (dV/V)^2, Pst ~ sqrt of a linear
    # combination of Pinst levels): IEC 61000-4-15:2010 clause 5.7.2 formula, an identity.
    fs = 1600.0
    u1 = _modulated(fs, 600.0, 50, 230.0, 0.894, 39 / 120, rectangular=True, phase=np.pi / 2)
    u2 = _modulated(fs, 600.0, 50, 230.0, 2 * 0.894, 39 / 120, rectangular=True,
                    phase=np.pi / 2)
    p1 = flickermeter(u1, fs_hz=fs).pst[0]
    p2 = flickermeter(u2, fs_hz=fs).pst[0]
    assert p2 / p1 == pytest.approx(2.0, rel=0.01)


def test_constant_voltage_gives_pst_near_zero():
    # No fluctuation: Pst ~ 0. The residue of the carrier at 2 f0 behind the standard's 35 Hz
    # Butterworth and the weighting filter leaves Pinst ~ 1e-4 (closed form: (35/100)^6 x
    # |F(100 Hz)| ~ 3e-5 relative ripple), i.e. Pst ~ 0.01.
    fs = 1600.0
    t = np.arange(int(120 * fs)) / fs
    u = 230 * np.sqrt(2) * np.sin(2 * np.pi * 50 * t + 0.7)
    r = flickermeter(u, fs_hz=fs)
    assert r.pst[0] < 0.02
    assert r.pinst_max < 1e-3
    assert not r.complete_intervals and r.interval_s == pytest.approx(120.0, abs=0.01)
    assert r.plt == ()


def test_block_size_does_not_change_the_result():
    # streaming identity: the same samples fed in odd-sized blocks give the same Pinst
    fs = 1600.0
    u = _modulated(fs, 20.0, 50, 230.0, 0.5, 5.0, rectangular=False)
    whole = flickermeter(u, fs_hz=fs)
    parts = flickermeter(u, fs_hz=fs, block_samples=7919)
    np.testing.assert_allclose(parts.pinst, whole.pinst, rtol=1e-9, atol=1e-12)
    assert parts.pst == pytest.approx(whole.pst, rel=1e-9)


def test_classifier_percentiles_match_numpy_quantiles():
    # the log-class classifier against numpy's exact quantiles (reference implementation);
    # classes are 1/200 decade wide (1.2 %), interpolated inside
    rng = np.random.default_rng(7)
    x = rng.lognormal(mean=-1.0, sigma=1.5, size=200_000)
    c = _Classifier()
    c.add(x[:70_000])
    c.add(x[70_000:])
    got = c.percentiles()
    for p in PERCENTILES:
        assert got[p] == pytest.approx(np.quantile(x, 1 - p / 100), rel=0.005), p


def test_pst_and_plt_formulas():
    # IEC 61000-4-15:2010 clause 5.7.2: all percentiles equal to P gives
    # Pst = sqrt(P * (0.0314 + 0.0525 + 0.0657 + 0.28 + 0.08)) = sqrt(0.5096 P)
    assert pst_from_percentiles({p: 2.0 for p in PERCENTILES}) == pytest.approx(
        np.sqrt(0.5096 * 2.0))
    # clause 5.7.3: Plt = cube root of the mean of 12 cubed Pst
    pst = [1.0] * 6 + [2.0] * 6
    assert plt_from_pst(pst) == pytest.approx(np.cbrt((6 + 6 * 8) / 12))


def test_plt_from_twelve_intervals_uses_short_intervals():
    # 12 short-term intervals make one Plt; with equal fluctuations Plt == Pst (clause 5.7.3)
    fs = 1000.0
    u = _modulated(fs, 12 * 20.0, 50, 230.0, 1.0, 8.8, rectangular=False)
    r = flickermeter(u, fs_hz=fs, interval_s=20.0)
    assert len(r.pst) == 12 and len(r.plt) == 1
    assert r.plt[0] == pytest.approx(np.cbrt(np.mean(np.array(r.pst) ** 3)))
    assert r.plt[0] == pytest.approx(np.median(r.pst), rel=0.02)


def test_gap_marks_its_interval_invalid():
    fs = 1000.0
    u = _modulated(fs, 60.0, 50, 230.0, 0.5, 8.8, rectangular=False)
    u[35_000:35_010] = np.nan
    r = flickermeter(u, fs_hz=fs, interval_s=20.0)
    assert r.invalid_intervals == (1,)
    assert np.isnan(r.pst[1]) and np.isfinite(r.pst[0]) and np.isfinite(r.pst[2])


def test_bad_arguments_are_refused():
    with pytest.raises(AnalysisError, match="unknown lamp 'LED'"):
        Flickermeter(1600.0, lamp="LED")
    with pytest.raises(AnalysisError, match="50 or 60 Hz"):
        Flickermeter(1600.0, nominal_hz=400)
    with pytest.raises(AnalysisError, match="at least 400 Hz"):
        Flickermeter(300.0)
