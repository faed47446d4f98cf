"""Per-molecule overhead trims for small dyes: each faster path against the plain one it replaces
(bit for bit where the numbers must not move), plus the defining formulas where there is one."""
from __future__ import annotations

import numpy as np
import pytest

from ppp import driver
from ppp.analysis.timings import StageTimer, maybe_stage
from ppp.driver import Options, build_models, compute, kekule_guess, solve_model
from ppp.errors import RadicalError
from ppp.model import variable_beta as vb
from ppp.solvers import cis, scf
from ppp.structure.perceive import perceive
from ppp.structure.readers import mol_from_smiles

DYES = ["CCN(CC)c1ccc2c(c1)oc(=O)cc2C(F)(F)F", "c1ccc(cc1)/N=N/c1ccccc1", "CN1C=CC(=CC=C2C=CC(=O)C=C2)C=C1",
        "c1ccccc1"]


def _solved(smiles, opts=Options(bond_order_beta=False)):
    mol = mol_from_smiles(smiles)
    (system, model), = build_models(mol, opts)
    return model, driver.ground_scf(model, opts, dens_guess=kekule_guess(mol, system))[1]


@pytest.mark.parametrize("smiles", DYES)
def test_exchange_integrals_follow_their_definition(smiles):
    """(ij|ab) = sum_mu,nu C_mu,i C_mu,j gamma_mu,nu C_nu,a C_nu,b (ZDO; cis module doc), written out."""
    model, res = _solved(smiles)
    o, c = model.n_occ, res.mo_coeff
    ref = np.einsum("mi,mj,mn,na,nb->ijab", c[:, :o], c[:, :o], model.gamma, c[:, o:], c[:, o:])
    got = cis.exchange_integrals(c, model.gamma, o)
    np.testing.assert_allclose(got, ref.reshape(o * o, -1), rtol=0, atol=1e-12)


@pytest.mark.parametrize("smiles", DYES)
def test_shared_exchange_gives_the_separate_cis_matrices_bit_for_bit(smiles):
    model, res = _solved(smiles)
    o = model.n_occ
    ex = cis.exchange_integrals(res.mo_coeff, model.gamma, o)
    block = cis.exchange_block(ex, o, model.n_centres - o)
    kept, kept_block = ex.copy(), block.copy()
    for mult in (1, 3):
        alone = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, mult)
        for shared_ex in (ex, block):
            shared = cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, o, mult, exchange=shared_ex)
            np.testing.assert_array_equal(shared, alone)
            a = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, mult, dipole_coords=model.coords)
            b = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, o, 10, mult, dipole_coords=model.coords,
                           exchange=shared_ex)
            np.testing.assert_array_equal(a.energies, b.energies)
            np.testing.assert_array_equal(a.amplitudes, b.amplitudes)
    # read, never changed: both multiplicities can share them
    np.testing.assert_array_equal(ex, kept)
    np.testing.assert_array_equal(block, kept_block)


@pytest.mark.parametrize("smiles", DYES[:2])
def test_exchange_block_is_the_exchange_in_cis_order(smiles):
    """exchange_block()[i, a, j, b] = (ij|ab), written out from its definition (cis module doc)."""
    model, res = _solved(smiles)
    o, c = model.n_occ, res.mo_coeff
    ref = np.einsum("mi,mj,mn,na,nb->iajb", c[:, :o], c[:, :o], model.gamma, c[:, o:], c[:, o:])
    got = cis.exchange_block(cis.exchange_integrals(c, model.gamma, o), o, model.n_centres - o)
    assert got.flags.c_contiguous
    np.testing.assert_allclose(got, ref, rtol=0, atol=1e-12)


def test_exchange_of_the_wrong_shape_is_refused():
    model, res = _solved(DYES[0])
    ex = cis.exchange_integrals(res.mo_coeff, model.gamma, model.n_occ - 1)
    with pytest.raises(ValueError, match="do not fit"):
        cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 1, exchange=ex)
    block = cis.exchange_block(ex, model.n_occ - 1, model.n_centres - model.n_occ + 1)
    with pytest.raises(ValueError, match="do not fit"):
        cis.cis_matrix(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 3, exchange=block)


def test_driver_shares_the_exchange_only_for_two_dense_cis_solves():
    model, res = _solved(DYES[0])
    assert driver.shared_exchange(res, model, Options()) is not None
    for opts in (Options(response="rpa"), Options(cis_solver="iterative"), Options(n_triplets=0),
                 Options(n_singlets=0)):
        assert driver.shared_exchange(res, model, opts) is None
    # a forced dense run above the automatic limit keeps its two-array peak memory: nothing shared
    (_, big), = build_models(mol_from_smiles("C=C" * 24), Options(bond_order_beta=False))
    assert big.n_occ * (big.n_centres - big.n_occ) > cis.DENSE_MAX_CONFIGURATIONS
    assert driver.shared_exchange(None, big, Options(cis_solver="dense")) is None


@pytest.mark.parametrize("smiles", DYES + ["C1=CC=C1"])  # cyclobutadiene: the stability-following path
def test_solve_with_shared_exchange_equals_separate_builds(monkeypatch, smiles):
    opts = Options(bond_order_beta=False)
    mol = mol_from_smiles(smiles)
    (system, model), = build_models(mol, opts)
    guess = kekule_guess(mol, system)
    shared = solve_model(model, opts, dens_guess=guess)
    monkeypatch.setattr(driver, "shared_exchange", lambda *a: None)
    alone = solve_model(model, opts, dens_guess=guess)
    assert shared.singlets == alone.singlets and shared.triplets == alone.triplets
    np.testing.assert_array_equal(shared.triplet_amplitudes, alone.triplet_amplitudes)


def test_diis_bordered_system_of_every_size_equals_a_fresh_one():
    """The one array behind the bordered systems [[B, -1], [-1, 0]] of all sizes (Pulay 1980) holds the
    right border and right-hand side after growing, and after shrinking (which the SCF never does), also
    when it grows by one again after a shrink (row and column then hold an earlier B, not the fill)."""
    rng = np.random.default_rng(3)
    diis = scf._DIIS(7, 5)
    for n in (2, 3, 6, 4, 5, 2, 3, 7, 5, 6):
        diis._resize(n)
        diis._a[:n, :n] = rng.standard_normal((n, n))  # what extrapolate writes there
        a = diis._a[:n + 1, :n + 1]
        np.testing.assert_array_equal(a[n, :n], -1.0)
        np.testing.assert_array_equal(a[:n, n], -1.0)
        assert a[n, n] == 0.0
        np.testing.assert_array_equal(diis._rhs[:n + 1], np.r_[np.zeros(n), -1.0])


def test_core_of_bond_orders_equals_two_dimensional_indexing():
    """Flat indices set and read the same elements as core[i, j] = core[j, i] = beta_ref f(P_ij)."""
    (_, m), = build_models(mol_from_smiles(DYES[0]), Options())
    settings = vb.BondOrderBeta()
    mask = vb.variable_bonds(m.types, m.bonds, settings)
    i, j = m.bonds[mask, 0], m.bonds[mask, 1]
    beta_ref = m.core[i, j].copy()
    rng = np.random.default_rng(8)
    for diag in (None, lambda p: 0.1 * np.diagonal(p)):
        upd = vb.CoreOfBondOrders(m.core.copy(), i, j, beta_ref, settings, np.diagonal(m.core).copy(), diag)
        for _ in range(3):
            x = rng.random((m.n_centres, m.n_centres))
            p = x + x.T
            ref = m.core.copy()
            ref[i, j] = ref[j, i] = beta_ref * upd.factor(p[i, j])
            if diag is not None:
                np.fill_diagonal(ref, np.diagonal(m.core) + diag(p))
            np.testing.assert_array_equal(upd(p), ref)
            np.testing.assert_array_equal(upd(np.asfortranarray(p)), ref)  # any memory order of P


def test_overlap_factor_keeps_the_reference_overlap_of_the_kernel_form():
    settings = vb.BondOrderBeta()
    f = vb._factor_function(settings)
    assert f.s_ref == float(vb.slater_pi_overlap(settings.reference_length, settings.slater_exponent))
    # beta(r_ref) / beta(r_ref) = 1 at the order whose length is r_ref (r = a - b p)
    p_ref = (settings.length_intercept - settings.reference_length) / settings.length_slope
    assert f(np.array([p_ref]))[0] == pytest.approx(1.0, abs=1e-12)


def test_alignment_returns_the_amplitudes_themselves_when_no_level_is_degenerate():
    model, res = _solved(DYES[0])
    out = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 6, 1)
    assert np.all(np.diff(out.energies) > cis.DEGENERACY_TOL)
    same = cis.align_degenerate(out.energies, out.amplitudes, res.mo_coeff, model.n_occ, model.coords)
    assert same is out.amplitudes
    # a degenerate pair (benzene's bright E1u level, common knowledge) is still rotated into a new array
    model, res = _solved("c1ccccc1")
    b = cis.kernel(res.mo_energy, res.mo_coeff, model.gamma, model.n_occ, 6, 1)
    assert np.any(np.diff(b.energies) < cis.DEGENERACY_TOL)
    rot = cis.align_degenerate(b.energies, b.amplitudes, res.mo_coeff, model.n_occ, model.coords)
    assert rot is not b.amplitudes


@pytest.mark.parametrize("smiles, atom", [("[CH2]C=CC=C", 1), ("C=CC=C[CH]C", 5), ("c1ccccc1[CH2]", 7),
                                          ("[O]c1ccccc1", 1)])
def test_radical_is_named_whether_or_not_the_molecule_kekulizes(smiles, atom):
    with pytest.raises(RadicalError, match=rf"atom {atom} \("):
        perceive(mol_from_smiles(smiles))


def test_sigma_bond_counts_from_the_bond_list_match_rdkit_degrees():
    """Centre types follow the number of sigma bonds (degree + hydrogens): pyrrole N amino, pyridine N
    aza (common practice), also with explicit hydrogens in the graph."""
    from rdkit import Chem
    for smiles, types in [("c1cc[nH]c1", {"N.amino"}), ("c1ccncc1", {"N.aza"})]:
        for mol in (mol_from_smiles(smiles), Chem.AddHs(mol_from_smiles(smiles))):
            (system,) = perceive(mol)
            assert {t for t in system.types if t.startswith("N")} == types


def test_stage_without_timer_is_one_shared_no_op():
    with maybe_stage(None, "a") as x:
        assert x is None
    assert maybe_stage(None, "a") is maybe_stage(None, "b")
    t = StageTimer()
    with maybe_stage(t, "a"):
        pass
    assert t.calls == {"a": 1}


def test_compute_runs_every_trimmed_path_on_a_dye_with_default_settings():
    """Bond-order beta (core update with flat indices, lazy core change) and shared exchange together:
    the run converges, and its betas are those of its own bond orders (self-consistency, module doc
    of ppp.model.variable_beta)."""
    res = compute(DYES[2])
    c = res.chromophores[0]
    settings = c.model.bond_order_beta
    mask = vb.variable_bonds(c.model.types, c.model.bonds, settings)
    i, j = c.model.bonds[mask, 0], c.model.bonds[mask, 1]
    (_, m0), = build_models(mol_from_smiles(DYES[2]), Options())
    expect = m0.core[i, j] * vb.beta_factor(vb.bond_length(c.scf.dens[i, j], settings), settings)
    np.testing.assert_allclose(c.model.core[i, j], expect, rtol=0, atol=2e-6)
    assert len(c.singlets) == 10 and len(c.triplets) == 10


def _random_model(n, n_occ, seed):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((n, n))
    g = rng.random((n, n))
    core, gamma = -np.abs(a + a.T), g + g.T + 6.0 * np.eye(n)
    return core, gamma, n_occ, scf.density(scf.eigh(core)[1], n_occ)


def test_reused_scf_ring_gives_the_numbers_of_a_new_one(monkeypatch):
    """iterate() reuses the DIIS ring of the run before (same size, same thread); the runs must equal
    those with a new ring every time, bit for bit, also after a run stopped by max_iter, one with
    another subspace size, and one with level shift and damping."""
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)  # the numpy loop even if numba is loaded
    cases = [(_random_model(13, 6, s), kw) for s in (11, 12) for kw in
             (dict(max_iter=50), dict(max_iter=3), dict(max_iter=50, diis_space=3),
              dict(max_iter=20, use_diis=False, level_shift=1.0, damping=0.3))]
    reused = [scf.iterate(*args, **kw) for args, kw in cases + cases]
    monkeypatch.setattr(scf, "RING_POOL_MAX_CENTRES", 0)  # nothing kept: a new ring for every run
    fresh = [scf.iterate(*args, **kw) for args, kw in cases + cases]
    for got, ref in zip(reused, fresh):
        assert got[:2] == ref[:2]
        np.testing.assert_array_equal(got[2], ref[2])
    assert any(r[0] for r in fresh) and not all(r[0] for r in fresh)  # converged and stopped runs


def test_scf_rings_are_not_shared_between_threads(monkeypatch):
    """Two threads iterating at once (numpy releases the GIL inside its calls) each get their own
    ring: the results equal those of the runs one after the other."""
    import threading
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)
    models = [_random_model(13, 6, s) for s in (21, 22)]
    alone = [scf.iterate(*m, max_iter=60) for m in models]
    out = [None, None]

    def work(k):
        out[k] = [scf.iterate(*models[k], max_iter=60) for _ in range(30)]

    threads = [threading.Thread(target=work, args=(k,)) for k in (0, 1)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    for k in (0, 1):
        for got in out[k]:
            assert got[:2] == alone[k][:2]
            np.testing.assert_array_equal(got[2], alone[k][2])


def test_scf_ring_pool_stays_small(monkeypatch):
    monkeypatch.setattr(scf, "JIT_MIN_CENTRES", 10**9)  # the numpy loop even if numba is loaded
    for n in range(5, 5 + 2 * scf.RING_POOL_SIZES):
        core, gamma, n_occ, p0 = _random_model(n, n // 2, n)
        scf.iterate(core, gamma, n_occ, p0, max_iter=5)
    assert len(scf._ring_pool.rings) == scf.RING_POOL_SIZES
    core, gamma, n_occ, p0 = _random_model(scf.RING_POOL_MAX_CENTRES + 1, 10, 1)
    scf.iterate(core, gamma, n_occ, p0, max_iter=2)
    assert all(n <= scf.RING_POOL_MAX_CENTRES for _, n in scf._ring_pool.rings)


@pytest.mark.parametrize("shape", [(6, 6, 6), (4, 32, 40)])  # a table of configurations; above its limit
def test_dominant_configurations_equal_a_plain_selection_with_labels(shape):
    """Weight >= 5 % (at most 4, the largest always), largest first, ties by configuration index, with
    HOMO/LUMO labels: written out root by root with Python's stable sort."""
    from ppp.analysis.properties import _TABLE_MAX_CONFIGURATIONS, dominant_configurations, orbital_label
    k, o, v = shape
    assert (o * v > _TABLE_MAX_CONFIGURATIONS) == (shape[1] == 32)
    rng = np.random.default_rng(17)
    x = rng.standard_normal(shape) * 0.1
    x[1] = 0.0
    x[1, 0, :3] = x[1, 1, 0] = 0.5  # four equal weights: the order follows the index
    x[2] = 0.01 * rng.random((o, v))  # every weight below 5 %: the largest is kept alone
    got = dominant_configurations(x, o)
    for root, confs in zip(x, got):
        w = (root * root).ravel().tolist()
        order = sorted(range(len(w)), key=lambda q: -w[q])[:4]
        want = [q for j, q in enumerate(order) if j == 0 or w[q] >= 0.05]
        assert [(c.occupied, c.virtual, c.weight) for c in confs] == [(q // v, o + q % v, w[q]) for q in want]
        assert [(c.from_label, c.to_label) for c in confs] == [(orbital_label(q // v, o), orbital_label(o + q % v, o))
                                                               for q in want]
    assert [(c.occupied, c.virtual) for c in got[1]] == [(0, o), (0, o + 1), (0, o + 2), (1, o)]
    assert len(got[2]) == 1


def test_states_from_columns_equal_the_dataclass_constructor():
    """Records made by filling the slots equal those of State(...): fields, equality, hash, repr, pickle."""
    import pickle

    from ppp.analysis.properties import Configuration
    from ppp.results import State, states_from_columns
    conf = (Configuration(2, 3, 0.9, "HOMO", "LUMO"),)
    cols = ([1.5, 2.25], [0.1, 0.0], [(0.1, -0.2, 0.0), (0.0, 0.0, 0.0)], [(116.6, "mixed"), (None, "-")],
            [conf, ()])
    fast = states_from_columns(1, 2, *cols)
    plain = tuple(State(1, n, 2, e, f, d, pd, p, c)
                  for n, (e, f, d, (pd, p), c) in enumerate(zip(*cols), 1))
    assert fast == plain and type(fast[0]) is State
    assert [hash(s) for s in fast] == [hash(s) for s in plain]
    assert [repr(s) for s in fast] == [repr(s) for s in plain]
    assert pickle.loads(pickle.dumps(fast)) == plain
    assert fast[1].label == "S2" and fast[0].character == str(conf[0])
