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
    "class_a_blocks",
    "half_cycle_rms_extremes",
    "event_flags",
    "DIP_THRESHOLD",
    "SWELL_THRESHOLD",
    "INTERRUPTION_THRESHOLD",
]

#: IEC 61000-4-30 event thresholds relative to the declared input voltage Udin, as commonly
#: set (from memory): dip below 90 %, swell above 110 %, interruption below 5 %.
DIP_THRESHOLD = 0.90
SWELL_THRESHOLD = 1.10
INTERRUPTION_THRESHOLD = 0.05

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


def class_a_blocks(start_s, duration_s, *, per_block: int = WINDOWS_PER_3S,
                   tick_s: float = 600.0, breaks=None, tol_s: float = 0.02):
    """Group 10/12-cycle windows into 150/180-cycle (about 3 s) blocks (IEC 61000-4-30).

    A block is ``per_block`` consecutive windows. A new block starts at each clock tick of
    ``tick_s`` (the resynchronisation at every 10 min tick: the window whose start is the
    first at or after the tick opens a block, so the block before it may be shorter), after a
    gap between windows (their start and the previous end differ by more than ``tol_s``) and
    at each index in ``breaks`` (e.g. the first window of a new file).

    Parameters
    ----------
    start_s : array_like, shape (W,)
        Absolute start of each window (POSIX). [s]
    duration_s : array_like, shape (W,)
        Window lengths. [s]
    per_block : int
        Windows per block (15).
    tick_s : float
        Resynchronisation period. [s]
    breaks : array_like of int, optional
        Window indices that open a block.
    tol_s : float
        Largest discontinuity taken as contiguous. [s]

    Returns
    -------
    labels : numpy.ndarray of int, shape (W,)
        Block of each window, 0 .. B - 1.
    ends : numpy.ndarray of str, shape (B,)
        Why each block ended: ``full`` (``per_block`` windows), ``tick``, ``gap`` (a
        discontinuity or a break follows), ``end`` (the last block).

    Examples
    --------
    Windows of 0.2 s from 599.0 s: 5 windows before the 600 s tick form a short block ended
    by the tick, then blocks of 15:

    >>> lab, ends = class_a_blocks(599.0 + 0.2 * np.arange(20), np.full(20, 0.2))
    >>> np.bincount(lab).tolist(), ends.tolist()
    ([5, 15], ['tick', 'end'])
    """
    t = np.asarray(start_s, dtype=np.float64)
    d = np.asarray(duration_s, dtype=np.float64)
    w = t.size
    labels = np.zeros(w, dtype=np.int64)
    if w == 0:
        return labels, np.array([], dtype=object)
    tick = np.floor(t / tick_s + 1e-9).astype(np.int64)
    brk = np.zeros(w, dtype=bool)
    if breaks is not None:
        b = np.asarray(breaks, dtype=np.int64)
        brk[b[(b > 0) & (b < w)]] = True
    gap = np.zeros(w, dtype=bool)
    gap[1:] = np.abs(t[1:] - (t[:-1] + d[:-1])) > tol_s
    new_tick = np.zeros(w, dtype=bool)
    new_tick[1:] = tick[1:] != tick[:-1]
    reason = []
    label, count = 0, 0
    for i in range(w):
        if i > 0:
            why = ("gap" if gap[i] or brk[i] else "tick" if new_tick[i]
                   else "full" if count == per_block else "")
            if why:
                reason.append(why)
                label += 1
                count = 0
        labels[i] = label
        count += 1
    reason.append("end")
    return labels, np.array(reason, dtype=object)


def half_cycle_rms_extremes(x, fs_hz: float, first_sample, n_samples, cycles: int):
    """Smallest and largest one-cycle RMS refreshed every half cycle in each window.

    The IEC 61000-4-30 event detection quantity U_rms(1/2): the RMS over one fundamental
    cycle, recomputed every half cycle. Each window of ``cycles`` fundamental cycles is split
    into ``2 cycles`` equal half cycles (the window already follows the measured fundamental)
    and the RMS over each pair of consecutive half cycles is taken. The samples may come block
    by block, so a long file needs memory only for the window edges.

    Parameters
    ----------
    x : numpy.ndarray, shape (N,) or (R, N), or iterable of arrays of shape (R, n)
        Samples of R voltage channels, whole or as consecutive blocks. [V]
    fs_hz : float
        Sample rate. [Hz]
    first_sample, n_samples : array_like, shape (W,)
        First sample and length of each window (fractional values are rounded). [samples]
    cycles : int
        Fundamental cycles per window (10 or 12).

    Returns
    -------
    (lo, hi) : numpy.ndarray, shape (W,) or (W, R)
        NaN for a window holding a non-finite sample. [V]

    Examples
    --------
    A 1 V rms sine (50 Hz, 10 kHz) whose 3rd cycle is at half amplitude:

    >>> fs, n = 10000.0, 2000
    >>> x = np.sqrt(2) * np.sin(2 * np.pi * 50 * np.arange(n) / fs)
    >>> x[400:600] *= 0.5
    >>> lo, hi = half_cycle_rms_extremes(x, fs, [0], [n], 10)
    >>> round(float(lo[0]), 3), round(float(hi[0]), 3)
    (0.5, 1.0)
    """
    one = isinstance(x, np.ndarray) and x.ndim == 1
    if isinstance(x, np.ndarray):
        blocks = [x[None, :] if x.ndim == 1 else x]
    else:
        blocks = x
    a = np.asarray(first_sample, dtype=np.float64)
    n = np.asarray(n_samples, dtype=np.float64)
    w = a.size
    k = np.arange(2 * cycles + 1) / (2 * cycles)
    edges = np.maximum(np.rint(a[:, None] + n[:, None] * k[None, :]).astype(np.int64), 0)
    flat = edges.ravel()
    order = np.argsort(flat, kind="stable")
    sorted_e = flat[order]
    csum = None
    cbad = np.zeros(flat.size)
    pos, p, total, bad_total = 0, 0, None, 0.0
    for block in blocks:
        xb = np.asarray(block, dtype=np.float64)
        if xb.ndim == 1:
            xb = xb[None, :]
        m = xb.shape[1]
        if csum is None:
            csum = np.zeros((xb.shape[0], flat.size))
            total = np.zeros(xb.shape[0])
        if m == 0:
            continue
        fin = np.isfinite(xb)
        cs = np.cumsum(np.where(fin, xb * xb, 0.0), axis=1)
        cb = np.cumsum(~fin.all(axis=0))
        hi_i = int(np.searchsorted(sorted_e, pos + m, side="right"))
        sel = order[p:hi_i]
        e = sorted_e[p:hi_i] - pos
        j = np.clip(e - 1, 0, m - 1)
        csum[:, sel] = total[:, None] + np.where(e > 0, cs[:, j], 0.0)
        cbad[sel] = bad_total + np.where(e > 0, cb[j], 0.0)
        p = hi_i
        total = total + cs[:, -1]
        bad_total += float(cb[-1])
        pos += m
    if csum is None:
        nan = np.full((w,) if one else (w, 0), np.nan)
        return nan, nan.copy()
    rest = order[p:]  # edges past the last sample: the totals
    csum[:, rest] = total[:, None]
    cbad[rest] = bad_total
    past = edges > pos
    c = csum.reshape(csum.shape[0], w, 2 * cycles + 1)
    span = np.maximum(edges[:, 2:] - edges[:, :-2], 1)
    with np.errstate(invalid="ignore"):
        r = np.sqrt(np.maximum(c[:, :, 2:] - c[:, :, :-2], 0.0) / span[None])
    bad = (cbad.reshape(w, -1)[:, -1] - cbad.reshape(w, -1)[:, 0] > 0) | past.any(axis=1)
    lo = np.where(bad[None], np.nan, r.min(axis=2)).T
    hi = np.where(bad[None], np.nan, r.max(axis=2)).T
    return (lo[:, 0], hi[:, 0]) if one else (lo, hi)


def event_flags(lo, hi, udin):
    """IEC 61000-4-30 flags: a dip (below 90 % of Udin), swell (above 110 %) or interruption
    (below 5 %) during the window.

    Parameters
    ----------
    lo, hi : array_like, shape (W, ...)
        Smallest and largest U_rms(1/2) of each window and channel. [V]
    udin : float or array_like
        Declared input voltage per channel. [V]

    Returns
    -------
    dict of numpy.ndarray of bool, shape (W,)
        ``dip``, ``swell``, ``interruption`` and ``any`` (over channels).
    """
    lo = np.asarray(lo, dtype=np.float64)
    hi = np.asarray(hi, dtype=np.float64)
    u = np.asarray(udin, dtype=np.float64)
    with np.errstate(invalid="ignore"):
        dip = lo < DIP_THRESHOLD * u
        swell = hi > SWELL_THRESHOLD * u
        intr = lo < INTERRUPTION_THRESHOLD * u
    red = (lambda z: z.any(axis=tuple(range(1, z.ndim)))) if lo.ndim > 1 else (lambda z: z)
    out = {"dip": red(dip), "swell": red(swell), "interruption": red(intr)}
    out["any"] = out["dip"] | out["swell"] | out["interruption"]
    return out


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
