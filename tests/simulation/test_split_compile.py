"""The cold compile of the full kernel split over two processes (``simulation/split_compile.py``):
the argument types worked out for the two path drivers are those ``run_one`` uses, a second process
fills the shared cache with the free-pH path, and anything that fails leaves the compile to the first
call."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from speciakin.simulation import cache_guard, split_compile
from speciakin.simulation.layout import N_INFO

HERE = Path(__file__).parent


def _batch(held_only=False, ramp=True):
    """The two-site model with a held-pH run under a temperature ramp (or, without ``ramp``, at one
    temperature) and a free-pH run (or the held one only), and the arrays of one batch call."""
    sys.path.insert(0, str(HERE))
    from sim_models import T25, held, two_site_model, two_site_run
    from speciakin.chemistry.model import PhControl, TemperatureProfile
    from speciakin.simulation import compile_model, compile_runs

    compiled = compile_model(two_site_model())
    warming = TemperatureProfile((0.0, 3600.0), (T25, T25 + 12.0 if ramp else T25))
    runs = [two_site_run(held(8.0), name="held", end=3600.0, temperature=warming),
            two_site_run(PhControl("free"), name="free", end=3600.0, chloride=0.12, sodium=0.2)]
    runs = runs[:1] if held_only else runs
    cruns = compile_runs(compiled, runs, [np.linspace(0.0, 3600.0, 7)] * len(runs))
    out = np.full((1, len(runs), cruns.n_times_max, compiled.n_outputs), np.nan)
    status, info = np.zeros((1, len(runs)), np.int64), np.zeros((1, len(runs), N_INFO))
    return compiled, cruns, out, status, info


def _index_signatures(dispatcher):
    """The argument types of every entry of ``dispatcher``'s index in numba's on-disk cache."""
    cache_file = dispatcher._cache._cache_file
    return {key[0] for key in cache_file._load_index()}


def test_the_path_signatures_are_those_run_one_compiles_its_paths_with():
    # the cache holds the paths as run_one called them (whether this process compiled the full kernel or a
    # process before it did, with or without a second process): one entry each, of the types worked out here
    from speciakin.simulation.batch_kernel import batch_tasks
    from speciakin.simulation.integrator_kernel import integrate_segment
    from speciakin.simulation.segment_kernel import integrate_smooth

    compiled, cruns, out, status, info = _batch()
    q = compiled.nominal[None, :].copy()
    batch_tasks(compiled.arrays, q, cruns.arrays, cruns.ph_offset[None, :], cruns.amount_factor[None, :], 1e-6,
                1e-10, out, status, info, 0, 1, True, True)
    assert status.tolist() == [[0, 0]]
    if getattr(integrate_segment, "_cache", None) is None or not integrate_segment._cache._enabled:
        pytest.skip("numba caching is off")
    from speciakin.simulation.segment_kernel import smooth_steps

    smooth, segment, shared, ramp, steps = split_compile.path_signatures(compiled.arrays, q, cruns.arrays, out, info)
    # integrate_smooth: one entry per held_ramp flag (its last argument), as worked out here
    without_ramp = split_compile.path_signatures(compiled.arrays, q, cruns.arrays, out, info, None)[0]
    assert without_ramp[:-1] == smooth[:-1] and without_ramp[-1] != smooth[-1]
    assert smooth in _index_signatures(integrate_smooth) <= {smooth, without_ramp}
    assert _index_signatures(integrate_segment) == {segment}
    # the step loop is not cached (made by a factory): its variants of this process, when it compiled them
    assert set(smooth_steps.overloads) <= {steps}
    for name, function in split_compile._shared_functions().items():
        assert shared[name] in _index_signatures(function), name  # write_output has a second variant
    for name, function in split_compile._ramp_functions().items():
        assert _index_signatures(function) == {ramp[name]}, name


def test_the_second_process_compiles_or_loads_the_free_ph_path(monkeypatch):
    # with the path cached already the second process loads it and ends at once: the pickled argument
    # types reach it and it exits cleanly
    compiled, cruns, out, status, info = _batch()
    q = compiled.nominal[None, :].copy()
    monkeypatch.setattr(cache_guard, "is_cached", lambda *args: False)
    monkeypatch.setattr(split_compile, "_cores", lambda: 2)
    assert split_compile.compile_paths_apart(compiled.arrays, q, cruns.arrays, out, info) is True


def test_a_failing_second_process_leaves_the_compile_to_the_first_call(monkeypatch, tmp_path):
    compiled, cruns, out, status, info = _batch()
    q = compiled.nominal[None, :].copy()
    monkeypatch.setattr(cache_guard, "is_cached", lambda *args: False)
    monkeypatch.setattr(split_compile, "_cores", lambda: 1)
    assert split_compile.compile_paths_apart(compiled.arrays, q, cruns.arrays, out, info) is False  # one core
    monkeypatch.setattr(split_compile, "_cores", lambda: 2)
    failing = tmp_path / "python"
    failing.write_text("#!/bin/sh\nexit 3\n")
    failing.chmod(0o755)
    monkeypatch.setattr(sys, "executable", str(failing))
    assert split_compile.compile_paths_apart(compiled.arrays, q, cruns.arrays, out, info) is False
    monkeypatch.setattr(sys, "executable", str(tmp_path / "missing"))
    assert split_compile.compile_paths_apart(compiled.arrays, q, cruns.arrays, out, info) is False


COLD = r"""
import json, sys
import numpy as np
sys.path.insert(0, sys.argv[1])
from test_split_compile import _batch
from speciakin.simulation import simulate_batch, split_compile
from speciakin.simulation.integrator_kernel import integrate_segment
from speciakin.simulation.segment_kernel import integrate_smooth
from speciakin.simulation.held_ramp_kernel import temperature_piece
compiled, cruns, out, status, info = _batch(sys.argv[2] != "both", sys.argv[2] != "plain")
result = simulate_batch(compiled, cruns, compiled.nominal[None, :], parallel=False)
stats = {name: (sum(d.stats.cache_hits.values()), sum(d.stats.cache_misses.values()))
         for name, d in (("segment", integrate_segment), ("smooth", integrate_smooth), ("ramp", temperature_piece))}
from speciakin.simulation.segment_kernel import smooth_steps
stats["steps"] = [len(smooth_steps.overloads)]
print(json.dumps({"outputs": result.outputs.tolist(), "status": result.status.tolist(), "stats": stats,
                  "here": split_compile.kernel_compiles(), "there": split_compile.last_split_compiled}))
"""


@pytest.mark.slow
@pytest.mark.skipif(sys.platform == "win32", reason="a POSIX shell for the probe")
@pytest.mark.parametrize("runs", ["both", "held", "plain"])
def test_a_cold_compile_loads_what_the_second_process_compiled(tmp_path, runs):
    # from an empty cache: this process compiles the held/logged path, loads the held-pH ramp's functions
    # (with a held-pH run under a ramp and no free-pH run) or the free-pH path (with a free-pH run) from the
    # cache (one hit, no miss) and gives the same outputs, to the last bit, as the kernel with every path
    # compiled in one process; held-pH runs at one temperature compile neither path, in one process
    from speciakin.simulation.batch_kernel import batch_tasks

    env = dict(os.environ, NUMBA_CACHE_DIR=str(tmp_path / "cache"),
               PYTHONPATH=os.pathsep.join([str(Path(split_compile.__file__).parents[2]),
                                           os.environ.get("PYTHONPATH", "")]))
    done = subprocess.run([sys.executable, "-c", COLD, str(HERE), runs], capture_output=True, text=True, env=env,
                          timeout=1800)
    assert done.returncode == 0, done.stderr[-2000:]
    cold = json.loads(done.stdout.strip().splitlines()[-1])
    assert cold["stats"]["segment"] == ([1, 0] if runs == "both" else [0, 0])
    assert cold["stats"]["smooth"][1] == 1
    assert cold["stats"]["ramp"] == {"both": [0, 1], "held": [1, 0], "plain": [0, 0]}[runs]
    assert cold["stats"]["steps"] == [1]  # compiled once (first, for the types integrate_smooth then uses)
    # each function compiled in one process only (one copy in the drivers' code); the free-pH path there,
    # without it the held-pH ramp; with neither no second process
    ramp = "speciakin.simulation.held_ramp_kernel.temperature_piece"
    assert (ramp in cold["there"]) == (runs == "held") and (ramp in cold["here"]) == (runs == "both")
    assert (cold["there"] == {}) == (runs == "plain")
    segment = "speciakin.simulation.integrator_kernel.integrate_segment"
    assert (segment in cold["there"]) == (runs == "both")
    assert "speciakin.simulation.segment_kernel.integrate_smooth" in cold["here"]
    assert not set(cold["here"]) & set(cold["there"])
    # the reference: the full kernel of this process (called directly: the variant bookkeeping of the
    # public functions stays as the other tests left it)
    compiled, cruns, out, status, info = _batch(runs != "both", runs != "plain")
    batch_tasks(compiled.arrays, compiled.nominal[None, :].copy(), cruns.arrays, cruns.ph_offset[None, :],
                cruns.amount_factor[None, :], 1e-6, 1e-10, out, status, info, 0, 1, True, True)
    assert cold["status"] == status.tolist() == [[0] * len(cruns.ph_offset)]
    np.testing.assert_array_equal(np.array(cold["outputs"]), out)


def test_the_node_constants_reach_compiled_code_with_the_types_run_one_gives_them():
    # numba types a global array inside compiled code as read-only; the constants are read-only in Python
    # too, so a Python-level caller that passes them on (the benchmark's copies of the drivers) uses the
    # variants the kernel compiled instead of adding writable-array variants to the shared cache
    from numba import typeof

    from speciakin.simulation.segment_kernel import CHECKS, FROM_NODES, NODES

    for constant in (NODES, FROM_NODES, CHECKS):
        assert not constant.flags.writeable
        assert typeof(constant) == typeof(constant).copy(readonly=True)
