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
    from scipy import fft as sfft  # imported here: scipy.fft is slow to import

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
    nfft = sfft.next_fast_len(4 * n, real=True)
    spec = np.abs(sfft.rfft(x * w, nfft))
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


def window_boundaries(
    x,
    fs_hz: float,
    f_demod_hz: float,
    start: float,
    cycles_per_window: int,
    *,
    offset: int = 0,
    final: bool = False,
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
    x = np.where(missing, 0.0, x)
    L = fs_hz / f_demod_hz
    local0 = start - offset
    n_cyc = int(np.floor((x.size - local0) / L + 1e-9))
    empty = TrackResult(np.array([start]), False, 0.0)
    if n_cyc < 2:
        return empty
    edges = local0 + L * np.arange(n_cyc + 1)
    rot = _phasor(-2 * np.pi * f_demod_hz / fs_hz, x.size)
    csum = np.empty(x.size + 1, dtype=np.complex128)
    csum[0] = 0.0
    np.cumsum(x * rot, out=csum[1:])
    z = _cum_at(csum, x * rot, edges[1:]) - _cum_at(csum, x * rot, edges[:-1])
    mag = np.abs(z) * (np.sqrt(2) / L)  # rms of the fundamental per cycle
    amp = float(np.median(mag))
    total_rms = float(np.sqrt(np.mean(x**2))) if x.size else 0.0
    weak_cycle = mag < max(0.2 * amp, 1e-12)
    if missing.any():  # cycles that touch missing samples carry no phase information
        cmiss = np.concatenate(([0], np.cumsum(missing)))
        lo_i = np.clip(np.floor(edges[:-1]).astype(np.int64), 0, x.size)
        hi_i = np.clip(np.ceil(edges[1:]).astype(np.int64), 0, x.size)
        weak_cycle |= (cmiss[hi_i] - cmiss[lo_i]) > 0
    weak = amp <= 1e-3 * max(total_rms, 1e-300) or amp == 0.0
    dang = np.angle(z[1:] * np.conj(z[:-1])) / (2 * np.pi)
    # Cycles with no usable fundamental (gaps, dropouts) keep the last frequency.
    bad = weak_cycle[1:] | weak_cycle[:-1]
    if bad.any() and (~bad).any():
        good_vals = np.where(bad, np.nan, dang)
        idx = np.where(~bad, np.arange(dang.size), 0)
        np.maximum.accumulate(idx, out=idx)
        filled = good_vals[idx]
        first_good = np.flatnonzero(~bad)[0]
        filled[:first_good] = dang[first_good]
        dang = filled
    elif bad.all():
        dang = np.zeros_like(dang)
    mid = 0.5 * (edges[1:] + edges[:-1])
    raw_count = np.concatenate(([0.0], np.cumsum(1.0 + dang)))
    count = _smooth_counts(raw_count)
    # Cycle count at the start edge: a straight line through the first cycles' counts,
    # extended half a cycle back (the same at the end of the record).
    count_start, _ = _edge_line(mid, raw_count, local0, first=True)
    last_count = count[-1]
    if final:
        end = float(x.size)
        count_end, rate1 = _edge_line(mid, raw_count, end, first=False)
        mid = np.append(mid, end)
        count = np.append(count, max(count_end, count[-1]))
        last_count = count[-1]
    # a window may end up to half a sample past the data (it is rounded to whole samples)
    slack = 0.5 / L
    n_win = int(np.floor((last_count - count_start + slack) / cycles_per_window))
    targets = count_start + cycles_per_window * np.arange(1, n_win + 1)
    if final:
        ends = np.interp(targets, count, mid, right=np.nan) if n_win else np.empty(0)
        over = ~np.isfinite(ends)
        if over.any():  # within the half-sample slack: extrapolate at the last rate
            ends[over] = mid[-1] + (targets[over] - count[-1]) / rate1
    else:
        ends = np.interp(targets, count, mid) if n_win else np.empty(0)
    boundaries = np.concatenate(([start], ends + offset))
    return TrackResult(boundaries, bool(weak), amp)


SMOOTH_CYCLES = 11
"""Cycles in the local quadratic fit that smooths the cycle count (see :func:`_smooth_counts`)."""


def _edge_line(mid, count, at, *, first):
    """Value and slope at ``at`` of a straight line fitted to the first (or last) cycles.

    A line rather than a quadratic: extrapolated half a cycle, a quadratic amplifies the
    ripple of an interharmonic on the reference more than it gains on a frequency ramp (on a
    0.1 Hz/s ramp the line leaves the first window 1.4 mHz off, 0.003 % of 50 Hz)."""
    n = min(SMOOTH_CYCLES, mid.size)
    sl = slice(0, n) if first else slice(mid.size - n, mid.size)
    if n < 2:
        return float(count[sl][0]), 1.0 / max(mid[1] - mid[0], 1.0) if mid.size > 1 else 0.0
    slope, intercept = np.polyfit(mid[sl] - at, count[sl], 1)
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
    k = np.arange(n, dtype=np.float64)
    for sl, pos in ((slice(0, n), slice(0, half)), (slice(count.size - n, count.size),
                                                    slice(n - half, n))):
        coef = np.polyfit(k, count[sl], 2)
        edge = np.polyval(coef, k)
        if pos.start == 0:
            out[:half] = edge[:half]
        else:
            out[-half:] = edge[pos]
    return out


def _cum_at(csum, y, pos):
    """Cumulative sum of ``y`` up to fractional position ``pos`` (partial last sample)."""
    i = np.floor(pos).astype(np.int64)
    frac = pos - i
    i = np.clip(i, 0, y.size)
    return csum[i] + frac * y[np.minimum(i, y.size - 1)]


def _phasor(omega: float, n: int) -> np.ndarray:
    """``exp(1j * omega * arange(n))`` from two short tables (one complex multiply per sample
    instead of a complex exponential)."""
    p = 4096
    rows = -(-n // p)
    fine = np.exp(1j * omega * np.arange(p))
    coarse = np.exp(1j * omega * p * np.arange(rows))
    return (coarse[:, None] * fine[None, :]).ravel()[:n]
