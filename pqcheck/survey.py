"""Site surveys: interval values over days, and statistics of them period by period.

A survey is a series of aggregated values (IEC 61000-4-30 aggregation intervals: 150/180-cycle
"3 s" values, 10 min values, 2 h values) over hours to weeks, from a recorder's interval log
(:mod:`pqcheck.readers.intervals`) or aggregated from waveform recordings
(:func:`pqcheck.aggregate.class_a_intervals`). This module holds the data model
(:class:`IntervalSeries`, :class:`Survey`), derives longer aggregation levels from shorter ones,
cuts the survey into the periods a standard's statistic is defined over and assesses limit
tables period by period (:func:`assess_survey`).

How periods are cut
    The survey's origin is the clock tick of 10 min at or before its first interval (the start
    of the first clock-aligned 10 min interval). Periods of the statistic's length (24 h, 7 d)
    follow one another from the origin. When the survey does not end on a period boundary, one
    more period is taken that ends at the survey's end (the end of its last interval), so it
    overlaps the one before and every interval lies in at least one whole period. A survey
    shorter than the period has no period: the statistic is *not assessed* and the check is
    inconclusive.

Which values a statistic uses
    Values flagged (a dip, swell or interruption during the interval, IEC 61000-4-30) and
    values of incomplete intervals (touched by a gap in the recording) are left out and
    counted. A period whose usable values are fewer than :data:`MIN_COVERAGE` of the intervals
    it should hold is *incomplete*: its statistic is computed and a value above the limit fails,
    but it cannot support a pass (the check is inconclusive unless another period fails).

Percentiles
    :func:`pqcheck.aggregate.percentile`: linear interpolation between order statistics
    (Hyndman and Fan definition 7, numpy's default).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from datetime import datetime, timedelta, timezone

import numpy as np

from . import aggregate, metrics
from .errors import InputError
from .findings import Finding
from .limits import HARMONIC, ResolvedLimits

__all__ = [
    "SurveyChannel",
    "IntervalSeries",
    "Survey",
    "LEVELS",
    "level_name",
    "derive_level",
    "Period",
    "cut_periods",
    "SurveyAssessment",
    "assess_survey",
    "MIN_COVERAGE",
    "format_time",
    "is_survey_evaluation",
]

#: Aggregation levels by name and length [s]: IEC 61000-4-30 150/180-cycle (about 3 s),
#: 10 min and 2 h values.
LEVELS = {"3s": 3.0, "10min": 600.0, "2h": 7200.0}
#: A period needs usable values for at least this fraction of its intervals to support a pass
#: (pqcheck's choice, common practice for survey availability; edit with ``min_coverage``).
MIN_COVERAGE = 0.9
_TICK_S = 600.0


def level_name(interval_s: float) -> str:
    """``"3s"``, ``"10min"`` or ``"2h"`` for intervals of about those lengths, else ``"<n>s"``.

    150 cycles at 50 Hz and 180 cycles at 60 Hz are 3 s at nominal frequency; a logged
    interval between 2.5 s and 3.5 s is taken as that level.
    """
    if 2.5 <= interval_s <= 3.5:
        return "3s"
    for name, length in LEVELS.items():
        if abs(interval_s - length) <= 1e-3 * length:
            return name
    return f"{interval_s:g}s"


@dataclass(frozen=True)
class SurveyChannel:
    """One measured quantity of a survey.

    Attributes
    ----------
    name : str
        ``I_a``, ``V_b``, ... (``I``/``V`` for a single-phase log).
    quantity : str
        ``current`` or ``voltage``.
    phase : str
        ``a``, ``b``, ``c``, ``n`` or "" (single-phase).
    unit : str
        ``A`` or ``V``; ``%`` when the log gives harmonics only in percent of the fundamental
        (the fundamental is then 100).
    """

    name: str
    quantity: str
    phase: str
    unit: str


@dataclass(frozen=True, eq=False)
class IntervalSeries:
    """Values of one aggregation level (N intervals, C channels, orders 0..H).

    Attributes
    ----------
    level : str
        ``3s``, ``10min``, ``2h`` (or ``<n>s`` for another interval).
    interval_s : float
        Length of an interval. [s]
    start_s : numpy.ndarray, shape (N,)
        Start of each interval, POSIX time (seconds since 1970-01-01 UTC; wall-clock time taken
        as UTC when the log gives no offset or time zone). [s]
    channels : tuple of SurveyChannel
    harmonics : numpy.ndarray, shape (N, C, H + 1)
        RMS value of each harmonic order (order 1 the fundamental; NaN where not given). [A]/[V]
    thd_percent, tdd_percent : numpy.ndarray, shape (N, C)
        THD and TDD as logged (NaN where not given). [%]
    power_w : numpy.ndarray, shape (N, C)
        Active power of the channel's phase (kept on the current channel; NaN where not
        given). [W]
    flagged : numpy.ndarray of bool, shape (N,)
        IEC 61000-4-30 flag: a dip, swell or interruption during the interval.
    complete : numpy.ndarray of bool, shape (N,)
        False where a gap in the recording touches the interval.
    """

    level: str
    interval_s: float
    start_s: np.ndarray
    channels: tuple
    harmonics: np.ndarray
    thd_percent: np.ndarray
    tdd_percent: np.ndarray
    power_w: np.ndarray
    flagged: np.ndarray
    complete: np.ndarray

    @property
    def n(self) -> int:
        return int(self.start_s.size)

    @property
    def max_order(self) -> int:
        return int(self.harmonics.shape[2] - 1)

    def usable(self) -> np.ndarray:
        """Intervals whose values enter statistics: complete and not flagged. (N,) bool"""
        return np.asarray(self.complete, bool) & ~np.asarray(self.flagged, bool)

    def channel_index(self, quantity: str, phase: str) -> int | None:
        for k, c in enumerate(self.channels):
            if c.quantity == quantity and c.phase == phase:
                return k
        return None


@dataclass(frozen=True, eq=False)
class Survey:
    """A survey: one or more aggregation levels over the same time span.

    Attributes
    ----------
    levels : tuple of IntervalSeries
        Shortest interval first.
    sources : tuple of str
        Files read.
    sha256 : tuple of str
        SHA-256 of each file.
    findings : tuple of Finding
        Gaps, overlaps, irregular intervals, flagged intervals...
    timezone : str
        Time zone of the timestamps: ``UTC``, ``+02:00`` (from the log's offsets), an IANA
        name given by the user, or "" (wall-clock time as written, no zone known).
    origin : str
        ``interval log`` or ``waveform recording``.
    mapping : tuple of (str, str)
        How each column of a log was read: (column, meaning).
    settings : dict
        Reader / aggregation settings, for the record.
    """

    levels: tuple
    sources: tuple
    sha256: tuple
    findings: tuple = ()
    timezone: str = ""
    origin: str = "interval log"
    mapping: tuple = ()
    settings: dict = field(default_factory=dict, compare=False)

    def level(self, name: str) -> IntervalSeries | None:
        for s in self.levels:
            if s.level == name:
                return s
        return None

    @property
    def start_s(self) -> float:
        """Start of the first interval of the data (POSIX). [s]"""
        if "span_s" in self.settings:
            return float(self.settings["span_s"][0])
        return float(min(s.start_s[0] for s in self.levels if s.n))

    @property
    def end_s(self) -> float:
        """End of the last interval of the data (POSIX). [s]"""
        if "span_s" in self.settings:
            return float(self.settings["span_s"][1])
        return float(max(s.start_s[-1] + s.interval_s for s in self.levels if s.n))

    @property
    def duration_s(self) -> float:
        return self.end_s - self.start_s if any(s.n for s in self.levels) else 0.0

    @property
    def channels(self) -> tuple:
        seen = {}
        for s in self.levels:
            for c in s.channels:
                seen.setdefault((c.quantity, c.phase), c)
        return tuple(seen.values())


def format_time(t_s: float, tz: str = "") -> str:
    """ISO 8601 text of a POSIX time in the survey's time zone (no offset when unknown)."""
    if tz in ("", None):
        return datetime.fromtimestamp(t_s, timezone.utc).replace(tzinfo=None).isoformat(
            timespec="seconds")
    zone = _zone(tz)
    return datetime.fromtimestamp(t_s, zone).isoformat(timespec="seconds")


def _zone(tz: str):
    if tz == "UTC":
        return timezone.utc
    if tz[:1] in "+-" and len(tz) == 6:
        sign = 1 if tz[0] == "+" else -1
        return timezone(sign * timedelta(hours=int(tz[1:3]), minutes=int(tz[4:6])))
    from zoneinfo import ZoneInfo

    return ZoneInfo(tz)


# --- deriving a longer level --------------------------------------------------------------


def derive_level(series: IntervalSeries, level: str) -> IntervalSeries:
    """Aggregate a level into a longer clock-aligned one (IEC 61000-4-30).

    Each output interval starts on a clock tick of its length (10 min: hh:00, hh:10, ...; 2 h:
    00:00, 02:00, ... of the time base) and holds the input intervals that start in it. Its
    harmonic, THD and TDD values are the RMS of theirs, its power the mean. It is flagged when
    any member is flagged, and complete when every member is complete and the members cover
    the interval (at least 99 % of it, which allows for the shorter last 150/180-cycle value
    before a 10 min tick).

    Parameters
    ----------
    series : IntervalSeries
        Shorter level (e.g. 3 s values).
    level : str
        ``10min`` or ``2h``.

    Returns
    -------
    IntervalSeries
    """
    if level not in LEVELS:
        raise InputError(f"unknown aggregation level {level!r}; use one of {sorted(LEVELS)}",
                         field="interval")
    length = LEVELS[level]
    if length <= series.interval_s:
        raise InputError(f"cannot aggregate {series.level} values into {level} values",
                         field="interval")
    labels = np.floor(series.start_s / length + 1e-9).astype(np.int64)
    keys, inverse, counts = np.unique(labels, return_inverse=True, return_counts=True)
    harm = aggregate.rms_by_label(series.harmonics, inverse, keys.size)
    thd = aggregate.rms_by_label(series.thd_percent, inverse, keys.size)
    tdd = aggregate.rms_by_label(series.tdd_percent, inverse, keys.size)
    pw = aggregate.mean_by_label(series.power_w, inverse, keys.size)
    flagged = np.zeros(keys.size, bool)
    np.logical_or.at(flagged, inverse, np.asarray(series.flagged, bool))
    all_complete = np.ones(keys.size, bool)
    np.logical_and.at(all_complete, inverse, np.asarray(series.complete, bool))
    covered = counts * series.interval_s >= 0.99 * length
    return IntervalSeries(level=level, interval_s=length, start_s=keys * length,
                          channels=series.channels, harmonics=harm, thd_percent=thd,
                          tdd_percent=tdd, power_w=pw, flagged=flagged,
                          complete=all_complete & covered)


def with_derived_levels(survey: Survey, wanted=("10min",)) -> Survey:
    """The survey with 10 min values derived from 3 s values when it has none (and 2 h from
    10 min when ``wanted`` says so), as IEC 61000-4-30 aggregates them. The survey's span
    stays that of the data it was given."""
    levels = list(survey.levels)
    names = {s.level for s in levels}
    notes = []
    if not any(s.n for s in levels):
        return survey
    span = (survey.start_s, survey.end_s)
    for want, source in (("10min", "3s"), ("2h", "10min")):
        if want not in wanted:
            continue
        if want not in names:
            src = next((s for s in levels if s.level == source), None)
            if src is not None and src.n:
                levels.append(derive_level(src, want))
                names.add(want)
                notes.append(f"{want} values aggregated from the {source} values")
    if not notes:
        return survey
    levels.sort(key=lambda s: s.interval_s)
    settings = dict(survey.settings)
    settings["derived"] = notes
    settings["span_s"] = span
    return replace(survey, levels=tuple(levels), settings=settings)


# --- periods ------------------------------------------------------------------------------


@dataclass(frozen=True)
class Period:
    """One period of a statistic (e.g. one 24 h period).

    Attributes
    ----------
    start_s, end_s : float
        POSIX time of the period's start and end (end excluded). [s]
    expected : int
        Intervals the period should hold.
    present : int
        Intervals present in the data.
    usable : int
        Intervals whose values enter the statistic.
    flagged : int
        Flagged intervals left out.
    incomplete : int
        Intervals touched by a gap, left out.
    """

    start_s: float
    end_s: float
    expected: int
    present: int
    usable: int
    flagged: int
    incomplete: int

    @property
    def coverage(self) -> float:
        """Usable intervals over expected ones. [unitless]"""
        return self.usable / self.expected if self.expected else 0.0

    def to_dict(self, tz: str = "") -> dict:
        return {"start": format_time(self.start_s, tz), "end": format_time(self.end_s, tz),
                "expected": self.expected, "present": self.present, "usable": self.usable,
                "flagged": self.flagged, "incomplete": self.incomplete,
                "missing": max(self.expected - self.present, 0),
                "coverage": round(self.coverage, 6)}


def survey_origin(start_s: float) -> float:
    """The 10 min clock tick at or before ``start_s``. [s]"""
    return math.floor(start_s / _TICK_S + 1e-9) * _TICK_S


def cut_periods(start_s: float, end_s: float, period_s: float) -> list:
    """Bounds ``(start, end)`` of the periods of ``period_s`` in a survey (see the module
    docstring): consecutive from the first 10 min tick, plus one period ending at the survey's
    end when it does not end on a boundary; empty when the survey is shorter than a period.

    Examples
    --------
    A survey from 10:03:17 on day 0 to 12:00 on day 2 has two 24 h periods from 10:00, and a
    third one ending at 12:00 on day 2 (the end of the last interval):

    >>> d = 86400.0
    >>> [(a / 3600, b / 3600) for a, b in cut_periods(10 * 3600 + 197, 2 * d + 12 * 3600, d)]
    [(10.0, 34.0), (34.0, 58.0), (36.0, 60.0)]
    """
    origin = survey_origin(start_s)
    end = end_s
    out = []
    a = origin
    while a + period_s <= end + 1e-6:
        out.append((a, a + period_s))
        a += period_s
    if out and out[-1][1] < end - 1e-6:
        out.append((end - period_s, end))
    return out


def period_stats(series: IntervalSeries, bounds) -> list:
    """:class:`Period` records (counts of intervals) for the given bounds."""
    out = []
    t = series.start_s
    use = series.usable()
    for a, b in bounds:
        m = (t >= a - 1e-6) & (t < b - 1e-6)
        out.append(Period(start_s=a, end_s=b,
                          expected=int(round((b - a) / series.interval_s)),
                          present=int(m.sum()), usable=int((m & use).sum()),
                          flagged=int((m & series.flagged).sum()),
                          incomplete=int((m & ~series.complete & ~series.flagged).sum())))
    return out


def daily_availability(series: IntervalSeries, start_s: float, end_s: float) -> list:
    """Availability per 24 h period from the survey's origin (the last one may be shorter)."""
    origin = survey_origin(start_s)
    bounds = []
    a = origin
    while a < end_s - 1e-6:
        bounds.append((a, min(a + 86400.0, math.ceil(end_s / _TICK_S - 1e-9) * _TICK_S)))
        a += 86400.0
    return period_stats(series, bounds)


def is_survey_evaluation(table: ResolvedLimits) -> bool:
    """True when the table's evaluation has statistics over periods (IEEE 519)."""
    return any(c.period_s > 0 and c.of in LEVELS for c in table.evaluation.checks)


# --- assessment ---------------------------------------------------------------------------


@dataclass(frozen=True)
class PeriodValue:
    """The statistic of one limit item on one channel in one period.

    Attributes
    ----------
    check : int
        Index of the :class:`~pqcheck.assess.Check` in the assessment.
    period : int
        Index of the period in its rule's periods.
    value : float or None
        The statistic. [unit of the check]
    verdict : str
        ``pass``, ``fail`` or ``inconclusive`` (incomplete period, no value).
    """

    check: int
    period: int
    value: float | None
    verdict: str


@dataclass(frozen=True, eq=False)
class SurveyAssessment:
    """An assessment of a survey, with the statistics of every period.

    Attributes
    ----------
    assessment : pqcheck.assess.Assessment
        One check per limit item, channel and statistic; its measured value is that of the
        worst period, which the check names (``period_start``, ``period_end``).
    survey : Survey
    rules : tuple of dict
        Per statistic of the tables: ``table``, ``rule`` (text), ``level``, ``period_s``,
        ``periods`` (tuple of Period), ``assessed`` (bool) and ``reason`` when not assessed.
    values : tuple of PeriodValue
        The statistic of every check in every period of its rule.
    availability : tuple of Period
        Data availability per 24 h from the survey's origin, per level.
    flagged : tuple of (str, float)
        (level, start) of every flagged interval.
    """

    assessment: object
    survey: Survey
    rules: tuple
    values: tuple
    availability: tuple
    flagged: tuple
    sources: tuple = ()  # per check: (table, item, channel, rule), to get its series again
    il_a: float | None = None

    @property
    def verdict(self) -> str:
        return self.assessment.verdict

    def series_of(self, index: int):
        """The interval values check ``index`` was computed from, by the same code.

        Returns
        -------
        (level, start_s, values, usable) or None
            ``level`` (IntervalSeries), interval starts (POSIX) [s], values in the check's
            unit, and which values entered the statistic (complete, not flagged).
        """
        if not 0 <= index < len(self.sources) or self.sources[index] is None:
            return None
        table, it, ch, rule = self.sources[index]
        series = self.survey.level(rule.of)
        if series is None:
            return None
        x, _ = _SurveyTable(self.survey, table, self.il_a, MIN_COVERAGE, [], [], [],
                            [])._series(it, ch, series)
        if x is None:
            return None
        return series, series.start_s, np.asarray(x, np.float64), series.usable()

    def to_dict(self) -> dict:
        """The survey section of the results (JSON)."""
        tz = self.survey.timezone
        sv = self.survey
        rules = []
        overall = None
        for r in self.rules:
            d = {k: v for k, v in r.items() if k not in ("periods", "check_ids")}
            d["periods"] = [p.to_dict(tz) for p in r["periods"]]
            w = self.worst(r)
            if w is not None:
                d["worst"] = w
                if overall is None or w["margin_percent"] < overall["margin_percent"]:
                    overall = dict(w, statistic=r["statistic"], table=r["table"])
            rules.append(d)
        vals = {}
        for v in self.values:
            vals.setdefault(v.check, []).append(
                {"period": v.period, "value": None if v.value is None else float(v.value),
                 "verdict": v.verdict})
        return {
            "origin": sv.origin,
            "sources": list(sv.sources),
            "sha256": list(sv.sha256),
            "timezone": tz or "not given (timestamps as written)",
            "start": format_time(sv.start_s, tz),
            "end": format_time(sv.end_s, tz),
            "duration_s": sv.duration_s,
            "levels": [{"level": s.level, "interval_s": s.interval_s, "intervals": s.n,
                        "flagged": int(np.sum(s.flagged)),
                        "incomplete": int(np.sum(~s.complete))} for s in sv.levels],
            "period_rule": ("consecutive periods from the 10 min clock tick at or before the "
                            "first interval; when the survey does not end on a period "
                            "boundary, one more period ends at the survey's end"),
            "min_coverage": MIN_COVERAGE,
            "percentile": "linear interpolation between order statistics (Hyndman-Fan 7, "
                          "numpy default)",
            "statistics": rules,
            "period_values": [{"check": k, "values": v} for k, v in sorted(vals.items())],
            "availability": [{"level": lvl, **p.to_dict(tz)} for lvl, p in self.availability],
            "flagged_intervals": [{"level": lvl, "start": format_time(t, tz)}
                                  for lvl, t in self.flagged],
            "mapping": [{"column": c, "read_as": m} for c, m in sv.mapping],
            "worst_period": overall,
        }

    def worst(self, rule: dict) -> dict | None:
        """The check of a rule with the smallest margin, with the period that gives it."""
        best = None
        for i in rule.get("check_ids", ()):
            c = self.assessment.checks[i]
            if c.margin_percent is None or not c.period_start:
                continue
            if best is None or c.margin_percent < best.margin_percent:
                best = c
        if best is None:
            return None
        return {"label": best.label, "channel": best.channel, "phase": best.phase,
                "value": best.measured, "limit": best.limit, "unit": best.unit,
                "margin_percent": best.margin_percent, "verdict": best.verdict,
                "start": best.period_start, "end": best.period_end}


def assess_survey(survey: Survey, limits, *, il_a: float | None = None,
                  min_coverage: float = MIN_COVERAGE) -> SurveyAssessment:
    """Assess a survey against limit tables, statistic by statistic and period by period.

    For each statistic of a table's evaluation (IEEE 519: daily 99th percentile of 3 s values,
    weekly 95th / 99th percentile of 10 min values), each limit item and each phase channel,
    the statistic is computed over every period of the survey (:func:`cut_periods`); the
    period with the highest value decides and is named in the check.

    Parameters
    ----------
    survey : Survey
    limits : ResolvedLimits or sequence of ResolvedLimits
    il_a : float, optional
        Maximum demand load current, for limits in % of IL. [A]
    min_coverage : float
        Fraction of a period's intervals that must be usable for it to support a pass.
        [unitless]

    Returns
    -------
    SurveyAssessment

    Raises
    ------
    InputError
        A table gives limits in % of IL and ``il_a`` is missing or not positive; a table's
        evaluation has no statistic over periods.
    """
    from .assess import VERDICTS, Assessment, overall_verdict

    tables = (limits,) if isinstance(limits, ResolvedLimits) else tuple(limits)
    if il_a is not None and not (math.isfinite(il_a) and il_a > 0):
        raise InputError(f"must be a positive number, got {il_a!r}", field="il_a")
    if not 0 < min_coverage <= 1:
        raise InputError(f"must be in (0, 1], got {min_coverage!r}", field="min_coverage")
    survey = with_derived_levels(survey)
    checks, notes, rules, values, sources = [], [], [], [], []
    for t in tables:
        if not is_survey_evaluation(t):
            raise InputError(
                f"table {t.table_id} has no statistic over periods of 3 s / 10 min values "
                "(its evaluation needs waveform windows); a survey or interval log can be "
                "checked only against such a table (IEEE 519)", field="limits")
        st = _SurveyTable(survey, t, il_a, min_coverage, checks, notes, rules, values)
        st.sources = sources
        st.run()
    counts = {v: sum(1 for c in checks if c.verdict == v) for v in VERDICTS}
    a = Assessment(verdict=overall_verdict(checks), checks=tuple(checks), tables=tables,
                   notes=tuple(dict.fromkeys(notes)), counts=counts)
    avail = []
    for s in survey.levels:
        for p in daily_availability(s, survey.start_s, survey.end_s):
            avail.append((s.level, p))
    flagged = [(s.level, float(t)) for s in survey.levels for t in s.start_s[s.flagged]]
    return SurveyAssessment(assessment=a, survey=survey, rules=tuple(rules),
                            values=tuple(values), availability=tuple(avail),
                            flagged=tuple(flagged), sources=tuple(sources), il_a=il_a)


class _SurveyTable:
    def __init__(self, survey, table, il_a, min_coverage, checks, notes, rules, values):
        self.s = survey
        self.t = table
        self.il = il_a
        self.min_cov = min_coverage
        self.checks = checks
        self.notes = notes
        self.rules = rules
        self.values = values
        self.sources = []

    def run(self):
        from .assess import _stat_text  # the one wording of statistics

        tz = self.s.timezone
        dur_h = self.s.duration_s / 3600.0
        for applies_to in ("current", "voltage"):
            items = [i for i in self.t.items if i.applies_to == applies_to]
            if not items:
                continue
            phases = [c for c in self.s.channels if c.quantity == applies_to and c.phase != "n"]
            if not phases:
                self.notes.append(f"{self.t.table_id}: {applies_to} limits not assessed: the "
                                  f"survey has no {applies_to} values.")
                continue
            for rule in (c for c in self.t.evaluation.checks
                         if c.applies_to in ("", applies_to)):
                series = self.s.level(rule.of)
                text = _stat_text(rule)
                period_words = _period_words(rule.period_s)
                reason = ""
                bounds = []
                if series is None or not series.n:
                    have = ", ".join(f"{x.level} values" for x in self.s.levels) or "no values"
                    reason = (f"not assessed: the {period_words} {text} needs {rule.of} values "
                              f"and the survey holds {have}")
                else:
                    bounds = cut_periods(self.s.start_s, self.s.end_s, rule.period_s)
                    if not bounds:
                        reason = (f"not assessed: the survey ({dur_h:.4g} h) is shorter than "
                                  f"the {period_words} period of the {text}")
                periods = tuple(period_stats(series, bounds)) if bounds else ()
                entry = {"table": self.t.table_id, "applies_to": applies_to,
                         "statistic": f"{period_words} {text}", "level": rule.of,
                         "period_s": rule.period_s, "multiplier": rule.multiplier,
                         "assessed": not reason, "periods": periods}
                if reason:
                    entry["reason"] = reason
                    self.notes.append(f"{self.t.table_id}: {applies_to} {period_words} "
                                      f"{text} NOT ASSESSED (inconclusive): "
                                      f"{reason[len('not assessed: '):]}.")
                entry["check_ids"] = []
                self.rules.append(entry)
                for ch in phases:
                    for it in items:
                        self._check(it, ch, rule, series, periods, reason,
                                    f"{period_words} {text}", tz)

    def _series(self, it, ch, series: IntervalSeries):
        """Values of item ``it`` on channel ``ch`` per interval, in the item's unit, or
        (None, why)."""
        k = series.channel_index(ch.quantity, ch.phase)
        if k is None:
            return None, f"the {series.level} values hold no {ch.name} channel"
        mags = series.harmonics[:, k, :]
        unit = series.channels[k].unit
        top = mags.shape[1] - 1
        b = it.basis
        if it.quantity == HARMONIC:
            h = it.order
            if h > top or not np.isfinite(mags[:, h]).any():
                return None, f"the log has no values of order {h} for {ch.name}"
            x = mags[:, h]
        elif it.quantity in ("THD", "TDD"):
            return self._total(it, ch, series, k, mags, unit, top)
        else:
            return None, f"{it.quantity} is not assessed from interval values"
        if b == "percent_of_fundamental":
            f1 = mags[:, 1]
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.where(f1 > 0, 100.0 * x / f1, np.nan), ""
        if unit == "%":
            return None, (f"{ch.name} harmonics are logged in % of the fundamental without "
                          f"the fundamental, so they cannot be put in {b.replace('_', ' ')}")
        if b == "percent_of_il":
            return 100.0 * x / self._il(), ""
        if b == "amperes":
            return x, ""
        return None, f"limits in {b.replace('_', ' ')} are not assessed from interval values"

    def _total(self, it, ch, series, k, mags, unit, top):
        """THD or TDD per interval: from the harmonic values when the log has every order of
        the sum (2 .. the table's highest), else as logged (TDD also from THD x I1 / IL)."""
        n_top = self.t.max_order
        full = top >= n_top and all(np.isfinite(mags[:, h]).any() for h in range(1, n_top + 1))
        if it.quantity == "THD":
            x = series.thd_percent[:, k]
            if np.isfinite(x).any():
                return x, ""
            if full:
                return metrics.thd(mags, max_order=n_top), ""
            return None, (f"the log has no THD column for {ch.name} and not every order 2 to "
                          f"{n_top} to compute it")
        il = self._il()
        if full and unit != "%":
            return metrics.tdd(mags, il, max_order=n_top), ""
        thd = series.thd_percent[:, k]
        if np.isfinite(thd).any() and unit != "%" and np.isfinite(mags[:, 1]).any():
            return thd * mags[:, 1] / il, ""
        x = series.tdd_percent[:, k]
        if np.isfinite(x).any():
            self.notes.append(f"{self.t.table_id}: TDD of {ch.name} taken as logged (the "
                              "recorder's own IL); the log has no THD and fundamental to refer "
                              f"it to the IL given ({il:g} A).")
            return x, ""
        return None, (f"the log has no TDD column for {ch.name}, no THD with the fundamental, "
                      f"and not every order 2 to {n_top} to compute it")

    def _il(self) -> float:
        if self.il is None:
            raise InputError(f"table {self.t.table_id} gives limits in % of IL: give il_a "
                             "(maximum demand load current at the PCC) [A]", field="il_a")
        return float(self.il)

    def _check(self, it, ch, rule, series, periods, reason, stat_text, tz):
        from .assess import Check

        limit = it.limit * rule.multiplier
        verify = it.verify or rule.tag in ("P", "M")
        note_mult = f"{rule.multiplier:g} x {it.limit:.4g} {it.unit}" if rule.multiplier != 1 \
            else ""
        base = dict(table_id=self.t.table_id, quantity=it.quantity, order=it.order,
                    applies_to=it.applies_to, phase=ch.phase, channel=ch.name,
                    statistic=stat_text, limit=limit, unit=it.unit, clause=it.clause,
                    verify=bool(verify), table_limit=it.limit, multiplier=rule.multiplier,
                    basis=it.basis, tag=it.tag)
        idx = len(self.checks)
        self.rules[-1]["check_ids"].append(idx)
        self.sources.append((self.t, it, ch, rule))
        if reason:
            self.checks.append(Check(measured=None, margin_percent=None, verdict="inconclusive",
                                     note="; ".join(n for n in (reason, note_mult, it.note)
                                                    if n), **base))
            return
        x, why = self._series(it, ch, series)
        if x is None:
            self.checks.append(Check(measured=None, margin_percent=None, verdict="inconclusive",
                                     note="; ".join(n for n in ("not measured: " + why,
                                                                note_mult) if n), **base))
            return
        x = np.where(series.usable(), np.asarray(x, np.float64), np.nan)
        t = series.start_s
        results = []
        for p_i, p in enumerate(periods):
            m = (t >= p.start_s - 1e-6) & (t < p.end_s - 1e-6)
            v = float(aggregate.statistic(x[m], rule.statistic)) if m.any() else math.nan
            if not math.isfinite(v):
                verdict = "inconclusive"
            elif v > limit:
                verdict = "fail"
            elif p.coverage < self.min_cov:
                verdict = "inconclusive"
            else:
                verdict = "pass"
            results.append((p_i, v, verdict))
            self.values.append(PeriodValue(check=idx, period=p_i,
                                           value=v if math.isfinite(v) else None,
                                           verdict=verdict))
        finite = [r for r in results if math.isfinite(r[1])]
        notes = []
        if not finite:
            self.checks.append(Check(measured=None, margin_percent=None, verdict="inconclusive",
                                     note="no usable value in any period", **base))
            return
        worst = max(finite, key=lambda r: r[1])
        verdicts = {r[2] for r in results}
        if "fail" in verdicts:
            verdict = "fail"
            n_fail = sum(1 for r in results if r[2] == "fail")
            notes.append(f"{n_fail} of {len(results)} periods above the limit")
        elif "inconclusive" in verdicts:
            verdict = "inconclusive"
            low = [periods[r[0]] for r in results if r[2] == "inconclusive"]
            notes.append(f"inconclusive: {len(low)} of {len(results)} periods hold usable "
                         f"values for less than {self.min_cov:.0%} of their intervals "
                         f"(lowest {min(p.coverage for p in low):.1%})")
        else:
            verdict = "pass"
        p = periods[worst[0]]
        notes.append(f"worst period {format_time(p.start_s, tz)} to {format_time(p.end_s, tz)}"
                     f" ({p.usable} values)")
        if note_mult:
            notes.append(note_mult)
        if it.note:
            notes.append(it.note)
        v = worst[1]
        margin = (limit - v) / limit * 100.0 if limit > 0 else None
        self.checks.append(Check(measured=v, margin_percent=margin, verdict=verdict,
                                 note="; ".join(notes), period_start=format_time(p.start_s, tz),
                                 period_end=format_time(p.end_s, tz), **base))


def _period_words(period_s: float) -> str:
    if abs(period_s - 86400) < 1:
        return "daily"
    if abs(period_s - 604800) < 1:
        return "weekly"
    return f"per {period_s:g} s"


def survey_findings(series: IntervalSeries) -> list:
    """Findings about flagged and incomplete intervals of one level."""
    out = []
    nf = int(np.sum(series.flagged))
    if nf:
        out.append(Finding("flagged-intervals", "warning",
                           f"{nf} {series.level} interval(s) flagged (dip, swell or "
                           "interruption, IEC 61000-4-30); left out of the statistics",
                           value=float(nf), unit="intervals"))
    return out


# --- from waveform windows (IEC 61000-4-30 Class A) ---------------------------------------


@dataclass(frozen=True, eq=False)
class FileLevels:
    """The aggregation of one file of a recording, ready to be joined with its neighbours.

    Attributes
    ----------
    source, sha256 : str
    start_s, end_s : float
        Absolute start of the first window and end of the last one (POSIX). [s]
    window_s : float
        Mean window length. [s]
    three_s : IntervalSeries
        150/180-cycle values (``complete`` provisional for the last block, see ``open_end``).
    open_end : bool
        The last 3 s block was cut by the end of the file with fewer than 15 windows: it is
        complete only when the next file follows without a gap.
    ten_min : IntervalSeries
        10 min values of the windows of this file (clock-aligned); ``complete`` not yet set.
    counts : numpy.ndarray, shape (T,)
        Valid windows in each 10 min value (to join values of a tick split over two files).
    covered_s : numpy.ndarray, shape (T,)
        Time covered by valid windows in each 10 min value. [s]
    events : tuple of (float, str)
        (start, kind) of each window holding a dip, swell or interruption.
    findings : tuple of Finding
        The analysis' findings, with the file named.
    settings : dict
    """

    source: str
    sha256: str
    start_s: float
    end_s: float
    window_s: float
    three_s: IntervalSeries
    open_end: bool
    ten_min: IntervalSeries
    counts: np.ndarray
    covered_s: np.ndarray
    events: tuple = ()
    findings: tuple = ()
    settings: dict = field(default_factory=dict, compare=False)


def window_values(result, *, il_a: float | None = None, measure: str = "subgroup",
                  max_order: int | None = None):
    """Per-window values of an analysis for aggregation: harmonics (W, C, H + 1) of the
    IEC 61000-4-7 ``measure``, THD (W, C) [%], TDD (W, C) [%] (currents, with ``il_a``) and
    active power per phase on the current channel (W, C) [W]; invalid windows NaN. THD and
    TDD are :func:`pqcheck.assess.window_thd_percent` / ``window_tdd_percent`` over orders 2
    to ``max_order`` (a limit table's highest; default: the highest resolved)."""
    from .analysis import _phase_pairs
    from .assess import window_tdd_percent, window_thd_percent

    w = result.windows
    valid = np.asarray(w.valid, bool)
    mags = np.abs(w.component) if measure == "component" else np.asarray(getattr(w, measure))
    mags = np.where(valid[:, None, None], mags, np.nan)
    how = {"measure": measure, "max_order": max_order, "mags": mags}
    thd = window_thd_percent(result, **how)
    tdd = np.full(thd.shape, np.nan)
    cur = [k for k, c in enumerate(result.channels) if c.quantity == "current"]
    if il_a:
        tdd[:, cur] = window_tdd_percent(result, il_a, **how)[:, cur]
    pw = np.full(thd.shape, np.nan)
    if w.p_w is not None:
        pairs, _ = _phase_pairs(result.channels)
        for j, (_, k) in enumerate(pairs):
            pw[:, k] = np.where(valid, w.p_w[:, j], np.nan)
    return mags, thd, tdd, pw


def file_levels(result, start_s: float, *, t0_s: float = 0.0, flags=None, events=(),
                il_a: float | None = None, measure: str = "subgroup", source: str = "",
                sha256: str = "", max_order: int | None = None) -> FileLevels:
    """Aggregate the windows of one analysed file into 3 s and 10 min values (IEC 61000-4-30).

    Parameters
    ----------
    result : pqcheck.analysis.AnalysisResult
    start_s : float
        Absolute time of the capture's first sample (POSIX). [s]
    t0_s : float
        The capture's own time of its first sample (``Capture.t0_s``). [s]
    flags : array_like of bool, shape (W,), optional
        Windows holding a dip, swell or interruption.
    il_a : float, optional
        IL for TDD. [A]
    measure : str
        ``subgroup`` (IEC 61000-4-30 Class A), ``group`` or ``component``.
    max_order : int, optional
        Highest order of the THD and TDD sums (a limit table's; default: the highest
        resolved). [unitless]

    Returns
    -------
    FileLevels
    """
    w = result.windows
    t = start_s + (np.asarray(w.t_start_s, np.float64) - t0_s)
    d = np.asarray(w.duration_s, np.float64)
    valid = np.asarray(w.valid, bool)
    flg = np.zeros(t.size, bool) if flags is None else np.asarray(flags, bool)
    mags, thd, tdd, pw = window_values(result, il_a=il_a, measure=measure, max_order=max_order)
    chans = tuple(SurveyChannel(c.name, c.quantity, c.phase, c.unit) for c in result.channels)
    # 3 s blocks
    lab, ends = aggregate.class_a_blocks(t, d)
    nb = int(lab.max()) + 1 if lab.size else 0
    nwin = np.bincount(lab, minlength=nb)
    allvalid = np.ones(nb, bool)
    np.logical_and.at(allvalid, lab, valid)
    bflag = np.zeros(nb, bool)
    np.logical_or.at(bflag, lab, flg)
    first = np.zeros(nb, np.int64)
    first[lab[::-1]] = np.arange(t.size)[::-1]
    short_ok = np.isin(ends, ("tick",))
    complete3 = allvalid & ((nwin == aggregate.WINDOWS_PER_3S) | short_ok)
    open_end = bool(nb and ends[-1] == "end" and nwin[-1] < aggregate.WINDOWS_PER_3S)
    if open_end:
        complete3[-1] = allvalid[-1]  # provisional: settled when the files are joined
    three = IntervalSeries(
        level="3s", interval_s=LEVELS["3s"], start_s=t[first],
        channels=chans, harmonics=aggregate.rms_by_label(mags, lab, nb),
        thd_percent=aggregate.rms_by_label(thd, lab, nb),
        tdd_percent=aggregate.rms_by_label(tdd, lab, nb),
        power_w=aggregate.mean_by_label(pw, lab, nb), flagged=bflag, complete=complete3)
    # 10 min values of this file's windows
    tick = np.floor(t / _TICK_S + 1e-9).astype(np.int64)
    keys, inv = np.unique(tick, return_inverse=True)
    nt = keys.size
    counts = np.bincount(inv, weights=valid.astype(float), minlength=nt)
    covered = np.bincount(inv, weights=np.where(valid, d, 0.0), minlength=nt)
    tflag = np.zeros(nt, bool)
    np.logical_or.at(tflag, inv, flg)
    ten = IntervalSeries(
        level="10min", interval_s=_TICK_S, start_s=keys * _TICK_S, channels=chans,
        harmonics=aggregate.rms_by_label(mags, inv, nt),
        thd_percent=aggregate.rms_by_label(thd, inv, nt),
        tdd_percent=aggregate.rms_by_label(tdd, inv, nt),
        power_w=aggregate.mean_by_label(pw, inv, nt), flagged=tflag,
        complete=np.ones(nt, bool))
    end = float(t[-1] + d[-1]) if t.size else start_s
    return FileLevels(source=source or str(getattr(result, "source", "")),
                      sha256=sha256 or str(getattr(result, "sha256", "") or ""),
                      start_s=float(t[0]) if t.size else start_s, end_s=end,
                      window_s=float(np.mean(d)) if d.size else 0.2, three_s=three,
                      open_end=open_end, ten_min=ten, counts=counts, covered_s=covered,
                      events=tuple(events), findings=tuple(result.findings))


def _cat(series: list, **over) -> IntervalSeries:
    base = series[0]
    fields = dict(level=base.level, interval_s=base.interval_s, channels=base.channels)
    for name in ("start_s", "harmonics", "thd_percent", "tdd_percent", "power_w", "flagged",
                 "complete"):
        fields[name] = np.concatenate([getattr(s, name) for s in series])
    fields.update(over)
    return IntervalSeries(**fields)


def join_files(parts, *, timezone_name: str = "", tol_s: float = 0.02,
               levels=("3s", "10min", "2h")) -> Survey:
    """Join the aggregation of consecutive files into one recording, checked for continuity.

    Files are ordered by start. A file that starts before the previous one ends is refused; a
    file that starts more than ``tol_s`` after it is a gap (a finding); the 3 s, 10 min and 2 h
    intervals a gap touches are incomplete (left out of statistics and counted), never zero.
    A 10 min tick split over two files gets the RMS of both files' windows.

    Raises
    ------
    InputError
        Files overlap in time, or their channels differ.
    """
    parts = sorted(parts, key=lambda p: p.start_s)
    if not parts:
        raise InputError("no recording given")
    names = [(c.quantity, c.phase) for c in parts[0].three_s.channels]
    for p in parts[1:]:
        if [(c.quantity, c.phase) for c in p.three_s.channels] != names:
            raise InputError(f"its channels ({', '.join(c.name for c in p.three_s.channels)}) "
                             f"differ from those of {parts[0].source}; a recording's files "
                             "must hold the same channels", path=p.source)
    findings, gaps = [], []
    tz = timezone_name
    for a, b in zip(parts, parts[1:]):
        step = b.start_s - a.end_s
        if step < -tol_s:
            raise InputError(
                f"starts at {format_time(b.start_s, tz)}, before the end of {a.source} "
                f"({format_time(a.end_s, tz)}); the files of a recording must not overlap "
                "(check their start times)", path=b.source, field="start_time")
        if step > tol_s:
            gaps.append((a.end_s, b.start_s))
            findings.append(Finding(
                "gap", "warning",
                f"gap of {step:.6g} s between {a.source} (ends {format_time(a.end_s, tz)}) and "
                f"{b.source} (starts {format_time(b.start_s, tz)}); the intervals it touches "
                "are incomplete", value=step, unit="s",
                detail={"start": format_time(a.end_s, tz), "end": format_time(b.start_s, tz)}))
    # 3 s: the last short block of a file is complete only if the next file follows on
    threes = []
    for i, p in enumerate(parts):
        s = p.three_s
        if p.open_end:
            cont = i + 1 < len(parts) and parts[i + 1].start_s - p.end_s <= tol_s
            comp = s.complete.copy()
            comp[-1] = comp[-1] and cont
            s = replace(s, complete=comp)
        threes.append(s)
    three = _cat(threes)
    # 10 min: join ticks split over files
    keys = np.unique(np.concatenate([p.ten_min.start_s for p in parts]))
    nt = keys.size
    C, H1 = three.harmonics.shape[1], three.harmonics.shape[2]
    sq = np.zeros((nt, C, H1))
    cnt_h = np.zeros((nt, C, H1))
    acc = {n: (np.zeros((nt, C)), np.zeros((nt, C))) for n in ("thd_percent", "tdd_percent")}
    p_sum, p_cnt = np.zeros((nt, C)), np.zeros((nt, C))
    counts = np.zeros(nt)
    covered = np.zeros(nt)
    flagged = np.zeros(nt, bool)
    for p in parts:
        s = p.ten_min
        j = np.searchsorted(keys, s.start_s)
        wgt = p.counts
        ok = np.isfinite(s.harmonics)
        np.add.at(sq, j, np.where(ok, s.harmonics ** 2, 0.0) * wgt[:, None, None])
        np.add.at(cnt_h, j, ok * wgt[:, None, None])
        for n, (a_sq, a_cnt) in acc.items():
            v = getattr(s, n)
            okv = np.isfinite(v)
            np.add.at(a_sq, j, np.where(okv, v ** 2, 0.0) * wgt[:, None])
            np.add.at(a_cnt, j, okv * wgt[:, None])
        okp = np.isfinite(s.power_w)
        np.add.at(p_sum, j, np.where(okp, s.power_w, 0.0) * wgt[:, None])
        np.add.at(p_cnt, j, okp * wgt[:, None])
        np.add.at(counts, j, wgt)
        np.add.at(covered, j, p.covered_s)
        np.logical_or.at(flagged, j, s.flagged)
    with np.errstate(invalid="ignore", divide="ignore"):
        harm = np.where(cnt_h > 0, np.sqrt(sq / np.maximum(cnt_h, 1e-300)), np.nan)
        thd_v = np.where(acc["thd_percent"][1] > 0, np.sqrt(acc["thd_percent"][0] / np.maximum(
            acc["thd_percent"][1], 1e-300)), np.nan)
        tdd_v = np.where(acc["tdd_percent"][1] > 0, np.sqrt(acc["tdd_percent"][0] / np.maximum(
            acc["tdd_percent"][1], 1e-300)), np.nan)
        pw = np.where(p_cnt > 0, p_sum / np.maximum(p_cnt, 1e-300), np.nan)
    win = float(np.mean([p.window_s for p in parts]))
    complete10 = covered >= _TICK_S - 1.5 * win
    for a, b in gaps:
        complete10 &= ~((keys + _TICK_S > a) & (keys < b))
        touch3 = (three.start_s < b) & (three.start_s + three.interval_s > a)
        three = replace(three, complete=three.complete & ~touch3)
    ten = IntervalSeries(level="10min", interval_s=_TICK_S, start_s=keys, channels=three.channels,
                         harmonics=harm, thd_percent=thd_v, tdd_percent=tdd_v, power_w=pw,
                         flagged=flagged, complete=complete10)
    out = [three, ten]
    if "2h" in levels:
        out.append(derive_level(ten, "2h"))
    out = [s for s in out if s.level in levels]
    events = [e for p in parts for e in p.events]
    for p in parts:
        for f in p.findings:
            findings.append(replace(f, message=f"{p.source}: {f.message}"))
    if events:
        kinds = {}
        for _, k in events:
            kinds[k] = kinds.get(k, 0) + 1
        findings.append(Finding(
            "voltage-events", "warning",
            "windows holding a " + ", ".join(f"{k} ({n})" for k, n in sorted(kinds.items()))
            + "; the intervals holding them are flagged (IEC 61000-4-30) and left out of the "
            "statistics", value=float(len(events)), unit="windows"))
    for s in out:
        findings += survey_findings(s)
    return Survey(levels=tuple(out), sources=tuple(p.source for p in parts),
                  sha256=tuple(p.sha256 for p in parts), findings=tuple(findings),
                  timezone=tz, origin="waveform recording",
                  settings={"span_s": (parts[0].start_s, parts[-1].end_s),
                            "files": [p.settings for p in parts],
                            "events": [(float(t), k) for t, k in events]})


def needs_periods(result, table: ResolvedLimits) -> bool:
    """True when an analysed capture lasts at least the shortest period of the table's
    statistics over periods (so it must be evaluated period by period)."""
    if not is_survey_evaluation(table):
        return False
    w = result.windows
    observed = float(np.sum(np.asarray(w.duration_s)[np.asarray(w.valid, bool)]))
    shortest = min(c.period_s for c in table.evaluation.checks if c.period_s > 0)
    return observed >= shortest


def assess_result_periods(result, table, *, il_a=None, start_s: float | None = None):
    """Assess one analysed capture period by period (its windows aggregated as
    IEC 61000-4-30 does). Without ``start_s`` (absolute time of the first sample) the
    capture's own time base stands in for the clock, and the notes say so."""
    # THD and TDD as the table sums them (its measure and highest order), as the checks of a
    # shorter capture do
    how = {"max_order": table.max_order}
    if table.measure in ("component", "group", "subgroup"):
        how["measure"] = table.measure
    part = file_levels(result, 0.0 if start_s is None else start_s, il_a=il_a, **how)
    survey = join_files([part], timezone_name="")
    sa = assess_survey(survey, table, il_a=il_a)
    if start_s is None:
        note = (f"{table.table_id}: the capture lasts {survey.duration_s / 86400:.3g} days, so "
                "its statistics are evaluated period by period; with no absolute start time "
                "the capture's own time base stands in for the clock (periods and 10 min "
                "intervals counted from its time 0), and voltage events were not flagged.")
        sa = replace(sa, assessment=replace(sa.assessment,
                                            notes=sa.assessment.notes + (note,)))
    return sa
