"""The fitted parameters of a campaign and the error model of its observations.

:class:`FittedParameter` describes one parameter of the campaign fit (a model
quantity, or a per-run nuisance parameter: pH-probe offset, amount factor);
:class:`ErrorModel` is the absolute + relative standard deviation of each
observable (see :mod:`speciakin.pipeline.objective`).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from speciakin.chemistry.model import Prior
from speciakin.estimation.parameters import ParameterSpec

__all__ = ["FittedParameter", "ErrorModel", "identifier", "kernel_placement"]


def identifier(name: str) -> str:
    """A Python identifier for ``name`` (lmfit needs one): ``pKa[S.N1]`` -> ``pKa_S_N1``."""
    text = re.sub(r"[^0-9A-Za-z_]+", "_", name).strip("_")
    if not text or text[0].isdigit():
        text = "p_" + text
    return text


@dataclass(frozen=True)
class FittedParameter:
    """One parameter of the fit.

    Attributes
    ----------
    name
        Display name (the model quantity's name, or ``probe_offset[run]`` /
        ``amount_factor[run]``).
    key
        Python identifier used by lmfit.
    kind
        ``"quantity"``, ``"probe_offset"`` or ``"amount_factor"``.
    index
        Position in the kernel's parameter vector q (quantity) or run index.
    base
        Value in the model file; a shift parameter adds to it.
    shift
        True when the fitted value is a shift of ``base`` (pKa values).
    value, lower, upper
        Start value and bounds on the fitted scale.
    unit
        Unit text of the fitted scale.
    prior
        Prior from the model file, or None for the default.
    """

    name: str
    key: str
    kind: str
    index: int
    base: float
    shift: bool
    value: float
    lower: float
    upper: float
    unit: str
    prior: Prior | None = None

    def spec(self) -> ParameterSpec:
        return ParameterSpec(self.key, self.value, self.lower, self.upper, True, self.unit)

    def to_dict(self) -> dict[str, Any]:
        return {"name": self.name, "key": self.key, "kind": self.kind, "base": self.base,
                "shift": self.shift, "value": self.value,
                "lower": None if math.isinf(self.lower) else self.lower,
                "upper": None if math.isinf(self.upper) else self.upper, "unit": self.unit,
                "prior": None if self.prior is None else {"family": self.prior.family,
                                                          **dict(self.prior.parameters)}}


@dataclass(frozen=True)
class ErrorModel:
    """Absolute + relative error of each observable.

    ``absolute`` is in the unit of the HPLC data (area% or [mol/L]);
    ``titrant_absolute`` [mol] None = 0.5 % of the largest logged amount of the
    run (common practice for a burette/dosing-pump log).
    """

    absolute: float = 0.1
    relative: float = 0.02
    titrant_absolute: float | None = None
    titrant_relative: float = 0.01

    @classmethod
    def from_settings(cls, settings: dict[str, Any] | None, basis: str) -> "ErrorModel":
        settings = dict(settings or {})
        default_abs = 1e-5 if basis == "concentration" else 0.1
        return cls(absolute=float(settings.get("absolute", default_abs)),
                   relative=float(settings.get("relative", 0.02)),
                   titrant_absolute=(None if settings.get("titrant_absolute") is None
                                     else float(settings["titrant_absolute"])),
                   titrant_relative=float(settings.get("titrant_relative", 0.01)))

    def to_dict(self) -> dict[str, Any]:
        return dict(self.__dict__)


def kernel_placement(parameters: list[FittedParameter]) -> tuple:
    """Where the fitted values go in the kernel's inputs, made once per parameter list
    (``CampaignObjective.kernel_inputs``): for the shifted quantities, the other quantities,
    the pH offsets and the amount factors, each (index into q or the runs, column of theta,
    the shifted quantities' base values or None)."""
    groups: list[tuple[list[int], list[int], list[float]]] = [([], [], []) for _ in range(4)]
    for j, p in enumerate(parameters):
        g = (0 if p.shift else 1) if p.kind == "quantity" else (2 if p.kind == "probe_offset" else 3)
        groups[g][0].append(p.index)
        groups[g][1].append(j)
        groups[g][2].append(p.base)
    return tuple((np.array(i, np.int64), np.array(c, np.int64), np.array(b, float) if g == 0 else None)
                 for g, (i, c, b) in enumerate(groups))
