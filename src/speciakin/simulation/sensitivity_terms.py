"""The terms of the forward sensitivities at a point, and their set-up (``sensitivity_kernel``).

At a state (t, y) of a run: the analytic Jacobian and each direction's df/dD_d (:func:`point_terms`: the
rate constants' share from their steps' own terms, :func:`rate_contributions`; site pKa values' from the
point's populations carried to the moved values, :func:`pka_difference`; the other inputs' from a central
difference at the fixed state, each perturbed input set in work arrays of its own,
:func:`stacked_workspaces`), the output row of a direction's sensitivities (:func:`sens_row`; a free pH's
from the charge balance at the fixed pH, :func:`free_ph_derivative`), how each direction enters
(:func:`parameter_sets`) and the start state (:func:`start_state`).  The sensitivity problem ``sp`` these
read by index is laid out in ``sensitivity_kernel.run_sensitivities``.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.integrator_kernel import TITRANT_SIGN_RTOL, adjust_start, run_context
from speciakin.simulation.jit_options import driver_kernel, leaf_kernel
from speciakin.simulation.layout import (C_OPPOSITE, C_PH, C_PH_SLOPE, C_PKW, C_TEMPERATURE, CTX_CONTROLLED, CTX_MODE,
                                         CTX_SECOND, CTX_SECOND_CONC, CTX_TEMP_N, CTX_TEMP_T, CTX_TEMP_V, CTX_TITRANT,
                                         CTX_TITRANT_CONC, PAR_ENTHALPY, WS_CACHE, WS_CONC, WS_DZBAR_DT, WS_K,
                                         WS_PKA2, WS_POPS, WS_RATE, WS_VAR, WS_ZBAR)
from speciakin.simulation.rhs_kernel import (MODE_FREE, analytic_jacobian, charge_imbalance, flux, interpolate,
                                             make_workspace, reset_workspace, rhs, speciation_at)
from speciakin.simulation.speciation_kernel import (GAS_CONSTANT, LN10, exp10, mean_charge_temperature_slopes,
                                                    mean_charges)
from speciakin.simulation.status import STATUS_NOT_FINITE, STATUS_OK

#: Size of the central differences in the parameters other than rate constants: the largest relative change
#: of such a parameter (relative to max(1, |q|)), of the pH offset [pH units] or of the amount factor.  The
#: free pH's charge balance is resolved to about 1e-13 pH, which this step divides.
SENS_EPS = 1e-4


@leaf_kernel(inline="always")
def with_offset(ctx, offset):
    """The run context with another pH offset."""
    return (ctx[0], ctx[1], offset, ctx[3], ctx[4], ctx[5], ctx[6], ctx[7], ctx[8], ctx[9], ctx[10], ctx[11],
            ctx[12], ctx[13], ctx[14], ctx[15])


@leaf_kernel(inline="always")
def set_workspace(wss, j):
    """The work arrays of perturbed input set ``j``: rows of the stacked arrays (:func:`stacked_workspaces`)."""
    return (wss[0][j], wss[1][j], wss[2][j], wss[3][j], wss[4][j], wss[5][j], wss[6][j], wss[7][j], wss[8][j],
            wss[9][j], wss[10][j], wss[11][j], wss[12][j])


@njit(cache=True)
def stacked_workspaces(model, count):
    """``count`` sets of ``rhs_kernel.make_workspace``'s arrays, each array stacked as the rows of one 2-D array,
    each set in its start state: one per perturbed input set, so that each keeps its own temperature-dependent
    values, populations and charge-balance warm start from one evaluation to the next."""
    one = make_workspace(model.n_species, model.site_pka_q.shape[0], model.micro_charge.shape[0], model.n_mol,
                         model.step_logk_q.shape[0])
    wss = (np.empty((count, one[0].shape[0])), np.empty((count, one[1].shape[0])),
           np.empty((count, one[2].shape[0])), np.empty((count, one[3].shape[0])),
           np.empty((count, one[4].shape[0])), np.empty((count, one[5].shape[0])),
           np.empty((count, one[6].shape[0])), np.empty((count, one[7].shape[0])),
           np.empty((count, one[8].shape[0])), np.empty((count, one[9].shape[0])),
           np.empty((count, one[10].shape[0])), np.empty((count, one[11].shape[0])),
           np.empty((count, one[12].shape[0])))
    for j in range(count):
        reset_workspace(set_workspace(wss, j))
    return wss


@leaf_kernel
def perturbed_rhs(t, y, j, f, base, sp):
    """f = dy/dt at (t, y) for perturbed input set ``j`` (2 d: +, 2 d + 1: -), in its own work arrays; returns
    the pH."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = base
    pars, offs, wss = sp[1], sp[2], sp[15]
    ws_j = set_workspace(wss, j)
    # the slope of a straight piece of a pH log is the segment's, set by the run driver
    ws_j[WS_CACHE][C_PH_SLOPE] = ws[WS_CACHE][C_PH_SLOPE]
    par_j = (pars[0][j], pars[1][j], pars[2][j], pars[3][j], pars[4][j], pars[5][j])
    return rhs(t, y, f, model, par_j, with_offset(ctx, offs[j]), feed_rate, feed_volume_rate, temperature_slope,
               ws_j)


@leaf_kernel
def rate_contributions(y, model, ctx, ws, contrib):
    """contrib[s] = d(dy/dt)/d(ln k_s) at the state of the last ``rhs`` call in ``ws``: step s's term of the
    right-hand side, with the response of a pH-stat's titrant to it (``rhs_kernel.rhs``: the titrant keeps the
    charge balance, its rate linear in the other rates at a fixed pH; the branch of that call)."""
    n_species = model.n_species
    n_mol = model.n_mol
    react_start, react_kind, react_species, react_coef = (model.react_start, model.react_kind, model.react_species,
                                                          model.react_coef)
    prod_start, prod_species, prod_coef = model.prod_start, model.prod_species, model.prod_coef
    species_charge = model.species_charge
    rate = ws[WS_RATE]
    cache = ws[WS_CACHE]
    zbar = ws[WS_ZBAR]
    volume = y[n_species]
    controlled = ctx[CTX_CONTROLLED] != 0
    if controlled:
        ph = cache[C_PH]
        excess = exp10(-ph) - exp10(ph - cache[C_PKW])
        dosed = ctx[CTX_TITRANT]
        conc_dosed = ctx[CTX_TITRANT_CONC]
        row = n_species + 1
        if cache[C_OPPOSITE] != 0.0:
            dosed = ctx[CTX_SECOND]
            conc_dosed = ctx[CTX_SECOND_CONC]
            row = n_species + 2
        denominator = species_charge[dosed] + excess / conc_dosed
    for st in range(contrib.shape[0]):
        c = contrib[st]
        for i in range(c.shape[0]):
            c[i] = 0.0
        vr = volume * rate[st]
        for k in range(react_start[st], react_start[st + 1]):
            if react_kind[k] == 0:
                c[react_species[k]] -= react_coef[k] * vr
        for k in range(prod_start[st], prod_start[st + 1]):
            c[prod_species[k]] += prod_coef[k] * vr
        if controlled:
            num = 0.0
            for i in range(n_mol):
                num += zbar[i] * c[i]
            for i in range(n_mol, n_species):
                num += species_charge[i] * c[i]
            dq = -num / denominator
            c[dosed] += dq
            c[n_species] += dq / conc_dosed
            c[row] = dq


@leaf_kernel(inline="always")
def site_shift(pka_w, d, s0, n_sites, st):
    """sum of direction d's pKa moves over the protonated sites of microstate ``st`` of a molecule whose sites
    start at ``s0``."""
    total = 0.0
    for i in range(n_sites):
        if (st >> i) & 1:
            total += pka_w[d, s0 + i]
    return total


@leaf_kernel
def pka_difference(t, y, d, temperature, out, base, sp):
    """out += df/dD_d at the fixed state for a direction that moves site pKa values alone (``pka_w[d]``), from
    the speciation of :func:`point_terms`' right-hand side (``ws_a``) without solving anything again.

    A move of the pKa values by e w carries the populations exactly: log10 p_s gains e sum_(i protonated) w_i
    before normalising (the weights of ``microstate_formulas.molecule_populations``).  A free pH moves with
    them to first order, dpH = sum_m c_m Cov_m(N, L) / ([H+] + [OH-] + sum_m c_m Var_m(N)), L_s the sum above
    (the charge balance, implicit function theorem; d zbar/dpKa_i = ln10 Cov(z, N_i), z = z0 + N), which
    changes the central difference by O(e^2) only.  The right-hand side at each side is ``rhs_kernel.flux``
    with the moved speciation; the perturbed sets' work arrays serve as scratch and are marked stale."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = base
    eps, fa, fb, wss, ws_a, pka_w = sp[0], sp[9], sp[10], sp[15], sp[19], sp[26]
    n_mol = model.n_mol
    site_start, micro_start, protons = model.mol_site_start, model.mol_micro_start, model.micro_protons
    cache_a = ws_a[WS_CACHE]
    pops, conc = ws_a[WS_POPS], ws_a[WS_CONC]
    ph = cache_a[C_PH]
    dph = 0.0
    if ctx[CTX_MODE] == MODE_FREE:
        num = 0.0
        slope = exp10(-ph) + exp10(ph - cache_a[C_PKW])
        for m in range(n_mol):
            s0 = site_start[m]
            m0 = micro_start[m]
            mean_n = 0.0
            mean_l = 0.0
            mean_nl = 0.0
            for st in range(micro_start[m + 1] - m0):
                shift = site_shift(pka_w, d, s0, site_start[m + 1] - s0, st)
                w = pops[m0 + st]
                mean_n += w * protons[m0 + st]
                mean_l += w * shift
                mean_nl += w * protons[m0 + st] * shift
            num += conc[m] * (mean_nl - mean_n * mean_l)
            slope += conc[m] * ws_a[WS_VAR][m]
        dph = num / slope
    e = eps[d]
    controlled_ramp = ctx[CTX_CONTROLLED] != 0 and temperature_slope != 0.0
    # the populations of both sides: one exponential per microstate serves both (10^(-x) = 1 / 10^x), none
    # for a molecule the direction leaves alone
    plus, minus = wss[2][2 * d], wss[2][2 * d + 1]
    for m in range(n_mol):
        s0 = site_start[m]
        m0 = micro_start[m]
        total_p = 0.0
        total_m = 0.0
        for st in range(micro_start[m + 1] - m0):
            shift = site_shift(pka_w, d, s0, site_start[m + 1] - s0, st) - protons[m0 + st] * dph
            x = exp10(e * shift) if shift != 0.0 else 1.0
            plus[m0 + st] = pops[m0 + st] * x
            minus[m0 + st] = pops[m0 + st] / x
            total_p += plus[m0 + st]
            total_m += minus[m0 + st]
        for st in range(m0, micro_start[m + 1]):
            plus[st] /= total_p
            minus[st] /= total_m
    for side in range(2):
        sign = 1.0 if side == 0 else -1.0
        ws_j = set_workspace(wss, 2 * d + side)
        pops_j = ws_j[WS_POPS]
        mean_charges(pops_j, model.micro_charge, protons, micro_start, n_mol, ws_j[WS_ZBAR], ws_j[WS_VAR])
        if controlled_ramp:
            mean_charge_temperature_slopes(pops_j, par[PAR_ENTHALPY], temperature, site_start, micro_start,
                                           model.micro_charge, n_mol, ws_j[WS_PKA2], ws_j[WS_DZBAR_DT])
        flux(y, fa if side == 0 else fb, model, ctx, feed_rate, feed_volume_rate, temperature_slope,
             ph + sign * e * dph, cache_a[C_PKW], ws_a[WS_K], conc, pops_j, ws_j[WS_ZBAR], ws_j[WS_VAR],
             ws_j[WS_DZBAR_DT], ws_j[WS_RATE], cache_a, ws_j[WS_CACHE])
        # its populations no longer belong to its own inputs: the next speciation there starts afresh
        ws_j[WS_CACHE][C_PH] = math.nan
        ws_j[WS_CACHE][C_TEMPERATURE] = math.nan
    for i in range(y.shape[0]):
        out[i] += (fa[i] - fb[i]) / (2.0 * e)


@leaf_kernel
def point_terms(t, y, jac, ftheta, base, sp):
    """At (t, y): the right-hand side (own work arrays), its analytic Jacobian ``jac`` and each direction's
    df/dD_d at the fixed state (``ftheta[d]``), for :func:`direction_rhs`; False when not finite.

    The rate constants' share comes from their steps' terms (d ln k = ln10 d log10 k - arrhenius d Ea), site pKa
    values' from the populations carried to them (:func:`pka_difference`), the other parameters' from a central
    difference in them at the fixed state."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = base
    eps, fa, fb, f0, ws_a, contrib = sp[0], sp[9], sp[10], sp[14], sp[19], sp[21]
    rate_w, ea_w, has_other, by_pops = sp[22], sp[23], sp[24], sp[27]
    # the slope of a straight piece of a pH log is the segment's, set by the run driver
    ws_a[WS_CACHE][C_PH_SLOPE] = ws[WS_CACHE][C_PH_SLOPE]
    ph = rhs(t, y, f0, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws_a)
    if math.isnan(ph):
        return False
    analytic_jacobian(y, model, ws_a, ctx, jac, temperature_slope)
    rate_contributions(y, model, ctx, ws_a, contrib)
    temperature = interpolate(ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], t)
    arrhenius = (1.0 / temperature - 1.0 / model.t_ref) * 1000.0 / GAS_CONSTANT
    n = y.shape[0]
    for d in range(ftheta.shape[0]):
        out = ftheta[d]
        for i in range(n):
            out[i] = 0.0
        for st in range(contrib.shape[0]):
            w = rate_w[d, st] - arrhenius * ea_w[d, st]
            if w != 0.0:
                for i in range(n):
                    out[i] += w * contrib[st, i]
        if by_pops[d]:
            pka_difference(t, y, d, temperature, out, base, sp)
        elif has_other[d]:
            perturbed_rhs(t, y, 2 * d, fa, base, sp)
            perturbed_rhs(t, y, 2 * d + 1, fb, base, sp)
            for i in range(n):
                out[i] += (fa[i] - fb[i]) / (2.0 * eps[d])
    return True


@leaf_kernel(inline="always")
def direction_rhs(s, d, out, jac, ftheta):
    """out = J s + df/dD_d with the terms of a point (:func:`point_terms`)."""
    n = s.shape[0]
    for i in range(n):
        v = ftheta[d, i]
        for j in range(n):
            v += jac[i, j] * s[j]
        out[i] = v


@leaf_kernel
def free_ph_derivative(t, y, s, d, base, sp):
    """dpH/dD_d of a free pH at (t, y) with S_d = ``s``: -(dG/dy s + dG/dD_d) / (dG/dpH) at the
    charge balance G(y, D, pH) = 0 (implicit function theorem), dG a central difference at the fixed pH
    (no solver inside it: the charge balance's own resolution, about 1e-13 pH, would be divided by the
    difference's step).  ``ws`` must hold the speciation at (t, y) (its right-hand side just evaluated)."""
    (model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, nonautonomous, ws) = base
    eps, pars, ya, wss = sp[0], sp[1], sp[12], sp[15]
    n_species = model.n_species
    cache = ws[WS_CACHE]
    ph = cache[C_PH]
    temperature = interpolate(ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], t)
    e = eps[d]
    g = 0.0
    for side in range(2):
        sign = 1.0 if side == 0 else -1.0
        j = 2 * d + side
        for i in range(y.shape[0]):
            ya[i] = y[i] + sign * e * s[i]
        ws_j = set_workspace(wss, j)
        par_j = (pars[0][j], pars[1][j], pars[2][j], pars[3][j], pars[4][j], pars[5][j])
        # no titrant terms (a free pH has none); the flag typed as the context's, so that one compiled
        # speciation_at serves every caller
        speciation_at(temperature, ph, model, par_j, ctx[CTX_CONTROLLED] * 0, 0.0, ws_j)
        g += sign * charge_imbalance(ya, model, ph, ws_j)
    g /= 2.0 * e
    hydrogen = exp10(-ph)
    hydroxide = exp10(ph - cache[C_PKW])
    slope = y[n_species] * (hydrogen + hydroxide)
    variance = ws[WS_VAR]
    for m in range(model.n_mol):
        slope += y[m] * variance[m]
    return g / (LN10 * slope)


@leaf_kernel
def sens_row(t, y, s, d, i_out, base, sp):
    """Output row ``i_out`` of direction d's sensitivities from S_d = ``s`` at (t, y); False when not finite.
    ``base``'s work arrays must hold the right-hand side at (t, y)."""
    sens = sp[16]
    n = y.shape[0]
    nsp = n - 3
    if base[2][CTX_MODE] == MODE_FREE:
        dph = free_ph_derivative(t, y, s, d, base, sp)
    else:
        # a held or logged pH is its set point or log plus the offset: it moves with the offset alone
        eps, offs = sp[0], sp[2]
        dph = (offs[2 * d] - offs[2 * d + 1]) / (2.0 * eps[d])
    for j in range(nsp + 1):
        sens[d, i_out, j] = s[j]
    sens[d, i_out, nsp + 1] = dph
    sens[d, i_out, nsp + 2] = s[nsp + 1]
    sens[d, i_out, nsp + 3] = 0.0
    sens[d, i_out, nsp + 4] = s[nsp + 2]
    return math.isfinite(dph)


@driver_kernel
def parameter_sets(model, q, runs, r, ph_offset, amount_factor, dirs):
    """How each direction enters the right-hand side: (eps, pars, offs, facs, rate_w, ea_w, has_other, pka_w,
    by_pops).

    A direction's rate constants (log10 k and Ea of every step) enter through the steps' own terms
    (``rate_w[d, s]`` = ln10 dlog10 k_s, ``ea_w[d, s]`` = dEa_s); its other entries through the 2 m input sets
    q +- eps_d D_d of the central differences, gathered as ``integrator_kernel.run_context`` gathers q (row 2 d:
    +, 2 d + 1: -); ``has_other[d]``: the direction has such entries among q and the pH offset;
    ``by_pops[d]``: instead, its entries are site pKa values alone, ``pka_w[d]`` per site (:func:`pka_difference`)."""
    m = dirs.shape[0]
    n_q = q.shape[0]
    n_steps = model.step_logk_q.shape[0]
    other = dirs.copy()
    rate_w = np.zeros((m, n_steps))
    ea_w = np.zeros((m, n_steps))
    for d in range(m):
        for st in range(n_steps):
            rate_w[d, st] = LN10 * dirs[d, model.step_logk_q[st]]
            ea_w[d, st] = dirs[d, model.step_ea_q[st]]
        for st in range(n_steps):
            other[d, model.step_logk_q[st]] = 0.0
            other[d, model.step_ea_q[st]] = 0.0
    has_other = np.zeros(m, dtype=np.bool_)
    # q entries that enter through something else than a site's pKa
    n_sites = model.site_pka_q.shape[0]
    elsewhere = np.zeros(n_q, dtype=np.bool_)
    for i in range(n_sites):
        elsewhere[model.site_dh_q[i]] = True
    for k in range(model.inter_q.shape[0]):
        elsewhere[model.inter_q[k]] = True
    if model.medium_q >= 0:
        elsewhere[model.medium_q] = True
    pka_w = np.zeros((m, n_sites))
    by_pops = np.zeros(m, dtype=np.bool_)
    eps = np.empty(m)
    offs = np.empty(2 * m)
    facs = np.empty(2 * m)
    par, _ = run_context(model, q, runs, r, ph_offset)
    pars = (np.empty((2 * m, par[0].shape[0])), np.empty((2 * m, par[1].shape[0])),
            np.empty((2 * m, par[2].shape[0])), np.empty((2 * m, par[3].shape[0])),
            np.empty((2 * m, par[4].shape[0])), np.empty(2 * m))
    qj = np.empty(n_q)
    for d in range(m):
        size = abs(other[d, n_q])
        for i in range(n_q):
            size = max(size, abs(other[d, i]) / max(1.0, abs(q[i])))
        has_other[d] = size > 0.0
        # pKa values alone (no offset, nothing else): carried through the populations (pka_difference)
        alone = has_other[d] and other[d, n_q] == 0.0
        for i in range(n_q):
            if other[d, i] != 0.0 and elsewhere[i]:
                alone = False
        for i in range(n_sites):
            pka_w[d, i] = other[d, model.site_pka_q[i]]
        if alone:
            moved = 0.0
            for i in range(n_sites):
                moved += abs(pka_w[d, i])
            # every moved q entry is some site's pKa (a q entry of nothing at all moves nothing)
            by_pops[d] = moved > 0.0
            has_other[d] = not by_pops[d]
        size = max(size, abs(other[d, n_q + 1]))
        eps[d] = SENS_EPS / size if size > 0.0 else SENS_EPS
        for side in range(2):
            e = eps[d] if side == 0 else -eps[d]
            j = 2 * d + side
            for i in range(n_q):
                qj[i] = q[i] + e * other[d, i]
            offs[j] = ph_offset + e * other[d, n_q]
            facs[j] = amount_factor + e * other[d, n_q + 1]
            pj, _ = run_context(model, qj, runs, r, offs[j])
            pars[0][j, :] = pj[0]
            pars[1][j, :] = pj[1]
            pars[2][j, :] = pj[2]
            pars[3][j, :] = pj[3]
            pars[4][j, :] = pj[4]
            pars[5][j] = pj[5]
    return eps, pars, offs, facs, rate_w, ea_w, has_other, pka_w, by_pops


@driver_kernel
def start_state(model, runs, r, y, par, ctx, amount_factor, ws, info):
    """The state at t = 0: the initial amounts with the amount factor on the substrate and, for a
    controlled run, the start adjustment (``integrator_kernel.run_one``); returns the status."""
    n_species = model.n_species
    for j in range(y.shape[0]):
        y[j] = runs.y0[r, j]
    for j in range(n_species):
        y[j] *= 1.0 + (amount_factor - 1.0) * model.substrate_mask[j]
    if ctx[CTX_CONTROLLED] == 0:
        return STATUS_OK
    dy = np.empty(y.shape[0])
    ph0 = rhs(0.0, y, dy, model, par, ctx, np.zeros(n_species), 0.0, 0.0, ws)
    if math.isnan(ph0):
        return STATUS_NOT_FINITE
    sign_tol = runs.scale[r, n_species + 1] * 1e6 * TITRANT_SIGN_RTOL
    return adjust_start(y, model, ph0, ws, runs.start[r], runs.titrant[r], ctx[CTX_TITRANT_CONC],
                        ctx[CTX_SECOND], ctx[CTX_SECOND_CONC], runs.acid[r], runs.base[r], sign_tol * 1e-3, info)
