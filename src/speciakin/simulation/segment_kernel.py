"""Fast Rosenbrock (Rodas5) path for segments whose acid-base state depends on time only.

With the pH held or logged, the microstate fractions, rate constants, [OH-]
and mean charges depend on the pH and the temperature, which depend on time
alone inside a segment (both are constant or linear between breakpoints);
they never depend on the amounts.  The rate of step s is then mass action
with an effective constant

    r_s = k_eff,s(t) * prod_(concentration reactants) c_j,
    k_eff,s = k_s(T) * prod (fraction of microstates meeting the requirement)
              * [OH-] (when hydroxide is a reactant),

and the titrant rate q that keeps the charge balance (held pH, or a logged
pH with a titrant) is linear in the step rates and the amounts:

    q = beta(t) + sum_s alpha_s(t) v_s + sum_j gamma_j(t) y_j,   v_s = V r_s,

with alpha_s = -(w . nu_s) / d, beta = -(excess dV/dt_feed + w . feed) / d,
gamma = -(dT/dt) d(charge)/dT / d (weights w = mean charges and ion charges,
d = titrant charge + excess / titrant concentration; see ``rhs_kernel``).  So

    dy/dt = feed + sum_s nu_s v_s + e_q q,   e_q = titrant, volume/c_t, consumed,

(gamma also carries d pH/dt of a logged segment).  A titrant volume only
adds: when q < 0 and the run has an opposite titrant, that one is dosed at
the rate ratio(t) q, ratio = d_titrant / d_opposite (a fifth coefficient);
the right-hand side is then piecewise smooth, and the step control meets
the switch like any other kink.  So the right-hand side is a few products
and small dot products (:func:`smooth_rhs`), with an exact Jacobian
(:func:`smooth_jacobian`) and, under a ramp, an exact time derivative.

The time-dependent coefficients c(t) = (k_eff, alpha, beta, gamma, ratio) are
evaluated with the full speciation (``rhs_kernel.time_speciation``) at the
four Chebyshev points of the segment and carried as a cubic in time (for
each positive k_eff, the cubic of its logarithm, which is nearly linear in
time under a temperature ramp and smooth in pH) [2]_.  The cubic is checked
against a full evaluation at the midpoint, and the segment is halved until
every coefficient agrees to :data:`COEFFICIENT_RTOL` of its size (a
coefficient error of 1e-9 relative changes the solution far less than the
integration tolerance).  At constant pH and temperature the coefficients are
constants (one evaluation per segment).

Outputs inside the segment are read from the continuous extension of each
accepted step (``rodas_tableau.dense_value``), so the steps need not stop at
output times; only breakpoints (doses, events, knots) end a segment.

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (Rosenbrock methods, transformed form with W = I/(h*gamma) - J,
   and the non-autonomous term gamma_i h df/dt); the coefficients are in
   ``rodas_tableau``.
.. [2] Trefethen, L. N., "Approximation Theory and Approximation Practice",
   SIAM 2013, chapters 2-4 (interpolation in Chebyshev points).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.layout import (CTX_CONTROLLED, CTX_LOG_N, CTX_LOG_T, CTX_LOG_V, CTX_MODE, CTX_PH_OFFSET,
                                         CTX_SECOND, CTX_SECOND_CONC, CTX_SETPOINT, CTX_TEMP_N, CTX_TEMP_T,
                                         CTX_TEMP_V, CTX_TITRANT, CTX_TITRANT_CONC, C_PH_SLOPE, WS_CACHE)
from speciakin.simulation.lu_kernel import lu_factor, lu_solve
from speciakin.simulation.rhs_kernel import MODE_HELD, interpolate, time_speciation
from speciakin.simulation.smooth_rhs_kernel import (evaluate_cubic, segment_coefficients, smooth_jacobian, smooth_rhs,
                                                    smooth_time_derivative, stoichiometry)
from speciakin.simulation.status import (STATUS_MAX_STEPS, STATUS_NOT_FINITE, STATUS_OK, STATUS_SINGULAR,
                                         STATUS_STEP_UNDERFLOW, STATUS_TITRANT_SIGN)
from speciakin.simulation.rodas_tableau import (ALPHA, GAMMA, GAMMAS, N_DENSE, N_STAGES, add_stage_history,
                                                dense_coefficients, dense_value, initial_step, land_step,
                                                new_solution, stage_point, step_factor)

MAX_STEPS = 100000
#: Interpolation points of the coefficient cubic on [-1, 1] (Chebyshev points of the first kind).
NODES = np.cos((2.0 * np.arange(4) + 1.0) * np.pi / 8.0)
#: Inverse Vandermonde matrix: monomial coefficients (x^0..x^3) from the values at NODES.
FROM_NODES = np.linalg.inv(np.vander(NODES, 4, increasing=True))
#: Points where the cubic is checked against a full evaluation (x = 0 is an
#: extremum of the node polynomial T_4(x)/8, where the error of a smooth
#: function's cubic is largest).
CHECKS = np.array([0.0])
#: Largest coefficient error allowed, relative to the coefficient's size on the segment.
COEFFICIENT_RTOL = 1e-9
#: Halvings of a segment before the coefficients are declared not smooth.
MAX_HALVINGS = 40


@leaf_kernel
def rodas_smooth(ta, tb, t1, span, y, h, poly, in_logs, mid, inv_half, varying, nu, reactants, n_react, n_species,
                 n_mol, held, titrant, titrant_conc, second, second_conc, feed_rate, feed_volume_rate, cst, dc,
                 product, v, f0, ft, fy, ytmp, ynew, fnew, k, dense, active, passive, active_of, jac_t, g, sub, piv,
                 rtol, atol, out, out_t, i_out, n_out, ph_is_held, held_ph, ph_offset, log_t, log_v, log_n, temp_t,
                 temp_v, temp_n, counters, sign_tol, peak):
    """Rosenbrock steps of :func:`integrate_smooth` from ta to tb (coefficients ``poly``
    on the sub-interval); returns (status, next step size, next output index).

    With ``sign_tol`` > 0 (a one-sided titrant) the titrant consumed may not
    fall more than ``sign_tol`` [mol] below its largest value so far
    (``peak[0]``): a titrant cannot be withdrawn (status 6).

    A leaf function: the work arrays come from the caller, so the step loop
    runs without reference counting.
    """
    n = y.shape[0]
    n_coef = poly.shape[0]
    n_act = active.shape[0]
    n_pas = n - n_act
    sub_span = tb - ta
    if varying:
        evaluate_cubic(poly, in_logs, (ta - mid) * inv_half, cst, dc)
        for c in range(n_coef):
            dc[c] *= inv_half
    if not smooth_rhs(y, f0, cst, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc,
                      second, second_conc, feed_rate, feed_volume_rate, product, v):
        return STATUS_NOT_FINITE, h, i_out
    if h <= 0.0:
        h = initial_step(y, f0, n, atol, rtol, sub_span)
    t = ta
    jac_fresh = False
    while t < tb:
        if not jac_fresh:
            # cst, dc, product and v are those of (t, y): the last evaluation was there
            smooth_jacobian(y, cst, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc,
                            second, second_conc, v, active_of, jac_t)
            if varying:
                smooth_time_derivative(y, cst, dc, nu, n_species, n_mol, held, titrant, titrant_conc, second,
                                       second_conc, product, v, ft)
            jac_fresh = True
        wanted = h
        h, last = land_step(t, h, tb)
        if h < 1e-13 * max(abs(t), span) or h <= 0.0:
            return STATUS_STEP_UNDERFLOW, h, i_out
        # W = I/(h gamma) - J on the active states only; passive states (zero
        # Jacobian columns) follow by substitution, k_p = h gamma (f_p + sum_a J[p, a] k_a)
        hg = h * GAMMA
        diag = 1.0 / hg
        for a in range(n_act):
            ia = active[a]
            for b in range(n_act):
                g[a, b] = -jac_t[b, ia]
            g[a, a] += diag
        if not lu_factor(g, piv):
            return STATUS_SINGULAR, h, i_out
        failed = False
        for st in range(N_STAGES):
            if st == 0:
                for i in range(n):
                    fy[i] = f0[i]
            else:
                stage_point(y, k, st, ytmp)
                if varying:
                    evaluate_cubic(poly, in_logs, (t + ALPHA[st] * h - mid) * inv_half, cst, dc)
                if not smooth_rhs(ytmp, fy, cst, nu, reactants, n_react, n_species, n_mol, held, titrant,
                                  titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v):
                    failed = True
                    break
                add_stage_history(fy, k, st, h)
            if varying and GAMMAS[st] != 0.0:
                gh = h * GAMMAS[st]
                for i in range(n):
                    fy[i] += gh * ft[i]
            for a in range(n_act):
                sub[a] = fy[active[a]]
            lu_solve(g, piv, sub)
            for a in range(n_act):
                k[st, active[a]] = sub[a]
            for p in range(n_pas):
                ip = passive[p]
                val = fy[ip]
                for a in range(n_act):
                    val += jac_t[a, ip] * sub[a]
                k[st, ip] = hg * val
        err = 0.0
        if not failed:
            err = new_solution(y, ytmp, k, ynew, rtol, atol)
            if not math.isfinite(err):
                failed = True
        t_new = tb if last else t + h
        if not failed and err <= 1.0:
            if varying:
                evaluate_cubic(poly, in_logs, (t_new - mid) * inv_half, cst, dc)
                for c in range(n_coef):
                    dc[c] *= inv_half
            if not smooth_rhs(ynew, fnew, cst, nu, reactants, n_react, n_species, n_mol, held, titrant,
                              titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v):
                failed = True
        if failed:
            h *= 0.1
            continue
        if err <= 1.0:
            # outputs strictly inside (t, t_new] and before t1: continuous extension; t1 itself is left to
            # the caller
            if i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                dense_coefficients(k, dense)
            while i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                tout = out_t[i_out]
                theta = (tout - t) / h
                for j in range(n_species + 1):
                    out[i_out, j] = dense_value(y, ynew, dense, theta, j)
                if ph_is_held:
                    out[i_out, n_species + 1] = held_ph
                else:
                    out[i_out, n_species + 1] = interpolate(log_t, log_v, log_n, tout) + ph_offset
                out[i_out, n_species + 2] = dense_value(y, ynew, dense, theta, n_species + 1)
                out[i_out, n_species + 3] = interpolate(temp_t, temp_v, temp_n, tout)
                out[i_out, n_species + 4] = dense_value(y, ynew, dense, theta, n_species + 2)
                i_out += 1
            for i in range(n):
                y[i] = ynew[i]
                f0[i] = fnew[i]
            t = t_new
            jac_fresh = False
            if sign_tol > 0.0:
                if y[n_species + 1] > peak[0]:
                    peak[0] = y[n_species + 1]
                elif y[n_species + 1] < peak[0] - sign_tol:
                    return STATUS_TITRANT_SIGN, h, i_out
            counters[0] += 1
            if counters[0] > MAX_STEPS:
                return STATUS_MAX_STEPS, h, i_out
            h = h * step_factor(err, True)
            if last:
                # a step cut short to land on tb says nothing against the larger step
                h = max(h, wanted)
        else:
            h = h * step_factor(err, False)
    return STATUS_OK, h, i_out


@njit(cache=True)
def make_smooth_workspace(model, n):
    """Work arrays of :func:`integrate_smooth` for one run (n = state size):
    (nu, reactants, n_react, nodes, poly, in_logs, exact, scale, cst, dc,
    product, v, f0, ft, fy, ytmp, ynew, fnew, k, dense, is_active, active, passive,
    active_of, jac_t, g, sub, piv).  The stoichiometry is filled in here."""
    n_mol = model.n_mol
    n_species = model.n_species
    n_steps = model.step_logk_q.shape[0]
    react_start = model.react_start
    react_kind = model.react_kind
    max_react = 1
    for s in range(n_steps):
        m = 0
        for kk in range(react_start[s], react_start[s + 1]):
            if react_kind[kk] == 0:
                m += 1
        max_react = max(max_react, m)
    nu = np.empty((n_steps, n_species))
    reactants = np.zeros((n_steps, max_react), dtype=np.int64)
    n_react = np.zeros(n_steps, dtype=np.int64)
    stoichiometry(model, nu, reactants, n_react)
    n_coef = 2 * n_steps + n_mol + 3
    return (nu, reactants, n_react, np.empty((4, n_coef)), np.zeros((n_coef, 4)), np.zeros(n_coef, dtype=np.bool_),
            np.empty(n_coef), np.empty(n_coef), np.empty(n_coef), np.zeros(n_coef), np.empty(max(n_steps, 1)),
            np.empty(max(n_steps, 1)), np.empty(n), np.zeros(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n),
            np.empty((N_STAGES, n)), np.empty((N_DENSE, n)), np.zeros(n, dtype=np.bool_), np.empty(n, dtype=np.int64),
            np.empty(n, dtype=np.int64), np.empty(n, dtype=np.int64), np.empty((n, n)), np.empty(n * n), np.empty(n),
            np.empty(n, dtype=np.int64))


@leaf_kernel
def integrate_smooth(t0, t1, y, h, model, par, ctx, ws, sw, feed_rate, feed_volume_rate, temperature_slope,
                     varying, rtol, atol, out, out_t, i_out, n_out, counters, sign_tol, peak):
    """Advance ``y`` from t0 to exactly t1 with Rodas5 [1]_ (held or logged pH).

    ``varying`` = the pH or the temperature changes inside the segment (the
    coefficients are then cubics in time, see the module notes).  Outputs at
    times strictly inside (t0, t1) from index ``i_out`` are written to
    ``out`` from the continuous extension of each step.  ``sw``: the run's work arrays
    (:func:`make_smooth_workspace`).  ``sign_tol``, ``peak``: see :func:`rodas_smooth`.

    Returns
    -------
    (status, next step size, next output index)
    """
    n_mol = model.n_mol
    n_species = model.n_species
    n_steps = model.step_logk_q.shape[0]
    mode = ctx[CTX_MODE]
    ph_is_held = mode == MODE_HELD
    # "held" below: the charge balance is kept by titrant (held pH, or a logged pH with a titrant)
    held = ctx[CTX_CONTROLLED] != 0
    titrant = ctx[CTX_TITRANT]
    titrant_conc = ctx[CTX_TITRANT_CONC]
    second = ctx[CTX_SECOND]
    second_conc = ctx[CTX_SECOND_CONC]
    n = y.shape[0]
    span = t1 - t0
    if span <= 0.0:
        return STATUS_OK, h, i_out
    (nu, reactants, n_react, nodes, poly, in_logs, exact, scale, cst, dc, product, v, f0, ft, fy, ytmp, ynew, fnew,
     k, dense, is_active, active_all, passive_all, active_of, jac_all, g_all, sub_all, piv_all) = sw
    n_coef = poly.shape[0]
    for i in range(n):
        ft[i] = 0.0
    for c in range(n_coef):
        dc[c] = 0.0
    # states whose Jacobian column can be non-zero: concentration reactants, the
    # volume and, under a held-pH temperature ramp, every molecule (gamma)
    for i in range(n):
        is_active[i] = False
        active_of[i] = -1
    is_active[n_species] = True
    for s in range(n_steps):
        for m in range(n_react[s]):
            is_active[reactants[s, m]] = True
    if held and (temperature_slope != 0.0 or ws[WS_CACHE][C_PH_SLOPE] != 0.0):
        for m in range(n_mol):
            is_active[m] = True
    n_act = 0
    n_pas = 0
    for i in range(n):
        if is_active[i]:
            active_all[n_act] = i
            active_of[i] = n_act
            n_act += 1
        else:
            passive_all[n_pas] = i
            n_pas += 1
    active = active_all[:n_act]
    passive = passive_all[:n_pas]
    jac_t = jac_all[:n_act]
    # a contiguous n_act x n_act matrix (a 2-D slice would be strided)
    g = g_all[:n_act * n_act].reshape((n_act, n_act))
    sub = sub_all[:n_act]
    piv = piv_all[:n_act]
    ta = t0
    trial = span
    while ta < t1:
        tb = min(t1, ta + trial)
        if t1 - tb <= 1e-9 * span:
            tb = t1
        # ---- coefficients on [ta, tb]
        if varying:
            smooth = False
            for halving in range(MAX_HALVINGS):
                mid = 0.5 * (ta + tb)
                half = 0.5 * (tb - ta)
                for node in range(4):
                    ph = time_speciation(mid + half * NODES[node], model, par, ctx, temperature_slope, ws)
                    if math.isnan(ph):
                        return STATUS_NOT_FINITE, h, i_out
                    segment_coefficients(model, ws, nu, held, titrant, titrant_conc, second, second_conc,
                                         feed_rate, feed_volume_rate, temperature_slope, nodes[node])
                for c in range(n_coef):
                    big = 0.0
                    positive = c < n_steps
                    for node in range(4):
                        big = max(big, abs(nodes[node, c]))
                        positive = positive and nodes[node, c] > 0.0
                    scale[c] = big
                    # rate constants vary exponentially with 1/T and pH: carry their logarithms
                    in_logs[c] = positive
                    if positive:
                        for node in range(4):
                            nodes[node, c] = math.log(nodes[node, c])
                    for a in range(4):
                        poly[c, a] = 0.0
                        for node in range(4):
                            poly[c, a] += FROM_NODES[a, node] * nodes[node, c]
                smooth = True
                for check in range(CHECKS.shape[0]):
                    ph = time_speciation(mid + half * CHECKS[check], model, par, ctx, temperature_slope, ws)
                    if math.isnan(ph):
                        return STATUS_NOT_FINITE, h, i_out
                    segment_coefficients(model, ws, nu, held, titrant, titrant_conc, second, second_conc,
                                         feed_rate, feed_volume_rate, temperature_slope, exact)
                    evaluate_cubic(poly, in_logs, CHECKS[check], cst, dc)
                    for c in range(n_coef):
                        if abs(cst[c] - exact[c]) > COEFFICIENT_RTOL * (abs(exact[c]) if in_logs[c] else scale[c]):
                            smooth = False
                            break
                    if not smooth:
                        break
                if smooth:
                    break
                tb = ta + 0.5 * (tb - ta)
            if not smooth:
                return STATUS_STEP_UNDERFLOW, h, i_out
            inv_half = 1.0 / (0.5 * (tb - ta))
            mid = 0.5 * (ta + tb)
        else:
            ph = time_speciation(ta, model, par, ctx, temperature_slope, ws)
            if math.isnan(ph):
                return STATUS_NOT_FINITE, h, i_out
            segment_coefficients(model, ws, nu, held, titrant, titrant_conc, second, second_conc, feed_rate,
                                 feed_volume_rate, temperature_slope, cst)
            for c in range(n_coef):
                in_logs[c] = False
                poly[c, 0] = cst[c]
                for a in range(1, 4):
                    poly[c, a] = 0.0
            inv_half = 0.0
            mid = ta
        sub_span = tb - ta
        # ---- Rosenbrock steps on [ta, tb] (a leaf function: no reference counting in the step loop)
        status, h, i_out = rodas_smooth(ta, tb, t1, span, y, h, poly, in_logs, mid, inv_half, varying, nu, reactants,
                                        n_react, n_species, n_mol, held, titrant, titrant_conc, second,
                                        second_conc, feed_rate, feed_volume_rate, cst, dc, product, v, f0, ft, fy,
                                        ytmp, ynew, fnew, k, dense, active, passive, active_of, jac_t, g, sub, piv,
                                        rtol, atol, out, out_t, i_out, n_out, ph_is_held, ctx[CTX_SETPOINT] + ctx[CTX_PH_OFFSET], ctx[CTX_PH_OFFSET],
                                        ctx[CTX_LOG_T], ctx[CTX_LOG_V], ctx[CTX_LOG_N], ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], counters, sign_tol,
                                        peak)
        if status != STATUS_OK:
            return status, h, i_out
        sub_span = tb - ta
        trial = 2.0 * sub_span
        ta = tb
    return STATUS_OK, h, i_out
