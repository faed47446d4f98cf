"""Lowest eigenpairs of small dense symmetric matrices by LAPACK called directly.

At the sizes of dye-sized CIS matrices (tens to a few hundred rows) and Davidson subspaces, the generic
wrappers (numpy.linalg.eigh, scipy.linalg.eigh) cost as much as the solve, and the LAPACK driver that
is fastest depends on the size and on how many pairs are wanted (:func:`lowest_eigenpairs`).
"""
from __future__ import annotations

import numpy as np
from scipy.linalg.lapack import dormqr as _ormqr, dstein as _stein, dsterf as _sterf, dsyevd as _syevd, \
    dsyevr as _syevr, dsytrd as _sytrd

#: :func:`lowest_eigenpairs` routes, by the matrix dimension m, for 10-11 wanted pairs: the full
#: divide-and-conquer solver dsyevd up to ``FULL_MAX`` rows, :func:`lowest_tridiagonal` up to
#: ``TRIDIAGONAL_MAX``, the subset driver dsyevr (MRRR) above. Measured with one BLAS thread on random
#: symmetric matrices, microseconds for dsyevr / dsyevd / tridiagonal route: m = 20: 51 / 33 / 35;
#: 36: 121 / 96 / 71; 50: 187 / 184 / 114; 80: 389 / 479 / 268; 100: 485 / 737 / 391; 140: 755 / 1271 /
#: 730; 160: 957 / 1781 / 1003; 200: 1337 / 2711 / 1544 (benchmarks/bench_eigen.py).
FULL_MAX = 28
TRIDIAGONAL_MAX = 128


def lowest_tridiagonal(a: np.ndarray, n: int):
    """Lowest ``n`` eigenpairs of the symmetric matrix ``a`` (m, m): Householder tridiagonalisation
    (dsytrd), all eigenvalues of the tridiagonal matrix by the root-free QR method (dsterf), eigenvectors
    of the wanted ones by inverse iteration (dstein, which re-orthogonalises the vectors of close
    eigenvalues), back-transformation by the Householder reflectors (dormqr on the sub-diagonal block,
    as LAPACK's dormtr does). Returns (w (n,), v (m, n)), or None when a LAPACK step reports failure.
    ``a`` is not modified."""
    m = a.shape[0]
    c, d, e, tau, info = _sytrd(a.T, lower=1)  # a symmetric: a.T is the Fortran-ordered same matrix
    if info != 0:
        return None
    e = e[:m - 1]
    w, info = _sterf(d, e)
    if info != 0:
        return None
    w = w[:n]
    iblock = np.ones(m, dtype=np.int32)  # one block: inverse iteration on the whole matrix, also where
    # it splits (exact zeros off the diagonal, tested with a diagonal matrix)
    isplit = np.zeros(m, dtype=np.int32)
    isplit[0] = m
    z, info = _stein(d, e, w, iblock, isplit)
    if info != 0:
        return None
    # A = Q T Q^T with Q = diag(1, Q'), Q' the product of the reflectors stored below the sub-diagonal
    qz, _, info = _ormqr("L", "N", c[1:, :m - 1], tau[:m - 1], z[1:, :n], max(1, 64 * n))
    if info != 0:
        return None
    v = np.empty((m, n))
    v[0] = z[0, :n]
    v[1:] = qz
    return w, v


def lowest_eigenpairs(a: np.ndarray, k: int, overwrite: bool = False):
    """Lowest ``k`` eigenpairs (w (k,), x (m, k), info) of the symmetric matrix ``a`` (m, m) by the route
    that is fastest at its size (``FULL_MAX``, ``TRIDIAGONAL_MAX``). info != 0 reports a LAPACK failure
    (of the last route tried: the tridiagonal route falls back to dsyevr). ``a`` may be overwritten
    when ``overwrite`` is set (dsyevd and dsyevr routes)."""
    m = a.shape[0]
    if m <= FULL_MAX or k >= m:
        w, x, info = _syevd(a, compute_v=1, lower=0, overwrite_a=int(overwrite))
        return w[:k], x[:, :k], info
    if m <= TRIDIAGONAL_MAX:
        out = lowest_tridiagonal(a, k)
        if out is not None:
            return out[0], out[1], 0
    w, x, found, _, info = _syevr(a, compute_v=1, range="I", il=1, iu=k, lower=0, overwrite_a=int(overwrite))
    if info == 0 and found != k:
        info = -1
    return w[:k], x[:, :k], info
