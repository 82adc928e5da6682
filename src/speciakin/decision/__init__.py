"""Decision layer: the planned process, its specifications, and the pH window
(and 2-D design space) where every specification is met with a chosen
probability.

Modules
-------
process   the process file (TOML) and its dataclasses
runs      held-pH Run objects of the planned process, for the simulator
specs     outcome-kind and operator registries, specification evaluation
outcomes  mole % of the substrate moiety, bands over draws
window    pure functions: probability curve, window edges, robust window
draws     multivariate-normal draws from a least-squares covariance
design    compute_window: draws -> outcomes -> WindowResult
result    the WindowResult dataclass
plots     matplotlib figures of a WindowResult
"""

from speciakin.decision.design import compute_window, process_scan_arguments
from speciakin.decision.draws import (
    COVARIANCE_SOURCE,
    POSTERIOR_SOURCE,
    CovarianceDraws,
    draws_from_covariance,
)
from speciakin.decision.outcomes import moiety_counts, moiety_percent, outcome_bands
from speciakin.decision.process import (
    FACTOR_KINDS,
    ProcessPlan,
    SecondFactor,
    load_process,
    parse_process,
    process_to_toml,
    validate_process,
)
from speciakin.decision.result import REPORT_HEADINGS, WindowResult
from speciakin.decision.runs import process_runs
from speciakin.decision.specs import (
    OPERATORS,
    OUTCOME_KINDS,
    Specification,
    evaluate_each_spec,
    evaluate_specs,
)
from speciakin.decision.window import (
    binomial_standard_error,
    per_draw_robust_probability,
    probability_curve,
    robust_window,
    window_edges,
    worst_case_probability,
)

__all__ = [
    "COVARIANCE_SOURCE", "POSTERIOR_SOURCE", "CovarianceDraws", "draws_from_covariance",
    "compute_window", "process_scan_arguments", "moiety_counts", "moiety_percent", "outcome_bands",
    "FACTOR_KINDS", "ProcessPlan", "SecondFactor", "load_process", "parse_process",
    "process_to_toml", "validate_process", "REPORT_HEADINGS", "WindowResult", "process_runs",
    "OPERATORS", "OUTCOME_KINDS", "Specification", "evaluate_each_spec", "evaluate_specs",
    "binomial_standard_error", "per_draw_robust_probability", "probability_curve",
    "robust_window", "window_edges", "worst_case_probability",
]
