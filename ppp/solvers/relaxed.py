"""Relaxed CIS difference densities on the centres (Z-vector method), for the state-specific solvent term.

The relaxed difference density of a CIS state is the derivative of its excitation energy omega with respect
to the one-electron Hamiltonian, orbital relaxation included (Handy & Schaefer 1984 Z-vector method; CIS:
Foresman, Head-Gordon, Pople & Frisch 1992). On the diagonal of the ZDO basis:

    dP_mu = d omega / d h_mu,mu = Delta_mu,mu - (C_v Z C_o^T)_mu,mu ,     H Z = L ,

with (AO = centre basis, X the normalised amplitudes, o/v occupied/virtual orbitals)

* the unrelaxed difference density Delta = Y Y^T - W W^T, Y = C_v X^T, W = C_o X;
* the singlet orbital Hessian of the closed-shell SCF energy functional,
  H_ai,bj = delta (e_a - e_i) + 4 (ai|bj) - (ab|ij) - (aj|bi)  (+ the reaction-field term);
* the orbital Lagrangian of omega (derivative with respect to the rotation C_i += C_a k_ai), derived for
  the ZDO integrals (pq|rs) = sum C C gamma C C: with R = C_o X C_v^T, r = diag R and the two-electron
  Fock operator G(D) = diag(gamma diag D) - 1/2 gamma o D,

      L = 4 C_v^T G(Delta) C_o + s [ (C_v^T diag(gamma r) C_v) X^T - X^T (C_o^T diag(gamma r) C_o) ]
          - 2 [ C_v^T Q C_v X^T - X^T C_o^T Q C_o ],        Q = gamma o R,

  s = 4 for singlets (the 2 (ia|jb) term of the CIS matrix) and 0 for triplets. Terms with the occupied-
  virtual Fock block vanish at SCF convergence.

A solvent reaction field in the SCF functional (G_rf = -1/2 f q.Gamma.q, ppp.model.solvent) adds
-f diag(Gamma diag D) to G in both L and H, so that the density is the derivative of the excitation
energy the model computes. Tests check it against finite differences of omega.
"""
from __future__ import annotations

import numpy as np
import scipy.linalg
from scipy.sparse.linalg import LinearOperator, cg

#: Up to this many occupied-virtual pairs the orbital Hessian is built and Cholesky-factorised once for
#: all states; above, each state's equations are solved by conjugate gradients with an O(N^3) product.
DENSE_MAX_PAIRS = 2500


def _two_electron(gamma: np.ndarray, rf_kernel: np.ndarray | None, d: np.ndarray) -> np.ndarray:
    """G(D) = diag(gamma diag D) - 1/2 gamma o D (- f Gamma diag D on the diagonal with a reaction field)."""
    g = -0.5 * gamma * d
    diag = gamma @ np.diagonal(d)
    if rf_kernel is not None:
        diag = diag - rf_kernel @ np.diagonal(d)
    g[np.diag_indices_from(g)] += diag
    return g


def relaxed_difference_charges(mo_energy: np.ndarray, mo_coeff: np.ndarray, gamma: np.ndarray, n_occ: int,
                               amplitudes: np.ndarray, multiplicity: int = 1,
                               rf_kernel: np.ndarray | None = None, tol: float = 1e-10) -> np.ndarray:
    """Relaxed change of the pi population on each centre, dP_mu (k, N), for CIS states.

    mo_energy (N,), mo_coeff (N, N): converged SCF orbitals;  gamma (N, N) eV;  amplitudes (k, n_occ, n_vir)
    rf_kernel : optional (N, N) f * Gamma of the reaction field in the SCF functional, eV
    Net charge change dq = -dP. Each row sums to 0 (one electron moves).
    """
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    eo, evir = mo_energy[:n_occ], mo_energy[n_occ:]
    de = evir[:, None] - eo[None, :]  # (n_vir, n_occ)
    s = 4.0 if multiplicity == 1 else 0.0

    def hess(kvec):
        k = kvec.reshape(de.shape)
        m = cv @ k @ co.T
        return (de * k + cv.T @ _two_electron(gamma, rf_kernel, 2.0 * (m + m.T)) @ co).ravel()

    solve = None
    if de.size <= DENSE_MAX_PAIRS:
        solve = _dense_solver(de, co, cv, gamma, rf_kernel)
    op = LinearOperator((de.size, de.size), matvec=hess, dtype=float)
    out = []
    for x in np.asarray(amplitudes, dtype=float):
        y, w = cv @ x.T, co @ x
        delta = y @ y.T - w @ w.T
        r = co @ x @ cv.T
        wg = gamma @ np.diagonal(r)
        q = gamma * r
        lag = 4.0 * cv.T @ _two_electron(gamma, rf_kernel, delta) @ co
        if s:
            lag += s * ((cv.T * wg) @ cv @ x.T - x.T @ ((co.T * wg) @ co))
        lag -= 2.0 * (cv.T @ q @ cv @ x.T - x.T @ co.T @ q @ co)
        if solve is not None:
            z, info = solve(lag.ravel()), 0
        else:
            z, info = cg(op, lag.ravel(), rtol=tol, atol=0.0, maxiter=10 * de.size + 100)
        if info != 0:  # the Hessian of a stable SCF minimum is positive definite; fall back to a dense solve
            hm = np.column_stack([hess(e) for e in np.eye(de.size)])
            z = np.linalg.lstsq(hm, lag.ravel(), rcond=None)[0]
        zm = z.reshape(de.shape)
        out.append(np.diagonal(delta) - np.einsum("ma,ai,mi->m", cv, zm, co))
    return np.array(out).reshape(len(out), mo_coeff.shape[0])


def _dense_solver(de, co, cv, gamma, rf_kernel):
    """Build H_ai,bj = delta (e_a - e_i) + 4 (ai|bj) - (ab|ij) - (aj|bi) (+ reaction field, -4 f (ai|Gamma|bj))
    and return a function solving H z = b (Cholesky; least squares if H is not positive definite)."""
    nv, no = de.shape
    n = co.shape[0]
    vo = (cv[:, :, None] * co[:, None, :]).reshape(n, nv * no)
    coul = 4.0 * gamma if rf_kernel is None else 4.0 * (gamma - rf_kernel)
    h = vo.T @ coul @ vo
    vv = (cv[:, :, None] * cv[:, None, :]).reshape(n, nv * nv)
    oo = (co[:, :, None] * co[:, None, :]).reshape(n, no * no)
    h -= (vv.T @ gamma @ oo).reshape(nv, nv, no, no).transpose(0, 2, 1, 3).reshape(nv * no, nv * no)
    h -= (vo.T @ gamma @ vo).reshape(nv, no, nv, no).transpose(0, 3, 2, 1).reshape(nv * no, nv * no)
    h[np.diag_indices_from(h)] += de.ravel()
    try:
        factor = scipy.linalg.cho_factor(h)
        return lambda b: scipy.linalg.cho_solve(factor, b)
    except np.linalg.LinAlgError:
        return lambda b: np.linalg.lstsq(h, b, rcond=None)[0]
