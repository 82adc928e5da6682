"""Typed access to the parsed TOML tables with problems gathered in one pass.

:class:`TableReader` wraps a :class:`speciakin.errors.ProblemCollector`; each
accessor checks type and range, records a problem naming the file, key path,
line, value and what was expected, and returns ``None`` so that parsing goes
on and every mistake of the file is reported at once.
"""

from __future__ import annotations

import difflib
import math
from typing import Any, Iterable, Mapping

from speciakin.chemistry.modelfile.paths import KeyLines, format_path, sub_path
from speciakin.chemistry.modelfile.units import BARE_NUMBER_UNITS
from speciakin.errors import Location, ProblemCollector
from speciakin.units import DIMENSIONS, parse_quantity

__all__ = ["TableReader", "spelling_hint"]

_TYPE_WORDS = {dict: "a table", list: "an array", str: "a text string", bool: "true or false"}


def spelling_hint(key: str, allowed: tuple[str, ...]) -> str:
    """'' or a hint naming the allowed key ``key`` was meant to be: the same letters in lower case
    (keys are lower case: 'pKa' is written 'pka'), or a close spelling."""
    same = [a for a in allowed if a.lower() == str(key).lower()]
    if same:
        return f": keys are written in lower case, write '{same[0]}'"
    close = difflib.get_close_matches(str(key), allowed, n=1, cutoff=0.8)
    return f": did you mean '{close[0]}'?" if close else ""


class TableReader:
    """Read values of one model file; problems go to :attr:`collector`."""

    def __init__(self, source: str, text: str) -> None:
        self.source = source
        self._text = text
        self._key_lines: KeyLines | None = None
        self.collector = ProblemCollector()
        #: key path of every quantity written ``{ same_as = ... }``, by quantity name
        self.shared_paths: dict[str, str] = {}

    @property
    def key_lines(self) -> KeyLines:
        """Key path -> line index, built on first use (only when there is a problem)."""
        if self._key_lines is None:
            self._key_lines = KeyLines(self._text)
        return self._key_lines

    # -- locations and problems -------------------------------------------
    def location(self, path: str) -> Location:
        return Location(file=self.source or None, key=path or None, line=self.key_lines.line(path))

    def error(self, path: str, message: str, value: Any = None, expected: str | None = None,
              code: str = "invalid") -> None:
        self.collector.error(message, self.location(path), value, expected, code)

    def warning(self, path: str, message: str, value: Any = None, expected: str | None = None) -> None:
        self.collector.warning(message, self.location(path), value, expected)

    # -- structure -----------------------------------------------------------
    def check_keys(self, table: dict, path: str, allowed: Iterable[str],
                   required: Iterable[str] = (), renamed: Mapping[str, str] | None = None) -> None:
        """Record unknown keys (listing the allowed ones; a key of ``renamed``
        names its new spelling) and missing required keys."""
        allowed = tuple(allowed)
        renamed = renamed or {}
        for key in table:
            if key in renamed and key not in allowed:
                self.error(sub_path(path, key) if path else format_path(key),
                           f"key '{key}' was renamed to '{renamed[key]}'", key,
                           f"'{renamed[key]}' (same content)", code="unknown_key")
            elif key not in allowed:
                self.error(sub_path(path, key) if path else format_path(key),
                           "unknown key" + spelling_hint(key, allowed), key, "one of: " + ", ".join(allowed),
                           code="unknown_key")
        for key in required:
            # a required key written in other letter case ('pKa') has its error above, which names the spelling
            if key not in table and not any(str(k).lower() == key.lower() for k in table):
                self.error(path, f"missing key '{key}'", expected=f"a value for '{key}'",
                           code="missing")

    def keyed(self, value: Any, path: str, allowed: Iterable[str], required: Iterable[str] = (),
              renamed: Mapping[str, str] | None = None, what: str | None = None) -> dict | None:
        """``value`` as a table whose keys are checked (:meth:`check_keys`), or None when it is
        not a table (recorded; ``what`` says what was expected)."""
        table = self.typed(value, path, dict, what)
        if table is not None:
            self.check_keys(table, path, allowed, required, renamed)
        return table

    def typed(self, value: Any, path: str, kind: type, what: str | None = None) -> Any:
        """Return ``value`` if it is of ``kind`` (int/float accepted for float)."""
        if kind is float:
            ok = isinstance(value, (int, float)) and not isinstance(value, bool)
        elif kind is int:
            ok = isinstance(value, int) and not isinstance(value, bool)
        else:
            ok = isinstance(value, kind)
        if not ok:
            expected = what or _TYPE_WORDS.get(kind, "a number" if kind is float else "an integer")
            self.error(path, "wrong type", value, expected, code="type")
            return None
        return value

    def table(self, parent: dict, key: str, path: str, required: bool = False) -> dict | None:
        if key not in parent:
            if required:
                self.error(path, f"missing table '{key}'", code="missing")
            return None
        return self.typed(parent[key], sub_path(path, key) if path else key, dict)

    def array(self, table: dict, key: str, path: str) -> list:
        """Items of an array of tables (``[[path.key]]`` sections); [] if absent."""
        if key not in table:
            return []
        value = self.typed(table[key], sub_path(path, key), list,
                           f"an array of tables ([[...{key}]] sections)")
        return value or []

    # -- scalar values -------------------------------------------------------
    def string(self, table: dict, key: str, path: str, default: str | None = None,
               choices: Iterable[str] | None = None) -> str | None:
        if key not in table:
            return default
        sub = sub_path(path, key)
        value = self.typed(table[key], sub, str)
        if value is not None and choices is not None:
            choices = tuple(choices)
            if value not in choices:
                self.error(sub, "unknown value", value, "one of: " + ", ".join(choices))
                return None
        return value

    def number(self, value: Any, path: str, minimum: float | None = None,
               positive: bool = False, what: str = "a number") -> float | None:
        value = self.typed(value, path, float, what)
        if value is None:
            return None
        value = float(value)
        return self._in_range(path, value, value, what, "number", minimum, positive)

    def measure(self, value: Any, path: str, dimension: str, minimum: float | None = None,
                positive: bool = False, default_unit: str | None = None) -> float | None:
        """A quantity such as ``"30 min"`` or a bare number in the documented default unit."""
        if default_unit is None:
            default_unit = BARE_NUMBER_UNITS.get(dimension)
        units = ", ".join(DIMENSIONS.get(dimension, ()))
        expected = f"a {dimension.replace('_', ' ')} with a unit ({units})"
        if default_unit:
            expected += f" or a bare number in {default_unit}"
        if isinstance(value, bool) or not isinstance(value, (int, float, str)):
            self.error(path, "wrong type", value, expected, code="type")
            return None
        try:
            internal = parse_quantity(value, dimension, default_unit)
        except ValueError as exc:
            self.error(path, str(exc), value, expected, code="unit")
            return None
        return self._in_range(path, internal, value, expected, "value", minimum, positive, " (internal units)")

    def _in_range(self, path: str, checked: float, shown: Any, expected: str, noun: str,
                  minimum: float | None, positive: bool, note: str = "") -> float | None:
        """``checked`` if finite, > 0 when ``positive`` and >= ``minimum``; else None and a problem
        showing the value as written (``shown``); ``note`` follows a nonzero minimum."""
        if not math.isfinite(checked):
            self.error(path, "not a finite number", shown, expected)
            return None
        if positive and checked <= 0.0:
            self.error(path, "must be positive", shown, f"a {noun} > 0")
            return None
        if minimum is not None and checked < minimum:
            self.error(path, "must not be negative" if minimum == 0 else "out of range", shown,
                       f"a {noun} >= {minimum:g}" + ("" if minimum == 0 else note))
            return None
        return checked
