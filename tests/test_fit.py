"""``ppp fit``: recovery of known parameters from synthetic data, cross-validation folds, the written
parameter file and its provenance, and refusal to overwrite."""
from __future__ import annotations

import tomllib

import numpy as np
import pytest

from ppp.calibration import evaluate as ev
from ppp.calibration import fit as F
from ppp.calibration.reference import Entry
from ppp.driver import Options
from ppp.errors import InputError
from ppp.model import params
from ppp.units import ev_to_nm

# small molecules that contain the fitted types (N.amino ip, C-N.amino beta)
SYNTH = [("trimethine", "CN(C)C=CC=[N+](C)C", "cyanine"), ("pentamethine", "CN(C)C=CC=CC=[N+](C)C", "cyanine"),
         ("aniline", "Nc1ccccc1", "push-pull"), ("4-aminobenzonitrile", "Nc1ccc(cc1)C#N", "push-pull"),
         ("4-aminostyrene", "Nc1ccc(cc1)C=C", "push-pull"), ("enamine", "CN(C)C=CC=C", "push-pull"),
         ("4-nitroaniline", "Nc1ccc(cc1)[N+](=O)[O-]", "push-pull")]


def _entries(energies):
    return [Entry(n, s, c, "synthetic", "first allowed", "allowed", float(ev_to_nm(e)), 1.0, "synthetic")
            for (n, s, c), e in zip(SYNTH, energies)]


def test_fit_recovers_known_parameters_from_synthetic_data():
    classic = params.load("classic")
    opts = Options(n_triplets=0)
    fitted = [F.parse_parameter("ip:N.amino", classic), F.parse_parameter("beta:C-N.amino", classic)]
    truth = np.array([23.9, -2.65])
    true_set = F.apply(classic, fitted, truth)
    prep0 = ev.prepare_set([Entry(n, s, c, "", "", "allowed", 300.0, 1.0, "") for n, s, c in SYNTH], opts)
    synthetic = [ev.predict(pe, true_set, opts) for pe in prep0]
    assert all(e is not None for e in synthetic)
    prepared = ev.prepare_set(_entries(synthetic), opts)
    res = F.fit(prepared, classic, fitted, opts, prior_scale=0.0, max_nfev=40)
    assert np.allclose(res.x0, [classic.types["N.amino"].ip_ev, classic.beta[("C", "N.amino")]])
    assert np.allclose(res.x, truth, atol=0.02), res.x
    assert np.nanmax(np.abs(res.residuals_ev)) < 2e-3


def test_prior_pulls_towards_start_values():
    classic = params.load("classic")
    opts = Options(n_triplets=0)
    p = [F.parse_parameter("ip:N.amino", classic)]
    prepared = ev.prepare_set(_entries([4.0, 3.0]), opts)[:2]
    free = F.fit(prepared, classic, p, opts, prior_scale=0.0, max_nfev=20)
    tight = F.fit(prepared, classic, p, opts, prior_scale=0.01, max_nfev=20)
    assert abs(tight.x[0] - tight.x0[0]) < abs(free.x[0] - free.x0[0])


def test_folds_are_stratified_by_class_and_reproducible():
    ents = [Entry(f"m{k}", "C=C", cls, "", "", "allowed", 200.0, 1.0, "")
            for k, cls in enumerate(["a"] * 10 + ["b"] * 5)]
    prepared = [ev.PreparedEntry(e, ()) for e in ents]
    f1 = F.folds(prepared, 5, np.random.default_rng(1))
    f2 = F.folds(prepared, 5, np.random.default_rng(1))
    assert np.array_equal(f1, f2)
    for k in range(5):
        assert np.sum((f1 == k)[:10]) == 2 and np.sum((f1 == k)[10:]) == 1


def test_parameter_names_are_checked():
    classic = params.load("classic")
    assert F.parse_parameter("beta:N.amino-C", classic).key == "C-N.amino"
    for bad in ("beta:C-Xe", "ip:Zz", "gamma:C", "ipC"):
        with pytest.raises(InputError):
            F.parse_parameter(bad, classic)


def _polyene_csv(tmp_path):
    """A four-row measured-band file (polyene 1Bu maxima in hexane, from memory)."""
    csv = tmp_path / "ref.csv"
    rows = ["name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source",
            "butadiene,C=CC=C,polyene,hexane,1Bu,allowed,217,3,from memory",
            "hexatriene,C=C/C=C/C=C,polyene,hexane,1Bu,allowed,258,6,from memory",
            "octatetraene,C=C/C=C/C=C/C=C,polyene,hexane,1Bu,allowed,290,10,from memory",
            "decapentaene,C=C/C=C/C=C/C=C/C=C,polyene,hexane,1Bu,allowed,334,10,from memory"]
    csv.write_text("\n".join(rows) + "\n")
    return csv


def test_cli_writes_set_with_provenance_and_refuses_overwrite(tmp_path, cli):
    csv = _polyene_csv(tmp_path)
    out = tmp_path / "mine.toml"
    code, text, err = cli("fit", csv, "--fit", "beta:C-C", "--folds", "2", "--max-evaluations", "6",
                          "--bond-order-beta", "on", "-o", out)
    assert code == 0, err
    assert "cross-val" in text and "training" in text
    data = tomllib.loads(out.read_text())
    prov = data["provenance"]
    assert prov["reference_sha256"] == F.file_sha256(str(csv))
    assert prov["fitted"] == ["beta:C-C"] and len(prov["training_residuals_ev"]) == 4
    assert "all" in prov["cross_validated_mae_ev"] and "all" in data["uncertainty"]["mae_ev"]
    assert data["bond_order_beta"]["enabled"] is True
    assert "fitted by ppp fit" in data["beta"]["C-C"]["source"]
    loaded = params.load(str(out))
    assert loaded.name == "mine" and loaded.bond_order_beta_enabled
    before = out.read_bytes()
    code, _, err = cli("fit", csv, "--fit", "beta:C-C", "-o", out)
    assert code == 1 and "--overwrite" in err and err.count("\n") == 1
    assert out.read_bytes() == before


def test_a_lab_table_of_smiles_and_maxima_is_enough(tmp_path, cli):
    # a lab's own table as it stands: SMILES and measured maxima only (values from memory, cf. the
    # reference set: hexatriene 258, octatetraene 290, stilbene 295, diphenylbutadiene 330 nm); the
    # classes come from the same structure rules as the "±" of an output
    from ppp.calibration import reference
    from ppp.calibration.classes import classify_smiles
    rows = [("C=CC=CC=C", 258), ("C=CC=CC=CC=C", 290), ("c1ccc(cc1)/C=C/c1ccccc1", 295),
            ("c1ccc(cc1)/C=C/C=C/c1ccccc1", 330)]
    lab = tmp_path / "lab.csv"
    lab.write_text("smiles,lambda_max_nm\n" + "".join(f"{s},{v}\n" for s, v in rows))
    ref = reference.load(lab)
    assert [(e.name, e.smiles, e.cls, e.match, e.lambda_nm) for e in ref.entries] == [
        (f"row {k}", s, classify_smiles(s), "allowed", float(v)) for k, (s, v) in enumerate(rows, start=1)]
    assert all(np.isnan(e.uncertainty_nm) and e.solvent == "" for e in ref.entries)
    out = tmp_path / "lab.toml"
    code, text, err = cli("fit", lab, "--fit", "beta:C-C", "--folds", "2", "--max-evaluations", "6", "-o", out)
    assert code == 0, err
    assert "polyene" in tomllib.loads(out.read_text())["uncertainty"]["mae_ev"]
    # rows that name no solvent are computed in the gas phase when each row's own solvent is asked for
    code, _, err = cli("fit", lab, "--fit", "beta:C-C", "--folds", "2", "--max-evaluations", "2",
                       "--solvents", "reference", "-o", tmp_path / "lab2.toml")
    assert code == 0, err
    # without a SMILES or a maximum there is nothing to fit: one line naming what is missing
    bad = tmp_path / "bad.csv"
    bad.write_text("name,smiles\nx,C=C\n")
    code, _, err = cli("fit", bad, "-o", tmp_path / "y.toml")
    assert code == 1 and "lambda_nm or lambda_max_nm" in err and err.count("\n") == 1


def test_cli_rejects_unknown_class(tmp_path, cli):
    csv = tmp_path / "ref.csv"
    csv.write_text("name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source\n"
                   "butadiene,C=CC=C,polyene,hexane,1Bu,allowed,217,3,from memory\n")
    code, _, err = cli("fit", csv, "--classes", "azo", "-o", tmp_path / "x.toml")
    assert code == 1 and "not in" in err


def test_fit_with_reference_solvents_recovers_known_parameters():
    # synthetic "measurements" computed with the solvent reaction field in each row's solvent: a fit in
    # the same mode recovers the parameters that generated them; a gas-phase fit of the same data does not
    classic = params.load("classic")
    opts = Options(n_triplets=0)
    fitted = [F.parse_parameter("ip:N.amino", classic), F.parse_parameter("beta:C-N.amino", classic)]
    truth = np.array([23.9, -2.65])
    true_set = F.apply(classic, fitted, truth)
    rows = [Entry(n, s, c, "ethanol", "", "allowed", 300.0, 1.0, "") for n, s, c in SYNTH[2:]]
    prep0 = ev.prepare_set(rows, opts)
    synthetic = [ev.predict(pe, true_set, opts, reference_solvents=True) for pe in prep0]
    assert all(e is not None for e in synthetic)
    ents = [Entry(e.name, e.smiles, e.cls, "ethanol", "", "allowed", float(ev_to_nm(x)), 1.0, "")
            for e, x in zip(rows, synthetic)]
    prepared = ev.prepare_set(ents, opts)
    res = F.fit(prepared, classic, fitted, opts, prior_scale=0.0, max_nfev=40, reference_solvents=True)
    assert np.allclose(res.x, truth, atol=0.03), res.x
    gas = F.fit(prepared, classic, fitted, opts, prior_scale=0.0, max_nfev=40)
    assert not np.allclose(gas.x, truth, atol=0.03)


def test_uncertainty_follows_how_the_set_was_measured(tmp_path):
    import ppp
    from ppp.calibration.uncertainty import for_result
    classic = params.load("classic")
    text = classic.text + '\n[provenance]\nsolvents = "reference"\n'
    path = tmp_path / "solvset.toml"
    path.write_text(text.replace('name = "classic"', 'name = "solvset"').replace("default = true", "default = false"))
    smi = "Nc1ccc(cc1)[N+](=O)[O-]"
    assert for_result(ppp.compute(smi, parameters=str(path), n_triplets=0, solvent="ethanol")) is not None
    assert for_result(ppp.compute(smi, parameters=str(path), n_triplets=0)) is None


def test_prior_strength_chosen_by_cross_validation_and_nested():
    # Noise-free synthetic data from parameters far from the start set: every weaker pull towards the
    # start predicts held-out molecules better, so cross-validation must pick the weakest of the grid;
    # the nested cross-validation lets each outer fold choose on its own training part.
    classic = params.load("classic")
    opts = Options(n_triplets=0)
    fitted = [F.parse_parameter("ip:N.amino", classic), F.parse_parameter("beta:C-N.amino", classic)]
    true_set = F.apply(classic, fitted, np.array([23.9, -2.65]))
    prep0 = ev.prepare_set([Entry(n, s, c, "", "", "allowed", 300.0, 1.0, "") for n, s, c in SYNTH], opts)
    prepared = ev.prepare_set(_entries([ev.predict(pe, true_set, opts) for pe in prep0]), opts)
    sel = F.select_prior_scale(prepared, classic, fitted, opts, k=3, max_nfev=20)
    assert sel.grid == F.PRIOR_GRID and len(sel.cv_error_ev) == len(F.PRIOR_GRID)
    assert sel.scale == max(F.PRIOR_GRID)
    assert list(sel.cv_error_ev) == sorted(sel.cv_error_ev, reverse=True)  # weaker pull, smaller error
    nested = F.cross_validate(prepared, classic, fitted, opts, k=3, max_nfev=20, prior_scale="auto")
    assert len(nested.prior_scales) == 3 and set(nested.prior_scales) <= set(F.PRIOR_GRID)
    fixed = F.cross_validate(prepared, classic, fitted, opts, k=3, max_nfev=20, prior_scale=0.25)
    assert fixed.prior_scales == (0.25, 0.25, 0.25)
    err = lambda cv: np.nanmean(np.abs(cv.energies - np.array([pe.entry.energy_ev for pe in prepared])))
    assert err(nested) < err(fixed)
    with pytest.raises(InputError, match="number or 'auto'"):
        F.cross_validate(prepared, classic, fitted, opts, k=3, prior_scale="best")


def test_cli_prior_scale_auto_records_its_choice(tmp_path, cli):
    csv = _polyene_csv(tmp_path)
    out = tmp_path / "auto.toml"
    code, text, err = cli("fit", csv, "--fit", "beta:C-C", "--folds", "2", "--max-evaluations", "6",
                          "--prior-scale", "auto", "-o", out)
    assert code == 0, err
    assert "prior scale by cross-validation" in text and "each fold chose its own scale" in text
    prior = tomllib.loads(out.read_text())["provenance"]["prior"]
    assert prior["scale"] in F.PRIOR_GRID and prior["grid"] == list(F.PRIOR_GRID)
    assert len(prior["grid_cv_error_ev"]) == len(F.PRIOR_GRID) and len(prior["nested_fold_scales"]) == 2
    import argparse
    from ppp.commands.fit import _prior_scale
    assert _prior_scale("AUTO") == "auto" and _prior_scale("0.5") == 0.5
    for bad, why in (("-1", "negative"), ("best", "neither a number nor 'auto'"), ("nan", "negative")):
        with pytest.raises(argparse.ArgumentTypeError, match=why):
            _prior_scale(bad)
