"""Site interconnection study: several units at one point of common coupling (PCC).

A person preparing a utility interconnection application for a depot with several chargers
needs what the whole site will inject at the PCC, the voltage distortion that causes, and how
many more units fit. This module answers that from measured captures (or saved results) of
each kind of unit, in three layers:

1. Pure functions over arrays: the IEC TR 61000-3-6 summation exponent and general summation
   law (:func:`summation_exponent`, :func:`aggregate`), the phase shift of a phase-shifting
   transformer by symmetrical components (:func:`transformer_shift`), source and transformer
   impedances (:func:`source_impedance`, :func:`transformer_impedance`,
   :func:`harmonic_impedance`) and harmonic voltages (:func:`harmonic_voltages`).
2. Frozen dataclasses: the site description (:class:`Site` with :class:`Supply`,
   :class:`SiteTransformer`, :class:`OtherLoad`, :class:`Unit`, :class:`UnitSpectrum`) and the
   results (:class:`SiteCheck`, :class:`Headroom`, :class:`SiteStudy`).
3. The orchestrators: :func:`load_site` reads a site file (TOML, every problem a
   :class:`~pqcheck.errors.PlanError` naming file, line and field), :func:`study_site` runs the
   study, :func:`study_to_dict` gives its plain-JSON form.

The result is an estimate for planning. The utility's own study governs.

Model
-----
Every unit is a harmonic current source (its measured spectrum, per phase, as phasors relative
to its own phase-a voltage fundamental). Units of a kind behind a phase-shifting transformer
are rotated by :func:`transformer_shift`; units on the site bus reach the PCC through the site
transformer (ratio, vector-group shift, zero-sequence blocking) when the PCC is on its primary.
Currents of all units are combined per phase and order by the chosen summation, and the
harmonic voltage at the PCC is ``|Z_h| I_h`` with ``Z_h = R + j h X`` the supply impedance
seen from the PCC (resistance as given, reactance proportional to order). Other site load is
linear: it adds fundamental current (to IL) but no harmonics. Capacitors, cable capacitance,
resonances, background distortion of the network and the units' response to the voltage
distortion are not modelled.

A unit's harmonic currents are its IEC 61000-4-7 harmonic components (rms over the capture,
phase of the mean phasor), because phasors are needed for phase shifts and the phasor sum; the
IEEE 519 tables name the harmonic subgroup, which for a steady load differs from the component
only by the small leakage into the neighbouring bins.
"""

from __future__ import annotations

import bisect
import cmath
import hashlib
import json
import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from .errors import InputError, PlanError
from .files.tomldoc import BOOL, INT, NUM, POS, STR, STRS, DocReader, read_document
from .findings import Finding
from .metrics import sequence_components

__all__ = [
    "SCHEMA_VERSION",
    "SUMMATIONS",
    "PCC_LOCATIONS",
    "MAX_HEADROOM",
    "CAUTIONS",
    "summation_exponent",
    "aggregate",
    "transformer_shift",
    "vector_group_shift",
    "source_impedance",
    "transformer_impedance",
    "harmonic_impedance",
    "harmonic_voltages",
    "Supply",
    "SiteTransformer",
    "OtherLoad",
    "UnitSpectrum",
    "Unit",
    "Site",
    "SiteCheck",
    "Headroom",
    "SiteStudy",
    "load_site",
    "spectrum_from_analysis",
    "spectrum_from_dict",
    "study_site",
    "study_to_dict",
    "site_template",
]

SCHEMA_VERSION = 1

#: Ways to combine the harmonic currents of several units.
SUMMATIONS = ("general", "arithmetic", "phasor")

#: Where the point of common coupling is when the site has its own transformer.
PCC_LOCATIONS = ("supply", "bus")

#: Largest number of extra units the headroom search tries per kind.
MAX_HEADROOM = 1000

_SQRT3 = math.sqrt(3.0)
_A = np.exp(2j * np.pi / 3)


# ---------------------------------------------------------------------------------------------
# Layer 1: pure functions
# ---------------------------------------------------------------------------------------------


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
    counts : array_like, shape (K,)
        Number of units of each kind (non-negative). [unitless]
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
    numpy.ndarray of float, shape (..., H + 1)
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
    if n.ndim != 1 or x.shape[0] != n.size:
        raise ValueError(f"counts has {n.size} entries but currents has {x.shape[0]} kinds")
    if np.any(n < 0) or not np.all(np.isfinite(n)):
        raise ValueError(f"counts must be non-negative numbers, got {n.tolist()}")
    h = np.asarray(orders)
    if x.shape[-1] != h.size:
        raise ValueError(f"currents has {x.shape[-1]} orders but orders has {h.size}")
    w = n.reshape((-1,) + (1,) * (x.ndim - 1))
    if method == "phasor":
        if not np.iscomplexobj(x):
            raise ValueError("the phasor sum needs complex phasors (measured phases)")
        return np.abs(np.sum(w * x, axis=0))
    mag = np.abs(x)
    if method == "arithmetic":
        return np.sum(w * mag, axis=0)
    alpha = summation_exponent(h)
    with np.errstate(divide="ignore", invalid="ignore"):
        total = np.sum(w * mag**alpha, axis=0)
        return total ** (1.0 / alpha)


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
        ssc_va = _SQRT3 * voltage_v * isc_a
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


def _rss(x, lo: int, hi: int) -> np.ndarray:
    part = np.abs(np.asarray(x))[..., lo:hi + 1]
    return np.sqrt(np.nansum(part**2, axis=-1))


# ---------------------------------------------------------------------------------------------
# Layer 2: site description
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Supply:
    """The utility supply where its fault level is stated.

    Attributes
    ----------
    nominal_voltage_v : float
        Nominal line-to-line voltage. [V]
    ssc_va : float
        Three-phase short-circuit power (computed from ``isc_a`` when that was given). [VA]
    x_over_r : float
        Reactance over resistance of the supply impedance. [unitless]
    isc_a : float
        Three-phase short-circuit current at ``nominal_voltage_v``. [A]
    """

    nominal_voltage_v: float
    ssc_va: float
    x_over_r: float

    @property
    def isc_a(self) -> float:
        return self.ssc_va / (_SQRT3 * self.nominal_voltage_v)

    @property
    def impedance_ohm(self) -> complex:
        """Supply impedance per phase at the fundamental. [Ohm]"""
        return source_impedance(self.nominal_voltage_v, self.x_over_r, ssc_va=self.ssc_va)


@dataclass(frozen=True)
class SiteTransformer:
    """The site transformer between the supply and the bus the units connect to.

    Attributes
    ----------
    rating_va : float
        [VA]
    primary_v, secondary_v : float
        Rated line-to-line voltages. [V]
    impedance_percent : float
        [%]
    x_over_r : float
        [unitless]
    vector_group : str
        IEC vector group (``"Dyn11"``).
    """

    rating_va: float
    primary_v: float
    secondary_v: float
    impedance_percent: float
    x_over_r: float
    vector_group: str = "Dyn11"

    @property
    def shift_deg(self) -> float:
        """Angle by which the secondary leads the primary. [deg]"""
        return vector_group_shift(self.vector_group)[0]

    @property
    def passes_zero_sequence(self) -> bool:
        return vector_group_shift(self.vector_group)[1]


@dataclass(frozen=True)
class OtherLoad:
    """Linear site load besides the units (offices, workshop, lighting), at the bus.

    Attributes
    ----------
    demand_w : float
        Maximum demand active power. [W]
    power_factor : float
        Lagging displacement power factor, 0 < PF <= 1. [unitless]
    demand_current_a : float or None
        Maximum demand current per phase at the bus voltage (e.g. from billing demand); when
        given it replaces ``demand_w / (sqrt(3) V PF)``. [A]
    """

    demand_w: float = 0.0
    power_factor: float = 1.0
    demand_current_a: float | None = None

    def current_a(self, bus_voltage_v: float) -> complex:
        """Fundamental current phasor of phase a relative to the bus phase-a voltage. [A]"""
        mag = self.demand_current_a
        if mag is None:
            mag = self.demand_w / (_SQRT3 * bus_voltage_v * self.power_factor)
        return cmath.rect(mag, -math.acos(min(1.0, self.power_factor)))


@dataclass(frozen=True, eq=False)
class UnitSpectrum:
    """Measured current spectrum of one unit at one load point.

    Attributes
    ----------
    source : str
        The capture or results file it came from.
    sha256 : str
        SHA-256 of that file (hex), "" when unknown.
    nominal_hz : float or None
        Nominal frequency of the capture. [Hz]
    orders : numpy.ndarray of int
        0..H.
    current : numpy.ndarray of complex, shape (3, H + 1)
        Phase a, b, c currents as rms phasors relative to the unit's phase-a voltage
        fundamental (cosine basis); NaN for orders not resolved. [A]
    phase_measured : bool
        True when the phases are relative to a measured voltage (needed for the phasor sum).
    channels : tuple of str
        Current channels used, in phase order.
    voltage_ln_v : float or None
        Measured fundamental line-to-neutral voltage at the unit (mean of phases). [V]
    findings : tuple of Finding
        Data-quality findings of the unit's analysis (warnings and errors).
    """

    source: str
    sha256: str
    nominal_hz: float | None
    orders: np.ndarray
    current: np.ndarray
    phase_measured: bool
    channels: tuple = ()
    voltage_ln_v: float | None = None
    findings: tuple = ()


@dataclass(frozen=True)
class Unit:
    """One kind of unit on the site bus.

    Attributes
    ----------
    name : str
    count : int
        Number of identical units. [unitless]
    load_point : str
        The operating point the capture represents (every unit is assumed to run there).
    spectrum : UnitSpectrum
    phase_shift_deg : float
        Phase shift of the phase-shifting transformer feeding these units (unit side leads the
        bus by this angle; 0: none). [deg]
    line : int or None
        Line of the entry in the site file.
    """

    name: str
    count: int
    load_point: str
    spectrum: UnitSpectrum
    phase_shift_deg: float = 0.0
    line: int | None = None


@dataclass(frozen=True)
class Site:
    """A loaded site description (see :func:`load_site` and :func:`site_template`).

    Attributes
    ----------
    name : str
    nominal_hz : float
        [Hz]
    supply : Supply
    transformer : SiteTransformer or None
    pcc_location : str
        ``"supply"`` (the PCC is where the supply's fault level is stated, the transformer's
        primary) or ``"bus"`` (the bus the units connect to).
    other_load : OtherLoad
    units : tuple of Unit
    summation : str
        One of :data:`SUMMATIONS`.
    il_a : float or None
        IL at the PCC stated by the utility; None to estimate it. [A]
    limits : str
        Limit table: bundled id or path.
    generation : bool
        Apply the IEEE 519 rule for power-generation equipment (first ISC/IL row).
    notes : str
    path : pathlib.Path or None
        The site file.
    sha256 : str
        SHA-256 of the site file (hex).
    limit_table : LimitTable or None
        The loaded table (None: loaded from ``limits`` when the study runs).
    """

    name: str
    nominal_hz: float
    supply: Supply
    units: tuple
    transformer: SiteTransformer | None = None
    pcc_location: str = "supply"
    other_load: OtherLoad = OtherLoad()
    summation: str = "general"
    il_a: float | None = None
    limits: str = "ieee519-2022"
    generation: bool = False
    notes: str = ""
    path: Path | None = None
    sha256: str = ""
    limit_table: object = field(default=None, compare=False, repr=False)

    @property
    def bus_voltage_v(self) -> float:
        """Nominal line-to-line voltage of the bus the units connect to. [V]"""
        t = self.transformer
        return t.secondary_v if t is not None else self.supply.nominal_voltage_v

    @property
    def pcc_voltage_v(self) -> float:
        """Nominal line-to-line voltage at the PCC. [V]"""
        return self.bus_voltage_v if self.pcc_location == "bus" else \
            self.supply.nominal_voltage_v

    @property
    def pcc_impedance_ohm(self) -> complex:
        """Supply impedance seen from the PCC at the fundamental, per phase. [Ohm]"""
        zs = self.supply.impedance_ohm
        t = self.transformer
        if t is None or self.pcc_location == "supply":
            return zs
        ratio = (t.secondary_v / t.primary_v) ** 2
        return zs * ratio + transformer_impedance(t.rating_va, t.impedance_percent, t.x_over_r,
                                                  t.secondary_v)


# ---------------------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class SiteCheck:
    """One site quantity against one limit.

    Attributes
    ----------
    quantity : str
        ``"harmonic"`` for an individual order, else ``"TDD"`` or ``"THD"``.
    applies_to : str
        ``"current"`` or ``"voltage"``.
    order : int or None
    value : float
        Estimated value at the PCC (worst phase). [%]
    limit : float
        [%]
    unit : str
        ``"%"``.
    basis : str
        ``percent_of_il`` or ``percent_of_fundamental`` (nominal voltage).
    verdict : str
        ``"pass"``, ``"fail"`` or ``"inconclusive"``.
    clause : str
    verify : bool
        The limit is tagged P or M in the table (verify against the standard).
    phase : str
        Phase with the largest value.
    """

    quantity: str
    applies_to: str
    order: int | None
    value: float
    limit: float
    unit: str
    basis: str
    verdict: str
    clause: str = ""
    verify: bool = False
    phase: str = ""

    @property
    def label(self) -> str:
        """``"I5"``, ``"V7"``, ``"TDD"``, ``"THD(V)"``."""
        if self.quantity == "harmonic":
            return f"{'I' if self.applies_to == 'current' else 'V'}{self.order}"
        if self.quantity == "THD":
            return f"THD({'I' if self.applies_to == 'current' else 'V'})"
        return self.quantity

    @property
    def usage_percent(self) -> float:
        """Value as a percentage of the limit. [%]"""
        return 100.0 * self.value / self.limit if self.limit > 0 else math.inf


@dataclass(frozen=True)
class Headroom:
    """How many more units of one kind the site takes before a limit is exceeded.

    Attributes
    ----------
    unit : str
        Name of the kind.
    count : int
        Units of this kind in the site description.
    extra_units : int or None
        Largest number of extra units with every limit met for every count up to it; None when
        no limit was exceeded within :data:`MAX_HEADROOM` extra units. 0 when the site
        already exceeds a limit.
    binding : str
        Label of the limit exceeded first (``"V5"``, ``"TDD"``, ...), "" when none.
    binding_value, binding_limit : float or None
        That quantity and its limit at ``count + extra_units + 1`` units. [%]
    already_exceeded : bool
        The site as described exceeds a limit (then ``binding`` is the limit exceeded by the
        largest share).
    passing_count : int or None
        When the site already exceeds a limit: the largest number of units of this kind below
        ``count`` (others unchanged) with every limit met; None when no such number exists
        (the other units alone exceed a limit). Equal to ``count`` otherwise.
    extra_units_rating : int or None
        Extra units before the site transformer's rating is reached (informative; None without
        a transformer or beyond the search range).
    """

    unit: str
    count: int
    extra_units: int | None
    binding: str = ""
    binding_value: float | None = None
    binding_limit: float | None = None
    already_exceeded: bool = False
    passing_count: int | None = None
    extra_units_rating: int | None = None


@dataclass(frozen=True, eq=False)
class SiteStudy:
    """Everything :func:`study_site` computed.

    Attributes
    ----------
    site : Site
    summation : str
    orders : numpy.ndarray of int
        0..H.
    pcc_voltage_v : float
        Nominal line-to-line voltage at the PCC. [V]
    z_pcc_ohm : complex
        Supply impedance seen from the PCC at the fundamental, per phase. [Ohm]
    isc_a : float
        Maximum short-circuit current at the PCC (nominal voltage over ``|Z|``). [A]
    il_a : float
        Maximum demand load current at the PCC (stated or estimated). [A]
    il_source : str
        ``"stated"`` or ``"estimated"``.
    isc_il : float
        ISC/IL. [unitless]
    current_a : numpy.ndarray, shape (3, H + 1)
        Aggregated currents at the PCC per phase; order 1 is the fundamental phasor sum
        including the other load. [A]
    voltage_v : numpy.ndarray, shape (3, H + 1)
        Harmonic voltages (line-to-neutral) at the PCC; order 1 is NaN. [V]
    voltage_percent : numpy.ndarray, shape (H + 1,)
        Worst-phase harmonic voltage in percent of the nominal line-to-neutral voltage. [%]
    current_percent_il : numpy.ndarray, shape (H + 1,)
        Worst-phase harmonic current in percent of IL. [%]
    thd_v_percent, tdd_percent : float
        Worst phase. [%]
    unit_current_a : numpy.ndarray, shape (K, 3, H + 1)
        Each kind's single-unit current at the PCC (after phase shifts and referral), as
        phasors. [A]
    transformer_loading_percent : float or None
        Fundamental apparent power at the bus over the transformer rating. [%]
    checks : tuple of SiteCheck
    verdict : str
        ``"pass"``, ``"fail"`` or ``"inconclusive"``.
    headroom : tuple of Headroom
    findings : tuple of Finding
    limits : object
        The :class:`pqcheck.limits.ResolvedLimits` used.
    resolved_order : int
        Highest order every unit's data resolves. [unitless]
    """

    site: Site
    summation: str
    orders: np.ndarray
    pcc_voltage_v: float
    z_pcc_ohm: complex
    isc_a: float
    il_a: float
    il_source: str
    isc_il: float
    current_a: np.ndarray
    voltage_v: np.ndarray
    voltage_percent: np.ndarray
    current_percent_il: np.ndarray
    thd_v_percent: float
    tdd_percent: float
    unit_current_a: np.ndarray
    transformer_loading_percent: float | None
    checks: tuple
    verdict: str
    headroom: tuple
    findings: tuple
    limits: object
    resolved_order: int
    _case: object = field(default=None, repr=False, compare=False)

    def check(self, label: str) -> SiteCheck | None:
        """The check labelled ``label`` (``"V5"``, ``"I7"``, ``"TDD"``, ``"THD(V)"``)."""
        return next((c for c in self.checks if c.label == label), None)


# ---------------------------------------------------------------------------------------------
# Unit spectra from analysis results
# ---------------------------------------------------------------------------------------------


def _phase_index(phase: str) -> int:
    return {"": 0, "a": 0, "b": 1, "c": 2}[phase]


def _spread(one, orders, k0: int) -> np.ndarray:
    """Balanced three-phase set from one phase ``k0`` (rotation by h x 120 deg per phase)."""
    h = np.asarray(orders, dtype=float)
    out = np.empty((3, h.size), dtype=np.complex128)
    for k in range(3):
        out[k] = one * np.exp(-1j * h * (k - k0) * 2 * np.pi / 3)
    return out


def _build_spectrum(source, sha256, nominal_hz, orders, currents, phases, names, ref_quantity,
                    ref_phase, voltage_ln, findings, connection, phase, what="the results hold"):
    """Common part of the spectrum builders; raises ValueError with a user-facing message."""
    orders = np.asarray(orders)
    if not currents:
        raise ValueError(f"{what} no current channel; a unit's currents are needed")
    phase_measured = ref_quantity == "voltage"
    rot = 1.0
    kref = _phase_index(ref_phase) if ref_phase in ("", "a", "b", "c") else 0
    if phase_measured and kref:
        # phasors relative to phase b or c voltage -> relative to phase a
        rot = np.exp(-1j * orders * kref * 2 * np.pi / 3)
    by_phase = {}
    for cur, ph, name in zip(currents, phases, names):
        if ph == "n":
            continue
        by_phase.setdefault(ph, (np.asarray(cur, dtype=np.complex128) * rot, name))
    if all(p in by_phase for p in "abc"):
        if connection == "single-phase":
            raise ValueError(f"connection = \"single-phase\" but {what} currents of phases a, "
                             "b and c")
        cur = np.stack([by_phase[p][0] for p in "abc"])
        used = tuple(by_phase[p][1] for p in "abc")
    else:
        if len(by_phase) != 1:
            raise ValueError(f"{what} currents of phases {sorted(by_phase)}; give all three "
                             "phases a, b, c, or one current channel")
        ph, (one, name) = next(iter(by_phase.items()))
        used = (name,)
        if connection is None:
            raise ValueError(f"{what} one current channel ({name!r}); say whether "
                             "the unit is a three-phase unit measured on one phase (connection "
                             "= \"three-phase\", balanced phases assumed) or a single-phase "
                             "unit (connection = \"single-phase\" with phase = \"a\", \"b\" or "
                             "\"c\")")
        if connection == "three-phase":
            cur = _spread(one, orders, _phase_index(ph))
        else:
            k = _phase_index(phase or "a")
            cur = np.zeros((3, orders.size), dtype=np.complex128)
            # measured relative to its own voltage: rotate onto phase k of the bus
            cur[k] = one * np.exp(-1j * orders * k * 2 * np.pi / 3)
    return UnitSpectrum(source=str(source), sha256=sha256 or "", nominal_hz=nominal_hz,
                        orders=orders, current=cur, phase_measured=phase_measured,
                        channels=used, voltage_ln_v=voltage_ln, findings=tuple(findings))


def spectrum_from_analysis(result, *, connection: str | None = None,
                           phase: str | None = None) -> UnitSpectrum:
    """Unit spectrum from an :class:`~pqcheck.analysis.AnalysisResult`.

    Parameters
    ----------
    result : AnalysisResult
    connection : {"three-phase", "single-phase"} or None
        Needed only when the result holds one current channel.
    phase : {"a", "b", "c"} or None
        Bus phase of a single-phase unit (default a).

    Returns
    -------
    UnitSpectrum
        Magnitudes are the capture-level harmonic component rms values, phases the angle of
        the mean phasor relative to the reference channel's fundamental.

    Raises
    ------
    ValueError
        No current channel, an incomplete set of phases, or a single channel without
        ``connection``.
    """
    currents, phases, names = [], [], []
    for c in result.channels:
        if c.quantity != "current":
            continue
        mag = np.asarray(c.harmonic_rms, dtype=float)
        ang = np.radians(np.nan_to_num(np.asarray(c.phase_deg, dtype=float)))
        currents.append(mag * np.exp(1j * ang))
        phases.append(c.phase)
        names.append(c.name)
    ref = result.settings.reference
    ref_ch = next((c for c in result.channels if c.name == ref), None)
    volts = [c.fundamental_rms for c in result.channels if c.quantity == "voltage"
             and c.phase != "n"]
    findings = [f for f in result.findings if f.severity in ("warning", "error")]
    return _build_spectrum(
        result.source, result.sha256, result.settings.nominal_hz,
        np.asarray(result.channels[0].orders), currents, phases, names,
        ref_ch.quantity if ref_ch else "", ref_ch.phase if ref_ch else "",
        float(np.mean(volts)) if volts else None, findings, connection, phase,
        what="the capture holds")


def _select_capture(doc: dict, load_point: str | None) -> dict:
    """The analysis of one load point from report results (``captures`` list)."""
    caps = [c for c in doc["captures"] if isinstance(c, dict)]
    if len(caps) == 1:
        return caps[0]
    hits = [c for c in caps if load_point is not None
            and load_point in (str(c.get("load_point", "")), str(c.get("id", "")))]
    if len(hits) == 1:
        return hits[0]
    listed = ", ".join(f"{c.get('load_point', '')!r} (id {c.get('id', '')!r})" for c in caps)
    if hits:
        raise ValueError(f"several captures have load point {load_point!r}; set load_point to "
                         f"the capture id instead: {listed}")
    raise ValueError(f"no capture with load point or id {load_point!r}; the results hold "
                     f"{listed or 'no capture'}")


def spectrum_from_dict(doc: dict, *, source: str = "<results>", sha256: str = "",
                       connection: str | None = None, phase: str | None = None,
                       load_point: str | None = None) -> UnitSpectrum:
    """Unit spectrum from saved results.

    Parameters
    ----------
    doc : dict
        The JSON of ``pqcheck analyze --format json``: needs ``channels``, a list of
        ``{name, quantity, phase, harmonics: [{order, rms, phase_deg}]}``;
        ``settings.reference`` and ``settings.nominal_hz`` are used when present. Or the
        results of ``pqcheck report`` (a ``captures`` list, each with ``id``, ``load_point``
        and ``analysis``): the capture whose load point or id is ``load_point`` is used.
    source, sha256 : str
        For the record.
    connection, phase
        As :func:`spectrum_from_analysis`.
    load_point : str or None
        Selects one capture of report results.

    Returns
    -------
    UnitSpectrum

    Raises
    ------
    ValueError
        The document does not have that structure (the message names the missing part).
    """
    if isinstance(doc, dict) and "channels" not in doc and isinstance(doc.get("captures"), list):
        doc = _select_capture(doc, load_point)
    if isinstance(doc, dict) and "channels" not in doc and isinstance(doc.get("analysis"), dict):
        doc = doc["analysis"]
    if not isinstance(doc, dict) or not isinstance(doc.get("channels"), list):
        raise ValueError("not pqcheck analysis results: no 'channels' list (save them with "
                         "pqcheck analyze CAPTURE --format json)")
    settings = doc.get("settings") or {}
    ref = settings.get("reference")
    currents, phases, names = [], [], []
    ref_quantity, ref_phase, volts, h_max = "", "", [], 0
    chans = doc["channels"]
    for k, ch in enumerate(chans):
        if not isinstance(ch, dict):
            raise ValueError(f"channels[{k + 1}] is not a table")
        for key in ("harmonics",):
            if not isinstance(ch.get(key), list):
                raise ValueError(f"channels[{k + 1}] has no '{key}' list")
        for item in ch["harmonics"]:
            if isinstance(item, dict) and isinstance(item.get("order"), int):
                h_max = max(h_max, item["order"])
    orders = np.arange(h_max + 1)
    for k, ch in enumerate(chans):
        q = ch.get("quantity", "")
        ph = ch.get("phase", "") or ""
        if ph not in ("", "a", "b", "c", "n"):
            raise ValueError(f"channels[{k + 1}].phase must be a, b, c, n or empty, got {ph!r}")
        name = str(ch.get("name", f"channel {k + 1}"))
        if name == ref:
            ref_quantity, ref_phase = q, ph
        vec = np.full(orders.size, np.nan, dtype=np.complex128)
        for j, item in enumerate(ch["harmonics"]):
            if not isinstance(item, dict) or not isinstance(item.get("order"), int):
                raise ValueError(f"channels[{k + 1}].harmonics[{j + 1}] needs a whole-number "
                                 "'order'")
            rms = item.get("rms")
            if rms is None:
                continue
            if isinstance(rms, bool) or not isinstance(rms, (int, float)) or rms < 0:
                raise ValueError(f"channels[{k + 1}].harmonics[{j + 1}].rms must be a "
                                 f"non-negative number, got {rms!r}")
            ang = item.get("phase_deg")
            ang = 0.0 if ang is None else float(ang)
            vec[item["order"]] = cmath.rect(float(rms), math.radians(ang))
        if q == "current":
            currents.append(vec)
            phases.append(ph)
            names.append(name)
        elif q == "voltage" and ph != "n" and orders.size > 1 and np.isfinite(vec[1]):
            volts.append(abs(vec[1]))
    if ref is None:
        ref_quantity = ""
    findings = []
    for f in doc.get("findings") or []:
        if isinstance(f, dict) and f.get("severity") in ("warning", "error"):
            findings.append(Finding(str(f.get("code", "finding")), f["severity"],
                                    str(f.get("message", "")),
                                    channels=tuple(f.get("channels") or ()),
                                    orders=tuple(f.get("orders") or ())))
    nominal = settings.get("nominal_hz")
    return _build_spectrum(source, sha256, float(nominal) if nominal else None, orders,
                           currents, phases, names, ref_quantity, ref_phase,
                           float(np.mean(volts)) if volts else None, findings, connection,
                           phase)


# ---------------------------------------------------------------------------------------------
# Loading a site file
# ---------------------------------------------------------------------------------------------

_NUM, _POS, _STR, _BOOL, _STRS, _INT = NUM, POS, STR, BOOL, STRS, INT

_TOP = {"schema": _INT, "name": _STR, "notes": _STR, "nominal_frequency_hz": _POS,
        "summation": _STR, "supply": "table", "transformer": "table", "pcc": "table",
        "other_load": "table", "limits": "table", "units": "array of tables"}
_SUPPLY = {"nominal_voltage_v": _POS, "ssc_va": _POS, "isc_a": _POS, "x_over_r": _POS}
_TRANSFORMER = {"rating_va": _POS, "primary_v": _POS, "secondary_v": _POS,
                "impedance_percent": _POS, "x_over_r": _POS, "vector_group": _STR}
_PCC = {"location": _STR, "il_a": _POS}
_OTHER = {"demand_w": _NUM, "power_factor": _POS, "demand_current_a": _NUM}
_LIMITS = {"table": _STR, "generation": _BOOL}
_UNIT = {"name": _STR, "capture": _STR, "results": _STR, "count": _INT, "load_point": "label",
         "phase_shift_deg": _NUM, "connection": _STR, "phase": _STR, "current": _STRS,
         "voltage": _STRS, "sample_rate_hz": _POS, "time_column": _STR}


_SITE_BASES = (("current", "percent_of_il"), ("voltage", "percent_of_fundamental"))


class _Reader(DocReader):
    """Validates one parsed site document; every error names file, line and field."""

    def __init__(self, path: Path, text: str):
        super().__init__(path, text, "site file")


def load_site(path, *, analyse=None) -> Site:
    """Read and validate a site description and the unit data it names.

    Parameters
    ----------
    path : str or os.PathLike
        The site file (TOML; write a commented one with :func:`site_template`).
    analyse : callable or None
        ``analyse(capture_path, options) -> AnalysisResult`` for units given by a capture;
        default: :func:`pqcheck.load_capture` and :func:`pqcheck.analyze` with the site's
        nominal frequency and orders up to 50.

    Returns
    -------
    Site

    Raises
    ------
    PlanError
        The file is missing or not TOML, a field is unknown, has the wrong type or value, a
        required field is missing, a file it names does not exist or does not hold usable
        results, or the units' nominal frequencies disagree. The message names the file, the
        line and the field.
    InputError
        A capture named by a unit cannot be read or analysed (the reader's own error, naming
        the capture file).

    Examples
    --------
    >>> import pathlib, tempfile
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "site.toml").write_text('[supply]\\nnominal_voltage_v = 400\\n')
    >>> load_site(d / "site.toml")
    Traceback (most recent call last):
    ...
    pqcheck.errors.PlanError: ...site.toml:1: supply: missing field 'ssc_va' or 'isc_a': ...
    """
    path = Path(path)
    raw, text, doc = read_document(path, "site file")
    r = _Reader(path, text)
    folder = path.resolve().parent
    top = r.table(doc, (), _TOP)
    schema = top.get("schema", SCHEMA_VERSION)
    if schema != SCHEMA_VERSION:
        raise r.error(("schema",), f"this pqcheck reads site schema {SCHEMA_VERSION}, got "
                                   f"{schema}")
    f_nom = top.get("nominal_frequency_hz")
    if f_nom is not None and f_nom not in (50.0, 60.0):
        raise r.error(("nominal_frequency_hz",), f"must be 50 or 60, got {f_nom:g}")
    summation = top.get("summation", "general")
    if summation not in SUMMATIONS:
        raise r.error(("summation",), f"must be one of {', '.join(map(repr, SUMMATIONS))}, "
                                      f"got {summation!r}")

    # supply
    if "supply" not in doc:
        raise r.error((), "missing table [supply]: the utility supply's nominal_voltage_v, "
                          "ssc_va or isc_a, and x_over_r")
    kp = ("supply",)
    sup = r.table(doc["supply"], kp, _SUPPLY)
    v_sup = r.require(sup, kp, "nominal_voltage_v", "the supply's nominal line-to-line voltage "
                                                    "[V]")
    if "ssc_va" in sup and "isc_a" in sup:
        raise r.error(kp + ("isc_a",), "give the fault level once: ssc_va or isc_a, not both")
    if "ssc_va" not in sup and "isc_a" not in sup:
        raise r.error(kp, "missing field 'ssc_va' or 'isc_a': the three-phase short-circuit "
                          "power [VA] or current [A] the utility states")
    xr = r.require(sup, kp, "x_over_r", "the supply impedance's X/R ratio (ask the utility; "
                                        "typically 5 to 15 on MV networks)")
    ssc = sup.get("ssc_va") or _SQRT3 * v_sup * sup["isc_a"]
    supply = Supply(nominal_voltage_v=v_sup, ssc_va=ssc, x_over_r=xr)

    # transformer
    transformer = None
    if "transformer" in doc:
        kp = ("transformer",)
        tv = r.table(doc["transformer"], kp, _TRANSFORMER)
        for key, what in (("rating_va", "rated apparent power [VA]"),
                          ("secondary_v", "rated secondary line-to-line voltage [V]"),
                          ("impedance_percent", "short-circuit impedance [%]"),
                          ("x_over_r", "X/R ratio (typically 4 to 10 for distribution "
                                       "transformers)")):
            r.require(tv, kp, key, what)
        primary = tv.get("primary_v", v_sup)
        if abs(primary - v_sup) > 0.05 * v_sup:
            raise r.error(kp + ("primary_v",),
                          f"{primary:g} V does not match supply.nominal_voltage_v = {v_sup:g} "
                          "V; the supply's fault level is stated at the transformer's primary")
        if tv["impedance_percent"] >= 100:
            raise r.error(kp + ("impedance_percent",),
                          f"must be below 100 %, got {tv['impedance_percent']:g}")
        group = tv.get("vector_group", "Dyn11")
        try:
            vector_group_shift(group)
        except ValueError as exc:
            raise r.error(kp + ("vector_group",), str(exc)) from None
        transformer = SiteTransformer(
            rating_va=tv["rating_va"], primary_v=primary, secondary_v=tv["secondary_v"],
            impedance_percent=tv["impedance_percent"], x_over_r=tv["x_over_r"],
            vector_group=group)

    # PCC
    pcc = r.table(doc.get("pcc", {}), ("pcc",), _PCC)
    location = pcc.get("location")
    if location is not None and location not in PCC_LOCATIONS:
        raise r.error(("pcc", "location"),
                      f"must be \"supply\" (the transformer's primary, where the supply's "
                      f"fault level is stated) or \"bus\" (the bus the units connect to), got "
                      f"{location!r}")
    if location is None:
        if transformer is not None:
            raise r.error(("pcc",) if "pcc" in doc else ("transformer",),
                          "missing field 'location' in [pcc]: with a site transformer, say "
                          "where the point of common coupling is: location = \"supply\" (its "
                          "primary) or \"bus\" (its secondary, where the units connect)")
        location = "supply"

    # other load
    kp = ("other_load",)
    ol = r.table(doc.get("other_load", {}), kp, _OTHER)
    for key in ("demand_w", "demand_current_a"):
        if key in ol and ol[key] < 0:
            raise r.error(kp + (key,), f"must not be negative, got {ol[key]:g}")
    if ol.get("power_factor", 1.0) > 1.0:
        raise r.error(kp + ("power_factor",), f"must be from 0 to 1 (lagging displacement "
                                              f"power factor), got {ol['power_factor']:g}")
    other = OtherLoad(**ol)

    # limits
    lim = r.table(doc.get("limits", {}), ("limits",), _LIMITS)
    table = lim.get("table", "ieee519-2022").strip()
    if not table:
        raise r.error(("limits", "table"), "must not be empty")
    if "/" in table or "\\" in table or table.lower().endswith(".toml"):
        tpath = Path(table).expanduser()
        if not tpath.is_absolute():
            tpath = folder / tpath
        if not tpath.is_file():
            raise r.error(("limits", "table"), f"limit table {table!r} not found (resolved "
                                               f"against the site file's folder {folder})")
        table = str(tpath)
    from .limits import load_table

    try:
        limit_table = load_table(table)
    except InputError as exc:
        raise r.error(("limits", "table"), f"cannot use limit table {table!r}: "
                                           f"{exc.location_message()}") from None
    if not any((b.applies_to, b.basis) in _SITE_BASES for b in limit_table.blocks):
        raise r.error(("limits", "table"),
                      f"table {limit_table.id} has no limits in % of IL (currents) or % of the "
                      "fundamental (voltages); a site study needs a table for the PCC such as "
                      "ieee519-2022")

    # units
    entries = doc.get("units")
    if entries is None:
        raise r.error((), "the site lists no unit; add at least one [[units]] entry with "
                          "capture = \"...\" or results = \"...\"")
    if not isinstance(entries, list) or not all(isinstance(x, dict) for x in entries) \
            or not entries:
        raise r.error(("units",), "must be an array of tables ([[units]] entries)")
    units = []
    for k, item in enumerate(entries):
        units.append(_load_unit(r, item, k, folder, f_nom, analyse))
    names = [u.name for u in units]
    for k, u in enumerate(units):
        if names.index(u.name) != k:
            raise r.error(("units", k, "name"),
                          f"unit name {u.name!r} is used twice; give each kind its own name")
    noms = {u.spectrum.nominal_hz for u in units if u.spectrum.nominal_hz}
    if f_nom is None:
        if len(noms) > 1:
            raise r.error(("units",), f"the units' data have different nominal frequencies "
                                      f"({', '.join(f'{x:g}' for x in sorted(noms))} Hz); set "
                                      "nominal_frequency_hz")
        f_nom = noms.pop() if noms else None
        if f_nom is None:
            raise r.error((), "missing field 'nominal_frequency_hz' (50 or 60): the units' "
                              "data do not say it")
    else:
        for k, u in enumerate(units):
            if u.spectrum.nominal_hz and u.spectrum.nominal_hz != f_nom:
                raise r.error(("units", k),
                              f"the data of unit {u.name!r} are for {u.spectrum.nominal_hz:g} "
                              f"Hz but the site is {f_nom:g} Hz")
    if summation == "phasor":
        for k, u in enumerate(units):
            if not u.spectrum.phase_measured:
                raise r.error(("units", k),
                              f"summation = \"phasor\" needs phase angles relative to the "
                              f"supply voltage, but the data of unit {u.name!r} have no "
                              "voltage reference; measure a voltage with the currents or use "
                              "summation = \"general\"")
    return Site(
        name=top.get("name", "") or path.stem, nominal_hz=float(f_nom), supply=supply,
        units=tuple(units), transformer=transformer, pcc_location=location, other_load=other,
        summation=summation, il_a=pcc.get("il_a"), limits=table,
        generation=lim.get("generation", False), notes=top.get("notes", ""), path=path,
        sha256=hashlib.sha256(raw).hexdigest(), limit_table=limit_table)


def _default_analyse(capture_path, options):
    from .analysis import analyze
    from .readers import load_capture

    cap = load_capture(capture_path, sample_rate_hz=options.get("sample_rate_hz"),
                       current=options.get("current"), voltage=options.get("voltage"),
                       time_column=options.get("time_column"))
    nominal = options.get("nominal_hz")
    return analyze(cap, nominal_hz=None if nominal is None else int(nominal), max_order=50)


def _load_unit(r: _Reader, item, k: int, folder: Path, f_nom, analyse) -> Unit:
    kp = ("units", k)
    vals = r.table(item, kp, _UNIT)
    name = vals.get("name", "").strip()
    if not name:
        raise r.error(kp, "missing field 'name': a short name for this kind of unit")
    count = r.require(vals, kp, "count", "the number of identical units of this kind")
    if count < 0:
        raise r.error(kp + ("count",), f"must be 0 or more, got {count}")
    load_point = r.require(vals, kp, "load_point", "the operating point the capture "
                                                   "represents, e.g. \"100 %\" (every unit is "
                                                   "assumed to run there)")
    shift = vals.get("phase_shift_deg", 0.0)
    if not -180.0 <= shift <= 180.0:
        raise r.error(kp + ("phase_shift_deg",), f"must be from -180 to 180 degrees, got "
                                                 f"{shift:g}")
    connection = vals.get("connection")
    if connection is not None and connection not in ("three-phase", "single-phase"):
        raise r.error(kp + ("connection",), f"must be \"three-phase\" or \"single-phase\", got "
                                            f"{connection!r}")
    phase = vals.get("phase")
    if phase is not None:
        if phase not in ("a", "b", "c"):
            raise r.error(kp + ("phase",), f"must be \"a\", \"b\" or \"c\", got {phase!r}")
        if connection != "single-phase":
            raise r.error(kp + ("phase",), "phase is for single-phase units; add connection = "
                                           "\"single-phase\" or remove it")
    has_cap, has_res = "capture" in vals, "results" in vals
    if has_cap == has_res:
        raise r.error(kp, "give exactly one of 'capture' (a capture file to analyse) and "
                          "'results' (saved results of pqcheck analyze --format json)")
    key = "capture" if has_cap else "results"
    if not has_cap:
        for opt in ("current", "voltage", "sample_rate_hz", "time_column"):
            if opt in vals:
                raise r.error(kp + (opt,), f"{opt} is a capture option; it has no effect with "
                                           "results = ...")
    text = vals[key]
    fpath = Path(text).expanduser()
    if not fpath.is_absolute():
        fpath = folder / fpath
    if not fpath.is_file():
        where = "" if Path(text).is_absolute() else \
            f" (resolved against the site file's folder {folder})"
        raise r.error(kp + (key,), f"file {text!r} not found{where}")
    try:
        if has_cap:
            options = {"current": vals.get("current"), "voltage": vals.get("voltage"),
                       "sample_rate_hz": vals.get("sample_rate_hz"),
                       "time_column": vals.get("time_column"), "nominal_hz": f_nom}
            result = (analyse or _default_analyse)(fpath, options)
            spectrum = spectrum_from_analysis(result, connection=connection, phase=phase)
        else:
            raw = fpath.read_bytes()
            try:
                doc = json.loads(raw.decode("utf-8"))
            except (UnicodeDecodeError, ValueError) as exc:
                raise ValueError(f"not JSON results ({exc})") from None
            spectrum = spectrum_from_dict(doc, source=str(fpath),
                                          sha256=hashlib.sha256(raw).hexdigest(),
                                          connection=connection, phase=phase,
                                          load_point=load_point)
    except ValueError as exc:
        if isinstance(exc, InputError):
            raise
        raise r.error(kp + (key,), f"{text}: {exc}") from None
    return Unit(name=name, count=count, load_point=load_point, spectrum=spectrum,
                phase_shift_deg=shift, line=r.lines.line(kp))


# ---------------------------------------------------------------------------------------------
# Layer 3: the study
# ---------------------------------------------------------------------------------------------


class _Limits:
    """Resolved limits per ISC/IL band, cached (resolution depends only on the band)."""

    def __init__(self, site: Site):
        self.table = site.limit_table if site.limit_table is not None else \
            _load_limit_table(site.limits, site.path)
        self.site = site
        edges = set()
        for blk in self.table.blocks:
            conds = list(blk.conditions)
            for row in blk.rows:
                conds += list(row.conditions)
            for name, cond in conds:
                if name == "isc_il":
                    edges.update(float(x) for x in cond)
        self.edges = sorted(edges)
        self.cache: dict = {}

    def get(self, isc_a: float, il_a: float):
        from .limits import resolve

        x = isc_a / il_a
        key = (bisect.bisect_left(self.edges, x), x in self.edges)
        if key not in self.cache:
            try:
                self.cache[key] = resolve(self.table, voltage_level_v=self.site.pcc_voltage_v,
                                          isc_a=isc_a, il_a=il_a, generation=self.site.generation)
            except InputError as exc:
                raise PlanError(f"limit table {self.table.id}: {exc.problem}",
                                path=self.site.path, field="limits.table") from None
        return self.cache[key]


def _load_limit_table(table: str, site_path):
    from .limits import load_table

    try:
        return load_table(table)
    except InputError as exc:
        raise PlanError(f"limits.table: {exc.location_message()}", path=site_path) from None


def _unit_at_bus(unit: Unit, orders) -> np.ndarray:
    """One unit's phase currents at the site bus, relative to the bus phase-a voltage. [A]"""
    spec = unit.spectrum
    cur = np.full((3, orders.size), np.nan, dtype=np.complex128)
    m = min(orders.size, spec.current.shape[1])
    cur[:, :m] = spec.current[:, :m]
    shift = unit.phase_shift_deg
    return transformer_shift(cur, orders, shift, zero_sequence=(shift == 0))


def _bus_to_pcc(site: Site, cur, orders) -> np.ndarray:
    """Currents at the bus -> currents at the PCC (through the site transformer if any). [A]"""
    t = site.transformer
    if t is None or site.pcc_location == "bus":
        return cur
    cur = transformer_shift(cur, orders, t.shift_deg, zero_sequence=t.passes_zero_sequence)
    return cur * (t.secondary_v / t.primary_v)


def _verdict(value: float, limit: float, complete: bool) -> str:
    if np.isfinite(value) and value > limit:
        return "fail"
    if not np.isfinite(value) or not complete:
        return "inconclusive"
    return "pass"


_PHASES = ("a", "b", "c")


@dataclass(frozen=True, eq=False)
class _Case:
    """What stays fixed while the counts change (the headroom search)."""

    site: Site
    limits: _Limits
    orders: np.ndarray
    unit_bus: np.ndarray  # (K, 3, H+1) at the bus
    unit_pcc: np.ndarray  # (K, 3, H+1) at the PCC
    other_bus: np.ndarray  # (3,) fundamental of the other load at the bus
    other_pcc: np.ndarray  # (3,) at the PCC
    summation: str
    z1: complex
    v_ln: float
    max_h: int
    bad_orders: frozenset

    def loading_percent(self, counts) -> float | None:
        t = self.site.transformer
        if t is None:
            return None
        fund = np.sum(np.asarray(counts, float)[:, None] * self.unit_bus[:, :, 1], axis=0)
        s = _SQRT3 * self.site.bus_voltage_v * float(np.max(np.abs(fund + self.other_bus)))
        return 100.0 * s / t.rating_va

    def evaluate(self, counts) -> dict:
        counts = np.asarray(counts, dtype=float)
        orders, max_h = self.orders, self.max_h
        cur = aggregate(self.unit_pcc, counts, orders, self.summation)  # (3, H+1)
        fund = np.sum(counts[:, None] * self.unit_pcc[:, :, 1], axis=0) + self.other_pcc
        cur[:, 0] = np.nan
        cur[:, 1] = np.abs(fund)
        cur[:, max_h + 1:] = np.nan
        il = self.site.il_a if self.site.il_a is not None else float(np.max(np.abs(fund)))
        isc = self.v_ln / abs(self.z1)
        volt = harmonic_voltages(cur, self.z1, orders)
        volt[:, :2] = np.nan
        with np.errstate(divide="ignore", invalid="ignore"):
            v_pct = 100.0 * volt / self.v_ln
            i_pct = 100.0 * cur / il if il > 0 else np.full_like(cur, np.nan)
            i_pct[:, :2] = np.nan
            thd_v = 100.0 * _rss(volt, 2, max_h) / self.v_ln
            tdd = 100.0 * _rss(cur, 2, max_h) / il if il > 0 else np.full(3, np.nan)
        out = {"current_a": cur, "voltage_v": volt, "v_pct": v_pct, "i_pct": i_pct,
               "thd_v": thd_v, "tdd": tdd, "il": il, "isc": isc, "checks": (), "limits": None}
        if il <= 0:
            return out
        lim = self.limits.get(isc, il)
        out["limits"] = lim
        out["checks"] = tuple(self._checks(lim, v_pct, i_pct, thd_v, tdd))
        return out

    def _checks(self, lim, v_pct, i_pct, thd_v, tdd):
        orders, max_h = self.orders, self.max_h
        complete_totals = not self.bad_orders and max_h >= min(lim.max_order, orders.size - 1)
        for item in lim.items:
            if item.applies_to == "voltage" and item.basis == "percent_of_fundamental":
                arr, tot = v_pct, thd_v
            elif item.applies_to == "current" and item.basis == "percent_of_il":
                arr, tot = i_pct, tdd
            else:
                continue
            if item.quantity == "harmonic":
                h = item.order
                if h >= orders.size:
                    yield SiteCheck("harmonic", item.applies_to, h, math.nan, item.limit,
                                    item.unit, item.basis, "inconclusive", item.clause,
                                    item.verify)
                    continue
                k = _worst_phase(arr[:, h])
                val = float(arr[k, h])
                complete = h <= max_h and h not in self.bad_orders
                yield SiteCheck("harmonic", item.applies_to, h, val, item.limit, item.unit,
                                item.basis, _verdict(val, item.limit, complete), item.clause,
                                item.verify, _PHASES[k])
            elif (item.quantity, item.applies_to) in (("THD", "voltage"), ("TDD", "current")):
                k = _worst_phase(tot)
                val = float(tot[k])
                yield SiteCheck(item.quantity, item.applies_to, None, val, item.limit,
                                item.unit, item.basis,
                                _verdict(val, item.limit, complete_totals), item.clause,
                                item.verify, _PHASES[k])


def _worst_phase(values) -> int:
    """Index of the largest of three phase values (the first of equal ones; 0 if all NaN)."""
    v = np.where(np.isfinite(values), values, -np.inf)
    top = np.max(v)
    if not np.isfinite(top):
        return 0
    return int(np.argmax(v >= top - 1e-9 * abs(top)))


def _overall(checks) -> str:
    verdicts = {c.verdict for c in checks}
    if "fail" in verdicts:
        return "fail"
    if "inconclusive" in verdicts or not checks:
        return "inconclusive"
    return "pass"


def _nanmax_phase(a) -> np.ndarray:
    """Largest of the three phases per order, NaN where all are NaN."""
    a = np.asarray(a, dtype=float)
    fin = np.isfinite(a)
    out = np.max(np.where(fin, a, -np.inf), axis=0)
    return np.where(np.any(fin, axis=0), out, np.nan)


def study_site(site: Site, *, summation: str | None = None, headroom: bool = True,
               max_headroom: int = MAX_HEADROOM) -> SiteStudy:
    """Estimate the site's harmonic currents and voltages at the PCC and check them.

    Parameters
    ----------
    site : Site
    summation : {"general", "arithmetic", "phasor"} or None
        Override the site file's choice.
    headroom : bool
        Also search, for each kind of unit, how many more fit (default True).
    max_headroom : int
        Largest number of extra units tried per kind. [unitless]

    Returns
    -------
    SiteStudy

    Raises
    ------
    PlanError
        The limit table cannot be loaded or has no row for the site's ISC/IL and voltage, the
        phasor sum is asked for units without measured phases, or the site has no load at
        all (IL would be zero).

    Notes
    -----
    Harmonic currents: :func:`aggregate` per phase and order over all units (after
    :func:`transformer_shift` for units behind a phase-shifting transformer and for the site
    transformer when the PCC is on its primary, currents referred by its ratio). Fundamental:
    phasor sum of all units and the other load. IL: the stated value, else the largest phase
    fundamental. ISC: nominal line-to-neutral voltage over ``|Z_pcc|``. Harmonic voltages:
    :func:`harmonic_voltages`, in percent of the nominal line-to-neutral voltage; THD and TDD
    over orders 2 to the table's highest order (50 for IEEE 519). Every value is the worst of
    the three phases and is compared with 1.0 times the limit: a planning estimate of the
    steady state with every unit at its load point, not the standard's statistical
    evaluation of a survey.
    """
    summation = summation or site.summation
    if summation not in SUMMATIONS:
        raise PlanError(f"summation must be one of {', '.join(SUMMATIONS)}, got {summation!r}",
                        field="--summation")
    if summation == "phasor":
        for u in site.units:
            if not u.spectrum.phase_measured:
                raise PlanError(f"the phasor sum needs phase angles relative to the supply "
                                f"voltage, but the data of unit {u.name!r} have no voltage "
                                "reference; use the general summation law",
                                path=site.path, line=u.line, field="summation")
    limits = _Limits(site)
    h_top = limits.table.max_order
    orders = np.arange(h_top + 1)
    unit_bus = np.stack([_unit_at_bus(u, orders) for u in site.units])
    findings: list = []

    # orders every unit resolves
    finite = np.all(np.isfinite(unit_bus), axis=(0, 1))
    missing = [int(h) for h in orders[2:] if not finite[h]]
    max_h = h_top if not missing else int(min(missing)) - 1
    if missing:
        findings.append(Finding(
            "orders-not-resolved", "error",
            f"the unit data do not resolve orders {_orders_text(missing)}; checks of those "
            "orders are inconclusive and THD/TDD count only the resolved orders",
            orders=tuple(missing)))
    unit_bus = np.where(np.isfinite(unit_bus), unit_bus, 0.0)
    unit_pcc = _bus_to_pcc(site, unit_bus, orders)
    bad_orders: set = set(missing)
    v_bus_ln = site.bus_voltage_v / _SQRT3
    for u in site.units:
        for f in u.spectrum.findings:
            if f.channels and not set(f.channels) & set(u.spectrum.channels):
                continue
            findings.append(replace(f, message=f"unit {u.name!r}: {f.message}"))
            if f.severity == "error":
                bad_orders.update(f.orders or range(2, h_top + 1))
        v = u.spectrum.voltage_ln_v
        if v is not None and abs(v - v_bus_ln) > 0.1 * v_bus_ln:
            findings.append(Finding(
                "unit-voltage", "warning",
                f"unit {u.name!r} was captured at {v:.4g} V line-to-neutral but the site bus "
                f"is {v_bus_ln:.4g} V; its currents may not represent operation at this site",
                value=v, unit="V"))
        if u.spectrum.phase_measured and abs(np.angle(u.spectrum.current[0, 1])) > np.pi / 2:
            findings.append(Finding(
                "unit-exports", "info",
                f"unit {u.name!r} exports active power at its load point {u.load_point!r}; if "
                "the site's generation is 10 % or more of its demand, IEEE 519-2022 directs "
                "you to IEEE 1547 for current limits, and IEEE 519 limits generation "
                "equipment to the first ISC/IL row (set limits.generation = true)"))
    unmeasured = [u.name for u in site.units if not u.spectrum.phase_measured]
    if unmeasured:
        findings.append(Finding(
            "phase-not-measured", "info",
            f"no voltage was measured with unit(s) {', '.join(map(repr, unmeasured))}: their "
            "fundamental is taken in phase with the voltage for the IL estimate"))
    findings += _zero_sequence_findings(site, orders)

    # fundamental of the other load, balanced positive sequence
    i_other = site.other_load.current_a(site.bus_voltage_v)
    other_bus = i_other * np.exp(-1j * np.arange(3) * 2 * np.pi / 3)
    t = site.transformer
    ratio = t.secondary_v / t.primary_v if t is not None and site.pcc_location == "supply" \
        else 1.0
    case = _Case(site=site, limits=limits, orders=orders, unit_bus=unit_bus, unit_pcc=unit_pcc,
                 other_bus=other_bus, other_pcc=other_bus * ratio, summation=summation,
                 z1=site.pcc_impedance_ohm, v_ln=site.pcc_voltage_v / _SQRT3, max_h=max_h,
                 bad_orders=frozenset(bad_orders))
    counts = np.array([u.count for u in site.units], dtype=float)
    res = case.evaluate(counts)
    if res["il"] <= 0:
        raise PlanError("the site draws no fundamental current (every count is 0 and there is "
                        "no other load), so IL is zero; add units or other_load, or give "
                        "pcc.il_a", path=site.path, field="units")
    checks = res["checks"]
    heads = []
    if headroom:
        heads = [_headroom(case, counts, k, checks, max_headroom)
                 for k in range(len(site.units))]
    return SiteStudy(
        site=site, summation=summation, orders=orders, pcc_voltage_v=site.pcc_voltage_v,
        z_pcc_ohm=case.z1, isc_a=res["isc"], il_a=res["il"],
        il_source="stated" if site.il_a is not None else "estimated",
        isc_il=res["isc"] / res["il"], current_a=res["current_a"], voltage_v=res["voltage_v"],
        voltage_percent=_nanmax_phase(res["v_pct"]),
        current_percent_il=_nanmax_phase(res["i_pct"]),
        thd_v_percent=float(np.nanmax(res["thd_v"])), tdd_percent=float(np.nanmax(res["tdd"])),
        unit_current_a=unit_pcc, transformer_loading_percent=case.loading_percent(counts),
        checks=checks, verdict=_overall(checks), headroom=tuple(heads),
        findings=tuple(findings), limits=res["limits"], resolved_order=max_h, _case=case)


def _limit_arrays(lim, n_orders: int) -> tuple:
    """Limits as arrays: voltage and current per order (inf where none), THD and TDD."""
    v = np.full(n_orders, np.inf)
    i = np.full(n_orders, np.inf)
    thd = tdd = np.inf
    for item in lim.items:
        if item.applies_to == "voltage" and item.basis == "percent_of_fundamental":
            if item.quantity == "harmonic" and item.order < n_orders:
                v[item.order] = item.limit
            elif item.quantity == "THD":
                thd = item.limit
        elif item.applies_to == "current" and item.basis == "percent_of_il":
            if item.quantity == "harmonic" and item.order < n_orders:
                i[item.order] = item.limit
            elif item.quantity == "TDD":
                tdd = item.limit
    return v, i, thd, tdd


def _exceeds(case: _Case, counts_matrix) -> np.ndarray:
    """For each row of counts (M, K): does any checked quantity exceed its limit? (M,) bool.

    The vectorised twin of :meth:`_Case.evaluate` for the headroom search.
    """
    c = np.asarray(counts_matrix, dtype=float)
    orders, hi = case.orders, case.max_h
    u = case.unit_pcc
    if case.summation == "phasor":
        harm = np.abs(np.einsum("mk,kph->mph", c, u))
    elif case.summation == "arithmetic":
        harm = np.einsum("mk,kph->mph", c, np.abs(u))
    else:
        alpha = summation_exponent(orders)
        harm = np.einsum("mk,kph->mph", c, np.abs(u) ** alpha) ** (1.0 / alpha)
    fund = np.einsum("mk,kp->mp", c, u[:, :, 1]) + case.other_pcc
    il = np.full(c.shape[0], case.site.il_a) if case.site.il_a is not None else \
        np.max(np.abs(fund), axis=1)
    isc = case.v_ln / abs(case.z1)
    sel = slice(2, hi + 1)
    volt = np.abs(harmonic_impedance(case.z1, orders))[sel] * harm[:, :, sel]
    with np.errstate(divide="ignore", invalid="ignore"):
        v_pct = 100.0 * volt / case.v_ln
        i_pct = 100.0 * harm[:, :, sel] / il[:, None, None]
        thd = 100.0 * np.sqrt(np.sum(volt**2, axis=-1)) / case.v_ln
        tdd = 100.0 * np.sqrt(np.sum(harm[:, :, sel] ** 2, axis=-1)) / il[:, None]
    out = np.zeros(c.shape[0], dtype=bool)
    with np.errstate(divide="ignore"):
        ratio = isc / il
    keys = [(bisect.bisect_left(case.limits.edges, x), x in case.limits.edges) for x in ratio]
    for key in set(keys):
        rows = np.array([k == key for k in keys])
        m = int(np.flatnonzero(rows)[0])
        if il[m] <= 0:
            continue
        vl, cl, thd_l, tdd_l = _limit_arrays(case.limits.get(isc, il[m]), orders.size)
        bad = (np.any(v_pct[rows] > vl[sel], axis=(1, 2))
               | np.any(i_pct[rows] > cl[sel], axis=(1, 2))
               | np.any(thd[rows] > thd_l, axis=1) | np.any(tdd[rows] > tdd_l, axis=1))
        out[rows] = bad
    return out


def _zero_sequence_findings(site: Site, orders) -> list:
    """Say where delta (or other phase-shifting) windings stop the units' zero-sequence
    (mostly triplen) currents, so a hand calculation is not surprised."""
    out = []
    t = site.transformer
    main_blocks = t is not None and site.pcc_location == "supply" and not t.passes_zero_sequence
    for u in site.units:
        if not (main_blocks or u.phase_shift_deg != 0):
            continue
        cur = np.nan_to_num(u.spectrum.current[:, : orders.size])
        zero = np.abs(sequence_components(cur[0], cur[1], cur[2])[0])
        ref = float(np.max(np.abs(cur[:, 1]))) or 1.0
        hit = [int(h) for h in range(2, zero.size) if zero[h] > 1e-3 * ref]
        if not hit:
            continue
        where = (f"the phase-shifting transformer of unit {u.name!r}"
                 if u.phase_shift_deg != 0 else
                 f"the site transformer ({t.vector_group}) between the bus and the PCC")
        out.append(Finding(
            "zero-sequence-blocked", "info",
            f"{where} does not pass zero-sequence current: the zero-sequence part of unit "
            f"{u.name!r} at orders {_orders_text(hit[:12])}{' ...' if len(hit) > 12 else ''} "
            "(balanced triplen harmonics in full) does not reach the PCC",
            orders=tuple(hit)))
    return out


def _headroom(case: _Case, counts, k: int, checks_now, max_extra: int) -> Headroom:
    unit = case.site.units[k]
    extra = np.arange(1, max_extra + 1)
    grid = np.repeat(counts[None, :], extra.size, axis=0)
    grid[:, k] += extra
    rating = None
    if case.site.transformer is not None:
        fund = np.einsum("mk,kp->mp", grid, case.unit_bus[:, :, 1]) + case.other_bus
        s = _SQRT3 * case.site.bus_voltage_v * np.max(np.abs(fund), axis=1)
        over = np.flatnonzero(s > case.site.transformer.rating_va)
        if case.loading_percent(counts) > 100.0:
            rating = 0
        elif over.size:
            rating = int(extra[over[0]]) - 1
    failing = [c for c in checks_now if c.verdict == "fail"]
    if failing:
        worst = max(failing, key=lambda c: c.usage_percent)
        fewer = np.repeat(counts[None, :], unit.count, axis=0)
        fewer[:, k] = np.arange(unit.count)
        ok = np.flatnonzero(~_exceeds(case, fewer)) if unit.count else np.array([], int)
        return Headroom(unit.name, unit.count, 0, worst.label, worst.value, worst.limit,
                        already_exceeded=True,
                        passing_count=int(ok[-1]) if ok.size else None,
                        extra_units_rating=rating)
    bad = np.flatnonzero(_exceeds(case, grid))
    if not bad.size:
        return Headroom(unit.name, unit.count, None, passing_count=unit.count,
                        extra_units_rating=rating)
    n = int(extra[bad[0]])
    checks = case.evaluate(grid[bad[0]])["checks"]
    fails = [x for x in checks if x.verdict == "fail"] or list(checks)
    worst = max(fails, key=lambda x: x.usage_percent if math.isfinite(x.value) else -1.0)
    return Headroom(unit.name, unit.count, n - 1, worst.label, worst.value, worst.limit,
                    passing_count=unit.count, extra_units_rating=rating)


def _orders_text(orders) -> str:
    orders = sorted(orders)
    if len(orders) > 3 and orders == list(range(orders[0], orders[-1] + 1)):
        return f"{orders[0]} to {orders[-1]}"
    return ", ".join(map(str, orders))


# ---------------------------------------------------------------------------------------------
# Plain-data form
# ---------------------------------------------------------------------------------------------


def _num(x, digits=10):
    if x is None:
        return None
    x = float(x)
    return float(f"{x:.{digits}g}") if math.isfinite(x) else None


def study_to_dict(study: SiteStudy) -> dict:
    """JSON-ready form of a :class:`SiteStudy` (non-finite numbers become None).

    Keys: ``tool``, ``site`` (name, file, sha256, supply, transformer, pcc, other_load,
    units, each with ``pcc_current_a``: one unit's current at the PCC for orders 1..H, worst
    phase), ``summation``, ``pcc`` (voltage, impedance, ISC, IL, ISC/IL), ``limits`` (table,
    rows), ``harmonics`` (per order: current per phase and % of IL, voltage per phase and % of
    nominal), ``totals`` (THD of voltage, TDD), ``checks``, ``verdict``, ``headroom``,
    ``findings`` and ``cautions``.
    """
    from . import __version__

    s = study.site
    t = s.transformer
    harmonics = []
    for h in study.orders[1:]:
        harmonics.append({
            "order": int(h),
            "current_a": [_num(x) for x in study.current_a[:, h]],
            "current_percent_il": _num(study.current_percent_il[h]),
            "voltage_v": [_num(x) for x in study.voltage_v[:, h]],
            "voltage_percent": _num(study.voltage_percent[h]),
        })
    lim = study.limits
    return {
        "tool": {"name": "pqcheck", "version": __version__, "kind": "site study",
                 "schema": SCHEMA_VERSION},
        "site": {
            "name": s.name, "file": None if s.path is None else str(s.path),
            "sha256": s.sha256, "nominal_frequency_hz": s.nominal_hz,
            "supply": {"nominal_voltage_v": s.supply.nominal_voltage_v,
                       "ssc_va": _num(s.supply.ssc_va), "isc_a": _num(s.supply.isc_a),
                       "x_over_r": s.supply.x_over_r},
            "transformer": None if t is None else {
                "rating_va": t.rating_va, "primary_v": t.primary_v, "secondary_v": t.secondary_v,
                "impedance_percent": t.impedance_percent, "x_over_r": t.x_over_r,
                "vector_group": t.vector_group, "shift_deg": t.shift_deg},
            "pcc_location": s.pcc_location,
            "other_load": {"demand_w": s.other_load.demand_w,
                           "power_factor": s.other_load.power_factor,
                           "demand_current_a": s.other_load.demand_current_a},
            "units": [{"name": u.name, "count": u.count, "load_point": u.load_point,
                       "phase_shift_deg": u.phase_shift_deg, "source": u.spectrum.source,
                       "sha256": u.spectrum.sha256, "channels": list(u.spectrum.channels),
                       "phase_measured": u.spectrum.phase_measured,
                       "fundamental_a": _num(float(np.max(np.abs(u.spectrum.current[:, 1])))),
                       "pcc_current_a": [_num(float(np.max(np.abs(study.unit_current_a[k, :, h]))))
                                         for h in study.orders[1:]]}
                      for k, u in enumerate(s.units)],
        },
        "summation": study.summation,
        "pcc": {"nominal_voltage_v": study.pcc_voltage_v,
                "impedance_ohm": {"r": _num(study.z_pcc_ohm.real),
                                  "x": _num(study.z_pcc_ohm.imag)},
                "isc_a": _num(study.isc_a), "il_a": _num(study.il_a),
                "il_source": study.il_source, "isc_il": _num(study.isc_il),
                "transformer_loading_percent": _num(study.transformer_loading_percent)},
        "limits": None if lim is None else {
            "table": lim.table_id, "standard": lim.standard, "edition": lim.edition,
            "source": lim.source, "sha256": lim.sha256, "rows": list(lim.rows)},
        "resolved_order": study.resolved_order,
        "harmonics": harmonics,
        "totals": {"thd_v_percent": _num(study.thd_v_percent),
                   "tdd_percent": _num(study.tdd_percent)},
        "checks": [{"label": c.label, "quantity": c.quantity, "applies_to": c.applies_to,
                    "order": c.order, "value": _num(c.value), "limit": _num(c.limit),
                    "unit": c.unit, "basis": c.basis, "verdict": c.verdict, "phase": c.phase,
                    "clause": c.clause, "verify": c.verify} for c in study.checks],
        "verdict": study.verdict,
        "headroom": [{"unit": h.unit, "count": h.count, "extra_units": h.extra_units,
                      "searched_up_to": MAX_HEADROOM, "binding": h.binding,
                      "binding_value": _num(h.binding_value),
                      "binding_limit": _num(h.binding_limit),
                      "already_exceeded": h.already_exceeded,
                      "passing_count": h.passing_count,
                      "extra_units_rating": h.extra_units_rating} for h in study.headroom],
        "findings": [f.to_dict() for f in study.findings],
        "cautions": list(CAUTIONS),
    }


#: Cautions every site study output carries.
CAUTIONS = (
    "This site study is an estimate for planning. The utility's own study governs the "
    "interconnection.",
    "Work on the installation must be done by qualified personnel, following local codes and "
    "the utility's requirements.",
    "Each unit is modelled as a current source with the spectrum measured at its load point; "
    "every unit is assumed to run at that point at once. Other site load is taken as linear.",
    "Capacitors, cable capacitance, network resonances and background distortion from other "
    "customers are not modelled; they can raise harmonic voltages well above this estimate.",
    "Values are compared with 1.0 times the limits as a steady-state estimate; IEEE 519 "
    "assesses statistics of a survey measured at the PCC.",
)


# ---------------------------------------------------------------------------------------------
# Template
# ---------------------------------------------------------------------------------------------

_TEMPLATE = '''\
# pqcheck site description (schema 1)
#
# Several units (chargers, drives, inverters) at one point of common coupling (PCC): what the
# whole site injects at the PCC, the voltage distortion that causes, and how many more units
# fit. Then:
#
#     pqcheck site THIS-FILE.toml                  (table on the terminal)
#     pqcheck site THIS-FILE.toml -o site.pdf      (PDF section)
#
# The result is an estimate for planning; the utility's own study governs.
# Relative paths resolve against the folder of this file. Units are in the field names:
# _v volts, _a amperes, _va volt-amperes, _w watts, _hz hertz, _deg degrees.

schema = 1
name = "Site name"
nominal_frequency_hz = 50        # 50 or 60; default: from the units' data
summation = "general"            # how the units' harmonic currents combine:
                                 #   "general"    IEC TR 61000-3-6 summation law (exponent 1
                                 #                below order 5, 1.4 for 5 to 10, 2 above 10)
                                 #   "arithmetic" worst case, magnitudes added
                                 #   "phasor"     measured phases added (needs a voltage
                                 #                measured with every unit's currents)

# The utility supply, where its fault level is stated (ask the utility).
[supply]
nominal_voltage_v = 11000        # line-to-line
ssc_va = 250e6                   # three-phase short-circuit power ...
# isc_a = 13122                  # ... or short-circuit current (give one of them)
x_over_r = 10                    # X/R of the supply impedance

# The site transformer between the supply and the bus the units connect to. Delete this table
# when the units connect at the supply voltage.
[transformer]
rating_va = 1000e3
# primary_v = 11000              # default: supply.nominal_voltage_v
secondary_v = 400
impedance_percent = 6.0
x_over_r = 6
vector_group = "Dyn11"           # a delta winding stops zero-sequence (triplen) currents

[pcc]
location = "supply"              # "supply": the PCC is the transformer's primary (where the
                                 # fault level above is stated); "bus": its secondary
# il_a = 35                      # IL at the PCC if the utility states it; default: estimated
                                 # from the units' fundamental and the other load

# Linear load besides the units (offices, workshop, lighting), on the same bus.
[other_load]
demand_w = 80e3                  # maximum demand
power_factor = 0.9               # lagging displacement power factor
# demand_current_a = 130         # per phase at the bus, e.g. from billing demand; replaces the
                                 # estimate from demand_w and power_factor

[limits]
table = "ieee519-2022"           # bundled id or the path of your own table file
generation = false               # true: IEEE 519 rule for generation (first ISC/IL row)

# One entry per kind of unit. Give a capture to analyse or saved results: the JSON of
# pqcheck analyze CAPTURE --format json, or of pqcheck report PLAN --json (then load_point
# picks the capture by its load point or id).
[[units]]
name = "DC charger 150 kW"
capture = "charger-150kw.csv"    # or: results = "charger-150kw.json"
count = 4
load_point = "100 %"             # the operating point the capture represents; every unit is
                                 # assumed to run there at once
phase_shift_deg = 0              # phase-shifting transformer feeding these units: angle by
                                 # which their side leads the bus (+30 Dyn11, -30 Dyn1)
# current = ["ia", "ib", "ic"]   # channel map of the capture (default: guessed)
# voltage = ["va", "vb", "vc"]
# connection = "three-phase"     # only for data with one current channel: "three-phase"
                                 # (balanced phases assumed) or "single-phase"
# phase = "a"                    # bus phase of a single-phase unit

[[units]]
name = "AC charger 22 kW"
results = "charger-22kw.json"
count = 2
load_point = "32 A"
'''


def site_template() -> str:
    """Return the commented site template that ``pqcheck site new`` writes."""
    return _TEMPLATE


def shown_path(source: str, site_path) -> str:
    """A unit's data file relative to the site file's folder when it lies inside it."""
    if site_path is None:
        return source
    try:
        return str(Path(source).resolve().relative_to(Path(site_path).resolve().parent))
    except ValueError:
        return source
