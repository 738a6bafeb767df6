"""Tests of the site interconnection study (pqcheck.site and ``pqcheck site``).

Reference values are written out from their published formulas:

- IEC TR 61000-3-6:2008, general summation law ``I_h = (sum I_h,i ** alpha) ** (1 / alpha)``
  with alpha = 1 (h < 5), 1.4 (5 <= h <= 10), 2 (h > 10) -- exponents from memory (tag M in
  the project's standards notes, section 8).
- Short-circuit and per-unit impedances as in power-system analysis textbooks (e.g. Glover,
  Sarma, Overbye, *Power System Analysis and Design*, per-unit and symmetrical-fault chapters;
  chapter attribution from memory): ``Z = V^2 / S_sc``, ``Z_base = V_base^2 / S_base``,
  transformer ``Z = z_pu V^2 / S_r``, ``R = Z / sqrt(1 + (X/R)^2)``.
- Symmetrical components (Fortescue 1918) and the twelve-pulse cancellation of orders 5 and
  7 (Mohan, Undeland, Robbins, *Power Electronics*, line-frequency rectifiers; from memory).
- IEC 60076-1 clock notation: each hour of the clock number is 30 degrees of low-voltage lag
  (common practice).

Demo data in samples/ is never used here.
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from pqcheck import Capture, analyze
from pqcheck.cli import main
from pqcheck.errors import PlanError
from pqcheck.results import site_document
from pqcheck.run.site import load_site
from pqcheck.site import (
    aggregate,
    harmonic_impedance,
    harmonic_voltages,
    site_template,
    source_impedance,
    spectrum_from_analysis,
    study_site,
    summation_exponent,
    transformer_impedance,
    transformer_shift,
    vector_group_shift,
)

SQRT3 = math.sqrt(3.0)
ORDERS = np.arange(14)


def six_pulse_wave(theta) -> np.ndarray:
    """Ideal six-pulse line current of unit height: +1 for |theta| < 60 deg, -1 within 60 deg
    of 180 deg, 0 elsewhere (120-degree conduction blocks). [rad]"""
    th = np.mod(np.asarray(theta, dtype=np.float64) + np.pi, 2 * np.pi) - np.pi
    a = np.abs(th)
    return np.where(a < np.pi / 3, 1.0, np.where(a > 2 * np.pi / 3, -1.0, 0.0))


def six_pulse_spectrum(i1_rms: float, max_order: int) -> dict:
    """Cosine series of :func:`six_pulse_wave`: a_h = 4 / (pi h) sin(h pi / 3) for odd h, so
    I_h = I_1 / h for h = 6k +- 1, in phase for 6k + 1 and in antiphase for 6k - 1
    (textbook series, e.g. Mohan, Undeland, Robbins; from memory)."""
    return {h: (i1_rms / h, 0.0 if h % 6 == 1 else 180.0)
            for h in range(1, max_order + 1) if h % 2 and h % 3}


# ---------------------------------------------------------------------------------------------
# helpers: hand-built unit results (a balanced set: phase k lags by 120 k h degrees)
# ---------------------------------------------------------------------------------------------


def unit_results(harmonics: dict, *, fund_a: float = 100.0, fund_deg: float = 0.0,
                 voltage: bool = True, phases: str = "abc", max_order: int = 50,
                 nominal_hz: float = 50.0, findings=()) -> dict:
    """Results in the form ``pqcheck analyze --format json`` writes.

    ``harmonics`` is ``{order: (rms A, phase deg of phase a)}``; other phases follow as a
    balanced set (phase k of order h rotated by -120 k h degrees).
    """
    chans = []
    if voltage:
        chans.append({"name": "va", "quantity": "voltage", "phase": "a",
                      "harmonics": [{"order": 1, "rms": 230.0, "phase_deg": 0.0}]})
    for ph in phases:
        k = "abc".index(ph) if ph else 0
        hs = [{"order": 1, "rms": fund_a, "phase_deg": fund_deg - 120.0 * k}]
        for h in range(2, max_order + 1):
            rms, ang = harmonics.get(h, (0.0, 0.0))
            hs.append({"order": h, "rms": rms, "phase_deg": ang - 120.0 * k * h})
        chans.append({"name": f"i{ph or 'x'}", "quantity": "current", "phase": ph,
                      "harmonics": hs})
    return {"settings": {"nominal_hz": nominal_hz, "reference": "va" if voltage else "ia"},
            "channels": chans, "findings": list(findings)}


SITE_BUS = """\
name = "Test depot"
nominal_frequency_hz = 50
summation = "{summation}"

[supply]
nominal_voltage_v = 11000
ssc_va = 250e6
x_over_r = 10

[transformer]
rating_va = 1000e3
secondary_v = 400
impedance_percent = 6
x_over_r = 6
vector_group = "Dyn11"

[pcc]
location = "{location}"
{il}

[other_load]
demand_w = {demand_w}
power_factor = 0.8

[[units]]
name = "Charger"
results = "unit.json"
count = {count}
load_point = "100 %"
"""


def write_site(tmp_path, *, results=None, summation="general", location="bus", count=1,
               demand_w=0.0, il="", extra="", text=None, name="site.toml"):
    """Write unit.json and a site file; return the site file's path."""
    if results is None:
        results = unit_results({5: (20.0, 0.0)})
    (tmp_path / "unit.json").write_text(json.dumps(results))
    if text is None:
        text = SITE_BUS.format(summation=summation, location=location, count=count,
                               demand_w=demand_w, il=il) + extra
    p = tmp_path / name
    p.write_text(text)
    return p


# ---------------------------------------------------------------------------------------------
# summation law
# ---------------------------------------------------------------------------------------------


def test_summation_exponent_by_order():
    # IEC TR 61000-3-6:2008 summation law, exponents from memory: 1 below order 5,
    # 1.4 for 5 <= h <= 10, 2 above 10
    h = [2, 3, 4, 5, 7, 10, 11, 13, 50]
    assert summation_exponent(h).tolist() == [1, 1, 1, 1.4, 1.4, 1.4, 2, 2, 2]


def test_general_summation_two_sources_worked_numbers():
    # Two sources of 3 A and 4 A at each order (IEC TR 61000-3-6 summation law):
    #   h = 3  (alpha 1):   3 + 4 = 7
    #   h = 5  (alpha 1.4): 3^1.4 = 4.655537, 4^1.4 = 6.964405, sum 11.619941,
    #                       11.619941^(1/1.4) = 5.765805
    #   h = 11 (alpha 2):   sqrt(9 + 16) = 5
    cur = np.zeros((2, 12))
    cur[0, [3, 5, 11]] = 3.0
    cur[1, [3, 5, 11]] = 4.0
    out = aggregate(cur, [1, 1], np.arange(12), "general")
    assert out[3] == pytest.approx(7.0, rel=1e-12)
    assert out[5] == pytest.approx(5.765805, rel=1e-6)
    assert out[11] == pytest.approx(5.0, rel=1e-12)


def test_general_summation_identical_units():
    # n identical units: (n I^alpha)^(1/alpha) = n^(1/alpha) I (summation law, closed form):
    #   4 units, alpha 1 -> 4; alpha 1.4 -> 4^(1/1.4) = exp(ln 4 / 1.4) = 2.691800;
    #   alpha 2 -> 2
    cur = np.zeros((1, 12))
    cur[0, [3, 7, 13 - 2]] = 10.0
    out = aggregate(cur, [4], np.arange(12), "general")
    assert out[3] == pytest.approx(40.0, rel=1e-12)
    assert out[7] == pytest.approx(26.918004, rel=1e-6)
    assert out[11] == pytest.approx(20.0, rel=1e-12)


def test_arithmetic_and_phasor_sums():
    # 3 A at 0 deg and 4 A at 90 deg: arithmetic 7 A, phasor |3 + 4j| = 5 A (Pythagoras)
    cur = np.zeros((2, 6), complex)
    cur[0, 5] = 3.0
    cur[1, 5] = 4.0j
    assert aggregate(cur, [1, 1], range(6), "arithmetic")[5] == pytest.approx(7.0)
    assert aggregate(cur, [1, 1], range(6), "phasor")[5] == pytest.approx(5.0)
    # two units of one kind add in phase in the phasor sum: 2 x |3 + 4j|... of kind 0 only
    assert aggregate(cur, [2, 0], range(6), "phasor")[5] == pytest.approx(6.0)


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0.0, 100.0), min_size=1, max_size=6),
       st.integers(2, 30))
def test_general_sum_between_rss_and_arithmetic(mags, h):
    # p-norm inequalities (1 <= alpha <= 2): ||x||_2 <= ||x||_alpha <= ||x||_1, and
    # max |x_i| <= ||x||_alpha
    cur = np.zeros((len(mags), h + 1))
    cur[:, h] = mags
    n = np.ones(len(mags))
    g = aggregate(cur, n, np.arange(h + 1), "general")[h]
    a = aggregate(cur, n, np.arange(h + 1), "arithmetic")[h]
    rss = math.sqrt(sum(m * m for m in mags))
    assert rss * (1 - 1e-12) - 1e-12 <= g <= a * (1 + 1e-12) + 1e-12
    assert g >= max(mags) * (1 - 1e-12) - 1e-12


def test_aggregate_errors():
    with pytest.raises(ValueError, match="summation must be one of general, arithmetic, "
                                         "phasor, got 'rms'"):
        aggregate(np.ones((1, 3)), [1], range(3), "rms")
    with pytest.raises(ValueError, match="the phasor sum needs complex phasors"):
        aggregate(np.ones((1, 3)), [1], range(3), "phasor")
    with pytest.raises(ValueError, match="counts must be non-negative numbers"):
        aggregate(np.ones((1, 3)), [-1], range(3))
    with pytest.raises(ValueError, match="counts has 2 entries but currents has 1 kinds"):
        aggregate(np.ones((1, 3)), [1, 2], range(3))
    with pytest.raises(ValueError, match="currents has 3 orders but orders has 4"):
        aggregate(np.ones((1, 3)), [1], range(4))


# ---------------------------------------------------------------------------------------------
# impedances (per-unit textbook formulas)
# ---------------------------------------------------------------------------------------------


def test_source_impedance_from_fault_level():
    # Z = V^2 / S_sc = 11000^2 / 250e6 = 0.484 Ohm; X/R = 10: R = 0.484 / sqrt(101)
    # = 0.0481598 Ohm, X = 0.481598 Ohm (textbook short-circuit impedance)
    z = source_impedance(11e3, 10.0, ssc_va=250e6)
    assert abs(z) == pytest.approx(0.484, rel=1e-12)
    assert z.real == pytest.approx(0.0481598, rel=1e-6)
    assert z.imag == pytest.approx(0.481598, rel=1e-6)
    # the same level as a current: I_sc = S / (sqrt(3) V) = 13121.597 A
    z2 = source_impedance(11e3, 10.0, isc_a=250e6 / (SQRT3 * 11e3))
    assert z2 == pytest.approx(z, rel=1e-12)
    # per unit: S_base = 1 MVA, Z_pu = S_base / S_sc = 0.004; Z_base = 11^2 / 1 = 121 Ohm
    assert abs(z) == pytest.approx(0.004 * 121.0, rel=1e-12)
    with pytest.raises(ValueError, match="give exactly one of ssc_va and isc_a"):
        source_impedance(11e3, 10.0)


def test_transformer_impedance_per_unit():
    # 6 % on 1000 kVA referred to 400 V: Z_base = 0.4^2 / 1 = 0.16 Ohm, Z = 0.06 x 0.16
    # = 9.6 mOhm; X/R = 6: R = 9.6 / sqrt(37) = 1.578230 mOhm, X = 9.469382 mOhm
    z = transformer_impedance(1000e3, 6.0, 6.0, 400.0)
    assert abs(z) == pytest.approx(9.6e-3, rel=1e-12)
    assert z.real == pytest.approx(1.578230e-3, rel=1e-6)
    assert z.imag == pytest.approx(9.469382e-3, rel=1e-6)
    # change of base: 6 % on 1 MVA is 600 % on 100 MVA, the same ohms (Z_base 0.0016 Ohm)
    assert abs(transformer_impedance(100e6, 600.0, 6.0, 400.0)) == pytest.approx(abs(z))


def test_harmonic_impedance_and_voltage_worked_numbers():
    # resistance as given, reactance times the order: Z_5 = 0.0481598 + j 5 x 0.481598;
    # |Z_5| = 2.408472 Ohm; 2 A drive 4.816943 V = 0.0758472 % of 11 kV / sqrt(3) = 6350.853 V
    z1 = source_impedance(11e3, 10.0, ssc_va=250e6)
    z = harmonic_impedance(z1, [1, 5])
    assert z[1].real == pytest.approx(0.0481598, rel=1e-6)
    assert z[1].imag == pytest.approx(2.407990, rel=1e-6)
    v = harmonic_voltages([0.0, 2.0], z1, [1, 5])
    assert v[1] == pytest.approx(4.816943, rel=1e-6)
    assert 100 * v[1] / (11e3 / SQRT3) == pytest.approx(0.0758472, rel=1e-5)


def test_short_circuit_current_at_the_bus(tmp_path):
    # PCC on the 400 V bus: supply 0.484 Ohm referred by (0.4/11)^2 = 0.64 mOhm (R 0.0636824,
    # X 0.636824 mOhm) plus transformer (R 1.578230, X 9.469382 mOhm): R = 1.641913 mOhm,
    # X = 10.106205 mOhm, |Z| = 10.238714 mOhm; I_sc = 230.9401 V / |Z| = 22555.58 A
    study = study_site(load_site(write_site(tmp_path)), headroom=False)
    assert study.z_pcc_ohm.real == pytest.approx(1.641913e-3, rel=1e-6)
    assert study.z_pcc_ohm.imag == pytest.approx(10.106205e-3, rel=1e-6)
    assert study.isc_a == pytest.approx(22555.58, rel=1e-6)


def test_pcc_voltage_distortion_on_the_supply_side(tmp_path):
    # One unit, I1 = 100 A at 0 deg and I5 = 20 A, on the 400 V bus of a Dyn11 transformer;
    # PCC at its 11 kV primary. Referred current I5 = 20 x 400 / 11000 = 0.7272727 A;
    # V5 = 0.7272727 x |0.0481598 + j 2.40799| = 0.7272727 x 2.408472 = 1.751616 V
    # = 0.02758077 % of 6350.853 V. IL = 100 x 400/11000 = 3.636364 A, TDD = 20 %.
    # ISC = 13121.597 A (the supply's own level), ISC/IL = 3608.44.
    study = study_site(load_site(write_site(tmp_path, location="supply")), headroom=False)
    assert study.current_a[0, 5] == pytest.approx(0.7272727, rel=1e-6)
    assert study.voltage_v[0, 5] == pytest.approx(1.751616, rel=1e-6)
    assert study.voltage_percent[5] == pytest.approx(0.02758077, rel=1e-5)
    assert study.il_a == pytest.approx(3.636364, rel=1e-6)
    assert study.tdd_percent == pytest.approx(20.0, rel=1e-9)
    assert study.isc_a == pytest.approx(13121.597, rel=1e-6)
    assert study.isc_il == pytest.approx(3608.439, rel=1e-6)
    assert study.thd_v_percent == pytest.approx(0.02758077, rel=1e-5)
    # ISC/IL >= 1000 -> IEEE 519-2022 Table 2 last row: I5 limit 15 % of IL, TDD 20 %
    # (standards notes 1.3, tag V)
    assert study.check("I5").limit == 15.0
    assert study.check("I5").verdict == "fail"
    assert study.check("TDD").limit == 20.0


def test_il_is_the_phasor_sum_with_the_other_load(tmp_path):
    # unit 100 A at 0 deg; other load 69.282 kW at PF 0.8 lagging on 400 V:
    # I = 69282.03 / (sqrt(3) 400 0.8) = 125 A at -36.87 deg = 100 - j75 A;
    # IL = |200 - j75| = sqrt(200^2 + 75^2) = sqrt(45625) = 213.600094 A (phasor addition)
    p = write_site(tmp_path, demand_w=SQRT3 * 400 * 0.8 * 125)
    study = study_site(load_site(p), headroom=False)
    assert study.il_a == pytest.approx(213.600094, rel=1e-6)
    assert study.il_source == "estimated"
    p = write_site(tmp_path, il="il_a = 500", name="s2.toml")
    assert study_site(load_site(p), headroom=False).il_a == 500.0


# ---------------------------------------------------------------------------------------------
# phase-shifting transformers
# ---------------------------------------------------------------------------------------------


def test_dy_unit_cancels_orders_5_and_7_in_the_time_domain():
    # Two ideal six-pulse bridges (120-degree blocks, six_pulse_wave): A fed directly,
    # B through a Dyn11 transformer whose secondary leads by 30 deg. B's bridge currents are
    # A's shifted 30 deg earlier; the delta primary's line currents are differences of
    # winding currents, i_A = (i_a - i_c) / sqrt(3) (positive sequence lags 30 deg through
    # this connection). Twelve-pulse theory: orders 5, 7 cancel, 11, 13 add.
    n = 3600
    th = 2 * np.pi * np.arange(n) / n
    lag = np.array([0.0, 2 * np.pi / 3, 4 * np.pi / 3])[:, None]
    a_sec = six_pulse_wave(th[None, :] - lag)
    b_sec = six_pulse_wave(th[None, :] + np.pi / 6 - lag)
    b_pri = (b_sec - np.roll(b_sec, 1, axis=0)) / SQRT3  # (a - c, b - a, c - b) / sqrt(3)
    # rms phasors in the cosine basis: x = sum sqrt(2) |X_h| cos(h theta + arg X_h) has
    # DFT coefficient (1/n) sum x exp(-j h theta) = X_h / sqrt(2)
    pa = np.sqrt(2) * np.fft.rfft(a_sec, axis=-1)[:, :14] / n
    pb = np.sqrt(2) * np.fft.rfft(b_pri, axis=-1)[:, :14] / n
    # pqcheck's rotation of A's phasors by a +30 deg transformer equals the circuit result
    shifted = transformer_shift(pa, ORDERS, 30.0, zero_sequence=False)
    np.testing.assert_allclose(shifted[:, 1:], pb[:, 1:], atol=2e-3)  # 1/n sampling error
    # the circuit itself: orders 5 and 7 cancel to within the sampling error, 11 and 13 add
    circuit = pa + pb
    for h in (5, 7):
        assert abs(circuit[0, h]) < 2e-3  # I5 = 0.156, I7 = 0.111 of each bridge
    for h in (11, 13):
        assert abs(circuit[0, h]) == pytest.approx(2 * abs(pa[0, h]), abs=2e-3)
    # the fundamental keeps its angle through the shift (same displacement power factor)
    assert shifted[0, 1] == pytest.approx(pa[0, 1], abs=2e-3)
    # exact spectrum (six_pulse_spectrum: I_h = I1 / h, 6k - 1 in antiphase) as a
    # balanced set: the shifted copy cancels 5, 7, 17, 19 exactly and doubles 11, 13, 23, 25
    spec = six_pulse_spectrum(1.0, 25)
    h = np.arange(26)
    exact = np.zeros((3, 26), complex)
    for order, (rms, ang) in spec.items():
        exact[:, order] = rms * np.exp(1j * np.radians(ang - 120.0 * order * np.arange(3)))
    total = exact + transformer_shift(exact, h, 30.0, zero_sequence=False)
    for order in (5, 7, 17, 19):
        assert np.abs(total[:, order]) == pytest.approx([0, 0, 0], abs=1e-12)
    for order in (11, 13, 23, 25):
        assert np.abs(total[:, order]) == pytest.approx([2.0 / order] * 3, rel=1e-12)


def test_two_unit_site_phasor_sum_cancels_5_and_7(tmp_path):
    # Balanced units with I_h = I1 / h (ideal six-pulse, 6k - 1 orders in antiphase), one
    # behind a +30 deg transformer: phasor sum cancels 5 and 7, doubles 11 and 13.
    harm = {h: (100.0 / h, 180.0 if h % 6 == 5 else 0.0) for h in (5, 7, 11, 13, 17, 19)}
    (tmp_path / "unit.json").write_text(json.dumps(unit_results(harm)))
    text = SITE_BUS.format(summation="phasor", location="bus", count=1, demand_w=0, il="")
    text += ('\n[[units]]\nname = "Charger Dy"\nresults = "unit.json"\ncount = 1\n'
             'load_point = "100 %"\nphase_shift_deg = 30\n')
    (tmp_path / "site.toml").write_text(text)
    study = study_site(load_site(tmp_path / "site.toml"), headroom=False)
    for h in (5, 7, 17, 19):
        assert study.current_a[:, h] == pytest.approx([0, 0, 0], abs=1e-9)
    for h in (11, 13):
        assert study.current_a[:, h] == pytest.approx([200.0 / h] * 3, rel=1e-9)
    assert study.current_a[0, 1] == pytest.approx(200.0, rel=1e-12)
    # the general summation law does not use phases: no cancellation
    gen = study_site(load_site(tmp_path / "site.toml"), summation="general", headroom=False)
    assert gen.current_a[0, 5] == pytest.approx(2 ** (1 / 1.4) * 20.0, rel=1e-9)


def test_delta_winding_blocks_zero_sequence():
    # a balanced 3rd harmonic is zero sequence (all phases equal): a delta winding stops it;
    # a YNyn path passes it unchanged (symmetrical components)
    cur = np.zeros((3, 4), complex)
    cur[:, 3] = 5.0
    cur[:, 1] = np.exp(-1j * np.radians([0, 120, 240])) * 100
    blocked = transformer_shift(cur, np.arange(4), 30.0, zero_sequence=False)
    assert np.abs(blocked[:, 3]) == pytest.approx([0, 0, 0], abs=1e-12)
    np.testing.assert_allclose(transformer_shift(cur, np.arange(4), 0.0), cur)
    with pytest.raises(ValueError, match=r"must have shape \(\.\.\., 3, H \+ 1\)"):
        transformer_shift(np.ones((2, 4)), np.arange(4), 30.0)


def test_vector_groups():
    # IEC 60076-1 clock notation: low-voltage side lags by 30 deg per hour (common practice)
    assert vector_group_shift("Dyn11") == (30.0, False)
    assert vector_group_shift("Dyn1") == (-30.0, False)
    assert vector_group_shift("Dyn5") == (-150.0, False)
    assert vector_group_shift("Yd11") == (30.0, False)
    assert vector_group_shift("YNyn0") == (0.0, True)
    assert vector_group_shift("Dd6") == (180.0, False)
    with pytest.raises(ValueError, match="'Dyn13' is not a vector group"):
        vector_group_shift("Dyn13")


# ---------------------------------------------------------------------------------------------
# unit spectra from a real analysis
# ---------------------------------------------------------------------------------------------


def _three_phase_capture(fs=10_000.0, f0=50.0, dur=1.0):
    t = np.arange(int(fs * dur)) / fs
    cur, vol = {}, {}
    for k, ph in enumerate("abc"):
        d = -2 * np.pi * k / 3
        vol[f"v{ph}"] = 230 * np.sqrt(2) * np.cos(2 * np.pi * f0 * t + d)
        cur[f"i{ph}"] = (np.sqrt(2) * 50 * np.cos(2 * np.pi * f0 * t + d - 0.2)
                         + np.sqrt(2) * 5 * np.cos(5 * (2 * np.pi * f0 * t + d) + 1.0))
    return Capture.from_arrays(fs, currents=cur, voltages=vol)


def test_spectrum_from_analysis_keeps_phases_relative_to_va():
    # synthetic capture: I1 = 50 A at -0.2 rad, I5 = 5 A at +1.0 rad (phase a, cosine basis)
    res = analyze(_three_phase_capture(), nominal_hz=50, max_order=13)
    spec = spectrum_from_analysis(res)
    assert spec.phase_measured
    assert spec.current[0, 1] == pytest.approx(50 * np.exp(-0.2j), abs=1e-3)
    assert spec.current[0, 5] == pytest.approx(5 * np.exp(1.0j), abs=1e-3)
    # phase b of a balanced 5th is rotated by -5 x 120 deg
    assert spec.current[1, 5] == pytest.approx(5 * np.exp(1j * (1.0 - 5 * 2 * np.pi / 3)),
                                               abs=1e-3)


def test_single_channel_units(tmp_path):
    # one current channel: a three-phase unit measured on one phase becomes a balanced set;
    # a single-phase unit sits on one phase only
    res = unit_results({3: (10.0, 0.0)}, phases="a")
    p = write_site(tmp_path, results=res, extra='connection = "three-phase"\n')
    s3 = load_site(p)
    cur = s3.units[0].spectrum.current
    assert np.abs(cur[:, 3]) == pytest.approx([10, 10, 10])
    assert cur[1, 3] == pytest.approx(cur[0, 3])  # third harmonic: zero sequence
    p = write_site(tmp_path, results=res, extra='connection = "single-phase"\nphase = "b"\n',
                   name="s1.toml")
    s1 = load_site(p)
    assert np.abs(s1.units[0].spectrum.current[:, 3]) == pytest.approx([0, 10, 0])
    # on phase b its fundamental lags phase a's voltage by 120 deg
    assert np.angle(s1.units[0].spectrum.current[1, 1], deg=True) == pytest.approx(-120.0)


# ---------------------------------------------------------------------------------------------
# headroom
# ---------------------------------------------------------------------------------------------

# A site where the voltage limit binds: PCC on the 400 V bus, |Z_5| = |1.641913 + j 50.531027|
# mOhm = 50.557695 mOhm; each unit adds 10 A of 5th (arithmetic sum), i.e.
# 0.50557695 V = 0.2189212 % of 230.9401 V. IEEE 519 Table 1 (V <= 1 kV): 5 %, so 22 units
# pass and 23 give 5.035 %. IL is stated (10 kA) so the current limits (ISC/IL = 2.26 < 20:
# I5 <= 4 % of IL = 400 A) do not bind first.
HEADROOM_EXTRA = ""


def _headroom_site(tmp_path, count, summation="arithmetic"):
    res = unit_results({5: (10.0, 0.0)})
    return write_site(tmp_path, results=res, summation=summation, count=count,
                      il="il_a = 10000", name=f"site-{count}.toml")


def test_headroom_worked_example(tmp_path):
    study = study_site(load_site(_headroom_site(tmp_path, 3)), max_headroom=60)
    hr = study.headroom[0]
    assert study.verdict == "pass"
    assert hr.extra_units == 19  # 22 units in all (hand calculation above)
    assert hr.binding == "V5"
    assert hr.binding_value == pytest.approx(23 * 0.2189212, rel=1e-6)
    assert hr.binding_limit == 5.0
    assert not hr.already_exceeded
    # transformer rating: each unit draws 100 A -> sqrt(3) 400 100 = 69.28 kVA; 1000 kVA is
    # passed at 15 units (14 x 69.28 = 969.9 kVA, 15 x 69.28 = 1039.2 kVA): 11 more after 3
    assert hr.extra_units_rating == 11


def test_headroom_when_already_exceeded(tmp_path):
    study = study_site(load_site(_headroom_site(tmp_path, 30)), max_headroom=10)
    hr = study.headroom[0]
    assert study.verdict == "fail"
    assert hr.already_exceeded and hr.extra_units == 0 and hr.binding == "V5"
    # 22 units meet every limit (hand calculation above), 30 do not
    assert hr.passing_count == 22


@settings(max_examples=12, deadline=None)
@given(count=st.integers(0, 25), more=st.integers(1, 6),
       summation=st.sampled_from(["general", "arithmetic"]))
def test_headroom_monotonic_in_the_number_of_units(tmp_path_factory, count, more, summation):
    # Property: with m more units installed, the headroom drops by exactly m (the first
    # exceeded count does not move), and it never grows with the number of units.
    tmp = tmp_path_factory.mktemp("hr")
    res = unit_results({5: (10.0, 0.0), 7: (6.0, 0.0), 11: (4.0, 0.0)})
    h0 = _hr(tmp, res, count, summation)
    h1 = _hr(tmp, res, count + more, summation)
    assert h1 <= h0
    if h0 >= more:
        assert h1 == h0 - more


def _hr(tmp, res, count, summation):
    p = write_site(tmp, results=res, summation=summation, count=count, il="il_a = 10000",
                   name=f"h{count}.toml", demand_w=50e3)
    study = study_site(load_site(p), max_headroom=400)
    hr = study.headroom[0]
    assert hr.extra_units is not None
    return hr.extra_units


# ---------------------------------------------------------------------------------------------
# verdicts and data quality
# ---------------------------------------------------------------------------------------------


def test_unresolved_orders_make_the_study_inconclusive(tmp_path):
    res = unit_results({5: (1.0, 0.0)}, max_order=40)
    study = study_site(load_site(write_site(tmp_path, results=res, il="il_a = 10000")),
                       headroom=False)
    assert study.resolved_order == 40
    assert study.check("I45").verdict == "inconclusive"
    assert study.check("I5").verdict == "pass"
    assert study.verdict == "inconclusive"
    assert any(f.code == "orders-not-resolved" for f in study.findings)


def test_error_finding_of_a_unit_makes_checks_inconclusive(tmp_path):
    bad = {"code": "clipping", "severity": "error", "message": "flat tops on ia",
           "channels": ["ia"]}
    res = unit_results({5: (1.0, 0.0)}, findings=[bad])
    study = study_site(load_site(write_site(tmp_path, results=res, il="il_a = 10000")),
                       headroom=False)
    assert study.verdict == "inconclusive"
    assert any("unit 'Charger': flat tops" in f.message for f in study.findings)


def test_study_errors(tmp_path):
    res = unit_results({5: (1.0, 0.0)}, voltage=False)
    site = load_site(write_site(tmp_path, results=res))
    with pytest.raises(PlanError, match="the phasor sum needs phase angles relative to the "
                                        "supply voltage, but the data of unit 'Charger'"):
        study_site(site, summation="phasor")
    with pytest.raises(PlanError, match="summation must be one of general, arithmetic, phasor"):
        study_site(site, summation="mean")
    p = write_site(tmp_path, count=0, name="zero.toml")
    with pytest.raises(PlanError, match="the site draws no fundamental current"):
        study_site(load_site(p))


def test_site_document_is_json(tmp_path):
    study = study_site(load_site(write_site(tmp_path)), max_headroom=5)
    d = json.loads(json.dumps(site_document(study), allow_nan=False))
    assert d["verdict"] == study.verdict
    assert d["pcc"]["isc_a"] == pytest.approx(study.isc_a)
    assert d["harmonics"][4]["order"] == 5
    assert any("utility's own study governs" in c for c in d["cautions"])


# ---------------------------------------------------------------------------------------------
# site file errors (every message pinned)
# ---------------------------------------------------------------------------------------------

BASE = SITE_BUS.format(summation="general", location="bus", count=1, demand_w=0, il="")


def _err(tmp_path, text, match, *, results=None):
    if results is None:
        results = unit_results({5: (1.0, 0.0)})
    (tmp_path / "unit.json").write_text(json.dumps(results)
                                        if isinstance(results, dict) else results)
    (tmp_path / "site.toml").write_text(text)
    with pytest.raises(PlanError, match=match) as exc:
        load_site(tmp_path / "site.toml")
    return exc.value


def _sub(old, new):
    assert old in BASE
    return BASE.replace(old, new)


SITE_ERRORS = [
    ("toml", BASE + "\n[[units]\n", r"site.toml:\d+: not valid TOML"),
    ("unknown-top", "colour = 1\n" + BASE, r"site.toml:1: colour: unknown field 'colour' "
                                            r"\(allowed: limits, name, nominal_frequency_hz"),
    ("schema", "schema = 2\n" + BASE, "this pqcheck reads site schema 1, got 2"),
    ("frequency", _sub("nominal_frequency_hz = 50", "nominal_frequency_hz = 55"),
     "nominal_frequency_hz: must be 50 or 60, got 55"),
    ("summation", _sub('summation = "general"', 'summation = "rms"'),
     "summation: must be \"general\", \"arithmetic\" or \"phasor\", got 'rms'"),
    ("no-supply", _sub("[supply]\nnominal_voltage_v = 11000\nssc_va = 250e6\nx_over_r = 10\n",
                       ""), r"missing table \[supply\]"),
    ("supply-type", _sub("[supply]\nnominal_voltage_v = 11000\nssc_va = 250e6\n"
                         "x_over_r = 10\n", "supply = 3\n"),
     "supply: must be a table, got the number 3"),
    ("no-voltage", _sub("nominal_voltage_v = 11000\n", ""),
     "supply: missing field 'nominal_voltage_v': the supply's nominal line-to-line voltage"),
    ("voltage-text", _sub("nominal_voltage_v = 11000", 'nominal_voltage_v = "11kV"'),
     "supply.nominal_voltage_v: must be a number, got the text '11kV'"),
    ("ssc-negative", _sub("ssc_va = 250e6", "ssc_va = -1"),
     "supply.ssc_va: must be greater than zero, got -1"),
    ("both-levels", _sub("ssc_va = 250e6", "ssc_va = 250e6\nisc_a = 13000"),
     "supply.isc_a: give the fault level once: ssc_va or isc_a, not both"),
    ("no-level", _sub("ssc_va = 250e6\n", ""), "supply: missing field 'ssc_va' or 'isc_a'"),
    ("no-xr", _sub("ssc_va = 250e6\nx_over_r = 10\n", "ssc_va = 250e6\n"),
     "supply: missing field 'x_over_r'"),
    ("tx-rating", _sub("rating_va = 1000e3\n", ""),
     "transformer: missing field 'rating_va': rated apparent power"),
    ("tx-secondary", _sub("secondary_v = 400\n", ""),
     "transformer: missing field 'secondary_v'"),
    ("tx-z", _sub("impedance_percent = 6\n", ""),
     "transformer: missing field 'impedance_percent'"),
    ("tx-xr", _sub("impedance_percent = 6\nx_over_r = 6\n", "impedance_percent = 6\n"),
     "transformer: missing field 'x_over_r'"),
    ("tx-primary", _sub("rating_va = 1000e3", "rating_va = 1000e3\nprimary_v = 20000"),
     "transformer.primary_v: 20000 V does not match supply.nominal_voltage_v = 11000 V"),
    ("tx-z-high", _sub("impedance_percent = 6", "impedance_percent = 150"),
     r"transformer.impedance_percent: must be from 0.1 to 50 % \(a short-circuit impedance "
     r"on the transformer's own rating\), got 150"),
    ("tx-group", _sub('vector_group = "Dyn11"', 'vector_group = "Dxx"'),
     "transformer.vector_group: 'Dxx' is not a vector group"),
    ("pcc-location", _sub('location = "bus"', 'location = "middle"'),
     "pcc.location: must be \"supply\" .* got 'middle'"),
    ("pcc-missing", _sub('location = "bus"', ""),
     r"pcc: missing field 'location' in \[pcc\]: with a site transformer"),
    ("il-zero", _sub('location = "bus"', 'location = "bus"\nil_a = 0'),
     "pcc.il_a: must be greater than zero, got 0"),
    ("other-negative", _sub("demand_w = 0", "demand_w = -5"),
     r"other_load.demand_w: must be from 0 to 1e\+10 W \(a maximum demand\), got -5"),
    ("pf-high", _sub("power_factor = 0.8", "power_factor = 1.2"),
     "other_load.power_factor: must be from 0.01 to 1 "),
    ("limits-empty", BASE + '\n[limits]\ntable = " "\n', "limits.table: must not be empty"),
    ("limits-missing", BASE + '\n[limits]\ntable = "mine.toml"\n',
     "limits.table: limit table 'mine.toml' not found"),
    ("limits-unknown", BASE + '\n[limits]\ntable = "ieee9999"\n',
     "limits.table: cannot use limit table 'ieee9999': .*unknown limit table"),
    ("limits-kind", BASE + '\n[limits]\ntable = "iec61000-3-2"\n',
     r"limits.table: table iec61000-3-2 has no limits in % of IL"),
    ("generation-text", BASE + '\n[limits]\ngeneration = "yes"\n',
     "limits.generation: must be true or false, got the text 'yes'"),
    ("name-number", "name = 3\n" + BASE.replace('name = "Test depot"\n', ""),
     "name: must be text in quotes, got the number 3"),
    ("no-units", BASE.split("[[units]]")[0], r"missing \[\[units\]\] entries: the site lists "
                                             "no unit"),
    ("units-scalar", BASE.split("[[units]]")[0].replace("[supply]", "units = 3\n[supply]"),
     "units: must be an array of tables"),
    ("unit-name", _sub('name = "Charger"\n', ""), r"units\[1\]: missing field 'name'"),
    ("unit-count", _sub("count = 1\n", ""), r"units\[1\]: missing field 'count'"),
    ("unit-count-float", _sub("count = 1", "count = 1.5"),
     r"units\[1\].count: must be a whole number, got the number 1.5"),
    ("unit-count-negative", _sub("count = 1", "count = -2"),
     r"units\[1\].count: must be from 0 to 10000 \(units of one kind on one site\), got -2"),
    ("unit-load-point", _sub('load_point = "100 %"\n', ""),
     r"units\[1\]: missing field 'load_point': the operating point"),
    ("unit-load-point-type", _sub('load_point = "100 %"', "load_point = true"),
     r"units\[1\].load_point: must be text such as \"100 %\""),
    ("unit-shift", BASE + "phase_shift_deg = 400\n",
     r"units\[1\].phase_shift_deg: must be from -180 to 180 degrees \(a phase shift\), got 400"),
    ("unit-connection", BASE + 'connection = "delta"\n',
     r"units\[1\].connection: must be \"three-phase\" or \"single-phase\", got 'delta'"),
    ("unit-phase", BASE + 'connection = "single-phase"\nphase = "x"\n',
     r"units\[1\].phase: must be \"a\", \"b\" or \"c\", got 'x'"),
    ("unit-phase-3ph", BASE + 'phase = "a"\n',
     r"units\[1\].phase: phase is for single-phase units"),
    ("unit-both", BASE + 'capture = "x.csv"\n',
     r"units\[1\]: give exactly one of 'capture' .* and 'results'"),
    ("unit-neither", _sub('results = "unit.json"\n', ""),
     r"units\[1\]: give exactly one of 'capture'"),
    ("unit-capture-option", BASE + 'current = ["ia"]\n',
     r"units\[1\].current: current is a capture option; it has no effect with results"),
    ("unit-list", BASE.replace('results = "unit.json"', 'capture = "x.csv"') + "current = [1]\n",
     r"units\[1\].current: must be a list of non-empty text"),
    ("unit-file", _sub('results = "unit.json"', 'results = "nope.json"'),
     r"units\[1\].results: file 'nope.json' not found \(resolved against the site file's"),
    ("unit-unknown-field", BASE + "colour = 1\n",
     r"units\[1\].colour: unknown field 'colour' \(allowed: capture, connection, count"),
    ("unit-duplicate", BASE + '\n[[units]]\nname = "Charger"\nresults = "unit.json"\ncount = 1\n'
                              'load_point = "1"\n',
     r"units\[2\].name: unit name 'Charger' is used twice"),
]


@pytest.mark.parametrize("text,match", [c[1:] for c in SITE_ERRORS],
                         ids=[c[0] for c in SITE_ERRORS])
def test_site_file_errors(tmp_path, text, match):
    _err(tmp_path, text, match)


def test_site_file_error_names_the_line(tmp_path):
    # count = -2 stands on line 29 of the file: file:line: field: problem
    text = _sub("count = 1", "count = -2")
    line = text.splitlines().index("count = -2") + 1
    exc = _err(tmp_path, text, "must be from 0 to 10000")
    assert exc.line == line
    assert str(exc).startswith(f"{tmp_path / 'site.toml'}:{line}: units[1].count: ")


RESULTS_ERRORS = [
    ("not-json", "{nope", r"units\[1\].results: unit.json: not JSON results"),
    ("no-channels", json.dumps({"settings": {}}),
     "not pqcheck analysis results: no 'channels' list"),
    ("channel-type", json.dumps({"channels": [3]}), r"channels\[1\] is not a table"),
    ("no-harmonics", json.dumps({"channels": [{"name": "ia", "quantity": "current"}]}),
     r"channels\[1\] has no 'harmonics' list"),
    ("order-type", json.dumps({"channels": [{"quantity": "current", "harmonics": [
        {"order": 1, "rms": 1.0}, {"order": "5", "rms": 1.0}]}]}),
     r"channels\[1\].harmonics\[2\] needs a whole-number 'order'"),
    ("rms-negative", json.dumps({"channels": [{"quantity": "current", "harmonics": [
        {"order": 1, "rms": -1.0}]}]}),
     r"channels\[1\].harmonics\[1\].rms must be a non-negative number, got -1.0"),
    ("bad-phase", json.dumps({"channels": [{"quantity": "current", "phase": "x",
                                            "harmonics": []}]}),
     r"channels\[1\].phase must be a, b, c, n or empty, got 'x'"),
    ("no-current", json.dumps({"channels": [{"quantity": "voltage", "harmonics": [
        {"order": 1, "rms": 230.0}]}]}), "the results hold no current channel"),
    ("two-phases", json.dumps(unit_results({}, phases="ab")),
     r"the results hold currents of phases \['a', 'b'\]; give all three phases"),
    ("one-channel", json.dumps(unit_results({}, phases="a")),
     r"the results hold one current channel \('ia'\); say whether the unit is a three-phase"),
]


@pytest.mark.parametrize("results,match", [c[1:] for c in RESULTS_ERRORS],
                         ids=[c[0] for c in RESULTS_ERRORS])
def test_results_file_errors(tmp_path, results, match):
    _err(tmp_path, BASE, match, results=results)


def test_single_phase_connection_with_three_phases(tmp_path):
    _err(tmp_path, BASE + 'connection = "single-phase"\n',
         "connection = \"single-phase\" but the results hold currents of phases a, b and c")


def test_frequency_errors(tmp_path):
    no_f = BASE.replace("nominal_frequency_hz = 50\n", "")
    _err(tmp_path, _sub("nominal_frequency_hz = 50", "nominal_frequency_hz = 60"),
         r"units\[1\]: the data of unit 'Charger' are for 50 Hz but the site is 60 Hz")
    _err(tmp_path, no_f, "missing field 'nominal_frequency_hz' \\(50 or 60\\): the units' data "
                         "do not say it", results=json.dumps(
                             {**unit_results({}), "settings": {"reference": "va"}}))
    two = no_f + ('\n[[units]]\nname = "B"\nresults = "b.json"\ncount = 1\n'
                  'load_point = "1"\n')
    (tmp_path / "b.json").write_text(json.dumps(unit_results({}, nominal_hz=60.0)))
    _err(tmp_path, two, r"the units' data have different nominal frequencies \(50, 60 Hz\)")


def test_phasor_summation_needs_a_voltage_reference(tmp_path):
    _err(tmp_path, _sub('summation = "general"', 'summation = "phasor"'),
         r"units\[1\]: summation = \"phasor\" needs phase angles relative to the supply "
         "voltage", results=unit_results({}, voltage=False))


def test_unreadable_site_files(tmp_path):
    with pytest.raises(PlanError, match="site file not found"):
        load_site(tmp_path / "none.toml")
    with pytest.raises(PlanError, match="is a folder, not a site file"):
        load_site(tmp_path)
    (tmp_path / "bin.toml").write_bytes(b'name = "\xff"\n')
    with pytest.raises(PlanError, match=r"bin.toml:1: not UTF-8 text \(byte 8\)"):
        load_site(tmp_path / "bin.toml")


def test_relative_paths_resolve_against_the_site_folder(tmp_path, monkeypatch):
    sub = tmp_path / "project"
    sub.mkdir()
    p = write_site(sub)
    monkeypatch.chdir(tmp_path)
    site = load_site("project/site.toml")
    assert site.units[0].spectrum.source == str(sub.resolve() / "unit.json")
    assert p.exists()


# ---------------------------------------------------------------------------------------------
# template and command line
# ---------------------------------------------------------------------------------------------


def _csv_capture(path):
    """A 1 s three-phase CSV (10 kHz) with I1 = 50 A and a 5 % fifth harmonic."""
    cap = _three_phase_capture()
    t = np.arange(cap.n_samples) / cap.fs_hz
    cols = ["time"] + [c.name for c in cap.channels]
    data = np.column_stack([t] + [cap.samples[k] for k in range(len(cap.channels))])
    np.savetxt(path, data, delimiter=",", header=",".join(cols), comments="", fmt="%.7g")


def test_template_runs_end_to_end(tmp_path):
    runner = CliRunner()
    target = tmp_path / "site.toml"
    out = runner.invoke(main, ["site", "new", str(target)])
    assert out.exit_code == 0, out.output
    assert target.read_text() == site_template()
    again = runner.invoke(main, ["site", "new", str(target)])
    assert again.exit_code == 2 and "file exists" in again.output
    _csv_capture(tmp_path / "charger-150kw.csv")
    (tmp_path / "charger-22kw.json").write_text(json.dumps(unit_results({5: (1.0, 0.0)},
                                                                       fund_a=32.0)))
    site = load_site(target)
    assert [u.count for u in site.units] == [4, 2]
    assert site.units[0].spectrum.phase_measured
    res = runner.invoke(main, ["site", str(target), "--format", "json"])
    assert res.exit_code in (0, 1), res.output
    d = json.loads(res.output)
    assert d["verdict"] in ("pass", "fail")
    assert res.exit_code == {"pass": 0, "fail": 1}[d["verdict"]]


def test_cli_exit_codes_and_outputs(tmp_path):
    runner = CliRunner()
    # pass: small 5th, strong supply, IL stated
    ok = write_site(tmp_path, results=unit_results({5: (1.0, 0.0)}), il="il_a = 10000",
                    name="ok.toml")
    r = runner.invoke(main, ["site", str(ok)])
    assert r.exit_code == 0, r.output
    assert "Verdict     PASS" in r.output and "utility's own study governs" in r.output
    # fail: the worked example above exceeds I5 (20 % > 15 %)
    bad = write_site(tmp_path, location="supply", name="bad.toml")
    r = runner.invoke(main, ["site", str(bad)])
    assert r.exit_code == 1 and "FAIL" in r.output
    # inconclusive: orders above 40 not resolved
    part = tmp_path / "part"
    part.mkdir()
    inc = write_site(part, results=unit_results({5: (1.0, 0.0)}, max_order=40),
                     il="il_a = 10000")
    assert runner.invoke(main, ["site", str(inc)]).exit_code == 3
    # bad input: file:line: field: problem on stderr, exit 2
    r = runner.invoke(main, ["site", str(tmp_path / "nope.toml")])
    assert r.exit_code == 2 and "site file not found" in r.output


def test_cli_pdf(tmp_path):
    pypdf = pytest.importorskip("pypdf")
    runner = CliRunner()
    site = write_site(tmp_path, il="il_a = 10000")
    pdf = tmp_path / "site.pdf"
    r = runner.invoke(main, ["site", str(site), "-o", str(pdf)])
    assert r.exit_code in (0, 1), r.output
    text = "".join(p.extract_text() for p in pypdf.PdfReader(pdf).pages)
    assert "Site interconnection study" in text
    assert "estimate for planning" in text.lower()
    assert "utility's own study governs" in text
    assert "qualified" in text.lower() and "local electrical codes" in text.lower()
    before = pdf.read_bytes()
    r = runner.invoke(main, ["site", str(site), "-o", str(pdf)])
    assert r.exit_code == 2 and "file exists" in r.output
    assert pdf.read_bytes() == before
    r = runner.invoke(main, ["site", str(site), "-o", str(pdf), "--force", "--format", "json"])
    assert r.exit_code in (0, 1)
    assert json.loads(r.output)["site"]["name"] == "Test depot"


def test_headroom_agrees_with_full_studies_at_the_edge(tmp_path):
    # The headroom search and the study's checks are one evaluation: a full study of the site
    # with count + extra units has no failing check, and with one unit more the limit the
    # search named binding fails with the value it reported (property of the definition of
    # headroom; checked through the public API for every summation method).
    res = unit_results({5: (10.0, 30.0), 7: (7.0, -20.0), 13: (3.0, 0.0)})
    for summation in ("general", "arithmetic", "phasor"):
        p = write_site(tmp_path, results=res, summation=summation, demand_w=80e3, count=2,
                       name=f"{summation}.toml")
        hr = study_site(load_site(p), max_headroom=200).headroom[0]
        assert hr.extra_units is not None and hr.extra_units > 0, summation
        edge = write_site(tmp_path, results=res, summation=summation, demand_w=80e3,
                          count=2 + hr.extra_units, name=f"{summation}-edge.toml")
        at = study_site(load_site(edge), headroom=False)
        assert not any(c.verdict == "fail" for c in at.checks), summation
        over = write_site(tmp_path, results=res, summation=summation, demand_w=80e3,
                          count=3 + hr.extra_units, name=f"{summation}-over.toml")
        beyond = study_site(load_site(over), headroom=False)
        assert beyond.verdict == "fail"
        assert beyond.check(hr.binding).verdict == "fail"
        assert beyond.check(hr.binding).measured == pytest.approx(hr.binding_value, rel=1e-12)


def test_site_transformer_delta_stops_triplen_currents(tmp_path):
    # balanced 3rd harmonic = zero sequence: a Dyn11 transformer between the bus and a PCC on
    # its primary stops it; a YNyn0 transformer passes it, referred by 400 / 11000
    res = unit_results({3: (10.0, 0.0), 5: (10.0, 0.0)})
    study = study_site(load_site(write_site(tmp_path, results=res, location="supply")),
                       headroom=False)
    assert study.current_a[:, 3] == pytest.approx([0, 0, 0], abs=1e-9)
    assert study.current_a[0, 5] == pytest.approx(10 * 400 / 11000, rel=1e-9)
    assert any(f.code == "zero-sequence-blocked" and 3 in f.orders for f in study.findings)
    text = SITE_BUS.format(summation="general", location="supply", count=1, demand_w=0, il="")
    p = write_site(tmp_path, results=res, name="yn.toml",
                   text=text.replace('"Dyn11"', '"YNyn0"'))
    study = study_site(load_site(p), headroom=False)
    assert study.current_a[0, 3] == pytest.approx(10 * 400 / 11000, rel=1e-9)
    assert not any(f.code == "zero-sequence-blocked" for f in study.findings)


def _report_results():
    # the shape `pqcheck report PLAN --json` writes: captures with id, load point, analysis
    half = unit_results({5: (20.0, 0.0)}, fund_a=50.0)
    full = unit_results({5: (25.0, 0.0)}, fund_a=100.0)
    return {"captures": [
        {"id": "half", "load_point": "50 %", "analysis": half},
        {"id": "full", "load_point": "100 %", "analysis": full},
        {"id": "full-2", "load_point": "100 %", "analysis": full},
    ]}


def test_report_results_select_the_load_point(tmp_path):
    p = write_site(tmp_path, results=_report_results(), text=_sub('"100 %"', '"50 %"'))
    assert abs(load_site(p).units[0].spectrum.current[0, 1]) == pytest.approx(50.0)
    p = write_site(tmp_path, results=_report_results(), text=_sub('"100 %"', '"full-2"'),
                   name="id.toml")
    assert abs(load_site(p).units[0].spectrum.current[0, 5]) == pytest.approx(25.0)


def test_report_results_errors(tmp_path):
    _err(tmp_path, BASE, r"units\[1\].results: unit.json: several captures have load point "
                         r"'100 %'; set load_point to the capture id instead",
         results=_report_results())
    _err(tmp_path, _sub('"100 %"', '"75 %"'),
         r"no capture with load point or id '75 %'; the results hold '50 %' \(id 'half'\)",
         results=_report_results())


def test_capture_units_report_reader_and_channel_errors(tmp_path):
    from pqcheck.errors import CaptureFormatError

    text = BASE.replace('results = "unit.json"', 'capture = "unit.csv"')
    (tmp_path / "unit.csv").write_text("garbage\n")
    (tmp_path / "site.toml").write_text(text)
    with pytest.raises(CaptureFormatError, match=r"unit.csv"):
        load_site(tmp_path / "site.toml")
    # one current channel and no connection: the site file names the unit's capture field
    t = np.arange(10_000) / 10_000.0
    i = 10 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t)
    v = 230 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t)
    np.savetxt(tmp_path / "unit.csv", np.column_stack([t, i, v]), delimiter=",",
               header="time,i,v", comments="", fmt="%.9g")
    with pytest.raises(PlanError, match=r"units\[1\].capture: unit.csv: the capture holds one "
                                        r"current channel \('i'\)"):
        load_site(tmp_path / "site.toml")


# ---------------------------------------------------------------------------------------------
# verdict under each summation method
# ---------------------------------------------------------------------------------------------


def test_verdict_depends_on_the_summation_method(tmp_path):
    # Two ideal six-pulse units (I_h = I1 / h, I1 = 100 A), one behind a +30 deg transformer,
    # on the 400 V bus (ISC 22555.58 A, worked out above) with IL stated as 300 A:
    # ISC/IL = 75.19 -> IEEE 519-2022 Table 2 row 50 < 100 (standards notes 1.3, tag V):
    # h < 11: 10.0 %, 11 <= h < 17: 4.5 %, 17 <= h < 23: 4.0 %, TDD 12.0 %.
    # arithmetic: I5 = 40 A = 13.33 %, I11 = 6.06 %, I13 = 5.13 % fail, I17 3.92 % passes;
    #   TDD = sqrt(13.33^2 + 9.52^2 + 6.06^2 + 5.13^2 + 3.92^2 + 3.51^2) = 18.95 % fails.
    # phasor: 5, 7, 17, 19 cancel (twelve-pulse), 11 and 13 add: I11, I13 fail, TDD 7.94 %.
    # general (IEC TR 61000-3-6): I5 = 2^(1/1.4) 20 A = 10.94 % fails, I11 = sqrt(2) 9.09 A
    #   = 4.29 % passes, TDD = 15.04 % fails.
    harm = {h: (100.0 / h, 180.0 if h % 6 == 5 else 0.0) for h in (5, 7, 11, 13, 17, 19)}
    (tmp_path / "unit.json").write_text(json.dumps(unit_results(harm)))
    text = SITE_BUS.format(summation="general", location="bus", count=1, demand_w=0,
                           il="il_a = 300")
    text += ('\n[[units]]\nname = "Charger Dy"\nresults = "unit.json"\ncount = 1\n'
             'load_point = "100 %"\nphase_shift_deg = 30\n')
    (tmp_path / "site.toml").write_text(text)
    study = study_site(load_site(tmp_path / "site.toml"), headroom=False)
    assert study.isc_il == pytest.approx(22555.58 / 300, rel=1e-6)
    assert study.outcome("arithmetic").failing == ("I5", "I11", "I13", "TDD")
    assert study.outcome("phasor").failing == ("I11", "I13")
    assert study.outcome("general").failing == ("I5", "TDD")
    assert [o.verdict for o in study.by_summation] == ["fail", "fail", "fail"]
    assert study.check("TDD").measured == pytest.approx(15.04, abs=0.01)
    # each outcome is what a study with that summation gives
    for o in study.by_summation:
        other = study_site(load_site(tmp_path / "site.toml"), summation=o.summation,
                           headroom=False)
        assert tuple(c.label for c in other.checks if c.verdict == "fail") == o.failing
    d = site_document(study)
    assert {x["summation"]: x["failing"] for x in d["by_summation"]} == {
        "general": ["I5", "TDD"], "arithmetic": ["I5", "I11", "I13", "TDD"],
        "phasor": ["I11", "I13"]}


def test_phasor_outcome_needs_measured_phases(tmp_path):
    res = unit_results({5: (1.0, 0.0)}, voltage=False)
    study = study_site(load_site(write_site(tmp_path, results=res, il="il_a = 10000")),
                       headroom=False)
    phasor = study.outcome("phasor")
    assert phasor.verdict == "" and "phase angles measured against a voltage" in phasor.note
    assert study.outcome("general").verdict == "pass"


# ---------------------------------------------------------------------------------------------
# physical ranges of the site file's numbers
# ---------------------------------------------------------------------------------------------


def test_unit_count_of_a_billion_is_refused_with_field_and_line(tmp_path):
    text = _sub("count = 1", "count = 1000000000")
    line = text.splitlines().index("count = 1000000000") + 1
    exc = _err(tmp_path, text, r"units\[1\].count: must be from 0 to 10000 \(units of one "
                               r"kind on one site\), got 1e\+09")
    assert exc.line == line


_RANGE_CASES = [
    # (text to replace in BASE, replacement, field in the message); each value is far outside
    # any installation (common practice: LV/MV/HV voltages up to 1.2 MV, X/R 0.1 to 100)
    ("nominal_voltage_v = 11000", "nominal_voltage_v = 11e9", "supply.nominal_voltage_v"),
    ("ssc_va = 250e6", "ssc_va = 250e15", "supply.ssc_va"),
    ("x_over_r = 10", "x_over_r = 1e6", "supply.x_over_r"),
    ("rating_va = 1000e3", "rating_va = 1e15", "transformer.rating_va"),
    ("secondary_v = 400", "secondary_v = 4e7", "transformer.secondary_v"),
    ("x_over_r = 6", "x_over_r = 0.001", "transformer.x_over_r"),
    ('location = "bus"', 'location = "bus"\nil_a = 1e12', "pcc.il_a"),
    ("demand_w = 0", "demand_w = 1e15", "other_load.demand_w"),
    ("power_factor = 0.8", "power_factor = 0.0001", "other_load.power_factor"),
]


@pytest.mark.parametrize("old,new,field", _RANGE_CASES, ids=[c[2] for c in _RANGE_CASES])
def test_numbers_outside_their_physical_range(tmp_path, old, new, field):
    text = _sub(old, new)
    line = next(k for k, t in enumerate(text.splitlines(), 1) if t == new.splitlines()[-1])
    exc = _err(tmp_path, text, rf"site.toml:{line}: {re.escape(field)}: must be from \S+ to "
                               r"\S+.* got ")
    assert exc.line == line


def test_isc_out_of_range(tmp_path):
    text = _sub("ssc_va = 250e6", "isc_a = 5e9")
    _err(tmp_path, text, r"supply.isc_a: must be from 1 to 1e\+06 A \(a three-phase "
                         r"short-circuit current\), got 5e\+09")


def test_max_headroom_is_bounded(tmp_path):
    site = load_site(write_site(tmp_path))
    with pytest.raises(PlanError, match="max_headroom must be a whole number from 1 to 1000, "
                                        "got 1000000000"):
        study_site(site, max_headroom=10**9)


# ---------------------------------------------------------------------------------------------
# command line: check lines, options, inputs never overwritten
# ---------------------------------------------------------------------------------------------


def test_cli_prints_the_relation_that_holds(tmp_path):
    # the worked example on the supply side: I5 = 20 % of IL against 15 % (IEEE 519-2022
    # Table 2, ISC/IL >= 1000; standards notes 1.3, tag V) fails; THD(V) passes
    bad = write_site(tmp_path, location="supply")
    r = CliRunner().invoke(main, ["site", str(bad)])
    assert r.exit_code == 1, r.output
    # numbers as pqcheck.numfmt writes a check: the decimals that show the smallest limit of
    # its group (currents: 1.4 % for orders 35-50, voltages: 3.0 %) with 3 digits
    assert re.search(r"FAIL\s+I5\s+20\.00 % of IL\s+> limit 15\.00 %", r.output), r.output
    assert re.search(r"PASS\s+THD\(V\)\s+0\.03 % of nominal\s+<= limit 5\.00 %", r.output)
    for line in r.output.splitlines():
        if line.strip().startswith("FAIL") and "limit" in line:
            assert "<=" not in line, line
    assert "Verdict by summation method" in r.output


def _sha(path) -> str:
    import hashlib

    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_cli_never_overwrites_an_input(tmp_path):
    runner = CliRunner()
    site = write_site(tmp_path, il="il_a = 10000")
    unit = tmp_path / "unit.json"
    before = {p: _sha(p) for p in (site, unit)}
    for args, what in (
            (["-o", str(site), "--force"], "the site file"),
            (["--json", str(site), "--force"], "the site file"),
            (["-o", str(unit), "--force"], "the unit results of 'Charger'"),
            (["--json", str(tmp_path / "." / "unit.json"), "--force"],
             "the unit results of 'Charger'")):
        r = runner.invoke(main, ["site", str(site)] + args)
        assert r.exit_code == 2, r.output
        assert f"is {what}, an input of the study; it is never overwritten" in r.output
    assert {p: _sha(p) for p in (site, unit)} == before
    r = runner.invoke(main, ["site", str(site), "-o", str(tmp_path / "a.pdf"), "--json",
                             str(tmp_path / "a.pdf")])
    assert r.exit_code == 2 and "--json and -o name the same file" in r.output
    assert sorted(p.name for p in tmp_path.iterdir()) == ["site.toml", "unit.json"]


def test_cli_never_overwrites_a_units_capture(tmp_path):
    # a unit given as a capture (synthesised here: 230 V, 10 A fundamental with a 2 A fifth)
    t = np.arange(20_000) / 10_000.0
    cols = [t]
    for k in range(3):
        sh = -2 * np.pi * k / 3
        cols.append(230 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t + sh))
    for k in range(3):
        sh = -2 * np.pi * k / 3
        cols.append(10 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t + sh)
                    + 2 * np.sqrt(2) * np.cos(5 * (2 * np.pi * 50 * t + sh)))
    cap = tmp_path / "unit.csv"
    np.savetxt(cap, np.column_stack(cols), delimiter=",", header="time,va,vb,vc,ia,ib,ic",
               comments="", fmt="%.9g")
    (tmp_path / "site.toml").write_text(
        BASE.replace('results = "unit.json"', 'capture = "unit.csv"'))
    before = _sha(cap)
    r = CliRunner().invoke(main, ["site", str(tmp_path / "site.toml"), "-o", str(cap),
                                  "--force"])
    assert r.exit_code == 2, r.output
    assert "is the unit capture of 'Charger', an input of the study" in r.output
    assert _sha(cap) == before


def test_cli_json_operator_title_and_report_id(tmp_path):
    site = write_site(tmp_path, il="il_a = 10000")
    out = tmp_path / "study.json"
    r = CliRunner().invoke(main, ["site", str(site), "--json", str(out), "--operator",
                                  "R. Meyer", "--title", "Depot study", "--report-id",
                                  "SITE-7"])
    assert r.exit_code == 0, r.output
    d = json.loads(out.read_text())
    assert d["report"]["operator"] == "R. Meyer" and d["report"]["title"] == "Depot study"
    assert d["report"]["id"] == "SITE-7"
    # every input with the SHA-256 of its bytes (hashlib as the reference)
    shas = {(i["what"], i["path"]): i["sha256"] for i in d["inputs"]}
    assert shas[("site file", "site.toml")] == _sha(site)
    assert shas[("unit results", "unit.json")] == _sha(tmp_path / "unit.json")
    assert any(w == "limit table" and len(s) == 64 for (w, _), s in shas.items())


# ---------------------------------------------------------------------------------------------
# site PDF: traceability and chart
# ---------------------------------------------------------------------------------------------


def test_site_pdf_traceability(tmp_path):
    pypdf = pytest.importorskip("pypdf")
    site = write_site(tmp_path, location="supply")
    pdf, js = tmp_path / "site.pdf", tmp_path / "site.json"
    r = CliRunner().invoke(main, ["site", str(site), "-o", str(pdf), "--json", str(js),
                                  "--operator", "R. Meyer", "--report-id", "SITE-42"])
    assert r.exit_code == 1, r.output
    reader = pypdf.PdfReader(pdf)
    pages = [p.extract_text() for p in reader.pages]
    n = len(pages)
    for k, text in enumerate(pages, start=1):
        assert f"Page {k} of {n}" in text and "SITE-42" in text
    text = "\n".join(pages)
    # SHA-256 of every input, unbroken (hashlib as the reference), and of the attachment
    for p in (site, tmp_path / "unit.json"):
        assert _sha(p) in text
    table_sha = json.loads(js.read_text())["limits"]["sha256"]
    assert table_sha in text
    attached = reader.attachments["results.json"][0]
    assert attached == js.read_bytes()
    import hashlib

    assert hashlib.sha256(attached).hexdigest() in text
    assert "Date of study" in text and "R. Meyer" in text
    assert "Sign-off" in text and "Prepared by" in text and "Approved by" in text
    assert "qualified" in text.lower() and "utility's own study governs" in text
    assert "How the verdict depends on the summation method" in text
    pikepdf = pytest.importorskip("pikepdf")
    with pikepdf.open(pdf) as doc:  # archival like every pqcheck PDF (ISO 19005-3, level B)
        meta = doc.open_metadata()
        assert meta.get("pdfaid:part") == "3" and meta.get("pdfaid:conformance") == "B"
        assert "/OutputIntents" in doc.Root


def test_site_chart_marks_the_failing_order_above_an_uncovered_plot(tmp_path):
    from pqcheck.report.figures import plot_spectrum
    from pqcheck.report.site_pdf import site_spectrum_data

    study = study_site(load_site(write_site(tmp_path, location="supply")), headroom=False)
    data = site_spectrum_data(study, "current")
    panel = data.panels[0]
    k = list(panel.orders).index(5)
    assert panel.verdicts[k] == "fail" and panel.limit[k] == 15.0
    assert panel.measured[k] == pytest.approx(20.0, rel=1e-9)  # worked example above
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = plot_spectrum(data)
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    ax = fig.axes[0]
    assert "\u27155" in [t.get_text() for t in ax.texts]
    # the legend sits above the plotting area, so it covers no bar and no limit mark
    renderer = canvas.get_renderer()
    legend = ax.get_legend() or fig.legends[0]
    assert legend.get_window_extent(renderer).y0 >= ax.get_window_extent(renderer).y1 - 1.0


# ---------------------------------------------------------------------------------------------
# pqcheck verify on a site study
# ---------------------------------------------------------------------------------------------


def test_verify_site_pdf_and_json(tmp_path):
    pytest.importorskip("pypdf")
    runner = CliRunner()
    site = write_site(tmp_path, location="supply")
    pdf, js = tmp_path / "site.pdf", tmp_path / "site.json"
    r = runner.invoke(main, ["site", str(site), "-o", str(pdf), "--json", str(js)])
    assert r.exit_code == 1, r.output
    for target in (pdf, js):
        r = runner.invoke(main, ["verify", str(target)])
        assert r.exit_code == 0, r.output
        assert "IDENTICAL" in r.output and "site file" in r.output
    # an edited number: exit 1, naming the value (recomputed from the inputs, not trusted)
    d = json.loads(js.read_text())
    k = next(i for i, c in enumerate(d["checks"]) if c["label"] == "I5")
    d["checks"][k]["measured"] = 14.0
    edited = tmp_path / "edited.json"
    edited.write_text(json.dumps(d))
    r = runner.invoke(main, ["verify", str(edited)])
    assert r.exit_code == 1, r.output
    assert re.search(rf"checks\[{k}\]\.measured \(check PCC h5\): recorded 14(\.0)?, "
                     r"recomputed 20", r.output), r.output
    # a unit's data changed since: its SHA-256 no longer matches
    unit = tmp_path / "unit.json"
    unit.write_text(unit.read_text().replace("20.0", "19.0", 1))
    r = runner.invoke(main, ["verify", str(js)])
    assert r.exit_code == 1 and "unit results 'Charger'" in r.output, r.output


def test_verify_site_pdf_with_other_pages_is_caught(tmp_path):
    pypdf = pytest.importorskip("pypdf")
    runner = CliRunner()
    site = write_site(tmp_path, location="supply")
    js = tmp_path / "site.json"
    r = runner.invoke(main, ["site", str(site), "--json", str(js), "--report-id", "S-1"])
    assert r.exit_code == 1, r.output
    alt = tmp_path / "alt"
    alt.mkdir()
    alt_site = write_site(alt, location="supply", count=2)
    r = runner.invoke(main, ["site", str(alt_site), "-o", str(alt / "other.pdf"),
                             "--report-id", "S-1"])
    assert r.exit_code == 1, r.output
    forged = pypdf.PdfWriter()
    for page in pypdf.PdfReader(alt / "other.pdf").pages:
        forged.add_page(page)
    forged.add_attachment("results.json", js.read_bytes())
    with open(tmp_path / "forged.pdf", "wb") as fh:
        forged.write(fh)
    r = runner.invoke(main, ["verify", str(tmp_path / "forged.pdf"), "--format", "json"])
    assert r.exit_code == 1, r.output
    out = json.loads(r.output)
    assert {d["what"] for d in out["differences"]} == {"visible report"}


# ---------------------------------------------------------------------------------------------
# the published JSON Schema of the site study document
# ---------------------------------------------------------------------------------------------


def test_site_documents_validate_against_the_published_schema(tmp_path):
    # jsonschema (the reference implementation of JSON Schema draft 2020-12) checks every
    # document the site command writes: pass, fail and inconclusive, with and without a site
    # transformer, with the report block of --json
    jsonschema = pytest.importorskip("jsonschema")
    from pqcheck.results import SCHEMA_VERSION, schema_for, shipped_schema

    schema = schema_for("site study")
    jsonschema.Draft202012Validator.check_schema(schema)
    validator = jsonschema.Draft202012Validator(schema)
    runner = CliRunner()
    no_tx = SITE_BUS.format(summation="general", location="bus", count=1, demand_w=0, il="")
    no_tx = no_tx.replace(no_tx[no_tx.index("[transformer]"):no_tx.index("[pcc]")], "")
    no_tx = no_tx.replace('location = "bus"', "").replace("nominal_voltage_v = 11000",
                                                          "nominal_voltage_v = 400")
    no_tx = no_tx.replace("ssc_va = 250e6", "ssc_va = 20e6")
    def folder(name):
        (tmp_path / name).mkdir()
        return tmp_path / name

    cases = {
        "pass": write_site(folder("p"), results=unit_results({5: (1.0, 0.0)}),
                           il="il_a = 10000"),
        "fail": write_site(folder("f"), location="supply"),
        "inconclusive": write_site(folder("i"), il="il_a = 10000",
                                   results=unit_results({5: (1.0, 0.0)}, max_order=40)),
        "no transformer": write_site(folder("n"), text=no_tx),
    }
    for what, site in cases.items():
        out = site.parent / "study.json"
        r = runner.invoke(main, ["site", str(site), "--json", str(out)])
        assert r.exit_code in (0, 1, 3), (what, r.output)
        doc = json.loads(out.read_text())
        assert doc["tool"]["schema"] == doc["schema_version"] == SCHEMA_VERSION
        assert doc["tool"]["kind"] == "site study"
        assert doc["study_spec"] == {"site_file": str(site), "summation": None,
                                     "headroom": True, "max_headroom": 1000}
        errors = [f"{e.json_path}: {e.message}" for e in validator.iter_errors(doc)]
        assert not errors, (what, errors[:5])
        jsonschema.validate(doc, shipped_schema())  # exactly one kind of the one schema
    # the schema is not a formality: a wrong verdict word or an unknown block is refused
    doc["verdict"] = "ok"
    assert not validator.is_valid(doc)
    doc["verdict"] = "pass"
    doc["extra"] = 1
    assert not validator.is_valid(doc)


# ---------------------------------------------------------------------------------------------
# capture units run through a RunSpec and check_capture
# ---------------------------------------------------------------------------------------------


def _three_phase_csv(path, *, time=True):
    """A synthesised balanced unit: 230 V, 10 A fundamental and a 2 A fifth (negative
    sequence), 10 kS/s for 2 s; with or without a time column."""
    t = np.arange(20_000) / 10_000.0
    cols, names = ([t], ["time"]) if time else ([], [])
    for k, ph in enumerate("abc"):
        cols.append(230 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t - 2 * np.pi * k / 3))
        names.append(f"v{ph}")
    for k, ph in enumerate("abc"):
        sh = -2 * np.pi * k / 3
        cols.append(10 * np.sqrt(2) * np.cos(2 * np.pi * 50 * t + sh)
                    + 2 * np.sqrt(2) * np.cos(5 * (2 * np.pi * 50 * t + sh)))
        names.append(f"i{ph}")
    np.savetxt(path, np.column_stack(cols), delimiter=",", header=",".join(names),
               comments="", fmt="%.9g")


def test_capture_unit_runs_through_a_run_spec(tmp_path):
    from pqcheck.record import RunSpec

    _three_phase_csv(tmp_path / "unit.csv")
    (tmp_path / "site.toml").write_text(BASE.replace('results = "unit.json"',
                                                     'capture = "unit.csv"'))
    site = load_site(tmp_path / "site.toml")
    spec = site.units[0].run_spec
    # analysed up to the highest order IEEE 519-2022 assesses (50; standards notes 1.3)
    assert spec.analysis.max_order == 50 and spec.analysis.nominal_hz == 50
    assert spec.reader.path == str(tmp_path / "unit.csv") and spec.limits == ()
    assert abs(site.units[0].spectrum.current[0, 5]) == pytest.approx(2.0, rel=1e-3)
    d = site_document(study_site(site, headroom=False))
    assert RunSpec.from_dict(d["site"]["units"][0]["run_spec"]) == spec


def test_capture_unit_errors_name_the_site_files_field(tmp_path):
    _three_phase_csv(tmp_path / "unit.csv", time=False)
    (tmp_path / "site.toml").write_text(BASE.replace('results = "unit.json"',
                                                     'capture = "unit.csv"'))
    r = CliRunner().invoke(main, ["site", str(tmp_path / "site.toml")])
    assert r.exit_code == 2
    assert re.search(r"site.toml:\d+: units\[1\].sample_rate_hz: unit.csv: no time base found",
                     r.output), r.output
    assert "the unit's sample_rate_hz" in r.output and "--sample-rate" not in r.output


def test_results_file_that_is_a_pipe_is_refused(tmp_path):
    import os

    if not hasattr(os, "mkfifo"):
        pytest.skip("no FIFOs on this system")
    (tmp_path / "site.toml").write_text(BASE.replace('"unit.json"', '"pipe.json"'))
    os.mkfifo(tmp_path / "pipe.json")
    with pytest.raises(PlanError, match=r"units\[1\].results: pipe.json: is a pipe"):
        load_site(tmp_path / "site.toml")


def test_site_file_that_is_a_pipe_is_refused(tmp_path):
    import os

    if not hasattr(os, "mkfifo"):
        pytest.skip("no FIFOs on this system")
    os.mkfifo(tmp_path / "site.toml")
    r = CliRunner().invoke(main, ["site", str(tmp_path / "site.toml")])
    assert r.exit_code == 2 and "is a pipe" in r.output, r.output


def test_the_study_spec_is_read_back_as_data():
    from pqcheck.errors import InputError
    from pqcheck.results import study_spec_of
    from pqcheck.site import StudySpec

    spec = StudySpec(site_file="site.toml", summation="phasor", max_headroom=20)
    assert study_spec_of({"study_spec": spec.to_dict()}) == spec
    with pytest.raises(InputError, match=r"^study_spec\.summation: must be one of 'general', "
                                         r"'arithmetic', 'phasor', got 'rms'"):
        study_spec_of({"study_spec": {"site_file": "s.toml", "summation": "rms"}})
    with pytest.raises(InputError, match=r"^study_spec\.max_headroom: must be a whole number "
                                         r"from 1 to 1000, got 0"):
        StudySpec.from_dict({"site_file": "s.toml", "max_headroom": 0})
    with pytest.raises(InputError, match=r"^study_spec\.colour: unknown field 'colour'"):
        StudySpec.from_dict({"site_file": "s.toml", "colour": 1})
    with pytest.raises(InputError, match=r"^study_spec: the results record no study "
                                         r"specification"):
        study_spec_of({})
