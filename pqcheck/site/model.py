"""The site model: supply, site transformer, other load, the units and their measured spectra.

Frozen dataclasses (:class:`Site` with :class:`Supply`, :class:`SiteTransformer`,
:class:`OtherLoad`, :class:`Unit`, :class:`UnitSpectrum`) and the two ways a unit's spectrum
is made: from an :class:`~pqcheck.analysis.AnalysisResult` (:func:`spectrum_from_analysis`) or
from saved results (:func:`spectrum_from_dict`). A unit's harmonic currents are its IEC
61000-4-7 harmonic components (rms over the capture, phase of the mean phasor), because phasors
are needed for phase shifts and the phasor sum.
"""

from __future__ import annotations

import cmath
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..findings import Finding
from .network import SQRT3, source_impedance, transformer_impedance, vector_group_shift

__all__ = [
    "PCC_LOCATIONS",
    "Supply",
    "SiteTransformer",
    "OtherLoad",
    "UnitSpectrum",
    "Unit",
    "Site",
    "spectrum_from_analysis",
    "spectrum_from_dict",
]

#: Where the point of common coupling is when the site has its own transformer.
PCC_LOCATIONS = ("supply", "bus")


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
        return self.ssc_va / (SQRT3 * self.nominal_voltage_v)

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
            mag = self.demand_w / (SQRT3 * bus_voltage_v * self.power_factor)
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
    source_kind : str
        ``"capture"`` (the spectrum was analysed from a capture) or ``"results"`` (read from
        saved results).
    run_spec : pqcheck.record.RunSpec or None
        For a capture: the run specification it was read and analysed with.
    """

    name: str
    count: int
    load_point: str
    spectrum: UnitSpectrum
    phase_shift_deg: float = 0.0
    line: int | None = None
    source_kind: str = "results"
    run_spec: object = field(default=None, compare=False)


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
        The results JSON of ``pqcheck analyze`` (JSON format): needs ``channels``, a list of
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
                         "pqcheck analyze CAPTURE in JSON format)")
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
