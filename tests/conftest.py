"""Shared helpers for the test suite."""
from __future__ import annotations

import pytest

from ppp.driver import Options, build_models
from ppp.structure.readers import mol_from_smiles


def classic_variant(tmp_path, old: str, new: str, name: str = "variant.toml"):
    """Path of a copy of the shipped ``classic`` parameter file with the first ``old`` replaced by ``new``."""
    from ppp.model import params

    text = open(params.load("classic").path, encoding="utf-8").read()
    assert old in text
    p = tmp_path / name
    p.write_text(text.replace(old, new, 1), encoding="utf-8")
    return p


def model_of(smiles: str, **opts):
    """The single chromophore model of a SMILES (asserts there is exactly one)."""
    systems = build_models(mol_from_smiles(smiles), Options(**opts))
    assert len(systems) == 1, f"{smiles} has {len(systems)} chromophores"
    return systems[0][1]


@pytest.fixture
def cli(capsys):
    """Run the command line in-process; returns (exit status, stdout, stderr)."""
    from ppp.cli import main

    def run(*argv):
        code = main([str(a) for a in argv])
        out, err = capsys.readouterr()
        return code, out, err

    return run
