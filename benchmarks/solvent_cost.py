"""Cost of the solvent reaction field (ppp.model.solvent) per molecule, beside the gas-phase run of the
same molecule measured in the same process.

    PYTHONPATH=. python benchmarks/solvent_cost.py

"solvent" includes the Born-radius quadrature (its cache is cleared before every run); "solvent, cached
radii" is a repeated run of the same geometry (as in a fit or a second solvent).
"""
from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import ppp  # noqa: E402
from ppp.model import solvent as sm  # noqa: E402

MOLECULES = {
    "naphthalene (10)": "c1ccc2ccccc2c1",
    "4-nitroaniline (10)": "Nc1ccc(cc1)[N+](=O)[O-]",
    "coumarin 153 (15)": "O=c1cc(C(F)(F)F)c2cc3c4c(c2o1)CCCN4CCC3",
    "thiacarbocyanine (23)": "CCN1c2ccccc2SC1=CC=Cc1sc2ccccc2[n+]1CC",
    "beta-carotene (22)": "CC1=C(C(C)(C)CCC1)/C=C/C(C)=C/C=C/C(C)=C/C=C/C=C(C)/C=C/C=C(C)/C=C/C1=C(C)CCCC1(C)C",
    "Nile red (21)": "CCN(CC)c1ccc2nc3c(cc(=O)c4ccccc34)oc2c1",
}


def timed(fn, repeat=5, before=None):
    out = []
    for _ in range(repeat):
        if before:
            before()
        t = time.perf_counter()
        fn()
        out.append(time.perf_counter() - t)
    return statistics.median(out)


def main() -> int:
    print(f"| {'molecule (pi-centres)':<24} | {'gas ms':>7} | {'solvent ms':>10} | {'ratio':>5} | "
          f"{'cached radii ms':>15} | {'ratio':>5} |")
    print("|" + "|".join("-" * w for w in (26, 9, 12, 7, 17, 7)) + "|")
    for name, smi in MOLECULES.items():
        ppp.compute(smi)  # warm imports
        gas = timed(lambda: ppp.compute(smi))
        cold = timed(lambda: ppp.compute(smi, solvent="ethanol"), before=sm._born_radii_cached.cache_clear)
        warm = timed(lambda: ppp.compute(smi, solvent="ethanol"))
        print(f"| {name:<24} | {gas * 1e3:7.1f} | {cold * 1e3:10.1f} | {cold / gas:5.2f} | {warm * 1e3:15.1f} | "
              f"{warm / gas:5.2f} |")
    return 0


if __name__ == "__main__":
    sys.exit(main())
