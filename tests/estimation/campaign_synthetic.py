"""Synthetic campaigns built in code, for the campaign-fit tests and benchmark.

INVENTED: the small model below ("SK-301", a fictional diamine acylated by a
fictional anhydride) and every number in it are invented for testing; they
describe no real substance.

:func:`synthetic_campaign` simulates the runs of a model at known parameters
and turns the amounts into the observables a lab would report, with the error
model the objective documents (an absolute and a relative part):

    y_obs = y_true + N(0, sqrt(a^2 + (r * y_true)^2))

Area% of compound i: 100 n_i RRF_i / sum_j n_j RRF_j (response-factor correction,
Snyder, Kirkland and Dolan, "Introduction to Modern Liquid Chromatography", 3rd ed., 2010, ch. 11).
Values below the LOQ are reported censored ("<LOQ").  Held-pH runs also get a
titrant log with noise sd sqrt((0.005 max)^2 + (0.01 y)^2), the objective's
default titrant error model.
"""

from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from speciakin.chemistry.model import Model, Run
from speciakin.chemistry.modelfile import parse_model
from speciakin.data.campaign import Campaign, CampaignRun, Compound, HplcData, TitrantLog
from speciakin.simulation.api import simulate
from speciakin.simulation.compile import compile_model

__all__ = ["small_model_text", "small_model", "synthetic_campaign", "truth_vector", "SMALL_COMPOUNDS",
           "DOUBLE_COMPOUNDS", "SMALL_TRUTH", "SAMPLE_TIMES"]

#: Sampling times of every run [s] (8 samples over 2 h).
SAMPLE_TIMES = np.array([3.0, 6.0, 10.0, 15.0, 25.0, 40.0, 70.0, 120.0]) * 60.0

#: Compound name -> (model molecule, RRF) of the small model's HPLC method (invented).
SMALL_COMPOUNDS = {"SK-301": ("S", 1.0), "amide-a": ("PA", 1.25), "amide-b": ("PB", 0.85)}
#: The same method with the diamide peak (model comparison).
DOUBLE_COMPOUNDS = {**SMALL_COMPOUNDS, "diamide": ("PD", 1.1)}

#: True values (kernel scale: absolute pKa, log10 k) used to generate the data (invented).
SMALL_TRUTH = {"pKa[S.N_b]": 5.0, "log10k[acyl_a]": 1.0, "log10k[acyl_b]": 0.0}


def small_model_text(*, double: bool = False, fit_double: bool = True, fit_pka: bool = True,
                     fit_ka: bool = True, fit_kb: bool = True, fit_hydrolysis_oh: bool = False,
                     setpoints: Sequence[float] = (5.0, 7.0, 8.5), extra_fit: str = "") -> str:
    """TOML text of a small invented model: diamine S (N_a pKa 8.8, N_b pKa 5.2
    in the file; the data are made with N_b at 5.0), anhydride ANH acylating
    either amine, water/hydroxide hydrolysis, optional second acylation of
    amide PA at its remaining amine to the diamide PD (the molecule PD is
    always declared, so both variants accept the same campaign).  One held-pH
    run per setpoint."""

    def flag(on: bool) -> str:
        return "true" if on else "false"

    text = f"""
[model]
name = "sk301_{'double' if double else 'single'}"
description = "INVENTED test model: fictional diamine SK-301 and fictional anhydride"
reference_temperature = "25 C"
activity = "ideal"

[ions]
"Na+" = 1
"Cl-" = -1      # the acid that brings the free amine to its set point inside the start volume

[molecule.S]
role = "substrate"
moieties = {{ core = 1 }}

[[molecule.S.site]]
name = "N_a"
kind = "base"
pka = 8.8

[[molecule.S.site]]
name = "N_b"
kind = "base"
pka = {{ value = 5.2, fit = {flag(fit_pka)}, lower = -1.0, upper = 1.0 }}

[molecule.ANH]
role = "reagent"
moieties = {{ acyl = 2 }}

[molecule.ACD]
role = "acid"
moieties = {{ acyl = 1 }}

[[molecule.ACD.site]]
name = "COOH"
kind = "acid"
pka = 4.8

[molecule.PA]
role = "product"
moieties = {{ core = 1, acyl = 1 }}

[[molecule.PA.site]]
name = "N_b"
kind = "base"
pka = 4.7

[molecule.PB]
role = "byproduct"
moieties = {{ core = 1, acyl = 1 }}

[[molecule.PB.site]]
name = "N_a"
kind = "base"
pka = 8.3

[step.acyl_a]
reactants = [{{ species = "S", requires = {{ N_a = "deprotonated" }} }}, "ANH"]
products = {{ PA = 1, ACD = 1 }}
k = {{ value = "30 L/(mol*s)", fit = {flag(fit_ka)}, lower = -2.0, upper = 4.0 }}

[step.acyl_b]
reactants = [{{ species = "S", requires = {{ N_b = "deprotonated" }} }}, "ANH"]
products = {{ PB = 1, ACD = 1 }}
k = {{ value = "0.3 L/(mol*s)", fit = {flag(fit_kb)}, lower = -3.0, upper = 3.0 }}

[hydrolysis.ANH]
products = {{ ACD = 2 }}
water = {{ k = "3e-4 1/s" }}
hydroxide = {{ k = {{ value = "20 L/(mol*s)", fit = {flag(fit_hydrolysis_oh)}, lower = -2.0, upper = 5.0 }} }}
"""
    text += """
[molecule.PD]
role = "byproduct"
moieties = { core = 1, acyl = 2 }
"""
    if double:
        text += f"""
[step.double_a]
reactants = [{{ species = "PA", requires = {{ N_b = "deprotonated" }} }}, "ANH"]
products = {{ PD = 1, ACD = 1 }}
k = {{ value = "0.5 L/(mol*s)", fit = {flag(fit_double)}, lower = -3.0, upper = 3.0 }}
"""
    for sp in setpoints:
        name = f"ph{str(sp).replace('.', '_')}"
        text += f"""
[run.{name}]
volume = "50 mL"
end_time = "120 min"
initial = {{ S = "1.0 mmol" }}
ph = {{ mode = "held", setpoint = {sp}, titrant = "Na+", titrant_concentration = "1 M" }}

[[run.{name}.dosing]]
species = "ANH"
amount = "1.3 mmol"
start = "0 min"
end = "10 min"
volume = "2 mL"
"""
    text += f"""
[fit]
error_model = {{ absolute = 0.1, relative = 0.02 }}
starts = 1
seed = 1
{extra_fit}
"""
    return text


def small_model(**options) -> Model:
    """The small invented model parsed from :func:`small_model_text`."""
    return parse_model(small_model_text(**options), source="<synthetic>")


def truth_vector(model: Model, truth: Mapping[str, float] | np.ndarray | None) -> np.ndarray:
    """Kernel parameter vector q: the model's nominal values, with ``truth``
    (quantity name -> value on the kernel scale) put in."""
    compiled = compile_model(model)
    q = compiled.nominal.copy()
    if truth is None:
        return q
    if not isinstance(truth, Mapping):
        return np.asarray(truth, float)
    for name, value in truth.items():
        q[compiled.quantity_names.index(name)] = float(value)
    return q


def synthetic_campaign(model: Model, runs: Sequence[Run], truth_q, sample_times: np.ndarray,
                       rrf: Mapping[str, tuple[str, float]], noise: tuple[float, float] = (0.1, 0.02),
                       loq: float = 0.05, seed: int = 0, titrant_noise: bool = True) -> Campaign:
    """A campaign of area% data simulated from ``model`` at ``truth_q``.

    Parameters
    ----------
    model
        Model that generates the data.
    runs
        Runs to simulate (recipes).
    truth_q
        Kernel parameter vector, or a mapping quantity name -> value (kernel
        scale) overriding the model's nominal values.
    sample_times
        HPLC sampling times [s] (the same for every run).
    rrf
        Compound name -> (model molecule, RRF).
    noise
        (a, r): absolute [area%] and relative [-] parts of the noise sd.
    loq
        LOQ [area%]; noisy values below it are censored.
    seed
        Seed of numpy.random.default_rng.
    titrant_noise
        Add noise to the titrant log of held runs.

    Returns
    -------
    Campaign
    """
    rng = np.random.default_rng(seed)
    q = truth_vector(model, truth_q)
    a, r = noise
    names = list(rrf)
    molecules = [rrf[c][0] for c in names]
    factors = np.array([rrf[c][1] for c in names])
    t = np.asarray(sample_times, float)
    out_runs = []
    for run in runs:
        sim = simulate(model, run, np.concatenate([[0.0], t]), q=q)
        n = np.array([[sim.amounts[k + 1, sim.species_names.index(m)] for m in molecules]
                      for k in range(t.size)])
        true = 100.0 * n * factors / (n * factors).sum(axis=1, keepdims=True)
        obs = true + rng.normal(0.0, np.sqrt(a ** 2 + (r * true) ** 2))
        censored = obs < loq
        size = true.size
        hplc = HplcData(time=np.repeat(t, len(names)), compound=np.tile(np.array(names), t.size),
                        molecule=np.tile(np.array(molecules), t.size), kind=np.full(size, "area_percent"),
                        value=np.where(censored, np.nan, obs).ravel(), censored=censored.ravel(),
                        loq=np.full(size, loq), rrf=np.tile(factors, t.size), rows=np.arange(size) + 2,
                        basis="area_percent")
        titrant = None
        if run.ph.mode == "held":
            amount = sim.titrant[1:].copy()
            if titrant_noise:
                sd = np.sqrt((0.005 * np.max(np.abs(amount))) ** 2 + (0.01 * amount) ** 2)
                amount = amount + rng.normal(0.0, sd)
            titrant = TitrantLog(t.copy(), amount, np.arange(t.size) + 2)
        out_runs.append(CampaignRun(run, hplc, titrant))
    compounds = tuple(Compound(c, rrf[c][0], rrf[c][1], loq=loq, row=i + 2) for i, c in enumerate(names))
    return Campaign(tuple(out_runs), compounds, source="<synthetic>", basis="area_percent")
