"""The output folder: JSON codec, the one posterior store (checkpoint and result), cancellation.

References: the JSON standard (RFC 8259 has no NaN, so strict files write
null); an uninterrupted sampler run with the same seed (a resumed run must
reproduce it bit for bit, as in tests/estimation/test_checkpoint.py).
"""

from __future__ import annotations

import json
import math
import threading

import numpy as np
import pytest

from speciakin._json import dumps, format_tag, json_ready, nan_from_null
from speciakin.chemistry.model import Prior
from speciakin.estimation.checkpoint import read_checkpoint
from speciakin.estimation.sampling import sample_posterior
from speciakin.pipeline import Cancelled, outputs
from speciakin.pipeline.steps import tracker

PRIORS = [Prior("normal", {"mean": 0.0, "sd": 3.0}), Prior("normal", {"mean": 0.0, "sd": 3.0})]
NAMES = ["a", "b"]


def log_likelihood(theta):
    """Independent normals, means 0.4 and -0.2, sd 0.5 and 0.3 (invented test target)."""
    return -0.5 * (((theta[:, 0] - 0.4) / 0.5) ** 2 + ((theta[:, 1] + 0.2) / 0.3) ** 2)


def run(path, n_steps, resume=False, progress=False):
    return sample_posterior(log_likelihood, NAMES, PRIORS, [0.4, -0.2], [0.1, 0.1], n_walkers=8,
                            n_steps=n_steps, seed=11, checkpoint=path, resume=resume, progress=progress)


def test_json_codec_is_strict():
    value = {"x": float("nan"), "y": np.float64(2.5), "z": np.arange(3), "w": (1.0, float("inf")),
             "n": np.int64(4)}
    text = dumps(value)
    assert json.loads(text) == {"x": None, "y": 2.5, "z": [0, 1, 2], "w": [1.0, None], "n": 4}
    assert json_ready([np.nan]) == [None]
    assert math.isnan(nan_from_null([None, 1.0])[0])
    assert format_tag("posterior", 1) == "speciakin.posterior/1"


def test_one_file_name_list():
    assert outputs.result_path("out", "posterior").name == "posterior.h5"
    assert len(set(outputs.RESULT_FILES.values())) == len(outputs.RESULT_FILES)


def test_posterior_store_is_checkpoint_and_result(tmp_path):
    path = outputs.result_path(tmp_path, "posterior")
    result = run(path, 40)
    assert outputs.load_posterior(tmp_path) is None  # a checkpoint alone is not a finished result
    outputs.save_posterior(tmp_path, result)
    back = outputs.load_posterior(tmp_path)
    np.testing.assert_array_equal(back.chain, result.chain)
    np.testing.assert_array_equal(back.samples, result.samples)
    assert back.summary == result.summary and back.burn_in == result.burn_in
    assert read_checkpoint(path).iteration == result.chain.shape[0]
    # the same file resumes: continuing to 80 steps reproduces an uninterrupted 80-step run
    longer = run(path, 80, resume=True)
    straight = run(tmp_path / "straight.h5", 80)
    np.testing.assert_array_equal(longer.chain, straight.chain)


def test_cancel_stops_the_sampler_with_a_checkpoint(tmp_path):
    flag = threading.Event()
    calls = {"n": 0}

    def progress(stage, done, total):
        calls["n"] += 1
        if calls["n"] == 15:
            flag.set()

    path = tmp_path / "posterior.h5"
    with pytest.raises(Cancelled, match="sample"):
        run(path, 60, progress=tracker("sample", progress, flag))
    assert 0 < read_checkpoint(path).iteration < 60
    resumed = run(path, 60, resume=True)
    straight = run(tmp_path / "straight.h5", 60)
    np.testing.assert_array_equal(resumed.chain, straight.chain)


def test_loaders_name_a_broken_file(tmp_path):
    (tmp_path / "window.json").write_text("{not json")
    with pytest.raises(Exception, match="window.json|not valid JSON"):
        outputs.load_window(tmp_path)
    assert outputs.load_fit(tmp_path) is None


def test_former_module_name_still_imports():
    import speciakin.workflow as former
    from speciakin import pipeline

    assert former.run_all is pipeline.run_all and former.load_results is pipeline.load_results


def test_a_checkpoint_of_the_earlier_tag_still_resumes(tmp_path):
    import h5py

    path = tmp_path / "posterior.h5"
    run(path, 30)
    with h5py.File(path, "a") as fh:
        fh.attrs["format"] = "speciakin-ensemble-checkpoint-1"
    resumed = run(path, 60, resume=True)
    np.testing.assert_array_equal(resumed.chain, run(tmp_path / "straight.h5", 60).chain)


def test_window_inside_a_wrapper_is_read(tmp_path):
    from speciakin.decision import compute_window
    from speciakin.decision.specs import Specification

    def outcomes(draws, ph, factor=None):  # invented closed form: outcome = 10 * pH for every draw
        return np.broadcast_to(10.0 * np.asarray(ph)[None, :, None], (draws.shape[0], len(ph), 1)).copy()

    window = compute_window(outcomes, np.zeros((8, 1)), np.linspace(6.0, 8.0, 5),
                            [Specification("percent", ("X",), ">=", 65.0)], outcome_names=["X"])
    outputs.write_json(tmp_path / "window.json", {"window": window.to_dict()})
    assert outputs.load_window(tmp_path).windows == window.windows
