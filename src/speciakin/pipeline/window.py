"""The pH window of a planned process under the uncertainty of a campaign fit.

Connects the decision layer's pure functions to the compiled simulator: for
each parameter draw (posterior samples, or multivariate-normal draws from the
least-squares covariance) the planned process is simulated at every pH
set point (and second-factor value) in one batched, multi-core call, and the
end-of-process outcomes are scored against the specifications.
"""

from __future__ import annotations

import math
from typing import Callable

import numpy as np

from speciakin.decision.design import process_scan_arguments
from speciakin.decision.draws import draws_from_covariance
from speciakin.decision.outcomes import process_outcome_names, process_outcomes
from speciakin.decision.runs import process_runs
from speciakin.decision.design import compute_window
from speciakin.simulation.api import PH_CONTROL_STATUS, ph_control_error, simulate_batch
from speciakin.simulation.compile import compile_runs

__all__ = ["process_outcome_function", "window_for_campaign", "window_draws", "POSTERIOR", "COVARIANCE"]

POSTERIOR = "posterior"
COVARIANCE = "least-squares covariance (multivariate normal)"


def hplc_rrf(campaign) -> dict[str, float]:
    """Model molecule -> RRF of the campaign's HPLC compounds (the Compounds sheet; the first row of a
    molecule listed twice): what an ``area%`` specification's area% are taken over; empty without a
    campaign (an objective made for a model alone)."""
    rrf: dict[str, float] = {}
    for c in campaign.compounds if campaign is not None else ():
        rrf.setdefault(c.molecule, float(c.rrf))
    return rrf


def process_outcome_function(objective, process) -> Callable:
    """``outcome_fn(draws, ph_grid, factor=None) -> (n_draws, n_ph, n_outcomes)``.

    ``draws`` are fitted-parameter vectors of ``objective`` (run nuisance
    parameters, if any, do not apply to a planned process: pH offset 0,
    amount factor 1).  A failed simulation gives NaN outcomes (counted as
    failing by the window); a set point that the process's titrant (or start
    adjustment) cannot reach or hold is an :class:`InputError` naming the
    process file, the key and the set point.
    """
    model = objective.model
    compiled = objective.compiled
    n_mol = compiled.n_molecules
    names = compiled.species_names[:n_mol]
    rrf = hplc_rrf(getattr(objective, "campaign", None))

    last: dict = {}  # the runs of the last grid and factor: the batches of draws of one scan share them

    def outcome_fn(draws, ph_grid, factor=None):
        draws = np.atleast_2d(np.asarray(draws, float))
        grid = np.asarray(ph_grid, float)
        key = (grid.tobytes(), factor)
        if last.get("key") != key:
            runs = process_runs(process, model, list(grid), factor)
            last.update(key=key, runs=runs, cruns=compile_runs(
                compiled, runs, [np.array([0.0, float(r.end_time)]) for r in runs]))
        runs, cruns = last["runs"], last["cruns"]
        q, _, _ = objective.kernel_inputs(draws)
        shape = (draws.shape[0], len(runs))
        res = simulate_batch(compiled, cruns, q, np.zeros(shape), np.ones(shape), objective.rtol,
                             objective.atol, objective.parallel)
        bad = np.isin(res.status, PH_CONTROL_STATUS)
        if bad.any():
            i, j = np.argwhere(bad)[0]
            key = "process.titrant" if res.status[i, j] == PH_CONTROL_STATUS[0] else "process.start_adjustment"
            raise ph_control_error(compiled, runs[j], int(res.status[i, j]), float(res.failure_time[i, j]),
                                   file=process.source or None, key=key)
        final = res.outputs[:, :, 1, :n_mol].copy()
        final[res.status != 0] = np.nan
        amounts = {name: final[:, :, i] for i, name in enumerate(names)}
        return process_outcomes(amounts, model, process, rrf)[1]

    return outcome_fn


def window_draws(fit=None, posterior=None, n: int = 500, seed: int | None = None):
    """Parameter draws for the window and the name of their source.

    The posterior is used when one exists; otherwise draws come from the
    least-squares covariance (multivariate normal, redrawn inside the bounds).

    Returns
    -------
    (draws (n, p), source text, notes list)
    """
    notes: list[str] = []
    if posterior is not None:
        return np.asarray(posterior.draws(n, seed), float), POSTERIOR, notes
    if fit is None:
        raise ValueError("a fit or a posterior is needed for the window")
    bounds = []
    for key in fit.keys:
        p = fit.fit.parameter(key)
        bounds.append((None if math.isinf(p.lower_bound) else p.lower_bound,
                       None if math.isinf(p.upper_bound) else p.upper_bound))
    cov = fit.covariance
    d = draws_from_covariance(fit.theta, cov, n, seed, bounds=bounds)
    if d.n_clipped:
        notes.append(f"{d.n_clipped} covariance draws were clipped to the parameter bounds")
    return d.draws, COVARIANCE, notes


def window_for_campaign(objective, process, draws, source: str, progress=None, *, fit=None, posterior=None):
    """Probability that the planned process meets every specification, against pH.

    Parameters
    ----------
    objective
        :class:`speciakin.pipeline.objective.CampaignObjective` (model and
        the fitted-parameter layout).
    process
        Validated process plan (:func:`speciakin.decision.load_process`).
    draws
        (n_draws, p) fitted-parameter vectors.
    source
        Where the draws came from (:data:`POSTERIOR` or :data:`COVARIANCE`).
    fit, posterior
        The campaign fit (profiles) and posterior (convergence) the draws
        come from, for the trust gates; None = not available.

    Returns
    -------
    WindowResult
        With ``status``, ``status_reasons`` and ``gates`` set.
    """
    names = process_outcome_names(objective.model, process, hplc_rrf(getattr(objective, "campaign", None)))
    outcome_fn = process_outcome_function(objective, process)
    result = compute_window(outcome_fn, np.asarray(draws, float),
                            outcome_names=names, uncertainty_source=source, progress=progress,
                            **process_scan_arguments(process))
    # --- trust gates (decision/gates.py): status, reasons -------------------------------
    from speciakin.decision.trust_inputs import apply_gates, campaign_gate_inputs
    apply_gates(result, campaign_gate_inputs(objective, process, result, draws, source, fit=fit,
                                             posterior=posterior, outcome_fn=outcome_fn))
    # --- end trust gates -----------------------------------------------------------------
    return result
