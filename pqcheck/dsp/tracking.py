"""Fundamental-frequency tracking and synchronous window boundaries (IEC 61000-4-7).

The IEC 61000-4-7 method analyses contiguous, gapless windows of exactly 10 fundamental cycles
(50 Hz systems) or 12 cycles (60 Hz systems). This module finds where those windows start and
end in a record whose frequency is not known in advance and may drift.

Method
------
1. A coarse frequency comes from the peak of a Hann-windowed, zero-padded FFT of the reference
   channel, refined by parabolic interpolation (:func:`coarse_frequency`).
2. The reference is demodulated at that frequency ``f_d`` one cycle at a time: for cycle ``c``
   with edges ``e_c, e_c + L`` (``L = fs / f_d`` samples, fractional edges handled by linear
   interpolation of the cumulative sum) ``z_c = sum x[n] exp(-j 2 pi f_d n / fs)``. Summing over
   exactly one cycle of ``f_d`` nulls DC, every harmonic of ``f_d`` and the negative-frequency
   image, so ``arg z_c`` follows the phase of the fundamental alone.
3. The phase advance between successive cycles is ``2 pi (1 + wrap(arg z_{c+1} - arg z_c) / 2 pi)``,
   which gives the number of fundamental cycles elapsed at each cycle mid-point. Window boundaries
   are where that count reaches whole multiples of the cycles per window (linear interpolation
   between mid-points; exact for constant frequency, second order in the frequency slope).

References
----------
IEC 61000-4-7:2002+A1:2008, clause 4 (window of 10/12 cycles, synchronisation) -- from memory.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["coarse_frequency", "detect_nominal", "window_boundaries", "TrackResult"]


def coarse_frequency(x, fs_hz: float, *, f_lo_hz: float, f_hi_hz: float) -> tuple:
    """Frequency and amplitude of the strongest spectral line between two bounds.

    Parameters
    ----------
    x : array_like
        Samples of one channel (NaN are treated as 0). [A] or [V]
    fs_hz : float
        Sample rate. [Hz]
    f_lo_hz, f_hi_hz : float
        Search band. [Hz]

    Returns
    -------
    freq_hz : float
        Interpolated peak frequency, NaN when the band holds no line. [Hz]
    amplitude : float
        Approximate rms of that line (Hann-window corrected). [A] or [V]

    Notes
    -----
    Hann window, 4x zero padding, parabolic interpolation of the log magnitude: for a record
    of a few cycles the error is well below 1 % of the bin width, enough to seed
    :func:`window_boundaries`, which is exact for any seed within a few per cent.
    """
    from .spectrum import fast_length

    x = np.nan_to_num(np.asarray(x, dtype=np.float64))
    n = x.size
    if n < 16:
        return float("nan"), 0.0
    if n > 1 << 18:  # block-average down to a few hundred thousand samples (crude low-pass)
        d = n >> 18
        x = x[: n // (d + 1) * (d + 1)].reshape(-1, d + 1).mean(axis=1)
        fs_hz = fs_hz / (d + 1)
        n = x.size
    x = x - x.mean()
    w = np.hanning(n)
    nfft = fast_length(4 * n)
    spec = np.abs(np.fft.rfft(x * w, nfft))
    freqs = np.arange(spec.size) * fs_hz / nfft
    band = np.nonzero((freqs >= f_lo_hz) & (freqs <= f_hi_hz))[0]
    if band.size < 3:
        return float("nan"), 0.0
    k = band[np.argmax(spec[band])]
    if k <= 0 or k >= spec.size - 1 or spec[k] <= 0:
        return float("nan"), 0.0
    a, b, c = np.log(spec[k - 1 : k + 2] + 1e-300)
    denom = a - 2 * b + c
    delta = 0.5 * (a - c) / denom if denom != 0 else 0.0
    delta = float(np.clip(delta, -0.5, 0.5))
    amp_rms = spec[k] / (w.sum() / 2) / np.sqrt(2)
    return float((k + delta) * fs_hz / nfft), float(amp_rms)


def detect_nominal(freq_hz: float) -> int | None:
    """50 or 60 for a measured frequency within 10 % of either, otherwise None. [Hz]"""
    if not np.isfinite(freq_hz):
        return None
    for nominal in (50, 60):
        if abs(freq_hz - nominal) <= 0.1 * nominal:
            return nominal
    return None


@dataclass(frozen=True)
class TrackResult:
    """Window boundaries found in one block of samples.

    Attributes
    ----------
    boundaries : numpy.ndarray
        Fractional sample positions (global index) of window edges; ``len = n_windows + 1``;
        the first element is the requested start. [samples]
    weak : bool
        True when the reference's fundamental was too weak for tracking anywhere in the block.
    amplitude : float
        Median rms of the reference fundamental over the block. [A] or [V]
    """

    boundaries: np.ndarray
    weak: bool
    amplitude: float
    halves: np.ndarray | None = None
    """Positions where each window's cycle count reaches half its cycles (global index), the
    curvature of the phase within the window for phase-uniform resampling. [samples]"""


def window_boundaries(
    x,
    fs_hz: float,
    f_demod_hz: float,
    start: float,
    cycles_per_window: int,
    *,
    offset: int = 0,
    final: bool = False,
    compiled: bool | None = None,
) -> TrackResult:
    """Find the edges of synchronous windows in a block of the reference channel.

    Parameters
    ----------
    x : array_like
        Reference samples of the block; ``x[0]`` has global index ``offset``. [A] or [V]
    fs_hz : float
        Sample rate. [Hz]
    f_demod_hz : float
        Demodulation frequency, the coarse estimate of the fundamental. [Hz]
    start : float
        Global fractional sample position where the first window starts. [samples]
    cycles_per_window : int
        10 for 50 Hz systems, 12 for 60 Hz systems. [unitless]
    offset : int, optional
        Global index of ``x[0]``. [samples]
    final : bool, optional
        The block is the end of the record: the last windows may end up to half a cycle after
        the last full tracking cycle (extrapolated at the last measured frequency).
    compiled : bool or None, optional
        Run the sums as compiled loops (default when available) or as their NumPy
        definitions; the two agree to rounding.

    Returns
    -------
    TrackResult
        ``boundaries[0] == start``; only windows that fit in the block are returned.

    Examples
    --------
    >>> fs, f = 10_000.0, 49.5
    >>> t = np.arange(20_000) / fs
    >>> tr = window_boundaries(np.cos(2 * np.pi * f * t), fs, 50.0, 0.0, 10)
    >>> round(10 * fs / np.diff(tr.boundaries).mean(), 6)
    49.5
    """
    x = np.asarray(x, dtype=np.float64)
    missing = ~np.isfinite(x)
    if missing.any():
        x = np.where(missing, 0.0, x)
    L = fs_hz / f_demod_hz
    local0 = start - offset
    n_cyc = int(np.floor((x.size - local0) / L + 1e-9))
    empty = TrackResult(np.array([start]), False, 0.0)
    if n_cyc < 2:
        return empty
    # pass 1: cycles of the demodulation frequency
    edges = local0 + L * np.arange(n_cyc + 1)
    z = _demodulated_sums(x, -2 * np.pi * f_demod_hz / fs_hz, edges, compiled)
    mag = np.abs(z) * (np.sqrt(2) / L)  # rms of the fundamental per cycle
    amp = median(mag)
    total_rms = float(np.sqrt(np.mean(x**2))) if x.size else 0.0
    weak = amp <= 1e-3 * max(total_rms, 1e-300) or amp == 0.0
    bad_cycle = _bad_cycles(mag, amp, missing, edges)
    dang = np.angle(z[1:] * np.conj(z[:-1])) / (2 * np.pi)
    mid = 0.5 * (edges[1:] + edges[:-1])
    raw_count = np.concatenate(([0.0], np.cumsum(1.0 + _fill_bad(dang, bad_cycle))))
    count = _smooth_counts(raw_count)
    # pass 2: demodulate by the phase pass 1 found, one of its cycles at a time; what is left
    # is the deviation of the true phase from that model, free of the leakage an off-frequency
    # demodulation lets in (harmonics, the negative-frequency image) after a frequency step
    head = tail = slice(0, mid.size)
    if not weak and mid.size >= 3:
        spread = np.inf
        for _ in range(PASSES):  # each pass leaves about the previous model's error squared
            mid2, model, raw2, bad2 = _second_pass(x, missing, mid, count, amp, local0,
                                                   compiled=compiled)
            if mid2.size < 3 or np.max(np.abs(raw2 - model)) > MAX_CORRECTION:
                break  # no steady phase to refine (noise, no mains): keep what there is
            mid, raw_count = mid2, raw2
            segments = _segments(mid, raw_count, bad2)
            count = np.concatenate([_smooth_counts(raw_count[sl]) for sl in segments])
            head, tail = segments[0], segments[-1]
            last, spread = spread, float(np.ptp(raw2 - model))
            if spread < CONVERGED or spread > STALLED * last:
                break  # the model was right, or its error is down to the reference's noise
    # Cycle count at the start edge: a straight line through the first cycles' counts,
    # extended half a cycle back (the same at the end of the record); never across a step.
    count_start, _ = _edge_line(mid[head], raw_count[head], local0, first=True)
    last_count = count[-1]
    if final:
        end = float(x.size)
        count_end, rate1 = _edge_line(mid[tail], raw_count[tail], end, first=False)
        mid = np.append(mid, end)
        count = np.append(count, max(count_end, count[-1]))
        last_count = count[-1]
    # a window may end up to half a sample past the data (it is rounded to whole samples)
    slack = 0.5 / L
    n_win = int(np.floor((last_count - count_start + slack) / cycles_per_window))
    targets = count_start + cycles_per_window * np.arange(1, n_win + 1)
    rate_end = rate1 if final else None

    def where(c):  # position where the count reaches c (extrapolated past the last point)
        pos = np.interp(c, count, mid, right=np.nan) if c.size else np.empty(0)
        over = ~np.isfinite(pos)
        if over.any():
            slope = rate_end if rate_end else (count[-1] - count[-2]) / (mid[-1] - mid[-2])
            pos[over] = mid[-1] + (c[over] - count[-1]) / slope
        return pos

    ends = where(targets)
    halves = where(targets - 0.5 * cycles_per_window)
    boundaries = np.concatenate(([start], ends + offset))
    return TrackResult(boundaries, bool(weak), amp, halves + offset)


def median(a) -> float:
    """``float(numpy.median(a))`` of a 1-d float array, the same value (the middle element, or
    the mean of the two middle ones), NaN when any element is NaN, without ``numpy.median``'s
    fixed cost per call (about 0.1 ms, and the import of ``numpy.ma`` on its first call): the
    tracker takes several medians of a few thousand values per block."""
    a = np.asarray(a, dtype=np.float64).ravel()
    n = a.size
    if n == 0:
        return float("nan")
    if np.isnan(a).any():
        return float("nan")
    k = n // 2
    part = np.partition(a, (k - 1, k) if n % 2 == 0 else k)
    return float(part[k]) if n % 2 else float((part[k - 1] + part[k]) / 2)


def _demodulated_sums(x, omega: float, edges, compiled=None):
    """Sums of ``x exp(j omega k)`` (``k`` the sample index) between successive fractional
    positions ``edges``: the C loop (:func:`pqcheck._native.cycle_sums`, one pass and no
    temporaries) when available, else the NumPy definition (:func:`_cycle_sums_numpy`); the
    phasor comes from the same two tables (:func:`_phasor_tables`) in both."""
    from . import _compiled

    fine, coarse = _phasor_tables(omega, x.size)
    native = _compiled.cycle_sums() if compiled is not False else None
    if native is not None and x.size and np.all(np.diff(edges) >= 0):
        return native(x, fine, coarse, edges)
    return _cycle_sums_numpy(x * _phasor(omega, x.size, (fine, coarse)), edges)


def _cycle_sums_numpy(y, edges):
    """Sums of ``y`` between successive fractional positions ``edges``."""
    csum = np.empty(y.size + 1, dtype=y.dtype)
    csum[0] = 0.0
    np.cumsum(y, out=csum[1:])
    at = _cum_at(csum, y, edges)
    return at[1:] - at[:-1]


def _bad_cycles(mag, amp, missing, edges):
    """Cycles with no usable fundamental: weak, or touching missing samples."""
    bad = mag < max(0.2 * amp, 1e-12)
    if missing.any():  # cycles that touch missing samples carry no phase information
        cmiss = np.concatenate(([0], np.cumsum(missing)))
        lo_i = np.clip(np.floor(edges[:-1]).astype(np.int64), 0, missing.size)
        hi_i = np.clip(np.ceil(edges[1:]).astype(np.int64), 0, missing.size)
        bad |= (cmiss[hi_i] - cmiss[lo_i]) > 0
    return bad


def _fill_bad(dang, bad_cycle):
    """Phase advances that involve a bad cycle take the last good one (or the first)."""
    bad = bad_cycle[1:] | bad_cycle[:-1]
    if bad.any() and (~bad).any():
        good_vals = np.where(bad, np.nan, dang)
        idx = np.where(~bad, np.arange(dang.size), 0)
        np.maximum.accumulate(idx, out=idx)
        filled = good_vals[idx]
        first_good = np.flatnonzero(~bad)[0]
        filled[:first_good] = dang[first_good]
        return filled
    if bad.all():
        return np.zeros_like(dang)
    return dang


def _model_phase(n_pos, mid, count):
    """The cycle count at positions ``n_pos``: linear between cycle mid-points, extended at
    the first and last slopes. [cycles]"""
    ph = np.interp(n_pos, mid, count)
    lo, hi = n_pos < mid[0], n_pos > mid[-1]
    if lo.any():
        ph[lo] = count[0] + (n_pos[lo] - mid[0]) * (count[1] - count[0]) / (mid[1] - mid[0])
    if hi.any():
        ph[hi] = count[-1] + (n_pos[hi] - mid[-1]) * (count[-1] - count[-2]) / (
            mid[-1] - mid[-2])
    return ph


def _model_position(c, mid, count):
    """Inverse of :func:`_model_phase`: the position where the model count reaches ``c``
    (linear between cycle mid-points, extended at the first and last slopes). [samples]"""
    c = np.asarray(c, dtype=np.float64)
    pos = np.interp(c, count, mid)
    lo, hi = c < count[0], c > count[-1]
    if lo.any():
        pos[lo] = mid[0] + (c[lo] - count[0]) * (mid[1] - mid[0]) / (count[1] - count[0])
    if hi.any():
        pos[hi] = mid[-1] + (c[hi] - count[-1]) * (mid[-1] - mid[-2]) / (
            count[-1] - count[-2])
    return pos


def _second_pass(x, missing, mid, count, amp, local0, *, compiled=None):
    """Cycle count measured against the phase model ``count(mid)`` of the previous pass.

    The reference is multiplied by ``exp(-j 2 pi phi(n))`` (``phi`` the model count) and
    summed with a Hann weight over two model cycles centred on each model cycle's middle
    (``phi = k + 1/2``, in cycles from the first window's start). The angle of each sum is the
    true phase minus the model's (plus a constant), so the true count there is the model's
    plus that angle over 2 pi. Relative to the model, DC, every harmonic and the negative-
    frequency image turn at whole multiples of one cycle per cycle: two Hann bins or more
    apart, where the Hann window's response is zero; and the weight vanishes at both ends,
    so fractional cycle edges do not matter. Returns the centres (positions), the model
    counts there, the measured counts and the centres without a usable phase.

    The sums run as a compiled loop (:func:`pqcheck.dsp._compiled.phase_sums`) when
    available, else as the NumPy definition below (``compiled=False``); they agree to
    rounding."""
    from . import _compiled

    if compiled is None:
        compiled = _compiled.available()
    ends = _model_phase(np.array([0.0, x.size - 1.0, float(local0)]), mid, count)
    phi0 = float(ends[2])
    k_first = int(np.ceil(ends[0] - phi0 + 0.5 - 1e-9))  # first window [k-1/2, k+3/2] inside
    k_last = int(np.floor(ends[1] - phi0 - 1.5 + 1e-9))
    if k_last - k_first < 2:
        return mid, count, count, np.zeros(count.size, dtype=bool)
    nz = k_last - k_first + 1
    if compiled:
        zr, zi, wsum = _compiled.phase_sums(x, mid, count, phi0, k_first, nz)
    else:
        zr, zi, wsum = _phase_sums_numpy(x, mid, count, phi0, k_first, nz)
    z = zr + 1j * zi
    miss = np.zeros(nz)
    if missing.any():
        # samples of window i: model count (from the first window's start) in [k - 1/2,
        # k + 3/2), k = k_first + i
        ks_edges = _model_position(phi0 + k_first + np.arange(nz + 2) - 0.5, mid, count)
        b_idx = np.clip(np.ceil(ks_edges - 1e-12).astype(np.int64), 0, missing.size)
        mcum = np.concatenate(([0], np.cumsum(missing)))
        miss = (mcum[b_idx[2:]] - mcum[b_idx[:-2]]).astype(np.float64)
    ks = np.arange(k_first, k_last + 1, dtype=np.float64)
    mag = np.sqrt(2) * np.abs(z) / np.maximum(wsum, 1e-300)
    bad = (mag < max(0.2 * amp, 1e-12)) | (wsum <= 0) | (miss > 0)
    theta = np.unwrap(np.angle(z))
    if bad.any() and (~bad).any():
        good = np.flatnonzero(~bad)
        theta = np.interp(np.arange(theta.size), good, theta[good])
    centres = _model_position(ks + 0.5 + phi0, mid, count)
    model = ks + 0.5 + phi0
    raw = model + (theta - theta[0]) / (2 * np.pi)
    return centres, model, raw, bad


def _phase_sums_numpy(x, mid, count, phi0, k_first, nz):
    """The sums of :func:`_second_pass` in NumPy (the definition the compiled loop follows):
    the real and imaginary parts of the Hann-weighted sums of ``x exp(-j 2 pi phi)`` of each
    two-cycle window and the sums of the weights, each shape ``(nz,)``."""
    n = np.arange(x.size, dtype=np.float64)
    phi = _model_phase(n, mid, count)
    rel = phi - phi0  # cycles from the first window's start
    ang = 2 * np.pi * (phi - np.floor(phi))
    yr, yi = x * np.cos(ang), -x * np.sin(ang)  # x exp(-j 2 pi phi)
    del ang
    # sample n lies in windows j = lead(n) (weight w) and j + 1 (weight 1 - w: the two Hann
    # halves, cos^2 and sin^2 of the same angle); lead is non-decreasing, so the sums over
    # each j are sums over contiguous runs (reduceat)
    lead = np.floor(rel + 0.5) - 1.0 - k_first
    w = np.sin(0.5 * np.pi * (rel - (lead + k_first) + 0.5)) ** 2
    # run r holds the samples with lead = r - 2: before the first window (r <= 1, only the
    # later half of window 0 when r = 1), windows 0 .. nz - 1, past the last (r = nz + 2)
    j = np.clip(lead, -2, nz).astype(np.int64) + 2
    starts = np.searchsorted(j, np.arange(nz + 3))
    has = starts < j.size
    run = np.zeros((5, nz + 3))

    def sums(v):
        out = np.zeros(nz + 3)
        s0 = starts[has]
        red = np.add.reduceat(v, s0)
        empty = np.append(s0[1:] == s0[:-1], s0[-1] >= j.size) if s0.size else s0
        out[np.flatnonzero(has)] = np.where(empty, 0.0, red)
        return out

    run[0], run[1], run[2], run[3] = sums(w * yr), sums(w * yi), sums(yr), sums(yi)
    run[4] = sums(w)
    cnt = np.diff(np.append(starts, j.size)).astype(np.float64)
    # window j: its own samples at weight w, plus the previous run's at 1 - w
    own, prev = slice(2, nz + 2), slice(1, nz + 1)
    zr = run[0, own] + (run[2, prev] - run[0, prev])
    zi = run[1, own] + (run[3, prev] - run[1, prev])
    wsum = run[4, own] + (cnt[prev] - run[4, prev])
    return zr, zi, wsum


PASSES = 3
"""Passes of :func:`_second_pass` after the first demodulation."""

CONVERGED = 1e-6
"""A pass whose corrections all lie within this (cycles) ends the refinement."""

STALLED = 0.5
"""A pass whose corrections spread more than this fraction of the previous pass's also ends
the refinement: the model's error no longer shrinks (it is down to the noise and harmonics of
the reference), so a further pass would change the boundaries by noise alone."""

MAX_CORRECTION = 0.1
"""Largest phase correction (cycles) a pass may make; more means the reference holds no
steady fundamental to refine, and the previous pass stands."""

STEP_RUN = 5
"""Cycles on each side of a candidate frequency step whose median frequencies are compared."""


def _segments(mid, count, bad):
    """Slices of cycles between detected frequency steps.

    For each cycle, straight lines through the frequencies (count advance over length) of
    the :data:`STEP_RUN` cycles before and after it are extended to it; a step is where the
    two differ by more than eight times the scatter of the frequencies (a robust estimate
    from their second differences: 1.48 median absolute deviation over sqrt 6, zero on any
    ramp) and by more than 2e-5 of the frequency, at the largest difference within a run. Smoothing then stays inside each slice, so a step is not smeared over
    the windows beside it."""
    full = [slice(0, count.size)]
    r = STEP_RUN
    if count.size < 2 * r + 2:
        return full
    f = np.diff(count) / np.diff(mid)  # cycles per sample, between mid-points
    if bad.any():
        return full
    from numpy.lib.stride_tricks import sliding_window_view as swv

    # straight lines through the r cycles after and the r cycles before cycle i - 1, each
    # extended to it: on a steady ramp they meet; at a step they differ by its size
    u = np.arange(r, dtype=np.float64)
    uc = u - u.mean()
    w_right = 1.0 / r + uc * (-1.0 - u.mean()) / np.sum(uc**2)  # value at u = -1
    w_left = 1.0 / r + uc * (r - u.mean()) / np.sum(uc**2)  # value at u = r
    rows = swv(f, r)  # rows[i] = f[i : i + r]
    i = np.arange(r + 1, f.size - r + 1)
    jump = rows[i] @ w_right - rows[i - r - 1] @ w_left
    d2 = np.diff(f, 2)
    scatter = 1.4826 * median(np.abs(d2 - median(d2))) / np.sqrt(6.0)
    level = median(np.abs(f))
    big = np.abs(jump) > np.maximum(8 * scatter, 2e-5 * level)
    if not big.any():
        return full
    cuts = []
    for run in np.split(np.flatnonzero(big), np.flatnonzero(np.diff(np.flatnonzero(big)) > 1)
                        + 1):
        j = run[np.argmax(np.abs(jump[run]))]
        cuts.append(int(i[j]))  # the step lies in f[i - 1]: between mid-points i-1 and i
    # the two centres beside a step see it through their two-cycle Hann weight: they form
    # a slice of their own (kept unsmoothed) so that neither side's fit takes them in
    out, lo = [], 0
    for cut in cuts:
        a, b = max(lo, cut - 1), min(count.size, cut + 1)
        if a > lo:
            out.append(slice(lo, a))
        if b > a:
            out.append(slice(a, b))
        lo = b
    if lo < count.size:
        out.append(slice(lo, count.size))
    return out


SMOOTH_CYCLES = 11
"""Cycles in the local quadratic fit that smooths the cycle count (see :func:`_smooth_counts`)."""


EDGE_CYCLES = 41
"""Cycles whose quadratic fit gives the curvature of the count at the record's edges."""


def _edge_line(mid, count, at, *, first):
    """Value and slope at ``at`` of a straight line fitted to the first (or last) 11 cycles,
    after removing the curvature a quadratic over :data:`EDGE_CYCLES` cycles finds.

    A line over 11 cycles passes little of the ripple an interharmonic beside the fundamental
    puts on the phase; alone it misses a frequency ramp's curvature (2 mHz at the first window
    of a 0.1 Hz/s ramp). The curvature is taken from a longer span, where that ripple
    averages out, so a ramp is followed to the edges exactly."""
    n = min(SMOOTH_CYCLES, mid.size)
    sl = slice(0, n) if first else slice(mid.size - n, mid.size)
    if n < 2:
        return float(count[sl][0]), 1.0 / max(float(mid[1] - mid[0]), 1.0) if mid.size > 1 \
            else 0.0
    u = mid[sl] - at
    c2 = 0.0
    if mid.size >= EDGE_CYCLES:  # the curvature from more cycles, where ripple averages out
        wide = slice(0, EDGE_CYCLES) if first else slice(mid.size - EDGE_CYCLES, mid.size)
        c2 = np.polyfit(mid[wide] - at, count[wide], 2)[0]
    slope, intercept = np.polyfit(u, count[sl] - c2 * u**2, 1)
    return float(intercept), float(slope)


_SG = np.array([-36, 9, 44, 69, 84, 89, 84, 69, 44, 9, -36], dtype=np.float64) / 429.0
"""Savitzky-Golay smoothing weights, 11 points, quadratic (Savitzky & Golay 1964, Table I)."""


def _smooth_counts(count):
    """Local quadratic least-squares fit (Savitzky-Golay) of the cycle count over 11 cycles.

    The count follows the fundamental's phase, a smooth function of time: a quadratic over
    0.2 s follows any realistic frequency drift exactly. What a single cycle's phase adds on
    top is interference that beats against the fundamental, above all an interharmonic near
    it on the reference channel (for example 3 % at 75 Hz beats at 25 Hz, a two-cycle
    ripple); the fit attenuates such ripple by more than an order of magnitude, so the window
    edges no longer jitter with it. The first and last five points take the quadratic fitted
    to the first or last eleven (as ``scipy.signal.savgol_filter(mode="interp")``).
    """
    n = SMOOTH_CYCLES
    if count.size < n:
        return count
    out = np.empty_like(count)
    half = n // 2
    out[half:-half] = np.convolve(count, _SG, mode="valid")
    # the quadratic least-squares fit to the first (last) n points, evaluated at them: the
    # fixed projection _SG_HAT applied to them (what numpy.polyfit and polyval give)
    out[:half] = _SG_HAT[:half] @ count[:n]
    out[-half:] = _SG_HAT[n - half:] @ count[count.size - n:]
    return out


def _hat(n: int) -> np.ndarray:
    """Projection onto quadratics at ``n`` equally spaced points (the least-squares fit of a
    quadratic, evaluated at the same points): ``V (V^T V)^-1 V^T``, ``V`` the Vandermonde
    matrix of ``0 .. n-1`` centred on the middle point (well conditioned)."""
    u = np.arange(n, dtype=np.float64) - (n - 1) / 2
    v = np.vander(u, 3)
    return v @ np.linalg.solve(v.T @ v, v.T)


_SG_HAT = _hat(SMOOTH_CYCLES)


def _cum_at(csum, y, pos):
    """Cumulative sum of ``y`` up to fractional position ``pos`` (partial last sample)."""
    i = np.floor(pos).astype(np.int64)
    frac = pos - i
    i = np.clip(i, 0, y.size)
    return csum[i] + frac * y[np.minimum(i, y.size - 1)]


def _phasor_tables(omega: float, n: int):
    """The two short tables of :func:`_phasor`: ``fine[k] = exp(1j omega k)`` for ``k < p``
    and ``coarse[r] = exp(1j omega p r)`` for the rows covering ``n`` samples."""
    p = 4096
    rows = -(-n // p)
    fine = np.exp(1j * omega * np.arange(p))
    coarse = np.exp(1j * omega * p * np.arange(rows))
    return fine, coarse


def _phasor(omega: float, n: int, tables=None) -> np.ndarray:
    """``exp(1j * omega * arange(n))`` from two short tables (one complex multiply per sample
    instead of a complex exponential): sample ``k`` is ``coarse[k // p] * fine[k % p]``."""
    fine, coarse = _phasor_tables(omega, n) if tables is None else tables
    return (coarse[:, None] * fine[None, :]).ravel()[:n]
