"""The updates of the draws per candidate: local Fisher information at each
draw (Bayesian c- and D-optimality), linear-Gaussian (Bayes-linear adjusted
covariance) and pre-posterior importance reweighting."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Sequence

import numpy as np

from speciakin.decision.suggest.criteria import DecisionDraws, credible_width, draw_edges, \
    expected_pass_variance, undecided_width
from speciakin.errors import SolverError

__all__ = ["Prior", "LocalSensitivity", "score_fisher", "score_linear", "score_preposterior"]

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


@dataclass
class LocalSensitivity:
    """Linearisation of the campaign, the candidates and the decision at some draws.

    Attributes
    ----------
    information
        (n_loc, p, p) Fisher information ``J^T J`` of the campaign's data
        (residuals weighted by the error model) at each draw [1/parameter^2].
    candidates
        Per candidate, (n_loc, m_c, p) Jacobian of its observations divided by
        their standard deviations at each draw.
    edges
        (n_loc, 2, p) gradient of the draw's low and high window edge [pH per
        parameter unit]; None without a decision.
    margins
        (n_loc, n_ph, p) gradient of the spec margin at each set point; None
        without a decision.
    """

    information: np.ndarray
    candidates: Sequence[np.ndarray]
    edges: np.ndarray | None = None
    margins: np.ndarray | None = None


def _inverse(info: np.ndarray) -> np.ndarray:
    """Covariances of a stack of information matrices (pseudo-inverse after a
    ridge of 1e-10 of the largest diagonal entry, a numerical guard for a
    direction the data do not inform)."""
    ridge = 1e-10 * np.max(np.diagonal(info, axis1=1, axis2=2), axis=1)
    eye = np.eye(info.shape[1])
    return np.linalg.pinv(info + ridge[:, None, None] * eye, hermitian=True)


def _quad(grad: np.ndarray, cov: np.ndarray) -> np.ndarray:
    """``g^T S g`` per draw and row of ``grad`` (n, k, p) with ``cov`` (n, p, p) -> (n, k)."""
    return np.maximum(np.einsum("nkp,npq,nkq->nk", grad, cov, grad), 0.0)


def score_fisher(prior: Prior, sens: LocalSensitivity, chosen: Sequence[int], moving: np.ndarray):
    """Expected effect of the chosen runs by the local Fisher update at each draw.

    At draw i (a possible truth) the refitted campaign would have the
    covariance ``S'_i = (I_i + sum_c J_ci^T J_ci)^-1`` (Gauss-Newton / Laplace;
    ``I_i`` the current runs' information); a quantity with gradient g then has
    the sd ``sqrt(g^T S'_i g)``.  Averaging over the draws is Bayesian
    c-optimality for the edges (Chaloner and Larntz, J. Statist. Plann.
    Inference 1989, 21, 191) and Bayesian D-optimality for the parameters
    (Chaloner and Verdinelli, Statist. Sci. 1995, 10, 273, section 2.2).

    The edge's sd is averaged over the draws before and after the run; the
    credible width of the draws scales with their ratio (a run that adds
    nothing leaves it as it is).  Returns the widths after, the undecided
    span after, the D gain [nats], the sd shrinkage per parameter and None.
    """
    info0 = sens.information
    info1 = info0 + sum(np.einsum("nmp,nmq->npq", sens.candidates[c], sens.candidates[c]) for c in chosen)
    s0, s1 = _inverse(info0), _inverse(info1)
    sd_ratio = np.sqrt(np.divide(np.diagonal(s1, axis1=1, axis2=2), np.diagonal(s0, axis1=1, axis2=2),
                                 out=np.ones((info0.shape[0], info0.shape[1])),
                                 where=np.diagonal(s0, axis1=1, axis2=2) > 0))
    sub = np.ix_(np.arange(info0.shape[0]), moving, moving)
    l0 = np.linalg.slogdet(s0[sub])
    l1 = np.linalg.slogdet(s1[sub])
    ok = (l0[0] > 0) & (l1[0] > 0)
    d_gain = float(np.mean(0.5 * (l0[1] - l1[1])[ok])) if ok.any() else 0.0
    widths_after = undecided_after = None
    if prior.edges is not None and sens.edges is not None:
        sd0 = np.sqrt(_quad(sens.edges, s0)).mean(axis=0)
        sd1 = np.sqrt(_quad(sens.edges, s1)).mean(axis=0)
        ratio = np.divide(sd1, sd0, out=np.ones(2), where=sd0 > 0)
        widths_after = tuple(float(b * min(r, 1.0)) for b, r in zip(prior.widths(), ratio))
        v0 = _quad(sens.margins, s0).sum(axis=0)
        v1 = _quad(sens.margins, s1).sum(axis=0)
        explained = np.clip(np.divide(v0 - v1, v0, out=np.zeros_like(v0), where=v0 > 0), 0.0, 1.0)
        q = expected_pass_variance(prior.p, explained)
        undecided_after = undecided_width(prior.decision.ph, pass_variance=q)
    return widths_after, undecided_after, d_gain, 1.0 - sd_ratio.mean(axis=0), None
