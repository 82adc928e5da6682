"""Time-course figures: data and model per run, residuals, titrant consumed."""

from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.report.figures._memo import remembered
from speciakin.report.figures._style import (DEFAULT_HEIGHT_IN, TEXT_WIDTH_IN, as_array, finish_with_legend,
                                             legend_below,
                                             new_figure, same_length, to_png)
from speciakin.palette import NEUTRAL, OKABE_ITO, SpeciesColors

__all__ = ["time_course_figure", "residuals_figure", "titrant_figure"]


@remembered
def time_course_figure(
    observed_time: Mapping[str, Sequence[float]],
    observed: Mapping[str, Sequence[float]],
    model_time: Sequence[float] | None = None,
    model: Mapping[str, Sequence[float]] | None = None,
    colors: SpeciesColors | None = None,
    censored: Mapping[str, Sequence[bool]] | None = None,
    loq: Mapping[str, float] | None = None,
    band_low: Mapping[str, Sequence[float]] | None = None,
    band_high: Mapping[str, Sequence[float]] | None = None,
    title: str = "",
    time_unit: str = "min",
    value_label: str = "amount",
    value_unit: str = "mol%",
    band_label: str = "5-95 % predictive band",
) -> bytes:
    """Time course of one run: data points, model curves and an optional band.

    Parameters
    ----------
    observed_time, observed
        Per species: sampling times [``time_unit``] and measured values
        [``value_unit``].
    model_time, model
        Model curves: a common time grid [``time_unit``] and per species values.
    colors
        Species styles shared by every figure of the report.
    censored, loq
        Per species: True where the value was below the limit of
        quantitation; such points are drawn as open downward triangles at
        ``loq[species]`` [``value_unit``] (the value is known only to be lower).
    band_low, band_high
        Per species: lower and upper edge of a band on ``model_time`` (for
        instance the 5 % and 95 % posterior predictive quantiles).

    Returns
    -------
    bytes
        PNG image.
    """
    colors = colors or SpeciesColors(list(dict.fromkeys([*observed, *(model or {})])))
    fig = new_figure(TEXT_WIDTH_IN, DEFAULT_HEIGHT_IN + 1.0)
    ax = fig.add_subplot()
    grid = as_array(model_time, "model_time") if model_time is not None else None
    any_censored = False
    for name, values in (model or {}).items():
        y = as_array(values, f"model['{name}']")
        if grid is None:
            raise InputError("model curves need model_time", Location(key="model_time"), None, "a time grid")
        same_length(model_time=grid, **{f"model['{name}']": y})
        style = colors.style(name)
        if band_low and band_high and name in band_low and name in band_high:
            lo = as_array(band_low[name], f"band_low['{name}']")
            hi = as_array(band_high[name], f"band_high['{name}']")
            same_length(model_time=grid, band_low=lo, band_high=hi)
            ax.fill_between(grid, lo, hi, color=style.color, alpha=0.18, linewidth=0)
        ax.plot(grid, y, color=style.color, linestyle=style.line_style, linewidth=1.6)
    for name, values in observed.items():
        if name not in observed_time:
            raise InputError("no sampling times for species", Location(key=f"observed_time['{name}']"), name,
                             "times for every observed species")
        t = as_array(observed_time[name], f"observed_time['{name}']")
        y = as_array(values, f"observed['{name}']")
        same_length(observed_time=t, observed=y)
        cens = np.zeros(len(t), dtype=bool)
        if censored and name in censored:
            cens = np.asarray(censored[name], dtype=bool)
            same_length(observed_time=t, censored=cens)
        style = colors.style(name)
        ax.plot(t[~cens], y[~cens], linestyle="none", marker=style.marker, markersize=4.5,
                color=style.color)
        if cens.any():
            level = (loq or {}).get(name)
            if level is None or not np.isfinite(level):
                raise InputError("censored points need the limit of quantitation", Location(key=f"loq['{name}']"),
                                 level, "a finite number")
            ax.plot(t[cens], np.full(int(cens.sum()), float(level)), linestyle="none", marker="v",
                    markersize=5.5, markerfacecolor="none", markeredgecolor=style.color)
            any_censored = True
    # one entry per species (its colour, line and marker), then what lines, points and triangles mean
    from matplotlib.lines import Line2D

    handles = [Line2D([], [], color=colors.style(n).color, linestyle=colors.style(n).line_style,
                      marker=colors.style(n).marker, markersize=4.5, linewidth=1.6, label=n)
               for n in dict.fromkeys([*(model or {}), *observed])]
    if model:
        handles.append(Line2D([], [], color=NEUTRAL, linewidth=1.6, label="lines: model"))
    handles.append(Line2D([], [], color=NEUTRAL, linestyle="none", marker="o", markersize=4.5,
                          label="points: data"))
    if any_censored:
        handles.append(Line2D([], [], color=NEUTRAL, linestyle="none", marker="v", markersize=5.5,
                              markerfacecolor="none", label="open triangles: below the LOQ (at the LOQ)"))
    return finish_with_legend(fig, ax, f"time [{time_unit}]", f"{value_label} [{value_unit}]", title,
                              band_label if band_low and band_high else None, handles=handles)


@remembered
def residuals_figure(
    time: Sequence[float],
    predicted: Sequence[float],
    residual: Sequence[float],
    species: Sequence[str],
    colors: SpeciesColors | None = None,
    time_unit: str = "min",
    residual_label: str = "weighted residual [-]",
    prediction_label: str = "predicted [mol%]",
    title: str = "",
) -> bytes:
    """Residuals against time (left) and against the prediction (right).

    Parameters
    ----------
    time
        Sampling time of each observation [``time_unit``].
    predicted
        Model value of each observation.
    residual
        Residual of each observation (weighted or raw, as ``residual_label`` says).
    species
        Species name of each observation (sets the colour).
    """
    t = as_array(time, "time")
    p = as_array(predicted, "predicted")
    r = as_array(residual, "residual")
    names = np.asarray(list(species), dtype=object)
    same_length(time=t, predicted=p, residual=r, species=names)
    colors = colors or SpeciesColors(list(dict.fromkeys(names.tolist())))
    fig = new_figure(TEXT_WIDTH_IN, DEFAULT_HEIGHT_IN + 0.6)
    left, right = fig.subplots(1, 2, sharey=True)
    for name in dict.fromkeys(names.tolist()):
        sel = names == name
        style = colors.style(name)
        for ax, x in ((left, t), (right, p)):
            ax.plot(x[sel], r[sel], linestyle="none", marker=style.marker, markersize=4, color=style.color,
                    label=name if ax is left else None)
    for ax in (left, right):
        ax.axhline(0.0, color=NEUTRAL, linewidth=1.0)
    left.set_xlabel(f"time [{time_unit}]")
    right.set_xlabel(prediction_label)
    left.set_ylabel(residual_label)
    legend_below(fig)
    if title:
        fig.suptitle(title)
    return to_png(fig)


@remembered
def titrant_figure(
    observed_time: Sequence[float],
    observed: Sequence[float],
    model_time: Sequence[float] | None = None,
    model: Sequence[float] | None = None,
    band_low: Sequence[float] | None = None,
    band_high: Sequence[float] | None = None,
    time_unit: str = "min",
    amount_unit: str = "mmol",
    title: str = "",
) -> bytes:
    """Titrant (base) consumed against time: controller log and model.

    Parameters
    ----------
    observed_time, observed
        Logged times [``time_unit``] and cumulative titrant [``amount_unit``].
    model_time, model
        Model curve of the same quantity.
    band_low, band_high
        Optional band on ``model_time``.
    """
    t = as_array(observed_time, "observed_time")
    y = as_array(observed, "observed")
    same_length(observed_time=t, observed=y)
    fig = new_figure(TEXT_WIDTH_IN * 0.75, DEFAULT_HEIGHT_IN)
    ax = fig.add_subplot()
    if model is not None:
        if model_time is None:
            raise InputError("model curve needs model_time", Location(key="model_time"), None, "a time grid")
        mt = as_array(model_time, "model_time")
        my = as_array(model, "model")
        same_length(model_time=mt, model=my)
        if band_low is not None and band_high is not None:
            lo, hi = as_array(band_low, "band_low"), as_array(band_high, "band_high")
            same_length(model_time=mt, band_low=lo, band_high=hi)
            ax.fill_between(mt, lo, hi, color=OKABE_ITO["blue"], alpha=0.18, linewidth=0, label="5-95 % band")
        ax.plot(mt, my, color=OKABE_ITO["blue"], linewidth=1.6, label="model")
    ax.plot(t, y, linestyle="none", marker="o", markersize=3, color=OKABE_ITO["vermillion"], label="controller log")
    ax.set_xlabel(f"time [{time_unit}]")
    ax.set_ylabel(f"titrant consumed [{amount_unit}]")
    if title:
        ax.set_title(title)
    ax.legend(frameon=False)
    return to_png(fig)
