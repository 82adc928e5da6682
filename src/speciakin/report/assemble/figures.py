"""The figures of a least-squares fit as PNG bytes, by name, for a figures folder.

The same figures as in the report (one :class:`SpeciesColors` from the
model's molecule order): per-run time courses with the fitted curves, the
titrant of held-pH runs, the weighted residuals, the profile likelihoods and
the correlation matrix.
"""

from __future__ import annotations

from typing import Any

from speciakin.pipeline.outputs import safe_stems
from speciakin.report.document import Figure

__all__ = ["fit_figure_set"]


def fit_figure_set(model: Any, predictions: Any, fit: Any) -> dict[str, bytes]:
    """PNG bytes of the fit's figures.

    Parameters
    ----------
    model
        :class:`speciakin.chemistry.model.Model` (species colours).
    predictions
        :class:`speciakin.pipeline.predictions.PredictionSet` (curves, with
        the 5-95 % predictive bands when it holds them).
    fit
        :class:`speciakin.pipeline.fit.CampaignFitResult` (or None: data only).

    Returns
    -------
    dict
        ``run_<run>``, ``titrant_<run>`` (held-pH runs), ``residuals``,
        ``profiles`` (when computed) and ``correlation`` (when available) ->
        PNG bytes; the names are safe, distinct file stems
        (:func:`speciakin.pipeline.outputs.safe_stems`).
    """
    from speciakin.report.assemble.build import display_names, species_colors
    from speciakin.report.assemble.parameters import correlation_section
    from speciakin.report.assemble.posterior import profile_blocks
    from speciakin.report.assemble.runs import runs_section

    named: dict[str, Figure] = {}
    runs_section(predictions, fit, None, species_colors(model), names=display_names(model), figure_names=named)
    stems = safe_stems(named)
    out = {stems[name]: figure.image_bytes() for name, figure in named.items()}
    for block in profile_blocks(fit):
        if isinstance(block, Figure):
            out["profiles"] = block.image_bytes()
    for block in correlation_section(fit, None, []).blocks:
        if isinstance(block, Figure):
            out["correlation"] = block.image_bytes()
    return out
