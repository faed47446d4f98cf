"""The in-place SCF loop of ppp.solvers.scf.iterate against its reference twin (tests/scf_reference.py,
the loop before the rewrite): the rewrite only rescales by exact powers of two and writes into the DIIS
buffers directly, so both must agree bit for bit, on real dyes and on random models (fixed seeds), with
DIIS, with level shift and damping, and with a density-dependent core."""
from __future__ import annotations

import numpy as np
import pytest
from scf_reference import DIISReference, iterate_reference

from ppp.driver import Options, build_models
from ppp.solvers import guess, scf
from ppp.structure.readers import mol_from_smiles


@pytest.fixture
def numpy_loop(monkeypatch):
    """The numpy loop even when another test has loaded numba (which switches to the kernel)."""
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)


def _model(smiles):
    (_, model), = build_models(mol_from_smiles(smiles), Options(bond_order_beta=False))
    return model


VARIANTS = [dict(), dict(use_diis=False, level_shift=1.0, damping=0.3),
            dict(use_diis=False, level_shift=0.7, damping=0.45), dict(diis_space=3)]


@pytest.mark.parametrize("smiles", ["CCN(CC)c1ccc2c(c1)oc(=O)cc2C(F)(F)F", "c1ccc(cc1)/N=N/c1ccccc1",
                                    "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1", "C1=CC=C1"])
def test_loop_equals_reference_bit_for_bit_on_dyes(numpy_loop, smiles):
    m = _model(smiles)
    p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    for kw in VARIANTS:
        for max_iter in (4, 100):
            got = scf.iterate(m.core, m.gamma, m.n_occ, p0, max_iter=max_iter, **kw)
            ref = iterate_reference(m.core, m.gamma, m.n_occ, p0, max_iter=max_iter, **kw)
            assert got[:2] == ref[:2]
            np.testing.assert_array_equal(got[2], ref[2])


@pytest.mark.parametrize("n, n_occ, seed", [(5, 2, 1), (13, 6, 2), (24, 12, 3)])
def test_loop_equals_reference_on_random_models(numpy_loop, n, n_occ, seed):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((n, n))
    core = -np.abs(a + a.T)
    g = rng.random((n, n))
    gamma = g + g.T + 6.0 * np.eye(n)
    p0 = scf.density(scf.eigh(core)[1], n_occ)
    for kw in VARIANTS:
        got = scf.iterate(core, gamma, n_occ, p0, max_iter=50, **kw)
        ref = iterate_reference(core, gamma, n_occ, p0, max_iter=50, **kw)
        assert got[:2] == ref[:2]
        np.testing.assert_array_equal(got[2], ref[2])


def test_loop_with_density_dependent_core_equals_reference(numpy_loop):
    m = _model("C=CC=CC=CC=C")
    i, j = m.bonds[:, 0], m.bonds[:, 1]

    def core_of(p):  # a beta that follows the bond order (any smooth law will do for this check)
        c = m.core.copy()
        c[i, j] = c[j, i] = m.core[i, j] * (0.9 + 0.15 * p[i, j])
        return c

    p0 = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    got = scf.iterate(m.core, m.gamma, m.n_occ, p0, max_iter=100, core_update=core_of, core_tol=1e-6)
    ref = iterate_reference(m.core, m.gamma, m.n_occ, p0, max_iter=100, core_update=core_of, core_tol=1e-6)
    assert got[0] and got[:2] == ref[:2]
    np.testing.assert_array_equal(got[2], ref[2])


def test_in_place_diis_equals_the_reference_diis():
    """push/extrapolate of the ring buffer equal the reference's, including after it wraps."""
    rng = np.random.default_rng(5)
    new, old = scf._DIIS(4), DIISReference(4)
    for k in range(9):
        f, e = rng.standard_normal((6, 6)), rng.standard_normal((6, 6)) * 0.6 ** k
        new.push(f, e)
        old.push(f, e)
        np.testing.assert_array_equal(new.b, old.b)
        if k:
            np.testing.assert_array_equal(new.extrapolate(), old.extrapolate())


def test_blas_thread_limit_is_set_and_restored():
    """blas_threads changes only the libraries that differ and restores them, also on an exception;
    threadpoolctl's own report is the outside check."""
    from threadpoolctl import threadpool_info

    from ppp.solvers.threads import _blas_libraries, blas_threads

    # the libraries loaded when ppp first limited threads (numpy's and scipy's); others loaded later
    # (by other tests' libraries) are outside the limit, as with threadpoolctl's cached controller
    paths = {lib.filepath for lib in _blas_libraries()}

    def counts():
        return sorted(i["num_threads"] for i in threadpool_info() if i["filepath"] in paths)

    before = counts()
    with blas_threads(1):
        assert set(counts()) == {1}
        with blas_threads(1):  # already in place: nothing to change
            assert set(counts()) == {1}
        with blas_threads(2):  # (OpenBLAS may cap the count at what its pool started with)
            pass
        assert set(counts()) == {1}
    assert counts() == before
    with pytest.raises(KeyError):
        with blas_threads(1):
            raise KeyError("inside")
    assert counts() == before


@pytest.mark.parametrize("smiles", ["CCN(CC)c1ccc2c(c1)oc(=O)cc2C(F)(F)F", "C[N+](C)=CC=CC=CN(C)C"])
def test_superposed_atoms_start_equals_the_fock_matrix_of_the_diagonal_density(smiles):
    """atomic_start builds F(diag(n)) from the diagonal alone: bit for bit the general Fock matrix."""
    m = _model(smiles)
    pop = guess.atomic_populations(m.core_charges, m.n_electrons)
    ref = scf.density(scf.eigh(scf.fock_matrix(m.core, m.gamma, np.diag(pop)))[1], m.n_occ)
    got = guess.atomic_start(m.core, m.gamma, m.core_charges, m.n_electrons, m.n_occ)
    np.testing.assert_array_equal(got, ref)
    assert np.trace(got) == pytest.approx(m.n_electrons, abs=1e-12)  # closed shell, right count
