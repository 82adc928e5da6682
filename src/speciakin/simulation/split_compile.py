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

A cold compile without the free-pH path gives the second process the
held-pH ramp's functions (``held_ramp_kernel.temperature_piece`` with what
it calls, and ``segment_cubics``) instead: it compiles them and writes
:data:`RAMP_READY` on its standard output (with the free-pH path, the longer
share already, they stay in this process).  A variant with neither path
(``batch_tasks``'s ``free_ph`` and ``held_ramp`` both None: held pH at one
temperature, logged pH) leaves nothing to the second process and is compiled
here alone.
``integrate_smooth`` types the ramp's functions at its start, so this
process first compiles its step loop ``smooth_steps`` (not cached: made by a
factory; compiled here for the argument types ``integrate_smooth`` gives it),
then waits for that line and compiles ``integrate_smooth``, which loads the
ramp's functions from the cache.

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
second process: it reads the pickled argument types of the ramp's functions
and of ``integrate_segment`` (or None) from its standard input and compiles
them.
"""

from __future__ import annotations

import json
import logging
import operator
import os
import pickle
import queue
import subprocess
import sys
import threading
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


def path_signatures(model, q_all, runs, out, info, held_ramp=True):
    """The numba argument types of ``integrate_smooth`` and ``integrate_segment`` as
    ``run_one`` calls them inside ``batch_tasks(model, q_all, runs, ..., out, ..., info, ...,
    held_ramp)``.

    Compiles ``run_context`` and ``run_workspaces`` (the first call needs them
    too) for the types of the tuples they return.
    """
    from numba import typeof, types
    from numba.core.registry import cpu_target

    from speciakin.simulation.integrator_kernel import run_context, run_workspaces
    from speciakin.simulation.segment_kernel import FROM_NODES, NODES

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
              out_t, out_times_t, i64, n_out_t, counters_t, f64, vector, typeof(held_ramp))
    segment = (f64, f64, vector, f64, model_t, par_t, ctx_t, vector, f64, f64, types.boolean, f64, f64, ws_t,
               counters_t, out_t, out_times_t, i64, n_out_t)
    # functions both paths (and the held-pH ramp) call, with what they call: time_speciation(t, model, par,
    # ctx, slope, ws), write_output(out, i_out, y, ph, temperature), initial_step(y, f0, n, atol, rtol, span),
    # fit_cubics(nodes, n_logged, FROM_NODES, poly, in_logs, scale), effective_constants(model, ws, row)
    sw = sw_t.types
    from_nodes_t = typeof(FROM_NODES).copy(readonly=True)  # a global array is a read-only constant
    shared = {"time_speciation": (f64, model_t, par_t, ctx_t, f64, ws_t),
              "write_output": (out_t, i64, vector, f64, f64),
              "initial_step": (vector, vector, i64, f64, f64, f64),
              "fit_cubics": (sw[3], i64, from_nodes_t, sw[4], sw[5], sw[7]),
              "effective_constants": (model_t, ws_t, item(sw[30], i64))}
    # the held-pH ramp (held_ramp_kernel) as integrate_smooth calls it: temperature_piece(ta, t1, span, temp_a,
    # slope, held_ph, model, par, ws, titrant, titrant_conc, second, second_conc, NODES, FROM_NODES, rtol,
    # tpoly, tlogs, tnodes, tscale, tstate), segment_cubics(tpoly[piece], tlogs[piece], 5 floats, nu, n_mol,
    # model.species_charge, feed_rate, feed_volume_rate, poly, in_logs)
    ctx = ctx_t.types
    ramp = {"temperature_piece": (f64, f64, f64, f64, f64, f64, model_t, par_t, ws_t, ctx[3], ctx[4], ctx[11],
                                  ctx[12], typeof(NODES).copy(readonly=True), from_nodes_t, f64, sw[28], sw[29],
                                  sw[30], sw[31], sw[32]),
            "segment_cubics": (item(sw[28], i64), item(sw[29], i64), f64, f64, f64, f64, f64, sw[0],
                               typing.resolve_getattr(model_t, "n_mol"), typing.resolve_getattr(model_t, "species_charge"),
                               vector, f64, sw[4], sw[5])}
    # the step loop: smooth_steps(prob, varying, ta, tb, t1, span, y, h, work, rtol, atol, out, out_t, i_out,
    # n_out, counters, sign_tol, peak), prob and work as integrate_smooth makes them
    boolean = types.boolean
    prob = types.Tuple((sw[4], sw[5], f64, f64, boolean, sw[8], sw[9], sw[0], sw[1], sw[2],
                        typing.resolve_getattr(model_t, "n_species"), typing.resolve_getattr(model_t, "n_mol"),
                        boolean, ctx[3], ctx[4], ctx[11], ctx[12], vector, f64, sw[10], sw[11], sw[23], boolean,
                        f64, ctx[2], ctx[5], ctx[6], ctx[7], ctx[8], ctx[9], ctx[10], ctx[14], ctx[15]))
    head = types.slice2_type
    work = types.Tuple((sw[12], sw[17], sw[13], sw[14], sw[15], sw[16], sw[18], sw[19], item(sw[21], head),
                        item(sw[22], head), item(sw[24], head), types.Array(f64, 2, "C"), item(sw[26], head),
                        item(sw[27], head)))
    steps = (prob, boolean, f64, f64, f64, f64, vector, f64, work, f64, f64, out_t, out_times_t, i64, n_out_t,
             counters_t, f64, vector)
    return smooth, segment, shared, ramp, steps


def _shared_functions():
    from speciakin.simulation.rhs_kernel import time_speciation
    from speciakin.simulation.rodas_tableau import initial_step
    from speciakin.simulation.rosenbrock_kernel import write_output
    from speciakin.simulation.smooth_rhs_kernel import effective_constants, fit_cubics

    return {"time_speciation": time_speciation, "write_output": write_output, "initial_step": initial_step,
            "fit_cubics": fit_cubics, "effective_constants": effective_constants}


def _ramp_functions():
    from speciakin.simulation.held_ramp_kernel import segment_cubics, temperature_piece

    return {"temperature_piece": temperature_piece, "segment_cubics": segment_cubics}


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


def compile_paths_apart(model, q_all, runs, out, info, free_ph=True, held_ramp=True) -> bool:
    """Compile the free-pH path (with ``free_ph``) or else the held-pH ramp's functions (with
    ``held_ramp``) in a second process and the rest of the held/logged path here (module notes);
    the flags are those of the ``batch_tasks`` variant to be run.

    Returns True when what the second process was given is in the cache
    afterwards (the first call loads it), False when nothing was split (one
    core, no writable cache, the paths cached already, a variant with neither
    path) or the second process failed.
    """
    from numba import typeof
    from numba.core import config

    from speciakin.simulation.cache_guard import is_cached
    from speciakin.simulation.held_ramp_kernel import temperature_piece
    from speciakin.simulation.integrator_kernel import integrate_segment
    from speciakin.simulation.segment_kernel import integrate_smooth, smooth_steps

    free_ph = free_ph is True
    held_ramp = held_ramp is True
    cache = getattr(integrate_segment, "_cache", None)
    cache_path = getattr(cache, "_cache_path", None)
    # the second process's share: the free-pH path, or else the held-pH ramp's functions
    if free_ph:
        share_cached = is_cached(integrate_segment)
    else:
        share_cached = not held_ramp or is_cached(temperature_piece)
    if (_cores() < 2 or not cache_path or not getattr(cache, "_enabled", False)
            or not os.access(cache_path, os.W_OK) or share_cached
            or is_cached(integrate_smooth, typeof(True if held_ramp else None))):
        # nothing to gain: no share for the other process, or the held/logged path is at hand already
        # (the rest is compiled here as fast as elsewhere)
        return False
    smooth, segment, shared, ramp, steps = path_signatures(model, q_all, runs, out, info,
                                                           True if held_ramp else None)
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
        # with the free-pH path the other process has the longer share already: the ramp stays here
        message = pickle.dumps((None, segment) if free_ph else (ramp, None))
        other = subprocess.Popen([sys.executable, "-m", "speciakin.simulation.split_compile"], stdin=subprocess.PIPE,
                                 stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, env=env)
        other.stdin.write(message)
        other.stdin.close()
        other.stdin = None  # written whole: only read from now on
    except (OSError, pickle.PicklingError) as exc:
        LOG.debug("compiling on one core: the second process did not start (%s)", exc)
        if other is not None:
            other.kill()
            other.wait()
        return False
    lines: queue.Queue = queue.Queue()

    def read_lines():
        for line in other.stdout:
            lines.put(line)
        lines.put(None)

    reader = threading.Thread(target=read_lines, daemon=True)
    reader.start()
    start = time.perf_counter()
    last = b""
    ramp_ready = False
    if not free_ph:
        # the step loop first (integrate_smooth types the ramp's functions at once, the step loop last): the
        # other process has the ramp's functions in the cache meanwhile, and integrate_smooth loads them
        smooth_steps.compile(steps)
    compiled_steps = time.perf_counter()
    if not free_ph:
        try:
            line = lines.get(timeout=WAIT_SECONDS)
            ramp_ready = line is not None and line.strip() == RAMP_READY
            if line is not None and not ramp_ready:
                last = line
        except queue.Empty:
            pass
    waited = time.perf_counter() - compiled_steps
    integrate_smooth.compile(smooth)
    compiled_here = time.perf_counter()
    try:
        other.wait(timeout=WAIT_SECONDS)
        code = other.returncode
    except subprocess.TimeoutExpired:
        other.kill()
        other.wait()
        code = None
    reader.join(timeout=5.0)
    while not lines.empty():
        line = lines.get()
        if line is not None and line.strip():
            last = line
    last_split_compiled.clear()
    try:
        last_split_compiled.update(json.loads(last.decode().strip()))
    except ValueError:
        pass
    LOG.debug("step loop compiled in %.1f s, %.1f s waiting for the held-pH ramp (%s), held/logged path in %.1f s; "
              "then %.1f s waiting for the other process (exit code %s)", compiled_steps - start, waited,
              "loaded" if ramp_ready else "compiled here", compiled_here - compiled_steps - waited,
              time.perf_counter() - compiled_here, code)
    if code != 0:
        LOG.debug("the second compile process ended with %s: what it had is compiled here", code)
        return False
    return ramp_ready or bool(free_ph)


#: The second process's line once the held-pH ramp's functions are in the cache.
RAMP_READY = b"ramp ready"


def main() -> int:
    """The second process: compile the held-pH ramp's functions, then (when given) ``integrate_segment``,
    for the pickled argument types on stdin."""
    ramp, segment = pickle.loads(sys.stdin.buffer.read())
    import speciakin.simulation  # noqa: F401  (the shared cache folder, stale entries cleared)

    if ramp is not None:
        for name, function in _ramp_functions().items():
            function.compile(ramp[name])
        sys.stdout.buffer.write(RAMP_READY + b"\n")
        sys.stdout.flush()
    if segment is not None:
        from speciakin.simulation.integrator_kernel import integrate_segment

        integrate_segment.compile(segment)
    print(json.dumps(kernel_compiles()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
