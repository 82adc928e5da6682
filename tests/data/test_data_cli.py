"""`speciakin new` and `speciakin check`: files, exit codes, text and JSON output.

Expected behaviour is the project's CLI contract (cli/main.py): errors give a
short message and exit code 1 for data errors, never a traceback; warnings
alone give exit 0.
"""

from __future__ import annotations

import json

import openpyxl
import pytest

from data_factory import csv_campaign, edit
from speciakin.cli.main import main
from speciakin.data import load_campaign
from speciakin.data.sheets import SHEETS
from speciakin.data.templates import GUIDE_TITLE, WORKBOOK_NAME


def test_new_creates_folder(tmp_path, capsys):
    target = tmp_path / "camp"
    assert main(["new", str(target)]) == 0
    assert (target / WORKBOOK_NAME).is_file()
    readme = (target / "README.md").read_text()
    assert "speciakin check" in readme and "speciakin run" in readme
    wb = openpyxl.load_workbook(target / WORKBOOK_NAME, read_only=True)
    assert wb.sheetnames[0] == GUIDE_TITLE
    assert wb.sheetnames[1:] == [s.title for s in SHEETS.values()]
    # the guide explains every column of every sheet
    guide_text = " ".join(str(c) for row in wb[GUIDE_TITLE].iter_rows(values_only=True) for c in row if c)
    for spec in SHEETS.values():
        assert spec.title in guide_text
        for col in spec.columns:
            assert col.header in guide_text
    # a blank campaign imports: no runs yet, a warning, not an error
    assert load_campaign(target).runs == ()


def test_new_refuses_non_empty_folder(tmp_path, capsys):
    (tmp_path / "camp").mkdir()
    (tmp_path / "camp" / "notes.txt").write_text("mine")
    assert main(["new", str(tmp_path / "camp")]) == 2          # bad input: exit code 2
    err = capsys.readouterr().err
    assert "not empty" in err and "Traceback" not in err
    assert (tmp_path / "camp" / "notes.txt").read_text() == "mine"
    assert not (tmp_path / "camp" / WORKBOOK_NAME).exists()


def test_check_clean_text(tmp_path, capsys):
    folder = csv_campaign(tmp_path)
    assert main(["check", str(folder)]) == 0
    out = capsys.readouterr().out
    assert "Errors" in out and "Warnings" in out and "OK" in out


def test_check_errors_json(tmp_path, capsys):
    folder = csv_campaign(tmp_path)
    edit(folder, "runs.csv", 3, "run", "R01")
    assert main(["check", str(folder), "--format", "json"]) == 1
    data = json.loads(capsys.readouterr().out)
    assert data["ok"] is False and data["counts"]["errors"] >= 1
    dup = [p for p in data["problems"] if p["code"] == "duplicate_run"][0]
    assert dup["location"]["row"] == 3 and dup["location"]["column"] == "A (run)"


def test_check_warnings_exit_zero(tmp_path, capsys):
    folder = csv_campaign(tmp_path)
    edit(folder, "runs.csv", 2, "duration [min]", "60")
    edit(folder, "runs.csv", 2, "sample volume [mL]", "")
    assert main(["check", str(folder)]) == 0
    assert "sample taken after the run ends" in capsys.readouterr().out


@pytest.mark.parametrize("argv", [["check", "/nonexistent/campaign"]])
def test_check_missing_path(argv, capsys):
    assert main(argv) == 1
    assert "campaign not found" in capsys.readouterr().out


def test_repository_templates_are_current(tmp_path):
    """data_templates/ holds what the generator writes today (cannot go stale)."""
    from pathlib import Path

    from speciakin.data.templates import write_template_csv

    repo = Path(__file__).resolve().parents[2] / "data_templates"
    fresh = write_template_csv(tmp_path / "csv")
    for f in fresh:
        assert (repo / "csv" / f.name).read_bytes() == f.read_bytes(), f.name
    wb = openpyxl.load_workbook(repo / WORKBOOK_NAME, read_only=True)
    assert wb.sheetnames == [GUIDE_TITLE] + [s.title for s in SHEETS.values()]
    for spec in SHEETS.values():
        headers = next(wb[spec.title].iter_rows(max_row=1, values_only=True))
        assert [h for h in headers if h][: len(spec.columns)] == [c.header for c in spec.columns]
