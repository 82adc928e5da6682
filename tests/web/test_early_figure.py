"""The first view's figure drawn by plotly.js before Dash's app has started (web.early_figure).

The early figure must be a real Plotly figure (it answers a zoom and a hover while Dash's scripts are held
back), what the chemist did with it must reach the app's graph when the app takes over, the hand-over must
neither flash nor move (screenshots of the early figure and of the app's compared, at both widths the tests
use), user text must stay text, and the still image must stay where plotly.js does not load.
"""

from __future__ import annotations

import json
import re
import shutil
import threading

import pytest

from speciakin.web import create_app
from speciakin.web.bundles import DASH_PLOTLY_PATH
from speciakin.web.early_figure import figure_json

from .conftest import SCRIPT_NAME, differing_pixels

pytestmark = pytest.mark.filterwarnings("ignore")

EARLY = ".first-view .fv-plot"
APP = "#react-entry-point #raw-figure .js-plotly-plot"


def _held_renderer(page):
    """Hold back Dash's renderer (so the app cannot start); returns the function that lets it through."""
    held, opened = [], []

    def hold(route):
        if opened:
            route.continue_()
        else:
            held.append(route)

    page.route(lambda url: "dash_renderer" in url, hold)

    def release():
        opened.append(True)
        for route in held:
            route.continue_()
    return release


def _serve(root):
    from speciakin.web import make_server
    from speciakin.web.jobs import JobBoard

    app, state = create_app(root, board=JobBoard(workers=1))
    srv = make_server(app, "127.0.0.1", 0, token=None)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    return f"http://127.0.0.1:{srv.server_port}/", state, srv


@pytest.fixture(scope="module")
def demo_server(root, tmp_path_factory):
    """The page of a root holding only a copy of the demo (the page opens on it)."""
    base = tmp_path_factory.mktemp("early")
    shutil.copytree(root / "demo", base / "demo", ignore=shutil.ignore_patterns("results"))
    url, state, srv = _serve(base)
    yield url, state
    srv.shutdown()
    state.board.shutdown()


def _figure_text(html: str) -> str:
    found = re.search(r'<script type="application/json" id="first-view-figure">(.*?)</script>', html, re.S)
    assert found, "no early figure in the page"
    return found.group(1)


def test_the_page_carries_the_figure_and_plotly_before_dash_scripts(root, tmp_path):
    from speciakin.web.page_campaign import campaign_view

    shutil.copytree(root / "demo", tmp_path / "demo", ignore=shutil.ignore_patterns("results"))
    app, state = create_app(tmp_path)
    html = app.server.test_client().get("/").get_data(as_text=True)
    # the very figure the app's graph draws (the same JSON Plotly's encoder writes)
    figure = campaign_view(state, "demo")[4]
    assert json.loads(_figure_text(html)) == json.loads(figure.to_json())
    # plotly.js, then the drawing, after the copy and before Dash's renderer and components: evaluated first
    listed = re.findall(r'<script src="([^"]+)"', html)
    assert listed[0] == "/" + DASH_PLOTLY_PATH
    assert html.index('class="first-view"') < html.index(DASH_PLOTLY_PATH + '"></script>')
    assert html.index("Plotly.newPlot") < html.index("dash_renderer") and html.index("Plotly.newPlot") < html.index(
        "_dash-renderer")
    # the address Dash's graph loads plotly.js from, which the page preloads (one download)
    assert f'<link rel="preload" as="script" href="/{DASH_PLOTLY_PATH}">' in html


def test_a_page_opening_on_no_campaign_loads_no_early_figure(root):
    app, _ = create_app(root)  # several campaigns: the page opens on none
    html = app.server.test_client().get("/").get_data(as_text=True)
    assert "first-view-figure" not in html and DASH_PLOTLY_PATH + '"></script>' not in html


def test_the_figure_json_can_neither_end_its_element_nor_open_a_tag():
    from plotly import graph_objects as go

    name = '</script><script>window.__injected=1</script><!-- & "quoted"'
    fig = go.Figure(go.Scatter(x=[0, 1], y=[1, 2], name=name))
    fig.update_layout(title=name)
    text = figure_json(fig)
    assert not set("<>&") & set(text)
    back = json.loads(text)
    assert back["data"][0]["name"] == name and back["layout"]["title"]["text"] == name


def test_the_early_figure_answers_a_zoom_and_a_hover_before_the_app(demo_server, page, shot):
    url, _ = demo_server
    release = _held_renderer(page)
    page.goto(url, wait_until="commit")
    page.wait_for_selector(f"{EARLY} .nsewdrag")
    page.wait_for_timeout(200)
    assert page.evaluate(f"document.querySelector('{APP}')") is None  # the app has not started
    # a real Plotly figure: Plotly's own state, every trace and the legend drawn, the image under it hidden
    drawn = page.evaluate(f"""() => {{ const g = document.querySelector('{EARLY}');
        return {{plotly: g.classList.contains('js-plotly-plot') && !!g._fullLayout,
                 traces: g.querySelectorAll('.scatterlayer .trace').length,
                 legend: g.querySelectorAll('.legend .traces').length,
                 image: getComputedStyle(document.querySelector('.first-view .fv-figure img')).visibility}}; }}""")
    assert drawn == {"plotly": True, "traces": 9, "legend": 9, "image": "hidden"}
    shot(page, "30-early-figure")
    # hover over a point of the HPLC panel: Plotly's hover label
    point = page.locator(f"{EARLY} .subplot.xy .scatterlayer .point").first.bounding_box()
    page.mouse.move(point["x"] + point["width"] / 2, point["y"] + point["height"] / 2)
    page.wait_for_selector(f"{EARLY} .hoverlayer .hovertext")
    # a drag over the HPLC panel zooms it
    box = page.locator(f"{EARLY} .draglayer .xy .nsewdrag").bounding_box()
    page.mouse.move(box["x"] + 0.2 * box["width"], box["y"] + 0.2 * box["height"])
    page.mouse.down()
    page.mouse.move(box["x"] + 0.6 * box["width"], box["y"] + 0.7 * box["height"], steps=6)
    page.mouse.up()
    ranges = page.evaluate(f"""() => {{ const fl = document.querySelector('{EARLY}')._fullLayout;
        return {{x: fl.xaxis.range, y: fl.yaxis.range, auto: fl.xaxis.autorange, x2: fl.xaxis2.autorange}}; }}""")
    assert ranges["auto"] is False and ranges["x2"] is True  # the HPLC panel zoomed, the pH panel not
    assert 0 < ranges["x"][1] - ranges["x"][0] < 100  # the panel spans 180 min unzoomed
    page.mouse.move(5, 5)
    shot(page, "31-early-figure-zoomed")
    # the app takes over: the zoom is carried to its graph, and the copy goes
    release()
    page.wait_for_function("() => !document.querySelector('.first-view')")
    app = page.evaluate(f"""() => {{ const fl = document.querySelector('{APP}')._fullLayout;
        return {{x: fl.xaxis.range, y: fl.yaxis.range, auto: fl.xaxis.autorange, x2: fl.xaxis2.autorange}}; }}""")
    assert app["auto"] is False and app["x2"] is True
    assert app["x"] == pytest.approx(ranges["x"], rel=1e-9) and app["y"] == pytest.approx(ranges["y"], rel=1e-9)
    page.wait_for_timeout(300)
    shot(page, "32-app-after-early-zoom")


def test_a_trace_hidden_in_the_early_legend_stays_hidden_in_the_app(demo_server, page):
    url, _ = demo_server
    release = _held_renderer(page)
    page.goto(url, wait_until="commit")
    page.wait_for_selector(f"{EARLY} .legend .traces")
    page.locator(f"{EARLY} .legend .traces").nth(1).click()  # the second compound, hidden
    page.wait_for_function(f"() => document.querySelector('{EARLY}').data[1].visible === 'legendonly'")
    release()
    page.wait_for_function("() => !document.querySelector('.first-view')")
    shown = page.evaluate(f"document.querySelector('{APP}').data.map(t => t.visible === undefined ? true : t.visible)")
    assert shown == [True, "legendonly"] + [True] * 7


@pytest.mark.parametrize("width", [1300, 900])
def test_the_hand_over_from_the_early_figure_neither_flashes_nor_moves(demo_server, page, shot, width):
    """Screenshots of the early figure (the app held back) and of the app once the copy has gone, at the two
    widths of the other tests, differ in no more pixels than a fraction of a pixel's shift makes; every frame
    while both are in the page with the app's figure drawn, the early figure lies where the app's graph does."""
    url, _ = demo_server
    page.set_viewport_size({"width": width, "height": 900})
    page.add_init_script("""window.__boxes = [];
      (function frame() {
        const e = document.querySelector('.first-view .fv-plot'), a = document.querySelector('#raw-figure');
        if (e && a && a.querySelector('.gtitle')) { const b = e.getBoundingClientRect(), c = a.getBoundingClientRect();
          window.__boxes.push([b.x - c.x, b.y - c.y, b.width - c.width, b.height - c.height]); }
        if (!window.__gone) requestAnimationFrame(frame);
      })();""")
    release = _held_renderer(page)
    page.goto(url, wait_until="commit")
    page.wait_for_selector(f"{EARLY} .nsewdrag")
    page.wait_for_timeout(300)
    early = shot(page, f"33-early-figure-{width}")
    release()
    page.wait_for_function("() => !document.querySelector('.first-view')")
    page.evaluate("window.__gone = true")
    page.wait_for_timeout(300)
    after = shot(page, f"34-app-after-early-figure-{width}")
    boxes = page.evaluate("window.__boxes")
    assert boxes and max(abs(v) for b in boxes for v in b) <= 1.0, boxes[-3:]
    differ, total = differing_pixels(early, after)
    assert differ < 0.0005 * total, differ


def _renamed(folder, old: str, new: str) -> None:
    """Call compound ``old`` ``new`` everywhere in the campaign's workbook (a campaign that still checks)."""
    from openpyxl import load_workbook

    book = folder / "campaign.xlsx"
    wb = load_workbook(book)
    for sheet, column in (("Compounds", 1), ("HPLC results", 4)):
        for (cell,) in wb[sheet].iter_rows(min_row=2, min_col=column, max_col=column):
            if cell.value == old:
                cell.value = new
    wb.save(book)


def test_a_script_in_a_compound_name_is_text_in_the_early_figure(root, tmp_path, page, shot):
    shutil.copytree(root / "demo", tmp_path / "script-name", ignore=shutil.ignore_patterns("results"))
    _renamed(tmp_path / "script-name", "QX-2209", SCRIPT_NAME)
    url, state, srv = _serve(tmp_path)
    try:
        release = _held_renderer(page)
        page.goto(url, wait_until="commit")
        page.wait_for_selector(f"{EARLY} .legend .traces")
        legend = page.locator(f"{EARLY} .legend .legendtext").all_text_contents()
        assert legend[0] == SCRIPT_NAME  # the name as written, as text
        shot(page, "36-early-figure-script-name")
        assert page.evaluate("window.__injected") is None
        assert page.evaluate(f"document.querySelectorAll('{EARLY} script').length") == 0
        release()
        page.wait_for_function("() => !document.querySelector('.first-view')")
        assert page.evaluate("window.__injected") is None
    finally:
        srv.shutdown()
        state.board.shutdown()


def test_the_still_image_stays_when_plotly_js_does_not_load(demo_server, page, shot):
    url, _ = demo_server
    asked = []

    def plotly_js(route):
        asked.append(route.request.url)
        if len(asked) == 1:
            route.abort()  # the early load fails; Dash's graph loads it again later
        else:
            route.continue_()

    page.route(lambda u: u.endswith(DASH_PLOTLY_PATH), plotly_js)
    release = _held_renderer(page)
    page.goto(url, wait_until="commit")
    page.wait_for_function("() => { const i = document.querySelector('.first-view .fv-figure img');"
                           " return i && i.complete && i.naturalWidth > 0; }")
    page.wait_for_timeout(500)
    assert page.evaluate(f"document.querySelector('{EARLY}')") is None
    assert page.evaluate("getComputedStyle(document.querySelector('.first-view .fv-figure img')).visibility") == "visible"
    shot(page, "35-still-image-without-plotly")
    release()
    page.wait_for_selector("#raw-figure .gtitle")
    page.wait_for_function("() => !document.querySelector('.first-view')")
    assert len(asked) >= 2  # the app's graph loaded plotly.js itself
