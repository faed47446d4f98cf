"""The PPP model solved by an outside reference library: PySCF.

ppp builds the model (core matrix h, two-centre repulsion gamma, electron count, core-core repulsion);
exactly the same numbers are handed to PySCF as a custom Hamiltonian in an orthonormal basis of N
sites with zero-differential-overlap two-electron integrals (ii|jj) = gamma_ij. PySCF's restricted
Hartree-Fock, its Tamm-Dancoff (CIS) response for singlets and triplets, and its full-CI solver then
act as the gold standard for ppp's own SCF and CIS (source: PySCF, Sun et al., WIREs Comput. Mol.
Sci. 8, e1340 (2018); J. Chem. Phys. 153, 024109 (2020); citations from memory).

Everything is passed in eV: PySCF never needs to know the unit of a model Hamiltonian (its energies
are just the eigenvalues of the matrices it is given), so no conversion enters the comparison.
Only the oscillator strength, which needs atomic units, goes through ``ppp.units``.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from pyscf import ao2mo, fci, gto, lib, scf, tdscf  # the `test` extra installs it: no skipping
from threadpoolctl import threadpool_limits

from ppp.driver import ChromophoreResult, Options, build_models, solve_model
from ppp.structure.readers import mol_from_smiles
from ppp.units import BOHR_ANGSTROM, HARTREE_EV


@pytest.fixture(autouse=True, scope="module")
def _one_thread():
    """The matrices here are tiny: one BLAS / OpenMP thread avoids threads busy-waiting for each other
    on a shared machine (measured: 5-7x faster on a loaded 2-core box)."""
    old = lib.num_threads()
    lib.num_threads(1)
    with threadpool_limits(limits=1):
        yield
    lib.num_threads(old)


#: Agreement demanded between ppp and PySCF for energies (eV), from issue 2.
TOL_EV = 1e-6
#: Agreement demanded for oscillator strengths (dimensionless).
TOL_F = 1e-6
#: Roots compared per multiplicity.
N_ROOTS = 10

#: Molecules handed to both solvers: cations, anions, N, O, S centres, alternant and non-alternant.
MOLECULES = {
    "ethylene": "C=C",
    "formaldehyde": "C=O",
    "butadiene": "C=C/C=C",
    "benzene": "c1ccccc1",
    "naphthalene": "c1ccc2ccccc2c1",
    "azulene": "c1ccc2cccc-2cc1",
    "pyridine": "c1ccncc1",
    "pyrrole": "c1cc[nH]c1",
    "furan": "c1ccoc1",
    "thiophene": "c1ccsc1",
    "streptocyanine (trimethine cation)": "CN(C)C=CC=[N+](C)C",
    "tropylium (cation)": "[cH+]1cccccc1",
    "allyl cation": "[CH2+]C=C",
    "phenolate (anion)": "[O-]c1ccccc1",
    "cyclopentadienide (anion)": "[cH-]1cccc1",
    "nitrobenzene": "O=[N+]([O-])c1ccccc1",
    "4-aminoazobenzene (push-pull dye)": "Nc1ccc(cc1)/N=N/c1ccccc1",
    "benzophenone": "O=C(c1ccccc1)c1ccccc1",
    "4-nitroaniline (push-pull)": "Nc1ccc(cc1)[N+](=O)[O-]",
    "chlorobenzene": "Clc1ccccc1",
    "benzonitrile": "N#Cc1ccccc1",
    "Brooker's merocyanine": "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1",
    "crystal violet (cation, 25 centres)": "CN(C)c1ccc(cc1)C(=C1C=CC(C=C1)=[N+](C)C)c1ccc(cc1)N(C)C",
}

#: A few molecules also run with the Ohno gamma formula (a different gamma matrix for both solvers).
OHNO = ["benzophenone", "4-aminoazobenzene (push-pull dye)", "thiophene", "phenolate (anion)"]


def _model_and_result(smiles: str, gamma: str | None = None, bond_order_beta: bool | None = None):
    """ppp's result and the model it finally solved.

    With bond-order-dependent beta (the default set's choice, ``bond_order_beta=None``) the core matrix
    is iterated with the SCF; ``result.model`` carries the final, self-consistent core Hamiltonian, and
    that is the model handed to PySCF. ``bond_order_beta=False`` gives the fixed-beta model."""
    options = Options(gamma=gamma, bond_order_beta=bond_order_beta)
    systems = build_models(mol_from_smiles(smiles), options)
    assert len(systems) == 1, f"{smiles}: expected one chromophore, got {len(systems)}"
    res = solve_model(systems[0][1], replace(options, n_singlets=N_ROOTS, n_triplets=N_ROOTS))
    return res.model, res


def zdo_eri(gamma: np.ndarray) -> np.ndarray:
    """(N, N, N, N) two-electron integrals of the ZDO model: (ii|jj) = gamma_ij, all others zero
    (Pariser & Parr 1953; Pople 1953)."""
    n = gamma.shape[0]
    eri = np.zeros((n, n, n, n))
    idx = np.arange(n)
    eri[idx[:, None], idx[:, None], idx[None, :], idx[None, :]] = gamma
    return eri


def pyscf_rhf(model, dm0=None):
    """PySCF restricted HF on the model Hamiltonian (energies in eV), optionally from density dm0."""
    n = model.n_centres
    mol = gto.M(verbose=0)
    mol.nelectron = int(model.n_electrons)
    mol.incore_anyway = True
    mf = scf.RHF(mol)
    core = np.array(model.core, dtype=float)
    e_core = float(model.e_core)
    mf.get_hcore = lambda *a: core
    mf.get_ovlp = lambda *a: np.eye(n)
    mf._eri = ao2mo.restore(8, zdo_eri(model.gamma), n)
    mf.energy_nuc = lambda *a: e_core
    mf.conv_tol = 1e-12  # energy change, eV
    mf.conv_tol_grad = 1e-9  # orbital gradient, eV; the energy error is quadratic in it
    mf.max_cycle = 200
    mf.kernel(dm0)
    assert mf.converged, "PySCF RHF did not converge"
    return mf


def pyscf_tda(mf, singlet: bool, nstates: int):
    """PySCF's TDA (= CIS on the RHF reference) for one spin, solved two ways.

    The reference roots come from PySCF's own TDA operator (``gen_vind``: A acting on trial vectors,
    built from PySCF's integrals and orbitals) applied to every unit vector and diagonalised densely,
    so the reference is exact to round-off. PySCF's Davidson solver (``TDA.kernel``) is run as well and
    must agree within TOL_EV: its ``converged`` flags are not used because at these tight thresholds
    the iteration stops on linear dependence of the trial space with residuals ~1e-5 eV, whose
    eigenvalue error (~ residual^2 / gap) is still below 1e-8 eV.

    Returns (energies (k,), X (k, n_occ, n_vir) normalised to 1), ascending.
    """
    n_occ = int(np.count_nonzero(mf.mo_occ > 0))
    n_vir = mf.mo_coeff.shape[1] - n_occ
    td = tdscf.TDA(mf)
    td.singlet = singlet
    # a few roots more than compared: the highest roots of a Davidson run can converge to a higher state
    # when the diagonal start guesses miss a symmetry species (seen for naphthalene's 10th singlet with
    # bond-order beta: 7.903 instead of 7.899 eV); asking for extra roots is common practice
    td.nstates = min(nstates + 4, n_occ * n_vir)
    td.conv_tol = 1e-7  # residual norm, eV
    td.max_cycle = 500
    td.kernel()
    vind, _hdiag = td.gen_vind(mf)
    a = np.asarray(vind(np.eye(n_occ * n_vir))).T  # column jb = A e_jb
    assert np.max(np.abs(a - a.T)) < 1e-10, "PySCF TDA matrix is not symmetric"
    w, v = np.linalg.eigh(0.5 * (a + a.T))
    w, v = w[:nstates], v[:, :nstates]
    davidson = np.sort(np.asarray(td.e))[:nstates]
    assert np.max(np.abs(davidson - w)) < TOL_EV, f"PySCF Davidson {davidson} vs dense {w}"
    return w, v.T.reshape(nstates, n_occ, n_vir)


def zdo_oscillator_strengths(energies: np.ndarray, x: np.ndarray, mf, coords: np.ndarray) -> np.ndarray:
    """Dipole-length f from PySCF TDA vectors with the ZDO dipole <p|r|q> = sum_mu C_mu,p C_mu,q R_mu.

    For a spin-adapted singlet with sum X^2 = 1, mu_0n = sqrt(2) sum_ia X_ia <i|r|a>;
    f = (2/3) dE |mu|^2 in atomic units (common practice). PySCF's own ``oscillator_strength()``
    would use Gaussian-orbital dipole integrals of its (here empty) basis, which is why it is not used.
    """
    n_occ = x.shape[1]
    c = mf.mo_coeff
    dip = np.einsum("mi,mx,ma->xia", c[:, :n_occ], coords, c[:, n_occ:])  # e*A
    mu = np.sqrt(2.0) * np.einsum("kia,xia->kx", x, dip) / BOHR_ANGSTROM
    return (2.0 / 3.0) * (energies / HARTREE_EV) * np.sum(mu * mu, axis=1)


def _group_sums(energies: np.ndarray, values: np.ndarray, tol: float = 1e-5):
    """Sum ``values`` over groups of (near-)degenerate energies: only such sums are basis-invariant."""
    groups, current, last = [], [], None
    for e, v in zip(energies, values):
        if last is not None and e - last > tol:
            groups.append(sum(current))
            current = []
        current.append(v)
        last = e
    groups.append(sum(current))
    return np.array(groups)


#: A few molecules also run with fixed beta (bond-order beta switched off explicitly), so that both
#: paths of the engine are checked against PySCF.
FIXED_BETA = ["butadiene", "naphthalene", "azulene", "pyridine", "Brooker's merocyanine",
              "crystal violet (cation, 25 centres)"]


@pytest.mark.parametrize("name,gamma,bond_order_beta",
                         [(m, None, None) for m in MOLECULES] + [(m, "ohno", None) for m in OHNO]
                         + [(m, None, False) for m in FIXED_BETA])
def test_scf_and_cis_match_pyscf(name, gamma, bond_order_beta):
    smiles = MOLECULES[name]
    model, res = _model_and_result(smiles, gamma, bond_order_beta)
    assert model.gamma_formula == (gamma or "mataga-nishimoto")
    assert (model.bond_order_beta is None) == (bond_order_beta is False)
    assert isinstance(res, ChromophoreResult)
    mf = pyscf_rhf(model)

    # SCF total energy: ppp e_total = E_elec + E_core; PySCF e_tot = E_elec + energy_nuc
    dev = abs(res.e_total - mf.e_tot)
    assert dev < TOL_EV, f"{name}: SCF energy ppp {res.e_total:.10f} vs PySCF {mf.e_tot:.10f} eV"
    # orbital energies too (same Fock operator => same spectrum)
    np.testing.assert_allclose(res.scf.mo_energy, mf.mo_energy, atol=TOL_EV, rtol=0)

    n_ov = model.n_occ * (model.n_centres - model.n_occ)
    k = min(N_ROOTS, n_ov)
    for singlet, states, key in ((True, res.singlets, "singlet"), (False, res.triplets, "triplet")):
        ref, x = pyscf_tda(mf, singlet, k)  # ascending: degenerate roots compared as sorted energies
        mine = np.array([s.energy_ev for s in states])
        assert len(mine) == k, f"{name}: ppp returned {len(mine)} {key}s, expected {k}"
        dev = float(np.max(np.abs(mine - ref)))
        assert dev < TOL_EV, f"{name}: {key} energies deviate by {dev:.2e} eV\nppp   {mine}\npyscf {ref}"
        if singlet:
            f_ref = zdo_oscillator_strengths(ref, x, mf, model.coords)
            f_mine = np.array([s.oscillator_strength for s in states])
            # compare per degenerate group (a degenerate pair may be any rotation of each other)
            gs_ref, gs_mine = _group_sums(ref, f_ref), _group_sums(ref, f_mine)
            dev_f = float(np.max(np.abs(gs_ref - gs_mine)))
            assert dev_f < TOL_F, f"{name}: oscillator strengths ppp {f_mine} vs PySCF-derived {f_ref}"


def test_enough_reference_molecules():
    """Issue 2 asks for >= 10 molecules including a cation, an anion, and N, O and S centres."""
    kinds = {"cation": False, "anion": False, "N": False, "O": False, "S": False}
    for smiles in MOLECULES.values():
        (sys_, _model), = build_models(mol_from_smiles(smiles), Options())
        kinds["cation"] |= sys_.charge > 0
        kinds["anion"] |= sys_.charge < 0
        for el in ("N", "O", "S"):
            kinds[el] |= el in sys_.elements
    assert len(MOLECULES) >= 12 and all(kinds.values()), kinds


# ---------------------------------------------------------------------------------------------
# Full CI (PySCF's direct_spin1 Hamiltonian, diagonalised completely) for small pi-systems
# ---------------------------------------------------------------------------------------------

def _mo_hamiltonian(model, mf):
    n = model.n_centres
    c = mf.mo_coeff
    h1 = c.T @ model.core @ c
    eri = ao2mo.kernel(zdo_eri(model.gamma), c, compact=False).reshape(n, n, n, n)
    return h1, eri


def fci_sector(model, mf, ms: int = 0):
    """Complete FCI spectrum of the model in the sector M_s = ``ms`` (eV, including E_core).

    The Hamiltonian of all determinants with n_occ + ms alpha and n_occ - ms beta electrons (RHF MO
    basis) comes from PySCF's ``pspace``, asked for as many determinants as exist, so it is the complete
    matrix; it is diagonalised densely. Returns (energies, eigenvectors, addresses, (n_alpha_strings,
    n_beta_strings)).
    """
    n = model.n_centres
    h1, eri = _mo_hamiltonian(model, mf)
    nelec = (model.n_occ + ms, model.n_occ - ms)
    na, nb = fci.cistring.num_strings(n, nelec[0]), fci.cistring.num_strings(n, nelec[1])
    addr, h = fci.direct_spin1.pspace(h1, eri, n, nelec, np=na * nb)
    assert len(addr) == na * nb
    w, v = np.linalg.eigh(h)
    if ms == 0:  # cross-check the dense ground state against PySCF's iterative FCI solver
        e0_davidson, _ = fci.direct_spin1.kernel(h1, eri, n, nelec, conv_tol=1e-12)
        assert abs(e0_davidson - w[0]) < 1e-8
    return w + model.e_core, v, addr, (na, nb)


def _multiset_difference(all_levels: np.ndarray, higher: np.ndarray, tol: float = 1e-8) -> np.ndarray:
    """Levels of ``all_levels`` (sorted) left after removing one match for each level of ``higher``."""
    out, j = [], 0
    for e in all_levels:
        if j < len(higher) and abs(e - higher[j]) < tol:
            j += 1
        else:
            out.append(e)
    assert j == len(higher), "spin sectors do not nest: a level of the higher sector has no partner"
    return np.array(out)


def fci_singlets_triplets(model, mf):
    """Exact singlet and triplet levels (eV). H commutes with S^2 and S_-, so a spin-S multiplet has
    one level in every sector |M_s| <= S (common practice): singlets are the M_s = 0 levels absent
    from M_s = 1, triplets the M_s = 1 levels absent from M_s = 2."""
    e0 = fci_sector(model, mf, 0)[0]
    e1 = fci_sector(model, mf, 1)[0]
    e2 = fci_sector(model, mf, 2)[0] if model.n_occ >= 2 and model.n_occ + 2 <= model.n_centres else []
    return _multiset_difference(e0, np.asarray(e1)), _multiset_difference(np.asarray(e1), np.asarray(e2))


def test_fci_two_site_ethylene_equals_cis():
    """Ethylene (2 centres, 2 electrons): the excited singlet of u symmetry and the triplet are each
    the only configuration of their symmetry and spin (HOMO g -> LUMO u), so FCI and CIS agree exactly:
    E_FCI = E_RHF + omega_CIS (e.g. Szabo & Ostlund, Modern Quantum Chemistry (1982), minimal-basis H2,
    ch. 4; from memory)."""
    model, res = _model_and_result("C=C")
    mf = pyscf_rhf(model)
    energies, vecs, addr, (na, nb) = fci_sector(model, mf, 0)
    assert (na, nb) == (2, 2)
    ci = np.zeros((len(energies), na * nb))
    ci[:, addr] = vecs.T
    ci = ci.reshape(-1, na, nb)  # ci[k, alpha string, beta string]; string 0 = g (HOMO), 1 = u (LUMO)
    spins = [fci.spin_op.spin_square0(ci[k], 2, (1, 1))[0] for k in range(len(energies))]
    # u-symmetry states have no weight on the closed-shell determinants |g g| and |u u|
    u_states = [k for k in range(len(energies)) if abs(ci[k, 0, 0]) < 1e-10 and abs(ci[k, 1, 1]) < 1e-10]
    assert len(u_states) == 2
    singlet_u = [energies[k] for k in u_states if abs(spins[k]) < 1e-8]
    triplet = [energies[k] for k in u_states if abs(spins[k] - 2.0) < 1e-8]
    assert len(singlet_u) == 1 and len(triplet) == 1
    assert abs(res.e_total + res.singlets[0].energy_ev - singlet_u[0]) < 1e-9
    assert abs(res.e_total + res.triplets[0].energy_ev - triplet[0]) < 1e-9
    # and the exact ground state lies below RHF (correlation energy is negative, variational principle)
    assert energies[0] < res.e_total - 1e-3


def test_fci_two_site_heteronuclear_triplet_equals_cis():
    """Formaldehyde C=O (2 centres, 2 electrons, no symmetry): the two-orbital space holds exactly one
    triplet configuration, invariant to orbital rotation, so FCI T1 = E_RHF + CIS T1 exactly (same
    argument as for H2/HeH+ in a minimal basis, Szabo & Ostlund 1982; from memory). The singlet is NOT
    equal: it mixes with the ground and doubly excited configurations, and the check confirms it."""
    model, res = _model_and_result("C=O")
    mf = pyscf_rhf(model)
    singlets, triplets = fci_singlets_triplets(model, mf)
    assert len(triplets) == 1 and len(singlets) == 3
    assert abs(res.e_total + res.triplets[0].energy_ev - triplets[0]) < 1e-9
    assert abs(res.e_total + res.singlets[0].energy_ev - singlets[1]) > 1e-4


@pytest.mark.parametrize("smiles", ["C=O", "C=C/C=C", "[CH2+]C=C", "c1ccccc1", "c1ccncc1", "c1ccsc1"])
def test_fci_bounds_cis_and_rhf(smiles):
    """Rigorous bounds from FCI, the exact solution of the same model:

    * variational principle: E_FCI(S0) <= E_RHF;
    * Hylleraas-Undheim (1930) / MacDonald (1933): the n-th eigenvalue of H in any subspace bounds the
      n-th exact eigenvalue from above. In the singlet subspace {Phi_0, singlet CSFs Phi_i^a} the
      reference does not couple to the singles (Brillouin 1934, converged RHF), so the subspace
      eigenvalues are E_RHF and E_RHF + omega_n(CIS): hence E_FCI(S_n) <= E_RHF + omega_n. Likewise in
      the triplet subspace: E_FCI(T_n) <= E_RHF + omega_n(CIS triplet).
    """
    model, res = _model_and_result(smiles)
    mf = pyscf_rhf(model)
    singlets, triplets = fci_singlets_triplets(model, mf)
    energies = fci_sector(model, mf, 0)[0]
    assert singlets[0] == energies[0]  # the exact ground state is a singlet
    assert singlets[0] < res.e_total - 1e-4  # correlation energy is negative
    tol = 1e-8
    for n, st in enumerate(res.singlets, start=1):
        assert singlets[n] <= res.e_total + st.energy_ev + tol, f"{smiles}: S{n}"
    for n, st in enumerate(res.triplets):
        assert triplets[n] <= res.e_total + st.energy_ev + tol, f"{smiles}: T{n + 1}"


def _slater_2p_pi_overlap(r_angstrom: float, zeta: float = 1.625) -> float:
    """Overlap of two 2p-pi Slater orbitals of equal exponent at distance r: S = e^-rho (1 + rho +
    2 rho^2/5 + rho^3/15), rho = zeta r / a0 (Mulliken, Rieke, Orloff & Orloff, J. Chem. Phys. 17, 1248
    (1949); from memory). Written out here independently of ppp.model.variable_beta."""
    rho = zeta * r_angstrom / BOHR_ANGSTROM
    return float(np.exp(-rho) * (1.0 + rho + 0.4 * rho ** 2 + rho ** 3 / 15.0))


@pytest.mark.parametrize("name", ["butadiene", "naphthalene", "azulene", "Brooker's merocyanine"])
def test_final_model_is_the_bond_order_beta_fixed_point(name):
    """The model ppp reports (result.model) is self-consistent: PySCF's RHF density of that model gives
    Coulson bond orders p (Coulson 1939; for a closed shell p_ij = P_ij, the density matrix element) whose
    bond lengths r = 1.520 - 0.186 p A (constants of parameters/classic.toml) and overlap-law betas
    beta_table * S(r)/S(1.397 A) are the C-C betas in the reported core matrix; non-C-C bonds keep their
    table betas. Tolerance 1e-5 eV: ten times the engine's stopping threshold on beta (1e-6 eV), fixed
    before running (the residual of a contracting fixed-point iteration is of the order of its last step)."""
    smiles = MOLECULES[name]
    model, _res = _model_and_result(smiles)
    fixed, _ = _model_and_result(smiles, bond_order_beta=False)
    assert model.bond_order_beta is not None
    mf = pyscf_rhf(model)
    dm = mf.make_rdm1()
    s_ref = _slater_2p_pi_overlap(1.397)
    n_cc = 0
    for i, j in model.bonds:
        table = fixed.core[i, j]
        if model.types[i] == "C" and model.types[j] == "C":
            n_cc += 1
            r = 1.520 - 0.186 * dm[i, j]
            expected = table * _slater_2p_pi_overlap(r) / s_ref
        else:
            expected = table
        assert model.core[i, j] == pytest.approx(expected, abs=1e-5), (name, int(i), int(j))
    assert n_cc > 0
    # bond alternation really is present (the check above is not the trivial fixed-beta case)
    cc = [model.core[i, j] for i, j in model.bonds if model.types[i] == model.types[j] == "C"]
    assert max(cc) - min(cc) > 0.05
