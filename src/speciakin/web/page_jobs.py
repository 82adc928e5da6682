"""Step 3 of the page: start a fit (and window) as a job; progress, time left, cancel."""

from __future__ import annotations

from dash import ALL, Input, Output, State, dcc, html, no_update

from speciakin.errors import SpeciakinError

__all__ = ["layout", "register", "job_card"]

#: How often the page asks for the jobs' progress [ms].
POLL_MS = 1000


def layout() -> html.Div:
    return html.Div(className="page", children=[
        html.H3("Start a job"),
        html.Div(className="row", children=[
            html.Label("least-squares starts", htmlFor="job-starts"),
            html.Div(dcc.Input(id="job-starts", type="number", min=1, max=64, step=1, value=None,
                               placeholder="model file's"), style={"width": "11em"}),
            dcc.Checklist(id="job-profiles", options=[{"label": "profile intervals", "value": "yes"}],
                          value=["yes"]),
            html.Label("window draws", htmlFor="job-draws"),
            html.Div(dcc.Input(id="job-draws", type="number", min=4, max=5000, step=1, value=None,
                               placeholder="process file's"), style={"width": "11em"}),
            html.Button("Start fit and window", id="job-start", n_clicks=0),
        ]),
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


def job_card(view: dict) -> html.Div:
    """One job: state, stage, progress bar, time left, message, cancel button."""
    running = view["state"] in ("queued", "running")
    total = max(view["total"], 1)
    parts = [
        html.Div([html.B(f"job {view['id']}"), f"  {view['kind']}  -> {view['folder']}  ",
                  html.Span(view["state"], className=f"state state-{view['state']}")]),
    ]
    if running:
        parts += [html.Div([f"stage {view['stage']}: {view['done']} of {view['total']}  ",
                            html.Progress(value=str(view["done"]), max=str(total)),
                            f"  time left in this stage: {_duration(view['seconds_left'])}; "
                            f"running for {_duration(view['elapsed'])}"]),
                  html.Button("Cancel", id={"type": "job-cancel", "id": view["id"]}, n_clicks=0)]
    else:
        parts.append(html.Div(f"took {_duration(view['elapsed'])}"))
    if view["message"]:
        parts.append(html.Pre(view["message"], className="job-text"))
    return html.Div(parts, className="job", id=f"job-{view['id']}")


def register(app, state) -> None:
    @app.callback(Output("job-message", "children"), Input("job-start", "n_clicks"),
                  State("campaign-choice", "value"), State("job-starts", "value"), State("job-profiles", "value"),
                  State("job-draws", "value"), prevent_initial_call=True)
    def start(clicks, name, starts, profiles, draws):
        if not clicks:
            return no_update
        if not name:
            return "choose a campaign folder first"
        try:
            folder = state.folder(name)
            job = state.board.submit("fit", name, folder, {
                "starts": int(starts) if starts else None, "profiles": bool(profiles),
                "draws": int(draws) if draws else None})
        except (SpeciakinError, FileExistsError) as exc:
            return f"error: {exc}"
        return f"started job {job.id}; it writes into {name}/{job.folder}"

    @app.callback(Output("job-list", "children"), Input("job-poll", "n_intervals"), Input("campaign-choice", "value"),
                  Input("job-message", "children"))
    def poll(_n, name, _message):
        jobs = state.board.jobs(name) if name else []
        if not jobs:
            return html.P("no job yet in this server session")
        return [job_card(j.view()) for j in jobs]

    @app.callback(Output("job-message", "children", allow_duplicate=True),
                  Input({"type": "job-cancel", "id": ALL}, "n_clicks"), prevent_initial_call=True)
    def cancel(clicks):
        from dash import ctx

        if not ctx.triggered_id or not ctx.triggered or not ctx.triggered[0].get("value"):
            return no_update
        job_id = ctx.triggered_id["id"]
        return (f"asked job {job_id} to stop; it stops at its next progress point"
                if state.board.cancel(job_id) else f"job {job_id} is not running")
