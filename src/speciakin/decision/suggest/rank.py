"""Ranking of candidate runs, the greedy batch and the "helps much" verdict."""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from speciakin.decision.suggest.criteria import CREDIBLE, METHODS, MIN_GAIN_PH, MIN_SD_SHRINKAGE, \
    DecisionDraws, moving_parameters
from speciakin.decision.suggest.result import CandidateScore, SuggestResult, conditions_text, ph_text
from speciakin.decision.suggest.updates import LocalSensitivity, Prior, score_fisher, score_linear, \
    score_preposterior

__all__ = ["rank_candidates"]

NoiseFunction = Callable[[int, np.ndarray], np.ndarray]


# ------------------------------------------------------------------ ranking
def width_text(value: float) -> str:
    """A width [pH] to two decimals, or three below 0.1 (so that close candidates read apart)."""
    return f"{value:.3f}" if abs(value) < 0.1 else f"{value:.2f}"


def _reason(score: CandidateScore, names: Sequence[str], has_decision: bool) -> str:
    parts = []
    if has_decision and score.edge_width_before is not None:
        for side, b, a in zip(("low", "high"), score.edge_width_before, score.edge_width_after):
            if b - a >= 0.01:
                parts.append(f"narrow the {int(round(100 * CREDIBLE))} % credible interval of the {side} "
                             f"window edge from {width_text(b)} to {width_text(a)} pH")
        if score.undecided_reduction >= 0.01:
            parts.append(f"shrink the span of set points whose pass/fail is undecided from "
                         f"{score.undecided_before:.2f} to {score.undecided_after:.2f} pH")
    best = max(range(len(names)), key=lambda k: score.sd_shrinkage[names[k]]) if names else None
    if best is not None and score.sd_shrinkage[names[best]] >= 0.05:
        parts.append(f"mostly inform {names[best]} (its standard deviation "
                     f"{100 * score.sd_shrinkage[names[best]]:.0f} % smaller)")
    if not parts:
        return "expected to change little: the current runs already tell what this run would show"
    return "expected to " + "; ".join(parts)


def rank_candidates(draws: np.ndarray, predictions: Sequence[np.ndarray], noise_sd: NoiseFunction,
                    conditions: Sequence[dict[str, Any]], *, parameter_names: Sequence[str],
                    decision: DecisionDraws | None = None, method: str = "linear", batch: int = 1,
                    sensitivity: LocalSensitivity | None = None,
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
        ``"fisher"`` (needs ``sensitivity``; the pipeline's default), ``"linear"``
        or ``"preposterior"``.
    batch
        Number of runs to choose together (greedy).
    sensitivity
        The linearisation at some draws (:class:`LocalSensitivity`), for the
        ``"fisher"`` method.
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
    if method == "fisher" and (sensitivity is None or len(sensitivity.candidates) != len(predictions)):
        raise ValueError("the fisher method needs a LocalSensitivity with one Jacobian per candidate")
    names = list(parameter_names)
    prior = Prior(theta, decision, credible)
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
        if ok.sum() < max(10, theta.shape[0] // 2):
            done[0] += 1
            score = CandidateScore(chosen[-1], dict(conditions[chosen[-1]]), prior.widths(), prior.widths(),
                                   prior.undecided(), prior.undecided(), 0.0, 0.0, {n: 0.0 for n in names})
            score.reason = (f"not judged: the simulation of this run failed for {int((~ok).sum())} of "
                            f"{ok.size} draws")
            return score
        if method == "fisher":
            res = score_fisher(prior, sensitivity, chosen, moving)
        elif method == "linear":
            sub = prior if ok.all() else Prior(theta[ok], None if decision is None else DecisionDraws(
                decision.ph, decision.passes[ok], decision.margin[ok], decision.anchor), credible)
            var = np.concatenate([np.mean(noise_sd(c, preds[c][ok]) ** 2, axis=0) for c in chosen])
            res = score_linear(sub, y[ok], var, moving)
        else:
            def noise(values):
                cols = np.cumsum([0] + [preds[c].shape[1] for c in chosen])
                return np.concatenate([noise_sd(c, values[:, cols[i]:cols[i + 1]])
                                       for i, c in enumerate(chosen)], axis=1)
            res = score_preposterior(prior, y, noise, moving, rng, n_simulated)
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
                     f"credible widths by {ph_text(top.edge_reduction)} pH and the undecided span by "
                     f"{ph_text(top.undecided_reduction)} pH")
        limit_text = f"{min_gain:g} pH"
    else:
        helps = max(top.sd_shrinkage.values(), default=0.0) >= MIN_SD_SHRINKAGE
        gain_text = (f"the best run is expected to shrink a parameter's standard deviation by at most "
                     f"{100 * max(top.sd_shrinkage.values(), default=0.0):.0f} %")
        limit_text = f"{100 * MIN_SD_SHRINKAGE:.0f} %"
        notes.append("no process file: candidates are ranked by the D-optimal criterion over all parameters")
    if helps:
        message = f"Run {conditions_text(top.conditions)} next: {gain_text}."
    else:
        message = (f"No candidate helps much: {gain_text} (threshold {limit_text}); the current runs "
                   "already pin down what the decision needs within the candidates' reach.")
    if method == "preposterior" and top.effective_draws is not None and top.effective_draws < 20:
        notes.append(f"the reweighted posterior of the best run rests on about {top.effective_draws:.0f} draws; "
                     "use more draws for a firmer estimate (the expected shrinkage may be overstated)")
    return SuggestResult(ranked, picked, helps, message, method, names, [names[i] for i in moving], credible,
                         min_gain, decision is not None, notes)
