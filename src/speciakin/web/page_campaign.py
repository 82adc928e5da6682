"""Step 1 of the page: open or create a campaign, upload a workbook, see the check and the raw data."""

from __future__ import annotations

import base64
import binascii
import re

import dash_ag_grid as dag
from dash import Input, Output, State, dcc, html

from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web.figures import raw_run_figure
from speciakin.web.paths import MAX_UPLOAD_BYTES, campaign_folders, store_workbook

__all__ = ["layout", "register", "check_rows", "folder_picker", "CHECK_COLUMNS"]

#: Columns of the check table: (field, header).
CHECK_COLUMNS = (("severity", "severity"), ("sheet", "sheet"), ("row", "row"), ("column", "column"),
                 ("message", "problem"), ("value", "value"), ("expected", "expected"), ("where", "file / key"))
_WRAPPED = ("message", "value", "expected")
_FLEX = {"message": 4, "expected": 2, "column": 2}
_NEW_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")


def folder_picker(label: str, prefix: str, placeholder: str) -> html.Div:
    """A labelled dropdown ``<prefix>-choice`` with a ``<prefix>-refresh`` button."""
    return html.Div(className="row", children=[
        html.Label(label, htmlFor=f"{prefix}-choice"),
        dcc.Dropdown(id=f"{prefix}-choice", placeholder=placeholder, clearable=False, style={"minWidth": "320px"}),
        html.Button("Refresh list", id=f"{prefix}-refresh", n_clicks=0),
    ])


def layout() -> html.Div:
    return html.Div(className="page", children=[
        folder_picker("Campaign folder", "campaign", "choose a campaign folder"),
        html.Details([
            html.Summary("Create a campaign or upload a filled workbook"),
            html.Div(className="row", children=[
                html.Div(dcc.Input(id="new-name", placeholder="new folder name, e.g. amine-acylation"),
                         style={"width": "24em"}),
                html.Button("Create from the templates", id="new-create", n_clicks=0),
            ]),
            dcc.Upload(id="upload", className="upload", max_size=MAX_UPLOAD_BYTES, accept=".xlsx",
                       children=html.Div("Drop a filled .xlsx workbook here (or click) to put it into the chosen "
                                         f"campaign folder; at most {MAX_UPLOAD_BYTES // 2**20} MB. "
                                         "A workbook it replaces is kept in previous-workbooks/.")),
        ]),
        html.Div(id="campaign-message", className="message", role="status"),
        html.H3("Check"),
        html.Div(id="check-summary"),
        dag.AgGrid(id="check-table", columnDefs=[{"field": f, "headerName": h, "flex": _FLEX.get(f, 1),
                                                  "wrapText": f in _WRAPPED, "autoHeight": f in _WRAPPED}
                                                 for f, h in CHECK_COLUMNS],
                   rowData=[], defaultColDef={"sortable": True, "resizable": True, "filter": True},
                   dashGridOptions={"domLayout": "autoHeight"}, style={"width": "100%"}),
        html.H3("Raw data per run"),
        dcc.Dropdown(id="raw-run", placeholder="choose a run", clearable=False, style={"maxWidth": "320px"}),
        html.Div(id="raw-figure-box", children=html.P("choose a campaign", className="message")),
    ])


def check_rows(report) -> list[dict]:
    """One row per problem: severity, sheet, row, column, message, value, expected, file or key."""
    rows = []
    for p in report.problems:
        loc = p.location
        where = ", ".join(x for x in ((loc.file or "").rsplit("/", 1)[-1],
                                      f"key {loc.key}" if loc.key else "",
                                      f"line {loc.line}" if loc.line else "") if x)
        rows.append({"severity": p.severity, "sheet": loc.sheet or "", "row": loc.row, "column": loc.column or "",
                     "message": p.message, "value": p.to_dict()["value"] or "", "expected": p.expected or "",
                     "where": where})
    return rows


def _check(state, name):
    from speciakin.data import check_campaign

    folder = state.folder(name)
    model = folder / "model.toml"
    return state.cached("check", state.inputs_of(folder), lambda: check_campaign(
        folder, model=model if model.is_file() else None)), folder


def _campaign(state, folder):
    from speciakin.data import load_campaign

    return state.cached("campaign", state.inputs_of(folder), lambda: load_campaign(folder))


def register(app, state) -> None:
    @app.callback(Output("campaign-choice", "options"), Output("campaign-choice", "value"),
                  Output("campaign-message", "children"),
                  Input("campaign-refresh", "n_clicks"), Input("new-create", "n_clicks"),
                  Input("upload", "contents"), State("upload", "filename"), State("new-name", "value"),
                  State("campaign-choice", "value"), State("campaign", "data"))
    def choose(_refresh, create, contents, filename, new_name, shown, remembered):
        from dash import ctx

        current = shown or remembered  # the store keeps the choice over a page reload
        message = ""
        chosen = current
        try:
            if ctx.triggered_id == "new-create" and create:
                chosen, message = _create(state, new_name)
            elif ctx.triggered_id == "upload" and contents:
                message = _upload(state, current, contents, filename)
        except SpeciakinError as exc:
            message = f"error: {exc}"
        names = campaign_folders(state.root)
        if chosen not in names:
            chosen = names[0] if len(names) == 1 else None
        return [{"label": n, "value": n} for n in names], chosen, message

    @app.callback(Output("campaign", "data"), Input("campaign-choice", "value"))
    def remember(value):
        return value

    @app.callback(Output("check-summary", "children"), Output("check-table", "rowData"),
                  Output("raw-run", "options"), Output("raw-run", "value"),
                  Input("campaign-choice", "value"), Input("campaign-message", "children"))
    def check(name, _message):
        if not name:
            return "choose a campaign folder", [], [], None
        try:
            report, folder = _check(state, name)
        except SpeciakinError as exc:
            return f"error: {exc}", [], [], None
        summary = (f"{len(report.errors)} error(s), {len(report.warnings)} warning(s); {report.runs} run(s), "
                   f"{report.hplc_values} HPLC values, {report.log_readings} log readings. "
                   + _verdict(report))
        runs = []
        if report.ok:
            try:
                runs = [r.name for r in _campaign(state, folder).runs]
            except SpeciakinError:
                runs = []
        return (html.Span(summary, className="ok" if report.ok else "bad"), check_rows(report),
                [{"label": r, "value": r} for r in runs], runs[0] if runs else None)

    @app.callback(Output("raw-figure-box", "children"), Input("raw-run", "value"), State("campaign-choice", "value"))
    def raw(run_name, name):
        # the figure (and the plotting library with it) loads only when there is something to draw,
        # so the check above shows first
        if not name or not run_name:
            return html.P("raw data are plotted once the campaign has no check errors", className="message")
        try:
            folder = state.folder(name)
            campaign = _campaign(state, folder)
            run = campaign.run(run_name)
        except (SpeciakinError, KeyError) as exc:
            return html.P(f"cannot plot: {exc}", className="message")
        from speciakin.palette import SpeciesColors

        figure = raw_run_figure(run, SpeciesColors(sorted({c.molecule for c in campaign.compounds})))
        return dcc.Graph(id="raw-figure", figure=figure, config={"displaylogo": False})


def _verdict(report) -> str:
    if not report.ok:
        return "Nothing can be fitted until the errors are fixed."
    if report.runs == 0:
        return "Nothing to fit yet: fill in the workbook and upload it."
    return "Ready to fit; review the warnings first." if report.warnings else "Ready to fit."


def _create(state, new_name):
    from speciakin.data import new_campaign

    name = (new_name or "").strip()
    if not _NEW_NAME.match(name):
        raise InputError("not a usable folder name", Location(key="new folder"), name,
                         "letters, digits, '.', '_' or '-' (at most 64), starting with a letter or digit")
    folder = state.folder(name)
    written = new_campaign(folder)
    return name, f"created {name}: " + ", ".join(p.name for p in written) + "; fill in the workbook and upload it"


def _upload(state, current, contents, filename):
    if not current:
        raise InputError("choose or create a campaign folder before uploading", Location(key="campaign"))
    folder = state.folder(current)
    try:
        data = base64.b64decode(contents.split(",", 1)[1], validate=True)
    except (IndexError, ValueError, binascii.Error):
        raise InputError("the upload could not be read", Location(file=str(filename)), expected="an .xlsx file")
    path = store_workbook(folder, filename, data)
    return f"stored {path.name} in {current}; the check below is for this workbook"
