"""Cold start: wall time of a one-molecule ``ppp run`` in a fresh process, against the bare imports it
cannot avoid, and the numba kernels' start-up with an empty (cold) and a filled (warm) JIT cache.

    python -m benchmarks.bench_coldstart [--repeat 5]

All runs are fresh interpreter processes; the figure is the median of ``--repeat`` runs.
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time

DYE = "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1"  # a merocyanine, 15 centres
KERNEL = "from ppp.solvers.kernels import warm_up; warm_up()"  # the Fock kernel and the SCF loop kernel


def _wall(cmd, env=None) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)
    return time.perf_counter() - t0


def median_wall(cmd, repeat, env=None) -> float:
    return statistics.median(_wall(cmd, env) for _ in range(repeat))


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    args = ap.parse_args(argv)
    from benchmarks.common import machine

    py = sys.executable
    env = dict(os.environ)
    print(f"# cold start, median of {args.repeat} fresh processes; {machine()}")
    t_py = median_wall([py, "-c", "pass"], args.repeat)
    t_imp = median_wall([py, "-c", "import numpy, scipy.linalg, rdkit.Chem"], args.repeat)
    t_run = median_wall([py, "-m", "ppp", "run", DYE], args.repeat, env)
    t_numba = median_wall([py, "-c", "import numba"], args.repeat)
    print(f"{'python -c pass':<48} {t_py:7.3f} s")
    print(f"{'import numpy, scipy.linalg, rdkit.Chem (floor)':<48} {t_imp:7.3f} s")
    print(f"{'ppp run <merocyanine> (15 centres, 10+10 states)':<48} {t_run:7.3f} s   "
          f"{t_run / t_imp:5.2f}x the import floor (target: < 1.5 s)")
    print(f"{'import numba (not loaded by the run above)':<48} {t_numba:7.3f} s")
    with tempfile.TemporaryDirectory() as cache:
        jenv = dict(env, NUMBA_CACHE_DIR=cache)
        t_cold = _wall([py, "-c", KERNEL], jenv)  # first: compiles and fills the cache
        t_warm = median_wall([py, "-c", KERNEL], args.repeat, jenv)
    print(f"{'numba kernels (warm_up), JIT cache cold':<48} {t_cold:7.3f} s")
    print(f"{'numba kernels (warm_up), JIT cache warm':<48} {t_warm:7.3f} s   "
          f"cold/warm {t_cold / t_warm:4.1f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
