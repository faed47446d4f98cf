"""Idealised planar coordinates for the pi-centres.

By default the coordinates come from RDKit's 2D depiction (which keeps E/Z double-bond geometry),
scaled so that the mean pi-pi bond is the parameter set's standard length (1.40 A in ``classic``).
Coordinates from an input MOL/SDF record can be used instead: a 3D conformer is taken as is (A);
a 2D one is scaled like a depiction, since 2D drawings carry no length unit.

Every result is put in its principal-axis frame: origin at the centroid of the pi-centres, x along
the long in-plane axis, y along the short one, z normal to the plane (for planar input z = 0).
"""
from __future__ import annotations

import numpy as np
from rdkit import Chem
from rdkit.Chem import rdDepictor

from ..errors import InputError


def depiction(mol: Chem.Mol) -> np.ndarray:
    """2D depiction coordinates of all atoms, (n_atoms, 3), RDKit units (bond ~1.5), z = 0.

    Always RDKit's own depiction algorithm: RDKit keeps a process-wide switch to its CoordGen
    alternative, which other code (drawing) may turn on; results must not depend on it, so the switch
    is set for this call and restored afterwards.
    """
    work = Chem.Mol(mol)
    previous = rdDepictor.GetPreferCoordGen()
    try:
        rdDepictor.SetPreferCoordGen(False)
        rdDepictor.Compute2DCoords(work, clearConfs=True)
    finally:
        rdDepictor.SetPreferCoordGen(previous)
    return np.asarray(work.GetConformer().GetPositions(), dtype=float)


def input_coordinates(mol: Chem.Mol) -> tuple[np.ndarray, bool]:
    """Coordinates stored with the molecule (from a MOL/SDF record) and whether they are 3D."""
    if mol.GetNumConformers() == 0:
        raise InputError("no input coordinates: the structure came without a conformer")
    conf = mol.GetConformer()
    pos = np.asarray(conf.GetPositions(), dtype=float)
    is3d = bool(conf.Is3D()) and bool(np.ptp(pos[:, 2]) > 1e-6)
    return pos, is3d


def scale_to_bond_length(pos: np.ndarray, bonds: np.ndarray, bond_length: float) -> np.ndarray:
    """Scale coordinates so that the mean length of the given bonds equals ``bond_length``."""
    if len(bonds) == 0:
        return pos.copy()
    lengths = np.linalg.norm(pos[bonds[:, 0]] - pos[bonds[:, 1]], axis=1)
    mean = lengths.mean()
    if not mean > 1e-8:
        raise InputError("input coordinates are degenerate (bonded atoms on top of each other)")
    return pos * (bond_length / mean)


_AXES = np.arange(3)


def principal_frame(pos: np.ndarray) -> np.ndarray:
    """Rotate (N, 3) coordinates into the principal-axis frame of the points (unit masses).

    x: largest spread, y: next, z: smallest. The sign of each axis is fixed so that the component of
    largest magnitude of its direction vector is positive, which makes the frame reproducible.
    """
    centred = pos - pos.mean(axis=0)
    if len(pos) < 2:
        return centred
    cov = centred.T @ centred
    w, v = np.linalg.eigh(cov)
    v = v[:, ::-1]  # descending spread
    # sign of each axis: its component of largest magnitude positive (argmax takes the first of ties)
    big = np.argmax(np.abs(v), axis=0)
    v = v * np.where(v[big, _AXES] < 0, -1.0, 1.0)
    (a, b, c), (d, e, f), (g, h, i) = v.tolist()
    if a * (e * i - f * h) - b * (d * i - f * g) + c * (d * h - e * g) < 0:  # keep a right-handed frame
        v[:, 2] = -v[:, 2]
    out = centred @ v
    out[np.abs(out) < 1e-12] = 0.0
    return out


def atom_positions(mol: Chem.Mol, source: str = "depiction") -> tuple[np.ndarray, bool]:
    """Positions of all atoms (n_atoms, 3) from ``source`` ("depiction" or "input") and whether they
    are 3D; computed once per molecule and shared by its chromophores (a depiction costs 0.1-0.3 ms)."""
    if source == "depiction":
        return depiction(mol), False
    if source == "input":
        return input_coordinates(mol)
    raise InputError(f"unknown coordinate source '{source}'; valid: depiction, input")


def centre_coordinates(mol: Chem.Mol, atom_indices: np.ndarray, bonds: np.ndarray, bond_length: float,
                       source: str = "depiction", all_pi_bonds: np.ndarray | None = None,
                       positions: tuple[np.ndarray, bool] | None = None) -> np.ndarray:
    """Coordinates (N, 3) in angstrom of the given pi-centres, in their principal-axis frame.

    Parameters
    ----------
    mol : RDKit molecule (heavy atoms)
    atom_indices : (N,) int, the centres
    bonds : (M, 2) int, local index pairs of the chromophore's bonds (used for scaling)
    bond_length : float, A, standard pi bond length for depiction scaling
    source : "depiction" (default) or "input"
    all_pi_bonds : optional (K, 2) global atom-index pairs of every pi bond in the molecule; when
        given, the scale is set from all of them so that separate chromophores share one scale.
    positions : optional ``atom_positions(mol, source)``, when already computed for the molecule
    """
    pos, is3d = atom_positions(mol, source) if positions is None else positions
    if not is3d:
        ref = all_pi_bonds if all_pi_bonds is not None and len(all_pi_bonds) else atom_indices[bonds]
        pos = scale_to_bond_length(pos, np.asarray(ref).reshape(-1, 2), bond_length)
    sub = pos[atom_indices]
    return principal_frame(sub)
