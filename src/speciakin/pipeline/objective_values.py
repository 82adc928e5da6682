"""What the campaign objective hands on: the model values at the observations, and the titrant logs
resampled for a fit (``pipeline.objective``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Predictions", "resample_titrant"]


@dataclass
class Predictions:
    """Model values at the observations for one parameter vector.

    ``hplc_model`` and ``hplc_observed`` are on the data's scale (area% or
    [mol/L]); ``titrant_model`` / ``titrant_observed`` [mol].
    """

    hplc_model: np.ndarray
    hplc_observed: np.ndarray
    hplc_sigma: np.ndarray
    hplc_censored: np.ndarray
    titrant_model: np.ndarray
    titrant_observed: np.ndarray
    titrant_sigma: np.ndarray
    outputs: np.ndarray
    status: np.ndarray


def resample_titrant(times: np.ndarray, amounts: np.ndarray, end: float,
                     limit: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The finite readings of a titrant log up to ``end``; with ``limit``, resampled on an even grid of
    that many points (``[fit] log_thinning``)."""
    keep = np.isfinite(times) & np.isfinite(amounts) & (times <= end)
    t, a = times[keep], amounts[keep]
    if limit is not None and t.size > limit:
        grid = np.linspace(t.min(), t.max(), limit)
        a = np.interp(grid, t, a)
        t = grid
    return t, a
