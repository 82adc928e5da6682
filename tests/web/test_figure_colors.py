"""One colour per compound on the whole page and in the report: the raw-data figure and the fitted-curves
figure of the page take each compound's colour from the report's palette (no browser; the figure objects
the page sends). Campaigns are copies of the INVENTED demo.

Reference: the report's own colour choice, ``report.assemble.build.species_colors`` (one colour per
molecule in the model's order, :mod:`speciakin.palette`), which the page must agree with.
"""

from __future__ import annotations

import shutil

import pytest

from speciakin.chemistry.modelfile import load_model
from speciakin.data import load_campaign
from speciakin.palette import display_names
from speciakin.report.assemble.build import species_colors
from speciakin.web import page_campaign, page_results
from speciakin.web.state import WebState

pytestmark = pytest.mark.filterwarnings("ignore")

RESULT = "20260101-000000-colours"


@pytest.fixture(scope="module")
def root(tmp_path_factory):
    """A root with a copy of the demo and a reduced demo holding a short least-squares result (one start,
    no profiles, no window; pipeline API, as a job does)."""
    from pipeline.regression_case import build_reduced_demo
    from speciakin import pipeline
    from speciakin.demo import demo_dir

    base = tmp_path_factory.mktemp("colours")
    shutil.copytree(demo_dir(), base / "demo", ignore=shutil.ignore_patterns("results"))
    case = build_reduced_demo(base / "short")
    out = case / "results" / RESULT
    out.mkdir(parents=True)
    inputs = pipeline.resolve_inputs(case)
    model, campaign, _ = pipeline.load_inputs(inputs)
    pipeline.fit_step(pipeline.make_objective(model, campaign), out, starts=1, seed=3, profiles=False)
    return base


def _raw_colors(figure, compounds: dict[str, str]) -> dict[str, str]:
    """Molecule -> marker colour of the HPLC traces of a raw-data figure (legend: compound names)."""
    found = {}
    for trace in figure.data:
        if trace.name in compounds:
            found.setdefault(compounds[trace.name], set()).add(trace.marker.color)
    assert all(len(c) == 1 for c in found.values()), found  # one colour per compound within the figure
    return {m: c.pop() for m, c in found.items()}


def _compounds(folder) -> dict[str, str]:
    return {c.name: c.molecule for c in load_campaign(folder).compounds}


def test_raw_data_take_the_report_colour_of_each_compound(root):
    state = WebState(root.resolve())
    folder = root / "demo"
    report = species_colors(load_model(folder / "model.toml"))
    compounds = _compounds(folder)
    runs = [r.name for r in load_campaign(folder).runs]
    assert len(runs) == 6
    for run in runs:
        figure = page_campaign._raw_figure(state, "demo", run)
        colors = _raw_colors(figure, compounds)
        assert colors, run
        assert colors == {m: report.color(m) for m in colors}, run
        # the logs (pH, temperature, titrant) take no compound's colour: each colour stands for one compound
        logs = {t.line.color for t in figure.data if t.name not in compounds and "below LOQ" not in t.name}
        assert logs and not logs & {report.color(m) for m in compounds.values()}, run
    # the demo's starting material, the first molecule of its model, is the report's first colour
    # (the one that differed: it was drawn in another compound's colour on the raw-data view)
    assert _raw_colors(page_campaign._raw_figure(state, "demo", runs[0]), compounds)["S"] == report.color("S")


def test_fitted_curves_and_raw_data_share_each_compounds_colour(root):
    state = WebState(root.resolve())
    folder = root / "short"
    model = load_model(folder / "model.toml")
    report, labels = species_colors(model), display_names(model)
    compounds = _compounds(folder)
    for run in [r.name for r in load_campaign(folder).runs]:
        raw = _raw_colors(page_campaign._raw_figure(state, "short", run), compounds)
        fitted = page_results._curves(state, "short", RESULT, run)
        by_name = {t.name: t for t in fitted.data}
        for molecule in set(compounds.values()):
            observed = by_name[f"{labels[molecule]} observed"].marker.color
            curve = by_name[f"{labels[molecule]} fitted"].line.color
            assert raw[molecule] == observed == curve == report.color(molecule), (run, molecule)
        # every compound has its own colour
        assert len(set(raw.values())) == len(raw)
