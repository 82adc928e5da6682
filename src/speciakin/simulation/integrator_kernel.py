"""The run driver and the free-pH path of the compiled Rodas5 integrator.

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
ramp is a forward difference.  Both paths take their steps in the one loop
of ``rosenbrock_kernel``; this module gives it the free-pH problem
(:func:`free_point`, :func:`free_stage`, :func:`free_jacobian`,
:func:`free_output`).

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
    reset_workspace,
    rhs,
)
from speciakin.simulation.status import STATUS_NO_ADJUSTING_ION, STATUS_NOT_FINITE, STATUS_OK, STATUS_TITRANT_SIGN, STATUS_VOLUME
from speciakin.simulation.profile_kernel import logged_ph
from speciakin.simulation.segment_kernel import integrate_smooth, make_smooth_workspace, reset_smooth_workspace
from speciakin.simulation.speciation_kernel import exp10, site_pka_at
from speciakin.simulation.water_kernel import pkw
from speciakin.simulation.jit_options import driver_kernel, leaf_kernel
from speciakin.simulation.layout import (INFO_FAILED_AT, INFO_OPPOSITE, INFO_START_ADJUST, INFO_STEPS, INFO_TITRANT,
                                         CTX_CONTROLLED, CTX_LOG_C, CTX_LOG_SMOOTH, CTX_LOG_N, CTX_LOG_T, CTX_LOG_V, CTX_MODE,
                                         CTX_PH_OFFSET, CTX_SECOND, CTX_SETPOINT,
                                         CTX_SECOND_CONC, CTX_TEMP_N, CTX_TEMP_T, CTX_TEMP_V, CTX_TITRANT_CONC,
                                         C_LAST_PH, C_PH_SLOPE, C_PKW, C_STEP_PH,
                                         START_COMPUTED, START_GIVEN, WS_CACHE, WS_DPH_DY, WS_PKA, WS_POPS, WS_SOLVED,
                                         WS_VAR)
from speciakin.simulation.rodas_tableau import N_DENSE, N_STAGES
from speciakin.simulation.rosenbrock_kernel import make_step_loop, write_output
from speciakin.simulation.status import STATUS_NOT_COMPILED

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



@leaf_kernel(inline="always")
def predict_ph(y, ws):
    """Start the next charge-balance solve (``cache[C_LAST_PH]``) at the linear prediction from
    the last solved point of the step loop, pH(y_s) + dpH/dy (y - y_s) (nothing when none is
    known in this segment; dpH/dy from the Jacobian at the last step point)."""
    cache = ws[WS_CACHE]
    guess = cache[C_STEP_PH]
    if not math.isnan(guess):
        dph_dy = ws[WS_DPH_DY]
        solved = ws[WS_SOLVED]
        for i in range(y.shape[0] - 1):
            guess += dph_dy[i] * (y[i] - solved[i])
        cache[C_LAST_PH] = guess


@leaf_kernel(inline="always")
def keep_solved(y, ph, ws):
    """Remember (y, pH) as the last solved point of the step loop (:func:`predict_ph`)."""
    solved = ws[WS_SOLVED]
    for i in range(y.shape[0]):
        solved[i] = y[i]
    ws[WS_CACHE][C_STEP_PH] = ph


@leaf_kernel(inline="always")
def free_point(t, y, f, prob):
    """f = dy/dt at a step point (free-pH problem of :func:`integrate_segment`), its
    charge-balance solve started at the prediction from the last stage point."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = prob
    free = ctx[CTX_MODE] == MODE_FREE
    if free:
        predict_ph(y, ws)
    ph = rhs(t, y, f, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
    if free:
        keep_solved(y, ph, ws)
    return not math.isnan(ph)


@leaf_kernel(inline="always")
def free_stage(t, ytmp, y, f, prob):
    """f = dy/dt at a stage point; free pH: the charge-balance Newton starts at the
    linear prediction from the last solved point (the step point, then each stage in turn:
    the stage points draw together towards the step's end, and Newton iterations fell from
    1650 to 1375 on the demo's free run, against the prediction from the step point alone)."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = prob
    free = ctx[CTX_MODE] == MODE_FREE
    if free:
        predict_ph(ytmp, ws)
    ph = rhs(t, ytmp, f, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
    if math.isnan(ph):
        return False
    if free:
        keep_solved(ytmp, ph, ws)
    return True


@leaf_kernel(inline="always")
def free_jacobian(t, y, f0, ft, jac_t, span, prob):
    """Analytic Jacobian at (t, y) (every state active: J itself, not transposed, see
    ``rosenbrock_kernel.make_step_loop``) and, when the problem is non-autonomous (a
    temperature ramp), df/dt by a forward difference."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = prob
    n = y.shape[0]
    analytic_jacobian(y, model, ws, ctx, jac_t, temperature_slope)
    if nonautonomous:
        dt = 1.5e-8 * max(abs(t), span)
        ph = rhs(t + dt, y, ft, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
        if math.isnan(ph):
            return False
        for i in range(n):
            ft[i] = (ft[i] - f0[i]) / dt
    return True


@leaf_kernel(inline="always")
def free_output(t, y, f, out, i_out, prob):
    """Output row at an interpolated state: the pH from the right-hand side there."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = prob
    ph = rhs(t, y, f, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws)
    if math.isnan(ph):
        return False
    write_output(out, i_out, y, ph, interpolate(ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], t))
    return True


@njit(cache=True)
def integrate_segment(t0, t1, y, h, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope,
                      nonautonomous, rtol, atol, ws, counters, out, out_t, i_out, n_out):
    """Advance ``y`` in place from t0 to exactly t1 with Rodas5 (free pH).

    The pH follows from the charge balance at every right-hand side call;
    outputs at times strictly inside (t0, t1) from index ``i_out`` are
    written to ``out`` from the continuous extension of each step (pH from
    the right-hand side at the interpolated state).  The work arrays are
    made here; the step loop (:data:`free_steps`) runs without reference
    counting.

    Returns (status, next step size, next output index).  ``counters[0]``
    counts accepted steps.
    """
    if t1 - t0 <= 0.0:
        return STATUS_OK, h, i_out
    n = y.shape[0]
    prob = (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws)
    ws[WS_CACHE][C_STEP_PH] = math.nan  # no solved point yet: the first solve starts at the last pH
    # the Jacobian's slot starts at zero: analytic_jacobian leaves entries that are always zero alone
    work = (np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty((N_STAGES, n)),
            np.empty((N_DENSE, n)), np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64), np.zeros((n, n)),
            np.empty((n, n)), np.empty(0), np.empty(n, dtype=np.int64))
    return free_steps(prob, nonautonomous, t0, t1, t1, t1 - t0, y, h, work, rtol, atol, out, out_t, i_out, n_out,
                      counters, -1.0, np.zeros(1))


#: The step loop of :func:`integrate_segment`: every state active, f at a new step point
#: evaluated when the next step starts (after the outputs inside the step: the order of
#: the warm-started charge-balance solves is that of the results' reference).
free_steps = make_step_loop(free_point, free_stage, free_jacobian, free_output, prefetch=False, all_active=True)


@leaf_kernel
def adjust_start(y, model, ph, ws, start, titrant, titrant_conc, second, second_conc, acid, base, tol, info):
    """Bring the start mixture to ``ph`` before t = 0; returns a status code.

    ``start`` 0: acid (ion ``acid``) or base (ion ``base``) inside the start
    volume, amount from the charge balance at ``ph`` (recorded in ``info[INFO_START_ADJUST]``
    as equivalents, + base, - acid); 1: nothing added (given in the initial
    amounts); 2: the titrant, or the opposite titrant, with its volume
    (``info[INFO_TITRANT]``, ``info[INFO_OPPOSITE]`` [mol]).  Populations in ``ws`` must be at ``ph``.
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
        info[INFO_START_ADJUST] = -imbalance
        return STATUS_OK
    excess = exp10(-ph) - exp10(ph - ws[WS_CACHE][C_PKW])
    delta = -imbalance / (species_charge[titrant] + excess / titrant_conc)
    if delta >= 0.0:
        y[titrant] += delta
        y[n_species] += delta / titrant_conc
        info[INFO_TITRANT] = delta
        return STATUS_OK
    if second < 0:
        return STATUS_TITRANT_SIGN
    delta = -imbalance / (species_charge[second] + excess / second_conc)
    y[second] += delta
    y[n_species] += delta / second_conc
    info[INFO_OPPOSITE] = delta
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
           runs.second[r], runs.second_conc[r], runs.controlled[r], runs.log_c[r], runs.log_smooth[r])
    return par, ctx


@leaf_kernel
def held_or_logged_ph(t, ctx):
    """The pH of a held or logged run at time t (offset included), as ``rhs_kernel.time_speciation``
    reads it."""
    if ctx[CTX_MODE] == MODE_LOGGED:
        return logged_ph(ctx[CTX_LOG_T], ctx[CTX_LOG_V], ctx[CTX_LOG_C], ctx[CTX_LOG_N], ctx[CTX_LOG_SMOOTH],
                         t)[0] + ctx[CTX_PH_OFFSET]
    return ctx[CTX_SETPOINT] + ctx[CTX_PH_OFFSET]


@njit(cache=True)
def run_workspaces(model):
    """(ws, sw): the work arrays :func:`run_one` needs, made once for many runs of ``model``."""
    ws = make_workspace(model.n_species, model.site_pka_q.shape[0], model.micro_charge.shape[0], model.n_mol,
                        model.step_logk_q.shape[0])
    return ws, make_smooth_workspace(model, model.n_species + 3)


@leaf_kernel(inline="always")
def segment_conditions(runs, r, ctx, t, t_end, feed_rate, cache):
    """The conditions of run ``r``'s segment from t to t_end (constant or linear inside it): the feeds' rates
    (written to ``feed_rate``), returned with their volume rate, the temperature's slope and whether the
    right-hand side depends on t; a logged pH's straight piece leaves its slope in ``cache[C_PH_SLOPE]``."""
    tm = 0.5 * (t + t_end)
    feed_volume_rate = 0.0
    for j in range(feed_rate.shape[0]):
        feed_rate[j] = 0.0
    for f in range(runs.n_feed[r]):
        f0 = runs.feed_t0[r, f]
        f1 = runs.feed_t1[r, f]
        if f0 < tm < f1:
            feed_rate[runs.feed_species[r, f]] += runs.feed_amount[r, f] / (f1 - f0)
            feed_volume_rate += runs.feed_volume[r, f] / (f1 - f0)
    temp_t = ctx[CTX_TEMP_T]
    temp_v = ctx[CTX_TEMP_V]
    temp_n = ctx[CTX_TEMP_N]
    temp_here = interpolate(temp_t, temp_v, temp_n, t)
    temp_slope = (interpolate(temp_t, temp_v, temp_n, t_end) - temp_here) / (t_end - t)
    nonauto = temp_slope != 0.0
    if ctx[CTX_MODE] == MODE_LOGGED:
        log_t = ctx[CTX_LOG_T]
        log_v = ctx[CTX_LOG_V]
        log_n = ctx[CTX_LOG_N]
        log_c = ctx[CTX_LOG_C]
        smoothed = ctx[CTX_LOG_SMOOTH]
        ph_rise = (logged_ph(log_t, log_v, log_c, log_n, smoothed, t_end)[0]
                   - logged_ph(log_t, log_v, log_c, log_n, smoothed, t)[0])
        if ph_rise != 0.0 or smoothed:
            nonauto = True
        # a straight piece of the log: its slope drives the titrant of a controlled run (a smoothed
        # log's slope at each time is set where the pH is read, rhs_kernel.time_speciation)
        cache[C_PH_SLOPE] = ph_rise / (t_end - t)
    return feed_volume_rate, temp_slope, nonauto


@driver_kernel
def run_one(model, q, runs, r, ph_offset, amount_factor, rtol, atol, out, info, ws, sw, free_ph=True,
            held_ramp=True):
    """Simulate run ``r`` with parameter vector ``q``; outputs go to ``out``.

    ``out[i, :]`` = amounts of every species [mol], volume [L], pH, titrant
    consumed [mol], temperature [K], opposite titrant consumed [mol] at
    output time i (state before instant events at that time).  ``info`` =
    [failure time [s], accepted steps, initial titrant [mol], initial
    opposite titrant [mol], start adjustment inside the volume [equivalents,
    + base]].  ``ws``, ``sw``: work arrays of ``make_workspace`` and
    ``make_smooth_workspace`` (:func:`run_workspaces`), made once per batch and
    brought here to the state a run starts from.  ``free_ph``: None when no
    run of the batch has a free pH; the free-pH path (:func:`integrate_segment`
    and all it calls) is then left out of this compiled variant (numba drops
    the branch on ``free_ph is None`` when compiling for a None argument), and a free-pH run
    gets ``STATUS_NOT_COMPILED``.  ``held_ramp``: None when no run of the batch holds its pH
    under a temperature ramp; the ramp's cubics in the temperature (``held_ramp_kernel``)
    are then left out the same way (``segment_kernel.integrate_smooth``), and such a run gets
    ``STATUS_RAMP_NOT_COMPILED``.  Returns the status code.
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
    reset_workspace(ws)
    reset_smooth_workspace(sw)
    n_state = n_species + 3
    cache = ws[WS_CACHE]
    cache[C_PH_SLOPE] = 0.0
    y = runs.y0[r].copy()
    for j in range(n_species):
        y[j] *= 1.0 + (amount_factor - 1.0) * model.substrate_mask[j]
    dy = np.empty(n_state)
    feed_rate = np.zeros(n_species)
    info[INFO_FAILED_AT] = math.nan
    info[INFO_STEPS] = 0.0
    info[INFO_TITRANT] = 0.0
    info[INFO_OPPOSITE] = 0.0
    info[INFO_START_ADJUST] = 0.0
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
            info[INFO_FAILED_AT] = 0.0
            return STATUS_NOT_FINITE
        status = adjust_start(y, model, ph0, ws, runs.start[r], titrant, titrant_conc, second,
                              ctx[CTX_SECOND_CONC], runs.acid[r], runs.base[r], sign_tol * 1e-3, info)
        if status != STATUS_OK:
            info[INFO_FAILED_AT] = 0.0
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
            if mode == MODE_FREE:
                ph = rhs(t, y, dy, model, par, ctx, zero_feed, 0.0, 0.0, ws)
            else:
                # held or logged pH: the row needs the pH at t only, not the speciation there
                ph = held_or_logged_ph(t, ctx) if y[n_species] > 0.0 else math.nan
            if math.isnan(ph):
                info[INFO_FAILED_AT] = t
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
                    info[INFO_FAILED_AT] = t
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
        feed_volume_rate, temp_slope, nonauto = segment_conditions(runs, r, ctx, t, t_end, feed_rate, cache)
        t_next = t_end
        if mode != MODE_FREE:
            # the acid-base state depends on time only: mass-action path (segment_kernel)
            status, h, i_out = integrate_smooth(t, t_next, y, h, model, par, ctx, ws, sw, feed_rate,
                                                feed_volume_rate, temp_slope, nonauto, rtol, atol, out, out_t, i_out,
                                                n_out, counters, step_tol, peak, held_ramp)
        elif free_ph is None:
            status = STATUS_NOT_COMPILED
        else:
            status, h, i_out = integrate_segment(t, t_next, y, h, model, par, ctx, feed_rate, feed_volume_rate,
                                                 temp_slope, nonauto, rtol, atol, ws, counters, out, out_t,
                                                 i_out, n_out)
        info[INFO_STEPS] = counters[0]
        if status != STATUS_OK:
            info[INFO_FAILED_AT] = t
            return status
        t = t_next
    info[INFO_STEPS] = counters[0]
    for i in range(n_out):
        for j in range(out.shape[1]):
            if not math.isfinite(out[i, j]):
                info[INFO_FAILED_AT] = out_t[i]
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
