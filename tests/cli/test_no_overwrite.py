"""`speciakin demo` and `speciakin compare` never overwrite earlier results.

`demo` without --out writes a new folder reports/demo/<UTC time>-<id>/ at every
call (what `make demo` runs); --out DIR (what `make example-report` runs after
emptying reports/example) must be new or empty, else exit code 2 before any
work.  `compare` writes a new folder under <campaign>/results/ recorded in the
run index, and refuses an --out that already holds a comparison.

The demo's own pipeline (several minutes) is replaced here by a stand-in that
writes one file, so that these tests look at the folders only; the pipeline
itself is tested in tests/cli/test_pipeline.py and tests/cli/test_history.py.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from pipeline.regression_case import build_reduced_demo
from speciakin.cli import cmd_run
from speciakin.cli.main import main
from speciakin.pipeline import folders, history


@pytest.fixture
def fake_pipeline(monkeypatch):
    """Replace the demo's pipeline by a stand-in that writes report.html; returns the folders it was given."""
    calls: list[Path] = []

    def execute(inputs, out, args, invented=False, raise_errors=False):
        calls.append(Path(out))
        (Path(out) / "report.html").write_text(f"invented report {len(calls)}")
        return 0

    monkeypatch.setattr(cmd_run, "execute", execute)
    return calls


def test_demo_writes_a_new_folder_at_every_call(tmp_path, monkeypatch, fake_pipeline, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--quiet"]) == 0
    assert main(["demo", "--quiet"]) == 0
    made = folders.result_folders(tmp_path / "reports" / "demo")
    assert len(made) == 2 and [p.resolve() for p in fake_pipeline] == [p.resolve() for p in made]
    # both results kept, each complete, the first one untouched by the second call
    assert [(f / "report.html").read_text() for f in made] == ["invented report 1", "invented report 2"]
    assert all(folders.read_status(f)["status"] == "complete" for f in made)
    assert all(not (f / folders.LOCK_FILE).exists() for f in made)
    assert str(made[-1].relative_to(tmp_path)) in capsys.readouterr().out   # the folder is named


def test_demo_out_must_be_new_or_empty(tmp_path, fake_pipeline, capsys):
    empty = tmp_path / "example"
    empty.mkdir()
    assert main(["demo", "--out", str(empty), "--quiet"]) == 0           # an empty folder is used as it is
    assert (empty / "report.html").read_text() == "invented report 1"
    assert folders.read_status(empty)["status"] == "complete"
    capsys.readouterr()
    # a second call into the same folder is refused before any work; the first result stays
    assert main(["demo", "--out", str(empty), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "not empty" in err and "nothing is overwritten" in err and str(empty) in err
    assert "Traceback" not in err
    assert len(fake_pipeline) == 1 and (empty / "report.html").read_text() == "invented report 1"
    # a new folder (make example-report empties reports/example first) is created
    assert main(["demo", "--out", str(tmp_path / "new" / "place"), "--quiet"]) == 0
    assert (tmp_path / "new" / "place" / "report.html").exists()


def test_demo_resume_without_an_interrupted_demo_is_a_clear_error(tmp_path, monkeypatch, fake_pipeline, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(["demo", "--resume", "--quiet"]) == 2
    assert "no interrupted demo to resume" in capsys.readouterr().err
    assert not fake_pipeline


@pytest.fixture(scope="module")
def two_models(tmp_path_factory):
    """The reduced (invented) demo and a second model file: the same mechanism with one rate constant fixed."""
    folder = build_reduced_demo(tmp_path_factory.mktemp("compare") / "campaign")
    text = (folder / "model.toml").read_text()
    old = 'k = { value = "1 L/(mol*s)", fit = true, lower = -3.0, upper = 3.0 }'
    assert old in text
    (folder.parent / "fixed_k.toml").write_text(text.replace(old, old.replace("fit = true", "fit = false"), 1))
    return folder, folder / "model.toml", folder.parent / "fixed_k.toml"


def test_compare_writes_a_new_folder_per_call_and_refuses_a_taken_out(two_models, tmp_path, capsys):
    base, model_a, model_b = two_models
    campaign = Path(shutil.copytree(base, tmp_path / "campaign"))
    argv = ["compare", str(campaign), "--models", str(model_a), str(model_b), "--starts", "1", "--quiet"]
    assert main(argv) == 0
    assert main(argv) == 0
    made = folders.result_folders(campaign / "results")
    assert len(made) == 2
    first = (made[0] / "compare.json").read_bytes()
    assert all((f / "compare.json").is_file() and (f / "compare.txt").is_file() for f in made)
    assert all(folders.read_status(f)["status"] == "complete" for f in made)
    # both comparisons are in the run index, with both model files hashed
    runs = history.list_runs(campaign / "results")
    assert [r["step"] for r in runs] == ["compare", "compare"]
    hashed = {Path(i["path"]).name for i in runs[0]["inputs"] if i["role"] == "model"}
    assert hashed == {"model.toml", "fixed_k.toml"}
    data = json.loads(first)
    assert set(data["fits"]) == {"model", "fixed_k"}
    capsys.readouterr()
    # an explicit folder that holds a comparison is refused (exit 2) before any fit; nothing changes
    assert main([*argv, "--out", str(made[0])]) == 2
    err = capsys.readouterr().err
    assert "nothing is overwritten" in err and "compare.json" in err and "Traceback" not in err
    assert (made[0] / "compare.json").read_bytes() == first
    assert len(folders.result_folders(campaign / "results")) == 2
