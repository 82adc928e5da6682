"""Pure array functions of the pH window.

From a pass/fail matrix (draws x pH) to the probability that every
specification is met, its Monte Carlo error, the intervals where that
probability reaches a level, and the robust (drift-tolerant) window.

Interpolation convention (used everywhere in this module): between two grid
points the probability is the straight line joining them.  The window is then
exactly the set where this piecewise-linear curve is >= level: an edge between
a passing and a failing grid point is the crossing of the line with the level;
outside the scanned range nothing is known, so a window that reaches the end
of the grid stops there (and a warning says so).

References
----------
Peterson, J. J. "A Bayesian approach to the ICH Q8 definition of design
space", J. Biopharm. Stat. 2008, 18, 959-975 (probability of meeting every
specification at each operating point).
ICH Q8(R2) "Pharmaceutical Development", 2009 (design space).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

__all__ = [
    "probability_curve",
    "binomial_standard_error",
    "window_edges",
    "widest_interval",
    "interval_containing",
    "robust_window",
    "worst_case_probability",
    "per_draw_robust_probability",
    "range_end_warning",
    "range_ends_reached",
    "touches_range_edge",
]

Interval = tuple[float, float]


def binomial_standard_error(probability: np.ndarray | float, n_draws: int) -> np.ndarray:
    """Monte Carlo standard error of a proportion.

    ``se = sqrt(p (1 - p) / n)``.  It is zero when every draw agrees; that
    does not mean the answer is exact, only that the draws agree.

    References
    ----------
    Binomial proportion standard error, e.g. Agresti, A. "Categorical Data
    Analysis", 3rd ed., Wiley 2013, section 1.3.
    """
    if n_draws < 1:
        raise ValueError("n_draws must be at least 1")
    p = np.asarray(probability, dtype=float)
    return np.sqrt(np.clip(p * (1.0 - p), 0.0, None) / n_draws)


def probability_curve(pass_matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Fraction of draws that meet every specification, per operating point.

    Parameters
    ----------
    pass_matrix
        Bool array (n_draws, ...) e.g. (n_draws, n_ph) or (n_draws, n_ph, n_factor).

    Returns
    -------
    probability, standard_error
        Arrays of shape ``pass_matrix.shape[1:]`` [-].
    """
    passes = np.asarray(pass_matrix, dtype=bool)
    if passes.ndim < 2 or passes.shape[0] < 1:
        raise ValueError("pass_matrix must have shape (n_draws >= 1, n_points, ...)")
    probability = passes.mean(axis=0)
    return probability, binomial_standard_error(probability, passes.shape[0])


def _check_grid(ph: np.ndarray, values: np.ndarray) -> None:
    if ph.ndim != 1 or values.shape != ph.shape:
        raise ValueError("ph and values must be 1-D arrays of the same length")
    if ph.size >= 2 and np.any(np.diff(ph) <= 0):
        raise ValueError("the pH grid must be strictly increasing")


def window_edges(ph: Sequence[float], probability: Sequence[float], level: float) -> list[Interval]:
    """Intervals where the probability is at least ``level``.

    Edges are interpolated linearly between the last passing and the first
    failing grid point; an interval that reaches the end of the grid stops
    at the grid end.  An isolated passing grid point gives an interval of
    finite width (its interpolated crossings on both sides).

    Parameters
    ----------
    ph
        Increasing pH grid [-].
    probability
        Probability at each grid point [-].
    level
        Required probability, e.g. 0.95 [-].

    Returns
    -------
    list of (low, high)
        Disjoint intervals in increasing order [pH units]; empty if none.
    """
    x = np.asarray(ph, dtype=float)
    p = np.asarray(probability, dtype=float)
    _check_grid(x, p)
    ok = p >= level
    intervals: list[Interval] = []
    i, n = 0, x.size
    while i < n:
        if not ok[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and ok[j + 1]:
            j += 1
        low = x[i] if i == 0 else _crossing(x[i - 1], p[i - 1], x[i], p[i], level)
        high = x[j] if j == n - 1 else _crossing(x[j], p[j], x[j + 1], p[j + 1], level)
        intervals.append((float(low), float(high)))
        i = j + 1
    return intervals


def _crossing(x0: float, p0: float, x1: float, p1: float, level: float) -> float:
    """x where the line through (x0, p0), (x1, p1) reaches ``level``."""
    if p1 == p0:
        return 0.5 * (x0 + x1)
    return x0 + (level - p0) * (x1 - x0) / (p1 - p0)


def widest_interval(intervals: Sequence[Interval]) -> Interval | None:
    """The widest interval (first one on ties), or None."""
    if not intervals:
        return None
    return max(intervals, key=lambda iv: (iv[1] - iv[0], -iv[0]))


def interval_containing(intervals: Sequence[Interval], x: float | None) -> Interval | None:
    """The interval that contains ``x``, or None."""
    if x is None:
        return None
    for low, high in intervals:
        if low - 1e-12 <= x <= high + 1e-12:
            return (low, high)
    return None


def robust_window(ph: Sequence[float], probability: Sequence[float], level: float,
                  tolerance: float) -> list[Interval]:
    """Set points whose whole drift range [pH0 - tol, pH0 + tol] keeps p >= level.

    With the piecewise-linear probability curve the set where p >= level is
    exactly the union of :func:`window_edges`, so a set point qualifies when
    its drift range lies inside one window interval; each interval shrinks by
    ``tolerance`` on both sides.  Drift beyond the scanned range is not known
    and therefore not allowed: an interval at the end of the grid shrinks too.

    Parameters
    ----------
    ph, probability, level
        As for :func:`window_edges`.
    tolerance
        Half-width of the plant's pH control band [pH units], >= 0.

    Returns
    -------
    list of (low, high)
        Set-point intervals [pH units]; an interval of zero width (window
        exactly 2 tol wide) is kept.
    """
    if not np.isfinite(tolerance) or tolerance < 0:
        raise ValueError("tolerance must be a finite number >= 0")
    out: list[Interval] = []
    for low, high in window_edges(ph, probability, level):
        a, b = low + tolerance, high - tolerance
        if b >= a - 1e-12:
            out.append((float(a), float(max(a, b))))
    return out


def worst_case_probability(ph: Sequence[float], probability: Sequence[float],
                           tolerance: float) -> np.ndarray:
    """Lowest probability within [pH0 - tol, pH0 + tol] for every grid set point pH0.

    Evaluated on the grid points inside the drift range plus the linearly
    interpolated values at its two ends.  Where the drift range leaves the
    scanned grid the result is NaN (not known).

    Returns
    -------
    numpy.ndarray
        Shape of ``ph`` [-].
    """
    x = np.asarray(ph, dtype=float)
    p = np.asarray(probability, dtype=float)
    _check_grid(x, p)
    out = np.full(x.shape, np.nan)
    lo, hi, valid = _bands(x, tolerance)
    ends_low = np.interp(x - tolerance, x, p)
    ends_high = np.interp(x + tolerance, x, p)
    for k in np.flatnonzero(valid):
        inside = p[lo[k]:hi[k]]
        out[k] = min(inside.min() if inside.size else np.inf, ends_low[k], ends_high[k])
    return out


def _bands(x: np.ndarray, tolerance: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Slice bounds of the grid points within [x - tol, x + tol] (a tiny
    relative slack absorbs rounding of the grid) and whether the band stays
    inside the grid."""
    eps = 1e-9 * max(1.0, float(np.ptp(x)) if x.size else 1.0)
    lo = np.searchsorted(x, x - tolerance - eps, side="left")
    hi = np.searchsorted(x, x + tolerance + eps, side="right")
    valid = (x - tolerance >= x[0] - eps) & (x + tolerance <= x[-1] + eps)
    return lo, hi, valid


def per_draw_robust_probability(ph: Sequence[float], pass_matrix: np.ndarray,
                                tolerance: float) -> np.ndarray:
    """Fraction of draws that pass at EVERY grid pH within [pH0 - tol, pH0 + tol].

    A stricter reading than :func:`robust_window`: it is the probability that
    one and the same process (one draw) meets every specification wherever
    the pH drifts within the band, rather than the lowest pointwise
    probability over the band.  Only grid points are checked (a pass/fail
    value cannot be interpolated): the grid points inside the band plus the
    two that bracket its ends, so the result errs on the safe side and is
    never larger than :func:`worst_case_probability`.  Set points whose band
    leaves the scanned grid get NaN.

    Parameters
    ----------
    ph
        Increasing pH grid [-], length n_ph.
    pass_matrix
        Bool array (n_draws, n_ph).
    tolerance
        [pH units].

    Returns
    -------
    numpy.ndarray
        (n_ph,) [-].
    """
    x = np.asarray(ph, dtype=float)
    passes = np.asarray(pass_matrix, dtype=bool)
    if passes.ndim != 2 or passes.shape[1] != x.size:
        raise ValueError("pass_matrix must have shape (n_draws, n_ph)")
    out = np.full(x.shape, np.nan)
    _, _, valid = _bands(x, tolerance)
    eps = 1e-9 * max(1.0, float(np.ptp(x)) if x.size else 1.0)
    # grid points bracketing the band: the last one at or below pH0 - tol and
    # the first one at or above pH0 + tol (conservative between grid points)
    lo = np.clip(np.searchsorted(x, x - tolerance + eps, side="right") - 1, 0, x.size - 1)
    hi = np.clip(np.searchsorted(x, x + tolerance - eps, side="left") + 1, 1, x.size)
    # failures per draw before each grid index: fails in [lo, hi) = C[hi] - C[lo]
    fails = np.concatenate([np.zeros((passes.shape[0], 1), dtype=np.int64),
                            np.cumsum(~passes, axis=1)], axis=1)
    clean = (fails[:, hi] - fails[:, lo]) == 0          # (n_draws, n_ph)
    out[valid] = clean.mean(axis=0)[valid]
    return out


def touches_range_edge(intervals: Sequence[Interval], ph: Sequence[float]) -> bool:
    """True if an interval reaches the first or last scanned pH."""
    return bool(range_ends_reached(intervals, ph))


def range_ends_reached(intervals: Sequence[Interval], ph: Sequence[float]) -> list[str]:
    """Which ends of the scanned pH range an interval reaches: ``"lower"``, ``"upper"``, both or none."""
    x = np.asarray(ph, dtype=float)
    if x.size == 0:
        return []
    eps = 1e-9 * max(1.0, float(np.ptp(x)))
    ends = []
    if any(low <= x[0] + eps for low, _ in intervals):
        ends.append("lower")
    if any(high >= x[-1] - eps for _, high in intervals):
        ends.append("upper")
    return ends


def range_end_warning(intervals: Sequence[Interval], ph: Sequence[float]) -> str | None:
    """The warning for a window that reaches an end of the scanned range, naming the end, its pH and
    the process file's key that moves it (None when it reaches neither)."""
    ends = range_ends_reached(intervals, ph)
    if not ends:
        return None
    x = np.asarray(ph, dtype=float)
    at = {"lower": x[0], "upper": x[-1]}
    keys = {"lower": "ph_from", "upper": "ph_to"}
    return (f"window touches the {' and '.join(ends)} end{'s' if len(ends) > 1 else ''} of the scanned range "
            f"(pH {' and '.join(f'{at[e]:.2f}' for e in ends)}): it may go on beyond; extend the pH grid "
            f"({' and '.join(keys[e] for e in ends)} under [scan] in the process file) to see where it ends")
