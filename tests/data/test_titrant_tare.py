"""Titrant readings slightly below zero (a tared burette) are data; implausible ones are refused."""

from __future__ import annotations

import pytest

from data_factory import csv_campaign, read_csv, write_csv
from speciakin.data import load_campaign
from speciakin.errors import InputError


def _first_reading(folder, volume: str, amount: str) -> None:
    rows = read_csv(folder, "titrant_log.csv")
    rows[1][2], rows[1][3] = volume, amount
    write_csv(folder, "titrant_log.csv", rows)


def test_tared_reading_near_zero_is_kept(tmp_path):
    folder = csv_campaign(tmp_path / "a")
    _first_reading(folder, "-0.04", "-0.04")            # a tared reading of -0.04 mL (1 M titrant)
    log = load_campaign(folder).run("R01").titrant
    assert log.amount[0] == pytest.approx(-0.04e-3)


def test_implausible_negative_reading_is_refused(tmp_path):
    folder = csv_campaign(tmp_path / "a")
    _first_reading(folder, "-3", "-3")
    with pytest.raises(InputError) as info:
        load_campaign(folder)
    message = str(info.value)
    assert "titrant_log.csv" in message and "row 2" in message and "out of range" in message and "-0.5" in message
