"""Parameter specification for the least-squares layer.

A fit is described by an ordered list of :class:`ParameterSpec` (or an
``lmfit.Parameters``).  The residual function always receives the *full*
vector of parameter values in this order (fixed parameters included), so the
same function serves the fit, the Jacobian and every profile point.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable

import lmfit
import numpy as np

from speciakin.errors import InputError, Location, ProblemCollector

__all__ = ["ParameterSpec", "normalize_parameters", "to_lmfit_parameters"]


@dataclass(frozen=True)
class ParameterSpec:
    """One adjustable (or fixed) parameter.

    Attributes
    ----------
    name
        A Python identifier, unique within the fit.
    value
        Starting value (or the fixed value when ``vary`` is False) [unit].
    lower, upper
        Bounds [unit]; ``-inf`` / ``inf`` when unbounded.
    vary
        Whether the fit adjusts the parameter.
    unit
        Free text naming the unit, e.g. ``"1/(M*s)"``; used in reports only.
    """

    name: str
    value: float
    lower: float = -math.inf
    upper: float = math.inf
    vary: bool = True
    unit: str = ""

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "value": float(self.value),
            "lower": None if math.isinf(self.lower) else float(self.lower),
            "upper": None if math.isinf(self.upper) else float(self.upper),
            "vary": bool(self.vary),
            "unit": self.unit,
        }

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "ParameterSpec":
        lower = data.get("lower")
        upper = data.get("upper")
        return cls(
            name=str(data["name"]),
            value=float(data["value"]),
            lower=-math.inf if lower is None else float(lower),
            upper=math.inf if upper is None else float(upper),
            vary=bool(data.get("vary", True)),
            unit=str(data.get("unit", "")),
        )


def _as_float(value: Any) -> float:
    try:
        return float(value)
    except (TypeError, ValueError):
        return math.nan


def normalize_parameters(parameters: Any) -> list[ParameterSpec]:
    """Turn the accepted parameter descriptions into a checked list of specs.

    Parameters
    ----------
    parameters
        A sequence of :class:`ParameterSpec`, of dicts with the same keys, or an
        ``lmfit.Parameters`` (expressions are not supported: the residual
        function receives plain values).

    Returns
    -------
    list of ParameterSpec

    Raises
    ------
    InputError
        Listing every problem found: duplicate or invalid names, a value that
        is not finite, bounds in the wrong order, a value outside its bounds, no
        varying parameter.
    """
    specs: list[ParameterSpec] = []
    collector = ProblemCollector()
    if isinstance(parameters, lmfit.Parameters):
        for par in parameters.values():
            if par.expr:
                collector.error("parameter expressions are not supported",
                                Location(key=f"parameter.{par.name}.expr"), par.expr,
                                "a plain value; compute derived quantities inside the residual function")
            specs.append(ParameterSpec(par.name, _as_float(par.value), _as_float(par.min),
                                       _as_float(par.max), bool(par.vary)))
    else:
        if isinstance(parameters, (str, bytes)) or not isinstance(parameters, Iterable):
            raise InputError("parameters must be a list of ParameterSpec or an lmfit.Parameters",
                             Location(key="parameters"), type(parameters).__name__,
                             "a list of ParameterSpec")
        for k, item in enumerate(parameters):
            if isinstance(item, ParameterSpec):
                specs.append(item)
            elif isinstance(item, dict):
                try:
                    specs.append(ParameterSpec.from_dict(item))
                except (KeyError, TypeError, ValueError) as exc:
                    collector.error(f"parameter {k + 1} cannot be read ({exc})",
                                    Location(key=f"parameters[{k}]"), item,
                                    "keys name, value and optionally lower, upper, vary, unit")
            else:
                collector.error(f"parameter {k + 1} has an unsupported type",
                                Location(key=f"parameters[{k}]"), type(item).__name__, "ParameterSpec or dict")
    seen: set[str] = set()
    for spec in specs:
        where = Location(key=f"parameter.{spec.name}")
        if not isinstance(spec.name, str) or not spec.name.isidentifier():
            collector.error("parameter name is not a valid identifier", where, spec.name,
                            "letters, digits and underscores, not starting with a digit")
        if spec.name in seen:
            collector.error("parameter name is used twice", where, spec.name, "unique names")
        seen.add(spec.name)
        if not math.isfinite(spec.value):
            collector.error("parameter value is not a finite number", where, spec.value, "a finite number")
        if math.isnan(spec.lower) or math.isnan(spec.upper):
            collector.error("parameter bound is NaN", where, (spec.lower, spec.upper), "a number or +-inf")
        elif spec.lower >= spec.upper:
            collector.error("lower bound is not below upper bound", where, (spec.lower, spec.upper),
                            "lower < upper")
        elif math.isfinite(spec.value) and not spec.lower <= spec.value <= spec.upper:
            collector.error("parameter value lies outside its bounds", where, spec.value,
                            f"a value in [{spec.lower}, {spec.upper}]")
    if specs and not any(s.vary for s in specs):
        collector.error("no parameter is free to vary", Location(key="parameters"), None,
                        "at least one parameter with vary=True")
    if not specs and not collector.has_errors:
        collector.error("no parameters given", Location(key="parameters"), None, "at least one parameter")
    collector.raise_if_errors()
    return specs


def to_lmfit_parameters(specs: list[ParameterSpec], values: np.ndarray | None = None,
                        vary: np.ndarray | None = None) -> lmfit.Parameters:
    """Build an ``lmfit.Parameters`` from specs, optionally overriding values and vary flags."""
    params = lmfit.Parameters()
    for i, spec in enumerate(specs):
        value = spec.value if values is None else float(values[i])
        free = spec.vary if vary is None else bool(vary[i])
        params.add(spec.name, value=value, min=spec.lower, max=spec.upper, vary=free)
    return params
