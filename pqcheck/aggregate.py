"""Time aggregation of window values as the standards prescribe, and statistics over them.

Pure functions over arrays whose first axis is the window (successive 10/12-cycle values of
IEC 61000-4-7); any further axes (channels, orders) are carried along.

- :func:`smooth`: the first-order low-pass filter of IEC 61000-4-7 (time constant 1.5 s) used
  by the emission standards IEC 61000-3-2 and 61000-3-12.
- :func:`aggregate_rms`: RMS of consecutive values, the aggregation of IEC 61000-4-30 and
  IEEE 519: 15 window values give a 3 s (150/180-cycle) value, 200 values of 3 s a 10 min value.
- :func:`statistic`: mean, max, RMS or percentile of a series, ignoring missing values.

References
----------
IEC 61000-4-7:2002+A1:2008, clause 5.5.1 (smoothing of harmonic values) -- from memory.
IEC 61000-4-30:2015, clause 5.x (150/180-cycle and 10 min aggregation by RMS) -- from memory.
IEEE Std 519-2014, clause 5 (very short 3 s and short 10 min values) -- from memory.
"""

from __future__ import annotations

import re
import warnings

import numpy as np

from .errors import InputError

__all__ = [
    "WINDOWS_PER_3S",
    "VALUES_3S_PER_10MIN",
    "smoothing_alpha",
    "smooth",
    "aggregate_rms",
    "three_second_values",
    "ten_minute_values",
    "statistic",
    "STATISTICS",
    "percentile",
    "rms_by_label",
    "mean_by_label",
]

#: 150 cycles / 10 (50 Hz) = 180 cycles / 12 (60 Hz) = 15 window values per 3 s value.
WINDOWS_PER_3S = 15
#: IEEE 519: a short-time (10 min) value is the RMS of 200 very-short (3 s) values.
VALUES_3S_PER_10MIN = 200
#: Statistic names: ``mean``, ``max``, ``rms`` or ``pNN`` (percentile).
STATISTICS = ("mean", "max", "rms", "pNN")


def smoothing_alpha(window_s, tau_s: float = 1.5):
    """Coefficient alpha of the discrete first-order filter ``y_n = (x_n + beta y_{n-1}) / alpha``.

    ``alpha = 1 / (1 - exp(-T / tau))`` and ``beta = alpha - 1`` for a window of length ``T``.

    Parameters
    ----------
    window_s : float or array_like
        Window length T. [s]
    tau_s : float
        Time constant. [s]

    Returns
    -------
    float or numpy.ndarray
        alpha. [unitless]

    Examples
    --------
    For a 200 ms window and 1.5 s (IEC 61000-4-7 gives alpha = 8.012, beta = 7.012):

    >>> round(float(smoothing_alpha(0.2)), 3)
    8.011
    """
    return 1.0 / (1.0 - np.exp(-np.asarray(window_s, dtype=np.float64) / tau_s))


def smooth(values, duration_s, *, tau_s: float = 1.5, initial: str = "mean"):
    """First-order low-pass smoothing of successive window values (IEC 61000-4-7).

    ``y_n = y_{n-1} + (x_n - y_{n-1}) / alpha_n`` with ``alpha_n = 1 / (1 - exp(-T_n / tau))``,
    the exact discrete form of a first-order filter for the actual length ``T_n`` of each
    window (windows follow the measured fundamental, so their length varies slightly).

    Parameters
    ----------
    values : array_like, shape (W, ...)
        Window values (e.g. rms harmonic currents), first axis = successive windows. NaN marks
        a missing window: its output is NaN and the filter state carries over it unchanged.
    duration_s : array_like, shape (W,)
        Length of each window. [s]
    tau_s : float
        Time constant (1.5 s in IEC 61000-4-7). [s]
    initial : {"mean", "first", "zero"}
        State of the filter before the first window. ``"mean"`` (default): the mean of the
        valid values of the first ``tau_s`` seconds, an estimate of the steady state the
        equipment was in before the capture began (a measuring instrument's filter has been
        running before an observation starts; pqcheck's choice, common practice). ``"first"``:
        the first valid value. ``"zero"``: 0, so the first ~5 tau show the filter's own rise.

    Returns
    -------
    numpy.ndarray, shape (W, ...)
        Smoothed values, same unit as ``values``.

    Examples
    --------
    A step from 0 to 1 reaches 1 - exp(-t / tau) (first-order step response):

    >>> import numpy as np
    >>> y = smooth(np.r_[0.0, np.ones(15)], np.full(16, 0.2), initial="zero")
    >>> round(float(y[-1]), 4), round(float(1 - np.exp(-3.0 / 1.5)), 4)
    (0.8647, 0.8647)
    """
    if initial not in ("mean", "first", "zero"):
        raise ValueError(f"initial must be 'mean', 'first' or 'zero', got {initial!r}")
    if not tau_s > 0:
        raise ValueError(f"tau_s must be positive, got {tau_s!r}")
    x = np.asarray(values, dtype=np.float64)
    d = np.asarray(duration_s, dtype=np.float64)
    if x.shape[:1] != d.shape:
        raise ValueError(f"values has {x.shape[0] if x.ndim else 0} windows but duration_s "
                         f"has {d.size}")
    gain = 1.0 - np.exp(-d / tau_s)  # = 1 / alpha_n
    out = np.full_like(x, np.nan)
    if x.shape[0] == 0:
        return out
    if initial == "zero":
        state = np.zeros(x.shape[1:])
    elif initial == "first":
        state = np.full(x.shape[1:], np.nan)  # taken from the first valid value below
    else:
        head = x[: max(1, int(np.searchsorted(np.cumsum(d), tau_s, side="left")) + 1)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN heads stay NaN
            state = np.nanmean(head, axis=0)
    for n in range(x.shape[0]):
        xn = x[n]
        ok = np.isfinite(xn)
        fresh = ok & ~np.isfinite(state)  # no state yet for this channel/order
        step = np.where(ok, state + gain[n] * (xn - state), state)
        state = np.where(fresh, xn, step)
        out[n] = np.where(ok, state, np.nan)
    return out


def aggregate_rms(values, n: int):
    """RMS of each block of ``n`` consecutive values; an incomplete last block is dropped.

    Missing (NaN) values are left out of their block; a block with no valid value is NaN.

    Parameters
    ----------
    values : array_like, shape (W, ...)
    n : int
        Values per block.

    Returns
    -------
    numpy.ndarray, shape (W // n, ...)

    Examples
    --------
    >>> aggregate_rms([3.0, 4.0, 1.0], 2).round(4).tolist()  # sqrt((9 + 16) / 2)
    [3.5355]
    """
    x = np.asarray(values, dtype=np.float64)
    m = x.shape[0] // n
    blocks = x[: m * n].reshape((m, n) + x.shape[1:])
    sq = blocks**2
    count = np.sum(np.isfinite(sq), axis=1)
    total = np.nansum(sq, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(count > 0, np.sqrt(total / np.maximum(count, 1)), np.nan)


def three_second_values(window_values):
    """3 s (150-cycle at 50 Hz, 180-cycle at 60 Hz) values: RMS of 15 window values."""
    return aggregate_rms(window_values, WINDOWS_PER_3S)


def ten_minute_values(window_values):
    """10 min values: RMS of 200 consecutive 3 s values (IEEE 519 short-time value)."""
    return aggregate_rms(three_second_values(window_values), VALUES_3S_PER_10MIN)


def percentile(values, q: float, *, axis: int = 0):
    """The q-th percentile of the valid (finite) values along an axis.

    Definition: linear interpolation between order statistics (Hyndman and Fan 1996,
    definition 7; numpy's default ``method="linear"``). With the n valid values sorted,
    ``x_(1) <= ... <= x_(n)``, and ``r = 1 + (n - 1) q / 100``, the percentile is
    ``x_(floor r) + (r - floor r) (x_(floor r + 1) - x_(floor r))``. So the 95th percentile of
    1008 weekly 10 min values lies 95 % of the way from the smallest to the largest rank.

    Parameters
    ----------
    values : array_like
    q : float
        Percentile, 0 to 100. [%]
    axis : int

    Returns
    -------
    numpy.ndarray or float
        NaN where there is no valid value.

    References
    ----------
    R. J. Hyndman, Y. Fan, "Sample quantiles in statistical packages", The American
    Statistician 50 (4), 1996, pp. 361-365, doi:10.1080/00031305.1996.10473566.

    Examples
    --------
    >>> float(percentile([1.0, 2.0, 3.0, 4.0, float("nan")], 50))  # r = 2.5
    2.5
    """
    x = np.moveaxis(np.asarray(values, dtype=np.float64), axis, -1)
    if not 0 <= q <= 100:
        raise InputError(f"percentile must be within 0 to 100, got {q!r}", field="statistic")
    xs = np.sort(np.where(np.isfinite(x), x, np.inf), axis=-1)  # invalid values sort last
    n = np.sum(np.isfinite(x), axis=-1)
    r = (np.maximum(n, 1) - 1) * (q / 100.0)  # 0-based rank
    lo = np.floor(r).astype(np.int64)
    hi = np.minimum(lo + 1, np.maximum(n - 1, 0))
    frac = r - lo
    a = np.take_along_axis(xs, lo[..., None], axis=-1)[..., 0] if x.shape[-1] else lo * np.nan
    b = np.take_along_axis(xs, hi[..., None], axis=-1)[..., 0] if x.shape[-1] else lo * np.nan
    with np.errstate(invalid="ignore"):
        out = np.where(frac > 0, a + frac * (b - a), a)
    out = np.where(n > 0, out, np.nan)
    return out[()] if out.ndim == 0 else out


def rms_by_label(values, labels, n_labels: int):
    """RMS of the valid values of each label along the first axis.

    Parameters
    ----------
    values : array_like, shape (N, ...)
    labels : array_like of int, shape (N,)
        0 .. n_labels - 1.
    n_labels : int

    Returns
    -------
    numpy.ndarray, shape (n_labels, ...)
        NaN for a label with no valid value.

    Examples
    --------
    >>> rms_by_label([3.0, 4.0, 2.0], [0, 0, 1], 2).round(4).tolist()  # sqrt(12.5), 2
    [3.5355, 2.0]
    """
    x = np.asarray(values, dtype=np.float64)
    lab = np.asarray(labels, dtype=np.int64)
    ok = np.isfinite(x)
    sq = np.zeros((n_labels,) + x.shape[1:])
    cnt = np.zeros((n_labels,) + x.shape[1:])
    np.add.at(sq, lab, np.where(ok, x * x, 0.0))
    np.add.at(cnt, lab, ok)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(cnt > 0, np.sqrt(sq / np.maximum(cnt, 1)), np.nan)


def mean_by_label(values, labels, n_labels: int):
    """Arithmetic mean of the valid values of each label along the first axis (see
    :func:`rms_by_label`)."""
    x = np.asarray(values, dtype=np.float64)
    lab = np.asarray(labels, dtype=np.int64)
    ok = np.isfinite(x)
    tot = np.zeros((n_labels,) + x.shape[1:])
    cnt = np.zeros((n_labels,) + x.shape[1:])
    np.add.at(tot, lab, np.where(ok, x, 0.0))
    np.add.at(cnt, lab, ok)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(cnt > 0, tot / np.maximum(cnt, 1), np.nan)


_PCT = re.compile(r"p(\d{1,2}(?:\.\d+)?)$")


def statistic(values, name: str, *, axis: int = 0):
    """Statistic of a series, ignoring missing (NaN) values.

    Parameters
    ----------
    values : array_like
    name : str
        ``mean``, ``max``, ``rms`` (root mean square) or ``pNN``: the NN-th percentile
        (numpy's default linear interpolation between order statistics), e.g. ``p95``.
    axis : int

    Returns
    -------
    numpy.ndarray or float
        NaN where the series has no valid value.

    Raises
    ------
    InputError
        For an unknown statistic name.

    Examples
    --------
    >>> float(statistic([1.0, 2.0, float("nan"), 3.0], "mean"))
    2.0
    """
    x = np.asarray(values, dtype=np.float64)
    valid = np.isfinite(x)
    has = valid.any(axis=axis)
    filled_lo = np.where(valid, x, -np.inf)
    with np.errstate(invalid="ignore", divide="ignore"):
        if name == "mean":
            out = np.nansum(x, axis=axis) / np.maximum(valid.sum(axis=axis), 1)
        elif name == "max":
            out = np.max(filled_lo, axis=axis) if x.shape[axis] else np.full(has.shape, np.nan)
        elif name == "rms":
            out = np.sqrt(np.nansum(x**2, axis=axis) / np.maximum(valid.sum(axis=axis), 1))
        else:
            m = _PCT.fullmatch(name)
            if not m or not 0 < float(m.group(1)) < 100:
                raise InputError(f"unknown statistic {name!r}; use mean, max, rms or pNN "
                                 "(a percentile such as p95)", field="statistic")
            if not has.any():
                out = np.full(has.shape, np.nan)
            else:
                out = percentile(x, float(m.group(1)), axis=axis)
    return np.where(has, out, np.nan)
