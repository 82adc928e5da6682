"""Microstate populations, mean charges and the charge-balance pH, written once.

These formulas are plain Python over flat arrays, in a form numba compiles
as it stands (``register_jitable``, without reference counting: they create
no arrays): the simulation kernel compiles them in (``simulation.speciation_kernel``
re-exports them), and :func:`speciakin.chemistry.equilibrium.solve_ph` runs
:func:`solve_charge_balance` as Python after checking its input and laying
the molecules out in the layout below.

Layout (the kernel's, ``simulation.layout.KernelModel``): the sites of
molecule m are ``pka[mol_site_start[m]:mol_site_start[m + 1]]``, its
microstates ``mol_micro_start[m]`` onwards (index bit i = site i
protonated), its site-pair interactions ``inter_a/inter_b/inter_w[k]`` for k
in ``mol_inter_start[m]:mol_inter_start[m + 1]`` (site numbers within the
molecule, W [pK units]); ``micro_charge`` and ``micro_protons`` per microstate.

References
----------
.. [1] Borkovec, M. and Koper, G. J. M., "Ising models of polyprotic acids and
   bases", J. Phys. Chem. 1992, 96, 6038 (site-binding model, eq. for w(s)).
.. [2] Press, W. H. et al., "Numerical Recipes", 3rd ed., 2007, section 9.4
   (Newton-Raphson safeguarded by bisection).
.. [3] Butler, J. N., "Ionic Equilibrium: Solubility and pH Calculations",
   Wiley 1998 (charge balance).
"""

from __future__ import annotations

import math

from numba.extending import register_jitable

__all__ = ["LN10", "PH_LOW", "PH_HIGH", "exp10", "molecule_populations", "all_populations", "mean_charges",
           "solve_charge_balance"]

LN10 = math.log(10.0)
#: Bracket of the charge-balance solve [pH]: a root outside it counts as none.
PH_LOW = -3.0
PH_HIGH = 17.0
#: Newton step [pH units] below which the charge balance counts as solved
NEWTON_ACCEPT = 1e-13


@register_jitable(inline="always", _nrt=False)
def exp10(x):
    """10**x through exp (a power costs several times more)."""
    return math.exp(LN10 * x)


@register_jitable(_nrt=False)
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


@register_jitable(_nrt=False)
def all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                    mol_inter_start, n_mol, ph, pops):
    """Populations of every molecule's microstates at ``ph`` into ``pops``."""
    for m in range(n_mol):
        s0 = mol_site_start[m]
        ns = mol_site_start[m + 1] - s0
        molecule_populations(pka, s0, ns, inter_a, inter_b, inter_w,
                             mol_inter_start[m], mol_inter_start[m + 1], ph, pops, mol_micro_start[m])


@register_jitable(_nrt=False)
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


@register_jitable(_nrt=False)
def solve_charge_balance(conc, species_charge, n_mol, n_species, pka, mol_site_start, mol_micro_start,
                         inter_a, inter_b, inter_w, mol_inter_start, micro_charge, micro_protons,
                         pkw_value, ph_guess, pops, zbar, proton_variance):
    """pH at which the solution is electroneutral (safeguarded Newton in pH).

    g(pH) = sum_m c_m zbar_m(pH) + sum_ions z c + [H+] - Kw/[H+] is strictly
    decreasing in pH; Newton steps are kept inside a bisection bracket.

    Returns
    -------
    (float, int)
        pH, or NaN when no root was found in [-3, 17] (:data:`PH_LOW`,
        :data:`PH_HIGH`), and the number of Newton or bisection steps;
        ``pops``, ``zbar``, ``proton_variance`` hold the speciation at that pH.
    """
    ion_charge = 0.0
    for j in range(n_mol, n_species):
        ion_charge += species_charge[j] * conc[j]
    kw = exp10(-pkw_value)
    lo = PH_LOW
    hi = PH_HIGH
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
                return math.nan, it + 1
            return ph, it + 1
        new = ph + step
        if not (new > lo and new < hi):
            new = 0.5 * (lo + hi)
        if hi - lo < 1e-13:
            ph = new
            all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                            mol_inter_start, n_mol, ph, pops)
            mean_charges(pops, micro_charge, micro_protons, mol_micro_start, n_mol, zbar, proton_variance)
            if ph <= -2.999 or ph >= 16.999:
                return math.nan, it + 1
            return ph, it + 1
        ph = new
    return math.nan, 200


