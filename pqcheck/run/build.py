"""Run a test plan: every capture of it through :func:`pqcheck.run.check.check_capture`.

The plan gives one :class:`~pqcheck.record.RunSpec` per capture
(:meth:`pqcheck.run.plan.Plan.run_spec`); this module runs them in plan order and restates any
error in the plan's terms: the plan file, the line of the ``[[limits]]`` or ``[[captures]]``
entry and the plan key (the plan boundary of the one vocabulary).
"""

from __future__ import annotations

from ..errors import InputError, LimitTableError, PlanError
from .check import check_capture, resolve_selection
from .plan import plan_terms

__all__ = ["run_plan"]


def _plan_error(plan, line, field, exc: InputError) -> PlanError:
    """Restate a selector or reference-value error in the plan's terms."""
    problem = plan_terms(exc.problem)
    if "`" in exc.problem or exc.field:
        problem += " (set it in [site], [equipment] or this [[limits]] entry)"
    return PlanError(problem, path=plan.path, line=line, field=field)


def run_plan(plan, *, cache=None, progress=None, report=None) -> tuple:
    """Analyse every capture of a plan and assess it against its limit tables.

    Parameters
    ----------
    plan : Plan
        From :func:`pqcheck.run.plan.load_plan`.
    cache : pqcheck.run.cache.Cache or None
        Cache of parsed captures and results.
    progress : callable or None
        ``progress(done_samples, total_samples)`` per capture.
    report : ReportDetails or None
        What the report says (recorded in every run's spec).

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
    # every table first, so a bad table or selector stops the plan before any capture is read
    for k, spec in enumerate(plan.limits):
        field = f"limits[{k + 1}]"
        try:
            resolve_selection(plan.limit_selection(spec))
        except LimitTableError as exc:
            raise PlanError(f"limit table {spec.table!r}: {exc.location_message()}",
                            path=plan.path, line=spec.line, field=field + ".table") from None
        except InputError as exc:
            raise _plan_error(plan, spec.line, field, exc) from None

    runs = []
    for k, cap in enumerate(plan.captures):
        entries = plan.limits_for(cap)
        try:
            run_spec = plan.run_spec(cap, report)
            runs.append(check_capture(run_spec, cache=cache, progress=progress, id=cap.id,
                                      load_point=cap.load_point, load_percent=cap.load_percent,
                                      notes=cap.notes))
        except InputError as exc:
            part = getattr(exc, "part", None) or ""
            if part.startswith("assess["):
                s = entries[int(part[7:-1])]
                raise _plan_error(plan, s.line, f"limits[{plan.limits.index(s) + 1}]",
                                  exc) from None
            msg = plan_terms(exc.location_message())
            raise PlanError(f"capture {cap.id!r}: {msg}", path=plan.path, line=cap.line,
                            field=f"captures[{k + 1}]") from None
    return tuple(runs)
