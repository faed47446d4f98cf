"""Band shapes: stick spectra broadened in energy into molar absorptivity curves.

Every band is a unit-area profile g(E) (1/eV) on the photon-energy axis, scaled so that the integrated
band returns the oscillator strength (Mulliken 1939; Strickler & Berg 1962):

    f = K * integral eps(nu~) d nu~,     K = 4 eps0 m_e c^2 ln10 / (N_A e^2) = 4.319e-9 (ppp.units)

so that, with d nu~ = EV_CM1 dE,

    eps(E) = sum_i f_i g(E - E_i) / (K * EV_CM1)          [M^-1 cm^-1].

eps is a molar absorption *coefficient*, not a spectral density: shown against wavelength the axis is
mapped point by point (lambda = hc/E) and no Jacobian is applied.

Optional vibronic shape: each electronic band becomes a Franck-Condon progression of one effective
displaced harmonic mode (Huang & Rhys 1950): line n at E_00 + n*hw with Poisson weight
exp(-S) S^n / n!. The weights sum to one, so f is unchanged; E_00 = E_vert - S*hw keeps the first
moment of the band at the computed vertical energy (the mean of a displaced-oscillator progression is
E_00 + S*hw; Lax 1952).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputError
from ..units import EV_CM1, F_PER_INTEGRATED_EPSILON, cm1_to_ev, ev_to_nm, nm_to_ev

SHAPES = ("gaussian", "lorentzian", "voigt")
FWHM_UNITS = ("eV", "cm-1")

#: Default band FWHM, eV: 0.3 eV (about 2400 cm^-1) is a typical width of a dye's pi->pi* band in
#: solution (common practice, from memory).
DEFAULT_FWHM_EV = 0.30
#: Default FWHM of each vibronic line when a progression is used (common practice, from memory).
DEFAULT_VIBRONIC_FWHM_EV = 0.12
#: Default effective mode: aromatic/polyene C=C stretch, about 1370-1600 cm^-1 (0.17-0.20 eV), with a
#: Huang-Rhys factor near 1 for pi->pi* bands of rigid dyes (common practice, from memory).
DEFAULT_MODE_EV = 0.17
DEFAULT_HUANG_RHYS = 1.0

_GAUSS_FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))


def epsilon_per_f_ev() -> float:
    """Factor turning f * g(E) (g in 1/eV) into eps in M^-1 cm^-1: 1 / (K * EV_CM1)."""
    return 1.0 / (F_PER_INTEGRATED_EPSILON * EV_CM1)


@dataclass(frozen=True)
class LineShape:
    """A unit-area band profile on the energy axis.

    kind : "gaussian", "lorentzian" or "voigt"
    fwhm_ev : full width at half maximum of the whole band, eV
    lorentz_share : Voigt only: Lorentzian FWHM as a fraction of the total FWHM (0 = Gaussian,
                    1 = Lorentzian)
    """

    kind: str = "gaussian"
    fwhm_ev: float = DEFAULT_FWHM_EV
    lorentz_share: float = 0.5

    def __post_init__(self):
        if self.kind not in SHAPES:
            raise InputError(f"unknown line shape '{self.kind}'; valid: {', '.join(SHAPES)}")
        if not (math.isfinite(self.fwhm_ev) and self.fwhm_ev > 0):
            raise InputError(f"FWHM must be a positive number, got {self.fwhm_ev!r} eV")
        if not (0.0 <= self.lorentz_share <= 1.0):
            raise InputError(f"Lorentzian share must lie between 0 and 1, got {self.lorentz_share!r}")

    @classmethod
    def make(cls, kind: str = "gaussian", fwhm: float | None = None, unit: str = "eV",
             lorentz_share: float = 0.5) -> "LineShape":
        """Build from a FWHM given in eV or cm^-1 (None: the default width)."""
        if unit not in FWHM_UNITS:
            raise InputError(f"unknown FWHM unit '{unit}'; valid: {', '.join(FWHM_UNITS)}")
        if fwhm is None:
            return cls(kind, DEFAULT_FWHM_EV, lorentz_share)
        width = float(fwhm) if unit == "eV" else float(cm1_to_ev(float(fwhm)))
        return cls(kind, width, lorentz_share)

    def with_fwhm(self, fwhm_ev: float) -> "LineShape":
        return LineShape(self.kind, float(fwhm_ev), self.lorentz_share)

    def voigt_widths(self) -> tuple[float, float]:
        """(Gaussian FWHM, Lorentzian FWHM) in eV whose Voigt profile has FWHM ``fwhm_ev``.

        Olivero & Longbothum (1977): f_V = 0.5346 f_L + sqrt(0.2166 f_L^2 + f_G^2), accurate to 0.02 %.
        """
        f_l = self.lorentz_share * self.fwhm_ev
        f_g2 = (self.fwhm_ev - 0.5346 * f_l) ** 2 - 0.2166 * f_l ** 2
        return math.sqrt(max(f_g2, 0.0)), f_l

    def profile(self, x_ev: np.ndarray) -> np.ndarray:
        """Unit-area profile (1/eV) at offsets ``x_ev`` = E - E_band (any shape)."""
        x = np.asarray(x_ev, dtype=float)
        if self.kind == "gaussian":
            sigma = self.fwhm_ev / _GAUSS_FWHM_PER_SIGMA
            return np.exp(-0.5 * (x / sigma) ** 2) / (sigma * math.sqrt(2.0 * math.pi))
        if self.kind == "lorentzian":
            hw = 0.5 * self.fwhm_ev
            return (hw / math.pi) / (x * x + hw * hw)
        import scipy.special

        f_g, f_l = self.voigt_widths()
        # scipy.special.voigt_profile(x, sigma, gamma): sigma = Gaussian std, gamma = Lorentzian HWHM
        return scipy.special.voigt_profile(x, f_g / _GAUSS_FWHM_PER_SIGMA, 0.5 * f_l)

    def describe(self) -> str:
        s = f"{self.kind}, FWHM {self.fwhm_ev:.3f} eV ({self.fwhm_ev * EV_CM1:.0f} cm-1)"
        if self.kind == "voigt":
            s += f", Lorentzian share {self.lorentz_share:.2f}"
        return s


@dataclass(frozen=True)
class Progression:
    """Single-mode vibronic progression (Huang & Rhys 1950).

    huang_rhys : S, dimensionless (>= 0)
    mode_ev : effective mode energy hbar*omega, eV (> 0)
    """

    huang_rhys: float = DEFAULT_HUANG_RHYS
    mode_ev: float = DEFAULT_MODE_EV

    def __post_init__(self):
        if not (math.isfinite(self.huang_rhys) and 0.0 <= self.huang_rhys <= 20.0):
            raise InputError(f"Huang-Rhys factor must lie between 0 and 20, got {self.huang_rhys!r}")
        if not (math.isfinite(self.mode_ev) and 0.0 < self.mode_ev <= 1.0):
            raise InputError(f"vibronic mode energy must lie in (0, 1] eV, got {self.mode_ev!r}")

    def lines(self) -> tuple[np.ndarray, np.ndarray]:
        """Offsets from the vertical energy (eV) and Poisson weights of the progression members.

        Members are kept until the remaining tail weight is below 1e-9 (the weights then sum to one
        within 1e-9).
        """
        import scipy.special

        s = self.huang_rhys
        n_max = int(math.ceil(s + 12.0 * math.sqrt(s) + 12.0))
        n = np.arange(n_max + 1)
        w = np.exp(-s + n * math.log(s) - scipy.special.gammaln(n + 1)) if s > 0 else (n == 0).astype(float)
        offsets = (n - s) * self.mode_ev  # E_00 + n hw - E_vert with E_00 = E_vert - S hw
        keep = w > 1e-12
        return offsets[keep], w[keep]

    def describe(self) -> str:
        return (f"vibronic progression S = {self.huang_rhys:.2f}, mode {self.mode_ev:.3f} eV "
                f"({self.mode_ev * EV_CM1:.0f} cm-1)")


class _EnergyAxis:
    """Wavelength and wavenumber views of an ``energy_ev`` array (eV)."""

    energy_ev: np.ndarray

    @property
    def wavelength_nm(self) -> np.ndarray:
        return ev_to_nm(self.energy_ev)

    @property
    def wavenumber_cm1(self) -> np.ndarray:
        return self.energy_ev * EV_CM1


@dataclass(frozen=True)
class Sticks(_EnergyAxis):
    """A stick spectrum: vertical energies (eV), oscillator strengths and labels, shape (k,)."""

    energy_ev: np.ndarray
    f: np.ndarray
    labels: tuple[str, ...] = field(default=())

    def __post_init__(self):
        e = np.atleast_1d(np.asarray(self.energy_ev, dtype=float))
        f = np.atleast_1d(np.asarray(self.f, dtype=float))
        if e.shape != f.shape or e.ndim != 1:
            raise InputError(f"energies and oscillator strengths differ in shape: {e.shape} vs {f.shape}")
        if not (np.all(np.isfinite(e)) and np.all(np.isfinite(f))):
            raise InputError("energies and oscillator strengths must be finite numbers")
        if np.any(e <= 0):
            raise InputError("excitation energies must be positive")
        if np.any(f < 0):
            raise InputError("oscillator strengths must not be negative")
        labels = tuple(self.labels) if self.labels else tuple(f"band {k + 1}" for k in range(len(e)))
        if len(labels) != len(e):
            raise InputError(f"{len(labels)} labels for {len(e)} bands")
        object.__setattr__(self, "energy_ev", e)
        object.__setattr__(self, "f", f)
        object.__setattr__(self, "labels", labels)

    def shifted(self, shift_ev: float) -> "Sticks":
        return Sticks(self.energy_ev + shift_ev, self.f, self.labels)


@dataclass(frozen=True)
class Curve(_EnergyAxis):
    """A broadened spectrum on an energy grid.

    energy_ev : (n,) ascending photon energies, eV
    epsilon : (n,) molar absorptivity, M^-1 cm^-1
    """

    energy_ev: np.ndarray
    epsilon: np.ndarray

    def peaks(self, min_fraction: float = 0.02) -> list[tuple[float, float]]:
        """Local maxima (energy eV, eps) higher than ``min_fraction`` of the curve's maximum,
        strongest first."""
        y = self.epsilon
        if len(y) < 3 or not np.any(y > 0):
            return []
        idx = np.flatnonzero((y[1:-1] > y[:-2]) & (y[1:-1] >= y[2:])) + 1
        idx = idx[y[idx] >= min_fraction * y.max()]
        idx = idx[np.argsort(-y[idx])]
        return [(float(self.energy_ev[i]), float(y[i])) for i in idx]

    def at(self, energy_ev: np.ndarray) -> np.ndarray:
        """Linear interpolation onto other energies (zero outside the grid)."""
        return np.interp(energy_ev, self.energy_ev, self.epsilon, left=0.0, right=0.0)


def energy_grid(lo_ev: float, hi_ev: float, step_ev: float = 0.002) -> np.ndarray:
    """Uniform ascending energy grid from lo to hi (both included up to one step), eV."""
    if not (0 < lo_ev < hi_ev):
        raise InputError(f"energy range must satisfy 0 < low < high, got {lo_ev!r} .. {hi_ev!r} eV")
    n = int(math.ceil((hi_ev - lo_ev) / step_ev)) + 1
    return np.linspace(lo_ev, hi_ev, n)


def wavelength_window_grid(lo_nm: float, hi_nm: float, step_ev: float = 0.002) -> np.ndarray:
    """Energy grid covering a wavelength window (nm), eV, ascending."""
    if not (0 < lo_nm < hi_nm):
        raise InputError(f"wavelength range must satisfy 0 < low < high, got {lo_nm!r} .. {hi_nm!r} nm")
    return energy_grid(float(nm_to_ev(hi_nm)), float(nm_to_ev(lo_nm)), step_ev)


def epsilon(energy_ev: np.ndarray, sticks: Sticks, shape: LineShape,
            progression: Progression | None = None) -> np.ndarray:
    """Molar absorptivity (M^-1 cm^-1) of the broadened sticks at ``energy_ev`` (any shape, eV).

    Cost O(n_grid * n_bands * n_vibronic); fine for the few tens of CIS states ppp reports.
    """
    e = np.asarray(energy_ev, dtype=float)
    out = np.zeros(e.shape)
    if progression is None:
        offsets, weights = np.zeros(1), np.ones(1)
    else:
        offsets, weights = progression.lines()
    for e0, f in zip(sticks.energy_ev, sticks.f):
        if f == 0.0:
            continue
        for off, w in zip(offsets, weights):
            out += (f * w) * shape.profile(e - (e0 + off))
    return out * epsilon_per_f_ev()


def simulate(sticks: Sticks, shape: LineShape, grid_ev: np.ndarray,
             progression: Progression | None = None) -> Curve:
    """Broadened spectrum of ``sticks`` on ``grid_ev`` (ascending, eV)."""
    grid = np.asarray(grid_ev, dtype=float)
    if grid.ndim != 1 or len(grid) < 2 or np.any(np.diff(grid) <= 0):
        raise InputError("energy grid must be one-dimensional and strictly ascending")
    return Curve(grid, epsilon(grid, sticks, shape, progression))


def integrated_f(curve: Curve) -> float:
    """K * integral eps d nu~ over the curve's grid (trapezoid rule): the oscillator strength the
    curve holds within its window."""
    return float(F_PER_INTEGRATED_EPSILON * np.trapezoid(curve.epsilon, curve.wavenumber_cm1))
