"""Units of the model file: bare-number defaults and rate-constant units.

Plain quantities ("30 min", "25 C", "1.05 mmol") go through the shared unit
registry :mod:`speciakin.units`.  Rate constants need compound units such as
``"L/(mol*s)"``, ``"1/min"`` or ``"M-1 s-1"``; this module reads them by
splitting the unit into factors (each a symbol of the shared registry with an
integer exponent) and checking that the result is (L/mol)^(n-1) / time for a
step of overall order ``n``.
"""

from __future__ import annotations

import math
import re
from types import MappingProxyType
from typing import Mapping

from speciakin.units import lookup

__all__ = [
    "BARE_NUMBER_UNITS",
    "rate_unit_text",
    "parse_rate_constant",
    "EQUIVALENT_UNITS",
    "parse_equivalents",
    "is_mass",
]

#: Words that mark an amount as equivalents of the substrate ("1.2 eq").
EQUIVALENT_UNITS = ("eq", "equiv", "equivalents")

#: Unit assumed when the model file gives a bare number, by dimension.
#: This one table drives parsing and the format reference (docs/model-file.md).
BARE_NUMBER_UNITS: Mapping[str, str] = MappingProxyType({
    "time": "min",
    "volume": "mL",
    "amount": "mmol",
    "concentration": "mol/L",
    "temperature": "C",
    "molar_energy": "kJ/mol",
    "molar_mass": "g/mol",
})

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_FACTOR = re.compile(r"^([A-Za-z]+)(?:\^?([-+]?\d+))?$")

#: Dimensions a factor of a rate-constant unit may have, with the exponents of
#: (volume, amount, time) one unit of that dimension carries.
_FACTOR_DIMENSIONS = {
    "time": (0, 0, 1),
    "volume": (1, 0, 0),
    "amount": (0, 1, 0),
    "concentration": (-1, 1, 0),
}


def rate_unit_text(order: int) -> str:
    """Internal unit of a rate constant of overall ``order`` (1 -> ``1/s``)."""
    if order <= 0:
        return "1/s" if order == 0 else "mol/(L*s)"
    if order == 1:
        return "1/s"
    if order == 2:
        return "L/(mol*s)"
    return f"L^{order - 1}/(mol^{order - 1}*s)"


def _factors(part: str, sign: int) -> list[tuple[str, int]]:
    part = part.strip()
    if part.startswith("(") and part.endswith(")"):
        part = part[1:-1]
    out = []
    for token in re.split(r"[*·\s]+", part.strip()):
        if not token or token == "1":
            continue
        m = _FACTOR.match(token)
        if not m:
            raise ValueError(f"cannot read unit factor {token!r}")
        out.append((m.group(1), sign * int(m.group(2) or 1)))
    return out


def _unit_factor(unit: str) -> tuple[float, tuple[int, int, int]]:
    """Return (factor to internal units, (volume, amount, time) exponents);
    every part after a '/' divides ("L/mol/s" = "L/(mol*s)")."""
    text = unit.strip()
    numerator, *denominators = text.split("/")
    factors = _factors(numerator, +1)
    for denominator in denominators:
        if not denominator.strip():
            raise ValueError(f"cannot read unit {unit!r}: nothing after '/'")
        factors += _factors(denominator, -1)
    if not factors:
        raise ValueError(f"cannot read unit {unit!r}")
    total = 1.0
    exps = [0, 0, 0]
    for symbol, power in factors:
        unit_obj = None
        for dimension in _FACTOR_DIMENSIONS:
            try:
                unit_obj = lookup(symbol, dimension)
                break
            except KeyError:
                continue
        if unit_obj is None:
            raise ValueError(f"unknown unit {symbol!r} in {unit!r}")
        total *= unit_obj.factor ** power
        for i, e in enumerate(_FACTOR_DIMENSIONS[unit_obj.dimension]):
            exps[i] += e * power
    return total, (exps[0], exps[1], exps[2])


def parse_rate_constant(text: str, order: int) -> float:
    """Read a rate constant with its unit and return log10 of k in internal units.

    Parameters
    ----------
    text
        e.g. ``"35 L/(mol*s)"``, ``"2.1 L/(mol*min)"``, ``"1.2e-4 1/s"``,
        ``"0.5 M-1 s-1"``, ``"3 1/(M*min)"``.
    order
        Overall order of the step (number of concentration factors in the
        rate law): 1 -> [1/s], 2 -> [L/(mol*s)], n -> [(L/mol)^(n-1)/s].

    Returns
    -------
    float
        log10 of k in [(L/mol)^(order-1) / s].

    Raises
    ------
    ValueError
        Unreadable number or unit, k <= 0, or a unit whose order does not
        match the step.

    References
    ----------
    IUPAC Gold Book, "order of reaction" and "rate constant": the unit of an
    n-th order rate constant is concentration^(1-n) time^-1.
    """
    m = _NUMBER.match(str(text))
    if not m or not m.group(2):
        raise ValueError(f"expected a rate constant with its unit such as '35 {rate_unit_text(order)}', "
                         f"got {text!r}")
    value = float(m.group(1))
    if not math.isfinite(value) or value <= 0.0:
        raise ValueError(f"a rate constant must be positive and finite, got {text!r}")
    factor, (volume, amount, time) = _unit_factor(m.group(2))
    expected = (order - 1, -(order - 1), -1)
    if (volume, amount, time) != expected:
        raise ValueError(f"unit {m.group(2)!r} does not fit a step of order {order}; "
                         f"expected a unit like {rate_unit_text(order)!r}")
    return math.log10(value * factor)


def parse_equivalents(text) -> float | None:
    """``"1.2 eq"`` -> 1.2; None when ``text`` is not written in equivalents.

    Raises
    ------
    ValueError
        Equivalents that are not a positive finite number.
    """
    if not isinstance(text, str):
        return None
    m = _NUMBER.match(text)
    if not m or m.group(2).lower() not in EQUIVALENT_UNITS:
        return None
    value = float(m.group(1))
    if not math.isfinite(value) or value <= 0.0:
        raise ValueError(f"equivalents must be positive, got {text!r}")
    return value


def is_mass(text) -> bool:
    """True when ``text`` is a number with a mass unit ("236 mg", "1.2 g")."""
    if not isinstance(text, str):
        return False
    m = _NUMBER.match(text)
    if not m or not m.group(2):
        return False
    try:
        lookup(m.group(2), "mass")
    except KeyError:
        return False
    return True
