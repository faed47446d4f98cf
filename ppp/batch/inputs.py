"""Readers for batch input files: SMILES lists, CSV/TSV tables, SDF (plain or gzip).

Readers are generators of :class:`Item`: they only split the file into records; parsing the
structure happens in the workers. Every item carries its 1-based line (SMILES, CSV) or record (SDF)
number, and that number travels with every error message about it. A problem with one record (a CSV
row without a SMILES, an SDF record without 'M  END') becomes an item with ``problem`` set, never an
exception, so that one bad record never stops a batch. Only a missing, unreadable or
wrongly-formatted *file* raises :class:`~ppp.errors.InputError`.
"""
from __future__ import annotations

import csv
import gzip
import hashlib
import io
import itertools
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from ..errors import InputError
from ..io.delimited import header_delimiter

FORMATS = ("smiles", "csv", "tsv", "sdf")
_SUFFIX_FORMAT = {".smi": "smiles", ".smiles": "smiles", ".txt": "smiles", ".ism": "smiles",
                  ".csv": "csv", ".tsv": "tsv", ".sdf": "sdf", ".sd": "sdf", ".mol": "sdf"}


@dataclass(frozen=True)
class Item:
    """One input record.

    index : 0-based position among all records of the file (the record's identity for resume/merge)
    source : 1-based line number (SMILES, CSV) or record number (SDF)
    name : the user's ID ("" when none is given)
    payload : SMILES text, or the MOL block text of an SDF record
    kind : "smiles" or "molblock"
    problem : reason the record cannot be used at all ("" when fine)
    """

    index: int
    source: int
    name: str
    payload: str
    kind: str
    problem: str = ""

    @property
    def where(self) -> str:
        return f"{'record' if self.kind == 'molblock' else 'line'} {self.source}"


def detect_format(path: str | Path, fmt: str | None = None) -> str:
    """Input format from ``fmt`` or from the file name (``.gz`` is looked through)."""
    if fmt:
        if fmt not in FORMATS:
            raise InputError(f"unknown input format '{fmt}'; valid: {', '.join(FORMATS)}")
        return fmt
    p = Path(path)
    suffixes = [s.lower() for s in p.suffixes]
    if suffixes and suffixes[-1] == ".gz":
        suffixes = suffixes[:-1]
    if suffixes and suffixes[-1] in _SUFFIX_FORMAT:
        return _SUFFIX_FORMAT[suffixes[-1]]
    raise InputError(f"cannot tell the format of '{p.name}' from its name; give --format "
                     f"({', '.join(FORMATS)})")


def check_input_file(path: Path) -> None:
    """InputError unless ``path`` is an existing file (a folder gets its own message)."""
    if path.is_dir():
        raise InputError(f"input '{path}' is a folder, not a file")
    if not path.is_file():
        raise InputError(f"input file '{path}' does not exist")


def _open_text(path: Path):
    """Text stream of a plain or gzip file. UTF-8; a byte-order mark (spreadsheet programs write one
    in front of "CSV UTF-8" files) is dropped, so that it does not become part of the first column's
    name; undecodable bytes are replaced (the record holding them then fails to parse, with its line)."""
    check_input_file(path)
    try:
        with open(path, "rb") as fh:
            magic = fh.read(2)
        raw = gzip.open(path, "rb") if magic == b"\x1f\x8b" else open(path, "rb")
    except OSError as exc:
        raise InputError(f"cannot read '{path}': {exc.strerror or exc}") from None
    return io.TextIOWrapper(raw, encoding="utf-8-sig", errors="replace", newline="")


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes (identifies the input of a results file for resume and merge)."""
    h = hashlib.sha256()
    try:
        with open(path, "rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                h.update(block)
    except OSError as exc:
        raise InputError(f"cannot read '{path}': {exc.strerror or exc}") from None
    return h.hexdigest()


def read_items(path: str | Path, fmt: str | None = None, smiles_column: str | None = None,
               id_column: str | None = None) -> Iterator[Item]:
    """Yield the records of an input file in order. See the module docstring.

    smiles_column, id_column : CSV/TSV column names (default: a column named 'smiles', and one named
        'id' or 'name' if present); for SDF ``id_column`` names a data field (default: the title line).
    """
    p = Path(path)
    fmt = detect_format(p, fmt)
    try:
        with _open_text(p) as fh:
            if fmt == "smiles":
                yield from _smiles_items(fh)
            elif fmt in ("csv", "tsv"):
                yield from _csv_items(fh, p, "\t" if fmt == "tsv" else None, smiles_column, id_column)
            else:
                yield from _sdf_items(fh, id_column)
    except (OSError, EOFError, gzip.BadGzipFile) as exc:
        raise InputError(f"cannot read '{p}': {exc}") from None


def _smiles_items(fh) -> Iterator[Item]:
    """One SMILES per line, optionally followed by white space and a name; '#' lines and blank lines
    are skipped (line numbers still count them)."""
    index = 0
    for lineno, line in enumerate(fh, start=1):
        text = line.strip()
        if not text or text.startswith("#"):
            continue
        parts = text.split(None, 1)
        name = parts[1].strip() if len(parts) > 1 else ""
        yield Item(index, lineno, name, parts[0], "smiles")
        index += 1


def _pick_column(header: list[str], wanted: str | None, defaults: tuple[str, ...], what: str,
                 path: Path, required: bool) -> int | None:
    lower = [h.strip().lower() for h in header]
    if wanted is not None:
        if wanted in header:
            return header.index(wanted)
        if wanted.lower() in lower:
            return lower.index(wanted.lower())
        raise InputError(f"'{path.name}' has no column '{wanted}' (columns: {', '.join(header)})")
    for d in defaults:
        if d in lower:
            return lower.index(d)
    if required and what == "SMILES":
        # exports of the public databases name it otherwise ("Smiles", "CanonicalSMILES", "IsomericSMILES"):
        # one column whose name contains "smiles" is taken; with several, the isomeric one (it keeps E/Z)
        hits = [k for k, h in enumerate(lower) if "smiles" in h]
        iso = [k for k in hits if "isomeric" in lower[k]]
        if len(hits) == 1 or len(iso) == 1:
            return hits[0] if len(hits) == 1 else iso[0]
    if required:
        raise InputError(f"'{path.name}' has no {what} column named {' or '.join(defaults)}; "
                         f"name it with --smiles-column (columns: {', '.join(header)})")
    return None


def _csv_items(fh, path: Path, delimiter: str | None, smiles_column, id_column) -> Iterator[Item]:
    """Rows of a table. ``delimiter`` None: judged from the header line (:func:`header_delimiter`)."""
    if delimiter is None:
        first = fh.readline()
        delimiter = header_delimiter(first)
        fh = itertools.chain([first], fh)
    reader = csv.reader(fh, delimiter=delimiter)
    try:
        header = next(reader)
    except StopIteration:
        raise InputError(f"'{path.name}' is empty") from None
    except csv.Error as exc:
        raise InputError(f"'{path.name}' line 1: {exc}") from None
    s_col = _pick_column(header, smiles_column, ("smiles",), "SMILES", path, True)
    i_col = _pick_column(header, id_column, ("id", "name"), "ID", path, False)
    index = 0
    while True:
        try:
            row = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            yield Item(index, reader.line_num, "", "", "smiles", f"malformed CSV row: {exc}")
            index += 1
            continue
        if not row or not any(cell.strip() for cell in row):
            continue
        lineno = reader.line_num
        name = row[i_col].strip() if i_col is not None and i_col < len(row) else ""
        if s_col >= len(row) or not row[s_col].strip():
            yield Item(index, lineno, name, "", "smiles", f"row has no value in column '{header[s_col]}'")
        else:
            yield Item(index, lineno, name, row[s_col].strip(), "smiles")
        index += 1


def _sdf_items(fh, id_field) -> Iterator[Item]:
    """Records separated by '$$$$' lines; the title line (or data field ``id_field``) names each."""
    index, record_no, lines = 0, 0, []

    def make(lines_: list[str]) -> Item | None:
        nonlocal index, record_no
        if not any(line.strip() for line in lines_):
            return None
        record_no += 1
        block = "\n".join(lines_) + "\n"
        name = lines_[0].strip() if lines_ else ""
        if id_field is not None:
            name = ""
            for k, line in enumerate(lines_):
                if line.startswith(">") and f"<{id_field}>" in line and k + 1 < len(lines_):
                    name = lines_[k + 1].strip()
                    break
        problem = "" if any(line.startswith("M  END") for line in lines_) else "truncated MOL block (no 'M  END' line)"
        item = Item(index, record_no, name, block, "molblock", problem)
        index += 1
        return item

    for line in fh:
        line = line.rstrip("\r\n")
        if line.strip() == "$$$$":
            item = make(lines)
            lines = []
            if item is not None:
                yield item
        else:
            lines.append(line)
    item = make(lines)
    if item is not None:
        yield item
