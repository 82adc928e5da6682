"""Every CSV and XLSX writer keeps formula-like texts as text (no formula injection).

Reference: OWASP "CSV Injection" (cells starting with =, +, -, @, tab or
carriage return are evaluated by spreadsheet programs; the mitigation is a
leading single quote for CSV and a text cell for XLSX).  ECMA-376 Part 1
(Office Open XML), 18.3.1.4 (cell ``c``: a formula is the child element
``f``; a text cell carries no ``f``) and 18.8.45 (``xf`` attribute
``quotePrefix``: the text is shown and kept as text).
"""

from __future__ import annotations

import csv
import io
import re
import zipfile
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from data_factory import build_campaign
from speciakin._cells import FORMULA_TRIGGERS, csv_text, frame_csv_text, frame_xlsx_bytes, needs_guard, unguard_csv_text
from speciakin.data import load_campaign, write_campaign

NAMES = ['=HYPERLINK("http://x","y")', "=1+2", "+1", "@SUM(A1)", "-2+3", "\tTAB", "\rCR"]


def _text(path: Path) -> str:
    with open(path, newline="", encoding="utf-8") as fh:  # keep a carriage return inside a quoted cell
        return fh.read()


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def assert_csv_safe(text: str) -> int:
    """Every cell that would start a formula is quoted; returns how many were."""
    quoted = 0
    for row in csv.reader(io.StringIO(text)):
        for cell in row:
            assert not (cell.startswith(FORMULA_TRIGGERS) and not _is_number(cell)), cell
            quoted += cell.startswith("'") and needs_guard(cell[1:])
    return quoted


def assert_xlsx_safe(data: bytes) -> int:
    """No formula element in any sheet; every formula-like text is a quote-prefixed text cell."""
    import openpyxl

    with zipfile.ZipFile(io.BytesIO(data)) as z:
        for name in z.namelist():
            if name.startswith("xl/worksheets/") and name.endswith(".xml"):
                assert not re.search(rb"<f[ >/]", z.read(name)), name
    guarded = 0
    wb = openpyxl.load_workbook(io.BytesIO(data))
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                assert cell.data_type != "f", cell.coordinate
                if needs_guard(cell.value):
                    assert cell.data_type == "s" and cell.quotePrefix, (ws.title, cell.coordinate, cell.value)
                    guarded += 1
                if isinstance(cell.value, (int, float)) and not isinstance(cell.value, bool):
                    assert cell.data_type == "n"
    return guarded


def test_guard_rules():
    for name in NAMES:
        assert needs_guard(name)
        assert csv_text(name) == "'" + name
        assert unguard_csv_text(csv_text(name)) == name
    for value in (-2.5, 3, None, "R01", "'quoted by the user", "a=b"):
        assert csv_text(value) == value
    assert unguard_csv_text("'plain") == "'plain"  # only our own quoting is removed


def _campaign_with_names():
    c = build_campaign()
    runs = tuple(replace(r, recipe=replace(r.recipe, name=n, note=n)) for r, n in zip(c.runs, NAMES))
    return replace(c, runs=runs)


def test_data_writer_xlsx_and_csv_round_trip(tmp_path):
    c = _campaign_with_names()
    book = tmp_path / "campaign.xlsx"
    write_campaign(c, book)
    assert assert_xlsx_safe(book.read_bytes()) >= 2 * len(c.runs)
    folder = tmp_path / "csv"
    write_campaign(c, folder)
    quoted = sum(assert_csv_safe(_text(p)) for p in folder.glob("*.csv"))
    assert quoted >= 2 * len(c.runs)
    for source in (book, folder):  # the reader undoes the guard: names come back as written
        back = load_campaign(source)
        assert [r.name for r in back.runs] == [r.name for r in c.runs]
        assert [r.recipe.note for r in back.runs] == [r.recipe.note for r in c.runs]


def test_dataframe_tables_of_speciate_titrate_simulate(tmp_path):
    import pandas as pd

    from speciakin.cli.cmd_speciate import write_table  # titrate writes through the same function

    frame = pd.DataFrame({"run": NAMES, "value": np.linspace(-3, 3, len(NAMES)), NAMES[3]: NAMES[::-1]})
    assert assert_csv_safe(frame_csv_text(frame)) == 2 * len(NAMES) + 1
    assert assert_xlsx_safe(frame_xlsx_bytes(frame)) == 2 * (len(NAMES) - 1) + 1  # '\rCR' reads back as '\nCR'
    for suffix in (".csv", ".xlsx"):
        path = tmp_path / f"table{suffix}"
        write_table(frame, str(path))
        if suffix == ".csv":
            assert assert_csv_safe(_text(path)) == 2 * len(NAMES) + 1
            assert "-3.0" in _text(path)  # numbers stay numbers
        else:
            assert assert_xlsx_safe(path.read_bytes()) == 2 * (len(NAMES) - 1) + 1


_MODEL = '''
[model]
name = "guard"
reference_temperature = "25 C"

[molecule.{a}]
role = "substrate"

[molecule.{b}]
role = "product"

[step."-2+3"]
reactants = [{a}]
products = {{ {b} = 1 }}
k = "0.001 1/s"

[run."=1+2"]
volume = "50 mL"
end_time = "10 min"
initial = {{ {a} = "1 mmol" }}
ph = {{ mode = "free" }}
'''


@pytest.mark.parametrize("table", ["simulation.csv", "simulation.xlsx"])
def test_simulate_tables(tmp_path, table):
    from speciakin.cli.main import main

    model = tmp_path / "model.toml"
    model.write_text(_MODEL.format(a='"=HYPERLINK(\\"http://x\\",\\"y\\")"', b='"@SUM(A1)"'))
    assert main(["simulate", str(model), "--out", str(tmp_path / "out"), "--table", table, "--no-plots",
                 "--times", "0:10:5 min"]) == 0
    path = tmp_path / "out" / table
    guarded = assert_csv_safe(_text(path)) if table.endswith(".csv") else assert_xlsx_safe(path.read_bytes())
    assert guarded >= 3 + 4  # run name on each row, two header cells per compound


def test_report_workbook(tmp_path):
    from speciakin.report import ReportDocument, Section, Table
    from speciakin.report.xlsx import xlsx_bytes

    rows = [[n, -1.5, n] for n in NAMES]
    table = Table("Runs", ["run", "value", "@note"], rows)
    doc = ReportDocument("=1+2", [Section("Runs", [table])], tables_for_workbook=[table])
    # XML stores a carriage return as a line feed on reading back (ECMA-376 text normalisation), so
    # the '\rCR' cells are not counted; no cell holds a formula either way
    assert assert_xlsx_safe(xlsx_bytes(doc)) >= 2 * (len(NAMES) - 1) + 1
