"""Cost of bond-order-dependent beta (on by default for the classic set) per molecule: the whole
``ppp.compute`` from SMILES with the default settings (8 singlets, 8 triplets) with bond-order beta on
and off, timed in interleaved rounds (best of 9) in the same run, printed as a ratio, with the number of
Fock builds each SCF needed (bond-order beta: the one joint SCF run in which beta follows the density;
when the cycle-per-SCF fallback ran, only its last cycle).

    python -m benchmarks.bench_bond_order_beta [--quick]
"""
from __future__ import annotations

import argparse

from benchmarks.common import machine, paired_best
from ppp.driver import Options, compute
from ppp.solvers.threads import blas_threads

MOLECULES = {
    "octatetraene": "C=C/C=C/C=C/C=C",
    "azobenzene": "c1ccc(cc1)/N=N/c1ccccc1",
    # a ~30-centre push-pull azo-stilbene dye (Et2N-phenyl-N=N-phenyl-CH=CH-phenyl-NMe2)
    "azo-stilbene dye": "CCN(CC)c1ccc(cc1)/N=N/c1ccc(cc1)/C=C/c1ccc(cc1)N(C)C",
    # a ~30-centre bis-azo stilbene dye
    "bis-azo dye": "CCN(CC)c1ccc(cc1)/N=N/c1ccc(cc1)/C=C/c1ccc(cc1)/N=N/c1ccccc1",
    "beta-carotene": "CC1=C(C(C)(C)CCC1)/C=C/C(C)=C/C=C/C(C)=C/C=C/C=C(C)/C=C/C=C(C)/C=C/C1=C(C)CCCC1(C)C",
}


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="the two dyes only")
    args = ap.parse_args(argv)
    names = ["azo-stilbene dye", "bis-azo dye"] if args.quick else list(MOLECULES)
    print(machine())
    print(f"{'molecule':<18} {'centres':>7} {'fixed beta ms':>14} {'bond-order ms':>14} {'ratio':>6} "
          f"{'SCF it fixed':>13} {'SCF it b-o':>11}")
    with blas_threads(1):
        for name in names:
            smi = MOLECULES[name]
            on, off = Options(bond_order_beta=True), Options(bond_order_beta=False)
            res = compute(smi, options=on)
            res_off = compute(smi, options=off)
            n = sum(c.model.n_centres for c in res.chromophores)
            it_on = sum(c.scf.iterations for c in res.chromophores)
            it_off = sum(c.scf.iterations for c in res_off.chromophores)
            t_off, t_on = paired_best([lambda: compute(smi, options=off), lambda: compute(smi, options=on)])
            print(f"{name:<18} {n:>7} {1e3 * t_off:>14.1f} {1e3 * t_on:>14.1f} {t_on / t_off:>6.2f} "
                  f"{it_off:>13} {it_on:>11}")


if __name__ == "__main__":
    main()
