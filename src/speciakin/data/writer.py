"""Write a :class:`~speciakin.data.campaign.Campaign` back into the template layout.

Used for round-trip tests and by demo generators: a campaign built in code
becomes a workbook (or CSV folder) that :func:`speciakin.data.load_campaign`
reads back to the same numbers.  Units written: time [min], volume [mL],
amount [mmol], temperature [C], concentration [mol/L].
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from speciakin import units
from speciakin.data.campaign import NOT_MODELLED, Campaign
from speciakin.data.sheets import INITIAL_PREFIX, SHEETS
from speciakin.data.templates import write_tables

__all__ = ["write_campaign"]

_KIND_WORD = {"area_percent": "area%", "area": "area", "concentration": "concentration"}


def _f(value: float | None, unit: str, dimension: str):
    if value is None or not np.isfinite(value):
        return None
    return float(units.from_internal(float(value), unit, dimension))


def _headers(key: str) -> list[str]:
    return [c.header for c in SHEETS[key].columns]


def write_campaign(campaign: Campaign, path: str | Path) -> list[Path]:
    """Write ``campaign`` as a workbook (path ends in .xlsx) or a CSV folder.

    Parameters
    ----------
    campaign
        The campaign to write.
    path
        ``something.xlsx`` for a workbook, otherwise a folder that receives
        one CSV file per sheet.

    Returns
    -------
    list of pathlib.Path
        Files written (atomically).
    """
    species = list(dict.fromkeys(s for r in campaign.runs for s in r.recipe.charges))
    run_rows, dose_rows, hplc_rows, probe_rows, titrant_rows = [], [], [], [], []
    for run in campaign.runs:
        r = run.recipe
        ph = r.ph
        constant_t = (r.temperature.temperatures[0] if len(r.temperature.times) == 1
                      and run.temperature_log is None else None)
        sample_volume = r.withdrawals[0].volume if r.withdrawals else None
        controlled = ph.mode in ("held", "logged")
        run_rows.append([
            r.name, ph.mode, ph.setpoint, ph.titrant, ph.titrant_concentration,
            ph.opposite_titrant, ph.opposite_titrant_concentration,
            # the default is written as a blank cell, which reads back as "computed"
            ph.start_adjustment if controlled and ph.start_adjustment != "computed" else None,
            ph.start_acid, None, ph.start_base, None,   # a given adjustment stays in the initial columns
            _f(constant_t, "C", "temperature"), _f(r.volume, "mL", "volume"), _f(r.end_time, "min", "time"),
            _f(sample_volume, "mL", "volume"), r.note or None,
        ] + [_f(r.charges.get(s), "mmol", "amount") for s in species])
        for d in r.doses:
            dose_rows.append([r.name, d.species, _f(d.amount, "mmol", "amount"), _f(d.start, "min", "time"),
                             _f(d.end, "min", "time"), _f(d.volume, "mL", "volume")])
        for h in (run.hplc, run.hplc.other):  # the peaks marked not modelled after the others
            for k in range(0 if h is None else len(h)):
                if h.censored[k]:
                    cell = f"<{float(h.loq[k])!r}" if np.isfinite(h.loq[k]) else "<LOQ"
                else:
                    cell = float(h.value[k])
                hplc_rows.append([r.name, _f(h.time[k], "min", "time"), _KIND_WORD[str(h.kind[k])],
                                  str(h.compound[k]), cell])
        ph_log, t_log = run.ph_log, run.temperature_log
        if ph_log is None and ph.mode == "logged" and ph.log_times:
            from speciakin.data.campaign import TimeSeries
            ph_log = TimeSeries(np.array(ph.log_times), np.array(ph.log_ph), np.zeros(len(ph.log_times), int))
        if t_log is None and len(r.temperature.times) > 1:
            from speciakin.data.campaign import TimeSeries
            t_log = TimeSeries(np.array(r.temperature.times), np.array(r.temperature.temperatures),
                               np.zeros(len(r.temperature.times), int))
        if ph_log is not None and t_log is not None and np.array_equal(ph_log.time, t_log.time):
            tmin = units.from_internal(1.0, "min", "time") * ph_log.time
            tc = t_log.value - 273.15
            probe_rows += [[r.name, float(a), float(b), float(c)] for a, b, c in zip(tmin, ph_log.value, tc)]
        else:
            if ph_log is not None:
                probe_rows += [[r.name, _f(a, "min", "time"), float(b), None]
                               for a, b in zip(ph_log.time, ph_log.value)]
            if t_log is not None:
                probe_rows += [[r.name, _f(a, "min", "time"), None, _f(b, "C", "temperature")]
                               for a, b in zip(t_log.time, t_log.value)]
        if run.titrant is not None:
            tl = run.titrant
            for k in range(tl.time.size):
                titrant_rows.append([r.name, _f(tl.time[k], "min", "time"),
                                     None if tl.volume is None else _f(tl.volume[k], "mL", "volume"),
                                     _f(tl.amount[k], "mmol", "amount")])
    compound_rows = [[c.name, c.molecule if c.modelled else NOT_MODELLED, c.rrf, c.molar_mass, c.loq,
                      c.substrate_units] for c in campaign.compounds + campaign.other_compounds]
    hplc_headers = ["run", "time [min]", "kind", "compound", "value"]  # concentrations in mol/L, the default
    tables = {
        "runs": (_headers("runs") + [f"{INITIAL_PREFIX}{s} [mmol]" for s in species], run_rows),
        "dosing": (_headers("dosing"), dose_rows),
        "compounds": (_headers("compounds"), compound_rows),
        "hplc": (hplc_headers, hplc_rows),
        "probe": (_headers("probe"), probe_rows),
        "titrant": (_headers("titrant"), titrant_rows),
    }
    return write_tables(tables, path)
