"""Synthetic campaigns for the next-run suggestion tests.

INVENTED: the diamine "SK-512" (model molecule S), its anhydride and every
number below are invented for testing and describe no real substance.

Site N_a (alkyl-amine-like, pKa 8.5) reacts fast when free; site N_b
(aryl-amine-like, pKa 5.0, known) slowly.  Runs held at low pH leave N_a
almost fully protonated: the data then fix only k_a 10^-pKa_a (the rate of
the small free fraction, 10^(pH - pKa) far below the pKa), not pKa_a itself.
The planned process wants the N_b product PB, so the upper window edge is
set by where N_a starts to compete, which is where pKa_a matters.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Sequence

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "estimation"))

from campaign_synthetic import SAMPLE_TIMES, synthetic_campaign  # noqa: E402

from speciakin.chemistry.modelfile import parse_model  # noqa: E402
from speciakin.decision.process import parse_process, validate_process  # noqa: E402

#: True values on the kernel scale (invented).
TRUTH = {"pKa[S.N_a]": 8.5, "log10k[acyl_a]": 1.5, "log10k[acyl_b]": 0.0}
COMPOUNDS = {"SK-512": ("S", 1.0), "amide-a": ("PA", 1.2), "amide-b": ("PB", 0.9)}
LOW_SETPOINTS = (3.5, 4.5, 5.5)


def model_text(setpoints: Sequence[float] = LOW_SETPOINTS, pka_a: float = 8.0) -> str:
    """Model file text; the written N_a pKa (``pka_a``) is the start of its fitted shift."""
    text = f"""
[model]
name = "sk512"
description = "INVENTED test model: fictional diamine SK-512 and a fictional anhydride"
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
pka = {{ value = {pka_a}, fit = true, lower = -2.5, upper = 2.5 }}

[[molecule.S.site]]
name = "N_b"
kind = "base"
pka = 5.0

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
role = "byproduct"
moieties = {{ core = 1, acyl = 1 }}

[molecule.PB]
role = "product"
moieties = {{ core = 1, acyl = 1 }}

[step.acyl_a]
reactants = [{{ species = "S", requires = {{ N_a = "deprotonated" }} }}, "ANH"]
products = {{ PA = 1, ACD = 1 }}
k = {{ value = "10 L/(mol*s)", fit = true, lower = -1.0, upper = 5.0 }}

[step.acyl_b]
reactants = [{{ species = "S", requires = {{ N_b = "deprotonated" }} }}, "ANH"]
products = {{ PB = 1, ACD = 1 }}
k = {{ value = "1 L/(mol*s)", fit = true, lower = -2.0, upper = 2.0 }}

[hydrolysis.ANH]
products = {{ ACD = 2 }}
water = {{ k = "3e-4 1/s" }}
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
amount = "1.5 mmol"
start = "0 min"
end = "10 min"
volume = "2 mL"
"""
    text += """
[fit]
error_model = { absolute = 0.1, relative = 0.02 }
starts = 2
seed = 1
"""
    return text


PROCESS = {
    "process": {"name": "SK-512 acylation (invented)", "substrate": "S", "substrate_concentration": "0.02 M",
                "volume": "50 mL", "reagent": "ANH", "equivalents": "1.5 eq", "dosing_time": "10 min",
                "feed_volume": "2 mL", "hold_time": "110 min", "temperature": "25 C", "titrant": "Na+",
                "titrant_concentration": "1 M"},
    "scan": {"ph_from": 3.0, "ph_to": 10.0, "ph_step": 0.25, "level": 0.9, "draws": 300, "seed": 1},
    "specification": [{"label": "desired amide", "outcome": "percent", "species": "PB", "rule": ">= 60 %"}],
}


def build(setpoints: Sequence[float] = LOW_SETPOINTS, seed: int = 3, truth=None, noise=(0.1, 0.02)):
    """(model, campaign, process) with data simulated at ``truth`` (default :data:`TRUTH`)."""
    model = parse_model(model_text(setpoints), source="<synthetic>")
    campaign = synthetic_campaign(model, model.runs, dict(TRUTH if truth is None else truth), SAMPLE_TIMES,
                                  COMPOUNDS, noise=noise, seed=seed)
    process = validate_process(parse_process(PROCESS, source="<synthetic process>"), model)
    return model, campaign, process


def truth_theta(objective, truth=None) -> np.ndarray:
    """Fitted-scale vector of the truth for ``objective`` (pKa as a shift of the file value)."""
    truth = dict(TRUTH if truth is None else truth)
    out = []
    for p in objective.parameters:
        value = truth[p.name]
        out.append(value - p.base if p.shift else value)
    return np.array(out)
