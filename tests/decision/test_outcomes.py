"""Outcome tables: moiety percent by hand, bands against numpy's quantile."""

from __future__ import annotations

import numpy as np
import pytest

from speciakin.chemistry.model import Model, Molecule
from speciakin.decision.outcomes import default_moiety, moiety_counts, moiety_percent, outcome_bands


def test_moiety_percent_by_hand():
    # 0.05 mol substrate (1 core each) charged; at the end 0.004 mol S,
    # 0.040 mol mono product, 0.003 mol double product (1 core each) and a
    # dimer with 2 cores (0.0015 mol): 8 %, 80 %, 6 %, 6 %.
    amounts = np.array([0.004, 0.040, 0.003, 0.0015])
    out = moiety_percent(amounts, [1, 1, 1, 2], 0.05 * 1)
    np.testing.assert_allclose(out, [8.0, 80.0, 6.0, 6.0])
    assert out.sum() == pytest.approx(100.0)
    with pytest.raises(ValueError, match="charged"):
        moiety_percent(amounts, [1, 1, 1, 2], 0.0)
    with pytest.raises(ValueError, match="counts has"):
        moiety_percent(amounts, [1, 1], 0.05)


def test_moiety_counts_and_default():
    model = Model("m", (Molecule("S", moieties={"core": 1}), Molecule("E", moieties={"acyl": 1}),
                        Molecule("P", moieties={"core": 1, "acyl": 1}),
                        Molecule("D", moieties={"core": 1, "acyl": 2})))
    assert moiety_counts(model, "core") == {"S": 1.0, "P": 1.0, "D": 1.0}
    assert default_moiety(model, "S") == "core"
    assert default_moiety(model, "P") is None


def test_bands_match_numpy_quantile_and_skip_nan():
    # Reference: numpy.quantile (linear method) on the finite values.
    rng = np.random.default_rng(4)
    values = rng.normal(size=(101, 7, 3))
    bands = outcome_bands(values)
    np.testing.assert_allclose(bands, np.quantile(values, [0.05, 0.5, 0.95], axis=0), rtol=1e-12)
    values[:10, 2, 1] = np.nan
    values[:, 4, 0] = np.inf
    bands = outcome_bands(values)
    np.testing.assert_allclose(bands[:, 2, 1], np.quantile(values[10:, 2, 1], [0.05, 0.5, 0.95]))
    assert np.all(np.isnan(bands[:, 4, 0]))


def test_example_process_simulated_closes_the_mass_balance():
    # Integration with the simulator: the planned runs built by process_runs,
    # simulated at the example model's nominal constants, must account for
    # all of the charged substrate moiety (conservation: outcomes sum to 100 %).
    from pathlib import Path

    from speciakin.decision import load_process, process_runs
    from speciakin.decision.outcomes import process_outcomes

    from speciakin.chemistry import modelfile
    from speciakin.simulation import api

    root = Path(__file__).resolve().parents[2]
    model = modelfile.load_model(root / "examples" / "two_amines.toml")
    process = load_process(root / "examples" / "process_two_amines.toml", model)
    finals: dict[str, list[float]] = {}
    for run in process_runs(process, model, [7.0, 10.0]):
        sim = api.simulate(model, run, times=[0.0, run.end_time])
        for k, name in enumerate(sim.species_names):
            finals.setdefault(name, []).append(float(sim.amounts[-1, k]))
    names, outcomes = process_outcomes({k: np.array(v) for k, v in finals.items()}, model, process)
    assert set(names) == {"S", "P_alkyl", "P_aryl", "P_double"}
    np.testing.assert_allclose(outcomes.sum(axis=-1), 100.0, rtol=1e-5)
    assert np.all(outcomes >= -1e-6)
