"""numba kernels for the per-iteration O(N^2) work of the SCF, compiled on first use.

numba is imported only when a kernel is first called (or by :func:`warm_up`), so ``import ppp`` and
a one-molecule run never pay its start-up (1-3 s on the loaded development machine, even with a warm
cache). Compiled code is cached on disk (``cache=True``). The SCF uses the kernel only when numba is
already loaded (see ``ppp.solvers.scf.JIT_MIN_CENTRES``).

Each kernel has a plain numpy twin (``*_reference``) that states the same mathematics in the
obvious way; ``tests/test_kernels.py`` checks them equal on random inputs.

Measured by ``benchmarks/bench_kernels.py``: 3-10 times faster than the numpy expression per call,
which is a few per cent of an SCF iteration next to its eigensolve.
"""
from __future__ import annotations

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

    return fock_energy


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
    e = _compiled()(core, gamma, dens, fock)
    return fock, float(e)


def warm_up() -> None:
    """Import numba and load (or compile) the kernels now; afterwards the SCF uses them for large
    systems. For long-running processes that handle many large molecules."""
    fock_energy(np.eye(2), np.eye(2), np.eye(2))
