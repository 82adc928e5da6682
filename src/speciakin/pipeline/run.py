"""The whole job and the results of an output folder.

:func:`run_all` chains check -> fit -> sample -> window and hands the
:class:`Results` to a renderer for the figures and the report;
:func:`load_results` rebuilds the same :class:`Results` from the files of an
output folder (what ``speciakin report`` renders).  The renderer is passed in
because the report layer sits above this one: the command line passes
:mod:`speciakin.report.results`, another front end may pass its own object
with the same three functions (:class:`Renderer`).
"""

from __future__ import annotations

import dataclasses
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Callable, Protocol

from speciakin.errors import DataError, InputError, Location
from speciakin.pipeline import outputs
from speciakin.pipeline.inputs import Inputs, load_inputs
from speciakin.pipeline.steps import (
    CancelFlag,
    Progress,
    check_step,
    fit_step,
    make_objective,
    predict_step,
    sample_step,
    suggest_step,
    timed,
    window_lines,
    window_step,
)

if TYPE_CHECKING:
    from speciakin.chemistry.model import Model
    from speciakin.data.campaign import Campaign
    from speciakin.data.validate import CheckReport
    from speciakin.decision.process_plan import ProcessPlan
    from speciakin.decision.result import WindowResult
    from speciakin.estimation.sampling import PosteriorResult
    from speciakin.pipeline.fit import CampaignFitResult
    from speciakin.pipeline.objective import CampaignObjective
    from speciakin.pipeline.predictions import PredictionSet

__all__ = ["Results", "Renderer", "run_all", "load_results", "for_report", "STEPS"]

#: The steps of :func:`run_all`, in order.
STEPS = ("check", "fit", "sample", "window", "report")


class Renderer(Protocol):
    """What :func:`run_all` needs to draw figures and write the report."""

    def fit_figures(self, model: Any, predictions: Any, fit: Any, out: Path) -> list[Path]: ...

    def posterior_figures(self, posterior: Any, out: Path) -> list[Path]: ...

    def write_report(self, out: Path, results: "Results", *, invented: bool = False, formats=None,
                     command: str = "") -> dict[str, Path]: ...


@dataclass
class Results:
    """Inputs and every result of a campaign; a step that has not run leaves None."""

    #: The loaded inputs (process None without a process file) and their paths.
    model: Model
    campaign: Campaign
    process: ProcessPlan | None = None
    inputs: Inputs | None = None
    #: Model + campaign -> residuals and likelihood (what every step evaluates).
    objective: CampaignObjective | None = None
    #: The results of the steps.
    check: CheckReport | None = None
    fit: CampaignFitResult | None = None
    posterior: PosteriorResult | None = None
    window: WindowResult | None = None
    #: The next-run suggestion, made when the window's failing gates are ones more runs lift.
    suggestion: Any = None
    #: Curves, bands and fitted values for the report and figures.
    predictions: PredictionSet | None = None
    #: {format: path} of the rendered report, and the wall time of each step [s].
    report: dict[str, Path] = field(default_factory=dict)
    timings: dict[str, float] = field(default_factory=dict)

    @property
    def missing(self) -> list[str]:
        """Names of the results that do not exist (reported as "not run")."""
        return [name for name in ("fit", "posterior", "window") if getattr(self, name) is None]


def checked_inputs(inputs: Inputs, out: Path, timings: dict[str, float], say: Callable[[str], None]):
    """The check step of a run: raises DataError on errors, says every warning's text; the CheckReport."""
    check = timed(timings, "check", lambda: check_step(inputs, out))
    if check.errors:
        raise DataError(problems=check.errors)
    say(f"check: {len(check.errors)} errors, {len(check.warnings)} warnings")
    for problem in check.warnings:  # their text, not only their number
        say(f"  warning: {problem.describe()}")
    return check


def run_all(inputs: Inputs, out: Path, *, renderer: Renderer | None = None, starts: int | None = None,
            seed: int = 1, n_steps: int | None = None, n_walkers: int | None = None, jobs: int = 1, scheduler=None,
            resume: bool = False, profiles: bool = True, draws: int | None = None, invented: bool = False,
            formats=None, progress: Progress | None = None, cancel: CancelFlag | None = None,
            say: Callable[[str], None] = lambda s: None, on_step: Callable[[str], None] | None = None,
            sample_bar: bool = False, max_steps: int | None = None) -> Results:
    """check -> fit -> sample -> window -> report, each step's output kept in ``out``.

    A window whose failing trust gates are ones more runs lift (an unidentified parameter, an edge
    beyond the runs' pH) is followed by the next-run suggestion (``suggest.json``), which the
    report then shows.

    Parameters
    ----------
    inputs
        Resolved input paths (:func:`~speciakin.pipeline.inputs.resolve_inputs`).
    out
        Output folder (created).
    renderer
        Draws the figures and writes the report (:mod:`speciakin.report.results`);
        None: results files only.
    starts, seed, profiles
        Least-squares settings (see :func:`~speciakin.pipeline.fit.fit_campaign`).
    n_steps, n_walkers, jobs, scheduler, resume, max_steps
        Sampler settings (see :func:`~speciakin.pipeline.steps.sample_step`).
    draws
        Parameter draws of the window (default: the process file's).
    invented, formats
        Report label and formats.
    progress, cancel
        ``progress(stage, done, total)`` and a flag with ``is_set()`` (see
        :mod:`speciakin.pipeline.steps`).
    say
        Receives one line of text after each step.
    on_step
        Called with the step name when a step starts.
    sample_bar
        Show the sampler's own progress bar (with time left) when ``progress`` is None.

    Returns
    -------
    Results

    Raises
    ------
    SpeciakinError
        The first step's error; every earlier step's output stays in ``out``.
    Cancelled
        ``cancel`` was set.
    """
    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    started = on_step or (lambda name: None)
    timings: dict[str, float] = {}
    started("check")
    check = checked_inputs(inputs, out, timings, say)

    model, campaign, process = load_inputs(inputs)
    results = Results(model, campaign, process, inputs, check=check, timings=timings)
    started("fit")
    results.objective = objective = make_objective(model, campaign)
    results.fit = fit = timed(timings, "fit", lambda: fit_step(
        objective, out, starts=starts, seed=seed, profiles=profiles, progress=progress, cancel=cancel))
    say(f"fit: chi-square {fit.fit.chisqr:.4g}, reduced {fit.fit.reduced_chisqr:.3g} ({timings['fit']:.1f} s)")
    results.predictions = predict_step(objective, fit)
    if renderer is not None:
        renderer.fit_figures(model, results.predictions, fit, out)

    started("sample")
    results.posterior = posterior = timed(timings, "sample", lambda: sample_step(
        objective, fit, out, n_steps=n_steps, n_walkers=n_walkers, seed=seed, resume=resume, jobs=jobs,
        scheduler=scheduler, progress=progress if progress is not None else sample_bar, cancel=cancel,
        max_steps=max_steps))
    if renderer is not None:
        renderer.posterior_figures(posterior, out)
    say(f"sample: {posterior.n_walkers} walkers x {posterior.n_steps} steps, "
        f"{'converged' if posterior.converged else 'NOT converged'} ({timings['sample']:.1f} s); "
        f"stopped: {posterior.stop_message}")

    if process is not None:
        started("window")
        results.window = timed(timings, "window", lambda: window_step(
            objective, process, out, fit=fit, posterior=posterior, draws=draws, seed=seed, progress=progress,
            cancel=cancel))
        for line in window_lines(results.window, timings["window"]):
            say(line)
        _suggest(results, out, renderer, seed, progress, cancel, say, started)
    else:
        say("window: skipped (no process file)")

    started("report")
    results.predictions = predict_step(objective, fit, posterior, previous=results.predictions)
    if renderer is not None:
        results.report = timed(timings, "report", lambda: renderer.write_report(
            out, for_report(results, out), invented=invented or says_invented(model), formats=formats,
            command=outputs.command_line(out)))
        say("report: " + ", ".join(str(p) for p in results.report.values()))
    outputs.save_timings(out, timings)
    return results


def _suggest(results: Results, out: Path, renderer, seed, progress, cancel, say, started) -> None:
    """The next-run suggestion of a window that more runs would firm up (:func:`suggest_step`), its figure,
    and a line saying what it found; a suggestion that cannot be made is said, not raised (the window and
    the report stand without it)."""
    from speciakin.decision.next_steps import runs_would_help

    if results.window is None or not runs_would_help(results.window.gates):
        return
    started("suggest")
    try:
        results.suggestion = timed(results.timings, "suggest", lambda: suggest_step(
            results.objective, results.process, results.window, out, fit=results.fit, posterior=results.posterior,
            seed=seed, inputs=results.inputs, progress=progress, cancel=cancel))
    except InputError as exc:
        say(f"suggest: not made: {exc}")
        return
    figures = getattr(renderer, "suggest_figures", None)
    if figures is not None:
        figures(results.suggestion, out)
    say(f"suggest: {results.suggestion.message} ({results.timings['suggest']:.1f} s)")


class ShownPath(os.PathLike):
    """A file read at its real path but written into outputs as a path relative to a result folder."""

    def __init__(self, real: str | os.PathLike, folder: Path) -> None:
        self.real = Path(real)
        self.shown = outputs.relative(real, folder)

    def __fspath__(self) -> str:
        return str(self.real)

    def __str__(self) -> str:
        return self.shown

    def __repr__(self) -> str:
        return self.shown


def says_invented(model: Any) -> bool:
    """True when the model file's description starts with "invented" (the demo, the ``new --example``
    campaign): its report is labelled as based on invented data by every path that writes one."""
    return str(getattr(model, "description", "") or "").strip().lower().startswith("invented")


def for_report(results: Results, out: Path) -> Results:
    """A copy of ``results`` whose input paths print relative to ``out`` (files are still read at their
    real paths), so that the report names no folder of the machine."""
    out = Path(out)
    campaign = results.campaign
    try:
        campaign = dataclasses.replace(
            campaign, source=outputs.recorded_path(campaign.source, out) if campaign.source else campaign.source,
            provenance=tuple(dataclasses.replace(p, path=outputs.recorded_path(str(p.path), out))
                             for p in campaign.provenance))
    except (TypeError, AttributeError):  # a campaign object without these fields
        pass
    inputs = results.inputs
    if inputs is not None:
        inputs = Inputs(ShownPath(inputs.campaign, out), ShownPath(inputs.model, out),
                        None if inputs.process is None else ShownPath(inputs.process, out))
    check = None if results.check is None else outputs.check_as_recorded(results.check, out)
    return dataclasses.replace(results, campaign=campaign, inputs=inputs, check=check)


def load_results(folder: Path, *, campaign: str | None = None, model: str | None = None,
                 process: str | None = None, check: bool = True) -> Results:
    """The results in an output folder, with the inputs they belong to and their predictions.

    The model and campaign are the ones given, else the ones named in
    ``fit.json``; results of another model are refused.

    Raises
    ------
    InputError
        Folder missing, inputs not found, or a result that does not belong to the model.
    """
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import check_campaign, load_campaign
    from speciakin.decision.process import load_process

    folder = Path(folder)
    if not folder.is_dir():
        raise InputError("output folder not found", Location(file=str(folder)),
                         expected="the folder a previous fit, sample or window command wrote")
    entry = outputs.load_fit_data(folder)
    fit, fit_data = entry if entry is not None else (None, {})
    model_path = outputs.resolve_input(model, fit_data.get("model"), folder, "model file", "model")
    campaign_path = outputs.resolve_input(campaign, fit_data.get("campaign"), folder, "campaign", "campaign")
    # the process file: the one given, else the one the window was computed for (unchanged since)
    process_path = (outputs.resolve_input(process, None, folder, "process file", "process") if process
                    else outputs.window_process(folder))
    loaded_model = load_model(model_path)
    loaded_campaign = load_campaign(campaign_path)
    objective = make_objective(loaded_model, loaded_campaign)
    if fit is not None and list(fit.names) != list(objective.names):
        raise InputError("fit.json does not belong to this model: its fitted parameters differ",
                         Location(file=str(outputs.result_path(folder, "fit")), key="parameters"),
                         ", ".join(fit.names), "the model's fitted parameters " + ", ".join(objective.names))
    results = Results(
        loaded_model, loaded_campaign, load_process(process_path, loaded_model) if process_path else None,
        Inputs(campaign_path, model_path, process_path), objective=objective, fit=fit,
        posterior=outputs.load_posterior(folder), window=outputs.load_window(folder),
        check=check_campaign(campaign_path, model=loaded_model) if check else None)
    results.predictions = predict_step(objective, results.fit, results.posterior)
    return results
