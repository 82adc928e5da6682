"""Water: IAPWS R11-07 check values, density, Davies, van 't Hoff."""

import numpy as np
import pytest
from scipy import integrate

from speciakin.chemistry import water
from speciakin.errors import InputError


# IAPWS R11-07, "Revised Release on the Ionization Constant of H2O", Table 3
# (check values for computer-program verification): T [K], density [kg/m^3], pKw.
# Values as reproduced in the test suite of the general-purpose `iapws` Python
# package ("Table 3, pag 5"), given to 6 decimals.
IAPWS_TABLE_3 = [
    (300.0, 1000.0, 13.906565),
    (600.0, 70.0, 21.048874),
    (600.0, 700.0, 11.203153),
    (800.0, 200.0, 15.089765),
    (800.0, 1200.0, 6.438330),
]


@pytest.mark.parametrize("t, rho, expected", IAPWS_TABLE_3)
def test_iapws_check_values(t, rho, expected):
    assert water.pkw_iapws(t, rho) == pytest.approx(expected, abs=5e-7)


def test_iapws_vectorised():
    t = np.array([row[0] for row in IAPWS_TABLE_3])
    rho = np.array([row[1] for row in IAPWS_TABLE_3])
    np.testing.assert_allclose(water.pkw_iapws(t, rho), [row[2] for row in IAPWS_TABLE_3], atol=5e-7)


def test_pkw_at_25_c():
    # pKw = 13.995 at 25 C and 0.1 MPa (IAPWS R11-07, Bandura and Lvov, J. Phys. Chem. Ref. Data 2006, 35, 15)
    assert water.pkw(298.15) == pytest.approx(13.995, abs=1e-3)
    assert water.ion_product(298.15) == pytest.approx(10 ** -13.995, rel=3e-3)


@pytest.mark.parametrize("t_c, expected", [(0.0, 14.947), (50.0, 13.262)])
def test_pkw_temperature_dependence(t_c, expected):
    # CRC Handbook of Chemistry and Physics, "Ionization constant of water"
    # table at 0.1 MPa (from memory), 3 decimals
    assert water.pkw(273.15 + t_c) == pytest.approx(expected, abs=5e-3)


def test_kell_density():
    # CRC Handbook, density of water at 25 C = 997.047 kg/m^3 (from memory);
    # maximum density at 3.98 C (from memory, handbook)
    assert water.water_density_kell(298.15) == pytest.approx(997.047, abs=0.01)
    t = np.linspace(273.15, 283.15, 10001)
    t_max = t[np.argmax(water.water_density_kell(t))] - 273.15
    assert t_max == pytest.approx(3.98, abs=0.05)


def test_debye_huckel_slope_at_25_c():
    # Debye-Hueckel A = 0.509 (kg/mol)^0.5 at 25 C (from memory; e.g. Harris,
    # activity chapter, and Robinson and Stokes, Electrolyte Solutions). On the
    # molar scale A_c = A_m / sqrt(rho [kg/L]) = 0.5099.  The residual difference
    # comes from the dielectric-constant correlation; tolerance 0.003 (0.6 %).
    assert water.debye_huckel_slope(298.15) == pytest.approx(0.5099, abs=3e-3)
    # slope grows with temperature (eps*T falls)
    assert water.debye_huckel_slope(323.15) > water.debye_huckel_slope(298.15)


def test_davies():
    # Davies equation by hand with A = debye_huckel_slope: I = 0.1, z = 1 and 2
    a = water.debye_huckel_slope(298.15)
    f = np.sqrt(0.1) / (1 + np.sqrt(0.1)) - 0.3 * 0.1
    assert water.davies_log10_gamma(1, 0.1) == pytest.approx(-a * f, rel=1e-14)
    assert water.davies_log10_gamma(2, 0.1) == pytest.approx(-4 * a * f, rel=1e-14)
    # gamma(+-1) at I = 0.1 M about 0.78 (Davies; Harris activity chapter, from memory)
    assert 10 ** water.davies_log10_gamma(1, 0.1) == pytest.approx(0.78, abs=0.01)
    assert water.davies_log10_gamma(1, 0.0) == 0.0
    assert water.ionic_strength([0.1, 0.1], [1, -1]) == pytest.approx(0.1)
    assert water.ionic_strength([0.1, 0.2], [2, -1]) == pytest.approx(0.3)


def test_vant_hoff_against_numerical_integration():
    # van 't Hoff d(pKa)/dT = -dH / (R ln10 T^2); integrate with scipy.quad (reference library)
    dh, t0, t1 = 52.0, 298.15, 318.15
    integral, _ = integrate.quad(lambda t: -dh * 1e3 / (water.GAS_CONSTANT * np.log(10) * t * t), t0, t1)
    assert water.vant_hoff_pka(9.3, dh, t1, t0) == pytest.approx(9.3 + integral, abs=1e-10)
    assert water.vant_hoff_pka(9.3, dh, t0, t0) == 9.3
    # common practice: amine pKa falls about 0.02-0.03 per K near 25 C; typical
    # amine ionization enthalpy 40-50 kJ/mol (from memory)
    slope = (water.vant_hoff_pka(9.3, 45.0, 299.15, t0) - 9.3) / 1.0
    assert -0.03 < slope < -0.02


def test_water_errors():
    with pytest.raises(InputError, match="temperature"):
        water.pkw(-5.0)
    with pytest.raises(InputError, match="outside"):
        water.pkw(500.0)
    with pytest.raises(InputError, match="ionic strength"):
        water.davies_log10_gamma(1, -0.1)
    with pytest.raises(InputError, match="density"):
        water.pkw_iapws(300.0, float("nan"))
    with pytest.raises(InputError, match="not finite"):
        water.vant_hoff_pka(9.3, float("nan"), 300.0)


@pytest.mark.parametrize("t_c", [0.0, 25.0, 37.0, 60.0, 95.0])
def test_pkw_slope_is_the_derivative_of_the_formula(t_c):
    # the chain-rule slope against a five-point central difference of the IAPWS formula at
    # Kell's density (a general-purpose numerical derivative: truncation h^4, rounding
    # about 1e-14 / h); the two agree to the difference's own rounding
    t = t_c + 273.15

    def f(x):
        return water.iapws_pkw(x, water.kell_density(x))

    h = 1e-2
    numeric = (-f(t + 2 * h) + 8 * f(t + h) - 8 * f(t - h) + f(t - 2 * h)) / (12 * h)
    assert water.iapws_pkw_temperature_slope(t) == pytest.approx(numeric, rel=1e-8)


def test_pkw_slope_gives_the_ionization_enthalpy_of_water():
    # van 't Hoff: dH = R ln10 T^2 (-dpKw/dT).  Calorimetric enthalpy of ionization of water at
    # 25 C: 55.8 kJ/mol (Olofsson and Hepler, J. Solution Chem. 1975, 4, 127; from memory).
    # The IAPWS formula is a fit to Kw, not to calorimetry: 56.4 kJ/mol here, within 1 kJ/mol
    t = 298.15
    enthalpy = water.GAS_CONSTANT * np.log(10.0) * t * t * -water.iapws_pkw_temperature_slope(t) / 1000.0
    assert enthalpy == pytest.approx(55.8, abs=1.0)
