"""Command line: normal runs, and every kind of bad input listed in DEVELOPERS.md gives a one-line
error naming the molecule and a nonzero exit status, never a traceback."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest
from rdkit import Chem
from rdkit.Chem import AllChem

from ppp.model import params


def one_error_line(err: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert lines, "no error message"
    for ln in lines:
        assert ln.startswith("error: "), ln
    assert "Traceback" not in err
    return lines[0]


def test_run_prints_table(cli):
    code, out, err = cli("run", "C=CC=C", "--singlets", "3", "--triplets", "1")
    assert code == 0 and err == ""
    assert "S1" in out and "T1" in out and "HOMO" in out


def test_run_json(cli):
    code, out, _ = cli("run", "c1ccccc1", "C=O", "--json")
    doc = json.loads(out)
    assert code == 0 and len(doc["results"]) == 2 and doc["errors"] == []
    s = doc["results"][0]["states"][0]
    assert {"multiplicity", "energy_ev", "wavelength_nm", "oscillator_strength", "transition_dipole"} <= set(s)


def test_batch_of_good_and_bad_keeps_going(cli):
    code, out, err = cli("run", "C=CC=C", "C1CC", "c1ccccc1", "--json")
    doc = json.loads(out)
    assert code == 1
    assert [r["name"] for r in doc["results"]] == ["C=CC=C", "c1ccccc1"]
    assert doc["errors"][0]["name"] == "C1CC" and doc["errors"][0]["kind"] == "parse"
    assert one_error_line(err) == "error: C1CC: unparsable SMILES (syntax)"


def _bad_param_file(tmp: Path) -> Path:
    p = tmp / "bad.toml"
    p.write_text(Path(params.load("classic").path).read_text().replace("u_ev = 11.13", "u_ev = -3"))
    return p


@pytest.mark.parametrize("argv, expect", [
    (["run", "C1CC"], "C1CC: unparsable SMILES"),
    (["run", "N(C)(C)(C)(C)C"], "invalid structure"),
    (["run", ""], "empty SMILES"),
    (["run", "[Se]=Cc1ccccc1"], "(Se)"),
    (["run", "c1ccccc1[CH2]"], "radical"),
    (["run", "c1ccccc1[N+]#N"], "odd number"),
    (["run", "CCCC"], "CCCC: no pi-system"),
    (["run", "C=CC=CC=CC=CC=C", "--max-centres", "6"], "more than the limit"),
    (["run", "C=C", "--parameters", "nonexistent"], "valid sets: classic"),
    (["run"], "nothing to compute"),
])
def test_bad_input_one_line(cli, argv, expect):
    code, out, err = cli(*argv)
    assert code == 1
    line = one_error_line(err)
    assert expect in line


def test_bad_parameter_file(cli, tmp_path):
    code, _, err = cli("run", "C=C", "--parameters", _bad_param_file(tmp_path))
    assert code == 1 and "u_ev must be positive" in one_error_line(err)


def test_type_missing_from_parameter_file(cli, tmp_path):
    """A parameter file without a centre type the molecule needs: one line naming the atom and the type."""
    text = Path(params.load("classic").path).read_text()
    start = text.index("[types.Br]")
    p = tmp_path / "no_bromine.toml"
    text = text[:start] + text[text.index("[types.", start + 1):]
    p.write_text("\n".join(line for line in text.splitlines() if not line.startswith('"C-Br"')))
    code, _, err = cli("run", "Brc1ccccc1", "--parameters", p)
    assert code == 1
    assert "atom 1 (Br)" in one_error_line(err) and "no centre type 'Br'" in one_error_line(err)


def test_iodine_is_a_pi_donor():
    """Iodine has (rough) parameters in both shipped sets: iodobenzene computes, and the lone pair
    conjugates with the ring as the lighter halogens' do -- halobenzenes' first allowed band lies below
    benzene's (measured: benzene 6.9 eV E1u, halobenzenes 5.5-5.9 eV K band; common practice)."""
    from ppp import compute
    for name in ("classic", "dye"):
        benzene = compute("c1ccccc1", parameters=name)
        iodo = compute("Ic1ccccc1", parameters=name)
        assert len(iodo.chromophores[0].atom_indices) == 7
        bright = lambda r: next(s.energy_ev for s in r.singlets if s.oscillator_strength >= 0.05)
        assert bright(iodo) < bright(benzene) - 0.3


def _molblock(smiles: str, name: str) -> str:
    m = Chem.AddHs(Chem.MolFromSmiles(smiles))
    AllChem.EmbedMolecule(m, randomSeed=1)
    m.SetProp("_Name", name)
    return Chem.MolToMolBlock(m)


def test_sdf_records_with_a_corrupt_one(cli, tmp_path):
    good = _molblock("C=CC=O", "acrolein")
    broken = "broken\n  junk\n\n  2  1  0  0  0  0  0  0  0  0999 V2000\nnot numbers at all\nM  END\n"
    truncated = _molblock("c1ccccc1", "benzene").split("M  END")[0]
    sdf = tmp_path / "lib.sdf"
    sdf.write_text(good + "$$$$\n" + broken + "$$$$\n" + truncated)
    code, out, err = cli("run", "--file", sdf)
    assert code == 1
    assert "acrolein" in out
    lines = err.strip().splitlines()
    assert len(lines) == 2
    assert "record 2" in lines[0] and "not a valid MOL block" in lines[0]
    assert "record 3" in lines[1] and "truncated" in lines[1]


def test_input_coordinates_from_sdf(cli, tmp_path):
    sdf = tmp_path / "one.sdf"
    sdf.write_text(_molblock("C=CC=CC=C", "hexatriene") + "$$$$\n")
    code_a, out_a, _ = cli("run", "--file", sdf, "--json")
    code_b, out_b, _ = cli("run", "--file", sdf, "--json", "--input-coordinates")
    assert code_a == code_b == 0
    ea = json.loads(out_a)["results"][0]["states"][0]["energy_ev"]
    eb = json.loads(out_b)["results"][0]["states"][0]["energy_ev"]
    assert ea != eb


@pytest.mark.parametrize("content, expect", [
    (None, "does not exist"),
    ("", "is empty"),
    ("\x00\x01\x02binary", "binary"),
])
def test_bad_files(cli, tmp_path, content, expect):
    p = tmp_path / "in.sdf"
    if content is not None:
        p.write_text(content)
    code, _, err = cli("run", "--file", p)
    assert code == 1 and expect in one_error_line(err)


def test_run_reads_smiles_lists_and_tables_as_batch_does(cli, tmp_path):
    # a SMILES list or a CSV given to --file is read like a batch input (it used to be taken for an SDF
    # file and every line reported as a truncated record); a bad line is its own one-line error
    smi = tmp_path / "few.smi"
    smi.write_text("C=CC=C butadiene\nC1CC( broken\n")
    code, out, err = cli("run", "--file", smi, "--singlets", "2", "--triplets", "0")
    assert code == 1 and "butadiene" in out and "S1" in out
    assert one_error_line(err).startswith("error: broken:") and "unparsable SMILES" in err
    table = tmp_path / "few.csv"
    table.write_text("name;smiles\nhexatriene;C=CC=CC=C\n")
    code, out, _ = cli("run", "--file", table, "--singlets", "1", "--triplets", "0", "--json")
    assert code == 0 and json.loads(out)["results"][0]["name"] == "hexatriene"


def test_run_reads_a_gzip_sdf_and_refuses_a_cut_one(cli, tmp_path):
    import gzip
    mol = Chem.MolFromSmiles("C=CC=CC=C")
    mol.SetProp("_Name", "hexatriene")
    AllChem.Compute2DCoords(mol)
    block = Chem.MolToMolBlock(mol) + "$$$$\n"
    gz = tmp_path / "one.sdf.gz"
    gz.write_bytes(gzip.compress(block.encode()))
    code, out, _ = cli("run", "--file", gz, "--singlets", "1", "--triplets", "0")
    assert code == 0 and "hexatriene" in out
    gz.write_bytes(gzip.compress(block.encode())[:40])
    code, _, err = cli("run", "--file", gz)
    assert code == 1 and "damaged gzip" in one_error_line(err)


def test_save_refuses_to_overwrite(cli, tmp_path):
    out = tmp_path / "r.h5"
    assert cli("run", "C=C", "--save", out)[0] == 0
    code, _, err = cli("run", "C=C", "--save", out)
    assert code == 1 and "exists" in one_error_line(err) and "--overwrite" in err
    assert cli("run", "C=C", "--save", out, "--overwrite")[0] == 0
    sdf = tmp_path / "in.sdf"
    sdf.write_text("x\n")
    code, _, err = cli("run", "--file", sdf, "--save", sdf, "--overwrite")
    assert code == 1 and "would replace the input" in one_error_line(err) and sdf.read_text() == "x\n"


def test_parameters_command_lists_and_shows(cli):
    code, out, _ = cli("parameters")
    assert code == 0 and "classic (default)" in out
    code, out, _ = cli("parameters", "classic")
    assert code == 0 and "N.aza" in out and "C-C" in out
    assert "alkyl shift" in out and "N.amino 0.790" in out  # the [alkyl_shift] table of classic


def test_real_process_exit_status_and_no_traceback():
    r = subprocess.run([sys.executable, "-m", "ppp", "run", "c1ccccc1[CH2]"], capture_output=True, text=True)
    assert r.returncode == 1
    assert r.stderr.strip() == "error: c1ccccc1[CH2]: radical: atom 7 (C) has an unpaired electron"
    r = subprocess.run([sys.executable, "-m", "ppp", "--traceback", "run", "c1ccccc1[CH2]"],
                       capture_output=True, text=True)
    assert r.returncode != 0 and "Traceback" in r.stderr
