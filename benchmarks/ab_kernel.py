"""Interleaved A/B timing of the kernel of two versions of the package.

The host is a shared virtual machine whose speed moves by up to 2x in spells
of a few seconds, so two benchmark runs taken minutes apart cannot resolve a
change of a few per cent.  This script loads both versions into one process
(each copied under its own package name), checks that they give the same
outputs, and times the benchmark workload of ``bench_kernel.py`` (one
parameter set, six runs, the compiled batch on one core) in alternating
blocks.  The median of the paired ratios B/A is robust to the host's spells;
identical versions give 0.97-1.03 here.  With ``--sets N`` a second workload
follows: N parameter sets (jittered around the nominal one) x six runs over
all cores, through the public ``simulate_batch(..., parallel=True)``.

A version is a git revision (``HEAD``, ``HEAD~2``, a commit) or ``WORKTREE``
(the files on disk).  Each version is compiled once into a temporary numba
cache (one to two minutes each).

Run:  .venv/bin/python benchmarks/ab_kernel.py HEAD WORKTREE [--rounds 30] [--sets 64]
"""

from __future__ import annotations

import argparse
import importlib
import io
import os
import re
import shutil
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def export(version: str, name: str, into: Path) -> None:
    """Copy ``src/speciakin`` of ``version`` to ``into/name`` with its imports renamed."""
    target = into / name
    if version == "WORKTREE":
        shutil.copytree(ROOT / "src" / "speciakin", target, ignore=shutil.ignore_patterns("__pycache__"))
    else:
        blob = subprocess.run(["git", "archive", version, "src/speciakin"], cwd=ROOT, check=True,
                              capture_output=True).stdout
        with tarfile.open(fileobj=io.BytesIO(blob)) as tar:
            # extraction filters exist from Python 3.11.4 on
            options = {"filter": "data"} if hasattr(tarfile, "data_filter") else {}
            tar.extractall(into / "_export", **options)
        shutil.move(str(into / "_export" / "src" / "speciakin"), target)
    pattern = re.compile(r"\bspeciakin(?=[.\s])")
    for path in target.rglob("*.py"):
        text = path.read_text()
        path.write_text(pattern.sub(name, text))


def workload(name: str, sets: int = 0):
    """(call, outputs) of the bench_kernel workload built with package ``name``."""
    sim = importlib.import_module(name + ".simulation")
    batch = importlib.import_module(name + ".simulation.batch_kernel")
    source = (ROOT / "benchmarks" / "bench_kernel.py").read_text().replace("from speciakin.", f"from {name}.")
    space: dict = {"__name__": f"bench_{name}"}
    exec(compile(source, f"bench_kernel ({name})", "exec"), space)
    compiled = sim.compile_model(space["build_model"]())
    runs = space["build_runs"]()
    cruns = sim.compile_runs(compiled, runs, [space["TIMES"]] * len(runs))
    q = compiled.nominal[None, :].copy()
    n_runs = len(runs)
    off, fac = np.zeros((1, n_runs)), np.ones((1, n_runs))
    out = np.full((1, n_runs, len(space["TIMES"]), compiled.n_outputs), np.nan)
    status, info = np.zeros((1, n_runs), np.int64), np.zeros((1, n_runs, 8))  # room for every version's info entries
    args = (compiled.arrays, q, cruns.arrays, off, fac, 1e-6, 1e-10, out, status, info)

    if sets:
        rng = np.random.default_rng(1)
        q_sets = compiled.nominal[None, :] + 0.01 * rng.standard_normal((sets, compiled.nominal.size))

        def call():
            res = sim.simulate_batch(compiled, cruns, q_sets, parallel=True)
            out[...] = res.outputs[:1]
            status[...] = res.status[:1]
            info[0, :, 1] = res.steps[0]
    elif hasattr(batch, "batch_tasks"):
        # one compiled entry point for one core and all cores: the tasks from 0 with stride 1
        def call():
            batch.batch_tasks(*args, 0, 1)
    else:
        def call():
            batch.batch_serial(*args)

    call()
    if np.any(status != 0):
        raise SystemExit(f"version {name}: a run failed (status {status.tolist()})")
    return call, out, info[0, :, 1].astype(int), compiled.n_species


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("a", help="version A: a git revision or WORKTREE")
    parser.add_argument("b", help="version B: a git revision or WORKTREE")
    parser.add_argument("--rounds", type=int, default=30, help="pairs of blocks (default 30)")
    parser.add_argument("--calls", type=int, default=50, help="calls per block (default 50)")
    parser.add_argument("--sets", type=int, default=0,
                        help="also time N parameter sets over all cores (public simulate_batch)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="speciakin_ab_") as tmp:
        tmp = Path(tmp)
        os.environ["NUMBA_CACHE_DIR"] = str(tmp / "numba_cache")
        names = ("speciakin_version_a", "speciakin_version_b")
        for version, name in zip((args.a, args.b), names):
            export(version, name, tmp)
        sys.path.insert(0, str(tmp))
        workloads = [("one set, six runs, one core", 0, args.calls)]
        if args.sets:
            workloads.append((f"{args.sets} sets x six runs, all cores", args.sets, max(1, args.calls // args.sets)))
        for label, sets, calls in workloads:
            setups = []
            for version, name in zip((args.a, args.b), names):
                t0 = time.perf_counter()
                setups.append(workload(name, sets))
                print(f"{label}: {version} ready in {time.perf_counter() - t0:.0f} s; accepted steps per run "
                      f"{', '.join(map(str, setups[-1][2]))}", flush=True)
            compare(label, setups, (args.a, args.b), args.rounds, calls)


def compare(label, setups, versions, rounds, calls) -> None:
    """Check that both versions give the same outputs, then time them in alternating blocks."""
    (_, out_a, _, n_species), (_, out_b, _, _) = setups
    ref = out_a[..., :n_species]
    difference = np.max(np.abs(out_b[..., :n_species] - ref)) / np.max(np.abs(ref))
    print(f"{label}: largest output difference B - A: {difference:.2e} of the largest amount")
    times = np.zeros((rounds, 2))
    for r in range(rounds):
        order = (0, 1) if r % 2 == 0 else (1, 0)
        for i in order:
            call = setups[i][0]
            t0 = time.perf_counter()
            for _ in range(calls):
                call()
            times[r, i] = (time.perf_counter() - t0) / calls
    ratio = times[:, 1] / times[:, 0]
    for i, version in enumerate(versions):
        print(f"{label}: {'AB'[i]} {version}: best {times[:, i].min() * 1e3:.3f} ms, "
              f"median {np.median(times[:, i]) * 1e3:.3f} ms per call")
    print(f"{label}: B/A: median of paired ratios {np.median(ratio):.3f} (quartiles "
          f"{np.quantile(ratio, 0.25):.3f}-{np.quantile(ratio, 0.75):.3f}, range {ratio.min():.3f}-{ratio.max():.3f});"
          f" ratio of the bests {times[:, 1].min() / times[:, 0].min():.3f}", flush=True)

if __name__ == "__main__":
    main()
