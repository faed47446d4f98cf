"""CIS solver code of an earlier revision against the current one, in the same process, molecule by
molecule: the per-molecule CIS time and the whole ``ppp.compute`` time on the generated dye library.

    python -m benchmarks.bench_cis_speed [--n 300] [--seed 1] [--before 47441e6] [--no-compute]

The earlier ``ppp/solvers/cis.py`` and ``ppp/solvers/cis_iterative.py`` are read from git
(``git show REV:path``, so this runs inside a checkout of the repository) and loaded as private modules
next to the current ones; the earlier ``cis.py`` is pointed at the earlier ``cis_iterative.py``. Default
revision: 47441e6, the code before the Davidson overhead work described in docs/performance.md.

For each molecule of ``dye_library(n, seed)`` after one SCF (fixed for both): 10 singlets (with the
driver's degeneracy check, i.e. 11 roots) + 10 triplets with ``solver="auto"``, earlier and current
code in alternating order (best of two rounds each), CPU time of this process, one BLAS thread. Printed
per bin of n_occ * n_vir: mean times, the ratio earlier/current (> 1: current faster), the largest
energy difference. Then (unless --no-compute) the whole ``ppp.compute`` from SMILES per molecule with
the driver using the earlier or the current CIS module in turn (the rest of the code is the current
one for both), by bin of centres.
"""
from __future__ import annotations

import argparse
import importlib.util
import os
import subprocess
import sys
import tempfile
import time
from contextlib import contextmanager

import numpy as np

import ppp
import ppp.driver
from benchmarks.common import machine
from ppp.batch.synthetic import dye_library
from ppp.driver import Options, build_models, compute, ground_scf, kekule_guess
from ppp.solvers import cis
from ppp.solvers.threads import blas_threads
from ppp.structure.readers import mol_from_smiles

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(ppp.__file__)))


def load_before(rev: str):
    """The CIS modules of revision ``rev`` as (cis, cis_iterative) modules inside ppp.solvers."""
    mods = {}
    with tempfile.TemporaryDirectory() as tmp:
        for name in ("cis_iterative", "cis"):
            src = subprocess.run(["git", "-C", ROOT, "show", f"{rev}:ppp/solvers/{name}.py"], check=True,
                                 capture_output=True, text=True).stdout
            # the earlier cis.py imports its Davidson lazily; point it at the earlier one
            src = src.replace("from . import cis_iterative", "from . import _before_cis_iterative as cis_iterative")
            path = os.path.join(tmp, f"_before_{name}.py")
            with open(path, "w") as fh:
                fh.write(src)
            spec = importlib.util.spec_from_file_location(f"ppp.solvers._before_{name}", path)
            mod = importlib.util.module_from_spec(spec)
            sys.modules[spec.name] = mod
            setattr(sys.modules["ppp.solvers"], f"_before_{name}", mod)
            spec.loader.exec_module(mod)
            mods[name] = mod
    return mods["cis"], mods["cis_iterative"]


@contextmanager
def driver_cis(module):
    """The driver's CIS module swapped for ``module`` inside the block."""
    saved = ppp.driver.cis_solver
    ppp.driver.cis_solver = module
    try:
        yield
    finally:
        ppp.driver.cis_solver = saved


def _cpu(fn) -> float:
    t0 = time.process_time()
    fn()
    return time.process_time() - t0


def cis_pair(mod, res, model):
    o = model.n_occ
    s = mod.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 1, solver="auto", dipole_coords=model.coords)
    t = mod.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 3, solver="auto")
    return np.concatenate([s.energies, t.energies])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=300, help="generated molecules")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--before", default="47441e6", help="git revision of the earlier code")
    ap.add_argument("--no-compute", action="store_true", help="skip the whole-compute comparison")
    args = ap.parse_args(argv)
    old_cis, _ = load_before(args.before)
    smiles = dye_library(args.n, seed=args.seed)
    print(f"# CIS code of {args.before} (before) against the current code, 10 singlets (+1) + 10 triplets, "
          f"solver 'auto' (switch before {old_cis.DENSE_MAX_CONFIGURATIONS}, now "
          f"{cis.DENSE_MAX_CONFIGURATIONS} configurations), 1 BLAS thread, CPU time; {machine()}")
    rows = []  # configurations, before s, now s, max |dE|
    with blas_threads(1):
        for i, smi in enumerate(smiles):
            mol = mol_from_smiles(smi)
            for system, model in build_models(mol, Options()):
                try:
                    model, res = ground_scf(model, Options(), 0, dens_guess=kekule_guess(mol, system))
                except Exception:  # noqa: BLE001  (an unconverged SCF is not what this measures)
                    continue
                o = model.n_occ
                t = {"before": np.inf, "now": np.inf}
                e = {}
                for rnd in range(2):
                    order = (("before", old_cis), ("now", cis)) if (i + rnd) % 2 == 0 else \
                        (("now", cis), ("before", old_cis))
                    for key, mod in order:
                        t[key] = min(t[key], _cpu(lambda: e.__setitem__(key, cis_pair(mod, res, model))))
                rows.append((o * (model.n_centres - o), t["before"], t["now"],
                             float(np.max(np.abs(e["before"] - e["now"])))))
    rows = np.array(rows)
    print(f"{'configurations':>15} {'molecules':>9} {'before/ms':>10} {'now/ms':>8} {'before/now':>11} "
          f"{'max|dE|/eV':>11}")
    for lo, hi in ((0, 100), (100, 200), (200, 300), (300, 400), (400, 500), (500, 600), (600, 700),
                   (700, 800), (800, 900), (900, 10**9), (0, 10**9)):
        sel = (rows[:, 0] >= lo) & (rows[:, 0] < hi)
        if not sel.any():
            continue
        b, n = rows[sel, 1].mean(), rows[sel, 2].mean()
        label = "all" if (lo, hi) == (0, 10**9) else (f"{lo}-{hi - 1}" if hi < 10**9 else f">= {lo}")
        print(f"{label:>15} {int(sel.sum()):9d} {1e3 * b:10.2f} {1e3 * n:8.2f} {b / n:10.2f}x "
              f"{rows[sel, 3].max():11.1e}")
    if args.no_compute:
        return 0
    print(f"# whole ppp.compute per molecule (default options), driver with the CIS module of {args.before} "
          f"or the current one, alternating, best of two, CPU time")
    out = []  # centres, before s, now s
    with blas_threads(1):
        for i, smi in enumerate(smiles):
            t = {"before": np.inf, "now": np.inf}
            try:
                for rnd in range(2):
                    order = (("before", old_cis), ("now", cis)) if (i + rnd) % 2 == 0 else \
                        (("now", cis), ("before", old_cis))
                    for key, mod in order:
                        with driver_cis(mod):
                            t0 = time.process_time()
                            res = compute(smi)
                            t[key] = min(t[key], time.process_time() - t0)
            except ppp.errors.PPPError:
                continue
            out.append((max(c.model.n_centres for c in res.chromophores), t["before"], t["now"]))
    out = np.array(out)
    print(f"{'centres':>8} {'molecules':>9} {'before/ms':>10} {'now/ms':>8} {'before/now':>11}")
    for lo, hi in ((10, 20), (20, 30), (30, 40), (40, 50), (50, 61), (0, 10**9)):
        sel = (out[:, 0] >= lo) & (out[:, 0] < hi)
        if not sel.any():
            continue
        b, n = out[sel, 1].mean(), out[sel, 2].mean()
        label = "all" if hi == 10**9 else f"{lo}-{hi - 1}"
        print(f"{label:>8} {int(sel.sum()):9d} {1e3 * b:10.2f} {1e3 * n:8.2f} {b / n:10.2f}x")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
