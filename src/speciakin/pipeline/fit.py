"""Global least-squares fit of a model to a whole campaign, with profiles.

:func:`fit_campaign` wires :class:`~speciakin.pipeline.objective.CampaignObjective`
into the generic multistart layer (:func:`fit_least_squares`) and the profile
likelihood (:func:`profile_all`), and translates the result back into the
model's own parameter names and scales (a fitted pKa shift is also reported
as the pKa it implies).
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

from speciakin._json import dumps, format_tag
from speciakin.decision.gates import CHI_SQUARE_QUANTILE
from speciakin.errors import InputError, Problem
from speciakin.estimation.leastsq import fit_least_squares
from speciakin.estimation.profile import profile_all
from speciakin.estimation.results import FitResult, Profile
from speciakin.pipeline.objective import CampaignObjective
from speciakin.simulation.api import simulate_batch
from speciakin.simulation.status import STATUS_TEXT

__all__ = ["CampaignFitResult", "fit_campaign", "check_enough_data", "check_start_values", "MISFIT_RMS"]

#: Per-run RMS of weighted residuals above which a misfit warning is given
#: (residuals should scatter with unit standard deviation; common practice).
MISFIT_RMS = 3.0


def _rename(text: str, mapping: dict[str, str]) -> str:
    for key in sorted(mapping, key=len, reverse=True):
        text = text.replace(key, mapping[key])
    return text


@dataclass
class CampaignFitResult:
    """Result of :func:`fit_campaign`.

    Attributes
    ----------
    fit
        The generic :class:`FitResult` (parameter keys are identifiers).
    names
        Display name of each fitted parameter, in fit order.
    keys
        The identifiers used inside ``fit``.
    bases
        Model-file value of each parameter (for shifts: the written pKa).
    shifts
        True where the parameter is a shift of ``bases``.
    profiles
        Profile likelihood per parameter key (empty when not computed).
    objective
        Description of the objective (error model, counts, conversion).
    warnings
        Plain-words warnings with display names.
    elapsed
        Wall time of the fit and of the profiles [s].
    model_source, campaign_source
        Paths of the inputs.
    """

    fit: FitResult
    names: list[str]
    keys: list[str]
    bases: list[float]
    shifts: list[bool]
    units: list[str]
    profiles: dict[str, Profile] = field(default_factory=dict)
    objective: dict[str, Any] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    elapsed: dict[str, float] = field(default_factory=dict)
    model_source: str = ""
    campaign_source: str = ""
    #: Parameter overrides of the command line or API (chemistry.modelfile.overrides), as dicts.
    overrides: list[dict[str, Any]] = field(default_factory=list)

    @property
    def theta(self) -> np.ndarray:
        """Best-fit vector on the fitted scale, in fit order."""
        values = self.fit.values
        return np.array([values[k] for k in self.keys], float)

    @property
    def covariance(self) -> np.ndarray:
        """Covariance of the varying parameters in fit order."""
        order = [self.fit.varying_names.index(k) for k in self.keys]
        return self.fit.covariance[np.ix_(order, order)]

    def rows(self) -> list[dict[str, Any]]:
        """One dict per parameter: name, unit, value, standard error, both 95 % intervals
        (profile ends None when open), and the implied absolute value for shifts."""
        out = []
        for name, key, base, shift, unit in zip(self.names, self.keys, self.bases, self.shifts, self.units):
            p = self.fit.parameter(key)
            row = {
                "name": name, "unit": unit, "value": p.value, "standard_error": p.standard_error,
                "covariance_interval": list(p.covariance_interval) if p.covariance_interval else None,
                "profile_interval": [p.profile_lower, p.profile_upper],
                "profile_open_below": p.profile_open_below, "profile_open_above": p.profile_open_above,
                "fixed": not p.vary, "at_bound": p.at_bound, "initial_value": p.initial_value,
                "bounds": [None if math.isinf(p.lower_bound) else p.lower_bound,
                           None if math.isinf(p.upper_bound) else p.upper_bound],
                "shift_of": base if shift else None,
                "implied_value": base + p.value if shift else p.value,
            }
            out.append(row)
        return out

    def report(self) -> str:
        """Readable report with stable headings."""
        lines = ["Campaign fit", "============", ""]
        lines.append(f"model: {self.model_source}")
        lines.append(f"campaign: {self.campaign_source}")
        f = self.fit
        lines += ["", "Fit statistics", "--------------",
                  f"observations: {f.n_residuals}   fitted parameters: {f.n_varying}   "
                  f"degrees of freedom: {f.degrees_of_freedom:.6g}" + degrees_of_freedom_note(f, objective_closed(self)),
                  f"chi-square: {f.chisqr:.6g}   reduced chi-square: {f.reduced_chisqr:.4g}",
                  f"AIC: {f.aic:.6g}   BIC: {f.bic:.6g}   converged: {'yes' if f.success else 'NO'}", "",
                  "Parameters", "----------",
                  f"{'parameter':<28} {'value':>10} {'std err':>10} {'95% (covariance)':>24} {'95% (profile)':>24}"]

        def fmt(v):
            return "open" if v is None else f"{v:.4g}"

        for r in self.rows():
            ci = r["covariance_interval"]
            ci_text = f"[{ci[0]:.4g}, {ci[1]:.4g}]" if ci else "-"
            pl, pu = r["profile_interval"]
            if self.profiles:
                pi_text = f"[{fmt(pl)}, {fmt(pu)}]"
            else:
                pi_text = "not computed"
            se = "-" if r["standard_error"] is None else f"{r['standard_error']:.3g}"
            lines.append(f"{r['name']:<28} {r['value']:>10.4g} {se:>10} {ci_text:>24} {pi_text:>24}")
            if r["shift_of"] is not None:
                lines.append(f"{'':<28} (pKa = {r['implied_value']:.3f}; file value {r['shift_of']:.3f})")
        lines += ["", "Residuals by run and observable", "-------------------------------"]
        for label, stats in f.group_residual_sd.items():
            lines.append(f"{label:<40} rms {stats['rms']:.3g}  (n = {int(stats['count'])})")
        if self.overrides:
            lines += ["", "Parameter overrides (not in the model file)", "-------------------------------------------"]
            lines += ["- " + ", ".join(f"{k} {v}" for k, v in o.items()) for o in self.overrides]
        lines += ["", "Warnings", "--------"]
        lines += [f"- {w}" for w in self.warnings] or ["(none)"]
        return "\n".join(lines)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form (the ``fit.json`` schema, see docs/estimation.md)."""
        f = self.fit
        order = [f.varying_names.index(k) for k in self.keys]
        return {
            "schema": format_tag("fit", 1),
            "model": self.model_source, "campaign": self.campaign_source,
            "parameters": self.rows(),
            "statistics": {"chi_square": f.chisqr, "reduced_chi_square": f.reduced_chisqr, "aic": f.aic,
                           "bic": f.bic, "n_observations": f.n_residuals, "n_parameters": f.n_varying,
                           "degrees_of_freedom": f.degrees_of_freedom,
                           "closed_samples": objective_closed(self), "inactive_values": f.n_inactive,
                           "residual_standard_deviation": f.residual_standard_deviation,
                           "converged": f.success, "message": f.message,
                           "jacobian": f.jacobian_method, "condition_number": f.condition_number},
            "correlation": {"names": self.names,
                            "matrix": f.correlation[np.ix_(order, order)].tolist()},
            "covariance": {"names": self.names, "matrix": self.covariance.tolist()},
            "residuals_by_group": f.group_residual_sd,
            "starts": [s.to_dict() for s in f.starts],
            "warnings": list(self.warnings),
            "objective": self.objective,
            "elapsed_s": self.elapsed,
            "fit_result": f.to_dict(),
            "profiles": {self.names[self.keys.index(k)]: p.to_dict() for k, p in self.profiles.items()},
            "keys": self.keys, "bases": self.bases, "shifts": self.shifts, "units": self.units,
            **({"overrides": list(self.overrides)} if self.overrides else {}),  # only when options changed the model
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "CampaignFitResult":
        fit = FitResult.from_dict(data["fit_result"])
        names = [p["name"] for p in data["parameters"]]
        profiles = {data["keys"][names.index(n)]: Profile.from_dict(p) for n, p in data.get("profiles", {}).items()}
        return cls(fit=fit, names=names, keys=list(data["keys"]), bases=list(data["bases"]),
                   shifts=list(data["shifts"]), units=list(data["units"]), profiles=profiles,
                   objective=dict(data.get("objective", {})), warnings=list(data.get("warnings", [])),
                   elapsed=dict(data.get("elapsed_s", {})), model_source=data.get("model", ""),
                   campaign_source=data.get("campaign", ""), overrides=list(data.get("overrides", [])))

    def to_json(self) -> str:
        """Strict JSON text of :meth:`to_dict` (NaN -> null)."""
        return dumps(self.to_dict())


def check_enough_data(objective: CampaignObjective) -> None:
    """Stop before fitting when the campaign holds no more data values than fitted parameters.

    Least squares needs more residuals than varying parameters; the plain
    statement of that (a campaign without runs, or a model that fits more
    constants than the workbook has HPLC values) is a located error in the
    chemist's terms: which sheets to fill, or which parameters to fix.

    Raises
    ------
    InputError
        Located at the HPLC sheet, with the counts (exit code 2, before any fitting).
    """
    n_fitted = sum(1 for s in objective.specs() if s.vary)
    if objective.n_data > n_fitted:
        return
    runs = len(objective.campaign.runs)
    raise InputError(
        f"the campaign holds {objective.n_data} data value(s) ({objective.n_hplc} HPLC, "
        f"{objective.n_titrant} titrant readings over {runs} run(s)) for {n_fitted} fitted parameter(s)",
        objective.campaign.locate("hplc", None, None), objective.n_data,
        f"more data values than fitted parameters: add runs and their HPLC results to the workbook, "
        f"or fix parameters in the model file ({objective.model.source or 'model.toml'}: a bare value, "
        f"not a table with fit = true, is fixed)")


def check_start_values(objective: CampaignObjective) -> None:
    """Simulate every run once at the starting values; a run that does not integrate there stops the fit.

    Raises
    ------
    InputError
        One problem per failed run, located at the run's row of the Runs sheet, with the kernel's
        reason in plain words and what to check (exit code 2, before any fitting).
    """
    q, off, fac = objective.kernel_inputs(objective.start[None, :])
    res = simulate_batch(objective.compiled, objective.compiled_runs, q, off, fac, objective.rtol, objective.atol,
                         objective.parallel)
    problems = []
    for ri in np.flatnonzero(res.status[0] != 0):
        crun, code = objective.campaign.runs[int(ri)], int(res.status[0, ri])
        t = float(res.failure_time[0, ri])
        ph = crun.recipe.ph
        setting = f"pH {ph.mode}" + (f" at {ph.setpoint:g}" if ph.mode == "held" else "")
        problems.append(Problem(
            f"run {crun.name} cannot be simulated at the model file's starting values ({setting}): "
            f"{STATUS_TEXT.get(code, 'unknown failure')} at t = {t / 60.0:.4g} min",
            objective.campaign.locate("runs", crun.row, None), None,
            "a run the model can follow: check this row's pH set point, titrant, amounts and volumes and the "
            "time units, and the model file's starting values"))
    if problems:
        raise InputError(problems=problems)


#: A fit's chi-square below this quantile of the chi-square distribution (with the fit's degrees of
#: freedom) says the stated errors are too large: the error-model gate's upper limit mirrored (0.1 %).
LOW_CHI_SQUARE_QUANTILE = 1.0 - CHI_SQUARE_QUANTILE


#: What the values a fit leaves out of its degrees of freedom are (``FitResult.n_inactive``), in words
#: (fit.txt and the report's Parameters section; the parenthesis is closed by the caller).
INACTIVE_WORDS = ("the model meets exactly and no parameter moves (below the LOQ in data and model, or a "
                  "titrant reading of 0 before dosing")


def objective_closed(result) -> int:
    """Closed area% samples of a campaign fit's objective (0 without one)."""
    return int((getattr(result, "objective", None) or {}).get("closed_samples", 0) or 0)


def left_out(f: FitResult, closed: int) -> tuple[float, int]:
    """What the degrees of freedom leave out: (for the closed area% samples, other values that carry nothing).

    A closed sample's residuals are whitened, and one of them is 0 whatever the parameters
    (``pipeline.closure``): it is among ``f.n_inactive``, one per closed sample.  A fit saved by the
    version before (2026-12-05) took a fractional ``dof_reduction`` for the closed samples instead.
    """
    if f.dof_reduction > 0.0:
        return float(f.dof_reduction), int(f.n_inactive)
    return float(min(closed, f.n_inactive)), int(max(f.n_inactive - closed, 0))


def degrees_of_freedom_note(f: FitResult, closed: int) -> str:
    """The note beside the degrees of freedom on what they leave out (closed samples, censored values);
    empty when nothing is left out."""
    parts = []
    for_closed, other = left_out(f, closed)
    if closed:
        parts.append(f"{closed} HPLC sample{'s' if closed != 1 else ''} with area% summing to 100: "
                     + (f"{for_closed:.3g} fewer" if f.dof_reduction > 0.0 else
                        "one value fewer each, weighed with their joint covariance"))
    if other:
        parts.append(f"{other} value{'s' if other != 1 else ''} {INACTIVE_WORDS}): none")
    return f" ({'; '.join(parts)})" if parts else ""


def overstated_errors_warning(chisqr: float, dof: int) -> str | None:
    """The warning for data that scatter much less than the stated error model (None when they do not).

    The covariance intervals of the fit are scaled to the observed scatter; the posterior uses the
    stated errors, so its intervals (and a window drawn from it) come out wider than the data warrant.
    """
    from scipy import stats

    if not (dof >= 1 and np.isfinite(chisqr)):
        return None
    limit = float(stats.chi2.ppf(LOW_CHI_SQUARE_QUANTILE, dof))
    if chisqr >= limit:
        return None
    reduced = chisqr / dof
    return (f"the data scatter {np.sqrt(reduced):.2g} times the stated measurement error (reduced chi-square "
            f"{reduced:.3g}; chi-square {chisqr:.4g} is below the {LOW_CHI_SQUARE_QUANTILE:.1%} quantile {limit:.4g} "
            f"for {dof} degrees of freedom): the stated errors look too large. The covariance intervals are "
            "scaled to the observed scatter; the posterior uses the stated errors, so its credible intervals "
            "and a pH window drawn from it are wider than the data warrant (on the safe side). If this "
            "scatter is typical of the method, state smaller errors in the model file's [fit] error_model")


class LabelledJacobian:
    """The objective's Jacobian for the least-squares layer, with the label of how it was computed
    (``FitResult.jacobian_method``, read when the fit is assembled)."""

    def __init__(self, objective: CampaignObjective) -> None:
        self.objective = objective

    def __call__(self, theta, columns=None):
        return self.objective.jacobian(theta, columns)

    @property
    def label(self) -> str:
        return self.objective.jacobian_label


def fit_campaign(objective: CampaignObjective, *, starts: int | str | None = None, seed: int | None = None,
                 profiles: bool = True, profile_points: int = 12,
                 progress: Callable[[str, int, int], None] | None = None) -> CampaignFitResult:
    """Fit every run of a campaign at once.

    Parameters
    ----------
    objective
        Model + campaign objective.
    starts
        Number of starting points (model-file values + a Latin hypercube over
        the bounds); default: the model file's ``[fit] starts`` or 6.
    seed
        Seed of the Latin hypercube (default: ``[fit] seed`` or 0).
    profiles
        Also compute the profile likelihood of every fitted parameter.
    profile_points
        Points per side of each profile.
    progress
        ``progress(stage, done, total)`` with stage ``"starts"`` or ``"profiles"``.

    Returns
    -------
    CampaignFitResult
    """
    settings = dict(objective.model.extra.get("fit", {}) or {})
    n_starts = starts if starts is not None else int(settings.get("starts", 6))
    seed = seed if seed is not None else int(settings.get("seed", 0))
    t0 = time.perf_counter()
    check_enough_data(objective)
    check_start_values(objective)

    def on_start(done, total, best):
        if progress is not None:
            progress("starts", done, total)

    if progress is not None and isinstance(n_starts, int):
        progress("starts", 0, n_starts)
    jacobian = LabelledJacobian(objective)
    fit = fit_least_squares(objective.residuals, objective.specs(), jacobian=jacobian,
                            starts=n_starts, seed=seed, progress=on_start, groups=list(objective.groups),
                            one_sided=objective.one_sided)
    t_fit = time.perf_counter() - t0
    mapping = dict(zip(objective.keys, objective.names))
    # the model file's own warnings first (a step that does not conserve its moieties, ...): they bear on the fit
    warnings = [f"model file: {p.describe()}" for p in getattr(objective.model, "warnings", ())]
    warnings += [_rename(w, mapping) for w in fit.warnings]
    for label, stats in fit.group_residual_sd.items():
        if stats["count"] >= 3 and stats["rms"] > MISFIT_RMS:
            warnings.append(f"{label}: residuals are {stats['rms']:.1f} times the stated measurement error; "
                            "the model (or the error model) does not describe these data well")
    low = overstated_errors_warning(fit.chisqr, fit.degrees_of_freedom)
    if low:
        warnings.append(low)
    prof: dict[str, Profile] = {}
    t1 = time.perf_counter()
    if profiles and fit.success:
        def on_profile(done, total, lowest):
            if progress is not None:
                progress("profiles", done, total)

        if progress is not None:
            progress("profiles", 0, len(fit.varying_names))
        prof = profile_all(objective.residuals, fit, progress=on_profile, points=profile_points,
                           jacobian=jacobian)
        fit = fit.with_profiles(prof)
        warnings += [_rename(w, mapping) for p in prof.values() for w in p.warnings
                     if _rename(w, mapping) not in warnings]
    elif profiles:
        warnings.append("profile intervals were not computed because the fit did not converge "
                        f"({fit.message}); only the covariance intervals are shown, and they are doubtful")
    t_prof = time.perf_counter() - t1
    params = objective.parameters
    return CampaignFitResult(
        fit=fit, names=[p.name for p in params], keys=[p.key for p in params],
        bases=[p.base for p in params], shifts=[p.shift for p in params], units=[p.unit for p in params],
        profiles=prof, objective=objective.describe(), warnings=warnings,
        elapsed={"fit": t_fit, "profiles": t_prof},
        model_source=objective.model.source, campaign_source=objective.campaign.source,
        overrides=list(objective.model.extra.get("overrides", ())))
