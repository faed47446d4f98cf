"""numba kernels against their slow reference twins, on random inputs with fixed seeds, and against the
Fock matrix of the SCF module (the equations of Pople 1953 as written in ppp.solvers.scf)."""
from __future__ import annotations

import numpy as np
import pytest

from ppp.solvers import kernels, scf


def _sym(rng, n):
    a = rng.standard_normal((n, n))
    return a + a.T


@pytest.mark.parametrize("n, seed", [(1, 0), (2, 1), (7, 2), (26, 3), (64, 4), (150, 5)])
def test_fock_energy_equals_reference_twin(n, seed):
    rng = np.random.default_rng(seed)
    core, gamma, dens = _sym(rng, n), np.abs(_sym(rng, n)), _sym(rng, n)
    f_ref, e_ref = kernels.fock_energy_reference(core, gamma, dens)
    f_jit, e_jit = kernels.fock_energy(core, gamma, dens)
    scale = max(1.0, float(np.max(np.abs(f_ref))))
    assert np.max(np.abs(f_jit - f_ref)) <= 1e-13 * scale * n
    assert abs(e_jit - e_ref) <= 1e-12 * max(1.0, abs(e_ref)) * n


def test_reference_twin_is_the_scf_fock_matrix():
    rng = np.random.default_rng(11)
    core, gamma, dens = _sym(rng, 12), np.abs(_sym(rng, 12)), _sym(rng, 12)
    f_ref, e_ref = kernels.fock_energy_reference(core, gamma, dens)
    np.testing.assert_allclose(f_ref, scf.fock_matrix(core, gamma, dens), rtol=0, atol=1e-13)
    assert e_ref == pytest.approx(scf.electronic_energy(core, f_ref, dens), abs=1e-12)


def test_fock_energy_accepts_non_contiguous_views():
    rng = np.random.default_rng(12)
    big = _sym(rng, 20)
    core = big[::2, ::2]  # a strided view
    gamma, dens = np.abs(_sym(rng, 10)), _sym(rng, 10)
    f_ref, e_ref = kernels.fock_energy_reference(core, gamma, dens)
    f_jit, e_jit = kernels.fock_energy(core, gamma, dens)
    np.testing.assert_allclose(f_jit, f_ref, rtol=0, atol=1e-12)
    assert e_jit == pytest.approx(e_ref, abs=1e-11)


def test_fock_energy_rejects_mismatched_shapes():
    rng = np.random.default_rng(13)
    with pytest.raises(ValueError, match="N x N"):
        kernels.fock_energy(_sym(rng, 4), _sym(rng, 5), _sym(rng, 4))


def test_scf_with_kernel_equals_scf_with_numpy(monkeypatch):
    """The SCF switches to the kernel from JIT_MIN_CENTRES on; forcing either path gives one answer."""
    from ppp.driver import build_models
    from ppp.structure.readers import mol_from_smiles

    (_, model), = build_models(mol_from_smiles("O=C1C=CC(=O)c2ccccc21"))
    kernels.warm_up()
    assert scf.fock_builder(10**6) is kernels.fock_energy
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)
    a = scf.kernel(model.core, model.gamma, model.n_occ)
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 1)
    b = scf.kernel(model.core, model.gamma, model.n_occ)
    assert a.converged and b.converged
    assert a.e_elec == pytest.approx(b.e_elec, abs=1e-9)
    np.testing.assert_allclose(a.mo_energy, b.mo_energy, atol=1e-8)
