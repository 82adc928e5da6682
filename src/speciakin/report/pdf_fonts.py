"""Fonts of the PDF report: DejaVu Sans for text, fallback fonts for names in any script.

reportlab draws each run of text in one font and shows a missing glyph as a
box.  DejaVu Sans covers Latin, Greek, Cyrillic and most symbols; a run
name or compound name in Chinese, Japanese, Korean or with an emoji needs
another font.  :func:`markup` escapes a text for a reportlab paragraph and
wraps each run of characters the main font lacks in the first fallback
font that has them:

=============================  ==============================================
Droid Sans Fallback            CJK ideographs, kana, hangul (Debian package
                               ``fonts-droid-fallback``)
Symbola                        emoji and symbols, drawn in outline (Debian
                               package ``fonts-symbola``)
=============================  ==============================================

When no installed font has a character, it prints as a box and one
:class:`PdfFontWarning` names the characters and the packages to install.
Colour emoji fonts (bitmap tables) cannot be embedded by reportlab.
"""

from __future__ import annotations

import unicodedata
import warnings
from pathlib import Path
from xml.sax.saxutils import escape as _xml_escape

__all__ = ["FALLBACK_FONTS", "PdfFontWarning", "register_fonts", "markup"]

#: (registered name, candidate files) of the fallback fonts, in order of preference.
FALLBACK_FONTS: tuple[tuple[str, tuple[str, ...]], ...] = (
    ("SpkFallbackCJK", ("/usr/share/fonts/truetype/droid/DroidSansFallbackFull.ttf",
                        "/usr/share/fonts-droid-fallback/truetype/DroidSansFallback.ttf",
                        "/usr/share/fonts/truetype/wqy/wqy-zenhei.ttc")),
    ("SpkFallbackSymbols", ("/usr/share/fonts/truetype/ancient-scripts/Symbola_hint.ttf",
                            "/usr/share/fonts/truetype/ancient-scripts/Symbola.ttf")),
)
_DEBIAN_PACKAGES = "fonts-droid-fallback and fonts-symbola"


class PdfFontWarning(UserWarning):
    """Some characters of the report have no glyph in any installed font."""


_state: dict = {"main": None, "fallbacks": None, "names": None, "warned": set()}


def _register(name: str, path: str):
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    font = TTFont(name, path)
    pdfmetrics.registerFont(font)
    # one face for every style, so <b> and <i> around a fallback run still resolve
    pdfmetrics.registerFontFamily(name, normal=name, bold=name, italic=name, boldItalic=name)
    return font


def register_fonts() -> tuple[str, str, str]:
    """Register DejaVu Sans and the fallback fonts found; return (regular, bold, mono) names.

    Helvetica (a standard PDF font, Latin only) is used when DejaVu Sans is missing.
    """
    if _state["names"] is not None:
        return _state["names"]
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFError

    try:
        import matplotlib

        folder = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
        main = _register_family(folder)
        names = ("SpkSans", "SpkSans-Bold", "SpkMono")
    except (OSError, ImportError):  # font files missing: the standard PDF fonts still work
        main, names = None, ("Helvetica", "Helvetica-Bold", "Courier")
    fallbacks = []
    for name, candidates in FALLBACK_FONTS:
        for path in candidates:
            if not Path(path).is_file():
                continue
            try:
                fallbacks.append((name, _register(name, path)) if name not in pdfmetrics.getRegisteredFontNames()
                                 else (name, pdfmetrics.getFont(name)))
            except (TTFError, OSError, ValueError):  # a damaged font file must not stop the report
                continue
            break
    _state.update(main=main, fallbacks=fallbacks, names=names)
    return names


def _register_family(folder: Path):
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    if "SpkSans" in pdfmetrics.getRegisteredFontNames():
        return pdfmetrics.getFont("SpkSans")
    main = TTFont("SpkSans", str(folder / "DejaVuSans.ttf"))
    pdfmetrics.registerFont(main)
    pdfmetrics.registerFont(TTFont("SpkSans-Bold", str(folder / "DejaVuSans-Bold.ttf")))
    pdfmetrics.registerFont(TTFont("SpkSans-Oblique", str(folder / "DejaVuSans-Oblique.ttf")))
    pdfmetrics.registerFont(TTFont("SpkMono", str(folder / "DejaVuSansMono.ttf")))
    pdfmetrics.registerFontFamily("SpkSans", normal="SpkSans", bold="SpkSans-Bold",
                                  italic="SpkSans-Oblique", boldItalic="SpkSans-Bold")
    return main


def _covers(font, ch: str) -> bool:
    face = getattr(font, "face", None)
    return face is not None and ord(ch) in face.charToGlyph


def _font_for(ch: str) -> str | None:
    """None when the main font draws ``ch``, else the fallback font name ('' when none has it)."""
    if ch < "\u0250" or (_state["main"] is not None and _covers(_state["main"], ch)):
        return None
    for name, font in _state["fallbacks"] or ():
        if _covers(font, ch):
            return name
    return None if ch.isspace() or unicodedata.category(ch) in ("Cc", "Cf") else ""


def markup(text: object) -> str:
    """``text`` escaped for a reportlab paragraph, with fallback-font runs for
    characters the main font lacks."""
    raw = str(text)
    if raw.isascii():
        return _xml_escape(raw)
    register_fonts()
    out: list[str] = []
    missing: list[str] = []
    run_font: str | None = None
    run: list[str] = []

    def flush() -> None:
        piece = _xml_escape("".join(run))
        out.append(f'<font name="{run_font}">{piece}</font>' if run_font else piece)
        run.clear()

    for ch in raw:
        font = _font_for(ch)
        if font == "":
            missing.append(ch)
            font = None
        if font != run_font and run:
            flush()
        run_font = font
        run.append(ch)
    if run:
        flush()
    new = sorted(set(missing) - _state["warned"])
    if new:
        _state["warned"].update(new)
        warnings.warn(f"no installed font has the characters {''.join(new)!s}; they print as boxes in the PDF "
                      f"(install the Debian packages {_DEBIAN_PACKAGES})", PdfFontWarning, stacklevel=2)
    return "".join(out)
