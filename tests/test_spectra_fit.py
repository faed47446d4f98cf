"""Fitting a simulated spectrum to a measured one.

The synthetic "measured" spectra are made here from known shift, scale and width (the law checked: a
least-squares fit of the exact model recovers its parameters). Pearson similarity is checked against
scipy.stats.pearsonr (reference library).
"""
import numpy as np
import pytest
import scipy.stats

from ppp.errors import InputError
from ppp.spectra.fitting import fit_spectrum, similarity
from ppp.spectra.lineshapes import LineShape, Progression, Sticks, epsilon
from ppp.spectra.measured import make_spectrum
from ppp.units import HC_EV_NM

STICKS = Sticks([2.95, 4.10, 4.85], [1.1, 0.15, 0.45], ("S1", "S2", "S3"))
TRUE_SHIFT, TRUE_SCALE, TRUE_FWHM = -0.21, 2.6e-5, 0.42


def synthetic(noise: float = 0.0, rng=None, shape="gaussian", progression=None):
    wl = np.arange(240.0, 650.0, 1.0)
    e = HC_EV_NM / wl
    y = TRUE_SCALE * epsilon(e, STICKS.shifted(TRUE_SHIFT), LineShape(shape, TRUE_FWHM), progression)
    if noise:
        y = y + rng.normal(0.0, noise * y.max(), size=y.shape)
    return make_spectrum(wl, y, "nm", "absorbance", "synthetic.csv")


def test_gaussian_fit_recovers_shift_scale_width():
    meas = synthetic()
    fit = fit_spectrum(STICKS, meas, LineShape("gaussian", 0.30))
    assert fit.success
    assert fit.shift_ev == pytest.approx(TRUE_SHIFT, rel=0.01)
    assert fit.scale == pytest.approx(TRUE_SCALE, rel=0.01)
    assert fit.fwhm_ev == pytest.approx(TRUE_FWHM, rel=0.01)
    assert fit.after.pearson == pytest.approx(1.0, abs=1e-4)
    assert fit.after.pearson > fit.before.pearson


def test_fit_with_noise_still_recovers_parameters_within_errors():
    rng = np.random.default_rng(7)
    meas = synthetic(noise=0.01, rng=rng)
    fit = fit_spectrum(STICKS, meas, LineShape("gaussian", 0.30))
    assert fit.shift_ev == pytest.approx(TRUE_SHIFT, rel=0.01)
    assert fit.scale == pytest.approx(TRUE_SCALE, rel=0.01)
    assert fit.fwhm_ev == pytest.approx(TRUE_FWHM, rel=0.01)
    # the reported standard errors are of the size of the actual deviations (within 5 sigma)
    assert abs(fit.shift_ev - TRUE_SHIFT) < 5 * fit.shift_err
    assert abs(fit.fwhm_ev - TRUE_FWHM) < 5 * fit.fwhm_err


def test_fit_starts_far_from_the_answer_and_still_finds_it():
    # start width half the truth and the bands 0.21 eV off: the coarse scan must find the basin
    meas = synthetic(shape="lorentzian")
    fit = fit_spectrum(STICKS, meas, LineShape("lorentzian", 0.2))
    assert fit.shift_ev == pytest.approx(TRUE_SHIFT, rel=0.01)
    assert fit.fwhm_ev == pytest.approx(TRUE_FWHM, rel=0.01)


def test_vibronic_fit_recovers_shift():
    prog = Progression(0.9, 0.17)
    meas = synthetic(progression=prog)
    fit = fit_spectrum(STICKS, meas, LineShape("gaussian", 0.1), prog)
    assert fit.shift_ev == pytest.approx(TRUE_SHIFT, rel=0.01)
    assert fit.fwhm_ev == pytest.approx(TRUE_FWHM, rel=0.01)


def test_fixed_width_fits_shift_and_scale_only():
    meas = synthetic()
    fit = fit_spectrum(STICKS, meas, LineShape("gaussian", TRUE_FWHM), fit_width=False)
    assert fit.fwhm_ev == TRUE_FWHM
    assert np.isnan(fit.fwhm_err)
    assert fit.shift_ev == pytest.approx(TRUE_SHIFT, rel=0.01)


def test_fit_window_restricts_points():
    meas = synthetic()
    fit = fit_spectrum(STICKS, meas, LineShape("gaussian", 0.3), window_ev=(HC_EV_NM / 600, HC_EV_NM / 350))
    assert fit.n_points == int(np.sum((meas.wavelength_nm >= 350) & (meas.wavelength_nm <= 600)))
    with pytest.raises(InputError):
        fit_spectrum(STICKS, meas, LineShape("gaussian", 0.3), window_ev=(0.5, 0.6))


def test_similarity_definitions():
    rng = np.random.default_rng(3)
    a, b = rng.random(50), rng.random(50)
    s = similarity(a, b)
    assert s.pearson == pytest.approx(scipy.stats.pearsonr(a, b)[0], rel=1e-12)
    assert s.cosine == pytest.approx(a @ b / np.linalg.norm(a) / np.linalg.norm(b), rel=1e-12)
    same = similarity(a, 3.0 * a + 2.0)
    assert same.pearson == pytest.approx(1.0, abs=1e-12)  # offset and scale do not matter to Pearson
    assert same.cosine < 1.0  # but the offset matters to the cosine


def test_hopeless_fit_reports_its_parameters_at_the_limits():
    # a single narrow band far in the UV cannot describe a visible spectrum: the fit must say so
    meas = synthetic()
    fit = fit_spectrum(Sticks([7.5], [0.5]), meas, LineShape("gaussian", 0.3))
    assert "shift" in fit.at_bounds
    good = fit_spectrum(STICKS, meas, LineShape("gaussian", 0.3))
    assert good.at_bounds == ()
