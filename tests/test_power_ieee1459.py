"""IEEE 1459 power quantities against the published definitions.

Formulas: IEEE Std 1459-2010 clauses 3.1 (single phase) and 3.2 (three phase, effective current
and voltage with the neutral-to-line resistance ratio taken as 1) -- from memory, as summarised
in standards-facts.md section 7 ([M]). The worked examples of standards-facts.md 7.3 are tagged
[C] (computed there from those formulas, no published example); each test recomputes the
expected values from the formulas as well as citing the documented figures.

Signals are exactly synchronous (50 Hz at 10 kHz), so the analysis is exact to float rounding;
the documented figures are printed to 3 decimals (or 6 significant digits), which sets the
tolerance against them.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from conftest import fourier_series, phasor_series

from pqcheck import Capture, analyze

FS, F0, DUR = 10_000.0, 50.0, 1.0
A = np.exp(2j * np.pi / 3)


def _p(mag, deg):
    return mag * np.exp(1j * np.radians(deg))


def _rms(phasors: dict) -> float:
    return float(np.sqrt(sum(abs(c) ** 2 for c in phasors.values())))


# ---- single phase ---------------------------------------------------------------------------


def test_single_phase_worked_example():
    v_ph = {1: _p(230, 0), 3: _p(6.9, 30), 5: _p(9.2, -60)}
    i_ph = {1: _p(10, -20), 3: _p(3, 150), 5: _p(1.5, -100)}
    cap = Capture.from_arrays(
        FS, voltages={"v": phasor_series(FS, F0, v_ph, DUR)},
        currents={"i": phasor_series(FS, F0, i_ph, DUR)})
    res = analyze(cap, nominal_hz=50)
    ph = res.power.phases[0]
    # IEEE 1459-2010 clause 3.1 (from memory): P = sum_h V_h I_h cos(theta_h), S = V I,
    # P1 = V1 I1 cos(theta_1), Q1 = V1 I1 sin(theta_1), PF = P / S, PF1 = P1 / S1
    p = sum((v_ph[h] * np.conj(i_ph[h])).real for h in v_ph)
    s = _rms(v_ph) * _rms(i_ph)
    s1c = v_ph[1] * np.conj(i_ph[1])
    assert ph.p_w == pytest.approx(p, rel=1e-9)
    assert ph.s_va == pytest.approx(s, rel=1e-9)
    assert ph.p1_w == pytest.approx(s1c.real, rel=1e-9)
    assert ph.q1_var == pytest.approx(s1c.imag, rel=1e-9)
    assert ph.s1_va == pytest.approx(abs(s1c), rel=1e-9)
    # standards-facts.md 7.3, single-phase example ([C], printed to 3 decimals / 6 digits)
    assert ph.p_w == pytest.approx(2161.514, abs=5e-4)
    assert ph.s_va == pytest.approx(2428.958, abs=5e-4)
    assert ph.p1_w == pytest.approx(2161.293, abs=5e-4)
    assert ph.q1_var == pytest.approx(786.646, abs=5e-4)
    assert ph.s1_va == pytest.approx(2300.000, abs=5e-4)
    assert ph.pf == pytest.approx(0.889894, abs=5e-7)
    assert ph.dpf == pytest.approx(0.939693, abs=5e-7)
    # THD_V 5.000 %, THD_I 33.541 % (same example)
    by_name = {c.name: c for c in res.channels}
    assert by_name["v"].thd_percent == pytest.approx(5.000, abs=5e-4)
    assert by_name["i"].thd_percent == pytest.approx(33.541, abs=5e-4)
    # single phase: the total is that phase (S, PF)
    assert res.power.p_w == pytest.approx(ph.p_w, rel=1e-12)
    assert res.power.se_va == pytest.approx(ph.s_va, rel=1e-12)


# ---- three phase ----------------------------------------------------------------------------


def _three_phase(v_a: dict, i_abc: list, *, neutral=False):
    """Capture of a balanced voltage set (order h of phase b shifted by -120 h deg) and given
    current phasor sets ``[{h: phasor}, ...]`` for a, b, c."""
    volts = {f"v{p}": phasor_series(FS, F0, v_a, DUR, shift)
             for p, shift in zip("abc", (0.0, -120.0, 120.0))}
    currents = {f"i{p}": fourier_series(FS, F0, {h: (abs(c), np.degrees(np.angle(c)))
                                                  for h, c in ph.items()}, DUR)
                for p, ph in zip("abc", i_abc)}
    if neutral:
        currents["in"] = -(currents["ia"] + currents["ib"] + currents["ic"])
    return Capture.from_arrays(FS, currents=currents, voltages=volts)


def _shifted(ph_a: dict, shift_deg: float) -> dict:
    return {h: c * np.exp(1j * np.radians(h * shift_deg)) for h, c in ph_a.items()}


def _ieee1459_expected(v_abc, i_abc, wiring):
    """Effective quantities from IEEE 1459-2010 clause 3.2 (from memory; standards-facts 7.2):
    4-wire I_e = sqrt((Ia^2+Ib^2+Ic^2+In^2)/3), V_e = sqrt((3(Va^2+Vb^2+Vc^2)+Vab^2+Vbc^2+Vca^2)/18);
    3-wire I_e = sqrt((Ia^2+Ib^2+Ic^2)/3), V_e = sqrt((Vab^2+Vbc^2+Vca^2)/9); S_e = 3 V_e I_e."""
    orders = sorted(set().union(*v_abc, *i_abc))

    def get(d, h):
        return d.get(h, 0j)

    i_rms = [_rms(i) for i in i_abc]
    v_rms = [_rms(v) for v in v_abc]
    i_n = np.sqrt(sum(abs(sum(get(i, h) for i in i_abc)) ** 2 for h in orders))
    v_ll = [np.sqrt(sum(abs(get(v_abc[a], h) - get(v_abc[b], h)) ** 2 for h in orders))
            for a, b in ((0, 1), (1, 2), (2, 0))]
    if wiring == "4-wire":
        ie = np.sqrt((sum(x**2 for x in i_rms) + i_n**2) / 3)
        ve = np.sqrt((3 * sum(x**2 for x in v_rms) + sum(x**2 for x in v_ll)) / 18)
    else:
        ie = np.sqrt(sum(x**2 for x in i_rms) / 3)
        ve = np.sqrt(sum(x**2 for x in v_ll) / 9)
    p = sum((get(v, h) * np.conj(get(i, h))).real for v, i in zip(v_abc, i_abc) for h in orders)
    arithmetic = sum(v * i for v, i in zip(v_rms, i_rms))
    return {"ie": ie, "ve": ve, "se": 3 * ve * ie, "p": p, "pf": p / (3 * ve * ie),
            "arithmetic": arithmetic, "i_n": i_n}


def test_unbalanced_sinusoidal_four_wire_worked_example():
    v_a = {1: _p(230, 0)}
    v_abc = [_shifted(v_a, s) for s in (0.0, -120.0, 120.0)]
    i_abc = [{1: _p(10, 0)}, {1: _p(5, -150)}, {1: 0j}]
    exp = _ieee1459_expected(v_abc, i_abc, "4-wire")
    # standards-facts.md 7.3 ([C]): |In| = 6.19657 A, Ie = 7.38010 A, Ve = 230 V,
    # Se = 5092.266 VA, P = 3295.929 W, PF = 0.647242, arithmetic sum of V I = 3450 VA
    assert exp["i_n"] == pytest.approx(6.19657, abs=5e-6)
    assert exp["ie"] == pytest.approx(7.38010, abs=5e-6)
    assert exp["se"] == pytest.approx(5092.266, abs=5e-4)
    assert exp["pf"] == pytest.approx(0.647242, abs=5e-7)

    cap = _three_phase(v_a, i_abc)
    for wiring in (None, "4-wire"):  # inferred: the phase currents do not sum to zero
        with warnings.catch_warnings():
            # phase c carries nothing: its ratios are NaN, quietly (no stderr noise in the CLI)
            warnings.simplefilter("error", RuntimeWarning)
            res = analyze(cap, nominal_hz=50, wiring=wiring)
        assert np.isnan(res.power.phases[2].pf)
        pw = res.power
        assert pw.wiring == "4-wire"
        assert pw.se_va == pytest.approx(exp["se"], rel=1e-9)
        assert pw.se_va == pytest.approx(5092.266, abs=5e-4)  # standards-facts.md 7.3 [C]
        assert pw.p_w == pytest.approx(3295.929, abs=5e-4)  # standards-facts.md 7.3 [C]
        assert pw.pf == pytest.approx(0.647242, abs=5e-7)  # standards-facts.md 7.3 [C]
        assert pw.extra["ie_a"] == pytest.approx(7.38010, abs=5e-6)
        assert pw.extra["ve_v"] == pytest.approx(230.0, rel=1e-9)
        # positive-sequence fundamental powers (Fortescue; standards-facts.md 7.3 [C]):
        # P1+ = 3295.929 W, Q1+ = 575.000 var, S1+ = 3345.710 VA, SU1 = 3838.932 VA,
        # PF1+ = 0.985121
        assert pw.extra["p1pos_w"] == pytest.approx(3295.929, abs=5e-4)
        assert pw.extra["q1pos_var"] == pytest.approx(575.000, abs=5e-4)
        assert pw.extra["s1pos_va"] == pytest.approx(3345.710, abs=5e-4)
        assert pw.extra["su1_va"] == pytest.approx(3838.932, abs=5e-4)
        assert pw.extra["dpf_pos"] == pytest.approx(0.985121, abs=5e-7)
        # "arithmetic sum of V I would give 3450 VA" (standards-facts.md 7.3)
        assert pw.extra["arithmetic_s_va"] == pytest.approx(3450.0, rel=1e-9)
        # current unbalance I2/I1+ from the symmetrical components (Fortescue), computed here
        ia, ib, ic = (i[1] for i in i_abc)
        i_pos = (ia + A * ib + A**2 * ic) / 3
        i_neg = (ia + A**2 * ib + A * ic) / 3
        assert pw.extra["i_unbalance_percent"] == pytest.approx(100 * abs(i_neg) / abs(i_pos),
                                                                rel=1e-9)


def test_four_wire_with_triplen_harmonics():
    # Balanced, non-sinusoidal: voltage with a zero-sequence 3rd and a negative-sequence 5th;
    # current with a 3rd (zero sequence: the three phases add in the neutral, In = 3 I3), a 5th
    # and a 7th. The neutral current makes Se exceed the arithmetic sum of the phase VA
    # (IEEE 1459-2010 clause 3.2, from memory; standards-facts.md 7.2 and 7.3).
    v_a = {1: _p(230, 0), 3: _p(11.5, 15), 5: _p(6.9, -40)}
    i_a = {1: _p(10, -30), 3: _p(4, 20), 5: _p(2, -40), 7: _p(1, 60)}
    shifts = (0.0, -120.0, 120.0)
    v_abc = [_shifted(v_a, s) for s in shifts]
    i_abc = [_shifted(i_a, s) for s in shifts]
    exp = _ieee1459_expected(v_abc, i_abc, "4-wire")
    assert exp["i_n"] == pytest.approx(3 * 4.0, rel=1e-12)  # triplens add in the neutral
    # the effective apparent power is not the arithmetic sum here (the test's premise)
    assert exp["se"] > 1.05 * exp["arithmetic"]

    for neutral, wiring in ((False, None), (False, "4-wire"), (True, None)):
        cap = _three_phase(v_a, i_abc, neutral=neutral)
        res = analyze(cap, nominal_hz=50, wiring=wiring)
        pw = res.power
        assert pw.wiring == "4-wire"
        assert pw.extra["ie_a"] == pytest.approx(exp["ie"], rel=1e-9)
        assert pw.extra["ve_v"] == pytest.approx(exp["ve"], rel=1e-9)
        assert pw.se_va == pytest.approx(exp["se"], rel=1e-9)
        assert pw.p_w == pytest.approx(exp["p"], rel=1e-9)
        assert pw.pf == pytest.approx(exp["pf"], rel=1e-9)
        assert pw.extra["arithmetic_s_va"] == pytest.approx(exp["arithmetic"], rel=1e-9)
        assert pw.se_va != pytest.approx(pw.extra["arithmetic_s_va"], rel=0.05)
        # per phase: IEEE 1459 clause 3.1 quantities of phase a
        pa = pw.phases[0]
        assert pa.p_w == pytest.approx(exp["p"] / 3, rel=1e-9)
        assert pa.s_va == pytest.approx(_rms(v_a) * _rms(i_a), rel=1e-9)
        assert pa.dpf == pytest.approx(np.cos(np.radians(30)), rel=1e-9)


def test_three_wire_uses_line_to_line_voltages():
    # Currents without zero-sequence content sum to zero: inferred 3-wire. The voltage carries
    # a zero-sequence 3rd that the line-to-line voltages do not see, so the 3-wire Ve
    # (from Vab, Vbc, Vca) is below the line-to-neutral rms (IEEE 1459-2010 clause 3.2, from
    # memory; standards-facts.md 7.2).
    v_a = {1: _p(230, 0), 3: _p(23, 0)}
    i_a = {1: _p(16, -25), 5: _p(3, 70), 7: _p(2, -10), 11: _p(1, 0)}
    shifts = (0.0, -120.0, 120.0)
    v_abc = [_shifted(v_a, s) for s in shifts]
    i_abc = [_shifted(i_a, s) for s in shifts]
    exp = _ieee1459_expected(v_abc, i_abc, "3-wire")
    assert exp["ve"] == pytest.approx(230.0, rel=1e-12)  # the 3rd cancels line to line
    res = analyze(_three_phase(v_a, i_abc), nominal_hz=50)
    pw = res.power
    assert pw.wiring == "3-wire"
    assert pw.extra["ve_v"] == pytest.approx(exp["ve"], rel=1e-9)
    assert pw.extra["ie_a"] == pytest.approx(exp["ie"], rel=1e-9)
    assert pw.se_va == pytest.approx(exp["se"], rel=1e-9)
    assert pw.pf == pytest.approx(exp["pf"], rel=1e-9)
    # and it is below the arithmetic sum, which counts the zero-sequence voltage
    assert pw.se_va < pw.extra["arithmetic_s_va"]
