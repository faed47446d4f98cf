"""Transition and difference densities, and the reference level of the orbital diagram.

Laws checked: the transition density integrates to zero and its first moment is the transition dipole
that ppp.compute reports (sum_mu rho_mu R_mu = mu_0n); the difference density integrates to zero and, for a
pure HOMO->LUMO excitation, equals |C_LUMO|^2 - |C_HOMO|^2; the pairing theorem for alternant
hydrocarbons in PPP-SCF (Coulson & Rushbrooke 1940; McLachlan 1959): orbital energies pair symmetrically
about -I_C + gamma_CC/2, the level used as "non-bonding" reference.
"""
import numpy as np
import pytest

import ppp
from ppp.spectra import density, sources


@pytest.fixture(scope="module")
def dye():
    return ppp.compute("CN(C)c1ccc(cc1)/N=N/c1ccccc1", n_triplets=0)


def test_transition_density_reproduces_transition_dipoles(dye):
    c = dye.chromophores[0]
    for k, st in enumerate(c.singlets):
        rho = density.transition_density(c.scf.mo_coeff, c.model.n_occ, c.singlet_amplitudes[k])
        assert rho.sum() == pytest.approx(0.0, abs=1e-12)
        assert rho @ c.model.coords == pytest.approx(np.array(st.transition_dipole), abs=1e-10)


def test_difference_density_conserves_charge_and_matches_pure_excitation(dye):
    c = dye.chromophores[0]
    n_occ = c.model.n_occ
    for x in c.singlet_amplitudes:
        assert density.difference_density(c.scf.mo_coeff, n_occ, x).sum() == pytest.approx(0.0, abs=1e-12)
    pure = np.zeros_like(c.singlet_amplitudes[0])
    pure[n_occ - 1, 0] = 1.0
    d = density.difference_density(c.scf.mo_coeff, n_occ, pure)
    expected = c.scf.mo_coeff[:, n_occ] ** 2 - c.scf.mo_coeff[:, n_occ - 1] ** 2
    assert d == pytest.approx(expected, abs=1e-14)


@pytest.mark.parametrize("smiles", ["c1ccccc1", "c1ccc2ccccc2c1", "C=CC=CC=C"])
def test_alternant_orbitals_pair_about_the_reference_level(smiles):
    res = ppp.compute(smiles, n_triplets=0, n_singlets=2)
    c = res.chromophores[0]
    ref, text = density.reference_level(c.model.types, c.model.ip, c.model.u)
    e = c.scf.mo_energy
    assert (e + e[::-1]) / 2 == pytest.approx(np.full_like(e, ref), abs=1e-6)
    classes = density.classify_orbitals(e, ref)
    n_occ = c.model.n_occ
    assert set(classes[:n_occ]) == {"bonding"} and set(classes[n_occ:]) == {"antibonding"}
    assert "I_C" in text


def test_array_hook_and_result_source_agree(dye):
    src = sources.from_result(dye)
    hook = sources.from_arrays("dye", src.sticks.energy_ev, src.sticks.f, src.sticks.labels)
    assert hook.sticks.energy_ev == pytest.approx(src.sticks.energy_ev)
    assert hook.chromophores == ()
    with pytest.raises(ppp.InputError, match="dye"):
        sources.from_arrays("dye", [3.0, -1.0], [0.1, 0.2])
