"""Water and temperature: ion product of water, activity coefficients,
van 't Hoff pKa shift.

All functions are pure and vectorised over numpy arrays.  The two water
formulas (:func:`kell_density`, :func:`iapws_pkw`) and van 't Hoff
(:func:`vant_hoff`) are written once, without checks, in a form numba
compiles into the simulation kernel as it stands (``register_jitable``);
:func:`water_density_kell`, :func:`pkw_iapws`, :func:`pkw` and
:func:`vant_hoff_pka` wrap them with validation and units.

References
----------
.. [1] IAPWS R11-07(2019), "Revised Release on the Ionization Constant of
   H2O"; Bandura, A. V.; Lvov, S. N. "The Ionization Constant of Water over
   Wide Ranges of Temperature and Density." J. Phys. Chem. Ref. Data 2006,
   35, 15-30.
.. [2] Kell, G. S. "Density, thermal expansivity, and compressibility of
   liquid water from 0 to 150 C: correlations and tables for atmospheric
   pressure and saturation reviewed and expressed on 1968 temperature scale."
   J. Chem. Eng. Data 1975, 20, 97-105.
.. [3] Davies, C. W. "Ion Association." Butterworths, London, 1962.
.. [4] Malmberg, C. G.; Maryott, A. A. "Dielectric constant of water from
   0 to 100 C." J. Res. Natl. Bur. Stand. 1956, 56, 1-8.
.. [5] Debye, P.; Hueckel, E. Phys. Z. 1923, 24, 185 (limiting-law slope).
.. [6] CODATA 2018 recommended values of the fundamental physical constants
   (exact SI values of e, k_B, N_A).
"""

from __future__ import annotations

import numpy as np
from numba.extending import register_jitable

from speciakin.errors import InputError, Location

__all__ = [
    "GAS_CONSTANT",
    "kell_density",
    "iapws_pkw",
    "iapws_pkw_temperature_slope",
    "vant_hoff",
    "pkw_iapws",
    "water_density_kell",
    "pkw",
    "ion_product",
    "dielectric_constant_water",
    "debye_huckel_slope",
    "ionic_strength",
    "davies_log10_gamma",
    "medium_pkw",
    "vant_hoff_pka",
]

#: Molar gas constant [J/(mol*K)] (CODATA 2018, exact).
GAS_CONSTANT = 8.314462618
_LN10 = float(np.log(10.0))

_ELEMENTARY_CHARGE = 1.602176634e-19  # [C], exact SI
_BOLTZMANN = 1.380649e-23  # [J/K], exact SI
_AVOGADRO = 6.02214076e23  # [1/mol], exact SI
_VACUUM_PERMITTIVITY = 8.8541878128e-12  # [F/m], CODATA 2018

# IAPWS R11-07, Table 1 (Bandura and Lvov 2006)
_N = 6
_MW = 18.015268  # [g/mol]
_ALPHA = (-0.864671, 8659.19, -22786.2)
_BETA = (0.642044, -56.8534, -0.375754)
_GAMMA = (0.61415, 48251.33, -67707.93, 10102100.0)
# Kell 1975, eq. (16): rho = (sum KELL[i] t^i) / (1 + KELL_B t) / 1000, t in C
_KELL = (999.83952, 16.945176, -7.9870401e-3, -46.170461e-6, 105.56302e-9, -280.54253e-12)
_KELL_B = 16.879850e-3


@register_jitable
def _kell_numerator(t):
    """The numerator polynomial of Kell's eq. (16) at ``t`` [C]."""
    return (_KELL[0] + _KELL[1] * t + _KELL[2] * t * t + _KELL[3] * t ** 3
            + _KELL[4] * t ** 4 + _KELL[5] * t ** 5)


@register_jitable
def kell_density(temperature):
    """Density of liquid water at 0.1 MPa [g/cm^3], Kell 1975 [2]_ eq. (16), the
    formula alone (no checks; valid 0 to 150 C).

    Parameters
    ----------
    temperature
        [K], a float or an array (also compiled into the kernel).
    """
    t = temperature - 273.15
    return _kell_numerator(t) / (1.0 + _KELL_B * t) / 1000.0


@register_jitable
def iapws_pkw(temperature, rho):
    """pKw = -log10 Kw of water, IAPWS R11-07 [1]_ eqs. (1)-(3), the formula alone (no checks).

    Parameters
    ----------
    temperature
        [K], a float or an array (also compiled into the kernel).
    rho
        Density of water [g/cm^3].

    Returns
    -------
    float or numpy.ndarray
        pKw on the molal scale [-] (Kw in (mol/kg)^2).
    """
    t = temperature
    # Eq. (3): Z = rho exp(alpha0 + alpha1/T + alpha2/T^2 rho^(2/3))
    z = rho * np.exp(_ALPHA[0] + _ALPHA[1] / t + _ALPHA[2] / (t * t) * rho ** (2.0 / 3.0))
    # Eq. (2): ideal-gas pKw^G
    pkw_gas = _GAMMA[0] + _GAMMA[1] / t + _GAMMA[2] / (t * t) + _GAMMA[3] / (t * t * t)
    # Eq. (1)
    return (-2.0 * _N * (np.log10(1.0 + z) - z / (z + 1.0) * rho * (_BETA[0] + _BETA[1] / t + _BETA[2] * rho))
            + pkw_gas + 2.0 * np.log10(_MW / 1000.0))


@register_jitable
def iapws_pkw_temperature_slope(temperature):
    """d pKw / dT [1/K] of :func:`iapws_pkw` at the density of :func:`kell_density`, by the chain rule.

    The derivative of eqs. (1)-(3) of IAPWS R11-07 [1]_ with the density's own
    slope (Kell 1975 [2]_ eq. (16) differentiated), for the kernel's d[OH-]/dT
    under a temperature ramp: exact to rounding, where a central difference of
    pKw carries the rounding of pKw divided by its step (about 1e-9 relative
    for a step of 1e-3 K).  ``temperature`` [K], a float (also compiled into
    the kernel).
    """
    t = temperature
    c = temperature - 273.15
    # Kell: rho = num(c) / (1 + b c) / 1000 (:func:`kell_density`) and its slope
    b = _KELL_B
    num = _kell_numerator(c)
    dnum = (_KELL[1] + 2.0 * _KELL[2] * c + 3.0 * _KELL[3] * c * c + 4.0 * _KELL[4] * c ** 3
            + 5.0 * _KELL[5] * c ** 4)
    rho = num / (1.0 + b * c) / 1000.0
    drho = (dnum * (1.0 + b * c) - num * b) / ((1.0 + b * c) ** 2) / 1000.0
    # Eq. (3): Z = rho exp(a), a = alpha0 + alpha1/T + alpha2/T^2 rho^(2/3)
    r23 = rho ** (2.0 / 3.0)
    expo = np.exp(_ALPHA[0] + _ALPHA[1] / t + _ALPHA[2] / (t * t) * r23)
    da = (-_ALPHA[1] / (t * t) - 2.0 * _ALPHA[2] / (t * t * t) * r23
          + _ALPHA[2] / (t * t) * (2.0 / 3.0) * r23 / rho * drho)
    z = rho * expo
    dz = drho * expo + z * da
    # Eq. (1): pKw = -2n [log10(1 + Z) - Z/(Z + 1) rho B] + pKw^G + const, B = beta0 + beta1/T + beta2 rho
    big_b = _BETA[0] + _BETA[1] / t + _BETA[2] * rho
    dbig_b = -_BETA[1] / (t * t) + _BETA[2] * drho
    frac = z / (z + 1.0)
    dfrac = dz / ((z + 1.0) * (z + 1.0))
    dbracket = dz / ((1.0 + z) * _LN10) - (dfrac * rho * big_b + frac * drho * big_b + frac * rho * dbig_b)
    # Eq. (2)
    dgas = -_GAMMA[1] / (t * t) - 2.0 * _GAMMA[2] / (t * t * t) - 3.0 * _GAMMA[3] / (t * t * t * t)
    return -2.0 * _N * dbracket + dgas


@register_jitable
def vant_hoff(pka_reference, enthalpy, temperature, reference_temperature):
    """pKa(T) = pKa(T_ref) + dH / (R ln 10) (1/T - 1/T_ref), the formula alone (no checks).

    ``enthalpy`` dH [kJ/mol], temperatures [K]; floats or arrays (also
    compiled into the kernel).  See :func:`vant_hoff_pka`.
    """
    return pka_reference + enthalpy * 1000.0 / (GAS_CONSTANT * _LN10) * (1.0 / temperature
                                                                         - 1.0 / reference_temperature)


def _finite_positive(x, key: str, unit: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if not np.all(np.isfinite(a)) or np.any(a <= 0):
        raise InputError(f"{key} must be a positive finite number", Location(key=key),
                         a.tolist() if a.size < 10 else "array", f"> 0 [{unit}]")
    return a


def pkw_iapws(temperature, density):
    """pKw = -log10 Kw of water from IAPWS R11-07 (Bandura and Lvov 2006).

    Parameters
    ----------
    temperature
        [K]; the release covers 273.15 K to 1073.15 K.
    density
        Density of water [kg/m^3] (0 to 1250).

    Returns
    -------
    numpy.ndarray or float
        pKw on the molal scale [-] (Kw in (mol/kg)^2).

    References
    ----------
    IAPWS R11-07, Eqs. (1)-(3); Bandura and Lvov 2006 (module references).
    """
    t = _finite_positive(temperature, "temperature", "K")
    rho = np.asarray(density, dtype=float) / 1000.0  # [g/cm^3]
    if not np.all(np.isfinite(rho)) or np.any(rho < 0):
        raise InputError("density must be a non-negative finite number", Location(key="density"),
                         density, ">= 0 [kg/m^3]")
    out = iapws_pkw(t, rho)
    return out if np.ndim(out) else float(out)


def water_density_kell(temperature):
    """Density of liquid water at 0.101325 MPa [kg/m^3] (Kell 1975).

    ``rho = (999.83952 + 16.945176 t - 7.9870401e-3 t^2 - 46.170461e-6 t^3
    + 105.56302e-9 t^4 - 280.54253e-12 t^5) / (1 + 16.879850e-3 t)`` with t
    in [C] (valid 0 to 150 C; coefficients from memory of Kell 1975, checked
    in the tests against the handbook value 997.05 kg/m^3 at 25 C).

    Parameters
    ----------
    temperature
        [K].

    References
    ----------
    Kell 1975 (module references), Eq. (16).
    """
    out = kell_density(_finite_positive(temperature, "temperature", "K")) * 1000.0
    return out if np.ndim(out) else float(out)


def medium_pkw(model, temperature):
    """pKw of a model's medium at ``temperature`` [K]: water's (IAPWS) when
    ``model.pkw`` is None, else water's shifted so that it equals
    ``model.pkw`` at the model's reference temperature."""
    value = pkw(temperature)
    if getattr(model, "pkw", None) is None:
        return value
    return value + (float(model.pkw.value) - float(pkw(model.reference_temperature)))


def pkw(temperature=298.15):
    """pKw of liquid water at 0.1 MPa [-].

    IAPWS R11-07 fed with the Kell (1975) density.  ``pkw(298.15)`` is
    13.995.  Molal and molar scales differ by ``2 log10(rho / 1 kg/L)``,
    under 0.003 near room temperature; the molal value is returned, as is
    usual for pKw tables.

    Parameters
    ----------
    temperature
        [K], 273.15 to 423.15 (range of the density correlation).

    References
    ----------
    IAPWS R11-07; Kell 1975 (module references).
    """
    t = _finite_positive(temperature, "temperature", "K")
    if np.any(t < 273.15 - 1e-9) or np.any(t > 423.15 + 1e-9):
        raise InputError("temperature outside the range of liquid water at 0.1 MPa",
                         Location(key="temperature"), t.tolist() if t.size < 10 else "array",
                         "273.15 K to 423.15 K (0 C to 150 C)")
    return pkw_iapws(t, water_density_kell(t))


def ion_product(temperature=298.15):
    """Kw = 10**-pKw [(mol/L)^2] at 0.1 MPa (see :func:`pkw`)."""
    return 10.0 ** (-np.asarray(pkw(temperature))) if np.ndim(temperature) else 10.0 ** (-pkw(temperature))


def dielectric_constant_water(temperature):
    """Relative permittivity of water at 0.1 MPa [-] (Malmberg and Maryott 1956).

    ``eps = 87.740 - 0.40008 t + 9.398e-4 t^2 - 1.410e-6 t^3``, t in [C]
    (0 to 100 C; coefficients from memory).

    References
    ----------
    Malmberg and Maryott 1956 (module references).
    """
    t = _finite_positive(temperature, "temperature", "K") - 273.15
    out = 87.740 - 0.40008 * t + 9.398e-4 * t**2 - 1.410e-6 * t**3
    return out if np.ndim(out) else float(out)


def debye_huckel_slope(temperature=298.15):
    """Debye-Hueckel limiting slope A [(L/mol)^0.5] for log10 gamma, molar scale.

    ``A = e^2 / (8 pi eps0 eps kB T ln10) * sqrt(2000 N_A e^2 / (eps0 eps kB T))``
    from the Debye length with ionic strength in [mol/L]; eps from
    :func:`dielectric_constant_water`.  About 0.51 at 25 C.

    References
    ----------
    Debye and Hueckel 1923; Malmberg and Maryott 1956; CODATA 2018 (module
    references).
    """
    t = _finite_positive(temperature, "temperature", "K")
    eps = _VACUUM_PERMITTIVITY * dielectric_constant_water(t)
    kt = _BOLTZMANN * t
    e2 = _ELEMENTARY_CHARGE**2
    kappa_per_sqrt_i = np.sqrt(2000.0 * _AVOGADRO * e2 / (eps * kt))  # [1/m per sqrt(mol/L)]
    out = e2 * kappa_per_sqrt_i / (8.0 * np.pi * eps * kt * np.log(10.0))
    return out if np.ndim(out) else float(out)


def ionic_strength(concentrations, charges):
    """Ionic strength I = 1/2 sum c_i z_i^2 [mol/L].

    Parameters
    ----------
    concentrations
        [mol/L], last axis over species.
    charges
        Charge of each species [e], broadcast against ``concentrations``.
    """
    c = np.asarray(concentrations, dtype=float)
    z = np.asarray(charges, dtype=float)
    out = 0.5 * np.sum(c * z**2, axis=-1)
    return out if np.ndim(out) else float(out)


def davies_log10_gamma(charge, ionic_strength_value, temperature=298.15):
    """log10 of the activity coefficient by the Davies equation [-].

    ``log10 gamma = -A z^2 (sqrt(I) / (1 + sqrt(I)) - 0.3 I)``, A from
    :func:`debye_huckel_slope`.  Usual up to I of about 0.5 mol/L.

    Parameters
    ----------
    charge
        Ion charge z [e].
    ionic_strength_value
        I [mol/L], >= 0.
    temperature
        [K].

    References
    ----------
    Davies 1962 (module references).
    """
    i = np.asarray(ionic_strength_value, dtype=float)
    if not np.all(np.isfinite(i)) or np.any(i < 0):
        raise InputError("ionic strength must be a non-negative finite number",
                         Location(key="ionic_strength"), ionic_strength_value, ">= 0 [mol/L]")
    z = np.asarray(charge, dtype=float)
    sq = np.sqrt(i)
    out = -debye_huckel_slope(temperature) * z**2 * (sq / (1.0 + sq) - 0.3 * i)
    return out if np.ndim(out) else float(out)


def vant_hoff_pka(pka_reference, enthalpy, temperature, reference_temperature=298.15):
    """pKa at another temperature by van 't Hoff.

    ``pKa(T) = pKa_ref + dH / (R ln 10) (1/T - 1/T_ref)`` with dH the
    ionization enthalpy [kJ/mol] (positive for amines: their pKa falls as T
    rises).

    Parameters
    ----------
    pka_reference
        pKa at ``reference_temperature`` [-].
    enthalpy
        Ionization enthalpy dH [kJ/mol].
    temperature, reference_temperature
        [K].

    References
    ----------
    van 't Hoff equation, d ln K / dT = dH / (R T^2), integrated at constant
    dH (e.g. Atkins, Physical Chemistry, chapter on chemical equilibrium).
    """
    t = _finite_positive(temperature, "temperature", "K")
    tr = _finite_positive(reference_temperature, "reference_temperature", "K")
    dh = np.asarray(enthalpy, dtype=float)
    p0 = np.asarray(pka_reference, dtype=float)
    if not np.all(np.isfinite(dh)) or not np.all(np.isfinite(p0)):
        raise InputError("pKa or enthalpy is not finite", Location(key="enthalpy"), enthalpy,
                         "finite numbers")
    out = vant_hoff(p0, dh, t, tr)
    return out if np.ndim(out) else float(out)
