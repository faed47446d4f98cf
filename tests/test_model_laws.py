"""Laws of the PPP model that hold exactly, checked on the engine's own output.

* Hueckel limit: with all two-electron integrals switched off the SCF orbital energies are the
  eigenvalues of the Hueckel matrix, known in closed form for chains and rings (Coulson 1938).
* Coulson-Rushbrooke pairing theorem (Coulson & Rushbrooke 1940), which survives in PPP-SCF with
  uniform parameters (McLachlan 1959; Pople 1953).
* Molecular symmetry of benzene and naphthalene, invariance under atom renumbering, and E/Z geometry.
* Far-apart neutral fragments do not interact: the core attraction, electron repulsion and core-core
  repulsion terms cancel at long range (size consistency of SCF and CIS).
"""
from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from threadpoolctl import threadpool_limits

import ppp
from ppp.driver import Options, build_models
from ppp.model import params
from ppp.model.hamiltonian import beta_matrix, build_model, core_matrix
from ppp.solvers import scf
from ppp.structure.readers import mol_from_smiles


@pytest.fixture(autouse=True, scope="module")
def _one_thread():
    """Tiny matrices: one BLAS thread avoids busy-waiting threads on a shared machine."""
    with threadpool_limits(limits=1):
        yield


def _model(smiles: str, bond_order_beta: bool | None = None):
    systems = build_models(mol_from_smiles(smiles), Options(bond_order_beta=bond_order_beta))
    assert len(systems) == 1
    return systems[0][1]


def _chromophore(smiles: str):
    res = ppp.compute(smiles)
    assert len(res.chromophores) == 1
    return res.chromophores[0]


def _hueckel_orbital_energies(smiles: str) -> tuple[np.ndarray, object]:
    """SCF orbital energies (eV) of the model with gamma = 0 everywhere (the Hueckel limit).

    Bond-order beta is switched off explicitly and beta is the table value of each bond type: the
    Hueckel closed forms checked below hold for one uniform beta on every bond, which the bond-order
    iteration (on by default) deliberately breaks (bond alternation)."""
    model = _model(smiles, bond_order_beta=False)
    pset = params.load(model.parameters)
    zeros = np.zeros_like(model.gamma)
    beta = beta_matrix(model.types, model.bonds, pset)
    core = core_matrix(model.ip, model.core_charges, zeros, beta)
    res = scf.kernel(core, zeros, model.n_occ)
    assert res.converged
    return res.mo_energy, model


# ---------------------------------------------------------------------------------------------
# (a) Hueckel limit
# ---------------------------------------------------------------------------------------------

@pytest.mark.parametrize("n", range(2, 13, 2))
def test_hueckel_limit_linear_polyene(n):
    """Linear chain of N equal centres: e_k = alpha + 2 beta cos(k pi / (N + 1)), k = 1..N
    (Coulson, Proc. R. Soc. A 169, 413 (1939); from memory), alpha = -I_C, beta = beta_CC."""
    smiles = "C=C" * (n // 2)
    energies, model = _hueckel_orbital_energies(smiles)
    assert model.n_centres == n and set(model.types) == {"C"}
    pset = params.load(model.parameters)
    alpha, beta = -pset.types["C"].ip_ev, pset.beta_for("C", "C")
    k = np.arange(1, n + 1)
    expected = np.sort(alpha + 2.0 * beta * np.cos(k * np.pi / (n + 1)))
    np.testing.assert_allclose(energies, expected, atol=1e-10, rtol=0)


@pytest.mark.parametrize("n", [6, 10, 14, 18])
def test_hueckel_limit_annulene(n):
    """Ring of N equal centres: e_k = alpha + 2 beta cos(2 pi k / N), k = 0..N-1 (Hueckel 1931;
    Coulson 1938; from memory). Only closed-shell (4m + 2) rings. The depiction must be a regular
    polygon (all centres on a circle, all bonds equal)."""
    smiles = "c1" + "c" * (n - 1) + "1"
    energies, model = _hueckel_orbital_energies(smiles)
    assert model.n_centres == n
    radius = np.linalg.norm(model.coords, axis=1)
    bonds = np.linalg.norm(model.coords[model.bonds[:, 0]] - model.coords[model.bonds[:, 1]], axis=1)
    assert np.ptp(radius) < 1e-6 and np.ptp(bonds) < 1e-6 and len(bonds) == n
    pset = params.load(model.parameters)
    alpha, beta = -pset.types["C"].ip_ev, pset.beta_for("C", "C")
    expected = np.sort(alpha + 2.0 * beta * np.cos(2.0 * np.pi * np.arange(n) / n))
    np.testing.assert_allclose(energies, expected, atol=1e-10, rtol=0)


def test_hueckel_limit_is_not_the_full_model():
    """Control: with gamma switched on, benzene's orbital energies are NOT the Hueckel ones."""
    energies, model = _hueckel_orbital_energies("c1ccccc1")
    full = scf.kernel(model.core, model.gamma, model.n_occ)
    assert np.max(np.abs(full.mo_energy - energies)) > 0.5


# ---------------------------------------------------------------------------------------------
# (b) Coulson-Rushbrooke pairing theorem
# ---------------------------------------------------------------------------------------------

ALTERNANTS = {
    "butadiene": "C=C/C=C",
    "hexatriene": "C=C/C=C/C=C",
    "benzene": "c1ccccc1",
    "naphthalene": "c1ccc2ccccc2c1",
    "anthracene": "c1ccc2cc3ccccc3cc2c1",
    "styrene": "C=Cc1ccccc1",
    "biphenyl": "c1ccc(cc1)-c1ccccc1",
    "stilbene": "c1ccc(cc1)/C=C/c1ccccc1",
    "phenanthrene": "c1ccc2c(c1)ccc1ccccc12",
}


@pytest.mark.parametrize("name", list(ALTERNANTS))
def test_pairing_theorem_alternant(name):
    """Alternant hydrocarbons in PPP-SCF with uniform parameters: every pi population is 1 and the
    orbital energies pair about F_ii = -I + U/2, i.e. e_k + e_(N+1-k) = 2 F_ii = -2 I + U for all k
    (Coulson & Rushbrooke, Proc. Camb. Phil. Soc. 36, 193 (1940); McLachlan, Mol. Phys. 2, 271 (1959);
    from memory). Holds for any geometry, so the depiction does not matter, and for any beta on the bonds
    of the bipartite graph (only equal site parameters are needed), so it is checked on the default path
    with bond-order-dependent beta, where the betas differ from bond to bond."""
    chrom = _chromophore(ALTERNANTS[name])
    model = chrom.model
    assert set(model.types) == {"C"}
    assert model.bond_order_beta is not None  # default path: the betas were iterated with the bond orders
    np.testing.assert_allclose(chrom.ground.populations, 1.0, atol=1e-8, rtol=0)
    e = chrom.scf.mo_energy
    pset = params.load(model.parameters)
    centre = -2.0 * pset.types["C"].ip_ev + pset.types["C"].u_ev
    np.testing.assert_allclose(e + e[::-1], centre, atol=1e-8, rtol=0)


@pytest.mark.parametrize("smiles", ["c1ccc2cccc-2cc1", "c1ccncc1"], ids=["azulene", "pyridine"])
def test_pairing_theorem_fails_off_its_premises(smiles):
    """Azulene (non-alternant: odd rings) and pyridine (heteroatom) break the premises of the pairing
    theorem: their populations are not uniform and their orbital energies are not paired."""
    chrom = _chromophore(smiles)
    assert np.max(np.abs(chrom.ground.populations - 1.0)) > 0.01
    e = chrom.scf.mo_energy
    pair_sums = e + e[::-1]
    assert np.ptp(pair_sums) > 0.01


# ---------------------------------------------------------------------------------------------
# (c) Symmetry
# ---------------------------------------------------------------------------------------------

def test_benzene_degenerate_bright_pair_and_dark_lowest_singlets():
    """Benzene (D6h): the two lowest singlets (1B2u, 1B1u) are dipole forbidden and the lowest
    allowed band is the degenerate 1E1u pair (Pariser, J. Chem. Phys. 24, 250 (1956); from memory).
    In a degenerate pair each member carries the same |mu| whatever rotation the solver returns."""
    chrom = _chromophore("c1ccccc1")
    s = chrom.singlets
    assert s[0].oscillator_strength < 1e-8 and s[1].oscillator_strength < 1e-8
    assert s[1].energy_ev - s[0].energy_ev > 0.1  # two distinct dark states, not a pair
    bright = [k for k, st in enumerate(s) if st.oscillator_strength > 0.1]
    k = bright[0]
    assert bright[:2] == [k, k + 1]
    assert abs(s[k + 1].energy_ev - s[k].energy_ev) < 1e-8
    assert s[k].oscillator_strength == pytest.approx(s[k + 1].oscillator_strength, rel=1e-8)
    # the pair is a true doublet: the next state lies clearly apart
    assert s[k + 2].energy_ev - s[k + 1].energy_ev > 0.1
    # the two degenerate transition dipoles are perpendicular and in-plane
    mu1, mu2 = np.array(s[k].transition_dipole), np.array(s[k + 1].transition_dipole)
    assert abs(mu1 @ mu2) / (np.linalg.norm(mu1) * np.linalg.norm(mu2)) < 1e-6
    assert abs(mu1[2]) < 1e-12 and abs(mu2[2]) < 1e-12


def _reflection(coords: np.ndarray, axis: int) -> np.ndarray:
    """Permutation p with coords[p[i]] = coords[i] mirrored through the plane normal to ``axis``."""
    mirrored = coords.copy()
    mirrored[:, axis] *= -1.0
    d = np.linalg.norm(coords[None, :, :] - mirrored[:, None, :], axis=-1)
    p = np.argmin(d, axis=1)
    assert np.max(d[np.arange(len(p)), p]) < 1e-6, "structure is not symmetric under this reflection"
    assert len(set(p.tolist())) == len(p)
    return p


def _parity(t: np.ndarray, p: np.ndarray) -> int:
    """+1 / -1 when the transition density matrix T is even / odd under the atom permutation p."""
    tp = t[np.ix_(p, p)]
    scale = np.linalg.norm(t)
    if np.linalg.norm(tp - t) < 1e-6 * scale:
        return 1
    if np.linalg.norm(tp + t) < 1e-6 * scale:
        return -1
    raise AssertionError("state has no definite parity")


def test_naphthalene_lowest_singlets_polarized_along_perpendicular_axes():
    """Naphthalene (D2h, x long axis, y short axis): S1 (1Lb) is long-axis polarized and S2 (1La)
    short-axis polarized (Platt 1949; Pariser 1956; from memory).

    In PPP the 1Lb state is the 'minus' combination of HOMO->LUMO+1 and HOMO-1->LUMO, whose
    transition dipole vanishes exactly for an alternant (Pariser 1956): its direction cannot be read
    from a vector of size ~1e-12. Its polarization is read instead from the symmetry of its transition
    density matrix T_mu,nu = sum_ia X_ia C_mu,i C_nu,a: a state polarized along x is odd under x -> -x
    and even under y -> -y. Where the dipole is large (S2 and the bright 1Bb state) it must also point
    along the axis the symmetry says."""
    chrom = _chromophore("c1ccc2ccccc2c1")
    coords, n_occ, c = chrom.model.coords, chrom.model.n_occ, chrom.scf.mo_coeff
    span = np.ptp(coords, axis=0)
    assert span[0] > span[1] > 0 and span[2] == 0  # x long, y short, planar
    px, py = _reflection(coords, 0), _reflection(coords, 1)

    def axis_of(k):
        t = c[:, :n_occ] @ chrom.singlet_amplitudes[k] @ c[:, n_occ:].T
        parities = (_parity(t, px), _parity(t, py))
        return {(-1, 1): "x", (1, -1): "y"}.get(parities, "forbidden")

    s = chrom.singlets
    assert axis_of(0) == "x" and axis_of(1) == "y"
    assert s[0].oscillator_strength < 1e-8  # 1Lb: dark in PPP-CIS (pairing theorem)
    mu2 = np.array(s[1].transition_dipole)
    assert s[1].oscillator_strength > 0.05
    assert abs(mu2[0]) < 1e-6 * np.linalg.norm(mu2) and mu2[2] == 0
    assert s[1].polarization == "short"
    # first strong long-axis band (1Bb) is perpendicular to 1La
    k_bb = next(k for k, st in enumerate(s) if st.oscillator_strength > 0.5)
    assert axis_of(k_bb) == "x" and s[k_bb].polarization == "long"
    mu_bb = np.array(s[k_bb].transition_dipole)
    assert abs(mu2 @ mu_bb) / (np.linalg.norm(mu2) * np.linalg.norm(mu_bb)) < 1e-6


# ---------------------------------------------------------------------------------------------
# Invariances
# ---------------------------------------------------------------------------------------------

def _fingerprint(result: ppp.MoleculeResult) -> np.ndarray:
    chrom = result.chromophores
    return np.array([st.energy_ev for st in result.states] + [st.oscillator_strength for st in result.states]
                    + [c.e_total for c in chrom])


@pytest.mark.parametrize("smiles", [
    "Nc1ccc(cc1)/N=N/c1ccccc1",
    "O=C(c1ccccc1)c1ccccc1",
    "c1ccc2cccc-2cc1",
    "CN(C)C=CC=[N+](C)C",
    "c1ccc(cc1)/C=C/c1ccccc1",
])
def test_invariant_under_atom_renumbering(smiles):
    """The same molecule written with different atom orders (RDKit random SMILES and random atom
    permutations, fixed seed) gives the same energies and oscillator strengths to 1e-9: the model
    depends on the structure, not on its numbering (common practice)."""
    rng = np.random.default_rng(20240601)
    mol = mol_from_smiles(smiles)
    ref = _fingerprint(ppp.compute(mol, name="reference"))
    variants = [Chem.RenumberAtoms(mol, [int(i) for i in rng.permutation(mol.GetNumAtoms())])
                for _ in range(3)]
    variants += [mol_from_smiles(Chem.MolToSmiles(mol, doRandom=True)) for _ in range(3)]
    for k, var in enumerate(variants):
        got = _fingerprint(ppp.compute(var, name=f"variant {k}"))
        np.testing.assert_allclose(got, ref, atol=1e-9, rtol=0)


@pytest.mark.parametrize("e_isomer,z_isomer", [
    ("C=C/C=C/C=C", "C=C/C=C\\C=C"),
    ("c1ccc(cc1)/C=C/c1ccccc1", "c1ccc(cc1)/C=C\\c1ccccc1"),
], ids=["hexatriene", "stilbene"])
def test_e_and_z_isomers_differ(e_isomer, z_isomer):
    """E/Z isomers have different pi-centre geometries, hence different gamma matrices and spectra."""
    e_res, z_res = ppp.compute(e_isomer), ppp.compute(z_isomer)
    assert abs(e_res.s1.energy_ev - z_res.s1.energy_ev) > 0.01
    assert abs(e_res.chromophores[0].e_total - z_res.chromophores[0].e_total) > 1e-3



# ---------------------------------------------------------------------------------------------
# Separated fragments
# ---------------------------------------------------------------------------------------------

def _pair_model(model_a, model_b, distance: float):
    """One model holding two fragments ``distance`` angstrom apart along x, with no bond between them,
    under the same settings as the fragments (bond-order beta when the fragments have it)."""
    pset = params.load(model_a.parameters)
    assert model_a.bond_order_beta == model_b.bond_order_beta
    coords = np.vstack([model_a.coords, model_b.coords + np.array([distance, 0.0, 0.0])])
    bonds = np.vstack([model_a.bonds, model_b.bonds + model_a.n_centres])
    return build_model(model_a.types + model_b.types,
                       np.concatenate([model_a.core_charges, model_b.core_charges]),
                       model_a.n_electrons + model_b.n_electrons, bonds, coords, pset,
                       bond_order_beta=model_a.bond_order_beta)


@pytest.mark.parametrize("smiles_a,smiles_b", [("c1ccccc1", "c1cc[nH]c1"), ("C=O", "C=C/C=C")],
                         ids=["benzene+pyrrole", "formaldehyde+butadiene"])
def test_far_apart_neutral_fragments_do_not_interact(smiles_a, smiles_b):
    """Two neutral pi-systems 1000 A apart: the total energy is the sum of the fragments' energies.
    In the PPP energy each far electron's repulsion -- sum_j P_jj gamma_ij -- is cancelled by the
    attraction of the far cores -- sum_j Z_j gamma_ij in h_ii -- and the core-core repulsion
    Z_i Z_j gamma_ij cancels what is left (Pople 1953; neutral-limit consistency, common practice).
    Remaining multipole interactions are below 1e-8 eV at this distance. Every excitation of each
    fragment reappears in the CIS spectrum of the pair (CIS is size consistent; Foresman et al. 1992);
    the pair has extra charge-transfer states besides."""
    model_a, model_b = _model(smiles_a), _model(smiles_b)
    pair = _pair_model(model_a, model_b, 1000.0)
    res_a, res_b = (ppp.solve_model(m, Options(n_singlets=4, n_triplets=4)) for m in (model_a, model_b))
    res_ab = ppp.solve_model(pair, Options(n_singlets=30, n_triplets=30))
    assert abs(res_ab.e_total - (res_a.e_total + res_b.e_total)) < 1e-8
    for kind in ("singlets", "triplets"):
        got = np.array([st.energy_ev for st in getattr(res_ab, kind)])
        for st in (*getattr(res_a, kind), *getattr(res_b, kind)):
            assert st.energy_ev < got[-1], "ask the pair for more roots"
            assert np.min(np.abs(got - st.energy_ev)) < 1e-6, f"{kind}: {st.energy_ev} eV missing"


def test_far_apart_fragments_feel_a_charge():
    """Control with a net charge: a cation 1000 A from a neutral molecule still gives the sum of the
    energies to within the charge-multipole interaction (< 1e-6 eV here), while two cations repel by
    the Coulomb energy e^2 / R (Coulomb's law; CODATA e^2 / 4 pi eps0): 1.44e-4 eV at R = 1e5 A,
    where the Mataga-Nishimoto gamma = e^2 / (R + a) still differs from e^2 / R by ~2e-9 eV."""
    from ppp.units import COULOMB_EV_ANGSTROM
    cation, neutral = _model("[cH+]1cccccc1"), _model("c1ccccc1")
    opts = Options(n_singlets=0, n_triplets=0)
    e_cat, e_neu = ppp.solve_model(cation, opts).e_total, ppp.solve_model(neutral, opts).e_total
    e_mixed = ppp.solve_model(_pair_model(cation, neutral, 1000.0), opts).e_total
    assert abs(e_mixed - (e_cat + e_neu)) < 1e-6
    e_two = ppp.solve_model(_pair_model(cation, cation, 1.0e5), opts).e_total
    assert e_two - 2.0 * e_cat == pytest.approx(COULOMB_EV_ANGSTROM / 1.0e5, abs=1e-8)
