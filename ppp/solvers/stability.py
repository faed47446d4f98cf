"""Internal stability of a closed-shell SCF solution, and following an instability downhill.

For real orbital rotations kappa_ia the second-order energy change of a closed-shell determinant is
kappa^T (A + B) kappa with (Seeger & Pople 1977; Bauernschmitt & Ahlrichs 1996)

    (A + B)_ia,jb = delta_ij delta_ab (e_a - e_i) + 4 (ia|jb) - (ib|ja) - (ij|ab),

two-electron integrals over MOs in the ZDO form (pq|rs) = sum C_mu,p C_mu,q gamma_mu,nu C_nu,r C_nu,s.
A negative eigenvalue means the SCF landed on a saddle point (common for symmetric starting guesses of
large acenes or planar cyclooctatetraene): rotating the orbitals along its eigenvector and restarting
the SCF finds a lower closed-shell solution.
"""
from __future__ import annotations

import numpy as np
import scipy.linalg

from . import cis as cis_solver
from . import scf as scf_solver
from .rpa import b_matrix  # the same B block as the random-phase approximation

#: Largest orbital-rotation space (n_occ * n_vir) for which the dense Hessian is built.
MAX_DENSE_ROTATIONS = 4000


def real_hessian(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int) -> np.ndarray:
    """Closed-shell real-rotation Hessian A + B, (n_occ*n_vir, n_occ*n_vir), eV; index ia = i*n_vir + a.

    A is the singlet CIS matrix; B_ia,jb = 2 (ia|jb) - (ib|ja).
    """
    return cis_solver.cis_matrix(mo_energy, mo_coeff, gamma, n_occ, 1) + b_matrix(mo_coeff, gamma, n_occ)


def lowest_mode(mo_energy, mo_coeff, gamma, n_occ) -> tuple[float, np.ndarray]:
    """Lowest eigenvalue (eV) of A + B and its eigenvector as (n_occ, n_vir)."""
    h = real_hessian(mo_energy, mo_coeff, gamma, n_occ)
    w, x = scipy.linalg.eigh(h, subset_by_index=[0, 0])
    return float(w[0]), x[:, 0].reshape(n_occ, -1)


def rotate(mo_coeff: np.ndarray, n_occ: int, kappa: np.ndarray) -> np.ndarray:
    """Orbitals C exp(K) with K antisymmetric, K[i, a] = kappa_ia (occupied-virtual block)."""
    n = mo_coeff.shape[0]
    k = np.zeros((n, n))
    k[:n_occ, n_occ:] = kappa
    k[n_occ:, :n_occ] = -kappa.T
    return mo_coeff @ scipy.linalg.expm(k)


def follow(core: np.ndarray, gamma: np.ndarray, n_occ: int, result: scf_solver.SCFResult, *,
           max_rounds: int = 4, steps: tuple[float, ...] = (0.3, 0.6, 1.0, 1.5), tol: float = -1e-6,
           max_iter: int = 100) -> scf_solver.SCFResult | None:
    """Follow internal instabilities downhill until the closed-shell solution is a minimum.

    Each round rotates the orbitals along the lowest Hessian mode by each of ``steps`` (radians, both
    signs) and restarts the SCF; DIIS tends to pull small rotations back to the saddle point, hence the
    range of step sizes. The lowest converged solution is kept. Returns the stable, lower-energy
    SCFResult, the input itself when it is already stable, or None when no stable closed-shell solution
    was reached (too many rounds, SCF failure, or a rotation space too large for the dense Hessian).
    """
    current = result
    for _ in range(max_rounds + 1):
        o, v = n_occ, current.mo_coeff.shape[0] - n_occ
        if o * v > MAX_DENSE_ROTATIONS:
            return None
        w, mode = lowest_mode(current.mo_energy, current.mo_coeff, gamma, n_occ)
        if w > tol:
            return current
        best = None
        for step, sign in ((st, sg) for st in steps for sg in (1.0, -1.0)):
            c = rotate(current.mo_coeff, n_occ, sign * step * mode / np.linalg.norm(mode))
            trial = scf_solver.kernel(core, gamma, n_occ, dens0=scf_solver.density(c, n_occ), max_iter=max_iter)
            if trial.converged and trial.e_elec < current.e_elec - 1e-8 and (best is None or trial.e_elec < best.e_elec):
                best = trial
        if best is None:
            return None
        current = best
    return None
