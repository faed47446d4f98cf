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
import scipy.linalg


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


def _pair_products(ca: np.ndarray, cb: np.ndarray) -> np.ndarray:
    """(N, na*nb) array of C_mu,p C_mu,q over all pairs (p in ca, q in cb)."""
    n = ca.shape[0]
    return (ca[:, :, None] * cb[:, None, :]).reshape(n, -1)


def cis_matrix(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
               multiplicity: int = 1) -> np.ndarray:
    """Dense CIS matrix A (n_occ*n_vir, n_occ*n_vir), eV; index ia = i * n_vir + a."""
    if multiplicity not in (1, 3):
        raise ValueError("multiplicity must be 1 or 3")
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    o, v = co.shape[1], cv.shape[1]
    # exchange-type (ij|ab), arranged as [ia, jb]
    j_int = (_pair_products(co, co).T @ gamma @ _pair_products(cv, cv)).reshape(o, o, v, v)
    a = -j_int.transpose(0, 2, 1, 3).reshape(o * v, o * v)
    if multiplicity == 1:
        b = _pair_products(co, cv)  # (N, o*v) transition densities
        a += 2.0 * (b.T @ gamma @ b)
    diag = (mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None]).ravel()
    a[np.diag_indices_from(a)] += diag
    return a


def kernel(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, n_states: int,
           multiplicity: int = 1) -> CISResult:
    """Lowest ``n_states`` CIS roots (all of them if fewer exist).

    Parameters
    ----------
    mo_energy : (N,) eV;  mo_coeff : (N, N);  gamma : (N, N) eV
    n_occ : doubly occupied orbitals;  n_states : roots wanted;  multiplicity : 1 or 3
    """
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    k = max(0, min(int(n_states), o * v))
    if k == 0:
        return CISResult(multiplicity, np.zeros(0), np.zeros((0, o, v)))
    a = cis_matrix(mo_energy, mo_coeff, gamma, n_occ, multiplicity)
    if k < o * v:
        w, x = scipy.linalg.eigh(a, subset_by_index=[0, k - 1], driver="evr")
    else:
        w, x = scipy.linalg.eigh(a)
    x = x.T.reshape(k, o, v)
    # fix the arbitrary sign of each root: largest coefficient positive (reproducible output)
    flat = x.reshape(k, -1)
    sign = np.sign(flat[np.arange(k), np.argmax(np.abs(flat), axis=1)])
    x = x * sign[:, None, None]
    return CISResult(multiplicity, w, x)
