"""Public entry points: simulate one run, or many parameter sets x runs at once."""

from __future__ import annotations

import logging
import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Sequence

import numpy as np
from numba import config as numba_config
from numba import typeof as numba_typeof

from speciakin.chemistry.model import Model, Run
from speciakin.errors import InputError, Location, SolverError
from speciakin.simulation.batch_kernel import batch_tasks, gaussian_loglik, kernel_flags
from speciakin.simulation.compile import CompiledModel, CompiledRuns, compile_model, compile_runs
from speciakin.simulation.integrator_kernel import microstate_amounts
from speciakin.simulation.layout import (INFO_FAILED_AT, INFO_OPPOSITE, INFO_START_ADJUST, INFO_STEPS, INFO_TITRANT,
                                         N_INFO)
from speciakin.simulation.status import STATUS_NO_ADJUSTING_ION, STATUS_OK, STATUS_TEXT, STATUS_TITRANT_SIGN
from speciakin.simulation.cache_guard import (COLD_COMPILE_SECONDS, COLD_COMPILE_SECONDS_NO_PATHS, is_cached,
                                             refresh_kernel_cache)
from speciakin.simulation.results import SimulationResult
from speciakin.simulation.split_compile import compile_paths_apart

_cache = getattr(batch_tasks, "_cache", None)
if _cache is not None and getattr(_cache, "_cache_path", None):
    refresh_kernel_cache(_cache._cache_path)

#: Records of this layer (the command line shows them on stderr; a library user may attach a handler).
LOG = logging.getLogger("speciakin.simulation")
_compile_noticed: set = set()  # the variants (numba types of the last arguments) announced in this process
_variants_loaded: set = set()  # the batch_tasks variants ((free_ph, held_ramp)) run in this process


def notice_compile(kernel, variant=None, seconds: int = COLD_COMPILE_SECONDS) -> bool:
    """Log once per process and variant, before the first call of ``kernel``, that it
    compiles (its compiled code, or that of the variant whose last arguments have the
    numba types ``variant``, a type or a tuple of types, is not in the cache yet) in about
    ``seconds``; returns True when it logged."""
    if variant not in _compile_noticed and not is_cached(kernel, variant):
        _compile_noticed.add(variant)
        LOG.info("compiling the simulation kernel once (about %d s)", seconds)
        return True
    return False


def variant_types(variant) -> tuple:
    """The numba types of ``batch_tasks``'s last arguments for ``variant`` ((free_ph, held_ramp))."""
    return tuple(numba_typeof(flag) for flag in variant)


#: Threads of a parallel batch (numba's thread count: NUMBA_NUM_THREADS, default the number of cores).
N_THREADS = max(int(numba_config.NUMBA_NUM_THREADS), 1)
_pool: ThreadPoolExecutor | None = None
_pool_pid = -1


def _threads() -> ThreadPoolExecutor:
    """The worker threads of parallel batches (made again in a forked process)."""
    global _pool, _pool_pid
    if _pool is None or _pool_pid != os.getpid():
        _pool = ThreadPoolExecutor(max_workers=max(N_THREADS - 1, 1), thread_name_prefix="speciakin-kernel")
        _pool_pid = os.getpid()
    return _pool


_cached_on_disk: dict = {}  # {variant: bool} once asked: the disk cache holds that variant of batch_tasks


def _covers(variant, needed) -> bool:
    """True when the compiled ``variant`` has every path ``needed`` (each flag True or None)."""
    return all(have is True or need is None for have, need in zip(variant, needed))


def _paths(variant):
    """Sort key: the variants with fewer paths first (then a fixed order)."""
    return variant.count(True), str(variant)


def kernel_variant(runs, with_free_ph: bool = False) -> tuple:
    """(``free_ph``, ``held_ramp``) of ``batch_kernel.batch_tasks`` for the kernel's runs tuple
    ``runs`` (``CompiledRuns.arrays``).

    Each flag is True (the variant with that path) when a run needs the path
    (a free pH; a held pH under a temperature ramp) or, for the free-pH path,
    the caller says that free-pH runs follow in this process
    (``with_free_ph``), else None (the path left out: less to compile).  A
    variant that has every needed path and is at hand is taken instead of
    compiling the one needed: one run in this process (the one with fewest
    paths), or, when the needed one is not on disk, one on disk.  Every
    variant gives the same outputs for the runs it can take (the same
    compiled code for them), so the choice only decides what is compiled.
    """
    free_ph, held_ramp = kernel_flags(runs)
    needed = (True if with_free_ph else free_ph, held_ramp)
    loaded = sorted((v for v in _variants_loaded if _covers(v, needed)), key=_paths)
    if loaded:
        return loaded[0]
    # the variants with every needed path, fewest paths first
    wider = [v for v in ((a, b) for a in (None, True) for b in (None, True)) if v != needed and _covers(v, needed)]
    for variant in [needed] + sorted(wider, key=_paths):
        if variant not in _cached_on_disk:
            _cached_on_disk[variant] = is_cached(batch_tasks, variant_types(variant))
        if _cached_on_disk[variant]:
            return variant
    return needed


#: The runs of the last batch, the caller's ``with_free_ph`` and the variant chosen
#: (a fitter calls with the same runs many times); one tuple, replaced whole, so that
#: batches started from several threads each read a consistent triple.
_last_runs: tuple = (None, None, None)


def run_kernel(arrays, q_sets, run_arrays, off, fac, rtol, atol, out, status, info, parallel,
               with_free_ph: bool = False) -> None:
    """Run every (set, run) task of the compiled batch (``batch_kernel.batch_tasks``):
    on this thread, or, with ``parallel``, spread over :data:`N_THREADS` threads
    (this one and the pool's; the compiled code releases the GIL).  The kernel
    variant is :func:`kernel_variant`'s."""
    global _last_runs
    args = (arrays, q_sets, run_arrays, off, fac, float(rtol), float(atol), out, status, info)
    last = _last_runs
    if last[0] is run_arrays and last[1] == with_free_ph:
        variant = last[2]
    else:
        variant = kernel_variant(run_arrays, with_free_ph)
        _last_runs = (run_arrays, with_free_ph, variant)
    if variant not in _variants_loaded:
        # the cache is looked at before a variant's first call only: then its compiled code is in the
        # process (a look is a file-system call, several microseconds per call)
        seconds = COLD_COMPILE_SECONDS if True in variant else COLD_COMPILE_SECONDS_NO_PATHS
        if notice_compile(batch_tasks, variant_types(variant), seconds):
            # a cold compile: the free-pH path or the held-pH ramp's functions on the second core (split_compile)
            compile_paths_apart(arrays, q_sets, run_arrays, out, info, *variant)
    threads = min(N_THREADS, off.size) if parallel else 1
    try:
        if threads <= 1:
            batch_tasks(*args, 0, 1, *variant)
        else:
            shares = [_threads().submit(batch_tasks, *args, i, threads, *variant) for i in range(1, threads)]
            batch_tasks(*args, 0, threads, *variant)
            for share in shares:
                share.result()
    except ZeroDivisionError as exc:
        # the compiled code keeps Python's division checks: a parameter set far outside chemistry
        # (an enthalpy of 1e11 kJ/mol underflows a pKa's 10^-pKa to zero) ends here, not in a traceback
        raise SolverError("the simulation divided by zero: a parameter value (a pKa, an enthalpy, a rate "
                          "constant or its activation energy) lies far outside what a solution can have; "
                          "check the model file's values and bounds") from exc
    _variants_loaded.add(variant)


__all__ = ["simulate", "simulate_batch", "BatchResult", "batch_log_likelihood", "default_times",
           "ph_control_error", "PH_CONTROL_STATUS"]

DEFAULT_OUTPUTS = 201
#: Status codes that mean the pH control cannot reach or hold its pH (bad input, not a solver failure).
PH_CONTROL_STATUS = (STATUS_TITRANT_SIGN, STATUS_NO_ADJUSTING_ION)


def default_times(run: Run, count: int = DEFAULT_OUTPUTS) -> np.ndarray:
    """Evenly spaced output times over the run [s]."""
    return np.linspace(0.0, float(run.end_time), count)


def _parameter_vector(compiled: CompiledModel, q) -> np.ndarray:
    if q is None:
        return compiled.nominal.copy()
    q = np.asarray(q, dtype=float).ravel()
    if q.shape != compiled.nominal.shape:
        raise InputError("parameter vector has the wrong length", Location(key="q"), q.size,
                         f"{compiled.nominal.size} values ({', '.join(compiled.quantity_names)})")
    if not np.all(np.isfinite(q)):
        bad = [n for n, v in zip(compiled.quantity_names, q) if not math.isfinite(v)]
        raise InputError("parameter vector has non-finite values", Location(key="q"), bad, "finite numbers")
    return q


def _check_tolerances(rtol: float, atol: float) -> None:
    if not (math.isfinite(rtol) and 0 < rtol < 1 and math.isfinite(atol) and atol > 0):
        raise InputError("tolerances must be positive (relative below 1)", Location(key="tolerance"),
                         (rtol, atol), "0 < rtol < 1, atol > 0")


def simulate(model: Model | CompiledModel, run: Run, times: Sequence[float] | None = None, q=None,
             microstates: bool = False, rtol: float = 1e-6, atol: float = 1e-10) -> SimulationResult:
    """Simulate one run.

    Parameters
    ----------
    model
        The reaction model (or one already compiled).
    run
        The run: charges, volume, temperature, pH control, dosing.
    times
        Output times [s] (default: 201 evenly spaced over the run).
    q
        Parameter vector in the order of ``compiled.quantity_names``
        (default: the model's nominal values).
    microstates
        Also return the amount of every protonation microstate.
    rtol, atol
        Relative and absolute [mol] tolerances of the integrator.

    Returns
    -------
    SimulationResult

    Raises
    ------
    ModelFileError
        The model or run does not validate.
    SolverError
        The integrator failed; the message names the run and the time.
    """
    compiled = model if isinstance(model, CompiledModel) else compile_model(model)
    _check_tolerances(rtol, atol)
    t = default_times(run) if times is None else np.asarray(times, dtype=float)
    cruns = compile_runs(compiled, [run], [t])
    qv = _parameter_vector(compiled, q)
    out = np.full((1, 1, cruns.n_times_max, compiled.n_outputs), np.nan)
    status = np.zeros((1, 1), np.int64)
    info = np.zeros((1, 1, N_INFO))
    run_kernel(compiled.arrays, qv[None, :], cruns.arrays, cruns.ph_offset[None, :], cruns.amount_factor[None, :],
               rtol, atol, out, status, info, parallel=False)
    code = int(status[0, 0])
    if code in PH_CONTROL_STATUS:
        raise ph_control_error(compiled, run, code, float(info[0, 0, INFO_FAILED_AT]))
    if code != STATUS_OK:
        raise SolverError(f"run '{run.name}': integration failed at t = {info[0, 0, INFO_FAILED_AT]:.6g} s "
                          f"({info[0, 0, INFO_FAILED_AT] / 60:.4g} min): {STATUS_TEXT.get(code, 'unknown failure')} "
                          f"(status {code})")
    o = out[0, 0, : len(t)]
    nsp = compiled.n_species
    amounts = o[:, :nsp].copy()
    volume = o[:, nsp].copy()
    ph = o[:, nsp + 1].copy()
    temperature = o[:, nsp + 3].copy()
    micro = None
    if microstates:
        micro = np.zeros((len(t), len(compiled.microstate_names)))
        microstate_amounts(compiled.arrays, qv, ph, temperature, amounts, micro)
    return SimulationResult(
        run_name=run.name, times=t.copy(), species_names=list(compiled.species_names),
        molecule_names=list(compiled.species_names[:compiled.n_molecules]), amounts=amounts,
        concentrations=amounts / volume[:, None], volume=volume, ph=ph, titrant=o[:, nsp + 2].copy(),
        initial_titrant=float(info[0, 0, INFO_TITRANT]) if run.ph.controlled else None,
        temperature=temperature, ph_mode=run.ph.mode,
        microstate_names=list(compiled.microstate_names) if microstates else None,
        microstate_amounts=micro, moiety_names=list(compiled.moiety_names),
        moiety_matrix=compiled.moiety_matrix.copy(), steps=int(info[0, 0, INFO_STEPS]),
        opposite_titrant=o[:, nsp + 4].copy(),
        initial_opposite_titrant=float(info[0, 0, INFO_OPPOSITE]) if run.ph.controlled else None,
        start_adjustment=float(info[0, 0, INFO_START_ADJUST]) if run.ph.controlled else None)


@dataclass
class BatchResult:
    """Outputs of many parameter sets x runs.

    Attributes
    ----------
    outputs
        (n_sets, n_runs, n_times_max, n_outputs); columns as ``compiled.output_names``
        (amounts [mol], volume [L], pH, titrant [mol], temperature [K], opposite
        titrant [mol]); rows past a run's own output count are NaN.
    status
        (n_sets, n_runs) int: 0 ok, otherwise a code of ``STATUS_TEXT``.
    failure_time
        (n_sets, n_runs) [s], NaN where the run succeeded.
    steps
        (n_sets, n_runs) accepted integration steps.
    initial_titrant
        (n_sets, n_runs) [mol] titrant that brought the start to the pH of t = 0
        (start adjustment ``titrant``; 0 otherwise).
    initial_opposite_titrant
        (n_sets, n_runs) [mol] the same for the opposite titrant.
    start_adjustment
        (n_sets, n_runs) [mol equivalents, + base, - acid] added inside the
        start volume (start adjustment ``computed``; 0 otherwise).
    """

    outputs: np.ndarray
    status: np.ndarray
    failure_time: np.ndarray
    steps: np.ndarray
    initial_titrant: np.ndarray
    initial_opposite_titrant: np.ndarray
    start_adjustment: np.ndarray


def _batch_inputs(compiled, cruns, q_sets, ph_offset, amount_factor):
    q_sets = np.atleast_2d(np.asarray(q_sets, dtype=float))
    if q_sets.shape[1] != compiled.nominal.size:
        raise InputError("parameter sets have the wrong width", Location(key="Q"), q_sets.shape,
                         f"(n_sets, {compiled.nominal.size})")
    n_sets, n_runs = q_sets.shape[0], len(cruns.names)
    # filled by assignment (broadcasting); cheaper than broadcast_to(...).copy() per call
    off = np.empty((n_sets, n_runs))
    off[...] = cruns.ph_offset[None, :] if ph_offset is None else np.asarray(ph_offset, float)
    fac = np.empty((n_sets, n_runs))
    fac[...] = cruns.amount_factor[None, :] if amount_factor is None else np.asarray(amount_factor, float)
    return np.ascontiguousarray(q_sets), off, fac


def _batch_buffers(compiled, compiled_runs, n_sets, n_runs):
    """Output, status and info arrays of one batch call."""
    out = np.full((n_sets, n_runs, compiled_runs.n_times_max, compiled.n_outputs), np.nan)
    return out, np.zeros((n_sets, n_runs), np.int64), np.zeros((n_sets, n_runs, N_INFO))


def _batch_result(out, status, info) -> BatchResult:
    failure = np.where(status != STATUS_OK, info[..., INFO_FAILED_AT], np.nan)
    return BatchResult(out, status, failure, info[..., INFO_STEPS].astype(np.int64), info[..., INFO_TITRANT].copy(),
                       info[..., INFO_OPPOSITE].copy(), info[..., INFO_START_ADJUST].copy())


def ph_control_error(compiled: CompiledModel, run: Run, code: int, time: float,
                     file: str | None = None, key: str | None = None) -> InputError:
    """The located error of a run whose pH the available titrant (or start
    adjustment) cannot reach or hold (status 6 or 7 of ``STATUS_TEXT``).

    ``file`` and ``key`` name where the pH control was written (default: the
    model file and ``run.<name>.ph``).
    """
    ph = run.ph
    where = f"set point pH {ph.setpoint:g}" if ph.mode == "held" else "the logged pH"
    when = "at the start" if time <= 0 else f"at t = {time / 60:.4g} min"
    if code == STATUS_TITRANT_SIGN:
        side = "acid" if (ph.titrant and _ion_sign(compiled, ph.titrant) > 0) else "base"
        expected = (f"an opposite titrant ({side}) with its concentration, or a start adjustment that does not "
                    f"use the titrant")
    else:
        expected = "start_acid / start_base naming an ion of the model of the needed sign"
    return InputError(f"run '{run.name}': {where} cannot be reached or held {when}: {STATUS_TEXT[code]}",
                      Location(file=file or compiled.model.source or None, key=key or f"run.{run.name}.ph"),
                      ph.setpoint if ph.mode == "held" else None, expected)


def _ion_sign(compiled: CompiledModel, name: str) -> float:
    return float(np.sign(compiled.arrays.species_charge[compiled.species_index(name)]))


def simulate_batch(compiled: CompiledModel, compiled_runs: CompiledRuns, q_sets, ph_offset=None,
                   amount_factor=None, rtol: float = 1e-6, atol: float = 1e-10,
                   parallel: bool = True, with_free_ph: bool = False) -> BatchResult:
    """Simulate every parameter set on every run.

    Parameters
    ----------
    q_sets
        (n_sets, n_q) parameter vectors.
    ph_offset, amount_factor
        (n_sets, n_runs) or broadcastable; default: each run's own values.
    parallel
        Spread the (set, run) pairs over all cores (:data:`N_THREADS` threads).
    with_free_ph
        Run the kernel compiled with the free-pH path even if no run has a
        free pH (free-pH runs follow in this process: one compile serves both;
        the outputs are the same).

    Returns
    -------
    BatchResult
        Failures are reported in ``status``, never raised, so that a sampler can reject.
    """
    _check_tolerances(rtol, atol)
    q_sets, off, fac = _batch_inputs(compiled, compiled_runs, q_sets, ph_offset, amount_factor)
    out, status, info = _batch_buffers(compiled, compiled_runs, *off.shape)
    run_kernel(compiled.arrays, q_sets, compiled_runs.arrays, off, fac, rtol, atol, out, status, info, parallel,
               with_free_ph)
    return _batch_result(out, status, info)


def batch_log_likelihood(compiled: CompiledModel, compiled_runs: CompiledRuns, q_sets, data, sigma,
                         as_concentration: bool = True, ph_offset=None, amount_factor=None,
                         rtol: float = 1e-6, atol: float = 1e-10, parallel: bool = True):
    """Gaussian log-likelihood of each parameter set (-inf where a run failed).

    ``data`` and ``sigma`` have shape (n_runs, n_times_max, n_outputs); NaN in
    ``data`` = not observed.  With ``as_concentration`` the species columns
    are compared as concentrations [mol/L], otherwise as amounts [mol].  The
    simulation is the compiled batch of :func:`simulate_batch` (no separate
    compiled variant), then a compiled sum.

    Returns
    -------
    (loglik (n_sets,), BatchResult)
    """
    _check_tolerances(rtol, atol)
    q_sets, off, fac = _batch_inputs(compiled, compiled_runs, q_sets, ph_offset, amount_factor)
    out, status, info = _batch_buffers(compiled, compiled_runs, *off.shape)
    data = np.asarray(data, float)
    sigma = np.asarray(sigma, float)
    expected = out.shape[1:]
    if data.shape != expected or sigma.shape != expected:
        raise InputError("data and sigma must match the outputs of one parameter set", Location(key="data"),
                         (data.shape, sigma.shape), str(expected))
    loglik = np.zeros(off.shape[0])
    run_kernel(compiled.arrays, q_sets, compiled_runs.arrays, off, fac, rtol, atol, out, status, info, parallel)
    # the compiled sum also reports a sigma that is not positive where data are observed
    if not gaussian_loglik(out, status, data, sigma, compiled.n_species, bool(as_concentration), loglik):
        raise InputError("sigma must be positive where data are observed", Location(key="sigma"))
    return loglik, _batch_result(out, status, info)
