"""Matrix-free CIS: sigma-vectors from MO coefficients and gamma, and a block Davidson eigensolver for
the lowest roots.

The CIS matrix (module :mod:`ppp.solvers.cis`) has (n_occ n_vir)^2 entries, 4 GB at N = 300 centres.
Under zero differential overlap its product with a trial vector X (n_occ x n_vir) never needs it:
with C_o = C[:, :n_occ], C_v = C[:, n_occ:] and (pq|rs) = sum_{mu,nu} C_mu,p C_mu,q gamma_mu,nu C_nu,r C_nu,s,

Coulomb-type term (the "2 (ia|jb)" of singlets):

    J(X)_ia = sum_jb (ia|jb) X_jb = sum_mu C_mu,i C_mu,a g_mu ,
        g = gamma d ,  d_nu = sum_jb C_nu,j X_jb C_nu,b = diag(C_o X C_v^T)_nu
    =>  J(X) = C_o^T diag(g) C_v

Exchange-type term (the "(ij|ab)"):

    K(X)_ia = sum_jb (ij|ab) X_jb = sum_{mu,nu} C_mu,i [gamma o T]_mu,nu C_nu,a ,  T = C_o X C_v^T  (N x N)
    =>  K(X) = C_o^T (gamma o T) C_v

where o is the elementwise (Hadamard) product. Then, spin-adapted (Foresman et al. 1992),

    singlet:  sigma = De o X - C_o^T (gamma o T - 2 diag(g)) C_v
    triplet:  sigma = De o X - C_o^T (gamma o T) C_v ,      De_ia = e_a - e_i ,

so both multiplicities cost the same four matrix products, O(N^3) work and O(N^2) memory per vector.
A block of vectors goes through each product as ONE matrix multiplication (the vectors side by side),
in chunks that bound the N^2-sized intermediates.

The eigensolver is Davidson's (1975) method in its block form (Liu 1978); see :func:`davidson`.
Preconditioner: the exact CIS diagonal (its singlet term 2 (ia|ia) up to ``EXACT_DIAGONAL_MAX``
configurations); above ``LARGE_CENTRES`` centres a two-level one with the exact CIS matrix on a window of
frontier orbitals and Olsen's correction (Olsen, Jorgensen & Simons 1990), whose lowest eigenvectors are
then also the start vectors.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import dpotrf as _potrf, dsyevd as _syevd, dtrtri as _trtri

from ..errors import ConvergenceError
from .eigen import lowest_tridiagonal

#: Residual 2-norm (eV) below which a root counts as converged. The energy error is of the order of
#: the residual squared over the gap to the next root; amplitudes are accurate to residual / gap.
CONV_TOL = 1e-7
#: Residual 2-norm (eV) for "check" roots (``n_check`` of :func:`kernel`): roots computed only so that
#: the degeneracy test of :func:`ppp.solvers.cis.align_degenerate` knows whether the last wanted level
#: is complete. Only their energy is used (never their vector), and a Ritz value with residual r lies
#: within r of an eigenvalue whatever the gaps (Bauer-Fike; for a symmetric matrix |theta - lambda| <= r),
#: and within r^2 / gap of it when the root is separated by ``gap`` from the rest of the spectrum
#: (Kato-Temple): at 1e-6 eV, about 1e-10 eV for the gaps of 0.01 eV and more seen in dyes, against
#: the 1e-6 eV that separates a degenerate level from a split one. Each wanted root keeps ``CONV_TOL``
#: (its own residual is tested, so a looser check root cannot spoil it). Measured on the 71 dyes of
#: more than 500 configurations in dye_library(200, seed=7): 5 % less time for 10 + 1 singlets.
CHECK_TOL = 1e-6
#: Frontier orbitals per side of the window used for start vectors and preconditioning at 1,000 centres
#: (measured on a 398-centre ribbon, 11 singlets: 234 sigma-vectors with the diagonal alone, 180 with
#: 24, 165 with 32, 152 with 48, whose set-up then costs more than it saves).
WINDOW = 32
#: Trial vectors pushed through one stacked sigma product (bounds the N^2-sized intermediates).
CHUNK_BYTES = 320 * 2**10
#: Largest n_occ * n_vir for which the exact CIS diagonal (with the O(N^2 n_occ n_vir) term 2 (ia|ia))
#: is computed for the singlet preconditioner; above, the triplet diagonal stands in for it. Measured on
#: the 50-60-centre dyes of dye_library(200, seed=1): 13 % fewer sigma-vectors with the exact diagonal;
#: its cost, about 8 sigma-vectors at this bound, grows as N^4.
EXACT_DIAGONAL_MAX = 4000
#: Above this many centres a sigma-vector costs more than the rest of a Davidson iteration: the kernel
#: then uses the frontier-window preconditioner, one correction per root and iteration, and a larger
#: subspace (measured on ribbons of 300-1,000 centres: 20-40 % faster than the settings for dyes).
LARGE_CENTRES = 150
#: Davidson corrections are projected a second time against the subspace only when the first pass left
#: less than this fraction of their squared norm (:func:`orthonormal_complement`): rounding then stays
#: below 1e-14 along the subspace. Kahan-Parlett's 0.5 re-projected 78 % of the blocks of the 50-60-centre
#: dyes of dye_library(300, seed=1), this 25 %.
REORTH = 1e-4
#: Subspace of the dye-sized problems (up to ``LARGE_CENTRES`` centres) for k roots: 2 k + 2 Ritz vectors
#: kept at a restart, which happens once the subspace would exceed 2 k + 2 + DYE_GROWTH k vectors
#: (davidson's defaults restart about every second iteration for 10 roots). On the 71 dyes of more than
#: 500 configurations in dye_library(200, seed=7), 10 + 1 singlets and 10 triplets: 28.3 instead of 36.4
#: iterations and 206 instead of 244 sigma-vectors per solve, but dearer iterations (docs/performance.md).
DYE_GROWTH = 6
#: Start-vector admixture (see :func:`davidson`).
NOISE = 1e-3
#: Corrections per unconverged root and Davidson iteration (see :func:`davidson`).
DEPTH = 2


@dataclass(frozen=True)
class Operator:
    """MO-basis pieces of the CIS operator, shared by all trial vectors and both multiplicities.

    co : (N, n_occ), cv : (N, n_vir) MO coefficients (C-contiguous copies)
    gamma : (N, N) eV;  de : (n_occ, n_vir) orbital-energy differences e_a - e_i, eV
    """

    co: np.ndarray
    cv: np.ndarray
    gamma: np.ndarray
    de: np.ndarray

    @property
    def shape(self):
        return self.co.shape[1], self.cv.shape[1]


def operator(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int) -> Operator:
    mo_energy = np.asarray(mo_energy, dtype=float)
    mo_coeff = np.asarray(mo_coeff, dtype=float)
    return Operator(co=np.ascontiguousarray(mo_coeff[:, :n_occ]), cv=np.ascontiguousarray(mo_coeff[:, n_occ:]),
                    gamma=np.ascontiguousarray(gamma, dtype=float),
                    de=mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None])


def apply(op: Operator, x: np.ndarray, multiplicity: int = 1) -> np.ndarray:
    """CIS matrix times the rows of ``x`` (m, n_occ * n_vir); returns (m, n_occ * n_vir), eV."""
    co, cv, gamma = op.co, op.cv, op.gamma
    n, o = co.shape
    v = cv.shape[1]
    m = x.shape[0]
    out = (op.de.reshape(1, -1) * x)
    step = max(4, int(CHUNK_BYTES // (8 * n * n)))
    idx = np.arange(n)
    for s in range(0, m, step):
        ms = min(step, m - s)
        y = x[s:s + ms].reshape(ms * o, v) @ cv.T  # X_k C_v^T, rows (k, i)
        y = y.reshape(ms, o, n).transpose(1, 0, 2).reshape(o, ms * n)
        t = (co @ y).reshape(n, ms, n)  # T_k = C_o X_k C_v^T as t[mu, k, nu]
        if multiplicity == 1:
            g = gamma @ t[idx, :, idx]  # g_k = gamma diag(T_k), (N, ms)
            t *= gamma[:, None, :]
            t[idx, :, idx] -= 2.0 * g  # gamma o T - 2 diag(g)
        else:
            t *= gamma[:, None, :]
        z = (co.T @ t.reshape(n, ms * n)).reshape(o * ms, n)  # C_o^T (.) as rows (i, k)
        out[s:s + ms] -= (z @ cv).reshape(o, ms, v).transpose(1, 0, 2).reshape(ms, o * v)
    return out


def sigma(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, x: np.ndarray,
          multiplicity: int = 1) -> np.ndarray:
    """CIS matrix times trial vectors without forming the matrix.

    Parameters
    ----------
    mo_energy : (N,) eV;  mo_coeff : (N, N);  gamma : (N, N) eV;  n_occ : int
    x : (m, n_occ, n_vir) trial vectors
    multiplicity : 1 or 3

    Returns
    -------
    (m, n_occ, n_vir) array A X, eV, equal to ``cis_matrix(...) @ x.reshape(m, -1).T`` transposed.
    """
    if multiplicity not in (1, 3):
        raise ValueError("multiplicity must be 1 or 3")
    x = np.asarray(x, dtype=float)
    m, o, v = x.shape
    return apply(operator(mo_energy, mo_coeff, gamma, n_occ), x.reshape(m, o * v), multiplicity).reshape(m, o, v)


def exchange_diagonal(op: Operator) -> np.ndarray:
    """(ii|aa) = [(C_o o C_o)^T gamma (C_v o C_v)]_ia, (n_occ, n_vir) eV."""
    return (op.co * op.co).T @ op.gamma @ (op.cv * op.cv)


def coulomb_diagonal(op: Operator) -> np.ndarray:
    """(ia|ia) = B_ia^T gamma B_ia with B_ia(mu) = C_mu,i C_mu,a; (n_occ, n_vir) eV, O(N^2 n_occ n_vir)."""
    n, o = op.co.shape
    v = op.cv.shape[1]
    b = (op.co[:, :, None] * op.cv[:, None, :]).reshape(n, o * v)
    return np.einsum("mk,mk->k", op.gamma @ b, b).reshape(o, v)


def approximate_diagonal(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray,
                         n_occ: int) -> np.ndarray:
    """Triplet CIS diagonal De_ia - (ii|aa), (n_occ, n_vir) eV; for singlets it lacks 2 (ia|ia)."""
    op = operator(mo_energy, mo_coeff, gamma, n_occ)
    return op.de - exchange_diagonal(op)


def window_matrix(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
                  multiplicity: int = 1, window: int = WINDOW):
    """Exact CIS matrix on the frontier window: the ``window`` highest occupied x ``window`` lowest
    virtual orbitals. Built from the ZDO integrals directly in O(N^2 w^2 + N w^4) for w = window:

        (ia|jb) = B_ia^T gamma B_jb ,  B_ia(mu) = C_mu,i C_mu,a
        (ij|ab) = D_ij^T gamma D_ab ,  D_pq(mu) = C_mu,p C_mu,q

    Returns (A_w (w_o w_v, w_o w_v) eV, flat indices of the window configurations in the full
    n_occ * n_vir ordering, row-major like ``A_w``).
    """
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    wo, wv = min(o, window), min(v, window)
    occ = np.arange(o - wo, o)
    vir = np.arange(wv)
    co, cv = mo_coeff[:, occ], mo_coeff[:, o + vir]
    dd = (co[:, :, None] * co[:, None, :]).reshape(n, -1)  # D_ij
    dv = (cv[:, :, None] * cv[:, None, :]).reshape(n, -1)  # D_ab
    a = -(dd.T @ gamma @ dv).reshape(wo, wo, wv, wv).transpose(0, 2, 1, 3).reshape(wo * wv, wo * wv)
    if multiplicity == 1:
        b = (co[:, :, None] * cv[:, None, :]).reshape(n, -1)  # B_ia
        a += 2.0 * (b.T @ gamma @ b)
    a[np.diag_indices_from(a)] += (mo_energy[o + vir][None, :] - mo_energy[occ][:, None]).ravel()
    flat = (occ[:, None] * v + vir[None, :]).ravel()
    return a, flat


def window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity=1, window=WINDOW):
    """Eigen-decomposition of :func:`window_matrix`: (eigenvalues, eigenvectors, flat indices)."""
    a, flat = window_matrix(mo_energy, mo_coeff, gamma, n_occ, multiplicity, window)
    lam, u = np.linalg.eigh(a)
    return lam, u, flat


def window_size(n_centres: int) -> int:
    """Frontier window per side: WINDOW at 1,000 centres, shrinking as sqrt(N) below (its set-up,
    an eigensolve of w^2 x w^2, then stays below the O(N^3) cost of one sigma-vector), at least 16
    (a 256-configuration window costs next to nothing; measured on 62- and 102-centre ribbons,
    11 singlets: 181 and 195 sigma-vectors without a window, 136 and 165 with 16)."""
    return int(max(16, min(WINDOW, round(WINDOW * np.sqrt(n_centres / 1000.0)))))


def frontier_guess(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
                   n_vectors: int, multiplicity: int = 1, window: int = WINDOW, eig=None) -> np.ndarray:
    """Start vectors: the lowest eigenvectors of :func:`window_matrix`, embedded in the full space.

    When the window holds fewer configurations than ``n_vectors``, unit vectors on the smallest orbital
    energy gaps outside it complete the set. Returns (min(n_vectors, n_occ n_vir), n_occ n_vir)
    orthonormal rows."""
    lam, u, flat = eig if eig is not None else window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity,
                                                             window)
    n_vir = mo_coeff.shape[0] - n_occ
    dim = n_occ * n_vir
    n_vectors = min(n_vectors, dim)
    m = min(n_vectors, lam.shape[0])
    out = np.zeros((n_vectors, dim))
    out[:m, flat] = u[:, :m].T
    if n_vectors > m:  # window too small: unit vectors on the lowest orbital-energy gaps outside it
        de = (mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None]).ravel()
        de[flat] = np.inf
        rest = np.argsort(de, kind="stable")[:n_vectors - m]
        out[np.arange(m, n_vectors), rest] = 1.0
    return out


#: Subspace matrices of m rows are diagonalised completely (LAPACK dsyevd) when m is at most this many
#: times the n eigenpairs wanted, or at most ``FULL_SUBSPACE_EIGEN_MIN``; larger ones are
#: tridiagonalised and only the wanted eigenpairs computed (:func:`ppp.solvers.eigen.lowest_tridiagonal`). Measured with
#: one BLAS thread: for 24 wanted pairs equal at 40 rows; for 11 pairs (the Davidson iterations that
#: do not restart) 51 against 60 us at 25 rows, 89 against 130 us at 40, 131 against 204 us at 50;
#: for 16-24 pairs 0.23 against 0.32 ms at 60 and 0.58 against 0.77 ms at 100.
FULL_SUBSPACE_EIGEN_RATIO = 1.7
FULL_SUBSPACE_EIGEN_MIN = 24


def _lowest_eigh(a: np.ndarray, n: int):
    """Lowest ``n`` (or more) eigenpairs of the symmetric matrix ``a``, ascending: LAPACK dsyevd for the
    whole of a small matrix, :func:`ppp.solvers.eigen.lowest_tridiagonal` for a subset of a larger one (LAPACK called
    directly: the generic wrappers cost as much as the solve at these sizes), numpy's solver should a
    LAPACK step fail. ``a`` is not modified."""
    m = a.shape[0]
    if m <= max(FULL_SUBSPACE_EIGEN_MIN, FULL_SUBSPACE_EIGEN_RATIO * n) or n >= m:
        # a symmetric C-ordered matrix is its own transpose: a.T is the Fortran-ordered matrix LAPACK
        # reads, so no copy is made before LAPACK's own
        w, v, info = _syevd(a.T, compute_v=1, lower=0)
        if info == 0:
            return w, v
    else:
        out = lowest_tridiagonal(a, n)
        if out is not None:
            return out
    return np.linalg.eigh(a)


def _safe(den: np.ndarray, eps: float = 1e-8) -> np.ndarray:
    """Denominators kept at least ``eps`` away from zero (in place)."""
    tiny = np.abs(den) < eps
    if tiny.any():
        den[tiny] = np.copysign(eps, den[tiny])
    return den


def window_preconditioner(mo_energy, mo_coeff, gamma, n_occ, diag, multiplicity=1, window=WINDOW, eig=None):
    """Two-level Davidson preconditioner M: the exact CIS matrix (:func:`window_matrix`) on the frontier
    window, the diagonal ``diag`` elsewhere; returned as a function (residuals, Ritz vectors, Ritz
    values) -> corrections. Olsen's correction (Olsen, Jorgensen & Simons 1990),
    t = -(M - theta)^-1 r + eps (M - theta)^-1 x with eps = x.(M - theta)^-1 r / x.(M - theta)^-1 x,
    keeps the accurate window block from handing back the current vector."""
    lam, u, flat = eig if eig is not None else window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity,
                                                             window)
    diag = np.asarray(diag, dtype=float).ravel()

    def solve(rows, theta):  # (M - theta)^-1 rows, all rows at once
        out = rows / _safe(diag[None, :] - theta[:, None])
        out[:, flat] = ((rows[:, flat] @ u) / _safe(lam[None, :] - theta[:, None])) @ u.T
        return out

    def precondition(resid, vec, theta):
        mr = solve(resid, theta)
        mx = solve(vec, theta)
        eps = np.einsum("ij,ij->i", vec, mr) / np.einsum("ij,ij->i", vec, mx)
        return -(mr - eps[:, None] * mx)

    return precondition


def davidson(matvec, diag: np.ndarray, n_roots: int, *, n_guess: int | None = None, tol: float = CONV_TOL,
             max_iter: int = 200, max_space: int | None = None, rng: np.random.Generator | None = None,
             noise: float = NOISE, guess: np.ndarray | None = None, precondition=None,
             keep: int | None = None, depth: int = DEPTH):
    """Lowest eigenpairs of a symmetric operator by the block Davidson method (Davidson 1975; Liu 1978).

    Each iteration: Rayleigh-Ritz in the subspace (a small symmetric eigenproblem), residuals
    r = A x - theta x of the wanted roots, preconditioned corrections t = r / (theta - D) of the
    unconverged ones only (converged roots are locked: they stay in the subspace but are no longer
    expanded, and all residuals are checked once more together at the end), orthonormalisation of the
    new block, one blocked matvec. With ``depth`` > 1 the same Rayleigh-Ritz step is also given the
    corrections the following iterations would bring, t' = (A - theta) t / (theta - D), from the images
    of t already computed: a few more matvecs (cheap here) for far fewer small dense eigenproblems.
    When the subspace is full it restarts from the lowest Ritz vectors plus the previous iteration's
    Ritz vectors of the wanted roots ("GD+k"; Murray, Racine & Davidson 1992; Stathopoulos & Saad 1998),
    which keeps most of the convergence of the unrestarted method.

    Parameters
    ----------
    matvec : callable, (m, dim) -> (m, dim), the operator applied to rows
    diag : (dim,) diagonal (approximate) used to precondition and to choose the start vectors
    n_roots : eigenpairs wanted
    n_guess : start vectors (unit vectors on the smallest diagonal entries, extended over ties so
        that no degenerate group of configurations is cut); default n_roots + max(4, n_roots // 2)
    rng : random generator for a small admixture (``noise``) to every start vector. Unit vectors of a
        symmetric molecule each belong to one symmetry species, and Davidson's subspace never leaves
        the species of its start vectors: a low root of a species absent from them would be missed
        (seen for a 48-centre rhombic flake and one root). The admixture gives every species a foothold:
        once the roots found so far converge below ``noise``, the residual is dominated by the missing
        species and the expansion picks it up. None: no admixture.
    guess : optional (m, dim) start vectors used instead of unit vectors (m sets n_guess)
    precondition : optional callable (residuals (m, dim), ritz vectors (m, dim), theta (m,)) -> corrections,
        replacing the diagonal preconditioner of the first step of each iteration
    tol : residual 2-norm for convergence: one value for all roots, or (n_roots,) values, one per root
    max_iter : Rayleigh-Ritz steps allowed
    max_space : subspace size that triggers a restart (default keep + (depth + 2) n_roots)
    keep : Ritz vectors kept at a restart (default n_roots + max(4, n_roots // 2))
    depth : corrections per unconverged root and iteration (see above)

    Returns
    -------
    (energies (n_roots,), vectors (n_roots, dim), iterations, matvecs)

    Raises ConvergenceError when a root is not converged after ``max_iter`` iterations.
    """
    diag = np.asarray(diag, dtype=float).ravel()
    dim = diag.shape[0]
    k = min(int(n_roots), dim)
    tols = np.broadcast_to(np.asarray(tol, dtype=float), (int(n_roots),))[:k]
    extra = max(4, k // 2)
    if guess is not None:
        basis = np.array(guess, dtype=float, copy=True)
    else:
        n_guess = min(dim, max(k, n_guess if n_guess is not None else k + extra))
        order = np.argsort(diag, kind="stable")  # among ties (degenerate orbitals) the lower index first
        # extend over near-ties so that a degenerate group of start configurations is never cut
        while n_guess < dim and diag[order[n_guess]] - diag[order[n_guess - 1]] < 1e-6:
            n_guess += 1
        basis = np.zeros((n_guess, dim))
        basis[np.arange(n_guess), order[:n_guess]] = 1.0
    if rng is not None and noise > 0 and basis.shape[0] < dim:
        basis += noise * rng.standard_normal(basis.shape) / np.sqrt(dim)
    basis, _ = orthonormal_complement(np.zeros((0, dim)), basis)
    if basis.shape[0] < k:
        raise ValueError(f"{basis.shape[0]} independent start vectors for {k} roots")
    keep = min(dim, max(k, keep or k + extra))
    max_space = min(dim, max(max_space or keep + (depth + 2) * k, basis.shape[0] + k, keep + k))
    # subspace basis V and its images W = A V as rows of one preallocated array
    vw = np.empty((2, max_space, dim))
    m = basis.shape[0]
    vw[0, :m] = basis
    vw[1, :m] = matvec(basis)
    n_mv = m
    sub = vw[0, :m] @ vw[1, :m].T
    res_norm = np.full(k, np.inf)
    locked = np.zeros(k, dtype=bool)  # converged roots: residuals not recomputed until the final check
    prev = None  # coefficients of the previous iteration's Ritz vectors in the current basis
    changed = True  # the subspace grew or restarted since the last Rayleigh-Ritz step
    for it in range(1, max_iter + 1):
        if changed:  # (not after a pass that only locked roots: the final check reuses its Ritz pairs)
            # Ritz vectors of the wanted roots only, unless this step may restart (then ``keep`` of them:
            # the restart below needs them, and todo <= the roots not locked yet)
            n_open = int(np.count_nonzero(~locked[:min(k, m)])) or k
            restart = m + min(depth * n_open, max_space - keep) > max_space
            theta_all, s = _lowest_eigh(0.5 * (sub + sub.T), min(m, keep if restart else k))
            changed = False
        kk = min(k, m)
        theta, s_k = theta_all[:kk], s[:, :kk]
        active = np.flatnonzero(~locked[:kk])
        if active.size == 0:  # all locked: final check of every residual together
            active = np.arange(kk)
            locked[:] = False
        xr = np.matmul(s_k[:, active].T, vw[:, :m])  # Ritz vectors and their images, (2, a, dim)
        resid = xr[1] - theta[active, None] * xr[0]
        res_norm[active] = np.sqrt(np.einsum("ij,ij->i", resid, resid))
        conv = res_norm[active] < tols[active]
        if kk == k and active.size == k and np.all(conv):
            return theta, xr[0], it, n_mv
        locked[active[conv]] = True
        todo = active[~conv]
        if todo.size == 0:
            continue  # every root converged once: the next pass checks them all together
        shifts = theta[todo]
        if precondition is not None:
            new = precondition(resid[~conv], xr[0][~conv], shifts)
        else:
            new = resid[~conv] / _safe(shifts[:, None] - diag[None, :])
        if m + min(depth * todo.size, max_space - keep) > max_space:
            # restart from the lowest Ritz vectors and the previous iteration's ones ("GD+k")
            if s.shape[1] < min(m, keep):  # (only after a final check that re-opened a root)
                theta_all, s = _lowest_eigh(0.5 * (sub + sub.T), min(m, keep))
            cols = s[:, :min(m, keep)]
            if prev is not None:
                p = np.zeros((m, prev.shape[1]))
                p[:prev.shape[0]] = prev
                p, _ = orthonormal_complement(cols.T, p.T)
                cols = np.concatenate([cols, p[:max(0, max_space - todo.size - cols.shape[1])].T], axis=1)
            vw[:, :cols.shape[1]] = np.matmul(cols.T, vw[:, :m])
            sub = cols.T @ sub @ cols
            m = cols.shape[1]
            s_k = np.eye(m)[:, :kk]
        prev = s_k
        m0 = m
        changed = True
        for step in range(depth):
            new, kept = orthonormal_complement(vw[0, :m], new, reorth=REORTH)
            n_new = min(new.shape[0], max_space - m)
            if n_new == 0:
                break
            vw[0, m:m + n_new] = new[:n_new]
            vw[1, m:m + n_new] = matvec(new[:n_new])
            n_mv += n_new
            cross = vw[0, :m + n_new] @ vw[1, m:m + n_new].T  # (m + n_new, n_new)
            grown = np.empty((m + n_new, m + n_new))
            grown[:m, :m] = sub
            grown[:, m:] = cross
            grown[m:, :m] = cross[:m].T
            sub = grown
            if step + 1 < depth:
                # the correction the next iteration would add: (A - theta) t / (theta - D)
                shifts = shifts[kept[:n_new]] if kept is not None else np.full(n_new, shifts.min())
                r2 = vw[1, m:m + n_new] - shifts[:, None] * vw[0, m:m + n_new]
                new = r2 / _safe(shifts[:, None] - diag[None, :])
            m += n_new
        if m == m0:  # no new direction: the subspace is exhausted
            raise ConvergenceError(
                f"Davidson CIS did not converge: largest residual {np.max(res_norm):.1e} eV after {it} "
                f"iterations (tolerance {tols.min():.0e}); no new search direction is left")
    raise ConvergenceError(
        f"Davidson CIS did not converge: largest residual {np.max(res_norm):.1e} eV after {max_iter} "
        f"iterations (tolerance {tols.min():.0e})")


def orthonormal_complement(basis: np.ndarray, new: np.ndarray, drop: float = 1e-6, reorth: float = 0.5):
    """Rows of ``new`` made orthonormal to the (orthonormal) ``basis`` rows and to each other.

    Block classical Gram-Schmidt against the basis, with a second pass when the first left less than
    ``reorth`` of a row's squared norm (Kahan-Parlett "twice is enough"; 0.5 is their criterion, a
    smaller value accepts one pass for rows that kept more: a row that kept a fraction f of its squared
    norm keeps rounding errors of order 1e-16 / sqrt(f) along the basis); rows left with less than
    sqrt(``drop``) of their norm are dropped; then Cholesky orthonormalisation of the block (Gram-Schmidt order: row j stays
    mostly the j-th input), or canonical (Loewdin) orthonormalisation when the rows are nearly
    dependent. When the block was ill-conditioned, both steps run once more, so that the subspace
    stays orthonormal to rounding (a loss would show up as wrong Ritz values).

    Returns (rows (r, dim), indices of ``new`` the rows stem from, or None after a Loewdin mixing).
    """
    n0 = np.einsum("ij,ij->i", new, new)
    idx = np.flatnonzero(n0 > 0)
    if idx.size < new.shape[0]:
        new, n0 = new[idx], n0[idx]
    for rnd in range(2):
        if basis.shape[0] and new.shape[0]:
            new = new - (new @ basis.T) @ basis
            nn = np.einsum("ij,ij->i", new, new)
            if rnd == 0 and (nn < reorth * n0).any():
                new -= (new @ basis.T) @ basis
                nn = np.einsum("ij,ij->i", new, new)
            if rnd == 0:
                ok = nn > drop * n0
                if not ok.all():
                    new, idx = new[ok], idx[ok]
        if new.shape[0] == 0:
            return new, idx
        s = new @ new.T
        # LAPACK called directly (numpy's wrappers cost more than these few-row factorisations)
        chol, info = _potrf(s, lower=1)
        piv = chol.diagonal() ** 2 / s.diagonal() if info == 0 else None
        if piv is not None and piv.min() >= drop:
            linv, info = _trtri(chol, lower=1)
        if piv is not None and piv.min() >= drop and info == 0:
            new = linv @ new
            well = piv.min() > 0.01
        else:
            lam, u = np.linalg.eigh(s)
            keep = lam > drop * lam[-1]
            new = (u[:, keep] / np.sqrt(lam[keep])).T @ new
            idx = None
            well = False
        if well:
            break
    return new, idx


def kernel(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, n_states: int,
           multiplicity: int = 1, *, tol: float = CONV_TOL, max_iter: int = 200, seed: int = 20240501,
           window: int | None = None, max_space: int | None = None, n_guess: int | None = None,
           n_check: int = 0):
    """Lowest ``n_states`` CIS roots by the matrix-free Davidson method.

    Same arguments and result as :func:`ppp.solvers.cis.kernel` (a ``CISResult``); memory O(N^2)
    per trial vector plus the subspace (a few dozen vectors of n_occ * n_vir numbers).
    ``seed`` fixes the generator of the start-vector admixture (see :func:`davidson`), so results are
    reproducible. ``window``: frontier orbitals per side for the start vectors and the two-level
    preconditioner (:func:`frontier_guess`, :func:`window_preconditioner`); None: :func:`window_size`;
    0 for unit start vectors and the plain diagonal preconditioner. ``n_check``: the last ``n_check`` of
    the ``n_states`` roots are wanted for their energies only (the degeneracy test of
    :func:`ppp.solvers.cis.align_degenerate`) and converged to ``CHECK_TOL`` (if looser than ``tol``);
    their vectors are returned but must not be used as accurate.
    """
    from .cis import CISResult

    if multiplicity not in (1, 3):
        raise ValueError("multiplicity must be 1 or 3")
    op = operator(mo_energy, mo_coeff, gamma, n_occ)
    n = op.co.shape[0]
    o, v = n_occ, n - n_occ
    k = max(0, min(int(n_states), o * v))
    if k == 0:
        return CISResult(multiplicity, np.zeros(0), np.zeros((0, o, v)))
    diag = op.de - exchange_diagonal(op)
    if multiplicity == 1 and o * v <= EXACT_DIAGONAL_MAX:
        diag = diag + 2.0 * coulomb_diagonal(op)
    diag = diag.ravel()

    def matvec(rows):
        return apply(op, rows, multiplicity)

    tols = np.full(k, float(tol))
    if n_check > 0:
        tols[max(0, k - int(n_check)):] = max(float(tol), CHECK_TOL)
    extra = {}
    large = n > LARGE_CENTRES
    if window is None:
        window = window_size(n) if large else 0
    if large:
        # sigma-vectors dominate: fewer of them (one correction per root and iteration, a larger
        # subspace) count more than the small dense eigenproblems of each iteration
        n_guess = n_guess or min(o * v, max(2 * k + 2, k + 8))
        extra.update(depth=1, keep=n_guess, max_space=max_space or 5 * n_guess)
    else:
        keep = min(o * v, 2 * k + 2)
        extra.update(keep=keep, max_space=max_space or keep + DYE_GROWTH * k)
    if window > 0:
        n_guess = min(o * v, n_guess or k + max(4, k // 2))
        eig = window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity, window)
        extra.update(guess=frontier_guess(mo_energy, mo_coeff, gamma, n_occ, n_guess, multiplicity, window, eig),
                     precondition=window_preconditioner(mo_energy, mo_coeff, gamma, n_occ, diag, multiplicity,
                                                        window, eig))
    else:
        extra.update(n_guess=n_guess)
    w, x, _, _ = davidson(matvec, diag, k, tol=tols, max_iter=max_iter, rng=np.random.default_rng(seed), **extra)
    return CISResult(multiplicity, w, x.reshape(k, o, v))
