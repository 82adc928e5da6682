"""Proposal moves for the ensemble sampler: an independence Student-t move and the move sets.

The least-squares fit gives the optimum and the covariance of a posterior that
is close to Gaussian; an *independence* Metropolis-Hastings move proposes each
walker's next position from one fixed heavy-tailed distribution built from
them (a multivariate Student-t centred at the optimum with the covariance
inflated), so that an accepted proposal jumps across the whole posterior in
one step instead of diffusing through it.  With the Hastings factor
``log q(x_old) - log q(x_new)`` the move leaves the posterior exactly
invariant whatever the centre and scale; a poor centre or scale only costs
acceptance.  Because a fixed proposal cannot follow a posterior that departs
from it (a parameter that is barely identified, a bound), the move is always
mixed with differential-evolution moves that learn the shape from the
ensemble (:data:`PROPOSALS`, ``"laplace"``).  The ``"adaptive"`` choice (the
default with a covariance) refits the independence proposal to the chain
itself at fixed warm-up steps, on the normal scores of a per-parameter
quantile map (:mod:`speciakin.estimation.quantile_map`), so that a skewed or
bounded marginal is proposed where the posterior has its mass; after the last
refit the move is fixed (finite adaptation) and the warm-up is discarded.

Every random number is drawn from the ``RandomState`` that emcee hands to a
move (``model.random``), so a seed fixes the chain and a checkpoint that saves
that state resumes it bit for bit.

References
----------
Robert, C. P. and Casella, G., *Monte Carlo Statistical Methods*, 2nd ed.,
Springer 2004, section 7.4 (independent Metropolis-Hastings).
Tierney, L., "Markov chains for exploring posterior distributions",
Ann. Statist. 1994, 22, 1701 (independence chains; mixtures of kernels).
Kotz, S. and Nadarajah, S., *Multivariate t Distributions and Their
Applications*, Cambridge 2004, eq. 1.1 (density) and section 1.2 (t = normal
/ sqrt(chi-square / nu)); equation and section numbers from memory, the density
is checked against scipy.stats.multivariate_t in the tests.
ter Braak, C. J. F., "A Markov chain Monte Carlo version of the genetic
algorithm Differential Evolution", Stat. Comput. 2006, 16, 239; Nelson, B.
et al., ApJS 2014, 210, 11 (the differential-evolution move in emcee).
"""

from __future__ import annotations

import hashlib
import math
from dataclasses import dataclass
from typing import Callable

import emcee
import numpy as np
from scipy.special import gammaln

from speciakin.errors import InputError, Location
from speciakin.estimation.quantile_map import DEFAULT_KNOTS, QuantileMap

__all__ = ["student_t_log_density", "student_t_draw", "proposal_cholesky", "IndependenceStudentTMove",
           "ProposalSpec", "PROPOSALS", "build_moves", "proposal_fingerprint",
           "DEFAULT_DEGREES_OF_FREEDOM", "DEFAULT_INFLATION", "ADAPTED_INFLATION", "ADAPT_AT_STEPS",
           "adaptation_iterations", "warm_up_iterations", "adapt_moves", "DEFAULT_WITH_COVARIANCE"]

#: Degrees of freedom of the independence proposal: heavy tails keep the
#: importance ratio posterior / proposal bounded for a near-Gaussian posterior
#: (Robert and Casella 2004, section 7.4: the independence chain is uniformly
#: ergodic when that ratio is bounded).  5 is common practice.
DEFAULT_DEGREES_OF_FREEDOM = 5.0

#: Scale of the proposal as a multiple of the least-squares standard errors
#: (the covariance is multiplied by its square); common practice 1.2 to 2.
DEFAULT_INFLATION = 1.5

#: Scale of the *adapted* proposal as a multiple of the chain's own standard
#: deviations.  For a Gaussian target in 8 dimensions a Student-t (nu = 5)
#: with the target's covariance as scale matrix accepts about 0.69 of its
#: proposals at stationarity, with 1.2 x about 0.56 and with 1.5 x about 0.31
#: (our Monte Carlo, 200,000 draws; docs/sampling.md).
ADAPTED_INFLATION = 1.0

#: Steps after which the ``"adaptive"`` choice refits its independence
#: proposal to the mean and covariance of the second half of the chain so far
#: (all walkers pooled); the proposal is fixed after the last one, and the
#: steps up to it are warm-up, discarded with the burn-in.
ADAPT_AT_STEPS = (50, 150, 300)


# ---------------------------------------------------------------------------
# pure functions
# ---------------------------------------------------------------------------
def proposal_cholesky(covariance, n_params: int, key: str = "proposal_covariance") -> np.ndarray:
    """Lower Cholesky factor of a proposal covariance, after checking it.

    Parameters
    ----------
    covariance
        (n_params, n_params) covariance on the fitted scale.
    n_params
        Expected size.
    key
        Name used in the error location.

    Returns
    -------
    numpy.ndarray
        L with ``L @ L.T == covariance``.

    Raises
    ------
    InputError
        Wrong shape, non-finite entries, not symmetric (relative 1e-8), or not
        positive definite.
    """
    where = Location(key=key)
    expected = f"a finite symmetric positive-definite {n_params} x {n_params} matrix"
    try:
        c = np.asarray(covariance, dtype=float)
    except (TypeError, ValueError):
        raise InputError("proposal covariance is not a matrix of numbers", where, covariance,
                         expected) from None
    if c.shape != (n_params, n_params):
        raise InputError("proposal covariance has the wrong shape", where, c.shape, expected)
    if not np.all(np.isfinite(c)):
        raise InputError("proposal covariance has NaN or infinite entries", where,
                         int(np.sum(~np.isfinite(c))), expected)
    scale = np.max(np.abs(c)) if c.size else 0.0
    if not np.allclose(c, c.T, rtol=1e-8, atol=1e-12 * scale):
        raise InputError("proposal covariance is not symmetric", where,
                         float(np.max(np.abs(c - c.T))), expected)
    try:
        return np.linalg.cholesky(0.5 * (c + c.T))
    except np.linalg.LinAlgError:
        smallest = float(np.min(np.linalg.eigvalsh(0.5 * (c + c.T))))
        raise InputError("proposal covariance is not positive definite", where,
                         f"smallest eigenvalue {smallest:.3g}", expected) from None


def student_t_log_density(x: np.ndarray, centre: np.ndarray, cholesky: np.ndarray,
                          degrees_of_freedom: float) -> np.ndarray:
    """Log-density of a multivariate Student-t distribution.

    Parameters
    ----------
    x
        (n, d) points.
    centre
        (d,) location.
    cholesky
        (d, d) lower Cholesky factor L of the scale matrix (``Sigma = L L^T``).
    degrees_of_freedom
        nu > 0.

    Returns
    -------
    numpy.ndarray
        (n,) ``log Gamma((nu+d)/2) - log Gamma(nu/2) - d/2 log(nu pi)
        - log|L| - (nu+d)/2 log(1 + delta/nu)`` with ``delta`` the squared
        Mahalanobis distance ``|L^-1 (x - centre)|^2``.

    References
    ----------
    Kotz and Nadarajah, Multivariate t Distributions and Their Applications,
    Cambridge 2004, eq. 1.1.
    """
    x = np.atleast_2d(np.asarray(x, dtype=float))
    d = x.shape[1]
    nu = float(degrees_of_freedom)
    # L^-1 (x - centre) through the explicit inverse of the small triangular
    # factor: scipy's triangular solver costs milliseconds per call here when
    # the cores are busy with the likelihood
    z = (x - centre) @ np.linalg.inv(cholesky).T
    delta = np.sum(z * z, axis=1)
    log_det = np.sum(np.log(np.diag(cholesky)))
    return (gammaln(0.5 * (nu + d)) - gammaln(0.5 * nu) - 0.5 * d * math.log(nu * math.pi)
            - log_det - 0.5 * (nu + d) * np.log1p(delta / nu))


def student_t_draw(random, n: int, centre: np.ndarray, cholesky: np.ndarray,
                   degrees_of_freedom: float) -> np.ndarray:
    """``n`` draws (n, d) of a multivariate Student-t, from a numpy ``RandomState``.

    ``x = centre + L z / sqrt(w / nu)`` with ``z ~ N(0, I)`` and
    ``w ~ chi-square(nu)`` (Kotz and Nadarajah 2004, section 1.2).  Only
    ``random.standard_normal`` and ``random.chisquare`` are used, so a saved
    ``RandomState`` reproduces the draws.
    """
    d = centre.shape[0]
    z = random.standard_normal((n, d))
    w = random.chisquare(degrees_of_freedom, n)
    return centre + (z @ cholesky.T) / np.sqrt(w / degrees_of_freedom)[:, None]


# ---------------------------------------------------------------------------
# the move
# ---------------------------------------------------------------------------
class IndependenceStudentTMove(emcee.moves.MHMove):
    """Independence Metropolis-Hastings move with a fixed multivariate Student-t proposal.

    Every walker proposes a fresh point from ``t_nu(centre, inflation^2 *
    covariance)`` regardless of where it is; the acceptance log-ratio is
    ``log p(x_new) - log p(x_old) + log q(x_old) - log q(x_new)``.  The whole
    ensemble is proposed in one batch.

    Parameters
    ----------
    centre
        (d,) centre, e.g. the least-squares optimum (fitted scale).
    covariance
        (d, d) symmetric positive-definite covariance, e.g. the least-squares
        covariance.
    degrees_of_freedom
        nu of the Student-t (> 0; default 5).
    inflation
        Multiplier of the standard deviations (> 0; default 1.5).
    shape_marginals
        When True, :meth:`adapt_to` also fits a :class:`QuantileMap` of each
        coordinate onto normal scores, and the Student-t is placed in score
        space (skewed or bounded marginals); the density carries the map's
        Jacobian.

    References
    ----------
    Robert and Casella, Monte Carlo Statistical Methods, 2nd ed. 2004,
    section 7.4; Tierney, Ann. Statist. 1994, 22, 1701.
    """

    def __init__(self, centre, covariance, degrees_of_freedom: float = DEFAULT_DEGREES_OF_FREEDOM,
                 inflation: float = DEFAULT_INFLATION, shape_marginals: bool = False) -> None:
        centre = np.asarray(centre, dtype=float).reshape(-1)
        if not np.all(np.isfinite(centre)):
            raise InputError("proposal centre is not usable", Location(key="start"), centre.tolist(),
                             "finite numbers")
        for key, value in (("degrees_of_freedom", degrees_of_freedom), ("inflation", inflation)):
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise InputError(f"'{key}' of the proposal is not allowed", Location(key=key), value,
                                 "a finite number > 0")
        self.centre = centre
        self.degrees_of_freedom = float(degrees_of_freedom)
        self.inflation = float(inflation)
        self.cholesky = float(inflation) * proposal_cholesky(covariance, centre.shape[0])
        self.shape_marginals = bool(shape_marginals)
        self.marginal_map: QuantileMap | None = None  # None = the Student-t acts on x itself
        super().__init__(self._independent_proposal, ndim=centre.shape[0])

    def adapt_to(self, draws: np.ndarray) -> bool:
        """Re-centre and re-shape the proposal on ``draws`` (n, d): their mean and covariance.

        The new scale matrix is ``ADAPTED_INFLATION^2`` x the sample covariance.
        Draws whose covariance is not positive definite (e.g. walkers that have
        not spread yet) leave the proposal as it was.

        Returns
        -------
        bool
            True when the proposal was changed.
        """
        draws = np.ascontiguousarray(draws, dtype=float)
        if draws.shape[0] <= draws.shape[1] + 1 or not np.all(np.isfinite(draws)):
            return False
        marginal_map = QuantileMap.fit(draws) if self.shape_marginals else None
        scores = draws if marginal_map is None else marginal_map.forward(draws)[0]
        try:
            cholesky = proposal_cholesky(np.atleast_2d(np.cov(scores, rowvar=False)), draws.shape[1],
                                         key="chain covariance")
        except InputError:
            return False
        self.centre = np.mean(scores, axis=0)
        self.cholesky = ADAPTED_INFLATION * cholesky
        self.marginal_map = marginal_map
        return True

    def log_density(self, x: np.ndarray) -> np.ndarray:
        """Log proposal density q(x) of (n, d) points (with the Jacobian of the marginal map, if any)."""
        if self.marginal_map is None:
            return student_t_log_density(x, self.centre, self.cholesky, self.degrees_of_freedom)
        scores, log_jacobian = self.marginal_map.forward(x)
        return student_t_log_density(scores, self.centre, self.cholesky, self.degrees_of_freedom) + log_jacobian

    def _independent_proposal(self, coords: np.ndarray, random) -> tuple[np.ndarray, np.ndarray]:
        proposed = student_t_draw(random, coords.shape[0], self.centre, self.cholesky,
                                  self.degrees_of_freedom)
        if self.marginal_map is not None:
            proposed = self.marginal_map.inverse(proposed)
        # emcee adds "ln q(x | x') - ln q(x' | x)"; for an independence proposal
        # q(x | x') = q(x): log q(x_old) - log q(x_new) (Robert and Casella, section 7.4).
        return proposed, self.log_density(coords) - self.log_density(proposed)


# ---------------------------------------------------------------------------
# registry of proposal choices
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ProposalSpec:
    """One named choice of moves for :func:`~speciakin.estimation.sampling.sample_posterior`.

    Attributes
    ----------
    name
        Name used in the API, the CLI and the checkpoint.
    needs_covariance
        True when the choice needs the least-squares covariance.
    describe
        Plain-words description (for reports).
    build
        ``build(centre, covariance) -> list[(emcee move, weight)]``, or None
        for emcee's default (the stretch move).
    adapt_at
        Steps after which the independence move is refitted to the chain
        (:func:`adapt_moves`); empty = never.  The steps up to the last one
        are warm-up (:func:`warm_up_iterations`).
    acceptance_range
        Mean acceptance fractions outside it are warned about.  The stretch
        move: 0.15-0.6 (common practice).  A mixture with an independence
        move: below 0.15 only, since an independence proposal close to the
        posterior accepts most of what it proposes (acceptance near 1 for a
        perfect one), so a high fraction means a good proposal, not a badly
        scaled posterior.
    """

    name: str
    needs_covariance: bool
    describe: str
    build: Callable | None
    adapt_at: tuple[int, ...] = ()
    acceptance_range: tuple[float, float] = (0.15, 0.6)


#: Weights of the "laplace" mixture, chosen by measuring the autocorrelation
#: time on the invented demo campaign (docs/sampling.md, "Choice of moves").
LAPLACE_WEIGHTS = {"independence": 0.5, "differential_evolution": 0.5}


#: Weights of the "adaptive" mixture (docs/sampling.md, "The adaptive mixture").
ADAPTIVE_WEIGHTS = {"independence": 0.7, "differential_evolution": 0.3}


def _adaptive_moves(centre, covariance):
    return [(IndependenceStudentTMove(centre, covariance, shape_marginals=True), ADAPTIVE_WEIGHTS["independence"]),
            (emcee.moves.DEMove(), ADAPTIVE_WEIGHTS["differential_evolution"])]


def _laplace_moves(centre, covariance):
    return [(IndependenceStudentTMove(centre, covariance), LAPLACE_WEIGHTS["independence"]),
            (emcee.moves.DEMove(), LAPLACE_WEIGHTS["differential_evolution"])]


#: The proposal choices: the single list that the API, the CLI and the docs read.
PROPOSALS: dict[str, ProposalSpec] = {
    "stretch": ProposalSpec(
        "stretch", False, "affine-invariant stretch move (Goodman and Weare 2010)", None),
    "laplace": ProposalSpec(
        "laplace", True,
        (f"independence Student-t (nu = {DEFAULT_DEGREES_OF_FREEDOM:g}, centred at the start point, "
         f"scale {DEFAULT_INFLATION:g} x the least-squares standard errors) "
         f"{LAPLACE_WEIGHTS['independence']:g} + differential evolution "
         f"{LAPLACE_WEIGHTS['differential_evolution']:g}"),
        _laplace_moves, acceptance_range=(0.15, 1.0)),
    "adaptive": ProposalSpec(
        "adaptive", True,
        (f"independence Student-t (nu = {DEFAULT_DEGREES_OF_FREEDOM:g}), first centred at the start point "
         f"with scale {DEFAULT_INFLATION:g} x the least-squares standard errors, then placed on the normal "
         f"scores of the chain's quantiles ({DEFAULT_KNOTS} per parameter) with the mean and "
         f"{ADAPTED_INFLATION:g}^2 x the covariance of the scores of the second half of the chain after steps "
         + ", ".join(str(s) for s in ADAPT_AT_STEPS)
         + f" (warm-up, discarded) {ADAPTIVE_WEIGHTS['independence']:g} + differential evolution "
         f"{ADAPTIVE_WEIGHTS['differential_evolution']:g}"),
        _adaptive_moves, ADAPT_AT_STEPS, acceptance_range=(0.15, 1.0)),
}

#: The move choice used when a covariance is given and no choice is named.
DEFAULT_WITH_COVARIANCE = "adaptive"


def adaptation_iterations(proposal: str, thin_by: int = 1) -> tuple[int, ...]:
    """Stored iterations after which ``proposal`` adapts (its ``adapt_at`` steps, rounded up)."""
    return tuple(-(-int(step) // int(thin_by)) for step in PROPOSALS[proposal].adapt_at)


def warm_up_iterations(proposal: str, thin_by: int = 1) -> int:
    """Stored iterations of warm-up: up to the last adaptation (0 for a fixed proposal)."""
    return max(adaptation_iterations(proposal, thin_by), default=0)


def adapt_moves(moves, proposal: str, chain: np.ndarray, iteration: int, thin_by: int = 1) -> bool:
    """Refit the independence move when ``iteration`` stored steps is an adaptation point.

    The proposal is refitted to the second half of ``chain[:iteration]``
    (walkers pooled), a function of the stored chain alone, so a resumed run
    adapts to the same numbers as an uninterrupted one.  Finite adaptation:
    after the last point the move is a fixed independence kernel (Roberts and
    Rosenthal, J. Comput. Graph. Stat. 2009, 18, 349; Gelman et al., Bayesian
    Data Analysis, 3rd ed., section 12.2: adapt during warm-up only).

    Parameters
    ----------
    moves
        The list :func:`build_moves` returned (None for the stretch move).
    proposal
        Name of the move choice.
    chain
        (n_stored, n_walkers, n_params) stored chain, at least ``iteration`` long.
    iteration
        Stored steps done.
    thin_by
        Storage thinning.

    Returns
    -------
    bool
        True when a move was refitted.
    """
    if moves is None or iteration not in adaptation_iterations(proposal, thin_by):
        return False
    window = np.asarray(chain[iteration // 2:iteration], dtype=float)
    draws = window.reshape(-1, window.shape[-1])
    return any([move.adapt_to(draws) for move, _ in moves if isinstance(move, IndependenceStudentTMove)])


def build_moves(proposal: str, centre, covariance):
    """Moves and weights for emcee (``None`` = emcee's default stretch move).

    Raises
    ------
    InputError
        Unknown proposal name, or a covariance missing/unusable for a choice
        that needs one.
    """
    if not isinstance(proposal, str) or proposal not in PROPOSALS:
        raise InputError("unknown proposal", Location(key="proposal"), proposal,
                         "one of " + ", ".join(PROPOSALS))
    spec = PROPOSALS[proposal]
    if spec.needs_covariance and covariance is None:
        raise InputError(f"proposal '{proposal}' needs a covariance", Location(key="proposal_covariance"),
                         None, "the least-squares covariance matrix")
    return None if spec.build is None else spec.build(centre, covariance)


def proposal_fingerprint(proposal: str, centre, covariance) -> str:
    """Short hash of the proposal choice and the numbers it is built from.

    Stored in a checkpoint so that resuming with another proposal (which would
    not reproduce the uninterrupted chain) is refused.
    """
    h = hashlib.sha256(PROPOSALS[proposal].describe.encode() if proposal in PROPOSALS else proposal.encode())
    if PROPOSALS.get(proposal) is not None and PROPOSALS[proposal].needs_covariance:
        h.update(np.ascontiguousarray(np.asarray(centre, dtype=np.float64)).tobytes())
        h.update(np.ascontiguousarray(np.asarray(covariance, dtype=np.float64)).tobytes())
    return h.hexdigest()[:16]
