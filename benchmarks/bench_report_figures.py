"""Figures and report of a short demo job: this worktree (B) against a git revision (A), side by side.

Makes one short run of the bundled INVENTED demo campaign (``pipeline.run_all`` without a renderer:
check, fit with one start and profiles, 24 posterior steps, window; timed once, it is the same code
in A and B), keeps its results, then renders them alternately with revision A (exported with
``git archive``) and with this worktree, each in a fresh process, A B B A ...: what ``run_all``
renders, in its order: the figures folder of the fit (``report.results.fit_figures``, curves of the
fit without bands) and of the posterior (``posterior_figures``), the window's figures
(``pipeline.steps.window_figures``), and the report (``write_report``: building the document,
which draws its figures with the posterior's bands, and rendering HTML, PDF and XLSX); then the same
report once more in the same process (as ``speciakin web`` or a test session may).  Both read the
same results (pickled by this process, without the objective), so no worker needs the compiled
kernel.

Prints per part the best and median wall and CPU time of each version with the load average of every
block, the ratio B/A, the time inside the figure helpers (``speciakin.report.figures``) by helper,
and the short run's total as its rendering-free part (measured once) plus the rendering of A or B.
On a crowded host (load above the 2 cores) read CPU time rather than wall time.

Run:  NUMBA_CACHE_DIR=.numba_cache MPLBACKEND=Agg .venv/bin/python benchmarks/bench_report_figures.py
      --compare REV [--rounds 2] [--results-pickle FILE]
"""

from __future__ import annotations

import argparse
import copyreg
import json
import os
import pickle
import subprocess
import sys
import tempfile
import time
import types
from pathlib import Path

import numpy as np

PARTS = ["fit figures", "posterior figures", "window figures", "report: build document (its figures)",
         "report: render html, pdf, xlsx", "all rendering", "the same report again (same process)"]


def load() -> str:
    return "/".join(f"{x:.1f}" for x in os.getloadavg())


def _proxy(mapping: dict) -> types.MappingProxyType:
    """A read-only view of ``mapping`` (how the pickled results rebuild a mapping proxy)."""
    return types.MappingProxyType(mapping)


def prepare(folder: Path, pickle_path: Path) -> float:
    """The short demo run without a renderer into ``folder``; its results pickled; returns its wall time [s]."""
    from speciakin import pipeline
    from speciakin.demo import demo_dir

    inputs = pipeline.resolve_inputs(demo_dir())
    t = time.perf_counter()
    results = pipeline.run_all(inputs, folder, renderer=None, starts=1, n_steps=24, seed=1, invented=True)
    wall = time.perf_counter() - t
    fit_predictions = pipeline.predict_step(results.objective, results.fit)  # what run_all's fit figures draw
    results.objective = None
    # read-only mappings of the model pickle as a mapping proxy of a plain dict
    copyreg.pickle(types.MappingProxyType, lambda proxy: (_proxy, (dict(proxy),)))
    pickle_path.write_bytes(pickle.dumps({"results": results, "fit_predictions": fit_predictions, "folder": str(folder),
                                             "wall": wall}))
    return wall


def worker(pickle_path: Path, out_json: Path) -> None:
    """Render the pickled results with the speciakin on PYTHONPATH; write the times as JSON."""
    import importlib
    import shutil

    import speciakin.report.figures as figures
    from speciakin.pipeline import steps
    from speciakin.report import results as rend

    assemble = importlib.import_module("speciakin.report.assemble")
    render = importlib.import_module("speciakin.report.render")
    data = pickle.loads(pickle_path.read_bytes())
    res = data["results"]
    helper: dict[str, list[float]] = {}

    def timed_helper(name, function):
        def call(*args, **kwargs):
            w, c = time.perf_counter(), time.process_time()
            try:
                return function(*args, **kwargs)
            finally:
                row = helper.setdefault(name, [0.0, 0.0, 0])
                row[0] += time.perf_counter() - w
                row[1] += time.process_time() - c
                row[2] += 1
        return call

    for name in figures.__all__:
        if callable(getattr(figures, name)):
            setattr(figures, name, timed_helper(name, getattr(figures, name)))
    parts: dict[str, list[float]] = {}

    def part(label, call):
        w, c = time.perf_counter(), time.process_time()
        value = call()
        parts[label] = [time.perf_counter() - w, time.process_time() - c]
        return value

    build, render_all = assemble.build_report, render.render_all
    assemble.build_report = lambda *a, **k: part(PARTS[3], lambda: build(*a, **k))
    render.render_all = lambda *a, **k: part(PARTS[4], lambda: render_all(*a, **k))
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "out"
        shutil.copytree(data["folder"], out)
        w, c = time.perf_counter(), time.process_time()
        part(PARTS[0], lambda: rend.fit_figures(res.model, data["fit_predictions"], res.fit, out))
        part(PARTS[1], lambda: rend.posterior_figures(res.posterior, out))
        if res.window is not None:
            part(PARTS[2], lambda: steps.window_figures(res.window, out, res.model))
        rend.write_report(out, res, invented=True)
        parts[PARTS[5]] = [time.perf_counter() - w, time.process_time() - c]
        assemble.build_report, render.render_all = build, render_all  # the parts above keep their times
        part(PARTS[6], lambda: rend.write_report(out, res, invented=True))
    out_json.write_text(json.dumps({"parts": parts, "helpers": helper, "load": load()}))


def compare(args) -> None:
    root = Path(__file__).resolve().parents[1]
    export = Path(tempfile.mkdtemp(prefix="speciakin-rev-"))
    archive = subprocess.run(["git", "archive", args.compare, "src"], cwd=root, capture_output=True, check=True)
    subprocess.run(["tar", "-x", "-C", str(export)], input=archive.stdout, check=True)
    sources = {"A": export / "src", "B": root / "src"}
    pickle_path = Path(args.results_pickle) if args.results_pickle else Path(tempfile.mkdtemp()) / "results.pkl"
    if args.results_pickle and pickle_path.is_file():
        prepared = pickle.loads(pickle_path.read_bytes())
        print(f"results from {pickle_path} (short run without rendering: {prepared['wall']:.1f} s wall when made)")
    else:
        folder = pickle_path.parent / "short-run"
        print(f"short demo run without rendering (this worktree), load {load()} ...", flush=True)
        prepare(folder, pickle_path)
        prepared = pickle.loads(pickle_path.read_bytes())
        print(f"  {prepared['wall']:.1f} s wall, load {load()}")
    found: dict[str, list[dict]] = {"A": [], "B": []}
    for label in (["A", "B", "B", "A"] * args.rounds)[: 2 * args.rounds]:
        with tempfile.NamedTemporaryFile(suffix=".json") as out:
            env = dict(os.environ, PYTHONPATH=str(sources[label]), MPLBACKEND="Agg")
            subprocess.run([sys.executable, __file__, "--worker", str(pickle_path), out.name], env=env, check=True)
            found[label].append(json.loads(Path(out.name).read_text()))
        row = found[label][-1]
        print(f"  {label}: all rendering {row['parts'][PARTS[5]][0]:.2f} s wall, "
              f"{row['parts'][PARTS[5]][1]:.2f} s CPU; load {row['load']}", flush=True)

    def stats(label, key, index, table="parts"):
        values = [r[table][key][index] for r in found[label] if key in r[table]]
        return (min(values), float(np.median(values))) if values else (np.nan, np.nan)

    print(f"\nA = {args.compare}, B = this worktree; {args.rounds} run(s) each, alternating; "
          f"load (1/5/15 min) now {load()}")
    print(f"{'part':<40}{'A wall best/med':>17}{'B wall best/med':>17}{'A CPU best':>11}{'B CPU best':>11}"
          f"{'B/A wall':>9}{'B/A CPU':>9}")
    for key in PARTS:
        aw, bw, ac, bc = stats("A", key, 0), stats("B", key, 0), stats("A", key, 1), stats("B", key, 1)
        print(f"{key:<40}{aw[0]:>8.2f}/{aw[1]:<8.2f}{bw[0]:>8.2f}/{bw[1]:<8.2f}{ac[0]:>11.2f}{bc[0]:>11.2f}"
              f"{bw[1] / aw[1]:>9.2f}{bc[0] / ac[0]:>9.2f}")
    print("\ntime inside the figure helpers (best over runs; calls per run):")
    print(f"{'helper':<28}{'calls':>6}{'A wall':>9}{'B wall':>9}{'A CPU':>9}{'B CPU':>9}{'B/A CPU':>9}")
    names = sorted(found["A"][0]["helpers"], key=lambda n: -found["A"][0]["helpers"][n][1])
    for name in names:
        aw, bw = stats("A", name, 0, "helpers"), stats("B", name, 0, "helpers")
        ac, bc = stats("A", name, 1, "helpers"), stats("B", name, 1, "helpers")
        print(f"{name:<28}{found['A'][0]['helpers'][name][2]:>6}{aw[0]:>9.2f}{bw[0]:>9.2f}{ac[0]:>9.2f}"
              f"{bc[0]:>9.2f}{bc[0] / ac[0]:>9.2f}")
    a_total, b_total = stats("A", PARTS[5], 0)[1], stats("B", PARTS[5], 0)[1]
    rest = prepared["wall"]
    print(f"\nshort run total (rendering-free part {rest:.1f} s, measured once, + median rendering): "
          f"A {rest + a_total:.1f} s, B {rest + b_total:.1f} s, ratio B/A {(rest + b_total) / (rest + a_total):.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--compare", default="main", metavar="REV", help="git revision A (default: main)")
    parser.add_argument("--rounds", type=int, default=2, help="runs of each version (order A B B A ...)")
    parser.add_argument("--results-pickle", default=None, metavar="FILE",
                        help="reuse (or keep) the short run's pickled results in this file")
    parser.add_argument("--worker", nargs=2, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.worker:
        worker(Path(args.worker[0]), Path(args.worker[1]))
        return
    print(f"machine: {os.cpu_count()} cores, load average (1/5/15 min) {load()}")
    compare(args)


if __name__ == "__main__":
    main()
