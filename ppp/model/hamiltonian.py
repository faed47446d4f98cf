"""The PPP model matrices.

Zero-differential-overlap pi-electron Hamiltonian of Pariser & Parr (1953) and Pople (1953):

* two-centre repulsion gamma_ij from the Mataga-Nishimoto (1957) or Ohno (1964) formula, both
  interpolating between the one-centre value gamma_ii = U_i and the point-charge limit e^2/R;
* core Hamiltonian in the Goeppert-Mayer--Sklar (1938) approximation, penetration integrals neglected:
  h_ii = -I_i - sum_{j != i} Z_j gamma_ij,   h_ij = beta_ij for bonded centres, 0 otherwise;
* core-core repulsion E_core = sum_{i<j} Z_i Z_j gamma_ij (common practice, keeps E total neutral-limit
  consistent).

All energies in eV, distances in angstrom.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import ParameterError
from ..units import COULOMB_EV_ANGSTROM
from .params import GAMMA_FORMULAS, ParameterSet
from .variable_beta import BondOrderBeta


def distance_matrix(coords: np.ndarray) -> np.ndarray:
    """(N, N) interatomic distances in A from (N, 3) coordinates in A."""
    diff = coords[:, None, :] - coords[None, :, :]
    return np.sqrt((diff * diff).sum(axis=-1))


def gamma_matrix(coords: np.ndarray, u: np.ndarray, formula: str = "mataga-nishimoto") -> np.ndarray:
    """Two-centre repulsion integrals gamma (N, N), eV.

    With C = e^2/(4 pi eps0) = 14.40 eV A and a_ij = 2C / (U_i + U_j):

    * Mataga-Nishimoto (1957):  gamma_ij = C / (R_ij + a_ij)
    * Ohno (1964):              gamma_ij = C / sqrt(R_ij^2 + a_ij^2)

    Both give gamma_ii = U_i at R = 0 and tend to C / R at long range.
    """
    if formula not in GAMMA_FORMULAS:
        raise ParameterError(f"unknown gamma formula '{formula}'; valid: {', '.join(GAMMA_FORMULAS)}")
    r = distance_matrix(np.asarray(coords, dtype=float))
    u = np.asarray(u, dtype=float)
    a = 2.0 * COULOMB_EV_ANGSTROM / (u[:, None] + u[None, :])
    if formula == "mataga-nishimoto":
        return COULOMB_EV_ANGSTROM / (r + a)
    return COULOMB_EV_ANGSTROM / np.sqrt(r * r + a * a)


def core_matrix(ip: np.ndarray, z: np.ndarray, gamma: np.ndarray, beta: np.ndarray) -> np.ndarray:
    """Core Hamiltonian h (N, N), eV, Goeppert-Mayer--Sklar form.

    h_ii = -I_i - sum_{j != i} Z_j gamma_ij ;  h_ij = beta_ij (i != j).

    Parameters
    ----------
    ip : (N,) valence-state ionisation potentials I, eV
    z : (N,) core charges
    gamma : (N, N) repulsion integrals, eV
    beta : (N, N) symmetric resonance integrals, eV, zero diagonal and zero for non-bonded pairs
    """
    z = np.asarray(z, dtype=float)
    off = gamma @ z - np.diag(gamma) * z
    core = np.array(beta, dtype=float, copy=True)
    np.fill_diagonal(core, -np.asarray(ip, dtype=float) - off)
    return core


def core_repulsion(z: np.ndarray, gamma: np.ndarray) -> float:
    """Core-core repulsion sum_{i<j} Z_i Z_j gamma_ij, eV."""
    z = np.asarray(z, dtype=float)
    return float(0.5 * (z @ gamma @ z - np.sum(np.diag(gamma) * z * z)))


@dataclass(frozen=True)
class Model:
    """A fully specified PPP problem: everything a solver needs, nothing about the molecule's origin.

    Attributes
    ----------
    core : (N, N) core Hamiltonian h, eV
    gamma : (N, N) two-centre repulsion, eV
    core_charges : (N,) Z
    n_electrons : int, pi electrons (even)
    e_core : float, core-core repulsion, eV
    coords : (N, 3) A, principal-axis frame
    ip, u : (N,) eV, atomic parameters used (ip after the alkyl shift of :func:`build_model`)
    types : tuple of N centre type names
    bonds : (M, 2) local index pairs
    gamma_formula : str
    parameters : str, parameter set name
    parameters_sha256 : str
    bond_order_beta : settings of the bond-order-dependent beta iteration, or None (fixed beta)
    twist_factors : (M,) |cos theta| applied to each bond's beta, or None (planar, all 1)
    reaction : solvent reaction field (:class:`ppp.model.solvent.ReactionField`), or None (gas phase)
    e_reaction : float, eV, added to the SCF energy to give the ground-state free energy in solution
        (set by the solver: G = e_elec + e_core + e_reaction; 0 in the gas phase)
    """

    core: np.ndarray
    gamma: np.ndarray
    core_charges: np.ndarray
    n_electrons: int
    e_core: float
    coords: np.ndarray
    ip: np.ndarray
    u: np.ndarray
    types: tuple[str, ...]
    bonds: np.ndarray
    gamma_formula: str
    parameters: str
    parameters_sha256: str
    bond_order_beta: BondOrderBeta | None = None
    twist_factors: np.ndarray | None = None
    reaction: object | None = None
    e_reaction: float = 0.0

    @property
    def n_centres(self) -> int:
        return self.core.shape[0]

    @property
    def n_occ(self) -> int:
        return self.n_electrons // 2


def beta_matrix(types, bonds: np.ndarray, params: ParameterSet, atom_labels=None) -> np.ndarray:
    """Resonance integrals (N, N), eV, for the bonded pairs; ParameterError names a missing pair."""
    n = len(types)
    beta = np.zeros((n, n))
    for i, j in np.asarray(bonds).reshape(-1, 2).tolist():  # plain ints: cheaper to index with
        value = params.beta_for(types[i], types[j])
        if value is None:
            where = ""
            if atom_labels is not None:
                where = f" between {atom_labels[i]} and {atom_labels[j]}"
            raise ParameterError(
                f"parameter set '{params.name}' has no beta for a {types[i]}-{types[j]} bond{where}")
        beta[i, j] = beta[j, i] = value
    return beta


def build_model(types, core_charges, n_electrons: int, bonds: np.ndarray, coords: np.ndarray,
                params: ParameterSet, gamma_formula: str | None = None, atom_labels=None,
                twist_factors: np.ndarray | None = None,
                bond_order_beta: BondOrderBeta | None = None, alkyl_counts: np.ndarray | None = None) -> Model:
    """Assemble the model matrices for one chromophore from its perceived centres and coordinates.

    alkyl_counts : optional (N,) alkyl substituents per centre (:class:`ppp.structure.perceive.PiSystem`);
        with the set's ``[alkyl_shift]`` table, I_i -> I_i - n_i * shift(type_i): the inductive model of
        an alkyl group as a change of the attached centre's Coulomb integral (Wheland & Pauling 1935;
        Streitwieser 1961), here of its valence-state ionisation potential

    twist_factors : optional (M,) factors multiplying each bond's beta (|cos theta| of twisted bonds)
    bond_order_beta : optional settings; the solver then iterates beta with the bond orders, starting
        from the (twisted) table values built here
    """
    missing = [(k, t) for k, t in enumerate(types) if t not in params.types]
    if missing:
        k, t = missing[0]
        where = atom_labels[k] if atom_labels is not None else f"centre {k + 1}"
        raise ParameterError(
            f"{where}: parameter set '{params.name}' has no centre type '{t}' "
            f"(it covers {', '.join(params.types)})")
    formula = gamma_formula or params.gamma_formula
    ip = np.array([params.types[t].ip_ev for t in types])
    if alkyl_counts is not None and params.alkyl_shift:
        shift = np.array([params.alkyl_shift.get(t, 0.0) for t in types])
        ip = ip - shift * np.asarray(alkyl_counts, dtype=float)
    u = np.array([params.types[t].u_ev for t in types])
    z = np.asarray(core_charges, dtype=int)
    gamma = gamma_matrix(coords, u, formula)
    beta = beta_matrix(types, bonds, params, atom_labels)
    bonds_arr = np.asarray(bonds, dtype=int).reshape(-1, 2)
    if twist_factors is not None:
        twist_factors = np.asarray(twist_factors, dtype=float)
        if twist_factors.shape != (len(bonds_arr),):
            raise ValueError("twist_factors must have one entry per bond")
        beta[bonds_arr[:, 0], bonds_arr[:, 1]] *= twist_factors
        beta[bonds_arr[:, 1], bonds_arr[:, 0]] *= twist_factors
    return Model(
        core=core_matrix(ip, z, gamma, beta), gamma=gamma, core_charges=z, n_electrons=int(n_electrons),
        e_core=core_repulsion(z, gamma), coords=np.asarray(coords, dtype=float), ip=ip, u=u,
        types=tuple(types), bonds=np.asarray(bonds, dtype=int).reshape(-1, 2), gamma_formula=formula,
        parameters=params.name, parameters_sha256=params.sha256,
        bond_order_beta=bond_order_beta, twist_factors=twist_factors,
    )
