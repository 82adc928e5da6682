"""Posterior of a campaign: priors from the model file, emcee on the campaign objective.

The likelihood is :meth:`CampaignObjective.log_likelihood_batch` (all walkers
of a stretch-move half-step go to the compiled simulator in one batch, spread
over the cores); priors come from the model file, with the project defaults
where the chemist stated none (see :func:`campaign_priors`).
"""

from __future__ import annotations

import math
import numpy as np

from speciakin.chemistry.model import Prior
from speciakin.errors import InputError, Location
from speciakin.estimation.objective import CampaignObjective
from speciakin.estimation.priors import build_prior, default_pka_shift_prior
from speciakin.estimation.sampling import PosteriorResult, sample_posterior

__all__ = ["campaign_priors", "sample_campaign", "DEFAULT_WALKERS_PER_PARAMETER"]

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
    """
    priors = []
    for p in objective.parameters:
        where = Location(file=objective.model.source or None, key=p.name)
        if p.prior is not None:
            priors.append(build_prior(p.prior, location=where))
        elif p.shift:
            priors.append(default_pka_shift_prior())
        elif math.isfinite(p.lower) and math.isfinite(p.upper):
            priors.append(build_prior(Prior("uniform", {"lower": p.lower, "upper": p.upper}), location=where))
        elif p.kind == "probe_offset":
            priors.append(build_prior(Prior("normal", {"mean": 0.0, "sd": 0.1}), location=where))
        else:
            priors.append(build_prior(Prior("normal", {"mean": p.value, "sd": 3.0}), location=where))
    return priors


def sample_campaign(objective: CampaignObjective, start: np.ndarray, start_scale: np.ndarray, *,
                    n_walkers: int | None = None, n_steps: int = 3000, seed: int = 1,
                    checkpoint=None, resume: bool = False, jobs: int = 1, scheduler=None,
                    progress=True, checkpoint_every: float = 30.0) -> PosteriorResult:
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
        Steps per walker.
    checkpoint, resume, jobs, scheduler, progress, checkpoint_every
        See :func:`speciakin.estimation.sampling.sample_posterior`.

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
                            checkpoint_every=checkpoint_every)
