"""Dosing, probe log and titrant log sheets."""

from __future__ import annotations

import numpy as np

from speciakin.chemistry.model import Dose
from speciakin.data.campaign import TimeSeries, TitrantLog
from speciakin.data.columns import SheetColumns, column_numbers, column_texts, group_rows, moles_per_gram, run_column
from speciakin.errors import Location, ProblemCollector

__all__ = ["read_dosing", "read_probe", "read_titrant"]


#: A tared burette or balance reads slightly below zero near the start (common practice: a few
#: hundredths of a mL): cumulative titrant readings down to minus this much are data; lower
#: ones are refused as implausible [L for volume, mol for amount].
TITRANT_TARE = {"volume": 0.5e-3, "amount": 0.5e-3}


def _tare_minimum(cols, key: str) -> float:
    """Lowest accepted titrant reading of column ``key`` in the column's own unit."""
    unit = cols.unit(key)
    return -TITRANT_TARE[key] / (unit.factor if unit else 1.0)


def _dose_amounts(cols: SheetColumns, c: ProblemCollector, runs, species, amount: np.ndarray,
                  molar_masses: dict[str, float], initial: dict[str, dict[str, float]],
                  substrate: str | None) -> np.ndarray:
    """Dosed amounts [mol] from a mass column [g] (divided by each species' molar mass) or an
    equivalents column (times the run's initial amount of the substrate); other columns as they are."""
    unit = cols.unit("amount")
    if unit is None or unit.dimension not in ("mass", "equivalents"):
        return amount
    t = cols.table
    i = cols.index("amount")
    out = np.full(amount.shape, np.nan)
    if unit.dimension == "equivalents" and substrate is None:
        c.error("equivalents need the run's initial amount of the substrate, and the Runs sheet has no "
                "'initial' column", t.location(1, i), t.headers[i],
                "an 'initial <substrate> [mmol]' column in the Runs sheet (its first 'initial' column names "
                "the substrate), or an amount unit such as [mmol]", code="missing_column")
        return out
    for k, row in enumerate(t.row_numbers.tolist()):
        if not (np.isfinite(amount[k]) and species[k] and runs[k] in initial):
            continue
        loc = t.location(row, i)
        if unit.dimension == "mass":
            per_gram = moles_per_gram(species[k], molar_masses, loc, c, t.rows[k][i])
            out[k] = np.nan if per_gram is None else amount[k] * per_gram
            continue
        start = initial[runs[k]].get(substrate)
        if not start:
            c.error(f"equivalents need the run's initial amount of the substrate {substrate}", loc, t.rows[k][i],
                    f"an initial amount of {substrate} for run {runs[k]} in the Runs sheet, or an amount unit "
                    "in this column's header", code="missing_value")
            continue
        out[k] = amount[k] * start
    return out


def read_dosing(cols: SheetColumns, c: ProblemCollector, known: dict[str, int],
                molar_masses: dict[str, float] | None = None, initial: dict[str, dict[str, float]] | None = None,
                substrate: str | None = None) -> dict[str, tuple[tuple[Dose, int], ...]]:
    """Doses per run, each with its spreadsheet row.

    Parameters
    ----------
    molar_masses
        Molar mass [g/mol] per molecule (Compounds sheet), for an amount column in a mass unit.
    initial
        Initial amounts [mol] per run and species (Runs sheet), for an amount column in equivalents.
    substrate
        The species whose initial amount one equivalent is (the first 'initial' column of the Runs sheet).
    """
    t = cols.table
    runs = run_column(cols, c, known)
    species = column_texts(cols, "species")
    amount = column_numbers(cols, "amount", c, "amount", minimum=0.0, blank_ok=False)
    amount = _dose_amounts(cols, c, runs, species, amount, molar_masses or {}, initial or {}, substrate)
    start = column_numbers(cols, "start", c, "start time", minimum=0.0, blank_ok=False)
    end = column_numbers(cols, "end", c, "end time", minimum=0.0)
    volume = column_numbers(cols, "volume", c, "volume", minimum=0.0)
    out: dict[str, list[tuple[Dose, int]]] = {}
    for k, row in enumerate(t.row_numbers.tolist()):
        if runs[k] not in known:
            continue
        if not species[k]:
            c.error("species is missing", t.location(row, cols.index("species")), None,
                    "a molecule or ion name of the model", code="missing_value")
            continue
        if not (np.isfinite(amount[k]) and np.isfinite(start[k])):
            continue
        e = end[k] if np.isfinite(end[k]) else start[k]
        if e < start[k]:
            c.error("dose ends before it starts", t.location(row, cols.index("end")),
                    t.rows[k][cols.index("end")], "an end time >= the start time", code="out_of_range")
            continue
        dose = Dose(species[k], float(amount[k]), float(start[k]), float(e),
                    float(volume[k]) if np.isfinite(volume[k]) else 0.0)
        out.setdefault(runs[k], []).append((dose, row))
    return {k: tuple(v) for k, v in out.items()}


def read_probe(cols: SheetColumns, c: ProblemCollector, known: dict[str, int]) -> dict[str, dict]:
    t = cols.table
    runs = run_column(cols, c, known)
    time = column_numbers(cols, "time", c, "time", minimum=0.0, blank_ok=False)
    ph = column_numbers(cols, "ph", c, "pH", minimum=0.0, maximum=14.0)
    temp = column_numbers(cols, "temperature", c, "temperature")
    if np.any(temp <= 0):
        k = int(np.flatnonzero(temp <= 0)[0])
        c.error("temperature is below absolute zero", t.location(int(t.row_numbers[k]), cols.index("temperature")),
                t.rows[k][cols.index("temperature")], "a temperature > 0 K", code="out_of_range")
    out: dict[str, dict] = {}
    for run, idx in group_rows(runs).items():
        if run not in known:
            continue
        idx = idx[np.isfinite(time[idx])]
        entry: dict[str, TimeSeries] = {}
        for key, arr in (("ph", ph), ("temperature", temp)):
            sel = idx[np.isfinite(arr[idx])]
            if sel.size:
                entry[key] = TimeSeries(time[sel], arr[sel], t.row_numbers[sel])
        out[run] = entry
    return out


def read_titrant(cols: SheetColumns, c: ProblemCollector, known: dict[str, int],
                  concentration: dict[str, float | None]) -> dict[str, TitrantLog]:
    t = cols.table
    if cols.index("volume") is None and cols.index("amount") is None:
        c.error("required column is missing", Location(file=t.file, sheet=t.sheet, row=1,
                                                       column="titrant volume [mL] or titrant amount [mmol]"),
                None, "a cumulative titrant volume or amount column", code="missing_column")
        return {}
    runs = run_column(cols, c, known)
    time = column_numbers(cols, "time", c, "time", minimum=0.0, blank_ok=False)
    volume = column_numbers(cols, "volume", c, "titrant volume", minimum=_tare_minimum(cols, "volume"))
    amount = column_numbers(cols, "amount", c, "titrant amount", minimum=_tare_minimum(cols, "amount"))
    out: dict[str, TitrantLog] = {}
    for run, idx in group_rows(runs).items():
        if run not in known:
            continue
        idx = idx[np.isfinite(time[idx])]
        vol = volume[idx]
        amt = amount[idx].copy()
        need = ~np.isfinite(amt) & np.isfinite(vol)
        if need.any():
            conc = concentration.get(run)
            if conc is None:
                k = int(idx[np.flatnonzero(need)[0]])
                c.error("titrant volume given but the run has no titrant concentration",
                        t.location(int(t.row_numbers[k]), cols.index("volume")), t.rows[k][cols.index("volume")],
                        "a titrant concentration in the Runs sheet, or a titrant amount column",
                        code="missing_value")
                continue
            amt[need] = vol[need] * conc
        keep = np.isfinite(amt)
        out[run] = TitrantLog(time[idx][keep], amt[keep], t.row_numbers[idx][keep],
                              vol[keep] if np.isfinite(vol).any() else None)
    return out
