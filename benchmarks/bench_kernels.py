"""The numba SCF loop against the numpy loop it replaces and the bare eigensolve, in one run (ratios).

    python -m benchmarks.bench_kernels
"""
from __future__ import annotations

from scipy.linalg import lapack

from benchmarks.common import DYES, machine, paired_best
from ppp.driver import Options, build_models
from ppp.solvers import guess, kernels, scf
from ppp.solvers.threads import blas_threads
from ppp.structure.readers import mol_from_smiles


def _numpy_loop(m, p0):
    """ppp.solvers.scf.iterate on its numpy path (the kernel's reference), numba loaded or not."""
    saved = scf.JIT_MIN_CENTRES
    scf.JIT_MIN_CENTRES = 10**9
    try:
        return scf.iterate(m.core, m.gamma, m.n_occ, p0, max_iter=100)
    finally:
        scf.JIT_MIN_CENTRES = saved


def scf_loops() -> None:
    """Whole plain-DIIS SCF loop per iteration: numpy loop vs numba kernel vs the bare eigensolve."""
    kernels.warm_up()
    print(f"# SCF loop (superposed-atoms start, fixed beta) per iteration, numpy vs numba (warm) vs bare "
          f"dsyevd(N), 1 BLAS thread; {machine()}")
    print(f"{'molecule':<22} {'N':>3} {'it':>3} {'numpy/us':>9} {'numba/us':>9} {'dsyevd/us':>10} "
          f"{'numpy/dsyevd':>13} {'numba/dsyevd':>13}")
    with blas_threads(1):
        for name in list(DYES)[:6]:
            (_, m), = build_models(mol_from_smiles(DYES[name]), Options(bond_order_beta=False))
            p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
            it = _numpy_loop(m, p0)[1]
            f = scf.fock_matrix(m.core, m.gamma, p0)
            t_np, t_nb, t_eig = paired_best([
                lambda: _numpy_loop(m, p0),
                lambda: kernels.scf_loop(m.core, m.gamma, m.n_occ, p0, 100, 8, scf.CONV_TOL_ENERGY,
                                         scf.CONV_TOL_GRAD),
                lambda: lapack.dsyevd(f)], repeat=7)
            print(f"{name:<22} {m.n_centres:>3} {it:>3} {1e6 * t_np / it:9.1f} {1e6 * t_nb / it:9.1f} "
                  f"{1e6 * t_eig:10.1f} {t_np / it / t_eig:12.2f}x {t_nb / it / t_eig:12.2f}x")


def main() -> int:
    scf_loops()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
