"""JSON schema, HDF5 record round trip (re-solving the stored model), table output."""
from __future__ import annotations

import json

import h5py
import jsonschema
import numpy as np
import pytest

import ppp
from ppp.io import h5_io
from ppp.io.json_io import schema
from ppp.solvers import cis, scf

MOLECULES = ["c1ccccc1", "CN(C)C=CC=[N+](C)C", "[O-]c1ccc(cc1)C=O", "c1ccsc1", "c1ccccc1CCc1ccncc1"]


@pytest.mark.parametrize("smiles", MOLECULES)
def test_json_follows_schema(smiles):
    doc = json.loads(json.dumps(ppp.compute(smiles).to_dict()))
    jsonschema.validate(doc, schema())


def test_schema_rejects_a_broken_record():
    doc = ppp.compute("C=CC=C").to_dict()
    del doc["scf"]["converged"]
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(doc, schema())


def test_json_model_re_solves_to_the_same_states():
    """Anyone holding the JSON model can re-solve it: the stored matrices give the stored numbers."""
    doc = ppp.compute("CCN(CC)c1ccc(cc1)/N=N/c1ccc(cc1)C#N").to_dict()
    m = doc["model"]
    core, gamma = np.array(m["core_ev"]), np.array(m["gamma_ev"])
    r = scf.kernel(core, gamma, m["n_electrons"] // 2)
    assert np.isclose(r.e_elec + m["core_repulsion_ev"], doc["scf"]["energy_ev"], atol=1e-9)
    s = cis.kernel(r.mo_energy, r.mo_coeff, gamma, m["n_electrons"] // 2, 5, 1)
    ref = [st["energy_ev"] for st in doc["states"] if st["multiplicity"] == 1][:5]
    assert np.allclose(s.energies, ref, atol=1e-9)


def test_multi_chromophore_json_is_block_diagonal():
    doc = ppp.compute("c1ccccc1CCc1ccncc1").to_dict()
    assert len(doc["chromophores"]) == 2
    g = np.array(doc["model"]["gamma_ev"])
    assert g.shape == (12, 12) and np.all(g[:6, 6:] == 0)
    assert {s["chromophore"] for s in doc["states"]} == {0, 1}


def test_h5_record_round_trip_and_re_solve(tmp_path):
    res = [ppp.compute(s) for s in MOLECULES]
    path = h5_io.save(res, tmp_path / "rec.h5")
    with h5py.File(path) as h5:
        assert h5.attrs["parameters_sha256"] == res[0].parameters_sha256
        assert h5["parameter_file"][()].decode() == ppp.load_parameters().text
    models = h5_io.load_models(path)
    assert len(models) == sum(len(r.chromophores) for r in res)
    for m in models:
        n_occ = m["n_electrons"] // 2
        r = scf.kernel(m["core"], m["gamma"], n_occ)
        assert np.isclose(r.e_elec + m["core_repulsion_ev"], m["energy_ev"], atol=1e-9)
        sing = m["states"]["energy_ev"][m["states"]["multiplicity"] == 1]
        s = cis.kernel(r.mo_energy, r.mo_coeff, m["gamma"], n_occ, len(sing), 1)
        assert np.allclose(s.energies, sing, atol=1e-9)


def test_h5_refuses_to_overwrite(tmp_path):
    res = [ppp.compute("C=C")]
    path = h5_io.save(res, tmp_path / "rec.h5")
    with pytest.raises(ppp.StorageError, match="exists"):
        h5_io.save(res, path)
    h5_io.save(res, path, overwrite=True)


def test_damaged_record_file_is_a_clear_error(tmp_path):
    path = h5_io.save([ppp.compute("C=C")], tmp_path / "rec.h5")
    data = path.read_bytes()
    cut = tmp_path / "cut.h5"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(ppp.StorageError):
        h5_io.load_models(cut)
    junk = tmp_path / "junk.h5"
    junk.write_text("not hdf5")
    with pytest.raises(ppp.StorageError, match="cannot read"):
        h5_io.load_models(junk)


def test_table_lists_every_state_with_character():
    res = ppp.compute("c1ccc2ccccc2c1", n_singlets=4, n_triplets=2)
    text = res.table()
    for label in ("S1", "S4", "T1", "T2"):
        assert f"\n  {label} " in text
    assert "HOMO" in text and "LUMO" in text
    assert len(res.singlets) == 4 and len(res.triplets) == 2
