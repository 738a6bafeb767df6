"""Assessment: measured statistics against resolved limits, one :class:`Check` per comparison.

For every limit item of a :class:`~pqcheck.limits.ResolvedLimits` and every channel of the
quantity it concerns, the window values of the table's measure (IEC 61000-4-7 harmonic group,
subgroup or component) are put in the limit's basis (% of IL, % of the fundamental, A, mA/W,
% of rated current, % of Iref), aggregated as the table's evaluation rule says (1.5 s smoothing,
3 s / 10 min RMS values) and reduced to the rule's statistics (mean, max, RMS, percentiles).
Each statistic compared with ``multiplier x limit`` is one :class:`Check`.

Verdicts
    ``pass``, ``fail``, ``not applicable`` (e.g. a harmonic the standard says to disregard) or
    ``inconclusive``: a data-quality finding of severity ``error`` that concerns the checked
    channel and order (clipping, a sample rate too low for the order), or a value that could not
    be measured. An inconclusive check is never a pass. The overall verdict is ``fail`` if any
    check fails, else ``inconclusive`` if any is inconclusive, else ``pass`` (``not applicable``
    when nothing was assessed).

IEC 61000-3-2 application rules (when the table's evaluation carries them)
    the average of the 1.5 s smoothed values <= 100 % of the limit and every smoothed value
    <= 150 %; the 200 % exception (Class A: above 150 % for less than 10 % of the observation
    and 10 min, mean below 90 %); the POHC allowance (orders 21-39 may average up to 150 % when
    the measured POHC is within the POHC of the limits and every smoothed value is within 150 %);
    harmonics below 0.6 % of the input current or 5 mA are disregarded; Class D per-watt limits use
    the maximum 1.5 s smoothed active power.

IEEE 519 on a short capture
    The standard's percentiles of 3 s values over a day and of 10 min values over a week need a
    long survey at the PCC. A shorter capture is compared by the table's ``short_capture`` rule
    (the captured steady state), and the assessment says so in its notes.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from . import aggregate, gates, metrics, numfmt, uncertainty
from ._limit_model import parse_orders
from .errors import InputError
from .limits import HARMONIC, LimitItem, ResolvedLimits, quantity_label

__all__ = ["Check", "Assessment", "assess", "VERDICTS", "overall_verdict", "thd_top_order",
           "window_thd_percent", "window_tdd_percent"]

VERDICTS = ("pass", "fail", "not applicable", "inconclusive")
#: A declared active power may differ from the measured one by this share (IEC 61000-3-2,
#: Class D: "within 10 %"). [unitless]
DECLARED_POWER_TOLERANCE = 0.10
_SERIES_TEXT = {"window": "10/12-cycle values", "smoothed": "1.5 s smoothed values",
                "3s": "3 s values", "10min": "10 min values"}


@dataclass(frozen=True)
class Check:
    """One comparison of a measured statistic with a limit.

    Attributes
    ----------
    table_id : str
        Limit table id.
    quantity : str
        ``"harmonic"`` (with ``order``) or a total: ``THD``, ``TDD``, ``THC``, ``PWHC``,
        ``PWHD``, ``TRD``, ``DC``.
    order : int or None
        Harmonic order (None for totals).
    applies_to : str
        ``"current"`` or ``"voltage"``.
    phase : str
        Phase of the channel (``a``, ``b``, ``c`` or "" for single-phase).
    channel : str
        Channel name.
    statistic : str
        What was compared, e.g. ``"mean of 1.5 s smoothed values"``.
    measured : float or None
        The statistic, in ``unit``. [%, A or mA/W]
    limit : float or None
        The value it is compared with: ``multiplier x table_limit`` (x power factor where the
        table says so). [%, A or mA/W]
    unit : str
    margin_percent : float or None
        ``(limit - measured) / limit x 100``: positive is headroom, negative an excess. [%]
    verdict : str
        ``pass``, ``fail``, ``not applicable`` or ``inconclusive``.
    clause : str
        Clause or table of the standard.
    verify : bool
        The limit (or the rule) is tagged to verify against your copy of the standard.
    note : str
        Why, when the verdict needs explaining (exceptions applied, findings, disregarded).
    table_limit : float or None
        The limit as the table gives it. [unit]
    multiplier : float
        Multiple of the limit the rule allows. [unitless]
    basis : str
        What measured and limit are relative to (``percent_of_il``,
        ``percent_of_fundamental``, ``amperes``, ...; as the table's block says).
    tag : str
        Confidence tag of the limit value in the table: ``V`` verified, ``C`` computed,
        ``P`` partly verified, ``M`` from memory.
    period_start, period_end : str
        For a statistic over periods of a survey (IEEE 519 daily / weekly percentiles): the
        worst period, whose value ``measured`` is (ISO 8601; "" otherwise).
    uncertainty : float or None
        Expanded uncertainty (k = 2) of ``measured`` (:mod:`pqcheck.uncertainty`). [unit]
    marginal : bool
        The margin is smaller than the uncertainty: under the default guarded-acceptance rule
        such a value is inconclusive, never a clean pass.

    A gate of :mod:`pqcheck.gates` (scope, plausibility, observation) appears as a check too,
    with the gate's code as ``quantity`` and ``statistic = "gate"``.
    """

    table_id: str
    quantity: str
    order: int | None
    applies_to: str
    phase: str
    channel: str
    statistic: str
    measured: float | None
    limit: float | None
    unit: str
    margin_percent: float | None
    verdict: str
    clause: str
    verify: bool
    note: str = ""
    table_limit: float | None = None
    multiplier: float = 1.0
    basis: str = ""
    tag: str = ""
    period_start: str = ""
    period_end: str = ""
    uncertainty: float | None = None
    marginal: bool = False

    @property
    def label(self) -> str:
        """``"I11"``, ``"V5"``, ``"TDD"``..."""
        return quantity_label(self.quantity, self.applies_to, self.order)

    def to_dict(self) -> dict:
        """Plain-JSON form (``order`` only where it applies)."""
        d = {"table": self.table_id, "quantity": self.quantity}
        if self.order is not None:
            d["order"] = int(self.order)
        d.update({
            "applies_to": self.applies_to, "channel": self.channel, "phase": self.phase,
            "statistic": self.statistic, "measured": _json_num(self.measured),
            "limit": _json_num(self.limit), "unit": self.unit,
            "margin_percent": _json_num(self.margin_percent), "verdict": self.verdict,
            "clause": self.clause, "verify": self.verify,
            "table_limit": _json_num(self.table_limit), "multiplier": self.multiplier,
            "basis": self.basis, "tag": self.tag,
            "uncertainty": _json_num(self.uncertainty), "marginal": self.marginal})
        if self.period_start:
            d["period"] = {"start": self.period_start, "end": self.period_end}
        if self.note:
            d["note"] = self.note
        return d


def _json_num(x):
    if x is None or not math.isfinite(x):
        return None
    return float(x)


@dataclass(frozen=True)
class Assessment:
    """The assessment of one analysis against one or more limit tables.

    Attributes
    ----------
    verdict : str
        Overall: ``fail`` > ``inconclusive`` > ``pass``; ``not applicable`` when no check was
        made.
    checks : tuple of Check
    tables : tuple of ResolvedLimits
        The limits used (ids, files, SHA-256, rows chosen).
    notes : tuple of str
        What the reader must know: short-capture evaluation, power or power factor used,
        quantities not assessed, exceptions applied.
    """

    verdict: str
    checks: tuple
    tables: tuple
    notes: tuple = ()
    counts: dict = field(default_factory=dict, compare=False)
    gates: tuple = ()

    @property
    def reasons(self) -> tuple:
        """Why the verdict is not a plain pass or fail: the messages of the scope gates (for
        "not applicable") and of the inconclusive gates, in order."""
        return tuple(g.message for g in self.gates
                     if g.effect in ("not applicable", "inconclusive"))

    @property
    def deviations(self) -> tuple:
        """Departures from the standard's conditions to list next to the verdict."""
        return tuple(g.message for g in self.gates if g.effect == "deviation")

    def to_dict(self) -> dict:
        """Plain-JSON form: ``verdict``, ``checks``, ``tables``, ``notes``, ``counts``,
        ``gates``, ``reasons``, ``deviations``."""
        return {
            "verdict": self.verdict,
            "counts": dict(self.counts),
            "checks": [c.to_dict() for c in self.checks],
            "tables": [_table_dict(t) for t in self.tables],
            "notes": list(self.notes),
            "gates": [g.to_dict() for g in self.gates],
            "reasons": list(self.reasons),
            "deviations": list(self.deviations),
        }


def _table_dict(t: ResolvedLimits) -> dict:
    return {
        "id": t.table_id, "title": t.title, "standard": t.standard, "edition": t.edition,
        "source": t.source, "sha256": t.sha256, "provenance": t.provenance,
        "selectors": {k: v for k, v in t.selectors}, "rows": list(t.rows),
        "measure": t.measure, "max_order": t.max_order,
    }


def thd_top_order(result, max_order: int | None = None) -> int:
    """Highest order a THD or TDD of ``result`` sums: a limit table's highest order, at most
    the highest order the analysis resolved (above it the spectra hold no values); without
    ``max_order``, the analysis's own (as its channel values are summed).

    Parameters
    ----------
    result : AnalysisResult
    max_order : int, optional
        Highest order of the limit table. [unitless]

    Returns
    -------
    int
        The sum runs over orders 2 to this one. [unitless]
    """
    top = int(result.max_resolved_order)
    return top if max_order is None else min(int(max_order), top)


def _window_mags(result, measure: str, channel, mags):
    if mags is None:
        w = result.windows
        mags = np.abs(w.component) if measure == "component" else np.asarray(getattr(w, measure))
    return mags if channel is None else mags[:, channel]


def _masked(result, x, channel):
    valid = np.asarray(result.windows.valid, dtype=bool)
    return np.where(valid if channel is not None else valid[:, None], x, np.nan)


def window_thd_percent(result, *, measure: str = "component", max_order: int | None = None,
                       channel: int | None = None, mags=None):
    """THD of every analysis window: the one per-window THD, which the checks compare, the
    report's THD-over-time figure draws and the per-window exports write.

    ``THD = sqrt(sum_{h=2..H} X_h^2) / X_1 x 100`` (:func:`pqcheck.metrics.thd`) over the
    IEC 61000-4-7 ``measure``, with ``H = thd_top_order(result, max_order)``.

    Parameters
    ----------
    result : AnalysisResult
    measure : str
        ``"component"``, ``"group"`` or ``"subgroup"`` (a limit table's ``measure``).
    max_order : int, optional
        Highest order of the limit table (default: the analysis's highest resolved order).
    channel : int, optional
        One channel's index (default: every channel).
    mags : numpy.ndarray, optional
        The magnitudes of ``measure`` when the caller holds them already, shape (W, C, H + 1).
        [A] or [V]

    Returns
    -------
    numpy.ndarray
        Shape (W, C), or (W,) for one channel; NaN in invalid windows. [%]
    """
    m = _window_mags(result, measure, channel, mags)
    return _masked(result, metrics.thd(m, max_order=thd_top_order(result, max_order)), channel)


def window_tdd_percent(result, il_a: float, *, measure: str = "component",
                       max_order: int | None = None, channel: int | None = None, mags=None):
    """TDD of every analysis window, over the orders of :func:`window_thd_percent`.

    Parameters
    ----------
    result : AnalysisResult
    il_a : float
        Maximum demand load current IL. [A]
    measure, max_order, channel, mags
        As for :func:`window_thd_percent`.

    Returns
    -------
    numpy.ndarray
        Shape (W, C), or (W,) for one channel; NaN in invalid windows. [%]
    """
    m = _window_mags(result, measure, channel, mags)
    return _masked(result, metrics.tdd(m, il_a, max_order=thd_top_order(result, max_order)),
                   channel)


def overall_verdict(checks) -> str:
    """``fail`` if any check fails, else ``inconclusive`` if any is, else ``pass``;
    ``not applicable`` when there is no pass, fail or inconclusive check."""
    verdicts = {c.verdict for c in checks}
    for v in ("fail", "inconclusive", "pass"):
        if v in verdicts:
            return v
    return "not applicable"


# --- entry point ---------------------------------------------------------------------------


def _one_il(il_a, result, tables):
    """The one IL of an assessment [A]: given here, to the analysis (its TDD) or to
    :func:`~pqcheck.limits.resolve` (the ISC/IL row). Where it is given more than once, every
    value must be the same; the first given is used (here, else the analysis', else the row
    selection's).

    Raises
    ------
    InputError
        Two of them differ (a TDD against one IL beside a row chosen with another).
    """
    given = []
    if il_a is not None:
        given.append(("assess", il_a))
    if getattr(result.settings, "il_a", None) is not None:
        given.append(("the analysis", result.settings.il_a))
    for t in tables:
        v = dict(getattr(t, "selectors", ()) or ()).get("il")
        if isinstance(v, (int, float)) and not isinstance(v, bool):
            given.append((f"the row selection of {t.table_id}", v))
    values = [float(v) for _, v in given]
    if values and max(values) - min(values) > 1e-9 * max(abs(x) for x in values):
        raise InputError(
            "IL is given more than once with different values ("
            + ", ".join(f"{where} {v:g} A" for where, v in given)
            + "); TDD and the ISC/IL row must use one IL: give the same value everywhere, "
              "or give it once", field="il_a")
    return given[0][1] if given else None


def assess(result, limits, *, il_a: float | None = None, rated_current_a: float | None = None,
           iref_a: float | None = None, active_power_w: float | None = None,
           declared: gates.Declared | None = None) -> Assessment:
    """Compare an analysis with resolved limit tables.

    Parameters
    ----------
    result : pqcheck.analysis.AnalysisResult
        The analysis of the capture.
    limits : ResolvedLimits or sequence of ResolvedLimits
        From :func:`pqcheck.limits.resolve`.
    il_a : float, optional
        Maximum demand load current IL, for limits in % of IL (IEEE 519); default the IL the
        analysis was run with. [A]
    rated_current_a : float, optional
        Rated current, for limits in % of rated current (IEEE 1547). [A]
    iref_a : float, optional
        Reference current Iref, for limits in % of Iref (IEC 61000-3-12); default
        ``rated_current_a``. [A]
    active_power_w : float, optional
        Active input power for per-watt limits (IEC 61000-3-2 Class D). The standard accepts a
        declared value within 10 % of the measured one; further off, the measured power is
        used and the deviation listed. Default: measured, as the table's evaluation says. [W]
    declared : pqcheck.gates.Declared, optional
        Measurement location, equipment behaviour and cycle, a declared representative period,
        rated power and phases: what the scope and observation gates need.

    Returns
    -------
    Assessment

    Raises
    ------
    InputError
        A limit needs a reference value that was not given (``il_a``, ``rated_current_a``,
        ``iref_a``), or a reference value is not positive.
    """
    tables = (limits,) if isinstance(limits, ResolvedLimits) else tuple(limits)
    il_a = _one_il(il_a, result, tables)
    for name, v in (("il_a", il_a), ("rated_current_a", rated_current_a), ("iref_a", iref_a),
                    ("active_power_w", active_power_w)):
        if v is not None and not (math.isfinite(v) and v > 0):
            raise InputError(f"must be a positive number, got {v!r}", field=name)
    refs = {"il": il_a, "rated": rated_current_a, "iref": iref_a or rated_current_a,
            "power": active_power_w}
    declared = declared or gates.Declared()
    checks, notes, found = [], [], []
    for t in tables:
        if t.measure == "flicker":  # IEC 61000-3-3 / -3-11: pqcheck.flicker assesses them
            c, n, g = _flicker_table(result, t, refs, declared)
        else:
            c, n, g = _TableAssessor(result, t, refs, declared).run_gated()
        checks += c
        notes += n
        found += g
    counts = {v: sum(1 for c in checks if c.verdict == v) for v in VERDICTS}
    return Assessment(verdict=overall_verdict(checks), checks=tuple(checks), tables=tables,
                      notes=tuple(dict.fromkeys(notes)), counts=counts, gates=tuple(found))


def _flicker_table(result, table, refs, declared):
    """Checks of a flicker table (pqcheck.flicker), behind the table's scope gates."""
    from .flicker.assess import flicker_checks

    flicker = getattr(result, "flicker", None)
    if flicker is None:
        raise InputError(f"{table.table_id} limits flicker and voltage changes; the analysis "
                         "has no flicker evaluation (analyse with flicker = true)",
                         field="flicker")
    found = gates.scope_gates(result, table, declared, refs, trust_measured=True)
    out_of_scope = [g for g in found if g.effect == "not applicable"]
    blocking = [g for g in found if g.effect == "inconclusive"]
    notes = [g.message for g in found if g.effect == "deviation"]
    rows = [_gate_row(table, g) for g in out_of_scope + blocking]
    if out_of_scope:
        return rows, notes + [g.message for g in out_of_scope], found
    checks, n = flicker_checks(flicker, table, check_cls=Check)
    if blocking:
        why = "; ".join(g.code for g in blocking)
        checks = [replace(c, verdict="inconclusive", note=f"inconclusive: {why}; {c.note}")
                  if c.verdict == "pass" else c for c in checks]
    return checks + rows, notes + n, found


def _gate_row(table, g) -> Check:
    """A scope gate as a check row of a flicker table."""
    return Check(table_id=table.table_id, quantity=g.code, order=None, applies_to="voltage",
                 phase="", channel=", ".join(g.channels), statistic="gate", measured=g.value,
                 limit=None, unit=g.unit, margin_percent=None, verdict=g.effect,
                 clause="scope", verify=False, note=g.message)


# --- one table -----------------------------------------------------------------------------


@dataclass
class _Series:
    """Window values of one item on one channel, in the item's unit."""

    item: LimitItem
    values: np.ndarray | None  # (W,) or None when not measurable
    problem: str = ""  # why values is None
    orders: frozenset | None = frozenset()  # orders the value depends on (None: all)
    extra_channels: tuple = ()  # other channels it depends on (voltage for P, PF)
    scale: float = 1.0  # limit multiplier from the table (power factor)
    amps: np.ndarray | None = None  # (W,) harmonic current in A, for the negligible rule


class _TableAssessor:
    def __init__(self, result, table: ResolvedLimits, refs: dict,
                 declared: gates.Declared | None = None):
        self.r = result
        self.t = table
        self.refs = refs
        self.declared = declared or gates.Declared()
        self.gates: list = []
        self.ev = table.evaluation
        self.notes: list = []
        w = result.windows
        self.valid = np.asarray(w.valid, dtype=bool)
        self.duration = np.asarray(w.duration_s, dtype=np.float64)
        if table.measure == "component":
            self.mags = np.abs(w.component)
        else:
            self.mags = np.asarray(getattr(w, table.measure))
        self.observed_s = float(np.sum(self.duration[self.valid]))
        self.voltage_channels = tuple(c.name for c in result.channels if c.quantity == "voltage")
        self._power = None
        self._pf = None

    # -- reference values --------------------------------------------------------------------

    def _ref(self, key: str, basis: str) -> float:
        v = self.refs[key]
        if v is None:
            what = {"il": ("% of IL", "`il_a` [A] (maximum demand load current at the PCC)"),
                    "rated": ("% of rated current", "`rated_current_a` [A]"),
                    "iref": ("% of the reference current Iref", "`iref_a` [A] (or `rated_current_a` [A])")}
            unit, option = what[key]
            raise InputError(f"table {self.t.table_id} gives limits in {unit}: give {option}",
                             field=option.split()[0].strip("`"))
        return float(v)

    def power_w(self):
        """Active power for per-watt limits (None when unknown), with a note."""
        if self._power is not None:
            return self._power or None
        w = self.r.windows
        rule = self.ev.power
        if self.refs["power"] is not None:
            declared = float(self.refs["power"])
            measured = self._measured_power(rule)
            if measured is not None and abs(declared - measured) > \
                    DECLARED_POWER_TOLERANCE * measured:
                self.gates.append(gates.Gate(
                    "declared-power", "deviation",
                    f"{self.t.table_id}: the declared active power "
                    f"({numfmt.given(declared, 'W')}) is more than "
                    f"{numfmt.given(100 * DECLARED_POWER_TOLERANCE, '%')} from the measured "
                    f"{numfmt.number(measured, 4, 'W')}, which the standard does not allow; "
                    "per-watt limits use the measured power.", value=declared, unit="W"))
                self._power = measured
                self.notes.append(f"{self.t.table_id}: per-watt limits use the measured active "
                                  f"power, {numfmt.number(measured, 4, 'W')} (the declared "
                                  f"{numfmt.given(declared, 'W')} is "
                                  "outside the 10 % the standard allows).")
                return measured
            self._power = declared
            self.notes.append(f"{self.t.table_id}: per-watt limits use the active power given, "
                              f"{numfmt.given(self._power, 'W')}" + (
                                  f" (measured {numfmt.number(measured, 4, 'W')})."
                                  if measured is not None
                                  else "; it could not be compared with a measured value."))
            if measured is None:
                self.gates.append(gates.Gate(
                    "declared-power-unverified", "deviation",
                    f"{self.t.table_id}: the declared active power "
                    f"({numfmt.given(declared, 'W')}) could "
                    "not be compared with a measured one (no voltage channel).",
                    value=declared, unit="W"))
            return self._power
        if w.p_total_w is None or rule is None:
            self._power = 0.0
            self.notes.append(f"{self.t.table_id}: per-watt limits need the active power: "
                              "capture the voltage with the current, or give `active_power_w` [W].")
            return None
        p = np.where(self.valid, np.asarray(w.p_total_w, dtype=np.float64), np.nan)
        series = self._aggregate(p, rule.of)
        value = float(aggregate.statistic(series, rule.statistic))
        if not (math.isfinite(value) and value > 0):
            self._power = 0.0
            self.notes.append(f"{self.t.table_id}: the measured active power is not positive "
                              f"({value:.4g} W); per-watt limits cannot be applied.")
            return None
        self._power = value
        self.notes.append(f"{self.t.table_id}: per-watt limits use {rule.statistic} of the "
                          f"{_SERIES_TEXT[rule.of]} of active power, {value:.4g} W.")
        return value

    def _measured_power(self, rule):
        """The measured active power as the table's power rule says (None without). [W]"""
        w = self.r.windows
        if w.p_total_w is None or rule is None:
            return None
        p = np.where(self.valid, np.asarray(w.p_total_w, dtype=np.float64), np.nan)
        value = float(aggregate.statistic(self._aggregate(p, rule.of), rule.statistic))
        return value if math.isfinite(value) and value > 0 else None

    def power_factor(self):
        if self._pf is not None:
            return self._pf or None
        p = self.r.power
        if p is None or not math.isfinite(p.pf) or p.pf <= 0:
            self._pf = 0.0
            self.notes.append(f"{self.t.table_id}: limits proportional to the circuit power "
                              "factor need the voltage: capture it with the current.")
            return None
        self._pf = float(p.pf)
        self.notes.append(f"{self.t.table_id}: circuit power factor (lambda) measured "
                          f"{numfmt.value(self._pf, 'power_factor')}.")
        return self._pf

    # -- series ------------------------------------------------------------------------------

    def _aggregate(self, x, of: str):
        if of == "window":
            return x
        if of == "smoothed":
            return aggregate.smooth(x, self.duration, tau_s=self.ev.smoothing_tau_s)
        if of == "3s":
            return aggregate.three_second_values(x)
        return aggregate.ten_minute_values(x)

    def _to_basis(self, x, item: LimitItem, k: int):
        """Convert per-window values in A or V (harmonic magnitude) to the item's basis."""
        b = item.basis
        if b == "amperes":
            return x
        if b == "percent_of_fundamental":
            f1 = self.mags[:, k, 1]
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.where(f1 > 0, 100.0 * x / f1, np.nan)
        if b == "percent_of_il":
            return 100.0 * x / self._ref("il", b)
        if b == "percent_of_rated_current":
            return 100.0 * x / self._ref("rated", b)
        if b == "percent_of_iref":
            return 100.0 * x / self._ref("iref", b)
        if b == "milliamperes_per_watt":
            p = self.power_w()
            return None if p is None else 1000.0 * x / p
        raise AssertionError(b)  # pragma: no cover - validated when the table was read

    def series(self, item: LimitItem, k: int) -> _Series:
        mags = self.mags[:, k, :]
        top = mags.shape[1] - 1
        extra = ()
        if item.basis == "milliamperes_per_watt" or item.times:
            extra = self.voltage_channels
        if item.quantity == HARMONIC:
            h = item.order
            if h > top:
                return _Series(item, None, f"order {h} was not analysed (analysis up to order "
                               f"{top}); rerun with `max_order` {h} or more", frozenset({h}))
            x = np.where(self.valid, mags[:, h], np.nan)
            orders = {h} | ({1} if item.basis == "percent_of_fundamental" else set())
            vals = self._to_basis(x, item, k)
            problem = "" if vals is not None else "the active power is unknown"
            scale = 1.0
            if item.times == "power_factor":
                pf = self.power_factor()
                if pf is None:
                    vals, problem = None, "the circuit power factor is unknown"
                else:
                    scale = pf
            return _Series(item, vals, problem, frozenset(orders), extra, scale, amps=x)
        q = item.quantity
        n_max = min(self.t.max_order, top)
        if q in ("THD", "TDD"):
            # the one per-window THD / TDD (the report's figure draws the same values)
            how = {"measure": self.t.measure, "max_order": self.t.max_order, "channel": k,
                   "mags": self.mags}
            arr = (window_thd_percent(self.r, **how) if q == "THD"
                   else window_tdd_percent(self.r, self._ref("il", item.basis), **how))
            orders = frozenset(range(1 if q == "THD" else 2, self.t.max_order + 1))
        elif q in ("THC", "PWHC"):
            hi = min(40, n_max)
            amps = metrics.thc(mags, max_order=hi) if q == "THC" else metrics.pwhc(mags, hi=hi)
            arr = self._to_basis(amps, item, k)
            orders = frozenset(range(2 if q == "THC" else 14, 41))
        elif q == "PWHD":
            arr = metrics.pwhd(mags, hi=min(40, n_max))
            orders = frozenset({1} | set(range(14, 41)))
        elif q == "TRD":
            w = self.r.windows
            arr = metrics.trd(w.rms[:, k], np.abs(w.component[:, k, 1]),
                              self._ref("rated", item.basis))
            orders = None
        elif q == "DC":
            dc = np.abs(np.asarray(self.r.windows.dc[:, k], dtype=np.float64))
            arr = self._to_basis(dc, item, k)
            orders = frozenset({0})
        else:  # pragma: no cover - validated when the table was read
            raise AssertionError(q)
        arr = np.where(self.valid, np.asarray(arr, dtype=np.float64), np.nan)
        return _Series(item, arr, "", orders, extra)

    # -- findings ----------------------------------------------------------------------------

    def blocking(self, channel: str, s: _Series) -> list:
        out = []
        chans = {channel, *s.extra_channels}
        for f in self.r.findings:
            if f.severity != "error":
                continue
            if f.channels and not chans & set(f.channels):
                continue
            if s.orders is not None and f.orders and not set(f.orders) & set(s.orders):
                continue
            out.append(f)
        return out

    # -- the comparisons ---------------------------------------------------------------------

    def rules_for(self, applies_to: str):
        """The evaluation checks for a quantity, or the short-capture ones when needed."""
        rules = [c for c in self.ev.checks if c.applies_to in ("", applies_to)]
        too_long = [c for c in rules if c.period_s > self.observed_s]
        if not too_long:
            return rules
        short = [c for c in self.ev.short_capture if c.applies_to in ("", applies_to)]
        if short:
            note = self.ev.short_capture_note or (
                f"the capture ({self.observed_s:.4g} s) is shorter than the evaluation period "
                "of the standard; the captured steady state is compared instead")
            self.notes.append(f"{self.t.table_id}: {note}")
            return short
        return rules

    def run(self):
        checks = []
        items = self.t.items
        for applies_to in ("current", "voltage"):
            its = [i for i in items if i.applies_to == applies_to]
            if not its:
                continue
            chans = [k for k, c in enumerate(self.r.channels)
                     if c.quantity == applies_to and c.phase != "n"]
            if not chans:
                self.notes.append(f"{self.t.table_id}: {applies_to} limits not assessed: the "
                                  f"capture has no {applies_to} channel.")
                continue
            rules = self.rules_for(applies_to)
            for k in chans:
                checks += self._channel(k, its, rules)
        neutral = [c.name for c in self.r.channels if c.phase == "n"]
        if neutral:
            self.notes.append(f"{self.t.table_id}: neutral channel(s) {', '.join(neutral)} not "
                              "assessed (the limits concern phase currents).")
        return checks, self.notes

    # -- gates -------------------------------------------------------------------------------

    def run_checks(self):
        """The checks: per period of the survey when the capture lasts at least the shortest
        period of the table's statistics (IEEE 519: a day), so a multi-day capture never gets
        one whole-capture percentile; else as a single observation (:meth:`run`)."""
        from . import survey

        if survey.needs_periods(self.r, self.t):
            sa = survey.assess_result_periods(self.r, self.t, il_a=self.refs["il"])
            return list(sa.assessment.checks), self.notes + list(sa.assessment.notes)
        return self.run()

    def run_gated(self):
        """The checks with the scope, plausibility and observation gates applied.

        Returns
        -------
        (checks, notes, gates)
        """
        self.gates = []
        t, d = self.t, self.declared
        gates.refusals(self.r, t)
        found = gates.measurement_gates(self.r, t, self.refs, d)
        trust = not any(g.void for g in found)
        found += gates.scope_gates(self.r, t, d, self.refs, trust_measured=trust)
        out_of_scope = [g for g in found if g.effect == "not applicable"]
        if out_of_scope:
            found = out_of_scope + [g for g in found if g.effect == "deviation"]
            self.notes += [g.message for g in found]
            return [self._gate_check(g) for g in out_of_scope], self.notes, found
        found += gates.observation_gates(t, self.observed_s, d)
        found += gates.chain_gates(self.r, t, d)
        found += gates.plan_gates(t, d)
        checks, notes = self.run_checks()
        found += self.gates  # raised while assessing (declared power)
        blocking = [g for g in found if g.effect == "inconclusive"]
        out = []
        for c in checks:
            hit = [g for g in blocking if g.concerns(c.channel, c.applies_to, c.quantity, c.order)
                   and (c.verdict == "pass" or (g.void and c.verdict == "fail"))]
            if hit:
                why = "; ".join(f"{g.code}" for g in hit)
                c = replace(c, verdict="inconclusive",
                            note="; ".join(x for x in (f"inconclusive: {why}", c.note) if x))
            out.append(c)
        out += [self._gate_check(g) for g in blocking]
        notes += [g.message for g in found if g.effect == "deviation"]
        return out, notes, found

    def _gate_check(self, g) -> Check:
        """A gate as a check row, so every verdict computed from checks sees it."""
        return Check(table_id=self.t.table_id, quantity=g.code, order=None,
                     applies_to=g.applies_to or "current", phase="",
                     channel=", ".join(g.channels), statistic="gate", measured=g.value,
                     limit=None, unit=g.unit, margin_percent=None, verdict=g.effect,
                     clause="scope" if g.code.startswith("scope") else "plausibility"
                     if not g.code.startswith("observation") else "observation period",
                     verify=False, note=g.message)

    def _channel(self, k: int, items, rules) -> list:
        ch = self.r.channels[k]
        series = [self.series(it, k) for it in items]
        ev = self.ev
        pohc_orders = set(parse_orders(ev.pohc.orders)) if ev.pohc else set()
        neg = ev.negligible if items and items[0].applies_to == "current" else None
        # statistics of every series under every rule
        stats = {}
        agg_cache = {}
        for s_i, s in enumerate(series):
            if s.values is None:
                continue
            for r_i, rule in enumerate(rules):
                key = (s_i, rule.of)
                if key not in agg_cache:
                    agg_cache[key] = self._aggregate(s.values, rule.of)
                stats[(s_i, r_i)] = float(aggregate.statistic(agg_cache[key], rule.statistic))
        # POHC allowance: measured POHC against the POHC of the limits, per rule
        pohc_ok = {}
        if ev.pohc:
            members = [i for i, s in enumerate(series) if s.item.quantity == HARMONIC
                       and s.item.order in pohc_orders and s.values is not None]
            by_basis = {}
            for i in members:
                by_basis.setdefault(series[i].item.basis, []).append(i)
            for basis, idx in by_basis.items():
                x = np.sqrt(np.nansum([series[i].values ** 2 for i in idx], axis=0))
                x = np.where(self.valid, x, np.nan)
                lim = math.sqrt(sum((series[i].item.limit * series[i].scale) ** 2 for i in idx))
                for r_i, rule in enumerate(rules):
                    if rule.statistic == "mean":
                        m = float(aggregate.statistic(self._aggregate(x, rule.of), "mean"))
                        pohc_ok[(basis, r_i)] = (m, lim)
        out = []
        for s_i, s in enumerate(series):
            it = s.item
            block = self.blocking(ch.name, s)
            disregard = ""
            if neg and it.quantity == HARMONIC and s.amps is not None:
                thr = max(neg.percent_of_input / 100.0 * ch.rms, neg.min_a)
                sm = self._aggregate(s.amps, "smoothed" if ev.smoothing_tau_s else "window")
                peak = float(aggregate.statistic(sm, "max"))
                if math.isfinite(peak) and peak < thr:
                    disregard = (f"disregarded: below {neg.percent_of_input:g} % of the input "
                                 f"current or {neg.min_a * 1000:g} mA, whichever is greater "
                                 f"({thr * 1000:.3g} mA; largest value {peak * 1000:.3g} mA)")
            max_results = {}
            for r_i, rule in enumerate(rules):
                limit = it.limit * s.scale * rule.multiplier
                stat_text = _stat_text(rule)
                notes = []
                if rule.multiplier != 1:
                    notes.append(f"{rule.multiplier:g} x {it.limit * s.scale:.4g} {it.unit}")
                if it.times == "power_factor" and s.values is not None:
                    notes.append(f"{numfmt.given(it.limit)} {it.unit} x power factor "
                                 f"{numfmt.value(s.scale, 'power_factor')}")
                verify = it.verify or rule.tag in ("P", "M")
                if s.values is None:
                    out.append(self._check(it, ch, stat_text, None, limit, "inconclusive",
                                           verify, [s.problem] + notes, rule.multiplier))
                    continue
                m = stats[(s_i, r_i)]
                if disregard:
                    verdict = "not applicable"
                    notes.insert(0, disregard)
                elif not math.isfinite(m):
                    verdict = "inconclusive"
                    notes.insert(0, "not measured (no valid window, or the order is above what "
                                    "the sample rate resolves)")
                else:
                    verdict = "pass" if m <= limit else "fail"
                    if verdict == "fail" and rule.statistic == "max":
                        verdict, why = self._exception(s, rule, it.limit * s.scale, stats,
                                                       s_i, rules)
                        if why:
                            notes.append(why)
                    if (verdict == "fail" and rule.statistic == "mean" and ev.pohc
                            and it.quantity == HARMONIC and it.order in pohc_orders):
                        verdict, why = self._pohc(s, rule, r_i, m, it, rules, stats, s_i,
                                                  pohc_ok)
                        if why:
                            notes.append(why)
                if rule.statistic == "max":
                    max_results[r_i] = verdict
                if block and verdict != "not applicable":
                    verdict = "inconclusive"
                    notes.insert(0, "inconclusive: " + "; ".join(
                        f"{f.code} ({f.message})" for f in block))
                out.append(self._check(it, ch, stat_text, m, limit, verdict, verify, notes,
                                       rule.multiplier))
        return out

    def _exception(self, s, rule, base, stats, s_i, rules):
        """The 200 % exception for a failing max rule (IEC 61000-3-2 Class A)."""
        exc = self.ev.exception
        if exc is None or rule.of != "smoothed":
            return "fail", ""
        sm = self._aggregate(s.values, "smoothed")
        peak = float(np.nanmax(sm)) if np.isfinite(sm).any() else math.nan
        if not peak <= exc.multiplier * base:
            return "fail", ""
        above = np.isfinite(sm) & (sm > rule.multiplier * base)
        t_above = float(np.sum(self.duration[above]))
        allowed = min(exc.max_fraction * self.observed_s, exc.max_duration_s)
        mean = float(aggregate.statistic(sm, "mean"))
        if t_above < allowed and mean < exc.mean_below * base:
            return "pass", (f"{exc.multiplier:.0%} exception: above {rule.multiplier:.0%} of the "
                            f"limit for {t_above:.3g} s (allowed < {allowed:.3g} s), mean "
                            f"{mean / base:.1%} of the limit (< {exc.mean_below:.0%})")
        return "fail", (f"{exc.multiplier:.0%} exception not met: above {rule.multiplier:.0%} "
                        f"for {t_above:.3g} s (allowed < {allowed:.3g} s), mean "
                        f"{mean / base:.1%} of the limit (needs < {exc.mean_below:.0%})")

    def _pohc(self, s, rule, r_i, m, it, rules, stats, s_i, pohc_ok):
        """The POHC allowance for a failing mean rule (IEC 61000-3-2, orders 21-39)."""
        p = self.ev.pohc
        base = it.limit * s.scale
        if m > p.multiplier * base:
            return "fail", ""
        max_ok = all(stats.get((s_i, j), math.inf) <= it.limit * s.scale * r.multiplier
                     for j, r in enumerate(rules) if r.statistic == "max")
        measured, allowed = pohc_ok.get((it.basis, r_i), (math.inf, 0.0))
        if max_ok and measured <= allowed:
            return "pass", (f"POHC allowance: mean within {p.multiplier:.0%} of the limit and "
                            f"measured POHC {measured:.4g} <= {allowed:.4g} {it.unit} from the "
                            "limits")
        return "fail", (f"POHC allowance not met (measured POHC {measured:.4g}, from the limits "
                        f"{allowed:.4g} {it.unit}; every smoothed value within 150 %: "
                        f"{'yes' if max_ok else 'no'})")

    def _uncertainty(self, it, ch, measured):
        """Expanded uncertainty of one assessed value (:mod:`pqcheck.uncertainty`)."""
        chains = self.declared.all_chains
        chain = uncertainty.chain_for(chains, ch.name, ch.quantity)
        f0 = self.r.settings.nominal_hz
        if it.quantity == HARMONIC:
            f = it.order * f0
        elif it.quantity == "DC":
            f = 0.0
        else:
            f = min(self.t.max_order, self.r.max_resolved_order) * f0
        ratio = it.basis == "percent_of_fundamental" or it.quantity in ("THD", "PWHD")
        floor = 0.0
        if chain is not None and chain.floor:
            b = it.basis
            ref = {"percent_of_il": self.refs["il"], "percent_of_rated_current":
                   self.refs["rated"], "percent_of_iref": self.refs["iref"] or
                   self.refs["rated"]}.get(b)
            if b == "amperes":
                floor = chain.floor
            elif ref:
                floor = 100.0 * chain.floor / ref
            elif b == "percent_of_fundamental" and ch.fundamental_rms > 0:
                floor = 100.0 * chain.floor / ch.fundamental_rms
            elif b == "milliamperes_per_watt" and self._power:
                floor = 1000.0 * chain.floor / self._power
        other = None
        if it.basis == "milliamperes_per_watt" and self.voltage_channels:
            other = uncertainty.chain_for(chains, self.voltage_channels[0], "voltage")
        return uncertainty.expanded_uncertainty(measured, chain=chain, ratio=ratio, f_hz=f,
                                                floor_in_unit=floor, other=other)

    def _decide(self, verdict, measured, limit, u, notes):
        """The decision rule: guarded acceptance (default) or simple acceptance."""
        if u is None or verdict not in ("pass", "fail") or not limit:
            return verdict, False
        if (verdict == "pass") != (measured <= limit):
            return verdict, False  # decided by an exception or allowance with its own bounds
        if verdict == "pass" and measured + u > limit:
            if self.declared.decision_rule == "guarded":
                notes.insert(0, f"inconclusive: marginal, the margin {limit - measured:.3g} is "
                                f"smaller than the expanded uncertainty {u:.3g} (guarded "
                                "acceptance, ILAC-G8 4.2.3, guard band = U)")
                return "inconclusive", True
            notes.insert(0, f"pass (marginal): the margin {limit - measured:.3g} is smaller "
                            f"than the expanded uncertainty {u:.3g} (simple acceptance)")
            return "pass", True
        if verdict == "fail" and measured - u <= limit:
            notes.insert(0, f"fail (marginal): the excess {measured - limit:.3g} is within "
                            f"the expanded uncertainty {u:.3g}")
            return "fail", True
        return verdict, False

    def _check(self, it, ch, stat_text, measured, limit, verdict, verify, notes, multiplier):
        margin = None
        u = None
        marginal = False
        if measured is not None and math.isfinite(measured) and limit and limit > 0:
            margin = (limit - measured) / limit * 100.0
            u = self._uncertainty(it, ch, measured)
            notes = list(notes)
            verdict, marginal = self._decide(verdict, measured, limit, u, notes)
        note = "; ".join(n for n in [*notes, it.note] if n)
        return Check(
            table_id=self.t.table_id, quantity=it.quantity, order=it.order,
            applies_to=it.applies_to, phase=ch.phase, channel=ch.name, statistic=stat_text,
            measured=None if measured is None or not math.isfinite(measured) else measured,
            limit=limit, unit=it.unit, margin_percent=margin, verdict=verdict,
            clause=it.clause, verify=bool(verify), note=note,
            table_limit=it.limit, multiplier=multiplier, basis=it.basis, tag=it.tag,
            uncertainty=u, marginal=marginal)


def _stat_text(rule) -> str:
    stat = rule.statistic
    if stat.startswith("p"):
        stat = f"{stat[1:]}th percentile"
    elif stat == "rms":
        stat = "RMS"
    text = f"{stat} of {_SERIES_TEXT[rule.of]}"
    if rule.statistic == "rms" and rule.of == "window":
        text += " over the capture"
    return text
