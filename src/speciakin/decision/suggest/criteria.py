"""Decision quantities per parameter draw: pass/fail, spec margins, each
draw's window edges, credible widths, the undecided span and its expected
value after a run (see the package docstring for the criteria)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from speciakin.decision.design import choose_best_index
from speciakin.decision.specs import OPERATORS, Specification, evaluate_specs, specification_value

__all__ = ["DecisionDraws", "decision_draws", "draw_edges", "credible_width", "undecided_width",
           "expected_pass_variance", "moving_parameters", "METHODS", "MIN_GAIN_PH", "MIN_SD_SHRINKAGE",
           "CREDIBLE", "MOVE_CORRELATION"]

#: Update methods (see the module docstring).
METHODS = ("fisher", "linear", "preposterior")
#: A run "helps much" when it is expected to narrow an edge's credible width or
#: the undecided width by at least this much [pH] (about the resolution of a
#: plant pH probe and controller; common practice).
MIN_GAIN_PH = 0.1
#: Without a decision: a run helps when some parameter's sd shrinks by this share.
MIN_SD_SHRINKAGE = 0.2
#: Central credible interval of the window edges.
CREDIBLE = 0.90
#: A parameter "moves the outcomes" when |correlation| with an edge or with a
#: spec margin where the decision is open reaches this value over the draws
#: (a weak-correlation cut-off; common practice).
MOVE_CORRELATION = 0.2
#: Gauss-Hermite nodes for the expected pass variance.
_HERMITE = np.polynomial.hermite_e.hermegauss(40)



# ------------------------------------------------------------------ decision per draw
@dataclass
class DecisionDraws:
    """Pass/fail of the planned process per draw and set point.

    Attributes
    ----------
    ph
        (n_ph,) set points [pH], increasing.
    passes
        (n_draws, n_ph) bool: every specification met.
    margin
        (n_draws, n_ph) smallest signed margin to a spec limit, relative to the
        limit's size (positive = inside); NaN where the simulation failed.
    anchor
        Index of the current best set point (highest probability).
    """

    ph: np.ndarray
    passes: np.ndarray
    margin: np.ndarray
    anchor: int

    @property
    def probability(self) -> np.ndarray:
        return self.passes.mean(axis=0)


def decision_draws(ph: Sequence[float], outcomes: np.ndarray, specs: Sequence[Specification],
                   names: Sequence[str]) -> DecisionDraws:
    """Pass/fail and margins from outcomes (n_draws, n_ph, n_outcomes).

    The margin of one specification is ``(value - limit) / max(|limit|, 1)``
    for ``>``/``>=`` rules and the negative for ``<``/``<=``; the smallest over
    the specifications is positive exactly where all pass (up to ties at the
    limit).
    """
    x = np.asarray(ph, float)
    out = np.asarray(outcomes, float)
    if out.ndim != 3 or out.shape[1] != x.size:
        raise ValueError(f"outcomes must have shape (n_draws, {x.size}, n_outcomes), got {out.shape}")
    passes = evaluate_specs(out, specs, names)
    margin = np.full(passes.shape, np.inf)
    for spec in specs:
        value = specification_value(out, spec, names)
        sign = 1.0 if OPERATORS[spec.operator].function(1.0, 0.0) else -1.0
        with np.errstate(invalid="ignore"):
            m = sign * (value - spec.limit) / max(abs(spec.limit), 1.0)
        margin = np.minimum(margin, np.where(np.isfinite(m), m, np.nan))
    margin = np.where(np.isinf(margin), np.where(passes, 1.0, -1.0), margin)
    anchor = choose_best_index(passes.mean(axis=0))
    return DecisionDraws(x, passes, margin, 0 if anchor is None else anchor)


def _crossing(x0: float, m0: float, x1: float, m1: float) -> float:
    """Where the margin line through (x0, m0), (x1, m1) crosses 0 (midpoint if unknown)."""
    if np.isfinite(m0) and np.isfinite(m1) and m0 != m1:
        return float(np.clip(x0 + m0 * (x1 - x0) / (m0 - m1), min(x0, x1), max(x0, x1)))
    return 0.5 * (x0 + x1)


def draw_edges(decision: DecisionDraws) -> np.ndarray:
    """(n_draws, 2) low and high edge of each draw's window around the anchor.

    A draw's window is its run of passing set points containing the anchor;
    an edge between a passing and a failing point is the zero crossing of the
    linearly interpolated margin; a window reaching the end of the grid stops
    there.  A draw that fails at the anchor has a window of zero width at the
    anchor (both edges there).
    """
    x, passes, margin, a = decision.ph, decision.passes, decision.margin, decision.anchor
    n = passes.shape[0]
    edges = np.full((n, 2), x[a], float)
    for i in range(n):
        if not passes[i, a]:
            continue
        row = passes[i]
        lo = a
        while lo > 0 and row[lo - 1]:
            lo -= 1
        hi = a
        while hi < x.size - 1 and row[hi + 1]:
            hi += 1
        edges[i, 0] = x[0] if lo == 0 else _crossing(x[lo - 1], margin[i, lo - 1], x[lo], margin[i, lo])
        edges[i, 1] = x[-1] if hi == x.size - 1 else _crossing(x[hi], margin[i, hi], x[hi + 1],
                                                               margin[i, hi + 1])
    return edges


def _weighted_quantile(values: np.ndarray, weights: np.ndarray, q: float) -> float:
    order = np.argsort(values)
    v, w = values[order], weights[order]
    c = np.cumsum(w)
    c = c / c[-1]
    return float(np.interp(q, c - 0.5 * w / w.sum(), v))


def credible_width(values: np.ndarray, weights: np.ndarray | None = None,
                   credible: float = CREDIBLE) -> float:
    """Width of the central ``credible`` interval of ``values`` (optionally weighted)."""
    v = np.asarray(values, float)
    lo, hi = 0.5 * (1.0 - credible), 0.5 * (1.0 + credible)
    if weights is None:
        return float(np.quantile(v, hi) - np.quantile(v, lo))
    return _weighted_quantile(v, weights, hi) - _weighted_quantile(v, weights, lo)


def undecided_width(ph: np.ndarray, probability: np.ndarray | None = None, *,
                    pass_variance: np.ndarray | None = None) -> float:
    """``4 * integral p (1 - p) dpH`` by the trapezoid rule [pH].

    ``pass_variance`` (the variance p (1 - p) of the pass indicator, or its
    expected value after a run) may be given instead of ``probability``."""
    var = probability * (1.0 - probability) if pass_variance is None else pass_variance
    y = 4.0 * np.asarray(var, float)
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(ph)))


def expected_pass_variance(probability: np.ndarray, explained: np.ndarray) -> np.ndarray:
    """Expected ``p'(1 - p')`` after a run that explains a share of the margin's variance.

    The margin g at one set point is taken as Gaussian N(mu, s^2) with
    ``Phi(mu / s) = p`` (matches the current probability).  A run explaining
    the share ``r2`` of Var(g) leaves N(mu', s^2 (1 - r2)) with mu' spread as
    N(mu, r2 s^2) before the data are seen (pre-posterior of a linear-Gaussian
    update); ``p' = Phi(mu' / (s sqrt(1 - r2)))``.  The expectation over mu' is
    taken by Gauss-Hermite quadrature.  By the martingale property E[p'] = p.
    """
    from scipy.special import ndtr, ndtri

    p = np.asarray(probability, float)
    r2 = np.clip(np.asarray(explained, float), 0.0, 1.0 - 1e-9)
    out = p * (1.0 - p)
    open_ = (p > 0.0) & (p < 1.0)
    if not open_.any():
        return out
    z0 = ndtri(p[open_])[:, None]
    r = np.sqrt(r2[open_])[:, None]
    nodes, weights = _HERMITE
    z = (z0 + r * nodes[None, :]) / np.sqrt(1.0 - r * r)
    pp = ndtr(z)
    out[open_] = (pp * (1.0 - pp)) @ weights / weights.sum()
    return out


def moving_parameters(draws: np.ndarray, quantities: np.ndarray,
                      threshold: float = MOVE_CORRELATION) -> np.ndarray:
    """Indices of parameters whose |correlation| with any column of
    ``quantities`` (n_draws, q) reaches ``threshold`` (all, if none does)."""
    t = draws - draws.mean(axis=0)
    g = quantities - quantities.mean(axis=0)
    st, sg = t.std(axis=0), g.std(axis=0)
    keep_g = sg > 0
    if not keep_g.any():
        return np.arange(draws.shape[1])
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = (t.T @ g[:, keep_g]) / t.shape[0] / np.outer(st, sg[keep_g])
    idx = np.flatnonzero(np.nan_to_num(np.abs(corr)).max(axis=1) >= threshold)
    return idx if idx.size else np.arange(draws.shape[1])
