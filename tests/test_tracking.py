"""Frequency tracking internals and the channel-role sanity check."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.signal import savgol_filter

from pqcheck.analysis import analyze
from pqcheck.capture import Capture, Channel, assign_roles
from pqcheck.dsp.tracking import _smooth_counts, window_boundaries


@pytest.mark.parametrize("n", [11, 12, 40, 257])
def test_count_smoothing_matches_scipy_savgol(n):
    # reference: scipy.signal.savgol_filter(window 11, quadratic, mode="interp")
    rng = np.random.default_rng(n)
    count = np.cumsum(1.0 + 0.01 * rng.standard_normal(n))
    np.testing.assert_allclose(_smooth_counts(count), savgol_filter(count, 11, 2, mode="interp"),
                               rtol=0, atol=1e-10)


def test_quadratic_drift_is_followed_exactly():
    # A Savitzky-Golay quadratic fit reproduces a quadratic exactly (Savitzky & Golay 1964):
    # a linear frequency ramp 49.8 -> 50.2 Hz gives window frequencies on the ramp.
    fs = 10_000.0
    t = np.arange(int(fs * 4)) / fs
    f = 49.8 + 0.1 * t  # Hz, 0.1 Hz/s
    phase = 2 * np.pi * np.cumsum(f) / fs
    tr = window_boundaries(np.cos(phase), fs, 50.0, 0.0, 10)
    b = tr.boundaries
    mid_t = 0.5 * (b[1:] + b[:-1]) / fs
    f_win = 10 * fs / np.diff(b)
    # the mean frequency of a window is the ramp at its mid-point: inner windows within 1 mHz
    # (0.002 % of 50 Hz); the first and last, whose outer edge is extended by a straight line,
    # within 2 mHz -- both far inside the IEC 61000-4-7 synchronisation tolerance of 0.03 %
    # (15 mHz, from memory)
    np.testing.assert_allclose(f_win[1:-1], 49.8 + 0.1 * mid_t[1:-1], atol=1e-3)
    np.testing.assert_allclose(f_win[[0, -1]], 49.8 + 0.1 * mid_t[[0, -1]], atol=2e-3)


def test_role_given_against_name_and_unit_is_flagged():
    fs = 10_000.0
    t = np.arange(int(fs)) / fs
    ia = 10 * np.sin(2 * np.pi * 50 * t)
    va = 325 * np.sin(2 * np.pi * 50 * t)
    cap = Capture(np.vstack([ia, va]), fs,
                  (Channel("ia", "current", "a", "A"), Channel("va", "voltage", "a", "V")))
    swapped = assign_roles(cap, current=["va"], voltage=["ia"])
    res = analyze(swapped, nominal_hz=50)
    flagged = {f.channels[0] for f in res.findings if f.code == "role-mismatch"}
    assert flagged == {"ia", "va"}
    ok = analyze(assign_roles(cap, current=["ia"], voltage=["va"]), nominal_hz=50)
    assert not [f for f in ok.findings if f.code == "role-mismatch"]


def test_small_harmonic_beside_fundamental_in_half_sample_windows():
    # A 0.5 % second harmonic beside a 100 A fundamental at 10 kS/s, the frequency chosen so
    # that 10 cycles span 2010.5 samples: a whole-sample window misses them by half a sample
    # (the worst case), and the fundamental leaks into the second-harmonic line about 10
    # lines away by roughly |eps| / 10 of its size (eps = 10 delta / N, rectangular-window
    # leakage; textbook DFT, checked with numpy below). Each window resampled to its exact
    # span reads the component, subgroup and group within 0.1 % of the closed-form 0.5 A,
    # and the fundamental within 1e-5.
    from pqcheck.dsp.spectrum import analyse_windows, harmonic_groupings

    fs = 10_000.0
    f = 10 * fs / 2010.5  # 49.739 Hz
    t = np.arange(int(fs * 1.0)) / fs
    x = 100 * np.sqrt(2) * np.cos(2 * np.pi * f * t + 0.3) + 0.5 * np.sqrt(2) * np.cos(
        2 * np.pi * 2 * f * t + 1.1)
    plain = np.abs(np.fft.rfft(x[:2010])[20]) * np.sqrt(2) / 2010
    assert abs(plain / 0.5 - 1) > 0.01  # the effect is real at this rate and frequency
    tr = window_boundaries(x, fs, f, 0.0, 10)
    wb = analyse_windows(x[None], tr.boundaries, max_line=10 * 51 + 5, halves=tr.halves)
    g = harmonic_groupings(wb.lines, 10, 50)
    for key in ("subgroup", "group"):
        np.testing.assert_allclose(g[key][:, 0, 2], 0.5, rtol=1e-3)
    np.testing.assert_allclose(np.abs(g["component"][:, 0, 2]), 0.5, rtol=1e-3)
    np.testing.assert_allclose(np.abs(g["component"][:, 0, 1]), 100.0, rtol=1e-5)


@pytest.mark.parametrize("kind", ["six-pulse", "square"])
@pytest.mark.parametrize("fs", [10_000.0, 25_000.0])
def test_single_window_harmonics_of_rectifier_and_square_currents(kind, fs):
    # Closed forms: ideal six-pulse current I_h = I_1 / h for h = 6k +- 1 (power-electronics
    # textbook, e.g. Mohan/Undeland/Robbins -- from memory), square wave I_h = I_1 / h for odd
    # h (Fourier series). The square wave is band-limited below the Nyquist frequency, so it
    # holds harmonics far above order 50 that leak into the analysed lines too. One window
    # only (0.21 s), at a frequency where it misses 10 cycles by half a sample: without the
    # leakage correction small harmonics read several per cent off; the method is asked for
    # 0.2 % of reading on every order up to 49 (uncorrected: 0.3 to 1.6 %).
    f = 10 * fs / (round(fs / 5) + 0.5)  # about 49.99 Hz: 10 cycles = N + 0.5 samples
    t = np.arange(int(fs * 0.21)) / fs
    th = 2 * np.pi * f * t
    top = int(fs / 2.2 / f)
    if kind == "six-pulse":
        amps = {h: 1.0 / h for h in range(1, 50) if h % 6 in (1, 5)}
    else:
        amps = {h: 1.0 / h for h in range(1, top + 1, 2)}
    x = sum(a * np.sqrt(2) * np.cos(h * th) for h, a in amps.items())
    res = analyze(Capture.from_arrays(fs, currents={"i": x}), nominal_hz=50)
    assert res.windows.n_windows == 1
    c = res.channels[0]
    for h, a in amps.items():
        if h <= 49:
            assert c.harmonic_rms[h] == pytest.approx(a, rel=2e-3), f"order {h}"


def test_reused_line_buffer_gives_the_fresh_arrays_lines():
    # reference: analyse_windows without reuse (fresh NaN-filled lines) and the closed-form
    # definition of harmonic_groupings (lines padded with NaN, cumulative sums): a span
    # analysed into the thread's reused buffer, after a span that filled it with other
    # values, has the same lines (NaN where the window has no line: at 5 kS/s a 10-cycle
    # window resampled to M points has M / 2 + 1 lines, about 504, fewer than the 511
    # kept), and the same groups
    from pqcheck.dsp.spectrum import analyse_windows, harmonic_groupings

    fs = 5_000.0
    t = np.arange(int(fs * 2.0)) / fs
    rng = np.random.default_rng(2)
    x = 100 * np.cos(2 * np.pi * 49.7 * t) + 3 * np.cos(2 * np.pi * 7 * 49.7 * t)
    y = x + rng.normal(0, 1.0, t.size)
    tr = window_boundaries(x, fs, 50.0, 0.0, 10)
    kw = dict(max_line=10 * 51, halves=tr.halves)
    analyse_windows(rng.normal(size=(2, t.size)), tr.boundaries, reuse=True, **kw)  # fills it
    reused = analyse_windows(y[None], tr.boundaries, reuse=True, **kw)
    fresh = analyse_windows(y[None], tr.boundaries, **kw)
    for w, m in enumerate(fresh.n_samples):
        assert np.isfinite(fresh.lines[w, :, : m // 2 + 1]).all()
        assert np.isnan(fresh.lines[w, :, m // 2 + 1:]).all() and m // 2 < 10 * 51
    np.testing.assert_array_equal(reused.lines, fresh.lines)
    g = harmonic_groupings(fresh.lines, 10, 50)
    power = np.concatenate([np.abs(fresh.lines) ** 2, np.full(fresh.lines.shape[:-1] + (5,),
                                                                np.nan)], axis=-1)
    h = 7  # lines 65..75, the end ones at half weight (IEC 61000-4-7 harmonic group)
    want = np.sqrt(power[..., 66:75].sum(-1) + 0.5 * (power[..., 65] + power[..., 75]))
    np.testing.assert_allclose(g["group"][..., h], want, rtol=1e-12)
    clean = harmonic_groupings(analyse_windows(x[None], tr.boundaries, reuse=True, **kw).lines,
                               10, 50)
    np.testing.assert_allclose(clean["group"][..., h], 3 / np.sqrt(2), rtol=1e-3)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=60),
       st.booleans())
def test_tracker_median_equals_numpy_median(values, with_nan):
    # reference: numpy.median (the same value, bit for bit; NaN when any value is NaN)
    from pqcheck.dsp.tracking import median

    a = np.array(values)
    if with_nan:
        a[len(a) // 2] = np.nan
    want = float(np.median(a))
    got = median(a)
    assert (np.isnan(got) and np.isnan(want)) or got == want


def test_refinement_stops_at_the_noise_of_the_reference(monkeypatch):
    # reference: the exact window edges of the closed form (49.93 Hz) and the tracker's own
    # three-pass result. On a noisy reference (0.6 % noise) the second pass corrects the
    # first by noise alone (the spread does not shrink): the refinement ends there. A third
    # pass would move the edges by a few thousandths of a sample, less than the noise puts
    # them off the exact edges, and no closer to them
    from pqcheck.dsp import tracking

    fs, f = 12_800.0, 49.93
    rng = np.random.default_rng(7)
    t = np.arange(int(2.5 * fs)) / fs
    x = np.sqrt(2) * 230 * np.sin(2 * np.pi * f * t) + rng.normal(0, 2.0, t.size)
    calls = []
    real = tracking._second_pass
    monkeypatch.setattr(tracking, "_second_pass",
                        lambda *a, **k: calls.append(1) or real(*a, **k))
    two = window_boundaries(x, fs, 50.0, 0.0, 10).boundaries
    assert len(calls) == 2
    monkeypatch.setattr(tracking, "STALLED", np.inf)  # never stalled: all three passes
    calls.clear()
    three = window_boundaries(x, fs, 50.0, 0.0, 10).boundaries
    assert len(calls) == 3
    np.testing.assert_allclose(two, three, rtol=0, atol=0.01)
    exact = np.arange(two.size) * 10 * fs / f  # the closed form's window edges
    err2, err3 = np.abs(two - exact).max(), np.abs(three - exact).max()
    assert err2 < 0.05 and err2 <= err3 + 1e-3
