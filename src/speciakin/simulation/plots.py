"""Plots of simulated runs (matplotlib, Agg): concentration, pH and titrant vs time.

Colours come from the Okabe-Ito palette (colour-blind safe) and are fixed per
species name across every figure of a call, so a species keeps its colour.

References
----------
.. [1] Okabe, M. and Ito, K., "Color Universal Design (CUD): how to make
   figures and presentations that are friendly to colorblind people", 2002.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from speciakin.palette import cycle_style
from speciakin.simulation.results import SimulationResult

__all__ = ["species_colours", "plot_run", "plot_ph", "plot_titrant"]


def species_colours(names: Sequence[str]) -> dict[str, tuple[str, str]]:
    """Stable (colour, line style) per species, in model order (:mod:`speciakin.palette`)."""
    return {n: cycle_style(i) for i, n in enumerate(names)}


def _save(fig, path: Path) -> None:
    import io

    from speciakin._io import atomic_write_bytes

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=120)
    atomic_write_bytes(path, buf.getvalue())


def plot_run(result: SimulationResult, path: str | Path, molecules_only: bool = True) -> Path:
    """Concentration [mol/L] of every molecule against time [min]; returns the file path."""
    import matplotlib.pyplot as plt

    names = result.molecule_names if molecules_only else result.species_names
    style = species_colours(result.species_names)
    fig, ax = plt.subplots(figsize=(7, 4.5))
    for name in names:
        colour, line = style[name]
        ax.plot(result.times / 60.0, result.concentration(name), line, color=colour, label=name)
    ax.set_xlabel("time [min]")
    ax.set_ylabel("concentration [mol/L]")
    ax.set_title(f"Run {result.run_name} (simulated)")
    ax.legend(fontsize=8, ncols=2)
    fig.tight_layout()
    _save(fig, Path(path))
    plt.close(fig)
    return Path(path)


def _all_runs(results: Sequence[SimulationResult], path, values, ylabel: str, title: str) -> Path:
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(7, 4.5))
    for i, res in enumerate(results):
        color, line = cycle_style(i)
        ax.plot(res.times / 60.0, values(res), line, color=color, label=res.run_name)
    ax.set_xlabel("time [min]")
    ax.set_ylabel(ylabel)
    ax.set_title(title)
    ax.legend(fontsize=8)
    fig.tight_layout()
    _save(fig, Path(path))
    plt.close(fig)
    return Path(path)


def plot_ph(results: Sequence[SimulationResult], path: str | Path) -> Path:
    """pH against time [min] for every run."""
    return _all_runs(results, path, lambda r: r.ph, "pH", "pH (simulated)")


def plot_titrant(results: Sequence[SimulationResult], path: str | Path) -> Path:
    """Titrant consumed [mmol] against time [min] for every run."""
    return _all_runs(results, path, lambda r: r.titrant * 1e3, "titrant consumed [mmol]",
                     "Titrant consumed (simulated)")
