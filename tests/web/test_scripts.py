"""The scripts the page lists: the regenerator runtime in place of Babel's polyfill, no data table, and the
scripts Dash loads later preloaded (no browser; the browser tests draw the page with them)."""

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
    from dash import Dash, html as dash_html

    plain_app = Dash(__name__)
    plain_app.layout = dash_html.Div()
    plain = plain_app.server.test_client().get("/").get_data(as_text=True)
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


@pytest.mark.parametrize("query, status", [("", 403), ("?token=wrong", 403), ("?token=secret", 200)])
def test_the_runtime_is_behind_the_token_guard(tmp_path, query, status):
    from speciakin.web import create_app

    app, _ = create_app(tmp_path, token="secret")
    assert app.server.test_client().get("/" + scripts.RUNTIME_PATH + query, headers=HOST).status_code == status


def test_the_runtime_is_behind_the_loopback_guard(tmp_path):
    from speciakin.web import create_app

    app, _ = create_app(tmp_path)
    assert app.server.test_client().get("/" + scripts.RUNTIME_PATH, headers={"Host": "evil.example"}).status_code == 403
