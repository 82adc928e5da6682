"""Convergence checks and Gauss-Newton refinement of a local optimum."""

from __future__ import annotations

import math

import numpy as np

from speciakin.errors import SolverError
from speciakin.estimation.jacobian import evaluate_jacobian
from speciakin.estimation.local import CountedResidual, LocalFit
from speciakin.estimation.parameters import ParameterSpec
from speciakin.estimation.statistics import chi_square

__all__ = ["polish", "check_minimum", "gradient_cosine", "gauss_newton_step", "relative_step", "free_columns",
           "GRADIENT_COSINE_LIMIT", "GAUSS_NEWTON_STEP_LIMIT", "POLISH_ITERATIONS", "SINGULAR_STATUS"]

#: A converged start whose residual keeps a larger share in the Jacobian's
#: column space than this is "not at a minimum" (common practice: a
#: dimensionless orthogonality test, cf. Dennis & Schnabel 1996, section 7.2).
GRADIENT_COSINE_LIMIT = 1e-3
#: ... or when the Gauss-Newton step left is below this relative size (a
#: residual at rounding level, e.g. exact data, makes the cosine meaningless).
GAUSS_NEWTON_STEP_LIMIT = 1e-8
#: Gauss-Newton refinement steps applied to every converged start.
POLISH_ITERATIONS = 4


def gradient_cosine(jac: np.ndarray, r: np.ndarray) -> float:
    """``||P r|| / ||r||`` with ``P`` the projector onto the column space of ``jac``."""
    norm_r = np.linalg.norm(r)
    if norm_r == 0.0 or jac.shape[1] == 0:
        return 0.0
    norms = np.linalg.norm(jac, axis=0)
    q, _ = np.linalg.qr(jac / np.where(norms > 0, norms, 1.0))
    return float(np.linalg.norm(q.T @ r) / norm_r)


def gauss_newton_step(jac: np.ndarray, r: np.ndarray) -> np.ndarray:
    """Step ``d`` minimising ``||r + J d||`` (column-scaled, minimum-norm least squares)."""
    norms = np.linalg.norm(jac, axis=0)
    norms = np.where(norms > 0, norms, 1.0)
    d, *_ = np.linalg.lstsq(jac / norms, -r, rcond=None)
    return d / norms


def relative_step(step: np.ndarray, x: np.ndarray) -> float:
    if step.size == 0:
        return 0.0
    return float(np.max(np.abs(step) / np.maximum(np.abs(x), 1e-300)))


def free_columns(specs: list[ParameterSpec], x: np.ndarray, vary_mask: np.ndarray) -> np.ndarray:
    """Varying parameters not sitting at a bound (a bound may hold the gradient away from zero)."""
    cols = []
    for i in np.flatnonzero(vary_mask):
        s = specs[i]
        tol = 1e-8 * max(abs(x[i]), 1e-300)
        if x[i] - s.lower <= tol or s.upper - x[i] <= tol:
            continue
        cols.append(i)
    return np.array(cols, dtype=int)


def polish(residual: CountedResidual, specs, fit: LocalFit, vary_mask, jacobian, *, richardson: bool,
           iterations: int = POLISH_ITERATIONS) -> LocalFit:
    """Refine a converged fit with Gauss-Newton steps on an accurate Jacobian.

    A step is kept only if it stays inside the bounds and does not raise
    chi-square beyond rounding (relative 1e-14); optimizers stop on tolerances of their own, and a few exact
    steps bring the estimate to the precision the Jacobian allows.

    References
    ----------
    Bjorck, A. Numerical Methods for Least Squares Problems; SIAM, 1996, section 9.2.
    """
    x, r, chisqr = fit.values.copy(), fit.residual, fit.chisqr
    before = residual.count
    lower = np.array([s.lower for s in specs])
    upper = np.array([s.upper for s in specs])
    for _ in range(iterations):
        cols = free_columns(specs, x, vary_mask)
        if cols.size == 0:
            break
        try:
            jac = evaluate_jacobian(jacobian, residual, x, cols, richardson=richardson, f0=r)
        except SolverError:
            break
        if not np.all(np.isfinite(jac)):
            break
        step = gauss_newton_step(jac, r)
        trial = x.copy()
        trial[cols] += step
        if np.any(trial < lower) or np.any(trial > upper):
            break
        r_new = residual(trial)
        if not np.all(np.isfinite(r_new)):
            break
        chi_new = chi_square(r_new)
        if chi_new > chisqr * (1.0 + 1e-14):  # worse beyond rounding: keep the previous point
            break
        x, r, chisqr = trial, r_new, chi_new
        if relative_step(step, x[cols]) < 1e-13:
            break
    return LocalFit(x, chisqr, r, fit.converged, fit.message, fit.n_evaluations + residual.count - before)


SINGULAR_STATUS = "converged (singular Jacobian)"


def _is_rank_deficient(jac: np.ndarray) -> bool:
    """Rank test of the column-scaled Jacobian (numpy ``matrix_rank`` tolerance)."""
    norms = np.linalg.norm(jac, axis=0)
    if np.any(norms == 0.0):
        return True
    sv = np.linalg.svd(jac / norms, compute_uv=False)
    return bool(sv[-1] <= sv[0] * max(jac.shape) * np.finfo(float).eps)


def check_minimum(residual: CountedResidual, specs, fit: LocalFit, vary_mask, jacobian) -> tuple[bool, str, float]:
    """Confirm a converged local fit is at a stationary point.

    Stationary when the residual is (nearly) orthogonal to the Jacobian's
    columns, ``||P r|| / ||r|| <= GRADIENT_COSINE_LIMIT``, or when the
    Gauss-Newton step left is below ``GAUSS_NEWTON_STEP_LIMIT`` relative to the
    values (residuals at rounding level).
    """
    cols = free_columns(specs, fit.values, vary_mask)
    if cols.size == 0:
        return True, fit.message, 0.0
    try:
        jac = evaluate_jacobian(jacobian, residual, fit.values, cols, richardson=False, f0=fit.residual)
    except SolverError as exc:
        return False, f"Jacobian failed: {exc}", math.nan
    if not np.all(np.isfinite(jac)):
        return False, "Jacobian not finite at the end point", math.nan
    if _is_rank_deficient(jac):
        # a flat direction: no gradient test is meaningful; the start counts as converged but
        # ranks after every start with an isolated minimum
        return True, SINGULAR_STATUS, math.nan
    cos = gradient_cosine(jac, fit.residual)
    if cos <= GRADIENT_COSINE_LIMIT:
        return True, "converged", cos
    rel = relative_step(gauss_newton_step(jac, fit.residual), fit.values[cols])
    if rel <= GAUSS_NEWTON_STEP_LIMIT:
        return True, "converged", cos
    return False, f"gradient not small (cosine {cos:.2g}, step {rel:.2g})", cos
