"""Broadening: the f-eps relation, band shapes and vibronic progressions.

Sources: Mulliken (1939) / Strickler & Berg (1962) relation f = 4.319e-9 * integral eps d(nu~) (the
textbook constant, e.g. Turro, Modern Molecular Photochemistry; from memory); Gaussian-band shortcut
f = 4.6e-9 * eps_max * FWHM(cm-1) (common practice, from memory); Olivero & Longbothum (1977) Voigt
width; Poisson Franck-Condon weights of a displaced oscillator (Huang & Rhys 1950).
"""
import math

import numpy as np
import pytest

from ppp.errors import InputError
from ppp.spectra.lineshapes import (SHAPES, LineShape, Progression, Sticks, energy_grid, epsilon, integrated_f,
                                    simulate)
from ppp.units import EV_CM1, F_PER_INTEGRATED_EPSILON, HC_EV_NM

STICKS = Sticks([3.0, 4.0, 5.0], [0.5, 0.2, 1.0])
WIDE = energy_grid(0.05, 60.0, 0.001)  # 0.05-60 eV: tails of narrow bands are all inside


def test_constant_from_scipy_matches_textbook_value():
    # textbook 4.319e-9 (from memory); derived in ppp.units from scipy.constants (CODATA)
    assert F_PER_INTEGRATED_EPSILON == pytest.approx(4.319e-9, rel=5e-5)


@pytest.mark.parametrize("kind", SHAPES)
def test_integral_of_epsilon_returns_sum_of_f(kind):
    # narrow bands (FWHM 0.04 eV) so that even Lorentzian tails lie inside 0.05-60 eV to < 0.5 %
    curve = simulate(STICKS, LineShape(kind, 0.04), WIDE)
    assert integrated_f(curve) == pytest.approx(STICKS.f.sum(), rel=5e-3)


@pytest.mark.parametrize("kind", SHAPES)
def test_integral_with_vibronic_progression_returns_sum_of_f(kind):
    curve = simulate(STICKS, LineShape(kind, 0.03), WIDE, Progression(1.3, 0.18))
    assert integrated_f(curve) == pytest.approx(STICKS.f.sum(), rel=5e-3)


def test_wide_lorentzian_loses_exactly_its_analytic_tails():
    # for a broad Lorentzian a finite window holds (1/pi)[atan(2(b-E)/G) - atan(2(a-E)/G)] of each band
    grid = energy_grid(1.0, 8.0, 0.0005)
    g = 0.4
    curve = simulate(STICKS, LineShape("lorentzian", g), grid)
    a, b = grid[0], grid[-1]
    expected = sum(f * (math.atan(2 * (b - e) / g) - math.atan(2 * (a - e) / g)) / math.pi
                   for e, f in zip(STICKS.energy_ev, STICKS.f))
    assert integrated_f(curve) == pytest.approx(expected, rel=2e-4)


def test_gaussian_peak_follows_the_fwhm_shortcut():
    # f ~= 4.6e-9 eps_max FWHM(cm-1) for a Gaussian band (common practice, from memory): 4.319e-9 * 1.0645
    fwhm_ev = 0.35
    curve = simulate(Sticks([2.8], [0.9]), LineShape("gaussian", fwhm_ev), energy_grid(1.0, 5.0, 0.0005))
    eps_max = curve.epsilon.max()
    assert 0.9 / (eps_max * fwhm_ev * EV_CM1) == pytest.approx(4.6e-9, rel=3e-3)


def _measured_fwhm(shape: LineShape) -> float:
    x = np.linspace(-3, 3, 600001)
    y = shape.profile(x)
    above = x[y >= 0.5 * y.max()]
    return above[-1] - above[0]


@pytest.mark.parametrize("kind,share", [("gaussian", 0.5), ("lorentzian", 0.5), ("voigt", 0.0), ("voigt", 0.3),
                                        ("voigt", 0.7), ("voigt", 1.0)])
def test_profile_has_the_requested_fwhm_and_unit_area(kind, share):
    shape = LineShape(kind, 0.25, share)
    # Olivero & Longbothum (1977) width formula: 0.02 % accuracy
    assert _measured_fwhm(shape) == pytest.approx(0.25, rel=5e-4)
    if kind != "lorentzian" and share < 1.0:
        x = np.linspace(-40, 40, 800001)
        assert np.trapezoid(shape.profile(x), x) == pytest.approx(1.0, rel=2e-3)


def test_fwhm_in_wavenumbers_equals_the_same_width_in_ev():
    a = LineShape.make("gaussian", 2000.0, "cm-1")
    assert a.fwhm_ev == pytest.approx(2000.0 / EV_CM1, rel=1e-12)
    assert a.fwhm_ev == pytest.approx(0.24797, rel=1e-4)  # 2000 cm-1 = 0.248 eV (common practice)


def test_poisson_progression_keeps_strength_and_mean_energy():
    prog = Progression(1.7, 0.17)
    off, w = prog.lines()
    assert w.sum() == pytest.approx(1.0, abs=1e-9)
    assert w @ off == pytest.approx(0.0, abs=1e-9)  # first moment stays at the vertical energy
    # Poisson: I_1/I_0 = S (Huang & Rhys 1950)
    assert w[1] / w[0] == pytest.approx(1.7, rel=1e-12)
    # the 0-0 line sits S*hw below the vertical energy
    assert off[0] == pytest.approx(-1.7 * 0.17)


def test_no_jacobian_on_the_wavelength_axis():
    # eps is a coefficient, not a density: its value at lambda is its value at E = hc/lambda
    shape = LineShape("gaussian", 0.3)
    curve = simulate(STICKS, shape, energy_grid(2.0, 6.0, 0.001))
    k = int(np.argmax(curve.epsilon))
    lam = curve.wavelength_nm[k]
    assert epsilon(np.array([HC_EV_NM / lam]), STICKS, shape)[0] == pytest.approx(curve.epsilon[k], rel=1e-12)
    # and the maximum sits at the band energy on either axis
    assert lam == pytest.approx(HC_EV_NM / 5.0, abs=0.1)


@pytest.mark.parametrize("bad", [dict(kind="triangle"), dict(fwhm_ev=-0.1), dict(fwhm_ev=float("nan")),
                                 dict(kind="voigt", lorentz_share=1.5)])
def test_bad_shape_parameters_are_refused(bad):
    with pytest.raises(InputError):
        LineShape(**bad)


def test_bad_sticks_and_units_are_refused():
    with pytest.raises(InputError):
        Sticks([3.0, 4.0], [0.1])
    with pytest.raises(InputError):
        Sticks([-3.0], [0.1])
    with pytest.raises(InputError):
        LineShape.make("gaussian", 0.3, "nm")
    with pytest.raises(InputError):
        Progression(-1.0, 0.17)
