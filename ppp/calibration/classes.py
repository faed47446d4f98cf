"""Chemical class of a chromophore, from its structure alone, for per-class band uncertainties.

The classes are those of the reference set. The rules are checked in order and the first that fits wins;
they follow the usual dye-chemistry grouping (common practice):

1. ``xanthene``: dibenzo-pyran (xanthene) skeleton, any oxidation state (fluoresceins, rhodamines, pyronins)
2. ``coumarin``: 2H-chromen-2-one skeleton
3. ``thiophene``: a thiophene ring and no other heteroatom in the pi-system
4. ``azo``: an N=N double bond between two carbons
5. ``cyanine``: a pi-system with net positive charge (cyanines, triarylmethane, thiazine and other
   cationic dyes), or a boron-chelated dipyrrin (BODIPY)
6. ``polyene``: four or more C=C double bonds outside rings (carotenoids, retinoids), or a hydrocarbon
   pi-system with a C=C double bond outside rings (stilbenes, diphenylpolyenes)
7. hydrocarbons: ``non-alternant`` if the pi graph has an odd ring (not bipartite), else ``benzenoid``
8. ``push-pull``: a donor (amino N, hydroxy/ether O, phenolate O-) and an acceptor (nitro, cyano,
   carbonyl) in one pi-system, unless the carbonyl is part of a quinone or indigoid. A donor must be
   bonded to a pi-atom other than a carbonyl carbon: the N of an imide (rylene and naphthalene
   diimides, phthalimides) and the O of an ester give their lone pair to the carbonyl groups, not to
   the rest of the system, and do not make a push-pull dye
9. ``carbonyl``: any conjugated C=O (quinones, anthraquinones, indigoids, aryl ketones and aldehydes)
10. ``other``
"""
from __future__ import annotations

from rdkit import Chem

from ..errors import PPPError
from ..structure.perceive import perceive

CLASSES = ("xanthene", "coumarin", "thiophene", "azo", "cyanine", "polyene", "non-alternant", "benzenoid",
           "push-pull", "carbonyl", "other")

_SMARTS = {
    "xanthene": "[#6]1~[#6]~[#6]~[#6]2~[#6](~[#6]~1)~[#8]~[#6]1~[#6]~[#6]~[#6]~[#6]~[#6]~1~[#6]~2",
    "coumarin": "[#8]=[#6]1~[#6]~[#6]~[#6]2~[#6]~[#6]~[#6]~[#6]~[#6]~2~[#8]~1",
    "thiophene": "[#16]1~[#6]~[#6]~[#6]~[#6]~1",
    "azo": "[#6]-,:[#7]=[#7]-,:[#6]",
    "bodipy": "[#5]1~[#7]~[#6]~[#6]~[#6]~[#7]~1",
    "quinone": "[#8]=[#6]1~[#6]~[#6]~[#6](=[#8])~[#6]~[#6]~1",
    "indigoid": "[#8]=[#6]1~[#6](=[#6]2~[#6](=[#8])~[#6]~[#6]~[#7,#16,#8]~2)~[#7,#16,#8]~[#6]~[#6]~1",
    "nitro": "[#7+](=[#8])[#8-]",
    "cyano": "[#6]#[#7]",
    "carbonyl": "[#6]=[#8]",
}
_PATTERNS = {k: Chem.MolFromSmarts(v) for k, v in _SMARTS.items()}


def _bipartite(n: int, bonds) -> bool:
    colour = [-1] * n
    adj = [[] for _ in range(n)]
    for i, j in bonds:
        adj[i].append(j)
        adj[j].append(i)
    for s in range(n):
        if colour[s] >= 0:
            continue
        colour[s] = 0
        stack = [s]
        while stack:
            i = stack.pop()
            for j in adj[i]:
                if colour[j] < 0:
                    colour[j] = 1 - colour[i]
                    stack.append(j)
                elif colour[j] == colour[i]:
                    return False
    return True


def _has_donor(mol: Chem.Mol, sys_, in_pi: set[int]) -> bool:
    """Rule 8's donor: an amino N, hydroxy/ether O or phenolate O- of the pi-system bonded to a pi-atom
    that is not a carbonyl carbon (``mol`` is the hydrogen-free molecule the system was perceived on)."""
    carbonyl_c = {m[0] for m in mol.GetSubstructMatches(_PATTERNS["carbonyl"])}
    for idx, t in zip(sys_.atom_indices.tolist(), sys_.types):
        a = mol.GetAtomWithIdx(idx)
        phenolate = (a.GetSymbol() == "O" and a.GetFormalCharge() == -1 and a.GetDegree() == 1
                     and a.GetNeighbors()[0].GetSymbol() != "N")
        if (t in ("N.amino", "O.oxa") or phenolate) and any(
                nb.GetIdx() in in_pi and nb.GetIdx() not in carbonyl_c for nb in a.GetNeighbors()):
            return True
    return False


def classify(mol: Chem.Mol) -> str:
    """Class name (one of :data:`CLASSES`) of a sanitized RDKit molecule; its largest pi-system decides."""
    has = {k: mol.HasSubstructMatch(p) for k, p in _PATTERNS.items()}
    heavy = mol
    if mol.GetNumAtoms() != mol.GetNumHeavyAtoms():  # explicit hydrogens (an SDF record): counts onto the atoms
        heavy = Chem.RemoveHs(mol, sanitize=False)
        heavy.UpdatePropertyCache(strict=False)
    try:
        systems = perceive(heavy)
    except PPPError:
        return "other"
    sys_ = max(systems, key=lambda s: s.n_centres)
    in_pi = set(int(a) for a in sys_.atom_indices)
    elements = set(sys_.elements)
    for cls in ("xanthene", "coumarin"):
        if has[cls]:
            return cls
    if has["thiophene"] and elements <= {"C", "S"}:
        return "thiophene"
    if has["azo"]:
        return "azo"
    if sys_.charge > 0 or has["bodipy"]:
        return "cyanine"
    kek = Chem.Mol(heavy)
    Chem.Kekulize(kek, clearAromaticFlags=True)
    acyclic_cc = sum(1 for b in kek.GetBonds()
                     if b.GetBondType() == Chem.BondType.DOUBLE and not b.IsInRing()
                     and b.GetBeginAtom().GetSymbol() == "C" and b.GetEndAtom().GetSymbol() == "C"
                     and b.GetBeginAtomIdx() in in_pi and b.GetEndAtomIdx() in in_pi)
    hydrocarbon = elements == {"C"}
    if acyclic_cc >= 4 or (hydrocarbon and acyclic_cc >= 1):
        return "polyene"
    if hydrocarbon:
        return "benzenoid" if _bipartite(sys_.n_centres, sys_.bonds) else "non-alternant"
    donor = _has_donor(heavy, sys_, in_pi)
    acceptor = has["nitro"] or has["cyano"] or has["carbonyl"]
    if donor and acceptor and not (has["quinone"] or has["indigoid"]):
        return "push-pull"
    if has["carbonyl"]:
        return "carbonyl"
    return "other"


def classify_smiles(smiles: str) -> str:
    from ..structure.readers import mol_from_smiles
    return classify(mol_from_smiles(smiles))
