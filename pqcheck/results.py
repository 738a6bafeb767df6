"""The one versioned results schema: every JSON document pqcheck writes, and reading them back.

Documents
    ``analysis`` (``pqcheck analyze`` in JSON format), ``check`` (``pqcheck check`` in JSON
    format), ``report`` (the report's JSON file and the PDF's ``results.json`` attachment),
    ``batch`` (the summary of ``pqcheck batch`` in JSON format), ``site study`` (``pqcheck
    site``'s JSON and the site PDF's attachment), ``survey`` (``pqcheck check`` on interval
    logs or a recording) and ``survey report`` (a survey report's JSON and attachment). Each
    carries ``schema_version`` (:data:`SCHEMA_VERSION`), a ``tool`` block naming pqcheck, its
    version and the document's ``kind``, and what it was run with: the run specification
    (:class:`pqcheck.record.RunSpec`, ``run_spec``; in a report one per capture, in a batch the
    template every capture was checked with) or, for a site study, its study specification
    (:class:`pqcheck.site.StudySpec`, ``study_spec``, with each capture unit's ``run_spec``).
    The rows of a batch results table carry ``schema_version`` and their capture's
    ``run_spec`` as JSON (:func:`batch_row_spec` reads it).

The published schema
    :func:`results_schema` is the JSON Schema (draft 2020-12) of these documents, one entry of
    ``$defs`` per kind; the ``run_spec`` and ``study_spec`` parts are generated from the
    dataclass fields, so a new field is described with no second edit; the site study's part
    is written by hand in ``pqcheck/schema/site_study.part.json``. The same schema ships in
    ``pqcheck/schema/results.schema.json``; after a change, write it again with ``python -m
    pqcheck.results`` (a test fails until the shipped file matches). :func:`schema_for` gives
    the schema of one kind.

Reading back
    :func:`read_document` checks that a document is pqcheck results of a schema version this
    pqcheck reads, :func:`run_spec_of` and :func:`study_spec_of` read a recorded
    specification as data.
"""

from __future__ import annotations

import dataclasses
import json
from importlib import resources

from . import __version__
from .errors import InputError
from .export import SCHEMA_VERSION  # version of the documents (1: before run_spec)

__all__ = ["SCHEMA_VERSION", "KINDS", "tool_block", "analysis_document", "check_document",
           "batch_document", "report_document", "site_document", "survey_document", "survey_report_document",
           "read_document", "run_spec_of", "study_spec_of", "batch_row_spec", "spec_json",
           "results_schema", "schema_for", "shipped_schema", "dumps"]


KINDS = ("analysis", "check", "report", "batch", "site study", "survey", "survey report")


def tool_block(kind: str) -> dict:
    """The ``tool`` block of a document of ``kind`` (one of :data:`KINDS`)."""
    return {"name": "pqcheck", "version": __version__, "kind": kind, "schema": SCHEMA_VERSION}


def _spec_dict(spec):
    return None if spec is None else spec.to_dict()


def analysis_document(run) -> dict:
    """The ``analysis`` document of a :class:`~pqcheck.report.job.CaptureRun`: the analysis
    (:func:`pqcheck.export.analysis_to_dict`) with the run specification."""
    from .export import analysis_to_dict, clean

    d = analysis_to_dict(run.result)
    d["tool"] = tool_block("analysis")
    return clean({"schema_version": SCHEMA_VERSION, **d, "run_spec": _spec_dict(run.spec)})


def check_document(run) -> dict:
    """The ``check`` document of a :class:`~pqcheck.report.job.CaptureRun`: its assessment
    (every table), the capture's identity and findings, and the run specification."""
    from .export import clean

    a = run.assessment
    r = run.result
    d = {"schema_version": SCHEMA_VERSION, "tool": tool_block("check")}
    d.update(a.to_dict())
    d["capture"] = {"source": r.source, "sha256": r.sha256, "duration_s": r.duration_s}
    d["findings"] = [f.to_dict() for f in r.findings]
    d["run_spec"] = _spec_dict(run.spec)
    return clean(d)


def batch_document(summary: dict, run_info: dict, captures: list, spec) -> dict:
    """The ``batch`` document: what ran, the summary, one entry per capture, and the run
    specification every capture was checked with (its capture path empty)."""
    from .export import clean

    return clean({"schema_version": SCHEMA_VERSION, "tool": tool_block("batch"),
                  "run": run_info, "summary": summary, "captures": captures,
                  "run_spec": _spec_dict(spec)})


def report_document(job) -> dict:
    """The ``report`` document of a report job (:class:`~pqcheck.report.job.ReportJob`): the
    report's JSON file and the PDF's ``results.json`` attachment (the same bytes).

    Keys: ``tool``, ``report`` (id, title, equipment, site, operator, time of analysis, the
    command line that made it),
    ``plan`` (path and SHA-256, or null), ``verdict`` (overall), ``limit_tables`` (id, title,
    standard, edition, source, SHA-256) and ``captures``: per capture its ``id``,
    ``load_point``, ``load_percent``, ``verdict``, ``analysis`` (:func:`pqcheck.export.
    analysis_to_dict`) and ``assessments`` (:meth:`pqcheck.assess.Assessment.to_dict`: each
    with ``verdict``, ``counts``, ``checks``, ``tables`` and ``notes``).
    """
    from datetime import timezone

    from .export import analysis_to_dict, clean

    meta = job.meta
    plan = job.plan
    return clean({
        "schema_version": SCHEMA_VERSION,
        "tool": tool_block("report"),
        "report": {
            "id": meta.report_id,
            "title": meta.title,
            "equipment": meta.equipment,
            "site": meta.site,
            "operator": meta.operator,
            "time_of_analysis_utc": meta.created_utc.astimezone(timezone.utc).isoformat(),
            "command": meta.command,  # how to re-run it: pqcheck verify reads the options
        },
        "plan": None if plan is None else {
            "path": str(plan.path), "sha256": plan.sha256, "title": plan.title,
            "excluded": [{"id": c.id, "file": str(c.path), "reason": c.exclude}
                         for c in plan.excluded]},
        "verdict": job.verdict,
        "limit_tables": [
            {"id": t.table_id, "title": t.title, "standard": t.standard, "edition": t.edition,
             "source": t.source, "sha256": t.sha256}
            for t in job.limit_tables()
        ],
        "captures": [
            {
                "id": r.id,
                "load_point": r.load_point,
                "load_percent": r.load_percent,
                "verdict": r.verdict,
                "analysis": analysis_to_dict(r.result),
                "assessments": [a.to_dict() for a in r.assessments],
                "run_spec": None if r.spec is None else r.spec.to_dict(),
            }
            for r in job.runs
        ],
    })


def _num10(x, digits=10):
    """A number rounded to ``digits`` significant digits; None when not finite."""
    import math

    if x is None:
        return None
    x = float(x)
    return float(f"{x:.{digits}g}") if math.isfinite(x) else None


def site_document(study, *, spec=None, report: dict | None = None) -> dict:
    """The ``site study`` document of a :class:`~pqcheck.site.SiteStudy` (the JSON file of
    ``pqcheck site`` and the ``results.json`` attached to its PDF); non-finite numbers become
    None.

    Parameters
    ----------
    study : SiteStudy
    spec : StudySpec or None
        What the study was run with (``study_spec``; None: the site's file with the study's
        summation and headroom search).
    report : dict or None
        Who and when, recorded as the ``report`` block: ``title``, ``operator``, ``id``,
        ``time_of_analysis_utc`` (ISO 8601), as a report writes them.

    Keys: ``schema_version``, ``tool``, ``site`` (name, path, sha256, supply, transformer, pcc,
    other_load, units, each with ``pcc_current_a``: one unit's current at the PCC for orders
    1..H, worst phase, and the ``run_spec`` of a capture unit), ``summation``, ``pcc``
    (voltage, impedance, ISC, IL, ISC/IL), ``limits`` (table, rows), ``harmonics`` (per order:
    current per phase and % of IL, voltage per phase and % of nominal), ``totals`` (THD of
    voltage, TDD), ``checks`` (as :meth:`pqcheck.assess.Check.to_dict` with ``label``),
    ``verdict``, ``headroom``, ``by_summation`` (the verdict and failing checks under each
    summation method), ``findings``, ``cautions``, ``inputs`` and ``study_spec``.
    """
    import numpy as np

    from .export import clean
    from .site import CAUTIONS, StudySpec, shown_path

    _num = _num10
    s = study.site
    t = s.transformer
    if spec is None:
        spec = StudySpec(site_file="" if s.path is None else str(s.path),
                         summation=study.summation, headroom=bool(study.headroom),
                         **({"max_headroom": max(h.searched_up_to for h in study.headroom)}
                            if study.headroom else {}))
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
    return clean({
        "schema_version": SCHEMA_VERSION,
        "tool": tool_block("site study"),
        "site": {
            "name": s.name, "path": None if s.path is None else str(s.path),
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
                                         for h in study.orders[1:]],
                       "run_spec": None if u.run_spec is None else u.run_spec.to_dict()}
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
        "checks": [dict(c.to_dict(), label=c.label) for c in study.checks],
        "verdict": study.verdict,
        "headroom": [{"unit": h.unit, "count": h.count, "extra_units": h.extra_units,
                      "searched_up_to": h.searched_up_to, "binding": h.binding,
                      "binding_value": _num(h.binding_value),
                      "binding_limit": _num(h.binding_limit),
                      "already_exceeded": h.already_exceeded,
                      "passing_count": h.passing_count,
                      "extra_units_rating": h.extra_units_rating} for h in study.headroom],
        "by_summation": [{"summation": o.summation, "verdict": o.verdict or None,
                          "failing": list(o.failing), "closest": o.closest or None,
                          "closest_margin_percent": _num(o.closest_margin_percent),
                          "note": o.note} for o in study.by_summation],
        "findings": [f.to_dict() for f in study.findings],
        "cautions": list(CAUTIONS),
        "inputs": [{"what": what, "name": name,
                    "path": shown_path(path, s.path) if path else "",
                    "sha256": sha} for what, name, path, sha in study.inputs],
        "study_spec": spec.to_dict(),
    } | ({"report": dict(report)} if report is not None else {}))


def study_spec_of(doc: dict):
    """The :class:`~pqcheck.site.StudySpec` recorded in a site study document, read as data.

    Raises
    ------
    InputError
        No study specification, or one that does not validate (naming ``study_spec...``).
    """
    from .site import StudySpec

    if not isinstance(doc.get("study_spec"), dict):
        raise InputError("the results record no study specification (study_spec), so the "
                         "study cannot be repeated; were they made by an older pqcheck?",
                         field="study_spec")
    return StudySpec.from_dict(doc["study_spec"])


def _survey_capture(s) -> dict:
    return {"source": ", ".join(s.sources), "sources": list(s.sources),
            "sha256": s.sha256[0] if len(s.sha256) == 1 else None,
            "sha256_per_file": list(s.sha256), "duration_s": s.duration_s, "kind": s.origin}


def survey_document(sa, spec) -> dict:
    """The ``survey`` document (``pqcheck check`` in JSON format on interval logs or a
    recording): the assessment (every table), the survey's identity, its ``survey`` section
    (:meth:`pqcheck.survey.SurveyAssessment.to_dict`), the worst period, the findings and the
    run specification of the options (``spec``: a :class:`~pqcheck.record.RunSpec`, its
    limit selections and reference values)."""
    from .export import clean

    survey = sa.to_dict()
    d = {"schema_version": SCHEMA_VERSION, "tool": tool_block("survey")}
    d.update(sa.assessment.to_dict())
    d["capture"] = _survey_capture(sa.survey)
    d["survey"] = survey
    d["worst_period"] = survey.get("worst_period")
    d["findings"] = [f.to_dict() for f in sa.survey.findings]
    d["run_spec"] = _spec_dict(spec)
    return clean(d)


def survey_report_document(sa, meta, spec) -> dict:
    """The ``survey report`` document (the JSON file of a survey report and its PDF's
    ``results.json``): the keys of a report (``report``, ``plan``, ``verdict``,
    ``limit_tables``, ``captures``) with the survey as the one capture, its ``survey``
    section, the worst period and the run specification of the options.

    Parameters
    ----------
    sa : SurveyAssessment
    meta : ReportMeta
        Title, operator, id, time, command.
    spec : RunSpec
    """
    from datetime import timezone

    from .export import clean

    s = sa.survey
    a = sa.assessment
    survey = sa.to_dict()
    return clean({
        "schema_version": SCHEMA_VERSION,
        "tool": tool_block("survey report"),
        "report": {"id": meta.report_id, "title": meta.title, "equipment": meta.equipment,
                   "site": meta.site, "operator": meta.operator,
                   "time_of_analysis_utc": meta.created_utc.astimezone(timezone.utc)
                   .isoformat(), "command": meta.command},
        "plan": None,
        "verdict": a.verdict,
        "limit_tables": [{"id": t.table_id, "title": t.title, "standard": t.standard,
                          "edition": t.edition, "source": t.source, "sha256": t.sha256}
                         for t in a.tables],
        "captures": [{"id": "survey", "kind": s.origin, "sources": list(s.sources),
                      "sha256": list(s.sha256), "verdict": a.verdict, "analysis": None,
                      "findings": [f.to_dict() for f in s.findings],
                      "assessments": [a.to_dict()], "run_spec": _spec_dict(spec)}],
        "survey": survey,
        "worst_period": survey.get("worst_period"),
        "run_spec": _spec_dict(spec),
    })


def dumps(doc: dict) -> str:
    """JSON text of a document (indented)."""
    return json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False)


def spec_json(spec: dict) -> str:
    """Compact JSON of a run specification (:meth:`~pqcheck.record.RunSpec.to_dict`), keys
    sorted: the ``run_spec`` column of the batch rows."""
    return json.dumps(spec, separators=(",", ":"), sort_keys=True, ensure_ascii=False,
                      allow_nan=False)


def batch_row_spec(row: dict, *, where: str = "row"):
    """The :class:`~pqcheck.record.RunSpec` of one row of a batch results table
    (:data:`pqcheck.run.batch.SCHEMA`), read as data, to check that capture again.

    Parameters
    ----------
    row : dict
        One row (e.g. ``table.to_pylist()[k]``) with ``schema_version`` and ``run_spec``.
    where : str
        How messages name the row.

    Raises
    ------
    InputError
        The row is of another schema version, or carries no run specification or one that
        does not validate.
    """
    version = row.get("schema_version")
    if version != SCHEMA_VERSION:
        raise InputError(f"a batch row of results schema version {version!r}; this pqcheck "
                         f"reads version {SCHEMA_VERSION} (run the batch again with this "
                         "version)", field=f"{where}.schema_version")
    try:
        spec = json.loads(row.get("run_spec") or "null")
    except ValueError as exc:
        raise InputError(f"run_spec is not JSON ({exc})", field=f"{where}.run_spec") from None
    return run_spec_of({"run_spec": spec}, where)


def read_document(doc, *, path=None, kinds=KINDS) -> dict:
    """Check that ``doc`` is a pqcheck results document this version reads.

    Parameters
    ----------
    doc : dict
        Parsed JSON.
    path : str or None
        Where it came from, for messages.
    kinds : tuple of str
        Kinds accepted.

    Returns
    -------
    dict
        ``doc`` itself.

    Raises
    ------
    InputError
        Not pqcheck results, another kind, or a schema version this pqcheck does not read.
    """
    tool = doc.get("tool") if isinstance(doc, dict) else None
    if not isinstance(tool, dict) or tool.get("name") != "pqcheck":
        raise InputError("not pqcheck results (no tool block naming pqcheck)", path=path)
    version = doc.get("schema_version", tool.get("schema"))
    if version != SCHEMA_VERSION:
        raise InputError(f"results of schema version {version!r}; this pqcheck reads version "
                         f"{SCHEMA_VERSION} (make them again with this version)", path=path,
                         field="schema_version")
    kind = tool.get("kind", "report")
    if kind not in kinds:
        raise InputError(f"a pqcheck {kind} document, not one of: {', '.join(kinds)}",
                         path=path, field="tool.kind")
    return doc


def run_spec_of(entry: dict, where: str):
    """The :class:`~pqcheck.record.RunSpec` recorded in ``entry`` (a document or one capture
    of a report), read as data.

    Raises
    ------
    InputError
        No run specification, or one that does not validate (naming ``where``.run_spec...).
    """
    from .record import RunSpec

    if not isinstance(entry.get("run_spec"), dict):
        raise InputError("the results record no run specification (run_spec), so the run "
                         "cannot be repeated; were they made by an older pqcheck?",
                         field=f"{where}.run_spec")
    try:
        return RunSpec.from_dict(entry["run_spec"])
    except InputError as exc:
        raise InputError(exc.problem, field=f"{where}.{exc.field}" if exc.field else where
                         ) from None


# --- the schema -------------------------------------------------------------------------------

_NUM = {"type": ["number", "null"]}
_STR = {"type": "string"}


def _part_schema(cls) -> dict:
    from .record import field_json_types

    props = {}
    for name, kinds in field_json_types(cls).items():
        kinds = kinds if isinstance(kinds, list) else [kinds]
        s: dict = {"type": kinds if len(kinds) > 1 else kinds[0]}
        if "array" in kinds:
            s["items"] = {"type": ["string", "number", "object"]}
        props[name] = s
    return {"type": "object", "properties": props, "required": sorted(props),
            "additionalProperties": False}


def _run_spec_schema() -> dict:
    from .record import _PART_TYPES, SPEC_VERSION, LimitSelection, RunSpec

    props: dict = {"version": {"const": SPEC_VERSION}}
    for f in dataclasses.fields(RunSpec):
        if f.name == "limits":
            props["limits"] = {"type": "array", "items": _part_schema(LimitSelection)}
        else:
            props[f.name] = _part_schema(_PART_TYPES[f.name])
    return {"type": "object", "properties": props, "required": sorted(props),
            "additionalProperties": False}


def _tool(kind: str) -> dict:
    return {"type": "object",
            "properties": {"name": {"const": "pqcheck"}, "version": _STR,
                           "kind": {"const": kind}, "schema": {"const": SCHEMA_VERSION}},
            "required": ["name", "version", "kind", "schema"]}


def _analysis_core() -> dict:
    harmonic = {"type": "object",
                "properties": {"order": {"type": "integer", "minimum": 1}, "rms": _NUM,
                               "percent_of_fundamental": _NUM, "phase_deg": _NUM,
                               "group_rms": _NUM, "subgroup_rms": _NUM,
                               "interharmonic_group_rms": _NUM},
                "required": ["order", "rms"]}
    channel = {"type": "object",
               "properties": {"name": _STR, "quantity": {"enum": ["current", "voltage"]},
                              "unit": _STR, "rms": _NUM, "fundamental_rms": _NUM,
                              "thd_percent": _NUM, "tdd_percent": _NUM,
                              "harmonics": {"type": "array", "items": harmonic}},
               "required": ["name", "quantity", "rms", "harmonics"]}
    capture = {"type": "object",
               "properties": {"source": _STR, "sha256": {"type": ["string", "null"]},
                              "sample_rate_hz": _NUM, "duration_s": _NUM},
               "required": ["source", "sha256"]}
    return {"capture": capture, "settings": {"type": "object"},
            "fundamental_hz": _NUM, "channels": {"type": "array", "items": channel},
            "findings": {"type": "array", "items": {"$ref": "#/$defs/finding"}}}


def results_schema() -> dict:
    """The JSON Schema (draft 2020-12) of every results document (see the module
    docstring)."""
    from .assess import VERDICTS

    verdict = {"enum": list(VERDICTS)}
    check = {"type": "object",
             "properties": {"table": _STR, "quantity": _STR,
                            "order": {"type": "integer"}, "channel": _STR,
                            "statistic": _STR, "measured": _NUM, "limit": _NUM, "unit": _STR,
                            "margin_percent": _NUM, "verdict": verdict},
             "required": ["table", "quantity", "measured", "limit", "unit", "verdict"]}
    assessment = {"verdict": verdict, "counts": {"type": "object"},
                  "checks": {"type": "array", "items": check},
                  "tables": {"type": "array", "items": {"type": "object", "required": [
                      "id", "source", "sha256"]}},
                  "notes": {"type": "array", "items": _STR}}
    finding = {"type": "object", "properties": {"code": _STR, "severity": _STR,
                                                "message": _STR},
               "required": ["code", "severity", "message"]}
    spec = {"$ref": "#/$defs/run_spec"}
    core = _analysis_core()
    analysis = {"type": "object",
                "properties": {"schema_version": {"const": SCHEMA_VERSION},
                               "tool": _tool("analysis"), **core, "run_spec": spec},
                "required": ["schema_version", "tool", "capture", "channels", "findings",
                             "run_spec"]}
    check_doc = {"type": "object",
                 "properties": {"schema_version": {"const": SCHEMA_VERSION},
                                "tool": _tool("check"), **assessment,
                                "capture": core["capture"], "findings": core["findings"],
                                "run_spec": spec},
                 "required": ["schema_version", "tool", "verdict", "checks", "tables",
                              "capture", "findings", "run_spec"]}
    capture_entry = {"type": "object",
                     "properties": {"id": _STR, "verdict": _STR,
                                    "analysis": {"type": "object", "properties": core,
                                                 "required": ["capture", "channels"]},
                                    "assessments": {"type": "array", "items": {
                                        "type": "object", "properties": assessment,
                                        "required": ["verdict", "checks", "tables"]}},
                                    "run_spec": spec},
                     "required": ["id", "verdict", "analysis", "assessments", "run_spec"]}
    report = {"type": "object",
              "properties": {"schema_version": {"const": SCHEMA_VERSION},
                             "tool": _tool("report"),
                             "report": {"type": "object", "required": ["id", "title"]},
                             "plan": {"type": ["object", "null"]}, "verdict": _STR,
                             "limit_tables": {"type": "array"},
                             "captures": {"type": "array", "items": capture_entry,
                                          "minItems": 1}},
              "required": ["schema_version", "tool", "report", "plan", "verdict",
                           "limit_tables", "captures"]}
    batch = {"type": "object",
             "properties": {"schema_version": {"const": SCHEMA_VERSION},
                            "tool": _tool("batch"), "run": {"type": "object"},
                            "summary": {"type": "object"}, "captures": {"type": "array"},
                            "run_spec": spec},
             "required": ["schema_version", "tool", "run", "summary", "captures", "run_spec"]}
    survey_capture = {"type": "object",
                      "properties": {"source": _STR, "sources": {"type": "array", "items": _STR},
                                     "sha256": {"type": ["string", "null"]},
                                     "sha256_per_file": {"type": "array", "items": _STR},
                                     "duration_s": _NUM, "kind": _STR},
                      "required": ["source", "sources", "sha256", "sha256_per_file",
                                   "duration_s", "kind"]}
    survey_section = {"type": "object", "required": [
        "origin", "sources", "sha256", "timezone", "start", "end", "duration_s", "levels",
        "statistics", "period_values", "availability", "worst_period"]}
    worst = {"type": ["object", "null"]}
    survey = {"type": "object",
              "properties": {"schema_version": {"const": SCHEMA_VERSION},
                             "tool": _tool("survey"), **assessment, "capture": survey_capture,
                             "survey": survey_section, "worst_period": worst,
                             "findings": core["findings"], "run_spec": spec},
              "required": ["schema_version", "tool", "verdict", "checks", "tables", "capture",
                           "survey", "worst_period", "findings", "run_spec"]}
    survey_entry = {"type": "object",
                    "properties": {"id": _STR, "kind": _STR,
                                   "sources": {"type": "array", "items": _STR},
                                   "sha256": {"type": "array", "items": _STR},
                                   "verdict": verdict, "analysis": {"type": "null"},
                                   "findings": core["findings"],
                                   "assessments": capture_entry["properties"]["assessments"],
                                   "run_spec": spec},
                    "required": ["id", "kind", "sources", "sha256", "verdict", "assessments",
                                 "run_spec"]}
    survey_report = {"type": "object",
                     "properties": {"schema_version": {"const": SCHEMA_VERSION},
                                    "tool": _tool("survey report"),
                                    "report": {"type": "object", "required": ["id", "title"]},
                                    "plan": {"type": "null"}, "verdict": verdict,
                                    "limit_tables": {"type": "array", "minItems": 1},
                                    "captures": {"type": "array", "items": survey_entry,
                                                 "minItems": 1, "maxItems": 1},
                                    "survey": survey_section, "worst_period": worst,
                                    "run_spec": spec},
                     "required": ["schema_version", "tool", "report", "plan", "verdict",
                                  "limit_tables", "captures", "survey", "worst_period",
                                  "run_spec"]}
    site_tool = _tool("site study")
    site_tool["additionalProperties"] = False
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": f"https://pqcheck.invalid/schemas/results-{SCHEMA_VERSION}.schema.json",
        "title": "pqcheck results",
        "description": "Every JSON document pqcheck writes: analysis, check, report, batch, "
                       "site study, survey and survey report (tool.kind names it). Numbers "
                       "are SI with the unit in the key; null where a value is not finite. "
                       "Generated by pqcheck.results.results_schema.",
        "oneOf": [{"$ref": f"#/$defs/{_def_name(k)}"} for k in KINDS],
        "$defs": {"schema_version": {"const": SCHEMA_VERSION}, "run_spec": _run_spec_schema(),
                  "study_spec": _study_spec_schema(), "finding": finding,
                  "analysis": analysis, "check": check_doc, "report": report, "batch": batch,
                  "site_study": _site_study_part(), "tool_site_study": site_tool,
                  "survey": survey, "survey_report": survey_report},
    }


def _def_name(kind: str) -> str:
    """The ``$defs`` entry of a document kind (``"site study"`` -> ``site_study``)."""
    return kind.replace(" ", "_")


def _study_spec_schema() -> dict:
    from .site import MAX_HEADROOM, SUMMATIONS, StudySpec

    d = _part_schema(StudySpec)
    d["properties"]["summation"] = {"enum": [None, *SUMMATIONS]}
    d["properties"]["max_headroom"].update(minimum=1, maximum=MAX_HEADROOM)
    return d


def _site_study_part() -> dict:
    """The site study's part of the schema, written by hand (its document has many fixed
    blocks) in ``pqcheck/schema/site_study.part.json``; it refers to ``run_spec``,
    ``study_spec`` and the ``tool`` block of this schema."""
    text = resources.files("pqcheck.schema").joinpath("site_study.part.json").read_text(
        encoding="utf-8")
    return json.loads(text)


def schema_for(kind: str) -> dict:
    """A schema that validates one document kind alone (the shipped schema's ``$defs`` and a
    reference to the kind's entry)."""
    if kind not in KINDS:
        raise ValueError(f"unknown document kind {kind!r}; one of: {', '.join(KINDS)}")
    shipped = shipped_schema()
    return {"$schema": shipped["$schema"], "$defs": shipped["$defs"],
            "$ref": f"#/$defs/{_def_name(kind)}"}


def shipped_schema() -> dict:
    """The schema as shipped in ``pqcheck/schema/results.schema.json``."""
    text = resources.files("pqcheck.schema").joinpath("results.schema.json").read_text(
        encoding="utf-8")
    return json.loads(text)


def _write_schema() -> str:
    from pathlib import Path

    path = Path(__file__).parent / "schema" / "results.schema.json"
    path.write_text(json.dumps(results_schema(), indent=2) + "\n", encoding="utf-8")
    return str(path)


if __name__ == "__main__":  # python -m pqcheck.results: write the shipped schema again
    print(_write_schema())
