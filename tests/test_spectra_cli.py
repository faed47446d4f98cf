"""``ppp spectrum`` and ``ppp compare`` end to end: files written, numbers consistent, errors one line.

Checks against laws: the curve CSV integrates back to the sum of the f it reports (f-eps relation,
Mulliken 1939); a spectrum from a record file equals one computed afresh; the compare command fed a
synthetic measurement made from the molecule's own sticks with a known shift recovers it.
"""
import json

import numpy as np
import pytest

from ppp.cli import main
from ppp.spectra.lineshapes import LineShape, epsilon
from ppp.spectra.measured import read_csv, read_jcamp
from ppp.units import EV_CM1, F_PER_INTEGRATED_EPSILON, HC_EV_NM

DYE = "CN(C)c1ccc(cc1)/N=N/c1ccccc1"


def _png_ok(path):
    data = path.read_bytes()
    return data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000


def test_spectrum_writes_csv_plot_and_pictures(tmp_path, capsys):
    out = tmp_path / "dye"
    assert main(["spectrum", DYE, "--out", str(out), "--pictures", "--json", "--range", "150", "2000",
                 "--triplets", "0"]) == 0
    doc = json.loads(capsys.readouterr().out)
    for key in ("curve", "sticks", "plot_svg"):
        assert (tmp_path / doc["files"][key].split("/")[-1]).exists()
    for name in ("dye-spectrum.png", "dye-homo.png", "dye-lumo.png", "dye-levels.png", "dye-S1-transition.png",
                 "dye-S1-charge.png"):
        assert _png_ok(tmp_path / name), name
    assert (tmp_path / "dye-spectrum.svg").read_text().lstrip().startswith("<?xml")
    # the curve file reads back as a spectrum and holds the f of the bands inside the window
    curve = read_csv(tmp_path / "dye-curve.csv")
    assert curve.quantity == "epsilon"
    # the JCAMP-DX copy, read by the jcamp package (PyPI), holds the same curve, in nm ascending
    jdx = read_jcamp(tmp_path / "dye-curve.jdx")
    assert jdx.quantity == "epsilon" and jdx.axis_unit == "nm"
    assert np.array_equal(jdx.energy_ev, curve.energy_ev) and np.array_equal(jdx.values, curve.values)
    assert "not a measurement" in (tmp_path / "dye-curve.jdx").read_text()
    f_sum = F_PER_INTEGRATED_EPSILON * np.trapezoid(curve.values, curve.wavenumber_cm1)
    f_sticks = sum(s["f"] for s in doc["sticks"])
    assert f_sum == pytest.approx(f_sticks, rel=5e-3)
    # band near 404 nm absorbs violet: the complementary colour seen is yellow to yellow-green (common
    # practice colour wheel); CIELAB hue of yellow ~ 90-100 deg, yellow-green ~ 100-125 deg
    assert 80.0 <= doc["colour"]["hue_deg"] <= 125.0


def test_spectrum_refuses_to_overwrite(tmp_path, capsys):
    out = str(tmp_path / "x")
    assert main(["spectrum", "C=CC=CC=C", "--out", out]) == 0
    assert main(["spectrum", "C=CC=CC=C", "--out", out]) == 1
    err = capsys.readouterr().err.strip()
    assert "--overwrite" in err and len(err.splitlines()) == 1
    assert main(["spectrum", "C=CC=CC=C", "--out", out, "--overwrite", "--shape", "voigt", "--fwhm", "2000cm-1",
                 "--axis", "wavenumber"]) == 0


def test_spectrum_from_record_equals_fresh_computation(tmp_path, capsys):
    rec = tmp_path / "r.h5"
    assert main(["run", DYE, "C=CC=CC=C", "--save", str(rec)]) == 0
    capsys.readouterr()
    assert main(["spectrum", "--record", str(rec), "--molecule", "1", "--out", str(tmp_path / "a"),
                 "--pictures"]) == 0
    assert main(["spectrum", DYE, "--out", str(tmp_path / "b")]) == 0
    a = np.loadtxt(tmp_path / "a-curve.csv", delimiter=",", comments="#", skiprows=4)
    b = np.loadtxt(tmp_path / "b-curve.csv", delimiter=",", comments="#", skiprows=4)
    assert a == pytest.approx(b, rel=1e-9)
    # a record of two molecules needs a choice
    assert main(["spectrum", "--record", str(rec), "--out", str(tmp_path / "c")]) == 1
    assert "--molecule" in capsys.readouterr().err


def test_spectrum_from_batch_results_equals_fresh_computation(tmp_path, capsys):
    # law of the store: the states a batch keeps give the same spectrum as computing the molecule again
    inp = tmp_path / "lib.smi"
    inp.write_text(f"C=CC=CC=C hexatriene\nC1CC( broken\n{DYE} dye-7 azo\n")
    res = tmp_path / "lib.h5"
    assert main(["batch", str(inp), "-o", str(res), "--jobs", "1", "--no-progress"]) == 0
    capsys.readouterr()
    assert main(["spectrum", DYE, "--out", str(tmp_path / "fresh")]) == 0
    for k, pick in enumerate(("dye-7 azo", "dye-7", "3")):  # by ID, its first word, record number
        assert main(["spectrum", "--record", str(res), "--molecule", pick, "--out", str(tmp_path / f"b{k}")]) == 0
        a = np.loadtxt(tmp_path / f"b{k}-curve.csv", delimiter=",", comments="#", skiprows=4)
        b = np.loadtxt(tmp_path / "fresh-curve.csv", delimiter=",", comments="#", skiprows=4)
        assert a == pytest.approx(b, rel=1e-9)
    capsys.readouterr()
    # a failed molecule says why, a missing one names what there is, several need a choice
    for args, words in ((["--molecule", "broken"], ("broken", "failure", "parse")),
                        (["--molecule", "nothing"], ("no molecule 'nothing'", "hexatriene")),
                        ([], ("holds 3 molecules", "--molecule"))):
        assert main(["spectrum", "--record", str(res), *args, "--out", str(tmp_path / "x")]) == 1
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and all(w in err for w in words), err


def test_overlay_of_several_molecules_equals_their_single_spectra(tmp_path, capsys):
    # law of the overlay: each column of the combined table is that molecule's own spectrum, and each
    # colour that of its own run
    mols = [DYE, "C=CC=CC=C"]
    assert main(["spectrum", *mols, "--out", str(tmp_path / "ov"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    table = np.loadtxt(tmp_path / "ov-curves.csv", delimiter=",", comments="#", skiprows=4)
    for k, smi in enumerate(mols):
        assert main(["spectrum", smi, "--out", str(tmp_path / f"one{k}"), "--json"]) == 0
        one = json.loads(capsys.readouterr().out)
        single = np.loadtxt(tmp_path / f"one{k}-curve.csv", delimiter=",", comments="#", skiprows=4)
        assert table[:, :3] == pytest.approx(single[:, :3], rel=1e-9)
        assert table[:, 3 + k] == pytest.approx(single[:, 3], rel=1e-5, abs=1e-9)  # both printed to 6 digits
        assert doc["molecules"][k]["colour"]["hex"] == one["colour"]["hex"]
    assert _png_ok(tmp_path / "ov-overlay.png")
    # pictures are drawn for one molecule at a time; a record needs one --molecule per curve
    assert main(["spectrum", *mols, "--out", str(tmp_path / "p"), "--pictures"]) == 1
    assert "one molecule at a time" in capsys.readouterr().err
    assert main(["spectrum", DYE, "--molecule", "2", "--out", str(tmp_path / "q")]) == 1
    assert "--record" in capsys.readouterr().err


def test_compare_recovers_a_known_shift(tmp_path, capsys):
    # synthetic "measured" spectrum from the molecule's own computed bands, shifted by -0.15 eV, scaled,
    # width 0.38 eV: the fit must return these (law of the fit, not a measurement)
    assert main(["spectrum", DYE, "--out", str(tmp_path / "s"), "--json"]) == 0
    sticks = json.loads(capsys.readouterr().out)["sticks"]
    from ppp.spectra.lineshapes import Sticks
    st = Sticks([s["energy_ev"] for s in sticks], [s["f"] for s in sticks])
    wl = np.arange(260.0, 620.0, 0.5)
    a = 6e-6 * epsilon(HC_EV_NM / wl, st.shifted(-0.15), LineShape("gaussian", 0.38))
    meas = tmp_path / "m.csv"
    meas.write_text("wavelength (nm),absorbance\n" + "\n".join(f"{x},{y:.8g}" for x, y in zip(wl, a)) + "\n")
    assert main(["compare", DYE, "-m", str(meas), "--out", str(tmp_path / "c"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    fit = doc["fit"]
    assert fit["shift_ev"] == pytest.approx(-0.15, rel=0.01)
    assert fit["scale"] == pytest.approx(6e-6, rel=0.01)
    assert fit["fwhm_ev"] == pytest.approx(0.38, rel=0.01)
    assert fit["shift_cm1"] == pytest.approx(-0.15 * EV_CM1, rel=0.01)
    assert fit["similarity_after"]["pearson"] > 0.999
    assert doc["colour_measured"]["hex"].startswith("#")
    assert _png_ok(tmp_path / "c-compare.png")
    # the text report names the fitted values
    assert main(["compare", DYE, "-m", str(meas), "--out", str(tmp_path / "d"), "--fix-width", "--fwhm", "0.38"]) == 0
    text = capsys.readouterr().out
    assert "energy shift" in text and "-0.150" in text and "(fixed)" in text


def test_compare_with_shipped_demo_file(tmp_path, capsys):
    import ppp
    from pathlib import Path
    demo = Path(ppp.__file__).parent / "data" / "demo_azo_dye_absorbance.jdx"
    assert main(["compare", DYE, "-m", str(demo), "--out", str(tmp_path / "demo"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["fit"]["converged"]
    assert doc["fit"]["similarity_after"]["pearson"] > doc["fit"]["similarity_before"]["pearson"]


@pytest.mark.parametrize("content,words", [
    ("wavelength (furlongs),absorbance\n1,2\n2,3\n3,4\n4,5\n5,6\n", "unknown unit"),
    ("wavelength (nm),absorbance\n", "no data"),
    ("wavelength (nm),absorbance\n400,1\n300,2\n350,3\n320,1\n310,1\n", "monotonic"),
])
def test_compare_bad_measured_file_is_one_line(tmp_path, capsys, content, words):
    p = tmp_path / "bad.csv"
    p.write_text(content)
    assert main(["compare", "C=CC=CC=C", "-m", str(p), "--out", str(tmp_path / "o")]) == 1
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and err.startswith("error: ") and words in err


def test_bad_options_are_one_line_errors(tmp_path, capsys):
    for argv in (["spectrum", "--out", str(tmp_path / "n")],
                 ["spectrum", "C=C", "--out", str(tmp_path / "n"), "--fwhm", "wide"],
                 ["spectrum", "C=CC=C", "--out", str(tmp_path / "n"), "--vibronic", "--huang-rhys", "-2"],
                 ["spectrum", "--record", str(tmp_path / "none.h5"), "--out", str(tmp_path / "n")],
                 ["spectrum", "C=CC=C", "--out", str(tmp_path / "missing" / "n")]):
        assert main(argv) == 1, argv
        err = capsys.readouterr().err.strip()
        assert len(err.splitlines()) == 1 and err.startswith("error: "), err


def test_spectrum_and_compare_show_the_computation_warnings(tmp_path, capsys):
    """A spectrum inherits its computation's warnings, fresh or from a saved record: [6]helicene cannot be
    drawn flat without overlapping rings, and the spectrum must say so as `ppp run` does (before
    2026-12-02 `spectrum` and `compare` dropped every warning)."""
    helicene = "c1ccc2c(c1)ccc1ccc3ccc4ccc5ccccc5c4c3c12"
    assert main(["spectrum", helicene, "--out", str(tmp_path / "a")]) == 0
    assert "warning: the 2D layout of the pi-system is distorted" in capsys.readouterr().out
    rec = tmp_path / "r.h5"
    assert main(["run", helicene, "--save", str(rec)]) == 0
    capsys.readouterr()
    assert main(["spectrum", "--record", str(rec), "--out", str(tmp_path / "b"), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert len(doc["warnings"]) == 1 and "2D layout" in doc["warnings"][0]
    assert main(["spectrum", DYE, "--out", str(tmp_path / "c"), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["warnings"] == []
    sticks_doc = doc["sticks"]
    wl = np.arange(250.0, 500.0, 1.0)
    from ppp.spectra.lineshapes import Sticks
    st = Sticks([s["energy_ev"] for s in sticks_doc], [s["f"] for s in sticks_doc])
    meas = tmp_path / "m.csv"
    a = 1e-5 * epsilon(HC_EV_NM / wl, st, LineShape("gaussian", 0.3))
    meas.write_text("wavelength (nm),absorbance\n" + "\n".join(f"{x},{y:.8g}" for x, y in zip(wl, a)) + "\n")
    assert main(["compare", helicene, "-m", str(meas), "--out", str(tmp_path / "d")]) == 0
    assert "warning: the 2D layout of the pi-system is distorted" in capsys.readouterr().out
