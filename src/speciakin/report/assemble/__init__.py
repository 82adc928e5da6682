"""Assemble the tech-transfer report from results and predictions.

:func:`build_report` (module ``build``) orders the sections; each other
module makes one part: ``inputs`` (input files, the model), ``parameters``
(tables and correlations), ``runs`` (data, fitted curves, residuals),
``posterior`` (convergence and profiles), ``decision`` (summary and pH
window), ``figures`` (the figures folder of a fit).
"""

from speciakin.report.assemble.build import (
    NOT_RUN,
    REPORT_SECTION_TITLES,
    ReportInputs,
    build_report,
    species_colors,
)

__all__ = ["ReportInputs", "build_report", "REPORT_SECTION_TITLES", "NOT_RUN", "species_colors"]
