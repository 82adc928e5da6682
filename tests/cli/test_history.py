"""Result folders through the command line, on a reduced copy of the bundled (invented) demo.

Every command writes a new folder under <campaign>/results/; two runs at once
keep both results; a read-only folder stops before any work; ``history``
lists the runs and ``contrast`` sets two side by side; a moved result folder
is rendered again; no output names a folder of the machine.
"""

from __future__ import annotations

import json
import os
import shutil
import subprocess
import sys
import warnings
import zipfile
from pathlib import Path

import pytest

from pipeline.regression_case import build_reduced_demo
from pipeline.test_folders import read_only
from speciakin.cli.main import main
from speciakin.pipeline import folders, history

SHORT_FIT = ["--starts", "1", "--no-profiles", "--quiet"]
SHORT_RUN = [*SHORT_FIT, "--steps", "24", "--walkers", "20"]


@pytest.fixture(scope="module")
def reduced(tmp_path_factory):
    return build_reduced_demo(tmp_path_factory.mktemp("reduced") / "campaign")


@pytest.fixture
def campaign(reduced, tmp_path):
    return Path(shutil.copytree(reduced, tmp_path / "lab" / "campaign"))


@pytest.fixture(scope="module")
def fitted(reduced, tmp_path_factory):
    """The reduced demo with one ``speciakin fit`` result folder, made once for the module (read only)."""
    folder = Path(shutil.copytree(reduced, tmp_path_factory.mktemp("fitted") / "lab" / "campaign"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["fit", str(folder), *SHORT_FIT]) == 0
    return folder


@pytest.fixture
def fitted_campaign(fitted, tmp_path):
    """A copy of :func:`fitted` under ``tmp_path/lab/campaign`` and its one fit folder."""
    campaign = Path(shutil.copytree(fitted, tmp_path / "lab" / "campaign"))
    fit_folder, = _folders(campaign)
    return campaign, fit_folder


def _folders(campaign: Path) -> list[Path]:
    return folders.result_folders(campaign / "results")


def _cli(*argv: str, cwd: Path | None = None) -> subprocess.Popen:
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(sys.path), "MPLBACKEND": "Agg"}
    return subprocess.Popen([sys.executable, "-m", "speciakin.cli.main", *argv], cwd=cwd, env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _texts(folder: Path):
    """(file, text) of every output: raw bytes as text, the members of each XLSX, the text of each PDF."""
    for path in sorted(p for p in folder.rglob("*") if p.is_file()):
        yield path, path.read_bytes().decode("latin-1")
        if path.suffix == ".xlsx":
            with zipfile.ZipFile(path) as book:
                for member in book.namelist():
                    yield path, book.read(member).decode("utf-8", "replace")
        if path.suffix == ".pdf":
            from pypdf import PdfReader

            yield path, "\n".join(page.extract_text() for page in PdfReader(str(path)).pages)


@pytest.mark.filterwarnings("ignore")
def test_two_concurrent_runs_keep_both_results(campaign, tmp_path):
    procs = [_cli("run", str(campaign), *SHORT_RUN, cwd=tmp_path) for _ in range(2)]
    outs = [p.communicate(timeout=900) for p in procs]
    assert [p.returncode for p in procs] == [0, 0], [o[1][-2000:] for o in outs]
    made = _folders(campaign)
    assert len(made) == 2
    for folder in made:
        assert folders.read_status(folder)["status"] == "complete"
        for name in ("fit.json", "posterior.h5", "window.json", "report.html", "report.pdf", "report.xlsx"):
            assert (folder / name).is_file(), (folder, name)
        assert not (folder / folders.LOCK_FILE).exists()
    runs = history.list_runs(campaign / "results")
    assert sorted(r["id"] for r in runs) == sorted(f.name for f in made)
    assert all(r["status"] == "complete" and "window.json" in r["result_files"] for r in runs)

    # no output names a folder of this machine: the campaign, the temporary folder, the home folder
    forbidden = {str(campaign.resolve()), str(campaign), str(tmp_path), str(tmp_path.resolve()),
                 os.path.expanduser("~")}
    for path, text in _texts(made[0]):
        for bad in forbidden:
            assert bad not in text, f"{path} names {bad}"
    fit = json.loads((made[0] / "fit.json").read_text())
    assert fit["model"] == "../../model.toml" and fit["campaign"] == "../.."


def test_read_only_output_folder_is_a_clear_error_before_the_fit(campaign, tmp_path, capsys):
    locked = tmp_path / "locked"
    locked.mkdir()
    results = campaign / "results"
    results.mkdir()
    with read_only(locked, results):
        for argv in (["fit", str(campaign), "--out", str(locked / "out"), *SHORT_FIT],
                     ["fit", str(campaign), *SHORT_FIT],
                     ["run", str(campaign), *SHORT_RUN]):
            assert main(argv) == 2
            err = capsys.readouterr().err
            assert "cannot be written" in err and "Traceback" not in err
    assert not any(locked.iterdir()) and not any(results.iterdir())


@pytest.mark.filterwarnings("ignore")
def test_steps_alone_history_contrast_and_a_moved_folder(fitted_campaign, fitted, tmp_path, capsys, monkeypatch):
    campaign, fit_folder = fitted_campaign            # `speciakin fit` made its folder (module fixture)
    assert main(["window", str(campaign), "--quiet"]) == 0
    assert _folders(campaign)[0] == fit_folder
    fit_folder, window_folder = _folders(campaign)
    status = folders.read_status(window_folder)
    assert status["built_on"] == "../" + fit_folder.name and status["status"] == "complete"
    assert (window_folder / "fit.json").read_bytes() == (fit_folder / "fit.json").read_bytes()  # a copy
    assert not (fit_folder / "window.json").exists()                                            # untouched

    # the explicit --out of an earlier result is refused, nothing overwritten
    before = (fit_folder / "fit.json").read_bytes()
    assert main(["fit", str(campaign), "--out", str(fit_folder), *SHORT_FIT]) == 2
    assert "already holds this result" in capsys.readouterr().err
    assert (fit_folder / "fit.json").read_bytes() == before

    # a changed process file, a third result built on the first
    process = campaign / "process.toml"
    process.write_text(process.read_text().replace("draws = 16", "draws = 12"))
    assert main(["window", str(campaign), "--from", fit_folder.name[-6:], "--quiet"]) == 0
    third, = [f for f in _folders(campaign) if f not in (fit_folder, window_folder)]  # names may share a second
    capsys.readouterr()

    assert main(["history", str(campaign)]) == 0
    listing = capsys.readouterr().out.splitlines()
    ids = [line.split()[1] for line in listing[2:]]
    assert ids == [third.name, window_folder.name, fit_folder.name]  # newest first
    assert "pH" in listing[2] or "no window" in listing[2]
    assert "complete" in listing[2] and "window" in listing[2] and "fit" in listing[4]

    assert main(["contrast", str(campaign), window_folder.name, third.name[-6:]]) == 0
    text = capsys.readouterr().out
    assert "../process.toml" in text and "CHANGED" in text
    assert "log10k[acylation_aryl]" in text and "probability level" in text
    changed = [line for line in text.splitlines() if "CHANGED" in line]
    assert len(changed) == 1 and "process.toml" in changed[0]
    assert main(["contrast", str(campaign), "nothing-like-this", third.name]) == 2
    # without ids: the two newest complete runs, the older as A; with one id: it and the newest
    capsys.readouterr()
    assert main(["contrast", str(campaign)]) == 0
    first_rows = capsys.readouterr().out.splitlines()[2].split()
    assert first_rows == ["id", window_folder.name, third.name]
    assert main(["contrast", str(campaign), fit_folder.name[-6:]]) == 0
    assert capsys.readouterr().out.splitlines()[2].split() == ["id", fit_folder.name, third.name]
    assert main(["contrast", str(campaign), third.name]) == 0     # the newest itself: beside the next one
    assert capsys.readouterr().out.splitlines()[2].split() == ["id", third.name, window_folder.name]

    # move the campaign with its results elsewhere and render the window result again from another folder
    moved = Path(shutil.move(str(campaign), str(tmp_path / "elsewhere")))
    monkeypatch.chdir(tmp_path)
    assert main(["report", str(moved / "results" / window_folder.name), "--formats", "html"]) == 0
    rendered = folders.result_folders(moved / "results")[-1]
    assert rendered.name not in {fit_folder.name, window_folder.name, third.name}
    assert (rendered / "report.html").is_file() and (rendered / "window.json").is_file()
    assert folders.read_status(rendered)["built_on"] == "../" + window_folder.name
    assert not (moved / "results" / window_folder.name / "report.html").exists()
    html = (rendered / "report.html").read_text()
    assert str(tmp_path) not in html and str(fitted.parents[1]) not in html  # nor where the fit was made
    assert any(word in html for word in ("Recommended", "Provisional", "Not established"))  # the decision callout
    # the report renders the window's result: without ids, contrast still sets the two newest analyses side by side
    capsys.readouterr()
    assert main(["contrast", str(moved)]) == 0
    assert capsys.readouterr().out.splitlines()[2].split() == ["id", window_folder.name, third.name]


def _renamed(reduced: Path, folder: Path, names: list[str]) -> Path:
    """A copy of the reduced demo whose runs carry ``names``."""
    import dataclasses

    from speciakin.data import load_campaign, write_campaign

    folder.mkdir(parents=True)
    campaign = load_campaign(reduced / "campaign.xlsx")
    runs = tuple(dataclasses.replace(r, recipe=dataclasses.replace(r.recipe, name=n))
                 for r, n in zip(campaign.runs, names))
    write_campaign(dataclasses.replace(campaign, runs=runs), folder / "campaign.xlsx")
    shutil.copy(reduced / "model.toml", folder / "model.toml")
    return folder


@pytest.mark.filterwarnings("ignore")
def test_run_names_give_distinct_figure_files(reduced, tmp_path):
    similar = _renamed(reduced, tmp_path / "similar", ["R/1", "R_1", "R 1"])
    assert main(["fit", str(similar), *SHORT_FIT]) == 0
    figures = sorted(p.name for p in (_folders(similar)[0] / "figures").glob("run_*.png"))
    assert len(figures) == 3 and len(set(figures)) == 3
    long_name = _renamed(reduced, tmp_path / "long", ["R" * 300, "R2", "R3"])
    assert main(["fit", str(long_name), *SHORT_FIT]) == 0
    figures = [p.name for p in (_folders(long_name)[0] / "figures").glob("run_*.png")]
    assert len(figures) == 3 and max(len(f) for f in figures) < 100


@pytest.mark.filterwarnings("ignore")
def test_sample_resume_continues_the_interrupted_folder(fitted_campaign):
    campaign, _ = fitted_campaign                     # `speciakin fit` made its folder (module fixture)
    assert main(["sample", str(campaign), "--steps", "24", "--walkers", "20", "--quiet"]) == 0
    fit_folder, sampled = _folders(campaign)
    assert folders.read_status(sampled)["built_on"] == "../" + fit_folder.name
    # as a kill leaves it: status running, the lock of a process that is gone
    status = json.loads((sampled / folders.STATUS_FILE).read_text())
    status["status"] = "running"
    (sampled / folders.STATUS_FILE).write_text(json.dumps(status))
    (sampled / folders.LOCK_FILE).write_text(json.dumps({"pid": 2 ** 22 + 1, "host": __import__("socket").gethostname(),
                                                        "started": status["started"]}))
    assert folders.read_status(sampled)["status"] == "interrupted"
    assert main(["sample", str(campaign), "--resume", "--steps", "24", "--walkers", "20", "--quiet"]) == 0
    assert _folders(campaign) == [fit_folder, sampled]            # continued in place, no new folder
    after = folders.read_status(sampled)
    assert after["status"] == "complete" and len(after["resumed"]) == 1
    assert not (sampled / folders.LOCK_FILE).exists()
    rows = [r for r in history.list_runs(campaign / "results") if r["folder"] == sampled.name]
    assert len(rows) == 1 and rows[0]["status"] == "complete"


def test_resume_without_an_interrupted_folder_is_a_clear_error(campaign, capsys):
    for argv in (["run", str(campaign), "--resume", *SHORT_RUN], ["sample", str(campaign), "--resume", "--quiet"]):
        assert main(argv) == 2
        err = capsys.readouterr().err
        assert "interrupted" in err and "Traceback" not in err
    assert not (campaign / "results").exists() or not _folders(campaign)


def test_contrast_without_two_complete_runs_is_a_clear_error(tmp_path, capsys):
    folder = tmp_path / "fresh"
    assert main(["new", str(folder)]) == 0
    capsys.readouterr()
    assert main(["contrast", str(folder)]) == 2
    err = capsys.readouterr().err
    assert "fewer than two complete runs recorded" in err and "index.sqlite" in err and "Traceback" not in err
