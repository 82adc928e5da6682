"""Estimation layer: generic multistart least squares with honest uncertainty.

Public API
----------
fit_least_squares, profile_likelihood, profile_all, compare_models,
ParameterSpec, FitResult, Profile, ComparisonResult.
"""

from speciakin.estimation.comparison import compare_models
from speciakin.estimation.leastsq import fit_least_squares
from speciakin.estimation.local import FIT_METHODS
from speciakin.estimation.parameters import ParameterSpec
from speciakin.estimation.profile import profile_all, profile_likelihood
from speciakin.estimation.results import ComparisonResult, FitResult, ParameterEstimate, Profile, StartRecord

__all__ = ["fit_least_squares", "profile_likelihood", "profile_all", "compare_models", "ParameterSpec",
           "FitResult", "Profile", "ComparisonResult", "ParameterEstimate", "StartRecord", "FIT_METHODS"]
