"""Matrix-free CIS for large pi-systems: sigma-vectors from MO coefficients and gamma, and a Davidson
eigensolver for the lowest roots.

The CIS matrix (module :mod:`ppp.solvers.cis`) has (n_occ n_vir)^2 entries, 4 GB at N = 300 centres.
Under zero differential overlap its product with a trial vector X (n_occ x n_vir) never needs it:
with C_o = C[:, :n_occ], C_v = C[:, n_occ:] and (pq|rs) = sum_{mu,nu} C_mu,p C_mu,q gamma_mu,nu C_nu,r C_nu,s,

Coulomb-type term (the "2 (ia|jb)" of singlets):

    J(X)_ia = sum_jb (ia|jb) X_jb = sum_mu C_mu,i C_mu,a g_mu ,
        g = gamma d ,  d_nu = sum_jb C_nu,j X_jb C_nu,b = diag(C_o X C_v^T)_nu
    =>  J(X) = C_o^T diag(g) C_v                                   O(N n_occ n_vir)

Exchange-type term (the "(ij|ab)"):

    K(X)_ia = sum_jb (ij|ab) X_jb = sum_{mu,nu} C_mu,i C_mu,j gamma_mu,nu C_nu,a C_nu,b X_jb
            = sum_{mu,nu} C_mu,i [gamma o T]_mu,nu C_nu,a ,  T = C_o X C_v^T  (N x N)
    =>  K(X) = C_o^T (gamma o T) C_v                               O(N^2 (n_occ + n_vir)) = O(N^3)

where o is the elementwise (Hadamard) product. Then, spin-adapted (Foresman et al. 1992),

    singlet:  sigma = De o X + 2 J(X) - K(X)
    triplet:  sigma = De o X        - K(X) ,      De_ia = e_a - e_i .

Work per vector O(N^3) with four matrix products, memory O(N^2) per vector; several vectors go
through the same products at once (stacked GEMMs), in chunks that bound the memory.

The eigensolver is Davidson's (1975) method, restarted ("collapsed") to the current Ritz vectors when
the subspace is full. Its preconditioner is two-level: the exact CIS matrix on a window of frontier
orbitals (where the low states live), and elsewhere the diagonal De_ia - (ii|aa) + 2 (ia|ia) without
the last term, whose exact evaluation would cost O(N^2 n_occ n_vir); the start vectors are the lowest
eigenvectors of the window matrix.
"""
from __future__ import annotations

import numpy as np
import scipy.linalg

from ..errors import ConvergenceError

#: Residual 2-norm (eV) below which a root counts as converged. The energy error is of the order of
#: the residual squared over the gap to the next root; amplitudes are accurate to residual / gap.
CONV_TOL = 1e-8
#: Frontier orbitals per side of the window used for start vectors and preconditioning (measured on a
#: 398-centre ribbon, 11 singlets: 234 sigma-vectors with the diagonal alone, 180 with 24, 165 with 32,
#: 152 with 48, whose set-up then costs more than it saves).
WINDOW = 32
#: Trial vectors pushed through one stacked sigma product (bounds the N^2-sized intermediates).
CHUNK_BYTES = 64 * 2**20


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
    n = mo_coeff.shape[0]
    co, cv = mo_coeff[:, :o], mo_coeff[:, o:]
    de = mo_energy[o:][None, :] - mo_energy[:o][:, None]
    out = de[None] * x
    step = max(1, int(CHUNK_BYTES // (8 * n * n)))
    for s in range(0, m, step):
        xs = x[s:s + step]
        ms = xs.shape[0]
        y = (xs.reshape(ms * o, v) @ cv.T).reshape(ms, o, n)  # X C_v^T
        t = np.matmul(co, y)  # T = C_o X C_v^T, (ms, N, N)
        if multiplicity == 1:
            d = np.diagonal(t, axis1=1, axis2=2)  # diag(T), (ms, N)
            g = d @ gamma  # gamma symmetric: g_k = gamma d_k
            # 2 J(X) = 2 C_o^T diag(g) C_v, as one stacked product
            out[s:s + ms] += 2.0 * np.matmul(co.T, g[:, :, None] * cv[None])
        t *= gamma[None]  # gamma o T
        z = np.matmul(co.T, t)  # C_o^T (gamma o T), (ms, o, N)
        out[s:s + ms] -= (z.reshape(ms * o, n) @ cv).reshape(ms, o, v)  # - K(X)
    return out


def approximate_diagonal(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray,
                         n_occ: int) -> np.ndarray:
    """Preconditioner diagonal (n_occ, n_vir), eV: De_ia - (ii|aa).

    (ii|aa) = sum_{mu,nu} C_mu,i^2 gamma_mu,nu C_nu,a^2 = [(C_o o C_o)^T gamma (C_v o C_v)]_ia.
    This is the exact triplet diagonal; for singlets it lacks 2 (ia|ia), which is small for
    delocalised orbitals.
    """
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    de = mo_energy[n_occ:][None, :] - mo_energy[:n_occ][:, None]
    return de - (co * co).T @ gamma @ (cv * cv)


def window_matrix(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
                  multiplicity: int = 1, window: int = WINDOW):
    """Exact CIS matrix on the frontier window: the ``window`` highest occupied x ``window`` lowest
    virtual orbitals. Built from the ZDO integrals directly in O(N^2 w^2) for w = window:

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
    lam, u = scipy.linalg.eigh(a)
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


def window_preconditioner(mo_energy, mo_coeff, gamma, n_occ, diag, multiplicity=1, window=WINDOW, eig=None):
    """Two-level Davidson preconditioner M: the exact CIS matrix (:func:`window_matrix`) on the frontier
    window, the diagonal ``diag`` elsewhere; returned as a function (residuals, Ritz vectors, Ritz
    values) -> corrections. Olsen's correction (Olsen, Jorgensen & Simons 1990),
    t = -(M - theta)^-1 r + eps (M - theta)^-1 x with eps = x.(M - theta)^-1 r / x.(M - theta)^-1 x,
    keeps the accurate window block from handing back the current vector."""
    lam, u, flat = eig if eig is not None else window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity,
                                                             window)

    def solve(rows, theta):  # (M - theta)^-1 rows, row by row
        out = np.empty_like(rows)
        for r in range(rows.shape[0]):
            den = diag - theta[r]
            out[r] = rows[r] / np.where(np.abs(den) < 1e-8, np.copysign(1e-8, den), den)
            dl = lam - theta[r]
            dl = np.where(np.abs(dl) < 1e-8, np.copysign(1e-8, dl), dl)
            out[r, flat] = u @ ((u.T @ rows[r, flat]) / dl)
        return out

    def precondition(resid, vec, theta):
        mr = solve(resid, theta)
        mx = solve(vec, theta)
        eps = np.einsum("ij,ij->i", vec, mr) / np.einsum("ij,ij->i", vec, mx)
        return -(mr - eps[:, None] * mx)

    return precondition


def davidson(matvec, diag: np.ndarray, n_roots: int, *, n_guess: int | None = None, tol: float = CONV_TOL,
             max_iter: int = 200, max_space: int | None = None, rng: np.random.Generator | None = None,
             noise: float = 1e-3, guess: np.ndarray | None = None, precondition=None):
    """Lowest eigenpairs of a symmetric operator by Davidson's method (Davidson 1975).

    Parameters
    ----------
    matvec : callable, (m, dim) -> (m, dim), the operator applied to rows
    diag : (dim,) diagonal (approximate) used to precondition and to choose the start vectors
    n_roots : eigenpairs wanted
    n_guess : start vectors (unit vectors on the smallest diagonal entries); default
        max(2 n_roots + 2, n_roots + 8)
    rng : random generator for a small admixture (``noise``) to every start vector. Unit vectors of a
        symmetric molecule each belong to one symmetry species, and Davidson's subspace never leaves
        the species of its start vectors: a low root of a species absent from them would be missed
        (seen for a 48-centre rhombic flake and one root). The admixture gives every species a foothold.
        None: no admixture.
    guess : optional (m, dim) start vectors used instead of unit vectors (m sets n_guess)
    precondition : optional callable (residuals (m, dim), ritz vectors (m, dim), theta (m,)) -> corrections,
        replacing the diagonal preconditioner
    tol : residual 2-norm for convergence
    max_iter : subspace expansions allowed
    max_space : subspace size at which it collapses to the current Ritz vectors (default 5 n_guess)

    Returns
    -------
    (energies (n_roots,), vectors (n_roots, dim), iterations, matvecs)

    Raises ConvergenceError when a root is not converged after ``max_iter`` expansions.
    """
    dim = diag.shape[0]
    k = int(n_roots)
    if guess is not None:
        n_guess = guess.shape[0]
    n_guess = min(dim, max(k, n_guess if n_guess is not None else max(2 * k + 2, k + 8)))
    # subspace of up to 5 n_guess vectors before a collapse: on a 500-centre polyene 179 sigma-vectors
    # against 198 with 3 n_guess; memory 2 x 8 x dim bytes per vector (0.5 GB at 1,000 centres)
    max_space = min(dim, max(max_space or 0, 5 * n_guess, n_guess + 2 * k))
    # stable order: among equal diagonal entries (degenerate orbitals) the lower index first
    order = np.argsort(diag, kind="stable")[:n_guess]
    basis = np.zeros((max_space, dim))
    if guess is not None:
        basis[:n_guess] = guess[:n_guess]
    else:
        basis[np.arange(n_guess), order] = 1.0
    if rng is not None and noise > 0 and n_guess < dim:
        basis[:n_guess] += noise * rng.standard_normal((n_guess, dim)) / np.sqrt(dim)
    if guess is not None or (rng is not None and noise > 0 and n_guess < dim):
        q, _ = np.linalg.qr(basis[:n_guess].T)
        basis[:n_guess] = q.T
    images = np.zeros((max_space, dim))
    images[:n_guess] = matvec(basis[:n_guess])
    m = n_guess
    sub = basis[:m] @ images[:m].T
    n_mv = n_guess
    theta = vec = None
    res_norm = np.full(k, np.inf)
    for it in range(1, max_iter + 1):
        sub = 0.5 * (sub + sub.T)
        theta_all, s = scipy.linalg.eigh(sub)
        kk = min(k, m)
        theta, s_k = theta_all[:kk], s[:, :kk]
        vec = s_k.T @ basis[:m]
        resid = s_k.T @ images[:m] - theta[:, None] * vec
        res_norm = np.linalg.norm(resid, axis=1)
        todo = np.flatnonzero(res_norm >= tol)
        if kk == k and todo.size == 0:
            return theta, vec, it, n_mv
        # preconditioned residuals (Davidson 1975): t = r / (theta - D), denominators kept from zero
        if precondition is not None:
            new = precondition(resid[todo], vec[todo], theta[todo])
        else:
            denom = theta[todo, None] - diag[None, :]
            denom = np.where(np.abs(denom) < 1e-8, np.copysign(1e-8, denom), denom)
            new = resid[todo] / denom
        if m + new.shape[0] > max_space:
            # collapse: keep the lowest Ritz vectors (at least the wanted ones)
            keep = min(m, max(n_guess, k))
            s_keep = s[:, :keep]
            basis[:keep] = s_keep.T @ basis[:m]
            images[:keep] = s_keep.T @ images[:m]
            basis[keep:m] = 0.0
            images[keep:m] = 0.0
            m = keep
            sub = basis[:m] @ images[:m].T
        new = _orthonormal_complement(basis[:m], new)
        if new.shape[0] == 0:
            break
        n_new = min(new.shape[0], max_space - m)
        basis[m:m + n_new] = new[:n_new]
        images[m:m + n_new] = matvec(new[:n_new])
        n_mv += n_new
        # extend the subspace matrix by the new rows/columns only
        cross = basis[:m + n_new] @ images[m:m + n_new].T  # (m+n_new, n_new)
        grown = np.empty((m + n_new, m + n_new))
        grown[:m, :m] = sub
        grown[:, m:] = cross
        grown[m:, :m] = cross[:m].T
        sub = grown
        m += n_new
    raise ConvergenceError(
        f"Davidson CIS did not converge: largest residual {np.max(res_norm):.1e} eV after {max_iter} "
        f"iterations (tolerance {tol:.0e})")


def _orthonormal_complement(basis: np.ndarray, new: np.ndarray, drop: float = 1e-6) -> np.ndarray:
    """Rows of ``new`` made orthonormal to ``basis`` rows and to each other (two Gram-Schmidt passes
    against the basis, then a pivoted QR among themselves); nearly dependent rows are dropped."""
    norms = np.linalg.norm(new, axis=1)
    new = new[norms > 0] / norms[norms > 0, None]
    for _ in range(2):
        new = new - (new @ basis.T) @ basis
    if new.shape[0] == 0:
        return new
    q, r, _ = scipy.linalg.qr(new.T, mode="economic", pivoting=True)
    diag_r = np.abs(np.diag(r))
    rank = int(np.sum(diag_r > drop * max(diag_r[0], 1e-300))) if diag_r.size else 0
    if rank == 0 or diag_r[0] < drop:
        return new[:0]
    out = q[:, :rank].T
    # one more pass against the basis after QR (guards against loss of orthogonality)
    out = out - (out @ basis.T) @ basis
    out /= np.linalg.norm(out, axis=1)[:, None]
    return out


def kernel(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int, n_states: int,
           multiplicity: int = 1, *, tol: float = CONV_TOL, max_iter: int = 200, seed: int = 20240501,
           window: int | None = None):
    """Lowest ``n_states`` CIS roots by the matrix-free Davidson method.

    Same arguments and result as :func:`ppp.solvers.cis.kernel` (a ``CISResult``); memory O(N^2)
    per trial vector plus the subspace (a few dozen vectors of n_occ * n_vir numbers).
    ``seed`` fixes the generator of the start-vector admixture (see :func:`davidson`), so results are
    reproducible. ``window``: frontier orbitals per side for the start vectors and the two-level
    preconditioner (:func:`frontier_guess`, :func:`window_preconditioner`); None: :func:`window_size`;
    0 for unit start vectors and the plain diagonal preconditioner.
    """
    from .cis import CISResult

    if multiplicity not in (1, 3):
        raise ValueError("multiplicity must be 1 or 3")
    mo_energy = np.asarray(mo_energy, dtype=float)
    mo_coeff = np.asarray(mo_coeff, dtype=float)
    gamma = np.asarray(gamma, dtype=float)
    n = mo_coeff.shape[0]
    o, v = n_occ, n - n_occ
    k = max(0, min(int(n_states), o * v))
    if k == 0:
        return CISResult(multiplicity, np.zeros(0), np.zeros((0, o, v)))
    diag = approximate_diagonal(mo_energy, mo_coeff, gamma, n_occ).ravel()

    def matvec(rows):
        return sigma(mo_energy, mo_coeff, gamma, n_occ, rows.reshape(-1, o, v), multiplicity).reshape(
            rows.shape[0], -1)

    extra = {}
    if window is None:
        window = window_size(n)
    if window > 0:
        n_guess = min(o * v, max(2 * k + 2, k + 8))
        eig = window_eigen(mo_energy, mo_coeff, gamma, n_occ, multiplicity, window)
        extra = dict(guess=frontier_guess(mo_energy, mo_coeff, gamma, n_occ, n_guess, multiplicity, window, eig),
                     precondition=window_preconditioner(mo_energy, mo_coeff, gamma, n_occ, diag, multiplicity,
                                                        window, eig))
    w, x, _, _ = davidson(matvec, diag, k, tol=tol, max_iter=max_iter, rng=np.random.default_rng(seed), **extra)
    return CISResult(multiplicity, w, x.reshape(k, o, v))
