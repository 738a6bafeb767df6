"""Software-synchronised DFT of each window and the IEC 61000-4-7 groupings of its lines.

Windows come from :mod:`pqcheck.dsp.tracking` as fractional sample positions: each spans
exactly ``cycles_per_window`` tracked fundamental periods, ``L`` samples with ``L`` not a whole
number in general. Every window is *resampled* to ``M`` equally spaced points over exactly that
span (``M`` = the smallest fast FFT length at or above ``round(L)``), by band-limited
interpolation (:func:`sync_kernel`: a Kaiser-windowed sinc, cut-off at half the input rate,
100 dB stopband, tabulated at 2^15 phases), and only then transformed. The DFT of the
resampled window is synchronous: every harmonic of the tracked fundamental sits exactly on its
line and every line is one of the exact span's lines (5 Hz apart at 50 and 60 Hz), so components, subgroups, groups and interharmonic groups are all taken from exact lines
and nothing needs correcting afterwards.

What the resampling leaves: the interpolation kernel's passband ripple and stopband leakage
(about 1e-5 of the content concerned, see :func:`sync_kernel`), the phase table's rounding
(a time jitter below 1.6e-5 samples), and at the two ends of the record an extension of the
samples by linear prediction for the half kernel that reaches past the data. When ``L`` is a
whole number and the window starts on a sample, the resampling is the identity.

Runs of windows of equal ``M`` are resampled and transformed together (one batched
``numpy.fft.rfft`` per run, runs spread over threads): no Python loop runs per window.

Line values are rms phasors: ``C_k = sqrt(2) X_k / M`` for ``k >= 1`` and ``C_0 = X_0 / M``.
"""

from __future__ import annotations

import functools
import os
import threading
from dataclasses import dataclass

import numpy as np

from . import _compiled

__all__ = ["WindowBlock", "analyse_windows", "harmonic_groupings", "sync_kernel",
           "kernel_for", "resample_windows", "FFT_WORKERS"]

FFT_WORKERS = int(os.environ.get("PQCHECK_FFT_WORKERS", "-1"))
"""Threads of the resampling and transforms: -1 uses every CPU. Batch worker
processes set it to 1 so that N processes do not start N x CPUs threads; the environment
variable ``PQCHECK_FFT_WORKERS`` sets it too."""

STOPBAND_DB = 100.0
"""Attenuation of the interpolation kernel outside the band that is kept. [dB]"""

PHASES = 1 << 12
"""Fractional positions at which the interpolation kernel is tabulated (a power of two); a
point between two of them takes the weights interpolated linearly between their rows."""

MAX_TAPS = 512
"""Longest interpolation kernel (:func:`kernel_for` never asks for more)."""

GUARD = MAX_TAPS // 2 + 2
"""Samples a caller keeps on both sides of the windows it passes to :func:`analyse_windows`
(inside a record; at its ends the samples are extended instead). [samples]"""


@dataclass(frozen=True)
class WindowBlock:
    """Spectra and time-domain statistics of a run of windows.

    Attributes
    ----------
    lines : numpy.ndarray
        complex, shape ``(W, C, K + 1)``: rms phasor of spectral lines 0..K of the exact
        window span, spaced ``1 / T_w`` (5 Hz at 50 Hz). [A] or [V]
    gain : numpy.ndarray
        complex, shape ``(W, K + 1)``: response of each line to a component sitting exactly
        on it; all ones, since the windows are resampled to their exact span (kept for
        callers that divide by it).
    rms, mean : numpy.ndarray
        shape ``(W, C)``: true rms and mean of the recorded whole samples between the
        window's rounded edges (all content, also above the analysed band). [A] or [V]
    peak : numpy.ndarray
        shape ``(W, C)``: largest absolute recorded sample in the window. [A] or [V]
    products : numpy.ndarray
        shape ``(W, len(pairs))``: mean of the product of two channels over the same whole
        samples (active power for a voltage/current pair). [W]
    combo_rms : numpy.ndarray
        shape ``(W, len(combos))``: rms of linear combinations of channels (line-to-line
        voltages, neutral current). [V] or [A]
    n_samples : numpy.ndarray
        shape ``(W,)``: points of the resampled window (``M``). [samples]
    mismatch : numpy.ndarray
        shape ``(W,)``: exact window length in recorded samples minus ``n_samples``. [samples]
    valid : numpy.ndarray
        shape ``(W,)``: False when a window holds a non-finite sample.
    """

    lines: np.ndarray
    gain: np.ndarray
    rms: np.ndarray
    peak: np.ndarray
    mean: np.ndarray
    products: np.ndarray
    combo_rms: np.ndarray
    n_samples: np.ndarray
    mismatch: np.ndarray
    valid: np.ndarray
    extra: np.ndarray | None = None
    extra_lines: np.ndarray | None = None


@dataclass(frozen=True)
class SyncKernel:
    """Tabulated band-limited interpolation kernel (see :func:`sync_kernel`).

    Attributes
    ----------
    taps : int
        Samples each interpolated point is computed from (even). [samples]
    table : numpy.ndarray
        shape ``(PHASES + 1, taps)``: weight of sample ``i0 - taps/2 + 1 + j`` for a point at
        ``i0 + p / PHASES``, row ``p``; each row sums to 1.
    """

    taps: int
    table: np.ndarray

    @property
    def half(self) -> int:
        """Samples the kernel reaches before a point (``taps / 2 - 1``) and after it
        (``taps / 2``). [samples]"""
        return self.taps // 2


def kernel_for(band: float, stopband_db: float = STOPBAND_DB) -> SyncKernel:
    """Interpolation kernel keeping ``[0, band]`` (cycles per recorded sample) exact to the
    stopband level.

    Notes
    -----
    Passband ``[0, band]``, stopband from ``stop = 0.5 + (0.5 - band) / 2`` up. A recorded
    component between ``band`` and half the rate has its image above half the rate; an image
    that passed would sit off the window's lines and leak into them (a 2 % 49th harmonic at
    5 kS/s, 3 samples per period short of the Nyquist rate, read 3e-4 of the fundamental
    into order 38 with the cut-off at half the rate). With the stopband from ``stop`` the
    images of everything below ``1 - stop`` are removed, and what passes lies at least
    ``stop - band`` (half the distance from the band to half the rate) above the kept lines,
    where the rectangular window's leakage is below ``1 / (pi (stop - band) L)`` of it (2e-4
    at 20 kS/s) -- content that a recorder's anti-aliasing filter removes anyway. The
    resampled window has ``M >= L`` points, so no stopband content folds back onto a kept
    line. Kaiser's length formula for a transition ``stop - band`` wide (Kaiser 1974;
    Oppenheim & Schafer, Discrete-Time Signal Processing, eq. 7.63 -- from memory). ``band``
    is rounded up to a 1/512 grid so that few distinct kernels are built.
    """
    band = min(np.ceil(float(band) * 512) / 512, 0.48)
    stop = 0.5 + 0.5 * (0.5 - band)
    width = stop - band
    taps = int(np.ceil((stopband_db - 7.95) / (2.285 * 2 * np.pi * width))) + 1
    # a multiple of 8 (never fewer): the compiled loop runs those counts unrolled
    taps = min(max(-(-taps // 8) * 8, 8), MAX_TAPS)
    return sync_kernel(taps, 0.5 * (band + stop), stopband_db)


@functools.lru_cache(maxsize=16)
def sync_kernel(taps: int, cutoff: float = 0.5, stopband_db: float = STOPBAND_DB) -> SyncKernel:
    """Kaiser-windowed sinc interpolation kernel with ``taps`` taps and a cut-off at
    ``cutoff`` cycles per sample, tabulated at :data:`PHASES` + 1 fractional positions.

    Notes
    -----
    ``h(u) = 2 fc sinc(2 fc u) I0(beta sqrt(1 - (2u/T)^2)) / I0(beta)``,
    ``beta = 0.1102 (A - 8.7)`` for a stopband of ``A`` dB (Kaiser 1974, from memory). Each
    row is normalised to sum 1 so that a constant passes exactly. A point between two
    tabulated phases takes the weights interpolated linearly between their rows (which also
    sum to 1): the error is at most ``(1 / PHASES)^2 / 8`` times the kernel's second
    derivative, under 1.7e-7 in the sum of the weights' errors for every kernel
    :func:`kernel_for` builds (``tests/test_native.py`` measures it against the closed form).
    Looking up the nearest row instead needed 2^15 rows for a position error of 1.5e-5
    samples (2e-5 rad at order 50 and 20 kS/s), and a table of 4 MB (56 MB at 5 kS/s) whose
    rows came from memory at every point; 2^12 interpolated rows fit in a core's cache.
    """
    beta = 0.1102 * (stopband_db - 8.7)
    half = taps // 2
    j = np.arange(-(half - 1), half + 1, dtype=np.float64)
    # rows 0 .. PHASES / 2; row PHASES - p is row p reversed: u = j - p / PHASES is exact, and
    # the set of taps of phase 1 - p / PHASES is that of p mirrored (the kernel is even)
    frac = np.arange(PHASES // 2 + 1, dtype=np.float64) / PHASES
    u = j[None, :] - frac[:, None]
    h = _kaiser_sinc(u, cutoff, beta, half)
    h /= h.sum(axis=1, keepdims=True)
    table = np.empty((PHASES + 1, taps))
    table[: PHASES // 2 + 1] = h
    table[PHASES // 2 + 1:] = h[PHASES // 2 - 1::-1, ::-1]
    return SyncKernel(taps, table)


def _kaiser_sinc_numpy(u, cutoff: float, beta: float, half: float):
    """The taps of :func:`sync_kernel` at offsets ``u`` (before the rows are normalised):
    ``2 fc sinc(2 fc u) I0(beta sqrt(1 - (u / half)^2)) / I0(beta)``."""
    arg = np.clip(1.0 - (u / half) ** 2, 0.0, 1.0)
    return 2 * cutoff * np.sinc(2 * cutoff * u) * np.i0(beta * np.sqrt(arg)) / np.i0(beta)


def _kaiser_sinc(u, cutoff: float, beta: float, half: float):
    """:func:`_kaiser_sinc_numpy`, by the C loop where the extension is built (the same to a
    few ulp, 10 to 20 times faster)."""
    from .. import _native

    if _native.kernels() is not None:
        return _native.kaiser_sinc(u, cutoff, beta, half)
    return _kaiser_sinc_numpy(u, cutoff, beta, half)


def _smooth_lengths(n: int):
    """Every seven-smooth whole number from ``n`` up to the next power of two (that power
    included), in no particular order: for each product of powers of 3, 5 and 7 below it,
    the smallest multiple by a power of two at least ``n`` (a larger one would pass the
    power of two). [samples]"""
    n = max(int(n), 1)
    top = 1 << (n - 1).bit_length()
    p7 = 1
    while p7 <= top:
        p5 = p7
        while p5 <= top:
            p3 = p5
            while p3 <= top:
                v = p3
                while v < n:
                    v *= 2
                if v <= top:
                    yield v
                p3 *= 3
            p5 *= 5
        p7 *= 7


@functools.lru_cache(maxsize=256)
def fast_length(n: int) -> int:
    """Smallest 7-smooth whole number at least ``n`` (a fast FFT length). [samples]"""
    return min(_smooth_lengths(n))


_CHUNK = 1 << 22
"""Elements of the largest temporary (channels x points x taps) the NumPy resampling builds
at once."""

_SPECTRUM_CHUNK = 1 << 21
"""Elements (channels x windows x points) resampled and transformed as one run."""


def resample_windows(samples, starts, lengths, m_points: int, kernel: SyncKernel, warp=None,
                     compiled: bool | None = None):
    """Band-limited resampling of windows to ``m_points`` points over their exact spans.

    Parameters
    ----------
    samples : numpy.ndarray
        shape ``(C, n)``, finite. [A] or [V]
    starts, lengths : numpy.ndarray
        shape ``(W,)``: window start (position of its first point) and exact length, in
        samples of ``samples``; the kernel must find ``kernel.half`` samples on both sides
        of every window inside ``samples``. [samples]
    m_points : int
        Points per resampled window. [samples]
    kernel : SyncKernel
    warp : numpy.ndarray or None
        shape ``(W,)``: quadratic warp ``kappa`` of each window (0: uniform in time).
    compiled : bool or None
        Use the compiled loop (:mod:`pqcheck.dsp._compiled`; default when available) or the
        NumPy definition (gathered taps and ``einsum``); the two agree to rounding.

    Returns
    -------
    numpy.ndarray
        shape ``(C, W, m_points)``: point ``m`` of window ``w`` is the band-limited value at
        ``starts[w] + lengths[w] (u + kappa_w u (1 - u))``, ``u = m / m_points``. [A] or [V]
    """
    samples = np.ascontiguousarray(samples, dtype=np.float64)
    starts = np.asarray(starts, dtype=np.float64)
    lengths = np.asarray(lengths, dtype=np.float64)
    n_win = starts.size
    warp = np.zeros(n_win) if warp is None else np.asarray(warp, dtype=np.float64)
    out = np.empty((samples.shape[0], n_win, m_points))
    if n_win == 0:
        return out
    if compiled is None:
        compiled = _compiled.available()  # resolved here, before any thread starts
    per = max(1, -(-n_win // (4 * _threads())))
    los = list(range(0, n_win, per))

    def chunk(lo):
        sl = slice(lo, min(n_win, lo + per))
        _resample_chunk(samples, starts[sl], lengths[sl], m_points, kernel, warp[sl], out,
                        np.arange(n_win)[sl], compiled)

    big = samples.shape[0] * n_win * m_points >= _SPECTRUM_CHUNK
    if big and _threads() > 1 and len(los) > 1:  # chunks are independent: any order
        list(_pool(_threads()).map(chunk, los))
    else:
        for lo in los:
            chunk(lo)
    return out


def _resample_chunk(samples, starts, lengths, m_points, kernel, warp, out, rows, compiled):
    """Resample windows ``starts, lengths, warp`` (on the calling thread) into
    ``out[:, rows]`` (``rows`` an index or mask along the window axis of ``out``)."""
    c_n = samples.shape[0]
    n_win = starts.size
    if n_win == 0:
        return
    if compiled is None:
        compiled = _compiled.available()
    if compiled:
        # the loop reads without bounds checks: the first and last points (the position is
        # monotonic in u for |kappa| < 1) must find the whole kernel inside the samples
        last = starts + lengths * (m_points - 1) / m_points
        lo_i = np.floor(np.minimum(starts, last)) - (kernel.half - 1)
        hi_i = np.floor(np.maximum(starts, last)) + kernel.half + 1
        if (lo_i.min() < 0 or hi_i.max() > samples.shape[1] or np.any(np.abs(warp) >= 1)
                or not np.all(np.isfinite(last))):
            raise IndexError("resample_windows: the kernel reaches past the samples")
        direct = (out.flags.c_contiguous and out.shape[1] == n_win and isinstance(rows, np.ndarray)
                  and rows.dtype == bool and bool(rows.all()))
        tmp = out if direct else np.empty((c_n, n_win, m_points))
        _compiled.resample_into(samples, starts, lengths, warp, kernel.table, kernel.half,
                                PHASES, tmp)
        if not direct:
            out[:, rows] = tmp
        return
    taps = kernel.taps
    view = np.lib.stride_tricks.sliding_window_view(samples, taps, axis=-1)
    per = max(1, _CHUNK // max(1, c_n * m_points * taps))
    u = np.arange(m_points, dtype=np.float64) / m_points
    curve = u * (1.0 - u)
    tmp = np.empty((c_n, n_win, m_points))
    for lo in range(0, n_win, per):
        sl = slice(lo, min(n_win, lo + per))
        pos = starts[sl, None] + lengths[sl, None] * u[None, :]
        if np.any(warp[sl]):
            pos += (lengths[sl] * warp[sl])[:, None] * curve[None, :]
        i0 = np.floor(pos)
        v = (pos - i0) * PHASES
        fp = np.floor(v)
        phase = fp.astype(np.intp)
        base = i0.astype(np.intp) - (kernel.half - 1)
        r0 = kernel.table[phase]  # (w, M, T)
        wts = r0 + (v - fp)[..., None] * (kernel.table[phase + 1] - r0)
        seg = view[:, base]  # (C, w, M, T)
        np.einsum("cwmt,wmt->cwm", seg, wts, out=tmp[:, sl])
    out[:, rows] = tmp


def _threads() -> int:
    """Threads for the resampling: one per CPU, or one when :data:`FFT_WORKERS` is 1 (batch
    worker processes)."""
    if FFT_WORKERS == 1:
        return 1
    return max(1, min(os.cpu_count() or 1, 8) if FFT_WORKERS < 1 else FFT_WORKERS)


_POOLS: dict = {}


def _pool(threads: int):
    """The thread pool of this process (one per thread count). A pool is never shared
    across ``fork``: a child (a batch worker, say) inherits the pool object but not its
    threads, so it makes its own."""
    from concurrent.futures import ThreadPoolExecutor

    key = (os.getpid(), threads)
    if key not in _POOLS:
        _POOLS[key] = ThreadPoolExecutor(max_workers=threads,
                                         thread_name_prefix="pqcheck-resample")
    return _POOLS[key]


def _extend(samples, before: int, after: int, kernel, first_start, first_len, last_end,
            last_len):
    """The samples with ``before`` and ``after`` extra points at the two ends.

    Each missing point takes the band-limited value one window span later (before the first
    window) or earlier (after the last): the window spans exactly its tracked cycles, so for
    every harmonic of the fundamental this periodic extension is exact, and it only feeds the
    half kernel that reaches past the record. Where even that would leave the samples (a
    record barely longer than a window), the nearest sample is repeated. Non-finite samples
    are zero here (their windows are invalid anyway)."""
    c_n, n = samples.shape
    out = np.zeros((c_n, before + n + after))
    out[:, before:before + n] = samples
    h = kernel.half
    if before:
        pos = np.arange(-before, 0, dtype=np.float64) + first_len
        ok = (pos >= h) & (pos < n - h - 1)
        if ok.all():
            out[:, :before] = resample_windows(samples, pos, np.zeros(before), 1, kernel)[..., 0]
        else:
            out[:, :before] = samples[:, :1]
    if after:
        pos = n + np.arange(after, dtype=np.float64) - last_len
        ok = (pos >= h) & (pos < n - h - 1)
        if ok.all():
            out[:, before + n:] = resample_windows(samples, pos, np.zeros(after), 1,
                                                   kernel)[..., 0]
        else:
            out[:, before + n:] = samples[:, -1:]
    return out


def analyse_windows(
    samples,
    boundaries,
    *,
    max_line: int,
    offset: int = 0,
    pairs=(),
    combos=None,
    workers: int | None = None,
    harmonic_step: int | None = None,
    halves=None,
    compiled: bool | None = None,
    finite: bool | None = None,
    reuse: bool = False,
) -> WindowBlock:
    """Synchronous DFT of each window: resampled to its exact span, then transformed.

    Parameters
    ----------
    samples : numpy.ndarray
        shape ``(C, n)``, the block's samples; column 0 has global index ``offset``. Where
        the interpolation kernel reaches past them (the two ends of a record), they are
        extended by linear prediction. [A] or [V]
    boundaries : array_like
        ``W + 1`` fractional global sample positions of the window edges. [samples]
    max_line : int
        Highest spectral line kept (``cycles_per_window * (max_order + 1)``). [unitless]
    pairs : sequence of (int, int)
        Channel pairs whose mean product is wanted (voltage row, current row).
    combos : numpy.ndarray or None
        shape ``(D, C)``: weights of derived signals whose rms is wanted.
    workers : int or None
        Threads of the resampling and transform (default :data:`FFT_WORKERS`; 1 runs on
        the calling thread alone).
    harmonic_step : int or None
        Unused (kept for callers of the earlier whole-sample method).
    halves : array_like or None
        ``W`` positions where each window's tracked cycle count reaches half its cycles
        (:attr:`pqcheck.dsp.tracking.TrackResult.halves`). With them the points are spaced
        uniformly in the fundamental's phase rather than in time (a quadratic warp through
        the window's start, half-way point and end), so that on a drifting frequency every
        harmonic still falls on its line; without them, uniformly in time. [samples]
    compiled : bool or None
        Resample with the compiled loop (default when available) or the NumPy definition.
    finite : bool or None
        True when the caller has already checked that every sample is finite (the check is
        then not repeated); None checks.
    reuse : bool
        The returned ``lines`` live in this thread's buffer, which the next call on the same
        thread overwrites: for a caller that reduces each block before the next (the span
        pipeline of :func:`pqcheck.analysis.analyze`), so that a span's lines do not cost
        fresh memory (a page fault per 4 KiB, or a zeroed huge page) every time.

    Returns
    -------
    WindowBlock
    """
    samples = np.asarray(samples, dtype=np.float64)
    b = np.asarray(boundaries, dtype=np.float64)
    n_ch, n_have = samples.shape
    n_win = b.size - 1
    combos = np.zeros((0, n_ch)) if combos is None else np.asarray(combos, dtype=np.float64)
    if reuse:  # every window's lines are written below, the unresolved ones as NaN
        lines = _lines_buffer(n_win, n_ch, max_line + 1)
    else:
        lines = np.full((n_win, n_ch, max_line + 1), np.nan + 0j)
    gains = np.ones((n_win, max_line + 1), dtype=np.complex128)
    rms = np.full((n_win, n_ch), np.nan)
    peak = np.full((n_win, n_ch), np.nan)
    mean = np.full((n_win, n_ch), np.nan)
    prods = np.full((n_win, len(pairs)), np.nan)
    crms = np.full((n_win, combos.shape[0]), np.nan)
    valid = np.zeros(n_win, dtype=bool)
    length = np.diff(b)
    if n_win == 0:
        return WindowBlock(lines, gains, rms, peak, mean, prods, crms,
                           np.zeros(0, dtype=np.int64), length, valid)
    band = max_line / max(float(length.min()), 1.0)
    kernel = kernel_for(band)
    m_pts = _points(length, kernel.taps)
    mismatch = length - m_pts
    # validity and peaks from the recorded whole samples between the rounded edges
    i_lo = np.clip(np.rint(b[:-1]).astype(np.int64) - offset, 0, n_have)
    i_hi = np.clip(np.rint(b[1:]).astype(np.int64) - offset, 0, n_have)
    if compiled is None:
        compiled = _compiled.available()  # resolved here, before any thread starts
    # the C loops: every sample finite (checked in one pass), statistics in one pass below
    native = _compiled.window_stats() if compiled and samples.flags.c_contiguous else None
    fused = native is not None and (finite is True or native[0](samples))
    if fused:
        x = samples
        valid[:] = i_hi > i_lo
    elif (finite := np.isfinite(samples)).all():
        x = samples
        valid[:] = i_hi > i_lo
    else:
        bad = np.concatenate([np.zeros((1,), np.int64),
                              np.cumsum(~finite.all(axis=0), dtype=np.int64)])
        valid[:] = (bad[i_hi] - bad[i_lo] == 0) & (i_hi > i_lo)
        x = np.where(finite, samples, 0.0)
    if not fused:
        del finite
        _peaks(x, i_lo, i_hi, peak)
    # the kernel reaches half - 1 samples before a point and half after it
    need_lo = int(np.floor(b[0] - offset)) - (kernel.half - 1)
    need_hi = int(np.floor(b[-1] - offset)) + kernel.half + 1
    before, after = max(0, -need_lo), max(0, need_hi - n_have)
    if before or after:
        x = _extend(x, before, after, kernel, b[0] - offset, float(length[0]),
                    b[-1] - offset, float(length[-1]))
    pos0 = b[:-1] - offset + before
    warp = np.zeros(n_win)
    if halves is not None:
        # t(u) = b + L (u + kappa u (1 - u)) through the half-way point: t(1/2) = b + L/2 +
        # kappa L / 4; kappa is (f_end - f_start) / (f_end + f_start), about 4e-4 on a
        # 0.2 Hz/s ramp, and 0 (to rounding) at a steady frequency
        warp = 4.0 * (np.asarray(halves, dtype=np.float64) - b[:-1]) / length - 2.0
        warp = np.where(np.isfinite(warp) & (np.abs(warp) < 0.2), warp, 0.0)
        warp[np.abs(warp) < 1e-9] = 0.0
    if fused:
        _time_stats_native(native[1], np.ascontiguousarray(x), i_lo + before, i_hi + before,
                           pairs, combos, rms, mean, prods, crms, peak)
    else:
        _time_stats(x, i_lo + before, i_hi + before, pairs, combos, rms, mean, prods, crms)
    whole = (np.abs(mismatch) <= 1e-7) & (np.abs(pos0 - np.rint(pos0)) <= 1e-7) & (warp == 0)
    jobs = []
    for m in np.unique(m_pts):
        sel = np.flatnonzero(m_pts == m)
        per = max(1, _SPECTRUM_CHUNK // max(1, n_ch * int(m)))
        jobs += [(int(m), sel[lo:lo + per]) for lo in range(0, sel.size, per)]

    def transform(job):
        """Resample (or cut) one run of windows of equal ``M`` and transform it; each run
        writes its own rows of ``lines``, so runs may go in any order on any thread."""
        m, sel = job
        seg, spec_buf = _scratch(n_ch, sel.size, m)
        same = whole[sel]
        if same.any():  # points on the samples: the resampling is the identity
            view = np.lib.stride_tricks.sliding_window_view(x, m, axis=-1)
            seg[:, same] = view[:, np.rint(pos0[sel[same]]).astype(np.intp)]
        if not same.all():
            rest = sel[~same]
            _resample_chunk(x, pos0[rest], length[rest], m, kernel, warp[rest], seg, ~same,
                            compiled)
        k_keep = min(max_line, m // 2)
        spec = _rfft(seg, spec_buf)[..., : k_keep + 1]
        del seg
        scale = np.full(k_keep + 1, np.sqrt(2) / m)
        scale[0] = 1.0 / m
        spec *= scale
        lines[sel, :, : k_keep + 1] = np.moveaxis(spec, 0, 1)
        lines[sel, :, k_keep + 1:] = np.nan

    threads = 1 if workers == 1 else _threads()
    if threads > 1 and len(jobs) > 1:
        list(_pool(threads).map(transform, jobs))
    else:
        for job in jobs:
            transform(job)
    for arr in (rms, mean, prods, crms):
        arr[~valid] = np.nan
    peak[~valid] = np.nan
    return WindowBlock(lines, gains, rms, peak, mean, prods, crms, m_pts, mismatch, valid)


_SCRATCH = threading.local()


def _lines_buffer(n_win: int, n_ch: int, n_lines: int):
    """This thread's buffer for the lines of one span, ``(n_win, n_ch, n_lines)`` complex
    (see ``reuse`` of :func:`analyse_windows`); a view of the largest one so far."""
    need = n_win * n_ch * n_lines
    have = getattr(_SCRATCH, "lines", None)
    if have is None or have.size < need:
        have = np.empty(need, dtype=np.complex128)
        _SCRATCH.lines = have
    return have[:need].reshape(n_win, n_ch, n_lines)


def _scratch(c_n: int, n_win: int, m: int):
    """This thread's buffers for one run of resampled windows ``(c_n, n_win, m)`` and its
    transform ``(c_n, n_win, m // 2 + 1)``, reused from run to run: a fresh array of that
    size costs a page fault per 4 KiB on first touch, which was a fifth of the resampling's
    time. Views of the thread's largest buffers so far."""
    need = c_n * n_win * m
    need_f = c_n * n_win * (m // 2 + 1)
    have = getattr(_SCRATCH, "bufs", None)
    if have is None or have[0].size < need or have[1].size < need_f:
        have = (np.empty(max(need, have[0].size if have else 0)),
                np.empty(max(need_f, have[1].size if have else 0), dtype=np.complex128))
        _SCRATCH.bufs = have
    return (have[0][:need].reshape(c_n, n_win, m),
            have[1][:need_f].reshape(c_n, n_win, m // 2 + 1))


def _rfft(seg, out):
    """``numpy.fft.rfft(seg, axis=-1)`` into ``out`` where NumPy takes ``out`` (2.0 on)."""
    try:
        return np.fft.rfft(seg, axis=-1, out=out)
    except TypeError:  # NumPy < 2.0
        return np.fft.rfft(seg, axis=-1)


def _peaks(x, i_lo, i_hi, peak):
    """Largest magnitude of each channel over the recorded whole samples of each nonempty
    window, into ``peak`` (W, C)."""
    nonempty = i_hi > i_lo
    if not nonempty.any():
        return
    absx = np.abs(x)
    idx = np.flatnonzero(nonempty)
    pk = np.maximum.reduceat(absx, i_lo[idx], axis=1)
    # reduceat runs to the next start; cap the last window at its own end
    peak[idx] = pk.T
    last = idx[-1]
    peak[last] = absx[:, i_lo[last]:i_hi[last]].max(axis=1)


def _cross_pairs(combos):
    """The channel pairs ``(a, c)``, ``a < c``, whose cross moments the rms of the
    combinations needs, each once, in the order :func:`_time_stats` computes them."""
    out = []
    for wts in combos:
        used = np.flatnonzero(wts)
        for ia, a in enumerate(used):
            for c in used[ia + 1:]:
                if (int(a), int(c)) not in out:
                    out.append((int(a), int(c)))
    return out


def _combo_rms(combos, msq, cross):
    """Rms of ``sum_c w_c x_c`` for each combination (rows of ``combos``) from the mean
    squares ``msq`` (C, w) and the cross moments ``cross[a, c]`` (w,): ``sum_cd w_c w_d
    mean(x_c x_d)``, (D, w)."""
    acc = np.zeros((combos.shape[0], msq.shape[1]))
    for j, wts in enumerate(combos):
        used = np.flatnonzero(wts)
        for ia, a in enumerate(used):
            acc[j] += wts[a] ** 2 * msq[a]
            for c in used[ia + 1:]:
                acc[j] += 2 * wts[a] * wts[c] * cross[int(a), int(c)]
    return np.sqrt(np.maximum(acc, 0.0))


def _time_stats_native(stats, x, i_lo, i_hi, pairs, combos, rms, mean, prods, crms, peak):
    """:func:`_time_stats` and :func:`_peaks` from one pass of the C loop ``stats``
    (:func:`pqcheck._native.window_stats`) over finite samples ``x`` (C-contiguous)."""
    cross_pairs = _cross_pairs(combos) if combos.shape[0] else []
    every = [(int(a), int(c)) for a, c in pairs] + cross_pairs
    sm, sq, pk, pr = stats(x, i_lo, i_hi, [a for a, _ in every], [c for _, c in every])
    n = i_hi - i_lo
    sel = np.flatnonzero(n > 0)
    if not sel.size:
        return
    ln = n[sel].astype(np.float64)
    rms[sel] = np.sqrt(sq[sel] / ln[:, None])
    mean[sel] = sm[sel] / ln[:, None]
    peak[sel] = pk[sel]
    if len(pairs):
        prods[sel] = pr[sel, :len(pairs)] / ln[:, None]
    if combos.shape[0]:
        cross = {p: pr[sel, len(pairs) + k] / ln for k, p in enumerate(cross_pairs)}
        crms[sel] = _combo_rms(combos, (sq[sel] / ln[:, None]).T, cross).T


def _time_stats(x, i_lo, i_hi, pairs, combos, rms, mean, prods, crms):
    """Rms, mean, mean products and rms of channel combinations over the recorded whole
    samples between each window's rounded edges (all content, also above the analysed
    band); results are written into the given arrays."""
    n = i_hi - i_lo
    for length in np.unique(n):
        if length <= 0:
            continue
        sel = np.flatnonzero(n == length)
        view = np.lib.stride_tricks.sliding_window_view(x, int(length), axis=-1)
        seg = view[:, i_lo[sel]]  # (C, w, N), contiguous copy
        sumsq = np.einsum("cwn,cwn->cw", seg, seg)
        rms[sel] = np.sqrt(sumsq / length).T
        mean[sel] = (seg.sum(axis=-1) / length).T
        for j, (a, c) in enumerate(pairs):
            prods[sel, j] = np.einsum("wn,wn->w", seg[a], seg[c]) / length
        if combos.shape[0]:
            # rms of sum_c w_c x_c from second moments: sum_cd w_c w_d mean(x_c x_d), with
            # the cross moments each computed once (no derived signals are formed)
            msq = sumsq / length  # (C, w)
            cross = {(a, c): np.einsum("wn,wn->w", seg[a], seg[c]) / length
                     for a, c in _cross_pairs(combos)}
            crms[sel] = _combo_rms(combos, msq, cross).T


def _points(length, taps: int = 16):
    """Points of each resampled window: its length when that is a whole number of samples
    (to 1e-7; the resampling is then the identity), else the length at or above it that
    costs least to resample and transform (:func:`transform_length`), so that the points
    are never sparser than the recorded samples. [samples]"""
    r = np.rint(length)
    whole = np.abs(length - r) <= 1e-7
    want = np.maximum(np.where(whole, r, np.ceil(length)), 2).astype(np.int64)
    u, inv = np.unique(want, return_inverse=True)
    fast = np.array([transform_length(int(v), int(taps)) for v in u], dtype=np.int64)[inv]
    return np.where(whole, want, fast)


FFT_COST = {2: 0.23, 3: 0.42, 5: 0.56, 7: 1.18}
"""Modelled time of a real transform per point, for each prime factor of its length
(pocketfft, as numpy.fft runs it: a factor 7 costs five times a factor 2). Fitted by least
squares to the measured times of 48 seven-smooth lengths from 1000 to 53 000 on a 2-core AMD
EPYC (ns per point, within 20 %). A fixed model, not a measurement at run time: a window's
length, and with it every number, is the same on every machine. [ns]"""

RESAMPLE_COST = 0.22
"""Modelled time of the resampling per point and kernel tap (3.5 ns a point at the 16 taps
of 20 kS/s, measured as :data:`FFT_COST`). [ns]"""


@functools.lru_cache(maxsize=256)
def transform_length(n: int, taps: int) -> int:
    """The seven-smooth length ``M >= n`` (at most the next power of two) that costs least
    to resample a window to and transform: ``M (fft(M) + RESAMPLE_COST taps)``, ``fft(M)`` the
    sum of :data:`FFT_COST` over its prime factors. At 20 kS/s and 49.95 Hz a window of
    4004 samples takes 4096 points (the smallest seven-smooth length, 4032 = 2^6 3^2 7, costs
    8 % more); with 216 taps the resampling weighs more and a shorter length wins.
    [samples]

    >>> transform_length(4004, 16), transform_length(4004, 216)
    (4096, 4050)
    """
    # the least cost, and of equal costs the shortest length
    return min(_smooth_lengths(n), key=lambda v: (v * (_fft_cost(v) + RESAMPLE_COST * taps), v))


def _fft_cost(m: int) -> float:
    """:data:`FFT_COST` summed over the prime factors of a seven-smooth ``m``. [ns]"""
    cost = 0.0
    for p, c in FFT_COST.items():
        while m % p == 0:
            m //= p
            cost += c
    return cost


def harmonic_groupings(lines, cycles_per_window: int, max_order: int, gain=None,
                       **_unused) -> dict:
    """IEC 61000-4-7 harmonic and interharmonic groupings of spectral lines.

    Parameters
    ----------
    lines : numpy.ndarray
        complex rms lines of synchronous windows, shape ``(..., K + 1)`` with
        ``K >= cycles_per_window * (max_order + 1)`` (missing lines may be NaN). [A] or [V]
    cycles_per_window : int
        ``N`` = 10 (50 Hz) or 12 (60 Hz); harmonic ``h`` is line ``h N``.
    max_order : int
        Highest harmonic order ``H``.
    gain : numpy.ndarray or None
        Per-window line response, shape ``(W, K + 1)``; the harmonic components are divided by
        it (all ones for resampled windows, see :func:`analyse_windows`). Further keywords of
        the earlier whole-sample method (``n_samples``, ``mismatch``, ...) are accepted and
        ignored.

    Returns
    -------
    dict of numpy.ndarray, each shape ``(..., H + 1)`` indexed by order:
        ``component`` (complex line at ``hN``; order 0 is the DC value),
        ``subgroup`` (sqrt of lines ``hN-1 .. hN+1``),
        ``group`` (lines ``hN-N/2 .. hN+N/2``, the two end lines at half weight),
        ``interharmonic_group`` (lines ``hN+1 .. hN+N-1``, between orders h and h+1),
        ``interharmonic_subgroup`` (lines ``hN+2 .. hN+N-2``). [A] or [V]

    Notes
    -----
    For order 0 ``subgroup`` and ``group`` hold ``|DC|``.

    References
    ----------
    IEC 61000-4-7:2002+A1:2008, clauses 3.2 and 5.5 (harmonic group, subgroup, interharmonic
    group and centred subgroup) -- from memory.
    """
    N = int(cycles_per_window)
    H = int(max_order)
    lines = np.asarray(lines)
    # |line|^2, padded with NaN up to the last line a group reads, and its cumulative sum
    # with a leading zero: each written once into an array of its final size
    n_have = lines.shape[-1]
    width = max(n_have, N * (H + 1) + N // 2 + 1)
    power = np.empty(lines.shape[:-1] + (width,))
    np.abs(lines, out=power[..., :n_have])
    np.square(power[..., :n_have], out=power[..., :n_have])
    power[..., n_have:] = np.nan
    csum = np.empty(lines.shape[:-1] + (width + 1,))
    csum[..., 0] = 0.0
    np.cumsum(power, axis=-1, out=csum[..., 1:])

    def span(lo, hi):  # sum of power over lines lo..hi inclusive (arrays of indices)
        return csum[..., hi + 1] - csum[..., lo]

    orders = np.arange(H + 1)
    k = orders * N
    half = N // 2
    kk = np.maximum(k, half)  # order 0 handled below
    group_sq = span(kk - half + 1, kk + half - 1) + 0.5 * (
        power[..., kk - half] + power[..., kk + half]
    )
    sub_sq = span(np.maximum(k - 1, 0), k + 1)
    ih_sq = span(k + 1, k + N - 1)
    ihs_sq = span(k + 2, k + N - 2)
    kc = np.minimum(k, lines.shape[-1] - 1)
    component = lines[..., kc].astype(np.complex128)
    if gain is not None:
        g = np.asarray(gain)[:, kc]
        component = component / g.reshape(g.shape[:1] + (1,) * (component.ndim - 2) + g.shape[1:])
    if lines.shape[-1] - 1 < k[-1]:
        component[..., k > lines.shape[-1] - 1] = np.nan
    group = np.sqrt(np.maximum(group_sq, 0.0))
    subgroup = np.sqrt(np.maximum(sub_sq, 0.0))
    dc = np.abs(lines[..., 0].real)
    group[..., 0] = dc
    subgroup[..., 0] = dc
    return {
        "component": component,
        "subgroup": subgroup,
        "group": group,
        "interharmonic_group": np.sqrt(np.maximum(ih_sq, 0.0)),
        "interharmonic_subgroup": np.sqrt(np.maximum(ihs_sq, 0.0)),
    }
