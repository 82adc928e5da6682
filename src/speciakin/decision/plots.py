"""Figures of a :class:`~speciakin.decision.result.WindowResult` (matplotlib,
Agg backend).  Each function takes the result and an output path, writes a
PNG atomically and returns the path.  The report layer may draw its own
styled versions from the same arrays.

Colours: the Okabe-Ito colour-blind-safe palette (Okabe, M. and Ito, K.,
"Color Universal Design", 2002, https://jfly.uni-koeln.de/color/).
"""

from __future__ import annotations

import io
import os
from pathlib import Path

import numpy as np

from speciakin._io import atomic_write_bytes
from speciakin.decision.result import WindowResult
from speciakin.decision.specs import area_molecule
from speciakin.palette import OKABE_ITO, cycle_style

__all__ = ["plot_probability", "plot_outcomes", "plot_map"]


def _figure(width: float = 6.5, height: float = 4.0):
    import matplotlib
    matplotlib.use("Agg", force=False)
    from matplotlib.figure import Figure
    return Figure(figsize=(width, height), dpi=150, layout="constrained")


def _save(fig, path: str | os.PathLike) -> Path:
    """Render to PNG in memory, then write atomically (temp file + rename)."""
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    return atomic_write_bytes(path, buffer.getvalue())


def plot_probability(result: WindowResult, path: str | os.PathLike) -> Path:
    """Probability of meeting every specification against pH, with the level
    line, the window (light) and the robust set points (dark) shaded.

    The two curves are the step functions the windows are computed from
    (``result.curve_*``: the share of draws meeting every specification at
    the set point, and at every pH within +/- tolerance; its one-sided
    Monte Carlo lower bound when ``result.mc_confidence`` is set), so each shaded
    band begins and ends where its curve crosses the level.  Results without
    those curves (older files) draw the grid values.
    """
    fig = _figure()
    ax = fig.add_subplot()
    for k, (a, b) in enumerate(result.windows):
        ax.axvspan(a, b, color=OKABE_ITO["sky blue"], alpha=0.25, lw=0,
                   label="window (p >= level)" if k == 0 else None)
    for k, (a, b) in enumerate(result.robust_windows):
        ax.axvspan(a, b, color=OKABE_ITO["blue"], alpha=0.35, lw=0,
                   label=f"robust set points (+/- {result.tolerance:g} pH)" if k == 0 else None)
    if result.curve_ph is not None:
        x, p, robust = result.curve_ph, result.curve_probability, result.curve_robust_probability
        # binomial Monte Carlo standard error of a share of n draws, on the same step curve
        se = np.sqrt(np.clip(p * (1.0 - p), 0.0, None) / max(int(result.n_draws), 1))
    else:
        x, p, robust = result.ph, result.probability, result.robust_probability_per_draw
        se = result.probability_standard_error
    if result.mc_confidence is None:
        ax.fill_between(x, np.clip(p - 2 * se, 0, 1), np.clip(p + 2 * se, 0, 1), color=OKABE_ITO["black"],
                        alpha=0.15, lw=0, label="+/- 2 Monte Carlo s.e.")
        what = "probability, all specifications met"
    else:   # the curves are the Monte Carlo lower bound (decision/montecarlo.py): no band around them
        what = f"probability, all specifications met ({result.mc_confidence:.0%} lower bound)"
    ax.plot(x, p, color=OKABE_ITO["black"], lw=1.8, label=what)
    if robust is not None and np.any(np.isfinite(robust)):
        ax.plot(x, robust, color=OKABE_ITO["vermillion"], lw=1.2, ls="--",
                label=f"all met at every pH within +/- {result.tolerance:g}")
    ax.axhline(result.level, color=OKABE_ITO["orange"], lw=1.2, ls=":", label=f"level {result.level:g}")
    if result.best_ph is not None:
        ax.axvline(result.best_ph, color=OKABE_ITO["reddish purple"], lw=1.0,
                   label=f"best set point pH {result.best_ph:.2f}")
    ax.set_xlabel("set-point pH [-]")
    ax.set_ylabel("probability [-]")
    ax.set_ylim(-0.02, 1.02)
    ax.set_xlim(result.ph[0], result.ph[-1])
    title = (f"Probability of meeting every specification\n({result.n_draws} draws: "
             f"{result.uncertainty_source})")
    if result.status:
        title += f"\nstatus: {result.status}"
    ax.set_title(title, fontsize=9)
    ax.legend(fontsize=7, loc="best")
    return _save(fig, path)


def plot_outcomes(result: WindowResult, path: str | os.PathLike, colors=None) -> Path:
    """Median and 5-95 % band of each outcome against pH; ``colors`` (a
    :class:`speciakin.palette.SpeciesColors` of the model) gives each species
    the colour it has in every other figure."""
    fig = _figure()
    ax = fig.add_subplot()
    area = False
    for k, name in enumerate(result.outcome_names):
        # an area% column (an area% specification asked for it) in its molecule's colour, dashed
        molecule = area_molecule(name) or name
        area |= molecule != name
        colour = colors.color(molecule) if colors is not None else cycle_style(k)[0]
        ax.fill_between(result.ph, result.outcome_lower[name], result.outcome_upper[name],
                        color=colour, alpha=0.25 if molecule == name else 0.12, lw=0)
        label = colors.aliases.get(molecule, molecule) if colors is not None else molecule
        ax.plot(result.ph, result.outcome_median[name], color=colour, lw=1.6 if molecule == name else 1.2,
                ls="-" if molecule == name else "--", label=label if molecule == name else f"{label}, HPLC area%")
    for a, b in result.windows:
        ax.axvline(a, color=OKABE_ITO["black"], lw=0.8, ls=":")
        ax.axvline(b, color=OKABE_ITO["black"], lw=0.8, ls=":")
    ax.set_xlabel("set-point pH [-]")
    ax.set_ylabel("mole % of substrate moiety [%]" + ("\n(dashed: HPLC area% [%])" if area else ""))
    ax.set_xlim(result.ph[0], result.ph[-1])
    ax.set_title("Expected outcome at the end of the process: median and 5-95 % band", fontsize=9)
    if result.outcome_names:
        ax.legend(fontsize=7, loc="best")
    return _save(fig, path)


def plot_map(result: WindowResult, path: str | os.PathLike) -> Path:
    """Probability over pH x second factor, with the level contour.

    Raises
    ------
    ValueError
        If the result has no second factor.
    """
    if result.map_probability is None:
        raise ValueError("this result has no second factor; there is no 2-D map to draw")
    from matplotlib.colors import LinearSegmentedColormap

    fig = _figure()
    ax = fig.add_subplot()
    cmap = LinearSegmentedColormap.from_list("probability",
                                             ["#FFFFFF", OKABE_ITO["sky blue"], OKABE_ITO["blue"]])
    y = np.asarray(result.factor_values, dtype=float)
    mesh = ax.pcolormesh(result.ph, y, result.map_probability.T, cmap=cmap, vmin=0, vmax=1,
                         shading="nearest")
    fig.colorbar(mesh, ax=ax, label="probability [-]")
    if result.ph.size > 1 and y.size > 1:
        ax.contour(result.ph, y, result.map_probability.T, levels=[result.level],
                   colors=[OKABE_ITO["vermillion"]], linewidths=1.5)
    ax.set_xlabel("set-point pH [-]")
    ax.set_ylabel(f"{result.factor_name} [{result.factor_unit}]")
    ax.set_title(f"Design space: probability of meeting every specification "
                 f"(contour at {result.level:g})", fontsize=9)
    return _save(fig, path)
