"""The atoms around a chromophore that keep solvent away from it: every heavy atom of the chromophore's own
covalent fragment that is not one of its pi-centres, and the fragment's hydrogen atoms, as van der Waals
spheres in the chromophore's coordinate frame. Other fragments of the input (the Na+ of a sodium
sulfonate dye, a chloride, water of crystallisation) are left out: a salt is dissociated in the solvent
the continuum stands for, and a counter-ion drawn next to the dye would otherwise sit wherever the 2D
depiction happened to put it. Used by the solvent reaction field (ppp.model.solvent) to descreen the
Born radii of the pi-centres: the solute cavity of a continuum model is the whole molecule, not only its
pi-centres.

Heavy atoms take the positions of the same depiction (or input record) the pi-centres came from, moved by
the rigid transformation that maps the centres onto their principal-axis coordinates (Kabsch 1976).
Hydrogen atoms are placed from the heavy-atom skeleton with standard bond lengths (C-H 1.09, N-H 1.01,
O-H 0.96, S-H 1.34 A; common practice): on an sp2 or sp atom in the molecular plane, opposite to the heavy
neighbours (two hydrogens 120 degrees apart); on an sp3 atom on the tetrahedral cone around the direction
opposite to the heavy neighbours (109.5 degrees from the bond to a single neighbour), out of the plane
where there are two or three.
"""
from __future__ import annotations

import functools
import math

import numpy as np
from rdkit import Chem

from ..errors import ParameterError
from .geometry import scale_to_bond_length

#: van der Waals radii, A: Bondi, J. Phys. Chem. 68, 441 (1964); B, Al, Ge, Sb, Bi, Be, Ca from Mantina,
#: Chamberlin, Valero, Cramer & Truhlar, J. Phys. Chem. A 113, 5806 (2009). From memory. The metals are
#: for atoms covalently bound to a dye (a metal the pi model leaves out still takes up room in the cavity).
VDW_RADIUS_ANGSTROM = {"H": 1.20, "C": 1.70, "N": 1.55, "O": 1.52, "F": 1.47, "P": 1.80, "S": 1.80,
                       "Cl": 1.75, "Br": 1.85, "I": 1.98, "Se": 1.90, "Si": 2.10, "B": 1.92,
                       "Te": 2.06, "As": 1.85, "Sn": 2.17, "Pb": 2.02, "Ga": 1.87, "In": 1.93, "Tl": 1.96,
                       "Al": 1.84, "Ge": 2.11, "Sb": 2.06, "Bi": 2.07, "Be": 1.53,
                       "Li": 1.82, "Na": 2.27, "K": 2.75, "Mg": 1.73, "Ca": 2.31,
                       "Ni": 1.63, "Cu": 1.40, "Zn": 1.39, "Pd": 1.63, "Ag": 1.72, "Cd": 1.58, "Pt": 1.72,
                       "Au": 1.66, "Hg": 1.55}
#: X-H bond lengths, A (common practice); others 1.0 A.
XH_LENGTH = {"C": 1.09, "N": 1.01, "O": 0.96, "S": 1.34}
_TETRAHEDRAL = math.radians(109.47)


@functools.lru_cache(maxsize=1)
def _rdkit_radii() -> dict[str, float]:
    """Element symbol -> van der Waals radius (A) of RDKit's periodic table, elements 1-118."""
    pt = Chem.GetPeriodicTable()
    return {pt.GetElementSymbol(z): float(pt.GetRvdw(z)) for z in range(1, 119)}


def vdw_radius(symbol: str) -> float:
    """Radius (A) of :data:`VDW_RADIUS_ANGSTROM`; for an element it lacks (transition metals of dye
    complexes, lanthanides), the van der Waals radius of RDKit's periodic table (its element data; about
    2.0-2.5 A for these metals), so that a complex bound to a dye can still be computed in a solvent."""
    try:
        return VDW_RADIUS_ANGSTROM[symbol]
    except KeyError:
        pass
    r = _rdkit_radii().get(symbol, 0.0)
    if not r > 0.0:
        raise ParameterError(f"no van der Waals radius for element {symbol} in the solvent model "
                             f"(known: {', '.join(VDW_RADIUS_ANGSTROM)} and RDKit's table)")
    return r


def _kabsch(a: np.ndarray, b: np.ndarray):
    """Rotation r (3, 3) and shift t minimising |a r + t - b| (Kabsch 1976); proper rotation."""
    ca, cb = a.mean(axis=0), b.mean(axis=0)
    u, _, vt = np.linalg.svd((a - ca).T @ (b - cb))
    d = np.sign(np.linalg.det(u @ vt)) or 1.0
    r = u @ np.diag([1.0, 1.0, d]) @ vt
    return r, cb - ca @ r


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v)
    return v / n if n > 1e-9 else np.array([1.0, 0.0, 0.0])


def _hydrogen_directions(pos: np.ndarray, atom, normal: np.ndarray) -> list[np.ndarray]:
    h = atom.GetTotalNumHs()
    if h == 0:
        return []
    nbrs = [n.GetIdx() for n in atom.GetNeighbors() if n.GetAtomicNum() > 1]
    me = pos[atom.GetIdx()]
    d0 = _unit(-sum((_unit(pos[j] - me) for j in nbrs), np.zeros(3))) if nbrs else np.array([1.0, 0.0, 0.0])
    if abs(d0 @ normal) > 0.99:  # no in-plane reference: pick any perpendicular
        normal = _unit(np.cross(d0, [0.0, 1.0, 0.0]) if abs(d0[1]) < 0.9 else np.cross(d0, [1.0, 0.0, 0.0]))
    inplane = _unit(np.cross(normal, d0))  # perpendicular to d0, in the molecular plane
    sp3 = atom.GetHybridization() == Chem.HybridizationType.SP3
    if h == 1:
        return [d0]
    if not sp3:  # trigonal (e.g. NH2 on a ring, terminal =CH2): in plane, 120 degrees apart
        half = math.radians(60.0)
        return [math.cos(half) * d0 + s * math.sin(half) * inplane for s in (1, -1)][:h]
    # tetrahedral cone around d0; with one heavy neighbour the cone makes 109.5 deg with that bond
    theta = math.pi - _TETRAHEDRAL if len(nbrs) == 1 else math.radians(54.75)
    if h == 2:
        axes = [normal, -normal]
    else:
        axes = [math.cos(phi) * inplane + math.sin(phi) * normal for phi in (0.0, 2 * math.pi / 3, 4 * math.pi / 3)]
        if h > 3:
            axes += [-ax for ax in axes]
    return [math.cos(theta) * d0 + math.sin(theta) * ax for ax in axes[:h]]


def cavity_spheres(mol: Chem.Mol, atom_indices: np.ndarray, centre_coords: np.ndarray,
                   positions: tuple[np.ndarray, bool], bond_length: float,
                   all_pi_bonds: np.ndarray | None = None) -> np.ndarray:
    """(K, 4) rows [x, y, z, radius] (A) of the atoms other than the chromophore's pi-centres.

    mol : the heavy-atom molecule the centres were perceived in;  atom_indices : (N,) the centres
    centre_coords : (N, 3) their coordinates as placed (principal-axis frame)
    positions : (all atom positions, is 3D), the layout the centres were placed from
        (:func:`ppp.structure.geometry.planar_layout` or the input's coordinates)
    bond_length, all_pi_bonds : as for :func:`ppp.structure.geometry.centre_coordinates`
    """
    atom_indices = np.asarray(atom_indices, dtype=int)
    pos, is3d = positions
    if not is3d:
        ref = all_pi_bonds if all_pi_bonds is not None and len(all_pi_bonds) else np.zeros((0, 2), dtype=int)
        pos = scale_to_bond_length(pos, np.asarray(ref, dtype=int).reshape(-1, 2), bond_length)
    if len(atom_indices) >= 3:
        r, t = _kabsch(pos[atom_indices], np.asarray(centre_coords, dtype=float))
    else:  # two centres: a line; rotate that line onto the placed one
        r, t = _kabsch(np.vstack([pos[atom_indices], pos[atom_indices].mean(axis=0) + [0, 0, 1.0]]),
                       np.vstack([centre_coords, np.mean(centre_coords, axis=0) + [0, 0, 1.0]]))
    pos = pos @ r + t
    pos[atom_indices] = centre_coords  # exact for the centres themselves
    normal = np.array([0.0, 0.0, 1.0])  # principal-axis frame: z is the normal of a planar chromophore
    centres = set(atom_indices.tolist())
    own = set()  # atoms of the covalent fragment(s) holding the centres (see the module docstring)
    for frag in Chem.GetMolFrags(mol):
        if centres.intersection(frag):
            own.update(frag)
    rows = []
    for atom in mol.GetAtoms():
        k = atom.GetIdx()
        sym = atom.GetSymbol()
        if atom.GetAtomicNum() == 1 or k not in own:
            continue
        if k not in centres:
            rows.append([*pos[k], vdw_radius(sym)])
        bond = XH_LENGTH.get(sym, 1.0)
        for d in _hydrogen_directions(pos, atom, normal):
            rows.append([*(pos[k] + bond * d), VDW_RADIUS_ANGSTROM["H"]])
    return np.array(rows, dtype=float).reshape(-1, 4)
