"""Which run to do next: expected shrinkage of the decision's uncertainty.

Pure functions on plain arrays.  The caller supplies, for the current
parameter draws (posterior samples, or multivariate-normal draws from the
least-squares covariance):

* the predicted observables of each candidate run, per draw (``(n_draws, m)``
  per candidate), and the campaign's error model as a function giving the
  standard deviation of an observation from its value;
* optionally the decision: pass/fail and a continuous spec margin of the
  planned process per draw and set-point pH (:func:`decision_draws`).

Criteria (each an expected value over the data the candidate would give)
------------------------------------------------------------------------
(a1) **window-edge credible width**: every draw has its own window, the pass
     interval around the current best set point (:func:`draw_edges`); the
     width of the central ``credible`` interval of its low and of its high
     edge over the draws is the uncertainty of the window edges [pH].
(a2) **undecided width**: ``U = 4 * integral p(pH) (1 - p(pH)) dpH`` [pH],
     the span of set points whose pass/fail is still open (p = 0.5 counts
     fully, p = 0 or 1 not at all).  Its reduction is the expected reduction
     of the variance of the pass indicator near the edges.
(b)  **D-optimal gain** for the parameters that move the outcomes (D_s
     optimality): ``0.5 * log(det S_ss / det S'_ss)`` [nats], the expected
     information gain of a Gaussian posterior (Atkinson, Donev and Tobias,
     "Optimum Experimental Designs, with SAS", Oxford 2007, ch. 10-11;
     Chaloner and Verdinelli, Statist. Sci. 1995, 10, 273, section 2.2).

Methods
-------
``"fisher"`` (the pipeline's default): a local Fisher-information update at
each of some draws (:class:`LocalSensitivity`, central differences made by
the caller): ``S'_i = (I_i + J_ci^T J_ci)^-1`` with ``I_i`` the current runs'
information at draw i; an edge's sd ``sqrt(g_i^T S'_i g_i)`` averaged over the
draws, after against before, scales the edge's credible width (Bayesian
c-optimality, Chaloner and Larntz, J. Statist. Plann. Inference 1989, 21,
191); the D gain is averaged over the draws (Bayesian D-optimality,
Chaloner and Verdinelli 1995, section 2.2).

``"linear"``: a linear-Gaussian (Laplace) update of the posterior
covariance per candidate, ``S' = S - C_gy (C_yy + R)^-1 C_yg``, with the
covariances taken over the draws (the Bayes-linear adjusted variance,
Goldstein and Wooff, "Bayes Linear Statistics", Wiley 2007, ch. 3).  For a
model linear in the parameters this is exactly the Fisher-information update
``(S^-1 + J^T R^-1 J)^-1`` (Woodbury identity); the draws give the
linearisation over the posterior instead of at one point (statistical
linearisation, as in ensemble Kalman methods: Evensen, "Data Assimilation",
Springer 2009, ch. 9).  Credible widths scale with the standard deviation
ratio; the expected pass uncertainty after the run uses a Gaussian margin
(:func:`expected_pass_variance`).

``"preposterior"``: pre-posterior simulation (Chaloner and Verdinelli 1995,
section 1; Ryan et al., Int. Stat. Rev. 2016, 84, 128): simulate the run's data
from draws with the campaign's noise, update the draws by importance
reweighting with the campaign's likelihood (the draw that made the data left
out), and measure the criteria on the reweighted draws; averaged over the
simulated data sets.  Slower to converge, no linearisation; the check.

Batches of k runs are chosen greedily: the best single run, then the run
that adds most given the first, and so on (the joint update of the chosen
runs, never a sum of single gains; greedy choice of a D-optimal batch is
standard, Atkinson et al. 2007, section 11.4, from memory).
"""

from __future__ import annotations

from speciakin.decision.suggest.criteria import (
    CREDIBLE,
    METHODS,
    MIN_GAIN_PH,
    MIN_SD_SHRINKAGE,
    MOVE_CORRELATION,
    DecisionDraws,
    credible_width,
    decision_draws,
    draw_edges,
    expected_pass_variance,
    moving_parameters,
    undecided_width,
)
from speciakin.decision.suggest.rank import rank_candidates
from speciakin.decision.suggest.result import CandidateScore, SuggestResult
from speciakin.decision.suggest.updates import LocalSensitivity

__all__ = ["DecisionDraws", "decision_draws", "draw_edges", "credible_width", "undecided_width",
           "expected_pass_variance", "moving_parameters", "CandidateScore", "SuggestResult",
           "rank_candidates", "LocalSensitivity", "METHODS", "MIN_GAIN_PH", "MIN_SD_SHRINKAGE", "CREDIBLE", "MOVE_CORRELATION"]
