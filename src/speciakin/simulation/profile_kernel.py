"""Time profiles of a run, compiled: knots joined by straight lines, and the smoothed pH log.

A temperature profile, and a pH log that is not smoothed, are piecewise
linear between their knots and held constant outside them
(:func:`interpolate`).  A smoothed pH log (``runs_layout.smooth_ph_log``) is a
cubic spline: one cubic per interval between its breakpoints, stored as
coefficients of powers of (t - t_j), and held at its end value outside them
(:func:`spline_value`).  :func:`logged_ph` reads either kind.
"""

from __future__ import annotations

from speciakin.simulation.jit_options import leaf_kernel


@leaf_kernel(inline="always")
def knot_interval(times, n, t):
    """j with times[j] <= t < times[j + 1], for times[0] < t < times[n - 1] (bisection)."""
    lo = 0
    hi = n - 1
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if times[mid] <= t:
            lo = mid
        else:
            hi = mid
    return lo


@leaf_kernel
def interpolate(times, values, n, t):
    """Piecewise-linear interpolation held constant outside the knots."""
    if n == 1 or t <= times[0]:
        return values[0]
    if t >= times[n - 1]:
        return values[n - 1]
    lo = knot_interval(times, n, t)
    w = (t - times[lo]) / (times[lo + 1] - times[lo])
    return values[lo] + w * (values[lo + 1] - values[lo])


@leaf_kernel
def spline_value(times, coef, n, t):
    """(value, d/dt) of a piecewise cubic at t: on [times[j], times[j+1]) the cubic
    ``coef[j, 0] + coef[j, 1] x + coef[j, 2] x^2 + coef[j, 3] x^3``, x = t - times[j];
    outside [times[0], times[n-1]] the value at that end, slope 0."""
    if n == 1 or t <= times[0]:
        return coef[0, 0], 0.0
    if t >= times[n - 1]:
        return coef[n - 1, 0], 0.0
    lo = knot_interval(times, n, t)
    x = t - times[lo]
    a1 = coef[lo, 1]
    a2 = coef[lo, 2]
    a3 = coef[lo, 3]
    return coef[lo, 0] + x * (a1 + x * (a2 + x * a3)), a1 + x * (2.0 * a2 + x * 3.0 * a3)


@leaf_kernel
def logged_ph(times, values, coef, n, smoothed, t):
    """(pH, d pH/dt) of a pH log at t, before the run's offset: the smoothed log's spline,
    or the readings joined by straight lines (slope 0 here: the caller knows the segment's)."""
    if smoothed:
        return spline_value(times, coef, n, t)
    return interpolate(times, values, n, t), 0.0
