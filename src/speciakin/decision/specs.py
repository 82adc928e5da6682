"""Specifications: limits on the outcomes at the end of a process.

An *outcome* is the mole percent of the substrate moiety found in one model
molecule at the end of the process (see :mod:`speciakin.decision.outcomes`).
A *specification* combines one outcome kind (registry :data:`OUTCOME_KINDS`)
with one comparison operator (registry :data:`OPERATORS`) and a limit.

Both registries drive the process-file parser, validation, evaluation and the
docs; add an entry here and nowhere else, unless the kind reads columns other
than the molecules' mole %: ``area%`` reads each molecule's HPLC area%
(:data:`AREA_PREFIX` columns, :meth:`Specification.outcome_keys`), which
:func:`speciakin.decision.outcomes.process_outcomes` writes from the
campaign's RRFs.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Callable, Mapping, Sequence

import numpy as np

__all__ = [
    "AREA_PREFIX",
    "AREA_LABEL",
    "area_molecule",
    "OutcomeKind",
    "OUTCOME_KINDS",
    "Operator",
    "OPERATORS",
    "Specification",
    "specification_value",
    "evaluate_specs",
    "evaluate_each_spec",
]


def _sum_percent(outcomes: Mapping[str, np.ndarray], species: Sequence[str],
                 per: Sequence[str]) -> np.ndarray:
    return np.sum([np.asarray(outcomes[s], dtype=float) for s in species], axis=0)


def _ratio(outcomes: Mapping[str, np.ndarray], species: Sequence[str],
           per: Sequence[str]) -> np.ndarray:
    top = _sum_percent(outcomes, species, ())
    bottom = _sum_percent(outcomes, per, ())
    with np.errstate(divide="ignore", invalid="ignore"):
        return top / bottom


#: Outcome columns that hold a molecule's HPLC area% at the end of a process are named this + the molecule
#: (``decision.outcomes.process_outcomes`` writes them when a specification of kind ``area%`` asks).
AREA_PREFIX = "area% of "
#: What report labels add to a molecule's label for its HPLC area% column.
AREA_LABEL = ", HPLC area%"


def area_molecule(name: str) -> str | None:
    """The molecule of an HPLC area% outcome column (:data:`AREA_PREFIX` + molecule), else None."""
    return name[len(AREA_PREFIX):] if str(name).startswith(AREA_PREFIX) else None


def _area_percent(outcomes: Mapping[str, np.ndarray], species: Sequence[str],
                  per: Sequence[str]) -> np.ndarray:
    return np.sum([np.asarray(outcomes[AREA_PREFIX + s], dtype=float) for s in species], axis=0)


def _conversion(outcomes: Mapping[str, np.ndarray], species: Sequence[str],
                per: Sequence[str]) -> np.ndarray:
    return 100.0 - _sum_percent(outcomes, species, ())


@dataclass(frozen=True)
class OutcomeKind:
    """One kind of outcome a specification can limit.

    ``function(outcomes, species, per)`` maps the per-molecule mole % arrays
    to the value compared with the limit; ``needs_per`` says whether the kind
    takes a second species list (the denominator of a ratio).
    """

    name: str
    unit: str
    needs_per: bool
    description: str
    function: Callable[[Mapping[str, np.ndarray], Sequence[str], Sequence[str]], np.ndarray]


#: Registry of outcome kinds.
OUTCOME_KINDS: Mapping[str, OutcomeKind] = MappingProxyType({
    "percent": OutcomeKind(
        "percent", "%", False,
        "mole % of the substrate moiety found in the listed molecules (summed)",
        _sum_percent),
    "ratio": OutcomeKind(
        "ratio", "-", True,
        "mole % in the listed molecules divided by mole % in the 'per' molecules "
        "(0/0 counts as not met)",
        _ratio),
    "conversion": OutcomeKind(
        "conversion", "%", False,
        "100 - mole % of the substrate moiety left in the listed molecules "
        "(normally the substrate itself)",
        _conversion),
    "area%": OutcomeKind(
        "area%", "%", False,
        "HPLC area% of the listed molecules at the end (summed), as the lab's method reports them: "
        "100 RRF_i n_i / sum_j RRF_j n_j over the molecules the campaign's Compounds sheet lists, with its RRFs",
        _area_percent),
})


@dataclass(frozen=True)
class Operator:
    """A comparison: ``function(value, limit) -> bool array``."""

    symbol: str
    description: str
    function: Callable[[np.ndarray, float], np.ndarray]


#: Registry of comparison operators.  A NaN value never meets a limit.
OPERATORS: Mapping[str, Operator] = MappingProxyType({
    ">=": Operator(">=", "at least", np.greater_equal),
    "<=": Operator("<=", "at most", np.less_equal),
    ">": Operator(">", "more than", np.greater),
    "<": Operator("<", "less than", np.less),
})


@dataclass(frozen=True)
class Specification:
    """A limit on one outcome at the end of the process.

    Attributes
    ----------
    kind
        Key of :data:`OUTCOME_KINDS`.
    species
        Model molecule names whose outcomes are summed.
    operator
        Key of :data:`OPERATORS`.
    limit
        The limit, in the kind's unit ([%] for percent and conversion, [-]
        for ratio).
    per
        Denominator molecules of a ratio; empty for other kinds.
    label
        Free text for reports.
    """

    kind: str
    species: tuple[str, ...]
    operator: str
    limit: float
    per: tuple[str, ...] = ()
    label: str = ""

    def __post_init__(self) -> None:
        if self.kind not in OUTCOME_KINDS:
            raise ValueError(f"unknown outcome kind {self.kind!r}; known: {', '.join(OUTCOME_KINDS)}")
        if self.operator not in OPERATORS:
            raise ValueError(f"unknown operator {self.operator!r}; known: {', '.join(OPERATORS)}")
        if not self.species:
            raise ValueError("a specification needs at least one species")
        if OUTCOME_KINDS[self.kind].needs_per != bool(self.per):
            raise ValueError(f"'per' must be {'given' if OUTCOME_KINDS[self.kind].needs_per else 'empty'} "
                             f"for outcome kind {self.kind!r}")
        if not np.isfinite(self.limit):
            raise ValueError("the limit must be a finite number")

    def describe(self) -> str:
        """One line such as ``"mole % of PA >= 90 %"``."""
        names = " + ".join(self.species)
        unit = OUTCOME_KINDS[self.kind].unit
        unit_text = " %" if unit == "%" else ""
        if self.kind == "ratio":
            what = f"ratio ({names}) / ({' + '.join(self.per)})"
        elif self.kind == "conversion":
            what = f"conversion of {names}"
        elif self.kind == "area%":
            what = f"HPLC area% of {names}"
        else:
            what = f"mole % of {names}"
        text = f"{what} {self.operator} {self.limit:g}{unit_text}"
        return f"{self.label}: {text}" if self.label else text

    def species_used(self) -> tuple[str, ...]:
        return tuple(self.species) + tuple(self.per)

    def outcome_keys(self) -> tuple[str, ...]:
        """The outcome columns the specification reads (an ``area%`` one reads the molecules' area%)."""
        return tuple(AREA_PREFIX + s for s in self.species) if self.kind == "area%" else self.species_used()

    def to_dict(self) -> dict[str, Any]:
        return {"kind": self.kind, "species": list(self.species), "operator": self.operator,
                "limit": float(self.limit), "per": list(self.per), "label": self.label}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "Specification":
        return cls(str(data["kind"]), tuple(data["species"]), str(data["operator"]),
                   float(data["limit"]), tuple(data.get("per", ())), str(data.get("label", "")))


def _as_mapping(outcomes: Any, names: Sequence[str] | None) -> Mapping[str, np.ndarray]:
    if isinstance(outcomes, Mapping):
        return outcomes
    array = np.asarray(outcomes, dtype=float)
    if names is None:
        raise ValueError("an outcome array needs the outcome names (its last axis)")
    if array.shape[-1] != len(names):
        raise ValueError(f"outcome array has {array.shape[-1]} outcomes on its last axis, "
                         f"but {len(names)} names were given")
    return {n: array[..., i] for i, n in enumerate(names)}


def specification_value(outcomes: Mapping[str, np.ndarray] | np.ndarray, spec: Specification,
                        names: Sequence[str] | None = None) -> np.ndarray:
    """Value of the outcome a specification limits.

    Parameters
    ----------
    outcomes
        Either a mapping molecule name -> mole % array (any common shape),
        or an array whose last axis holds outcomes in the order of ``names``.
    spec
        The specification.
    names
        Outcome names of an array ``outcomes``.

    Returns
    -------
    numpy.ndarray
        [%] or [-], shape of one outcome array.
    """
    table = _as_mapping(outcomes, names)
    missing = [s for s in spec.outcome_keys() if s not in table]
    if missing:
        raise KeyError(f"no outcome for {', '.join(missing)}; known: {', '.join(table)}")
    return OUTCOME_KINDS[spec.kind].function(table, spec.species, spec.per)


def evaluate_each_spec(outcomes: Mapping[str, np.ndarray] | np.ndarray,
                       specs: Sequence[Specification],
                       names: Sequence[str] | None = None) -> np.ndarray:
    """Pass/fail of each specification.

    Returns
    -------
    numpy.ndarray of bool
        Shape ``(n_specs,) + outcome shape``; NaN values fail.
    """
    table = _as_mapping(outcomes, names)
    rows = []
    for spec in specs:
        value = specification_value(table, spec)
        with np.errstate(invalid="ignore"):
            # IEEE 754 comparisons with NaN are false for every operator.
            rows.append(OPERATORS[spec.operator].function(value, spec.limit))
    return np.asarray(rows, dtype=bool)


def evaluate_specs(outcomes: Mapping[str, np.ndarray] | np.ndarray,
                   specs: Sequence[Specification],
                   names: Sequence[str] | None = None) -> np.ndarray:
    """True where every specification is met.

    Vectorised over any leading shape, typically (n_draws, n_ph) or
    (n_draws, n_ph, n_factor).  A NaN outcome (failed simulation, 0/0 ratio)
    fails; an infinite ratio is compared as such (x/0 with x > 0 meets
    ``>=`` limits and fails ``<=`` limits).

    Parameters
    ----------
    outcomes
        Mapping molecule name -> mole % [%] array, or an array with outcomes
        on its last axis named by ``names``.
    specs
        Specifications; an empty list passes everywhere.
    names
        Outcome names when ``outcomes`` is an array.

    Returns
    -------
    numpy.ndarray of bool
        Shape of one outcome array.
    """
    table = _as_mapping(outcomes, names)
    if not specs:
        shape = np.shape(next(iter(table.values()))) if table else ()
        return np.ones(shape, dtype=bool)
    return np.all(evaluate_each_spec(table, specs), axis=0)
