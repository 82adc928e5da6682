"""``speciakin simulate`` end to end on the invented example model."""

from __future__ import annotations

from pathlib import Path

import pytest

from speciakin.cli.main import main

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "two_amines.toml"


@pytest.fixture(scope="module")
def example():
    if not EXAMPLE.exists():
        pytest.skip("examples/two_amines.toml not present")
    pytest.importorskip("speciakin.chemistry.modelfile")
    return EXAMPLE


def test_simulate_writes_table_and_plots(example, tmp_path, capsys):
    code = main(["simulate", str(example), "--run", "held_pH7", "--times", "0:60:10 min", "--out", str(tmp_path)])
    assert code == 0
    import pandas as pd

    frame = pd.read_csv(tmp_path / "simulation.csv")
    assert list(frame["time [min]"]) == [0, 10, 20, 30, 40, 50, 60]
    assert "pH" in frame.columns and "titrant [mol]" in frame.columns
    for name in ("concentrations_held_pH7.png", "ph.png", "titrant.png"):
        assert (tmp_path / name).stat().st_size > 1000
    assert "held_pH7" in capsys.readouterr().out


def test_unknown_run_is_exit_2(example, tmp_path, capsys):
    assert main(["simulate", str(example), "--run", "nope", "--out", str(tmp_path)]) == 2
    assert "unknown run" in capsys.readouterr().err


def test_bad_times_is_exit_2(example, tmp_path, capsys):
    assert main(["simulate", str(example), "--times", "0-180 min", "--out", str(tmp_path)]) == 2
    assert "START:STOP:STEP" in capsys.readouterr().err


def test_missing_model_is_exit_2(tmp_path, capsys):
    assert main(["simulate", str(tmp_path / "none.toml"), "--out", str(tmp_path)]) == 2
    assert "not found" in capsys.readouterr().err
