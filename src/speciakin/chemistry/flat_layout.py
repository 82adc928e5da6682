"""Molecules laid out as flat arrays for the shared charge-balance solve.

:func:`speciakin.chemistry.equilibrium.solve_ph` checks its input and then
runs :func:`speciakin.chemistry.microstate_formulas.solve_charge_balance`
(the formula the simulation kernel compiles) on the layout built here: the
one described in :mod:`speciakin.chemistry.microstate_formulas`.
"""

from __future__ import annotations

import numpy as np

from speciakin.chemistry import microstates as ms

__all__ = ["flat_sites"]


def flat_sites(species, lg1):
    """The molecules laid out for :func:`~speciakin.chemistry.microstate_formulas.solve_charge_balance`,
    with the activity coefficients of ``lg1`` folded in (see :func:`speciakin.chemistry.equilibrium.solve_ph`).

    Returns (pka, mol_site_start, mol_micro_start, inter_a, inter_b, inter_w, mol_inter_start,
    micro_charge, micro_protons): every site pair is listed (W = 0 where none is given).
    """
    k_davies = -lg1
    pka, site_start, micro_start, pair_a, pair_b, pair_w, pair_start, charge, protons = \
        [], [0], [0], [], [], [], [0], [], []
    for sp in species:
        n = sp.n_sites
        z0 = float(sp.fixed_charge) + float(np.sum(sp.charge_deprotonated))
        # Davies: -log10 gamma(z) = K z^2 with z = z0 + N; K (z0 + N)^2 = const + K (2 z0 + 1) N
        # + 2 K (pairs of bound protons), so the activities shift every pKa and every pair's W
        pka.extend(np.asarray(sp.pka, dtype=float) + (k_davies * (2.0 * z0 + 1.0) + lg1))
        for i in range(n):
            for j in range(i + 1, n):
                pair_a.append(i)
                pair_b.append(j)
                pair_w.append(float(sp.interaction[i, j]) - 2.0 * k_davies)
        charge.extend(ms.microstate_charges(sp.charge_protonated, sp.charge_deprotonated, sp.fixed_charge)
                      if n else [z0])
        protons.extend(ms.bound_protons(n))
        site_start.append(len(pka))
        micro_start.append(len(charge))
        pair_start.append(len(pair_a))
    as_int = lambda x: np.asarray(x, dtype=np.int64)  # noqa: E731
    return (np.asarray(pka, dtype=float), as_int(site_start), as_int(micro_start), as_int(pair_a), as_int(pair_b),
            np.asarray(pair_w, dtype=float), as_int(pair_start), np.asarray(charge, dtype=float),
            np.asarray(protons, dtype=float))
