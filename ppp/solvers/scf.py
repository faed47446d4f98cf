"""Closed-shell (restricted) Hartree-Fock SCF for the PPP model in its orthonormal ZDO basis.

Fock matrix (Pople 1953; Pariser & Parr 1953), with density P = 2 C_occ C_occ^T:

    F_ii = h_ii + 1/2 P_ii gamma_ii + sum_{j != i} P_jj gamma_ij
    F_ij = h_ij - 1/2 P_ij gamma_ij                                   (i != j)

Electronic energy E = 1/2 sum_ij P_ij (h_ij + F_ij).

Convergence acceleration: DIIS on the commutator FP - PF (Pulay 1980, 1982). Fallback for hard cases:
level shifting of the virtual space (Saunders & Hillier 1973) with density damping, then DIIS again.
A run that still fails returns ``converged=False``; callers must not use its orbitals for excited states.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Default thresholds: energy change (eV) and max |FP - PF| (eV).
CONV_TOL_ENERGY = 1e-11
CONV_TOL_GRAD = 1e-9


@dataclass(frozen=True)
class SCFResult:
    """Outcome of an SCF run.

    Attributes
    ----------
    converged : bool
    iterations : int, Fock builds over all attempts
    e_elec : float, electronic energy, eV (core-core repulsion not included)
    mo_energy : (N,) orbital energies, eV, ascending
    mo_coeff : (N, N) orbitals in columns
    dens : (N, N) density matrix P (trace = n_electrons)
    fock : (N, N) Fock matrix at ``dens``, eV
    max_error : float, final max |FP - PF|, eV
    strategy : str, which attempt produced the result ("diis", "level-shift", ...)
    """

    converged: bool
    iterations: int
    e_elec: float
    mo_energy: np.ndarray
    mo_coeff: np.ndarray
    dens: np.ndarray
    fock: np.ndarray
    max_error: float
    strategy: str


def fock_matrix(core: np.ndarray, gamma: np.ndarray, dens: np.ndarray) -> np.ndarray:
    """PPP Fock matrix (N, N), eV, from core h, gamma and density P (equation in the module doc)."""
    f = core - 0.5 * dens * gamma
    f[np.diag_indices_from(f)] += gamma @ np.diag(dens)
    return f


def electronic_energy(core: np.ndarray, fock: np.ndarray, dens: np.ndarray) -> float:
    """E = 1/2 sum_ij P_ij (h_ij + F_ij), eV."""
    return 0.5 * float(np.sum(dens * (core + fock)))


def density(mo_coeff: np.ndarray, n_occ: int) -> np.ndarray:
    """Closed-shell density P = 2 C_occ C_occ^T."""
    c = mo_coeff[:, :n_occ]
    return 2.0 * c @ c.T


def _diis_extrapolate(focks: list, errors: list) -> np.ndarray:
    n = len(focks)
    b = np.empty((n + 1, n + 1))
    b[-1, :] = b[:, -1] = -1.0
    b[-1, -1] = 0.0
    for i in range(n):
        for j in range(i + 1):
            b[i, j] = b[j, i] = float(np.vdot(errors[i], errors[j]))
    rhs = np.zeros(n + 1)
    rhs[-1] = -1.0
    scale = np.max(np.abs(b[:n, :n]))
    if scale > 0:
        b[:n, :n] /= scale
    try:  # least squares: B becomes near-singular as the error vectors shrink at convergence
        coef = np.linalg.lstsq(b, rhs, rcond=None)[0]
    except np.linalg.LinAlgError:
        return focks[-1]
    if not np.all(np.isfinite(coef)):
        return focks[-1]
    return sum(c * f for c, f in zip(coef[:n], focks))


def iterate(core: np.ndarray, gamma: np.ndarray, n_occ: int, dens0: np.ndarray, *, max_iter: int,
            use_diis: bool = True, diis_space: int = 8, level_shift: float = 0.0, damping: float = 0.0,
            conv_tol: float = CONV_TOL_ENERGY, conv_tol_grad: float = CONV_TOL_GRAD):
    """One SCF attempt from a starting density. Returns (converged, iterations, dens)."""
    dens = dens0
    e_old = np.inf
    focks, errors = [], []
    n = core.shape[0]
    for it in range(1, max_iter + 1):
        fock = fock_matrix(core, gamma, dens)
        e = electronic_energy(core, fock, dens)
        err = fock @ dens - dens @ fock
        max_err = float(np.max(np.abs(err)))
        if abs(e - e_old) < conv_tol and max_err < conv_tol_grad:
            return True, it, dens
        e_old = e
        f_use = fock
        if use_diis:
            focks.append(fock)
            errors.append(err)
            if len(focks) > diis_space:
                focks.pop(0)
                errors.pop(0)
            if len(focks) >= 2:
                f_use = _diis_extrapolate(focks, errors)
        if level_shift:
            f_use = f_use + level_shift * (np.eye(n) - 0.5 * dens)
        _, c = np.linalg.eigh(f_use)
        new = density(c, n_occ)
        dens = (1.0 - damping) * new + damping * dens if damping else new
    return False, max_iter, dens


def kernel(core: np.ndarray, gamma: np.ndarray, n_occ: int, *, max_iter: int = 100,
           conv_tol: float = CONV_TOL_ENERGY, conv_tol_grad: float = CONV_TOL_GRAD,
           dens0: np.ndarray | None = None, fallback: bool = True) -> SCFResult:
    """Restricted closed-shell SCF.

    Parameters
    ----------
    core : (N, N) core Hamiltonian, eV
    gamma : (N, N) two-centre repulsion, eV
    n_occ : number of doubly occupied orbitals
    max_iter : Fock builds allowed per attempt
    dens0 : optional (N, N) starting density; default: Hueckel-like guess from diagonalising ``core``
    fallback : try level shifting and damping when plain DIIS fails

    The attempts are: DIIS; then level shift 1 eV with damping 0.3 (no DIIS) followed by DIIS from its
    density; then level shift 4 eV with damping 0.5 for four times as many iterations, followed by DIIS.
    The orbitals returned always diagonalise the unshifted Fock matrix of the final density, and a
    solution whose aufbau occupation disagrees with its density is reported as not converged.
    """
    core = np.asarray(core, dtype=float)
    gamma = np.asarray(gamma, dtype=float)
    n = core.shape[0]
    if not 0 < n_occ < n:
        raise ValueError(f"n_occ = {n_occ} must lie between 1 and N - 1 = {n - 1}")
    if dens0 is None:
        _, c0 = np.linalg.eigh(core)
        dens0 = density(c0, n_occ)
    kw = dict(conv_tol=conv_tol, conv_tol_grad=conv_tol_grad)
    attempts = [("diis", [dict(max_iter=max_iter)])]
    if fallback:
        attempts += [
            ("level-shift", [dict(max_iter=max_iter, use_diis=False, level_shift=1.0, damping=0.3),
                             dict(max_iter=max_iter)]),
            ("strong-level-shift", [dict(max_iter=4 * max_iter, use_diis=False, level_shift=4.0, damping=0.5),
                                    dict(max_iter=max_iter)]),
        ]
    total = 0
    dens = dens0
    strategy = "diis"
    converged = False
    for strategy, steps in attempts:
        dens = dens0
        converged = False
        for step in steps:
            converged, it, dens = iterate(core, gamma, n_occ, dens, **step, **kw)
            total += it
        # the stabilised (shifted, damped) stage only prepares the density; DIIS must confirm it
        if converged and _is_aufbau(core, gamma, dens, n_occ):
            break
        converged = False
    fock = fock_matrix(core, gamma, dens)
    mo_energy, mo_coeff = np.linalg.eigh(fock)
    if converged:
        # final orbitals from the unshifted Fock matrix; use them to make the returned density exact
        dens = density(mo_coeff, n_occ)
        fock = fock_matrix(core, gamma, dens)
        mo_energy, mo_coeff = np.linalg.eigh(fock)
    err = fock @ dens - dens @ fock
    return SCFResult(
        converged=bool(converged), iterations=int(total), e_elec=electronic_energy(core, fock, dens),
        mo_energy=mo_energy, mo_coeff=mo_coeff, dens=dens, fock=fock,
        max_error=float(np.max(np.abs(err))), strategy=strategy,
    )


def _is_aufbau(core, gamma, dens, n_occ, tol=1e-6) -> bool:
    """True when the lowest n_occ orbitals of F(P) reproduce P (no hole below the Fermi level)."""
    _, c = np.linalg.eigh(fock_matrix(core, gamma, dens))
    return bool(np.max(np.abs(density(c, n_occ) - dens)) < tol)
