"""PDF report of a site interconnection study (:class:`pqcheck.site.SiteStudy`).

Built from the test report's parts, so both read alike: the typography, palette and verdict
marks of :mod:`pqcheck.report.style`, the spectrum charts of :mod:`pqcheck.report.figures`
(failing orders filled black and marked with a cross and their number, the legend above the
axes), the page canvas of :mod:`pqcheck.report.pdf` (report id and "page X of Y" on every
page, the results JSON attached as ``results.json``) and the fixed caution wording of
:mod:`pqcheck.report.text`. :func:`render_site_pdf` returns the document as bytes; every
number comes from the study, nothing is recomputed here.

Contents: verdict and what decides it (failing checks, the closest passes, the verdict under
each summation method); supply, transformer, PCC and units; the estimated spectra against
the limits; every check that decides; headroom; findings; method; traceability (SHA-256 of
every input and of the attached results); safety cautions; sign-off.
"""

from __future__ import annotations

import functools
import hashlib
import io
from datetime import datetime

import numpy as np
from reportlab.lib.units import mm
from reportlab.platypus import (
    CondPageBreak,
    Image,
    KeepTogether,
    Paragraph,
    SimpleDocTemplate,
    Spacer,
    Table,
    TableStyle,
)

from .. import numfmt
from .figures import FIG_WIDTH_IN, SpectrumData, SpectrumPanel, plot_spectrum, to_png
from .pdf import ATTACHMENT_NAME, PAGE_SIZE, _ReportCanvas
from .style import (
    ACCENT,
    INK,
    RULE,
    SHADE,
    SHADE_DARK,
    VERDICT_MARK,
    VERDICT_WORD,
    esc,
    fmt,
    register_fonts,
    styles,
)
from .text import DEFERENCE, NOT_CERTIFICATION, SAFETY_CAUTIONS

__all__ = ["render_site_pdf", "site_spectrum_data", "SUMMATION_TEXT"]

SUMMATION_TEXT = {
    "general": "general summation law of IEC TR 61000-3-6 (exponent 1 below order 5, 1.4 for "
               "orders 5 to 10, 2 above 10)",
    "arithmetic": "arithmetic sum of magnitudes (worst case)",
    "phasor": "phasor sum with the measured phase angles",
}

_MARGIN = 18 * mm
_WIDTH = PAGE_SIZE[0] - 2 * _MARGIN
_BASIS = {"current": "% of IL", "voltage": "% of nominal voltage"}
_FIG_DPI = 170
_CLOSEST = 5


class _SiteCanvas(_ReportCanvas):
    footer_text = "pqcheck site interconnection study \u2013 estimate for planning"


def _table(rows, fractions, st, *, head_rows: int = 1, extra=()) -> Table:
    cells = []
    for r, row in enumerate(rows):
        style = st["cell_head"] if r < head_rows else st["cell"]
        cells.append([c if not isinstance(c, str) else Paragraph(c, style) for c in row])
    t = Table(cells, colWidths=[f * _WIDTH for f in fractions], repeatRows=head_rows,
              hAlign="LEFT")
    t.setStyle(TableStyle([
        ("LINEBELOW", (0, head_rows - 1), (-1, head_rows - 1), 0.6, ACCENT),
        ("LINEBELOW", (0, head_rows), (-1, -1), 0.25, RULE),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
        ("LEFTPADDING", (0, 0), (-1, -1), 2),
        ("RIGHTPADDING", (0, 0), (-1, -1), 2),
        ("BACKGROUND", (0, 0), (-1, head_rows - 1), SHADE),
        *extra,
    ]))
    return t


def _verdict_text(verdict: str) -> str:
    return f"{VERDICT_MARK[verdict]} {VERDICT_WORD[verdict]}" if verdict else "\u2013"


# ---------------------------------------------------------------------------------------------
# Figures
# ---------------------------------------------------------------------------------------------


def site_spectrum_data(study, applies_to: str) -> SpectrumData:
    """The estimated harmonic currents (``"current"``, % of IL) or voltages (``"voltage"``,
    % of the nominal voltage) at the PCC with their limits and verdicts, as the test report's
    spectrum record (worst phase of each order; nothing computed)."""
    orders = np.asarray(study.orders[2:])
    values = study.current_percent_il if applies_to == "current" else study.voltage_percent
    prefix = "I" if applies_to == "current" else "V"
    limit, verdicts = [], []
    for h in orders:
        c = study.check(f"{prefix}{h}")
        limit.append(c.limit if c is not None else np.nan)
        verdicts.append(c.verdict if c is not None else "")
    what = "current" if applies_to == "current" else "voltage"
    panel = SpectrumPanel(label="worst phase", orders=orders,
                          measured=np.asarray(values[2:], dtype=float),
                          limit=np.asarray(limit, dtype=float), verdicts=tuple(verdicts))
    return SpectrumData(title=f"Estimated harmonic {what} at the PCC", unit=_BASIS[applies_to],
                        panels=(panel,), note=f"{study.summation} summation")


def _figure_png(study, applies_to: str) -> bytes:
    fig = plot_spectrum(site_spectrum_data(study, applies_to))
    return to_png(fig, dpi=_FIG_DPI)


def _image(png: bytes) -> Image:
    from reportlab.lib.utils import ImageReader

    w, h = ImageReader(io.BytesIO(png)).getSize()
    width = min(_WIDTH, FIG_WIDTH_IN * 72)
    return Image(io.BytesIO(png), width=width, height=width * h / w)


# ---------------------------------------------------------------------------------------------
# Sections
# ---------------------------------------------------------------------------------------------


def _first_page(study, report: dict, st) -> list:
    s = study.site
    out = [Paragraph("SITE INTERCONNECTION STUDY \u2013 ESTIMATE FOR PLANNING", st["kicker"]),
           Paragraph(esc(report.get("title") or "Site interconnection study"), st["title"]),
           Paragraph(esc(s.name), st["subtitle"]), Spacer(1, 3 * mm)]
    verdict = study.verdict
    box = Table([[Paragraph(esc(_verdict_text(verdict)), st["verdict"])],
                 [Paragraph(esc(_verdict_sentence(study)), st["verdict_text"])]],
                colWidths=[_WIDTH], hAlign="LEFT")
    box.setStyle(TableStyle([("BOX", (0, 0), (-1, -1), 1.2, INK),
                             ("BACKGROUND", (0, 0), (-1, -1), SHADE),
                             ("LEFTPADDING", (0, 0), (-1, -1), 6),
                             ("TOPPADDING", (0, 0), (-1, -1), 4),
                             ("BOTTOMPADDING", (0, 0), (-1, -1), 5)]))
    out += [box, Spacer(1, 3 * mm)]
    created = _created_text(report)
    rows = [["Report id", esc(report.get("id", ""))], ["Date of study", esc(created)],
            ["Prepared by", esc(report.get("operator") or "\u2013")],
            ["Site file", esc(study_path(study, study.site.path))],
            ["Limits", esc(_limits_text(study))],
            ["Summation", esc(SUMMATION_TEXT[study.summation])]]
    out.append(_table([["Item", "Value"]] + rows, [0.2, 0.8], st))

    # what decides
    out.append(Paragraph("What decides the verdict", st["h2"]))
    failing = [c for c in study.checks if c.verdict == "fail"]
    undecided = [c for c in study.checks if c.verdict == "inconclusive"]
    closest = sorted((c for c in study.checks if c.verdict == "pass"
                      and c.margin_percent is not None), key=lambda c: c.margin_percent)
    rows = [["Check", "Estimate", "Limit", "Margin", "Verdict", "Phase or reason"]]
    decimals = numfmt.check_decimals(study.checks)
    for c in failing + closest[:_CLOSEST]:
        rows.append(_check_row(c, decimals))
    out.append(_table(rows, [0.09, 0.2, 0.16, 0.1, 0.16, 0.29], st))
    out.append(Paragraph(
        f"{len(failing)} check(s) exceed their limit; the {min(_CLOSEST, len(closest))} "
        "closest passes follow the failures. Margin is (limit \u2212 estimate) / limit: "
        "negative when the limit is exceeded.", st["caption"]))
    if undecided:
        groups: dict = {}
        for c in undecided:
            groups.setdefault(c.note.split("; ")[0] or "not measured", []).append(c.label)
        rows = [["Why undecided", "Checks"]]
        rows += [[esc(why), esc(", ".join(labels))] for why, labels in groups.items()]
        out.append(_table(rows, [0.45, 0.55], st))
        out.append(Paragraph(
            f"{len(undecided)} check(s) are inconclusive, grouped by their reason; an "
            "inconclusive check is never a pass.", st["caption"]))

    out.append(Paragraph("How the verdict depends on the summation method", st["h2"]))
    rows = [["Summation", "Verdict", "Failing checks", "Closest to its limit"]]
    for o in study.by_summation:
        name = o.summation + (" (used)" if o.summation == study.summation else "")
        if not o.verdict:
            rows.append([esc(name), "not computed", esc(o.note), ""])
            continue
        closest_txt = "\u2013" if not o.closest else \
            f"{esc(o.closest)}: margin {numfmt.margin(o.closest_margin_percent)}"
        rows.append([esc(name), esc(_verdict_text(o.verdict)),
                     esc(", ".join(o.failing) or "none"), closest_txt])
    out.append(_table(rows, [0.18, 0.17, 0.4, 0.25], st))
    out.append(Paragraph(
        "The same units, supply and limits with the units' harmonic currents combined by each "
        "method: arithmetic is the worst case, the phasor sum uses the measured phase angles "
        "(possible only when a voltage was measured with every unit), the general summation "
        "law lies between them.", st["caption"]))
    return out


def _verdict_sentence(study) -> str:
    fails = [c.label for c in study.checks if c.verdict == "fail"]
    if study.verdict == "fail":
        return (f"The estimate at the PCC exceeds {len(fails)} limit(s): {', '.join(fails)}. "
                "The utility's own study governs.")
    if study.verdict == "inconclusive":
        return ("No limit is exceeded by the estimate, but some checks could not be decided "
                "(see below). The utility's own study governs.")
    if study.verdict == "pass":
        return ("The estimate at the PCC meets every limit of the table applied. The "
                "utility's own study governs.")
    return "No limit of the table applied to this site. The utility's own study governs."


def _created_text(report: dict) -> str:
    try:
        return datetime.fromisoformat(report["time_of_analysis_utc"]).strftime(
            "%Y-%m-%d %H:%M UTC")
    except (KeyError, TypeError, ValueError):
        return "\u2013"


def _limits_text(study) -> str:
    lim = study.limits
    if lim is None:
        return "\u2013"
    from ..limits import designation

    return f"{designation(lim.standard, lim.edition)} ({lim.table_id}): " + "; ".join(lim.rows)


def study_path(study, path) -> str:
    """A path as the report shows it: relative to the site file's folder when inside it."""
    from ..site import shown_path

    if path is None or path == "":
        return "\u2013"
    if study.site.path is not None and str(path) == str(study.site.path):
        return study.site.path.name
    return shown_path(str(path), study.site.path)


def _check_row(c, decimals=None) -> list:
    """Cells of a check: numbers by :func:`pqcheck.numfmt.check_cells` (``decimals``: its
    :func:`~pqcheck.numfmt.check_decimals` over the study's checks), the mark after the unit."""
    basis = _BASIS.get(c.applies_to, "")
    measured, limit, margin = numfmt.check_cells(c, decimals)
    value = "not measured" if c.measured is None else numfmt.marked(measured, basis)
    limit = numfmt.marked(numfmt.marked(limit, basis), "\u2020" if c.verify else "")
    why = c.note or (f"phase {c.phase}" if c.phase else "")
    return [esc(c.label), esc(value), esc(limit), margin,
            esc(_verdict_text(c.verdict)), esc(why)]


def _inputs_section(study, st) -> list:
    s = study.site
    t = s.transformer
    out = [CondPageBreak(60 * mm), Paragraph("Supply, transformer and PCC", st["h2"])]
    sup = s.supply
    rows = [["Item", "Value"],
            ["Supply", f"{numfmt.given(sup.nominal_voltage_v / 1e3)} kV; short-circuit power "
                       f"{numfmt.given(sup.ssc_va / 1e6)} MVA ({fmt(sup.isc_a / 1e3, 4)} kA); "
                       f"X/R {numfmt.given(sup.x_over_r)}"]]
    if t is not None:
        rows.append(["Site transformer",
                     f"{numfmt.given(t.rating_va / 1e3)} kVA, {numfmt.given(t.primary_v / 1e3)} / "
                     f"{numfmt.given(t.secondary_v / 1e3)} kV, "
                     f"{numfmt.given(t.impedance_percent)} %, X/R {numfmt.given(t.x_over_r)}, "
                     f"{esc(t.vector_group)}; loading "
                     f"{numfmt.value(study.transformer_loading_percent, 'percent')} of rating"])
    where = ("the transformer's primary (supply side)" if t is not None and
             s.pcc_location == "supply" else "the transformer's secondary (units' bus)"
             if t is not None else "the supply terminals")
    rows += [
        ["PCC", f"{fmt(study.pcc_voltage_v / 1e3, 4)} kV at {where}; supply impedance "
                f"{fmt(study.z_pcc_ohm.real, 4)} + j{fmt(study.z_pcc_ohm.imag, 4)} \u03a9 per "
                "phase (resistance constant, reactance proportional to order)"],
        ["ISC, IL, ISC/IL", f"ISC {fmt(study.isc_a, 5)} A (nominal voltage over the PCC "
                            f"impedance); IL {fmt(study.il_a, 5)} A ({study.il_source}"
                            + (" by the utility" if study.il_source == "stated" else
                               ": largest phase fundamental of all units and the other load")
                            + f"); ISC/IL {fmt(study.isc_il, 4)}"],
    ]
    if s.notes:
        rows.append(["Notes", esc(s.notes)])
    out.append(_table(rows, [0.18, 0.82], st))

    out.append(Paragraph("Units", st["h2"]))
    rows = [["Unit", "Count", "Load point", "Shift [\u00b0]", "I1 each [A]", "Data"]]
    for u in s.units:
        i1 = max(abs(x) for x in u.spectrum.current[:, 1])
        rows.append([esc(u.name), str(u.count), esc(u.load_point), fmt(u.phase_shift_deg, 3),
                     fmt(i1, 4), esc(study_path(study, u.spectrum.source))])
    o = s.other_load
    if o.demand_w or o.demand_current_a:
        rows.append(["Other load (linear)", "", "", "",
                     fmt(abs(o.current_a(s.bus_voltage_v)), 4),
                     f"{fmt(o.demand_w / 1e3, 4)} kW, PF {fmt(o.power_factor, 3)}"])
    out.append(_table(rows, [0.22, 0.07, 0.13, 0.08, 0.11, 0.39], st))
    return out


def _results_section(study, st) -> list:
    out = [CondPageBreak(90 * mm), Paragraph("Estimated distortion at the PCC", st["h2"])]
    for applies_to, what in (("current", "harmonic currents in % of IL"),
                             ("voltage", "harmonic voltages in % of the nominal "
                                         "line-to-neutral voltage")):
        out.append(KeepTogether([
            _image(_figure_png(study, applies_to)),
            Paragraph(f"Estimated {what}, worst phase of each order ({study.summation} "
                      "summation), against the limits. Failing orders are filled black and "
                      "marked \u2715 with their number.", st["caption"])]))
    out.append(Paragraph(
        f"Voltage THD {numfmt.value(study.thd_v_percent, 'distortion')} of the nominal "
        f"voltage, TDD {numfmt.value(study.tdd_percent, 'distortion')} of IL (orders 2 to "
        f"{study.resolved_order}, worst "
        "phase).", st["body"]))

    out.append(Paragraph("Checks", st["h2"]))
    rows = [["Check", "Estimate", "Limit", "Margin", "Verdict", "Clause"]]
    shown = [c for c in study.checks if c.quantity != "harmonic" or c.verdict != "pass"
             or (c.margin_percent is not None and c.margin_percent <= 50.0)]
    decimals = numfmt.check_decimals(study.checks)
    for c in shown:
        row = _check_row(c, decimals)
        rows.append(row[:5] + [esc(c.clause)])
    out.append(_table(rows, [0.09, 0.22, 0.2, 0.1, 0.16, 0.23], st))
    hidden = len(study.checks) - len(shown)
    out.append(Paragraph(
        f"Totals, every check not passed and every order within half its limit are listed; "
        f"{hidden} further individual-order checks pass with more than half the limit to "
        "spare (all are in the attached results). \u2020 verify the limit against your copy "
        "of the standard.", st["caption"]))

    if study.headroom:
        out.append(Paragraph("Headroom", st["h2"]))
        rows = [["Unit", "Count", "More units that fit", "Limit that binds first",
                 "Transformer rating"]]
        for hr in study.headroom:
            if hr.already_exceeded:
                more = ("none: exceeded even without this kind" if hr.passing_count is None
                        else f"none: limits met with {hr.passing_count} of this kind")
                bind = f"{esc(hr.binding)} (already exceeded)"
            elif hr.extra_units is None:
                more, bind = f"more than {hr.searched_up_to}", "none reached"
            else:
                more = str(hr.extra_units)
                value, limit = numfmt.column([hr.binding_value, hr.binding_limit],
                                             reference=[hr.binding_limit], unit="%")
                bind = f"{esc(hr.binding)}: {value} > {limit}"
            rating = "\u2013" if hr.extra_units_rating is None else \
                f"reached after {hr.extra_units_rating} more"
            rows.append([esc(hr.unit), str(hr.count), more, bind, rating])
        out.append(_table(rows, [0.24, 0.08, 0.24, 0.26, 0.18], st))
        out.append(Paragraph(
            "One kind at a time, the others unchanged; the limit that binds is the one "
            "exceeded at one unit more. The transformer rating is informative (fundamental "
            "apparent power at the bus).", st["caption"]))

    if study.findings:
        out.append(Paragraph("Findings", st["h2"]))
        for f in study.findings:
            out.append(Paragraph(f"[{esc(f.severity)}] {esc(f.code)}: {esc(f.message)}",
                                 st["bullet"], bulletText="\u2022"))
    return out


def _method_section(study, st) -> list:
    return [CondPageBreak(40 * mm), Paragraph("Method", st["h2"]), Paragraph(esc(
        "Every unit is a harmonic current source with the spectrum measured at its load point "
        "(IEC 61000-4-7 harmonic components: rms over the capture, phase of the mean phasor). "
        "Units behind a phase-shifting transformer are rotated by symmetrical components; "
        "units on the site bus reach the PCC through the site transformer (ratio, vector-group "
        "shift, zero-sequence blocking) when the PCC is on its primary. The currents of all "
        f"units are combined per phase and order by the {SUMMATION_TEXT[study.summation]}; "
        "the harmonic voltage is |R + j h X| times the current, with the supply impedance seen "
        "from the PCC. Each value is the worst of the three phases, compared with 1.0 times "
        "the limit."), st["body"])]


def _traceability_section(study, report: dict, results_json: bytes, st) -> list:
    hash_style = st["hash"]
    out = [CondPageBreak(60 * mm), Paragraph("Traceability", st["h2"]), Paragraph(
        "SHA-256 digests of every file this study rests on. Recompute them (for example with "
        "sha256sum) to confirm that an archived file is the one used; pqcheck verify re-runs "
        "the study from them and compares every number.", st["body"])]
    rows = [["Item", "File", "SHA-256"]]
    for what, name, path, sha in study.inputs:
        item = what if what in ("site file",) else f"{what} {name}"
        shown = study_path(study, path) if path else "bundled with pqcheck"
        rows.append([esc(item), Paragraph(esc(shown), hash_style),
                     Paragraph(esc(sha or "\u2013"), hash_style)])
    rows.append([f"results ({ATTACHMENT_NAME}, attached to this PDF)", ATTACHMENT_NAME,
                 Paragraph(hashlib.sha256(results_json).hexdigest(), hash_style)])
    out.append(_table(rows, [0.22, 0.25, 0.53], st))
    from .. import __version__

    rows = [["Report id", esc(report.get("id", ""))],
            ["Time of study", esc(_created_text(report))],
            ["Tool", f"pqcheck {__version__}"],
            ["Results data", f"The file {ATTACHMENT_NAME} attached to this PDF holds every "
                             "number of this study in machine-readable form (open the "
                             "attachments panel of your PDF reader)."]]
    out += [Spacer(1, 2 * mm), _table([["Item", "Value"]] + rows, [0.18, 0.82], st)]
    return out


def _cautions_section(st) -> list:
    from ..site import CAUTIONS

    out = [CondPageBreak(50 * mm), Paragraph("Safety, limitations and standing of this study",
                                             st["h2"])]
    for c in CAUTIONS + tuple(SAFETY_CAUTIONS):
        out.append(Paragraph(esc(c), st["bullet"], bulletText="\u2022"))
    out.append(Paragraph(esc(DEFERENCE), st["body"]))
    out.append(Paragraph(esc(NOT_CERTIFICATION), st["body"]))
    return out


def _signoff_section(report: dict, st) -> list:
    block = [Paragraph("Sign-off", st["h2"]),
             Paragraph(esc("By signing, each person confirms the part of the work named. The "
                           "reviewer and approver confirm that the site data (supply, "
                           "transformer, units and their counts) describe the installation, "
                           "that the findings have been considered, and that the verdict "
                           "follows from the results."), st["body"]),
             Spacer(1, 3 * mm)]
    rows = [[Paragraph(x, st["cell_head"]) for x in ("Role", "Name", "Date", "Signature")]]
    for role, what in (("Prepared by", "site data and study"),
                       ("Reviewed by", "independent technical review"),
                       ("Approved by", "release of the study")):
        rows.append([Paragraph(f"<b>{role}</b><br/><font size='6.5' color='#5b6670'>"
                               f"{what}</font>", st["cell"]), "", "", ""])
    t = Table(rows, colWidths=[0.22 * _WIDTH, 0.32 * _WIDTH, 0.16 * _WIDTH, 0.30 * _WIDTH],
              rowHeights=[None] + [17 * mm] * 3, hAlign="LEFT")
    t.setStyle(TableStyle([
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("BACKGROUND", (0, 0), (-1, 0), SHADE_DARK),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, ACCENT),
        ("GRID", (0, 1), (-1, -1), 0.5, RULE),
        ("BOX", (0, 0), (-1, -1), 0.8, INK),
    ]))
    block.append(t)
    block.append(Spacer(1, 2 * mm))
    block.append(Paragraph(esc(f"Study {report.get('id', '')}. Write names in capitals; date "
                               "as YYYY-MM-DD."), st["muted"]))
    return [CondPageBreak(90 * mm), KeepTogether(block)]


# ---------------------------------------------------------------------------------------------
# Entry point
# ---------------------------------------------------------------------------------------------


def render_site_pdf(study, *, report: dict, results_json: bytes) -> bytes:
    """Render the site study report to PDF bytes.

    Parameters
    ----------
    study : SiteStudy
    report : dict
        Who and when, as recorded in the results: ``title``, ``operator``, ``id``,
        ``time_of_analysis_utc`` (ISO 8601).
    results_json : bytes
        The results JSON (the JSON file the command writes), embedded as ``results.json``.

    Returns
    -------
    bytes
        The PDF document.
    """
    register_fonts()
    st = styles()
    story = _first_page(study, report, st)
    story += _inputs_section(study, st)
    story += _results_section(study, st)
    story += _method_section(study, st)
    story += _traceability_section(study, report, results_json, st)
    story += _cautions_section(st)
    story += _signoff_section(report, st)
    title = report.get("title") or "Site interconnection study"
    rid = str(report.get("id", ""))
    buf = io.BytesIO()
    doc = SimpleDocTemplate(buf, pagesize=PAGE_SIZE, leftMargin=_MARGIN, rightMargin=_MARGIN,
                            topMargin=17 * mm, bottomMargin=18 * mm, title=f"{title} ({rid})",
                            author=report.get("operator") or "", subject=study.site.name,
                            creator="pqcheck", keywords=rid)
    maker = functools.partial(
        _SiteCanvas, report_id=rid,
        header_left=f"{title} \u2013 {study.site.name}",
        header_right="Verdict: " + _verdict_text(study.verdict), attachment=results_json)
    doc.build(story, canvasmaker=maker)
    from .archival import to_pdfa  # archival like every pqcheck PDF (PDF/A-3b)

    return to_pdfa(buf.getvalue())
