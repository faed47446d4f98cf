"""Accuracy against experiment, per chemical class (the figures of benchmarks/accuracy.py).

Targets (issue "accuracy against experiment"): mean absolute error <= 0.20 eV over the whole reference set,
<= 0.12 eV for hydrocarbons and for cyanines, no class worse than 0.35 eV. Where a target is not met the
test asserts the bound actually achieved today (so that a regression fails), and the target stays written
beside it; docs/accuracy.md reports which targets are missed.

Reference: tests/data/reference_absorption.csv (measured band maxima, from memory, see its header).
"""
from __future__ import annotations

import tomllib
from pathlib import Path

import pytest

from ppp.calibration import evaluate as ev
from ppp.calibration import reference
from ppp.driver import Options
from ppp.model import params

REF = Path(__file__).parent / "data" / "reference_absorption.csv"

TARGET_EV = {"all": 0.20, "hydrocarbon": 0.12, "cyanine": 0.12, "any class": 0.35}

#: Achieved today by the registry default (classic: textbook values, bond-order-dependent beta and the
#: alkyl inductive shift on as set in parameters/classic.toml, planar geometry); recomputed below. Measured
#: 2026-12-02 by benchmarks/accuracy.py: all 0.227, hydrocarbon 0.172, cyanine 0.256, worst class 0.339
#: (coumarin) eV. Every entry above its target is a missed target (see docs/accuracy.md); "any class" is met.
CLASSIC_BOUND_EV = {"all": 0.23, "hydrocarbon": 0.18, "cyanine": 0.26, "any class": 0.345}
#: Achieved by classic with bond-order beta switched off (fixed beta per bond type, the textbook model;
#: measured: all 0.272, hydrocarbon 0.314, cyanine 0.260, worst class 0.508 (polyene) eV).
CLASSIC_FIXED_BOUND_EV = {"all": 0.28, "hydrocarbon": 0.32, "cyanine": 0.27, "any class": 0.52}


#: Achieved by the default set with each entry computed in the solvent of its measurement (generalized-Born
#: reaction field, ppp.model.solvent; opt-in, not the default). Measured 2026-12-02 by
#: benchmarks/accuracy.py --solvents both: all 0.231, hydrocarbon 0.185, cyanine 0.251, worst class 0.420
#: (azo) eV. The targets are missed with the solvent model too (docs/accuracy.md).
CLASSIC_SOLVENT_BOUND_EV = {"all": 0.235, "hydrocarbon": 0.19, "cyanine": 0.26, "any class": 0.43}


#: Achieved by the default set with singlets from the random-phase approximation (Options(response="rpa");
#: opt-in). Measured 2026-12-02 by benchmarks/accuracy.py: all 0.190, hydrocarbon 0.166, cyanine 0.145,
#: worst class 0.286 (carbonyl) eV: the "whole set" and "no class worse than 0.35 eV" targets are met this
#: way, the hydrocarbon and cyanine ones are missed by less than with CIS.
CLASSIC_RPA_BOUND_EV = {"all": 0.20, "hydrocarbon": 0.17, "cyanine": 0.15, "any class": 0.29}


@pytest.fixture(scope="module")
def ref():
    return reference.load(REF)


def _errors(ref, set_name, reference_solvents=False, **opts):
    options = Options(parameters=set_name, n_triplets=0, **opts)
    pset = params.load(set_name)
    prepared = ev.prepare_set(ref.entries, options, pset.bond_length_angstrom)
    return ev.evaluate(prepared, pset, options, reference_solvents=reference_solvents).by_class()


def _check(by, bound):
    worst = max(v.mae_ev for k, v in by.items() if k not in ("all", "hydrocarbon"))
    assert by["all"].n_failed == 0
    assert by["all"].mae_ev <= bound["all"]
    assert by["hydrocarbon"].mae_ev <= bound["hydrocarbon"]
    assert by["cyanine"].mae_ev <= bound["cyanine"]
    assert worst <= bound["any class"]
    return worst


@pytest.fixture(scope="module")
def classic_errors(ref):
    return _errors(ref, "classic")


def test_classic_set_per_class_error(classic_errors):
    # classic is the registry default (bond-order beta on): these are the "default settings" figures
    _check(classic_errors, CLASSIC_BOUND_EV)


def test_reference_solvents_per_class_error(ref, classic_errors):
    # every entry in its own measurement solvent (the CSV's solvent column)
    solv = _errors(ref, "classic", reference_solvents=True)
    _check(solv, CLASSIC_SOLVENT_BOUND_EV)
    # the reaction field acts on pi charges: it moves the push-pull class (charge-transfer bands) to the
    # red, and leaves the benzenoid hydrocarbons (no pi charges) where they are
    assert solv["push-pull"].mean_signed_ev < classic_errors["push-pull"].mean_signed_ev - 0.3
    assert solv["benzenoid"].mean_signed_ev == pytest.approx(classic_errors["benzenoid"].mean_signed_ev, abs=0.01)


def test_classic_uncertainty_table_is_its_measured_error(classic_errors):
    # the figures shown as "±" for the default set must be the errors measured here (to 0.005 eV)
    table = params.load("classic").uncertainty
    for cls, val in table.items():
        assert classic_errors[cls].mae_ev == pytest.approx(val, abs=0.005), cls


def test_rpa_singlets_per_class_error_and_uncertainty_table(ref, classic_errors):
    rpa = _errors(ref, "classic", response="rpa")
    worst = _check(rpa, CLASSIC_RPA_BOUND_EV)
    assert worst <= TARGET_EV["any class"]  # this target is met with RPA singlets
    # RPA lowers the bright bands that CIS puts too high (cyanines, benzenoids, mean signed error)
    assert rpa["cyanine"].mae_ev < classic_errors["cyanine"].mae_ev - 0.05
    assert rpa["all"].mean_signed_ev < classic_errors["all"].mean_signed_ev - 0.05
    # the "±" figures shown beside RPA bands are the errors measured here (to 0.005 eV)
    for cls, val in params.load("classic").uncertainty_rpa.items():
        assert rpa[cls].mae_ev == pytest.approx(val, abs=0.005), cls


def test_bond_order_beta_lowers_the_error(ref, classic_errors):
    # the reason bond-order beta is on by default (issue: "on by default if it helps the measured error")
    fixed = _errors(ref, "classic", bond_order_beta=False)
    _check(fixed, CLASSIC_FIXED_BOUND_EV)
    assert classic_errors["all"].mae_ev < fixed["all"].mae_ev
    assert classic_errors["polyene"].mae_ev < 0.5 * fixed["polyene"].mae_ev  # bond alternation of polyenes


def test_dye_set_training_error_matches_its_provenance_and_cv_meets_overall_target(ref):
    # dye was fitted with ppp fit to this reference set: its errors here are training errors and must be
    # those recorded in its provenance; its accuracy is the cross-validated error recorded beside them
    dye = params.load("dye")
    prov = tomllib.loads(dye.text)["provenance"]
    assert prov["reference_sha256"] == ref.sha256, "reference set changed: refit the dye set"
    by = _errors(ref, "dye")
    for cls, val in prov["training_mae_ev"].items():
        assert by[cls].mae_ev == pytest.approx(val, abs=0.005), cls
    cv = prov["cross_validated_mae_ev"]
    assert cv["all"] <= TARGET_EV["all"]
    assert max(v for k, v in cv.items() if k not in ("all", "hydrocarbon")) <= TARGET_EV["any class"]
    assert dye.uncertainty["all"] == pytest.approx(cv["all"], abs=1e-4)


def test_alkyl_shift_lowers_the_error(ref, classic_errors, tmp_path):
    # the [alkyl_shift] table of classic (derived from ionisation energies, not fitted to spectra) is on
    # by default because it lowers the measured error; without it (measured 2026-12-02): all 0.251,
    # coumarin 0.432, push-pull 0.335, xanthene 0.228, azo 0.239 eV
    text = Path(params.load("classic").path).read_text()
    plain = tmp_path / "classic_without_alkyl_shift.toml"
    plain.write_text(text[:text.index("[alkyl_shift]")] + text[text.index("[bond_order_beta]"):])
    off = _errors(ref, str(plain))
    assert classic_errors["all"].mae_ev < off["all"].mae_ev - 0.015
    for cls in ("coumarin", "push-pull", "xanthene", "azo"):  # the classes with N-alkyl donors
        assert classic_errors[cls].mae_ev < off[cls].mae_ev, cls
    # hydrocarbons have no amino nitrogen: unchanged
    assert classic_errors["hydrocarbon"].mae_ev == pytest.approx(off["hydrocarbon"].mae_ev, abs=1e-9)


def test_accuracy_benchmark_takes_a_labs_own_reference(tmp_path, capsys):
    # the benchmark on a reference of other classes and fewer columns (SMILES and maxima only, values from
    # memory as in the shipped set) prints its table for the classes the file has, not a traceback
    import sys
    sys.path.insert(0, str(Path(__file__).resolve().parent.parent))
    from benchmarks import accuracy
    lab = tmp_path / "lab.csv"
    lab.write_text("smiles,lambda_nm\nC=CC=CC=C,258\nc1ccc(cc1)/C=C/c1ccccc1,295\n"
                   "CN(C)c1ccc(cc1)/N=N/c1ccccc1,408\nCC1=CC(=O)c2ccccc2C1=O,330\n")
    assert accuracy.main(["--reference", str(lab), "--quick", "--solvents", "gas", "--responses", "cis",
                          "--sets", "classic"]) == 0
    out = capsys.readouterr().out
    header = next(ln for ln in out.splitlines() if ln.startswith("| configuration"))
    assert [c.strip() for c in header.split("|")[2:-1]] == ["polyene", "hydrocarbon", "azo", "carbonyl", "all"]
    assert "| n rows" in out
