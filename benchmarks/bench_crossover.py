"""Dense against matrix-free (Davidson) CIS by size: where ``cis_solver="auto"`` should switch.

    python -m benchmarks.bench_crossover

Polyene chains and ribbons of 20-140 centres, 11 singlets (10 + 1 for the degeneracy check of the
driver), one BLAS thread; the ratio dense/iterative > 1 means the iterative solver is faster.
"""
from __future__ import annotations

from benchmarks.common import best_of, machine
from benchmarks.shapes import polyene, ribbon_with_about
from ppp.driver import Options, build_models, kekule_guess
from ppp.solvers import cis, scf
from ppp.solvers.threads import blas_threads
from ppp.structure.readers import mol_from_smiles


def main() -> int:
    print(f"# CIS solver crossover, 11 singlets, 1 BLAS thread; {machine()}")
    print(f"{'molecule':<14} {'N':>4} {'n_occ*n_vir':>11} {'dense/ms':>9} {'iterative/ms':>13} {'dense/iter':>11}")
    with blas_threads(1):
        for n in (20, 40, 60, 80, 100, 120, 140):
            for name, mol, coords in (("polyene", mol_from_smiles(polyene(n)), "depiction"),
                                      ("ribbon", ribbon_with_about(n), "input")):
                (system, model), = build_models(mol, Options(coordinates=coords))
                res = scf.kernel(model.core, model.gamma, model.n_occ, alt_dens0=kekule_guess(mol, system),
                                 alt_first=True)
                o = model.n_occ
                v = model.n_centres - o
                args = (res.mo_energy, res.mo_coeff, model.gamma, o, 11, 1)
                rep = 3 if o * v < 3000 else 1
                t_d = best_of(lambda: cis.kernel(*args, solver="dense"), repeat=rep, min_time=0.0)
                t_i = best_of(lambda: cis.kernel(*args, solver="iterative"), repeat=rep, min_time=0.0)
                print(f"{name:<14} {model.n_centres:>4} {o * v:>11} {1e3 * t_d:9.1f} {1e3 * t_i:13.1f} "
                      f"{t_d / t_i:10.2f}x", flush=True)
    print(f"# auto: dense up to {cis.DENSE_MAX_CONFIGURATIONS} configurations")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
