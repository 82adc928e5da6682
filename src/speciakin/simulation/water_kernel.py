"""Ionic product of water for the compiled kernel.

pKw(T) at 0.1 MPa from the IAPWS formulation, with the liquid density from
Kell's correlation; both as numba functions so the kernel can follow a
temperature ramp.

References
----------
.. [1] IAPWS R11-07(2019), "Revised Release on the Ionization Constant of H2O";
   Bandura, A. V. and Lvov, S. N., J. Phys. Chem. Ref. Data 2006, 35, 15-30.
.. [2] Kell, G. S., "Density, thermal expansivity, and compressibility of liquid
   water from 0 to 150 C", J. Chem. Eng. Data 1975, 20, 97-105 (eq. 16).
"""

from __future__ import annotations

import math

from speciakin.simulation.jit_options import leaf_kernel


# One set of IAPWS coefficients for the whole project: the chemistry layer's.
from speciakin.chemistry.water import _ALPHA, _BETA, _GAMMA, _MW, _N

__all__ = ["water_density", "pkw", "pkw_at_density"]


@leaf_kernel
def water_density(temperature):
    """Density of liquid water at 0.1 MPa [g/cm^3] (Kell 1975 [2]_, 0-150 C).

    Parameters
    ----------
    temperature : float
        [K]
    """
    t = temperature - 273.15
    num = (999.83952 + 16.945176 * t - 7.9870401e-3 * t * t - 46.170461e-6 * t ** 3
           + 105.56302e-9 * t ** 4 - 280.54253e-12 * t ** 5)
    return num / (1.0 + 16.879850e-3 * t) / 1000.0


@leaf_kernel
def pkw(temperature):
    """pKw at 0.1 MPa: :func:`pkw_at_density` with the density of :func:`water_density`."""
    return pkw_at_density(temperature, water_density(temperature))


@leaf_kernel
def pkw_at_density(temperature, rho):
    """pKw = -log10(Kw) of water at 0.1 MPa (IAPWS R11-07 [1]_, eq. 1-3).

    Parameters
    ----------
    temperature : float
        [K]
    rho : float
        Density of water [g/cm^3].

    Returns
    -------
    float
        pKw [-] (Kw in (mol/kg)^2; numerically the same as (mol/L)^2 to within
        the density of dilute water).
    """
    n = float(_N)
    alpha0, alpha1, alpha2 = _ALPHA
    beta0, beta1, beta2 = _BETA
    molar_mass = _MW
    t = temperature
    q = rho * math.exp(alpha0 + alpha1 / t + alpha2 / (t * t) * rho ** (2.0 / 3.0))
    pkw_gas = _GAMMA[0] + _GAMMA[1] / t + _GAMMA[2] / (t * t) + _GAMMA[3] / (t * t * t)
    return (-2.0 * n * (math.log10(1.0 + q) - q / (q + 1.0) * rho * (beta0 + beta1 / t + beta2 * rho))
            + pkw_gas + 2.0 * math.log10(molar_mass / 1000.0))
