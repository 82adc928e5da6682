"""The Jacobian of the campaign residuals: forward sensitivities, or central differences column by column.

:meth:`speciakin.pipeline.objective.CampaignObjective.jacobian` (:func:`campaign_jacobian`) remembers the
columns computed at the last point: the least-squares solver ends with a Jacobian at its end point, and the
Gauss-Newton polish and the stationarity check that follow ask for the Jacobian at that same point again.
Forward sensitivities (:func:`sensitivity_jacobian`, the default) give every column at once (their steps
follow every direction's error); central differences (:func:`central_jacobian`) only the columns a caller
asks for (a profile fixes one parameter, so its re-optimisations need one column fewer), each parameter set
of a batch simulated on its own.  Either way column ``j`` is a function of the point and ``j`` alone, so a
remembered or separately asked column equals the one a full Jacobian would hold, to the last bit.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np

from speciakin.simulation.sensitivities import simulate_sensitivities

__all__ = ["campaign_jacobian", "central_jacobian", "jacobian_label", "remembered_columns", "sensitivity_jacobian"]

#: Largest relative change of any observed output in the central difference of the observation map
#: (the map from kernel outputs to residuals is rational: its truncation error is of the order of the
#: square of this, its rounding about 1e-16 over this).
OBSERVATION_STEP = 1e-6


def central_jacobian(residuals_batch: Callable[..., np.ndarray], theta: np.ndarray, lower: np.ndarray,
                     upper: np.ndarray, rtol: float, columns: Sequence[int]) -> np.ndarray:
    """Columns ``columns`` of the central-difference Jacobian of the residuals at ``theta``.

    Step h_j = 1e-3 * max(1, |theta_j|), kept inside [lower, upper] by one-sided
    steps where needed, and one-sided from ``theta`` where a perturbed set cannot
    be simulated; all 2 x len(columns) sets are simulated in one batch at ``rtol``.

    Returns
    -------
    numpy.ndarray
        (n_residuals, len(columns)).
    """
    theta = np.asarray(theta, float)
    cols = np.asarray(columns, dtype=int)
    h = 1e-3 * np.maximum(1.0, np.abs(theta[cols]))
    plus = np.minimum(theta[cols] + h, upper[cols])
    minus = np.maximum(theta[cols] - h, lower[cols])
    sets = np.repeat(theta[None, :], 2 * cols.size, axis=0)
    for k, j in enumerate(cols):
        sets[2 * k, j] = plus[k]
        sets[2 * k + 1, j] = minus[k]
    r = residuals_batch(sets, rtol=rtol)
    failed = ~np.all(np.isfinite(r), axis=1)
    if failed.any():  # one-sided differences from theta where one side failed
        r0 = residuals_batch(theta[None, :], rtol=rtol)[0]
        up, down = np.where(failed[1::2], theta[cols], minus), np.where(failed[0::2], theta[cols], plus)
        r[1::2][failed[1::2]], r[0::2][failed[0::2]] = r0, r0
        plus, minus = down, up
    jac = np.empty((r.shape[1], cols.size))
    for k in range(cols.size):
        jac[:, k] = (r[2 * k] - r[2 * k + 1]) / (plus[k] - minus[k])
    return jac


def remembered_columns(memo: tuple | None, key: tuple, columns: Sequence[int],
                       compute: Callable[[list[int]], np.ndarray]) -> tuple[np.ndarray, tuple]:
    """The Jacobian columns ``columns`` at the point ``key``, computing only those ``memo`` lacks.

    Parameters
    ----------
    memo
        ``(key, {column: values})`` of the last point, or None.
    key
        Identity of the point (its bytes and the tolerance).
    columns
        Column indices wanted, in order.
    compute
        ``compute(missing_columns) -> (n_residuals, len(missing_columns))``.

    Returns
    -------
    jacobian, memo
        (n_residuals, len(columns)) (a new array), and the memo to keep.
    """
    known = memo[1] if memo is not None and memo[0] == key else {}
    missing = [j for j in columns if j not in known]
    if missing:
        known = {**known, **dict(zip(missing, compute(missing).T))}
    return np.column_stack([known[j] for j in columns]), (key, known)


def sensitivity_jacobian(objective, theta: np.ndarray, rtol: float, columns: Sequence[int]) -> np.ndarray | None:
    """Columns ``columns`` of the Jacobian of the residuals at ``theta`` from forward sensitivities.

    The derivatives of the kernel's outputs along each fitted parameter come from
    ``simulation.sensitivities`` (one simulation with its sensitivities, at ``rtol``); the chain rule
    through the observation map (area% quotients, concentrations, the closure's whitening, censored
    values) is a central difference of that map alone along each derivative, the outputs moved by at
    most :data:`OBSERVATION_STEP` of themselves (no simulation inside it).

    Returns None when a run cannot be simulated at ``theta`` (the caller then takes differences).
    """
    theta = np.asarray(theta, float)
    cols = np.asarray(columns, dtype=int)
    q, off, fac = objective.kernel_inputs(theta)
    n_q, n_runs = q.shape[1], off.shape[1]
    dirs = np.zeros((n_runs, cols.size, n_q + 2))
    for d, j in enumerate(cols):
        p = objective.parameters[j]
        if p.kind == "quantity":
            dirs[:, d, p.index] = 1.0
        else:
            dirs[p.index, d, n_q if p.kind == "probe_offset" else n_q + 1] = 1.0
    res = simulate_sensitivities(objective.compiled, objective.compiled_runs, q[0], dirs, off[0], fac[0], rtol,
                                 objective.atol, objective.parallel)
    if np.any(res.status != 0):
        return None
    out, sens = res.outputs, np.moveaxis(res.derivatives, 1, 0)  # (m, n_runs, n_times, n_outputs)
    size = np.abs(out)
    floor = np.maximum(1e-9 * np.nanmax(size, axis=(0, 1), initial=0.0), 1e-300)  # per output column
    with np.errstate(invalid="ignore"):  # the padding rows of shorter runs are NaN
        ratio = np.abs(sens) / np.maximum(size, floor)[None]
    largest = np.nanmax(ratio.reshape(cols.size, -1), axis=1, initial=0.0)
    eps = np.where(largest > 0, OBSERVATION_STEP / np.where(largest > 0, largest, 1.0), 1.0)
    sets = np.empty((2 * cols.size,) + out.shape)
    sets[0::2] = out[None] + eps[:, None, None, None] * sens
    sets[1::2] = out[None] - eps[:, None, None, None] * sens
    r = objective.residuals_of(objective.predictions_from(sets, np.zeros((2 * cols.size, n_runs), np.int64)))
    return ((r[0::2] - r[1::2]) / (2.0 * eps[:, None])).T


def campaign_jacobian(objective, theta: np.ndarray, columns=None) -> np.ndarray:
    """``CampaignObjective.jacobian``: the Jacobian of the residuals at ``theta``, (n_data, p) or only
    ``columns``, at a tighter integrator tolerance (rtol 1e-8 at most).

    ``objective.jacobian_method`` "sensitivities": :func:`sensitivity_jacobian`, and where a run cannot be
    simulated at ``theta`` (counted in ``objective.jacobian_fallbacks``) or with "differences":
    :func:`central_jacobian` (step h_j = 1e-3 max(1, |theta_j|): integrator noise at rtol 1e-8 divided by
    h near 1e-5, truncation error O(h^2) near 1e-6; one-sided at the bounds and where one side cannot be
    simulated).  The columns of the last point are remembered (:func:`remembered_columns`).
    """
    theta = np.asarray(theta, float)
    cols = list(range(theta.size)) if columns is None else [int(c) for c in columns]
    rtol = min(objective.rtol, 1e-8)
    lo = np.array([q.lower for q in objective.parameters])
    hi = np.array([q.upper for q in objective.parameters])
    method = objective.jacobian_method
    key = (theta.tobytes(), rtol, method)
    if method == "sensitivities":
        # every column at once: the sensitivities' steps follow all directions' errors, so a column is a function
        # of the point alone only when the directions are always the same
        every = list(range(theta.size))

        def compute(missing):
            jac = sensitivity_jacobian(objective, theta, rtol, missing)
            if jac is None:
                objective.jacobian_fallbacks += 1
                jac = central_jacobian(objective.residuals_batch, theta, lo, hi, rtol, missing)
            return jac

        jac, objective._last_jacobian = remembered_columns(objective._last_jacobian, key, every, compute)
        return jac[:, cols] if columns is not None else jac
    jac, objective._last_jacobian = remembered_columns(
        objective._last_jacobian, key, cols,
        lambda missing: central_jacobian(objective.residuals_batch, theta, lo, hi, rtol, missing))
    return jac


def jacobian_label(method: str, fallbacks: int) -> str:
    """How the Jacobian was computed, for a fit's record."""
    if method != "sensitivities":
        return "central differences"
    return "forward sensitivities" + (f" (central differences at {fallbacks} point(s) where a run could not be "
                                      "simulated)" if fallbacks else "")
