"""Pictures on the 2D structure (RDKit rdMolDraw2D): frontier orbitals, transition density, change in pi
charge on excitation.

Each pi-centre gets a disc: red for a positive value, blue for a negative one. For orbitals the disc
radius is proportional to |C_mu| (so its area follows the orbital density C_mu^2); for densities and
charges the area is proportional to the magnitude (radius ~ sqrt|value|). The largest disc has radius
``MAX_RADIUS`` (bond lengths are about 1.5 in RDKit depiction units). The sign of an orbital is
arbitrary as a whole; only the relative signs mean something.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
from rdkit import Chem, rdBase
from rdkit.Chem import rdDepictor
from rdkit.Chem.Draw import rdMolDraw2D

from ..errors import InputError
from ..structure.readers import mol_from_smiles

POSITIVE = (0.84, 0.19, 0.15, 0.75)  # red, slightly transparent
NEGATIVE = (0.17, 0.39, 0.80, 0.75)  # blue
MAX_RADIUS = 0.62
MIN_RADIUS = 0.06  # smaller discs are not drawn (value below ~1 % of the largest)
SIZE = (520, 420)


def structure_for_pictures(smiles: str, atom_indices_list, types_list) -> Chem.Mol:
    """Hydrogen-suppressed molecule with 2D coordinates whose atoms match the stored pi-centre indices.

    The element of every stored centre type must match the atom at its index, otherwise the picture
    would be drawn on the wrong atoms (e.g. a record made from a MOL file whose atom order differs from
    its SMILES); that raises InputError.
    """
    if not smiles:
        raise InputError("no structure (SMILES) available for pictures")
    mol = mol_from_smiles(smiles)
    if any(a.GetAtomicNum() == 1 for a in mol.GetAtoms()):
        mol = Chem.RemoveHs(mol, sanitize=False)
    for idx, types in zip(atom_indices_list, types_list):
        for i, t in zip(np.asarray(idx, dtype=int), types):
            element = t.split(".")[0]
            if i >= mol.GetNumAtoms() or mol.GetAtomWithIdx(int(i)).GetSymbol() != element:
                raise InputError("stored atom numbering does not match the structure's SMILES; "
                                 "pictures need a record computed from a SMILES")
    previous = rdDepictor.GetPreferCoordGen()  # process-wide RDKit switch: restore it afterwards
    try:
        with rdBase.BlockLogs():
            rdDepictor.SetPreferCoordGen(True)
            rdDepictor.Compute2DCoords(mol)
    finally:
        rdDepictor.SetPreferCoordGen(previous)
    return mol


def _radii(values: np.ndarray, mode: str) -> np.ndarray:
    v = np.abs(np.asarray(values, dtype=float))
    top = v.max() if len(v) else 0.0
    if top <= 0:
        return np.zeros_like(v)
    rel = v / top
    return MAX_RADIUS * (rel if mode == "linear" else np.sqrt(rel))


def draw_values(mol: Chem.Mol, atom_indices: np.ndarray, values: np.ndarray, legend: str, path: str | Path,
                mode: str = "linear") -> Path:
    """Draw discs for ``values`` (one per pi-centre, at ``atom_indices``) and write PNG or SVG by suffix.

    mode : "linear" (radius ~ |value|, for orbital coefficients) or "area" (area ~ |value|).
    """
    path = Path(path)
    radii = _radii(values, mode)
    atoms, colours, rad = [], {}, {}
    for i, v, r in zip(np.asarray(atom_indices, dtype=int), values, radii):
        if r < MIN_RADIUS:
            continue
        i = int(i)
        atoms.append(i)
        colours[i] = POSITIVE if v > 0 else NEGATIVE
        rad[i] = float(r)
    if path.suffix.lower() == ".svg":
        d = rdMolDraw2D.MolDraw2DSVG(*SIZE)
    else:
        d = rdMolDraw2D.MolDraw2DCairo(*SIZE)
    opts = d.drawOptions()
    opts.fillHighlights = True
    opts.atomHighlightsAreCircles = True
    opts.legendFontSize = 15
    opts.legendFraction = 0.09 + 0.045 * legend.count("\n")
    opts.padding = 0.08
    opts.clearBackground = True
    rdMolDraw2D.PrepareAndDrawMolecule(d, mol, legend=legend, highlightAtoms=atoms, highlightAtomColors=colours,
                                       highlightAtomRadii=rad, highlightBonds=[])
    d.FinishDrawing()
    data = d.GetDrawingText()
    if isinstance(data, str):
        path.write_text(data, encoding="utf-8")
    else:
        path.write_bytes(data)
    return path
