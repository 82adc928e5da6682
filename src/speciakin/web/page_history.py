"""Step 5 of the page: every result of the campaign (from its results index), the files of one
result to download, and two results side by side (the comparison behind ``speciakin contrast``)."""

from __future__ import annotations

import dash_ag_grid as dag
from dash import Input, Output, State, dcc, html, no_update

from speciakin.errors import SpeciakinError
from speciakin.web.downloads import download_url, register_route, result_files

__all__ = ["layout", "register", "history_rows", "HISTORY_COLUMNS", "contrast_view"]

#: Columns of the history table: (field, header).
HISTORY_COLUMNS = (("started", "started (UTC)"), ("id", "id"), ("step", "step"), ("status", "status"),
                   ("window", "pH window"), ("window_status", "window status"), ("chi2", "reduced chi-square"),
                   ("elapsed", "wall time [s]"), ("command", "command"))
#: (flex, minimum width [px]) of the history table's columns; only the command wraps.
_WIDTHS = {"started": (0, 180), "id": (0, 215), "step": (0, 80), "status": (0, 105), "window": (0, 140),
           "window_status": (0, 110), "chi2": (0, 95), "elapsed": (0, 80), "command": (1, 220)}
#: How often the table is read again while the tab is open [ms].
POLL_MS = 4000


def layout() -> html.Div:
    return html.Div(className="page", children=[
        html.Div(className="row", children=[
            html.H3("Every result of this campaign"),
            html.Button("Refresh", id="history-refresh", n_clicks=0)]),
        html.Div(id="history-message", className="message"),
        dag.AgGrid(id="history-table", rowData=[], columnDefs=[
            {"field": f, "headerName": h, **({"flex": 1} if _WIDTHS[f][0] else {"width": _WIDTHS[f][1]}),
             "minWidth": _WIDTHS[f][1], "wrapText": f == "command", "autoHeight": f == "command",
             "filter": f in ("step", "status", "window_status")}
            for f, h in HISTORY_COLUMNS],
            defaultColDef={"sortable": True, "resizable": True, "wrapHeaderText": True, "autoHeaderHeight": True},
            dashGridOptions={"domLayout": "autoHeight"}, style={"width": "100%"}),
        html.H3("Files of a result"),
        dcc.Dropdown(id="files-choice", placeholder="choose a result", clearable=False,
                     style={"maxWidth": "420px"}),
        html.Ul(id="files-list"),
        html.H3("Two results side by side"),
        html.Div(className="row", children=[
            html.Label("A", htmlFor="compare-a"),
            dcc.Dropdown(id="compare-a", placeholder="result A", style={"minWidth": "300px"}),
            html.Label("B", htmlFor="compare-b"),
            dcc.Dropdown(id="compare-b", placeholder="result B", style={"minWidth": "300px"})]),
        html.Div(id="compare-view"),
        dcc.Interval(id="history-poll", interval=POLL_MS),
    ])


def _number(x, digits: str = ".4g") -> str:
    return "" if x is None else format(x, digits)


def history_rows(runs: list[dict]) -> list[dict]:
    """One row per recorded run (``contrast.live_runs``): time, id, step, status, window and its status."""
    rows = []
    for run in runs:
        summary = run.get("summary") or {}
        window = summary.get("window")
        shown = ("no window" if "window_status" in summary else "") if not window \
            else f"pH {window[0]:.2f} to {window[1]:.2f}"
        rows.append({"started": run["started"], "id": run["id"], "step": run["step"], "status": run["status"],
                     "window": shown, "window_status": summary.get("window_status") or "",
                     "chi2": _number(summary.get("reduced_chi_square"), ".3g"),
                     "elapsed": _number(run.get("elapsed_s"), ".1f"), "command": run["command"],
                     "error": summary.get("error") or ""})
    return rows


def _table(header: list[str], rows: list[list], caption: str, compare: bool = True) -> html.Div:
    """A table of text cells; a row whose A and B differ is marked."""
    body = []
    for row in rows:
        cells = ["" if c is None else str(c) for c in row]
        differs = compare and len(cells) >= 3 and cells[1] != cells[2]
        body.append(html.Tr([html.Td(c) for c in cells], className="differs" if differs else None))
    return html.Div([html.H4(caption), html.Table([html.Thead(html.Tr([html.Th(h) for h in header])),
                                                   html.Tbody(body)], className="compare")])


def contrast_view(data: dict) -> list:
    """The side-by-side view of :func:`speciakin.pipeline.contrast.contrast` as page tables."""
    inputs = data["inputs"]
    changed = [row for row in inputs if row[3] != "same"]
    return [
        _table(["", "A", "B"], data["runs"], "The two results"),
        _table(["", "A", "B"], data["window"], "pH window and its status"),
        _table(["parameter", "A", "B"], data["parameters"],
               "Parameters: fit value [profile, else covariance, 95 % interval]; "
               "posterior median [2.5 %, 97.5 %]"),
        html.P(f"inputs: {len(changed)} of {len(inputs)} file(s) differ" if changed
               else f"inputs: the same {len(inputs)} file(s) (SHA-256)", id="compare-inputs-summary"),
        _table(["file", "A (SHA-256)", "B (SHA-256)", ""], inputs, "Input files", compare=False),
    ]


def register(app, state) -> None:
    from speciakin.pipeline import results_root
    from speciakin.pipeline.contrast import contrast, live_runs

    register_route(app.server, state.root)

    def runs_of(name):
        return live_runs(results_root(state.folder(name)))

    @app.callback(Output("history-table", "rowData"), Output("history-message", "children"),
                  Output("files-choice", "options"), Output("compare-a", "options"), Output("compare-b", "options"),
                  Input("campaign-choice", "value"), Input("history-refresh", "n_clicks"),
                  Input("history-poll", "n_intervals"), Input("tabs", "value"), State("history-table", "rowData"))
    def listing(name, _clicks, _n, tab, current):
        from dash import ctx

        if ctx.triggered_id == "history-poll" and tab != "history":
            return (no_update,) * 5
        if not name:
            return [], "choose a campaign folder first", [], [], []
        try:
            rows = history_rows(runs_of(name))
        except (SpeciakinError, OSError) as exc:
            return [], f"error: {exc}", [], [], []
        if ctx.triggered_id == "history-poll" and rows == current:
            return (no_update,) * 5
        options = [{"label": f"{r['id']}  {r['step']}  {r['status']}", "value": r["id"]} for r in rows]
        message = (f"{len(rows)} result(s) recorded in {name}/results/index.sqlite" if rows
                   else "no result recorded yet: start a job on the Jobs tab")
        return rows, message, options, options, options

    @app.callback(Output("files-list", "children"), Input("files-choice", "value"), State("campaign-choice", "value"))
    def files(run_id, name):
        if not (run_id and name):
            return []
        try:
            run = next((r for r in runs_of(name) if r["id"] == run_id), None)
            if run is None:
                return [html.Li("not in the index of this campaign")]
            result = run["folder"].rsplit("/", 1)[-1]
            names = result_files(results_root(state.folder(name)) / run["folder"])
        except (SpeciakinError, OSError) as exc:
            return [html.Li(f"error: {exc}")]
        if not names:
            return [html.Li("no file in this result")]
        return [html.Li(html.A(n, href=download_url(name, result, n), download=n.rsplit("/", 1)[-1],
                               className="download")) for n in names]

    @app.callback(Output("compare-view", "children"), Input("compare-a", "value"), Input("compare-b", "value"),
                  State("campaign-choice", "value"))
    def compare(a, b, name):
        if not (a and b and name):
            return html.P("choose two results")
        try:
            return contrast_view(contrast(results_root(state.folder(name)), a, b))
        except (SpeciakinError, OSError) as exc:
            return html.P(f"error: {exc}")
