"""One fixture per warning class; warnings never stop the import (exit 0).

Expected locations come from the invented campaign of data_factory.py in the
template layout (header = row 1).  HPLC rows: R01 rows 2-25 (6 samples x 4
compounds), R02 rows 26-45, R03 rows 46-57 (concentrations [mol/L]).
Thresholds: see speciakin.data.validate (common practice, documented there).
"""

from __future__ import annotations

import pytest

from data_factory import csv_campaign, delete_rows, edit, read_csv, write_csv
from speciakin.data import check_campaign, load_campaign
from speciakin.data.validate import MASS_BALANCE_TOLERANCE


@pytest.fixture
def folder(tmp_path):
    return csv_campaign(tmp_path)


def _warning(folder, code, **kw):
    report = check_campaign(folder, **kw)
    assert report.ok, report.report()
    assert report.exit_code == 0
    found = [p for p in report.warnings if p.code == code]
    assert found, f"no {code} warning in:\n{report.report()}"
    # the same warning travels with the imported campaign
    assert code in {p.code for p in load_campaign(folder).problems}
    return found[0]


def _at(p, sheet, row, column):
    assert (p.location.sheet, p.location.row, p.location.column) == (sheet, row, column)


def test_no_warnings_on_clean_campaign(folder):
    report = check_campaign(folder)
    assert report.warnings == [], report.report()


def test_times_not_increasing(folder):
    edit(folder, "probe_log.csv", 10, "time [min]", "0.5")
    _at(_warning(folder, "time_order"), "probe_log", 10, "B (time [min])")


def test_duplicate_sample_time(folder):
    # row 10 is S-peak of R01 at 15 min; 5 min is already sampled in row 6
    edit(folder, "hplc_results.csv", 10, "time [min]", "5.0")
    _at(_warning(folder, "duplicate_time"), "hplc_results", 10, "B (time [min])")


def test_sample_after_run_end(folder):
    edit(folder, "runs.csv", 2, "duration [min]", "60")
    edit(folder, "runs.csv", 2, "sample volume [mL]", "")  # no liquid removed: the late sample is only noted
    p = _warning(folder, "after_end")
    _at(p, "hplc_results", 22, "B (time [min])")   # first value at 120 min
    assert p.value == pytest.approx(120.0)


def test_sample_after_run_end_with_sample_volume_is_an_error(folder):
    """A sample that removes liquid after the run ends cannot be simulated: an error at the
    HPLC cell (before, the simulator reported it at 'run.R01.withdrawals[5].time')."""
    edit(folder, "runs.csv", 2, "duration [min]", "60")
    report = check_campaign(folder)
    (p,) = [p for p in report.errors if p.code == "after_end"]
    _at(p, "hplc_results", 22, "B (time [min])")
    assert "time unit" in p.describe()


def test_area_percent_not_summing_to_100(folder):
    rows = read_csv(folder, "hplc_results.csv")
    old = float(rows[5][4])   # row 6: R01, 5 min, S-peak
    edit(folder, "hplc_results.csv", 6, "value", repr(old + 10.0))
    p = _warning(folder, "area_sum")
    _at(p, "hplc_results", 6, "E (value)")
    assert p.value == pytest.approx(110.0, abs=1e-6)


def test_area_percent_within_tolerance_is_quiet(folder):
    rows = read_csv(folder, "hplc_results.csv")
    edit(folder, "hplc_results.csv", 6, "value", repr(float(rows[5][4]) + 2.5))
    assert "area_sum" not in {p.code for p in check_campaign(folder).warnings}


def test_mass_balance_drift(folder):
    # R03 at 90 min: rows 54-57; P1 (row 55) set to 0 loses ~0.083 of 0.2 mol/L
    edit(folder, "hplc_results.csv", 55, "value", "0")
    p = _warning(folder, "mass_balance")
    _at(p, "hplc_results", 54, "B (time [min])")
    # hand calculation: remaining = 0.2 - 0.2*0.7*(1-exp(-0.9)) -> ratio
    import math
    expected = 100 * (1 - 0.7 * (1 - math.exp(-0.9)))
    assert p.value == pytest.approx(expected, abs=0.01)
    assert abs(p.value / 100 - 1) > MASS_BALANCE_TOLERANCE


def test_ph_log_gap(folder):
    delete_rows(folder, "probe_log.csv", 20, 40)   # 1-min readings; 21 min missing
    p = _warning(folder, "log_gap")
    _at(p, "probe_log", 20, "B (time [min])")


def test_logged_ph_far_from_setpoint(folder):
    edit(folder, "runs.csv", 3, "pH setpoint", "8.0")   # R02 logs pH 7.0-7.3
    p = _warning(folder, "setpoint_deviation")
    _at(p, "probe_log", 2, "C (pH)")


def test_mass_balance_uses_model_moieties(folder):
    from data_factory import drop_column
    from speciakin.chemistry.model import Ion, Model, Molecule

    drop_column(folder, "compounds.csv", "substrate units")
    edit(folder, "hplc_results.csv", 55, "value", "0")
    # without substrate units and without a model the check cannot run
    assert "mass_balance" not in {p.code for p in check_campaign(folder).warnings}
    core = {"core": 1}
    model = Model("invented", (Molecule("S", role="substrate", moieties=core), Molecule("E", moieties={"acyl": 2}),
                               Molecule("P1", moieties=core), Molecule("P2", moieties=core),
                               Molecule("P12", moieties=core), Molecule("A")), ions=(Ion("Na+", 1),))
    report = check_campaign(folder, model=model)
    p = [x for x in report.warnings if x.code == "mass_balance"][0]
    _at(p, "hplc_results", 54, "B (time [min])")


def test_every_sample_early_in_a_long_run(folder):
    """R01 samples up to 120 min; stated as a 10000 min run, every sample falls in its first 1.2 %
    (below consistency.SAMPLING_SPAN_FRACTION, 5 %): the signature of a wrong time unit."""
    edit(folder, "runs.csv", 2, "duration [min]", "10000")
    p = _warning(folder, "sampling_span")
    assert (p.location.sheet, p.location.column) == ("hplc_results", "B (time [min])")
    assert p.value == pytest.approx(120.0) and "within the first 120 min of the run's 10000 min" in p.message


@pytest.mark.parametrize("unit, factor", [("h", 1 / 60.0), ("s", 60.0)])
def test_a_late_sample_is_told_in_the_unit_its_cell_is_written_in(folder, unit, factor):
    """The value a message names is the one the cell shows: with the HPLC times in hours (or seconds),
    a sample at 120 min reads 2 (or 7200), and the expected time names that unit."""
    rows = read_csv(folder, "hplc_results.csv")
    col = rows[0].index("time [min]")
    rows[0][col] = f"time [{unit}]"
    for row in rows[1:]:
        row[col] = repr(float(row[col]) * factor)
    write_csv(folder, "hplc_results.csv", rows)
    edit(folder, "runs.csv", 2, "duration [min]", "60")
    edit(folder, "runs.csv", 2, "sample volume [mL]", "")  # no liquid removed: the late sample is only noted
    p = _warning(folder, "after_end")
    _at(p, "hplc_results", 22, f"B (time [{unit}])")
    assert p.value == pytest.approx(120.0 * factor)
    assert f"[{unit}]" in p.expected
