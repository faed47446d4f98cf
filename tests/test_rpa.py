"""Singlets in the random-phase approximation (ppp.solvers.rpa) against PySCF's time-dependent
Hartree-Fock on the very same model Hamiltonian, and laws of the RPA.

Sources: PySCF's TDHF (``pyscf.tdscf.TDHF``; Sun et al., WIREs Comput. Mol. Sci. 8, e1340 (2018), from
memory) solves the full linear-response problem with the A and B blocks; ppp hands it the same core
matrix, gamma and electron count as in tests/test_reference_pyscf.py. Laws: RPA roots lie below the
Tamm-Dancoff (CIS) roots of the same reference for bright states, the configuration weights
X^2 - Y^2 sum to 1 (McLachlan & Ball 1964), and with B = 0 RPA reduces to CIS.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from pyscf import tdscf

import ppp
from ppp.driver import Options, build_models, solve_model
from ppp.errors import InputError
from ppp.solvers import cis as cis_solver
from ppp.solvers import rpa
from ppp.structure.readers import mol_from_smiles

# agreement demanded with PySCF, eV and dimensionless: the same as for CIS (TOL_EV, TOL_F)
from test_reference_pyscf import (TOL_EV, TOL_F, _one_thread, pyscf_rhf,  # noqa: F401 (autouse fixture)
                                  zdo_oscillator_strengths)

N_ROOTS = 8


MOLECULES = {
    "benzene": "c1ccccc1",
    "naphthalene": "c1ccc2ccccc2c1",
    "azulene": "c1ccc2cccc-2cc1",
    "pyridine": "c1ccncc1",
    "pentamethine streptocyanine": "CN(C)C=CC=CC=[N+](C)C",
    "4-nitroaniline": "Nc1ccc(cc1)[N+](=O)[O-]",
    "phenolate (anion)": "[O-]c1ccccc1",
    "crystal violet": "CN(C)c1ccc(cc1)C(=C1C=CC(C=C1)=[N+](C)C)c1ccc(cc1)N(C)C",
}


def _solve(smiles: str, **kw):
    options = Options(response="rpa", n_singlets=N_ROOTS, n_triplets=2, **kw)
    systems = build_models(mol_from_smiles(smiles), options)
    return solve_model(systems[0][1], options)


def pyscf_tdhf(mf, nstates: int) -> np.ndarray:
    """PySCF TDHF singlet energies (eV), dense: the reference is the exact diagonalisation of PySCF's
    own response operator applied to every unit vector, so round-off is the only error."""
    td = tdscf.TDHF(mf)
    td.singlet = True
    vind, _ = td.gen_vind(mf)
    n_occ = int(np.count_nonzero(mf.mo_occ > 0))
    dim = n_occ * (mf.mo_coeff.shape[1] - n_occ)
    # vind acts on [X, Y] stacked vectors and returns [(A X + B Y), -(B X + A Y)]
    m = np.asarray(vind(np.eye(2 * dim))).T
    w = np.linalg.eigvals(m).real
    return np.sort(w[w > 0])[:nstates]


@pytest.mark.parametrize("name", list(MOLECULES))
def test_rpa_matches_pyscf_tdhf(name):
    res = _solve(MOLECULES[name])
    mf = pyscf_rhf(res.model)
    ref = pyscf_tdhf(mf, N_ROOTS)
    ours = np.array([s.energy_ev for s in res.singlets])
    k = min(len(ours), len(ref))
    assert k >= min(N_ROOTS, 3)
    assert np.max(np.abs(ours[:k] - ref[:k])) < TOL_EV, f"{name}: {ours[:k]} vs PySCF TDHF {ref[:k]}"
    # PySCF's own TDHF Davidson run, with its vectors: oscillator strengths from Z = X + Y
    td = tdscf.TDHF(mf)
    td.nstates = min(N_ROOTS + 4, len(ref))
    td.conv_tol = 1e-9
    td.max_cycle = 300
    td.kernel()
    e_td = np.asarray(td.e)
    assert np.max(np.abs(e_td[:k] - ref[:k])) < TOL_EV
    z = np.array([(x + y) for x, y in td.xy])[:k] * np.sqrt(2.0)  # PySCF normalises X.X - Y.Y = 1/2
    f_ref = zdo_oscillator_strengths(e_td[:k], z, mf, res.model.coords)
    f_ours = np.array([s.oscillator_strength for s in res.singlets])[:k]
    # single roots compare one by one; degenerate levels only through their sums
    levels = np.split(np.arange(k), np.where(np.diff(ref[:k]) > 1e-5)[0] + 1)
    for lv in levels:
        assert abs(f_ours[lv].sum() - f_ref[lv].sum()) < TOL_F, f"{name}: f {f_ours[lv]} vs {f_ref[lv]}"


@pytest.mark.parametrize("smiles", ["c1ccc2ccccc2c1", "CN(C)c1ccc(cc1)/N=N/c1ccccc1", "c1ccc2cc3ccccc3cc2c1",
                                    # a long streptocyanine: its Davidson once lost the orthonormality of
                                    # the subspace, so that the projected A - B looked indefinite
                                    "CN(C)/C=C/C=C/C=C/C=C/C=C/C=C/C=[N+](C)C"])
def test_dense_and_iterative_rpa_agree(smiles):
    res = ppp.compute(smiles, options=Options(response="rpa", n_triplets=0))
    c = res.chromophores[0]
    args = (c.scf.mo_energy, c.scf.mo_coeff, c.model.gamma, c.model.n_occ, 10)
    d = rpa.kernel(*args, solver="dense", dipole_coords=c.model.coords)
    it = rpa.kernel(*args, solver="iterative", dipole_coords=c.model.coords)
    assert np.max(np.abs(d.energies - it.energies)) < 1e-8
    # weights X^2 - Y^2 sum to one per root (normalisation Z.(X - Y) = 1)
    for r in (d, it):
        assert np.allclose(r.weights.reshape(len(r.energies), -1).sum(axis=1), 1.0, atol=1e-8)


def test_rpa_lies_below_cis_for_bright_states_and_reduces_to_cis_without_b():
    """Law of the model: for a stable reference the lowest RPA root lies below the lowest CIS root
    (Thouless 1961: the RPA correlation lowers excitation energies; for the bright HOMO->LUMO state of
    a cyanine the lowering is large). With B = 0 the dense RPA equations are the CIS equations."""
    res = ppp.compute("CN(C)C=CC=CC=[N+](C)C", options=Options(n_triplets=0))
    c = res.chromophores[0]
    e_cis = res.singlets[0].energy_ev
    r = rpa.kernel(c.scf.mo_energy, c.scf.mo_coeff, c.model.gamma, c.model.n_occ, 3)
    assert r.energies[0] < e_cis - 0.05
    # B = 0: A - B = A + B = A, so w^2 = eig(A)^2
    a = cis_solver.cis_matrix(c.scf.mo_energy, c.scf.mo_coeff, c.model.gamma, c.model.n_occ, 1)
    chol = np.linalg.cholesky(a)
    w = np.sqrt(np.linalg.eigvalsh(chol.T @ a @ chol))
    assert np.allclose(w[:5], np.linalg.eigvalsh(a)[:5], atol=1e-10)


def test_benzene_degenerate_bright_pair_and_dark_states():
    """Benzene (D6h): the lowest two singlets are dark (B2u, B1u) and the bright E1u level is a
    degenerate pair (symmetry, common practice); RPA keeps all of that."""
    res = ppp.compute("c1ccccc1", options=Options(response="rpa", n_triplets=0))
    s = res.singlets
    assert s[0].oscillator_strength < 1e-8 and s[1].oscillator_strength < 1e-8
    bright = [x for x in s if x.oscillator_strength > 0.1]
    assert len(bright) == 2 and abs(bright[0].energy_ev - bright[1].energy_ev) < 1e-8
    assert abs(bright[0].oscillator_strength - bright[1].oscillator_strength) < 1e-8


def test_triplets_stay_cis_and_options_are_recorded():
    smi = "c1ccc2ccccc2c1"
    cis = ppp.compute(smi)
    r = ppp.compute(smi, options=Options(response="rpa"))
    assert [t.energy_ev for t in r.triplets] == pytest.approx([t.energy_ev for t in cis.triplets], abs=1e-12)
    assert r.options.response == "rpa"
    assert "singlets RPA" in r.table()
    assert r.to_dict()["options"]["response"] == "rpa"


def test_unknown_response_is_a_one_line_input_error():
    with pytest.raises(InputError, match="unknown response method 'tddft'; valid: cis, rpa"):
        Options(response="tddft")


def test_unstable_reference_raises_rpa_instability():
    """A saddle-point reference (square cyclobutadiene's D4h SCF with fixed beta, before following; the
    real-rotation Hessian has a negative eigenvalue, Seeger & Pople 1977) must make RPA refuse, not
    return numbers. Its stable, bond-alternating solution has a zero-frequency RPA mode (the two
    rectangular forms are degenerate, a Goldstone-type mode, Thouless 1960): refused as well."""
    options = Options(bond_order_beta=False, n_singlets=3, n_triplets=0)
    model = build_models(mol_from_smiles("C1=CC=C1"), options)[0][1]
    from ppp.solvers import scf as scf_solver
    sym = scf_solver.kernel(model.core, model.gamma, model.n_occ)
    from ppp.solvers import stability
    assert stability.lowest_mode(sym.mo_energy, sym.mo_coeff, model.gamma, model.n_occ)[0] < -1.0
    with pytest.raises(rpa.RPAInstabilityError):
        rpa.kernel(sym.mo_energy, sym.mo_coeff, model.gamma, model.n_occ, 3, solver="dense")
    with pytest.raises(rpa.RPAInstabilityError):
        rpa.kernel(sym.mo_energy, sym.mo_coeff, model.gamma, model.n_occ, 1, solver="iterative")
    broken = scf_solver.kernel(model.core, model.gamma, model.n_occ, dens0=np.eye(4))
    assert broken.e_elec < sym.e_elec - 0.5
    # A - B has a zero eigenvalue here: round-off decides whether its Cholesky factor fails or the
    # root comes out as ~1e-7 eV; both are refused
    with pytest.raises(rpa.RPAInstabilityError, match="zero-frequency|not positive definite"):
        rpa.kernel(broken.mo_energy, broken.mo_coeff, model.gamma, model.n_occ, 3, solver="dense")
    # the driver follows the instability (or refuses the molecule), it never reports RPA numbers
    # from the saddle point
    try:
        res = solve_model(model, replace(options, response="rpa"))
    except ppp.PPPError as err:
        assert "unstable" in str(err)
        return
    assert all(s.energy_ev > 1e-3 for s in res.singlets)
    assert any("singlets are CIS values" in w for w in res.warnings) or res.singlets[0].energy_ev > 0.1


def test_rpa_with_a_solvent_is_refused_in_one_line():
    # the solvent's state-specific term (ppp.model.solvent) is built on CIS states
    with pytest.raises(InputError, match="use response 'cis' with a solvent"):
        Options(response="rpa", solvent="ethanol")
    assert Options(response="rpa", solvent="gas").response == "rpa"  # gas phase is no solvent
