"""The numba SCF loop against its slow reference twin, the numpy loop of ppp.solvers.scf.iterate (the
equations of Pople 1953 and Pulay 1980 as written there), on dyes and random models with fixed seeds."""
from __future__ import annotations

import numpy as np
import pytest

from ppp.solvers import kernels, scf


def _sym(rng, n):
    a = rng.standard_normal((n, n))
    return a + a.T


def _model(smiles):
    from ppp.driver import Options, build_models
    from ppp.structure.readers import mol_from_smiles

    (_, model), = build_models(mol_from_smiles(smiles), Options(bond_order_beta=False))
    return model


def _numpy_loop(monkeypatch, *args, **kw):
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)
    try:
        return scf.iterate(*args, **kw)
    finally:
        monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 1)


def test_scf_loop_kernel_is_used_once_numba_is_loaded(monkeypatch):
    kernels.warm_up()
    m = _model("O=C1C=CC(=O)c2ccccc21")
    calls = []
    real = kernels.scf_loop
    monkeypatch.setattr(kernels, "scf_loop", lambda *a, **k: calls.append(1) or real(*a, **k))
    res = scf.kernel(m.core, m.gamma, m.n_occ)
    assert res.converged and calls  # the plain DIIS attempt ran in the kernel
    calls.clear()
    scf.iterate(m.core, m.gamma, m.n_occ, res.dens, max_iter=5, use_diis=False, level_shift=1.0, damping=0.3)
    assert not calls  # level shift and damping stay on the numpy loop


@pytest.mark.parametrize("smiles", [
    "O=C1C=CC(=O)c2ccccc21",                      # naphthoquinone, 12 centres
    "CN(C)c1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]",  # push-pull azo dye, 18 centres
    "C1=CC=C1",                                   # square cyclobutadiene: degenerate HOMO/LUMO
    "c1ccc2cc3cc4ccccc4cc3cc2c1",                 # tetracene
])
def test_scf_loop_kernel_equals_the_numpy_loop(monkeypatch, smiles):
    """The compiled loop against its reference, the numpy loop of ppp.solvers.scf.iterate, from the
    superposed-atoms start and from the core-Hamiltonian start: same outcome and iteration count, and
    densities and energies equal to round-off (the two sum in different orders)."""
    from ppp.solvers import guess

    kernels.warm_up()
    m = _model(smiles)
    c0 = scf.eigh(m.core)[1]
    starts = [guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ),
              scf.density(c0, m.n_occ)]
    for p0 in starts:
        for max_iter in (3, 100):  # a run cut short (not converged) and a full one
            ok_ref, it_ref, p_ref = _numpy_loop(monkeypatch, m.core, m.gamma, m.n_occ, p0, max_iter=max_iter)
            ok, it, p = kernels.scf_loop(m.core, m.gamma, m.n_occ, p0, max_iter, 8, scf.CONV_TOL_ENERGY,
                                         scf.CONV_TOL_GRAD)
            assert (ok, it) == (ok_ref, it_ref)
            # a run cut short is not at a fixed point, and at the saddle point of square cyclobutadiene
            # the iteration amplifies round-off (measured 1.6e-8 after 3 steps); converged: 6e-11
            assert np.max(np.abs(p - p_ref)) <= (1e-9 if ok else 1e-6)
            if ok:
                e_ref = scf.finish(m.core, m.gamma, m.n_occ, p_ref, True, it, "diis")
                e_jit = scf.finish(m.core, m.gamma, m.n_occ, p, True, it, "diis")
                assert abs(e_jit.e_elec - e_ref.e_elec) <= 1e-10
                assert np.max(np.abs(e_jit.mo_energy - e_ref.mo_energy)) <= 1e-10


@pytest.mark.parametrize("n, n_occ, seed", [(6, 3, 7), (11, 5, 8), (16, 8, 9)])
def test_scf_loop_kernel_equals_the_numpy_loop_on_random_models(monkeypatch, n, n_occ, seed):
    """Random symmetric core and positive gamma (fixed seeds), small DIIS space so that the ring buffer
    wraps: the kernel and the numpy loop agree whether or not the SCF converges."""
    kernels.warm_up()
    rng = np.random.default_rng(seed)
    core = -np.abs(_sym(rng, n))
    gamma = np.abs(_sym(rng, n)) + 5.0 * np.eye(n)
    p0 = scf.density(scf.eigh(core)[1], n_occ)
    for space in (3, 8):
        ref = _numpy_loop(monkeypatch, core, gamma, n_occ, p0, max_iter=60, diis_space=space)
        got = kernels.scf_loop(core, gamma, n_occ, p0, 60, space, scf.CONV_TOL_ENERGY, scf.CONV_TOL_GRAD)
        assert got[:2] == ref[:2]
        assert np.max(np.abs(got[2] - ref[2])) <= 1e-8 * max(1.0, float(np.max(np.abs(ref[2]))))


def test_scf_with_kernel_equals_scf_with_numpy(monkeypatch):
    """The whole SCF (start, loop, final step) with and without numba loaded gives one answer."""
    kernels.warm_up()
    m = _model("O=C1C=CC(=O)c2ccccc21")
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)
    a = scf.kernel(m.core, m.gamma, m.n_occ)
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 1)
    b = scf.kernel(m.core, m.gamma, m.n_occ)
    assert a.converged and b.converged and a.iterations == b.iterations
    assert b.e_elec == pytest.approx(a.e_elec, abs=1e-10)
    np.testing.assert_allclose(b.mo_energy, a.mo_energy, rtol=0, atol=1e-10)
    np.testing.assert_allclose(b.dens, a.dens, rtol=0, atol=1e-9)


def test_scf_loop_kernel_reports_non_convergence(monkeypatch):
    """A budget too small is reported as not converged (never silently accepted), by both loops."""
    kernels.warm_up()
    m = _model("C=CC=CC=CC=CC=C")
    res = scf.kernel(m.core, m.gamma, m.n_occ, max_iter=3, fallback=False)
    assert not res.converged
    ok, it, _ = kernels.scf_loop(m.core, m.gamma, m.n_occ, res.dens, 2, 8, 1e-11, 1e-9)
    assert not ok and it == 2


@pytest.mark.parametrize("law", ["overlap", "exponential"])
@pytest.mark.parametrize("smiles", ["C=CC=CC=CC=CC=C", "CN(C)c1ccc(cc1)/C=C/c1ccc(cc1)[N+](=O)[O-]"])
def test_scf_loop_kernel_with_bond_order_beta_equals_the_numpy_loop(monkeypatch, law, smiles):
    """The joint SCF / bond-order-beta run (ppp.model.variable_beta) in the kernel, against the numpy loop
    calling CoreOfBondOrders at every iteration: same iteration count, densities and final betas."""
    from ppp.model import variable_beta as vb
    from ppp.solvers import guess

    kernels.warm_up()
    m = _model(smiles)
    st = vb.BondOrderBeta(law=law)
    mask = vb.variable_bonds(m.types, m.bonds, st)
    i, j = m.bonds[mask, 0], m.bonds[mask, 1]
    core_of = vb.CoreOfBondOrders(m.core.copy(), i, j, m.core[i, j].copy(), st)
    assert core_of.kernel_form is not None
    p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    kw = dict(max_iter=100, core_update=core_of, core_tol=st.tol_ev)
    ref = _numpy_loop(monkeypatch, m.core, m.gamma, m.n_occ, p0, **kw)
    got = scf.iterate(m.core, m.gamma, m.n_occ, p0, **kw)  # numba is loaded: the kernel runs
    assert ref[0] and got[:2] == ref[:2]
    assert np.max(np.abs(got[2] - ref[2])) <= 1e-9
    assert np.max(np.abs(core_of(got[2]) - core_of(ref[2]))) <= 1e-9


def test_reaction_field_core_stays_on_the_numpy_loop():
    """A density-dependent diagonal (solvent reaction field) has no kernel form: the numpy loop runs it."""
    from ppp.model import variable_beta as vb

    m = _model("C=CC=C")
    st = vb.BondOrderBeta()
    i, j = m.bonds[:, 0], m.bonds[:, 1]
    core_of = vb.CoreOfBondOrders(m.core.copy(), i, j, m.core[i, j].copy(), st, np.diagonal(m.core).copy(),
                                  lambda p: 0.01 * np.diagonal(p))
    assert core_of.kernel_form is None


@pytest.mark.parametrize("bond_order_beta", [False, True])
def test_non_convergence_with_the_kernel_is_an_error_not_numbers(bond_order_beta):
    """With numba loaded (the kernel runs), an SCF budget too small still ends in ConvergenceError."""
    import ppp

    kernels.warm_up()
    with pytest.raises(ppp.ConvergenceError, match="did not converge"):
        ppp.compute("C=CC=CC=CC=C", max_iter=1, bond_order_beta=bond_order_beta)
