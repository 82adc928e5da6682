"""Titration curves against textbook worked examples and exact polynomials."""

import json

import numpy as np
import pytest

from speciakin.chemistry import water
from speciakin.chemistry.equilibrium import IonizableSpecies
from speciakin.chemistry.microstates import macroscopic_pkas
from speciakin.chemistry.titration import titrate
from speciakin.errors import InputError

KW25 = water.ion_product(298.15)


def _positive_real_root(coefficients):
    roots = np.roots(coefficients)
    real = roots[(np.abs(roots.imag) <= 1e-9 * np.abs(roots)) & (roots.real > 0)].real
    assert real.size == 1
    return real[0]


# ---------------------------------------------------------------------------
# Monoprotic weak acid with strong base.
# Harris, Quantitative Chemical Analysis, chapter "Acid-Base Titrations",
# worked example: 50.00 mL of 0.02000 M MES (pKa 6.27) titrated with
# 0.1000 M NaOH; Ve = 10.00 mL.  Tabulated pH (from memory; the book uses
# pKw = 14.00, two decimals): 0 mL 3.99, 5.00 mL (half Ve) 6.27,
# 10.00 mL (Ve) 9.25, 10.10 mL 10.22, 12.00 mL 11.51.
# Tolerance 0.015: 0.005 rounding of the table plus 0.005 for pKw 13.995
# against the book's 14.00, plus the book's approximations.
# ---------------------------------------------------------------------------
MES_POINTS = [(0.0, 3.99), (5.0, 6.27), (10.0, 9.25), (10.10, 10.22), (12.0, 11.51)]


@pytest.fixture(scope="module")
def mes_curve():
    mes = IonizableSpecies("MES", np.array([6.27]), np.zeros((1, 1)), np.array([0.0]), np.array([-1.0]))
    volumes = np.array([v for v, _ in MES_POINTS] + list(np.linspace(0, 20, 401))) * 1e-3
    volumes = np.unique(volumes)
    return titrate([mes], [0.02 * 0.05], 0.05, "base", 0.1, volumes)


@pytest.mark.parametrize("volume_ml, expected", MES_POINTS)
def test_mes_textbook_points(mes_curve, volume_ml, expected):
    i = int(np.argmin(np.abs(mes_curve.titrant_volume - volume_ml * 1e-3)))
    assert mes_curve.ph[i] == pytest.approx(expected, abs=0.015)


def test_mes_against_exact_cubic(mes_curve):
    # charge balance [H+] + [Na+] = [OH-] + [A-] with [A-] = C Ka/(h + Ka):
    # h^3 + (Na + Ka) h^2 + (Na Ka - Kw - C Ka) h - Kw Ka = 0 (exact; numpy.roots)
    ka = 10.0**-6.27
    for v, ph in zip(mes_curve.titrant_volume, mes_curve.ph):
        total = 0.05 + v
        c, na = 0.02 * 0.05 / total, 0.1 * v / total
        h = _positive_real_root([1.0, na + ka, na * ka - KW25 - c * ka, -KW25 * ka])
        assert ph == pytest.approx(-np.log10(h), abs=1e-8)
    assert mes_curve.max_relative_residual < 1e-10


def test_mes_curve_shape(mes_curve):
    # pH rises monotonically with added base; steepest point at Ve = 10.00 mL
    # (two grid volumes coincide to rounding, hence >= 0)
    assert np.all(np.diff(mes_curve.ph) >= 0)
    assert mes_curve.ph[-1] - mes_curve.ph[0] > 8
    steep = mes_curve.steepest_points()
    assert steep.size == 1
    assert steep[0] == pytest.approx(10.0e-3, abs=0.05e-3)
    # site fraction at half equivalence: about half deprotonated (Henderson-Hasselbalch)
    i = int(np.argmin(np.abs(mes_curve.titrant_volume - 5e-3)))
    assert mes_curve.site_protonated[0][i, 0] == pytest.approx(0.5, abs=0.01)


# ---------------------------------------------------------------------------
# Dibasic base with strong acid.
# Harris, Quantitative Chemical Analysis, chapter "Acid-Base Titrations",
# titration of a dibasic base: 10.0 mL of 0.100 M base B (pKb1 = 4.00,
# pKb2 = 9.00, i.e. pKa 10.00 and 5.00) with 0.100 M HCl; Ve1 = 10.0 mL,
# Ve2 = 20.0 mL.  Textbook approximations (from memory of the worked
# example): start pH 11.49; 5.0 mL pH = pKa2 = 10.00; Ve1 pH = (5 + 10)/2
# = 7.50; 15.0 mL pH = 5.00; Ve2 pH 3.24 (BH2 2+ at F = 0.0333 M as a weak
# acid, x^2/(F - x) = 1e-5); 25.0 mL pH 1.85 (excess H+ 0.5 mmol in 35 mL).
# ---------------------------------------------------------------------------
DIBASIC_POINTS = [(0.0, 11.49), (5.0, 10.00), (10.0, 7.50), (15.0, 5.00), (20.0, 3.24), (25.0, 1.85)]


@pytest.fixture(scope="module")
def dibasic_curve():
    # two independent sites with microscopic pKa chosen so that the macroscopic
    # values are exactly 10.00 and 5.00 is not needed: the exact check below uses
    # the macroscopic constants the engine reports.
    b = IonizableSpecies("B", np.array([10.0, 5.0]), np.zeros((2, 2)), np.array([1.0, 1.0]), np.array([0.0, 0.0]))
    volumes = np.unique(np.array([v for v, _ in DIBASIC_POINTS] + list(np.linspace(0, 30, 301))) * 1e-3)
    return b, titrate([b], [0.1 * 0.01], 0.01, "acid", 0.1, volumes)


@pytest.mark.parametrize("volume_ml, expected", DIBASIC_POINTS)
def test_dibasic_textbook_points(dibasic_curve, volume_ml, expected):
    # tolerance 0.015 as for the MES example (two-decimal table, pKw 14.00 in the book)
    _, curve = dibasic_curve
    i = int(np.argmin(np.abs(curve.titrant_volume - volume_ml * 1e-3)))
    assert curve.ph[i] == pytest.approx(expected, abs=0.015)


def test_dibasic_against_exact_quartic(dibasic_curve):
    # charge balance h + [BH+] + 2 [BH2 2+] = [Cl-] + Kw/h with
    # D = h^2 + Ka1 h + Ka1 Ka2, [BH2] = C h^2/D, [BH] = C Ka1 h/D; times h D:
    # h^2 D + C Ka1 h^2 + 2 C h^3 - Cl h D - Kw D = 0 (quartic; numpy.roots)
    b, curve = dibasic_curve
    pk1, pk2 = macroscopic_pkas(b.pka, b.interaction)
    k1, k2 = 10.0**-pk1, 10.0**-pk2
    d = np.array([1.0, k1, k1 * k2])
    for v, ph in zip(curve.titrant_volume, curve.ph):
        total = 0.01 + v
        c, cl = 0.1 * 0.01 / total, 0.1 * v / total
        poly = np.polyadd(np.polymul([1.0, 0.0, 0.0], d), [c * k1, 0.0, 0.0])
        poly = np.polyadd(poly, [2 * c, 0.0, 0.0, 0.0])
        poly = np.polysub(poly, np.polymul([cl, 0.0], d))
        poly = np.polysub(poly, KW25 * d)
        h = _positive_real_root(poly)
        assert ph == pytest.approx(-np.log10(h), abs=1e-8)


def test_dibasic_shape_and_tables(dibasic_curve):
    _, curve = dibasic_curve
    assert np.all(np.diff(curve.ph) <= 0)
    assert curve.ph[0] - curve.ph[-1] > 9
    steep = curve.steepest_points()
    assert steep.size >= 1
    assert steep[0] == pytest.approx(10.0e-3, abs=0.1e-3)
    frame = curve.to_frame()
    assert list(frame.columns[:3]) == ["titrant volume [mL]", "pH", "ionic strength [mol/L]"]
    shares = frame[[c for c in frame.columns if ": x[" in c]].to_numpy()
    np.testing.assert_allclose(shares.sum(axis=1), 1.0, atol=1e-12)
    json.dumps(curve.to_dict())
    text = curve.report()
    for heading in ("Titration", "Steepest points", "Solver"):
        assert heading in text


def test_davies_titration_runs():
    mes = IonizableSpecies("MES", np.array([6.27]), np.zeros((1, 1)), np.array([0.0]), np.array([-1.0]))
    curve = titrate([mes], [1e-3], 0.05, "base", 0.1, np.linspace(0, 15e-3, 31), activity="davies")
    assert np.all(np.isfinite(curve.ph)) and curve.max_relative_residual < 1e-10
    # the reported shares are the activity-corrected ones used by the charge
    # balance: their mean charge equals the solver's at each point
    from speciakin.chemistry.equilibrium import solve_ph

    for i in (0, 10, 30):
        total = 0.05 + curve.titrant_volume[i]
        ref = solve_ph([mes], [1e-3 / total], 0.1 * curve.titrant_volume[i] / total, activity="davies",
                       spectator_ionic_strength=0.5 * 0.1 * curve.titrant_volume[i] / total)
        assert curve.ph[i] == pytest.approx(ref.ph, abs=1e-12)
        assert -curve.populations[0][i, 0] == pytest.approx(ref.species_mean_charge["MES"], abs=1e-12)


@pytest.mark.parametrize("kwargs, match", [
    ({"amounts": [-1e-3]}, "non-negative"),
    ({"titrant": "alkali"}, "unknown titrant"),
    ({"titrant_volumes": [2e-3, 1e-3]}, "ascending"),
    ({"titrant_concentration": 0.0}, "positive"),
    ({"initial_volume": -1.0}, "positive"),
])
def test_titration_bad_input(kwargs, match):
    mes = IonizableSpecies("MES", np.array([6.27]), np.zeros((1, 1)), np.array([0.0]), np.array([-1.0]))
    args = {"amounts": [1e-3], "initial_volume": 0.05, "titrant": "base", "titrant_concentration": 0.1,
            "titrant_volumes": [0.0, 1e-3]}
    args.update(kwargs)
    with pytest.raises(InputError, match=match):
        titrate([mes], **args)
