"""The history tab's tables: rows from the results index, two results side by side (``pipeline.contrast``)."""

from __future__ import annotations

import json
import shutil

import pytest

from speciakin import pipeline
from speciakin.pipeline.contrast import contrast, live_runs
from speciakin.web.page_history import contrast_view, history_rows

pytestmark = pytest.mark.filterwarnings("ignore")


def _text(component) -> str:
    """Every text inside a Dash component tree."""
    if isinstance(component, (list, tuple)):
        return " ".join(_text(c) for c in component)
    if isinstance(component, str):
        return component
    children = getattr(component, "children", None)
    return "" if children is None else _text(children)


def _fit(folder, value, interval):
    (folder / "fit.json").write_text(json.dumps({"parameters": [
        {"name": "log10_k1", "value": value, "profile_interval": interval, "covariance_interval": None}]}))


@pytest.fixture
def two_runs(tmp_path):
    """Two recorded results of one campaign; the workbook changes between them."""
    from speciakin.demo import demo_dir

    campaign = tmp_path / "c"
    shutil.copytree(demo_dir(), campaign, ignore=shutil.ignore_patterns("results"))  # the package folder only
    inputs = pipeline.resolve_inputs(campaign)
    with pipeline.Recording(inputs, step="fit", command="speciakin web: fit and window (starts 1)") as first:
        _fit(first.folder, -2.5, [-2.6, -2.4])
    book = next(campaign.glob("*.xlsx"))
    book.write_bytes(book.read_bytes() + b"\0")  # any change of bytes changes the SHA-256
    with pipeline.Recording(inputs, step="fit", command="speciakin web: fit and window (starts 4)") as second:
        _fit(second.folder, -2.45, [-2.5, None])
    return campaign, first.id, second.id


def test_history_rows_show_status_time_command_and_the_window_with_its_status(two_runs):
    campaign, a, b = two_runs
    rows = history_rows(live_runs(pipeline.results_root(campaign)))
    assert [r["id"] for r in rows] == [b, a]  # newest first
    assert rows[0]["status"] == "complete" and rows[0]["command"].endswith("(starts 4)")
    made_up = history_rows([{"id": "x", "started": "2026-12-03T13:05:01Z", "step": "run", "status": "failed",
                             "command": "c", "elapsed_s": 12.34,
                             "summary": {"window": [5.1, 6.4], "window_status": "provisional",
                                         "reduced_chi_square": 1.234, "error": "boom"}}])[0]
    assert (made_up["window"], made_up["window_status"], made_up["chi2"], made_up["elapsed"], made_up["error"]) \
        == ("pH 5.10 to 6.40", "provisional", "1.23", "12.3", "boom")


def test_two_results_side_by_side_show_parameters_intervals_and_the_changed_input(two_runs):
    campaign, a, b = two_runs
    view = contrast_view(contrast(pipeline.results_root(campaign), a, b))
    text = _text(view)
    assert "-2.5 [-2.6, -2.4]" in text and "-2.45 [-2.5, -]" in text  # value [profile interval], open end "-"
    assert "inputs: 1 of" in text and "CHANGED" in text
    tables = [c for c in view if type(c).__name__ == "Div"]
    parameters = next(t for t in tables if "Parameters" in _text(t.children[0]))
    row = parameters.children[1].children[1].children[0]
    assert row.className == "differs"  # A and B differ: the row is marked
