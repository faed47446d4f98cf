"""Fewer SCF iterations and less bookkeeping per molecule, checked against the slower obvious forms.

Outside references: the SCF solution of a model does not depend on the start density (law of the
model: the same stationary point is reached from the core-Hamiltonian start), PySCF's RHF on the final
bond-order-beta model (tests/test_reference_pyscf.py supplies the helper), and the variable-beta
relation itself (Coulson 1939 bond order -> length -> Slater-overlap beta, ppp.model.variable_beta).
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

import ppp
from ppp.analysis.properties import polarization, polarizations
from ppp.driver import Options, build_models, ground_scf, load_parameters
from ppp.model import params
from ppp.model import variable_beta as vb
from ppp.solvers import guess, scf
from ppp.structure.readers import mol_from_smiles

from conftest import model_of

MOLECULES = [
    "CCN(CC)c1ccc2c(c1)oc(=O)cc2C(F)(F)F",                # coumarin: lone pairs, O.oxa, halogens
    "CN(C)/C=C/C=C/C=[N+](C)C",                           # cyanine cation
    "O=C1/C(=C2/Nc3ccccc3C2=O)Nc2ccccc12",                # indigo
    "Nc1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]",             # push-pull azo, charged centres
    "c1ccc2cc3ccccc3cc2c1",                               # anthracene
]


def test_atomic_populations_carry_the_electron_count_of_ions():
    z = np.array([1, 1, 2, 1, 1, 1])
    pop = guess.atomic_populations(z, 6)  # a cation: sum Z = 7 > 6 electrons
    assert pop.sum() == pytest.approx(6.0, abs=1e-14)
    np.testing.assert_allclose(pop / z, 6 / 7, rtol=1e-14)


@pytest.mark.parametrize("smiles", MOLECULES)
def test_atomic_start_reaches_the_solution_of_the_core_start(smiles):
    """Same SCF solution (energy and orbital energies) from the superposed-atoms start as from the core
    start, and the start itself is an idempotent closed-shell density with the right trace."""
    m = model_of(smiles, bond_order_beta=False)
    p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    np.testing.assert_allclose(p0 @ p0, 2 * p0, atol=1e-10)
    assert np.trace(p0) == pytest.approx(m.n_electrons, abs=1e-10)
    ref = scf.kernel(m.core, m.gamma, m.n_occ)
    new = scf.kernel(m.core, m.gamma, m.n_occ, dens0=p0)
    assert ref.converged and new.converged
    assert new.e_elec == pytest.approx(ref.e_elec, abs=1e-9)
    np.testing.assert_allclose(new.mo_energy, ref.mo_energy, atol=1e-7)
    assert new.max_error < scf.CONV_TOL_GRAD


def test_atomic_start_needs_fewer_iterations_over_a_set_of_dyes():
    """The reason for the start: fewer Fock builds in total (no timing, a count)."""
    core_its = atomic_its = 0
    for smiles in MOLECULES:
        m = model_of(smiles, bond_order_beta=False)
        core_its += scf.kernel(m.core, m.gamma, m.n_occ).iterations
        p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
        atomic_its += scf.kernel(m.core, m.gamma, m.n_occ, dens0=p0).iterations
    assert atomic_its < core_its


@pytest.mark.parametrize("smiles", ["C=CC=CC=CC=C", MOLECULES[0], MOLECULES[2]])
def test_joint_bond_order_beta_run_is_self_consistent_and_matches_the_cycles(smiles):
    """One SCF run with the betas following the density: betas equal beta(r(p)) of the final bond
    orders, |FP - PF| of the final fixed model is below the SCF threshold, and the result equals the
    cycle-by-cycle scheme (one SCF per beta update) within that scheme's beta tolerance."""
    (_sys, m), = build_models(mol_from_smiles(smiles), Options(bond_order_beta=True))
    st = m.bond_order_beta
    joint = vb.iterate(m.core, m.gamma, m.n_occ, m.types, m.bonds, st, scf.kernel,
                       scf_iterate=scf.iterate, scf_finish=scf.finish)
    assert joint.cycles == 1 and joint.scf.converged
    mask = vb.variable_bonds(m.types, m.bonds, st)
    i, j = m.bonds[mask].T
    expect = m.core[i, j] * vb.beta_factor(vb.bond_length(joint.scf.dens[i, j], st), st)
    assert np.max(np.abs(joint.core[i, j] - expect)) < 1e-9
    f = scf.fock_matrix(joint.core, m.gamma, joint.scf.dens)
    assert np.max(np.abs(f @ joint.scf.dens - joint.scf.dens @ f)) < scf.CONV_TOL_GRAD
    cycles = vb.iterate(m.core, m.gamma, m.n_occ, m.types, m.bonds, st, scf.kernel)
    assert cycles.cycles > 1
    assert joint.scf.e_elec == pytest.approx(cycles.scf.e_elec, abs=1e-5)
    np.testing.assert_allclose(joint.core, cycles.core, atol=1e-5)
    np.testing.assert_allclose(joint.scf.mo_energy, cycles.scf.mo_energy, atol=1e-5)


def test_joint_run_matches_pyscf_on_the_final_model():
    """PySCF's RHF on ppp's final bond-order-beta model, started from ppp's density, stays there."""
    from test_reference_pyscf import pyscf_rhf
    (_sys, m), = build_models(mol_from_smiles(MOLECULES[2]), Options(bond_order_beta=True))
    model, res = ground_scf(m, Options())
    mf = pyscf_rhf(model, dm0=res.dens)
    assert mf.e_tot == pytest.approx(res.e_elec + model.e_core, abs=1e-8)


def test_core_update_that_keeps_moving_never_converges():
    """The stop rule needs the core change below core_tol: a core that alternates is never accepted."""
    m = model_of("C=CC=CC=C", bond_order_beta=False)
    shift = np.zeros_like(m.core)
    shift[0, 1] = shift[1, 0] = 1e-3
    calls = []

    def alternating(dens):
        calls.append(1)
        return m.core + (shift if len(calls) % 2 else 0.0)

    p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    ok, its, _ = scf.iterate(m.core, m.gamma, m.n_occ, p0, max_iter=40, core_update=alternating,
                             core_tol=1e-6, conv_tol=1.0, conv_tol_grad=1.0)
    assert not ok and its == 40
    ok, its, _ = scf.iterate(m.core, m.gamma, m.n_occ, p0, max_iter=40, core_update=alternating,
                             conv_tol=1.0, conv_tol_grad=1.0)
    assert ok and its == 2  # without core_tol the loose thresholds pass at once


def test_finish_refuses_a_density_with_a_hole_below_the_fermi_level():
    m = model_of("c1ccc2ccccc2c1", bond_order_beta=False)
    ref = scf.kernel(m.core, m.gamma, m.n_occ)
    c = ref.mo_coeff
    occ = list(range(m.n_occ - 1)) + [m.n_occ]  # HOMO empty, LUMO doubly occupied
    hole = 2.0 * c[:, occ] @ c[:, occ].T
    assert not scf.finish(m.core, m.gamma, m.n_occ, hole, True, 1, "diis").converged
    assert scf.finish(m.core, m.gamma, m.n_occ, ref.dens, True, 1, "diis").converged


def test_diis_extrapolation_equals_the_bordered_system_solved_directly():
    """Pulay (1980): coefficients from [[B, -1], [-1, 0]] c = [0, -1]; their sum is 1."""
    rng = np.random.default_rng(41)
    diis = scf._DIIS(space=5)
    focks, errs = [], []
    for k in range(8):
        f, e = rng.standard_normal((7, 7)), rng.standard_normal((7, 7)) * 0.5 ** k
        focks.append(f)
        errs.append(e)
        diis.push(f, e)
    f_kept, e_kept = focks[-5:], errs[-5:]
    b = np.array([[np.vdot(x, y) for y in e_kept] for x in e_kept])
    a = np.block([[b, -np.ones((5, 1))], [-np.ones((1, 5)), np.zeros((1, 1))]])
    coef = np.linalg.solve(a, np.r_[np.zeros(5), -1.0])[:5]
    assert coef.sum() == pytest.approx(1.0, abs=1e-12)
    np.testing.assert_allclose(diis.extrapolate(), np.tensordot(coef, np.array(f_kept), axes=1),
                               rtol=1e-9, atol=1e-11)


def test_vectorised_polarizations_equal_the_per_state_function():
    rng = np.random.default_rng(43)
    tdm = rng.standard_normal((40, 3))
    tdm[:10, 2] = 0.0                    # in plane
    tdm[10:14] *= 1e-8                   # below the threshold: direction undefined
    tdm[14:18, :2] *= 1e-3               # mostly out of plane
    tdm[18] = [1.0, 0.0, 0.0]            # exactly long
    tdm[19] = [0.0, -1.0, 0.0]           # exactly short
    assert polarizations(tdm) == [polarization(t) for t in tdm]
    assert polarizations(np.zeros((0, 3))) == []


@pytest.mark.parametrize("smiles", MOLECULES[:4])
def test_kekule_start_from_perception_equals_the_rdkit_kekulization(smiles):
    mol = mol_from_smiles(smiles)
    (system, _m), = build_models(mol, Options())
    assert system.double_bonds is not None
    stored = guess.kekule_guess(mol, system)
    fresh = guess.kekule_guess(mol, replace(system, double_bonds=None))
    assert (stored is None) == (fresh is None)
    if stored is not None:
        np.testing.assert_array_equal(stored, fresh)


def test_parameter_sets_resolved_once_equal_the_registry(tmp_path):
    assert load_parameters(None).sha256 == params.load(None).sha256
    assert load_parameters("classic") is load_parameters("classic")
    assert load_parameters("classic").sha256 == params.load("classic").sha256
    path = tmp_path / "mine.toml"
    classic = next(d / "classic.toml" for d in params.parameter_dirs() if (d / "classic.toml").is_file())
    path.write_bytes(classic.read_bytes())
    assert load_parameters(str(path)).sha256 == params.load("classic").sha256
    with pytest.raises(ppp.errors.ParameterError, match="unknown parameter set"):
        load_parameters("no-such-set")


def test_no_variable_bond_is_one_plain_scf():
    """A system without C-C bonds (C#N alone) has no beta to iterate: one SCF, equal to the fixed model's."""
    m = model_of("CC#N", bond_order_beta=False)
    st = vb.BondOrderBeta()
    res = vb.iterate(m.core, m.gamma, m.n_occ, m.types, m.bonds, st, scf.kernel,
                     scf_iterate=scf.iterate, scf_finish=scf.finish)
    ref = scf.kernel(m.core, m.gamma, m.n_occ)
    assert res.cycles == 1 and res.scf.converged
    np.testing.assert_array_equal(res.core, m.core)
    assert res.scf.e_elec == pytest.approx(ref.e_elec, abs=1e-10)


def test_shared_depiction_gives_each_chromophore_the_coordinates_of_its_own():
    """prepare() depicts a molecule once for all its chromophores; each equals a separate computation."""
    from ppp.driver import prepare
    from ppp.structure.geometry import centre_coordinates
    mol = mol_from_smiles("C=CC=CCCc1ccc(cc1)/N=N/c1ccccc1")
    preps = prepare(mol, Options())
    assert len(preps) == 2
    all_bonds = np.concatenate([p.system.atom_indices[p.system.bonds] for p in preps]).reshape(-1, 2)
    bl = params.load(None).bond_length_angstrom
    for p in preps:
        alone = centre_coordinates(mol, p.system.atom_indices, p.system.bonds, bl, all_pi_bonds=all_bonds)
        np.testing.assert_array_equal(p.coords, alone)
