"""Interleaved A/B timing of the kernel of two versions of the package.

The host is a shared virtual machine whose speed moves by up to 2x in spells
of a few seconds, so two benchmark runs taken minutes apart cannot resolve a
change of a few per cent.  This script runs each version in its own worker
process (its own export of ``src/``, its own compiled-code cache, the
package under its own name), checks that both give the same outputs, and
then has the workers time the same workloads in alternating blocks (A B B A
...; a block is about ``--block`` seconds of calls).  The median of the paired
ratios B/A is robust to the host's spells.

Workloads (compiled and called once before any timing):

``bench``
    the workload of ``bench_kernel.py``: one parameter set, six held-pH runs,
    the compiled batch on one core, at the version's default tolerances; the
    largest deviation of each version's observed outputs from an rtol-1e-11
    reference is printed with the outputs' comparison (``bench_accuracy.py``'s
    metric);
``demo1``
    the residuals of the bundled (invented) demo campaign, one set, one core;
``demo32``
    the demo's log-likelihood of 32 sets over all cores;
``like1``, ``like64`` (on request)
    the demo's log-likelihood of one set on one core and of 64 sets over
    all cores (the figures of issue 16; ``ab_demo_likelihood.py``);
``benchll`` (on request)
    ``bench``'s evaluation through the public ``batch_log_likelihood`` (the
    Python around the kernel included: ``bench_kernel.py``'s one-core figure),
    at the version's default tolerances;
``benchll_py``, ``like1_py``, ``demo1_py`` (on request)
    the Python around the kernel alone: these workloads with the compiled
    batch replayed (its outputs of the first call copied into the buffers).

Why one process per version: loaded into one process (as earlier versions of
this script did, each copy under a renamed package), two identical versions
were timed 2.26x apart, whichever was compiled second being the slow one, so
the in-process comparison measured the process, not the kernel.  Separate
processes with identical setups remove that; the control run ``HEAD HEAD``
must give a median paired ratio within 0.97-1.03.

Each process lays out its compiled code and data at other addresses, and
that alone moved two processes of the same version apart by up to 5 %
(median paired CPU-time ratios 0.95 and 1.09 seen between single pairs):
``--processes`` workers per version (default 3) take the rounds in turn,
so that the median is over layouts too.

Both the wall time and the CPU time of each worker are taken per block.  On
a crowded host (load average far above the cores) the wall time mostly
measures waiting for a core; the CPU time does not (for the one-core
workloads it is the kernel's own time; for ``demo32`` it is the work of all
threads, so it misses an uneven split over the cores, which the wall time
shows on a quiet host).

A version is a git revision (``HEAD``, ``main``, a commit) or ``WORKTREE`` (the
files on disk).  Each version compiles into an empty temporary cache (the two
compile side by side: two to four minutes on a shared two-core host).

Run:  .venv/bin/python benchmarks/ab_kernel.py HEAD WORKTREE [--rounds 20] [--workloads bench,demo1,demo32]
      [--keep .ab_versions]
"""

from __future__ import annotations

import argparse
import hashlib
import inspect
import io
import json
import os
import shutil
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
WORKLOADS = ("bench", "demo1", "demo32")
#: Further workloads, on request (``--workloads``; ``ab_demo_likelihood.py`` uses them).
EXTRA_WORKLOADS = ("like1", "like64", "benchll", "benchll_py", "like1_py", "demo1_py")


# ---------------------------------------------------------------- the worker (one per version)

def bench_workload():
    """(call, outputs) of the bench_kernel workload on one core, through the compiled entry point, at the
    version's default tolerances; ``call.reference`` gives the outputs at rtol 1e-11."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import bench_kernel as b
    from speciakin.simulation import compile_model, compile_runs, simulate_batch
    from speciakin.simulation import batch_kernel as batch

    compiled = compile_model(b.build_model())
    runs = b.build_runs()
    cruns = compile_runs(compiled, runs, [b.TIMES] * len(runs))
    n_runs = len(runs)
    q = compiled.nominal[None, :].copy()
    off, fac = np.zeros((1, n_runs)), np.ones((1, n_runs))
    out = np.full((1, n_runs, len(b.TIMES), compiled.n_outputs), np.nan)
    status, info = np.zeros((1, n_runs), np.int64), np.zeros((1, n_runs, 8))  # room for every version's info
    # the version's own default tolerances (those of simulate_batch)
    defaults = inspect.signature(simulate_batch).parameters
    args = (compiled.arrays, q, cruns.arrays, off, fac, defaults["rtol"].default, defaults["atol"].default, out,
            status, info)
    # the kernel variant the version's api runs for these runs (a version that compiles one per need)
    if hasattr(batch, "kernel_flags"):
        variant = batch.kernel_flags(cruns.arrays)
    else:
        variant = (batch.free_ph_flag(cruns.arrays.mode),) if hasattr(batch, "free_ph_flag") else ()
    if hasattr(batch, "batch_tasks"):
        def call():
            batch.batch_tasks(*args, 0, 1, *variant)
    else:
        def call():
            batch.batch_serial(*args)

    def result():
        if np.any(status != 0):
            raise SystemExit(f"bench: a run failed (status {status.tolist()})")
        return out.copy(), info[0, :, 1].astype(int)

    def reference():
        """The outputs at rtol 1e-11 (atol scaled by the same factor): what ``compare_outputs`` measures
        the accuracy of the default tolerances against (bench_accuracy.py's metric)."""
        tight = np.full_like(out, np.nan)
        ref_status, ref_info = np.zeros_like(status), np.zeros_like(info)
        tight_args = (compiled.arrays, q, cruns.arrays, off, fac, 1e-11, 1e-15, tight, ref_status, ref_info)
        if hasattr(batch, "batch_tasks"):
            batch.batch_tasks(*tight_args, 0, 1, *variant)
        else:
            batch.batch_serial(*tight_args)
        if np.any(ref_status != 0):
            raise SystemExit(f"bench: a reference run failed (status {ref_status.tolist()})")
        return tight
    call.reference = reference
    call.observed = [compiled.species_index(n) for n in b.OBSERVED]
    call.volume = compiled.n_species
    call.floor = 1e-5 * runs[0].charges["S"] / runs[0].volume
    return call, result


def benchll_workload():
    """``bench``'s evaluation through the public ``batch_log_likelihood`` (bench_kernel.py's "one core"
    figure: the Python around the kernel included), at the version's own default tolerances."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import bench_kernel as b
    from speciakin.simulation import batch_log_likelihood, compile_model, compile_runs, simulate_batch

    compiled = compile_model(b.build_model())
    runs = b.build_runs()
    cruns = compile_runs(compiled, runs, [b.TIMES] * len(runs))
    q = compiled.nominal[None, :].copy()
    nominal = simulate_batch(compiled, cruns, q, parallel=False).outputs[0]
    # synthetic data: the nominal outputs 1 % off, sigma 1 % of their size (where finite)
    data = np.where(np.isfinite(nominal), nominal * 1.01, np.nan)
    sigma = np.where(np.isfinite(nominal), 0.01 * np.maximum(np.abs(nominal), 1e-12), 1.0)
    return _keeping_last(lambda: batch_log_likelihood(compiled, cruns, q, data, sigma, parallel=False)[0])


def python_only(build):
    """A one-core workload with the compiled batch replayed: its outputs of the first call are
    copied into the buffers of every later call, so that the time is the Python around the
    kernel (plus the copy, the same for both versions)."""
    def builder():
        from speciakin.simulation import api

        real = api.batch_tasks
        call, result = build()
        recorded = {}

        def record(*args):
            real(*args)
            recorded["buffers"] = tuple(a.copy() for a in args[7:10])

        def replay(*args):
            for target, saved in zip(args[7:10], recorded["buffers"]):
                target[...] = saved
        # a version that asks the cache whether the kernel is compiled asks it for the replay too
        replay._cache = getattr(real, "_cache", None)
        api.batch_tasks = record
        try:
            call()
        finally:
            api.batch_tasks = real

        def replayed():
            api.batch_tasks = replay
            try:
                call()
            finally:
                api.batch_tasks = real
        return replayed, result
    return builder


def demo_objective():
    """The demo campaign's objective (the version's own pipeline)."""
    from speciakin.pipeline import load_inputs, make_objective, resolve_inputs

    folder = ROOT / "data_templates" / "demo"
    model, campaign, _ = load_inputs(resolve_inputs(folder))
    return make_objective(model, campaign)


def _keeping_last(evaluate):
    """(call, result) of a workload: ``call`` evaluates, ``result`` returns the last outputs (no status)."""
    last = {}

    def call():
        last["out"] = evaluate()

    def result():
        return np.asarray(last["out"]), np.zeros(0, int)
    return call, result


def demo1_workload():
    objective = demo_objective()
    objective.parallel = False
    theta = objective.start
    return _keeping_last(lambda: objective.residuals(theta))


def _demo_likelihood(n_sets: int, parallel: bool):
    """The demo's log-likelihood of ``n_sets`` sets (the start, then sets scattered 1 % around it)."""
    objective = demo_objective()
    objective.parallel = parallel
    theta = objective.start
    rng = np.random.default_rng(7)
    sets = theta + 0.01 * rng.standard_normal((n_sets, theta.size)) * np.maximum(np.abs(theta), 1e-3)
    if n_sets == 1:
        sets = theta[None, :]
    return _keeping_last(lambda: objective.log_likelihood_batch(sets))


def demo32_workload():
    return _demo_likelihood(32, True)


def like1_workload():
    return _demo_likelihood(1, False)


def like64_workload():
    return _demo_likelihood(64, True)


def worker(workloads: list[str], result_file: str) -> None:
    """Build and warm up every workload, save the outputs, then time blocks on request.

    Protocol on stdin/stdout, one line each: ``NAME CALLS`` -> seconds for CALLS calls; ``quit``.
    """
    import speciakin

    calls = {}
    saved = {}
    builders = {"bench": bench_workload, "demo1": demo1_workload, "demo32": demo32_workload,
                "like1": like1_workload, "like64": like64_workload, "benchll": benchll_workload}
    builders.update({f"{n}_py": python_only(builders[n]) for n in ("benchll", "like1", "demo1")})
    for name in workloads:
        call, result = builders[name]()
        t0 = time.perf_counter()
        call()  # compiles (or loads) every kernel the workload needs
        first = time.perf_counter() - t0
        t0 = time.perf_counter()
        call()
        saved[name], saved[name + "_steps"] = result()
        saved[name + "_first"] = np.array([first, time.perf_counter() - t0])
        if hasattr(call, "reference"):
            # observed concentrations at the tolerances timed and at rtol 1e-11
            for key, full in ((name + "_observed", saved[name]), (name + "_reference", call.reference())):
                saved[key] = full[0][:, :, call.observed] / full[0][:, :, call.volume:call.volume + 1]
            saved[name + "_floor"] = np.array(call.floor)
        calls[name] = call
    np.savez(result_file, **saved)
    from numba import config, threading_layer
    try:
        layer = threading_layer()
    except ValueError:  # no parallel region has run
        layer = "none"
    print(json.dumps({"ready": True, "package": speciakin.__file__, "threads": config.NUMBA_NUM_THREADS,
                      "layer": layer}), flush=True)
    for line in sys.stdin:
        words = line.split()
        if not words or words[0] == "quit":
            break
        call, n = calls[words[0]], int(words[1])
        c0 = time.process_time()
        t0 = time.perf_counter()
        for _ in range(n):
            call()
        print(f"{time.perf_counter() - t0:.9f} {time.process_time() - c0:.9f}", flush=True)


# ---------------------------------------------------------------- the parent

def export(version: str, into: Path) -> Path:
    """``src`` of ``version`` (a git revision or WORKTREE) copied to ``into``; returns the folder to put on the path."""
    target = into / "src"
    if version == "WORKTREE":
        shutil.copytree(ROOT / "src", target, ignore=shutil.ignore_patterns("__pycache__", "*.egg-info"))
    else:
        blob = subprocess.run(["git", "archive", version, "src"], cwd=ROOT, check=True,
                              capture_output=True).stdout
        with tarfile.open(fileobj=io.BytesIO(blob)) as tar:
            # extraction filters exist from Python 3.11.4 on
            options = {"filter": "data"} if hasattr(tarfile, "data_filter") else {}
            tar.extractall(into, **options)
    return target


def version_key(version: str) -> str:
    """A short digest of the sources of ``version`` (names a kept export, see ``--keep``)."""
    digest = hashlib.sha256()
    if version == "WORKTREE":
        for path in sorted((ROOT / "src").rglob("*.py")):
            digest.update(str(path.relative_to(ROOT)).encode() + b"\0" + path.read_bytes())
    else:
        tree = subprocess.run(["git", "rev-parse", f"{version}:src"], cwd=ROOT, check=True, capture_output=True,
                              text=True).stdout.strip()
        digest.update(tree.encode())
    return digest.hexdigest()[:16]


class Worker:
    """A worker process running one version."""

    def __init__(self, version: str, folder: Path, workloads: list[str], index: str = "a0"):
        folder = folder.resolve()  # numba keys its cache by the sources' real path
        self.reused = (folder / "src").is_dir()
        if not self.reused:
            folder.mkdir(parents=True, exist_ok=True)
            export(version, folder)
        src = folder / "src"
        self.result_file = str(folder / f"outputs_{index}.npz")
        env = dict(os.environ, PYTHONPATH=str(src), NUMBA_CACHE_DIR=str(folder / "numba_cache"),
                   MPLBACKEND="Agg", OMP_WAIT_POLICY="PASSIVE", PYTHONHASHSEED="0")
        self.version = version
        self.started = time.perf_counter()
        self.proc = subprocess.Popen([sys.executable, str(Path(__file__).resolve()), "--worker",
                                      ",".join(workloads), self.result_file],
                                     stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True, env=env,
                                     cwd=str(folder))

    def wait_ready(self) -> dict:
        line = self.proc.stdout.readline()
        if not line:
            raise SystemExit(f"version {self.version}: the worker failed (see its messages above)")
        info = json.loads(line)
        info["seconds"] = time.perf_counter() - self.started
        return info

    def time(self, name: str, calls: int) -> tuple[float, float]:
        """(wall time, CPU time of the worker process) per call [s] over ``calls`` calls."""
        self.proc.stdin.write(f"{name} {calls}\n")
        self.proc.stdin.flush()
        wall, cpu = map(float, self.proc.stdout.readline().split())
        return wall / calls, cpu / calls

    def close(self) -> None:
        try:
            self.proc.stdin.write("quit\n")
            self.proc.stdin.flush()
        except OSError:
            pass
        self.proc.wait(timeout=60)


def compare_outputs(workers, workloads) -> None:
    a, b = (np.load(w.result_file) for w in workers)
    for name in workloads:
        ref = a[name]
        if ref.shape != b[name].shape:
            print(f"{name}: outputs differ in shape {ref.shape} vs {b[name].shape}")
            continue
        finite = np.isfinite(ref) & np.isfinite(b[name])
        same_nan = np.array_equal(np.isfinite(ref), np.isfinite(b[name]))
        diff = np.max(np.abs(ref[finite] - b[name][finite]), initial=0.0)
        scale = np.max(np.abs(ref[finite]), initial=0.0)
        steps = "" if a[name + "_steps"].size == 0 else (
            f"; accepted steps per run A {a[name + '_steps'].tolist()}, B {b[name + '_steps'].tolist()}")
        print(f"{name}: outputs B - A: largest difference {diff:.2e} (largest |A| {scale:.2e}); "
              f"{'same' if same_nan else 'DIFFERENT'} finite entries{steps}")
        if name + "_reference" in a.files and name + "_reference" in b.files:
            # issue 16's metric: |y - y_ref| / max(|y_ref|, 1e-5 of the substrate's start), y_ref at rtol 1e-11
            ref, floor = a[name + "_reference"], float(a[name + "_floor"])
            dev = [np.max(np.abs(v[name + "_observed"] - ref) / np.maximum(np.abs(ref), floor)) for v in (a, b)]
            other = np.max(np.abs(b[name + "_reference"] - ref) / np.maximum(np.abs(ref), floor))
            print(f"{name}: observed outputs against A's rtol-1e-11 reference (largest deviation relative to "
                  f"max(|y_ref|, {floor:g})): A {dev[0]:.2e}, B {dev[1]:.2e} (B's own reference differs by "
                  f"{other:.1e})")
        print(f"{name}: first call (compile or cache load) A {a[name + '_first'][0]:.1f} s, "
              f"B {b[name + '_first'][0]:.1f} s; second call A {a[name + '_first'][1] * 1e3:.2f} ms, "
              f"B {b[name + '_first'][1] * 1e3:.2f} ms")


def main() -> None:
    if len(sys.argv) > 1 and sys.argv[1] == "--worker":
        worker(sys.argv[2].split(","), sys.argv[3])
        return
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("a", help="version A: a git revision or WORKTREE")
    parser.add_argument("b", help="version B: a git revision or WORKTREE")
    parser.add_argument("--rounds", type=int, default=20, help="pairs of blocks per workload (default 20)")
    parser.add_argument("--block", type=float, default=0.2, help="seconds of calls per block (default 0.2)")
    parser.add_argument("--workloads", default=",".join(WORKLOADS),
                        help=f"comma-separated, from {', '.join(WORKLOADS)} (default all)")
    parser.add_argument("--processes", type=int, default=3,
                        help="worker processes per version, taking rounds in turn (default 3)")
    parser.add_argument("--keep", metavar="DIR",
                        help="keep each version's export and compiled cache in DIR (named by slot and source "
                             "digest) and reuse them in later runs: no recompiling of an unchanged version")
    args = parser.parse_args()
    workloads = [w for w in args.workloads.split(",") if w]
    unknown = sorted(set(workloads) - set(WORKLOADS + EXTRA_WORKLOADS))
    if unknown:
        parser.error(f"unknown workload(s) {', '.join(unknown)}; expected some of "
                     f"{', '.join(WORKLOADS + EXTRA_WORKLOADS)}")
    with tempfile.TemporaryDirectory(prefix="speciakin_ab_") as tmp:
        if args.keep:
            folders = [Path(args.keep).resolve() / f"{'ab'[i]}-{version_key(v)}" for i, v in enumerate((args.a, args.b))]
        else:
            folders = [Path(tmp) / f"version_{'ab'[i]}" for i in range(2)]
        workers = [Worker(v, f, workloads, f"{'ab'[i]}0") for i, (v, f) in enumerate(zip((args.a, args.b), folders))]
        pairs = [workers]
        try:
            for w in workers:
                info = w.wait_ready()
                print(f"{'AB'[workers.index(w)]} {w.version}: ready after {info['seconds']:.0f} s "
                      f"({'kept export and cache' if w.reused else 'empty cache'}; {info['package']}; "
                      f"threads {info['threads']}, threading layer {info['layer']})", flush=True)
            compare_outputs(workers, workloads)
            # more processes per version, loading the filled cache: each process lays out its code and data
            # at other addresses, which alone moved identical versions by up to 5 %
            pairs += [[Worker(v, f, workloads, f"{'ab'[i]}{j}") for i, (v, f) in enumerate(zip((args.a, args.b), folders))]
                      for j in range(1, args.processes)]
            for pair in pairs[1:]:
                for w in pair:
                    w.wait_ready()
            for name in workloads:
                run_workload(name, pairs, args.rounds, args.block)
        finally:
            for pair in pairs:
                for w in pair:
                    w.close()


def run_workload(name: str, pairs, rounds: int, block: float) -> None:
    """Alternating blocks A B, B A, ... of the same number of calls, round r on the pair of
    worker processes r mod len(pairs); prints the paired ratios of the wall times and of the
    workers' CPU times (and, for CPU, the median of each pair of processes)."""
    load = os.getloadavg()[0]
    probe = min(w.time(name, 1)[1] for w in pairs[0] for _ in range(2))
    calls = max(1, int(round(block / probe)))
    times = np.zeros((2, rounds, 2))  # (wall, CPU) x round x version
    for r in range(rounds):
        workers = pairs[r % len(pairs)]
        for i in ((0, 1) if r % 2 == 0 else (1, 0)):
            times[:, r, i] = workers[i].time(name, calls)
    load_after = os.getloadavg()[0]
    for kind, t in zip(("wall", "CPU"), times):
        ratio = t[:, 1] / t[:, 0]
        if kind == "CPU" and len(pairs) > 1:
            per_pair = ", ".join(f"{np.median(ratio[j::len(pairs)]):.3f}" for j in range(len(pairs)))
            print(f"{name} (CPU): median paired ratio of each pair of processes: {per_pair}")
        bests = ", ".join(f"{'AB'[i]} best {t[:, i].min() * 1e3:.3f} median {np.median(t[:, i]) * 1e3:.3f}"
                          for i in range(2))
        print(f"{name} ({kind}): {bests} ms per call; B/A median of paired ratios {np.median(ratio):.3f} "
              f"(quartiles {np.quantile(ratio, 0.25):.3f}-{np.quantile(ratio, 0.75):.3f}); ratio of the bests "
              f"{t[:, 1].min() / t[:, 0].min():.3f}")
    print(f"{name}: {rounds} pairs of blocks of {calls} calls; load average {load:.2f} before, {load_after:.2f} "
          f"after", flush=True)


if __name__ == "__main__":
    main()
