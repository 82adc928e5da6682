"""What the campaign objective hands on: the model values at the observations, and the titrant logs
resampled for a fit (``pipeline.objective``)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["Predictions", "resample_titrant", "sample_values"]


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


def sample_values(h, t: float) -> tuple:
    """One HPLC sample of a run's :class:`~speciakin.data.campaign.HplcData` ``h`` taken at ``t`` [s]:
    ``(idx, kinds, values, loq, other_share, other)``.

    Peak areas become area% over every peak of the sample, the peaks marked not modelled included (area
    normalisation).  ``other_share`` is the sample's area% of those peaks (0 for a sample without area%),
    ``other`` their (values, censored, LOQs) on the same scale, empty for a sample without area%.
    """
    idx = np.flatnonzero(h.time == t)
    kinds, values, loq = h.kind[idx], h.value[idx].astype(float), h.loq[idx].astype(float)
    share, oidx = h.other_share(t)
    o = h.other
    none = (np.zeros(0), np.zeros(0, bool), np.zeros(0))
    other = ((o.value[oidx].astype(float), o.censored[oidx].astype(bool), o.loq[oidx].astype(float)) if oidx.size
             else none)
    if np.all(kinds == "area"):
        total = np.nansum(np.where(h.censored[idx], 0.0, values)) + share
        scale = 100.0 / total if total > 0 else np.nan
        values, loq, share = values * scale, loq * scale, share * scale
        other = (other[0] * scale, other[1], other[2] * scale)
        kinds = np.full(idx.size, "area_percent")
    if not np.any(kinds == "area_percent"):
        share, other = 0.0, none
    return idx, kinds, values, loq, share, other
