"""Time aggregation and statistics (pqcheck.aggregate) against closed forms and scipy/numpy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import signal

from pqcheck.aggregate import (
    aggregate_rms,
    smooth,
    smoothing_alpha,
    statistic,
    ten_minute_values,
    three_second_values,
)
from pqcheck.errors import InputError


def test_alpha_for_200_ms_windows():
    # IEC 61000-4-7 5.5.1 gives alpha ~ 8.012, beta ~ 7.012 for 200 ms windows and tau = 1.5 s
    # (from memory); computed here: 1 / (1 - exp(-0.2 / 1.5)) = 8.0111
    assert smoothing_alpha(0.2) == pytest.approx(8.0111, abs=1e-4)
    assert smoothing_alpha(0.2) - 1 == pytest.approx(7.0111, abs=1e-4)


def test_step_response_is_first_order_for_uneven_windows():
    # textbook first-order step response y(t) = 1 - exp(-t / tau), sampled at the end of each
    # window; window lengths vary as they follow the fundamental (exact discrete form)
    rng = np.random.default_rng(1)
    d = 0.2 * (1 + 0.01 * rng.standard_normal(40))
    y = smooth(np.ones(40), d, initial="zero")
    assert y == pytest.approx(1 - np.exp(-np.cumsum(d) / 1.5), rel=1e-12)


def test_matches_scipy_lfilter_for_constant_windows():
    # the same recursion y_n = y_{n-1} + (x_n - y_{n-1}) / alpha as an IIR filter (scipy)
    rng = np.random.default_rng(2)
    x = rng.uniform(0, 3, size=(200, 2, 3))
    g = 1 / smoothing_alpha(0.2)
    zi = (1 - g) * x[0]  # lfilter state that makes y_{-1} = x_0 ("first" start)
    want, _ = signal.lfilter([g], [1, -(1 - g)], x, axis=0, zi=zi[None])
    got = smooth(x, np.full(200, 0.2), initial="first")
    assert got == pytest.approx(want, rel=1e-12)


def test_default_start_is_the_steady_state_of_the_first_tau():
    # a steady value stays steady (no rise from zero at the start of the capture)
    y = smooth(np.full(30, 2.5), np.full(30, 0.2))
    assert y == pytest.approx(np.full(30, 2.5))
    # a value that changes in the first 1.5 s starts from the mean of that first 1.5 s
    x = np.r_[np.full(4, 1.0), np.full(26, 3.0)]
    y = smooth(x, np.full(30, 0.2))
    head = x[:8].mean()  # the windows up to the first that ends after 1.5 s (at 1.6 s)
    assert y[0] == pytest.approx(head + (1.0 - head) * (1 - np.exp(-0.2 / 1.5)))


def test_missing_windows_hold_the_state():
    d = np.full(5, 0.2)
    y = smooth(np.array([1.0, 1.0, np.nan, 2.0, 2.0]), d, initial="first")
    g = 1 - np.exp(-0.2 / 1.5)
    assert np.isnan(y[2])
    assert y[3] == pytest.approx(1.0 + g * (2.0 - 1.0))  # continues from the last state


def test_smooth_argument_errors():
    with pytest.raises(ValueError, match=r"initial must be 'mean', 'first' or 'zero', got 'x'"):
        smooth([1.0], [0.2], initial="x")
    with pytest.raises(ValueError, match=r"values has 2 windows but duration_s has 1"):
        smooth([1.0, 2.0], [0.2])


def test_three_second_and_ten_minute_rms():
    # IEC 61000-4-30 / IEEE 519: 3 s value = RMS of 15 window values (150 cycles at 50 Hz,
    # 180 at 60 Hz); 10 min value = RMS of 200 values of 3 s (from memory)
    rng = np.random.default_rng(3)
    x = rng.uniform(0, 5, size=3000 + 7)
    v3 = three_second_values(x)
    assert v3.shape == (200,)
    assert v3[4] == pytest.approx(np.sqrt(np.mean(x[60:75] ** 2)))
    v10 = ten_minute_values(x)
    assert v10.shape == (1,)
    assert v10[0] == pytest.approx(np.sqrt(np.mean(x[:3000] ** 2)))  # RMS of RMS of equal blocks
    assert aggregate_rms([3.0, np.nan, 4.0, 5.0], 2).tolist() == pytest.approx([3.0, np.sqrt(20.5)])


@pytest.mark.parametrize("name", ["p95", "p99", "p50", "p99.5"])
def test_percentiles_match_numpy(name):
    rng = np.random.default_rng(4)
    x = rng.normal(size=(500, 3))
    assert statistic(x, name) == pytest.approx(np.percentile(x, float(name[1:]), axis=0))


def test_statistics_ignore_missing_values():
    x = np.array([[1.0, np.nan], [3.0, np.nan], [np.nan, np.nan]])
    assert statistic(x, "mean")[0] == 2.0 and np.isnan(statistic(x, "mean")[1])
    assert statistic(x, "max")[0] == 3.0 and np.isnan(statistic(x, "max")[1])
    assert statistic(x, "rms")[0] == pytest.approx(np.sqrt(5.0))
    assert np.isnan(statistic(x, "p95")[1])
    with pytest.raises(InputError, match=r"unknown statistic 'median'; use mean, max, rms or pNN"):
        statistic(x, "median")
