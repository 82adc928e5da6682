"""Compiled right-hand side of the speciation-kinetics equations.

State vector ``y`` (length n_species + 3): amounts [mol] of every molecule,
then every strong ion, then the volume [L], then the titrant consumed [mol],
then the opposite titrant consumed [mol] (two-sided pH-stat).
Acid-base equilibria are algebraic: at every call the pH is fixed (held),
read from the log (logged) or solved from the charge balance (free), and
the microstate populations follow from it.

Rate of step s [mol/(L*s)]: r_s = k_s(T) * prod_reactants factor, with
factor = c_species * (fraction of its microstates meeting every requirement),
1 for water, [OH-] = Kw/[H+] for hydroxide; d n/dt = V * sum_s nu * r_s + feeds.

Held pH, and logged pH with a titrant ("controlled" runs): the titrant rate
q [mol/s] keeps the charge balance sum_m n_m zbar_m + sum_ions z n +
V([H+] - [OH-]) = 0 true at the imposed pH; its time derivative is linear in
q and is solved for q, including the drift of zbar and Kw with temperature
and, for a logged pH, with the pH itself.  Titrant volumes only add: when the
titrant would have to be withdrawn (q < 0) the opposite titrant, when the run
has one, is dosed instead at its own concentration (two-sided pH-stat).

References
----------
.. [1] Arrhenius, S., Z. Phys. Chem. 1889, 4, 226; k(T) parameterised at a
   reference temperature as in Schwaab, M. and Pinto, J. C., Chem. Eng. Sci.
   2007, 62, 2750 ("Optimum reference temperature for reparameterization of
   the Arrhenius equation").
.. [2] Borkovec, M. and Koper, G. J. M., J. Phys. Chem. 1992, 96, 6038.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from speciakin.simulation.speciation_kernel import (
    mean_charge_temperature_slopes,
    exp10,
    GAS_CONSTANT,
    LN10,
    all_populations,
    mean_charges,
    site_pka_at,
    solve_charge_balance_from,
)
from speciakin.simulation.water_kernel import pkw, pkw_slope
from speciakin.simulation.profile_kernel import interpolate, logged_ph
from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.layout import (CTX_CONTROLLED, CTX_LOG_C, CTX_LOG_N, CTX_LOG_SMOOTH, CTX_LOG_T, CTX_LOG_V,
                                         CTX_MODE, CTX_PH_OFFSET, CTX_SECOND, CTX_SECOND_CONC, CTX_TITRANT,
                                         CTX_TITRANT_CONC,
                                         CTX_SETPOINT, CTX_TEMP_N, CTX_TEMP_T, CTX_TEMP_V, C_DOH_DT, C_LAST_PH,
                                         C_OPPOSITE, C_PH, C_PH_SLOPE, C_PKW, C_STEP_PH, C_TEMPERATURE, N_CACHE, PAR_ENTHALPY,
                                         PAR_W, WS_CACHE, WS_DPH_DY, WS_DZBAR_DT, WS_K, WS_PKA, WS_PKA2, WS_POPS,
                                         WS_VAR, WS_ZBAR)

MODE_HELD = 0
MODE_LOGGED = 1
MODE_FREE = 2


@njit(cache=True)
def make_workspace(n_species, n_sites, n_micro, n_mol, n_steps):
    """Scratch arrays of one run: (pka, k_of_t, pops, zbar, variance, conc,
    rate, cache, pka2, dzbar_dT, state_scratch, dph_dy, solved_state), in the state
    of :func:`reset_workspace`."""
    ws = (np.empty(max(n_sites, 1)), np.empty(max(n_steps, 1)), np.empty(max(n_micro, 1)),
          np.empty(max(n_mol, 1)), np.empty(max(n_mol, 1)), np.empty(n_species),
          np.empty(max(n_steps, 1)), np.empty(N_CACHE), np.empty(max(n_sites, 1)), np.empty(max(n_mol, 1)),
          np.empty(n_species + 3), np.empty(n_species + 3), np.empty(n_species + 3))
    reset_workspace(ws)
    return ws


@leaf_kernel
def reset_workspace(ws):
    """Bring the work arrays of :func:`make_workspace` to the state a run starts from
    (the arrays are made once per batch and serve its runs one after the other)."""
    cache = ws[WS_CACHE]
    cache[C_TEMPERATURE] = math.nan  # temperature of the cached T-dependent values
    cache[C_PKW] = math.nan  # pKw at that temperature
    cache[C_PH] = math.nan  # pH of the cached populations
    cache[C_LAST_PH] = 7.0       # last pH (warm start of the charge balance)
    cache[C_DOH_DT] = 0.0       # d[OH-]/dT at the held pH (temperature ramps)
    cache[C_PH_SLOPE] = 0.0       # d pH/dt of the current segment (logged pH) [1/s]
    cache[C_OPPOSITE] = 0.0       # 1 when the opposite titrant is the one dosed at the last rhs call
    cache[C_STEP_PH] = math.nan   # pH of ws[WS_SOLVED], the last solved step or stage point (free pH)
    for arr in (ws[WS_DZBAR_DT], ws[WS_DPH_DY]):
        for i in range(arr.shape[0]):
            arr[i] = 0.0


@leaf_kernel(inline="always")
def requirement_fraction(k, pops, react_species, react_mask, react_value, mol_micro_start, n_mol):
    """Fraction of reactant ``k``'s microstates that meet its site requirements
    (1 for a reactant without requirements or without sites)."""
    sp = react_species[k]
    if not (sp < n_mol and react_mask[k] != 0):
        return 1.0
    frac = 0.0
    m0 = mol_micro_start[sp]
    for st in range(mol_micro_start[sp + 1] - m0):
        if (st & react_mask[k]) == react_value[k]:
            frac += pops[m0 + st]
    return frac


@leaf_kernel(inline="always")
def reactant_factor(k, conc, pops, hydroxide, react_kind, react_species, react_mask, react_value,
                    mol_micro_start, n_mol):
    """Rate-law factor of reactant ``k``: concentration x fraction of its
    microstates that meet the site requirements [mol/L]; [OH-] for hydroxide;
    1 for water."""
    kind = react_kind[k]
    if kind == 2:
        return hydroxide
    if kind != 0:
        return 1.0
    return conc[react_species[k]] * requirement_fraction(k, pops, react_species, react_mask, react_value,
                                                         mol_micro_start, n_mol)


@leaf_kernel
def set_temperature(temperature, model, par, ws):
    """Bring the temperature-dependent values in ``ws`` to ``temperature`` [K]:
    pKw (water's, shifted by the medium's ``par[PAR_PKW_SHIFT]``), site pKa (van 't Hoff)
    and rate constants (Arrhenius [1]_)."""
    t_ref = model.t_ref
    (pka_ref, enthalpy, inter_w, log10_k, ea, pkw_shift) = par
    pka = ws[WS_PKA]
    k_of_t = ws[WS_K]
    cache = ws[WS_CACHE]
    if temperature == cache[C_TEMPERATURE]:
        return
    cache[C_TEMPERATURE] = temperature
    cache[C_PKW] = pkw(temperature) + pkw_shift
    for i in range(pka_ref.shape[0]):
        pka[i] = site_pka_at(pka_ref[i], enthalpy[i], temperature, t_ref)
    arrhenius = (1.0 / temperature - 1.0 / t_ref) * 1000.0 / GAS_CONSTANT
    for s in range(log10_k.shape[0]):
        # one exponential: k_ref exp(-Ea/R (1/T - 1/T_ref)) = exp(ln10 log10 k_ref - Ea/R (1/T - 1/T_ref))
        k_of_t[s] = math.exp(LN10 * log10_k[s] - ea[s] * arrhenius)
    cache[C_PH] = math.nan


@leaf_kernel
def time_speciation(t, model, par, ctx, temperature_slope, ws):
    """Speciation at time t of a held or logged pH run; returns the pH.

    Fills ``ws``: temperature-dependent values, populations, mean charges
    and, for a held pH under a temperature ramp, d zbar/dT of every molecule
    and d[OH-]/dT (``cache[C_DOH_DT]``, from the slope of pKw).  Nothing here
    depends on the amounts.
    """
    cache = ws[WS_CACHE]
    temperature = interpolate(ctx[CTX_TEMP_T], ctx[CTX_TEMP_V], ctx[CTX_TEMP_N], t)
    if ctx[CTX_MODE] == MODE_HELD:
        ph = ctx[CTX_SETPOINT] + ctx[CTX_PH_OFFSET]
    else:
        ph, slope = logged_ph(ctx[CTX_LOG_T], ctx[CTX_LOG_V], ctx[CTX_LOG_C], ctx[CTX_LOG_N], ctx[CTX_LOG_SMOOTH], t)
        ph += ctx[CTX_PH_OFFSET]
        if ctx[CTX_LOG_SMOOTH]:
            # a smoothed log's slope changes inside a segment: the one at t (a straight
            # piece's is the segment's, set by the run driver)
            cache[C_PH_SLOPE] = slope
    return speciation_at(temperature, ph, model, par, ctx[CTX_CONTROLLED], temperature_slope, ws)


@leaf_kernel
def speciation_at(temperature, ph, model, par, controlled, temperature_slope, ws):
    """The speciation of :func:`time_speciation` at a given temperature [K] and pH; returns the pH."""
    n_mol = model.n_mol
    pops = ws[WS_POPS]
    cache = ws[WS_CACHE]
    set_temperature(temperature, model, par, ws)
    if ph != cache[C_PH]:
        all_populations(ws[WS_PKA], model.mol_site_start, model.mol_micro_start, model.inter_a, model.inter_b,
                        par[PAR_W], model.mol_inter_start, n_mol, ph, pops)
        mean_charges(pops, model.micro_charge, model.micro_protons, model.mol_micro_start, n_mol, ws[WS_ZBAR],
                     ws[WS_VAR])
        cache[C_PH] = ph
    if controlled and temperature_slope != 0.0:
        mean_charge_temperature_slopes(pops, par[PAR_ENTHALPY], temperature, model.mol_site_start,
                                       model.mol_micro_start, model.micro_charge, n_mol, ws[WS_PKA2],
                                       ws[WS_DZBAR_DT])
        # d[OH-]/dT at fixed pH [mol/(L*K)]: [OH-] ln10 (-dpKw/dT), the slope by the chain rule (a central
        # difference of pKw carried its rounding: 1e-9 relative, more than the coefficient cubics allow)
        cache[C_DOH_DT] = -exp10(ph - cache[C_PKW]) * LN10 * pkw_slope(temperature)
    return ph


@leaf_kernel
def rhs(t, y, dy, model, par, ctx, feed_rate, feed_volume_rate, temperature_slope, ws):
    """Evaluate dy/dt at (t, y); returns the pH used (NaN on failure, dy = NaN).

    ``model`` and ``par`` are the tuples built by compile.py; ``ctx`` is the
    run context (mode, pH value, titrant, logs, temperature profile).
    """
    (n_mol, n_species, species_charge, mol_site_start, mol_micro_start, site_pka_q, site_dh_q,
     inter_a, inter_b, inter_q, mol_inter_start, micro_charge, micro_protons, step_logk_q,
     step_ea_q, react_start, react_kind, react_species, react_coef, react_mask, react_value,
     prod_start, prod_species, prod_coef, t_ref, substrate_mask, medium_q) = model
    (pka_ref, enthalpy, inter_w, log10_k, ea, pkw_shift) = par
    (mode, ph_value, ph_offset, titrant, titrant_conc, log_t, log_v, log_n, temp_t, temp_v, temp_n,
     second, second_conc, controlled, log_c, log_smooth) = ctx
    (pka, k_of_t, pops, zbar, variance, conc, rate, cache, pka2, dzdt, scratch, dph_dy, solved) = ws
    volume = y[n_species]
    if not (volume > 0.0):
        for i in range(dy.shape[0]):
            dy[i] = math.nan
        return math.nan
    if mode == MODE_FREE:
        set_temperature(interpolate(temp_t, temp_v, temp_n, t), model, par, ws)
        for j in range(n_species):
            conc[j] = y[j] / volume
        # the populations of the last solve are carried from its pH (cache[C_PH]; NaN when the
        # temperature moved since, set_temperature)
        ph, _ = solve_charge_balance_from(conc, species_charge, n_mol, n_species, pka, mol_site_start,
                                          mol_micro_start, inter_a, inter_b, inter_w, mol_inter_start,
                                          micro_charge, micro_protons, cache[C_PKW], cache[C_LAST_PH], pops, zbar,
                                          variance, cache[C_PH])
        if math.isnan(ph):
            for i in range(dy.shape[0]):
                dy[i] = math.nan
            cache[C_PH] = math.nan
            return math.nan
        cache[C_LAST_PH] = ph
        cache[C_PH] = ph
    else:
        ph = time_speciation(t, model, par, ctx, temperature_slope, ws)
        for j in range(n_species):
            conc[j] = y[j] / volume
    flux(y, dy, model, ctx, feed_rate, feed_volume_rate, temperature_slope, ph, cache[C_PKW], k_of_t, conc, pops,
         zbar, variance, dzdt, rate, cache, cache)
    return ph


@leaf_kernel(inline="always")
def flux(y, dy, model, ctx, feed_rate, feed_volume_rate, temperature_slope, ph, pkw_value, k_of_t, conc, pops, zbar,
         variance, dzdt, rate, cache, opposite):
    """dy/dt of :func:`rhs` at (y, ``conc``) with the speciation given (pH, populations, zbar, their variances and
    T slopes; ``cache``: d[OH-]/dT, a log's slope); ``opposite[C_OPPOSITE]``, ``rate``: the titrant, the rates."""
    md = model
    n_mol, n_species, species_charge, mol_micro_start = md.n_mol, md.n_species, md.species_charge, md.mol_micro_start
    react_start, react_kind, react_species, react_coef = md.react_start, md.react_kind, md.react_species, md.react_coef
    react_mask, react_value, prod_start, prod_species, prod_coef = (md.react_mask, md.react_value, md.prod_start,
                                                                    md.prod_species, md.prod_coef)
    titrant, titrant_conc, second, second_conc = (ctx[CTX_TITRANT], ctx[CTX_TITRANT_CONC], ctx[CTX_SECOND],
                                                  ctx[CTX_SECOND_CONC])
    n_steps = model.step_logk_q.shape[0]  # the work arrays hold at least one step
    volume = y[n_species]
    hydrogen = exp10(-ph)
    hydroxide = exp10(ph - pkw_value)
    # reaction rates [mol/(L*s)]
    for s in range(n_steps):
        r = k_of_t[s]
        for k in range(react_start[s], react_start[s + 1]):
            r *= reactant_factor(k, conc, pops, hydroxide, react_kind, react_species, react_mask, react_value,
                                 mol_micro_start, n_mol)
        rate[s] = r
    for j in range(n_species):
        dy[j] = feed_rate[j]
    for s in range(n_steps):
        vr = volume * rate[s]
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                dy[react_species[k]] -= react_coef[k] * vr
        for k in range(prod_start[s], prod_start[s + 1]):
            dy[prod_species[k]] += prod_coef[k] * vr
    dy[n_species] = feed_volume_rate
    dy[n_species + 1] = 0.0
    dy[n_species + 2] = 0.0
    if ctx[CTX_CONTROLLED]:
        excess = hydrogen - hydroxide
        num = excess * dy[n_species]
        for m in range(n_mol):
            num += zbar[m] * dy[m]
        for j in range(n_mol, n_species):
            num += species_charge[j] * dy[j]
        if temperature_slope != 0.0:
            # d/dt of sum n zbar(T) + V([H+] - Kw(T)/[H+]) at fixed pH (dzbar/dT and
            # d[OH-]/dT left in ws by time_speciation)
            dcharge = -volume * cache[C_DOH_DT]
            for m in range(n_mol):
                dcharge += y[m] * dzdt[m]
            num += temperature_slope * dcharge
        if ctx[CTX_MODE] == MODE_LOGGED and cache[C_PH_SLOPE] != 0.0:
            # d/dt through the logged pH: dzbar/dpH = -ln10 var(N), d([H+] - [OH-])/dpH = -ln10 ([H+] + [OH-])
            dcharge = volume * (hydrogen + hydroxide)
            for m in range(n_mol):
                dcharge += y[m] * variance[m]
            num -= cache[C_PH_SLOPE] * LN10 * dcharge
        q = -num / (species_charge[titrant] + excess / titrant_conc)
        opposite[C_OPPOSITE] = 0.0
        if q < 0.0 and second >= 0:
            q = -num / (species_charge[second] + excess / second_conc)
            dy[second] += q
            dy[n_species] += q / second_conc
            dy[n_species + 2] = q
            opposite[C_OPPOSITE] = 1.0
        else:
            dy[titrant] += q
            dy[n_species] += q / titrant_conc
            dy[n_species + 1] = q


@leaf_kernel
def charge_imbalance(y, model, ph, ws):
    """sum n zbar + sum z n_ion + V([H+] - [OH-]) [mol] with ``ws`` populations at ``ph``."""
    n_mol = model.n_mol
    n_species = model.n_species
    species_charge = model.species_charge
    zbar = ws[WS_ZBAR]
    cache = ws[WS_CACHE]
    total = y[n_species] * (exp10(-ph) - exp10(ph - cache[C_PKW]))
    for m in range(n_mol):
        total += y[m] * zbar[m]
    for j in range(n_mol, n_species):
        total += species_charge[j] * y[j]
    return total


@leaf_kernel
def analytic_jacobian(y, model, ws, ctx, jac, temperature_slope):
    """d(dy/dt)/dy for held or logged pH (constant or ramped temperature).

    Uses the populations and rates left in ``ws`` by the last :func:`rhs`
    call at the same (t, y): with the pH fixed, every rate is a product of
    concentrations times fractions that depend on (pH, T) at time t only, so
    the derivatives in y are exact.  Under a temperature ramp the held-pH
    titrant rate has the extra term slope * (sum n_m dzbar_m/dT - V d[OH-]/dT),
    linear in the amounts and the volume (dzbar/dT and d[OH-]/dT left in ``ws``
    by :func:`rhs`); a logged pH with a titrant adds the same with d pH/dt.
    Columns of the titrant-consumed states are zero.

    Free pH: the pH itself depends on the state through the charge balance
    g(pH, y) = 0, so J = J_fixed pH + (df/dpH) (dpH/dy) with
    dpH/dy_j = -(dg/dy_j) / (dg/dpH) (implicit function theorem) and
    dp_s/dpH = ln 10 * p_s * (<N> - N_s) for a microstate with N_s bound
    protons (Borkovec and Koper [2]_).
    """
    (n_mol, n_species, species_charge, mol_site_start, mol_micro_start, site_pka_q, site_dh_q,
     inter_a, inter_b, inter_q, mol_inter_start, micro_charge, micro_protons, step_logk_q,
     step_ea_q, react_start, react_kind, react_species, react_coef, react_mask, react_value,
     prod_start, prod_species, prod_coef, t_ref, substrate_mask, medium_q) = model
    (mode, ph_value, ph_offset, titrant, titrant_conc, log_t, log_v, log_n, temp_t, temp_v, temp_n,
     second, second_conc, controlled, log_c, log_smooth) = ctx
    (pka, k_of_t, pops, zbar, variance, conc, rate, cache, pka2, dzdt, scratch, dph_dy, solved) = ws
    n = y.shape[0]
    n_steps = step_logk_q.shape[0]
    volume = y[n_species]
    ph = cache[C_PH]
    hydroxide = exp10(ph - cache[C_PKW])
    for i in range(n):
        for j in range(n):
            jac[i, j] = 0.0
    for s in range(n_steps):
        n_conc = 0
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                n_conc += 1
        # d(dn/dt)/dV = sum nu r (1 - m)
        dv = rate[s] * (1.0 - n_conc)
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                jac[react_species[k], n_species] -= react_coef[k] * dv
        for k in range(prod_start[s], prod_start[s + 1]):
            jac[prod_species[k], n_species] += prod_coef[k] * dv
        # d r / d n_j: product of the other factors times this factor's slope
        for kk in range(react_start[s], react_start[s + 1]):
            if react_kind[kk] != 0:
                continue
            j = react_species[kk]
            d = k_of_t[s]
            for k in range(react_start[s], react_start[s + 1]):
                kind = react_kind[k]
                if kind == 0:
                    sp = react_species[k]
                    frac = requirement_fraction(k, pops, react_species, react_mask, react_value, mol_micro_start,
                                                n_mol)
                    if k == kk:
                        d *= frac / volume
                    else:
                        d *= conc[sp] * frac
                elif kind == 2:
                    d *= hydroxide
            d *= volume
            for k in range(react_start[s], react_start[s + 1]):
                if react_kind[k] == 0:
                    jac[react_species[k], j] -= react_coef[k] * d
            for k in range(prod_start[s], prod_start[s + 1]):
                jac[prod_species[k], j] += prod_coef[k] * d
    if controlled:
        excess = exp10(-ph) - hydroxide
        # the branch of the last rhs call at this state: titrant or opposite titrant
        dosed = titrant
        conc_dosed = titrant_conc
        row = n_species + 1
        if cache[C_OPPOSITE] != 0.0:
            dosed = second
            conc_dosed = second_conc
            row = n_species + 2
        denominator = species_charge[dosed] + excess / conc_dosed
        ph_slope = cache[C_PH_SLOPE] if mode == MODE_LOGGED else 0.0
        for j in range(n_species + 1):
            num = 0.0
            for i in range(n_mol):
                num += zbar[i] * jac[i, j]
            for i in range(n_mol, n_species):
                num += species_charge[i] * jac[i, j]
            if temperature_slope != 0.0:
                if j < n_mol:
                    num += temperature_slope * dzdt[j]
                elif j == n_species:
                    num -= temperature_slope * cache[C_DOH_DT]
            if ph_slope != 0.0:
                if j < n_mol:
                    num -= ph_slope * LN10 * variance[j]
                elif j == n_species:
                    num -= ph_slope * LN10 * (exp10(-ph) + hydroxide)
            dq = -num / denominator
            jac[dosed, j] += dq
            jac[n_species, j] += dq / conc_dosed
            jac[row, j] = dq
    if mode == 2:
        _free_ph_coupling(y, model, ws, jac, ph, hydroxide)


@leaf_kernel
def _free_ph_coupling(y, model, ws, jac, ph, hydroxide):
    """Add (df/dpH)(dpH/dy) to ``jac`` for the free-pH mode (see :func:`analytic_jacobian`)."""
    (n_mol, n_species, species_charge, mol_site_start, mol_micro_start, site_pka_q, site_dh_q,
     inter_a, inter_b, inter_q, mol_inter_start, micro_charge, micro_protons, step_logk_q,
     step_ea_q, react_start, react_kind, react_species, react_coef, react_mask, react_value,
     prod_start, prod_species, prod_coef, t_ref, substrate_mask, medium_q) = model
    (pka, k_of_t, pops, zbar, variance, conc, rate, cache, pka2, dzdt, scratch, dph_dy, solved) = ws
    n = y.shape[0]
    volume = y[n_species]
    # dg/dpH [mol/L per pH unit]
    dg = exp10(-ph) + hydroxide
    for m in range(n_mol):
        dg += conc[m] * variance[m]
    dg *= -LN10
    dfdph = scratch
    for i in range(n):
        dfdph[i] = 0.0
    for s in range(step_logk_q.shape[0]):
        dr = 0.0
        for kk in range(react_start[s], react_start[s + 1]):
            kind = react_kind[kk]
            # derivative of factor kk with respect to pH
            if kind == 0:
                sp = react_species[kk]
                if not (sp < n_mol and react_mask[kk] != 0):
                    continue
                m0 = mol_micro_start[sp]
                mean_n = 0.0
                for st in range(mol_micro_start[sp + 1] - m0):
                    mean_n += pops[m0 + st] * micro_protons[m0 + st]
                dfrac = 0.0
                for st in range(mol_micro_start[sp + 1] - m0):
                    if (st & react_mask[kk]) == react_value[kk]:
                        dfrac += LN10 * pops[m0 + st] * (mean_n - micro_protons[m0 + st])
                d = conc[sp] * dfrac
            elif kind == 2:
                d = LN10 * hydroxide
            else:
                continue
            for k in range(react_start[s], react_start[s + 1]):
                if k == kk:
                    continue
                d *= reactant_factor(k, conc, pops, hydroxide, react_kind, react_species, react_mask,
                                     react_value, mol_micro_start, n_mol)
            dr += d
        vdr = volume * k_of_t[s] * dr
        for k in range(react_start[s], react_start[s + 1]):
            if react_kind[k] == 0:
                dfdph[react_species[k]] -= react_coef[k] * vdr
        for k in range(prod_start[s], prod_start[s + 1]):
            dfdph[prod_species[k]] += prod_coef[k] * vdr
    # dg/dy_j: amounts enter as concentrations
    charge = 0.0
    for m in range(n_mol):
        charge += y[m] * zbar[m]
    for j in range(n_mol, n_species):
        charge += species_charge[j] * y[j]
    for j in range(n_species + 1):
        if j < n_mol:
            gy = zbar[j] / volume
        elif j < n_species:
            gy = species_charge[j] / volume
        else:
            gy = -charge / (volume * volume)
        dpdy = -gy / dg
        dph_dy[j] = dpdy
        if dpdy != 0.0:
            for i in range(n):
                jac[i, j] += dfdph[i] * dpdy
