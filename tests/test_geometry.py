"""Idealised planar coordinates: bond length, E/Z, input coordinates, principal-axis frame."""
from __future__ import annotations

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

import ppp
from ppp.driver import Options, build_models
from ppp.structure.readers import mol_from_smiles

from conftest import model_of


def bond_lengths(model):
    b = model.bonds
    return np.linalg.norm(model.coords[b[:, 0]] - model.coords[b[:, 1]], axis=1)


def test_depiction_scaled_to_standard_bond_length():
    # classic set: 1.40 A (benzene C-C, common practice); RDKit draws regular polygons
    m = model_of("c1ccc2ccccc2c1")
    assert np.allclose(bond_lengths(m), 1.40, atol=1e-6)
    assert np.allclose(m.coords[:, 2], 0.0)


def test_principal_axis_frame():
    m = model_of("c1ccc2cc3ccccc3cc2c1")  # anthracene: long axis along x
    assert np.allclose(m.coords.mean(axis=0), 0.0, atol=1e-9)
    assert np.ptp(m.coords[:, 0]) > np.ptp(m.coords[:, 1]) > 0


def test_e_and_z_isomers_get_different_geometry_and_spectra():
    trans = model_of("C(=C/c1ccccc1)\\c1ccccc1")
    cis = model_of("C(=C\\c1ccccc1)\\c1ccccc1")
    # trans-stilbene is more extended than cis-stilbene
    assert np.ptp(trans.coords[:, 0]) > np.ptp(cis.coords[:, 0]) + 1.0
    e_t = ppp.compute("C(=C/c1ccccc1)\\c1ccccc1").first_bright.energy_ev
    e_c = ppp.compute("C(=C\\c1ccccc1)\\c1ccccc1").first_bright.energy_ev
    assert abs(e_t - e_c) > 1e-3


def test_input_coordinates_used_when_asked():
    mol = Chem.AddHs(mol_from_smiles("C=CC=CC=C"))
    AllChem.EmbedMolecule(mol, randomSeed=7)
    AllChem.MMFFOptimizeMolecule(mol)
    (sys_, model), = build_models(mol, Options(coordinates="input"))
    (_, ideal), = build_models(mol, Options())
    lengths = bond_lengths(model)
    # force-field hexatriene alternates: C=C ~1.34 A, C-C ~1.45 A (common practice)
    assert lengths.min() < 1.36 and lengths.max() > 1.43
    assert not np.allclose(model.gamma, ideal.gamma)


def test_input_coordinates_missing_is_an_error():
    with pytest.raises(ppp.InputError, match="no input coordinates"):
        ppp.compute(mol_from_smiles("C=CC=C"), options=Options(coordinates="input"))


def test_depiction_does_not_depend_on_rdkit_global_switch():
    # RDKit's process-wide CoordGen preference (turned on by drawing code) must not change results
    from rdkit.Chem import rdDepictor
    ref = model_of("CN(C)c1ccc(cc1)/N=N/c1ccccc1")
    previous = rdDepictor.GetPreferCoordGen()
    try:
        rdDepictor.SetPreferCoordGen(True)
        other = model_of("CN(C)c1ccc(cc1)/N=N/c1ccccc1")
    finally:
        rdDepictor.SetPreferCoordGen(previous)
    assert np.array_equal(ref.coords, other.coords)


# --- 2D layout check (ppp.structure.geometry.planar_layout) ---------------------------------------------

def _layout(smiles: str):
    from ppp.driver import _without_hydrogens
    from ppp.structure.perceive import perceive
    mol = _without_hydrogens(mol_from_smiles(smiles))
    chrom = [(s.atom_indices, s.bonds) for s in perceive(mol)]
    return mol, chrom


def test_layout_distortion_measures_bonds_and_contacts():
    """Four centres bonded in a ring, drawn with one side at half length (worked by hand): bonds 1, 1,
    0.5 and sqrt(1.25) = 1.118, mean 0.9045; worst bond 0.5 / 0.9045 - 1 = -0.447 (atoms 2, 3); closest
    unbonded pair (1, 3) at 1.118 / 0.9045 = 1.236."""
    from ppp.structure.geometry import layout_distortion
    pos = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0.5, 1, 0]], dtype=float)
    bonds = np.array([[0, 1], [1, 2], [2, 3], [3, 0]])
    dev, contact, pair = layout_distortion(pos, [(np.arange(4), bonds)])
    mean = (2.5 + np.sqrt(1.25)) / 4  # = (1 + 1 + 0.5 + 1.118) / 4
    assert dev == pytest.approx(1.0 - 0.5 / mean, abs=1e-12) and pair == (2, 3)
    assert contact == pytest.approx(np.sqrt(1.25) / mean, abs=1e-12)


def test_regular_depiction_is_kept_as_drawn():
    """Most molecules: RDKit's depiction is regular and used unchanged (results do not move)."""
    from ppp.structure.geometry import depiction, planar_layout
    for smi in ("c1ccc2ccccc2c1", "CN(C)c1ccc(cc1)/N=N/c1ccccc1", "C(=C/c1ccccc1)\\c1ccccc1"):
        mol, chrom = _layout(smi)
        pos, note = planar_layout(mol, chrom)
        assert note is None and np.array_equal(pos, depiction(mol))


def test_crowded_and_bridged_layouts_are_made_regular():
    """RDKit draws the carboxylate C-O of fluorescein's pendant ring at 0.54 of the standard length and
    puts the lactone O and C of a bridged steroid 0.1 bond lengths apart, and stretches porphine's
    macrocycle bonds by 27 % (measured 2026-12-02); the layout used has every pi bond within 15 % of the mean and no warning. The steroid lactone then
    computes like a plain lactone (gamma-butyrolactone: 7.34 eV; before, 5.56 eV and a triplet
    instability)."""
    from ppp.structure.geometry import BOND_TOLERANCE, MIN_CONTACT, depiction, layout_distortion, planar_layout
    for smi, drawn in (("[O-]C(=O)c1ccccc1-c1c2ccc(=O)cc-2oc2cc([O-])ccc12", 0.4),
                       ("CC(C)C1CCC2(C)C(CCC3C4(C)CCCC23OC4=O)C1", 0.4),
                       ("c1cc2cc3ccc(cc4ccc(cc5ccc(cc1n2)[nH]5)n4)[nH]3", 0.2)):  # porphine: stretched
        mol, chrom = _layout(smi)
        assert layout_distortion(depiction(mol), chrom)[0] > drawn  # the drawing RDKit makes
        pos, note = planar_layout(mol, chrom)
        dev, contact, _ = layout_distortion(pos, chrom)
        assert note is None and dev <= BOND_TOLERANCE and contact >= MIN_CONTACT
    steroid = ppp.compute("CC(C)C1CCC2(C)C(CCC3C4(C)CCCC23OC4=O)C1", n_triplets=1, n_singlets=1)
    lactone = ppp.compute("O=C1OCCC1", n_triplets=1, n_singlets=1)
    assert abs(steroid.singlets[0].energy_ev - lactone.singlets[0].energy_ev) < 0.1
    assert not steroid.warnings


def test_layout_that_cannot_be_regular_is_kept_with_a_warning():
    """A helicene cannot be drawn flat without overlapping rings: RDKit's drawing is kept, and the result
    says the layout is distorted."""
    from ppp.structure.geometry import depiction, planar_layout
    smi = "c1ccc2c(c1)ccc1ccc3ccc4ccc5ccccc5c4c3c12"  # [6]helicene
    mol, chrom = _layout(smi)
    pos, note = planar_layout(mol, chrom)
    assert np.array_equal(pos, depiction(mol)) and "2D layout of the pi-system is distorted" in note
    res = ppp.compute(smi, n_triplets=0, n_singlets=1)
    assert any("2D layout" in w for w in res.warnings)


def test_relaxed_layout_keeps_double_bond_sides():
    """The relaxation keeps the drawing's E/Z (a Z double bond between two crowded rings stays Z), and the
    side test tells E from Z: the drawings of E- and Z-stilbene (same atom order) disagree."""
    from ppp.structure.geometry import _same_double_bond_sides, depiction, relax_layout
    mol, _ = _layout("OC(=O)c1ccccc1/C=C\\c1ccccc1C(=O)O")
    drawn = depiction(mol)
    assert _same_double_bond_sides(mol, drawn, relax_layout(mol, drawn))
    trans, _ = _layout("c1ccccc1/C=C/c1ccccc1")
    cis, _ = _layout("c1ccccc1/C=C\\c1ccccc1")
    assert _same_double_bond_sides(trans, depiction(trans), depiction(trans))
    assert not _same_double_bond_sides(trans, depiction(trans), depiction(cis))


def test_distorted_input_drawing_is_used_as_drawn_with_a_warning(tmp_path):
    """With --input-coordinates a 2D drawing from the file is the user's geometry: used as drawn, but a
    distorted one (RDKit's own drawing of fluorescein, carboxyl C-O at 0.54) is reported."""
    from rdkit.Chem import rdDepictor
    mol = Chem.MolFromSmiles("[O-]C(=O)c1ccccc1-c1c2ccc(=O)cc-2oc2cc([O-])ccc12")
    previous = rdDepictor.GetPreferCoordGen()
    rdDepictor.SetPreferCoordGen(False)
    try:
        rdDepictor.Compute2DCoords(mol)
    finally:
        rdDepictor.SetPreferCoordGen(previous)
    res = ppp.compute(mol, coordinates="input", n_triplets=0, n_singlets=1)
    note = [w for w in res.warnings if "2D layout" in w]
    assert len(note) == 1 and "atom 2 (C) and atom 3 (O)" in note[0] and "in the file" in note[0]
    assert not [w for w in ppp.compute(Chem.MolToSmiles(mol), n_triplets=0, n_singlets=1).warnings
                if "2D layout" in w]
