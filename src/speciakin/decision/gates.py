"""Trust gates of a pH window: may the window be presented as established?

Each gate is a pure function of plain inputs (:class:`GateInputs`: numbers,
lists and dicts, no model or campaign objects) that returns a
:class:`GateVerdict`.  :data:`GATES` is the one registry; :func:`assess`
runs every gate and combines the verdicts into one plain-words status:

* ``"established"``: every gate passes (or could not be checked);
* ``"provisional"``: at least one gate asks for caution;
* ``"not established"``: at least one gate says the window cannot be relied on.

A gate whose inputs are missing says ``"not checked"`` and why; that does not
lower the status but is listed.

Thresholds (module constants, documented in docs/decision.md):

* convergence: R-hat <= 1.01 and ESS >= 400 pass (Vehtari et al. 2021);
  R-hat up to 1.1 and ESS from 100 are provisional (the older R-hat < 1.1
  rule of Gelman et al., BDA3 section 11.4; 100 effective draws: common
  practice); beyond that, not established.  A posterior the sampler itself
  reports as not converged (e.g. chain shorter than 50 autocorrelation
  times) is at best provisional; draws from the least-squares covariance
  (no posterior) are provisional.
* bound: more than 10 % of the draws of a parameter within 1 % of the width
  of its model-file bounds from a bound: provisional.
* identifiability: a parameter with an open profile whose profile end (the
  other parameters re-optimised) moves a specified outcome at a window edge
  by more than that specification's margin (:func:`specification_margin`):
  not established.
* pH coverage: a window edge beyond the pH range of the lab runs by more
  than 0.1 pH: provisional; by more than 1 pH unit: not established.
* process envelope: equivalents, dosing time or end time more than 10 %
  outside the runs' range, temperature more than 2 K outside, or a pH mode
  no run used: provisional.
* error model: the fit's chi-square above the 99.9 % quantile of the
  chi-square distribution with its degrees of freedom (scipy.stats.chi2):
  provisional; reduced chi-square above 4 (the stated errors are less than
  half the scatter, so the posterior is too narrow): not established.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from speciakin.decision.specs import Specification

__all__ = ["GateInputs", "GateVerdict", "Gate", "GATES", "assess", "combine", "specification_margin",
           "ESTABLISHED", "PROVISIONAL", "NOT_ESTABLISHED", "PASS", "NOT_CHECKED", "STATUSES",
           "R_HAT_PASS", "R_HAT_USABLE", "ESS_PASS", "ESS_USABLE", "BOUND_ZONE", "BOUND_SHARE",
           "PH_MARGIN_PROVISIONAL", "PH_MARGIN_NOT_ESTABLISHED", "ENVELOPE_RELATIVE",
           "ENVELOPE_TEMPERATURE", "PERCENT_MARGIN", "RATIO_MARGIN", "CHI_SQUARE_QUANTILE",
           "REDUCED_CHI_SQUARE_LIMIT"]

ESTABLISHED, PROVISIONAL, NOT_ESTABLISHED = "established", "provisional", "not established"
PASS, NOT_CHECKED = "pass", "not checked"
#: Statuses from best to worst.
STATUSES = (ESTABLISHED, PROVISIONAL, NOT_ESTABLISHED)

#: R-hat at or below this passes (Vehtari et al., Bayesian Analysis 2021, 16, 667).
R_HAT_PASS = 1.01
#: R-hat above this: not established (Gelman et al., BDA3, section 11.4: "below 1.1").
R_HAT_USABLE = 1.1
#: Smallest ESS (bulk, tail, autocorrelation) that passes (Vehtari et al. 2021).
ESS_PASS = 400.0
#: ESS below this: not established (common practice).
ESS_USABLE = 100.0
#: Width of the zone next to a bound, as a share of the bound range [-].
BOUND_ZONE = 0.01
#: Share of draws in a bound zone above which the draws are "piled on the bound" [-].
BOUND_SHARE = 0.10
#: Window edge beyond the runs' pH range: provisional above, not established above [pH units].
PH_MARGIN_PROVISIONAL = 0.1
PH_MARGIN_NOT_ESTABLISHED = 1.0
#: Relative slack of the process envelope for equivalents, dosing time, end time [-].
ENVELOPE_RELATIVE = 0.10
#: Slack of the process envelope for temperature [K].
ENVELOPE_TEMPERATURE = 2.0
#: Quantile of chi2(degrees of freedom) above which the fit's chi-square is too large [-].
CHI_SQUARE_QUANTILE = 0.999
#: Reduced chi-square above which the stated errors are too small to trust the posterior [-].
REDUCED_CHI_SQUARE_LIMIT = 4.0
#: Margin of a mole-% or conversion specification [percentage points].
PERCENT_MARGIN = 1.0
#: Margin of a ratio specification, as a share of its limit [-].
RATIO_MARGIN = 0.10


def specification_margin(spec: Specification) -> float:
    """How far an outcome may move before the decision is in doubt [unit of the spec].

    Mole % and conversion: :data:`PERCENT_MARGIN` percentage points; ratio:
    :data:`RATIO_MARGIN` x the limit (project choices, see docs/decision.md).
    """
    if spec.kind == "ratio":
        return RATIO_MARGIN * abs(float(spec.limit))
    return PERCENT_MARGIN


@dataclass
class GateInputs:
    """Plain inputs of the gates; any field may be None ("not known").

    Attributes
    ----------
    source
        "posterior" or the name of another draw source.
    parameter_names
        Fitted parameters, in draw column order.
    posterior_converged
        The sampler's own verdict, None without a posterior.
    r_hat, ess
        Per parameter; ``ess`` is the smallest of bulk, tail and
        autocorrelation ESS.
    draws
        (n_draws, n_params) draws the window used.
    lower, upper
        (n_params,) model-file bounds on the fitted scale (infinite = none).
    open_profiles
        One dict per parameter with an open profile: ``name``, ``side``
        ("below", "above" or "both") and ``shifts``: a list of dicts
        ``{"specification", "ph", "change", "margin"}`` (change of the
        specified outcome at a window edge between the best fit and the open
        end of the profile).  An empty list = no open profile; None = profiles
        not computed.
    windows
        Window intervals (p >= level) [pH].
    run_ph_range
        (lowest, highest) pH any lab run was at [pH].
    process
        Process conditions: ``equivalents`` [eq], ``dosing_time`` [min],
        ``end_time`` [min], ``temperature`` [C], ``ph_mode``.
    runs
        The same keys, one list of values over the lab runs (None entries
        = not applicable to that run).
    chi_square, degrees_of_freedom
        Chi-square of the least-squares fit (residuals divided by the
        stated errors) and its degrees of freedom.
    level, mc_confidence
        The window's level and the confidence of its Monte Carlo guard
        (None when the guard did not apply: too few draws).
    """

    source: str | None = None
    parameter_names: Sequence[str] = ()
    posterior_converged: bool | None = None
    r_hat: Sequence[float] | None = None
    ess: Sequence[float] | None = None
    draws: np.ndarray | None = None
    lower: Sequence[float] | None = None
    upper: Sequence[float] | None = None
    open_profiles: list[dict[str, Any]] | None = None
    windows: Sequence[tuple[float, float]] = ()
    run_ph_range: tuple[float, float] | None = None
    process: Mapping[str, Any] | None = None
    runs: Mapping[str, Sequence[Any]] | None = None
    chi_square: float | None = None
    degrees_of_freedom: float | None = None
    level: float | None = None
    mc_confidence: float | None = None


@dataclass
class GateVerdict:
    """Outcome of one gate: verdict (pass, provisional, not established, not
    checked), the reasons in plain words and the figures behind them."""

    name: str
    verdict: str
    reasons: list[str] = field(default_factory=list)
    figures: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "verdict": self.verdict, "reasons": list(self.reasons),
                "figures": _plain(self.figures)}


@dataclass(frozen=True)
class Gate:
    """A registered gate: name, one line saying what it checks, and its function."""

    name: str
    checks: str
    function: Callable[[GateInputs], GateVerdict]


def _plain(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {str(k): _plain(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_plain(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj) if math.isfinite(float(obj)) else None
    if isinstance(obj, np.integer):
        return int(obj)
    return obj


def _worst(verdicts: Sequence[str]) -> str:
    if NOT_ESTABLISHED in verdicts:
        return NOT_ESTABLISHED
    if PROVISIONAL in verdicts:
        return PROVISIONAL
    return PASS


# ------------------------------------------------------------------ gates
def convergence_gate(x: GateInputs) -> GateVerdict:
    """R-hat and ESS of the posterior the draws came from."""
    name = "convergence"
    if x.source is not None and x.source != "posterior":
        return GateVerdict(name, PROVISIONAL, [
            f"no posterior was sampled: the draws come from the {x.source}, an approximation "
            "that can be poor for a nonlinear model"])
    if x.r_hat is None or x.ess is None:
        return GateVerdict(name, NOT_CHECKED, ["no convergence figures were given"])
    names = list(x.parameter_names) or [f"parameter {i + 1}" for i in range(len(x.r_hat))]
    groups: dict[tuple[str, str], list[str]] = {}
    for n, r, e in zip(names, x.r_hat, x.ess):
        r = float(r) if r is not None else math.inf
        e = float(e) if e is not None else 0.0
        if not r <= R_HAT_USABLE:
            groups.setdefault((NOT_ESTABLISHED, f"posterior not converged: R-hat above {R_HAT_USABLE:g} for "),
                              []).append(f"{n} ({r:.3g})")
        elif r > R_HAT_PASS:
            groups.setdefault((PROVISIONAL, f"posterior not fully converged: R-hat above {R_HAT_PASS:g} for "),
                              []).append(f"{n} ({r:.3g})")
        if not e >= ESS_USABLE:
            groups.setdefault((NOT_ESTABLISHED, f"effective sample size below {ESS_USABLE:g} for "),
                              []).append(f"{n} ({e:.0f})")
        elif e < ESS_PASS:
            groups.setdefault((PROVISIONAL, f"effective sample size below {ESS_PASS:g} for "),
                              []).append(f"{n} ({e:.0f})")
    verdicts = [v for v, _ in groups]
    reasons = [text + ", ".join(items) for (_, text), items in groups.items()]
    if x.posterior_converged is False and not verdicts:
        verdicts.append(PROVISIONAL)
        reasons.append("the sampler reports the posterior as not converged (chain too short for its "
                       "autocorrelation time)")
    elif x.posterior_converged is False:
        reasons.append("the sampler reports the posterior as not converged")
    return GateVerdict(name, _worst(verdicts), reasons,
                       {"r_hat": list(x.r_hat), "ess": list(x.ess), "converged": x.posterior_converged})


def bound_gate(x: GateInputs) -> GateVerdict:
    """Share of the draws of each parameter piled next to a model-file bound."""
    name = "draws on a bound"
    if x.draws is None or x.lower is None or x.upper is None:
        return GateVerdict(name, NOT_CHECKED, ["draws or bounds not given"])
    d = np.atleast_2d(np.asarray(x.draws, dtype=float))
    names = list(x.parameter_names) or [f"parameter {i + 1}" for i in range(d.shape[1])]
    reasons, figures = [], {}
    for j, n in enumerate(names):
        lo, hi = float(x.lower[j]), float(x.upper[j])
        if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
            continue
        zone = BOUND_ZONE * (hi - lo)
        for label, bound, share in (("lower", lo, float(np.mean(d[:, j] <= lo + zone))),
                                    ("upper", hi, float(np.mean(d[:, j] >= hi - zone)))):
            figures[f"{n} {label}"] = share
            if share > BOUND_SHARE:
                reasons.append(f"{share:.0%} of the draws of {n} lie at its {label} bound {bound:g} "
                               f"(within {BOUND_ZONE:.0%} of the bound range): the bound, not the data, "
                               "limits it")
    return GateVerdict(name, PROVISIONAL if reasons else PASS, reasons, figures)


def identifiability_gate(x: GateInputs) -> GateVerdict:
    """Open profiles that move a specified outcome at a window edge beyond its margin."""
    name = "identifiability"
    if x.open_profiles is None:
        return GateVerdict(name, NOT_CHECKED, ["profile likelihoods were not computed (fit without "
                                               "profiles)"])
    reasons, verdicts, figures = [], [], {}
    for entry in x.open_profiles:
        shifts = entry.get("shifts") or []
        worst = max(shifts, key=lambda s: (not math.isfinite(s["change"]), s["change"] - s["margin"]),
                    default=None)
        figures[entry["name"]] = {"side": entry.get("side"), "shifts": shifts}
        if worst is None:
            continue
        change = worst["change"]
        if not (math.isfinite(change) and change <= worst["margin"]):
            verdicts.append(NOT_ESTABLISHED)
            what = "cannot be computed" if not math.isfinite(change) else f"moves by {change:.3g}"
            reasons.append(f"{entry['name']} is not identified by the runs (profile open "
                           f"{entry.get('side')}); along its profile, '{worst['specification']}' at the "
                           f"window edge pH {worst['ph']:.2f} {what} (margin {worst['margin']:g})")
    return GateVerdict(name, _worst(verdicts), reasons, figures)


def ph_coverage_gate(x: GateInputs) -> GateVerdict:
    """Window edges beyond the pH range the lab runs covered."""
    name = "pH coverage"
    if x.run_ph_range is None:
        return GateVerdict(name, NOT_CHECKED, ["the runs' pH range is not known"])
    low, high = (float(v) for v in x.run_ph_range)
    reasons, verdicts, figures = [], [], {"run_ph_range": [low, high]}
    for a, b in x.windows:
        for edge in (a, b):
            beyond, side = (low - edge, "below the lowest") if edge < low else (edge - high, "above the highest")
            if beyond > PH_MARGIN_PROVISIONAL:
                verdicts.append(NOT_ESTABLISHED if beyond > PH_MARGIN_NOT_ESTABLISHED else PROVISIONAL)
                reasons.append(f"window edge pH {edge:.2f} lies {beyond:.2f} pH {side} run pH "
                               f"({low:.2f} to {high:.2f} covered by the runs): extrapolation")
    figures["windows"] = [list(w) for w in x.windows]
    return GateVerdict(name, _worst(verdicts), reasons, figures)


_ENVELOPE = (("equivalents", "equivalents", "eq", "relative"),
             ("dosing_time", "dosing time", "min", "relative"),
             ("end_time", "end time", "min", "relative"),
             ("temperature", "temperature", "C", "absolute"))


def envelope_gate(x: GateInputs) -> GateVerdict:
    """Process conditions outside the envelope of the lab runs."""
    name = "process envelope"
    if x.process is None or x.runs is None:
        return GateVerdict(name, NOT_CHECKED, ["process or run conditions not given"])
    reasons, figures = [], {}
    for key, label, unit, kind in _ENVELOPE:
        value = x.process.get(key)
        seen = [float(v) for v in (x.runs.get(key) or []) if v is not None and math.isfinite(float(v))]
        if value is None or not seen:
            continue
        lo, hi = min(seen), max(seen)
        slack_lo = ENVELOPE_TEMPERATURE if kind == "absolute" else ENVELOPE_RELATIVE * abs(lo)
        slack_hi = ENVELOPE_TEMPERATURE if kind == "absolute" else ENVELOPE_RELATIVE * abs(hi)
        figures[key] = {"process": float(value), "runs": [lo, hi]}
        if value < lo - slack_lo or value > hi + slack_hi:
            by = lo - value if value < lo else value - hi
            where = (f"differs from every run's {lo:.4g} {unit}" if lo == hi
                     else f"lies outside the runs' {lo:.4g} to {hi:.4g} {unit}")
            reasons.append(f"{label} {value:.4g} {unit} {where} (by {by:.3g} {unit})")
    mode = x.process.get("ph_mode")
    modes = [m for m in (x.runs.get("ph_mode") or []) if m]
    if mode and modes and mode not in modes:
        reasons.append(f"the process runs with pH {mode}, no lab run did (runs: {', '.join(sorted(set(modes)))})")
    figures["ph_mode"] = {"process": mode, "runs": sorted(set(modes))}
    return GateVerdict(name, PROVISIONAL if reasons else PASS, reasons, figures)


def error_model_gate(x: GateInputs) -> GateVerdict:
    """Scatter of the data against the stated error model (chi-square of the fit)."""
    from scipy import stats

    name = "error model"
    if x.chi_square is None or not x.degrees_of_freedom or x.degrees_of_freedom < 1:
        return GateVerdict(name, NOT_CHECKED, ["no fit chi-square was given"])
    chi2, dof = float(x.chi_square), float(x.degrees_of_freedom)
    reduced = chi2 / dof
    limit = float(stats.chi2.ppf(CHI_SQUARE_QUANTILE, dof))
    figures = {"chi_square": chi2, "degrees_of_freedom": dof, "reduced_chi_square": reduced,
               "chi_square_limit": limit}
    if not math.isfinite(chi2) or reduced > REDUCED_CHI_SQUARE_LIMIT:
        return GateVerdict(name, NOT_ESTABLISHED, [
            f"the data scatter {math.sqrt(reduced):.3g} times more than the stated error model allows "
            f"(reduced chi-square {reduced:.3g}): the posterior is too narrow; state the errors of the "
            "data in the model file's [fit] error_model"], figures)
    if chi2 > limit:
        return GateVerdict(name, PROVISIONAL, [
            f"chi-square {chi2:.4g} of the fit is above the {CHI_SQUARE_QUANTILE:.1%} quantile {limit:.4g} "
            f"for {dof} degrees of freedom: the stated errors are too small or the model misses something"],
            figures)
    return GateVerdict(name, PASS, [], figures)


def monte_carlo_gate(x: GateInputs) -> GateVerdict:
    """Enough draws for the Monte Carlo guard of the claim (:mod:`speciakin.decision.montecarlo`)."""
    from speciakin.decision.montecarlo import MC_CONFIDENCE, minimum_draws

    name = "Monte Carlo error"
    if x.draws is None or x.level is None:
        return GateVerdict(name, NOT_CHECKED, ["draws or level not given"])
    n, needed = int(np.shape(x.draws)[0]), minimum_draws(x.level, MC_CONFIDENCE)
    figures = {"draws": n, "draws_needed": needed, "confidence": x.mc_confidence}
    if x.mc_confidence is None and n >= needed:
        return GateVerdict(name, PROVISIONAL, [
            "the window was computed without the Monte Carlo guard: it rests on the share of passing draws"],
            figures)
    if x.mc_confidence is None:
        return GateVerdict(name, PROVISIONAL, [
            f"{n} draws are too few to show probability >= {x.level:g} against Monte Carlo error (at least "
            f"{needed} needed at confidence {MC_CONFIDENCE:g}): the window rests on the share of passing draws"],
            figures)
    return GateVerdict(name, PASS, [], figures)


#: The one registry of gates, in the order they are reported.
GATES: dict[str, Gate] = {g.name: g for g in (
    Gate("convergence", "posterior converged (R-hat, effective sample size)", convergence_gate),
    Gate("draws on a bound", "no parameter's draws piled on a model-file bound", bound_gate),
    Gate("identifiability", "no unidentified parameter moves an outcome at the window edges",
         identifiability_gate),
    Gate("pH coverage", "window edges inside the pH range of the runs", ph_coverage_gate),
    Gate("process envelope", "process conditions inside the envelope of the runs", envelope_gate),
    Gate("error model", "data scatter as the stated error model says (fit chi-square)", error_model_gate),
    Gate("Monte Carlo error", "enough draws to claim the level against Monte Carlo error", monte_carlo_gate),
)}


def combine(verdicts: Sequence[GateVerdict]) -> tuple[str, list[str]]:
    """Overall status and the reasons of every gate that lowered it."""
    worst = _worst([v.verdict for v in verdicts])
    status = {PASS: ESTABLISHED, PROVISIONAL: PROVISIONAL, NOT_ESTABLISHED: NOT_ESTABLISHED}[worst]
    reasons = [r for v in verdicts if v.verdict in (PROVISIONAL, NOT_ESTABLISHED) for r in v.reasons]
    return status, reasons


def assess(inputs: GateInputs) -> tuple[str, list[str], list[dict[str, Any]]]:
    """Run every gate of :data:`GATES`.

    Returns
    -------
    status, reasons, gates
        Plain-words status, the reasons it is not "established", and one
        JSON-ready dict per gate.
    """
    verdicts = [gate.function(inputs) for gate in GATES.values()]
    status, reasons = combine(verdicts)
    return status, reasons, [v.to_dict() for v in verdicts]
