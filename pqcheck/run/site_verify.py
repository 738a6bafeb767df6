"""Re-verification of a site study: re-run it from its recorded inputs and compare.

A site study's results (the JSON file of ``pqcheck site``, or the ``results.json``
attached to its PDF) record the site file with its SHA-256, every unit's data file and the
limit table with theirs, the summation used and the headroom range searched.
:func:`verify_site` finds the site file again (as recorded, then beside the document being
verified, then in each ``search`` folder; the first whose SHA-256 matches is used), loads it
(which hashes every unit's file and the table again), re-runs the study and compares the two
documents number by number with :func:`pqcheck.run.verify.compare_documents`. For a PDF, the
report is also rendered again with the recorded title, operator, id and time, and the text of
every page is compared line by line with the PDF's, so an edit of a printed number is caught
even when the attachment was left alone.

:func:`pqcheck.run.verify.verify` hands a site study here (:func:`is_site_document`).
"""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import InputError, PqcheckError
from .verify import (
    ABS_TOL,
    REL_TOL,
    FileCheck,
    Verification,
    _attachment,
    _locate,
    _page_texts,
    compare_documents,
    compare_page_texts,
)

__all__ = ["SITE_KIND", "is_site_document", "verify_site"]

#: ``tool.kind`` of a site study's results.
SITE_KIND = "site study"


class _NotFound(Exception):
    pass


def _read(path: Path) -> tuple:
    """(document or None, the PDF's bytes or None, the results' bytes or None)."""
    try:
        data = path.read_bytes()
    except OSError:
        return None, None, None
    pdf = None
    if data.startswith(b"%PDF"):
        pdf = data
        try:
            data = _attachment(data, path)
        except InputError:
            return None, None, None
    try:
        doc = json.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, ValueError):
        return None, None, None
    return doc, pdf, data


def _is_site(doc) -> bool:
    return isinstance(doc, dict) and isinstance(doc.get("tool"), dict) \
        and doc["tool"].get("name") == "pqcheck" and doc["tool"].get("kind") == SITE_KIND


def is_site_document(path) -> bool:
    """True when ``path`` is a site study's results JSON or a site study PDF."""
    p = Path(path)
    if not p.is_file():
        return False
    return _is_site(_read(p)[0])


def verify_site(path, *, search=(), rel_tol: float = REL_TOL,
                abs_tol: float = ABS_TOL) -> Verification:
    """Re-run the site study recorded in a PDF or results JSON and compare the results.

    Parameters
    ----------
    path : str or Path
        The site study PDF (its ``results.json`` attachment is read) or its results JSON.
    search : sequence of str or Path
        More folders to look for the site file in.
    rel_tol, abs_tol : float
        Tolerances for numbers. [unitless], [unit of each value]

    Returns
    -------
    Verification
        ``identical`` when every input has its recorded SHA-256 and every value (and, for a
        PDF, every line of text) matches.

    Raises
    ------
    InputError
        The document is not a site study, the site file is not found, or the recorded study
        no longer runs (the message says what and where it was looked for).
    """
    from ..results import dumps, read_document, site_document, study_spec_of
    from ..site import study_site
    from .site import load_site

    p = Path(path)
    recorded, pdf, attached = _read(p)
    if not _is_site(recorded):
        raise InputError("not the results of a pqcheck site study", path=p)
    read_document(recorded, path=str(p), kinds=(SITE_KIND,))
    spec = study_spec_of(recorded)
    bases = [p.resolve().parent] + [Path(s) for s in search]
    try:
        inputs = {(i["what"], i["name"]): i for i in recorded["inputs"]}
        site_rec = next(i for i in recorded["inputs"] if i["what"] == "site file")
        site_path, sha = _locate(str(recorded["site"]["path"]), site_rec["sha256"], bases)
        if site_path is None:
            site_path, sha = _locate(site_rec["path"], site_rec["sha256"], bases)
        if site_path is None:
            raise _NotFound(f"site file {site_rec['path']!r} not found (looked for as recorded "
                            f"and in {', '.join(map(str, bases))}); give the folder that holds it as a "
                            "search folder")
        files = [FileCheck("site file", site_rec["path"], str(site_path), site_rec["sha256"],
                           sha)]
        site = load_site(site_path)
        study = study_site(site, **spec.study_kwargs())
        for what, name, path_now, sha_now in study.inputs:
            if what == "site file":
                continue
            rec = inputs.get((what, name))
            files.append(FileCheck(f"{what} {name!r}", rec["path"] if rec else "",
                                   path_now or "bundled", rec["sha256"] if rec else "",
                                   sha_now))
        recomputed = json.loads(dumps(site_document(study, spec=spec,
                                                    report=recorded.get("report"))))
    except _NotFound as exc:
        raise InputError(str(exc), path=p) from None
    except PqcheckError as exc:
        raise InputError(f"cannot re-run the recorded site study: {exc}", path=p) from None
    except (KeyError, TypeError, ValueError, AttributeError, IndexError,
            StopIteration) as exc:
        raise InputError(f"the recorded site study lacks what a re-run needs "
                         f"({type(exc).__name__}: {exc}); was the JSON edited by hand?",
                         path=p) from None
    diffs, n = compare_documents(recorded, recomputed, rel_tol=rel_tol, abs_tol=abs_tol)
    notes = []
    v_rec = recorded["tool"].get("version")
    v_now = recomputed["tool"].get("version")
    if v_rec != v_now:
        notes.append(f"recorded with pqcheck {v_rec}, recomputed with pqcheck {v_now}")
    if pdf is not None:
        if v_rec != v_now:
            notes.append("the PDF's text was not compared (made by another pqcheck version)")
        else:
            text_diffs, lines = _pdf_differences(pdf, attached, study, recorded)
            diffs += text_diffs
            n += lines
    return Verification(source=str(p), report_id=str((recorded.get("report") or {}).get(
        "id", "")), files=tuple(files), differences=tuple(diffs), compared=n,
        notes=tuple(notes))


def _pdf_differences(pdf: bytes, attached: bytes, study, recorded: dict) -> tuple:
    """Render the site report again with the recorded metadata and the PDF's own attachment,
    and compare the text of each page. Returns (differences, lines compared)."""
    from ..report.site_pdf import render_site_pdf

    return compare_page_texts(_page_texts(pdf), _page_texts(render_site_pdf(
        study, report=recorded.get("report") or {}, results_json=attached)))
