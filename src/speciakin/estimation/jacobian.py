"""Jacobian of a residual vector: central differences, complex step, user supplied.

All functions take ``residual(values) -> array`` where ``values`` is the full
parameter vector, and return the ``(n_residuals, n_columns)`` Jacobian for the
columns listed in ``columns`` (indices into ``values``).
"""

from __future__ import annotations

import inspect
from types import MappingProxyType
from typing import Callable

import numpy as np

from speciakin.errors import InputError, Location, SolverError

__all__ = [
    "central_difference_jacobian",
    "complex_step_jacobian",
    "user_jacobian",
    "takes_columns",
    "JACOBIAN_METHODS",
    "evaluate_jacobian",
]

EPS = np.finfo(float).eps


def _step(x: float, typical: float, power: float) -> float:
    """Step for a finite difference, exactly representable relative to ``x``."""
    scale = abs(x) if x != 0.0 else typical
    h = EPS ** power * scale
    return (x + h) - x


def _evaluate(residual: Callable, values: np.ndarray) -> np.ndarray:
    with np.errstate(all="ignore"):
        return np.asarray(residual(values), dtype=float)


def _derivative(residual: Callable, values: np.ndarray, i: int, h: float, f0: np.ndarray) -> np.ndarray:
    """Central difference of column ``i`` with step ``h``; one-sided (3-point) where a side is not finite."""
    xp = values.copy()
    xm = values.copy()
    xp[i] += h
    xm[i] -= h
    fp = _evaluate(residual, xp)
    fm = _evaluate(residual, xm)
    if np.all(np.isfinite(fp)) and np.all(np.isfinite(fm)):
        return (fp - fm) / (2.0 * h)
    # second-order one-sided differences on the finite side
    sign = 1.0 if np.all(np.isfinite(fp)) else -1.0
    near = fp if sign > 0 else fm
    x2 = values.copy()
    x2[i] += 2.0 * sign * h
    far = _evaluate(residual, x2)
    if not (np.all(np.isfinite(near)) and np.all(np.isfinite(far))):
        raise SolverError(f"residuals are not finite near parameter {i} = {values[i]!r}; "
                          "the Jacobian cannot be computed")
    return sign * (-3.0 * f0 + 4.0 * near - far) / (2.0 * h)


def central_difference_jacobian(residual: Callable, values: np.ndarray, columns: np.ndarray | None = None,
                                *, typical: np.ndarray | None = None, richardson: bool = True,
                                f0: np.ndarray | None = None) -> np.ndarray:
    """Jacobian by central differences with per-parameter steps.

    The step is ``h_i = eps^(1/3) * |x_i|`` (``typical_i`` replaces ``|x_i|`` when
    ``x_i = 0``; default 1), which balances truncation error O(h^2) against
    rounding error O(eps/h).  With ``richardson=True`` the step is
    ``eps^(1/5) * |x_i|`` and the estimates at ``h`` and ``h/2`` are combined as
    ``(4 D(h/2) - D(h)) / 3``, which cancels the h^2 term (error O(h^4)).
    Where the residual is not finite on one side, a second-order one-sided
    formula on the other side is used.

    Parameters
    ----------
    residual
        ``residual(values) -> ndarray`` of shape (n,).
    values
        Full parameter vector at which to differentiate.
    columns
        Indices of the parameters to differentiate (default: all).
    typical
        Typical magnitude of each parameter, used when a value is zero.
    richardson
        Apply one Richardson extrapolation step (twice the evaluations).
    f0
        Residual at ``values`` if already known.

    Returns
    -------
    ndarray, shape (n, len(columns))

    References
    ----------
    Nocedal, J.; Wright, S. J. Numerical Optimization, 2nd ed.; Springer, 2006,
    section 8.1 (step choice for central differences).
    Richardson, L. F. Philos. Trans. R. Soc. A 1911, 210, 307-357
    (extrapolation); see also Press et al., Numerical Recipes, 3rd ed., 2007, section 5.7.
    """
    values = np.asarray(values, dtype=float)
    columns = np.arange(values.size) if columns is None else np.asarray(columns, dtype=int)
    typical = np.ones(values.size) if typical is None else np.asarray(typical, dtype=float)
    if f0 is None:
        f0 = _evaluate(residual, values)
    jac = np.empty((f0.size, columns.size))
    for k, i in enumerate(columns):
        if richardson:
            h = _step(values[i], typical[i], 0.2)
            d1 = _derivative(residual, values, i, h, f0)
            d2 = _derivative(residual, values, i, h / 2.0, f0)
            jac[:, k] = (4.0 * d2 - d1) / 3.0
        else:
            jac[:, k] = _derivative(residual, values, i, _step(values[i], typical[i], 1.0 / 3.0), f0)
    return jac


def complex_step_jacobian(residual: Callable, values: np.ndarray, columns: np.ndarray | None = None,
                          **_: object) -> np.ndarray:
    """Jacobian by the complex-step method, exact to rounding.

    ``J[:, i] = Im(r(x + i h e_i)) / h`` with ``h = 1e-20 * max(|x_i|, 1)``.
    The residual function must accept a complex parameter vector and use only
    analytic operations (no ``abs``, no comparisons on the value).

    Returns
    -------
    ndarray, shape (n, len(columns))

    Raises
    ------
    InputError
        If the residual function drops the imaginary part.

    References
    ----------
    Squire, W.; Trapp, G. SIAM Review 1998, 40, 110-112.
    Martins, J. R. R. A.; Sturdza, P.; Alonso, J. J. ACM Trans. Math. Softw. 2003, 29, 245-262.
    """
    values = np.asarray(values, dtype=float)
    columns = np.arange(values.size) if columns is None else np.asarray(columns, dtype=int)
    cols = []
    for i in columns:
        h = 1e-20 * max(abs(values[i]), 1.0)
        x = values.astype(complex)
        x[i] += 1j * h
        with np.errstate(all="ignore"):
            f = np.asarray(residual(x))
        if not np.iscomplexobj(f):
            raise InputError("the residual function does not keep complex input complex",
                             Location(key="jacobian"), "complex", "'central' or a residual written with numpy "
                             "operations that accept complex numbers")
        col = f.imag / h
        if not np.all(np.isfinite(col)):
            raise SolverError(f"complex-step derivative is not finite for parameter {i} = {values[i]!r}")
        cols.append(col)
    return np.column_stack(cols)


def takes_columns(function: Callable) -> bool:
    """True when a user Jacobian accepts a ``columns`` keyword (and then returns only those columns)."""
    try:
        return "columns" in inspect.signature(function).parameters
    except (TypeError, ValueError):  # no signature to read
        return False


def user_jacobian(function: Callable, values: np.ndarray, columns: np.ndarray | None = None,
                  n_residuals: int | None = None) -> np.ndarray:
    """Call a user Jacobian and keep ``columns``.

    ``function(values) -> (n, n_parameters)``; a function with a ``columns``
    keyword is called as ``function(values, columns=columns) -> (n,
    len(columns))`` and computes only the columns needed (e.g. a profile,
    where one parameter is fixed).
    """
    values = np.asarray(values, dtype=float)
    columns = np.arange(values.size) if columns is None else np.asarray(columns, dtype=int)
    selective = takes_columns(function)
    with np.errstate(all="ignore"):
        jac = np.asarray(function(values, columns=columns) if selective else function(values), dtype=float)
    width = columns.size if selective else values.size
    if jac.ndim != 2 or jac.shape[1] != width or (n_residuals is not None and jac.shape[0] != n_residuals):
        raise InputError("the Jacobian function returned an array of the wrong shape", Location(key="jacobian"),
                         jac.shape, f"({n_residuals}, {width}): one row per residual, " + (
                             "one column per requested column" if selective
                             else "one column per parameter (fixed ones included)"))
    if not np.all(np.isfinite(jac)):
        raise SolverError("the Jacobian function returned NaN or infinite values")
    # column-major either way (what selecting columns of a row-major array gives): the solvers' linear
    # algebra rounds differently on another memory layout, and a fit must not depend on the Jacobian's kind
    return np.asfortranarray(jac) if selective else jac[:, columns]


#: Registry of named Jacobian methods (a callable is accepted in their place).
JACOBIAN_METHODS: MappingProxyType = MappingProxyType({
    "central": central_difference_jacobian,
    "complex": complex_step_jacobian,
})


def evaluate_jacobian(jacobian: str | Callable | None, residual: Callable, values: np.ndarray,
                      columns: np.ndarray, *, richardson: bool = True,
                      f0: np.ndarray | None = None) -> np.ndarray:
    """Dispatch to a named method (``None`` means ``"central"``) or a user callable."""
    if jacobian is None:
        jacobian = "central"
    if callable(jacobian):
        n = None if f0 is None else f0.size
        return user_jacobian(jacobian, values, columns, n)
    if jacobian not in JACOBIAN_METHODS:
        raise InputError("unknown Jacobian method", Location(key="jacobian"), jacobian,
                         "one of " + ", ".join(JACOBIAN_METHODS) + ", None or a callable")
    if jacobian == "central":
        return central_difference_jacobian(residual, values, columns, richardson=richardson, f0=f0)
    return JACOBIAN_METHODS[jacobian](residual, values, columns)
