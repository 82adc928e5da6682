"""Step 4 of the page: a result folder's parameters, fitted curves and pH window; step 5 (history) placeholder."""

from __future__ import annotations

import json

import dash_ag_grid as dag
from dash import Input, Output, State, dcc, html

from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web.figures import empty_figure, fit_run_figure, window_figure
from speciakin.web.page_campaign import folder_picker
from speciakin.web.paths import RESULTS_FOLDER, result_folders

__all__ = ["layout", "register", "parameter_rows", "HISTORY_NOT_YET", "PARAMETER_COLUMNS"]

HISTORY_NOT_YET = ("History: not yet available. Every result of the campaign from the results index, and two "
                   "results side by side, come in a later version; until then choose one result folder above.")
#: Columns of the parameter table: (field, header).
PARAMETER_COLUMNS = (("name", "parameter"), ("unit", "unit"), ("value", "value"), ("se", "standard error"),
                     ("ci", "95 % interval (covariance)"), ("profile", "95 % interval (profile)"),
                     ("note", "note"))


def layout() -> html.Div:
    return html.Div(className="page", children=[
        folder_picker("Result folder", "result", "choose a result"),
        html.Div(id="result-message", className="message"),
        html.H3("Fitted parameters"),
        dag.AgGrid(id="parameter-table", columnDefs=[{"field": f, "headerName": h,
                                                      "flex": 2 if f in ("name", "note", "ci") else 1}
                                                     for f, h in PARAMETER_COLUMNS],
                   rowData=[], defaultColDef={"sortable": True, "resizable": True},
                   dashGridOptions={"domLayout": "autoHeight"}, style={"width": "100%"}),
        html.Ul(id="fit-warnings"),
        html.H3("pH window"),
        html.Div(id="window-status", className="status"),
        html.Ul(id="window-reasons"),
        dcc.Graph(id="window-figure", figure=empty_figure("choose a result"), config={"displaylogo": False}),
        html.H3("Fitted curves over data"),
        dcc.Dropdown(id="fit-run", placeholder="choose a run", clearable=False, style={"maxWidth": "320px"}),
        dcc.Graph(id="fit-figure", figure=empty_figure("choose a result"), config={"displaylogo": False}),
        html.H3("History"),
        html.P(HISTORY_NOT_YET, id="history-placeholder", className="placeholder"),
    ])


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


def parameter_rows(fit_data: dict) -> list[dict]:
    """One row per parameter of ``fit.json``: value, standard error, covariance and profile intervals."""
    rows = []
    for p in fit_data.get("parameters", []):
        notes = [n for n, flag in (("fixed", p.get("fixed")), ("at a bound", p.get("at_bound"))) if flag]
        if p.get("shift_of") is not None and p.get("implied_value") is not None:
            notes.append(f"shift of {p['shift_of']:g}: implies {p['implied_value']:.4g}")
        value, se = p.get("value"), p.get("standard_error")
        rows.append({"name": p.get("name"), "unit": p.get("unit") or "",
                     "value": "" if value is None else f"{value:.5g}", "se": "" if se is None else f"{se:.3g}",
                     "ci": _interval(p.get("covariance_interval")), "profile": _profile(p),
                     "note": ", ".join(notes)})
    return rows


def _result_folder(state, name, result):
    folder = state.folder(name)
    if not result or "/" in str(result) or "\\" in str(result):
        raise InputError("not a result folder", Location(key="result"), result, "a folder listed on the page")
    out = state.folder(f"{name}/{RESULTS_FOLDER}/{result}")
    if out.parent != (folder / RESULTS_FOLDER).resolve():
        raise InputError("not a result folder", Location(key="result"), result, "a folder listed on the page")
    return folder, out


def _results(state, folder, out):
    from speciakin import pipeline

    files = [out / "fit.json", out / "window.json", *state.inputs_of(folder)]
    return state.cached("results", files, lambda: pipeline.load_results(
        out, campaign=str(folder), model=str(folder / "model.toml"), check=False))


def register(app, state) -> None:
    @app.callback(Output("result-choice", "options"), Output("result-choice", "value"),
                  Input("campaign-choice", "value"), Input("result-refresh", "n_clicks"),
                  State("result-choice", "value"))
    def listing(name, _clicks, current):
        if not name:
            return [], None
        try:
            names = result_folders(state.folder(name))
        except SpeciakinError:
            return [], None
        return [{"label": n, "value": n} for n in names], current if current in names else (names[0] if names else None)

    @app.callback(Output("parameter-table", "rowData"), Output("fit-warnings", "children"),
                  Output("window-status", "children"), Output("window-reasons", "children"),
                  Output("window-figure", "figure"), Output("fit-run", "options"), Output("fit-run", "value"),
                  Output("result-message", "children"),
                  Input("result-choice", "value"), State("campaign-choice", "value"))
    def show(result, name):
        blank = ([], [], "", [], empty_figure("no result chosen"), [], None)
        if not name or not result:
            return *blank, "no result yet: start a fit job on the Jobs tab"
        try:
            folder, out = _result_folder(state, name, result)
            fit_data = json.loads((out / "fit.json").read_text(encoding="utf-8"))
            results = _results(state, folder, out)
        except (SpeciakinError, OSError, ValueError) as exc:
            return *blank, f"error: {exc}"
        warnings = [html.Li(w) for w in fit_data.get("warnings", [])]
        window = results.window
        if window is None:
            status, reasons, figure = "no window in this result (no process file)", [], empty_figure("no window")
        else:
            status = f"window status: {window.status or 'not evaluated'}; {_window_line(window)}"
            reasons = [html.Li(r) for r in window.status_reasons]
            figure = window_figure(window)
        runs = [r.name for r in results.predictions.runs] if results.predictions else []
        return (parameter_rows(fit_data), warnings, status, reasons, figure,
                [{"label": r, "value": r} for r in runs], runs[0] if runs else None, f"result {result}")

    @app.callback(Output("fit-figure", "figure"), Input("fit-run", "value"), State("result-choice", "value"),
                  State("campaign-choice", "value"))
    def curves(run_name, result, name):
        if not (run_name and result and name):
            return empty_figure("choose a run")
        try:
            folder, out = _result_folder(state, name, result)
            results = _results(state, folder, out)
            prediction = results.predictions.run(run_name)
        except (SpeciakinError, OSError, StopIteration) as exc:
            return empty_figure(f"cannot plot: {exc}")
        from speciakin.palette import SpeciesColors

        colors = SpeciesColors([m.name for m in results.model.molecules])
        observations = [o for o in results.predictions.observations if o.run == run_name]
        return fit_run_figure(prediction, observations, colors)


def _window_line(window) -> str:
    from speciakin.pipeline import window_text

    return window_text(window)
