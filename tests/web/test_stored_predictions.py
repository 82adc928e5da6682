"""The fitted curves and bands the page's jobs store in their result folder, on a reduced copy of the
INVENTED demo: they equal what the pipeline computes (``pipeline.load_results``, the computation the page
ran before they were stored), the page reads them instead of computing, and computes again only when a
file they were computed from changed."""

from __future__ import annotations

import time

import numpy as np
import pytest

from speciakin import pipeline
from speciakin.web import stored_predictions
from speciakin.web.jobs import JobBoard

pytestmark = pytest.mark.filterwarnings("ignore")


def _wait(job, timeout=900.0):
    end = time.time() + timeout
    while job.state in ("queued", "running") and time.time() < end:
        time.sleep(0.05)
    assert job.state == "done", job.message
    return job


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    """A fit job, a short posterior job on it and a window job on that: (campaign, {kind: result folder})."""
    from pipeline.regression_case import build_reduced_demo

    campaign = build_reduced_demo(tmp_path_factory.mktemp("stored") / "short")
    board = JobBoard(workers=1)
    try:
        folders = {}
        for kind, settings in (("fit", {"starts": 1, "profiles": [], "draws": 8}),
                               ("posterior", {"steps": 20}), ("window", {"draws": 8})):
            folders[kind] = campaign / _wait(board.submit(kind, "short", campaign, settings)).folder
    finally:
        board.shutdown()
    return campaign, folders


def _computed(campaign, folder):
    """The pipeline's own predictions of a result (what the page computed before they were stored)."""
    return pipeline.load_results(folder, campaign=str(campaign), model=str(campaign / "model.toml"),
                                 check=False).predictions


def _same(a, b) -> None:
    assert (a.source, a.band_draws, a.band_quantiles, a.notes) == (b.source, b.band_draws, b.band_quantiles, b.notes)
    np.testing.assert_array_equal(a.theta, b.theta)
    assert a.observations == b.observations
    assert [r.name for r in a.runs] == [r.name for r in b.runs]
    for ra, rb in zip(a.runs, b.runs):
        assert (ra.value_label, ra.value_unit, ra.failed, ra.n_band) == (rb.value_label, rb.value_unit, rb.failed,
                                                                          rb.n_band)
        for key in ("time", "titrant", "titrant_low", "titrant_high"):
            np.testing.assert_array_equal(getattr(ra, key), getattr(rb, key))
        for key in ("values", "low", "high"):
            x, y = getattr(ra, key), getattr(rb, key)
            assert (x is None) == (y is None)
            if x is not None:
                assert x.keys() == y.keys()
                for k in x:
                    np.testing.assert_array_equal(x[k], y[k])


def test_every_job_stores_exactly_the_curves_the_pipeline_computes(results):
    campaign, folders = results
    for kind, folder in folders.items():
        stored = stored_predictions.load(folder, campaign)
        assert stored is not None, kind
        _same(stored, _computed(campaign, folder))
    # the posterior's result holds the 5-95 % band of its draws, the fit's none
    assert stored_predictions.load(folders["fit"], campaign).band_draws == 0
    band = stored_predictions.load(folders["posterior"], campaign)
    assert band.band_draws == stored_predictions.load(folders["window"], campaign).band_draws > 0
    assert all(r.low is not None and r.n_band >= 2 for r in band.runs)


def test_a_job_building_on_a_result_copies_its_store(results):
    campaign, folders = results
    name = stored_predictions.STORE_NAME
    assert (folders["window"] / name).read_bytes() == (folders["posterior"] / name).read_bytes()


def test_the_store_is_neither_listed_nor_downloadable(results):
    from speciakin.errors import InputError
    from speciakin.web.downloads import download_path, result_files

    campaign, folders = results
    assert stored_predictions.STORE_NAME not in result_files(folders["fit"])
    with pytest.raises(InputError):
        download_path(campaign.parent, campaign.name, folders["fit"].name, stored_predictions.STORE_NAME)


def test_the_page_reads_the_store_and_computes_again_only_after_an_input_changed(results, monkeypatch):
    from speciakin.web.page_results import _results
    from speciakin.web.state import WebState

    campaign, folders = results
    folder = folders["posterior"]
    calls = []
    original = pipeline.load_results

    def counted(*args, **kwargs):
        calls.append(args)
        return original(*args, **kwargs)

    monkeypatch.setattr(pipeline, "load_results", counted)
    predictions, model = _results(WebState(campaign.parent.resolve()), campaign.resolve(), folder.resolve())
    assert calls == [] and model.molecules
    _same(predictions, stored_predictions.load(folder, campaign))

    # a model file edited after the result (a comment is enough: the file differs): computed once, stored again
    model_file = campaign / "model.toml"
    model_file.write_text(model_file.read_text() + "\n# edited after the posterior\n")
    state = WebState(campaign.parent.resolve())
    _results(state, campaign.resolve(), folder.resolve())
    _results(state, campaign.resolve(), folder.resolve())
    assert len(calls) == 1
    _results(WebState(campaign.parent.resolve()), campaign.resolve(), folder.resolve())  # a restarted page
    assert len(calls) == 1
    assert stored_predictions.load(folder, campaign) is not None


def test_a_store_from_other_files_is_neither_used_nor_copied(results):
    campaign, folders = results
    source, folder = folders["posterior"], folders["window"]
    stored_predictions.save(source, campaign, _computed(campaign, source))  # for the inputs as they are now
    assert stored_predictions.carry(source, folder, campaign)  # the same fit and posterior files
    assert stored_predictions.load(folder, campaign) is not None
    fit = folder / "fit.json"
    fit.write_text(fit.read_text() + " ")  # another fit.json (the same numbers, other bytes)
    assert stored_predictions.load(folder, campaign) is None
    assert not stored_predictions.carry(source, folder, campaign)
