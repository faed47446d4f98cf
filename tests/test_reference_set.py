"""The reference set of measured bands, the band-matching rule, the class rules and band uncertainties."""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pytest

from ppp.calibration import classes, reference
from ppp.calibration.uncertainty import band_uncertainty, for_result
from ppp.errors import InputError
from ppp.model import params
from ppp.structure.readers import mol_from_smiles

REF = Path(__file__).parent / "data" / "reference_absorption.csv"
ISSUE_CLASSES = {"polyene", "benzenoid", "non-alternant", "cyanine", "azo", "carbonyl", "coumarin", "xanthene",
                 "thiophene", "push-pull"}


def test_reference_set_is_complete_and_sourced():
    ref = reference.load(REF)
    assert len(ref.entries) >= 80
    assert set(ref.classes) == ISSUE_CLASSES
    for e in ref.entries:
        assert e.source.strip() and e.solvent.strip() and e.band.strip()
        assert 0 < e.uncertainty_nm <= 25
        mol_from_smiles(e.smiles)  # every structure parses
        assert "from memory" in e.source or e.source.startswith("cf.")
    names = [e.name for e in ref.entries]
    assert len(names) == len(set(names))
    assert len(ref.sha256) == 64


def test_reference_file_saved_by_a_spreadsheet_reads_the_same(tmp_path):
    # the same table with a byte-order mark and ";" between columns (a spreadsheet's "CSV UTF-8" export in
    # a decimal-comma locale, common practice): the same entries, hence the same fit input
    import csv
    import io
    lines = [ln for ln in REF.read_text(encoding="utf-8").splitlines() if not ln.startswith("#")]
    rows = list(csv.reader(lines))
    buf = io.StringIO()
    csv.writer(buf, delimiter=";", lineterminator="\r\n").writerows(rows)
    p = tmp_path / "lab.csv"
    p.write_bytes(b"\xef\xbb\xbf" + buf.getvalue().encode("utf-8"))
    assert reference.load(p).entries == reference.load(REF).entries


@dataclass(frozen=True)
class _S:
    energy_ev: float
    oscillator_strength: float


def test_match_rules_use_computed_states_only():
    states = [_S(3.0, 0.001), _S(2.5, 0.0), _S(3.5, 0.8), _S(3.2, 0.06)]
    assert reference.match_state(states, "allowed") == _S(3.2, 0.06)
    assert reference.match_state(states, "S1") == _S(2.5, 0.0)
    assert reference.match_state(states, "S2") == _S(3.0, 0.001)
    assert reference.match_state([_S(3.0, 0.01)], "allowed") is None
    assert reference.match_state([_S(3.0, 0.01)], "S2") is None


@pytest.mark.parametrize("bad,reason", [
    ("name,smiles\nx,C=C\n", "missing column"),
    ("name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source\nx,C=C,p,s,b,allowed,abc,3,m\n",
     "must be numbers"),
    ("name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source\nx,C=C,p,s,b,brightest,200,3,m\n",
     "is not one of"),
    ("name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source\nx,C=C,p,s,b,allowed,200,0,m\n",
     "must be positive"),
    ("name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source\n", "holds no rows"),
])
def test_bad_reference_files_give_one_line_errors(tmp_path, bad, reason):
    p = tmp_path / "r.csv"
    p.write_text(bad)
    with pytest.raises(InputError, match=reason):
        reference.load(p)
    with pytest.raises(InputError, match="does not exist"):
        reference.load(tmp_path / "missing.csv")


def test_class_rules_agree_with_the_reference_labels():
    # the labels were assigned by a chemist; the structure rules must reproduce nearly all of them
    ref = reference.load(REF)
    agree = sum(classes.classify_smiles(e.smiles) == e.cls for e in ref.entries)
    assert agree >= 0.9 * len(ref.entries)


@pytest.mark.parametrize("smiles,cls", [
    ("c1ccc2ccccc2c1", "benzenoid"), ("c1ccc2cccc2cc1", "non-alternant"), ("C=CC=CC=C", "polyene"),
    ("CN(C)c1ccc(cc1)/N=N/c1ccccc1", "azo"), ("CN(C)C=CC=[N+](C)C", "cyanine"),
    ("Nc1ccc(cc1)[N+](=O)[O-]", "push-pull"), ("O=C1C=CC(=O)C=C1", "carbonyl"), ("c1ccsc1", "thiophene"),
    ("CCO", "other"), ("c1ccncc1", "other"),
])
def test_class_rules_on_textbook_cases(smiles, cls):
    assert classes.classify_smiles(smiles) == cls


@pytest.mark.parametrize("smiles,cls", [
    # imide N and ester O give their lone pair to the carbonyl groups: carbonyl dyes, not push-pull
    # (perylene diimide and phthalimide; common practice in dye classification)
    ("C1=CC2=C3C(=CC=C4C3=C1C5=C6C4=CC=C7C6=C(C=C5)C(=O)NC7=O)C(=O)NC2=O", "carbonyl"),
    ("CN1C(=O)c2ccccc2C1=O", "carbonyl"), ("COC(=O)c1ccccc1", "carbonyl"),
    # an amide N on a ring, and a lactam N on the pi-frame (diketopyrrolopyrrole), still donate
    ("CC(=O)Nc1ccc(cc1)[N+](=O)[O-]", "push-pull"), ("O=C1NC(c2ccccc2)=C2C1=C(c1ccccc1)NC2=O", "push-pull"),
])
def test_class_rules_imides_and_esters_are_no_donors(smiles, cls):
    assert classes.classify_smiles(smiles) == cls


def test_class_rules_read_molecules_with_explicit_hydrogens():
    # an SDF record keeps its hydrogens; the class must not depend on that (it fell to "other")
    from rdkit import Chem
    for smiles, cls in [("CN(C)c1ccc(C=O)cc1", "push-pull"), ("c1ccc2ccccc2c1", "benzenoid"),
                        ("C=CC=CC=C", "polyene")]:
        assert classes.classify(Chem.AddHs(Chem.MolFromSmiles(smiles))) == cls


def test_band_uncertainty_conversion_and_fallback(tmp_path):
    text = params.load("classic").text.replace('name = "classic"', 'name = "u"').replace(
        "default = true", "default = false")
    text = text[:text.index("[uncertainty]")] if "[uncertainty]" in text else text
    text += '\n[uncertainty]\nsource = "test"\nmae_ev = { polyene = 0.10, all = 0.25 }\n'
    p = tmp_path / "u.toml"
    p.write_text(text)
    pset = params.load(str(p))
    u = band_uncertainty(4.0, "polyene", pset)
    # d(lambda) = lambda dE / E: 309.96 nm * 0.10 / 4.0 = 7.75 nm
    assert u.cls == "polyene" and u.sigma_nm == pytest.approx(309.96 * 0.1 / 4.0, rel=1e-3)
    assert band_uncertainty(4.0, "azo", pset).cls == "all"
    # the fallback is worded as the overall figure, not as a class of its own
    assert str(band_uncertainty(4.0, "azo", pset)).endswith("(overall error 0.25 eV)")
    assert str(u).endswith("(polyene-class error 0.10 eV)")
    assert band_uncertainty(-1.0, "azo", pset) is None
    bare = tmp_path / "bare.toml"
    bare.write_text(text[:text.index("[uncertainty]")])
    assert band_uncertainty(4.0, "azo", params.load(str(bare))) is None
    import ppp
    res = ppp.compute("C=CC=CC=C", parameters=str(p), n_triplets=0)
    assert for_result(res).cls == "polyene"
    assert "\u00b1" in res.table()


def test_json_summary_carries_the_band_uncertainty():
    import json

    import jsonschema

    import ppp
    res = ppp.compute("C=CC=CC=C", n_triplets=0)
    doc = res.to_dict()
    schema = json.loads((Path(ppp.__file__).parent / "io" / "result.schema.json").read_text())
    jsonschema.validate(doc, schema)
    summ = doc["summary"]
    expect = params.load("classic").uncertainty["polyene"]
    assert summ["uncertainty_class"] == "polyene"
    assert summ["first_allowed_uncertainty_ev"] == pytest.approx(expect)
    lam = summ["first_allowed_nm"]
    assert summ["first_allowed_uncertainty_nm"] == pytest.approx(lam * expect / (1239.84198 / lam), rel=1e-5)
