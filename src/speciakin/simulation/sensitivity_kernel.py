"""Forward sensitivities of a run's outputs: the derivatives the least-squares Jacobian needs.

For m directions D_d in the kernel's inputs (the parameter vector q, the
run's pH offset, its amount factor) the run's state y and its sensitivities
S_d = dy/dD_d advance together (staggered direct method [1]_ [2]_):

    S_d' = J(y(t)) S_d + df/dD_d (y(t)),    S_d(0) = dy(0)/dD_d

is linear in S_d and is taken in lock-step with each step of y, by the
same Rodas5 scheme on the step y has just taken: its matrix
W = I/(h gamma) - J(y_n) is the one the y step factorised (its LU serves
every direction), and y at the stage points comes from the y step's
continuous extension, so no second derivatives of f are needed.  At each
distinct stage point J comes from ``rhs_kernel.analytic_jacobian``; df/dD_d
from the steps' own terms for the rate constants (d ln k = ln10 d log10 k
- (1/T - 1/T_ref)/R dEa, with a pH-stat's titrant response) and from a
central difference in the other inputs at the fixed state.  The time term
(d/dt of the right-hand side along y(t) at a fixed S) is the slope at the
step's start of the polynomial through its values at the stage points.
S's embedded error estimate takes part in the step's acceptance
(``rosenbrock_kernel.make_step_loop``'s hook), so that a kink of the
right-hand side (a two-sided pH-stat switching titrants) is crossed with
small steps.  The outputs' sensitivities come from the continuous
extension of the S step; a free pH's from the charge balance at the fixed
pH (implicit function theorem).  Instant events carry S_d (a dose adds a
fixed amount: S_d unchanged; a withdrawal scales the amounts by 1 - v/V:
S_d scales too, plus the term of the volume's own sensitivity), and the
start state's sensitivity (the amount factor, the start adjustment of a
controlled run) is a central difference of the start formula itself (no
solver in it).

Every pH mode goes through the general right-hand side (``rhs_kernel.rhs``,
``analytic_jacobian``), the free-pH path of ``integrator_kernel``: the
outputs agree with ``run_one`` to the integrator's tolerance, not to the
last bit.  This kernel serves the least-squares Jacobian only; the
simulations of the likelihood keep their own paths.

References
----------
.. [1] Caracotsios, M. and Stewart, W. E., "Sensitivity analysis of initial
   value problems with mixed ODEs and algebraic equations", Comput. Chem.
   Eng. 1985, 9, 359.
.. [2] Maly, T. and Petzold, L. R., "Numerical methods and software for
   sensitivity analysis of differential-algebraic systems", Appl. Numer.
   Math. 1996, 20, 57.
"""

from __future__ import annotations

import math

import numpy as np

from speciakin.simulation.integrator_kernel import (free_jacobian, free_output, free_point, free_stage, run_context,
                                                    run_workspaces, segment_conditions)
from speciakin.simulation.jit_options import driver_kernel, leaf_kernel
from speciakin.simulation.layout import (CTX_MODE, CTX_TEMP_N, CTX_TEMP_T, CTX_TEMP_V, INFO_FAILED_AT, INFO_STEPS,
                                         C_STEP_PH, N_INFO, WS_CACHE)
from speciakin.simulation.lu_kernel import lu_solve
from speciakin.simulation.rhs_kernel import interpolate, rhs
from speciakin.simulation.rodas_tableau import (ALPHA, GAMMAS, LAST, N_DENSE, N_STAGES, add_stage_history,
                                                dense_coefficients, dense_value, stage_point)
from speciakin.simulation.rosenbrock_kernel import make_step_loop, write_output
from speciakin.simulation.sensitivity_terms import (direction_rhs, parameter_sets, point_terms, sens_row,
                                                    set_workspace, stacked_workspaces, start_state, with_offset)
from speciakin.simulation.status import STATUS_NOT_FINITE, STATUS_OK, STATUS_VOLUME



def _stage_nodes():
    """The distinct stage points of the tableau (fractions of the step), each stage's one, and the weights
    that give the slope at the step's start of the polynomial through values at them."""
    nodes, index = [], []
    for a in ALPHA:
        if not nodes or a != nodes[-1]:
            nodes.append(float(a))
        index.append(len(nodes) - 1)
    x = np.array(nodes)
    unit = np.zeros(x.size)
    unit[1] = 1.0
    return x, np.array(index, np.int64), np.linalg.solve(np.vander(x, x.size, increasing=True).T, unit)


NODES, STAGE_NODE, NODE_SLOPE = _stage_nodes()
# entries of the sensitivity step record
_T, _H, _CUR, _PENDING, _RTOL, _ATOL = 0, 1, 2, 3, 4, 5


@leaf_kernel(inline="always")
def _swap_if_pending(sp):
    step = sp[7]
    if step[_PENDING] != 0.0:
        step[_CUR] = 1.0 - step[_CUR]
        step[_PENDING] = 0.0


@leaf_kernel(inline="always")
def sens_point(t, y, f, prob):
    return free_point(t, y, f, prob[0])


@leaf_kernel(inline="always")
def sens_stage(t, ytmp, y, f, prob):
    return free_stage(t, ytmp, y, f, prob[0])


@leaf_kernel(inline="always")
def sens_jacobian(t, y, f0, ft, jac_t, span, prob):
    return free_jacobian(t, y, f0, ft, jac_t, span, prob[0])


@leaf_kernel
def sens_output(t, y, f, out, i_out, prob):
    """The output row of y (``integrator_kernel.free_output``) and those of the sensitivities, read from
    the continuous extension of the step just taken."""
    base, sp = prob
    if not free_output(t, y, f, out, i_out, base):
        return False
    s_buf, s_dense, step, s_tmp = sp[3], sp[4], sp[7], sp[17]
    if s_buf.shape[1] == 0:
        return True
    cur = int(step[_CUR])
    theta = (t - step[_T]) / step[_H]
    n = y.shape[0]
    for d in range(s_buf.shape[1]):
        for i in range(n):
            s_tmp[i] = dense_value(s_buf[cur, d], s_buf[1 - cur, d], s_dense[d], theta, i)
        if not sens_row(t, y, s_tmp, d, i_out, base, sp):
            return False
    return True


@leaf_kernel
def sens_after_step(t, h, t_new, y, ynew, k, g, piv, prob):
    """Advance every S_d over the step y has just taken from t to t_new (module notes); returns the RMS norm
    of S's embedded error estimate (NaN when not finite): the step is taken only when it is at most 1."""
    base, sp = prob
    s_buf, s_dense, k_s, y_dense, step, s_stage, ft, f0, y_st, f1 = (sp[3], sp[4], sp[5], sp[6], sp[7], sp[8],
                                                                     sp[11], sp[14], sp[17], sp[18])
    _swap_if_pending(sp)
    cur = int(step[_CUR])
    m = s_buf.shape[1]
    if m == 0:
        return 0.0
    n = y.shape[0]
    h = t_new - t
    dense_coefficients(k, y_dense)
    jacs, fths = sp[20], sp[25]
    # the terms at every distinct stage point (they depend on y's step alone; Rodas5's last stages share t + h)
    for e in range(NODES.shape[0]):
        for i in range(n):
            y_st[i] = y[i] if e == 0 else dense_value(y, ynew, y_dense, NODES[e], i)
        if not point_terms(t + NODES[e] * h, y_st, jacs[e], fths[e], base, sp):
            return math.nan
    for d in range(m):
        # d/dt of J(y(t)) S + df/dD along y(t) at fixed S: the slope at t of the polynomial through its values
        # at the stage points (exact to O(h^5))
        s_n = s_buf[cur, d]
        for i in range(n):
            ft[d, i] = 0.0
        for e in range(NODES.shape[0]):
            direction_rhs(s_n, d, f1, jacs[e], fths[e])
            w = NODE_SLOPE[e] / h
            for i in range(n):
                ft[d, i] += w * f1[i]
    for st in range(N_STAGES):
        e = STAGE_NODE[st]
        for d in range(m):
            s_n = s_buf[cur, d]
            point = s_stage[d]
            if st == 0:
                for i in range(n):
                    point[i] = s_n[i]
            else:
                # the stage point of S (a chained stage builds on the one before)
                stage_point(s_n, k_s[d], st, point)
            direction_rhs(point, d, f0, jacs[e], fths[e])
            if st > 0:
                add_stage_history(f0, k_s[d], st, h)
            if GAMMAS[st] != 0.0:
                gh = h * GAMMAS[st]
                for i in range(n):
                    f0[i] += gh * ft[d, i]
            lu_solve(g, piv, f0)
            for i in range(n):
                k_s[d, st, i] = f0[i]
    # the embedded estimate, scaled as y's (atol: the state's absolute tolerance per unit of the direction)
    rtol, atol = step[_RTOL], step[_ATOL]
    err = 0.0
    for d in range(m):
        snew = s_buf[1 - cur, d]
        for i in range(n):
            snew[i] = s_stage[d, i] + k_s[d, LAST, i]
            sc = atol + rtol * max(abs(s_buf[cur, d, i]), abs(snew[i]))
            err += (k_s[d, LAST, i] / sc) ** 2
    err = math.sqrt(err / (m * n))
    if not math.isfinite(err):
        return math.nan
    if err > 1.0:
        return err
    for d in range(m):
        dense_coefficients(k_s[d], s_dense[d])
    step[_T] = t
    step[_H] = h
    step[_PENDING] = 1.0
    return err


#: The step loop of the sensitivity runs: the free-pH problem (general right-hand side) with the
#: sensitivities advanced after each accepted step.
sens_steps = make_step_loop(sens_point, sens_stage, sens_jacobian, sens_output, prefetch=False, all_active=True,
                            after_step=sens_after_step)


@driver_kernel
def _segment(t0, t1, y, h, base, sp, rtol, atol, counters, out, out_t, i_out, n_out):
    """Advance y and the sensitivities from t0 to exactly t1 (``integrator_kernel.integrate_segment``)."""
    if t1 - t0 <= 0.0:
        return STATUS_OK, h, i_out
    n = y.shape[0]
    work = (np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n), np.empty((N_STAGES, n)),
            np.empty((N_DENSE, n)), np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64), np.zeros((n, n)),
            np.empty((n, n)), np.empty(0), np.empty(n, dtype=np.int64))
    status, h, i_out = sens_steps((base, sp), base[6], t0, t1, t1, t1 - t0, y, h, work, rtol, atol, out, out_t,
                                  i_out, n_out, counters, -1.0, np.zeros(1))
    _swap_if_pending(sp)
    return status, h, i_out


@driver_kernel(nogil=True)
def run_sensitivities(model, q, runs, r, ph_offset, amount_factor, dirs, rtol, atol, out, sens, info):
    """Simulate run ``r`` (outputs in ``out`` as ``integrator_kernel.run_one`` writes them) and the
    derivatives of its outputs along each direction: ``sens[d, i, :]`` = d out[i, :] / d D_d.

    ``dirs`` (m, n_q + 2): row d is a direction in (q, the pH offset, the amount factor).
    ``info`` as ``run_one``'s.  Returns the status code.
    """
    n_species = model.n_species
    n = n_species + 3
    m = dirs.shape[0]
    par, ctx = run_context(model, q, runs, r, ph_offset)
    mode = ctx[CTX_MODE]
    temp_t = ctx[CTX_TEMP_T]
    temp_v = ctx[CTX_TEMP_V]
    temp_n = ctx[CTX_TEMP_N]
    ws, _ = run_workspaces(model)
    wss = stacked_workspaces(model, 2 * m)
    for k in range(N_INFO):
        info[k] = 0.0
    info[INFO_FAILED_AT] = math.nan
    eps, pars, offs, facs, rate_w, ea_w, has_other, pka_w, by_pops = parameter_sets(model, q, runs, r, ph_offset,
                                                                                   amount_factor, dirs)
    y = np.empty(n)
    status = start_state(model, runs, r, y, par, ctx, amount_factor, ws, info)
    if status != STATUS_OK:
        info[INFO_FAILED_AT] = 0.0
        return status
    s_buf = np.zeros((2, m, n))
    y_side = np.empty(n)
    scratch = np.empty(N_INFO)
    for d in range(m):
        for side in range(2):
            j = 2 * d + side
            par_j = (pars[0][j], pars[1][j], pars[2][j], pars[3][j], pars[4][j], pars[5][j])
            status = start_state(model, runs, r, y_side, par_j, with_offset(ctx, offs[j]), facs[j],
                                  set_workspace(wss, j), scratch)
            if status != STATUS_OK:
                info[INFO_FAILED_AT] = 0.0
                return status
            sign = 1.0 if side == 0 else -1.0
            for i in range(n):
                s_buf[0, d, i] += sign * y_side[i] / (2.0 * eps[d])
    step = np.zeros(6)
    step[_RTOL] = rtol
    step[_ATOL] = atol
    n_steps = model.step_logk_q.shape[0]
    ws_a, _ = run_workspaces(model)
    # the sensitivity problem, read by index here and in sensitivity_terms:
    #  0 eps (m,): the step of each direction's differences;  1 pars, 2 offs: the 2 m perturbed input sets;
    #  3 s_buf (2, m, n): S at a step's start and end (step[_CUR] says which is which);
    #  4 s_dense (m, N_DENSE, n), 5 k_s (m, N_STAGES, n): S's continuous extension and stages;
    #  6 y_dense (N_DENSE, n): y's continuous extension;  7 step: [t, h, current buffer, swap pending, rtol, atol];
    #  8 s_stage (m, n), 11 ft (m, n): S's stage points and time terms;  9, 10, 12, 13, 14, 17, 18: scratch (n,);
    #  15 wss: work arrays of the perturbed sets;  16 sens: the outputs' derivatives;  19 ws_a: work arrays of
    #  the terms;  20 jac (N_NODES, n, n), 25 ftheta (N_NODES, m, n): J and df/dD_d at each distinct stage
    #  point (point_terms);  21 contrib (n_steps, n): the rate constants' terms;  22 rate_w, 23 ea_w
    #  (m, n_steps), 24 has_other (m,), 26 pka_w (m, n_sites), 27 by_pops (m,): how each direction enters
    #  (parameter_sets)
    sp = (eps, pars, offs, s_buf, np.empty((m, N_DENSE, n)), np.empty((m, N_STAGES, n)), np.empty((N_DENSE, n)),
          step, np.empty((m, n)), np.empty(n), np.empty(n), np.empty((m, n)), np.empty(n), np.empty(n), np.empty(n),
          wss, sens, np.empty(n), np.empty(n), ws_a, np.zeros((NODES.shape[0], n, n)), np.empty((n_steps, n)), rate_w,
          ea_w, has_other, np.empty((NODES.shape[0], m, n)), pka_w, by_pops)
    dy = np.empty(n)
    feed_rate = np.zeros(n_species)
    zero_feed = np.zeros(n_species)
    counters = np.zeros(1, dtype=np.int64)
    cache = ws[WS_CACHE]
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
            cur = int(step[_CUR])
            # the types of a segment's problem tuple (one compiled copy of what reads it)
            base = (model, par, ctx, zero_feed, t * 0.0, t * 0.0, t < 0.0, ws)
            ph = rhs(t, y, dy, model, par, ctx, zero_feed, 0.0, 0.0, ws)
            if math.isnan(ph):
                info[INFO_FAILED_AT] = t
                return STATUS_NOT_FINITE
            write_output(out, i_out, y, ph, interpolate(temp_t, temp_v, temp_n, t))
            for d in range(m):
                s_now = sp[17]
                for i in range(n):
                    s_now[i] = s_buf[cur, d, i]
                if not sens_row(t, y, s_now, d, i_out, base, sp):
                    info[INFO_FAILED_AT] = t
                    return STATUS_NOT_FINITE
            i_out += 1
        if i_out >= n_out:
            break
        while i_ev < n_ev and ev_t[i_ev] <= t:
            if runs.ev_kind[r, i_ev] == 0:
                # a dose of a fixed amount and volume: the sensitivities are unchanged
                y[runs.ev_species[r, i_ev]] += runs.ev_amount[r, i_ev]
                y[n_species] += runs.ev_volume[r, i_ev]
            else:
                volume = y[n_species]
                frac = runs.ev_volume[r, i_ev] / volume
                if not (frac < 1.0):
                    info[INFO_FAILED_AT] = t
                    return STATUS_VOLUME
                # n (1 - v/V): d = dn (1 - v/V) + n v/V^2 dV
                cur = int(step[_CUR])
                for d in range(m):
                    dv = s_buf[cur, d, n_species]
                    for j in range(n_species + 1):
                        s_buf[cur, d, j] = s_buf[cur, d, j] * (1.0 - frac) + y[j] * frac / volume * dv
                for j in range(n_species + 1):
                    y[j] *= 1.0 - frac
            h = 0.0
            i_ev += 1
        while i_bp < n_bp and bp[i_bp] <= t:
            i_bp += 1
        t_end = out_t[n_out - 1]
        if i_bp < n_bp and bp[i_bp] < t_end:
            t_end = bp[i_bp]
        feed_volume_rate, temp_slope, nonauto = segment_conditions(runs, r, ctx, t, t_end, feed_rate, cache)
        base = (model, par, ctx, feed_rate, feed_volume_rate, temp_slope, nonauto, ws)
        cache[C_STEP_PH] = math.nan  # as integrator_kernel.integrate_segment: no solved point yet
        status, h, i_out = _segment(t, t_end, y, h, base, sp, rtol, atol, counters, out, out_t, i_out, n_out)
        info[INFO_STEPS] = counters[0]
        if status != STATUS_OK:
            info[INFO_FAILED_AT] = t
            return status
        t = t_end
    return STATUS_OK
