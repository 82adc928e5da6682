"""HPLC results sheet: long or wide layout, censored values, RRFs and LOQs."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from speciakin import units
from speciakin.data.campaign import Compound, HplcData, basis_of
from speciakin.data.columns import SheetColumns, column_numbers, column_texts, run_column
from speciakin.data.reader import has_decimal_comma, is_blank, to_float
from speciakin.data.sheets import HPLC_KINDS, normalise_name
from speciakin.errors import Location, ProblemCollector

__all__ = ["parse_signal", "read_hplc", "empty_hplc"]


#: Words for a peak not detected, read as '<LOQ' (a peak below detection is below quantification too).
NOT_DETECTED = frozenset({"n.d.", "n.d", "nd", "notdetected"})


def parse_signal(raw, factor: float, percent: bool = False) -> tuple[float, bool, float, str | None]:
    """One HPLC cell -> (value, censored, loq from the cell, error text).  With ``percent`` (an area%
    value) a text may end in a '%' sign, as exports write it: '59.3 %', '<0.05%'."""
    if percent and isinstance(raw, str) and raw.rstrip().endswith("%"):
        raw = raw.rstrip()[:-1]
    if is_blank(raw):
        return np.nan, True, np.nan, None
    if isinstance(raw, bool):
        return np.nan, False, np.nan, "not a number"
    if isinstance(raw, (int, float)):
        v = float(raw)
    else:
        s = str(raw).strip()
        if s.lower().replace(" ", "") in NOT_DETECTED:  # below detection, so below the LOQ
            return np.nan, True, np.nan, None
        if s.startswith("<"):
            rest = s[1:].strip()
            limit = to_float(rest)
            if limit is None and rest and rest.upper() != "LOQ":
                return np.nan, False, np.nan, "not a number (after '<' write LOQ or the limit)"
            limit = np.nan if limit is None else limit
            if np.isfinite(limit) and limit < 0:
                return np.nan, True, np.nan, "negative limit"
            return np.nan, True, limit * factor, None
        v = to_float(s)
        if v is None:
            return np.nan, False, np.nan, "not a number"
    if not np.isfinite(v):
        return np.nan, False, np.nan, "not a finite number"
    if v < 0:
        return np.nan, False, np.nan, "negative"
    return v * factor, False, np.nan, None


def read_hplc(cols: SheetColumns, c: ProblemCollector, known: dict[str, int],
               compounds: dict[str, Compound]) -> dict[str, HplcData]:
    t = cols.table
    runs = run_column(cols, c, known)
    time = column_numbers(cols, "time", c, "sampling time", minimum=0.0, blank_ok=False)
    kinds_text = column_texts(cols, "kind")
    kinds = np.empty(len(t.rows), dtype=object)
    for k, word in enumerate(kinds_text):
        kind = HPLC_KINDS.get(normalise_name(word).replace(" %", "%"))
        if kind is None and cols.index("kind") is not None:
            c.error("unknown kind of HPLC value", t.location(int(t.row_numbers[k]), cols.index("kind")),
                    word or None, "area%, area or concentration", code="invalid_choice")
        kinds[k] = kind
    # (row position, compound, raw cell, column index, concentration factor)
    cells: list[tuple[int, str, object, int, float]] = []
    if cols.index("compound") is not None:
        if cols.index("value") is None:
            c.error("required column is missing", Location(file=t.file, sheet=t.sheet, row=1, column="value"),
                    None, "a column headed 'value' (long layout)", code="missing_column")
            return {}
        vu = cols.unit("value")
        factor = vu.factor if vu is not None and vu.dimension == "concentration" else 1.0
        names = column_texts(cols, "compound")
        vi = cols.index("value")
        values = t.column_values(vi)
        cells = [(k, names[k], values[k], vi, factor) for k in range(len(t.rows))]
    else:
        if not cols.extra:
            c.error("no compound columns", Location(file=t.file, sheet=t.sheet, row=1),
                    None, "a 'compound' and a 'value' column (long layout) or one column per compound (wide layout)",
                    code="missing_column")
            return {}
        for i, name, unit_text in cols.extra:
            factor = 1.0
            if unit_text is not None:
                try:
                    factor = units.lookup(unit_text, "concentration").factor
                except KeyError:
                    c.error("unknown unit in header", t.location(1, i), unit_text,
                            "a concentration unit: " + ", ".join(units.DIMENSIONS["concentration"]),
                            code="unknown_unit")
                    continue
            values = t.column_values(i)
            cells += [(k, name, values[k], i, factor) for k in range(len(t.rows))]
    reported_unmapped: set[str] = set()
    rows_by_run: dict[str, list] = {}
    other_by_run: dict[str, list] = {}  # the peaks marked not modelled (Compounds sheet)
    for k, name, raw, col, factor in cells:
        row = int(t.row_numbers[k])
        if runs[k] not in known or not np.isfinite(time[k]) or kinds[k] is None:
            continue
        if not name:
            c.error("compound name is missing", t.location(row, cols.index("compound")), None,
                    "a compound from the Compounds sheet", code="missing_value")
            continue
        comp = compounds.get(name)
        if comp is None:
            if name not in reported_unmapped:
                reported_unmapped.add(name)
                where = (t.location(row, cols.index("compound")) if cols.index("compound") is not None
                         else t.location(1, col))
                c.error("compound is not listed in the Compounds sheet (not mapped to a model molecule)", where,
                        name, "one of: " + ", ".join(compounds) if compounds else "a listed compound",
                        code="unmapped_compound")
            continue
        f = factor if kinds[k] == "concentration" else 1.0
        if (kinds[k] == "area_percent" and (row, col) in t.percent_cells and isinstance(raw, (int, float))
                and not isinstance(raw, bool)):
            # a cell formatted as a percentage shows 40.59 % and stores 0.4059: area% is the number shown
            t.percent_read.append((row, col, float(raw)))
            raw = 100.0 * raw
        value, censored, cell_loq, err = parse_signal(raw, f, percent=kinds[k] == "area_percent")
        if has_decimal_comma(raw):  # '7,5' and '<0,05' alike
            t.comma_cells.append((row, col, raw))
        if err is not None:
            c.error(f"HPLC value is {err}", t.location(row, col), raw,
                    "a number >= 0, '<LOQ', '<' followed by the limit, 'n.d.' or blank", code="not_numeric"
                    if "number" in err else "negative")
            continue
        loq = cell_loq
        if not np.isfinite(loq) and comp.loq is not None:
            loq = comp.loq * f
        (rows_by_run if comp.modelled else other_by_run).setdefault(runs[k], []).append(
            (time[k], name, comp.molecule, kinds[k], value, censored, loq, comp.rrf, row))
    out: dict[str, HplcData] = {}
    for run in dict.fromkeys([*rows_by_run, *other_by_run]):  # in sheet order
        others = other_by_run.get(run)
        out[run] = replace(_table(rows_by_run.get(run, [])), other=_table(others) if others else None)
    return out


def _table(items: list[tuple]) -> HplcData:
    """HplcData of (time, compound, molecule, kind, value, censored, loq, rrf, row) tuples."""
    if not items:
        return empty_hplc()
    cols_ = list(zip(*items))
    kind = np.array(cols_[3], dtype=object)
    return HplcData(
        time=np.array(cols_[0], float), compound=np.array(cols_[1], dtype=object),
        molecule=np.array(cols_[2], dtype=object), kind=kind, value=np.array(cols_[4], float),
        censored=np.array(cols_[5], bool), loq=np.array(cols_[6], float), rrf=np.array(cols_[7], float),
        rows=np.array(cols_[8], np.int64), basis=basis_of(kind))


def empty_hplc() -> HplcData:
    e = np.array([], dtype=float)
    o = np.array([], dtype=object)
    return HplcData(e, o, o, o, e, np.array([], bool), e, e, np.array([], np.int64), "none")
