"""JSON form of a result. The schema is ``ppp/io/result.schema.json`` (JSON Schema 2020-12)."""
from __future__ import annotations

import math
from importlib import resources

import numpy as np
from scipy.linalg import block_diag

from .. import __version__

SCHEMA_VERSION = 1


def schema() -> dict:
    """The JSON Schema that every molecule record follows."""
    import json
    return json.loads(resources.files("ppp.io").joinpath("result.schema.json").read_text())


def _state(st) -> dict:
    return {
        "label": st.label,
        "multiplicity": st.multiplicity,
        "chromophore": st.chromophore,
        "energy_ev": st.energy_ev,
        "wavelength_nm": st.wavelength_nm if math.isfinite(st.wavelength_nm) else None,
        "oscillator_strength": st.oscillator_strength,
        "transition_dipole": list(st.transition_dipole),
        "polarization": st.polarization,
        "polarization_deg": st.polarization_deg,
        "configurations": [
            {"from": c.from_label, "to": c.to_label, "from_index": c.occupied, "to_index": c.virtual,
             "weight": c.weight} for c in st.configurations
        ],
    }


def _model(models, parameters: str, sha: str) -> dict:
    return {
        "n_centres": int(sum(m.n_centres for m in models)),
        "n_electrons": int(sum(m.n_electrons for m in models)),
        "core_charges": [int(z) for m in models for z in m.core_charges],
        "types": [t for m in models for t in m.types],
        "core_ev": block_diag(*[m.core for m in models]).tolist(),
        "gamma_ev": block_diag(*[m.gamma for m in models]).tolist(),
        "core_repulsion_ev": float(sum(m.e_core for m in models)),
        "coordinates_angstrom": np.concatenate([m.coords for m in models]).tolist(),
        "gamma_formula": models[0].gamma_formula,
        "parameters": {"name": parameters, "sha256": sha},
    }


def _chromophore(c, parameters, sha) -> dict:
    m = c.model
    return {
        "index": c.index,
        "atom_indices": [int(i) for i in c.atom_indices],
        "model": _model([m], parameters, sha),
        "scf": {"energy_ev": c.e_total, "electronic_energy_ev": c.scf.e_elec, "converged": c.scf.converged,
                "iterations": c.scf.iterations, "strategy": c.scf.strategy,
                "homo_ev": c.homo_ev, "lumo_ev": c.lumo_ev, "mo_energy_ev": c.scf.mo_energy.tolist()},
        "ground_state": {
            "pi_populations": c.ground.populations.tolist(),
            "pi_charges": c.ground.charges.tolist(),
            "bonds": m.bonds.tolist(),
            "bond_orders": c.ground.bond_orders.tolist(),
            "dipole_debye": c.ground.dipole_debye.tolist(),
        },
        "states": [_state(s) for s in c.singlets + c.triplets],
    }


def _uncertainty(res, band) -> dict:
    """Expected error of the first allowed band from its class's measured error (None if unknown)."""
    from ..calibration.uncertainty import for_result
    u = for_result(res, band) if band is not None else None
    return {"first_allowed_uncertainty_nm": u.sigma_nm if u else None,
            "first_allowed_uncertainty_ev": u.sigma_ev if u else None,
            "uncertainty_class": u.cls if u else None}


def result_to_dict(res) -> dict:
    """Plain-JSON dictionary of a MoleculeResult (see the schema for every field).

    A molecule with several chromophores has a molecule-level ``model`` whose matrices are the
    block-diagonal union of the chromophores' models; each block is solved on its own with its own
    electron count (listed under ``chromophores``).
    """
    chroms = [_chromophore(c, res.parameters, res.parameters_sha256) for c in res.chromophores]
    models = [c.model for c in res.chromophores]
    b = res.first_bright
    return {
        "schema_version": SCHEMA_VERSION,
        "program": {"name": "ppp", "version": __version__},
        "name": res.name,
        "smiles": res.smiles,
        "canonical_smiles": res.canonical_smiles,
        "states": [_state(s) for s in res.states],
        "warnings": list(res.warnings),
        "scf": {
            "energy_ev": float(sum(c.e_total for c in res.chromophores)),
            "converged": all(c.scf.converged for c in res.chromophores),
            "iterations": int(max(c.scf.iterations for c in res.chromophores)),
        },
        "model": _model(models, res.parameters, res.parameters_sha256),
        "summary": {
            "s1_ev": res.s1.energy_ev if res.s1 else None,
            "t1_ev": res.t1.energy_ev if res.t1 else None,
            "first_allowed_nm": b.wavelength_nm if b else None,
            "brightest_nm": res.lambda_max_nm,
            "homo_ev": [c.homo_ev for c in res.chromophores],
            "lumo_ev": [c.lumo_ev for c in res.chromophores],
            **_uncertainty(res, b),
        },
        "options": {
            "gamma": res.options.gamma, "n_singlets": res.options.n_singlets,
            "n_triplets": res.options.n_triplets, "coordinates": res.options.coordinates,
            "bond_order_beta": res.options.bond_order_beta, "twist": res.options.twist,
            "solvent": res.options.solvent,
            "response": res.options.response,
        },
        "chromophores": chroms,
    }
