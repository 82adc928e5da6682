"""Planned process runs: one held-pH :class:`speciakin.chemistry.model.Run`
per scanned pH (and second-factor value), for the simulator.

Pure data construction; nothing is simulated here.
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from speciakin.chemistry.model import Dose, Model, PhControl, Run, TemperatureProfile
from speciakin.decision.process import FACTOR_KINDS, ProcessPlan
from speciakin.errors import InputError, Location

__all__ = ["process_runs", "apply_factor"]


def apply_factor(process: ProcessPlan, value: float | None) -> tuple[float, float, float]:
    """Equivalents [-], temperature [K] and dosing time [s] with the second
    factor (internal units) put in place of the planned value."""
    equivalents, temperature, dosing = process.equivalents, process.temperature, process.dosing_time
    if value is None:
        return equivalents, temperature, dosing
    if process.second_factor is None:
        raise InputError("a second-factor value was given but the process has no second factor",
                         Location(file=process.source or None, key="scan.second_factor"), value,
                         "no value, or a [scan.second_factor] table")
    if not np.isfinite(value) or value <= 0:
        raise InputError("second-factor value must be a finite number > 0",
                         Location(key="scan.second_factor"), value, "a value > 0")
    kind = FACTOR_KINDS[process.second_factor.kind].name
    if kind == "equivalents":
        equivalents = float(value)
    elif kind == "temperature":
        temperature = float(value)
    elif kind == "dosing_time":
        dosing = float(value)
    return equivalents, temperature, dosing


def process_runs(process: ProcessPlan, model: Model | None, ph_values: Sequence[float],
                 second_factor_value: float | None = None) -> list[Run]:
    """Held-pH runs of the planned process, one per set-point pH.

    Each run starts with ``substrate_amount`` of the substrate (plus the
    ``[process.initial]`` amounts) in ``volume``, brought to the set point as
    ``start_adjustment`` says (default: acid or base inside the start volume);
    doses ``equivalents x substrate_amount`` of the reagent at a constant rate
    from 0 to ``dosing_time`` (an instant addition when the dosing time is 0)
    with ``feed_volume`` of liquid; holds the pH at the set point with the
    titrant (and the opposite titrant, when given: a two-sided pH-stat), whose
    volumes add to the batch; and ends at ``dosing_time + hold_time``.  These
    are the conventions of the lab runs (:class:`PhControl`).

    Parameters
    ----------
    process
        The planned process.
    model
        When given, names are checked against it (unknown -> InputError).
    ph_values
        Set points [-].
    second_factor_value
        Value of the process's second factor in internal units
        (equivalents [-], temperature [K], dosing time [s]).

    Returns
    -------
    list of Run
        In the order of ``ph_values``.
    """
    if model is not None:
        names = {m.name for m in model.molecules} | {i.name for i in model.ions}
        for key, name in (("process.substrate", process.substrate),
                          ("process.reagent", process.reagent), ("process.titrant", process.titrant),
                          ("process.opposite_titrant", process.opposite_titrant),
                          ("process.start_acid", process.start_acid),
                          ("process.start_base", process.start_base)):
            if name is not None and name not in names:
                raise InputError("name not found in the model",
                                 Location(file=process.source or None, key=key), name,
                                 f"one of {', '.join(sorted(names))}")
    equivalents, temperature, dosing = apply_factor(process, second_factor_value)
    reagent_amount = equivalents * process.substrate_amount
    end = dosing + process.hold_time
    charges = {process.substrate: process.substrate_amount}
    for name, amount in process.extra_charges.items():
        charges[name] = charges.get(name, 0.0) + amount
    runs = []
    for ph in ph_values:
        ph = float(ph)
        if not np.isfinite(ph):
            raise InputError("set-point pH is not a finite number", Location(key="scan"), ph,
                             "a finite pH")
        tag = "" if second_factor_value is None else f", {process.second_factor.kind} {second_factor_value:g}"
        runs.append(Run(
            name=f"{process.name} at pH {ph:.2f}{tag}",
            charges=dict(charges),
            volume=process.volume,
            temperature=TemperatureProfile((0.0,), (temperature,)),
            ph=PhControl("held", setpoint=ph, titrant=process.titrant,
                         titrant_concentration=process.titrant_concentration,
                         opposite_titrant=process.opposite_titrant,
                         opposite_titrant_concentration=process.opposite_titrant_concentration,
                         start_adjustment=process.start_adjustment, start_acid=process.start_acid,
                         start_base=process.start_base),
            end_time=end,
            doses=(Dose(process.reagent, reagent_amount, 0.0, dosing, process.feed_volume),),
            note="planned process run",
        ))
    return runs
