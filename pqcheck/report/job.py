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

__all__ = ["CaptureRun", "ReportMeta", "ReportJob", "combine_verdicts", "make_report_id",
           "NOT_ASSESSED"]

NOT_ASSESSED = "not assessed"
"""Verdict of a report (or capture) to which no limit table was applied."""

_RANK = {"fail": 3, "inconclusive": 2, "pass": 1, "not applicable": 0}


def combine_verdicts(verdicts) -> str:
    """Overall verdict of several assessment verdicts: any fail is a fail; otherwise any
    inconclusive is inconclusive; otherwise pass when at least one passed; ``"not
    applicable"`` when every one was not applicable; :data:`NOT_ASSESSED` for none."""
    verdicts = [v for v in verdicts if v]
    if not verdicts:
        return NOT_ASSESSED
    return max(verdicts, key=lambda v: _RANK.get(v, 2))


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
        One per limit table applied (empty for an analysis-only report).
    load_point : str
        Label of the operating point, e.g. ``"50 %"``.
    load_percent : float or None
        Operating point in percent of rated power. [%]
    notes : str
        Free text from the plan.
    """

    id: str
    capture: object
    result: object
    assessments: tuple = ()
    load_point: str = ""
    load_percent: float | None = None
    notes: str = ""

    @property
    def verdict(self) -> str:
        """Combined verdict of this capture's assessments."""
        return combine_verdicts(a.verdict for a in self.assessments)


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
    """

    title: str = "Harmonic emission test report"
    equipment: str = ""
    site: str = ""
    operator: str = ""
    report_id: str = ""
    created_utc: datetime = field(default_factory=lambda: datetime.now(timezone.utc))
    tool_version: str = __version__
    command: str = ""


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
        """Overall verdict over every capture and limit table."""
        return combine_verdicts(a.verdict for r in self.runs for a in r.assessments)

    @property
    def assessed(self) -> bool:
        """True when at least one limit table was applied."""
        return any(r.assessments for r in self.runs)

    def limit_tables(self) -> list:
        """Distinct limit tables applied, as their resolved-limits objects (first seen)."""
        seen, out = set(), []
        for r in self.runs:
            for a in r.assessments:
                lim = a.limits
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
