"""The allowed keys of every table of the model file (one registry).

The unknown-key check of the parser and the reference in docs/model-file.md
read this table; add a key here and handle it in the parser.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Mapping

__all__ = ["FILE_KEYS", "RENAMED_KEYS"]

#: Keys of a pH table that say how the pH is reached and held (held pH, logged pH with a titrant).
_PH_CONTROL_KEYS = ("titrant", "titrant_concentration", "opposite_titrant", "opposite_titrant_concentration",
                    "start_adjustment", "start_acid", "start_base")

#: Keys of earlier versions, by table: old key -> its new name.  A file that
#: still uses one gets a "renamed to" error.
RENAMED_KEYS: Mapping[str, Mapping[str, str]] = MappingProxyType({
    "run": MappingProxyType({"charges": "initial", "dose": "dosing"}),
})

#: Allowed keys of every table of the file, by table (drives the unknown-key
#: check and the reference in docs/model-file.md).
FILE_KEYS: Mapping[str, tuple[str, ...]] = MappingProxyType({
    "top": ("model", "ions", "molecule", "step", "hydrolysis", "run", "fit", "medium"),
    "medium": ("name", "pkw"),
    "model": ("name", "description", "reference_temperature", "activity"),
    "molecule": ("label", "role", "molar_mass", "charge", "moieties", "site", "interaction"),
    "site": ("name", "kind", "pka", "enthalpy"),
    "interaction": ("sites", "w"),
    "step": ("label", "reactants", "products", "k", "log10_k", "activation_energy"),
    "reactant": ("species", "requires", "coefficient"),
    "hydrolysis": ("products", "water", "hydroxide"),
    "hydrolysis_path": ("k", "log10_k", "activation_energy"),
    "run": ("note", "volume", "temperature", "end_time", "initial", "ph", "dosing", "withdrawal",
            "samples", "probe_offset", "amount_factor"),
    "temperature": ("times", "values"),
    "ph.held": ("mode", "setpoint") + _PH_CONTROL_KEYS,
    "ph.logged": ("mode", "times", "values", "time_unit", "file") + _PH_CONTROL_KEYS,
    "ph.free": ("mode",),
    "dosing": ("species", "amount", "start", "end", "volume"),
    "withdrawal": ("time", "volume"),
    "samples": ("times", "volume"),
    "fit": ("probe_offset", "amount_factor", "error_model", "starts", "seed", "log_thinning"),
    "fit.log_thinning": ("titrant", "ph"),
    "fit.nuisance": ("runs", "lower", "upper", "sd"),
    "fit.error_model": ("absolute", "relative", "titrant_absolute", "titrant_relative"),
})
