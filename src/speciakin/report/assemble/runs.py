"""Report section "Runs: data and fitted curves" and the observation sheet.

For each lab run: the HPLC data (values below the LOQ as open triangles at
the LOQ), the best-fit curves, the 5-95 % posterior predictive band when a
posterior exists, the weighted residuals, and for held-pH runs the titrant
consumed (data, model, band).  Everything drawn comes from a
:class:`~speciakin.pipeline.predictions.PredictionSet` (curves, bands and
fitted values computed once by the pipeline); this module only renders.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from speciakin.palette import SpeciesColors
from speciakin.report.assemble.names import label_of, relabel
from speciakin.report.document import Figure, Paragraph, Section, Table

__all__ = ["observation_table", "runs_section"]


def observation_table(predictions: Any) -> Table | None:
    """One row per observation: run, time [min], compound, observed, censored, LOQ,
    fitted, weighted residual, unit (None without predictions)."""
    if predictions is None:
        return None
    rows = [[o.run, o.time, o.compound, o.observed, o.censored, o.loq, o.fitted, o.residual, o.unit]
            for o in predictions.observations]
    note = ("Observed values as compared by the fit (peak areas normalised to area% per sample). "
            "Weighted residual = (fitted - observed) / sigma; for a value below the LOQ, "
            "max(fitted - LOQ, 0) / sigma.")
    if predictions.theta is None:
        note += " No fit: fitted values and residuals are empty."
    return Table("Observations", ["run", "time", "compound", "observed", "below LOQ", "LOQ", "fitted",
                                  "weighted residual", "unit"], rows,
                 units=[None, "min", None, None, None, None, None, "-", None],
                 formats=[None, ".4g", None, ".4g", None, ".4g", ".4g", ".3f", None],
                 sheet_name="observations", note=note)


def _observed_points(observations: list) -> tuple[dict, dict, dict, dict]:
    """Times [min], values (NaN below the LOQ), censored flags and LOQ per figure key."""
    t_obs: dict[str, list] = {}
    y_obs: dict[str, list] = {}
    cens: dict[str, list] = {}
    loq: dict[str, float] = {}
    for o in observations:
        t_obs.setdefault(o.key, []).append(o.time)
        y_obs.setdefault(o.key, []).append(np.nan if o.censored else o.observed)
        cens.setdefault(o.key, []).append(o.censored)
        if o.censored and o.loq is not None:
            loq[o.key] = o.loq
    return t_obs, y_obs, cens, loq


def runs_section(predictions: Any, fit: Any, posterior: Any, colors: SpeciesColors,
                 figure_names: dict[str, Figure] | None = None, names: dict[str, str] | None = None) -> Section:
    """The "Runs: data and fitted curves" section.

    ``figure_names``, when given, receives each figure under a file-friendly
    name (``run_<run>``, ``titrant_<run>``, ``residuals``)."""
    named = figure_names if figure_names is not None else {}
    title = "Runs: data and fitted curves"
    if predictions is None:
        return Section(title, [Paragraph("Run plots: not available (no objective: the model and campaign "
                                         "were not combined for this report).")], anchor="runs")
    from speciakin.report.figures import time_course_figure, titrant_figure

    what = predictions.source
    blocks: list = []
    if predictions.theta is None:
        blocks.append(Paragraph("Least-squares fit: not run; the plots show the data only."))
    if posterior is None:
        blocks.append(Paragraph("Posterior predictive bands: not run (no posterior); curves are the "
                                f"{what or 'data only'}."))
    else:
        lo_q, hi_q = predictions.band_quantiles
        blocks.append(Paragraph(f"Shaded bands: {lo_q:g}-{hi_q:g} % of the model "
                                f"curves over {predictions.band_draws} posterior draws (parameter uncertainty only)."))
    for run in predictions.runs:
        name = run.name
        hplc = [o for o in predictions.observations if o.run == name and not o.titrant]
        t_obs, y_obs, cens, loq = (relabel(d, names) for d in _observed_points(hplc))
        has_curve = run.time is not None
        blocks.append(named.setdefault(f"run_{name}", Figure(time_course_figure(
            t_obs, y_obs, run.time, relabel(run.values, names), colors, cens, loq, relabel(run.low, names),
            relabel(run.high, names),
            title=f"Run {name}", value_label=run.value_label, value_unit=run.value_unit),
            f"Run {name}: HPLC data (points; open triangles at the LOQ for values below it)"
            + (f", {what} (lines)" if has_curve else "") + (", 5-95 % predictive band" if run.low else "") + ".")))
        if has_curve and run.failed:
            blocks.append(Paragraph(f"Run {name}: the simulation at the plotted parameters failed; "
                                    "the curve may be incomplete."))
        titrant = [o for o in predictions.observations if o.run == name and o.titrant]
        if titrant:
            blocks.append(named.setdefault(f"titrant_{name}", Figure(titrant_figure(
                np.array([o.time for o in titrant]), np.array([o.observed for o in titrant]),
                run.time, run.titrant, run.titrant_low, run.titrant_high,
                title=f"Run {name}: titrant consumed"),
                f"Run {name} (pH held): titrant consumed, controller log and model"
                + (" with 5-95 % band." if has_curve and run.titrant_low is not None else "."))))
    residual_blocks = _residual_blocks(predictions, fit, colors, names)
    for block in residual_blocks:
        if isinstance(block, Figure):
            named.setdefault("residuals", block)
    blocks += residual_blocks
    return Section(title, blocks, anchor="runs")


def _residual_blocks(predictions: Any, fit: Any, colors: SpeciesColors,
                     names: dict[str, str] | None = None) -> list:
    """One residual figure for the HPLC data of every run, and the RMS per run and observable."""
    from speciakin.report.figures import residuals_figure

    if predictions.theta is None:
        return [Paragraph("Residuals: not available (least-squares fit not run).")]
    finite = [o for o in predictions.observations
              if not o.titrant and o.fitted is not None and o.residual is not None]
    blocks: list = []
    if finite:
        units = {run.value_unit for run in predictions.runs}
        unit = units.pop() if len(units) == 1 else "data scale"
        blocks.append(Figure(residuals_figure(
            np.array([o.time for o in finite]), np.array([o.fitted for o in finite]),
            np.array([o.residual for o in finite]), [label_of(names, o.key) for o in finite], colors,
            prediction_label=f"fitted [{unit}]", title="Weighted residuals of the HPLC data, all runs"),
            "Weighted residuals of every HPLC value against time and against the fitted value; they "
            "should scatter around 0 with a standard deviation near 1 when the error model holds."))
    groups = getattr(getattr(fit, "fit", None), "group_residual_sd", None) or {}
    if groups:
        rows = [[label, float(st["rms"]), int(st["count"])] for label, st in groups.items()]
        blocks.append(Table("Residuals by run and observable", ["group", "RMS weighted residual", "values"],
                            rows, formats=[None, ".3g", None],
                            note="An RMS far above 1 means the model or the error model does not describe "
                                 "that run (common practice: above 3 is flagged by the fit). Values that carry "
                                 "no residual (see the degrees of freedom) are not counted."))
    return blocks
