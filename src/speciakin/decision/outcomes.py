"""Outcome tables: from simulated amounts at the end of a process to mole %
of the substrate moiety, and median / 5-95 % bands over draws.

Definition used throughout speciakin: the outcome of molecule P is

    outcome_P [%] = 100 * n_P * c_P / (n_S,0 * c_S)

with n_P the amount of P at the end [mol], c_P the count of the substrate
moiety in P (``Molecule.moieties``), n_S,0 the substrate charged [mol] and
c_S its moiety count.  Outcomes of all substrate-derived molecules sum to
100 % when the mass balance closes.
"""

from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from speciakin.chemistry.model import Model
from speciakin.decision.process import ProcessPlan
from speciakin.decision.specs import AREA_PREFIX

__all__ = [
    "moiety_counts",
    "default_moiety",
    "moiety_percent",
    "outcome_bands",
    "BAND_QUANTILES",
    "process_outcome_names",
    "process_outcomes",
    "area_percent",
]

#: Quantiles of the expected-outcome bands: lower, median, upper.
BAND_QUANTILES = (0.05, 0.5, 0.95)


def default_moiety(model: Model, substrate: str) -> str | None:
    """The substrate's moiety when it carries exactly one, else None."""
    moieties = dict(model.molecule(substrate).moieties)
    return next(iter(moieties)) if len(moieties) == 1 else None


def moiety_counts(model: Model, moiety: str) -> dict[str, float]:
    """Count of ``moiety`` in each model molecule that carries it (> 0).

    Returns
    -------
    dict
        Molecule name -> count [-], in model order.
    """
    return {m.name: float(m.moieties[moiety]) for m in model.molecules
            if float(m.moieties.get(moiety, 0.0)) > 0.0}


def moiety_percent(amounts: np.ndarray, counts: Sequence[float], charged_moiety: float) -> np.ndarray:
    """Mole % of the charged substrate moiety in each molecule.

    Parameters
    ----------
    amounts
        (..., n_molecules) amounts at the end of the process [mol].
    counts
        (n_molecules,) moiety count of each molecule [-].
    charged_moiety
        Amount of moiety charged, n_S,0 * c_S [mol], > 0.

    Returns
    -------
    numpy.ndarray
        (..., n_molecules) [%].
    """
    if not np.isfinite(charged_moiety) or charged_moiety <= 0:
        raise ValueError("the charged amount of moiety must be a finite number > 0")
    amounts = np.asarray(amounts, dtype=float)
    counts = np.asarray(counts, dtype=float)
    if amounts.shape[-1] != counts.size:
        raise ValueError(f"amounts has {amounts.shape[-1]} molecules on its last axis, "
                         f"counts has {counts.size}")
    return 100.0 * amounts * counts / charged_moiety


def outcome_bands(outcomes: np.ndarray, quantiles: Sequence[float] = BAND_QUANTILES
                  ) -> np.ndarray:
    """Quantiles over draws of every outcome, ignoring non-finite draws.

    Parameters
    ----------
    outcomes
        (n_draws, ...) [%].
    quantiles
        Probabilities in [0, 1].

    Returns
    -------
    numpy.ndarray
        (len(quantiles), ...); NaN where no draw is finite.
    """
    values = np.asarray(outcomes, dtype=float)
    values = np.where(np.isfinite(values), values, np.nan)
    ordered = np.sort(values, axis=0)                 # NaN sorts last
    count = np.sum(np.isfinite(values), axis=0)       # finite draws per point
    out = np.full((len(quantiles),) + values.shape[1:], np.nan)
    for i, q in enumerate(quantiles):
        # linear interpolation between order statistics (numpy's default
        # "linear" method, Hyndman and Fan 1996 definition 7)
        position = q * np.maximum(count - 1, 0)
        below = np.floor(position).astype(np.int64)
        above = np.minimum(below + 1, np.maximum(count - 1, 0))
        low = np.take_along_axis(ordered, below[None, ...], axis=0)[0]
        high = np.take_along_axis(ordered, above[None, ...], axis=0)[0]
        out[i] = np.where(count > 0, low + (position - below) * (high - low), np.nan)
    return out


def outcome_mapping(outcomes: np.ndarray, names: Sequence[str]) -> Mapping[str, np.ndarray]:
    """Split an (..., n_outcomes) array into name -> array."""
    values = np.asarray(outcomes, dtype=float)
    return {n: values[..., i] for i, n in enumerate(names)}


def _moiety_of(model: Model, process: ProcessPlan) -> str:
    moiety = process.moiety or default_moiety(model, process.substrate)
    if moiety is None:
        raise ValueError("the process names no moiety and the substrate does not carry exactly one; "
                         "check the process with validate_process first")
    return moiety


def area_percent(amounts: np.ndarray, rrf: Sequence[float]) -> np.ndarray:
    """HPLC area% of each molecule: ``100 RRF_i n_i / sum_j RRF_j n_j`` over the last axis.

    The relative response factor convention of the campaign's area%
    (``pipeline.objective``; Snyder, Kirkland and Dolan, "Introduction to
    Modern Liquid Chromatography", 3rd ed., Wiley 2010, ch. 11): a peak's area
    is RRF times the amount.  NaN where every amount is 0.
    """
    signal = np.asarray(amounts, dtype=float) * np.asarray(rrf, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return 100.0 * signal / np.sum(signal, axis=-1, keepdims=True)


def _area_molecules(process: ProcessPlan, rrf: Mapping[str, float] | None) -> list[str]:
    """The molecules whose area% columns a process's specifications need: every HPLC molecule (all
    make the total), when a specification of kind ``area%`` asks."""
    if not rrf or not any(s.kind == "area%" for s in process.specifications):
        return []
    return list(rrf)


def process_outcome_names(model: Model, process: ProcessPlan, rrf: Mapping[str, float] | None = None
                          ) -> list[str]:
    """Molecules that carry the substrate moiety: the outcomes of a process, in model order; then, when a
    specification limits HPLC area% (``rrf``: the campaign's HPLC molecules and their RRFs), the
    area% columns of every HPLC molecule (``AREA_PREFIX`` + name)."""
    return (list(moiety_counts(model, _moiety_of(model, process)))
            + [AREA_PREFIX + m for m in _area_molecules(process, rrf)])


def process_outcomes(final_amounts: Mapping[str, np.ndarray], model: Model,
                     process: ProcessPlan, rrf: Mapping[str, float] | None = None
                     ) -> tuple[list[str], np.ndarray]:
    """Outcome table of a process from simulated amounts at its end.

    Parameters
    ----------
    final_amounts
        Molecule name -> amount at the end of the process [mol] (arrays of
        one common shape, e.g. (n_draws, n_ph)); molecules that carry the
        substrate moiety must all be present, and the HPLC molecules of
        ``rrf`` when a specification limits area%.
    model, process
        The model and the (validated) process.
    rrf
        HPLC molecule -> relative response factor (the campaign's Compounds
        sheet), for specifications of kind ``area%``.

    Returns
    -------
    names, outcomes
        Outcome names and an array (..., n_outcomes) of mole % [%], then
        the HPLC area% [%] the specifications need (:func:`area_percent`).
    """
    moiety = _moiety_of(model, process)
    counts = moiety_counts(model, moiety)
    hplc = _area_molecules(process, rrf)
    missing = [n for n in list(counts) + hplc if n not in final_amounts]
    if missing:
        raise KeyError(f"no final amount for {', '.join(missing)}")
    charged = process.substrate_amount * float(model.molecule(process.substrate).moieties[moiety])
    amounts = np.stack([np.asarray(final_amounts[n], dtype=float) for n in counts], axis=-1)
    table = moiety_percent(amounts, list(counts.values()), charged)
    if hplc:
        seen = np.stack([np.asarray(final_amounts[n], dtype=float) for n in hplc], axis=-1)
        table = np.concatenate([table, area_percent(seen, [rrf[n] for n in hplc])], axis=-1)
    return process_outcome_names(model, process, rrf), table
