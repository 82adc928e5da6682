"""Fast Rodas4 path for segments at a fixed pH and a fixed temperature.

In a segment without a breakpoint inside, with the pH held (or a logged pH
that is constant over the segment) and the temperature constant, every
microstate fraction, rate constant, [OH-] and mean charge is constant.  The
rate of step s then reduces to mass action with an effective constant

    r_s = k_eff,s * prod_(concentration reactants) c_j,
    k_eff,s = k_s(T) * prod (fraction of microstates meeting the requirement)
              * [OH-] (when hydroxide is a reactant),

computed once per segment (:func:`effective_constants`).  The right-hand
side and its analytic Jacobian are then a few multiplications
(:func:`fixed_rhs`, :func:`fixed_jacobian`); the held-pH titrant rate keeps
the charge balance with constant weights (mean charges, ion charges).

Outputs inside the segment are read from the cubic Hermite interpolant of
each accepted step (values and derivatives at both ends), so the steps need
not stop at output times; only breakpoints (doses, events, knots) end a
segment.

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (Rodas4, transformed form with W = I/(h*gamma) - J).
.. [2] Hairer, E., Norsett, S. P. and Wanner, G., "Solving Ordinary
   Differential Equations I", 2nd ed., Springer 1993, section II.6 (dense
   output; cubic Hermite interpolation, eq. 6.7).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.rodas_tableau import GAMMA, STAGE_A, STAGE_C, STAGE_M, initial_step
from speciakin.simulation.lu_kernel import lu_factor, lu_solve

MAX_STEPS = 100000


@njit(cache=True)
def effective_constants(model, ws, keff):
    """k_eff of every step [consistent units of mol/L and s] from the populations in ``ws``.

    ``ws`` must hold the populations, rate constants and pKw of the segment
    (left there by a call of ``rhs_kernel.rhs`` at its start).
    """
    (n_mol, n_species, species_charge, mol_site_start, mol_micro_start, site_pka_q, site_dh_q,
     inter_a, inter_b, inter_q, mol_inter_start, micro_charge, micro_protons, step_logk_q,
     step_ea_q, react_start, react_kind, react_species, react_coef, react_mask, react_value,
     prod_start, prod_species, prod_coef, t_ref, substrate_mask) = model
    k_of_t = ws[1]
    pops = ws[2]
    cache = ws[7]
    hydroxide = 10.0 ** (cache[2] - cache[1])
    for s in range(step_logk_q.shape[0]):
        r = k_of_t[s]
        for k in range(react_start[s], react_start[s + 1]):
            kind = react_kind[k]
            if kind == 0:
                sp = react_species[k]
                if sp < n_mol and react_mask[k] != 0:
                    frac = 0.0
                    m0 = mol_micro_start[sp]
                    for st in range(mol_micro_start[sp + 1] - m0):
                        if (st & react_mask[k]) == react_value[k]:
                            frac += pops[m0 + st]
                    r *= frac
            elif kind == 2:
                r *= hydroxide
        keff[s] = r


@njit(cache=True)
def fixed_rhs(y, dy, keff, react_start, react_kind, react_species, react_coef, prod_start, prod_species,
              prod_coef, n_species, feed_rate, feed_volume_rate, held, weight, excess, titrant,
              titrant_conc, denominator, vr):
    """dy/dt at a fixed pH and temperature; ``vr`` receives V * r_s [mol/s].

    Returns False when the volume is not positive (dy is then NaN).
    """
    volume = y[n_species]
    if not (volume > 0.0):
        for i in range(dy.shape[0]):
            dy[i] = math.nan
        return False
    inv_v = 1.0 / volume
    for j in range(n_species):
        dy[j] = feed_rate[j]
    for s in range(keff.shape[0]):
        r = keff[s] * volume
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                r *= y[react_species[k]] * inv_v
        vr[s] = r
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                dy[react_species[k]] -= react_coef[k] * r
        for k in range(prod_start[s], prod_start[s + 1]):
            dy[prod_species[k]] += prod_coef[k] * r
    dy[n_species] = feed_volume_rate
    dy[n_species + 1] = 0.0
    if held:
        num = excess * feed_volume_rate
        for j in range(n_species):
            num += weight[j] * dy[j]
        q = -num / denominator
        dy[titrant] += q
        dy[n_species] += q / titrant_conc
        dy[n_species + 1] = q
    return True


@njit(cache=True)
def fixed_jacobian(y, keff, react_start, react_kind, react_species, react_coef, prod_start, prod_species,
                   prod_coef, n_species, held, weight, titrant, titrant_conc, denominator, jac):
    """Analytic d(dy/dt)/dy of :func:`fixed_rhs` (the titrant-consumed column is zero)."""
    n = y.shape[0]
    volume = y[n_species]
    inv_v = 1.0 / volume
    for i in range(n):
        for j in range(n):
            jac[i, j] = 0.0
    for s in range(keff.shape[0]):
        n_conc = 0
        rate = keff[s]
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                n_conc += 1
                rate *= y[react_species[k]] * inv_v
        # d(V r)/dV = r (1 - m) for m concentration factors
        dv = rate * (1.0 - n_conc)
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                jac[react_species[k], n_species] -= react_coef[k] * dv
        for k in range(prod_start[s], prod_start[s + 1]):
            jac[prod_species[k], n_species] += prod_coef[k] * dv
        for kk in range(react_start[s], react_start[s + 1]):
            if react_kind[kk] != 0:
                continue
            j = react_species[kk]
            d = keff[s]
            for k in range(react_start[s], react_start[s + 1]):
                if react_kind[k] == 0 and k != kk:
                    d *= y[react_species[k]] * inv_v
            for k in range(react_start[s], react_start[s + 1]):
                if react_kind[k] == 0:
                    jac[react_species[k], j] -= react_coef[k] * d
            for k in range(prod_start[s], prod_start[s + 1]):
                jac[prod_species[k], j] += prod_coef[k] * d
    if held:
        for j in range(n_species + 1):
            num = 0.0
            for i in range(n_species):
                num += weight[i] * jac[i, j]
            dq = -num / denominator
            jac[titrant, j] += dq
            jac[n_species, j] += dq / titrant_conc
            jac[n_species + 1, j] = dq


@njit(cache=True)
def hermite(y0, f0, y1, f1, h, theta, i):
    """Cubic Hermite interpolant of component ``i`` at t0 + theta*h [2]_."""
    a = y1[i] - y0[i]
    return (y0[i] + theta * a
            + theta * (theta - 1.0) * ((1.0 - 2.0 * theta) * a + (theta - 1.0) * h * f0[i] + theta * h * f1[i]))


@njit(cache=True)
def integrate_fixed(t0, t1, y, h, model, ws, held, titrant, titrant_conc, feed_rate, feed_volume_rate,
                    rtol, atol, out, out_t, i_out, n_out, ph, temperature, counters):
    """Advance ``y`` from t0 to exactly t1 at fixed pH/temperature with Rodas4 [1]_.

    Outputs at times strictly inside (t0, t1) from index ``i_out`` are
    written to ``out`` by Hermite interpolation [2]_.  ``ws`` must hold the
    speciation at (t0, y) (an ``rhs`` call just before).

    Returns
    -------
    (status, next step size, next output index)
    """
    (n_mol, n_species, species_charge, mol_site_start, mol_micro_start, site_pka_q, site_dh_q,
     inter_a, inter_b, inter_q, mol_inter_start, micro_charge, micro_protons, step_logk_q,
     step_ea_q, react_start, react_kind, react_species, react_coef, react_mask, react_value,
     prod_start, prod_species, prod_coef, t_ref, substrate_mask) = model
    n = y.shape[0]
    n_steps = step_logk_q.shape[0]
    keff = np.empty(max(n_steps, 1))
    vr = np.empty(max(n_steps, 1))
    effective_constants(model, ws, keff)
    keff = keff[:n_steps]
    weight = np.zeros(n_species)
    zbar = ws[3]
    cache = ws[7]
    for m in range(n_mol):
        weight[m] = zbar[m]
    for j in range(n_mol, n_species):
        weight[j] = species_charge[j]
    excess = 10.0 ** (-cache[2]) - 10.0 ** (cache[2] - cache[1])
    denominator = species_charge[titrant] + excess / titrant_conc
    f0 = np.empty(n)
    fy = np.empty(n)
    ytmp = np.empty(n)
    ynew = np.empty(n)
    fnew = np.empty(n)
    k = np.empty((6, n))
    jac = np.empty((n, n))
    # states whose Jacobian column can be non-zero: concentration reactants and the volume
    is_active = np.zeros(n, dtype=np.bool_)
    is_active[n_species] = True
    for kk in range(react_start[n_steps]):
        if react_kind[kk] == 0:
            is_active[react_species[kk]] = True
    n_act = 0
    for i in range(n):
        if is_active[i]:
            n_act += 1
    n_pas = n - n_act
    active = np.empty(n_act, dtype=np.int64)
    passive = np.empty(max(n_pas, 1), dtype=np.int64)
    ia = 0
    ip = 0
    for i in range(n):
        if is_active[i]:
            active[ia] = i
            ia += 1
        else:
            passive[ip] = i
            ip += 1
    g = np.empty((n_act, n_act))
    sub = np.empty(n_act)
    piv = np.empty(n_act, dtype=np.int64)
    span = t1 - t0
    if span <= 0.0:
        return 0, h, i_out
    if not fixed_rhs(y, f0, keff, react_start, react_kind, react_species, react_coef, prod_start,
                     prod_species, prod_coef, n_species, feed_rate, feed_volume_rate, held, weight, excess,
                     titrant, titrant_conc, denominator, vr):
        return 3, h, i_out
    if h <= 0.0:
        h = initial_step(y, f0, n, atol, rtol, span)
    t = t0
    jac_fresh = False
    while t < t1:
        if not jac_fresh:
            fixed_jacobian(y, keff, react_start, react_kind, react_species, react_coef, prod_start, prod_species,
                           prod_coef, n_species, held, weight, titrant, titrant_conc, denominator, jac)
            jac_fresh = True
        last = False
        wanted = h
        if t + 1.0000001 * h >= t1:
            h = t1 - t
            last = True
        if h < 1e-13 * max(abs(t), span) or h <= 0.0:
            return 2, h, i_out
        # W = I/(h gamma) - J on the active states only; passive states (zero
        # Jacobian columns: ions, titrant consumed, unreactive molecules) follow
        # by substitution, k_p = h gamma (f_p + sum_a J[p, a] k_a)
        hg = h * GAMMA
        diag = 1.0 / hg
        for a in range(n_act):
            ia = active[a]
            for b in range(n_act):
                g[a, b] = -jac[ia, active[b]]
            g[a, a] += diag
        if not lu_factor(g, piv):
            return 4, h, i_out
        failed = False
        for st in range(6):
            if st == 0:
                for i in range(n):
                    fy[i] = f0[i]
            else:
                for i in range(n):
                    ytmp[i] = y[i]
                base = st * (st - 1) // 2
                for j in range(st):
                    a = STAGE_A[base + j]
                    if a != 0.0:
                        for i in range(n):
                            ytmp[i] += a * k[j, i]
                if not fixed_rhs(ytmp, fy, keff, react_start, react_kind, react_species, react_coef, prod_start,
                                 prod_species, prod_coef, n_species, feed_rate, feed_volume_rate, held, weight,
                                 excess, titrant, titrant_conc, denominator, vr):
                    failed = True
                    break
                for j in range(st):
                    c = STAGE_C[base + j] / h
                    for i in range(n):
                        fy[i] += c * k[j, i]
            for a in range(n_act):
                sub[a] = fy[active[a]]
            lu_solve(g, piv, sub)
            for a in range(n_act):
                k[st, active[a]] = sub[a]
            for p in range(n_pas):
                ip = passive[p]
                v = fy[ip]
                for a in range(n_act):
                    v += jac[ip, active[a]] * sub[a]
                k[st, ip] = hg * v
        err = 0.0
        if not failed:
            for i in range(n):
                v = y[i]
                for st in range(6):
                    v += STAGE_M[st] * k[st, i]
                ynew[i] = v
                sc = atol + rtol * max(abs(y[i]), abs(v))
                err += (k[5, i] / sc) ** 2
            err = math.sqrt(err / n)
            if not math.isfinite(err):
                failed = True
        if not failed:
            if err <= 1.0:
                if not fixed_rhs(ynew, fnew, keff, react_start, react_kind, react_species, react_coef,
                                 prod_start, prod_species, prod_coef, n_species, feed_rate, feed_volume_rate,
                                 held, weight, excess, titrant, titrant_conc, denominator, vr):
                    failed = True
        if failed:
            h *= 0.1
            continue
        if err <= 1.0:
            t_new = t1 if last else t + h
            # outputs strictly inside (t, t_new]: interpolate; t1 itself is left to the caller
            while i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                theta = (out_t[i_out] - t) / h
                for j in range(n - 1):
                    out[i_out, j] = hermite(y, f0, ynew, fnew, h, theta, j)
                out[i_out, n - 1] = ph
                out[i_out, n] = hermite(y, f0, ynew, fnew, h, theta, n - 1)
                out[i_out, n + 1] = temperature
                i_out += 1
            for i in range(n):
                y[i] = ynew[i]
                f0[i] = fnew[i]
            t = t_new
            jac_fresh = False
            counters[0] += 1
            if counters[0] > MAX_STEPS:
                return 1, h, i_out
            # same controller as the general path: 0.9 err^-1/4 (a PI controller was measured to take more steps)
            fac = 0.9 * err ** (-0.25) if err > 0.0 else 6.0
            h = h * min(6.0, max(0.2, fac))
            if last:
                # a step cut short to land on t1 says nothing against the larger step
                h = max(h, wanted)
        else:
            fac = 0.9 * err ** (-0.25)
            h = h * min(1.0, max(0.1, fac))
    return 0, h, i_out
