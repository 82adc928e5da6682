"""Candidate next runs of a campaign, simulated for every parameter draw.

The one place that connects :mod:`speciakin.decision.suggest` (pure
criteria) to the campaign objective and the compiled simulator: it builds
candidate runs from the campaign's own protocol (a template run whose pH
control becomes a held set point, with optional temperature, equivalents,
dosing time and sampling schedule), predicts what the lab would report for
each draw (area% through the RRFs, or concentrations, plus the titrant log),
gives the campaign's error model for those observations, and evaluates the
planned process for the decision criteria.
"""

from __future__ import annotations

import itertools
import math
from dataclasses import replace
from typing import Any, Callable, Sequence

import numpy as np

from speciakin.chemistry.model import Run, TemperatureProfile
from speciakin.pipeline.window import hplc_rrf, process_outcome_function, window_draws
from speciakin.decision.design import process_scan_arguments
from speciakin.decision.outcomes import process_outcome_names
from speciakin.decision.suggest import MIN_GAIN_PH, LocalSensitivity, SuggestResult, decision_draws, \
    draw_edges, rank_candidates
from speciakin.errors import InputError, Location
from speciakin.pipeline.closure import whitened_candidates, whitening_matrix
from speciakin.simulation.api import simulate_batch
from speciakin.simulation.compile import compile_runs

__all__ = ["local_sensitivity", "plausible_ph_range", "candidate_conditions", "candidate_runs", "template_index",
           "CandidateObservables", "candidate_observables", "suggest_for_campaign", "PH_LIMITS",
           "TEMPERATURE_LIMITS_C"]

#: Set points the speciation model is meant for [pH] (aqueous pH scale).
PH_LIMITS = (0.0, 14.0)
#: Temperatures the water model covers [C] (see chemistry/water.py).
TEMPERATURE_LIMITS_C = (0.0, 150.0)
#: Default margin around the model's pKa values for the candidate grid [pH].
PKA_MARGIN = 2.0
KELVIN = 273.15


def _bad(message: str, key: str, value: Any, expected: str) -> InputError:
    return InputError(message, Location(key=key), value, expected)


def site_pkas(objective, theta: np.ndarray) -> dict[str, float]:
    """Kernel pKa values (name -> value) at the fitted vector ``theta``."""
    q = objective.kernel_inputs(np.asarray(theta, float))[0][0]
    return {n: float(v) for n, v in zip(objective.compiled.quantity_names, q) if n.startswith("pKa[")}


def plausible_ph_range(objective, theta: np.ndarray) -> tuple[float, float]:
    """The model's plausible set-point range: every site pKa +/- 2 and the
    campaign's held set points, clipped to :data:`PH_LIMITS`."""
    values = list(site_pkas(objective, theta).values())
    lows = [v - PKA_MARGIN for v in values]
    highs = [v + PKA_MARGIN for v in values]
    for r in objective.runs:
        if r.recipe.ph.mode == "held" and r.recipe.ph.setpoint is not None:
            lows.append(float(r.recipe.ph.setpoint))
            highs.append(float(r.recipe.ph.setpoint))
    if not lows:
        return PH_LIMITS
    return max(PH_LIMITS[0], min(lows)), min(PH_LIMITS[1], max(highs))


def _check_range(values: Sequence[float] | None, limits: tuple[float, float], key: str, unit: str) -> None:
    for v in values or ():
        if not (math.isfinite(v) and limits[0] <= v <= limits[1]):
            raise _bad(f"{key} lies outside the range the model is valid for", key, v,
                       f"a value from {limits[0]:g} to {limits[1]:g} {unit}")


def candidate_conditions(ph_range: tuple[float, float], ph_step: float = 0.5, *,
                         plant_ph: tuple[float, float] | None = None,
                         temperatures_c: Sequence[float] | None = None,
                         temperature_limits_c: tuple[float, float] | None = None,
                         equivalents: Sequence[float] | None = None,
                         dosing_times_min: Sequence[float] | None = None,
                         sample_times_min: Sequence[float] | None = None) -> list[dict[str, Any]]:
    """Every combination of set point and the optional factors, within limits.

    Raises
    ------
    InputError
        Limits outside the model's validity (pH 0-14, 0-150 C), a step <= 0,
        non-positive equivalents, negative times, or no candidate left.
    """
    lo, hi = (float(v) for v in ph_range)
    _check_range([lo, hi], PH_LIMITS, "ph_range", "pH")
    if plant_ph is not None:
        _check_range(plant_ph, PH_LIMITS, "plant_ph", "pH")
    _check_range(temperatures_c, TEMPERATURE_LIMITS_C, "temperatures", "C")
    if not (math.isfinite(ph_step) and ph_step > 0):
        raise _bad("the pH step must be a positive number", "ph_step", ph_step, "a step > 0")
    if any(not (math.isfinite(e) and e > 0) for e in equivalents or ()):
        raise _bad("equivalents must be positive", "equivalents", list(equivalents), "numbers > 0")
    for key, values in (("dosing_times", dosing_times_min), ("sampling", sample_times_min)):
        if any(not (math.isfinite(t) and t >= 0) for t in values or ()):
            raise _bad(f"{key} must be times >= 0", key, list(values), "minutes >= 0")
    if sample_times_min is not None and not any(t > 0 for t in sample_times_min):
        raise _bad("the sampling schedule has no sample after t = 0", "sampling", list(sample_times_min),
                   "at least one time > 0 min")
    first = math.ceil(lo / ph_step - 1e-9) * ph_step           # grid on multiples of the step
    ph = np.round(np.arange(first, hi + 1e-9, ph_step), 6) if hi >= lo else np.empty(0)
    if plant_ph is not None:
        ph = ph[(ph >= min(plant_ph) - 1e-9) & (ph <= max(plant_ph) + 1e-9)]
    temps = list(temperatures_c) if temperatures_c else [None]
    if temperature_limits_c is not None and temperatures_c:
        _check_range(temperature_limits_c, TEMPERATURE_LIMITS_C, "temperature_limits", "C")
        temps = [t for t in temps if min(temperature_limits_c) <= t <= max(temperature_limits_c)]
    out = []
    for p, t, e, d in itertools.product(ph, temps, list(equivalents or [None]), list(dosing_times_min or [None])):
        out.append({"setpoint_pH": float(p), "temperature_C": t, "equivalents": e, "dosing_time_min": d,
                    "sample_times_min": None if sample_times_min is None else [float(x) for x in sample_times_min]})
    if not out:
        raise _bad("no candidate run is left inside the stated limits", "ph_range",
                   {"ph_range": [lo, hi], "plant_ph": plant_ph, "temperatures": temperatures_c},
                   "a pH range (and plant range, temperatures) that keeps at least one set point")
    return out


def template_index(objective, name: str | None = None) -> int:
    """Index of the run whose protocol the candidates copy: ``name``, else the
    first held-pH run, else the first run."""
    names = objective.run_names
    if name is not None:
        if name not in names:
            raise InputError("no such run in the campaign", Location(file=objective.campaign.source or None,
                             sheet="runs", column="run"), name, "one of " + ", ".join(names))
        return names.index(name)
    for i, r in enumerate(objective.runs):
        if r.recipe.ph.mode == "held":
            return i
    return 0


def _held_control(objective, template: Run, setpoint: float):
    if template.ph.mode == "held":
        return replace(template.ph, setpoint=setpoint)
    for r in objective.runs:
        if r.recipe.ph.mode == "held":
            return replace(r.recipe.ph, setpoint=setpoint)
    raise InputError("no held-pH run in the campaign to copy the titrant from",
                     Location(file=objective.campaign.source or None, sheet="runs"),
                     template.name, "at least one run with a held pH (titrant and its concentration)")


def candidate_runs(objective, conditions: Sequence[dict[str, Any]], template: int,
                   sample_times: np.ndarray) -> tuple[list[Run], list[np.ndarray]]:
    """Runs (and sample times [s]) of the candidates, copied from the template run."""
    base = objective.runs[template].recipe
    model = objective.model
    roles = {m.name: m.role for m in model.molecules}
    substrate = [n for n in base.charges if roles.get(n) == "substrate"]
    runs, times = [], []
    for c in conditions:
        run = replace(base, name=f"candidate pH {c['setpoint_pH']:.2f}", ph=_held_control(
            objective, base, c["setpoint_pH"]), note="suggested run")
        if c.get("temperature_C") is not None:
            run = replace(run, temperature=TemperatureProfile((0.0,), (c["temperature_C"] + KELVIN,)))
        doses = list(run.doses)
        if c.get("equivalents") is not None:
            reagent = [i for i, d in enumerate(doses) if roles.get(d.species) == "reagent"]
            if not substrate or not reagent:
                raise InputError("cannot set equivalents: the template run needs a charged substrate and a "
                                 "dosed reagent (model roles 'substrate' and 'reagent')",
                                 Location(file=model.source or None, key="molecule.*.role"), base.name,
                                 "a run charging a substrate and dosing a reagent")
            total = sum(base.charges[s] for s in substrate)
            dosed = sum(doses[i].amount for i in reagent)
            for i in reagent:
                doses[i] = replace(doses[i], amount=doses[i].amount / dosed * c["equivalents"] * total)
        if c.get("dosing_time_min") is not None:
            doses = [replace(d, end=d.start + 60.0 * c["dosing_time_min"]) if roles.get(d.species) == "reagent"
                     else d for d in doses]
        run = replace(run, doses=tuple(doses))
        t = sample_times if c.get("sample_times_min") is None else 60.0 * np.asarray(c["sample_times_min"], float)
        t = np.unique(t[t > 0])
        end = max(float(run.end_time), float(t.max()), max((d.end for d in doses), default=0.0))
        runs.append(replace(run, end_time=end))
        times.append(t)
    return runs, times


class CandidateObservables:
    """Predicted observations of candidate runs and their error model.

    ``values[c]`` is (n_draws, m_c): area% (or concentration [mol/L]) of each
    compound at each sample time, then the titrant amount [mol] at each sample
    time for a held run.  :meth:`sd` is the objective's error model.
    """

    def __init__(self, objective, template: int) -> None:
        self.objective = objective
        h = objective.runs[template].hplc
        seen = dict.fromkeys(str(c) for c in h.compound)
        self.compounds = list(seen)
        first = [list(h.compound).index(c) for c in self.compounds]
        self.columns = [objective.compiled.species_index(str(h.molecule[i])) for i in first]
        self.rrf = np.array([float(h.rrf[i]) for i in first])
        self.area = bool(np.all(np.isin(h.kind[first], ("area", "area_percent"))))
        self.n_hplc: list[int] = []
        self.values: list[np.ndarray] = []

    def simulate(self, draws: np.ndarray, runs: list[Run], times: list[np.ndarray],
                 progress: Callable[[int, int], None] | None = None, chunk: int = 64,
                 rtol: float | None = None) -> list[np.ndarray]:
        """Predicted observations of every run for every draw, ``chunk`` draws per kernel call
        (integrator tolerance ``rtol``, default the objective's)."""
        o = self.objective
        compiled = o.compiled
        cruns = compile_runs(compiled, runs, [np.concatenate([[0.0], t]) for t in times])
        nsp = compiled.n_species
        n = draws.shape[0]
        per_run = [np.full((n, t.size * (len(self.columns) + 1)), np.nan) for t in times]
        for start in range(0, n, chunk):
            q, _, _ = o.kernel_inputs(draws[start:start + chunk])
            shape = (q.shape[0], len(runs))
            res = simulate_batch(compiled, cruns, q, np.zeros(shape), np.ones(shape), rtol or o.rtol, o.atol,
                                 o.parallel)
            for c, t in enumerate(times):
                out = res.outputs[:, c, 1:t.size + 1, :]
                amounts = out[:, :, self.columns]
                if self.area:
                    num = amounts * self.rrf
                    with np.errstate(invalid="ignore", divide="ignore"):
                        obs = 100.0 * num / num.sum(axis=2, keepdims=True)
                else:
                    obs = amounts / out[:, :, nsp][:, :, None]
                tit = out[:, :, nsp + 2] if runs[c].ph.mode == "held" else np.empty((q.shape[0], 0))
                block = np.concatenate([obs.reshape(q.shape[0], -1), tit], axis=1)
                block[res.status[:, c] != 0] = np.nan
                per_run[c][start:start + q.shape[0], :block.shape[1]] = block
            if progress is not None:
                progress(min(start + chunk, n), n)
        self.n_hplc = [t.size * len(self.columns) for t in times]
        self.values = [v[:, :self.n_hplc[c] + (times[c].size if runs[c].ph.mode == "held" else 0)]
                       for c, v in enumerate(per_run)]
        return self.values

    def sd(self, c: int, values: np.ndarray) -> np.ndarray:
        """Standard deviation of candidate ``c``'s observations ``values`` (k, m_c)."""
        v = np.asarray(values, float)
        k = self.n_hplc[c]
        out = np.empty_like(v)
        out[:, :k] = self.hplc_sd(v[:, :k])
        if v.shape[1] > k:
            out[:, k:] = self.titrant_sd(v[:, k:])
        return out

    def hplc_sd(self, values: np.ndarray) -> np.ndarray:
        """Standard deviation of HPLC values (area% or [mol/L]) by the error model."""
        em = self.objective.error_model
        return np.sqrt(em.absolute ** 2 + (em.relative * values) ** 2)

    def titrant_sd(self, tit: np.ndarray) -> np.ndarray:
        """Standard deviation of titrant readings ``tit`` (k, n) [mol] by the error model."""
        em = self.objective.error_model
        absolute = (em.titrant_absolute if em.titrant_absolute is not None
                    else 0.005 * np.maximum(np.nanmax(np.abs(tit), axis=1, keepdims=True), 1e-12))
        return np.sqrt(absolute ** 2 + (em.titrant_relative * tit) ** 2)

    def ranked(self) -> tuple[list[np.ndarray], Callable[[int, np.ndarray], np.ndarray]]:
        """The predictions and sd function the ranking weighs as independent: where the campaign's
        area% are closed (``pipeline.closure``), each sample in its whitened coordinates (unit sd)."""
        if not (self.area and self.objective.closed_samples > 0):
            return self.values, self.sd
        k = len(self.columns)
        values = [whitened_candidates(v, self.n_hplc[c], k, self.hplc_sd) for c, v in enumerate(self.values)]
        n_tit = [v.shape[1] - self.n_hplc[c] for c, v in enumerate(self.values)]

        def sd(c: int, v: np.ndarray) -> np.ndarray:
            v = np.asarray(v, float)
            out = np.ones_like(v)
            if n_tit[c]:
                out[:, -n_tit[c]:] = self.titrant_sd(v[:, -n_tit[c]:])
            return out
        return values, sd


def candidate_observables(objective, draws, runs, times, template, progress=None) -> CandidateObservables:
    """Simulate every candidate run for every draw (batched over the cores).

    Parameters
    ----------
    objective
        The campaign objective (model, kernel, error model, tolerances).
    draws
        (n_draws, p) fitted-parameter vectors.
    runs, times
        Candidate runs and their sample times [s] (:func:`candidate_runs`).
    template
        Index of the campaign run whose compounds and RRFs are reported.
    progress
        ``progress(done, total)`` over the draws.

    Returns
    -------
    CandidateObservables
        ``values`` per candidate (n_draws, m_c), NaN rows where the simulation failed.
    """
    obs = CandidateObservables(objective, template)
    obs.simulate(np.asarray(draws, float), runs, times, progress)
    return obs


def process_decision(objective, process, draws: np.ndarray, chunk: int = 64):
    """Pass/fail and margins of the planned process for each draw (:func:`decision_draws`)."""
    args = process_scan_arguments(process)
    fn = process_outcome_function(objective, process)
    outcomes = np.concatenate([fn(draws[i:i + chunk], args["ph_grid"]) for i in range(0, draws.shape[0], chunk)])
    names = process_outcome_names(objective.model, process, hplc_rrf(getattr(objective, "campaign", None)))
    return decision_draws(args["ph_grid"], outcomes, args["specs"], names)


#: Draws at which the fisher method linearises (evenly spread over the draws).
N_LOCAL = 40
#: Relative step of the central differences and the integrator tolerance used for them
#: (as CampaignObjective.jacobian).
FD_STEP, FD_RTOL = 1e-3, 1e-8


def local_sensitivity(objective, obs: CandidateObservables, draws: np.ndarray, runs, times, template: int,
                      decision=None, process=None, n_local: int = N_LOCAL) -> LocalSensitivity:
    """Central-difference linearisation at ``n_local`` of the draws (the fisher method).

    At each chosen draw: the campaign's weighted residual Jacobian (its
    information ``J^T J``), each candidate's observation Jacobian divided by
    the error model's sd, and, with a decision, the gradients of the draw's
    window edges (anchor kept) and spec margins.  Steps ``1e-3 max(1, |theta|)``
    kept inside the bounds; failed simulations give zero sensitivity.  Where the campaign's area%
    are closed (``pipeline.closure``), each candidate sample's rows are whitened with the joint
    covariance of a closed composition, as the fit weighs the campaign's samples.
    """
    idx = np.unique(np.linspace(0, draws.shape[0] - 1, min(n_local, draws.shape[0])).round().astype(int))
    base = draws[idx]
    n, p = base.shape
    lo = np.array([q.lower for q in objective.parameters])
    hi = np.array([q.upper for q in objective.parameters])
    h = FD_STEP * np.maximum(1.0, np.abs(base))
    plus, minus = np.minimum(base + h, hi), np.maximum(base - h, lo)
    sets = np.repeat(base[:, None, :], 2 * p, axis=1)
    for j in range(p):
        sets[:, 2 * j, j], sets[:, 2 * j + 1, j] = plus[:, j], minus[:, j]
    sets = sets.reshape(n * 2 * p, p)
    step = (plus - minus)[:, None, :]                                   # (n, 1, p)

    def diff(values: np.ndarray) -> np.ndarray:
        """(n * 2p, k) values at the perturbed sets -> (n, k, p) derivatives (NaN -> 0)."""
        v = values.reshape(n, p, 2, -1)
        d = np.moveaxis(v[:, :, 0] - v[:, :, 1], 1, 2) / step
        return np.nan_to_num(d, nan=0.0, posinf=0.0, neginf=0.0)

    jac = diff(objective.residuals_batch(sets, rtol=min(objective.rtol, FD_RTOL)))
    info = np.einsum("nmp,nmq->npq", jac, jac)
    moved = CandidateObservables(objective, template)
    moved.simulate(sets, runs, times, rtol=min(objective.rtol, FD_RTOL))
    cands = []
    closed = obs.area and objective.closed_samples > 0
    for c, values in enumerate(moved.values):
        at = np.nan_to_num(obs.values[c][idx], nan=0.0)
        sd = obs.sd(c, at)
        raw = diff(values)
        jac_c = raw / sd[:, :, None]
        if closed:
            # the lab closes its area% (pipeline.closure): a candidate's samples are weighed like the
            # campaign's, with the joint covariance of a closed composition
            k = len(obs.columns)
            for i in range(n):
                for s0 in range(0, obs.n_hplc[c], k):
                    y, d = np.maximum(at[i, s0:s0 + k], 0.0), sd[i, s0:s0 + k]
                    if k >= 2 and y.sum() > 0.0 and np.all(d > 0.0):
                        jac_c[i, s0:s0 + k] = whitening_matrix(y, d) @ raw[i, s0:s0 + k]
        cands.append(jac_c)
    edges = margins = None
    if decision is not None:
        moved_decision = replace(process_decision(objective, process, sets), anchor=decision.anchor)
        edges = diff(draw_edges(moved_decision))
        margins = diff(moved_decision.margin)
    return LocalSensitivity(info, cands, edges, margins)


def suggest_for_campaign(objective, *, fit=None, posterior=None, process=None, n_draws: int = 400,
                         seed: int = 1, ph_range: tuple[float, float] | None = None, ph_step: float = 0.5,
                         plant_ph: tuple[float, float] | None = None, temperatures_c=None,
                         temperature_limits_c=None, equivalents=None, dosing_times_min=None,
                         sample_times_min=None, template: str | None = None, method: str = "fisher",
                         batch: int = 1, min_gain: float | None = None, check: bool = False,
                         progress: Callable[[str, int, int], None] | None = None) -> SuggestResult:
    """Rank candidate next runs of a campaign (see :func:`rank_candidates`).

    Parameters
    ----------
    objective
        :class:`speciakin.pipeline.objective.CampaignObjective` of the campaign.
    fit, posterior
        CampaignFitResult and/or PosteriorResult; the posterior's draws are
        used when given, else draws from the fit's covariance.
    process
        Validated process plan: switches on the window criteria; None = the
        D-optimal criterion over all parameters only.
    n_draws, seed
        Parameter draws and the seed of draws and simulated noise.
    ph_range, ph_step
        Candidate set points [pH] (default: :func:`plausible_ph_range`) and spacing.
    plant_ph, temperatures_c, temperature_limits_c, equivalents, dosing_times_min, sample_times_min
        Limits and optional factors, see :func:`candidate_conditions` ([C], [-], [min]).
    template
        Name of the campaign run whose protocol the candidates copy.
    method, batch, min_gain
        As for :func:`rank_candidates` (``min_gain`` [pH], default :data:`MIN_GAIN_PH`).
    check
        Also rank with the other method (pre-posterior, or fisher for a
        pre-posterior ranking); ``result.check`` records its best
        candidate and how much less it expects from this method's best.
    progress
        ``progress(stage, done, total)``.

    Returns
    -------
    SuggestResult

    Raises
    ------
    InputError
        No fit or posterior, no candidate within the limits, limits outside
        the model's validity, an unknown template run.
    """
    if fit is None and posterior is None:
        raise InputError("no fit or posterior to start from", Location(file="fit.json"), None,
                         "run 'speciakin fit' (and optionally 'speciakin sample') first")
    draws, source, notes = window_draws(fit, posterior, n_draws, seed)
    theta_centre = draws.mean(axis=0)
    rng_ph = ph_range if ph_range is not None else plausible_ph_range(objective, theta_centre)
    conditions = candidate_conditions(rng_ph, ph_step, plant_ph=plant_ph, temperatures_c=temperatures_c,
                                      temperature_limits_c=temperature_limits_c, equivalents=equivalents,
                                      dosing_times_min=dosing_times_min, sample_times_min=sample_times_min)
    t_index = template_index(objective, template)
    base = objective.runs[t_index]
    sample_times = np.unique(base.hplc.time)
    sample_times = sample_times[(sample_times > 0) & (sample_times <= base.recipe.end_time)]
    if sample_times.size == 0 and sample_times_min is None:
        raise InputError("the template run has no HPLC sample after t = 0", Location(
            file=objective.campaign.source or None, sheet="HPLC"), base.name, "a run with samples, or --sampling")
    runs, times = candidate_runs(objective, conditions, t_index, sample_times)
    say = (lambda stage: (lambda d, t: progress(stage, d, t))) if progress else (lambda stage: None)
    obs = candidate_observables(objective, draws, runs, times, t_index, say("simulate candidates"))
    decision = None if process is None else process_decision(objective, process, draws)
    other = "preposterior" if method != "preposterior" else "fisher"
    sensitivity = None
    if method == "fisher" or (check and other == "fisher"):
        sensitivity = local_sensitivity(objective, obs, draws, runs, times, t_index, decision, process)
    kwargs = dict(parameter_names=objective.names, decision=decision, batch=batch, seed=seed,
                  min_gain=min_gain if min_gain is not None else MIN_GAIN_PH, sensitivity=sensitivity)
    values, noise_sd = obs.ranked()
    result = rank_candidates(draws, values, noise_sd, conditions, method=method,
                             progress=say("rank candidates"), **kwargs)
    pkas = {n: v for n, v in site_pkas(objective, theta_centre).items() if n in objective.names}
    for score in {id(s): s for s in result.candidates + result.batch}.values():
        near = [f"{n} (about {v:.1f})" for n, v in pkas.items() if abs(v - score.conditions["setpoint_pH"]) <= 1.5]
        if near:
            score.reason += "; set point within 1.5 pH of " + ", ".join(near)
    if sensitivity is not None and method == "fisher":
        notes = notes + [f"fisher method: linearised at {sensitivity.information.shape[0]} of the draws"]
    result.notes[:0] = [f"parameter draws: {source} ({draws.shape[0]} draws)"] + notes
    if check:
        alt = rank_candidates(draws, values, noise_sd, conditions, method=other,
                              progress=say(f"check ({other})"), **kwargs)
        order = [c.index for c in alt.candidates]
        mine = alt.candidates[order.index(result.candidates[0].index)]
        best = alt.candidates[0]
        result.check = {
            "method": other, "best_candidate": best.to_dict(), "this_best_there": mine.to_dict(),
            "rank_of_this_best_there": order.index(mine.index) + 1, "agree": best.index == mine.index,
            "shortfall_pH": (best.edge_reduction - mine.edge_reduction) if decision is not None else None,
            "helps": alt.helps}
        if result.check["shortfall_pH"] is not None and result.check["shortfall_pH"] > result.min_gain:
            result.notes.append(f"the {other} check prefers {best.conditions['setpoint_pH']:.2f} and expects "
                                f"{result.check['shortfall_pH']:.2f} pH more narrowing from it; treat the "
                                "ranking as uncertain")
    return result
