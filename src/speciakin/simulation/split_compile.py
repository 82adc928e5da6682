"""The cold compile of the full kernel, split over two processes.

The kernel with the free-pH path (``batch_kernel.batch_tasks`` for
``free_ph`` True) has two large independent subtrees below its run driver
``integrator_kernel.run_one``: the held/logged path (``segment_kernel.
integrate_smooth`` and its step loop) and the free-pH path
(``integrator_kernel.integrate_segment``, its step loop, the right-hand side
with the charge-balance solve and its Jacobian).  numba compiles one function
at a time, on one core.  Before the first call of a full kernel that is not
cached, :func:`compile_paths_apart` starts a second Python process that
compiles the free-pH path into the shared on-disk cache, compiles the
held/logged path here meanwhile, waits for the other process, and leaves the
drivers (``run_one``, ``batch_tasks``) to the first call, which then loads
the free-pH path from the cache instead of compiling it.

Sound because numba's cache is made for it: each file of an entry (the
index, keyed by the argument types and the source file's stamp, and the
data) is written to a temporary name and renamed, a reader that finds an
index entry without its data compiles instead, and a function loaded from the
cache brings the code (LLVM bitcode) its callers link, exactly as one
compiled in the process; the first call starts only after the second process
has ended.  The compiled code is the same, so are the
outputs.  The argument types of the two path drivers are worked out here
from those of ``batch_tasks`` (:func:`path_signatures`), as ``run_one``
passes them; ``tests/simulation/test_split_compile.py`` checks that a
process that compiled them so then types ``run_one`` with no other variant.
When anything fails (no second core, a cache folder that cannot be written,
the other process ending in an error or not within :data:`WAIT_SECONDS`),
the first call compiles what is missing itself, as before.

Run as a module (``python -m speciakin.simulation.split_compile``) it is the
second process: it reads the pickled argument types of ``integrate_segment``
from its standard input and compiles it.
"""

from __future__ import annotations

import json
import logging
import operator
import os
import pickle
import subprocess
import sys
import time
from pathlib import Path

LOG = logging.getLogger("speciakin.simulation")
#: Longest wait for the second process [s]; then the first call compiles the free-pH path itself.
WAIT_SECONDS = 600.0


def _cores() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        return os.cpu_count() or 1


def _return_type(dispatcher, args):
    """The return type of ``dispatcher`` compiled (or loaded from the cache) for ``args``."""
    dispatcher.compile(args)
    return dispatcher.overloads[tuple(args)].signature.return_type


def path_signatures(model, q_all, runs, out, info):
    """The numba argument types of ``integrate_smooth`` and ``integrate_segment`` as
    ``run_one`` calls them inside ``batch_tasks(model, q_all, runs, ..., out, ..., info, ...)``.

    Compiles ``run_context`` and ``run_workspaces`` (the first call needs them
    too) for the types of the tuples they return.
    """
    from numba import typeof, types
    from numba.core.registry import cpu_target

    from speciakin.simulation.integrator_kernel import run_context, run_workspaces

    typing = cpu_target.typing_context
    typing.refresh()

    def item(container, index):
        return typing.resolve_function_type(operator.getitem, (container, index), {}).return_type

    model_t, runs_t = typeof(model), typeof(runs)
    i64, f64 = types.int64, types.float64
    # batch_tasks: run_one(model, q_all[s], runs, r, ph_offset[s, r], ..., out[s, r], info[s, r], ws, sw, ...)
    q_t = item(typeof(q_all), i64)
    out_t = item(typeof(out), types.UniTuple(i64, 2))
    par_t, ctx_t = _return_type(run_context, (model_t, q_t, runs_t, i64, f64))
    ws_t, sw_t = _return_type(run_workspaces, (model_t,))
    # run_one's own arrays: y = runs.y0[r].copy(), feed_rate, counters, peak (new C arrays)
    vector = types.Array(f64, 1, "C")
    counters_t = types.Array(i64, 1, "C")
    fields = list(runs_t.fields)
    out_times_t = item(runs_t.types[fields.index("out_t")], i64)  # runs.out_t[r]
    n_out_t = item(runs_t.types[fields.index("n_out")], i64)  # runs.n_out[r]
    smooth = (f64, f64, vector, f64, model_t, par_t, ctx_t, ws_t, sw_t, vector, f64, f64, types.boolean, f64, f64,
              out_t, out_times_t, i64, n_out_t, counters_t, f64, vector)
    segment = (f64, f64, vector, f64, model_t, par_t, ctx_t, vector, f64, f64, types.boolean, f64, f64, ws_t,
               counters_t, out_t, out_times_t, i64, n_out_t)
    # functions both paths call (with what they call): time_speciation(t, model, par, ctx, slope, ws),
    # write_output(out, i_out, y, ph, temperature), initial_step(y, f0, n, atol, rtol, span)
    shared = {"time_speciation": (f64, model_t, par_t, ctx_t, f64, ws_t),
              "write_output": (out_t, i64, vector, f64, f64),
              "initial_step": (vector, vector, i64, f64, f64, f64)}
    return smooth, segment, shared


def _shared_functions():
    from speciakin.simulation.rhs_kernel import time_speciation
    from speciakin.simulation.rodas_tableau import initial_step
    from speciakin.simulation.rosenbrock_kernel import write_output

    return {"time_speciation": time_speciation, "write_output": write_output, "initial_step": initial_step}


def kernel_compiles() -> dict:
    """{module.function: variants compiled in this process (not loaded from the cache)} of every
    compiled function the kernel modules hold."""
    import importlib

    from numba.core.dispatcher import Dispatcher

    from speciakin.simulation.cache_guard import KERNEL_MODULES

    counts = {}
    for name in KERNEL_MODULES:
        module = f"speciakin.simulation.{name}"
        for attr, value in vars(importlib.import_module(module)).items():
            if isinstance(value, Dispatcher):
                misses = sum(value.stats.cache_misses.values())
                func = value.py_func
                # a step loop made by make_step_loop is named by the module variable that holds it
                label = f"{module}.{attr}" if "<locals>" in func.__qualname__ else f"{func.__module__}.{func.__qualname__}"
                if misses:
                    counts[label] = misses
    return counts


#: What the second process of the last split compiled (``kernel_compiles`` there), for the tests.
last_split_compiled: dict = {}


def compile_paths_apart(model, q_all, runs, out, info) -> bool:
    """Compile the free-pH path in a second process and the held/logged path here (module notes).

    Returns True when the free-pH path is in the cache afterwards (the first
    call loads it), False when nothing was split (one core, no writable
    cache, either path cached already) or the second process failed.
    """
    from numba.core import config

    from speciakin.simulation.cache_guard import is_cached
    from speciakin.simulation.integrator_kernel import integrate_segment
    from speciakin.simulation.segment_kernel import integrate_smooth

    cache = getattr(integrate_segment, "_cache", None)
    cache_path = getattr(cache, "_cache_path", None)
    if (_cores() < 2 or not cache_path or not getattr(cache, "_enabled", False)
            or not os.access(cache_path, os.W_OK) or is_cached(integrate_segment) or is_cached(integrate_smooth)):
        # nothing to gain: one path is at hand already (the other is compiled here as fast as elsewhere)
        return False
    smooth, segment, shared = path_signatures(model, q_all, runs, out, info)
    # compiled here first and loaded there: one copy of each in the drivers' code (a function compiled
    # in each process would be two functions of other names, both linked into run_one)
    for name, function in _shared_functions().items():
        function.compile(shared[name])
    env = dict(os.environ)
    if config.CACHE_DIR:
        env["NUMBA_CACHE_DIR"] = config.CACHE_DIR  # the same cache folder, however this process chose it
    package_root = str(Path(__file__).resolve().parents[2])  # this copy of speciakin, whatever the caller's path
    env["PYTHONPATH"] = os.pathsep.join(p for p in (package_root, env.get("PYTHONPATH")) if p)
    other = None
    try:
        message = pickle.dumps(segment)
        other = subprocess.Popen([sys.executable, "-m", "speciakin.simulation.split_compile"], stdin=subprocess.PIPE,
                                 stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env)
        other.stdin.write(message)
        other.stdin.close()
        other.stdin = None  # written whole: communicate() below only reads
    except (OSError, pickle.PicklingError) as exc:
        LOG.debug("compiling on one core: the second process did not start (%s)", exc)
        if other is not None:
            other.kill()
            other.wait()
        return False
    start = time.perf_counter()
    integrate_smooth.compile(smooth)
    compiled_here = time.perf_counter()
    try:
        report = other.communicate(timeout=WAIT_SECONDS)[0]
        code = other.returncode
    except subprocess.TimeoutExpired:
        other.kill()
        other.communicate()
        report, code = b"", None
    last_split_compiled.clear()
    try:
        last_split_compiled.update(json.loads(report.decode().strip().splitlines()[-1]))
    except (ValueError, IndexError):
        pass
    LOG.debug("held/logged path compiled in %.1f s; then %.1f s waiting for the free-pH path (exit code %s)",
              compiled_here - start, time.perf_counter() - compiled_here, code)
    if code != 0:
        LOG.debug("the second compile process ended with %s: the free-pH path compiles here", code)
        return False
    return True


def main() -> int:
    """The second process: compile ``integrate_segment`` for the pickled argument types on stdin."""
    signature = pickle.loads(sys.stdin.buffer.read())
    import speciakin.simulation  # noqa: F401  (the shared cache folder, stale entries cleared)
    from speciakin.simulation.integrator_kernel import integrate_segment

    integrate_segment.compile(signature)
    print(json.dumps(kernel_compiles()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
