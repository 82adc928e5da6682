"""The result of a pH-window computation: a dataclass whose fields always
exist (None where they do not apply), with ``report()``, ``to_dict()`` and
``from_dict()``.
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields
from typing import Any, Mapping

import numpy as np

from speciakin._json import json_ready, nan_from_null
from speciakin.decision.specs import AREA_PREFIX, Specification, area_molecule

__all__ = ["WindowResult", "REPORT_HEADINGS", "best_probability_words", "outcomes_at_best", "best_point_words",
           "outcome_words"]

#: Headings of :meth:`WindowResult.report`, always present and in this order.
REPORT_HEADINGS = (
    "pH window",
    "Status",
    "Settings",
    "Specifications",
    "Decision",
    "Probability against pH",
    "Expected outcomes at the end of the process",
    "Design space map",
    "Warnings",
)


def _float_array(a: Any) -> np.ndarray | None:
    return None if a is None else np.asarray(a, dtype=float)


def _from_json_array(a: Any) -> np.ndarray | None:
    return None if a is None else np.asarray(nan_from_null(a), dtype=float)


def _intervals(items: Any) -> list[tuple[float, float]]:
    return [(float(a), float(b)) for a, b in (items or [])]


def best_probability_words(probability: float | None, mc_confidence: float | None) -> str:
    """``probability 0.970``, or with the Monte Carlo guard on, what that number is: a lower bound.

    With the guard the best set point's probability is the one-sided lower
    bound of the share of passing draws (100 of 100 passing draws give 0.970
    at confidence 0.95), so the text says so beside a table whose shares read
    1.000.
    """
    if probability is None:
        return ""
    if mc_confidence is None:
        return f"probability {probability:.3f}"
    return f"probability at least {probability:.3f}, the one-sided {mc_confidence:g} Monte Carlo lower bound"


@dataclass
class WindowResult:
    """Probability that every specification is met, against pH (and a second factor).

    Attributes
    ----------
    level
        Required probability [-].
    tolerance
        Plant pH control half-band [pH units].
    specifications
        The specifications evaluated.
    uncertainty_source
        ``"posterior"`` or ``"least-squares covariance (multivariate normal)"``.
    n_draws
        Number of parameter draws.
    ph
        Scanned pH grid (n_ph,) [-].
    probability, probability_standard_error
        (n_ph,) [-]; for a 2-D scan, at the factor value ``nominal_factor``.
    worst_case_probability
        (n_ph,) lowest pointwise probability within +/- tolerance [-]; NaN
        where the band leaves the grid.  Never below the robust probability;
        not used for the robust set points.
    robust_probability_per_draw
        (n_ph,) share of draws meeting every specification at every pH
        within +/- tolerance [-] (from the refined pass intervals); NaN where
        the band leaves the grid.
    windows
        Intervals (low, high) [pH] where probability >= level; edges located
        to ``resolution`` by bisection on simulations.
    primary_window
        The window containing the best point, else the widest; None if none.
    robust_windows
        The robust set points: where a share >= level of the draws meets
        every specification at every pH within +/- tolerance; edges located
        to ``resolution``.
    robust_windows_per_draw
        The same intervals (kept so older readers of ``window.json`` work).
    best_ph, best_probability
        Set point with the highest robust probability (middle of the longest
        tie; highest probability when no band fits in the grid) [pH], [-].
    outcome_names
        Molecules (or outcomes) in the bands.
    outcome_median, outcome_lower, outcome_upper
        Name -> (n_ph,) median and 5 % / 95 % quantiles over draws [%].
    best_outcomes
        Name -> [median, 5 %, 95 %] over draws [%] at ``best_ph`` itself (simulated
        there); None when there is no best set point or the result was written
        before they were recorded (:func:`outcomes_at_best` then takes the
        scanned pH nearest it).
    factor_name, factor_unit, factor_values
        Second factor of a 2-D scan (values in ``factor_unit``), else None.
    nominal_factor
        Factor value used for the 1-D curves of a 2-D scan, else None.
    map_probability, map_standard_error
        (n_ph, n_factor) probability over the 2-D grid, else None.
    map_windows, map_robust_windows
        Per factor value, the windows / robust windows [pH], else None.
    n_failed_draws
        Draws whose outcomes were not finite at some point (counted as failing).
    warnings
        Plain-language findings.
    curve_ph, curve_probability, curve_robust_probability
        The probability and the robust probability as step functions sampled
        every ``resolution / 2`` pH: what the figure draws; their crossings of
        ``level`` are the window and robust edges.
    resolution
        Width [pH units] to which pass/fail changes were located.
    n_refinement_simulations
        (draw, pH) simulations used by the bisection.
    mc_confidence
        Confidence of the Monte Carlo guard (:mod:`speciakin.decision.montecarlo`)
        when it applied: windows, robust set points and the two curves are
        then the one-sided Clopper-Pearson lower bound of the probability;
        None = the share of passing draws (guard off, or too few draws).
    claim_count
        Passing draws (of ``n_draws``) needed to claim a set point.
    status
        Trust status in plain words: "established", "provisional" or
        "not established" (:mod:`speciakin.decision.gates`); None when no
        gate was evaluated.
    status_reasons
        Why the status is not "established" (empty when it is).
    gates
        One dict per gate: name, verdict, reasons, figures.
    next_steps
        What would lift the failing gates, in plain words
        (:func:`speciakin.decision.next_steps.next_steps`); empty when established.
    """

    level: float
    tolerance: float
    specifications: list[Specification]
    uncertainty_source: str
    n_draws: int
    ph: np.ndarray
    probability: np.ndarray
    probability_standard_error: np.ndarray
    worst_case_probability: np.ndarray
    robust_probability_per_draw: np.ndarray
    windows: list[tuple[float, float]]
    primary_window: tuple[float, float] | None
    robust_windows: list[tuple[float, float]]
    robust_windows_per_draw: list[tuple[float, float]]
    best_ph: float | None
    best_probability: float | None
    outcome_names: list[str]
    outcome_median: dict[str, np.ndarray]
    outcome_lower: dict[str, np.ndarray]
    outcome_upper: dict[str, np.ndarray]
    best_outcomes: dict[str, list[float]] | None = None
    factor_name: str | None = None
    factor_unit: str | None = None
    factor_values: np.ndarray | None = None
    nominal_factor: float | None = None
    map_probability: np.ndarray | None = None
    map_standard_error: np.ndarray | None = None
    map_windows: list[list[tuple[float, float]]] | None = None
    map_robust_windows: list[list[tuple[float, float]]] | None = None
    n_failed_draws: int = 0
    warnings: list[str] = field(default_factory=list)
    curve_ph: np.ndarray | None = None
    curve_probability: np.ndarray | None = None
    curve_robust_probability: np.ndarray | None = None
    resolution: float | None = None
    n_refinement_simulations: int = 0
    mc_confidence: float | None = None
    claim_count: int | None = None
    status: str | None = None
    status_reasons: list[str] = field(default_factory=list)
    gates: list[dict[str, Any]] = field(default_factory=list)
    next_steps: list[str] = field(default_factory=list)

    # ------------------------------------------------------------------ text
    def best_probability_text(self) -> str:
        """The best set point's probability in words (:func:`best_probability_words`)."""
        return best_probability_words(self.best_probability, self.mc_confidence)

    def report(self) -> str:
        """Plain-text report with the fixed headings of :data:`REPORT_HEADINGS`."""
        lines = [f"== {REPORT_HEADINGS[0]} =="]
        lines.append(f"[{REPORT_HEADINGS[1]}]")
        if self.status is None:
            lines.append("  not assessed (no trust gates were evaluated)")
        else:
            lines.append(f"  {self.status.upper()}")
            lines += [f"  - {r}" for r in self.status_reasons]
            checked = [g for g in self.gates if g.get("verdict") == "not checked"]
            lines += [f"  (not checked: {g['name']}: {'; '.join(g.get('reasons', []))})" for g in checked]
            lines += [f"  next: {step}" for step in self.next_steps]
        h = REPORT_HEADINGS[1:]
        lines.append(f"[{h[1]}]")
        lines.append(f"  level                  {self.level:.3g}")
        lines.append(f"  pH tolerance           +/- {self.tolerance:.3g}")
        lines.append(f"  pH grid                {self.ph[0]:.3g} to {self.ph[-1]:.3g} "
                     f"({self.ph.size} points)")
        lines.append(f"  draws                  {self.n_draws}")
        lines.append(f"  uncertainty source     {self.uncertainty_source}")
        if self.claim_count is not None:
            lines.append("  Monte Carlo guard      " + (
                f"a set point is claimed where >= {self.claim_count} of {self.n_draws} draws pass (one-sided "
                f"{self.mc_confidence:g} lower bound of p >= level)" if self.mc_confidence is not None else
                f"not applied: a set point is claimed where >= {self.claim_count} of {self.n_draws} draws pass"))
        if self.resolution is not None:
            lines.append(f"  edge resolution        {self.resolution:g} pH (bisection, "
                         f"{self.n_refinement_simulations} extra simulations)")
        if self.factor_name:
            vals = ", ".join(f"{v:g}" for v in self.factor_values)
            lines.append(f"  second factor          {self.factor_name} [{self.factor_unit}]: {vals}")
        lines.append(f"[{h[2]}]")
        for s in self.specifications:
            lines.append(f"  - {s.describe()}")
        if not self.specifications:
            lines.append("  (none)")
        lines.append(f"[{h[3]}]")
        if self.windows:
            lines.append("  windows (p >= level)   " + _fmt_intervals(self.windows))
            lines.append("  recommended window     " + _fmt_intervals([self.primary_window]))
        else:
            lines.append(f"  no pH meets every specification with probability >= {self.level:g}")
        lines.append("  robust set points      " + (_fmt_intervals(self.robust_windows)
                                                   if self.robust_windows else "none"))
        lines.append(f"    (a share >= {self.level:g} of the draws meets every specification at "
                     f"every pH within +/- {self.tolerance:g})")
        if self.best_ph is not None:
            what = "best set point      " if self.windows else "highest probability "
            lines.append(f"  {what}   pH {self.best_ph:.2f} ({self.best_probability_text()})")
        lines.append(f"[{h[4]}]")
        lines.append("   pH     p      MC s.e.  worst(+/-tol)  robust (+/-tol)")
        for k, x in enumerate(self.ph):
            lines.append(f"  {x:5.2f}  {self.probability[k]:.3f}  {self.probability_standard_error[k]:.4f}"
                         f"   {_fmt(self.worst_case_probability[k])}          "
                         f"{_fmt(self.robust_probability_per_draw[k])}")
        lines.append(f"[{h[5]}]")
        at_ph, rows = outcomes_at_best(self)
        if rows:
            area = any(area_molecule(n) for n in self.outcome_names)
            lines.append(f"  at pH {at_ph:.2f}: median [5 %, 95 %] mole % of substrate moiety"
                         + (f"; '{AREA_PREFIX.strip()}': HPLC area%" if area else ""))
            for n, median, low, high in rows:
                lines.append(f"  {n:<20s} {median:7.2f} [{low:.2f}, {high:.2f}]")
        else:
            lines.append("  (no outcomes)")
        lines.append(f"[{h[6]}]")
        if self.map_probability is None:
            lines.append("  not computed (no second factor)")
        else:
            for j, v in enumerate(self.factor_values):
                wins = self.map_windows[j]
                lines.append(f"  {self.factor_name} = {v:g} {self.factor_unit}: "
                             + (_fmt_intervals(wins) if wins else "no window"))
        lines.append(f"[{h[7]}]")
        lines += [f"  - {w}" for w in self.warnings] or ["  none"]
        return "\n".join(lines)

    # ------------------------------------------------------------------ JSON
    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict (NaN and infinity become None)."""
        out: dict[str, Any] = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "specifications":
                out[f.name] = [s.to_dict() for s in value]
            elif f.name in ("outcome_median", "outcome_lower", "outcome_upper"):
                out[f.name] = {k: _float_array(v) for k, v in value.items()}
            elif isinstance(value, np.ndarray):
                out[f.name] = _float_array(value)
            elif f.name in ("windows", "robust_windows", "robust_windows_per_draw"):
                out[f.name] = [[float(a), float(b)] for a, b in value]
            elif f.name == "primary_window":
                out[f.name] = None if value is None else [float(value[0]), float(value[1])]
            elif f.name in ("map_windows", "map_robust_windows"):
                out[f.name] = None if value is None else [[[float(a), float(b)] for a, b in row]
                                                          for row in value]
            else:
                out[f.name] = value
        return json_ready(out)

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "WindowResult":
        """Inverse of :meth:`to_dict`."""
        def arr(name: str) -> np.ndarray | None:
            return _from_json_array(data.get(name))

        def num(name: str) -> float | None:
            v = data.get(name)
            return None if v is None else float(v)

        primary = data.get("primary_window")
        return cls(
            level=float(data["level"]),
            tolerance=float(data["tolerance"]),
            specifications=[Specification.from_dict(s) for s in data["specifications"]],
            uncertainty_source=str(data["uncertainty_source"]),
            n_draws=int(data["n_draws"]),
            ph=arr("ph"),
            probability=arr("probability"),
            probability_standard_error=arr("probability_standard_error"),
            worst_case_probability=arr("worst_case_probability"),
            robust_probability_per_draw=arr("robust_probability_per_draw"),
            windows=_intervals(data["windows"]),
            primary_window=None if primary is None else (float(primary[0]), float(primary[1])),
            robust_windows=_intervals(data["robust_windows"]),
            robust_windows_per_draw=_intervals(data["robust_windows_per_draw"]),
            best_ph=num("best_ph"),
            best_probability=num("best_probability"),
            outcome_names=list(data["outcome_names"]),
            outcome_median={k: _from_json_array(v) for k, v in data["outcome_median"].items()},
            outcome_lower={k: _from_json_array(v) for k, v in data["outcome_lower"].items()},
            outcome_upper={k: _from_json_array(v) for k, v in data["outcome_upper"].items()},
            best_outcomes=None if not data.get("best_outcomes") else
            {k: [np.nan if x is None else float(x) for x in v] for k, v in data["best_outcomes"].items()},
            factor_name=data.get("factor_name"),
            factor_unit=data.get("factor_unit"),
            factor_values=arr("factor_values"),
            nominal_factor=num("nominal_factor"),
            map_probability=arr("map_probability"),
            map_standard_error=arr("map_standard_error"),
            map_windows=None if data.get("map_windows") is None
            else [_intervals(row) for row in data["map_windows"]],
            map_robust_windows=None if data.get("map_robust_windows") is None
            else [_intervals(row) for row in data["map_robust_windows"]],
            n_failed_draws=int(data.get("n_failed_draws", 0)),
            warnings=list(data.get("warnings", [])),
            curve_ph=arr("curve_ph"),
            curve_probability=arr("curve_probability"),
            curve_robust_probability=arr("curve_robust_probability"),
            resolution=num("resolution"),
            n_refinement_simulations=int(data.get("n_refinement_simulations", 0)),
            mc_confidence=num("mc_confidence"),
            claim_count=None if data.get("claim_count") is None else int(data["claim_count"]),
            status=data.get("status"),
            status_reasons=list(data.get("status_reasons", [])),
            gates=[dict(g) for g in data.get("gates", [])],
            next_steps=list(data["next_steps"]) if "next_steps" in data else _steps_of(data),
        )


def outcomes_at_best(window: Any) -> tuple[float | None, list[list[Any]]]:
    """The pH and, per outcome, ``[name, median, 5 %, 95 %]`` [%] of the expected outcomes at the best set
    point of ``window`` (a :class:`WindowResult`): simulated there (``best_outcomes``), or, for a result
    written before they were recorded, at the scanned pH nearest it; ``(None, [])`` without a best set
    point or outcomes."""
    if window.best_ph is None or not window.outcome_names:
        return None, []
    best = getattr(window, "best_outcomes", None)
    if best:
        return float(window.best_ph), [[n, *map(float, best[n])] for n in window.outcome_names]
    k = int(np.argmin(np.abs(np.asarray(window.ph) - window.best_ph)))
    return float(window.ph[k]), [[n, float(window.outcome_median[n][k]), float(window.outcome_lower[n][k]),
                                  float(window.outcome_upper[n][k])] for n in window.outcome_names]


def best_point_words(window: Any, ph: float) -> str:
    """Where the outcomes of :func:`outcomes_at_best` are: ``pH 4.75 (the best set point)`` (``the highest
    probability`` when no pH passes), or ``pH 4.80`` for a result whose outcomes are of the scanned pH nearest
    the best set point."""
    if ph != window.best_ph:
        return f"pH {ph:.2f}"
    return f"pH {ph:.2f} (the best set point)" if window.windows else f"pH {ph:.2f} (the highest probability)"


def outcome_words(name: str, median: float, low: float, high: float) -> str:
    """One row of :func:`outcomes_at_best` as the report and the page state it: ``P 99.6 % (99.5-99.6)``."""
    return f"{name} {median:.1f} % ({low:.1f}-{high:.1f})"


def _steps_of(data: Mapping[str, Any]) -> list[str]:
    """Next steps of a ``window.json`` written before they were recorded, from its gates."""
    from speciakin.decision.next_steps import next_steps

    best = data.get("best_ph") if data.get("windows") else None
    return next_steps(data.get("gates") or [], None if best is None else float(best))


def _fmt(x: float) -> str:
    return "  -  " if not np.isfinite(x) else f"{x:.3f}"


def _fmt_intervals(intervals: list[tuple[float, float]]) -> str:
    return ", ".join(f"pH {a:.2f} to {b:.2f}" for a, b in intervals)
