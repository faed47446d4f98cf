"""Small dyes (10-20 pi-centres): per-molecule cost of ``ppp.compute`` and of the solve against the LAPACK
floor, for this code and optionally for another checkout of ppp, measured in one run.

    python -m benchmarks.bench_small [--baseline DIR] [--n 200] [--jit] [--repeat 3]

Each code version runs in its own worker process (``PYTHONPATH`` set to its folder); the workers take
turns molecule by molecule, so a change of the machine's load hits both alike. For every molecule a
worker reports the best of ``--repeat`` runs (CPU time of the worker's thread, one BLAS thread) of:

  compute   the whole ``ppp.compute`` from SMILES with fixed beta (parse, perception, depiction, gamma,
            SCF, CIS singlets and triplets, records)
  default   ``ppp.compute`` with the default settings (bond-order beta iterated with the SCF)
  solve     ``ppp.driver.solve_model`` (SCF + CIS + observables, fixed beta), as ``bench_dye``
  floor     the bare LAPACK calls ``bench_dye`` charges: one dsyevd(N) per SCF iteration the solve
            needed, plus dsyevr of the dense singlet CIS matrix (lowest 10 roots) twice

Molecules: the 12-18-centre dyes of ``benchmarks.common.DYES`` and ``--n`` generated dyes of 10-20
centres (``ppp.batch.synthetic.dye_library(n, seed=1, min_centres=10, max_centres=20)``).
``--jit`` loads the numba kernels first in every worker (``ppp.solvers.kernels.warm_up``), as a batch
worker that warms them up would run.
"""
from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

_WORKER = r"""
import json, sys, time
import numpy as np
from scipy.linalg import lapack
from benchmarks.common import DYES
from ppp.batch.synthetic import dye_library
from ppp.driver import Options, build_models, compute, kekule_guess, solve_model
from ppp.solvers import cis
from ppp.solvers.threads import blas_threads
from ppp.structure.readers import mol_from_smiles

n, repeat, jit = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3] == "1"
if jit:
    from ppp.solvers.kernels import warm_up
    warm_up()
fixed, default = Options(bond_order_beta=False), Options()
clock = time.thread_time


def best(fn, min_time=0.005):
    out = np.inf
    for _ in range(repeat):
        k, t0 = 0, clock()
        while True:
            fn()
            k += 1
            el = clock() - t0
            if el >= min_time:
                break
        out = min(out, el / k)
    return out


with blas_threads(1):
    compute("C=CC=C")
    print("ready", flush=True)
    for line in sys.stdin:
        smi = line.strip()
        mol = mol_from_smiles(smi)
        (system, model), = build_models(mol, fixed)
        guess = kekule_guess(mol, system)
        chrom = solve_model(model, fixed, dens_guess=guess)
        res = chrom.scf
        o = model.n_occ
        a1 = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, 1)
        kk = min(10, a1.shape[0])
        fock = np.array(res.fock)
        rec = dict(n=model.n_centres, it=res.iterations,
                   compute=best(lambda: compute(smi, options=fixed)),
                   default=best(lambda: compute(smi, options=default)),
                   solve=best(lambda: solve_model(model, fixed, dens_guess=guess)),
                   eig=best(lambda: lapack.dsyevd(fock)),
                   cis=best(lambda: lapack.dsyevr(a1, compute_v=1, range="I", il=1, iu=kk)))
        rec["floor"] = rec["it"] * rec["eig"] + 2 * rec["cis"]
        rec["e"] = [s.energy_ev for s in chrom.singlets + chrom.triplets]
        print(json.dumps(rec), flush=True)
"""


def _start(folder: Path, n: int, repeat: int, jit: bool) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(folder), OMP_NUM_THREADS="1", OPENBLAS_NUM_THREADS="1")
    proc = subprocess.Popen([sys.executable, "-c", _WORKER, str(n), str(repeat), "1" if jit else "0"],
                            cwd=str(folder), env=env, stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "ready"
    return proc


def _ask(proc: subprocess.Popen, smiles: str) -> dict:
    proc.stdin.write(smiles + "\n")
    proc.stdin.flush()
    return json.loads(proc.stdout.readline())


def main(argv=None) -> int:
    sys.path.insert(0, str(ROOT))
    from benchmarks.common import DYES, machine
    from ppp.batch.synthetic import dye_library

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--baseline", type=Path, help="folder of another ppp checkout to compare with")
    ap.add_argument("--n", type=int, default=200, help="generated dyes of 10-20 centres (200)")
    ap.add_argument("--repeat", type=int, default=3, help="best of this many runs per figure (3)")
    ap.add_argument("--jit", action="store_true", help="load the numba kernels first in every worker")
    args = ap.parse_args(argv)
    named = {k: v for k, v in DYES.items() if k in ("coumarin 153-like", "azobenzene", "merocyanine",
                                                     "Disperse Orange 3")}
    library = list(named.values()) + dye_library(args.n, seed=1, min_centres=10, max_centres=20)
    versions = {"this": ROOT}
    if args.baseline is not None:
        versions = {"baseline": args.baseline.resolve(), "this": ROOT}
    procs = {k: _start(v, args.n, args.repeat, args.jit) for k, v in versions.items()}
    rows = {k: [] for k in versions}
    for smi in library:
        for k, p in procs.items():  # take turns, molecule by molecule
            rows[k].append(_ask(p, smi))
    for p in procs.values():
        p.stdin.close()
        p.wait()
    print(f"# small dyes, 10 singlets + 10 triplets, 1 BLAS thread, CPU time per molecule (best of "
          f"{args.repeat}), numba kernels {'loaded' if args.jit else 'not loaded'}; {machine()}")
    names = list(versions)
    print("# named dyes: solve / LAPACK floor (bench_dye's floor)")
    print(f"{'molecule':<20} {'N':>3} {'it':>3} " + " ".join(
        f"{k + ' solve':>14} {k + ' floor':>14} {k + ' ratio':>12}" for k in names))
    for j, name in enumerate(named):
        cells = []
        for k in names:
            r = rows[k][j]
            cells.append(f"{1e3 * r['solve']:11.3f}ms {1e3 * r['floor']:11.3f}ms {r['solve'] / r['floor']:11.2f}x")
        r0 = rows[names[0]][j]
        print(f"{name:<20} {r0['n']:>3} {r0['it']:>3} " + " ".join(cells))
    gen = {k: rows[k][len(named):] for k in names}
    print("# generated dyes (dye_library seed 1, 10-20 centres): mean per molecule")
    print(f"{'centres':<8} {'mols':>4} " + " ".join(
        f"{k + ' compute':>16} {k + ' default':>16} {k + ' solve/floor':>18}" for k in names)
        + ("  compute this/baseline  default this/baseline" if len(names) == 2 else ""))
    bins = [(10, 13), (14, 16), (17, 20), (10, 20)]
    for lo, hi in bins:
        idx = [i for i, r in enumerate(gen[names[0]]) if lo <= r["n"] <= hi]
        if not idx:
            continue
        cells, means = [], {}
        for k in names:
            c = sum(gen[k][i]["compute"] for i in idx) / len(idx)
            d = sum(gen[k][i]["default"] for i in idx) / len(idx)
            ratio = max(gen[k][i]["solve"] / gen[k][i]["floor"] for i in idx)
            mean_ratio = sum(gen[k][i]["solve"] / gen[k][i]["floor"] for i in idx) / len(idx)
            means[k] = (c, d)
            cells.append(f"{1e3 * c:14.3f}ms {1e3 * d:14.3f}ms {mean_ratio:8.2f}x (max {ratio:4.2f})")
        extra = ""
        if len(names) == 2:
            extra = (f"  {means['this'][0] / means['baseline'][0]:21.2f}x"
                     f"  {means['this'][1] / means['baseline'][1]:21.2f}x")
        print(f"{lo:>2}-{hi:<5} {len(idx):>4} " + " ".join(cells) + extra)
    if len(names) == 2:
        de = max(abs(a - b) for ra, rb in zip(rows["baseline"], rows["this"]) for a, b in zip(ra["e"], rb["e"]))
        print(f"# largest difference of any excitation energy between the two versions: {de:.1e} eV")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
