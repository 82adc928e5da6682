"""Where the wall time of the whole demo job goes (check -> fit -> sample -> window -> report).

Runs what ``speciakin run`` runs on the bundled INVENTED demo campaign (``pipeline.run_all`` with
the report renderer, seed 1, defaults otherwise: fit with profiles, posterior until converged,
window, figures, HTML/PDF/XLSX report) in this process after a warm-up call that excludes numba
compilation, and times every step and the parts inside it by wrapping the library functions
(``time.perf_counter`` wall time and ``time.process_time`` CPU time of the whole process, all
threads: the numba kernel spreads a batch over the cores, so its CPU time is up to the number of
cores x its wall time).  Inside the posterior it splits the time into the likelihood, the prior,
the moves' proposals, the adaptive refits, the convergence checks, checkpoint writes, the final
diagnostics and what is left (emcee's loop and Python overhead per step).

Targets (issue "Speed where users wait"): the converged posterior <= 60 s warm on two cores,
the whole job <= 2 min warm.  Beside them: the scipy Radau ruler of ``bench_kernel.py`` (six held-pH
runs, one evaluation), measured in the same run.  The machine is shared: the script prints the load average at the
start and end of every step; with a load above the core count read CPU time rather than wall time.

Also: ``--startup`` times, in a fresh process, the import of the command line and the first
likelihood from the warm cache (what ``speciakin run`` pays before the check step);
``--profile FILE`` writes a cProfile of the job and prints the 30 largest own times;
``--steps N`` runs a fixed-length posterior instead; ``--compare REV`` runs the job of git revision
REV (exported with ``git archive``, its own compiled cache, reused with ``--export DIR``) and of this
worktree alternately, each in a fresh process, and prints both tables side by side with the ratio of
CPU times (the CPU time is the figure to read on a crowded host).

Run:  NUMBA_CACHE_DIR=.numba_cache .venv/bin/python benchmarks/bench_demo_job.py [--steps N]
      [--profile job.prof] [--startup] [--compare REV --export DIR --rounds N]
"""

from __future__ import annotations

import argparse
import contextlib
import functools
import os
import subprocess
import sys
import tempfile
import time
import types
from pathlib import Path

import numpy as np

POSTERIOR_TARGET_S = 60.0
JOB_TARGET_S = 120.0


def load() -> str:
    return "/".join(f"{x:.1f}" for x in os.getloadavg())


class Clock:
    """Wall and CPU time per label, summed over calls; nested labels are shown indented."""

    def __init__(self) -> None:
        self.rows: dict[str, list] = {}  # label -> [wall, cpu, calls, load at first start, load at last end]
        self.order: list[str] = []
        self._undo: list = []

    @contextlib.contextmanager
    def time(self, label: str):
        if label not in self.rows:
            self.rows[label] = [0.0, 0.0, 0, load(), ""]
            self.order.append(label)
        w, c = time.perf_counter(), time.process_time()
        try:
            yield
        finally:
            row = self.rows[label]
            row[0] += time.perf_counter() - w
            row[1] += time.process_time() - c
            row[2] += 1
            row[4] = load()

    def wrap(self, owner, name: str, label: str) -> None:
        """Replace ``owner.name`` by a timed version (keeps the original for :meth:`restore`)."""
        original = getattr(owner, name)

        @functools.wraps(original)
        def timed(*args, **kwargs):
            with self.time(label):
                return original(*args, **kwargs)

        setattr(owner, name, timed)
        self._undo.append((owner, name, original))

    def restore(self) -> None:
        for owner, name, original in reversed(self._undo):
            setattr(owner, name, original)
        self._undo.clear()

    def wall(self, label: str) -> float:
        return self.rows.get(label, [0.0])[0]

    def cpu(self, label: str) -> float:
        return self.rows.get(label, [0.0, 0.0])[1]

    def table(self, derived: dict[str, tuple[float, float]]) -> str:
        lines = [f"{'part':<52}{'wall s':>9}{'CPU s':>9}{'calls':>8}  load at start -> end (1/5/15 min)"]
        for label in self.order + list(derived):
            if label in self.rows:
                w, c, n, l0, l1 = self.rows[label]
                lines.append(f"{label:<52}{w:>9.2f}{c:>9.2f}{n:>8d}  {l0} -> {l1}")
            else:
                w, c = derived[label]
                lines.append(f"{label:<52}{w:>9.2f}{c:>9.2f}{'':>8}  (difference)")
        return "\n".join(lines)


def instrument(clock: Clock) -> None:
    """Wrap the functions whose time the table shows (where they are looked up at call time)."""
    import emcee

    from speciakin.estimation import proposals, sampling
    from speciakin.pipeline import fit as pfit
    from speciakin.pipeline import outputs, run, steps
    from speciakin.pipeline import window as pwindow
    import importlib

    assemble = importlib.import_module("speciakin.report.assemble")
    render = importlib.import_module("speciakin.report.render")

    clock.wrap(run, "check_step", "check")
    clock.wrap(run, "load_inputs", "load inputs")
    clock.wrap(run, "make_objective", "objective")
    clock.wrap(run, "fit_step", "fit")
    clock.wrap(pfit, "fit_least_squares", "  fit: least squares")
    clock.wrap(pfit, "profile_all", "  fit: profiles")
    clock.wrap(run, "predict_step", "predictions (fit curves, posterior band)")
    clock.wrap(run, "sample_step", "posterior")
    clock.wrap(sampling, "sample_posterior", "  posterior: sample_posterior")
    clock.wrap(sampling.LogPosterior, "__call__", "    log-posterior (prior + likelihood)")
    clock.wrap(proposals.IndependenceStudentTMove, "_independent_proposal", "    moves: independence proposals")
    clock.wrap(emcee.moves.DEMove, "get_proposal", "    moves: differential-evolution proposals")
    clock.wrap(sampling, "adapt_moves", "    adaptive refits (called every step)")
    clock.wrap(sampling, "check_chain", "    convergence checks")
    clock.wrap(sampling, "write_checkpoint", "    checkpoint writes")
    clock.wrap(sampling, "_finish", "    final diagnostics and summary")
    clock.wrap(outputs, "save_posterior", "  posterior: save result (posterior.h5/json/txt)")
    clock.wrap(run, "window_step", "window")
    clock.wrap(pwindow, "simulate_batch", "  window: process simulations")
    clock.wrap(steps, "window_figures", "  window: figures")
    clock.wrap(assemble, "build_report", "  report: build document")
    clock.wrap(render, "render", "  report: render (html, pdf, xlsx)")

    original_make = sampling.make_evaluator

    def make_evaluator(function, jobs, scheduler):
        @functools.wraps(function)
        def likelihood(theta):
            with clock.time("      likelihood (campaign simulations)"):
                return function(theta)

        return original_make(likelihood, jobs, scheduler)

    sampling.make_evaluator = make_evaluator
    clock._undo.append((sampling, "make_evaluator", original_make))


def renderer(clock: Clock):
    """The report renderer with each function timed."""
    from speciakin.report import results as rend

    def timed(name, label):
        function = getattr(rend, name)

        def call(*args, **kwargs):
            with clock.time(label):
                return function(*args, **kwargs)

        return call

    return types.SimpleNamespace(fit_figures=timed("fit_figures", "fit figures"),
                                 posterior_figures=timed("posterior_figures", "posterior figures"),
                                 write_report=timed("write_report", "report"))


def startup() -> None:
    """Import of the command line and first likelihood from the warm cache, in a fresh process."""
    code = ("import time; t=time.perf_counter(); import speciakin.cli.main; t1=time.perf_counter(); "
            "import numpy as np; from speciakin import pipeline; from speciakin.demo import demo_dir; "
            "m,c,p=pipeline.load_inputs(pipeline.resolve_inputs(demo_dir())); o=pipeline.make_objective(m,c); "
            "t2=time.perf_counter(); o.log_likelihood_batch(np.repeat(o.start[None,:],4,axis=0)); "
            "t3=time.perf_counter(); print(f'{t1-t:.2f} {t2-t1:.2f} {t3-t2:.2f}')")
    for i in range(2):
        l0 = load()
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=os.environ)
        if out.returncode:
            print(out.stderr)
            return
        a, b, c = out.stdout.split()
        print(f"startup (fresh process {i + 1}): import CLI {a} s, load inputs + objective {b} s, first "
              f"likelihood from the warm cache {c} s; load {l0} -> {load()}")


def run_job(args) -> dict:
    """One instrumented demo job in this process; prints its table and returns its figures."""
    from speciakin import pipeline
    from speciakin.demo import demo_dir

    inputs = pipeline.resolve_inputs(demo_dir())
    model, campaign, _ = pipeline.load_inputs(inputs)
    warm = pipeline.make_objective(model, campaign)
    t = time.perf_counter()
    warm.log_likelihood_batch(np.repeat(warm.start[None, :], 2, axis=0))  # compile / load the cache
    print(f"warm-up likelihood call: {time.perf_counter() - t:.1f} s (excluded below)")

    clock = Clock()
    instrument(clock)
    profiler = None
    if args.profile:
        import cProfile

        profiler = cProfile.Profile()
    with tempfile.TemporaryDirectory() as tmp:
        if profiler:
            profiler.enable()
        with clock.time("whole job (run_all)"):
            results = pipeline.run_all(inputs, Path(tmp) / "out", renderer=renderer(clock), seed=args.seed,
                                       n_steps=args.steps, invented=True, progress=lambda *a: None)
        if profiler:
            profiler.disable()
            profiler.dump_stats(args.profile)
    clock.restore()

    post = results.posterior
    derived = {}
    s_wall, s_cpu = clock.wall("  posterior: sample_posterior"), clock.cpu("  posterior: sample_posterior")
    parts = ["    log-posterior (prior + likelihood)", "    moves: independence proposals",
             "    moves: differential-evolution proposals", "    adaptive refits (called every step)",
             "    convergence checks", "    checkpoint writes", "    final diagnostics and summary"]
    derived["    rest of sampling (emcee loop, Python per step)"] = (
        s_wall - sum(clock.wall(p) for p in parts), s_cpu - sum(clock.cpu(p) for p in parts))
    lp = "    log-posterior (prior + likelihood)"
    lk = "      likelihood (campaign simulations)"
    derived["      prior and bookkeeping of the log-posterior"] = (clock.wall(lp) - clock.wall(lk),
                                                                  clock.cpu(lp) - clock.cpu(lk))
    steps_total = [sum(f(k) for k in ("check", "load inputs", "objective", "fit",
                                      "predictions (fit curves, posterior band)", "fit figures", "posterior",
                                      "posterior figures", "window", "report")) for f in (clock.wall, clock.cpu)]
    derived["rest of the job"] = (clock.wall("whole job (run_all)") - steps_total[0],
                                  clock.cpu("whole job (run_all)") - steps_total[1])
    print(clock.table(derived))
    n = post.n_steps
    print(f"posterior: {post.n_walkers} walkers x {n} steps, stopped: {post.stop_reason} "
          f"({len(post.stop_checks)} checks at steps {[c['step'] for c in post.stop_checks]}); "
          f"{post.n_likelihood_evaluations} likelihood evaluations, "
          f"{clock.wall(lk) / max(post.n_likelihood_evaluations, 1) * 1e3:.2f} ms wall, "
          f"{clock.cpu(lk) / max(post.n_likelihood_evaluations, 1) * 1e3:.2f} ms CPU each, "
          f"{clock.rows.get(lk, [0, 0, 0])[2]} batches")
    print(f"  stopped: {post.stop_message}")
    t_post, t_job = clock.wall("posterior"), clock.wall("whole job (run_all)")
    share = clock.wall(lk) / max(clock.wall("  posterior: sample_posterior"), 1e-9)
    print(f"likelihood share of sampling: {share:.1%} wall")
    print(f"converged posterior {t_post:.1f} s wall against {POSTERIOR_TARGET_S:.0f} s: ratio "
          f"{t_post / POSTERIOR_TARGET_S:.2f}; whole job {t_job:.1f} s against {JOB_TARGET_S:.0f} s: ratio "
          f"{t_job / JOB_TARGET_S:.2f} (load at the end {load()})")
    # the ruler of issue 16, measured in the same run
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    import bench_kernel

    ruler = bench_kernel.radau_reference()
    per_eval = clock.wall(lk) / max(post.n_likelihood_evaluations, 1)
    print(bench_kernel.radau_line(ruler) + f"; the posterior's likelihood per evaluation is 1/"
          f"{ruler.min() / per_eval:.0f} of it, the whole job {t_job / ruler.min():.0f} such evaluations")
    if profiler:
        import pstats

        pstats.Stats(args.profile).sort_stats("tottime").print_stats(30)
    rows = {label: clock.rows[label][:2] for label in clock.order}
    rows.update({label: list(v) for label, v in derived.items()})
    return {"rows": rows, "order": clock.order + list(derived), "steps": int(n)}


def compare(args) -> None:
    """The job of revision ``args.compare`` (A) and of this worktree (B), alternately, in fresh processes."""
    import json

    root = Path(__file__).resolve().parents[1]
    export = Path(args.export or tempfile.mkdtemp(prefix="speciakin-rev-"))
    if not (export / "src").is_dir():
        archive = subprocess.run(["git", "archive", args.compare, "src"], cwd=root, capture_output=True, check=True)
        subprocess.run(["tar", "-x", "-C", str(export)], input=archive.stdout, check=True)
    versions = {"A": (export / "src", export / ".numba_cache"),
                "B": (root / "src", Path(os.environ.get("NUMBA_CACHE_DIR", root / ".numba_cache")))}
    found: dict[str, list] = {"A": [], "B": []}
    order = ["A", "B", "B", "A"] * args.rounds
    for label in order[: 2 * args.rounds]:
        src, cache = versions[label]
        with tempfile.NamedTemporaryFile(suffix=".json") as out:
            env = dict(os.environ, PYTHONPATH=str(src), NUMBA_CACHE_DIR=str(cache), MPLBACKEND="Agg")
            command = [sys.executable, __file__, "--worker", out.name, "--seed", str(args.seed)]
            if args.steps:
                command += ["--steps", str(args.steps)]
            print(f"--- {label} ({args.compare if label == 'A' else 'worktree'}), load {load()}", flush=True)
            subprocess.run(command, env=env, check=True)
            found[label].append(json.loads(Path(out.name).read_text()))
    labels = found["B"][0]["order"]
    print(f"\nA = {args.compare}, B = this worktree; median over {args.rounds} run(s) each; load now {load()}")
    print(f"{'part':<52}{'A wall':>8}{'A CPU':>8}{'B wall':>8}{'B CPU':>8}{'B/A CPU':>9}")
    for label in labels:
        a = [r["rows"].get(label, [np.nan, np.nan]) for r in found["A"]]
        b = [r["rows"].get(label, [np.nan, np.nan]) for r in found["B"]]
        aw, ac = np.median([x[0] for x in a]), np.median([x[1] for x in a])
        bw, bc = np.median([x[0] for x in b]), np.median([x[1] for x in b])
        ratio = bc / ac if ac > 0.05 else np.nan
        print(f"{label:<52}{aw:>8.2f}{ac:>8.2f}{bw:>8.2f}{bc:>8.2f}{ratio:>9.2f}")
    print("posterior steps: A " + ", ".join(str(r["steps"]) for r in found["A"])
          + "; B " + ", ".join(str(r["steps"]) for r in found["B"]))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=None, help="fixed posterior steps (default: until converged)")
    parser.add_argument("--profile", default=None, help="write a cProfile of the job to this file")
    parser.add_argument("--startup", action="store_true", help="also time import and cache load in a fresh process")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--compare", default=None, metavar="REV",
                        help="also run the job of git revision REV, alternately, each in a fresh process")
    parser.add_argument("--rounds", type=int, default=1, help="runs of each version with --compare")
    parser.add_argument("--export", default=None, help="folder of REV's export (reused, with its compiled cache)")
    parser.add_argument("--worker", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()

    print(f"machine: {os.cpu_count()} cores, load average (1/5/15 min) {load()}")
    if args.startup:
        startup()
    if args.compare:
        compare(args)
        return
    figures = run_job(args)
    if args.worker:
        import json

        Path(args.worker).write_text(json.dumps(figures))


if __name__ == "__main__":
    main()
