"""Scores of candidate runs and the suggestion result (``to_dict`` for
``suggest.json`` and the report)."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from speciakin.decision.suggest.criteria import CREDIBLE, MIN_GAIN_PH, MIN_SD_SHRINKAGE, MOVE_CORRELATION

__all__ = ["CandidateScore", "SuggestResult", "conditions_text", "ph_text"]

# ------------------------------------------------------------------ results
@dataclass
class CandidateScore:
    """Expected effect of one candidate run (or of a batch ending with it).

    Widths [pH]; ``sd_shrinkage`` and ``volume_shrinkage`` are shares [-].
    """

    index: int
    conditions: dict[str, Any]
    edge_width_before: tuple[float, float] | None
    edge_width_after: tuple[float, float] | None
    undecided_before: float | None
    undecided_after: float | None
    d_gain: float
    volume_shrinkage: float
    sd_shrinkage: dict[str, float]
    reason: str = ""
    effective_draws: float | None = None

    @property
    def edge_reduction(self) -> float:
        if self.edge_width_before is None:
            return 0.0
        return float(sum(b - a for b, a in zip(self.edge_width_before, self.edge_width_after)))

    @property
    def undecided_reduction(self) -> float:
        if self.undecided_before is None:
            return 0.0
        return float(self.undecided_before - self.undecided_after)

    def sort_key(self) -> tuple[float, float, float]:
        return (self.edge_reduction, self.undecided_reduction, self.d_gain)

    def to_dict(self) -> dict[str, Any]:
        edges = None
        if self.edge_width_before is not None:
            edges = {side: {"before": b, "after": a, "reduction": b - a} for side, b, a in
                     zip(("low", "high"), self.edge_width_before, self.edge_width_after)}
        return {
            "conditions": dict(self.conditions),
            "expected": {
                "window_edge_credible_width_pH": edges,
                "undecided_width_pH": None if self.undecided_before is None else {
                    "before": self.undecided_before, "after": self.undecided_after,
                    "reduction": self.undecided_reduction},
                "d_optimal": {"gain_nats": self.d_gain, "volume_shrinkage": self.volume_shrinkage},
                "parameter_sd_shrinkage": dict(self.sd_shrinkage),
            },
            "effective_draws": self.effective_draws,
            "reason": self.reason,
        }


@dataclass
class SuggestResult:
    """Ranked candidates, the greedy batch and whether any run helps much."""

    candidates: list[CandidateScore]
    batch: list[CandidateScore]
    helps: bool
    message: str
    method: str
    parameter_names: list[str]
    moving: list[str]
    credible: float = CREDIBLE
    min_gain: float = MIN_GAIN_PH
    has_decision: bool = True
    notes: list[str] = field(default_factory=list)
    check: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready (the ``suggest.json`` body; NaN left for the writer to clean)."""
        return {
            "schema": "speciakin.suggest/1",
            "method": self.method,
            "helps": self.helps,
            "message": self.message,
            "thresholds": {"min_gain_pH": self.min_gain, "min_sd_shrinkage": MIN_SD_SHRINKAGE,
                           "credible": self.credible, "moves_outcome_correlation": MOVE_CORRELATION},
            "parameters": list(self.parameter_names),
            "parameters_that_move_outcomes": list(self.moving),
            "decision_criteria": self.has_decision,
            "candidates": [dict(rank=i + 1, **c.to_dict()) for i, c in enumerate(self.candidates)],
            "batch": [dict(order=i + 1, candidate=c.index, **c.to_dict()) for i, c in enumerate(self.batch)],
            "notes": list(self.notes),
            "check": self.check,
        }

    def by_ph(self) -> dict[str, Any]:
        """Per candidate set point, the best expected reductions over the other
        conditions: ``ph``, ``edge_low``, ``edge_high``, ``undecided`` [pH]
        (None without a decision) and ``d_gain`` [nats] (arrays, pH increasing)."""
        ph = sorted({c.conditions["setpoint_pH"] for c in self.candidates})
        rows = {k: [] for k in ("edge_low", "edge_high", "undecided", "d_gain")}
        for x in ph:
            group = [c for c in self.candidates if c.conditions["setpoint_pH"] == x]
            rows["d_gain"].append(max(c.d_gain for c in group))
            if self.has_decision:
                for k, side in (("edge_low", 0), ("edge_high", 1)):
                    rows[k].append(max(c.edge_width_before[side] - c.edge_width_after[side] for c in group))
                rows["undecided"].append(max(c.undecided_reduction for c in group))
        out: dict[str, Any] = {"ph": np.array(ph)}
        for k, v in rows.items():
            out[k] = np.array(v) if v else None
        return out

    def report(self, top: int = 5) -> str:
        lines = ["Suggested next runs", "===================", "", self.message, ""]
        for i, c in enumerate(self.candidates[:top]):
            lines.append(f"{i + 1}. {conditions_text(c.conditions)}: {c.reason}")
        if len(self.batch) > 1:
            lines += ["", f"Batch of {len(self.batch)} runs chosen together (greedy):"]
            lines += [f"  {i + 1}. {conditions_text(c.conditions)}" for i, c in enumerate(self.batch)]
        if self.check:
            best = self.check["best_candidate"]["conditions"]
            lines += ["", f"Check by the {self.check['method']} method: its best run is "
                          f"{conditions_text(best)}"
                      + ("" if self.check.get("shortfall_pH") is None else
                         f"; it expects {ph_text(self.check['shortfall_pH'])} pH more narrowing from that "
                         "than from the run above")]
        if self.notes:
            lines += ["", "Notes"] + [f"- {n}" for n in self.notes]
        return "\n".join(lines)


def ph_text(value: float) -> str:
    """Two decimals without a negative zero."""
    return f"{round(value, 2) + 0.0:.2f}"


def conditions_text(conditions: dict[str, Any]) -> str:
    parts = [f"pH {conditions['setpoint_pH']:.2f}"]
    for key, fmt in (("temperature_C", "{:g} C"), ("equivalents", "{:g} eq"),
                     ("dosing_time_min", "dosing {:g} min")):
        if conditions.get(key) is not None:
            parts.append(fmt.format(conditions[key]))
    return ", ".join(parts)
