"""Output files of the spectrum commands: CSV tables, overwrite protection, value-with-unit parsing."""
from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError, StorageError
from ..units import EV_CM1, HC_EV_NM, cm1_to_ev


def energy_value(text: str, what: str) -> float:
    """Parse an energy given as '0.3', '0.3eV' or '2400cm-1' (also 'cm^-1', '1/cm') into eV."""
    t = str(text).strip().lower().replace(" ", "")
    m = re.fullmatch(r"([-+]?(?:\d+\.?\d*|\.\d+)(?:e[-+]?\d+)?)(ev|cm-1|cm\^-1|1/cm|/cm)?", t)
    if not m:
        raise InputError(f"{what} '{text}' is not a number with an optional unit eV or cm-1 (e.g. 0.3 or 2400cm-1)")
    value = float(m.group(1))
    unit = m.group(2) or "ev"
    return value if unit == "ev" else float(cm1_to_ev(value))


def check_writable(paths, overwrite: bool) -> None:
    """Refuse to replace any existing output unless ``overwrite``; check the folder exists."""
    for p in map(Path, paths):
        if p.exists() and not overwrite:
            raise StorageError(f"'{p}' exists; add --overwrite to replace it")
        if not p.parent.exists():
            raise StorageError(f"folder '{p.parent}' does not exist")


def _header(kind: str, name: str, notes) -> str:
    lines = [f"# {kind} of {name}: ppp {__version__}"]
    lines += [f"# {n}" for n in notes]
    return "\n".join(lines) + "\n"


def write_curve_csv(path, curve, name: str, notes=(), ascending: str = "wavelength") -> Path:
    """Simulated curve: wavelength (nm), energy (eV), wavenumber (cm-1), epsilon (M-1 cm-1).

    Rows in ascending wavelength (``ascending="wavelength"``) or ascending energy otherwise.
    The file reads back with ``ppp.spectra.measured.read_csv``."""
    return write_curves_csv(path, [curve], [name], notes, ascending)


def write_curves_csv(path, curves, names, notes=(), ascending: str = "wavelength") -> Path:
    """Simulated curves of several molecules on one grid: the three axis columns, then one epsilon column
    per molecule ("epsilon of NAME (M-1 cm-1)"; for one molecule the layout of :func:`write_curve_csv`)."""
    import csv
    import io

    grid = curves[0].energy_ev
    order = np.arange(len(grid))[::-1] if ascending == "wavelength" else np.arange(len(grid))
    e = grid[order]
    table = np.column_stack([HC_EV_NM / e, e, e * EV_CM1] + [c.epsilon[order] for c in curves])
    one = len(curves) == 1
    head = io.StringIO()
    csv.writer(head, lineterminator="\n").writerow(
        ["wavelength (nm)", "energy (eV)", "wavenumber (cm-1)"]
        + (["epsilon (M-1 cm-1)"] if one else [f"epsilon of {n} (M-1 cm-1)" for n in names]))
    path = Path(path)
    with path.open("w", encoding="utf-8") as fh:
        fh.write(_header("simulated absorption spectrum" if one else "simulated absorption spectra",
                         names[0] if one else f"{len(curves)} molecules", notes))
        fh.write(head.getvalue())
        np.savetxt(fh, table, delimiter=",", fmt=["%.4f", "%.6f", "%.3f"] + ["%.6g"] * len(curves))
    return path


def write_curve_jcamp(path, curve, name: str, notes=()) -> Path:
    """Simulated curve as a JCAMP-DX 4.24 UV/VIS spectrum (McDonald & Wilks 1988): wavelength (nm)
    ascending against molar absorptivity (M-1 cm-1), one (X, Y) pair per line (``##XYPOINTS=(XY..XY)``,
    the form for unevenly spaced X: the grid is even in energy). Spectroscopy programs open it beside
    their measured spectra; it reads back with ``ppp.spectra.measured.read_jcamp``. ``##ORIGIN`` and
    the ``$$`` comment lines say that it is a computation, with the band shape used."""
    e = curve.energy_ev[::-1]
    wl, eps = HC_EV_NM / e, curve.epsilon[::-1]
    title = " ".join(str(name).split()) or "molecule"
    head = [f"##TITLE={title} (simulated absorption spectrum)", "##JCAMP-DX=4.24", "##DATA TYPE=UV/VIS SPECTRUM",
            f"##ORIGIN=computed with ppp {__version__} (PPP pi-electron model, CIS); not a measurement",
            "##OWNER=computed data; no rights reserved"]
    head += [f"$$ {n}" for n in notes]
    head += ["##XUNITS=NANOMETERS", "##YUNITS=MOLAR ABSORPTIVITY", "##XFACTOR=1", "##YFACTOR=1",
             f"##FIRSTX={wl[0]:.4f}", f"##LASTX={wl[-1]:.4f}", f"##NPOINTS={len(wl)}", f"##FIRSTY={eps[0]:.6g}",
             f"##MINY={eps.min():.6g}", f"##MAXY={eps.max():.6g}", "##XYPOINTS=(XY..XY)"]
    path = Path(path)
    with path.open("w", encoding="ascii", errors="replace", newline="\r\n") as fh:
        fh.write("\n".join(head) + "\n")
        for x, y in zip(wl, eps):
            fh.write(f"{x:.4f}, {y:.6g}\n")
        fh.write("##END=\n")
    return path


def write_sticks_csv(path, sticks, name: str, notes=()) -> Path:
    """Stick spectrum: state, energy (eV), wavelength (nm), wavenumber (cm-1), oscillator strength."""
    path = Path(path)
    with path.open("w", encoding="utf-8") as fh:
        fh.write(_header("computed singlet transitions (sticks)", name, notes))
        fh.write("state,energy (eV),wavelength (nm),wavenumber (cm-1),oscillator strength\n")
        for lab, e, f in zip(sticks.labels, sticks.energy_ev, sticks.f):
            fh.write(f"{lab},{e:.6f},{HC_EV_NM / e:.4f},{e * EV_CM1:.3f},{f:.6f}\n")
    return path


def write_compare_csv(path, meas, raw, fitted, name: str, notes=()) -> Path:
    """Measured points with the scaled unshifted simulation, the fitted simulation and the residual."""
    path = Path(path)
    unit = "absorbance" if meas.quantity == "absorbance" else "epsilon (M-1 cm-1)"
    with path.open("w", encoding="utf-8") as fh:
        fh.write(_header(f"comparison with {meas.source}", name, notes))
        fh.write(f"wavelength (nm),energy (eV),measured {unit},simulated as computed,simulated fitted,residual\n")
        for e, y, r, f in zip(meas.energy_ev[::-1], meas.values[::-1], raw[::-1], fitted[::-1]):
            fh.write(f"{HC_EV_NM / e:.4f},{e:.6f},{y:.6g},{r:.6g},{f:.6g},{y - f:.6g}\n")
    return path
