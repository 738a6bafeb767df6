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


def analyse_windows(
    samples,
    boundaries,
    *,
    max_line: int,
    offset: int = 0,
    pairs=(),
    combos=None,
    workers: int | None = None,
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
        k_keep = min(max_line, spec.shape[-1] - 1)
        spec = spec[..., : k_keep + 1]
        mean[sel] = (spec[..., 0].real / length).T
        # Scalloping response: line k sits at offset eps = -k delta / (N + delta) bins.
        delta = mismatch[sel]
        k = np.arange(k_keep + 1)
        eps = -k[None, :] * (delta / (length + delta))[:, None]  # (w, K)
        gains[sel, : k_keep + 1] = np.exp(1j * np.pi * eps * (length - 1) / length) * (
            np.sinc(eps) / np.sinc(eps / length)
        )
        scale = np.full(k_keep + 1, np.sqrt(2) / length)
        scale[0] = 1.0 / length
        spec *= scale
        lines[sel, :, : k_keep + 1] = np.moveaxis(spec, 0, 1)
    return WindowBlock(lines, gains, rms, peak, mean, prods, crms, n, mismatch, valid)


def _response(u, n):
    """Response of an ``n``-sample DFT line to a unit complex exponential ``u`` bins away
    (the Dirichlet kernel normalised to 1 at ``u = 0``; the same expression as the gain in
    :func:`analyse_windows`)."""
    return np.exp(1j * np.pi * u * (n - 1) / n) * (np.sinc(u) / np.sinc(u / n))


def remove_fundamental_leakage(component, line_index, n_samples, mismatch):
    """Take the fundamental's leakage out of every harmonic component of each window.

    In a whole-sample window of ``N`` samples whose exact span is ``N + delta``, the
    fundamental sits at ``nu = k_1 N / (N + delta)`` bins, a fraction of a bin off its line,
    and leaks into every other line ``k`` as ``c_1 G(nu - k) + conj(c_1) G(-nu - k)`` (``G``
    the normalised Dirichlet kernel, ``c_1`` its rms phasor). Being by far the largest
    component, it dominates the leakage into small harmonics (at 10 kS/s a 0.5 % second
    harmonic read up to 1.5 % off in a 1 s capture); its own estimate is accurate to about
    ``delta / (20 N)``, so subtracting its leakage is safe whatever else the signal holds.

    Parameters
    ----------
    component : numpy.ndarray
        complex, shape ``(W, C, H + 1)``: components already divided by their own gain. [A]/[V]
    line_index : array_like of int
        Line of each order, shape ``(H + 1,)``.
    n_samples, mismatch : array_like, shape ``(W,)``
        Samples in each window and exact length minus that. [samples]

    Returns
    -------
    numpy.ndarray
        Corrected components (same shape). [A] or [V]
    """
    comp = np.array(component, dtype=np.complex128, copy=True)
    if comp.shape[-1] < 2:
        return comp
    n = np.asarray(n_samples, dtype=np.float64)[:, None]
    d = np.asarray(mismatch, dtype=np.float64)[:, None]
    k = np.asarray(line_index, dtype=np.float64)[None, :]
    nu = k * n / (n + d)  # where each order really sits, in bins (W, H+1)
    own = _response(nu - k, n)  # (W, H+1): already divided out
    nu1 = nu[:, 1:2]
    c1 = comp[:, :, 1]
    # the fundamental first: remove its own negative-frequency image
    img = _response(-nu1 - k[:, 1:2], n)[:, 0] / own[:, 1]  # (W,)
    c1 = c1 - np.conj(c1) * img[:, None]
    comp[:, :, 1] = c1
    direct = _response(nu1 - k, n) / own  # (W, H+1)
    image = _response(-nu1 - k, n) / own
    direct[:, 1] = 0.0
    image[:, 1] = 0.0
    leak = c1[:, :, None] * direct[:, None, :] + np.conj(c1)[:, :, None] * image[:, None, :]
    # the DC line holds X_0 / N (no sqrt 2): a cosine leaks (c G + conj(c) G*) / sqrt 2 there
    leak[:, :, 0] = (c1 * _response(nu1[:, 0] - 0.0, n[:, 0])[:, None]
                     + np.conj(c1) * _response(-nu1[:, 0], n[:, 0])[:, None]) / np.sqrt(2)
    out = comp - leak
    out[:, :, 0] = out[:, :, 0].real  # DC stays real
    return out


def harmonic_groupings(lines, cycles_per_window: int, max_order: int, gain=None,
                       n_samples=None, mismatch=None) -> dict:
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
        with ``gain``, the fundamental's leakage is removed too
        (:func:`remove_fundamental_leakage`).

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
        component = remove_fundamental_leakage(component, k, n_samples, mismatch)
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
