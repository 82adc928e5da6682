"""Forward sensitivities of runs' outputs from Python (``sensitivity_kernel``).

A direction is a row of (the parameter vector q, the run's pH offset, its
amount factor); the derivative of every output along it comes from the
staggered forward sensitivities of the compiled kernel, not from perturbed
simulations.  The least-squares Jacobian of a campaign is built on this
(``pipeline.objective``).
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.simulation.api import LOG, N_THREADS, _threads
from speciakin.simulation.cache_guard import is_cached
from speciakin.simulation.layout import INFO_FAILED_AT, INFO_STEPS, N_INFO
from speciakin.simulation.model_layout import CompiledModel, CompiledRuns
from speciakin.simulation.sensitivity_kernel import run_sensitivities
from speciakin.simulation.status import STATUS_OK

__all__ = ["SensitivityResult", "simulate_sensitivities"]

#: Cold compile of the sensitivity kernel on this 2-core host (measured 52-57 s, 2026-12-05).
SENSITIVITY_COMPILE_SECONDS = 55


@dataclass
class SensitivityResult:
    """Outputs of one parameter set on every run, and their derivatives.

    Attributes
    ----------
    outputs
        (n_runs, n_times_max, n_outputs), as ``BatchResult.outputs`` of one set.
    derivatives
        (n_runs, m, n_times_max, n_outputs): d outputs / d direction.
    status
        (n_runs,) int: 0 ok, otherwise a code of ``STATUS_TEXT``.
    failure_time
        (n_runs,) [s], NaN where the run succeeded.
    steps
        (n_runs,) accepted steps.
    """

    outputs: np.ndarray
    derivatives: np.ndarray
    status: np.ndarray
    failure_time: np.ndarray
    steps: np.ndarray


def simulate_sensitivities(compiled: CompiledModel, compiled_runs: CompiledRuns, q, directions,
                           ph_offset=None, amount_factor=None, rtol: float = 1e-8, atol: float = 1e-12,
                           parallel: bool = True) -> SensitivityResult:
    """Simulate one parameter vector on every run with the derivatives of the outputs along ``directions``.

    Parameters
    ----------
    q
        (n_q,) parameter vector.
    directions
        (m, n_q + 2) for every run, or (n_runs, m, n_q + 2): row d is a direction in
        (q, the run's pH offset, its amount factor).
    ph_offset, amount_factor
        (n_runs,); default: each run's own values.
    parallel
        Spread the runs over the cores.
    """
    q = np.ascontiguousarray(np.asarray(q, float))
    n_q, n_runs = compiled.nominal.size, len(compiled_runs.names)
    dirs = np.asarray(directions, float)
    if dirs.ndim == 2:
        dirs = np.broadcast_to(dirs, (n_runs,) + dirs.shape)
    if q.shape != (n_q,) or dirs.ndim != 3 or dirs.shape[0] != n_runs or dirs.shape[2] != n_q + 2:
        raise InputError("parameter vector or directions of the wrong shape", Location(key="directions"),
                         (q.shape, dirs.shape), f"q ({n_q},), directions (m, {n_q + 2}) or ({n_runs}, m, {n_q + 2})")
    dirs = np.ascontiguousarray(dirs)
    off = compiled_runs.ph_offset if ph_offset is None else np.broadcast_to(np.asarray(ph_offset, float), (n_runs,))
    fac = (compiled_runs.amount_factor if amount_factor is None
           else np.broadcast_to(np.asarray(amount_factor, float), (n_runs,)))
    m = dirs.shape[1]
    out = np.full((n_runs, compiled_runs.n_times_max, compiled.n_outputs), np.nan)
    sens = np.full((n_runs, m, compiled_runs.n_times_max, compiled.n_outputs), np.nan)
    status = np.zeros(n_runs, np.int64)
    info = np.zeros((n_runs, N_INFO))
    arrays, run_arrays = compiled.arrays, compiled_runs.arrays

    def one(r: int) -> None:
        status[r] = run_sensitivities(arrays, q, run_arrays, r, float(off[r]), float(fac[r]), dirs[r], float(rtol),
                                      float(atol), out[r], sens[r], info[r])

    if n_runs:
        if not is_cached(run_sensitivities):
            LOG.info("compiling the sensitivity kernel once (about %d s)", SENSITIVITY_COMPILE_SECONDS)
        one(0)  # the first call compiles (or loads) the kernel on this thread
    pending = itertools.count(1)

    def share() -> None:  # takes the next run not yet taken, until none is left (the runs differ in length)
        for r in pending:
            if r >= n_runs:
                return
            one(r)

    helpers = [_threads().submit(share) for _ in range(min(N_THREADS, n_runs - 1) - 1)] if parallel else []
    share()
    for helper in helpers:
        helper.result()
    failure = np.where(status != STATUS_OK, info[:, INFO_FAILED_AT], np.nan)
    return SensitivityResult(out, sens, status, failure, info[:, INFO_STEPS].astype(np.int64))
