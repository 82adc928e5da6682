"""Step 4 of the page: a result folder's parameters, correlation, pH window, 2-D map and fitted curves.

Everything shown is read from the result folder as the pipeline wrote it
(``fit.json``, ``posterior.json``/``posterior.h5``, ``window.json``) and from
the pipeline's predictions (:func:`speciakin.pipeline.load_results`); the page
computes no window, map or curve itself.  Step 5 (history) placeholder.
"""

from __future__ import annotations

import json
import threading

import numpy as np
import dash_ag_grid as dag
from dash import Input, Output, State, dcc, html

from speciakin.decision.result import best_point_words, outcome_words, outcomes_at_best
from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web import stored_predictions
from speciakin.web.figures import (compound_colors, correlation_figure, empty_figure, fit_run_figure, map_figure,
                                  window_figure)
from speciakin.web.page_campaign import folder_picker
from speciakin.web.paths import RESULTS_FOLDER, result_folders
from speciakin.web.state import file_stamp

__all__ = ["layout", "mounted", "prefetch_newest", "register", "parameter_rows", "correlation_of",
           "PARAMETER_COLUMNS", "VIEWS"]

HISTORY_HINT = "Every result of the campaign, and two results side by side: see tab 5 History."
#: Columns of the parameter table: (field, header).
PARAMETER_COLUMNS = (("name", "parameter"), ("unit", "unit"), ("value", "value"), ("se", "standard error"),
                     ("ci", "95 % interval (covariance)"), ("profile", "95 % interval (profile)"),
                     ("posterior", "posterior median"), ("credible", "95 % credible interval"),
                     ("note", "note"))
_GRAPH = {"displaylogo": False}
#: Rows of the parameter table: two lines of text each, a fixed height (measuring every cell's height,
#: ag-grid's ``autoHeight``, took a third of the tab's first open); columns are kept wide enough for two
#: lines of their usual texts (a narrow window scrolls the table sideways) and a longer text (a long note)
#: is shown whole in the cell's tooltip.
_CELL = {"lineHeight": "1.4em", "paddingTop": "6px", "wordBreak": "break-word",
         # a text cut after two lines ends in an ellipsis
         "display": "-webkit-box", "WebkitLineClamp": 2, "WebkitBoxOrient": "vertical", "overflow": "hidden"}
_ROW_HEIGHT = 52  # [px]: two lines of 1.4em at 14 px, the padding and the border
_MIN_WIDTH = {"name": 180, "unit": 110, "ci": 140, "profile": 120, "posterior": 95, "credible": 140,
              "note": 180}  # [px]
_VIEW_TAB = {"padding": "4px 10px", "fontSize": "0.95em"}  # smaller than the page's own tabs
#: Value of this page's tab (``app._TABS``).
TAB = "results"


#: The views of a result, one sub-tab each: (value, label). Only the shown one is drawn (``dcc.Tabs`` puts
#: only the selected tab's content into the page): the tab opens on the parameter table, and each figure
#: is drawn when its sub-tab is chosen (Plotly drawing the four figures at once took most of the first
#: open of the tab; docs/web.md).
VIEWS = (("parameters", "Parameters"), ("correlation", "Correlation"), ("window", "pH window"),
         ("map", "Design space"), ("curves", "Fitted curves"))


def layout(filled: tuple | None = None) -> html.Div:
    """The tab's page; ``filled`` (:func:`mounted`) fills it in for a result."""
    choice, shown, runs, curves = filled or (([], None), _blank_show("choose a result"), ([], None, ""),
                                            empty_figure("choose a result"))
    rows, warnings, corr, status, reasons, window, drawn_map, message, drawn = shown
    views = {
        "parameters": [
            html.H3("Fitted parameters"),
            dag.AgGrid(id="parameter-table", columnDefs=[{"field": f, "headerName": h, "tooltipField": f,
                                                          "flex": 2 if f in ("name", "note", "ci") else 1,
                                                          "minWidth": _MIN_WIDTH.get(f, 100)}
                                                         for f, h in PARAMETER_COLUMNS],
                       rowData=rows, defaultColDef={"sortable": True, "resizable": True, "wrapText": True,
                                                    "wrapHeaderText": True, "autoHeaderHeight": True,
                                                    "cellStyle": _CELL},
                       dashGridOptions={"domLayout": "autoHeight", "rowHeight": _ROW_HEIGHT,
                                        "tooltipShowDelay": 300},
                       style={"width": "100%"}),
            html.Ul(warnings, id="fit-warnings")],
        "correlation": [dcc.Graph(id="correlation-figure", figure=corr, config=_GRAPH)],
        "window": [dcc.Graph(id="window-figure", figure=window, config=_GRAPH)],
        "map": [html.P("Probability over pH and a second condition of the process file.", className="message"),
                dcc.Graph(id="map-figure", figure=drawn_map, config=_GRAPH)],
        "curves": [dcc.Dropdown(id="fit-run", options=runs[0], value=runs[1], placeholder="choose a run",
                                clearable=False, style={"maxWidth": "320px", "marginTop": ".5em"}),
                   html.Div(runs[2], id="fit-message", className="message"),
                   dcc.Graph(id="fit-figure", figure=curves, config=_GRAPH)],
    }
    return html.Div(className="page", children=[
        folder_picker("Result folder", "result", "choose a result", *choice),
        html.Div(message, id="result-message", className="message"),
        # the window's trust status and its reasons stay above the views: the decision at a glance
        html.Div(status, id="window-status", className="status"),
        html.Ul(reasons, id="window-reasons"),
        dcc.Tabs(id="result-view", value=VIEWS[0][0], style={"maxWidth": "760px"},
                 children=[dcc.Tab(label=text, value=value, id=f"result-view-{value}", children=views[value],
                                   style=_VIEW_TAB, selected_style=_VIEW_TAB) for value, text in VIEWS]),
        html.P(HISTORY_HINT, id="history-hint", className="message"),
        dcc.Store(id="results-drawn", data=drawn),
    ])


def mounted(state, name) -> html.Div:
    """The tab's page as it is put into the page on first opening: filled in for the newest result of
    campaign ``name`` (one round trip, instead of one for the list, then the views, then the curves)."""
    choice = _listing(state, name, None)
    result = choice[1]
    try:
        key = _drawn_key(state, name, result) if name and result else None
    except SpeciakinError:
        key = None
    runs = _runs(state, name, result)
    return layout((choice, _show(state, name, result, key), runs, _curves(state, name, result, runs[1])))


def prefetch_newest(state, name) -> None:
    """Start loading the newest result of campaign ``name`` in the background (:func:`_prefetch`)."""
    try:
        folder = state.folder(name)
        names = result_folders(folder)
        if names:
            _prefetch(state, *_result_folder(state, name, names[0]))
    except SpeciakinError:
        pass  # the results tab says why when it is opened


def _blank_show(text: str) -> tuple:
    """The views of no result: (rows, warnings, correlation, status, reasons, window, map, message, key)."""
    return [], [], empty_figure(text), "", [], empty_figure(text), empty_figure(text), "", None


def _interval(pair) -> str:
    if not pair:
        return ""
    lo, hi = pair
    return f"{'open' if lo is None else f'{lo:.4g}'} to {'open' if hi is None else f'{hi:.4g}'}"


def _profile(p: dict) -> str:
    """The profile interval, "not computed" when the fit ran without profiles (no open-end flags)."""
    if p.get("profile_open_below") is None and p.get("profile_open_above") is None:
        return "not computed"
    return _interval(p.get("profile_interval"))


def parameter_rows(fit_data: dict, posterior_data: dict | None = None) -> list[dict]:
    """One row per parameter of ``fit.json``: value, standard error, covariance and profile intervals,
    and (when ``posterior.json`` is given) the posterior median and 95 % credible interval."""
    summary = {s.get("name"): s for s in (posterior_data or {}).get("summary", [])}
    rows = []
    for p in fit_data.get("parameters", []):
        notes = [n for n, flag in (("fixed", p.get("fixed")), ("at a bound", p.get("at_bound"))) if flag]
        if p.get("shift_of") is not None and p.get("implied_value") is not None:
            notes.append(f"shift of {p['shift_of']:g}: implies {p['implied_value']:.4g}")
        value, se = p.get("value"), p.get("standard_error")
        post = summary.get(p.get("name"), {})
        if post.get("r_hat") is not None and post["r_hat"] > 1.01:  # Vehtari et al. 2021 (docs/sampling.md)
            notes.append(f"R-hat {post['r_hat']:.3f}")
        rows.append({"name": p.get("name"), "unit": p.get("unit") or "",
                     "value": "" if value is None else f"{value:.5g}", "se": "" if se is None else f"{se:.3g}",
                     "ci": _interval(p.get("covariance_interval")), "profile": _profile(p),
                     "posterior": "not sampled" if not post else _number(post.get("median")),
                     "credible": "" if not post else _interval((post.get("lower_95"), post.get("upper_95"))),
                     "note": ", ".join(notes)})
    return rows


def _number(value) -> str:
    return "" if value is None else f"{value:.5g}"


def correlation_of(fit_data: dict, posterior=None) -> tuple[list[str], np.ndarray, str] | None:
    """(names, correlation matrix, source): the fit's (from its covariance, in ``fit.json``), else the
    posterior samples'; None when neither is available."""
    corr = (fit_data or {}).get("correlation") or {}
    names, matrix = corr.get("names"), corr.get("matrix")
    if names and matrix is not None:
        values = np.array([[np.nan if v is None else v for v in row] for row in matrix], dtype=float)
        if values.shape == (len(names), len(names)) and np.all(np.isfinite(values)):
            return list(names), values, "least-squares covariance"
    if posterior is not None and posterior.samples.shape[0] > 2 and posterior.samples.shape[1] > 1:
        return list(posterior.parameter_names), np.corrcoef(posterior.samples.T), "posterior samples"
    return None


def _result_folder(state, name, result):
    folder = state.folder(name)
    if not result or "/" in str(result) or "\\" in str(result):
        raise InputError("not a result folder", Location(key="result"), result, "a folder listed on the page")
    out = state.folder(f"{name}/{RESULTS_FOLDER}/{result}")
    if out.parent != (folder / RESULTS_FOLDER).resolve():
        raise InputError("not a result folder", Location(key="result"), result, "a folder listed on the page")
    return folder, out


_LOCKS: dict[str, threading.Lock] = {}
_LOCKS_GUARD = threading.Lock()


def _results(state, folder, out):
    """(predictions, model) of ``out``: the fitted curves and bands stored in the result folder
    (:mod:`speciakin.web.stored_predictions`; computed by the pipeline and stored when missing or
    stale) and the campaign's model (colours, compound labels); cached in memory.  One load at a time
    per folder, so a page that asks while the prefetch still loads waits for it instead of loading twice."""
    from speciakin import pipeline

    with _LOCKS_GUARD:
        lock = _LOCKS.setdefault(str(out), threading.Lock())

    def compute():
        return pipeline.load_results(out, campaign=str(folder), model=str(folder / "model.toml"),
                                     check=False).predictions

    files = [out / "fit.json", out / "posterior.h5", *state.inputs_of(folder)]
    with lock:
        predictions = state.cached("predictions", files, lambda: stored_predictions.predictions_of(
            out, folder, compute))
    return predictions, state.model(folder)


def _prefetch(state, folder, out) -> None:
    """Load the newest result in the background when its campaign is chosen (the fitted curves need the
    pipeline's predictions, seconds for the demo), so the results tab answers at once."""
    def load():
        try:
            _results(state, folder, out)
        except (SpeciakinError, OSError, ValueError):
            pass  # the results tab shows the error when it is opened
    threading.Thread(target=load, name="speciakin-prefetch", daemon=True).start()


def _views(state, out):
    """Every view but the curves, from the result folder's files (no model, no simulation), cached:
    table rows, warnings, correlation figure, window status and reasons, window figure, 2-D map."""
    from speciakin.pipeline import outputs

    def read():
        fit_data = json.loads((out / "fit.json").read_text(encoding="utf-8"))
        summary = out / outputs.RESULT_FILES["posterior_summary"]
        posterior_data = json.loads(summary.read_text(encoding="utf-8")) if summary.is_file() else None
        correlation = correlation_of(fit_data)
        if correlation is None and posterior_data is not None:
            correlation = correlation_of(fit_data, outputs.load_posterior(out))
        warnings = [html.Li(w) for w in [*fit_data.get("warnings", []),
                                         *(posterior_data or {}).get("warnings", [])]]
        corr = (empty_figure("no correlation: the fit has no covariance and there is no posterior")
                if correlation is None else correlation_figure(*correlation))
        return (parameter_rows(fit_data, posterior_data), warnings, corr,
                *_window_views(outputs.load_window(out)))

    return state.cached("views", _view_files(out), read)


def _view_files(out) -> list:
    """The files of a result the views are drawn from."""
    return [out / "fit.json", out / "window.json", out / "posterior.json", out / "posterior.h5"]


def _drawn_key(state, name, result) -> str:
    """What the results tab shows: campaign, result and the stamps of the files its views are read from
    (kept in the page's ``results-drawn`` store: a second open of the tab re-sends nothing)."""
    folder, out = _result_folder(state, name, result)
    files = [*_view_files(out), *state.inputs_of(folder)]
    return json.dumps([name, result, [list(s[1:]) for s in file_stamp(files)]])


def _window_views(window):
    if window is None:
        message = "no window in this result (no process file, or the window step was not run)"
        return message, [], empty_figure("no window"), empty_figure("no window, so no map")
    status = f"window status: {window.status or 'not assessed'}; {_window_line(window)}"
    reasons = [html.Li(r) for r in window.status_reasons]
    at_ph, outcomes = outcomes_at_best(window)
    if outcomes:  # as the report's first page states it
        reasons.append(html.Li([html.B(f"Expected outcome at {best_point_words(window, at_ph)}"),
                                " (mol % of the substrate moiety, median and 90 % band)", html.Ul(
            [html.Li(outcome_words(*row), className="expected-outcome") for row in outcomes])],
            className="expected-outcomes"))
    if window.next_steps:  # what would lift the failing gates, under their reasons
        reasons.append(html.Li([html.B("What to do next"), html.Ul(
            [html.Li(step, className="next-step") for step in window.next_steps])], className="next-steps"))
    if window.map_probability is None or window.factor_values is None:
        drawn = empty_figure("no 2-D map: the process file has no [scan.second_factor]")
    else:
        drawn = map_figure(window)
    return status, reasons, window_figure(window), drawn


def _listing(state, name, current) -> tuple[list[dict], str | None]:
    """(result options, the chosen one: ``current`` when listed, else the newest) of campaign ``name``;
    the chosen one is loaded in the background."""
    if not name:
        return [], None
    try:
        folder = state.folder(name)
        names = result_folders(folder)
    except SpeciakinError:
        return [], None
    chosen = current if current in names else (names[0] if names else None)
    if chosen:
        _prefetch(state, *_result_folder(state, name, chosen))
    return [{"label": n, "value": n} for n in names], chosen


def _show(state, name, result, key) -> tuple:
    """Every view but the curves of ``result`` (:func:`_views`), its message and drawn ``key``."""
    if not name or not result:
        return (*_blank_show("no result chosen")[:7], "no result yet: start a fit job on the Jobs tab", None)
    try:
        _, out = _result_folder(state, name, result)
        views = _views(state, out)
    except (SpeciakinError, OSError, ValueError) as exc:
        return (*_blank_show("no result chosen")[:7], f"error: {exc}", None)
    return *views, f"result {result}", key


def _runs(state, name, result) -> tuple[list[dict], str | None, str]:
    """(run options, first run, note on the curves' source) of ``result``."""
    if not name or not result:
        return [], None, ""
    try:
        folder, out = _result_folder(state, name, result)
        predictions, _ = _results(state, folder, out)
    except (SpeciakinError, OSError, ValueError) as exc:
        return [], None, f"the fitted curves cannot be drawn: {exc}"
    names = [r.name for r in predictions.runs] if predictions else []
    note = f"curves: {predictions.source}" if predictions else ""
    return [{"label": r, "value": r} for r in names], names[0] if names else None, note


def _curves(state, name, result, run_name):
    """The fitted curves of run ``run_name`` of ``result`` over its data."""
    if not (run_name and result and name):
        return empty_figure("choose a run")
    try:
        folder, out = _result_folder(state, name, result)
        predictions, model = _results(state, folder, out)
        prediction = predictions.run(run_name)
    except (SpeciakinError, OSError, ValueError, StopIteration) as exc:
        return empty_figure(f"cannot plot: {exc}")
    from speciakin.palette import display_names

    observations = [o for o in predictions.observations if o.run == run_name]
    return fit_run_figure(prediction, observations, compound_colors(model), display_names(model))


def register(app, state) -> None:
    # none of these runs when the tab's page is put in: it comes filled in (:func:`mounted`)
    @app.callback(Output("result-choice", "options"), Output("result-choice", "value"),
                  Input("campaign-choice", "value"), Input("result-refresh", "n_clicks"),
                  State("result-choice", "value"), prevent_initial_call=True)
    def listing(name, _clicks, current):
        return _listing(state, name, current)

    @app.callback(Output("parameter-table", "rowData"), Output("fit-warnings", "children"),
                  Output("correlation-figure", "figure"),
                  Output("window-status", "children"), Output("window-reasons", "children"),
                  Output("window-figure", "figure"), Output("map-figure", "figure"),
                  Output("result-message", "children"), Output("results-drawn", "data"),
                  Input("result-choice", "value"), Input("tabs", "value"), State("campaign-choice", "value"),
                  State("results-drawn", "data"), prevent_initial_call=True)
    def show(result, tab, name, drawn):
        return _show(state, name, result, _unchanged(state, tab, name, result, drawn))

    @app.callback(Output("fit-run", "options"), Output("fit-run", "value"), Output("fit-message", "children"),
                  Input("result-choice", "value"), Input("tabs", "value"), State("campaign-choice", "value"),
                  State("results-drawn", "data"), prevent_initial_call=True)
    def runs(result, tab, name, drawn):
        _unchanged(state, tab, name, result, drawn)
        return _runs(state, name, result)

    @app.callback(Output("fit-figure", "figure"), Input("fit-run", "value"), State("result-choice", "value"),
                  State("campaign-choice", "value"), prevent_initial_call=True)
    def curves(run_name, result, name):
        return _curves(state, name, result, run_name)


def _unchanged(state, tab, name, result, drawn) -> str | None:
    """The key of what the tab would show (:func:`_drawn_key`); raises PreventUpdate (nothing sent)
    while the tab is hidden (results are read only while their tab is shown, so that loading them
    never holds up the other tabs) and when the tab shows that already."""
    from dash.exceptions import PreventUpdate

    if tab != TAB:
        raise PreventUpdate
    try:
        key = _drawn_key(state, name, result) if name and result else None
    except SpeciakinError:
        return None
    if key is not None and key == drawn:
        raise PreventUpdate
    return key


def _window_line(window) -> str:
    from speciakin.pipeline import window_text

    return window_text(window)
