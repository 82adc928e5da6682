"""Right-hand side of the mass-action path (held and logged pH), its exact
Jacobian and time derivative, and the time-dependent coefficients.

The rate of step s is v_s = k_eff,s(t) V prod (n_j / V) over its concentration
reactants, and the titrant rate of a controlled run is linear in the step rates
and the amounts, q = beta + sum_s alpha_s v_s + sum_j gamma_j y_j (derivation
in ``segment_kernel``).  The coefficient vector (k_eff, alpha, beta, gamma,
ratio) comes from the full speciation at one time
(:func:`segment_coefficients`) and is carried along a segment as cubics
(:func:`evaluate_cubic`).
"""

from __future__ import annotations

import math

from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.layout import (C_DOH_DT, C_PH, C_PH_SLOPE, C_PKW, WS_CACHE, WS_DZBAR_DT, WS_K, WS_POPS,
                                         WS_VAR, WS_ZBAR)
from speciakin.simulation.rhs_kernel import requirement_fraction
from speciakin.simulation.speciation_kernel import LN10, exp10


@leaf_kernel
def effective_constants(model, ws, keff):
    """k_eff of every step [consistent units of mol/L and s] from the populations in ``ws``.

    ``ws`` must hold the populations, rate constants and pKw (left there by
    :func:`~speciakin.simulation.rhs_kernel.time_speciation` at the time wanted).
    """
    n_mol = model.n_mol
    mol_micro_start = model.mol_micro_start
    react_start = model.react_start
    react_kind = model.react_kind
    react_species = model.react_species
    react_mask = model.react_mask
    react_value = model.react_value
    k_of_t = ws[WS_K]
    pops = ws[WS_POPS]
    cache = ws[WS_CACHE]
    hydroxide = exp10(cache[C_PH] - cache[C_PKW])
    for s in range(model.step_logk_q.shape[0]):
        r = k_of_t[s]
        for k in range(react_start[s], react_start[s + 1]):
            kind = react_kind[k]
            if kind == 0:
                r *= requirement_fraction(k, pops, react_species, react_mask, react_value, mol_micro_start, n_mol)
            elif kind == 2:
                r *= hydroxide
        keff[s] = r


@leaf_kernel
def stoichiometry(model, nu, reactants, n_react):
    """Net change of every species per unit of v_s (rows of ``nu``) and the
    concentration reactants of each step; False when a step has more of them
    than ``reactants`` has columns."""
    react_species = model.react_species
    for s in range(nu.shape[0]):
        for i in range(nu.shape[1]):
            nu[s, i] = 0.0
        m = 0
        for k in range(model.react_start[s], model.react_start[s + 1]):
            if model.react_kind[k] == 0:
                if m >= reactants.shape[1]:
                    return False
                reactants[s, m] = react_species[k]
                m += 1
                nu[s, react_species[k]] -= model.react_coef[k]
        n_react[s] = m
        for k in range(model.prod_start[s], model.prod_start[s + 1]):
            nu[s, model.prod_species[k]] += model.prod_coef[k]
    return True


@leaf_kernel
def segment_coefficients(model, ws, nu, controlled, titrant, titrant_conc, second, second_conc, feed_rate,
                         feed_volume_rate, temperature_slope, coef):
    """Coefficient vector (k_eff, alpha, beta, gamma, ratio) at the time of the last ``rhs`` call.

    Layout: ``coef[:n_steps]`` = k_eff; ``coef[n_steps:2 n_steps]`` = alpha
    [-]; ``coef[2 n_steps]`` = beta [mol/s]; ``coef[2 n_steps + 1 + m]`` =
    gamma of molecule m [1/s]; then gamma of the volume [mol/(L*s)]; the last
    entry = d_titrant / d_opposite, the factor that turns a (negative) titrant
    rate into the opposite titrant's rate [-].  alpha, beta, gamma are zero
    unless the run is controlled (held pH, or logged pH with a titrant); the
    pH slope of a logged segment is ``ws[WS_CACHE][C_PH_SLOPE]``.
    """
    n_mol = model.n_mol
    n_species = model.n_species
    species_charge = model.species_charge
    n_steps = nu.shape[0]
    effective_constants(model, ws, coef)
    for i in range(n_steps, coef.shape[0]):
        coef[i] = 0.0
    if not controlled:
        return
    zbar = ws[WS_ZBAR]
    variance = ws[WS_VAR]
    cache = ws[WS_CACHE]
    dzdt = ws[WS_DZBAR_DT]
    hydrogen = exp10(-cache[C_PH])
    hydroxide = exp10(cache[C_PH] - cache[C_PKW])
    excess = hydrogen - hydroxide
    denominator = species_charge[titrant] + excess / titrant_conc
    if second >= 0:
        coef[coef.shape[0] - 1] = denominator / (species_charge[second] + excess / second_conc)
    for s in range(n_steps):
        num = 0.0
        for j in range(n_mol):
            num += zbar[j] * nu[s, j]
        for j in range(n_mol, n_species):
            num += species_charge[j] * nu[s, j]
        coef[n_steps + s] = -num / denominator
    num = excess * feed_volume_rate
    for j in range(n_mol):
        num += zbar[j] * feed_rate[j]
    for j in range(n_mol, n_species):
        num += species_charge[j] * feed_rate[j]
    coef[2 * n_steps] = -num / denominator
    if temperature_slope != 0.0:
        for m in range(n_mol):
            coef[2 * n_steps + 1 + m] = -temperature_slope * dzdt[m] / denominator
        coef[2 * n_steps + 1 + n_mol] = temperature_slope * cache[C_DOH_DT] / denominator
    ph_slope = cache[C_PH_SLOPE]
    if ph_slope != 0.0:
        # a logged pH moves the charge balance: dzbar/dpH = -ln10 var(N), d excess/dpH = -ln10 ([H+] + [OH-])
        for m in range(n_mol):
            coef[2 * n_steps + 1 + m] += ph_slope * LN10 * variance[m] / denominator
        coef[2 * n_steps + 1 + n_mol] += ph_slope * LN10 * (hydrogen + hydroxide) / denominator


@leaf_kernel
def fit_cubics(nodes, n_logged, from_nodes, poly, in_logs, scale):
    """Cubics ``poly[c, :]`` (monomials) through the values ``nodes[:, c]`` at the four
    interpolation points (``from_nodes``: the inverse Vandermonde matrix); the first
    ``n_logged`` (rate constants, which vary exponentially with 1/T and pH) as the cubics of
    their logarithms where positive at every point (``in_logs``); ``scale[c]`` = the largest
    |value|.  ``nodes`` is overwritten (logarithms)."""
    for c in range(poly.shape[0]):
        big = 0.0
        positive = c < n_logged
        for node in range(4):
            big = max(big, abs(nodes[node, c]))
            positive = positive and nodes[node, c] > 0.0
        scale[c] = big
        in_logs[c] = positive
        if positive:
            for node in range(4):
                nodes[node, c] = math.log(nodes[node, c])
        for a in range(4):
            poly[c, a] = 0.0
            for node in range(4):
                poly[c, a] += from_nodes[a, node] * nodes[node, c]


@leaf_kernel(inline="always")
def evaluate_cubic(poly, in_logs, x, value, slope):
    """Values and d/dx of the cubics ``poly[c, :]`` (monomials in x) at x;
    where ``in_logs[c]`` the cubic is that of the logarithm of the value."""
    for c in range(poly.shape[0]):
        a0 = poly[c, 0]
        a1 = poly[c, 1]
        a2 = poly[c, 2]
        a3 = poly[c, 3]
        p = a0 + x * (a1 + x * (a2 + x * a3))
        dp = a1 + x * (2.0 * a2 + x * 3.0 * a3)
        if in_logs[c]:
            p = math.exp(p)
            dp *= p
        value[c] = p
        slope[c] = dp


@leaf_kernel(inline="always")
def titrant_branch(y, coef, v, n_species, n_mol, n_steps, titrant, titrant_conc, second, second_conc):
    """(factor, dosed ion, its concentration, consumed-state row, titrant rate)
    at ``y`` with step rates ``v``: the titrant itself, or the opposite
    titrant when the titrant rate is negative and the run has one."""
    g0 = 2 * n_steps + 1
    q = coef[2 * n_steps]
    for s in range(n_steps):
        q += coef[n_steps + s] * v[s]
    for m in range(n_mol):
        q += coef[g0 + m] * y[m]
    q += coef[g0 + n_mol] * y[n_species]
    if q < 0.0 and second >= 0:
        return coef[g0 + n_mol + 1], second, second_conc, n_species + 2, q
    return 1.0, titrant, titrant_conc, n_species + 1, q


@leaf_kernel(inline="always")
def smooth_rhs(y, dy, coef, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc,
               second, second_conc, feed_rate, feed_volume_rate, product, v):
    """dy/dt with the coefficients ``coef``; ``product`` receives V^(1-m) prod n
    and ``v`` the step rates v_s = k_eff product [mol/s].  False (dy = NaN)
    when the volume is not positive."""
    n = dy.shape[0]
    n_steps = nu.shape[0]
    volume = y[n_species]
    if not (volume > 0.0):
        for i in range(n):
            dy[i] = math.nan
        return False
    inv_v = 1.0 / volume
    for i in range(n_species):
        dy[i] = feed_rate[i]
    dy[n_species] = feed_volume_rate
    dy[n_species + 1] = 0.0
    dy[n_species + 2] = 0.0
    for s in range(n_steps):
        p = volume
        for m in range(n_react[s]):
            p *= y[reactants[s, m]] * inv_v
        product[s] = p
        vs = coef[s] * p
        v[s] = vs
        for i in range(n_species):
            dy[i] += nu[s, i] * vs
    if held:
        # a negative titrant rate doses the opposite titrant instead (when the run has one)
        factor, dosed, conc_dosed, row, q = titrant_branch(y, coef, v, n_species, n_mol, n_steps, titrant,
                                                           titrant_conc, second, second_conc)
        q *= factor
        dy[dosed] += q
        dy[n_species] += q / conc_dosed
        dy[row] = q
    return True


@leaf_kernel(inline="always")
def smooth_jacobian(y, coef, nu, reactants, n_react, n_species, n_mol, held, titrant, titrant_conc,
                    second, second_conc, v, active_of, jac_t):
    """Non-zero columns of d(dy/dt)/dy, exact, stored transposed.

    ``jac_t[a, i]`` = d(dy_i/dt)/dy_j for the a-th active state j
    (``active_of[j]`` = a).  ``v`` must hold the step rates at ``y``.
    dv_s/dn_j = k_eff V^(1-m)
    prod_(other reactants) n; dv_s/dV = (1 - m) v_s / V; the titrant rate
    adds alpha_s dv_s/dy_j + gamma_j.
    """
    n = jac_t.shape[1]
    n_steps = nu.shape[0]
    g0 = 2 * n_steps + 1
    for a in range(jac_t.shape[0]):
        for i in range(n):
            jac_t[a, i] = 0.0
    volume = y[n_species]
    inv_v = 1.0 / volume
    factor, dosed, conc_dosed, row, q = titrant_branch(y, coef, v, n_species, n_mol, n_steps, titrant,
                                                       titrant_conc, second, second_conc)
    for s in range(n_steps):
        m_s = n_react[s]
        for mm in range(-1, m_s):
            if mm < 0:
                j = n_species
                d = v[s] * (1.0 - m_s) * inv_v
            else:
                j = reactants[s, mm]
                d = coef[s] * volume
                for m in range(m_s):
                    d *= inv_v if m == mm else y[reactants[s, m]] * inv_v
            a = active_of[j]
            for i in range(n_species):
                jac_t[a, i] += nu[s, i] * d
            if held:
                dq = factor * coef[n_steps + s] * d
                jac_t[a, dosed] += dq
                jac_t[a, n_species] += dq / conc_dosed
                jac_t[a, row] += dq
    if held:
        for j in range(n_mol + 1):
            state = j if j < n_mol else n_species
            dq = factor * coef[g0 + j]
            if dq != 0.0:
                a = active_of[state]
                jac_t[a, dosed] += dq
                jac_t[a, n_species] += dq / conc_dosed
                jac_t[a, row] += dq


@leaf_kernel
def smooth_time_derivative(y, coef, coef_dt, nu, n_species, n_mol, held, titrant, titrant_conc, second,
                           second_conc, product, v, ft):
    """d(dy/dt)/dt at fixed y [per s] from the coefficients and their time
    derivatives ``coef_dt``; ``product`` as left by :func:`smooth_rhs` at y.

    With v_s = k_eff,s P_s(y): df/dt = sum_s nu_s k_eff,s' P_s + e_q dq/dt,
    dq/dt = beta' + sum_s (alpha_s' k_eff,s + alpha_s k_eff,s') P_s + sum_j gamma_j' y_j.
    """
    n = ft.shape[0]
    n_steps = nu.shape[0]
    for i in range(n):
        ft[i] = 0.0
    for s in range(n_steps):
        dv = coef_dt[s] * product[s]
        for i in range(n_species):
            ft[i] += nu[s, i] * dv
    if held:
        g0 = 2 * n_steps + 1
        dq = coef_dt[2 * n_steps]
        for s in range(n_steps):
            dq += (coef_dt[n_steps + s] * coef[s] + coef[n_steps + s] * coef_dt[s]) * product[s]
        for m in range(n_mol):
            dq += coef_dt[g0 + m] * y[m]
        dq += coef_dt[g0 + n_mol] * y[n_species]
        factor, dosed, conc_dosed, row, q = titrant_branch(y, coef, v, n_species, n_mol, n_steps, titrant,
                                                           titrant_conc, second, second_conc)
        if dosed != titrant:
            # opposite titrant: rate = ratio(t) * q(t)
            dq = factor * dq + coef_dt[g0 + n_mol + 1] * q
        ft[dosed] += dq
        ft[n_species] += dq / conc_dosed
        ft[row] = dq
