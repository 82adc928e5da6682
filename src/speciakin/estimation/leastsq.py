"""Multistart nonlinear least squares on top of lmfit, with honest diagnostics.

``residual(values) -> ndarray`` receives the full parameter vector (given
order, fixed parameters included) and returns the weighted residuals.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np
from scipy.stats import qmc

from speciakin.errors import InputError, Location, SolverError
from speciakin.estimation.convergence import (GAUSS_NEWTON_STEP_LIMIT, GRADIENT_COSINE_LIMIT, SINGULAR_STATUS,
                                              check_minimum, free_columns, gauss_newton_step, gradient_cosine,
                                              polish, relative_step)
from speciakin.estimation.covariance import covariance_from_jacobian, t_interval
from speciakin.estimation.jacobian import JACOBIAN_METHODS, evaluate_jacobian
from speciakin.estimation.local import FIT_METHODS, CountedResidual, LocalFit, local_fit
from speciakin.estimation.parameters import ParameterSpec, normalize_parameters
from speciakin.estimation.results import FitResult, ParameterEstimate, StartRecord
from speciakin.estimation.statistics import (akaike_information_criterion, bayesian_information_criterion,
                                             group_residual_standard_deviation)

__all__ = ["fit_least_squares", "latin_hypercube_starts", "START_DECADES", "DIFFERENT_MINIMUM"]

#: Unbounded parameters with a non-zero value are sampled log-uniformly over
#: value * 10**[-START_DECADES, +START_DECADES] (sign kept).
START_DECADES = 2.0
#: A converged start is "at a different minimum" when its chi-square exceeds
#: the best by this relative amount.
DIFFERENT_MINIMUM = 1e-6
#: Gauss-Newton refinement steps for the chosen optimum (Gauss-Newton converges
#: only linearly on large-residual problems such as NIST ENSO; it stops early
#: once the step is below 1e-13 relative).
FINAL_POLISH_ITERATIONS = 10


def latin_hypercube_starts(specs: list[ParameterSpec], n_starts: int, rng: np.random.Generator,
                           decades: float = START_DECADES) -> np.ndarray:
    """Starting values of the varying parameters from a Latin hypercube.

    Per parameter the sampling range is: both bounds finite -> uniform in
    ``[lower, upper]``, or log-uniform when ``lower > 0`` and ``upper/lower >=
    100``; otherwise, for a value ``v != 0``, log-uniform over
    ``sign(v) * |v| * 10**[-decades, decades]``, and for ``v = 0`` uniform in
    ``[-1, 1]``; the range is then cut to the bounds.

    Returns
    -------
    ndarray, shape (n_starts, n_varying)

    References
    ----------
    McKay, M. D.; Beckman, R. J.; Conover, W. J. Technometrics 1979, 21, 239-245.
    """
    free = [s for s in specs if s.vary]
    if n_starts <= 0:
        return np.empty((0, len(free)))
    unit = qmc.LatinHypercube(d=len(free), rng=rng).random(n_starts)
    out = np.empty_like(unit)
    for k, s in enumerate(free):
        u = unit[:, k]
        if math.isfinite(s.lower) and math.isfinite(s.upper):
            if s.lower > 0 and s.upper / s.lower >= 100:
                out[:, k] = s.lower * (s.upper / s.lower) ** u
            else:
                out[:, k] = s.lower + (s.upper - s.lower) * u
            continue
        if s.value != 0.0:
            x = math.copysign(1.0, s.value) * abs(s.value) * 10.0 ** (decades * (2.0 * u - 1.0))
        else:
            x = 2.0 * u - 1.0
        out[:, k] = np.clip(x, s.lower, s.upper)
    return out


def _resolve_starts(starts: Any, specs, rng) -> np.ndarray:
    vary = np.array([s.vary for s in specs])
    given = np.array([s.value for s in specs])[vary]
    p = int(vary.sum())
    if isinstance(starts, str):
        if starts != "auto":
            raise InputError("unknown starts option", Location(key="starts"), starts,
                             "'auto', a number of starts or an array of starting values")
        n = 1 + min(max(8, 2 * p), 32)
    elif isinstance(starts, (int, np.integer)) and not isinstance(starts, bool):
        if starts < 1:
            raise InputError("number of starts must be at least 1", Location(key="starts"), starts, ">= 1")
        n = int(starts)
    else:
        arr = np.asarray(starts, dtype=float)
        if arr.ndim != 2 or arr.shape[1] != p or not np.all(np.isfinite(arr)):
            raise InputError("starting values have the wrong shape or are not finite", Location(key="starts"),
                             arr.shape, f"a finite array of shape (k, {p}), one column per varying parameter")
        return arr
    return np.vstack([given[None, :], latin_hypercube_starts(specs, n - 1, rng)])


def fit_least_squares(residual: Callable[[np.ndarray], np.ndarray], parameters: Sequence[ParameterSpec] | Any, *,
                      jacobian: str | Callable | None = None, starts: str | int | np.ndarray = "auto",
                      seed: int | np.random.Generator | None = None,
                      progress: Callable[[int, int, float], None] | None = None,
                      method: str = "least_squares", max_evaluations: int | None = None,
                      tolerance: float = 1e-12, groups: Sequence | None = None, level: float = 0.95,
                      scale_by_residual_variance: bool = True, dof_reduction: float = 0.0,
                      one_sided: np.ndarray | None = None) -> FitResult:
    """Fit parameters by multistart nonlinear least squares.

    Parameters
    ----------
    residual
        ``residual(values) -> ndarray (n,)`` of weighted residuals; ``values``
        is the full parameter vector in the given order.  Must accept a complex
        vector when ``jacobian="complex"``.
    parameters
        List of :class:`ParameterSpec` (or dicts) or an ``lmfit.Parameters``.
    jacobian
        ``None`` (optimizer's own forward differences, central differences with
        Richardson extrapolation at the optimum), ``"central"``, ``"complex"``,
        or ``callable(values) -> (n, n_parameters)``.
    starts
        ``"auto"`` (given values + ``min(max(8, 2p), 32)`` Latin-hypercube
        points), a total number of starts (the first is the given values), or
        an array ``(k, p)`` of starting values of the varying parameters.
    seed
        Seed or generator for the Latin hypercube.
    progress
        ``progress(done, total, best_chisqr)`` after every start (``inf`` until one converged).
    method
        An lmfit method from :data:`FIT_METHODS`.
    max_evaluations
        Residual evaluations allowed per start (lmfit's default when None).
    tolerance
        ftol = xtol = gtol passed to the optimizer.
    groups
        One label per residual; the RMS residual per label is reported.
    level
        Confidence level of the covariance intervals.
    scale_by_residual_variance
        Scale the covariance by ``s^2 = chi2/(n-p)`` (True) or treat the
        residuals as already divided by known standard deviations (False).
    dof_reduction
        Chi-square that ``n`` residuals would carry in expectation under the
        stated errors but these data do not, beyond the ``p`` parameters, for
        a caller whose residuals have such a structure (may be fractional;
        the campaign fit passes none: it whitens closed area% samples,
        ``pipeline.closure``).  ``dof = n - dof_reduction - p`` in the reduced
        chi-square, the covariance scale, the t intervals and the profiles'
        threshold.
    one_sided
        Mask of residuals that are zero while the model stays on the allowed
        side (values reported below the LOQ: ``max(model - LOQ, 0) / sigma``).
        Those that are zero at the optimum carry neither chi-square nor a
        degree of freedom and are left out of ``n`` in ``dof``, as is every
        residual that is zero with a zero Jacobian row (a datum the model
        meets exactly whatever the parameters, such as a titrant reading of 0
        before any dosing); the count is ``FitResult.n_inactive``.

    Returns
    -------
    FitResult

    Raises
    ------
    InputError
        Bad parameters, options or residual shape.
    SolverError
        No start converged; the message lists the optimizer's words.

    References
    ----------
    Bates, D. M.; Watts, D. G. Nonlinear Regression Analysis and Its
    Applications; Wiley, 1988, ch. 2-3.
    Newville, M. et al. LMFIT, Zenodo 2014, doi:10.5281/zenodo.11813.
    """
    specs = normalize_parameters(parameters)
    if method not in FIT_METHODS:
        raise InputError("unknown fitting method", Location(key="method"), method, "one of " + ", ".join(FIT_METHODS))
    if not (0.0 < level < 1.0):
        raise InputError("confidence level must lie between 0 and 1", Location(key="level"), level, "0 < level < 1")
    if jacobian is not None and not callable(jacobian) and jacobian not in JACOBIAN_METHODS:
        raise InputError("unknown Jacobian method", Location(key="jacobian"), jacobian,
                         "None, " + ", ".join(repr(k) for k in JACOBIAN_METHODS) + " or a callable")
    rng = np.random.default_rng(seed)
    vary_mask = np.array([s.vary for s in specs])
    base = np.array([s.value for s in specs], dtype=float)
    counted = CountedResidual(residual)
    first = counted(base)
    counted.n_residuals = first.size
    n, p = first.size, int(vary_mask.sum())
    if n <= p:
        raise InputError("fewer residuals than varying parameters", Location(key="residual"), n, f"more than {p}")
    if not (dof_reduction < n - p):
        raise InputError("the data's structure leaves no degree of freedom", Location(key="dof_reduction"),
                         dof_reduction, f"below {n - p} ({n} residuals, {p} varying parameters)")
    if groups is not None and len(groups) != n:
        raise InputError("one group label per residual is needed", Location(key="groups"), len(groups), str(n))
    if one_sided is not None:
        one_sided = np.asarray(one_sided, dtype=bool)
        if one_sided.shape != (n,):
            raise InputError("one one-sided flag per residual is needed", Location(key="one_sided"),
                             one_sided.size, str(n))
    start_matrix = _resolve_starts(starts, specs, rng)

    records: list[StartRecord] = []
    fits: list[LocalFit] = []
    best_chi = math.inf
    for k, row in enumerate(start_matrix):
        x0 = base.copy()
        x0[vary_mask] = np.clip(row, [s.lower for s in specs if s.vary], [s.upper for s in specs if s.vary])
        fit = local_fit(counted, specs, x0, vary_mask, method=method, jacobian=jacobian,
                        tolerance=tolerance, max_evaluations=max_evaluations)
        ok, status = fit.converged, fit.message
        if ok:
            fit = polish(counted, specs, fit, vary_mask, jacobian, richardson=False)
            ok, status, _ = check_minimum(counted, specs, fit, vary_mask, jacobian)
        fits.append(fit)
        records.append(StartRecord(k, row.tolist(), fit.values[vary_mask].tolist() if np.all(np.isfinite(fit.values))
                                   else None, None if math.isnan(fit.chisqr) else fit.chisqr, ok,
                                   (status if status == SINGULAR_STATUS else "converged") if ok else status,
                                   fit.n_evaluations))
        if ok:
            best_chi = min(best_chi, fit.chisqr)
        if progress is not None:
            progress(k + 1, len(start_matrix), best_chi)
    good = [k for k, r in enumerate(records) if r.success]
    if not good:
        messages = sorted({r.status for r in records})
        ended = [k for k, f in enumerate(fits) if f.residual is not None and math.isfinite(f.chisqr)]
        if not ended:
            raise SolverError(f"no start converged ({len(records)} tried): " + "; ".join(messages[:5]))
        # every start stopped at finite residuals without passing the tests: the lowest one is reported,
        # never as a success (a stationary point it reaches may be a wrong local minimum)
        best = min(ended, key=lambda k: fits[k].chisqr)
        result = _assemble(counted, specs, fits, records, best, vary_mask, jacobian, method, groups, level,
                           scale_by_residual_variance, dof_reduction, one_sided)
        text = (f"no start converged ({len(records)} tried): " + "; ".join(messages[:5])
                + f"; the estimates are those of the lowest chi-square reached (start {best}) and are doubtful: "
                "try more starts")
        result.warnings.insert(0, text)
        result.success, result.message = False, text
        return result
    # lowest chi-square; among starts within DIFFERENT_MINIMUM of it, an isolated minimum beats a flat one
    best = min(good, key=lambda k: fits[k].chisqr)
    isolated = [k for k in good if records[k].status != SINGULAR_STATUS
                and fits[k].chisqr <= fits[best].chisqr * (1 + DIFFERENT_MINIMUM)]
    if isolated:
        best = min(isolated, key=lambda k: fits[k].chisqr)
    return _assemble(counted, specs, fits, records, best, vary_mask, jacobian, method, groups, level,
                     scale_by_residual_variance, dof_reduction, one_sided)


def _assemble(counted, specs, fits, records, best, vary_mask, jacobian, method, groups, level,
              scale_by_residual_variance, dof_reduction=0.0, one_sided=None) -> FitResult:
    fit = polish(counted, specs, fits[best], vary_mask, jacobian, richardson=True,
                 iterations=FINAL_POLISH_ITERATIONS)
    x, r = fit.values, fit.residual
    n, p = r.size, int(vary_mask.sum())
    chisqr = fit.chisqr
    columns = np.flatnonzero(vary_mask)
    jac = evaluate_jacobian(jacobian, counted, x, columns, richardson=True, f0=r)
    # residuals that are zero and that no parameter moves (a datum the model meets exactly by its
    # construction, a one-sided residual on its allowed side) carry neither chi-square nor a degree
    # of freedom
    inactive_mask = (r == 0.0) & np.all(jac == 0.0, axis=1)
    if one_sided is not None:
        inactive_mask |= one_sided & (r == 0.0)
    inactive = int(np.count_nonzero(inactive_mask))
    dof = max(n - inactive - dof_reduction - p, 1.0)
    cov = covariance_from_jacobian(jac, chisqr, n, scale_by_residual_variance=scale_by_residual_variance,
                                   dof_reduction=n - p - dof)
    free = free_columns(specs, x, vary_mask)
    sel = np.isin(columns, free)
    cosine = gradient_cosine(jac[:, sel], r) if sel.any() else 0.0
    gn_step = relative_step(gauss_newton_step(jac[:, sel], r), x[columns][sel]) if sel.any() else 0.0
    lo, hi = t_interval(x[columns], cov.standard_errors, dof, level)
    names = [specs[i].name for i in columns]
    warnings: list[str] = []
    estimates: list[ParameterEstimate] = []
    k = 0
    for i, s in enumerate(specs):
        at_bound = None
        if s.vary:
            tol = 1e-8 * max(abs(x[i]), 1e-300)
            at_bound = "lower" if x[i] - s.lower <= tol else ("upper" if s.upper - x[i] <= tol else None)
            if at_bound:
                warnings.append(f"parameter {s.name} is at its {at_bound} bound ({x[i]:.6g}); its standard error "
                                "and covariance interval assume an interior optimum and are not reliable")
            se = float(cov.standard_errors[k])
            estimates.append(ParameterEstimate(s.name, float(x[i]), se, s.unit, True, float(s.value), s.lower,
                                               s.upper, at_bound, (float(lo[k]), float(hi[k]))))
            k += 1
        else:
            estimates.append(ParameterEstimate(s.name, float(x[i]), None, s.unit, False, float(s.value),
                                               s.lower, s.upper))
    for a in range(p):
        for b in range(a + 1, p):
            c = cov.correlation[a, b]
            if np.isfinite(c) and abs(c) > 0.95:
                warnings.append(f"parameters {names[a]} and {names[b]} are strongly correlated ({c:+.3f}); "
                                "the data constrain mainly a combination of them")
    if cov.singular:
        bad = [names[j] for j in range(p) if not np.isfinite(cov.standard_errors[j])]
        warnings.append(f"singular Jacobian (rank {cov.rank} of {p}): the data cannot determine "
                        + (", ".join(bad) if bad else "every parameter") + " separately")
    elif cov.condition_number > 1e10:
        warnings.append(f"nearly singular Jacobian (condition number {cov.condition_number:.2g}); "
                        "standard errors may be inaccurate")
    # start table: distance from the best and different minima
    best_free = x[vary_mask]
    scale = np.maximum(np.abs(best_free), 1e-300)
    n_worse = 0
    worst = chisqr
    n_elsewhere = 0
    for rec, f in zip(records, fits):
        if rec.final_values is not None:
            rec.distance_from_best = float(np.max(np.abs(np.asarray(rec.final_values) - best_free) / scale))
        if rec.success and rec.index != best:
            if f.chisqr > chisqr * (1 + DIFFERENT_MINIMUM) + 1e-300:
                n_worse += 1
                worst = max(worst, f.chisqr)
                rec.status = f"local minimum ({f.chisqr / chisqr:.4g} x best chi-square)" if chisqr > 0 \
                    else "local minimum"
            elif rec.distance_from_best is not None and rec.distance_from_best > 1e-3:
                n_elsewhere += 1
    n_failed = sum(not rec.success for rec in records)
    if n_worse:
        warnings.append(f"start spread: {n_worse} of {len(records)} starts ended at a different, worse minimum "
                        f"(chi-square up to {worst / chisqr:.3g} times the best)" if chisqr > 0 else
                        f"start spread: {n_worse} starts ended at a different minimum")
    if n_elsewhere:
        warnings.append(f"start spread: {n_elsewhere} starts reached the same chi-square at parameter values more "
                        "than 0.1 % away; the optimum may not be unique")
    if n_failed:
        warnings.append(f"{n_failed} of {len(records)} starts failed (see the start table)")
    n_below = sum(1 for rec in records if not rec.success and rec.chisqr is not None and rec.chisqr < chisqr)
    if n_below:
        warnings.append(f"{n_below} unconverged starts stopped at a lower chi-square than the reported optimum; "
                        "allow more evaluations (max_evaluations) or more starts")
    if not records[0].success and best != 0:
        warnings.append(f"the local fit from the given values did not succeed ({records[0].status}); "
                        f"the optimum comes from start {best}")
    stationary = cosine <= GRADIENT_COSINE_LIMIT or gn_step <= GAUSS_NEWTON_STEP_LIMIT
    success = stationary and not cov.singular
    if not stationary:
        message = f"gradient not small at the optimum (cosine {cosine:.2g}, Gauss-Newton step {gn_step:.2g})"
        warnings.append(message)
    elif cov.singular:
        message = "singular Jacobian: the minimum is not isolated (a direction of parameter space leaves " \
                  "chi-square unchanged); the estimates are not a unique solution"
    else:
        message = "converged"
    jac_name = (getattr(jacobian, "label", "user") if callable(jacobian)
                else (jacobian or "optimizer forward / central at optimum"))
    return FitResult(
        parameters=estimates, parameter_specs=list(specs), varying_names=names, chisqr=float(chisqr),
        reduced_chisqr=float(chisqr / dof), aic=akaike_information_criterion(chisqr, n, p) if chisqr > 0 else -math.inf,
        bic=bayesian_information_criterion(chisqr, n, p) if chisqr > 0 else -math.inf, n_residuals=n,
        n_varying=p, degrees_of_freedom=float(dof), dof_reduction=float(dof_reduction),
        n_inactive=inactive,
        residual_standard_deviation=float(math.sqrt(chisqr / dof)),
        group_residual_sd=group_residual_standard_deviation(
            r[~inactive_mask], None if groups is None else [g for g, a in zip(groups, inactive_mask) if not a]),
        covariance=cov.covariance,
        correlation=cov.correlation, rank=cov.rank, condition_number=cov.condition_number, singular=cov.singular,
        gradient_cosine=cosine, success=success, message=message, method=method, jacobian_method=jac_name,
        scale_by_residual_variance=scale_by_residual_variance, level=level, n_evaluations=counted.count,
        best_start=best, starts=records, residuals=np.asarray(r, dtype=float), warnings=warnings)
