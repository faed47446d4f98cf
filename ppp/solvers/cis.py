"""Configuration interaction singles (CIS; Tamm-Dancoff) on a closed-shell PPP reference.

Spin-adapted CIS matrices (Foresman, Head-Gordon, Pople & Frisch 1992), real orbitals, i,j occupied,
a,b virtual:

    singlets:  A_ia,jb = delta_ij delta_ab (e_a - e_i) + 2 (ia|jb) - (ij|ab)
    triplets:  A_ia,jb = delta_ij delta_ab (e_a - e_i)            - (ij|ab)

Under zero differential overlap every two-electron integral over MOs reduces to the gamma matrix:

    (pq|rs) = sum_{mu,nu} C_mu,p C_mu,q gamma_mu,nu C_nu,r C_nu,s .

The dense path builds A in O(N^2 n_occ n_vir + n_occ^2 n_vir^2 N) work and diagonalises it.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import ConvergenceError, InputError, TooLargeError
from .eigen import lowest_eigenpairs


@dataclass(frozen=True)
class CISResult:
    """Lowest CIS roots of one spin multiplicity.

    Attributes
    ----------
    multiplicity : 1 (singlet) or 3 (triplet)
    energies : (k,) excitation energies, eV, ascending
    amplitudes : (k, n_occ, n_vir) normalised CI coefficients X_ia of each root
    """

    multiplicity: int
    energies: np.ndarray
    amplitudes: np.ndarray


def pair_products(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
    """(N, na*nb) array of C_mu,p C_mu,q over all pairs (p in ca, q in cb)."""
    n = ca.shape[0]
    return (ca[:, :, None] * cb[:, None, :]).reshape(n, -1)


def exchange_integrals(mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int) -> np.ndarray:
    """Exchange-type integrals (ij|ab) = sum_mu,nu C_mu,i C_mu,j gamma_mu,nu C_nu,a C_nu,b, eV, as an
    (n_occ^2, n_vir^2) array [ij, ab]. Both spin-adapted CIS matrices contain them (module doc), so a
    caller that builds the singlet and the triplet matrix of the same orbitals can make them once
    and pass them to :func:`cis_matrix` / :func:`kernel` (``exchange=``)."""
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    return (pair_products(co, co).T @ gamma) @ pair_products(cv, cv)


def exchange_block(exchange: np.ndarray, n_occ: int, n_vir: int) -> np.ndarray:
    """The :func:`exchange_integrals` (ij|ab) [ij, ab] rearranged as they enter the CIS matrices,
    (n_occ, n_vir, n_occ, n_vir) [i, a, j, b] (a contiguous copy, the same numbers): the singlet and the
    triplet matrix of the same orbitals then read them in their own order (:func:`cis_matrix`)."""
    return np.swapaxes(exchange.reshape(n_occ, n_occ, n_vir, n_vir), 1, 2).copy()


def cis_matrix(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
               multiplicity: int = 1, exchange: np.ndarray | None = None) -> np.ndarray:
    """Dense CIS matrix A (n_occ*n_vir, n_occ*n_vir), eV; index ia = i * n_vir + a.

    exchange : optional exchange integrals of the same orbitals (read, not changed), either as made by
        :func:`exchange_integrals` (2-D, [ij, ab]) or by :func:`exchange_block` (4-D, [i, a, j, b]);
        made here when not given. The matrix is the same in all three cases, bit for bit.
    """
    if multiplicity not in (1, 3):
        raise ValueError("multiplicity must be 1 or 3")
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    o, v = co.shape[1], cv.shape[1]
    # exchange-type (ij|ab) as [i, a, j, b] (a swapped view of [ij, ab], or a block in that order); the
    # Coulomb-type part is computed first straight into the result, then the exchange is subtracted.
    # Two large arrays only: fresh large temporaries cost page faults that took longer than the
    # products here.
    if exchange is None:
        j_int = np.swapaxes(exchange_integrals(mo_coeff, gamma, n_occ).reshape(o, o, v, v), 1, 2)
    elif exchange.ndim == 4 and exchange.shape == (o, v, o, v):
        j_int = exchange
    elif exchange.shape == (o * o, v * v):
        j_int = np.swapaxes(exchange.reshape(o, o, v, v), 1, 2)
    else:
        raise ValueError(f"exchange integrals of shape {exchange.shape} do not fit {o} occupied and {v} "
                         f"virtual orbitals")
    if multiplicity == 1:
        b = pair_products(co, cv)  # (N, o*v) transition densities
        a = (2.0 * (b.T @ gamma)) @ b
        a.reshape(o, v, o, v)[...] -= j_int
    else:
        a = np.empty((o * v, o * v))
        np.negative(j_int, out=a.reshape(o, v, o, v))
    del j_int
    diag = (mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None]).ravel()
    a.ravel()[::o * v + 1] += diag  # the diagonal as a strided view (no index arrays, no flat iterator)
    return a


#: Solver names accepted by :func:`kernel`.
SOLVERS = ("auto", "dense", "iterative")
#: "auto" uses the dense matrix up to this many configurations n_occ * n_vir, Davidson above. Measured
#: on the generated dyes of dye_library(300, seed=1) (11 singlet roots, i.e. 10 + 1 for the degeneracy check
#: of align_degenerate, and 10 triplets; one BLAS thread,
#: 2-core machine shared with other jobs, both solvers in turn on each molecule): dense/iterative time
#: 0.76 at 400-450 configurations, 0.85 at 450-500, 1.05 at 500-550, 1.21 at 550-600, 1.38 at 600-650,
#: 1.67 at 650-700 (benchmarks/bench_crossover.py: 0.80 at 400-499, 1.08 at 500-599).
DENSE_MAX_CONFIGURATIONS = 500
#: "dense" refuses matrices above this many bytes (the diagonaliser needs about three times as much).
DENSE_MAX_BYTES = 2 * 2**30
#: Roots closer than this (eV) form one degenerate level for :func:`align_degenerate`.
DEGENERACY_TOL = 1e-6


def choose_solver(n_occ: int, n_vir: int, solver: str = "auto") -> str:
    """"dense" or "iterative" for a problem of n_occ * n_vir configurations."""
    if solver not in SOLVERS:
        raise InputError(f"unknown CIS solver '{solver}'; valid: {', '.join(SOLVERS)}")
    if solver == "auto":
        return "dense" if n_occ * n_vir <= DENSE_MAX_CONFIGURATIONS else "iterative"
    return solver


def kernel(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, n_states: int,
           multiplicity: int = 1, solver: str = "auto", dipole_coords: np.ndarray | None = None,
           exchange: np.ndarray | None = None) -> CISResult:
    """Lowest ``n_states`` CIS roots (all of them if fewer exist).

    Parameters
    ----------
    mo_energy : (N,) eV;  mo_coeff : (N, N);  gamma : (N, N) eV
    n_occ : doubly occupied orbitals;  n_states : roots wanted;  multiplicity : 1 or 3
    solver : "dense" (full matrix, LAPACK), "iterative" (matrix-free Davidson,
        :mod:`ppp.solvers.cis_iterative`) or "auto" (dense up to ``DENSE_MAX_CONFIGURATIONS``)
    dipole_coords : optional (N, 3) centre coordinates; when given, the vectors of each degenerate
        level are rotated by :func:`align_degenerate` so that per-state oscillator strengths do not
        depend on the solver
    exchange : optional :func:`exchange_integrals` or :func:`exchange_block` of these orbitals for the
        dense matrix (e.g. shared by the singlet and triplet calls); ignored by the iterative solver

    Raises TooLargeError when the dense matrix would exceed ``DENSE_MAX_BYTES``.
    """
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    k = max(0, min(int(n_states), o * v))
    method = choose_solver(o, v, solver)
    if k == 0:
        return CISResult(multiplicity, np.zeros(0), np.zeros((0, o, v)))
    # with dipole alignment, one root more tells whether the last degenerate level is complete
    k_solve = k + 1 if dipole_coords is not None and k < o * v else k
    if method == "iterative" and k_solve < o * v:
        from . import cis_iterative
        # the extra root of the degeneracy check needs its energy only (cis_iterative.CHECK_TOL)
        res = cis_iterative.kernel(mo_energy, mo_coeff, gamma, n_occ, k_solve, multiplicity, n_check=k_solve - k)
        w, x = res.energies, res.amplitudes
    else:
        need = 8.0 * (o * v) ** 2
        if need > DENSE_MAX_BYTES:
            raise TooLargeError(
                f"dense CIS matrix of {o * v} configurations needs {need / 2**30:.1f} GB; use the "
                f"iterative solver")
        a = cis_matrix(mo_energy, mo_coeff, gamma, n_occ, multiplicity, exchange)
        # a is symmetric and C-ordered, so a.T is the same matrix in the Fortran order LAPACK works in:
        # no copy of the largest array; the finiteness check follows on the (few) results instead
        w, x = _lowest_eigenpairs(a.T, k_solve)
        del a
        if not (np.isfinite(w).all() and np.isfinite(x).all()):
            raise ConvergenceError("dense CIS eigensolver returned non-finite values")
        x = x.T.reshape(-1, o, v)
    if dipole_coords is not None:
        x = align_degenerate(w, x, mo_coeff, n_occ, dipole_coords)
    w, x = w[:k], x[:k]
    # fix the arbitrary sign of each root: largest coefficient positive (reproducible output)
    flat = x.reshape(k, -1)
    sign = np.sign(flat[np.arange(k), np.abs(flat).argmax(axis=1)])
    x = x * sign[:, None, None]
    return CISResult(multiplicity, w, x)


def _lowest_eigenpairs(a: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest k eigenpairs (w (k,), x (n, k)) of the symmetric Fortran-ordered matrix ``a``, which may be
    overwritten: LAPACK called directly, by the route fastest at its size (:mod:`ppp.solvers.eigen`)."""
    w, x, info = lowest_eigenpairs(a, k, overwrite=True)
    if info != 0:
        raise ConvergenceError(f"dense CIS eigensolver failed (LAPACK info {info})")
    return w, x


def align_degenerate(energies: np.ndarray, amplitudes: np.ndarray, mo_coeff: np.ndarray, n_occ: int,
                     coords: np.ndarray, tol: float = DEGENERACY_TOL) -> np.ndarray:
    """Rotate the CI vectors inside each degenerate level to a solver-independent basis.

    Any orthonormal basis of a degenerate level is an equally valid set of eigenvectors, but the
    oscillator strength of each member depends on the choice. With M (g x 3) the transition dipoles
    <0|r|n> = sum_ia X^n_ia <i|r|a> of the g members and M = U S W^T its singular value decomposition,
    the vectors U^T X carry the mutually orthogonal dipoles S W^T: the first takes the largest
    possible share, the second the largest share orthogonal to it, and so on. The per-state
    strengths (proportional to S_k^2) are then unique; only the members of a level with equal S_k
    (e.g. the two components of an E-type level of a symmetric molecule) keep an arbitrary mixing,
    which leaves their strengths unchanged. A level cut by the last root computed is left alone.

    amplitudes : (k, n_occ, n_vir); coords : (N, 3). Returns the rotated amplitudes (a new array), or
    ``amplitudes`` itself when no level is degenerate.
    """
    k = len(energies)
    if k < 2:
        return amplitudes
    e = np.asarray(energies).tolist()  # Python floats: the scan below costs a tenth of numpy scalars'
    if all(b - a >= tol for a, b in zip(e, e[1:])):
        return amplitudes  # no degenerate level (the common case): nothing to rotate
    out = np.array(amplitudes, copy=True)
    dip = None
    start = 0
    while start < k:
        stop = start + 1
        while stop < k and e[stop] - e[stop - 1] < tol:
            stop += 1
        if stop - start > 1 and stop < k:
            x = out[start:stop].reshape(stop - start, -1)
            if dip is None:  # <i|r|a> (n_occ * n_vir, 3)
                from ..analysis.properties import dipole_integrals
                dip = dipole_integrals(mo_coeff, n_occ, coords).reshape(3, -1).T
            m = x @ dip  # transition dipoles of the members, (g, 3), up to the common sqrt(2)
            u, _, _ = np.linalg.svd(m, full_matrices=True)
            out[start:stop] = (u.T @ x).reshape(stop - start, *out.shape[1:])
        start = stop
    return out
