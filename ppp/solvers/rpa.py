"""Singlet excitations in the random-phase approximation (RPA; time-dependent Hartree-Fock).

CIS (Tamm-Dancoff) keeps only the excitation block A of the linear-response problem. The full
problem couples excitations X and de-excitations Y through the matrix B (McLachlan & Ball, Rev. Mod.
Phys. 36, 844 (1964); in the PPP model e.g. Linderberg & Ohrn, "Propagators in Quantum Chemistry"
(1973)):

    | A  B | |X|       | 1  0 | |X|
    | B  A | |Y| = w   | 0 -1 | |Y| ,

spin-adapted singlet blocks over real closed-shell orbitals (i,j occupied, a,b virtual)

    A_ia,jb = delta_ij delta_ab (e_a - e_i) + 2 (ia|jb) - (ij|ab)
    B_ia,jb =                                 2 (ia|jb) - (ib|ja)

with (pq|rs) = sum_{mu,nu} C_mu,p C_mu,q gamma_mu,nu C_nu,r C_nu,s (zero differential overlap). For a
stable real SCF solution A + B and A - B are positive definite, and with Z = X + Y, T = X - Y

    (A + B) Z = w T,   (A - B) T = w Z,   so   (A - B)(A + B) Z = w^2 Z,    Z.T = 1.

Dense path: A - B = L L^T (Cholesky), then L^T (A + B) L u = w^2 u is a symmetric eigenproblem and
Z = L u / sqrt(w). Large systems: the two-matrix Davidson method of Stratmann, Scuseria & Frisch,
J. Chem. Phys. 109, 8218 (1998), with matrix-free products (A +- B) x built from the ZDO structure in
O(N^2 n_occ) work per vector and O(N^2) memory.

The transition dipole of state n is sqrt(2) sum_ia Z_ia <i|r|a>; the weight of configuration
i -> a in state n is X_ia^2 - Y_ia^2 (these sum to 1 over ia).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

from ..errors import ConvergenceError, TooLargeError
from . import cis as cis_solver
from .cis_iterative import orthonormal_complement


@dataclass(frozen=True)
class RPAResult:
    """Lowest singlet RPA roots.

    Attributes
    ----------
    multiplicity : always 1
    energies : (k,) excitation energies w, eV, ascending
    amplitudes : (k, n_occ, n_vir) Z = X + Y, normalised so that Z.(X - Y) = 1: transition dipoles and
        transition densities computed from them with the CIS formulas are exact for RPA
    weights : (k, n_occ, n_vir) configuration weights X^2 - Y^2 (each root sums to 1)
    """

    multiplicity: int
    energies: np.ndarray
    amplitudes: np.ndarray
    weights: np.ndarray

    def character_amplitudes(self) -> np.ndarray:
        """sign(Z) * sqrt(|X^2 - Y^2|), (k, n_occ, n_vir): squares are the configuration weights."""
        return np.sign(self.amplitudes) * np.sqrt(np.abs(self.weights))


class RPAInstabilityError(ConvergenceError):
    """A - B or A + B is not positive definite, or a root is (numerically) zero: the closed-shell
    reference is unstable or at the edge of a symmetry-breaking instability."""


#: A root below this (eV) is a zero-frequency (symmetry-breaking, Goldstone-type) mode of the reference
#: (Thouless 1960), not an excitation: treated as an instability.
ZERO_MODE_EV = 1e-3


def b_matrix(mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int) -> np.ndarray:
    """Dense singlet B (n_occ*n_vir, n_occ*n_vir), eV: B_ia,jb = 2 (ia|jb) - (ib|ja); index ia = i*n_vir + a."""
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    o, v = co.shape[1], cv.shape[1]
    ov = cis_solver.pair_products(co, cv)
    k = (ov.T @ gamma @ ov).reshape(o, v, o, v)  # (ia|jb) as [i, a, j, b]
    return (2.0 * k - k.transpose(0, 3, 2, 1)).reshape(o * v, o * v)


def products(mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, x: np.ndarray, diag: np.ndarray):
    """Matrix-free ((A + B) x, (A - B) x) for a block of vectors x (m, n_occ*n_vir), eV.

    With W = C_occ x C_vir^T (N x N per vector):
        (ia|jb) x_jb = sum_mu C_mu,i C_mu,a (gamma t)_mu,   t_mu = W_mu,mu
        (ij|ab) x_jb = (C_occ^T (gamma o W)   C_vir)_ia
        (ib|ja) x_jb = (C_occ^T (gamma o W^T) C_vir)_ia
    (o: element-wise product). O(m N^2 n_occ) work, O(m N^2) memory.
    """
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    o, v = co.shape[1], cv.shape[1]
    m = x.shape[0]
    xs = x.reshape(m, o, v)
    w = co @ xs @ cv.T                                      # (m, N, N)
    t = np.einsum("kmm->km", w)                             # (m, N)
    coul = np.einsum("mi,ma,km->kia", co, cv, t @ gamma)    # (ia|jb) x
    k1 = co.T @ (gamma * w) @ cv                            # (ij|ab) x
    k2 = co.T @ (gamma * w.transpose(0, 2, 1)) @ cv         # (ib|ja) x
    dx = xs * diag.reshape(o, v)
    apb = dx + 4.0 * coul - k1 - k2
    amb = dx - k1 + k2
    return apb.reshape(m, -1), amb.reshape(m, -1)


def _package(w: np.ndarray, z: np.ndarray, t: np.ndarray, o: int, v: int) -> RPAResult:
    """Fix signs and package roots: w (k,), z and t (k, o*v) with Z_k.T_l = delta_kl."""
    k = len(w)
    sign = np.sign(z[np.arange(k), np.argmax(np.abs(z), axis=1)])
    z, t = z * sign[:, None], t * sign[:, None]
    x, y = 0.5 * (z + t), 0.5 * (z - t)
    return RPAResult(1, w, z.reshape(k, o, v), (x * x - y * y).reshape(k, o, v))


def _check_lowest(w2_min: float) -> None:
    """Refuse a reference whose lowest squared RPA frequency (eV^2) is not clearly positive."""
    if w2_min <= 0.0:
        raise RPAInstabilityError("A + B is not positive definite (unstable closed-shell reference)")
    if w2_min < ZERO_MODE_EV ** 2:
        raise RPAInstabilityError(f"zero-frequency RPA mode ({np.sqrt(w2_min):.1e} eV): the closed-shell "
                                  f"reference is at a symmetry-breaking instability")


def dense(mo_energy, mo_coeff, gamma, n_occ, n_states):
    """Lowest singlet RPA roots from the dense matrices (Cholesky of A - B).

    Returns (w (k,) eV, Z (k, o*v), T (k, o*v)) with Z_k . T_l = delta_kl."""
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    apb = cis_solver.cis_matrix(mo_energy, mo_coeff, gamma, n_occ, 1)  # A, then A + B in place
    b = b_matrix(mo_coeff, gamma, n_occ)
    amb = apb - b
    apb += b
    del b
    try:
        chol = scipy.linalg.cholesky(amb, lower=True, overwrite_a=True)
    except np.linalg.LinAlgError:
        raise RPAInstabilityError("A - B is not positive definite (unstable closed-shell reference)") from None
    m = chol.T @ apb @ chol
    k = min(n_states, o * v)
    if k < o * v:
        w2, u = scipy.linalg.eigh(m, subset_by_index=[0, k - 1], driver="evr")
    else:
        w2, u = scipy.linalg.eigh(m)
    _check_lowest(w2[0])
    w = np.sqrt(w2)
    z = (chol @ u / np.sqrt(w)).T                           # (k, o*v), Z.T = 1
    t = (apb @ z.T).T / w[:, None]
    return w, z, t


def davidson(mo_energy, mo_coeff, gamma, n_occ, n_states, *, tol=1e-6, max_iter=200,
             max_space=None):
    """Lowest singlet RPA roots, matrix-free (Stratmann, Scuseria & Frisch 1998); returns as :func:`dense`.

    The subspace b (orthonormal columns) carries both (A + B) b and (A - B) b; the projected problem
    (b^T (A - B) b)(b^T (A + B) b) z = w^2 z is solved as in :func:`dense`. Residuals
    r1 = (A + B) Z - w T and r2 = (A - B) T - w Z are preconditioned with the orbital-energy
    differences (Davidson 1975) and added to the subspace. Converged when every wanted root has
    |r1|, |r2| < tol (eV). Raises ConvergenceError otherwise, never returns unconverged roots.
    """
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    dim = o * v
    k = min(n_states, dim)
    diag = (mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None]).ravel()
    n_start = min(dim, max(2 * k, k + 4))
    # start: unit vectors on the lowest orbital-energy differences, extended over ties
    order = np.argsort(diag, kind="stable")
    while n_start < dim and diag[order[n_start]] - diag[order[n_start - 1]] < 1e-8:
        n_start += 1
    basis = np.zeros((n_start, dim))
    basis[np.arange(n_start), order[:n_start]] = 1.0
    max_space = max_space or max(8 * k, 40)
    sp, sm = products(mo_coeff, gamma, n_occ, basis, diag)
    for _ in range(max_iter):
        p = basis @ sp.T
        mm = basis @ sm.T
        p, mm = 0.5 * (p + p.T), 0.5 * (mm + mm.T)
        try:
            chol = np.linalg.cholesky(mm)
        except np.linalg.LinAlgError:
            raise RPAInstabilityError("A - B is not positive definite in the Davidson subspace "
                                      "(unstable closed-shell reference)") from None
        w2, u = np.linalg.eigh(chol.T @ p @ chol)
        _check_lowest(w2[0])
        w = np.sqrt(w2[:k])
        zs = chol @ u[:, :k] / np.sqrt(w)                   # subspace Z, (space, k)
        ts = (p @ zs) / w
        z, t = (zs.T @ basis), (ts.T @ basis)
        r1 = zs.T @ sp - w[:, None] * t                     # (A + B) Z - w T
        r2 = ts.T @ sm - w[:, None] * z                     # (A - B) T - w Z
        norms = np.maximum(np.linalg.norm(r1, axis=1), np.linalg.norm(r2, axis=1))
        if np.all(norms < tol):
            return w, z, t
        todo = norms >= tol
        denom = diag[None, :] - w[todo][:, None]
        denom = np.where(np.abs(denom) < 1e-4, np.copysign(1e-4, denom), denom)
        new = np.vstack([r1[todo] / denom, r2[todo] / denom])
        if basis.shape[0] + new.shape[0] > max_space:
            # collapse onto the current Z and T of the wanted roots (restart)
            keep = np.linalg.qr(np.vstack([zs.T, ts.T]).T)[0].T
            basis = keep @ basis
            sp, sm = keep @ sp, keep @ sm
        # orthonormal to the basis and among themselves to round-off (the CIS Davidson's routine), so that
        # the projected A - B is positive definite whenever A - B is
        q, _ = orthonormal_complement(basis, new)
        if len(q) == 0:
            break
        qp, qm = products(mo_coeff, gamma, n_occ, q, diag)
        basis = np.vstack([basis, q])
        sp, sm = np.vstack([sp, qp]), np.vstack([sm, qm])
    raise ConvergenceError(f"RPA Davidson did not converge for {k} roots of {dim} configurations "
                           f"(largest residual {norms.max():.1e} eV)")


#: "auto" solves densely up to this many configurations n_occ * n_vir and iteratively above. Measured on
#: 120 generated dyes (one BLAS thread, 10 roots + 1): dense 54 ms against iterative 60 ms at 600-700
#: configurations, 94 against 72 ms at 700-1000 (the dense path needs three n^2 matrices: 12 MB at 700).
DENSE_MAX_CONFIGURATIONS = 700


def kernel(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, n_states: int,
           solver: str = "auto", dipole_coords: np.ndarray | None = None) -> RPAResult:
    """Lowest ``n_states`` singlet RPA roots.

    solver : "dense", "iterative" or "auto" (dense up to ``DENSE_MAX_CONFIGURATIONS``)
    dipole_coords : optional (N, 3): degenerate levels are rotated to a solver-independent basis
        (:func:`ppp.solvers.cis.align_degenerate`) so that per-state oscillator strengths are unique
    Raises RPAInstabilityError (a ConvergenceError) for an unstable reference, TooLargeError when the
    dense matrices would not fit.
    """
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    k = max(0, min(int(n_states), o * v))
    if k == 0:
        z = np.zeros((0, o, v))
        return RPAResult(1, np.zeros(0), z, z)
    k_solve = k + 1 if dipole_coords is not None and k < o * v else k
    method = cis_solver.choose_solver(o, v, solver)
    if solver == "auto":
        method = "dense" if o * v <= DENSE_MAX_CONFIGURATIONS else "iterative"
    if method == "iterative" and k_solve < o * v:
        w, z, t = davidson(mo_energy, mo_coeff, gamma, n_occ, k_solve)
    else:
        need = 3 * 8.0 * (o * v) ** 2
        if need > cis_solver.DENSE_MAX_BYTES:
            raise TooLargeError(f"dense RPA matrices of {o * v} configurations need {need / 2**30:.1f} GB; "
                                f"use the iterative solver")
        w, z, t = dense(mo_energy, mo_coeff, gamma, n_occ, k_solve)
    if dipole_coords is not None:
        # Inside a degenerate level any orthogonal mix U of the (Z, T) pairs is as valid; with
        # Z_k . T_l = delta_kl the mix chosen for Z is U = Z' T^T, and T follows as T' = U T.
        z_rot = cis_solver.align_degenerate(w, z.reshape(-1, o, v), mo_coeff, n_occ, dipole_coords)
        z_rot = z_rot.reshape(len(w), -1)
        moved = np.any(z_rot != z, axis=1)
        if moved.any():
            rot = np.eye(len(w))
            rot[moved] = z_rot[moved] @ t.T
            t = rot @ t
            z = z_rot
    return _package(w[:k], z[:k], t[:k], o, v)
