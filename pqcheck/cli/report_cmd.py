"""`pqcheck report`: a signed-off PDF report (and JSON/CSV results) of a capture or a plan."""

from __future__ import annotations

from dataclasses import replace
from datetime import datetime, timezone

import click

from ..record import RunSpec
from ._common import EXIT_OK, VERDICT_EXIT, fail_usage, handle_errors, main
from ._fields import command_line, given_spec_options, spec_from_options
from ._limits import LIMIT_OPTION_NAMES, limit_options
from .analyze import capture_options, print_cache_notices, run_checked
from .survey_cmd import SURVEY_OPTION_NAMES, survey_options

__all__: list = []

_report_limit_options = limit_options(
    required=False,
    limits_help="Limit table: a bundled id (see `pqcheck limits list`) or the path of a .toml "
                "file. Repeat for several. Without it the report holds the analysis only (no "
                "verdict).")

_REPORT_FIELDS = ("title", "equipment", "site", "operator", "report_id", "test_date", "detail")
_ROW_FIELDS = tuple(n for n in LIMIT_OPTION_NAMES if n != "table")


def _input_files(*sources: str, limits) -> list:
    """Files the report reads: the captures (with the other files of their records) or the
    plan, and the limit tables given by path."""
    from ..readers import capture_files

    files = list(sources)
    for source in sources:
        if not source.lower().endswith(".toml"):
            try:
                files += capture_files(source)
            except Exception:  # noqa: BLE001 - a broken capture is reported when it is read
                pass
    from ..limits import table_path

    files += [str(p) for p in map(table_path, limits or ()) if p is not None and p.exists()]
    return files


def _plan_files(plan) -> list:
    """Every capture file and user limit table a plan names."""
    from ..readers import capture_files

    files = [spec.path for spec in plan.limits if spec.path is not None]
    for c in plan.captures:
        files.append(c.path)
        try:
            files += capture_files(c.path)
        except Exception:  # noqa: BLE001 - reported when the capture is read
            pass
    return files


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
@click.option("--test-date", "test_date", metavar="YYYY-MM-DD",
              help="Date of the measurements. Default: the plan's [conditions] date, else the "
                   "start time in the capture's header, else 'not stated'.")
@click.option("--detail", type=click.Choice(["full", "summary"]), default=None,
              help="full (default): the report with appendix A (every harmonic table); "
                   "summary: without it (the attached results keep every number).")
@_report_limit_options
@capture_options
@survey_options
@click.pass_context
@handle_errors
def report_cmd(ctx, source, output, force, json_path, csv_dir, **opts):
    """Write a PDF report of CAPTURE_OR_PLAN: a capture file, a test plan (.toml) that
    lists captures, load points and limit tables (`pqcheck plan new` writes a template), or
    an interval log of a survey (the report then has its survey section).

    The report holds the verdict, the harmonic tables and charts against the limits, power
    quantities, data-quality findings, method, traceability (SHA-256 of every input), the
    safety cautions and a sign-off block. The results JSON is attached to the PDF.

    Exit code as `pqcheck check`: 0 pass (or no limits applied), 1 a limit is exceeded,
    3 inconclusive, 4 not applicable, 2 bad input or an existing output without --force
    (nothing is written).
    """
    from ..files.atomic import OutputSet
    from ..report.job import ReportJob, ReportMeta, make_report_id
    from ..report.pdf import render_pdf
    from ..report.results import CSV_TABLES, job_csv_texts, job_json, job_to_dict

    survey_opts = {k: opts.pop(k) for k in SURVEY_OPTION_NAMES}
    created = datetime.now(timezone.utc)

    # 1. Every output must be writable, and none an input, before any work is done.
    outputs = OutputSet(force=force)
    outputs.protect(_input_files(source, limits=opts.get("table")))
    outputs.protect(_input_files(*opts.get("add_file") or (), limits=()))
    out = outputs.add(output, "-o")
    if json_path is not None:
        outputs.add(json_path, "--json")
    csv_paths = []
    if csv_dir is not None:
        csv_paths = outputs.add_folder(csv_dir, [f"{n}.csv" for n in CSV_TABLES], "--csv")

    # 2. Analyse and assess (any bad input stops here with exit 2 and nothing written).
    from .survey_cmd import is_survey_input, report_survey

    if is_survey_input([source], survey_opts):
        spec = spec_from_options(source, opts)
        report_survey(source, outputs, out, json_path, csv_dir, spec, created,
                      command_line("report", spec), {**opts, **survey_opts})
    plan = None
    given = [(n, o) for n, o in given_spec_options(ctx) if n not in _REPORT_FIELDS]
    if source.lower().endswith(".toml"):
        from ..record import ReportDetails
        from ..run.build import run_plan
        from ..run.plan import load_plan

        if given:
            fail_usage(f"{given[0][1]} cannot be combined with a test plan: set it in the plan "
                       f"({source})")
        details = ReportDetails(**{k: opts.get(k) for k in _REPORT_FIELDS})
        plan = load_plan(source)
        outputs.protect(_plan_files(plan))  # what the plan names is an input too
        cache = None
        if not opts.get("no_cache"):
            from ..run.cache import Cache

            cache = Cache(opts.get("cache_dir"))
        try:
            runs = run_plan(plan, cache=cache, report=details)
        finally:
            if cache is not None:
                print_cache_notices(cache)
        command = command_line("report", RunSpec(report=details), source=source)
    else:
        spec = spec_from_options(source, opts)
        if not spec.limits:
            rows = [o for n, o in given if n in _ROW_FIELDS]
            if rows:
                fail_usage(f"{rows[0]} selects limit-table rows; give --limits too (or leave "
                           "it out for an analysis-only report)")
        runs = (run_checked(spec, opts),)
        command = command_line("report", spec)
    if not runs:
        fail_usage(f"{source}: every capture of the plan is excluded; nothing to report")
    details = runs[0].spec.report

    # 3. Render everything in memory.
    meta = ReportMeta(
        title=details.title or (plan.title if plan is not None and plan.title else
                                "Harmonic emission test report"),
        equipment=details.equipment if details.equipment is not None else
        (plan.equipment.name if plan is not None else ""),
        site=details.site if details.site is not None else
        (plan.site.name if plan is not None else ""),
        operator=details.operator or (plan.conditions.operator
                                      if plan is not None else "") or "",
        created_utc=created,
        command=command,
        detail=details.detail or "full",
        test_date=details.test_date or "",
    )
    rid = details.report_id or (plan.report_id if plan is not None else "") or make_report_id(
        [r.result.sha256 for r in runs] + [plan.sha256 if plan is not None else ""], created)
    meta = replace(meta, report_id=rid)
    job = ReportJob(meta=meta, runs=runs, plan=plan)
    doc = job_to_dict(job)
    results = job_json(job)
    pdf = render_pdf(job, results_json=results)
    outputs.put(out, pdf)
    if json_path is not None:
        outputs.put(json_path, results)
    if csv_dir is not None:
        for path, text in zip(csv_paths, job_csv_texts(job, doc)):
            outputs.put(path, text)

    # 4. Write: all the files, or none of them.
    written = [str(p) for p in outputs.commit()]

    verdict = job.verdict
    n_tables = len(job.limit_tables())
    word = verdict.upper() if verdict != "not assessed" else "analysis only (no limits applied)"
    click.echo(f"{out}: {word}; {len(runs)} capture{'s' if len(runs) != 1 else ''}, "
               f"{n_tables} limit table{'s' if n_tables != 1 else ''}; report {rid}")
    for p in written[1:]:
        click.echo(f"  also wrote {p}")
    raise click.exceptions.Exit(VERDICT_EXIT.get(verdict, EXIT_OK))
