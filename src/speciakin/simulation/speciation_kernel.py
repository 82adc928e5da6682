"""Compiled microstate speciation: populations, mean charges, charge balance.

Pure numba functions on the flat arrays of :class:`~speciakin.simulation.compile.CompiledModel`.
Microstate index bit i = 1 when site i of the molecule is protonated.

References
----------
.. [1] Borkovec, M. and Koper, G. J. M., "Ising models of polyprotic acids and
   bases", J. Phys. Chem. 1992, 96, 6038 (site-binding model, eq. for w(s)).
.. [2] van 't Hoff equation: d ln K / d(1/T) = -dH/R (any physical chemistry
   text, e.g. Atkins' Physical Chemistry, ch. "Chemical equilibrium").
"""

from __future__ import annotations

import math

from speciakin.chemistry.water import GAS_CONSTANT, vant_hoff
from speciakin.simulation.jit_options import leaf_kernel

LN10 = math.log(10.0)


@leaf_kernel(inline="always")
def exp10(x):
    """10**x through exp (a power costs several times more)."""
    return math.exp(LN10 * x)


#: Newton step [pH units] below which the charge balance counts as solved
NEWTON_ACCEPT = 1e-13


@leaf_kernel
def site_pka_at(pka_ref, enthalpy, temperature, reference_temperature):
    """pKa at ``temperature`` by van 't Hoff [2]_.

    pKa(T) = pKa(T_ref) + dH / (R ln 10) * (1/T - 1/T_ref), dH in [kJ/mol], T in [K]
    (the formula is ``chemistry.water.vant_hoff``).
    """
    return vant_hoff(pka_ref, enthalpy, temperature, reference_temperature)


@leaf_kernel
def molecule_populations(pka, site_start, n_sites, inter_a, inter_b, inter_w,
                         inter_start, inter_end, ph, out, out_start):
    """Microstate populations of one molecule at ``ph`` (log-sum-exp) [1]_.

    log10 w(s) = sum_i s_i (pKa_i - pH) - sum_{i<j} s_i s_j W_ij.
    Writes 2**n_sites populations to ``out[out_start:]``; returns nothing.
    """
    n_micro = 1 << n_sites
    top = -1e300
    for s in range(n_micro):
        lw = 0.0
        for i in range(n_sites):
            if (s >> i) & 1:
                lw += pka[site_start + i] - ph
        for k in range(inter_start, inter_end):
            if ((s >> inter_a[k]) & 1) and ((s >> inter_b[k]) & 1):
                lw -= inter_w[k]
        out[out_start + s] = lw
        if lw > top:
            top = lw
    total = 0.0
    for s in range(n_micro):
        v = math.exp(LN10 * (out[out_start + s] - top))
        out[out_start + s] = v
        total += v
    inv_total = 1.0 / total
    for s in range(n_micro):
        out[out_start + s] *= inv_total


@leaf_kernel
def all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                    mol_inter_start, n_mol, ph, pops):
    """Populations of every molecule's microstates at ``ph`` into ``pops``."""
    for m in range(n_mol):
        s0 = mol_site_start[m]
        ns = mol_site_start[m + 1] - s0
        molecule_populations(pka, s0, ns, inter_a, inter_b, inter_w,
                             mol_inter_start[m], mol_inter_start[m + 1], ph, pops, mol_micro_start[m])


@leaf_kernel
def mean_charges(pops, micro_charge, micro_protons, mol_micro_start, n_mol, zbar, proton_variance):
    """Population-weighted mean charge of each molecule and the variance of its
    number of bound protons (= -d zbar / d pH / ln 10)."""
    for m in range(n_mol):
        z = 0.0
        p1 = 0.0
        p2 = 0.0
        for s in range(mol_micro_start[m], mol_micro_start[m + 1]):
            z += pops[s] * micro_charge[s]
            p1 += pops[s] * micro_protons[s]
            p2 += pops[s] * micro_protons[s] * micro_protons[s]
        zbar[m] = z
        proton_variance[m] = max(p2 - p1 * p1, 0.0)


@leaf_kernel
def solve_charge_balance(conc, species_charge, n_mol, n_species, pka, mol_site_start, mol_micro_start,
                         inter_a, inter_b, inter_w, mol_inter_start, micro_charge, micro_protons,
                         pkw_value, ph_guess, pops, zbar, proton_variance):
    """pH at which the solution is electroneutral (safeguarded Newton in pH).

    g(pH) = sum_m c_m zbar_m(pH) + sum_ions z c + [H+] - Kw/[H+] is strictly
    decreasing in pH; Newton steps are kept inside a bisection bracket.

    Returns
    -------
    float
        pH, or NaN when no root was found in [-3, 17]; ``pops``, ``zbar`` hold
        the speciation at that pH.
    """
    ion_charge = 0.0
    for j in range(n_mol, n_species):
        ion_charge += species_charge[j] * conc[j]
    kw = exp10(-pkw_value)
    lo = -3.0
    hi = 17.0
    ph = ph_guess
    if not (ph > lo and ph < hi):
        ph = 7.0
    for it in range(200):
        all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                        mol_inter_start, n_mol, ph, pops)
        mean_charges(pops, micro_charge, micro_protons, mol_micro_start, n_mol, zbar, proton_variance)
        h = exp10(-ph)
        g = ion_charge + h - kw / h
        dg = h + kw / h
        for m in range(n_mol):
            g += conc[m] * zbar[m]
            dg += conc[m] * proton_variance[m]
        dg *= -LN10
        if g > 0.0:
            lo = ph
        else:
            hi = ph
        step = -g / dg
        if abs(step) < NEWTON_ACCEPT:
            # Newton converges quadratically: the root is within about |step| of ph,
            # and pops, zbar are already those at ph
            if ph <= -2.999 or ph >= 16.999:
                return math.nan
            return ph
        new = ph + step
        if not (new > lo and new < hi):
            new = 0.5 * (lo + hi)
        if hi - lo < 1e-13:
            ph = new
            all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                            mol_inter_start, n_mol, ph, pops)
            mean_charges(pops, micro_charge, micro_protons, mol_micro_start, n_mol, zbar, proton_variance)
            if ph <= -2.999 or ph >= 16.999:
                return math.nan
            return ph
        ph = new
    return math.nan


@leaf_kernel
def mean_charge_temperature_slopes(pops, enthalpy, temperature, mol_site_start, mol_micro_start, micro_charge,
                                   n_mol, dpka_dt, dzbar_dt):
    """d zbar / dT [1/K] of every molecule at fixed pH.

    With log10 w_s = sum_i s_i (pKa_i(T) - pH) - ..., and van 't Hoff
    d pKa_i/dT = -dH_i / (R ln 10 T^2), the populations move as
    d p_s/dT = ln 10 p_s (L_s - <L>), L_s = sum_i s_i d pKa_i/dT, so
    d zbar/dT = ln 10 (<z L> - <z><L>) (Borkovec and Koper [1]_).
    ``dpka_dt`` is scratch of length n_sites.
    """
    for i in range(enthalpy.shape[0]):
        dpka_dt[i] = -enthalpy[i] * 1000.0 / (GAS_CONSTANT * LN10 * temperature * temperature)
    for m in range(n_mol):
        s0 = mol_site_start[m]
        ns = mol_site_start[m + 1] - s0
        m0 = mol_micro_start[m]
        mean_z = 0.0
        mean_l = 0.0
        mean_zl = 0.0
        for st in range(1 << ns):
            slope = 0.0
            for i in range(ns):
                if (st >> i) & 1:
                    slope += dpka_dt[s0 + i]
            p = pops[m0 + st]
            z = micro_charge[m0 + st]
            mean_z += p * z
            mean_l += p * slope
            mean_zl += p * z * slope
        dzbar_dt[m] = LN10 * (mean_zl - mean_z * mean_l)
