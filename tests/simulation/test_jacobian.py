"""The analytic Jacobian (held and logged pH) against central differences of the RHS."""

from __future__ import annotations

import numpy as np
import pytest

from sim_models import held, logged_constant, two_site_model, two_site_run
from speciakin.chemistry.model import PhControl
from speciakin.simulation import compile_model, compile_runs
from speciakin.simulation.rhs_kernel import analytic_jacobian, make_workspace, rhs


TWO_SIDED = dict(titrant="Na", titrant_concentration=1.0, opposite_titrant="Cl", opposite_titrant_concentration=0.5)


@pytest.mark.parametrize("slope", [0.0, 2e-3])
@pytest.mark.parametrize("control, ph_slope", [
    (held(6.3), 0.0), (logged_constant(9.1, 10800.0), 0.0), (PhControl("free"), 0.0),
    # a two-sided pH-stat (whichever titrant the state needs) and a logged pH with titrants whose
    # pH moves (d pH/dt [1/s], invented): the titrant rate carries d zbar/dpH and d excess/dpH
    (PhControl("held", setpoint=6.3, **TWO_SIDED), 0.0),
    (PhControl("logged", log_times=(0.0, 10800.0), log_ph=(9.1, 8.0), **TWO_SIDED), -1e-4),
    (PhControl("logged", log_times=(0.0, 10800.0), log_ph=(7.1, 8.0), **TWO_SIDED), 2e-4),
])
def test_analytic_jacobian_matches_finite_differences(control, ph_slope, slope):
    """Also under a temperature ramp (slope [K/s]) with non-zero site enthalpies, where the
    held-pH titrant rate depends on d zbar/dT and d[OH-]/dT; and for the free pH, where the
    pH follows the state through the charge balance (implicit-function term)."""
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    compiled = compile_model(model)
    cr = compile_runs(compiled, [two_site_run(control, chloride=0.05)], [[0.0, 10800.0]])
    a = compiled.arrays
    qv = compiled.nominal
    enthalpy = np.full(len(a[6]), 35.0)  # [kJ/mol], invented
    par = (qv[a[5]], enthalpy, qv[a[9]], qv[a[13]], qv[a[14]], 0.0)
    r = cr.arrays
    ctx = (r[0][0], r[1][0], 0.0, max(r[2][0], 0), r[3][0], r[4][0], r[5][0], max(r[6][0], 1), r[7][0], r[8][0],
           r[9][0], r[28][0], r[29][0], r[30][0], r.log_c[0], r.log_smooth[0])
    nsp = compiled.n_species
    ws = make_workspace(nsp, len(a[5]), len(a[11]), compiled.n_molecules, len(a[13]))
    ws[7][5] = ph_slope
    rng = np.random.default_rng(5)
    y = np.concatenate([rng.uniform(0.001, 0.1, nsp), [1.2, 0.01, 0.02]])
    feed = np.zeros(nsp)
    f0 = np.empty(nsp + 3)
    rhs(100.0, y, f0, a, par, ctx, feed, 0.0, slope, ws)
    jac = np.zeros((nsp + 3, nsp + 3))
    analytic_jacobian(y, a, ws, ctx, jac, slope)
    fd = np.zeros_like(jac)
    fp, fm = np.empty(nsp + 3), np.empty(nsp + 3)
    # the free-pH charge balance is solved to ~1e-13 in pH: a larger step keeps that noise
    # (~1e-13 / relative step) below the tolerance; truncation stays ~step^2
    rel_step = 1e-4 if control.mode == "free" else 1e-6
    for j in range(nsp + 1):
        d = rel_step * y[j]
        yp, ym = y.copy(), y.copy()
        yp[j] += d
        ym[j] -= d
        rhs(100.0, yp, fp, a, par, ctx, feed, 0.0, slope, ws)
        rhs(100.0, ym, fm, a, par, ctx, feed, 0.0, slope, ws)
        fd[:, j] = (fp - fm) / (2 * d)
    # central differences are accurate to ~1e-8 relative for these smooth rational terms
    np.testing.assert_allclose(jac, fd, rtol=1e-6, atol=1e-9 * np.abs(fd).max())
