"""Header matching and column conversion shared by the sheet readers.

A :class:`SheetColumns` records where each registry column sits in a sheet
and which unit its header names; the helpers return whole columns in
internal units, reporting bad cells to a :class:`speciakin.errors.ProblemCollector`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from speciakin import units
from speciakin.data.reader import RawTable, column_letter, numeric_column, text_column
from speciakin.data.sheets import INITIAL_PREFIX, RENAMED_PREFIXES, SheetSpec, normalise_name
from speciakin.errors import Location, ProblemCollector

__all__ = ["SheetColumns", "match_columns", "column_numbers", "column_texts", "run_column", "group_rows",
           "optional_float", "EQUIVALENTS", "moles_per_gram", "accepted_units"]

#: The header unit of an amount given in equivalents of the substrate ("amount [eq]"); its words are
#: the model file's (:data:`speciakin.chemistry.modelfile.units.EQUIVALENT_UNITS`).
EQUIVALENTS = units.Unit("eq", "equivalents", 1.0)


def _also_unit(unit_text: str, kinds: tuple[str, ...]) -> units.Unit | None:
    """The unit of ``unit_text`` among the further kinds a column accepts (mass, equivalents), or None."""
    from speciakin.chemistry.modelfile.units import EQUIVALENT_UNITS

    if "equivalents" in kinds and unit_text.strip().lower() in EQUIVALENT_UNITS:
        return EQUIVALENTS
    if "mass" in kinds:
        try:
            return units.lookup(unit_text, "mass")
        except KeyError:
            return None
    return None


def accepted_units(dimension: str, also: tuple[str, ...] = ()) -> str:
    """The header units a column accepts, for messages."""
    from speciakin.chemistry.modelfile.units import EQUIVALENT_UNITS

    listed = list(units.DIMENSIONS[dimension]) + (list(units.DIMENSIONS["mass"]) if "mass" in also else [])
    listed += [EQUIVALENT_UNITS[0]] if "equivalents" in also else []
    return ", ".join(listed)


def moles_per_gram(species: str, molar_masses: dict[str, float], loc: Location, c: ProblemCollector,
                   value=None) -> float | None:
    """1 / molar mass [mol/g] of ``species`` from the Compounds sheet, for amounts given as masses.

    Reports a located error (and returns None) when the Compounds sheet gives no molar mass for it.
    """
    if not molar_masses.get(species):
        c.error(f"a mass needs the molar mass of {species}", loc, value,
                f"a 'molar mass' for the compound of {species} in the Compounds sheet (a row of its own for a "
                "species that HPLC does not report), or an amount unit", code="missing_value")
        return None
    return 1.0 / molar_masses[species]


@dataclass
class SheetColumns:
    """Header positions of one sheet: key -> (index, Unit or None)."""

    table: RawTable
    found: dict[str, tuple[int, units.Unit | None]] = field(default_factory=dict)
    extra: list[tuple[int, str, str | None]] = field(default_factory=list)

    def index(self, key: str) -> int | None:
        return self.found[key][0] if key in self.found else None

    def unit(self, key: str) -> units.Unit | None:
        return self.found[key][1] if key in self.found else None

    def label(self, key: str) -> str | None:
        i = self.index(key)
        return None if i is None else f"{column_letter(i)} ({self.table.headers[i]})"


def match_columns(table: RawTable, spec: SheetSpec, c: ProblemCollector, *,
                   open_extra: bool = False) -> SheetColumns:
    cols = SheetColumns(table)
    by_name = {normalise_name(n): col for col in spec.columns for n in col.names}
    seen: dict[str, int] = {}
    for i, header in enumerate(table.headers):
        if header == "":
            continue
        name, unit_text = units.split_header(header)
        col = by_name.get(normalise_name(name))
        loc = table.location(1, i)
        if col is None:
            cols.extra.append((i, name, unit_text))
            old = next((p for p in RENAMED_PREFIXES if normalise_name(name).startswith(p.strip() + " ")), None)
            if old is not None and not open_extra:
                new = RENAMED_PREFIXES[old] + name.strip()[len(old):].strip()
                c.error(f"column '{old.strip()} ...' was renamed to '{RENAMED_PREFIXES[old].strip()} ...'", loc,
                        header, f"'{new} [{unit_text or 'mmol'}]'", code="renamed_column")
            elif not open_extra and not normalise_name(name).startswith(INITIAL_PREFIX.strip() + " "):
                c.warning("column not recognised; it is ignored", loc, header,
                          "one of: " + ", ".join(s.header for s in spec.columns), code="unknown_column")
            continue
        if col.key in seen:
            c.error("column appears twice", loc, header, "each column once", code="duplicate_column")
            continue
        seen[col.key] = i
        unit = None
        if col.dimension == "ph":
            if unit_text is not None and unit_text.lower() != "ph":
                c.error("unknown unit in header", loc, unit_text, "no unit (pH is unitless)", code="unknown_unit")
        elif col.dimension is not None:
            if unit_text is None:
                c.error("header has no unit", loc, header,
                        f"a unit in brackets, e.g. '{col.header}'; accepted: "
                        + accepted_units(col.dimension, col.also), code="missing_unit")
                continue
            try:
                unit = units.lookup(unit_text, col.dimension)
            except KeyError:
                unit = _also_unit(unit_text, col.also)
            if unit is None:
                c.error("unknown unit in header", loc, unit_text,
                        "one of: " + accepted_units(col.dimension, col.also), code="unknown_unit")
                continue
        elif col.key == "value" and unit_text is not None:
            try:
                unit = units.lookup(unit_text)
            except KeyError:
                unit = None
            if unit is None or unit.dimension not in ("concentration", "area_percent", "none"):
                c.error("unknown unit in header", loc, unit_text,
                        "a concentration unit (" + ", ".join(units.DIMENSIONS["concentration"])
                        + ") or none", code="unknown_unit")
                continue
        cols.found[col.key] = (i, unit)
    for col in spec.columns:
        if col.required and col.key not in cols.found and col.key not in seen:
            c.error("required column is missing", Location(file=table.file, sheet=table.sheet, row=1,
                                                           column=col.header),
                    None, f"a column headed '{col.header}'", code="missing_column")
    return cols


def column_numbers(cols: SheetColumns, key: str, c: ProblemCollector, what: str, **kw) -> np.ndarray:
    """Column ``key`` in internal units (all NaN when the column is absent)."""
    i = cols.index(key)
    n = len(cols.table.rows)
    if i is None:
        return np.full(n, np.nan)
    u = cols.unit(key)
    return numeric_column(cols.table, i, c, what=what,
                          factor=u.factor if u else 1.0, offset=u.offset if u else 0.0, **kw)


def column_texts(cols: SheetColumns, key: str) -> list[str]:
    i = cols.index(key)
    return [""] * len(cols.table.rows) if i is None else text_column(cols.table, i)


def run_column(cols: SheetColumns, c: ProblemCollector, known: dict[str, int]) -> np.ndarray:
    """Run column; rows naming a run absent from the runs sheet are reported once per name."""
    names = np.array(column_texts(cols, "run"), dtype=object)
    t = cols.table
    i = cols.index("run")
    if i is None:
        return names
    for name in dict.fromkeys(names.tolist()):
        if name in known:
            continue
        # compared in Python: numpy would strip a trailing NUL from ``name`` and find no row
        rows = t.row_numbers[np.array([n == name for n in names.tolist()], dtype=bool)]
        more = f" (and {rows.size - 1} more rows)" if rows.size > 1 else ""
        if name == "":
            c.error(f"run identifier is missing{more}", t.location(int(rows[0]), i), None,
                    "a run from the Runs sheet", code="missing_value")
        else:
            c.error(f"run does not exist in the Runs sheet{more}", t.location(int(rows[0]), i), name,
                    "one of: " + ", ".join(known) if known else "a run from the Runs sheet",
                    code="unknown_run")
    return names


def optional_float(x: float) -> float | None:
    return float(x) if np.isfinite(x) else None


def group_rows(runs: np.ndarray) -> dict[str, np.ndarray]:
    """Row indices of each run name, in sheet order."""
    if runs.size == 0:
        return {}
    uniq, inverse = np.unique(runs.astype(str), return_inverse=True)
    order = np.argsort(inverse, kind="stable")
    splits = np.cumsum(np.bincount(inverse, minlength=uniq.size))[:-1]
    return {str(u): idx for u, idx in zip(uniq, np.split(order, splits))}
