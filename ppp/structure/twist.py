"""Twisted pi bonds: resonance integrals scaled by the angle between the p-orbital axes, and 3D
conformers from RDKit for molecules given without coordinates.

For a pi bond between centres i and j with p-orbital axes n_i and n_j (unit vectors),

    beta_ij(theta) = beta_ij(0) |cos theta_ij|,   cos theta_ij = n_i . n_j

the cosine law of the overlap of two p orbitals rotated about their common axis (Mulliken 1949), the
usual way to treat twisted biaryls and triarylmethane dyes in pi-electron work (common practice). The sign
of an orbital axis is arbitrary, so the absolute value is taken.

The p axis of a centre is the normal to the plane of its sigma neighbours (heavy atoms; hydrogens are not
needed): for three neighbours the least-squares plane through them, for two the plane through the centre
and both. A centre with one heavy neighbour, or collinear neighbours (nitrile, alkyne), has no defined
axis (nor has one whose two bonds are within 30 degrees of straight: an alkyne carbon a force field bent
a little); bonds to it keep the untwisted beta (factor 1).

A force field relaxes the one resonance structure it is given. Where a charge is delocalised (cyanines,
triarylmethane and xanthene dyes, push-pull chromophores written with a separated charge), half of the
bonds along its path are formal single bonds in that structure and twist almost freely, although they
have partial double-bond character: MMFF94 turned two rings of crystal violet by 90 degrees instead of
the ~30 degree propeller, and a formal single bond of thiacyanine by 77 degrees. For a conformer, the
acyclic bonds whose order differs between the molecule's resonance structures
(:func:`resonance_variable_bonds`) therefore keep the untwisted beta.
"""
from __future__ import annotations

import numpy as np
from rdkit import Chem, rdBase
from rdkit.Chem import AllChem
from rdkit.Chem import rdForceFieldHelpers

from ..errors import InputError, one_line

#: Conformers embedded and relaxed; the lowest force-field energy is kept.
N_CONFORMERS = 8
#: Seconds RDKit may spend on one embedding attempt.
EMBED_TIMEOUT_S = 5
#: Resonance structures enumerated at most (RDKit's own default is 1000; beyond this the bonds found
#: so far are used, which can only leave fewer bonds untwisted).
MAX_RESONANCE_STRUCTURES = 200
#: A centre whose two bonds make an angle above 150 degrees (sine below 0.5) has no defined p axis: an
#: sp centre (alkyne, cumulene) that a force field left a few degrees from straight; sp2 angles are
#: 105-135 degrees.
_SIN_STRAIGHT = 0.5
#: Below this |cross product| (A^2) two neighbour vectors count as collinear.
_COLLINEAR = 1e-3


def p_axis(centre: np.ndarray, neighbours: np.ndarray) -> np.ndarray | None:
    """Unit p-orbital axis of a centre from its sigma-neighbour positions (k, 3), or None if undefined."""
    neighbours = np.asarray(neighbours, dtype=float).reshape(-1, 3)
    if len(neighbours) >= 3:
        pts = neighbours - neighbours.mean(axis=0)
        _, s, vt = np.linalg.svd(pts)
        if s[1] < _COLLINEAR:
            return None
        return vt[2] / np.linalg.norm(vt[2])
    if len(neighbours) == 2:
        a, b = neighbours[0] - centre, neighbours[1] - centre
        n = np.cross(a, b)
        norm = np.linalg.norm(n)
        # an sp centre (alkyne, nitrile N, cumulene) bent by a force field by a few degrees still has no
        # plane: the axis of such a near-straight angle would point anywhere
        if norm < _COLLINEAR or norm < _SIN_STRAIGHT * np.linalg.norm(a) * np.linalg.norm(b):
            return None
        return n / norm
    return None


def resonance_variable_bonds(mol: Chem.Mol) -> set[frozenset[int]]:
    """Acyclic bonds that are single in one resonance structure of ``mol`` and double in another, as
    sets of the two RDKit atom indices.

    Resonance structures are RDKit's (``ResonanceMolSupplier``: moves of charges and multiple bonds
    through conjugated systems, without creating new charge separation); ring bonds are left out, since
    a ring keeps them planar whatever their formal order. A neutral molecule with no charged resonance
    form (polyenes, biaryls, azobenzenes) has none.
    """
    if not any(a.GetFormalCharge() for a in mol.GetAtoms()):
        return set()
    orders: dict[int, set[float]] = {}
    try:
        supplier = Chem.ResonanceMolSupplier(mol, 0, MAX_RESONANCE_STRUCTURES)
        for k in range(len(supplier)):
            res = supplier[k]
            if res is None:
                continue
            for bond in res.GetBonds():
                if not bond.IsInRing():
                    orders.setdefault(bond.GetIdx(), set()).add(bond.GetBondTypeAsDouble())
    except (RuntimeError, ValueError) as exc:
        raise InputError(f"resonance structures for the conformer's twist angles failed (RDKit: {one_line(exc)})") from None
    out = set()
    for idx, seen in orders.items():
        if len(seen) > 1:
            b = mol.GetBondWithIdx(idx)
            out.add(frozenset((b.GetBeginAtomIdx(), b.GetEndAtomIdx())))
    return out


def twist_factors(mol: Chem.Mol, positions: np.ndarray, atom_indices: np.ndarray,
                  bonds: np.ndarray, untwisted: set[frozenset[int]] | None = None) -> np.ndarray:
    """|cos theta| between the p axes of each bonded pair of centres, (M,).

    Parameters
    ----------
    mol : heavy-atom RDKit molecule whose atoms ``positions`` describes
    positions : (n_atoms, 3) A, 3D coordinates of all atoms of ``mol``
    atom_indices : (N,) RDKit indices of the chromophore's centres
    bonds : (M, 2) local index pairs
    untwisted : bonds (sets of two RDKit atom indices) that keep factor 1 whatever their geometry
    """
    positions = np.asarray(positions, dtype=float)
    axes = []
    for a in atom_indices:
        atom = mol.GetAtomWithIdx(int(a))
        nbrs = [nb.GetIdx() for nb in atom.GetNeighbors() if nb.GetAtomicNum() != 1]
        axes.append(p_axis(positions[int(a)], positions[nbrs]))
    out = np.ones(len(bonds))
    untwisted = untwisted or set()
    for k, (i, j) in enumerate(np.asarray(bonds, dtype=int).reshape(-1, 2)):
        if frozenset((int(atom_indices[i]), int(atom_indices[j]))) in untwisted:
            continue
        if axes[i] is not None and axes[j] is not None:
            out[k] = min(1.0, abs(float(axes[i] @ axes[j])))
    return out


def embed_conformer(mol: Chem.Mol, seed: int = 42, n_conformers: int = N_CONFORMERS) -> tuple[Chem.Mol, str]:
    """:func:`_embed_conformer` with RDKit's log silenced: its force-field typers print a line per atom
    they cannot type (metal ions) to stderr, which a batch would repeat for every such molecule; what
    matters reaches the user as ppp's own one-line error."""
    with rdBase.BlockLogs():
        return _embed_conformer(mol, seed, n_conformers)


def _embed_conformer(mol: Chem.Mol, seed: int, n_conformers: int) -> tuple[Chem.Mol, str]:
    """The lowest-energy of ``n_conformers`` 3D conformers: RDKit ETKDG embeddings (Riniker & Landrum
    2015) each relaxed with MMFF94 (Halgren 1996), or UFF (Rappe et al. 1992) for atoms MMFF does not
    cover. Taking the force-field minimum over several starts is common practice; a single embedding
    can stay in a twisted local minimum (seen for polymethine chains).

    Returns the heavy-atom molecule with that conformer (atom order of ``mol``'s heavy atoms) and the
    force field used. Raises InputError when embedding fails or flips a specified E/Z double bond.
    """
    # E/Z as bond stereo (STEREOE/STEREOZ) from the SMILES bond directions: the parser here sanitizes
    # without assigning stereochemistry, and embedding and the check below read the assigned form
    ref = Chem.Mol(mol)
    Chem.AssignStereochemistry(ref, cleanIt=True, force=True)
    work = Chem.AddHs(_trans_where_unspecified(ref))
    params = AllChem.ETKDGv3()
    params.randomSeed = int(seed)
    params.timeout = EMBED_TIMEOUT_S
    try:
        cids = [c for c in AllChem.EmbedMultipleConfs(work, int(n_conformers), params) if c >= 0]
        if not cids:
            # long all-E polyenes (carotenoids) fail ETKDG's chirality check; embed without it and verify
            # below that every specified double bond kept its E/Z configuration
            params.enforceChirality = False
            cids = [c for c in AllChem.EmbedMultipleConfs(work, int(n_conformers), params) if c >= 0]
            if not cids:
                work.RemoveAllConformers()
                cids = [c for c in [AllChem.EmbedMolecule(work, params)] if c >= 0]
    except RuntimeError as exc:
        # RDKit's distance-geometry bounds can fail outright on metal chelates ("Invariant Violation ...
        # bad lower bound"): a structure it cannot embed, not a bug here
        detail = next((ln.strip() for ln in str(exc).splitlines()[1:] if ln.strip()), str(exc).strip())
        raise InputError(f"3D conformer embedding failed (RDKit ETKDG: {detail})") from None
    if not cids:
        raise InputError("3D conformer embedding failed (RDKit ETKDG)")
    try:
        if rdForceFieldHelpers.MMFFHasAllMoleculeParams(work):
            res = rdForceFieldHelpers.MMFFOptimizeMoleculeConfs(work, maxIters=2000)
            field = "MMFF94"
        elif rdForceFieldHelpers.UFFHasAllMoleculeParams(work):
            res = rdForceFieldHelpers.UFFOptimizeMoleculeConfs(work, maxIters=2000)
            field = "UFF"
        else:
            raise InputError("no force field covers every atom; cannot relax a 3D conformer")
    except RuntimeError as exc:
        raise InputError(f"force-field relaxation of the 3D conformer failed (RDKit: {one_line(exc)})") from None
    energies = [e for _, e in res]
    best = cids[int(np.argmin(energies))]
    out = Chem.Mol(work, confId=best)
    _check_double_bond_stereo(ref, out)
    return Chem.RemoveHs(out), field


def _trans_where_unspecified(mol: Chem.Mol) -> Chem.Mol:
    """Copy of ``mol`` in which every acyclic double bond that could be E or Z but was given without
    either is set trans along the pi-system: at each end the neighbour that continues the conjugation
    (an sp2 or sp atom; among several the one of more heavy neighbours, then the lower index).

    Without it the embedding picks E or Z at random for such bonds, so that a polymethine chain written
    without stereo marks (common for cyanines) could come out with cis bonds and strongly twisted; trans
    is what the planar depiction draws and the usual configuration of dye chains. Bonds given as E or Z
    keep their configuration."""
    work = Chem.Mol(mol)
    Chem.FindPotentialStereoBonds(work, cleanIt=False)  # open stereo bonds become STEREOANY
    conj = (Chem.HybridizationType.SP2, Chem.HybridizationType.SP)
    for bond in work.GetBonds():
        if bond.GetStereo() != Chem.BondStereo.STEREOANY or bond.IsInRing():
            continue
        ends = (bond.GetBeginAtom(), bond.GetEndAtom())
        picks = []
        for atom, other in (ends, ends[::-1]):
            nbrs = [nb for nb in atom.GetNeighbors() if nb.GetIdx() != other.GetIdx() and nb.GetAtomicNum() > 1]
            if not nbrs:
                break
            nbrs.sort(key=lambda nb: (nb.GetHybridization() not in conj, -nb.GetDegree(), nb.GetIdx()))
            picks.append(nbrs[0].GetIdx())
        if len(picks) == 2:
            bond.SetStereoAtoms(picks[0], picks[1])
            bond.SetStereo(Chem.BondStereo.STEREOTRANS)
        else:
            bond.SetStereo(Chem.BondStereo.STEREONONE)
    return work


def _check_double_bond_stereo(mol: Chem.Mol, embedded: Chem.Mol) -> None:
    """Raise InputError if the conformer flipped a specified E/Z double bond."""
    want = {}
    for b in mol.GetBonds():
        if b.GetStereo() in (Chem.BondStereo.STEREOE, Chem.BondStereo.STEREOZ):
            want[b.GetIdx()] = b.GetStereo()
    if not want:
        return
    got = Chem.Mol(embedded)
    Chem.AssignStereochemistryFrom3D(got, replaceExistingTags=True)
    for idx, st in want.items():
        if got.GetBondWithIdx(idx).GetStereo() != st:
            raise InputError(f"3D conformer embedding changed the E/Z configuration of bond {idx + 1}")
