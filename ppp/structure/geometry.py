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
from rdkit import Chem, rdBase
from rdkit.Chem import rdCoordGen, rdDepictor
from scipy.spatial import cKDTree

from ..errors import InputError


#: A 2D layout is used as drawn when every pi bond is within this fraction of the mean pi bond ...
BOND_TOLERANCE = 0.15
#: ... and no two non-bonded centres of one chromophore are closer than this fraction of it.
MIN_CONTACT = 0.7
#: Non-bonded pairs are looked for within this many mean bond lengths (a k-d tree, so the check stays
#: O(N log N) at 1,000 centres).
CONTACT_RANGE = 1.5
#: Up to this many centres a chromophore's contacts come from all its distances at once, above from a tree.
_DENSE_CONTACTS = 150
#: Largest molecule (heavy atoms) whose drawing :func:`relax_layout` relaxes: its repulsion term is
#: O(n^2) per step, about a second at this size; beyond it a distorted drawing keeps its warning.
MAX_RELAX_ATOMS = 400


def depiction(mol: Chem.Mol, coordgen: bool = False) -> np.ndarray:
    """2D depiction coordinates of all atoms, (n_atoms, 3), RDKit units (bond ~1.5), z = 0.

    RDKit's own depiction algorithm, or with ``coordgen`` its CoordGen alternative (called directly, so
    that the process-wide preference switch is never turned on: threads of one process may depict at the
    same time). RDKit's switch may have been turned by other code (drawing); results must not depend on
    it, so it is set off for the call and restored afterwards.
    """
    work = Chem.Mol(mol)
    if coordgen:
        work.RemoveAllConformers()
        with rdBase.BlockLogs():  # CoordGen writes notes to stderr
            rdCoordGen.AddCoords(work)
        return np.asarray(work.GetConformer().GetPositions(), dtype=float)
    previous = rdDepictor.GetPreferCoordGen()
    try:
        rdDepictor.SetPreferCoordGen(False)
        rdDepictor.Compute2DCoords(work, clearConfs=True)
    finally:
        rdDepictor.SetPreferCoordGen(previous)
    return np.asarray(work.GetConformer().GetPositions(), dtype=float)


def layout_distortion(pos: np.ndarray, chromophores) -> tuple[float, float, tuple[int, int]]:
    """How far a 2D layout is from regular for the pi-systems.

    chromophores : sequence of (atom_indices (N,), bonds (M, 2) local index pairs)
    Returns the largest |L / L_mean - 1| over the pi bonds, the closest distance / L_mean between two
    non-bonded centres of one chromophore (inf when none is within :data:`CONTACT_RANGE`), and the RDKit
    atom indices of the worst bond.
    """
    pairs = [np.asarray(idx)[np.asarray(b, dtype=int).reshape(-1, 2)] for idx, b in chromophores]
    pairs = np.concatenate(pairs) if pairs else np.zeros((0, 2), dtype=int)
    if not len(pairs):
        return 0.0, np.inf, (-1, -1)
    lengths = np.linalg.norm(pos[pairs[:, 0]] - pos[pairs[:, 1]], axis=1)
    mean = lengths.mean()
    if not mean > 1e-8:
        return np.inf, 0.0, tuple(int(x) for x in pairs[0])
    dev = np.abs(lengths / mean - 1.0)
    worst = int(np.argmax(dev))
    contact = np.inf  # closest non-bonded pair within CONTACT_RANGE bond lengths; inf if none is
    for idx, b in chromophores:
        idx = np.asarray(idx, dtype=int)
        if len(idx) < 3:
            continue
        b = np.asarray(b, dtype=int).reshape(-1, 2)
        p = pos[idx, :2]
        if len(idx) <= _DENSE_CONTACTS:  # small: all distances at once is cheaper than a tree
            diff = p[:, None, :] - p[None, :, :]
            d = np.sqrt((diff * diff).sum(axis=-1))
            d[np.diag_indices_from(d)] = np.inf
            d[b[:, 0], b[:, 1]] = d[b[:, 1], b[:, 0]] = np.inf
            nearest = float(d.min())
            if nearest < CONTACT_RANGE * mean:
                contact = min(contact, nearest / mean)
            continue
        close = cKDTree(p).query_pairs(CONTACT_RANGE * mean, output_type="ndarray")
        if not len(close):
            continue
        bonded = set(zip(b.min(axis=1).tolist(), b.max(axis=1).tolist()))
        keep = [k for k, (i, j) in enumerate(close.tolist()) if (min(i, j), max(i, j)) not in bonded]
        if keep:
            close = close[keep]
            d = np.linalg.norm(p[close[:, 0]] - p[close[:, 1]], axis=1)
            contact = min(contact, float(d.min()) / mean)
    return float(dev[worst]), contact, (int(pairs[worst, 0]), int(pairs[worst, 1]))


def _badness(dev: float, contact: float) -> float:
    return max(0.0, dev - BOND_TOLERANCE, MIN_CONTACT - contact)


def _same_double_bond_sides(mol: Chem.Mol, a: np.ndarray, b: np.ndarray) -> bool:
    """Whether two 2D layouts put the substituents of every acyclic double bond on the same sides (the
    same E/Z geometry)."""
    for bond in mol.GetBonds():
        if bond.GetBondType() != Chem.BondType.DOUBLE or bond.IsInRing():
            continue
        i, j = bond.GetBeginAtomIdx(), bond.GetEndAtomIdx()
        ni = [n.GetIdx() for n in bond.GetBeginAtom().GetNeighbors() if n.GetIdx() != j]
        nj = [n.GetIdx() for n in bond.GetEndAtom().GetNeighbors() if n.GetIdx() != i]
        if not ni or not nj:
            continue
        sides = []
        for pos in (a, b):
            u = pos[j, :2] - pos[i, :2]
            cross = lambda k: u[0] * (pos[k, 1] - pos[i, 1]) - u[1] * (pos[k, 0] - pos[i, 0])
            sides.append(np.sign(cross(ni[0])) == np.sign(cross(nj[0])))
        if sides[0] != sides[1]:
            return False
    return True


def relax_layout(mol: Chem.Mol, pos: np.ndarray) -> np.ndarray:
    """A 2D layout with regular bond lengths, kept as close as possible to ``pos`` in shape.

    Minimises, over the 2D positions of all atoms of ``mol`` (L-BFGS, scipy.optimize), springs that pull
    every bond to the mean bond length of ``pos`` and every 1-3 distance to the one its bond angle in
    ``pos`` gives at that length (the drawing's angles are kept, its lengths are made equal), plus a
    repulsion between atoms further apart in the graph that come closer than one bond length. A plain
    spring model in the spirit of force-directed graph drawing; used only for layouts that RDKit drew
    with compressed or stretched bonds.
    """
    from scipy.optimize import minimize

    n = mol.GetNumAtoms()
    xy = np.asarray(pos, dtype=float)[:, :2].copy()
    bonds = np.array([(b.GetBeginAtomIdx(), b.GetEndAtomIdx()) for b in mol.GetBonds()], dtype=int).reshape(-1, 2)
    if n < 3 or not len(bonds):
        return np.asarray(pos, dtype=float).copy()
    lengths = np.linalg.norm(xy[bonds[:, 0]] - xy[bonds[:, 1]], axis=1)
    unit = float(np.mean(lengths))
    xy /= unit
    angles = []  # (a, c, target 1-3 distance)
    nbrs = [[x.GetIdx() for x in mol.GetAtomWithIdx(i).GetNeighbors()] for i in range(n)]
    for b in range(n):
        for k, a in enumerate(nbrs[b]):
            for c in nbrs[b][k + 1:]:
                u, v = xy[a] - xy[b], xy[c] - xy[b]
                cos = float(u @ v / max(np.linalg.norm(u) * np.linalg.norm(v), 1e-12))
                angles.append((a, c, np.sqrt(max(2.0 - 2.0 * np.clip(cos, -1.0, 1.0), 1e-6))))
    ang = np.array([(a, c) for a, c, _ in angles], dtype=int).reshape(-1, 2)
    ang_target = np.array([t for _, _, t in angles])
    near = np.zeros((n, n), dtype=bool)
    near[bonds[:, 0], bonds[:, 1]] = near[bonds[:, 1], bonds[:, 0]] = True
    if len(ang):
        near[ang[:, 0], ang[:, 1]] = near[ang[:, 1], ang[:, 0]] = True
    far_i, far_j = np.nonzero(np.triu(~near, 1))

    def springs(flat, pairs, target, k):
        x = flat.reshape(-1, 2)
        d = x[pairs[:, 0]] - x[pairs[:, 1]]
        r = np.maximum(np.linalg.norm(d, axis=1), 1e-9)
        e = k * np.sum((r - target) ** 2)
        g = np.zeros_like(x)
        coef = (2.0 * k * (r - target) / r)[:, None] * d
        np.add.at(g, pairs[:, 0], coef)
        np.add.at(g, pairs[:, 1], -coef)
        return e, g

    def energy(flat):
        e, g = springs(flat, bonds, 1.0, 1.0)
        if len(ang):
            e2, g2 = springs(flat, ang, ang_target, 0.5)
            e, g = e + e2, g + g2
        if len(far_i):
            x = flat.reshape(-1, 2)
            d = x[far_i] - x[far_j]
            r = np.maximum(np.linalg.norm(d, axis=1), 1e-9)
            close = r < 1.0
            if close.any():
                pairs = np.stack([far_i[close], far_j[close]], axis=1)
                e3, g3 = springs(flat, pairs, 1.0, 1.0)
                e, g = e + e3, g + g3
        return e, g.ravel()

    res = minimize(energy, xy.ravel(), jac=True, method="L-BFGS-B", options={"maxiter": 2000})
    out = np.zeros((n, 3))
    out[:, :2] = res.x.reshape(-1, 2) * unit
    return out


def planar_layout(mol: Chem.Mol, chromophores) -> tuple[np.ndarray, str | None]:
    """2D positions of all atoms for the idealised planar centres, and a warning when they are distorted.

    RDKit's depiction is used when it is regular for the pi-systems (:data:`BOND_TOLERANCE`,
    :data:`MIN_CONTACT`); it is not always: crowded groups get compressed bonds (the carboxyl C-O of
    fluorescein's pendant ring at 0.54 of the standard length), bridged polycycles can place two bonded
    centres 0.1 bond lengths apart, and macrocycles (porphyrins) get stretched bonds. Then the CoordGen
    layout is tried, and if that is not regular either, RDKit's drawing relaxed to equal bond lengths
    (:func:`relax_layout`, up to :data:`MAX_RELAX_ATOMS` atoms); the first of them that is regular and draws every acyclic double bond with the
    same E/Z is used. If neither is, RDKit's drawing is kept (an inherently non-planar graph such as a
    helicene cannot be drawn regularly) and the returned warning names the worst bond: gamma and the
    transition dipoles of that region are then approximate.
    """
    pos = depiction(mol)
    dev, contact, pair = layout_distortion(pos, chromophores)
    if _badness(dev, contact) == 0.0:
        return pos, None
    makers = [lambda: depiction(mol, coordgen=True)]
    if mol.GetNumAtoms() <= MAX_RELAX_ATOMS:
        makers.append(lambda: relax_layout(mol, pos))
    for make in makers:
        alt = make()
        if _badness(*layout_distortion(alt, chromophores)[:2]) == 0.0 and _same_double_bond_sides(mol, pos, alt):
            return alt, None
    return pos, _distortion_warning(mol, dev, contact, pair)


def layout_warning(mol: Chem.Mol, pos: np.ndarray, chromophores) -> str | None:
    """The warning of :func:`planar_layout` for a given 2D layout (a drawing from an input file, used as
    drawn), or None when it is regular."""
    dev, contact, pair = layout_distortion(pos, chromophores)
    if _badness(dev, contact) == 0.0:
        return None
    return _distortion_warning(mol, dev, contact, pair,
                               hint="a regular 2D drawing or 3D coordinates in the file avoid it")


def _distortion_warning(mol: Chem.Mol, dev: float, contact: float, pair: tuple[int, int],
                        hint: str = "coordinates from a MOL/SDF file (--input-coordinates) avoid it") -> str:
    """One line describing a distorted 2D layout of the pi-centres."""
    if dev > BOND_TOLERANCE:
        i, j = pair
        what = (f"the bond between atom {i + 1} ({mol.GetAtomWithIdx(i).GetSymbol()}) and atom {j + 1} "
                f"({mol.GetAtomWithIdx(j).GetSymbol()}) is drawn {dev:.0%} off the standard length")
    else:
        what = f"two unbonded centres are drawn {contact:.2f} bond lengths apart"
    return (f"the 2D layout of the pi-system is distorted ({what}): repulsion integrals and transition dipoles "
            f"near it are approximate; {hint}")


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
    positions : optional (all atom positions, is 3D), when already computed for the molecule (the driver
        passes :func:`planar_layout`'s, checked against every chromophore); without it the depiction is
        checked against this chromophore alone
    """
    if positions is None:
        positions = ((planar_layout(mol, [(atom_indices, bonds)])[0], False) if source == "depiction"
                     else atom_positions(mol, source))
    pos, is3d = positions
    if not is3d:
        ref = all_pi_bonds if all_pi_bonds is not None and len(all_pi_bonds) else atom_indices[bonds]
        pos = scale_to_bond_length(pos, np.asarray(ref).reshape(-1, 2), bond_length)
    sub = pos[atom_indices]
    return principal_frame(sub)
