#!/usr/bin/env python
"""Generate the bundled INVENTED demo campaign from known true parameters.

Usage::

    python scripts/make_demo_campaign.py [--out DIR] [--seed N]

Everything here is invented: the aminophenol "QX-2209", "quessic anhydride"
and "quessic acid" are fictional, and so are every run and every number.

What it does
------------
1. Reads the demo model file (``data_templates/demo/model.toml``; it states
   aqueous pKa values and rounded first-guess rate constants) and substitutes
   the true values of :data:`TRUTH` by quantity name (``Quantity.name``).
2. Simulates six lab runs (:func:`lab_runs`): pH held at 4.0, 5.5, 7.0 and
   8.5 with 1 M NaOH, one run whose logged pH drifts from 6.0 to 5.3, and one
   free-pH semi-batch run.
3. Turns the true amounts into HPLC area% with relative response factors,
   adds noise (:data:`NOISE`, seeded :func:`numpy.random.default_rng`) and
   reports values below the LOQ as "<LOQ"; adds noisy pH, temperature and
   titrant logs.
4. Writes ``campaign.xlsx`` (deterministic bytes), ``truth.json`` (true
   parameters, noise model, noise-free observations) and ``README.md`` into
   the output folder, and copies ``model.toml`` and ``process.toml`` there.
   Without ``--out`` it writes ``data_templates/demo/`` and mirrors the same
   files into ``src/speciakin/demo_data/`` (shipped with the package).
   Run as a script it runs itself in the pinned instruction set of
   ``tests/pinned_numbers.py``, so that the files are the same to the byte on
   any x86-64 machine.

Noise model
-----------
HPLC area%: ``y_obs = y_true + N(0, sqrt(a^2 + (r*y_true)^2))`` with
a = 0.1 area% and r = 0.02 (common practice: 1-2 % relative precision for
main peaks, an absolute floor near the LOQ), rounded to 0.01 area%; values
below the LOQ (0.05 area%) are written "<LOQ". Area% values are not
renormalised after the noise. pH log: true pH + N(0, 0.015), rounded to
0.01. Temperature log (every 5 min): the true vessel temperature rounded to 0.1 C (the
rounded readings are the profile the truth is simulated with, so the import
reproduces it). Titrant log (cumulative volume of 1 M NaOH, counter zeroed
after the initial pH adjustment): true volume + N(0, sqrt(b^2 + (s*V)^2))
with b = 0.002 mL and s = 0.005, independent per reading, rounded to
0.001 mL and clipped at 0 (readings may therefore dip slightly; no
titrant-concentration error is simulated).
"""

from __future__ import annotations

import argparse
import io
import json
import math
import re
import shutil
import sys
import zipfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT / "src") not in sys.path:
    sys.path.insert(0, str(ROOT / "src"))

from speciakin.chemistry.model import Dose, PhControl, Run, TemperatureProfile, Withdrawal  # noqa: E402
from speciakin.chemistry.modelfile import load_model  # noqa: E402
from speciakin.cli._common import atomic_write_bytes, atomic_write_text  # noqa: E402
from speciakin.data.campaign import Campaign, CampaignRun, Compound, HplcData, TimeSeries, TitrantLog  # noqa: E402
from speciakin.data.writer import write_campaign  # noqa: E402
from speciakin.simulation.api import simulate  # noqa: E402
from speciakin.simulation.compile import compile_model  # noqa: E402

#: Folder of the hand-written sources (model.toml, process.toml) and default output.
SOURCE_DIR = ROOT / "data_templates" / "demo"
#: Package copy of the demo (shipped with the wheel).
PACKAGE_DIR = ROOT / "src" / "speciakin" / "demo_data"
#: Documented default seed.
SEED = 20261202
#: Files the generator writes or copies.
WORKBOOK = "campaign.xlsx"
TRUTH_FILE = "truth.json"
COPIED = ("model.toml", "process.toml")

#: True pKa shifts of the medium (water/THF 70:30) from the aqueous values
#: written in model.toml [pK units] (invented).
TRUE_PKA_SHIFTS = {"pKa[S.N_alkyl]": -0.35, "pKa[S.N_aryl]": -0.45}

#: True values by quantity name, in internal units (pKa absolute; rate
#: constants log10 of [L/(mol*s)] or [1/s]).  Every other quantity keeps its
#: model-file value.  Invented numbers.
TRUTH = {
    "pKa[S.N_alkyl]": 9.6 + TRUE_PKA_SHIFTS["pKa[S.N_alkyl]"],
    "pKa[S.N_aryl]": 4.9 + TRUE_PKA_SHIFTS["pKa[S.N_aryl]"],
    "log10k[acylation_aryl]": math.log10(0.3),
    "log10k[acylation_alkyl]": math.log10(10.0),
    "log10k[double_from_aryl]": math.log10(2.0),
    "log10k[double_from_alkyl]": math.log10(0.2),
    "log10k[hydrolysis_water_ANH]": math.log10(5e-4),
    "log10k[hydrolysis_hydroxide_ANH]": math.log10(40.0),
}

#: Noise model (see the module docstring).
NOISE = {
    "hplc_absolute_area_percent": 0.1,
    "hplc_relative": 0.02,
    "hplc_decimals": 2,
    "loq_area_percent": 0.05,
    "ph_sd": 0.015,
    "ph_decimals": 2,
    "temperature_decimals": 1,
    "titrant_relative_sd": 0.005,
    "titrant_absolute_sd_mL": 0.002,
    "titrant_decimals_mL": 3,
}

#: HPLC compounds: (peak name, model molecule, RRF) - invented method.
COMPOUNDS = (
    ("QX-2209", "S", 1.00),
    ("QX-2209 N-aryl amide", "P_aryl", 1.25),
    ("QX-2209 N-alkyl amide", "P_alkyl", 0.85),
    ("QX-2209 diamide", "P_double", 1.10),
)

MIN = 60.0
ML = 1e-3
MMOL = 1e-3
SAMPLE_TIMES_MIN = (5, 10, 15, 20, 30, 45, 60, 90, 120, 150, 180)
SAMPLE_VOLUME = 0.2 * ML
TITRANT_CONCENTRATION = 1.0  # [mol/L] NaOH
TEMPERATURE_LOG_INTERVAL = 5.0 * MIN  # [s]; pH and titrant are logged every minute


def _run_designs() -> list[dict]:
    """The six invented lab runs (settings before any noise)."""
    common = {"substrate": 5.0 * MMOL, "volume": 50.0 * ML, "reagent": 6.0 * MMOL, "feed_volume": 3.0 * ML}
    designs = []
    for ph in (4.0, 5.5, 7.0, 8.5):
        designs.append(dict(common, name=f"R{len(designs) + 1:02d}-pH{ph:.1f}", mode="held", setpoint=ph,
                            chloride=10.0 * MMOL, dosing=30.0 * MIN, end=180.0 * MIN, temperature_c=22.0,
                            note=f"INVENTED run: pH held at {ph:.1f} with 1 M NaOH; substrate as dihydrochloride"))
    designs.append(dict(common, name="R05-drift", mode="logged", setpoint=None, chloride=10.0 * MMOL,
                        dosing=25.0 * MIN, end=150.0 * MIN, temperature_c=25.0,
                        note="INVENTED run: pH adjusted by hand, logged; drifts from 6.0 to 5.3"))
    designs.append(dict(common, name="R06-free", mode="free", setpoint=None, chloride=5.0 * MMOL,
                        dosing=30.0 * MIN, end=180.0 * MIN, temperature_c=20.0,
                        note="INVENTED run: no pH control; substrate as monohydrochloride"))
    return designs


def true_logged_ph(t: np.ndarray) -> np.ndarray:
    """True pH of the drifting run [-] at times ``t`` [s]: 6.0 falling
    smoothly to 5.3 at 150 min (invented)."""
    tau = 50.0 * MIN
    return 6.0 - 0.7 * (1.0 - np.exp(-t / tau)) / (1.0 - math.exp(-150.0 * MIN / tau))


def true_temperature_c(t: np.ndarray, base: float, dosing: float) -> np.ndarray:
    """Vessel temperature [C]: a small exotherm (+0.8 C) during the reagent
    feed that relaxes with a 15 min time constant afterwards (invented)."""
    rise = 0.8 * np.clip(t / dosing, 0.0, 1.0)
    decay = np.exp(-np.clip(t - dosing, 0.0, None) / (15.0 * MIN))
    return base + rise * decay


def lab_runs() -> list[tuple[Run, np.ndarray]]:
    """True recipes of the lab runs and their 1-min pH/titrant log times [s]
    (temperature readings every :data:`TEMPERATURE_LOG_INTERVAL`)."""
    out = []
    for d in _run_designs():
        log_t = np.arange(0.0, d["end"] + 0.5 * MIN, MIN)
        temp_t = np.arange(0.0, d["end"] + 0.5 * MIN, TEMPERATURE_LOG_INTERVAL)
        temp_c = np.round(true_temperature_c(temp_t, d["temperature_c"], d["dosing"]), NOISE["temperature_decimals"])
        temperature = TemperatureProfile(tuple(temp_t.tolist()), tuple((temp_c + 273.15).tolist()))
        if d["mode"] == "held":
            control = PhControl("held", d["setpoint"], "Na+", TITRANT_CONCENTRATION)
        elif d["mode"] == "logged":
            control = PhControl("logged", None, log_times=tuple(log_t.tolist()),
                                log_ph=tuple(true_logged_ph(log_t).tolist()))
        else:
            control = PhControl("free", None)
        times = [t * MIN for t in SAMPLE_TIMES_MIN if t * MIN <= d["end"]]
        run = Run(name=d["name"], charges={"S": d["substrate"], "Cl-": d["chloride"]}, volume=d["volume"],
                  temperature=temperature, ph=control, end_time=d["end"],
                  doses=(Dose("ANH", d["reagent"], 0.0, d["dosing"], d["feed_volume"]),),
                  withdrawals=tuple(Withdrawal(t, SAMPLE_VOLUME) for t in times), note=d["note"])
        out.append((run, log_t))
    return out


def true_parameters(model) -> tuple[object, np.ndarray]:
    """Compiled model and the true parameter vector (model values with
    :data:`TRUTH` substituted by name).

    Raises
    ------
    KeyError
        When a name of :data:`TRUTH` is not a quantity of the model.
    """
    compiled = compile_model(model)
    names = list(compiled.quantity_names)
    unknown = [n for n in TRUTH if n not in names]
    if unknown:
        raise KeyError(f"TRUTH names not in the model: {', '.join(unknown)}")
    q = compiled.nominal.copy()
    for name, value in TRUTH.items():
        q[names.index(name)] = value
    return compiled, q


def area_percent(amounts: np.ndarray, rrf: np.ndarray) -> np.ndarray:
    """True area% of each compound (columns) from amounts [mol]:
    ``100 * n_i * RRF_i / sum_j n_j * RRF_j`` (inverse of the RRF correction,
    see :func:`speciakin.data.campaign.mole_fractions_from_signals`).

    Parameters
    ----------
    amounts
        (n_samples, n_compounds) amounts [mol].
    rrf
        Relative response factors [-].

    Returns
    -------
    numpy.ndarray
        (n_samples, n_compounds) area% [-], each row summing to 100.

    References
    ----------
    Snyder, Kirkland and Dolan, "Introduction to Modern Liquid
    Chromatography", 3rd ed., Wiley 2010, ch. 11 (quantitation with response
    factors); ICH Q2(R2) (2023).
    """
    signal = amounts * rrf
    return 100.0 * signal / signal.sum(axis=1, keepdims=True)


def simulate_truth(model=None) -> dict:
    """Noise-free observations of every lab run at the true parameters.

    Returns
    -------
    dict
        run name -> {"run": Run, "log_times" [s], "sample_times" [s],
        "area_percent" (n_samples, n_compounds), "ph_log", "titrant_log" [mol],
        "ph_samples"}.
    """
    model = model if model is not None else load_model(SOURCE_DIR / "model.toml")
    compiled, q = true_parameters(model)
    rrf = np.array([c[2] for c in COMPOUNDS])
    out = {}
    for run, log_t in lab_runs():
        sample_t = np.array([w.time for w in run.withdrawals])
        res = simulate(compiled, run, times=sample_t, q=q, rtol=1e-8, atol=1e-12)
        amounts = np.column_stack([res.amount(c[1]) for c in COMPOUNDS])
        log_res = simulate(compiled, run, times=log_t, q=q, rtol=1e-8, atol=1e-12)
        out[run.name] = {"run": run, "log_times": log_t, "sample_times": sample_t,
                         "area_percent": area_percent(amounts, rrf), "ph_log": log_res.ph,
                         "titrant_log": log_res.titrant, "ph_samples": res.ph}
    return out


def true_window(model=None) -> dict:
    """Where the planned process meets every specification with the TRUE
    parameters (no uncertainty): pH intervals at the planned equivalents and
    at each equivalents value of the process file's second factor.

    Returns
    -------
    dict
        {"ph_grid": [...], "planned_equivalents": x, "planned": [[low, high], ...],
        "by_equivalents": {"1.05": [[low, high], ...], ...}}; edges are
        interpolated half-way between a passing and a failing grid point.
    """
    from speciakin.decision.design import process_scan_arguments
    from speciakin.decision.outcomes import process_outcomes
    from speciakin.decision.process import load_process
    from speciakin.decision.runs import process_runs
    from speciakin.decision.specs import evaluate_specs
    from speciakin.decision.window import window_edges

    model = model if model is not None else load_model(SOURCE_DIR / "model.toml")
    process = load_process(SOURCE_DIR / "process.toml", model)
    compiled, q = true_parameters(model)
    scan = process_scan_arguments(process)
    grid = np.asarray(scan["ph_grid"], dtype=float)

    def intervals(factor):
        runs = process_runs(process, model, grid, factor)
        final = {m.name: np.empty(grid.size) for m in model.molecules}
        for i, run in enumerate(runs):
            res = simulate(compiled, run, times=[0.0, run.end_time], q=q, rtol=1e-8, atol=1e-12)
            for name in final:
                final[name][i] = res.amount(name)[-1]
        names, outcomes = process_outcomes(final, model, process)
        passed = evaluate_specs(outcomes, scan["specs"], names)
        return [[round(a, 3), round(b, 3)] for a, b in window_edges(grid, passed.astype(float), 0.5)]

    by_eq = {f"{x:.2f}": intervals(x) for x in scan.get("factor_grid", [])}
    return {"ph_grid": grid.tolist(), "planned_equivalents": process.equivalents,
            "planned": intervals(None), "by_equivalents": by_eq}


def _noisy_campaign(truth: dict, seed: int) -> Campaign:
    rng = np.random.default_rng(seed)
    a, r, loq = NOISE["hplc_absolute_area_percent"], NOISE["hplc_relative"], NOISE["loq_area_percent"]
    compounds = tuple(Compound(name, molecule, rrf, loq=loq, substrate_units=1.0)
                      for name, molecule, rrf in COMPOUNDS)
    runs = []
    for name, t in truth.items():
        run = t["run"]
        y = t["area_percent"]
        y_obs = np.round(y + rng.normal(0.0, 1.0, y.shape) * np.sqrt(a ** 2 + (r * y) ** 2),
                         NOISE["hplc_decimals"])
        censored = y_obs < loq
        n_s, n_c = y.shape
        hplc = HplcData(
            time=np.repeat(t["sample_times"], n_c),
            compound=np.array([c[0] for c in COMPOUNDS] * n_s, dtype=object),
            molecule=np.array([c[1] for c in COMPOUNDS] * n_s, dtype=object),
            kind=np.array(["area_percent"] * (n_s * n_c), dtype=object),
            value=np.where(censored, np.nan, y_obs).ravel(),
            censored=censored.ravel(),
            loq=np.full(n_s * n_c, np.nan),  # NaN: written as "<LOQ", the LOQ comes from the Compounds sheet
            rrf=np.tile([c[2] for c in COMPOUNDS], n_s),
            rows=np.zeros(n_s * n_c, np.int64), basis="area_percent")
        log_t = t["log_times"]
        rows = np.zeros(log_t.size, np.int64)
        if run.ph.mode == "logged":
            true_ph = np.array(run.ph.log_ph)
        elif run.ph.mode == "held":
            true_ph = np.full(log_t.size, run.ph.setpoint)
        else:
            true_ph = t["ph_log"]
        ph_obs = np.round(true_ph + rng.normal(0.0, NOISE["ph_sd"], log_t.size), NOISE["ph_decimals"])
        temp_t = np.array(run.temperature.times)
        temp_log = TimeSeries(temp_t, np.array(run.temperature.temperatures), np.zeros(temp_t.size, np.int64))
        titrant = None
        if run.ph.mode == "held":
            vol_ml = t["titrant_log"] / TITRANT_CONCENTRATION / ML
            sd = np.sqrt(NOISE["titrant_absolute_sd_mL"] ** 2 + (NOISE["titrant_relative_sd"] * vol_ml) ** 2)
            vol_ml = np.maximum(np.round(vol_ml + rng.normal(0.0, 1.0, log_t.size) * sd,
                                         NOISE["titrant_decimals_mL"]), 0.0)
            titrant = TitrantLog(log_t.copy(), np.full(log_t.size, np.nan), rows, vol_ml * ML)
        runs.append(CampaignRun(run, hplc, titrant, TimeSeries(log_t.copy(), ph_obs, rows), temp_log))
    return Campaign(runs=tuple(runs), compounds=compounds, basis="area_percent")


_FIXED_STAMP = "2026-01-01T00:00:00Z"


def deterministic_xlsx(data: bytes) -> bytes:
    """Rewrite an .xlsx (zip) with fixed entry dates and fixed document
    created/modified properties, so equal content gives equal bytes."""
    src = zipfile.ZipFile(io.BytesIO(data))
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            body = src.read(info.filename)
            if info.filename == "docProps/core.xml":
                text = body.decode("utf-8")
                for tag in ("created", "modified"):
                    text = re.sub(rf"(<dcterms:{tag}[^>]*>)[^<]*(</dcterms:{tag}>)",
                                  rf"\g<1>{_FIXED_STAMP}\g<2>", text)
                body = text.encode("utf-8")
            entry = zipfile.ZipInfo(info.filename, date_time=(2026, 1, 1, 0, 0, 0))
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            dst.writestr(entry, body)
    return buf.getvalue()


def _json_ready(truth: dict, seed: int, window: dict) -> dict:
    runs = {}
    for name, t in truth.items():
        runs[name] = {
            "sample_times_min": (t["sample_times"] / MIN).tolist(),
            "area_percent": {c[0]: t["area_percent"][:, j].tolist() for j, c in enumerate(COMPOUNDS)},
            "ph_at_samples": t["ph_samples"].tolist(),
            "log_times_min": (t["log_times"] / MIN).tolist(),
            "titrant_mL": (t["titrant_log"] / TITRANT_CONCENTRATION / ML).tolist()
            if t["run"].ph.mode == "held" else None,
            "ph_log": t["ph_log"].tolist(),
        }
    return {
        "label": "INVENTED demo data: fictional compounds, invented parameters and runs",
        "seed": seed,
        "parameters": dict(TRUTH),
        "pka_shifts": dict(TRUE_PKA_SHIFTS),
        "noise": dict(NOISE),
        "compounds": [{"compound": c[0], "molecule": c[1], "rrf": c[2]} for c in COMPOUNDS],
        "true_window": window,
        "noise_free": runs,
    }


def _readme(model, seed: int, window: dict) -> str:
    units = {q.name: q.unit for q in model.quantities()}
    nominal = {q.name: float(q.value) for q in model.quantities()}
    rows = []
    for name, value in TRUTH.items():
        start = nominal[name]
        if name.startswith("log10k"):
            unit = units[name].removeprefix("log10(").removesuffix(")")
            rows.append(f"| `{name}` | {10 ** start:.3g} {unit} | {10 ** value:.3g} {unit} | "
                        f"log10 k: {start:.3f} -> {value:.3f} |")
        else:
            rows.append(f"| `{name}` | {start:.2f} | {value:.2f} | true shift {TRUE_PKA_SHIFTS[name]:+.2f} |")
    runs = "\n".join(f"| {d['name']} | {d['mode']} | {d['setpoint'] if d['setpoint'] else '-'} | "
                     f"{d['temperature_c']:.0f} | {d['dosing'] / MIN:.0f} | {d['end'] / MIN:.0f} | {d['note']} |"
                     for d in _run_designs())
    compounds = "\n".join(f"| {c[0]} | {c[1]} | {c[2]:.2f} |" for c in COMPOUNDS)
    return f"""# Demo campaign (INVENTED)

**Everything in this folder is invented.** "QX-2209" is a fictional aminophenol,
"quessic anhydride" a fictional acylating agent and "quessic acid" its
fictional acid. The runs, the HPLC results and the logs were generated by
`scripts/make_demo_campaign.py` from known true parameters with seed {seed};
they are not measurements. Do not use these numbers for any real process.

## Scenario

QX-2209 carries an alkyl amine (aqueous pKa 9.6), an aryl amine (4.9) and a
phenol; the two amines interact (W = 0.4). Quessic anhydride acylates either
amine and releases one quessic acid (pKa 4.7); it also hydrolyses by a water
and a hydroxide path, releasing two. The N-aryl amide is the desired product:
at low pH the weaker base is the one that is free. The mono amides react again
to the diamide. The medium is water/THF 70:30, where the amine pKa values are
lower than the aqueous ones; `model.toml` states the aqueous values and fits
the shifts. At low pH the reaction is slow and the anhydride is lost to
hydrolysis (substrate remains); at high pH the alkyl amine competes and the
diamide grows: the window of the desired product is two-sided.

## Files

| file | what |
|---|---|
| `campaign.xlsx` | the campaign workbook (template layout): six lab runs, HPLC area%, probe and titrant logs |
| `model.toml` | the reaction model with starting values (aqueous pKa, rounded first-guess rate constants) |
| `process.toml` | the plant proposal, specifications and the pH x equivalents scan |
| `truth.json` | the true parameters, seed, noise model and noise-free observations |

Try: `speciakin check {{this folder}} --model {{this folder}}/model.toml`.

## True parameters (used to generate the data)

| quantity | model-file start | truth | note |
|---|---|---|---|
{chr(10).join(rows)}

With these true values the planned process (process.toml, {window['planned_equivalents']:.2f} eq)
meets every specification for {_intervals_text(window['planned'])} (grid step
{window['ph_grid'][1] - window['ph_grid'][0]:.2f}; no parameter uncertainty). By equivalents:
{chr(10).join(f"- {k} eq: {_intervals_text(v)}" for k, v in window['by_equivalents'].items())}

All other numbers (phenol pKa 10.5, product pKa values, W, enthalpies,
activation energies, acid pKa) are the model-file values.

## Runs (substrate 5.0 mmol in 50 mL, 6.0 mmol anhydride fed with 3 mL)

| run | pH mode | setpoint | T [C] | feed [min] | end [min] | note |
|---|---|---|---|---|---|---|
{runs}

Samples of 0.2 mL at {', '.join(str(t) for t in SAMPLE_TIMES_MIN)} min (until the run ends).
Held runs: the dihydrochloride is first brought to the setpoint; the titrant
counter is zeroed after that adjustment.

## HPLC method (invented)

| compound | model molecule | RRF |
|---|---|---|
{compounds}

LOQ {NOISE['loq_area_percent']} area% for every compound.

## Noise model

- HPLC area%: y_obs = y_true + N(0, sqrt(a^2 + (r*y_true)^2)), a = {NOISE['hplc_absolute_area_percent']} area%,
  r = {NOISE['hplc_relative']} (common practice: 1-2 % relative for main peaks), rounded to 0.01;
  below the LOQ written "<LOQ". Not renormalised to 100 %, so `speciakin check`
  may warn that the area% of a sample sum to slightly outside 100 +- 3: expected here.
- pH log (every minute): true pH + N(0, {NOISE['ph_sd']}), rounded to 0.01.
- Temperature log (every 5 min): the true vessel temperature (small exotherm
  during the feed) rounded to 0.1 C; the rounded log is the profile used for
  the truth.
- Titrant log (cumulative mL of 1 M NaOH): true V + N(0, sqrt(b^2 + (s*V)^2)) with
  b = {NOISE['titrant_absolute_sd_mL']} mL, s = {NOISE['titrant_relative_sd']}, independent per reading,
  rounded to 0.001 mL, clipped at 0. No titrant-concentration error is simulated.
- Random numbers: `numpy.random.default_rng({seed})`, drawn run by run in the order of the table.
"""


def _intervals_text(intervals) -> str:
    return ", ".join(f"pH {a:.2f} to {b:.2f}" for a, b in intervals) or "no pH passes"


def generate(out: Path, seed: int = SEED, mirror: Path | None = None) -> list[Path]:
    """Write the demo into ``out`` (and an identical copy into ``mirror``).

    Returns the files written.
    """
    out = Path(out)
    model = load_model(SOURCE_DIR / "model.toml")
    truth = simulate_truth(model)
    campaign = _noisy_campaign(truth, seed)
    window = true_window(model)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    targets = [out] + ([Path(mirror)] if mirror is not None else [])
    for target in targets:
        target.mkdir(parents=True, exist_ok=True)
        book = target / WORKBOOK
        write_campaign(campaign, book)
        atomic_write_bytes(book, deterministic_xlsx(book.read_bytes()))
        atomic_write_text(target / TRUTH_FILE, json.dumps(_json_ready(truth, seed, window), indent=1) + "\n")
        atomic_write_text(target / "README.md", _readme(model, seed, window))
        for name in COPIED:
            if (SOURCE_DIR / name).resolve() != (target / name).resolve():
                shutil.copyfile(SOURCE_DIR / name, target / name)
        for f in (WORKBOOK, TRUTH_FILE, "README.md") + COPIED:
            (target / f).chmod(0o644)
            written.append(target / f)
    return written


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Generate the INVENTED demo campaign from known true parameters.")
    parser.add_argument("--out", default=None,
                        help="output folder (default: data_templates/demo, mirrored into src/speciakin/demo_data)")
    parser.add_argument("--seed", type=int, default=SEED, help=f"random seed (default {SEED})")
    args = parser.parse_args(argv)
    if args.out is None:
        files = generate(SOURCE_DIR, args.seed, mirror=PACKAGE_DIR)
    else:
        files = generate(Path(args.out), args.seed)
    for f in files:
        print(f)
    return 0


if __name__ == "__main__":
    # the stored demo is of one instruction set (tests/pinned_numbers.py: compiled code differs in the last bits
    # from one CPU to another): run in it, so that the files come out the same on any x86-64 machine
    import os
    import subprocess

    sys.path.insert(0, str(ROOT / "tests"))
    from pinned_numbers import PINNED_MARK, pinned_environment

    pinned = pinned_environment()
    if pinned is not None and not os.environ.get(PINNED_MARK):
        raise SystemExit(subprocess.run([sys.executable, __file__, *sys.argv[1:]], env=pinned).returncode)
    raise SystemExit(main())
