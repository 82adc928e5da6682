"""Compiled stiff integrator (Rodas5 Rosenbrock method) and the run driver.

Rodas5: 8 stages, order 5 with an embedded order-4 estimate, L-stable and
stiffly accurate (coefficients in ``rodas_tableau``).  Steps stop exactly at
every discontinuity (dose start or end, instant events, knots of the
temperature and pH logs); outputs in between come from the continuous
extension (order 4) of each step.

Held and logged pH: the acid-base state depends on time only, and every
segment goes to the mass-action path of ``segment_kernel``.  Free pH: the pH
follows from the charge balance at every right-hand side call
(:func:`integrate_segment`), with the analytic Jacobian of
``rhs_kernel.analytic_jacobian``; the time derivative under a temperature
ramp is a forward difference.

Status codes (0 = success) are named in ``status.py``; the layout of the
model and runs tuples, the run context and the work arrays in ``layout.py``.

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (Rosenbrock methods; RODAS coefficients, Table 7.3 and the
   transformed form W = I/(h*gamma) - J, eq. 7.25).
.. [2] Sandu, A. et al., "Benchmarking stiff ODE solvers for atmospheric
   chemistry problems II: Rosenbrock solvers", Atmos. Environ. 1997, 31, 3459
   (step-size controller constants).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.rhs_kernel import (
    MODE_FREE,
    MODE_LOGGED,
    analytic_jacobian,
    all_populations,
    charge_imbalance,
    interpolate,
    make_workspace,
    rhs,
)
from speciakin.simulation.status import (STATUS_MAX_STEPS, STATUS_NO_ADJUSTING_ION, STATUS_NOT_FINITE, STATUS_OK,
                                         STATUS_SINGULAR, STATUS_STEP_UNDERFLOW, STATUS_TITRANT_SIGN,
                                         STATUS_VOLUME)
from speciakin.simulation.segment_kernel import integrate_smooth, make_smooth_workspace
from speciakin.simulation.lu_kernel import lu_factor, lu_solve
from speciakin.simulation.speciation_kernel import exp10, site_pka_at
from speciakin.simulation.water_kernel import pkw
from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.layout import (CTX_CONTROLLED, CTX_LOG_N, CTX_LOG_T, CTX_LOG_V, CTX_MODE, CTX_SECOND,
                                         CTX_SECOND_CONC, CTX_TEMP_N, CTX_TEMP_T, CTX_TEMP_V, CTX_TITRANT_CONC,
                                         C_LAST_PH, C_PH_SLOPE, C_PKW,
                                         START_COMPUTED, START_GIVEN, WS_CACHE, WS_DPH_DY, WS_PKA, WS_POPS, WS_VAR)
from speciakin.simulation.rodas_tableau import (ALPHA, GAMMA, GAMMAS, N_DENSE, N_STAGES, add_stage_history,
                                                dense_coefficients, dense_value, initial_step, land_step,
                                                new_solution, stage_point, step_factor)

#: Largest withdrawal of a one-sided titrant tolerated (below the largest amount
#: consumed so far), relative to the run's total amount (initial amounts + doses):
#: the water of a feed at the set point, for example, takes a trace of the
#: opposite reagent.
TITRANT_SIGN_RTOL = 1e-4
#: Control band of a one-sided pH-stat [pH units] (common practice: a pH-stat holds
#: its set point within a few hundredths of a unit).  A withdrawal smaller than the
#: start solution's buffer capacity times this band is tolerated: a real controller
#: would stop dosing and the pH would drift by less than the band, which the model
#: neglects (it keeps the set point).
CONTROL_BAND = 0.05

_GAMMA = GAMMA
_ALPHA = ALPHA
_GAMMAS = GAMMAS
MAX_STEPS = 100000


@njit(cache=True)
def integrate_segment(t0, t1, y, h, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope,
                      nonautonomous, rtol, atol, ws, counters, out, out_t, i_out, n_out):
    """Advance ``y`` in place from t0 to exactly t1 with Rodas5 [1]_.

    Outputs at times strictly inside (t0, t1) from index ``i_out`` are written
    to ``out`` from the continuous extension of each step (pH from the
    right-hand side at the interpolated state).

    Returns (status, next step size, next output index).  ``counters[0]``
    counts accepted steps.  The work arrays are made here; the step loop
    (:func:`rodas_general`) runs without reference counting.
    """
    n = y.shape[0]
    return rodas_general(t0, t1, y, h, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope,
                         nonautonomous, rtol, atol, ws, counters, out, out_t, i_out, n_out, np.empty(n),
                         np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty((N_DENSE, n)),
                         np.empty((N_STAGES, n)),
                         np.zeros((n, n)), np.empty((n, n)), np.empty(n, dtype=np.int64))


@leaf_kernel
def rodas_general(t0, t1, y, h, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous,
                  rtol, atol, ws, counters, out, out_t, i_out, n_out, f0, ft, fy, ytmp, ynew, dense, k, jac, g, piv):
    """The step loop of :func:`integrate_segment` on work arrays it is given."""
    n = y.shape[0]
    temp_t = ctx[CTX_TEMP_T]
    temp_v = ctx[CTX_TEMP_V]
    temp_n = ctx[CTX_TEMP_N]
    t = t0
    span = t1 - t0
    if span <= 0.0:
        return STATUS_OK, h, i_out
    free = ctx[CTX_MODE] == MODE_FREE
    cache = ws[WS_CACHE]
    dph_dy = ws[WS_DPH_DY]
    ph = rhs(t, y, f0, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
    if math.isnan(ph):
        return STATUS_NOT_FINITE, h, i_out
    if h <= 0.0:
        h = initial_step(y, f0, n, atol, rtol, span)
    need_eval = False
    while t < t1:
        if need_eval:
            ph = rhs(t, y, f0, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
            if math.isnan(ph):
                return STATUS_NOT_FINITE, h, i_out
        need_eval = True
        ph_at_y = ph
        analytic_jacobian(y, model, ws, ctx, jac, temperature_slope)
        if nonautonomous:
            dt = 1.5e-8 * max(abs(t), span)
            ph = rhs(t + dt, y, ft, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
            if math.isnan(ph):
                return STATUS_NOT_FINITE, h, i_out
            for i in range(n):
                ft[i] = (ft[i] - f0[i]) / dt
        while True:
            wanted = h
            h, last = land_step(t, h, t1)
            if h < 1e-13 * max(abs(t), span) or h <= 0.0:
                return STATUS_STEP_UNDERFLOW, h, i_out
            # G = I/(h*gamma) - J
            diag = 1.0 / (h * _GAMMA)
            for i in range(n):
                for j in range(n):
                    g[i, j] = -jac[i, j]
                g[i, i] += diag
            if not lu_factor(g, piv):
                return STATUS_SINGULAR, h, i_out
            failed = False
            for st in range(N_STAGES):
                if st == 0:
                    for i in range(n):
                        fy[i] = f0[i]
                else:
                    stage_point(y, k, st, ytmp)
                    if free:
                        # start the charge-balance Newton at the linear prediction pH(y) + dpH/dy (ytmp - y):
                        # one iteration fewer than starting at the last stage's pH
                        guess = ph_at_y
                        for i in range(n - 1):
                            guess += dph_dy[i] * (ytmp[i] - y[i])
                        cache[C_LAST_PH] = guess
                    ph = rhs(t + _ALPHA[st] * h, ytmp, fy, model, par, ctx, feed_rate, feed_volume_rate,
                             temperature_slope, ws)
                    if math.isnan(ph):
                        failed = True
                        break
                    add_stage_history(fy, k, st, h)
                if nonautonomous and _GAMMAS[st] != 0.0:
                    for i in range(n):
                        fy[i] += h * _GAMMAS[st] * ft[i]
                lu_solve(g, piv, fy)
                for i in range(n):
                    k[st, i] = fy[i]
            err = 0.0
            if not failed:
                err = new_solution(y, ytmp, k, ynew, rtol, atol)
                if not math.isfinite(err):
                    failed = True
            if failed:
                h *= 0.1
                continue
            if err <= 1.0:
                t_new = t1 if last else t + h
                if i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                    # outputs inside this step: continuous extension; t1 itself is left to the caller
                    dense_coefficients(k, dense)
                    while i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                        tout = out_t[i_out]
                        theta = (tout - t) / h
                        for i in range(n):
                            ytmp[i] = dense_value(y, ynew, dense, theta, i)
                        ph = rhs(tout, ytmp, fy, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
                        if math.isnan(ph):
                            return STATUS_NOT_FINITE, h, i_out
                        write_output(out, i_out, ytmp, ph, interpolate(temp_t, temp_v, temp_n, tout))
                        i_out += 1
                for i in range(n):
                    y[i] = ynew[i]
                t = t_new
                counters[0] += 1
                if counters[0] > MAX_STEPS:
                    return STATUS_MAX_STEPS, h, i_out
                h = h * step_factor(err, True)
                if last:
                    # a step cut short to land on t1 says nothing against the larger step
                    h = max(h, wanted)
                break
            h = h * step_factor(err, False)
    return STATUS_OK, h, i_out


@leaf_kernel
def write_output(out, i_out, y, ph, temperature):
    """Output row ``i_out``: amounts, volume, pH, titrant consumed, temperature,
    opposite titrant consumed (state: amounts, volume, titrant, opposite titrant)."""
    nsp = y.shape[0] - 3
    for j in range(nsp + 1):
        out[i_out, j] = y[j]
    out[i_out, nsp + 1] = ph
    out[i_out, nsp + 2] = y[nsp + 1]
    out[i_out, nsp + 3] = temperature
    out[i_out, nsp + 4] = y[nsp + 2]


@leaf_kernel
def adjust_start(y, model, ph, ws, start, titrant, titrant_conc, second, second_conc, acid, base, tol, info):
    """Bring the start mixture to ``ph`` before t = 0; returns a status code.

    ``start`` 0: acid (ion ``acid``) or base (ion ``base``) inside the start
    volume, amount from the charge balance at ``ph`` (recorded in ``info[4]``
    as equivalents, + base, - acid); 1: nothing added (given in the initial
    amounts); 2: the titrant, or the opposite titrant, with its volume
    (``info[2]``, ``info[3]`` [mol]).  Populations in ``ws`` must be at ``ph``.
    """
    n_species = model.n_species
    species_charge = model.species_charge
    imbalance = charge_imbalance(y, model, ph, ws)
    if start == START_GIVEN or abs(imbalance) <= tol:
        return STATUS_OK
    if start == START_COMPUTED:
        ion = acid if imbalance > 0.0 else base
        if ion < 0:
            return STATUS_NO_ADJUSTING_ION
        delta = -imbalance / species_charge[ion]
        y[ion] += delta
        info[4] = -imbalance
        return STATUS_OK
    excess = exp10(-ph) - exp10(ph - ws[WS_CACHE][C_PKW])
    delta = -imbalance / (species_charge[titrant] + excess / titrant_conc)
    if delta >= 0.0:
        y[titrant] += delta
        y[n_species] += delta / titrant_conc
        info[2] = delta
        return STATUS_OK
    if second < 0:
        return STATUS_TITRANT_SIGN
    delta = -imbalance / (species_charge[second] + excess / second_conc)
    y[second] += delta
    y[n_species] += delta / second_conc
    info[3] = delta
    return STATUS_OK


@njit(cache=True)
def run_context(model, q, runs, r, ph_offset):
    """(par, ctx) of run ``r``: the parameters gathered from ``q`` (``layout.PAR_*``)
    and the run's context (``layout.CTX_*``)."""
    medium_q = model.medium_q
    # the medium's pKw: water's (IAPWS) shifted to the model's value at the reference temperature
    pkw_shift = q[medium_q] - pkw(model.t_ref) if medium_q >= 0 else 0.0
    par = (q[model.site_pka_q], q[model.site_dh_q], q[model.inter_q], q[model.step_logk_q], q[model.step_ea_q],
           pkw_shift)
    ctx = (runs.mode[r], runs.setpoint[r], ph_offset, max(runs.titrant[r], 0), runs.titrant_conc[r],
           runs.log_t[r], runs.log_v[r], max(runs.log_n[r], 1), runs.temp_t[r], runs.temp_v[r], runs.temp_n[r],
           runs.second[r], runs.second_conc[r], runs.controlled[r])
    return par, ctx


@njit(cache=True)
def run_one(model, q, runs, r, ph_offset, amount_factor, rtol, atol, out, info):
    """Simulate run ``r`` with parameter vector ``q``; outputs go to ``out``.

    ``out[i, :]`` = amounts of every species [mol], volume [L], pH, titrant
    consumed [mol], temperature [K], opposite titrant consumed [mol] at
    output time i (state before instant events at that time).  ``info`` =
    [failure time [s], accepted steps, initial titrant [mol], initial
    opposite titrant [mol], start adjustment inside the volume [equivalents,
    + base]].  Returns the status code.
    """
    n_mol = model.n_mol
    n_species = model.n_species
    par, ctx = run_context(model, q, runs, r, ph_offset)
    mode = ctx[CTX_MODE]
    titrant = runs.titrant[r]
    titrant_conc = ctx[CTX_TITRANT_CONC]
    second = ctx[CTX_SECOND]
    controlled = ctx[CTX_CONTROLLED]
    temp_t = ctx[CTX_TEMP_T]
    temp_v = ctx[CTX_TEMP_V]
    temp_n = ctx[CTX_TEMP_N]
    ws = make_workspace(n_species, model.site_pka_q.shape[0], model.micro_charge.shape[0], n_mol,
                        model.step_logk_q.shape[0])
    n_state = n_species + 3
    sw = make_smooth_workspace(model, n_state)
    cache = ws[WS_CACHE]
    cache[C_PH_SLOPE] = 0.0
    y = runs.y0[r].copy()
    for j in range(n_species):
        y[j] *= 1.0 + (amount_factor - 1.0) * model.substrate_mask[j]
    dy = np.empty(n_state)
    feed_rate = np.zeros(n_species)
    info[0] = math.nan
    info[1] = 0.0
    info[2] = 0.0
    info[3] = 0.0
    info[4] = 0.0
    # a one-sided titrant withdrawn by more than this: the pH cannot be held
    sign_tol = runs.scale[r, n_species + 1] * 1e6 * TITRANT_SIGN_RTOL
    step_tol = sign_tol if (controlled != 0 and second < 0) else -1.0
    peak = np.zeros(1)
    counters = np.zeros(1, dtype=np.int64)
    zero_feed = np.zeros(n_species)
    # controlled runs: the start mixture is brought to the pH of t = 0 (see adjust_start)
    if controlled != 0:
        ph0 = rhs(0.0, y, dy, model, par, ctx, zero_feed, 0.0, 0.0, ws)
        if math.isnan(ph0):
            info[0] = 0.0
            return STATUS_NOT_FINITE
        status = adjust_start(y, model, ph0, ws, runs.start[r], titrant, titrant_conc, second,
                              ctx[CTX_SECOND_CONC], runs.acid[r], runs.base[r], sign_tol * 1e-3, info)
        if status != STATUS_OK:
            info[0] = 0.0
            return status
        if step_tol > 0.0:
            # buffer capacity of the start solution [mol per pH unit]: ln10 (sum n var(N) + V ([H+] + [OH-]))
            capacity = y[n_species] * (exp10(-ph0) + exp10(ph0 - ws[WS_CACHE][C_PKW]))
            for m in range(n_mol):
                capacity += y[m] * ws[WS_VAR][m]
            step_tol = max(step_tol, math.log(10.0) * capacity * CONTROL_BAND)
    n_out = runs.n_out[r]
    n_ev = runs.n_ev[r]
    n_bp = runs.n_bp[r]
    out_t = runs.out_t[r]
    ev_t = runs.ev_t[r]
    bp = runs.bp[r]
    i_out = 0
    i_ev = 0
    i_bp = 0
    t = 0.0
    h = 0.0
    while True:
        while i_out < n_out and out_t[i_out] <= t:
            ph = rhs(t, y, dy, model, par, ctx, zero_feed, 0.0, 0.0, ws)
            if math.isnan(ph):
                info[0] = t
                return STATUS_NOT_FINITE
            write_output(out, i_out, y, ph, interpolate(temp_t, temp_v, temp_n, t))
            i_out += 1
        if i_out >= n_out:
            break
        while i_ev < n_ev and ev_t[i_ev] <= t:
            if runs.ev_kind[r, i_ev] == 0:
                y[runs.ev_species[r, i_ev]] += runs.ev_amount[r, i_ev]
                y[n_species] += runs.ev_volume[r, i_ev]
            else:
                frac = runs.ev_volume[r, i_ev] / y[n_species]
                if not (frac < 1.0):
                    info[0] = t
                    return STATUS_VOLUME
                for j in range(n_species + 1):
                    y[j] *= 1.0 - frac
            h = 0.0
            i_ev += 1
        while i_bp < n_bp and bp[i_bp] <= t:
            i_bp += 1
        # a segment runs to the next breakpoint; conditions are constant or linear inside it
        t_end = out_t[n_out - 1]
        if i_bp < n_bp and bp[i_bp] < t_end:
            t_end = bp[i_bp]
        tm = 0.5 * (t + t_end)
        feed_volume_rate = 0.0
        for j in range(n_species):
            feed_rate[j] = 0.0
        for f in range(runs.n_feed[r]):
            f0 = runs.feed_t0[r, f]
            f1 = runs.feed_t1[r, f]
            if f0 < tm < f1:
                feed_rate[runs.feed_species[r, f]] += runs.feed_amount[r, f] / (f1 - f0)
                feed_volume_rate += runs.feed_volume[r, f] / (f1 - f0)
        temp_here = interpolate(temp_t, temp_v, temp_n, t)
        temp_slope = (interpolate(temp_t, temp_v, temp_n, t_end) - temp_here) / (t_end - t)
        nonauto = temp_slope != 0.0
        if mode == MODE_LOGGED:
            log_t = ctx[CTX_LOG_T]
            log_v = ctx[CTX_LOG_V]
            log_n = ctx[CTX_LOG_N]
            ph_rise = interpolate(log_t, log_v, log_n, t_end) - interpolate(log_t, log_v, log_n, t)
            if ph_rise != 0.0:
                nonauto = True
            # the logged pH is linear inside the segment: its slope drives the titrant of a controlled run
            cache[C_PH_SLOPE] = ph_rise / (t_end - t)
        t_next = t_end
        if mode != MODE_FREE:
            # the acid-base state depends on time only: mass-action path (segment_kernel)
            status, h, i_out = integrate_smooth(t, t_next, y, h, model, par, ctx, ws, sw, feed_rate,
                                                feed_volume_rate, temp_slope, nonauto, rtol, atol, out, out_t, i_out,
                                                n_out, counters, step_tol, peak)
        else:
            status, h, i_out = integrate_segment(t, t_next, y, h, model, par, ctx, feed_rate, feed_volume_rate,
                                                 temp_slope, nonauto, rtol, atol, ws, counters, out, out_t,
                                                 i_out, n_out)
        info[1] = counters[0]
        if status != STATUS_OK:
            info[0] = t
            return status
        t = t_next
    info[1] = counters[0]
    for i in range(n_out):
        for j in range(out.shape[1]):
            if not math.isfinite(out[i, j]):
                info[0] = out_t[i]
                return STATUS_NOT_FINITE
    return STATUS_OK


@njit(cache=True)
def microstate_amounts(model, q, ph, temperature, amounts, out):
    """Amount [mol] of every microstate for each row (pH, T, amounts)."""
    n_mol = model.n_mol
    site_pka_q = model.site_pka_q
    mol_micro_start = model.mol_micro_start
    from_rhs = make_workspace(model.n_species, site_pka_q.shape[0], model.micro_charge.shape[0], n_mol,
                              model.step_logk_q.shape[0])
    pka = from_rhs[WS_PKA]
    pops = from_rhs[WS_POPS]
    for row in range(ph.shape[0]):
        for i in range(site_pka_q.shape[0]):
            pka[i] = site_pka_at(q[site_pka_q[i]], q[model.site_dh_q[i]], temperature[row], model.t_ref)
        all_populations(pka, model.mol_site_start, mol_micro_start, model.inter_a, model.inter_b,
                        q[model.inter_q], model.mol_inter_start, n_mol, ph[row], pops)
        for m in range(n_mol):
            for s in range(mol_micro_start[m], mol_micro_start[m + 1]):
                out[row, s] = amounts[row, m] * pops[s]
