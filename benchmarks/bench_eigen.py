"""Lowest 10-11 eigenpairs of dense symmetric matrices by three LAPACK routes, side by side: the subset
driver dsyevr, the full divide-and-conquer dsyevd, and the tridiagonal route of ``ppp.solvers.eigen``
(dsytrd, dsterf, dstein, dormqr); the route ``eigen.lowest_eigenpairs`` takes at each size is marked.

    python -m benchmarks.bench_eigen [--sizes 20,36,50,64,80,100,120,140,160,180,200]

One BLAS thread; random symmetric matrices with a spread diagonal (fixed seed); best of 7 runs.
"""
from __future__ import annotations

import argparse

import numpy as np
from scipy.linalg import lapack

from benchmarks.common import best_of, machine
from ppp.solvers import eigen
from ppp.solvers.threads import blas_threads


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="20,36,50,64,80,100,120,140,160,180,200")
    args = ap.parse_args(argv)
    rng = np.random.default_rng(1)
    print(f"# lowest k eigenpairs, microseconds; {machine()}")
    print(f"{'m':>5} {'k':>3} {'dsyevr':>9} {'dsyevd':>9} {'tridiag':>9} {'chosen':>9}  route")
    with blas_threads(1):
        for m in (int(x) for x in args.sizes.split(",")):
            x = rng.standard_normal((m, m))
            a = np.asfortranarray(x + x.T + np.diag(np.linspace(0, 40, m)))
            for k in (10, 11):
                t = [best_of(f, 7, 0.04) for f in (
                    lambda: lapack.dsyevr(a, compute_v=1, range="I", il=1, iu=k, lower=0),
                    lambda: lapack.dsyevd(a, compute_v=1, lower=0),
                    lambda: eigen.lowest_tridiagonal(a, k),
                    lambda: eigen.lowest_eigenpairs(a, k))]
                route = ("dsyevd" if m <= eigen.FULL_MAX else "tridiagonal" if m <= eigen.TRIDIAGONAL_MAX
                         else "dsyevr")
                print(f"{m:>5} {k:>3} " + " ".join(f"{1e6 * v:9.1f}" for v in t) + f"  {route}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
