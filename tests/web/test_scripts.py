"""The scripts the page lists: the regenerator runtime in place of Babel's polyfill, no data table, the grid's
stand-in in place of its bundle, and the scripts Dash loads later preloaded (without a browser); in the
browser: the grid's code fetched after the first figure, a table drawn before it has arrived, and the
drop-down's code ready before the layout (the drop-downs drawn with the tabs)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from speciakin.web import scripts

HOST = {"Host": "127.0.0.1"}


def _page(tmp_path, **kwargs) -> tuple[str, object]:
    from speciakin.web import create_app

    app, _ = create_app(tmp_path, **kwargs)
    client = app.server.test_client()
    query = f"?token={kwargs['token']}" if "token" in kwargs else ""
    return client.get("/" + query, headers=HOST).get_data(as_text=True), client


def test_the_page_lists_the_runtime_in_place_of_the_polyfill_and_no_data_table(tmp_path):
    html, client = _page(tmp_path)
    listed = re.findall(r'<script src="([^"]+)"', html)
    assert not [s for s in listed if "polyfill" in s or "dash_table" in s]
    runtime = [s for s in listed if scripts.RUNTIME_PATH in s]
    assert len(runtime) == 1 and listed.index(runtime[0]) == 0  # before React and Dash's code that uses it
    # Dash's own list still names the polyfill and the table, so the cut above is the page's doing
    plain = _plain_page()
    assert "polyfill" in plain and "dash_table" in plain
    sent = client.get(runtime[0], headers=HOST)
    assert sent.status_code == 200 and sent.get_data() == scripts.REGENERATOR.read_bytes()
    again = client.get(runtime[0], headers={**HOST, "If-None-Match": sent.headers["ETag"]})
    assert again.status_code == 304


def test_dash_code_needs_the_regenerator_runtime_and_it_defines_it():
    # Dash's renderer and core components call regeneratorRuntime (their async functions, compiled by Babel)
    import dash

    base = Path(dash.__file__).resolve().parent
    assert "regeneratorRuntime" in (base / "dcc" / "dash_core_components.js").read_text(encoding="utf-8")
    assert "globalThis.regeneratorRuntime = runtime" in scripts.REGENERATOR.read_text(encoding="utf-8")


def test_every_preloaded_script_exists_and_is_sent(tmp_path):
    html, client = _page(tmp_path)
    preloaded = re.findall(r'<link rel="preload" as="script" href="([^"]+)"', html)
    assert len(preloaded) == len(scripts.LATER)
    for path in scripts.later_files():
        assert path.is_file(), path
    for address in preloaded:
        assert client.get(address, headers=HOST).status_code == 200, address


def test_the_grid_is_not_listed_and_its_stand_in_names_its_code(tmp_path):
    html, client = _page(tmp_path)
    listed = re.findall(r'<script src="([^"]+)"', html)
    assert not [s for s in listed if "dash_ag_grid" in s]
    # Dash's own list names the grid's bundle (the page imports dash_ag_grid), so the cut is the page's doing
    assert "dash_ag_grid" in _plain_page()
    loader = re.findall(r'<script src="([^"]*' + scripts.GRID_LOADER_PATH + r'[^"]*)" data-grid="([^"]+)"></script>',
                        html)
    assert len(loader) == 1
    src, grid = loader[0]
    assert listed.index(src) < [i for i, s in enumerate(listed) if "dash_renderer" in s][0]  # before the renderer
    sent = client.get(src, headers=HOST)
    assert sent.status_code == 200 and sent.get_data() == scripts.GRID_LOADER.read_bytes()
    import dash_ag_grid

    package = Path(dash_ag_grid.__file__).resolve().parent
    answer = client.get(grid, headers=HOST)
    assert answer.status_code == 200 and answer.get_data() == (package / "dash_ag_grid.min.js").read_bytes()


def _plain_page() -> str:
    """The page of a Dash app with the same components, as Dash lists its scripts."""
    import dash_ag_grid  # noqa: F401  (registers its scripts, as the page's modules do)
    from dash import Dash, html as dash_html

    plain_app = Dash(__name__)
    plain_app.layout = dash_html.Div()
    return plain_app.server.test_client().get("/").get_data(as_text=True)


@pytest.mark.parametrize("path", [scripts.RUNTIME_PATH, scripts.GRID_LOADER_PATH])
@pytest.mark.parametrize("query, status", [("", 403), ("?token=wrong", 403), ("?token=secret", 200)])
def test_the_scripts_are_behind_the_token_guard(tmp_path, path, query, status):
    from speciakin.web import create_app

    app, _ = create_app(tmp_path, token="secret")
    assert app.server.test_client().get("/" + path + query, headers=HOST).status_code == status


@pytest.mark.parametrize("path", [scripts.RUNTIME_PATH, scripts.GRID_LOADER_PATH])
def test_the_scripts_are_behind_the_loopback_guard(tmp_path, path):
    from speciakin.web import create_app

    app, _ = create_app(tmp_path)
    assert app.server.test_client().get("/" + path, headers={"Host": "evil.example"}).status_code == 403


#: Marks, in the page, when the first figure appears (performance.now(), ms).
_FIRST_FIGURE = """
new MutationObserver((_, observer) => {
  if (document.querySelector('.js-plotly-plot .main-svg')) {
    window.__firstFigure = performance.now(); observer.disconnect(); }
}).observe(document, {subtree: true, childList: true});
"""


def test_the_grid_code_is_fetched_after_the_first_figure(server, page):
    url, _ = server
    page.add_init_script(_FIRST_FIGURE)
    page.goto(url)
    page.wait_for_selector(".js-plotly-plot .main-svg")
    page.wait_for_function("performance.getEntriesByType('resource').some(r => r.name.includes('dash_ag_grid.'))",
                           timeout=15_000)  # then fetched in the browser's idle time, without a table shown
    fetched = page.evaluate("performance.getEntriesByType('resource').find(r => r.name.includes('dash_ag_grid.'))"
                            ".startTime")
    assert fetched > page.evaluate("window.__firstFigure")
    # and the hidden warm-up grid drawn: the grid's own code (its chunk) loaded before any table is opened
    page.wait_for_function("performance.getEntriesByType('resource').some(r => r.name.includes('async-community'))",
                           timeout=15_000)
    # (the chunk's arrival comes before React has drawn the grid with it: wait for the drawing)
    page.wait_for_selector("#grid-warm-up .ag-root", state="attached", timeout=15_000)
    assert page.locator("#grid-warm-up .ag-root").count() == 1
    from .test_journey import choose

    choose(page, "campaign-choice", "demo")
    page.click("text=2 Model")
    page.wait_for_selector("#param-table .ag-row")


def test_a_table_drawn_before_the_grid_code_has_arrived_is_drawn_when_it_has(server, page, shot):
    url, _ = server
    held = []
    page.route("**/dash_ag_grid/dash_ag_grid.*", lambda route, _request: held.append(route))
    page.goto(url)
    page.wait_for_selector("#campaign-choice")
    from .test_journey import choose

    choose(page, "campaign-choice", "demo")
    page.click("text=2 Model")
    page.wait_for_selector("#model-summary:has-text('Molecules')")
    page.wait_for_selector("#tab-page-model .grid-loading:has-text('loading the table')")
    assert held and page.locator("#param-table").count() == 0
    shot(page, "19-table-waiting-for-its-code")
    for route in held:
        route.continue_()
    page.wait_for_selector("#param-table [row-id='pKa[S.N_aryl]']")
    assert page.locator(".grid-loading").count() == 0


def test_the_core_components_chunks_are_listed_after_dash_s_scripts(tmp_path):
    """The drop-down, graph and upload code of Dash's core components is evaluated before Dash's renderer
    starts (after the components' bundle, before the renderer's start script), so the first drawing of the
    layout does not wait for it."""
    html, client = _page(tmp_path)
    listed = re.findall(r'<script src="([^"]+)"', html)
    chunks = [s for s in listed if "/dcc/async-" in s]
    assert sorted(c.rsplit("/", 1)[1] for c in chunks) == ["async-dropdown.js", "async-graph.js", "async-upload.js"]
    core = [i for i, s in enumerate(listed) if "dash_core_components" in s]
    assert core and min(listed.index(c) for c in chunks) > max(core)
    assert max(html.index(c) for c in chunks) < html.index('id="_dash-renderer"')
    for address in chunks:
        assert client.get(address, headers=HOST).status_code == 200, address


#: Per animation frame until the app's tabs are there: how many of the app's drop-downs that frame holds.
_DROPS_WITH_TABS = """
(function frame() {
  const app = document.getElementById('react-entry-point');
  if (app && app.querySelector('#tabs .tab')) { window.__dropsWithTabs = app.querySelectorAll('.dash-dropdown').length; }
  else { requestAnimationFrame(frame); }
})();
"""


def test_the_drop_down_code_is_ready_before_the_layout_and_drawn_with_the_tabs(server, page):
    """The drop-down's lazily loaded code is resolved before the layout arrives (:data:`scripts.READY`), so
    React draws the drop-downs in the frame that shows the tabs, not in a later pass."""
    url, _ = server
    held = []
    page.route("**/_dash-layout", lambda route, _request: held.append(route))
    page.add_init_script(_DROPS_WITH_TABS)
    page.goto(url)
    page.wait_for_function("() => window.dash_core_components && document.getElementById('_dash-renderer')")
    page.wait_for_timeout(300)  # the promise of the drop-down's code settled; the layout still held back
    assert held and page.locator("#react-entry-point #tabs").count() == 0
    # React's lazy component of the drop-down: 1 = resolved (0 pending, -1 not asked for)
    status = page.evaluate("dash_core_components.Dropdown({}).props.children.type._payload._status")
    assert status == 1
    for route in held:
        route.continue_()
    page.wait_for_function("window.__dropsWithTabs !== undefined")
    drops = page.evaluate("window.__dropsWithTabs")
    page.wait_for_selector("#campaign-choice")
    page.wait_for_timeout(500)  # every later pass of React done
    assert drops >= 2 and drops == page.locator("#react-entry-point .dash-dropdown").count()  # campaign, run
