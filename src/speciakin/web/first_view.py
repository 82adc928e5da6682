"""The page's first view sent already drawn, in the HTML, until Dash's app has drawn it itself.

Opening the page costs the browser about a second and a half of script work
(Dash's renderer and components, React starting the app, plotly.js and its
first drawing of the raw data) before the chemist sees the check and the raw
data.  The server knows what that first view holds (the page is made for the
campaign it opens on: :func:`speciakin.web.page_campaign.campaign_view`),
so the HTML it sends carries a still copy of it: the heading, the tabs, the
campaign's check (its summary and the table of problems, as the app draws
them) and the raw data of the first run as an SVG image drawn on the server
(:mod:`speciakin.web.first_svg`) at the width the page gives the figure (a
few lines of script in the HTML measure it before the image is asked for).
The copy lies over the app in the same places and sizes, with the same styles;
once the app has drawn its tabs and drop-downs it keeps only its figure (and
lets every click through to the app's controls), and it is taken away once
the app has drawn its interactive figure (or, should that never happen,
after 15 s), so the view neither flashes nor moves.  It is
left out when the page opens on no campaign, and taken away at once when the
browser's session had another tab open (the tabs remember it).

The image is sent from :data:`ROUTE` (``campaign`` is resolved inside the
root; ``w`` the width in px) behind the token and loopback guards, and kept,
per width, keyed by the SHA-256 of the campaign's input files and the
speciakin version (:func:`inputs_sha256`); its address names that key, so the
browser may keep it.  Every text is HTML-escaped.
"""

from __future__ import annotations

import hashlib
import html
import json
import logging
import threading
from collections import OrderedDict

from speciakin.errors import SpeciakinError
from speciakin.web import graph_later, page_campaign
from speciakin.web.bundles import DASH_PLOTLY_PATH
from speciakin.web.first_svg import Unsupported, check, figure_svg

__all__ = ["ROUTE", "install", "overlay", "inputs_sha256", "figure_image"]

log = logging.getLogger(__name__)

#: Address of the first view's image, after the path prefix.
ROUTE = "_speciakin/first-view.svg"
_WIDTHS = (200, 8000)  # widths drawn [px]
_KEPT = 16  # images kept (campaign, width)
_FIRST_TAB = "campaign"
_DROP_ICON = ('<svg width="15" height="15" viewBox="0 0 15 15" aria-hidden="true"><path d="M4.2 6.2a.45.45 0 0 1 '
              '.6 0l2.7 2.7 2.7-2.7a.45.45 0 0 1 .6.6l-3 3a.45.45 0 0 1-.6 0l-3-3a.45.45 0 0 1 0-.6z" '
              'fill="currentColor"/></svg>')
#: Styles of the copy: the page's own classes (check table, rows) come from the page's style; the tabs and
#: drop-downs, which Dash's components style from their scripts, are copied here (their computed styles).
STYLE = """
.first-view { position: absolute; top: 0; left: 1.5em; right: 1.5em; background: #fff; z-index: 10; }
.fv-tabs { display: flex; }
.fv-tab { flex: 1 1 0; box-sizing: border-box; padding: 20px 25px; text-align: center;
  border: 1px solid rgba(0, 24, 102, .1); border-right: 0; background: rgba(0, 30, 128, .04); }
.fv-tab:last-child { border-right: 1px solid rgba(0, 24, 102, .1); }
.fv-tab.fv-on { border-top: 2px solid #7f4bc4; border-bottom: 0; background: #fff; color: rgba(0, 18, 77, .87); }
.fv-select { box-sizing: border-box; height: 34px; display: grid; grid-template-columns: 1fr 15px; gap: 8px;
  align-items: center; padding: 0 12px; border: 1px solid rgba(0, 18, 77, .45); border-radius: 4px;
  background: #fff; }
.fv-select span { white-space: nowrap; overflow: hidden; text-overflow: ellipsis; }
.fv-select svg { color: rgba(0, 9, 38, .9); }
.fv-figure img { display: block; }
.first-view.fv-app { background: transparent; pointer-events: none; visibility: hidden; }
.first-view.fv-app .fv-figure { visibility: visible; pointer-events: auto; }
@media (max-width: 800px) { .first-view { display: none; } }
"""
#: Sets the image's address with the figure's width; hands the controls over to the app as soon as the app has
#: drawn its tabs and drop-downs where the copy shows them (Dash's tabs are first drawn stacked, until they
#: have measured the window; the copy keeps only its figure box, over the app's graph, and lets every click
#: through: ``fv-app``), then takes the copy away once the app's figure is drawn (its annotations are drawn
#: last), or after 15 s, or at once when the session had another tab open.  A click or key pressed in the app
#: beside the copy's figure box takes the copy away at once (a tab opened, a drop-down opened over the
#: figure).  Watched on every change of the app's part of the page (a mutation observer: elements and
#: classes), and every 0.1 s for the 15 s.
_SCRIPT = """(function () {
  var view = document.currentScript.parentNode, img = view.querySelector(".fv-figure img");
  var box = view.querySelector(".fv-figure"), app = document.getElementById("react-entry-point"), seen, since;
  function gone() {
    if (view.parentNode) { view.parentNode.removeChild(view); }
    document.removeEventListener("pointerdown", beside, true); document.removeEventListener("keydown", beside, true);
  }
  function beside(e) { if (!box.contains(e.target)) { gone(); } }
  try {
    var tab = sessionStorage.getItem("_dash_persistence.tabs.value.true");
    if (tab && JSON.parse(tab)[0] !== "%(first)s") { gone(); return; }
  } catch (e) { /* no session storage: the first tab */ }
  var width = Math.round(img.parentNode.getBoundingClientRect().width);
  if (!width) { gone(); return; }  /* not shown (a narrow window) */
  img.src = img.getAttribute("data-src") + "&w=" + width;
  function at(a, b) {  /* a lies where b does (not yet: the app's tabs drawn stacked before they are styled) */
    var r = a.getBoundingClientRect(), c = b.getBoundingClientRect();
    return Math.abs(r.left - c.left) <= 2 && Math.abs(r.top - c.top) <= 2 && Math.abs(r.width - c.width) <= 2;
  }
  function controls() {  /* the app's tabs and a drop-down for each of the copy's, in the copy's places */
    var tabs = app.querySelectorAll("#tabs .tab"), mine = view.querySelectorAll(".fv-tab");
    var drops = app.querySelectorAll(".dash-dropdown"), selects = view.querySelectorAll(".fv-select");
    return tabs.length >= mine.length && drops.length >= selects.length && mine.length > 1 && selects.length > 0
      && at(tabs[1], mine[1]) && Math.abs(drops[selects.length - 1].getBoundingClientRect().top
                                          - selects[selects.length - 1].getBoundingClientRect().top) <= 2;
  }
  function look() {
    if (!view.parentNode) { return true; }
    if (!seen && controls()) {
      seen = true;
      view.classList.add("fv-app");
      document.addEventListener("pointerdown", beside, true); document.addEventListener("keydown", beside, true);
    }
    if (app.querySelector("#raw-figure .main-svg .annotation")) {
      requestAnimationFrame(function () { requestAnimationFrame(gone); });
      return true;
    }
    if (Date.now() - since > 15000) { gone(); return true; }
    return false;
  }
  since = Date.now();
  if (!app || !window.MutationObserver) { gone(); return; }
  var watch = new MutationObserver(function () { if (look()) { watch.disconnect(); } });
  watch.observe(app, {childList: true, subtree: true, attributes: true, attributeFilter: ["class"]});
  (function late() { if (!look()) { setTimeout(late, 100); } else { watch.disconnect(); } })();  /* the 15 s limit */
})();"""


#: In the page's head, before the scripts are asked for: the image at the width the figure will have (the
#: window's less the body's margins, and less a scrollbar's when the window is lower than the page is
#: expected to be), asked for with high priority; the copy's image then takes it from the browser's memory
#: (a width guessed wrong only costs a second request).
_EARLY = """(function () {
  if (innerWidth <= 800) { return; }  /* no copy: the tabs are stacked (the copy's style) */
  var root = document.documentElement, em = parseFloat(getComputedStyle(root).fontSize) || 16;
  var probe = document.createElement("div"), bar;
  probe.style.cssText = "position:absolute;top:-100px;width:50px;height:50px;overflow:scroll";
  root.appendChild(probe);
  bar = probe.offsetWidth - probe.clientWidth;
  root.removeChild(probe);
  var img = new Image();
  img.fetchPriority = "high";
  img.src = %(src)s + "&w=" + Math.round(root.clientWidth - 3 * em - (innerHeight < %(tall)d ? bar : 0));
  window.speciakinFirstView = img;
})();"""


def _e(text) -> str:
    return html.escape("" if text is None else str(text), quote=True)


def inputs_sha256(state, folder) -> str:
    """SHA-256 of the campaign's input files (names and contents) and the speciakin version, kept while the
    files keep their modification times."""
    from speciakin import __version__

    def digest() -> str:
        h = hashlib.sha256(f"speciakin {__version__}\n".encode())
        for path in sorted(p for p in state.inputs_of(folder) if p.is_file()):
            h.update(path.name.encode() + b"\0" + path.read_bytes() + b"\0")
        return h.hexdigest()

    return state.cached("inputs-sha256", state.inputs_of(folder), digest)


def overlay(state, head: tuple[str, str], tabs: list[str], prefix: str) -> tuple[str, str]:
    """The first view's still copy for a new visit: (a script for the page's head that asks for the image
    first, the copy: an HTML fragment), or ``("", "")`` when the page opens on no campaign or its figure
    cannot be drawn still.

    ``head`` is the page's heading and the line naming the root; ``tabs`` the tabs' labels (the first one
    shown); ``prefix`` the app's path prefix.
    """
    _, chosen = page_campaign.initial_choice(state)
    if not chosen:
        return "", ""
    try:
        summary, rows, runs, run, figure, _ = page_campaign.campaign_view(state, chosen)
        tag = inputs_sha256(state, state.folder(chosen))[:20]
        check(figure)  # only a figure the copy can draw (Unsupported otherwise)
    except (SpeciakinError, OSError, Unsupported) as exc:
        log.debug("first view not drawn ahead: %s", exc)
        return "", ""
    text, kind = (summary.children, summary.className) if hasattr(summary, "children") else (summary, None)
    source = f"{prefix}{ROUTE}?campaign={_e(_quote(chosen))}&amp;v={tag}"
    height = figure.layout.height or 450
    table = _check_table(rows)
    tabs_html = "".join(f'<div class="fv-tab{" fv-on" if i == 0 else ""}"><span>{_e(t)}</span></div>'
                        for i, t in enumerate(tabs))
    shown_run = next((o["label"] for o in runs if o["value"] == run), "choose a run")
    address = json.dumps(html.unescape(source)).replace("<", "\\u003c")  # a JavaScript string, never a tag
    tall = int(height) + 480 + 40 * len(rows)  # the page's expected height [px]
    early = f"<script>{_EARLY % {'src': address, 'tall': tall}}</script>"
    return early, f"""<div class="first-view" data-first-view="{_e(chosen)}">
<h2>{_e(head[0])}</h2><p class="root">{_e(head[1])}</p>
<div class="fv-tabs">{tabs_html}</div>
<div class="page"><div class="row"><label>Campaign folder</label><div class="fv-select" style="min-width:320px">
<span>{_e(chosen)}</span>{_DROP_ICON}</div><button type="button" tabindex="-1">Refresh list</button></div>
<details><summary>Create a campaign or upload a filled workbook</summary></details>
<div class="message" role="status"></div><h3>Check</h3>
<div><span{f' class="{_e(kind)}"' if kind else ""}>{_e(text)}</span></div>
<table class="check">{table}</table><h3>Raw data per run</h3>
<div class="fv-select" style="max-width:320px"><span>{_e(shown_run)}</span>{_DROP_ICON}</div>
<div class="fv-figure" style="height:{height}px"><img alt="raw data of run {_e(run or '')}" elementtiming="first-view" fetchpriority="high"
 data-src="{source}" height="{height}"></div></div>
<script>{_SCRIPT % {"first": _FIRST_TAB}}</script></div>
{graph_later.script_html(prefix + DASH_PLOTLY_PATH)}"""


def _quote(name: str) -> str:
    from urllib.parse import quote

    return quote(name, safe="")


def _check_table(rows: list[dict]) -> str:
    """The check's problems as :func:`speciakin.web.page_campaign.check_table` draws them, as HTML text."""
    cols = page_campaign.CHECK_COLUMNS
    head = "".join(f'<th data-col="{f}">{_e(h)}</th>' for f, h in cols)
    body = "".join(f'<tr class="problem {_e(severity)}">' + "".join(
        f'<td data-col="{f}">{_e(text)}</td>' for (f, _), text in zip(cols, cells)) + "</tr>"
        for severity, cells in page_campaign.check_cells(rows))
    return f"<thead><tr>{head}</tr></thead><tbody>{body}</tbody>"


def figure_image(state, name: str, width: int, kept: OrderedDict, lock: threading.Lock) -> bytes:
    """The first view's figure of campaign ``name`` as SVG bytes, ``width`` px wide (kept in ``kept``).

    Raises
    ------
    InputError
        ``name`` is not a folder inside the root.
    Unsupported
        The figure cannot be drawn still.
    """
    folder = state.folder(name)
    key = (str(folder), width, inputs_sha256(state, folder))
    with lock:
        if key in kept:
            kept.move_to_end(key)
            return kept[key]
    figure = page_campaign.campaign_view(state, name)[4]
    body = figure_svg(figure, width).encode()
    with lock:
        kept[key] = body
        while len(kept) > _KEPT:
            kept.popitem(last=False)
    return body


def install(app, state, head: tuple[str, str], tabs: list[str]) -> None:
    """Send the first view's copy with the page's HTML and its image from :data:`ROUTE` (call after the
    request guards are set on ``app.server``: the image is sent behind them)."""
    from flask import Response, abort, request

    prefix = app.config.requests_pathname_prefix.rstrip("/") + "/"
    kept: OrderedDict = OrderedDict()
    lock = threading.Lock()

    def image():
        name = request.args.get("campaign", "")
        try:
            width = int(request.args.get("w", ""))
        except ValueError:
            abort(400)
        if not _WIDTHS[0] <= width <= _WIDTHS[1]:
            abort(400)
        try:
            if not state.folder(name).is_dir():
                abort(404)
            body = figure_image(state, name, width, kept, lock)
        except SpeciakinError:
            abort(403)  # a name outside the root
        except Unsupported:
            abort(404)
        response = Response(body, mimetype="image/svg+xml")
        # the address names the inputs' SHA-256 (v): the same address is the same image
        response.headers["Cache-Control"] = "private, max-age=31536000, immutable"
        response.headers["Content-Security-Policy"] = "default-src 'none'; style-src 'unsafe-inline'"
        response.headers["X-Content-Type-Options"] = "nosniff"
        return response

    app.server.add_url_rule(prefix + ROUTE, "first_view_image", image)
    app.index_string = app.index_string.replace("{%css%}", "{%css%}<style>" + STYLE + "</style>")
    interpolate = app.interpolate_index

    def interpolate_index(**kwargs):
        early, copy = overlay(state, head, tabs, prefix)
        kwargs["css"] = early + kwargs["css"]  # before the scripts' preloads: the image is asked for first
        kwargs["app_entry"] = kwargs["app_entry"] + copy
        return interpolate(**kwargs)

    app.interpolate_index = interpolate_index
