"""numba kernels against the numpy expressions they replace, in one run (ratios).

    python -m benchmarks.bench_kernels
"""
from __future__ import annotations

import numpy as np

from benchmarks.common import best_of, machine
from ppp.solvers import kernels
from ppp.solvers.threads import blas_threads


def main() -> int:
    print(f"# Fock matrix + energy per SCF iteration, numpy vs numba (warm), 1 BLAS thread; {machine()}")
    print(f"{'N':>6} {'numpy/us':>10} {'numba/us':>10} {'numpy/numba':>12} {'eigh(N)/us':>11}")
    rng = np.random.default_rng(0)
    kernels.fock_energy(np.eye(2), np.eye(2), np.eye(2))  # load / compile once
    with blas_threads(1):
        for n in (15, 26, 60, 100, 400, 1000):
            a = rng.standard_normal((n, n))
            core, gamma, dens = a + a.T, np.abs(a + a.T), a @ a.T / n
            t_np = best_of(lambda: kernels.fock_energy_reference(core, gamma, dens))
            t_nb = best_of(lambda: kernels.fock_energy(core, gamma, dens))
            t_eig = best_of(lambda: np.linalg.eigh(core), repeat=3)
            print(f"{n:>6} {1e6 * t_np:10.1f} {1e6 * t_nb:10.1f} {t_np / t_nb:11.1f}x {1e6 * t_eig:11.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
