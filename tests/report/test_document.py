"""The report document: validation, formatting and the to_dict/from_dict round trip."""

from __future__ import annotations

import json
import math

import pytest

from speciakin.errors import InputError
from speciakin.report import Callout, Figure, KeyValues, Paragraph, ReportDocument, Section, Table, format_cell
from speciakin.report.document import PNG_SIGNATURE


def test_round_trip_through_json_keeps_everything(document):
    text = document.to_json()
    again = ReportDocument.from_json(text)
    assert again.to_dict() == document.to_dict()
    figures = [b for _, b in document.blocks("figure")]
    figures_again = [b for _, b in again.blocks("figure")]
    assert len(figures) == 3
    assert [f.image_bytes() for f in figures_again] == [f.image_bytes() for f in figures]
    assert json.loads(text)["tables_for_workbook"][0]["title"] == "Fitted parameters"


def test_figure_from_path_is_embedded_on_export(tmp_path, document):
    png = next(b for _, b in document.blocks("figure")).image_bytes()
    file = tmp_path / "plot.png"
    file.write_bytes(png)
    figure = Figure(file, "from file")
    restored = Figure.from_dict(json.loads(json.dumps(figure.to_dict())))
    assert restored.image_bytes() == png
    assert restored.path is None


def test_decision_callouts_in_reading_order(document):
    decisions = document.callouts("decision")
    assert [c.title for c in decisions] == ["Recommended pH window"]
    assert [c.kind for c in document.callouts("warning")] == ["warning"]


def test_first_page_alerts_say_each_sentence_once(tmp_path):
    # the sampler's warnings are also among those of the fit and the posterior: page 1 says each once, the
    # sections keep theirs whole
    from speciakin.report.html import render_html
    from speciakin.report.pdf import render_pdf

    accept = "acceptance fraction 0.68 is outside 0.15-0.6 (common practice): the posterior may be badly scaled."
    doc = ReportDocument("T", [
        Section("Correlations", [Callout("warning", "Warnings of the fit and the posterior",
                                         f"parameters a and b are strongly correlated (+0.981). {accept}")]),
        Section("Posterior", [Callout("warning", "Sampler warnings", f"{accept} 2 walker(s) may be stuck."),
                              Callout("warning", "Again", accept)]),
        Section("Cautions", [Callout("caution", "A decision aid", "Defer to the process-safety assessment.")]),
    ])
    alerts = doc.alerts()
    assert [a.title for a in alerts] == ["Warnings of the fit and the posterior", "Sampler warnings", "A decision aid"]
    assert alerts[1].text == "2 walker(s) may be stuck."
    assert [c.text for c in doc.callouts("warning")][1] == f"{accept} 2 walker(s) may be stuck."
    page = render_html(doc, tmp_path / "r.html").read_text()
    summary = page.split("Contents")[0]
    assert summary.count("acceptance fraction 0.68") == 1
    assert page.count("acceptance fraction 0.68") == 4            # page 1 once, the three sections their own
    import pypdf

    first = pypdf.PdfReader(render_pdf(doc, tmp_path / "r.pdf")).pages[0].extract_text()
    assert first.split("Contents")[0].count("acceptance fraction 0.68") == 1


def test_anchors_are_unique_and_avoid_reserved_names():
    doc = ReportDocument("T", [Section("Fit"), Section("Fit"), Section("Decision summary"), Section("Contents")])
    anchors = [s.anchor for s in doc.sections]
    assert anchors == ["fit", "fit-2", "decision-summary-2", "contents-2"]


def test_format_cell():
    assert format_cell(None) == "\u2013"
    assert format_cell(float("nan")) == "NaN"
    assert format_cell(-math.inf) == "-inf"
    assert format_cell(3) == "3"
    assert format_cell(0.000123456) == "0.0001235"
    assert format_cell(2.5, ".2f") == "2.50"
    assert format_cell("7.6 - 8.2", ".2f") == "7.6 - 8.2"


def test_numpy_scalars_become_plain_numbers():
    import numpy as np

    table = Table("t", ["a", "b"], [[np.float64(1.5), np.int64(2)]])
    assert type(table.rows[0][0]) is float and type(table.rows[0][1]) is int
    json.dumps(table.to_dict())


@pytest.mark.parametrize("make, match", [
    (lambda: Table("t", ["a", "b"], [[1.0]]), "row length differs"),
    (lambda: Table("t", ["a"], [[1.0]], formats=["%q"]), "not a number format"),
    (lambda: Table("t", ["a"], [[1.0]], units=["s", "min"]), "one entry per column"),
    (lambda: Table("t", [], []), "at least one column"),
    (lambda: Table("t", ["a"], [[object()]]), "text, a number or empty"),
    (lambda: Callout("urgent", "x", "y"), "unknown callout kind"),
    (lambda: Figure(None, "no data"), "PNG bytes or the path"),
    (lambda: Figure(b"GIF89a.....", "c"), None),
    (lambda: Figure(PNG_SIGNATURE, "c", width_fraction=3), "width fraction"),
    (lambda: KeyValues([("only label",)]), "must be a pair"),
    (lambda: Section("s", ["plain text"]), "not a report block"),
    (lambda: ReportDocument("t", created="yesterday"), "ISO 8601"),
    (lambda: Paragraph(42), "expected text"),
])
def test_bad_blocks_raise_input_errors(make, match):
    if match is None:  # bad PNG data is found when the image is used
        with pytest.raises(InputError, match="not a PNG image"):
            make().image_bytes()
        return
    with pytest.raises(InputError, match=match):
        make()


def test_missing_figure_file_names_the_file(tmp_path):
    figure = Figure(tmp_path / "missing.png", "c")
    with pytest.raises(InputError, match="missing.png"):
        figure.image_bytes()


def test_from_dict_rejects_unknown_block_and_bad_json():
    data = {"title": "t", "sections": [{"title": "s", "blocks": [{"block": "video"}]}]}
    with pytest.raises(InputError, match="unknown block type.*video"):
        ReportDocument.from_dict(data)
    with pytest.raises(InputError, match="saved.json, line 1: not a report document"):
        ReportDocument.from_json("{not json", source="saved.json")
    with pytest.raises(InputError, match="figure data is not base64"):
        Figure.from_dict({"caption": "c", "png_base64": "***"})


def test_outline_lists_sections_and_sheets(document):
    text = document.outline()
    assert text.splitlines()[0] == document.title
    assert "4. Assumptions and limitations" in text
    assert "Workbook sheets: Fitted parameters, Data and fitted values, pH window" in text


from hypothesis import given, strategies as st  # noqa: E402

_cells = st.one_of(st.none(), st.text(max_size=12), st.integers(-10**9, 10**9),
                   st.floats(allow_nan=False, allow_infinity=True, width=64))


@given(st.integers(1, 4).flatmap(lambda n: st.lists(st.lists(_cells, min_size=n, max_size=n), max_size=6)))
def test_table_round_trip_property(rows):
    columns = [f"c{i}" for i in range(len(rows[0]))] if rows else ["c0"]
    table = Table("t", columns, rows)
    doc = ReportDocument("T", [Section("S", [table])], tables_for_workbook=[table])
    again = ReportDocument.from_json(doc.to_json())
    assert again.to_dict() == doc.to_dict()
    for a, b in zip((c for r in again.tables_for_workbook[0].rows for c in r), (c for r in table.rows for c in r)):
        assert type(a) is type(b)


def test_nan_cell_survives_the_round_trip():
    doc = ReportDocument("T", tables_for_workbook=[Table("t", ["x"], [[math.nan]])])
    value = ReportDocument.from_json(doc.to_json()).tables_for_workbook[0].rows[0][0]
    assert isinstance(value, float) and math.isnan(value)


def test_save_and_load_document(tmp_path, document):
    from speciakin.report import load_document, save_document

    path = save_document(document, tmp_path / "report.json")
    assert load_document(path).to_dict() == document.to_dict()
    with pytest.raises(InputError, match="missing.json.*cannot read report document"):
        load_document(tmp_path / "missing.json")
    (tmp_path / "bad.json").write_text("[1, 2", encoding="utf-8")
    with pytest.raises(InputError, match="bad.json, line 1"):
        load_document(tmp_path / "bad.json")


@pytest.mark.parametrize("data, match", [
    ([1, 2], "must be a mapping"),
    ({"title": "t", "sections": [3]}, "section must be a mapping"),
    ({"title": "t", "sections": [{"title": "s", "blocks": [{"block": "key_values", "rows": None}]}]},
     "malformed key_values block"),
    ({"title": "t", "sections": [{"title": "s", "blocks": [{"block": "table", "title": "x"}]}]},
     "at least one column"),
])
def test_malformed_saved_documents(data, match):
    with pytest.raises(InputError, match=match):
        ReportDocument.from_dict(data)


def test_notes_read_as_sentences():
    from speciakin.report.blocks import as_sentences

    text = as_sentences(["parameters a and b are strongly correlated (+0.981)", "log10k[acyl] is at its bound",
                         "pKa[S.N1] is open.", "the data scatter 0.42 times the stated error: too large"])
    assert text == ("Parameters a and b are strongly correlated (+0.981). log10k[acyl] is at its bound. "
                    "pKa[S.N1] is open. The data scatter 0.42 times the stated error: too large.")
    assert as_sentences([]) == ""
