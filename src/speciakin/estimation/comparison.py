"""Ranking of models fitted to the same data by AIC and BIC."""

from __future__ import annotations

from typing import Mapping

import numpy as np

from speciakin.errors import InputError, Location
from speciakin.estimation.results import ComparisonResult, FitResult
from speciakin.estimation.statistics import akaike_weights

__all__ = ["compare_models"]


def compare_models(fits: Mapping[str, FitResult]) -> ComparisonResult:
    """Rank fits of competing models by AIC, with Akaike weights (and BIC weights).

    All fits must use the same residuals (same count ``n``); AIC and BIC are
    those stored in each :class:`FitResult` (``n ln(chi2/n) + 2p`` and
    ``n ln(chi2/n) + ln(n) p``).

    References
    ----------
    Burnham, K. P.; Anderson, D. R. Model Selection and Multimodel Inference,
    2nd ed.; Springer, 2002, section 2.9 (Akaike weights).
    """
    if len(fits) < 2:
        raise InputError("at least two fitted models are needed for a comparison", Location(key="models"),
                         len(fits), ">= 2")
    counts = {name: f.n_residuals for name, f in fits.items()}
    if len(set(counts.values())) != 1:
        raise InputError("models were fitted to different numbers of residuals", Location(key="models"),
                         counts, "the same data for every model")
    names = sorted(fits, key=lambda k: fits[k].aic)
    aic = np.array([fits[k].aic for k in names])
    bic = np.array([fits[k].bic for k in names])
    warnings = []
    for k in names:
        if not fits[k].success:
            warnings.append(f"model {k}: the fit did not succeed ({fits[k].message}); its ranking is doubtful")
    n = counts[names[0]]
    for k in names:
        if n / fits[k].n_varying < 40:
            warnings.append(f"model {k}: n/p = {n / fits[k].n_varying:.3g} < 40; the small-sample AICc "
                            "(Burnham & Anderson 2002, eq. 2.2) would penalise parameters more")
            break
    return ComparisonResult(names=names, n_residuals=n, n_parameters=[fits[k].n_varying for k in names],
                            chisqr=[fits[k].chisqr for k in names], aic=aic.tolist(), bic=bic.tolist(),
                            delta_aic=(aic - aic.min()).tolist(), delta_bic=(bic - bic.min()).tolist(),
                            akaike_weights=akaike_weights(aic).tolist(), bic_weights=akaike_weights(bic).tolist(),
                            warnings=warnings)
