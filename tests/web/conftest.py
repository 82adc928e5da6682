"""Browser tests of the workbench page: a real headless Chromium driven by Playwright.

Without Chromium (or Playwright) the tests are skipped with the reason; with
``SPECIAKIN_REQUIRE_BROWSER=1`` (set by CI) a missing browser fails them.
Screenshots of every step go to ``tests/web/screenshots/`` (git-ignored).
The campaigns are copies of the bundled INVENTED demo in a temporary root.
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import pytest

CHROMIUM = os.environ.get("SPECIAKIN_CHROMIUM", "/usr/bin/chromium")
SHOTS = Path(__file__).resolve().parent / "screenshots"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
#: The planted mistake of the "planted" campaign: (sheet, spreadsheet row, column letter, value).
PLANTED = ("Runs", 4, "G", "fifty")
SCRIPT_NAME = "<script>window.__injected=1</script>QX"


def _browser_missing() -> str | None:
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "playwright is not installed (pip install playwright)"
    if not Path(CHROMIUM).is_file():
        return f"no Chromium at {CHROMIUM} (apt-get install chromium, or set SPECIAKIN_CHROMIUM)"
    return None


def _edit_cell(book: Path, sheet: str, cell: str, value) -> None:
    from openpyxl import load_workbook

    wb = load_workbook(book)
    wb[sheet][cell] = value
    wb.save(book)


@pytest.fixture(scope="session")
def root(tmp_path_factory):
    """A campaign root: the demo, the demo with one planted mistake, one with a script as a
    compound name, and the reduced demo (three runs) for short jobs."""
    from pipeline.regression_case import build_reduced_demo
    from speciakin.demo import demo_dir

    base = tmp_path_factory.mktemp("campaigns")
    for name in ("demo", "planted", "script-name"):
        shutil.copytree(demo_dir(), base / name, ignore=shutil.ignore_patterns("results"))
    sheet, row, col, value = PLANTED
    _edit_cell(base / "planted" / "campaign.xlsx", sheet, f"{col}{row}", value)
    _edit_cell(base / "script-name" / "campaign.xlsx", "HPLC results", "D2", SCRIPT_NAME)
    build_reduced_demo(base / "short")
    return base


@pytest.fixture(scope="session")
def server(root):
    """The page served on a free loopback port with jobs on a Dask local cluster (as
    ``speciakin web`` runs them); yields (base url, state)."""
    from speciakin.web import create_app, make_server
    from speciakin.web.dask_jobs import DaskJobBoard

    app, state = create_app(root, board=DaskJobBoard())
    srv = make_server(app, "127.0.0.1", 0, token=None)
    thread = threading.Thread(target=srv.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{srv.server_port}/", state
    srv.shutdown()
    state.board.shutdown()


@pytest.fixture(scope="session")
def browser():
    reason = _browser_missing()
    if reason:
        if os.environ.get("SPECIAKIN_REQUIRE_BROWSER") == "1":
            pytest.fail(f"browser tests required (SPECIAKIN_REQUIRE_BROWSER=1) but {reason}")
        pytest.skip(f"browser tests skipped: {reason}")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield b
        b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1300, "height": 900})
    pg = context.new_page()
    pg.set_default_timeout(60_000)
    yield pg
    context.close()


@pytest.fixture
def shot():
    """``shot(page, name)`` saves a full-page screenshot as screenshots/<name>.png."""
    SHOTS.mkdir(exist_ok=True)

    def take(page, name: str) -> Path:
        path = SHOTS / f"{name}.png"
        page.screenshot(path=str(path), full_page=True)
        return path
    return take


def differing_pixels(first: Path, second: Path) -> tuple[int, int]:
    """(pixels of screenshot ``first`` that differ from ``second``, pixels in all): a pixel differs when it is
    darker or lighter by more than 64 of 255 than every pixel around its place in ``second`` (so text put a
    fraction of a pixel elsewhere, with other anti-aliasing, does not count; a line, a marker or a text out
    of place by more does).  The screenshots must have the same size."""
    from PIL import Image, ImageChops, ImageFilter

    a, b = Image.open(first).convert("L"), Image.open(second).convert("L")
    assert a.size == b.size, (a.size, b.size)
    lighter = ImageChops.subtract(a, b.filter(ImageFilter.MaxFilter(3)))
    darker = ImageChops.subtract(b.filter(ImageFilter.MinFilter(3)), a)
    differ = sum(ImageChops.lighter(lighter, darker).point(lambda v: 255 if v > 64 else 0).histogram()[255:])
    return differ, a.size[0] * a.size[1]
