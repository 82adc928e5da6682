"""The parameter table of the model page: rows from the model file, edits back to overrides, the diff.

Pure functions (no Dash): :func:`parameter_rows` reads every parameter of a
model file as the file writes it (fitted or fixed, start value, bounds,
prior); :func:`edited_overrides` turns the edited rows into
:class:`~speciakin.chemistry.modelfile.overrides.ParameterOverride` objects;
:func:`proposed_text` applies them to the file's text and validates the
result with the model file's own reader, one parameter at a time, so a bad
value is refused with the model file's message prefixed by the parameter's
name; :func:`diff_lines` is the unified diff shown before saving.  Saving
goes through :func:`~speciakin.chemistry.modelfile.overrides.write_overrides`
(tomlkit: comments and layout kept, written atomically).
"""

from __future__ import annotations

import difflib
import math
from pathlib import Path
from typing import Any

from speciakin.chemistry.prior_families import PRIOR_FAMILIES
from speciakin.errors import InputError, Location, SpeciakinError

__all__ = ["DEFAULT_PRIOR", "EDITABLE_PREFIXES", "parameter_rows", "edited_overrides", "proposed_text",
           "diff_lines", "prior_text", "parse_prior"]

#: Shown in the prior column when the file states no prior (the estimation layer's default applies).
DEFAULT_PRIOR = "(default)"
#: Kinds of parameter the table edits; interaction energies W and shared values are edited in the file.
EDITABLE_PREFIXES = ("pKa", "dH", "log10k", "Ea", "pKw")
#: What the bounds and prior numbers of each kind are on (the model file's fitted scale).
SCALE = {"pKa": "shift of the pKa", "pKw": "shift of pKw", "log10k": "log10 k (or text with unit)",
         "dH": "kJ/mol", "Ea": "kJ/mol", "W": "-"}


def _text(value: Any) -> str:
    """A written value as the table shows it (numbers as Python writes them, texts as they are)."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    return str(value)


def prior_text(prior: dict[str, Any] | None) -> str:
    """``{"family": "normal", "mean": 1.5, "sd": 1}`` -> ``"mean=1.5, sd=1"`` (registry order)."""
    if not prior or prior.get("family") not in PRIOR_FAMILIES:
        return ""
    names = PRIOR_FAMILIES[prior["family"]].parameter_names
    return ", ".join(f"{n}={_text(prior[n])}" for n in names if n in prior)


def parameter_rows(text: str, source: str = "model.toml", base_dir: str | Path | None = None) -> list[dict]:
    """One row per parameter of the model file, as the file writes it.

    Columns: ``name``, ``scale`` (what bounds and prior are on), ``fit``
    (bool), ``start``, ``lower``, ``upper`` (texts as written), ``prior``
    (family or :data:`DEFAULT_PRIOR`), ``prior_numbers`` (``name=value, ...``),
    ``locked`` (True: shared values and interaction energies, edited in the
    file) and ``note``.

    Raises
    ------
    ModelFileError
        The file does not read (the model file's own message).
    """
    import tomlkit

    from speciakin.chemistry.modelfile import parse_model
    from speciakin.chemistry.modelfile.overrides import written_value

    model = parse_model(text, source, base_dir)
    doc = tomlkit.parse(text)
    rows = []
    for q in model.quantities():
        if not q.name:
            continue
        prefix = q.name.split("[", 1)[0]
        written = written_value(doc, q.name) if prefix in EDITABLE_PREFIXES and q.same_as is None else None
        table = written if isinstance(written, dict) else {}
        start = table.get("value") if table else written
        prior = table.get("prior")
        note = ""
        if q.same_as is not None:
            note = f"same as {q.same_as}: edit that parameter"
        elif prefix not in EDITABLE_PREFIXES:
            note = "interaction energy: edit it in the model file"
        elif "spread" in table:
            note = f"prior from spread = {_text(table['spread'])} (normal, mean 0)"
        elif written is None:
            note = "not in the file: the default"
        rows.append({
            "name": q.name, "scale": SCALE.get(prefix, ""), "fit": bool(q.fit),
            "start": _text(start if start is not None else (q.value if math.isfinite(q.value) else "")),
            "lower": _text(table.get("lower")), "upper": _text(table.get("upper")),
            "prior": prior.get("family", DEFAULT_PRIOR) if isinstance(prior, dict) else (
                "" if q.same_as is not None or prefix not in EDITABLE_PREFIXES else DEFAULT_PRIOR),
            "prior_numbers": prior_text(prior) if isinstance(prior, dict) else "",
            "locked": q.same_as is not None or prefix not in EDITABLE_PREFIXES, "note": note,
        })
    return rows


def _number_or_text(name: str, column: str, text: Any, expected: str) -> float | str:
    """A cell as the model file would take it: a number, else the text (a value with its unit)."""
    value = "" if text is None else str(text).strip()
    if not value:
        raise InputError(f"{name}: {column} is empty", Location(key=f"{name} {column}"), value, expected)
    try:
        number = float(value)
    except ValueError:
        return value
    if not math.isfinite(number):
        raise InputError(f"{name}: {column} is not a finite number", Location(key=f"{name} {column}"), value,
                         expected)
    return number


def parse_prior(name: str, family: str, numbers: str) -> dict[str, Any]:
    """The prior table ``{"family": ..., <parameter>: number}`` of the prior columns; ``{}`` for the default.

    ``numbers`` is ``"mean=1.5, sd=1"`` or the numbers alone in the family's
    order (``"1.5, 1"``).  The values themselves are checked by the model
    file's reader (:func:`proposed_text`).

    Raises
    ------
    InputError
        An unknown family, a parameter the family does not have, or a text that is not a number.
    """
    family = (family or "").strip()
    if family in ("", DEFAULT_PRIOR):
        return {}
    where = Location(key=f"{name} prior")
    if family not in PRIOR_FAMILIES:
        raise InputError(f"{name}: unknown prior family", where, family, "one of: " + ", ".join(PRIOR_FAMILIES))
    names = PRIOR_FAMILIES[family].parameter_names
    expected = f"{', '.join(f'{n}=NUMBER' for n in names)} (prior {family})"
    parts = [p.strip() for p in (numbers or "").replace(";", ",").split(",") if p.strip()]
    table: dict[str, Any] = {"family": family}
    for i, part in enumerate(parts):
        key, sep, value = part.partition("=")
        key, value = (key.strip(), value.strip()) if sep else (names[i] if i < len(names) else "", key.strip())
        if key not in names:
            raise InputError(f"{name}: prior {family} has no parameter '{key or part}'", where, numbers, expected)
        try:
            table[key] = float(value)
        except ValueError:
            raise InputError(f"{name}: prior {key} is not a number", where, value, expected) from None
    missing = [n for n in names if n not in table]
    if missing:
        raise InputError(f"{name}: prior {family} needs {', '.join(missing)}", where, numbers or "", expected)
    return table


def edited_overrides(original: list[dict], edited: list[dict]) -> list:
    """The overrides that turn the ``original`` rows into the ``edited`` ones (unchanged rows give none).

    Raises
    ------
    InputError
        A row that is not in the file, a locked row that was changed, or a cell
        that cannot be read (the parameter and what is expected are named).
    """
    from speciakin.chemistry.modelfile.overrides import ParameterOverride

    before = {r["name"]: r for r in original}
    out = []
    for row in edited:
        name = row.get("name")
        old = before.get(name)
        if old is None:
            raise InputError("unknown parameter", Location(key=str(name)), name, "a row of the table")
        changed = {c for c in ("fit", "start", "lower", "upper", "prior", "prior_numbers")
                   if _text(row.get(c)).strip() != _text(old.get(c)).strip()}
        if not changed:
            continue
        if old.get("locked"):
            raise InputError(f"{name}: cannot be changed in the table", Location(key=name), name, old["note"])
        parts: dict[str, Any] = {}
        if "fit" in changed:
            fit = row.get("fit")
            if not isinstance(fit, bool):
                raise InputError(f"{name}: fitted must be ticked or not", Location(key=f"{name} fit"), fit,
                                 "true or false")
            parts["fit"] = fit
        if "start" in changed:
            parts["start"] = _number_or_text(name, "start value", row.get("start"),
                                             "a number, or a text with its unit for a rate constant")
        if changed & {"lower", "upper"}:
            expected = f"two bounds on the {old.get('scale') or 'fitted scale'}, lower below upper"
            parts["lower"] = _number_or_text(name, "lower bound", row.get("lower"), expected)
            parts["upper"] = _number_or_text(name, "upper bound", row.get("upper"), expected)
        if changed & {"prior", "prior_numbers"}:
            parts["prior"] = parse_prior(name, row.get("prior"), row.get("prior_numbers"))
        out.append(ParameterOverride(name, **parts))
    return out


def proposed_text(text: str, overrides: list, source: str = "model.toml",
                  base_dir: str | Path | None = None) -> str:
    """The model-file text with ``overrides`` applied, validated by the model file's reader.

    Each override is first checked alone, so an error names its parameter;
    then all together.

    Raises
    ------
    InputError
        The first parameter whose new value the model file refuses: its name,
        then the model file's own message (key, value, what is expected).
    """
    from speciakin.chemistry.modelfile import parse_model
    from speciakin.chemistry.modelfile.overrides import apply_overrides_text

    for o in overrides:
        try:
            parse_model(apply_overrides_text(text, [o], source), source, base_dir)
        except SpeciakinError as exc:
            raise InputError(f"the model file's rules refuse this change:\n{exc}",
                             Location(file=source, key=o.name)) from None
    new = apply_overrides_text(text, overrides, source)
    parse_model(new, source, base_dir)
    return new


def diff_lines(old: str, new: str, name: str = "model.toml") -> list[str]:
    """Unified diff (3 lines of context) from ``old`` to ``new``; empty when they are equal."""
    return list(difflib.unified_diff(old.splitlines(), new.splitlines(), f"{name} (on disk)",
                                     f"{name} (after saving)", lineterm=""))
