"""Central-difference Jacobian of the campaign residuals, column by column.

:meth:`speciakin.pipeline.objective.CampaignObjective.jacobian` computes only
the columns a caller asks for (a profile fixes one parameter, so its
re-optimisations need one column fewer) and remembers the columns computed at
the last point: the least-squares solver ends with a Jacobian at its end
point, and the Gauss-Newton polish and the stationarity check that follow ask
for the Jacobian at that same point again.  Column ``j`` is a function of the
point and ``j`` alone (each parameter set of a batch is simulated on its own),
so a remembered or separately computed column equals the one a full Jacobian
would hold, to the last bit.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np

__all__ = ["central_jacobian", "remembered_columns"]


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
