"""The kernel against scipy's Radau at tight tolerance on random two-site models."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings, strategies as st

from sim_models import logged_constant, radau_piecewise, two_site_model, two_site_run, two_site_scipy_reference
from speciakin.simulation import simulate


def _reference(pka_alk, pka_ar, w, lk_alk, lk_ar, lk_w, lk_oh, ph, pkw, times):
    """The numpy right-hand side of ``sim_models.two_site_scipy_reference``, integrated with
    scipy.integrate.solve_ivp (Radau, rtol 1e-10), the general-purpose reference."""
    return two_site_scipy_reference(pka_alk, pka_ar, w, lk_alk, lk_ar, lk_w, lk_oh, ph, pkw, times)


@settings(max_examples=6, deadline=None, derandomize=True)
@given(pka_alk=st.floats(8.0, 11.0), pka_ar=st.floats(3.0, 6.0), w=st.floats(0.0, 2.0),
       lk_alk=st.floats(-2.0, 0.5), lk_ar=st.floats(-3.0, -0.5), lk_w=st.floats(-6.0, -3.5),
       lk_oh=st.floats(-1.0, 1.5), ph=st.floats(3.0, 11.5))
def test_kernel_matches_radau_reference(pka_alk, pka_ar, w, lk_alk, lk_ar, lk_w, lk_oh, ph):
    water = __import__("speciakin.chemistry.water", fromlist=["pkw"])
    model = two_site_model(pka_alk, pka_ar, w, lk_alk, lk_ar, double=True, hydrolysis=(lk_w, lk_oh))
    times = np.linspace(0.0, 7200.0, 9)
    run = two_site_run(logged_constant(ph, 7200.0), end=7200.0, dose_minutes=0.0)
    res = simulate(model, run, times=times)
    ref = _reference(pka_alk, pka_ar, w, lk_alk, lk_ar, lk_w, lk_oh, ph, float(water.pkw(298.15)), times)
    got = res.concentrations[:, :6]
    # rtol 1e-6 per step; global error stays within a few 1e-6 of the largest amount
    scale = 0.105
    assert np.max(np.abs(got - ref)) / scale < 2e-5


def _varying_reference(knots_t, knots_ph, temp_t, temp_k, times, pkw_of_t, ph_of_t=None):
    """Reference for a logged pH and a temperature that both change linearly
    between knots: the same numpy right-hand side as above with pKa(T) by
    van 't Hoff, k(T) by Arrhenius (reference temperature 298.15 K) and Kw(T)
    from IAPWS R11-07, integrated piecewise between the knots with scipy's
    Radau at rtol 1e-10 (the general-purpose reference).  ``ph_of_t``, when
    given, is the pH in place of the knots joined by lines."""
    r_gas = 8.314462618
    t_ref = 298.15

    def pka_at(pka, dh, temp):
        return pka + dh * 1000.0 / (r_gas * np.log(10.0)) * (1.0 / temp - 1.0 / t_ref)

    def k_at(lk, ea, temp):
        return 10.0 ** lk * np.exp(-ea * 1000.0 / r_gas * (1.0 / temp - 1.0 / t_ref))

    def rhs(t, c):
        ph = np.interp(t, knots_t, knots_ph) if ph_of_t is None else float(ph_of_t(t))
        temp = np.interp(t, temp_t, temp_k)
        p_alk, p_ar = pka_at(9.3, 50.0, temp), pka_at(4.6, 30.0, temp)
        lw = np.array([0.0, p_alk - ph, p_ar - ph, p_alk + p_ar - 2 * ph - 0.8])
        pop = 10.0 ** (lw - lw.max())
        pop /= pop.sum()
        f_alk, f_ar = pop[0] + pop[2], pop[0] + pop[1]
        free = lambda pka: 1.0 / (1.0 + 10.0 ** (pka - ph))  # noqa: E731
        k = [k_at(np.log10(0.3), 45.0, temp), k_at(-2.0, 40.0, temp), k_at(np.log10(0.3) - 0.3, 0.0, temp),
             k_at(-2.3, 0.0, temp), k_at(-4.5, 0.0, temp), k_at(0.5, 0.0, temp)]
        oh = 10.0 ** (ph - pkw_of_t(temp))
        s, e, pa, pb, pab, ha = c
        r = [k[0] * s * f_alk * e, k[1] * s * f_ar * e, k[2] * pb * free(9.0) * e,
             k[3] * pa * free(4.1) * e, k[4] * e, k[5] * oh * e]
        return [-r[0] - r[1], -sum(r), r[0] - r[3], r[1] - r[2], r[2] + r[3],
                r[0] + r[1] + r[2] + r[3] + 2 * r[4] + 2 * r[5]]

    cuts = np.unique(np.concatenate([knots_t, temp_t, [times[-1]]]))
    return radau_piecewise(rhs, [0.1, 0.105, 0, 0, 0, 0], cuts, times)


def _kernel_and_reference(knots_t, knots_ph, spline=None):
    """The kernel and the Radau reference (:func:`_varying_reference`) for the two-site model with
    a logged pH (``spline``: the pH the reference takes) under a temperature ramp 288 -> 308 -> 298 K."""
    from speciakin.chemistry.model import PhControl, TemperatureProfile
    from speciakin.chemistry.water import pkw

    temp_t = np.array([0.0, 2400.0, 7200.0])
    temp_k = np.array([288.15, 308.15, 298.15])
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5), log10k_aryl=-2.0)
    run = two_site_run(PhControl("logged", log_times=tuple(knots_t), log_ph=tuple(knots_ph)), end=7200.0,
                       dose_minutes=0.0, temperature=TemperatureProfile(tuple(temp_t), tuple(temp_k)))
    times = np.linspace(0.0, 7200.0, 25)
    res = simulate(model, run, times=times)
    ref = _varying_reference(knots_t, knots_ph, temp_t, temp_k, times, lambda t: float(pkw(t)), spline)
    assert np.allclose(res.temperature, np.interp(times, temp_t, temp_k), atol=1e-9)
    return times, res, ref


def test_kernel_matches_radau_with_logged_ph_and_temperature_ramp():
    # pH and temperature both change inside every segment: the path whose rate
    # coefficients are carried as cubics in time (segment_kernel)
    knots_t = np.array([0.0, 1800.0, 3600.0, 7200.0])
    knots_ph = np.array([5.0, 9.5, 8.0, 6.5])
    times, res, ref = _kernel_and_reference(knots_t, knots_ph)
    assert np.allclose(res.ph, np.interp(times, knots_t, knots_ph), atol=1e-12)
    # rtol 1e-6 per step: the global error stays within 1e-6 of the largest amount
    # (measured 4e-9; without the temperature ramp the same check gives 0.09)
    assert np.max(np.abs(res.concentrations[:, :6] - ref)) / 0.105 < 1e-6


def test_kernel_matches_radau_with_smoothed_log_and_temperature_ramp():
    # a long noisy pH log (121 readings, sd 0.03) is smoothed: the kernel integrates through
    # the readings (no breakpoint there) with the coefficients carried as cubics in time; the
    # reference takes the pH from scipy's smoothing spline of the same readings (FITPACK,
    # UnivariateSpline with s = n sigma^2, sigma the scatter of test_smoothed_ph_log) and
    # restarts Radau at every reading and temperature knot
    from scipy.interpolate import UnivariateSpline

    from test_smoothed_ph_log import _gsj_scatter, _noisy_log

    knots_t, knots_ph, _ = _noisy_log(121, 0.03, 11)
    spline = UnivariateSpline(knots_t, knots_ph, k=3, s=knots_t.size * _gsj_scatter(knots_t, knots_ph) ** 2)
    times, res, ref = _kernel_and_reference(knots_t, knots_ph, spline)
    assert np.allclose(res.ph, spline(times), atol=1e-12)
    # rtol 1e-6 per step: the global error stays within 1e-6 of the largest amount
    assert np.max(np.abs(res.concentrations[:, :6] - ref)) / 0.105 < 1e-6
