"""When a sampler run stops: the convergence check made during sampling.

A run without a fixed length is checked every ``check_every`` steps from
``min_steps`` on, and at the cap ``max_steps``; it stops at the first check
where every criterion of
:func:`speciakin.estimation.diagnostics.convergence_diagnostics` holds:

* chain length >= ``target_tau_multiple`` (50) x the longest integrated
  autocorrelation time (emcee documentation, common practice);
* rank-normalised split R-hat <= 1.01 for every parameter;
* bulk and tail effective sample size >= 400 for every parameter
  (Vehtari et al., Bayesian Analysis 2021, 16, 667),

R-hat and ESS taken after the burn-in the final result uses (2 x the longest
tau), walkers as chains.  A check is a function of the stored chain alone (no
clock, no acceptance counts, no random numbers), so a run resumed from a
checkpoint checks the same chain at the same steps and stops at the same
step as an uninterrupted run with the same seed.

References
----------
Vehtari, A., Gelman, A., Simpson, D., Carpenter, B. and Buerkner, P.-C.,
"Rank-normalization, folding, and localization: an improved R-hat for
assessing convergence of MCMC", Bayesian Analysis 2021, 16, 667.
Foreman-Mackey, D. et al., "emcee: The MCMC Hammer", PASP 2013, 125, 306.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import numpy as np

from speciakin.estimation.diagnostics import ESS_MINIMUM, R_HAT_LIMIT, diagnose_chain

__all__ = ["StopRule", "StopCheck", "check_chain", "stop_summary", "DEFAULT_CHECK_EVERY",
           "DEFAULT_MIN_STEPS", "DEFAULT_MAX_STEPS", "STOP_REASONS"]

#: Steps between two convergence checks (a check of a 1600-step demo chain costs
#: a few per cent of the 200 steps before it; docs/sampling.md).
DEFAULT_CHECK_EVERY = 200
#: No check before this many steps: a tau estimated from a very short chain
#: reads low (emcee documentation), so the first check waits for some chain.
DEFAULT_MIN_STEPS = 400
#: The cap: a run that has not converged by then stops and says so.
DEFAULT_MAX_STEPS = 5000
#: Values of ``PosteriorResult.stop_reason``.
STOP_REASONS = ("converged", "cap", "fixed")


@dataclass(frozen=True)
class StopRule:
    """When to check and when to give up (steps per walker).

    Attributes
    ----------
    check_every
        Steps between checks; a multiple of the storage thinning.
    min_steps
        First step at which a check may be made.
    max_steps
        The cap; a check is also made there.
    target_tau_multiple
        Chain length needed in autocorrelation times (R-hat and ESS limits
        are the fixed ``R_HAT_LIMIT`` and ``ESS_MINIMUM`` of the diagnostics).
    """

    check_every: int = DEFAULT_CHECK_EVERY
    min_steps: int = DEFAULT_MIN_STEPS
    max_steps: int = DEFAULT_MAX_STEPS
    target_tau_multiple: float = 50.0

    def is_check_step(self, step: int) -> bool:
        """True when a check is made after ``step`` steps."""
        if step >= self.max_steps:
            return True
        return step >= self.min_steps and step % self.check_every == 0

    def identity(self) -> dict:
        """Everything that decides *where* a run stops except the cap (recorded in checkpoints)."""
        return {"check_every": int(self.check_every), "min_steps": int(self.min_steps),
                "target_tau_multiple": float(self.target_tau_multiple), "r_hat_limit": R_HAT_LIMIT,
                "ess_minimum": ESS_MINIMUM}

    def describe(self) -> str:
        return (f"checked every {self.check_every} steps from step {self.min_steps}, cap {self.max_steps}: "
                f"chain >= {self.target_tau_multiple:g} x tau, R-hat <= {R_HAT_LIMIT:g}, "
                f"bulk and tail ESS >= {ESS_MINIMUM:g}")


@dataclass
class StopCheck:
    """Figures of one convergence check.

    Attributes
    ----------
    step
        Steps per walker at the check.
    tau_multiple
        Chain length / longest autocorrelation time (stored steps).
    max_tau
        Longest autocorrelation time [stored steps] (inf when not estimable).
    max_r_hat, min_ess_bulk, min_ess_tail
        Worst R-hat and smallest bulk and tail ESS over the parameters.
    passed
        Every criterion holds.
    failing
        Plain words of each criterion not met (empty when passed).
    """

    step: int
    tau_multiple: float
    max_tau: float
    max_r_hat: float
    min_ess_bulk: float
    min_ess_tail: float
    passed: bool
    failing: list[str] = field(default_factory=list)

    def short(self) -> str:
        """One line for a progress bar: ``"@800: 48x tau, R-hat 1.021, ESS 900/700"``."""
        return (f"@{self.step}: {self.tau_multiple:.0f}x tau, R-hat {self.max_r_hat:.3f}, "
                f"ESS {self.min_ess_bulk:.0f}/{self.min_ess_tail:.0f}" + (" ok" if self.passed else ""))

    def figures(self) -> str:
        """The figures in words (for the stop message)."""
        return (f"chain {self.tau_multiple:.1f} x the longest tau ({_number(self.max_tau, '.1f')} steps), "
                f"largest R-hat {self.max_r_hat:.4f}, smallest bulk ESS {self.min_ess_bulk:.0f}, "
                f"smallest tail ESS {self.min_ess_tail:.0f}")

    def to_dict(self) -> dict:
        """JSON-ready (non-finite numbers become None)."""
        return {k: (v if not isinstance(v, float) or math.isfinite(v) else None) for k, v in asdict(self).items()}

    @classmethod
    def from_dict(cls, data: dict) -> "StopCheck":
        values = dict(data)
        for key, missing in (("max_tau", math.inf), ("max_r_hat", math.inf), ("tau_multiple", 0.0),
                             ("min_ess_bulk", 0.0), ("min_ess_tail", 0.0)):
            if values.get(key) is None:
                values[key] = missing
        return cls(**values)


def _number(x: float, fmt: str) -> str:
    return format(x, fmt) if math.isfinite(x) else "not estimable"


def check_chain(chain: np.ndarray, parameter_names, step: int, target_tau_multiple: float = 50.0,
                warm_up: int = 0) -> StopCheck:
    """Check the stop criteria on a stored chain.

    Parameters
    ----------
    chain
        (n_stored, n_walkers, n_params) stored positions so far.
    parameter_names
        Names in column order (for the plain-words findings).
    step
        Steps per walker the chain represents (recorded only).
    target_tau_multiple
        Chain length needed in autocorrelation times.
    warm_up
        Stored steps of an adapting proposal's warm-up: the figures are of
        the chain after it (:func:`~speciakin.estimation.diagnostics.diagnose_chain`).

    Returns
    -------
    StopCheck
        Depends on the values of ``chain``, ``target_tau_multiple`` and
        ``warm_up`` only (not on the array's memory layout).
    """
    # one memory layout, so that the same values give the same figures to the last bit
    chain = np.ascontiguousarray(chain, dtype=float)
    d, _, _ = diagnose_chain(chain, None, parameter_names, target_tau_multiple, warm_up)
    names = list(parameter_names)
    tau = np.asarray(d.autocorrelation_time, dtype=float)
    failing = []
    if not d.long_enough:
        failing.append(f"chain {d.tau_multiple:.1f} x tau < {d.target_tau_multiple:g} "
                       f"(longest: {names[int(np.argmax(tau))]})")
    worst = int(np.argmax(np.where(np.isfinite(d.r_hat), d.r_hat, np.inf)))
    if not max(d.r_hat) <= R_HAT_LIMIT:
        failing.append(f"R-hat {d.r_hat[worst]:.4f} > {R_HAT_LIMIT:g} ({names[worst]})")
    for kind, values in (("bulk", d.ess_bulk), ("tail", d.ess_tail)):
        low = int(np.argmin(values))
        if not values[low] >= ESS_MINIMUM:
            failing.append(f"{kind} ESS {values[low]:.0f} < {ESS_MINIMUM:g} ({names[low]})")
    return StopCheck(step=int(step), tau_multiple=float(d.tau_multiple), max_tau=float(np.max(tau)),
                     max_r_hat=float(max(d.r_hat)), min_ess_bulk=float(min(d.ess_bulk)),
                     min_ess_tail=float(min(d.ess_tail)), passed=bool(d.converged), failing=failing)


def stop_summary(rule: StopRule | None, checks: list[StopCheck], n_steps: int) -> tuple[str, str]:
    """Reason code (one of :data:`STOP_REASONS`) and plain-words message of how a run ended.

    Parameters
    ----------
    rule
        The stop rule, or None for a run of fixed length.
    checks
        Checks made, in step order (those of a resumed run's earlier part included).
    n_steps
        Steps per walker in the finished chain.
    """
    if rule is None:
        return "fixed", f"fixed length requested: {n_steps} steps (no convergence checks made)"
    last = checks[-1] if checks else None
    if last is not None and last.passed and last.step == n_steps:
        return "converged", f"converged at step {last.step}: {last.figures()} ({rule.describe()})"
    text = f"reached the cap of {rule.max_steps} steps without meeting the convergence criteria"
    if last is not None:
        text += f" (not met at step {last.step}: " + "; ".join(last.failing) + ")"
    return "cap", text
