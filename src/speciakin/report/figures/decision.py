"""Decision figures: probability of meeting spec against pH, outcomes, 2-D map.

References
----------
.. [1] Peterson, J. J., "A Bayesian approach to the ICH Q8 definition of
   design space", J. Biopharm. Stat. 2008, 18, 959-975 (probability of
   meeting all specifications at each operating point).
"""

from __future__ import annotations

from typing import Mapping, Sequence

import numpy as np

from speciakin.decision.specs import AREA_LABEL
from speciakin.errors import InputError, Location
from speciakin.report.figures._memo import remembered
from speciakin.report.figures._style import (DEFAULT_HEIGHT_IN, TEXT_WIDTH_IN, as_array, finish_with_legend,
                                             legend_below,
                                             new_figure, same_length, to_png)
from speciakin.palette import NEUTRAL, OKABE_ITO, SpeciesColors

__all__ = ["probability_vs_ph_figure", "outcomes_vs_ph_figure", "probability_map_figure"]


def _interval(value: tuple[float, float] | None, name: str) -> tuple[float, float] | None:
    if value is None:
        return None
    lo, hi = (float(v) for v in value)
    if not (np.isfinite(lo) and np.isfinite(hi) and lo <= hi):
        raise InputError("not an interval", Location(key=name), value, "(low, high) with low <= high")
    return lo, hi


@remembered
def probability_vs_ph_figure(
    ph: Sequence[float],
    probability: Sequence[float],
    level: float,
    window: tuple[float, float] | None = None,
    robust_window: tuple[float, float] | None = None,
    probability_low: Sequence[float] | None = None,
    probability_high: Sequence[float] | None = None,
    title: str = "",
    claim: tuple[Sequence[float], Sequence[float], str] | None = None,
) -> bytes:
    """Probability that every specification is met, against pH [1]_.

    Parameters
    ----------
    ph
        Operating pH grid [-].
    probability
        Probability of meeting all specifications at each pH [-], 0 to 1.
    level
        Required probability [-]; drawn as a horizontal line.
    window
        pH range where the probability is at or above ``level``; shaded.
    robust_window
        The part of ``window`` that stays above ``level`` when the pH drifts
        by the plant's control tolerance; shaded darker.
    probability_low, probability_high
        Optional Monte Carlo uncertainty band of the probability itself.
    claim
        Optional ``(ph, value, label)``: the curve the window is read from
        when it differs from ``probability`` (the Monte Carlo lower confidence
        bound of the probability, docs/decision.md); drawn dashed.
    """
    x = as_array(ph, "ph", allow_nan=False)
    p = as_array(probability, "probability")
    same_length(ph=x, probability=p)
    if np.any((p[np.isfinite(p)] < 0) | (p[np.isfinite(p)] > 1)):
        raise InputError("probabilities outside 0..1", Location(key="probability"), None, "values from 0 to 1")
    if not (0.0 < level < 1.0):
        raise InputError("probability level out of range", Location(key="level"), level, "a number between 0 and 1")
    window = _interval(window, "window")
    robust_window = _interval(robust_window, "robust_window")
    fig = new_figure(TEXT_WIDTH_IN, DEFAULT_HEIGHT_IN + 0.5)
    ax = fig.add_subplot()
    if window:
        ax.axvspan(*window, color=OKABE_ITO["sky blue"], alpha=0.25, linewidth=0,
                   label=f"window pH {window[0]:.2f}-{window[1]:.2f}")
    if robust_window:
        ax.axvspan(*robust_window, color=OKABE_ITO["bluish green"], alpha=0.35, linewidth=0,
                   label=f"robust window pH {robust_window[0]:.2f}-{robust_window[1]:.2f}")
    if probability_low is not None and probability_high is not None:
        lo, hi = as_array(probability_low, "probability_low"), as_array(probability_high, "probability_high")
        same_length(ph=x, probability_low=lo, probability_high=hi)
        ax.fill_between(x, lo, hi, color=OKABE_ITO["blue"], alpha=0.2, linewidth=0, label="Monte Carlo band")
    ax.plot(x, p, color=OKABE_ITO["blue"], linewidth=1.8, label="P(all specifications met)")
    if claim is not None:
        cx, cy = as_array(claim[0], "claim ph", allow_nan=False), as_array(claim[1], "claim value")
        same_length(claim_ph=cx, claim_value=cy)
        ax.plot(cx, cy, color=OKABE_ITO["blue"], linewidth=1.4, linestyle="--", label=claim[2])
    ax.axhline(level, color=NEUTRAL, linestyle="--", linewidth=1.0, label=f"required level {level:.2f}")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlabel("pH [-]")
    ax.set_ylabel("probability [-]")
    if title:
        ax.set_title(title)
    legend_below(fig)  # below the axes: never over the curve or the shaded window
    return to_png(fig)


@remembered
def outcomes_vs_ph_figure(
    ph: Sequence[float],
    median: Mapping[str, Sequence[float]],
    low: Mapping[str, Sequence[float]] | None = None,
    high: Mapping[str, Sequence[float]] | None = None,
    limits: Mapping[str, tuple[float | None, float | None]] | None = None,
    colors: SpeciesColors | None = None,
    value_label: str = "outcome",
    value_unit: str = "mol%",
    title: str = "",
) -> bytes:
    """Expected outcomes (for example yield and impurity levels) against pH.

    Parameters
    ----------
    ph
        Operating pH grid [-].
    median
        Per outcome: median prediction on the grid [``value_unit``].
    low, high
        Per outcome: lower and upper band edges (e.g. 5 % and 95 % quantiles).
    limits
        Per outcome: specification limits ``(lower, upper)``; either may be None.
    """
    x = as_array(ph, "ph", allow_nan=False)
    colors = colors or SpeciesColors(list(median))
    fig = new_figure(TEXT_WIDTH_IN, DEFAULT_HEIGHT_IN + 0.8)
    ax = fig.add_subplot()
    for name, values in median.items():
        y = as_array(values, f"median['{name}']")
        same_length(ph=x, **{f"median['{name}']": y})
        # a molecule's HPLC area% (an area% specification asked for it): its colour, dashed
        area = name.endswith(AREA_LABEL)
        style = colors.style(name[:-len(AREA_LABEL)] if area else name)
        if low and high and name in low and name in high:
            lo, hi = as_array(low[name], f"low['{name}']"), as_array(high[name], f"high['{name}']")
            same_length(ph=x, low=lo, high=hi)
            ax.fill_between(x, lo, hi, color=style.color, alpha=0.09 if area else 0.18, linewidth=0)
        ax.plot(x, y, color=style.color, linestyle="--" if area else style.line_style, linewidth=1.2 if area else 1.6,
                label=name)
        for bound in (limits or {}).get(name, (None, None)):
            if bound is not None:
                ax.axhline(float(bound), color=style.color, linestyle=":", linewidth=1.2)
    if limits:
        ax.plot([], [], color=NEUTRAL, linestyle=":", label="specification limit")
    return finish_with_legend(fig, ax, "pH [-]", f"{value_label} [{value_unit}]", title,
                              "5-95 % band" if low and high else None)


@remembered
def probability_map_figure(
    x: Sequence[float],
    y: Sequence[float],
    probability: Sequence[Sequence[float]],
    x_label: str = "pH [-]",
    y_label: str = "temperature [C]",
    level: float | None = None,
    title: str = "",
) -> bytes:
    """2-D map of the probability of meeting all specifications [1]_.

    Parameters
    ----------
    x, y
        Grid of the two operating variables (labels carry the units).
    probability
        Array of shape ``(len(y), len(x))`` with values from 0 to 1.
    level
        Required probability; drawn as a contour line.
    """
    gx = as_array(x, "x", allow_nan=False)
    gy = as_array(y, "y", allow_nan=False)
    p = as_array(probability, "probability", ndim=2)
    if p.shape != (len(gy), len(gx)):
        raise InputError("probability map shape does not match the grid", Location(key="probability"),
                         p.shape, f"({len(gy)}, {len(gx)})")
    fig = new_figure(TEXT_WIDTH_IN * 0.8, DEFAULT_HEIGHT_IN + 0.6)
    ax = fig.add_subplot()
    mesh = ax.pcolormesh(gx, gy, p, cmap="cividis", vmin=0.0, vmax=1.0, shading="auto")
    fig.colorbar(mesh, ax=ax, label="P(all specifications met) [-]")
    if level is not None and np.nanmin(p) < level < np.nanmax(p):
        contour = ax.contour(gx, gy, p, levels=[level], colors="white", linewidths=1.5)
        ax.clabel(contour, fmt={level: f"{level:.2f}"}, fontsize=8)
    ax.set_xlabel(x_label)
    ax.set_ylabel(y_label)
    ax.grid(False)
    if title:
        ax.set_title(title)
    return to_png(fig)
