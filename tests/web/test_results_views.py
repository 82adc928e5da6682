"""The results views in a real headless Chromium: correlation, probability against pH with the window and
its status, the 2-D map and the fitted curves of a finished short result (copy of the INVENTED demo),
and how fast the demo's pages answer (figures printed, not asserted: speed is checked by benchmarks).
"""

from __future__ import annotations

import json
import time

import numpy as np
import pytest

from .test_journey import choose, open_campaign, show_view

pytestmark = pytest.mark.filterwarnings("ignore")

CAMPAIGN = "views-short"
RESULT = "20260101-000000-views"


@pytest.fixture(scope="module")
def result(root):
    """A finished short result with a 2-D map: the reduced demo, a second factor of two values, one
    least-squares start without profiles, 8 window draws on a 1-pH grid (pipeline API, as a job does)."""
    from pipeline.regression_case import build_reduced_demo
    from speciakin import pipeline

    case = build_reduced_demo(root / CAMPAIGN)
    process = (case / "process.toml").read_text().replace("ph_step = 0.5", "ph_step = 1.0")
    process = process.replace("[[specification]]", '[scan.second_factor]\nkind = "equivalents"\n'
                              'values = ["1.10 eq", "1.20 eq"]\n\n[[specification]]', 1)
    (case / "process.toml").write_text(process)
    out = case / "results" / RESULT
    out.mkdir(parents=True)
    inputs = pipeline.resolve_inputs(case)
    pipeline.check_step(inputs, out)
    model, campaign, plan = pipeline.load_inputs(inputs)
    objective = pipeline.make_objective(model, campaign)
    fit = pipeline.fit_step(objective, out, starts=1, seed=3, profiles=False)
    pipeline.window_step(objective, plan, out, fit=fit, draws=8, seed=5)
    return out


def plotted(page, graph: str) -> list[dict]:
    """The traces Plotly draws for the graph with id ``graph`` (its full data, arrays as plain lists)."""
    return page.evaluate(
        "(id) => { const plain = v => v == null ? v : ArrayBuffer.isView(v) ? Array.from(v) :"
        " Array.isArray(v) ? v.map(plain) : v;"
        " return document.querySelector(`#${id} .js-plotly-plot`)._fullData.map(t => ({type: t.type,"
        " name: t.name, x: plain(t.x), y: plain(t.y), z: plain(t.z), color: t.line && t.line.color,"
        " marker: t.marker && t.marker.color})); }", graph)


def test_results_show_correlation_window_with_status_map_and_curves(server, page, result, shot):
    url, _ = server
    fit = json.loads((result / "fit.json").read_text())
    window = json.loads((result / "window.json").read_text())
    open_campaign(page, url, CAMPAIGN)
    page.wait_for_selector("#raw-figure .gtitle:has-text('data as imported')")
    raw = plotted(page, "raw-figure")
    shot(page, "29-raw-data-before-results")
    page.click("text=4 Results")
    page.wait_for_selector(f"#result-choice-value:has-text('{RESULT}')")
    page.wait_for_selector("#parameter-table .ag-row")
    shot(page, "30-results-parameters")
    # the tab opens on the parameter table; each figure is drawn when its view (sub-tab) is chosen
    assert page.locator("#parameter-table").count() == 1
    assert page.locator("#tab-page-results .js-plotly-plot").count() == 0
    show_view(page, "correlation")
    page.wait_for_selector("#correlation-figure .gtitle:has-text('parameter correlation')")
    shot(page, "30-results-correlation")

    # correlation: the fit's own matrix, as fit.json holds it
    heat = plotted(page, "correlation-figure")[0]
    assert heat["type"] == "heatmap" and heat["x"] == fit["correlation"]["names"]
    np.testing.assert_array_equal(np.array(heat["z"], float), np.array(fit["correlation"]["matrix"], float))
    assert "least-squares covariance" in page.text_content("#correlation-figure .gtitle")
    show_view(page, "window")
    page.wait_for_selector("#window-figure .gtitle:has-text('probability of meeting spec')")
    shot(page, "30-results-window")

    # probability against pH: the refined curve, the window and its trust status from window.json
    assert window["status"] in page.text_content("#window-figure .gtitle")
    assert f"window status: {window['status']}" in page.inner_text("#window-status")
    curve = next(t for t in plotted(page, "window-figure") if t["name"] == "P(all specifications met)")
    np.testing.assert_array_equal(curve["x"], window["curve_ph"])
    np.testing.assert_array_equal(curve["y"], window["curve_probability"])
    lo, hi = window["primary_window"]
    legend = page.text_content("#window-figure .legend")
    assert f"pH {lo:.2f}-{hi:.2f}" in legend and f"required level {window['level']:.2f}" in legend
    for reason in window["status_reasons"]:
        assert page.locator("#window-reasons li", has_text=reason[:40]).count() == 1
    # the expected outcome at the best set point, as window.json holds it (and the report's page 1 states it)
    best = window["best_ph"]
    assert page.locator("#window-reasons li.expected-outcomes b").inner_text() == \
        f"Expected outcome at pH {best:.2f} (the best set point)"
    shown = page.locator("#window-reasons li.expected-outcome").all_inner_texts()
    assert shown == [f"{n} {m:.1f} % ({lo:.1f}-{hi:.1f})" for n, (m, lo, hi) in
                     ((n, window["best_outcomes"][n]) for n in window["outcome_names"])]
    # what would lift the failing gates, under the reasons
    assert window["next_steps"]
    for step in window["next_steps"]:
        assert page.locator("#window-reasons li.next-step", has_text=step[:40]).count() == 1

    # the 2-D map: the decision layer's probabilities over pH x equivalents, not recomputed
    show_view(page, "map")
    page.wait_for_selector("#map-figure .gtitle:has-text('design space')")
    shot(page, "30-results-map")
    grid = next(t for t in plotted(page, "map-figure") if t["type"] == "heatmap")
    assert grid["x"] == window["ph"] and grid["y"] == window["factor_values"] == [1.1, 1.2]
    np.testing.assert_array_equal(np.array(grid["z"], float), np.array(window["map_probability"], float).T)
    assert "equivalents" in page.text_content("#map-figure .g-ytitle")

    # fitted curves: compound names (labels of the model file) in the legend, the report's colours
    show_view(page, "curves")
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    shot(page, "30-results-curves")
    names = [t["name"] for t in plotted(page, "fit-figure")]
    assert "QX-2209 N-aryl amide (desired, invented) fitted" in names
    assert "QX-2209 N-aryl amide (desired, invented) observed" in names
    from speciakin.chemistry.modelfile import load_model
    from speciakin.palette import model_species_colors

    colors = model_species_colors(load_model(result.parent.parent / "model.toml"))
    line = next(t for t in plotted(page, "fit-figure") if t["name"] == "QX-2209 N-aryl amide (desired, invented) fitted")
    assert line["color"] == colors.color("P_aryl")
    # one colour per compound: the raw data of the same (first) run as drawn on tab 1, the fitted curves and
    # the observations over them, and the report's palette agree
    from speciakin.data import load_campaign
    from speciakin.palette import display_names

    model = load_model(result.parent.parent / "model.toml")
    labels, curves = display_names(model), {t["name"]: t for t in plotted(page, "fit-figure")}
    compounds = {c.name: c.molecule for c in load_campaign(result.parent.parent).compounds}
    drawn = {compounds[t["name"]]: t["marker"] for t in raw if t["name"] in compounds}
    assert set(drawn) == set(compounds.values())
    for molecule, color in drawn.items():
        assert (color == curves[f"{labels[molecule]} fitted"]["color"] == curves[f"{labels[molecule]} observed"]["marker"]
                == colors.color(molecule)), molecule
    # the parameter table lists the fit's parameters; no posterior in this result
    show_view(page, "parameters")
    page.wait_for_selector("#parameter-table .ag-row")
    assert set(page.locator("#parameter-table [col-id='posterior'].ag-cell").all_inner_texts()) == {"not sampled"}
    # rows of a fixed height of two lines; a cell's whole text is its tooltip (a longer note is cut in the cell)
    heights = page.evaluate("() => [...document.querySelectorAll('#parameter-table .ag-center-cols-container .ag-row')]"
                            ".map(r => r.getBoundingClientRect().height)")
    assert len(heights) == len(fit["parameters"]) and max(heights) - min(heights) < 1, heights
    note = next(p for p in fit["parameters"] if p.get("shift_of") is not None)
    page.hover(f"#parameter-table [row-id='{note['name']}'] [col-id='note'], "
               f"#parameter-table .ag-row:has([col-id='name']:text-is('{note['name']}')) [col-id='note']")
    page.wait_for_selector(f".ag-tooltip:has-text('shift of {note['shift_of']:g}')")


def test_zoom_is_interactive(server, page, result, shot):
    """A drag on the curves zooms (Plotly's own zoom, in the browser)."""
    url, _ = server
    open_campaign(page, url, CAMPAIGN)
    page.click("text=4 Results")
    show_view(page, "curves")
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    before = page.evaluate("() => document.querySelector('#fit-figure .js-plotly-plot').layout.xaxis.range.slice()")
    drag = page.locator("#fit-figure .nsewdrag").first
    drag.scroll_into_view_if_needed()
    box = drag.bounding_box()  # in the viewport, where the mouse moves
    page.mouse.move(box["x"] + box["width"] * 0.2, box["y"] + box["height"] * 0.5)
    page.mouse.down()
    page.mouse.move(box["x"] + box["width"] * 0.5, box["y"] + box["height"] * 0.6, steps=5)
    page.mouse.up()
    page.wait_for_function("(b) => { const r = document.querySelector('#fit-figure .js-plotly-plot')"
                           ".layout.xaxis.range; return r[1] - r[0] < 0.6 * (b[1] - b[0]); }", arg=before)
    shot(page, "31-curves-zoomed")


def _answers(page, action, expected: dict[str, str], answered: bool = True) -> dict[str, float]:
    """Seconds from ``action`` to the server's answer for each component of ``expected`` (id -> a
    selector, or selectors, that show it drawn, or None for a component of a tab not shown); "all drawn" is the time
    until every answer has come and every selector is present.  ``answered`` False: the components are
    drawn already and no answer is waited for (a tab opened again)."""
    seen: dict[str, float] = {}
    start = time.perf_counter()

    def on_response(response):
        if "_dash-update-component" in response.url:
            body = response.request.post_data or ""
            for output in expected:
                if f"{output}." in body and output not in seen:
                    seen[output] = time.perf_counter() - start

    page.on("response", on_response)
    action()
    for output, drawn in expected.items():
        for selector in (drawn,) if isinstance(drawn, str) else drawn or ():
            page.wait_for_selector(selector)
        end = time.perf_counter() + 120
        while answered and output not in seen and time.perf_counter() < end:
            page.wait_for_timeout(20)
    seen["all drawn"] = time.perf_counter() - start
    page.remove_listener("response", on_response)
    return seen


def test_page_speed_on_the_demo(server, page, result, capsys):
    """Time from a choice on the page to the answers drawn in the browser, first and again [s]."""
    url, _ = server
    page.goto(url)
    page.wait_for_selector("#campaign-choice")
    figures = {}
    for attempt in ("first", "again"):
        for name, runs in (("demo", 6), (CAMPAIGN, 3)):
            figures[f"choose campaign {name} ({attempt})"] = _answers(
                page, lambda: choose(page, "campaign-choice", name),
                {"check-summary": f"#check-summary:has-text('{runs} run(s)')", "raw-figure": "#raw-figure .gtitle"})
    for attempt in ("first", "again"):
        figures[f"open the results tab ({attempt})"] = _answers(
            page, lambda: page.click("text=4 Results"),
            # the tab's page comes filled in, with every view, in one answer; it opens on the parameters
            {"tab-page-results": ("#parameter-table .ag-row", "#window-status:has-text('window status')")},
            answered=attempt == "first")
        for view, drawn in (("correlation", "#correlation-figure .gtitle"), ("window", "#window-figure .gtitle"),
                            ("map", "#map-figure .gtitle:has-text('design space')"),
                            ("curves", "#fit-figure .gtitle:has-text('fitted')")):
            # drawn in the browser from what the tab's answer brought: no round trip
            figures[f"  its view {view} ({attempt})"] = _answers(page, lambda: show_view(page, view),
                                                                 {view: drawn}, answered=False)
        show_view(page, "parameters")
        page.click("text=1 Campaign and data")
    with capsys.disabled():
        print("\npage answers [s] (headless Chromium, server and browser on this machine, now):")
        for what, seconds in figures.items():
            print(f"  {what:<36} " + ", ".join(f"{k} {v:.2f}" for k, v in seconds.items()))


def test_a_second_open_of_the_results_tab_computes_and_sends_nothing_again(server, page, result, shot, monkeypatch):
    """The fitted curves of a result without stored curves are computed once (by the pipeline, then kept in
    the result folder); opening the tab again computes nothing and re-sends no view."""
    import shutil

    from speciakin import pipeline
    from speciakin.web import stored_predictions

    url, _ = server
    # a result no page has shown yet: a copy of the short result, named as the newest (so it is preselected)
    again = result.parent / "20260101-000001-again"
    shutil.copytree(result, again)
    (again / stored_predictions.STORE_NAME).unlink(missing_ok=True)
    calls = []
    original = pipeline.load_results

    def counted(*args, **kwargs):
        calls.append(args[0])
        return original(*args, **kwargs)

    monkeypatch.setattr(pipeline, "load_results", counted)
    open_campaign(page, url, CAMPAIGN)
    page.click("text=4 Results")
    page.wait_for_selector(f"#result-choice-value:has-text('{again.name}')")
    show_view(page, "map")
    page.wait_for_selector("#map-figure .gtitle:has-text('design space')")
    show_view(page, "curves")
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    assert [str(c) for c in calls] == [str(again.resolve())]  # computed once (the prefetch or the tab)
    assert (again / stored_predictions.STORE_NAME).is_file()

    sent = []  # request bodies of the callbacks that answered with something (204: nothing to update)
    page.on("response", lambda r: sent.append(r.request.post_data or "")
            if "_dash-update-component" in r.url and r.status == 200 else None)
    page.click("text=1 Campaign and data")
    page.click("text=4 Results")
    page.wait_for_selector("#fit-figure .gtitle:has-text('fitted curves over data')")
    page.wait_for_timeout(1500)  # time for any callback the second open would set off
    assert len(calls) == 1
    # the tab's callbacks may be asked (they answer "nothing changed"), but no view is drawn anew
    answered = [b for b in sent if any(f'"{o}.' in b or f'"{o}"' in b for o in ("fit-figure", "correlation-figure"))]
    assert answered == [], answered
    shot(page, "32-results-opened-again")
