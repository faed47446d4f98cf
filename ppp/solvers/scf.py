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

import sys
import threading
from dataclasses import dataclass

import numpy as np
from scipy.linalg import lapack as _lapack

#: Default thresholds: energy change (eV) and max |FP - PF| (eV).
CONV_TOL_ENERGY = 1e-11
CONV_TOL_GRAD = 1e-9
_EPS = float(np.finfo(float).eps)
#: max |P(aufbau orbitals of F(P)) - P| below which a converged density counts as aufbau-occupied
_AUFBAU_TOL = 1e-6


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
    f.ravel()[::f.shape[0] + 1] += gamma.dot(dens.diagonal())  # the diagonal, as a strided view
    return f


def electronic_energy(core: np.ndarray, fock: np.ndarray, dens: np.ndarray) -> float:
    """E = 1/2 sum_ij P_ij (h_ij + F_ij), eV."""
    return 0.5 * float(np.vdot(dens, core + fock))


#: The plain DIIS loop (no level shift, damping or density-dependent core) runs in the numba kernel
#: :func:`ppp.solvers.kernels.scf_loop` from this size on - provided numba is already loaded in the
#: process. Loading it costs 1-3 s (import and LLVM set-up, even with a warm cache) against savings of
#: 15-25 us per SCF iteration at dye size, so it pays only in a process that handles many molecules and
#: calls :func:`ppp.solvers.kernels.warm_up` once (a batch worker); a one-molecule run never loads numba.
JIT_MIN_CENTRES = 1


def density(mo_coeff: np.ndarray, n_occ: int) -> np.ndarray:
    """Closed-shell density P = 2 C_occ C_occ^T."""
    c = mo_coeff[:, :n_occ]
    p = c.dot(c.T)  # ndarray.dot: the BLAS call of @, without the ufunc dispatch
    p *= 2.0
    return p


def eigh(mat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Eigenvalues (ascending) and eigenvectors of a symmetric matrix: LAPACK dsyevd called directly
    (the routine behind numpy.linalg.eigh, without its wrapper: ~10 us less per call, which is a third
    of the call at N = 12); numpy's routine if LAPACK reports a failure."""
    w, v, info = _lapack.dsyevd(mat)
    if info != 0:
        return np.linalg.eigh(mat)
    return w, v


def commutator(fock: np.ndarray, dens: np.ndarray) -> np.ndarray:
    """SCF error FP - PF (N, N), eV; for symmetric F and P it is FP - (FP)^T: one matrix product."""
    fp = fock.dot(dens)
    return fp - fp.T


class _DIIS:
    """Pulay's (1980, 1982) direct inversion in the iterative subspace on the error FP - PF.

    Fock matrices and error vectors live in preallocated ring buffers (``space`` slots of N x N). The
    SCF loop writes each new pair straight into its slot (:meth:`target`, then :meth:`commit`), so no
    copy is made; :meth:`push` copies a given pair in (for callers that hold their own arrays). The
    overlap matrix B_ij = <e_i|e_j> is extended by one row per iteration (one matrix-vector product,
    O(n N^2) for n stored vectors, instead of O(n^2 N^2) for rebuilding it); the extrapolation is one
    more product. The bordered DIIS matrices [[B, -1], [-1, 0]] of all subspace sizes share one array
    (and the right-hand sides one vector), whose border is moved when the size changes, so an
    extrapolation costs a handful of numpy calls (it runs at every SCF iteration, where at dye size
    each call counts next to a ~10 us eigensolve).
    The extrapolation does not depend on the scale of the error vectors (B is normalised), so the SCF
    may store any fixed multiple of FP - PF.

    :func:`iterate` performs the steps of :meth:`target`, :meth:`commit` and :meth:`extrapolate` inline
    on these buffers (the same operations in the same order; at dye size a method call costs as much as
    a small numpy call), so those methods are the readable statement of the steps, used by :meth:`push`
    and the tests; a change to one must be made to the other (``tests/test_scf_loop.py`` checks the loop
    bit for bit against ``tests/scf_reference.py``).
    """

    def __init__(self, space: int, n: int | None = None):
        self.space = space
        self.slots: list[int] = []  # ring-buffer slots in insertion order
        self._norm = [0.0] * space  # B_ss of each slot
        self._b = np.zeros((space, space))
        # the bordered DIIS matrix [[B, -1], [-1, 0]] of size m <= space is the leading (m + 1) x (m + 1)
        # block of one array, its right-hand side (0, ..., 0, -1) the leading m + 1 entries of one
        # vector; :meth:`_resize` moves the border when m changes (in an SCF run m only grows)
        self._a = np.empty((space + 1, space + 1))
        self._a.fill(-1.0)  # (np.full costs five times as much)
        self._rhs = np.zeros(space + 1)
        self._size = 0  # subspace size of the last extrapolation
        self._largest = 0  # largest size set up so far
        self._f = self._e = None
        self._pending = 0
        self.last_norm = np.inf  # B_ss of the pair stored last
        if n is not None:
            self._allocate(n)

    def _allocate(self, n: int) -> None:
        space = self.space
        self._f = np.empty((space, n * n))
        self._e = np.empty((space, n * n))
        self._shape = (n, n)
        self._fv = list(self._f.reshape(space, n, n))  # N x N views of the slots
        self._ev = list(self._e.reshape(space, n, n))
        self._dv = list(self._f[:, ::n + 1])  # the diagonals of the Fock slots
        # views per number m of stored vectors, made once: the leading m rows of the buffers, the
        # leading m x m block of B, and the bordered system of size m (slicing costs about as much
        # as the small products themselves)
        self._fm = [self._f[:m] for m in range(space + 1)]
        self._em = [self._e[:m] for m in range(space + 1)]
        self._bm = [self._b[:m, :m] for m in range(space + 1)]
        self._work = None  # scratch arrays of :func:`iterate`, made there on first use

    def reset(self) -> None:
        """Back to the state of a new ring of the same size: no stored pairs, the bordered system of
        size 0. The buffers keep their old contents, which are never read: every B_ij, norm, Fock
        matrix and error of the slots in use is written when its pair is stored."""
        self.slots.clear()
        self._a.fill(-1.0)
        self._rhs.fill(0.0)
        self._size = 0
        self._largest = 0
        self._pending = 0
        self.last_norm = np.inf

    @property
    def focks(self) -> list[np.ndarray]:
        return [self._fv[k] for k in self.slots]

    @property
    def b(self) -> np.ndarray:
        """B_ij over the stored vectors in insertion order."""
        return self._b[np.ix_(self.slots, self.slots)]

    def target(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(F, e, diagonal of F) views of the slot the next :meth:`commit` stores (the oldest when full)."""
        slot = self.slots[0] if len(self.slots) == self.space else len(self.slots)
        self._pending = slot
        return self._fv[slot], self._ev[slot], self._dv[slot]

    def commit(self) -> None:
        """Store the pair written into the views of :meth:`target`."""
        slot = self._pending
        if len(self.slots) == self.space:
            self.slots.pop(0)  # overwrite the oldest
        self.slots.append(slot)
        n = len(self.slots)  # slots 0..n-1 are in use (filled in order, then overwritten in turn)
        # ndarray.dot: the BLAS call of the @ operator (same numbers) without the ufunc dispatch, which
        # costs as much as the product at this size
        row = self._em[n].dot(self._e[slot])
        self._b[slot, :n] = row
        self._b[:n, slot] = row
        self.last_norm = self._norm[slot] = float(row[slot])

    def push(self, fock: np.ndarray, err: np.ndarray) -> None:
        """Store a copy of one (Fock matrix, error) pair."""
        if self._f is None:
            self._allocate(fock.shape[0])
        f, e, _ = self.target()
        f[...] = fock
        e[...] = err
        self.commit()

    def extrapolate(self) -> np.ndarray:
        n = len(self.slots)  # the extrapolation does not depend on the order of the vectors
        if n != self._size:
            self._resize(n)
        a, rhs, a_b = self._views
        # B is a Gram matrix: its largest entry lies on the diagonal (Cauchy-Schwarz); scaled to 1
        scale = max(self._norm[:n])
        if scale > 0:
            np.divide(self._bm[n], scale, out=a_b)
        else:
            a_b[...] = self._bm[n]
        _, _, coef, info = _lapack.dgesv(a, rhs)  # LU solve, LAPACK called directly (copies a and rhs)
        if info != 0 or not coef.dot(coef) <= 1e16:  # |coef| <= 1e8; NaN fails the test as well
            return self._fallback(a, rhs)
        return coef[:n].dot(self._fm[n]).reshape(self._shape)

    def _fallback(self, a: np.ndarray, rhs: np.ndarray) -> np.ndarray:
        """The extrapolation when the LU solve of the bordered system fails or gives huge coefficients:
        least squares (B becomes near-singular as the error vectors shrink at convergence), or the
        newest Fock matrix when that fails as well."""
        try:
            coef = np.linalg.lstsq(a, rhs, rcond=None)[0]
        except np.linalg.LinAlgError:
            coef = None
        if coef is None or not np.isfinite(coef).all():
            return self._fv[self.slots[-1]]
        return coef[:len(self.slots)].dot(self._fm[len(self.slots)]).reshape(self._shape)

    def _resize(self, n: int) -> None:
        """Set the border of the size-n bordered system: row and column n -1, corner 0, rhs e_n (-1)."""
        old = self._size
        self._rhs[old] = 0.0
        self._rhs[n] = -1.0
        if n <= self._largest:  # above every size used so far (the SCF's case: it only grows), row and
            self._a[n, :n] = -1.0  # column n still hold the -1 of the fill, and only the corner is set
            self._a[:n, n] = -1.0
        else:
            self._largest = n
        self._a[n, n] = 0.0
        self._size = n
        # the size-n system, its right-hand side and its B block, as views kept until the size changes
        self._views = (self._a[:n + 1, :n + 1], self._rhs[:n + 1], self._a[:n, :n])


#: :func:`iterate` keeps the DIIS ring and scratch arrays of its last runs for reuse by the next run of
#: the same size in the same thread, up to this many centres (0.5 MB per size) and this many sizes:
#: making them costs ~15 us, more than a Fock build and an eigensolve at dye size. Only memory is
#: reused, never a number (see :meth:`_DIIS.reset`).
RING_POOL_MAX_CENTRES = 64
RING_POOL_SIZES = 4
_ring_pool = threading.local()


def _take_ring(space: int, n: int) -> _DIIS:
    """A DIIS ring for ``space`` slots of N x N in its initial state: this thread's spare one of that
    size (reset), else a new one."""
    spare = getattr(_ring_pool, "rings", None)
    ring = spare.pop((space, n), None) if spare else None
    if ring is None:
        return _DIIS(space, n)
    ring.reset()
    return ring


def _give_back(ring: _DIIS, n: int) -> None:
    """Keep a ring that :func:`iterate` has finished with for the next run of its size (small N only)."""
    if n > RING_POOL_MAX_CENTRES:
        return
    spare = getattr(_ring_pool, "rings", None)
    if spare is None:
        spare = _ring_pool.rings = {}
    if len(spare) >= RING_POOL_SIZES:
        del spare[next(iter(spare))]  # the size kept longest
    spare[(ring.space, n)] = ring


def iterate(core: np.ndarray, gamma: np.ndarray, n_occ: int, dens0: np.ndarray, *, max_iter: int,
            use_diis: bool = True, diis_space: int = 8, level_shift: float = 0.0, damping: float = 0.0,
            conv_tol: float = CONV_TOL_ENERGY, conv_tol_grad: float = CONV_TOL_GRAD, core_update=None,
            core_tol: float = np.inf):
    """One SCF attempt from a starting density. Returns (converged, iterations, dens).

    Work per iteration: one O(N^2) Fock build, one matrix product for the error, one eigensolve.
    core_update : optional callable dens -> core, evaluated at every iteration, for a core Hamiltonian
        that depends on the density (bond-order-dependent beta, e.g.
        :class:`ppp.model.variable_beta.CoreOfBondOrders`, whose ``kernel_form`` lets the compiled loop
        evaluate the same update); at convergence core and density are
        then consistent with each other as well: the core is the one of the returned density, and the
        error FP - PF is that of the fixed-core SCF on it. DIIS then extrapolates Fock matrices that
        include the core, i.e. one DIIS on the joint density/core error.
    core_tol : with ``core_update``, convergence also requires max |change of the core| between the
        last two iterations below this (eV)

    The loop carries the half density D = P / 2 = C_occ C_occ^T, which saves a scaling per iteration:
    with it F = h - gamma o D + diag(2 gamma diag(D)), E = sum_ij D_ij (h_ij + F_ij) and
    FP - PF = 2 (FD - DF). Scaling by 2 is exact in binary floating point, so every number (Fock
    matrices, energies, errors, DIIS coefficients, densities) is bit for bit that of the same loop on P
    (``tests/scf_reference.py`` keeps that loop and checks it). Each Fock matrix and error is written
    straight into its DIIS slot. When numba is loaded, the plain DIIS case runs as one compiled call
    (:func:`ppp.solvers.kernels.scf_loop`, see ``JIT_MIN_CENTRES``); this loop is its reference.
    """
    n = core.shape[0]
    if use_diis and not level_shift and not damping and n >= JIT_MIN_CENTRES and "numba" in sys.modules:
        form = getattr(core_update, "kernel_form", None)
        if core_update is None or form is not None:
            from .kernels import scf_loop
            return scf_loop(core, gamma, n_occ, dens0, max_iter, diis_space, conv_tol, conv_tol_grad,
                            bond_beta=form, core_tol=core_tol)
    d = 0.5 * np.asarray(dens0, dtype=float)
    gamma2 = gamma + gamma
    space = diis_space if use_diis else 1
    ring = _take_ring(space, n)
    # the ring's target / commit / extrapolate, inlined below on its buffers (the same operations in the
    # same order; a method call and its attribute look-ups cost about as much as a small numpy call)
    slots, fv, ev, dv, em, fm, bm = ring.slots, ring._fv, ring._ev, ring._dv, ring._em, ring._fm, ring._bm
    e_buf, b_buf, norms = ring._e, ring._b, ring._norm
    if ring._work is None:
        # the extrapolated Fock matrix (dsyevd reads it, no copy kept), F D, and two buffers that the
        # new half densities C_occ C_occ^T go into in turn: the one written is never the density in
        # use, nor the one of the iteration before (kept for the lazy energy below)
        dbuf = (np.empty((n, n)), np.empty((n, n)))
        ring._work = (np.empty((n, n)), np.empty((n, n)), dbuf, (dbuf[0].diagonal(), dbuf[1].diagonal()),
                      list(e_buf))
    extrapolated, fd, dbuf, dbuf_diag, e_rows = ring._work
    extrapolated_flat = extrapolated.reshape(-1)
    fd_t = fd.T
    which = 0
    d_diag = d.diagonal()
    # numpy's functions as locals, outputs passed by position: each look-up and keyword costs a
    # tenth of a microsecond, a few times per iteration
    mul, sub, div, gesv = np.multiply, np.subtract, np.divide, _lapack.dgesv
    eye = np.eye(n) if level_shift else None
    old_core = None
    # With DIIS, |FD - DF|^2 comes with the new row of B; max |x| >= |x|_F / N, so while |FD - DF|_F
    # exceeds N conv_tol_grad / 2 (with a margin for its rounding) the error test must fail and the
    # energy is not needed yet. The energy of the iteration before is then computed when first needed,
    # from its density, core and Fock matrix (still in the ring): the same numbers in the same order.
    lazy = use_diis and diis_space >= 2
    gate = (0.5 * n * conv_tol_grad) ** 2 * (1.0 + 1e-6)
    e_old = np.inf  # energy of the iteration before; None when not computed
    prev = None
    last_norm = np.inf
    size = 0  # subspace size of the last extrapolation (the ring's bordered system)
    for it in range(1, max_iter + 1):
        if core_update is not None:
            old_core = core
            core = core_update(d + d)
        slot = slots[0] if len(slots) == space else len(slots)  # ring.target(): the oldest slot when full
        fock = fv[slot]
        err = ev[slot]
        fdiag = dv[slot]
        mul(d, gamma, fock)  # F = h - 1/2 P o gamma + diag(gamma diag(P))  (module doc)
        sub(core, fock, fock)
        fdiag += gamma2.dot(d_diag)  # the diagonal, as a strided view
        fock.dot(d, fd)
        sub(fd, fd_t, err)  # (FP - PF) / 2: one matrix product for symmetric F and P
        if use_diis:  # ring.commit(): B gains the row of the new error
            if len(slots) == space:
                slots.pop(0)  # overwrite the oldest
            slots.append(slot)
            m = len(slots)  # slots 0..m-1 are in use
            row = em[m].dot(e_rows[slot])
            b_buf[slot, :m] = row
            b_buf[:m, slot] = row
            last_norm = norms[slot] = float(row[slot])
        if not lazy or last_norm < gate:
            e = float(np.vdot(d, core)) + float(np.vdot(d, fock))
            if e_old is None:
                pd, pc, pf = prev
                e_old = float(np.vdot(pd, pc)) + float(np.vdot(pd, pf))
            # the energy test allows for rounding in E (|E| ~ 10^4 eV at 1,000 centres); FP - PF is
            # antisymmetric: its largest entry is its largest |entry|
            if (abs(e - e_old) < max(conv_tol, 1e3 * _EPS * abs(e)) and 2.0 * float(err.max()) < conv_tol_grad
                    and _core_change(core, old_core, core_update is not None, it) < core_tol):
                _give_back(ring, n)
                return True, it, d + d
        else:
            e = None
        e_old = e
        prev = (d, core, fock)
        f_use = fock
        if use_diis and m >= 2:  # ring.extrapolate()
            if m != size:
                ring._resize(m)
                size = m
                a, rhs, a_b = ring._views
            scale = max(norms[:m])  # B is a Gram matrix: its largest entry lies on its diagonal
            if scale > 0:
                div(bm[m], scale, a_b)
            else:
                a_b[...] = bm[m]
            _, _, coef, info = gesv(a, rhs)
            if info != 0 or not coef.dot(coef) <= 1e16:
                f_use = ring._fallback(a, rhs)  # least squares, or the newest Fock matrix
            else:
                coef[:m].dot(fm[m], extrapolated_flat)
                f_use = extrapolated
        if level_shift:
            f_use = f_use + level_shift * (eye - d)  # shift of the virtual space, I - P/2 (Saunders & Hillier 1973)
        _, c, info = _lapack.dsyevd(f_use)  # eigh() inlined: a function call less per iteration
        if info != 0:
            c = np.linalg.eigh(f_use)[1]
        c = c[:, :n_occ]
        new = dbuf[which]
        c.dot(c.T, new)
        if damping:
            d = (1.0 - damping) * new + damping * d
            d_diag = d.diagonal()
        else:
            d = new
            d_diag = dbuf_diag[which]
        which ^= 1
    d = d + d
    _give_back(ring, n)
    return False, max_iter, d


def _core_change(core: np.ndarray, old_core: np.ndarray | None, updated: bool, it: int) -> float:
    """max |change of the core| in iteration ``it`` of :func:`iterate` (0 without a core update, infinite
    in the first iteration); evaluated only when the other convergence tests have passed."""
    if not updated:
        return 0.0
    return float(np.abs(core - old_core).max()) if it > 1 else np.inf


def kernel(core: np.ndarray, gamma: np.ndarray, n_occ: int, *, max_iter: int = 100,
           conv_tol: float = CONV_TOL_ENERGY, conv_tol_grad: float = CONV_TOL_GRAD,
           dens0: np.ndarray | None = None, fallback: bool = True,
           alt_dens0: np.ndarray | None = None, alt_first: bool = False) -> SCFResult:
    """Restricted closed-shell SCF.

    Parameters
    ----------
    core : (N, N) core Hamiltonian, eV
    gamma : (N, N) two-centre repulsion, eV
    n_occ : number of doubly occupied orbitals
    max_iter : Fock builds allowed per attempt
    dens0 : optional (N, N) starting density; default: Hueckel-like guess from diagonalising ``core``
    fallback : try level shifting and damping when plain DIIS fails
    alt_dens0 : optional second starting density (e.g. :func:`ppp.solvers.guess.localized_density`),
        tried with DIIS when the first start fails, or first when ``alt_first``

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
        _, c0 = eigh(core)
        dens0 = density(c0, n_occ)
    starts = [("diis", dens0)]
    if alt_dens0 is not None:
        alt = ("diis-kekule-start", np.asarray(alt_dens0, dtype=float))
        starts = [alt, starts[0]] if alt_first else [starts[0], alt]
    # the first attempt (nearly always the last): DIIS from the first start
    strategy, dens0 = starts[0]
    converged, total, dens = iterate(core, gamma, n_occ, dens0, max_iter=max_iter, conv_tol=conv_tol,
                                     conv_tol_grad=conv_tol_grad)
    res = finish(core, gamma, n_occ, dens, converged, total, strategy)
    if res.converged:
        return res
    kw = dict(conv_tol=conv_tol, conv_tol_grad=conv_tol_grad)
    attempts = [(name, [dict(max_iter=max_iter, start=d)]) for name, d in starts[1:]]
    if fallback:
        attempts += [
            ("level-shift", [dict(max_iter=max_iter, use_diis=False, level_shift=1.0, damping=0.3),
                             dict(max_iter=max_iter)]),
            ("strong-level-shift", [dict(max_iter=4 * max_iter, use_diis=False, level_shift=4.0, damping=0.5),
                                    dict(max_iter=max_iter)]),
        ]
    for strategy, steps in attempts:
        dens = dens0
        converged = False
        for step in steps:
            step = dict(step)
            start = step.pop("start", None)
            if start is not None:
                dens = start
            converged, it, dens = iterate(core, gamma, n_occ, dens, **step, **kw)
            total += it
        # the stabilised (shifted, damped) stage only prepares the density; DIIS must confirm it, and
        # the lowest n_occ orbitals of F(P) must reproduce P (no hole below the Fermi level)
        res = finish(core, gamma, n_occ, dens, converged, total, strategy)
        if res.converged:
            return res
    return res


def finish(core: np.ndarray, gamma: np.ndarray, n_occ: int, dens: np.ndarray, converged: bool,
           iterations: int, strategy: str) -> SCFResult:
    """The SCFResult of a density P that an SCF run stopped at.

    ``converged`` is kept only when the lowest n_occ orbitals of F(P) reproduce P (aufbau occupation,
    no hole below the Fermi level). A converged P then gets one more Roothaan step: P' from those
    orbitals, and the orbitals and orbital energies returned diagonalise F(P') exactly. The step costs
    one eigensolve and takes the error |FP - PF| a few times below the stopping threshold, so that
    results do not depend on the path that reached the threshold (and a saddle point stays one for an
    outside program restarted from it).
    """
    fock = fock_matrix(core, gamma, dens)
    mo_energy, mo_coeff = eigh(fock)
    if converged:
        step = density(mo_coeff, n_occ)
        # aufbau: the lowest n_occ orbitals of F(P) reproduce P (no hole below the Fermi level)
        converged = bool(np.abs(step - dens).max() < _AUFBAU_TOL)
        if converged:
            dens = step
            fock = fock_matrix(core, gamma, dens)
            mo_energy, mo_coeff = eigh(fock)
    err = commutator(fock, dens)
    return SCFResult(
        converged=converged, iterations=int(iterations), e_elec=electronic_energy(core, fock, dens),
        mo_energy=mo_energy, mo_coeff=mo_coeff, dens=dens, fock=fock,
        max_error=float(err.max()), strategy=strategy,  # FP - PF is antisymmetric: max = max |.|
    )
