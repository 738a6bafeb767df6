"""The one versioned results schema: every JSON document pqcheck writes, and reading them back.

Documents
    ``analysis`` (``pqcheck analyze`` in JSON format), ``check`` (``pqcheck check`` in JSON
    format), ``report`` (the report's JSON file and the PDF's ``results.json`` attachment) and
    ``batch`` (the summary of ``pqcheck batch`` in JSON format). Each carries
    ``schema_version`` (:data:`SCHEMA_VERSION`), a ``tool`` block naming pqcheck, its version
    and the document's ``kind``, and the run specification (:class:`pqcheck.record.RunSpec`,
    ``run_spec``; in a report one per capture, in a batch the template every capture was
    checked with). The site study writes its own document (:mod:`pqcheck.site`).

The published schema
    :func:`results_schema` is the JSON Schema (draft 2020-12) of these documents; the
    ``run_spec`` part is generated from the dataclass fields of :mod:`pqcheck.record`, so a
    new field is described with no second edit. The same schema ships in
    ``pqcheck/schema/results.schema.json``; after adding a field, write it again with
    ``python -m pqcheck.results`` (a test fails until the shipped file matches).

Reading back
    :func:`read_document` checks that a document is pqcheck results of a schema version this
    pqcheck reads, and :func:`run_spec_of` reads a recorded run specification as data.
"""

from __future__ import annotations

import dataclasses
import json
from importlib import resources

from . import __version__
from .errors import InputError
from .export import SCHEMA_VERSION  # version of the documents (1: before run_spec)

__all__ = ["SCHEMA_VERSION", "KINDS", "tool_block", "analysis_document", "check_document",
           "batch_document", "read_document", "run_spec_of", "batch_row_spec", "spec_json",
           "results_schema", "shipped_schema", "dumps"]


KINDS = ("analysis", "check", "report", "batch")


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
                               "group_rms": _NUM, "subgroup_rms": _NUM},
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
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": f"https://pqcheck.invalid/schemas/results-{SCHEMA_VERSION}.schema.json",
        "title": "pqcheck results",
        "description": "Every JSON document pqcheck writes except the site study (its own "
                       "schema): analysis, check, report and batch. Numbers are SI with the "
                       "unit in the key; null where a value is not finite. Generated by "
                       "pqcheck.results.results_schema.",
        "oneOf": [{"$ref": f"#/$defs/{k}"} for k in KINDS],
        "$defs": {"run_spec": _run_spec_schema(), "finding": finding, "analysis": analysis,
                  "check": check_doc, "report": report, "batch": batch},
    }


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
