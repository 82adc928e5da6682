"""Units: one registry that parses ``"30 min"``-style text and unit names from
column headers (``"time [min]"``) and converts to the internal units of
:mod:`speciakin.chemistry.model` (mol, L, s, K, kJ/mol, mol/L).

A small hand-written table is used instead of a general units library: the set
of units chemists put in a campaign workbook or a model file is short, the
conversions are all linear (temperature has an offset), and error messages can
then list exactly the units that are accepted.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from types import MappingProxyType
from typing import Mapping

from speciakin.errors import show_value

__all__ = [
    "Unit",
    "UNITS",
    "DIMENSIONS",
    "lookup",
    "to_internal",
    "from_internal",
    "parse_quantity",
    "split_header",
]


@dataclass(frozen=True)
class Unit:
    """``internal = value * factor + offset``."""

    symbol: str
    dimension: str
    factor: float
    offset: float = 0.0


_TABLE = [
    # time -> s
    Unit("s", "time", 1.0), Unit("min", "time", 60.0), Unit("h", "time", 3600.0),
    # volume -> L
    Unit("L", "volume", 1.0), Unit("mL", "volume", 1e-3), Unit("uL", "volume", 1e-6),
    Unit("m3", "volume", 1e3),
    # amount -> mol
    Unit("mol", "amount", 1.0), Unit("mmol", "amount", 1e-3), Unit("umol", "amount", 1e-6),
    Unit("kmol", "amount", 1e3),
    # mass -> g
    Unit("g", "mass", 1.0), Unit("mg", "mass", 1e-3), Unit("kg", "mass", 1e3),
    # temperature -> K
    Unit("K", "temperature", 1.0), Unit("C", "temperature", 1.0, 273.15),
    # concentration -> mol/L
    Unit("mol/L", "concentration", 1.0), Unit("M", "concentration", 1.0),
    Unit("mmol/L", "concentration", 1e-3), Unit("mM", "concentration", 1e-3),
    Unit("g/L", "mass_concentration", 1.0), Unit("mg/mL", "mass_concentration", 1.0),
    # energy per amount -> kJ/mol
    Unit("kJ/mol", "molar_energy", 1.0), Unit("J/mol", "molar_energy", 1e-3),
    Unit("kcal/mol", "molar_energy", 4.184),
    # molar mass -> g/mol
    Unit("g/mol", "molar_mass", 1.0),
    # rates
    Unit("mL/min", "volume_rate", 1e-3 / 60.0), Unit("L/h", "volume_rate", 1.0 / 3600.0),
    Unit("L/s", "volume_rate", 1.0),
    Unit("mol/s", "amount_rate", 1.0), Unit("mmol/min", "amount_rate", 1e-3 / 60.0),
    # dimensionless
    Unit("%", "fraction", 0.01), Unit("area%", "area_percent", 1.0), Unit("-", "none", 1.0),
    Unit("pH", "ph", 1.0),
]

_ALIASES = {
    "sec": "s", "second": "s", "seconds": "s", "mins": "min", "minute": "min", "minutes": "min",
    "hr": "h", "hour": "h", "hours": "h", "l": "L", "ml": "mL", "µl": "uL", "μl": "uL",
    "ul": "uL", "°c": "C", "degc": "C", "deg c": "C", "celsius": "C", "kelvin": "K", "k": "K",
    "c": "C", "mol/l": "mol/L", "mmol/l": "mmol/L", "m": "M", "mm": "mM", "µmol": "umol",
    "μmol": "umol", "kj/mol": "kJ/mol", "j/mol": "J/mol", "kcal/mol": "kcal/mol",
    "ml/min": "mL/min", "l/h": "L/h", "l/s": "L/s", "area %": "area%", "area-%": "area%",
    "percent": "%",
}

#: Every accepted unit by symbol.
UNITS: Mapping[str, Unit] = MappingProxyType({u.symbol: u for u in _TABLE})

#: Accepted unit symbols grouped by dimension (used in error messages and docs).
DIMENSIONS: Mapping[str, tuple[str, ...]] = MappingProxyType({
    d: tuple(u.symbol for u in _TABLE if u.dimension == d)
    for d in dict.fromkeys(u.dimension for u in _TABLE)
})


def lookup(symbol: str, dimension: str | None = None) -> Unit:
    """Return the :class:`Unit` for ``symbol`` (case-tolerant aliases accepted).

    Raises
    ------
    KeyError
        With a message that lists the accepted symbols of ``dimension``.
    """
    s = symbol.strip()
    unit = UNITS.get(s) or UNITS.get(_ALIASES.get(s.lower(), ""))
    if unit is None and s.lower() != s:
        unit = UNITS.get(s.lower())
    if unit is None or (dimension is not None and unit.dimension != dimension):
        allowed = DIMENSIONS.get(dimension, tuple(UNITS)) if dimension else tuple(UNITS)
        raise KeyError(f"unknown unit {show_value(symbol)}; accepted: {', '.join(allowed)}")
    return unit


def to_internal(value: float, symbol: str, dimension: str | None = None) -> float:
    """Convert ``value`` given in ``symbol`` to internal units."""
    u = lookup(symbol, dimension)
    return value * u.factor + u.offset


def from_internal(value: float, symbol: str, dimension: str | None = None) -> float:
    """Convert an internal value to ``symbol``."""
    u = lookup(symbol, dimension)
    return (value - u.offset) / u.factor


_QTY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_HEADER = re.compile(r"^(.*?)\s*[\[(]\s*([^\])]*?)\s*[\])]\s*$")
_HEADER_SLASH = re.compile(r"^(.*?\S)\s+/\s+(\S.*?)\s*$")  # "time / min" (quantity / unit, ISO 80000-1)


def parse_quantity(text: str | float | int, dimension: str, default_unit: str | None = None) -> float:
    """Parse ``"30 min"`` (or a bare number with ``default_unit``) to internal units.

    Raises
    ------
    ValueError
        If the number or unit cannot be read; the message says what is accepted.
    """
    if isinstance(text, bool):
        raise ValueError(f"expected a {dimension} such as '30 {DIMENSIONS[dimension][0]}', got {show_value(text)}")
    if isinstance(text, (int, float)):
        if default_unit is None:
            raise ValueError(f"a bare number {show_value(text)} needs a unit; accepted: {', '.join(DIMENSIONS[dimension])}")
        return to_internal(float(text), default_unit, dimension)
    m = _QTY.match(str(text))
    if not m:
        raise ValueError(f"expected a number with a unit such as '30 {DIMENSIONS[dimension][0]}', got {show_value(text)}")
    number, symbol = float(m.group(1)), m.group(2)
    if not symbol:
        if default_unit is None:
            raise ValueError(f"{show_value(text)} has no unit; accepted: {', '.join(DIMENSIONS[dimension])}")
        symbol = default_unit
    try:
        return to_internal(number, symbol, dimension)
    except KeyError as exc:
        raise ValueError(str(exc.args[0])) from None


def split_header(header: str) -> tuple[str, str | None]:
    """Split ``"time [min]"``, ``"time (min)"`` or ``"time / min"`` into ``("time", "min")``;
    no unit -> ``(header, None)``."""
    m = _HEADER.match(str(header).strip())
    if not m:
        m = _HEADER_SLASH.match(str(header).strip())
        if m:
            return m.group(1).strip(), m.group(2).strip("() ") or None
        return str(header).strip(), None
    return m.group(1).strip().rstrip("/").strip(), m.group(2).strip() or None
