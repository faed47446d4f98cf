"""Solvent reaction field (ppp.model.solvent): reduction to the gas phase, hand-worked two-centre cases,
the laws of the generalized-Born kernel and Born radii, solvatochromic expectations, and bad input."""
from __future__ import annotations

import json
import math
from dataclasses import replace

import h5py
import numpy as np
import pytest
from scipy.optimize import brentq, minimize_scalar

import ppp
from ppp.driver import Options, solve_model
from ppp.errors import InputError
from ppp.model import solvent as sm
from ppp.units import COULOMB_EV_ANGSTROM

from conftest import model_of

NITROANILINE = "Nc1ccc(cc1)[N+](=O)[O-]"


def test_solvent_table_and_lookup():
    # handbook values (CRC Handbook, from memory): water eps 78.4, n 1.333; hexane eps 1.88, n 1.375
    w = sm.load("Water")
    assert (w.epsilon, w.refractive_index) == (78.4, 1.333)
    # ALPB factor (Sigalov, Fenley & Onufriev 2006): below the Born monopole factor 1 - 1/eps and within
    # 3 % of the Kirkwood-Onsager dipole factor 2 (eps - 1) / (2 eps + 1); 0 in vacuum, -> 1 as eps -> inf
    for eps in (1.88, 2.02, 24.5, 78.4):
        onsager = 2 * (eps - 1) / (2 * eps + 1)
        assert sm.screening(eps) < 1 - 1 / eps
        assert sm.screening(eps) == pytest.approx(onsager, rel=0.03)
    assert sm.screening(1.0) == 0.0 and sm.screening(1e12) == pytest.approx(1.0)
    assert w.f_static == pytest.approx(sm.screening(78.4)) and w.f_optical == pytest.approx(sm.screening(1.333 ** 2))
    assert sm.load("MeOH").name == "methanol" and sm.load("DCM").name == "dichloromethane"  # aliases
    assert sm.load("gas").is_vacuum
    # reference-set spellings with qualifiers map to the plain solvent
    assert sm.reference_solvent("water (acidic)") == "water"
    assert sm.reference_solvent("water pH 9-13") == "water"


def test_unknown_solvent_is_a_one_line_error(cli):
    with pytest.raises(InputError, match="unknown solvent 'ethnol'; valid: .*ethanol"):
        Options(solvent="ethnol")
    code, out, err = cli("run", "c1ccccc1", "--solvent", "ethnol")
    assert code != 0
    assert "unknown solvent 'ethnol'" in err and len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_generalized_born_kernel_two_centres_by_hand():
    # Still, Tempczyk, Hawley & Hendrickson (1990): f_GB = sqrt(r^2 + a1 a2 exp(-r^2 / 4 a1 a2)).
    # r = 1.4 A, a1 = a2 = 2.0 A by hand: exp(-1.96/16) = 0.88471, 1.96 + 4 * 0.88471 = 5.49884,
    # sqrt = 2.34496, 14.39964 / 2.34496 = 6.1407 eV; self term C / a = 7.1998 eV (Born 1920)
    k = sm.gb_kernel(np.array([[0.0, 0, 0], [1.4, 0, 0]]), np.array([2.0, 2.0]))
    assert k[0, 1] == pytest.approx(6.1407, abs=2e-4)
    assert k[0, 0] == pytest.approx(COULOMB_EV_ANGSTROM / 2.0, rel=1e-12)
    # far apart it tends to Coulomb's law C / r (law of the formula)
    far = sm.gb_kernel(np.array([[0.0, 0, 0], [30.0, 0, 0]]), np.array([2.0, 2.0]))
    assert far[0, 1] == pytest.approx(COULOMB_EV_ANGSTROM / 30.0, rel=5e-3)


def test_born_radii_laws():
    # an isolated sphere: the r^-6 integral vanishes and a = rho exactly (Grycuk 2003)
    assert sm.born_radii(np.zeros((1, 3)), np.array([1.7]))[0] == pytest.approx(1.7, abs=1e-12)
    # a neighbour's sphere displaces solvent: the radius grows, the more the closer it is
    near = sm.born_radii(np.array([[0.0, 0, 0], [1.4, 0, 0]]), np.array([1.7, 1.7]))
    far = sm.born_radii(np.array([[0.0, 0, 0], [3.0, 0, 0]]), np.array([1.7, 1.7]))
    assert near[0] > far[0] > 1.7
    assert near[0] == pytest.approx(near[1], abs=1e-3)
    # benzene: the six equivalent centres get one radius (averaged over graph-equivalent centres)
    m = model_of("c1ccccc1", solvent="water")
    assert np.ptp(m.reaction.radii) < 1e-12 and 1.8 < m.reaction.radii[0] < 2.5


def test_cavity_holds_hydrogens_and_substituents():
    from ppp.driver import prepare
    from ppp.structure.readers import mol_from_smiles
    # benzene: six hydrogens in the plane, C-H 1.09 A (common practice), radius 1.20 A (Bondi 1964)
    (p,) = prepare(mol_from_smiles("c1ccccc1"), Options(solvent="water"))
    assert p.cavity.shape == (6, 4)
    np.testing.assert_allclose(p.cavity[:, 3], 1.20)
    np.testing.assert_allclose(p.cavity[:, 2], 0.0, atol=1e-9)
    d = np.linalg.norm(p.cavity[:, None, :3] - p.coords[None], axis=2).min(axis=1)
    np.testing.assert_allclose(d, 1.09, atol=1e-6)
    # toluene: the methyl carbon (1.70 A) and three methyl hydrogens, two of them out of the plane
    (p,) = prepare(mol_from_smiles("Cc1ccccc1"), Options(solvent="water"))
    assert sorted(p.cavity[:, 3].tolist()).count(1.70) == 1 and len(p.cavity) == 1 + 3 + 5
    assert np.sum(np.abs(p.cavity[:, 2]) > 0.5) == 2
    # the gas phase places no cavity (no cost)
    (p,) = prepare(mol_from_smiles("Cc1ccccc1"), Options())
    assert p.cavity is None
    # descreening by the hydrogens makes the Born radii larger
    bare = sm.born_radii(p.coords, np.full(len(p.coords), 1.70))
    with_h = model_of("Cc1ccccc1", solvent="water").reaction.radii
    assert np.all(with_h > bare + 0.05)


def test_counter_ions_stay_out_of_the_cavity():
    # a salt is dissociated in the solvent (law of the continuum model as used here): the sodium salt of
    # methyl orange gives the states of the bare anion, whichever order the fragments are written in, and
    # a metal bound to a chromophore has a radius (Bondi 1964) instead of stopping the run
    from ppp.driver import compute, prepare
    from ppp.structure.readers import mol_from_smiles
    anion = "CN(C)c1ccc(cc1)/N=N/c1ccc(cc1)S(=O)(=O)[O-]"
    ref = [s.energy_ev for s in compute(anion, solvent="water").chromophores[0].singlets]
    for salt in (anion + ".[Na+]", "[Na+]." + anion, anion + ".[K+]"):
        got = [s.energy_ev for s in compute(salt, solvent="water").chromophores[0].singlets]
        np.testing.assert_allclose(got, ref, atol=1e-9, err_msg=salt)
    (p,) = prepare(mol_from_smiles("c1ccccc1.[Cl-]"), Options(solvent="water"))
    assert p.cavity.shape == (6, 4)  # the chloride is not part of benzene's cavity
    (p,) = prepare(mol_from_smiles("c1ccccc1[Hg]C"), Options(solvent="water"))
    assert 1.55 in p.cavity[:, 3].tolist()
    # an element outside Bondi's and Mantina's tables (a transition metal) takes RDKit's radius
    from rdkit import Chem
    (p,) = prepare(mol_from_smiles("c1ccccc1[Co]"), Options(solvent="water"))
    assert Chem.GetPeriodicTable().GetRvdw(27) in p.cavity[:, 3].tolist()


def _two_electron_energy(h, gam, c):
    """Closed-shell energy of two electrons in orbital c: 2 c.h.c + sum_ij c_i^2 c_j^2 gamma_ij."""
    return 2.0 * c @ h @ c + (c * c) @ gam @ (c * c)


def _hand_two_centre(m0, h):
    """Formaldehyde-type two-centre, two-electron model in a solvent, by hand: the ground state minimises
    G(theta) = E(theta) + E_core - 1/2 f(eps) q.Gamma.q (q_i = Z_i - 2 c_i^2, c = (cos, sin) theta), found
    without the project's Fock matrix; the vertical singlet and
    triplet of the one configuration H -> L follow from H_eff = H + V (V = f(eps) Gamma q0 frozen):
    E_S - E_0 = h'_LL - h'_HH + J_HL + K_HL - J_HH, E_T = E_S - 2 K_HL.
    Returns (G, c_H, singlet, triplet) without the state-specific term."""
    rf = m0.reaction
    z = m0.core_charges.astype(float)
    f = rf.solvent.f_static

    def g(theta):  # works for complex theta too (complex-step derivative below)
        c = np.array([np.cos(theta), np.sin(theta)])
        q = z - 2 * c * c
        return 2.0 * c @ h @ c + (c * c) @ m0.gamma @ (c * c) + m0.e_core - 0.5 * f * q @ rf.kernel @ q

    # minimum: bracket it, then solve dG/dtheta = 0 to machine precision with the complex-step derivative
    # dG/dtheta = Im G(theta + i t) / t (Squire & Trapp 1998), exact without a difference step
    rough = minimize_scalar(g, bounds=(0.0, math.pi / 2), method="bounded").x
    theta = brentq(lambda t: g(t + 1e-30j).imag / 1e-30, rough - 0.01, rough + 0.01, xtol=1e-15)
    best_fun = float(g(theta).real)
    ch = np.array([math.cos(theta), math.sin(theta)])
    cl = np.array([-ch[1], ch[0]])
    hp = h + np.diag(f * rf.kernel @ (z - 2 * ch * ch))
    jhh = (ch * ch) @ m0.gamma @ (ch * ch)
    jhl = (ch * ch) @ m0.gamma @ (cl * cl)
    khl = (ch * cl) @ m0.gamma @ (ch * cl)
    singlet = cl @ hp @ cl - ch @ hp @ ch + jhl + khl - jhh
    return best_fun, ch, singlet, singlet - 2 * khl


def test_reaction_field_scf_two_centre_by_hand():
    opts = Options(bond_order_beta=False, n_singlets=1, n_triplets=1, solvent="water")
    m0 = model_of("C=O", bond_order_beta=False, solvent="water")
    g, ch, singlet, triplet = _hand_two_centre(m0, m0.core)
    res = solve_model(m0, opts)
    assert res.e_total == pytest.approx(g, abs=1e-8)
    assert res.scf.dens[0, 0] == pytest.approx(2 * ch[0] ** 2, abs=1e-6)
    # the gas-phase solution is less polarised: the solvent pulls more charge onto oxygen
    gas = solve_model(model_of("C=O", bond_order_beta=False), replace(opts, solvent=None))
    assert res.scf.dens[1, 1] > gas.scf.dens[1, 1] + 0.01
    # state-specific term -1/2 f(n^2) dq.Gamma.dq with the relaxed dq = -d omega / d h_mu,mu, here by
    # central differences of the hand-worked excitation energy
    step = 1e-4
    for k, (state, mult) in enumerate(((res.singlets[0], 1), (res.triplets[0], 3))):
        dq = np.zeros(2)
        for mu in range(2):
            e = np.zeros((2, 2))
            e[mu, mu] = step
            dq[mu] = -(_hand_two_centre(m0, m0.core + e)[2 + k] - _hand_two_centre(m0, m0.core - e)[2 + k]) / (2 * step)
        want = (singlet, triplet)[k] + m0.reaction.shift_of(dq)[0]
        assert state.energy_ev == pytest.approx(want, abs=2e-6), mult


@pytest.mark.parametrize("solvent", [None, "ethanol"])
@pytest.mark.parametrize("multiplicity", [1, 3])
def test_relaxed_charges_are_derivatives_of_the_excitation_energy(solvent, multiplicity):
    # Z-vector relaxed density (ppp.solvers.relaxed) = d omega / d h_mu,mu: checked by central finite
    # differences of the model's CIS excitation energies (law of the Hellmann-Feynman / Z-vector theory)
    from ppp.driver import ground_scf
    from ppp.solvers import cis
    from ppp.solvers.relaxed import relaxed_difference_charges
    opts = Options(bond_order_beta=False, solvent=solvent)
    m = model_of(NITROANILINE, bond_order_beta=False, solvent=solvent)

    def omegas(model):
        mm, s = ground_scf(model, replace(opts, max_iter=200))
        return s, cis.kernel(s.mo_energy, s.mo_coeff, m.gamma, m.n_occ, 3, multiplicity)

    s0, c0 = omegas(m)
    kern = None if m.reaction is None else m.reaction.solvent.f_static * m.reaction.kernel
    rel = relaxed_difference_charges(s0.mo_energy, s0.mo_coeff, m.gamma, m.n_occ, c0.amplitudes, multiplicity,
                                     rf_kernel=kern)
    step = 1e-4
    fd = np.zeros_like(rel)
    for mu in range(m.n_centres):
        e = np.zeros_like(m.core)
        e[mu, mu] = step
        fd[:, mu] = (omegas(replace(m, core=m.core + e))[1].energies
                     - omegas(replace(m, core=m.core - e))[1].energies) / (2 * step)
    np.testing.assert_allclose(rel, fd, atol=2e-6)
    np.testing.assert_allclose(rel.sum(axis=1), 0.0, atol=1e-10)  # one electron moves


def test_gas_phase_reduces_exactly():
    plain = ppp.compute(NITROANILINE, n_triplets=3)
    named = ppp.compute(NITROANILINE, n_triplets=3, solvent="gas")
    assert [s.energy_ev for s in named.states] == [s.energy_ev for s in plain.states]
    assert named.chromophores[0].model.reaction is None
    # eps = n^2 = 1 forced through the reaction-field iteration: no term survives
    m = model_of(NITROANILINE)
    vac = sm.reaction_field(sm.Solvent("vacuum", 1.0, 1.0), m.coords, m.types, m.core_charges, m.bonds)
    res = solve_model(replace(m, reaction=vac), Options(n_triplets=3))
    ref = plain.chromophores[0]
    assert res.e_total == pytest.approx(ref.e_total, abs=1e-8)
    np.testing.assert_allclose([s.energy_ev for s in res.singlets], [s.energy_ev for s in ref.singlets],
                               atol=1e-7)
    np.testing.assert_allclose([s.energy_ev for s in res.triplets], [s.energy_ev for s in ref.triplets],
                               atol=1e-7)


def test_solvatochromic_expectations():
    # Lippert-Mataga-type expectations (common practice): a push-pull dye whose excitation moves charge
    # from donor to acceptor is red-shifted by a polar solvent (4-nitroaniline: about 4.2-4.3 eV in the
    # gas phase, 3.3 eV in water; from memory); a non-polar alternant hydrocarbon has no pi charges
    # and no charge-transfer excitation, so the reaction field leaves it unchanged; a symmetric cyanine
    # moves little charge on excitation and shifts much less than the push-pull dye.
    def band(smi, solvent):
        return ppp.compute(smi, n_triplets=0, solvent=solvent).first_bright.energy_ev

    push = band(NITROANILINE, "ethanol") - band(NITROANILINE, None)
    assert push < -0.2
    # and the red shift grows with the solvent's polarity (Lippert 1957; Mataga, Kaifu & Koizumi 1956:
    # the shift follows the orientation polarisability, common practice): gas > cyclohexane > ethanol
    assert band(NITROANILINE, None) > band(NITROANILINE, "cyclohexane") + 0.1
    assert band(NITROANILINE, "cyclohexane") > band(NITROANILINE, "ethanol") + 0.05
    assert abs(band("c1ccc2ccccc2c1", "ethanol") - band("c1ccc2ccccc2c1", None)) < 0.01
    cyanine = "CN(C)C=CC=CC=[N+](C)C"
    assert abs(band(cyanine, "methanol") - band(cyanine, None)) < 0.3 * abs(push)


def test_solvent_with_bond_order_beta_is_self_consistent():
    m0 = model_of(NITROANILINE, solvent="water")
    assert m0.bond_order_beta is not None  # classic default
    res = solve_model(m0, Options(n_singlets=1, n_triplets=0, solvent="water"))
    v = m0.reaction.potential(res.scf.dens)
    np.testing.assert_allclose(np.diag(res.model.core) - np.diag(m0.core), v, atol=1e-6)
    # and the betas follow the final bond orders as in the gas phase
    from ppp.model import variable_beta as vbeta
    i, j = m0.bonds[:, 0], m0.bonds[:, 1]
    mask = vbeta.variable_bonds(m0.types, m0.bonds, m0.bond_order_beta)
    want = m0.core[i, j][mask] * vbeta.beta_factor(vbeta.bond_length(res.scf.dens[i, j][mask],
                                                                      m0.bond_order_beta), m0.bond_order_beta)
    np.testing.assert_allclose(res.model.core[i, j][mask], want, atol=1e-6)


def test_solvent_is_recorded_in_json_and_hdf5(tmp_path):
    res = ppp.compute(NITROANILINE, n_singlets=2, n_triplets=0, solvent="ethanol")
    assert res.to_dict()["options"]["solvent"] == "ethanol"
    from ppp.io import h5_io
    path = h5_io.save([res], tmp_path / "r.h5")
    with h5py.File(path, "r") as h5:
        grp = next(iter(h5["molecules"].values()))
        assert json.loads(grp.attrs["options"])["solvent"] == "ethanol"
    assert "solvent ethanol" in res.table()


def test_relaxed_charges_dense_and_iterative_paths_agree(monkeypatch):
    from ppp.solvers import relaxed
    res = ppp.compute(NITROANILINE, n_singlets=4, n_triplets=0, solvent="water")
    c = res.chromophores[0]
    m = c.model
    args = (c.scf.mo_energy, c.scf.mo_coeff, m.gamma, m.n_occ, c.singlet_amplitudes, 1,
            m.reaction.solvent.f_static * m.reaction.kernel)
    dense = relaxed.relaxed_difference_charges(*args)
    monkeypatch.setattr(relaxed, "DENSE_MAX_PAIRS", 0)
    np.testing.assert_allclose(relaxed.relaxed_difference_charges(*args), dense, atol=1e-8)


def test_no_gas_phase_uncertainty_on_a_solvent_run():
    from ppp.calibration.uncertainty import for_result
    assert for_result(ppp.compute(NITROANILINE, n_triplets=0)) is not None
    assert for_result(ppp.compute(NITROANILINE, n_triplets=0, solvent="gas")) is not None
    assert for_result(ppp.compute(NITROANILINE, n_triplets=0, solvent="ethanol")) is None


def test_slow_reaction_field_cycle_near_symmetry_breaking_converges():
    # heptamethine indocyanine in ethanol with bond-order beta: the SCF / beta / reaction-field loop
    # converges linearly with factor ~0.9 per cycle (the symmetric solution is unstable and the charge
    # shifts towards one end); it must settle, and its betas and reaction field must be self-consistent
    smi = "CN1c2ccccc2C(C)(C)C1=CC=CC=CC=CC1=[N+](C)c2ccccc2C1(C)C"
    m0 = model_of(smi, solvent="ethanol")
    res = solve_model(m0, Options(n_singlets=2, n_triplets=0, solvent="ethanol"))
    v = m0.reaction.potential(res.scf.dens)
    np.testing.assert_allclose(np.diag(res.model.core) - np.diag(m0.core), v, atol=1e-5)
    assert 1.5 < res.singlets[0].energy_ev < 2.5
