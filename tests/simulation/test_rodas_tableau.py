"""Orders of the Rosenbrock tableaus, measured against closed-form solutions.

One step of the transformed Rosenbrock scheme (Hairer and Wanner, "Solving
Ordinary Differential Equations II", 2nd ed., Springer 1996, section IV.7,
eq. 7.25) is written out here in numpy from the tableau arrays, on a small
non-linear, non-autonomous system whose solution is known in closed form:

    y1' = -2 y1^2          y1 = y1_0 / (1 + 2 y1_0 t)
    y2' = y1 y2            y2 = y2_0 sqrt(1 + 2 y1_0 t)
    y3' = -y3 + t          y3 = t - 1 + (y3_0 + 1) e^-t
    y4' = y4 cos(t)        y4 = y4_0 e^(sin t)

Halving h must divide the local error of a method of order p by about
2^(p+1), that of the embedded estimate (the last k) by 2^q (q = the error
order), and that of the continuous extension of order r by 2^(r+1).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from speciakin.simulation import rodas_tableau as rt

Y0 = np.array([0.8, 1.3, 0.4, 0.2])


def f(t, y):
    return np.array([-2.0 * y[0] ** 2, y[0] * y[1], -y[2] + t, y[3] * math.cos(t)])


def jac(t, y):
    return np.array([[-4.0 * y[0], 0.0, 0.0, 0.0],
                     [y[1], y[0], 0.0, 0.0],
                     [0.0, 0.0, -1.0, 0.0],
                     [0.0, 0.0, 0.0, math.cos(t)]])


def f_t(t, y):
    return np.array([0.0, 0.0, 1.0, -y[3] * math.sin(t)])


def exact(t):
    s = 1.0 + 2.0 * Y0[0] * t
    return np.array([Y0[0] / s, Y0[1] * math.sqrt(s), t - 1.0 + (Y0[2] + 1.0) * math.exp(-t),
                     Y0[3] * math.exp(math.sin(t))])


def one_step(tab, h):
    """(new solution, stage k's) of one step from t = 0."""
    n = Y0.size
    w = np.eye(n) / (h * tab["gamma"]) - jac(0.0, Y0)
    k = np.zeros((tab["stages"], n))
    ft = f_t(0.0, Y0)
    for st in range(tab["stages"]):
        base = st * (st - 1) // 2
        point = Y0 + sum(tab["a"][base + j] * k[j] for j in range(st))
        rhs = f(tab["alpha"][st] * h, point) + sum(tab["c"][base + j] / h * k[j] for j in range(st))
        rhs = rhs + h * tab["gammas"][st] * ft
        k[st] = np.linalg.solve(w, rhs)
    return Y0 + tab["m"] @ k, k


def dense_at(tab, y1, k, theta):
    d = tab["dense"] @ k
    p = d[-1]
    for r in range(d.shape[0] - 2, -1, -1):
        p = d[r] + theta * p
    return (1.0 - theta) * Y0 + theta * (y1 + (1.0 - theta) * p)


def observed_orders(errors):
    return [math.log2(errors[i] / errors[i + 1]) for i in range(len(errors) - 1)]


# (method, order p, error order q, order of the continuous extension)
METHODS = [(rt.RODAS4, 4, 4, 3), (rt.RODAS5, 5, 5, 4)]


@pytest.mark.parametrize("method, order, error_order, dense_order", METHODS, ids=["rodas4", "rodas5"])
def test_local_error_estimate_and_dense_output_have_the_stated_orders(method, order, error_order, dense_order):
    tab = rt.tableau(method)
    assert tab["error_order"] == error_order
    steps = [0.2 / 2 ** i for i in range(5)]
    end_errors, estimates, dense_errors = [], [], []
    for h in steps:
        y1, k = one_step(tab, h)
        end_errors.append(np.max(np.abs(y1 - exact(h))))
        estimates.append(np.max(np.abs(k[-1])))
        dense_errors.append(max(np.max(np.abs(dense_at(tab, y1, k, th) - exact(th * h))) for th in (0.3, 0.7)))
    # the asymptotic ratios are reached from above or below; half an order of slack on the last halving
    assert observed_orders(end_errors)[-1] > order + 1 - 0.5
    assert observed_orders(estimates)[-1] > error_order - 0.5
    assert observed_orders(dense_errors)[-1] > dense_order + 1 - 0.5
    # the continuous extension meets both ends of the step
    np.testing.assert_allclose(dense_at(tab, y1, k, 0.0), Y0, rtol=0, atol=1e-15)
    np.testing.assert_allclose(dense_at(tab, y1, k, 1.0), y1, rtol=0, atol=1e-15)


def test_a_tableau_that_is_not_stiffly_accurate_is_refused():
    broken = dict(rt.RODAS4, a=list(rt.RODAS4["a"][:-1]) + [0.5])
    with pytest.raises(ValueError, match="stiffly accurate"):
        rt.tableau(broken)


def test_the_kernels_use_the_fifth_order_method():
    # docs/simulation.md states the method; keep the two in step
    assert rt.N_STAGES == 8 and rt.ERROR_ORDER == 5 and rt.N_DENSE == 3


@pytest.mark.parametrize("method", [rt.RODAS4, rt.RODAS5], ids=["rodas4", "rodas5"])
def test_chained_stages_are_the_stage_before_plus_its_k(method):
    # the kernels evaluate a chained stage at (point of the stage before) + k_(st-1); check the identity
    # on random stage vectors against the full sum y + sum_j a_(st, j) k_j
    tab = rt.tableau(method)
    rng = np.random.default_rng(3)
    y, k = rng.normal(size=4), rng.normal(size=(tab["stages"], 4))
    point = lambda st: y + sum(tab["a"][st * (st - 1) // 2 + j] * k[j] for j in range(st))  # noqa: E731
    assert tab["chained"][-1]
    for st in np.flatnonzero(tab["chained"]):
        np.testing.assert_allclose(point(st), point(st - 1) + k[st - 1], rtol=1e-14, atol=1e-14)
    np.testing.assert_allclose(y + tab["m"] @ k, point(tab["stages"] - 1) + k[-1], rtol=1e-14, atol=1e-14)
