"""Measured spectra in: CSV with a unit-naming header, and JCAMP-DX through the ``jcamp`` package.

The JCAMP-DX files are written here by hand following the format's definition (McDonald & Wilks 1988,
Appl. Spectrosc. 42, 151: labelled-data records, ##XYDATA=(X++(Y..Y)) with XFACTOR/YFACTOR, and
##XYPOINTS=(XY..XY)), from a known curve, and must read back to the same numbers.
"""
import numpy as np
import pytest

from ppp.errors import InputError
from ppp.spectra.measured import MeasuredSpectrumError, read_csv, read_jcamp, read_measured, to_epsilon
from ppp.units import HC_EV_NM


def known_curve():
    wl = np.arange(300.0, 601.0, 1.0)
    a = 0.8 * np.exp(-0.5 * ((wl - 430.0) / 30.0) ** 2) + 0.05
    return wl, np.round(a, 5)  # on the 1e-5 grid of the YFACTOR used below


def write_affn(path, wl, a, xunits="NANOMETERS", yunits="ABSORBANCE", yfactor=1e-5, per_line=8, npoints=None):
    ints = np.rint(a / yfactor).astype(int)
    rec = ["##TITLE=known test curve", "##JCAMP-DX=4.24", "##DATA TYPE=UV/VIS SPECTRUM", f"##XUNITS={xunits}",
           f"##YUNITS={yunits}", "##XFACTOR=1.0", f"##YFACTOR={yfactor:g}", f"##FIRSTX={wl[0]:.1f}",
           f"##LASTX={wl[-1]:.1f}", f"##NPOINTS={npoints or len(wl)}", "##XYDATA=(X++(Y..Y))"]
    for k in range(0, len(wl), per_line):
        rec.append(f"{wl[k]:.0f} " + " ".join(str(v) for v in ints[k:k + per_line]))
    rec.append("##END=")
    path.write_text("\n".join(rec) + "\n")
    return path


def test_jcamp_affn_reads_back_the_known_curve(tmp_path):
    wl, a = known_curve()
    spec = read_jcamp(write_affn(tmp_path / "known.jdx", wl, a))
    assert spec.quantity == "absorbance"
    assert spec.wavelength_nm[::-1] == pytest.approx(wl, rel=1e-12)
    assert spec.values[::-1] == pytest.approx(a, rel=1e-12, abs=1e-12)
    assert spec.title == "known test curve"


def test_jcamp_xypoints_in_wavenumbers_reads_back(tmp_path):
    nu = np.arange(16000.0, 33001.0, 50.0)
    eps = np.round(25000.0 * np.exp(-0.5 * ((nu - 23500.0) / 1500.0) ** 2), 2)
    rec = ["##TITLE=pairs", "##JCAMP-DX=5.01", "##DATA TYPE=UV/VIS SPECTRUM", "##XUNITS=1/CM",
           "##YUNITS=MOLAR ABSORPTIVITY", f"##NPOINTS={len(nu)}", "##XYPOINTS=(XY..XY)"]
    rec += [f"{x:.1f}, {y:.2f}" for x, y in zip(nu, eps)]
    rec.append("##END=")
    path = tmp_path / "pairs.dx"
    path.write_text("\n".join(rec) + "\n")
    spec = read_measured(path)
    assert spec.quantity == "epsilon"
    assert spec.wavenumber_cm1 == pytest.approx(nu, rel=1e-12)
    assert spec.values == pytest.approx(eps, rel=1e-12)


def test_jcamp_transmittance_becomes_absorbance(tmp_path):
    wl, a = known_curve()
    t = np.round(10.0 ** (-a), 5)
    spec = read_jcamp(write_affn(tmp_path / "t.jdx", wl, t, yunits="TRANSMITTANCE"))
    assert spec.values[::-1] == pytest.approx(-np.log10(t), rel=1e-12)


def test_transmittance_in_percent_or_as_a_fraction_becomes_absorbance(tmp_path):
    # A = -log10 T (Beer-Lambert) whichever way an instrument writes T: %T / T (%) in percent, a bare
    # "transmittance" as a fraction; in CSV and in JCAMP-DX alike
    wl, a = known_curve()
    t = 10.0 ** (-a)
    for header, scale in (("wavelength (nm),%T", 100.0), ("nm;T (%)", 100.0),
                          ("wavelength (nm),transmittance", 1.0)):
        p = tmp_path / "t.csv"
        sep = ";" if ";" in header else ","
        p.write_text(header + "\n" + "".join(f"{float(u)!r}{sep}{float(v * scale)!r}\n" for u, v in zip(wl, t)))
        spec = read_csv(p)
        assert spec.quantity == "absorbance" and spec.values[::-1] == pytest.approx(a, rel=1e-10), header
    tp = np.round(100.0 * t, 3)
    spec = read_jcamp(write_affn(tmp_path / "p.jdx", wl, tp, yunits="%T", yfactor=1e-3))
    assert spec.values[::-1] == pytest.approx(-np.log10(tp / 100.0), rel=1e-12)
    # percent values under a fraction's name are refused with the way out
    p.write_text("wavelength (nm),transmittance\n" + "".join(f"{float(u)!r},{float(v * 100)!r}\n"
                                                             for u, v in zip(wl, t)))
    with pytest.raises(MeasuredSpectrumError, match="%T"):
        read_csv(p)


def test_shipped_demo_files_agree():
    import ppp
    from pathlib import Path
    data = Path(ppp.__file__).parent / "data"
    a = read_measured(data / "demo_azo_dye_absorbance.csv")
    b = read_measured(data / "demo_azo_dye_absorbance.jdx")
    assert "INVENTED" in a.title and "INVENTED" in b.title
    assert a.energy_ev == pytest.approx(b.energy_ev, rel=1e-12)
    assert a.values == pytest.approx(b.values, abs=1e-9)


@pytest.mark.parametrize("header,unit", [
    ("wavelength (nm),absorbance", "nm"), ("Wavelength [nm];Absorbance", "nm"), ("wavelength/nm\tA", "nm"),
    ("wavelength_nm absorbance", "nm"), ("wavenumber (cm-1),absorbance", "cm-1"),
    ("wavenumber (cm\u207b\u00b9),absorbance", "cm-1"), ("energy (eV),absorbance", "eV")])
def test_csv_axis_units(tmp_path, header, unit):
    wl, a = known_curve()
    x = {"nm": wl, "cm-1": 1e7 / wl, "eV": HC_EV_NM / wl}[unit]
    sep = next((s for s in (",", ";", "\t") if s in header), " ")
    p = tmp_path / "m.csv"
    p.write_text("# a comment\n" + header + "\n" + "\n".join(f"{float(u)!r}{sep}{float(v)!r}" for u, v in zip(x, a)) + "\n")
    spec = read_csv(p)
    assert spec.axis_unit == unit
    assert spec.wavelength_nm[::-1] == pytest.approx(wl, rel=1e-9)
    assert spec.values[::-1] == pytest.approx(a, rel=1e-12)


def test_csv_as_instruments_export_it(tmp_path):
    # a sample-name line above the header, columns named by their unit alone, a run report after a blank
    # line (layouts of common spectrometer exports; common practice): the same curve as the plain file
    wl, a = known_curve()
    rows = "".join(f"{float(u)!r},{float(v)!r},\n" for u, v in zip(wl, a))
    report = "\nMethod: scan 200-800 nm\nOperator,me\nCollection time: 10:00\n"
    for header in ("Wavelength (nm),Abs,", "nm,A,", "nm,Abs,"):
        p = tmp_path / "export.csv"
        p.write_text("dye 7 in ethanol,,\n" + header + "\n" + rows + report)
        spec = read_csv(p)
        assert spec.title == "dye 7 in ethanol" and spec.quantity == "absorbance", header
        assert spec.wavelength_nm[::-1] == pytest.approx(wl, rel=1e-12)
        assert spec.values[::-1] == pytest.approx(a, rel=1e-12)
    for header, unit in (("cm-1;Abs", "cm-1"), ("eV\tabsorbance", "eV")):
        x = 1e7 / wl if unit == "cm-1" else HC_EV_NM / wl
        sep = ";" if ";" in header else "\t"
        p.write_text(header + "\n" + "".join(f"{float(u)!r}{sep}{float(v)!r}\n" for u, v in zip(x, a)))
        assert read_csv(p).axis_unit == unit
    # two blocks of numbers are refused, not merged
    p.write_text("nm,A\n" + rows + "\n" + rows)
    with pytest.raises(MeasuredSpectrumError, match="second block"):
        read_csv(p)


def test_csv_epsilon_and_log_epsilon(tmp_path):
    wl = np.linspace(300, 500, 21)
    eps = 1e4 * np.exp(-0.5 * ((wl - 400) / 30) ** 2) + 10.0
    p1, p2 = tmp_path / "e.csv", tmp_path / "l.csv"
    p1.write_text("wavelength (nm),epsilon (M-1 cm-1)\n" + "\n".join(f"{x},{float(y)!r}" for x, y in zip(wl, eps)))
    p2.write_text("wavelength (nm),log epsilon\n" + "\n".join(f"{x},{float(np.log10(y))!r}" for x, y in zip(wl, eps)))
    e1, e2 = read_csv(p1), read_csv(p2)
    assert e1.quantity == e2.quantity == "epsilon"
    assert e2.values == pytest.approx(e1.values, rel=1e-12)


def test_absorbance_to_epsilon_is_beer_lambert(tmp_path):
    wl, a = known_curve()
    spec = read_jcamp(write_affn(tmp_path / "k.jdx", wl, a))
    eps = to_epsilon(spec, 2e-5, 1.0)
    assert eps.values == pytest.approx(spec.values / 2e-5)
    with pytest.raises(MeasuredSpectrumError):
        to_epsilon(spec, None, 1.0)


BAD_CSV = {
    "unknown axis unit": ("wavelength (mm),absorbance\n300,0.1\n301,0.2\n302,0.3\n303,0.2\n304,0.1\n", "unknown unit"),
    "unknown intensity": ("wavelength (nm),counts\n300,1\n301,2\n302,3\n303,2\n304,1\n", "intensity column"),
    "axis without unit": ("wavelength,absorbance\n300,1\n301,2\n302,3\n303,2\n304,1\n", "needs a unit"),
    "bad epsilon unit": ("wavelength (nm),epsilon (a.u.)\n300,1\n301,2\n302,3\n303,2\n304,1\n", "unknown unit"),
    "non-monotonic": ("wavelength (nm),absorbance\n300,0.1\n301,0.2\n303,0.3\n302,0.2\n304,0.1\n", "monotonic"),
    "repeated x": ("wavelength (nm),absorbance\n300,0.1\n301,0.2\n301,0.3\n302,0.2\n304,0.1\n", "monotonic"),
    "header only": ("wavelength (nm),absorbance\n", "no data"),
    "empty": ("# nothing here\n\n", "empty file"),
    "too few": ("wavelength (nm),absorbance\n300,0.1\n301,0.2\n", "only 2 data points"),
    "no header": ("300,0.1\n301,0.2\n302,0.3\n303,0.2\n304,0.1\n", "not a header"),
    "text in data": ("wavelength (nm),absorbance\n300,0.1\n301,oops\n302,0.3\n303,0.2\n304,0.1\n", "line 3"),
    "nan": ("wavelength (nm),absorbance\n300,0.1\n301,nan\n302,0.3\n303,0.2\n304,0.1\n", "non-finite"),
    "negative nm": ("wavelength (nm),absorbance\n-1,0.1\n0,0.1\n1,0.3\n2,0.2\n3,0.1\n", "positive"),
}


@pytest.mark.parametrize("case", sorted(BAD_CSV))
def test_bad_csv_gives_one_line_error(tmp_path, case):
    text, words = BAD_CSV[case]
    p = tmp_path / "bad.csv"
    p.write_text(text)
    with pytest.raises(MeasuredSpectrumError) as err:
        read_csv(p)
    msg = str(err.value)
    assert words in msg
    assert "\n" not in msg and "bad.csv" in msg
    assert isinstance(err.value, InputError)


def test_bad_jcamp_files_give_one_line_errors(tmp_path):
    wl, a = known_curve()
    cases = [
        (write_affn(tmp_path / "u.jdx", wl, a, xunits="FURLONGS"), "XUNITS"),
        (write_affn(tmp_path / "y.jdx", wl, a, yunits="COUNTS"), "YUNITS"),
        (write_affn(tmp_path / "n.jdx", wl, a, npoints=len(wl) + 7), "damaged"),
    ]
    nohead = tmp_path / "h.jdx"
    nohead.write_text("##TITLE=x\n##XYPOINTS=(XY..XY)\n1, 2\n2, 3\n##END=\n")
    cases.append((nohead, "XUNITS"))
    empty = tmp_path / "e.jdx"
    empty.write_text("##TITLE=x\n##XUNITS=NANOMETERS\n##YUNITS=ABSORBANCE\n##XYPOINTS=(XY..XY)\n##END=\n")
    cases.append((empty, "no data"))
    for path, words in cases:
        with pytest.raises(MeasuredSpectrumError) as err:
            read_jcamp(path)
        assert words in str(err.value), (path, str(err.value))
        assert "\n" not in str(err.value)
    with pytest.raises(MeasuredSpectrumError, match="does not exist"):
        read_measured(tmp_path / "missing.jdx")


@pytest.mark.parametrize("header,kind", [
    ("log10(epsilon)", "log"), ("log epsilon", "log"), ("molar absorptivity (L mol-1 cm-1)", "lin"),
    ("epsilon [M^-1 cm^-1]", "lin"), ("\u03b5 (M\u207b\u00b9 cm\u207b\u00b9)", "lin")])
def test_csv_intensity_header_variants(tmp_path, header, kind):
    wl = np.linspace(300, 500, 11)
    eps = 1e4 * np.exp(-0.5 * ((wl - 400) / 40) ** 2) + 10.0
    col = np.log10(eps) if kind == "log" else eps
    p = tmp_path / "v.csv"
    p.write_text(f"wavelength (nm),{header}\n" + "\n".join(f"{x},{float(y)!r}" for x, y in zip(wl, col)))
    spec = read_csv(p)
    assert spec.quantity == "epsilon"
    assert spec.values[::-1] == pytest.approx(eps, rel=1e-12)


def test_jcamp_compressed_difdup_form(tmp_path):
    # ASDF compression (SQZ first value, DIF differences, DUP repeats; McDonald & Wilks 1988), encoded by
    # hand: 100 102 105 105 105 | 105 106 107 (the second line repeats the last value as its Y check)
    p = tmp_path / "dif.jdx"
    p.write_text("##TITLE=difdup\n##JCAMP-DX=4.24\n##XUNITS=NANOMETERS\n##YUNITS=ABSORBANCE\n##XFACTOR=1.0\n"
                 "##YFACTOR=0.001\n##FIRSTX=401\n##LASTX=407\n##NPOINTS=7\n##XYDATA=(X++(Y..Y))\n"
                 "401 A00KL%T\n405 A05JJ\n##END=\n")
    spec = read_jcamp(p)
    assert spec.wavelength_nm[::-1] == pytest.approx(np.arange(401.0, 408.0), rel=1e-12)
    assert spec.values[::-1] == pytest.approx([0.100, 0.102, 0.105, 0.105, 0.105, 0.106, 0.107], rel=1e-12)
    # a broken Y check (second line does not repeat 105) is a damaged file, refused
    p.write_text(p.read_text().replace("405 A05JJ", "405 A09JJ"))
    with pytest.raises(MeasuredSpectrumError, match="damaged"):
        read_jcamp(p)
