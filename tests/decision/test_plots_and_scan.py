"""Figures render and the process-file scan settings reach compute_window."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from decision_synthetic import NAMES, TRUTH, outcome_fn
from speciakin.decision import (
    Specification,
    compute_window,
    load_process,
    process_scan_arguments,
)
from speciakin.decision.plots import plot_map, plot_outcomes, plot_probability
from speciakin.palette import OKABE_ITO

ROOT = Path(__file__).resolve().parents[2]
SPECS = [Specification("percent", ("PB",), ">=", 90.0), Specification("percent", ("S",), "<=", 1.0)]


def test_plots_write_png_files(tmp_path):
    rng = np.random.default_rng(8)
    draws = TRUTH + 0.05 * rng.standard_normal((60, TRUTH.size))
    grid = np.round(np.arange(2.0, 8.0001, 0.1), 10)
    result = compute_window(outcome_fn, draws, grid, SPECS, factor_grid=[2.3, 2.6, 2.9],
                            outcome_names=NAMES, factor_name="log10 tau", factor_unit="-")
    for function, name in ((plot_probability, "p.png"), (plot_outcomes, "o.png"), (plot_map, "m.png")):
        path = function(result, tmp_path / name)
        data = path.read_bytes()
        assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]
    one = compute_window(outcome_fn, draws, grid, SPECS, outcome_names=NAMES)
    with pytest.raises(ValueError, match="no second factor"):
        plot_map(one, tmp_path / "none.png")
    assert len(set(OKABE_ITO.values())) == 8


def test_process_scan_arguments_from_example():
    process = load_process(ROOT / "examples" / "process_two_amines.toml")
    kwargs = process_scan_arguments(process)
    np.testing.assert_allclose(kwargs["ph_grid"], np.arange(6.0, 13.0001, 0.25))
    assert kwargs["level"] == 0.95 and kwargs["tolerance"] == 0.3
    assert kwargs["factor_grid"] == [1.0, 1.025, 1.05, 1.075, 1.1]
    assert kwargs["factor_unit"] == "eq" and kwargs["nominal_factor"] == 1.05
    assert len(kwargs["specs"]) == 4


def test_temperature_factor_shown_in_celsius(tmp_path):
    text = (ROOT / "examples" / "process_two_amines.toml").read_text(encoding="utf-8")
    text = text.replace('kind = "equivalents"\nvalues = ["1.00 eq", "1.025 eq", "1.05 eq", "1.075 eq", "1.10 eq"]',
                        'kind = "temperature"\nvalues = ["10 C", "20 C", "30 C"]')
    path = tmp_path / "p.toml"
    path.write_text(text, encoding="utf-8")
    kwargs = process_scan_arguments(load_process(path))
    kwargs["specs"] = SPECS
    kwargs["ph_grid"] = np.arange(2.0, 8.0001, 0.25)
    seen = []

    def fn(draws, ph, temperature):
        seen.append(temperature)
        return outcome_fn(draws, ph)
    result = compute_window(fn, TRUTH[None, :], outcome_names=NAMES, **kwargs)
    # internal [K] to the simulator: the scan once per value, then the bisection of the edges
    assert seen[:3] == pytest.approx([283.15, 293.15, 303.15])
    assert {round(t, 6) for t in seen} == {283.15, 293.15, 303.15}
    np.testing.assert_allclose(result.factor_values, [10.0, 20.0, 30.0])   # shown in [C]
    assert result.factor_unit == "C" and result.nominal_factor == pytest.approx(20.0)
