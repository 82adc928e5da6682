"""Accuracy of the default tolerances: observed outputs against tight references.

Target (issue 16, "accuracy per cost"): at the default tolerances the
observed outputs (the amounts of substrate and products) agree with a
reference to 1e-6, each deviation relative to max(|y_ref|, 1e-5 of the
substrate's start amount).  References: the kernel itself at rtol 1e-11
(atol scaled by the same factor), and, as an outside reference on a small
model, scipy's ``solve_ivp`` (Radau and LSODA at rtol 1e-11) with a numpy
right-hand side written here.

The default tolerances (rtol 1e-6, atol 1e-10) miss this target on several
of these cases; those are marked as expected failures (strict: a change that
meets the target makes them pass, and the mark must then go), with the
deviation measured when the mark was set.  Where the misses come from and
what tightening the tolerances costs: docs/simulation.md, "Accuracy of the
default tolerances" (``benchmarks/bench_accuracy.py``).

All models and numbers are invented.
"""

from __future__ import annotations

import inspect

import numpy as np
import pytest

from sim_models import held, logged_constant, two_site_model, two_site_run, two_site_scipy_reference
from speciakin.chemistry.model import PhControl, TemperatureProfile
from speciakin.simulation import simulate

#: The default tolerances of ``simulate`` (rtol, atol [mol]; 1e-6 and 1e-10 when the marks below were set)
DEFAULT = tuple(inspect.signature(simulate).parameters[name].default for name in ("rtol", "atol"))
#: The reference's tolerances: rtol 1e-11, atol scaled by the same factor.
TIGHT = (1e-11, 1e-15)
#: Largest deviation allowed (issue 16).
TARGET = 1e-6
OBSERVED = ("S", "P_alkyl", "P_aryl", "P_both")
SUBSTRATE = 0.10
TIMES = np.linspace(0.0, 3 * 3600.0, 40)


def missed(measured: str):
    """Expected failure of a case the default tolerances miss (``measured``: the deviation found)."""
    return pytest.mark.xfail(strict=True, raises=AssertionError,
                             reason=f"default tolerances miss the 1e-6 target here ({measured})")


def deviation(got, ref, start=SUBSTRATE):
    """Largest |got - ref| / max(|ref|, 1e-5 start) (issue 16's metric)."""
    got, ref = np.asarray(got), np.asarray(ref)
    return float(np.max(np.abs(got - ref) / np.maximum(np.abs(ref), 1e-5 * start)))


def observed(result):
    return np.column_stack([result.amount(name) for name in OBSERVED])


def default_and_tight(model, run, times=TIMES):
    """(deviation of the default run from the tight one, tight result)."""
    got = simulate(model, run, times=times, rtol=DEFAULT[0], atol=DEFAULT[1])
    ref = simulate(model, run, times=times, rtol=TIGHT[0], atol=TIGHT[1])
    return deviation(observed(got), observed(ref)), ref


def bench_like_model():
    # close to the kernel benchmark's chemistry (benchmarks/bench_kernel.py): double acylation,
    # reagent hydrolysis by water and hydroxide
    return two_site_model(log10k_alkyl=0.0, log10k_aryl=-1.3, double=True, hydrolysis=(-4.0, 1.0))


@pytest.mark.parametrize("ph", [4.0, pytest.param(5.0, marks=missed("1.07e-6")),
                                pytest.param(6.0, marks=missed("1.13e-6")), 8.0, 10.0, 11.0])
def test_held_ph_default_agrees_with_tight_reference(ph):
    # the kernel benchmark's six held-pH runs: reagent dosed over 30 min, 40 outputs over 3 h
    # (measured: 9.8e-7, 1.07e-6, 1.13e-6, 4.8e-7, 6.3e-7, 1.5e-7 at pH 4, 5, 6, 8, 10, 11)
    dev, _ = default_and_tight(bench_like_model(), two_site_run(held(ph, conc=2.0)))
    assert dev <= TARGET, f"pH {ph}: deviation {dev:.2e}"


@missed("1.49e-6")
def test_free_ph_default_agrees_with_tight_reference():
    # free pH: the pH follows from the charge balance at every evaluation (the free-pH case of
    # test_dense_output.py)
    run = two_site_run(PhControl("free"), chloride=0.12, sodium=0.2)
    dev, _ = default_and_tight(two_site_model(double=True, hydrolysis=(-4.5, 0.5)), run)
    assert dev <= TARGET, f"deviation {dev:.2e}"


@missed("1.24e-5, P_both at 277 s, 2.4e-6 mol: an error of 3e-11 mol, below atol")
def test_held_ph_under_temperature_ramp_default_agrees_with_tight_reference():
    # held pH under a temperature ramp 15 -> 35 -> 25 C: rate constants and pKa move inside each segment
    ramp = TemperatureProfile((0.0, 3600.0, 10800.0), (288.15, 308.15, 298.15))
    model = two_site_model(double=True, hydrolysis=(-4.5, 0.5))
    dev, _ = default_and_tight(model, two_site_run(held(7.0), temperature=ramp))
    assert dev <= TARGET, f"deviation {dev:.2e}"


def _scipy_reference(method, ph, pkw, times, log10k):
    """The held-constant-pH chemistry of ``two_site_model`` as the numpy right-hand side of
    ``sim_models.two_site_scipy_reference``, integrated with scipy.integrate.solve_ivp (``method``,
    rtol 1e-11), the general-purpose reference; the observed species S, the two monoamides and the diamide."""
    lk_alk, lk_ar, lk_w, lk_oh = log10k
    ref = two_site_scipy_reference(9.3, 4.6, 0.8, lk_alk, lk_ar, lk_w, lk_oh, ph, pkw, times, method=method,
                                   rtol=1e-11, atol=1e-17, substrate=SUBSTRATE)
    return ref[:, [0, 2, 3, 4]]


def _against_scipy(method, ph):
    """(deviation of the default run, of the tight run) from scipy's solve_ivp (``method``)."""
    from speciakin.chemistry.water import pkw

    log10k = (0.0, -1.3, -4.0, 1.0)
    model = two_site_model(log10k_alkyl=log10k[0], log10k_aryl=log10k[1], double=True, hydrolysis=log10k[2:])
    times = np.linspace(0.0, 7200.0, 25)
    run = two_site_run(logged_constant(ph, 7200.0), end=7200.0, dose_minutes=0.0)
    ref = _scipy_reference(method, ph, float(pkw(298.15)), times, log10k)
    tight = simulate(model, run, times=times, rtol=TIGHT[0], atol=TIGHT[1])
    got = simulate(model, run, times=times, rtol=DEFAULT[0], atol=DEFAULT[1])
    return deviation(observed(got), ref), deviation(observed(tight), ref)


@pytest.mark.parametrize("method", ["Radau", "LSODA"])
@pytest.mark.parametrize("ph", [pytest.param(5.0, marks=missed("1.25e-6")), 8.5])
def test_default_agrees_with_scipy_on_a_small_model(method, ph):
    # outside reference: scipy's solve_ivp at rtol 1e-11 (Radau; LSODA as a second, unrelated method)
    dev, dev_tight = _against_scipy(method, ph)
    # the tight kernel reference itself agrees with scipy far inside the target
    assert dev_tight <= 1e-8
    assert dev <= TARGET, f"pH {ph}: deviation {dev:.2e}"


@pytest.mark.parametrize("method", ["Radau", "LSODA"])
def test_tight_kernel_reference_agrees_with_scipy(method):
    # the reference the other tests use (the kernel at rtol 1e-11) against scipy's solve_ivp at rtol 1e-11
    for ph in (5.0, 8.5):
        assert _against_scipy(method, ph)[1] <= 1e-8


def test_metric_floor_is_a_share_of_the_start_amount():
    # a deviation of 1e-12 mol on a value of 1e-9 mol counts against 1e-5 x 0.1 mol = 1e-6 mol
    assert deviation([1e-9 + 1e-12], [1e-9]) == pytest.approx(1e-6)
    assert deviation([0.05 * (1 + 2e-6)], [0.05]) == pytest.approx(2e-6)
