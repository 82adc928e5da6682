"""The same numbers to the last bit on every x86-64 machine: one instruction set for every compiled path.

Compiled code chooses its instructions by the machine it runs on: numba compiles the simulation kernel
for the host CPU, and OpenBLAS (linear algebra of numpy and scipy) and numpy's own SIMD loops pick their
kernels at run time.  Results therefore differ in the last bits from one machine to another, and an
adaptive integrator, a least-squares path or a draw near a specification limit can carry that further.
Measured on a host with AVX-512 (AMD Zen 4) against the AVX2 host the stored copies were made on: the
demo's noise-free curves (``truth.json``) about 1e-12 relative apart; the pipeline's regression case
(fit with profiles, 16-draw window) up to 1e-4 in profile points, the other of two equal starts chosen
as best, one of 16 draws on the other side of a limit.  Run with :func:`pinned_environment` (numba's
target ``haswell``, OpenBLAS's ``Haswell`` kernels, numpy's dispatch above x86-64-v3 switched off) the
Zen 4 host reproduced the stored copies exactly.

The comparisons to the last bit (the demo generator's byte-identical output, the pipeline's regression
copy) run in a subprocess with this environment, and so do the scripts that write those copies.  It
changes nothing the program does for a user, whose numbers may differ from another machine's in the
last bits.

The pinned processes keep their compiled kernels in a folder of their own (:func:`pinned_cache_dir`), so
that they never write the index files of the host's kernels that the test process writes at the same
time.  :func:`start_in_background` runs them one after another in a thread while the other tests run
(the test session starts the ones its tests need as soon as it knows them: tests/conftest.py), and
:func:`background_result` waits for one.
"""

from __future__ import annotations

import os
import platform
import shutil
import subprocess
import sys
import tempfile
import threading
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path

__all__ = ["pinned_environment", "run_pinned", "pinned_cache_dir", "start_in_background", "background_result",
           "stop_background", "job_folder", "job_of", "PINNED_JOBS", "PINNED_MARK", "WHY_NOT_PINNED"]

#: Set in the pinned environment (a script re-run in it sees it and does not re-run itself again).
PINNED_MARK = "SPECIAKIN_PINNED_NUMBERS"
#: Why a comparison to the last bit cannot run on a machine :func:`pinned_environment` gives None for.
WHY_NOT_PINNED = ("the stored copies are of x86-64 with AVX2 and FMA (haswell); this machine cannot run "
                  "that instruction set, so its last bits cannot be compared")

#: numpy's dispatch targets up to this one stay (x86-64-v3: AVX2 and FMA).
_NUMPY_KEEP = "X86_V3"


def _numpy_targets_above_v3() -> list[str]:
    """numpy's SIMD dispatch targets of this machine above x86-64-v3 (to switch off)."""
    from numpy._core._multiarray_umath import __cpu_dispatch__, __cpu_features__

    targets = list(__cpu_dispatch__)
    above = targets[targets.index(_NUMPY_KEEP) + 1:] if _NUMPY_KEEP in targets else []
    return [t for t in above if __cpu_features__.get(t)]


def pinned_environment() -> dict[str, str] | None:
    """``os.environ`` with the instruction set pinned to x86-64-v3 / haswell; None where it cannot be
    (not x86-64, or a CPU without AVX2 and FMA)."""
    if platform.machine().lower() not in ("x86_64", "amd64"):
        return None
    from numpy._core._multiarray_umath import __cpu_features__

    if not (__cpu_features__.get("AVX2") and __cpu_features__.get("FMA3")):
        return None
    env = dict(os.environ)
    env.update({"NUMBA_CPU_NAME": "haswell", "NUMBA_CPU_FEATURES": "", "OPENBLAS_CORETYPE": "Haswell",
                "NUMBA_CACHE_DIR": str(pinned_cache_dir()), PINNED_MARK: "1"})
    off = _numpy_targets_above_v3()
    if off:
        env["NPY_DISABLE_CPU_FEATURES"] = " ".join(off)
    else:
        env.pop("NPY_DISABLE_CPU_FEATURES", None)
    return env


def pinned_cache_dir() -> Path:
    """Compiled kernels of the pinned processes: beside the host's folder (``NUMBA_CACHE_DIR``, or the
    package's per-user folder), with ``-pinned-haswell`` added to its name."""
    host = os.environ.get("NUMBA_CACHE_DIR")
    if not host:
        from speciakin.simulation.cache_guard import default_cache_dir

        host = str(default_cache_dir())
    host = Path(host)
    if host.name.endswith("-pinned-haswell"):
        return host
    return host.with_name(host.name + "-pinned-haswell")


def _checked(script: Path, args: tuple[str, ...], done: subprocess.CompletedProcess) -> subprocess.CompletedProcess:
    if done.returncode != 0:
        raise RuntimeError(f"{script.name} {' '.join(args)} failed (exit {done.returncode}):\n"
                           f"{done.stdout[-3000:]}\n{done.stderr[-3000:]}")
    return done


def run_pinned(script: Path, *args: str) -> subprocess.CompletedProcess:
    """Run ``python script args`` in the pinned environment; raises with its output when it fails."""
    env = pinned_environment()
    if env is None:
        raise RuntimeError(WHY_NOT_PINNED)
    done = subprocess.run([sys.executable, str(script), *args], env=env, capture_output=True, text=True)
    return _checked(script, args, done)


# ------------------------------------------------------------------ jobs run beside the tests

_TESTS = Path(__file__).resolve().parent
#: The pinned jobs of the test session, by the fixture that waits for each: (job name, script, output
#: folder given as its arguments after ``--out`` or alone).  The order is the queue's.
PINNED_JOBS = {
    "regenerated": ("demo", _TESTS.parent / "scripts" / "make_demo_campaign.py", "--out"),
    "pinned_regression": ("regression", _TESTS / "pipeline" / "regression_case.py", ""),
}

_jobs: dict[str, Future] = {}
_running: set[subprocess.Popen] = set()
_lock = threading.Lock()
_executor: ThreadPoolExecutor | None = None
_folder: Path | None = None


def job_folder(name: str) -> Path:
    """The output folder of the pinned job ``name`` (in a temporary folder of this session, removed by
    :func:`stop_background`; not created here)."""
    global _folder
    with _lock:
        if _folder is None:
            _folder = Path(tempfile.mkdtemp(prefix="speciakin-pinned-"))
    return _folder / name


def job_of(fixture: str) -> tuple[str, Path, tuple[str, ...]]:
    """(name, script, arguments) of the pinned job the fixture ``fixture`` waits for."""
    name, script, flag = PINNED_JOBS[fixture]
    out = str(job_folder(name))
    return name, script, (flag, out) if flag else (out,)


def _run_job(script: Path, args: tuple[str, ...], env: dict[str, str]) -> subprocess.CompletedProcess:
    proc = subprocess.Popen([sys.executable, str(script), *args], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    with _lock:
        _running.add(proc)
    try:
        out, err = proc.communicate()
    finally:
        with _lock:
            _running.discard(proc)
    return _checked(script, args, subprocess.CompletedProcess(proc.args, proc.returncode, out, err))


def start_in_background(name: str, script: Path, *args: str) -> None:
    """Queue ``python script args`` in the pinned environment under ``name`` (once; the queue runs one
    job at a time, so that two pinned processes never compile the same kernels at once).  Does nothing
    where :func:`pinned_environment` is None."""
    global _executor
    env = pinned_environment()
    if env is None:
        return
    with _lock:
        if name in _jobs:
            return
        if _executor is None:
            _executor = ThreadPoolExecutor(max_workers=1, thread_name_prefix="pinned")
        _jobs[name] = _executor.submit(_run_job, script, tuple(args), env)


def background_result(name: str, script: Path, *args: str) -> subprocess.CompletedProcess:
    """The finished job ``name`` (queued now when it was not yet); raises with its output when it failed."""
    if pinned_environment() is None:
        raise RuntimeError(WHY_NOT_PINNED)
    start_in_background(name, script, *args)
    return _jobs[name].result()


def stop_background() -> None:
    """End the queue: jobs not started are dropped, running ones are stopped (the session is over)."""
    global _executor, _folder
    with _lock:
        executor, _executor = _executor, None
        for job in _jobs.values():
            job.cancel()
        for proc in list(_running):
            proc.kill()
    if executor is not None:
        executor.shutdown(wait=True)
    with _lock:
        folder, _folder = _folder, None
    if folder is not None:
        shutil.rmtree(folder, ignore_errors=True)
