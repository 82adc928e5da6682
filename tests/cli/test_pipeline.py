"""End-to-end: `speciakin run` on a reduced copy of the bundled (invented) demo.

Reduced = three of the demo runs, one least-squares start without profiles, a
short chain, few window draws on a coarse pH grid.  Checks that every output
file is produced and readable: the PDF has its pages and text (pypdf), the XLSX
opens with openpyxl and holds the parameter table, the HTML parses and embeds
its images.
"""

from __future__ import annotations

import json
from html.parser import HTMLParser

import pytest

from pipeline.regression_case import build_reduced_demo, report_tables
from speciakin.cli.main import main
from speciakin.pipeline import folders


@pytest.fixture(scope="module")
def reduced_demo(tmp_path_factory):
    return build_reduced_demo(tmp_path_factory.mktemp("reduced"))


class _ImageCollector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.images = []

    def handle_starttag(self, tag, attrs):
        if tag == "img":
            self.images.append(dict(attrs).get("src", ""))


@pytest.mark.filterwarnings("ignore")
def test_run_produces_every_output(reduced_demo, tmp_path):
    out = tmp_path / "out"
    code = main(["run", str(reduced_demo), "--out", str(out), "--starts", "1", "--no-profiles",
                 "--steps", "24", "--walkers", "20", "--quiet"])
    assert code == 0
    for name in ("check.json", "fit.json", "fit.txt", "posterior.json", "posterior.h5", "window.json",
                 "report.html", "report.pdf", "report.xlsx"):
        assert (out / name).exists(), name
    fit = json.loads((out / "fit.json").read_text())
    names = [p["name"] for p in fit["parameters"]]
    assert "log10k[acylation_aryl]" in names

    parser = _ImageCollector()
    parser.feed((out / "report.html").read_text())
    assert parser.images and all(src.startswith("data:image/png;base64,") for src in parser.images)

    from pypdf import PdfReader

    reader = PdfReader(str(out / "report.pdf"))
    assert len(reader.pages) >= 4
    text = "\n".join(page.extract_text() for page in reader.pages)
    assert "Cautions" in text and "log10k[acylation_aryl]" in text

    from openpyxl import load_workbook

    wb = load_workbook(out / "report.xlsx", read_only=True)
    joined = " ".join(wb.sheetnames).lower()
    assert "param" in joined
    sheet = next(wb[s] for s in wb.sheetnames if "param" in s.lower())
    values = [c for row in sheet.iter_rows(values_only=True) for c in row]
    assert "log10k[acylation_aryl]" in values
    assert any(isinstance(v, float) for v in values)

    # the report command renders the same folder through the same pipeline functions: the posterior
    # is read back from posterior.h5 (checkpoint and result in one file), and the tables are the same
    # into a new result folder beside the campaign (the folder rendered is left as it is)
    first = report_tables(out / "report.xlsx")
    assert main(["report", str(out), "--formats", "xlsx"]) == 0
    again = folders.result_folders(reduced_demo / "results")[-1]
    assert report_tables(again / "report.xlsx") == first
    assert folders.read_status(again)["status"] == "complete"
    assert "credible 2.5 %" in first["parameters"][0]


def test_run_stops_at_the_failing_step(reduced_demo, tmp_path, capsys):
    broken = tmp_path / "broken"
    broken.mkdir()
    (broken / "campaign.xlsx").write_bytes((reduced_demo / "campaign.xlsx").read_bytes())
    text = (reduced_demo / "model.toml").read_text().replace('kind = "base"', 'kind = "basic"', 1)
    (broken / "model.toml").write_text(text)
    code = main(["run", str(broken), "--out", str(tmp_path / "o"), "--quiet"])
    assert code != 0
    err = capsys.readouterr().err
    assert "stopped at step 'check'" in err and "basic" in err
    status = folders.read_status(tmp_path / "o")                    # the folder says it is not complete
    assert status["status"] == "failed" and "basic" in status["error"]
