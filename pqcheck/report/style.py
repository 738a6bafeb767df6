"""Typography, colours and small formatting helpers of the PDF report (numbers are written by
:mod:`pqcheck.numfmt`, the one number formatter; ``fmt`` and friends are its short names here).

The report uses the DejaVu Sans family that matplotlib ships (so text and figures share one
typeface and symbols such as the check mark, the cross, "<=" and "±" are available), a
greyscale palette with one dark slate accent, and verdict marks that carry their meaning in
words and symbols: colour is never the only carrier of pass or fail.

All text that comes from a user or a file (equipment names, notes, paths, channel names) goes
through :func:`esc` before it reaches a reportlab ``Paragraph``, whose mini-language would
otherwise interpret ``<``, ``>`` and ``&``.
"""

from __future__ import annotations

import math
from pathlib import Path
from xml.sax.saxutils import escape as _xml_escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT, TA_RIGHT
from reportlab.lib.styles import ParagraphStyle
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont

from .. import numfmt

__all__ = ["esc", "printable", "can_draw", "reset_substitutions", "SUBSTITUTED", "shown_path", "is_bundled_table", "fmt", "fmt_like", "fmt_pct", "styles", "register_fonts", "VERDICT_MARK", "VERDICT_WORD",
           "INK", "ACCENT", "MUTED", "RULE", "SHADE", "FONT", "FONT_BOLD", "FONT_MONO"]

FONT = "PQSans"
FONT_BOLD = "PQSans-Bold"
FONT_ITALIC = "PQSans-Oblique"
FONT_MONO = "PQMono"

INK = colors.HexColor("#1a1a1a")
ACCENT = colors.HexColor("#24404f")
MUTED = colors.HexColor("#5b6670")
RULE = colors.HexColor("#9aa3ab")
SHADE = colors.HexColor("#eef1f3")
SHADE_DARK = colors.HexColor("#d5dadf")

VERDICT_MARK = {"pass": "\u2713", "fail": "\u2717", "inconclusive": "\u25d0",
                "not applicable": "\u2013", "": ""}
VERDICT_WORD = {"pass": "PASS", "fail": "FAIL", "inconclusive": "INCONCLUSIVE",
                "not applicable": "NOT APPLICABLE", "": ""}

_registered = False


def register_fonts() -> None:
    """Register the DejaVu fonts bundled with matplotlib with reportlab (once)."""
    global _registered
    if _registered:
        return
    from matplotlib import get_data_path

    ttf = Path(get_data_path()) / "fonts" / "ttf"
    pdfmetrics.registerFont(TTFont(FONT, str(ttf / "DejaVuSans.ttf")))
    pdfmetrics.registerFont(TTFont(FONT_BOLD, str(ttf / "DejaVuSans-Bold.ttf")))
    pdfmetrics.registerFont(TTFont(FONT_ITALIC, str(ttf / "DejaVuSans-Oblique.ttf")))
    pdfmetrics.registerFont(TTFont(FONT_MONO, str(ttf / "DejaVuSansMono.ttf")))
    pdfmetrics.registerFontFamily(FONT, normal=FONT, bold=FONT_BOLD, italic=FONT_ITALIC,
                                  boldItalic=FONT_BOLD)
    _registered = True


_FALLBACK_FONTS: list = []  # (reportlab name, set of code points), found on first need
_fallback_searched = False
SUBSTITUTED: set = set()
"""Code points of user text that no embedded font could draw (shown as ``[U+XXXX]``) and
control characters made visible, since the last :func:`reset_substitutions`."""


def reset_substitutions() -> None:
    """Forget the substitutions of the previous document (call before rendering one)."""
    SUBSTITUTED.clear()


_MAIN_CMAP: dict = {}


def _main_cmap() -> dict:
    """Code points DejaVu Sans draws, restricted to the Basic Multilingual Plane: reportlab
    writes 16-bit text mappings, so a character beyond U+FFFF (emoji) would be drawn but
    copied out of the PDF as another character."""
    if not _MAIN_CMAP:
        register_fonts()
        _MAIN_CMAP.update({cp: g for cp, g in pdfmetrics.getFont(FONT).face.charToGlyph.items()
                           if cp <= 0xFFFF})
    return _MAIN_CMAP


def _find_fallbacks() -> None:
    """Register installed TrueType fonts (glyph outlines, the only kind reportlab embeds) that
    can draw what DejaVu Sans cannot: CJK, for example, where the system has such a font."""
    global _fallback_searched
    if _fallback_searched:
        return
    _fallback_searched = True
    try:
        from fontTools.ttLib import TTFont as _FtFont
        from matplotlib import font_manager
    except ImportError:  # pragma: no cover - matplotlib depends on fontTools
        return
    for k, path in enumerate(sorted(font_manager.findSystemFonts(fontext="ttf"))):
        if not path.lower().endswith(".ttf") or "dejavu" in path.lower():
            continue
        try:
            ft = _FtFont(path, lazy=True)
            if "glyf" not in ft:
                continue
            cps = {cp for cp in (ft.getBestCmap() or {}) if cp <= 0xFFFF}
            name = f"PQFallback{k}"
            pdfmetrics.registerFont(TTFont(name, path))
        except Exception:  # noqa: BLE001 - a broken system font is skipped, never fatal
            continue
        _FALLBACK_FONTS.append((name, cps))


def _fallback_for(cp: int):
    _find_fallbacks()
    for name, cps in _FALLBACK_FONTS:
        if cp in cps:
            return name
    return None


def can_draw(ch: str) -> bool:
    """True when an embedded font of the report can draw ``ch``."""
    cp = ord(ch)
    return cp in _main_cmap() or _fallback_for(cp) is not None


def _is_control(ch: str) -> bool:
    import unicodedata

    return unicodedata.category(ch) in ("Cc", "Cf", "Cs", "Co", "Cn") and ch not in "\n\t"


def printable(text) -> str:
    """Plain text with every character the report's fonts can show: control characters and
    characters no embedded font has become a visible ``[U+XXXX]`` (never an empty box)."""
    if text is None:
        return ""
    out = []
    cmap = _main_cmap()
    for ch in str(text):
        if ch == "\t":
            out.append(" ")
        elif ch == "\n" or (ord(ch) in cmap and not _is_control(ch)):
            out.append(ch)
        else:
            SUBSTITUTED.add(ord(ch))
            out.append(f"[U+{ord(ch):04X}]")
    return "".join(out)


def esc(text) -> str:
    """Escape user or file text for a reportlab Paragraph: ``&``, ``<``, ``>`` shown literally,
    line breaks kept. None becomes an empty string.

    Characters DejaVu Sans lacks are drawn with an installed TrueType font that has them
    (embedded like the others); a control character, or a character no font here can draw,
    is shown as ``[U+XXXX]`` and recorded in :data:`SUBSTITUTED` so the report can say so.
    """
    if text is None:
        return ""
    cmap = _main_cmap()
    out = []
    run_font, run = None, []

    def flush():
        if run:
            piece = _xml_escape("".join(run))
            out.append(f'<font name="{run_font}">{piece}</font>' if run_font else piece)
            run.clear()

    for ch in str(text):
        cp = ord(ch)
        if ch == "\n":
            flush()
            out.append("<br/>")
            continue
        if ch == "\t":
            ch, cp = " ", 32
        if _is_control(ch):
            font, ch = None, f"[U+{cp:04X}]"
            SUBSTITUTED.add(cp)
        elif cp in cmap:
            font = None
        else:
            font = _fallback_for(cp)
            if font is None:
                SUBSTITUTED.add(cp)
                ch = f"[U+{cp:04X}]"
        if font != run_font:
            flush()
            run_font = font
        run.append(ch)
    flush()
    return "".join(out)


def is_bundled_table(source) -> bool:
    """True when ``source`` is the file of a limit table bundled with pqcheck."""
    if not source:
        return False
    try:
        from importlib import resources

        with resources.as_file(resources.files("pqcheck.limit_tables")) as folder:
            return Path(source).resolve().parent == Path(folder).resolve()
    except (OSError, ValueError, ModuleNotFoundError):
        return False


def shown_path(source, base=None) -> str:
    """How a report shows the path of an input file.

    A relative path (as the user typed it, relative to the working folder) is shown as it
    is; an absolute path inside ``base`` (the test plan's folder, when there is a plan) is
    shown relative to it; a limit table bundled with pqcheck is shown by its file name with
    ``bundled`` (never the installation folder); anything else is shown as recorded. Only
    recorded strings are used, so a report re-rendered elsewhere (``pqcheck verify``) shows
    the same paths.
    """
    if source is None or source == "":
        return ""
    text_ = str(source)
    if is_bundled_table(text_):
        return f"{Path(text_).name} (bundled with pqcheck)"
    p = Path(text_)
    if not p.is_absolute():
        return text_
    if base is not None:
        try:
            return str(p.relative_to(Path(base).resolve().parent if Path(base).suffix
                                     else Path(base).resolve()))
        except ValueError:
            pass
    return text_


def fmt(x, digits: int = 4, unit: str = "") -> str:
    """Number with ``digits`` significant digits and ``unit`` (:func:`pqcheck.numfmt.number`,
    the one formatter); a dash for None or NaN."""
    return numfmt.number(x, digits, unit)


def fmt_like(x, ref, digits: int = 4) -> str:
    """``x`` with as many decimals as ``ref`` shows with ``digits`` significant digits, so a
    column of measured values lines up with its limits (``fmt_like(9.9e-6, 5.0)`` is
    ``"0.000"``); falls back to :func:`fmt` when ``ref`` is missing or zero."""
    try:
        r = abs(float(ref))
    except (TypeError, ValueError):
        return fmt(x, digits)
    if not (math.isfinite(r) and r > 0):
        return fmt(x, digits)
    return numfmt.fixed(x, numfmt.decimals_for([r], digits))


def fmt_pct(x, digits: int = 3) -> str:
    """A margin with its sign, e.g. ``+12.5 %`` (:func:`pqcheck.numfmt.margin`); a dash for
    None or NaN. ``digits`` is kept for callers and ignored: a margin has one decimal."""
    return numfmt.margin(x)


def styles() -> dict:
    """Paragraph styles of the report, by name."""
    register_fonts()
    base = ParagraphStyle("body", fontName=FONT, fontSize=8.6, leading=11.6, textColor=INK,
                          alignment=TA_LEFT, spaceAfter=4)
    st = {"body": base}
    st["small"] = ParagraphStyle("small", parent=base, fontSize=7.4, leading=9.6)
    st["muted"] = ParagraphStyle("muted", parent=st["small"], textColor=MUTED)
    # a word too long for its cell (a capture id such as "charger-b-fullload") breaks after
    # one of its own hyphens rather than inside a word
    st["cell"] = ParagraphStyle("cell", parent=base, fontSize=7.4, leading=9.2, spaceAfter=0,
                                embeddedHyphenation=1)
    st["cell_r"] = ParagraphStyle("cell_r", parent=st["cell"], alignment=TA_RIGHT)
    st["cell_b"] = ParagraphStyle("cell_b", parent=st["cell"], fontName=FONT_BOLD)
    st["cell_head"] = ParagraphStyle("cell_head", parent=st["cell"], fontName=FONT_BOLD,
                                     textColor=ACCENT)
    st["cell_head_r"] = ParagraphStyle("cell_head_r", parent=st["cell_head"], alignment=TA_RIGHT)
    st["mono"] = ParagraphStyle("mono", parent=st["cell"], fontName=FONT_MONO, fontSize=6.9)
    # paths and SHA-256 digests: 64 hex digits fit a 0.76-width cell on one line
    st["hash"] = ParagraphStyle("hash", parent=st["cell"], fontName=FONT_MONO, fontSize=6.6,
                                leading=8.4)
    st["h1"] = ParagraphStyle("h1", parent=base, fontName=FONT_BOLD, fontSize=14, leading=18,
                              textColor=ACCENT, spaceBefore=12, spaceAfter=8, keepWithNext=1)
    st["h2"] = ParagraphStyle("h2", parent=base, fontName=FONT_BOLD, fontSize=11, leading=14,
                              textColor=ACCENT, spaceBefore=10, spaceAfter=5, keepWithNext=1)
    st["h3"] = ParagraphStyle("h3", parent=base, fontName=FONT_BOLD, fontSize=9.2,
                              leading=12, textColor=INK, spaceBefore=8, spaceAfter=3,
                              keepWithNext=1)
    st["caption"] = ParagraphStyle("caption", parent=st["small"], textColor=MUTED,
                                   spaceBefore=2, spaceAfter=8)
    st["tcaption"] = ParagraphStyle("tcaption", parent=st["small"], textColor=MUTED,
                                    spaceBefore=4, spaceAfter=3)
    st["title"] = ParagraphStyle("title", parent=base, fontName=FONT_BOLD, fontSize=24,
                                 leading=29, textColor=ACCENT, spaceAfter=4)
    st["subtitle"] = ParagraphStyle("subtitle", parent=base, fontSize=12.5, leading=16,
                                    textColor=INK, spaceAfter=2)
    st["kicker"] = ParagraphStyle("kicker", parent=base, fontName=FONT_BOLD, fontSize=8,
                                  leading=10, textColor=MUTED, spaceAfter=6)
    st["verdict"] = ParagraphStyle("verdict", parent=base, fontName=FONT_BOLD, fontSize=26,
                                   leading=31, spaceAfter=0)
    st["verdict_text"] = ParagraphStyle("verdict_text", parent=base, fontSize=9.5,
                                        leading=12.5, spaceAfter=0)
    st["bullet"] = ParagraphStyle("bullet", parent=base, leftIndent=10, bulletIndent=0,
                                  spaceAfter=2)
    return st
