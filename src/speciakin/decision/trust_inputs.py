"""Plain inputs of the trust gates (:mod:`speciakin.decision.gates`) taken from
a campaign: the runs' conditions, the fit's profiles, the posterior's
convergence figures and the draws; then the status written into the window
result.

Objects are read by their attributes (duck typing), so this module imports
nothing from the estimation or simulation layers.  The only computation is
:func:`open_profile_shifts`, which simulates the planned process at the
window edges for the best fit and for the open end of each open profile
(the other parameters re-optimised along the profile).
"""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from speciakin.decision.gates import GateInputs, assess, specification_margin
from speciakin.decision.specs import specification_value

__all__ = ["run_conditions", "process_conditions", "run_ph_range", "open_profile_shifts",
           "campaign_gate_inputs", "apply_gates"]

_ZERO_C = 273.15


def run_conditions(runs: Sequence[Any], substrate: str, reagent: str) -> dict[str, list]:
    """Equivalents [eq], dosing time [min], end time [min], temperature [C] and
    pH mode of each lab run (``chemistry.model.Run``); temperature lists every
    value of each run's profile."""
    out: dict[str, list] = {"equivalents": [], "dosing_time": [], "end_time": [], "temperature": [],
                            "ph_mode": []}
    for run in runs:
        doses = [d for d in run.doses if d.species == reagent]
        charged = float(run.charges.get(substrate, 0.0))
        reagent_amount = sum(float(d.amount) for d in doses) + float(run.charges.get(reagent, 0.0))
        out["equivalents"].append(reagent_amount / charged if charged > 0 else None)
        out["dosing_time"].append((max(d.end for d in doses) - min(d.start for d in doses)) / 60.0
                                  if doses else None)
        out["end_time"].append(float(run.end_time) / 60.0)
        out["temperature"] += [float(t) - _ZERO_C for t in run.temperature.temperatures]
        out["ph_mode"].append(run.ph.mode)
    return out


def process_conditions(process: Any) -> dict[str, Any]:
    """The same conditions of the planned process (held pH)."""
    return {"equivalents": float(process.equivalents), "dosing_time": float(process.dosing_time) / 60.0,
            "end_time": float(process.end_time) / 60.0, "temperature": float(process.temperature) - _ZERO_C,
            "ph_mode": "held"}


def run_ph_range(runs: Sequence[Any]) -> tuple[float, float] | None:
    """Lowest and highest pH of the lab runs (held set points and logged pH)."""
    values: list[float] = []
    for run in runs:
        if run.ph.mode == "held" and run.ph.setpoint is not None:
            values.append(float(run.ph.setpoint) + float(getattr(run, "ph_offset", 0.0) or 0.0))
        elif run.ph.mode == "logged":
            values += [float(v) for v in run.ph.log_ph]
    values = [v for v in values if math.isfinite(v)]
    return (min(values), max(values)) if values else None


def _profile_end(profile: Any, keys: Sequence[str], key: str, best: np.ndarray, low_side: bool):
    """Parameter vector (fit key order) at the last finite point of one side of a profile."""
    values = np.asarray(profile.values, dtype=float)
    chisqr = np.asarray(profile.chisqr, dtype=float)
    ok = np.flatnonzero(np.isfinite(chisqr))
    if ok.size == 0:
        return None
    i = int(ok[0] if low_side else ok[-1])
    theta = np.array(best, dtype=float)
    theta[list(keys).index(key)] = values[i]
    for other, path in (profile.others or {}).items():
        if other in keys and i < len(path) and path[i] is not None and math.isfinite(float(path[i])):
            theta[list(keys).index(other)] = float(path[i])
    return theta


def open_profile_shifts(outcome_fn: Callable, fit: Any, windows: Sequence[tuple[float, float]],
                        specs: Sequence[Any], outcome_names: Sequence[str]) -> list[dict] | None:
    """Change of each specified outcome at the window edges along each open profile.

    For every fitted parameter whose profile is open, the process is
    simulated at the window edges for the best fit and for the last point of
    the open side(s) of the profile (the other parameters at their
    re-optimised values there); the largest absolute change of each
    specification's outcome is compared with its margin.

    Returns
    -------
    list of dict or None
        One entry per open parameter (see :class:`GateInputs`); None when the
        fit has no profiles.
    """
    profiles = getattr(fit, "profiles", None)
    if not profiles:
        return None
    keys, names = list(fit.keys), list(fit.names)
    best = np.asarray(fit.theta, dtype=float)
    edges = sorted({round(float(e), 10) for w in windows for e in w})
    out = []
    for key, prof in profiles.items():
        if not (prof.open_below or prof.open_above):
            continue
        side = "both" if prof.open_below and prof.open_above else ("below" if prof.open_below else "above")
        entry = {"name": names[keys.index(key)] if key in keys else key, "side": side, "shifts": []}
        out.append(entry)
        ends = [_profile_end(prof, keys, key, best, low) for low, is_open in
                ((True, prof.open_below), (False, prof.open_above)) if is_open]
        ends = [e for e in ends if e is not None]
        if not edges or not ends:
            continue
        stack = np.vstack([best] + ends)
        # one edge per call: run names carry the pH to 0.01, close edges would clash
        values = np.concatenate([np.asarray(outcome_fn(stack, np.array([e])), dtype=float) for e in edges],
                                axis=1)
        for spec in specs:
            v = specification_value(values, spec, outcome_names)          # (1 + n_ends, n_edges)
            with np.errstate(invalid="ignore"):
                change = np.abs(v[1:] - v[0])
            change = np.where(np.isfinite(change), change, np.inf)
            k = np.unravel_index(int(np.argmax(change)), change.shape)
            entry["shifts"].append({"specification": spec.describe(), "ph": edges[k[1]],
                                    "change": float(change[k]), "margin": specification_margin(spec)})
    return out


def campaign_gate_inputs(objective: Any, process: Any, result: Any, draws: np.ndarray, source: str, *,
                         fit: Any = None, posterior: Any = None,
                         outcome_fn: Callable | None = None) -> GateInputs:
    """Gather the gates' plain inputs for the window of a campaign."""
    runs = [r.recipe for r in objective.campaign.runs]
    params = list(objective.parameters)
    inputs = GateInputs(
        source="posterior" if posterior is not None and source == "posterior" else source,
        parameter_names=[p.name for p in params], draws=np.asarray(draws, dtype=float),
        lower=[float(p.lower) for p in params], upper=[float(p.upper) for p in params],
        windows=list(result.windows), run_ph_range=run_ph_range(runs), level=float(result.level),
        mc_confidence=result.mc_confidence,
        process=process_conditions(process),
        runs=run_conditions(runs, process.substrate, process.reagent))
    if posterior is not None:
        d = posterior.diagnostics
        inputs.posterior_converged = bool(posterior.converged)
        inputs.r_hat = [float(r) for r in d.r_hat]
        inputs.ess = [min(float(b), float(t), float(a)) for b, t, a in
                      zip(d.ess_bulk, d.ess_tail, d.ess_autocorrelation)]
    core = getattr(fit, "fit", None)
    if core is not None and getattr(core, "chisqr", None) is not None:
        inputs.chi_square = float(core.chisqr)
        inputs.degrees_of_freedom = float(core.degrees_of_freedom)
    if fit is not None and outcome_fn is not None and list(getattr(fit, "names", [])) == inputs.parameter_names:
        inputs.open_profiles = open_profile_shifts(outcome_fn, fit, result.windows, result.specifications,
                                                   result.outcome_names)
    return inputs


def apply_gates(result: Any, inputs: GateInputs) -> Any:
    """Run the gates and write status, reasons and gate details into ``result``."""
    from speciakin.decision.next_steps import next_steps

    result.status, result.status_reasons, result.gates = assess(inputs)
    result.next_steps = next_steps(result.gates, result.best_ph if result.windows else None)
    return result
