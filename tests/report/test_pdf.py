"""PDF rendering: extractable text (pypdf), page numbers, split tables."""

from __future__ import annotations

import pypdf

from speciakin.report import Callout, ReportDocument, Section, Table
from speciakin.report.pdf import pdf_bytes



def _pages(path_or_bytes) -> list[str]:
    import io

    source = io.BytesIO(path_or_bytes) if isinstance(path_or_bytes, bytes) else str(path_or_bytes)
    return [page.extract_text() or "" for page in pypdf.PdfReader(source).pages]


def _flat(text: str) -> str:
    return " ".join(text.split())


def test_text_holds_titles_and_decision(rendered, document, decision_text):
    pages = _pages(rendered["pdf"])
    text = _flat(" ".join(pages))
    for i, section in enumerate(document.sections, 1):
        assert f"{i}. {section.title}" in text
    assert decision_text in text
    assert "reaction calorimetry" in text
    # title page, three figures and a 60-row table do not fit on fewer than four A4 pages
    assert len(pages) >= 4
    assert decision_text in _flat(pages[0])


def test_every_page_is_numbered(rendered):
    pages = _pages(rendered["pdf"])
    for i, text in enumerate(pages, 1):
        assert f"page {i} of {len(pages)}" in text


def test_outline_points_at_the_section_pages(rendered):
    reader = pypdf.PdfReader(str(rendered["pdf"]))
    entries = {o["/Title"]: reader.get_destination_page_number(o) for o in reader.outline}
    assert entries["Decision summary"] == 0
    pages = _pages(rendered["pdf"])
    assert "3. Data" in pages[entries["3. Data"]]


def test_long_table_splits_with_repeated_header():
    rows = [[f"R{i}", float(i), i * 0.5] for i in range(150)]
    doc = ReportDocument("Split", [Section("Data", [Table("Long", ["run", "time", "value"], rows,
                                                          units=[None, "min", "mol%"])])])
    pages = _pages(pdf_bytes(doc))
    assert len(pages) >= 3
    first = next(i for i, p in enumerate(pages) if "R0" in p)
    assert len(pages) - first >= 2  # the table really spans pages
    assert all("value [mol%]" in p for p in pages[first:])
    assert "R149" in pages[-1]


def test_symbols_survive():
    doc = ReportDocument("Symbols", [Section("S", [Callout("note", "Level", "P \u2265 0.95 \u00b1 0.01, \u0394\u03c7\u00b2")])])
    text = _flat(" ".join(_pages(pdf_bytes(doc))))
    assert "P \u2265 0.95 \u00b1 0.01" in text


def test_long_cell_text_wraps_inside_its_column():
    sentence = "the profile stays below the threshold on the upper side so the interval is open " * 3
    doc = ReportDocument("Wrap", [Section("S", [Table("Notes", ["parameter", "comment"], [["pKa2", sentence.strip()]])])])
    raw = " ".join(_pages(pdf_bytes(doc)))
    assert _flat(sentence) in _flat(raw)
    assert sentence.strip() not in raw  # broken over several lines, not one overflowing line


def test_a_short_word_stays_whole_beside_tokens_too_long_to_fit():
    # The report's input files: a role word, a path and a SHA-256 (64 characters, one token) do not fit
    # side by side on an A4 text width; the widest column gives way and the role keeps its width
    from reportlab.pdfbase.pdfmetrics import stringWidth

    from speciakin.report.pdf import _column_widths

    sha = "9629af449f931a8456c141df8ad8b77bf642a7358342967df7d4cce2866efd87"
    table = Table("Input files", ["role", "path", "SHA-256"],
                  [["campaign", "../../campaign.xlsx", sha], ["model file", "../../model.toml", sha]])
    width = 400.0
    widths = _column_widths(table, width)
    assert abs(sum(widths) - width) < 1e-6 or sum(widths) <= width
    assert widths[0] >= stringWidth("campaign", "Helvetica", 8.5) + 13
    assert widths[1] >= stringWidth("../../campaign.xlsx", "Helvetica", 8.5) + 13
    assert widths[2] < stringWidth(sha, "Helvetica", 8.5)   # the hash wraps
