"""Predicted band positions for a reference set, and their errors per chemical class.

The geometry side of each molecule (perception, coordinates, twist factors) does not depend on the
parameter values, so it is prepared once (:func:`prepare_set`) and reused for every parameter set a fit
tries (:func:`predict`).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from ..analysis.properties import oscillator_strengths, transition_dipoles
from ..driver import (Options, Prepared, ground_scf, model_for, prepare, seek_stable, singlet_roots,
                      solvent_corrected)
from ..errors import PPPError
from ..model.params import ParameterSet
from ..model.solvent import reference_solvent
from ..structure.readers import mol_from_smiles
from ..units import ev_to_nm
from .reference import N_SINGLETS, Entry, ReferenceSet, match_state


@dataclass(frozen=True)
class _Singlet:
    energy_ev: float
    oscillator_strength: float


@dataclass(frozen=True)
class PreparedEntry:
    """A reference entry with its prepared chromophores, or the error that stopped preparation."""

    entry: Entry
    chromophores: tuple[Prepared, ...]
    error: str | None = None


def prepare_set(entries, options: Options = Options(), bond_length: float = 1.40) -> tuple[PreparedEntry, ...]:
    """Perceive and place every molecule once. Failures are kept with their reason."""
    out = []
    for e in entries:
        try:
            preps = prepare(mol_from_smiles(e.smiles), options, bond_length, with_cavity=True)
            out.append(PreparedEntry(e, preps))
        except PPPError as err:
            out.append(PreparedEntry(e, (), str(err.with_molecule(e.name))))
    return tuple(out)


def singlets(preps, pset: ParameterSet, options: Options = Options(), n_singlets: int = N_SINGLETS,
             warm: dict | None = None):
    """Lowest singlets (energy eV, f) of every chromophore of one molecule, merged.

    warm : optional dict keyed by chromophore object id holding the last converged density, used as
        the SCF starting point and updated (speeds up fits, where parameters change little)
    """
    states = []
    for k, prep in enumerate(preps):
        dens0 = warm.get(id(prep)) if warm is not None else None
        model0 = model_for(prep, pset, options)
        model, scf = ground_scf(model0, options, k, dens0=dens0, dens_guess=prep.kekule)  # the driver's start
        opts_k = replace(options, n_singlets=n_singlets)
        res = singlet_roots(scf, model, opts_k, None)  # CIS or RPA as the options say, as the driver does
        if len(res.energies) and res.energies[0] <= 0:
            # the SCF may sit on a saddle point: look for a stable solution as the driver does
            model, scf, res = seek_stable(model0, model, scf, res, opts_k, k, None)
        res = solvent_corrected(res, scf, model)
        if len(res.energies) and res.energies[0] <= 0:
            continue  # unstable reference (or solvent term breakdown): no trustworthy state from it
        if warm is not None:
            warm[id(prep)] = scf.dens
        tdm = transition_dipoles(scf.mo_coeff, model.n_occ, res.amplitudes, model.coords)
        f = oscillator_strengths(res.energies, tdm)
        states.extend(_Singlet(float(e), float(x)) for e, x in zip(res.energies, f))
    return states


def entry_options(entry: Entry, options: Options) -> Options:
    """The options with the solvent of the entry's measurement (qualifiers such as "(acidic)" dropped); a
    row that names no solvent is computed in the gas phase."""
    return replace(options, solvent=reference_solvent(entry.solvent) or None)


def predict(pe: PreparedEntry, pset: ParameterSet, options: Options = Options(),
            warm: dict | None = None, reference_solvents: bool = False) -> float | None:
    """Energy (eV) of the computed state matched to the entry's band, or None (no match / failure).

    reference_solvents : compute each entry in the solvent of its measurement (ppp.model.solvent)
        instead of ``options.solvent``
    """
    if pe.error is not None:
        return None
    if reference_solvents:
        options = entry_options(pe.entry, options)
    try:
        state = match_state(singlets(pe.chromophores, pset, options, warm=warm), pe.entry.match)
    except PPPError:
        return None
    return None if state is None else state.energy_ev


@dataclass(frozen=True)
class ClassError:
    """Mean absolute errors of one class (or of all rows: ``cls == "all"``)."""

    cls: str
    n: int
    n_failed: int
    mae_ev: float
    mae_nm: float
    mean_signed_ev: float  # computed - measured, eV


@dataclass(frozen=True)
class Evaluation:
    """Predictions for a reference set under one parameter set and option combination.

    energies : (n,) computed band energies, eV (NaN where no state matched or the run failed)
    measured : (n,) measured band energies, eV
    """

    entries: tuple[Entry, ...]
    energies: np.ndarray
    measured: np.ndarray

    @property
    def errors_ev(self) -> np.ndarray:
        return self.energies - self.measured

    def by_class(self) -> dict[str, ClassError]:
        """Per-class errors, plus "all" for every row and "hydrocarbon" for the three hydrocarbon classes."""
        groups: dict[str, list[int]] = {}
        for k, e in enumerate(self.entries):
            groups.setdefault(e.cls, []).append(k)
        hc = [k for k, e in enumerate(self.entries) if e.cls in HYDROCARBON_CLASSES]
        if hc:
            groups["hydrocarbon"] = hc
        groups["all"] = list(range(len(self.entries)))
        return {cls: self._summary(cls, idx) for cls, idx in groups.items()}

    def _summary(self, cls: str, idx) -> ClassError:
        idx = np.asarray(idx, dtype=int)
        e = self.energies[idx]
        ok = np.isfinite(e)
        err = e[ok] - self.measured[idx][ok]
        lam_calc = ev_to_nm(e[ok])
        lam_exp = np.array([self.entries[k].lambda_nm for k in idx[ok]])
        nan = float("nan")
        return ClassError(cls, int(len(idx)), int((~ok).sum()),
                          float(np.mean(np.abs(err))) if ok.any() else nan,
                          float(np.mean(np.abs(lam_calc - lam_exp))) if ok.any() else nan,
                          float(np.mean(err)) if ok.any() else nan)


#: Classes that together make up the "hydrocarbon" target group.
HYDROCARBON_CLASSES = ("polyene", "benzenoid", "non-alternant")


def evaluate(prepared, pset: ParameterSet, options: Options = Options(),
             reference_solvents: bool = False) -> Evaluation:
    """Predict every prepared entry under one parameter set and options (each in its own measurement
    solvent with ``reference_solvents``)."""
    energies = np.array([np.nan if (x := predict(pe, pset, options, reference_solvents=reference_solvents))
                         is None else x for pe in prepared])
    measured = np.array([pe.entry.energy_ev for pe in prepared])
    return Evaluation(tuple(pe.entry for pe in prepared), energies, measured)


def evaluate_reference(ref: ReferenceSet, pset: ParameterSet, options: Options = Options()) -> Evaluation:
    """Prepare and evaluate a whole reference set (convenience)."""
    return evaluate(prepare_set(ref.entries, options, pset.bond_length_angstrom), pset, options)
