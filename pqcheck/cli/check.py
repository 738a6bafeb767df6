"""`pqcheck check`: analyse a capture and assess it against limit tables."""

from __future__ import annotations

import click

from ._common import VERDICT_EXIT, format_option, handle_errors, main
from ._fields import spec_from_options
from ._limits import limit_options
from ._render import render_assessment, render_markdown
from .analyze import capture_options, run_checked
from .survey_cmd import SURVEY_OPTION_NAMES, survey_options

__all__ = ["render_assessment"]

@main.command("check")
@click.argument("capture", nargs=-1, required=True, type=click.Path(dir_okay=False))
@limit_options(required=True)
@capture_options
@survey_options
@format_option("check",
              help="Output on stdout: a readable summary (table), the results document "
                   "(json), or every check as a Markdown table to paste (markdown).")
@click.option("--all-checks", is_flag=True,
              help="With --format table: every check, one line each (default: what failed, "
                   "the inconclusive checks grouped by cause, the closest passes, findings).")
@handle_errors
def check_cmd(capture, fmt, all_checks, **opts):
    """Check CAPTURE against limit tables.

    CAPTURE is a waveform capture, or one or more interval logs of a survey (one row per
    aggregation interval; see `pqcheck inspect`), which are assessed period by period as the
    tables' statistics say (IEEE 519: every 24 h and every 7 days), naming the worst period.

    Analyses the capture by the IEC 61000-4-7 method, picks the limits that apply (row by
    --voltage-level/--isc/--il, --class, --rsce ...), compares each as the table's evaluation
    rule says, and prints one line per check, failing items first.

    Exit code: 0 pass, 1 a limit is exceeded, 2 bad input, 3 inconclusive (data quality,
    duration, a deviation), 4 not applicable (outside the table's scope).
    """
    survey_opts = {k: opts.pop(k) for k in SURVEY_OPTION_NAMES}
    from .survey_cmd import check_survey, is_survey_input

    if is_survey_input(capture, survey_opts):
        check_survey(capture, fmt, spec_from_options(None, opts), {**opts, **survey_opts})
    if len(capture) > 1:
        from .survey_cmd import check_recording

        check_recording(capture, fmt, spec_from_options(None, opts), {**opts, **survey_opts})
    run = run_checked(spec_from_options(capture[0], opts), opts)
    result, a = run.result, run.assessment
    if fmt == "json":
        from ..results import check_document, dumps

        click.echo(dumps(check_document(run)))
    elif fmt == "markdown":
        click.echo(render_markdown(a, result), nl=False)
    else:
        click.echo(render_assessment(a, result, all_rows=all_checks), nl=False)
    raise click.exceptions.Exit(VERDICT_EXIT[a.verdict])
