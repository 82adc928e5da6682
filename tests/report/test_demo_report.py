"""The report of the (invented) demo, reduced as in the pipeline's regression case.

Fit (two starts, profiles), window (16 draws, coarse grid) and report on the
reduced demo; then the checks a reader makes: no absolute path in any report
file, no statement that contradicts the model's settings, the same colour
for a species in every figure, the trust status on page 1, the decision
callout once, the QA block.
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import numpy as np
import pypdf
import pytest

from speciakin.palette import OKABE_ITO, model_species_colors

pytestmark = pytest.mark.filterwarnings("ignore")


@pytest.fixture(scope="module")
def demo(tmp_path_factory, reduced_demo_fit_window):
    """{'out': output folder, 'case': campaign folder, 'html', 'pdf_pages', 'xlsx_text', 'model'}.

    The fit and window are the session's regression case (tests/conftest.py: two starts with profiles,
    seeds 3 and 5), copied here; the report is rendered on the copy.
    """
    from speciakin.chemistry.modelfile import load_model
    from speciakin.cli.main import main

    work = tmp_path_factory.mktemp("demo-report")
    shutil.copytree(reduced_demo_fit_window["work"], work, dirs_exist_ok=True)
    case, out = work / "case", work / "out"
    with open(case / "process.toml", "a", encoding="utf-8") as fh:
        fh.write('\n[report]\nauthor = "A. Chemist (invented)"\nreviewer = "B. Reviewer (invented)"\n')
    argv = ["report", str(out), "--out", str(out), "--formats", "html,pdf,xlsx", "--process", str(case / "process.toml")]
    assert main(argv) == 0, argv
    from openpyxl import load_workbook

    book = load_workbook(out / "report.xlsx", read_only=True)
    xlsx_text = "\n".join(str(c) for ws in book.worksheets for row in ws.iter_rows(values_only=True)
                          for c in row if c is not None)
    return {"out": out, "case": case, "work": work, "made_in": reduced_demo_fit_window["work"], "model": load_model(case / "model.toml"),
            "html": (out / "report.html").read_text(encoding="utf-8"),
            "pdf_pages": [p.extract_text() or "" for p in pypdf.PdfReader(out / "report.pdf").pages],
            "xlsx_text": xlsx_text}


def test_no_absolute_path_in_any_report_file(demo):
    texts = {"html": demo["html"], "pdf": "\n".join(demo["pdf_pages"]), "xlsx": demo["xlsx_text"]}
    roots = {str(demo["work"]), str(Path(demo["work"]).resolve()), str(Path.home()), "/tmp/",
             str(demo["made_in"]), str(Path(demo["made_in"]).resolve())}  # where the fit and window were made
    for name, text in texts.items():
        for root in roots:
            assert root not in text, f"{root} in report.{name}"
        # no POSIX absolute path of two components or more (units such as mol/L are not preceded by a space)
        assert not re.search(r"(?:^|[\s\"'(=])/(?:[\w.-]+/)+[\w.-]+", text), name


def test_no_statement_contradicts_the_model_settings(demo):
    from speciakin.chemistry.model import ACTIVITY_MODELS

    model = demo["model"]
    text = demo["html"]
    assert model.activity == "ideal"
    # the activity setting used is stated, and no other activity model is claimed
    assert f"{model.activity} ({ACTIVITY_MODELS[model.activity]})" in text
    for other in ACTIVITY_MODELS:
        if other != model.activity:
            assert other.lower() not in text.lower(), f"the report mentions the '{other}' activity model"
    # pKw: the demo model sets none, so water (IAPWS R11-07) is stated
    if model.pkw is None:
        assert "IAPWS R11-07" in text
        assert "pKw of the medium" not in text


def test_same_colour_for_a_species_in_every_figure(demo):
    """Exact palette colours found in the run plots and in the window's outcome plot belong to the
    species drawn there, with the colours of the one model-wide mapping."""
    import matplotlib.image as mpimg

    colors = model_species_colors(demo["model"])
    palette = {c.lstrip("#").lower() for c in OKABE_ITO.values()} - {"000000"}

    def found(path: Path) -> set[str]:
        img = (mpimg.imread(path)[..., :3] * 255).round().astype(int).reshape(-1, 3)
        packed = np.unique((img[:, 0] << 16) | (img[:, 1] << 8) | img[:, 2])  # one integer per colour
        hexes = {f"{int(c):06x}" for c in packed}
        return hexes & palette

    import json

    window = json.loads((demo["out"] / "window.json").read_text())
    outcomes = {colors.color(n).lstrip("#").lower() for n in window["outcome_names"]}
    in_window_plot = found(demo["out"] / "figures" / "window_outcomes.png")
    assert in_window_plot == outcomes
    for png in sorted((demo["out"] / "figures").glob("run_*.png")):
        assert found(png) <= {colors.color(m.name).lstrip("#").lower() for m in demo["model"].molecules}
        assert colors.color("S").lstrip("#").lower() in found(png)  # the substrate, in every run plot


def test_status_on_page_one_and_the_decision_callout_once(demo):
    import json

    window = json.loads((demo["out"] / "window.json").read_text())
    status = window["status"]
    assert status in ("established", "provisional", "not established")
    page1 = demo["pdf_pages"][0]
    assert f"Status: {status}" in page1
    for reason in window["status_reasons"][:1]:
        assert reason[:30] in " ".join(page1.split()) or reason[:30] in " ".join(demo["pdf_pages"][1].split())
    if status != "established":
        assert "Recommended:" not in page1  # a failing gate: not presented as established
    html = demo["html"]
    assert html.count('class="callout decision"') == 1
    body = " ".join(" ".join(demo["pdf_pages"]).split())
    title = re.search(r'class="callout decision".*?<span class="title">(.*?)</span>', html, re.S).group(1)
    assert body.count(title) == 1


def test_qa_block_and_people(demo):
    html = demo["html"]
    for package in ("numpy", "scipy", "lmfit", "emcee", "numba", "matplotlib", "speciakin"):
        assert f"{package} version" in html
    assert re.search(r"Document ID</th><td>SK-[0-9A-F]{16}</td>", html)
    assert "A. Chemist (invented)" in html and "B. Reviewer (invented)" in html
    assert re.search(r"speciakin commit</th><td>([0-9a-f]{40}|unknown)", html)


def test_log_readings_and_integers(demo):
    html = demo["html"]
    assert "Log readings used by the fit" in html or "no titrant or pH log entered the fit" in html
    assert not re.search(r"Seed</th><td>\d\.\d+e\+\d+", html)  # the seed prints as an integer


def test_cautions_stay(demo):
    text = " ".join(demo["html"].split())
    for words in ("Reactive reagents", "release heat", "process-safety assessment",
                  "local codes, regulations and licensed professional practice"):
        assert words in text
