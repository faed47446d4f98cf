"""numba kernels for the SCF, compiled on first use: the Fock build, and the whole DIIS loop.

numba is imported only when a kernel is first called (or by :func:`warm_up`), so ``import ppp`` and
a one-molecule run never pay its start-up (1-3 s on the loaded development machine, even with a warm
cache). Compiled code is cached on disk (``cache=True``). The SCF runs its loop in :func:`scf_loop` only
when numba is already loaded (see ``ppp.solvers.scf.JIT_MIN_CENTRES``): a batch worker or a notebook
that calls :func:`warm_up` once.

Each kernel has a plain numpy twin (``*_reference``) that states the same mathematics in the
obvious way; ``tests/test_kernels.py`` checks them equal on random inputs.

Measured by ``benchmarks/bench_kernels.py``: the Fock build 3-10 times faster than the numpy
expression per call, a few per cent of an SCF iteration next to its eigensolve. The whole loop saves
the 15-25 us of numpy calls per iteration that a dye-sized SCF spends next to a ~12 us eigensolve.
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np


def fock_energy_reference(core: np.ndarray, gamma: np.ndarray, dens: np.ndarray):
    """PPP Fock matrix and electronic energy (Pople 1953; Pariser & Parr 1953).

    F_ii = h_ii + 1/2 P_ii gamma_ii + sum_{j != i} P_jj gamma_ij ;  F_ij = h_ij - 1/2 P_ij gamma_ij ;
    E = 1/2 sum_ij P_ij (h_ij + F_ij).

    Returns (F (N, N) eV, E eV).
    """
    f = core - 0.5 * dens * gamma
    f[np.diag_indices_from(f)] += gamma @ np.diag(dens)
    e = 0.5 * float(np.sum(dens * (core + f)))
    return f, e


@lru_cache(maxsize=None)
def _compiled():
    import numba

    @numba.njit(cache=True, fastmath=False, nogil=True)
    def fock_energy(core, gamma, dens, fock):
        n = core.shape[0]
        e = 0.0
        for i in range(n):
            e_row = 0.0  # per-row partial sums keep the rounding of E at ~sqrt(N) eps |E|
            coul = 0.0
            for j in range(n):
                coul += gamma[i, j] * dens[j, j]
                if j != i:
                    f = core[i, j] - 0.5 * dens[i, j] * gamma[i, j]
                    fock[i, j] = f
                    e_row += dens[i, j] * (core[i, j] + f)
            # diagonal: h_ii - 1/2 P_ii gamma_ii + sum_j P_jj gamma_ij  (j = i included in the sum)
            f = core[i, i] - 0.5 * dens[i, i] * gamma[i, i] + coul
            fock[i, i] = f
            e += e_row + dens[i, i] * (core[i, i] + f)
        return 0.5 * e

    @numba.njit(cache=True, fastmath=False, nogil=True)
    def scf_loop(core0, gamma, n_occ, dens0, max_iter, space, conv_tol, conv_tol_grad, eps,
                 bi, bj, beta_ref, law, a_len, b_len, k_rho, s_ref, r_ref, delta, core_tol):
        n = core0.shape[0]
        d = 0.5 * dens0  # half density D = P / 2 (see ppp.solvers.scf.iterate)
        nb = bi.shape[0]
        core = core0.copy() if nb else core0
        core_change = 0.0
        focks = np.empty((space, n, n))
        errs = np.empty((space, n, n))
        b = np.zeros((space, space))
        order = np.zeros(space, dtype=np.int64)  # slots in insertion order
        count = 0
        e_old = np.inf
        for it in range(1, max_iter + 1):
            if nb:  # bond-order beta (ppp.model.variable_beta): beta_ref * factor(r(P_ij))
                change = 0.0
                for m in range(nb):
                    i, j = bi[m], bj[m]
                    length = a_len - b_len * (2.0 * d[i, j])
                    if law == 0:  # overlap law, Mulliken et al. (1949) 2p-pi overlap
                        rho = k_rho * length
                        val = beta_ref[m] * (math.exp(-rho) * (1.0 + rho * (1.0 + rho * (0.4 + rho / 15.0)))
                                             / s_ref)
                    else:  # exponential law
                        val = beta_ref[m] * math.exp(-(length - r_ref) / delta)
                    change = max(change, abs(val - core[i, j]))
                    core[i, j] = val
                    core[j, i] = val
                core_change = change if it > 1 else np.inf
            slot = order[0] if count == space else count
            f = focks[slot]
            er = errs[slot]
            e = 0.0
            for i in range(n):  # F = h - gamma o D + diag(2 gamma diag(D));  E = sum D o (h + F)
                coul = 0.0
                for j in range(n):
                    coul += gamma[i, j] * d[j, j]
                    f[i, j] = core[i, j] - d[i, j] * gamma[i, j]
                f[i, i] += 2.0 * coul
                e_row = 0.0
                for j in range(n):
                    e_row += d[i, j] * (core[i, j] + f[i, j])
                e += e_row
            fd = np.dot(f, d)
            max_err = 0.0
            for i in range(n):  # (FP - PF) / 2 = FD - (FD)^T
                for j in range(n):
                    x = fd[i, j] - fd[j, i]
                    er[i, j] = x
                    if x > max_err:
                        max_err = x
            if (abs(e - e_old) < max(conv_tol, 1e3 * eps * abs(e)) and 2.0 * max_err < conv_tol_grad
                    and core_change < core_tol):
                return True, it, d + d
            e_old = e
            if count == space:  # the oldest slot is overwritten
                for k in range(space - 1):
                    order[k] = order[k + 1]
                order[space - 1] = slot
            else:
                order[count] = slot
                count += 1
            for k in range(count):  # one new row of B_kl = <e_k|e_l>
                s = 0.0
                ek = errs[k]
                for i in range(n):
                    for j in range(n):
                        s += ek[i, j] * er[i, j]
                b[slot, k] = s
                b[k, slot] = s
            f_use = f
            if count >= 2:  # Pulay (1980, 1982): [[B, -1], [-1, 0]] [c, -lambda] = [0, -1]
                scale = 0.0
                for k in range(count):
                    scale = max(scale, b[k, k])
                a = np.full((count + 1, count + 1), -1.0)
                a[count, count] = 0.0
                for k in range(count):
                    for l in range(count):
                        a[k, l] = b[k, l] / scale if scale > 0 else b[k, l]
                rhs = np.zeros(count + 1)
                rhs[count] = -1.0
                ok = True
                coef = rhs
                try:
                    coef = np.linalg.solve(a, rhs)
                except Exception:  # noqa: BLE001 - singular B (numba raises a generic error)
                    ok = False
                if ok and not np.dot(coef, coef) <= 1e16:  # |coef| <= 1e8; NaN fails the test as well
                    ok = False
                if not ok:  # least squares, as numpy's lstsq with rcond=None
                    try:
                        coef = np.linalg.lstsq(a, rhs, rcond=eps * (count + 1))[0]
                        ok = np.all(np.isfinite(coef))
                    except Exception:  # noqa: BLE001
                        ok = False
                if ok:
                    f_use = np.zeros((n, n))
                    for k in range(count):
                        f_use += coef[k] * focks[k]
                else:
                    f_use = focks[order[count - 1]]
            if not np.all(np.isfinite(f_use)):
                return False, it, d + d
            c = np.ascontiguousarray(np.linalg.eigh(f_use)[1][:, :n_occ])
            d = np.dot(c, np.ascontiguousarray(c.T))
        return False, max_iter, d + d

    return fock_energy, scf_loop


def scf_loop(core: np.ndarray, gamma: np.ndarray, n_occ: int, dens0: np.ndarray, max_iter: int,
             diis_space: int, conv_tol: float, conv_tol_grad: float, bond_beta: tuple | None = None,
             core_tol: float = np.inf) -> tuple[bool, int, np.ndarray]:
    """numba twin of the plain-DIIS branch of :func:`ppp.solvers.scf.iterate` (its reference, with the
    equations; ``tests/test_kernels.py`` checks them equal): the whole SCF loop, Fock build, energy,
    error FP - PF, DIIS (Pulay 1980, 1982) and eigensolve, in one compiled call.

    core, gamma, dens0 : (N, N) float64, eV and electrons;  n_occ : doubly occupied orbitals;
    max_iter : Fock builds allowed;  diis_space : DIIS vectors kept;  conv_tol : energy change, eV;
    conv_tol_grad : max |FP - PF|, eV.
    bond_beta : optional ``kernel_form`` of :class:`ppp.model.variable_beta.CoreOfBondOrders` (core0, i, j,
        beta_ref, law, a, b, zeta/a0, S(r_ref), r_ref, delta): the varied betas are rebuilt from the bond
        orders at every iteration, as that class's ``__call__`` does, and the run also needs the last
        change of a beta below ``core_tol`` (eV). ``core`` is then ignored.
    Returns (converged, iterations, density (N, N)).
    """
    if bond_beta is None:
        empty = np.zeros(0, dtype=np.int64)
        extra = (empty, empty, np.zeros(0), 0, 0.0, 0.0, 0.0, 1.0, 0.0, 1.0)
        core_tol = np.inf
    else:
        core, extra = bond_beta[0], bond_beta[1:]
    core = np.ascontiguousarray(core, dtype=np.float64)
    gamma = np.ascontiguousarray(gamma, dtype=np.float64)
    dens0 = np.ascontiguousarray(dens0, dtype=np.float64)
    i, j, beta_ref, law, a, b, k, s_ref, r_ref, delta = extra
    ok, it, dens = _compiled()[1](core, gamma, int(n_occ), dens0, int(max_iter), int(diis_space),
                                  float(conv_tol), float(conv_tol_grad), float(np.finfo(float).eps),
                                  np.ascontiguousarray(i, dtype=np.int64), np.ascontiguousarray(j, dtype=np.int64),
                                  np.ascontiguousarray(beta_ref, dtype=np.float64), int(law), float(a), float(b),
                                  float(k), float(s_ref), float(r_ref), float(delta), float(core_tol))
    return bool(ok), int(it), dens


def fock_energy(core: np.ndarray, gamma: np.ndarray, dens: np.ndarray):
    """numba twin of :func:`fock_energy_reference`: one pass over the N^2 entries, no temporaries.

    core, gamma, dens : (N, N) float64, C-contiguous. Returns (F (N, N) eV, E eV).
    """
    core = np.ascontiguousarray(core, dtype=np.float64)
    gamma = np.ascontiguousarray(gamma, dtype=np.float64)
    dens = np.ascontiguousarray(dens, dtype=np.float64)
    n = core.shape[0]
    if core.shape != (n, n) or gamma.shape != (n, n) or dens.shape != (n, n):
        raise ValueError(f"fock_energy needs three N x N matrices, got {core.shape}, {gamma.shape}, {dens.shape}")
    fock = np.empty_like(core)
    e = _compiled()[0](core, gamma, dens, fock)
    return fock, float(e)


def warm_up() -> None:
    """Import numba and load (or compile) the kernels now; afterwards the SCF uses them for large
    systems. For long-running processes that handle many large molecules."""
    fock_energy(np.eye(2), np.eye(2), np.eye(2))
    scf_loop(np.diag([-1.0, 1.0]), np.eye(2), 1, np.diag([2.0, 0.0]), 2, 8, 1e-11, 1e-9)
