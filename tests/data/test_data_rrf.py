"""Area% -> mole fractions through relative response factors.

Source: the standard response-factor correction
(Snyder, Kirkland and Dolan, "Introduction to Modern Liquid Chromatography",
3rd ed., 2010, ch. 11): mole fraction_i = (A_i / RRF_i) / sum_j (A_j / RRF_j).
The expected numbers are worked by hand in the comments.
"""

from __future__ import annotations

import numpy as np
import pytest

from data_factory import csv_campaign, write_csv
from speciakin.data import load_campaign, mole_fractions_from_signals


def test_hand_calculation():
    # areas 60, 30, 10 area%; RRF 1.0, 1.5, 0.5
    # A/RRF = 60, 20, 20 -> total 100 -> x = 0.6, 0.2, 0.2
    x = mole_fractions_from_signals(np.array([60.0, 30.0, 10.0]), np.array([1.0, 1.5, 0.5]))
    np.testing.assert_allclose(x, [0.6, 0.2, 0.2], rtol=1e-15)


def test_equal_rrf_gives_area_fraction():
    # RRF all 1: mole fraction = area / total area = 0.25, 0.75
    x = mole_fractions_from_signals(np.array([25.0, 75.0]), np.array([1.0, 1.0]))
    np.testing.assert_allclose(x, [0.25, 0.75])


def test_no_signal_gives_nan():
    assert np.all(np.isnan(mole_fractions_from_signals(np.zeros(3), np.ones(3))))


def test_imported_sample_mole_fractions(tmp_path):
    folder = csv_campaign(tmp_path)
    # one run, one sample: area% 50 / 30 / 20 / <LOQ with RRF 1.0 / 1.25 / 0.8 / 1.1
    # A/RRF = 50, 24, 25, 0 -> total 99 -> x = 50/99, 24/99, 25/99, 0
    rows = [["run", "time [min]", "kind", "compound", "value"],
            ["R01", "0", "area%", "S-peak", "50"], ["R01", "0", "area%", "P1-peak", "30"],
            ["R01", "0", "area%", "P2-peak", "20"], ["R01", "0", "area%", "P12-peak", "<LOQ"]]
    write_csv(folder, "hplc_results.csv", rows)
    h = load_campaign(folder).run("R01").hplc
    x = h.mole_fractions(0)
    assert x == pytest.approx({"S-peak": 50 / 99, "P1-peak": 24 / 99, "P2-peak": 25 / 99, "P12-peak": 0.0})
    assert h.censored.tolist() == [False, False, False, True]
    assert h.loq[3] == pytest.approx(0.05)   # LOQ from the Compounds sheet
    assert h.basis == "area_percent"


@pytest.mark.parametrize("word", ["n.d.", "ND", " nd ", "not detected"])
def test_not_detected_reads_as_below_the_loq(tmp_path, word):
    # a peak not detected lies below the detection limit, so below the LOQ (common practice)
    folder = csv_campaign(tmp_path)
    rows = [["run", "time [min]", "kind", "compound", "value"],
            ["R01", "0", "area%", "S-peak", "50"], ["R01", "0", "area%", "P12-peak", "<LOQ"],
            ["R01", "5", "area%", "S-peak", "40"], ["R01", "5", "area%", "P12-peak", word]]
    write_csv(folder, "hplc_results.csv", rows)
    h = load_campaign(folder).run("R01").hplc
    assert h.censored.tolist() == [False, True, False, True]
    assert h.loq[3] == h.loq[1] == pytest.approx(0.05) and np.isnan(h.value[3])
