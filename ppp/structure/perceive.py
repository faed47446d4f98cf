"""pi-system perception: which atoms carry a p orbital in the conjugated system, their type, core
charge and electron count, and how they split into separate chromophores.

Rules (common practice in PPP work, written out so they can be checked):

* An atom is *unsaturated* when it takes part in a double, triple or aromatic bond to another
  C, N, O, B or divalent S atom (also S+ with two sigma bonds: the thiopyrylium and thionium S of
  thiopyrylium and phenothiazinium dyes written with =[S+]-, which is typed like thiophene S).
  Multiple bonds to hypervalent S, P or As (sulfone, sulfonate, sulfoxide, phosphonate, arsonate:
  more bonds than the element's normal valence, counting +1 for a positive charge) do not conjugate
  and are left out with their oxygens. A multiple bond from the system to any other element is an
  error naming the atom.
* A *donor* is a saturated-looking atom with a p-type lone pair or an empty p orbital bonded to
  an unsaturated atom: amine/amide/pyrrole N (three sigma bonds), ether/hydroxy/furan O, phenolate
  O-, thioether S, halogens, carbanion and carbocation C, and trivalent B. Atoms with four sigma
  bonds (sp3 C, ammonium N+) are never part of the system.
* An acyclic S-S or O-O bond between two donors (disulfide, peroxide) is not a pi bond: its lone
  pairs are staggered, so the two sides are separate chromophores.
* The centre type follows the element and the number of sigma bonds, not the resonance form, so
  that symmetric cyanines, carboxylates and nitro groups keep their symmetry:
  N with <= 2 sigma bonds is ``N.aza`` (core charge Z = 1), with 3 it is ``N.amino`` (Z = 2);
  O with 1 sigma bond is ``O.oxo`` (Z = 1), with 2 ``O.oxa`` (Z = 2); S likewise ``S.thioxo`` /
  ``S.thia``; halogens Z = 2; B Z = 0; C Z = 1.
* Each centre's nominal pi-electron count is ``Z - formal charge`` (pyridine N 1, pyrrole N 2,
  iminium N+ 1, carbonyl O 1, phenolate O- 2, B 0). The pi-electron count of a chromophore is the
  sum, so its net pi charge equals the sum of the formal charges of its atoms.
* Saturated carbon substituents (alkyl groups: sp3 C with four sigma bonds, no halogen on it) are not
  centres; their number on each centre is recorded (``alkyl_counts``) for the inductive term of
  parameter sets with an ``[alkyl_shift]`` table (:func:`ppp.model.hamiltonian.build_model`).
* Connected pi-centres form one chromophore. A molecule with several unconnected pi-systems gives
  several chromophores, each solved on its own (no coupling between them).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from rdkit import Chem

from ..errors import (NoPiSystemError, OpenShellError, ParseError, RadicalError, UnsupportedElementError,
                      UnsupportedError)

#: Elements that can hold a pi multiple bond inside the system.
_MULTIPLE_BOND_ELEMENTS = {"C", "N", "O", "B", "S"}
#: Elements whose hypervalent multiple bonds (S=O in sulfones, P=O, As=O in arsonates) are
#: non-conjugating groups, with the element's normal valence (a positive charge adds one: R2S+=C).
#: P is given 0: every multiple bond to P counts as non-conjugating (phosphonate, phosphine oxide).
_NON_CONJUGATING_CENTRES = {"S": 2, "P": 0, "As": 3}
_HALOGENS = {"F", "Cl", "Br", "I"}


@dataclass(frozen=True)
class PiSystem:
    """One chromophore: N pi-centres of a molecule.

    Attributes
    ----------
    atom_indices : (N,) int   RDKit atom index of each centre (in the heavy-atom molecule)
    elements : tuple of N str
    types : tuple of N str    centre type names, keys into a parameter set
    core_charges : (N,) int   Z, pi electrons each centre gives to the neutral system
    n_pi : (N,) int           nominal pi-electron count per centre (Z - formal charge)
    bonds : (M, 2) int        pairs of local centre indices that are sigma-bonded
    n_electrons : int         pi electrons in the chromophore
    charge : int              net pi charge, sum(Z) - n_electrons
    double_bonds : (K, 2) int or None   local index pairs of the double bonds of the Kekule structure
                              perception used (RDKit's), for the SCF start density; None if unknown
    alkyl_counts : (N,) int or None   saturated carbon substituents of each centre (sp3 carbons, four
                              sigma bonds, not bonded to a halogen): the alkyl groups whose inductive
                              effect a parameter set's ``[alkyl_shift]`` table adds; None if not counted
    """

    atom_indices: np.ndarray
    elements: tuple[str, ...]
    types: tuple[str, ...]
    core_charges: np.ndarray
    n_pi: np.ndarray
    bonds: np.ndarray
    n_electrons: int
    charge: int
    double_bonds: np.ndarray | None = None
    alkyl_counts: np.ndarray | None = None

    @property
    def n_centres(self) -> int:
        return len(self.atom_indices)


def _atom_name(atom: Chem.Atom) -> str:
    return f"atom {atom.GetIdx() + 1} ({atom.GetSymbol()})"


def _sigma_bonds(atom: Chem.Atom) -> int:
    return atom.GetDegree() + atom.GetTotalNumHs()


def centre_type(atom: Chem.Atom) -> str:
    """Type name of a pi-centre from its element and number of sigma bonds."""
    return _centre_type(atom.GetSymbol(), _sigma_bonds(atom), atom.GetIdx())


def _centre_type(sym: str, nsig: int, idx: int) -> str:
    """:func:`centre_type` from the element, the number of sigma bonds and the atom index."""
    if sym == "C" and nsig <= 3:
        return "C"
    if sym == "N" and nsig <= 3:
        return "N.aza" if nsig <= 2 else "N.amino"
    if sym == "O" and nsig <= 2:
        return "O.oxo" if nsig == 1 else "O.oxa"
    if sym == "S" and nsig <= 2:
        return "S.thioxo" if nsig == 1 else "S.thia"
    if sym in _HALOGENS and nsig == 1:
        return sym
    if sym == "B" and nsig == 3:
        return "B"
    raise UnsupportedElementError(f"atom {idx + 1} ({sym}) with {nsig} sigma bonds is not covered by the pi model")


#: Core charge Z of each centre type: pi electrons it gives to the neutral pi-system.
STRUCTURAL_Z = {"C": 1, "N.aza": 1, "N.amino": 2, "O.oxo": 1, "O.oxa": 2, "S.thia": 2,
                 "S.thioxo": 1, "F": 2, "Cl": 2, "Br": 2, "I": 2, "B": 0}


def _donor(sym: str, nsig: int, fc: int) -> bool:
    """Saturated-looking atom (element, sigma bonds, formal charge) with a p lone pair or empty p orbital
    that can join the system."""
    if sym == "N":
        return (nsig == 3 and fc == 0) or (nsig == 2 and fc == -1)
    if sym == "O":
        return (nsig == 2 and fc == 0) or (nsig == 1 and fc == -1)
    if sym == "S":
        return (nsig == 2 and fc == 0) or (nsig == 1 and fc == -1)
    if sym in _HALOGENS:
        return nsig == 1 and fc == 0
    if sym == "C":
        return nsig == 3 and fc in (-1, 1)
    if sym == "B":
        return nsig == 3 and fc == 0
    return False


def _check_radicals(mol: Chem.Mol) -> None:
    """RadicalError naming the first atom with an unpaired electron, if there is one."""
    for i in range(mol.GetNumAtoms()):
        atom = mol.GetAtomWithIdx(i)
        if atom.GetNumRadicalElectrons():
            raise RadicalError(f"radical: {_atom_name(atom)} has an unpaired electron")


def perceive(mol: Chem.Mol) -> tuple[PiSystem, ...]:
    """Find the pi-systems of a sanitized RDKit molecule.

    Returns the chromophores ordered by their lowest atom index. Raises UnsupportedError for
    radicals, open-shell chromophores, multiple bonds to uncovered elements, and molecules
    without any pi-system.
    """
    # atoms and bonds fetched by index once: iterating RDKit's GetAtoms()/GetBonds() sequences costs a
    # Python-level length check per element (measured: a third of this function's time)
    kek = Chem.Mol(mol)
    try:
        Chem.Kekulize(kek, clearAromaticFlags=True)
    except Exception:
        _check_radicals(mol)  # a radical is reported before a failed Kekule assignment (as it always was)
        raise ParseError("cannot assign a Kekule structure to the aromatic rings") from None

    # every RDKit property is read once per atom and bond into plain lists (each RDKit call costs about
    # as much as a few lines of Python; the rules below then run on the lists)
    n_atoms = kek.GetNumAtoms()
    all_atoms = [kek.GetAtomWithIdx(i) for i in range(n_atoms)]
    if any([a.GetNumRadicalElectrons() for a in all_atoms]):  # (Kekulize leaves radical counts alone)
        _check_radicals(mol)
    sym = [a.GetSymbol() for a in all_atoms]
    if "*" in sym:  # a wildcard / attachment point (fragment or polymer repeat unit): not a whole molecule
        i = sym.index("*")
        raise UnsupportedElementError(
            f"atom {i + 1} (*) is a wildcard (dummy) atom: give the complete molecule (the substituent, or the "
            f"end groups of an oligomer) instead")
    charge = [a.GetFormalCharge() for a in all_atoms]
    all_bonds = [kek.GetBondWithIdx(i) for i in range(kek.GetNumBonds())]
    ends = [(b.GetBeginAtomIdx(), b.GetEndAtomIdx()) for b in all_bonds]
    order = [b.GetBondType() for b in all_bonds]
    neighbours: list[list[int]] = [[] for _ in range(n_atoms)]  # plain lists: cheaper than RDKit calls
    for i, j in ends:
        neighbours[i].append(j)
        neighbours[j].append(i)
    # sigma bonds: the atom's degree (its bonds, i.e. len(neighbours)) plus its hydrogens
    nsig = [len(nb) + a.GetTotalNumHs() for nb, a in zip(neighbours, all_atoms)]

    def hypervalent(i: int) -> bool:
        # more bonds than the normal valence (+1 for a positive charge): a thionium S+ (two sigma bonds and
        # a double bond, valence 3) is not hypervalent, a sulfone or sulfoxide S (4 or 6) is
        normal = _NON_CONJUGATING_CENTRES.get(sym[i])
        return normal is not None and all_atoms[i].GetTotalValence() > normal + max(charge[i], 0)

    multiple = (Chem.BondType.DOUBLE, Chem.BondType.TRIPLE)
    unsaturated = [False] * n_atoms
    for (ia, ib), bt in zip(ends, order):
        if bt not in multiple:
            continue
        if hypervalent(ia) or hypervalent(ib):
            continue  # S=O / P=O of sulfones, sulfonates, phosphonates: non-conjugating
        for x, y in ((ia, ib), (ib, ia)):
            if sym[x] not in _MULTIPLE_BOND_ELEMENTS:
                raise UnsupportedElementError(
                    f"atom {x + 1} ({sym[x]}): multiple bond to atom {y + 1} ({sym[y]}) is not covered by the "
                    f"pi model")
            if unsaturated[x]:
                # a second multiple bond at the same atom: cumulated (allene, ketene, isocyanate,
                # isothiocyanate, carbodiimide, azide, diazo), two mutually orthogonal pi bonds, which
                # one set of parallel p orbitals cannot describe
                raise UnsupportedError(
                    f"atom {x + 1} ({sym[x]}) has two cumulated multiple bonds (allene, isothiocyanate, azide "
                    f"type): orthogonal pi bonds are outside the model; compute the molecule without that group")
        unsaturated[ia] = unsaturated[ib] = True

    in_pi = list(unsaturated)
    for i in range(n_atoms):
        if unsaturated[i] or not _donor(sym[i], nsig[i], charge[i]):
            continue
        if any(unsaturated[j] for j in neighbours[i]):
            in_pi[i] = True

    # an atom of an aromatic ring conjugates through its p orbital whatever it is; left out, the ring
    # would silently become an open chain (selenophene computed as butadiene), so it must be covered
    for a in mol.GetAromaticAtoms():
        i = a.GetIdx()
        if not in_pi[i]:
            raise UnsupportedElementError(
                f"atom {i + 1} ({sym[i]}) belongs to an aromatic ring but is not covered by the pi model")

    def alkyl_carbon(j: int) -> bool:  # saturated carbon, no halogen on it (CF3 is not an alkyl group)
        return sym[j] == "C" and nsig[j] == 4 and not in_pi[j] and not any(sym[x] in _HALOGENS for x in neighbours[j])

    if not any(in_pi):
        raise NoPiSystemError("no pi-system (no conjugated multiple bonds)")

    # an acyclic S-S or O-O bond between two lone-pair donors (disulfide, peroxide) is no pi bond: the
    # lone pairs are staggered (C-S-S-C dihedral about 90 degrees; common knowledge), so the two sides
    # are separate chromophores. In a ring (1,2-dithiole) the bond stays and needs its own beta.
    cut = set()
    for k, (i, j) in enumerate(ends):
        if (sym[i] == sym[j] and sym[i] in ("S", "O") and in_pi[i] and in_pi[j]
                and not unsaturated[i] and not unsaturated[j] and not all_bonds[k].IsInRing()):
            cut.add((i, j))
            cut.add((j, i))
            neighbours[i].remove(j)
            neighbours[j].remove(i)

    # connected components of the pi graph
    comp = [-1] * n_atoms
    n_comp = 0
    for start in range(n_atoms):
        if not in_pi[start] or comp[start] >= 0:
            continue
        stack = [start]
        comp[start] = n_comp
        while stack:
            i = stack.pop()
            for j in neighbours[i]:
                if in_pi[j] and comp[j] < 0:
                    comp[j] = n_comp
                    stack.append(j)
        n_comp += 1
    comp = np.array(comp)

    systems = []
    double = Chem.BondType.DOUBLE
    for c in range(n_comp):
        idx = np.flatnonzero(comp == c)
        members = idx.tolist()
        local = {a: k for k, a in enumerate(members)}
        types = tuple(_centre_type(sym[a], nsig[a], a) for a in members)
        z = np.array([STRUCTURAL_Z[t] for t in types], dtype=int)
        fc = np.array([charge[a] for a in members], dtype=int)
        n_pi = z - fc
        for a, n in zip(members, n_pi.tolist()):
            if not 0 <= n <= 2:
                raise UnsupportedError(
                    f"atom {a + 1} ({sym[a]}) with formal charge {charge[a]:+d} would hold {n} pi electrons")
        bonds, doubles = [], []
        for bt, (bi, bj) in zip(order, ends):
            i, j = local.get(bi), local.get(bj)
            if i is not None and j is not None and (bi, bj) not in cut:
                bonds.append((min(i, j), max(i, j)))
                if bt == double:
                    doubles.append((i, j))
        bonds.sort()
        alkyl = [sum(1 for j in neighbours[a] if alkyl_carbon(j)) for a in members]
        n_el = int(n_pi.sum())
        label = f"chromophore {c + 1} ({len(idx)} centres)"
        if n_el % 2:
            raise OpenShellError(
                f"{label} has an odd number ({n_el}) of pi electrons: open shell, or bonding the model does not cover")
        if n_el == 0 or n_el >= 2 * len(idx):
            raise UnsupportedError(f"{label} has {n_el} pi electrons: no excitation possible")
        systems.append(PiSystem(
            atom_indices=idx.astype(int), elements=tuple(sym[a] for a in members), types=types,
            core_charges=z, n_pi=n_pi.astype(int), bonds=np.array(bonds, dtype=int).reshape(-1, 2),
            n_electrons=n_el, charge=int(z.sum()) - n_el,
            double_bonds=np.array(doubles, dtype=int).reshape(-1, 2),
            alkyl_counts=np.array(alkyl, dtype=int),
        ))
    return tuple(systems)
