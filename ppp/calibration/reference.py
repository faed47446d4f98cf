"""Reference sets of measured absorption bands, and the rule that picks the computed state for a band.

A reference set is a CSV file (``#`` lines are comments) with the columns

    name, smiles, class, solvent, band, match, lambda_nm, uncertainty_nm, source

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

from ..batch.inputs import header_delimiter
from ..errors import InputError
from ..results import BRIGHT_F
from ..units import ev_to_nm, nm_to_ev

#: Oscillator strength from which a singlet counts as an observable ("allowed") band: the one threshold
#: of the output's first allowed band (``ppp.results.BRIGHT_F``).
ALLOWED_F = BRIGHT_F
#: Singlets computed per chromophore when matching bands.
N_SINGLETS = 8
MATCH_RULES = ("allowed", "S1", "S2")
COLUMNS = ("name", "smiles", "class", "solvent", "band", "match", "lambda_nm", "uncertainty_nm", "source")


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
    missing = [c for c in COLUMNS if c not in (reader.fieldnames or [])]
    if missing:
        raise InputError(f"reference file '{p}': missing column(s) {', '.join(missing)}")
    entries = []
    for k, row in enumerate(reader, start=1):
        where = f"reference file '{p.name}', row {k} ({row.get('name') or '?'})"
        if None in row or any(row[c] is None for c in COLUMNS):
            raise InputError(f"{where}: wrong number of fields")
        try:
            lam = float(row["lambda_nm"])
            unc = float(row["uncertainty_nm"])
        except ValueError:
            raise InputError(f"{where}: lambda_nm and uncertainty_nm must be numbers") from None
        if not (math.isfinite(lam) and 50.0 < lam < 5000.0):
            raise InputError(f"{where}: lambda_nm {lam} outside 50-5000 nm")
        if not (math.isfinite(unc) and unc > 0):
            raise InputError(f"{where}: uncertainty_nm must be positive")
        if row["match"] not in MATCH_RULES:
            raise InputError(f"{where}: match '{row['match']}' is not one of {', '.join(MATCH_RULES)}")
        if not row["smiles"].strip() or not row["class"].strip():
            raise InputError(f"{where}: empty smiles or class")
        entries.append(Entry(row["name"], row["smiles"].strip(), row["class"].strip(), row["solvent"],
                             row["band"], row["match"], lam, unc, row["source"]))
    if not entries:
        raise InputError(f"reference file '{p}' holds no rows")
    return ReferenceSet(tuple(entries), str(p), hashlib.sha256(raw).hexdigest())


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
