"""Fitted curves, predictive bands and fitted values, computed once for plots and the report.

:func:`predict` evaluates the model at the plotted parameters (the
least-squares optimum, else the posterior medians): a dense curve per run, the
fitted value and weighted residual of every observation; :func:`with_band`
adds the 5-95 % posterior predictive band (pointwise quantiles of the model
curves over posterior draws: parameter uncertainty only; Gelman et al.,
"Bayesian Data Analysis", 3rd ed., CRC 2013, section 6.3).  The report and the
figures folder render a :class:`PredictionSet`; they never run the model nor
read the objective's arrays.

Weighted residuals follow the objective: ``(y_model - y_obs) / sigma`` with
``sigma = sqrt(a**2 + (r * y_obs)**2)``, and for a value below the LOQ
``max(y_model - LOQ, 0) / sigma_LOQ`` (:mod:`speciakin.pipeline.objective`).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from speciakin._json import finite_or_none
from speciakin.errors import InputError, Location

__all__ = ["PredictionSet", "RunPrediction", "Observation", "predict", "with_band", "CURVE_POINTS",
           "BAND_QUANTILES", "BAND_DRAWS"]

#: Points of each model curve in the plots.
CURVE_POINTS = 121
#: Quantiles of the predictive band [%].
BAND_QUANTILES = (5.0, 95.0)
#: Posterior draws of the predictive band.
BAND_DRAWS = 150
_SECONDS_PER_MINUTE = 60.0
_MMOL_PER_MOL = 1e3


@dataclass(frozen=True)
class Observation:
    """One observation with its fitted value: a row of the report's observation sheet.

    ``time`` [min]; ``observed``, ``loq`` and ``fitted`` on the data's scale
    (area%, [mol/L], or [mmol] for the titrant); ``observed`` None below the
    LOQ; ``residual`` weighted [-]; ``key`` the figure key of the compound
    (the model molecule when one-to-one), ``titrant`` True for titrant rows.
    """

    run: str
    time: float
    compound: str
    key: str
    observed: float | None
    censored: bool
    loq: float | None
    fitted: float | None
    residual: float | None
    unit: str
    titrant: bool = False


@dataclass
class RunPrediction:
    """Plot data of one run: the model curve with its band (None without parameters).

    ``time`` [min] of the curve; ``values``, ``low``, ``high`` {figure key:
    (n,)} on the data's scale; ``titrant*`` [mmol]; ``failed`` True when the
    simulation at the plotted parameters failed; ``n_band`` draws in the band.
    """

    name: str
    value_label: str
    value_unit: str
    time: np.ndarray | None = None
    values: dict[str, np.ndarray] | None = None
    low: dict[str, np.ndarray] | None = None
    high: dict[str, np.ndarray] | None = None
    titrant: np.ndarray | None = None
    titrant_low: np.ndarray | None = None
    titrant_high: np.ndarray | None = None
    failed: bool = False
    n_band: int = 0


@dataclass
class PredictionSet:
    """Everything the report draws from the model: curves, bands, fitted values.

    ``theta`` is None when neither fit nor posterior exists (data only);
    ``source`` says what the curves are ("least-squares fit", "posterior
    medians"); ``band_draws`` is 0 without a posterior.
    """

    theta: np.ndarray | None
    source: str
    runs: list[RunPrediction]
    observations: list[Observation]
    band_draws: int = 0
    band_quantiles: tuple[float, float] = BAND_QUANTILES
    notes: list[str] = field(default_factory=list)

    def run(self, name: str) -> RunPrediction:
        return next(r for r in self.runs if r.name == name)


def plotted_theta(objective: Any, fit: Any, posterior: Any) -> tuple[np.ndarray | None, str]:
    """Parameter vector of the plotted curves (objective order) and what it is."""
    if fit is not None:
        return np.asarray(fit.theta, float), "least-squares fit"
    if posterior is not None:
        medians = {s.name: s.median for s in posterior.summary}
        if all(n in medians for n in objective.names):
            return np.array([medians[n] for n in objective.names], float), "posterior medians"
    return None, ""


def posterior_draws(objective: Any, posterior: Any, n: int, seed: int) -> np.ndarray:
    """``n`` posterior draws with columns in the objective's parameter order.

    Raises
    ------
    InputError
        The posterior's parameter names differ from the objective's.
    """
    names = list(posterior.parameter_names)
    missing = [p for p in objective.names if p not in names]
    if missing:
        raise InputError("the posterior does not belong to this model: parameters missing",
                         Location(key="posterior.parameter_names"), ", ".join(missing),
                         "the fitted parameters " + ", ".join(objective.names))
    draws = posterior.draws(int(n), seed=seed)
    return draws[:, [names.index(p) for p in objective.names]]


def figure_keys(objective: Any) -> dict[str, str]:
    """Compound -> key used in figures: the model molecule when one-to-one
    (so species colours match every other figure), else the compound."""
    pairs = {c.name: c.molecule for c in objective.campaign.compounds}
    molecules = list(pairs.values())
    return {c: (m if molecules.count(m) == 1 else c) for c, m in pairs.items()}


def _value_axis(objective: Any, run_index: int) -> tuple[str, str]:
    kinds = set(objective.h_kind[objective.h_run == run_index].tolist())
    if kinds <= {"area_percent"}:
        return "HPLC area", "area%"
    return "concentration", "mol/L"


def _observations(objective: Any, theta: np.ndarray | None, keys: dict[str, str]) -> list[Observation]:
    n = objective.n_data
    if theta is None:
        fitted = residual = np.full(n, np.nan)
    else:
        pr = objective.predict_batch(theta[None, :])
        fitted = np.concatenate([pr.hplc_model[0], pr.titrant_model[0]])
        # each value's own residual (a closed sample's whitened residuals belong to no one compound)
        residual = np.concatenate([objective.value_residuals(pr)[0],
                                   (pr.titrant_model[0] - objective.t_obs) / objective.t_sigma])
    rows = []
    for i in range(objective.n_hplc):
        ri = int(objective.h_run[i])
        compound = str(objective.h_compound[i])
        cens = bool(objective.h_cens[i])
        rows.append(Observation(
            objective.run_names[ri], float(objective.output_times[ri][objective.h_t[i]] / _SECONDS_PER_MINUTE),
            compound, keys.get(compound, compound), None if cens else float(objective.h_obs[i]), cens,
            finite_or_none(objective.h_loq[i]), finite_or_none(fitted[i]), finite_or_none(residual[i]), _value_axis(objective, ri)[1]))
    for j in range(objective.n_titrant):
        ri = int(objective.t_run[j])
        k = objective.n_hplc + j
        rows.append(Observation(
            objective.run_names[ri], float(objective.output_times[ri][objective.t_t[j]] / _SECONDS_PER_MINUTE),
            "titrant consumed", "titrant", float(objective.t_obs[j]) * _MMOL_PER_MOL, False, None,
            finite_or_none(fitted[k] * _MMOL_PER_MOL), finite_or_none(residual[k]), "mmol", titrant=True))
    return rows


def predict(objective: Any, fit: Any = None, posterior: Any = None, *, n_points: int = CURVE_POINTS,
            band_draws: int = BAND_DRAWS, seed: int = 0) -> PredictionSet:
    """Curves, fitted values and (with a posterior) predictive bands of a campaign.

    Parameters
    ----------
    objective
        :class:`speciakin.pipeline.objective.CampaignObjective`.
    fit, posterior
        Results (either may be None); the curves follow the fit, else the
        posterior medians.
    n_points
        Points of each curve.
    band_draws, seed
        Posterior draws of the band and the seed of their choice.
    """
    theta, source = plotted_theta(objective, fit, posterior)
    keys = figure_keys(objective)
    runs = [RunPrediction(name, *_value_axis(objective, ri)) for ri, name in enumerate(objective.run_names)]
    if theta is not None:
        best = objective.curves_batch(theta[None, :], n_points)
        for run in runs:
            c = best[run.name]
            run.time = c["time"] / _SECONDS_PER_MINUTE
            run.values = {keys.get(k, k): v[0] for k, v in c["values"].items()}
            run.titrant = c["titrant"][0] * _MMOL_PER_MOL
            run.failed = bool(c["failed"][0])
    result = PredictionSet(theta, source, runs, _observations(objective, theta, keys))
    if posterior is not None and theta is not None:
        result = with_band(result, objective, posterior, n_points=n_points, band_draws=band_draws, seed=seed)
    return result


def with_band(predictions: PredictionSet, objective: Any, posterior: Any, *, n_points: int = CURVE_POINTS,
              band_draws: int = BAND_DRAWS, seed: int = 0) -> PredictionSet:
    """``predictions`` with the 5-95 % posterior predictive band added (curves are not recomputed)."""
    if predictions.theta is None:
        return predictions
    keys = figure_keys(objective)
    band = objective.curves_batch(posterior_draws(objective, posterior, band_draws, seed), n_points)
    lo_q, hi_q = predictions.band_quantiles
    runs = []
    for run in predictions.runs:
        b = band[run.name]
        ok = ~np.asarray(b["failed"], bool)
        run = dataclasses.replace(run, n_band=int(ok.sum()))
        if ok.sum() >= 2:
            with np.errstate(all="ignore"):
                run.low = {keys.get(k, k): np.nanpercentile(v[ok], lo_q, axis=0) for k, v in b["values"].items()}
                run.high = {keys.get(k, k): np.nanpercentile(v[ok], hi_q, axis=0) for k, v in b["values"].items()}
                tit = b["titrant"][ok] * _MMOL_PER_MOL
                run.titrant_low = np.nanpercentile(tit, lo_q, axis=0)
                run.titrant_high = np.nanpercentile(tit, hi_q, axis=0)
        runs.append(run)
    return dataclasses.replace(predictions, runs=runs, band_draws=int(band_draws))
