"""Terminal views of an assessment: a readable summary by default, every row on request, and
a Markdown table to paste into a ticket or an e-mail.

Formatting only: every number comes from the :class:`~pqcheck.assess.Check` records and the
analysis result; nothing is computed here but the order of the rows and their grouping.
"""

from __future__ import annotations

import math
import shutil
import textwrap

from .. import numfmt
from ._fields import cli_text

__all__ = ["render_assessment", "render_markdown", "BASIS_WORDS"]

BASIS_WORDS = {
    "percent_of_fundamental": "% of fundamental",
    "percent_of_il": "% of IL",
    "percent_of_rated_current": "% of rated current",
    "percent_of_iref": "% of Iref",
    "amperes": "A",
    "milliamperes_per_watt": "mA/W",
}
_ORDER = {"fail": 0, "inconclusive": 1, "pass": 2, "not applicable": 3}
_WORD = {"fail": "FAIL", "inconclusive": "INCONCLUSIVE", "pass": "pass",
         "not applicable": "n/a"}
_CLOSEST = 5


def _width() -> int:
    return max(72, min(110, shutil.get_terminal_size((100, 24)).columns))


def _basis(k) -> str:
    return BASIS_WORDS.get(getattr(k, "basis", ""), k.unit)


def _where(k) -> str:
    return k.phase or k.channel or "all"


def _rows_table(checks, decimals: dict, *, with_table: bool) -> list:
    """Aligned lines, one per check: verdict, item, phase, measured, limit, basis, margin
    (numbers by :func:`pqcheck.numfmt.check_cells`, with ``decimals`` of the whole
    assessment; the verify mark after the basis, the limit's unit)."""
    head = ["", "item", "phase", "measured", "limit", "basis", "margin"]
    if with_table:
        head.insert(1, "table")
    rows = []
    for k in checks:
        measured, limit, margin = numfmt.check_cells(k, decimals)
        basis = numfmt.marked(_basis(k), "+" if getattr(k, "verify", False) else "")
        r = [_WORD.get(k.verdict, k.verdict), k.label, _where(k), measured, limit, basis,
             margin]
        if with_table:
            r.insert(1, k.table_id)
        rows.append(r)
    widths = [max(len(str(r[i])) for r in [head] + rows) for i in range(len(head))]
    right = {head.index(x) for x in ("measured", "limit", "margin")}

    def line(r):
        return "  ".join(str(x).rjust(w) if i in right else str(x).ljust(w)
                         for i, (x, w) in enumerate(zip(r, widths))).rstrip()

    return ["  " + line(head)] + ["  " + line(r) for r in rows]


def _cause(k, findings) -> str:
    fs = [f for f in findings if f.severity == "error"
          and (not f.channels or k.channel in f.channels)]
    if fs:
        return ", ".join(dict.fromkeys(f.code for f in fs))
    note = (k.note or "").removeprefix("inconclusive: ")
    return note.split(";")[0].split(" (")[0] if note else "not decidable from the data"


def _phases(checks) -> list:
    return sorted({_where(k) for k in checks})


def _orders_text(checks) -> str:
    totals = list(dict.fromkeys(k.label for k in checks if k.quantity != "harmonic"))
    orders = [k.order for k in checks if k.quantity == "harmonic" and k.order]
    text = numfmt.order_ranges(orders, "-")
    return ", ".join(totals + ([f"orders {text}"] if text else []))


def render_assessment(assessment, result=None, *, all_rows: bool = False,
                      closest: int = _CLOSEST) -> str:
    """Text view of an assessment for a terminal.

    Parameters
    ----------
    assessment : Assessment
    result : AnalysisResult, optional
        Adds the capture line and the findings.
    all_rows : bool
        Every check, one line each (default: the failing checks, the undecided ones grouped
        by cause, and the ``closest`` smallest passing margins).
    closest : int
        How many of the closest passing checks the summary shows.

    Returns
    -------
    str
    """
    a = assessment
    width = _width()
    wrap = textwrap.TextWrapper(width=width, initial_indent="  ", subsequent_indent="    ")
    findings = tuple(result.findings) if result is not None else ()
    c = a.counts or {}
    lines = [f"Verdict   {a.verdict.upper()}   ({c.get('fail', 0)} fail, "
             f"{c.get('inconclusive', 0)} inconclusive, {c.get('pass', 0)} pass"
             + (f", {c['not applicable']} not applicable" if c.get("not applicable") else "")
             + ")"]
    from ..limits import designation
    from ..report.text import merge_variants

    for label, texts in (("Why", merge_variants(getattr(a, "reasons", ()))),
                         ("Deviation", merge_variants(getattr(a, "deviations", ())))):
        for k, text_ in enumerate(texts):
            lines += textwrap.wrap(cli_text(text_), width=width,
                                   initial_indent=f"{label if k == 0 else '':<10}",
                                   subsequent_indent=" " * 12)
    if result is not None:
        lines += textwrap.wrap(f"{result.source}  ({numfmt.value(result.duration_s, 'duration')}, "
                               f"{int(result.windows.valid.sum())} valid windows)",
                               width=width, initial_indent="Capture   ",
                               subsequent_indent=" " * 12, break_on_hyphens=False)
    for t in a.tables:
        sel = ", ".join(f"{k} = {numfmt.given(v)}" if isinstance(v, float) else f"{k} = {v}"
                        for k, v in t.selectors)
        name = getattr(t, "display_name", "") or t.table_id
        lines += textwrap.wrap(f"{name}  {designation(t.standard, t.edition)}"
                               + (f"  ({sel})" if sel else ""), width=width,
                               initial_indent="Limits    ", subsequent_indent=" " * 12)
        for row in t.rows:
            lines += wrap.wrap(row)
        lines += wrap.wrap("measure: IEC 61000-4-15 flickermeter and IEC 61000-3-3 voltage "
                           "changes" if t.measure == "flicker"
                           else f"measure: IEC 61000-4-7 harmonic {t.measure}s")
    stats = list(dict.fromkeys(k.statistic for k in a.checks if k.statistic != "gate"))
    if stats:
        lines.append("Compared  " + "; ".join(stats))
    with_table = len(a.tables) > 1
    dec = numfmt.check_decimals(a.checks)
    checks = sorted(a.checks, key=lambda k: (_ORDER.get(k.verdict, 9),
                                             k.margin_percent if k.margin_percent is not None
                                             else math.inf))
    if all_rows:
        lines += ["", "Every check"] + _rows_table(checks, dec, with_table=with_table)
    else:
        fails = [k for k in checks if k.verdict == "fail"]
        lines.append("")
        if fails:
            lines += [f"Limits exceeded ({len(fails)})"] + _rows_table(fails, dec,
                                                                     with_table=with_table)
        else:
            lines.append("Limits exceeded: none")
        undecided = [k for k in checks if k.verdict == "inconclusive"]
        gates = [k for k in undecided if k.statistic == "gate"]
        held = [k for k in undecided if k.statistic != "gate"]
        if undecided:
            groups: dict = {}
            for k in held:
                groups.setdefault(_cause(k, findings), []).append(k)
            lines += ["", f"Inconclusive ({len(held)} checks), by cause"]
            for g in gates:  # a gate holds every check it names: its reason said once
                ks = groups.pop(g.quantity, [])
                lines += wrap.wrap(f"{g.quantity}: {len(ks)} checks ({_orders_text(ks)}; "
                                   f"phases {', '.join(_phases(ks))}); see Why")
            for cause, ks in groups.items():
                see = "; see Findings" if any(f.code == cause for f in findings) else ""
                lines += wrap.wrap(f"{cli_text(cause)}: {len(ks)} checks ({_orders_text(ks)}; "
                                   f"phases {', '.join(_phases(ks))}){see}")
        passes = [k for k in checks if k.verdict == "pass" and k.margin_percent is not None]
        if passes and closest:
            lines += ["", f"Closest to their limits ({min(closest, len(passes))} of "
                          f"{len(passes)} passing)"]
            lines += _rows_table(passes[:closest], dec, with_table=with_table)
    if a.notes:
        lines += ["", "Notes"]
        for n in merge_variants(a.notes):
            lines += wrap.wrap(cli_text(n))
    if findings:
        lines += ["", "Findings"]
        sev = {"error": "ERROR", "warning": "warn", "info": "info"}
        for f in sorted(findings, key=lambda f: {"error": 0, "warning": 1}.get(f.severity, 2)):
            chans = f" [{', '.join(f.channels)}]" if f.channels else ""
            lines += wrap.wrap(f"{sev.get(f.severity, f.severity)} {f.code}{chans}: "
                               f"{cli_text(f.message)}")
    lines += ["", textwrap.fill(
        "+ limit value to verify against your copy of the standard. Margin = (limit - "
        "measured) / limit. --all-checks lists every check; --format markdown gives a table "
        "to paste. A pqcheck verdict is an engineering aid, not a certification.",
        width=width)]
    return "\n".join(lines) + "\n"


def render_markdown(assessment, result=None) -> str:
    """Every check as a GitHub-flavoured Markdown table (to paste), verdict first."""
    a = assessment
    out = [f"**Verdict: {a.verdict.upper()}**", ""]
    if result is not None:
        out += [f"Capture: `{result.source}` (SHA-256 `{result.sha256}`)", ""]
    out.append("| verdict | table | item | phase | measured | limit | basis | margin | clause |")
    out.append("|---|---|---|---|---:|---:|---|---:|---|")
    checks = sorted(a.checks, key=lambda k: (_ORDER.get(k.verdict, 9),
                                             k.margin_percent if k.margin_percent is not None
                                             else math.inf))
    dec = numfmt.check_decimals(a.checks)
    for k in checks:
        measured, limit, margin = numfmt.check_cells(k, dec)
        out.append("| " + " | ".join([
            _WORD.get(k.verdict, k.verdict), k.table_id, k.label, _where(k), measured, limit,
            numfmt.marked(_basis(k), "(verify)" if k.verify else ""), margin,
            k.clause]) + " |")
    return "\n".join(out) + "\n"
