"""Security rules of the page: the campaign root, escaped user text, loopback or token."""

from __future__ import annotations

import json
import os
import time

import pytest

from speciakin.errors import InputError
from speciakin.web import create_app, is_loopback, make_server
from speciakin.web.paths import inside_root, safe_upload_name, store_workbook

from .conftest import SCRIPT_NAME

pytestmark = pytest.mark.filterwarnings("ignore")


def _problem_rows(table: list) -> list[dict]:
    """The problems of the check table in a callback answer: {column: text} per body row."""
    body = table[1]["props"]["children"]
    return [{cell["props"]["data-col"]: cell["props"]["children"] for cell in row["props"]["children"]}
            for row in body]


def _callback(client, campaign: str) -> dict:
    """POST the page's check callback with ``campaign`` as the browser would send it."""
    outputs = [("check-summary", "children"), ("check-table", "children"), ("raw-run", "options"),
               ("raw-run", "value"), ("raw-figure", "figure"), ("raw-drawn", "data")]
    body = {"output": ".." + "...".join(f"{i}.{p}" for i, p in outputs) + "..",
            "outputs": [{"id": i, "property": p} for i, p in outputs],
            "inputs": [{"id": "campaign-choice", "property": "value", "value": campaign},
                       {"id": "campaign-message", "property": "children", "value": ""}],
            "changedPropIds": ["campaign-choice.value"], "state": []}
    answer = client.post("/_dash-update-component", json=body, headers={"Host": "127.0.0.1"})
    assert answer.status_code == 200, answer.data[:500]
    return json.loads(answer.data)["response"]


@pytest.mark.parametrize("name", ["..", "../..", "/etc", "demo/../../x", "%2e%2e"])
def test_a_path_outside_the_root_is_refused_by_the_page(root, name):
    app, _ = create_app(root)
    response = _callback(app.server.test_client(), name)
    summary = json.dumps(response["check-summary"]["children"])
    if name == "%2e%2e":  # a literal (odd) folder name inside the root, never URL-decoded: not found there
        rows = _problem_rows(response["check-table"]["children"])
        assert [r["message"] for r in rows] == ["campaign not found"]
        assert str(root) in rows[0]["where"] or rows[0]["where"] == "%2e%2e"
    else:
        assert "only folders inside the campaign root" in summary
        assert _problem_rows(response["check-table"]["children"]) == []


def test_inside_root_refuses_escapes_and_symbolic_links(tmp_path):
    (tmp_path / "root" / "a").mkdir(parents=True)
    (tmp_path / "outside").mkdir()
    os.symlink(tmp_path / "outside", tmp_path / "root" / "link")
    base = tmp_path / "root"
    assert inside_root(base, "a") == (base / "a").resolve()
    for bad in ("../outside", str(tmp_path / "outside"), "link", "a/../../outside", "", "a\x00"):
        with pytest.raises(InputError):
            inside_root(base, bad)


def test_uploaded_names_are_sanitised_and_sizes_limited(tmp_path, monkeypatch):
    assert safe_upload_name("../../evil dir/run 1.xlsx") == "run_1.xlsx"
    assert safe_upload_name("C:\\Users\\x\\..\\camp.xlsx") == "camp.xlsx"
    for bad in ("notes.txt", ".xlsx", "../..", None):
        with pytest.raises(InputError):
            safe_upload_name(bad)
    folder = tmp_path / "c"
    folder.mkdir()
    (folder / "campaign.xlsx").write_bytes(b"old")
    path = store_workbook(folder, "../new.xlsx", b"new")
    assert path == folder / "new.xlsx" and path.read_bytes() == b"new"
    assert [p.read_bytes() for p in (folder / "previous-workbooks").iterdir()] == [b"old"]
    monkeypatch.setattr("speciakin.web.paths.MAX_UPLOAD_BYTES", 2)
    with pytest.raises(InputError, match="too large"):
        store_workbook(folder, "big.xlsx", b"123")


def test_workbooks_replaced_within_one_second_are_all_kept(tmp_path, monkeypatch):
    # the clock is frozen, so every upload below falls into the same second
    frozen = time.gmtime(0)
    monkeypatch.setattr("speciakin.web.paths.time.gmtime", lambda *_: frozen)
    folder = tmp_path / "c"
    folder.mkdir()
    (folder / "campaign.xlsx").write_bytes(b"first")
    store_workbook(folder, "campaign.xlsx", b"second")
    store_workbook(folder, "campaign.xlsx", b"third")
    store_workbook(folder, "other.xlsx", b"fourth")
    kept = sorted(p.read_bytes() for p in (folder / "previous-workbooks").iterdir())
    assert kept == [b"first", b"second", b"third"]
    assert [p.name for p in folder.glob("*.xlsx")] == ["other.xlsx"]


def test_a_script_in_a_compound_name_is_shown_as_text(server, page, shot):
    url, _ = server
    page.goto(url)
    page.wait_for_selector("#campaign-choice")
    from .test_journey import choose

    choose(page, "campaign-choice", "script-name")
    page.wait_for_selector("#check-summary:has-text('error(s)')")
    page.wait_for_selector("#check-table tr.problem")
    assert SCRIPT_NAME in page.inner_text("#check-table")
    assert page.evaluate("window.__injected") is None
    assert page.locator("#check-table script").count() == 0
    shot(page, "09-script-name-as-text")


def test_a_host_other_than_loopback_needs_a_token(root, capsys):
    from speciakin.cli.main import main

    assert is_loopback("127.0.0.1") and is_loopback("::1") and is_loopback("localhost")
    assert not is_loopback("0.0.0.0") and not is_loopback("192.168.1.5")
    app, _ = create_app(root)
    with pytest.raises(InputError, match="needs a token"):
        make_server(app, "0.0.0.0", 0, token=None)
    assert main(["web", str(root), "--host", "0.0.0.0", "--port", "0", "--no-browser"]) == 2
    assert "needs a token" in capsys.readouterr().err


def test_with_a_token_requests_without_it_get_403(root):
    app, _ = create_app(root, token="s3cret-token")
    client = app.server.test_client()
    assert client.get("/").status_code == 403
    assert client.get("/_dash-layout").status_code == 403
    assert client.get("/?token=wrong").status_code == 403
    assert client.get("/?token=s3cret-token").status_code == 200
    assert client.get("/_dash-layout").status_code == 200  # the cookie set by the first visit


def test_without_a_token_only_loopback_names_are_answered(root):
    app, _ = create_app(root)
    client = app.server.test_client()
    assert client.get("/", headers={"Host": "127.0.0.1:8765"}).status_code == 200
    assert client.get("/", headers={"Host": "localhost:8765"}).status_code == 200
    assert client.get("/", headers={"Host": "attacker.example:8765"}).status_code == 403
