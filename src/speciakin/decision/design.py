"""Orchestrates the pH-window computation: parameter draws -> outcomes ->
pass/fail -> probability, windows, robust windows, bands and 2-D map.

The caller supplies ``outcome_fn``, which turns a batch of parameter draws
into end-of-process outcomes (normally by simulating the process runs of
:func:`speciakin.decision.process.process_runs` with the compiled simulator).
Everything here is array bookkeeping around the pure functions of
:mod:`speciakin.decision.window`.

References
----------
Peterson, J. J. "A Bayesian approach to the ICH Q8 definition of design
space", J. Biopharm. Stat. 2008, 18, 959-975.
"""

from __future__ import annotations

from typing import Callable, Sequence

import numpy as np

from speciakin.decision.draws import POSTERIOR_SOURCE
from speciakin.decision.montecarlo import MC_CONFIDENCE, claim_count, lower_bound, minimum_draws
from speciakin.decision.outcomes import outcome_bands
from speciakin.decision.process import FACTOR_KINDS, ProcessPlan
from speciakin.decision.refine import (
    DEFAULT_RESOLUTION,
    coverage,
    level_set,
    refine_pass_intervals,
    shrink_intervals,
)
from speciakin.decision.result import WindowResult
from speciakin.decision.specs import Specification, evaluate_specs
from speciakin.decision.window import (
    interval_containing,
    probability_curve,
    range_end_warning,
    widest_interval,
    worst_case_probability,
)
from speciakin.errors import SolverError

__all__ = ["compute_window", "choose_best_index", "process_scan_arguments"]

OutcomeFunction = Callable[..., np.ndarray]


def choose_best_index(score: np.ndarray) -> int | None:
    """Index of the highest finite score; ties go to the middle of the longest
    run of tied neighbours (the point farthest from where the score drops).

    Returns None when no score is finite.
    """
    s = np.asarray(score, dtype=float)
    finite = np.isfinite(s)
    if not finite.any():
        return None
    best = np.nanmax(np.where(finite, s, np.nan))
    tied = np.flatnonzero(finite & (s >= best - 1e-12))
    runs = np.split(tied, np.flatnonzero(np.diff(tied) > 1) + 1)
    longest = max(runs, key=len)
    return int(longest[(len(longest) - 1) // 2])


def _validate(draws: np.ndarray, ph: np.ndarray, level: float, tolerance: float) -> None:
    if draws.ndim != 2 or draws.shape[0] < 1:
        raise ValueError("draws must have shape (n_draws >= 1, n_params)")
    if not np.all(np.isfinite(draws)):
        raise SolverError("parameter draws contain NaN or infinity")
    if ph.ndim != 1 or ph.size < 2 or not np.all(np.isfinite(ph)) or np.any(np.diff(ph) <= 0):
        raise ValueError("ph_grid must be a finite, strictly increasing 1-D array of >= 2 values")
    if not 0.0 < level < 1.0:
        raise ValueError("level must lie strictly between 0 and 1")
    if not np.isfinite(tolerance) or tolerance < 0:
        raise ValueError("tolerance must be a finite number >= 0")


def _simulate(outcome_fn: OutcomeFunction, draws: np.ndarray, ph: np.ndarray,
              factors: Sequence[float | None], n_outcomes: int, batch_size: int,
              progress: Callable[[int, int], None] | None) -> np.ndarray:
    n_draws = draws.shape[0]
    out = np.empty((n_draws, ph.size, len(factors), n_outcomes))
    total = n_draws * len(factors)
    done = 0
    for j, factor in enumerate(factors):
        for start in range(0, n_draws, batch_size):
            batch = draws[start:start + batch_size]
            values = outcome_fn(batch, ph) if factor is None else outcome_fn(batch, ph, factor)
            values = np.asarray(values, dtype=float)
            expected = (batch.shape[0], ph.size, n_outcomes)
            if values.shape != expected:
                raise ValueError(f"outcome_fn returned shape {values.shape}, expected {expected}")
            out[start:start + batch.shape[0], :, j, :] = values
            done += batch.shape[0]
            if progress is not None:
                progress(done, total)
    return out


def compute_window(outcome_fn: OutcomeFunction, draws: np.ndarray, ph_grid: Sequence[float],
                   specs: Sequence[Specification], level: float = 0.95, tolerance: float = 0.3,
                   factor_grid: Sequence[float] | None = None,
                   progress: Callable[[int, int], None] | None = None, *,
                   outcome_names: Sequence[str], batch_size: int = 64,
                   uncertainty_source: str = POSTERIOR_SOURCE,
                   factor_name: str | None = None, factor_unit: str | None = None,
                   nominal_factor: float | None = None,
                   factor_display_values: Sequence[float] | None = None,
                   resolution: float = DEFAULT_RESOLUTION,
                   mc_confidence: float | None = MC_CONFIDENCE) -> WindowResult:
    """Probability that every specification is met, against pH (and a second factor).

    Parameters
    ----------
    outcome_fn
        ``outcome_fn(draws_batch, ph_grid)`` (or ``(draws_batch, ph_grid,
        factor_value)`` when ``factor_grid`` is given) -> array
        (n_batch, n_ph, n_outcomes) of end-of-process outcomes [%] in the
        order of ``outcome_names``.  Non-finite outcomes mark a failed
        simulation; that draw counts as failing at that point.
    draws
        (n_draws, n_params) parameter draws (posterior sample or
        :func:`speciakin.decision.draws.draws_from_covariance`).
    ph_grid
        Increasing set-point pH values [-].
    specs
        Specifications that must all be met.
    level
        Required probability [-], in (0, 1).
    tolerance
        Plant pH control half-band [pH units].
    factor_grid
        Values of a second factor (in ``factor_unit``) for a 2-D map.
    progress
        Called as ``progress(done, total)`` after each batch.
    outcome_names
        Names of the outcomes on the last axis of ``outcome_fn``'s result.
    batch_size
        Draws per call of ``outcome_fn``.
    uncertainty_source
        Shown in the result (``"posterior"`` or the covariance source name).
    factor_name, factor_unit
        Label of the second factor.
    nominal_factor
        Factor value for the 1-D curves of a 2-D scan (nearest grid value,
        same units as ``factor_grid``); default: the middle of ``factor_grid``.
    factor_display_values
        The factor values as shown in the result (e.g. [C] when
        ``factor_grid`` is in [K]); default: ``factor_grid``.
    resolution
        Every pass/fail change of a draw between grid points is located by
        bisection on new simulations to this width [pH units]
        (:mod:`speciakin.decision.refine`); window and robust edges follow.
    mc_confidence
        Monte Carlo guard (:mod:`speciakin.decision.montecarlo`): a set point
        is claimed only where the one-sided Clopper-Pearson lower bound of
        the probability at this confidence is >= ``level``; the curves are
        that lower bound.  None (or too few draws for the guard) = the share
        of passing draws.

    Returns
    -------
    WindowResult

    References
    ----------
    Peterson, J. Biopharm. Stat. 2008, 18, 959 (posterior probability of
    meeting every specification at an operating point).
    """
    theta = np.asarray(draws, dtype=float)
    ph = np.asarray(ph_grid, dtype=float)
    _validate(theta, ph, level, tolerance)
    names = list(outcome_names)
    unknown = sorted({s for spec in specs for s in spec.species_used()} - set(names))
    if unknown:
        raise ValueError(f"specifications use {', '.join(unknown)}, which are not among the "
                         f"outcomes ({', '.join(names)})")
    factors: list[float | None]
    if factor_grid is None:
        factors = [None]
    else:
        factors = [float(v) for v in factor_grid]
        if not factors or not all(np.isfinite(factors)):
            raise ValueError("factor_grid must hold finite values")
    outcomes = _simulate(outcome_fn, theta, ph, factors, len(names), max(1, int(batch_size)),
                         progress)
    finite = np.all(np.isfinite(outcomes), axis=-1)           # (n_draws, n_ph, n_f)
    n_failed = int(np.sum(~np.all(finite, axis=(1, 2))))
    passes = evaluate_specs(outcomes, list(specs), names) & finite
    if factor_grid is None:
        j = 0
    else:
        target = factors[(len(factors) - 1) // 2] if nominal_factor is None else nominal_factor
        j = int(np.argmin(np.abs(np.asarray(factors) - target)))
    pass_1d = passes[:, :, j]
    probability, standard_error = probability_curve(pass_1d)
    worst = worst_case_probability(ph, probability, tolerance)
    # one robust window: per-draw pass intervals refined by bisection, then
    # the exact level sets of p(x) and of the per-draw drift-band share r(x)
    refined = {}

    def refined_slice(k: int):
        if k not in refined:
            found, n_sim = refine_pass_intervals(outcome_fn, theta, ph, passes[:, :, k], list(specs), names,
                                                 resolution, factor=factors[k])
            refined[k] = (found, shrink_intervals(found, tolerance), n_sim)
        return refined[k]

    n = theta.shape[0]
    need = claim_count(n, level, mc_confidence)
    guarded = mc_confidence is not None and need is not None
    if need is None:
        need = claim_count(n, level, None)

    def claimed(intervals_k):
        return level_set(intervals_k, level, need)

    def curve(share):
        return lower_bound(share * n, n, mc_confidence) if guarded else share

    intervals, shrunk, _ = refined_slice(j)
    windows = claimed(intervals)
    robust = claimed(shrunk)
    per_draw = coverage(shrunk, ph)
    per_draw[(ph - tolerance < ph[0] - 1e-9) | (ph + tolerance > ph[-1] + 1e-9)] = np.nan
    curve_ph = np.round(np.arange(ph[0], ph[-1] + 0.25 * resolution, 0.5 * resolution), 10)
    curve_ph = curve_ph[curve_ph <= ph[-1] + 1e-12]
    curve_p = curve(coverage(intervals, curve_ph))
    curve_r = curve(coverage(shrunk, curve_ph))
    best = choose_best_index(curve_r)
    if best is None or curve_r[best] <= 0:
        best = choose_best_index(curve_p)
    best_ph = float(curve_ph[best]) if best is not None else None
    best_probability = float(curve_p[best]) if best is not None else None
    primary = interval_containing(windows, best_ph) or widest_interval(windows)
    bands = outcome_bands(outcomes[:, :, j, :])               # (3, n_ph, n_out)
    best_outcomes = None
    if best_ph is not None:
        # simulated at the best set point itself (it lies between grid points), so that the outcome stated
        # beside it is of that pH and not of the nearest scanned one
        at_best = _simulate(outcome_fn, theta, np.array([best_ph]), [factors[j]], len(names),
                            max(1, int(batch_size)), None)
        best_bands = outcome_bands(at_best[:, 0, 0, :])       # (3, n_out)
        best_outcomes = {n: [float(best_bands[1, i]), float(best_bands[0, i]), float(best_bands[2, i])]
                         for i, n in enumerate(names)}
    warnings: list[str] = []
    if not windows:
        warnings.append(f"no pH meets every specification with probability >= {level:g}")
    else:
        edge = range_end_warning(windows, ph)
        if edge:
            warnings.append(edge)
        if not robust:
            warnings.append(f"no set point where a share >= {level:g} of the draws meets every "
                            f"specification at every pH within +/- {tolerance:g} (the window is "
                            f"narrower than the drift band)")
    if mc_confidence is not None and not guarded:
        warnings.append(f"{n} draws are too few to show probability >= {level:g} against Monte Carlo error "
                        f"(at least {minimum_draws(level, mc_confidence)} needed at confidence "
                        f"{mc_confidence:g}); the window uses the share of passing draws")
    if n_failed:
        warnings.append(f"{n_failed} of {theta.shape[0]} draws gave non-finite outcomes "
                        f"(simulation failed); they count as not meeting the specifications")
    if theta.shape[0] < 100:
        warnings.append(f"only {theta.shape[0]} draws: the probability has a Monte Carlo "
                        f"standard error up to {0.5 / np.sqrt(theta.shape[0]):.2f}")
    result = WindowResult(
        level=float(level), tolerance=float(tolerance), specifications=list(specs),
        uncertainty_source=uncertainty_source, n_draws=int(theta.shape[0]), ph=ph,
        probability=probability, probability_standard_error=standard_error,
        worst_case_probability=worst, robust_probability_per_draw=per_draw,
        windows=windows, primary_window=primary, robust_windows=robust,
        robust_windows_per_draw=list(robust), best_ph=best_ph,
        best_probability=best_probability, outcome_names=names,
        outcome_median={n: bands[1, :, i] for i, n in enumerate(names)},
        outcome_lower={n: bands[0, :, i] for i, n in enumerate(names)},
        outcome_upper={n: bands[2, :, i] for i, n in enumerate(names)},
        best_outcomes=best_outcomes, n_failed_draws=n_failed, warnings=warnings, curve_ph=curve_ph,
        curve_probability=curve_p, curve_robust_probability=curve_r, resolution=float(resolution),
        n_refinement_simulations=int(refined[j][2]),
        mc_confidence=float(mc_confidence) if guarded else None, claim_count=int(need),
    )
    if factor_grid is not None:
        map_p, map_se = probability_curve(passes)              # (n_ph, n_f)
        result.factor_name = factor_name or "factor"
        result.factor_unit = factor_unit or "-"
        shown = np.asarray(factors if factor_display_values is None else factor_display_values,
                           dtype=float)
        if shown.shape != (len(factors),):
            raise ValueError("factor_display_values must have one value per factor_grid value")
        result.factor_values = shown
        result.nominal_factor = float(shown[j])
        result.map_probability = map_p
        result.map_standard_error = map_se
        result.map_windows = [claimed(refined_slice(k)[0]) for k in range(len(factors))]
        result.map_robust_windows = [claimed(refined_slice(k)[1]) for k in range(len(factors))]
        result.n_refinement_simulations = sum(v[2] for v in refined.values())
    return result


def process_scan_arguments(process: ProcessPlan) -> dict:
    """Keyword arguments of :func:`compute_window` taken from a process file.

    Returns a dict with ``ph_grid``, ``specs``, ``level``, ``tolerance`` and,
    when the process has a second factor, ``factor_grid`` (internal units,
    as :func:`speciakin.decision.runs.process_runs` expects them),
    ``factor_display_values``, ``factor_name``, ``factor_unit`` and
    ``nominal_factor`` (the planned value).  ``outcome_fn``, ``draws`` and
    ``outcome_names`` are the caller's.
    """
    out = {"ph_grid": process.ph_values(), "specs": list(process.specifications),
           "level": process.level, "tolerance": process.ph_tolerance}
    factor = process.second_factor
    if factor is not None:
        kind = FACTOR_KINDS[factor.kind]
        planned = {"equivalents": process.equivalents, "temperature": process.temperature,
                   "dosing_time": process.dosing_time}[kind.name]
        out.update(factor_grid=list(factor.values), factor_display_values=list(factor.display_values()),
                   factor_name=kind.name.replace("_", " "), factor_unit=kind.display_unit,
                   nominal_factor=planned)
    return out
