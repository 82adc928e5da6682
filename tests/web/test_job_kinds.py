"""Every job kind of the page through the pipeline's Python API, on a reduced copy of the INVENTED demo:
one result folder per job, recorded in the campaign's results index like a command-line run."""

from __future__ import annotations

import json
import time

import pytest

from speciakin.pipeline import read_status, results_root
from speciakin.pipeline.contrast import live_runs
from speciakin.web.jobs import JobBoard

pytestmark = pytest.mark.filterwarnings("ignore")


def _wait(job, timeout=900.0):
    end = time.time() + timeout
    while job.state in ("queued", "running") and time.time() < end:
        time.sleep(0.05)
    return job


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    from pipeline.regression_case import build_reduced_demo

    folder = tmp_path_factory.mktemp("jobs") / "short"
    build_reduced_demo(folder)
    return folder


@pytest.fixture(scope="module")
def board():
    b = JobBoard(workers=2)
    yield b
    b.shutdown()


def _row(campaign, job):
    runs = {r["id"]: r for r in live_runs(results_root(campaign))}
    return runs[job.folder.rsplit("/", 1)[-1]]


def test_two_fit_jobs_at_once_write_two_folders_each_recorded_in_the_index(campaign, board):
    settings = {"starts": 1, "profiles": [], "draws": 8}
    jobs = [board.submit("fit", "short", campaign, settings) for _ in range(2)]
    for job in jobs:
        _wait(job)
        assert job.state == "done", job.message
    assert jobs[0].folder != jobs[1].folder
    for job in jobs:
        folder = campaign / job.folder
        assert read_status(folder)["status"] == "complete"
        row = _row(campaign, job)
        assert row["status"] == "complete" and row["step"] == "fit"
        assert row["command"].startswith("speciakin web: fit and window (starts 1; draws 8)")
        saved = json.loads((folder / "window.json").read_text())
        # the index holds the window and its status as the folder's window.json says
        assert row["summary"]["window_status"] == saved["status"]
        assert {"check.json", "fit.json", "window.json"} <= set(row["result_files"])
        assert any(name.startswith("figures/") for name in row["result_files"])
        assert any(i["role"] == "model" for i in row["inputs"])


def test_posterior_until_converged_stops_at_the_cap_given_on_the_page(campaign, board):
    job = _wait(board.submit("posterior", "short", campaign, {"until_converged": True, "cap": 40, "steps": 999}))
    assert job.state == "done", job.message
    folder = campaign / job.folder
    summary = json.loads((folder / "posterior.json").read_text())
    # the stop rule checks from 400 steps on (estimation.stopping.DEFAULT_MIN_STEPS), so a cap of 40 ends it
    assert summary["stop_reason"] == "cap", summary["stop_reason"]
    assert (folder / "fit.json").is_file()  # the fit it built on is copied in
    row = _row(campaign, job)
    assert row["step"] == "sample" and row["built_on"] is not None and row["status"] == "complete"
    assert (folder / "figures" / "posterior_trace.png").is_file()


def test_window_suggestion_and_report_build_on_the_newest_result(campaign, board):
    window = _wait(board.submit("window", "short", campaign, {"draws": 8}))
    assert window.state == "done", window.message
    assert (campaign / window.folder / "posterior.h5").is_file()  # built on the posterior above
    suggest = _wait(board.submit("suggest", "short", campaign, {"suggest_draws": 20}))
    assert suggest.state == "done", suggest.message
    assert "suggestion: next run at pH" in suggest.message
    assert (campaign / suggest.folder / "figures" / "suggest_shrinkage.png").is_file()
    report = _wait(board.submit("report", "short", campaign, {"formats": ["html"],
                                                                 "source": suggest.folder.rsplit("/", 1)[-1]}))
    assert report.state == "done", report.message
    html = (campaign / report.folder / "report.html").read_text(encoding="utf-8")
    assert "suggest" in html.lower()
    for job, step in ((window, "window"), (suggest, "suggest"), (report, "report")):
        row = _row(campaign, job)
        assert (row["step"], row["status"]) == (step, "complete")
    assert _row(campaign, report)["built_on"] == suggest.folder.rsplit("/", 1)[-1]


def test_a_job_building_on_a_result_that_is_not_there_says_so(campaign, board):
    job = _wait(board.submit("report", "short", campaign, {"source": "20000101T000000Z-000000"}))
    assert job.state == "failed" and "not a result of this campaign" in job.message
    assert job.folder == ""  # refused before any folder was made


def test_a_cancelled_posterior_is_recorded_as_interrupted(campaign, board):
    job = board.submit("posterior", "short", campaign, {"steps": 5000})
    end = time.time() + 600
    while job.stage != "sample" and time.time() < end and job.state in ("queued", "running"):
        time.sleep(0.05)
    assert board.cancel(job.id)
    _wait(job)
    assert job.state == "cancelled", job.message
    assert f"files written so far stay in {job.folder}" in job.message
    assert _row(campaign, job)["status"] == "interrupted"
    assert read_status(campaign / job.folder)["status"] == "interrupted"


def test_the_whole_run_writes_every_step_and_the_report(campaign, board):
    job = _wait(board.submit("run", "short", campaign, {"starts": 1, "profiles": [], "steps": 20, "draws": 8,
                                                        "formats": ["html", "xlsx"]}))
    assert job.state == "done", job.message
    folder = campaign / job.folder
    for name in ("check.json", "fit.json", "posterior.json", "window.json", "report.html", "report.xlsx"):
        assert (folder / name).is_file(), name
    assert not (folder / "report.pdf").exists()  # only the formats asked for
    assert _row(campaign, job)["step"] == "run"
