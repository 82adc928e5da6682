"""Progress and cancellation of the pipeline's steps on the reduced (invented) demo."""

from __future__ import annotations

import threading

import pytest

from speciakin import pipeline
from speciakin.pipeline import outputs

from .regression_case import build_reduced_demo


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    return build_reduced_demo(tmp_path_factory.mktemp("cancel"))


@pytest.mark.filterwarnings("ignore")
def test_cancel_during_the_fit_stops_run_all_before_any_fit_file(case, tmp_path):
    cancel = threading.Event()
    events = []

    def progress(stage, done, total):
        events.append((stage, done, total))
        cancel.set()  # ask to stop as soon as the fit reports anything

    with pytest.raises(pipeline.Cancelled, match="starts"):
        pipeline.run_all(pipeline.resolve_inputs(case), tmp_path, starts=2, profiles=False, progress=progress,
                         cancel=cancel)
    assert events == [("starts", 0, 2)]
    assert outputs.result_path(tmp_path, "check").exists()
    assert not outputs.result_path(tmp_path, "fit").exists()
