"""Physical constants and unit conversions, all derived from :mod:`scipy.constants` (CODATA).

This is the only module that may hold a conversion factor; everything else imports from here.
"""
from __future__ import annotations

import math as _math

import scipy.constants as _sc

#: Hartree energy in electronvolt.
HARTREE_EV: float = _sc.physical_constants["Hartree energy in eV"][0]
#: Bohr radius in angstrom.
BOHR_ANGSTROM: float = _sc.physical_constants["Bohr radius"][0] * 1e10
#: Coulomb energy of two elementary charges one angstrom apart, e^2 / (4 pi eps0 * 1 Å), in eV.
COULOMB_EV_ANGSTROM: float = _sc.e / (4.0 * _sc.pi * _sc.epsilon_0 * 1e-10)
#: h c / e in eV nm: lambda[nm] = HC_EV_NM / E[eV].
HC_EV_NM: float = _sc.h * _sc.c / _sc.e * 1e9
#: One debye in C m (1e-21 / c).
DEBYE_CM: float = 1e-21 / _sc.c
#: Dipole of one elementary charge displaced by one angstrom, in debye.
E_ANGSTROM_DEBYE: float = _sc.e * 1e-10 / DEBYE_CM
#: Wavenumber (cm^-1) of one electronvolt.
EV_CM1: float = _sc.e / (_sc.h * _sc.c * 100.0)


def ev_to_nm(energy_ev):
    """Photon wavelength in nm for an energy in eV (lambda = h c / E)."""
    return HC_EV_NM / energy_ev


def nm_to_ev(wavelength_nm):
    """Photon energy in eV for a wavelength in nm."""
    return HC_EV_NM / wavelength_nm


def ev_to_cm1(energy_ev):
    """Wavenumber in cm^-1 for a photon energy in eV."""
    return energy_ev * EV_CM1


def cm1_to_ev(wavenumber_cm1):
    """Photon energy in eV for a wavenumber in cm^-1."""
    return wavenumber_cm1 / EV_CM1


# Oscillator strength from the integrated molar absorption band (Mulliken 1939; Strickler & Berg 1962,
# refractive index taken as 1):
#
#     f = (4 eps0 m_e c^2 ln10 / (N_A e^2)) * integral eps(nu~) d nu~
#
# In SI units eps is in m^2 mol^-1 and nu~ in m^-1. With eps in the chemist's L mol^-1 cm^-1
# (= 0.1 m^2 mol^-1) and nu~ in cm^-1 (= 100 m^-1) the integral gains a factor 0.1 * 100 = 10, giving the
# textbook 4.319e-9 mol L^-1 cm^2 (checked in tests/test_spectra_lineshapes.py).
_F_PER_INTEGRATED_EPS_SI: float = (4.0 * _sc.epsilon_0 * _sc.m_e * _sc.c ** 2 * _math.log(10.0)
                                   / (_sc.N_A * _sc.e ** 2))
#: f per unit of integral eps d nu~ with eps in M^-1 cm^-1 and nu~ in cm^-1 (= 4.319e-9).
F_PER_INTEGRATED_EPSILON: float = _F_PER_INTEGRATED_EPS_SI * 0.1 * 100.0
