"""Field readers of the process file: unit conversion, key checks and the
parsing of specifications and of the second factor.  Each problem is
recorded with file, key path, line (best effort), value and expectation;
:func:`speciakin.decision.process.parse_process` raises them together.
"""

from __future__ import annotations

import math
import re
from typing import Any, Mapping

from speciakin.chemistry.model import START_ADJUSTMENTS
from speciakin.chemistry.modelfile.reader import spelling_hint
from speciakin.decision.process_plan import FACTOR_KINDS, SecondFactor
from speciakin.decision.specs import OPERATORS, OUTCOME_KINDS, Specification
from speciakin.errors import Location, ProblemCollector
from speciakin.units import parse_quantity

__all__ = ["Reader", "parse_equivalents", "parse_specification", "parse_second_factor",
           "PROCESS_KEYS", "RENAMED_PROCESS_KEYS", "SCAN_KEYS", "SPECIFICATION_KEYS", "FACTOR_KEYS"]

PROCESS_KEYS = {
    "name": "text", "description": "text", "substrate": "a molecule name",
    "substrate_amount": "an amount such as '50 mmol'",
    "substrate_concentration": "a concentration such as '0.1 M'",
    "volume": "a volume such as '500 mL'", "reagent": "a molecule name",
    "equivalents": "a number > 0 such as 1.05 or '1.05 eq'",
    "dosing_time": "a time such as '30 min'", "hold_time": "a time such as '60 min'",
    "feed_volume": "a volume such as '20 mL'", "temperature": "a temperature such as '20 C'",
    "titrant": "an ion name such as 'Na+'",
    "titrant_concentration": "a concentration such as '2 M'",
    "opposite_titrant": "an ion name of the other sign than the titrant, such as 'Cl-'",
    "opposite_titrant_concentration": "a concentration such as '1 M'",
    "start_adjustment": "one of " + ", ".join(START_ADJUSTMENTS),
    "start_acid": "an ion name with a negative charge, such as 'Cl-'",
    "start_base": "an ion name with a positive charge, such as 'Na+'",
    "moiety": "a moiety name",
    "initial": "a table of name = amount",
}
#: Keys of earlier versions of the process file: old key -> new name.
RENAMED_PROCESS_KEYS = {"charges": "initial"}
SCAN_KEYS = {
    "ph_from": "a pH", "ph_to": "a pH", "ph_step": "a pH step > 0",
    "level": "a probability between 0 and 1, such as 0.95",
    "ph_tolerance": "a pH tolerance >= 0, such as 0.3", "draws": "a whole number >= 1",
    "seed": "a whole number >= 0", "second_factor": "a table",
}
SPECIFICATION_KEYS = {
    "label": "text", "outcome": f"one of {', '.join(OUTCOME_KINDS)}",
    "species": "a molecule name or a list of names", "per": "a molecule name or a list",
    "rule": f"an operator ({', '.join(OPERATORS)}) and a number, such as '>= 90 %'",
}
FACTOR_KEYS = {"kind": f"one of {', '.join(FACTOR_KINDS)}", "values": "a list of values",
                "from": "a start value", "to": "an end value", "step": "a step > 0"}


class Reader:
    """Helper that turns values into internal units, recording problems."""

    def __init__(self, source: str, text: str) -> None:
        self.source = source
        self.lines = text.splitlines()
        self.problems = ProblemCollector()

    # best-effort line of a key: after the header of its table
    def line_of(self, table: str | None, key: str | None, index: int | None = None) -> int | None:
        start = 0
        if table:
            header = re.compile(r"^\s*\[\[\s*" + re.escape(table) + r"\s*\]\]" if index is not None
                                else r"^\s*\[\s*" + re.escape(table) + r"\s*\]")
            seen = -1
            found = None
            for i, line in enumerate(self.lines):
                if header.match(line):
                    seen += 1
                    if index is None or seen == index:
                        found = i
                        break
            if found is None:
                return None
            start = found
            if key is None:
                return found + 1
        if key is None:
            return None
        pattern = re.compile(r'^\s*["\']?' + re.escape(key) + r'["\']?\s*=')
        for i in range(start, len(self.lines)):
            if i > start and table and self.lines[i].lstrip().startswith("["):
                break
            if pattern.match(self.lines[i]):
                return i + 1
        return None

    def where(self, path: str, table: str | None, key: str | None,
              index: int | None = None) -> Location:
        return Location(file=self.source or None, key=path, line=self.line_of(table, key, index))

    def error(self, message: str, loc: Location, value: Any = None, expected: str | None = None,
              code: str = "invalid") -> None:
        self.problems.error(message, loc, value, expected, code)

    def unknown_keys(self, data: Mapping[str, Any], allowed: Mapping[str, str], prefix: str,
                     table: str | None, index: int | None = None,
                     renamed: Mapping[str, str] | None = None) -> None:
        for key in data:
            if renamed and key in renamed:
                self.error(f"key '{key}' was renamed to '{renamed[key]}'",
                           self.where(f"{prefix}.{key}", table, key, index), key,
                           f"'{renamed[key]}' (same content)", code="unknown_key")
            elif key not in allowed:
                self.error("unknown key" + spelling_hint(key, tuple(allowed)),
                           self.where(f"{prefix}.{key}", table, key, index), key,
                           f"one of {', '.join(allowed)}", code="unknown_key")

    def quantity(self, data: Mapping[str, Any], key: str, dimension: str, prefix: str,
                 table: str | None, required: bool = True, positive: bool = True,
                 allow_zero: bool = False, default: float | None = None,
                 index: int | None = None) -> float | None:
        path = f"{prefix}.{key}"
        if key not in data:
            # a key written in other letter case ('Dosing_time') has its unknown-key error, naming the spelling
            if required and not any(str(k).lower() == key.lower() for k in data):
                self.error("missing", self.where(path, table, None, index), None,
                           PROCESS_KEYS.get(key, dimension), code="missing")
            return default
        raw = data[key]
        loc = self.where(path, table, key, index)
        try:
            value = parse_quantity(raw, dimension)
        except ValueError as exc:
            self.error(str(exc), loc, raw, PROCESS_KEYS.get(key, dimension))
            return default
        if not math.isfinite(value):
            self.error("not a finite number", loc, raw, "a finite value")
            return default
        if positive and (value < 0 or (value == 0 and not allow_zero)):
            self.error("must be positive" if not allow_zero else "must not be negative", loc, raw,
                       PROCESS_KEYS.get(key, dimension))
            return default
        return value

    def number(self, data: Mapping[str, Any], key: str, prefix: str, table: str | None,
               default: float, low: float, high: float, integer: bool = False,
               open_low: bool = False, open_high: bool = False) -> float:
        path = f"{prefix}.{key}"
        if key not in data:
            return default
        raw = data[key]
        loc = self.where(path, table, key)
        expected = SCAN_KEYS.get(key, "a number")
        if isinstance(raw, bool) or not isinstance(raw, (int, float)) or \
                (integer and not isinstance(raw, int)):
            self.error("not a number" if not integer else "not a whole number", loc, raw, expected)
            return default
        value = float(raw)
        bad = (not math.isfinite(value) or value < low or value > high
               or (open_low and value == low) or (open_high and value == high))
        if bad:
            self.error("out of range", loc, raw, expected)
            return default
        return int(raw) if integer else value

    def text(self, data: Mapping[str, Any], key: str, prefix: str, table: str | None,
             required: bool = True, default: str = "", index: int | None = None) -> str:
        path = f"{prefix}.{key}"
        if key not in data:
            if required:
                self.error("missing", self.where(path, table, None, index), None,
                           PROCESS_KEYS.get(key, "text"), code="missing")
            return default
        raw = data[key]
        if not isinstance(raw, str) or (required and not raw.strip()):
            self.error("not a text value", self.where(path, table, key, index), raw,
                       PROCESS_KEYS.get(key, SPECIFICATION_KEYS.get(key, "text")))
            return default
        return raw.strip()


def parse_equivalents(raw: Any) -> float:
    """Read ``1.05`` or ``"1.05 eq"`` (also ``equiv``) as a number [mol/mol].

    Raises
    ------
    ValueError
        With what is accepted.
    """
    if isinstance(raw, bool):
        raise ValueError("expected a number of equivalents such as 1.05 or '1.05 eq'")
    if isinstance(raw, (int, float)):
        return float(raw)
    m = re.fullmatch(r"\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(eq|equiv|equivalents?)?\s*",
                     str(raw))
    if not m:
        raise ValueError(f"expected a number of equivalents such as 1.05 or '1.05 eq', got {raw!r}")
    return float(m.group(1))


def _names(raw: Any) -> tuple[str, ...] | None:
    if isinstance(raw, str) and raw.strip():
        return (raw.strip(),)
    if isinstance(raw, list) and raw and all(isinstance(x, str) and x.strip() for x in raw):
        return tuple(x.strip() for x in raw)
    return None


_RULE = re.compile(r"^\s*(" + "|".join(sorted(map(re.escape, OPERATORS), key=len, reverse=True))
                   + r")\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(%?)\s*$")


def parse_specification(r: Reader, raw: Any, k: int) -> Specification | None:
    prefix, table = f"specification[{k + 1}]", "specification"
    if not isinstance(raw, dict):
        r.error("not a table", Location(file=r.source or None, key=prefix), raw,
                "a [[specification]] table")
        return None
    r.unknown_keys(raw, SPECIFICATION_KEYS, prefix, table, k)
    kind = raw.get("outcome", "percent")
    if kind not in OUTCOME_KINDS:
        r.error("unknown outcome kind", r.where(f"{prefix}.outcome", table, "outcome", k), kind,
                SPECIFICATION_KEYS["outcome"])
        return None
    ok = True
    species = _names(raw.get("species"))
    if species is None:
        r.error("missing or not a molecule name / list of names",
                r.where(f"{prefix}.species", table, "species" if "species" in raw else None, k),
                raw.get("species"), SPECIFICATION_KEYS["species"],
                code="missing" if "species" not in raw else "invalid")
        ok = False
    per: tuple[str, ...] = ()
    if OUTCOME_KINDS[kind].needs_per:
        per = _names(raw.get("per")) or ()
        if not per:
            r.error(f"a '{kind}' specification needs 'per' (the denominator molecules)",
                    r.where(f"{prefix}.per", table, "per" if "per" in raw else None, k),
                    raw.get("per"), SPECIFICATION_KEYS["per"], code="missing")
            ok = False
    elif "per" in raw:
        r.error(f"'per' only applies to outcome 'ratio', not '{kind}'",
                r.where(f"{prefix}.per", table, "per", k), raw["per"], "no 'per' key")
        ok = False
    rule = raw.get("rule")
    m = _RULE.match(rule) if isinstance(rule, str) else None
    if m is None:
        r.error("missing or unreadable rule",
                r.where(f"{prefix}.rule", table, "rule" if "rule" in raw else None, k), rule,
                SPECIFICATION_KEYS["rule"], code="missing" if rule is None else "invalid")
        return None
    operator, limit, percent = m.group(1), float(m.group(2)), m.group(3)
    unit = OUTCOME_KINDS[kind].unit
    if percent and unit != "%":
        r.error(f"a '{kind}' limit is a plain number, not a percentage",
                r.where(f"{prefix}.rule", table, "rule", k), rule, "a rule such as '<= 0.05'")
        ok = False
    if unit == "%" and not 0.0 <= limit <= 100.0:
        r.error("a percentage limit must lie between 0 and 100",
                r.where(f"{prefix}.rule", table, "rule", k), rule, "a rule such as '>= 90 %'")
        ok = False
    label = raw.get("label", "")
    if not isinstance(label, str):
        r.error("not a text value", r.where(f"{prefix}.label", table, "label", k), label, "text")
        ok = False
    if not ok:
        return None
    return Specification(kind, species, operator, limit, per, str(label))


def parse_second_factor(r: Reader, raw: Any) -> SecondFactor | None:
    prefix, table = "scan.second_factor", "scan.second_factor"
    if not isinstance(raw, dict):
        r.error("not a table", r.where(prefix, "scan", "second_factor"), raw, "a table")
        return None
    r.unknown_keys(raw, FACTOR_KEYS, prefix, table)
    kind = raw.get("kind")
    if kind not in FACTOR_KINDS:
        r.error("missing or unknown factor kind",
                r.where(f"{prefix}.kind", table, "kind" if "kind" in raw else None), kind,
                FACTOR_KEYS["kind"])
        return None
    fk = FACTOR_KINDS[kind]

    def convert(value: Any, path: str, key: str) -> float | None:
        try:
            if fk.dimension is None:
                v = parse_equivalents(value)
            else:
                v = parse_quantity(value, fk.dimension)
        except ValueError as exc:
            r.error(str(exc), r.where(path, table, key), value,
                    f"a {fk.description} such as '{'1.1 eq' if fk.dimension is None else '30 ' + fk.display_unit}'")
            return None
        if not math.isfinite(v) or v <= 0:
            r.error("must be a finite value > 0", r.where(path, table, key), value, "a value > 0")
            return None
        return v

    if "values" in raw:
        items = raw["values"]
        if not isinstance(items, list) or not items:
            r.error("not a non-empty list", r.where(f"{prefix}.values", table, "values"), items,
                    FACTOR_KEYS["values"])
            return None
        values = [convert(v, f"{prefix}.values[{i + 1}]", "values") for i, v in enumerate(items)]
        if any(v is None for v in values):
            return None
    elif all(k in raw for k in ("from", "to", "step")):
        a = convert(raw["from"], f"{prefix}.from", "from")
        b = convert(raw["to"], f"{prefix}.to", "to")
        s = convert(raw["step"], f"{prefix}.step", "step")
        if a is None or b is None or s is None:
            return None
        if fk.dimension == "temperature":
            # a step is a difference: remove the unit's offset ("5 C" is 5 K)
            unit = re.sub(r"^\s*[-+]?[\d.eE+-]+", "", str(raw["step"])).strip()
            s -= parse_quantity(f"0 {unit}", "temperature")
            if s <= 0:
                r.error("must be positive", r.where(f"{prefix}.step", table, "step"), raw["step"],
                        "a step > 0")
                return None
        if b < a:
            r.error("'to' is below 'from'", r.where(f"{prefix}.to", table, "to"), raw["to"],
                    "a value >= 'from'")
            return None
        n = int(math.floor((b - a) / s + 1e-9)) + 1
        if n > 200:
            r.error("too many factor values", r.where(f"{prefix}.step", table, "step"), raw["step"],
                    "at most 200 values")
            return None
        values = [a + s * i for i in range(n)]
    else:
        r.error("give either 'values' or 'from', 'to' and 'step'", r.where(prefix, table, None),
                None, "values = [...] or from/to/step", code="missing")
        return None
    if len(set(values)) != len(values) or sorted(values) != values:
        r.error("values must be increasing without repeats",
                r.where(f"{prefix}.values", table, "values"), raw.get("values"), "increasing values")
        return None
    return SecondFactor(kind, tuple(float(v) for v in values))
