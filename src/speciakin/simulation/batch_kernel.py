"""Batched evaluation: many parameter sets x many runs, one compiled entry point.

Each (set, run) pair is one independent task with its own adaptive steps
(a shared step size across parameter sets was measured to be slower).
:func:`batch_tasks` runs every ``stride``-th task from ``first`` on and
releases the GIL, so that one compiled function serves both uses: one
core (``first`` 0, ``stride`` 1) and all cores (``api`` calls it from one
thread per core, thread i taking tasks i, i + T, ...).  Every compiled entry
point compiles and optimises the whole kernel again (numba links each
callee's code into its caller), so the kernel has this one; a ``prange``
variant beside a serial one doubled the cold compile.  It is compiled in up to
four variants, and a process compiles only those its runs need: ``free_ph`` None
(no run has a free pH: the free-pH integrator, its Jacobian and step loop are
not compiled) or True, and ``held_ramp`` None (no held-pH run under a
temperature ramp: the cubics in the temperature of ``held_ramp_kernel`` are not
compiled) or True; ``api`` chooses from the runs' pH modes and temperature
profiles (:func:`kernel_flags`).

The Gaussian log-likelihood is computed inside compiled code:
log L = -1/2 sum ((d - y) / sigma)^2 - sum log(sigma) - N/2 log(2 pi),
over the finite entries of ``data`` (NaN = not observed), by its own small
compiled function after :func:`batch_tasks` (a fused simulate-and-sum
variant would be another entry point compiling the whole kernel).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.integrator_kernel import run_one, run_workspaces
from speciakin.simulation.jit_options import driver_kernel
from speciakin.simulation.rhs_kernel import MODE_FREE, MODE_HELD
from speciakin.simulation.status import STATUS_OK

_LOG_2PI = math.log(2.0 * math.pi)


@driver_kernel(nogil=True)
def batch_tasks(model, q_all, runs, ph_offset, amount_factor, rtol, atol, out, status, info, first, stride,
                free_ph=True, held_ramp=True):
    """Fill ``out`` (n_sets, n_runs, n_times, n_outputs), ``status``, ``info`` for the
    tasks first, first + stride, ... (task = run * n_sets + set: with many sets, each
    thread gets an equal share of every run, whose costs differ widely).  ``free_ph``:
    None when no run has a free pH (the variant compiled for None leaves the free-pH
    path out, see ``integrator_kernel.run_one``), else True; ``held_ramp`` likewise for a held pH
    under a temperature ramp (``held_ramp_kernel``)."""
    n_sets = q_all.shape[0]
    n_runs = ph_offset.shape[1]
    if first >= n_sets * n_runs:
        return
    # this thread's work arrays, made once for all its tasks
    ws, sw = run_workspaces(model)
    for task in range(first, n_sets * n_runs, stride):
        r = task // n_sets
        s = task % n_sets
        status[s, r] = run_one(model, q_all[s], runs, r, ph_offset[s, r], amount_factor[s, r], rtol, atol,
                               out[s, r], info[s, r], ws, sw, free_ph, held_ramp)


def free_ph_flag(run_modes):
    """``batch_tasks``'s ``free_ph`` for runs with these pH mode codes: True when one is free, else None."""
    return True if np.any(np.asarray(run_modes) == MODE_FREE) else None


def held_ramp_flag(run_modes, temp_v, temp_n):
    """``batch_tasks``'s ``held_ramp`` for runs with these pH mode codes and temperature profiles
    (values ``temp_v[r, :temp_n[r]]``): True when a held-pH run's temperature changes, else None."""
    for r in np.flatnonzero(np.asarray(run_modes) == MODE_HELD):
        values = temp_v[r, :temp_n[r]]
        if np.any(values != values[0]):
            return True
    return None


def kernel_flags(runs):
    """(``free_ph``, ``held_ramp``) of ``batch_tasks`` for the kernel's runs tuple ``runs``
    (``CompiledRuns.arrays``): the compiled variant with only the paths these runs take."""
    return free_ph_flag(runs.mode), held_ramp_flag(runs.mode, runs.temp_v, runs.temp_n)


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
            if status[s, r] != STATUS_OK:
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
