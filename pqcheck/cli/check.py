"""`pqcheck check`: analyse a capture and assess it against limit tables."""

from __future__ import annotations

import math

import click

from ._common import VERDICT_EXIT, handle_errors, main
from ._fields import cli_text, spec_from_options
from ._limits import limit_options
from .analyze import capture_options, run_checked
from .survey_cmd import SURVEY_OPTION_NAMES, survey_options

__all__ = ["render_assessment"]

_ORDER = {"fail": 0, "inconclusive": 1, "pass": 2, "not applicable": 3}


def _num(x, digits=4) -> str:
    if x is None or not math.isfinite(x):
        return "-"
    return f"{x:.{digits}g}"


def render_assessment(assessment, result=None) -> str:
    """Text view of an assessment: verdict, limits used, notes, then the checks with failing
    items first (most exceeded first) and their margins."""
    a = assessment
    lines = [f"Verdict    {a.verdict.upper()}"]
    c = a.counts
    lines.append(f"Checks     {c.get('fail', 0)} fail, {c.get('inconclusive', 0)} inconclusive, "
                 f"{c.get('pass', 0)} pass, {c.get('not applicable', 0)} not applicable")
    for label, texts in (("Why", a.reasons), ("Deviation", a.deviations)):
        for k, text in enumerate(texts):
            lines.append(f"{label if k == 0 else '':<10} {text}")
    if result is not None:
        lines.append(f"Capture    {result.source} ({result.duration_s:.3f} s, "
                     f"{int(result.windows.valid.sum())} valid windows)")
    for t in a.tables:
        lines.append(f"Limits     {t.display_name}: {t.standard} {t.edition}, {t.title}")
        lines.append(f"           file {t.source} (SHA-256 {t.sha256})")
        sel = ", ".join(f"{k} = {v:g}" if isinstance(v, float) else f"{k} = {v}"
                        for k, v in t.selectors)
        if sel:
            lines.append(f"           selectors: {sel}")
        for row in t.rows:
            lines.append(f"           {row}")
        lines.append("           measure: IEC 61000-4-15 flickermeter and IEC 61000-3-3 "
                     "voltage changes" if t.measure == "flicker"
                     else f"           measure: IEC 61000-4-7 harmonic {t.measure}")
    if a.notes:
        lines.append("Notes")
        lines += [f"  - {cli_text(n)}" for n in a.notes]
    checks = sorted(a.checks, key=lambda k: (_ORDER[k.verdict],
                                             k.margin_percent if k.margin_percent is not None
                                             else math.inf))
    head = ["verdict", "table", "channel", "limit of", "statistic", "measured", "limit", "unit",
            "margin %", "clause", "note"]
    rows = []
    for k in checks:
        rows.append([k.verdict.upper() if k.verdict in ("fail", "inconclusive") else k.verdict,
                     k.table_id, k.channel, k.label, k.statistic, _num(k.measured),
                     _num(k.limit) + ("*" if k.verify else ""), k.unit,
                     _num(k.margin_percent, 3), k.clause, cli_text(k.note)])
    widths = [max(len(str(r[i])) for r in [head] + rows) for i in range(len(head) - 1)]
    lines.append("")
    lines.append("  ".join(h.ljust(w) for h, w in zip(head, widths)) + "  note")
    for r in rows:
        lines.append(("  ".join(str(x).ljust(w) for x, w in zip(r, widths)) + "  " + r[-1])
                     .rstrip())
    lines.append("")
    lines.append("* limit tagged to verify against your copy of the standard. Margin = (limit - "
                 "measured) / limit; negative means the limit is exceeded. A pqcheck verdict is "
                 "an engineering aid, not a certification.")
    return "\n".join(lines) + "\n"


@main.command("check")
@click.argument("capture", nargs=-1, required=True, type=click.Path(dir_okay=False))
@limit_options(required=True)
@capture_options
@survey_options
@click.option("--format", "fmt", type=click.Choice(["table", "json"]), default="table",
              show_default=True, help="Output on stdout.")
@handle_errors
def check_cmd(capture, fmt, **opts):
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
    else:
        click.echo(render_assessment(a, result), nl=False)
    raise click.exceptions.Exit(VERDICT_EXIT[a.verdict])
