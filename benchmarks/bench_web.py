"""How fast each view of the workbench page answers for the bundled (INVENTED) demo; target < 1 s.

The demo gets a finished result with a fit, a posterior and a window (the page's own "whole run" job
with short settings) and a second fit for the comparison.  Then a page server is started in a new
process and a headless Chromium (Playwright, Debian's /usr/bin/chromium or SPECIAKIN_CHROMIUM) opens,
in the order of a chemist's visit, every view:

    page       open the page (the root holds only the demo, so it opens it): the check and the raw
               data of the first run; "raw data" is the app's figure drawn (Playwright waiting for its
               title), "first view shown" when the check and the raw data were first on screen (the
               painting of the server's still copy of the first view, when the version sends one, or a
               figure drawn before it, the early one or the app's), "figure interactive" the first frame with a Plotly figure of the raw
               data in the page with its event handlers, answering a hover or a zoom: the early figure
               drawn over the copy (in a version that drew one) or the app's, whichever comes first
               (:data:`FIGURE_WATCH`), "app's figure drawn" the first frame with the app's figure,
               and "controls answer" the first frame in which a click on the app's tabs and drop-downs
               reaches the app (no copy over them)
    raw run    the raw data of another run
    model      the model summary and the parameter table (tab 2)
    parameter edit  a start value typed into the parameter table, until its diff is shown
    results    tab 4 first opened: the window status, the parameter table and every figure the version
               draws on opening (this one: none, each view has its sub-tab; older ones: all four)
    correlation view, pH curve view, 2-D map view, fitted curves view
               each view of tab 4 chosen (its sub-tab; nothing to do in a version without sub-tabs)
    curves     the fitted curves of another run
    history    tab 5: every result; then two results side by side (from the choice of B)
    results again  tab 4 opened a second time (from the click on it)
    page reload    the page reloaded in the same browser (its cache holds the page's code)

For each view it prints the server time (wall time of the Dash callbacks the view set off, summed,
the slowest one, and their number), the browser time (from the click to the drawn figure or table;
for the page also its first paint), the CPU time of the server process and of every Chromium process,
and the wall time of the page's main-thread tasks, best and median over the repeats, "cold" (first visit after the server started: a new process, nothing cached
in memory) and "warm" (the same visit again in that server).  Each server serves one cold visit and
``--warm`` warm ones; ``--servers`` servers are started one after another.

``--before SRC`` (a ``src`` folder of another version, e.g. extracted with
``git archive COMMIT src | tar -x -C DIR``) alternates servers of that version and of this one in the
same run and prints both side by side with the ratio (this / before).  ``uptime`` is printed before
and after.  Run: ``python benchmarks/bench_web.py`` (about two minutes, plus the demo's fit the first
time; ``--root DIR`` keeps the campaign root for the next call).
"""

from __future__ import annotations

import argparse
import io
import json
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
import urllib.request
from pathlib import Path

TARGET_S = 1.0
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
        "--disable-sync", "--no-first-run"]
TIMINGS = "/__bench_timings"


# ------------------------------------------------------------------ the server process (--serve)
class _CallbackTimer:
    """WSGI middleware: wall time of every Dash callback request, and the log on ``TIMINGS``."""

    def __init__(self, inner):
        self.inner = inner
        self.log: list[dict] = []

    def __call__(self, environ, start_response):
        path = environ.get("PATH_INFO", "")
        if path == TIMINGS:
            body, self.log = json.dumps(self.log).encode(), []
            start_response("200 OK", [("Content-Type", "application/json")])
            return [body]
        if path != "/_dash-update-component":
            return self.inner(environ, start_response)
        body = environ["wsgi.input"].read(int(environ.get("CONTENT_LENGTH") or 0))
        environ["wsgi.input"] = io.BytesIO(body)
        try:
            output = json.loads(body).get("output", "")
        except ValueError:
            output = "?"
        started, t0 = time.time(), time.perf_counter()
        answer = b"".join(self.inner(environ, start_response))
        self.log.append({"output": output, "start": started, "seconds": time.perf_counter() - t0,
                         "bytes": len(answer)})
        return [answer]


def serve(root: str) -> int:
    """Run the page on a free port (jobs in process: the benchmark starts none); print the port."""
    import logging

    logging.getLogger("werkzeug").setLevel(logging.ERROR)
    import speciakin.data.importer  # noqa: F401  (as `speciakin web` does before serving)
    import speciakin.pipeline  # noqa: F401
    from speciakin.web import create_app, make_server

    app, _ = create_app(root)
    app.server.wsgi_app = _CallbackTimer(app.server.wsgi_app)
    srv = make_server(app, "127.0.0.1", 0, token=None)
    print(srv.server_port, flush=True)
    srv.serve_forever()
    return 0


# ------------------------------------------------------------------ the demo result
def build_root(root: Path) -> None:
    """The demo with a fit and a whole run (fit, posterior, window, HTML report), made by the page's jobs
    with short settings (a few minutes; skipped when ``root`` has them)."""
    from speciakin.demo import demo_dir
    from speciakin.web.jobs import JobBoard

    campaign = root / "demo"
    if not campaign.is_dir():
        shutil.copytree(demo_dir(), campaign)
    done = campaign / "results" / ".bench-ready"
    if done.is_file():
        return
    board = JobBoard(workers=1)
    try:
        # the whole run last: the newest result, the one the results tab shows first
        for kind, settings in (("fit", {"starts": 1, "profiles": False, "draws": 20}),
                               ("run", {"starts": 1, "profiles": False, "steps": 60, "draws": 40,
                                        "formats": ["html"]})):
            t = time.perf_counter()
            job = board.submit(kind, "demo", campaign, settings)
            while job.state in ("queued", "running"):
                time.sleep(0.5)
            print(f"demo result: {kind} job {job.state} in {time.perf_counter() - t:.0f} s ({job.folder})",
                  flush=True)
            if job.state != "done":
                raise SystemExit(f"the {kind} job of the benchmark failed: {job.message}")
    finally:
        board.shutdown()
    done.write_text("made by benchmarks/bench_web.py\n")


# ------------------------------------------------------------------ the visit
def _choose(page, dropdown: str, value: str | None = None, index: int | None = None) -> str:
    page.click(f"#{dropdown}")
    if value is None:
        option = page.locator(".dash-dropdown-option").nth(index or 0)
        value = option.locator("input").get_attribute("value")
    page.click(f".dash-dropdown-option:has(input[value='{value}'])")
    return value


def _views(page, url: str):
    """(view, action, {part: selector that shows it drawn}) in the order of a chemist's visit."""
    def other(dropdown):
        def act():
            page.click(f"#{dropdown}")
            options = page.locator(".dash-dropdown-option input")
            value = options.nth(options.count() - 1).get_attribute("value")
            page.click(f".dash-dropdown-option:has(input[value='{value}'])")
            act.value = value
        return act

    raw, fit = other("raw-run"), other("fit-run")


    return [
        # the root holds one campaign, so the page opens it by itself
        ("page and campaign", lambda: page.goto(url),
         {"campaign list": "#campaign-choice-value:has-text('demo')",
          "check": "#check-summary:has-text('Ready to fit')", "raw data": "#raw-figure .gtitle"}),
        ("raw run", raw, {"raw data": lambda: f"#raw-figure .gtitle:has-text('run {raw.value}:')"}),
        ("model", lambda: page.click("text=2 Model"),
         {"summary": "#model-summary:has-text('Molecules')", "parameter table": "#param-table .ag-row"}),
        ("parameter edit", lambda: _type_start(page, EDITED[1]), {"diff": f"#param-diff .diff-add:has-text('{EDITED[1]}')"}),
        ("results", lambda: page.click("text=4 Results"),
         {"parameters": "#parameter-table .ag-row", "window status": "#window-status:has-text('window status')",
          "views shown": lambda: _shown_views_drawn(page)}),
        *[(f"{label} view", lambda v=value: _show_view(page, v), {label: selector})
          for value, label, selector in RESULT_VIEWS],
        ("curves", fit, {"fitted curves": lambda: f"#fit-figure .gtitle:has-text('run {fit.value}:')"}),
        ("history", lambda: page.click("text=5 History"), {"results index": "#history-table .ag-row"}),
        ("compare", lambda: _choose(page, "compare-b", index=1), {"side by side": "#compare-inputs-summary"}),
        ("results again", lambda: page.click("text=4 Results"),
         {"window status": "#window-status:has-text('window status')",
          "fitted curves": "#fit-figure .gtitle:has-text('fitted')"}),
        # the same browser again: its cache holds the page's code (a chemist reloading the page)
        ("page reload", lambda: page.reload(),
         {"check": "#check-summary:has-text('Ready to fit')", "raw data": "#raw-figure .gtitle"}),
    ]


#: The views of the results tab (sub-tab value, name, selector that shows it drawn), in the order visited.
RESULT_VIEWS = (("correlation", "correlation", "#correlation-figure .gtitle"),
                ("window", "pH curve", "#window-figure .gtitle:has-text('probability')"),
                ("map", "2-D map", "#map-figure .gtitle:has-text('design space')"),
                ("curves", "fitted curves", "#fit-figure .gtitle:has-text('fitted curves')"))


def _show_view(page, value: str) -> None:
    """Choose a view of the results tab (its sub-tab); a version without sub-tabs drew it on opening."""
    if page.locator(f"#result-view-{value}").count():
        page.click(f"#result-view-{value}")


def _shown_views_drawn(page) -> str:
    """Wait until every figure of the results tab that is in the page has been drawn (a version without
    sub-tabs draws them all on opening, one with sub-tabs those of the view shown); a selector to return."""
    page.wait_for_function("""() => ['correlation', 'window', 'map', 'fit'].every(k => {
        const g = document.getElementById(`${k}-figure`); return !g || g.querySelector('.gtitle'); })""")
    return "#window-status"


#: The parameter table's cell edited (row, new start value) and how the edit is typed.
EDITED = ("pKa[S.N_alkyl]", "9.65")


def _start_cell(page):
    return page.locator(f"#param-table [row-id='{EDITED[0]}'] [col-id='start']")


def _type_start(page, value: str) -> None:
    box = _start_cell(page).locator("input")
    box.fill(value)
    box.press("Enter")


#: What is done before a view's clock starts: result A chosen, another tab shown.
_BEFORE = {"parameter edit": lambda page: _start_cell(page).click(),  # the cell's editor open
           "compare": lambda page: _choose(page, "compare-a", index=0),
           "results again": lambda page: page.click("text=1 Campaign and data"),
           "page reload": lambda page: page.click("text=1 Campaign and data")}


def _fresh(page) -> None:
    """Blank the titles of the figures a view redraws, so that waiting for a title waits for the new one."""
    page.evaluate("""() => { for (const id of ['raw-figure', 'fit-figure']) {
        const t = document.querySelector(`#${id} .gtitle`); if (t) t.textContent = ''; } }""")


#: When the server's still copy of the first view (web.first_view) had its figure painted [ms since the epoch]
#: (Element Timing of its image), or null without one.
_FIRST_VIEW_SHOWN = """() => new Promise(resolve => {
    new PerformanceObserver(list => {
        const e = list.getEntries().find(x => x.identifier === 'first-view');
        if (e) resolve(performance.timeOrigin + e.renderTime);
    }).observe({type: 'element', buffered: true});
    setTimeout(() => resolve(null), 200); })"""


#: Put into every page before its own scripts (an init script): per animation frame, the first frame in which
#: the raw data's figure is INTERACTIVE, that is a Plotly figure of it is in the page with its event handlers,
#: the one an early drawing made over the first view's copy (``.first-view .fv-plot``, in versions that drew one) or
#: the app's graph (``#raw-figure``), recognised by its drag layer (``.nsewdrag``: the elements Plotly's zoom,
#: pan and hover handlers are bound to, made at the end of a drawing) and its title drawn; the first frame
#: with the app's own figure drawn (its title; "app's figure drawn"); and the first frame in which the app's
#: CONTROLS ANSWER a click: its second tab and both drop-downs of the first tab are drawn by Dash (React
#: binds their handlers when it puts them in) and are what a click at their centre hits
#: (``elementFromPoint``: no copy of the first view lies over them).  A frame callback runs only when the
#: page's main thread is free, so a click then is handled at the main thread's next task; a task then
#: running delays it by its rest.  [ms since the epoch]
FIGURE_WATCH = """window.__figureTimes = {};
(function frame() {
  const t = window.__figureTimes, now = performance.timeOrigin + performance.now();
  if (!t.interactive) {
    for (const g of document.querySelectorAll('.first-view .fv-plot, #react-entry-point #raw-figure .js-plotly-plot')) {
      if (g.querySelector('.nsewdrag') && g.querySelector('.gtitle')) {
        t.interactive = now; t.which = g.closest('.first-view') ? 'early' : 'app'; break; }
    }
  }
  if (!t.app && document.querySelector('#react-entry-point #raw-figure .gtitle')) { t.app = now; }
  if (!t.controls) {
    const hit = e => { const r = e.getBoundingClientRect(); if (!r.width || !r.height) { return false; }
      const x = document.elementFromPoint(r.left + r.width / 2, r.top + r.height / 2); return !!x && e.contains(x); };
    const tabs = document.querySelectorAll('#react-entry-point #tabs .tab');
    const drops = document.querySelectorAll('#react-entry-point #tab-page-campaign .dash-dropdown');
    if (tabs.length > 1 && drops.length >= 2 && hit(tabs[1]) && Array.from(drops).every(hit)) { t.controls = now; }
  }
  if (!t.app || !t.interactive || !t.controls) { requestAnimationFrame(frame); }
})();"""


def figure_times(page, start: float, controls: bool = True) -> dict[str, float]:
    """Seconds from ``start`` (``time.time()``) until the raw data's figure was interactive, until the app's
    figure was drawn and (with ``controls``: a page opened on the first tab) until the app's controls answered
    a click (:data:`FIGURE_WATCH`, put into the page before it was opened), once these have happened."""
    page.wait_for_function("() => window.__figureTimes && window.__figureTimes.app"
                           + (" && window.__figureTimes.controls" if controls else ""), timeout=180_000)
    t = page.evaluate("window.__figureTimes")
    out = {"figure interactive": t["interactive"] / 1000 - start, "app's figure drawn": t["app"] / 1000 - start}
    if controls:
        out["controls answer"] = t["controls"] / 1000 - start
    return out


def _cpu(pid: int) -> float:
    """User and system CPU time of process ``pid`` [s] (Linux ``/proc``; 0 elsewhere)."""
    try:
        fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    except OSError:
        return 0.0
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


def _browser_cpu(cdp) -> float:
    """Main-thread task time of the page's renderer so far [s] (Chromium's ``Performance.getMetrics``)."""
    return next(m["value"] for m in cdp.send("Performance.getMetrics")["metrics"] if m["name"] == "TaskDuration")


def _chromium_cpu(browser_cdp) -> dict[int, float]:
    """CPU time of every Chromium process [s] by process id (``SystemInfo.getProcessInfo``)."""
    return {p["id"]: p["cpuTime"] for p in browser_cdp.send("SystemInfo.getProcessInfo")["processInfo"]}


def _cpu_spent(before: dict[int, float], after: dict[int, float]) -> float:
    """CPU time spent between two :func:`_chromium_cpu` readings (processes started in between count whole)."""
    return sum(t - before.get(pid, 0.0) for pid, t in after.items())


def visit(page, url: str, pid: int, browser_cdp) -> dict[str, dict]:
    """One visit of every view; {view: {"browser": {part: s}, "server": [callback times], "cpu": {...}}}."""
    urllib.request.urlopen(url.rstrip("/") + TIMINGS).read()  # nothing left from an earlier visit
    cdp = page.context.new_cdp_session(page)
    cdp.send("Performance.enable")
    out = {}
    for view, action, parts in _views(page, url):
        if view in ("raw run", "curves"):
            _fresh(page)
        if view in _BEFORE:
            _BEFORE[view](page)
            page.wait_for_timeout(300)
            urllib.request.urlopen(url.rstrip("/") + TIMINGS).read()
        if view == "page reload":
            cdp.detach()
        cpu0 = (_cpu(pid), 0.0 if view == "page reload" else _browser_cpu(cdp), _chromium_cpu(browser_cdp))
        start = time.time()
        action()
        if view == "page reload":
            cdp = page.context.new_cdp_session(page)  # the renderer's counters start again with the new page
            cdp.send("Performance.enable")
        seen = {}
        for part, selector in parts.items():
            page.wait_for_selector(selector() if callable(selector) else selector, timeout=180_000)
            seen[part] = time.time() - start
        if view.startswith("page"):
            seen["first paint"] = page.evaluate(
                "() => (performance.getEntriesByName('first-contentful-paint')[0] || {startTime: NaN}).startTime"
            ) / 1000
            shown = page.evaluate(_FIRST_VIEW_SHOWN)
            # a version without the server's copy shows the first view when the app has drawn its figure
            seen.update(figure_times(page, start, controls=view == "page"))
            # the still copy's image painted, or a figure drawn before it (the early one or the app's)
            seen["first view shown"] = min(seen["raw data"], seen["figure interactive"],
                                           seen["raw data"] if shown is None else shown / 1000 - start)
        page.wait_for_timeout(250)  # callbacks still running after the drawing (none expected) are counted
        log = json.loads(urllib.request.urlopen(url.rstrip("/") + TIMINGS).read())
        out[view] = {"browser": seen, "server": [e["seconds"] for e in log], "bytes": sum(e["bytes"] for e in log),
                     "cpu": {"server": _cpu(pid) - cpu0[0], "browser": _browser_cpu(cdp) - cpu0[1],
                             "chromium": _cpu_spent(cpu0[2], _chromium_cpu(browser_cdp))},
                     "slowest": max(log, key=lambda e: e["seconds"])["output"][:60] if log else ""}
    return out


def _start_server(src: Path, root: Path):
    env = dict(os.environ, PYTHONPATH=str(src), MPLBACKEND="Agg")
    env["NUMBA_CACHE_DIR"] = str(src.parent / ".numba_cache")  # each version its own compiled kernel
    proc = subprocess.Popen([sys.executable, __file__, "--serve", str(root)], env=env, stdout=subprocess.PIPE,
                            text=True)
    port = int(proc.stdout.readline())
    return proc, f"http://127.0.0.1:{port}/"


def _summary(values: list[float]) -> str:
    if not values:
        return f"{'-':>15}"
    return f"{min(values):6.2f} {statistics.median(values):6.2f}  "


def report(results: dict[str, list[dict]], labels: list[str]) -> None:
    """Per view and part: browser and server seconds, best and median, cold and warm."""
    first = results[labels[0]][0]["cold"][0]
    views = list(first.keys())
    print("\nseconds, best and median (cold: first visit after the server started; warm: again)")
    head = f"{'view':<18}{'part':<16}{'':<8}" + "".join(f"{'cold ' + l:>15}{'warm ' + l:>15}" for l in labels)
    print(head + ("   ratio warm/cold medians of the last to the first" if len(labels) > 1 else ""))
    for view in views:
        parts = list(first[view]["browser"].keys())
        rows = [(p, "browser", lambda r, v=view, p=p: r[v]["browser"].get(p)) for p in parts]
        rows += [("callbacks sum", "server", lambda r, v=view: sum(r[v]["server"])),
                 ("slowest", "server", lambda r, v=view: max(r[v]["server"], default=0.0)),
                 ("round trips", "server", lambda r, v=view: float(len(r[v]["server"]))),
                 ("cpu", "server", lambda r, v=view: r[v]["cpu"]["server"]),
                 ("main thread", "browser", lambda r, v=view: r[v]["cpu"]["browser"]),
                 ("cpu", "browser", lambda r, v=view: r[v]["cpu"].get("chromium", float("nan")))]
        for part, where, get in rows:
            line = f"{view:<18}{part:<16}{where:<8}"
            medians = []
            for label in labels:
                for kind in ("cold", "warm"):
                    values = [get(r) for s in results[label] for r in s[kind]]
                    values = [v for v in values if v is not None and not math.isnan(v)]
                    line += f"{_summary(values):>15}"
                    medians.append(statistics.median(values) if values else float("nan"))
            if len(labels) > 1:
                line += "   " + " ".join(f"{b / a:6.3f}" if a else "     -" for a, b in
                                         ((medians[0], medians[2]), (medians[1], medians[3])))
            print(line)
        print(f"{'':<18}{'slowest callback':<24}" + " | ".join(
            results[l][0]["cold"][0][view]["slowest"] for l in labels))
    worst = {l: max(x for s in results[l] for k in ("cold", "warm") for r in s[k] for v in r
                    for x in r[v]["browser"].values() if not math.isnan(x)) for l in labels}
    for label in labels:
        print(f"slowest view in the browser ({label}): {worst[label]:.2f} s = {worst[label] / TARGET_S:.2f} x the "
              f"{TARGET_S:g} s target")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n", 1)[0])
    parser.add_argument("--serve", metavar="ROOT", help=argparse.SUPPRESS)
    parser.add_argument("--root", help="campaign root to make (or reuse) instead of a temporary one")
    parser.add_argument("--servers", type=int, default=3, help="servers started (cold visits) per version")
    parser.add_argument("--warm", type=int, default=2, help="warm visits per server")
    parser.add_argument("--before", help="the src folder of a version to compare with, servers alternated")
    parser.add_argument("--save", help="write every measured time to this JSON file")
    args = parser.parse_args()
    if args.serve:
        return serve(args.serve)
    chromium = os.environ.get("SPECIAKIN_CHROMIUM", "/usr/bin/chromium")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        print("skipped: playwright is not installed")
        return 0
    if not Path(chromium).is_file():
        print(f"skipped: no Chromium at {chromium}")
        return 0
    here = Path(__file__).resolve().parent.parent / "src"
    versions = {"this": here} if not args.before else {"before": Path(args.before).resolve(), "this": here}
    root = Path(args.root) if args.root else Path(tempfile.mkdtemp(prefix="bench-web-"))
    root.mkdir(parents=True, exist_ok=True)
    build_root(root)
    print("load before:", os.getloadavg(), flush=True)
    results: dict[str, list[dict]] = {label: [] for label in versions}
    starts: dict[str, list[float]] = {label: [] for label in versions}
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=chromium, args=ARGS)
        browser_cdp = browser.new_browser_cdp_session()
        for n in range(args.servers):
            for label, src in versions.items():
                t = time.perf_counter()
                proc, url = _start_server(src, root)
                starts[label].append(time.perf_counter() - t)
                try:
                    run = {"cold": [], "warm": []}
                    for kind in ["cold"] + ["warm"] * args.warm:
                        # a new browser context each visit: nothing remembered in the browser's session
                        context = browser.new_context(viewport={"width": 1300, "height": 900})
                        context.add_init_script(FIGURE_WATCH)
                        run[kind].append(visit(context.new_page(), url, proc.pid, browser_cdp))
                        context.close()
                finally:
                    proc.terminate()
                    proc.wait(timeout=30)
                results[label].append(run)
                print(f"server {n + 1}/{args.servers} ({label}) done; load {os.getloadavg()}", flush=True)
        browser.close()
    if args.save:
        Path(args.save).write_text(json.dumps({"results": results, "starts": starts}, indent=1))
    report(results, list(versions))
    for label in versions:
        print(f"server start until it listens ({label}): best {min(starts[label]):.2f} s, "
              f"median {statistics.median(starts[label]):.2f} s")
    print("load after:", os.getloadavg())
    if not args.root:
        shutil.rmtree(root, ignore_errors=True)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
