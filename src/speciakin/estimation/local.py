"""One local optimisation through lmfit, with evaluation counting (shared by fits and profiles)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from types import MappingProxyType
from typing import Any, Callable

import lmfit
import numpy as np

from speciakin.errors import InputError, Location, SolverError
from speciakin.estimation.jacobian import evaluate_jacobian
from speciakin.estimation.parameters import ParameterSpec, to_lmfit_parameters
from speciakin.estimation.statistics import chi_square

__all__ = ["FIT_METHODS", "LocalFit", "CountedResidual", "local_fit"]

#: lmfit methods the layer drives, with the tolerance keywords each accepts.
FIT_METHODS = MappingProxyType({
    "least_squares": ("ftol", "xtol", "gtol"),
    "leastsq": ("ftol", "xtol", "gtol"),
})



@dataclass
class LocalFit:
    """Outcome of one local optimisation (internal to the layer and profiles)."""

    values: np.ndarray
    chisqr: float
    residual: np.ndarray | None
    converged: bool
    message: str
    n_evaluations: int


class CountedResidual:
    """Residual wrapper counting evaluations and checking the output shape."""

    def __init__(self, residual: Callable, n_residuals: int | None = None) -> None:
        self.residual = residual
        self.count = 0
        self.n_residuals = n_residuals

    def __call__(self, values: np.ndarray) -> np.ndarray:
        self.count += 1
        with np.errstate(all="ignore"):
            out = self.residual(values)
        out = np.asarray(out)
        if out.ndim != 1 or (self.n_residuals is not None and out.size != self.n_residuals):
            raise InputError("the residual function must return a 1-D array of fixed length",
                             Location(key="residual"), out.shape,
                             f"shape ({self.n_residuals},)" if self.n_residuals else "a 1-D array")
        return out


def _lmfit_jacobian(jacobian: str | Callable | None, residual: CountedResidual, specs, vary_mask):
    """Jacobian callback in lmfit's convention (params -> (n, n_vary)), or None for lmfit's own."""
    if jacobian is None or jacobian == "central":
        return None
    columns = np.flatnonzero(vary_mask)
    names = [s.name for s in specs]

    def dfun(params: lmfit.Parameters, *args: Any) -> np.ndarray:
        x = np.array([params[n].value for n in names], dtype=float)
        return evaluate_jacobian(jacobian, residual, x, columns)
    return dfun


def local_fit(residual: CountedResidual, specs: list[ParameterSpec], start: np.ndarray, vary_mask: np.ndarray, *,
              method: str, jacobian: str | Callable | None, tolerance: float,
              max_evaluations: int | None) -> LocalFit:
    """One local lmfit optimisation from the full vector ``start``; never raises for numerical failure."""
    names = [s.name for s in specs]
    params = to_lmfit_parameters(specs, start, vary_mask)
    before = residual.count

    def objective(p: lmfit.Parameters) -> np.ndarray:
        x = np.array([p[n].value for n in names], dtype=float)
        return np.asarray(residual(x), dtype=float)

    kws: dict[str, Any] = {key: tolerance for key in FIT_METHODS[method]}
    dfun = _lmfit_jacobian(jacobian, residual, specs, vary_mask)
    if dfun is not None:
        kws["Dfun"] = dfun
    if method == "least_squares":
        kws["x_scale"] = "jac"
    minimizer = lmfit.Minimizer(objective, params, nan_policy="propagate", max_nfev=max_evaluations)
    try:
        with np.errstate(all="ignore"):
            out = minimizer.minimize(method=method, **kws)
    except (ValueError, ArithmeticError, SolverError, np.linalg.LinAlgError) as exc:
        return LocalFit(start.copy(), math.nan, None, False, f"failed: {exc}", residual.count - before)
    x = np.array([out.params[n].value for n in names], dtype=float)
    r = residual(x)
    finite = bool(np.all(np.isfinite(r))) and bool(np.all(np.isfinite(x)))
    chisqr = chi_square(r) if finite else math.nan
    message = str(getattr(out, "message", "") or getattr(out, "lmdif_message", ""))
    if not finite:
        return LocalFit(x, chisqr, None, False, "residuals not finite at the end point", residual.count - before)
    if not out.success:
        return LocalFit(x, chisqr, r, False, f"not converged: {message}", residual.count - before)
    return LocalFit(x, chisqr, r, True, message, residual.count - before)


