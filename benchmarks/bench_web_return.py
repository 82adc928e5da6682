"""The page opened again by a returning visitor: a browser profile kept on disk, the page in a new tab.

``bench_web.py`` measures first-ever visits (a new browser context each time: nothing cached) and a
reload.  A chemist who comes back opens the page in a new tab of the same browser, or after restarting
it, with the browser's disk cache holding the page's scripts and, from the third load of a script on,
V8's code cache beside it (the compiled code: no compiling at all).  This benchmark starts a page server
(``bench_web.py --serve``) for the bundled (INVENTED) demo, makes a new browser profile, and opens the page
``--visits`` times, each in a new tab (the tab before is closed), then once more after restarting the
browser with the same profile.  Per visit it prints, best and median over ``--servers`` servers (a new
profile each), when the first view was shown (the still copy's image painted, or a figure drawn before it,
as bench_web), when the
figure became interactive and when the app's figure was drawn (Dash ready), with the load average.
``--before SRC`` alternates servers of another version (a ``src`` folder) with this one and prints the
ratios.  These are not the cold figures: the first visit of each profile is.

"Figure interactive" is the first animation frame in which a Plotly figure of the raw data is in the page
with its event handlers, so that it answers a hover or a zoom: the early figure plotly.js draws over the
first view's copy before Dash's app had started (in versions that drew one) or the app's own graph, whichever
comes first; it is recognised by its drag layer (``.nsewdrag``, the elements Plotly binds its zoom, pan and
hover handlers to at the end of a drawing) and its title (``bench_web.FIGURE_WATCH``).  "App's figure drawn"
is the first frame with the app's graph drawn; in a version without the early figure the two are the same.
"Controls answer" is the first frame in which the app's second tab and the first tab's two drop-downs are
Dash's own and a click at their centre reaches them (no copy of the first view over them; the frame runs
when the main thread is free).  "A tab click answered" checks that with real clicks: per server one more
first-ever visit, in a profile of its own, clicks the second tab every 25 ms from the moment the tabs are
on the page until the tab shows itself chosen (its click handled by the app and painted).

Run: ``python benchmarks/bench_web_return.py --root DIR`` (DIR as made by ``bench_web.py --root DIR``,
or a new folder: the demo result is made first).
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench_web  # noqa: E402  (the demo root, the server and the first view's timing)


#: What is timed per visit ("a tab click answered": first-ever visits of a profile of their own, below).
PARTS = ("first view shown", "figure interactive", "app's figure drawn", "controls answer", "a tab click answered")

#: Per animation frame: the first frame in which the app's second tab shows itself chosen (its click handled
#: and painted).  [ms since the epoch]
CLICK_WATCH = """window.__clickTimes = {};
(function frame() {
  const tab = document.querySelectorAll('#react-entry-point #tabs .tab')[1];
  if (tab && tab.classList.contains('tab--selected')) {
    window.__clickTimes.answered = performance.timeOrigin + performance.now(); return; }
  requestAnimationFrame(frame);
})();"""


def _open(context, url: str) -> dict[str, float]:
    """Open the page in a new tab of ``context``; seconds until the first view was shown and the figure drawn."""
    page = context.new_page()
    page.add_init_script(bench_web.FIGURE_WATCH)
    start = time.time()
    page.goto(url)
    page.wait_for_selector("#raw-figure .gtitle", timeout=180_000)
    times = bench_web.figure_times(page, start)
    shown = page.evaluate(bench_web._FIRST_VIEW_SHOWN)
    page.wait_for_timeout(1500)  # the idle work after the figure (the grid's code) is done and cached too
    page.close()
    drawn = min(times.values())  # a figure drawn before the still copy's image was painted shows the view too
    return {**times, "first view shown": drawn if shown is None else min(shown / 1000 - start, drawn)}


def click_visit(p, chromium: str, url: str) -> float:
    """A first-ever visit (a new profile) in which the second tab is clicked every 25 ms from the moment the
    first view's tabs are on the page (a click on the copy does nothing): seconds until a click was answered,
    the tab shown chosen (:data:`CLICK_WATCH`)."""
    with tempfile.TemporaryDirectory(prefix="bench-web-profile-") as folder:
        context = p.chromium.launch_persistent_context(folder, executable_path=chromium, args=bench_web.ARGS,
                                                       viewport={"width": 1300, "height": 900})
        try:
            page = context.new_page()
            page.add_init_script(CLICK_WATCH)
            start = time.time()
            page.goto(url, wait_until="commit")
            tab = page.wait_for_selector(".first-view .fv-tab:nth-child(2), #react-entry-point #tabs .tab:nth-child(2)",
                                         timeout=180_000)
            box = tab.bounding_box()
            deadline = time.time() + 180
            while not page.evaluate("!!window.__clickTimes.answered") and time.time() < deadline:
                page.mouse.click(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
                page.wait_for_timeout(25)
            return page.evaluate("window.__clickTimes.answered") / 1000 - start
        finally:
            context.close()


def profile_visits(p, chromium: str, url: str, visits: int) -> list[dict[str, float]]:
    """``visits`` visits in new tabs of one new profile, then one after restarting the browser on it."""
    out = []
    with tempfile.TemporaryDirectory(prefix="bench-web-profile-") as folder:
        for restart in (False, True):
            context = p.chromium.launch_persistent_context(folder, executable_path=chromium, args=bench_web.ARGS,
                                                           viewport={"width": 1300, "height": 900})
            try:
                for _ in range(1 if restart else visits):
                    out.append(_open(context, url))
            finally:
                context.close()
    return out


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--root", required=True, help="campaign root (made as bench_web.py makes it if needed)")
    parser.add_argument("--servers", type=int, default=3, help="servers (and new profiles) per version")
    parser.add_argument("--visits", type=int, default=4, help="visits in new tabs before the browser restart")
    parser.add_argument("--before", help="the src folder of a version to compare with, servers alternated")
    args = parser.parse_args()
    from playwright.sync_api import sync_playwright

    chromium = os.environ.get("SPECIAKIN_CHROMIUM", "/usr/bin/chromium")
    here = Path(__file__).resolve().parent.parent / "src"
    versions = {"this": here} if not args.before else {"before": Path(args.before).resolve(), "this": here}
    root = Path(args.root)
    root.mkdir(parents=True, exist_ok=True)
    bench_web.build_root(root)
    print("load before:", os.getloadavg(), flush=True)
    results: dict[str, list[list[dict]]] = {label: [] for label in versions}
    with sync_playwright() as p:
        for n in range(args.servers):
            for label, src in versions.items():
                proc, url = bench_web._start_server(src, root)
                try:
                    results[label].append(profile_visits(p, chromium, url, args.visits))
                    results[label][-1][0]["a tab click answered"] = click_visit(p, chromium, url)
                finally:
                    proc.terminate()
                    proc.wait(timeout=30)
                print(f"server {n + 1}/{args.servers} ({label}) done; load {os.getloadavg()}", flush=True)
    names = [f"visit {i + 1}" + (" (first ever)" if i == 0 else " (new tab)") for i in range(args.visits)]
    names.append(f"visit {args.visits + 1} (browser restarted)")
    print("\nseconds, best and median over the profiles")
    print(f"{'visit':<30}{'part':<22}" + "".join(f"{label:>16}" for label in versions)
          + ("   ratio of medians" if len(versions) > 1 else ""))
    for i, name in enumerate(names):
        for part in PARTS:
            if part not in results[list(versions)[0]][0][i]:
                continue
            medians = []
            line = f"{name:<30}{part:<22}"
            for label in versions:
                values = [run[i][part] for run in results[label]]
                medians.append(statistics.median(values))
                line += f"{min(values):7.2f} {medians[-1]:7.2f} "
            if len(medians) > 1:
                line += f"  {medians[1] / medians[0]:6.3f}"
            print(line)
    print("load after:", os.getloadavg())
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
