"""Bond-order-dependent beta: the published relations, reduction to fixed beta, a hand-worked two-centre
case, and failures that are reported."""
from __future__ import annotations

import numpy as np
import pytest

import ppp
from ppp.errors import ConvergenceError, ParameterError
from ppp.model import params
from ppp.model import variable_beta as vb
from ppp.model.hamiltonian import gamma_matrix
from ppp.solvers import scf
from ppp.units import COULOMB_EV_ANGSTROM

from conftest import model_of


def test_slater_overlap_of_carbon_pi_orbitals():
    # 2p pi - 2p pi overlap at the benzene distance with zeta = 1.625: about 0.25 (Mulliken, Rieke,
    # Orloff & Orloff 1949 tables; from memory), tol 0.01
    s = vb.slater_pi_overlap(1.397, 1.625)
    assert abs(s - 0.245) < 0.01
    # falls monotonically with distance (law of the formula)
    r = np.linspace(1.2, 1.6, 9)
    assert np.all(np.diff(vb.slater_pi_overlap(r, 1.625)) < 0)


def test_bond_length_bond_order_relation():
    st = vb.BondOrderBeta()
    # r = 1.520 - 0.186 p: ethylene p = 1 -> 1.334 A, benzene p = 2/3 -> 1.396 A (common practice)
    assert vb.bond_length(1.0, st) == pytest.approx(1.334, abs=1e-12)
    assert vb.bond_length(2 / 3, st) == pytest.approx(1.396, abs=1e-12)
    assert vb.beta_factor(st.reference_length, st) == pytest.approx(1.0, abs=1e-14)
    ex = vb.BondOrderBeta(law="exponential", decay_length=0.3)
    assert vb.beta_factor(1.497, ex) == pytest.approx(np.exp(-0.1 / 0.3), rel=1e-12)


def _classic_without_bond_order_table() -> str:
    """classic.toml's text with its [bond_order_beta] table cut out (the table is one block of lines
    ending at a blank line)."""
    text = params.load("classic").text
    start = text.index("[bond_order_beta]\n")
    end = text.index("\n\n", start)
    return text[:start] + text[end + 2:]


def test_switched_off_reproduces_fixed_beta(tmp_path):
    # classic has bond-order beta on; the same set with its [bond_order_beta] table removed is the
    # fixed-beta model, which the explicit switch must reproduce exactly
    p = tmp_path / "classic_fixed.toml"
    p.write_text(_classic_without_bond_order_table())
    assert params.load(str(p)).bond_order_beta_enabled is False
    smi = "C=CC=CC=CC=C"
    off = ppp.compute(smi, bond_order_beta=False, n_triplets=2)
    fixed = ppp.compute(smi, parameters=str(p), n_triplets=2)
    on = ppp.compute(smi, n_triplets=2)  # the default: bond-order beta on
    assert [s.energy_ev for s in off.states] == pytest.approx([s.energy_ev for s in fixed.states], abs=1e-12)
    assert abs(on.s1.energy_ev - off.s1.energy_ev) > 0.05


def test_zero_slope_scheme_reduces_to_fixed_beta():
    # with r independent of p and equal to r_ref every beta keeps its table value: the iteration must
    # give exactly the fixed-beta SCF
    m = model_of("CN(C)c1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]")
    st = vb.BondOrderBeta(length_slope=0.0, length_intercept=1.397, reference_length=1.397)
    res = vb.iterate(m.core, m.gamma, m.n_occ, m.types, m.bonds, st, scf.kernel)
    ref = scf.kernel(m.core, m.gamma, m.n_occ)
    assert np.allclose(res.core, m.core, atol=1e-14)
    assert np.allclose(res.scf.mo_energy, ref.mo_energy, atol=1e-8)


def test_two_centre_hand_worked_case():
    # ethylene, 2 electrons: P_12 = 1 for any beta, so p = 1, r = 1.520 - 0.186 = 1.334 A and
    # beta = beta_CC S(1.334) / S(1.397). CIS by hand (Pariser & Parr 1953 two-centre case):
    #   E(S1) = -2 beta + (g11 - g12) / 2,   E(T1) = -2 beta - (g11 - g12) / 2
    classic = params.load("classic")
    b0, u = classic.beta[("C", "C")], classic.types["C"].u_ev
    beta = b0 * vb.slater_pi_overlap(1.334, 1.625) / vb.slater_pi_overlap(1.397, 1.625)
    r = classic.bond_length_angstrom  # coordinates stay the idealised ones
    g12 = COULOMB_EV_ANGSTROM / (r + 2 * COULOMB_EV_ANGSTROM / (2 * u))  # Mataga-Nishimoto
    res = ppp.compute("C=C", bond_order_beta=True, n_singlets=1, n_triplets=1)
    assert res.s1.energy_ev == pytest.approx(-2 * beta + 0.5 * (u - g12), abs=1e-8)
    assert res.t1.energy_ev == pytest.approx(-2 * beta - 0.5 * (u - g12), abs=1e-8)
    assert res.chromophores[0].model.core[0, 1] == pytest.approx(beta, abs=1e-10)
    # and the fixed scheme gives the same formula with the table beta
    fixed = ppp.compute("C=C", bond_order_beta=False, n_singlets=1, n_triplets=0)
    assert fixed.s1.energy_ev == pytest.approx(-2 * b0 + 0.5 * (u - g12), abs=1e-8)
    assert np.allclose(gamma_matrix(res.chromophores[0].model.coords, np.array([u, u]))[0, 1], g12)


def test_self_consistency_of_final_betas():
    res = ppp.compute("C=CC=CC=CC=C", bond_order_beta=True, n_singlets=1, n_triplets=0)
    c = res.chromophores[0]
    st = c.model.bond_order_beta
    b0 = params.load("classic").beta[("C", "C")]
    i, j = c.model.bonds.T
    expect = b0 * vb.beta_factor(vb.bond_length(c.scf.dens[i, j], st), st)
    assert np.allclose(c.model.core[i, j], expect, atol=1e-5)
    # alternation: the terminal (double) bond gets a larger |beta| than the central-side single bond
    assert abs(c.model.core[0, 1]) > abs(b0) > abs(c.model.core[1, 2])


def test_iteration_failure_is_reported():
    m = model_of("C=CC=CC=CC=C")
    st = vb.BondOrderBeta(max_cycles=1)
    with pytest.raises(ConvergenceError, match="did not settle"):
        vb.iterate(m.core, m.gamma, m.n_occ, m.types, m.bonds, st, scf.kernel)


def test_bad_settings_rejected(tmp_path):
    with pytest.raises(ParameterError, match="law"):
        vb.BondOrderBeta(law="linear")
    text = _classic_without_bond_order_table() + '\n[bond_order_beta]\nenabled = true\npairs = ["C-Xx"]\n'
    p = tmp_path / "bad.toml"
    p.write_text(text)
    with pytest.raises(ParameterError, match="undefined type"):
        params.load(str(p))
    p.write_text(_classic_without_bond_order_table() + '\n[bond_order_beta]\nslope = 1\n')
    with pytest.raises(ParameterError, match="unknown key"):
        params.load(str(p))
