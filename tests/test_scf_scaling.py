"""SCF pieces added for large systems: the Kekule-structure start density, the incrementally updated
DIIS matrix, the one-product commutator, and the ``--timings`` report of ``ppp run``."""
from __future__ import annotations

import numpy as np
import pytest

from ppp import cli
from ppp.driver import build_models, compute, kekule_guess
from ppp.solvers import scf
from ppp.solvers.cis import kernel as cis_kernel
from ppp.solvers.guess import localized_density
from ppp.structure.readers import mol_from_smiles


def test_localized_density_is_an_idempotent_closed_shell_density():
    """Butadiene C1=C2-C3=C4 and an amino lone pair: P/2 is a projector (P^2 = 2P), trace = electrons."""
    p = localized_density(np.array([1, 1, 1, 1, 2]), np.array([[0, 1], [2, 3]]))
    np.testing.assert_allclose(p @ p, 2 * p, atol=1e-14)
    assert np.trace(p) == 6


def test_localized_density_refuses_a_centre_without_partner():
    assert localized_density(np.array([1, 1, 1]), np.array([[0, 1]])) is None
    assert localized_density(np.array([1, 1, 1]), np.array([[0, 1], [1, 2]])) is None


@pytest.mark.parametrize("smiles", ["c1ccc2ccccc2c1", "CN(C)c1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]",
                                    "c1cc2ccc3ccc4ccc5ccc6ccc1c7c2c3c4c5c67"])
def test_kekule_start_reaches_the_same_solution(smiles):
    """Same stationary point from the core-Hamiltonian start and from the Kekule start."""
    mol = mol_from_smiles(smiles)
    (system, model), = build_models(mol)
    guess = kekule_guess(mol, system)
    assert guess is not None
    a = scf.kernel(model.core, model.gamma, model.n_occ)
    b = scf.kernel(model.core, model.gamma, model.n_occ, alt_dens0=guess, alt_first=True)
    assert b.strategy == "diis-kekule-start"
    assert a.converged and b.converged
    assert b.e_elec == pytest.approx(a.e_elec, abs=1e-8)
    np.testing.assert_allclose(b.dens, a.dens, atol=1e-6)


def test_long_polyene_converges_from_the_kekule_start():
    """All-trans C120H122: from the core start plain DIIS wanders (near-metallic Hueckel guess); the
    Kekule start converges with DIIS alone, to a solution at least as low and stable within closed-shell
    RHF (S1 > 0, Cizek & Paldus 1967). T1 < 0 is expected here: the RHF -> UHF (triplet) instability of
    long polyenes without bond-length alternation."""
    from ppp.solvers.threads import blas_threads

    smiles = "C=C" + "/C=C" * 59
    mol = mol_from_smiles(smiles)
    (system, model), = build_models(mol)
    guess = kekule_guess(mol, system)
    with blas_threads(1):
        res = scf.kernel(model.core, model.gamma, model.n_occ, alt_dens0=guess, alt_first=True, fallback=False)
        assert res.converged and res.strategy == "diis-kekule-start"
        plain = scf.kernel(model.core, model.gamma, model.n_occ, fallback=False, max_iter=40)
        if plain.converged:
            assert res.e_elec <= plain.e_elec + 1e-8
        w = cis_kernel(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 1, 1, solver="iterative")
    assert w.energies[0] > 0.0


def test_incremental_diis_matrix_equals_the_full_one():
    rng = np.random.default_rng(21)
    diis = scf._DIIS(space=4)
    errs = []
    for _ in range(7):
        e = rng.standard_normal((6, 6))
        errs.append(e)
        diis.push(rng.standard_normal((6, 6)), e)
    kept = errs[-4:]
    full = np.array([[np.vdot(a, b) for b in kept] for a in kept])
    np.testing.assert_allclose(diis.b, full, rtol=1e-14, atol=1e-14)


def test_commutator_of_symmetric_matrices():
    rng = np.random.default_rng(22)
    f = rng.standard_normal((9, 9))
    f = f + f.T
    p = rng.standard_normal((9, 9))
    p = p + p.T
    np.testing.assert_allclose(scf.commutator(f, p), f @ p - p @ f, atol=1e-13)


def test_run_timings_reports_every_stage(capsys):
    code = cli.main(["run", "c1ccc2ccccc2c1", "--singlets", "3", "--triplets", "2", "--timings",
                     "--cis-solver", "iterative"])
    out = capsys.readouterr()
    assert code == 0
    assert "S1" in out.out
    for stage in ("parse", "perception", "coordinates", "SCF", "CIS singlets", "CIS triplets", "properties",
                  "output", "total"):
        assert stage in out.err


def test_timer_accumulates_over_molecules():
    from ppp.analysis.timings import StageTimer

    t = StageTimer()
    compute("C=CC=C", timer=t)
    compute("C=CC=CC=C", timer=t)
    assert t.calls["SCF"] == 2 and t.seconds["SCF"] > 0.0
    assert "SCF" in t.report()


def test_small_molecule_run_does_not_load_numba():
    """Start-up stays small: a dye-sized run never imports numba (it loads from
    ppp.solvers.scf.JIT_MIN_CENTRES centres on)."""
    import subprocess
    import sys

    code = ("import sys, ppp.driver as d; d.compute('CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1'); "
            "print('numba' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_vectorised_dominant_configurations_equal_a_per_root_sort():
    """The vectorised selection (partial selection for long rows) equals sorting each root's weights."""
    from ppp.analysis.properties import dominant_configurations

    def reference(amplitudes, n_occ, min_weight=0.05, max_count=4):
        out = []
        for x in amplitudes:
            w = (x * x).ravel()
            confs = []
            for idx in np.argsort(-w, kind="stable")[:max_count]:
                if w[idx] < min_weight and confs:
                    break
                i, a = divmod(int(idx), x.shape[1])
                confs.append((i, n_occ + a, float(w[idx])))
            out.append(tuple(confs))
        return out

    rng = np.random.default_rng(31)
    for shape in [(5, 3, 4), (7, 10, 12), (3, 1, 1), (4, 2, 30), (6, 20, 17), (2, 30, 30)]:
        x = rng.standard_normal(shape)
        x[0] = 0.0
        x[0, 0, 0] = 1.0  # a pure configuration: one entry only
        got = [tuple((c.occupied, c.virtual, c.weight) for c in t) for t in dominant_configurations(x, 5)]
        assert got == reference(x, 5)
