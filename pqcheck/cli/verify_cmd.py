"""`pqcheck verify`: re-run the analysis recorded in a report and confirm every number."""

from __future__ import annotations

import json

import click

from .. import numfmt
from ._common import EXIT_FAIL, EXIT_OK, format_option, handle_errors, main

__all__: list = []


def _show(value) -> str:
    if isinstance(value, float):
        return numfmt.given(value)
    text = json.dumps(value, ensure_ascii=False) if not isinstance(value, str) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def render_verification(v, show: int = 50) -> str:
    """Text view: files and their SHA-256, then the first ``show`` differences, then the
    outcome."""
    lines = [f"Report     {v.report_id or '-'} ({v.source})"]
    for f in v.files:
        if f.found is None:
            state = "NOT FOUND"
        elif f.ok:
            state = "SHA-256 matches"
        else:
            state = (f"SHA-256 CHANGED (recorded {f.recorded_sha256[:16]}..., now "
                     f"{f.sha256[:16]}...)")
        lines.append(f"  {f.what}: {f.found or f.recorded_path}: {state}")
    for n in v.notes:
        lines.append(f"  note: {n}")
    lines.append(f"Compared   {v.compared} recorded values with a fresh run (no cache)")
    if v.differences:
        lines.append(f"Differences ({len(v.differences)}): path in the results, recorded, "
                     "recomputed")
        for d in v.differences[:show]:
            what = f" ({d.what})" if d.what else ""
            lines.append(f"  {d.path}{what}: recorded {_show(d.recorded)}, recomputed "
                         f"{_show(d.recomputed)}")
        if len(v.differences) > show:
            lines.append(f"  ... and {len(v.differences) - show} more (--show N, or "
                         "--format json for all)")
    if v.identical:
        lines.append("IDENTICAL: every file has its recorded SHA-256 and every number and "
                     "verdict matches.")
    else:
        changed = sum(1 for f in v.files if not f.ok)
        lines.append(f"DIFFERENT: {len(v.differences)} value(s) differ"
                     + (f", {changed} file(s) changed or missing" if changed else "") + ".")
    return "\n".join(lines) + "\n"


@main.command("verify")
@click.argument("report", type=click.Path(dir_okay=False), metavar="REPORT.pdf_OR_RESULTS.json")
@click.option("--search", "search", multiple=True, type=click.Path(file_okay=False),
              metavar="DIR", help="Another folder to look for the captures, limit tables and "
                                  "plan in (repeatable). The report's own folder is searched.")
@click.option("--rel-tol", "rel_tol", type=click.FloatRange(min=0.0), default=1e-9,
              show_default=True, help="Relative tolerance for numbers.")
@click.option("--abs-tol", "abs_tol", type=click.FloatRange(min=0.0), default=1e-12,
              show_default=True, help="Absolute tolerance for numbers near zero.")
@click.option("--show", type=click.IntRange(min=0), default=50, show_default=True,
              metavar="N", help="Differences listed in the table view.")
@format_option("verify")
@handle_errors
def verify_cmd(report, search, rel_tol, abs_tol, show, fmt):
    """Re-run the analysis and assessment recorded in REPORT (a pqcheck PDF, whose attached
    results.json is read, or the results JSON) and confirm that every number and verdict
    matches.

    The captures, limit tables and plan are found by their recorded paths (or in the report's
    folder, or a --search folder) and checked by SHA-256; the analysis runs again with the
    recorded settings and selectors, without the cache. Each difference is listed with its
    place in the results, the recorded and the recomputed value.

    Exit code: 0 identical, 1 a value differs or a file's SHA-256 changed, 2 bad input.
    """
    from ..run.verify import verify

    v = verify(report, search=search, rel_tol=rel_tol, abs_tol=abs_tol)
    if fmt == "json":
        click.echo(json.dumps(v.to_dict(), indent=2, ensure_ascii=False, default=str))
    else:
        click.echo(render_verification(v, show), nl=False)
    raise click.exceptions.Exit(EXIT_OK if v.identical else EXIT_FAIL)
