"""The report of a site survey: the same report, with a survey section.

Built from a :class:`~pqcheck.survey.SurveyAssessment` (an interval log or an aggregated
waveform recording assessed period by period) with the report's page furniture, styles and
results attachment. Page 1 gives the verdict, the limit tables, the survey's span and what
could not be assessed; the survey section gives the data availability per day, the daily and
weekly statistics per order and phase against their limits (worst first, each with its worst
period), charts of THD / TDD and of the binding orders over time with their limit lines, a
cumulative-probability chart of the binding quantity with its 95th and 99th percentiles
marked, and the list of flagged intervals. Nothing is computed here: values come from the
assessment (:meth:`~pqcheck.survey.SurveyAssessment.series_of` gives the interval values a
check was computed from, by the assessment's own code).
"""

from __future__ import annotations

import functools
import io
import math

import numpy as np

from .. import numfmt
from ..limits import designation
from . import figures
from .pdf import _ReportCanvas
from .style import esc, fmt, register_fonts

__all__ = ["render_survey_pdf"]

_MAX_ROWS = 60
_MAX_FLAGGED = 120


def _days(t_s, t0):
    return (np.asarray(t_s, np.float64) - t0) / 86400.0


def _fig(height_in: float = 2.5):
    from matplotlib.figure import Figure

    with _rc():
        fig = Figure(figsize=(figures.FIG_WIDTH_IN, height_in))
    return fig


def _rc():
    import matplotlib

    return matplotlib.rc_context(figures._RC)


def _time_chart(sa, idxs, title, t0):
    """Values of the checks ``idxs`` over time with each check's limit line."""
    with _rc():
        fig = _fig(2.6)
        ax = fig.add_subplot(1, 1, 1)
        styles = ("-", "--", ":", "-.")
        drawn = 0
        for j, i in enumerate(idxs):
            got = sa.series_of(i)
            if got is None:
                continue
            _, t, x, use = got
            c = sa.assessment.checks[i]
            xs = np.where(use, x, np.nan)
            ax.plot(_days(t, t0), xs, lw=0.6, ls=styles[j % 4], color=figures._LINE_GREYS[j % 4],
                    label=f"{c.label} {c.channel} ({c.statistic.split(' of ')[-1]})")
            if c.limit is not None:
                ax.axhline(c.limit, color=figures._LIMIT_INK, lw=0.9, ls=styles[j % 4])
                ax.annotate(f"limit {numfmt.number(c.limit, 3, c.unit)} "
                            f"({numfmt.given(c.multiplier)} x)",
                            (1.0, c.limit), xycoords=("axes fraction", "data"),
                            ha="right", va="bottom", fontsize=6, color=figures._LIMIT_INK)
            drawn += 1
        if not drawn:
            return None
        ax.set_xlabel("days from the start of the survey")
        ax.set_ylabel(sa.assessment.checks[idxs[0]].unit)
        ax.set_title(title)
        ax.grid(True, color=figures._GRID, lw=0.4)
        ax.legend(fontsize=6, loc="upper left", frameon=False)
        fig.tight_layout()
    return fig


def _cdf_chart(sa, i):
    """Empirical cumulative probability of the values of check ``i`` in its worst period,
    with the 95th and 99th percentiles (as the assessment computed them) and the limit."""
    from ..aggregate import percentile
    from ..survey import format_time

    got = sa.series_of(i)
    c = sa.assessment.checks[i]
    if got is None or not c.period_start:
        return None
    _, t, x, use = got
    p = next((r for r in sa.rules if i in r.get("check_ids", ())), None)
    period = None
    if p is not None:
        for q in p["periods"]:
            if format_time(q.start_s, sa.survey.timezone) == c.period_start:
                period = q
                break
    if period is None:
        return None
    m = use & (t >= period.start_s - 1e-6) & (t < period.end_s - 1e-6) & np.isfinite(x)
    v = np.sort(x[m])
    if v.size == 0:
        return None
    with _rc():
        fig = _fig(2.4)
        ax = fig.add_subplot(1, 1, 1)
        prob = (np.arange(1, v.size + 1)) / v.size
        ax.step(v, 100 * prob, where="post", color=figures._INK, lw=0.8)
        for q, ls in ((95, "--"), (99, ":")):
            val = float(percentile(v, q))
            ax.axvline(val, color="#4d5966", lw=0.8, ls=ls)
            ax.annotate(f"{q}th {fmt(val, 3)}", (val, q), fontsize=6, ha="right",
                        va="bottom", color="#4d5966")
        if c.limit is not None:
            ax.axvline(c.limit, color=figures._LIMIT_INK, lw=1.2)
            ax.annotate(f"limit {fmt(c.limit, 3)}", (c.limit, 50), fontsize=6, ha="left",
                        color=figures._LIMIT_INK)
        ax.set_xlabel(f"{c.label} {c.channel} [{c.unit}]")
        ax.set_ylabel("cumulative probability [%]")
        ax.set_ylim(0, 101)
        ax.set_title(f"{c.label} {c.channel} in its worst period ({c.statistic})")
        ax.grid(True, color=figures._GRID, lw=0.4)
        fig.tight_layout()
    return fig


def render_survey_pdf(sa, meta, *, results_json: bytes) -> bytes:
    """Render the report of a survey assessment to PDF bytes.

    Parameters
    ----------
    sa : pqcheck.survey.SurveyAssessment
    meta : pqcheck.report.job.ReportMeta
    results_json : bytes
        Embedded as ``results.json`` (the results document of the report).

    Returns
    -------
    bytes
    """
    from reportlab.lib.units import mm
    from reportlab.platypus import PageBreak, SimpleDocTemplate, Spacer

    from ..survey import format_time
    from .archival import to_pdfa
    from .pdf import (
        _MARGIN,
        PAGE_SIZE,
        _Builder,
        _verdict_cell,
        _verdict_para,
        _verdict_style,
        signoff_block,
        verdict_box,
    )

    register_fonts()
    b = _Builder(None, results_json)
    a = sa.assessment
    s = sa.survey
    tz = s.timezone
    # --- page 1 ----------------------------------------------------------------------------
    b.add(Spacer(1, 8 * mm), b.p("HARMONIC SURVEY REPORT", "kicker"))
    b.add(b.p(meta.title, "title"), Spacer(1, 7 * mm))
    c = a.counts
    meaning = {"fail": "At least one statistic exceeds its limit.",
               "inconclusive": "No limit was exceeded, but at least one statistic could not "
                               "be assessed or decided from the survey.",
               "pass": "Every assessed statistic meets its limit.",
               "not applicable": "None of the limits applied to this survey."}.get(a.verdict, "")
    verdict_box(b, a.verdict, f"{meaning} Checks: {c.get('fail', 0)} fail, "
                              f"{c.get('inconclusive', 0)} inconclusive, {c.get('pass', 0)} "
                              f"pass, {c.get('not applicable', 0)} not applicable.")
    pairs = [("Report id", meta.report_id), ("Equipment / site", " / ".join(
        x for x in (meta.equipment, meta.site) if x) or "-"), ("Operator", meta.operator or "-"),
        ("Survey", f"{s.origin}: {format_time(s.start_s, tz)} to {format_time(s.end_s, tz)} "
                   f"({numfmt.value(s.duration_s / 86400, 'days')}); time zone "
                   f"{tz or 'not given (timestamps as written)'}"),
        ("Data", ", ".join(f"{lv.n} x {lv.level} ({int(lv.flagged.sum())} flagged, "
                           f"{int((~lv.complete).sum())} incomplete)" for lv in s.levels))]
    for t in a.tables:
        pairs.append(("Limits", f"{t.table_id}: {designation(t.standard, t.edition)}, "
                                f"{t.title} "
                                f"(SHA-256 {t.sha256})"))
    b.add(b.kv(pairs))
    b.add(Spacer(1, 3 * mm), b.p("Statistics, and the period that decides", "h2"))
    rows = [["table", "quantity", "statistic", "result", "worst", "period"]]
    extra = []
    for r in sa.rules:
        w = sa.worst(r)
        if not r["assessed"]:
            # a statistic the survey cannot give: undecided, said with the undecided glyph
            rows.append([r["table"], r["applies_to"], r["statistic"],
                         b.m(f"<b>{esc(_verdict_cell('inconclusive'))}</b><br/>not assessed",
                             "cell"), r["reason"][len("not assessed: "):], ""])
            extra += _verdict_style(3, len(rows) - 1, "inconclusive")
        elif w is None:
            rows.append([r["table"], r["applies_to"], r["statistic"], "no value", "", ""])
        else:
            value, limit = numfmt.value_and_limit(w["value"], w["limit"], w["unit"])
            rows.append([r["table"], r["applies_to"], r["statistic"],
                         _verdict_para(b, w["verdict"]),
                         f"{w['label']} {w['channel']} {value} / limit {limit}",
                         f"{w['start']} to {w['end']}"])
            extra += _verdict_style(3, len(rows) - 1, w["verdict"])
    b.add(b.table(rows, [0.12, 0.08, 0.2, 0.16, 0.22, 0.22], extra_style=extra))
    not_assessed = [n for n in a.notes if "NOT ASSESSED" in n]
    if not_assessed:
        b.add(Spacer(1, 2 * mm), b.m("<b>Not assessed (the verdict is INCONCLUSIVE for "
                                     "them):</b>", "body"))
        for n in not_assessed:
            b.add(b.p("\u2013 " + n, "small"))
    b.add(b.p("Periods: consecutive 24 h and 7 d periods from the 10 min clock tick at or "
              "before the first interval; when the survey does not end on a period boundary, "
              "one more period ends at the survey's end. Flagged intervals (dip, swell, "
              "interruption) and incomplete ones are left out and counted; a period with "
              "usable values for less than 90 % of its intervals cannot support a pass. "
              "Percentiles: linear interpolation between order statistics (Hyndman-Fan 7).",
              "muted"))
    b.add(PageBreak())
    # --- survey section --------------------------------------------------------------------
    b.h1("Survey")
    b.h2("Data availability per day")
    rows = [["level", "day from", "to", "expected", "present", "usable", "flagged",
             "incomplete", "missing", "coverage"]]
    for lvl, p in sa.availability:
        d = p.to_dict(tz)
        rows.append([lvl, d["start"], d["end"], d["expected"], d["present"], d["usable"],
                     d["flagged"], d["incomplete"], d["missing"],
                     numfmt.fixed(100 * p.coverage, 1, "%")])
    b.tcaption("Intervals per 24 h period from the survey's origin, per aggregation level.")
    b.add(b.table(rows, [0.07, 0.17, 0.17, 0.08, 0.08, 0.08, 0.08, 0.09, 0.08, 0.10],
                  right=(3, 4, 5, 6, 7, 8, 9)))
    b.h2("Statistics per order and phase against the limits (worst first)")
    order = {"fail": 0, "inconclusive": 1, "pass": 2, "not applicable": 3}
    ranked = sorted(range(len(a.checks)), key=lambda i: (
        order.get(a.checks[i].verdict, 4), a.checks[i].margin_percent
        if a.checks[i].margin_percent is not None else math.inf))
    measured = [i for i in ranked if a.checks[i].measured is not None]
    rows = [["verdict", "item", "phase", "statistic", "worst value", "limit", "margin",
             "worst period"]]
    decimals = numfmt.check_decimals(a.checks)
    extra = []
    for i in measured[:_MAX_ROWS]:
        k = a.checks[i]
        value, limit, margin = numfmt.check_cells(k, decimals)
        rows.append([_verdict_para(b, k.verdict), k.label, k.channel, k.statistic,
                     numfmt.marked(value, k.unit), numfmt.marked(limit, k.unit), margin,
                     f"{k.period_start} to {k.period_end}"])
        extra += _verdict_style(0, len(rows) - 1, k.verdict)
    b.tcaption(f"The {min(len(measured), _MAX_ROWS)} assessed statistics closest to their "
               f"limits, of {len(measured)} (all of them, with every period's value, are in "
               "the attached results.json); margin = (limit - value) / limit.")
    b.add(b.table(rows, [0.16, 0.06, 0.06, 0.21, 0.1, 0.09, 0.08, 0.24], right=(4, 5, 6),
                  extra_style=extra))
    unmeasured = len(a.checks) - len(measured)
    if unmeasured:
        b.add(b.p(f"{unmeasured} checks have no value (not assessed, or not in the data); "
                  "they are inconclusive and listed in results.json with the reason.", "small"))
    # --- charts ----------------------------------------------------------------------------
    t0 = s.start_s
    totals = [i for i in ranked if a.checks[i].quantity in ("THD", "TDD")
              and a.checks[i].measured is not None]
    seen, tot_pick = set(), []
    for i in totals:
        key = (a.checks[i].quantity, a.checks[i].channel)
        if key not in seen and len(tot_pick) < 4:
            seen.add(key)
            tot_pick.append(i)
    if tot_pick:
        fig = _time_chart(sa, tot_pick, "THD / TDD over time (usable values)", t0)
        if fig is not None:
            b.figure(fig, "THD and TDD of each phase over the survey, with the limit each "
                     "statistic is compared with.", heading="THD and TDD over time")
    harm = [i for i in measured if a.checks[i].quantity == "harmonic"][:3]
    if harm:
        fig = _time_chart(sa, harm, "binding orders over time (usable values)", t0)
        if fig is not None:
            b.figure(fig, "The harmonic orders closest to (or above) their limits, over the "
                     "survey, with their limit lines.", heading="Binding orders")
    if measured:
        fig = _cdf_chart(sa, measured[0])
        if fig is not None:
            b.figure(fig, "Cumulative probability of the binding quantity in its worst "
                     "period, with the 95th and 99th percentiles and the limit marked.",
                     heading="Cumulative probability of the binding quantity")
    # --- flagged intervals, findings -------------------------------------------------------
    b.h2("Flagged intervals")
    if sa.flagged:
        rows = [["level", "start"]] + [[lvl, format_time(t, tz)]
                                       for lvl, t in sa.flagged[:_MAX_FLAGGED]]
        b.tcaption(f"Intervals flagged (dip, swell or interruption; IEC 61000-4-30), left out "
                   f"of the statistics: {len(sa.flagged)}"
                   + (f", the first {_MAX_FLAGGED} shown" if len(sa.flagged) > _MAX_FLAGGED
                      else "") + ".")
        b.add(b.table(rows, [0.2, 0.5]))
    else:
        b.add(b.p("No interval is flagged.", "body"))
    b.h2("Findings")
    if s.findings:
        for f in s.findings:
            b.add(b.p(f"[{f.severity}] {f.code}: {f.message}", "small"))
    else:
        b.add(b.p("None.", "body"))
    b.h2("Notes")
    for n in a.notes:
        b.add(b.p("\u2013 " + n, "small"))
    b.h2("Inputs")
    for src, sha in zip(s.sources, s.sha256):
        b.add(b.p(f"{src}  SHA-256 {sha}", "mono"))
    for col, meaning in s.mapping[:200]:
        b.add(b.p(f"column {col!r}: {meaning}", "small"))
    signoff_block(b, "Sign-off", meta.report_id, meta.operator)
    b.add(b.p("A pqcheck verdict is an engineering aid, not a certification.", "muted"))

    right = f"Overall verdict: {_verdict_cell(a.verdict)}"
    buf = io.BytesIO()
    doc = SimpleDocTemplate(buf, pagesize=PAGE_SIZE, leftMargin=_MARGIN, rightMargin=_MARGIN,
                            topMargin=17 * mm, bottomMargin=18 * mm,
                            title=f"{meta.title} ({meta.report_id})", author=meta.operator or "",
                            subject="harmonic survey", creator=f"pqcheck {meta.tool_version}",
                            keywords=meta.report_id)
    maker = functools.partial(_SurveyCanvas, report_id=meta.report_id, header_left=meta.title,
                              header_right=right, attachment=results_json)
    doc.build(b.story, canvasmaker=maker)
    return to_pdfa(buf.getvalue(), created=meta.created_utc)


class _SurveyCanvas(_ReportCanvas):
    footer_text = "pqcheck harmonic survey report \u2013 not a certification"
