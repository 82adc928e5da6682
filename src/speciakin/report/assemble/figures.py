"""The figures of a least-squares fit as PNG bytes, by name, for a figures folder.

The same figures as in the report (one :class:`SpeciesColors` from the
model's molecule order): per-run time courses with the fitted curves, the
titrant of held-pH runs, the weighted residuals, the profile likelihoods and
the correlation matrix.
"""

from __future__ import annotations

import re
from typing import Any

from speciakin.report.document import Figure

__all__ = ["fit_figure_set"]


def fit_figure_set(objective: Any, fit: Any, posterior: Any = None, predictive_draws: int = 150,
                   seed: int = 0) -> dict[str, bytes]:
    """PNG bytes of the fit's figures.

    Parameters
    ----------
    objective
        :class:`speciakin.pipeline.objective.CampaignObjective`.
    fit
        :class:`speciakin.pipeline.fit.CampaignFitResult` (or None: data only).
    posterior
        Optional posterior for the 5-95 % predictive bands.

    Returns
    -------
    dict
        ``run_<run>``, ``titrant_<run>`` (held-pH runs), ``residuals``,
        ``profiles`` (when computed) and ``correlation`` (when available) ->
        PNG bytes; characters other than letters, digits, ``_``, ``-`` and
        ``.`` in a run name become ``_`` so that the names serve as file names.
    """
    from speciakin.report.assemble import species_colors
    from speciakin.report.assemble.parameters import correlation_section
    from speciakin.report.assemble.posterior import profile_blocks
    from speciakin.report.assemble.runs import runs_section

    named: dict[str, Figure] = {}
    runs_section(objective, fit, posterior, species_colors(objective.model), predictive_draws, seed,
                 figure_names=named)
    out = {re.sub(r"[^A-Za-z0-9_.-]+", "_", name): figure.image_bytes() for name, figure in named.items()}
    for block in profile_blocks(fit):
        if isinstance(block, Figure):
            out["profiles"] = block.image_bytes()
    for block in correlation_section(fit, None, []).blocks:
        if isinstance(block, Figure):
            out["correlation"] = block.image_bytes()
    return out
