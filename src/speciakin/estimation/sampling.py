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
differential evolution.  By default the run stops when converged (checks of
the stored chain at fixed steps, :mod:`speciakin.estimation.stopping`), at
the latest at a cap; ``n_steps`` asks for a fixed length instead.

References
----------
Goodman, J. and Weare, J., "Ensemble samplers with affine invariance",
Comm. App. Math. Comp. Sci. 2010, 5, 65 (the stretch move).
Foreman-Mackey, D., Hogg, D. W., Lang, D. and Goodman, J., "emcee: The MCMC
Hammer", PASP 2013, 125, 306.
"""

from __future__ import annotations

import math
import time
from pathlib import Path
from typing import Callable, Sequence

import emcee
import numpy as np

from speciakin.errors import InputError, Location, SolverError
from speciakin.estimation.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from speciakin.estimation.diagnostics import diagnose_chain
from speciakin.estimation.parallel import make_evaluator
from speciakin.estimation.posterior_result import ParameterSummary, PosteriorResult, summarise
from speciakin.estimation.priors import PriorDistribution, build_prior, joint_log_prior
from speciakin.estimation.proposals import (DEFAULT_WITH_COVARIANCE, PROPOSALS, adapt_moves,
                                            adaptation_iterations, build_moves, proposal_fingerprint,
                                            warm_up_iterations)
from speciakin.estimation.walkers import initial_walkers
from speciakin.estimation.stopping import (DEFAULT_CHECK_EVERY, DEFAULT_MAX_STEPS, DEFAULT_MIN_STEPS,
                                           StopCheck, StopRule, check_chain, stop_summary)

__all__ = ["sample_posterior", "LogPosterior", "initial_walkers", "PosteriorResult",
           "ParameterSummary", "summarise"]

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


def _check_inputs(parameter_names, priors, start, start_scale, n_walkers, n_steps, thin_by,
                  checkpoint_every, checkpoint_every_steps, target_tau_multiple, stop):
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
    check_every, min_steps, max_steps = stop
    if n_steps is not None:  # fixed length: the stop-rule settings are not used
        whole(n_steps, "n_steps", thin_by, f"a whole number >= thin_by ({thin_by}), or None = until converged")
    else:
        whole(check_every, "check_every", thin_by, f"a whole number >= thin_by ({thin_by})")
        if check_every % thin_by:
            raise InputError("'check_every' is not allowed", Location(key="check_every"), check_every,
                             f"a multiple of thin_by ({thin_by}): checks are made on stored steps")
        whole(min_steps, "min_steps", 0, "a whole number >= 0")
        whole(max_steps, "max_steps", 4 * thin_by, f"a whole number >= 4 x thin_by ({4 * thin_by})")
    if checkpoint_every_steps is not None:
        whole(checkpoint_every_steps, "checkpoint_every_steps", 1, "a whole number >= 1 or None")
    if not (isinstance(checkpoint_every, (int, float)) and math.isfinite(checkpoint_every)
            and checkpoint_every > 0):
        raise InputError("'checkpoint_every' is not allowed", Location(key="checkpoint_every"),
                         checkpoint_every, "a number of seconds > 0")
    if not (math.isfinite(target_tau_multiple) and target_tau_multiple > 0):
        raise InputError("'target_tau_multiple' is not allowed", Location(key="target_tau_multiple"),
                         target_tau_multiple, "a number > 0")
    rule = None
    if n_steps is None:
        rule = StopRule(int(check_every), int(min_steps), int(max_steps) // thin_by * thin_by,
                        float(target_tau_multiple))
    return names, built, start, scale, notes, rule


def _settings(names, n_walkers, thin_by, seed, proposal, fingerprint) -> dict:
    return {"parameter_names": names, "n_walkers": int(n_walkers), "thin_by": int(thin_by),
            "seed": None if seed is None else int(seed), "proposal": proposal,
            "proposal_fingerprint": fingerprint}


def _check_same_rule(cp: Checkpoint, rule: StopRule | None, path: Path) -> None:
    """A checkpoint of a run that stops when converged resumes only under the same rule (cap aside)."""
    saved = cp.settings.get("stop_rule")
    if rule is None or saved is None or saved == rule.identity():
        return
    raise InputError("checkpoint belongs to a run with other convergence checks (interval, first check "
                     "or criteria differ), so it would not stop where the interrupted run would",
                     Location(file=str(path), key="stop_rule"), saved,
                     f"{rule.identity()} as in this run (or a fixed number of steps, or start without resume)")


def _check_resumable(cp: Checkpoint, settings: dict, path: Path) -> None:
    if not cp.resumable:
        raise InputError("the posterior file holds a finished result without the sampler's state, so the run "
                         "cannot continue from it", Location(file=str(path)), None,
                         "a checkpoint written by the sampler (or start without resume)")
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
    """(update(done), note(text), close(), ended()) for the chosen kind of progress report.

    ``ended()`` is called when the run has ended normally: a callable that was told steps against the cap
    is then told ``(done, done, 0.0)`` when the run stopped before the cap (converged), so that a bar or a
    job's progress shows the stage complete instead of stopping at, say, 1000 of 5000 steps."""
    if callable(progress):
        start_time, start_step = time.monotonic(), initial
        last = {"done": initial}

        def report(done: int) -> None:
            last["done"] = done
            elapsed = time.monotonic() - start_time
            rate = (done - start_step) / elapsed if elapsed > 0 else 0.0
            left = (total - done) / rate if rate > 0 else math.inf
            progress(done, total, left)

        def ended() -> None:
            if last["done"] < total:
                progress(last["done"], last["done"], 0.0)

        return report, (lambda text: None), (lambda: None), ended
    if progress:
        from tqdm.auto import tqdm

        bar = tqdm(total=total, initial=initial, unit="step", desc="sampling", leave=False)
        return (lambda done: bar.update(done - bar.n)), bar.set_postfix_str, bar.close, (lambda: None)
    return (lambda done: None), (lambda text: None), (lambda: None), (lambda: None)


def sample_posterior(log_likelihood_batch: Callable, parameter_names: Sequence[str], priors: Sequence,
                     start, start_scale, *, n_walkers: int = 32, n_steps: int | None = None,
                     max_steps: int = DEFAULT_MAX_STEPS, min_steps: int = DEFAULT_MIN_STEPS,
                     check_every: int = DEFAULT_CHECK_EVERY,
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
        None (default): run until converged -- the chain is checked every
        ``check_every`` steps from ``min_steps`` on and at ``max_steps``, and
        the run stops at the first check where chain length >=
        ``target_tau_multiple`` x tau, R-hat <= 1.01 and bulk and tail ESS >=
        400 hold for every parameter, or at the cap ``max_steps``
        (:mod:`speciakin.estimation.stopping`).  A whole number: exactly that
        many steps per walker, no checks (a resumed run continues to this
        length).  ``steps // thin_by`` steps are stored.
    max_steps, min_steps, check_every
        Cap, first check and interval between checks [steps per walker] of a
        run until converged (defaults 5000, 400, 200); ``check_every`` must be
        a multiple of ``thin_by``.
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
        True = tqdm bar with time left (against the cap when running until
        converged, showing the last check); a callable is called as
        ``progress(steps_done, steps_total, seconds_left)`` (``steps_total`` =
        the cap when running until converged); False = silent.
    thin_by
        Store every ``thin_by``-th step.
    target_tau_multiple
        Chain length needed in autocorrelation times (default 50); a
        convergence criterion of the stop rule and of the diagnostics.
    start_ball
        Size of the start ball in units of ``start_scale``.
    proposal
        Move choice, a key of :data:`~speciakin.estimation.proposals.PROPOSALS`:
        ``"stretch"`` (emcee's stretch move), ``"laplace"`` (independence
        Student-t centred at ``start`` with ``proposal_covariance``, mixed with
        differential evolution) or ``"adaptive"`` (the same, refitted to the
        chain during a warm-up that every figure discards).  None =
        ``"adaptive"`` when ``proposal_covariance`` is given, else ``"stretch"``.  Recorded in the
        checkpoint: a resume with another choice is refused.
    proposal_covariance
        (n_params, n_params) covariance of the parameters on the fitted scale
        (the least-squares covariance); must be symmetric positive definite.

    Returns
    -------
    PosteriorResult
        With ``stop_reason`` ("converged", "cap" or "fixed"), ``stop_message``
        and ``stop_checks``.

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
    names, built, start, scale, notes, rule = _check_inputs(
        parameter_names, priors, start, start_scale, n_walkers, n_steps, thin_by, checkpoint_every,
        checkpoint_every_steps, target_tau_multiple, (check_every, min_steps, max_steps))
    n_params = len(names)
    if proposal is None:
        proposal = "stretch" if proposal_covariance is None else DEFAULT_WITH_COVARIANCE
    moves = build_moves(proposal, start, proposal_covariance)  # checks name and covariance
    covariance = None
    if PROPOSALS[proposal].needs_covariance:  # already checked by build_moves
        covariance = np.asarray(proposal_covariance, dtype=float)
    fingerprint = proposal_fingerprint(proposal, start, covariance)
    warm_up = warm_up_iterations(proposal, thin_by)
    n_stored = (n_steps if rule is None else rule.max_steps) // thin_by
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
        _check_same_rule(loaded, rule, path)
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
            for iteration in adaptation_iterations(proposal, thin_by):  # the adaptations already made
                if iteration <= done:
                    adapt_moves(moves, proposal, loaded.chain, iteration, thin_by)
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
        checks: list[StopCheck] = []
        if loaded is not None and rule is not None:
            checks = [StopCheck.from_dict(c) for c in loaded.stop_checks if c["step"] < done * thin_by]
        run_settings = dict(settings, n_steps=None if n_steps is None else int(n_steps))
        if rule is not None:
            run_settings.update(stop_rule=rule.identity(), max_steps=rule.max_steps)

        def save() -> None:
            if path is None or last["iteration"] == 0:
                return
            n = last["iteration"]
            write_checkpoint(path, Checkpoint(backend.chain[:n].copy(), backend.log_prob[:n].copy(),
                                              last["accepted"], last["random_state"], run_settings,
                                              stop_checks=[c.to_dict() for c in checks if c.step <= n * thin_by]))

        update, note, close_bar, ended = _progress_reporter(progress, n_stored, done)

        def converged_now(iteration: int) -> bool:
            """Check the stored chain when ``iteration`` stored steps is a check point."""
            step = iteration * thin_by
            if rule is None or iteration == 0 or not rule.is_check_step(step):
                return False
            checks.append(check_chain(backend.chain[:iteration], names, step, rule.target_tau_multiple,
                                      warm_up))
            note(f"{checks[-1].short()} (cap {rule.max_steps})")
            return checks[-1].passed

        last_save_time, last_save_step = time.monotonic(), done
        try:
            remaining = n_stored - done
            if remaining > 0 and not converged_now(done):  # a resumed converged run needs no step
                initial = emcee.State(coords, log_prob=log_prob, random_state=random_state)
                for state in sampler.sample(initial, iterations=remaining, thin_by=thin_by,
                                            progress=False, store=True,
                                            skip_initial_state_check=loaded is not None):
                    last = {"iteration": backend.iteration, "accepted": backend.accepted.copy(),
                            "random_state": state.random_state}
                    update(backend.iteration)
                    adapt_moves(moves, proposal, backend.chain, backend.iteration, thin_by)
                    stop = converged_now(backend.iteration)
                    now = time.monotonic()
                    if path is not None and (
                            now - last_save_time >= checkpoint_every
                            or (checkpoint_every_steps is not None
                                and backend.iteration - last_save_step >= checkpoint_every_steps)):
                        save()
                        last_save_time, last_save_step = now, backend.iteration
                    if stop:
                        break
            elif remaining <= 0:
                converged_now(done)  # a resumed run at or past the cap: its final check
        except KeyboardInterrupt:
            save()
            raise
        except ValueError as exc:  # emcee's own checks (e.g. walkers not linearly independent)
            save()
            raise SolverError(f"the ensemble sampler stopped: {exc}") from exc
        finally:
            close_bar()
        ended()
        save()
        description = evaluator.description
    chain = backend.get_chain()
    log_prob_chain = backend.get_log_prob()
    acceptance = backend.accepted / max(backend.iteration, 1)
    run_steps = chain.shape[0] * int(thin_by)
    if rule is None:
        run_steps = max(int(n_steps), run_steps)  # a resumed run may be longer
    reason, message = stop_summary(rule, checks, run_steps)
    stop = {"reason": reason, "message": message, "checks": [c.to_dict() for c in checks],
            "rule": None if rule is None else dict(rule.identity(), max_steps=rule.max_steps)}
    return _finish(names, built, chain, log_prob_chain, acceptance, settings, run_steps, thin_by,
                   (target_tau_multiple, warm_up), notes, description, time.monotonic() - began, log_posterior,
                   None if loaded is None else loaded.iteration, stop)


def _finish(names, priors, chain, log_prob, acceptance, settings, n_steps, thin_by, criteria,
            notes, evaluator, elapsed, log_posterior, resumed_from, stop) -> PosteriorResult:
    diagnostics, burn_in, thin = diagnose_chain(chain, acceptance, names, *criteria,
                                                acceptance_range=PROPOSALS[settings["proposal"]].acceptance_range)
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
        proposal=settings["proposal"], moves=PROPOSALS[settings["proposal"]].describe,
        stop_reason=stop["reason"], stop_message=stop["message"], stop_checks=stop["checks"],
        stop_rule=stop["rule"])
