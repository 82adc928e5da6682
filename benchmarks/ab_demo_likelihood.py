"""Interleaved A/B timing of the demo likelihood of two versions of the package.

Like ``ab_kernel.py`` (whose ``export`` it uses), both versions are loaded
into one process under their own package names and timed in alternating
blocks, so that the host's slow spells fall on both alike.  The workload is
the demo campaign's objective as ``speciakin fit`` builds it
(``bench_demo_likelihood.demo_objective``): the log-likelihood of one
parameter set on one core, the log-likelihood of 64 sets over all cores (per
set), and each run alone (one set, one core, kernel only).  Printed: best
and median of each version, the median of the paired ratios B/A, the
largest difference of the outputs, and the load average.

A version is a git revision (``HEAD``, a commit) or ``WORKTREE``.  With
``--cache DIR`` the exported copies and their compiled code are kept in DIR
and reused by the next run (a copy is rewritten only where its text
changed, so numba's cache stays valid); otherwise a temporary folder is used
and each version compiles once (several minutes on a loaded host).

Run:  .venv/bin/python benchmarks/ab_demo_likelihood.py HEAD WORKTREE [--rounds 12] [--cache DIR]
"""

from __future__ import annotations

import argparse
import filecmp
import importlib
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from ab_kernel import export  # noqa: E402


def load_text() -> str:
    """The load average (the package of neither version is imported here)."""
    return " ".join(f"{x:.2f}" for x in os.getloadavg()) + f" ({os.cpu_count()} cores)"


def export_kept(version: str, name: str, into: Path) -> None:
    """``export`` into ``into/name``, rewriting only the files whose text changed."""
    with tempfile.TemporaryDirectory(prefix="speciakin_export_") as tmp:
        export(version, name, Path(tmp))
        fresh = Path(tmp) / name
        target = into / name
        for path in fresh.rglob("*"):
            dest = target / path.relative_to(fresh)
            if path.is_dir():
                dest.mkdir(parents=True, exist_ok=True)
            elif not dest.exists() or not filecmp.cmp(path, dest, shallow=False):
                dest.parent.mkdir(parents=True, exist_ok=True)
                shutil.copyfile(path, dest)
        for path in sorted(target.rglob("*.py"), reverse=True):
            if not (fresh / path.relative_to(target)).exists():
                path.unlink()


def workload(name: str):
    """Calls of the demo workload built with package ``name``:
    (one set, batch of 64, {run: kernel call}, outputs of one set)."""
    pipeline = importlib.import_module(name + ".pipeline")
    demo = importlib.import_module(name + ".demo")
    api = importlib.import_module(name + ".simulation.api")
    batch = importlib.import_module(name + ".simulation.batch_kernel")
    sim = importlib.import_module(name + ".simulation")
    model, campaign, _ = pipeline.load_inputs(pipeline.resolve_inputs(demo.demo_dir()))
    objective = pipeline.make_objective(model, campaign)
    theta = objective.start
    one = theta[None, :]
    rng = np.random.default_rng(7)
    sets = theta + 0.01 * rng.standard_normal((64, theta.size)) * np.maximum(np.abs(theta), 1e-3)

    def one_set():
        objective.parallel = False
        objective.log_likelihood_batch(one)

    def batch64():
        objective.parallel = True
        objective.log_likelihood_batch(sets)

    runs = {}
    q, off, fac = objective.kernel_inputs(one)
    for i, run in enumerate(objective.compiled_runs.runs):
        cruns = sim.compile_runs(objective.compiled, [run], [objective.output_times[i]])
        out = np.full((1, 1, cruns.n_times_max, objective.compiled.n_outputs), np.nan)
        status = np.zeros((1, 1), np.int64)
        info = np.zeros((1, 1, api.N_INFO))
        args = (objective.compiled.arrays, q, cruns.arrays, off[:, [i]].copy(), fac[:, [i]].copy(),
                objective.rtol, objective.atol, out, status, info)
        if hasattr(batch, "batch_tasks"):
            runs[run.name] = (lambda a=args: batch.batch_tasks(*a, 0, 1))
        else:
            runs[run.name] = (lambda a=args: batch.batch_serial(*a))
    one_set()
    batch64()
    for call in runs.values():
        call()
    objective.parallel = False
    outputs = objective.predict_batch(one).outputs
    return one_set, batch64, runs, outputs, objective.compiled.n_species


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("a", help="version A: a git revision or WORKTREE")
    parser.add_argument("b", help="version B: a git revision or WORKTREE")
    parser.add_argument("--rounds", type=int, default=12, help="pairs of blocks (default 12)")
    parser.add_argument("--cache", help="folder that keeps the exported copies and their compiled code")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="speciakin_ab_") as tmp:
        root = Path(args.cache).resolve() if args.cache else Path(tmp)
        root.mkdir(parents=True, exist_ok=True)
        os.environ["NUMBA_CACHE_DIR"] = str(root / "numba_cache")
        names = ("speciakin_version_a", "speciakin_version_b")
        for version, name in zip((args.a, args.b), names):
            export_kept(version, name, root)
        sys.path.insert(0, str(root))
        setups = []
        for version, name in zip((args.a, args.b), names):
            t0 = time.perf_counter()
            setups.append(workload(name))
            print(f"{version}: ready in {time.perf_counter() - t0:.0f} s", flush=True)
        out_a, out_b, n_species = setups[0][3], setups[1][3], setups[0][4]
        ref = out_a[..., :n_species]
        scale = np.nanmax(np.abs(ref), axis=(2, 3), keepdims=True)
        diff = np.nanmax(np.abs(out_b[..., :n_species] - ref) / scale)
        print(f"largest output difference B - A: {diff:.2e} of each run's largest amount")
        print(f"load average before timing: {load_text()}")
        labels = ["one set, one core [ms]", "64 sets, all cores, per set [ms]"] + [
            f"run {name} alone [ms]" for name in setups[0][2]]
        calls = [[s[0], s[1]] + list(s[2].values()) for s in setups]
        repeats = [10, 1] + [20] * len(setups[0][2])
        divide = [10, 64] + [20] * len(setups[0][2])
        times = np.zeros((len(labels), args.rounds, 2))
        # one workload at a time (its rounds alternate A and B): the threads of a parallel call keep
        # spinning for a while after it and would slow the serial calls measured next
        for w in list(range(2, len(labels))) + [0, 1]:  # the parallel batch last
            for r in range(args.rounds):
                for i in ((0, 1) if r % 2 == 0 else (1, 0)):
                    call = calls[i][w]
                    t0 = time.perf_counter()
                    for _ in range(repeats[w]):
                        call()
                    times[w, r, i] = (time.perf_counter() - t0) / divide[w]
        for w, label in enumerate(labels):
            a, b = times[w, :, 0] * 1e3, times[w, :, 1] * 1e3
            ratio = b / a
            print(f"{label:<38} A best {a.min():7.3f} median {np.median(a):7.3f} | B best {b.min():7.3f} "
                  f"median {np.median(b):7.3f} | B/A median of paired ratios {np.median(ratio):.3f} "
                  f"(quartiles {np.quantile(ratio, 0.25):.3f}-{np.quantile(ratio, 0.75):.3f})")
        print(f"load average after timing: {load_text()}")


if __name__ == "__main__":
    main()
