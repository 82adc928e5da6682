"""Per-draw pass intervals refined by bisection, and the exact window and
robust window they imply.

On the scan grid every draw passes or fails at each pH.  Where a draw changes
between two neighbouring grid points, the change is located by bisection on
new simulations of that draw (``outcome_fn``) until the bracket is at most
``resolution`` wide (0.01 pH by default), whatever the grid step.  The pass
side of the final bracket is kept as the edge, so a refined pass interval
only contains pH values that are verified passes or lie within
``resolution`` of one (the edge errs on the safe side).

From the per-draw pass intervals, two step functions of the set point x:

* ``p(x)``: share of draws that pass at x;
* ``r(x)``: share of draws that pass at EVERY pH within [x - tol, x + tol]
  (each pass interval shrunk by ``tol`` on both sides; drift beyond the
  scanned range is unknown and therefore not allowed).

The window is {x : p(x) >= level}, the robust set points {x : r(x) >= level};
both are computed exactly from the interval ends, and the plotted curves are
the same step functions, so curve, band, text and JSON agree.

Limitation: a draw that passes (or fails) only strictly between two grid
points, with the same verdict at both, is not seen; the grid step must
resolve the narrowest feature of the outcome curves.

References
----------
Bisection: Press, W. H. et al., Numerical Recipes, 3rd ed., Cambridge 2007,
section 9.1 (the bracket halves at every step).
Peterson, J. J., J. Biopharm. Stat. 2008, 18, 959 (probability of meeting
every specification at an operating point).
"""

from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np

from speciakin.decision.specs import Specification, evaluate_specs

__all__ = ["DEFAULT_RESOLUTION", "refine_pass_intervals", "shrink_intervals", "coverage",
           "level_set"]

Interval = tuple[float, float]

#: Width [pH units] to which every pass/fail change of a draw is located.
DEFAULT_RESOLUTION = 0.01


def _passes(outcome_fn: Callable, draws: np.ndarray, ph: float, specs: Sequence[Specification],
            names: Sequence[str], factor) -> np.ndarray:
    grid = np.array([ph])
    values = outcome_fn(draws, grid) if factor is None else outcome_fn(draws, grid, factor)
    values = np.asarray(values, dtype=float)
    finite = np.all(np.isfinite(values), axis=-1)
    return (evaluate_specs(values, list(specs), names) & finite)[:, 0]


def refine_pass_intervals(outcome_fn: Callable, draws: np.ndarray, ph: Sequence[float],
                          pass_matrix: np.ndarray, specs: Sequence[Specification],
                          names: Sequence[str], resolution: float = DEFAULT_RESOLUTION,
                          factor=None) -> tuple[list[list[Interval]], int]:
    """Pass intervals of every draw, edges located to ``resolution`` by bisection.

    Parameters
    ----------
    outcome_fn
        As for :func:`speciakin.decision.design.compute_window`; called with
        a batch of draws and a one-point pH grid.
    draws
        (n_draws, n_params).
    ph
        Increasing scan grid [-].
    pass_matrix
        (n_draws, n_ph) pass/fail on the grid (all specs, finite outcomes).
    specs, names
        Specifications and outcome names.
    resolution
        Largest bracket width [pH units], > 0.
    factor
        Second-factor value passed to ``outcome_fn`` (None = 1-D).

    Returns
    -------
    intervals, n_simulated
        Per draw, its sorted disjoint pass intervals [pH], inside the grid;
        and the number of (draw, pH) simulations the bisection used.
    """
    if not (math.isfinite(resolution) and resolution > 0):
        raise ValueError("resolution must be a finite number > 0")
    x = np.asarray(ph, dtype=float)
    passes = np.asarray(pass_matrix, dtype=bool)
    n_draws, n_ph = passes.shape
    # one task per grid cell where a draw changes verdict: (draw, a, b, passes at a)
    change = np.argwhere(passes[:, 1:] != passes[:, :-1])
    draw_idx = change[:, 0]
    a = x[change[:, 1]]
    b = x[change[:, 1] + 1]
    pass_a = passes[draw_idx, change[:, 1]]
    n_sim = 0
    while True:
        todo = np.flatnonzero(b - a > resolution * (1 + 1e-9))
        if todo.size == 0:
            break
        mids = 0.5 * (a[todo] + b[todo])
        # tasks that share a bracket share the midpoint: one batch per bracket
        for m in np.unique(mids):
            group = todo[mids == m]
            ok = _passes(outcome_fn, draws[draw_idx[group]], float(m), specs, names, factor)
            n_sim += group.size
            same = ok == pass_a[group]
            a[group] = np.where(same, m, a[group])
            b[group] = np.where(same, b[group], m)
    # pass side of the final bracket is the edge
    edge = np.where(pass_a, a, b)
    edges: list[dict[int, float]] = [dict() for _ in range(n_draws)]
    for d, cell, e in zip(draw_idx, change[:, 1], edge):
        edges[d][int(cell)] = float(e)
    out: list[list[Interval]] = []
    for d in range(n_draws):
        row: list[Interval] = []
        i = 0
        while i < n_ph:
            if not passes[d, i]:
                i += 1
                continue
            j = i
            while j + 1 < n_ph and passes[d, j + 1]:
                j += 1
            low = x[0] if i == 0 else edges[d][i - 1]
            high = x[-1] if j == n_ph - 1 else edges[d][j]
            row.append((float(low), float(high)))
            i = j + 1
        out.append(row)
    return out, n_sim


def shrink_intervals(intervals: Sequence[Sequence[Interval]], tolerance: float) -> list[list[Interval]]:
    """Each interval shrunk by ``tolerance`` on both sides (dropped when narrower than 2 tol)."""
    if not (math.isfinite(tolerance) and tolerance >= 0):
        raise ValueError("tolerance must be a finite number >= 0")
    return [[(lo + tolerance, hi - tolerance) for lo, hi in row if hi - lo >= 2 * tolerance - 1e-12]
            for row in intervals]


def coverage(intervals: Sequence[Sequence[Interval]], x: Sequence[float]) -> np.ndarray:
    """Share of draws whose (closed) intervals contain each point of ``x`` [-]."""
    pts = np.asarray(x, dtype=float)
    count = np.zeros(pts.shape)
    for row in intervals:
        inside = np.zeros(pts.shape, dtype=bool)
        for lo, hi in row:
            inside |= (pts >= lo - 1e-12) & (pts <= hi + 1e-12)
        count += inside
    return count / max(1, len(intervals))


def level_set(intervals: Sequence[Sequence[Interval]], level: float, count: int | None = None) -> list[Interval]:
    """Exact set {x : share of draws whose intervals contain x >= level}.

    The share is a step function that changes only at interval ends; a sweep
    over the sorted ends gives the set as disjoint closed intervals.
    ``count`` (a number of draws) replaces ``level`` x n as the threshold:
    the Monte Carlo guard's count (:func:`speciakin.decision.montecarlo.claim_count`).
    """
    n = len(intervals)
    if n == 0:
        return []
    need = (level * n if count is None else count) - 1e-9
    events = sorted([(lo, 0) for row in intervals for lo, _ in row]
                    + [(hi, 1) for row in intervals for _, hi in row])   # starts before ends
    out: list[Interval] = []
    count, start = 0, None
    for pos, kind in events:
        if kind == 0:
            count += 1
            if start is None and count >= need:
                start = pos
        else:
            if start is not None and count >= need and count - 1 < need:
                if out and abs(out[-1][1] - start) <= 1e-12:
                    out[-1] = (out[-1][0], pos)
                else:
                    out.append((float(start), float(pos)))
                start = None
            count -= 1
    return out
