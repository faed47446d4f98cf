"""Property-based fuzzing (hypothesis): any input reaches a result or one of the project's own errors,
never another exception; and results are identical run to run."""
from __future__ import annotations

import json

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import ppp
from ppp.cli import main as cli_main

SMILES_ALPHABET = list("CNOSBFcnos()[]=#123+-@/\\.H%lr") + ["Cl", "Br", "Se", "Si", "P", "I", "[O-]", "[N+]"]

FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def outcome(smiles: str):
    """('ok', to_dict) or ('error', kind, message); any other exception propagates and fails the test."""
    try:
        return ("ok", json.dumps(ppp.compute(smiles, n_singlets=3, n_triplets=2).to_dict(), sort_keys=True))
    except ppp.PPPError as err:
        return ("error", err.kind, str(err))


@FUZZ
@given(st.lists(st.sampled_from(SMILES_ALPHABET), min_size=1, max_size=24).map("".join))
def test_random_smiles_like_strings(text):
    first = outcome(text)
    assert first == outcome(text)


@FUZZ
@given(st.text(min_size=0, max_size=20))
def test_arbitrary_text(text):
    outcome(text)


# Randomly assembled molecules: fragments joined by single bonds at atoms that carry implicit hydrogens,
# so that most assemblies are valid structures and reach the solver.
FRAGMENTS = ["C=C", "c1ccccc1", "c1ccncc1", "c1ccsc1", "c1cc[nH]c1", "c1ccoc1", "C#C", "N=N", "C=O",
             "C=N", "N", "O", "S", "[O-]", "[N+](=O)[O-]", "C#N", "CC", "[NH3+]", "OS(=O)=O", "B", "Cl",
             "Br", "F", "[Se]", "I", "[CH2]", "C[C+]C", "C[CH-]C", "C1=CC=C1", "C=CC=[N+](C)C", "C=CC=C",
             "c1ccc2ccccc2c1", "O=C1C=CC(=O)C=C1", "c1ccc2c(c1)oc(=O)cc2"]


@st.composite
def assembled(draw):
    from rdkit import Chem, rdBase
    names = draw(st.lists(st.sampled_from(FRAGMENTS), min_size=1, max_size=6))
    mol = Chem.MolFromSmiles(names[0])
    for name in names[1:]:
        frag = Chem.MolFromSmiles(name)
        free_a = [a.GetIdx() for a in mol.GetAtoms() if a.GetTotalNumHs() > 0 and not a.GetNoImplicit()]
        free_b = [a.GetIdx() for a in frag.GetAtoms() if a.GetTotalNumHs() > 0 and not a.GetNoImplicit()]
        if not free_a or not free_b:
            continue
        i = draw(st.sampled_from(free_a))
        j = draw(st.sampled_from(free_b))
        combo = Chem.RWMol(Chem.CombineMols(mol, frag))
        combo.AddBond(i, mol.GetNumAtoms() + j, Chem.BondType.SINGLE)
        candidate = combo.GetMol()
        try:
            with rdBase.BlockLogs():
                Chem.SanitizeMol(candidate)
        except Exception:  # an over-valent join: skip this fragment
            continue
        mol = candidate
    return Chem.MolToSmiles(mol)


@FUZZ
@given(assembled())
def test_assembled_molecules(smiles):
    first = outcome(smiles)
    assert first == outcome(smiles)
    if first[0] == "ok":
        doc = json.loads(first[1])
        assert doc["scf"]["converged"] is True
        assert all(s["energy_ev"] > 0 for s in doc["states"])


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from(SMILES_ALPHABET), min_size=1, max_size=16).map("".join))
def test_cli_never_crashes(text):
    import contextlib
    import io
    err = io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(io.StringIO()):
        code = cli_main(["run", "--", text])  # "--": a SMILES may start with "-"
    assert code in (0, 1)
    assert "Traceback" not in err.getvalue() and "internal error" not in err.getvalue()


def test_cli_smiles_starting_with_dash_without_separator_is_a_usage_error(capsys):
    import pytest
    with pytest.raises(SystemExit) as exc:
        cli_main(["run", "-C"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert "unrecognized arguments: -C" in err and "Traceback" not in err
