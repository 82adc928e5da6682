"""The compiled-code cache: one folder, stale entries cleared, a notice before a cold compile;
and the formulas shared by chemistry and the kernel."""

from __future__ import annotations

import logging
import os
import sys
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest

from speciakin.chemistry import water
from speciakin.simulation import api, cache_guard, simulate_batch


@pytest.mark.skipif(sys.platform in ("win32", "darwin"), reason="the XDG folder applies to Linux and other Unix")
def test_default_cache_dir_follows_xdg(monkeypatch, tmp_path):
    # XDG Base Directory Specification: user caches under $XDG_CACHE_HOME, default ~/.cache
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    assert cache_guard.default_cache_dir() == tmp_path / "speciakin" / "numba"
    monkeypatch.delenv("XDG_CACHE_HOME")
    assert cache_guard.default_cache_dir() == Path.home() / ".cache" / "speciakin" / "numba"


def test_choose_cache_dir_keeps_a_given_folder_and_fills_an_empty_one(monkeypatch, tmp_path):
    from numba.core import config

    monkeypatch.setenv("NUMBA_CACHE_DIR", str(tmp_path / "given"))
    assert cache_guard.choose_cache_dir() == str(tmp_path / "given")
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path))
    monkeypatch.delenv("NUMBA_CACHE_DIR")
    monkeypatch.setattr(config, "CACHE_DIR", config.CACHE_DIR)
    chosen = cache_guard.choose_cache_dir()
    assert os.environ["NUMBA_CACHE_DIR"] == chosen == config.CACHE_DIR
    if sys.platform not in ("win32", "darwin"):
        assert chosen == str(tmp_path / "speciakin" / "numba")


def test_refresh_clears_only_kernel_entries_and_only_when_the_sources_change(tmp_path):
    kernel_entry = tmp_path / "rhs_kernel.rhs-215.py311.nbi"
    other_entry = tmp_path / "elsewhere.f-3.py311.nbi"
    kernel_entry.write_text("x")
    other_entry.write_text("x")
    assert cache_guard.refresh_kernel_cache(tmp_path) is True  # no stamp yet: treated as changed
    assert not kernel_entry.exists() and other_entry.exists()
    kernel_entry.write_text("x")
    assert cache_guard.refresh_kernel_cache(tmp_path) is False  # same sources: nothing removed
    assert kernel_entry.exists()
    (tmp_path / "speciakin_kernel_sources.sha256").write_text("an older digest")
    assert cache_guard.refresh_kernel_cache(tmp_path) is True
    assert not kernel_entry.exists()


def test_every_compiled_module_is_hashed():
    folder = Path(cache_guard.__file__).parent
    compiled = {p.stem for p in folder.glob("*.py")
                if "leaf_kernel" in p.read_text() or "@njit" in p.read_text()} - {"jit_options"}
    assert compiled <= set(cache_guard.KERNEL_MODULES)


def test_every_shared_chemistry_formula_file_is_hashed():
    # a formula written once in chemistry/ and compiled into the kernel must be hashed with the kernel
    # sources, or a change there would leave a stale compiled copy in the cache
    package = Path(cache_guard.__file__).parents[1]
    shared = {p.relative_to(package).as_posix() for p in (package / "chemistry").glob("*.py")
              if "register_jitable" in p.read_text()}
    assert shared and shared <= set(cache_guard.SHARED_SOURCES)


def test_compile_notice_is_logged_once(monkeypatch, tmp_path, caplog):
    cold = SimpleNamespace(_cache=SimpleNamespace(_enabled=True, _cache_file=SimpleNamespace(
        _index_path=str(tmp_path / "missing.nbi"))))
    warm_index = tmp_path / "present.nbi"
    warm_index.write_text("x")
    warm = SimpleNamespace(_cache=SimpleNamespace(_enabled=True, _cache_file=SimpleNamespace(
        _index_path=str(warm_index))))
    assert cache_guard.is_cached(warm) and not cache_guard.is_cached(cold)
    monkeypatch.setattr(api, "_compile_noticed", set())
    with caplog.at_level(logging.INFO, logger="speciakin.simulation"):
        api.notice_compile(warm)
        assert not caplog.records
        api.notice_compile(cold)
        api.notice_compile(cold)
    messages = [r.getMessage() for r in caplog.records]
    assert len(messages) == 1 and messages[0].startswith("compiling the simulation kernel once (about ")


def test_water_formulas_are_the_same_in_chemistry_and_in_the_kernel():
    from speciakin.simulation.speciation_kernel import site_pka_at
    from speciakin.simulation.water_kernel import pkw, water_density

    # one formula, two callers: the compiled kernel and the checked numpy functions agree to rounding;
    # the values themselves are checked against IAPWS R11-07 and Kell 1975 in tests/chemistry/test_water.py
    for t in (273.15, 298.15, 310.0, 353.15, 423.15):
        assert pkw(t) == pytest.approx(water.pkw(t), rel=1e-15)
        assert water_density(t) * 1000.0 == pytest.approx(water.water_density_kell(t), rel=1e-15)
        assert site_pka_at(9.5, 45.0, t, 298.15) == pytest.approx(water.vant_hoff_pka(9.5, 45.0, t), rel=1e-15)
    t = np.array([280.0, 300.0, 320.0])
    np.testing.assert_allclose(water.pkw(t), [pkw(x) for x in t], rtol=1e-15)


def test_charge_balance_solve_is_one_function_for_chemistry_and_the_kernel():
    # chemistry.equilibrium runs microstate_formulas.solve_charge_balance as Python; the kernel compiles the
    # same function: on the same arrays both give the same pH (to rounding of exp in libm and LLVM)
    from numba import njit

    from speciakin.chemistry import equilibrium as eq
    from speciakin.chemistry.flat_layout import flat_sites
    from speciakin.simulation import speciation_kernel

    assert speciation_kernel.solve_charge_balance is eq.solve_charge_balance
    species = [eq.IonizableSpecies("amine", [9.6, 4.1], [[0.0, 0.8], [0.8, 0.0]], [1.0, 0.0], [0.0, -1.0]),
               eq.IonizableSpecies("acid", [4.76], np.zeros((1, 1)), [0.0], [-1.0])]  # invented mixture
    sites = flat_sites(species, 0.0)
    amounts = np.array([0.02, 0.05, -0.03])  # [mol/L]; the last is the net strong-ion charge
    charges = np.array([0.0, 0.0, 1.0])
    compiled = njit(lambda *a: speciation_kernel.solve_charge_balance(*a))
    results = []
    for solve in (eq.solve_charge_balance, compiled):
        pops, zbar, var = np.empty(6), np.empty(2), np.empty(2)
        ph, iterations = solve(amounts, charges, 2, 3, *sites, water.pkw(298.15), 7.0, pops, zbar, var)
        results.append((ph, iterations, zbar.copy()))
    (ph_py, it_py, zbar_py), (ph_jit, it_jit, zbar_jit) = results
    assert 1.0 < ph_py < 13.0 and it_py == it_jit
    assert ph_jit == pytest.approx(ph_py, abs=1e-13)
    np.testing.assert_allclose(zbar_jit, zbar_py, rtol=1e-12)
    # and solve_ph (the checked wrapper) returns that pH
    assert eq.solve_ph(species, amounts[:2], amounts[2]).ph == pytest.approx(ph_py, abs=1e-13)


def test_a_compiled_variant_is_found_in_the_index_by_its_last_arguments(tmp_path):
    from numba import types

    index = tmp_path / "batch.nbi"
    index.write_text("x")
    entries = {((types.float64, types.none, types.boolean), ("cpu",), ("h", "h")): "batch.1.nbc"}
    kernel = SimpleNamespace(_cache=SimpleNamespace(_enabled=True, _cache_file=SimpleNamespace(
        _index_path=str(index), _load_index=lambda: entries)))
    assert cache_guard.is_cached(kernel) and cache_guard.is_cached(kernel, types.boolean)
    assert not cache_guard.is_cached(kernel, types.none)
    assert cache_guard.is_cached(kernel, (types.none, types.boolean))
    assert not cache_guard.is_cached(kernel, (types.boolean, types.boolean))
    assert not cache_guard.is_cached(kernel, (types.none, types.none))
    assert not cache_guard.is_cached(kernel, (types.int64,) * 4)  # longer than any entry
    index.unlink()
    assert not cache_guard.is_cached(kernel, (types.none, types.boolean))


#: The four compiled variants of batch_tasks: (free_ph, held_ramp).
VARIANTS = ((None, None), (None, True), (True, None), (True, True))


def _batch_call(compiled, cruns, variant):
    """batch_tasks of one parameter set (the nominal one) on ``cruns`` in ``variant``: (out, status, info)."""
    from speciakin.simulation.batch_kernel import batch_tasks
    from speciakin.simulation.layout import N_INFO

    n = len(cruns.names)
    out = np.full((1, n, cruns.n_times_max, compiled.n_outputs), np.nan)
    status, info = np.zeros((1, n), np.int64), np.zeros((1, n, N_INFO))
    batch_tasks(compiled.arrays, compiled.nominal[None, :], cruns.arrays, cruns.ph_offset[None, :],
                cruns.amount_factor[None, :], 1e-6, 1e-10, out, status, info, 0, 1, *variant)
    return out, status, info


def test_the_real_index_knows_the_variants_this_process_compiled_or_loaded():
    from numba import types

    from speciakin.simulation.batch_kernel import batch_tasks

    compiled, both, held_only = _two_runs()
    # each variant called by name: which one simulate_batch picks depends on what this process
    # (earlier tests) and the disk cache hold already (api.kernel_variant)
    for variant in VARIANTS:
        _batch_call(compiled, held_only, variant)
    if getattr(batch_tasks, "_cache", None) is None or not batch_tasks._cache._enabled:
        pytest.skip("numba caching is off")
    for variant in VARIANTS:
        assert cache_guard.is_cached(batch_tasks, api.variant_types(variant)), variant
    assert not cache_guard.is_cached(batch_tasks, types.int32)


def _two_runs(ramp=False):
    """The two-site model; its runs: held pH, free pH (and with ``ramp`` a held pH and a logged pH
    under a temperature ramp), all of them and the first alone, compiled."""
    compiled, runs = _campaign(ramp)
    return compiled, _compiled(compiled, runs), _compiled(compiled, runs[:1])


def _campaign(ramp=False):
    """The two-site model compiled and the runs of :func:`_two_runs`."""
    from sim_models import T25, held, two_site_model, two_site_run
    from speciakin.chemistry.model import PhControl, TemperatureProfile
    from speciakin.simulation import compile_model

    compiled = compile_model(two_site_model())
    runs = [two_site_run(held(8.0), name="held", end=3600.0),
            two_site_run(PhControl("free"), name="free", end=3600.0, chloride=0.12, sodium=0.2)]
    if ramp:
        warming = TemperatureProfile((0.0, 3600.0), (T25, T25 + 12.0))
        logged = PhControl("logged", log_times=(0.0, 1800.0, 3600.0), log_ph=(7.4, 7.6, 8.0), titrant="Na",
                           titrant_concentration=1.0)
        runs += [two_site_run(held(8.0), name="held ramp", end=3600.0, temperature=warming),
                 two_site_run(logged, name="logged ramp", end=3600.0, temperature=warming)]
    return compiled, runs


def _compiled(compiled, runs):
    from speciakin.simulation import compile_runs

    return compile_runs(compiled, runs, [np.linspace(0.0, 3600.0, 7)] * len(runs))


def test_the_kernel_flags_follow_the_paths_the_runs_take():
    from speciakin.simulation.batch_kernel import free_ph_flag, held_ramp_flag, kernel_flags

    compiled, every, held_only = _two_runs(ramp=True)
    runs = every.arrays
    assert free_ph_flag(every.arrays.mode) is True and free_ph_flag(held_only.arrays.mode) is None
    assert kernel_flags(held_only.arrays) == (None, None)
    assert kernel_flags(runs) == (True, True)
    # the held-pH ramp path is taken by a held pH whose temperature changes, not by a logged pH under a ramp
    for subset, expected in (([0], None), ([2], True), ([3], None), ([1, 3], None), ([0, 3, 2], True)):
        assert held_ramp_flag(runs.mode[subset], runs.temp_v[subset], runs.temp_n[subset]) is expected, subset
    # a profile of several points at one temperature is no ramp
    flat = runs.temp_v[[2]].copy()
    flat[0, :runs.temp_n[2]] = flat[0, 0]
    assert held_ramp_flag(runs.mode[[2]], flat, runs.temp_n[[2]]) is None


def test_each_kernel_variant_gives_the_full_kernels_outputs_or_says_what_it_lacks():
    # every variant runs the runs whose paths it has to the same outputs, to the last bit, as the kernel
    # with every path (the same compiled code for them); a run whose path was left out gets its status
    from speciakin.simulation.status import STATUS_NOT_COMPILED, STATUS_OK, STATUS_RAMP_NOT_COMPILED

    compiled, every, held_only = _two_runs(ramp=True)
    full, full_status, full_info = _batch_call(compiled, every, (True, True))
    assert full_status.tolist() == [[STATUS_OK] * 4]
    for free_ph, held_ramp in VARIANTS[:-1]:
        out, status, info = _batch_call(compiled, every, (free_ph, held_ramp))
        expected = [STATUS_OK, STATUS_OK if free_ph else STATUS_NOT_COMPILED,
                    STATUS_OK if held_ramp else STATUS_RAMP_NOT_COMPILED, STATUS_OK]
        assert status.tolist() == [expected], (free_ph, held_ramp)
        for r in np.flatnonzero(np.array(expected) == STATUS_OK):
            np.testing.assert_array_equal(out[0, r], full[0, r])
            np.testing.assert_array_equal(info[0, r], full_info[0, r])
    # the ramp run in the variant without its path fails at its first ramp segment, at t = 0
    assert info[0, 2, 0] == 0.0


def test_the_kernel_variant_has_only_the_paths_the_runs_need(monkeypatch):
    compiled, runs = _campaign(ramp=True)
    plain, free, held_ramp, every = (_compiled(compiled, [runs[i] for i in subset]).arrays
                                     for subset in ([0, 3], [0, 1], [0, 2], [0, 1, 2, 3]))
    monkeypatch.setattr(api, "_variants_loaded", set())
    monkeypatch.setattr(api, "_cached_on_disk", {v: False for v in VARIANTS})
    assert api.kernel_variant(plain) == (None, None)
    assert api.kernel_variant(held_ramp) == (None, True)
    assert api.kernel_variant(free) == (True, None)
    assert api.kernel_variant(every) == (True, True)
    assert api.kernel_variant(plain, with_free_ph=True) == (True, None)  # free-pH runs follow: one compile
    assert api.kernel_variant(held_ramp, with_free_ph=True) == (True, True)
    # a variant in the process with every path needed: nothing more to compile (the fewest paths first)
    monkeypatch.setattr(api, "_variants_loaded", {(True, True)})
    assert api.kernel_variant(plain) == api.kernel_variant(held_ramp) == (True, True)
    monkeypatch.setattr(api, "_variants_loaded", {(True, True), (None, True)})
    assert api.kernel_variant(plain) == api.kernel_variant(held_ramp) == (None, True)
    assert api.kernel_variant(free) == (True, True)
    monkeypatch.setattr(api, "_variants_loaded", {(True, None), (None, True)})
    assert api.kernel_variant(every) == (True, True)  # none has both: the full kernel is compiled
    monkeypatch.setattr(api, "_variants_loaded", {(None, None)})
    assert api.kernel_variant(plain) == (None, None)
    # nothing in the process: the needed variant when on disk, else one with more paths on disk
    monkeypatch.setattr(api, "_variants_loaded", set())
    monkeypatch.setattr(api, "_cached_on_disk", {(None, None): False, (None, True): False, (True, None): True,
                                                 (True, True): True})
    assert api.kernel_variant(plain) == (True, None) and api.kernel_variant(held_ramp) == (True, True)
    monkeypatch.setattr(api, "_cached_on_disk", {(None, None): True, (None, True): False, (True, None): True,
                                                 (True, True): True})
    assert api.kernel_variant(plain) == (None, None)


def test_the_batch_runs_the_chosen_variant(monkeypatch):
    compiled, runs = _campaign(ramp=True)
    asked = []
    real = api.batch_tasks

    def recording(*args):
        asked.append(args[-2:])
        real(*args)

    monkeypatch.setattr(api, "batch_tasks", recording)
    monkeypatch.setattr(api, "_variants_loaded", set())
    monkeypatch.setattr(api, "_cached_on_disk", {v: False for v in VARIANTS})
    for subset, hint in (([0], False), ([0], True), ([0, 2], False), ([0, 1, 2, 3], False)):
        cruns = _compiled(compiled, [runs[i] for i in subset])
        result = simulate_batch(compiled, cruns, compiled.nominal[None, :], parallel=False, with_free_ph=hint)
        assert np.all(result.status == 0)
    # (True, None) in the process serves the held runs asked with a hint; the ramp then needs another
    assert asked == [(None, None), (True, None), (None, True), (True, True)]


def test_a_division_by_zero_in_the_kernel_is_a_solver_error(monkeypatch):
    # the compiled code keeps Python's division checks; a parameter set far outside chemistry that
    # reaches one must end as the project's SolverError (a message, exit code 3), not a traceback
    from speciakin.errors import SolverError

    compiled, both, held_only = _two_runs()

    def divides_by_zero(*args):
        raise ZeroDivisionError("division by zero")

    monkeypatch.setattr(api, "batch_tasks", divides_by_zero)
    monkeypatch.setattr(api, "_last_runs", (None, None, None))
    with pytest.raises(SolverError, match="divided by zero"):
        simulate_batch(compiled, held_only, compiled.nominal[None, :], parallel=False)


def test_the_speciation_is_compiled_once_for_the_held_and_logged_path():
    # the held-pH ramp's temperature functions (held_ramp_kernel) and time_speciation call speciation_at with
    # the same argument types: one compiled variant, not a second one specialised on a literal flag (each
    # variant is linked and optimised again in every caller up to batch_tasks)
    from numba import types

    from speciakin.simulation.rhs_kernel import speciation_at

    compiled, both, held_only = _two_runs()
    assert simulate_batch(compiled, held_only, compiled.nominal[None, :], parallel=False).status.tolist() == [[0]]
    if getattr(speciation_at, "_cache", None) is None or not speciation_at._cache._enabled:
        pytest.skip("numba caching is off")
    # entries of this machine's target only (numba keys them by signature and target; the suite also compiles
    # for a pinned one, tests/pinned_numbers.py)
    from numba.core.registry import cpu_target

    target = cpu_target.target_context.codegen().magic_tuple()
    entries = [key[0] for key in speciation_at._cache._cache_file._load_index() if key[1] == target]
    assert len(entries) == 1, entries
    assert not any(isinstance(t, types.Literal) for t in entries[0]), entries


def test_the_compile_notice_gives_the_estimate_of_the_variant(monkeypatch):
    # the variant with neither path compiles in less time than one with a path (bench_compile.py figures
    # in cache_guard): the notice says so
    compiled, runs = _campaign(ramp=True)
    said = []

    def notice(kernel, variant=None, seconds=None):
        said.append(seconds)
        return False

    monkeypatch.setattr(api, "notice_compile", notice)
    monkeypatch.setattr(api, "_variants_loaded", set())
    monkeypatch.setattr(api, "_cached_on_disk", {v: False for v in VARIANTS})
    for subset in ([0], [0, 2]):
        simulate_batch(compiled, _compiled(compiled, [runs[i] for i in subset]), compiled.nominal[None, :],
                       parallel=False)
    assert said == [cache_guard.COLD_COMPILE_SECONDS_NO_PATHS, cache_guard.COLD_COMPILE_SECONDS]
    assert cache_guard.COLD_COMPILE_SECONDS_NO_PATHS < cache_guard.COLD_COMPILE_SECONDS


def test_a_driver_library_skips_the_full_module_passes_and_computes_the_same(monkeypatch):
    """``jit_options.driver_kernel``: the driver's library runs numba's cheap module passes
    only, a callee's library the full ones; the driver's result is that of a plain njit."""
    from numba import njit
    from numba.core import codegen

    from speciakin.simulation.jit_options import DRIVER_OPTIONS

    optimised = []
    full = codegen.CPUCodeLibrary._optimize_final_module
    monkeypatch.setattr(codegen.CPUCodeLibrary, "_optimize_final_module",
                        lambda library: (optimised.append(library.name), full(library))[1])

    @njit
    def callee_for_driver_test(x):
        return np.sqrt(x) * 3.0 + 1.0 / 7.0

    def body(a):
        total = 0.0
        for value in a:
            total += callee_for_driver_test(value)
        return total

    driver = njit(**DRIVER_OPTIONS)(body)
    plain = njit(body)
    a = np.linspace(0.1, 9.0, 101)
    assert driver(a) == plain(a)  # the same floating-point operations: equal to the last bit
    names = [name.rsplit(".", 1)[-1] for name in optimised]  # libraries are named by the qualified name
    assert "callee_for_driver_test" in names
    assert names.count("body") == 1  # the plain njit's library only
