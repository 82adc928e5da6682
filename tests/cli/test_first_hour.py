"""The first hour: `speciakin new`, `new --example`, `check` and `run --quick` as a new user meets them."""

from __future__ import annotations

import json

import pytest
import tomllib

from speciakin.cli.main import main
from speciakin.pipeline.folders import latest_result
from speciakin.pipeline.quick import QUICK_NOTE


def test_new_templates_agree_with_each_other(tmp_path, capsys):
    # the three templates of a new folder name the same molecules
    assert main(["new", str(tmp_path / "c")]) == 0
    model = tomllib.loads((tmp_path / "c" / "model.toml").read_text())
    process = tomllib.loads((tmp_path / "c" / "process.toml").read_text())
    molecules = set(model["molecule"])
    named = {process["process"]["substrate"], process["process"]["reagent"]}
    named |= {s["species"] for s in process["specification"]}
    assert named <= molecules
    import openpyxl
    ws = openpyxl.load_workbook(tmp_path / "c" / "campaign.xlsx")["Runs"]
    initial = [c.value.split()[1] for c in ws[1] if str(c.value).startswith("initial ")]
    assert initial and set(initial) <= molecules
    capsys.readouterr()
    # check reads the process file too: no process-file error in a fresh folder, the only finding
    # is the empty workbook (a warning whose text is printed)
    assert main(["check", str(tmp_path / "c")]) == 0
    text = capsys.readouterr().out
    assert "Process: " in text and "no runs yet" in text
    assert "OK so far, but nothing to fit yet" in text and "ready to fit" not in text


def test_new_folder_readme_names_real_commands(tmp_path):
    # every command the README of a new folder (blank or example) tells the chemist to type exists,
    # and each one names that folder
    import re

    from speciakin.cli.main import COMMANDS

    for extra in ([], ["--example"]):
        folder = tmp_path / f"c{len(extra)}"
        assert main(["new", str(folder), *extra]) == 0
        said = re.findall(r"`speciakin (\w+)([^`]*)`", (folder / "README.md").read_text())
        assert {"check", "run"} <= {name for name, _ in said}
        for name, rest in said:
            assert name in COMMANDS
            assert name == "web" or rest.split()[0] == str(folder)


def test_fit_of_a_fresh_folder_names_what_is_missing(tmp_path, capsys):
    # a new folder has no runs yet: fitting it stops before any work with a located error in
    # the chemist's terms (how many data values for how many fitted parameters, and what to do),
    # exit code 2, no traceback
    assert main(["new", str(tmp_path / "c")]) == 0
    capsys.readouterr()
    assert main(["fit", str(tmp_path / "c")]) == 2
    err = capsys.readouterr().err
    assert "campaign.xlsx, sheet 'HPLC results'" in err
    assert "0 data value(s) (0 HPLC, 0 titrant readings over 0 run(s)) for 3 fitted parameter(s)" in err
    assert "add runs and their HPLC results" in err and "Traceback" not in err


def test_check_reports_process_file_errors_with_their_key(tmp_path, capsys):
    assert main(["new", str(tmp_path / "c")]) == 0
    p = tmp_path / "c" / "process.toml"
    p.write_text(p.read_text().replace('reagent = "REA"', 'reagent = "NOPE"'))
    capsys.readouterr()
    assert main(["check", str(tmp_path / "c"), "--format", "json"]) == 1
    report = json.loads(capsys.readouterr().out)
    bad = [q for q in report["problems"] if q["severity"] == "error"]
    assert len(bad) == 1 and bad[0]["location"]["key"] == "process.reagent" and bad[0]["value"] == "'NOPE'"  # values are shown quoted


def test_check_summary_says_what_an_error_stops(tmp_path, capsys):
    # an error in the process file alone stops the pH window, not the fit (the fit reads the
    # workbook and the model file only); an error in the model file stops everything
    assert main(["new", str(tmp_path / "c"), "--example"]) == 0
    p = tmp_path / "c" / "process.toml"
    p.write_text(p.read_text().replace('reagent = "REA"', 'reagent = "NOPE"'))
    capsys.readouterr()
    assert main(["check", str(tmp_path / "c")]) == 1
    text = capsys.readouterr().out
    assert "1 error(s) in the process file; the fit can run, the pH window cannot" in text
    assert "nothing can be fitted" not in text
    m = tmp_path / "c" / "model.toml"
    m.write_text(m.read_text() + "\n[nonsense_table]\nx = 1\n")
    assert main(["check", str(tmp_path / "c")]) == 1
    text = capsys.readouterr().out
    assert "nothing can be fitted until they are fixed" in text and "the fit can run" not in text


def test_a_spec_naming_the_hplc_compound_is_told_its_model_molecule(tmp_path, capsys):
    # the example's Compounds sheet maps 'N-alkyl amide' to the model molecule ALKYL_AMIDE
    assert main(["new", str(tmp_path / "c"), "--example"]) == 0
    p = tmp_path / "c" / "process.toml"
    p.write_text(p.read_text().replace('species = "ALKYL_AMIDE"', 'species = "N-alkyl amide"'))
    capsys.readouterr()
    assert main(["check", str(tmp_path / "c"), "--format", "json"]) == 1
    bad = [q for q in json.loads(capsys.readouterr().out)["problems"] if q["severity"] == "error"]
    assert len(bad) == 1 and bad[0]["location"]["key"].endswith(".species")
    assert bad[0]["expected"].endswith("'N-alkyl amide' is the Compounds sheet's name of model molecule "
                                       "ALKYL_AMIDE: write ALKYL_AMIDE")


def test_example_checks_and_runs_quick(tmp_path, capsys):
    folder = tmp_path / "try-it"
    assert main(["new", str(folder), "--example"]) == 0
    assert "INVENTED" in (folder / "README.md").read_text()
    capsys.readouterr()
    assert main(["check", str(folder), "--format", "json"]) == 0
    report = json.loads(capsys.readouterr().out)
    # 3 runs x 6 samples x 3 compounds; logs every 2 min over 60 min (31 readings) of pH,
    # temperature and titrant in each of the 3 runs: 3 * 3 * 31 = 279
    assert report["counts"]["runs"] == 3 and report["counts"]["hplc_values"] == 54
    assert report["counts"]["log_readings"] == 279
    assert report["counts"]["errors"] == 0
    # raw-data plots before any fit: one PNG per run
    assert main(["look", str(folder)]) == 0
    plots = ["E01-pH4.5.png", "E02-pH6.0.png", "E03-pH7.5.png"]
    assert sorted(p.name for p in (folder / "look").glob("*.png")) == plots
    # looked at again (after the data changed, say): a new folder; the earlier plots stay as they were
    earlier = {p.name: p.read_bytes() for p in (folder / "look").glob("*.png")}
    (folder / "look" / plots[0]).write_bytes(b"kept")
    assert main(["look", str(folder)]) == 0
    assert f"written to {folder / 'look-2'}" in capsys.readouterr().out
    assert sorted(p.name for p in (folder / "look-2").glob("*.png")) == plots
    assert (folder / "look" / plots[0]).read_bytes() == b"kept"
    assert (folder / "look-2" / plots[1]).read_bytes() == earlier[plots[1]]
    # an explicit folder holding files is refused
    assert main(["look", str(folder), "--out", str(folder / "look")]) == 2
    assert "not empty; nothing is overwritten" in capsys.readouterr().err
    assert main(["run", str(folder), "--quick", "--quiet"]) == 0
    said = capsys.readouterr().out
    assert QUICK_NOTE in said
    assert "  next: Sample the posterior ('speciakin sample', or 'speciakin run' without --quick)" in said
    result = latest_result(folder / "results")     # the run's own new result folder
    fit = json.loads((result / "fit.json").read_text())
    window = json.loads((result / "window.json").read_text())
    assert QUICK_NOTE in fit["warnings"]
    assert window["status"] in ("provisional", "not established") and window["status_reasons"][0] == QUICK_NOTE
    # the example's model file states the errors its data were simulated with, so its fit does not
    # say they look too large; its closed area% samples (one value fewer each: pipeline.closure) and
    # the values below the LOQ are taken out of the degrees of freedom
    assert not any("look too large" in w for w in fit["warnings"])
    stats = fit["statistics"]
    assert stats["closed_samples"] > 0 and stats["inactive_values"] > stats["closed_samples"]
    assert stats["degrees_of_freedom"] == pytest.approx(
        stats["n_observations"] - stats["inactive_values"] - stats["n_parameters"])
    assert "closure_deficit" not in stats
    assert "PROVISIONAL" in (result / "window.txt").read_text()


def test_quick_run_records_overrides_and_writes_them_back_when_asked(tmp_path, capsys):
    folder = tmp_path / "try-it"
    assert main(["new", str(folder), "--example"]) == 0
    before = (folder / "model.toml").read_text()
    assert main(["run", str(folder), "--quick", "--quiet", "--fix", "log10k[acylation_alkyl]",
                 "--bounds", "log10k[acylation_aryl]=-2:2"]) == 0
    fit = json.loads((latest_result(folder / "results") / "fit.json").read_text())
    assert fit["overrides"] == [{"name": "log10k[acylation_alkyl]", "fit": False},
                                {"name": "log10k[acylation_aryl]", "lower": -2.0, "upper": 2.0}]
    assert [p["name"] for p in fit["parameters"]] == ["log10k[acylation_aryl]"]
    assert (folder / "model.toml").read_text() == before
    capsys.readouterr()
    assert main(["run", str(folder), "--quick", "--quiet", "--fix", "pKa[SUB.nope]"]) == 2
    assert "pKa[SUB.N_aryl]" in capsys.readouterr().err
    saved = tmp_path / "saved.toml"
    assert main(["fit", str(folder), "--no-profiles", "--starts", "1", "--quiet",
                 "--fix", "log10k[acylation_alkyl]", "--save-overrides", str(saved)]) == 0
    assert "fit = false" in saved.read_text() and "INVENTED EXAMPLE" in saved.read_text()
    # a FILE that exists (other than the model file itself) is never written over
    earlier = saved.read_bytes()
    assert main(["fit", str(folder), "--no-profiles", "--starts", "1", "--quiet",
                 "--fix", "log10k[acylation_aryl]", "--save-overrides", str(saved)]) == 2
    assert "already exists; nothing is overwritten" in capsys.readouterr().err
    assert saved.read_bytes() == earlier


def test_run_of_the_invented_example_labels_its_report(tmp_path, capsys):
    # the model file says INVENTED; `run` labels the report as `report` and the page do
    # (it did not: only `speciakin demo` asked for the label)
    from speciakin.pipeline import says_invented

    folder = tmp_path / "example"
    assert main(["new", str(folder), "--example"]) == 0
    assert main(["run", str(folder), "--quiet", "--steps", "60", "--starts", "1", "--no-profiles",
                 "--draws", "60"]) == 0
    html = (latest_result(folder / "results") / "report.html").read_text()
    assert "Based on invented demonstration data" in html
    assert says_invented(type("M", (), {"description": "  INVENTED demo"})())
    assert not says_invented(type("M", (), {"description": "acylation of a real substrate"})())
    assert not says_invented(type("M", (), {"description": None})())


def test_check_counts_the_workbook_when_the_model_file_has_an_error(tmp_path, capsys):
    # a typo in the model file used to hide the workbook's counts ("Runs: 0"); a workbook that
    # does not import says its runs are not counted instead of 0
    folder = tmp_path / "c"
    assert main(["new", str(folder), "--example"]) == 0
    model = folder / "model.toml"
    text = model.read_text()
    assert "products = { ALKYL_AMIDE = 1, ACID = 1 }" in text
    model.write_text(text.replace("products = { ALKYL_AMIDE = 1, ACID = 1 }",
                                  "products = { ALKYL_AMIDE = 1, ACIDD = 1 }"))
    capsys.readouterr()
    assert main(["check", str(folder)]) == 1
    out = capsys.readouterr().out
    assert "Runs: 3   HPLC values: 54   log readings: 279" in out
    assert "unknown product (value 'ACIDD'" in out
    model.write_text(text)
    from openpyxl import load_workbook

    book = load_workbook(folder / "campaign.xlsx")
    book["HPLC results"].cell(row=6, column=2).value = -5  # a sampling time before the start
    book.save(folder / "campaign.xlsx")
    assert main(["check", str(folder), "--format", "json"]) == 1
    report = json.loads(capsys.readouterr().out)
    assert report["imported"] is False and report["counts"]["errors"] >= 1
    assert main(["check", str(folder)]) == 1
    assert "Runs: not counted (the workbook did not import: see the errors)" in capsys.readouterr().out


@pytest.mark.parametrize("edit, code, key", [
    # a co-product left out: the acyl moiety of the anhydride (2) is not conserved (1 in the products)
    (('products = { ALKYL_AMIDE = 1, ACID = 1 }', 'products = { ALKYL_AMIDE = 1 }'), "moiety_balance",
     "step.acylation_alkyl"),
    # a pKa no site in water has (range -2 to 16: common practice, docs/data.md)
    (("pka = 9.9", "pka = 40"), "pka_range", "molecule.SUB.site[1].pka"),
])
def test_check_reports_the_model_files_warnings(tmp_path, capsys, edit, code, key):
    # the model file's warnings reach check's report with their key and line, beside the workbook's
    folder = tmp_path / "c"
    assert main(["new", str(folder), "--example"]) == 0
    p = folder / "model.toml"
    text = p.read_text()
    assert edit[0] in text
    p.write_text(text.replace(edit[0], edit[1]))
    capsys.readouterr()
    assert main(["check", str(folder), "--format", "json"]) == 0
    found = [q for q in json.loads(capsys.readouterr().out)["problems"] if q["code"] == code]
    assert len(found) == 1 and found[0]["severity"] == "warning", found
    assert found[0]["location"]["key"] == key and found[0]["location"]["line"] > 0
    assert found[0]["location"]["file"].endswith("model.toml")
    capsys.readouterr()
    assert main(["check", str(folder)]) == 0
    assert "OK with warnings" in capsys.readouterr().out
    # a fit run without check says it too, first among the fit's warnings (fit.txt, fit.json, the report)
    assert main(["fit", str(folder), "--starts", "1", "--no-profiles", "--quiet"]) == 0
    fitted = json.loads((latest_result(folder / "results", having="fit") / "fit.json").read_text())
    first = fitted["warnings"][0]
    assert first.startswith("model file: ") and f"key '{key}'" in first, fitted["warnings"]


def test_check_says_the_model_files_runs_are_not_the_campaigns(tmp_path, capsys):
    # the skeleton's [run] sections, switched on in a campaign folder: check says that a campaign's runs
    # are its workbook's (fit and run would not read them), at the first run's key and line
    from importlib import resources

    folder = tmp_path / "c"
    assert main(["new", str(folder), "--example"]) == 0
    skeleton = resources.files("speciakin.chemistry").joinpath("templates/model_skeleton.toml").read_text()
    block = skeleton[skeleton.index("#! [run.pH8]"):skeleton.index("# ---", skeleton.index("#! [run.pH8]"))]
    model = folder / "model.toml"
    text = model.read_text()
    at = text.index("[fit]")
    text = text[:at] + block.replace("#! ", "").replace('SUB = "20 mM"', 'SUB = "2 mmol"') + "\n" + text[at:]
    model.write_text(text)
    capsys.readouterr()
    assert main(["check", str(folder), "--format", "json"]) == 0
    (found,) = [q for q in json.loads(capsys.readouterr().out)["problems"] if q["code"] == "model_runs_unused"]
    assert found["severity"] == "warning" and found["location"]["key"] == "run.pH8"
    assert found["location"]["line"] == text.splitlines().index("[run.pH8]") + 1
    # the skeleton of a new campaign carries none
    assert main(["new", str(tmp_path / "blank")]) == 0
    capsys.readouterr()
    main(["check", str(tmp_path / "blank"), "--format", "json"])
    assert "model_runs_unused" not in {q["code"] for q in json.loads(capsys.readouterr().out)["problems"]}


def test_simulate_of_a_campaigns_model_file_says_where_the_runs_are(tmp_path, capsys):
    # the example's model file has no runs (they are in its workbook): the error names the section
    # syntax of the model file and the commands that work on the workbook's runs
    folder = tmp_path / "c"
    assert main(["new", str(folder), "--example"]) == 0
    capsys.readouterr()
    assert main(["simulate", str(folder / "model.toml"), "--out", str(tmp_path / "sim")]) == 2
    err = capsys.readouterr().err
    assert "declares no runs" in err and "[run.<name>]" in err and "speciakin look" in err
    assert "Traceback" not in err


def test_a_report_made_later_names_the_process_file_its_window_was_computed_for(tmp_path, capsys):
    # `speciakin report` on a result with a window takes the process file the window recorded (path and
    # SHA-256 in window.json), so the report's inputs list it and its planned process is described;
    # after an edit of the file it is not taken for the window's
    from speciakin import pipeline
    from speciakin.pipeline import outputs

    folder = tmp_path / "c"
    assert main(["new", str(folder), "--example"]) == 0
    assert main(["run", str(folder), "--quick", "--quiet"]) == 0
    result = latest_result(folder / "results", having="window")
    recorded = json.loads((result / "window.json").read_text())
    assert (result / recorded["process"]).resolve() == (folder / "process.toml").resolve()
    loaded = pipeline.load_results(result)
    assert loaded.process is not None and loaded.inputs.process.resolve() == (folder / "process.toml").resolve()
    (folder / "process.toml").write_text((folder / "process.toml").read_text() + "\n# edited\n")
    assert outputs.window_process(result) is None and pipeline.load_results(result).process is None
