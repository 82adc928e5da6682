"""Fitted-or-fixed numbers of the model file (model.Quantity).

Every pKa, ionization enthalpy, interaction W, log10 k and activation energy
is written either as a bare value (fixed) or as a table::

    pka = { value = 9.4, fit = true, lower = -1.5, upper = 1.5, spread = 0.5 }
    k   = { value = "35 L/(mol*s)", fit = true, lower = "1 L/(mol*s)", upper = "1e4 L/(mol*s)",
            prior = { family = "normal", mean = 1.5, sd = 1.0 } }

Bounds and prior parameters are on the fitted scale: the shift for a pKa,
log10 of k in internal units for a rate constant, kJ/mol for energies.

Names follow one rule (see :data:`QUANTITY_KINDS`): ``prefix[owner]`` where
the owner is ``molecule.site`` for site quantities, ``molecule.site_a~site_b``
for W and the step name for step quantities.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Callable, Mapping

from speciakin.chemistry.model import Prior, Quantity
from speciakin.chemistry.modelfile.paths import sub_path
from speciakin.chemistry.modelfile.reader import TableReader
from speciakin.chemistry.prior_families import PRIOR_FAMILIES

__all__ = [
    "QuantityKind",
    "QUANTITY_KINDS",
    "DEFAULT_PKA_SPREAD",
    "quantity_name",
    "read_quantity",
    "check_quantity",
    "share_quantities",
]


@dataclass(frozen=True)
class QuantityKind:
    """How one kind of Quantity is named and what its number means."""

    key: str
    prefix: str
    unit: str
    shift: bool
    description: str


#: Registry of quantity kinds: drives names, parsing and the docs.
QUANTITY_KINDS: Mapping[str, QuantityKind] = MappingProxyType({
    "pka": QuantityKind("pka", "pKa", "", True, "pKa of a site at the reference temperature [-]"),
    "enthalpy": QuantityKind("enthalpy", "dH", "kJ/mol", False,
                             "ionization enthalpy of a site (van 't Hoff) [kJ/mol]"),
    "w": QuantityKind("w", "W", "", False, "interaction penalty of two sites [pK units]"),
    "log10_k": QuantityKind("log10_k", "log10k", "", False,
                            "log10 of the rate constant at the reference temperature"),
    "activation_energy": QuantityKind("activation_energy", "Ea", "kJ/mol", False,
                                      "Arrhenius activation energy [kJ/mol]"),
    "pkw": QuantityKind("pkw", "pKw", "", True,
                        "pKw of the medium at the reference temperature [-] (temperature dependence of water)"),
})

#: Prior sd of a fitted pKa shift when the file states neither ``spread`` nor
#: ``prior`` [pK units] (common practice: co-solvent shifts of about half a unit).
DEFAULT_PKA_SPREAD = 0.5

_SPEC_KEYS = ("value", "fit", "lower", "upper", "prior")
_POSITIVE_PARAMETERS = ("sd", "log_sd", "scale", "degrees_of_freedom")


def quantity_name(kind: str, owner: str) -> str:
    """``quantity_name("pka", "S.N_alkyl")`` -> ``"pKa[S.N_alkyl]"``."""
    return f"{QUANTITY_KINDS[kind].prefix}[{owner}]"


def _read_prior(reader: TableReader, value: Any, path: str) -> Prior | None:
    table = reader.typed(value, path, dict)
    if table is None:
        return None
    family = table.get("family")
    if family not in PRIOR_FAMILIES:
        reader.error(sub_path(path, "family") if "family" in table else path,
                     "unknown prior family" if "family" in table else "missing key 'family'",
                     family, "one of: " + ", ".join(PRIOR_FAMILIES))
        return None
    names = PRIOR_FAMILIES[family].parameter_names
    reader.check_keys(table, path, ("family", *names))
    parameters: dict[str, float] = {}
    for name in names:
        if name not in table:
            reader.error(path, f"prior '{family}' needs parameter '{name}'",
                         expected="parameters " + ", ".join(names), code="missing")
            continue
        number = reader.number(table[name], sub_path(path, name),
                               positive=name in _POSITIVE_PARAMETERS)
        if number is not None:
            parameters[name] = number
    if len(parameters) != len(names):
        return None
    return Prior(family, parameters)


def read_quantity(reader: TableReader, value: Any, path: str, kind: str, owner: str,
                  convert: Callable[[Any, str], float | None],
                  convert_bound: Callable[[Any, str], float | None] | None = None,
                  unit: str | None = None) -> Quantity | None:
    """Read a bare value or a quantity table.

    ``convert(raw, path)`` turns the written value into internal units (or
    records a problem and returns None); ``convert_bound`` does the same for
    bounds (default: plain numbers on the fitted scale).
    """
    spec = QUANTITY_KINDS[kind]
    name = quantity_name(kind, owner)
    unit = spec.unit if unit is None else unit
    if convert_bound is None:
        def convert_bound(raw: Any, sub: str) -> float | None:
            return reader.number(raw, sub)
    if not isinstance(value, dict):
        number = convert(value, path)
        return None if number is None else Quantity(number, unit, name, shift=spec.shift)
    if "same_as" in value:
        # shared with another quantity: its value is filled in by share_quantities
        reader.check_keys(value, path, ("same_as",))
        target = reader.typed(value["same_as"], sub_path(path, "same_as"), str,
                              f"the name of another quantity, such as '{spec.prefix}[...]'")
        if target is None:
            return None
        reader.shared_paths[name] = sub_path(path, "same_as")
        return Quantity(math.nan, unit, name, shift=spec.shift, same_as=target)
    keys = _SPEC_KEYS + (("spread",) if spec.shift else ())
    reader.check_keys(value, path, keys, required=("value",))
    if "value" not in value:
        return None
    number = convert(value["value"], sub_path(path, "value"))
    fit = False
    if "fit" in value:
        fit = bool(reader.typed(value["fit"], sub_path(path, "fit"), bool))
    lower = convert_bound(value["lower"], sub_path(path, "lower")) if "lower" in value else None
    upper = convert_bound(value["upper"], sub_path(path, "upper")) if "upper" in value else None
    prior = _read_prior(reader, value["prior"], sub_path(path, "prior")) if "prior" in value else None
    if spec.shift and "spread" in value:
        spread = reader.number(value["spread"], sub_path(path, "spread"), positive=True)
        if "prior" in value:
            reader.error(sub_path(path, "spread"), "give either 'spread' or 'prior', not both",
                         value["spread"], "one of them")
        elif spread is not None:
            prior = Prior("normal", {"mean": 0.0, "sd": spread})
    elif spec.shift and fit and prior is None and "prior" not in value:
        prior = Prior("normal", {"mean": 0.0, "sd": DEFAULT_PKA_SPREAD})
    if number is None:
        return None
    return Quantity(number, unit, name, fit, lower, upper, prior, spec.shift)


def share_quantities(model, report: Callable[..., None]):
    """Fill the value of every quantity declared ``same_as`` another (a model).

    The target must exist, be of the same kind (same name prefix) and not be
    shared itself.  ``report(path, message, value, expected)`` records a
    problem; the key path is that of the shared quantity (found by name).
    Returns the model with the values copied (unchanged when nothing is shared).
    """
    from dataclasses import replace

    by_name = {q.name: q for q in model.quantities() if q.name}
    shared = {q.name: q for q in model.quantities() if q.same_as is not None}
    if not shared:
        return model
    values = {}
    for name, q in shared.items():
        target = by_name.get(q.same_as)
        prefix = name.split("[", 1)[0]
        if target is None:
            report(name, f"{name}: same_as names no quantity of the model", q.same_as,
                   "one of: " + ", ".join(n for n in by_name if n.split("[", 1)[0] == prefix and n != name))
        elif target.name.split("[", 1)[0] != prefix:
            report(name, f"{name}: same_as names a quantity of another kind", q.same_as, f"a {prefix}[...] name")
        elif target.same_as is not None or target.name == name:
            report(name, f"{name}: same_as names a quantity that is itself shared", q.same_as,
                   "a quantity with its own value")
        else:
            values[name] = target.value

    def fill(q: Quantity) -> Quantity:
        if q.same_as is None or q.name not in values:
            return q
        return replace(q, value=values[q.name], fit=False, lower=None, upper=None, prior=None)

    molecules = tuple(replace(m, sites=tuple(replace(s, pka=fill(s.pka), enthalpy=fill(s.enthalpy)) for s in m.sites),
                              interactions=tuple(replace(i, w=fill(i.w)) for i in m.interactions))
                      for m in model.molecules)
    steps = tuple(replace(s, log10_k=fill(s.log10_k), activation_energy=fill(s.activation_energy))
                  for s in model.steps)
    return replace(model, molecules=molecules, steps=steps)


def check_quantity(q: Quantity, path: str, report: Callable[..., None]) -> None:
    """Semantic checks of one quantity: finite value, bounds in order, value inside.

    ``report(path, message, value, expected)`` records a problem.
    """
    if not math.isfinite(q.value):
        report(path, f"{q.name}: value is not finite", q.value, "a finite number")
    if q.lower is not None and q.upper is not None and not q.lower < q.upper:
        report(sub_path(path, "lower"), f"{q.name}: lower bound is not below the upper bound",
               f"lower={q.lower:g}, upper={q.upper:g}", "lower < upper")
        return
    centre = 0.0 if q.shift else q.value
    what = "shift 0 (the file value)" if q.shift else "value"
    if q.lower is not None and centre < q.lower:
        report(sub_path(path, "lower"), f"{q.name}: {what} lies below the lower bound",
               f"value={centre:g}, lower={q.lower:g}", "lower <= value <= upper")
    if q.upper is not None and centre > q.upper:
        report(sub_path(path, "upper"), f"{q.name}: {what} lies above the upper bound",
               f"value={centre:g}, upper={q.upper:g}", "lower <= value <= upper")
    if q.prior is not None:
        family = PRIOR_FAMILIES.get(q.prior.family)
        names = None if family is None else family.parameter_names
        if names is None:
            report(sub_path(path, "prior"), f"{q.name}: unknown prior family", q.prior.family,
                   "one of: " + ", ".join(PRIOR_FAMILIES))
        else:
            missing = [n for n in names if n not in q.prior.parameters]
            if missing:
                report(sub_path(path, "prior"), f"{q.name}: prior misses parameters", missing,
                       "parameters " + ", ".join(names))
            p = q.prior.parameters
            if q.prior.family == "uniform" and not missing and not p["lower"] < p["upper"]:
                report(sub_path(path, "prior"), f"{q.name}: uniform prior with lower >= upper",
                       dict(p), "lower < upper")
