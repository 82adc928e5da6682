"""The two updates of the draws per candidate: linear-Gaussian (Bayes-linear
adjusted covariance) and pre-posterior importance reweighting."""

from __future__ import annotations

from typing import Callable

import numpy as np

from speciakin.decision.suggest.criteria import DecisionDraws, credible_width, draw_edges, \
    expected_pass_variance, undecided_width
from speciakin.errors import SolverError

__all__ = ["Prior", "score_linear", "score_preposterior"]

# ------------------------------------------------------------------ the two updates
class Prior:
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


def _linear(prior: Prior, y: np.ndarray, noise_var: np.ndarray):
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


def score_linear(prior, y, noise_var, moving):
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


def score_preposterior(prior, y, noise: Callable[[np.ndarray], np.ndarray], moving, rng, n_sim):
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
        if not np.isfinite(ll.max()):
            continue                                      # no other draw could have made these data
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
    if not dgain:
        raise SolverError("every simulation of this candidate failed; the pre-posterior update is impossible")
    widths_after = tuple(np.mean(widths, axis=0)) if widths else None
    undecided_after = float(np.mean(undecided)) if undecided else None
    return widths_after, undecided_after, float(np.mean(dgain)), 1.0 - np.mean(sd, axis=0), float(np.mean(ess))
