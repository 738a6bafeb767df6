"""`pqcheck report`: a signed-off PDF report (and JSON/CSV results) of a capture or a plan."""

from __future__ import annotations

import shlex
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

import click

from ._common import EXIT_OK, VERDICT_EXIT, fail_usage, handle_errors, main
from ._limits import (
    LIMIT_OPTION_NAMES,
    declared_from,
    limit_options,
    positive_options,
    resolve_limits,
    tables_max_order,
)
from .analyze import capture_options, load_and_analyze
from .survey_cmd import SURVEY_OPTION_NAMES, survey_options

__all__: list = []

_CAPTURE_ONLY = ("current", "voltage", "sample_rate", "time_column", "encoding", "add_file",
                 "nominal", "max_order", "il_a", "wiring", "reference")

_report_limit_options = limit_options(
    required=False,
    limits_help="Limit table: a bundled id (see `pqcheck limits list`) or the path of a .toml "
                "file. Repeat for several. Without it the report holds the analysis only (no "
                "verdict).")


def _given(ctx, name: str) -> bool:
    src = ctx.get_parameter_source(name)
    return src is not None and src.name not in ("DEFAULT", "DEFAULT_MAP")


def _command_line(ctx) -> str:
    """The command as given (options from the command line only), for traceability."""
    parts = ["pqcheck", "report"]
    for p in ctx.command.params:
        if not _given(ctx, p.name):
            continue
        value = ctx.params[p.name]
        if isinstance(p, click.Argument):
            parts.append(shlex.quote(str(value)))
            continue
        flag = max(p.opts, key=len)
        if p.is_flag:
            parts.append(flag)
        elif p.multiple:
            for v in value:
                parts += [flag, shlex.quote(str(v))]
        else:
            parts += [flag, shlex.quote(str(value))]
    return " ".join(parts)


def _capture_runs(ctx, source: str, opts: dict, lim: dict) -> tuple:
    """Analyse and assess one capture as `pqcheck check` does."""
    from ..report.job import CaptureRun
    from ..run.build import assess_each

    positive_options(lim, opts.get("il_a"))
    if not lim["limits"]:
        given = [n for n in LIMIT_OPTION_NAMES if n != "limits" and _given(ctx, n)]
        if given:
            fail_usage(f"--{given[0].replace('_', '-')} selects limit-table rows; give "
                       "--limits too (or leave it out for an analysis-only report)")
    resolved = resolve_limits(lim, opts.get("il_a"))
    tables_max_order(ctx, opts, resolved)
    capture, result = load_and_analyze(source, opts)
    assessments = assess_each(result, resolved, il_a=opts.get("il_a"),
                              rated_current_a=lim["rated_current"], iref_a=lim["iref"],
                              active_power_w=lim["active_power"],
                              declared=declared_from(lim))
    run_id = Path(source).stem or "capture"
    return (CaptureRun(id=run_id, capture=capture, result=result, assessments=assessments),)


@main.command("report")
@click.argument("source", metavar="CAPTURE_OR_PLAN", type=click.Path(dir_okay=False))
@click.option("-o", "--output", required=True, type=click.Path(dir_okay=False), metavar="PDF",
              help="The PDF report to write.")
@click.option("--force", is_flag=True,
              help="Replace existing output files (otherwise they are left untouched and the "
                   "command exits with code 2).")
@click.option("--json", "json_path", type=click.Path(dir_okay=False), metavar="PATH",
              help="Also write the results as JSON (the same file is attached to the PDF).")
@click.option("--csv", "csv_dir", type=click.Path(file_okay=False), metavar="DIR",
              help="Also write the results as tidy CSV tables into DIR (created if missing).")
@click.option("--equipment", metavar="TEXT", help="Equipment under test, as it should appear.")
@click.option("--operator", metavar="TEXT", help="Who made the measurements.")
@click.option("--site", metavar="TEXT", help="Where: site and point of connection.")
@click.option("--title", metavar="TEXT", help="Report title.")
@click.option("--report-id", "report_id", metavar="TEXT",
              help="Report id for the footer of every page. Default: generated from the date "
                   "and the data.")
@_report_limit_options
@capture_options
@survey_options
@click.pass_context
@handle_errors
def report_cmd(ctx, source, output, force, json_path, csv_dir, equipment, operator, site, title,
               report_id, **opts):
    """Write a PDF report of CAPTURE_OR_PLAN: a capture file, or a test plan (.toml) that
    lists captures, load points and limit tables (`pqcheck plan new` writes a template).

    The report holds the verdict, the harmonic tables and charts against the limits, power
    quantities, data-quality findings, method, traceability (SHA-256 of every input), the
    safety cautions and a sign-off block. The results JSON is attached to the PDF.

    Exit code as `pqcheck check`: 0 pass (or no limits applied), 1 a limit is exceeded,
    3 inconclusive, 4 not applicable, 2 bad input or an existing output without --force
    (nothing is written).
    """
    from ..files.atomic import check_target, write_atomic
    from ..report.job import ReportJob, ReportMeta, make_report_id
    from ..report.pdf import render_pdf
    from ..report.results import (
        check_csv_targets,
        job_frames,
        job_json,
        job_to_dict,
        write_csv_dir,
    )

    lim = {k: opts.pop(k) for k in LIMIT_OPTION_NAMES}
    survey_opts = {k: opts.pop(k) for k in SURVEY_OPTION_NAMES}
    created = datetime.now(timezone.utc)

    # 1. Every output must be writable before any work is done.
    out = Path(output)
    targets = [out.resolve()]
    check_target(out, force=force, option="-o")
    if json_path is not None:
        if Path(json_path).resolve() in targets:
            fail_usage("--json and -o name the same file; give two different paths")
        check_target(json_path, force=force, option="--json")
        targets.append(Path(json_path).resolve())
    if csv_dir is not None:
        for p in check_csv_targets(csv_dir, force=force):
            if p.resolve() in targets:
                fail_usage(f"--csv {csv_dir} would overwrite {p}; choose another folder")

    # 2. Analyse and assess (any bad input stops here with exit 2 and nothing written).
    from .survey_cmd import is_survey_input, report_survey

    if is_survey_input([source], survey_opts):
        meta = ReportMeta(title=title or "Harmonic survey report", equipment=equipment or "",
                          site=site or "", operator=operator or "", created_utc=created,
                          command=_command_line(ctx))
        report_survey(source, out, json_path, csv_dir, meta, report_id, lim,
                      {**opts, **survey_opts}, force)
    plan = None
    if source.lower().endswith(".toml"):
        from ..run.build import run_plan
        from ..run.plan import load_plan

        clash = [n for n in LIMIT_OPTION_NAMES + _CAPTURE_ONLY if _given(ctx, n)]
        if clash:
            name = clash[0].replace("_", "-")
            name = {"il-a": "il", "nominal": "nominal-frequency"}.get(name, name)
            fail_usage(f"--{name} cannot be combined with a test plan: set it in the plan "
                       f"({source})")
        plan = load_plan(source)
        cache = None
        if not opts.get("no_cache"):
            from ..run.cache import Cache

            cache = Cache(opts.get("cache_dir"))
        runs = run_plan(plan, cache=cache)
    else:
        runs = _capture_runs(ctx, source, opts, lim)

    # 3. Render everything in memory.
    meta = ReportMeta(
        title=title or (plan.title if plan is not None and plan.title else
                        "Harmonic emission test report"),
        equipment=equipment if equipment is not None else
        (plan.equipment.name if plan is not None else ""),
        site=site if site is not None else (plan.site.name if plan is not None else ""),
        operator=operator or "",
        created_utc=created,
        command=_command_line(ctx),
    )
    rid = report_id or (plan.report_id if plan is not None else "") or make_report_id(
        [r.result.sha256 for r in runs] + [plan.sha256 if plan is not None else ""], created)
    meta = replace(meta, report_id=rid)
    job = ReportJob(meta=meta, runs=runs, plan=plan)
    doc = job_to_dict(job)
    results = job_json(job)
    pdf = render_pdf(job, results_json=results)
    frames = job_frames(job, doc) if csv_dir is not None else None

    # 4. Write (each file atomically).
    write_atomic(out, pdf, force=force, option="-o")
    written = [str(out)]
    if json_path is not None:
        write_atomic(json_path, results, force=force, option="--json")
        written.append(str(json_path))
    if csv_dir is not None:
        written += [str(p) for p in write_csv_dir(frames, csv_dir, force=force)]

    verdict = job.verdict
    n_tables = len(job.limit_tables())
    word = verdict.upper() if verdict != "not assessed" else "analysis only (no limits applied)"
    click.echo(f"{out}: {word}; {len(runs)} capture{'s' if len(runs) != 1 else ''}, "
               f"{n_tables} limit table{'s' if n_tables != 1 else ''}; report {rid}")
    for p in written[1:]:
        click.echo(f"  also wrote {p}")
    raise click.exceptions.Exit(VERDICT_EXIT.get(verdict, EXIT_OK))
