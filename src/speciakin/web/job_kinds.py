"""The kinds of job the page starts: fit, posterior, window, suggestion, report and the whole run.

Each kind calls the pipeline's Python API (never the command line) inside a
:class:`speciakin.pipeline.Recording`, so every job gets a new result folder
``<campaign>/results/<UTC time>-<id>/`` with its lock and ``status.json``
and a row in the campaign's results index, exactly as a command-line run.
A job that builds on an earlier result (posterior, window, suggestion,
report) takes the one chosen on the page or the newest complete result that
holds what it needs, and copies the files it builds on into its own folder.

A kind's work is ``work(job, campaign, feedback) -> str``: ``job.settings``
holds the checked settings, ``job.cancel`` the cancel flag, ``feedback`` is
called as ``feedback(stage, done, total)`` (it raises
:class:`speciakin.pipeline.Cancelled` once the job is cancelled) and
``feedback.opened(folder)`` names the result folder as soon as it exists;
the returned text is the job's summary.
"""

from __future__ import annotations

import re
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable, Iterator

from speciakin.errors import InputError, Location

__all__ = ["JobKind", "JOB_KINDS", "clean_settings", "SETTINGS"]

#: Files a job copies from the result it builds on (so its folder stands alone), by step.
_CARRIED = {
    "sample": ("fit", "fit_text"),
    "window": ("fit", "fit_text", "posterior", "posterior_summary", "posterior_text"),
    "suggest": ("fit", "fit_text", "posterior", "posterior_summary", "posterior_text", "window", "window_text"),
    "report": ("check", "fit", "fit_text", "posterior", "posterior_summary", "posterior_text", "window",
               "window_text", "suggest", "suggest_text", "timings"),
}
_RESULT_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,80}$")


@dataclass(frozen=True)
class JobKind:
    """One kind of job: its label on the page, the step it records, the settings it reads and its work."""

    label: str
    step: str
    reads: tuple[str, ...]
    work: Callable[..., str]


# ------------------------------------------------------------------ settings from the page
def _whole(key: str, low: int, high: int, what: str) -> Callable[[Any], int | None]:
    def check(value: Any) -> int | None:
        if value is None or value == "":
            return None
        try:
            number = float(value)
        except (TypeError, ValueError):
            number = float("nan")
        if not low <= number <= high or number != int(number):  # NaN fails the first test
            raise InputError(f"'{what}' is not allowed", Location(key=key), value,
                             f"a whole number from {low} to {high}, or empty for the default")
        return int(number)
    return check


def _flag(value: Any) -> bool:
    return bool(value)


def _source(value: Any) -> str | None:
    if value is None or value == "":
        return None
    if not isinstance(value, str) or not _RESULT_NAME.match(value):
        raise InputError("not a result of this campaign", Location(key="build on"), value,
                         "a result listed on the page (or empty for the newest complete one)")
    return value


def _formats(value: Any) -> tuple[str, ...] | None:
    from speciakin.report.render import REPORT_FORMATS

    if not value:
        return None
    names = tuple(dict.fromkeys(str(v) for v in value))
    unknown = [n for n in names if n not in REPORT_FORMATS]
    if unknown:
        raise InputError("unknown report format", Location(key="formats"), ", ".join(unknown),
                         "some of " + ", ".join(REPORT_FORMATS))
    return names


#: Every setting a job may read: key -> check (value from the page -> clean value).
SETTINGS: dict[str, Callable[[Any], Any]] = {
    "starts": _whole("starts", 1, 64, "least-squares starts"),
    "profiles": _flag,
    "draws": _whole("draws", 4, 5000, "window draws"),
    "steps": _whole("steps", 10, 100_000, "steps per walker"),
    "walkers": _whole("walkers", 4, 1000, "walkers"),
    "until_converged": _flag,
    "cap": _whole("cap", 40, 100_000, "at most steps"),
    "suggest_draws": _whole("suggest_draws", 20, 5000, "suggestion draws"),
    "source": _source,
    "formats": _formats,
}


def clean_settings(kind: str, given: dict[str, Any]) -> dict[str, Any]:
    """The settings ``kind`` reads, checked (unknown keys dropped).

    Raises
    ------
    InputError
        An unknown kind, or a value out of range (names the setting, the value and what is allowed).
    """
    if kind not in JOB_KINDS:
        raise InputError("unknown job", Location(key="job"), kind, "one of " + ", ".join(JOB_KINDS))
    clean = {key: SETTINGS[key](given.get(key)) for key in JOB_KINDS[kind].reads}
    if clean.get("until_converged"):
        clean["steps"] = None
    elif "until_converged" in clean:
        clean["cap"] = None
    return clean


# ------------------------------------------------------------------ shared parts of the work
def _command(job) -> str:
    """What the index records as the command: the page's job and its settings (no machine path)."""
    kind = JOB_KINDS[job.kind]
    shown = [k if v is True else f"{k} {','.join(v) if isinstance(v, tuple) else v}"
             for k, v in job.settings.items() if v not in (None, False, ())]
    return f"speciakin web: {kind.label}" + (f" ({'; '.join(shown)})" if shown else "")


@contextmanager
def _recorded(job, inputs, feedback, *, built_on: Path | None = None) -> Iterator[Any]:
    """The job's :class:`~speciakin.pipeline.Recording` (new folder, lock, status, index row)."""
    from speciakin.pipeline import Recording

    step = JOB_KINDS[job.kind].step
    with Recording(inputs, step=step, command=_command(job), built_on=built_on, carry=_CARRIED.get(step, ()),
                   seeds={"seed": 1}) as rec:
        feedback.opened(rec.folder)
        yield rec
    job.notes.extend(rec.notes)


def _built_on(campaign: Path, name: str | None, having: str) -> Path:
    """The earlier result a job builds on: the named one (a folder of ``results/``), else the newest
    complete one that holds the file of ``having``.

    Raises
    ------
    InputError
        Not a result of this campaign, or none to build on.
    """
    from speciakin.pipeline import find_result, outputs, results_root

    if name is None:
        return find_result(campaign, having=having)
    folder = results_root(campaign) / name
    if not folder.is_dir() or folder.resolve().parent != results_root(campaign).resolve():
        raise InputError("not a result of this campaign", Location(file=str(results_root(campaign).name)), name,
                         "a result listed on the page")
    if not outputs.result_path(folder, having).is_file():
        raise InputError(f"this result holds no {outputs.RESULT_FILES[having]} to build on",
                         Location(file=f"results/{name}"), expected="a result that holds it (run that step first)")
    return folder


def _objective(inputs):
    from speciakin import pipeline

    model, loaded, process = pipeline.load_inputs(inputs)
    return model, pipeline.make_objective(model, loaded), process


def _fit_of(folder: Path, objective):
    """The fit in ``folder``; refused when the model now fits other parameters."""
    from speciakin.pipeline import outputs

    fit = outputs.load_fit(folder)
    if fit is None or list(fit.names) != list(objective.names):
        raise InputError("the result built on holds no fit of the parameters the model now fits",
                         Location(file=str(outputs.RESULT_FILES["fit"])), None if fit is None else ", ".join(fit.names),
                         "a fit of " + ", ".join(objective.names) + " (start a fit job first)")
    return fit


def _posterior_of(folder: Path, objective):
    from speciakin.pipeline import outputs

    posterior = outputs.load_posterior(folder)
    if posterior is not None and list(posterior.parameter_names) != list(objective.names):
        return None
    return posterior


def _store_curves(job, folder: Path, campaign: Path, feedback, *, objective=None, predictions=None,
                  source: Path | None = None) -> None:
    """The job's last stage: the fitted curves and bands of its result stored in the result folder for the
    page (:mod:`speciakin.web.stored_predictions`), so that opening the results tab is a file read.

    ``predictions`` when the job computed them already; else the store of ``source`` (the result built
    on) when it holds for the new folder; else computed from the folder's fit and posterior.  A failure
    here does not fail the job (the results tab computes the curves then); the job's notes say so."""
    from speciakin import pipeline
    from speciakin.errors import SpeciakinError
    from speciakin.web import stored_predictions

    feedback("curves", 0, 1)
    try:
        if predictions is None and source is not None and stored_predictions.carry(source, folder, campaign):
            return
        if predictions is None:
            predictions = pipeline.predict_step(objective, _fit_of(folder, objective), _posterior_of(folder, objective))
        stored_predictions.save(folder, campaign, predictions)
    except (SpeciakinError, OSError, ValueError) as exc:
        job.notes.append(f"the fitted curves were not stored for the page ({exc}); the results tab computes them")
    feedback("curves", 1, 1)


# ------------------------------------------------------------------ the kinds
def fit_work(job, campaign: Path, feedback) -> str:
    """check -> fit (with its figures) -> window when the campaign has a process file."""
    from speciakin import pipeline
    from speciakin.pipeline.run import checked_inputs
    from speciakin.report.results import fit_figures

    s = job.settings
    inputs = pipeline.resolve_inputs(campaign)
    with _recorded(job, inputs, feedback) as rec:
        out = rec.folder
        feedback("check", 0, 1)
        checked_inputs(inputs, out, rec.timings, lambda text: None)
        model, objective, process = _objective(inputs)
        fit = pipeline.fit_step(objective, out, starts=s["starts"], profiles=s["profiles"], progress=feedback,
                                cancel=job.cancel)
        feedback("figures", 0, 1)
        predictions = pipeline.predict_step(objective, fit)
        fit_figures(model, predictions, fit, out)
        text = f"fit: chi-square {fit.fit.chisqr:.4g}, reduced {fit.fit.reduced_chisqr:.3g}"
        if process is not None:
            window = pipeline.window_step(objective, process, out, fit=fit, draws=s["draws"], progress=feedback,
                                          cancel=job.cancel)
            text += "; window: " + pipeline.window_text(window)
        _store_curves(job, out, campaign, feedback, predictions=predictions)
    return text


def posterior_work(job, campaign: Path, feedback) -> str:
    """The posterior from the fit of an earlier result (fixed steps, or until converged with a cap)."""
    from speciakin import pipeline
    from speciakin.report.results import posterior_figures

    s = job.settings
    inputs = pipeline.resolve_inputs(campaign)
    source = _built_on(campaign, s["source"], "fit")
    _, objective, _ = _objective(inputs)
    with _recorded(job, inputs, feedback, built_on=source) as rec:
        fit = _fit_of(rec.folder, objective)
        result = pipeline.sample_step(objective, fit, rec.folder, n_steps=s["steps"], n_walkers=s["walkers"],
                                      max_steps=s["cap"], progress=feedback, cancel=job.cancel)
        feedback("figures", 0, 1)
        posterior_figures(result, rec.folder)
        _store_curves(job, rec.folder, campaign, feedback, objective=objective)
    return (f"posterior: {result.n_walkers} walkers x {result.n_steps} steps, "
            f"{'converged' if result.converged else 'NOT converged'}; stopped: {result.stop_message}")


def window_work(job, campaign: Path, feedback) -> str:
    """The pH window from the posterior (else the fit) of an earlier result."""
    from speciakin import pipeline

    inputs = pipeline.resolve_inputs(campaign, need_process=True)
    source = _built_on(campaign, job.settings["source"], "fit")
    _, objective, process = _objective(inputs)
    with _recorded(job, inputs, feedback, built_on=source) as rec:
        posterior = _posterior_of(rec.folder, objective)
        fit = _fit_of(rec.folder, objective)
        window = pipeline.window_step(objective, process, rec.folder, fit=fit, posterior=posterior,
                                      draws=job.settings["draws"], progress=feedback, cancel=job.cancel)
        _store_curves(job, rec.folder, campaign, feedback, objective=objective, source=source)
    return "window: " + pipeline.window_text(window)


def suggest_work(job, campaign: Path, feedback) -> str:
    """Rank candidate next runs from the fit (and posterior) of an earlier result."""
    from speciakin import pipeline
    from speciakin.decision.suggest.result import conditions_text
    from speciakin.pipeline import outputs
    from speciakin.pipeline.steps import tracker
    from speciakin.pipeline.suggest import suggest_for_campaign
    from speciakin.report.results import suggest_figures

    inputs = pipeline.resolve_inputs(campaign)
    source = _built_on(campaign, job.settings["source"], "fit")
    _, objective, process = _objective(inputs)

    def forward(stage: str, done: int, total: int) -> None:
        tracker(stage, feedback, job.cancel)(done, total)

    with _recorded(job, inputs, feedback, built_on=source) as rec:
        result = suggest_for_campaign(objective, fit=_fit_of(rec.folder, objective),
                                      posterior=_posterior_of(rec.folder, objective), process=process,
                                      n_draws=job.settings["suggest_draws"] or 400, seed=1, progress=forward)
        outputs.save_suggestion(rec.folder, result, inputs)
        suggest_figures(result, rec.folder)
        _store_curves(job, rec.folder, campaign, feedback, objective=objective, source=source)
    return "suggestion: next run at " + conditions_text(result.candidates[0].conditions)


def report_work(job, campaign: Path, feedback) -> str:
    """The report (HTML, PDF, XLSX) of an earlier result, in a new folder with a copy of that result."""
    from speciakin import pipeline
    from speciakin.report.results import write_report

    inputs = pipeline.resolve_inputs(campaign)
    source = _built_on(campaign, job.settings["source"], "fit")
    feedback("load", 0, 1)
    results = pipeline.load_results(source, campaign=str(inputs.campaign), model=str(inputs.model),
                                    process=None if inputs.process is None else str(inputs.process))
    with _recorded(job, results.inputs, feedback, built_on=source) as rec:
        feedback("report", 0, 1)
        paths = write_report(rec.folder, pipeline.for_report(results, rec.folder),
                             invented=pipeline.says_invented(results.model), formats=job.settings["formats"],
                             command=rec.command)
        feedback("report", 1, 1)
        _store_curves(job, rec.folder, campaign, feedback, predictions=results.predictions)
    return "report: " + ", ".join(p.name for p in paths.values()) + (
        "; not run (reported as such): " + ", ".join(results.missing) if results.missing else "")


def run_work(job, campaign: Path, feedback) -> str:
    """The whole chain: check -> fit -> posterior -> window -> report (:func:`speciakin.pipeline.run_all`)."""
    from speciakin import pipeline
    from speciakin.report import results as renderer

    s = job.settings
    inputs = pipeline.resolve_inputs(campaign)
    with _recorded(job, inputs, feedback) as rec:
        results = pipeline.run_all(inputs, rec.folder, renderer=renderer, starts=s["starts"], profiles=s["profiles"],
                                   n_steps=s["steps"], n_walkers=s["walkers"], max_steps=s["cap"], draws=s["draws"],
                                   formats=s["formats"], progress=feedback, cancel=job.cancel,
                                   on_step=lambda name: feedback(name, 0, 0))
        _store_curves(job, rec.folder, campaign, feedback, predictions=results.predictions,
                      objective=results.objective)
    text = f"run: fit reduced chi-square {results.fit.fit.reduced_chisqr:.3g}"
    if results.window is not None:
        text += "; window: " + pipeline.window_text(results.window)
    return text + "; report: " + ", ".join(p.name for p in results.report.values())


_SAMPLER = ("steps", "walkers", "until_converged", "cap")
#: Job kinds the page offers (the one registry): name -> JobKind.
JOB_KINDS: dict[str, JobKind] = {
    "fit": JobKind("fit and window", "fit", ("starts", "profiles", "draws"), fit_work),
    "posterior": JobKind("posterior", "sample", ("source", *_SAMPLER), posterior_work),
    "window": JobKind("window", "window", ("source", "draws"), window_work),
    "suggest": JobKind("next-run suggestion", "suggest", ("source", "suggest_draws"), suggest_work),
    "report": JobKind("report", "report", ("source", "formats"), report_work),
    "run": JobKind("whole run", "run", ("starts", "profiles", *_SAMPLER, "draws", "formats"), run_work),
}
