"""Shared pieces of the benchmarks: the dye set, a PySCF run of the same model Hamiltonian, timing."""
from __future__ import annotations

import os
import platform
import time

import numpy as np

#: Dye-sized test molecules (10-60 pi-centres). Structures from common knowledge of the dyes (from
#: memory); only their size and shape matter here.
DYES = {
    "coumarin 153-like": "CCN(CC)c1ccc2c(c1)oc(=O)cc2C(F)(F)F",
    "azobenzene": "c1ccc(cc1)/N=N/c1ccccc1",
    "merocyanine": "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1",
    "Disperse Orange 3": "Nc1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]",
    "indigo": "O=C1/C(=C2/Nc3ccccc3C2=O)Nc2ccccc12",
    "Cy5 cyanine": "CN1/C(=C/C=C/C=C/C2=[N+](C)c3ccccc3C2(C)C)C(C)(C)c2ccccc21",
    "crystal violet": "CN(C)c1ccc(cc1)C(=C1C=CC(=[N+](C)C)C=C1)c1ccc(cc1)N(C)C",
    "porphine": "c1cc2cc3ccc(cc4ccc(cc5ccc(cc1n2)[nH]5)n4)[nH]3",
    "stilbazolium": "CN(C)c1ccc(cc1)/C=C/C=C/c1ccc(cc1)/C=C/c1cc[n+](C)cc1",
    "perylene diimide": "CN1C(=O)c2ccc3c4ccc5C(=O)N(C)C(=O)c6ccc(c7ccc(C1=O)c2c37)c4c56",
    "Congo red (acid)": "Nc1c(cc2ccccc2c1/N=N/c1ccc(cc1)-c1ccc(cc1)/N=N/c1cc(c2ccccc2c1N)S(=O)(=O)O)S(=O)(=O)O",
    "phthalocyanine": "c1ccc2c(c1)c1nc2nc2[nH]c(nc3nc(nc4[nH]c(n1)c1ccccc41)c1ccccc31)c1ccccc21",
    "tetraphenylporphyrin": "c1ccc(cc1)-c1c2ccc(n2)c(-c2ccccc2)c2ccc([nH]2)c(-c2ccccc2)c2ccc(n2)c(-c2ccccc2)c2ccc1[nH]2",
    "push-pull OPV (7 rings)": "CN(C)c1ccc(cc1)" + "/C=C/c1ccc(cc1)" * 6 + "[N+](=O)[O-]",
}


def machine() -> str:
    load = os.getloadavg() if hasattr(os, "getloadavg") else (float("nan"),) * 3
    return (f"{platform.processor() or platform.machine()}, {os.cpu_count()} cores, Python "
            f"{platform.python_version()}, numpy {np.__version__}; load average {load[0]:.1f} "
            f"(other jobs share the machine: compare ratios, not seconds)")


def _per_call(fn, min_time: float) -> float:
    """Wall time per call of ``fn``, looping it until ``min_time`` has passed, s."""
    n = 0
    t0 = time.perf_counter()
    while True:
        fn()
        n += 1
        el = time.perf_counter() - t0
        if el >= min_time:
            return el / n


def best_of(fn, repeat: int = 5, min_time: float = 0.05):
    """Smallest wall time of ``repeat`` runs of ``fn`` (each run looped until ``min_time``), s."""
    return min(_per_call(fn, min_time) for _ in range(repeat))


def paired_best(fns, repeat: int = 9, min_time: float = 0.02, rounds=None):
    """Best (smallest) time of each function, measured in interleaved rounds so that load changes on a
    shared machine hit all of them alike. Returns a list of seconds per call.

    rounds : optional list, per function, of the number of rounds it takes part in (the first ones;
        default ``repeat`` each), for functions too slow to time in every round; min_time may likewise be
        a list (0 for one call per round)."""
    best = [np.inf] * len(fns)
    rounds = rounds or [repeat] * len(fns)
    times = min_time if isinstance(min_time, (list, tuple)) else [min_time] * len(fns)
    for r in range(max(rounds)):
        for k, fn in enumerate(fns):
            if r < rounds[k]:
                best[k] = min(best[k], _per_call(fn, times[k]))
    return best


def pyscf_same_hamiltonian(model, n_states: int, dm0=None):
    """Closure running PySCF RHF + TDA (singlets and triplets, ``n_states`` each) on the PPP model.

    The model goes in as a custom Hamiltonian: h from ``get_hcore``, unit overlap, and the ZDO
    two-electron integrals (ii|jj) = gamma_ij as an 8-fold symmetric in-core ERI array
    (``ao2mo.restore(8, eri, N)``), the PySCF recipe for model Hamiltonians.
    Returns (run, check) where run() does the calculation and check() returns (E_rhf, singlets, triplets).
    """
    from pyscf import ao2mo, gto, lib, scf, tdscf

    lib.num_threads(1)  # one thread, as ppp gets: threads only contend on the shared 2-core machine
    n = model.n_centres
    mol = gto.M(verbose=0)
    mol.nelectron = model.n_electrons
    mol.incore_anyway = True
    eri = np.zeros((n, n, n, n))
    idx = np.arange(n)
    eri[idx[:, None], idx[:, None], idx[None, :], idx[None, :]] = model.gamma
    eri8 = ao2mo.restore(8, eri, n)
    del eri
    out = {}

    def run():
        mf = scf.RHF(mol)
        mf.get_hcore = lambda *a: model.core
        mf.get_ovlp = lambda *a: np.eye(n)
        mf._eri = eri8
        mf.conv_tol = 1e-10
        mf.kernel(dm0=dm0)
        res = [mf.e_tot]
        for singlet in (True, False):
            td = tdscf.TDA(mf)
            td.nstates = n_states
            td.singlet = singlet
            td.kernel()
            res.append(np.sort(td.e))
        out["res"] = res

    def check():
        return out["res"]

    return run, check
