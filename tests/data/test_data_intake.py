"""Intake that cannot be fooled: one fixture per trap, asserting the exact message and cell.

Base: the invented campaign of data_factory.py (CSV folder or workbook).
"""

from __future__ import annotations

import datetime

import numpy as np
import pytest

from data_factory import build_campaign, csv_campaign, edit, read_csv, rename_header, write_csv
from speciakin.data import check_campaign, load_campaign, write_campaign
from speciakin.errors import DataError, Problem, show_value


def _codes(report, code) -> list[Problem]:
    found = [p for p in report.problems if p.code == code]
    assert found, f"no {code} in:\n{report.report()}"
    return found


@pytest.fixture
def folder(tmp_path):
    return csv_campaign(tmp_path)


@pytest.fixture
def workbook(tmp_path):
    path = tmp_path / "campaign.xlsx"
    write_campaign(build_campaign(), path)
    return path


def test_formula_without_stored_result_is_a_located_error(workbook):
    import openpyxl

    wb = openpyxl.load_workbook(workbook)
    wb["HPLC results"]["E5"] = "=E4*2"   # openpyxl stores formulas without a result, like a script would
    wb["HPLC results"]["E7"] = "=E4*3"
    wb.save(workbook)
    (p,) = _codes(check_campaign(workbook), "formula_without_value")
    assert (p.location.sheet, p.location.row, p.location.column) == ("HPLC results", 5, "E (value)")
    assert p.value == "=E4*2" and "2 such cells" in p.message
    assert "save it" in p.expected and "paste values" in p.expected


def test_encrypted_and_old_workbooks_get_one_plain_message(tmp_path):
    # OLE2 compound-file signature (MS-CFB 2.2) holding an "EncryptedPackage" stream (MS-OFFCRYPTO 2.3.4.4)
    ole = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
    cases = {"enc.xlsx": (ole + bytes(512) + "EncryptedPackage".encode("utf-16-le"), "password-protected"),
             "old.xlsx": (ole + bytes(512), "Excel 97-2003"), "old.xls": (ole + bytes(512), "Excel 97-2003"),
             "text.xlsx": (b"run,time\n", "not an XLSX workbook"), "page.xlsx": (b"<html>", "not a workbook")}
    for name, (data, words) in cases.items():
        (tmp_path / name).write_bytes(data)
        with pytest.raises(DataError) as info:
            load_campaign(tmp_path / name)
        assert len(info.value.problems) == 1 and words in str(info.value), str(info.value)
        assert "File is not a zip file" not in str(info.value)  # openpyxl's words, not ours


@pytest.mark.parametrize("encoding", ["utf-16", "latin-1"])
def test_utf16_and_latin1_csv_are_read_with_one_note(folder, encoding):
    rows = read_csv(folder, "runs.csv")
    rows[1][rows[0].index("note")] = "Lösung à 20 °C"
    text = "\n".join(",".join(r) for r in rows) + "\n"
    (folder / "runs.csv").write_bytes(text.encode(encoding))
    report = check_campaign(folder)
    assert report.ok, report.report()
    (p,) = _codes(report, "encoding")
    assert p.location.sheet == "runs"
    assert load_campaign(folder).run("R01").recipe.note == "Lösung à 20 °C"


def _commas(folder, name, sep):
    rows = read_csv(folder, name)
    out = []
    for r in rows:
        cells = []
        for c in r:
            try:
                float(c)
                cells.append(c.replace(".", ","))
            except ValueError:
                cells.append(c)
        out.append(sep.join(cells))
    (folder / name).write_text("\n".join(out) + "\n", encoding="utf-8")


def test_decimal_commas_read_the_same_way_in_every_sheet(folder):
    reference = load_campaign(folder)
    for name in ("runs.csv", "dosing.csv", "hplc_results.csv", "probe_log.csv", "titrant_log.csv", "compounds.csv"):
        _commas(folder, name, ";")
    report = check_campaign(folder)
    assert report.ok, report.report()
    notes = _codes(report, "decimal_comma")
    assert len(notes) == 6  # one per sheet, not one per cell
    for note in notes:  # each names the first such cell's own text and the number it was read as
        text = note.message.split("the first, '")[1].split("'")[0]
        assert text.count(",") == 1 and note.message.endswith(f"as {text.replace(',', '.')})"), note.message
    back = load_campaign(folder)
    for a, b in zip(reference.runs, back.runs):
        np.testing.assert_array_equal(a.hplc.time, b.hplc.time)
        np.testing.assert_array_equal(a.hplc.value, b.hplc.value)  # HPLC values follow the same rule
        assert a.recipe.volume == b.recipe.volume


def test_decimal_commas_with_comma_separators_give_one_error(folder):
    _commas(folder, "hplc_results.csv", ",")
    report = check_campaign(folder)
    assert len(report.errors) == 1, report.report()
    assert "decimal commas" in report.errors[0].message and report.errors[0].code == "shifted_cells"


def test_messages_show_no_python_reprs(workbook):
    import openpyxl

    assert show_value(np.float64(300.0)) == "300.0"
    assert show_value(datetime.timedelta(seconds=300)) == "300 s"
    assert show_value([np.float64(1.5), np.int64(2)]) == "[1.5, 2]"
    wb = openpyxl.load_workbook(workbook)
    wb["HPLC results"]["B3"] = datetime.time(0, 30)
    wb.save(workbook)
    text = check_campaign(workbook).report()
    assert "00:30:00" in text and "datetime" not in text and "np." not in text


def test_header_units_of_every_kind_convert(folder):
    base = load_campaign(folder)
    rename_header(folder, "hplc_results.csv", "time [min]", "time / min")
    rename_header(folder, "runs.csv", "titrant concentration [mol/L]", "titrant concentration (M)")
    rename_header(folder, "runs.csv", "start volume [mL]", "start volume (mL)")
    back = load_campaign(folder)
    for a, b in zip(base.runs, back.runs):
        np.testing.assert_array_equal(a.hplc.time, b.hplc.time)
        assert a.recipe.ph.titrant_concentration == b.recipe.ph.titrant_concentration


def test_wrong_kind_of_unit_is_a_header_error(folder):
    rename_header(folder, "hplc_results.csv", "time [min]", "time [mM]")
    (p,) = _codes(check_campaign(folder), "unknown_unit")
    assert (p.location.row, p.location.column) == (1, "B (time [mM])")


def test_renamed_sheet_and_columns_say_so(folder):
    (folder / "dosing.csv").rename(folder / "additions.csv")
    rename_header(folder, "runs.csv", "initial S [mmol]", "charge S [mmol]")
    report = check_campaign(folder)
    (sheet,) = _codes(report, "renamed_sheet")
    (column,) = _codes(report, "renamed_column")
    assert "renamed to 'Dosing'" in sheet.message
    assert column.expected == "'initial S [mmol]'" and column.location.row == 1


@pytest.mark.parametrize("value, words", [("1e300", "not physically plausible"), ("1e-300", "not physically plausible"),
                                          ("0", "is zero")])
def test_impossible_start_volumes(folder, value, words):
    edit(folder, "runs.csv", 2, "start volume [mL]", value)
    report = check_campaign(folder)
    p = next(p for p in report.errors if p.location.column == "N (start volume [mL])")
    assert words in p.message and p.location.row == 2


def test_process_at_22_kelvin(folder):
    rename_header(folder, "runs.csv", "temperature [C]", "temperature [K]")   # 20 C written under [K]
    (p, *_) = _codes(check_campaign(folder), "implausible")
    assert "C or K" in p.expected and p.location.column == "M (temperature [K])"


def test_titrant_in_the_wrong_unit_warns(folder):
    rename_header(folder, "runs.csv", "titrant concentration [mol/L]", "titrant concentration [mmol/L]")
    (p,) = _codes(check_campaign(folder), "unusual_titrant")
    assert p.location.row == 2 and "mmol/L" in p.expected


def test_titrant_consumption_against_the_vessel(folder):
    """R01 starts with 10 mmol S (and 0.5 mmol of the titrant ion, not counted) and doses 11 mmol E;
    its titrant log reaches 11 * (1 - exp(-7200/1500)) = 10.91 mL of a 1 M titrant (data_factory.py).
    Read with 0.001 mol/L that is 0.0109 mmol: 0.0109 / 21 = 5.19e-4 of the vessel, below 1e-3."""
    rows = read_csv(folder, "titrant_log.csv")
    col = rows[0].index("titrant amount [mmol]")
    write_csv(folder, "titrant_log.csv", [r[:col] + r[col + 1:] for r in rows])
    edit(folder, "runs.csv", 2, "titrant concentration [mol/L]", "0.001")
    report = check_campaign(folder)
    (p,) = _codes(report, "titrant_consumption")
    assert p.location.sheet == "titrant_log"
    assert "0.0109 mmol titrant, 0.000519 times the 21 mmol" in p.message, p.message


def test_impossible_concentration(folder):
    edit(folder, "runs.csv", 2, "initial S [mmol]", "5000")   # 5 mol in 50 mL = 100 mol/L
    p = next(p for p in check_campaign(folder).errors if p.code == "implausible")
    assert "no solution can hold" in p.message and p.location.column.endswith("(initial S [mmol])")


def test_late_simulator_errors_are_found_at_the_cell(folder):
    """A dose ending after the run: before, the simulator reported 'run.R01.doses[0]' at fit time."""
    edit(folder, "dosing.csv", 2, "end [min]", "500")
    (p,) = _codes(check_campaign(folder), "after_end")
    assert (p.location.sheet, p.location.row, p.location.column) == ("dosing", 2, "E (end [min])")


@pytest.mark.parametrize("value", ["0", "1e-300", "0.5", "13.5"])
def test_held_set_point_no_ph_stat_can_hold(folder, value):
    """A held set point outside pH 1-13 (consistency.HELD_PH_RANGE, common practice): at pH 0 the free acid
    alone is 1 mol/L, as concentrated as the 1 M titrant."""
    edit(folder, "runs.csv", 2, "pH setpoint", value)
    p = next(p for p in check_campaign(folder).errors if p.code == "implausible")
    assert "no pH-stat can hold" in p.message and "pH 1 to 13" in p.expected
    assert (p.location.row, p.location.column) == (2, "C (pH setpoint)")


@pytest.mark.parametrize("value", ["1", "4", "13"])
def test_held_set_point_within_the_range_passes(folder, value):
    edit(folder, "runs.csv", 2, "pH setpoint", value)
    assert not [p for p in check_campaign(folder).errors if p.code == "implausible"]


# ---------------------------------------------------------------- cells formatted as percentages
# Reference for the rule: ECMA-376 (Office Open XML), Part 1, 18.8.30-18.8.31: built-in number
# formats 9 "0%" and 10 "0.00%", and a "%" in a format code multiplies the number shown by 100;
# the cell stores the unscaled number.  openpyxl (general-purpose library) writes and reads them.

def _first_numeric_hplc_row(ws):
    for row in range(2, ws.max_row + 1):
        if isinstance(ws.cell(row, 5).value, (int, float)) and 0 < ws.cell(row, 5).value < 100:
            return row
    raise AssertionError("no quantified area% value")


@pytest.mark.parametrize("number_format", ["0.00%", "0%", "0.0%;[Red]-0.0%"])
def test_area_percent_in_a_percent_formatted_cell_is_the_percentage_shown(workbook, number_format):
    import openpyxl

    reference = load_campaign(workbook)
    wb = openpyxl.load_workbook(workbook)
    ws = wb["HPLC results"]
    row = _first_numeric_hplc_row(ws)
    shown = ws.cell(row, 5).value
    ws.cell(row, 5).value = shown / 100.0  # what the workbook stores for a cell shown as e.g. 40.59 %
    ws.cell(row, 5).number_format = number_format
    wb.save(workbook)
    report = check_campaign(workbook)
    assert report.ok, report.report()
    (p,) = _codes(report, "percent_format")
    assert (p.location.sheet, p.location.row, p.location.column) == ("HPLC results", row, "E (value)")
    assert p.message.startswith("1 area% value(s) in cells formatted as percentages were read as the percentages")
    back = load_campaign(workbook)
    for a, b in zip(reference.runs, back.runs):
        np.testing.assert_allclose(b.hplc.value, a.hplc.value, rtol=1e-12)


def test_percent_formats_are_told_from_literal_percent_signs():
    from speciakin.data.cell_formats import percent_format

    assert percent_format("0%") and percent_format("0.00%") and percent_format("#,##0.0%")
    # a quoted or escaped sign, or one inside a bracketed code, shows a sign without scaling
    assert not percent_format('0.00"%"') and not percent_format("0.00\\%") and not percent_format("General")
    assert not percent_format(None) and not percent_format("[$%-409]0.00")


def test_other_numbers_in_percent_formatted_cells_are_read_as_stored_with_a_note(workbook):
    import openpyxl

    reference = load_campaign(workbook)
    wb = openpyxl.load_workbook(workbook)
    ws = wb["Titrant log"]
    ws.cell(3, 3).number_format = "0.00%"
    ws.cell(4, 3).number_format = "0.00%"
    wb.save(workbook)
    report = check_campaign(workbook)
    assert report.ok, report.report()
    (p,) = _codes(report, "percent_format")
    assert (p.location.sheet, p.location.row) == ("Titrant log", 3)
    assert p.message.startswith("2 number(s) in cells formatted as percentages were read as stored")
    back = load_campaign(workbook)
    for a, b in zip(reference.runs, back.runs):
        np.testing.assert_array_equal(a.titrant.volume if a.titrant is not None else [],
                                      b.titrant.volume if b.titrant is not None else [])


def test_percent_cells_are_found_when_openpyxl_reads_the_sheet(workbook):
    """A date-formatted cell sends the sheet to openpyxl's own reader: the percent cells are found there too."""
    import openpyxl

    wb = openpyxl.load_workbook(workbook)
    ws = wb["HPLC results"]
    row = _first_numeric_hplc_row(ws)
    ws.cell(row, 5).value = ws.cell(row, 5).value / 100.0
    ws.cell(row, 5).number_format = "0.00%"
    ws.cell(1, 7).value = "my note"
    ws.cell(2, 7).value = datetime.datetime(2026, 3, 4, 9, 30)  # an extra column of the user's (ignored)
    wb.save(workbook)
    from speciakin.data.cell_formats import percent_styles
    from speciakin.data.reader import fast_sheet_rows, read_workbook

    ro = openpyxl.load_workbook(workbook, read_only=True, data_only=True)
    assert fast_sheet_rows(ro["HPLC results"], set(), percent_styles(ro)) is None
    tables, _ = read_workbook(workbook)
    assert tables["HPLC results"].percent_cells == {(row, 4)}
    (p,) = _codes(check_campaign(workbook), "percent_format")
    assert p.location.row == row and "area% value(s)" in p.message
