"""numba kernel for the SCF, compiled on first use: the whole DIIS loop.

numba is imported only when a kernel is first called (or by :func:`warm_up`), so ``import ppp`` and
a one-molecule run never pay its start-up (1-3 s on the loaded development machine, even with a warm
cache). Compiled code is cached on disk (``cache=True``). The SCF runs its loop in :func:`scf_loop` only
when numba is already loaded (see ``ppp.solvers.scf.JIT_MIN_CENTRES``): a batch worker or a notebook
that calls :func:`warm_up` once.

The kernel's reference twin is the numpy loop of :func:`ppp.solvers.scf.iterate`, which states the same
mathematics with numpy calls; ``tests/test_kernels.py`` checks them equal on dyes and on random models
(fixed seeds). (An earlier kernel for the Fock build alone, 3-10 times faster than its numpy expression
but only a few per cent of an iteration, is superseded by this one.)

Measured by ``benchmarks/bench_kernels.py``: the whole loop saves the 15-20 us of numpy calls per
iteration that a dye-sized SCF spends next to a 10-30 us eigensolve; an iteration then costs its
eigensolve plus 10-25 %.
"""
from __future__ import annotations

import math
from functools import lru_cache

import numpy as np


@lru_cache(maxsize=None)
def _compiled():
    import numba

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

    return scf_loop


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
    ok, it, dens = _compiled()(core, gamma, int(n_occ), dens0, int(max_iter), int(diis_space),
                                  float(conv_tol), float(conv_tol_grad), float(np.finfo(float).eps),
                                  np.ascontiguousarray(i, dtype=np.int64), np.ascontiguousarray(j, dtype=np.int64),
                                  np.ascontiguousarray(beta_ref, dtype=np.float64), int(law), float(a), float(b),
                                  float(k), float(s_ref), float(r_ref), float(delta), float(core_tol))
    return bool(ok), int(it), dens


def warm_up() -> None:
    """Import numba and load (or compile) the kernel now; afterwards the SCF loop runs compiled. For
    long-running processes that handle many molecules (1.4 s with a warm cache, see
    benchmarks/bench_coldstart.py)."""
    scf_loop(np.diag([-1.0, 1.0]), np.eye(2), 1, np.diag([2.0, 0.0]), 2, 8, 1e-11, 1e-9)
