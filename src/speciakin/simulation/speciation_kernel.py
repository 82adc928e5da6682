"""Compiled microstate speciation: populations, mean charges, charge balance.

Pure numba functions on the flat arrays of :class:`~speciakin.simulation.compile.CompiledModel`.
Microstate index bit i = 1 when site i of the molecule is protonated.  The
populations, mean charges and the charge-balance solve are written once, in
``chemistry.microstate_formulas`` (numba-compatible; the chemistry layer runs
the same solve for :func:`~speciakin.chemistry.equilibrium.solve_ph`), and
compiled in from there; this module adds the temperature dependence.

References
----------
.. [1] Borkovec, M. and Koper, G. J. M., "Ising models of polyprotic acids and
   bases", J. Phys. Chem. 1992, 96, 6038 (site-binding model, eq. for w(s)).
.. [2] van 't Hoff equation: d ln K / d(1/T) = -dH/R (any physical chemistry
   text, e.g. Atkins' Physical Chemistry, ch. "Chemical equilibrium").
"""

from __future__ import annotations

from speciakin.chemistry.microstate_formulas import (LN10, NEWTON_ACCEPT, NEWTON_LINEAR, all_populations, exp10,
                                                     log_sum_populations, mean_charges, molecule_populations,
                                                     solve_charge_balance,
                                                     solve_charge_balance_from)
from speciakin.chemistry.water import GAS_CONSTANT, vant_hoff
from speciakin.simulation.jit_options import leaf_kernel

__all__ = ["LN10", "NEWTON_ACCEPT", "NEWTON_LINEAR", "GAS_CONSTANT", "exp10", "site_pka_at", "molecule_populations",
           "log_sum_populations", "all_populations", "mean_charges", "solve_charge_balance",
           "solve_charge_balance_from", "mean_charge_temperature_slopes"]


@leaf_kernel
def site_pka_at(pka_ref, enthalpy, temperature, reference_temperature):
    """pKa at ``temperature`` by van 't Hoff [2]_.

    pKa(T) = pKa(T_ref) + dH / (R ln 10) * (1/T - 1/T_ref), dH in [kJ/mol], T in [K]
    (the formula is ``chemistry.water.vant_hoff``).
    """
    return vant_hoff(pka_ref, enthalpy, temperature, reference_temperature)


@leaf_kernel
def mean_charge_temperature_slopes(pops, enthalpy, temperature, mol_site_start, mol_micro_start, micro_charge,
                                   n_mol, dpka_dt, dzbar_dt):
    """d zbar / dT [1/K] of every molecule at fixed pH.

    With log10 w_s = sum_i s_i (pKa_i(T) - pH) - ..., and van 't Hoff
    d pKa_i/dT = -dH_i / (R ln 10 T^2), the populations move as
    d p_s/dT = ln 10 p_s (L_s - <L>), L_s = sum_i s_i d pKa_i/dT, so
    d zbar/dT = ln 10 Cov(z, L) = ln 10 (<z L> - <z><L>) (Borkovec and Koper [1]_).
    The covariance is summed over pairs of microstates, sum_{s<r} p_s p_r (z_s - z_r)
    (L_s - L_r), every term a product without cancellation: ``<z L> - <z><L>`` cancels
    where one microstate holds nearly all of the molecule (a phenol at pH 1.5: terms of 0.05
    for a covariance of 1e-9, whose rounding, 5e-9 of it, kept the coefficient cubics of a
    held pH under a temperature ramp from their 1e-9 check).  ``dpka_dt`` is scratch of
    length n_sites.
    """
    for i in range(enthalpy.shape[0]):
        dpka_dt[i] = -enthalpy[i] * 1000.0 / (GAS_CONSTANT * LN10 * temperature * temperature)
    for m in range(n_mol):
        s0 = mol_site_start[m]
        ns = mol_site_start[m + 1] - s0
        m0 = mol_micro_start[m]
        n_micro = 1 << ns
        cov = 0.0
        for a in range(n_micro):
            p_a = pops[m0 + a]
            z_a = micro_charge[m0 + a]
            for b in range(a + 1, n_micro):
                # L_a - L_b: the van 't Hoff slopes of the sites bound in one microstate and not the other
                dl = 0.0
                for i in range(ns):
                    dl += (((a >> i) & 1) - ((b >> i) & 1)) * dpka_dt[s0 + i]
                cov += p_a * pops[m0 + b] * (z_a - micro_charge[m0 + b]) * dl
        dzbar_dt[m] = LN10 * cov
