"""Distortion figures and IEEE 1459 power quantities, as pure functions over arrays.

Every function takes per-order magnitude arrays whose last axis is the harmonic order
(index 0 = DC, 1 = fundamental, ..., H) and broadcasts over leading axes (windows, channels).
Orders that could not be measured are NaN and are left out of sums; callers record that as a
finding. These functions are the one place each figure is computed: assessment, report and CLI
call them and never re-implement a formula.

References
----------
IEEE Std 519-2014, clause 3 (THD, TDD definitions, orders up to 50).
IEC 61000-3-12:2011, clause 3 (THC, PWHC, orders 2..40 and 14..40) -- from memory.
IEEE Std 1547-2018, clause 7.3 (TRD) -- formula verified in a public summary.
IEEE Std 1459-2010, clauses 3.1 and 3.2 (single- and three-phase power definitions) -- from memory.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "thd",
    "tdd",
    "thc",
    "pwhc",
    "pwhd",
    "trd",
    "crest_factor",
    "single_phase_power",
    "three_phase_power",
    "sequence_components",
]


def _rss(mags, lo: int, hi: int, weights=None):
    m = np.abs(np.asarray(mags))
    hi = min(hi, m.shape[-1] - 1)
    part = m[..., lo : hi + 1] ** 2
    if weights is not None:
        part = part * np.asarray(weights)[: part.shape[-1]]
    any_finite = np.isfinite(part).any(axis=-1)
    out = np.sqrt(np.nansum(part, axis=-1))
    return np.where(any_finite, out, np.nan)


def _ratio(num, den):
    num = np.asarray(num, dtype=np.float64)
    den = np.asarray(den, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = num / den
    return np.where(den > 0, out, np.nan)


def thd(mags, *, max_order: int = 50):
    """Total harmonic distortion relative to the fundamental.

    ``THD = sqrt(sum_{h=2..H} X_h^2) / X_1 * 100``

    Parameters
    ----------
    mags : array_like
        Per-order rms magnitudes, last axis = order (0..). [A] or [V]
    max_order : int
        Highest order included, ``H``. [unitless]

    Returns
    -------
    numpy.ndarray or float
        THD, NaN where the fundamental is zero. [%]

    Examples
    --------
    A fundamental with a 20 % fifth harmonic has a THD of 20 %:

    >>> float(thd([0, 1.0, 0, 0, 0, 0.2]))
    20.0
    """
    m = np.abs(np.asarray(mags, dtype=np.complex128 if np.iscomplexobj(mags) else np.float64))
    return 100.0 * _ratio(_rss(m, 2, max_order), m[..., 1])


def tdd(mags, il_a, *, max_order: int = 50):
    """Total demand distortion: harmonic current relative to the maximum demand current IL.

    ``TDD = sqrt(sum_{h=2..H} I_h^2) / I_L * 100``

    Parameters
    ----------
    mags : array_like
        Per-order rms currents, last axis = order. [A]
    il_a : float
        Maximum demand load current (fundamental) at the PCC. [A]

    Returns
    -------
    TDD. [%]
    """
    return 100.0 * _ratio(_rss(mags, 2, max_order), il_a)


def thc(mags, *, max_order: int = 40):
    """Total harmonic current ``sqrt(sum_{h=2..40} I_h^2)``. [A]"""
    return _rss(mags, 2, max_order)


def pwhc(mags, *, lo: int = 14, hi: int = 40):
    """Partial weighted harmonic current ``sqrt(sum_{h=14..40} h I_h^2)``. [A]"""
    m = np.asarray(mags)
    hi_eff = min(hi, m.shape[-1] - 1)
    w = np.arange(lo, hi_eff + 1, dtype=np.float64)
    return _rss(m, lo, hi_eff, weights=w)


def pwhd(mags, *, lo: int = 14, hi: int = 40):
    """Partial weighted harmonic distortion ``PWHC / I_1 * 100``. [%]"""
    m = np.abs(np.asarray(mags))
    return 100.0 * _ratio(pwhc(m, lo=lo, hi=hi), m[..., 1])


def trd(rms_a, fundamental_a, rated_a):
    """Total rated-current distortion (IEEE 1547-2018).

    ``TRD = sqrt(I_rms^2 - I_1^2) / I_rated * 100``; ``I_rms`` includes every frequency
    component (harmonics, interharmonics and DC).

    Parameters
    ----------
    rms_a : array_like
        True rms current. [A]
    fundamental_a : array_like
        Fundamental rms current. [A]
    rated_a : float
        Rated current of the equipment. [A]

    Returns
    -------
    TRD. [%]
    """
    rms_a = np.asarray(rms_a, dtype=np.float64)
    fundamental_a = np.asarray(fundamental_a, dtype=np.float64)
    distortion = np.sqrt(np.maximum(rms_a**2 - fundamental_a**2, 0.0))
    return 100.0 * _ratio(distortion, rated_a)


def crest_factor(peak, rms):
    """Peak over rms. [unitless]"""
    return _ratio(peak, rms)


def single_phase_power(v_rms, i_rms, p_w, v1, i1):
    """IEEE 1459 single-phase quantities.

    Parameters
    ----------
    v_rms, i_rms : array_like
        True rms voltage and current. [V], [A]
    p_w : array_like
        Active power, the mean of ``v(t) i(t)``. [W]
    v1, i1 : array_like of complex
        Fundamental rms phasors (same phase reference). [V], [A]

    Returns
    -------
    dict of arrays
        ``p_w``, ``s_va`` (= V I), ``p1_w``, ``q1_var``, ``s1_va``, ``pf`` (= P/S),
        ``dpf`` (displacement power factor P1/S1), ``n_var`` (non-active power
        sqrt(S^2 - P^2)), ``sn_va`` (non-fundamental apparent power sqrt(S^2 - S1^2)).
        Signs follow the load convention: P < 0 means power flows back to the grid.
    """
    v1 = np.asarray(v1, dtype=np.complex128)
    i1 = np.asarray(i1, dtype=np.complex128)
    s = np.asarray(v_rms) * np.asarray(i_rms)
    s1c = v1 * np.conj(i1)
    s1 = np.abs(v1) * np.abs(i1)
    p = np.asarray(p_w, dtype=np.float64)
    return {
        "p_w": p,
        "s_va": s,
        "p1_w": s1c.real,
        "q1_var": s1c.imag,
        "s1_va": s1,
        "pf": _ratio(p, s),
        "dpf": _ratio(s1c.real, s1),
        "n_var": np.sqrt(np.maximum(s**2 - p**2, 0.0)),
        "sn_va": np.sqrt(np.maximum(s**2 - s1**2, 0.0)),
    }


_A = np.exp(2j * np.pi / 3)


def sequence_components(a, b, c):
    """Zero, positive and negative sequence phasors of three phasors (Fortescue).

    Returns
    -------
    tuple of complex arrays ``(zero, positive, negative)``, same unit as the input.
    """
    a, b, c = (np.asarray(x, dtype=np.complex128) for x in (a, b, c))
    zero = (a + b + c) / 3
    pos = (a + _A * b + _A**2 * c) / 3
    neg = (a + _A**2 * b + _A * c) / 3
    return zero, pos, neg


def three_phase_power(
    *,
    p_w,
    i_rms,
    v_rms,
    v_ll_rms,
    i1,
    v1,
    wiring: str,
    i_n_rms=None,
):
    """IEEE 1459 effective apparent power and power factor of a three-phase system.

    Parameters
    ----------
    p_w : array_like, shape (..., 3)
        Active power per phase. [W]
    i_rms, v_rms : array_like, shape (..., 3)
        True rms line currents and line-to-neutral voltages. [A], [V]
    v_ll_rms : array_like, shape (..., 3)
        True rms line-to-line voltages ab, bc, ca. [V]
    i1, v1 : array_like of complex, shape (..., 3)
        Fundamental rms phasors of currents and line-to-neutral voltages. [A], [V]
    wiring : {"3-wire", "4-wire"}
        4-wire includes the neutral current in ``I_e`` and the line-to-neutral voltages in
        ``V_e``.
    i_n_rms : array_like, optional
        True rms neutral current (4-wire). [A]

    Returns
    -------
    dict of arrays
        ``p_w`` (total), ``se_va`` (= 3 Ve Ie), ``pf`` (= P/Se), ``ie_a``, ``ve_v``,
        ``se1_va`` (fundamental effective apparent power), ``p1pos_w``, ``q1pos_var``,
        ``s1pos_va`` (positive-sequence powers), ``su1_va`` (fundamental unbalance power),
        ``dpf_pos`` (P1+/S1+), ``i_unbalance_percent`` (I2/I1+), ``v_unbalance_percent``.

    Notes
    -----
    ``I_e = sqrt((Ia^2 + Ib^2 + Ic^2 + In^2) / 3)`` and
    ``V_e = sqrt((3 (Va^2 + Vb^2 + Vc^2) + Vab^2 + Vbc^2 + Vca^2) / 18)`` (4-wire);
    ``I_e = sqrt((Ia^2 + Ib^2 + Ic^2) / 3)`` and ``V_e = sqrt((Vab^2 + Vbc^2 + Vca^2) / 9)``
    (3-wire); IEEE 1459-2010 with the neutral-to-line resistance ratio taken as 1.
    """
    if wiring not in ("3-wire", "4-wire"):
        raise ValueError(f"wiring must be '3-wire' or '4-wire', got {wiring!r}")
    p = np.sum(np.asarray(p_w, dtype=np.float64), axis=-1)
    i_rms = np.asarray(i_rms, dtype=np.float64)
    v_rms = np.asarray(v_rms, dtype=np.float64)
    v_ll = np.asarray(v_ll_rms, dtype=np.float64)
    i1 = np.asarray(i1, dtype=np.complex128)
    v1 = np.asarray(v1, dtype=np.complex128)
    v1_ll = np.stack([v1[..., 0] - v1[..., 1], v1[..., 1] - v1[..., 2], v1[..., 2] - v1[..., 0]], -1)
    if wiring == "4-wire":
        i_n2 = np.asarray(i_n_rms, dtype=np.float64) ** 2 if i_n_rms is not None else 0.0
        ie = np.sqrt((np.sum(i_rms**2, axis=-1) + i_n2) / 3)
        ve = np.sqrt((3 * np.sum(v_rms**2, axis=-1) + np.sum(v_ll**2, axis=-1)) / 18)
        i1n = np.abs(np.sum(i1, axis=-1))
        ie1 = np.sqrt((np.sum(np.abs(i1) ** 2, axis=-1) + i1n**2) / 3)
        ve1 = np.sqrt(
            (3 * np.sum(np.abs(v1) ** 2, axis=-1) + np.sum(np.abs(v1_ll) ** 2, axis=-1)) / 18
        )
    else:
        ie = np.sqrt(np.sum(i_rms**2, axis=-1) / 3)
        ve = np.sqrt(np.sum(v_ll**2, axis=-1) / 9)
        ie1 = np.sqrt(np.sum(np.abs(i1) ** 2, axis=-1) / 3)
        ve1 = np.sqrt(np.sum(np.abs(v1_ll) ** 2, axis=-1) / 9)
    se = 3 * ve * ie
    se1 = 3 * ve1 * ie1
    _, ip, ineg = sequence_components(i1[..., 0], i1[..., 1], i1[..., 2])
    _, vp, vneg = sequence_components(v1[..., 0], v1[..., 1], v1[..., 2])
    s1pos = 3 * vp * np.conj(ip)
    s1pos_abs = np.abs(s1pos)
    return {
        "p_w": p,
        "se_va": se,
        "pf": _ratio(p, se),
        "ie_a": ie,
        "ve_v": ve,
        "se1_va": se1,
        "p1pos_w": s1pos.real,
        "q1pos_var": s1pos.imag,
        "s1pos_va": s1pos_abs,
        "su1_va": np.sqrt(np.maximum(se1**2 - s1pos_abs**2, 0.0)),
        "dpf_pos": _ratio(s1pos.real, s1pos_abs),
        "i_unbalance_percent": 100 * _ratio(np.abs(ineg), np.abs(ip)),
        "v_unbalance_percent": 100 * _ratio(np.abs(vneg), np.abs(vp)),
    }
