"""Thin driver: structure -> pi-systems -> model -> SCF -> CIS -> observables.

``compute`` is the one entry point the command line, the batch runner and notebook users share.
"""
from __future__ import annotations

import os
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np
from rdkit import Chem

from .analysis.timings import StageTimer, maybe_stage
from .analysis.properties import (dominant_configurations, ground_state, oscillator_strengths, polarizations,
                                  transition_dipoles, twisted_donor_notes)
from .errors import ConvergenceError, InputError, PPPError, TooLargeError, UnsupportedError
from .model import params as param_registry
from .model import solvent as solvent_model
from .model import variable_beta
from .model.hamiltonian import Model, build_model
from .results import ChromophoreResult, MoleculeResult, State, states_from_columns
from .solvers import cis as cis_solver
from .solvers import rpa
from .solvers import scf as scf_solver
from .solvers import stability
from .solvers.guess import atomic_start, kekule_guess
from .solvers.threads import blas_threads
from .structure.geometry import atom_positions, centre_coordinates, layout_warning, planar_layout
from .structure.perceive import PiSystem, perceive
from .structure.cavity import cavity_spheres
from .structure.twist import embed_conformer, resonance_variable_bonds, twist_factors
from .structure.readers import mol_from_smiles

#: Where centre coordinates can come from (see :class:`Options`).
COORDINATE_SOURCES = ("depiction", "input", "conformer")
#: Singlet response methods: Tamm-Dancoff CIS, or the random-phase approximation (ppp.solvers.rpa).
RESPONSES = ("cis", "rpa")
# SCF start (ground_scf): the density of one Kekule structure (ppp.solvers.guess.kekule_guess) whenever
# the chromophore has one, at every size; superposed atoms (ppp.solvers.guess.atomic_start) otherwise.
# A start with the full symmetry of the molecule (superposed atoms, the core Hamiltonian) keeps that
# symmetry through every SCF iteration, so it can only reach a symmetric solution even where that is a
# saddle point; a Kekule structure breaks the symmetry of alternating bonds and still relaxes to the
# symmetric solution where that is the lower one (benzene, short cyanines). Measured on 698
# chromophores (generated dyes, the demo library): 643 reach the same solution from both starts; 55,
# every streptocyanine of 27 or more centres, reach a bond-alternating one from the Kekule start that
# is lower in the energy of the bond-order-beta model (ppp.model.variable_beta.model_energy) by 0.002
# eV (27 centres) to 0.34 eV (73 centres); none is lower from the symmetric start. (Before, the Kekule
# start was used from 60 centres on only, so S1 of the streptocyanines jumped from 0.84 to 1.06 eV
# between 59 and 61 centres.)


@dataclass(frozen=True)
class Options:
    """What to compute and how. All fields have working defaults.

    parameters : parameter set name or path to a TOML file (None: the registry default)
    gamma : "mataga-nishimoto" or "ohno" (None: the parameter set's choice)
    n_singlets, n_triplets : CIS roots per multiplicity
    coordinates : "depiction" (idealised 2D, default), "input" (coordinates of a MOL/SDF record) or
        "conformer" (idealised planar coordinates, with twist angles from an RDKit 3D conformer relaxed
        with MMFF94, seeded by ``conformer_seed``)
    max_centres : largest chromophore accepted (time grows as N^3, memory as N^2 with the iterative
        CIS solver: 30-60 s and about 1.1 GB at 1,000 centres, 1.5 GB at 1,200; docs/performance.md)
    max_iter : SCF iterations per attempt
    cis_solver : "auto" (dense CIS matrix for small systems, matrix-free Davidson above
        ``ppp.solvers.cis.DENSE_MAX_CONFIGURATIONS`` configurations), "dense" or "iterative"
    threads : BLAS threads for one chromophore (1 is fastest on a shared or batch-loaded machine;
        more may help a single large molecule on an otherwise idle one; see ppp.solvers.threads)
    bond_order_beta : iterate beta with the SCF bond orders (True/False; None: the parameter set's choice)
    twist : scale beta by |cos| of the angle between p axes when coordinates are 3D
    conformer_seed : random seed of the conformer embedding
    solvent : solvent name (ppp/data/solvents.toml, e.g. "ethanol") for the generalized-Born reaction
        field of ppp.model.solvent; None (default) or "gas": gas phase
    response : singlet excitation method: "cis" (Tamm-Dancoff, excitations only) or "rpa" (random-phase
        approximation / time-dependent Hartree-Fock, excitations and de-excitations; ppp.solvers.rpa).
        Triplets always come from CIS (RPA triplets of PPP references are often unstable).
    """

    parameters: str | None = None
    gamma: str | None = None
    n_singlets: int = 10
    n_triplets: int = 10
    coordinates: str = "depiction"
    max_centres: int = 1200
    max_iter: int = 100
    cis_solver: str = "auto"
    threads: int = 1
    bond_order_beta: bool | None = None
    twist: bool = True
    conformer_seed: int = 42
    solvent: str | None = None
    response: str = "cis"

    def __post_init__(self):
        for name in ("n_singlets", "n_triplets"):
            val = getattr(self, name)
            if not isinstance(val, int) or val < 0:
                raise InputError(f"{name} must be a non-negative whole number, got {val!r}")
        if self.coordinates not in COORDINATE_SOURCES:
            raise InputError(f"coordinates must be one of {', '.join(COORDINATE_SOURCES)}, "
                             f"got {self.coordinates!r}")
        if not isinstance(self.threads, int) or self.threads < 1:
            raise InputError(f"threads must be a whole number >= 1, got {self.threads!r}")
        if self.cis_solver not in cis_solver.SOLVERS:
            raise InputError(
                f"unknown CIS solver '{self.cis_solver}'; valid: {', '.join(cis_solver.SOLVERS)}")
        if self.solvent is not None:
            solvent_model.load(self.solvent)  # InputError naming the valid solvents
        if self.response not in RESPONSES:
            raise InputError(f"unknown response method '{self.response}'; valid: {', '.join(RESPONSES)}")
        if self.response == "rpa" and self.in_solvent:
            raise InputError("the solvent model's state-specific term is built on CIS states: use response "
                             "'cis' with a solvent")
        if self.gamma is not None and self.gamma not in param_registry.GAMMA_FORMULAS:
            raise InputError(
                f"unknown gamma formula '{self.gamma}'; valid: {', '.join(param_registry.GAMMA_FORMULAS)}")

    @property
    def in_solvent(self) -> bool:
        """True when a solvent other than the gas phase is asked for (its reaction field applies)."""
        return self.solvent is not None and not solvent_model.load(self.solvent).is_vacuum


def _states(chrom: int, sing, trip: cis_solver.CISResult, scf, model: Model
            ) -> tuple[tuple[State, ...], tuple[State, ...]]:
    """The State records of the singlet (CIS or RPA) and the triplet roots of one chromophore. The
    dominant configurations of both multiplicities come from one call on the stacked amplitudes (the
    selection works root by root, so the records are those of two calls)."""
    n_occ = model.n_occ
    ks, kt = len(sing.energies), len(trip.energies)
    # RPA: weights X^2 - Y^2 (Z = X + Y gives the transition dipoles below)
    amp = sing.character_amplitudes() if isinstance(sing, rpa.RPAResult) else sing.amplitudes
    if ks and kt and amp.shape[1:] == trip.amplitudes.shape[1:]:
        confs = dominant_configurations(np.concatenate((amp, trip.amplitudes)), n_occ)
    else:
        confs = dominant_configurations(amp, n_occ) + dominant_configurations(trip.amplitudes, n_occ)
    if ks:
        tdm = transition_dipoles(scf.mo_coeff, n_occ, sing.amplitudes, model.coords)
        f = oscillator_strengths(sing.energies, tdm).tolist()
        singlets = states_from_columns(1, chrom, sing.energies.tolist(), f, list(map(tuple, tdm.tolist())),
                                       polarizations(tdm), confs[:ks])
    else:
        singlets = ()
    triplets = states_from_columns(3, chrom, trip.energies.tolist(), [0.0] * kt, [(0.0, 0.0, 0.0)] * kt,
                                   [(None, "-")] * kt, confs[ks:])
    return singlets, triplets


def ground_scf(model: Model, options: Options = Options(), index: int = 0, dens0: np.ndarray | None = None,
               dens_guess: np.ndarray | None = None):
    """SCF of one model; with ``model.bond_order_beta`` set, iterated with bond-order betas
    (ppp.model.variable_beta).

    dens0 : optional (N, N) starting density (e.g. the converged density of a nearby parameter set)
    dens_guess : optional Kekule-structure start density (:func:`kekule_guess`): the start when ``dens0``
        is not given (see the note on SCF starts above), else the fallback of ``dens0``
    Returns (model, scf): the model carries the final core Hamiltonian. Raises ConvergenceError.
    """
    kekule_first = dens0 is None and dens_guess is not None
    kw = dict(max_iter=options.max_iter, alt_dens0=dens_guess, alt_first=kekule_first)
    if dens0 is None and dens_guess is None:
        # superposed-atoms start (ppp.solvers.guess.atomic_start): fewer iterations than the core start
        dens0 = atomic_start(model.core, model.gamma, model.core_charges, model.n_electrons, model.n_occ)
    rf = model.reaction
    if model.bond_order_beta is not None or rf is not None:
        settings = model.bond_order_beta or variable_beta.BondOrderBeta(pairs=())
        try:
            vb = variable_beta.iterate(model.core, model.gamma, model.n_occ, model.types, model.bonds,
                                       settings, scf_solver.kernel, dens0=dens0, scf_iterate=scf_solver.iterate,
                                       diag_update=None if rf is None else rf.potential,
                                       scf_finish=scf_solver.finish,
                                       scf_finish_tol=(scf_solver.CONV_TOL_ENERGY, scf_solver.CONV_TOL_GRAD), **kw)
        except ConvergenceError as err:
            raise ConvergenceError(f"chromophore {index + 1} ({model.n_centres} centres): {err.reason}") from None
        e_rf = 0.0
        if rf is not None:
            # the SCF energy counts the reaction potential V as a one-electron term, sum_i P_ii V_i; the
            # free energy has G_rf = -1/2 f q.Gamma.q instead (ppp.model.solvent)
            d = vb.scf.dens
            e_rf = rf.energy(d) - float(np.diagonal(d) @ rf.potential(d))
        return replace(model, core=vb.core, e_reaction=e_rf), vb.scf
    scf = scf_solver.kernel(model.core, model.gamma, model.n_occ, dens0=dens0, **kw)
    if not scf.converged:
        raise ConvergenceError(
            f"SCF did not converge for chromophore {index + 1} ({model.n_centres} centres) after "
            f"{scf.iterations} iterations (last |FP-PF| = {scf.max_error:.1e} eV); no states reported")
    return model, scf


def solve_model(model: Model, options: Options = Options(), index: int = 0,
                atom_indices: np.ndarray | None = None, timer: StageTimer | None = None,
                dens_guess: np.ndarray | None = None) -> ChromophoreResult:
    """SCF, CIS singlets and triplets, and observables for one model. Raises ConvergenceError.

    timer : optional :class:`~ppp.analysis.timings.StageTimer` that receives the stage times
    dens_guess : optional Kekule-structure start density (:func:`kekule_guess`), the SCF start (see
        :func:`ground_scf`)
    """
    with blas_threads(options.threads):
        return _solve_model(model, options, index, atom_indices, timer, dens_guess)


def solvent_corrected(res: cis_solver.CISResult, scf, model: Model) -> cis_solver.CISResult:
    """Add the electronic-polarisation term of the excited states in a solvent (state-specific, first
    order; ppp.model.solvent) and re-sort the roots; unchanged in the gas phase."""
    if model.reaction is None or not len(res.energies):
        return res
    e = res.energies + model.reaction.excitation_shift(scf.mo_energy, scf.mo_coeff, model.gamma, model.n_occ,
                                                       res.amplitudes, res.multiplicity)
    order = np.argsort(e, kind="stable")
    return replace(res, energies=e[order], amplitudes=res.amplitudes[order])


def shared_exchange(scf, model: Model, options: Options) -> np.ndarray | None:
    """The exchange integrals (ij|ab) of the SCF orbitals (:func:`ppp.solvers.cis.exchange_integrals`, as
    the [i, a, j, b] block of :func:`ppp.solvers.cis.exchange_block` in which both matrices read them),
    made once for the dense CIS singlet and triplet matrices, which both contain them; None when they
    are not both dense CIS matrices (the iterative solver, RPA singlets, or no roots of one kind), and
    above ``cis.DENSE_MAX_CONFIGURATIONS`` configurations: the array is as large as a CIS matrix, and
    kept through the singlet eigensolve it would raise the peak memory of a forced dense run."""
    o = model.n_occ
    v = model.n_centres - o
    if (options.response != "cis" or not options.n_singlets or not options.n_triplets
            or o * v > cis_solver.DENSE_MAX_CONFIGURATIONS
            or cis_solver.choose_solver(o, v, options.cis_solver) != "dense"):
        return None
    return cis_solver.exchange_block(cis_solver.exchange_integrals(scf.mo_coeff, model.gamma, o), o, v)


def singlet_roots(scf, model, options, timer=None, exchange: np.ndarray | None = None
                  ) -> cis_solver.CISResult | rpa.RPAResult:
    """Singlets by the chosen response method on the SCF orbitals, without the solvent's state-specific
    term (the stability tests look at these roots; :func:`solvent_corrected` is applied afterwards).
    An RPA that finds the reference unstable falls back to CIS, which then decides (through a
    non-positive root) whether the reference must be followed.
    exchange : optional :func:`shared_exchange` of ``scf`` for the dense CIS matrix."""
    if options.response == "rpa":
        with maybe_stage(timer, "RPA singlets"):
            try:
                return rpa.kernel(scf.mo_energy, scf.mo_coeff, model.gamma, model.n_occ, options.n_singlets,
                                  solver=options.cis_solver, dipole_coords=model.coords)
            except rpa.RPAInstabilityError:
                pass
    with maybe_stage(timer, "CIS singlets"):
        return cis_solver.kernel(scf.mo_energy, scf.mo_coeff, model.gamma, model.n_occ, options.n_singlets, 1,
                                 solver=options.cis_solver, dipole_coords=model.coords, exchange=exchange)


def _unstable(sing: cis_solver.CISResult) -> bool:
    return bool(len(sing.energies) and sing.energies[0] <= 0.0)


def seek_stable(model0: Model, model: Model, scf, sing, options, index, timer=None):
    """Look for a stable closed-shell solution when the lowest CIS singlet is not positive.

    Fixed beta: follow the instability downhill along real orbital rotations (Seeger & Pople 1977).
    Bond-order beta: a followed solution no longer belongs to the betas it was found with, so the beta
    iteration is restarted from it; and because the iteration can settle on a solution that is a minimum
    along real rotations yet has a negative CIS root (an instability towards complex orbitals, which real
    following cannot cure; seen for heptacene), it is also restarted from the followed solution of the
    fixed-beta (table) model. The first restart whose result has no non-positive CIS singlet is kept.
    Returns (model, scf, singlets), unchanged when nothing better is found.
    """
    with maybe_stage(timer, "stability following"):
        stable = stability.follow(model.core, model.gamma, model.n_occ, scf, max_iter=options.max_iter)
    if model0.bond_order_beta is None and model0.reaction is None:
        if stable is not None and stable is not scf:
            scf = stable
            sing = singlet_roots(scf, model, options, timer)
        return model, scf, sing
    starts = [stable.dens] if stable is not None and stable is not scf else []
    with maybe_stage(timer, "stability following"):
        fixed = scf_solver.kernel(model0.core, model0.gamma, model0.n_occ, max_iter=options.max_iter)
        if fixed.converged:
            fixed = stability.follow(model0.core, model0.gamma, model0.n_occ, fixed, max_iter=options.max_iter)
            if fixed is not None:
                starts.append(fixed.dens)
    for dens0 in starts:
        try:
            with maybe_stage(timer, "SCF"):
                m2, s2 = ground_scf(model0, options, index, dens0=dens0)
        except ConvergenceError:
            continue
        sing2 = singlet_roots(s2, m2, options, timer)
        if not _unstable(sing2):
            return m2, s2, sing2
    return model, scf, sing


def _solve_model(model, options, index, atom_indices, timer, dens_guess) -> ChromophoreResult:
    model0 = model
    with maybe_stage(timer, "SCF"):
        model, scf = ground_scf(model0, options, index, dens_guess=dens_guess)
    exchange = None
    if options.response == "cis":
        with maybe_stage(timer, "CIS singlets"):
            exchange = shared_exchange(scf, model, options)
    sing = singlet_roots(scf, model, options, timer, exchange)
    if _unstable(sing):
        # the SCF may sit on a saddle point: look for a lower, stable closed-shell solution
        scf_before = scf
        model, scf, sing = seek_stable(model0, model, scf, sing, options, index, timer)
        if scf is not scf_before:
            exchange = None  # other orbitals
    # A non-positive CIS root means the closed-shell SCF solution is not a minimum (Cizek & Paldus 1967
    # instability). Singlet instability that cannot be followed to a minimum: the closed-shell ground
    # state itself is wrong (biradical character), so the molecule is refused. Triplet instability
    # (common for long polyenes and large acenes with PPP parameters): the singlets stand, but no
    # triplet energies are reported.
    if _unstable(sing):
        raise UnsupportedError(
            f"closed-shell ground state of chromophore {index + 1} is unstable and no stable closed-shell "
            f"solution was found (lowest singlet excitation {sing.energies[0]:.3f} eV <= 0): open-shell or "
            f"biradical character")
    if model.reaction is not None:
        with maybe_stage(timer, "solvent term"):
            sing = solvent_corrected(sing, scf, model)
        if _unstable(sing):
            raise UnsupportedError(
                f"chromophore {index + 1}: the solvent's state-specific term puts a singlet below the ground "
                f"state ({sing.energies[0]:.3f} eV): the first-order solvent treatment breaks down here")
    with maybe_stage(timer, "CIS triplets"):
        trip = cis_solver.kernel(scf.mo_energy, scf.mo_coeff, model.gamma, model.n_occ, options.n_triplets, 3,
                                 solver=options.cis_solver, exchange=exchange)
    notes = []
    if options.response == "rpa" and not isinstance(sing, rpa.RPAResult):
        notes.append("RPA singlets not possible (A - B or A + B not positive definite: instability of the "
                     "closed-shell reference towards complex orbitals); singlets are CIS values")
    if len(trip.energies) and trip.energies[0] <= 0.0:
        notes.append(f"triplet instability of the closed-shell reference (lowest CIS triplet "
                     f"{trip.energies[0]:.3f} eV <= 0): triplet energies not reported")
        trip = _no_states(trip)
    elif model.reaction is not None and len(trip.energies):
        trip = solvent_corrected(trip, scf, model)
        if trip.energies[0] <= 0.0:
            notes.append(f"the solvent's state-specific term puts the lowest triplet at {trip.energies[0]:.3f} "
                         f"eV <= 0 (first-order solvent treatment breaks down): triplet energies not reported")
            trip = _no_states(trip)
    with maybe_stage(timer, "properties"):
        centres = np.arange(model.n_centres) if atom_indices is None else np.asarray(atom_indices)
        notes += twisted_donor_notes(model.core_charges, model.types, model.bonds, model.twist_factors,
                                     scf.mo_coeff, model.n_occ, (sing.energies, sing.amplitudes),
                                     (trip.energies, trip.amplitudes), centres)
        singlets, triplets = _states(index, sing, trip, scf, model)
        return ChromophoreResult(
            index=index,
            atom_indices=centres, model=model, scf=scf,
            ground=ground_state(scf.dens, model.core_charges, model.coords, model.bonds),
            singlets=singlets, triplets=triplets,
            singlet_amplitudes=sing.amplitudes, triplet_amplitudes=trip.amplitudes, warnings=tuple(notes),
        )


def _no_states(res: cis_solver.CISResult) -> cis_solver.CISResult:
    """The same multiplicity with no roots (states that must not be reported)."""
    return cis_solver.CISResult(res.multiplicity, np.zeros(0), np.zeros((0,) + res.amplitudes.shape[1:]))


def _without_hydrogens(mol: Chem.Mol) -> Chem.Mol:
    """Heavy-atom copy of a molecule with explicit hydrogens (e.g. from an SDF record); the hydrogen
    counts move onto the heavy atoms (without the property-cache update they would read 0, and the
    pi-system perception would see radicals)."""
    if mol.GetNumAtoms() == mol.GetNumHeavyAtoms():
        return mol
    work = Chem.RemoveHs(mol, sanitize=False)
    work.UpdatePropertyCache(strict=False)
    return work


@dataclass(frozen=True)
class Prepared:
    """Geometry-side input of one chromophore, independent of the parameter values.

    system : the perceived pi-system;  coords : (N, 3) A;  twist : (M,) |cos theta| per bond or None
    """

    system: PiSystem
    coords: np.ndarray
    twist: np.ndarray | None
    #: (K, 4) [x, y, z, radius] of the molecule's other atoms incl. hydrogens, for the solvent cavity
    #: (ppp.structure.cavity); None when no solvent was asked for
    cavity: np.ndarray | None = None
    #: (N, N) Kekule-structure SCF start density (:func:`kekule_guess`), None when there is none
    kekule: np.ndarray | None = None
    #: conditions of the placement the user must know about (a distorted 2D layout)
    warnings: tuple[str, ...] = ()


def prepare(mol: Chem.Mol, options: Options = Options(), bond_length: float | None = None,
            timer: StageTimer | None = None, with_cavity: bool | None = None) -> tuple[Prepared, ...]:
    """Perceive the pi-systems of a molecule and place their centres (depiction, input or conformer).

    ``bond_length`` (A) scales 2D coordinates; default: the parameter set's standard length.
    ``with_cavity``: also place the other atoms for the solvent model (default: when options.solvent
    names a solvent other than the gas phase).
    """
    if with_cavity is None:
        with_cavity = options.in_solvent
    if bond_length is None:
        bond_length = load_parameters(options.parameters).bond_length_angstrom
    with maybe_stage(timer, "perception"):
        work = _without_hydrogens(mol)
        systems = perceive(work)
    for k, sys_ in enumerate(systems):
        if sys_.n_centres > options.max_centres:
            raise TooLargeError(
                f"chromophore {k + 1} has {sys_.n_centres} pi-centres, more than the limit of "
                f"{options.max_centres}")
    # 3D structure for the twist factors: the input record's, or an RDKit conformer. A conformer only
    # supplies the twist angles; the centres keep the idealised planar coordinates (gamma, dipoles),
    # because force-field bond lengths follow one resonance structure and would break the symmetry of
    # delocalised dyes (cyanines) through gamma.
    geo, pos, is3d, untwisted = work, None, False, None
    if options.coordinates == "conformer":
        with maybe_stage(timer, "conformer"):
            geo, _ = embed_conformer(work, options.conformer_seed)
            # the force field relaxed one resonance structure: bonds along a delocalised charge's path
            # keep beta untwisted (structure/twist.py)
            untwisted = resonance_variable_bonds(work) if options.twist else None
    if options.coordinates in ("input", "conformer") and geo.GetNumConformers():
        conf = geo.GetConformer()
        pos = np.asarray(conf.GetPositions(), dtype=float)
        is3d = bool(conf.Is3D()) and bool(np.ptp(pos[:, 2]) > 1e-6)
    source = "depiction" if options.coordinates == "conformer" else options.coordinates
    all_bonds = np.concatenate([s.atom_indices[s.bonds] for s in systems]).reshape(-1, 2)
    out = []
    with maybe_stage(timer, "coordinates"):
        # atom positions, made once and shared by the chromophores; a 2D layout is checked for
        # distortion (structure/geometry.py: planar_layout)
        chrom = [(s.atom_indices, s.bonds) for s in systems]
        if source == "depiction":
            pos2d, note = planar_layout(work, chrom)
            positions = (pos2d, False)
        else:
            positions = atom_positions(work, source)
            note = None if positions[1] else layout_warning(work, positions[0], chrom)
    notes = () if note is None else (note,)
    for sys_ in systems:
        with maybe_stage(timer, "coordinates"):
            coords = centre_coordinates(work, sys_.atom_indices, sys_.bonds, bond_length, source,
                                        all_pi_bonds=all_bonds, positions=positions)
            twist = (twist_factors(geo, pos, sys_.atom_indices, sys_.bonds, untwisted)
                     if (is3d and options.twist) else None)
            cav = (cavity_spheres(work, sys_.atom_indices, coords, positions, bond_length, all_bonds)
                   if with_cavity else None)
        with maybe_stage(timer, "perception"):
            kekule = kekule_guess(work, sys_)
        out.append(Prepared(sys_, coords, twist, cav, kekule, notes))
    return tuple(out)


def model_for(prep: Prepared, pset: param_registry.ParameterSet, options: Options = Options()) -> Model:
    """The PPP model of one prepared chromophore under a parameter set and the options."""
    sys_ = prep.system
    labels = [f"atom {i + 1} ({e})" for i, e in zip(np.asarray(sys_.atom_indices).tolist(), sys_.elements)]
    use_vb = pset.bond_order_beta_enabled if options.bond_order_beta is None else options.bond_order_beta
    settings = (pset.bond_order_beta or variable_beta.BondOrderBeta()) if use_vb else None
    model = build_model(sys_.types, sys_.core_charges, sys_.n_electrons, sys_.bonds, prep.coords, pset,
                        options.gamma, atom_labels=labels, twist_factors=prep.twist, bond_order_beta=settings,
                        alkyl_counts=sys_.alkyl_counts)
    if not options.in_solvent:
        return model
    field = solvent_model.reaction_field(solvent_model.load(options.solvent), prep.coords, sys_.types,
                                         sys_.core_charges, sys_.bonds, prep.cavity)
    return replace(model, reaction=field)


def build_models(mol: Chem.Mol, options: Options = Options(), timer: StageTimer | None = None,
                 pset=None) -> tuple[tuple[PiSystem, Model], ...]:
    """Perceive the pi-systems of a molecule and build one model per chromophore.

    pset : the parameter set if already loaded (saves re-reading it), else from ``options.parameters``.
    """
    if pset is None:
        with maybe_stage(timer, "parameters"):
            pset = load_parameters(options.parameters)
    return tuple((prep.system, model) for prep, model in _prepared_models(mol, options, timer, pset))


def _prepared_models(mol: Chem.Mol, options: Options, timer: StageTimer | None, pset):
    """(Prepared, Model) of each chromophore in turn (:func:`prepare`, then :func:`model_for`)."""
    for prep in prepare(mol, options, pset.bond_length_angstrom, timer):
        with maybe_stage(timer, "model (gamma, h)"):
            model = model_for(prep, pset, options)
        yield prep, model


@lru_cache(maxsize=16)
def _registry_set(name: str | None) -> param_registry.ParameterSet:
    return param_registry.load(name)


def load_parameters(name_or_path: str | None) -> param_registry.ParameterSet:
    """:func:`ppp.model.params.load`, with registry names (and None, the default set) resolved once per
    process: resolving a name lists and stats the parameter folders (~0.4 ms, a tenth of a small
    molecule's whole computation). File paths are resolved at every call, as before. As with
    ``params.load`` itself (which keeps each file it has read), a registry set added or edited on
    disk while the process runs is seen by the next process."""
    if name_or_path is None or (os.sep not in name_or_path and "/" not in name_or_path
                                and not name_or_path.endswith(".toml") and not os.path.exists(name_or_path)):
        return _registry_set(name_or_path)
    return param_registry.load(name_or_path)


#: Elements that are not metals (non-metals, metalloids and noble gases); every other element is a metal.
_NON_METALS = frozenset({"H", "He", "B", "C", "N", "O", "F", "Ne", "Si", "P", "S", "Cl", "Ar", "Ge", "As", "Se", "Br",
                         "Kr", "Sb", "Te", "I", "Xe", "Rn", "*"})
#: Groups 1 and 2: as separate ions (Na+, K+, Mg2+ counter-ions of dye salts) they leave the pi-system alone.
_COUNTER_ION_METALS = frozenset({"Li", "Na", "K", "Rb", "Cs", "Be", "Mg", "Ca", "Sr", "Ba"})


def metal_warnings(mol: Chem.Mol) -> tuple[str, ...]:
    """A warning when the molecule holds a metal the pi model leaves out: any metal bonded to another
    atom, or a separate ion of any metal outside groups 1 and 2 (e.g. the Zn2+ of a zinc phthalocyanine
    written as an ion pair). The organic pi-system is still computed (for metallophthalocyanines and
    -porphyrins the visible bands are mostly ligand pi-pi*), but metal-centred (d-d), charge-transfer and
    heavy-atom effects are not in the numbers."""
    found = []
    for atom in mol.GetAtoms():
        sym = atom.GetSymbol()
        if sym in _NON_METALS or sym in found:
            continue
        if atom.GetDegree() > 0 or sym not in _COUNTER_ION_METALS:
            found.append(sym)
    if not found:
        return ()
    return (f"the molecule contains {', '.join(found)}: only its organic pi-system is modelled; metal-centred, "
            f"charge-transfer and heavy-atom effects are not in the numbers",)


def compute(structure: str | Chem.Mol, name: str | None = None, options: Options | None = None,
            timer: StageTimer | None = None, **kwargs) -> MoleculeResult:
    """Predict the pi->pi* excited states of one molecule.

    Parameters
    ----------
    structure : SMILES string or RDKit molecule (e.g. from a MOL/SDF record)
    name : label used in output and error messages (default: the SMILES)
    options : :class:`Options`; keyword arguments override its fields, e.g. ``n_singlets=5``
    timer : optional :class:`~ppp.analysis.timings.StageTimer` collecting wall time per stage

    Raises a :class:`~ppp.errors.PPPError` subclass naming the molecule on any failure.
    """
    opts = options or Options()
    if kwargs:
        from dataclasses import replace
        try:
            opts = replace(opts, **kwargs)
        except TypeError as exc:
            raise InputError(str(exc)) from None
    if isinstance(structure, str):
        label = name or structure
        smiles_in = structure
    else:
        label = name or (structure.GetProp("_Name") if structure.HasProp("_Name") else "") or "molecule"
        smiles_in = ""
    try:
        with maybe_stage(timer, "parse"):
            mol = mol_from_smiles(structure) if isinstance(structure, str) else structure
            if not smiles_in:
                smiles_in = Chem.MolToSmiles(mol)
            canonical = Chem.MolToSmiles(_without_hydrogens(mol))
        with maybe_stage(timer, "parameters"):
            pset = load_parameters(opts.parameters)
        chroms = []
        notes = list(metal_warnings(mol))
        for k, (prep, model) in enumerate(_prepared_models(mol, opts, timer, pset)):
            notes.extend(w for w in prep.warnings if w not in notes)
            chroms.append(solve_model(model, opts, index=k, atom_indices=prep.system.atom_indices, timer=timer,
                                      dens_guess=prep.kekule))
    except PPPError as err:
        raise err.with_molecule(label)
    return MoleculeResult(name=label, smiles=smiles_in, canonical_smiles=canonical, parameters=pset.name,
                          parameters_sha256=pset.sha256, options=opts, chromophores=tuple(chroms),
                          molecule_warnings=tuple(notes))
