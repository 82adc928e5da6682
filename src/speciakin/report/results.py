"""Render a pipeline's results: the figures folder of each step and the report files.

These functions only render what the pipeline computed
(:class:`speciakin.pipeline.run.Results`, with its
:class:`~speciakin.pipeline.predictions.PredictionSet`); the module as a whole
is the renderer that :func:`speciakin.pipeline.run.run_all` is given.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

from speciakin._io import atomic_write_bytes
from speciakin.pipeline.outputs import FIGURES_FOLDER, RESULT_FILES

__all__ = ["fit_figures", "posterior_figures", "suggest_figures", "write_report"]


def _figures(out: Path) -> Path:
    return Path(out) / FIGURES_FOLDER


def fit_figures(model: Any, predictions: Any, fit: Any, out: Path) -> list[Path]:
    """Per-run data-and-model plots, residuals, profiles and correlation into ``out/figures``."""
    from speciakin.report.assemble.figures import fit_figure_set

    return [atomic_write_bytes(_figures(out) / f"{name}.png", png)
            for name, png in fit_figure_set(model, predictions, fit).items()]


def posterior_figures(posterior: Any, out: Path) -> list[Path]:
    """Trace and corner plots of a posterior into ``out/figures`` (the report's plots, drawn once:
    :mod:`speciakin.report.figures._memo`)."""
    import numpy as np

    from speciakin.report.assemble.posterior import corner_samples
    from speciakin.report.figures import corner_figure, trace_figure

    names = list(posterior.parameter_names)
    chain = np.asarray(posterior.chain, float)
    burn = min(max(int(posterior.burn_in), 0), chain.shape[0] - 1)
    paths = [atomic_write_bytes(_figures(out) / "posterior_trace.png", trace_figure(chain, names, burn_in=burn))]
    if posterior.samples.shape[0] > 2 * posterior.samples.shape[1]:
        paths.append(atomic_write_bytes(_figures(out) / "posterior_corner.png",
                                        corner_figure(corner_samples(posterior.samples), names)))
    return paths


def suggest_figures(suggestion: Any, out: Path) -> list[Path]:
    """The expected shrinkage of the decision's uncertainty against pH of a next-run suggestion
    into ``out/figures/suggest_shrinkage.png`` (the report's suggestion section shows it)."""
    from speciakin.report.figures.suggest import suggest_shrinkage_figure

    curves = suggestion.by_ph()
    png = suggest_shrinkage_figure(curves["ph"], curves["edge_low"], curves["edge_high"], curves["undecided"],
                                   curves["d_gain"], min_gain=suggestion.min_gain if suggestion.has_decision else None,
                                   best_ph=suggestion.candidates[0].conditions["setpoint_pH"],
                                   title="Expected shrinkage of the decision's uncertainty")
    return [atomic_write_bytes(_figures(out) / "suggest_shrinkage.png", png)]


def write_report(out: Path, results: Any, *, invented: bool = False, formats=None, command: str = "",
                 stem: str = RESULT_FILES["report"], author: str = "", reviewer: str = "") -> dict[str, Path]:
    """Build the report document from ``results`` and render it; returns {format: path}.

    Parameters
    ----------
    out
        Output folder.
    results
        :class:`speciakin.pipeline.run.Results` (model, campaign, inputs and
        whatever steps have run).
    invented
        Label the report as based on invented demonstration data.
    formats
        Formats among :data:`~speciakin.report.render.REPORT_FORMATS` (None: all).
    command
        The command that reproduces the report.
    author, reviewer
        Names for the report's QA block (default: the process file's
        ``[report]`` table).

    A ``suggest.json`` in ``out`` (and ``figures/suggest_shrinkage.png``) adds
    the next-run suggestion section.
    """
    from speciakin import __version__
    from speciakin.report.assemble import ReportInputs, build_report
    from speciakin.pipeline.outputs import load_suggestion
    from speciakin.report.render import render_all

    figure = _figures(out) / "suggest_shrinkage.png"
    extra = results.inputs.labelled() if results.inputs is not None else []
    doc = build_report(ReportInputs(
        model=results.model, campaign=results.campaign, predictions=results.predictions, fit=results.fit,
        posterior=results.posterior, window=results.window, process=results.process, check=results.check,
        command=command, software_version=__version__, extra_inputs=extra, invented=invented,
        suggestion=load_suggestion(Path(out)), suggestion_figure=figure if figure.is_file() else None,
        author=author, reviewer=reviewer, base_folder=Path(out).resolve().parent))
    return render_all(doc, Path(out), stem, tuple(formats) if formats else None)
