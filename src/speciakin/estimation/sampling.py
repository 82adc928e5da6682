"""Posterior sampling with emcee's ensemble sampler.

:func:`sample_posterior` is generic: it needs a batched log-likelihood
``f(theta) -> log L`` with ``theta`` of shape (n_sets, n_params) and a result
of shape (n_sets,) (-inf or NaN for a failed evaluation), the parameter names,
one prior per parameter and a starting point (the least-squares optimum with
its standard errors).  It adds the log-prior, hands whole half-ensembles to
the likelihood in one batch (``vectorize=True``), optionally splits each batch
over local processes or a Dask cluster, checkpoints to disk and resumes, and
returns a :class:`PosteriorResult`.  The moves are chosen by name from
:data:`speciakin.estimation.proposals.PROPOSALS`: the stretch move, or (given
the least-squares covariance) an independence Student-t move mixed with
differential evolution.

References
----------
Goodman, J. and Weare, J., "Ensemble samplers with affine invariance",
Comm. App. Math. Comp. Sci. 2010, 5, 65 (the stretch move).
Foreman-Mackey, D., Hogg, D. W., Lang, D. and Goodman, J., "emcee: The MCMC
Hammer", PASP 2013, 125, 306.
"""

from __future__ import annotations

import json
import math
import os
import time
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Callable, Sequence

import emcee
import numpy as np

from speciakin._io import atomic_path
from speciakin.errors import InputError, Location, SolverError
from speciakin.estimation.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from speciakin.estimation.diagnostics import (ConvergenceDiagnostics, autocorrelation_time,
                                              choose_burn_in_and_thin, convergence_diagnostics)
from speciakin.estimation.parallel import make_evaluator
from speciakin.estimation.priors import PriorDistribution, build_prior, joint_log_prior
from speciakin.estimation.proposals import PROPOSALS, build_moves, proposal_fingerprint

__all__ = ["sample_posterior", "LogPosterior", "initial_walkers", "PosteriorResult",
           "ParameterSummary", "summarise"]

_MAX_START_ROUNDS = 100


@dataclass
class ParameterSummary:
    """Posterior summary of one parameter (units of the fitted scale).

    Attributes
    ----------
    name, mean, sd, median, lower_95, upper_95
        Name; posterior mean, standard deviation, median, 2.5 % and 97.5 %
        quantiles of the kept samples.
    mcse_mean
        Monte Carlo standard error of the mean (Vehtari et al. 2021, via ArviZ).
    r_hat
        Rank-normalised split R-hat (walkers as chains).
    """

    name: str
    mean: float
    sd: float
    median: float
    lower_95: float
    upper_95: float
    mcse_mean: float
    r_hat: float


def summarise(names, samples: np.ndarray, diagnostics: ConvergenceDiagnostics) -> list[ParameterSummary]:
    """Per-parameter summary of flat samples (n_samples, n_params)."""
    out = []
    for j, name in enumerate(names):
        x = samples[:, j]
        q = np.quantile(x, [0.025, 0.5, 0.975]) if x.size else np.full(3, np.nan)
        out.append(ParameterSummary(str(name), float(np.mean(x)) if x.size else math.nan,
                                    float(np.std(x, ddof=1)) if x.size > 1 else math.nan,
                                    float(q[1]), float(q[0]), float(q[2]),
                                    float(diagnostics.mcse_mean[j]), float(diagnostics.r_hat[j])))
    return out


def _json_ready(value):
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    if isinstance(value, dict):
        return {k: _json_ready(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_json_ready(v) for v in value]
    return value


@dataclass
class PosteriorResult:
    """Result of :func:`sample_posterior`; every field always exists.

    Attributes
    ----------
    parameter_names
        Names in column order.
    chain
        (n_stored, n_walkers, n_params) stored positions, burn-in included.
    log_prob
        (n_stored, n_walkers) log-posterior of the stored positions.
    acceptance_fraction
        (n_walkers,) acceptance fraction of each walker.
    burn_in, thin
        Stored steps discarded at the start, and thinning of the kept part.
    samples
        (n_samples, n_params) flat kept samples: ``chain[burn_in::thin]``.
    summary
        One :class:`ParameterSummary` per parameter.
    diagnostics
        :class:`~speciakin.estimation.diagnostics.ConvergenceDiagnostics`.
    warnings
        Plain-words warnings (convergence, failed evaluations, start problems).
    priors
        Text of each prior.
    n_walkers, n_steps, thin_by, seed
        Run settings (n_steps = steps per walker, thin_by = storage thinning).
    evaluator
        Where the likelihood ran ("serial", "2 local processes", ...).
    elapsed_seconds
        Wall time of this call [s].
    n_likelihood_evaluations, n_failed_evaluations
        Counts in this call (a resumed run counts only its own part).
    resumed_from
        Stored steps loaded from a checkpoint, or None for a fresh run.
    proposal
        Name of the move choice (a key of ``proposals.PROPOSALS``).
    moves
        Plain-words description of the moves and their weights.
    """

    parameter_names: list[str]
    chain: np.ndarray
    log_prob: np.ndarray
    acceptance_fraction: np.ndarray
    burn_in: int
    thin: int
    samples: np.ndarray
    summary: list[ParameterSummary]
    diagnostics: ConvergenceDiagnostics
    warnings: list[str] = field(default_factory=list)
    priors: list[str] = field(default_factory=list)
    n_walkers: int = 0
    n_steps: int = 0
    thin_by: int = 1
    seed: int | None = None
    evaluator: str = "serial"
    elapsed_seconds: float = 0.0
    n_likelihood_evaluations: int = 0
    n_failed_evaluations: int = 0
    resumed_from: int | None = None
    proposal: str = "stretch"
    moves: str = PROPOSALS["stretch"].describe

    @property
    def converged(self) -> bool:
        return bool(self.diagnostics.converged)

    def draws(self, n: int, seed: int | None = None) -> np.ndarray:
        """``n`` parameter sets (n, n_params) drawn from the kept samples.

        Without replacement when ``n`` is at most the number of samples,
        with replacement otherwise.
        """
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
            raise InputError("number of draws is not allowed", Location(key="n"), n, "a whole number >= 1")
        rng = np.random.default_rng(seed)
        total = self.samples.shape[0]
        index = rng.choice(total, size=int(n), replace=int(n) > total)
        return self.samples[index].copy()

    def trace(self, name: str) -> np.ndarray:
        """(n_stored, n_walkers) trace of one parameter, for trace plots."""
        if name not in self.parameter_names:
            raise InputError("unknown parameter", Location(key="name"), name,
                             "one of " + ", ".join(self.parameter_names))
        return self.chain[:, :, self.parameter_names.index(name)]

    def report(self) -> str:
        """Text report with the fixed headings "Posterior summary", "Convergence", "Warnings"."""
        head = (f"{'parameter':<28}{'mean':>11}{'sd':>10}{'median':>11}{'2.5 %':>11}{'97.5 %':>11}"
                f"{'MCSE':>9}")
        lines = ["Posterior summary", "-----------------",
                 f"{self.n_walkers} walkers x {self.n_steps} steps (stored every {self.thin_by}), "
                 f"burn-in {self.burn_in} stored steps, thinned by {self.thin}, "
                 f"{self.samples.shape[0]} samples kept; seed {self.seed}; likelihood: {self.evaluator}",
                 f"moves ({self.proposal}): {self.moves}",
                 head]
        for s in self.summary:
            lines.append(f"{s.name:<28}{s.mean:>11.4g}{s.sd:>10.3g}{s.median:>11.4g}"
                         f"{s.lower_95:>11.4g}{s.upper_95:>11.4g}{s.mcse_mean:>9.2g}")
        lines.append("priors: " + "; ".join(f"{n}: {p}" for n, p in zip(self.parameter_names, self.priors)))
        lines += ["", self.diagnostics.report(), "", "Warnings", "--------"]
        lines += [f"- {w}" for w in self.warnings] or ["none"]
        return "\n".join(lines)

    def _metadata(self) -> dict:
        return {"parameter_names": self.parameter_names, "burn_in": self.burn_in, "thin": self.thin,
                "summary": [asdict(s) for s in self.summary], "diagnostics": asdict(self.diagnostics),
                "warnings": self.warnings, "priors": self.priors, "n_walkers": self.n_walkers,
                "n_steps": self.n_steps, "thin_by": self.thin_by, "seed": self.seed,
                "evaluator": self.evaluator, "elapsed_seconds": self.elapsed_seconds,
                "n_likelihood_evaluations": self.n_likelihood_evaluations,
                "n_failed_evaluations": self.n_failed_evaluations, "resumed_from": self.resumed_from,
                "proposal": self.proposal, "moves": self.moves}

    def to_dict(self) -> dict:
        """JSON-ready summary (no chain; non-finite numbers become None)."""
        data = self._metadata()
        data["acceptance_fraction"] = self.acceptance_fraction.tolist()
        data["n_samples"] = int(self.samples.shape[0])
        data["converged"] = self.converged
        return _json_ready(data)

    def save(self, path: str | os.PathLike) -> None:
        """Write the result to an HDF5 file atomically (arrays + JSON metadata)."""
        import h5py

        with atomic_path(path) as tmp:
            with h5py.File(tmp, "w") as fh:
                fh.attrs["format"] = "speciakin-posterior-1"
                fh.attrs["metadata"] = json.dumps(self._metadata())
                fh.create_dataset("chain", data=self.chain)
                fh.create_dataset("log_prob", data=self.log_prob)
                fh.create_dataset("acceptance_fraction", data=self.acceptance_fraction)

    @classmethod
    def load(cls, path: str | os.PathLike) -> "PosteriorResult":
        """Read a result written by :meth:`save`."""
        import h5py

        path = Path(path)
        where = Location(file=str(path))
        try:
            with h5py.File(path, "r") as fh:
                if fh.attrs.get("format") != "speciakin-posterior-1":
                    raise InputError("not a posterior result file", where, fh.attrs.get("format"),
                                     "a file written by PosteriorResult.save")
                meta = json.loads(fh.attrs["metadata"])
                chain = fh["chain"][...]
                log_prob = fh["log_prob"][...]
                acceptance = fh["acceptance_fraction"][...]
        except (OSError, KeyError) as exc:
            raise InputError(f"posterior result cannot be read: {exc}", where, None,
                             "a file written by PosteriorResult.save") from None
        samples = chain[meta["burn_in"]::meta["thin"]].reshape(-1, chain.shape[2])
        return cls(chain=chain, log_prob=log_prob, acceptance_fraction=acceptance, samples=samples,
                   summary=[ParameterSummary(**s) for s in meta.pop("summary")],
                   diagnostics=ConvergenceDiagnostics(**meta.pop("diagnostics")), **meta)


class LogPosterior:
    """Batched log-posterior: log-prior plus log-likelihood, -inf outside the prior support.

    The likelihood is only evaluated for rows inside the prior support; NaN
    and +inf results count as failures and become -inf.
    """

    def __init__(self, evaluator: Callable, priors: Sequence[PriorDistribution]) -> None:
        self.evaluator = evaluator
        self.priors = list(priors)
        self.n_evaluations = 0
        self.n_failures = 0

    def __call__(self, theta: np.ndarray) -> np.ndarray:
        theta = np.atleast_2d(np.asarray(theta, dtype=float))
        out = np.full(theta.shape[0], -np.inf)
        log_prior = joint_log_prior(self.priors, theta)
        inside = np.isfinite(log_prior)
        if np.any(inside):
            values = np.asarray(self.evaluator(theta[inside]), dtype=float).reshape(-1)
            if values.shape[0] != int(inside.sum()):
                raise SolverError(f"the log-likelihood returned {values.shape[0]} values for "
                                  f"{int(inside.sum())} parameter sets; expected one per set")
            bad = ~np.isfinite(values)
            values = np.where(bad, -np.inf, values)
            self.n_evaluations += values.shape[0]
            self.n_failures += int(bad.sum())
            out[inside] = log_prior[inside] + values
        return out


def _reflect_into(x: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    x = np.where(x < lower, 2 * lower - x, x)
    x = np.where(x > upper, 2 * upper - x, x)
    width = upper - lower
    margin = np.where(np.isfinite(width), 1e-9 * width, 0.0)
    return np.clip(x, lower + margin, upper - margin)


def initial_walkers(log_posterior: Callable, start: np.ndarray, scale: np.ndarray,
                    priors: Sequence[PriorDistribution], n_walkers: int, rng: np.random.Generator,
                    ball: float = 0.1) -> tuple[np.ndarray, np.ndarray]:
    """Walkers in a small Gaussian ball around ``start``, kept inside the prior support.

    Each coordinate is ``start + ball * scale * N(0, 1)``, reflected into the
    prior support; walkers whose log-posterior is -inf are redrawn.

    Returns
    -------
    positions, log_posterior
        (n_walkers, n_params) and (n_walkers,).

    Raises
    ------
    SolverError
        When no finite log-posterior is found for every walker after 100 rounds.
    """
    n_params = start.shape[0]
    lower = np.array([p.support()[0] for p in priors])
    upper = np.array([p.support()[1] for p in priors])
    positions = np.empty((n_walkers, n_params))
    values = np.full(n_walkers, -np.inf)
    todo = np.arange(n_walkers)
    for _ in range(_MAX_START_ROUNDS):
        trial = start + ball * scale * rng.standard_normal((todo.size, n_params))
        trial = _reflect_into(trial, lower, upper)
        lp = log_posterior(trial)
        positions[todo] = trial
        values[todo] = lp
        todo = todo[~np.isfinite(lp)]
        if todo.size == 0:
            return positions, values
    raise SolverError(f"could not place {todo.size} of {n_walkers} walkers at a finite posterior "
                      f"near the start point after {_MAX_START_ROUNDS} rounds; the log-likelihood "
                      "fails there or the start lies outside the prior support")


def _check_inputs(parameter_names, priors, start, start_scale, n_walkers, n_steps, thin_by,
                  checkpoint_every, checkpoint_every_steps, target_tau_multiple):
    names = [str(n) for n in parameter_names]
    if not names or len(set(names)) != len(names):
        raise InputError("parameter names must be given and unique", Location(key="parameter_names"),
                         names, "distinct names, one per fitted parameter")
    n_params = len(names)
    if len(priors) != n_params:
        raise InputError("one prior per parameter is needed", Location(key="priors"), len(priors),
                         f"{n_params} priors")
    built = [build_prior(p, location=Location(key=f"prior.{n}")) for n, p in zip(names, priors)]
    start = np.asarray(start, dtype=float).reshape(-1)
    if start.shape[0] != n_params or not np.all(np.isfinite(start)):
        raise InputError("start point is not usable", Location(key="start"), start.tolist(),
                         f"{n_params} finite numbers")
    scale = np.asarray(start_scale, dtype=float).reshape(-1)
    if scale.shape[0] != n_params:
        raise InputError("start scale has the wrong length", Location(key="start_scale"),
                         scale.tolist(), f"{n_params} numbers")
    notes = []
    usable = np.isfinite(scale) & (scale > 0)
    if not np.all(usable):
        missing = [n for n, ok in zip(names, usable) if not ok]
        notes.append("no usable standard error for " + ", ".join(missing)
                     + "; walkers start within 0.1 % of the start value there")
        scale = np.where(usable, scale, 1e-3 * np.maximum(1.0, np.abs(start)))

    def whole(value, key, minimum, text):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
            raise InputError(f"'{key}' is not allowed", Location(key=key), value, text)

    whole(n_walkers, "n_walkers", max(2 * n_params, 2), f"a whole number >= 2 x {n_params} parameters")
    whole(thin_by, "thin_by", 1, "a whole number >= 1")
    whole(n_steps, "n_steps", thin_by, f"a whole number >= thin_by ({thin_by})")
    if checkpoint_every_steps is not None:
        whole(checkpoint_every_steps, "checkpoint_every_steps", 1, "a whole number >= 1 or None")
    if not (isinstance(checkpoint_every, (int, float)) and math.isfinite(checkpoint_every)
            and checkpoint_every > 0):
        raise InputError("'checkpoint_every' is not allowed", Location(key="checkpoint_every"),
                         checkpoint_every, "a number of seconds > 0")
    if not (math.isfinite(target_tau_multiple) and target_tau_multiple > 0):
        raise InputError("'target_tau_multiple' is not allowed", Location(key="target_tau_multiple"),
                         target_tau_multiple, "a number > 0")
    return names, built, start, scale, notes


def _settings(names, n_walkers, thin_by, seed, proposal, fingerprint) -> dict:
    return {"parameter_names": names, "n_walkers": int(n_walkers), "thin_by": int(thin_by),
            "seed": None if seed is None else int(seed), "proposal": proposal,
            "proposal_fingerprint": fingerprint}


def _check_resumable(cp: Checkpoint, settings: dict, path: Path) -> None:
    saved = dict(cp.settings)
    if "proposal" not in saved:  # checkpoints written before the move choice existed: stretch move
        saved["proposal"] = "stretch"
        saved["proposal_fingerprint"] = proposal_fingerprint("stretch", None, None)
    for key in ("parameter_names", "n_walkers", "thin_by", "seed", "proposal", "proposal_fingerprint"):
        if saved.get(key) != settings[key]:
            extra = {"proposal_fingerprint": " (the start point or covariance the proposal is built from "
                                             "changed)",
                     "proposal": f" (to continue it, choose the move choice '{saved.get(key)}')"}.get(key, "")
            raise InputError(f"checkpoint belongs to a different run: '{key}' differs{extra}",
                             Location(file=str(path), key=key), saved.get(key),
                             f"{settings[key]!r} as in this run (or start without resume)")


def _progress_reporter(progress, total: int, initial: int):
    if callable(progress):
        start_time, start_step = time.monotonic(), initial

        def report(done: int) -> None:
            elapsed = time.monotonic() - start_time
            rate = (done - start_step) / elapsed if elapsed > 0 else 0.0
            left = (total - done) / rate if rate > 0 else math.inf
            progress(done, total, left)

        return report, lambda: None
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=total, initial=initial, unit="step", desc="sampling", leave=False)
        return (lambda done: bar.update(done - bar.n)), bar.close
    return (lambda done: None), (lambda: None)


def sample_posterior(log_likelihood_batch: Callable, parameter_names: Sequence[str], priors: Sequence,
                     start, start_scale, *, n_walkers: int = 32, n_steps: int = 5000,
                     seed: int | None = None, checkpoint: str | Path | None = None,
                     checkpoint_every: float = 60.0, checkpoint_every_steps: int | None = None,
                     resume: bool = False, jobs: int = 1, scheduler=None, progress=True,
                     thin_by: int = 1, target_tau_multiple: float = 50.0,
                     start_ball: float = 0.1, proposal: str | None = None,
                     proposal_covariance=None) -> PosteriorResult:
    """Sample the posterior of a batched log-likelihood with emcee's ensemble sampler.

    Parameters
    ----------
    log_likelihood_batch
        ``f(theta) -> log L``; theta (n_sets, n_params), result (n_sets,);
        -inf or NaN marks a failed evaluation.  Each row must be computed
        independently of the others (so that parallel runs equal serial ones).
        Must be picklable when ``jobs > 1`` or ``scheduler`` is given.
    parameter_names
        Names of the parameters, in column order.
    priors
        One ``Prior`` (model file) or :class:`PriorDistribution` per parameter.
    start
        Start point (n_params,), e.g. the least-squares optimum.
    start_scale
        Scale of the start ball (n_params,), e.g. the standard errors;
        walkers start at ``start + start_ball * start_scale * N(0, 1)``.
    n_walkers
        Number of walkers (>= 2 x n_params).
    n_steps
        Steps per walker in total (a resumed run continues to this length);
        ``n_steps // thin_by`` steps are stored.
    seed
        Seed; the same seed gives the same chain whatever ``jobs`` or
        ``scheduler`` and whether or not the run was interrupted and resumed.
    checkpoint
        HDF5 file written atomically every ``checkpoint_every`` seconds [s]
        and/or every ``checkpoint_every_steps`` stored steps, on Ctrl-C and at
        the end.  None = no checkpoint.
    resume
        Continue from ``checkpoint`` when it exists (it must belong to a run
        with the same names, walkers, thinning and seed).
    jobs
        Local worker processes that share each batch.
    scheduler
        ``"tcp://host:port"`` of a Dask distributed scheduler (or a
        ``distributed.Client``); overrides ``jobs``.
    progress
        True = tqdm bar with time left; a callable is called as
        ``progress(steps_done, steps_total, seconds_left)``; False = silent.
    thin_by
        Store every ``thin_by``-th step.
    target_tau_multiple
        Chain length needed in autocorrelation times (default 50).
    start_ball
        Size of the start ball in units of ``start_scale``.
    proposal
        Move choice, a key of :data:`~speciakin.estimation.proposals.PROPOSALS`:
        ``"stretch"`` (emcee's stretch move) or ``"laplace"`` (independence
        Student-t centred at ``start`` with ``proposal_covariance``, mixed with
        differential evolution).  None = ``"laplace"`` when
        ``proposal_covariance`` is given, else ``"stretch"``.  Recorded in the
        checkpoint: a resume with another choice is refused.
    proposal_covariance
        (n_params, n_params) covariance of the parameters on the fitted scale
        (the least-squares covariance); must be symmetric positive definite.

    Returns
    -------
    PosteriorResult

    Raises
    ------
    InputError
        Bad settings, priors or a checkpoint of another run.
    SolverError
        No finite starting positions, or a likelihood returning the wrong shape.
    KeyboardInterrupt
        Re-raised after the checkpoint is written, so a caller can stop cleanly.

    References
    ----------
    Goodman and Weare, Comm. App. Math. Comp. Sci. 2010, 5, 65;
    Foreman-Mackey et al., PASP 2013, 125, 306; Robert and Casella, Monte
    Carlo Statistical Methods, 2nd ed. 2004, section 7.4; ter Braak, Stat.
    Comput. 2006, 16, 239.
    """
    names, built, start, scale, notes = _check_inputs(
        parameter_names, priors, start, start_scale, n_walkers, n_steps, thin_by, checkpoint_every,
        checkpoint_every_steps, target_tau_multiple)
    n_params = len(names)
    if proposal is None:
        proposal = "stretch" if proposal_covariance is None else "laplace"
    moves = build_moves(proposal, start, proposal_covariance)  # checks name and covariance
    covariance = None
    if PROPOSALS[proposal].needs_covariance:  # already checked by build_moves
        covariance = np.asarray(proposal_covariance, dtype=float)
    fingerprint = proposal_fingerprint(proposal, start, covariance)
    n_stored = n_steps // thin_by
    path = Path(checkpoint) if checkpoint is not None else None
    loaded: Checkpoint | None = None
    if resume:
        if path is None:
            raise InputError("resume needs a checkpoint file", Location(key="checkpoint"), None,
                             "a checkpoint path")
        if path.exists():
            loaded = read_checkpoint(path)
            if seed is None:  # resuming an unseeded run: adopt the seed it drew
                seed = loaded.settings.get("seed")
        else:
            notes.append(f"no checkpoint at {path}: started a new run")
    if seed is None:
        seed = int(np.random.SeedSequence().entropy % (2 ** 63))
    settings = _settings(names, n_walkers, thin_by, seed, proposal, fingerprint)
    if loaded is not None:
        _check_resumable(loaded, settings, path)
        if loaded.iteration == 0:
            loaded = None
    began = time.monotonic()
    with make_evaluator(log_likelihood_batch, jobs, scheduler) as evaluator:
        log_posterior = LogPosterior(evaluator, built)
        backend = emcee.backends.Backend()
        backend.reset(n_walkers, n_params)
        if loaded is not None:
            done = loaded.iteration
            if done:
                backend.grow(done, None)
                backend.chain[:done] = loaded.chain
                backend.log_prob[:done] = loaded.log_prob
                backend.iteration = done
            backend.accepted = np.array(loaded.accepted, dtype=float)
            coords, log_prob = loaded.chain[-1].copy(), loaded.log_prob[-1].copy()
            random_state = loaded.random_state
        else:
            seeds = np.random.SeedSequence(seed).spawn(2)
            coords, log_prob = initial_walkers(log_posterior, start, scale, built, n_walkers,
                                               np.random.default_rng(seeds[0]), start_ball)
            random_state = np.random.RandomState(
                int(seeds[1].generate_state(1, np.uint32)[0])).get_state()
            done = 0
        sampler = emcee.EnsembleSampler(n_walkers, n_params, log_posterior, vectorize=True,
                                        backend=backend, moves=moves)
        sampler.random_state = random_state
        last = {"iteration": done, "accepted": backend.accepted.copy(), "random_state": random_state}

        def save() -> None:
            if path is None or last["iteration"] == 0:
                return
            n = last["iteration"]
            write_checkpoint(path, Checkpoint(backend.chain[:n].copy(), backend.log_prob[:n].copy(),
                                              last["accepted"], last["random_state"],
                                              dict(settings, n_steps=int(n_steps))))

        update, close_bar = _progress_reporter(progress, n_stored, done)
        last_save_time, last_save_step = time.monotonic(), done
        try:
            remaining = n_stored - done
            if remaining > 0:
                initial = emcee.State(coords, log_prob=log_prob, random_state=random_state)
                for state in sampler.sample(initial, iterations=remaining, thin_by=thin_by,
                                            progress=False, store=True,
                                            skip_initial_state_check=loaded is not None):
                    last = {"iteration": backend.iteration, "accepted": backend.accepted.copy(),
                            "random_state": state.random_state}
                    update(backend.iteration)
                    now = time.monotonic()
                    if path is not None and (
                            now - last_save_time >= checkpoint_every
                            or (checkpoint_every_steps is not None
                                and backend.iteration - last_save_step >= checkpoint_every_steps)):
                        save()
                        last_save_time, last_save_step = now, backend.iteration
        except KeyboardInterrupt:
            save()
            raise
        except ValueError as exc:  # emcee's own checks (e.g. walkers not linearly independent)
            save()
            raise SolverError(f"the ensemble sampler stopped: {exc}") from exc
        finally:
            close_bar()
        save()
        description = evaluator.description
    chain = backend.get_chain()
    log_prob_chain = backend.get_log_prob()
    acceptance = backend.accepted / max(backend.iteration, 1)
    n_steps = max(int(n_steps), chain.shape[0] * int(thin_by))  # a resumed run may be longer
    return _finish(names, built, chain, log_prob_chain, acceptance, settings, n_steps, thin_by,
                   target_tau_multiple, notes, description, time.monotonic() - began, log_posterior,
                   None if loaded is None else loaded.iteration)


def _finish(names, priors, chain, log_prob, acceptance, settings, n_steps, thin_by,
            target_tau_multiple, notes, evaluator, elapsed, log_posterior, resumed_from) -> PosteriorResult:
    tau = autocorrelation_time(chain)
    burn_in, thin = choose_burn_in_and_thin(tau, chain.shape[0])
    diagnostics = convergence_diagnostics(chain, acceptance, names, burn_in, target_tau_multiple)
    samples = chain[burn_in::thin].reshape(-1, chain.shape[2])
    warnings = list(notes) + list(diagnostics.warnings)
    if log_posterior.n_failures:
        warnings.append(f"{log_posterior.n_failures} of {log_posterior.n_evaluations} likelihood "
                        "evaluations failed (counted as zero likelihood)")
    return PosteriorResult(
        parameter_names=list(names), chain=chain, log_prob=log_prob,
        acceptance_fraction=np.asarray(acceptance, dtype=float), burn_in=int(burn_in), thin=int(thin),
        samples=samples, summary=summarise(names, samples, diagnostics),
        diagnostics=diagnostics, warnings=warnings, priors=[p.describe() for p in priors],
        n_walkers=int(chain.shape[1]), n_steps=int(n_steps), thin_by=int(thin_by),
        seed=settings["seed"], evaluator=evaluator, elapsed_seconds=float(elapsed),
        n_likelihood_evaluations=int(log_posterior.n_evaluations),
        n_failed_evaluations=int(log_posterior.n_failures), resumed_from=resumed_from,
        proposal=settings["proposal"], moves=PROPOSALS[settings["proposal"]].describe)
