"""Reference twin of the SCF loop ``ppp.solvers.scf.iterate``, used only by the tests.

This is the loop as it was before the in-place rewrite (commit 47441e6): the plain density P, a fresh
Fock matrix and error per iteration, copied into the DIIS buffers. The rewrite carries P / 2 instead and
writes into the buffers directly; scaling by 2 is exact, so both must give the same numbers bit for bit.
"""
from __future__ import annotations

import numpy as np
from scipy.linalg import lapack as _lapack

from ppp.solvers.scf import CONV_TOL_ENERGY, CONV_TOL_GRAD, _EPS, commutator, density, eigh


def _numpy_builder(gamma: np.ndarray):
    """(core, gamma, dens) -> (F, E) for one fixed gamma: the module-doc equations, with gamma / 2 and
    the diagonal stride prepared once (a few microseconds less per SCF iteration at dye size)."""
    half = 0.5 * gamma
    step = gamma.shape[0] + 1

    def build(core, gamma_, dens):
        f = core - dens * half
        f.ravel()[::step] += gamma @ dens.diagonal()  # the diagonal, as a strided view of f
        return f, 0.5 * (float(np.vdot(dens, core)) + float(np.vdot(dens, f)))
    return build



class DIISReference:
    """Pulay's (1980, 1982) direct inversion in the iterative subspace on the error FP - PF.

    Fock matrices and error vectors live in preallocated ring buffers, and the overlap matrix
    B_ij = <e_i|e_j> is extended by one row per iteration (one matrix-vector product, O(n N^2) for n
    stored vectors, instead of O(n^2 N^2) for rebuilding it); the extrapolation is one more product.
    The bordered DIIS matrices [[B, -1], [-1, 0]] and right-hand sides are preallocated per subspace
    size, so an extrapolation costs a handful of numpy calls (it runs at every SCF iteration, where at
    dye size each call counts next to a ~10 us eigensolve).
    """

    def __init__(self, space: int):
        self.space = space
        self.slots: list[int] = []  # ring-buffer slots in insertion order
        self._f = self._e = None
        self._b = np.zeros((space, space))
        self._a = [None] + [_bordered(n) for n in range(1, space + 1)]
        self._rhs = [None] + [np.concatenate([np.zeros(n), [-1.0]]) for n in range(1, space + 1)]

    @property
    def focks(self) -> list[np.ndarray]:
        return [self._f[k].reshape(self._shape) for k in self.slots]

    @property
    def b(self) -> np.ndarray:
        """B_ij over the stored vectors in insertion order."""
        return self._b[np.ix_(self.slots, self.slots)]

    def push(self, fock: np.ndarray, err: np.ndarray) -> None:
        if self._f is None:
            self._f = np.empty((self.space, fock.size))
            self._e = np.empty((self.space, err.size))
            self._shape = fock.shape
        if len(self.slots) == self.space:
            slot = self.slots.pop(0)  # overwrite the oldest
        else:
            slot = len(self.slots)
        self.slots.append(slot)
        self._f[slot] = fock.ravel()
        self._e[slot] = err.ravel()
        n = len(self.slots)  # slots 0..n-1 are in use (filled in order, then overwritten in turn)
        row = self._e[:n] @ self._e[slot]
        self._b[slot, :n] = row
        self._b[:n, slot] = row

    def extrapolate(self) -> np.ndarray:
        n = len(self.slots)  # the extrapolation does not depend on the order of the vectors
        bb = self._b[:n, :n]
        a = self._a[n]
        # B is a Gram matrix: its largest entry lies on the diagonal (Cauchy-Schwarz); scaled to 1
        scale = bb.diagonal().max()
        if scale > 0:
            np.divide(bb, scale, out=a[:n, :n])
        else:
            a[:n, :n] = bb
        rhs = self._rhs[n]
        _, _, coef, info = _lapack.dgesv(a, rhs)  # LU solve, LAPACK called directly (copies a)
        if info != 0 or not coef @ coef <= 1e16:  # |coef| <= 1e8; NaN fails the test as well
            try:  # least squares: B becomes near-singular as the error vectors shrink at convergence
                coef = np.linalg.lstsq(a, rhs, rcond=None)[0]
            except np.linalg.LinAlgError:
                coef = None
            if coef is None or not np.isfinite(coef).all():
                return self._f[self.slots[-1]].reshape(self._shape)
        return (coef[:n] @ self._f[:n]).reshape(self._shape)


def _bordered(n: int) -> np.ndarray:
    """(n + 1, n + 1) template [[B, -1], [-1, 0]] of the DIIS equations; B (n x n) is written in later."""
    a = np.full((n + 1, n + 1), -1.0)
    a[-1, -1] = 0.0
    return a


def iterate_reference(core: np.ndarray, gamma: np.ndarray, n_occ: int, dens0: np.ndarray, *, max_iter: int,
            use_diis: bool = True, diis_space: int = 8, level_shift: float = 0.0, damping: float = 0.0,
            conv_tol: float = CONV_TOL_ENERGY, conv_tol_grad: float = CONV_TOL_GRAD, core_update=None,
            core_tol: float = np.inf):
    """One SCF attempt from a starting density. Returns (converged, iterations, dens).

    Work per iteration: one O(N^2) Fock build, one matrix product for the error, one eigensolve.
    core_update : optional callable dens -> core, evaluated at every iteration, for a core Hamiltonian
        that depends on the density (bond-order-dependent beta); at convergence core and density are
        then consistent with each other as well: the core is the one of the returned density, and the
        error FP - PF is that of the fixed-core SCF on it. DIIS then extrapolates Fock matrices that
        include the core, i.e. one DIIS on the joint density/core error.
    core_tol : with ``core_update``, convergence also requires max |change of the core| between the
        last two iterations below this (eV)
    """
    dens = dens0
    e_old = np.inf
    diis = DIISReference(diis_space) if use_diis else None
    n = core.shape[0]
    build = _numpy_builder(gamma)
    core_change = 0.0
    for it in range(1, max_iter + 1):
        if core_update is not None:
            new_core = core_update(dens)
            core_change = float(np.abs(new_core - core).max()) if it > 1 else np.inf
            core = new_core
        fock, e = build(core, gamma, dens)
        err = commutator(fock, dens)
        max_err = float(err.max())  # FP - PF is antisymmetric: its largest entry is its largest |entry|
        # the energy test allows for rounding in E (|E| ~ 10^4 eV at 1,000 centres)
        if (abs(e - e_old) < max(conv_tol, 1e3 * _EPS * abs(e)) and max_err < conv_tol_grad
                and core_change < core_tol):
            return True, it, dens
        e_old = e
        f_use = fock
        if diis is not None:
            diis.push(fock, err)
            if len(diis.slots) >= 2:
                f_use = diis.extrapolate()
        if level_shift:
            f_use = f_use + level_shift * (np.eye(n) - 0.5 * dens)
        _, c = eigh(f_use)
        new = density(c, n_occ)
        dens = (1.0 - damping) * new + damping * dens if damping else new
    return False, max_iter, dens
