"""Network physics of the site study: pure functions over numbers and arrays.

The IEC TR 61000-3-6 summation exponent and general summation law (:func:`summation_exponent`,
:func:`aggregate`), the phase shift of a phase-shifting transformer by symmetrical components
(:func:`transformer_shift`, :func:`vector_group_shift`), source and transformer impedances
(:func:`source_impedance`, :func:`transformer_impedance`, :func:`harmonic_impedance`) and the
harmonic voltages they give (:func:`harmonic_voltages`). Nothing here reads a file or knows a
site.
"""

from __future__ import annotations

import cmath
import math
import re

import numpy as np

from ..metrics import sequence_components

__all__ = [
    "SUMMATIONS",
    "summation_exponent",
    "aggregate",
    "transformer_shift",
    "vector_group_shift",
    "source_impedance",
    "transformer_impedance",
    "harmonic_impedance",
    "harmonic_voltages",
]

#: Ways to combine the harmonic currents of several units.
SUMMATIONS = ("general", "arithmetic", "phasor")

SQRT3 = math.sqrt(3.0)
_A = np.exp(2j * np.pi / 3)


def summation_exponent(orders) -> np.ndarray:
    """Exponent alpha of the IEC TR 61000-3-6 general summation law for each order.

    Parameters
    ----------
    orders : array_like of int
        Harmonic orders. [unitless]

    Returns
    -------
    numpy.ndarray of float
        1 for ``h < 5``, 1.4 for ``5 <= h <= 10``, 2 for ``h > 10``. [unitless]

    References
    ----------
    IEC TR 61000-3-6:2008, summation law for harmonics (exponent values as recalled, tag M in
    the project's standards notes; check against your copy).

    Examples
    --------
    >>> summation_exponent([3, 5, 10, 11]).tolist()
    [1.0, 1.4, 1.4, 2.0]
    """
    h = np.asarray(orders)
    return np.where(h < 5, 1.0, np.where(h <= 10, 1.4, 2.0))


def aggregate(currents, counts, orders, method: str = "general") -> np.ndarray:
    """Combine the harmonic currents of several kinds of unit into one current per order.

    Parameters
    ----------
    currents : array_like, shape (K, ..., H + 1)
        Per-kind currents, last axis = order ``orders``; complex phasors for ``"phasor"``,
        magnitudes or phasors for the other methods. [A]
    counts : array_like, shape (K,) or (M, K)
        Number of units of each kind (non-negative); a 2-D array gives M sets of counts at
        once. [unitless]
    orders : array_like of int, shape (H + 1,)
        Harmonic order of each position on the last axis. [unitless]
    method : {"general", "arithmetic", "phasor"}
        ``general``: the IEC TR 61000-3-6 general summation law
        ``I_h = (sum_i I_h,i ** alpha_h) ** (1 / alpha_h)`` with alpha from
        :func:`summation_exponent` over every unit (``n`` identical units give
        ``n ** (1 / alpha) I``); ``arithmetic``: the worst case ``sum_i |I_h,i|``;
        ``phasor``: ``|sum_i I_h,i|`` with measured phases (identical units add in phase).

    Returns
    -------
    numpy.ndarray of float, shape (..., H + 1) or (M, ..., H + 1)
        Combined magnitude per order. [A]

    Raises
    ------
    ValueError
        Unknown method (the message lists the valid ones), shapes that do not match, or a
        negative count.

    Examples
    --------
    Two 5th-harmonic currents of 3 A and 4 A (alpha = 1.4):

    >>> round(float(aggregate([[0, 0, 0, 0, 0, 3.0], [0, 0, 0, 0, 0, 4.0]], [1, 1],
    ...                       range(6))[5]), 4)
    5.7658
    """
    if method not in SUMMATIONS:
        raise ValueError(f"summation must be one of {', '.join(SUMMATIONS)}, got {method!r}")
    x = np.asarray(currents)
    n = np.asarray(counts, dtype=float)
    if n.ndim not in (1, 2) or x.shape[0] != n.shape[-1]:
        got = n.shape[-1] if n.ndim in (1, 2) else n.size
        raise ValueError(f"counts has {got} entries but currents has {x.shape[0]} kinds")
    if np.any(n < 0) or not np.all(np.isfinite(n)):
        raise ValueError(f"counts must be non-negative numbers, got {n.tolist()}")
    h = np.asarray(orders)
    if x.shape[-1] != h.size:
        raise ValueError(f"currents has {x.shape[-1]} orders but orders has {h.size}")

    def weighted_sum(values):
        return np.tensordot(n, values, axes=(n.ndim - 1, 0))

    if method == "phasor":
        if not np.iscomplexobj(x):
            raise ValueError("the phasor sum needs complex phasors (measured phases)")
        return np.abs(weighted_sum(x))
    mag = np.abs(x)
    if method == "arithmetic":
        return weighted_sum(mag)
    alpha = summation_exponent(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        return weighted_sum(mag**alpha) ** (1.0 / alpha)


def transformer_shift(current_abc, orders, shift_deg: float, *,
                      zero_sequence: bool = True) -> np.ndarray:
    """Phase currents on the supply side of a phase-shifting transformer.

    Parameters
    ----------
    current_abc : array_like of complex, shape (..., 3, H + 1)
        Currents of phases a, b, c on the unit side, as rms phasors relative to the unit-side
        phase-a voltage fundamental (cosine basis), last axis = order. [A]
    orders : array_like of int, shape (H + 1,)
        Order of each position on the last axis. [unitless]
    shift_deg : float
        Angle by which the unit-side positive-sequence voltage *leads* the supply side: +30 for
        Dyn11, -30 for Dyn1, 0 for Yy0. [deg]
    zero_sequence : bool
        False when the transformer does not pass zero-sequence current (a delta or ungrounded
        winding); True for an ideal 1:1 path. [unitless]

    Returns
    -------
    numpy.ndarray of complex, shape (..., 3, H + 1)
        Supply-side phase currents relative to the supply-side phase-a voltage, same turns
        ratio (1:1). [A]

    Notes
    -----
    The unit's waveforms are locked to its own voltage, which leads the supply-side voltage by
    ``theta``, so re-referencing to the supply side multiplies order ``h`` by
    ``exp(j h theta)``. The windings then rotate the positive-sequence part of every order by
    ``-theta`` and the negative-sequence part by ``+theta`` (symmetrical components; zero
    sequence passes unchanged or not at all). For balanced harmonics of natural sequence the
    net rotation is ``exp(j (h - 1) theta)`` for orders ``h = 3k + 1`` and
    ``exp(j (h + 1) theta)`` for ``h = 3k - 1``: with ``theta = 30 deg`` orders 5, 7, 17, 19
    turn by 180 deg and cancel against an unshifted equal unit, orders 11, 13, 23, 25 do not
    (the twelve-pulse arrangement).

    References
    ----------
    C. L. Fortescue, "Method of symmetrical co-ordinates applied to the solution of polyphase
    networks", Trans. AIEE 37 (1918), doi:10.1109/T-AIEE.1918.5061495; the twelve-pulse
    cancellation is derived in power-electronics textbooks (e.g. Mohan, Undeland, Robbins,
    *Power Electronics*, chapter on line-frequency rectifiers).

    Examples
    --------
    A balanced 5th harmonic (negative sequence) of 1 A behind a 30 deg shift turns by 180 deg:

    >>> import numpy as np
    >>> h = np.arange(6)
    >>> i = np.zeros((3, 6), complex)
    >>> i[:, 5] = np.exp(-1j * 5 * np.radians([0, 120, 240]))
    >>> np.round(transformer_shift(i, h, 30.0)[0, 5], 12)
    np.complex128(-1+0j)
    """
    x = np.asarray(current_abc, dtype=np.complex128)
    if x.ndim < 2 or x.shape[-2] != 3:
        raise ValueError(f"current_abc must have shape (..., 3, H + 1), got {x.shape}")
    h = np.asarray(orders, dtype=float)
    if shift_deg == 0 and zero_sequence:
        return x.copy()
    th = math.radians(float(shift_deg))
    x = x * np.exp(1j * h * th)
    zero, pos, neg = sequence_components(x[..., 0, :], x[..., 1, :], x[..., 2, :])
    pos = pos * cmath.exp(-1j * th)
    neg = neg * cmath.exp(1j * th)
    if not zero_sequence:
        zero = np.zeros_like(zero)
    out = np.empty_like(x)
    out[..., 0, :] = zero + pos + neg
    out[..., 1, :] = zero + _A**2 * pos + _A * neg
    out[..., 2, :] = zero + _A * pos + _A**2 * neg
    return out


_VECTOR_GROUP = re.compile(r"(YN|Y|D|ZN|Z)(yn|y|d|zn|z)(\d{1,2})")


def vector_group_shift(group: str) -> tuple:
    """Phase shift and zero-sequence path of a transformer from its IEC vector group.

    Parameters
    ----------
    group : str
        IEC 60076-1 notation, e.g. ``"Dyn11"``, ``"Dyn1"``, ``"YNyn0"``, ``"Yd11"``.

    Returns
    -------
    tuple (float, bool)
        Angle by which the low-voltage side leads the high-voltage side, in (-180, 180]
        (clock number ``c``: ``-30 c``) [deg]; True when zero-sequence current passes between
        the windings (both star with neutral: ``YNyn``).

    Raises
    ------
    ValueError
        The text is not a vector group; the message shows the expected form.

    Examples
    --------
    >>> vector_group_shift("Dyn11")
    (30.0, False)
    >>> vector_group_shift("YNyn0")
    (0.0, True)
    """
    m = _VECTOR_GROUP.fullmatch(group.strip())
    if not m or int(m.group(3)) > 11:
        raise ValueError(f"{group!r} is not a vector group; write it as IEC 60076-1 does, "
                         "e.g. \"Dyn11\", \"Dyn1\", \"YNyn0\" (clock number 0 to 11)")
    clock = int(m.group(3))
    shift = (-30.0 * clock) % 360.0
    if shift > 180.0:
        shift -= 360.0
    return float(shift), m.group(1) == "YN" and m.group(2) == "yn"


def source_impedance(voltage_v: float, x_over_r: float, *, ssc_va: float | None = None,
                     isc_a: float | None = None) -> complex:
    """Short-circuit impedance of a three-phase supply from its fault level.

    Parameters
    ----------
    voltage_v : float
        Nominal line-to-line voltage where the fault level is stated. [V]
    x_over_r : float
        Ratio of reactance to resistance at the fundamental. [unitless]
    ssc_va : float, optional
        Three-phase short-circuit power ``S_sc``. [VA]
    isc_a : float, optional
        Three-phase short-circuit current ``I_sc`` (give this or ``ssc_va``). [A]

    Returns
    -------
    complex
        ``Z = R + j X`` per phase at the fundamental. [Ohm]

    Notes
    -----
    ``|Z| = V^2 / S_sc = V / (sqrt(3) I_sc)``, ``R = |Z| / sqrt(1 + (X/R)^2)``,
    ``X = (X/R) R``. The voltage factor c of IEC 60909 is taken as 1 (the nominal voltage).

    References
    ----------
    Per-unit and short-circuit impedance formulas as in power-system analysis textbooks, e.g.
    J. D. Glover, M. S. Sarma, T. J. Overbye, *Power System Analysis and Design*, chapters on
    per-unit systems and symmetrical faults.

    Examples
    --------
    >>> z = source_impedance(11e3, 10.0, ssc_va=250e6)
    >>> round(abs(z), 6), round(z.imag / z.real, 6)
    (0.484, 10.0)
    """
    if (ssc_va is None) == (isc_a is None):
        raise ValueError("give exactly one of ssc_va and isc_a")
    if ssc_va is None:
        ssc_va = SQRT3 * voltage_v * isc_a
    z = voltage_v**2 / ssc_va
    r = z / math.hypot(1.0, x_over_r)
    return complex(r, r * x_over_r)


def transformer_impedance(rating_va: float, impedance_percent: float, x_over_r: float,
                          voltage_v: float) -> complex:
    """Short-circuit impedance of a two-winding transformer referred to one side.

    Parameters
    ----------
    rating_va : float
        Rated apparent power. [VA]
    impedance_percent : float
        Short-circuit impedance on its own rating. [%]
    x_over_r : float
        Reactance over resistance. [unitless]
    voltage_v : float
        Rated line-to-line voltage of the side it is referred to. [V]

    Returns
    -------
    complex
        ``Z = z_pu V^2 / S_r`` split by X/R, per phase. [Ohm]

    Examples
    --------
    >>> round(abs(transformer_impedance(1000e3, 6.0, 6.0, 400.0)) * 1e3, 6)
    9.6
    """
    z = impedance_percent / 100.0 * voltage_v**2 / rating_va
    r = z / math.hypot(1.0, x_over_r)
    return complex(r, r * x_over_r)


def harmonic_impedance(z1_ohm: complex, orders) -> np.ndarray:
    """Impedance at each harmonic order: resistance as given, reactance times the order.

    Parameters
    ----------
    z1_ohm : complex
        ``R + j X`` at the fundamental. [Ohm]
    orders : array_like of int
        [unitless]

    Returns
    -------
    numpy.ndarray of complex
        ``R + j h X``. [Ohm]
    """
    h = np.asarray(orders, dtype=float)
    return z1_ohm.real + 1j * h * z1_ohm.imag


def harmonic_voltages(current_a, z1_ohm: complex, orders) -> np.ndarray:
    """Harmonic voltage magnitudes that harmonic currents drive through an impedance.

    Parameters
    ----------
    current_a : array_like, shape (..., H + 1)
        Current magnitudes (or phasors) per order. [A]
    z1_ohm : complex
        Impedance at the fundamental (``R + j X``). [Ohm]
    orders : array_like of int, shape (H + 1,)
        [unitless]

    Returns
    -------
    numpy.ndarray of float
        ``|R + j h X| |I_h|`` (line-to-neutral). [V]
    """
    return np.abs(harmonic_impedance(z1_ohm, orders)) * np.abs(np.asarray(current_a))
