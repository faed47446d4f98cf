"""Programmatic test molecules for the benchmarks: polyene chains, linear acenes and rhombic
benzenoid flakes (graphene-like) of a chosen size, with exact lattice coordinates.

Benzenoid flakes are built on a honeycomb lattice (C-C 1.40 A, common practice for aromatic rings):
hexagon centres of a parallelogram patch, vertices shared between neighbouring hexagons, one hydrogen
on every carbon with two carbon neighbours. The molecule carries a 2D conformer with the lattice
coordinates, so the pipeline can use them ("input" coordinates) instead of a 2D depiction.
"""
from __future__ import annotations

import math

import numpy as np
from rdkit import Chem
from rdkit.Geometry import Point3D

CC = 1.40


def polyene(n_centres: int) -> str:
    """SMILES of the all-trans polyene with ``n_centres`` carbons (n even), CH2=CH-...-CH=CH2."""
    if n_centres % 2 or n_centres < 2:
        raise ValueError("polyene needs an even number of carbons")
    return "C=C" + "/C=C" * (n_centres // 2 - 1)


def acene(n_rings: int) -> Chem.Mol:
    """Linear acene with ``n_rings`` rings (4 n + 2 carbons) with lattice coordinates."""
    return rhombus(1, n_rings)


def rhombus(rows: int, cols: int) -> Chem.Mol:
    """Benzenoid parallelogram: ``rows`` rows of ``cols`` linearly fused hexagons, each row shifted by
    half a hexagon against the one below (rows = 1: an acene; 2 x 2: pyrene)."""
    return benzenoid([(i, j) for i in range(rows) for j in range(cols)])


def armchair_ribbon(rows: int, cols: int = 3) -> Chem.Mol:
    """Graphene-like ribbon: ``rows`` rows of ``cols`` hexagons, rows shifted alternately by half a
    hexagon, which gives armchair edges along the long side (rows = 1: an acene; cols = 1: a
    phenacene). Kekule for cols <= 4 (checked with RDKit up to 11 rows); 2 and 3 hexagons wide it has
    a stable closed-shell PPP ground state at all lengths tried (S1 and T1 > 0 up to 1,000 centres)."""
    return benzenoid([(i, j) for i in range(rows) for j in range(cols)], offset_rows=True)


def ribbon_with_about(n_centres: int, cols: int = 3) -> Chem.Mol:
    """Armchair ribbon ``cols`` hexagons wide with about ``n_centres`` carbons: a ribbon of r rows has
    (2 cols + 2) r + 2 cols of them."""
    rows = max(1, round((n_centres - 2 * cols) / (2 * cols + 2)))
    return armchair_ribbon(rows, cols)


def _hex_centre(i: int, j: int, offset_rows: bool = False) -> np.ndarray:
    # pointy-top hexagons; row i shifted by i/2 hexagon widths (parallelogram) or by (i mod 2)/2 (offset)
    w = math.sqrt(3.0) * CC
    shift = 0.5 * (i % 2) if offset_rows else 0.5 * i
    return np.array([w * (j + shift), 1.5 * CC * i])


def _ring_keys(i: int, j: int, offset_rows: bool):
    c = _hex_centre(i, j, offset_rows)
    out = []
    for k in range(6):
        ang = math.radians(90 + 60 * k)
        p = c + CC * np.array([math.cos(ang), math.sin(ang)])
        out.append((round(p[0], 3), round(p[1], 3)))
    return out


def benzenoid(cells, offset_rows: bool = False) -> Chem.Mol:
    """All-carbon benzenoid from hexagon cells (row, column)."""
    pts = []
    index = {}
    bonds = set()
    for i, j in cells:
        ring = []
        for key in _ring_keys(i, j, offset_rows):
            if key not in index:
                index[key] = len(pts)
                pts.append(np.array(key))
            ring.append(index[key])
        for k in range(6):
            a, b = ring[k], ring[(k + 1) % 6]
            bonds.add((min(a, b), max(a, b)))
    rw = Chem.RWMol()
    for _ in pts:
        at = Chem.Atom(6)
        at.SetIsAromatic(True)
        rw.AddAtom(at)
    for a, b in sorted(bonds):
        rw.AddBond(a, b, Chem.BondType.AROMATIC)
    mol = rw.GetMol()
    for at in mol.GetAtoms():
        at.SetNumExplicitHs(3 - at.GetDegree())
        at.SetNoImplicit(True)
    Chem.SanitizeMol(mol)
    conf = Chem.Conformer(mol.GetNumAtoms())
    for k, p in enumerate(pts):
        conf.SetAtomPosition(k, Point3D(float(p[0]), float(p[1]), 0.0))
    conf.Set3D(False)
    mol.AddConformer(conf, assignId=True)
    return mol


def flake_with_about(n_centres: int) -> Chem.Mol:
    """Rhombic flake (benzenoid parallelogram, as square as possible) with about ``n_centres`` carbons.

    A parallelogram of r x c hexagons has 2 (r + 1)(c + 1) - 2 carbons and binomial(r + c, r) Kekule
    structures (Gordon & Davison 1952), so every size is closed-shell Kekule.
    """
    best = min(((abs(2 * (r + 1) * (c + 1) - 2 - n_centres), abs(r - c), r, c)
                for r in range(1, 40) for c in range(r, 40)))
    return rhombus(best[2], best[3])
