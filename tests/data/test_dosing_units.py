"""Dosing sheet amounts as masses (with the Compounds sheet's molar mass) and as equivalents of the substrate.

References: amount of substance n = m / M (molar mass M = m / n; IUPAC Green
Book, 3rd ed., 2007, section 2.10); "equivalents" of a reagent in synthesis
= its amount divided by the substrate's amount (common practice).  Each check
compares with the same campaign written in mmol, an analytic conversion.
"""

from __future__ import annotations

import shutil
from pathlib import Path

from data_factory import csv_campaign, edit, read_csv, rename_header, write_csv
from speciakin.data import check_campaign, load_campaign

#: Invented molar mass [g/mol] of the dosed reagent E (a Compounds row of its own: HPLC does not report it).
E_MOLAR_MASS = 102.09


def _doses(campaign):
    return {r.name: [(d.species, d.amount, d.start, d.end, d.volume) for d in r.recipe.doses] for r in campaign.runs}


def _add_compound_row(folder: Path, compound: str, molecule: str, molar_mass: float) -> None:
    rows = read_csv(folder, "compounds.csv")
    header = rows[0]
    row = [""] * len(header)
    row[header.index("compound")] = compound
    row[header.index("model molecule")] = molecule
    row[header.index("molar mass [g/mol]")] = repr(molar_mass)
    row[header.index("substrate units")] = "0"
    write_csv(folder, "compounds.csv", rows + [row])


def _scale_dosing(folder: Path, factor) -> None:
    """Multiply every dosed amount by ``factor(row)`` (row = the dosing row as a dict)."""
    rows = read_csv(folder, "dosing.csv")
    j = rows[0].index("amount [mmol]")
    for r in rows[1:]:
        r[j] = repr(float(r[j]) * factor(dict(zip(rows[0], r))))
    write_csv(folder, "dosing.csv", rows)


def test_dosed_mass_is_divided_by_the_compounds_molar_mass(tmp_path):
    plain_folder = csv_campaign(tmp_path / "a")
    _add_compound_row(plain_folder, "E (not on HPLC)", "E", E_MOLAR_MASS)
    plain = load_campaign(plain_folder)
    folder = csv_campaign(tmp_path / "b")
    _add_compound_row(folder, "E (not on HPLC)", "E", E_MOLAR_MASS)
    _scale_dosing(folder, lambda row: E_MOLAR_MASS / 1000.0)   # mmol x g/mol = mg; / 1000 = g
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [g]")
    massed = load_campaign(folder)
    want, got = _doses(plain), _doses(massed)
    assert want.keys() == got.keys() and want["R01"]
    for run in want:
        for (s0, a0, *rest0), (s1, a1, *rest1) in zip(want[run], got[run]):
            assert s0 == s1 and rest0 == rest1
            assert abs(a1 - a0) <= 1e-12 * a0          # n = m / M


def test_dosed_mass_in_mg(tmp_path):
    folder = csv_campaign(tmp_path)
    _add_compound_row(folder, "E (not on HPLC)", "E", E_MOLAR_MASS)
    edit(folder, "dosing.csv", 2, "amount [mmol]", "1123")
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [mg]")
    dose = load_campaign(folder).run("R01").recipe.doses[0]
    assert abs(dose.amount - 1.123 / E_MOLAR_MASS) <= 1e-15     # 1123 mg / 102.09 g/mol = 11.0001 mmol


def test_dosed_mass_without_molar_mass_is_a_located_error(tmp_path):
    folder = csv_campaign(tmp_path)           # E has no Compounds row, so no molar mass
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [mg]")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "molar mass of E" in p.message]
    assert len(bad) == 1, report.report()
    loc = bad[0].location
    assert loc.sheet == "dosing" or loc.file.endswith("dosing.csv")
    assert loc.row == 2 and loc.column == "C (amount [mg])"
    assert "Compounds sheet" in bad[0].expected


def test_dosed_equivalents_of_the_substrate(tmp_path):
    plain = load_campaign(csv_campaign(tmp_path / "a"))
    folder = csv_campaign(tmp_path / "b")
    substrate = {r.name: r.recipe.charges["S"] for r in plain.runs}   # S: the first 'initial' column
    _scale_dosing(folder, lambda row: 1e-3 / substrate[row["run"]])  # mmol -> mol -> equivalents
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [eq]")
    eq = load_campaign(folder)
    assert eq.extra["equivalents_of"] == "S"
    for run, doses in _doses(plain).items():
        for (s0, a0, *rest0), (s1, a1, *rest1) in zip(doses, _doses(eq)[run]):
            assert s0 == s1 and rest0 == rest1 and abs(a1 - a0) <= 1e-12 * a0
    # 1.1 eq of a run started with 10 mmol of S is 11 mmol
    edit(folder, "dosing.csv", 2, "amount [eq]", "1.1")
    assert abs(load_campaign(folder).run("R01").recipe.doses[0].amount - 0.011) <= 1e-15
    # the words of the model file are accepted in the header too
    rename_header(folder, "dosing.csv", "amount [eq]", "amount (equiv)")
    assert abs(load_campaign(folder).run("R01").recipe.doses[0].amount - 0.011) <= 1e-15


def test_equivalents_without_the_runs_substrate_amount_are_located_errors(tmp_path):
    folder = csv_campaign(tmp_path)
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [eq]")
    edit(folder, "dosing.csv", 2, "amount [eq]", "1.1")
    edit(folder, "runs.csv", 2, "initial S [mmol]", "")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "initial amount of the substrate S" in p.message]
    assert len(bad) == 1 and bad[0].location.row == 2 and bad[0].location.column == "C (amount [eq])"


def test_equivalents_need_an_initial_column(tmp_path):
    folder = csv_campaign(tmp_path)
    rows = read_csv(folder, "runs.csv")
    keep = [j for j, h in enumerate(rows[0]) if not h.startswith("initial ")]
    write_csv(folder, "runs.csv", [[r[j] for j in keep] for r in rows])
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [eq]")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "no 'initial' column" in p.message]
    assert len(bad) == 1 and bad[0].location.row == 1 and bad[0].location.column == "C (amount [eq])"


def test_unknown_dosing_unit_lists_masses_and_equivalents(tmp_path):
    folder = csv_campaign(tmp_path)
    rename_header(folder, "dosing.csv", "amount [mmol]", "amount [furlong]")
    bad = [p for p in check_campaign(folder).errors if p.code == "unknown_unit"]
    assert len(bad) == 1 and all(u in bad[0].expected for u in ("mmol", "mg", "eq"))


def test_equivalents_refer_to_the_models_substrate(tmp_path):
    # the invented demo: S is the model's substrate and the first 'initial' column of its Runs sheet
    from speciakin.demo import demo_dir

    demo = demo_dir()
    folder = tmp_path / "demo"
    folder.mkdir()
    shutil.copy(demo / "model.toml", folder / "model.toml")
    from speciakin.data import write_campaign

    plain = load_campaign(demo / "campaign.xlsx")
    write_campaign(plain, folder / "csv")
    substrate = {r.name: r.recipe.charges["S"] for r in plain.runs}
    _scale_dosing(folder / "csv", lambda row: 1e-3 / substrate[row["run"]])
    rename_header(folder / "csv", "dosing.csv", "amount [mmol]", "amount [eq]")
    report = check_campaign(folder / "csv", model=folder / "model.toml")
    assert report.ok, report.report()
    eq = load_campaign(folder / "csv")
    for run, doses in _doses(plain).items():
        for (_, a0, *_r0), (_, a1, *_r1) in zip(doses, _doses(eq)[run]):
            assert abs(a1 - a0) <= 1e-12 * a0
    # put the chloride's 'initial' column first: equivalents would refer to Cl-, not the substrate S
    rows = read_csv(folder / "csv", "runs.csv")
    i, j = rows[0].index("initial S [mmol]"), rows[0].index("initial Cl- [mmol]")
    for r in rows:
        r[i], r[j] = r[j], r[i]
    write_csv(folder / "csv", "runs.csv", rows)
    report = check_campaign(folder / "csv", model=folder / "model.toml")
    bad = [p for p in report.errors if p.code == "equivalents_of"]
    assert len(bad) == 1 and bad[0].location.column == "C (amount [eq])" and "S" in bad[0].expected


def test_run_without_any_measured_molecule_is_a_located_error(tmp_path):
    # R01 measures S and its products by area%; with no S at the start (and none dosed) every modelled
    # area% is 0 / 0, which the fit could only meet with NaN: an error at the blank initial cell instead
    folder = csv_campaign(tmp_path)
    for value in ("", "0"):
        edit(folder, "runs.csv", 2, "initial S [mmol]", value)
        bad = [p for p in check_campaign(folder).errors if p.code == "nothing_measured"]
        assert len(bad) == 1, value
        assert bad[0].location.row == 2 and bad[0].location.column.endswith("(initial S [mmol])")
    # a tiny amount is still an amount: no such error
    edit(folder, "runs.csv", 2, "initial S [mmol]", "1e-9")
    assert not [p for p in check_campaign(folder).errors if p.code == "nothing_measured"]
