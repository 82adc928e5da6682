"""Start positions of the ensemble: a small ball around the start point, inside the prior support."""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np

from speciakin.errors import SolverError
from speciakin.estimation.priors import PriorDistribution

__all__ = ["initial_walkers"]

_MAX_START_ROUNDS = 100


def _reflect_into(x: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    x = np.where(x < lower, 2 * lower - x, x)
    x = np.where(x > upper, 2 * upper - x, x)
    width = upper - lower
    margin = np.where(np.isfinite(width), 1e-9 * width, 0.0)
    return np.clip(x, lower + margin, upper - margin)


def initial_walkers(log_posterior: Callable, start: np.ndarray, scale: np.ndarray,
                    priors: Sequence[PriorDistribution], n_walkers: int, rng: np.random.Generator,
                    ball: float = 0.1) -> tuple[np.ndarray, np.ndarray]:
    """Walkers in a small Gaussian ball around ``start``, kept inside the prior support.

    Each coordinate is ``start + ball * scale * N(0, 1)``, reflected into the
    prior support; walkers whose log-posterior is -inf are redrawn.

    Returns
    -------
    positions, log_posterior
        (n_walkers, n_params) and (n_walkers,).

    Raises
    ------
    SolverError
        When no finite log-posterior is found for every walker after 100 rounds.
    """
    n_params = start.shape[0]
    lower = np.array([p.support()[0] for p in priors])
    upper = np.array([p.support()[1] for p in priors])
    positions = np.empty((n_walkers, n_params))
    values = np.full(n_walkers, -np.inf)
    todo = np.arange(n_walkers)
    for _ in range(_MAX_START_ROUNDS):
        trial = start + ball * scale * rng.standard_normal((todo.size, n_params))
        trial = _reflect_into(trial, lower, upper)
        lp = log_posterior(trial)
        positions[todo] = trial
        values[todo] = lp
        todo = todo[~np.isfinite(lp)]
        if todo.size == 0:
            return positions, values
    raise SolverError(f"could not place {todo.size} of {n_walkers} walkers at a finite posterior "
                      f"near the start point after {_MAX_START_ROUNDS} rounds; the log-likelihood "
                      "fails there or the start lies outside the prior support")
