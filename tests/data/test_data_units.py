"""Units in column headers are converted on import.

Source: SI definitions (1 h = 3600 s, 1 mL = 1e-3 L, 1 mmol = 1e-3 mol,
T[K] = T[C] + 273.15, 1 mM = 1e-3 mol/L); the campaign of data_factory.py is
written in min / mL / mmol / C / mol/L, then headers and values are rewritten
in other units and must import to the same internal numbers.
"""

from __future__ import annotations

import numpy as np
import pytest

from data_factory import csv_campaign, read_csv, write_csv
from speciakin.data import load_campaign
from speciakin.errors import DataError


def _rescale(folder, name, header, new_header, factor, offset=0.0):
    rows = read_csv(folder, name)
    col = rows[0].index(header)
    rows[0][col] = new_header
    for r in rows[1:]:
        if r[col] not in ("",) and not r[col].startswith("<"):
            r[col] = repr(float(r[col]) * factor + offset)
    write_csv(folder, name, rows)


@pytest.fixture
def pair(tmp_path):
    base = csv_campaign(tmp_path / "a")
    other = csv_campaign(tmp_path / "b")
    return base, other


def test_header_units_convert(pair):
    base, other = pair
    _rescale(other, "hplc_results.csv", "time [min]", "time [h]", 1 / 60)
    _rescale(other, "runs.csv", "start volume [mL]", "start volume [L]", 1e-3)
    _rescale(other, "runs.csv", "temperature [C]", "temperature [K]", 1.0, 273.15)
    _rescale(other, "runs.csv", "initial S [mmol]", "initial S [mol]", 1e-3)
    _rescale(other, "runs.csv", "titrant concentration [mol/L]", "titrant concentration [mM]", 1e3)
    _rescale(other, "hplc_results.csv", "value", "value [mmol/L]", 1.0)  # area% unaffected below
    _rescale(other, "dosing.csv", "amount [mmol]", "amount [umol]", 1e3)
    _rescale(other, "probe_log.csv", "time [min]", "time [s]", 60.0)
    a, b = load_campaign(base), load_campaign(other)
    for ra, rb in zip(a.runs, b.runs):
        np.testing.assert_allclose(ra.hplc.time, rb.hplc.time, rtol=1e-12)
        assert ra.recipe.volume == pytest.approx(rb.recipe.volume, rel=1e-12)
        assert ra.recipe.charges["S"] == pytest.approx(rb.recipe.charges["S"], rel=1e-12)
        np.testing.assert_allclose(ra.recipe.temperature.temperatures, rb.recipe.temperature.temperatures,
                                   rtol=1e-12)
        assert [d.amount for d in ra.recipe.doses] == pytest.approx([d.amount for d in rb.recipe.doses])
        np.testing.assert_allclose(ra.recipe.ph.log_times, rb.recipe.ph.log_times, rtol=1e-12)
    assert a.run("R01").recipe.ph.titrant_concentration == pytest.approx(1.0)
    assert b.run("R01").recipe.ph.titrant_concentration == pytest.approx(1.0)
    # concentration rows (R03) were written as the same numbers but now read in mmol/L
    np.testing.assert_allclose(b.run("R03").hplc.value, a.run("R03").hplc.value * 1e-3, rtol=1e-12)
    # area% rows (R01) are not scaled by a concentration unit
    np.testing.assert_allclose(b.run("R01").hplc.value, a.run("R01").hplc.value, equal_nan=True)


def test_known_values(pair):
    base, _ = pair
    r1 = load_campaign(base).run("R01").recipe
    assert r1.volume == pytest.approx(0.050)          # 50 mL
    assert r1.temperature.temperatures[0] == pytest.approx(293.15)   # 20 C
    assert r1.end_time == pytest.approx(7200.0)       # 120 min
    assert r1.doses[0].end == pytest.approx(1800.0)   # 30 min


def _wide(rows: list[list[str]], extra: dict[str, str] | None = None) -> list[list[str]]:
    """Long HPLC rows -> wide: one column per compound, only the area% runs (R01, R02); ``extra`` adds a
    column with one value in every sample (header -> value)."""
    wide: dict[tuple, dict] = {}
    for run, t, kind, comp, val in rows[1:]:
        if kind == "area%":
            wide.setdefault((run, t, kind), {})[comp] = val
    names = ["S-peak", "P1-peak", "P2-peak", "P12-peak"]
    extra = extra or {}
    out = [["run", "time [min]", "kind"] + names + list(extra)]
    out += [[k[0], k[1], k[2]] + [v.get(n, "") for n in names] + list(extra.values()) for k, v in wide.items()]
    return out


def test_wide_layout_equals_long(tmp_path):
    base = csv_campaign(tmp_path / "a")
    rows = read_csv(base, "hplc_results.csv")
    other = csv_campaign(tmp_path / "b")
    write_csv(other, "hplc_results.csv", _wide(rows))
    long_rows = [r for r in rows if r[2] != "concentration"]
    write_csv(base, "hplc_results.csv", long_rows)
    a, b = load_campaign(base), load_campaign(other)
    assert b.layout == "wide" and a.layout == "long"
    for name in ("R01", "R02"):
        ha, hb = a.run(name).hplc, b.run(name).hplc
        ka = sorted(zip(ha.time, ha.compound, np.nan_to_num(ha.value, nan=-1), ha.censored))
        kb = sorted(zip(hb.time, hb.compound, np.nan_to_num(hb.value, nan=-1), hb.censored))
        assert ka == kb


def test_a_column_of_a_peak_not_modelled_in_the_wide_layout(tmp_path):
    # a wide HPLC sheet with an extra column for an unknown peak, listed in Compounds as 'not modelled':
    # its values are kept apart (HplcData.other), the modelled values are read as without the column
    base = csv_campaign(tmp_path / "a")
    write_csv(base, "hplc_results.csv", _wide(read_csv(base, "hplc_results.csv"), {"RRT 1.3": "0.42"}))
    with pytest.raises(DataError, match="not listed in the Compounds sheet"):   # not listed yet
        load_campaign(base)
    compounds = read_csv(base, "compounds.csv")
    write_csv(base, "compounds.csv", compounds + [["RRT 1.3", "not modelled", "", "", "0.05", ""]])
    c = load_campaign(base)
    assert [x.name for x in c.other_compounds] == ["RRT 1.3"]
    for name in ("R01", "R02"):
        h = c.run(name).hplc
        assert set(h.other.compound) == {"RRT 1.3"} and np.all(h.other.value == 0.42)
        assert "RRT 1.3" not in set(h.compound)
