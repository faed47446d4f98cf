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
