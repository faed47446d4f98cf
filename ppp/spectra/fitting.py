"""Fit a simulated spectrum to a measured one, and score their likeness.

Model of the measured curve y(E) from the simulated sticks (E_i, f_i):

    y(E) = s * eps(E; {E_i + dE}, f_i, band FWHM w)

with three parameters: energy shift dE (eV, added to every computed band), intensity scale s
(measured units per M^-1 cm^-1: for an absorbance spectrum s = c*l of the sample if the computed f
were exact) and band FWHM w (eV). Least squares over the measured points in the fit window by
``scipy.optimize.least_squares`` (trust-region reflective, bounds w in [0.02, 2] eV, s >= 0,
|dE| <= 3 eV). The start is the best point of a coarse scan over dE and w with s solved linearly at
each point, so the fit does not stop at a local minimum next to the starting guess. Standard errors
come from the Jacobian at the solution, sigma^2 (J^T J)^-1 with sigma^2 = residual sum of squares /
(m - 3): they assume independent, equal noise on the points.

Similarity, on a common grid of 400 energies evenly spaced over the fit window (measured values
linearly interpolated):

* cosine = a.b / (|a| |b|) - shape and baseline together (1 = proportional curves);
* pearson = the cosine of the mean-subtracted curves (Pearson r) - insensitive to a constant offset.

The score reported as "similarity" is the Pearson r.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import ConvergenceError, InputError
from ..units import EV_CM1, HC_EV_NM
from .lineshapes import LineShape, Progression, Sticks, epsilon
from .measured import MeasuredSpectrum

WIDTH_BOUNDS_EV = (0.02, 2.0)
SHIFT_BOUND_EV = 3.0
N_SIMILARITY_GRID = 400


@dataclass(frozen=True)
class Similarity:
    cosine: float
    pearson: float


@dataclass(frozen=True)
class FitResult:
    """Outcome of :func:`fit_spectrum`.

    shift_ev, scale, fwhm_ev : fitted values; *_err : one-sigma standard errors (NaN if undefined)
    rms : root-mean-square residual (measured units); n_points : points in the fit window
    window_ev : (lo, hi) fit window, eV
    before, after : similarity of the unfitted simulation (no shift, start width) and of the fit
    success : least_squares reported convergence; message : its status text
    """

    shift_ev: float
    scale: float
    fwhm_ev: float
    shift_err: float
    scale_err: float
    fwhm_err: float
    rms: float
    n_points: int
    window_ev: tuple[float, float]
    before: Similarity
    after: Similarity
    success: bool
    message: str
    shape: LineShape
    progression: Progression | None
    at_bounds: tuple[str, ...] = ()

    @property
    def shift_cm1(self) -> float:
        return self.shift_ev * EV_CM1

    def model(self, sticks: Sticks, energy_ev: np.ndarray) -> np.ndarray:
        """Fitted model curve at ``energy_ev`` (measured units)."""
        return self.scale * epsilon(energy_ev, sticks.shifted(self.shift_ev), self.shape.with_fwhm(self.fwhm_ev),
                                    self.progression)

    def to_dict(self) -> dict:
        return {"shift_ev": self.shift_ev, "shift_ev_err": self.shift_err, "shift_cm1": self.shift_cm1,
                "scale": self.scale, "scale_err": self.scale_err, "fwhm_ev": self.fwhm_ev, "fwhm_ev_err": self.fwhm_err,
                "fwhm_cm1": self.fwhm_ev * EV_CM1, "rms_residual": self.rms, "n_points": self.n_points,
                "window_ev": list(self.window_ev),
                "window_nm": [HC_EV_NM / self.window_ev[1], HC_EV_NM / self.window_ev[0]],
                "similarity_before": {"cosine": self.before.cosine, "pearson": self.before.pearson},
                "similarity_after": {"cosine": self.after.cosine, "pearson": self.after.pearson},
                "line_shape": self.shape.kind, "converged": self.success, "message": self.message,
                "at_bounds": list(self.at_bounds)}


def similarity(a: np.ndarray, b: np.ndarray) -> Similarity:
    """Cosine and Pearson similarity of two curves sampled on the same grid (see module docstring)."""
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    na, nb = np.linalg.norm(a), np.linalg.norm(b)
    cos = float(a @ b / (na * nb)) if na > 0 and nb > 0 else float("nan")
    ac, bc = a - a.mean(), b - b.mean()
    nac, nbc = np.linalg.norm(ac), np.linalg.norm(bc)
    r = float(ac @ bc / (nac * nbc)) if nac > 0 and nbc > 0 else float("nan")
    return Similarity(cos, r)


def _window(meas: MeasuredSpectrum, window_ev: tuple[float, float] | None) -> tuple[np.ndarray, np.ndarray, tuple]:
    e, y = meas.energy_ev, meas.values
    lo, hi = (float(e[0]), float(e[-1])) if window_ev is None else (min(window_ev), max(window_ev))
    keep = (e >= lo) & (e <= hi)
    if keep.sum() < 5:
        raise InputError(f"{meas.source}: fewer than 5 measured points inside the fit window "
                         f"{HC_EV_NM / hi:.0f}-{HC_EV_NM / lo:.0f} nm")
    return e[keep], y[keep], (lo, hi)


def best_scale(model: np.ndarray, y: np.ndarray) -> float:
    mm = float(model @ model)
    return max(float(model @ y) / mm, 0.0) if mm > 0 else 0.0


def fit_spectrum(sticks: Sticks, meas: MeasuredSpectrum, shape: LineShape,
                 progression: Progression | None = None, window_ev: tuple[float, float] | None = None,
                 fit_width: bool = True) -> FitResult:
    """Least-squares fit of energy shift, intensity scale and (optionally) band FWHM; see module doc."""
    import scipy.optimize

    e, y, win = _window(meas, window_ev)
    if not np.any(sticks.f > 0):
        raise InputError("all computed oscillator strengths are zero: nothing to fit")
    if not np.any(y > 0):
        raise InputError(f"{meas.source}: no positive intensity inside the fit window")
    w0 = min(max(shape.fwhm_ev, WIDTH_BOUNDS_EV[0]), WIDTH_BOUNDS_EV[1])

    def curve(shift, width):
        return epsilon(e, sticks.shifted(shift), shape.with_fwhm(width), progression)

    # coarse scan: shift every 0.02 eV over +-2 eV, three widths, scale solved linearly
    best = (math.inf, 0.0, w0)
    widths = [w0] if not fit_width else sorted({min(max(w0 * k, WIDTH_BOUNDS_EV[0]), WIDTH_BOUNDS_EV[1])
                                                 for k in (0.5, 1.0, 2.0)})
    for width in widths:
        for shift in np.arange(-2.0, 2.0 + 1e-9, 0.02):
            m = curve(shift, width)
            s = best_scale(m, y)
            cost = float(np.sum((s * m - y) ** 2))
            if cost < best[0]:
                best = (cost, float(shift), width)
    _, shift0, width0 = best
    scale0 = best_scale(curve(shift0, width0), y)
    if scale0 <= 0:
        raise ConvergenceError(f"{meas.source}: no positive intensity scale matches the measured spectrum")
    y_norm = float(np.max(np.abs(y)))

    def resid(p):
        shift, logscale = p[0], p[1]
        width = p[2] if fit_width else width0
        return (math.exp(logscale) * curve(shift, width) - y) / y_norm

    p0 = [shift0, math.log(scale0)] + ([width0] if fit_width else [])
    lo = [-SHIFT_BOUND_EV, -math.inf] + ([WIDTH_BOUNDS_EV[0]] if fit_width else [])
    hi = [SHIFT_BOUND_EV, math.inf] + ([WIDTH_BOUNDS_EV[1]] if fit_width else [])
    sol = scipy.optimize.least_squares(resid, p0, bounds=(lo, hi), x_scale=[0.05, 0.1] + ([0.05] if fit_width else []),
                                       xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=2000)
    if not np.all(np.isfinite(sol.x)):
        raise ConvergenceError(f"{meas.source}: spectrum fit diverged ({sol.message})")
    shift, scale = float(sol.x[0]), float(math.exp(sol.x[1]))
    width = float(sol.x[2]) if fit_width else width0
    m_pts = len(y)
    n_par = len(sol.x)
    rss = float(np.sum(sol.fun ** 2))
    errs = [float("nan")] * 3
    if m_pts > n_par:
        try:
            cov = np.linalg.inv(sol.jac.T @ sol.jac) * rss / (m_pts - n_par)
            sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
            errs = [float(sd[0]), float(scale * sd[1]), float(sd[2]) if fit_width else float("nan")]
        except np.linalg.LinAlgError:
            pass
    rms = math.sqrt(rss / m_pts) * y_norm
    grid = np.linspace(win[0], win[1], N_SIMILARITY_GRID)
    y_grid = np.interp(grid, meas.energy_ev, meas.values)
    before = similarity(epsilon(grid, sticks, shape, progression), y_grid)
    after = similarity(epsilon(grid, sticks.shifted(shift), shape.with_fwhm(width), progression), y_grid)
    at_bounds = []
    if abs(abs(shift) - SHIFT_BOUND_EV) < 1e-6:
        at_bounds.append("shift")
    if fit_width and min(abs(width - b) for b in WIDTH_BOUNDS_EV) < 1e-6:
        at_bounds.append("fwhm")
    return FitResult(shift, scale, width, errs[0], errs[1], errs[2], rms, m_pts, win, before, after,
                     bool(sol.success), str(sol.message), shape, progression, tuple(at_bounds))
