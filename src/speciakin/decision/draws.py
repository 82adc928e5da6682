"""Parameter draws when no posterior sample exists: a multivariate normal
around the least-squares estimate with its covariance matrix.

Bounds are honoured by rejection: draws with any parameter outside its bounds
are thrown away and replaced, up to ``max_rounds`` rounds; draws still missing
after that are clipped to the bounds and counted (``n_clipped``) so that the
caller can warn.  Rejection keeps the shape of the normal inside the bounds
(a truncated normal); clipping would pile probability on the bound, so it is
only the fallback.

References
----------
Seber, G. A. F. and Wild, C. J. "Nonlinear Regression", Wiley 1989,
section 2.1 (asymptotic normal distribution of the least-squares estimate).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from speciakin.errors import SolverError

__all__ = ["CovarianceDraws", "draws_from_covariance", "COVARIANCE_SOURCE", "POSTERIOR_SOURCE"]

#: Names of the two uncertainty sources, as shown in reports.
POSTERIOR_SOURCE = "posterior"
COVARIANCE_SOURCE = "least-squares covariance (multivariate normal)"


@dataclass
class CovarianceDraws:
    """Draws and how they were obtained.

    Attributes
    ----------
    draws
        (n, n_params) on the fitted scale.
    n_rejected
        Candidate draws thrown away for leaving the bounds.
    n_clipped
        Draws clipped to the bounds after the rejection rounds ran out.
    """

    draws: np.ndarray
    n_rejected: int
    n_clipped: int


def draws_from_covariance(mean: Sequence[float], covariance: np.ndarray, n: int, seed: int | None,
                          bounds: Sequence[tuple[float | None, float | None]] | None = None,
                          max_rounds: int = 50) -> CovarianceDraws:
    """Draw ``n`` parameter vectors from N(mean, covariance) inside bounds.

    Parameters
    ----------
    mean
        (n_params,) best estimate on the fitted scale (e.g. log10 k, pKa shift).
    covariance
        (n_params, n_params) symmetric positive semi-definite.
    n
        Number of draws, >= 1.
    seed
        Seed of ``numpy.random.default_rng``; same seed -> same draws.
    bounds
        Optional (lower, upper) per parameter; None = unbounded side.
    max_rounds
        Rejection rounds before the clipping fallback.

    Returns
    -------
    CovarianceDraws

    Raises
    ------
    SolverError
        If the covariance is not finite, not symmetric or not positive
        semi-definite (the fit did not give a usable covariance).
    """
    mu = np.asarray(mean, dtype=float)
    cov = np.asarray(covariance, dtype=float)
    k = mu.size
    if mu.ndim != 1 or cov.shape != (k, k):
        raise ValueError(f"mean has {k} parameters but covariance has shape {cov.shape}")
    if n < 1:
        raise ValueError("n must be at least 1")
    if not (np.all(np.isfinite(mu)) and np.all(np.isfinite(cov))):
        raise SolverError("the least-squares estimate or its covariance contains NaN or infinity; "
                          "cannot draw parameters (run the sampler instead)")
    if not np.allclose(cov, cov.T, rtol=1e-8, atol=1e-14):
        raise SolverError("the covariance matrix is not symmetric")
    eigenvalues, vectors = np.linalg.eigh(0.5 * (cov + cov.T))
    scale = max(1.0, float(np.max(np.abs(eigenvalues))) if k else 1.0)
    if k and eigenvalues.min() < -1e-10 * scale:
        raise SolverError(f"the covariance matrix is not positive semi-definite "
                          f"(smallest eigenvalue {eigenvalues.min():.3g})")
    root = vectors * np.sqrt(np.clip(eigenvalues, 0.0, None))
    lower = np.full(k, -np.inf)
    upper = np.full(k, np.inf)
    if bounds is not None:
        if len(bounds) != k:
            raise ValueError(f"bounds has {len(bounds)} entries, expected {k}")
        for i, (lo, hi) in enumerate(bounds):
            lower[i] = -np.inf if lo is None else float(lo)
            upper[i] = np.inf if hi is None else float(hi)
    rng = np.random.default_rng(seed)
    accepted: list[np.ndarray] = []
    have, rejected = 0, 0
    for _ in range(max_rounds):
        need = n - have
        if need <= 0:
            break
        batch = max(need, 16) * 2
        candidates = mu + rng.standard_normal((batch, k)) @ root.T
        inside = np.all((candidates >= lower) & (candidates <= upper), axis=1)
        good = candidates[inside][:need]
        rejected += int((~inside).sum())
        accepted.append(good)
        have += good.shape[0]
    clipped = 0
    if have < n:
        extra = mu + rng.standard_normal((n - have, k)) @ root.T
        accepted.append(np.clip(extra, lower, upper))
        clipped = n - have
    draws = np.concatenate(accepted, axis=0) if accepted else np.empty((0, k))
    return CovarianceDraws(draws[:n], rejected, clipped)
