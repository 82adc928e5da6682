"""Dataclasses of a planned process: :class:`ProcessPlan`, the second factor
of a 2-D map and the :data:`FACTOR_KINDS` registry.

Read from a process file by :func:`speciakin.decision.process.load_process`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Mapping

import numpy as np

from speciakin.decision.specs import Specification

__all__ = ["FactorKind", "FACTOR_KINDS", "SecondFactor", "ProcessPlan"]


@dataclass(frozen=True)
class FactorKind:
    """A process setting that may be scanned as the second factor of a 2-D map.

    ``dimension`` is a :data:`speciakin.units.DIMENSIONS` key (None for
    equivalents, a plain number); ``display_unit`` converts internal values
    for reports.
    """

    name: str
    dimension: str | None
    display_unit: str
    description: str


#: Registry of second factors (drives parsing, process_runs and the docs).
FACTOR_KINDS: Mapping[str, FactorKind] = MappingProxyType({
    "equivalents": FactorKind("equivalents", None, "eq", "reagent equivalents per substrate"),
    "temperature": FactorKind("temperature", "temperature", "C", "process temperature"),
    "dosing_time": FactorKind("dosing_time", "time", "min", "time over which the reagent is dosed"),
})


@dataclass(frozen=True)
class SecondFactor:
    """Second factor of a 2-D design-space map; ``values`` in internal units
    (equivalents [-], temperature [K], dosing time [s])."""

    kind: str
    values: tuple[float, ...]

    def display_values(self) -> tuple[float, ...]:
        """Values in the factor's display unit (eq, C, min)."""
        kind = FACTOR_KINDS[self.kind]
        if kind.dimension == "temperature":
            return tuple(v - 273.15 for v in self.values)
        if kind.dimension == "time":
            return tuple(v / 60.0 for v in self.values)
        return tuple(self.values)


@dataclass(frozen=True)
class ProcessPlan:
    """The planned process, the scan settings and the specifications.

    Attributes
    ----------
    substrate, reagent
        Model molecule names.
    substrate_amount
        Substrate charged [mol].
    volume
        Initial liquid volume [L].
    equivalents
        Reagent per substrate [mol/mol].
    dosing_time, hold_time
        Reagent fed at a constant rate over ``dosing_time`` [s], then held
        ``hold_time`` [s]; the process ends at their sum.
    feed_volume
        Liquid volume that comes with the reagent feed [L] (0 = neat).
    temperature
        [K], constant.
    titrant, titrant_concentration
        Ion the pH controller doses (model ion name) and its concentration
        [mol/L].
    opposite_titrant, opposite_titrant_concentration
        Optional ion of the other sign and its concentration [mol/L]: a
        two-sided pH-stat (None = the titrant alone).
    start_adjustment
        How the start solution reaches the set point
        (:data:`speciakin.chemistry.model.START_ADJUSTMENTS`; default
        ``computed``: acid or base inside the start volume).
    start_acid, start_base
        Ions of a computed start adjustment (None = the titrant of that sign,
        else the model's only ion of that sign).
    moiety
        Substrate moiety that outcomes count (None = the substrate's only
        moiety, resolved against the model).
    extra_charges
        Other initial amounts [mol] by molecule or ion name (``[process.initial]``).
    ph_from, ph_to, ph_step
        pH scan grid [-].
    level
        Required probability [-].
    ph_tolerance
        Plant pH control half-band [pH units].
    n_draws, seed
        Parameter draws for the probability and their seed.
    second_factor
        Optional 2-D map factor.
    specifications
        Limits on end-of-process outcomes.
    report_author, report_reviewer
        Names for the report's QA block (``[report]`` table; empty when not given).
    """

    name: str
    substrate: str
    substrate_amount: float
    volume: float
    reagent: str
    equivalents: float
    dosing_time: float
    hold_time: float
    temperature: float
    titrant: str
    titrant_concentration: float
    feed_volume: float = 0.0
    moiety: str | None = None
    opposite_titrant: str | None = None
    opposite_titrant_concentration: float | None = None
    start_adjustment: str = "computed"
    start_acid: str | None = None
    start_base: str | None = None
    extra_charges: Mapping[str, float] = field(default_factory=dict)
    ph_from: float = 2.0
    ph_to: float = 12.0
    ph_step: float = 0.25
    level: float = 0.95
    ph_tolerance: float = 0.3
    n_draws: int = 500
    seed: int = 1
    second_factor: SecondFactor | None = None
    specifications: tuple[Specification, ...] = ()
    description: str = ""
    source: str = ""
    report_author: str = ""
    report_reviewer: str = ""

    def ph_values(self) -> np.ndarray:
        """The pH grid from ``ph_from`` to ``ph_to`` (inclusive when it falls on a step)."""
        n = int(math.floor((self.ph_to - self.ph_from) / self.ph_step + 1e-9)) + 1
        return np.round(self.ph_from + self.ph_step * np.arange(n), 10)

    @property
    def end_time(self) -> float:
        """[s]"""
        return self.dosing_time + self.hold_time
