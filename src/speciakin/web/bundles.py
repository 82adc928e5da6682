"""The plotting library the browser loads: a plotly.js of the page's three trace types in place of the full one.

The page draws only scatter, heatmap and contour traces.  Its plotly.js is
built from plotly.js's own modules (its core, which holds scatter, plus its
heatmap and contour traces; ``scripts/build_plotly_bundle.sh``, MIT licence,
kept as ``static/plotly-scatter-heatmap-contour.min.js`` beside its licence).
It is a quarter of the full bundle that Plotly's Python package ships
(1.2 MB against 4.8 MB), and evaluating it takes the browser a fraction of
the time: the longest single step of opening the page (docs/web.md, Speed).  It is sent with V8's compile
hint put first (:data:`COMPILE_HINT`), which cuts its evaluation again.
Dash's graph component loads plotly.js from one fixed address the first time
a figure is shown;
:func:`serve_small_plotly` answers that address with the small bundle,
when its version is the one the Python package's figures are made for, and
otherwise leaves Dash's own (full) bundle in place.
"""

from __future__ import annotations

import hashlib
import logging
import re
from pathlib import Path

__all__ = ["BUNDLE", "bundle_traces", "bundle_version", "plotly_js_version", "serve_small_plotly",
           "serve_script"]

log = logging.getLogger(__name__)

#: plotly.js of the scatter, heatmap and contour traces only (built by ``scripts/build_plotly_bundle.sh``).
BUNDLE = Path(__file__).resolve().parent / "static" / "plotly-scatter-heatmap-contour.min.js"
#: Where Dash's graph component loads plotly.js from (served locally), after the path prefix.
DASH_PLOTLY_PATH = "_dash-component-suites/plotly/package_data/plotly.min.js"
#: Put before the bundle as it is sent: V8's explicit compile hint (Chromium 136 and later; other browsers
#: read a comment), so that every function is compiled while the file streams in, off the page's main
#: thread, instead of on first call (the page calls most of them while drawing its first figure).
COMPILE_HINT = b"//# allFunctionsCalledOnLoad\n"
_HEADER = re.compile(r"plotly\.js \([\w ,]+ - minified\) v(\d+\.\d+\.\d+)")
_TRACE = re.compile(r'moduleType:"trace",name:"(\w+)"')


def bundle_version(path: Path = BUNDLE) -> str | None:
    """The plotly.js version named in the bundle's first lines; None when the file is missing or unnamed."""
    try:
        with open(path, encoding="utf-8") as f:
            head = f.read(400)
    except OSError:
        return None
    found = _HEADER.search(head)
    return found.group(1) if found else None


def bundle_traces(path: Path = BUNDLE) -> frozenset[str]:
    """The trace types a plotly.js bundle registers (read from its code; empty when the file is missing)."""
    try:
        return frozenset(_TRACE.findall(path.read_text(encoding="utf-8")))
    except OSError:
        return frozenset()


def plotly_js_version() -> str:
    """The plotly.js version Plotly's Python package makes its figures for (and ships in full)."""
    from plotly.offline import get_plotlyjs_version

    return get_plotlyjs_version()


def serve_small_plotly(server, prefix: str = "/") -> bool:
    """Answer Dash's plotly.js address on ``server`` (Flask) with the small bundle.

    Parameters
    ----------
    server
        The Flask server of the Dash app.
    prefix
        The app's ``requests_pathname_prefix``.

    Returns
    -------
    bool
        True when the bundle is served; False (Dash's full bundle stays) when it is missing or its
        version differs from the Python package's plotly.js.
    """
    version, wanted = bundle_version(), plotly_js_version()
    if version != wanted:
        log.warning("plotly.js bundle %s does not match plotly.js %s of the plotly package: "
                    "the full bundle is served", version, wanted)
        return False
    body = COMPILE_HINT + BUNDLE.read_bytes()
    # revalidated by its ETag on each load (a 304 when unchanged): the address is not versioned
    serve_script(server, prefix.rstrip("/") + "/" + DASH_PLOTLY_PATH, body, hashlib.sha256(body).hexdigest()[:32],
                 "no-cache")
    return True


def serve_script(server, address: str, body: bytes, tag: str, cache_control: str) -> None:
    """Answer requests for ``address`` with the JavaScript ``body`` before Dash's own routes.

    Parameters
    ----------
    server
        The Flask server of the page (call after its request guards are set: the script is sent
        behind them).
    address
        URL path answered.
    body
        The script's bytes.
    tag
        ETag of ``body``; a request naming it gets 304 Not Modified.
    cache_control
        The ``Cache-Control`` header sent with it.
    """
    from flask import Response, request

    @server.before_request
    def send_script():
        if request.path != address:
            return None
        response = Response(body, mimetype="application/javascript")
        response.set_etag(tag)
        response.headers["Cache-Control"] = cache_control
        return response.make_conditional(request)
