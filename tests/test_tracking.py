"""Frequency tracking internals and the channel-role sanity check."""

from __future__ import annotations

import numpy as np
import pytest
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
