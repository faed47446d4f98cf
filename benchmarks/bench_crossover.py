"""Dense against matrix-free (Davidson) CIS by size: where ``cis_solver="auto"`` should switch.

    python -m benchmarks.bench_crossover [--n 200] [--seed 1] [--ribbons 80,100]

Generated dye-like molecules (``ppp.batch.synthetic.dye_library``, 10-60 centres) and a few larger
graphene ribbons. For each molecule, after its SCF: 10 singlets (with the degeneracy check of the driver,
i.e. 11 roots) plus 10 triplets, once with ``solver="dense"`` and once with ``solver="iterative"``, one
BLAS thread, CPU time of this process (less sensitive to other jobs on the machine than wall time).
Printed per bin of n_occ * n_vir: mean time of each solver and the ratio dense/iterative (> 1: the
iterative solver is faster); the largest energy difference between the two (both must agree to 1e-8 eV);
the first bin from which the iterative solver wins, next to the current switch.
"""
from __future__ import annotations

import argparse
import time

import numpy as np

from benchmarks.common import machine
from ppp.batch.synthetic import dye_library
from ppp.driver import Options, build_models, ground_scf, kekule_guess
from ppp.solvers import cis
from ppp.solvers.threads import blas_threads
from ppp.structure.readers import mol_from_smiles

BIN = 100


def _cpu(fn) -> float:
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def _both(res, model):
    o = model.n_occ
    out = []
    for solver in ("dense", "iterative"):
        def run():
            s = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 1, solver=solver,
                           dipole_coords=model.coords)
            t = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 3, solver=solver)
            out.append(np.concatenate([s.energies, t.energies]))
        out.append(_cpu(run))
    # out = [energies_dense, t_dense, energies_iter, t_iter]
    return out[1], out[3], float(np.max(np.abs(out[0] - out[2])))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=200, help="generated molecules")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--ribbons", default="80,100", help="approximate ribbon sizes (centres), '' for none")
    args = ap.parse_args(argv)
    from benchmarks.shapes import ribbon_with_about

    print(f"# CIS solver crossover, 10 singlets (+1) + 10 triplets, 1 BLAS thread, CPU time; {machine()}")
    rows = []  # (configurations, dense s, iterative s, max |dE|)
    with blas_threads(1):
        mols = [("dye", mol_from_smiles(s), Options()) for s in dye_library(args.n, seed=args.seed)]
        mols += [("ribbon", ribbon_with_about(int(n)), Options(coordinates="input"))
                 for n in args.ribbons.split(",") if n.strip()]
        for kind, mol, opts in mols:
            for system, model in build_models(mol, opts):
                try:
                    model, res = ground_scf(model, opts, 0, dens_guess=kekule_guess(mol, system))
                except Exception:  # noqa: BLE001  (an unconverged SCF is not what this measures)
                    continue
                o = model.n_occ
                conf = o * (model.n_centres - o)
                if conf < 50:
                    continue
                t_d, t_i, de = _both(res, model)
                rows.append((conf, t_d, t_i, de))
                if kind == "ribbon":
                    print(f"ribbon {model.n_centres:4d} centres, {conf:6d} configurations: dense {1e3 * t_d:8.1f} ms "
                          f"iterative {1e3 * t_i:8.1f} ms  dense/iterative {t_d / t_i:5.2f}  max|dE| {de:.1e} eV",
                          flush=True)
    rows = np.array(rows)
    print(f"{'configurations':>15} {'molecules':>9} {'dense/ms':>9} {'iterative/ms':>13} {'dense/iter':>11} "
          f"{'max|dE|/eV':>11}")
    crossover = None
    for lo in range(0, int(rows[:, 0].max()) + 1, BIN):
        sel = (rows[:, 0] >= lo) & (rows[:, 0] < lo + BIN)
        if not sel.any():
            continue
        d, i = rows[sel, 1].mean(), rows[sel, 2].mean()
        if crossover is None and d > i and sel.sum() >= 3:
            crossover = lo
        print(f"{lo:6d}-{lo + BIN - 1:<8d} {int(sel.sum()):9d} {1e3 * d:9.2f} {1e3 * i:13.2f} {d / i:10.2f}x "
              f"{rows[sel, 3].max():11.1e}")
    print(f"# iterative faster from about {crossover} configurations (first bin of >= 3 molecules where it "
          f"wins); auto switches above {cis.DENSE_MAX_CONFIGURATIONS}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
