"""Convergence diagnostics of an ensemble-sampler chain.

* Integrated autocorrelation time per parameter (Goodman and Weare 2010;
  emcee's estimator with automatic windowing, Sokal 1997), compared with the
  chain length: a chain shorter than ``target_tau_multiple`` (default 50)
  times the autocorrelation time is flagged (emcee documentation, common
  practice).
* Acceptance fraction per walker: warned outside 0.15-0.6 (common practice;
  the emcee documentation suggests roughly 0.2-0.5).
* Rank-normalised split R-hat, bulk and tail effective sample size and the
  Monte Carlo standard error of the mean (Vehtari et al. 2021), written here
  as pure numpy functions (importing ArviZ costs several seconds per process);
  the tests check them against ArviZ.

How walkers are treated as chains: after burn-in, every walker is treated as
one chain.  Walkers of an affine-invariant ensemble are not fully
independent (each proposal uses another walker's position), so these
effective sample sizes may be optimistic; R-hat across walkers still detects
walkers stuck in different regions and incomplete mixing.  The report
therefore also gives the autocorrelation-based sample size
``n_walkers * n_kept / tau``, and warnings use the smaller of the two.

References
----------
Goodman, J. and Weare, J., "Ensemble samplers with affine invariance",
Comm. App. Math. Comp. Sci. 2010, 5, 65.
Foreman-Mackey, D. et al., "emcee: The MCMC Hammer", PASP 2013, 125, 306.
Sokal, A., "Monte Carlo methods in statistical mechanics: foundations and new
algorithms", in Functional Integration, Springer 1997.
Vehtari, A., Gelman, A., Simpson, D., Carpenter, B. and Buerkner, P.-C.,
"Rank-normalization, folding, and localization: an improved R-hat for
assessing convergence of MCMC", Bayesian Analysis 2021, 16, 667.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass, field

import emcee
import numpy as np
from scipy import stats

from speciakin._json import json_ready

__all__ = [
    "ConvergenceDiagnostics",
    "autocorrelation_time",
    "rank_normalised_r_hat",
    "effective_sample_size",
    "monte_carlo_standard_error",
    "choose_burn_in_and_thin",
    "convergence_diagnostics",
    "diagnose_chain",
    "ACCEPTANCE_RANGE",
    "R_HAT_LIMIT",
    "ESS_MINIMUM",
]

#: Acceptance fractions outside this range are warned about (common practice for the stretch move; a mixture
#: with an independence proposal passes its own, :attr:`speciakin.estimation.proposals.ProposalSpec.acceptance_range`).
ACCEPTANCE_RANGE = (0.15, 0.6)
#: R-hat above this suggests non-convergence (Vehtari et al. 2021, section 4).
R_HAT_LIMIT = 1.01
#: Bulk and tail ESS below this are warned about (Vehtari et al. 2021: 100 per chain for 4 chains).
ESS_MINIMUM = 400.0


def autocorrelation_time(chain: np.ndarray) -> np.ndarray:
    """Integrated autocorrelation time per parameter [stored steps].

    Parameters
    ----------
    chain
        (n_steps, n_walkers, n_params) positions.

    Returns
    -------
    numpy.ndarray
        (n_params,) tau; ``inf`` where it cannot be estimated (constant chain).

    References
    ----------
    Goodman and Weare 2010; Sokal 1997; computed with
    ``emcee.autocorr.integrated_time(tol=0)``, which never raises, so the
    caller compares tau with the chain length itself.
    """
    chain = np.asarray(chain, dtype=float)
    if chain.shape[0] < 2:
        return np.full(chain.shape[2], np.inf)
    with np.errstate(invalid="ignore", divide="ignore"):
        tau = np.asarray(emcee.autocorr.integrated_time(chain, tol=0, quiet=True), dtype=float)
    return np.where(np.isfinite(tau) & (tau > 0), tau, np.inf)


def _split_chains(draws: np.ndarray) -> np.ndarray:
    """(n_chains, n_draws) -> (2 n_chains, n_draws // 2); the middle draw of an odd chain is dropped."""
    half = draws.shape[1] // 2
    return np.concatenate([draws[:, :half], draws[:, draws.shape[1] - half:]], axis=0)


def _normal_scores(draws: np.ndarray) -> np.ndarray:
    """Rank normalisation: z = Phi^-1((r - 3/8) / (S + 1/4)) over all draws (Vehtari et al. 2021, section 4.1; equation numbers from memory)."""
    ranks = stats.rankdata(draws, method="average").reshape(draws.shape)
    return stats.norm.ppf((ranks - 0.375) / (draws.size + 0.25))


def _basic_r_hat(draws: np.ndarray) -> float:
    """Potential scale reduction of (n_chains, n_draws) (Gelman et al., Bayesian Data Analysis, 3rd ed., section 11.4)."""
    n = draws.shape[1]
    between = n * np.var(draws.mean(axis=1), ddof=1)
    within = np.mean(np.var(draws, axis=1, ddof=1))
    if not within > 0:
        return math.inf if between > 0 else math.nan
    return float(math.sqrt(((n - 1) / n * within + between / n) / within))


def _autocovariance(draws: np.ndarray) -> np.ndarray:
    """Biased autocovariance of each chain, lags 0..n-1, by FFT (Wiener-Khinchin)."""
    n = draws.shape[1]
    centred = draws - draws.mean(axis=1, keepdims=True)
    size = 1 << (2 * n - 1).bit_length()
    spectrum = np.fft.rfft(centred, n=size, axis=1)
    return np.fft.irfft(spectrum * np.conjugate(spectrum), n=size, axis=1)[:, :n] / n


def _basic_ess(draws: np.ndarray) -> float:
    """Multi-chain effective sample size with Geyer's initial monotone sequence.

    Implements Vehtari et al. 2021, section 3.2 (Geyer 1992): rho_t = 1 - (W - mean autocov_t)
    / var_plus; sums of adjacent pairs are truncated at the first negative
    pair and made monotone; tau = -1 + 2 sum of the pairs; ESS = M N / tau.
    """
    n_chains, n = draws.shape
    if np.ptp(draws) < np.finfo(float).resolution:
        return float(draws.size)
    acov = _autocovariance(draws)
    within = acov[:, 0].mean() * n / (n - 1.0)
    var_plus = within * (n - 1.0) / n
    if n_chains > 1:
        var_plus += np.var(draws.mean(axis=1), ddof=1)
    rho = 1.0 - (within - acov.mean(axis=0)) / var_plus
    n_pairs = n // 2
    pairs = rho[0:2 * n_pairs:2] + rho[1:2 * n_pairs:2]
    negative = np.nonzero(pairs < 0)[0]
    if negative.size:
        pairs = pairs[:negative[0]]
    pairs = np.minimum.accumulate(pairs)
    tau = max(-1.0 + 2.0 * float(np.sum(pairs)), 1.0 / math.log10(draws.size))
    return float(draws.size / tau)


def rank_normalised_r_hat(draws: np.ndarray) -> float:
    """Rank-normalised split R-hat of one parameter: the larger of bulk and folded R-hat.

    Parameters
    ----------
    draws
        (n_chains, n_draws).

    References
    ----------
    Vehtari et al., Bayesian Analysis 2021, 16, 667, section 4.2 (rank
    normalisation and the folded draws |x - median|).
    """
    split = _split_chains(np.asarray(draws, dtype=float))
    return _r_hat_of_split(split, _normal_scores(split))


def _r_hat_of_split(split: np.ndarray, scores: np.ndarray) -> float:
    """R-hat from split chains and their normal scores (shared so that the scores are ranked once)."""
    folded = np.abs(split - np.median(split))
    value = max(_basic_r_hat(scores), _basic_r_hat(_normal_scores(folded)))
    return value if math.isfinite(value) else math.inf


def _finite_ess(value: float) -> float:
    return value if math.isfinite(value) else 0.0


def _tail_ess_of_split(split: np.ndarray) -> float:
    return _finite_ess(min(_basic_ess((split <= np.quantile(split, q)).astype(float)) for q in (0.05, 0.95)))


def effective_sample_size(draws: np.ndarray, kind: str = "bulk") -> float:
    """Bulk or tail effective sample size of one parameter.

    ``"bulk"``: ESS of the rank-normalised split chains; ``"tail"``: the
    smaller ESS of the indicators x <= q5 % and x <= q95 %
    (Vehtari et al. 2021, section 4.3).
    """
    split = _split_chains(np.asarray(draws, dtype=float))
    if kind == "bulk":
        return _finite_ess(_basic_ess(_normal_scores(split)))
    if kind == "tail":
        return _tail_ess_of_split(split)
    raise ValueError(f"kind must be 'bulk' or 'tail', not {kind!r}")


def monte_carlo_standard_error(draws: np.ndarray) -> float:
    """Monte Carlo standard error of the posterior mean: sd / sqrt(ESS of the split chains).

    References
    ----------
    Vehtari et al., Bayesian Analysis 2021, 16, 667, section 4.4.
    """
    draws = np.asarray(draws, dtype=float)
    ess = _basic_ess(_split_chains(draws))
    return float(np.std(draws, ddof=1) / math.sqrt(ess)) if ess > 0 else math.inf


def choose_burn_in_and_thin(tau: np.ndarray, n_steps: int) -> tuple[int, int]:
    """Burn-in = 2 x max tau, thin = half the min tau (emcee documentation, common practice).

    The burn-in is capped at half the chain so that something is always kept;
    with an unusable tau the first half is discarded and nothing is thinned.
    """
    tau = np.asarray(tau, dtype=float)
    half = n_steps // 2
    if tau.size == 0 or not np.all(np.isfinite(tau)):
        return half, 1
    burn_in = min(int(math.ceil(2.0 * float(np.max(tau)))), half)
    thin = max(1, int(0.5 * float(np.min(tau))))
    return burn_in, thin


@dataclass
class ConvergenceDiagnostics:
    """Convergence figures of one run; every field always exists.

    Attributes
    ----------
    parameter_names
        Names in column order.
    autocorrelation_time
        Integrated autocorrelation time per parameter [stored steps].
    chain_length
        Stored steps of the whole chain (burn-in included).
    tau_multiple
        chain_length / max autocorrelation time.
    target_tau_multiple
        The multiple required (default 50).
    long_enough
        True when tau_multiple >= target_tau_multiple.
    acceptance_mean, acceptance_min, acceptance_max
        Acceptance fraction over walkers.
    r_hat, ess_bulk, ess_tail, ess_autocorrelation, mcse_mean
        Per parameter, after burn-in, walkers as chains (see module doc).
    converged
        Every convergence criterion holds: chain length >= ``target_tau_multiple``
        x the longest tau, R-hat <= ``R_HAT_LIMIT`` and bulk and tail ESS >=
        ``ESS_MINIMUM`` for every parameter (the same rule stops the sampler,
        :mod:`speciakin.estimation.stopping`).
    warnings
        Plain-words findings.
    """

    parameter_names: list[str]
    autocorrelation_time: list[float]
    chain_length: int
    tau_multiple: float
    target_tau_multiple: float
    long_enough: bool
    acceptance_mean: float
    acceptance_min: float
    acceptance_max: float
    r_hat: list[float]
    ess_bulk: list[float]
    ess_tail: list[float]
    ess_autocorrelation: list[float]
    mcse_mean: list[float]
    converged: bool
    warnings: list[str] = field(default_factory=list)

    def report(self) -> str:
        lines = ["Convergence", "-----------",
                 f"chain length: {self.chain_length} steps = {self.tau_multiple:.1f} x the longest "
                 f"autocorrelation time (target {self.target_tau_multiple:g} x)",
                 f"acceptance fraction: mean {self.acceptance_mean:.3f} "
                 f"(walkers {self.acceptance_min:.3f} to {self.acceptance_max:.3f})",
                 f"{'parameter':<28}{'tau':>9}{'R-hat':>8}{'ESS bulk':>10}{'ESS tail':>10}{'ESS tau':>10}"]
        for i, name in enumerate(self.parameter_names):
            lines.append(f"{name:<28}{self.autocorrelation_time[i]:>9.1f}{self.r_hat[i]:>8.3f}"
                         f"{self.ess_bulk[i]:>10.0f}{self.ess_tail[i]:>10.0f}"
                         f"{self.ess_autocorrelation[i]:>10.0f}")
        lines.append("status: " + ("converged" if self.converged else "NOT converged"))
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return json_ready(asdict(self))


def convergence_diagnostics(chain: np.ndarray, acceptance_fraction: np.ndarray | None, parameter_names,
                            burn_in: int, target_tau_multiple: float = 50.0,
                            tau: np.ndarray | None = None,
                            acceptance_range: tuple[float, float] = ACCEPTANCE_RANGE) -> ConvergenceDiagnostics:
    """Compute every convergence figure of a chain and the plain-words warnings.

    Parameters
    ----------
    chain
        (n_steps, n_walkers, n_params) stored positions, burn-in included.
    acceptance_fraction
        (n_walkers,) acceptance fraction per walker; None when unknown (no
        acceptance warnings; the acceptance figures are then NaN).  The
        ``converged`` flag never depends on it: it is a function of the chain.
    parameter_names
        Names of the parameters, in column order.
    burn_in
        Stored steps discarded before R-hat and ESS.
    target_tau_multiple
        Chain length needed, in units of the autocorrelation time.
    tau
        Autocorrelation times of ``chain`` when already computed
        (:func:`autocorrelation_time`); None = compute them.
    acceptance_range
        Mean acceptance fractions outside it are warned about (default
        :data:`ACCEPTANCE_RANGE`).

    Returns
    -------
    ConvergenceDiagnostics
    """
    chain = np.asarray(chain, dtype=float)
    n_steps, n_walkers, n_params = chain.shape
    names = list(parameter_names)
    tau = autocorrelation_time(chain) if tau is None else np.asarray(tau, dtype=float)
    max_tau = float(np.max(tau)) if n_params else math.inf
    multiple = n_steps / max_tau if math.isfinite(max_tau) and max_tau > 0 else 0.0
    kept = chain[burn_in:]
    n_kept = kept.shape[0]
    r_hat, ess_bulk, ess_tail, ess_tau, mcse = [], [], [], [], []
    for j in range(n_params):
        draws = kept[:, :, j].T  # walkers as chains: (n_walkers, n_kept)
        if n_kept >= 4:
            # as rank_normalised_r_hat and effective_sample_size, with the normal scores ranked once
            split = _split_chains(draws)
            scores = _normal_scores(split)
            r_hat.append(_r_hat_of_split(split, scores))
            ess_bulk.append(_finite_ess(_basic_ess(scores)))
            ess_tail.append(_tail_ess_of_split(split))
            mcse.append(monte_carlo_standard_error(draws))
        else:
            r_hat.append(math.inf)
            ess_bulk.append(0.0)
            ess_tail.append(0.0)
            mcse.append(math.inf)
        ess_tau.append(n_walkers * n_kept / tau[j] if math.isfinite(tau[j]) else 0.0)
    acceptance = (np.full(n_walkers, np.nan) if acceptance_fraction is None
                  else np.asarray(acceptance_fraction, dtype=float))
    found: list[str] = []
    converged = True
    if multiple < target_tau_multiple:
        converged = False
        worst = names[int(np.argmax(tau))] if n_params else "?"
        if math.isfinite(max_tau):
            found.append(f"not converged: chain length is {multiple:.0f} x the autocorrelation time "
                         f"(longest: {worst}, tau = {max_tau:.1f} steps); {target_tau_multiple:g} x is "
                         f"needed: run about {int(math.ceil(target_tau_multiple * max_tau))} steps")
        else:
            found.append("not converged: the autocorrelation time cannot be estimated "
                         f"(parameter {worst} does not move); run longer or check the model")
    lo, hi = acceptance_range
    known = acceptance_fraction is not None and acceptance.size > 0
    mean_acc = float(acceptance.mean()) if acceptance.size else 0.0
    if known and not lo <= mean_acc <= hi:
        found.append(f"acceptance fraction {mean_acc:.2f} is outside {lo:g}-{hi:g} (common practice): "
                     "the posterior may be badly scaled or multimodal")
    stuck = int(np.sum(acceptance < 0.2 * np.median(acceptance))) if known else 0
    if stuck:
        found.append(f"{stuck} walker(s) accept less than a fifth of the median: they may be stuck")
    bad_rhat = [f"{n} ({r:.3f})" for n, r in zip(names, r_hat) if not r <= R_HAT_LIMIT]
    if bad_rhat:
        converged = False
        found.append(f"R-hat above {R_HAT_LIMIT} for " + ", ".join(bad_rhat)
                     + ": walkers disagree, run longer")
    low_ess = [f"{n} ({min(b, t, a):.0f})" for n, b, t, a in zip(names, ess_bulk, ess_tail, ess_tau)
               if min(b, t, a) < ESS_MINIMUM]
    if any(not min(b, t) >= ESS_MINIMUM for b, t in zip(ess_bulk, ess_tail)):
        converged = False
    if low_ess:
        found.append(f"effective sample size below {ESS_MINIMUM:g} for " + ", ".join(low_ess)
                     + ": intervals are imprecise, run longer")
    return ConvergenceDiagnostics(
        parameter_names=names, autocorrelation_time=[float(t) for t in tau], chain_length=int(n_steps),
        tau_multiple=float(multiple), target_tau_multiple=float(target_tau_multiple),
        long_enough=bool(multiple >= target_tau_multiple), acceptance_mean=mean_acc,
        acceptance_min=float(acceptance.min()) if acceptance.size else 0.0,
        acceptance_max=float(acceptance.max()) if acceptance.size else 0.0,
        r_hat=[float(x) for x in r_hat], ess_bulk=[float(x) for x in ess_bulk],
        ess_tail=[float(x) for x in ess_tail], ess_autocorrelation=[float(x) for x in ess_tau],
        mcse_mean=[float(x) for x in mcse], converged=converged, warnings=found)


#: Stored steps always kept after an adapting proposal's warm-up (the fewest R-hat needs).
_MIN_KEPT_AFTER_WARM_UP = 4


def diagnose_chain(chain: np.ndarray, acceptance_fraction: np.ndarray | None, parameter_names,
                   target_tau_multiple: float = 50.0, warm_up: int = 0,
                   acceptance_range: tuple[float, float] = ACCEPTANCE_RANGE) -> tuple[ConvergenceDiagnostics, int, int]:
    """Burn-in, thinning and every convergence figure of a chain, from the chain alone.

    The burn-in and thinning follow :func:`choose_burn_in_and_thin` from the
    autocorrelation times of the whole chain; R-hat and ESS are computed on
    the part after the burn-in.  The result (in particular ``converged``)
    depends only on ``chain`` and ``target_tau_multiple`` (the acceptance
    fractions feed warnings only), which is what lets a resumed run take the
    same stop decision as an uninterrupted one.

    Parameters
    ----------
    chain
        (n_steps, n_walkers, n_params) stored positions, burn-in included.
    acceptance_fraction
        (n_walkers,) acceptance fraction per walker, or None.
    parameter_names
        Names of the parameters, in column order.
    target_tau_multiple
        Chain length needed, in units of the autocorrelation time.
    warm_up
        Stored steps of an adapting proposal's warm-up: removed before
        anything else (all but the last 4 stored steps of a shorter chain),
        so every figure, the 50-tau length included, is of the chain after
        it, and the burn-in counts from its end.
    acceptance_range
        Mean acceptance fractions outside it are warned about (the moves'
        own range; default :data:`ACCEPTANCE_RANGE`).

    Returns
    -------
    diagnostics, burn_in, thin
        :class:`ConvergenceDiagnostics`, and the burn-in [stored steps] and
        thinning of the kept samples.
    """
    chain = np.asarray(chain, dtype=float)
    warm = min(max(int(warm_up), 0), max(chain.shape[0] - _MIN_KEPT_AFTER_WARM_UP, 0))
    chain = chain[warm:]
    tau = autocorrelation_time(chain)
    burn_in, thin = choose_burn_in_and_thin(tau, chain.shape[0])
    diagnostics = convergence_diagnostics(chain, acceptance_fraction, parameter_names, burn_in,
                                          target_tau_multiple, tau=tau, acceptance_range=acceptance_range)
    return diagnostics, warm + burn_in, thin
