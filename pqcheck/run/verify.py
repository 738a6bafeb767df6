"""Re-verification of a report: recompute the recorded results and compare, number by number.

A report's results JSON (its JSON file, or the ``results.json`` attached to the PDF)
records what was analysed and how: the SHA-256 of every capture, limit table and plan, and
the run specification of every capture (reader options, channel map, analysis settings, the
limit tables with their selectors and reference values, the report details). :func:`verify` finds those files again, checks their SHA-256, re-runs the analysis and
the assessment without any cache, formats the new results exactly as the report did and
compares the two documents: every number within a tight relative tolerance (the computation is
deterministic, so only the last bits may differ), every verdict, count, finding and text
exactly.

Finding the files
    A path is tried as recorded (relative paths against the current folder), then against the
    folder of the report or JSON being verified (``path`` as written, then just its file name),
    then in each ``search`` folder. Among the files found, the first whose SHA-256 matches the
    record is used; when none matches, the first found is used and the change is reported. A
    bundled limit table is also looked up by its id.

How it re-runs
    Every capture of the results carries its run specification (``run_spec``,
    :class:`pqcheck.record.RunSpec`), read back as data. A report made from a plan is re-run
    from the plan (:func:`pqcheck.run.plan.load_plan`, :func:`pqcheck.run.build.run_plan`).
    A report of one capture is re-run from its recorded run specification, with the capture
    and limit tables where they were found, through the same
    :func:`pqcheck.run.check.check_capture` that made it.

What is not compared as a result
    The ``report`` block (who and when) is checked against what the recorded report details
    and plan make of it (title, names, a generated report id); the time of analysis and the
    command are records, not results. File locations (``source`` and ``path``) are not compared: the
    files may have moved, and their SHA-256 are compared instead. A different pqcheck version
    is reported as a note.

The PDF itself
    When a PDF is verified, the report is also rendered again from the recomputed results with
    the recorded title, names, report id and time, and the text of every page is compared line
    by line with the text of the PDF given: an edit of the visible report (a verdict, a
    number in a table) is caught even when the attached results were left alone. (Charts are
    drawn from the same results, so they are covered by the comparison of the numbers.)
"""

from __future__ import annotations

import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError, PqcheckError

__all__ = ["Difference", "FileCheck", "Verification", "read_results", "verify",
           "compare_documents", "REL_TOL", "ABS_TOL"]

REL_TOL = 1e-9
"""Default relative tolerance for numbers (the analysis is deterministic). [unitless]"""
ABS_TOL = 1e-12
"""Default absolute tolerance, for values that are zero up to rounding. [unit of the value]"""

_SKIP_KEYS = {"source", "path"}


@dataclass(frozen=True)
class Difference:
    """One value that differs between the recorded and the recomputed results.

    Attributes
    ----------
    path : str
        Where in the results document, e.g. ``captures[0].assessments[0].checks[3].measured``.
    recorded, recomputed : object
        The two values (``"<missing>"`` when one side lacks the key).
    what : str
        A readable label of the item, e.g. ``"check ia I5"``, ``"order 5"``.
    """

    path: str
    recorded: object
    recomputed: object
    what: str = ""

    def to_dict(self) -> dict:
        return {"path": self.path, "recorded": self.recorded, "recomputed": self.recomputed,
                "what": self.what}


@dataclass(frozen=True)
class FileCheck:
    """An input file of the report, found again and hashed.

    Attributes
    ----------
    what : str
        ``"capture 'c1'"``, ``"limit table 'ieee519-2022'"`` or ``"plan"``.
    recorded_path : str
        The path in the results.
    found : str or None
        Where it was found (None: not found).
    recorded_sha256, sha256 : str
        Recorded and current SHA-256 (hex; empty when unknown).
    """

    what: str
    recorded_path: str
    found: str | None
    recorded_sha256: str
    sha256: str = ""

    @property
    def ok(self) -> bool:
        """Found, and its SHA-256 is the recorded one."""
        return self.found is not None and self.sha256 == self.recorded_sha256

    def to_dict(self) -> dict:
        return {"what": self.what, "recorded_path": self.recorded_path, "found": self.found,
                "recorded_sha256": self.recorded_sha256, "sha256": self.sha256, "ok": self.ok}


@dataclass(frozen=True)
class Verification:
    """The outcome of :func:`verify`.

    Attributes
    ----------
    source : str
        The PDF or JSON verified.
    report_id : str
    files : tuple of FileCheck
    differences : tuple of Difference
    compared : int
        Number of values compared. [unitless]
    notes : tuple of str
    """

    source: str
    report_id: str
    files: tuple
    differences: tuple
    compared: int
    notes: tuple = field(default=())

    @property
    def identical(self) -> bool:
        """Every file has its recorded SHA-256 and every value matches."""
        return not self.differences and all(f.ok for f in self.files)

    def to_dict(self) -> dict:
        return {"source": self.source, "report_id": self.report_id,
                "identical": self.identical, "compared": self.compared,
                "files": [f.to_dict() for f in self.files],
                "differences": [d.to_dict() for d in self.differences],
                "notes": list(self.notes)}


# ---- reading --------------------------------------------------------------------------------


def read_results(path) -> dict:
    """The results document of a report: a results JSON file, or the ``results.json``
    attached to a pqcheck PDF.

    Raises
    ------
    InputError
        Missing or unreadable file, a PDF without the attachment, text that is not JSON, or a
        JSON document that is not pqcheck results.
    """
    return _load(path)[0]


def _load(path) -> tuple:
    """(results document, the PDF's bytes or None, the results' bytes)."""
    p = Path(path)
    try:
        data = p.read_bytes()
    except FileNotFoundError:
        raise InputError("file not found; give the report PDF or its results JSON",
                         path=p) from None
    except IsADirectoryError:
        raise InputError("is a folder; give the report PDF or its results JSON",
                         path=p) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror or exc}", path=p) from None
    pdf = None
    if data.startswith(b"%PDF"):
        pdf = data
        data = _attachment(data, p)
    try:
        doc = json.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, ValueError) as exc:
        raise InputError(f"not a PDF and not a results JSON ({exc}); give the report PDF or "
                         "the JSON file written by pqcheck report", path=p) from None
    from ..results import read_document

    try:
        read_document(doc, path=str(p), kinds=("report",))
    except InputError as exc:
        raise InputError(f"{exc.problem}; give the report PDF or the JSON file written by "
                         "pqcheck report", path=p, field=exc.field) from None
    if not (isinstance(doc.get("captures"), list) and doc["captures"]):
        raise InputError("not the results of a pqcheck report (no captures); give the report "
                         "PDF or the JSON file written by pqcheck report", path=p)
    return doc, pdf, data


def _attachment(data: bytes, p: Path) -> bytes:
    from pypdf import PdfReader
    from pypdf.errors import PyPdfError

    try:
        files = dict(PdfReader(io.BytesIO(data)).attachments)
    except (PyPdfError, ValueError, KeyError, TypeError, OSError) as exc:
        raise InputError(f"the PDF cannot be read ({exc})", path=p) from None
    found = files.pop("results.json", None)
    if not found:
        raise InputError("the PDF carries no results.json attachment; was it made by pqcheck "
                         "report? Give the results JSON instead", path=p)
    # a pqcheck report carries exactly one file: anything else was added after it was made
    if files or len(found) != 1:
        extra = sorted(files) or ["a second results.json"]
        raise InputError(f"the PDF carries an attachment pqcheck does not write "
                         f"({', '.join(map(repr, extra))}); it was changed after it was made "
                         "and cannot be verified", path=p)
    return found[0]


# ---- finding files --------------------------------------------------------------------------


def _sha256(path: Path, capture: bool) -> str:
    """SHA-256 as the record holds it: a capture by the reader's rule
    (:func:`pqcheck.readers.capture_sha256`: COMTRADE .cfg + .dat, .npy + side-car), any
    other file by its bytes."""
    from ..readers import capture_sha256, file_sha256

    return capture_sha256(path) if capture else file_sha256(path)


def _candidates(recorded: str, bases) -> list:
    rec = Path(recorded)
    out = [rec]
    for b in bases:
        if not rec.is_absolute():
            out.append(b / rec)
        out.append(b / rec.name)
    seen, unique = set(), []
    for c in out:
        key = str(c)
        if key not in seen:
            seen.add(key)
            unique.append(c)
    return unique


def _locate(recorded: str, sha: str, bases, *, capture: bool = False) -> tuple:
    """(path, its SHA-256) of the best candidate, or (None, "")."""
    found = []
    for c in _candidates(recorded, bases):
        try:
            if c.is_file():
                digest = _sha256(c, capture)
                if digest == sha:
                    return c, digest
                found.append((c, digest))
        except (OSError, PqcheckError):
            continue
    return found[0] if found else (None, "")


# ---- re-running -----------------------------------------------------------------------------


def _table_for(rec: dict, bases, files: list) -> str:
    """Where the limit table recorded as ``rec`` (an assessment's ``tables[0]``) is now: a
    path, or the bundled id when the bundled table is the recorded one."""
    from ..limits import bundled_ids, load_table

    src, sha, tid = rec.get("source") or "", rec.get("sha256") or "", rec.get("id") or ""
    where, digest = _locate(src, sha, bases) if src else (None, "")
    chosen = None
    if where is not None and digest == sha:
        chosen = str(where)
    elif tid.casefold() in bundled_ids():
        bundled = load_table(tid)
        if bundled.sha256 == sha or where is None:
            chosen, where, digest = tid, Path(bundled.source), bundled.sha256
    if chosen is None and where is not None:
        chosen = str(where)
    files.append(FileCheck(f"limit table {tid!r}", src, None if where is None else str(where),
                           sha, digest))
    if chosen is None:
        raise InputError(f"limit table {tid!r} not found (recorded at {src}); put it next to "
                         "the report or give its folder with `search`", field="limit_tables")
    return chosen


def _recorded_spec(cap_doc: dict, where: str):
    """The :class:`~pqcheck.record.RunSpec` recorded with a capture (read as data)."""
    from ..results import run_spec_of

    return run_spec_of(cap_doc, where)


def _rerun_capture(doc: dict, bases, files: list):
    from dataclasses import replace

    from .check import check_capture

    cap_doc = doc["captures"][0]
    spec = _recorded_spec(cap_doc, "captures[0]")
    rec = cap_doc["analysis"]["capture"]
    where, digest = _locate(rec["source"], rec["sha256"], bases, capture=True)
    files.append(FileCheck(f"capture {cap_doc.get('id', '')!r}", rec["source"],
                           None if where is None else str(where), rec["sha256"], digest))
    if where is None:
        raise InputError(f"capture file not found (recorded as {rec['source']}); put it next "
                         "to the report or give its folder with `search`",
                         field=f"captures[0] ({cap_doc.get('id', '')})")
    recorded_tables = [t for a in cap_doc.get("assessments") or [] for t in a.get("tables") or []]
    if len(recorded_tables) != len(spec.limits):
        raise InputError(f"the run specification names {len(spec.limits)} limit tables, the "
                         f"results {len(recorded_tables)}; was the JSON edited by hand?",
                         field="captures[0].run_spec.limits")
    limits = []
    for sel, t in zip(spec.limits, recorded_tables):
        table = _table_for(t, bases, files)
        limits.append(replace(sel, table=table))
    spec = replace(spec, limits=tuple(limits)).with_capture(where)
    run = check_capture(spec, cache=None, id=cap_doc.get("id") or "capture",
                        load_point=cap_doc.get("load_point") or "",
                        load_percent=cap_doc.get("load_percent"))
    return (run,), None


def _rerun_plan(doc: dict, bases, files: list):
    from .build import run_plan
    from .plan import load_plan

    rec = doc["plan"]
    where, digest = _locate(rec.get("path") or "", rec.get("sha256") or "", bases)
    files.append(FileCheck("plan", rec.get("path") or "", None if where is None else str(where),
                           rec.get("sha256") or "", digest))
    if where is None:
        raise InputError(f"test plan not found (recorded as {rec.get('path')}); put it next to "
                         "the report or give its folder with `search`", field="plan")
    plan = load_plan(where)
    details = _recorded_spec(doc["captures"][0], "captures[0]").report
    return run_plan(plan, cache=None, report=details), plan


def _meta_differences(recorded: dict, runs, plan) -> list:
    """The report block against what the recorded report details (and plan) make of it:
    title, names and a generated report id follow from them, so an edit shows."""
    from datetime import datetime

    from ..report.job import ReportMeta, make_report_id

    rep = recorded.get("report")
    if not isinstance(rep, dict) or not runs or runs[0].spec is None:
        return []
    d = runs[0].spec.report
    expect = {
        "title": d.title or (plan.title if plan is not None and plan.title
                             else ReportMeta().title),
        "equipment": d.equipment if d.equipment is not None else (
            plan.equipment.name if plan is not None else ""),
        "site": d.site if d.site is not None else (plan.site.name if plan is not None else ""),
        "operator": d.operator or (plan.conditions.operator if plan is not None else "")
        or "",
    }
    rid = d.report_id or (plan.report_id if plan is not None else "")
    if not rid:
        try:
            created = datetime.fromisoformat(rep["time_of_analysis_utc"])
        except (KeyError, TypeError, ValueError):
            created = None
        if created is not None:
            rid = make_report_id([r.result.sha256 for r in runs]
                                 + [plan.sha256 if plan is not None else ""], created)
    if rid:
        expect["id"] = rid
    return [Difference(f"report.{k}", rep.get(k, "<missing>"), v, "report details")
            for k, v in expect.items() if rep.get(k, "<missing>") != v]


def _as_recorded_paths(recorded: dict, runs, plan) -> tuple:
    """The re-run with file paths written as the report recorded them (the files may have been
    found elsewhere), so the report renders the same text. Only labels change."""
    from dataclasses import replace

    tables = {t.get("id"): t.get("source") for t in recorded.get("limit_tables") or []
              if isinstance(t, dict)}
    out = []
    for run, cap in zip(runs, recorded["captures"]):
        src = _get(cap, "analysis", "capture", "source")
        result = run.result if not isinstance(src, str) else replace(run.result, source=src)
        assessments = tuple(
            replace(a, tables=tuple(
                replace(t, source=tables[t.table_id]) if t.table_id in tables else t
                for t in a.tables))
            for a in run.assessments)
        spec = run.spec
        rec_spec = cap.get("run_spec") if isinstance(cap, dict) else None
        if spec is not None and isinstance(rec_spec, dict):
            spec = replace(spec, reader=replace(spec.reader, path=str(
                _get(rec_spec, "reader", "path") or spec.reader.path)))
            rec_lims = rec_spec.get("limits") if isinstance(rec_spec.get("limits"), list) else []
            if len(rec_lims) == len(spec.limits):
                spec = replace(spec, limits=tuple(
                    replace(sel, table=str(_get(r, "table") or sel.table))
                    for sel, r in zip(spec.limits, rec_lims)))
        out.append(replace(run, result=result, assessments=assessments, spec=spec))
    path = _get(recorded, "plan", "path")
    if plan is not None and isinstance(path, str):
        plan = replace(plan, path=Path(path))
    return tuple(out), plan


def _file_checks_from(recorded: dict, runs) -> list:
    """Capture and table checks of a plan re-run (the plan located the files)."""
    out = []
    now = {}
    for k, (cap, run) in enumerate(zip(recorded["captures"], runs)):
        rec = _get(cap, "analysis", "capture") or {}
        out.append(FileCheck(f"capture {cap.get('id', k)!r}", rec.get("source", ""),
                             run.result.source, rec.get("sha256", ""), run.result.sha256 or ""))
        for a in run.assessments:
            for t in a.tables:
                now.setdefault(t.table_id, t)
    for t in recorded.get("limit_tables") or []:
        n = now.get(t.get("id"))
        out.append(FileCheck(f"limit table {t.get('id')!r}", t.get("source", ""),
                             None if n is None else n.source, t.get("sha256", ""),
                             "" if n is None else n.sha256 or ""))
    return out


# ---- comparing ------------------------------------------------------------------------------


def _label(item: dict) -> str:
    if "channel" in item and "quantity" in item:
        q = item["quantity"]
        return f"check {item['channel']} " + (f"h{item.get('order')}" if q == "harmonic"
                                              else str(q))
    if "order" in item and "rms" in item:
        return f"order {item['order']}"
    if "code" in item and "severity" in item:
        return f"finding {item['code']}"
    for key in ("name", "id", "phase"):
        if isinstance(item.get(key), str) and item[key]:
            return f"{key} {item[key]}"
    return ""


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def _same_number(a, b, key: str, rel_tol: float, abs_tol: float) -> bool:
    a, b = float(a), float(b)
    if key.endswith("_deg"):  # angles: compare on the circle
        d = (a - b + 180.0) % 360.0 - 180.0
        return abs(d) <= max(abs_tol, rel_tol * 180.0)
    return math.isclose(a, b, rel_tol=rel_tol, abs_tol=abs_tol)


def compare_documents(recorded, recomputed, *, rel_tol: float = REL_TOL,
                      abs_tol: float = ABS_TOL) -> tuple:
    """Compare two results documents value by value.

    Returns
    -------
    (list of Difference, int)
        The differences, in document order, and the number of values compared.
    """
    diffs: list = []
    count = [0]

    def walk(a, b, path: str, key: str, what: str):
        if isinstance(a, dict) and isinstance(b, dict):
            what = _label(a) or what
            for k in list(a) + [k for k in b if k not in a]:
                if k in _SKIP_KEYS or (path == "" and k == "report"):
                    continue
                sub = f"{path}.{k}" if path else k
                if k not in a or k not in b:
                    diffs.append(Difference(sub, a.get(k, "<missing>"),
                                            b.get(k, "<missing>"), what))
                    continue
                if k == "version" and path.endswith("tool"):
                    continue
                walk(a[k], b[k], sub, k, what)
            return
        if isinstance(a, list) and isinstance(b, list):
            if len(a) != len(b):
                diffs.append(Difference(path, f"{len(a)} items", f"{len(b)} items", what))
            for i, (x, y) in enumerate(zip(a, b)):
                walk(x, y, f"{path}[{i}]", key, what)
            return
        count[0] += 1
        if _is_number(a) and _is_number(b):
            if not _same_number(a, b, key, rel_tol, abs_tol):
                diffs.append(Difference(path, a, b, what))
        elif a != b:
            diffs.append(Difference(path, a, b, what))

    walk(recorded, recomputed, "", "", "")
    return diffs, count[0]


def _page_texts(pdf: bytes) -> list:
    from pypdf import PdfReader

    return [(page.extract_text() or "").splitlines()
            for page in PdfReader(io.BytesIO(pdf)).pages]


def _pdf_text_differences(pdf: bytes, attached: bytes, recorded: dict, runs, plan,
                          notes: list) -> tuple:
    """Render the report again from the recomputed runs with the recorded metadata and compare
    the text of each page with the PDF's. Returns (differences, lines compared).

    The new rendering embeds the PDF's own attachment (``attached``), so the SHA-256 of the
    results printed on its pages is that of the data that travel with the PDF: the numbers
    themselves were compared with the recomputation already, within the tolerance, and the
    last bits of a float may differ from one machine to another."""
    from datetime import datetime

    from ..report.job import ReportJob, ReportMeta
    from ..report.pdf import render_pdf
    r = recorded.get("report")
    try:
        meta = ReportMeta(title=str(r["title"]), equipment=str(r["equipment"]),
                          site=str(r["site"]), operator=str(r["operator"]),
                          report_id=str(r["id"]),
                          created_utc=datetime.fromisoformat(r["time_of_analysis_utc"]),
                          command=str(r.get("command") or ""))
        if runs and runs[0].spec is not None:  # what the recorded report details asked for
            from dataclasses import replace as _replace

            d = runs[0].spec.report
            meta = _replace(meta, detail=d.detail or "full", test_date=d.test_date or "")
    except (KeyError, TypeError, ValueError, AttributeError):
        notes.append("the PDF's text was not compared (the results lack the report's title, "
                     "names, id or time)")
        return [], 0
    job = ReportJob(meta=meta, runs=runs, plan=plan)
    return compare_page_texts(_page_texts(pdf),
                              _page_texts(render_pdf(job, results_json=attached)))


def compare_page_texts(old, new) -> tuple:
    """Line differences between the recorded and the re-rendered pages' texts (one list
    per page), and the number of lines compared: ``(differences, count)``."""
    import difflib

    out, count = [], 0
    if len(old) != len(new):
        out.append(Difference("pdf pages", f"{len(old)} pages", f"{len(new)} pages",
                              "visible report"))
    for k, (a, b) in enumerate(zip(old, new), start=1):
        count += max(len(a), len(b))
        sm = difflib.SequenceMatcher(a=a, b=b, autojunk=False)
        for tag, i1, i2, j1, j2 in sm.get_opcodes():
            if tag == "equal":
                continue
            for x, y in _zip_longest_lines(a[i1:i2], b[j1:j2]):
                out.append(Difference(f"pdf page {k}", x, y, "visible report"))
    return out, count


def _zip_longest_lines(a: list, b: list):
    """Pairs of lines, ``"<missing>"`` where one side is shorter."""
    from itertools import zip_longest

    return zip_longest(a, b, fillvalue="<missing>")


def _get(doc, *keys):
    """``doc[k1][k2]...`` or None when a level is missing or not a mapping."""
    for k in keys:
        if not isinstance(doc, dict):
            return None
        doc = doc.get(k)
    return doc


# ---- the entry point ------------------------------------------------------------------------


def verify(path, *, search=(), rel_tol: float = REL_TOL, abs_tol: float = ABS_TOL) -> Verification:
    """Re-run the analysis and assessment recorded in a report and compare the results.

    Parameters
    ----------
    path : str or Path
        The report PDF (its ``results.json`` attachment is read) or a results JSON.
    search : sequence of str or Path
        More folders to look for captures, limit tables and plans in.
    rel_tol, abs_tol : float
        Tolerances for numbers. [unitless], [unit of each value]

    Returns
    -------
    Verification

    Raises
    ------
    InputError
        The report cannot be read, or a file it needs is not found, or the recorded options
        no longer run (the message names what and says where it was looked for).
    """
    from ..report.job import ReportJob, ReportMeta
    from ..report.results import job_json
    from .site_verify import is_site_document, verify_site

    if is_site_document(path):
        return verify_site(path, search=search, rel_tol=rel_tol, abs_tol=abs_tol)
    p = Path(path)
    recorded, pdf, attached = _load(p)
    origin = p.resolve().parent
    bases = [origin] + [Path(s) for s in search]
    files: list = []
    notes: list = []
    try:
        if recorded.get("plan"):
            runs, plan = _rerun_plan(recorded, bases, files)
        else:
            runs, plan = _rerun_capture(recorded, bases, files)
        meta_diffs = _meta_differences(recorded, runs, plan)
        if plan is not None:
            files += _file_checks_from(recorded, runs)
        runs, plan = _as_recorded_paths(recorded, runs, plan)
        job = ReportJob(meta=ReportMeta(), runs=runs, plan=plan)
        recomputed = json.loads(job_json(job))
    except PqcheckError as exc:
        if isinstance(exc, InputError):
            raise InputError(f"cannot re-run the recorded analysis: {exc.location_message()}",
                             path=p) from None
        raise
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as exc:
        raise InputError(f"the recorded results lack what a re-run needs ({type(exc).__name__}: "
                         f"{exc}); was the JSON edited by hand?", path=p) from None
    diffs, n = compare_documents(recorded, recomputed, rel_tol=rel_tol, abs_tol=abs_tol)
    diffs = meta_diffs + diffs
    v_rec = _get(recorded, "tool", "version")
    v_now = _get(recomputed, "tool", "version")
    if v_rec != v_now:
        notes.append(f"recorded with pqcheck {v_rec}, recomputed with pqcheck {v_now}")
    if pdf is not None:
        if v_rec != v_now:
            notes.append("the PDF's text was not compared (made by another pqcheck version)")
        else:
            text_diffs, lines = _pdf_text_differences(pdf, attached, recorded, runs, plan,
                                                      notes)
            diffs += text_diffs
            n += lines
    return Verification(source=str(p), report_id=str(_get(recorded, "report", "id") or ""),
                        files=tuple(files), differences=tuple(diffs), compared=n,
                        notes=tuple(notes))
