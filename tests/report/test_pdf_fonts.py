"""PDF fonts: names in any script print with a real glyph (fallback fonts), or warn.

Glyph coverage is read from the embedded fonts themselves: a character is
drawn (not a box) when the font its run is set in maps it to a glyph
(TrueType 'cmap' table; reportlab's TTFont exposes it as charToGlyph).
"""

from __future__ import annotations

import io
import warnings

import pypdf
import pytest

from speciakin.report import Callout, ReportDocument, Section, Table
from speciakin.report import pdf_fonts
from speciakin.report.pdf import pdf_bytes

CJK = "\u4e2d\u6587\u540d"          # three CJK ideographs
KANA = "\u30ab\u30bf\u30ab\u30ca"    # katakana
EMOJI = "\U0001F52C"                 # microscope (not in DejaVu Sans)


def _fonts_in(pdf: bytes) -> set[str]:
    names = set()
    for page in pypdf.PdfReader(io.BytesIO(pdf)).pages:
        for font in (page.get("/Resources", {}).get("/Font", {}) or {}).values():
            names.add(str(font.get_object().get("/BaseFont")))
    return names


def _have_fallbacks() -> bool:
    pdf_fonts.register_fonts()
    return len(pdf_fonts._state["fallbacks"] or ()) == len(pdf_fonts.FALLBACK_FONTS)


def test_markup_wraps_only_the_characters_the_main_font_lacks():
    pdf_fonts.register_fonts()
    if not _have_fallbacks():
        pytest.skip("fallback fonts not installed (Debian fonts-droid-fallback, fonts-symbola)")
    text = pdf_fonts.markup(f"run <R1> & {CJK} \u0394")
    assert text.startswith("run &lt;R1&gt; &amp; ")
    assert f'<font name="SpkFallbackCJK">{CJK}</font>' in text
    assert text.endswith("\u0394")  # Greek stays in DejaVu Sans


@pytest.mark.skipif(not _have_fallbacks(), reason="fallback fonts not installed")
def test_cjk_and_emoji_names_are_embedded_and_extractable():
    doc = ReportDocument(f"Campaign {CJK}", [Section("Runs", [
        Callout("note", f"Run {KANA}", f"compound {CJK} {EMOJI}"),
        Table("Runs", ["run", "value"], [[f"R-{CJK}", 1.0], [f"R-{EMOJI}", 2.0]])])])
    with warnings.catch_warnings():
        warnings.simplefilter("error", pdf_fonts.PdfFontWarning)  # every character has a glyph
        pdf = pdf_bytes(doc)
    fonts = " ".join(_fonts_in(pdf))  # PostScript names of the embedded subsets
    assert "DroidSansFallback" in fonts and "Symbola" in fonts
    text = " ".join(page.extract_text() for page in pypdf.PdfReader(io.BytesIO(pdf)).pages)
    assert CJK in text and KANA in text


def test_a_character_no_font_has_warns_once_and_still_renders():
    pdf_fonts.register_fonts()
    lost = "\U0010FFFD"  # a private-use plane character: in no font
    pdf_fonts._state["warned"].discard(lost)
    with pytest.warns(pdf_fonts.PdfFontWarning, match="fonts-droid-fallback"):
        pdf = pdf_bytes(ReportDocument("Lost", [Section("S", [Callout("note", "x", f"name {lost}")])]))
    assert pdf.startswith(b"%PDF")
