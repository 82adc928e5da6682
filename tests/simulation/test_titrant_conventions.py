"""Start adjustment and titrants against an independent simulator (tests/simulation/independent_sim.py).

Three invented runs: acid added inside the start volume then a base titrant; a
two-sided pH-stat (acid first while an amine is fed, base later as the
coupling releases acid); a logged pH that rises then falls, followed with a
base and an acid titrant.  The project's kernel and the independent scipy
simulator (plain charge balance, brentq for the start, Radau) must agree on
amounts, volumes and titrant volumes.

Tolerance: the reference integrates at rtol 1e-11 and the kernel here at
rtol 1e-10, atol 1e-15 mol; the two pKw values differ by about 5e-4 pK (see
PKW_25C), which moves the water term by ~1e-11 mol.  Measured differences:
6e-12 mol (held runs) and 7.2e-10 mol at the logged run's switch from base to
acid, where both titrants carry that much extra whatever the tolerance (a
Rosenbrock step across the switch of a two-sided controller; 3e-7 of the
titrant used).  Agreement to 1e-6 of the largest amount (about 2e-9 mol),
and volumes to that amount over the titrant concentration, is therefore
above these errors yet catches any convention error (a titrant volume left
out, or an adjustment put outside the start volume, changes results by 1e-5
of the largest amount or more).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from independent_sim import IndependentRun, Scenario, Species
from speciakin.chemistry.model import (Dose, Ion, Model, Molecule, PhControl, Quantity, Reactant, Requirement,
                                       Run, Site, Step, TemperatureProfile)
from speciakin.errors import InputError
from speciakin.simulation import simulate

MIN = 60.0
MMOL = 1e-3
ML = 1e-3
PKA = {"S": 8.0, "HA": 4.5, "B": 9.0}
K_COUPLING = 0.5      # [L/(mol*s)], invented
K_WATER = 2e-4        # [1/s], invented


def _model() -> Model:
    def q(v):
        return Quantity(float(v))
    molecules = (
        Molecule("S", sites=(Site("N", "base", q(PKA["S"])),), moieties={"core": 1}, role="substrate"),
        Molecule("E", moieties={"acyl": 2}, role="reagent"),
        Molecule("P", moieties={"core": 1, "acyl": 1}, role="product"),
        Molecule("HA", sites=(Site("O", "acid", q(PKA["HA"])),), moieties={"acyl": 1}, role="acid"),
        Molecule("B", sites=(Site("N", "base", q(PKA["B"])),), role="buffer"),
    )
    steps = (
        Step("coupling", (Reactant("S", (Requirement("N"),)), Reactant("E")), (("P", 1.0), ("HA", 1.0)),
             q(math.log10(K_COUPLING))),
        Step("water", (Reactant("E"), Reactant("water")), (("HA", 2.0),), q(math.log10(K_WATER))),
    )
    return Model("titrant conventions (invented)", molecules, steps, ions=(Ion("Na+", 1), Ion("Cl-", -1)))


def _species() -> list[Species]:
    return [Species("S", "base", PKA["S"]), Species("E"), Species("P"), Species("HA", "acid", PKA["HA"]),
            Species("B", "base", PKA["B"])]


def _compare(run: Run, scenario: Scenario, times: np.ndarray):
    res = simulate(_model(), run, times=times, rtol=1e-10, atol=1e-15)
    ref, start = IndependentRun(scenario).simulate(times)
    names = ["S", "E", "P", "HA", "B", "Na+", "Cl-"]
    mine = np.column_stack([res.amount(n) for n in names] + [res.volume, res.titrant, res.opposite_titrant])
    # the kernel's titrant column is the titrant's own (Na+ here), the opposite column Cl-
    scale = np.max(np.abs(ref[:, :7]))
    np.testing.assert_allclose(mine[:, :7], ref[:, :7], rtol=0, atol=1e-6 * scale)
    np.testing.assert_allclose(mine[:, 7], ref[:, 7], rtol=0, atol=1e-6 * scale / 0.5)  # volume [L], 0.5 M
    np.testing.assert_allclose(mine[:, 8:], ref[:, 8:], rtol=0, atol=1e-6 * scale)     # titrants [mol]
    return res, ref, start


def _run(name, initial, ph, doses=(), end=90 * MIN) -> Run:
    return Run(name, initial, 50 * ML, TemperatureProfile((0.0,), (298.15,)), ph, end, doses=tuple(doses))


def test_acid_inside_the_start_volume_then_base_titrant():
    # free-base amine brought to pH 6.5 with HCl inside the 50 mL (computed from the charge
    # balance), then the coupling's acid is neutralised with 0.5 M NaOH, whose volume adds
    ph = PhControl("held", setpoint=6.5, titrant="Na+", titrant_concentration=0.5)
    run = _run("inside", {"S": 1 * MMOL}, ph, [Dose("E", 1.2 * MMOL, 0.0, 15 * MIN, 5 * ML)])
    sc = Scenario(_species(), {"S": 1 * MMOL}, 50 * ML, lambda t: 6.5, [15 * MIN], 90 * MIN, K_COUPLING, K_WATER,
                  feeds=[("E", 1.2 * MMOL, 0.0, 15 * MIN, 5 * ML)], base_conc=0.5)
    res, ref, start = _compare(run, sc, np.linspace(0, 90 * MIN, 19))
    assert start < 0                                                    # acid was needed
    assert res.start_adjustment == pytest.approx(start, rel=1e-8)      # pKw: see the module notes
    assert res.volume[0] == 50 * ML                                     # inside the start volume
    assert res.titrant[-1] > 0.5 * MMOL and np.all(np.diff(res.titrant) >= 0)


def test_two_sided_ph_stat():
    # pH 7.0 held by 0.5 M NaOH and 1.0 M HCl: the start (a free base) takes acid from the
    # titrant pair; an amine fed over 20 min takes acid; the coupling's acid later takes base
    ph = PhControl("held", setpoint=7.0, titrant="Na+", titrant_concentration=0.5, opposite_titrant="Cl-",
                   opposite_titrant_concentration=1.0, start_adjustment="titrant")
    initial = {"S": 1 * MMOL, "E": 1.1 * MMOL}
    run = _run("two-sided", initial, ph, [Dose("B", 1.5 * MMOL, 0.0, 20 * MIN, 2 * ML)], end=120 * MIN)
    sc = Scenario(_species(), initial, 50 * ML, lambda t: 7.0, [20 * MIN], 120 * MIN, K_COUPLING, K_WATER,
                  feeds=[("B", 1.5 * MMOL, 0.0, 20 * MIN, 2 * ML)], base_conc=0.5, acid_conc=1.0, start="titrant")
    res, ref, start = _compare(run, sc, np.linspace(0, 120 * MIN, 25))
    assert start < 0 and res.initial_opposite_titrant == pytest.approx(-start, rel=1e-8)
    assert res.volume[0] == pytest.approx(50 * ML + res.initial_opposite_titrant / 1.0, rel=1e-12)
    # both titrants were used, neither ever decreases
    assert res.titrant[-1] > 0.1 * MMOL and res.opposite_titrant[-1] > 0.1 * MMOL
    assert np.all(np.diff(res.titrant) >= -1e-15) and np.all(np.diff(res.opposite_titrant) >= -1e-15)


def test_logged_ph_followed_with_base_then_acid():
    # logged pH 6.0 -> 7.5 (0-40 min) -> 5.5 (40-100 min): base while it rises, acid while it
    # falls and the remaining amine takes its proton back
    times = (0.0, 40 * MIN, 100 * MIN)
    values = (6.0, 7.5, 5.5)
    ph = PhControl("logged", log_times=times, log_ph=values, titrant="Na+", titrant_concentration=0.5,
                   opposite_titrant="Cl-", opposite_titrant_concentration=0.5)
    initial = {"S": 1 * MMOL, "Cl-": 1 * MMOL, "E": 0.4 * MMOL}
    run = _run("logged", initial, ph, end=100 * MIN)
    sc = Scenario(_species(), initial, 50 * ML, lambda t: float(np.interp(t, times, values)), [40 * MIN],
                  100 * MIN, K_COUPLING, K_WATER, base_conc=0.5, acid_conc=0.5)
    grid = np.linspace(0, 100 * MIN, 26)
    res, ref, _ = _compare(run, sc, grid)
    rising = grid <= 40 * MIN
    assert res.titrant[rising][-1] > 0.2 * MMOL and res.opposite_titrant[rising][-1] < 1e-9
    assert res.opposite_titrant[-1] > 0.1 * MMOL


def test_one_sided_titrant_that_must_be_withdrawn_is_a_located_error():
    # the same logged run with a base titrant only: while the log falls the base would have
    # to be withdrawn; that is an input error naming the run's pH key, not a negative volume
    times = (0.0, 40 * MIN, 100 * MIN)
    ph = PhControl("logged", log_times=times, log_ph=(6.0, 7.5, 5.5), titrant="Na+", titrant_concentration=0.5)
    run = _run("one-sided", {"S": 1 * MMOL, "Cl-": 1 * MMOL, "E": 0.4 * MMOL}, ph, end=100 * MIN)
    with pytest.raises(InputError, match=r"key 'run\.one-sided\.ph'.*cannot be reached or held at t = "):
        simulate(_model(), run)


def test_smoothed_log_followed_with_base_then_acid():
    # the same rise and fall read every 2 min with noise (sd 0.02, invented): the log is
    # smoothed (runs_layout.smooth_ph_log), and the titrants follow the spline's own slope.
    # The reference takes the pH from scipy's smoothing spline of the same readings (FITPACK,
    # UnivariateSpline, s = n sigma^2 with sigma the scatter of test_smoothed_ph_log) and
    # keeps the charge balance at that pH by itself (no slope needed there)
    from scipy.interpolate import UnivariateSpline
    from test_smoothed_ph_log import _gsj_scatter

    log_t = np.arange(0.0, 100 * MIN + 1.0, 2 * MIN)
    smooth = np.interp(log_t, (0.0, 40 * MIN, 100 * MIN), (6.0, 7.5, 5.5))
    smooth = np.convolve(np.pad(smooth, 5, mode="edge"), np.ones(11) / 11, mode="valid")  # no corners
    log_ph = smooth + np.random.default_rng(2).normal(0.0, 0.02, log_t.size)
    spline = UnivariateSpline(log_t, log_ph, k=3, s=log_t.size * _gsj_scatter(log_t, log_ph) ** 2)
    ph = PhControl("logged", log_times=tuple(log_t), log_ph=tuple(log_ph), titrant="Na+", titrant_concentration=0.5,
                   opposite_titrant="Cl-", opposite_titrant_concentration=0.5)
    initial = {"S": 1 * MMOL, "Cl-": 1 * MMOL, "E": 0.4 * MMOL}
    run = _run("smoothed", initial, ph, end=100 * MIN)
    sc = Scenario(_species(), initial, 50 * ML, lambda t: float(spline(t)), [], 100 * MIN, K_COUPLING, K_WATER,
                  base_conc=0.5, acid_conc=0.5)
    grid = np.linspace(0, 100 * MIN, 26)
    res, ref, _ = _compare(run, sc, grid)
    np.testing.assert_allclose(res.ph, spline(grid), rtol=0, atol=1e-12)
    # both titrants were used (base 0.83 mmol, acid 0.09 mmol)
    assert res.titrant[-1] > 0.5 * MMOL and res.opposite_titrant[-1] > 0.05 * MMOL
