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


# ---- bad pH control input: located errors, exit code 2 (invented model) ----------------------

BAD_INPUT_MODEL = """
[model]
name = "bad_input"

[ions]
"Na+" = 1
"Cl-" = -1

[molecule.A]
role = "substrate"
moieties = { core = 1 }

[[molecule.A.site]]
name = "N"
kind = "base"
pka = 8.5

[molecule.R]
role = "reagent"

[molecule.B]
role = "product"
moieties = { core = 1 }

[step.coupling]
reactants = [{ species = "A", requires = { N = "deprotonated" } }, "R"]
products = { B = 1 }
k = "12 L/(mol*s)"

[run.r1]
volume = "25 mL"
end_time = "30 min"
initial = { A = "INITIAL", R = "0.5 mmol" }
ph = { PH }
"""
HELD = 'mode = "held", setpoint = 6.0, titrant = "Na+", titrant_concentration = "0.5 M"'


def _bad_model(tmp_path, initial="0.5 mmol", ph=HELD) -> str:
    path = tmp_path / "bad.toml"
    path.write_text(BAD_INPUT_MODEL.replace("INITIAL", initial).replace("PH", ph))
    return str(path)


def test_set_point_the_titrant_cannot_reach_is_exit_2(tmp_path, capsys):
    # the free amine at pH 6 needs acid; brought by a base titrant alone, that is impossible
    model = _bad_model(tmp_path, ph=HELD + ', start_adjustment = "titrant"')
    assert main(["simulate", model, "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err
    assert "bad.toml" in err and "key 'run.r1.ph'" in err and "set point pH 6" in err
    assert "opposite titrant" in err and "Traceback" not in err
    # with the acid inside the start volume (the default) the same run simulates
    assert main(["simulate", _bad_model(tmp_path), "--out", str(tmp_path / "ok")]) == 0


def test_negative_start_amount_is_exit_2(tmp_path, capsys):
    assert main(["simulate", _bad_model(tmp_path, initial="-0.5 mmol"), "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "key 'run.r1.initial.A'" in err and "must not be negative" in err and "-0.5 mmol" in err


def test_acid_titrant_without_concentration_is_exit_2(tmp_path, capsys):
    model = _bad_model(tmp_path, ph=HELD + ', opposite_titrant = "Cl-"')
    assert main(["simulate", model, "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "key 'run.r1.ph'" in err and "acid titrant 'Cl-' needs its concentration" in err


def test_renamed_model_file_keys_are_exit_2(tmp_path, capsys):
    path = tmp_path / "old.toml"
    path.write_text(BAD_INPUT_MODEL.replace("initial = { A = \"INITIAL\"", "charges = { A = \"0.5 mmol\"")
                    .replace("PH", HELD))
    assert main(["simulate", str(path), "--out", str(tmp_path)]) == 2
    assert "key 'charges' was renamed to 'initial'" in capsys.readouterr().err


def test_a_folder_holding_files_is_never_written_into(example, tmp_path, capsys):
    earlier = tmp_path / "simulation.csv"
    earlier.write_text("an earlier result")
    assert main(["simulate", str(example), "--run", "held_pH7", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "not empty; nothing is overwritten" in err and str(tmp_path) in err and "Traceback" not in err
    assert earlier.read_text() == "an earlier result"
