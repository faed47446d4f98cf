"""What a computation returns: excited states, chromophores and the molecule's record (frozen
dataclasses built by :mod:`ppp.driver`; formatting lives in :mod:`ppp.io`)."""
from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from .analysis.properties import Configuration, GroundState
from .model.hamiltonian import Model
from .solvers.scf import SCFResult
from .units import ev_to_nm

if TYPE_CHECKING:
    from .driver import Options

#: Oscillator strength from which a singlet counts as an allowed band (a molar absorptivity of a few
#: thousand L mol^-1 cm^-1 and up for a typical band width; common practice): the first allowed band
#: (:attr:`MoleculeResult.first_bright`) is the lowest singlet at or above it. The accuracy benchmark
#: matches measured bands by the same rule (``ppp.calibration.reference``), so the class error shown
#: beside that band was measured for it. (Until 2026-12-02 the output used 0.01 here while the accuracy
#: was measured with 0.05.)
BRIGHT_F = 0.05


@dataclass(frozen=True, slots=True)  # slots: cheaper to create, dozens per molecule
class State:
    """One excited state of one chromophore."""

    multiplicity: int
    index: int  # 1-based within its multiplicity and chromophore
    chromophore: int  # 0-based
    energy_ev: float
    oscillator_strength: float
    transition_dipole: tuple[float, float, float]  # e*A, principal-axis frame (zero for triplets)
    polarization_deg: float | None
    polarization: str
    configurations: tuple[Configuration, ...]

    @property
    def wavelength_nm(self) -> float:
        return float(ev_to_nm(self.energy_ev)) if self.energy_ev > 0 else float("inf")

    @property
    def label(self) -> str:
        return f"{'S' if self.multiplicity == 1 else 'T'}{self.index}"

    @property
    def character(self) -> str:
        return ", ".join(str(c) for c in self.configurations)


#: ``__set__`` of each field's slot, in field order, for :func:`states_from_columns`
_STATE_SLOT_SETTERS = tuple(State.__dict__[name].__set__ for name in State.__dataclass_fields__)


def states_from_columns(multiplicity: int, chromophore: int, energies, strengths, dipoles, polarizations,
                        configurations) -> tuple[State, ...]:
    """The :class:`State` records of one multiplicity of one chromophore, numbered 1, 2, ... in the order
    given; one sequence per field (``polarizations``: (angle or None, label) pairs). The records equal
    those of ``State(...)`` (tests/test_small_overhead.py); they are made by filling the slots directly,
    which costs half as much as the frozen dataclass's ``__init__`` (one ``object.__setattr__`` per
    field), twenty records per molecule. A field added to State must be set here as well: until it is,
    the unpacking of the setters below fails."""
    new = object.__new__
    s_mult, s_index, s_chrom, s_energy, s_f, s_dip, s_pdeg, s_pol, s_conf = _STATE_SLOT_SETTERS
    out = []
    for n, (e, f, dip, (pdeg, pol), conf) in enumerate(zip(energies, strengths, dipoles, polarizations,
                                                          configurations), 1):
        st = new(State)
        s_mult(st, multiplicity)
        s_index(st, n)
        s_chrom(st, chromophore)
        s_energy(st, e)
        s_f(st, f)
        s_dip(st, dip)
        s_pdeg(st, pdeg)
        s_pol(st, pol)
        s_conf(st, conf)
        out.append(st)
    return tuple(out)


@dataclass(frozen=True)
class ChromophoreResult:
    """Everything computed for one pi-system."""

    index: int
    atom_indices: np.ndarray  # RDKit atom indices of the centres
    model: Model
    scf: SCFResult
    ground: GroundState
    singlets: tuple[State, ...]
    triplets: tuple[State, ...]
    singlet_amplitudes: np.ndarray  # (k, n_occ, n_vir)
    triplet_amplitudes: np.ndarray
    warnings: tuple[str, ...] = ()  # conditions the user must know about (e.g. triplet instability)

    @property
    def e_total(self) -> float:
        """Total pi energy (electronic + core-core repulsion; in a solvent the ground-state free energy
        including the reaction-field term), eV."""
        return self.scf.e_elec + self.model.e_core + self.model.e_reaction

    @property
    def homo_ev(self) -> float:
        return float(self.scf.mo_energy[self.model.n_occ - 1])

    @property
    def lumo_ev(self) -> float:
        return float(self.scf.mo_energy[self.model.n_occ])


@dataclass(frozen=True)
class MoleculeResult:
    """Result for one input molecule: one or more chromophores."""

    name: str
    smiles: str
    canonical_smiles: str
    parameters: str
    parameters_sha256: str
    options: Options
    chromophores: tuple[ChromophoreResult, ...]
    #: conditions of the whole molecule the user must know about (e.g. metal atoms outside the model)
    molecule_warnings: tuple[str, ...] = ()

    @property
    def warnings(self) -> tuple[str, ...]:
        """The molecule's warnings, then those of its chromophores (prefixed with the chromophore number
        when there are several)."""
        many = len(self.chromophores) > 1
        return self.molecule_warnings + tuple((f"chromophore {c.index + 1}: " if many else "") + w
                                              for c in self.chromophores for w in c.warnings)

    @property
    def states(self) -> tuple[State, ...]:
        """All excited states of all chromophores, singlets then triplets, each by energy."""
        s = sorted((st for c in self.chromophores for st in c.singlets), key=lambda st: st.energy_ev)
        t = sorted((st for c in self.chromophores for st in c.triplets), key=lambda st: st.energy_ev)
        return tuple(s + t)

    @property
    def singlets(self) -> tuple[State, ...]:
        return tuple(st for st in self.states if st.multiplicity == 1)

    @property
    def triplets(self) -> tuple[State, ...]:
        return tuple(st for st in self.states if st.multiplicity == 3)

    @property
    def s1(self) -> State | None:
        return self.singlets[0] if self.singlets else None

    @property
    def t1(self) -> State | None:
        return self.triplets[0] if self.triplets else None

    @property
    def brightest(self) -> State | None:
        """Singlet with the largest oscillator strength among those computed."""
        return max(self.singlets, key=lambda st: st.oscillator_strength, default=None)

    @property
    def first_bright(self) -> State | None:
        """Lowest singlet with f >= BRIGHT_F: the longest-wavelength allowed band."""
        return next((st for st in self.singlets if st.oscillator_strength >= BRIGHT_F), None)

    @property
    def lambda_max_nm(self) -> float | None:
        """Wavelength of the brightest computed singlet, nm."""
        b = self.brightest
        return b.wavelength_nm if b is not None else None

    def table(self) -> str:
        from .io.text import format_result
        return format_result(self)

    def to_dict(self) -> dict:
        from .io.json_io import result_to_dict
        return result_to_dict(self)

    def __str__(self) -> str:
        return self.table()
