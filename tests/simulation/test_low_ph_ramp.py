"""A held pH far below the molecules' pKa values under a temperature log (the bundled INVENTED demo).

The demo model's first run held at pH 1.5 or 2.0 under its logged temperature (0.8 K) used to stop
(a step-size underflow at pH 1.5, 100000 steps at pH 2.0): d zbar/dT of a product whose sites are
all bound there lost about 5e-9 of its size to rounding, and the coefficient cubics of the held-pH
path could not meet their 1e-9 check (docs/simulation.md, Known limitations).  The reference is the
kernel's general right-hand side (a full speciation at every evaluation, no coefficient cubics),
integrated by the forward-sensitivity driver at a tighter tolerance.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import pytest

import speciakin
from speciakin.pipeline import load_inputs, make_objective, resolve_inputs
from speciakin.simulation.api import simulate_batch
from speciakin.simulation.sensitivities import simulate_sensitivities

DEMO = Path(speciakin.__file__).parent / "demo_data"


@pytest.fixture(scope="module")
def demo():
    model, campaign, _ = load_inputs(resolve_inputs(DEMO))
    return model, campaign


@pytest.mark.parametrize("ph", [1.5, 2.0])
def test_held_low_ph_under_the_temperature_log_integrates(demo, ph):
    model, campaign = demo
    first = campaign.runs[0]
    recipe = dataclasses.replace(first.recipe, ph=dataclasses.replace(first.recipe.ph, setpoint=ph))
    assert len(set(recipe.temperature.temperatures)) > 1  # the run's temperature moves
    run = dataclasses.replace(first, recipe=recipe)
    objective = make_objective(model, dataclasses.replace(campaign, runs=(run,)))
    objective.parallel = False
    q, off, fac = objective.kernel_inputs(objective.start[None, :])
    got = simulate_batch(objective.compiled, objective.compiled_runs, q, off, fac, 1e-6, 1e-10, False)
    assert got.status[0, 0] == 0
    directions = np.zeros((1, q.shape[1] + 2))
    ref = simulate_sensitivities(objective.compiled, objective.compiled_runs, q[0], directions, ph_offset=off[0],
                                 amount_factor=fac[0], rtol=1e-9, atol=1e-14, parallel=False)
    assert ref.status[0] == 0
    n = objective.compiled.n_species
    a, b = got.outputs[0, 0][:, :n + 3], ref.outputs[0][:, :n + 3]  # amounts, volume, pH, titrant
    rows = np.isfinite(b[:, 0])
    scale = np.max(np.abs(b[rows, :n]))
    assert np.max(np.abs(a[rows, :n] - b[rows, :n])) <= 1e-6 * scale
    titrant = np.max(np.abs(b[rows, n + 2]))
    assert titrant > 0 and np.max(np.abs(a[rows, n + 2] - b[rows, n + 2])) <= 1e-5 * titrant
