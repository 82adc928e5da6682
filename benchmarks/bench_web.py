"""How fast the workbench page answers for the bundled (INVENTED) demo campaign; target < 1 s.

Prints best and median of several blocks, and the ratio to the 1 s target:

* server: the page (``/``), its layout and its callback list over HTTP;
* check: the check callback of the demo, first (workbook read) and repeated (cached);
* browser (when Chromium is at /usr/bin/chromium or SPECIAKIN_CHROMIUM): a reload
  until the check summary of the demo is on screen, assets cached as in a
  second visit.

Run: ``python benchmarks/bench_web.py`` (about a minute).
"""

from __future__ import annotations

import os
import shutil
import statistics
import tempfile
import threading
import time
import urllib.request
from pathlib import Path

TARGET_S = 1.0
REPEATS = 7


def _times(call, n=REPEATS):
    out = []
    for _ in range(n):
        t = time.perf_counter()
        call()
        out.append(time.perf_counter() - t)
    return out


def _say(label, times):
    best, median = min(times), statistics.median(times)
    print(f"{label:<44} best {best * 1e3:8.1f} ms  median {median * 1e3:8.1f} ms  "
          f"median/target {median / TARGET_S:6.3f}", flush=True)


def main() -> int:
    import speciakin.data.importer  # noqa: F401  (as `speciakin web` does before serving)
    import speciakin.pipeline  # noqa: F401
    from speciakin.demo import demo_dir
    from speciakin.web import create_app, make_server

    root = Path(tempfile.mkdtemp(prefix="bench-web-"))
    shutil.copytree(demo_dir(), root / "demo")
    app, state = create_app(root)
    srv = make_server(app, "127.0.0.1", 0, token=None)
    threading.Thread(target=srv.serve_forever, daemon=True).start()
    url = f"http://127.0.0.1:{srv.server_port}/"
    try:
        for path in ("", "_dash-layout", "_dash-dependencies"):
            _say(f"server GET /{path}", _times(lambda: urllib.request.urlopen(url + path).read()))
        from speciakin.data import check_campaign

        folder = root / "demo"
        _say("check of the demo (workbook read each time)",
             _times(lambda: check_campaign(folder, model=folder / "model.toml"), 3))
        _say("check of the demo (page cache)", _times(lambda: state.cached(
            "check", state.inputs_of(folder), lambda: check_campaign(folder, model=folder / "model.toml"))))
        _browser(url)
    finally:
        srv.shutdown()
        shutil.rmtree(root, ignore_errors=True)
    return 0


def _browser(url: str) -> None:
    chromium = os.environ.get("SPECIAKIN_CHROMIUM", "/usr/bin/chromium")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        print("browser: skipped (playwright not installed)")
        return
    if not Path(chromium).is_file():
        print(f"browser: skipped (no Chromium at {chromium})")
        return
    args = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
            "--disable-sync", "--no-first-run"]
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=args)
        page = browser.new_page()
        page.goto(url)
        page.click("#campaign-choice")
        page.click(".dash-dropdown-option:has(input[value='demo'])")
        page.wait_for_selector("#check-summary:has-text('Ready to fit')", timeout=120_000)

        def reload():
            page.reload()
            page.wait_for_selector("#check-summary:has-text('Ready to fit')", timeout=120_000)

        def first_paint():
            page.reload()
            page.wait_for_selector("#campaign-choice-value:has-text('demo')", timeout=120_000)
        _say("browser: reload until the campaign list shows", _times(first_paint))
        _say("browser: reload until the demo's check shows", _times(reload))
        browser.close()


if __name__ == "__main__":
    raise SystemExit(main())
