"""Synchronous-window DFT and the IEC 61000-4-7 groupings of its spectral lines.

Windows come from :mod:`pqcheck.dsp.tracking` as fractional sample positions. Each window is
taken as the whole samples between its rounded edges, so its length differs from the exact
``cycles_per_window`` fundamental periods by less than half a sample: at 10 kS/s and 50 Hz
(2000 samples per window) that is within 0.025 %, inside the +-0.03 % synchronisation
tolerance of IEC 61000-4-7 (from memory). The remaining fractional mismatch ``delta`` is known
for every window, so the harmonic components are divided by the rectangular window's response
at their exact offset (the Dirichlet kernel), removing the scalloping error that would otherwise
grow with order (about 0.6 % at order 50 for a half-sample mismatch at 4000 samples). Groups
and subgroups sum line energies and are taken from the uncorrected lines: the energy a slightly
detuned component spreads to its neighbours stays inside its group (Parseval).

All windows of equal length are transformed together with one batched ``scipy.fft.rfft``:
no Python loop runs per window.

Line values are rms phasors: ``C_k = sqrt(2) X_k / N`` for ``k >= 1`` and ``C_0 = X_0 / N``.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

__all__ = ["WindowBlock", "analyse_windows", "harmonic_groupings", "FFT_WORKERS"]

FFT_WORKERS = int(os.environ.get("PQCHECK_FFT_WORKERS", "-1"))
"""Threads of each batched FFT (``scipy.fft`` ``workers``): -1 uses every CPU. Batch worker
processes set it to 1 so that N processes do not start N x CPUs threads; the environment
variable ``PQCHECK_FFT_WORKERS`` sets it too."""


@dataclass(frozen=True)
class WindowBlock:
    """Spectra and time-domain statistics of a run of windows.

    Attributes
    ----------
    lines : numpy.ndarray
        complex, shape ``(W, C, K + 1)``: rms phasor of spectral lines 0..K, spaced
        ``1 / T_w`` (5 Hz at 50 Hz), as the DFT gives them. [A] or [V]
    gain : numpy.ndarray
        complex, shape ``(W, K + 1)``: response of each window's DFT to a component sitting
        exactly at line k of the true window (divide a line by it to undo scalloping).
    rms, peak, mean : numpy.ndarray
        shape ``(W, C)``: true rms, largest absolute sample and mean of each window. [A] or [V]
    products : numpy.ndarray
        shape ``(W, len(pairs))``: mean of the product of two channels (active power for a
        voltage/current pair). [W]
    combo_rms : numpy.ndarray
        shape ``(W, len(combos))``: rms of linear combinations of channels (line-to-line
        voltages, neutral current). [V] or [A]
    n_samples : numpy.ndarray
        shape ``(W,)``: samples in each window. [samples]
    mismatch : numpy.ndarray
        shape ``(W,)``: exact window length minus ``n_samples``. [samples]
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
) -> WindowBlock:
    """DFT of each synchronous window, with scalloping correction.

    Parameters
    ----------
    samples : numpy.ndarray
        shape ``(C, n)``, the block's samples; column 0 has global index ``offset``. [A] or [V]
    boundaries : array_like
        ``W + 1`` fractional global sample positions of the window edges. [samples]
    max_line : int
        Highest spectral line kept (``cycles_per_window * (max_order + 1)``). [unitless]
    pairs : sequence of (int, int)
        Channel pairs whose mean product is wanted (voltage row, current row).
    combos : numpy.ndarray or None
        shape ``(D, C)``: weights of derived signals whose rms is wanted.
    harmonic_step : int or None
        Cycles per window. When given, the harmonic lines above ``max_line`` up to the
        Nyquist line are also returned (``extra``, gain-corrected rms phasors, NaN where a
        window is too short to hold them), as leakage sources for
        :func:`remove_harmonic_leakage`.

    Returns
    -------
    WindowBlock
    """
    from scipy import fft as sfft  # imported here: scipy.fft is slow to import

    samples = np.asarray(samples, dtype=np.float64)
    b = np.asarray(boundaries, dtype=np.float64)
    n_ch = samples.shape[0]
    n_win = b.size - 1
    combos = np.zeros((0, n_ch)) if combos is None else np.asarray(combos, dtype=np.float64)
    lines = np.full((n_win, n_ch, max_line + 1), np.nan + 0j)
    gains = np.ones((n_win, max_line + 1), dtype=np.complex128)
    rms = np.full((n_win, n_ch), np.nan)
    peak = np.full((n_win, n_ch), np.nan)
    mean = np.full((n_win, n_ch), np.nan)
    prods = np.full((n_win, len(pairs)), np.nan)
    crms = np.full((n_win, combos.shape[0]), np.nan)
    starts = np.rint(b[:-1]).astype(np.int64) - offset
    stops = np.rint(b[1:]).astype(np.int64) - offset
    n = stops - starts
    mismatch = np.diff(b) - n
    valid = np.zeros(n_win, dtype=bool)
    extra = extra_lines = None
    if harmonic_step and n_win:
        first = max_line // harmonic_step  # the order just above the analysed ones
        last = min(int((n.max() // 2 - 1) // harmonic_step), first + _MAX_EXTRA - 1)
        if last >= first:
            extra_lines = np.arange(first, last + 1) * harmonic_step
            extra = np.full((n_win, n_ch, extra_lines.size), np.nan + 0j)
    if n_win == 0:
        return WindowBlock(lines, gains, rms, peak, mean, prods, crms, n, mismatch, valid)
    for length in np.unique(n):
        sel = np.flatnonzero(n == length)
        # whole-sample windows as rows: one block copy per run of equal-length windows
        view = np.lib.stride_tricks.sliding_window_view(samples, int(length), axis=-1)
        seg = view[:, starts[sel]]  # (C, w, N), contiguous copy
        sumsq = np.einsum("cwn,cwn->cw", seg, seg)
        valid[sel] = np.isfinite(sumsq).all(axis=0)
        rms[sel] = np.sqrt(sumsq / length).T
        peak[sel] = np.maximum(seg.max(axis=-1), -seg.min(axis=-1)).T
        for j, (a, c) in enumerate(pairs):
            prods[sel, j] = np.einsum("wn,wn->w", seg[a], seg[c]) / length
        if combos.shape[0]:
            # rms of sum_c w_c x_c from second moments: sum_cd w_c w_d mean(x_c x_d), with
            # the cross moments each computed once (no derived signals are formed)
            msq = sumsq / length  # (C, w)
            cross = {}
            acc = np.zeros((combos.shape[0], sel.size))
            for j, wts in enumerate(combos):
                used = np.flatnonzero(wts)
                for ia, a in enumerate(used):
                    acc[j] += wts[a] ** 2 * msq[a]
                    for c in used[ia + 1:]:
                        if (a, c) not in cross:
                            cross[a, c] = np.einsum("wn,wn->w", seg[a], seg[c]) / length
                        acc[j] += 2 * wts[a] * wts[c] * cross[a, c]
            crms[sel] = np.sqrt(np.maximum(acc, 0.0)).T
        spec = sfft.rfft(seg, axis=-1, workers=FFT_WORKERS if workers is None else workers)
        del seg
        delta = mismatch[sel]
        if extra_lines is not None:
            ok = extra_lines < length // 2
            ke = extra_lines[ok]
            eps_e = -ke[None, :] * (delta / (length + delta))[:, None]
            g_e = np.exp(1j * np.pi * eps_e * (length - 1) / length) * (
                np.sinc(eps_e) / np.sinc(eps_e / length))
            ext = spec[..., ke] * (np.sqrt(2) / length) / g_e[None, :, :]  # (C, w, E)
            extra[np.ix_(sel, np.arange(n_ch), np.flatnonzero(ok))] = np.moveaxis(ext, 0, 1)
        k_keep = min(max_line, spec.shape[-1] - 1)
        spec = spec[..., : k_keep + 1]
        mean[sel] = (spec[..., 0].real / length).T
        # Scalloping response: line k sits at offset eps = -k delta / (N + delta) bins.
        k = np.arange(k_keep + 1)
        eps = -k[None, :] * (delta / (length + delta))[:, None]  # (w, K)
        gains[sel, : k_keep + 1] = np.exp(1j * np.pi * eps * (length - 1) / length) * (
            np.sinc(eps) / np.sinc(eps / length)
        )
        scale = np.full(k_keep + 1, np.sqrt(2) / length)
        scale[0] = 1.0 / length
        spec *= scale
        lines[sel, :, : k_keep + 1] = np.moveaxis(spec, 0, 1)
    return WindowBlock(lines, gains, rms, peak, mean, prods, crms, n, mismatch, valid, extra,
                       extra_lines)


def _response(u, n):
    """Response of an ``n``-sample DFT line to a unit complex exponential ``u`` bins away
    (the Dirichlet kernel normalised to 1 at ``u = 0``; the same expression as the gain in
    :func:`analyse_windows`)."""
    return np.exp(1j * np.pi * u * (n - 1) / n) * (np.sinc(u) / np.sinc(u / n))


_MAX_EXTRA = 1000
"""Most harmonic lines above the analysed orders kept as leakage sources."""

STRONG_SOURCE = 0.01
"""Components at least this fraction of the fundamental are treated as leakage sources."""


def remove_harmonic_leakage(component, line_index, n_samples, mismatch, *, extra=None,
                            extra_lines=None, iterations: int = 2):
    """Take the leakage of the strong harmonics out of every harmonic component of a window.

    In a whole-sample window of ``N`` samples whose exact span is ``N + delta``, harmonic
    ``j`` sits at ``nu_j = k_j N / (N + delta)`` bins, a fraction of a bin off its line, and
    leaks into every other line ``k`` as ``c_j G(nu_j - k) + conj(c_j) G(-nu_j - k)`` (``G``
    the normalised Dirichlet kernel, ``c_j`` the rms phasor). Beside a 100 A fundamental and a
    20 % fifth, a 0.5 % second harmonic can read several per cent off in a single window.
    The fundamental and every harmonic of at least :data:`STRONG_SOURCE` of it are taken as
    sources; their leakage into each line is subtracted in two Jacobi steps (the coupling is
    below 1e-2, so two steps leave less than 1e-4 of it). Weak components are not used as
    sources: their own estimates carry the leakage of content the model does not hold
    (interharmonics, orders above the highest analysed), and their leakage is negligible.

    Parameters
    ----------
    component : numpy.ndarray
        complex, shape ``(W, C, H + 1)``: components already divided by their own gain. [A]/[V]
    line_index : array_like of int
        Line of each order, shape ``(H + 1,)``.
    n_samples, mismatch : array_like, shape ``(W,)``
        Samples in each window and exact length minus that. [samples]
    extra, extra_lines : numpy.ndarray or None
        Harmonics above the analysed orders (``(W, C, E)``, gain-corrected) and their lines;
        they are leakage sources too (for a spectrum falling as 1/h, such as a square wave,
        every order contributes about equally, so all up to the Nyquist line are used).

    Returns
    -------
    numpy.ndarray
        Corrected components (same shape); the DC value (order 0) stays real. [A] or [V]
    """
    comp = np.array(component, dtype=np.complex128, copy=True)
    if comp.shape[-1] < 2:
        return comp
    n = np.asarray(n_samples, dtype=np.float64)[:, None, None]
    d = np.asarray(mismatch, dtype=np.float64)[:, None, None]
    k = np.asarray(line_index, dtype=np.float64)
    h = k.size
    fin = np.isfinite(comp)
    fund = np.abs(np.where(fin[:, :, 1:2], comp[:, :, 1:2], 0.0))  # (W, C, 1)
    sources = np.where(fin, comp, 0.0)
    k_src = k
    if extra is not None:
        sources = np.concatenate([sources, np.where(np.isfinite(extra), extra, 0.0)], axis=-1)
        k_src = np.concatenate([k, np.asarray(extra_lines, dtype=np.float64)])
    # only components that are strong somewhere in the block are sources: the response
    # matrices are built for those columns alone (a few dozen for a rectifier current)
    strong = np.abs(sources) >= STRONG_SOURCE * fund
    strong[:, :, 0] = False  # DC sits exactly on line 0 and leaks nowhere
    cols = np.flatnonzero(strong.any(axis=(0, 1)))
    if cols.size == 0:
        return comp
    nu = k_src[cols][None, None, :] * n / (n + d)  # (W, 1, J): where source j really sits
    target = k[None, :, None]  # (1, I, 1): the line of order i
    own = _response(k[None, :] * n[:, 0] / (n[:, 0] + d[:, 0]) - k[None, :], n[:, 0])
    direct = _response(nu - target, n)  # (W, I, J)
    image = _response(-nu - target, n)
    own_col = np.searchsorted(cols, np.arange(h))  # column of order i among the sources
    is_src = (own_col < cols.size) & (cols[np.minimum(own_col, cols.size - 1)] == np.arange(h))
    direct[:, np.flatnonzero(is_src), own_col[is_src]] = 0.0  # no self-leakage
    # the DC line holds X_0 / N (no sqrt 2), so a cosine leaks with 1/sqrt 2 there
    direct[:, 0, :] /= np.sqrt(2)
    image[:, 0, :] /= np.sqrt(2)
    own_i = own.copy()
    own_i[:, 0] = 1.0
    raw = comp * own_i[:, None, :]
    fixed = np.where(strong[..., cols], sources[..., cols], 0.0)  # (W, C, J)
    src_in_comp = cols < h
    est = comp
    for _ in range(iterations):
        src = fixed.copy()
        if src_in_comp.any():  # orders within the analysed range improve with each step
            c_cols = cols[src_in_comp]
            src[..., src_in_comp] = np.where(strong[..., c_cols],
                                             np.where(fin[..., c_cols], est[..., c_cols], 0.0),
                                             0.0)
        leak = np.einsum("wij,wcj->wci", direct, src) + np.einsum("wij,wcj->wci", image,
                                                                  np.conj(src))
        est = (raw - leak) / own_i[:, None, :]
    est[:, :, 0] = est[:, :, 0].real
    return np.where(fin, est, comp)


def harmonic_groupings(lines, cycles_per_window: int, max_order: int, gain=None,
                       n_samples=None, mismatch=None, extra=None, extra_lines=None) -> dict:
    """IEC 61000-4-7 harmonic and interharmonic groupings of spectral lines.

    Parameters
    ----------
    lines : numpy.ndarray
        complex rms lines, shape ``(..., K + 1)`` with ``K >= cycles_per_window * (max_order + 1)``
        (missing lines may be NaN). [A] or [V]
    cycles_per_window : int
        ``N`` = 10 (50 Hz) or 12 (60 Hz); harmonic ``h`` is line ``h N``.
    max_order : int
        Highest harmonic order ``H``.
    gain : numpy.ndarray or None
        Per-window line response from :func:`analyse_windows`, shape ``(W, K + 1)`` matching
        the first and last axes of ``lines``; the harmonic components are divided by it.
    n_samples, mismatch : numpy.ndarray or None
        Per-window length and residual mismatch from :func:`analyse_windows`, shape ``(W,)``;
        with ``gain``, the leakage of the strong harmonics is removed too
        (:func:`remove_harmonic_leakage`).

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
    power = np.abs(lines) ** 2
    pad = N * (H + 1) + N // 2 + 1 - power.shape[-1]
    if pad > 0:
        power = np.concatenate(
            [power, np.full(power.shape[:-1] + (pad,), np.nan)], axis=-1
        )
    csum = np.concatenate([np.zeros(power.shape[:-1] + (1,)), np.cumsum(power, axis=-1)], axis=-1)

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
    if gain is not None and n_samples is not None and mismatch is not None \
            and component.ndim == 3:
        component = remove_harmonic_leakage(component, k, n_samples, mismatch, extra=extra,
                                            extra_lines=extra_lines)
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
