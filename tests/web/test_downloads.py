"""Downloads of a result's files: only files inside that result folder, nothing the browser names is trusted."""

from __future__ import annotations

import os

import pytest

from speciakin.errors import InputError
from speciakin.web import create_app
from speciakin.web.downloads import download_path, download_url, result_files

pytestmark = pytest.mark.filterwarnings("ignore")

RESULT = "20261203T130501Z-3fa2c1"


@pytest.fixture
def tree(tmp_path):
    """root/c/results/<RESULT>/ with a report, a figure, a lock; a secret beside the root and in the campaign."""
    root = tmp_path / "root"
    result = root / "c" / "results" / RESULT
    (result / "figures").mkdir(parents=True)
    (result / "report.html").write_text("<html>report</html>")
    (result / "fit.json").write_text("{}")
    (result / "figures" / "window_probability.png").write_bytes(b"\x89PNG")
    (result / ".lock").write_text("{}")
    (root / "c" / "results" / "index.sqlite").write_text("index")
    (root / "c" / "model.toml").write_text("secret model")
    (tmp_path / "secret.txt").write_text("secret")
    os.symlink(tmp_path / "secret.txt", result / "linked.txt")
    os.symlink(root / "c", result / "up")
    return root


def test_files_inside_the_result_folder_are_found(tree):
    assert download_path(tree, "c", RESULT, "report.html").read_text() == "<html>report</html>"
    assert download_path(tree, "c", RESULT, "figures/window_probability.png").name == "window_probability.png"
    # the report first, hidden files (the lock) never listed; the links are listed but refused on download
    names = result_files(tree / "c" / "results" / RESULT)
    assert names[:2] == ["report.html", "fit.json"] and ".lock" not in names


@pytest.mark.parametrize("campaign, result, name", [
    ("c", RESULT, "../index.sqlite"),                  # climbs to the results folder
    ("c", RESULT, "../../model.toml"),                 # climbs to the campaign
    ("c", RESULT, "figures/../../../model.toml"),
    ("c", RESULT, "/etc/passwd"),                      # absolute
    ("c", RESULT, "..\\..\\model.toml"),               # Windows separators
    ("c", RESULT, ".lock"),                            # hidden
    ("c", RESULT, "linked.txt"),                       # a link to a file outside the root
    ("c", RESULT, "up/model.toml"),                    # through a link to a folder outside the result
    ("c", RESULT, "report.html\x00.png"),
    ("c", RESULT, ""),
    ("c", "..", "c/model.toml"),                        # a result that is not a result folder
    ("c", f"{RESULT}/figures", "window_probability.png"),
    ("c", "../results", "index.sqlite"),
    ("..", RESULT, "report.html"),                     # a campaign outside the root
    ("/", RESULT, "report.html"),
])
def test_a_path_outside_the_result_folder_is_refused(tree, campaign, result, name):
    with pytest.raises(InputError):
        download_path(tree, campaign, result, name)


def test_a_missing_file_is_not_found(tree):
    with pytest.raises(FileNotFoundError):
        download_path(tree, "c", RESULT, "report.pdf")


def test_the_server_sends_a_result_file_as_an_attachment_and_refuses_the_rest(tree):
    app, _ = create_app(tree)
    client = app.server.test_client()
    ok = client.get(download_url("c", RESULT, "report.html"), headers={"Host": "127.0.0.1"})
    assert ok.status_code == 200 and ok.data == b"<html>report</html>"
    assert ok.headers["Content-Disposition"].startswith("attachment") and "report.html" in \
        ok.headers["Content-Disposition"]
    assert ok.headers["X-Content-Type-Options"] == "nosniff"
    for campaign, result, name in (("c", RESULT, "../../model.toml"), ("c", RESULT, "linked.txt"),
                                   ("..", RESULT, "report.html")):
        refused = client.get(download_url(campaign, result, name), headers={"Host": "127.0.0.1"})
        assert refused.status_code == 403 and b"secret" not in refused.data
    raw = client.get(f"/download?campaign=c&result={RESULT}&file=%2e%2e/%2e%2e/model.toml",
                     headers={"Host": "127.0.0.1"})
    assert raw.status_code == 403
    assert client.get(download_url("c", RESULT, "report.pdf"), headers={"Host": "127.0.0.1"}).status_code == 404


def test_downloads_need_the_token_when_the_server_requires_one(tree):
    app, _ = create_app(tree, token="t0ken")
    client = app.server.test_client()
    assert client.get(download_url("c", RESULT, "report.html")).status_code == 403
    assert client.get(download_url("c", RESULT, "report.html") + "&token=t0ken").status_code == 200
