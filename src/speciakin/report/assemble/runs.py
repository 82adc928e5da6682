"""Report section "Runs: data and fitted curves" and the observation sheet.

For each lab run: the HPLC data (values below the LOQ as open triangles at
the LOQ), the best-fit curves, the 5-95 % posterior predictive band when a
posterior exists, the weighted residuals, and for held-pH runs the titrant
consumed (data, model, band).  The band is the pointwise 5 % and 95 %
quantile of the model curves over posterior draws (parameter uncertainty;
Gelman et al., "Bayesian Data Analysis", 3rd ed., CRC 2013, section 6.3,
posterior predictive checks).

Weighted residuals follow the objective: ``(y_model - y_obs) / sigma`` with
``sigma = sqrt(a**2 + (r * y_obs)**2)``, and for a value below the LOQ
``max(y_model - LOQ, 0) / sigma_LOQ`` (see
:mod:`speciakin.pipeline.objective`).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.report.document import Figure, Paragraph, Section, Table
from speciakin.report.palette import SpeciesColors

__all__ = ["best_theta", "predictive_draws", "run_curves", "observation_table", "runs_section",
           "CURVE_POINTS", "BAND_QUANTILES"]

#: Points of each model curve in the plots.
CURVE_POINTS = 121
#: Quantiles of the predictive band [%].
BAND_QUANTILES = (5.0, 95.0)
_SECONDS_PER_MINUTE = 60.0
_MMOL_PER_MOL = 1e3


def best_theta(objective: Any, fit: Any, posterior: Any) -> tuple[np.ndarray | None, str]:
    """Parameter vector of the plotted curves (objective order) and what it is."""
    if fit is not None:
        return np.asarray(fit.theta, float), "least-squares fit"
    if posterior is not None:
        medians = {s.name: s.median for s in posterior.summary}
        if all(n in medians for n in objective.names):
            return np.array([medians[n] for n in objective.names], float), "posterior medians"
    return None, ""


def predictive_draws(objective: Any, posterior: Any, n: int, seed: int) -> np.ndarray | None:
    """``n`` posterior draws with columns in the objective's parameter order.

    Raises
    ------
    InputError
        The posterior's parameter names differ from the objective's.
    """
    if posterior is None:
        return None
    names = list(posterior.parameter_names)
    missing = [p for p in objective.names if p not in names]
    if missing:
        raise InputError("the posterior does not belong to this model: parameters missing",
                         Location(key="posterior.parameter_names"), ", ".join(missing),
                         "the fitted parameters " + ", ".join(objective.names))
    draws = posterior.draws(int(n), seed=seed)
    return draws[:, [names.index(p) for p in objective.names]]


def _label_keys(objective: Any) -> dict[str, str]:
    """Compound -> key used in figures: the model molecule when one-to-one
    (so species colours match every other figure), else the compound."""
    pairs = {c.name: c.molecule for c in objective.campaign.compounds}
    molecules = list(pairs.values())
    return {c: (m if molecules.count(m) == 1 else c) for c, m in pairs.items()}


def run_curves(objective: Any, theta: np.ndarray, draws: np.ndarray | None,
               n_points: int = CURVE_POINTS) -> dict[str, dict[str, Any]]:
    """Best curve and band per run: ``time`` [min], ``values`` {compound: (n,)},
    ``low`` / ``high`` {compound: (n,)} or None, ``titrant`` [mmol] and its band."""
    best = objective.curves_batch(theta[None, :], n_points)
    band = objective.curves_batch(draws, n_points) if draws is not None else None
    out: dict[str, dict[str, Any]] = {}
    lo_q, hi_q = BAND_QUANTILES
    for name, c in best.items():
        entry: dict[str, Any] = {"time": c["time"] / _SECONDS_PER_MINUTE, "failed": bool(c["failed"][0]),
                                 "values": {k: v[0] for k, v in c["values"].items()},
                                 "titrant": c["titrant"][0] * _MMOL_PER_MOL, "low": None, "high": None,
                                 "titrant_low": None, "titrant_high": None, "n_band": 0}
        if band is not None:
            b = band[name]
            ok = ~np.asarray(b["failed"], bool)
            entry["n_band"] = int(ok.sum())
            if ok.sum() >= 2:
                with np.errstate(all="ignore"):
                    entry["low"] = {k: np.nanpercentile(v[ok], lo_q, axis=0) for k, v in b["values"].items()}
                    entry["high"] = {k: np.nanpercentile(v[ok], hi_q, axis=0) for k, v in b["values"].items()}
                    tit = b["titrant"][ok] * _MMOL_PER_MOL
                    entry["titrant_low"] = np.nanpercentile(tit, lo_q, axis=0)
                    entry["titrant_high"] = np.nanpercentile(tit, hi_q, axis=0)
        out[name] = entry
    return out


def _value_axis(objective: Any, run_index: int) -> tuple[str, str]:
    kinds = set(objective.h_kind[objective.h_run == run_index].tolist())
    if kinds <= {"area_percent"}:
        return "HPLC area", "area%"
    return "concentration", "mol/L"


def _observation_values(objective: Any, theta: np.ndarray | None) -> tuple[np.ndarray, np.ndarray]:
    """Fitted values and weighted residuals of every observation (HPLC then titrant)."""
    n = objective.n_data
    if theta is None:
        return np.full(n, np.nan), np.full(n, np.nan)
    pr = objective.predict_batch(theta[None, :])
    fitted = np.concatenate([pr.hplc_model[0], pr.titrant_model[0]])
    residual = objective.residuals(theta)
    return fitted, residual


def observation_table(objective: Any, fit: Any, posterior: Any = None) -> Table | None:
    """One row per observation: run, time [min], compound, observed, censored, LOQ,
    fitted, weighted residual, unit (None without an objective)."""
    if objective is None:
        return None
    theta, _ = best_theta(objective, fit, posterior)
    fitted, residual = _observation_values(objective, theta)
    rows = []
    for i in range(objective.n_hplc):
        ri = int(objective.h_run[i])
        t = objective.output_times[ri][objective.h_t[i]] / _SECONDS_PER_MINUTE
        unit = _value_axis(objective, ri)[1]
        cens = bool(objective.h_cens[i])
        rows.append([objective.run_names[ri], float(t), str(objective.h_compound[i]),
                     None if cens else float(objective.h_obs[i]), cens,
                     float(objective.h_loq[i]) if np.isfinite(objective.h_loq[i]) else None,
                     _num(fitted[i]), _num(residual[i]), unit])
    for j in range(objective.n_titrant):
        ri = int(objective.t_run[j])
        t = objective.output_times[ri][objective.t_t[j]] / _SECONDS_PER_MINUTE
        k = objective.n_hplc + j
        rows.append([objective.run_names[ri], float(t), "titrant consumed",
                     float(objective.t_obs[j]) * _MMOL_PER_MOL, False, None,
                     _num(fitted[k] * _MMOL_PER_MOL), _num(residual[k]), "mmol"])
    note = ("Observed values as compared by the fit (peak areas normalised to area% per sample). "
            "Weighted residual = (fitted - observed) / sigma; for a value below the LOQ, "
            "max(fitted - LOQ, 0) / sigma.")
    if theta is None:
        note += " No fit: fitted values and residuals are empty."
    return Table("Observations", ["run", "time", "compound", "observed", "below LOQ", "LOQ", "fitted",
                                  "weighted residual", "unit"], rows,
                 units=[None, "min", None, None, None, None, None, "-", None],
                 formats=[None, ".4g", None, ".4g", None, ".4g", ".4g", ".3f", None],
                 sheet_name="observations", note=note)


def _num(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def runs_section(objective: Any, fit: Any, posterior: Any, colors: SpeciesColors,
                 n_draws: int = 150, seed: int = 0, figure_names: dict[str, Figure] | None = None) -> Section:
    """The "Runs: data and fitted curves" section.

    ``figure_names``, when given, receives each figure under a file-friendly
    name (``run_<run>``, ``titrant_<run>``, ``residuals``)."""
    named = figure_names if figure_names is not None else {}
    title = "Runs: data and fitted curves"
    if objective is None:
        return Section(title, [Paragraph("Run plots: not available (no objective: the model and campaign "
                                         "were not combined for this report).")], anchor="runs")
    from speciakin.report.figures import time_course_figure, titrant_figure

    theta, what = best_theta(objective, fit, posterior)
    blocks: list = []
    if theta is None:
        blocks.append(Paragraph("Least-squares fit: not run; the plots show the data only."))
    draws = predictive_draws(objective, posterior, n_draws, seed) if theta is not None else None
    if posterior is None:
        blocks.append(Paragraph("Posterior predictive bands: not run (no posterior); curves are the "
                                f"{what or 'data only'}."))
    else:
        blocks.append(Paragraph(f"Shaded bands: {BAND_QUANTILES[0]:g}-{BAND_QUANTILES[1]:g} % of the model "
                                f"curves over {n_draws} posterior draws (parameter uncertainty only)."))
    curves = run_curves(objective, theta, draws) if theta is not None else {}
    keys = _label_keys(objective)
    fitted, residual = _observation_values(objective, theta)
    for ri, name in enumerate(objective.run_names):
        sel = np.flatnonzero(objective.h_run == ri)
        label, unit = _value_axis(objective, ri)
        t_obs: dict[str, list] = {}
        y_obs: dict[str, list] = {}
        cens: dict[str, list] = {}
        loq: dict[str, float] = {}
        for i in sel:
            key = keys.get(str(objective.h_compound[i]), str(objective.h_compound[i]))
            t_obs.setdefault(key, []).append(objective.output_times[ri][objective.h_t[i]] / _SECONDS_PER_MINUTE)
            c = bool(objective.h_cens[i])
            y_obs.setdefault(key, []).append(np.nan if c else objective.h_obs[i])
            cens.setdefault(key, []).append(c)
            if c and np.isfinite(objective.h_loq[i]):
                loq[key] = float(objective.h_loq[i])
        entry = curves.get(name)
        model = low = high = None
        if entry is not None:
            model = {keys.get(k, k): v for k, v in entry["values"].items()}
            if entry["low"] is not None:
                low = {keys.get(k, k): v for k, v in entry["low"].items()}
                high = {keys.get(k, k): v for k, v in entry["high"].items()}
        blocks.append(named.setdefault(f"run_{name}", Figure(time_course_figure(
            t_obs, y_obs, entry["time"] if entry else None, model, colors, cens, loq, low, high,
            title=f"Run {name}", value_label=label, value_unit=unit),
            f"Run {name}: HPLC data (points; open triangles at the LOQ for values below it)"
            + (f", {what} (lines)" if entry else "") + (", 5-95 % predictive band" if low else "") + ".")))
        if entry is not None and entry["failed"]:
            blocks.append(Paragraph(f"Run {name}: the simulation at the plotted parameters failed; "
                                    "the curve may be incomplete."))
        tsel = np.flatnonzero(objective.t_run == ri)
        if tsel.size:
            tt = np.array([objective.output_times[ri][objective.t_t[j]] for j in tsel]) / _SECONDS_PER_MINUTE
            blocks.append(named.setdefault(f"titrant_{name}", Figure(titrant_figure(
                tt, objective.t_obs[tsel] * _MMOL_PER_MOL,
                entry["time"] if entry else None, entry["titrant"] if entry else None,
                entry["titrant_low"] if entry else None, entry["titrant_high"] if entry else None,
                title=f"Run {name}: titrant consumed"),
                f"Run {name} (pH held): titrant consumed, controller log and model"
                + (" with 5-95 % band." if entry and entry["titrant_low"] is not None else "."))))
    residual_blocks = _residual_blocks(objective, fit, theta, fitted, residual, keys, colors)
    for block in residual_blocks:
        if isinstance(block, Figure):
            named.setdefault("residuals", block)
    blocks += residual_blocks
    return Section(title, blocks, anchor="runs")


def _residual_blocks(objective: Any, fit: Any, theta: np.ndarray | None, fitted: np.ndarray,
                     residual: np.ndarray, keys: dict[str, str], colors: SpeciesColors) -> list:
    """One residual figure for the HPLC data of every run, and the RMS per run and observable."""
    from speciakin.report.figures import residuals_figure

    if theta is None:
        return [Paragraph("Residuals: not available (least-squares fit not run).")]
    n = objective.n_hplc
    finite = np.isfinite(fitted[:n]) & np.isfinite(residual[:n])
    blocks: list = []
    if finite.any():
        times = np.array([objective.output_times[r][t] for r, t in zip(objective.h_run, objective.h_t)])
        species = [keys.get(str(c), str(c)) for c in objective.h_compound]
        units = {_value_axis(objective, ri)[1] for ri in range(len(objective.run_names))}
        unit = units.pop() if len(units) == 1 else "data scale"
        blocks.append(Figure(residuals_figure(
            times[finite] / _SECONDS_PER_MINUTE, fitted[:n][finite], residual[:n][finite],
            [s for s, f in zip(species, finite) if f], colors, prediction_label=f"fitted [{unit}]",
            title="Weighted residuals of the HPLC data, all runs"),
            "Weighted residuals of every HPLC value against time and against the fitted value; they "
            "should scatter around 0 with a standard deviation near 1 when the error model holds."))
    groups = getattr(getattr(fit, "fit", None), "group_residual_sd", None) or {}
    if groups:
        rows = [[label, float(st["rms"]), int(st["count"])] for label, st in groups.items()]
        blocks.append(Table("Residuals by run and observable", ["group", "RMS weighted residual", "values"],
                            rows, formats=[None, ".3g", None],
                            note="An RMS far above 1 means the model or the error model does not describe "
                                 "that run (common practice: above 3 is flagged by the fit)."))
    return blocks
