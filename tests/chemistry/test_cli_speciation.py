"""The `speciate` and `titrate` commands: outputs, summaries, errors."""

import numpy as np
import pandas as pd
import pytest

from speciakin.cli.main import main

SITES = ["--site", "N1:base:9.3", "--site", "N2:base:4.6", "--interaction", "N1:N2:0.4"]


def test_speciate_csv_and_plot(tmp_path, capsys):
    out, plot = tmp_path / "table.csv", tmp_path / "plot.png"
    code = main(["speciate", *SITES, "--ph-range", "0:14:0.1", "--out", str(out), "--plot", str(plot)])
    assert code == 0
    text = capsys.readouterr().out
    assert "macroscopic pKa: 4.20, 9.30" in text
    frame = pd.read_csv(out)
    assert frame.shape[0] == 141
    assert frame["pH"].iloc[-1] == pytest.approx(14.0)
    np.testing.assert_allclose(frame[[c for c in frame.columns if c.startswith("x[")]].sum(axis=1), 1.0, atol=1e-9)
    assert plot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_speciate_xlsx_with_temperature(tmp_path, capsys):
    out = tmp_path / "table.xlsx"
    code = main(["speciate", "--site", "N1:base:9.3:45", "--site", "O:acid:10.1", "--temperature", "40 C",
                 "--ph-range=-1:15:0.5", "--out", str(out)])
    assert code == 0
    frame = pd.read_excel(out)
    assert frame.shape[0] == 33 and "x[N1H+ OH]" in frame.columns
    assert "temperature 40.00 C" in capsys.readouterr().out


@pytest.mark.parametrize("args, fragment", [
    (["--site", "N1:amine:9.3"], "unknown site kind (value 'amine'"),
    (["--site", "N1:base:high"], "not a number (value 'high'"),
    (["--site", "N1:base:9.3", "--site", "N1:base:4.0"], "duplicate site name (value 'N1'"),
    (["--site", "N1:base:9.3", "--ph-range", "14:0:0.1"], "pH range is in the wrong order"),
    (["--site", "N1:base:9.3", "--ph-range", "0:14:-1"], "pH step must be positive"),
    (["--site", "N1:base:9.3", "--interaction", "N1:N7:0.3"], "interaction names an unknown site"),
    (["--site", "N1:base:9.3", "--temperature", "hot"], "key '--temperature'"),
    (["--site", "N1:base:9.3", "--out", "table.txt"], "unknown table format"),
    ([], "no site given"),
])
def test_speciate_bad_input(args, fragment, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    code = main(["speciate", *args])
    err = capsys.readouterr().err
    assert code == 2
    assert fragment in err
    assert "Traceback" not in err
    assert len(err.strip().splitlines()) == 1
    assert not list(tmp_path.iterdir())


TITRATION = ["--concentration", "10 mM", "--volume", "50 mL", "--titrant", "acid:0.1", "--to", "20 mL"]


def test_titrate_outputs(tmp_path, capsys):
    out, plot = tmp_path / "curve.csv", tmp_path / "curve.png"
    code = main(["titrate", *SITES, *TITRATION, "--points", "201", "--out", str(out), "--plot", str(plot)])
    assert code == 0
    text = capsys.readouterr().out
    assert "steepest points" in text and "5.000 mL" in text
    frame = pd.read_csv(out)
    assert frame.shape[0] == 201
    assert frame["titrant volume [mL]"].iloc[-1] == pytest.approx(20.0)
    assert np.all(np.diff(frame["pH"]) < 0)
    assert plot.stat().st_size > 1000


def test_titrate_start_charge_and_davies(tmp_path):
    # dihydrochloride salt (2 Cl- per molecule) titrated with base
    code = main(["titrate", *SITES, "--concentration", "10 mM", "--volume", "50 mL", "--titrant", "base:100 mM",
                 "--to", "12 mL", "--start-charge", "-20 mM", "--activity", "davies",
                 "--out", str(tmp_path / "c.xlsx")])
    assert code == 0
    frame = pd.read_excel(tmp_path / "c.xlsx")
    assert frame["pH"].iloc[0] < 3.5 and frame["pH"].iloc[-1] > 9


@pytest.mark.parametrize("args, fragment", [
    (["--concentration", "-5 mM"], "concentration must be"),
    (["--titrant", "alkali:0.1"], "unknown titrant kind"),
    (["--titrant", "base"], "titrant needs KIND:CONC"),
    (["--volume", "50 parsecs"], "key '--volume'"),
    (["--activity", "extended"], "unknown activity option"),
    (["--points", "1"], "number of points"),
])
def test_titrate_bad_input(args, fragment, capsys):
    base = dict(zip(TITRATION[::2], TITRATION[1::2]))
    for key, value in zip(args[::2], args[1::2]):
        base[key] = value
    argv = ["titrate", *SITES] + [x for kv in base.items() for x in kv]
    if "--points" in args:
        argv += ["--points", args[args.index("--points") + 1]]
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2
    assert fragment in err
    assert "Traceback" not in err


def test_speciate_from_model_file(tmp_path, capsys):
    from speciakin.chemistry import modelfile
    from speciakin.chemistry.model import Model, Molecule, Quantity, Site

    model = Model("demo", (Molecule("S", (Site("N1", "base", Quantity(9.3, "", "pKa.S.N1")),
                                          Site("N2", "base", Quantity(4.6, "", "pKa.S.N2")))),))
    path = tmp_path / "model.toml"
    path.write_text(modelfile.dump_model(model))
    before = path.read_bytes()
    code = main(["speciate", "--model", str(path), "--molecule", "S", "--out", str(tmp_path / "t.csv")])
    assert code == 0, capsys.readouterr().err
    assert "S: 2 site(s)" in capsys.readouterr().out
    assert path.read_bytes() == before  # input never modified
    code = main(["speciate", "--model", str(path), "--molecule", "T"])
    assert code == 2
    assert "molecule not in the model" in capsys.readouterr().err


def test_model_without_molecule_takes_the_substrate(tmp_path, capsys):
    from speciakin.chemistry import modelfile
    from speciakin.chemistry.model import Model, Molecule, Quantity, Site

    sites = (Site("N1", "base", Quantity(9.3, "", "pKa.S.N1")),)
    path = tmp_path / "model.toml"
    path.write_text(modelfile.dump_model(Model("m", (Molecule("R", ()), Molecule("S", sites, role="substrate")))))
    assert main(["speciate", "--model", str(path)]) == 0
    said = capsys.readouterr().out
    assert "molecule: S (the model's substrate" in said and "S: 1 site(s)" in said
    # without a substrate the choice is not guessed: a located error naming the molecules
    path.write_text(modelfile.dump_model(Model("m", (Molecule("R", ()), Molecule("S", sites)))))
    assert main(["speciate", "--model", str(path)]) == 2
    err = capsys.readouterr().err
    assert "needs a model with one substrate" in err and "R, S" in err and "Traceback" not in err


@pytest.mark.parametrize("command", [["speciate", *SITES], ["titrate", *SITES, *TITRATION]])
def test_an_existing_output_file_is_never_overwritten(command, tmp_path, capsys):
    for option, name in (("--out", "table.csv"), ("--plot", "plot.png")):
        earlier = tmp_path / name
        earlier.write_bytes(b"an earlier result")
        assert main([*command, option, str(earlier)]) == 2
        err = capsys.readouterr().err
        assert "already exists; nothing is overwritten" in err and str(earlier) in err
        assert earlier.read_bytes() == b"an earlier result"
        earlier.unlink()


def test_no_output_asked_for_says_how(capsys):
    assert main(["speciate", *SITES]) == 0
    assert "no file written: add --plot FILE.png" in capsys.readouterr().out
