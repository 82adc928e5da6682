"""Batched evaluation: many parameter sets x many runs, spread over the cores.

Each (set, run) pair is one independent task with its own adaptive steps
(a shared step size across parameter sets was measured to be slower).  The
parallel version uses numba ``prange``; the serial one is the same loop.

The Gaussian log-likelihood is computed inside compiled code:
log L = -1/2 sum ((d - y) / sigma)^2 - sum log(sigma) - N/2 log(2 pi),
over the finite entries of ``data`` (NaN = not observed).
The likelihood is summed by its own small compiled function after
:func:`batch_serial` or :func:`batch_parallel` (a second dispatch of a few
microseconds): the whole kernel is compiled into these two entry points only,
since every entry point that calls it compiles and optimises all of it again
(a fused simulate-and-sum variant doubled the cold compile).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from speciakin.simulation.integrator_kernel import run_one

_LOG_2PI = math.log(2.0 * math.pi)


@njit(cache=True)
def _task(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info, task, n_runs):
    s = task // n_runs
    r = task % n_runs
    status[s, r] = run_one(model, q_all[s], runs, r, ph_offset[s, r], amount_factor[s, r], rtol, atol,
                           out[s, r], info[s, r])


@njit(cache=True, parallel=True)
def batch_parallel(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info):
    """Fill ``out`` (n_sets, n_runs, n_times, n_outputs), ``status``, ``info`` over all cores."""
    n_sets = q_all.shape[0]
    n_runs = ph_offset.shape[1]
    for task in prange(n_sets * n_runs):
        _task(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info, task, n_runs)


@njit(cache=True)
def batch_serial(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info):
    """Same as :func:`batch_parallel` on one core."""
    n_sets = q_all.shape[0]
    n_runs = ph_offset.shape[1]
    for task in range(n_sets * n_runs):
        _task(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info, task, n_runs)


@njit(cache=True)
def gaussian_loglik(out, status, data, sigma, n_species, as_concentration, loglik):
    """Log-likelihood of each parameter set (-inf when any of its runs failed).

    ``data``, ``sigma``: (n_runs, n_times, n_outputs) like one set of ``out``;
    with ``as_concentration`` the species columns are compared as [mol/L].
    Returns False (``loglik`` untouched) when a sigma where data are observed
    is not positive.
    """
    for r in range(data.shape[0]):
        for i in range(data.shape[1]):
            for j in range(data.shape[2]):
                if not math.isnan(data[r, i, j]) and not (sigma[r, i, j] > 0.0):
                    return False
    n_sets = out.shape[0]
    n_runs = out.shape[1]
    for s in range(n_sets):
        total = 0.0
        ok = True
        for r in range(n_runs):
            if status[s, r] != 0:
                ok = False
                break
            for i in range(data.shape[1]):
                vol = out[s, r, i, n_species]
                for j in range(data.shape[2]):
                    d = data[r, i, j]
                    if math.isnan(d):
                        continue
                    y = out[s, r, i, j]
                    if as_concentration and j < n_species:
                        y = y / vol
                    z = (d - y) / sigma[r, i, j]
                    total += -0.5 * z * z - math.log(sigma[r, i, j]) - 0.5 * _LOG_2PI
        loglik[s] = total if ok else -np.inf
    return True
