"""Step 3 of the page: start fit, posterior, window, suggestion, report or the whole run as a job;
progress, time left, cancel, downloads of what a finished job wrote."""

from __future__ import annotations

from dash import ALL, Input, Output, State, dcc, html, no_update

from speciakin.errors import SpeciakinError
from speciakin.web.downloads import download_url, result_files
from speciakin.web.job_kinds import JOB_KINDS

__all__ = ["layout", "register", "job_card", "FIELDS"]

#: How often the page asks for the jobs' progress [ms].
POLL_MS = 1000
#: Files of a finished job linked on its card (when it wrote them).
_CARD_FILES = ("report.html", "report.pdf", "report.xlsx", "fit.json", "window.json", "posterior.json",
               "suggest.json")


def _number(key: str, label: str, placeholder: str, low: int, high: int) -> html.Div:
    return html.Div(id=f"job-field-{key}", className="row", children=[
        html.Label(label, htmlFor=f"job-{key}"),
        html.Div(dcc.Input(id=f"job-{key}", type="number", min=low, max=high, step=1, value=None,
                           placeholder=placeholder), style={"width": "11em"})])


def _fields() -> list[html.Div]:
    from speciakin.report.render import REPORT_FORMATS

    return [
        html.Div(id="job-field-source", className="row", children=[
            html.Label("build on", htmlFor="job-source"),
            dcc.Dropdown(id="job-source", placeholder="the newest complete result", style={"minWidth": "360px"})]),
        _number("starts", "least-squares starts", "model file's", 1, 64),
        html.Div(id="job-field-profiles", className="row", children=[
            dcc.Checklist(id="job-profiles", options=[{"label": "profile intervals", "value": "yes"}],
                          value=["yes"])]),
        _number("walkers", "walkers", "max(32, 4 x parameters)", 4, 1000),
        html.Div(id="job-field-until_converged", className="row", children=[
            dcc.RadioItems(id="job-until_converged", inline=True, value="fixed", options=[
                {"label": "fixed number of steps", "value": "fixed"},
                {"label": "until converged, at most", "value": "until"}])]),
        _number("steps", "steps per walker", "2000", 10, 100_000),
        _number("cap", "at most steps (until converged)", "5000", 40, 100_000),
        _number("draws", "window draws", "process file's", 4, 5000),
        _number("suggest_draws", "suggestion draws", "400", 20, 5000),
        html.Div(id="job-field-formats", className="row", children=[
            html.Label("report formats"),
            dcc.Checklist(id="job-formats", inline=True, value=list(REPORT_FORMATS),
                          options=[{"label": f, "value": f} for f in REPORT_FORMATS])]),
    ]


#: Settings the page can give, each in a field ``job-field-<key>`` shown for the kinds that read it.
FIELDS = ("source", "starts", "profiles", "walkers", "until_converged", "steps", "cap", "draws", "suggest_draws",
          "formats")


def layout() -> html.Div:
    return html.Div(className="page", children=[
        html.H3("Start a job"),
        dcc.RadioItems(id="job-kind", value="fit", inline=True, className="row",
                       options=[{"label": kind.label, "value": key} for key, kind in JOB_KINDS.items()]),
        html.Div(_fields(), className="job-settings"),
        html.Button("Start fit and window", id="job-start", n_clicks=0),
        html.Div(id="job-message", className="message", role="status"),
        html.H3("Jobs of this campaign"),
        html.Div(id="job-list"),
        dcc.Interval(id="job-poll", interval=POLL_MS),
    ])


def _duration(seconds: float | None) -> str:
    if seconds is None:
        return "estimating"
    seconds = int(round(seconds))
    return f"{seconds // 60} min {seconds % 60:02d} s" if seconds >= 60 else f"{seconds} s"


def _links(state, view: dict) -> list:
    """Download links of the files a finished job wrote (report, key results)."""
    if view["state"] == "queued" or not view["folder"]:
        return []
    try:
        folder = state.folder(view["campaign"]) / view["folder"]
        names = [n for n in result_files(folder) if n in _CARD_FILES]
    except (SpeciakinError, OSError):
        return []
    result = view["folder"].rsplit("/", 1)[-1]
    return [html.Div(["download: ", *[html.A(n, href=download_url(view["campaign"], result, n), download=n,
                                             className="download") for n in names]])] if names else []


def job_card(view: dict, links: list | None = None) -> html.Div:
    """One job: state, stage, progress bar, time left, message, cancel button, download links."""
    running = view["state"] in ("queued", "running")
    total = max(view["total"], 1)
    where = f"{view['folder']}" if view["folder"] else "(result folder not made yet)"
    parts = [
        html.Div([html.B(f"job {view['id']}"), f"  {view['label']}  -> {where}  ",
                  html.Span(view["state"], className=f"state state-{view['state']}")]),
    ]
    if running:
        counts = f"{view['done']} of {view['total']}" if view["total"] else "started"
        parts += [html.Div([f"stage {view['stage']}: {counts}  ",
                            html.Progress(value=str(view["done"]), max=str(total)),
                            f"  time left in this stage: {'at most ' if view.get('at_most') else ''}"
                            f"{_duration(view['seconds_left'])}; "
                            f"running for {_duration(view['elapsed'])}"]),
                  html.Button("Cancel", id={"type": "job-cancel", "id": view["id"]}, n_clicks=0)]
    else:
        parts.append(html.Div(f"took {_duration(view['elapsed'])}"))
    if view["message"]:
        parts.append(html.Pre(view["message"], className="job-text"))
    return html.Div(parts + (links or []), className="job", id=f"job-{view['id']}")


def _sources(state, name: str | None) -> list[dict]:
    """Complete results of the campaign that hold a fit, newest first (what a job can build on)."""
    from speciakin.pipeline import results_root
    from speciakin.pipeline.contrast import live_runs, window_label

    if not name:
        return []
    try:
        runs = live_runs(results_root(state.folder(name)))
    except (SpeciakinError, OSError):
        return []
    found = []
    for run in runs:
        if run["status"] == "complete" and "fit.json" in run["result_files"]:
            window = window_label(run["summary"])
            found.append({"label": f"{run['id']}  {run['step']}" + (f"  {window}" if window else ""),
                          "value": run["folder"].rsplit("/", 1)[-1]})
    return found


def register(app, state) -> None:
    @app.callback([Output(f"job-field-{key}", "style") for key in FIELDS] + [Output("job-start", "children")],
                  Input("job-kind", "value"), Input("job-until_converged", "value"))
    def fields(kind, until):
        reads = set(JOB_KINDS[kind].reads if kind in JOB_KINDS else ())
        reads -= {"steps"} if until == "until" else {"cap"}  # the one of the two that applies
        shown = [{} if key in reads else {"display": "none"} for key in FIELDS]
        return shown + [f"Start {JOB_KINDS[kind].label if kind in JOB_KINDS else 'job'}"]

    @app.callback(Output("job-source", "options"), Input("campaign-choice", "value"), Input("job-kind", "value"),
                  Input("job-message", "children"))
    def sources(name, _kind, _message):
        return _sources(state, name)

    @app.callback(Output("job-message", "children"), Input("job-start", "n_clicks"),
                  State("campaign-choice", "value"), State("job-kind", "value"),
                  [State(f"job-{key}", "value") for key in FIELDS], prevent_initial_call=True)
    def start(clicks, name, kind, *values):
        if not clicks:
            return no_update
        if not name:
            return "choose a campaign folder first"
        given = dict(zip(FIELDS, values))
        given["profiles"] = bool(given["profiles"])
        given["until_converged"] = given["until_converged"] == "until"
        try:
            job = state.board.submit(kind, name, state.folder(name), given)
        except SpeciakinError as exc:
            return f"error: {exc}"
        return f"started job {job.id} ({JOB_KINDS[kind].label}); it writes into a new folder under {name}/results/"

    @app.callback(Output("job-list", "children"), Input("job-poll", "n_intervals"), Input("campaign-choice", "value"),
                  Input("job-message", "children"))
    def poll(_n, name, _message):
        jobs = state.board.jobs(name) if name else []
        if not jobs:
            return html.P("no job yet in this server session")
        return [job_card(view, _links(state, view)) for view in (j.view() for j in jobs)]

    @app.callback(Output("job-message", "children", allow_duplicate=True),
                  Input({"type": "job-cancel", "id": ALL}, "n_clicks"), prevent_initial_call=True)
    def cancel(clicks):
        from dash import ctx

        if not ctx.triggered_id or not ctx.triggered or not ctx.triggered[0].get("value"):
            return no_update
        job_id = ctx.triggered_id["id"]
        return (f"asked job {job_id} to stop; it stops at its next progress point"
                if state.board.cancel(job_id) else f"job {job_id} is not running")
