"""Rosenbrock coefficients (Rodas4 and Rodas5) in the transformed form and
the stage arithmetic shared by both integrator paths.

Both methods are stiffly accurate and L-stable; the error estimate is the
last stage's k.  :data:`METHOD` selects the one the kernels use.  Rodas5
(8 stages, order 5) takes about half the steps of Rodas4 (6 stages, order 4)
at rtol 1e-6 on the benchmark workload (326 against 602), so it is the
default; its continuous extension of order 4 serves the outputs inside a
step (a cubic Hermite interpolant was too coarse for the longer steps:
6.5e-6 against 3e-7 at the step ends).

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (RODAS, Table 7.3; transformed form W = I/(h*gamma) - J,
   eq. 7.25; dense output).
.. [2] Di Marzo, G., "RODAS5(4): methodes de Rosenbrock d'ordre 5(4) adaptees
   aux problemes differentiels-algebriques", master's thesis, University of
   Geneva 1993 (the Rodas5 coefficients).
.. [3] Steinebach, G., "Construction of Rosenbrock-Wanner method Rodas5P and
   numerical benchmarks within the Julia Differential Equations package",
   BIT Numerical Mathematics 63, 27 (2023); the Rodas5 dense-output matrix as
   tabulated in the OrdinaryDiffEq.jl package (MIT licence).  The order of
   the continuous extension is checked in ``tests/simulation/test_rodas_tableau.py``.
"""

from __future__ import annotations

import math

import numpy as np

from speciakin.simulation.jit_options import leaf_kernel

# ---- Rodas4 [1]_ (Table 7.3): 6 stages, order 4, embedded order 3
RODAS4 = dict(
    gamma=0.25,
    alpha=[0.0, 0.386, 0.21, 0.63, 1.0, 1.0],
    gammas=[0.25, -0.1043, 0.1035, -0.3620000000000023e-01, 0.0, 0.0],
    a=[0.1544e+01, 0.9466785280815826, 0.2557011698983284, 0.3314825187068521e+01,
       0.2896124015972201e+01, 0.9986419139977817, 0.1221224509226641e+01,
       0.6019134481288629e+01, 0.1253708332932087e+02, -0.6878860361058950,
       0.1221224509226641e+01, 0.6019134481288629e+01, 0.1253708332932087e+02,
       -0.6878860361058950, 1.0],
    c=[-0.56688e+01, -0.2430093356833875e+01, -0.2063599157091915, -0.1073529058151375,
       -0.9594562251023355e+01, -0.2047028614809616e+02, 0.7496443313967647e+01,
       -0.1024680431464352e+02, -0.3399990352819905e+02, 0.1170890893206160e+02,
       0.8083246795921522e+01, -0.7981132988064893e+01, -0.3152159432874371e+02,
       0.1631930543123136e+02, -0.6058818238834054e+01],
    error_order=4,
    # continuous extension of order 3 [1]_ (section IV.7, dense output of RODAS)
    dense=[[10.12623508344586, -7.487995877610167, -34.80091861555747, -7.992771707568823, 1.025137723295662, 0.0],
           [-0.6762803392801253, 6.087714651680015, 16.43084320892478, 24.76722511418386, -6.594389125716872,
            0.0]],
)

# ---- Rodas5 [2]_: 8 stages, order 5, embedded order 4
_R5_LAST = [-14.09640773051259, 6.925207756232704, -41.47510893210728, 2.343771018586405, 24.13215229196062]
RODAS5 = dict(
    gamma=0.19,
    alpha=[0.0, 0.38, 0.3878509998321533, 0.4839718937873840, 0.4570477008819580, 1.0, 1.0, 1.0],
    gammas=[0.19, -0.1823079225333714636, -0.319231832186874912, 0.3449828624725343, -0.377417564392089818,
            0.0, 0.0, 0.0],
    a=[2.0,
       3.040894194418781, 1.041747909077569,
       2.576417536461461, 1.622083060776640, -0.9089668560264532,
       2.760842080225597, 1.446624659844071, -0.3036980084553738, 0.2877498600325443,
       *_R5_LAST,
       *_R5_LAST, 1.0,
       *_R5_LAST, 1.0, 1.0],
    c=[-10.31323885133993,
       -21.04823117650003, -7.234992135176716,
       32.22751541853323, -4.943732386540191, 19.44922031041879,
       -20.69865579590063, -8.816374604402768, 1.260436877740897, -0.7495647613787146,
       -46.22004352711257, -17.49534862857472, -289.6389582892057, 93.60855400400906, 318.3822534212147,
       34.20013733472935, -14.15535402717690, 57.82335640988400, 25.83362985412365, 1.408950972071624,
       -6.551835421242162,
       42.57076742291101, -13.80770672017997, 93.98938432427124, 18.77919633714503, -31.58359187223370,
       -6.685968952921985, -5.810979938412932],
    error_order=5,
    # continuous extension of order 4 [3]_
    dense=[[27.354592673333357, -6.925207756232857, 26.40037733258859, 0.5635230501052979, -4.699151156849391,
            -1.6008677469422725, -1.5306074446748028, -1.3929872940716344],
           [44.19024239501722, 1.3677947663381929e-13, 202.93261852171622, -35.5669339789154, -181.91095152160645,
            3.4116351403665033, 2.5793540257308067, 2.2435122582734066],
           [-44.0988150021747, -5.755396159656812e-13, -181.26175034586677, 56.99302194811676, 183.21182741427398,
            -7.480257918273637, -5.792426076169686, -5.32503859794143]],
)

#: The method both integrator paths use.
METHOD = RODAS5


def tableau(method: dict) -> dict:
    """The arrays of a method: gamma, alpha (stage times), gammas, a and c
    (lower triangles row by row), m (solution weights), chained (see below),
    dense (rows of the continuous extension), stages, error_order.

    A stage is *chained* when its row of a is the row of the stage before,
    then 1: it is evaluated at the point of the stage before plus that
    stage's k.  Both methods here are stiffly accurate: the last stage is
    chained, and the new solution is the point of the last stage plus the
    last k (m = the last row of a, then 1); this is checked here.
    :func:`stage_point` and :func:`new_solution` use these identities, and
    their sums keep the order of the full formulas, so the results are the
    same to the last bit.
    """
    a = np.array(method["a"], dtype=float)
    stages = len(method["alpha"])
    last = stages - 1
    row = lambda i: a[i * (i - 1) // 2:i * (i + 1) // 2]  # noqa: E731
    if not (a.shape[0] == stages * last // 2 == len(method["c"])):
        raise ValueError("a and c must hold the lower triangle of the stage matrix")
    chained = np.array([st >= 2 and np.array_equal(row(st)[:-1], row(st - 1)) and row(st)[-1] == 1.0
                        for st in range(stages)])
    if not chained[last]:
        raise ValueError("the method is not stiffly accurate in the form the kernels use")
    return dict(gamma=float(method["gamma"]), alpha=np.array(method["alpha"], dtype=float),
                gammas=np.array(method["gammas"], dtype=float), a=a, c=np.array(method["c"], dtype=float),
                m=np.append(row(last), 1.0), chained=chained, dense=np.array(method["dense"], dtype=float),
                stages=stages, error_order=int(method["error_order"]))


_T = tableau(METHOD)
GAMMA = _T["gamma"]
#: stage times alpha_i
ALPHA = _T["alpha"]
#: gamma_i of the non-autonomous term
GAMMAS = _T["gammas"]
#: number of stages
N_STAGES = _T["stages"]
#: index of the last stage (its k is the error estimate)
LAST = N_STAGES - 1
#: a_ij (lower triangle, row by row) of the stage values
STAGE_A = _T["a"]
#: c_ij (lower triangle, row by row) of the stage right-hand sides
STAGE_C = _T["c"]
#: stages evaluated at the point of the stage before plus its k
CHAINED = _T["chained"]
#: the error estimate (the last stage) is of this order in h
ERROR_ORDER = _T["error_order"]
#: rows d_r of the continuous extension: D_r = sum_j DENSE[r, j] k_j
DENSE = _T["dense"]
#: number of rows of :data:`DENSE`
N_DENSE = DENSE.shape[0]


@leaf_kernel
def initial_step(y, f0, n, atol, rtol, span):
    """Starting step size [s] from the sizes of y and f = dy/dt.

    Hairer, Norsett and Wanner, "Solving Ordinary Differential Equations I",
    2nd ed., Springer 1993, section II.4 (starting step size), kept within
    [1e-3 span, span]: the error test rejects a start that is too bold at the
    cost of one step, while a timid start costs a dozen steps of growth.
    """
    d0 = 0.0
    d1 = 0.0
    for i in range(n):
        sc = atol + rtol * abs(y[i])
        d0 += (y[i] / sc) ** 2
        d1 += (f0[i] / sc) ** 2
    d0 = math.sqrt(d0 / n)
    d1 = math.sqrt(d1 / n)
    if d0 < 1e-5 or d1 < 1e-5:
        h = 1e-6 * span
    else:
        h = 0.01 * d0 / d1
    return min(max(h, 1e-3 * span), span)


@leaf_kernel(inline="always")
def stage_point(y, k, st, ytmp):
    """ytmp = y + sum_(j < st) a_(st, j) k_j: where stage ``st`` evaluates f.

    For a chained stage (:func:`tableau`; the last one, and for Rodas5 the
    one before) ``ytmp`` must still hold the point of the stage before: the
    point is that one plus its k.
    """
    n = y.shape[0]
    if CHAINED[st]:
        for i in range(n):
            ytmp[i] += k[st - 1, i]
        return
    for i in range(n):
        ytmp[i] = y[i]
    base = st * (st - 1) // 2
    for j in range(st):
        a = STAGE_A[base + j]
        if a != 0.0:
            for i in range(n):
                ytmp[i] += a * k[j, i]


@leaf_kernel(inline="always")
def add_stage_history(fy, k, st, h):
    """fy += sum_(j < st) (c_(st, j) / h) k_j: the right-hand side of stage ``st``."""
    n = fy.shape[0]
    base = st * (st - 1) // 2
    for j in range(st):
        c = STAGE_C[base + j] / h
        for i in range(n):
            fy[i] += c * k[j, i]


@leaf_kernel(inline="always")
def new_solution(y, ylast, k, ynew, rtol, atol):
    """ynew = y + sum m_i k_i, computed as the point of the last stage
    (``ylast``) plus its k; returns the RMS error norm of the embedded
    estimate (the last k), scaled by atol + rtol max(|y|, |ynew|) (NaN or
    inf when the step produced non-finite values)."""
    n = y.shape[0]
    err = 0.0
    for i in range(n):
        v = ylast[i] + k[LAST, i]
        ynew[i] = v
        sc = atol + rtol * max(abs(y[i]), abs(v))
        err += (k[LAST, i] / sc) ** 2
    return math.sqrt(err / n)


@leaf_kernel(inline="always")
def dense_coefficients(k, dense):
    """dense[r] = sum_j DENSE[r, j] k_j: the coefficients of the continuous
    extension of the step just taken (needed only when an output falls inside it)."""
    n = k.shape[1]
    for r in range(N_DENSE):
        for i in range(n):
            dense[r, i] = 0.0
        for j in range(N_STAGES):
            c = DENSE[r, j]
            if c != 0.0:
                for i in range(n):
                    dense[r, i] += c * k[j, i]


@leaf_kernel(inline="always")
def dense_value(y0, y1, dense, theta, i):
    """Component ``i`` of the continuous extension at t0 + theta h:
    (1 - theta) y0 + theta (y1 + (1 - theta) (D_1 + theta (D_2 + theta D_3 ...)))."""
    p = dense[N_DENSE - 1, i]
    for r in range(N_DENSE - 2, -1, -1):
        p = dense[r, i] + theta * p
    return (1.0 - theta) * y0[i] + theta * (y1[i] + (1.0 - theta) * p)


@leaf_kernel(inline="always")
def land_step(t, h, t_end):
    """(step, last): the step cut to land exactly on ``t_end`` when it would
    reach or nearly reach it (within 1e-7 of a step), else ``h`` unchanged."""
    if t + 1.0000001 * h >= t_end:
        return t_end - t, True
    return h, False


@leaf_kernel(inline="always")
def error_root(err):
    """err^(1/ERROR_ORDER); for order 4 as two square roots (a power costs several times more)."""
    if ERROR_ORDER == 4:
        return math.sqrt(math.sqrt(err))
    return math.exp(math.log(err) / ERROR_ORDER)


@leaf_kernel(inline="always")
def step_factor(err, accepted):
    """Step-size factor 0.9 err^(-1/ERROR_ORDER), limited to [0.2, 6] after an
    accepted step and to [0.1, 1] after a rejected one (a PI controller was measured
    to take more steps on these problems)."""
    if accepted:
        fac = 0.9 / error_root(err) if err > 0.0 else 6.0
        return min(6.0, max(0.2, fac))
    return min(1.0, max(0.1, 0.9 / error_root(err)))
