"""A monotone map of each coordinate onto normal scores, fitted to the quantiles of draws.

The adapted independence proposal (:mod:`speciakin.estimation.proposals`)
draws in the space of normal scores, where a skewed or bounded marginal (a
rate constant identified on one side only) looks Gaussian, and maps the draws
back.  Each coordinate gets its own strictly increasing, piecewise-linear map
through the points (empirical quantile of the draws at probability p, standard
normal quantile of p) for p evenly spaced in [``tail``, 1 - ``tail``],
continued linearly beyond the end points; so the map is a bijection of the real
line, and a proposal density ``q_z`` in score space gives the density
``q_x(x) = q_z(z(x)) * prod_j dz_j/dx_j`` (change of variables) that the
Hastings factor needs.  Together with a correlated Student-t in score space
this is a Gaussian-copula-like proposal with empirical marginals (Nelsen, An
Introduction to Copulas, 2nd ed., Springer 2006, section 2.3, from memory);
the sampler stays exact for any map, a good one only raises acceptance.
"""

from __future__ import annotations

import numpy as np
from scipy.stats import norm

__all__ = ["QuantileMap", "DEFAULT_KNOTS", "DEFAULT_TAIL"]

#: Number of quantile points per coordinate.  Few: the warm-up windows hold a few thousand
#: correlated draws (a few hundred independent ones), and on the demo a map through 7 points
#: let the adapted proposal accept 0.54 of its proposals at stationarity against 0.37-0.45
#: through 41 points, which follow the noise of the window (docs/sampling.md).
DEFAULT_KNOTS = 7
#: Probability left outside the outer quantile points on each side (the map is continued
#: linearly beyond them).
DEFAULT_TAIL = 0.02


def _piecewise(values: np.ndarray, from_knots: np.ndarray, to_knots: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Piecewise-linear map through (from_knots, to_knots), continued linearly; (mapped, slope)."""
    i = np.clip(np.searchsorted(from_knots, values), 1, from_knots.size - 1)
    slope = (to_knots[i] - to_knots[i - 1]) / (from_knots[i] - from_knots[i - 1])
    return to_knots[i - 1] + slope * (values - from_knots[i - 1]), slope


class QuantileMap:
    """Per-coordinate map x -> z (normal scores) through the quantiles of draws.

    Parameters
    ----------
    x_knots, z_knots
        One strictly increasing array of knots per coordinate (same length
        within a coordinate, at least 2).
    """

    def __init__(self, x_knots: list[np.ndarray], z_knots: list[np.ndarray]) -> None:
        self.x_knots = [np.asarray(k, dtype=float) for k in x_knots]
        self.z_knots = [np.asarray(k, dtype=float) for k in z_knots]

    @classmethod
    def fit(cls, draws: np.ndarray, n_knots: int = DEFAULT_KNOTS, tail: float = DEFAULT_TAIL) -> "QuantileMap | None":
        """The map through the quantiles of ``draws`` (n, d), or None when a coordinate has too few distinct values.

        Knots closer than 1e-12 of the coordinate's spread to the previous
        one (repeated draws) are dropped, so every map is strictly increasing.
        """
        draws = np.ascontiguousarray(draws, dtype=float)
        p = np.linspace(tail, 1.0 - tail, n_knots)
        z = norm.ppf(p)
        x_knots, z_knots = [], []
        for column in draws.T:
            q = np.quantile(column, p)
            spread = q[-1] - q[0]
            if not (np.isfinite(spread) and spread > 0):
                return None
            keep = np.concatenate([[True], np.diff(q) > 1e-12 * spread])
            if np.count_nonzero(keep) < 3:
                return None
            x_knots.append(q[keep])
            z_knots.append(z[keep])
        return cls(x_knots, z_knots)

    def forward(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Normal scores of (n, d) points and the log-Jacobian ``sum_j log dz_j/dx_j`` (n,)."""
        x = np.atleast_2d(np.asarray(x, dtype=float))
        z = np.empty_like(x)
        log_jacobian = np.zeros(x.shape[0])
        for j, (xk, zk) in enumerate(zip(self.x_knots, self.z_knots)):
            z[:, j], slope = _piecewise(x[:, j], xk, zk)
            log_jacobian += np.log(slope)
        return z, log_jacobian

    def inverse(self, z: np.ndarray) -> np.ndarray:
        """Points (n, d) whose normal scores are ``z`` (n, d)."""
        z = np.atleast_2d(np.asarray(z, dtype=float))
        x = np.empty_like(z)
        for j, (xk, zk) in enumerate(zip(self.x_knots, self.z_knots)):
            x[:, j] = _piecewise(z[:, j], zk, xk)[0]
        return x
