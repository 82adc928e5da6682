"""plotly.js loaded beside Dash's scripts, and the app's graph drawn after the app's controls.

The first view's still copy (:mod:`speciakin.web.first_view`) shows the check
and the raw data after about a third of a second; what the page then has to
do on the browser's one main thread is Dash's scripts, React starting the
app and drawing its layout (the tabs, the drop-downs: the controls), and
plotly.js drawing the raw data's figure (about 0.2 s for the first drawing
in a page).  The page used to evaluate plotly.js first and draw the figure
over the copy before Dash's scripts (an "early figure"): the figure answered
a zoom after about 0.65 s, but the controls only after about 0.9 s, the
browser's main thread idle meanwhile while plotly.js streamed in, with
Dash's scripts already there waiting for it (scripts run in the page's
order).  So the page now lists no plotly.js before Dash's scripts: a few
lines (:data:`LOAD`) put plotly.js in as an ``async`` script (the address
Dash's graph loads it from, :data:`speciakin.web.bundles.DASH_PLOTLY_PATH`,
which the page preloads), evaluated whenever it has arrived, and set
``window.Plotly`` to a promise of it until then, so that Dash's graph,
which takes ``window.Plotly`` when it is there and loads plotly.js itself
otherwise, waits for this one instead of loading it a second time.  Dash's
scripts are evaluated as soon as they have arrived, the app draws its
controls, and the app's first drawing of its graph waits for the frame that
shows them and the browser's idle time after it (``Plotly.react`` wrapped
until then, later calls queued after it in their order): the controls
answer a click at once, while the copy's still image covers the graph's
place until the graph is drawn (the copy hands the controls over then:
:mod:`speciakin.web.first_view`).  Should plotly.js fail to load, it is asked
for once more, as Dash's graph would.

Measured (docs/web.md, "The controls before the figure"; medians of
first-ever visits, load average below 3.5): the controls answer after 0.70
to 0.73 s instead of 0.91 to 0.96 s and a tab click after 0.80 to 0.81 s
instead of 0.98 to 1.02 s; the figure answers a zoom after 0.90 to 0.95 s
instead of 0.66 to 0.69 s (the early figure's), the app's figure, now the
only one, is drawn then instead of after 1.05 to 1.10 s.
"""

from __future__ import annotations

import json

__all__ = ["LOAD", "script_html"]

#: Puts plotly.js (``%(src)s``, a JavaScript string) in as an ``async`` script, ``window.Plotly`` a promise of
#: it until it is evaluated; the app's first drawing of its graph waits for the next frame and the idle time.
LOAD = """(function () {
  var done, failed, tries = 0;
  window.Plotly = new Promise(function (ok, no) { done = ok; failed = no; });
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
  function load() {
    var s = document.createElement("script");
    s.src = %(src)s;
    s.async = true;
    s.onload = function () {
      if (window.Plotly && window.Plotly.react) { later(); done(window.Plotly); }
      else { failed(new Error("plotly.js did not load")); }
    };
    s.onerror = function (e) { if (++tries < 2) { load(); } else { failed(e); } };
    document.head.appendChild(s);
  }
  load();
})();"""


def script_html(plotly_address: str) -> str:
    """The script put after the first view's copy and before Dash's scripts: :data:`LOAD` for plotly.js at
    ``plotly_address`` (an address the server makes, without HTML escapes)."""
    return "<script>" + LOAD % {"src": json.dumps(plotly_address).replace("<", "\\u003c")} + "</script>"
