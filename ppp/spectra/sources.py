"""Where a simulated spectrum comes from: a fresh computation, a saved record file, or plain arrays.

All three give a :class:`SpectrumSource`: the singlet sticks of every chromophore and, when known, the
orbital data needed for pictures.

* :func:`from_result` - a :class:`ppp.MoleculeResult` from ``ppp.compute``;
* :func:`from_record` - one molecule of a ``ppp run --save`` HDF5 record (layout in ppp/io/h5_io.py);
* :func:`from_batch` - one molecule of a ``ppp batch`` results file (layout in ppp/batch/schema.py): its
  stored singlet energies and f; no pictures (the store keeps no orbitals they could be drawn from);
* :func:`from_arrays` - excitation energies and oscillator strengths alone, the hook for any other store
  of results; spectrum, colour and comparison then work as for the other sources (no pictures).

:func:`from_record` reads either kind of file, told apart by its ``format`` attribute.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError, StorageError
from .lineshapes import Sticks


@dataclass(frozen=True)
class ChromophoreOrbitals:
    """Orbital data of one chromophore.

    index : 0-based chromophore number
    atom_indices : (N,) RDKit atom indices (hydrogen-suppressed molecule) of the pi-centres
    types : N centre type names; ip, u : (N,) eV
    mo_energy : (N,) eV; mo_coeff : (N, N); n_occ : int
    singlet_energy : (k,) eV; singlet_f : (k,); singlet_amplitudes : (k, n_occ, n_vir)
    """

    index: int
    atom_indices: np.ndarray
    types: tuple[str, ...]
    ip: np.ndarray
    u: np.ndarray
    mo_energy: np.ndarray
    mo_coeff: np.ndarray
    n_occ: int
    singlet_energy: np.ndarray
    singlet_f: np.ndarray
    singlet_amplitudes: np.ndarray


@dataclass(frozen=True)
class SpectrumSource:
    """Sticks of one molecule plus what pictures need (``chromophores`` empty for array input)."""

    name: str
    smiles: str
    sticks: Sticks
    chromophores: tuple[ChromophoreOrbitals, ...] = ()
    #: the computation's warnings (``MoleculeResult.warnings``), shown beside the spectrum
    warnings: tuple[str, ...] = ()


def _sticks_from(chroms: list[tuple[int, np.ndarray, np.ndarray]]) -> Sticks:
    """Merge per-chromophore singlets (index, energies, f), sorted by energy, labelled S<n>, or c<k>:S<n>
    (state n of chromophore k) when the molecule has several chromophores."""
    multi = len(chroms) > 1
    rows = []
    for c, e, f in chroms:
        for k, (ek, fk) in enumerate(zip(e, f)):
            rows.append((float(ek), float(fk), (f"c{c + 1}:" if multi else "") + f"S{k + 1}"))
    rows.sort(key=lambda r: r[0])
    if not rows:
        raise InputError("no singlet states to make a spectrum from")
    return Sticks(np.array([r[0] for r in rows]), np.array([r[1] for r in rows]), tuple(r[2] for r in rows))


def from_result(res) -> SpectrumSource:
    """Source from a :class:`ppp.MoleculeResult`."""
    chroms, orbs = [], []
    for c in res.chromophores:
        e = np.array([s.energy_ev for s in c.singlets])
        f = np.array([s.oscillator_strength for s in c.singlets])
        chroms.append((c.index, e, f))
        m = c.model
        orbs.append(ChromophoreOrbitals(c.index, np.asarray(c.atom_indices), tuple(m.types), m.ip, m.u,
                                        c.scf.mo_energy, c.scf.mo_coeff, m.n_occ, e, f, c.singlet_amplitudes))
    return SpectrumSource(res.name, res.smiles, _sticks_from(chroms), tuple(orbs), tuple(res.warnings))


def _stored_warnings(value, path) -> tuple[str, ...]:
    """The ``warnings`` attribute of a record (a JSON list; absent in records written before it)."""
    if value is None:
        return ()
    import json
    try:
        items = json.loads(value.decode() if isinstance(value, bytes) else str(value))
    except ValueError:
        items = None
    if not isinstance(items, list):
        raise StorageError(f"'{path}' is damaged: a molecule's warnings attribute is not a JSON list")
    return tuple(str(w) for w in items)


def from_arrays(name: str, energy_ev, oscillator_strength, labels=None, smiles: str = "") -> SpectrumSource:
    """Source from plain arrays of singlet excitation energies (eV) and oscillator strengths."""
    try:
        sticks = Sticks(np.asarray(energy_ev, dtype=float), np.asarray(oscillator_strength, dtype=float),
                        tuple(labels) if labels is not None else ())
    except InputError as err:
        raise err.with_molecule(name)
    return SpectrumSource(name, smiles, sticks, ())


def record_molecules(path: str | Path) -> list[str]:
    """Names of the molecules in a record file, in file order."""
    from ..io.h5_io import FORMAT

    with _open(path) as h5:
        if h5.attrs.get("format") != FORMAT:
            raise StorageError(f"'{path}' is not a ppp record file")
        return [str(h5["molecules"][k].attrs["name"]) for k in sorted(h5["molecules"], key=int)]


def _open(path):
    import h5py

    p = Path(path)
    if not p.is_file():
        raise StorageError(f"record file '{p}' does not exist")
    try:
        return h5py.File(p, "r")
    except (OSError, ValueError) as exc:
        raise StorageError(f"cannot read '{p}' as HDF5: {exc}") from None


def _file_format(path) -> str:
    """The ``format`` attribute of an HDF5 file ("" when absent)."""
    with _open(path) as h5:
        fmt = h5.attrs.get("format", "")
    return fmt.decode() if isinstance(fmt, bytes) else str(fmt)


def from_batch(path: str | Path, molecule: str | None = None) -> SpectrumSource:
    """Source from one molecule of a ``ppp batch`` results file (a running, interrupted or complete one:
    its committed rows).

    molecule : the molecule's key (the input's ID), its name, the first word of its ID when no other ID
               starts with it, or, as a number, its 1-based record in the input file (counting records,
               not lines: ``input_index`` + 1); None is allowed only when the file holds exactly one
               molecule.
    A molecule whose computation failed is an InputError giving the reason the batch recorded.
    """
    from ..batch import schema as S
    from ..batch.reader import ResultsFile

    with ResultsFile(path) as rf:
        n = rf.n_rows
        if n == 0:
            raise InputError(f"'{path}' holds no molecules yet")
        keys, names = rf.text("key"), rf.text("name")
        if molecule is None:
            if n != 1:
                raise InputError(f"'{path}' holds {n} molecules; choose one with --molecule "
                                 f"(its ID, name or input record number)")
            row = 0
        elif str(molecule) in keys:
            row = keys.index(str(molecule))
        elif str(molecule) in names:
            row = names.index(str(molecule))
        elif len(by_word := [r for r, k in enumerate(keys) if k.split(None, 1)[:1] == [str(molecule)]]) == 1:
            # the first word of an ID (a SMILES file's "HC-017 DANS" line gives the ID "HC-017 DANS")
            row = by_word[0]
        elif str(molecule).isdigit() and int(molecule) >= 1:
            hits = np.flatnonzero(rf.column("input_index") == int(molecule) - 1)
            if hits.size == 0:
                raise InputError(f"no molecule with input record number {molecule} in '{path}' "
                                 f"(it holds {n} of the input's {rf.attrs.get('expected_rows', '?')} records"
                                 f"{'' if rf.complete else '; run the batch again to finish it'})")
            row = int(hits[0])
        else:
            more = "" if rf.complete else (f"; the file is not complete ({n} of {rf.attrs.get('expected_rows', '?')} "
                                            f"inputs): run the batch again to finish it")
            raise InputError(f"no molecule '{molecule}' in '{path}' (neither an ID nor a name of its {n} rows; "
                             f"e.g. {', '.join(keys[:3])}){more}")
        label = names[row] or keys[row]
        if int(rf.column("status", row, row + 1)[0]) != S.OK:
            kind = rf.text("error_kind", row, row + 1)[0]
            msg = rf.text("error_message", row, row + 1)[0]
            raise InputError(f"{label}: no spectrum, the batch recorded a failure ({kind}): {msg}")
        s0 = int(rf.column("state_start", row, row + 1)[0])
        s1 = s0 + int(rf.column("state_count", row, row + 1)[0])
        mult = rf.states("multiplicity", s0, s1)
        chrom = rf.states("chromophore", s0, s1)
        energy = rf.states("energy_ev", s0, s1)
        f = rf.states("oscillator_strength", s0, s1)
        smiles = rf.text("smiles", row, row + 1)[0]
        warnings = rf.warnings(row, row + 1)[0]
    if energy.shape[0] != s1 - s0:
        raise StorageError(f"'{path}' is damaged: the states of {label} are incomplete")
    chroms = [(int(c), energy[(chrom == c) & (mult == 1)], f[(chrom == c) & (mult == 1)])
              for c in np.unique(chrom)]
    try:
        return SpectrumSource(label, smiles, _sticks_from(chroms), (), tuple(warnings))
    except InputError as err:
        raise err.with_molecule(label)


def from_record(path: str | Path, molecule: str | None = None) -> SpectrumSource:
    """Source from one molecule of a ``ppp run --save`` record file, or of a ``ppp batch`` results file
    (then :func:`from_batch`).

    molecule : its name, or its 1-based position in the file; None is allowed only when the file holds
               exactly one molecule.
    """
    from ..batch.schema import FORMAT as BATCH_FORMAT
    from ..io.h5_io import FORMAT

    if not Path(path).is_file():
        raise StorageError(f"record file '{path}' does not exist")
    try:
        fmt = _file_format(path)
    except StorageError:  # h5py refuses a file still open for writing or left by a killed writer: only
        fmt = BATCH_FORMAT  # a batch file is read in that state (ResultsFile says what is wrong otherwise)
    if fmt == BATCH_FORMAT:
        return from_batch(path, molecule)
    with _open(path) as h5:
        try:
            if h5.attrs.get("format") != FORMAT:
                raise StorageError(f"'{path}' is neither a ppp record file nor a batch results file")
            keys = sorted(h5["molecules"], key=int)
            names = [str(h5["molecules"][k].attrs["name"]) for k in keys]
            if molecule is None:
                if len(keys) != 1:
                    raise InputError(f"'{path}' holds {len(keys)} molecules; choose one with --molecule "
                                     f"(name or number 1-{len(keys)})")
                key = keys[0]
            elif str(molecule) in names:
                key = keys[names.index(str(molecule))]
            elif str(molecule).isdigit() and 1 <= int(molecule) <= len(keys):
                key = keys[int(molecule) - 1]
            else:
                raise InputError(f"no molecule '{molecule}' in '{path}' (it holds: {', '.join(names[:8])}"
                                 f"{', ...' if len(names) > 8 else ''})")
            g = h5["molecules"][key]
            chroms, orbs = [], []
            for cname in sorted(g, key=lambda s: int(s.split("_")[1])):
                cg = g[cname]
                m, s, st = cg["model"], cg["scf"], cg["states"]
                mult = st["multiplicity"][()]
                e = st["energy_ev"][()][mult == 1]
                f = st["oscillator_strength"][()][mult == 1]
                idx = int(cname.split("_")[1])
                chroms.append((idx, e, f))
                types = tuple(t.decode() if isinstance(t, bytes) else str(t) for t in m["types"][()])
                n_occ = int(m.attrs["n_electrons"]) // 2
                orbs.append(ChromophoreOrbitals(idx, m["atom_indices"][()], types, m["ip_ev"][()], m["u_ev"][()],
                                                s["mo_energy_ev"][()], s["mo_coeff"][()], n_occ, e, f,
                                                st["singlet_amplitudes"][()]))
            name, smiles = str(g.attrs["name"]), str(g.attrs["smiles"])
            warnings = _stored_warnings(g.attrs.get("warnings"), path)
        except KeyError as exc:
            raise StorageError(f"'{path}' is damaged or incomplete: {exc}") from None
    try:
        return SpectrumSource(name, smiles, _sticks_from(chroms), tuple(orbs), warnings)
    except InputError as err:
        raise err.with_molecule(name)
