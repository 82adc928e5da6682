"""Cold compile of the simulation kernel: from an empty compiled-code cache to
the first simulation and to the first parallel likelihood.

A fresh Python process with an empty temporary ``NUMBA_CACHE_DIR`` builds the
six-run benchmark of ``bench_kernel.py`` (held pH only, each run at one
temperature: no free-pH path and no held-pH ramp, so the kernel variant with
neither where a version has variants), simulates it once on
one core, then evaluates the Gaussian log-likelihood of four parameter sets
over all cores.  With ``--demo`` it takes the bundled demo campaign instead
(held, logged and free-pH runs, so the kernel with every path): the
log-likelihood of its start values on one core, then of four sets over all
cores.
It reports, for each point, the wall time since its launch and its CPU time
(user + system of that process: the compile's own work, whatever else the
shared host runs; and with its finished child processes, the second process
of a split compile, ``simulation/split_compile.py``), the load average before and after, and the same process
started again on the filled cache (loading instead of compiling).  With
``--by-function`` it also lists the compiled functions whose code numba's
LLVM back end took longest to link, optimise and emit (each compiled
function's own library includes the code of every function it calls).

A version is ``WORKTREE`` (the files on disk, default) or a git revision,
exported to a temporary folder, so that two versions can be measured by the
same script one after the other.

Run:  .venv/bin/python benchmarks/bench_compile.py [REV] [--by-function] [--demo]
"""

from __future__ import annotations

import argparse
import io
import json
import os
import subprocess
import sys
import tarfile
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

#: The child process: times to the first simulation and to the first parallel likelihood.
PROBE = r"""
import json, os, sys, time
t0 = time.perf_counter()
by_function = []
if os.environ.get("PROBE_BY_FUNCTION"):
    from numba.core import codegen
    original = codegen.CPUCodeLibrary.finalize
    def timed_finalize(self):
        c = time.process_time()
        original(self)
        by_function.append((time.process_time() - c, self.name))
    codegen.CPUCodeLibrary.finalize = timed_finalize
import numpy as np
if os.environ.get("PROBE_DEMO"):
    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
    model, campaign, _ = load_inputs(resolve_inputs(os.environ["PROBE_DEMO"]))
    objective = make_objective(model, campaign)
    objective.parallel = False
    ok = bool(np.isfinite(objective.log_likelihood_batch(objective.start[None, :])[0]))
    first = (time.perf_counter() - t0, sum(os.times()[:2]), sum(os.times()[:4]))
    objective.parallel = True
    objective.log_likelihood_batch(np.repeat(objective.start[None, :], 4, 0))
else:
    from speciakin.simulation import batch_log_likelihood, compile_model, compile_runs, simulate_batch
    sys.path.insert(0, os.environ["PROBE_BENCH"])
    import bench_kernel as b
    compiled = compile_model(b.build_model())
    runs = compile_runs(compiled, b.build_runs(), [b.TIMES] * 6)
    res = simulate_batch(compiled, runs, compiled.nominal[None, :], parallel=False)
    ok = bool(np.all(res.status == 0))
    first = (time.perf_counter() - t0, sum(os.times()[:2]), sum(os.times()[:4]))
    data = np.where(np.isfinite(res.outputs[0]), res.outputs[0], np.nan)
    batch_log_likelihood(compiled, runs, np.repeat(compiled.nominal[None, :], 4, 0), data, np.ones_like(data),
                         parallel=True)
parallel = (time.perf_counter() - t0, sum(os.times()[:2]), sum(os.times()[:4]))
print(json.dumps({"first": first, "parallel": parallel, "ok": ok,
                  "by_function": sorted(by_function, reverse=True)[:12],
                  "finalize_total": sum(t for t, _ in by_function)}))
"""


def export(rev: str, into: Path) -> Path:
    """``src`` of ``rev`` (or of the worktree, or of a folder holding ``src/``) as a folder to put on the path."""
    if rev == "WORKTREE":
        return ROOT / "src"
    if (Path(rev) / "src" / "speciakin").is_dir():
        return Path(rev) / "src"
    blob = subprocess.run(["git", "archive", rev, "src"], cwd=ROOT, check=True, capture_output=True).stdout
    with tarfile.open(fileobj=io.BytesIO(blob)) as tar:
        options = {"filter": "data"} if hasattr(tarfile, "data_filter") else {}
        tar.extractall(into, **options)
    return into / "src"


def probe(src: Path, cache: Path, by_function: bool, demo: bool = False) -> dict:
    env = dict(os.environ, PYTHONPATH=str(src), NUMBA_CACHE_DIR=str(cache), PROBE_BENCH=str(ROOT / "benchmarks"))
    if by_function:
        env["PROBE_BY_FUNCTION"] = "1"
    if demo:
        env["PROBE_DEMO"] = str(ROOT / "data_templates" / "demo")  # the same data for every version
    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True, env=env)
    if out.returncode != 0:
        raise SystemExit(f"the probe failed: {out.stderr.strip()[-800:]}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("rev", nargs="?", default="WORKTREE",
                        help="a git revision, WORKTREE (default) or a folder holding src/speciakin")
    parser.add_argument("--by-function", action="store_true", help="list the longest LLVM finalisations")
    parser.add_argument("--demo", action="store_true",
                        help="the bundled demo campaign (held, logged and free-pH runs) instead of the six held runs")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="speciakin_cold_") as tmp:
        tmp = Path(tmp)
        src = export(args.rev, tmp / "export")
        load = os.getloadavg()
        cold = probe(src, tmp / "cache", args.by_function, args.demo)
        load_after = os.getloadavg()
        warm = probe(src, tmp / "cache", False, args.demo)
    cores = os.cpu_count()
    print(f"version {args.rev}, {'the demo campaign' if args.demo else 'six held-pH runs'}; load average {load[0]:.2f} before, {load_after[0]:.2f} after, on {cores} cores")
    for label, key in (("first simulation", "first"), ("first parallel likelihood", "parallel")):
        with_helpers = cold[key][2] if len(cold[key]) > 2 else cold[key][1]
        print(f"cold, {label}: {cold[key][0]:.0f} s wall, {cold[key][1]:.0f} s CPU (user + sys), "
              f"{with_helpers:.0f} s CPU with its finished child processes; "
              f"cache filled: {warm[key][0]:.1f} s wall, {warm[key][1]:.1f} s CPU")
    print("target: <= 60 s to the first parallel likelihood on a quiet two-core machine")
    if not cold["ok"]:
        print("warning: a benchmark run failed")
    if args.by_function:
        print(f"LLVM link + optimise + emit, all compiled functions: {cold['finalize_total']:.0f} s CPU; longest:")
        for seconds, name in cold["by_function"]:
            print(f"  {seconds:6.1f} s  {name}")


if __name__ == "__main__":
    main()
