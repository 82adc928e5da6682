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

__all__ = ["LN10", "PH_LOW", "PH_HIGH", "NEWTON_ACCEPT", "NEWTON_LINEAR", "exp10", "molecule_populations",
           "log_sum_populations", "all_populations", "mean_charges", "reweight_populations", "solve_charge_balance",
           "solve_charge_balance_from", "REWEIGHT_MAX"]

LN10 = math.log(10.0)
#: Bracket of the charge-balance solve [pH]: a root outside it counts as none.
PH_LOW = -3.0
PH_HIGH = 17.0
#: Newton step [pH units] below which the charge balance counts as solved
NEWTON_ACCEPT = 1e-13
#: Newton step [pH units] below which the step is the last one: Newton converges
#: quadratically, so the new pH is within about |step|^2 of the root; the populations
#: are carried there (:func:`reweight_populations`) and the charge balance is not
#: evaluated again.
NEWTON_LINEAR = 1e-7
#: Largest pH move [pH units] over which populations are carried by
#: :func:`reweight_populations` instead of being evaluated again (a factor of at most
#: 10^(REWEIGHT_MAX N) on a microstate with N protons: far from overflow).
REWEIGHT_MAX = 1.0


@register_jitable(inline="always", _nrt=False)
def exp10(x):
    """10**x through exp (a power costs several times more)."""
    return math.exp(LN10 * x)


@register_jitable(_nrt=False)
def molecule_populations(pka, site_start, n_sites, inter_a, inter_b, inter_w,
                         inter_start, inter_end, ph, out, out_start):
    """Microstate populations of one molecule at ``ph`` [1]_.

    log10 w(s) = sum_i s_i (pKa_i - pH) - sum_{i<j} s_i s_j W_ij.
    Writes 2**n_sites populations to ``out[out_start:]``; returns nothing.

    The weights are built as products: relative to the favoured state f of the
    sites alone (site i protonated when pKa_i > pH), a microstate s weighs
    prod_(i: s_i != f_i) 10^-|pKa_i - pH| times 10^-W_ij for every interacting
    pair it holds, so one exponential per site and one per interaction are
    needed instead of one per microstate, and no weight exceeds the
    interaction factors (no overflow).  When the sum of the weights leaves the
    range of floating-point numbers (interactions of hundreds of pK units) the
    log-sum-exp form is used instead.
    """
    n_micro = 1 << n_sites
    favoured = 0
    for i in range(n_sites):
        a = pka[site_start + i] - ph
        if a > 0.0:
            favoured |= 1 << i
    # flip pattern t (bits that differ from the favoured state) is stored at out_start + (favoured ^ t)
    out[out_start + favoured] = 1.0
    for i in range(n_sites):
        out[out_start + (favoured ^ (1 << i))] = exp10(-abs(pka[site_start + i] - ph))
    for t in range(3, n_micro):
        high = 1
        while high * 2 <= t:
            high *= 2
        if high != t:
            out[out_start + (favoured ^ t)] = (out[out_start + (favoured ^ (t ^ high))]
                                               * out[out_start + (favoured ^ high)])
    for k in range(inter_start, inter_end):
        factor = exp10(-inter_w[k])
        both = (1 << inter_a[k]) | (1 << inter_b[k])
        for s in range(n_micro):
            if (s & both) == both:
                out[out_start + s] *= factor
    total = 0.0
    for s in range(n_micro):
        total += out[out_start + s]
    if not (total > 1e-280 and total < 1e280):
        log_sum_populations(pka, site_start, n_sites, inter_a, inter_b, inter_w, inter_start, inter_end, ph, out,
                            out_start)
        return
    inv_total = 1.0 / total
    for s in range(n_micro):
        out[out_start + s] *= inv_total


@register_jitable(_nrt=False)
def log_sum_populations(pka, site_start, n_sites, inter_a, inter_b, inter_w,
                        inter_start, inter_end, ph, out, out_start):
    """:func:`molecule_populations` by log-sum-exp (one exponential per microstate)."""
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
def reweight_populations(pops, micro_protons, mol_micro_start, n_mol, shift):
    """Carry ``pops`` exactly to a pH higher by ``shift``: a microstate's weight is 10^(-N_s pH)
    times factors free of the pH [1]_, so p_s <- p_s 10^(-N_s shift) / sum_r p_r 10^(-N_r shift)
    (one exponential for every molecule instead of one per site and interaction)."""
    x = exp10(-shift)
    for m in range(n_mol):
        total = 0.0
        for s in range(mol_micro_start[m], mol_micro_start[m + 1]):
            factor = 1.0
            for _ in range(int(micro_protons[s])):
                factor *= x
            pops[s] *= factor
            total += pops[s]
        inv_total = 1.0 / total
        for s in range(mol_micro_start[m], mol_micro_start[m + 1]):
            pops[s] *= inv_total


@register_jitable(_nrt=False)
def solve_charge_balance(conc, species_charge, n_mol, n_species, pka, mol_site_start, mol_micro_start,
                         inter_a, inter_b, inter_w, mol_inter_start, micro_charge, micro_protons,
                         pkw_value, ph_guess, pops, zbar, proton_variance):
    """pH at which the solution is electroneutral (:func:`solve_charge_balance_from`, nothing known
    of ``pops``)."""
    return solve_charge_balance_from(conc, species_charge, n_mol, n_species, pka, mol_site_start,
                                     mol_micro_start, inter_a, inter_b, inter_w, mol_inter_start, micro_charge,
                                     micro_protons, pkw_value, ph_guess, pops, zbar, proton_variance, math.nan)


@register_jitable(_nrt=False)
def solve_charge_balance_from(conc, species_charge, n_mol, n_species, pka, mol_site_start, mol_micro_start,
                              inter_a, inter_b, inter_w, mol_inter_start, micro_charge, micro_protons,
                              pkw_value, ph_guess, pops, zbar, proton_variance, pops_ph):
    """pH at which the solution is electroneutral (safeguarded Newton in pH).

    ``pops_ph``: the pH at which ``pops`` already hold the populations for
    these ``pka`` (NaN: none).  Populations within :data:`REWEIGHT_MAX` of
    a pH where they are known (that one, then each Newton iterate) are
    carried there exactly (:func:`reweight_populations`); others are
    evaluated in full.

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
    known = pops_ph
    for it in range(200):
        if abs(ph - known) <= REWEIGHT_MAX:
            reweight_populations(pops, micro_protons, mol_micro_start, n_mol, ph - known)
        else:
            all_populations(pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w,
                            mol_inter_start, n_mol, ph, pops)
        known = ph
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
        if abs(step) < NEWTON_LINEAR and lo < ph + step < hi:
            # the last step: populations carried to the root (see NEWTON_LINEAR)
            ph += step
            reweight_populations(pops, micro_protons, mol_micro_start, n_mol, step)
            mean_charges(pops, micro_charge, micro_protons, mol_micro_start, n_mol, zbar, proton_variance)
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
