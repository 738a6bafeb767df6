"""`pqcheck batch`: check many captures against limit tables, into one tidy results table."""

from __future__ import annotations

import os
import sys

import click

from .. import numfmt
from ._common import fail_usage, handle_errors, main
from ._fields import spec_from_options
from ._limits import limit_options
from .analyze import capture_options

__all__ = ["render_summary"]

_MAX_ERRORS = 20


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
    if s["worst"]:
        lines.append("")
        lines.append(f"Lowest margin of each capture (lowest first, at most {len(s['worst'])})")
        head = ["margin %", "verdict", "capture", "table", "channel", "limit of", "statistic",
                "measured", "limit", "unit"]
        rows = [[numfmt.value(w["margin_percent"], "margin", unit=""),
                 w["verdict"].upper() if w["verdict"] != "pass" else w["verdict"],
                 w["capture"], w["table_id"], w["channel"], w["label"], w["statistic"],
                 *numfmt.value_and_limit(w["measured"], w["limit"]), w["unit"]]
                for w in s["worst"]]
        widths = [max(len(str(r[i])) for r in [head] + rows) for i in range(len(head))]
        lines.append("  " + "  ".join(h.ljust(w) for h, w in zip(head, widths)).rstrip())
        for r in rows:
            lines.append("  " + "  ".join(str(x).ljust(w) for x, w in zip(r, widths)).rstrip())
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
    lines.append("Margin = (limit - measured) / limit; negative means the limit is exceeded. A "
                 "pqcheck verdict is an engineering aid, not a certification.")
    return "\n".join(lines) + "\n"


@main.command("batch")
@click.argument("inputs", nargs=-1, required=True, metavar="DIR_OR_GLOB...")
@limit_options(required=True)
@capture_options
@click.option("-o", "--output", "--out", "out", type=click.Path(dir_okay=False),
              metavar="FILE",
              help="Results table as Parquet (resumed from when it exists); -o/--output as "
                   "for every command that writes a file (--out still works).")
@click.option("--csv", "csv_path", type=click.Path(dir_okay=False), metavar="FILE",
              help="Results table as CSV (resumed from when it exists and --out does not).")
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
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table",
              show_default=True, help="Summary on stdout.")
@handle_errors
def batch_cmd(inputs, out, csv_path, jobs, scheduler, workers, force, retry_errors, fmt,
              **opts):
    """Check every capture in folders or glob patterns against limit tables.

    Captures are .csv, .tsv (optionally .gz), COMTRADE .cfg with its .dat (counted once), .npy
    and .parquet files; folders are searched recursively. Each is analysed and assessed as
    `pqcheck check` does, with the same limits, selectors and capture options, into one row per
    capture and check in --out (Parquet) and/or --csv. Captures whose SHA-256 is already in the
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

    if scheduler and workers:
        fail_usage("give --scheduler or --workers, not both")
    if out is not None and out.lower().endswith(".csv"):
        fail_usage("--out writes Parquet; give the CSV file with --csv")
    if out is not None and csv_path is not None and os.path.abspath(out) == os.path.abspath(
            csv_path):
        fail_usage("--out and --csv name the same file")
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
