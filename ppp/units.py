"""Physical constants and unit conversions, all derived from :mod:`scipy.constants` (CODATA).

This is the only module that may hold a conversion factor; everything else imports from here.
"""
from __future__ import annotations

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
