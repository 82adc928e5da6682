"""Figure of the next-run suggestion: expected shrinkage against set-point pH.

References
----------
.. [1] Chaloner, K. and Verdinelli, I., "Bayesian experimental design: a
   review", Statist. Sci. 1995, 10, 273-304 (expected gain of a design).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from speciakin.report.figures._style import DEFAULT_HEIGHT_IN, TEXT_WIDTH_IN, as_array, new_figure, same_length, to_png
from speciakin.palette import NEUTRAL, OKABE_ITO

__all__ = ["suggest_shrinkage_figure"]


def suggest_shrinkage_figure(ph: Sequence[float], edge_low: Sequence[float] | None,
                             edge_high: Sequence[float] | None, undecided: Sequence[float] | None,
                             d_gain: Sequence[float], min_gain: float | None = None,
                             best_ph: float | None = None, title: str = "") -> bytes:
    """Expected reduction of the decision's uncertainty per candidate set point [1]_.

    Parameters
    ----------
    ph
        Candidate set points [-].
    edge_low, edge_high
        Expected reduction of the credible width of the low / high window
        edge [pH units]; None without a decision.
    undecided
        Expected reduction of the undecided span of set points [pH units].
    d_gain
        D-optimal gain for the parameters that move the outcomes [nats];
        drawn on the right-hand axis.
    min_gain
        "Helps much" threshold [pH units]; a dashed line.
    best_ph
        The top-ranked set point; a vertical marker.
    """
    x = as_array(ph, "ph", allow_nan=False)
    d = as_array(d_gain, "d_gain")
    same_length(ph=x, d_gain=d)
    fig = new_figure(TEXT_WIDTH_IN, DEFAULT_HEIGHT_IN + 0.8)
    ax = fig.add_subplot()
    right = ax.twinx()
    series = (("low window edge (credible width)", edge_low, "blue", "-", "o"),
              ("high window edge (credible width)", edge_high, "vermillion", "--", "s"),
              ("undecided span of set points", undecided, "bluish green", "-.", "^"))
    for label, values, colour, style, marker in series:
        if values is None:
            continue
        y = as_array(values, label)
        same_length(ph=x, **{label: y})
        ax.plot(x, y, color=OKABE_ITO[colour], linestyle=style, marker=marker, markersize=3.5,
                linewidth=1.5, label=label)
    right.plot(x, d, color=OKABE_ITO["reddish purple"], linestyle=":", marker="D", markersize=3,
               linewidth=1.3, label="D-optimal gain (right axis)")
    if min_gain is not None and (edge_low is not None or undecided is not None):
        ax.axhline(float(min_gain), color=NEUTRAL, linestyle="--", linewidth=1.0,
                   label=f"'helps much' threshold {min_gain:g} pH")
    if best_ph is not None:
        ax.axvline(float(best_ph), color=OKABE_ITO["black"], linewidth=0.8, alpha=0.6,
                   label=f"top-ranked pH {best_ph:.2f}")
    ax.set_xlabel("set-point pH of the candidate run [-]")
    ax.set_ylabel("expected reduction [pH units]")
    right.set_ylabel("D-optimal gain [nats]")
    right.grid(False)
    right.spines["right"].set_visible(True)
    ax.set_ylim(bottom=0.0)
    right.set_ylim(bottom=0.0, top=max(1e-6, float(np.nanmax(d))) * 1.1 if np.isfinite(d).any() else 1.0)
    handles, labels = ax.get_legend_handles_labels()
    h2, l2 = right.get_legend_handles_labels()
    ax.legend(handles + h2, labels + l2, frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.2),
              ncol=2, fontsize=7)
    if title:
        ax.set_title(title)
    return to_png(fig)
