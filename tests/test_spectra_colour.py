"""Perceived colour of a solution.

Sources: colour-science's own documented examples (docstrings of colour.sd_to_XYZ, colour.XYZ_to_Lab,
colour.XYZ_to_xy, colour.XYZ_to_sRGB in colour-science 0.4.x); D65 white point xy = (0.3127, 0.3290)
and XYZ = (95.047, 100, 108.883) (CIE 15:2004; from memory); complementary colours of absorbed light -
absorbing orange-red light (~600 nm) looks blue/cyan, absorbing blue-violet (~450 nm) looks yellow/orange
(common practice).
"""
import numpy as np
import pytest

from ppp.errors import InputError
from ppp.spectra.lineshapes import LineShape, Sticks, epsilon
from ppp.spectra.perceived import (colour_from_xyz, colour_of_absorbance, colour_of_solution, transmittance,
                                   xyz_of_transmittance)
from ppp.units import HC_EV_NM, nm_to_ev

# colour.sd_to_XYZ docstring example: a reflectance sampled 400-700 nm every 20 nm
DOC_WL = np.arange(400.0, 701.0, 20.0)
DOC_SD = np.array([0.0641, 0.0645, 0.0562, 0.0537, 0.0559, 0.0651, 0.0705, 0.0772, 0.0870, 0.1128, 0.1360, 0.1511,
                   0.1688, 0.1996, 0.2397, 0.2852])
DOC_XYZ = np.array([0.20654008, 0.12197225, 0.05136952])  # XYZ_to_Lab / XYZ_to_xy / XYZ_to_sRGB examples


def test_tristimulus_values_match_colour_science_example():
    assert xyz_of_transmittance(DOC_WL, DOC_SD) == pytest.approx([10.8401953, 9.6841740, 6.2158913], abs=2e-7)


def test_lab_xy_srgb_match_colour_science_examples():
    c = colour_from_xyz(DOC_XYZ * 100.0)
    assert c.lab == pytest.approx([41.5278752, 52.6385830, 26.9231792], abs=2e-7)
    assert c.xy == pytest.approx([0.5436955, 0.3210794], abs=2e-7)
    assert c.srgb == pytest.approx([0.7057393, 0.1924826, 0.2235416], abs=2e-7)
    assert not c.out_of_gamut


def test_perfect_transmitter_is_the_d65_white():
    c = colour_of_solution(lambda wl: np.zeros_like(wl))
    assert c.xyz == pytest.approx([95.047, 100.0, 108.883], abs=0.01)
    assert c.xy == pytest.approx([0.3127, 0.3290], abs=2e-4)
    assert c.lab == pytest.approx([100.0, 0.0, 0.0], abs=0.02)
    assert c.hex == "#ffffff"
    assert not c.out_of_gamut


def _band_colour(nm: float):
    sticks = Sticks([float(nm_to_ev(nm))], [0.8])
    shape = LineShape("gaussian", 0.30)
    return colour_of_solution(lambda wl: epsilon(nm_to_ev(wl), sticks, shape), 5e-5, 1.0)


def test_band_near_600nm_looks_blue_cyan():
    c = _band_colour(600.0)
    # CIELAB hue: cyan ~ 190-200 deg, blue ~ 270-290 deg; blue channel dominant, red weakest
    assert 180.0 <= c.hue_deg <= 290.0
    assert c.srgb[2] > c.srgb[1] > c.srgb[0]
    assert c.chroma > 20.0


def test_band_near_450nm_looks_yellow_orange():
    c = _band_colour(450.0)
    # CIELAB hue: orange ~ 50-70 deg, yellow ~ 90-100 deg; blue channel weakest
    assert 40.0 <= c.hue_deg <= 105.0
    assert c.srgb[2] < min(c.srgb[0], c.srgb[1])
    assert c.chroma > 20.0


def test_absorbance_path_agrees_with_epsilon_path():
    sticks = Sticks([float(nm_to_ev(520.0))], [0.6])
    shape = LineShape("gaussian", 0.3)
    wl = np.arange(300.0, 900.0, 0.5)
    c, l = 3e-5, 2.0
    a = epsilon(nm_to_ev(wl), sticks, shape) * c * l
    via_a = colour_of_absorbance(wl, a)
    via_eps = colour_of_solution(lambda w: epsilon(nm_to_ev(w), sticks, shape), c, l)
    assert via_a.xyz == pytest.approx(via_eps.xyz, abs=0.02)


def test_beer_lambert_and_bad_sample():
    assert transmittance(np.array([1e4]), 1e-4, 1.0)[0] == pytest.approx(0.1)  # A = 1 -> T = 10 %
    with pytest.raises(InputError):
        transmittance(np.array([1.0]), -1.0, 1.0)
    with pytest.raises(InputError):
        xyz_of_transmittance(np.array([500.0, 400.0, 600.0]), np.ones(3))


def test_many_colours_at_once_equal_colour_science_one_by_one():
    # the batched path (weights of the linear tristimulus integral, then a matrix product) against
    # colour-science called on each spectrum: random transmittances (fixed seed) and a real dye band
    from ppp.spectra.perceived import colours_of_transmittances, tristimulus_weights, xyz_of_transmittance
    wl, _ = tristimulus_weights()
    rng = np.random.default_rng(20261202)
    t = rng.uniform(0.0, 1.0, (4, len(wl)))
    band = Sticks([float(nm_to_ev(480.0))], [1.0])
    t = np.vstack([t, transmittance(epsilon(HC_EV_NM / wl, band, LineShape()), 5e-5, 1.0)])
    many = colours_of_transmittances(t)
    for k in range(len(t)):
        one = colour_from_xyz(xyz_of_transmittance(wl, t[k]))
        np.testing.assert_allclose(many["xyz"][k], one.xyz, rtol=1e-12, atol=1e-12)
        np.testing.assert_allclose(many["lab"][k], one.lab, rtol=1e-12, atol=1e-10)
        assert many["hex"][k] == one.hex and bool(many["out_of_gamut"][k]) == one.out_of_gamut
