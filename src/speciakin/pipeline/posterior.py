"""Posterior of a campaign: priors from the model file, emcee on the campaign objective.

The likelihood is :meth:`CampaignObjective.log_likelihood_batch` (all walkers
a move updates at once go to the compiled simulator in one batch, spread over
the cores); priors come from the model file, with the project defaults where
the chemist stated none (see :func:`campaign_priors`).  Given the
least-squares covariance, the sampler mixes an independence Student-t move,
started at the optimum and refitted to the chain during a warm-up, with differential evolution
(:mod:`speciakin.estimation.proposals`); without it, the stretch move.
"""

from __future__ import annotations

import math
import numpy as np

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError, Location
from speciakin.pipeline.objective import CampaignObjective
from speciakin.estimation.priors import build_prior, default_pka_shift_prior
from speciakin.estimation.proposals import proposal_cholesky
from speciakin.estimation.sampling import PosteriorResult, sample_posterior

__all__ = ["campaign_priors", "sample_campaign", "usable_fit_covariance", "widen_to_intervals",
           "proposal_covariance_from_fit", "DEFAULT_WALKERS_PER_PARAMETER"]

#: Walkers per fitted parameter (at least 32 walkers in all; common practice for emcee).
DEFAULT_WALKERS_PER_PARAMETER = 4


def campaign_priors(objective: CampaignObjective) -> list:
    """One prior distribution per fitted parameter.

    Defaults where the model file states no prior:

    * pKa shift: normal(0, 0.5) [pK units] (common practice for co-solvent shifts);
    * anything else with both bounds (log10 k, energies, nuisance): uniform
      within the bounds;
    * a pH-probe offset without bounds: normal(0, 0.1); other unbounded
      quantities: normal(start, 3) on the fitted scale (weak).

    Every prior, stated or default, is truncated to the parameter's
    model-file bounds (-inf log-density outside, renormalised inside), so
    no walker can leave the bounds in any prior family.
    """
    priors = []
    for p in objective.parameters:
        where = Location(file=objective.model.source or None, key=p.name)
        if p.prior is not None:
            prior = build_prior(p.prior, location=where)
        elif p.shift:
            prior = default_pka_shift_prior()
        elif math.isfinite(p.lower) and math.isfinite(p.upper):
            prior = build_prior(Prior("uniform", {"lower": p.lower, "upper": p.upper}), location=where)
        elif p.kind == "probe_offset":
            prior = build_prior(Prior("normal", {"mean": 0.0, "sd": 0.1}), location=where)
        else:
            prior = build_prior(Prior("normal", {"mean": p.value, "sd": 3.0}), location=where)
        priors.append(prior.truncated(p.lower, p.upper, where))
    return priors


def usable_fit_covariance(covariance, n_params: int) -> tuple[np.ndarray | None, str | None]:
    """The least-squares covariance if it can shape a proposal, else None and the reason.

    Parameters
    ----------
    covariance
        (n_params, n_params) covariance in fit order, or None when the fit
        could not compute one.
    n_params
        Number of fitted parameters.

    Returns
    -------
    covariance, note
        ``(matrix, None)`` when the matrix is finite, symmetric and positive
        definite; ``(None, reason)`` otherwise (the caller then samples with
        the stretch move and reports the reason).
    """
    if covariance is None:
        return None, "the fit has no covariance matrix: sampled with the stretch move (slower mixing)"
    try:
        proposal_cholesky(covariance, n_params, key="fit covariance")
    except InputError as exc:
        return None, (f"the fit covariance cannot shape the proposal ({exc.args[0] if exc.args else exc}): "
                      "sampled with the stretch move (slower mixing)")
    return np.asarray(covariance, dtype=float), None


def widen_to_intervals(covariance: np.ndarray, lower, upper, level: float = 0.95) -> np.ndarray:
    """Covariance whose standard deviations cover given intervals, correlations kept.

    For each parameter j with a finite interval ``[lower_j, upper_j]`` the
    standard deviation becomes ``max(sd_j, (upper_j - lower_j) / (2 z))`` with
    ``z`` the normal quantile of ``level`` (1.96 for 95 %); the correlation
    matrix is unchanged, so the result stays positive definite.  Used to give
    the independence proposal room along a parameter whose likelihood profile
    is much wider (or open) than the curvature at the optimum says.

    Parameters
    ----------
    covariance
        (n, n) symmetric positive-definite covariance.
    lower, upper
        (n,) interval ends (NaN = no interval for that parameter).
    level
        Probability content of the intervals.

    Returns
    -------
    numpy.ndarray
        (n, n) covariance.

    References
    ----------
    Normal quantile: Abramowitz and Stegun, Handbook of Mathematical
    Functions, 1964, table 26.5 (z = 1.95996 for 0.975).
    """
    from scipy.stats import norm

    c = np.asarray(covariance, dtype=float)
    sd = np.sqrt(np.diag(c))
    correlation = c / np.outer(sd, sd)
    z = float(norm.ppf(0.5 + 0.5 * level))
    width = (np.asarray(upper, dtype=float) - np.asarray(lower, dtype=float)) / (2 * z)
    new_sd = np.where(np.isfinite(width) & (width > sd), width, sd)
    return correlation * np.outer(new_sd, new_sd)


def proposal_covariance_from_fit(fit) -> tuple[np.ndarray | None, str | None]:
    """Covariance for the independence proposal from a campaign fit, or None and the reason.

    The least-squares covariance (fit order), checked by
    :func:`usable_fit_covariance`, then widened by :func:`widen_to_intervals`
    to the profile-likelihood intervals where the fit has them; an open
    profile end is replaced by the parameter's bound (the edge of its uniform
    prior).  Without profiles the covariance is used as it is.

    The least-squares covariance and profiles are scaled to the observed
    scatter (s^2 = the reduced chi-square), the posterior uses the stated
    errors: so the covariance is divided by s^2 and each closed profile
    interval's width by s, so that the proposal has the posterior's width
    whatever the data's scatter (an open end's bound stays where it is).
    """
    try:
        raw = fit.covariance
    except (ValueError, IndexError, AttributeError, TypeError):  # no covariance for these keys
        raw = None
    covariance, note = usable_fit_covariance(raw, len(fit.keys))
    if covariance is None:
        return None, note
    s2 = float(getattr(fit.fit, "reduced_chisqr", 1.0) or 1.0)
    if not (getattr(fit.fit, "scale_by_residual_variance", True) and np.isfinite(s2) and s2 > 0.0):
        s2 = 1.0
    lower, upper = np.full(len(fit.keys), np.nan), np.full(len(fit.keys), np.nan)
    for j, row in enumerate(fit.rows()):
        lo, hi = row["profile_interval"]
        bounds = row["bounds"]
        closed = lo is not None and hi is not None and not row["profile_open_below"] and not row["profile_open_above"]
        if closed:
            centre, half = 0.5 * (lo + hi), 0.5 * (hi - lo) / np.sqrt(s2)
            lo, hi = centre - half, centre + half
        if row["profile_open_below"]:
            lo = bounds[0]
        if row["profile_open_above"]:
            hi = bounds[1]
        lower[j] = np.nan if lo is None else lo
        upper[j] = np.nan if hi is None else hi
    return widen_to_intervals(covariance / s2, lower, upper, float(getattr(fit.fit, "level", 0.95) or 0.95)), None


def sample_campaign(objective: CampaignObjective, start: np.ndarray, start_scale: np.ndarray, *,
                    n_walkers: int | None = None, n_steps: int | None = None, seed: int = 1,
                    checkpoint=None, resume: bool = False, jobs: int = 1, scheduler=None,
                    progress=True, checkpoint_every: float = 30.0, covariance=None,
                    proposal: str | None = None, max_steps: int | None = None) -> PosteriorResult:
    """Sample the posterior of the campaign's fitted parameters.

    Parameters
    ----------
    objective
        Model + campaign objective.
    start, start_scale
        Least-squares optimum and its standard errors (walkers start in a
        small ball around it).
    n_walkers
        Default: max(32, 4 x parameters), even.
    n_steps
        Steps per walker; None = until converged, at most ``max_steps``
        (None: the sampler's cap, see :func:`speciakin.estimation.sampling.sample_posterior`).
    checkpoint, resume, jobs, scheduler, progress, checkpoint_every
        See :func:`speciakin.estimation.sampling.sample_posterior`.
    covariance
        (n_params, n_params) least-squares covariance in fit order (fitted
        scale), symmetric positive definite; builds the ``"adaptive"`` (or ``"laplace"``) moves.
    proposal
        Move choice (``proposals.PROPOSALS``); None = ``"adaptive"`` when
        ``covariance`` is given, else ``"stretch"``.

    Returns
    -------
    PosteriorResult
    """
    p = len(objective.parameters)
    if n_walkers is None:
        n_walkers = max(32, DEFAULT_WALKERS_PER_PARAMETER * p)
        n_walkers += n_walkers % 2
    scale = np.asarray(start_scale, float).copy()
    bad = ~np.isfinite(scale) | (scale <= 0)
    if np.any(bad):
        widths = np.array([(q.upper - q.lower) if math.isfinite(q.upper - q.lower) else 1.0
                           for q in objective.parameters])
        scale[bad] = 0.01 * widths[bad]
    if start.shape != (p,):
        raise InputError("start vector has the wrong length", Location(key="start"), start.shape, f"({p},)")
    return sample_posterior(objective, objective.names, campaign_priors(objective), np.asarray(start, float),
                            scale, n_walkers=n_walkers, n_steps=n_steps, seed=seed, checkpoint=checkpoint,
                            resume=resume, jobs=jobs, scheduler=scheduler, progress=progress,
                            checkpoint_every=checkpoint_every, proposal=proposal,
                            proposal_covariance=covariance,
                            **({} if max_steps is None else {"max_steps": max_steps}))
