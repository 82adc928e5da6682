"""Jobs on a Dask local cluster: a real short fit with progress, and a cancelled one (reduced INVENTED demo)."""

from __future__ import annotations

import json
import time

import pytest

pytestmark = pytest.mark.filterwarnings("ignore")


def _wait(job, until=("done", "failed", "cancelled"), timeout=600.0):
    end = time.time() + timeout
    while job.state not in until and time.time() < end:
        time.sleep(0.1)
    return job


@pytest.fixture(scope="module")
def board():
    from speciakin.web.dask_jobs import DaskJobBoard

    b = DaskJobBoard()
    yield b
    b.shutdown()


def test_a_fit_job_runs_on_the_local_cluster_with_progress(root, board):
    campaign = root / "short"
    job = board.submit("fit", "short", campaign, {"starts": 1, "profiles": False, "draws": 8})
    stages = set()
    end = time.time() + 600
    while job.state in ("queued", "running") and time.time() < end:
        stages.add(job.stage)
        time.sleep(0.05)
    assert job.state == "done", job.message
    # the stages seen while polling, and every stage the worker reported (a fast machine runs a stage of the
    # short fit within one poll of the server's monitor)
    assert stages & {"check", "starts", "window", "figures"}, stages
    assert {"check", "starts", "window"} <= set(job.stages), job.stages
    assert job.view()["stages"] == job.stages
    saved = json.loads((campaign / job.folder / "window.json").read_text())
    assert saved["status"] in job.message.lower()
    # the worker made the folder through the pipeline's Recording and recorded it in the results index
    from speciakin.pipeline import results_root
    from speciakin.pipeline.contrast import live_runs

    row = next(r for r in live_runs(results_root(campaign)) if r["folder"] == job.folder.rsplit("/", 1)[-1])
    assert (row["step"], row["status"]) == ("fit", "complete")
    assert row["summary"]["window_status"] == saved["status"]


def test_a_job_on_the_cluster_can_be_cancelled(root, board):
    job = board.submit("fit", "short", root / "short", {"starts": 64, "profiles": True})
    _wait(job, until=("running",))
    end = time.time() + 300
    while job.stage != "starts" and time.time() < end:
        time.sleep(0.05)
    assert board.cancel(job.id)
    _wait(job)
    assert job.state == "cancelled", job.message
    assert "step 'starts' cancelled" in job.message
    assert not (root / "short" / job.folder / "fit.json").exists()
