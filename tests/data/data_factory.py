"""An invented campaign built in code, for round-trip and error tests.

Invented scenario (not a real compound): substrate "S" with two amine sites,
reagent "E" (an anhydride), mono-products "P1" and "P2", double product
"P12", released acid "A".  All numbers are made up.
"""

from __future__ import annotations

import numpy as np

from speciakin.chemistry.model import Dose, PhControl, Run, TemperatureProfile, Withdrawal
from speciakin.data.campaign import (Campaign, CampaignRun, Compound, HplcData, TimeSeries, TitrantLog,
                                     basis_of)

COMPOUNDS = (
    Compound("S-peak", "S", 1.0, 214.3, 0.05, 1.0),
    Compound("P1-peak", "P1", 1.25, 256.3, 0.05, 1.0),
    Compound("P2-peak", "P2", 0.8, 256.3, 0.05, 1.0),
    Compound("P12-peak", "P12", 1.1, 298.4, 0.05, 1.0),
)


def _hplc(times_min, fractions, kind, censor_below=None, scale=1.0):
    """One value per compound per time; fractions rows sum to 1."""
    rows_t, comp, mol, kinds, val, cens, loq, rrf = [], [], [], [], [], [], [], []
    for t, fr in zip(times_min, fractions):
        for c, x in zip(COMPOUNDS, fr):
            rows_t.append(t * 60.0)
            comp.append(c.name)
            mol.append(c.molecule)
            kinds.append(kind)
            if kind == "area_percent":
                v = 100.0 * x
            else:
                v = x * scale
            censored = censor_below is not None and v < censor_below
            val.append(np.nan if censored else v)
            cens.append(censored)
            loq.append(censor_below if censored else c.loq)
            rrf.append(c.rrf)
    n = len(rows_t)
    kind_arr = np.array(kinds, dtype=object)
    return HplcData(np.array(rows_t), np.array(comp, dtype=object), np.array(mol, dtype=object), kind_arr,
                    np.array(val), np.array(cens), np.array(loq), np.array(rrf), np.arange(2, n + 2),
                    basis_of(kind_arr))


def _fractions(times_min, rate):
    s = np.exp(-rate * np.asarray(times_min, float))
    p1 = 0.7 * (1 - s)
    p2 = 0.25 * (1 - s)
    p12 = 1 - s - p1 - p2
    return np.column_stack([s, p1, p2, p12])


def build_campaign() -> Campaign:
    """Three runs: held (area%, titrant log), logged (area%, 1-min pH log), free (concentrations)."""
    t1 = [0.0, 5.0, 15.0, 30.0, 60.0, 120.0]
    h1 = _hplc(t1, _fractions(t1, 0.03), "area_percent", censor_below=0.04)
    r1 = Run("R01", {"S": 0.010, "Na+": 0.0005}, 0.050, TemperatureProfile((0.0,), (293.15,)),
             PhControl("held", 8.2, "Na+", 1.0), 7200.0,
             doses=(Dose("E", 0.011, 0.0, 1800.0, 0.005),),
             withdrawals=tuple(Withdrawal(float(t), 0.0005) for t in np.unique(h1.time)), note="invented run")
    ttime = np.arange(0.0, 7201.0, 600.0)
    tit = TitrantLog(ttime, 0.011 * (1 - np.exp(-ttime / 1500.0)), np.arange(2, 2 + ttime.size),
                     0.011 * (1 - np.exp(-ttime / 1500.0)) / 1.0)
    c1 = CampaignRun(r1, h1, tit, None, None)

    t2 = [0.0, 10.0, 20.0, 40.0, 80.0]
    h2 = _hplc(t2, _fractions(t2, 0.02), "area_percent")
    log_t = np.arange(0.0, 4800.0 + 1, 60.0)
    log_ph = 7.0 + 0.3 * np.exp(-log_t / 2000.0)
    log_temp = 298.15 + 0.5 * np.sin(log_t / 1000.0)
    r2 = Run("R02", {"S": 0.012, "E": 0.013}, 0.060, TemperatureProfile(tuple(log_t), tuple(log_temp)),
             PhControl("logged", None, log_times=tuple(log_t), log_ph=tuple(log_ph)), 4800.0)
    c2 = CampaignRun(r2, h2, None, TimeSeries(log_t, log_ph, np.arange(2, 2 + log_t.size)),
                     TimeSeries(log_t, log_temp, np.arange(2, 2 + log_t.size)))

    t3 = [0.0, 30.0, 90.0]
    h3 = _hplc(t3, _fractions(t3, 0.01), "concentration", scale=0.2)
    r3 = Run("R03", {"S": 0.010, "E": 0.010, "A": 0.001}, 0.050, TemperatureProfile((0.0,), (283.15,)),
             PhControl("free"), 5400.0)
    c3 = CampaignRun(r3, h3, None, None, None)
    return Campaign((c1, c2, c3), COMPOUNDS, source="built in code", basis="mixed")


# ----------------------------------------------------------- CSV editing helpers
import csv  # noqa: E402
from pathlib import Path  # noqa: E402


def read_csv(folder: Path, name: str) -> list[list[str]]:
    with open(Path(folder) / name, newline="", encoding="utf-8") as fh:
        return [row for row in csv.reader(fh)]


def write_csv(folder: Path, name: str, rows: list[list[str]]) -> None:
    with open(Path(folder) / name, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, lineterminator="\n").writerows(rows)


def edit(folder: Path, name: str, row: int, header: str, value: str) -> None:
    """Set the cell at spreadsheet ``row`` (header = 1) under ``header``."""
    rows = read_csv(folder, name)
    col = rows[0].index(header)
    rows[row - 1][col] = value
    write_csv(folder, name, rows)


def rename_header(folder: Path, name: str, old: str, new: str) -> None:
    rows = read_csv(folder, name)
    rows[0][rows[0].index(old)] = new
    write_csv(folder, name, rows)


def drop_column(folder: Path, name: str, header: str) -> None:
    rows = read_csv(folder, name)
    col = rows[0].index(header)
    write_csv(folder, name, [r[:col] + r[col + 1:] for r in rows])


def delete_rows(folder: Path, name: str, first: int, last: int) -> None:
    """Delete spreadsheet rows ``first``..``last`` inclusive."""
    rows = read_csv(folder, name)
    write_csv(folder, name, rows[:first - 1] + rows[last:])


def csv_campaign(folder: Path) -> Path:
    """Write the invented campaign as a CSV folder and return it."""
    from speciakin.data import write_campaign

    target = Path(folder) / "csv"
    write_campaign(build_campaign(), target)
    return target
