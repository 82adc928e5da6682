"""Import speed of a campaign whose probe log has 86,400 rows (1 Hz over 24 h).

Prints the time of ``speciakin.data.load_campaign`` for the workbook and the
CSV folder, and, measured side by side in the same run, the time pandas
(openpyxl engine / C parser) needs just to read the same probe-log sheet,
with the ratio.  Invented data.

Run:  .venv/bin/python benchmarks/bench_import.py [--rows 86400]
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

import numpy as np

from speciakin.chemistry.model import PhControl, Run, TemperatureProfile
from speciakin.data import load_campaign, write_campaign
from speciakin.data.campaign import Campaign, CampaignRun, Compound, HplcData, TimeSeries


def _campaign(rows: int) -> Campaign:
    t = np.arange(rows, dtype=float)                       # 1 s readings
    ph = 7.5 + 0.05 * np.sin(t / 600.0)
    temp = 298.15 + 0.2 * np.cos(t / 900.0)
    times = np.repeat([0.0, 3600.0, 7200.0], 2)
    hplc = HplcData(times, np.array(["S-peak", "P-peak"] * 3, dtype=object), np.array(["S", "P"] * 3, dtype=object),
                    np.array(["area_percent"] * 6, dtype=object), np.array([100.0, 0.0, 60.0, 40.0, 30.0, 70.0]),
                    np.zeros(6, bool), np.full(6, 0.05), np.ones(6), np.arange(2, 8), "area_percent")
    run = Run("L1", {"S": 0.01}, 0.05, TemperatureProfile(tuple(t), tuple(temp)),
              PhControl("logged", 7.5, log_times=tuple(t), log_ph=tuple(ph)), float(rows - 1))
    rows_idx = np.arange(2, rows + 2)
    return Campaign((CampaignRun(run, hplc, None, TimeSeries(t, ph, rows_idx), TimeSeries(t, temp, rows_idx)),),
                    (Compound("S-peak", "S"), Compound("P-peak", "P")))


def _best(fn, repeat: int) -> float:
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=86_400)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    import pandas as pd

    with tempfile.TemporaryDirectory() as tmp:
        book = Path(tmp) / "campaign.xlsx"
        folder = Path(tmp) / "csv"
        campaign = _campaign(args.rows)
        write_campaign(campaign, book)
        write_campaign(campaign, folder)
        loaded = load_campaign(book)
        assert len(loaded.run("L1").ph_log) == args.rows
        ours_xlsx = _best(lambda: load_campaign(book), args.repeat)
        pandas_xlsx = _best(lambda: pd.read_excel(book, sheet_name="Probe log", engine="openpyxl"), args.repeat)
        ours_csv = _best(lambda: load_campaign(folder), args.repeat)
        pandas_csv = _best(lambda: pd.read_csv(folder / "probe_log.csv"), args.repeat)
    print(f"probe log rows: {args.rows}")
    print(f"{'input':<8}{'load_campaign [s]':>20}{'pandas sheet only [s]':>24}{'ratio':>8}")
    print(f"{'xlsx':<8}{ours_xlsx:>20.3f}{pandas_xlsx:>24.3f}{ours_xlsx / pandas_xlsx:>8.2f}")
    print(f"{'csv':<8}{ours_csv:>20.3f}{pandas_csv:>24.3f}{ours_csv / pandas_csv:>8.2f}")


if __name__ == "__main__":
    main()
