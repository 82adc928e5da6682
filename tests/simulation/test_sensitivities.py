"""Forward sensitivities of the kernel (``simulation.sensitivities``) against central differences.

Issue 16 ("exact Jacobian"): the derivatives of every output along random
directions in (parameter vector, pH offset, amount factor) agree with central
differences of the ordinary simulations to 1e-6 relative, on random models, in
every pH mode: held (with a sample withdrawal, and under a temperature ramp),
logged with and without a titrant, free (under a ramp, with a withdrawal).

Reference: central differences of ``simulate_batch`` at rtol 1e-11 along each
direction, with steps h and h/2, Richardson-extrapolated (error O(h^4);
Press et al., "Numerical Recipes", 3rd ed., 2007, section 5.7), h = 1e-2.
The reference's own error limits the check on a free-pH run under a ramp
(its simulations carry about 1e-12 mol of rounding, from the forward
difference of df/dt on that path): on a unit pKa direction its deviation
from the sensitivities was 9e-6, 1.6e-6 and 7.5e-7 at h = 5e-3, 1e-2 and
2e-2, the same at the sensitivities' rtol 1e-8 and 1e-10 (measured); random
directions (every input moving) are resolved, unit directions are checked
on a free-pH run at a constant temperature.
The relative deviation of a group of outputs (the amounts, the volume, the
pH, the titrants consumed) is its largest |sensitivity - reference| over the
run's times, divided by the group's largest |reference|.

All models and numbers are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

from sim_models import held, two_site_model, two_site_run
from speciakin.chemistry.model import PhControl, TemperatureProfile
from speciakin.errors import InputError
from speciakin.simulation import compile_model, compile_runs, simulate_batch
from speciakin.simulation.sensitivities import simulate_sensitivities

#: Largest relative deviation allowed (issue 16).
TARGET = 1e-6
RAMP = TemperatureProfile((0.0, 3600.0, 10800.0), (288.15, 308.15, 298.15))
WARMING = TemperatureProfile((0.0, 10800.0), (288.15, 308.15))
LOG = ((0.0, 3600.0, 10800.0), (6.5, 7.5, 8.0))
FALLING_LOG = ((0.0, 3600.0, 10800.0), (6.5, 8.0, 7.0))
TIMES = np.linspace(0.0, 3 * 3600.0, 13)


def runs():
    # the pH-stats dose base only (warming frees protons, the acylations release acid, the logged pH rises):
    # a switch between two titrants is a kink the sensitivities cross with less accuracy (last test)
    return [
        two_site_run(held(6.0), withdrawals=((3000.0, 0.05),), name="held"),
        two_site_run(held(8.0), temperature=WARMING, name="held_ramp"),
        two_site_run(PhControl("logged", log_times=LOG[0], log_ph=LOG[1], titrant="Na", titrant_concentration=1.0),
                     name="logged_titrant"),
        two_site_run(PhControl("logged", log_times=LOG[0], log_ph=LOG[1]), name="logged"),
        two_site_run(PhControl("free"), chloride=0.2, sodium=0.05, temperature=RAMP, withdrawals=((5000.0, 0.1),),
                     name="free"),
    ]


def random_model(rng):
    # plausible invented constants: an alkyl amine pKa 8-10.5, an aryl amine 3.5-5.5, their interaction,
    # acylation and reagent hydrolysis rate constants
    return two_site_model(pka_alkyl=rng.uniform(8.0, 10.5), pka_aryl=rng.uniform(3.5, 5.5), w=rng.uniform(0.0, 1.5),
                          log10k_alkyl=rng.uniform(-1.0, 0.5), log10k_aryl=rng.uniform(-2.5, -1.0), double=True,
                          hydrolysis=(rng.uniform(-4.5, -3.5), rng.uniform(0.5, 1.5)))


def reference(compiled, cruns, q, dirs, h=1e-2):
    """Richardson-extrapolated central differences along each direction: (n_runs, m, n_times, n_outputs);
    ``h`` one step for every direction or one each."""
    n_q, n_runs = q.size, len(cruns.names)
    h = np.broadcast_to(np.asarray(h, float), (len(dirs),))
    sets, offs, facs = [], [], []
    for d, hd in zip(dirs, h):
        for step in (hd, -hd, hd / 2, -hd / 2):
            sets.append(q + step * d[:n_q])
            offs.append(np.full(n_runs, step * d[n_q]))
            facs.append(np.full(n_runs, 1.0 + step * d[n_q + 1]))
    res = simulate_batch(compiled, cruns, np.array(sets), np.array(offs), np.array(facs), rtol=1e-11, atol=1e-15)
    assert not res.status.any()
    out = res.outputs.reshape(len(dirs), 4, *res.outputs.shape[1:])
    h = h[:, None, None, None]
    wide = (out[:, 0] - out[:, 1]) / (2 * h)
    narrow = (out[:, 2] - out[:, 3]) / h
    return np.moveaxis((4 * narrow - wide) / 3, 0, 1)


def groups(compiled):
    ns = compiled.n_species
    return {"amounts": list(range(ns)), "volume": [ns], "pH": [ns + 1], "titrants": [ns + 2, ns + 4]}


def deviations(compiled, got, ref, outputs):
    """{(run, direction, group): relative deviation} for the groups whose derivative is not zero.

    A group whose reference stays below 1e-7 of the group's outputs (per unit of the direction) has no
    derivative (the volume of a run without a titrant): the reference is differencing noise there (about
    1e-11 of the outputs over the step 1e-2), and the sensitivities must be as small (1e-9 of the outputs)."""
    found = {}
    for r in range(got.shape[0]):
        for d in range(got.shape[1]):
            for name, cols in groups(compiled).items():
                a, b = ref[r, d][:, cols], got[r, d][:, cols]
                size = np.nanmax(np.abs(outputs[r][:, cols]))
                scale = np.nanmax(np.abs(a))
                if scale > 1e-7 * size:
                    found[(r, d, name)] = float(np.nanmax(np.abs(a - b)) / scale)
                else:
                    assert np.nanmax(np.abs(b)) <= 1e-9 * size, (r, d, name)
    return found


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_sensitivities_agree_with_central_differences_on_random_models(seed):
    rng = np.random.default_rng(seed)
    compiled = compile_model(random_model(rng))
    cruns = compile_runs(compiled, runs(), [TIMES] * 5)
    q = compiled.nominal.copy()
    n_q = q.size
    dirs = rng.normal(size=(4, n_q + 2))
    dirs[:, n_q:] *= 0.1  # pH offset [pH units] and amount factor: steps of the size a fit takes
    got = simulate_sensitivities(compiled, cruns, q, dirs, rtol=1e-8, atol=1e-12)
    assert not got.status.any()
    ref = reference(compiled, cruns, q, dirs)
    found = deviations(compiled, got.derivatives, ref, got.outputs)
    # every run and group took part: the amounts and the pH of every run move along a random direction
    assert {(r, "amounts") for r in range(5)} <= {(r, g) for r, _, g in found}
    assert {(r, "pH") for r in range(5)} <= {(r, g) for r, _, g in found}
    worst = max(found, key=found.get)
    assert found[worst] <= TARGET, f"{cruns.names[worst[0]]}, direction {worst[1]}, {worst[2]}: {found[worst]:.2e}"


def test_each_kind_of_input_alone():
    # unit directions: a pKa, a rate constant, an activation energy, the pH offset, the amount factor
    compiled = compile_model(two_site_model(double=True, hydrolysis=(-4.0, 1.0)))
    cases = runs()[:4] + [two_site_run(PhControl("free"), chloride=0.2, sodium=0.05, withdrawals=((5000.0, 0.1),),
                                       name="free")]
    cruns = compile_runs(compiled, cases, [TIMES] * 5)
    q = compiled.nominal.copy()
    names = compiled.quantity_names
    picks = [names.index("pKa.S.N_alkyl"), names.index("log10k.acyl_aryl"), names.index("Ea.acyl_alkyl"),
             q.size, q.size + 1]
    dirs = np.eye(q.size + 2)[picks]
    got = simulate_sensitivities(compiled, cruns, q, dirs, rtol=1e-8, atol=1e-12)
    # the activation energy's step 1 kJ/mol (of 45; ln k moves by about 0.013 per kJ/mol 10 K from the
    # reference temperature)
    ref = reference(compiled, cruns, q, dirs, h=[1e-2, 1e-2, 1.0, 1e-2, 1e-2])
    found = deviations(compiled, got.derivatives, ref, got.outputs)
    worst = max(found, key=found.get)
    assert found[worst] <= TARGET, f"{cruns.names[worst[0]]}, input {worst[1]}, {worst[2]}: {found[worst]:.2e}"
    # the activation energy moves the runs under a ramp only
    assert {r for r, d, g in found if d == 2} == {cruns.names.index("held_ramp")}
    # the outputs themselves are the simulation's, to the integrator's tolerance
    plain = simulate_batch(compiled, cruns, q[None], rtol=1e-11, atol=1e-15).outputs[0]
    amounts = list(range(compiled.n_species))
    assert np.nanmax(np.abs(got.outputs[..., amounts] - plain[..., amounts])) <= 1e-6 * 0.1
    # a held pH moves with the offset alone: d pH / d offset = 1, and the pH of a logged run likewise
    for r in range(4):
        np.testing.assert_allclose(got.derivatives[r, 3, :, compiled.n_species + 1], 1.0, rtol=1e-9)
        np.testing.assert_allclose(got.derivatives[r, 0, :, compiled.n_species + 1], 0.0, atol=1e-9)


def test_pka_values_alone_through_the_populations():
    # A direction that moves site pKa values alone is carried through the populations (sensitivity_terms.
    # pka_difference: no speciation or charge balance solved again); every site's pKa at once, with random
    # weights, in every pH mode (the free run at a constant temperature, as above), against the reference.
    rng = np.random.default_rng(7)
    compiled = compile_model(random_model(rng))
    cases = runs()[:4] + [two_site_run(PhControl("free"), chloride=0.2, sodium=0.05, withdrawals=((5000.0, 0.1),),
                                       name="free")]
    cruns = compile_runs(compiled, cases, [TIMES] * 5)
    q = compiled.nominal.copy()
    names = compiled.quantity_names
    pka = [names.index(n) for n in names if n.startswith("pKa.")]
    alone = np.zeros(q.size + 2)
    alone[pka] = rng.uniform(-1.0, 1.0, len(pka))
    # the same direction with an enthalpy moved by 1e-9 kJ/mol: it takes the general central difference in the
    # inputs (each perturbed set's right-hand side evaluated in full)
    general = alone.copy()
    general[names.index("enthalpy.S.N_alkyl")] = 1e-9
    got = simulate_sensitivities(compiled, cruns, q, np.array([alone, general]), rtol=1e-8, atol=1e-12)
    assert not got.status.any()
    ref = reference(compiled, cruns, q, alone[None])
    # both ways against the reference (the enthalpy's share is 1e-9 of a pKa's); measured: through the
    # populations 2.3e-8 to 5.3e-7, the general way 1.1e-7 to 5.4e-7 (both the truncation of their central
    # differences at step 1e-4, O(1e-8) times the curvature, the same on every held or logged run)
    for way in range(2):
        found = deviations(compiled, got.derivatives[:, way:way + 1], ref, got.outputs)
        assert {(r, "amounts") for r in range(5)} <= {(r, g) for r, _, g in found}
        worst = max(found, key=found.get)
        assert found[worst] <= TARGET, f"way {way}, {cruns.names[worst[0]]}, {worst[2]}: {found[worst]:.2e}"


def test_no_direction_and_wrong_shapes():
    compiled = compile_model(two_site_model())
    cruns = compile_runs(compiled, [two_site_run(held(6.0))], [TIMES])
    q = compiled.nominal.copy()
    got = simulate_sensitivities(compiled, cruns, q, np.zeros((0, q.size + 2)))
    assert got.derivatives.shape == (1, 0, TIMES.size, compiled.n_outputs)
    plain = simulate_batch(compiled, cruns, q[None], rtol=1e-8, atol=1e-12).outputs[0]
    np.testing.assert_allclose(got.outputs[0, :, 0], plain[0, :, 0], rtol=1e-6)
    with pytest.raises(InputError, match="directions"):
        simulate_sensitivities(compiled, cruns, q, np.zeros((2, q.size)))


def test_a_two_sided_ph_stat_switching_titrants():
    # Where a two-sided pH-stat switches from its titrant to the opposite one, the titrant's rate has a kink in
    # time and the sensitivities' right-hand side jumps there: the step that crosses it carries S with a
    # first-order error, which S's own error test (it takes part in each step's acceptance) bounds.  Measured on
    # this case (falling log, cooling after a warming), on the titrants, their ions and the volume: 3.7e-4 at
    # rtol 1e-8 and 1.7e-6 at rtol 1e-10 (without S in the error test: 3.5e-3 at both); the molecules and the
    # pH meet the target at rtol 1e-8.  The bounds below are those measurements with a margin.
    compiled = compile_model(two_site_model(double=True, hydrolysis=(-4.0, 1.0)))
    control = PhControl("logged", log_times=FALLING_LOG[0], log_ph=FALLING_LOG[1], titrant="Na",
                        titrant_concentration=1.0, opposite_titrant="Cl", opposite_titrant_concentration=1.0)
    cruns = compile_runs(compiled, [two_site_run(control, temperature=RAMP)], [TIMES])
    q = compiled.nominal.copy()
    dirs = np.random.default_rng(4).normal(size=(3, q.size + 2)) * np.r_[np.ones(q.size), 0.1, 0.1]
    ref = reference(compiled, cruns, q, dirs)[0]
    molecules = list(range(compiled.n_molecules)) + [compiled.n_species + 1]
    titrants = [c for c in range(compiled.n_outputs) if c not in molecules and c != compiled.n_species + 3]

    def deviation(got, cols):
        a, b = ref[:, :, cols], got.derivatives[0][:, :, cols]
        return float(np.max(np.nanmax(np.abs(a - b), axis=(1, 2)) / np.nanmax(np.abs(a), axis=(1, 2))))

    coarse = simulate_sensitivities(compiled, cruns, q, dirs, rtol=1e-8, atol=1e-12)
    fine = simulate_sensitivities(compiled, cruns, q, dirs, rtol=1e-10, atol=1e-14)
    out = coarse.outputs[0]
    assert out[-1, compiled.n_species + 4] > 0 and out[-1, compiled.n_species + 2] > 0  # both titrants dosed
    assert deviation(coarse, molecules) <= TARGET
    assert deviation(coarse, titrants) <= 1e-3
    assert deviation(fine, titrants) <= 1e-5
