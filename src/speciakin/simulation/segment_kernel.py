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
integration tolerance); the size of a coefficient not carried in logarithms
is its largest |value| in the segment so far, so that one crossing zero is
not halved down to the rounding noise of its terms.  At constant pH and temperature the coefficients are
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
                                         CTX_TEMP_V, CTX_TITRANT, CTX_TITRANT_CONC, CTX_LOG_C, CTX_LOG_SMOOTH)
from speciakin.simulation.held_ramp_kernel import (FIT_NONE, MAX_PIECES, basis_size, segment_cubics,
                                                   temperature_piece, temperature_range)
from speciakin.simulation.profile_kernel import interpolate, logged_ph
from speciakin.simulation.rhs_kernel import MODE_HELD, time_speciation
from speciakin.simulation.smooth_rhs_kernel import (evaluate_cubic, fit_cubics, segment_coefficients, smooth_jacobian,
                                                    smooth_rhs, smooth_time_derivative, stoichiometry)
from speciakin.simulation.status import STATUS_NOT_FINITE, STATUS_OK, STATUS_RAMP_NOT_COMPILED, STATUS_STEP_UNDERFLOW
from speciakin.simulation.rodas_tableau import N_DENSE, N_STAGES
from speciakin.simulation.rosenbrock_kernel import make_step_loop, write_output

#: Interpolation points of the coefficient cubic on [-1, 1] (Chebyshev points of the first kind).
NODES = np.cos((2.0 * np.arange(4) + 1.0) * np.pi / 8.0)
#: Inverse Vandermonde matrix: monomial coefficients (x^0..x^3) from the values at NODES.
FROM_NODES = np.linalg.inv(np.vander(NODES, 4, increasing=True))
#: Points where the cubic is checked against a full evaluation (x = 0 is an
#: extremum of the node polynomial T_4(x)/8, where the error of a smooth
#: function's cubic is largest).
CHECKS = np.array([0.0])
# The constants are read-only, as numba types a global array inside compiled code: a Python-level caller
# that passes them on (a benchmark running the drivers' Python copies) then uses the compiled variants
# the kernel made, instead of compiling writable-array variants into the shared cache.
for _constant in (NODES, FROM_NODES, CHECKS):
    _constant.setflags(write=False)
del _constant
#: Largest coefficient error allowed, relative to the coefficient's size on the segment (module notes).
COEFFICIENT_RTOL = 1e-9
#: Halvings of a segment before the coefficients are declared not smooth.
MAX_HALVINGS = 40


@leaf_kernel(inline="always")
def smooth_point(t, y, f, prob):
    """f = dy/dt at a step point (held/logged-pH problem of :func:`integrate_smooth`):
    the coefficients and their time derivatives at t, then the mass-action right-hand side."""
    (poly, in_logs, mid, inv_half, varying, cst, dc, nu, reactants, n_react, n_species, n_mol, held, titrant,
     titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v, active_of, ph_is_held, held_ph,
     ph_offset, log_t, log_v, log_n, temp_t, temp_v, temp_n, log_c, log_smooth) = prob
    if varying:
        evaluate_cubic(poly, in_logs, (t - mid) * inv_half, cst, dc)
        for c in range(poly.shape[0]):
            dc[c] *= inv_half
    return smooth_rhs(y, f, cst, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc, second,
                      second_conc, feed_rate, feed_volume_rate, product, v)


@leaf_kernel(inline="always")
def smooth_stage(t, ytmp, y, f, prob):
    """f = dy/dt at a stage point (the coefficients' time derivatives are not needed there)."""
    (poly, in_logs, mid, inv_half, varying, cst, dc, nu, reactants, n_react, n_species, n_mol, held, titrant,
     titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v, active_of, ph_is_held, held_ph,
     ph_offset, log_t, log_v, log_n, temp_t, temp_v, temp_n, log_c, log_smooth) = prob
    if varying:
        evaluate_cubic(poly, in_logs, (t - mid) * inv_half, cst, dc)
    return smooth_rhs(ytmp, f, cst, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc, second,
                      second_conc, feed_rate, feed_volume_rate, product, v)


@leaf_kernel(inline="always")
def smooth_jacobian_at(t, y, f0, ft, jac_t, span, prob):
    """Exact Jacobian on the active states and, when the coefficients vary, the exact df/dt
    (``cst``, ``dc``, ``product`` and ``v`` are those of (t, y): the last evaluation was there)."""
    (poly, in_logs, mid, inv_half, varying, cst, dc, nu, reactants, n_react, n_species, n_mol, held, titrant,
     titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v, active_of, ph_is_held, held_ph,
     ph_offset, log_t, log_v, log_n, temp_t, temp_v, temp_n, log_c, log_smooth) = prob
    smooth_jacobian(y, cst, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc, second,
                    second_conc, v, active_of, jac_t)
    if varying:
        smooth_time_derivative(y, cst, dc, nu, n_species, n_mol, held, titrant, titrant_conc, second, second_conc,
                               product, v, ft)
    return True


@leaf_kernel(inline="always")
def smooth_output(t, y, f, out, i_out, prob):
    """Output row at an interpolated state: the held pH, or the logged pH at t."""
    (poly, in_logs, mid, inv_half, varying, cst, dc, nu, reactants, n_react, n_species, n_mol, held, titrant,
     titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v, active_of, ph_is_held, held_ph,
     ph_offset, log_t, log_v, log_n, temp_t, temp_v, temp_n, log_c, log_smooth) = prob
    ph = held_ph if ph_is_held else logged_ph(log_t, log_v, log_c, log_n, log_smooth, t)[0] + ph_offset
    write_output(out, i_out, y, ph, interpolate(temp_t, temp_v, temp_n, t))
    return True


#: The step loop of :func:`integrate_smooth`: Jacobian on the active states, f at a new
#: step point evaluated before the step is accepted (cheap here).
smooth_steps = make_step_loop(smooth_point, smooth_stage, smooth_jacobian_at, smooth_output, prefetch=True,
                              all_active=False)


@njit(cache=True)
def make_smooth_workspace(model, n):
    """Work arrays of :func:`integrate_smooth` for one run (n = state size):
    (nu, reactants, n_react, nodes, poly, in_logs, exact, scale, cst, dc,
    product, v, f0, ft, fy, ytmp, ynew, fnew, k, dense, is_active, active, passive,
    active_of, jac_t, g, sub, piv, and the temperature cubics of a held-pH ramp: tpoly, tlogs,
    tnodes, tscale, tstate; ``held_ramp_kernel``; last, each coefficient's largest |value| in the
    segment so far, ``seen``).  The stoichiometry is filled in here."""
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
    n_b = basis_size(n_steps, n_mol)
    return (nu, reactants, n_react, np.empty((4, n_coef)), np.zeros((n_coef, 4)), np.zeros(n_coef, dtype=np.bool_),
            np.empty(n_coef), np.empty(n_coef), np.empty(n_coef), np.zeros(n_coef), np.empty(max(n_steps, 1)),
            np.empty(max(n_steps, 1)), np.empty(n), np.zeros(n), np.empty(n), np.empty(n), np.empty(n), np.empty(n),
            np.empty((N_STAGES, n)), np.empty((N_DENSE, n)), np.zeros(n, dtype=np.bool_), np.empty(n, dtype=np.int64),
            np.empty(n, dtype=np.int64), np.empty(n, dtype=np.int64), np.empty((n, n)), np.empty(n * n), np.empty(n),
            np.empty(n, dtype=np.int64), np.zeros((MAX_PIECES, n_b, 4)), np.zeros((MAX_PIECES, n_b), dtype=np.bool_),
            np.empty((4, n_b)), np.empty(n_b), np.zeros(3 + MAX_PIECES), np.zeros(n_coef))


@leaf_kernel
def reset_smooth_workspace(sw):
    """Bring the work arrays of :func:`make_smooth_workspace` back to the state they are made in
    (zeros where made with zeros; the stoichiometry is the model's and stays): they are made
    once per batch and serve its runs one after the other."""
    poly = sw[4]
    in_logs = sw[5]
    dc = sw[9]
    ft = sw[13]
    is_active = sw[20]
    for c in range(poly.shape[0]):
        in_logs[c] = False
        dc[c] = 0.0
        for a in range(poly.shape[1]):
            poly[c, a] = 0.0
    for i in range(ft.shape[0]):
        ft[i] = 0.0
        is_active[i] = False
    tstate = sw[32]  # the temperature cubics are the run's (held_ramp_kernel): none made yet
    tstate[0] = 0.0
    tstate[1] = math.nan
    for p in range(3, tstate.shape[0]):
        tstate[p] = FIT_NONE


@leaf_kernel
def integrate_smooth(t0, t1, y, h, model, par, ctx, ws, sw, feed_rate, feed_volume_rate, temperature_slope,
                     varying, rtol, atol, out, out_t, i_out, n_out, counters, sign_tol, peak, held_ramp=True):
    """Advance ``y`` from t0 to exactly t1 with Rodas5 [1]_ (held or logged pH).

    ``varying`` = the pH or the temperature changes inside the segment (the
    coefficients are then cubics in time, see the module notes).  Outputs at
    times strictly inside (t0, t1) from index ``i_out`` are written to
    ``out`` from the continuous extension of each step.  ``sw``: the run's work arrays
    (:func:`make_smooth_workspace`).  ``sign_tol``, ``peak``: see
    :data:`smooth_steps` (``rosenbrock_kernel``).  ``held_ramp``: None when no run of the
    batch holds its pH under a temperature ramp; the ramp's cubics in the temperature
    (``held_ramp_kernel``) are then left out of this compiled variant (numba drops the branch
    on ``held_ramp is None`` when compiling for a None argument), and a segment that would
    need them returns ``STATUS_RAMP_NOT_COMPILED``.

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
     k, dense, is_active, active_all, passive_all, active_of, jac_all, g_all, sub_all, piv_all, tpoly, tlogs, tnodes,
     tscale, tstate, seen) = sw
    n_coef = poly.shape[0]
    for c in range(n_coef):
        seen[c] = 0.0
    for i in range(n):
        ft[i] = 0.0
    for c in range(n_coef):
        dc[c] = 0.0
    # states whose Jacobian column can be non-zero: concentration reactants, the
    # volume and, for a controlled run whose temperature or logged pH changes, every molecule (gamma)
    for i in range(n):
        is_active[i] = False
        active_of[i] = -1
    is_active[n_species] = True
    for s in range(n_steps):
        for m in range(n_react[s]):
            is_active[reactants[s, m]] = True
    if held and (temperature_slope != 0.0 or (varying and not ph_is_held)):
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
    work = (f0, fnew, ft, fy, ytmp, ynew, k, dense, active, passive, jac_t, g, sub, piv)
    held_ph = ctx[CTX_SETPOINT] + ctx[CTX_PH_OFFSET]
    ta = t0
    trial = span
    while ta < t1:
        tb = min(t1, ta + trial)
        if t1 - tb <= 1e-9 * span:
            tb = t1
        halved = False
        worst = 0.0
        # ---- coefficients on [ta, tb]
        piece = -1
        temp_a = 0.0
        if varying and ph_is_held and temperature_slope != 0.0 and tstate[0] >= 0.0:
            # held pH under a ramp: cubics in the temperature, made once per run (held_ramp_kernel); the
            # branch tests the flag alone, so that numba drops the one not taken before typing
            if held_ramp is None:
                return STATUS_RAMP_NOT_COMPILED, h, i_out
            else:
                if math.isnan(tstate[1]):
                    t_low, t_high = temperature_range(ctx[CTX_TEMP_V], ctx[CTX_TEMP_N])
                    tstate[1] = t_low
                    tstate[2] = t_high
                temp_a = interpolate(ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], ta)
                fine, piece, t_b = temperature_piece(ta, t1, span, temp_a, temperature_slope, held_ph, model, par,
                                                     ws, titrant, titrant_conc, second, second_conc, NODES,
                                                     FROM_NODES, COEFFICIENT_RTOL, tpoly, tlogs, tnodes, tscale,
                                                     tstate)
                if not fine:
                    return STATUS_NOT_FINITE, h, i_out
                if piece >= 0:
                    tb = t_b
                    mid = 0.5 * (ta + tb)
                    half = 0.5 * (tb - ta)
                    width = (tstate[2] - tstate[1]) / (1 << int(tstate[0]))
                    segment_cubics(tpoly[piece], tlogs[piece], tstate[1] + (piece + 0.5) * width, 0.5 * width,
                                   temp_a + temperature_slope * half, temperature_slope, half, nu, n_mol,
                                   model.species_charge, feed_rate, feed_volume_rate, poly, in_logs)
                    inv_half = 1.0 / half
        if piece >= 0:
            pass  # the cubics of the held-pH ramp, made above
        elif varying:
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
                # rate constants vary exponentially with 1/T and pH: carry their logarithms
                fit_cubics(nodes, n_steps, FROM_NODES, poly, in_logs, scale)
                # a coefficient that is not carried in logarithms is held to its largest size in the
                # segment so far: near its zero crossing its size at the nodes of a short sub-segment
                # falls to the rounding noise of the terms that cancel in it, which no cubic fits
                for c in range(n_coef):
                    seen[c] = max(seen[c], scale[c])
                # worst: the largest coefficient error at the checks over what is allowed
                worst = 0.0
                for check in range(CHECKS.shape[0]):
                    ph = time_speciation(mid + half * CHECKS[check], model, par, ctx, temperature_slope, ws)
                    if math.isnan(ph):
                        return STATUS_NOT_FINITE, h, i_out
                    segment_coefficients(model, ws, nu, held, titrant, titrant_conc, second, second_conc,
                                         feed_rate, feed_volume_rate, temperature_slope, exact)
                    evaluate_cubic(poly, in_logs, CHECKS[check], cst, dc)
                    for c in range(n_coef):
                        error = abs(cst[c] - exact[c])
                        if error > 0.0:
                            worst = max(worst, error / (COEFFICIENT_RTOL * (abs(exact[c]) if in_logs[c]
                                                                             else seen[c])))
                smooth = worst <= 1.0
                if smooth:
                    break
                halved = True
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
        # ---- Rosenbrock steps on [ta, tb] (the one step loop, specialised by this path's functions)
        prob = (poly, in_logs, mid, inv_half, varying, cst, dc, nu, reactants, n_react, n_species, n_mol, held,
                titrant, titrant_conc, second, second_conc, feed_rate, feed_volume_rate, product, v, active_of,
                ph_is_held, held_ph, ctx[CTX_PH_OFFSET], ctx[CTX_LOG_T], ctx[CTX_LOG_V], ctx[CTX_LOG_N],
                ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], ctx[CTX_LOG_C], ctx[CTX_LOG_SMOOTH])
        status, h, i_out = smooth_steps(prob, varying, ta, tb, t1, span, y, h, work, rtol, atol, out, out_t, i_out,
                                        n_out, counters, sign_tol, peak)
        if status != STATUS_OK:
            return status, h, i_out
        sub_span = tb - ta
        # the next sub-segment: this one's length after a halving, else as long as the error of this
        # one's cubics allows (it grows as the fourth power of the length), at most twice as long
        if halved:
            trial = sub_span
        elif worst > 0.0:
            trial = sub_span * min(2.0, 0.9 * worst ** -0.25)
        else:
            trial = 2.0 * sub_span
        ta = tb
    return STATUS_OK, h, i_out
