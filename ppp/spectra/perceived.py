"""Perceived colour of a solution from its absorption spectrum (CIE colorimetry via colour-science).

Transmittance of the sample (Beer-Lambert law):  T(lambda) = 10^(-eps(lambda) c l).
Tristimulus values of T under CIE illuminant D65 with the CIE 1931 2-degree standard observer
(CIE 15:2004), computed by ``colour.sd_to_XYZ`` (ASTM E308 tables method, its default), normalised so
that a perfect transmitter has Y = 100. From XYZ: chromaticity xy, CIE 1976 L*a*b* relative to the D65
white, and sRGB (IEC 61966-2-1) with its transfer function. sRGB values outside [0, 1] are flagged as
out of gamut and clipped for the hex code.
"""
from __future__ import annotations

import functools
import math
import warnings
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

#: Wavelength window of the colour calculation, nm: the practice range 360-780 nm of ASTM E308, which
#: colour-science's default method uses.
COLOUR_RANGE_NM = (360.0, 780.0)
#: Default sample: a dilute dye solution in a 1 cm cell (common practice).
DEFAULT_CONCENTRATION_M = 5e-5
DEFAULT_PATH_CM = 1.0
_OBSERVER = "CIE 1931 2 Degree Standard Observer"


@dataclass(frozen=True)
class PerceivedColour:
    """Colour of a transmitted D65 beam.

    xyz : (3,) CIE XYZ, Y = 100 for a perfect transmitter
    xy : (2,) chromaticity
    lab : (3,) CIE L*a*b* (D65 white)
    srgb : (3,) non-linear sRGB before clipping (may leave [0, 1])
    hex : "#rrggbb" of the clipped sRGB
    out_of_gamut : True when any sRGB channel left [0, 1] by more than 1e-3
    """

    xyz: np.ndarray
    xy: np.ndarray
    lab: np.ndarray
    srgb: np.ndarray
    hex: str
    out_of_gamut: bool

    @property
    def hue_deg(self) -> float:
        """CIELAB hue angle h_ab = atan2(b*, a*), degrees in [0, 360)."""
        return math.degrees(math.atan2(self.lab[2], self.lab[1])) % 360.0

    @property
    def chroma(self) -> float:
        """CIELAB chroma C*_ab = sqrt(a*^2 + b*^2)."""
        return float(math.hypot(self.lab[1], self.lab[2]))

    def to_dict(self) -> dict:
        return {"XYZ": [round(float(v), 4) for v in self.xyz], "xy": [round(float(v), 5) for v in self.xy],
                "Lab": [round(float(v), 3) for v in self.lab], "sRGB": [round(float(v), 4) for v in self.srgb],
                "hex": self.hex, "out_of_gamut": self.out_of_gamut, "hue_deg": round(self.hue_deg, 2),
                "chroma": round(self.chroma, 3)}

    def describe(self) -> str:
        gamut = " (outside the sRGB gamut: clipped)" if self.out_of_gamut else ""
        return (f"{self.hex}{gamut}; XYZ {self.xyz[0]:.2f} {self.xyz[1]:.2f} {self.xyz[2]:.2f}; "
                f"xy {self.xy[0]:.4f} {self.xy[1]:.4f}; L*a*b* {self.lab[0]:.1f} {self.lab[1]:.1f} {self.lab[2]:.1f}")


def colour_from_xyz(xyz_100: np.ndarray) -> PerceivedColour:
    """xy, L*a*b*, sRGB and hex of tristimulus values on the Y = 100 scale (D65 white)."""
    import colour

    xyz = np.asarray(xyz_100, dtype=float)
    if xyz.shape != (3,) or not np.all(np.isfinite(xyz)):
        raise InputError("XYZ must be three finite numbers")
    xyz1 = xyz / 100.0
    white = colour.CCS_ILLUMINANTS[_OBSERVER]["D65"]
    xy = colour.XYZ_to_xy(xyz1) if xyz1.sum() > 0 else np.array(white, dtype=float)
    lab = colour.XYZ_to_Lab(xyz1, illuminant=white)
    rgb = colour.XYZ_to_sRGB(xyz1, illuminant=white)
    oog = bool(np.any(rgb < -1e-3) or np.any(rgb > 1.0 + 1e-3))
    hexcode = "#" + "".join(f"{int(round(255.0 * v)):02x}" for v in np.clip(rgb, 0.0, 1.0))
    return PerceivedColour(xyz, np.asarray(xy, dtype=float), np.asarray(lab, dtype=float),
                           np.asarray(rgb, dtype=float), hexcode, oog)


def xyz_of_transmittance(wavelength_nm: np.ndarray, transmittance: np.ndarray) -> np.ndarray:
    """CIE XYZ (Y = 100 scale) of a transmittance (or reflectance) spectrum under D65, 1931 2-degree
    observer, by ``colour.sd_to_XYZ``. Wavelengths ascending, nm; values are interpolated by
    colour-science onto the observer's grid."""
    import colour

    wl = np.asarray(wavelength_nm, dtype=float)
    t = np.asarray(transmittance, dtype=float)
    if wl.ndim != 1 or wl.shape != t.shape or len(wl) < 3:
        raise InputError("transmittance needs matching 1-D wavelength and value arrays (at least 3 points)")
    if np.any(np.diff(wl) <= 0):
        raise InputError("wavelengths must be strictly ascending")
    sd = colour.SpectralDistribution(dict(zip(wl.tolist(), t.tolist())), name="transmittance")
    cmfs = colour.MSDS_CMFS[_OBSERVER]
    illuminant = colour.SDS_ILLUMINANTS["D65"]
    with warnings.catch_warnings():
        # colour-science announces each (expected) re-sampling of the tables onto the sample's grid
        warnings.simplefilter("ignore", colour.utilities.ColourRuntimeWarning)
        return np.asarray(colour.sd_to_XYZ(sd, cmfs, illuminant), dtype=float)


def transmittance(epsilon: np.ndarray, concentration_m: float, path_cm: float) -> np.ndarray:
    """Beer-Lambert transmittance 10^(-eps c l); eps in M^-1 cm^-1, c in M, l in cm."""
    if not (concentration_m > 0 and path_cm > 0 and math.isfinite(concentration_m) and math.isfinite(path_cm)):
        raise InputError(f"concentration and path length must be positive, got {concentration_m!r} M, "
                         f"{path_cm!r} cm")
    return 10.0 ** (-np.asarray(epsilon, dtype=float) * concentration_m * path_cm)


def colour_of_solution(epsilon_at, concentration_m: float = DEFAULT_CONCENTRATION_M,
                       path_cm: float = DEFAULT_PATH_CM, step_nm: float = 1.0) -> PerceivedColour:
    """Perceived colour of a solution.

    epsilon_at : callable mapping wavelengths (nm, array) to molar absorptivity (M^-1 cm^-1)
    concentration_m : molar concentration, M; path_cm : cell path length, cm
    """
    wl = np.arange(COLOUR_RANGE_NM[0], COLOUR_RANGE_NM[1] + 0.5 * step_nm, step_nm)
    t = transmittance(epsilon_at(wl), concentration_m, path_cm)
    return colour_from_xyz(xyz_of_transmittance(wl, t))


@functools.lru_cache(maxsize=4)
def tristimulus_weights(step_nm: float = 1.0) -> tuple[np.ndarray, np.ndarray]:
    """(wavelengths (n,) nm over :data:`COLOUR_RANGE_NM`, weights (3, n)) with XYZ = weights @ T for a
    transmittance T sampled on those wavelengths: :func:`xyz_of_transmittance` is linear in T (tables
    method and integration alike), so its weights are its values for the unit spectra, computed by
    colour-science in one call (``colour.msds_to_XYZ``; about 0.1 s, once per process); then the colour
    of many spectra is one matrix product (:func:`colours_of_transmittances`)."""
    import colour

    wl = np.arange(COLOUR_RANGE_NM[0], COLOUR_RANGE_NM[1] + 0.5 * step_nm, step_nm)
    units = colour.MultiSpectralDistributions(np.eye(len(wl)), wl)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", colour.utilities.ColourRuntimeWarning)
        w = np.asarray(colour.msds_to_XYZ(units, colour.MSDS_CMFS[_OBSERVER], colour.SDS_ILLUMINANTS["D65"]),
                       dtype=float)
    return wl, np.ascontiguousarray(w.T)


def colours_of_transmittances(transmittances: np.ndarray, step_nm: float = 1.0) -> dict[str, np.ndarray]:
    """Colours of many samples at once: ``transmittances`` (m, n) on the grid of
    :func:`tristimulus_weights`. Returns arrays: "xyz" (m, 3) on the Y = 100 scale, "lab" (m, 3), "srgb"
    (m, 3) before clipping, "hex" (m,) strings of the clipped sRGB, "out_of_gamut" (m,) bool, as
    :func:`colour_from_xyz` gives for one."""
    import colour

    _, w = tristimulus_weights(step_nm)
    t = np.atleast_2d(np.asarray(transmittances, dtype=float))
    xyz = t @ w.T
    white = colour.CCS_ILLUMINANTS[_OBSERVER]["D65"]
    lab = np.asarray(colour.XYZ_to_Lab(xyz / 100.0, illuminant=white), dtype=float).reshape(-1, 3)
    rgb = np.asarray(colour.XYZ_to_sRGB(xyz / 100.0, illuminant=white), dtype=float).reshape(-1, 3)
    oog = np.any(rgb < -1e-3, axis=1) | np.any(rgb > 1.0 + 1e-3, axis=1)
    byte = np.rint(255.0 * np.clip(rgb, 0.0, 1.0)).astype(int)
    hexes = np.array(["#%02x%02x%02x" % tuple(b) for b in byte.tolist()], dtype=object)
    return {"xyz": xyz, "lab": lab, "srgb": rgb, "hex": hexes, "out_of_gamut": oog}


def colour_of_absorbance(wavelength_nm: np.ndarray, absorbance: np.ndarray, step_nm: float = 1.0) -> PerceivedColour:
    """Colour of a sample measured as absorbance (T = 10^-A); outside the measured window the sample is
    taken as fully transparent (A = 0)."""
    wl_in = np.asarray(wavelength_nm, dtype=float)
    order = np.argsort(wl_in)
    wl = np.arange(COLOUR_RANGE_NM[0], COLOUR_RANGE_NM[1] + 0.5 * step_nm, step_nm)
    a = np.interp(wl, wl_in[order], np.asarray(absorbance, dtype=float)[order], left=0.0, right=0.0)
    return colour_from_xyz(xyz_of_transmittance(wl, 10.0 ** (-a)))
