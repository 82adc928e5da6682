"""Synthetic closed-form truth for the decision-layer tests.

Two amine sites of an invented substrate compete for a reagent held at a
constant concentration (pseudo-first order).  With f_i the free-base fraction
of site i, the substrate decays as exp(-tau (k1 f1 + k2 f2)) and the two mono
products form in the fixed ratio k1 f1 : k2 f2 (parallel first-order
reactions; analytic solution, e.g. Atkins and de Paula, "Physical Chemistry",
parallel reactions).  Far below both pKa values the ratio of rates is
(k2/k1) 10^(pKa1 - pKa2), since f_i is proportional to 10^(pH - pKa_i) there
(Henderson-Hasselbalch limit of each site's free fraction).

Parameters (columns of a draw): log10 k1, log10 k2, pKa1, pKa2, log10 tau.
All numbers are invented.
"""

from __future__ import annotations

import numpy as np

#: Invented truth: alkyl-amine-like site 1 (pKa 9.4, fast), aryl-amine-like
#: site 2 (pKa 4.7, slow); desired product is PB (reaction at site 2).
TRUTH = np.array([3.0, 0.0, 9.4, 4.7, 2.6])
NAMES = ["S", "PA", "PB"]


def free_fraction(ph: np.ndarray, pka: np.ndarray) -> np.ndarray:
    """Free-base fraction of a basic site, 1 / (1 + 10^(pKa - pH))."""
    return 1.0 / (1.0 + 10.0 ** (pka - ph))


def closed_form(params: np.ndarray, ph: np.ndarray) -> np.ndarray:
    """(n_draws, n_ph, 3) mole % of S, PA, PB at the end."""
    p = np.atleast_2d(np.asarray(params, dtype=float))
    x = np.asarray(ph, dtype=float)[None, :]
    k1, k2 = 10.0 ** p[:, [0]], 10.0 ** p[:, [1]]
    r1 = k1 * free_fraction(x, p[:, [2]])
    r2 = k2 * free_fraction(x, p[:, [3]])
    tau = 10.0 ** p[:, [4]]
    s = 100.0 * np.exp(-tau * (r1 + r2))
    pa = (100.0 - s) * r1 / (r1 + r2)
    pb = (100.0 - s) * r2 / (r1 + r2)
    return np.stack([s, pa, pb], axis=-1)


def outcome_fn(draws: np.ndarray, ph: np.ndarray, factor: float | None = None) -> np.ndarray:
    """outcome_fn for compute_window; the optional factor replaces log10 tau."""
    d = np.array(draws, dtype=float)
    if factor is not None:
        d[:, 4] = factor
    return closed_form(d, ph)
