"""The small INVENTED example campaign of ``speciakin new DIR --example``.

The fictional diamine "KV-5113" and "lovic anhydride" (``data/example/model.toml``)
are acylated in three held-pH runs.  The workbook is made on the spot: the runs
are simulated with the "true" rate constants of :data:`TRUTH` (not the model
file's starting guesses), noise is added with a fixed seed, and the campaign
is written in the template layout.  Every number is invented and labelled so.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from speciakin.chemistry.model import Dose, PhControl, Run, TemperatureProfile, Withdrawal
from speciakin.data._files import write_bytes_atomically
from speciakin.data.campaign import Campaign, CampaignRun, Compound, HplcData, TimeSeries, TitrantLog

__all__ = ["EXAMPLE_FILES", "TRUTH", "SEED", "example_campaign", "example_source", "new_example"]

#: Files copied from ``data/example/`` next to the generated workbook.
EXAMPLE_FILES = ("model.toml", "process.toml")
#: The invented true values the data are simulated with (log10 k in L/(mol*s)).
TRUTH = {"log10k[acylation_aryl]": np.log10(2.5), "log10k[acylation_alkyl]": np.log10(400.0)}
#: Seed of the noise.
SEED = 5113
_MIN, _ML, _MMOL = 60.0, 1e-3, 1e-3
#: (HPLC name, model molecule, RRF) of the invented HPLC method.
_COMPOUNDS = (("KV-5113", "SUB", 1.0), ("N-aryl amide", "ARYL_AMIDE", 1.2), ("N-alkyl amide", "ALKYL_AMIDE", 1.1))
_SAMPLES_MIN = (5, 10, 20, 30, 45, 60)
_SET_POINTS = (4.5, 6.0, 7.5)
#: HPLC noise of each peak before the area% of an injection are closed to 100 %: absolute [area%]
#: and relative (common practice for main peaks: 1-2 %), as the model file's error_model states it.
_HPLC_SD = (0.1, 0.02)
#: Titrant-log noise: absolute [mL of the 1 M titrant] and relative, as the model file's error_model
#: states them (titrant_absolute = 3e-6 mol, titrant_relative = 0.005), so the fit finds the scatter
#: it was told to expect.
_TITRANT_SD = (0.003, 0.005)
_LOQ = 0.05  # [area%]


def example_source() -> Path:
    """Folder of the example's hand-written model and process files."""
    return Path(__file__).parent / "example"


def _runs() -> list[Run]:
    runs = []
    for i, ph in enumerate(_SET_POINTS, start=1):
        times = [t * _MIN for t in _SAMPLES_MIN]
        runs.append(Run(
            name=f"E{i:02d}-pH{ph:.1f}", charges={"SUB": 2.0 * _MMOL, "Cl-": 4.0 * _MMOL}, volume=40.0 * _ML,
            temperature=TemperatureProfile((0.0,), (298.15,)),
            ph=PhControl("held", ph, "Na+", 1.0), end_time=60.0 * _MIN,
            doses=(Dose("REA", 2.4 * _MMOL, 0.0, 15.0 * _MIN, 2.0 * _ML),),
            withdrawals=tuple(Withdrawal(t, 0.2 * _ML) for t in times),
            note=f"INVENTED example run: pH held at {ph:.1f} with 1 M NaOH; substrate as dihydrochloride"))
    return runs


def example_campaign(model, seed: int = SEED) -> Campaign:
    """The invented example campaign simulated from ``model`` (the example's
    model file) at :data:`TRUTH`, with seeded noise.

    Parameters
    ----------
    model
        :class:`speciakin.chemistry.model.Model` read from ``data/example/model.toml``.
    seed
        Seed of the HPLC, pH and titrant noise.

    Returns
    -------
    Campaign
    """
    from speciakin.simulation.api import simulate
    from speciakin.simulation.compile import compile_model

    compiled = compile_model(model)
    q = compiled.nominal.copy()
    for name, value in TRUTH.items():
        q[list(compiled.quantity_names).index(name)] = value
    rng = np.random.default_rng(seed)
    rrf = np.array([c[2] for c in _COMPOUNDS])
    compounds = tuple(Compound(n, m, r, loq=_LOQ, substrate_units=1.0) for n, m, r in _COMPOUNDS)
    out = []
    for run in _runs():
        t = np.array([w.time for w in run.withdrawals])
        res = simulate(compiled, run, times=t, q=q)
        signal = np.column_stack([res.amount(c[1]) for c in _COMPOUNDS]) * rrf
        y = 100.0 * signal / signal.sum(axis=1, keepdims=True)  # area% from amounts x RRF
        y = np.clip(y + rng.normal(0.0, 1.0, y.shape) * np.hypot(_HPLC_SD[0], _HPLC_SD[1] * y), 0.0, None)
        y = np.round(100.0 * y / y.sum(axis=1, keepdims=True), 2)  # area% of one injection sum to 100
        censored = y < _LOQ
        n_s, n_c = y.shape
        hplc = HplcData(time=np.repeat(t, n_c), compound=np.array([c[0] for c in _COMPOUNDS] * n_s, dtype=object),
                        molecule=np.array([c[1] for c in _COMPOUNDS] * n_s, dtype=object),
                        kind=np.array(["area_percent"] * (n_s * n_c), dtype=object),
                        value=np.where(censored, np.nan, y).ravel(), censored=censored.ravel(),
                        loq=np.full(n_s * n_c, np.nan), rrf=np.tile(rrf, n_s), rows=np.zeros(n_s * n_c, np.int64),
                        basis="area_percent")
        log_t = np.arange(0.0, run.end_time + 1.0, 2.0 * _MIN)
        logs = simulate(compiled, run, times=log_t, q=q)
        rows = np.zeros(log_t.size, np.int64)
        ph = np.round(run.ph.setpoint + rng.normal(0.0, 0.015, log_t.size), 2)
        volume_ml = logs.titrant / 1.0 / _ML
        volume_ml += rng.normal(0.0, 1.0, log_t.size) * np.hypot(_TITRANT_SD[0], _TITRANT_SD[1] * volume_ml)
        volume_ml = np.maximum(np.round(volume_ml, 3), 0.0)
        temp = TimeSeries(log_t.copy(), np.full(log_t.size, 298.15), rows)  # 25.0 C throughout
        out.append(CampaignRun(run, hplc, TitrantLog(log_t.copy(), np.full(log_t.size, np.nan), rows,
                                                      volume_ml * _ML),
                               TimeSeries(log_t.copy(), ph, rows), temp))
    return Campaign(runs=tuple(out), compounds=compounds, basis="area_percent")


_EXAMPLE_README = """# INVENTED example campaign

Everything in this folder is invented for practice: "KV-5113" is a fictional diamine and
"lovic anhydride" a fictional acylating agent. `campaign.xlsx` holds three runs simulated
from `model.toml` with other ("true") rate constants and seeded noise; they are not
measurements. Do not use these numbers for any real process.

Try:

1. `speciakin check {name}`
2. `speciakin look {name}` (each run's raw data drawn into `look/`)
3. `speciakin run {name} --quick` (a provisional first look in well under a minute
   once the simulation kernel is compiled), then `speciakin run {name}` for the full job.

`speciakin web`, started in the folder that holds this one, does the same on a local page.
"""


def new_example(folder: str | Path) -> list[Path]:
    """Create ``folder`` with the INVENTED example campaign: its model and
    process files, a workbook simulated from them (:func:`example_campaign`)
    and a README.  Returns the files written.

    Raises
    ------
    DataError
        When ``folder`` exists and is not empty.
    """
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data.templates import WORKBOOK_NAME, new_folder
    from speciakin.data.writer import write_campaign

    p = new_folder(folder)
    written = []
    for name in EXAMPLE_FILES:
        write_bytes_atomically(p / name, (example_source() / name).read_bytes())
        written.append(p / name)
    written += write_campaign(example_campaign(load_model(p / "model.toml")), p / WORKBOOK_NAME)
    write_bytes_atomically(p / "README.md", _EXAMPLE_README.format(name=str(folder)).encode("utf-8"))
    return written + [p / "README.md"]
