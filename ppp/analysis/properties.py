"""Observables: transition dipoles, oscillator strengths, polarisation, state character, and
ground-state pi charges, bond orders and dipole moment.

Under zero differential overlap the position operator is diagonal in the centre basis, so the
dipole matrix element between orbitals p and q is  <p|r|q> = sum_mu C_mu,p C_mu,q R_mu .
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import NamedTuple

import numpy as np

from ..units import BOHR_ANGSTROM, E_ANGSTROM_DEBYE, HARTREE_EV


def transition_dipoles(mo_coeff: np.ndarray, n_occ: int, amplitudes: np.ndarray, coords: np.ndarray) -> np.ndarray:
    """Singlet ground-to-excited transition dipoles (k, 3), e*A.

    mu_0n = sqrt(2) sum_ia X^n_ia <i|r|a>  (spin-adapted CIS singlet; the sqrt(2) collects both spins).

    Parameters
    ----------
    mo_coeff : (N, N); n_occ : int; amplitudes : (k, n_occ, n_vir); coords : (N, 3) A
    """
    dip = dipole_integrals(mo_coeff, n_occ, coords)
    k = amplitudes.shape[0]
    return np.sqrt(2.0) * (amplitudes.reshape(k, -1) @ dip.reshape(3, -1).T)


def dipole_integrals(mo_coeff: np.ndarray, n_occ: int, coords: np.ndarray) -> np.ndarray:
    """<i|r|a> = sum_mu C_mu,i R_mu C_mu,a for each Cartesian component: (3, n_occ, n_vir), A.

    Three matrix products C_o^T diag(R_x) C_v (O(N n_occ n_vir) each) rather than one three-operand
    contraction, which numpy would evaluate as a plain loop."""
    co, cv = mo_coeff[:, :n_occ], mo_coeff[:, n_occ:]
    coords = np.asarray(coords, dtype=float)
    return np.matmul(co.T, coords.T[:, :, None] * cv)  # the three products as one stacked call


def oscillator_strengths(energies_ev: np.ndarray, tdm_eangstrom: np.ndarray) -> np.ndarray:
    """Dipole-length oscillator strengths f = (2/3) dE |mu|^2 in atomic units (common practice)."""
    mu_au = np.asarray(tdm_eangstrom) / BOHR_ANGSTROM
    return (2.0 / 3.0) * (np.asarray(energies_ev) / HARTREE_EV) * (mu_au * mu_au).sum(axis=-1)


def polarization(tdm: np.ndarray, threshold: float = 1e-6) -> tuple[float | None, str]:
    """Angle (deg, 0..180) of an in-plane transition dipole from the long (x) axis, and a label.

    Labels: "long" (within 20 deg of x), "short" (within 20 deg of y), "mixed", "out-of-plane" (mostly z),
    or "-" when the dipole is below ``threshold`` e*A (forbidden transition: direction undefined).
    """
    tdm = np.asarray(tdm, dtype=float)
    norm = float(np.linalg.norm(tdm))
    if norm < threshold:
        return None, "-"
    if abs(tdm[2]) > np.hypot(tdm[0], tdm[1]):
        return None, "out-of-plane"
    angle = float(np.degrees(np.arctan2(tdm[1], tdm[0]))) % 180.0
    off_x = min(angle, 180.0 - angle)
    if off_x <= 20.0:
        return angle, "long"
    if abs(angle - 90.0) <= 20.0:
        return angle, "short"
    return angle, "mixed"


def polarizations(tdm: np.ndarray, threshold: float = 1e-6) -> list[tuple[float | None, str]]:
    """:func:`polarization` of each row of ``tdm`` (k, 3), e*A, evaluated for all rows at once."""
    tdm = np.asarray(tdm, dtype=float).reshape(-1, 3)
    x, y, z = tdm.T  # the three columns as views
    norm = np.sqrt((tdm * tdm).sum(axis=1))
    angle = np.degrees(np.arctan2(y, x)) % 180.0
    out = []
    for nrm, z, ip, ang in zip(norm.tolist(), np.abs(z).tolist(), np.hypot(x, y).tolist(), angle.tolist()):
        if nrm < threshold:
            out.append((None, "-"))
        elif z > ip:
            out.append((None, "out-of-plane"))
        elif min(ang, 180.0 - ang) <= 20.0:
            out.append((ang, "long"))
        elif abs(ang - 90.0) <= 20.0:
            out.append((ang, "short"))
        else:
            out.append((ang, "mixed"))
    return out


def orbital_label(p: int, n_occ: int) -> str:
    """HOMO, HOMO-1, ..., LUMO, LUMO+1, ... for 0-based orbital index p."""
    if p < n_occ:
        k = n_occ - 1 - p
        return "HOMO" if k == 0 else f"HOMO-{k}"
    k = p - n_occ
    return "LUMO" if k == 0 else f"LUMO+{k}"


class Configuration(NamedTuple):
    """One singly excited configuration i -> a and its weight |X_ia|^2 in a state (immutable; a named
    tuple: a third of the cost of a frozen dataclass to create, and dozens are made per molecule)."""

    occupied: int  # 0-based orbital index
    virtual: int
    weight: float
    from_label: str
    to_label: str

    def __str__(self) -> str:
        return f"{self.from_label}\u2192{self.to_label} {100 * self.weight:.0f}%"


def dominant_configurations(amplitudes: np.ndarray, n_occ: int, min_weight: float = 0.05,
                            max_count: int = 4) -> list[tuple[Configuration, ...]]:
    """For each root, the configurations with weight >= ``min_weight`` (at most ``max_count``),
    largest first; the largest is kept whatever its weight. amplitudes: (k, n_occ, n_vir)."""
    amplitudes = np.asarray(amplitudes)
    k = amplitudes.shape[0]
    if k == 0:
        return []
    n_rows, n_vir = amplitudes.shape[1:]  # occupied orbitals n_occ, virtual ones n_vir (as a rule)
    w = (amplitudes * amplitudes).reshape(k, -1)
    m = min(max_count, w.shape[1])
    rows = np.arange(k)[:, None]
    if w.shape[1] > 256:  # only the largest few are needed: partial selection, O(n) per root
        top = np.sort(np.argpartition(-w, m - 1, axis=1)[:, :m], axis=1)
        # by weight, ties by configuration index (as a stable sort of the whole row would give)
        order = top[rows, np.argsort(-w[rows, top], axis=1, kind="stable")]
    else:  # short rows: one stable sort of each whole row is cheaper than the selection's calls
        order = np.argsort(-w, axis=1, kind="stable")[:, :m]
    weights = w[rows, order].tolist()
    # flat index ia -> (i, a, label of i, label of a)
    if n_rows * n_vir <= _TABLE_MAX_CONFIGURATIONS:
        table = _configuration_table(n_occ, n_rows, n_vir).__getitem__
    else:
        labels = _labels(n_occ, n_occ + n_vir)

        def table(q):
            i, a = divmod(q, n_vir)
            return i, a + n_occ, labels[i], labels[a + n_occ]
    new = tuple.__new__  # Configuration's own constructor without its argument handling
    out = []
    for q_row, w_row in zip(order.tolist(), weights):
        i, a, li, la = table(q_row[0])
        confs = [new(Configuration, (i, a, w_row[0], li, la))]  # the largest, whatever its weight
        for q, wt in zip(q_row[1:], w_row[1:]):
            if not wt >= min_weight:  # the weights fall along the row: none of the rest is kept either
                break
            i, a, li, la = table(q)
            confs.append(new(Configuration, (i, a, wt, li, la)))
        out.append(tuple(confs))
    return out


#: :func:`dominant_configurations` keeps a table of the configurations of each (n_occ, n_vir) up to this
#: many (about 0.1 MB; dye-sized systems), and works the few it needs out of their index above
_TABLE_MAX_CONFIGURATIONS = 1024


@lru_cache(maxsize=64)
def _labels(n_occ: int, n_orbitals: int) -> tuple[str, ...]:
    """:func:`orbital_label` of every orbital, kept per (n_occ, N): state records ask for the same ones."""
    return tuple(orbital_label(p, n_occ) for p in range(n_orbitals))


@lru_cache(maxsize=64)
def _configuration_table(n_occ: int, n_rows: int, n_vir: int) -> tuple[tuple[int, int, str, str], ...]:
    """(i, a, :func:`orbital_label` of i, of a) for each configuration index ia = i * n_vir + (a - n_occ) of
    amplitudes (k, n_rows, n_vir), kept per shape: state records ask for the same ones (orbital indices
    and labels, not results)."""
    labels = _labels(n_occ, n_occ + n_vir)
    return tuple((i, a, labels[i], labels[a]) for i in range(n_rows) for a in range(n_occ, n_occ + n_vir))


@dataclass(frozen=True)
class GroundState:
    """Ground-state pi properties.

    Attributes
    ----------
    populations : (N,) pi-electron population P_ii
    charges : (N,) net pi charge Z_i - P_ii (elementary charges)
    bond_orders : (M,) Coulson bond orders p_ij = sum_occ 2 C_ik C_jk = P_ij for the bonded pairs
                  (same order as the model's bonds; benzene 2/3)
    dipole_debye : (3,) pi dipole moment sum_i q_i R_i, debye
    """

    populations: np.ndarray
    charges: np.ndarray
    bond_orders: np.ndarray
    dipole_debye: np.ndarray

    @property
    def dipole_magnitude(self) -> float:
        return float(np.linalg.norm(self.dipole_debye))


def ground_state(dens: np.ndarray, core_charges: np.ndarray, coords: np.ndarray, bonds: np.ndarray) -> GroundState:
    """pi populations, charges, Coulson bond orders (Coulson 1939) and the pi dipole moment."""
    pop = dens.diagonal().copy()
    q = np.asarray(core_charges, dtype=float) - pop
    bonds = np.asarray(bonds, dtype=int).reshape(-1, 2)
    orders = dens[bonds[:, 0], bonds[:, 1]].copy() if len(bonds) else np.zeros(0)
    dip = (q @ np.asarray(coords, dtype=float)) * E_ANGSTROM_DEBYE
    return GroundState(pop, q, orders, dip)


def hole_populations(mo_coeff: np.ndarray, n_occ: int, amplitudes: np.ndarray) -> np.ndarray:
    """Electrons each centre gives up in each excited state: the hole part of the unrelaxed CIS
    difference density, h_mu = sum_a (sum_i X_ia C_mu,i)^2 (its occupied-occupied block -sum_a X_ia X_ja
    taken to the centres; ZDO). For normalised X each row sums to 1. Returns (k, N)."""
    amplitudes = np.asarray(amplitudes)
    k = amplitudes.shape[0]
    t = np.einsum("mi,kia->kma", mo_coeff[:, :n_occ], amplitudes)  # sum_i C_mu,i X_ia
    return np.einsum("kma,kma->km", t, t) if k else np.zeros((0, mo_coeff.shape[0]))


#: A lone-pair centre (core charge 2) counts as twisted out of the pi-system when its best-aligned
#: pi-bond has |cos theta| below this (theta > 60 degrees: its conjugation, ~cos^2, down to a quarter)
TWISTED_DONOR_COS = 0.5
#: A state counts as a charge transfer from such a centre when it takes at least this many electrons
#: from it (:func:`hole_populations`)
DONOR_HOLE_MIN = 0.5


def twisted_donor_notes(core_charges, types, bonds, twist_factors, mo_coeff, n_occ, singlets, triplets,
                        atom_indices) -> list[str]:
    """Warnings for states that move an electron out of a lone pair twisted out of the pi-system.

    With 3D coordinates (input record or conformer) a lone-pair donor (amino N, ether O, ...) bonded
    through strongly twisted bonds only keeps its p orbital in the model, nearly uncoupled: its charge
    transfer to the rest of the system then comes out far too low (seen 1.3-2.7 eV below the planar
    molecule's first band, often as a dark or weak S1), while the real group pyramidalises and its lone pair
    leaves the pi-system. Each such state is named, so that its number is not taken for a band.

    core_charges : (N,); types : N type names; bonds : (M, 2); twist_factors : (M,) |cos theta| or None;
    singlets, triplets : (energies (k,), amplitudes (k, n_occ, n_vir)) pairs; atom_indices : (N,) RDKit
    indices for the message.
    """
    if twist_factors is None or not len(bonds):
        return []
    best = np.zeros(len(core_charges))
    bonds = np.asarray(bonds)
    for (i, j), c in zip(bonds.tolist(), np.asarray(twist_factors).tolist()):
        best[i] = max(best[i], c)
        best[j] = max(best[j], c)
    donors = np.flatnonzero((np.asarray(core_charges) == 2) & (best < TWISTED_DONOR_COS))
    if not donors.size:
        return []
    holes = [(label, energies, hole_populations(mo_coeff, n_occ, amps)) for label, (energies, amps)
             in (("S", singlets), ("T", triplets)) if len(energies)]
    notes = []
    for d in donors.tolist():
        hit = [f"{label}{n + 1} {e:.2f} eV" for label, energies, h in holes
               for n, e in enumerate(np.asarray(energies).tolist()) if h[n, d] >= DONOR_HOLE_MIN]
        if hit:
            angle = np.degrees(np.arccos(min(1.0, best[d])))
            notes.append(f"atom {int(atom_indices[d]) + 1} ({types[d]}) is twisted {angle:.0f}\u00b0 out of the "
                         f"pi-system; {', '.join(hit)} take{'s' if len(hit) == 1 else ''} most of an electron "
                         f"from its lone pair: a charge transfer the pi model puts far too low once the lone "
                         f"pair no longer conjugates (an artefact, not a band)")
    return notes
