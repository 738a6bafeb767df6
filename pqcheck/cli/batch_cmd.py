"""`pqcheck batch`: check many captures against limit tables, into one tidy results table."""

from __future__ import annotations

import os
import sys

import click

from .. import numfmt
from ._common import fail_usage, format_option, handle_errors, main, output_option
from ._fields import cli_text, spec_from_options
from ._limits import limit_options
from .analyze import capture_options

__all__ = ["render_summary"]

_MAX_ERRORS = 20


_MAX_NAMED = 10


def _wrap(text: str, first: str, rest: str) -> list:
    import shutil
    import textwrap

    width = max(72, min(110, shutil.get_terminal_size((100, 24)).columns))
    return textwrap.wrap(text, width=width, initial_indent=first, subsequent_indent=rest,
                         break_on_hyphens=False)


def undecided_causes(table) -> list:
    """Why the inconclusive captures of a results table are undecided, grouped by cause.

    A cause is a gate (its row says why: the observation period, the scope, a plausibility
    test) or a data-quality finding that makes checks inconclusive (its message is in the
    check's note). Nothing is computed: the rows' own verdicts and notes are grouped.

    Returns
    -------
    list of dict
        ``code``, ``text`` (the reason, variants of one wording merged), ``captures`` (the
        inconclusive captures it concerns, in table order), ``channels``; most captures first.
    """
    from ..report.text import merge_variants, split_remarks

    cols = ["capture", "capture_verdict", "quantity", "statistic", "channel", "verdict",
            "note"]
    rows = table.select(cols).to_pylist()
    groups: dict = {}

    def add(code, text, capture, channel):
        g = groups.setdefault(code, {"code": code, "texts": [], "captures": [],
                                     "channels": []})
        if text:
            g["texts"].append(text)
        if capture not in g["captures"]:
            g["captures"].append(capture)
        if channel and channel not in g["channels"]:
            g["channels"].append(channel)

    gate_codes = {r["quantity"] for r in rows if r["statistic"] == "gate"}
    for r in rows:
        if r["capture_verdict"] != "inconclusive" or r["verdict"] != "inconclusive":
            continue
        note = r["note"] or ""
        if r["statistic"] == "gate":
            add(r["quantity"], note, r["capture"], "")
            continue
        if not note.startswith("inconclusive: "):
            add("undecided", "", r["capture"], r["channel"])
            continue
        for k, cause in enumerate(split_remarks(note.removeprefix("inconclusive: "))):
            code, _, rest = cause.partition(" (")
            if code in gate_codes:  # a gate: its own row says why
                add(code, "", r["capture"], r["channel"])
            elif rest and " " not in code:  # a finding: code (message)
                add(code, rest.removesuffix(")"), r["capture"], r["channel"])
            elif k == 0:  # a rule's own reason (marginal, ...)
                add(cause.split(",")[0].split(":")[0], cause, r["capture"], r["channel"])
            else:
                break  # the rest of a note are remarks on the check
    out = []
    for g in groups.values():
        texts = merge_variants(list(dict.fromkeys(g["texts"])))
        text = texts[0] if texts else ""
        if len(texts) > 1:
            text += f" (and {len(texts) - 1} more of this kind)"
        out.append({"code": g["code"], "text": text,
            "captures": g["captures"], "channels": g["channels"]})
    return sorted(out, key=lambda g: -len(g["captures"]))


def render_summary(summary: dict, run) -> str:
    """Text summary of a batch: counts of captures and checks, the lowest margins, errors and
    the files written."""
    s = summary
    v, c = s["verdicts"], s["checks"]
    lines = []
    done = f", {run.skipped} already in {run.written[0]}" if run.written else ""
    lines.append(f"Captures   {len(run.captures)} found: {run.checked} checked now{done}")
    lines.append(f"Verdicts   {v['fail']} fail, {v['inconclusive']} inconclusive, {v['pass']} "
                 f"pass, {v['not applicable']} not applicable, {v['error']} error")
    lines.append(f"Checks     {c['fail']} fail, {c['inconclusive']} inconclusive, {c['pass']} "
                 f"pass, {c['not applicable']} not applicable")
    causes = undecided_causes(run.table) if v["inconclusive"] else []
    if causes:
        lines.append("")
        lines.append(f"Inconclusive captures ({v['inconclusive']}), by cause")
        for g in causes:
            caps = g["captures"]
            named = ", ".join(caps[:_MAX_NAMED]) + (
                f" and {len(caps) - _MAX_NAMED} more" if len(caps) > _MAX_NAMED else "")
            on = f" (channel {', '.join(g['channels'])})" if g["channels"] and len(
                g["channels"]) <= 4 else ""
            lines += _wrap(f"{g['code']}{on}: {named}", "  ", "      ")
            if g["text"]:
                lines += _wrap(cli_text(g["text"]), "      ", "      ")
    if s["worst"]:
        lines.append("")
        lines.append(f"Lowest margin of each capture (lowest first, at most {len(s['worst'])}); "
                     "the verdict is the capture's")
        verdict_of = {e["capture"]: e["verdict"] for e in s["per_capture"]}
        stats = list(dict.fromkeys(w["statistic"] for w in s["worst"]))
        head = ["margin %", "verdict", "capture", "table", "channel", "limit of", "check",
                "measured", "limit", "unit"]
        rows = []
        for w in s["worst"]:
            cap_v = verdict_of.get(w["capture"], w["verdict"])
            rows.append([numfmt.value(w["margin_percent"], "margin", unit=""),
                         cap_v.upper() if cap_v != "pass" else cap_v,
                         w["capture"], w["table_id"], w["channel"], w["label"],
                         w["verdict"] if w["verdict"] != cap_v else "",
                         *numfmt.value_and_limit(w["measured"], w["limit"]), w["unit"]])
        if not any(r[6] for r in rows):
            head.pop(6)
            rows = [r[:6] + r[7:] for r in rows]
        widths = [max(len(str(r[i])) for r in [head] + rows) for i in range(len(head))]
        lines.append("  " + "  ".join(h.ljust(w) for h, w in zip(head, widths)).rstrip())
        for r in rows:
            lines.append("  " + "  ".join(str(x).ljust(w) for x, w in zip(r, widths)).rstrip())
        lines += _wrap("Statistic: " + "; ".join(stats), "  ", "    ")
        if any(verdict_of.get(w["capture"]) == "inconclusive" for w in s["worst"]):
            lines += _wrap("The margin of an inconclusive capture is not a pass: its verdict "
                           "is undecided for the cause named above.", "  ", "  ")
    if s["errors"]:
        lines.append("")
        lines.append("Errors (each counts as inconclusive for the exit code)")
        for e in s["errors"][:_MAX_ERRORS]:
            msg = e["error"] or ""
            lines.append(f"  {msg}" if msg.startswith(e["capture"]) else
                         f"  {e['capture']}: {msg}")
        if len(s["errors"]) > _MAX_ERRORS:
            lines.append(f"  ... and {len(s['errors']) - _MAX_ERRORS} more (the error column "
                         "of the results table has them all)")
    if run.written:
        lines.append("")
        lines.append(f"Results    {', '.join(run.written)} ({run.rows_written} rows)")
    lines.append("")
    lines += _wrap("Margin = (limit - measured) / limit; negative means the limit is exceeded. "
                   "A pqcheck verdict is an engineering aid, not a certification.", "", "")
    return "\n".join(lines) + "\n"


@main.command("batch")
@click.argument("inputs", nargs=-1, required=True, metavar="DIR_OR_GLOB...")
@limit_options(required=True)
@capture_options
@output_option("FILE", aliases=("--out",),
               help="Results table to write: .csv for CSV, otherwise Parquet (resumed from "
                    "when it exists).")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False), hidden=True,
              help="Results table as CSV (kept for earlier scripts: give -o FILE.csv).")
@click.option("--jobs", "-j", type=click.IntRange(1), metavar="N",
              help="Worker processes on this machine. Default: the number of CPUs.")
@click.option("--scheduler", metavar="ADDRESS",
              help="Run on the Dask cluster of this scheduler (tcp://host:8786); its workers "
                   "need pqcheck and must see the captures and limit files at the same paths.")
@click.option("--workers", type=click.IntRange(1), metavar="N",
              help="Run on a local Dask cluster of N worker processes.")
@click.option("--force", is_flag=True,
              help="Start the results files afresh instead of resuming from them.")
@click.option("--retry-errors", "retry_errors", is_flag=True,
              help="Check again the captures the results file records as errors.")
@format_option("batch", help="Summary on stdout.")
@handle_errors
def batch_cmd(inputs, output, csv_path, jobs, scheduler, workers, force, retry_errors, fmt,
              **opts):
    """Check every capture in folders or glob patterns against limit tables.

    Captures are .csv, .tsv (optionally .gz), COMTRADE .cfg with its .dat (counted once), .npy
    and .parquet files; folders are searched recursively. Each is analysed and assessed as
    `pqcheck check` does, with the same limits, selectors and capture options, into one row per
    capture and check in -o FILE (.csv for CSV, otherwise Parquet). Captures whose SHA-256 is already in the
    results file are skipped, so an interrupted batch resumes. A capture that cannot be read or
    analysed becomes a row with verdict "error" and the batch goes on.

    Work runs in --jobs processes, or on a Dask cluster with --scheduler or --workers (needs
    pip install 'pqcheck[cluster]').

    Exit code: 0 every capture passes, 1 a capture fails, 3 a capture is inconclusive or could
    not be checked (a capture-level error counts as inconclusive) and none fails, 4 a capture is
    not applicable (outside the tables' scope) and none fails or is inconclusive, 2 bad input.
    """
    from ..run.batch import (
        DaskExecutor,
        InlineExecutor,
        ProcessExecutor,
        exit_code,
        run_batch,
        summarize,
    )

    out = output
    if scheduler and workers:
        fail_usage("give --scheduler or --workers, not both")
    if out is not None and out.lower().endswith(".csv"):
        if csv_path is not None:
            fail_usage("-o names a CSV file and --csv another; give one CSV file")
        out, csv_path = None, out
    if out is not None and csv_path is not None and os.path.abspath(out) == os.path.abspath(
            csv_path):
        fail_usage("-o and --csv name the same file")
    if jobs is not None and (scheduler or workers):
        fail_usage("--jobs sets local worker processes; with Dask use --workers (local "
                   "cluster) or the cluster's own workers (--scheduler)")
    from ..run.check import refuse_unused_selectors

    spec = spec_from_options(None, opts)
    refuse_unused_selectors(spec)
    if scheduler or workers:
        executor = DaskExecutor(address=scheduler, workers=workers)
    elif jobs == 1:
        executor = InlineExecutor()
    else:
        executor = ProcessExecutor(jobs)
    run = run_batch(inputs, spec, out=out, csv=csv_path, executor=executor, force=force,
                    retry_errors=retry_errors,
                    progress=not opts.get("quiet") and sys.stderr.isatty(),
                    cache_dir=opts.get("cache_dir"), use_cache=not opts.get("no_cache"))
    for path in run.ignored:
        click.echo(f"pqcheck: note: {path}: left out, no .cfg next to this .dat", err=True)
    summary = summarize(run.table)
    if fmt == "json":
        per = summary.pop("per_capture")
        from ..results import batch_document, dumps
        from ..run.batch import batch_spec

        info = {"found": len(run.captures), "checked": run.checked, "skipped": run.skipped,
                "written": list(run.written), "rows_written": run.rows_written}
        click.echo(dumps(batch_document(summary, info, per, batch_spec(spec))))
    else:
        click.echo(render_summary(summary, run), nl=False)
    raise click.exceptions.Exit(exit_code(summary))
