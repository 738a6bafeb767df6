"""PDF section of a site interconnection study (:class:`pqcheck.site.SiteStudy`).

Built from the report's building blocks: the typography and verdict marks of
:mod:`pqcheck.report.style`, the fixed caution wording of :mod:`pqcheck.report.text` and the
atomic writer of :mod:`pqcheck.files.atomic`. :func:`site_story` returns the section as a list
of reportlab flowables so a larger report can include it; :func:`write_site_pdf` writes it as a
document of its own. Every number comes from the study; nothing is recomputed here.
"""

from __future__ import annotations

import io
import math

from reportlab.lib.pagesizes import A4
from reportlab.lib.units import mm
from reportlab.platypus import Image, KeepTogether, Paragraph, SimpleDocTemplate, Spacer, Table

from ..files.atomic import atomic_open
from .style import (
    ACCENT,
    FONT,
    MUTED,
    RULE,
    SHADE,
    VERDICT_MARK,
    VERDICT_WORD,
    esc,
    fmt,
    styles,
)
from .text import DEFERENCE, SAFETY_CAUTIONS

__all__ = ["site_story", "site_figure_png", "write_site_pdf"]

_SUMMATION_TEXT = {
    "general": "general summation law of IEC TR 61000-3-6 (exponent 1 below order 5, 1.4 for "
               "orders 5 to 10, 2 above 10)",
    "arithmetic": "arithmetic sum of magnitudes (worst case)",
    "phasor": "phasor sum with the measured phase angles",
}


def _table(rows, widths, st, *, head_rows: int = 1) -> Table:
    cells = []
    for r, row in enumerate(rows):
        style = st["cell_head"] if r < head_rows else st["cell"]
        cells.append([c if not isinstance(c, str) else Paragraph(c, style) for c in row])
    t = Table(cells, colWidths=widths, repeatRows=head_rows, hAlign="LEFT")
    t.setStyle([
        ("LINEBELOW", (0, head_rows - 1), (-1, head_rows - 1), 0.6, ACCENT),
        ("LINEBELOW", (0, head_rows), (-1, -1), 0.25, RULE),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
        ("LEFTPADDING", (0, 0), (-1, -1), 2),
        ("RIGHTPADDING", (0, 0), (-1, -1), 2),
        ("BACKGROUND", (0, 0), (-1, head_rows - 1), SHADE),
    ])
    return t


def site_figure_png(study, *, dpi: int = 170) -> bytes:
    """Bar chart of the estimated harmonic currents (% of IL) and voltages (% of nominal) at
    the PCC with their limits, as PNG bytes."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure

    h = study.orders[2:]
    fig = Figure(figsize=(7.0, 4.2))
    axes = fig.subplots(2, 1, sharex=True)
    for ax, values, prefix, ylabel in (
            (axes[0], study.current_percent_il[2:], "I", "current [% of IL]"),
            (axes[1], study.voltage_percent[2:], "V", "voltage [% of nominal]")):
        ax.bar(h, [v if math.isfinite(v) else 0.0 for v in values], width=0.7,
               color="#24404f", label="estimate (worst phase)")
        lim = []
        for o in h:
            c = study.check(f"{prefix}{o}")
            lim.append(c.limit if c is not None else math.nan)
        ax.scatter(h, lim, marker="_", s=70, linewidths=1.4, color="#9a3b2e", label="limit",
                   zorder=3)
        ax.set_ylabel(ylabel, fontsize=7.5)
        ax.tick_params(labelsize=7)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        ax.grid(axis="y", color="#d5dadf", linewidth=0.5)
        ax.legend(fontsize=6.5, frameon=False, loc="upper right")
    axes[1].set_xlabel("harmonic order", fontsize=7.5)
    fig.tight_layout()
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def site_story(study) -> list:
    """The site study as reportlab flowables (heading, inputs, results, checks, headroom,
    findings, cautions)."""
    from ..site import CAUTIONS, MAX_HEADROOM, shown_path

    st = styles()
    s = study.site
    t = s.transformer
    out = [Paragraph("Site interconnection study", st["h1"]),
           Paragraph(esc(s.name), st["subtitle"])]
    mark = VERDICT_MARK[study.verdict]
    out.append(Paragraph(f"{mark} {VERDICT_WORD[study.verdict]}", st["verdict"]))
    out.append(Paragraph(
        "Estimate for planning: the harmonic currents all units inject at the point of common "
        "coupling (PCC) and the voltage distortion they cause through the supply impedance, "
        "compared with the limits below. The utility's own study governs.",
        st["verdict_text"]))
    out.append(Spacer(1, 4 * mm))

    # inputs
    out.append(Paragraph("Supply, transformer and PCC", st["h2"]))
    sup = s.supply
    rows = [["Item", "Value"],
            ["Supply", f"{fmt(sup.nominal_voltage_v / 1e3, 4)} kV; short-circuit power "
                       f"{fmt(sup.ssc_va / 1e6, 4)} MVA ({fmt(sup.isc_a / 1e3, 4)} kA); "
                       f"X/R {fmt(sup.x_over_r, 3)}"]]
    if t is not None:
        rows.append(["Site transformer",
                     f"{fmt(t.rating_va / 1e3, 4)} kVA, {fmt(t.primary_v / 1e3, 4)} / "
                     f"{fmt(t.secondary_v / 1e3, 4)} kV, {fmt(t.impedance_percent, 3)} %, X/R "
                     f"{fmt(t.x_over_r, 3)}, {esc(t.vector_group)}; loading "
                     f"{fmt(study.transformer_loading_percent, 3)} % of rating"])
    where = ("the transformer's primary (supply side)" if t is not None and
             s.pcc_location == "supply" else "the transformer's secondary (units' bus)"
             if t is not None else "the supply terminals")
    rows += [
        ["PCC", f"{fmt(study.pcc_voltage_v / 1e3, 4)} kV at {where}; supply impedance "
                f"{fmt(study.z_pcc_ohm.real, 4)} + j{fmt(study.z_pcc_ohm.imag, 4)} \u03a9 per "
                "phase (resistance constant, reactance proportional to order)"],
        ["ISC, IL, ISC/IL", f"{fmt(study.isc_a, 5)} A; {fmt(study.il_a, 5)} A "
                            f"({study.il_source}); {fmt(study.isc_il, 4)}"],
        ["Summation", _SUMMATION_TEXT[study.summation]],
    ]
    if study.limits is not None:
        rows.append(["Limits", esc(f"{study.limits.standard} {study.limits.edition} "
                                   f"({study.limits.table_id}): " + "; ".join(study.limits.rows))])
    out.append(_table(rows, [32 * mm, 138 * mm], st))

    out.append(Paragraph("Units", st["h2"]))
    rows = [["Unit", "Count", "Load point", "Shift [\u00b0]", "I1 each [A]", "Data"]]
    for u in s.units:
        i1 = max(abs(x) for x in u.spectrum.current[:, 1])
        rows.append([esc(u.name), str(u.count), esc(u.load_point), fmt(u.phase_shift_deg, 3),
                     fmt(i1, 4), esc(shown_path(u.spectrum.source, s.path))])
    o = s.other_load
    if o.demand_w or o.demand_current_a:
        rows.append(["Other load (linear)", "", "", "",
                     fmt(abs(o.current_a(s.bus_voltage_v)), 4),
                     f"{fmt(o.demand_w / 1e3, 4)} kW, PF {fmt(o.power_factor, 3)}"])
    out.append(_table(rows, [36 * mm, 12 * mm, 22 * mm, 14 * mm, 18 * mm, 68 * mm], st))

    # results
    out.append(Paragraph("Estimated distortion at the PCC", st["h2"]))
    out.append(Image(io.BytesIO(site_figure_png(study)), width=170 * mm, height=102 * mm))
    out.append(Paragraph(
        f"Worst phase of each order. Voltage THD {fmt(study.thd_v_percent, 3)} %, TDD "
        f"{fmt(study.tdd_percent, 3)} % (orders 2 to {study.resolved_order}).", st["caption"]))

    rows = [["Check", "Estimate", "Limit", "Margin", "Verdict", "Clause"]]
    shown = [c for c in study.checks if c.quantity != "harmonic" or c.verdict != "pass"
             or c.margin_percent <= 50.0]
    for c in shown:
        rows.append([esc(c.label), f"{fmt(c.measured, 3)} %", f"{fmt(c.limit, 3)} %"
                     + (" \u2020" if c.verify else ""), f"{fmt(c.margin_percent, 3)} %",
                     f"{VERDICT_MARK[c.verdict]} {VERDICT_WORD[c.verdict]}", esc(c.clause)])
    out.append(_table(rows, [22 * mm, 24 * mm, 24 * mm, 24 * mm, 34 * mm, 42 * mm], st))
    hidden = len(study.checks) - len(shown)
    out.append(Paragraph(
        f"Totals, every check not passed and every order above half its limit are listed; "
        f"{hidden} further individual-order checks pass with more than half the limit to "
        "spare. \u2020 verify the limit against your copy of the standard.", st["caption"]))

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
                more, bind = f"more than {MAX_HEADROOM}", "none reached"
            else:
                more = str(hr.extra_units)
                bind = (f"{esc(hr.binding)}: {fmt(hr.binding_value, 3)} % > "
                        f"{fmt(hr.binding_limit, 3)} %")
            rating = "\u2013" if hr.extra_units_rating is None else \
                f"reached after {hr.extra_units_rating} more"
            rows.append([esc(hr.unit), str(hr.count), more, bind, rating])
        out.append(_table(rows, [40 * mm, 14 * mm, 34 * mm, 48 * mm, 34 * mm], st))
        out.append(Paragraph(
            "One kind at a time, the others unchanged; the limit that binds is the one "
            "exceeded at one unit more. The transformer rating is informative (fundamental "
            "apparent power at the bus).", st["caption"]))

    if study.findings:
        out.append(Paragraph("Findings", st["h2"]))
        for f in study.findings:
            out.append(Paragraph(f"[{esc(f.severity)}] {esc(f.code)}: {esc(f.message)}",
                                 st["bullet"], bulletText="\u2022"))

    cautions = [Paragraph("Cautions", st["h2"])]
    for c in CAUTIONS + (DEFERENCE,) + tuple(SAFETY_CAUTIONS):
        cautions.append(Paragraph(esc(c), st["bullet"], bulletText="\u2022"))
    out.append(KeepTogether(cautions[:3]))
    out += cautions[3:]
    return out


def _footer(canvas, doc, text: str) -> None:
    canvas.saveState()
    canvas.setFont(FONT, 7)
    canvas.setFillColor(MUTED)
    canvas.drawString(20 * mm, 10 * mm, text[:120])
    canvas.drawRightString(190 * mm, 10 * mm, f"page {doc.page}")
    canvas.restoreState()


def write_site_pdf(study, path, *, force: bool = False) -> None:
    """Write the site study as a PDF document.

    Parameters
    ----------
    study : SiteStudy
    path : str or os.PathLike
        Output file.
    force : bool
        Replace an existing file.

    Raises
    ------
    ReportError
        The file exists and ``force`` is false, or it cannot be written.
    """
    from .. import __version__

    story = site_story(study)
    foot = f"pqcheck {__version__} site study: {study.site.name} \u2013 estimate for planning"
    buf = io.BytesIO()
    doc = SimpleDocTemplate(buf, pagesize=A4, leftMargin=20 * mm, rightMargin=20 * mm,
                            topMargin=18 * mm, bottomMargin=18 * mm,
                            title=f"Site study: {study.site.name}", author="pqcheck",
                            subject="Site interconnection study (estimate for planning)")
    doc.build(story, onFirstPage=lambda c, d: _footer(c, d, foot),
              onLaterPages=lambda c, d: _footer(c, d, foot))
    with atomic_open(path, "wb", force=force, option="-o") as fh:
        fh.write(buf.getvalue())
