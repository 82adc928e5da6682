"""The steps of the pipeline: check -> fit -> sample -> window (the report renders their results).

Each step does its work through the layers below, writes its results into an
output folder through :mod:`speciakin.pipeline.outputs` (atomically, nothing
half-written when a step fails) and returns its result object.

Progress and cancellation are the same for every step:

* ``progress(stage, done, total)`` is called as work advances; ``stage`` is
  ``"starts"`` or ``"profiles"`` (fit), ``"sample"``, ``"window"``;
* ``cancel`` is any object with ``is_set()`` (a :class:`threading.Event`);
  when it is set the step stops at its next progress point and raises
  :class:`Cancelled`.  The sampler writes its checkpoint first, so
  ``resume=True`` continues the run later.
"""

from __future__ import annotations

import time
from pathlib import Path
from typing import Any, Callable, Protocol

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.pipeline import outputs

__all__ = ["Cancelled", "Progress", "check_step", "make_objective", "fit_step", "sample_step", "window_step",
           "predict_step", "window_figures", "window_text", "window_lines", "suggest_step", "timed"]

#: ``progress(stage, done, total)``.
Progress = Callable[[str, int, int], None]


class CancelFlag(Protocol):
    def is_set(self) -> bool: ...


class Cancelled(KeyboardInterrupt):
    """A step stopped because its ``cancel`` flag was set.

    A :class:`KeyboardInterrupt`, so that the sampler saves its checkpoint as
    it does on Ctrl-C; the message names the step.
    """


def tracker(stage: str, progress: Progress | None, cancel: CancelFlag | None) -> Callable[..., None]:
    """``report(done, total, *extra)`` that checks ``cancel`` and forwards to ``progress``."""
    def report(done: int, total: int, *_: Any) -> None:
        if cancel is not None and cancel.is_set():
            raise Cancelled(f"step '{stage}' cancelled")
        if progress is not None:
            progress(stage, int(done), int(total))
    return report


def check_step(inputs, out: Path | None = None):
    """Validate the campaign against the model; writes ``check.json`` when ``out`` is given."""
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import check_campaign

    report = check_campaign(inputs.campaign, load_model(inputs.model))
    if out is not None:
        outputs.save_check(out, report)
    return report


def make_objective(model, campaign):
    """The campaign objective (model + campaign -> residuals, likelihood)."""
    from speciakin.pipeline.objective import CampaignObjective

    return CampaignObjective(model, campaign)


def fit_step(objective, out: Path, *, starts: int | None = None, seed: int | None = None,
             profiles: bool = True, progress: Progress | None = None, cancel: CancelFlag | None = None):
    """Least-squares fit; writes ``fit.json`` and ``fit.txt``; returns CampaignFitResult."""
    from speciakin.pipeline.fit import fit_campaign

    def forward(stage: str, done: int, total: int) -> None:
        tracker(stage, progress, cancel)(done, total)

    result = fit_campaign(objective, starts=starts, seed=seed, profiles=profiles,
                          progress=forward if (progress or cancel) else None)
    outputs.save_fit(out, result)
    return result


def sample_step(objective, fit, out: Path, *, n_steps: int | None = None, n_walkers: int | None = None,
                seed: int = 1, resume: bool = False, jobs: int = 1, scheduler=None,
                progress: Progress | bool | None = True, cancel: CancelFlag | None = None,
                proposal: str | None = None, max_steps: int | None = None):
    """Posterior by emcee from the least-squares optimum; checkpoints to and
    finally stores the result in ``posterior.h5``; writes ``posterior.json``
    and ``posterior.txt``; returns PosteriorResult.

    The fit's covariance (widened to the profile intervals where they are
    wider or open) shapes the moves (``proposal`` None, "adaptive" or "laplace"); when it
    is missing or not positive definite the stretch move is used and the
    result's warnings say why.  ``proposal="stretch"`` forces the stretch
    move.  ``progress`` True shows a progress bar, a callable receives
    ``("sample", done, total)``.  ``max_steps`` caps a run until converged
    (``n_steps`` None; default the sampler's cap).
    """
    from speciakin.pipeline.posterior import proposal_covariance_from_fit, sample_campaign

    se = np.array([fit.fit.parameter(k).standard_error or np.nan for k in fit.keys], float)
    note = None
    covariance = None
    if proposal != "stretch":
        covariance, note = proposal_covariance_from_fit(fit)
        if covariance is None:
            if proposal is not None:  # a named move choice that needs the covariance
                raise InputError(f"the '{proposal}' proposal needs the fit covariance", Location(key="proposal"),
                                 proposal, "a fit with a positive-definite covariance, or the stretch move")
            proposal = "stretch"
    if callable(progress) or cancel is not None:
        progress = tracker("sample", progress if callable(progress) else None, cancel)
    result = sample_campaign(objective, fit.theta, se, n_walkers=n_walkers, n_steps=n_steps, seed=seed,
                             checkpoint=outputs.result_path(out, "posterior"), resume=resume, jobs=jobs,
                             scheduler=scheduler, progress=progress, covariance=covariance, proposal=proposal,
                             max_steps=max_steps)
    if note:
        result.warnings.insert(0, note)
    outputs.save_posterior(out, result)
    return result


def window_step(objective, process, out: Path, *, fit=None, posterior=None, draws: int | None = None,
                seed: int | None = None, progress: Progress | None = None, cancel: CancelFlag | None = None):
    """pH window of the planned process; writes ``window.json``/``window.txt``
    and the window plots; returns WindowResult."""
    from speciakin.pipeline.window import window_draws, window_for_campaign

    n = int(draws or process.n_draws)
    theta, source, notes = window_draws(fit, posterior, n, seed if seed is not None else process.seed)
    result = window_for_campaign(objective, process, theta, source,
                                 progress=tracker("window", progress, cancel) if (progress or cancel) else None,
                                 fit=fit, posterior=posterior)
    if notes:
        result.warnings.extend(notes)
    outputs.save_window(out, result, process=getattr(process, "source", None))
    window_figures(result, out, objective.model)
    return result


def suggest_step(objective, process, window, out: Path, *, fit=None, posterior=None, seed: int | None = None,
                 inputs=None, progress: Progress | None = None, cancel: CancelFlag | None = None):
    """Next-run suggestion when the window's failing gates are ones more runs lift
    (:func:`speciakin.decision.next_steps.runs_would_help`); writes ``suggest.json`` / ``suggest.txt``
    and returns the SuggestResult, else writes nothing and returns None."""
    from speciakin.decision.next_steps import runs_would_help
    from speciakin.pipeline.suggest import suggest_for_campaign

    if window is None or not runs_would_help(window.gates):
        return None
    result = suggest_for_campaign(objective, fit=fit, posterior=posterior, process=process,
                                  seed=seed if seed is not None else process.seed,
                                  progress=(lambda stage, done, total: tracker(stage, progress, cancel)(done, total))
                                  if (progress or cancel) else None)
    outputs.save_suggestion(out, result, inputs)
    return result


def predict_step(objective, fit=None, posterior=None, previous=None):
    """Curves, fitted values and bands (:class:`~speciakin.pipeline.predictions.PredictionSet`).

    With ``previous`` (the fit's predictions) only the posterior band is added.
    """
    from speciakin.pipeline.predictions import predict, with_band

    if previous is not None and posterior is not None:
        return with_band(previous, objective, posterior)
    return previous if previous is not None else predict(objective, fit, posterior)


def window_text(window) -> str:
    """One line: the recommended window and the robust set points."""
    def fmt(x):
        return "none" if not x else f"pH {x[0]:.2f} to {x[1]:.2f}"

    robust = max(window.robust_windows, key=lambda w: w[1] - w[0]) if window.robust_windows else None
    status = getattr(window, "status", None)
    return ((f"{status.upper()}: " if status else "")
            + f"recommended {fmt(window.primary_window)} at probability >= {window.level:g}, "
            f"robust to +/- {window.tolerance:g} pH: {fmt(robust)}")


def window_lines(window, seconds: float) -> list[str]:
    """What a run says after its window step: :func:`window_text` and the window's next steps."""
    return [f"window: {window_text(window)} ({seconds:.1f} s)",
            *(f"  next: {step}" for step in getattr(window, "next_steps", None) or [])]


# ------------------------------------------------------------------ figures of the steps
def _figures(out: Path) -> Path:
    return Path(out) / outputs.FIGURES_FOLDER


def window_figures(window, out: Path, model=None) -> None:
    """Probability, outcome and (with a second factor) map plots into ``out/figures``
    (species coloured as in every other figure of ``model``)."""
    from speciakin.decision.plots import plot_map, plot_outcomes, plot_probability
    from speciakin.palette import model_species_colors

    figures = _figures(out)
    figures.mkdir(parents=True, exist_ok=True)
    plot_probability(window, figures / "window_probability.png")
    plot_outcomes(window, figures / "window_outcomes.png",
                  model_species_colors(model) if model is not None else None)
    if getattr(window, "map_probability", None) is not None:
        plot_map(window, figures / "window_map.png")


def timed(timings: dict[str, float], name: str, call: Callable[[], Any]) -> Any:
    """``call()``, with its wall time [s] stored as ``timings[name]``."""
    t = time.perf_counter()
    value = call()
    timings[name] = time.perf_counter() - t
    return value
