"""The Dash application of the workbench and the server that runs it.

:func:`create_app` builds the page for one campaign root; :func:`serve`
runs it.  Loopback is the default; another host is refused unless a token is
required, and then every request without the token gets 403 (the token is
printed at start, given once as ``?token=...`` and then kept in a cookie).
"""

from __future__ import annotations

import hmac
import ipaddress
import secrets
from pathlib import Path

import dash_ag_grid as dag
from dash import Dash, dcc, html

from speciakin.errors import InputError, Location
from speciakin.web import (bundles, first_view, page_campaign, page_history, page_jobs, page_model, page_results,
                           scripts, warm)
from speciakin.web.paths import MAX_UPLOAD_BYTES
from speciakin.web.state import WebState

__all__ = ["create_app", "make_server", "is_loopback", "new_token", "TOKEN_COOKIE"]

TOKEN_COOKIE = "speciakin_token"
_TABS = (("campaign", "1 Campaign and data", page_campaign), ("model", "2 Model", page_model),
         ("jobs", "3 Jobs", page_jobs), ("results", "4 Results", page_results),
         ("history", "5 History", page_history))
_STYLE = """
body { font-family: system-ui, sans-serif; margin: 0 1.5em; color: #1a1a1a; }
.row { display: flex; gap: .8em; align-items: center; flex-wrap: wrap; margin: .5em 0; }
.message { margin: .5em 0; white-space: pre-wrap; }
.upload { border: 2px dashed #888; padding: 1em; margin: .5em 0; cursor: pointer; }
.ok { color: #006b3c; font-weight: 600; } .bad { color: #b00020; font-weight: 600; }
.placeholder { border-left: 4px solid #E69F00; padding: .4em .8em; background: #fff8e6; }
.job { border: 1px solid #ccc; padding: .6em; margin: .4em 0; border-radius: 4px; }
.state-failed { color: #b00020; } .state-done { color: #006b3c; } .state-cancelled { color: #8a5a00; }
.job-text, .summary { white-space: pre-wrap; background: #f6f6f6; padding: .5em; }
progress { width: 16em; }
table.compare { border-collapse: collapse; margin: .2em 0 .6em; }
table.compare td, table.compare th { border: 1px solid #ccc; padding: .2em .5em; text-align: left; }
tr.differs td { background: #fff3d6; } a.download { margin-right: .8em; }
table.check { border-collapse: collapse; width: 100%; margin: .2em 0 .6em; font-size: .95em; }
table.check th, table.check td { border: 1px solid #ddd; padding: .3em .5em; text-align: left; vertical-align: top;
  overflow-wrap: anywhere; }
table.check th { background: #f4f4f4; } tr.problem.error td[data-col=severity] { color: #b00020; font-weight: 600; }
table.check td[data-col=message] { width: 30%; }
table.check [data-col=severity], table.check [data-col=sheet], table.check [data-col=row],
table.check [data-col=column], table.check [data-col=value] { overflow-wrap: break-word; }
table.check [data-col=severity], table.check [data-col=row] { white-space: nowrap; }
"""


def is_loopback(host: str) -> bool:
    """True for ``localhost`` and loopback addresses (127.0.0.0/8, ::1)."""
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def new_token() -> str:
    """A random token for a server that other machines can reach."""
    return secrets.token_urlsafe(24)


def create_app(root: str | Path, *, token: str | None = None, board=None) -> tuple[Dash, WebState]:
    """The page for the campaign folders under ``root``.

    Parameters
    ----------
    root
        Campaign root; the page reads and writes only inside it.
    token
        When given, every request must carry it (query ``token`` or the cookie).
    board
        A :class:`~speciakin.web.jobs.JobBoard` (default: a new one).

    Raises
    ------
    InputError
        ``root`` is not a folder.
    """
    base = Path(root).resolve()
    if not base.is_dir():
        raise InputError("campaign root not found", Location(file=str(root)), expected="an existing folder")
    state = WebState(base) if board is None else WebState(base, board)
    app = Dash(__name__, title="speciakin workbench", suppress_callback_exceptions=False,
               update_title=None)
    app.server.config["MAX_CONTENT_LENGTH"] = MAX_UPLOAD_BYTES * 4 // 3 + 1_000_000  # base64 in JSON
    if token:
        _guard(app.server, token)
    else:
        _loopback_only(app.server)
    bundles.serve_small_plotly(app.server, app.config.requests_pathname_prefix)  # after the guards
    title = ("speciakin workbench", f"campaign root: {base}")
    # the first view, drawn by the server, sent with the page's HTML until the app has drawn it (before the
    # scripts are trimmed: its image is then asked for before the scripts' preloads)
    first_view.install(app, state, title, [label for _, label, _ in _TABS])
    scripts.trim_scripts(app, app.server)
    app.index_string = app.index_string.replace("{%css%}", "{%css%}<style>" + _STYLE + "</style>")
    head = [dcc.Store(id="campaign", storage_type="session"), dcc.Store(id="tabs-mounted", data=[_FIRST]),
            html.H2(title[0]), html.P(title[1], className="root"),
            dcc.Tabs(id="tabs", value=_FIRST, persistence=True, persistence_type="session",
                     children=[dcc.Tab(label=label, value=key) for key, label, _ in _TABS]),
            # an empty, hidden grid, drawn in the browser's idle time after the first figure: the grid's
            # first-time work is then done before its first real table is opened (web/static/grid-loader.js)
            html.Div(dag.AgGrid(id="grid-warm-up", className="grid-warm-up", rowData=[], columnDefs=[{"field": "x"}]),
                     style={"display": "none"}, **{"aria-hidden": "true"})]
    # every callback is checked against the whole page, with every tab's page in it (set before the
    # layout, so that Dash does not call the layout function to find it)
    app.validation_layout = html.Div([*head, *[html.Div(module.layout(), id=f"tab-page-{key}")
                                               for key, _, module in _TABS]])

    def page() -> html.Div:
        """The page as a new visit gets it: the first tab filled in for the campaign it opens on (its
        check and raw data come with the page, not after round trips); the other tabs' pages are put in
        when first opened."""
        names, chosen = page_campaign.initial_choice(state)
        first = page_campaign.layout(page_campaign.campaign_view(state, chosen), (names, chosen))
        if chosen:
            page_results.prefetch_newest(state, chosen)
        return html.Div([*head, *[html.Div(first if key == _FIRST else [], id=f"tab-page-{key}",
                                           className="tab-page", style=_shown(key == _FIRST))
                                  for key, _, _ in _TABS]])

    app.layout = page
    _register_tab_switch(app, state)
    for _, _, module in _TABS:
        module.register(app, state)
    return app, state


#: The tab shown first.
_FIRST = "campaign"


def _shown(visible: bool) -> dict:
    return {"display": "block" if visible else "none"}


def _register_tab_switch(app: Dash, state: WebState) -> None:
    """A tab's page is put into the page the first time the tab is opened, filled in for the chosen
    campaign (:func:`_mounted`), and stays: a tab only shows
    or hides it, in the browser (no server round trip), so a tab opened again is shown as it was,
    without drawing its tables and figures anew, and the page loads only the first tab's page."""
    from dash import Input, Output, State, no_update

    keys = [key for key, _, _ in _TABS]
    app.clientside_callback(
        "function(tab) { return " + repr(keys).replace("'", '"')
        + ".map(k => ({display: k === tab ? 'block' : 'none'})); }",
        [Output(f"tab-page-{key}", "style") for key in keys], Input("tabs", "value"))
    later = [(key, module) for key, _, module in _TABS if key != _FIRST]

    @app.callback(*[Output(f"tab-page-{key}", "children") for key, _ in later], Output("tabs-mounted", "data"),
                  Input("tabs", "value"), State("tabs-mounted", "data"), State("campaign-choice", "value"))
    def mount(tab, mounted, name):
        mounted = list(mounted or [])
        if tab in mounted or tab not in dict(later):
            return (no_update,) * (len(later) + 1)
        return (*[_mounted(module, state, name) if key == tab else no_update for key, module in later],
                [*mounted, tab])


def _mounted(module, state, name):
    """A tab's page as it is put in: filled in for campaign ``name`` when the tab has a ``mounted``
    (its content comes with it instead of after more round trips), else its empty ``layout()``."""
    fill = getattr(module, "mounted", None)
    return fill(state, name) if fill else module.layout()


def _guard(server, token: str) -> None:
    from flask import abort, request

    @server.before_request
    def require_token():
        given = request.args.get("token") or request.cookies.get(TOKEN_COOKIE) or ""
        if not hmac.compare_digest(given.encode(), token.encode()):
            abort(403)

    @server.after_request
    def remember(response):
        if request.args.get("token"):
            response.set_cookie(TOKEN_COOKIE, token, httponly=True, samesite="Strict")
        return response


def _loopback_only(server) -> None:
    """Without a token, answer only requests addressed to a loopback name (a web page elsewhere
    cannot reach the server through a name that resolves to 127.0.0.1)."""
    from flask import abort, request

    @server.before_request
    def require_loopback_host():
        host = request.host.rsplit(":", 1)[0] if not request.host.startswith("[") else request.host[1:].split("]")[0]
        if not is_loopback(host):
            abort(403)


def make_server(app: Dash, host: str, port: int, *, token: str | None):
    """A threaded WSGI server for ``app`` (``serve_forever`` runs it, ``shutdown`` stops it); the code
    the first answers need is loaded first (:mod:`speciakin.web.warm`, once per process), and the page a
    first visitor gets is made once.

    Raises
    ------
    InputError
        A host other than loopback without a token.
    """
    from werkzeug.serving import make_server as werkzeug_server

    if not is_loopback(host) and not token:
        raise InputError("a host other than loopback needs a token", Location(key="--host"), host,
                         "127.0.0.1 (default), or --require-token so that only people given the token get in")
    warm.prepare()  # the code the first answers need, loaded before the first visitor asks
    warm.first_page(app)  # and the data of the page a first visitor gets
    return werkzeug_server(host, port, app.server, threaded=True)
