"""Per-molecule overhead of small dyes (10-25 pi-centres): an earlier revision of the whole package against
the current one, in the same process, interleaved molecule by molecule.

    python -m benchmarks.bench_overhead [--before ce7077b] [--n 24] [--rounds 15]

The earlier ``ppp`` package (and its ``parameters/``) is exported from git (``git archive REV``, so this
runs inside a checkout) into a temporary folder and imported as ``ppp_before`` next to the current
``ppp``; both run in this process, one BLAS thread, numba not loaded. For every molecule, four figures
per version, CPU time of this thread, best of ``--rounds`` rounds in which the two versions take turns
(so that the load of a shared machine hits both alike):

  solve     ``solve_model`` with fixed beta (SCF + CIS singlets + CIS triplets + records), as bench_dye
  default   ``solve_model`` with the default settings (bond-order beta iterated inside the SCF)
  compute   the whole ``compute`` from SMILES, fixed beta (parse, perception, depiction, gamma, solve)
  compute*  the whole ``compute`` from SMILES, default settings

Molecules: the 12-18-centre dyes of ``benchmarks.common.DYES`` and ``--n`` generated dyes of 10-25
centres (``dye_library(n, seed=1, min_centres=10, max_centres=25)``). Printed: before/after time ratios
(> 1: the current code is faster), per named dye and as geometric means per size bin, and the largest
difference of any excitation energy between the versions (0 when the results agree bit for bit).
"""
from __future__ import annotations

import argparse
import importlib
import io
import os
import subprocess
import sys
import tarfile
import tempfile
import time

import numpy as np

import ppp
from benchmarks.common import DYES, machine
from ppp.batch.synthetic import dye_library

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(ppp.__file__)))
KINDS = ("solve", "default", "compute", "compute*")


def load_before(rev: str, folder: str):
    """The package of revision ``rev`` imported as ``ppp_before`` (exported into ``folder``)."""
    data = subprocess.run(["git", "-C", ROOT, "archive", "--format=tar", rev, "ppp", "parameters"],
                          check=True, capture_output=True).stdout
    with tarfile.open(fileobj=io.BytesIO(data)) as tar:
        tar.extractall(folder, filter="data")
    os.rename(os.path.join(folder, "ppp"), os.path.join(folder, "ppp_before"))
    sys.path.insert(0, folder)
    return importlib.import_module("ppp_before.driver")


def jobs(driver, smiles: str):
    """The four timed calls of one molecule for one version, and its excitation energies."""
    fixed, default = driver.Options(bond_order_beta=False), driver.Options()
    mol = driver.mol_from_smiles(smiles)
    calls = []
    for opts in (fixed, default):
        (system, model), = driver.build_models(mol, opts)
        guess = driver.kekule_guess(mol, system)
        calls.append(lambda m=model, o=opts, g=guess: driver.solve_model(m, o, dens_guess=g))
    calls += [lambda: driver.compute(smiles, options=fixed), lambda: driver.compute(smiles, options=default)]
    res = driver.compute(smiles, options=default)
    energies = np.array([s.energy_ev for s in res.states])
    return calls, energies, res.chromophores[0].model.n_centres


def interleaved(fns, rounds: int, min_time: float = 0.004):
    """Best CPU time per call of each function over ``rounds`` rounds of taking turns, s."""
    clock = time.thread_time
    best = [np.inf] * len(fns)
    for _ in range(rounds):
        for k, fn in enumerate(fns):
            n, t0 = 0, clock()
            while True:
                fn()
                n += 1
                el = clock() - t0
                if el >= min_time:
                    break
            best[k] = min(best[k], el / n)
    return best


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--before", default="ce7077b", help="git revision to compare with (ce7077b)")
    ap.add_argument("--n", type=int, default=24, help="generated dyes of 10-25 centres (24)")
    ap.add_argument("--rounds", type=int, default=15, help="rounds of taking turns per molecule (15)")
    args = ap.parse_args(argv)
    from ppp import driver as after
    from ppp.solvers.threads import blas_threads

    named = {k: DYES[k] for k in ("coumarin 153-like", "azobenzene", "merocyanine", "Disperse Orange 3")}
    mols = list(named.items()) + [(f"gen-{k + 1}", s) for k, s in
                                  enumerate(dye_library(args.n, seed=1, min_centres=10, max_centres=25))]
    with tempfile.TemporaryDirectory() as tmp:
        before = load_before(args.before, tmp)
        print(f"# {args.before} (before) against this checkout (after), 1 BLAS thread, numba not loaded, CPU "
              f"time per call, best of {args.rounds} interleaved rounds; {machine()}")
        print(f"{'molecule':<20} {'N':>3} " + " ".join(f"{k + ' before':>15} {k + ' after':>14} {'ratio':>6}"
                                                      for k in KINDS))
        rows, de = [], 0.0
        with blas_threads(1):
            for name, smi in mols:
                calls_b, e_b, n = jobs(before, smi)
                calls_a, e_a, _ = jobs(after, smi)
                de = max(de, float(np.max(np.abs(e_a - e_b))) if len(e_a) == len(e_b) else np.inf)
                fns = [f for pair in zip(calls_b, calls_a) for f in pair]
                t = interleaved(fns, args.rounds)
                tb, ta = np.array(t[0::2]), np.array(t[1::2])
                rows.append((n, tb / ta))
                if name in named:
                    print(f"{name:<20} {n:>3} " + " ".join(f"{1e3 * b:12.3f}ms {1e3 * a:11.3f}ms {b / a:5.2f}x"
                                                          for b, a in zip(tb, ta)), flush=True)
    gm = lambda r: np.exp(np.mean(np.log(np.array(r)), axis=0))  # noqa: E731
    print("# generated dyes: geometric mean of before/after per bin of centres")
    print(f"{'centres':<8} {'mols':>4} " + " ".join(f"{k:>9}" for k in KINDS))
    gen = rows[len(named):]
    for lo, hi in ((10, 14), (15, 19), (20, 25), (10, 25)):
        sel = [r for n, r in gen if lo <= n <= hi]
        if sel:
            print(f"{lo:>2}-{hi:<5} {len(sel):>4} " + " ".join(f"{x:8.3f}x" for x in gm(sel)))
    print(f"# all {len(rows)} molecules: " + ", ".join(f"{k} {x:.3f}x" for k, x in zip(KINDS, gm([r for _, r in rows]))))
    print(f"# largest difference of any excitation energy between the versions: {de:.1e} eV")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
