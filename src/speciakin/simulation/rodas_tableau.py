"""Rodas4 coefficients in the transformed form and the stage arithmetic
shared by both integrator paths.

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (RODAS, Table 7.3; transformed form W = I/(h*gamma) - J,
   eq. 7.25).
"""

from __future__ import annotations

import math

import numpy as np

from speciakin.simulation.jit_options import leaf_kernel

GAMMA = 0.25
#: stage times alpha_i
ALPHA = np.array([0.0, 0.386, 0.21, 0.63, 1.0, 1.0])
#: gamma_i of the non-autonomous term
GAMMAS = np.array([0.25, -0.1043, 0.1035, -0.3620000000000023e-01, 0.0, 0.0])
#: a_ij (lower triangle, row by row) of the stage values
STAGE_A = np.array([0.1544e+01, 0.9466785280815826, 0.2557011698983284, 0.3314825187068521e+01,
                    0.2896124015972201e+01, 0.9986419139977817, 0.1221224509226641e+01,
                    0.6019134481288629e+01, 0.1253708332932087e+02, -0.6878860361058950,
                    0.1221224509226641e+01, 0.6019134481288629e+01, 0.1253708332932087e+02,
                    -0.6878860361058950, 1.0])
#: c_ij (lower triangle, row by row) of the stage right-hand sides
STAGE_C = np.array([-0.56688e+01, -0.2430093356833875e+01, -0.2063599157091915, -0.1073529058151375,
                    -0.9594562251023355e+01, -0.2047028614809616e+02, 0.7496443313967647e+01,
                    -0.1024680431464352e+02, -0.3399990352819905e+02, 0.1170890893206160e+02,
                    0.8083246795921522e+01, -0.7981132988064893e+01, -0.3152159432874371e+02,
                    0.1631930543123136e+02, -0.6058818238834054e+01])
#: weights m_i of the solution
STAGE_M = np.array([0.1221224509226641e+01, 0.6019134481288629e+01, 0.1253708332932087e+02,
                    -0.6878860361058950, 1.0, 1.0])


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
    """ytmp = y + sum_(j < st) a_(st, j) k_j: where stage ``st`` evaluates f."""
    n = y.shape[0]
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
def new_solution(y, k, ynew, rtol, atol):
    """ynew = y + sum m_i k_i; returns the RMS error norm of the embedded
    estimate (k_6), scaled by atol + rtol max(|y|, |ynew|) (NaN or inf when
    the step produced non-finite values)."""
    n = y.shape[0]
    err = 0.0
    for i in range(n):
        v = y[i]
        for st in range(6):
            v += STAGE_M[st] * k[st, i]
        ynew[i] = v
        sc = atol + rtol * max(abs(y[i]), abs(v))
        err += (k[5, i] / sc) ** 2
    return math.sqrt(err / n)


@leaf_kernel(inline="always")
def land_step(t, h, t_end):
    """(step, last): the step cut to land exactly on ``t_end`` when it would
    reach or nearly reach it (within 1e-7 of a step), else ``h`` unchanged."""
    if t + 1.0000001 * h >= t_end:
        return t_end - t, True
    return h, False


@leaf_kernel(inline="always")
def step_factor(err, accepted):
    """Step-size factor 0.9 err^-1/4, limited to [0.2, 6] after an accepted
    step and to [0.1, 1] after a rejected one (a PI controller was measured
    to take more steps on these problems)."""
    # err^-1/4 as two square roots (a power costs several times more)
    if accepted:
        fac = 0.9 / math.sqrt(math.sqrt(err)) if err > 0.0 else 6.0
        return min(6.0, max(0.2, fac))
    return min(1.0, max(0.1, 0.9 / math.sqrt(math.sqrt(err))))
