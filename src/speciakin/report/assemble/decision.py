"""Report sections "Decision summary" and "pH window", and the window sheet.

The decision is the pH window where the probability that every
specification is met stays at or above the chosen level, and the robust
part of it that keeps that level when the plant's pH drifts by its control
tolerance (Peterson 2008; ICH Q8(R2) design space).

References
----------
Peterson, J. J., "A Bayesian approach to the ICH Q8 definition of design
space", J. Biopharm. Stat. 2008, 18, 959.
ICH Q8(R2), "Pharmaceutical Development", 2009.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from speciakin._json import finite_or_none
from speciakin.decision.result import best_point_words, best_probability_words, outcome_words, outcomes_at_best
from speciakin.decision.specs import area_molecule
from speciakin.palette import SpeciesColors
from speciakin.report.assemble.names import label_of, relabel
from speciakin.report.blocks import as_sentences
from speciakin.report.document import BulletList, Callout, Figure, KeyValues, Paragraph, Section, Table

__all__ = [
    "decision_summary_section",
    "status_words",
    "gate_table",
    "STATUS_MEANING",
    "window_section",
    "window_table",
    "format_interval",
    "specification_limits",
    "process_block",
]


def format_interval(interval: tuple[float, float] | None) -> str:
    """``(7.61, 8.42)`` -> ``"pH 7.61 to 8.42"``; None -> ``"none"``."""
    if interval is None:
        return "none"
    return f"pH {interval[0]:.2f} to {interval[1]:.2f}"


def _robust_for_primary(window: Any) -> tuple[float, float] | None:
    """The robust set-point interval inside the recommended window (or the first one)."""
    if not window.robust_windows:
        return None
    if window.primary_window is not None:
        a, b = window.primary_window
        for lo, hi in window.robust_windows:
            if lo >= a - 1e-9 and hi <= b + 1e-9:
                return (lo, hi)
    return window.robust_windows[0]


def _uncertainty_words(source: str) -> str:
    from speciakin.decision.draws import COVARIANCE_SOURCE, POSTERIOR_SOURCE

    if source == POSTERIOR_SOURCE:
        return "Uncertainty: parameter draws from the posterior sample"
    if source == COVARIANCE_SOURCE:
        return ("Uncertainty: parameter draws from the least-squares estimate and its covariance "
                "(multivariate normal; no posterior was sampled)")
    return f"Uncertainty: {source}"


#: Plain-words meaning of each trust status (decision/gates.py).
STATUS_MEANING = {
    "established": "every trust gate passes; the window may be presented as established",
    "provisional": "at least one trust gate asks for caution; treat the window as provisional",
    "not established": "at least one trust gate fails; the window must not be relied on",
}


def status_words(window: Any) -> tuple[str, str]:
    """(status, one sentence with its reasons) of a window's trust gates.

    A window without gate results (older ``window.json``, a bare
    computation) says so instead of claiming to be established.
    """
    status = getattr(window, "status", None)
    if not status:
        return "not checked", ("Status: not checked (the window result carries no trust-gate verdict); "
                               "do not present it as established.")
    reasons = [str(r).rstrip(".") for r in getattr(window, "status_reasons", []) or []]
    text = f"Status: {status} ({STATUS_MEANING.get(status, status)})"
    if reasons:
        text += ". Reasons: " + "; ".join(reasons)
    return status, text + "."


def gate_table(window: Any) -> Table | None:
    """One row per trust gate: name, verdict, reasons (None when no gate ran)."""
    gates = getattr(window, "gates", None) or []
    if not gates:
        return None
    rows = [[str(g.get("name", "")), str(g.get("verdict", "")), "; ".join(str(r) for r in g.get("reasons", []))
             or None] for g in gates]
    return Table("Trust gates", ["gate", "verdict", "reasons"], rows,
                 note="Thresholds as documented with the decision layer (R-hat, ESS, bounds, profiles, pH "
                      "range and process envelope of the runs, error model); a gate that could not be "
                      "checked does not lower the status.")


def decision_summary_section(window: Any, fit: Any, posterior: Any, invented: bool = False,
                             names: dict[str, str] | None = None, suggestion: Any = None) -> Section:
    """The "Decision summary" section, opened by a decision callout that states the trust status."""
    blocks: list = []
    if window is None:
        text = ("pH window: not run. No process decision can be stated yet; compute the pH window on the "
                "fitted model and a process file ('speciakin window' with the campaign folder, which takes the newest "
                "fit and posterior under its results folder, or the workbench's window job), then write the report "
                "again.")
        if fit is None:
            text += " Least-squares fit: not run."
        blocks.append(Callout("decision", "pH window not computed", text))
        return Section("Decision summary", blocks, anchor="decision")
    status, status_text = status_words(window)
    established = status == "established"
    best_words = best_probability_words(window.best_probability, window.mc_confidence)
    robust = _robust_for_primary(window)
    outcome_ph, outcomes = outcomes_at_best(window)
    outcomes = [[label_of(names, row[0]), *row[1:]] for row in outcomes]
    if window.primary_window is not None:
        if established:
            title = f"Recommended: {format_interval(window.primary_window)}"
        else:
            title = f"{status.capitalize()}: candidate window {format_interval(window.primary_window)}"
        text = (f"{status_text}\n\nEvery specification is met with probability at least {window.level:g} from "
                f"{format_interval(window.primary_window)}"
                + (" according to the model. " if established else
                   " according to the model, but the window is not established (see the reasons). "))
        if robust is not None:
            text += (f"Set points from {format_interval(robust)} keep that probability when the pH drifts by "
                     f"+/- {window.tolerance:g}. ")
        else:
            text += (f"No set point keeps that probability over a +/- {window.tolerance:g} pH drift; tighter "
                     "pH control or a new process is needed. ")
    else:
        title = "No pH window found"
        text = (f"{status_text}\n\nNo pH in the scanned range meets every specification with probability at "
                f"least {window.level:g}. ")
        if window.best_ph is not None:
            text += f"The highest probability is at pH {window.best_ph:.2f} ({best_words}). "
    if outcomes:
        text += (f"Expected outcome at {best_point_words(window, outcome_ph)}, median (90 % band): "
                 + "; ".join(outcome_words(*row) for row in outcomes) + ". ")
    text += f"{_uncertainty_words(window.uncertainty_source)}; {window.n_draws} draws."
    if invented:
        text += " Based on invented demonstration data."
    steps = list(getattr(window, "next_steps", None) or [])
    if steps:
        text += "\n\nWhat to do next: " + " ".join(steps)
    if suggestion and suggestion.get("helps") and suggestion.get("message"):
        text += "\n\nNext-run suggestion (its own section below): " + str(suggestion["message"])
    elif suggestion:
        text += ("\n\nNext-run suggestion (its own section below): within the model, no candidate run narrows "
                 "the window's uncertainty much." + (" A run asked for above still tests the model where no run "
                                                    "has been, which the model's own uncertainty cannot."
                                                    if steps else ""))
    blocks.append(Callout("decision", title, text))
    rows = [("Status", status),
            ("Probability level", window.level), ("pH tolerance (+/-)", window.tolerance),
            ("Candidate window" if not established else "Recommended window", format_interval(window.primary_window)),
            ("Robust set points", format_interval(robust)),
            ("All windows", ", ".join(format_interval(w) for w in window.windows) or "none"),
            ("Best set point", None if window.best_ph is None else
             f"pH {window.best_ph:.2f} ({best_words})"),
            ("Uncertainty source", window.uncertainty_source), ("Draws", window.n_draws)]
    blocks.append(KeyValues(rows, number_format=".3g"))
    gates = gate_table(window)
    if gates is not None:
        blocks.append(gates)
    if outcomes:
        area = any(area_molecule(n) for n in window.outcome_names)
        unit = "mol% or area%" if area else "mol%"
        blocks.append(Table(f"Expected outcomes at {best_point_words(window, outcome_ph)}",
                            ["species", "median", "5 %", "95 %"], outcomes, units=[None, unit, unit, unit],
                            formats=[None, ".2f", ".2f", ".2f"],
                            note="Mole % of the substrate moiety at the end of the process"
                                 + ("; rows marked HPLC area%: the area% the campaign's HPLC method would "
                                    "report (its RRFs)" if area else "")
                                 + "; 5 % and 95 % quantiles over the parameter draws."))
    if window.specifications:
        blocks.append(Paragraph("Specifications (all must be met):"))
        blocks.append(BulletList([s.describe() for s in window.specifications]))
    for w in window.warnings:
        blocks.append(Callout("warning", "pH window", as_sentences([w])))
    return Section("Decision summary", blocks, anchor="decision")


def specification_limits(window: Any) -> dict[str, tuple[float | None, float | None]]:
    """Lower/upper limit per single-species mole % or HPLC area% specification, for the outcome plot."""
    limits: dict[str, list[float | None]] = {}
    for s in window.specifications:
        if len(s.species) != 1 or s.per or s.kind not in ("percent", "area%"):
            continue
        entry = limits.setdefault(s.outcome_keys()[0], [None, None])
        if s.operator in (">=", ">"):
            entry[0] = float(s.limit)
        elif s.operator in ("<=", "<"):
            entry[1] = float(s.limit)
    return {k: (v[0], v[1]) for k, v in limits.items()}


def window_table(window: Any) -> Table | None:
    """Sheet "window": pH, probability, MC error, worst case over the drift, robust flag."""
    if window is None:
        return None
    robust = window.robust_windows
    rows = []
    for k, x in enumerate(np.asarray(window.ph, float)):
        in_robust = any(lo - 1e-9 <= x <= hi + 1e-9 for lo, hi in robust)
        rows.append([float(x), finite_or_none(window.probability[k]), finite_or_none(window.probability_standard_error[k]),
                     finite_or_none(window.worst_case_probability[k]), finite_or_none(window.robust_probability_per_draw[k]),
                     in_robust])
    return Table("pH window scan", ["pH", "probability", "MC standard error", "worst case over drift",
                                    "per-draw robust probability", "robust set point"], rows,
                 units=["-", "-", "-", "-", "-", None], formats=[".2f", ".3f", ".4f", ".3f", ".3f", None],
                 sheet_name="window",
                 note=f"Probability that every specification is met (level {window.level:g}, pH tolerance "
                      f"+/- {window.tolerance:g}); {window.n_draws} draws from the {window.uncertainty_source}.")


def process_block(process: Any, names: dict[str, str] | None = None) -> KeyValues | Paragraph:
    """The planned process the window was computed for (display units)."""
    if process is None:
        return Paragraph("Planned process: no process file was given for this report.")
    rows = [("Process", process.name), ("Description", process.description or None),
            ("Substrate", f"{label_of(names, process.substrate)}, {process.substrate_amount * 1e3:.4g} mmol"),
            ("Initial volume [mL]", process.volume * 1e3),
            ("Reagent", f"{label_of(names, process.reagent)}, {process.equivalents:.4g} eq"),
            ("Dosing time [min]", process.dosing_time / 60.0), ("Hold time [min]", process.hold_time / 60.0),
            ("Temperature [C]", process.temperature - 273.15),
            ("pH held with", f"{process.titrant} ({process.titrant_concentration:.4g} mol/L)"),
            ("pH scan", f"{process.ph_from:g} to {process.ph_to:g} in steps of {process.ph_step:g}"),
            ("Probability level", process.level), ("pH tolerance (+/-)", process.ph_tolerance),
            ("Draws", process.n_draws), ("Seed", process.seed)]
    return KeyValues(rows, number_format=".4g")


def _claim_curve(window: Any):
    """The curve the window is read from when the Monte Carlo guard is on (its lower confidence bound)."""
    if getattr(window, "mc_confidence", None) is None or getattr(window, "curve_probability", None) is None:
        return None
    return (window.curve_ph, window.curve_probability,
            f"lower {window.mc_confidence:g} confidence bound (window read from it)")


def _claim_caption(window: Any) -> str:
    if _claim_curve(window) is None:
        return ""
    return (f"; dashed: its one-sided {window.mc_confidence:g} Monte Carlo lower confidence bound, from which "
            f"the window is read")


def window_section(window: Any, colors: SpeciesColors, process: Any = None,
                   names: dict[str, str] | None = None) -> Section:
    """The "pH window" section: planned process, probability vs pH, outcomes vs pH, 2-D map, scan table."""
    if window is None:
        return Section("pH window", [Paragraph("pH window: not run."), process_block(process, names)],
                       anchor="window")
    from speciakin.report.figures import outcomes_vs_ph_figure, probability_map_figure, probability_vs_ph_figure

    ph = np.asarray(window.ph, float)
    p = np.asarray(window.probability, float)
    se = np.asarray(window.probability_standard_error, float)
    blocks: list = [process_block(process, names), Figure(probability_vs_ph_figure(
        ph, p, window.level, window=window.primary_window, robust_window=_robust_for_primary(window),
        probability_low=np.clip(p - 2 * se, 0, 1), probability_high=np.clip(p + 2 * se, 0, 1),
        claim=_claim_curve(window)),
        f"Probability that every specification is met against set-point pH (share of draws; band: +/- 2 "
        f"Monte Carlo standard errors){_claim_caption(window)}; line at the level {window.level:g}; light "
        f"shading: window; dark shading: set points robust to +/- {window.tolerance:g} pH drift.")]
    if window.outcome_names:
        blocks.append(Figure(outcomes_vs_ph_figure(
            ph, relabel(window.outcome_median, names), relabel(window.outcome_lower, names),
            relabel(window.outcome_upper, names), relabel(specification_limits(window), names),
            colors, value_label="end of process",
            value_unit="mol%; dashed: area%" if any(area_molecule(n) for n in window.outcome_names)
            else "mol%"),
            "Expected outcomes against pH: median (line) and 5-95 % band over the parameter draws; "
            "specification limits as dotted lines."))
    if window.map_probability is not None and window.factor_values is not None:
        blocks.append(Figure(probability_map_figure(
            ph, window.factor_values, np.asarray(window.map_probability, float).T,
            x_label="pH [-]", y_label=f"{window.factor_name} [{window.factor_unit}]", level=window.level),
            f"Probability that every specification is met over pH and {window.factor_name}; contour at "
            f"the level {window.level:g}."))
        rows = [[float(v), ", ".join(format_interval(w) for w in wins) or "none",
                 ", ".join(format_interval(w) for w in rob) or "none"]
                for v, wins, rob in zip(window.factor_values, window.map_windows or [],
                                        window.map_robust_windows or [])]
        blocks.append(Table("Windows by second factor", [window.factor_name or "factor", "window", "robust set points"],
                            rows, units=[window.factor_unit, None, None]))
    else:
        blocks.append(Paragraph("Design space map: not computed (no second factor in the process)."))
    blocks.append(window_table(window))
    return Section("pH window", blocks, anchor="window")
