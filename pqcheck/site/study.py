"""The site study: the units' currents and voltages at the PCC, their checks and the headroom.

:func:`study_site` combines every unit's measured harmonic currents at the point of common
coupling (PCC), drives them through the supply impedance, and compares the estimate with the
site's limit table. Each comparison is an :class:`pqcheck.assess.Check` and the overall
verdict is :func:`pqcheck.assess.overall_verdict`, the same record and rule as a capture's
assessment; THD and TDD are :func:`pqcheck.metrics.thd` and :func:`pqcheck.metrics.tdd`.

One evaluation (:meth:`_Case.evaluate`, over any number of sets of unit counts at once) gives
every figure: the checks of the site as described, the outcome under each summation method,
and the headroom search (how many more units of one kind fit), which asks the same
comparisons of the same arrays for every count it tries.
"""

from __future__ import annotations

import bisect
import math
from dataclasses import dataclass, fields, replace

import numpy as np

from .. import metrics
from ..assess import Check, overall_verdict
from ..errors import InputError, PlanError
from ..findings import Finding
from ..limits import HARMONIC, table_path
from ..metrics import sequence_components
from .model import Site, Unit
from .network import SQRT3, SUMMATIONS, aggregate, harmonic_voltages, transformer_shift

__all__ = ["MAX_HEADROOM", "CAUTIONS", "Headroom", "SummationOutcome", "SiteStudy", "StudySpec",
           "study_site"]

#: Largest number of extra units the headroom search tries per kind.
MAX_HEADROOM = 1000

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

#: The site's checks: (applies_to, basis) of the limits a PCC estimate can be compared with.
SITE_BASES = (("current", "percent_of_il"), ("voltage", "percent_of_fundamental"))

#: Channel name of every site check (the estimate is at the PCC, not on a measured channel).
CHANNEL = "PCC"

_PHASES = ("a", "b", "c")


# ---------------------------------------------------------------------------------------------
# Results
# ---------------------------------------------------------------------------------------------


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
        no limit was exceeded within the searched range. 0 when the site already exceeds a
        limit.
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
    searched_up_to : int
        Largest number of extra units tried. [unitless]
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
    searched_up_to: int = MAX_HEADROOM


@dataclass(frozen=True)
class SummationOutcome:
    """The site's verdict if the units' harmonic currents combined by one summation method.

    Attributes
    ----------
    summation : str
        One of :data:`pqcheck.site.SUMMATIONS`.
    verdict : str
        Overall verdict under this method; "" when the method cannot be used (see ``note``).
    failing : tuple of str
        Labels of the failing checks (``"I5"``, ``"V7"``, ``"TDD"``), in table order.
    closest : str
        Label of the check with the smallest margin ("" when none was measured).
    closest_margin_percent : float or None
        Its margin ``(limit - value) / limit x 100``. [%]
    note : str
        Why the method cannot be used, when it cannot.
    """

    summation: str
    verdict: str
    failing: tuple = ()
    closest: str = ""
    closest_margin_percent: float | None = None
    note: str = ""


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
    checks : tuple of pqcheck.assess.Check
        One per limit item (channel ``"PCC"``, phase = the worst phase).
    verdict : str
        :func:`pqcheck.assess.overall_verdict` of ``checks``.
    headroom : tuple of Headroom
    findings : tuple of Finding
    limits : pqcheck.limits.ResolvedLimits
        The limits used.
    resolved_order : int
        Highest order every unit's data resolves. [unitless]
    by_summation : tuple of SummationOutcome
        The verdict and failing checks under each summation method (general, arithmetic,
        phasor), to show how the verdict depends on the choice.
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
    by_summation: tuple = ()

    def check(self, label: str) -> Check | None:
        """The check labelled ``label`` (``"V5"``, ``"I7"``, ``"TDD"``, ``"THD(V)"``)."""
        return next((c for c in self.checks if c.label == label), None)

    @property
    def inputs(self) -> tuple:
        """Every file the study rests on, as ``(what, name, path, sha256)``: the site file,
        each unit's capture or results file and the limit table (path "" when bundled)."""
        s = self.site
        out = [("site file", s.name, "" if s.path is None else str(s.path), s.sha256)]
        for u in s.units:
            what = "unit capture" if u.source_kind == "capture" else "unit results"
            out.append((what, u.name, u.spectrum.source, u.spectrum.sha256))
        lim = self.limits
        if lim is not None:
            out.append(("limit table", lim.table_id,
                        "" if table_path(s.limits) is None else str(lim.source or s.limits),
                        lim.sha256 or ""))
        return tuple(out)

    def outcome(self, summation: str) -> SummationOutcome | None:
        """The outcome under one summation method (None if not computed)."""
        return next((o for o in self.by_summation if o.summation == summation), None)


# ---------------------------------------------------------------------------------------------
# Limits per ISC/IL band
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

    def key(self, isc_a: float, il_a: float) -> tuple:
        x = isc_a / il_a if il_a > 0 else math.inf
        return bisect.bisect_left(self.edges, x), x in self.edges

    def get(self, isc_a: float, il_a: float):
        from ..limits import resolve

        key = self.key(isc_a, il_a)
        if key not in self.cache:
            try:
                self.cache[key] = resolve(self.table, voltage_level_v=self.site.pcc_voltage_v,
                                          isc_a=isc_a, il_a=il_a, generation=self.site.generation)
            except InputError as exc:
                raise PlanError(f"limit table {self.table.id}: {exc.problem}",
                                path=self.site.path, field="limits.table") from None
        return self.cache[key]


def _load_limit_table(table: str, site_path):
    from ..limits import load_table

    try:
        return load_table(table)
    except InputError as exc:
        raise PlanError(f"limits.table: {exc.location_message()}", path=site_path) from None


def _site_items(lim) -> list:
    """The limit items a PCC estimate is compared with: harmonic voltages and THD in % of the
    fundamental, harmonic currents and TDD in % of IL."""
    out = []
    for item in lim.items:
        if (item.applies_to, item.basis) not in SITE_BASES:
            continue
        if item.quantity == HARMONIC or (item.quantity, item.applies_to) in (
                ("THD", "voltage"), ("TDD", "current")):
            out.append(item)
    return out


# ---------------------------------------------------------------------------------------------
# The evaluation
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class _State:
    """Figures at the PCC for M sets of unit counts (leading axis M)."""

    current_a: np.ndarray  # (M, 3, H+1): order 1 the fundamental magnitude, 0 and > max_h NaN
    voltage_v: np.ndarray  # (M, 3, H+1): orders 0, 1 and > max_h NaN
    v_pct: np.ndarray  # (M, 3, H+1) % of nominal line-to-neutral voltage
    i_pct: np.ndarray  # (M, 3, H+1) % of IL
    thd_v: np.ndarray  # (M, 3) %
    tdd: np.ndarray  # (M, 3) %
    il: np.ndarray  # (M,) A
    isc: float  # A

    def values(self, item) -> np.ndarray | None:
        """(M, 3) values compared with ``item``; None for an order beyond the arrays."""
        if item.quantity == HARMONIC:
            arr = self.v_pct if item.applies_to == "voltage" else self.i_pct
            return arr[..., item.order] if item.order < arr.shape[-1] else None
        return self.thd_v if item.applies_to == "voltage" else self.tdd


def _exceeded(values, limit: float):
    """The comparison every site check and the headroom search make: value above 1.0 x the
    limit (NaN is not above)."""
    with np.errstate(invalid="ignore"):
        return np.asarray(values) > limit


@dataclass(frozen=True, eq=False)
class _Case:
    """What stays fixed while the counts change (the summation methods, the headroom)."""

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

    def loading_percent(self, counts) -> np.ndarray | None:
        """Fundamental apparent power at the bus over the rating, per set of counts. [%]"""
        t = self.site.transformer
        if t is None:
            return None
        c = np.atleast_2d(np.asarray(counts, dtype=float))
        fund = np.tensordot(c, self.unit_bus[:, :, 1], axes=(1, 0)) + self.other_bus
        s = SQRT3 * self.site.bus_voltage_v * np.max(np.abs(fund), axis=-1)
        return 100.0 * s / t.rating_va

    def evaluate(self, counts) -> _State:
        """Every figure at the PCC for counts of shape (K,) or (M, K)."""
        c = np.atleast_2d(np.asarray(counts, dtype=float))
        orders, max_h = self.orders, self.max_h
        cur = aggregate(self.unit_pcc, c, orders, self.summation)  # (M, 3, H+1)
        fund = np.tensordot(c, self.unit_pcc[:, :, 1], axes=(1, 0)) + self.other_pcc
        cur[..., 0] = np.nan
        cur[..., 1] = np.abs(fund)
        cur[..., max_h + 1:] = np.nan
        if self.site.il_a is not None:
            il = np.full(c.shape[0], float(self.site.il_a))
        else:
            il = np.max(np.abs(fund), axis=-1)
        volt = harmonic_voltages(cur, self.z1, orders)
        volt[..., :2] = np.nan
        # THD of the voltage relative to the nominal fundamental (the estimate has no other)
        with_fund = volt.copy()
        with_fund[..., 1] = self.v_ln
        with np.errstate(divide="ignore", invalid="ignore"):
            v_pct = 100.0 * volt / self.v_ln
            i_pct = np.where(il[:, None, None] > 0, 100.0 * cur / il[:, None, None], np.nan)
        i_pct[..., :2] = np.nan
        return _State(current_a=cur, voltage_v=volt, v_pct=v_pct, i_pct=i_pct,
                      thd_v=metrics.thd(with_fund, max_order=max_h),
                      tdd=metrics.tdd(cur, il[:, None], max_order=max_h), il=il,
                      isc=self.v_ln / abs(self.z1))

    def checks(self, st: _State, m: int = 0) -> tuple:
        """The checks of row ``m`` of an evaluation."""
        lim = self.limits.get(st.isc, float(st.il[m]))
        orders, max_h = self.orders, self.max_h
        complete_totals = not self.bad_orders and max_h >= min(lim.max_order, orders.size - 1)
        statistic = (f"steady-state estimate at the PCC, worst phase ({self.summation} "
                     "summation)")
        out = []
        for item in _site_items(lim):
            vals = st.values(item)
            note = ""
            if vals is None:
                k, val, complete = 0, math.nan, False
                note = f"above the orders the study computes (up to {orders.size - 1})"
            else:
                row = vals[m]
                k = _worst_phase(row)
                val = float(row[k])
                if item.quantity == HARMONIC:
                    complete = item.order <= max_h and item.order not in self.bad_orders
                    if not complete:
                        note = (f"not resolved by every unit's data (they resolve orders up "
                                f"to {max_h})" if item.order > max_h else
                                "a unit's data have an error finding for this order")
                else:
                    complete = complete_totals
                    if not complete:
                        note = (f"counts only orders 2 to {max_h} and orders without an error "
                                "finding in the units' data, so it may read low")
            if _exceeded(val, item.limit):
                verdict = "fail"
            elif not math.isfinite(val) or not complete:
                verdict = "inconclusive"
            else:
                verdict = "pass"
            measured = val if math.isfinite(val) else None
            margin = None if measured is None or not item.limit > 0 else \
                (item.limit - measured) / item.limit * 100.0
            out.append(Check(
                table_id=lim.table_id, quantity=item.quantity, order=item.order,
                applies_to=item.applies_to, phase=_PHASES[k], channel=CHANNEL,
                statistic=statistic, measured=measured, limit=item.limit, unit=item.unit,
                margin_percent=margin, verdict=verdict, clause=item.clause,
                verify=bool(item.verify), note="; ".join(x for x in (note, item.note) if x),
                table_limit=item.limit, multiplier=1.0, basis=item.basis, tag=item.tag))
        return tuple(out)

    def fails(self, st: _State) -> np.ndarray:
        """For each row of an evaluation: does any check fail? (M,) bool. The same
        comparisons of the same values as :meth:`checks`."""
        out = np.zeros(st.il.size, dtype=bool)
        keys = [self.limits.key(st.isc, float(x)) for x in st.il]
        for key in set(keys):
            rows = np.array([k == key for k in keys])
            first = int(np.flatnonzero(rows)[0])
            if not st.il[first] > 0:
                continue
            for item in _site_items(self.limits.get(st.isc, float(st.il[first]))):
                vals = st.values(item)
                if vals is not None:
                    out[rows] |= np.any(_exceeded(vals[rows], item.limit), axis=-1)
        return out


def _worst_phase(values) -> int:
    """Index of the largest of three phase values (the first of equal ones; 0 if all NaN)."""
    v = np.where(np.isfinite(values), values, -np.inf)
    top = np.max(v)
    if not np.isfinite(top):
        return 0
    return int(np.argmax(v >= top - 1e-9 * abs(top)))


def _nanmax_phase(a) -> np.ndarray:
    """Largest of the three phases per order, NaN where all are NaN."""
    a = np.asarray(a, dtype=float)
    fin = np.isfinite(a)
    out = np.max(np.where(fin, a, -np.inf), axis=0)
    return np.where(np.any(fin, axis=0), out, np.nan)


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


# ---------------------------------------------------------------------------------------------
# The study
# ---------------------------------------------------------------------------------------------


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
        Largest number of extra units tried per kind, 1 to :data:`MAX_HEADROOM`. [unitless]

    Returns
    -------
    SiteStudy

    Raises
    ------
    PlanError
        The limit table cannot be loaded or has no row for the site's ISC/IL and voltage, the
        phasor sum is asked for units without measured phases, ``max_headroom`` is out of
        range, or the site has no load at all (IL would be zero).

    Notes
    -----
    Harmonic currents: :func:`~pqcheck.site.aggregate` per phase and order over all units
    (after :func:`~pqcheck.site.transformer_shift` for units behind a phase-shifting
    transformer and for the site transformer when the PCC is on its primary, currents referred
    by its ratio). Fundamental: phasor sum of all units and the other load. IL: the stated
    value, else the largest phase fundamental. ISC: nominal line-to-neutral voltage over
    ``|Z_pcc|``. Harmonic voltages: :func:`~pqcheck.site.harmonic_voltages`, in percent of
    the nominal line-to-neutral voltage; THD (relative to the nominal voltage) and TDD over
    orders 2 to the table's highest order (50 for IEEE 519). Every value is the worst of the
    three phases and is compared with 1.0 times the limit: a planning estimate of the steady
    state with every unit at its load point, not the standard's statistical evaluation of a
    survey.
    """
    summation = summation or site.summation
    if summation not in SUMMATIONS:
        raise PlanError(f"summation must be one of {', '.join(SUMMATIONS)}, got {summation!r}",
                        field="summation")
    if isinstance(max_headroom, bool) or not isinstance(max_headroom, (int, np.integer)) \
            or not 1 <= max_headroom <= MAX_HEADROOM:
        raise PlanError(f"max_headroom must be a whole number from 1 to {MAX_HEADROOM}, got "
                        f"{max_headroom!r}", field="max_headroom")
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
    v_bus_ln = site.bus_voltage_v / SQRT3
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
                 z1=site.pcc_impedance_ohm, v_ln=site.pcc_voltage_v / SQRT3, max_h=max_h,
                 bad_orders=frozenset(bad_orders))
    counts = np.array([u.count for u in site.units], dtype=float)
    st = case.evaluate(counts)
    il = float(st.il[0])
    if not il > 0:
        raise PlanError("the site draws no fundamental current (every count is 0 and there is "
                        "no other load), so IL is zero; add units or other_load, or give "
                        "pcc.il_a", path=site.path, field="units")
    checks = case.checks(st)
    heads = []
    if headroom:
        heads = [_headroom(case, counts, k, checks, int(max_headroom))
                 for k in range(len(site.units))]
    loading = case.loading_percent(counts)
    return SiteStudy(
        site=site, summation=summation, orders=orders, pcc_voltage_v=site.pcc_voltage_v,
        z_pcc_ohm=case.z1, isc_a=st.isc, il_a=il,
        il_source="stated" if site.il_a is not None else "estimated",
        isc_il=st.isc / il, current_a=st.current_a[0], voltage_v=st.voltage_v[0],
        voltage_percent=_nanmax_phase(st.v_pct[0]),
        current_percent_il=_nanmax_phase(st.i_pct[0]),
        thd_v_percent=float(np.nanmax(st.thd_v[0])), tdd_percent=float(np.nanmax(st.tdd[0])),
        unit_current_a=unit_pcc,
        transformer_loading_percent=None if loading is None else float(loading[0]),
        checks=checks, verdict=overall_verdict(checks), headroom=tuple(heads),
        findings=tuple(findings), limits=limits.get(st.isc, il), resolved_order=max_h,
        by_summation=_by_summation(case, counts, checks))


def _by_summation(case: _Case, counts, checks) -> tuple:
    """The verdict and failing checks under every summation method."""
    out = []
    for method in SUMMATIONS:
        if method == "phasor" and not all(u.spectrum.phase_measured for u in case.site.units):
            out.append(SummationOutcome(
                method, "", note="needs phase angles measured against a voltage for every "
                                 "unit"))
            continue
        these = checks if method == case.summation else \
            replace(case, summation=method).checks(
                replace(case, summation=method).evaluate(counts))
        measured = [c for c in these if c.margin_percent is not None]
        closest = min(measured, key=lambda c: c.margin_percent) if measured else None
        out.append(SummationOutcome(
            method, overall_verdict(these),
            failing=tuple(c.label for c in these if c.verdict == "fail"),
            closest=closest.label if closest else "",
            closest_margin_percent=closest.margin_percent if closest else None))
    return tuple(out)


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
        over = np.flatnonzero(case.loading_percent(grid) > 100.0)
        if case.loading_percent(counts)[0] > 100.0:
            rating = 0
        elif over.size:
            rating = int(extra[over[0]]) - 1
    failing = [c for c in checks_now if c.verdict == "fail"]
    if failing:
        worst = min(failing, key=lambda c: c.margin_percent)
        fewer = np.repeat(counts[None, :], unit.count, axis=0)
        fewer[:, k] = np.arange(unit.count)
        ok = np.flatnonzero(~case.fails(case.evaluate(fewer))) if unit.count else \
            np.array([], int)
        return Headroom(unit.name, unit.count, 0, worst.label, worst.measured, worst.limit,
                        already_exceeded=True,
                        passing_count=int(ok[-1]) if ok.size else None,
                        extra_units_rating=rating, searched_up_to=max_extra)
    st = case.evaluate(grid)
    bad = np.flatnonzero(case.fails(st))
    if not bad.size:
        return Headroom(unit.name, unit.count, None, passing_count=unit.count,
                        extra_units_rating=rating, searched_up_to=max_extra)
    n = int(extra[bad[0]])
    fails = [x for x in case.checks(st, int(bad[0])) if x.verdict == "fail"]
    worst = min(fails, key=lambda x: x.margin_percent)
    return Headroom(unit.name, unit.count, n - 1, worst.label, worst.measured, worst.limit,
                    passing_count=unit.count, extra_units_rating=rating,
                    searched_up_to=max_extra)


def _orders_text(orders) -> str:
    orders = sorted(orders)
    if len(orders) > 3 and orders == list(range(orders[0], orders[-1] + 1)):
        return f"{orders[0]} to {orders[-1]}"
    return ", ".join(map(str, orders))


# ---------------------------------------------------------------------------------------------
# What a study is run with
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class StudySpec:
    """Everything that decides a site study besides the files it reads: the site study's run
    specification, recorded in its results (``study_spec``) so that ``pqcheck verify`` runs it
    again from data.

    Attributes
    ----------
    site_file : str
        The site file as given (its SHA-256 and those of the files it names are in the
        results' ``inputs``).
    summation : str or None
        Override of the site file's summation method (one of
        :data:`~pqcheck.site.SUMMATIONS`); None: the file's.
    headroom : bool
        Search how many more units of each kind fit.
    max_headroom : int
        Largest number of extra units tried per kind, 1 to :data:`MAX_HEADROOM`. [unitless]
    """

    site_file: str
    summation: str | None = None
    headroom: bool = True
    max_headroom: int = MAX_HEADROOM

    def __post_init__(self):
        if not isinstance(self.site_file, str) or not self.site_file.strip():
            raise InputError("must name the site file", field="site_file")
        if self.summation is not None and self.summation not in SUMMATIONS:
            raise InputError(f"must be one of {', '.join(map(repr, SUMMATIONS))}, got "
                             f"{self.summation!r}", field="summation")
        if not isinstance(self.headroom, bool):
            raise InputError(f"must be true or false, got {self.headroom!r}", field="headroom")
        m = self.max_headroom
        if isinstance(m, bool) or not isinstance(m, int) or not 1 <= m <= MAX_HEADROOM:
            raise InputError(f"must be a whole number from 1 to {MAX_HEADROOM}, got {m!r}",
                             field="max_headroom")

    def study_kwargs(self) -> dict:
        """Keyword arguments of :func:`study_site`."""
        return {"summation": self.summation, "headroom": self.headroom,
                "max_headroom": self.max_headroom}

    def to_dict(self) -> dict:
        """Plain-JSON form (every field present)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}

    @classmethod
    def from_dict(cls, d) -> StudySpec:
        """The spec of :meth:`to_dict`.

        Raises
        ------
        InputError
            Not a mapping, an unknown field or a value out of range (naming
            ``study_spec.FIELD``).
        """
        if not isinstance(d, dict):
            raise InputError("must be a mapping", field="study_spec")
        names = [f.name for f in fields(cls)]
        for k in d:
            if k not in names:
                raise InputError(f"unknown field {k!r} (allowed: {', '.join(names)})",
                                 field=f"study_spec.{k}")
        try:
            return cls(**d)
        except InputError as exc:
            raise InputError(exc.problem, field=f"study_spec.{exc.field}") from None
        except TypeError:
            raise InputError("missing field 'site_file'", field="study_spec") from None
