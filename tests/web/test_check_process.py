"""The page's check lists the process file's problems as ``speciakin check`` does (no browser)."""

from __future__ import annotations

import json

import pytest

from speciakin.cli.main import main
from speciakin.web import create_app

from .test_security import _callback, _problem_rows

pytestmark = pytest.mark.filterwarnings("ignore")


def test_the_page_check_shows_a_process_file_problem_with_its_hint(tmp_path, capsys):
    assert main(["new", str(tmp_path / "ex"), "--example"]) == 0
    capsys.readouterr()
    process = tmp_path / "ex" / "process.toml"
    process.write_text(process.read_text().replace('species = "ALKYL_AMIDE"', 'species = "N-alkyl amide"'))
    app, _ = create_app(tmp_path)
    response = _callback(app.server.test_client(), "ex")
    rows = _problem_rows(response["check-table"]["children"])
    assert [r["message"] for r in rows] == ["unknown molecule"]
    assert "process.toml" in rows[0]["where"] and "specification[2].species" in rows[0]["where"]
    assert "write ALKYL_AMIDE" in rows[0]["expected"]
    # the process file does not stop the fit, nor the raw data: both need only the workbook and the model
    assert "The fit can run; the pH window needs the process file's errors fixed" in json.dumps(
        response["check-summary"]["children"])
    assert [o["value"] for o in response["raw-run"]["options"]] == ["E01-pH4.5", "E02-pH6.0", "E03-pH7.5"]
