"""Clock times (10:35) and durations in the time columns of a campaign."""

from __future__ import annotations

import datetime

import numpy as np

from data_factory import csv_campaign, edit, read_csv, write_csv
from speciakin.data import check_campaign, load_campaign
from speciakin.data.clock import clock_seconds

_TIME_HEADERS = {"probe_log.csv": ("time [min]",), "hplc_results.csv": ("time [min]",),
                 "titrant_log.csv": ("time [min]",), "dosing.csv": ("start [min]", "end [min]")}


def _clock(minutes: float, start_s: float = 10 * 3600.0) -> str:
    s = start_s + minutes * 60.0
    return f"{int(s // 3600):02d}:{int(s % 3600 // 60):02d}:{s % 60:09.6f}"


def _to_clock(folder, runs=None):
    for name, headers in _TIME_HEADERS.items():
        rows = read_csv(folder, name)
        for h in headers:
            j = rows[0].index(h)
            for r in rows[1:]:
                if r[j] and (runs is None or r[0] in runs):
                    r[j] = _clock(float(r[j]))
        write_csv(folder, name, rows)


def test_clock_seconds_by_hand():
    # 10:35 = 10 h * 3600 s + 35 min * 60 s = 38100 s (hand arithmetic)
    assert clock_seconds(datetime.time(10, 35)) == 38100.0
    assert clock_seconds("10:35") == 38100.0 and clock_seconds("10:35:30") == 38130.0
    # Excel's day zero is 1899-12-30: 1900-01-01 00:10 is 2 days + 600 s after it
    assert clock_seconds(datetime.datetime(1900, 1, 1, 0, 10)) == 2 * 86400.0 + 600.0
    assert clock_seconds("7.5") is None and clock_seconds(12.0) is None and clock_seconds("25:00") is None


def test_clock_times_read_as_elapsed_from_the_first_clock_time_of_the_run(tmp_path):
    plain = load_campaign(csv_campaign(tmp_path / "a"))
    folder = csv_campaign(tmp_path / "b")
    _to_clock(folder)
    clocked = load_campaign(folder)
    for p, q in zip(plain.runs, clocked.runs):
        # every run of the factory campaign has a reading at 0 min: time zero is 10:00:00
        np.testing.assert_allclose(q.hplc.time, p.hplc.time, atol=1e-6)
        for a, b in ((p.ph_log, q.ph_log), (p.titrant, q.titrant)):
            if a is not None:
                np.testing.assert_allclose(b.time, a.time, atol=1e-6)
        np.testing.assert_allclose([(d.start, d.end) for d in q.recipe.doses],
                                   [(d.start, d.end) for d in p.recipe.doses], atol=1e-6)


def test_a_run_mixing_clock_times_and_numbers_is_a_located_error(tmp_path):
    folder = csv_campaign(tmp_path)
    edit(folder, "hplc_results.csv", 2, "time [min]", "10:00")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "mixes clock times" in p.message]
    # the one clock time is the slip: named at its own cell, and only once (no 'not a number' beside it)
    assert len(bad) == 1 and bad[0].location.sheet is not None and bad[0].location.row == 2
    assert bad[0].location.column.endswith("(time [min])") and bad[0].value == "10:00"
    assert [p for p in report.errors if p.location == bad[0].location] == bad


def test_a_number_among_clock_times_is_the_error_and_the_clock_times_are_read(tmp_path):
    folder = csv_campaign(tmp_path)
    run = read_csv(folder, "hplc_results.csv")[1][0]
    _to_clock(folder, runs={run})
    edit(folder, "hplc_results.csv", 2, "time [min]", "5")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "mixes clock times" in p.message]
    assert len(bad) == 1 and bad[0].location.row == 2 and bad[0].value == "5", report.report()
    assert "a number among" in bad[0].message
    assert not [p for p in report.errors if p.code == "not_numeric"], report.report()


def test_excel_time_and_duration_cells(tmp_path):
    import openpyxl

    from data_factory import build_campaign
    from speciakin.data import write_campaign

    path = tmp_path / "campaign.xlsx"
    write_campaign(build_campaign(), path)
    plain = load_campaign(path)
    wb = openpyxl.load_workbook(path)
    ws = wb["Probe log"]
    header = [c.value for c in ws[1]]
    t, r = header.index("time [min]") + 1, header.index("run") + 1
    run = ws.cell(2, r).value
    rows = [i for i in range(2, ws.max_row + 1) if ws.cell(i, r).value == run]
    # every time cell of that run in every sheet becomes a clock time 9:00 + elapsed minutes
    for sheet, columns in (("Probe log", ("time [min]",)), ("HPLC results", ("time [min]",)),
                           ("Titrant log", ("time [min]",)), ("Dosing", ("start [min]", "end [min]"))):
        s = wb[sheet]
        head = [c.value for c in s[1]]
        for name in columns:
            j = head.index(name) + 1
            for i in range(2, s.max_row + 1):
                if s.cell(i, head.index("run") + 1).value == run and s.cell(i, j).value is not None:
                    minutes = float(s.cell(i, j).value)
                    s.cell(i, j).value = (datetime.datetime(2026, 3, 4, 9, 0) + datetime.timedelta(minutes=minutes))
    # another run's first probe time as an Excel duration of 0:00 (the same as 0 min)
    other = [i for i in range(2, ws.max_row + 1) if ws.cell(i, r).value not in (run, None)]
    if other:
        ws.cell(other[0], t).value = datetime.timedelta(minutes=float(ws.cell(other[0], t).value))
    wb.save(path)
    clocked = load_campaign(path)
    assert rows
    for p, q in zip(plain.runs, clocked.runs):
        np.testing.assert_allclose(q.hplc.time, p.hplc.time, atol=1e-3)
        if p.ph_log is not None:
            np.testing.assert_allclose(q.ph_log.time, p.ph_log.time, atol=1e-3)


def test_initial_amount_as_mass_with_the_compounds_molar_mass(tmp_path):
    from data_factory import rename_header

    plain = load_campaign(csv_campaign(tmp_path / "a"))
    folder = csv_campaign(tmp_path / "b")
    rows = read_csv(folder, "compounds.csv")
    molar_mass = {r[1]: float(r[3]) for r in rows[1:]}["S"]  # columns: compound, model molecule, RRF, molar mass
    rows = read_csv(folder, "runs.csv")
    j = rows[0].index("initial S [mmol]")
    for r in rows[1:]:
        if r[j]:
            r[j] = repr(float(r[j]) * molar_mass)  # mmol x g/mol = mg
    write_csv(folder, "runs.csv", rows)
    rename_header(folder, "runs.csv", "initial S [mmol]", "initial S [mg]")
    massed = load_campaign(folder)
    for p, q in zip(plain.runs, massed.runs):
        assert abs(q.recipe.charges["S"] - p.recipe.charges["S"]) <= 1e-12 * p.recipe.charges["S"]


def test_initial_mass_without_molar_mass_is_a_located_error(tmp_path):
    from data_factory import rename_header

    folder = csv_campaign(tmp_path)
    rename_header(folder, "runs.csv", "initial E [mmol]", "initial E [mg]")
    report = check_campaign(folder)
    bad = [p for p in report.errors if "molar mass of E" in p.message]
    assert len(bad) == 1 and bad[0].location.row == 1 and bad[0].location.column.endswith("(initial E [mg])")
