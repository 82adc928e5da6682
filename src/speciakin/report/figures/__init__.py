"""Plot helpers returning PNG bytes, readable in print (A4 text width, 170 dpi).

Every helper takes plain arrays and mappings, never project result objects,
so each can be tested alone and called from any layer that has numbers.
Species keep their colour across figures through a shared
:class:`speciakin.palette.SpeciesColors`.
"""

from speciakin.report.figures.decision import (
    outcomes_vs_ph_figure,
    probability_map_figure,
    probability_vs_ph_figure,
)
from speciakin.report.figures.inference import (
    PROFILE_THRESHOLD_95,
    corner_figure,
    correlation_figure,
    profile_figure,
    trace_figure,
)
from speciakin.report.figures.timecourse import residuals_figure, time_course_figure, titrant_figure

__all__ = [
    "time_course_figure",
    "residuals_figure",
    "titrant_figure",
    "probability_vs_ph_figure",
    "outcomes_vs_ph_figure",
    "probability_map_figure",
    "profile_figure",
    "trace_figure",
    "corner_figure",
    "correlation_figure",
    "PROFILE_THRESHOLD_95",
]
