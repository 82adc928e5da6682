"""Loading, once per server process, the code the page's first answers need.

The first check of a campaign imports the workbook reader, the data tables
and the simulation (whose compiled kernel is loaded from its disk cache: the
check simulates the runs' reach), the first result read imports the decision
layer (and with it ``scipy.stats``), and the first figure of each kind
imports Plotly's classes for it: seconds of work the first visitor would
otherwise wait for.
:func:`prepare` does it once per process when the server is made, on the
bundled INVENTED demo (read only; nothing is written), before the server
answers: not in a background thread, because Plotly's JSON encoder would then
meet a module half imported by that thread (``pandas``) and fail.
"""

from __future__ import annotations

import logging
import threading

__all__ = ["prepare", "warm_up", "first_page"]

log = logging.getLogger(__name__)
_DONE = threading.Event()
_LOCK = threading.Lock()


def warm_up() -> None:
    """Check the bundled demo, draw the raw data of its first run and figures of every kind the results
    show (results are thrown away)."""
    import plotly.graph_objects as go

    import speciakin.decision  # noqa: F401  (what reading a window.json imports)
    from speciakin.data import load_campaign
    from speciakin.demo import demo_dir
    from speciakin.errors import SpeciakinError
    from speciakin.pipeline.inputs import check_inputs
    from speciakin.chemistry.modelfile import load_model
    from speciakin.web.figures import compound_colors, correlation_figure, raw_run_figure
    from speciakin.web.first_svg import figure_svg

    demo = demo_dir()
    try:
        check_inputs(demo, demo / "model.toml", demo / "process.toml")  # the page's check (page_campaign)
        campaign = load_campaign(demo)
        raw = raw_run_figure(campaign.runs[0], compound_colors(load_model(demo / "model.toml")))
        raw.to_plotly_json()
        figure_svg(raw, 1000)  # the first view's still figure (web.first_view): its font code loaded
        figure = correlation_figure(["a", "b"], [[1.0, 0.5], [0.5, 1.0]], "warm-up")
        figure.add_trace(go.Contour(z=[[0.0, 1.0], [1.0, 0.0]]))
        figure.add_vrect(x0=0, x1=1)
        figure.add_hline(y=0.5, annotation_text="warm-up")
        figure.to_plotly_json()
    except (SpeciakinError, OSError, ValueError, ImportError) as exc:  # only a head start: never fatal
        log.debug("warm-up stopped: %s", exc)


def prepare() -> None:
    """Run :func:`warm_up`, once per process."""
    with _LOCK:
        if not _DONE.is_set():
            warm_up()
            _DONE.set()


def first_page(app) -> None:
    """Make the page a first visitor gets once (the check and raw data of the campaign it opens on, kept in
    the server's caches), so that the first visit waits for none of it."""
    from speciakin.errors import SpeciakinError
    from speciakin.pipeline.inputs import check_inputs

    layout = app.layout
    if callable(layout):
        try:
            layout()
        except (SpeciakinError, OSError, ValueError) as exc:  # only a head start: never fatal
            log.debug("first page not made ahead: %s", exc)
    _first_view(app)


def _first_view(app) -> None:
    """Ask for the page's HTML once (its first view's copy is made, web.first_view) and for that view's image
    at one width (another width is drawn when asked for); a server with a token answers 403 here, and its
    first visitor waits for these (the code they need is loaded by :func:`warm_up` all the same)."""
    import html
    import re

    client = app.server.test_client()
    page = client.get(app.config.requests_pathname_prefix)  # a server with a token answers 403: no head start
    found = re.search(r'data-src="([^"]+)"', page.get_data(as_text=True)) if page.status_code == 200 else None
    if found:
        client.get(html.unescape(found.group(1)) + "&w=1000")
