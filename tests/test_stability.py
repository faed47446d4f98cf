"""Following an internal instability of the closed-shell SCF (Seeger & Pople 1977).

Outside reference: PySCF's own RHF internal stability analysis (``mf.stability()``) and an RHF
restarted from its rotated orbitals, on the very same model Hamiltonian.
"""
from __future__ import annotations

import numpy as np
import pytest
from pyscf import lib
from threadpoolctl import threadpool_limits

import ppp
from ppp.solvers import scf, stability

from conftest import model_of
from test_reference_pyscf import pyscf_rhf

HEPTACENE = "c1ccc2cc3cc4cc5cc6cc7ccccc7cc6cc5cc4cc3cc2c1"


@pytest.fixture(autouse=True, scope="module")
def _one_thread():
    old = lib.num_threads()
    lib.num_threads(1)
    with threadpool_limits(limits=1):
        yield
    lib.num_threads(old)


def test_hessian_matches_finite_difference_of_the_energy():
    """kappa^T (A+B) kappa is the second derivative of E along a real orbital rotation (definition)."""
    m = model_of("c1ccncc1")
    r = scf.kernel(m.core, m.gamma, m.n_occ)
    h = stability.real_hessian(r.mo_energy, r.mo_coeff, m.gamma, m.n_occ)
    rng = np.random.default_rng(11)
    kappa = rng.normal(size=(m.n_occ, m.n_centres - m.n_occ))
    kappa /= np.linalg.norm(kappa)

    def energy(t):
        c = stability.rotate(r.mo_coeff, m.n_occ, t * kappa)
        p = scf.density(c, m.n_occ)
        return scf.electronic_energy(m.core, scf.fock_matrix(m.core, m.gamma, p), p)

    t = 1e-3
    second = (energy(t) - 2 * energy(0.0) + energy(-t)) / t**2
    # closed shell, both spins rotated by t*kappa: E(t) = E0 + 2 t^2 kappa^T (A+B) kappa + O(t^3)
    assert np.isclose(second, 4.0 * kappa.ravel() @ h @ kappa.ravel(), rtol=1e-4)


def test_heptacene_saddle_point_is_followed_to_pyscf_minimum():
    m = model_of(HEPTACENE)
    first = scf.kernel(m.core, m.gamma, m.n_occ)
    w, _ = stability.lowest_mode(first.mo_energy, first.mo_coeff, m.gamma, m.n_occ)
    assert w < -1e-3  # the symmetric SCF solution is a saddle point
    followed = stability.follow(m.core, m.gamma, m.n_occ, first)
    assert followed is not None and followed.converged
    w2, _ = stability.lowest_mode(followed.mo_energy, followed.mo_coeff, m.gamma, m.n_occ)
    assert w2 > 0

    mf = pyscf_rhf(m, dm0=first.dens)  # PySCF confirms the saddle point is an SCF solution ...
    assert np.isclose(mf.e_tot, first.e_elec + m.e_core, atol=1e-6)
    for _ in range(4):
        mo, _, stable, _ = mf.stability(return_status=True)
        if stable:
            break
        dm = mf.make_rdm1(mo, mf.mo_occ)
        mf.kernel(dm)
    assert np.isclose(followed.e_elec + m.e_core, mf.e_tot, atol=1e-6)


def test_stable_solution_is_returned_unchanged():
    m = model_of("c1ccc2ccccc2c1")
    r = scf.kernel(m.core, m.gamma, m.n_occ)
    assert stability.follow(m.core, m.gamma, m.n_occ, r) is r


def _core_start(core, gamma, core_charges, n_electrons, n_occ):
    """The core-Hamiltonian (Hueckel-like) start, which lands heptacene on the symmetric saddle point."""
    return scf.density(scf.eigh(core)[1], n_occ)


def test_driver_reports_followed_solution_and_refuses_when_following_fails(monkeypatch):
    # Fixed beta explicitly: the saddle point followed here is the one of the table-beta model that
    # PySCF confirms above (model_of builds that model). The default (bond-order beta) path is checked
    # in the next test. The driver's default (Kekule-structure) start reaches the stable solution
    # directly; the core start of the test above lands on the saddle point, which the driver must follow.
    direct = ppp.compute(HEPTACENE, n_singlets=3, n_triplets=3, bond_order_beta=False)
    assert direct.s1.energy_ev > 0
    monkeypatch.setattr("ppp.driver.kekule_guess", lambda *a, **k: None)  # no Kekule start: the symmetric one
    monkeypatch.setattr("ppp.driver.atomic_start", _core_start)
    res = ppp.compute(HEPTACENE, n_singlets=3, n_triplets=3, bond_order_beta=False)
    assert res.s1.energy_ev > 0
    assert np.isclose(res.chromophores[0].e_total, direct.chromophores[0].e_total, atol=1e-8)
    monkeypatch.setattr(stability, "follow", lambda *a, **k: None)
    with pytest.raises(ppp.UnsupportedError, match="unstable"):
        ppp.compute(HEPTACENE, bond_order_beta=False)


def test_bond_order_beta_iteration_restarted_to_a_stable_self_consistent_solution(monkeypatch):
    # With bond-order beta the first iterated heptacene solution is a minimum along real rotations but
    # has a negative lowest CIS singlet (measured: -0.27 eV; an instability towards complex orbitals).
    # The driver restarts the beta iteration from the followed fixed-beta solution: the result must be
    # stable (positive CIS singlets), still self-consistent (PySCF's RHF from ppp's density on the final
    # model reproduces ppp's energy, so it is an SCF solution of that model), and lower in energy than
    # the unstable solution it replaces.
    # The driver's default (Kekule-structure) start reaches the stable solution directly; the core
    # start leads the iteration to the unstable one, which is what this test needs.
    from ppp.driver import Options, build_models, ground_scf
    from ppp.structure.readers import mol_from_smiles
    direct = ppp.compute(HEPTACENE, n_singlets=3, n_triplets=3)
    monkeypatch.setattr("ppp.driver.kekule_guess", lambda *a, **k: None)  # no Kekule start: the symmetric one
    monkeypatch.setattr("ppp.driver.atomic_start", _core_start)
    res = ppp.compute(HEPTACENE, n_singlets=3, n_triplets=3)
    assert np.isclose(res.chromophores[0].e_total, direct.chromophores[0].e_total, atol=1e-6)
    chrom = res.chromophores[0]
    assert chrom.model.bond_order_beta is not None
    assert res.s1.energy_ev > 0
    mf = pyscf_rhf(chrom.model, dm0=chrom.scf.dens)
    assert np.isclose(mf.e_tot, chrom.e_total, atol=1e-6)
    (_sys, model0), = build_models(mol_from_smiles(HEPTACENE), Options())
    first_model, first = ground_scf(model0, Options())
    assert chrom.e_total < first.e_elec + first_model.e_core
    # no stable solution to be found: refused, never silently printed
    monkeypatch.setattr(stability, "follow", lambda *a, **k: None)
    with pytest.raises(ppp.UnsupportedError, match="unstable"):
        ppp.compute(HEPTACENE)
