"""The PDF report (reportlab platypus), rendered from a :class:`~pqcheck.report.job.ReportJob`.

:func:`render_pdf` returns the bytes of the document; writing them is the caller's business
(:mod:`pqcheck.files.atomic`). The results JSON travels inside the PDF as an embedded file
(``results.json``), so the paperwork and its data stay together.

Layout: a cover with the overall verdict, then (1) summary, (2) results per capture, (3) data
quality, (4) method and settings, (5) measurement uncertainty, (6) traceability, (7) safety and
standing of the report, (8) sign-off. Every page after the cover repeats the equipment and the
overall verdict at the top; every page carries the report id and "page n of N" at the bottom.

Numbers are formatted, never computed, here: every value comes from the analysis result, the
assessment's checks, or the tidy frames of :mod:`pqcheck.export`.
"""

from __future__ import annotations

import functools
import hashlib
import io
import itertools
import platform
import re
from datetime import timezone
from pathlib import Path

from reportlab.lib import colors
from reportlab.lib.pagesizes import A4
from reportlab.lib.units import mm
from reportlab.pdfbase.pdfdoc import PDFArray, PDFDictionary, PDFName, PDFStream, PDFString
from reportlab.pdfgen import canvas as rl_canvas
from reportlab.platypus import (
    CondPageBreak,
    Image,
    KeepTogether,
    PageBreak,
    Paragraph,
    SimpleDocTemplate,
    Spacer,
    Table,
    TableStyle,
)

from .. import numfmt
from ..findings import channel_flags
from . import figures, text
from .job import NOT_ASSESSED
from .style import (
    ACCENT,
    FONT,
    FONT_BOLD,
    INK,
    MUTED,
    RULE,
    SHADE,
    SHADE_DARK,
    SUBSTITUTED,
    VERDICT_MARK,
    VERDICT_WORD,
    esc,
    fmt_pct,
    printable,
    register_fonts,
    reset_substitutions,
    shown_path,
    styles,
)
from .text import merge_variants, split_remarks

__all__ = ["render_pdf", "ATTACHMENT_NAME", "PAGE_SIZE"]

ATTACHMENT_NAME = "results.json"
PAGE_SIZE = A4
_MARGIN = 18 * mm
_WIDTH = PAGE_SIZE[0] - 2 * _MARGIN
_FIG_DPI = 200
_MAX_LISTED = 40

_PHASE_ORDER = {"a": 0, "": 0, "b": 1, "c": 2, "n": 3}


# ---------------------------------------------------------------------------------------------
# Canvas: header, footer with page n of N, embedded results file
# ---------------------------------------------------------------------------------------------


class _ReportCanvas(rl_canvas.Canvas):
    """Canvas that draws header and footer once the page count is known, and embeds the
    results JSON as a file attachment."""

    footer_text = "pqcheck harmonic emission report \u2013 not a certification"

    def __init__(self, *args, report_id: str, header_left: str, header_right: str,
                 attachment: bytes, **kwargs):
        super().__init__(*args, **kwargs)
        self._pages = []
        self._report_id = report_id
        self._header_left = header_left
        self._header_right = header_right
        self._attachment = attachment

    def showPage(self):  # noqa: N802 (reportlab API)
        self._pages.append(dict(self.__dict__))
        self._startPage()

    def save(self):
        total = len(self._pages)
        for state in self._pages:
            self.__dict__.update(state)
            self._decorate(total)
            super().showPage()
        self._embed_attachment()
        super().save()

    def _decorate(self, total: int) -> None:
        page = self._pageNumber
        w, h = PAGE_SIZE
        self.saveState()
        self.setStrokeColor(RULE)
        self.setLineWidth(0.5)
        # footer
        self.line(_MARGIN, 13 * mm, w - _MARGIN, 13 * mm)
        self.setFont(FONT, 7)
        self.setFillColor(MUTED)
        self.drawString(_MARGIN, 9 * mm, f"Report {self._report_id}")
        self.drawCentredString(w / 2, 9 * mm, self.footer_text)
        self.setFont(FONT_BOLD, 7)
        self.setFillColor(INK)
        self.drawRightString(w - _MARGIN, 9 * mm, f"Page {page} of {total}")
        # header (not on the cover)
        if page > 1:
            self.setFont(FONT, 7)
            self.setFillColor(MUTED)
            left = self._header_left
            if len(left) > 90:
                left = left[:89] + "\u2026"
            self.drawString(_MARGIN, h - 11 * mm, left)
            self.setFont(FONT_BOLD, 7)
            self.setFillColor(INK)
            self.drawRightString(w - _MARGIN, h - 11 * mm, self._header_right)
            self.line(_MARGIN, h - 12.8 * mm, w - _MARGIN, h - 12.8 * mm)
        self.restoreState()

    def _embed_attachment(self) -> None:
        data = self._attachment
        if not data:
            return
        params = PDFDictionary({
            "Size": len(data),
            "CheckSum": PDFString(hashlib.md5(data).digest(), enc="raw"),  # noqa: S324 (PDF spec)
        })
        stream = PDFStream(PDFDictionary({"Type": PDFName("EmbeddedFile"),
                                          "Subtype": "/application#2Fjson",
                                          "Params": params}), content=data)
        spec = PDFDictionary({
            "Type": PDFName("Filespec"),
            "F": PDFString(ATTACHMENT_NAME),
            "UF": PDFString(ATTACHMENT_NAME),
            "Desc": PDFString(f"Results of report {self._report_id} (pqcheck JSON)"),
            "AFRelationship": PDFName("Data"),
            "EF": PDFDictionary({"F": stream, "UF": stream}),
        })
        doc = self._doc
        ref = doc.Reference(spec)
        doc.Catalog.Names = PDFDictionary({"EmbeddedFiles": PDFDictionary(
            {"Names": PDFArray([PDFString(ATTACHMENT_NAME), ref])})})
        doc.Catalog.AF = PDFArray([ref])


# ---------------------------------------------------------------------------------------------
# Small building blocks
# ---------------------------------------------------------------------------------------------


class _Builder:
    """Collects flowables; holds the styles and the job."""

    def __init__(self, job, results_json: bytes):
        self.job = job
        self.st = styles()
        # dense tables (the appendix's full harmonic tables): the cell type, closer set
        from reportlab.lib.styles import ParagraphStyle

        for name in ("cell", "cell_r", "cell_head", "cell_head_r"):
            self.st[name + "_t"] = ParagraphStyle(name + "_t", parent=self.st[name],
                                                  fontSize=6.9, leading=7.9)
        self.story = []
        self.results_json = results_json
        self.fig_count = 0
        self.table_count = 0
        self._decimals: dict = {}

    def cells(self, run, chk) -> tuple:
        """``(measured, limit, margin)`` texts of a check (:func:`pqcheck.numfmt.check_cells`):
        decimals of its table and basis over every check of the capture, as the terminal and
        the Markdown table write them."""
        return numfmt.check_cells(chk, self.decimals(run))

    def decimals(self, run) -> dict:
        """:func:`pqcheck.numfmt.check_decimals` of every check of ``run``."""
        if id(run) not in self._decimals:
            self._decimals[id(run)] = numfmt.check_decimals(run.checks)
        return self._decimals[id(run)]

    # -- text --
    def p(self, text_plain: str, style: str = "body") -> Paragraph:
        """Paragraph of plain (untrusted) text: escaped."""
        return Paragraph(esc(text_plain), self.st[style])

    def m(self, markup: str, style: str = "body") -> Paragraph:
        """Paragraph of trusted markup (its variable parts already escaped)."""
        return Paragraph(markup, self.st[style])

    def add(self, *flowables) -> None:
        self.story.extend(flowables)

    def h1(self, title: str) -> None:
        self.add(CondPageBreak(60 * mm), self.p(title, "h1"))

    def h2(self, title: str) -> None:
        self.add(CondPageBreak(45 * mm), self.p(title, "h2"))

    def h3(self, title: str) -> None:
        self.add(CondPageBreak(35 * mm), self.p(title, "h3"))

    # -- tables --
    def cell(self, value, style: str = "cell") -> Paragraph:
        if isinstance(value, Paragraph):
            return value
        return Paragraph(esc("" if value is None else value), self.st[style])

    def table(self, rows, widths, *, header: bool = True, right=(), zebra: bool = True,
              extra_style=(), repeat: bool = True, dense: bool = False) -> Table:
        """A report table: header row shaded, thin rules, optional zebra striping.

        ``rows`` holds strings (escaped here) or Paragraphs (used as they are); ``right`` lists
        the columns aligned right; ``widths`` are fractions of the text width.
        """
        out = []
        t_ = "_t" if dense else ""
        pad = 0.7 if dense else 2.2
        for i, row in enumerate(rows):
            cells = []
            for j, v in enumerate(row):
                if header and i == 0:
                    cells.append(self.cell(v, ("cell_head_r" if j in right else "cell_head")
                                           + t_))
                else:
                    cells.append(self.cell(v, ("cell_r" if j in right else "cell") + t_))
            out.append(cells)
        t = Table(out, colWidths=[w * _WIDTH for w in widths],
                  repeatRows=1 if (header and repeat) else 0, hAlign="LEFT")
        cmds = [
            ("FONTNAME", (0, 0), (-1, -1), FONT),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("TOPPADDING", (0, 0), (-1, -1), pad),
            ("BOTTOMPADDING", (0, 0), (-1, -1), pad),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("RIGHTPADDING", (0, 0), (-1, -1), 3),
            ("LINEBELOW", (0, -1), (-1, -1), 0.5, RULE),
        ]
        if header:
            cmds += [("BACKGROUND", (0, 0), (-1, 0), SHADE_DARK),
                     ("LINEBELOW", (0, 0), (-1, 0), 0.8, ACCENT)]
        if zebra:
            start = 1 if header else 0
            for i in range(start + 1, len(out), 2):
                cmds.append(("BACKGROUND", (0, i), (-1, i), SHADE))
        cmds.extend(extra_style)
        t.setStyle(TableStyle(cmds))
        return t

    def kv(self, pairs, key_width: float = 0.26) -> Table:
        """Two-column key/value table (keys bold)."""
        rows = [[self.cell(k, "cell_b"), v if isinstance(v, Paragraph) else self.cell(v)]
                for k, v in pairs]
        t = Table(rows, colWidths=[key_width * _WIDTH, (1 - key_width) * _WIDTH], hAlign="LEFT")
        t.setStyle(TableStyle([
            ("FONTNAME", (0, 0), (-1, -1), FONT),
            ("VALIGN", (0, 0), (-1, -1), "TOP"),
            ("TOPPADDING", (0, 0), (-1, -1), 2.2),
            ("BOTTOMPADDING", (0, 0), (-1, -1), 2.2),
            ("LEFTPADDING", (0, 0), (-1, -1), 3),
            ("LINEBELOW", (0, 0), (-1, -1), 0.3, SHADE_DARK),
        ]))
        return t

    def tcaption(self, caption: str, table=None) -> None:
        """Numbered table caption, placed above the table and kept with it (with the whole
        ``table`` when it is given: a short table is never split across pages)."""
        self.table_count += 1
        para = self.m(f"<b>Table {self.table_count}.</b> {esc(caption)}", "tcaption")
        if table is not None:
            self.add(KeepTogether([para, table]))
            return
        self.add(CondPageBreak(30 * mm), para)

    def figure(self, fig, caption: str, heading: str | None = None) -> None:
        """A matplotlib figure as an image scaled to the text width, with a numbered caption
        (and a heading kept on the same page)."""
        png = figures.to_png(fig, dpi=_FIG_DPI)
        w_in, h_in = fig.get_size_inches()
        width = _WIDTH
        height = width * h_in / w_in
        self.fig_count += 1
        img = Image(io.BytesIO(png), width=width, height=height)
        cap = self.m(f"<b>Figure {self.fig_count}.</b> {esc(caption)}", "caption")
        head = [self.p(heading, "h3")] if heading else [Spacer(1, 3 * mm)]
        self.add(KeepTogether(head + [img, cap]))


def _verdict_cell(verdict: str) -> str:
    """Verdict as mark and word, e.g. ``"✗ FAIL"``."""
    if verdict == NOT_ASSESSED:
        return "no limits applied"
    mark = VERDICT_MARK.get(verdict, "")
    word = VERDICT_WORD.get(verdict, verdict.upper())
    return f"{mark} {word}".strip()


def _verdict_style(col: int, row: int, verdict: str) -> list:
    """Table style commands that reinforce (never replace) a verdict word in one cell."""
    if verdict == "fail":
        return [("BACKGROUND", (col, row), (col, row), colors.HexColor("#2b2b2b")),
                ("TEXTCOLOR", (col, row), (col, row), colors.white)]
    if verdict == "inconclusive":
        return [("BACKGROUND", (col, row), (col, row), colors.HexColor("#d0d0d0"))]
    return []


def _verdict_para(b: _Builder, verdict: str, style: str = "cell") -> Paragraph:
    word = esc(_verdict_cell(verdict))
    if verdict == "fail":
        return b.m(f'<font color="white"><b>{word}</b></font>', style)
    if verdict in ("pass", "inconclusive"):
        return b.m(f"<b>{word}</b>", style)
    return b.m(word, style)


def _channel_sort_key(result, name):
    try:
        c = result.channels[result.channel_index(name)]
        return (_PHASE_ORDER.get(c.phase, 9), name)
    except KeyError:
        return (9, name)


def _channel_label(result, name) -> str:
    try:
        c = result.channels[result.channel_index(name)]
    except KeyError:
        return name
    return f"{c.phase} ({c.name})" if c.phase else c.name


def _check_item(chk) -> str:
    """Short name of what a check compares, e.g. ``"I11"`` or ``"TDD"``."""
    return chk.label


def _value_cells(b, run, chk) -> list:
    """Measured, limit, basis and margin cells of a check row (the basis after the limit, so
    the limit reads with its unit)."""
    measured, limit, margin = b.cells(run, chk)
    return [measured, limit, _unit_text(chk), margin]


_TAG_WORDS = {"P": "partly verified", "M": "from memory"}


def _source_mark(chk) -> str:
    """Where a limit value comes from, when it is not verified: ``"† from memory"``."""
    if not getattr(chk, "verify", False):
        return ""
    word = _TAG_WORDS.get(getattr(chk, "tag", ""), "unconfirmed")
    return f"\u2020 {word}"


def _unit_text(chk) -> str:
    """Unit of a check's values, naming its basis: ``"% of IL"``, ``"% of fundamental"``,
    ``"A"``, ``"mA/W"`` (the plain unit when the basis is not known)."""
    basis = getattr(chk, "basis", "")
    return _BASIS_LABEL.get(basis, chk.unit) if basis else chk.unit


def _designation(lim) -> str:
    """``"IEEE Std 519-2022"``, ``"IEC 61000-3-2 ed. 5.0 (2018)"``: the standard as it is
    cited."""
    from ..limits import designation

    return designation(lim.standard, lim.edition, lim.table_id)


def _clause_text(lim, chk) -> str:
    """Where a limit comes from: the standard and edition with the clause or table, e.g.
    ``"IEEE Std 519-2022, Table 2"``."""
    return ", ".join(x for x in (_designation(lim), chk.clause or "") if x)


def _table_name(lim) -> str:
    name = getattr(lim, "display_name", lim.table_id)
    return f"{name} \u2013 {_designation(lim)}" if lim.standard else name


_BASIS_LABEL = {
    "percent_of_fundamental": "% of fundamental",
    "percent_of_il": "% of IL",
    "percent_of_rated_current": "% of rated current",
    "percent_of_iref": "% of Iref",
    "amperes": "A",
    "milliamperes_per_watt": "mA/W",
    "unitless": "",
    "percent_of_nominal_voltage": "% of Un",
    "seconds": "s",
}


def _basis_label(lim, quantity: str, unit: str) -> str:
    """Axis unit of a table's individual-order limits, e.g. ``"% of IL"`` (else ``unit``)."""
    for item in lim.items:
        if item.quantity == "harmonic" and item.applies_to == quantity and item.unit == unit:
            return _BASIS_LABEL.get(item.basis, unit)
    return unit


def _compact_orders(orders) -> str:
    """``[2, 3, 4, 5, 7]`` -> ``"2–5, 7"`` (with en dashes)."""
    return numfmt.order_ranges(orders)


def _where(job, verdict: str) -> list:
    """Per capture and channel, what has ``verdict``: ``"dc1, phase b (ib): TDD; orders
    5, 7"``."""
    out = []
    for r in job.runs:
        by_channel: dict = {}
        for c in r.checks:
            if c.verdict == verdict:
                by_channel.setdefault(c.channel, []).append(c)
        for ch in sorted(by_channel, key=lambda n: _channel_sort_key(r.result, n)):
            cs = by_channel[ch]
            totals = list(dict.fromkeys(c.label for c in cs if c.quantity != "harmonic"))
            orders = [c.order for c in cs if c.quantity == "harmonic" and c.order is not None]
            what = totals + ([f"order{'s' if len(set(orders)) > 1 else ''} "
                              f"{_compact_orders(orders)}"] if orders else [])
            lbl = _channel_label(r.result, ch) if ch else "all channels"
            lbl = f"phase {lbl}" if ch and lbl != ch else lbl
            prefix = f"{r.id}, " if len(job.runs) > 1 else ""
            out.append(f"{prefix}{lbl}: {'; '.join(what)}")
    return out


def _counts(checks) -> dict:
    out = {"pass": 0, "fail": 0, "inconclusive": 0, "not applicable": 0}
    for c in checks:
        out[c.verdict] = out.get(c.verdict, 0) + 1
    return out


def _counts_text(checks) -> str:
    n = _counts(checks)
    parts = [f"{n['fail']} fail", f"{n['inconclusive']} inconclusive", f"{n['pass']} pass"]
    if n["not applicable"]:
        parts.append(f"{n['not applicable']} not applicable")
    return ", ".join(parts)


def _worst(checks):
    """The decided check with the smallest margin (None when there is none)."""
    decided = [c for c in checks if c.margin_percent is not None
               and c.verdict in ("pass", "fail")]
    if not decided:
        return None
    return min(decided, key=lambda c: c.margin_percent)


# ---------------------------------------------------------------------------------------------
# Sections
# ---------------------------------------------------------------------------------------------


def _cover(b: _Builder) -> None:
    job, meta = b.job, b.job.meta
    first = len(b.story)
    b.add(Spacer(1, 8 * mm))
    b.add(b.p("HARMONIC EMISSION TEST REPORT", "kicker"))
    b.add(b.p(meta.title, "title"))
    if meta.equipment:
        b.add(b.p(meta.equipment, "subtitle"))
    b.add(Spacer(1, 7 * mm))

    verdict = job.verdict
    all_checks = [c for r in job.runs for a in r.tables for c in a.checks]
    if verdict == NOT_ASSESSED:
        big, line = "NO VERDICT", ("No limit table was applied: this report presents the "
                                   "analysis only. Give limit tables (limits in a test plan) "
                                   "for a compliance verdict.")
    else:
        big = f"{VERDICT_MARK.get(verdict, '')}  {VERDICT_WORD.get(verdict, verdict.upper())}"
        meaning = {
            "fail": "At least one measured value exceeds its limit.",
            "inconclusive": "No limit was exceeded, but at least one check could not be "
                            "decided from the data.",
            "pass": "Every applicable limit was met.",
            "not applicable": "None of the limits applied to this case.",
        }.get(verdict, "")
        line = f"{meaning} Checks: {_counts_text(all_checks)}."
    verdict_box(b, verdict, line, big=big)
    # page 1 must hold the whole cover, down to its last caution: fewer rows of what decides
    # the verdict when they would push it over (section 1 lists every one)
    start, counts = len(b.story), (b.table_count, b.fig_count)
    for limit in range(_COVER_ROWS, 0, -1):
        del b.story[start:]
        b.table_count, b.fig_count = counts
        _deciding_items(b, limit)
        b.add(Spacer(1, 3 * mm))
        _cover_facts(b)
        if _story_height(b.story[first:]) <= _FRAME_HEIGHT:
            break


_FRAME_HEIGHT = PAGE_SIZE[1] - 35 * mm - 12
"""Height of a page's text frame: the page less the top and bottom margins of
:func:`render_pdf` and the frame's own padding (6 pt above and below). [pt]"""


def _story_height(flowables) -> float:
    """Height the flowables take at the text width, page breaks left out. [pt]"""
    h = 0.0
    for f in flowables:
        if isinstance(f, PageBreak):
            continue
        _, fh = f.wrap(_WIDTH - 12, _FRAME_HEIGHT)
        h += fh + f.getSpaceBefore() + f.getSpaceAfter()
    return h


def verdict_box(b: _Builder, verdict: str, line: str, *, big: str | None = None) -> None:
    """The overall verdict as every pqcheck report shows it on page 1: its glyph and word in
    large type inside a box (filled dark for a fail, grey for an undecided verdict, outlined
    for a pass), with one line saying what it means; readable in greyscale, never carried by
    colour alone."""
    st = b.st
    if big is None:
        big = f"{VERDICT_MARK.get(verdict, '')}  {VERDICT_WORD.get(verdict, verdict.upper())}"
    fg = "white" if verdict == "fail" else "#1a1a1a"
    cell = [Paragraph(f'<font color="{fg}">OVERALL VERDICT</font>', st["kicker"]),
            Paragraph(f'<font color="{fg}">{esc(big)}</font>', st["verdict"]),
            Spacer(1, 2 * mm),
            Paragraph(f'<font color="{fg}">{esc(line)}</font>', st["verdict_text"])]
    box = Table([[cell]], colWidths=[_WIDTH], hAlign="LEFT")
    box_style = [("FONTNAME", (0, 0), (-1, -1), FONT),
                 ("LEFTPADDING", (0, 0), (-1, -1), 10), ("RIGHTPADDING", (0, 0), (-1, -1), 10),
                 ("TOPPADDING", (0, 0), (-1, -1), 8), ("BOTTOMPADDING", (0, 0), (-1, -1), 10)]
    if verdict == "fail":
        box_style += [("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#2b2b2b"))]
    elif verdict == "inconclusive":
        box_style += [("BACKGROUND", (0, 0), (-1, -1), colors.HexColor("#d9d9d9")),
                      ("BOX", (0, 0), (-1, -1), 1.5, INK)]
    else:
        box_style += [("BOX", (0, 0), (-1, -1), 2.0, INK)]
    box.setStyle(TableStyle(box_style))
    b.add(box, Spacer(1, 4 * mm))


def _cover_facts(b: _Builder) -> None:
    """Page 1 under the verdict: the equipment, site, dates, captures, reasons, deviations."""
    job, meta, plan = b.job, b.job.meta, b.job.plan
    eq = plan.equipment if plan is not None else None
    pairs = []
    pairs.append(("Equipment under test", meta.equipment or (eq.name if eq else "") or
                  "not stated"))
    if eq is not None:
        ident = ", ".join(f"{k} {v}" for k, v in (("model", eq.model), ("serial", eq.serial),
                                                   ("manufacturer", eq.manufacturer),
                                                   ("firmware", eq.firmware)) if v)
        if ident:
            pairs.append(("Identification", ident))
        ratings = ", ".join(x for x in (
            f"{numfmt.given(eq.rated_power_w / 1e3)} kW" if eq.rated_power_w else "",
            f"{numfmt.given(eq.rated_apparent_power_va / 1e3)} kVA"
            if eq.rated_apparent_power_va else "",
            f"{numfmt.given(eq.rated_current_a)} A per phase" if eq.rated_current_a else "",
            f"{numfmt.given(eq.rated_voltage_v)} V" if eq.rated_voltage_v else "") if x)
        if ratings:
            pairs.append(("Ratings", ratings))
    site_text = meta.site or (plan.site.name if plan is not None else "")
    pairs.append(("Site", site_text or "not stated"))
    if plan is not None and plan.site.pcc:
        pairs.append(("Point of common coupling", plan.site.pcc))
    pairs.append(("Date of test", _test_date(job)))
    pairs.append(("Time of analysis", meta.created_utc.astimezone(timezone.utc)
                  .strftime("%Y-%m-%d %H:%M:%S UTC")))
    pairs.append(("Operator", meta.operator or "not stated"))
    def _run_text(r):
        name = Path(r.result.source).name
        extra = [x for x in (r.load_point, name if name and Path(name).stem != r.id else "")
                 if x]
        return r.id + (f" ({', '.join(extra)})" if extra else "")

    pairs.append((f"Captures ({len(job.runs)})", "; ".join(_run_text(r) for r in job.runs)))
    excluded = plan.excluded if plan is not None else ()
    if excluded:
        pairs.append((f"Excluded ({len(excluded)})", b.m("<br/>".join(
            f"<b>{esc(c.id)}</b> ({esc(c.path.name)}): {esc(c.exclude)}" for c in excluded),
            "cell")))
    if plan is not None:
        basis = _pcc_basis(plan)
        if basis:
            pairs.append(("ISC and IL", basis))
    # what failed and what is undecided stands in the table under the verdict
    tables = job.limit_tables()
    pairs.append(("Limit tables", "; ".join(f"{_table_name(t)}: {t.title}" for t in tables)
                  if tables else "none (analysis only)"))
    # why the verdict is what it is (scope, plausibility, observation) and every deviation
    # from the standard's conditions, next to the verdict
    why = merge_variants([m for r in job.runs for a in r.assessments
                          for m in getattr(a, "reasons", ())])
    dev = merge_variants([m for r in job.runs for a in r.assessments
                          for m in getattr(a, "deviations", ())])
    at = sum(1 for k, _ in pairs if k in ("Not decided", "Limits exceeded"))
    for label, texts in (("Deviations from the standard's conditions", dev),
                         ("Why (scope, data, observation)", why)):
        if texts:
            shown = texts[:8] + ([f"and {len(texts) - 8} more (see the notes of each capture)"]
                                 if len(texts) > 8 else [])
            pairs.insert(at, (label, b.m("<br/>".join(esc(x) for x in shown), "cell")))
    pairs.append(("Report id", meta.report_id))
    pairs.append(("Produced with", f"pqcheck {meta.tool_version}"))
    b.add(b.kv(pairs))
    b.add(Spacer(1, 6 * mm))
    b.add(b.p(text.NOT_CERTIFICATION, "small"))
    b.add(b.m("<b>Safety.</b> " + esc("The measurements behind this report involve hazardous "
                                      "voltages. Read the cautions in section 7 before "
                                      "repeating or extending them."), "small"))
    b.add(PageBreak())


_COVER_ROWS = 6


def _deciding_items(b: _Builder, limit: int = _COVER_ROWS) -> None:
    """The cover's short list of what decides the verdict: the failing checks (largest
    excess first), the causes of undecided checks, or, for a pass, the closest margins; at
    most ``limit`` rows of each."""
    job = b.job
    if not job.assessed:
        return
    rows = [["Decides", "Capture", "Item", "Phase", "Measured", "Limit", "Basis", "Margin"]]
    extra = []
    fails = sorted(_decided(job, "fail"), key=lambda t: t[2].margin_percent
                   if t[2].margin_percent is not None else 0.0)
    # one row per capture and item (its worst phase), the phases that fail named beside it
    by_item: dict = {}
    for r, a, c in fails:
        by_item.setdefault((r.id, a.limits.table_id, c.label), []).append((r, c))
    for (rid, _tid, label), items in list(by_item.items())[:limit]:
        r, c = items[0]
        phases = ", ".join(sorted({x.phase or x.channel for _, x in items})) or "all"
        rows.append([_verdict_para(b, "fail"), rid, label, phases, *_value_cells(b, r, c)])
        extra += _verdict_style(0, len(rows) - 1, "fail")
    groups = undecided_groups(job)
    for runs, phases, checks, cause in groups[:limit]:
        n = f"{len(checks)} check{'s' if len(checks) != 1 else ''}"
        rows.append([_verdict_para(b, "inconclusive"), runs, _items_text(checks) or "\u2013",
                     phases, b.m(f"<b>{esc(_cause_key(cause))}</b> ({n})"
                                 + (f": {esc(why)}" if (why := _short_reason(cause)) else ""),
                                 "cell"), "", "", ""])
        extra += _verdict_style(0, len(rows) - 1, "inconclusive")
        extra.append(("SPAN", (4, len(rows) - 1), (7, len(rows) - 1)))
    if not fails and not groups:
        passes = sorted((t for t in _decided(job, "pass") if t[2].margin_percent is not None),
                        key=lambda t: t[2].margin_percent)
        for r, _a, c in passes[:3]:
            rows.append(["closest", r.id, c.label,
                         _channel_label(r.result, c.channel) if c.channel else "all",
                         *_value_cells(b, r, c)])
    if len(rows) == 1:
        return
    b.add(b.table(rows, [0.16, 0.16, 0.14, 0.1, 0.11, 0.09, 0.13, 0.11], right=(4, 5, 7),
                  extra_style=extra, zebra=False))
    more = [f"{n} more {what}" for n, what in (
        (len(by_item) - limit, "failing items"), (len(groups) - limit, "causes of undecided "
                                                   "checks")) if n > 0]
    note = ("Worst phase shown; section 1 lists every check that failed or could not be "
            "decided")
    note += f" ({', '.join(more)})." if more else "."
    b.add(b.p(note, "caption"))


_DATE_KEYS = ("start time", "start", "date", "trigger time", "recorded", "acquired",
              "timestamp", "start_time", "date/time")


def _test_date(job) -> str:
    """Date of the measurements: given (``test_date`` of the report details), the plan's,
    or the start time the capture's header records; "not stated" otherwise (never the time
    of analysis)."""
    if job.meta.test_date:
        return job.meta.test_date
    if job.plan is not None and job.plan.conditions.date:
        return job.plan.conditions.date
    found = []
    for r in job.runs:
        meta = (r.result.reader_settings or {}).get("metadata") or {}
        for k, v in meta.items():
            if str(k).strip().casefold() in _DATE_KEYS and str(v).strip():
                found.append(f"{v} ({r.id}, from the capture's header)")
                break
    return "; ".join(dict.fromkeys(found)) or "not stated"


def _pcc_basis(plan) -> str:
    """ISC and IL with their units and where they come from (the plan's [site])."""
    site = plan.site
    isc, il = getattr(site, "isc_a", None), getattr(site, "il_a", None)
    if not isc and not il:
        return ""
    parts = []
    if isc:
        parts.append(f"ISC = {numfmt.given(isc)} A")
    if il:
        parts.append(f"IL = {numfmt.given(il)} A")
    if isc and il:
        parts.append(f"ISC/IL = {numfmt.value(isc / il, 'ratio')}")
    text_ = ", ".join(parts) + " (test plan, [site])"
    if site.notes:
        text_ += f"; {site.notes}"
    return text_


def _summary(b: _Builder) -> None:
    job = b.job
    sub = itertools.count(1)
    b.h1("1  Summary")
    if job.assessed:
        b.add(b.p(text.VERDICT_MEANING, "body"))
        b.h3(f"1.{next(sub)}  Verdict per capture and limit table")
        rows = [["Capture", "Load point", "Limit table", "Verdict", "Checks",
                 "Smallest margin"]]
        extra = []
        for r in job.runs:
            if not r.tables:
                rows.append([r.id, r.load_point or "\u2013", "none", "no limits applied",
                             "\u2013", "\u2013"])
                continue
            for a in r.tables:
                worst = _worst(a.checks)
                wtxt = "\u2013" if worst is None else (
                    f"{fmt_pct(worst.margin_percent)} ({_check_item(worst)}, "
                    f"{_channel_label(r.result, worst.channel) if worst.channel else 'all'})")
                rows.append([r.id, r.load_point or "\u2013", a.limits.table_id,
                             _verdict_para(b, a.verdict), _counts_text(a.checks), wtxt])
                extra += _verdict_style(3, len(rows) - 1, a.verdict)
        b.add(b.table(rows, [0.13, 0.09, 0.14, 0.16, 0.29, 0.19], extra_style=extra))
        b.add(b.p("Margin = (limit \u2212 measured) / limit; a negative margin means the limit "
                  "is exceeded. Smallest margin over the decided checks.", "caption"))
    else:
        b.add(b.p("No limit table was applied, so this report carries no compliance verdict. "
                  "It records the analysis of each capture: harmonic spectra, distortion, power "
                  "quantities and data-quality findings.", "body"))

    if len(job.runs) > 1 or job.plan is not None:
        b.h3(f"1.{next(sub)}  Load points")
        rows = [["Load point", "Capture", "P total", "Current THD per phase",
                 "TDD per phase", "PF", "Verdict"]]
        extra = []
        runs = sorted(job.runs, key=lambda r: (r.load_percent is None, r.load_percent or 0))
        for r in runs:
            res = r.result
            cur = sorted(res.channels_of("current"), key=lambda c: _PHASE_ORDER.get(c.phase, 9))
            cur = [c for c in cur if c.phase != "n"]
            def pcts(xs):
                return " / ".join(numfmt.value(x, "distortion", unit="") for x in xs) + " %"

            thd = pcts(c.thd_percent for c in cur) if cur else "\u2013"
            tdd = (pcts(c.tdd_percent for c in cur)
                   if cur and any(c.tdd_percent is not None for c in cur) else "\u2013")
            p = res.power
            flagged = channel_flags(res.findings, [c.name for c in res.channels])
            mark = f" {_FLAG}" if flagged else ""
            rows.append([r.load_point or "\u2013", r.id,
                         numfmt.power(p.p_w, ref=p.se_va) + mark if p is not None
                         else "\u2013",
                         thd, tdd,
                         numfmt.value(p.pf, "power_factor") if p is not None else "\u2013",
                         _verdict_para(b, r.verdict)])
            extra += _verdict_style(6, len(rows) - 1, r.verdict)
        b.add(b.table(rows, [0.11, 0.15, 0.11, 0.2, 0.18, 0.07, 0.18], right=(2, 5),
                      extra_style=extra))
        b.add(b.p("P total: active power over the capture (negative = export). THD and TDD: "
                  "capture values per phase a / b / c. PF: total power factor (IEEE 1459)."
                  + (f" {_FLAG}: a data-quality error undermines a channel of this capture "
                     "(section 3); its values are shown, not relied on." if any(
                         channel_flags(r.result.findings, [c.name for c in r.result.channels])
                         for r in runs) else ""),
                  "caption"))

    if job.assessed:
        _decisive_tables(b, sub)


_CLOSEST_LISTED = 5


def _is_gate(chk) -> bool:
    """A gate of the verdict (scope, plausibility, observation) shown as a check row."""
    return getattr(chk, "statistic", "") == "gate"


def _cause_of(run, chk, gates=None) -> str:
    """Why ``chk`` is undecided, in one line: the error findings on its channel (or on the
    whole capture), else the gate that holds it (with the gate's own reason), else the first
    remark of its note. ``gates``: gate code -> reason, of the check's assessment."""
    gates = gates or {}
    if _is_gate(chk):
        return f"{chk.quantity}: {chk.note}" if chk.note else chk.quantity
    fs = [f for f in run.result.findings if f.severity == "error"
          and (not f.channels or chk.channel in f.channels)]
    if fs:
        codes = list(dict.fromkeys(f.code for f in fs))
        first = next(f for f in fs if f.code == codes[0])
        return f"{', '.join(codes)}: {first.message}"
    note = (getattr(chk, "note", "") or "").removeprefix("inconclusive: ")
    first = note.split("; ")[0] if note else ""
    if first in gates:
        return f"{first}: {gates[first]}" if gates[first] else first
    return first or "the data do not allow a decision"


def _short_reason(cause: str) -> str:
    """The first sentence of a cause's reason, without its code and table prefix."""
    rest = cause.partition(":")[2].strip()
    first = rest.partition(". ")[0].rstrip(".")
    words = first.split(": ", 1)
    if len(words) == 2 and " " not in words[0]:  # "ieee519-2022: ..." -> "..."
        first = words[1]
    return first + "." if first else ""


def _cause_key(cause: str) -> str:
    """The part of a cause that names it (its finding codes), for grouping."""
    return cause.split(":")[0].strip()


def undecided_groups(job) -> list:
    """Undecided checks grouped by cause over every capture: one entry per shared cause.

    Returns
    -------
    list of (captures text, phases text, checks, cause)
        Largest group first.
    """
    groups: dict = {}
    for r in job.runs:
        for a in r.tables:
            gates = {c.quantity: c.note for c in a.checks if _is_gate(c)}
            for c in a.checks:
                if c.verdict != "inconclusive":
                    continue
                cause = _cause_of(r, c, gates)
                g = groups.setdefault(_cause_key(cause), {"runs": [], "phases": [],
                                                          "checks": [], "causes": []})
                g["runs"].append(r.id)
                g["causes"].append(cause)
                if _is_gate(c):
                    continue  # the gate is the cause, not one of the checks it holds
                g["phases"].append(c.phase or (c.channel and _channel_label(r.result,
                                                                            c.channel)) or "all")
                g["checks"].append(c)
    out = []
    for g in sorted(groups.values(), key=lambda g: -len(g["checks"])):
        runs = ", ".join(dict.fromkeys(g["runs"]))
        phases = ", ".join(sorted(set(g["phases"]))) or "all"
        out.append((runs, phases, g["checks"], "; ".join(merge_variants(g["causes"]))))
    return out


def _items_text(checks) -> str:
    """``"TDD, THD(I); orders 2–50"`` for a group of checks."""
    totals = list(dict.fromkeys(c.label for c in checks if c.quantity != "harmonic"))
    orders = [c.order for c in checks if c.quantity == "harmonic" and c.order is not None]
    parts = totals + ([f"order{'s' if len(set(orders)) > 1 else ''} "
                       f"{_compact_orders(orders)}"] if orders else [])
    return "; ".join(parts)


def _decided(job, verdict):
    return [(r, a, c) for r in job.runs for a in r.tables for c in a.checks
            if c.verdict == verdict]


def _decisive_tables(b: _Builder, sub) -> None:
    """What decides the verdict: every failing check, the undecided checks grouped by cause,
    and the passing checks closest to their limits."""
    job = b.job
    fails = sorted(_decided(job, "fail"), key=lambda t: t[2].margin_percent
                   if t[2].margin_percent is not None else 0.0)
    b.h3(f"1.{next(sub)}  Limits exceeded")
    if not fails:
        b.add(b.p("None: no measured value exceeds its limit.", "body"))
    else:
        # one row per capture, table and item: its worst phase, the failing phases named
        by_item: dict = {}
        for t in fails:
            r, a, c = t
            by_item.setdefault((r.id, a.limits.table_id, c.label), []).append(t)
        items = list(by_item.values())
        _check_rows_table(b, [ts[0] for ts in items[:_MAX_LISTED]],
                          phases=[", ".join(sorted({c.phase or c.channel or "all"
                                                    for _, _, c in ts}))
                                  for ts in items[:_MAX_LISTED]])
        more = len(items) - _MAX_LISTED
        note = (f"{len(fails)} failing checks in {len(items)} items; each row shows the "
                "item's worst phase (smallest margin, the largest excess, first) and names "
                "every phase that fails.")
        if more > 0:
            note += f" {more} more items are listed in the full tables (appendix A)."
        b.add(b.p(note, "caption"))
    groups = undecided_groups(job)
    if groups:
        b.h3(f"1.{next(sub)}  Checks that could not be decided, by cause")
        rows = [["Captures", "Phases", "Checks", "Cause (section 3 has the details)"]]
        for runs, phases, checks, cause in groups:
            rows.append([runs, phases, f"{len(checks)}: {_items_text(checks) or chr(0x2013)}",
                         cause])
        b.add(b.table(rows, [0.16, 0.12, 0.24, 0.48]))
        b.add(b.p("An undecided check is neither passed nor failed: the data-quality finding "
                  "named removes the basis for a verdict on it. Remove the cause (re-measure) "
                  "or exclude the capture with a stated reason.", "caption"))
    passes = sorted((t for t in _decided(job, "pass") if t[2].margin_percent is not None),
                    key=lambda t: t[2].margin_percent)
    if passes:
        b.h3(f"1.{next(sub)}  Passing checks closest to their limits")
        _check_rows_table(b, passes[:_CLOSEST_LISTED])
        b.add(b.p(f"The {min(_CLOSEST_LISTED, len(passes))} passing checks with the smallest "
                  "margin, of all captures and tables. Margin = (limit \u2212 measured) / "
                  "limit.", "caption"))
    common = _common_notes(job)
    if common:
        b.h3(f"1.{next(sub)}  Notes that apply to every capture")
        for notes in common.values():
            for note in notes:
                b.add(b.m(f"\u2022 {esc(note)}", "small"))
    _verify_mark_note(b)


def _common_notes(job) -> dict:
    """Notes of a limit table's assessment that every capture shares (when there are
    several): table id -> notes, said once in the summary instead of under each capture."""
    if len(job.runs) < 2:
        return {}
    per_table: dict = {}
    for r in job.runs:
        for a in r.tables:
            per_table.setdefault(a.limits.table_id, []).append(
                list(merge_variants(getattr(a, "notes", ()) or ())))
    out = {}
    for tid, lists in per_table.items():
        if len(lists) < len(job.runs):
            continue
        shared = [n for n in lists[0] if all(n in other for other in lists[1:])]
        if shared:
            out[tid] = shared
    return out


def _check_rows_table(b: _Builder, triples, phases=None) -> None:
    """Checks of several captures and tables in one table, values with their basis
    (``phases``: the text of each row's phase column, when it names several)."""
    head = ["Capture", "Table", "Item", "Phase", "Measured", "Limit", "Basis", "Margin",
            "Verdict", "Limit value"]
    rows = [head]
    extra = []
    for k, (r, a, c) in enumerate(triples):
        rows.append([r.id, a.limits.table_id, _check_item(c),
                     phases[k] if phases is not None else
                     _channel_label(r.result, c.channel) if c.channel else "all",
                     *_value_cells(b, r, c), _verdict_para(b, c.verdict),
                     _source_mark(c) or "verified"])
        extra += _verdict_style(8, len(rows) - 1, c.verdict)
    # the capture column holds a capture id such as "kestrel-dc1-full" on one line (or broken
    # after its hyphens), not split inside a word
    b.add(b.table(rows, [0.14, 0.12, 0.07, 0.08, 0.10, 0.08, 0.08, 0.09, 0.12, 0.12],
                  right=(4, 5, 7), extra_style=extra))


def _verify_mark_note(b: _Builder) -> None:
    if any(getattr(c, "verify", False) for r in b.job.runs for a in r.tables
           for c in a.checks):
        b.add(b.m("<b>\u2020 Verify against your copy.</b> " + esc(
            "Limits marked \u2020 come from values that pqcheck could not confirm against "
            "the text of the standard (partly verified, or from memory, as the limit table "
            "tags them). Check them against your licensed copy before relying on a verdict "
            "that depends on them."), "small"))


def _capture_facts(b: _Builder, run) -> None:
    res, cap = run.result, run.capture
    w = res.windows
    cur = ", ".join(c.name for c in sorted(res.channels_of("current"),
                                           key=lambda c: _PHASE_ORDER.get(c.phase, 9)))
    vol = ", ".join(c.name for c in sorted(res.channels_of("voltage"),
                                           key=lambda c: _PHASE_ORDER.get(c.phase, 9)))
    plan = b.job.plan
    pairs = [
        ("File", shown_path(res.source, plan.path if plan is not None else None)),
        ("SHA-256", b.m(esc(res.sha256 or "not available (in-memory capture)"), "mono")),
        ("Recording", f"{numfmt.value(res.fs_hz, 'sample_rate')} sample rate, "
                      f"{numfmt.value(res.duration_s, 'duration')}, "
                      f"{res.n_samples} samples per channel ({cap.provenance.reader} reader)"),
        ("Channels", f"currents: {cur or 'none'}; voltages: {vol or 'none'}"),
        ("Windows", f"{int(w.valid.sum())} valid of {w.n_windows} windows of "
                    f"{res.settings.cycles_per_window} cycles "
                    f"({numfmt.value(res.analysed_s, 'duration')} "
                    "analysed)"),
        ("Fundamental", f"{numfmt.value(res.fundamental_hz, 'frequency')} mean "
                        f"({numfmt.value(res.freq_min_hz, 'frequency', unit='')} to "
                        f"{numfmt.value(res.freq_max_hz, 'frequency')})"),
    ]
    meta = (res.reader_settings or {}).get("metadata") or {}
    if meta:
        pairs.append(("File header", "; ".join(f"{k}: {v}" for k, v in meta.items())))
    if run.load_point:
        pairs.insert(0, ("Load point", run.load_point))
    if run.notes:
        pairs.append(("Notes", run.notes))
    b.add(b.kv(pairs, key_width=0.18))


def _assessment_block(b: _Builder, run, a) -> None:
    res = run.result
    lim = a.limits
    b.h3(f"Against {_table_name(lim)}: {lim.title}")
    given = dict(lim.selectors)
    # ISC/IL worked out from isc and il is a ratio of the two, not a value anyone typed
    sel = ", ".join(f"{k} = {numfmt.value(v, 'ratio')} (isc / il)"
                    if k == "isc_il" and "isc" in given and "il" in given
                    else f"{k} = {numfmt.given(v)}" if isinstance(v, float) else f"{k} = {v}"
                    for k, v in lim.selectors) or "none"
    pairs = [("Verdict", _verdict_para(b, a.verdict)),
             ("Checks", _counts_text(a.checks)),
             ("Row selection", f"{sel}" + (f"; {'; '.join(lim.rows)}" if lim.rows else "")),
             ("Compared quantity", f"IEC 61000-4-7 harmonic {lim.measure}s, orders up to "
                                   f"{lim.max_order}")]
    for g in (c for c in a.checks if _is_gate(c) and c.verdict == "inconclusive"):
        pairs.append(("Undecided by", b.m(f"<b>{esc(g.quantity)}</b>: {esc(g.note)}", "cell")))
    common = _common_notes(b.job).get(lim.table_id, ())
    for note in merge_variants(getattr(a, "notes", ()) or ()):
        if note not in common:
            pairs.append(("Note", note))
    if common:
        pairs.append(("Notes", f"{len(common)} shared by every capture: see section 1"))
    kv = b.kv(pairs, key_width=0.18)
    kv.setStyle(TableStyle(_verdict_style(1, 0, a.verdict)))
    b.add(kv, Spacer(1, 2 * mm))

    checks = list(a.checks)
    totals = [c for c in checks if c.quantity != "harmonic" and not _is_gate(c)]
    if totals:
        _totals_table(b, run, lim, totals)

    harm = [c for c in checks if c.quantity == "harmonic" and c.order is not None]
    groups: dict = {}
    for c in harm:
        key = (c.applies_to, c.statistic, c.unit)
        groups.setdefault(key, []).append(c)
    for (quantity, statistic, unit), group in groups.items():
        what = "current" if quantity == "current" else "voltage" if quantity == "voltage" \
            else "harmonic"
        unit_label = _unit_text(group[0])
        deciding = [r for r in _harmonic_rows(group, res)
                    if r[3] == "fail" or r[4] is None or r[4] < _BODY_MARGIN_PERCENT]
        if quantity == "voltage" and not deciding:
            # Voltage harmonics that all pass far from their limits: one line says so, the
            # chart would add a page and nothing a reviewer needs (appendix A lists them).
            margins = [c.margin_percent for c in group if c.margin_percent is not None]
            verdicts = {c.verdict for c in group}
            how = "pass" if verdicts == {"pass"} else "are undecided (see the causes above)" \
                if verdicts == {"inconclusive"} else "pass or are undecided"
            b.add(b.p(f"{run.id}: all {len({c.order for c in group})} individual voltage "
                      f"harmonics {how}, each at least "
                      f"{numfmt.margin(min(margins), signed=False)} inside its limit on every "
                      f"phase ({statistic}).", "body"))
            continue
        # the orders that decide first (a short table fills the page), then the chart
        _harmonic_table(b, run, lim, group, what, statistic, unit, full=False)
        data = figures.spectrum_from_checks(
            res, group, title=f"{run.id}: {what} harmonics against {lim.table_id}",
            unit_label=unit_label)
        if data is not None:
            b.figure(figures.plot_spectrum(data),
                     f"{run.id}: {what} harmonics per phase ({statistic}) against "
                     f"{lim.table_id} limits (black bars across each order) in {unit_label}. "
                     "Orders "
                     "over their limit are filled black and marked \u2715, undecided orders "
                     f"hatched and marked {VERDICT_MARK['inconclusive']}; each mark carries its "
                     "order number when a panel has few of them, else the panel counts them.")
    gate_codes = {f"inconclusive: {c.quantity}" for c in checks if _is_gate(c)}
    notes = _group_notes([c for c in checks if not _is_gate(c)], skip=gate_codes)
    if notes:
        b.add(b.p("Notes on individual checks", "h3"))
        for note, items in notes:
            shown = ", ".join(items[:14]) + (", \u2026" if len(items) > 14 else "")
            b.add(b.m(f"\u2022 {esc(note)} <font color='#5b6670'>({esc(shown)})</font>",
                      "small"))


_MARK = {"fail": " \u2717", "inconclusive": " " + VERDICT_MARK["inconclusive"]}


def _totals_table(b: _Builder, run, lim, totals) -> None:
    """The totals (THD, TDD, DC, ...) of one table: one row per quantity and limit, the
    phases side by side (value over margin), as the harmonic tables show orders."""
    phases = sorted({c.phase or "" for c in totals}, key=lambda p: _PHASE_ORDER.get(p, 9))
    keyed: dict = {}
    for c in sorted(totals, key=lambda c: (c.quantity, c.applies_to)):
        key = (c.label, c.statistic, c.limit, c.basis, c.clause, getattr(c, "verify", False))
        keyed.setdefault(key, {})[c.phase or ""] = c
    stats = {c.statistic for c in totals}
    one_stat = len(stats) == 1
    rank = {"fail": 3, "inconclusive": 2, "pass": 1, "not applicable": 0}
    head = ["Quantity"] + ([] if one_stat else ["Statistic"]) + ["Limit", "Basis"]
    head += [f"phase {p}" if p else "value" for p in phases]
    head += ["Verdict", "Clause", "Limit value"]
    rows, extra = [head], []
    for (label, statistic, _limit, _basis, clause, _v), cells in keyed.items():
        first = next(iter(cells.values()))
        _, limit_text, _ = b.cells(run, first)
        row = [label] + ([] if one_stat else [statistic]) + [limit_text, _unit_text(first)]
        for p in phases:
            c = cells.get(p)
            if c is None:
                row.append("")
                continue
            measured, _, margin = b.cells(run, c)
            row.append(b.m(f"{esc(measured + _MARK.get(c.verdict, ''))}<br/>"
                           f"<font size='6.6' color='#5b6670'>{esc(margin)}</font>", "cell_r"))
        worst = max((c.verdict for c in cells.values()), key=lambda v: rank.get(v, 2))
        row += [_verdict_para(b, worst), clause or "\u2013", _source_mark(first) or "verified"]
        rows.append(row)
        extra += _verdict_style(len(head) - 3, len(rows) - 1, worst)
    n = len(phases)
    fixed = [0.09] + ([] if one_stat else [0.12]) + [0.07, 0.15]
    tail = [0.16, 0.13, 0.13]
    room = 1.0 - sum(fixed) - sum(tail)
    widths = fixed + [room / n] * n + tail
    first_value = len(fixed)
    cap = (f"{run.id}: totals against {lim.table_id}"
           + (f" ({next(iter(stats))})" if one_stat else "")
           + ". Each phase: the value of its current or voltage channel (\u2717 over the "
           + f"limit, {VERDICT_MARK['inconclusive']} undecided) over its margin.")
    table = b.table(rows, widths, right=tuple(range(first_value - 2, first_value - 1))
                    + tuple(range(first_value, first_value + n)), extra_style=extra)
    b.tcaption(cap, table)


_NUMBER = re.compile(r"[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)?")


def _strip_parens(text: str) -> tuple:
    """Text without its top-level parenthesised parts, and whether there were any."""
    out, depth = [], 0
    for ch in text:
        if ch == "(":
            depth += 1
        elif ch == ")" and depth:
            depth -= 1
        elif depth == 0:
            out.append(ch)
    stripped = re.sub(r"\s+", " ", "".join(out)).strip()
    return stripped, stripped != text.strip()


def _group_notes(checks, skip=()) -> list:
    """Notes of the checks grouped so that one line covers the checks sharing a remark.

    A remark that varies only in its numbers (a per-order threshold, ``1.5 x 2.3 A``) is shown
    once, with the numbers that differ between checks replaced by an ellipsis; parenthesised
    per-check details are left to the results JSON. Returns (text, check labels) pairs.
    Fragments in ``skip`` (a gate's "inconclusive: code", said beside the verdict) are left
    out.
    """
    groups: dict = {}
    for c in checks:
        for frag in split_remarks(getattr(c, "note", "") or ""):
            if frag in skip:
                continue
            stripped, had = _strip_parens(frag)
            key = _NUMBER.sub("#", stripped)
            g = groups.setdefault(key, {"texts": [], "items": [], "had": False, "full": set()})
            g["texts"].append(stripped)
            g["full"].add(frag)
            g["had"] |= had
            g["items"].append(_check_item(c))
    out = []
    for key, g in groups.items():
        items = list(dict.fromkeys(g["items"]))
        if len(g["full"]) == 1:
            out.append((next(iter(g["full"])), items))
            continue
        numbers = [_NUMBER.findall(t) for t in g["texts"]]
        parts = key.split("#")
        text = parts[0]
        for k, part in enumerate(parts[1:]):
            vals = {n[k] for n in numbers if len(n) > k}
            text += (vals.pop() if len(vals) == 1 else "\u2026") + part
        if g["had"]:
            text += " (values per check in the attached results)"
        out.append((text, items))
    return out


_BODY_MARGIN_PERCENT = 50.0
"""Harmonic rows whose every phase passes with at least this margin go to appendix A. [%]"""


def _harmonic_rows(group, res):
    """Rows of a harmonic table: (order, limit check, {channel: check}, worst verdict,
    smallest margin)."""
    rank = {"fail": 3, "inconclusive": 2, "pass": 1, "not applicable": 0}
    rows_by_key: dict = {}
    for c in group:
        key = (c.order, c.limit, getattr(c, "verify", False))
        rows_by_key.setdefault(key, {})[c.channel] = c
    out = []
    for key in sorted(rows_by_key, key=lambda k: (k[0], k[1] if k[1] is not None else 0)):
        cells = rows_by_key[key]
        worst = max((c.verdict for c in cells.values()), key=lambda v: rank.get(v, 2))
        margins = [c.margin_percent for c in cells.values() if c.margin_percent is not None]
        out.append((key[0], next(iter(cells.values())), cells, worst,
                    min(margins) if margins else None))
    return out


def _harmonic_table(b: _Builder, run, lim, group, what, statistic, unit, *,
                    full: bool) -> None:
    """Individual harmonics against a table. In the body (``full=False``) only the rows that
    decide (failing, undecided, or a margin under 50 %) are listed, with a line saying what
    the others are; appendix A (``full=True``) lists every order."""
    res = run.result
    chans = sorted({c.channel for c in group}, key=lambda n: _channel_sort_key(res, n))
    all_rows = _harmonic_rows(group, res)
    if full:
        shown = all_rows
    else:
        # failing rows, and any row (passed or undecided) within 50 % of its limit: a row
        # far inside its limit decides nothing, whatever its verdict
        shown = [r for r in all_rows if r[3] == "fail" or r[4] is None
                 or r[4] < _BODY_MARGIN_PERCENT]
    rest = [r for r in all_rows if r not in shown]
    basis = _unit_text(group[0])
    fund = ""
    if basis == "% of fundamental":  # "fundamental" is wider than a value column
        fund = "U1" if what == "voltage" else "I1" if what == "current" else "h1"
        basis = f"% of {fund}"
    dec = b.decimals(run)
    decimals = max(dec.get(numfmt.check_key(c), 3) for c in group)
    head = ["Order", f"Limit [{basis}]"]
    for ch in chans:
        head += [f"{_channel_label(res, ch)} [{basis}]", "margin"]
    head += ["Verdict", "Limit value"]
    rows = [head]
    extra = []
    for order, any_chk, cells, worst, _ in shown:
        row = [str(order), numfmt.fixed(any_chk.limit, decimals)]
        for ch in chans:
            c = cells.get(ch)
            if c is None:
                row += ["", ""]
                continue
            mark = {"fail": " \u2717", "inconclusive": " " + VERDICT_MARK["inconclusive"]
                    }.get(c.verdict, "")
            row += [numfmt.fixed(c.measured, decimals) + mark, numfmt.margin(c.margin_percent)]
        row += [_verdict_para(b, worst or "", "cell_t" if full else "cell"),
                _source_mark(any_chk) or "verified"]
        rows.append(row)
        extra += _verdict_style(len(row) - 2, len(rows) - 1, worst or "")
    n = len(chans)
    # order (wide enough for its bold heading on one line), limit, verdict, source
    room = 1.0 - 0.07 - 0.08 - 0.16 - 0.13
    widths = ([0.07, 0.08] + [room / (2 * n) * 1.05, room / (2 * n) * 0.95] * n
              + [0.16, 0.13])
    mult = {c.multiplier for c in group}
    times = (f" Limits shown are {numfmt.given(mult.pop())} \u00d7 the table's values, as its "
             "evaluation rule allows for this statistic."
             if len(mult) == 1 and 1.0 not in mult else "")
    scope = "every order assessed" if full or not rest else "the orders that decide"
    if fund:
        times = f" % of {fund}: in % of the channel's fundamental.{times}"
    b.tcaption(f"{run.id}: individual {what} harmonics against {lim.table_id} "
               f"({statistic}), {scope}.{times} \u2717 over the limit, "
               f"{VERDICT_MARK['inconclusive']} undecided, \u2020 limit value to verify "
               "against your copy. Verdict: the worst over the phases.")
    if len(rows) > 1:
        b.add(b.table(rows, widths, right=tuple(range(1, 2 + 2 * n)), extra_style=extra,
                      dense=full))
    if rest:
        smallest = min(r[4] for r in rest)
        orders = _compact_orders([r[0] for r in rest])
        where = ("listed in appendix A" if b.job.meta.detail == "full"
                 else "in the attached results data")
        verdicts = sorted({r[3] for r in rest})
        how = ("pass" if verdicts == ["pass"] else
               "are undecided for the cause named above" if verdicts == ["inconclusive"] else
               "pass or are undecided")
        b.add(b.p(f"{len(rest)} further orders ({orders}) {how}, each at least "
                  f"{numfmt.margin(smallest, signed=False)} inside its limit on every phase; "
                  f"{where}.", "small"))


def _analysis_tables(b: _Builder, run, harmonics) -> None:
    """Harmonic table of an analysis without limits: % of fundamental per channel."""
    res = run.result
    chans = [c for c in sorted(res.channels, key=lambda c: (c.quantity != "current",
                                                             _PHASE_ORDER.get(c.phase, 9)))]
    head = ["Order"] + [f"{c.name} [%]" for c in chans]
    rows = [head]
    pct = {}
    for c in chans:
        sub = harmonics[harmonics["channel"] == c.name]
        pct[c.name] = dict(zip(sub["order"].tolist(), sub["percent_of_fundamental"].tolist()))
    for h in range(1, res.max_resolved_order + 1):
        rows.append([str(h)] + [numfmt.value(pct[c.name].get(h), "harmonic", unit="")
                                for c in chans])
    n = len(chans)
    widths = [0.08] + [min(0.92 / n, 0.14)] * n
    b.tcaption(f"{run.id}: harmonic components in % of each channel's fundamental (rms over "
               "the capture); order 1 is 100 % by definition.")
    b.add(b.table(rows, widths, right=tuple(range(1, n + 1))))


_FLAG = "\u26a0"
"""Marks a value that a data-quality error undermines (with the finding's code beside it)."""


def _flagged(b: _Builder, label: str, codes) -> Paragraph | str:
    """A row label with the codes of the errors that undermine its values: ``ib`` over
    ``⚠ clipping``."""
    if not codes:
        return label
    return b.m(f"{esc(label)}<br/><b>{_FLAG} {esc(', '.join(codes))}</b>", "cell")


def _channels_and_power(b: _Builder, run) -> None:
    res = run.result
    flags = channel_flags(res.findings, [c.name for c in res.channels])
    chans = sorted(res.channels, key=lambda c: (c.quantity != "current",
                                                 _PHASE_ORDER.get(c.phase, 9)))
    rows = [["Channel", "Phase", "rms", "Fundamental", "THD", "THD group", "TDD", "PWHD",
             "Crest factor", "DC"]]

    def pct(x):
        return numfmt.value(x, "distortion")

    for c, (rms, fund) in zip(chans, numfmt.channel_columns(chans)):
        rows.append([_flagged(b, c.name, flags.get(c.name)), c.phase or "1ph", rms, fund,
                     pct(c.thd_percent), pct(c.thd_group_percent), pct(c.tdd_percent),
                     pct(c.pwhd_percent), numfmt.value(c.crest_factor, "crest_factor"),
                     numfmt.fixed(c.dc, numfmt.decimals_for([c.rms], numfmt.RMS_DIGITS), c.unit)])
    il = res.settings.il_a
    chan_caption = (f"{run.id}: channel values over the capture. THD over orders 2 to "
               f"{res.max_resolved_order}; TDD relative to IL = "
               + (numfmt.given(il, "A") if il else "not given")
               + "; PWHD over orders 14 to 40 (groups)."
               + (f" {_FLAG}: a data-quality error (section 3) undermines the channel's values; "
                  "they are shown, not relied on." if flags else ""))
    b.tcaption(chan_caption, b.table(rows, [0.09, 0.07, 0.1, 0.14, 0.08, 0.09, 0.08, 0.12,
                                            0.09, 0.14], right=tuple(range(2, 10))))
    p = res.power
    if p is None:
        b.add(b.p("Power quantities: not available (the capture lacks matching voltage and "
                  "current channels).", "small"))
        return
    rows = [["Phase", "P", "S", "P1", "Q1", "S1", "PF", "DPF"]]

    def k(x, ref, unit):  # W, VA, var with the prefix and decimals of the apparent power
        return numfmt.power(x, unit, ref=ref)

    bad_phases = []
    for ph in p.phases:
        codes = tuple(dict.fromkeys(flags.get(ph.voltage, ()) + flags.get(ph.current, ())))
        if codes:
            bad_phases.append(ph.phase or "1ph")
        rows.append([_flagged(b, f"{ph.phase or '1ph'} ({ph.voltage} \u00d7 {ph.current})",
                              codes),
                     k(ph.p_w, ph.s_va, "W"), k(ph.s_va, ph.s_va, "VA"),
                     k(ph.p1_w, ph.s_va, "W"), k(ph.q1_var, ph.s_va, "var"),
                     k(ph.s1_va, ph.s_va, "VA"), numfmt.value(ph.pf, "power_factor"),
                     numfmt.value(ph.dpf, "power_factor")])
    ref = p.se_va if p.se_va else None
    total = [b.m(f"total<br/><b>{_FLAG} includes {esc(', '.join(bad_phases))}</b>", "cell")
             if bad_phases else "total", k(p.p_w, ref, "W"),
             k(p.se_va, ref, "VA") + (" (Se)" if p.wiring else "")
             if p.se_va is not None else "\u2013", "", "", "",
             numfmt.value(p.pf, "power_factor"), ""]
    if "dpf_pos" in p.extra:
        total[7] = numfmt.value(p.extra["dpf_pos"], "power_factor") + " (+seq)"
    if "p1pos_w" in p.extra:
        total[3] = k(p.extra["p1pos_w"], ref, "W") + " (+seq)"
    if "q1pos_var" in p.extra:
        total[4] = k(p.extra["q1pos_var"], ref, "var") + " (+seq)"
    rows.append(total)
    cap = (f"{run.id}: power quantities (IEEE 1459; negative P = export; negative PF and DPF "
           "when exporting; +seq: positive-sequence fundamental quantities).")
    if p.wiring:
        cap += f" Three-phase {p.wiring} connection ({res.settings.wiring_source})."
    if "i_unbalance_percent" in p.extra:
        cap += (" Current unbalance I2/I1 "
                f"{numfmt.value(p.extra['i_unbalance_percent'], 'percent')}, voltage "
                f"unbalance {numfmt.value(p.extra.get('v_unbalance_percent'), 'percent')}.")
    if bad_phases:
        cap += (f" {_FLAG}: the power of phase {', '.join(bad_phases)} comes from a channel "
                "that a data-quality error (section 3) undermines, and so does the total; "
                "shown, not relied on.")
    b.tcaption(cap, b.table(rows, [0.22, 0.1, 0.13, 0.11, 0.12, 0.1, 0.1, 0.12],
                            right=tuple(range(1, 8)),
                            extra_style=[("LINEABOVE", (0, len(rows) - 1), (-1, len(rows) - 1),
                                          0.6, INK)]))


_MIN_TREND_WINDOWS = 10
"""A THD-per-window chart needs at least this many windows to say more than the table. """


def _harmonic_groups(a) -> dict:
    groups: dict = {}
    for c in a.checks:
        if c.quantity == "harmonic" and c.order is not None:
            groups.setdefault((c.applies_to, c.statistic, c.unit), []).append(c)
    return groups


def _per_capture(b: _Builder) -> None:
    from ..export import harmonics_frame

    job = b.job
    b.add(CondPageBreak(75 * mm))  # the heading never stands alone at a page's foot
    b.h1("2  Results per capture")
    for k, run in enumerate(job.runs, start=1):
        if k > 1:
            b.add(CondPageBreak(90 * mm))
        title = f"2.{k}  {run.id}"
        if run.load_point:
            title += f" \u2013 load point {run.load_point}"
        b.h2(title)
        _capture_facts(b, run)
        for a in run.tables:
            _assessment_block(b, run, a)
        if not run.assessments:
            harm = harmonics_frame(run.result)
            for quantity in ("current", "voltage"):
                data = figures.spectrum_from_result(run.result, quantity, harmonics=harm)
                if data is not None:
                    b.figure(figures.plot_spectrum(data),
                             f"{run.id}: {quantity} harmonics per phase in % of the "
                             "fundamental (no limit table applied).")
            _analysis_tables(b, run, harm)
        b.h3("Channel values and power quantities")
        _channels_and_power(b, run)
        b.figure(figures.plot_waveforms(figures.waveform_data(run.capture, run.result)),
                 f"{run.id}: three cycles of the recorded voltages and currents, from the "
                 "start of the first valid analysis window (raw samples).",
                 heading="Waveforms and distortion over time")
        n_valid = int(run.result.windows.valid.sum())
        if n_valid >= _MIN_TREND_WINDOWS:
            b.figure(figures.plot_trend(figures.trend_data(run.result,
                                                           windows=run.windows_frame())),
                     f"{run.id}: THD of each channel per "
                     f"{run.result.settings.cycles_per_window}-cycle window across the "
                     f"capture ({_thd_basis_text(run)}; gaps: invalid windows).")
        else:
            b.add(b.p(f"{run.id}: {n_valid} valid analysis windows: too few for a chart of "
                      "THD over time; the per-window values are in the attached results "
                      "data.", "small"))
        if getattr(run.result, "flicker", None) is not None:
            _flicker_section(b, run)


_MEASURE_WORDS = {"component": "harmonic components", "group": "harmonic groups",
                  "subgroup": "harmonic subgroups"}


def _thd_basis_text(run) -> str:
    """``"harmonic subgroups, orders 2 to 50, as ieee519-2022 sums it"``: what the per-window
    THD of a capture sums (:attr:`~pqcheck.report.job.CaptureRun.thd_basis`)."""
    from ..assess import thd_top_order

    basis = run.thd_basis
    top = thd_top_order(run.result, basis["max_order"])
    text_ = f"{_MEASURE_WORDS[basis['measure']]}, orders 2 to {top}"
    return text_ + (f", as {basis['table_id']} sums it" if basis["table_id"] else "")


def _flicker_section(b: _Builder, run) -> None:
    """Flicker and voltage changes: the Pst table, d(t) against its limits, Pinst."""
    fa = run.result.flicker
    checks = [c for a in run.assessments for c in a.checks]
    b.h3("Flicker and voltage changes (IEC 61000-4-15, IEC 61000-3-3)")
    path = {"voltage": "the measured voltage",
            "reference-impedance": "the voltage computed from the current through the "
                                   "IEC 61000-3-3 reference impedance",
            "system-impedance": "the voltage computed from the current through the given "
                                "system impedance"}[fa.path]
    b.add(b.p(f"Evaluated on {path}.", "small"))
    rows = [["channel", "lamp", "interval", "Pst", "Plt", "Pinst max", "dc %", "dmax %",
             "Tmax s"]]
    for cf in fa.channels:
        m, c = cf.meter, cf.change
        pst = ", ".join(numfmt.value(p, "flicker") for p in m.pst[:12])
        if len(m.pst) > 12:
            pst += f" ... ({len(m.pst)})"
        rows.append([cf.channel + (f" (from {cf.derived_from})" if cf.derived_from else ""),
                     m.lamp, numfmt.given(m.interval_s, "s"), pst,
                     numfmt.value(cf.plt, "flicker"), numfmt.value(m.pinst_max, "flicker"),
                     numfmt.value(c.dc_percent, "percent", unit=""),
                     numfmt.value(c.dmax_percent, "percent", unit=""),
                     numfmt.value(c.tmax_s, "duration", unit="")])
    b.add(b.table(rows, [0.2, 0.1, 0.09, 0.2, 0.07, 0.09, 0.08, 0.08, 0.09],
                  right=(2, 3, 4, 5, 6, 7, 8)))
    b.tcaption(f"{run.id}: short-term flicker per interval (10 min, or the whole capture when "
               "shorter, as stated), long-term flicker (12 intervals), and the largest "
               "relative voltage changes.")
    for cf in fa.channels:
        b.figure(figures.plot_flicker(figures.flicker_data(cf, checks)),
                 f"{run.id}: relative voltage change d(t) of {cf.channel} against the limit "
                 "lines (blank where the voltage is steady), and the instantaneous flicker "
                 "sensation Pinst over the capture.")


def _appendix(b: _Builder) -> None:
    """Appendix A: every harmonic table in full (only in the full report)."""
    job = b.job
    if job.meta.detail != "full":
        return
    if not any(_harmonic_groups(a) for r in job.runs for a in r.tables):
        return
    b.h1("Appendix A  Full harmonic tables")
    b.add(b.p("Every assessed order of every capture and limit table. The body of the report "
              "lists only the orders that decide (failing, undecided, or within 50 % of their "
              "limit).", "body"))
    for run in job.runs:
        for a in run.tables:
            lim = a.limits
            for (quantity, statistic, unit), group in _harmonic_groups(a).items():
                what = "current" if quantity == "current" else "voltage" \
                    if quantity == "voltage" else "harmonic"
                _harmonic_table(b, run, lim, group, what, statistic, unit, full=True)


def _findings(b: _Builder) -> None:
    b.h1("3  Data quality")
    b.add(b.p("Findings are problems in a capture that the results carry rather than hide. "
              "An error-level finding makes every check of the quantities it concerns "
              "inconclusive; warnings ask for a reviewer's attention; information notes say "
              "what pqcheck did (for example detect the nominal frequency).", "body"))
    for run in b.job.runs:
        fs = run.result.findings
        b.h3(f"Capture {run.id}")
        if not fs:
            b.add(b.p("No findings.", "small"))
            continue
        order = {"error": 0, "warning": 1, "info": 2}
        rows = [["Severity", "Finding", "Channels", "What it means and what to do"]]
        extra = []
        for f in sorted(fs, key=lambda f: order.get(f.severity, 3)):
            sev = {"error": "\u2717 ERROR", "warning": "! warning", "info": "info"}.get(
                f.severity, f.severity)
            sev_cell = (b.m(f'<font color="white"><b>{esc(sev)}</b></font>', "cell")
                        if f.severity == "error" else sev)
            rows.append([sev_cell, f.code, ", ".join(f.channels) or "all", f.message])
            if f.severity == "error":
                extra += _verdict_style(0, len(rows) - 1, "fail")
        b.add(b.table(rows, [0.11, 0.16, 0.13, 0.6], extra_style=extra))


def _test_setup(b: _Builder) -> None:
    """What the test plan says about the site, the supply and the conditions."""
    plan = b.job.plan
    if plan is None:
        return
    site, cond = plan.site, plan.conditions
    tr = getattr(site, "transformer", None)
    pairs = [(k, v) for k, v in (
        ("Site address", site.address),
        ("Transformer", "" if tr is None else ", ".join(x for x in (
            tr.description,
            f"{numfmt.given(tr.rating_va / 1e3)} kVA" if tr.rating_va else "",
            f"{numfmt.given(tr.primary_v)} V / {numfmt.given(tr.secondary_v)} V"
            if tr.primary_v and tr.secondary_v else "",
            f"{numfmt.given(tr.impedance_percent)} % impedance" if tr.impedance_percent else "")
            if x)),
        ("Location of the measurement", cond.location),
        ("Supply", cond.supply),
        ("Ambient", f"{numfmt.given(cond.ambient_c)} \u00b0C" if cond.ambient_c is not None
         else ""),
        ("Conditions", cond.notes),
        ("Plan notes", plan.notes)) if v]
    if pairs:
        b.h3("Test set-up, as the test plan records it")
        b.add(b.kv(pairs, key_width=0.26))
        if site.pcc or _pcc_basis(plan):
            b.add(b.p("The point of common coupling, ISC and IL (with the site's notes on them) "
                      "stand on page 1.", "caption"))


def _method(b: _Builder) -> None:
    job = b.job
    b.h1("4  Method and settings")
    _test_setup(b)
    first = job.runs[0].result.settings
    b.add(b.p(first.method + ".", "body"))
    stats = list(dict.fromkeys(c.statistic for r in job.runs for a in r.tables
                               for c in a.checks if c.statistic and not _is_gate(c)))
    did = ("Values for the whole capture are the rms of the valid 10/12-cycle window values "
           "(IEC 61000-4-7).")
    if stats:
        did += (" The limit checks of this report compare: " + "; ".join(stats) + ". No other "
                "aggregation was applied.")
    b.add(b.p(did, "body"))
    rows = [["Capture", "Nominal", "Window", "Synchronised to", "Measured frequency",
             "Orders", "Wiring", "IL"]]
    for r in job.runs:
        s, res = r.result.settings, r.result
        rows.append([
            r.id, f"{numfmt.given(s.nominal_hz, 'Hz')} ({s.nominal_source})",
            f"{s.cycles_per_window} cycles",
            f"fundamental of {s.reference}",
            f"{numfmt.value(res.fundamental_hz, 'frequency')} "
            f"({numfmt.value(res.freq_min_hz, 'frequency', unit='')} to "
            f"{numfmt.value(res.freq_max_hz, 'frequency', unit='')})",
            f"2 to {res.max_resolved_order}" + (f" (asked {s.max_order})"
                                               if res.max_resolved_order < s.max_order else ""),
            f"{s.wiring} ({s.wiring_source})" if s.wiring else "\u2013",
            numfmt.given(s.il_a, "A") if s.il_a else "\u2013"])
    b.add(b.table(rows, [0.14, 0.12, 0.09, 0.15, 0.2, 0.1, 0.12, 0.08]))
    b.add(b.p("Settings as the analysis ran (user = given; detected/inferred = determined "
              "from the data).", "caption"))
    b.h3("Standards and editions")
    rows = [["Document", "Used for"]]
    for name, use in text.STANDARDS_METHOD:
        rows.append([name, use])
    for lim in job.limit_tables():
        # what was done with this table, not only what the table describes
        done = list(dict.fromkeys(c.statistic for r in job.runs for a in r.tables
                                  if a.limits.table_id == lim.table_id for c in a.checks
                                  if c.statistic and not _is_gate(c)))
        use = f"limits: {lim.title}."
        if done:
            use += f" Compared in this report: {'; '.join(done)}."
        ev = getattr(lim, "evaluation", None)
        note = (getattr(ev, "note", "") if ev is not None else "").strip()
        if note and done and all("over the capture" in d for d in done):
            use += (f" The table's own evaluation (\u201c{note.rstrip('.')}\u201d) needs a "
                    "survey longer than these captures and was not applied.")
        elif note:
            use += f" The table's evaluation: {note}"
        rows.append([_designation(lim), use])
    b.add(b.table(rows, [0.25, 0.75]))


def _uncertainty(b: _Builder) -> None:
    job = b.job
    b.h1("5  Measurement uncertainty")
    plan = job.plan
    instruments = plan.conditions.instruments if plan is not None else ()
    if instruments:
        b.add(b.p("Instrument chain as recorded in the test plan:", "body"))
        rows = [["Element", "Model / serial", "Channels", "Ratio / range", "Bandwidth",
                 "Accuracy", "Category", "Calibration due"]]
        for ins in instruments:
            rows.append([
                ins.role, " / ".join(x for x in (ins.model, ins.serial) if x),
                ", ".join(ins.channels),
                " / ".join(x for x in (ins.ratio, ins.range) if x),
                numfmt.given(ins.bandwidth_hz, "Hz") if ins.bandwidth_hz else "\u2013",
                ins.accuracy, ins.measurement_category, ins.calibration_due])
        b.add(b.table(rows, [0.11, 0.16, 0.12, 0.13, 0.11, 0.14, 0.11, 0.12]))
        if plan.conditions.ambient_c is not None or plan.conditions.supply:
            b.add(b.p("Conditions: " + "; ".join(x for x in (
                f"ambient {numfmt.given(plan.conditions.ambient_c)} \u00b0C"
                if plan.conditions.ambient_c is not None else "",
                f"supply: {plan.conditions.supply}" if plan.conditions.supply else "") if x)
                + ".", "small"))
    else:
        b.add(b.p(text.UNCERTAINTY_NO_CHAIN, "body"))
    b.add(b.p(text.UNCERTAINTY_METHOD, "body"))
    if job.assessed:
        pct = text.CLOSE_MARGIN_PERCENT
        close = [(r, a, c) for r in job.runs for a in r.tables for c in a.checks
                 if c.margin_percent is not None and c.verdict in ("pass", "fail")
                 and abs(c.margin_percent) <= pct]
        b.add(b.p(text.UNCERTAINTY_CLOSE.format(pct=pct), "body"))
        if not close:
            b.add(b.p("None.", "small"))
        else:
            rows = [["Capture", "Table", "Item", "Phase", "Measured", "Limit", "Margin",
                     "Verdict"]]
            extra = []
            for r, a, c in sorted(close, key=lambda t: abs(t[2].margin_percent))[:_MAX_LISTED]:
                measured, limit, margin = b.cells(r, c)
                rows.append([r.id, a.limits.table_id, _check_item(c),
                             _channel_label(r.result, c.channel) if c.channel else "all",
                             f"{measured} {c.unit}".rstrip() if c.measured is not None
                             else measured,
                             numfmt.marked(f"{limit} {c.unit}".rstrip(),
                                           "\u2020" if getattr(c, "verify", False) else ""),
                             margin, _verdict_para(b, c.verdict)])
                extra += _verdict_style(7, len(rows) - 1, c.verdict)
            b.add(b.table(rows, [0.14, 0.14, 0.1, 0.11, 0.13, 0.13, 0.1, 0.15],
                          right=(4, 5, 6), extra_style=extra))


def _traceability(b: _Builder) -> None:
    job, meta = b.job, b.job.meta
    b.h1("6  Traceability")
    b.add(b.p("SHA-256 digests of every file this report rests on. Recompute them (for "
              "example with sha256sum) to confirm that an archived file is the one analysed.",
              "body"))
    plan_path = job.plan.path if job.plan is not None else None
    rows = [["Item", "File and SHA-256"]]

    def file_cell(path_text, digest):
        # Path and digest each on a line of their own, in monospace and small enough that a
        # 64-digit SHA-256 never breaks: copied from the PDF, it goes straight into
        # ``sha256sum -c``.
        return b.m(f"{esc(path_text)}<br/>{esc(digest)}", "hash")

    if job.plan is not None:
        rows.append(["test plan", file_cell(shown_path(job.plan.path), job.plan.sha256)])
    for r in job.runs:
        rows.append([f"capture {r.id}", file_cell(shown_path(r.result.source, plan_path),
                                                  r.result.sha256 or "in memory")])
    for c in (job.plan.excluded if job.plan is not None else ()):
        from ..readers import capture_sha256

        try:
            digest_c = capture_sha256(c.path)
        except OSError:
            digest_c = "file not readable"
        rows.append([f"capture {c.id} (excluded, not assessed)",
                     file_cell(shown_path(str(c.path), plan_path), digest_c)])
    for lim in job.limit_tables():
        rows.append([f"limit table {lim.table_id}",
                     file_cell(shown_path(lim.source, plan_path) or "bundled",
                               lim.sha256 or "\u2013")])
    digest = hashlib.sha256(b.results_json).hexdigest()
    rows.append(["results data (attached to this PDF)", file_cell(ATTACHMENT_NAME, digest)])
    b.add(b.table(rows, [0.24, 0.76]))
    where = ("Paths are relative to the test plan's folder, or as given on the command line."
             if job.plan is not None else "Paths are as given on the command line.")
    b.add(b.p(where, "caption"))
    b.substitution_note = len(b.story)  # filled in once every section is built
    import numpy
    import scipy

    pairs = [("Report id", meta.report_id),
             ("Time of analysis", meta.created_utc.astimezone(timezone.utc)
              .strftime("%Y-%m-%d %H:%M:%S UTC")),
             ("Tool", f"pqcheck {meta.tool_version} (Python {platform.python_version()}, "
                      f"numpy {numpy.__version__}, scipy {scipy.__version__})")]
    if meta.command:
        pairs.append(("Command", b.m(esc(meta.command), "mono")))
    pairs.append(("Results data", f"The file {ATTACHMENT_NAME} attached to this PDF holds "
                                  "every number of this report in machine-readable form "
                                  "(open the attachments panel of your PDF reader)."))
    b.add(Spacer(1, 2 * mm), b.kv(pairs, key_width=0.18))


def _safety(b: _Builder) -> None:
    b.h1("7  Safety, limitations and standing of this report")
    b.h3("Safety cautions")
    for line in text.SAFETY_CAUTIONS:
        head, sep, rest = line.partition(". ")
        if sep:
            b.add(b.m(f"<b>{esc(head)}.</b> {esc(rest)}", "bullet"))
        else:
            b.add(b.m(f"<b>{esc(line)}</b>", "bullet"))
    b.h3("Codes, the utility and the responsible engineer")
    b.add(b.p(text.DEFERENCE, "body"))
    b.h3("Not a certification")
    b.add(b.p("This report is an engineering record, not a certification, a type approval or "
              "a declaration of conformity; page 1 states what its verdict means and when it "
              "becomes part of a compliance decision.", "body"))
    notes = []
    for lim in b.job.limit_tables():
        for n in lim.notes:
            notes.append((lim.table_id, n))
    if notes:
        b.h3("Notes of the limit tables applied")
        for tid, n in notes:
            b.add(b.m(f"\u2022 <b>{esc(tid)}:</b> {esc(n)}", "small"))


def _signoff(b: _Builder) -> None:
    signoff_block(b, "8  Sign-off", b.job.meta.report_id, b.job.meta.operator)


def signoff_block(b: _Builder, heading: str, report_id: str, operator: str = "") -> None:
    """The sign-off of every pqcheck report: prepared, reviewed and approved by, each with
    name, date and signature, kept on one page."""
    st = b.st
    block = [Paragraph(esc(heading), st["h1"]),
             Paragraph(esc("By signing, each person confirms the part of the work named. The "
                           "reviewer and approver confirm that the limit tables and their "
                           "row selection fit the installation, that the data-quality "
                           "findings have been considered, and that the verdict follows from "
                           "the results."), st["body"]),
             Spacer(1, 3 * mm)]
    rows = [[Paragraph("Role", st["cell_head"]), Paragraph("Name", st["cell_head"]),
             Paragraph("Date", st["cell_head"]), Paragraph("Signature", st["cell_head"])]]
    for role, what in (("Prepared by", "measurement and analysis"),
                       ("Reviewed by", "independent technical review"),
                       ("Approved by", "release of the report")):
        rows.append([Paragraph(f"<b>{role}</b><br/><font size='6.5' color='#5b6670'>"
                               f"{what}</font>", st["cell"]), "", "", ""])
    t = Table(rows, colWidths=[0.22 * _WIDTH, 0.32 * _WIDTH, 0.16 * _WIDTH, 0.30 * _WIDTH],
              rowHeights=[None] + [17 * mm] * 3, hAlign="LEFT")
    t.setStyle(TableStyle([
        ("FONTNAME", (0, 0), (-1, -1), FONT),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("BACKGROUND", (0, 0), (-1, 0), SHADE_DARK),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, ACCENT),
        ("GRID", (0, 1), (-1, -1), 0.5, RULE),
        ("BOX", (0, 0), (-1, -1), 0.8, INK),
    ]))
    block.append(t)
    if operator:
        block.append(Spacer(1, 2 * mm))
        block.append(Paragraph(esc(f"Operator recorded for the measurements: "
                                   f"{operator}"), st["small"]))
    block.append(Spacer(1, 2 * mm))
    block.append(Paragraph(esc(f"Report {report_id}. Write names in capitals; "
                               "date as YYYY-MM-DD."), st["muted"]))
    b.add(KeepTogether(block))


# ---------------------------------------------------------------------------------------------
# Entry point
# ---------------------------------------------------------------------------------------------


def render_pdf(job, *, results_json: bytes) -> bytes:
    """Render the report of ``job`` to PDF bytes.

    Parameters
    ----------
    job : ReportJob
        Captures, results, assessments and metadata.
    results_json : bytes
        The results JSON (the report's JSON file), embedded as ``results.json``.

    Returns
    -------
    bytes
        The PDF document.
    """
    register_fonts()
    reset_substitutions()
    b = _Builder(job, results_json)
    _cover(b)
    _summary(b)
    _per_capture(b)
    _findings(b)
    _method(b)
    _uncertainty(b)
    _traceability(b)
    _safety(b)
    _signoff(b)
    _appendix(b)
    if SUBSTITUTED:
        shown = ", ".join(f"U+{cp:04X}" for cp in sorted(SUBSTITUTED)[:12])
        b.story.insert(getattr(b, "substitution_note", len(b.story)), b.p(
            "Characters shown as [U+XXXX]: text given to pqcheck (names, notes, file "
            "contents) holds control characters or characters that no font embedded in this "
            f"report can draw ({shown}{', ...' if len(SUBSTITUTED) > 12 else ''}). They are "
            "shown by their Unicode code point instead of an empty box; the attached results "
            "data keep the original text.", "small"))

    meta = job.meta
    verdict = job.verdict
    right = ("Overall verdict: " + _verdict_cell(verdict)) if verdict != NOT_ASSESSED \
        else "Analysis only: no verdict"
    left = printable(meta.title + (f" \u2013 {meta.equipment}" if meta.equipment else ""))
    buf = io.BytesIO()
    doc = SimpleDocTemplate(
        buf, pagesize=PAGE_SIZE, leftMargin=_MARGIN, rightMargin=_MARGIN,
        topMargin=17 * mm, bottomMargin=18 * mm, title=f"{meta.title} ({meta.report_id})",
        author=meta.operator or "", subject=meta.equipment or "harmonic emission test",
        creator=f"pqcheck {meta.tool_version}", keywords=meta.report_id,
        # the pages' initial font is an embedded one: PDF/A allows no font that is not
        initialFontName=FONT, initialFontSize=8)
    maker = functools.partial(_ReportCanvas, report_id=meta.report_id, header_left=left,
                              header_right=right, attachment=results_json)
    doc.build(b.story, canvasmaker=maker)
    from .archival import to_pdfa

    return to_pdfa(buf.getvalue(), created=meta.created_utc)
