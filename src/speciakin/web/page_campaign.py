"""Step 1 of the page: open or create a campaign, upload a workbook, see the check and the raw data."""

from __future__ import annotations

import base64
import binascii
import re

from dash import Input, Output, State, dcc, html

from speciakin.errors import InputError, Location, SpeciakinError
from speciakin.web.figures import compound_colors, empty_figure, raw_run_figure
from speciakin.web.paths import MAX_UPLOAD_BYTES, campaign_folders, store_workbook

__all__ = ["layout", "register", "check_rows", "check_cells", "check_table", "folder_picker", "campaign_view", "initial_choice",
           "CHECK_COLUMNS", "GRAPH_CONFIG"]

#: Columns of the check table: (field, header).
CHECK_COLUMNS = (("severity", "severity"), ("sheet", "sheet"), ("row", "row"), ("column", "column"),
                 ("message", "problem"), ("value", "value"), ("expected", "expected"), ("where", "file / key"))
#: The raw-data graph's Plotly config.
GRAPH_CONFIG = {"displaylogo": False}
_NEW_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$")


def folder_picker(label: str, prefix: str, placeholder: str, options=None, value=None) -> html.Div:
    """A labelled dropdown ``<prefix>-choice`` (``options``, ``value`` given or empty) with a
    ``<prefix>-refresh`` button."""
    return html.Div(className="row", children=[
        html.Label(label, htmlFor=f"{prefix}-choice"),
        dcc.Dropdown(id=f"{prefix}-choice", options=options or [], value=value, placeholder=placeholder,
                     clearable=False, style={"minWidth": "320px"}),
        html.Button("Refresh list", id=f"{prefix}-refresh", n_clicks=0),
    ])


def layout(view: tuple | None = None, choice: tuple = ((), None)) -> html.Div:
    """The tab's page; ``view`` (:func:`campaign_view`) and ``choice`` (campaign names, the chosen one)
    fill it in, so that a page opened on a campaign shows its check and raw data without a round trip."""
    summary, rows, runs, run, figure, drawn = view or campaign_view(None, None)
    names, chosen = choice
    return html.Div(className="page", children=[
        folder_picker("Campaign folder", "campaign", "choose a campaign folder", _options(names), chosen),
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
        html.Div(summary, id="check-summary"),
        # a plain table, not the grid of the other tabs: the first view then needs no grid code at all
        # (evaluating it was a fifth of opening the page; docs/web.md, Speed)
        html.Table(check_table(rows), id="check-table", className="check"),
        html.H3("Raw data per run"),
        dcc.Dropdown(id="raw-run", options=runs, value=run, placeholder="choose a run", clearable=False,
                     style={"maxWidth": "320px"}),
        # the graph is in the page from the start, so the browser loads the plotting library at once
        html.Div(id="raw-figure-box", children=dcc.Graph(id="raw-figure", figure=figure, config=GRAPH_CONFIG)),
        dcc.Store(id="raw-drawn", data=drawn),
    ])


def initial_choice(state) -> tuple[list[str], str | None]:
    """(campaign names under the root, the one a new page opens: the only one, else none)."""
    names = campaign_folders(state.root)
    return names, names[0] if len(names) == 1 else None


def _options(names) -> list[dict]:
    return [{"label": n, "value": n} for n in names]


def campaign_view(state, name) -> tuple:
    """What the tab shows for campaign ``name``: (check summary, check rows, run options, chosen run,
    raw figure of that run, ``[name, run]`` drawn)."""
    if not name:
        return "choose a campaign folder", [], [], None, empty_figure("choose a campaign"), None
    try:
        report, folder = _check(state, name)
    except SpeciakinError as exc:
        return f"error: {exc}", [], [], None, empty_figure("no raw data: the campaign cannot be read"), None
    counts = (f"{report.runs} run(s), {report.hplc_values} HPLC values, {report.log_readings} log readings"
              + (f" (not modelled, counted in their samples' totals: "
                 + ", ".join(f"{c} ({n} values)" for c, n in report.not_modelled.items()) + ")"
                 if report.not_modelled else "")
              if report.imported else "runs not counted (the workbook did not import)")
    summary = f"{len(report.errors)} error(s), {len(report.warnings)} warning(s); {counts}. " + _verdict(report)
    runs = []
    if not report.fit_errors:  # the raw data need a readable workbook and model, not the process file
        try:
            runs = [r.name for r in _campaign(state, folder).runs]
        except SpeciakinError:
            runs = []
    run = runs[0] if runs else None
    return (html.Span(summary, className="ok" if report.ok else "bad"), check_rows(report), _options(runs), run,
            _raw_figure(state, name, run), [name, run])


def check_cells(rows: list[dict]) -> list[tuple[str, list[str]]]:
    """(severity, the texts of its cells in :data:`CHECK_COLUMNS` order) per problem (:func:`check_rows`),
    errors first, then in the order of the check: the rows of the check table, as the app and the first
    view's copy (``web.first_view``) draw them."""
    order = sorted(range(len(rows)), key=lambda i: (rows[i]["severity"] != "error", i))
    return [(rows[i]["severity"], ["" if rows[i][f] is None else str(rows[i][f]) for f, _ in CHECK_COLUMNS])
            for i in order]


def check_table(rows: list[dict]) -> list:
    """The check table's header and one row per problem (:func:`check_cells`); each cell names its
    column (``data-col``)."""
    head = html.Thead(html.Tr([html.Th(h, **{"data-col": f}) for f, h in CHECK_COLUMNS]))
    body = [html.Tr([html.Td(text, **{"data-col": f}) for (f, _), text in zip(CHECK_COLUMNS, cells)],
                    className=f"problem {severity}") for severity, cells in check_cells(rows)]
    return [head, html.Tbody(body)]


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
    from speciakin.pipeline.inputs import MODEL_FILE, PROCESS_FILE, check_inputs

    folder = state.folder(name)
    model, process = folder / MODEL_FILE, folder / PROCESS_FILE
    return state.cached("check", state.inputs_of(folder), lambda: check_inputs(
        folder, model if model.is_file() else None, process if process.is_file() else None)), folder


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
        from dash import ctx, no_update

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
        if ctx.triggered_id is None and chosen == shown:
            return no_update, no_update, no_update  # the page came with this campaign filled in
        return _options(names), chosen, message

    @app.callback(Output("campaign", "data"), Input("campaign-choice", "value"))
    def remember(value):
        return value

    @app.callback(Output("check-summary", "children"), Output("check-table", "children"),
                  Output("raw-run", "options"), Output("raw-run", "value"),
                  Output("raw-figure", "figure"), Output("raw-drawn", "data"),
                  Input("campaign-choice", "value"), Input("campaign-message", "children"),
                  prevent_initial_call=True)
    def check(name, _message):
        # the raw data of the first run come with the check: one round trip, not two
        summary, rows, *rest = campaign_view(state, name)
        return (summary, check_table(rows), *rest)

    @app.callback(Output("raw-figure", "figure", allow_duplicate=True),
                  Output("raw-drawn", "data", allow_duplicate=True),
                  Input("raw-run", "value"), State("campaign-choice", "value"), State("raw-drawn", "data"),
                  prevent_initial_call=True)
    def raw(run_name, name, drawn):
        from dash.exceptions import PreventUpdate

        if [name, run_name] == drawn:
            raise PreventUpdate  # drawn with the check
        return _raw_figure(state, name, run_name), [name, run_name]


def _raw_figure(state, name, run_name):
    """The raw data of run ``run_name`` of campaign ``name``, or a blank figure saying why there are none."""
    if not name or not run_name:
        return empty_figure("raw data are plotted once the campaign has no check errors")
    try:
        folder = state.folder(name)
        campaign = _campaign(state, folder)
        run = campaign.run(run_name)
    except (SpeciakinError, KeyError) as exc:
        return empty_figure(f"cannot plot: {exc}")
    try:
        model = state.model(folder)
    except (SpeciakinError, OSError):
        model = None  # the check names what is wrong with the model file
    colors = compound_colors(model, [c.molecule for c in campaign.compounds])
    # kept while the campaign's files are unchanged: every new page carries the first run's figure
    return state.cached(f"raw-figure {run_name}", state.inputs_of(folder), lambda: raw_run_figure(run, colors))


def _verdict(report) -> str:
    if report.fit_errors:
        return "Nothing can be fitted until the errors are fixed."
    if not report.ok:
        return "The fit can run; the pH window needs the process file's errors fixed first."
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
