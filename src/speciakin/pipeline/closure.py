"""Area% samples closed to 100 %: weighed with the joint covariance of a composition.

The campaign objective compares each sample's area% with the model's area%
over the same compounds.  When the lab reports every peak of a sample as
area% (the software divides each area by the sum), the values sum to 100 and
their errors are not independent: with each peak's error e_i ~ N(0, d_i^2)
before closing (d_i the error model's sd of the value) and fractions
c_i = y_i / 100, the closed errors are, to first order,

    e' = P e,   P = I - c 1^T,   Cov(e') = Sigma = P D^2 P^T   (D = diag d),

a covariance of rank K - 1 whose null vector is 1 (a composition of K parts
has K - 1 degrees of freedom: Aitchison, J., "The Statistical Analysis of
Compositional Data", Chapman and Hall 1986, ch. 2 and 5).  The model's area%
of the sample also sum to 100, so the residual r = model - observed lies in
that space (up to the values' rounding, which the null vector takes).  A
sample with values below the LOQ is a closed sub-composition of its
quantified values: both sides are closed to the observed sum over them, and
the values below the LOQ keep their one-sided residuals.

Weighing each value by 1 / d_i as if independent is not the likelihood of
such data: its chi-square is expected at tr(D^-2 Sigma), neither K nor K - 1
in general, and the least-squares
covariance (J^T J)^-1 understates the scatter of the estimates (the sandwich
A J^T C J A with the closed covariance C exceeds A by a rank-one term in the
direction J^T W c; on the invented example 10 % in the standard errors of an
HPLC-only fit).  So the objective whitens each closed sample: with Sigma =
U diag(lambda) U^T, the K - 1 residuals diag(lambda)^(-1/2) U^T r (over the
eigenvalues that are not zero) replace the sample's K weighted residuals, and
the K-th residual is 0 whatever the parameters.  Their chi-square is
r^T Sigma^+ r, expected K - 1 (the generalised least-squares weighting,
Seber, G. A. F. and Wild, C. J., "Nonlinear Regression", Wiley 1989, ch. 2,
from memory), and the zero residual is left out of the degrees of freedom
like any residual that carries nothing (``estimation.leastsq``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["REPORTING_STEPS", "SUM_FLOOR", "reporting_step", "closed_samples", "closure_whitening",
           "closed_covariance", "whitening_matrix", "whitened_candidates", "ClosedSamples"]

#: Decimal steps [area%] a reported value may be rounded to, coarsest first.
REPORTING_STEPS = (1.0, 0.1, 0.01, 0.001, 0.0001)
#: Smallest allowance for |sum - 100| [area%] (values not rounded at all, or areas turned into area%).
SUM_FLOOR = 1e-7


def reporting_step(values: np.ndarray) -> np.ndarray:
    """The coarsest of :data:`REPORTING_STEPS` each value is a multiple of (0 when none)."""
    step = np.zeros(values.shape)
    for d in REPORTING_STEPS[::-1]:
        q = values / d
        step = np.where(np.abs(q - np.round(q)) <= 1e-6, d, step)
    return step


def closed_samples(sample: np.ndarray, n_samples: int, observed: np.ndarray, area: np.ndarray,
                   censored: np.ndarray, sigma: np.ndarray, loq: np.ndarray | None = None,
                   others: tuple[np.ndarray, ...] | None = None) -> np.ndarray:
    """Which HPLC samples are closed to 100 % (bool per sample).

    A sample counts when every value of it is an area% (peak areas are turned
    into area% per sample before this), at least two are quantified (not below
    the LOQ) with a positive sd, and the quantified values sum to 100 within
    what their rounding allows: half the sample's reporting step per value (the
    finest of :func:`reporting_step` over its values; values given to two
    decimals: 0.005 each), at least :data:`SUM_FLOOR`, and less by at most the
    LOQ of each value reported below it.  So area% reported as the lab's
    software closes them count, and values that only happen to sum to about 100
    do not.  A sample with values below the LOQ counts only when the campaign
    has complete samples (none below the LOQ) and every one of them is closed:
    its window of LOQs is wide enough for independent values to fall in by
    chance.  It is weighed as the closed sub-composition of its quantified
    values (:func:`closure_whitening`).

    ``others`` (sample, observed, censored, loq): the area% of peaks that are
    not modelled.  They count in their sample's sum, its reporting step and
    its window of LOQs like the other values, and are not part of the closed
    composition (the modelled values are its closed sub-composition).
    """
    if sample.size == 0:
        return np.zeros(n_samples, bool)
    if loq is None:
        loq = np.full(sample.size, np.nan)
    bad = ~area | (~censored & ~(sigma > 0.0)) | (~censored & ~np.isfinite(observed)) | (censored & ~(loq >= 0.0))
    n_bad = np.bincount(sample, weights=bad.astype(float), minlength=n_samples)
    # the modelled values need two quantified ones; the sums below take the peaks not modelled too
    n_modelled = np.bincount(sample, weights=(~censored).astype(float), minlength=n_samples)
    if others is not None and others[0].size:
        o_sample, o_obs, o_cens, o_loq = others
        n_bad += np.bincount(o_sample, weights=((~o_cens & ~np.isfinite(o_obs)) | (o_cens & ~(o_loq >= 0.0)))
                             .astype(float), minlength=n_samples)
        sample, observed = np.concatenate([sample, o_sample]), np.concatenate([observed, o_obs])
        censored, loq = np.concatenate([censored, o_cens]), np.concatenate([loq, o_loq])
    quantified = ~censored
    n = np.bincount(sample, weights=quantified.astype(float), minlength=n_samples)
    y = np.where(quantified & np.isfinite(observed), observed, 0.0)
    total = np.bincount(sample, weights=y, minlength=n_samples)
    below = np.bincount(sample, weights=np.where(censored & (loq >= 0.0), loq, 0.0), minlength=n_samples)
    step = np.full(n_samples, np.inf)
    finite = quantified & np.isfinite(observed)
    np.minimum.at(step, sample[finite], reporting_step(observed[finite]))
    n_censored = np.bincount(sample, weights=censored.astype(float), minlength=n_samples)
    with np.errstate(invalid="ignore"):
        allowed = np.maximum(0.5 * step * n, SUM_FLOOR)
        usable = (n_modelled >= 2) & (n_bad == 0)
        full = usable & (n_censored == 0)
        closed = full & (np.abs(total - 100.0) <= allowed)
        # values below the LOQ leave a window of their LOQs in which any sum could fall by chance: such a
        # sample counts only where the lab is seen to close its area% (every complete sample closed)
        if full.any() and np.all(closed[full]):
            closed |= usable & (n_censored > 0) & (total <= 100.0 + allowed) & (total >= 100.0 - below - allowed)
        return closed


def closed_covariance(observed: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """Sigma = P D^2 P^T of one closed sample (K, K): the covariance of its values' errors."""
    c = observed / np.sum(observed)
    p = np.eye(c.size) - np.outer(c, np.ones(c.size))
    return (p * sigma ** 2) @ p.T


def closure_whitening(sample: np.ndarray, closed: np.ndarray, observed: np.ndarray, sigma: np.ndarray,
                      censored: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The quantified values of the closed samples and the matrix that whitens their residuals.

    Returns ``rows`` (m,), the indices of the quantified values of closed
    samples, sample by sample; ``block`` (m,), the closed sample's number
    (0, 1, ...) of each row; and ``matrix`` (m, m), block diagonal: for a
    sample of K quantified values the first K - 1 rows of its block are
    diag(lambda)^(-1/2) U^T of :func:`closed_covariance` (eigenvalues not zero),
    the last row is zero.  The residual of a closed sample is taken over its
    quantified values closed to the observed sum S_obs (the values below the
    LOQ aside): ``model * S_obs / S_model - observed``, whitened by ``matrix``.
    """
    quantified = np.ones(sample.size, bool) if censored is None else ~censored
    blocks = [np.flatnonzero((sample == s) & quantified) for s in np.flatnonzero(closed)]
    if not blocks:
        return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros((0, 0))
    rows = np.concatenate(blocks).astype(np.int64)
    block = np.repeat(np.arange(len(blocks)), [b.size for b in blocks]).astype(np.int64)
    matrix = np.zeros((rows.size, rows.size))
    at = 0
    for idx in blocks:
        matrix[at:at + idx.size, at:at + idx.size] = whitening_matrix(observed[idx], sigma[idx])
        at += idx.size
    return rows, block, matrix


def whitening_matrix(values: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """(K, K) for one closed sample of area% ``values`` with sds ``sigma``: its first K - 1 rows are
    diag(lambda)^(-1/2) U^T of :func:`closed_covariance` (the eigenvalues that are not zero), the last
    row is zero."""
    k = values.size
    out = np.zeros((k, k))
    lam, u = np.linalg.eigh(closed_covariance(values, sigma))
    # eigh sorts ascending: the first eigenvalue is the null direction (the vector of ones)
    out[:k - 1] = (u[:, 1:] / np.sqrt(lam[1:])).T
    return out


@dataclass(frozen=True)
class ClosedSamples:
    """The closed samples of a campaign's HPLC values and the whitening of their residuals."""

    #: number of closed samples
    count: int
    #: quantified values of the closed samples, each row's closed sample (0, 1, ...), the whitening
    #: matrix (:func:`closure_whitening`) and each closed sample's observed sum
    rows: np.ndarray
    block: np.ndarray
    matrix: np.ndarray
    observed_sum: np.ndarray

    @classmethod
    def of(cls, sample: np.ndarray, n_samples: int, observed: np.ndarray, area: np.ndarray, censored: np.ndarray,
           sigma: np.ndarray, loq: np.ndarray, others: tuple[np.ndarray, ...] | None = None) -> "ClosedSamples":
        closed = closed_samples(sample, n_samples, observed, area, censored, sigma, loq, others)
        rows, block, matrix = closure_whitening(sample, closed, observed, sigma, censored)
        count = int(np.count_nonzero(closed))
        return cls(count, rows, block, matrix, np.bincount(block, weights=observed[rows], minlength=count))

    def whiten(self, residual: np.ndarray, model: np.ndarray, observed: np.ndarray) -> np.ndarray:
        """``residual`` (n_sets, n_hplc) with the rows of closed samples replaced (in place) by their
        whitened residuals: ``matrix @ (model * S_obs / S_model - observed)`` over each sample's
        quantified values; ``model`` (n_sets, n_hplc) the model's area%."""
        if not self.rows.size:
            return residual
        m = model[:, self.rows]
        n_sets = m.shape[0]
        bins = (np.arange(n_sets)[:, None] * self.count + self.block[None, :]).ravel()
        total = np.bincount(bins, weights=m.ravel(), minlength=n_sets * self.count).reshape(n_sets, self.count)
        with np.errstate(invalid="ignore", divide="ignore"):
            closed = m * (self.observed_sum / total)[:, self.block]
        residual[:, self.rows] = (closed - observed[self.rows]) @ self.matrix.T
        return residual


def whitened_candidates(values: np.ndarray, n_hplc: int, k: int, sd_of_hplc) -> np.ndarray:
    """A candidate run's predicted observations in the whitened coordinates of closed samples.

    ``values`` (n_draws, m): the area% of ``k`` compounds per sample for the
    first ``n_hplc`` columns (sample by sample), then other observations
    (titrant readings), kept as they are.  Each sample's k area% become the
    k - 1 coordinates ``W[:k-1] @ y`` of :func:`whitening_matrix`, built at the
    sample's mean prediction over the draws (a part below 0 by the integrator's
    error taken as 0) with the sds ``sd_of_hplc(mean)``:
    their noise is independent with unit sd to first order, so a ranking that
    treats observations as independent (the suggestion's linear and
    pre-posterior methods) weighs a closed sample as the fit does.  A sample
    without a finite mean or a positive sd is divided by its sd value by value
    (NaN values, which the ranking leaves out with their draws, stay NaN).
    """
    n_samples = n_hplc // k
    blocks = []
    for s in range(n_samples):
        y = values[:, s * k:(s + 1) * k]
        finite = np.all(np.isfinite(y), axis=1)
        mean = np.maximum(y[finite].mean(axis=0), 0.0) if finite.any() else np.full(k, np.nan)
        sd = sd_of_hplc(mean)
        if k >= 2 and np.all(np.isfinite(mean)) and mean.sum() > 0.0 and np.all(sd > 0.0):
            blocks.append(y @ whitening_matrix(mean, sd)[:k - 1].T)
        else:
            blocks.append(y / sd)
    return np.concatenate(blocks + [values[:, n_hplc:]], axis=1)
