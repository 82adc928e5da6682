"""The first view's figure made interactive before Dash's app has started: plotly.js draws it at once.

The first view's still copy (:mod:`speciakin.web.first_view`) shows the raw
data of the first run as an image, after about half a second; the app's own
figure (zoom, hover) comes only when Dash's scripts have been evaluated,
React has started the app and drawn the page, and plotly.js has been
evaluated and has drawn: about 1.4 to 1.6 s on a first-ever visit.  Of all
that, the figure needs only plotly.js.  So the HTML carries, after the copy
and before Dash's scripts, the very figure the app's graph draws (as JSON,
in a ``<script type="application/json">`` with ``<``, ``>`` and ``&``
escaped: data, never markup or code), plotly.js itself (the address Dash's
graph loads it from, :data:`speciakin.web.bundles.DASH_PLOTLY_PATH`, which the
page preloads: the browser evaluates it before Dash's scripts, which follow
it in the page, and Dash's graph later finds it in ``window.Plotly``), and a
few lines of script that draw the figure with ``Plotly.newPlot`` over the
copy's image (:data:`DRAW`).  When the app's graph has drawn its figure, the
copy, with the early figure, is taken away as before; what the chemist did
with the early figure is carried over first (:data:`HAND_OVER`: the axis
ranges of a zoom or pan, the drag mode, traces hidden in the legend).  Where
plotly.js does not load or cannot draw the figure, the copy's image stays
(the still copy of before).  With the early figure drawn, the app's first
drawing of its graph waits for the next frame and the browser's idle time
(``Plotly.react`` wrapped until then, later calls queued after it): the
frame that shows the app's tabs and drop-downs, which React puts in together
with the graph, is painted first and the controls answer a click at once,
while the early figure still covers the graph's place (the copy hands the
controls over then: :mod:`speciakin.web.first_view`).

Measured (docs/web.md, "The figure interactive before the app"): on a
first-ever visit the figure answers a zoom or a hover 0.3 to 0.6 s sooner in
four runs of five (about 1.1 to 1.3 s on the shared 2-core machine), and the
app itself is ready up to 0.2 s later (0.5 s in one run): the main thread
now evaluates plotly.js and draws the figure before Dash's scripts.  With
the smaller plotly.js of :mod:`speciakin.web.bundles` that came after, the
early figure answers after 0.64 to 0.69 s (docs/web.md, "A plotly.js of the
page's three trace types").
"""

from __future__ import annotations

import json

__all__ = ["figure_json", "early_html", "DRAW", "HAND_OVER", "STYLE"]

#: Styles of the early figure: over the copy's image, in its place; the image hidden once it is drawn.
STYLE = """
.fv-figure { position: relative; }
.fv-plot { position: absolute; top: 0; left: 0; width: 100%; height: 100%; }
.fv-figure.fv-live img { visibility: hidden; }
"""

#: Draws the figure of ``#first-view-figure`` into the copy's figure box, once plotly.js is there; on
#: success the copy's hand-over (:data:`HAND_OVER`) is set, on failure the still image stays.
DRAW = """(function () {
  var view = document.querySelector(".first-view"), data = document.getElementById("first-view-figure");
  var box = view && view.querySelector(".fv-figure"), fig;
  if (data) { data.parentNode.removeChild(data); }
  if (!box || !data || !window.Plotly || !Plotly.newPlot) { return; }  /* the still image stays */
  var div = document.createElement("div");
  div.className = "fv-plot";
  function failed() { box.classList.remove("fv-live"); if (div.parentNode) { div.parentNode.removeChild(div); } }
  /* the app's first drawing waits for the next frame: the frame that shows the app's tabs and drop-downs (put
     in with its graph, which the copy's figure box still covers) is painted first, then Plotly draws; later
     drawings (of the same graph too) wait for that one, in their order */
  function later() {
    var react = Plotly.react, queue = null;
    Plotly.react = function () {
      var args = arguments, self = this;
      if (!queue) {
        queue = new Promise(function (go) {
          requestAnimationFrame(function () {
            if (window.requestIdleCallback) { requestIdleCallback(go, {timeout: 500}); } else { setTimeout(go, 0); }
          });
        });
      }
      var run = function () { return react.apply(self, args); };
      queue = queue.then(run, run);
      var mine = queue;
      queue.then(function () { if (queue === mine) { Plotly.react = react; } }, function () { Plotly.react = react; });
      return mine;
    };
  }
  try {
    fig = JSON.parse(data.textContent);
    box.appendChild(div);
    Plotly.newPlot(div, fig.data, fig.layout, %(config)s).then(function () {
      if (!div.querySelector(".nsewdrag")) { failed(); return; }
      box.classList.add("fv-live");
      view.speciakinHandOver = %(hand_over)s;
      later();
    }, failed);
  } catch (e) { failed(); }
})();"""

#: ``handOver(gd, done)``, called by the copy when the app's graph ``gd`` has drawn its figure: what the
#: chemist changed in the early figure (``div``, drawn from ``fig``) is applied to the app's graph, then
#: ``done()`` takes the copy away.  Axis ranges of zoomed or panned axes (``autorange`` false), the drag
#: mode and the legend's hidden traces (what differs from the app's graph); nothing when the app shows another
#: figure.
HAND_OVER = """function (gd, done) {
  var fl = div._fullLayout, update = {}, changed = false, k;
  function title(layout) { var t = layout && layout.title; return t && (t.text !== undefined ? t.text : t); }
  try {
    if (!gd || !gd.data || gd.data.length !== fig.data.length || title(gd.layout) !== title(fig.layout)) {
      done(); return;
    }
    for (k in fl) {
      var mine = fl[k], theirs = gd._fullLayout[k];
      if (/^[xy]axis[0-9]*$/.test(k) && mine.autorange === false && !(theirs && theirs.autorange === false
          && theirs.range[0] === mine.range[0] && theirs.range[1] === mine.range[1])) {
        update[k + ".range"] = mine.range.slice(); update[k + ".autorange"] = false; changed = true;
      }
    }
    if (fl.dragmode !== gd._fullLayout.dragmode) { update.dragmode = fl.dragmode; changed = true; }
    var shown = div.data.map(function (t) { return t.visible === undefined ? true : t.visible; });
    var hidden = shown.some(function (v, i) { return v !== (gd.data[i].visible === undefined ? true : gd.data[i].visible); });
    var steps = Promise.resolve();
    if (changed) { steps = steps.then(function () { return Plotly.relayout(gd, update); }); }
    if (hidden) { steps = steps.then(function () { return Plotly.restyle(gd, {visible: shown}); }); }
    steps.then(done, done);
  } catch (e) { done(); }
}"""


def figure_json(figure) -> str:
    """``figure`` (Plotly) as JSON safe to put inside ``<script type="application/json">``: ``<``, ``>`` and
    ``&`` written as JSON escapes, so that no text of it (a compound named ``</script>``) can end the element
    or open a tag; ``JSON.parse`` gives the very figure back."""
    import plotly.io as pio

    text = pio.to_json(figure, validate=False)
    return text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")


def early_html(figure_text: str, plotly_address: str, config: dict) -> str:
    """The HTML put after the first view's copy and before Dash's scripts: the figure's JSON (from
    :func:`figure_json`), plotly.js (``plotly_address``, already HTML-escaped: an address the server makes)
    and the drawing script with the graph's ``config``."""
    draw = DRAW % {"config": json.dumps(config).replace("<", "\\u003c"), "hand_over": HAND_OVER}
    return (f'<script type="application/json" id="first-view-figure">{figure_text}</script>'
            f'<script src="{plotly_address}"></script><script>{draw}</script>')
