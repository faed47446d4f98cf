"""Inductive shift of alkyl substituents ([alkyl_shift] table): perception of the alkyl groups, the model
it builds (reduces to the plain model when absent, hand-worked ionisation potentials when present), the
derivation of the shipped value from ionisation energies, its effect on spectra, bad parameter files,
and fitting it with ``ppp fit``."""
from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from conftest import classic_variant

from ppp.calibration import evaluate as ev
from ppp.calibration import fit as F
from ppp.calibration.reference import Entry
from ppp.driver import Options, build_models, compute, ground_scf, kekule_guess, model_for, prepare
from ppp.errors import ParameterError
from ppp.model import params
from ppp.structure.perceive import perceive
from ppp.structure.readers import mol_from_smiles
from ppp.units import ev_to_nm

CLASSIC = Path(params.load("classic").path)


def _counts(smiles):
    """{atom index: alkyl count} of the centres of the (single) chromophore."""
    (system,) = perceive(mol_from_smiles(smiles))
    return dict(zip(system.atom_indices.tolist(), system.alkyl_counts.tolist()))


@pytest.mark.parametrize("smiles, atom, expected", [
    ("Nc1ccccc1", 0, 0),                      # aniline: N-H only
    ("CNc1ccccc1", 1, 1),                     # N-methylaniline
    ("CN(C)c1ccccc1", 1, 2),                  # N,N-dimethylaniline
    ("Cc1ccccc1", 1, 1),                      # toluene: the ring carbon bearing the methyl
    ("FC(F)(F)c1ccccc1", 4, 0),               # a CF3 group is not an alkyl group
    ("C[n+]1ccccc1", 1, 1),                   # N-methylpyridinium
    ("CC(C)(C)c1ccccc1", 4, 1),               # tert-butyl: one saturated carbon on the ring
    ("O=C(c1ccccc1)c1ccccc1", 1, 0),          # aryl and carbonyl neighbours are centres, not alkyls
    ("COc1ccccc1", 1, 1),                     # anisole: the ether oxygen
    ("OCc1ccccc1", 2, 1),                     # benzyl alcohol: CH2OH is a saturated carbon on the ring
])
def test_alkyl_groups_are_counted_per_centre(smiles, atom, expected):
    assert _counts(smiles)[atom] == expected


def test_julolidine_nitrogen_carries_two_ring_alkyls():
    # coumarin 153's donor: the nitrogen of the julolidine ring system is bonded to two CH2 groups
    smiles = "O=c1cc(C(F)(F)F)c2cc3CCCN4CCCc(c2o1)c34"
    counts = _counts(smiles)
    (n_idx,) = [a.GetIdx() for a in mol_from_smiles(smiles).GetAtoms() if a.GetSymbol() == "N"]
    assert counts[n_idx] == 2
    assert counts[3] == 0  # the ring carbon bearing CF3 (atom 4 is the CF3 carbon)


def _without_table(tmp_path):
    text = CLASSIC.read_text()
    start = text.index("[alkyl_shift]")
    end = text.index("[bond_order_beta]")
    p = tmp_path / "no_alkyl.toml"
    p.write_text(text[:start] + text[end:])
    return p


def test_set_without_table_gives_the_plain_model(tmp_path):
    plain = params.load(str(_without_table(tmp_path)))
    assert dict(plain.alkyl_shift) == {}
    classic = params.load("classic")
    mol = mol_from_smiles("CN(C)c1ccccc1")
    (prep,) = prepare(mol, Options())
    m_plain = model_for(prep, plain, Options())
    m_on = model_for(prep, classic, Options())
    # hand-worked: only the nitrogen changes, I_N -> I_N - 2 * 0.79 eV, so h_NN rises by 1.58 eV
    n_local = prep.system.types.index("N.amino")
    shift = classic.alkyl_shift["N.amino"]
    assert m_plain.ip[n_local] == pytest.approx(classic.types["N.amino"].ip_ev)
    assert m_on.ip[n_local] == pytest.approx(classic.types["N.amino"].ip_ev - 2 * shift)
    diff = m_on.core - m_plain.core
    expect = np.zeros_like(diff)
    expect[n_local, n_local] = 2 * shift
    np.testing.assert_allclose(diff, expect, atol=1e-12)
    # a molecule without alkyl groups is the same either way
    (prep2,) = prepare(mol_from_smiles("Nc1ccccc1"), Options())
    np.testing.assert_array_equal(model_for(prep2, plain, Options()).core, model_for(prep2, classic, Options()).core)


def _homo(smiles, pset):
    opts = Options()
    mol = mol_from_smiles(smiles)
    (system, model), = build_models(mol, opts, pset=pset)
    _, scf = ground_scf(model, opts, dens_guess=kekule_guess(mol, system))
    return scf.mo_energy[model.n_occ - 1]


def test_shipped_value_reproduces_the_ionisation_energy_difference():
    # Source of the value (parameters/classic.toml): gas-phase ionisation energies of aniline 7.72 eV and
    # N,N-dimethylaniline 7.12 eV (from memory, +-0.1 eV); by Koopmans' theorem (1934) the PPP-SCF HOMO of
    # N,N-dimethylaniline must lie 0.60 eV above aniline's. N-methylaniline (about 7.3 eV, from memory, less
    # certain) must fall in between. Phenol 8.49 eV, anisole 8.20 eV (from memory): 0.29 eV.
    classic = params.load("classic")
    an = _homo("Nc1ccccc1", classic)
    assert _homo("CN(C)c1ccccc1", classic) - an == pytest.approx(0.60, abs=0.02)
    assert 0.15 < _homo("CNc1ccccc1", classic) - an < 0.45
    assert _homo("COc1ccccc1", classic) - _homo("Oc1ccccc1", classic) == pytest.approx(0.29, abs=0.02)


def test_n_alkylation_red_shifts_the_charge_transfer_band(tmp_path):
    # measured (tests/data/reference_absorption.csv, from memory): 4-aminoazobenzene 3.23 eV,
    # 4-(dimethylamino)azobenzene 3.04 eV; 4-nitroaniline 3.31 eV, N,N-dimethyl-4-nitroaniline 3.18 eV
    plain = str(_without_table(tmp_path))

    def band(smiles, pset):
        res = compute(smiles, options=Options(parameters=pset, n_triplets=0))
        return next(s.energy_ev for s in res.singlets if s.oscillator_strength >= 0.05)

    for nh2, nme2 in [("Nc1ccc(cc1)/N=N/c1ccccc1", "CN(C)c1ccc(cc1)/N=N/c1ccccc1"),
                      ("Nc1ccc(cc1)[N+](=O)[O-]", "CN(C)c1ccc(cc1)[N+](=O)[O-]")]:
        # without the term the model cannot tell NMe2 from NH2
        assert band(nme2, plain) == pytest.approx(band(nh2, plain), abs=1e-6)
        shift = band(nme2, "classic") - band(nh2, "classic")
        assert -0.35 < shift < -0.05


@pytest.mark.parametrize("old, new, match", [
    ('"N.amino" = { value_ev = 0.79', '"N.nope" = { value_ev = 0.79', "undefined centre type"),
    ('"N.amino" = { value_ev = 0.79', '"N.amino" = { value_ev = "strong"', "finite number"),
    ('"N.amino" = { value_ev = 0.79', '"N.amino" = { value_ev = 9.0', "outside -5 to 5 eV"),
    ('"N.amino" = { value_ev = 0.79, source', '"N.amino" = { value_ev = 0.79, origin', "missing 'source'"),
])
def test_bad_alkyl_shift_table_is_a_one_line_error(tmp_path, old, new, match):
    path = classic_variant(tmp_path, old, new)
    with pytest.raises(ParameterError, match=match) as info:
        params.load(str(path))
    assert "\n" not in str(info.value)


def test_fit_recovers_a_known_alkyl_shift(tmp_path):
    # synthetic data from known parameters (invented values; the point is recovery, not the numbers)
    classic = params.load("classic")
    opts = Options(n_triplets=0)
    mols = [("NMe2-nitrobenzene", "CN(C)c1ccc(cc1)[N+](=O)[O-]"), ("NMe2-benzonitrile", "CN(C)c1ccc(cc1)C#N"),
            ("NEt2-benzaldehyde", "CCN(CC)c1ccc(cc1)C=O"), ("NMe-nitrobenzene", "CNc1ccc(cc1)[N+](=O)[O-]")]
    p = [F.parse_parameter("alkyl:N.amino", classic)]
    assert p[0].value(classic) == pytest.approx(0.79)
    true_set = F.apply(classic, p, [0.45])
    blank = [Entry(n, s, "push-pull", "", "", "allowed", 300.0, 1.0, "") for n, s in mols]
    synthetic = [ev.predict(pe, true_set, opts) for pe in ev.prepare_set(blank, opts)]
    assert all(e is not None for e in synthetic)
    entries = [replace(e, lambda_nm=float(ev_to_nm(x)), uncertainty_nm=1.0, source="synthetic")
               for e, x in zip(blank, synthetic)]
    res = F.fit(ev.prepare_set(entries, opts), classic, p, opts, prior_scale=0.0, max_nfev=30)
    assert res.x[0] == pytest.approx(0.45, abs=0.01)
    # the written file keeps the fitted value with its provenance and loads again
    text = F.write_parameter_file(classic, res, "mine", "synthetic.csv", "0" * 64, "test", {"all": 0.0},
                                  {"all": 0.0}, {"all": 0.0})
    out = tmp_path / "mine.toml"
    out.write_text(text)
    assert params.load(str(out)).alkyl_shift["N.amino"] == pytest.approx(round(res.x[0], 4))


def test_counts_do_not_depend_on_explicit_hydrogens():
    # a 3D record with explicit hydrogen atoms (as from an SDF file) counts the same alkyl groups
    from rdkit import Chem

    for smiles in ("CN(C)c1ccc(cc1)[N+](=O)[O-]", "COc1ccccc1", "CC(F)(F)c1ccccc1"):
        mol = mol_from_smiles(smiles)
        (plain,) = perceive(mol)
        (with_h,) = perceive(Chem.AddHs(mol))
        assert plain.alkyl_counts.tolist() == with_h.alkyl_counts.tolist()
        assert plain.atom_indices.tolist() == with_h.atom_indices.tolist()
