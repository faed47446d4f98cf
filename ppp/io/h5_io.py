"""Full-record HDF5 file of ``ppp run --save``: every matrix needed to re-solve the model, the
orbitals, the CI vectors and the states, with provenance.

Layout::

    /                       attrs: format="ppp-record", format_version, program_version, created,
                                   parameters, parameters_sha256
    /parameter_file         the parameter set's TOML text, byte for byte (its SHA-256 is the attr above)
    /molecules/<k>          attrs: name, smiles, canonical_smiles, options (JSON), warnings (JSON list of str)
      chromophore_<c>/model attrs: n_electrons, core_repulsion_ev, gamma_formula
                            core_ev (N,N), gamma_ev (N,N), core_charges (N,), ip_ev (N,), u_ev (N,),
                            coordinates_angstrom (N,3), types (N,), bonds (M,2), atom_indices (N,)
      chromophore_<c>/scf   attrs: energy_ev, electronic_energy_ev, converged, iterations, strategy
                            mo_energy_ev (N,), mo_coeff (N,N), density (N,N)
      chromophore_<c>/states multiplicity (k,), energy_ev, wavelength_nm, oscillator_strength,
                            transition_dipole (k,3), character (k,) text,
                            singlet_amplitudes (ks,o,v), triplet_amplitudes (kt,o,v)

Files are written to a temporary name and renamed, so a crash never leaves a half-written record.
"""
from __future__ import annotations

import json
import os
from datetime import datetime, timezone
from pathlib import Path

import h5py
import numpy as np

from .. import __version__
from ..errors import StorageError
from ..model import params as param_registry

FORMAT = "ppp-record"
FORMAT_VERSION = 1
_STR = h5py.string_dtype()


def save(results, path: str | Path, overwrite: bool = False) -> Path:
    """Write results (a list of MoleculeResult) to ``path``; refuse to replace a file unless asked."""
    path = Path(path)
    if path.exists() and not overwrite:
        raise StorageError(f"'{path}' exists; pass overwrite=True (command line: --overwrite) to replace it")
    if not results:
        raise StorageError("nothing to save: no molecule was computed")
    tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp")
    try:
        with h5py.File(tmp, "w") as h5:
            _write(h5, results)
        os.replace(tmp, path)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise StorageError(f"cannot write '{path}': {exc.strerror or exc}") from None
    return path


def _write(h5: h5py.File, results) -> None:
    first = results[0]
    pset = param_registry.load(first.options.parameters)
    h5.attrs.update({"format": FORMAT, "format_version": FORMAT_VERSION, "program_version": __version__,
                     "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
                     "parameters": pset.name, "parameters_sha256": pset.sha256})
    h5.create_dataset("parameter_file", data=pset.text, dtype=_STR)
    mols = h5.create_group("molecules")
    for k, res in enumerate(results):
        g = mols.create_group(str(k))
        g.attrs.update({"name": res.name, "smiles": res.smiles, "canonical_smiles": res.canonical_smiles,
                        "options": json.dumps(res.options.__dict__), "warnings": json.dumps(list(res.warnings))})
        for c in res.chromophores:
            cg = g.create_group(f"chromophore_{c.index}")
            m = c.model
            mg = cg.create_group("model")
            mg.attrs.update({"n_electrons": m.n_electrons, "core_repulsion_ev": m.e_core,
                             "gamma_formula": m.gamma_formula})
            for name, arr in (("core_ev", m.core), ("gamma_ev", m.gamma), ("core_charges", m.core_charges),
                              ("ip_ev", m.ip), ("u_ev", m.u), ("coordinates_angstrom", m.coords),
                              ("bonds", m.bonds), ("atom_indices", c.atom_indices)):
                mg.create_dataset(name, data=np.asarray(arr))
            mg.create_dataset("types", data=np.array(m.types, dtype=object), dtype=_STR)
            sg = cg.create_group("scf")
            sg.attrs.update({"energy_ev": c.e_total, "electronic_energy_ev": c.scf.e_elec,
                             "converged": c.scf.converged, "iterations": c.scf.iterations,
                             "strategy": c.scf.strategy})
            sg.create_dataset("mo_energy_ev", data=c.scf.mo_energy)
            sg.create_dataset("mo_coeff", data=c.scf.mo_coeff)
            sg.create_dataset("density", data=c.scf.dens)
            st = cg.create_group("states")
            states = c.singlets + c.triplets
            st.create_dataset("multiplicity", data=np.array([s.multiplicity for s in states], dtype=np.int8))
            st.create_dataset("energy_ev", data=np.array([s.energy_ev for s in states]))
            st.create_dataset("wavelength_nm", data=np.array([s.wavelength_nm for s in states]))
            st.create_dataset("oscillator_strength", data=np.array([s.oscillator_strength for s in states]))
            st.create_dataset("transition_dipole", data=np.array([s.transition_dipole for s in states]).reshape(-1, 3))
            st.create_dataset("character", data=np.array([s.character for s in states], dtype=object), dtype=_STR)
            st.create_dataset("singlet_amplitudes", data=c.singlet_amplitudes)
            st.create_dataset("triplet_amplitudes", data=c.triplet_amplitudes)


def load_models(path: str | Path) -> list[dict]:
    """Read back what is needed to re-solve every chromophore in a record file.

    Returns a list of dicts with keys name, chromophore, core, gamma, n_electrons, core_repulsion_ev,
    energy_ev (the stored total pi energy) and states (dict of the stored state arrays).
    """
    path = Path(path)
    try:
        h5 = h5py.File(path, "r")
    except (OSError, ValueError) as exc:
        raise StorageError(f"cannot read '{path}' as HDF5: {exc}") from None
    out = []
    try:
        with h5:
            if h5.attrs.get("format") != FORMAT:
                raise StorageError(f"'{path}' is not a ppp record file")
            for k in sorted(h5["molecules"], key=int):
                g = h5["molecules"][k]
                for cname in sorted(g):
                    m, s, st = g[cname]["model"], g[cname]["scf"], g[cname]["states"]
                    out.append({
                        "name": str(g.attrs["name"]), "chromophore": int(cname.split("_")[1]),
                        "core": m["core_ev"][()], "gamma": m["gamma_ev"][()],
                        "n_electrons": int(m.attrs["n_electrons"]),
                        "core_repulsion_ev": float(m.attrs["core_repulsion_ev"]),
                        "energy_ev": float(s.attrs["energy_ev"]),
                        "states": {key: st[key][()] for key in ("multiplicity", "energy_ev", "oscillator_strength")},
                    })
    except (KeyError, OSError) as exc:
        raise StorageError(f"'{path}' is damaged or incomplete: {exc}") from None
    return out
