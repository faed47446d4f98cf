"""Measured spectra in: CSV with a header naming units, and JCAMP-DX (through the ``jcamp`` package).

CSV layout (ppp's own, documented in docs/spectra.md): optional comment lines starting with ``#``, one
header line (up to :data:`HEADER_SEARCH_LINES` title lines above it are skipped), then numbers (up to a
blank line, after which an instrument's run report is ignored). Columns are separated by commas,
semicolons, tabs or "|" (the one found most often in the header, :mod:`ppp.io.delimited`) or, if none
of these appear in the header, white space. The header names each column as
``quantity (unit)``, ``quantity [unit]``, ``quantity/unit`` or ``quantity_unit``. The first column
naming an axis quantity and the first naming an intensity quantity are used; other columns are ignored.

    axis:       wavelength (nm) | wavenumber (cm-1) | energy (eV)
    intensity:  absorbance | epsilon (M-1 cm-1) | log epsilon | transmittance (a fraction) | %T

JCAMP-DX (McDonald & Wilks 1988, Appl. Spectrosc. 42, 151): one spectrum per file, ##XUNITS=
NANOMETERS, 1/CM or EV (MICROMETERS also accepted), ##YUNITS= ABSORBANCE, TRANSMITTANCE, MOLAR
ABSORPTIVITY (or a unit such as L/(MOL*CM)) or LOG(MOLAR ABSORPTIVITY).

Every problem is a :class:`MeasuredSpectrumError` with a one-line reason naming the file.
"""
from __future__ import annotations

import contextlib
import io
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..io.delimited import header_delimiter
from ..units import EV_CM1, HC_EV_NM

#: Fewest points accepted in a measured spectrum.
MIN_POINTS = 5
INTENSITIES = ("absorbance", "epsilon")


class MeasuredSpectrumError(InputError):
    """A measured spectrum file cannot be used: unknown units, bad axis, no data, unreadable."""

    kind = "measured_spectrum"


@dataclass(frozen=True)
class MeasuredSpectrum:
    """A measured absorption spectrum on an ascending energy axis.

    energy_ev : (n,) ascending photon energies, eV
    values : (n,) absorbance (dimensionless) or molar absorptivity (M^-1 cm^-1), see ``quantity``
    quantity : "absorbance" or "epsilon" (log epsilon input is converted to epsilon)
    axis_unit : unit of the file's axis ("nm", "cm-1" or "eV")
    source : file name, for messages and plots
    title : title from the file, if any
    """

    energy_ev: np.ndarray
    values: np.ndarray
    quantity: str
    axis_unit: str
    source: str
    title: str = ""

    @property
    def wavelength_nm(self) -> np.ndarray:
        return HC_EV_NM / self.energy_ev

    @property
    def wavenumber_cm1(self) -> np.ndarray:
        return self.energy_ev * EV_CM1

    @property
    def unit_label(self) -> str:
        return "absorbance" if self.quantity == "absorbance" else "\u03b5 / M\u207b\u00b9 cm\u207b\u00b9"


# --- names and units ----------------------------------------------------------------------------------

def _norm_unit(text: str) -> str:
    t = text.strip().lower().replace("\u207b\u00b9", "-1").replace("\u207b", "-").replace("\u00b9", "1")
    for ch in " ^\u00b7*.()":
        t = t.replace(ch, "")
    return t


_AXIS_UNITS = {
    "nm": "nm", "nanometers": "nm", "nanometer": "nm", "nanometres": "nm", "nanometre": "nm",
    "cm-1": "cm-1", "1/cm": "cm-1", "/cm": "cm-1", "wavenumbers": "cm-1",
    "ev": "eV", "electronvolt": "eV", "electronvolts": "eV",
    "um": "um", "micrometers": "um", "micrometer": "um", "\u00b5m": "um", "micron": "um", "microns": "um",
}
_AXIS_QUANTITY = {"wavelength": "nm", "lambda": "nm", "\u03bb": "nm", "wavenumber": "cm-1",
                  "energy": "eV", "photonenergy": "eV"}
_EPS_UNITS = {"m-1cm-1", "lmol-1cm-1", "l/molcm", "l/mol/cm", "dm3mol-1cm-1", "dm3/molcm",
              "m-1cm-1base10", "molarabsorptivity"}
_EPS_NAMES = {"epsilon", "\u03b5", "eps", "molarabsorptivity", "molarabsorptioncoefficient",
              "molarextinctioncoefficient", "extinctioncoefficient"}
_LOG_EPS_NAMES = {"log" + n for n in _EPS_NAMES} | {"log10" + n for n in _EPS_NAMES} | {"lg" + n for n in _EPS_NAMES}
_ABS_NAMES = {"absorbance", "a", "abs", "opticaldensity", "od"}
#: transmittance in percent, as instruments label it; "transmittance" alone is a fraction
_T_PERCENT_NAMES = {"%t", "t%", "%transmittance", "transmittance%", "percenttransmittance"}


def _split_header_token(token: str) -> tuple[str, str]:
    """'wavelength (nm)' -> ('wavelength', 'nm'); 'energy/eV' -> ('energy', 'eV'); names lower-case."""
    t = token.strip().strip('"').strip("'").strip()
    m = re.match(r"^(.*?)\s*[\(\[]\s*(.*?)\s*[\)\]]\s*$", t)
    if m:
        name, unit = m.group(1), m.group(2)
        if name.strip().lower() in ("log", "log10", "lg"):  # log(epsilon) is a name, not a unit
            return _norm_name(name + unit), ""
        return _norm_name(name), unit
    if "/" in t:
        name, unit = t.split("/", 1)
        return _norm_name(name), unit
    low = t.lower()
    for alias in sorted(set(_AXIS_UNITS) | {"m-1cm-1", "m-1_cm-1"}, key=len, reverse=True):
        if low.endswith("_" + alias):
            return _norm_name(t[: -len(alias) - 1]), t[-len(alias):]
    return _norm_name(t), ""


def _norm_name(name: str) -> str:
    return re.sub(r"[\s_\-()]", "", name.strip().lower())


#: axis columns named by their unit alone, as :func:`_norm_name` leaves the name
_BARE_AXIS_UNITS = {"nm": "nm", "cm1": "cm-1", "ev": "eV"}


def _axis_kind(name: str, unit: str) -> str | None:
    """Unit key of an axis column, None if the name is not an axis quantity; raises on a bad unit. A
    column named by its unit alone ('nm', 'cm-1', 'eV', as some instruments write) is an axis too."""
    if name not in _AXIS_QUANTITY:
        return None if unit else _BARE_AXIS_UNITS.get(name)
    u = _AXIS_UNITS.get(_norm_unit(unit))
    if u is None:
        allowed = {"nm": "nm", "cm-1": "cm-1", "eV": "eV"}[_AXIS_QUANTITY[name]]
        raise MeasuredSpectrumError(f"column '{name}' needs a unit, e.g. '{name} ({allowed})'" if not unit
                                    else f"unknown unit '{unit}' for {name}; use nm, cm-1 or eV")
    return u


def _intensity_kind(name: str, unit: str) -> str | None:
    if name in _ABS_NAMES:
        return "absorbance"
    if name in _T_PERCENT_NAMES or (name in ("t", "transmittance") and unit.strip() == "%"):
        return "transmittance_percent"
    if name == "transmittance":
        return "transmittance"
    if name in _LOG_EPS_NAMES:
        return "log_epsilon"
    if name in _EPS_NAMES:
        if unit and _norm_unit(unit) not in _EPS_UNITS:
            raise MeasuredSpectrumError(f"unknown unit '{unit}' for epsilon; use M-1 cm-1 (= L mol-1 cm-1)")
        return "epsilon"
    return None


def _to_energy(x: np.ndarray, unit: str, where: str) -> np.ndarray:
    if np.any(x <= 0):
        raise MeasuredSpectrumError(f"{where}: axis values must be positive ({unit})")
    if unit == "nm":
        return HC_EV_NM / x
    if unit == "um":
        return HC_EV_NM / (1000.0 * x)
    if unit == "cm-1":
        return x / EV_CM1
    return x


def make_spectrum(x: np.ndarray, y: np.ndarray, axis_unit: str, intensity: str, source: str,
                  title: str = "") -> MeasuredSpectrum:
    """Validate raw columns and build a :class:`MeasuredSpectrum` on an ascending energy axis.

    Checks: at least ``MIN_POINTS`` points, finite numbers, strictly monotonic axis (either direction,
    no repeated value), positive axis values; log epsilon is turned into epsilon, a transmittance (a
    fraction, or in percent) into absorbance.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if len(x) == 0:
        raise MeasuredSpectrumError(f"{source}: no data points")
    if len(x) != len(y):
        raise MeasuredSpectrumError(f"{source}: {len(x)} axis values but {len(y)} intensities")
    if len(x) < MIN_POINTS:
        raise MeasuredSpectrumError(f"{source}: only {len(x)} data points (at least {MIN_POINTS} needed)")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        raise MeasuredSpectrumError(f"{source}: data contain non-finite values (NaN or inf)")
    d = np.diff(x)
    if not (np.all(d > 0) or np.all(d < 0)):
        k = int(np.flatnonzero(np.sign(d) != np.sign(d[0]))[0]) + 1 if np.any(d != 0) else 1
        raise MeasuredSpectrumError(
            f"{source}: axis is not strictly monotonic (value {x[k]:g} at point {k + 1} after {x[k - 1]:g})")
    energy = _to_energy(x, axis_unit, source)
    if intensity == "log_epsilon":
        y = 10.0 ** y
        intensity = "epsilon"
    elif intensity in ("transmittance", "transmittance_percent"):
        full = 100.0 if intensity == "transmittance_percent" else 1.0
        if np.any(y <= 0) or np.max(y) > 1.5 * full:
            raise MeasuredSpectrumError(
                f"{source}: transmittance must lie in (0, {full:g}]" + ("" if full > 1 else
                                                                     "; for percent name it %T or T (%)"))
        y = -np.log10(y / full)  # absorbance A = -log10 T (Beer-Lambert)
        intensity = "absorbance"
    order = np.argsort(energy)
    return MeasuredSpectrum(energy[order], y[order], intensity, axis_unit, source, title)


# --- CSV ----------------------------------------------------------------------------------------------

#: Lines searched for the header: instrument exports put a sample name or a run title above it.
HEADER_SEARCH_LINES = 5


def _columns_of(header: str):
    """(separator, axis column, axis unit, intensity column, intensity kind) of a header line; the columns
    are None where the header names none. Raises MeasuredSpectrumError for a known name with a bad unit."""
    sep = header_delimiter(header, default=None)
    cells = [c.strip() for c in header.split(sep)] if sep else header.split()
    ix = iy = axis_unit = intensity = None
    for k, col in enumerate(cells):
        name, unit = _split_header_token(col)
        if ix is None:
            u = _axis_kind(name, unit)
            if u is not None:
                ix, axis_unit = k, u
                continue
        if iy is None:
            kind = _intensity_kind(name, unit)
            if kind is not None:
                iy, intensity = k, kind
    return sep, ix, axis_unit, iy, intensity


def _numbers(cells: list[str]) -> bool:
    try:
        [float(c) for c in cells if c]
    except ValueError:
        return False
    return any(cells)


def read_csv(path: str | Path) -> MeasuredSpectrum:
    """Read a measured spectrum from ppp's CSV layout (see module docstring).

    Instrument exports are met half-way: up to :data:`HEADER_SEARCH_LINES` lines above the header (a
    sample name, a run title) are skipped, the first of them kept as the title; the data end at the first
    blank line after them, and text that follows there (an instrument's run report) is ignored, unless
    rows of numbers follow it again (two blocks of data are refused, not merged)."""
    p = Path(path)
    src = p.name
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise MeasuredSpectrumError(f"file '{p}' does not exist") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise MeasuredSpectrumError(f"cannot read '{p}': {exc}") from None
    numbered = [(n + 1, ln.strip()) for n, ln in enumerate(text.splitlines())]
    lines = [(n, ln) for n, ln in numbered if ln and not ln.startswith("#")]
    if not lines:
        raise MeasuredSpectrumError(f"{src}: empty file (no header, no data)")
    found = None
    try:
        for k, (n, ln) in enumerate(lines[:HEADER_SEARCH_LINES]):
            cols = _columns_of(ln)
            if cols[1] is not None and cols[3] is not None:
                found = k, cols
                break
            sep = cols[0]
            if _numbers([c.strip() for c in ln.split(sep)] if sep else ln.split()):
                break  # data before any header
    except MeasuredSpectrumError as err:
        raise MeasuredSpectrumError(f"{src}: {err.reason}") from None
    if found is None:
        first = lines[0][1]
        sep = _columns_of(first)[0]
        if _numbers([c.strip() for c in first.split(sep)] if sep else first.split()):
            raise MeasuredSpectrumError(
                f"{src}: first line is numbers, not a header; name the columns, e.g. 'wavelength (nm),absorbance'")
        raise MeasuredSpectrumError(
            f"{src}: no header line naming an axis column (wavelength (nm), wavenumber (cm-1) or energy (eV)) "
            f"and an intensity column (absorbance, epsilon (M-1 cm-1), log epsilon or %T) in its first "
            f"{HEADER_SEARCH_LINES} lines; first line: '{first[:40]}'")
    k, (sep, ix, axis_unit, iy, intensity) = found
    header_no = lines[k][0]
    above = [ln for _, ln in lines[:k]]

    def split(ln: str) -> list[str]:
        return [c.strip() for c in ln.split(sep)] if sep else ln.split()

    xs, ys = [], []
    after = [(n, ln) for n, ln in numbered if n > header_no and not ln.startswith("#")]
    end = len(after)
    for j, (n, ln) in enumerate(after):
        if not ln:
            if xs:  # a blank line after data: the data block ends here
                end = j
                break
            continue
        cells = split(ln)
        try:
            xs.append(float(cells[ix]))
            ys.append(float(cells[iy]))
        except (ValueError, IndexError):
            raise MeasuredSpectrumError(f"{src}: line {n} is not a row of numbers: '{ln[:40]}'") from None
    for n, ln in after[end:]:
        cells = split(ln) if ln else []
        if len(cells) > max(ix, iy) and _numbers([cells[ix], cells[iy]]):
            raise MeasuredSpectrumError(f"{src}: a second block of numbers starts at line {n}; "
                                        "give one spectrum per file")
    title = next((ln.strip()[1:].strip() for ln in text.splitlines()
                  if ln.strip().startswith("#") and ln.strip()[1:].strip()), "")
    if not title and above:
        title = above[0].strip(" ,;\t")
    return make_spectrum(np.array(xs), np.array(ys), axis_unit, intensity, src, title)


# --- JCAMP-DX -----------------------------------------------------------------------------------------

_JDX_Y = {"absorbance": "absorbance", "transmittance": "transmittance", "%t": "transmittance_percent",
          "percenttransmittance": "transmittance_percent", "transmittance%": "transmittance_percent",
          "molarabsorptivity": "epsilon", "logmolarabsorptivity": "log_epsilon",
          "logepsilon": "log_epsilon", "epsilon": "epsilon"}


def read_jcamp(path: str | Path) -> MeasuredSpectrum:
    """Read a single-spectrum JCAMP-DX file with the ``jcamp`` package (PyPI, Hagen et al.).

    The parser reports data-line check failures by printing; those messages are captured and turned
    into errors, so that a damaged file is never read silently.
    """
    import jcamp

    p = Path(path)
    src = p.name
    if not p.is_file():
        raise MeasuredSpectrumError(f"file '{p}' does not exist")
    chatter = io.StringIO()
    try:
        with contextlib.redirect_stdout(chatter), open(p, "rb") as fh:
            d = jcamp.read(fh)
    except (ValueError, KeyError, IndexError, ZeroDivisionError, TypeError, AttributeError) as exc:
        raise MeasuredSpectrumError(f"{src}: not a readable JCAMP-DX spectrum ({type(exc).__name__}: {exc})") from None
    problems = [ln for ln in chatter.getvalue().splitlines() if "fail" in ln.lower() or "mismatch" in ln.lower()]
    if problems:
        raise MeasuredSpectrumError(f"{src}: damaged JCAMP-DX data: {problems[0].strip()}")
    if "children" in d:
        raise MeasuredSpectrumError(f"{src}: compound (LINK) JCAMP-DX file; give one spectrum per file")
    if "xunits" not in d or "yunits" not in d:
        raise MeasuredSpectrumError(f"{src}: JCAMP-DX header lacks ##XUNITS or ##YUNITS")
    xu = _AXIS_UNITS.get(_norm_unit(str(d["xunits"])))
    if xu is None:
        raise MeasuredSpectrumError(f"{src}: unknown ##XUNITS '{d['xunits']}'; use NANOMETERS, 1/CM or EV")
    yname = _norm_name(str(d["yunits"]))
    ykind = _JDX_Y.get(yname)
    if ykind is None and _norm_unit(str(d["yunits"])) in _EPS_UNITS:
        ykind = "epsilon"
    if ykind is None:
        raise MeasuredSpectrumError(
            f"{src}: unknown ##YUNITS '{d['yunits']}'; use ABSORBANCE, TRANSMITTANCE, MOLAR ABSORPTIVITY "
            "or LOG(MOLAR ABSORPTIVITY)")
    x = np.asarray(d.get("x", []), dtype=float)
    y = np.asarray(d.get("y", []), dtype=float)
    return make_spectrum(x, y, xu, ykind, src, str(d.get("title", "")))


def read_measured(path: str | Path) -> MeasuredSpectrum:
    """Read a measured spectrum; ``.jdx``/``.dx``/``.jcamp`` files as JCAMP-DX, anything else as CSV."""
    p = Path(path)
    if p.suffix.lower() in (".jdx", ".dx", ".jcamp", ".jcm"):
        return read_jcamp(p)
    return read_csv(p)


def to_epsilon(spec: MeasuredSpectrum, concentration_m: float | None, path_cm: float | None) -> MeasuredSpectrum:
    """Absorbance -> epsilon = A / (c l) (Beer-Lambert); epsilon spectra come back unchanged."""
    if spec.quantity == "epsilon":
        return spec
    if not concentration_m or not path_cm or concentration_m <= 0 or path_cm <= 0:
        raise MeasuredSpectrumError(f"{spec.source}: absorbance needs a positive concentration and path length "
                                    "to become epsilon")
    return MeasuredSpectrum(spec.energy_ev, spec.values / (concentration_m * path_cm), "epsilon",
                            spec.axis_unit, spec.source, spec.title)
