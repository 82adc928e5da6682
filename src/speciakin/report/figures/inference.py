"""Inference figures: likelihood profiles, sampler traces, corner plot, correlations.

References
----------
.. [1] Raue, A. et al., "Structural and practical identifiability analysis of
   partially observed dynamical models by exploiting the profile
   likelihood", Bioinformatics 2009, 25, 1923-1929 (profile threshold is the
   chi-square quantile with one degree of freedom, eq. 9).
.. [2] Foreman-Mackey, D. et al., "emcee: The MCMC Hammer", PASP 2013, 125,
   306 (walker traces as a convergence check).
"""

from __future__ import annotations

import math
from typing import Mapping, Sequence

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.report.figures._memo import remembered
from speciakin.report.figures._style import TEXT_WIDTH_IN, as_array, new_figure, same_length, to_png
from speciakin.palette import NEUTRAL, OKABE_ITO

__all__ = ["PROFILE_THRESHOLD_95", "profile_figure", "profile_plot", "trace_figure", "corner_figure", "corner_plot",
           "correlation_figure"]

#: 95 % quantile of the chi-square distribution with 1 degree of freedom
#: (scipy.stats.chi2.ppf(0.95, 1) = 3.841458820694124).
PROFILE_THRESHOLD_95 = 3.841458820694124


def _names(names: Sequence[str], count: int, key: str) -> list[str]:
    names = [str(n) for n in names]
    if len(names) != count:
        raise InputError("one name per parameter needed", Location(key=key), len(names), f"{count} names")
    return names


@remembered
def profile_figure(
    values: Mapping[str, Sequence[float]],
    delta_chi_square: Mapping[str, Sequence[float]],
    best: Mapping[str, float] | None = None,
    threshold: float = PROFILE_THRESHOLD_95,
    units: Mapping[str, str] | None = None,
    columns: int = 2,
) -> bytes:
    """Profile likelihood of each parameter: delta chi-square against value [1]_ (PNG bytes).

    Parameters
    ----------
    values
        Per parameter: the fixed values of the profile.
    delta_chi_square
        Per parameter: chi-square above the best fit at each value [-].
    best
        Per parameter: best-fit value (marked).
    threshold
        Horizontal line; the interval is where the profile stays below it.
    units
        Per parameter: unit shown in the axis label.
    """
    return to_png(profile_plot(values, delta_chi_square, best, threshold, units, columns, draw=False))


def _wrap(text: str, width: int) -> str:
    import textwrap

    return "\n".join(textwrap.wrap(text, width, break_long_words=True, break_on_hyphens=False)) or text


def profile_plot(values, delta_chi_square, best=None, threshold: float = PROFILE_THRESHOLD_95, units=None,
                 columns: int = 2, draw: bool = True):
    """The matplotlib figure of :func:`profile_figure` (drawn when ``draw``, not yet saved): one panel
    per parameter, its name as the panel title (wrapped), few ticks so no label overlaps.  Saving
    draws it anyway, so :func:`profile_figure` skips the first drawing."""
    from matplotlib.ticker import MaxNLocator

    names = list(values)
    if not names:
        raise InputError("no profile to plot", Location(key="values"), None, "at least one parameter")
    n_cols = max(1, min(columns, len(names)))
    n_rows = math.ceil(len(names) / n_cols)
    fig = new_figure(TEXT_WIDTH_IN, 2.3 * n_rows + 0.3)
    axes = np.atleast_1d(fig.subplots(n_rows, n_cols, squeeze=False)).ravel()
    chars = int(90 / n_cols)
    for ax, name in zip(axes, names):
        if name not in delta_chi_square:
            raise InputError("profile values without delta chi-square", Location(key=f"delta_chi_square['{name}']"),
                             name, "one curve per parameter")
        x = as_array(values[name], f"values['{name}']")
        y = as_array(delta_chi_square[name], f"delta_chi_square['{name}']")
        same_length(values=x, delta_chi_square=y)
        order = np.argsort(x)
        ax.plot(x[order], y[order], color=OKABE_ITO["blue"], marker="o", markersize=2.5, linewidth=1.4)
        ax.axhline(threshold, color=NEUTRAL, linestyle="--", linewidth=1.0)
        if best and name in best:
            ax.axvline(float(best[name]), color=OKABE_ITO["vermillion"], linewidth=1.0)
        unit = (units or {}).get(name)
        ax.set_title(_wrap(name, chars), fontsize=8)
        ax.set_xlabel(_wrap(f"value [{unit}]" if unit else "value", chars))
        ax.set_ylabel("\u0394\u03c7\u00b2 [-]")
        ax.set_ylim(bottom=0.0)
        ax.xaxis.set_major_locator(MaxNLocator(3))  # long labels (-0.4512) stay apart
        ax.yaxis.set_major_locator(MaxNLocator(4))
    for ax in axes[len(names):]:
        ax.set_visible(False)
    if draw:
        fig.canvas.draw()
    return fig


@remembered
def trace_figure(
    samples: Sequence,
    names: Sequence[str],
    burn_in: int = 0,
    max_walkers: int = 32,
) -> bytes:
    """Walker traces of an ensemble sampler [2]_.

    Parameters
    ----------
    samples
        Array of shape ``(steps, walkers, parameters)``.
    names
        Parameter names (axis labels; include units).
    burn_in
        Steps discarded as burn-in; marked with a vertical line.
    max_walkers
        At most this many walkers are drawn (the first ones).
    """
    chain = as_array(samples, "samples", ndim=3)
    steps, walkers, n_par = chain.shape
    names = _names(names, n_par, "names")
    if not (0 <= burn_in < steps):
        raise InputError("burn-in outside the chain", Location(key="burn_in"), burn_in, f"0 to {steps - 1}")
    fig = new_figure(TEXT_WIDTH_IN, 1.15 * n_par + 0.5)
    axes = np.atleast_1d(fig.subplots(n_par, 1, sharex=True, squeeze=False)).ravel()
    step = np.arange(steps)
    for i, ax in enumerate(axes):
        ax.plot(step, chain[:, :max_walkers, i], color=OKABE_ITO["blue"], alpha=0.25, linewidth=0.6)
        if burn_in:
            ax.axvline(burn_in, color=OKABE_ITO["vermillion"], linestyle="--", linewidth=1.0)
        ax.set_ylabel(names[i], rotation=0, ha="right", va="center")
    axes[-1].set_xlabel("step [-]")
    return to_png(fig)


@remembered
def corner_figure(
    samples: Sequence,
    names: Sequence[str],
    truths: Sequence[float] | None = None,
    bins: int = 30,
) -> bytes:
    """Pairwise scatter densities and marginal histograms of posterior samples.

    Parameters
    ----------
    samples
        Array of shape ``(draws, parameters)`` (burn-in removed, flattened).
    names
        Parameter names (axis labels; include units).
    truths
        Optional reference values (e.g. the known truth of synthetic data).
    bins
        Histogram bins per axis.
    """
    return to_png(corner_plot(samples, names, truths, bins, draw=False))


def corner_plot(samples, names, truths=None, bins: int = 30, draw: bool = True):
    """The matplotlib figure of :func:`corner_figure` (drawn when ``draw``, not yet saved; saving
    draws it anyway, so :func:`corner_figure` skips the first drawing).

    Axes are labelled by parameter number; the key (number = name) sits in
    the empty upper triangle, and each axis keeps at most three ticks, so no
    label overlaps another however many parameters there are.
    """
    from matplotlib.ticker import MaxNLocator

    draws = as_array(samples, "samples", ndim=2, allow_nan=False)
    n_par = draws.shape[1]
    names = _names(names, n_par, "names")
    ref = as_array(truths, "truths") if truths is not None else None
    if ref is not None and len(ref) != n_par:
        raise InputError("one reference value per parameter needed", Location(key="truths"), len(ref),
                         f"{n_par} values")
    size = min(TEXT_WIDTH_IN, 1.6 * n_par + 0.6) if n_par > 1 else 3.2
    fig = new_figure(size, size)
    small = 6 if n_par > 4 else 7
    grid = fig.add_gridspec(n_par, n_par)  # the grid of fig.subplots; the upper triangle gets no axes
    for row in range(n_par):
        for col in range(row + 1):
            ax = fig.add_subplot(grid[row, col])
            if row == col:
                ax.hist(draws[:, col], bins=bins, color=OKABE_ITO["blue"], histtype="stepfilled", alpha=0.6)
                ax.set_yticks([])
            else:
                ax.hist2d(draws[:, col], draws[:, row], bins=bins, cmap="Blues")
                if ref is not None:
                    ax.axhline(ref[row], color=OKABE_ITO["vermillion"], linewidth=0.9)
            if ref is not None:
                ax.axvline(ref[col], color=OKABE_ITO["vermillion"], linewidth=0.9)
            ax.grid(False)
            ax.xaxis.set_major_locator(MaxNLocator(3 if n_par <= 4 else 2, prune="both"))
            ax.yaxis.set_major_locator(MaxNLocator(3 if n_par <= 4 else 2, prune="both"))
            ax.tick_params(labelsize=small)
            if row == n_par - 1:
                ax.set_xlabel(f"({col + 1})" if n_par > 1 else names[col], fontsize=small + 1)
                ax.tick_params(axis="x", labelrotation=45 if n_par <= 4 else 90)
            else:
                ax.set_xticklabels([])
            if col == 0 and row > 0:
                ax.set_ylabel(f"({row + 1})", fontsize=small + 1)
            elif col > 0 or row == 0:
                ax.set_yticklabels([])
    if n_par > 1:
        # the key fills the empty upper triangle: wrap to its width (character ~0.55 em)
        chars = max(12, int(0.9 * size * (n_par - 1) / n_par / (0.55 * (small + 1) / 72.0)) - 5)
        key = "\n".join(f"({i + 1}) {_wrap(n, chars)}" for i, n in enumerate(names))
        fig.text(0.98, 0.98, key, ha="right", va="top", fontsize=small + 1, linespacing=1.3, multialignment="left")
    if draw:
        fig.canvas.draw()
    return fig


@remembered
def correlation_figure(matrix: Sequence[Sequence[float]], names: Sequence[str], annotate: bool | None = None) -> bytes:
    """Heat map of a parameter correlation matrix (values -1 to 1).

    Parameters
    ----------
    matrix
        Square correlation matrix.
    names
        Parameter names.
    annotate
        Write the coefficient in each cell (default: when 12 parameters or fewer).
    """
    corr = as_array(matrix, "matrix", ndim=2)
    if corr.shape[0] != corr.shape[1]:
        raise InputError("correlation matrix is not square", Location(key="matrix"), corr.shape, "n x n")
    finite = corr[np.isfinite(corr)]
    if np.any(np.abs(finite) > 1.0 + 1e-9):
        raise InputError("correlation outside -1..1", Location(key="matrix"), float(np.max(np.abs(finite))),
                         "values from -1 to 1")
    n = corr.shape[0]
    names = _names(names, n, "names")
    size = min(TEXT_WIDTH_IN, 0.45 * n + 2.2)
    fig = new_figure(size + 0.8, size)
    ax = fig.add_subplot()
    image = ax.imshow(corr, cmap="PuOr_r", vmin=-1.0, vmax=1.0)
    fig.colorbar(image, ax=ax, label="correlation [-]")
    ax.set_xticks(range(n), names, rotation=60, ha="right")
    ax.set_yticks(range(n), names)
    ax.grid(False)
    if annotate if annotate is not None else n <= 12:
        for i in range(n):
            for j in range(n):
                if np.isfinite(corr[i, j]):
                    ax.text(j, i, f"{corr[i, j]:.2f}", ha="center", va="center", fontsize=7,
                            color="white" if abs(corr[i, j]) > 0.6 else "black")
    return to_png(fig)
