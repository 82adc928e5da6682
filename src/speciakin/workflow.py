"""The chemist's journey as functions: check -> fit -> sample -> window -> report.

This module is the orchestration layer between the science layers and the
CLI.  Each step reads its inputs, does its work through the layers below and
writes its outputs into one folder (atomically, nothing half-written when a
step fails); :func:`run_all` chains them and stops with a clear message at the
first step that fails, keeping every earlier step's output.

Output folder layout (all names fixed, documented in docs/workflow.md)::

    fit.json  fit.txt              least-squares fit (schema speciakin.fit/1)
    posterior.h5  posterior.json   chain with checkpoint, summary + diagnostics
    window.json  window.txt        pH window
    figures/*.png                  plots of each step
    report.html  report.pdf  report.xlsx
"""

from __future__ import annotations

import json
import os
import shlex
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

import numpy as np

from speciakin import __version__
from speciakin._io import atomic_write_bytes
from speciakin.errors import InputError, Location

__all__ = [
    "Inputs", "resolve_inputs", "load_inputs", "check_step", "fit_step", "sample_step", "window_step",
    "report_step", "run_all", "write_json", "write_text", "write_bytes", "load_fit", "load_posterior",
]

MODEL_FILE = "model.toml"
PROCESS_FILE = "process.toml"


# ------------------------------------------------------------------ files
def write_bytes(path: str | os.PathLike, data: bytes) -> Path:
    """Write atomically (temporary file in the same folder, then rename)."""
    return atomic_write_bytes(path, data)


def write_text(path, text: str) -> Path:
    return write_bytes(path, text.encode("utf-8"))


def _json_default(value):
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON-serialisable: {type(value).__name__}")


def _clean(value):
    """NaN/inf -> None so that the JSON is strict."""
    if isinstance(value, float):
        return value if np.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return _clean(value.tolist())
    if isinstance(value, np.generic):
        return _clean(value.item())
    return value


def write_json(path, data: dict[str, Any]) -> Path:
    return write_text(path, json.dumps(_clean(data), indent=1, allow_nan=False, default=_json_default))


# ------------------------------------------------------------------ inputs
@dataclass
class Inputs:
    """Resolved input paths of a campaign (process may be None)."""

    campaign: Path
    model: Path
    process: Path | None = None


def resolve_inputs(campaign: str | os.PathLike, model: str | os.PathLike | None = None,
                   process: str | os.PathLike | None = None, need_process: bool = False) -> Inputs:
    """Find the model and process files: given explicitly, or ``model.toml`` /
    ``process.toml`` inside the campaign folder (what ``speciakin new`` creates)."""
    c = Path(campaign)
    if not c.exists():
        raise InputError("campaign not found", Location(file=str(c)),
                         expected="a campaign folder (made by 'speciakin new') or a workbook (.xlsx)")
    folder = c if c.is_dir() else c.parent
    m = Path(model) if model else folder / MODEL_FILE
    if not m.exists():
        raise InputError("model file not found", Location(file=str(m)),
                         expected="--model MODEL.toml, or model.toml inside the campaign folder")
    p = Path(process) if process else (folder / PROCESS_FILE if (folder / PROCESS_FILE).exists() else None)
    if p is not None and not p.exists():
        raise InputError("process file not found", Location(file=str(p)), expected="an existing process file")
    if need_process and p is None:
        raise InputError("no process file", Location(file=str(folder / PROCESS_FILE)),
                         expected="--process PROCESS.toml, or process.toml inside the campaign folder")
    return Inputs(c, m, p)


def load_inputs(inputs: Inputs):
    """(model, campaign, process or None) from resolved paths; raises the layers' input errors."""
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import load_campaign
    from speciakin.decision import load_process

    model = load_model(inputs.model)
    campaign = load_campaign(inputs.campaign, model)
    process = load_process(inputs.process, model) if inputs.process else None
    return model, campaign, process


def command_line() -> str:
    """The command that produced an output, for reproduction."""
    return "speciakin " + " ".join(shlex.quote(a) for a in sys.argv[1:])


# ------------------------------------------------------------------ steps
def check_step(inputs: Inputs):
    """Validate the campaign against the model; returns the CheckReport."""
    from speciakin.chemistry.modelfile import load_model
    from speciakin.data import check_campaign

    return check_campaign(inputs.campaign, load_model(inputs.model))


def make_objective(model, campaign):
    from speciakin.estimation.objective import CampaignObjective

    return CampaignObjective(model, campaign)


def fit_step(objective, out: Path, *, starts: int | None = None, seed: int | None = None,
             profiles: bool = True, progress: Callable | None = None):
    """Least-squares fit; writes ``fit.json`` and ``fit.txt``; returns CampaignFitResult."""
    from speciakin.estimation.campaign_fit import fit_campaign

    result = fit_campaign(objective, starts=starts, seed=seed, profiles=profiles, progress=progress)
    data = result.to_dict()
    data["software_version"] = __version__
    data["command"] = command_line()
    write_json(out / "fit.json", data)
    write_text(out / "fit.txt", result.report() + "\n")
    return result


def load_fit(out: Path):
    from speciakin.estimation.campaign_fit import CampaignFitResult

    path = Path(out) / "fit.json"
    if not path.exists():
        return None
    try:
        return CampaignFitResult.from_dict(json.loads(path.read_text()))
    except (ValueError, KeyError, TypeError) as exc:
        raise InputError(f"cannot read a fit result: {exc}", Location(file=str(path)),
                         expected="a fit.json written by 'speciakin fit'") from None


def sample_step(objective, fit, out: Path, *, n_steps: int = 2000, n_walkers: int | None = None,
                seed: int = 1, resume: bool = False, jobs: int = 1, scheduler=None, progress=True,
                proposal: str | None = None):
    """Posterior by emcee from the least-squares optimum; checkpoints to
    ``posterior.h5``; writes ``posterior.json``; returns PosteriorResult.

    The fit's covariance (widened to the profile intervals where they are
    wider or open) shapes the moves (``proposal`` None or "laplace"); when it
    is missing or not positive definite the stretch move is used and the
    result's warnings say why.  ``proposal="stretch"`` forces the stretch
    move."""
    from speciakin.estimation.campaign_posterior import proposal_covariance_from_fit, sample_campaign

    se = np.array([fit.fit.parameter(k).standard_error or np.nan for k in fit.keys], float)
    note = None
    covariance = None
    if proposal != "stretch":
        covariance, note = proposal_covariance_from_fit(fit)
        if covariance is None:
            if proposal == "laplace":
                raise InputError("the 'laplace' proposal needs the fit covariance", Location(key="proposal"),
                                 proposal, "a fit with a positive-definite covariance, or the stretch move")
            proposal = "stretch"
    result = sample_campaign(objective, fit.theta, se, n_walkers=n_walkers, n_steps=n_steps, seed=seed,
                             checkpoint=out / "posterior.h5", resume=resume, jobs=jobs, scheduler=scheduler,
                             progress=progress, covariance=covariance, proposal=proposal)
    if note:
        result.warnings.insert(0, note)
    data = result.to_dict()
    data["software_version"] = __version__
    data["command"] = command_line()
    write_json(out / "posterior.json", data)
    write_text(out / "posterior.txt", result.report() + "\n")
    result.save(out / "posterior_samples.h5")
    return result


def load_posterior(out: Path):
    from speciakin.estimation.sampling import PosteriorResult

    path = Path(out) / "posterior_samples.h5"
    return PosteriorResult.load(path) if path.exists() else None


def window_step(objective, process, out: Path, *, fit=None, posterior=None, draws: int | None = None,
                seed: int | None = None, progress=None):
    """pH window of the planned process; writes ``window.json``/``window.txt``
    and the window plots; returns WindowResult."""
    from speciakin.decision.plots import plot_map, plot_outcomes, plot_probability
    from speciakin.decision.campaign_window import window_draws, window_for_campaign

    n = int(draws or process.n_draws)
    theta, source, notes = window_draws(fit, posterior, n, seed if seed is not None else process.seed)
    result = window_for_campaign(objective, process, theta, source, progress=progress)
    if notes:
        result.warnings.extend(notes)
    data = result.to_dict()
    data["software_version"] = __version__
    data["command"] = command_line()
    write_json(out / "window.json", data)
    write_text(out / "window.txt", result.report() + "\n")
    figures = out / "figures"
    figures.mkdir(parents=True, exist_ok=True)
    plot_probability(result, figures / "window_probability.png")
    plot_outcomes(result, figures / "window_outcomes.png")
    if getattr(result, "map_probability", None) is not None:
        plot_map(result, figures / "window_map.png")
    return result


def load_window(out: Path):
    from speciakin.decision import WindowResult

    path = Path(out) / "window.json"
    if not path.exists():
        return None
    return WindowResult.from_dict(json.loads(path.read_text()))


def report_step(out: Path, *, model, campaign, objective=None, fit=None, posterior=None, window=None,
                process=None, check=None, inputs: Inputs | None = None, invented: bool = False,
                formats=("html", "pdf", "xlsx")):
    """Build the report document and render it; returns {format: path}."""
    from speciakin.report import render_all
    from speciakin.report.assemble import ReportInputs, build_report

    extra = []
    if inputs is not None:
        extra.append(("model file", str(inputs.model)))
        if inputs.process:
            extra.append(("process file", str(inputs.process)))
    doc = build_report(ReportInputs(model=model, campaign=campaign, objective=objective, fit=fit,
                                    posterior=posterior, window=window, process=process, check=check,
                                    command=command_line(), software_version=__version__,
                                    extra_inputs=extra, invented=invented))
    return render_all(doc, out, "report", list(formats))


def run_all(inputs: Inputs, out: Path, *, starts=None, seed: int = 1, n_steps: int = 2000,
            n_walkers=None, jobs: int = 1, scheduler=None, resume: bool = False, profiles: bool = True,
            draws=None, invented: bool = False, say: Callable[[str], None] = lambda s: None,
            progress_factory: Callable | None = None, state: dict | None = None,
            sample_progress=True) -> dict[str, Any]:
    """check -> fit -> sample -> window -> report, each step's output kept in ``out``.

    Raises the first step's error (the CLI turns it into a message naming the step).
    Returns a dict of the results and timings.
    """
    from speciakin.errors import DataError

    out = Path(out)
    out.mkdir(parents=True, exist_ok=True)
    state = state if state is not None else {}
    timings: dict[str, float] = {}
    t = time.perf_counter()
    state["step"] = "check"
    check = check_step(inputs)
    write_json(out / "check.json", check.to_dict())
    if check.errors:
        raise DataError(problems=check.errors)
    timings["check"] = time.perf_counter() - t
    say(f"check: {len(check.errors)} errors, {len(check.warnings)} warnings")

    model, campaign, process = load_inputs(inputs)
    state["step"] = "fit"
    objective = make_objective(model, campaign)
    t = time.perf_counter()
    fit = fit_step(objective, out, starts=starts, seed=seed, profiles=profiles,
                   progress=progress_factory("fit") if progress_factory else None)
    timings["fit"] = time.perf_counter() - t
    say(f"fit: chi-square {fit.fit.chisqr:.4g}, reduced {fit.fit.reduced_chisqr:.3g} "
        f"({timings['fit']:.1f} s)")

    fit_figures(objective, fit, out)
    state["step"] = "sample"
    t = time.perf_counter()
    posterior = sample_step(objective, fit, out, n_steps=n_steps, n_walkers=n_walkers, seed=seed,
                            resume=resume, jobs=jobs, scheduler=scheduler, progress=sample_progress)
    posterior_figures(posterior, out)
    timings["sample"] = time.perf_counter() - t
    say(f"sample: {posterior.n_walkers} walkers x {posterior.n_steps} steps, "
        f"{'converged' if posterior.converged else 'NOT converged'} ({timings['sample']:.1f} s)")

    window = None
    if process is not None:
        state["step"] = "window"
        t = time.perf_counter()
        window = window_step(objective, process, out, fit=fit, posterior=posterior, draws=draws, seed=seed)
        timings["window"] = time.perf_counter() - t
        say(f"window: {window_text(window)} ({timings['window']:.1f} s)")
    else:
        say("window: skipped (no process file)")

    state["step"] = "report"
    t = time.perf_counter()
    paths = report_step(out, model=model, campaign=campaign, objective=objective, fit=fit, posterior=posterior,
                        window=window, process=process, check=check, inputs=inputs, invented=invented)
    timings["report"] = time.perf_counter() - t
    say("report: " + ", ".join(str(p) for p in paths.values()))
    write_json(out / "timings.json", timings)
    return {"check": check, "fit": fit, "posterior": posterior, "window": window, "report": paths,
            "timings": timings}


def window_text(window) -> str:
    """One line: the recommended window and the robust set points."""
    def fmt(x):
        return "none" if not x else f"pH {x[0]:.2f} to {x[1]:.2f}"

    robust = max(window.robust_windows, key=lambda w: w[1] - w[0]) if window.robust_windows else None
    return (f"recommended {fmt(window.primary_window)} at probability >= {window.level:g}, "
            f"robust to +/- {window.tolerance:g} pH: {fmt(robust)}")


# ------------------------------------------------------------------ figures of the steps
def posterior_figures(posterior, out: Path) -> list[Path]:
    """Trace and corner plots of a posterior into ``out/figures``."""
    from speciakin.report.figures import corner_figure, trace_figure

    figures = Path(out) / "figures"
    burn = min(int(posterior.burn_in), posterior.chain.shape[0] - 1)
    paths = [write_bytes(figures / "posterior_trace.png",
                         trace_figure(posterior.chain, posterior.parameter_names, burn_in=burn))]
    if posterior.samples.shape[0] > 2 * posterior.samples.shape[1]:
        paths.append(write_bytes(figures / "posterior_corner.png",
                                 corner_figure(posterior.samples, posterior.parameter_names)))
    return paths


def fit_figures(objective, fit, out: Path) -> list[Path]:
    """Per-run data-and-model plots, residuals, profiles and correlation into ``out/figures``."""
    from speciakin.report.assemble_figures import fit_figure_set

    figures = Path(out) / "figures"
    return [write_bytes(figures / f"{name}.png", png) for name, png in fit_figure_set(objective, fit).items()]
