"""What to do next when a pH window is not established: one action per failing trust gate.

The trust gates (:mod:`speciakin.decision.gates`) say why a window cannot be
presented as established; this module turns each failing gate's figures into
the action that would lift it, in the chemist's terms and with the numbers
(the run to do, the bound to review, the draws to use).  It reads only the
gates' JSON-ready dicts (``WindowResult.gates``), so a ``window.json`` written
earlier gives the same actions.

Rules (each applies only when its gate is provisional or not established):

* process envelope: a confirmation run in the lab at the process's own
  conditions (equivalents, dosing time, end time, temperature, held pH) at the
  best set point of the window; a model is only as good as the conditions
  its runs covered.
* pH coverage: a run at each window edge that lies beyond the runs' pH range.
* identifiability: runs that inform the unidentified parameters; the ranked
  candidates come from the next-run suggestion (``speciakin suggest``).
* convergence: a posterior sampled (longer).
* draws on a bound: the bounds reviewed.
* error model: the data's errors stated, or the model's misfit looked for.
* Monte Carlo error: more draws.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Mapping, Sequence

from speciakin.decision.gates import BOUND_SHARE, NOT_ESTABLISHED, PH_MARGIN_PROVISIONAL, PROVISIONAL

__all__ = ["next_steps", "runs_would_help", "ACTIONS", "DATA_GATES"]

_FAILING = (PROVISIONAL, NOT_ESTABLISHED)


def _process_run(figures: Mapping[str, Any], best_ph: float | None) -> str | None:
    if best_ph is None:
        return None
    parts = []
    for key, label, unit in (("equivalents", "", "eq of reagent"), ("dosing_time", "dosed over ", "min"),
                             ("end_time", "ended at ", "min"), ("temperature", "at ", "C")):
        entry = figures.get(key)
        if isinstance(entry, Mapping) and entry.get("process") is not None:
            parts.append(f"{label}{float(entry['process']):g} {unit}")
    return (f"Run the process as planned once in the lab: pH {best_ph:.2f} held (the best set point), "
            + ", ".join(parts) + "; its conditions lie outside the runs the model was fitted to. Add the run "
            "to the workbook and run the job again.")


def _edge_runs(figures: Mapping[str, Any], best_ph: float | None) -> str | None:
    covered = figures.get("run_ph_range")
    if not covered:
        return None
    low, high = float(covered[0]), float(covered[1])
    edges = [float(e) for w in figures.get("windows") or [] for e in w
             if float(e) < low - PH_MARGIN_PROVISIONAL or float(e) > high + PH_MARGIN_PROVISIONAL]
    if not edges:
        return None
    return ("Add a run at pH " + " and at pH ".join(f"{e:.1f}" for e in edges)
            + f": the window's edge lies outside the pH {low:.2f} to {high:.2f} the runs covered.")


def _beyond_margin(shift: Mapping[str, Any]) -> bool:
    """An open profile's shift of an outcome above its margin (not finite, or None in JSON, counts)."""
    change = shift.get("change")
    return change is None or not math.isfinite(float(change)) or float(change) > float(shift.get("margin") or 0.0)


def _informing_runs(figures: Mapping[str, Any], best_ph: float | None) -> str:
    names = [n for n, f in figures.items()
             if isinstance(f, Mapping) and any(_beyond_margin(x) for x in f.get("shifts") or [])]
    return ("Add runs that inform " + (", ".join(names) or "the unidentified parameters")
            + ": 'speciakin suggest' ranks candidate runs by how much each would firm up the window.")


def _sampling(figures: Mapping[str, Any], best_ph: float | None) -> str:
    if figures.get("r_hat") is None:
        return "Sample the posterior ('speciakin sample', or 'speciakin run' without --quick) before deciding."
    return "Sample the posterior longer ('speciakin sample' with more --steps) before deciding."


def _bounds(figures: Mapping[str, Any], best_ph: float | None) -> str:
    names = sorted({k.rsplit(" ", 1)[0] for k, share in figures.items()
                    if isinstance(share, (int, float)) and math.isfinite(share) and share > BOUND_SHARE})
    return ("Review the model-file bounds of " + (", ".join(names) or "the parameters")
            + ": widen them where the chemistry allows, or fix the parameter, and fit again.")


def _errors(figures: Mapping[str, Any], best_ph: float | None) -> str:
    return ("State the data's errors in the model file's [fit] error_model, or look at the residual plots for "
            "what the model misses, and fit again.")


def _draws(figures: Mapping[str, Any], best_ph: float | None) -> str:
    needed, drawn = figures.get("draws_needed"), figures.get("draws")
    if needed and drawn is not None and drawn >= needed:
        return "Compute the window with its Monte Carlo guard on (the default)."
    return "Compute the window with more draws" + (f" (--draws {int(needed)} or more)." if needed else ".")


#: Gate name -> ``action(figures, best_ph) -> str | None``: what lifts that gate (one per gate of ``GATES``).
ACTIONS: dict[str, Callable[[Mapping[str, Any], float | None], str | None]] = {
    "convergence": _sampling,
    "draws on a bound": _bounds,
    "identifiability": _informing_runs,
    "pH coverage": _edge_runs,
    "process envelope": _process_run,
    "error model": _errors,
    "Monte Carlo error": _draws,
}

#: Gates that more lab runs lift (the next-run suggestion ranks candidates for them).
DATA_GATES = ("identifiability", "pH coverage")


def runs_would_help(gates: Sequence[Mapping[str, Any]]) -> bool:
    """True when a gate of :data:`DATA_GATES` fails: a next-run suggestion is worth computing."""
    return any(g.get("name") in DATA_GATES and g.get("verdict") in _FAILING for g in gates)


def next_steps(gates: Sequence[Mapping[str, Any]], best_ph: float | None) -> list[str]:
    """The actions (:data:`ACTIONS`) that would lift the failing gates, in the gates' order.

    Parameters
    ----------
    gates
        ``WindowResult.gates``: dicts with ``name``, ``verdict``, ``reasons``, ``figures``.
    best_ph
        Best set point of the window [pH], or None when there is no window (no
        confirmation run is proposed then).

    Returns
    -------
    list of str
        Empty when every gate passes.
    """
    steps = [ACTIONS[g["name"]](g.get("figures") or {}, best_ph) for g in gates
             if g.get("verdict") in _FAILING and g.get("name") in ACTIONS]
    return [s for s in steps if s]
