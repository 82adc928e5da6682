"""Which run to do next: expected shrinkage of the decision's uncertainty.

Pure functions on plain arrays.  The caller supplies, for the current
parameter draws (posterior samples, or multivariate-normal draws from the
least-squares covariance):

* the predicted observables of each candidate run, per draw (``(n_draws, m)``
  per candidate), and the campaign's error model as a function giving the
  standard deviation of an observation from its value;
* optionally the decision: pass/fail and a continuous spec margin of the
  planned process per draw and set-point pH (:func:`decision_draws`).

Criteria (each an expected value over the data the candidate would give)
------------------------------------------------------------------------
(a1) **window-edge credible width**: every draw has its own window, the pass
     interval around the current best set point (:func:`draw_edges`); the
     width of the central ``credible`` interval of its low and of its high
     edge over the draws is the uncertainty of the window edges [pH].
(a2) **undecided width**: ``U = 4 * integral p(pH) (1 - p(pH)) dpH`` [pH],
     the span of set points whose pass/fail is still open (p = 0.5 counts
     fully, p = 0 or 1 not at all).  Its reduction is the expected reduction
     of the variance of the pass indicator near the edges.
(b)  **D-optimal gain** for the parameters that move the outcomes (D_s
     optimality): ``0.5 * log(det S_ss / det S'_ss)`` [nats], the expected
     information gain of a Gaussian posterior (Atkinson, Donev and Tobias,
     "Optimum Experimental Designs, with SAS", Oxford 2007, ch. 10-11;
     Chaloner and Verdinelli, Statist. Sci. 1995, 10, 273, section 2.2).

Methods
-------
``"linear"`` (default): a linear-Gaussian (Laplace) update of the posterior
covariance per candidate, ``S' = S - C_gy (C_yy + R)^-1 C_yg``, with the
covariances taken over the draws (the Bayes-linear adjusted variance,
Goldstein and Wooff, "Bayes Linear Statistics", Wiley 2007, ch. 3).  For a
model linear in the parameters this is exactly the Fisher-information update
``(S^-1 + J^T R^-1 J)^-1`` (Woodbury identity); the draws give the
linearisation over the posterior instead of at one point (statistical
linearisation, as in ensemble Kalman methods: Evensen, "Data Assimilation",
Springer 2009, ch. 9).  Credible widths scale with the standard deviation
ratio; the expected pass uncertainty after the run uses a Gaussian margin
(:func:`expected_pass_variance`).

``"preposterior"``: pre-posterior simulation (Chaloner and Verdinelli 1995,
section 1; Ryan et al., Int. Stat. Rev. 2016, 84, 128): simulate the run's data
from draws with the campaign's noise, update the draws by importance
reweighting with the campaign's likelihood (the draw that made the data left
out), and measure the criteria on the reweighted draws; averaged over the
simulated data sets.  Slower to converge, no linearisation; the check.

Batches of k runs are chosen greedily: the best single run, then the run
that adds most given the first, and so on (the joint update of the chosen
runs, never a sum of single gains; greedy choice of a D-optimal batch is
standard, Atkinson et al. 2007, section 11.4, from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable, Sequence

import numpy as np

from speciakin.decision.design import choose_best_index
from speciakin.decision.specs import OPERATORS, Specification, evaluate_specs, specification_value

__all__ = ["DecisionDraws", "decision_draws", "draw_edges", "credible_width", "undecided_width",
           "expected_pass_variance", "moving_parameters", "CandidateScore", "SuggestResult",
           "rank_candidates", "METHODS", "MIN_GAIN_PH", "MIN_SD_SHRINKAGE", "CREDIBLE", "MOVE_CORRELATION"]

#: Update methods (see the module docstring).
METHODS = ("linear", "preposterior")
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

NoiseFunction = Callable[[int, np.ndarray], np.ndarray]


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


# ------------------------------------------------------------------ results
@dataclass
class CandidateScore:
    """Expected effect of one candidate run (or of a batch ending with it).

    Widths [pH]; ``sd_shrinkage`` and ``volume_shrinkage`` are shares [-].
    """

    index: int
    conditions: dict[str, Any]
    edge_width_before: tuple[float, float] | None
    edge_width_after: tuple[float, float] | None
    undecided_before: float | None
    undecided_after: float | None
    d_gain: float
    volume_shrinkage: float
    sd_shrinkage: dict[str, float]
    reason: str = ""
    effective_draws: float | None = None

    @property
    def edge_reduction(self) -> float:
        if self.edge_width_before is None:
            return 0.0
        return float(sum(b - a for b, a in zip(self.edge_width_before, self.edge_width_after)))

    @property
    def undecided_reduction(self) -> float:
        if self.undecided_before is None:
            return 0.0
        return float(self.undecided_before - self.undecided_after)

    def sort_key(self) -> tuple[float, float, float]:
        return (round(self.edge_reduction, 2), round(self.undecided_reduction, 2), self.d_gain)

    def to_dict(self) -> dict[str, Any]:
        edges = None
        if self.edge_width_before is not None:
            edges = {side: {"before": b, "after": a, "reduction": b - a} for side, b, a in
                     zip(("low", "high"), self.edge_width_before, self.edge_width_after)}
        return {
            "conditions": dict(self.conditions),
            "expected": {
                "window_edge_credible_width_pH": edges,
                "undecided_width_pH": None if self.undecided_before is None else {
                    "before": self.undecided_before, "after": self.undecided_after,
                    "reduction": self.undecided_reduction},
                "d_optimal": {"gain_nats": self.d_gain, "volume_shrinkage": self.volume_shrinkage},
                "parameter_sd_shrinkage": dict(self.sd_shrinkage),
            },
            "effective_draws": self.effective_draws,
            "reason": self.reason,
        }


@dataclass
class SuggestResult:
    """Ranked candidates, the greedy batch and whether any run helps much."""

    candidates: list[CandidateScore]
    batch: list[CandidateScore]
    helps: bool
    message: str
    method: str
    parameter_names: list[str]
    moving: list[str]
    credible: float = CREDIBLE
    min_gain: float = MIN_GAIN_PH
    has_decision: bool = True
    notes: list[str] = field(default_factory=list)
    check: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (the ``suggest.json`` body; NaN left for the writer to clean)."""
        return {
            "schema": "speciakin.suggest/1",
            "method": self.method,
            "helps": self.helps,
            "message": self.message,
            "thresholds": {"min_gain_pH": self.min_gain, "min_sd_shrinkage": MIN_SD_SHRINKAGE,
                           "credible": self.credible, "moves_outcome_correlation": MOVE_CORRELATION},
            "parameters": list(self.parameter_names),
            "parameters_that_move_outcomes": list(self.moving),
            "decision_criteria": self.has_decision,
            "candidates": [dict(rank=i + 1, **c.to_dict()) for i, c in enumerate(self.candidates)],
            "batch": [dict(order=i + 1, candidate=c.index, **c.to_dict()) for i, c in enumerate(self.batch)],
            "notes": list(self.notes),
            "check": self.check,
        }

    def by_ph(self) -> dict[str, Any]:
        """Per candidate set point, the best expected reductions over the other
        conditions: ``ph``, ``edge_low``, ``edge_high``, ``undecided`` [pH]
        (None without a decision) and ``d_gain`` [nats] (arrays, pH increasing)."""
        ph = sorted({c.conditions["setpoint_pH"] for c in self.candidates})
        rows = {k: [] for k in ("edge_low", "edge_high", "undecided", "d_gain")}
        for x in ph:
            group = [c for c in self.candidates if c.conditions["setpoint_pH"] == x]
            rows["d_gain"].append(max(c.d_gain for c in group))
            if self.has_decision:
                for k, side in (("edge_low", 0), ("edge_high", 1)):
                    rows[k].append(max(c.edge_width_before[side] - c.edge_width_after[side] for c in group))
                rows["undecided"].append(max(c.undecided_reduction for c in group))
        out: dict[str, Any] = {"ph": np.array(ph)}
        for k, v in rows.items():
            out[k] = np.array(v) if v else None
        return out

    def report(self, top: int = 5) -> str:
        lines = ["Suggested next runs", "===================", "", self.message, ""]
        for i, c in enumerate(self.candidates[:top]):
            lines.append(f"{i + 1}. {_conditions_text(c.conditions)}: {c.reason}")
        if len(self.batch) > 1:
            lines += ["", f"Batch of {len(self.batch)} runs chosen together (greedy):"]
            lines += [f"  {i + 1}. {_conditions_text(c.conditions)}" for i, c in enumerate(self.batch)]
        if self.notes:
            lines += ["", "Notes"] + [f"- {n}" for n in self.notes]
        return "\n".join(lines)


def _ph(value: float) -> str:
    """Two decimals without a negative zero."""
    return f"{round(value, 2) + 0.0:.2f}"


def _conditions_text(conditions: dict[str, Any]) -> str:
    parts = [f"pH {conditions['setpoint_pH']:.2f}"]
    for key, fmt in (("temperature_C", "{:g} C"), ("equivalents", "{:g} eq"),
                     ("dosing_time_min", "dosing {:g} min")):
        if conditions.get(key) is not None:
            parts.append(fmt.format(conditions[key]))
    return ", ".join(parts)


# ------------------------------------------------------------------ the two updates
class _Prior:
    """Quantities over the draws that every candidate is judged against."""

    def __init__(self, draws: np.ndarray, decision: DecisionDraws | None, credible: float) -> None:
        self.theta = draws
        self.decision = decision
        self.credible = credible
        n = draws.shape[0]
        parts = [draws]
        self.edges = None
        if decision is not None:
            self.edges = draw_edges(decision)
            self.p = decision.probability
            margin = np.nan_to_num(decision.margin, nan=-1.0)
            parts += [self.edges, margin]
        g = np.concatenate(parts, axis=1)
        self.g_centered = g - g.mean(axis=0)
        self.g_var = (self.g_centered ** 2).sum(axis=0) / (n - 1)
        self.n_par = draws.shape[1]
        self.cov = self.g_centered[:, :self.n_par].T @ self.g_centered[:, :self.n_par] / (n - 1)

    def widths(self) -> tuple[float, float] | None:
        if self.edges is None:
            return None
        return tuple(credible_width(self.edges[:, k], credible=self.credible) for k in (0, 1))

    def undecided(self) -> float | None:
        return None if self.decision is None else undecided_width(self.decision.ph, self.p)


def _linear(prior: _Prior, y: np.ndarray, noise_var: np.ndarray):
    """Adjusted variances of every quantity and adjusted parameter covariance."""
    n = y.shape[0]
    yc = y - y.mean(axis=0)
    syy = yc.T @ yc / (n - 1) + np.diag(noise_var)
    chol = np.linalg.cholesky(syy + 1e-12 * np.trace(syy) / syy.shape[0] * np.eye(syy.shape[0]))
    a = np.linalg.solve(chol, yc.T) / (n - 1)           # (m, n)
    b = a @ prior.g_centered                             # (m, q)
    var_after = np.maximum(prior.g_var - (b * b).sum(axis=0), 0.0)
    bt = b[:, :prior.n_par]
    cov_after = prior.cov - bt.T @ bt
    return var_after, cov_after


def _log_det_ratio(before: np.ndarray, after: np.ndarray) -> float:
    s0, l0 = np.linalg.slogdet(before)
    s1, l1 = np.linalg.slogdet(after)
    if s0 <= 0 or s1 <= 0:
        return 0.0
    return float(0.5 * (l0 - l1))


def _score_linear(prior, y, noise_var, moving):
    var_after, cov_after = _linear(prior, y, noise_var)
    npar = prior.n_par
    sd_ratio = np.sqrt(np.divide(var_after[:npar], prior.g_var[:npar], out=np.ones(npar),
                                 where=prior.g_var[:npar] > 0))
    d_gain = _log_det_ratio(prior.cov[np.ix_(moving, moving)], cov_after[np.ix_(moving, moving)])
    widths_after = undecided_after = None
    if prior.edges is not None:
        ratio = np.sqrt(np.divide(var_after[npar:npar + 2], prior.g_var[npar:npar + 2], out=np.ones(2),
                                  where=prior.g_var[npar:npar + 2] > 0))
        widths_after = tuple(w * r for w, r in zip(prior.widths(), ratio))
        mv, mv_after = prior.g_var[npar + 2:], var_after[npar + 2:]
        explained = np.divide(mv - mv_after, mv, out=np.zeros_like(mv), where=mv > 0)
        q = expected_pass_variance(prior.p, explained)
        undecided_after = undecided_width(prior.decision.ph, pass_variance=q)
    return widths_after, undecided_after, d_gain, 1.0 - sd_ratio, None


def _score_preposterior(prior, y, noise: Callable[[np.ndarray], np.ndarray], moving, rng, n_sim):
    n = y.shape[0]
    ok = np.all(np.isfinite(y), axis=1)
    sources = rng.choice(np.flatnonzero(ok), size=min(n_sim, int(ok.sum())), replace=False)
    w_all, ess, widths, undecided, dgain, sd = [], [], [], [], [], []
    base_cov = prior.cov[np.ix_(moving, moving)]
    for s in sources:
        data = y[s] + noise(y[s][None, :])[0] * rng.standard_normal(y.shape[1])
        sigma = noise(data[None, :])[0]
        with np.errstate(invalid="ignore"):
            ll = -0.5 * np.sum(((y - data) / sigma) ** 2, axis=1)
        ll[~np.isfinite(ll)] = -np.inf
        ll[s] = -np.inf                                   # leave the generating draw out
        w = np.exp(ll - ll.max())
        w /= w.sum()
        ess.append(1.0 / np.sum(w * w))
        theta_mean = w @ prior.theta
        tc = prior.theta - theta_mean
        cov = (tc * w[:, None]).T @ tc
        dgain.append(_log_det_ratio(base_cov, cov[np.ix_(moving, moving)]))
        sd.append(np.sqrt(np.divide(np.diag(cov), np.diag(prior.cov), out=np.ones(prior.n_par),
                                    where=np.diag(prior.cov) > 0)))
        if prior.edges is not None:
            widths.append([credible_width(prior.edges[:, k], w, prior.credible) for k in (0, 1)])
            p = w @ prior.decision.passes
            undecided.append(undecided_width(prior.decision.ph, p))
        w_all.append(w)
    widths_after = tuple(np.mean(widths, axis=0)) if widths else None
    undecided_after = float(np.mean(undecided)) if undecided else None
    return widths_after, undecided_after, float(np.mean(dgain)), 1.0 - np.mean(sd, axis=0), float(np.mean(ess))


# ------------------------------------------------------------------ ranking
def _reason(score: CandidateScore, names: Sequence[str], has_decision: bool) -> str:
    parts = []
    if has_decision and score.edge_width_before is not None:
        for side, b, a in zip(("low", "high"), score.edge_width_before, score.edge_width_after):
            if b - a >= 0.01:
                parts.append(f"narrow the {int(round(100 * CREDIBLE))} % credible interval of the {side} "
                             f"window edge from {b:.2f} to {a:.2f} pH")
        if score.undecided_reduction >= 0.01:
            parts.append(f"shrink the span of set points whose pass/fail is undecided from "
                         f"{score.undecided_before:.2f} to {score.undecided_after:.2f} pH")
    best = max(range(len(names)), key=lambda k: score.sd_shrinkage[names[k]]) if names else None
    if best is not None and score.sd_shrinkage[names[best]] >= 0.05:
        parts.append(f"mostly inform {names[best]} (standard deviation "
                     f"-{100 * score.sd_shrinkage[names[best]]:.0f} %)")
    if not parts:
        return "expected to change little: the current runs already say what this run would"
    return "expected to " + "; ".join(parts)


def rank_candidates(draws: np.ndarray, predictions: Sequence[np.ndarray], noise_sd: NoiseFunction,
                    conditions: Sequence[dict[str, Any]], *, parameter_names: Sequence[str],
                    decision: DecisionDraws | None = None, method: str = "linear", batch: int = 1,
                    min_gain: float = MIN_GAIN_PH, credible: float = CREDIBLE, n_simulated: int = 100,
                    seed: int | None = 0,
                    progress: Callable[[int, int], None] | None = None) -> SuggestResult:
    """Rank candidate runs by the expected shrinkage of the decision's uncertainty.

    Parameters
    ----------
    draws
        (n_draws, p) parameter draws (fitted scale).
    predictions
        Per candidate, (n_draws, m_c) predicted observables; NaN = failed
        simulation (such draws are left out of that candidate's update).
    noise_sd
        ``noise_sd(c, values)`` -> standard deviations of candidate ``c``'s
        observations (same shape as ``values`` (k, m_c)), the campaign's
        error model.
    conditions
        Per candidate, its conditions (at least ``setpoint_pH``).
    parameter_names
        Names of the p parameters.
    decision
        Pass/fail and margins of the planned process per draw
        (:func:`decision_draws`); None = parameter criterion only.
    method
        ``"linear"`` or ``"preposterior"``.
    batch
        Number of runs to choose together (greedy).
    min_gain
        Threshold [pH] below which no candidate "helps much".
    credible
        Central credible level of the edge intervals.
    n_simulated
        Simulated data sets per candidate (pre-posterior).
    seed
        Seed of the simulated noise.
    progress
        ``progress(done, total)`` per candidate evaluation.

    Returns
    -------
    SuggestResult
        Candidates best first, the greedy batch and the verdict.
    """
    theta = np.asarray(draws, float)
    if theta.ndim != 2 or theta.shape[0] < 10:
        raise ValueError("draws must have shape (n_draws >= 10, n_params)")
    if method not in METHODS:
        raise ValueError(f"method must be one of {METHODS}, got {method!r}")
    if not predictions or len(predictions) != len(conditions):
        raise ValueError("one prediction array and one conditions dict per candidate, at least one")
    if batch < 1:
        raise ValueError("batch must be >= 1")
    names = list(parameter_names)
    prior = _Prior(theta, decision, credible)
    notes: list[str] = []
    if decision is not None:
        moving = moving_parameters(theta, np.concatenate(
            [prior.edges, np.nan_to_num(decision.margin[:, (prior.p > 0) & (prior.p < 1)], nan=-1.0)], axis=1))
    else:
        moving = np.arange(theta.shape[1])
    preds = [np.asarray(y, float) for y in predictions]
    rng = np.random.default_rng(seed)
    total = len(preds) * min(batch, len(preds))
    done = [0]

    def evaluate(chosen: list[int]) -> CandidateScore:
        y = np.concatenate([preds[c] for c in chosen], axis=1)
        ok = np.all(np.isfinite(y), axis=1)
        if method == "linear":
            sub = prior if ok.all() else _Prior(theta[ok], None if decision is None else DecisionDraws(
                decision.ph, decision.passes[ok], decision.margin[ok], decision.anchor), credible)
            var = np.concatenate([np.mean(noise_sd(c, preds[c][ok]) ** 2, axis=0) for c in chosen])
            res = _score_linear(sub, y[ok], var, moving)
        else:
            def noise(values):
                cols = np.cumsum([0] + [preds[c].shape[1] for c in chosen])
                return np.concatenate([noise_sd(c, values[:, cols[i]:cols[i + 1]])
                                       for i, c in enumerate(chosen)], axis=1)
            res = _score_preposterior(prior, y, noise, moving, rng, n_simulated)
        widths_after, undecided_after, d_gain, shrink, ess = res
        done[0] += 1
        if progress is not None:
            progress(done[0], total)
        score = CandidateScore(chosen[-1], dict(conditions[chosen[-1]]), prior.widths(), widths_after,
                               prior.undecided(), undecided_after, d_gain, float(1.0 - math.exp(-d_gain)),
                               {n: float(s) for n, s in zip(names, shrink)}, effective_draws=ess)
        score.reason = _reason(score, names, decision is not None)
        return score

    singles = [evaluate([c]) for c in range(len(preds))]
    ranked = sorted(singles, key=lambda s: s.sort_key(), reverse=True)
    chosen = [ranked[0].index]
    picked = [ranked[0]]
    while len(chosen) < min(batch, len(preds)):
        options = [evaluate(chosen + [c]) for c in range(len(preds)) if c not in chosen]
        best = max(options, key=lambda s: s.sort_key())
        chosen.append(best.index)
        picked.append(best)
    top = ranked[0]
    if decision is not None:
        helps = max(top.edge_reduction, top.undecided_reduction) >= min_gain
        gain_text = (f"the best run is expected to narrow the window edges' {int(round(100 * credible))} % "
                     f"credible widths by {_ph(top.edge_reduction)} pH and the undecided span by "
                     f"{_ph(top.undecided_reduction)} pH")
        limit_text = f"{min_gain:g} pH"
    else:
        helps = max(top.sd_shrinkage.values(), default=0.0) >= MIN_SD_SHRINKAGE
        gain_text = (f"the best run is expected to shrink a parameter's standard deviation by at most "
                     f"{100 * max(top.sd_shrinkage.values(), default=0.0):.0f} %")
        limit_text = f"{100 * MIN_SD_SHRINKAGE:.0f} %"
        notes.append("no process file: candidates are ranked by the D-optimal criterion over all parameters")
    if helps:
        message = f"Run {_conditions_text(top.conditions)} next: {gain_text}."
    else:
        message = (f"No candidate helps much: {gain_text} (threshold {limit_text}); the current runs "
                   "already pin down what the decision needs within the candidates' reach.")
    if method == "preposterior" and top.effective_draws is not None and top.effective_draws < 20:
        notes.append(f"the reweighted posterior of the best run rests on about {top.effective_draws:.0f} draws; "
                     "use more draws for a firmer estimate (the expected shrinkage may be overstated)")
    return SuggestResult(ranked, picked, helps, message, method, names, [names[i] for i in moving], credible,
                         min_gain, decision is not None, notes)
