"""Ionic product of water for the compiled kernel.

pKw(T) at 0.1 MPa from the IAPWS formulation, with the liquid density from
Kell's correlation, compiled so the kernel can follow a temperature ramp.
The formulas are written once, in ``chemistry.water`` (numba-compatible);
these are the compiled entry points.

References
----------
.. [1] IAPWS R11-07(2019), "Revised Release on the Ionization Constant of H2O";
   Bandura, A. V. and Lvov, S. N., J. Phys. Chem. Ref. Data 2006, 35, 15-30.
.. [2] Kell, G. S., "Density, thermal expansivity, and compressibility of liquid
   water from 0 to 150 C", J. Chem. Eng. Data 1975, 20, 97-105 (eq. 16).
"""

from __future__ import annotations

from speciakin.chemistry.water import iapws_pkw, iapws_pkw_temperature_slope, kell_density
from speciakin.simulation.jit_options import leaf_kernel

__all__ = ["water_density", "pkw", "pkw_slope", "pkw_at_density"]


@leaf_kernel
def water_density(temperature):
    """Density of liquid water at 0.1 MPa [g/cm^3] (Kell 1975 [2]_, 0-150 C;
    the formula is ``chemistry.water.kell_density``).

    Parameters
    ----------
    temperature : float
        [K]
    """
    return kell_density(temperature)


@leaf_kernel
def pkw(temperature):
    """pKw at 0.1 MPa: :func:`pkw_at_density` with the density of :func:`water_density`."""
    return iapws_pkw(temperature, kell_density(temperature))


@leaf_kernel
def pkw_slope(temperature):
    """d pKw / dT [1/K] of :func:`pkw` (``chemistry.water.iapws_pkw_temperature_slope``: the chain rule)."""
    return iapws_pkw_temperature_slope(temperature)


@leaf_kernel
def pkw_at_density(temperature, rho):
    """pKw = -log10(Kw) of water at 0.1 MPa (IAPWS R11-07 [1]_, eq. 1-3; the
    formula is ``chemistry.water.iapws_pkw``).

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
    return iapws_pkw(temperature, rho)
