"""The result of a posterior sampling run: chain, kept samples, summary, diagnostics.

:class:`PosteriorResult` is what :func:`speciakin.estimation.sampling.sample_posterior`
returns; it reports itself as text, as a JSON-ready dict (``posterior.json``) and
saves to / loads from the one posterior store, the sampler's HDF5 checkpoint
file (:mod:`speciakin.estimation.checkpoint` describes the layout).
"""

from __future__ import annotations

import math
import os
from dataclasses import asdict, dataclass, field
from pathlib import Path

import numpy as np

from speciakin._json import json_ready
from speciakin.errors import InputError, Location
from speciakin.estimation.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from speciakin.estimation.diagnostics import ConvergenceDiagnostics
from speciakin.estimation.proposals import PROPOSALS

__all__ = ["PosteriorResult", "ParameterSummary", "summarise"]


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


@dataclass
class PosteriorResult:
    """Result of :func:`speciakin.estimation.sampling.sample_posterior`; every field always exists.

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
    stop_reason
        Why the run ended: ``"converged"`` (a convergence check passed),
        ``"cap"`` (the cap on steps was reached first) or ``"fixed"`` (a fixed
        number of steps was requested); see
        :mod:`speciakin.estimation.stopping`.
    stop_message
        The same in plain words, with the figures of the deciding check.
    stop_checks
        Every convergence check of the run (resumed part included), in step
        order, as dicts of :class:`~speciakin.estimation.stopping.StopCheck`.
    stop_rule
        The rule (``check_every``, ``min_steps``, ``max_steps``, criteria), or
        None for a fixed length.
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
    stop_reason: str = "fixed"
    stop_message: str = ""
    stop_checks: list[dict] = field(default_factory=list)
    stop_rule: dict | None = None

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
                 f"stopped: {self.stop_message or self.stop_reason}",
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
                "proposal": self.proposal, "moves": self.moves, "stop_reason": self.stop_reason,
                "stop_message": self.stop_message, "stop_checks": self.stop_checks,
                "stop_rule": self.stop_rule}

    def to_dict(self) -> dict:
        """JSON-ready summary (no chain; non-finite numbers become None)."""
        data = self._metadata()
        data["acceptance_fraction"] = self.acceptance_fraction.tolist()
        data["n_samples"] = int(self.samples.shape[0])
        data["converged"] = self.converged
        return json_ready(data)

    def save(self, path: str | os.PathLike) -> None:
        """Store the result in the posterior file ``path`` (HDF5, written atomically).

        When ``path`` holds the sampler's checkpoint of this very chain, the
        result is added to it and the file still resumes; otherwise the file is
        written anew with the chain and the result but without the sampler's
        state (it loads, but a run cannot continue from it).
        """
        stored = None
        if Path(path).is_file():
            try:
                stored = read_checkpoint(path)
            except InputError:
                stored = None  # not a posterior file: written anew
        if stored is None or not _same_chain(stored, self):
            settings = {"parameter_names": list(self.parameter_names), "n_walkers": int(self.n_walkers),
                        "thin_by": int(self.thin_by), "seed": self.seed, "proposal": self.proposal}
            stored = Checkpoint(self.chain, self.log_prob, None, None, settings, stop_checks=self.stop_checks)
        # the metadata keeps NaN (Python's JSON reads it back); only the .json result files are strict
        stored.result = {"metadata": self._metadata(), "acceptance_fraction": self.acceptance_fraction}
        write_checkpoint(path, stored)

    @classmethod
    def load(cls, path: str | os.PathLike) -> "PosteriorResult":
        """Read the result of the posterior file ``path`` (see :meth:`save`).

        Raises
        ------
        InputError
            The file is missing, unreadable, not a posterior file, or holds
            an unfinished run (a checkpoint without a result).
        """
        result = cls.from_store(read_checkpoint(path), path)
        if result is None:
            raise InputError("the posterior file holds an unfinished run (a checkpoint without a result)",
                             Location(file=str(path)), None,
                             "a finished run: continue it with resume, then load it")
        return result

    @classmethod
    def from_store(cls, stored: Checkpoint, path: str | os.PathLike) -> "PosteriorResult | None":
        """The result held by a posterior file already read (``path`` names it in errors), or None
        when the run is not finished."""
        if stored.result is None:
            return None
        try:
            meta = dict(stored.result["metadata"])
            chain = stored.chain
            samples = chain[meta["burn_in"]::meta["thin"]].reshape(-1, chain.shape[2])
            return cls(chain=chain, log_prob=stored.log_prob,
                       acceptance_fraction=stored.result["acceptance_fraction"], samples=samples,
                       summary=[ParameterSummary(**s) for s in meta.pop("summary")],
                       diagnostics=ConvergenceDiagnostics(**meta.pop("diagnostics")), **meta)
        except (KeyError, TypeError, ValueError, IndexError) as exc:
            raise InputError(f"the posterior file is incomplete or malformed ({type(exc).__name__}: {exc})",
                             Location(file=str(path)), None,
                             "a posterior file as written by the sampler (posterior.h5 of the sample command)"
                             ) from None


def _same_chain(stored: Checkpoint, result: PosteriorResult) -> bool:
    """True when the stored chain and log-posterior are those of ``result``."""
    return (stored.chain.shape == result.chain.shape and np.array_equal(stored.chain, result.chain)
            and np.array_equal(stored.log_prob, result.log_prob))
