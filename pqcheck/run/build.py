"""Assemble what a report covers: analyse and assess one capture, or every capture of a plan.

This is the orchestration layer: it calls :func:`pqcheck.run.check.analyze_file`,
:func:`pqcheck.limits.resolve` and :func:`pqcheck.assess.assess` and collects their results
into :class:`~pqcheck.report.job.CaptureRun` records. It computes nothing itself.
"""

from __future__ import annotations

import re

from ..errors import InputError, PlanError
from ..report.job import CaptureRun

__all__ = ["assess_each", "run_plan"]


def assess_each(result, resolved, **assess_kwargs) -> tuple:
    """One :class:`~pqcheck.assess.Assessment` per resolved table (so each table keeps its
    own verdict and notes).

    Parameters
    ----------
    result : AnalysisResult
    resolved : sequence of ResolvedLimits
    **assess_kwargs
        ``il_a``, ``rated_current_a``, ``iref_a``, ``active_power_w`` for
        :func:`pqcheck.assess.assess`.

    Returns
    -------
    tuple of Assessment
    """
    from ..assess import assess

    return tuple(assess(result, r, **assess_kwargs) for r in resolved)


_PLAN_FIELDS = {
    "--voltage-level": "voltage_level_v", "--isc": "isc_a", "--il": "il_a", "--rsce": "rsce",
    "--ssc": "ssc_va", "--rated-power": "rated_apparent_power_va", "--class": "equipment_class",
    "--equipment-kind": "equipment_kind", "--generation": "generation",
    "--rated-current": "rated_current_a", "--iref": "iref_a", "--active-power": "active_power_w",
}
_OPTION = re.compile(r"--[a-z][a-z-]*")


def _plan_error(plan, spec_line, field, exc: InputError) -> PlanError:
    """Restate a selector error in the plan's terms (plan fields instead of options)."""
    problem = _OPTION.sub(lambda m: _PLAN_FIELDS.get(m.group(0), m.group(0)), exc.problem)
    if problem != exc.problem or (exc.field or "").startswith("--"):
        problem += " (set it in [site], [equipment] or this [[limits]] entry)"
    return PlanError(problem, path=plan.path, line=spec_line, field=field)


def run_plan(plan, *, cache=None, progress=None) -> tuple:
    """Analyse every capture of a plan and assess it against its limit tables.

    Parameters
    ----------
    plan : Plan
        From :func:`pqcheck.run.plan.load_plan`.
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed captures and results.
    progress : callable or None
        ``progress(done_samples, total_samples)`` per capture.

    Returns
    -------
    tuple of CaptureRun
        In plan order.

    Raises
    ------
    PlanError
        A limit table cannot be loaded or resolved with the plan's values (the message names
        the plan's line and field), or a capture cannot be read (its file and line in the
        plan are named).
    """
    from ..limits import load_table, resolve
    from .check import analyze_file

    resolved = {}
    for k, spec in enumerate(plan.limits):
        field = f"limits[{k + 1}]"
        try:
            table = load_table(spec.source)
        except InputError as exc:
            raise PlanError(f"limit table {spec.table!r}: {exc.location_message()}",
                            path=plan.path, line=spec.line, field=field + ".table") from None
        resolve_kw, assess_kw = plan.resolve_arguments(spec)
        try:
            resolved[spec.table] = (resolve(table, **resolve_kw), assess_kw)
        except InputError as exc:
            raise _plan_error(plan, spec.line, field, exc) from None

    runs = []
    for k, spec in enumerate(plan.captures):
        specs = plan.limits_for(spec)
        max_order = max((resolved[s.table][0].max_order for s in specs), default=50)
        kwargs = spec.analysis_kwargs(plan.analysis, plan.site, max_order=max_order)
        try:
            capture, result = analyze_file(spec.path, cache=cache, progress=progress, **kwargs)
        except InputError as exc:
            raise PlanError(f"capture {spec.id!r}: {exc.location_message()}", path=plan.path,
                            line=spec.line, field=f"captures[{k + 1}]") from None
        assessments = []
        for s in specs:
            lim, assess_kw = resolved[s.table]
            try:
                assessments += assess_each(result, [lim], **assess_kw)
            except InputError as exc:
                raise _plan_error(plan, s.line, f"limits[{plan.limits.index(s) + 1}]",
                                  exc) from None
        runs.append(CaptureRun(id=spec.id, capture=capture, result=result,
                               assessments=tuple(assessments), load_point=spec.load_point,
                               load_percent=spec.load_percent, notes=spec.notes))
    return tuple(runs)
