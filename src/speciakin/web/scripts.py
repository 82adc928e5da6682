"""The scripts the page's HTML lists, cut to what the page uses, and the ones it loads later fetched early.

Dash's page lists, besides React and its own code, Babel's polyfill (core-js
for old browsers, 0.1 MB, about 0.2 s of evaluation and more of wrapped calls
on the main thread while the page is drawn), the code of Dash's data table
(a component this page never uses) and the code of the grid (dash-ag-grid:
1.3 MB, and 0.9 MB more it loads when the first table is drawn), which the
first view does not draw.  Of the polyfill, Dash's renderer and core
components need only the regenerator runtime (their ``async`` functions are
compiled to ``regeneratorRuntime`` state machines); every browser of the last
years has the rest built in.  :func:`trim_scripts` makes the page list the
regenerator runtime (npm ``regenerator-runtime``, MIT licence, kept in
``static/`` beside its licence) in place of the polyfill, leaves the data
table out, lists our :data:`GRID_LOADER` in place of the grid's bundle (it
fetches the bundle after the first view is drawn, or when a table is to be
drawn earlier), and lets the browser fetch at once, while it evaluates the
listed scripts, the ones that Dash's components load only when first drawn
(:data:`LATER`: plotly.js, the graph, dropdown and upload code of the
first tab), instead of after the page's layout has arrived and been drawn
(docs/web.md, Speed).  Those of Dash's core components (:data:`CHUNKS`) are
also listed after Dash's scripts, so that they are evaluated before React
draws the layout (webpack finds them already there): the drop-downs are then
drawn without waiting for their code to be asked for and evaluated first; and
:data:`READY` starts the drop-down's lazy component on that code before the
renderer starts, so that React draws the drop-downs in the pass that draws
the tabs.
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

from speciakin.web.bundles import serve_script

__all__ = ["REGENERATOR", "RUNTIME_PATH", "GRID_LOADER", "GRID_LOADER_PATH", "LATER", "CHUNKS", "READY",
           "trim_scripts", "later_files"]

#: The regenerator runtime of npm ``regenerator-runtime`` (0.13.11), as published.
REGENERATOR = Path(__file__).resolve().parent / "static" / "regenerator-runtime.js"
#: Where the page loads it from, after the path prefix.
RUNTIME_PATH = "_speciakin/regenerator-runtime.js"
#: The grid's stand-in (our own code, in ``static/``): fetches dash-ag-grid's bundle after the first view.
GRID_LOADER = Path(__file__).resolve().parent / "static" / "grid-loader.js"
#: Where the page loads it from, after the path prefix.
GRID_LOADER_PATH = "_speciakin/grid-loader.js"
#: Scripts Dash's components load when first drawn, all drawn on the first tab (the page opens on it),
#: after the path prefix: (package, file in the package).  plotly.js is the address bundles.py answers.
LATER = (("dash", "dcc/async-graph.js"), ("dash", "dcc/async-dropdown.js"), ("dash", "dcc/async-upload.js"),
         ("plotly", "package_data/plotly.min.js"))
#: Of :data:`LATER`, the code chunks of Dash's core components: listed after Dash's scripts as well.
CHUNKS = tuple((package, name) for package, name in LATER if name.startswith("dcc/async-"))
#: After :data:`CHUNKS`, before the renderer starts: the drop-down's code made ready for React.  Dash's
#: drop-down draws its code through ``React.lazy``, which on its first drawing suspends for one promise and
#: draws it only in a later pass; started here (React 18's lazy component: ``_init(_payload)``, which throws
#: the promise while pending), it is resolved when the layout arrives, and React draws the drop-downs with
#: the tabs.  Any failure leaves the drop-downs as they were.
READY = """<script>(function () {
  try {
    var make = window.dash_core_components && window.dash_core_components.Dropdown;
    var lazy = make && make({}).props.children.type;
    if (lazy && lazy._init && lazy._payload) { lazy._init(lazy._payload); }
  } catch (e) { /* a lazy component not yet resolved throws its promise */ }
})();</script>
"""
_POLYFILL = re.compile(r'<script src="[^"]*/deps/polyfill@[^"]*"></script>\n?')
_DATA_TABLE = re.compile(r'<script src="[^"]*/dash/dash_table/[^"]*"></script>\n?')
_GRID = re.compile(r'<script src="([^"]*/dash_ag_grid/dash_ag_grid\.[^"]*)"></script>\n?')


def later_files() -> list[Path]:
    """The files of :data:`LATER` in the installed packages (for checking that they exist)."""
    import importlib

    return [Path(importlib.import_module(package).__file__).resolve().parent / name for package, name in LATER]


def trim_scripts(app, server) -> None:
    """Make ``app`` (Dash) list the regenerator runtime in place of the polyfill, without the data table,
    the grid's stand-in in place of its bundle, with the scripts of :data:`LATER` preloaded and those of
    :data:`CHUNKS` listed after Dash's scripts; ``server``
    (its Flask server) sends the runtime and the stand-in.

    Call it after the request guards are set on ``server`` (the scripts are sent behind them).
    """
    prefix = app.config.requests_pathname_prefix.rstrip("/") + "/"
    tag = _serve(server, prefix + RUNTIME_PATH, REGENERATOR)
    runtime = f'<script src="{prefix}{RUNTIME_PATH}?v={tag}"></script>\n'
    loader = f"{prefix}{GRID_LOADER_PATH}?v={_serve(server, prefix + GRID_LOADER_PATH, GRID_LOADER)}"
    preload = "".join(f'<link rel="preload" as="script" href="{prefix}_dash-component-suites/{package}/{name}">'
                      for package, name in LATER)
    chunks = "".join(f'<script src="{prefix}_dash-component-suites/{package}/{name}"></script>\n'
                     for package, name in CHUNKS) + READY

    def grid(found: re.Match) -> str:
        return f'<script src="{loader}" data-grid="{found.group(1)}"></script>\n'

    interpolate = app.interpolate_index

    def interpolate_index(**kwargs):
        scripts, found = _POLYFILL.subn(runtime, kwargs["scripts"], count=1)
        scripts = _DATA_TABLE.sub("", scripts if found else runtime + scripts)
        kwargs["scripts"] = _GRID.sub(grid, scripts, count=1) + chunks  # before the renderer's start
        kwargs["css"] = preload + kwargs["css"]
        return interpolate(**kwargs)

    app.interpolate_index = interpolate_index


def _serve(server, address: str, path: Path) -> str:
    """Send the script ``path`` at ``address``; its content tag, which the page puts into the address it
    lists (``?v=TAG``), so that it can be cached for a year."""
    body = path.read_bytes()
    tag = hashlib.sha256(body).hexdigest()[:16]
    serve_script(server, address, body, tag, "public, max-age=31536000")
    return tag
