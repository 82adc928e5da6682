"""Round trip: campaign built in code -> template layout -> import -> same numbers.

Source of truth: the campaign built in data_factory.py (an analytic identity:
writing and reading must reproduce every number up to float rounding of the
unit conversions, ~1e-12 relative).
"""

from __future__ import annotations

import hashlib

import numpy as np
import pytest

from data_factory import build_campaign
from speciakin.data import load_campaign, write_campaign


def _close(a, b):
    np.testing.assert_allclose(np.asarray(a, float), np.asarray(b, float), rtol=1e-12, atol=1e-9, equal_nan=True)


@pytest.fixture(params=["xlsx", "csv"])
def written(request, tmp_path):
    original = build_campaign()
    target = tmp_path / ("campaign.xlsx" if request.param == "xlsx" else "csv")
    write_campaign(original, target)
    return original, target


def test_round_trip_same_numbers(written):
    original, target = written
    loaded = load_campaign(target)
    assert [r.name for r in loaded.runs] == [r.name for r in original.runs]
    assert loaded.basis == "mixed"
    for a, b in zip(original.runs, loaded.runs):
        ra, rb = a.recipe, b.recipe
        assert set(ra.charges) == set(rb.charges)
        _close([ra.charges[k] for k in ra.charges], [rb.charges[k] for k in ra.charges])
        _close(ra.volume, rb.volume)
        _close(ra.end_time, rb.end_time)
        _close(ra.temperature.times, rb.temperature.times)
        _close(ra.temperature.temperatures, rb.temperature.temperatures)
        assert ra.ph.mode == rb.ph.mode and ra.ph.titrant == rb.ph.titrant
        assert ra.ph.setpoint == rb.ph.setpoint
        _close(ra.ph.log_times, rb.ph.log_times)
        _close(ra.ph.log_ph, rb.ph.log_ph)
        assert len(ra.doses) == len(rb.doses)
        for da, db in zip(ra.doses, rb.doses):
            assert da.species == db.species
            _close([da.amount, da.start, da.end, da.volume], [db.amount, db.start, db.end, db.volume])
        _close([w.time for w in ra.withdrawals], [w.time for w in rb.withdrawals])
        _close([w.volume for w in ra.withdrawals], [w.volume for w in rb.withdrawals])
        ha, hb = a.hplc, b.hplc
        _close(ha.time, hb.time)
        assert list(ha.compound) == list(hb.compound)
        assert list(ha.molecule) == list(hb.molecule)
        assert list(ha.kind) == list(hb.kind)
        _close(ha.value, hb.value)
        assert list(ha.censored) == list(hb.censored)
        _close(ha.loq, hb.loq)
        _close(ha.rrf, hb.rrf)
        assert ha.basis == hb.basis
        if a.titrant is None:
            assert b.titrant is None
        else:
            _close(a.titrant.time, b.titrant.time)
            _close(a.titrant.amount, b.titrant.amount)
    # censored values stay censored with their LOQ, never zero
    r1 = loaded.run("R01").hplc
    assert r1.censored.any() and np.all(np.isnan(r1.value[r1.censored]))
    assert np.all(r1.loq[r1.censored] == pytest.approx(0.04))


def test_provenance_hashes_match_files(written):
    _, target = written
    loaded = load_campaign(target)
    assert loaded.provenance
    for src in loaded.provenance:
        data = open(src.path, "rb").read()
        assert src.sha256 == hashlib.sha256(data).hexdigest()
        assert src.size == len(data)


def test_import_does_not_modify_input(written):
    _, target = written
    files = [target] if target.is_file() else sorted(target.glob("*.csv"))
    before = {f: (f.read_bytes(), f.stat().st_mtime_ns) for f in files}
    load_campaign(target)
    assert before == {f: (f.read_bytes(), f.stat().st_mtime_ns) for f in files}


def test_observations_frame_and_to_dict(written):
    import json

    _, target = written
    loaded = load_campaign(target)
    frame = loaded.observations_frame()
    assert len(frame) == sum(len(r.hplc) for r in loaded.runs)
    assert set(frame.columns) >= {"run", "time_s", "compound", "molecule", "kind", "value", "censored", "loq"}
    json.dumps(loaded.to_dict())


def test_campaign_folder_with_workbook(tmp_path):
    write_campaign(build_campaign(), tmp_path / "my run set.xlsx")
    assert [r.name for r in load_campaign(tmp_path).runs] == ["R01", "R02", "R03"]


def test_campaign_folder_with_csv_subfolder(tmp_path):
    write_campaign(build_campaign(), tmp_path / "csv")
    assert len(load_campaign(tmp_path).runs) == 3


def test_report_has_stable_headings(written):
    _, target = written
    text = load_campaign(target).report()
    for heading in ("Campaign", "Sources", "Runs", "Compounds", "Warnings"):
        assert f"\n{heading}\n" in f"\n{text}\n"
    assert "R01" in text and "held" in text
