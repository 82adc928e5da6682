"""plotly.js loaded beside Dash's scripts, the app's controls before its graph (web.graph_later).

The page must not wait for plotly.js before Dash's scripts: with plotly.js held back, the app's tabs and
drop-downs are drawn and answer a click, the first view's still image covering the graph's place; once
plotly.js is there, the app's graph is drawn with it (loaded once, not a second time by Dash's graph); a
failed load is asked for again; the copy hands the controls over only once the app's tabs lie where the
copy's do.
"""

from __future__ import annotations

import re
import shutil
import threading

import pytest

from speciakin.web import create_app
from speciakin.web.bundles import DASH_PLOTLY_PATH

pytestmark = pytest.mark.filterwarnings("ignore")

APP_GRAPH = "#react-entry-point #raw-figure .gtitle"
#: For each control of the app (second tab, campaign and run drop-downs): a click at its centre reaches it.
HITS = """() => ['#tabs .tab:nth-child(2)', '#campaign-choice', '#raw-run'].map(s => {
    const e = document.querySelector('#react-entry-point ' + s); if (!e) return false;
    const r = e.getBoundingClientRect();
    return e.contains(document.elementFromPoint(r.left + r.width / 2, r.top + r.height / 2)); })"""


@pytest.fixture(scope="module")
def demo_server(root, tmp_path_factory):
    """The page of a root holding only a copy of the demo (the page opens on it)."""
    from speciakin.web import make_server
    from speciakin.web.jobs import JobBoard

    base = tmp_path_factory.mktemp("later")
    shutil.copytree(root / "demo", base / "demo", ignore=shutil.ignore_patterns("results"))
    app, state = create_app(base, board=JobBoard(workers=1))
    srv = make_server(app, "127.0.0.1", 0, token=None)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    yield f"http://127.0.0.1:{srv.server_port}/"
    srv.shutdown()
    state.board.shutdown()


def _held_plotly(page):
    """Hold back every request for plotly.js; returns (the function that lets them through, the requests)."""
    held, asked, opened = [], [], []

    def hold(route):
        asked.append(route.request.url)
        if opened:
            route.continue_()
        else:
            held.append(route)

    page.route(lambda url: url.endswith(DASH_PLOTLY_PATH), hold)

    def release():
        opened.append(True)
        for route in held:
            route.continue_()
    return release, asked


def test_the_page_lists_no_plotly_before_dash_s_scripts(root, tmp_path):
    shutil.copytree(root / "demo", tmp_path / "demo", ignore=shutil.ignore_patterns("results"))
    app, _ = create_app(tmp_path)
    html = app.server.test_client().get("/").get_data(as_text=True)
    # no script element of plotly.js (it would be evaluated, and waited for, before Dash's scripts), no figure
    assert not re.search(r'<script[^>]*src="[^"]*' + re.escape(DASH_PLOTLY_PATH), html)
    assert "first-view-figure" not in html and "newPlot" not in html
    # a few lines after the copy and before Dash's renderer put it in as an async script
    loader = html.index(f's.src = "/{DASH_PLOTLY_PATH}"')
    assert html.index('class="first-view"') < loader < html.index("dash_renderer") < html.index("_dash-renderer")
    assert "s.async = true" in html[loader:]
    # fetched from the start (a preload), at the address Dash's graph loads plotly.js from
    assert f'<link rel="preload" as="script" href="/{DASH_PLOTLY_PATH}">' in html


def test_a_page_opening_on_no_campaign_does_not_load_plotly_ahead(root):
    app, _ = create_app(root)  # several campaigns: the page opens on none
    html = app.server.test_client().get("/").get_data(as_text=True)
    assert "s.src = " not in html and 'class="first-view"' not in html


def test_the_controls_answer_while_plotly_js_is_held_back(demo_server, page, shot):
    """With plotly.js held back, the app draws its controls and they answer (a tab opened and back); the still
    image covers the graph's place; released, plotly.js is asked for once and the app's graph drawn with it."""
    release, asked = _held_plotly(page)
    page.goto(demo_server, wait_until="commit")
    page.wait_for_selector(".first-view.fv-app", state="attached", timeout=30_000)
    page.wait_for_function(f"() => ({HITS})().every(x => x)")
    assert page.evaluate(f"document.querySelector('{APP_GRAPH}')") is None  # no graph without plotly.js
    image = page.evaluate("""() => { const i = document.querySelector('.first-view .fv-figure img');
        const r = i.getBoundingClientRect(), c = document.querySelector('#raw-figure').getBoundingClientRect();
        return {shown: getComputedStyle(i).visibility, loaded: i.complete && i.naturalWidth > 0,
                left: r.left - c.left, top: r.top - c.top}; }""")
    assert image["shown"] == "visible" and abs(image["left"]) <= 1 and abs(image["top"]) <= 1
    page.wait_for_function("() => document.querySelector('.first-view .fv-figure img').naturalWidth > 0")
    shot(page, "37-controls-before-plotly")
    page.click("#tabs >> text=2 Model")
    page.wait_for_selector("#model-summary")
    page.click("#tabs >> text=1 Campaign and data")
    release()
    page.wait_for_selector(APP_GRAPH)
    page.wait_for_function("() => !document.querySelector('.first-view')")
    assert page.evaluate("document.querySelectorAll('#react-entry-point #raw-figure .scatterlayer .trace').length") == 9
    assert len(asked) == 1  # Dash's graph took this plotly.js; it loaded none of its own
    assert page.evaluate(f"document.querySelectorAll('script[src$=\"{DASH_PLOTLY_PATH}\"]').length") == 1


def test_plotly_js_that_fails_to_load_is_asked_for_again(demo_server, page):
    asked = []

    def plotly_js(route):
        asked.append(route.request.url)
        if len(asked) == 1:
            route.abort()
        else:
            route.continue_()

    page.route(lambda u: u.endswith(DASH_PLOTLY_PATH), plotly_js)
    page.goto(demo_server, wait_until="commit")
    page.wait_for_selector(APP_GRAPH)
    page.wait_for_function("() => !document.querySelector('.first-view')")
    assert len(asked) == 2


def test_the_copy_keeps_the_controls_until_the_app_s_tabs_lie_where_its_own_do(demo_server, page):
    """The app's tabs are first drawn stacked, before Dash's tabs have measured the window: the copy must not
    hand the controls over (a frame of stacked tabs) until the app's tabs are in the copy's places."""
    page.add_init_script("""document.addEventListener('DOMContentLoaded', () => {
        const s = document.createElement('style'); s.id = 'stacked';
        s.textContent = '#react-entry-point .tab-container { flex-direction: column !important; }';
        document.head.appendChild(s); });""")
    release, _ = _held_plotly(page)  # the copy stays until the app's graph is drawn
    page.goto(demo_server, wait_until="commit")
    page.wait_for_selector("#react-entry-point #tabs .tab:nth-child(2)", state="attached")
    page.wait_for_selector("#react-entry-point #raw-run", state="attached")
    page.wait_for_timeout(1000)
    assert page.evaluate("document.querySelector('.first-view').className") == "first-view"  # kept whole
    page.evaluate("document.getElementById('stacked').remove()")
    page.wait_for_selector(".first-view.fv-app", state="attached")
    assert page.evaluate(HITS) == [True, True, True]
    release()
    page.wait_for_function("() => !document.querySelector('.first-view')")
