"""The plotting library the page sends: plotly.js of the page's trace types only in place of the full one (no browser).

The bundle must be the plotly.js version the ``plotly`` package makes its
figures for, hold every trace type the page draws, and be sent from the
address Dash's graph component loads plotly.js from, behind the same guards
as the page.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from speciakin.web import bundles

HOST = {"Host": "127.0.0.1"}


def test_the_bundle_is_the_plotly_js_version_of_the_plotly_package():
    # plotly.offline.get_plotlyjs_version() names the plotly.js the package's figure schema is written for
    assert bundles.bundle_version() == bundles.plotly_js_version()


def test_the_bundle_holds_every_trace_type_the_page_draws():
    import plotly.graph_objects as go

    import speciakin.web.figures as figures
    import speciakin.web.warm as warm

    source = "".join(Path(module.__file__).read_text(encoding="utf-8") for module in (figures, warm))
    made = {name for name in re.findall(r"go\.(\w+)\(", source) if name != "Figure"}
    assert made, "no trace constructor found in web/figures.py or web/warm.py"
    kinds = {getattr(go, name)().type for name in made}
    held = bundles.bundle_traces()
    assert kinds <= held, f"traces the bundle lacks: {sorted(kinds - held)}"
    # the same reading of the full bundle finds its many more trace types (the reading is not empty-handed)
    full = Path(go.__file__).resolve().parent.parent / "package_data" / "plotly.min.js"
    assert held < bundles.bundle_traces(full)


def _app(tmp_path, **kwargs):
    from speciakin.web import create_app

    app, _ = create_app(tmp_path, **kwargs)
    return app


def test_dash_plotly_address_sends_the_small_bundle(tmp_path):
    client = _app(tmp_path).server.test_client()
    sent = client.get("/" + bundles.DASH_PLOTLY_PATH, headers=HOST)
    assert sent.status_code == 200
    assert sent.get_data() == bundles.COMPILE_HINT + bundles.BUNDLE.read_bytes()
    assert sent.headers["Content-Type"].startswith("application/javascript")
    again = client.get("/" + bundles.DASH_PLOTLY_PATH, headers={**HOST, "If-None-Match": sent.headers["ETag"]})
    assert again.status_code == 304 and again.get_data() == b""


def test_a_bundle_of_another_version_leaves_dash_full_bundle(tmp_path, monkeypatch):
    monkeypatch.setattr(bundles, "plotly_js_version", lambda: "0.0.1")
    sent = _app(tmp_path).server.test_client().get("/" + bundles.DASH_PLOTLY_PATH, headers=HOST)
    assert sent.status_code == 200
    assert len(sent.get_data()) > 2 * bundles.BUNDLE.stat().st_size  # Dash's own: the full plotly.js


@pytest.mark.parametrize("query, status", [("", 403), ("?token=wrong", 403), ("?token=secret", 200)])
def test_the_bundle_is_behind_the_token_guard(tmp_path, query, status):
    client = _app(tmp_path, token="secret").server.test_client()
    assert client.get("/" + bundles.DASH_PLOTLY_PATH + query, headers=HOST).status_code == status


def test_the_bundle_is_behind_the_loopback_guard(tmp_path):
    client = _app(tmp_path).server.test_client()
    assert client.get("/" + bundles.DASH_PLOTLY_PATH, headers={"Host": "evil.example"}).status_code == 403
