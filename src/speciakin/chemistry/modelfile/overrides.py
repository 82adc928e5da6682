"""Parameter overrides: fix or free a model-file parameter, set its start or bounds, without editing TOML.

An override names a parameter as the results do (``pKa[S.N_aryl]``,
``log10k[acylation_aryl]``, ``Ea[acylation_aryl]``, ``dH[S.N_aryl]``, ``pKw[medium]``;
interaction energies ``W[...]`` are changed in the file itself)
and changes the model file's entry for it the way a chemist would by hand: a
bare value becomes a table ``{ value = ..., fit = true }``; ``fit``, ``value``,
``lower`` and ``upper`` of a table are set.  Values are read exactly as the
model file reads them at that key (a pKa start is a pKa; pKa bounds are of the
shift; a rate constant's start is text with its unit, its bounds log10 k;
docs/model-file.md).

The model file stays the source of truth: :func:`load_model_with_overrides`
applies overrides to a copy of its text in memory; :func:`write_overrides`
writes them back into the file (or another one) when asked, keeping every
comment and the layout (tomlkit).
"""

from __future__ import annotations

import re
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any, Iterable

from speciakin._io import atomic_write_text
from speciakin.chemistry.modelfile.parse import parse_model
from speciakin.chemistry.modelfile.validate import hydrolysis_step_name
from speciakin.errors import InputError, Location, ModelFileError

__all__ = ["ParameterOverride", "parse_overrides", "apply_overrides_text", "load_model_with_overrides",
           "write_overrides", "overridable_names", "written_value"]

_NAME = re.compile(r"^(pKa|dH|log10k|Ea)\[([^\]]+)\]$")
_KEY_OF = {"pKa": "pka", "dH": "enthalpy", "Ea": "activation_energy"}


@dataclass(frozen=True)
class ParameterOverride:
    """One parameter's change; None leaves that part as the model file says.

    Attributes
    ----------
    name
        Parameter name as in the results, e.g. ``"pKa[S.N_aryl]"``.
    fit
        True: fitted; False: fixed at its value.
    start
        Starting (or fixed) value, as the model file would write it (number or text with unit).
    lower, upper
        Bounds on the fitted scale of the model file (pKa: of the shift; rate constants: log10 k).
    prior
        ``{"family": ..., <parameters>}`` as the model file writes it (replaces a pKa's ``spread``);
        an empty dict removes the stated prior (back to the default).
    """

    name: str
    fit: bool | None = None
    start: float | str | None = None
    lower: float | None = None
    upper: float | None = None
    prior: dict[str, Any] | None = None

    def to_dict(self) -> dict[str, Any]:
        return {k: v for k, v in asdict(self).items() if v is not None}


def _number_or_text(text: str) -> float | str:
    try:
        return float(text)
    except ValueError:
        return text.strip()


def _split(item: str, option: str, expected: str) -> tuple[str, str]:
    name, sep, value = item.partition("=")
    if not sep or not name.strip() or not value.strip():
        raise InputError("cannot read the option", Location(key=option), item, expected)
    return name.strip(), value.strip()


def parse_overrides(fix: Iterable[str] = (), free: Iterable[str] = (), start: Iterable[str] = (),
                    bounds: Iterable[str] = ()) -> list[ParameterOverride]:
    """Overrides from command-line texts: ``fix``/``free`` names, ``start``
    ``NAME=VALUE`` and ``bounds`` ``NAME=LOW:HIGH``; one entry per parameter.

    Raises
    ------
    InputError
        An option that cannot be read (the option, the text and the expected form).
    """
    merged: dict[str, dict[str, Any]] = {}
    for name in fix:
        merged.setdefault(name.strip(), {})["fit"] = False
    for name in free:
        merged.setdefault(name.strip(), {})["fit"] = True
    for item in start:
        name, value = _split(item, "--start", "NAME=VALUE, e.g. 'pKa[S.N_aryl]=4.7'")
        merged.setdefault(name, {})["start"] = _number_or_text(value)
    for item in bounds:
        name, value = _split(item, "--bounds", "NAME=LOW:HIGH, e.g. 'log10k[acylation]=-2:4'")
        low, sep, high = value.partition(":")
        try:
            merged.setdefault(name, {}).update(lower=float(low), upper=float(high))
        except ValueError:
            raise InputError("bounds must be two numbers", Location(key="--bounds"), item,
                             "NAME=LOW:HIGH with numbers, e.g. 'log10k[acylation]=-2:4'") from None
        if not sep or float(low) >= float(high):
            raise InputError("the lower bound must be below the upper one", Location(key="--bounds"), item,
                             "NAME=LOW:HIGH with LOW < HIGH")
    return [ParameterOverride(name, **parts) for name, parts in merged.items()]


def overridable_names(model) -> list[str]:
    """Names of the parameters of ``model`` an override may change (shared copies excluded)."""
    return [q.name for q in model.quantities() if q.name and q.same_as is None]


def _entry(doc, name: str):
    """(table holding the entry, key) of parameter ``name`` in the tomlkit document, or None."""
    if name == "pKw[medium]":
        medium = doc.get("medium")
        return (medium, "pkw") if medium is not None and "pkw" in medium else None
    m = _NAME.match(name)
    if not m:
        return None
    prefix, owner = m.groups()
    if prefix in ("pKa", "dH"):
        molecule, _, site = owner.partition(".")
        for table in doc.get("molecule", {}).get(molecule, {}).get("site", []):
            if table.get("name") == site:
                return table, _KEY_OF[prefix]
        return None
    table = doc.get("step", {}).get(owner)
    if table is None:
        for molecule, hyd in doc.get("hydrolysis", {}).items():
            for pseudo in ("water", "hydroxide"):
                if hydrolysis_step_name(molecule, pseudo) == owner and pseudo in hyd:
                    table = hyd[pseudo]
    if table is None:
        return None
    if prefix == "Ea":
        return table, "activation_energy"
    return table, ("log10_k" if "log10_k" in table else "k")


def written_value(text, name: str) -> Any:
    """What the model file writes for parameter ``name``: a number, a text with its unit, or a
    quantity table as a dict; None when an override cannot change it (unknown, shared, W).
    ``text`` is the file's text or its ``tomlkit.parse`` document (parsed once for many names)."""
    import tomlkit

    where = _entry(tomlkit.parse(text) if isinstance(text, str) else text, name)
    if where is None or where[1] not in where[0]:
        return None
    value = where[0][where[1]]
    return value.unwrap() if hasattr(value, "unwrap") else value


def _change(table, key: str, o: ParameterOverride) -> None:
    import tomlkit

    current = table.get(key)
    if isinstance(current, dict):
        entry = current
    else:
        entry = tomlkit.inline_table()
        entry["value"] = 0.0 if current is None else current
    if o.start is not None:
        entry["value"] = o.start
    if o.fit is not None:
        entry["fit"] = o.fit
    if o.lower is not None:
        entry["lower"] = o.lower
        entry["upper"] = o.upper
    if o.prior is not None:
        for old in ("spread", "prior"):  # the file takes a spread or a prior, not both
            if old in entry:
                del entry[old]
        if o.prior:
            prior = tomlkit.inline_table()
            prior.update(o.prior)
            entry["prior"] = prior
    if entry is not current:
        table[key] = entry


def apply_overrides_text(text: str, overrides: Iterable[ParameterOverride], source: str = "<string>") -> str:
    """The model-file text with ``overrides`` applied (comments and layout kept).

    Raises
    ------
    InputError
        A name that is not a parameter of the model: the error names the
        model file and the option and lists the known names.
    """
    import tomlkit

    overrides = list(overrides)
    if not overrides:
        return text
    known = overridable_names(parse_model(text, source))
    doc = tomlkit.parse(text)
    for o in overrides:
        where = _entry(doc, o.name) if o.name in known else None
        if where is None and o.name in known:
            raise InputError("this parameter cannot be changed by an option", Location(file=source, key=o.name),
                             o.name, "an edit of the model file (interaction energies W)")
        if where is None:
            raise InputError("unknown parameter", Location(file=source, key=o.name), o.name,
                             "one of " + ", ".join(known))
        _change(where[0], where[1], o)
    return tomlkit.dumps(doc)


def _read(path: Path) -> str:
    try:
        return path.read_text(encoding="utf-8")
    except OSError as exc:
        raise ModelFileError(f"cannot read the model file: {exc.strerror}", Location(file=str(path))) from None


def load_model_with_overrides(path: str | Path, overrides: Iterable[ParameterOverride]):
    """The model of ``path`` with ``overrides`` applied in memory (the file is not changed);
    ``model.extra["overrides"]`` lists them (the fit records them in ``fit.json``).

    Raises
    ------
    InputError
        Unknown parameter names, or values the model file does not accept at that key.
    """
    import dataclasses

    path = Path(path)
    overrides = list(overrides)
    model = parse_model(apply_overrides_text(_read(path), overrides, str(path)), str(path), path.parent)
    if not overrides:
        return model
    return dataclasses.replace(model, extra={**model.extra, "overrides": [o.to_dict() for o in overrides]})


def write_overrides(path: str | Path, overrides: Iterable[ParameterOverride], target: str | Path | None = None,
                    note: str | None = None) -> Path:
    """Write the model file with ``overrides`` applied to ``target`` (default:
    back into ``path``), keeping comments; the new text is checked first.
    ``note`` (optional) is written as comment lines at the top.

    Returns
    -------
    Path
        The file written (atomically).
    """
    path = Path(path)
    text = apply_overrides_text(_read(path), overrides, str(path))
    parse_model(text, str(path), path.parent)  # never write a file the reader refuses
    if note:
        text = "".join(f"# {line}\n" for line in note.splitlines()) + "\n" + text
    out = Path(target) if target is not None else path
    atomic_write_text(out, text)
    return out
