"""The one Rosenbrock (Rodas5) step loop of the kernel, specialised per problem.

Both integrator paths take their steps here: the free-pH path
(``integrator_kernel``: right-hand side with a charge-balance solve, full
analytic Jacobian) and the held/logged-pH path (``segment_kernel``:
mass-action right-hand side with coefficient cubics, Jacobian on the active
states only).  What differs between them is given as four compiled functions
and two flags; :func:`make_step_loop` writes the loop once and compiles it
for each problem with these as compile-time constants (as a template is
instantiated: numba inlines the problem functions into the loop and drops
the other problems' branches), and a problem tuple ``prob`` they alone
read is passed once per call:

``point(t, y, f, prob) -> bool``
    f = dy/dt at a step point (t, y); False when it is not finite.
``stage(t, ytmp, y, f, prob) -> bool``
    f = dy/dt at a stage point (t, ytmp) of the step from y.
``jacobian(t, y, f0, ft, jac_t, span, prob) -> bool``
    the Jacobian at (t, y), stored transposed for the active states
    (``jac_t[a, i]`` = d f_i / d y_active[a]; untransposed when every state
    is active, see ``all_active``), and, for a non-autonomous
    problem, ft = df/dt; called right after ``point`` at (t, y).
``output(t, y, f, out, i_out, prob) -> bool``
    writes output row ``i_out`` of the state y at time t (f is scratch).

``prefetch`` says when f is evaluated at a new step point: before the step
is accepted (a failure there then shrinks the step; the held/logged path,
whose evaluation is cheap) or when the next step starts, after the outputs
inside the step (the free-pH path; the order of the charge-balance solves,
warm-started from the last pH, is kept so that results stay the same to the
last bit).

The linear systems are solved on the active states (Jacobian columns that
can be non-zero); a passive state follows by substitution,
k_p = h gamma (f_p + sum_a J[p, a] k_a).  The free-pH path has every state
active (``all_active``: the full system, no index lists).

Why a loop per problem and no shared compiled loop with the problem
functions as arguments or inlined into the caller: an earlier form, the
loop inlined (numba ``inline="always"``) into each path's segment driver,
measured slower than two hand-written loops; the factory keeps each loop a
function of its own, of the size and shape of the hand-written ones.

References
----------
.. [1] Hairer, E. and Wanner, G., "Solving Ordinary Differential Equations II.
   Stiff and Differential-Algebraic Problems", 2nd ed., Springer 1996,
   section IV.7 (Rosenbrock methods, transformed form W = I/(h*gamma) - J,
   eq. 7.25, and the non-autonomous term gamma_i h df/dt); the coefficients
   are in ``rodas_tableau``.
.. [2] Sandu, A. et al., "Benchmarking stiff ODE solvers for atmospheric
   chemistry problems II: Rosenbrock solvers", Atmos. Environ. 1997, 31, 3459
   (step-size controller constants).
"""

from __future__ import annotations

import math

from numba import njit

from speciakin.simulation.jit_options import leaf_kernel
from speciakin.simulation.lu_kernel import lu_factor, lu_solve
from speciakin.simulation.rodas_tableau import (ALPHA, GAMMA, GAMMAS, N_STAGES, add_stage_history,
                                                dense_coefficients, dense_value, initial_step, land_step,
                                                new_solution, stage_point, step_factor)
from speciakin.simulation.status import (STATUS_MAX_STEPS, STATUS_NOT_FINITE, STATUS_OK, STATUS_SINGULAR,
                                         STATUS_STEP_UNDERFLOW, STATUS_TITRANT_SIGN)

#: Accepted steps of one run before it stops with ``STATUS_MAX_STEPS``.
MAX_STEPS = 100000


@leaf_kernel
def write_output(out, i_out, y, ph, temperature):
    """Output row ``i_out``: amounts, volume, pH, titrant consumed, temperature,
    opposite titrant consumed (state: amounts, volume, titrant, opposite titrant)."""
    nsp = y.shape[0] - 3
    for j in range(nsp + 1):
        out[i_out, j] = y[j]
    out[i_out, nsp + 1] = ph
    out[i_out, nsp + 2] = y[nsp + 1]
    out[i_out, nsp + 3] = temperature
    out[i_out, nsp + 4] = y[nsp + 2]


def make_step_loop(point, stage, jacobian, output, prefetch, all_active, after_step=None):
    """The step loop specialised for one problem: a compiled ``rosenbrock_steps``.

    ``point``, ``stage``, ``jacobian``, ``output`` (compiled functions, best
    with ``inline="always"``) and ``prefetch`` are the problem (module
    notes); ``all_active``: every state is active (no passive substitution),
    and ``jacobian`` then stores J itself (``jac_t[i, j]`` = d f_i / d y_j)
    instead of its transpose.
    ``after_step(t, h, t_new, y, ynew, k, g, piv, prob) -> float``, when given, is called
    after each step y's error test accepts, before its outputs, with the factorised W
    (every state active) and the stages, and returns its own error norm (NaN: not finite):
    above 1 the step is rejected after all, and the next step size follows the larger of
    the two norms.  The forward sensitivities ride on it (``sensitivity_kernel``); without
    it the branch is dropped when compiling.
    They are compile-time constants of the loop made here (numba inlines the
    problem functions into it and drops the branches of the other problems),
    so each path gets a loop as fast as a hand-written copy while the source
    stays one.  The loop is a leaf function (no reference counting) and is
    not cached on its own: it is compiled into its cached caller.
    """

    hooked = after_step is not None

    @njit(_nrt=False)
    def rosenbrock_steps(prob, nonautonomous, ta, tb, t1, span, y, h, work, rtol, atol, out, out_t, i_out, n_out,
                         counters, sign_tol, peak):
        """Advance ``y`` in place from ta to exactly tb with Rodas5 [1]_.

        Parameters
        ----------
        prob
            The tuple the problem functions read.
        nonautonomous
            The right-hand side depends on t explicitly (``jacobian`` fills ft).
        ta, tb
            Start and end of this call [s].
        t1, span
            End [s] and length [s] of the whole segment: outputs at t1 itself
            are left to the caller; a step below 1e-13 of the span is an underflow.
        y, h
            State (changed in place) and first trial step [s] (<= 0: chosen here).
        work
            (f0, fnew, ft, fy, ytmp, ynew, k, dense, active, passive, jac_t, g,
            sub, piv): work arrays; ``g`` is n_active x n_active.
        rtol, atol
            Tolerances (relative, absolute [state units]).
        out, out_t, i_out, n_out
            Output rows, output times [s], next output index, number of outputs.
        counters
            ``counters[0]`` counts accepted steps (all segments of the run).
        sign_tol, peak
            With ``sign_tol`` > 0 (a one-sided titrant) the titrant consumed may
            not fall more than ``sign_tol`` [mol] below its largest value so far
            (``peak[0]``): a titrant cannot be withdrawn (status 6).

        Returns
        -------
        (status, next step size, next output index)
        """
        (f0, fnew, ft, fy, ytmp, ynew, k, dense, active, passive, jac_t, g, sub, piv) = work
        n = y.shape[0]
        n_act = active.shape[0]
        n_pas = passive.shape[0]
        if not point(ta, y, f0, prob):
            return STATUS_NOT_FINITE, h, i_out
        if h <= 0.0:
            h = initial_step(y, f0, n, atol, rtol, tb - ta)
        t = ta
        jac_fresh = False
        need_eval = False
        while t < tb:
            if not jac_fresh:
                if prefetch:
                    # f at the new point is already in f0 (a branch on the constant alone: numba drops
                    # the other one before typing, so this copy of ``point`` is not compiled)
                    pass
                elif need_eval:
                    if not point(t, y, f0, prob):
                        return STATUS_NOT_FINITE, h, i_out
                    need_eval = False
                if not jacobian(t, y, f0, ft, jac_t, span, prob):
                    return STATUS_NOT_FINITE, h, i_out
                jac_fresh = True
            wanted = h
            h, last = land_step(t, h, tb)
            if h < 1e-13 * max(abs(t), span) or h <= 0.0:
                return STATUS_STEP_UNDERFLOW, h, i_out
            # W = I/(h gamma) - J on the active states
            hg = h * GAMMA
            diag = 1.0 / hg
            if all_active:
                # jac_t holds J itself here (see make_step_loop)
                for a in range(n):
                    for b in range(n):
                        g[a, b] = -jac_t[a, b]
                    g[a, a] += diag
            else:
                for a in range(n_act):
                    ia = active[a]
                    for b in range(n_act):
                        g[a, b] = -jac_t[b, ia]
                    g[a, a] += diag
            if not lu_factor(g, piv):
                return STATUS_SINGULAR, h, i_out
            failed = False
            for st in range(N_STAGES):
                if st == 0:
                    for i in range(n):
                        fy[i] = f0[i]
                else:
                    stage_point(y, k, st, ytmp)
                    if not stage(t + ALPHA[st] * h, ytmp, y, fy, prob):
                        failed = True
                        break
                    add_stage_history(fy, k, st, h)
                if nonautonomous and GAMMAS[st] != 0.0:
                    gh = h * GAMMAS[st]
                    for i in range(n):
                        fy[i] += gh * ft[i]
                if all_active:
                    lu_solve(g, piv, fy)
                    for i in range(n):
                        k[st, i] = fy[i]
                else:
                    for a in range(n_act):
                        sub[a] = fy[active[a]]
                    lu_solve(g, piv, sub)
                    for a in range(n_act):
                        k[st, active[a]] = sub[a]
                    for p in range(n_pas):
                        ip = passive[p]
                        val = fy[ip]
                        for a in range(n_act):
                            val += jac_t[a, ip] * sub[a]
                        k[st, ip] = hg * val
            err = 0.0
            if not failed:
                err = new_solution(y, ytmp, k, ynew, rtol, atol)
                if not math.isfinite(err):
                    failed = True
            t_new = tb if last else t + h
            if prefetch and not failed and err <= 1.0:
                if not point(t_new, ynew, fnew, prob):
                    failed = True
            if failed:
                h *= 0.1
                continue
            if hooked and err <= 1.0:
                # a branch on the constant alone, dropped before typing when there is no hook: the hook's
                # own error norm takes part in the step's acceptance and the next step size
                hook_err = after_step(t, h, t_new, y, ynew, k, g, piv, prob)
                if not (hook_err >= 0.0):
                    return STATUS_NOT_FINITE, h, i_out
                err = max(err, hook_err)
            if err <= 1.0:
                # outputs strictly inside (t, t_new] and before t1: continuous extension; t1 itself is left to
                # the caller
                if i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                    dense_coefficients(k, dense)
                    while i_out < n_out and out_t[i_out] < t1 and out_t[i_out] <= t_new:
                        tout = out_t[i_out]
                        theta = (tout - t) / h
                        for i in range(n):
                            ytmp[i] = dense_value(y, ynew, dense, theta, i)
                        if not output(tout, ytmp, fy, out, i_out, prob):
                            return STATUS_NOT_FINITE, h, i_out
                        i_out += 1
                for i in range(n):
                    y[i] = ynew[i]
                if prefetch:
                    for i in range(n):
                        f0[i] = fnew[i]
                else:
                    need_eval = True
                t = t_new
                jac_fresh = False
                if sign_tol > 0.0:
                    titrant_used = y[n - 2]
                    if titrant_used > peak[0]:
                        peak[0] = titrant_used
                    elif titrant_used < peak[0] - sign_tol:
                        return STATUS_TITRANT_SIGN, h, i_out
                counters[0] += 1
                if counters[0] > MAX_STEPS:
                    return STATUS_MAX_STEPS, h, i_out
                h = h * step_factor(err, True)
                if last:
                    # a step cut short to land on tb says nothing against the larger step
                    h = max(h, wanted)
            else:
                h = h * step_factor(err, False)
        return STATUS_OK, h, i_out

    return rosenbrock_steps
