"""Reference sets of measured absorption bands, and the rule that picks the computed state for a band.

A reference set is a CSV file (``#`` lines are comments) with the columns

    name, smiles, class, solvent, band, match, lambda_nm, uncertainty_nm, source

Only ``smiles`` and ``lambda_nm`` (or ``lambda_max_nm``) are required, so that a lab can fit its own
table as it stands; a missing column takes its default for every row (:data:`DEFAULTS`): the class from
the structure rules that also choose the "±" of an output (:mod:`ppp.calibration.classes`), so that the
errors a fit writes per class are looked up for new molecules by the same rules; no solvent (gas phase
under ``--solvents reference``), match ``allowed``, an unknown uncertainty (NaN; it is only reported,
never used to weight the fit), and "row K" as the name.

``match`` says which computed singlet is compared with the measured band, decided from the computed
states alone (never from the measured value):

* ``allowed``: the lowest singlet with oscillator strength f >= :data:`ALLOWED_F` (0.05), i.e. the
  longest-wavelength band a spectrum shows with appreciable intensity (molar absorptivity of a few
  thousand L mol^-1 cm^-1 and up for a typical band width; common practice). Symmetry-forbidden states
  (f = 0 in the model) are passed over, as in the spectrum.
* ``S1`` / ``S2``: the lowest / second-lowest singlet whatever its intensity (for bands whose point is
  the state order, e.g. the weak S1 band of azulene).

If no computed singlet qualifies the row counts as a failure of the prediction, not a missing value.
"""
from __future__ import annotations

import csv
import hashlib
import math
from dataclasses import dataclass
from pathlib import Path

from ..errors import InputError, PPPError
from ..io.delimited import header_delimiter
from ..results import BRIGHT_F
from ..units import ev_to_nm, nm_to_ev

#: Oscillator strength from which a singlet counts as an observable ("allowed") band: the one threshold
#: of the output's first allowed band (``ppp.results.BRIGHT_F``).
ALLOWED_F = BRIGHT_F
#: Singlets computed per chromophore when matching bands.
N_SINGLETS = 8
MATCH_RULES = ("allowed", "S1", "S2")
COLUMNS = ("name", "smiles", "class", "solvent", "band", "match", "lambda_nm", "uncertainty_nm", "source")
REQUIRED = ("smiles", "lambda_nm")
#: other names accepted for a column (a lab's own table)
ALIASES = {"lambda_nm": ("lambda_max_nm",)}
#: value of a column the file lacks, for every row ("class": from the structure, see the module docstring)
DEFAULTS = {"name": "", "class": "", "solvent": "", "band": "", "match": "allowed", "uncertainty_nm": "nan",
            "source": ""}


@dataclass(frozen=True)
class Entry:
    """One measured band."""

    name: str
    smiles: str
    cls: str
    solvent: str
    band: str
    match: str
    lambda_nm: float
    uncertainty_nm: float
    source: str

    @property
    def energy_ev(self) -> float:
        return float(nm_to_ev(self.lambda_nm))

    @property
    def uncertainty_ev(self) -> float:
        """1-sigma uncertainty of the band energy, eV (dE = E dlambda / lambda)."""
        return self.energy_ev * self.uncertainty_nm / self.lambda_nm


@dataclass(frozen=True)
class ReferenceSet:
    """A loaded reference set: entries, its path and the SHA-256 of the file's bytes."""

    entries: tuple[Entry, ...]
    path: str
    sha256: str

    @property
    def classes(self) -> tuple[str, ...]:
        return tuple(sorted({e.cls for e in self.entries}))

    def of_class(self, cls: str) -> tuple[Entry, ...]:
        return tuple(e for e in self.entries if e.cls == cls)


def load(path: str | Path) -> ReferenceSet:
    """Read and validate a reference CSV. Raises InputError naming the file, row and reason."""
    p = Path(path)
    if not p.is_file():
        raise InputError(f"reference file '{p}' does not exist")
    raw = p.read_bytes()
    try:
        text = raw.decode("utf-8-sig")  # (a spreadsheet's byte-order mark dropped)
    except UnicodeDecodeError:
        raise InputError(f"reference file '{p}' is not UTF-8 text") from None
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    reader = csv.DictReader(lines, delimiter=header_delimiter(lines[0]) if lines else ",")
    fields = [f.strip() for f in (reader.fieldnames or [])]
    reader.fieldnames = fields
    column = {}  # our column name -> the file's
    for c in COLUMNS:
        column[c] = next((f for f in (c, *ALIASES.get(c, ())) if f in fields), None)
    missing = [" or ".join((c, *ALIASES.get(c, ()))) for c in REQUIRED if column[c] is None]
    if missing:
        raise InputError(f"reference file '{p}': missing column(s) {', '.join(missing)} (it has: {', '.join(fields)})")
    entries = []
    for k, row in enumerate(reader, start=1):
        where = f"reference file '{p.name}', row {k} ({row.get(column['name'] or '') or '?'})"
        if None in row or any(row[f] is None for f in column.values() if f is not None):
            raise InputError(f"{where}: wrong number of fields")
        val = {c: (row[f] if f is not None else DEFAULTS[c]) for c, f in column.items()}
        unc_text = val["uncertainty_nm"].strip() or "nan"  # a blank cell: unknown, like a missing column
        try:
            lam = float(val["lambda_nm"])
            unc = float(unc_text)
        except ValueError:
            raise InputError(f"{where}: lambda_nm and uncertainty_nm must be numbers") from None
        if not (math.isfinite(lam) and 50.0 < lam < 5000.0):
            raise InputError(f"{where}: lambda_nm {lam} outside 50-5000 nm")
        if not (unc > 0 and math.isfinite(unc)) and unc_text.lower() != "nan":
            raise InputError(f"{where}: uncertainty_nm must be positive")
        match = val["match"].strip() or "allowed"
        if match not in MATCH_RULES:
            raise InputError(f"{where}: match '{match}' is not one of {', '.join(MATCH_RULES)}")
        smiles = val["smiles"].strip()
        if not smiles:
            raise InputError(f"{where}: empty smiles")
        cls = val["class"].strip()
        if not cls:
            if column["class"] is not None:
                raise InputError(f"{where}: empty class (leave the column out to have it from the structure)")
            cls = _class_of(smiles)
        entries.append(Entry(val["name"] or f"row {k}", smiles, cls, val["solvent"], val["band"], match, lam, unc,
                             val["source"]))
    if not entries:
        raise InputError(f"reference file '{p}' holds no rows")
    return ReferenceSet(tuple(entries), str(p), hashlib.sha256(raw).hexdigest())


def _class_of(smiles: str) -> str:
    """Structure class of a row without a class column; "other" for a SMILES that does not parse (the row
    is then reported as skipped, with the parse error, when the set is evaluated)."""
    from .classes import classify_smiles
    try:
        return classify_smiles(smiles)
    except PPPError:
        return "other"


def match_state(singlets, rule: str):
    """The computed singlet compared with a band under ``rule``, or None if none qualifies.

    singlets : sequence of objects with ``energy_ev`` and ``oscillator_strength``, in any order
    """
    if rule not in MATCH_RULES:
        raise ValueError(f"unknown match rule '{rule}'")
    ordered = sorted(singlets, key=lambda s: s.energy_ev)
    if rule == "allowed":
        return next((s for s in ordered if s.oscillator_strength >= ALLOWED_F), None)
    k = 0 if rule == "S1" else 1
    return ordered[k] if len(ordered) > k else None


def error_nm(entry: Entry, energy_ev: float) -> float:
    """Computed minus measured wavelength, nm."""
    return float(ev_to_nm(energy_ev)) - entry.lambda_nm
