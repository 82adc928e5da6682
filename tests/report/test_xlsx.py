"""XLSX rendering: opened back with openpyxl."""

from __future__ import annotations

import math

import openpyxl
import pytest

from speciakin.report import ReportDocument, Table
from speciakin.report.xlsx import excel_number_format, sheet_names, xlsx_bytes



@pytest.fixture(scope="module")
def workbook(rendered):
    return openpyxl.load_workbook(rendered["xlsx"])


def test_sheets_in_order(workbook):
    assert workbook.sheetnames == ["summary", "Fitted parameters", "data", "pH window"]


def test_tables_hold_numbers_as_numbers(workbook, document):
    sheet = workbook["Fitted parameters"]
    assert [c.value for c in sheet[1]] == ["parameter", "estimate", "standard error", "at bound"]
    assert sheet["B2"].value == pytest.approx(2.3514) and sheet["B2"].data_type == "n"
    assert sheet["B2"].number_format == "0.0000"
    assert sheet["C5"].value is None  # empty cell stays empty
    data = workbook["data"]
    assert [c.value for c in data[1]] == ["run", "time [min]", "observed [mol%]", "fitted [mol%]", "residual [mol%]"]
    assert data.max_row == len(document.tables_for_workbook[1].rows) + 1
    for row in data.iter_rows(min_row=2, min_col=2):
        assert all(c.data_type == "n" and isinstance(c.value, (int, float)) for c in row)
    assert data.freeze_panes == "A2"
    assert data.column_dimensions["C"].width >= len("observed [mol%]")


def test_summary_sheet_holds_decision_and_cautions(workbook, decision_text):
    values = [c for row in workbook["summary"].iter_rows(values_only=True) for c in row if c is not None]
    assert decision_text in values
    assert "Cautions" in values and "Warnings" in values
    assert 0.95 in values  # key value kept as a number
    assert "data" in values  # sheet list


def test_non_finite_numbers_become_text():
    doc = ReportDocument("t", tables_for_workbook=[Table("t", ["x"], [[math.nan], [math.inf], [1.0]])])
    import io

    sheet = openpyxl.load_workbook(io.BytesIO(xlsx_bytes(doc)))["t"]
    assert [sheet.cell(row=r, column=1).value for r in (2, 3, 4)] == ["NaN", "inf", 1.0]


def test_sheet_names_are_valid_and_unique():
    tables = [Table("Intervals: profile / covariance [95 %]", ["a"], []), Table("summary", ["a"], []),
              Table("x" * 40, ["a"], []), Table("x" * 40, ["a"], [])]
    names = sheet_names(tables)
    assert len({n.lower() for n in names}) == 4 and "summary" not in names
    assert all(len(n) <= 31 and not set(n) & set("[]:*?/\\") for n in names)


@pytest.mark.parametrize("spec, expected", [
    (".3f", "0.000"), (".0f", "0"), (",.2f", "#,##0.00"), (".2e", "0.00E+00"), (".1%", "0.0%"),
    (".4g", "General"), (None, "General"),
])
def test_excel_number_format(spec, expected):
    assert excel_number_format(spec) == expected


def test_every_row_of_a_table_gets_its_number_format():
    rows = [[f"r{i}", 0.5 + i, i] for i in range(6)] + [["nan", math.nan, 7]]
    doc = ReportDocument("T", [], tables_for_workbook=[Table("Values", ["name", "x", "n"], rows,
                                                                 formats=[None, ".3f", None])])
    sheet = openpyxl.load_workbook(__import__("io").BytesIO(xlsx_bytes(doc)))["Values"]
    assert [sheet.cell(row=r, column=2).number_format for r in range(2, 8)] == ["0.000"] * 6
    assert sheet.cell(row=8, column=2).value == "NaN"  # stored as text (docs/report.md)
