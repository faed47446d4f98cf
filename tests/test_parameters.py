"""Parameter registry: loading, hashing, validation and clear errors."""
from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pytest
from conftest import classic_variant

import ppp
from ppp.errors import ParameterError
from ppp.model import params

CLASSIC = Path(params.load("classic").path)


def test_default_set_loads_with_hash_of_file_bytes():
    s = params.load()
    assert s.name == params.default_name() == "classic"
    assert s.sha256 == hashlib.sha256(Path(s.path).read_bytes()).hexdigest()
    assert s.types["C"].z == 1 and s.beta_for("C", "C") < 0
    assert s.beta_for("N.aza", "C") == s.beta_for("C", "N.aza")


def test_every_value_has_a_source():
    import tomllib
    data = tomllib.loads(CLASSIC.read_text())
    for name, entry in data["types"].items():
        assert entry["source"].strip(), name
    for name, entry in data["beta"].items():
        assert entry["source"].strip(), name


def test_unknown_name_lists_valid_sets():
    with pytest.raises(ParameterError, match="valid sets: .*classic"):
        params.load("no-such-set")


def test_result_carries_name_and_hash():
    res = ppp.compute("C=CC=C")
    assert res.parameters == "classic"
    assert res.parameters_sha256 == params.load("classic").sha256
    assert res.to_dict()["model"]["parameters"]["sha256"] == res.parameters_sha256


_write_variant = classic_variant


@pytest.mark.parametrize("old, new, match", [
    ('u_ev = 11.13', 'u_ev = -1.0', "u_ev must be positive"),
    ('u_ev = 11.13', 'u_ev = "big"', "finite number"),
    ('"C-C" = { value_ev = -2.39', '"C-C" = { value_ev = 2.39', "beta must be negative"),
    ('formula = "mataga-nishimoto"', 'formula = "coulomb"', "unknown gamma formula"),
    ('[types.C]\nz = 1', '[types.C]\nz = 2', "core charge"),
    ('name = "classic"', 'nom = "classic"', "missing 'name'"),
    ('"C-C" =', '"C-X" =', "two defined types"),
    ('bond_length_angstrom = 1.40', 'bond_length_angstrom = 14.0', "outside"),
    ('cyanine = 0.145', 'cyanine = -0.164', r"\[uncertainty.rpa.mae_ev\] cyanine must not be negative"),
    ('cyanine = 0.256', 'cyanine = "large"', "finite number"),
])
def test_bad_parameter_files_are_refused(tmp_path, old, new, match):
    p = _write_variant(tmp_path, old, new)
    with pytest.raises(ParameterError, match=match):
        params.load(str(p))


def test_not_toml_is_refused(tmp_path):
    p = tmp_path / "broken.toml"
    p.write_text("name = [unclosed\n")
    with pytest.raises(ParameterError, match="not valid TOML"):
        params.load(str(p))


def test_missing_beta_pair_names_the_atoms(tmp_path):
    lines = [ln for ln in CLASSIC.read_text().splitlines() if not ln.startswith('"C-N.aza" =')]
    p = tmp_path / "nobeta.toml"
    p.write_text("\n".join(lines) + "\n")
    with pytest.raises(ParameterError, match=r"no beta for a C-N.aza bond between atom \d+ \(C\) and atom \d+ \(N\)"):
        ppp.compute("c1ccncc1", parameters=str(p))


def test_set_loaded_from_path_changes_results(tmp_path):
    p = _write_variant(tmp_path, '"C-C" = { value_ev = -2.39', '"C-C" = { value_ev = -2.60', "stronger.toml")
    base = ppp.compute("C=CC=C").s1.energy_ev
    changed = ppp.compute("C=CC=C", parameters=str(p))
    assert changed.parameters_sha256 != params.load("classic").sha256
    assert changed.s1.energy_ev > base  # larger |beta| widens the gap (Hueckel: gap ~ 1.24 |beta|)


def test_ohno_gamma_selectable_and_different():
    mn = ppp.compute("c1ccccc1")
    oh = ppp.compute("c1ccccc1", gamma="ohno")
    assert oh.chromophores[0].model.gamma_formula == "ohno"
    assert not np.isclose(mn.s1.energy_ev, oh.s1.energy_ev)
