"""Matrix-free CIS (sigma-vectors + Davidson) against the dense CIS matrix and against PySCF solving the
same model Hamiltonian (RHF + TDA with a custom Hamiltonian, the reference library named in the brief).

Tolerances: energies 1e-8 eV and oscillator strengths 1e-6 between the two solvers (the targets of the
speed issue); 1e-6 eV against PySCF (its Davidson converges to 1e-9 Hartree-equivalent by default in
our eV-valued matrices, so the comparison is limited by its tolerance, not ours).
"""
from __future__ import annotations

import numpy as np
import pytest

from ppp.driver import Options, build_models, compute
from ppp.errors import ConvergenceError, InputError, TooLargeError
from ppp.solvers import cis, cis_iterative, eigen, scf
from ppp.structure.readers import mol_from_smiles

CORONENE = "c1cc2ccc3ccc4ccc5ccc6ccc1c7c2c3c4c5c67"
TRIPHENYLENE = "c1ccc2c(c1)c1ccccc1c1ccccc21"
MEROCYANINE = "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1"
STILBAZOLIUM = "CN(C)c1ccc(cc1)/C=C/C=C/c1ccc(cc1)/C=C/c1cc[n+](C)cc1"
AZULENE = "c1ccc2cccc2cc1"


def _model(smiles):
    (_, model), = build_models(mol_from_smiles(smiles))
    res = scf.kernel(model.core, model.gamma, model.n_occ)
    assert res.converged
    return model, res


@pytest.mark.parametrize("smiles", [AZULENE, MEROCYANINE])
@pytest.mark.parametrize("multiplicity", [1, 3])
def test_sigma_equals_dense_matrix_times_vectors(smiles, multiplicity):
    """A X from MO coefficients and gamma equals the explicit matrix (Foresman et al. 1992) times X."""
    model, res = _model(smiles)
    o, v = model.n_occ, model.n_centres - model.n_occ
    x = np.random.default_rng(7).standard_normal((5, o, v))
    a = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, multiplicity)
    ref = (a @ x.reshape(5, -1).T).T.reshape(5, o, v)
    got = cis_iterative.sigma(res.mo_energy, res.mo_coeff, model.gamma, o, x, multiplicity)
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-11)


def test_sigma_chunking_gives_the_same_product(monkeypatch):
    model, res = _model(AZULENE)
    o, v = model.n_occ, model.n_centres - model.n_occ
    x = np.random.default_rng(8).standard_normal((7, o, v))
    whole = cis_iterative.sigma(res.mo_energy, res.mo_coeff, model.gamma, o, x, 1)
    monkeypatch.setattr(cis_iterative, "CHUNK_BYTES", 1)  # one vector per chunk
    np.testing.assert_allclose(cis_iterative.sigma(res.mo_energy, res.mo_coeff, model.gamma, o, x, 1), whole,
                               rtol=0, atol=1e-12)


def _levels(energies, tol=cis.DEGENERACY_TOL):
    """Index ranges of the degenerate levels that are complete within the roots given."""
    out, start = [], 0
    for k in range(1, len(energies) + 1):
        if k == len(energies) or energies[k] - energies[k - 1] >= tol:
            out.append((start, k))
            start = k
    return out[:-1] if out else out  # the last level may be cut by the number of roots


@pytest.mark.parametrize("smiles, n_states", [
    ("c1ccccc1", 5),  # D6h: degenerate E levels (law of symmetry)
    ("c1ccc2ccccc2c1", 10),
    (AZULENE, 10),
    (TRIPHENYLENE, 10),  # D3h: degenerate pairs
    (CORONENE, 10),  # D6h: degenerate pairs
    (MEROCYANINE, 10),
    (STILBAZOLIUM, 10),
])
def test_iterative_equals_dense_through_the_driver(smiles, n_states):
    opts = dict(n_singlets=n_states, n_triplets=n_states)
    dense = compute(smiles, cis_solver="dense", **opts).chromophores[0]
    itr = compute(smiles, cis_solver="iterative", **opts).chromophores[0]
    for mult, a, b, xa, xb in ((1, dense.singlets, itr.singlets, dense.singlet_amplitudes, itr.singlet_amplitudes),
                               (3, dense.triplets, itr.triplets, dense.triplet_amplitudes, itr.triplet_amplitudes)):
        ea = np.array([s.energy_ev for s in a])
        eb = np.array([s.energy_ev for s in b])
        assert len(ea) == len(eb) == n_states
        np.testing.assert_allclose(eb, ea, rtol=0, atol=1e-8)
        fa = np.array([s.oscillator_strength for s in a])
        fb = np.array([s.oscillator_strength for s in b])
        np.testing.assert_allclose(fb, fa, rtol=0, atol=1e-6)
        # each complete level spans the same space: equal projectors sum_n |X_n><X_n|
        for lo, hi in _levels(ea):
            pa = xa[lo:hi].reshape(hi - lo, -1)
            pb = xb[lo:hi].reshape(hi - lo, -1)
            assert np.max(np.abs(pa.T @ pa - pb.T @ pb)) < 1e-6


@pytest.mark.parametrize("smiles", ["c1ccccc1", CORONENE, TRIPHENYLENE])
def test_degenerate_levels_come_out_as_exact_pairs(smiles):
    """Molecules with a threefold or sixfold axis have doubly degenerate E states (law of symmetry):
    the iterative solver must return both members, equal to 1e-8 eV."""
    model, res = _model(smiles)
    o, v = model.n_occ, model.n_centres - model.n_occ
    k = min(8, o * v - 1)
    w = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, k, 1).energies
    gaps = np.diff(w)
    n_pairs = int(np.sum(gaps < 1e-8))
    assert n_pairs >= 2
    dense = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, k, 1, solver="dense").energies
    np.testing.assert_allclose(w, dense, rtol=0, atol=1e-8)


def test_davidson_on_a_matrix_with_known_degenerate_spectrum():
    """Q diag(lambda) Q^T with repeated eigenvalues: Davidson gives the lowest ones exactly."""
    rng = np.random.default_rng(3)
    lam = np.array([1.0, 1.0, 1.0, 2.0, 2.5, 2.5] + list(np.linspace(3.0, 30.0, 194)))
    q, _ = np.linalg.qr(rng.standard_normal((200, 200)))
    a = (q * lam) @ q.T
    w, x, _, _ = cis_iterative.davidson(lambda rows: rows @ a, np.diag(a).copy(), 6, tol=1e-10,
                                        rng=np.random.default_rng(4))
    np.testing.assert_allclose(w, lam[:6], rtol=0, atol=1e-10)
    np.testing.assert_allclose(x @ x.T, np.eye(6), atol=1e-10)


def test_davidson_reports_non_convergence():
    rng = np.random.default_rng(5)
    a = rng.standard_normal((300, 300))
    a = a + a.T
    with pytest.raises(ConvergenceError, match="did not converge"):
        cis_iterative.davidson(lambda rows: rows @ a, np.diag(a).copy(), 4, max_iter=2)


def test_davidson_reports_an_exhausted_subspace():
    """A tolerance no residual can meet (0): once the subspace spans the whole space no new direction is
    left (no restart: ``keep`` is the whole space), and the solver says so instead of iterating on or
    returning unconverged roots."""
    rng = np.random.default_rng(6)
    a = rng.standard_normal((12, 12))
    a = a + a.T + np.diag(3.0 * np.arange(12))
    with pytest.raises(ConvergenceError, match="no new search direction"):
        cis_iterative.davidson(lambda rows: rows @ a, np.diag(a).copy(), 2, tol=0.0, max_space=12, keep=12,
                               max_iter=500, rng=np.random.default_rng(1))


def test_iterative_agrees_with_pyscf_tda_on_the_same_hamiltonian():
    """PySCF RHF + TDA with our h and gamma as a custom Hamiltonian (eri[i,i,j,j] = gamma_ij)."""
    pyscf = pytest.importorskip("pyscf")
    from pyscf import ao2mo, gto, scf as pscf, tdscf

    model, res = _model(CORONENE)
    n = model.n_centres
    mol = gto.M(verbose=0)
    mol.nelectron = model.n_electrons
    mol.incore_anyway = True
    mf = pscf.RHF(mol)
    mf.get_hcore = lambda *a: model.core
    mf.get_ovlp = lambda *a: np.eye(n)
    eri = np.zeros((n, n, n, n))
    idx = np.arange(n)
    eri[idx[:, None], idx[:, None], idx[None, :], idx[None, :]] = model.gamma
    mf._eri = ao2mo.restore(8, eri, n)
    mf.conv_tol = 1e-12
    mf.kernel(dm0=res.dens)
    assert mf.e_tot == pytest.approx(res.e_elec, abs=1e-8)
    for singlet, mult in ((True, 1), (False, 3)):
        td = tdscf.TDA(mf)
        td.nstates = 6
        td.singlet = singlet
        td.conv_tol = 1e-10
        td.kernel()
        ours = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 6, mult).energies
        np.testing.assert_allclose(ours, np.sort(td.e), rtol=0, atol=1e-6)


def test_auto_picks_dense_for_small_and_iterative_for_large():
    assert cis.choose_solver(5, 5) == "dense"
    assert cis.choose_solver(100, 100) == "iterative"
    assert cis.choose_solver(100, 100, "dense") == "dense"
    with pytest.raises(InputError, match="unknown CIS solver"):
        cis.choose_solver(5, 5, "fast")


def test_unknown_solver_option_is_a_clear_error():
    with pytest.raises(InputError, match="unknown CIS solver 'lanczos'"):
        Options(cis_solver="lanczos")


def test_dense_solver_refuses_a_matrix_that_does_not_fit(monkeypatch):
    monkeypatch.setattr(cis, "DENSE_MAX_BYTES", 1000)
    with pytest.raises(TooLargeError, match="dense CIS matrix"):
        compute("c1ccc2ccccc2c1", cis_solver="dense")
    # the iterative solver needs no such matrix
    res = compute("c1ccc2ccccc2c1", cis_solver="iterative", n_singlets=3, n_triplets=3)
    assert len(res.singlets) == 3


def test_too_many_centres_is_a_clear_error():
    with pytest.raises(TooLargeError, match="more than the limit of 20"):
        compute("C=C" + "/C=C" * 11, max_centres=20)


def test_threads_option_is_checked_and_gives_the_same_result():
    with pytest.raises(InputError, match="threads"):
        Options(threads=0)
    a = compute(AZULENE, threads=1, n_singlets=3, n_triplets=0)
    b = compute(AZULENE, threads=2, n_singlets=3, n_triplets=0)
    np.testing.assert_allclose([s.energy_ev for s in a.singlets], [s.energy_ev for s in b.singlets], atol=1e-10)


@pytest.mark.parametrize("smiles", [CORONENE, STILBAZOLIUM])
@pytest.mark.parametrize("window", [0, 3, 6])
@pytest.mark.parametrize("multiplicity", [1, 3])
def test_davidson_variants_equal_dense(smiles, window, multiplicity):
    """Plain diagonal preconditioner (window 0) and frontier windows smaller than the orbital space
    (3, 6: the two-level preconditioner with Olsen's correction) all reach the dense roots."""
    model, res = _model(smiles)
    o = model.n_occ
    dense = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, multiplicity, solver="dense")
    itr = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, multiplicity, window=window)
    np.testing.assert_allclose(itr.energies, dense.energies, rtol=0, atol=1e-8)
    # eigenvectors of non-degenerate roots agree up to sign
    for lo, hi in _levels(dense.energies):
        if hi - lo == 1:
            assert abs(abs(float(np.vdot(itr.amplitudes[lo], dense.amplitudes[lo]))) - 1.0) < 1e-8


@pytest.mark.parametrize("multiplicity", [1, 3])
def test_large_system_settings_equal_dense(monkeypatch, multiplicity):
    """The settings used above ``LARGE_CENTRES`` (frontier-window start and preconditioner of
    ``window_size``, one correction per root and iteration, the larger subspace) switched on for a
    40-centre dye, where the dense matrix is still cheap: the same roots (1e-8 eV, the solver contract)."""
    model, res = _model(STILBAZOLIUM)
    o = model.n_occ
    dense = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, multiplicity, solver="dense")
    monkeypatch.setattr(cis_iterative, "LARGE_CENTRES", model.n_centres - 1)
    assert cis_iterative.window_size(model.n_centres) == 16
    itr = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, multiplicity)
    np.testing.assert_allclose(itr.energies, dense.energies, rtol=0, atol=1e-8)


def test_window_matrix_is_the_dense_matrix_restricted_to_the_window():
    model, res = _model(STILBAZOLIUM)
    o = model.n_occ
    for mult in (1, 3):
        full = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, mult)
        a, flat = cis_iterative.window_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, mult, window=4)
        np.testing.assert_allclose(a, full[np.ix_(flat, flat)], rtol=0, atol=1e-12)


def _two_species_matrix():
    """Block-diagonal symmetric matrix (two 'symmetry species' that never mix). Species A: diagonal
    1..10 weakly coupled; species B: diagonal entries >= 6 with strong couplings, so that its lowest
    eigenvalue (about 0.3) lies below everything in A although none of its diagonal entries is among the
    lowest ones. Constructed test case (law of linear algebra: eigenvalues of a block-diagonal matrix
    are those of its blocks)."""
    rng = np.random.default_rng(11)
    na, nb = 40, 40
    a = np.diag(np.linspace(1.0, 10.0, na)) + 0.01 * rng.standard_normal((na, na))
    a = 0.5 * (a + a.T)
    q, _ = np.linalg.qr(rng.standard_normal((nb, nb)))
    lam_b = np.concatenate([[0.3], np.linspace(12.0, 30.0, nb - 1)])
    b = (q * lam_b) @ q.T
    b[np.diag_indices(nb)] = np.maximum(np.diag(b), 6.0)  # keep B's diagonal above A's lowest entries
    full = np.zeros((na + nb, na + nb))
    full[:na, :na] = a
    full[na:, na:] = b
    return full


def test_davidson_finds_a_root_of_a_species_missing_from_the_start_vectors():
    """Unit start vectors on the lowest diagonal entries all belong to species A; without the random
    admixture the subspace never leaves A and the lowest root (in B) is missed. With it (the default in
    cis_iterative.kernel) every root comes out as in the dense eigensolver."""
    full = _two_species_matrix()
    exact = np.linalg.eigvalsh(full)[:4]
    diag = np.diag(full).copy()
    assert np.argsort(diag)[:8].max() < 40  # the start vectors all lie in species A
    blind, _, _, _ = cis_iterative.davidson(lambda r: r @ full, diag, 4, n_guess=8, tol=1e-9, noise=0.0)
    assert abs(blind[0] - exact[0]) > 0.5  # the pitfall is real: the B root is missing
    w, x, _, _ = cis_iterative.davidson(lambda r: r @ full, diag, 4, n_guess=8, tol=1e-9,
                                        rng=np.random.default_rng(2))
    np.testing.assert_allclose(w, exact, rtol=0, atol=1e-10)
    np.testing.assert_allclose(x @ x.T, np.eye(4), atol=1e-10)


@pytest.mark.parametrize("depth", [1, 2, 3])
def test_davidson_depths_and_restarts_agree_with_dense(depth):
    """Corrections per iteration (depth) and a small subspace that forces many restarts: same roots."""
    model, res = _model(STILBAZOLIUM)
    o = model.n_occ
    dense = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 8, 1, solver="dense")
    op = cis_iterative.operator(res.mo_energy, res.mo_coeff, model.gamma, o)
    diag = (op.de - cis_iterative.exchange_diagonal(op) + 2.0 * cis_iterative.coulomb_diagonal(op)).ravel()
    w, x, _, _ = cis_iterative.davidson(lambda r: cis_iterative.apply(op, r, 1), diag, 8, depth=depth, keep=10,
                                        max_space=26, tol=1e-9, rng=np.random.default_rng(1))
    np.testing.assert_allclose(w, dense.energies, rtol=0, atol=1e-10)
    np.testing.assert_allclose(x @ x.T, np.eye(8), atol=1e-10)


def test_exact_cis_diagonal_equals_the_dense_diagonal():
    model, res = _model(MEROCYANINE)
    o = model.n_occ
    op = cis_iterative.operator(res.mo_energy, res.mo_coeff, model.gamma, o)
    for mult, diag in ((1, op.de - cis_iterative.exchange_diagonal(op) + 2.0 * cis_iterative.coulomb_diagonal(op)),
                       (3, op.de - cis_iterative.exchange_diagonal(op))):
        full = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, mult)
        np.testing.assert_allclose(diag.ravel(), np.diag(full), rtol=0, atol=1e-12)


def test_orthonormal_complement_drops_dependent_rows():
    rng = np.random.default_rng(6)
    basis, _ = np.linalg.qr(rng.standard_normal((50, 5)))
    basis = basis.T
    new = rng.standard_normal((4, 50))
    rows = np.vstack([new, new[0] + new[1], basis[2] + 1e-12 * new[3]])  # one dependent, one in the basis
    out, _ = cis_iterative.orthonormal_complement(basis, rows)
    assert out.shape[0] == 4
    np.testing.assert_allclose(out @ out.T, np.eye(4), atol=1e-12)
    assert np.max(np.abs(out @ basis.T)) < 1e-12


def test_iterative_kernel_raises_when_not_converged():
    """One Rayleigh-Ritz step cannot converge 10 roots of a 25-centre dye: a ConvergenceError, never a
    silently wrong result."""
    model, res = _model(STILBAZOLIUM)
    with pytest.raises(ConvergenceError, match="did not converge"):
        cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 10, 1, max_iter=1)


def _symmetric_with_spectrum(lam, seed):
    """Q diag(lam) Q^T with a random orthogonal Q (law of linear algebra: its eigenvalues are lam)."""
    q, _ = np.linalg.qr(np.random.default_rng(seed).standard_normal((len(lam), len(lam))))
    a = (q * np.asarray(lam, dtype=float)) @ q.T
    return 0.5 * (a + a.T)


@pytest.mark.parametrize("m, n", [(41, 16), (60, 16), (100, 24), (150, 24)])
def test_subspace_eigensolver_equals_numpy(m, n):
    """The tridiagonal route (dsytrd, dsterf, dstein, dormqr) of the Davidson Rayleigh-Ritz step gives
    numpy's eigenvalues and orthonormal eigenvectors (checked by their residuals)."""
    a = np.random.default_rng(m).standard_normal((m, m))
    a = a + a.T
    a_copy = a.copy()
    w, v = eigen.lowest_tridiagonal(a, n)
    np.testing.assert_array_equal(a, a_copy)  # input untouched
    np.testing.assert_allclose(w, np.linalg.eigvalsh(a)[:n], rtol=0, atol=1e-12)
    np.testing.assert_allclose(v.T @ v, np.eye(n), rtol=0, atol=1e-13)
    assert np.max(np.abs(a @ v - v * w)) < 1e-12


def test_subspace_eigensolver_on_repeated_eigenvalues_and_a_split_matrix():
    """Degenerate eigenvalues (as in symmetric molecules) and a tridiagonal form that splits into blocks
    (a diagonal matrix with repeated entries) still give an orthonormal set of exact eigenvectors."""
    lam = np.r_[1.0, 1.0, 1.0, 2.0, 2.0, np.linspace(3.0, 20.0, 45)]
    for a in (_symmetric_with_spectrum(lam, 9), np.diag(np.random.default_rng(2).permutation(lam))):
        w, v = cis_iterative._lowest_eigh(a, 16)
        np.testing.assert_allclose(w[:16], lam[:16], rtol=0, atol=1e-12)
        np.testing.assert_allclose(v[:, :16].T @ v[:, :16], np.eye(16), rtol=0, atol=1e-13)
        assert np.max(np.abs(a @ v[:, :16] - v[:, :16] * w[:16])) < 1e-12
    # small matrices (and those with many of their pairs wanted) take the full dsyevd route: same contract
    small = _symmetric_with_spectrum(lam[:cis_iterative.FULL_SUBSPACE_EIGEN_MIN], 4)
    w, v = cis_iterative._lowest_eigh(small, 8)
    np.testing.assert_allclose(w[:8], lam[:8], rtol=0, atol=1e-12)


def test_single_gram_schmidt_pass_keeps_the_block_orthonormal():
    """With the Davidson's re-projection threshold (a second pass only when a row kept less than 1e-4 of
    its squared norm), rows that lost up to 99.99 % of their norm to the basis (one pass) or more (two
    passes) still come out orthonormal to it to rounding, and rows inside the span are dropped."""
    rng = np.random.default_rng(12)
    basis, _ = np.linalg.qr(rng.standard_normal((400, 40)))
    basis = basis.T
    inside = rng.standard_normal((8, 40)) @ basis
    noise = rng.standard_normal((8, 400))
    noise /= np.linalg.norm(noise, axis=1)[:, None]
    scale = np.linalg.norm(inside, axis=1)[:, None]
    rows = np.vstack([inside[:4] + 0.03 * scale[:4] * noise[:4],  # keep about 1e-3 of the squared norm
                      inside[4:6] + 3e-3 * scale[4:6] * noise[4:6],  # about 1e-5: second pass
                      rng.standard_normal((2, 400)),
                      inside[6:] + 1e-9 * scale[6:] * noise[6:]])  # inside the span: dropped
    kept = 1.0 - np.linalg.norm(rows @ basis.T, axis=1) ** 2 / np.linalg.norm(rows, axis=1) ** 2
    assert np.all((kept[:4] > cis_iterative.REORTH) & (kept[:4] < 0.01))  # the one-pass regime is exercised
    assert np.all((kept[4:6] < cis_iterative.REORTH) & (kept[4:6] > 1e-6))  # kept (drop: 1e-6)
    out, idx = cis_iterative.orthonormal_complement(basis, rows, reorth=cis_iterative.REORTH)
    assert out.shape[0] == 8
    np.testing.assert_array_equal(idx, np.arange(8))
    np.testing.assert_allclose(out @ out.T, np.eye(8), rtol=0, atol=1e-13)
    assert np.max(np.abs(out @ basis.T)) < 1e-13


# dye-sized molecules above the dense/Davidson switch (cis.DENSE_MAX_CONFIGURATIONS), where "auto" runs
# the Davidson solver with its dye-sized subspace settings and the looser check root
HEXAPHENYLTRIPHENYLENE = ("c1ccc(cc1)c1cc2c3cc(c4ccccc4)c(c4ccccc4)cc3c3cc(c4ccccc4)c(c4ccccc4)cc3c2cc1"
                          "c1ccccc1")  # 54 centres, threefold axis: degenerate pairs among the lowest roots
TRIS_TERPHENYLYL_BENZENE = ("c1ccc(cc1)c1ccc(cc1)c1ccc(cc1)c1cc(cc(c1)c1ccc(cc1)c1ccc(cc1)c1ccccc1)c1ccc(cc1)"
                            "c1ccc(cc1)c1ccccc1")  # 60 centres, threefold axis
CYANINE_49 = "CN(C)/C=C" + "/C=C" * 22 + "/C=[N+](C)C"  # 49 centres, long polymethine
PUSH_PULL_56 = ("c1ccc(cc1)N(c1ccccc1)c1ccc(o1)c1ccc(s1)/N=N/c1ccc(s1)c1ccc2cc(ccc2c1)c1cnc(cn1)c1ccc(s1)"
                "/N=N/C=O")  # from ppp.batch.synthetic.dye_library(200, seed=7)


@pytest.mark.parametrize("smiles", [HEXAPHENYLTRIPHENYLENE, TRIS_TERPHENYLYL_BENZENE, CYANINE_49, PUSH_PULL_56])
def test_dye_sized_davidson_equals_dense_through_the_driver(smiles):
    """40-60 centres with the default "auto" solver (Davidson above the switch) against the dense
    eigensolver: energies to 1e-8 eV, oscillator strengths to 1e-6, every complete degenerate level
    spanning the same space (the targets of the speed work; dense LAPACK is the reference)."""
    opts = dict(n_singlets=10, n_triplets=10)
    auto = compute(smiles, **opts).chromophores[0]
    m = auto.model
    assert m.n_occ * (m.n_centres - m.n_occ) > cis.DENSE_MAX_CONFIGURATIONS  # the Davidson path runs
    dense = compute(smiles, cis_solver="dense", **opts).chromophores[0]
    for a, b, xa, xb in ((dense.singlets, auto.singlets, dense.singlet_amplitudes, auto.singlet_amplitudes),
                         (dense.triplets, auto.triplets, dense.triplet_amplitudes, auto.triplet_amplitudes)):
        ea = np.array([s.energy_ev for s in a])
        np.testing.assert_allclose([s.energy_ev for s in b], ea, rtol=0, atol=1e-8)
        np.testing.assert_allclose([s.oscillator_strength for s in b], [s.oscillator_strength for s in a],
                                   rtol=0, atol=1e-6)
        for lo, hi in _levels(ea):
            pa = xa[lo:hi].reshape(hi - lo, -1)
            pb = xb[lo:hi].reshape(hi - lo, -1)
            assert np.max(np.abs(pa.T @ pa - pb.T @ pb)) < 1e-6


def test_hexaphenyltriphenylene_has_degenerate_pairs_that_davidson_returns():
    """Law of symmetry: a threefold axis gives doubly degenerate E states. The Davidson solver (with the
    start-vector admixture giving every species a foothold) returns both members of each pair."""
    model, res = _model(HEXAPHENYLTRIPHENYLENE)
    o = model.n_occ
    w = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 1).energies
    dense = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, 1, solver="dense").energies
    np.testing.assert_allclose(w, dense, rtol=0, atol=1e-8)
    assert np.sum(np.diff(dense) < 1e-8) >= 2


def test_per_root_tolerances_converge_each_root_to_its_own():
    """A looser tolerance on the last root (the check root of the degeneracy test) leaves the others at
    theirs: Q diag(lambda) Q^T with known eigenvalues (law of linear algebra); the loose root's Ritz value
    lies within its residual of the eigenvalue (Bauer-Fike bound for a symmetric matrix)."""
    lam = np.r_[1.0, 1.5, 2.0, 2.0, 2.7, 3.1, np.linspace(3.5, 40.0, 294)]
    a = _symmetric_with_spectrum(lam, 13)
    tol = np.r_[np.full(5, 1e-10), 1e-3]
    w, x, _, _ = cis_iterative.davidson(lambda rows: rows @ a, np.diag(a).copy(), 6, tol=tol,
                                        rng=np.random.default_rng(14))
    res = np.linalg.norm(x @ a - w[:, None] * x, axis=1)
    assert np.all(res < tol)
    np.testing.assert_allclose(w[:5], lam[:5], rtol=0, atol=1e-10)
    assert abs(w[5] - lam[5]) <= res[5]
    with pytest.raises(ValueError):  # one value per root, or one for all
        cis_iterative.davidson(lambda rows: rows @ a, np.diag(a).copy(), 6, tol=np.full(4, 1e-8))


def test_check_root_is_loose_and_the_wanted_roots_are_not():
    """kernel(n_check=1): the wanted roots keep residuals below CONV_TOL (checked against the explicit
    CIS matrix), the check root below CHECK_TOL, and its energy within CHECK_TOL of the dense one."""
    model, res = _model(PUSH_PULL_56)
    o = model.n_occ
    a = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, 1)
    dense = np.linalg.eigvalsh(a)[:11]
    got = cis_iterative.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 11, 1, n_check=1)
    x = got.amplitudes.reshape(11, -1)
    resid = np.linalg.norm(x @ a - got.energies[:, None] * x, axis=1)
    assert np.all(resid[:10] < cis_iterative.CONV_TOL)
    assert resid[10] < cis_iterative.CHECK_TOL
    np.testing.assert_allclose(got.energies[:10], dense[:10], rtol=0, atol=1e-8)
    assert abs(got.energies[10] - dense[10]) < cis_iterative.CHECK_TOL


@pytest.mark.parametrize("m", [12, 28, 29, 80, 150, 151, 200])
def test_dense_eigen_routes_equal_numpy(m):
    """Each route of eigen.lowest_eigenpairs (dsyevd up to FULL_MAX rows, the tridiagonal route up to
    TRIDIAGONAL_MAX, dsyevr above) gives numpy's lowest eigenvalues and exact orthonormal eigenvectors,
    also with a threefold and a twofold degenerate level among the wanted ones (law of linear algebra:
    Q diag(lam) Q^T has the eigenvalues lam)."""
    lam = np.r_[0.5, 1.0, 1.0, 1.0, 2.0, 2.0, np.linspace(3.0, 30.0, m - 6)]
    for a in (_symmetric_with_spectrum(lam, m), _symmetric_with_spectrum(np.sort(np.random.default_rng(m)
                                                                                    .uniform(0, 9, m)), m + 1)):
        ref = np.linalg.eigvalsh(a)[:11]
        w, x, info = eigen.lowest_eigenpairs(np.asfortranarray(a), 11)
        assert info == 0
        np.testing.assert_allclose(w, ref, rtol=0, atol=1e-12)
        np.testing.assert_allclose(x.T @ x, np.eye(11), rtol=0, atol=1e-12)
        assert np.max(np.abs(a @ x - x * w)) < 1e-11
