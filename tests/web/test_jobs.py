"""The job board and the figures' thinning, without a browser."""

from __future__ import annotations

import threading
import time

import numpy as np
import pytest

from speciakin.errors import InputError, Location
from speciakin.web import jobs as jobs_module
from speciakin.web.figures import thin
from speciakin.web.jobs import JobBoard


def _wait(job, timeout=30.0):
    end = time.time() + timeout
    while job.state in ("queued", "running") and time.time() < end:
        time.sleep(0.02)
    return job


@pytest.fixture
def kinds(monkeypatch):
    """Job kinds of known behaviour in place of the pipeline's."""
    from speciakin.web import job_kinds
    from speciakin.web.job_kinds import JobKind

    gate = threading.Event()

    def steps(job, campaign, feedback):
        folder = campaign / "results" / job.id
        folder.mkdir(parents=True)
        feedback.opened(folder)
        for i in range(5):
            feedback("starts", i, 5)
            if job.settings.get("starts"):
                gate.wait(5)
        (folder / "done.txt").write_text("x")
        return "finished"

    def bad_input(job, campaign, feedback):
        raise InputError("start volume is not a number", Location(file="c.xlsx", sheet="Runs", row=4,
                                                                  column="G (start volume [mL])"), "fifty", "a number")

    def bug(job, campaign, feedback):
        raise ZeroDivisionError("division by zero")

    fake = {"steps": JobKind("steps", "fit", ("starts",), steps), "bad": JobKind("bad", "fit", (), bad_input),
            "bug": JobKind("bug", "fit", (), bug)}
    monkeypatch.setattr(jobs_module, "JOB_KINDS", fake)
    monkeypatch.setattr(job_kinds, "JOB_KINDS", fake)
    return gate


def test_a_job_reports_progress_and_the_folder_it_writes(tmp_path, kinds):
    board = JobBoard()
    first = _wait(board.submit("steps", "c", tmp_path, {}))
    second = _wait(board.submit("steps", "c", tmp_path, {}))
    assert first.state == second.state == "done" and first.message == "finished"
    assert first.folder == f"results/{first.id}" and first.folder != second.folder
    assert (tmp_path / first.folder / "done.txt").is_file()
    assert (first.stage, first.done, first.total) == ("starts", 4, 5)
    assert [j.id for j in board.jobs("c")] == [second.id, first.id]
    assert board.jobs("other") == []


def test_time_left_follows_the_pace_of_the_stage():
    job = jobs_module.Job("j", "steps", "c", "f", {}, state="running", done=2, total=10)
    job.stage_started = 100.0
    # 2 steps in 10 s -> 8 steps left take 40 s
    assert job.seconds_left(now=110.0) == pytest.approx(40.0)
    job.done = 0
    assert job.seconds_left(now=110.0) is None


def test_a_job_is_cancelled_at_its_next_progress_point(tmp_path, kinds):
    board = JobBoard()
    job = board.submit("steps", "c", tmp_path, {"starts": 1})
    while job.state != "running":
        time.sleep(0.01)
    assert board.cancel(job.id)
    kinds.set()
    _wait(job)
    assert job.state == "cancelled" and "cancelled" in job.message
    assert not (tmp_path / job.folder / "done.txt").exists()
    assert not board.cancel(job.id)  # finished jobs cannot be cancelled again


def test_a_failing_job_says_why(tmp_path, kinds):
    board = JobBoard()
    bad = _wait(board.submit("bad", "c", tmp_path, {}))
    assert bad.state == "failed"
    assert "sheet 'Runs', row 4" in bad.message and "'fifty'" in bad.message
    bug = _wait(board.submit("bug", "c", tmp_path, {}))
    assert bug.state == "failed" and "ZeroDivisionError" in bug.message


def test_thinning_keeps_the_ends_and_at_most_about_the_limit():
    x = np.arange(10_001.0)
    tx, ty, k = thin(x, x * 2, limit=1000)
    assert k == 11 and tx[0] == 0 and tx[-1] == 10_000 and len(tx) <= 1001
    np.testing.assert_array_equal(ty, tx * 2)
    same = thin(x[:10], x[:10], limit=1000)
    assert same[2] == 1 and len(same[0]) == 10


def test_a_long_log_is_thinned_for_display_and_the_figure_says_so():
    import dataclasses

    from speciakin.data import TimeSeries, load_campaign
    from speciakin.demo import demo_dir
    from speciakin.palette import SpeciesColors
    from speciakin.web.figures import MAX_POINTS, raw_run_figure

    run = load_campaign(demo_dir()).runs[0]
    n = 6000
    t = np.linspace(0.0, run.recipe.end_time, n)
    long_log = TimeSeries(t, 4.0 + 0.01 * np.sin(t), np.arange(n) + 2)
    fig = raw_run_figure(dataclasses.replace(run, ph_log=long_log), SpeciesColors(["S"]))
    trace = next(d for d in fig.data if d.name == "pH log")
    assert len(trace.x) <= MAX_POINTS + 1 and trace.x[-1] == t[-1] / 60.0
    notes = " ".join(a.text for a in fig.layout.annotations)
    assert f"pH log: 1 in 4 of {n} readings shown (display only; the fit uses all)" in notes
    assert len(long_log) == n  # the campaign's log itself is untouched


def test_settings_out_of_range_are_refused_naming_the_setting(tmp_path):
    from speciakin.web.job_kinds import clean_settings

    board = JobBoard()
    with pytest.raises(InputError) as err:
        board.submit("posterior", "c", tmp_path, {"steps": 3})
    assert "steps per walker" in str(err.value) and "10 to 100000" in str(err.value)
    assert board.jobs() == []  # nothing started
    for bad in ({"starts": 0}, {"starts": 2.5}, {"draws": "many"}):
        with pytest.raises(InputError):
            clean_settings("fit", bad)
    with pytest.raises(InputError):
        clean_settings("report", {"source": "../../elsewhere"})
    with pytest.raises(InputError):
        clean_settings("report", {"formats": ["html", "docx"]})
    with pytest.raises(InputError):
        clean_settings("nonsense", {})
    # "until converged" drops the fixed steps; fixed steps drop the cap
    assert clean_settings("posterior", {"steps": 50, "cap": 400, "until_converged": True})["steps"] is None
    assert clean_settings("posterior", {"steps": 50, "cap": 400})["cap"] is None
    assert clean_settings("fit", {"starts": "3", "profiles": [], "walkers": 9}) == \
        {"starts": 3, "profiles": False, "draws": None}
