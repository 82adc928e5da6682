"""Profile likelihood intervals, re-optimising the other parameters at each point."""

from __future__ import annotations

import math
from typing import Callable, Sequence

import numpy as np
from scipy import stats

from speciakin.errors import InputError, Location
from speciakin.estimation.convergence import polish
from speciakin.estimation.jacobian import JACOBIAN_METHODS
from speciakin.estimation.local import FIT_METHODS, CountedResidual, LocalFit, local_fit
from speciakin.estimation.results import FitResult, Profile

__all__ = ["profile_likelihood", "profile_all", "profile_threshold"]

#: Consecutive failed re-optimisations after which a side of the profile stops.
MAX_CONSECUTIVE_FAILURES = 3
#: Times a side may step back with a quarter step after overshooting the threshold by more than 4x.
MAX_REFINEMENTS = 6


def profile_threshold(level: float, chisqr: float, degrees_of_freedom: float, scale: str) -> float:
    """Delta chi-square bounding a profile interval.

    ``scale="known"`` (residuals divided by known standard deviations):
    ``Delta = chi2_{1}(level)`` (3.84 at 95 %), the likelihood-ratio threshold of
    Raue et al.  ``scale="estimated"`` (common error scale estimated from the fit):
    ``Delta = s^2 F_{1, dof}(level)`` with ``s^2 = chi2 / dof`` (the fit's
    degrees of freedom, ``n - p`` unless some residuals carry none); for a
    model linear in its parameters this reproduces the t interval exactly
    (``t_{dof}^2 = F_{1, dof}``).

    References
    ----------
    Raue, A. et al. Bioinformatics 2009, 25, 1923-1929, eq. 4 and 6.
    Bates, D. M.; Watts, D. G. Nonlinear Regression Analysis and Its
    Applications; Wiley, 1988, section 6.1 (profile t with the F quantile).
    """
    if scale == "known":
        return float(stats.chi2.ppf(level, 1))
    if scale == "estimated":
        return float(chisqr / degrees_of_freedom * stats.f.ppf(level, 1, degrees_of_freedom))
    raise InputError("unknown profile scale", Location(key="scale"), scale, "'estimated' or 'known'")


def _crossing(v_in: float, d_in: float, v_out: float, d_out: float, threshold: float) -> float:
    """Interpolate where delta chi-square reaches ``threshold``, linearly in sqrt(delta)."""
    z_in, z_out, z = math.sqrt(max(d_in, 0.0)), math.sqrt(max(d_out, 0.0)), math.sqrt(threshold)
    if z_out == z_in:
        return v_out
    return v_in + (z - z_in) * (v_out - v_in) / (z_out - z_in)


def profile_likelihood(residual: Callable[[np.ndarray], np.ndarray], fit_result: FitResult, name: str, *,
                       points: int = 30, span: float = 1.0, level: float | None = None,
                       scale: str | None = None, jacobian: str | Callable | None = None,
                       method: str | None = None, tolerance: float = 1e-10, max_evaluations: int | None = None,
                       progress: Callable[[int, int, float], None] | None = None) -> Profile:
    """Profile of parameter ``name``: minimum chi-square over the others at fixed values.

    From the optimum, each side steps outward; the first step is
    ``span * t * se / 4`` (or 10 % of the value when the standard error is not
    finite) and doubles whenever chi-square rose by less than a quarter of the
    threshold over the last step.  Each point re-optimises the other varying
    parameters, warm-started from the neighbouring point.  A side ends when
    delta chi-square passes the threshold (the interval end is interpolated
    linearly in ``sqrt(delta)``), at a bound, after ``points`` points, or after
    repeated failures; in the last three cases the end is OPEN: reported as
    None with ``open_below`` / ``open_above`` set, never as a number.

    Parameters
    ----------
    residual
        The residual function the fit used.
    fit_result
        The fit to profile around.
    name
        Parameter to profile (must vary in the fit).
    points
        Maximum points per side.
    span
        Scale of the first step relative to the covariance half-width / 4.
    level
        Confidence level (default: the fit's).
    scale
        ``"estimated"`` or ``"known"`` (default follows the fit's
        ``scale_by_residual_variance``); see :func:`profile_threshold`.
    jacobian, method, tolerance, max_evaluations
        As for :func:`fit_least_squares` (defaults: the fit's Jacobian method and method).
    progress
        ``progress(done, total, lowest_chisqr)`` after each point; total is the
        maximum number of points.

    Returns
    -------
    Profile

    References
    ----------
    Raue, A. et al. Bioinformatics 2009, 25, 1923-1929.
    Venzon, D. J.; Moolgavkar, S. H. Appl. Stat. 1988, 37, 87-94.
    """
    names = [s.name for s in fit_result.parameter_specs]
    if name not in names:
        raise InputError("no such parameter", Location(key="name"), name, "one of " + ", ".join(names))
    idx = names.index(name)
    specs = fit_result.parameter_specs
    if not specs[idx].vary:
        raise InputError("a fixed parameter cannot be profiled", Location(key=f"parameter.{name}"), name,
                         "a parameter with vary=True")
    level = fit_result.level if level is None else level
    if not (0.0 < level < 1.0):
        raise InputError("confidence level must lie between 0 and 1", Location(key="level"), level, "0 < level < 1")
    if points < 2:
        raise InputError("too few profile points", Location(key="points"), points, "at least 2 per side")
    scale = scale or ("estimated" if fit_result.scale_by_residual_variance else "known")
    method = method or fit_result.method
    if method not in FIT_METHODS:
        raise InputError("unknown fitting method", Location(key="method"), method, "one of " + ", ".join(FIT_METHODS))
    if jacobian is None and fit_result.jacobian_method in JACOBIAN_METHODS:
        jacobian = fit_result.jacobian_method
    threshold = profile_threshold(level, fit_result.chisqr, fit_result.degrees_of_freedom, scale)
    best = fit_result.value_vector
    chi_best = fit_result.chisqr
    counted = CountedResidual(residual, fit_result.n_residuals)
    vary = np.array([s.vary for s in specs])
    vary[idx] = False
    estimate = fit_result.parameters[idx]
    se = estimate.standard_error
    if estimate.covariance_interval is not None and se is not None and math.isfinite(se) and se > 0:
        half = 0.5 * (estimate.covariance_interval[1] - estimate.covariance_interval[0])
        first_step = span * half / 4.0
    else:
        first_step = 0.1 * span * max(abs(best[idx]), 1e-12)
    lower, upper = specs[idx].lower, specs[idx].upper
    warnings: list[str] = []
    rows: list[tuple[float, float, np.ndarray]] = [(best[idx], chi_best, best.copy())]
    ends: dict[int, float | None] = {}
    n_failed = 0
    done = 0
    total = 2 * (points + MAX_REFINEMENTS)
    lowest = chi_best
    for direction in (-1, 1):
        bound = lower if direction < 0 else upper
        step = first_step
        x_prev, d_prev, v_prev = best.copy(), 0.0, best[idx]
        failures = 0
        refinements = 0
        ends[direction] = None
        for _ in range(points + MAX_REFINEMENTS):
            v = v_prev + direction * step
            at_bound = (direction < 0 and v <= bound) or (direction > 0 and v >= bound)
            if at_bound:
                v = bound
            start = x_prev.copy()
            start[idx] = v
            if vary.any():
                fit = local_fit(counted, specs, start, vary, method=method, jacobian=jacobian,
                                tolerance=tolerance, max_evaluations=max_evaluations)
                if fit.converged:
                    fit = polish(counted, specs, fit, vary, jacobian, richardson=False)
            else:
                r = counted(start)
                ok = bool(np.all(np.isfinite(r)))
                fit = LocalFit(start, float(r @ r) if ok else math.nan, r if ok else None, ok, "", 1)
            done += 1
            if not fit.converged or not math.isfinite(fit.chisqr):
                n_failed += 1
                failures += 1
                rows.append((v, math.nan, start))
                if failures >= MAX_CONSECUTIVE_FAILURES or at_bound:
                    warnings.append(f"profile of {name}: re-optimisation failed near {v:.6g}; "
                                    f"that side of the interval is left open")
                    break
                v_prev = v
                continue
            failures = 0
            delta = fit.chisqr - chi_best
            lowest = min(lowest, fit.chisqr)
            rows.append((v, fit.chisqr, fit.values))
            if progress is not None:
                progress(done, total, lowest)
            if delta >= threshold:
                if delta > 4.0 * threshold and refinements < MAX_REFINEMENTS:
                    # overshoot: go back and approach the crossing with a smaller step
                    refinements += 1
                    step /= 4.0
                    continue
                ends[direction] = _crossing(v_prev, d_prev, v, delta, threshold)
                break
            if at_bound:
                break
            if delta - d_prev < threshold / 4.0:
                step *= 2.0
            x_prev, d_prev, v_prev = fit.values, max(delta, 0.0), v
    rows.sort(key=lambda row: row[0])
    values = np.array([row[0] for row in rows])
    chis = np.array([row[1] for row in rows])
    deltas = chis - chi_best
    others = {n: [float(row[2][k]) for row in rows] for k, n in enumerate(names) if specs[k].vary and k != idx}
    if lowest < chi_best * (1 - 1e-9) - 1e-300:
        warnings.append(f"profile of {name} found a lower chi-square ({lowest:.8g} < {chi_best:.8g}); "
                        "the fit was not at the global minimum: refit from the profile's best point")
    open_below, open_above = ends[-1] is None, ends[1] is None
    flat = open_below and open_above and bool(np.all(np.nan_to_num(deltas, nan=0.0) < threshold))
    if flat:
        warnings.append(f"the data cannot determine {name}: the profile stays below the threshold "
                        f"over [{values[0]:.4g}, {values[-1]:.4g}]")
    elif open_below:
        warnings.append(f"the data set no lower limit on {name} (profile interval open below)")
    elif open_above:
        warnings.append(f"the data set no upper limit on {name} (profile interval open above)")
    return Profile(name=name, unit=specs[idx].unit, best_value=float(best[idx]), best_chisqr=float(chi_best),
                   values=values, chisqr=chis, delta_chisqr=deltas, threshold=threshold, level=level, scale=scale,
                   lower=ends[-1], upper=ends[1], open_below=open_below, open_above=open_above, flat=flat,
                   n_failed=n_failed, others=others, warnings=warnings)


def profile_all(residual: Callable[[np.ndarray], np.ndarray], fit_result: FitResult,
                names: Sequence[str] | None = None, *, progress: Callable[[int, int, float], None] | None = None,
                **options) -> dict[str, Profile]:
    """Profiles of several (default: all varying) parameters.

    ``progress(done, total, lowest_chisqr)`` is called after each parameter;
    other keywords go to :func:`profile_likelihood`.  Use
    ``fit_result.with_profiles(result)`` to put the intervals into the fit result.
    """
    names = list(fit_result.varying_names if names is None else names)
    out: dict[str, Profile] = {}
    lowest = fit_result.chisqr
    for k, n in enumerate(names):
        out[n] = profile_likelihood(residual, fit_result, n, **options)
        finite = out[n].chisqr[np.isfinite(out[n].chisqr)]
        if finite.size:
            lowest = min(lowest, float(finite.min()))
        if progress is not None:
            progress(k + 1, len(names), lowest)
    return out
