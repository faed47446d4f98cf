"""Time and peak memory against size for graphene-like ribbons and polyene chains, 10 to 1,000 centres,
with the fitted log-log slope of SCF + CIS time against N.

    python -m benchmarks.bench_scaling [--sizes 10,30,...] [--singlets 10] [--triplets 0] [--families ribbon,polyene]

Each size runs in a fresh process (so that its peak resident memory is its own). Columns:
  SCF, CIS      wall time of the SCF and of the CIS (singlets + triplets) stages, s
  eig(N)        one dense N x N eigensolve in the same process (reference for noise)
  (SCF+CIS)/eig ratio of the two, the machine-independent figure
  coords        coordinate stage: lattice coordinates for ribbons ("input"), RDKit 2D depiction for
                polyenes; ribbons also show the RDKit depiction of the same structure from SMILES
  peak MB       peak resident memory of the process; "base MB" the same after imports, before work
numba is loaded (kernels.warm_up) before the timings start, so the SCF uses its kernel from
ppp.solvers.scf.JIT_MIN_CENTRES on, as a long-running process would.
Ribbons: armchair-edged graphene ribbons three hexagons wide (benchmarks/shapes.py); polyenes:
all-trans CH2=CH-(CH=CH)n-CH=CH2 from SMILES.
"""
from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time

import numpy as np

DEFAULT_SIZES = (10, 30, 60, 100, 200, 300, 500, 700, 1000)


def _peak_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # Linux: KiB


def child(family: str, n: int, singlets: int, triplets: int, threads: int) -> dict:
    from rdkit import Chem
    from rdkit.Chem import rdDepictor

    from benchmarks.shapes import polyene, ribbon_with_about
    from ppp.analysis.timings import StageTimer
    from ppp.driver import Options, compute
    from ppp.solvers.threads import blas_threads

    # load numba and the cached kernel first, so that the timings below are the steady-state cost
    # (the one-off start-up is what benchmarks/bench_coldstart.py measures)
    from ppp.solvers.kernels import warm_up
    t0 = time.perf_counter()
    warm_up()
    t_jit = time.perf_counter() - t0
    base = _peak_mb()
    if family == "ribbon":
        mol = ribbon_with_about(n)
        opts = Options(n_singlets=singlets, n_triplets=triplets, coordinates="input", threads=threads)
        smiles = Chem.MolToSmiles(mol)
        dep = Chem.MolFromSmiles(smiles)
        t0 = time.perf_counter()
        rdDepictor.Compute2DCoords(dep)
        t_depict = time.perf_counter() - t0
        structure = mol
    else:
        structure = polyene(n)
        opts = Options(n_singlets=singlets, n_triplets=triplets, threads=threads)
        t_depict = None
    timer = StageTimer()
    t0 = time.perf_counter()
    res = compute(structure, name=f"{family}-{n}", options=opts, timer=timer)
    total = time.perf_counter() - t0
    chrom = res.chromophores[0]
    rng = np.random.default_rng(0)
    a = rng.standard_normal((chrom.model.n_centres,) * 2)
    a = a + a.T
    with blas_threads(threads):
        t_eig = min(_time(lambda: np.linalg.eigh(a)) for _ in range(3))
    sec = timer.seconds
    return dict(family=family, n=chrom.model.n_centres, scf=sec.get("SCF", 0.0),
                cis=sec.get("CIS singlets", 0.0) + sec.get("CIS triplets", 0.0), coords=sec.get("coordinates", 0.0),
                depict=t_depict, total=total, eig=t_eig, iterations=chrom.scf.iterations, base_mb=base, jit=t_jit,
                peak_mb=_peak_mb(), s1=res.s1.energy_ev if res.s1 else None)


def _time(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default=",".join(map(str, DEFAULT_SIZES)))
    ap.add_argument("--families", default="ribbon,polyene")
    ap.add_argument("--singlets", type=int, default=10)
    ap.add_argument("--triplets", type=int, default=0)
    ap.add_argument("--threads", type=int, default=1)
    ap.add_argument("--child", nargs=2, metavar=("FAMILY", "N"), help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        out = child(args.child[0], int(args.child[1]), args.singlets, args.triplets, args.threads)
        print(json.dumps(out))
        return 0
    from benchmarks.common import machine

    sizes = [int(x) for x in args.sizes.split(",")]
    print(f"# size scaling, {args.singlets} singlets + {args.triplets} triplets, {args.threads} BLAS thread(s); "
          f"{machine()}")
    print(f"{'family':<8} {'N':>5} {'it':>3} {'SCF/s':>8} {'CIS/s':>8} {'eig(N)/s':>9} {'(SCF+CIS)/eig':>13} "
          f"{'coords/s':>9} {'depict/s':>9} {'total/s':>8} {'base MB':>8} {'peak MB':>8} {'S1/eV':>7}")
    for family in args.families.split(","):
        rows = []
        for n in sizes:
            cmd = [sys.executable, "-m", "benchmarks.bench_scaling", "--child", family, str(n),
                   "--singlets", str(args.singlets), "--triplets", str(args.triplets), "--threads", str(args.threads)]
            proc = subprocess.run(cmd, capture_output=True, text=True, timeout=1800)
            if proc.returncode != 0:
                last = (proc.stderr.strip().splitlines() or ["?"])[-1]
                print(f"{family:<8} {n:>5}  failed: {last}")
                continue
            r = json.loads(proc.stdout.strip().splitlines()[-1])
            rows.append(r)
            dep = f"{r['depict']:9.3f}" if r["depict"] is not None else f"{'-':>9}"
            print(f"{family:<8} {r['n']:>5} {r['iterations']:>3} {r['scf']:8.3f} {r['cis']:8.3f} {r['eig']:9.4f} "
                  f"{(r['scf'] + r['cis']) / r['eig']:13.1f} {r['coords']:9.3f} {dep} {r['total']:8.2f} "
                  f"{r['base_mb']:8.0f} {r['peak_mb']:8.0f} {r['s1']:7.3f}", flush=True)
        big = [r for r in rows if r["n"] >= 200]
        if len(big) >= 2:
            x = np.log([r["n"] for r in big])
            slope = np.polyfit(x, np.log([r["scf"] + r["cis"] for r in big]), 1)[0]
            slope_eig = np.polyfit(x, np.log([r["eig"] for r in big]), 1)[0]
            print(f"# {family}: log-log slope of SCF+CIS time vs N for N >= 200: {slope:.2f} "
                  f"(target <= 3.2; one dense eigensolve in the same runs: {slope_eig:.2f})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
