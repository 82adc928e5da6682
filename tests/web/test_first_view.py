"""The first view sent already drawn with the page's HTML (web.first_view, web.first_svg).

The reference for the still figure is Plotly itself: plotly.js, in the
browser, lays out the same figure, and the copy must put its margins, axis
ranges and ticks where Plotly puts them; the copy of the page must lie where
Dash's app draws the page, so that taking it away neither flashes nor moves
anything.
"""

from __future__ import annotations

import json
import shutil
import threading
import xml.etree.ElementTree as ET

import pytest

from speciakin.web import create_app
from speciakin.web.first_view import ROUTE

from .conftest import SCRIPT_NAME, differing_pixels

pytestmark = pytest.mark.filterwarnings("ignore")

#: Records, every animation frame while both are in the page, where the copy and the app draw each part,
#: and how much of the app's figure is drawn (the last record is the moment the copy is taken away).
SWAP_WATCH = """
window.__swap = null;
(function frame() {
  const copy = document.querySelector('.first-view');
  const app = document.querySelector('#react-entry-point .page');
  const box = s => { const e = document.querySelector(s); if (!e) return null;
    const b = e.getBoundingClientRect(); return [b.x, b.y, b.width, b.height]; };
  if (copy && app) {
    window.__swap = {
      tabs: [box('.first-view .fv-tabs'), box('#react-entry-point #tabs')],
      campaign: [box('.first-view .page > .row .fv-select'), box('#react-entry-point #campaign-choice')],
      summary: [box('.first-view h3 + div'), box('#react-entry-point #check-summary')],
      table: [box('.first-view table.check'), box('#react-entry-point #check-table')],
      run: [box('.first-view .page > .fv-select'), box('#react-entry-point #raw-run')],
      figure: [box('.first-view .fv-figure img'), box('#react-entry-point #raw-figure')],
      traces: document.querySelectorAll('#react-entry-point #raw-figure .scatterlayer .trace').length,
      legend: document.querySelectorAll('#react-entry-point #raw-figure .legend .traces').length};
  }
  if (copy || !app) requestAnimationFrame(frame);
})();
"""


@pytest.fixture(scope="module")
def one_root(root, tmp_path_factory):
    """A root holding only a copy of the demo: the page opens on it."""
    base = tmp_path_factory.mktemp("one")
    shutil.copytree(root / "demo", base / "demo", ignore=shutil.ignore_patterns("results"))
    return base


@pytest.fixture(scope="module")
def one_server(one_root):
    from speciakin.web import make_server
    from speciakin.web.jobs import JobBoard

    app, state = create_app(one_root, board=JobBoard(workers=1))
    srv = make_server(app, "127.0.0.1", 0, token=None)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    yield f"http://127.0.0.1:{srv.server_port}/", state
    srv.shutdown()
    state.board.shutdown()


def _image(client, query: str, **kw):
    return client.get(f"/{ROUTE}?{query}", **kw)


def test_the_page_html_carries_the_first_view_of_its_only_campaign(one_root):
    app, _ = create_app(one_root)
    client = app.server.test_client()
    text = client.get("/").get_data(as_text=True)
    assert text.count('class="first-view"') == 1
    copy = text[text.index('class="first-view"'):]
    # the check as the app draws it: its summary, the planted-free demo's one warning at its cell
    assert "0 error(s), 1 warning(s)" in copy and 'class="problem warning"' in copy
    assert '<td data-col="row">62</td>' in copy and '<td data-col="sheet">HPLC results</td>' in copy
    for label in ("1 Campaign and data", "2 Model", "5 History"):
        assert f"<span>{label}</span>" in copy
    # the image is asked for in the page's head, before the scripts' preloads
    head = text[:text.index("</head>")]
    assert head.index(ROUTE) < head.index('rel="preload"')
    svg = _image(client, "campaign=demo&w=1000")
    assert svg.status_code == 200 and svg.mimetype == "image/svg+xml"
    tree = ET.fromstring(svg.get_data())
    texts = [t.text for t in tree.iter("{http://www.w3.org/2000/svg}text")]
    assert "run R01-pH4.0: data as imported" in texts and {"HPLC", "pH", "titrant [mmol]"} <= set(texts)
    assert tree.get("width") == "1000" and tree.get("height") == "560"


def test_a_page_opening_on_no_campaign_carries_no_copy(root):
    app, _ = create_app(root)  # several campaigns: the page opens on none
    assert 'class="first-view"' not in app.server.test_client().get("/").get_data(as_text=True)


def test_user_text_in_the_copy_and_its_image_is_escaped(root, tmp_path):
    shutil.copytree(root / "script-name", tmp_path / "script-name", ignore=shutil.ignore_patterns("results"))
    app, _ = create_app(tmp_path)
    client = app.server.test_client()
    text = client.get("/").get_data(as_text=True)
    copy = text[text.index('class="first-view"'):]
    assert "<script>window.__injected" not in copy and "&lt;script&gt;window.__injected" in copy
    # the figure's labels: a trace named by the compound, drawn still, reads as written and is no element
    from plotly import graph_objects as go

    from speciakin.web.figures import label
    from speciakin.web.first_svg import figure_svg

    fig = go.Figure(go.Scatter(x=[0, 1], y=[1, 2], mode="markers", name=label(SCRIPT_NAME)))
    fig.add_trace(go.Scatter(x=[0, 1], y=[2, 1], mode="lines", name="log"))
    fig.update_layout(title=label(SCRIPT_NAME + " & co"), height=300)
    tree = ET.fromstring(figure_svg(fig, 600))
    assert not list(tree.iter("{http://www.w3.org/2000/svg}script")) and not list(tree.iter("script"))
    texts = [t.text for t in tree.iter("{http://www.w3.org/2000/svg}text")]
    assert SCRIPT_NAME in texts and SCRIPT_NAME + " & co" in texts


@pytest.mark.parametrize("query, status", [
    ("campaign=..&w=900", 403),                 # the root's parent
    ("campaign=../..&w=900", 403),
    ("campaign=/etc&w=900", 403),               # absolute
    ("campaign=demo/../..&w=900", 403),
    ("campaign=&w=900", 403),                   # none
    ("campaign=nothing-here&w=900", 404),       # inside the root, not a folder
    ("campaign=demo&w=wide", 400),              # not a width
    ("campaign=demo&w=50", 400),
    ("campaign=demo&w=100000", 400),
    ("campaign=demo&w=900", 200),
])
def test_the_image_route_takes_only_campaigns_inside_the_root(one_root, query, status):
    app, _ = create_app(one_root)
    assert _image(app.server.test_client(), query).status_code == status


def test_the_image_route_is_behind_the_token_and_loopback_guards(one_root):
    app, _ = create_app(one_root, token="s3cret-token")
    client = app.server.test_client()
    assert _image(client, "campaign=demo&w=900").status_code == 403
    assert _image(client, "campaign=demo&w=900&token=wrong").status_code == 403
    assert _image(client, "campaign=demo&w=900&token=s3cret-token").status_code == 200
    assert _image(client, "campaign=demo&w=900").status_code == 200  # the cookie
    app, _ = create_app(one_root)
    client = app.server.test_client()
    assert _image(client, "campaign=demo&w=900", headers={"Host": "127.0.0.1:8765"}).status_code == 200
    assert _image(client, "campaign=demo&w=900", headers={"Host": "attacker.example:8765"}).status_code == 403


def test_the_copy_is_shown_first_and_the_app_takes_its_place_unmoved(one_server, page, shot):
    url, _ = one_server
    page.add_init_script(SWAP_WATCH)
    page.goto(url, wait_until="commit")
    page.wait_for_function("() => { const i = document.querySelector('.first-view .fv-figure img');"
                           " return i && i.complete && i.naturalWidth > 0; }")
    copy_shot = shot(page, "20-first-view-copy")
    page.wait_for_selector("#raw-figure .gtitle")
    page.wait_for_function("() => !document.querySelector('.first-view')")
    page.wait_for_timeout(300)
    app_shot = shot(page, "21-first-view-app")
    swap = page.evaluate("window.__swap")
    for part in ("tabs", "campaign", "summary", "table", "run", "figure"):
        copy, app = swap[part]
        assert copy and app and max(abs(a - b) for a, b in zip(copy, app)) <= 1.0, (part, copy, app)
    # the app's figure was whole when the copy went: every trace and legend entry drawn
    assert swap["traces"] == 9 and swap["legend"] == 9
    # and looked as the copy did (in all but 0.05 % of the pixels)
    differ, total = differing_pixels(copy_shot, app_shot)
    assert differ < 0.0005 * total, differ


def test_a_session_on_another_tab_gets_no_copy(one_server, page):
    url, _ = one_server
    page.goto(url)
    page.wait_for_selector("#raw-figure .gtitle")
    page.click("#tabs >> text=2 Model")
    page.wait_for_selector("#model-summary")
    page.reload(wait_until="domcontentloaded")
    # the tabs remember the model tab: the copy of the first tab is taken away at once
    assert page.evaluate("document.querySelector('.first-view')") is None
    page.wait_for_selector("#model-summary")


@pytest.mark.parametrize("width", [1300, 900])
def test_the_still_figure_is_laid_out_as_plotly_lays_it_out(one_server, page, width):
    """Margins, axis ranges and tick labels of every demo run's raw-data figure, against plotly.js's own
    layout of the same figure at the same width (the reference)."""
    from speciakin.web.first_svg import layout
    from speciakin.web.page_campaign import _raw_figure as raw_figure, campaign_view

    url, state = one_server
    page.set_viewport_size({"width": width, "height": 900})
    page.goto(url)
    page.wait_for_selector("#raw-figure .gtitle")
    runs = [o["value"] for o in campaign_view(state, "demo")[2]]
    assert len(runs) == 6
    for run in runs:
        fig = raw_figure(state, "demo", run)
        drawn = page.evaluate("""async ([spec, width]) => {
            const div = document.createElement('div'); div.style.width = width + 'px'; document.body.appendChild(div);
            await Plotly.newPlot(div, spec.data, spec.layout);
            const fl = div._fullLayout, out = {size: fl._size, axes: {}};
            for (const k of Object.keys(fl)) if (/^[xy]axis\\d*$/.test(k))
                out.axes[k] = {range: fl[k].range, ticks: fl[k]._vals.map(v => v.text)};
            Plotly.purge(div); div.remove(); return out; }""", [json.loads(fig.to_json()), width - 48])
        mine = layout(fig, width - 48)
        for key in ("l", "r", "t", "b", "w", "h"):
            assert abs(mine["size"][key] - drawn["size"][key]) <= 1.5, (run, key, mine["size"], drawn["size"])
        for (xa, ya), ax in mine["axes"].items():
            for name, rng, ticks in ((xa.replace("x", "xaxis", 1), ax["range"][0], ax["ticks"][0]),
                                     (ya.replace("y", "yaxis", 1), ax["range"][1], ax["ticks"][1])):
                ref = drawn["axes"][name]
                span = ref["range"][1] - ref["range"][0]
                assert max(abs(a - b) for a, b in zip(rng, ref["range"])) <= 0.01 * span, (run, name, rng, ref)
                assert ticks == [t.replace("<", "") for t in ref["ticks"]], (run, name, ticks, ref["ticks"])


def test_a_narrow_window_gets_no_copy(one_server, page):
    """At 800 px and less Dash's tabs are stacked, which the copy does not draw: it is taken away at once
    and its image not asked for."""
    url, _ = one_server
    asked = []
    page.on("request", lambda r: asked.append(r.url) if ROUTE in r.url else None)
    page.set_viewport_size({"width": 700, "height": 900})
    page.goto(url, wait_until="domcontentloaded")
    assert page.evaluate("document.querySelector('.first-view')") is None
    page.wait_for_selector("#raw-figure .gtitle")
    assert asked == []


#: Holds the app's first drawing of its graph (``Plotly.react`` into the app's part of the page) until
#: ``window.__releaseApp()``: the moment between the app's controls and its figure, kept open for the test.
HOLD_APP_FIGURE = """
(function () {
  let P, open, opened = new Promise(r => { open = r; });
  window.__releaseApp = () => open();
  Object.defineProperty(window, 'Plotly', {configurable: true, get() { return P; }, set(v) {
    P = v;
    if (v && v.react && !v.__held) {
      const react = v.react;
      v.react = function (gd, ...rest) {
        if (gd && gd.closest && gd.closest('#react-entry-point')) { return opened.then(() => react.call(this, gd, ...rest)); }
        return react.call(this, gd, ...rest);
      };
      v.__held = true;
    }
  }});
})();
"""


def test_the_app_s_controls_answer_before_its_figure_is_drawn(one_server, page, shot):
    """Once the app has drawn its tabs and drop-downs, the copy keeps only its figure (the still image, over
    the app's graph) and lets clicks through: the app's controls lie where the copy's were, the page looks as
    it did, a drop-down opens and a tab is opened while the app's graph is not drawn yet; the app's figure
    comes afterwards."""
    url, _ = one_server
    page.add_init_script(HOLD_APP_FIGURE)
    page.add_init_script(SWAP_WATCH)
    page.goto(url, wait_until="commit")
    page.wait_for_function("() => { const i = document.querySelector('.first-view .fv-figure img');"
                           " return i && i.complete && i.naturalWidth > 0; }")
    copy_shot = shot(page, "22-first-view-still")
    page.wait_for_selector(".first-view.fv-app", state="attached")
    page.wait_for_timeout(300)
    assert page.evaluate("document.querySelector('#react-entry-point #raw-figure .gtitle')") is None  # held
    swap = page.evaluate("window.__swap")
    for part in ("tabs", "campaign", "summary", "table", "run", "figure"):
        copy, app = swap[part]
        if part == "figure":  # the app's graph, not drawn yet, has no height: the copy's figure covers its place
            copy, app = copy[:3], app[:3]
        assert copy and app and max(abs(a - b) for a, b in zip(copy, app)) <= 1.0, (part, copy, app)
    controls_shot = shot(page, "23-first-view-app-controls")
    differ, total = differing_pixels(copy_shot, controls_shot)
    assert differ < 0.0005 * total, differ
    # a click on the app's tab or drop-down reaches the app, not the copy
    hits = page.evaluate("""() => ['#tabs .tab:nth-child(2)', '#campaign-choice', '#raw-run'].map(s => {
        const e = document.querySelector('#react-entry-point ' + s), r = e.getBoundingClientRect();
        return e.contains(document.elementFromPoint(r.left + r.width / 2, r.top + r.height / 2)); })""")
    assert hits == [True, True, True]
    page.click("#react-entry-point #raw-run")
    page.wait_for_selector("#react-entry-point #raw-run[aria-expanded=true]")
    assert page.evaluate("document.querySelector('.first-view')") is None  # taken away by the click
    page.keyboard.press("Escape")
    page.click("#tabs >> text=2 Model")
    page.wait_for_selector("#model-summary")
    page.click("#tabs >> text=1 Campaign and data")
    page.evaluate("window.__releaseApp()")
    page.wait_for_selector("#react-entry-point #raw-figure .gtitle")
    assert page.evaluate("document.querySelectorAll('#react-entry-point #raw-figure .scatterlayer .trace').length") == 9


def test_a_click_in_the_copy_s_figure_keeps_it_until_the_app_s_figure_is_drawn(one_server, page):
    """A click on the copy's figure (the still image over the app's graph) while the app's controls are there
    but its graph is not drawn yet: the copy's figure stays until the app's graph is drawn."""
    url, _ = one_server
    page.add_init_script(HOLD_APP_FIGURE)
    page.goto(url, wait_until="commit")
    page.wait_for_selector(".first-view.fv-app", state="attached")
    box = page.locator(".first-view .fv-figure").bounding_box()
    page.mouse.click(box["x"] + box["width"] * 0.4, box["y"] + box["height"] * 0.4)
    page.wait_for_timeout(200)
    assert page.evaluate("!!document.querySelector('.first-view.fv-app .fv-figure img')")
    page.evaluate("window.__releaseApp()")
    page.wait_for_selector("#react-entry-point #raw-figure .gtitle")
    page.wait_for_function("() => !document.querySelector('.first-view')")
