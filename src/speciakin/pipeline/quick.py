"""A quick, provisional first look: check -> fit -> window from the least-squares covariance.

No posterior is sampled and no profile intervals are computed; the window's
draws come from the fit's covariance (multivariate normal).  Every output says
that the result is PROVISIONAL: the window's status is at most "provisional"
with the reason first, and ``fit.json``/``window.json`` (and their texts) carry
the note among their warnings.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

from speciakin.pipeline.inputs import Inputs, load_inputs
from speciakin.pipeline import outputs
from speciakin.pipeline.steps import CancelFlag, Progress, make_objective, timed, window_lines, window_step

__all__ = ["QUICK_NOTE", "QUICK_STARTS", "QUICK_DRAWS", "quick_run", "mark_provisional"]

#: The label every quick output carries.
QUICK_NOTE = ("PROVISIONAL (quick mode): least-squares fit without profile intervals and a window from "
              "the fit's covariance, no posterior sampling; run without --quick before any decision")
#: Starting points of the quick fit unless given.
QUICK_STARTS = 2
#: Most window draws of the quick mode unless given (the process file's number when smaller).
QUICK_DRAWS = 200


def quick_run(inputs: Inputs, out: Path, *, starts: int | None = None, seed: int = 1, draws: int | None = None,
              progress: Progress | None = None, cancel: CancelFlag | None = None,
              say: Callable[[str], None] = lambda s: None, fit_options=None) -> dict:
    """Check, fit (few starts, no profiles) and, with a process file, the pH
    window from the fit's covariance; writes check, fit and window files into ``out``.

    Parameters
    ----------
    inputs
        Resolved inputs (:func:`~speciakin.pipeline.inputs.resolve_inputs`).
    out
        Output folder (created).
    starts, seed, draws
        Starting points (default :data:`QUICK_STARTS`), seed, window draws
        (default: the process file's, at most :data:`QUICK_DRAWS`).
    progress, cancel
        As for every step (:mod:`speciakin.pipeline.steps`).
    say
        Receives one line of text after each step.
    fit_options
        Optional callable ``model -> model`` applied before the objective is
        built (parameter overrides of the command line).

    Returns
    -------
    dict
        ``check``, ``fit``, ``window`` (None without a process file), ``timings`` [s].
    """
    from speciakin.pipeline.fit import fit_campaign
    from speciakin.pipeline.run import checked_inputs

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    timings: dict[str, float] = {}
    check = checked_inputs(inputs, out, timings, say)
    model, campaign, process = load_inputs(inputs)
    if fit_options is not None:
        model = fit_options(model)
    objective = make_objective(model, campaign)
    fit = timed(timings, "fit", lambda: fit_campaign(objective, starts=starts or QUICK_STARTS, seed=seed,
                                                     profiles=False, progress=progress))
    fit.warnings.insert(0, QUICK_NOTE)
    outputs.save_fit(out, fit)
    say(f"fit: chi-square {fit.fit.chisqr:.4g}, reduced {fit.fit.reduced_chisqr:.3g} ({timings['fit']:.1f} s)")
    window = None
    if process is not None:
        n_draws = draws or min(int(process.n_draws), QUICK_DRAWS)
        window = timed(timings, "window", lambda: window_step(objective, process, out, fit=fit, draws=n_draws,
                                                              seed=seed, progress=progress, cancel=cancel))
        mark_provisional(window)
        outputs.save_window(out, window, process=process.source)
        for line in window_lines(window, timings["window"]):
            say(line)
    outputs.save_timings(out, timings)
    return {"check": check, "fit": fit, "window": window, "timings": timings, "objective": objective}


def mark_provisional(window) -> None:
    """Status at most "provisional", the quick-mode reason first, the note among the warnings."""
    if window.status in (None, "established"):
        window.status = "provisional"
    window.status_reasons.insert(0, QUICK_NOTE)
    window.warnings.insert(0, QUICK_NOTE)
