"""What a report covers: the captures with their results and assessments, and who, where, when.

A :class:`ReportJob` holds only objects that were already computed (the
:class:`~pqcheck.capture.Capture`, its :class:`~pqcheck.analysis.AnalysisResult` and the
assessments of :mod:`pqcheck.assess`), plus the free text a person gives (equipment, site,
operator) and the plan when there is one. The PDF, the JSON and the CSV files are all rendered
from it; none of them computes a number.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from datetime import datetime, timezone

from .. import __version__

__all__ = ["CaptureRun", "TableResult", "ReportMeta", "ReportJob", "table_results",
           "make_report_id", "NOT_ASSESSED"]

NOT_ASSESSED = "not assessed"
"""Verdict of a report (or capture) to which no limit table was applied."""


def _overall(checks) -> str:
    from ..assess import overall_verdict

    return overall_verdict(checks)


@dataclass(frozen=True, eq=False)
class TableResult:
    """The part of an assessment that concerns one limit table.

    Attributes
    ----------
    limits : ResolvedLimits
        The table as resolved for this case.
    checks : tuple of Check
        The checks of this table.
    verdict : str
        Verdict over these checks (:func:`pqcheck.assess.overall_verdict`).
    notes : tuple of str
        The assessment's notes.
    """

    limits: object
    checks: tuple
    verdict: str
    notes: tuple = ()


def table_results(assessment) -> list:
    """Split an :class:`~pqcheck.assess.Assessment` into one :class:`TableResult` per table
    (an assessment of a single table keeps its own verdict)."""
    tables = tuple(assessment.tables)
    if len(tables) == 1:
        return [TableResult(tables[0], tuple(assessment.checks), assessment.verdict,
                            tuple(assessment.notes))]
    out = []
    for t in tables:
        checks = tuple(c for c in assessment.checks if c.table_id == t.table_id)
        out.append(TableResult(t, checks, _overall(checks), tuple(assessment.notes)))
    return out


@dataclass(frozen=True, eq=False)
class CaptureRun:
    """One capture, analysed and (optionally) assessed.

    Attributes
    ----------
    id : str
        Short identifier used in tables and file names.
    capture : Capture
        Samples and provenance (the waveform figure takes its samples from here).
    result : AnalysisResult
    assessments : tuple of Assessment
        Assessments of this capture (usually one per limit table; empty for an
        analysis-only report).
    load_point : str
        Label of the operating point, e.g. ``"50 %"``.
    load_percent : float or None
        Operating point in percent of rated power. [%]
    notes : str
        Free text from the plan.
    spec : RunSpec or None
        What was run (:class:`pqcheck.record.RunSpec`), recorded in the results so the run
        can be repeated (:mod:`pqcheck.run.verify`).
    """

    id: str
    capture: object
    result: object
    assessments: tuple = ()
    load_point: str = ""
    load_percent: float | None = None
    notes: str = ""
    spec: object = None

    @property
    def assessment(self):
        """The assessments of every table as one :class:`~pqcheck.assess.Assessment` (checks
        and tables in order, notes without repeats, the overall verdict); None without any."""
        if not self.assessments:
            return None
        if len(self.assessments) == 1:
            return self.assessments[0]
        from ..assess import VERDICTS, Assessment

        checks = tuple(c for a in self.assessments for c in a.checks)
        notes = tuple(dict.fromkeys(n for a in self.assessments for n in a.notes))
        return Assessment(verdict=_overall(checks), checks=checks,
                          tables=tuple(t for a in self.assessments for t in a.tables),
                          notes=notes,
                          counts={v: sum(1 for c in checks if c.verdict == v) for v in VERDICTS})

    @property
    def thd_basis(self) -> dict:
        """Which per-window THD the report shows for this capture: as the first limit table
        with a THD check (else a TDD check) sums it (its IEC 61000-4-7 measure and highest
        order), else the analysis's own (components, orders up to the highest resolved).

        Returns
        -------
        dict
            ``measure``, ``max_order`` (None: the analysis's) and ``table_id`` ("" for the
            analysis's), for :func:`pqcheck.assess.window_thd_percent`.
        """
        for quantity in ("THD", "TDD"):
            for a in self.tables:
                lim = a.limits
                if lim.measure in ("component", "group", "subgroup") and any(
                        c.quantity == quantity for c in a.checks):
                    return {"measure": lim.measure, "max_order": lim.max_order,
                            "table_id": lim.table_id}
        return {"measure": "component", "max_order": None, "table_id": ""}

    def windows_frame(self):
        """:func:`pqcheck.export.windows_frame` with the THD of :attr:`thd_basis`."""
        from ..export import windows_frame

        b = self.thd_basis
        return windows_frame(self.result, measure=b["measure"], max_order=b["max_order"])

    @property
    def tables(self) -> list:
        """One :class:`TableResult` per limit table applied to this capture."""
        return [t for a in self.assessments for t in table_results(a)]

    @property
    def checks(self) -> list:
        """Every check of this capture."""
        return [c for a in self.assessments for c in a.checks]

    @property
    def verdict(self) -> str:
        """Verdict over every check of this capture (:data:`NOT_ASSESSED` without any
        assessment)."""
        if not self.assessments:
            return NOT_ASSESSED
        return _overall(self.checks)


@dataclass(frozen=True)
class ReportMeta:
    """Who, what, where and when.

    Attributes
    ----------
    title : str
    equipment, site, operator : str
        Free text (shown literally).
    report_id : str
    created_utc : datetime
        Time of the analysis (timezone-aware, UTC).
    tool_version : str
    command : str
        The command line that produced the report (for traceability), or empty.
    detail : str
        ``"full"`` (default): the body leads with what decides and appendix A holds every
        table in full; ``"summary"``: the body only (the full tables stay in the attached
        results JSON).
    test_date : str
        Date of the measurements as the user or the capture's header gives it (ISO 8601),
        or empty.
    """

    title: str = "Harmonic emission test report"
    equipment: str = ""
    site: str = ""
    operator: str = ""
    report_id: str = ""
    created_utc: datetime = field(default_factory=lambda: datetime.now(timezone.utc))
    tool_version: str = __version__
    command: str = ""
    detail: str = "full"
    test_date: str = ""


@dataclass(frozen=True, eq=False)
class ReportJob:
    """Everything one report covers.

    Attributes
    ----------
    meta : ReportMeta
    runs : tuple of CaptureRun
    plan : Plan or None
    """

    meta: ReportMeta
    runs: tuple
    plan: object = None

    @property
    def verdict(self) -> str:
        """Overall verdict over every check of every capture (:data:`NOT_ASSESSED` when no
        limit table was applied)."""
        if not self.assessed:
            return NOT_ASSESSED
        return _overall([c for r in self.runs for c in r.checks])

    @property
    def assessed(self) -> bool:
        """True when at least one limit table was applied."""
        return any(r.assessments for r in self.runs)

    def limit_tables(self) -> list:
        """Distinct limit tables applied, as their resolved-limits objects (first seen)."""
        seen, out = set(), []
        for r in self.runs:
            for t in r.tables:
                lim = t.limits
                key = (lim.table_id, lim.sha256)
                if key not in seen:
                    seen.add(key)
                    out.append(lim)
        return out


def make_report_id(job_parts, created_utc: datetime) -> str:
    """Report id ``PQ-YYYYMMDD-XXXXXXXX`` from the UTC date and the first 8 hex digits of the
    SHA-256 over ``job_parts`` (the capture, table and plan hashes) and the creation time, so
    two reports of the same data made at different times differ."""
    h = hashlib.sha256()
    for part in job_parts:
        h.update(str(part).encode("utf-8"))
        h.update(b"\0")
    h.update(created_utc.isoformat().encode("ascii"))
    return f"PQ-{created_utc:%Y%m%d}-{h.hexdigest()[:8].upper()}"
