"""Structures in: SMILES strings and MOL/SDF records, turned into sanitized RDKit molecules.

RDKit's own log output is silenced; every failure becomes a :class:`~ppp.errors.ParseError` whose
reason says what is wrong.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from rdkit import Chem, rdBase

from ..errors import ParseError


def _sanitize(mol: Chem.Mol, what: str) -> Chem.Mol:
    try:
        Chem.SanitizeMol(mol)
    except Exception as exc:  # RDKit raises several exception classes; all mean "chemically invalid"
        msg = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
        raise ParseError(f"invalid {what}: {msg}") from None
    return mol


def mol_from_smiles(smiles: str) -> Chem.Mol:
    """Parse and sanitize a SMILES string. Raises ParseError with a reason."""
    if not isinstance(smiles, str) or not smiles.strip():
        raise ParseError("empty SMILES")
    text = smiles.strip()
    if len(text.split(maxsplit=1)) > 1:  # white space inside (str.split splits where str.isspace holds)
        raise ParseError("unparsable SMILES (contains white space)")
    with rdBase.BlockLogs():
        mol = Chem.MolFromSmiles(text, sanitize=False)
        if mol is None:
            raise ParseError("unparsable SMILES (syntax)")
        mol = _sanitize(mol, "structure")
    if mol.GetNumAtoms() == 0:
        raise ParseError("empty molecule")
    return mol


@dataclass(frozen=True)
class Record:
    """One record read from a MOL/SDF file: a molecule, or the error that stopped it."""

    label: str
    number: int  # 1-based record number in the file
    mol: Chem.Mol | None
    error: ParseError | None


def read_molfile(path: str | Path) -> list[Record]:
    """Read every record of a MOL or SDF file (hydrogens kept as given, coordinates kept).

    Each record comes back as a :class:`Record` holding a molecule or its error, so that one bad
    record never hides the others. A missing or empty file raises ParseError.
    """
    p = Path(path)
    if not p.is_file():
        raise ParseError(f"file '{p}' does not exist")
    try:
        raw = p.read_bytes()
    except OSError as exc:
        raise ParseError(f"cannot read '{p}': {exc.strerror}") from None
    if raw[:2] == b"\x1f\x8b":  # gzip-compressed (.sdf.gz), recognised by content as batch input is
        import gzip
        import zlib
        try:
            raw = gzip.decompress(raw)
        except (OSError, EOFError, zlib.error) as exc:
            raise ParseError(f"'{p}' is a damaged gzip file: {exc}") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        try:
            text = raw.decode("latin-1")
        except UnicodeDecodeError:  # pragma: no cover - latin-1 decodes every byte
            raise ParseError(f"'{p}' is not a text MOL/SDF file") from None
    if "\x00" in text:
        raise ParseError(f"'{p}' is not a text MOL/SDF file (binary content)")
    if not text.strip():
        raise ParseError(f"'{p}' is empty")
    blocks = _split_records(text)
    records = []
    for k, block in enumerate(blocks, start=1):
        title = block.splitlines()[0].strip() if block.splitlines() else ""
        label = title or f"{p.name}#{k}"
        if "M  END" not in block:
            err = ParseError(f"record {k} of '{p.name}' is truncated (no 'M  END' line)").with_molecule(label)
            records.append(Record(label, k, None, err))
            continue
        with rdBase.BlockLogs():
            mol = Chem.MolFromMolBlock(block, sanitize=False, removeHs=False, strictParsing=True)
        if mol is None:
            err = ParseError(f"record {k} of '{p.name}' is not a valid MOL block").with_molecule(label)
            records.append(Record(label, k, None, err))
            continue
        try:
            with rdBase.BlockLogs():
                mol = _sanitize(mol, f"record {k} of '{p.name}'")
        except ParseError as err:
            records.append(Record(label, k, None, err.with_molecule(label)))
            continue
        if mol.GetNumAtoms() == 0:
            err = ParseError(f"record {k} of '{p.name}' has no atoms").with_molecule(label)
            records.append(Record(label, k, None, err))
            continue
        records.append(Record(label, k, mol, None))
    if not records:
        raise ParseError(f"'{p}' holds no MOL record")
    return records


def _split_records(text: str) -> list[str]:
    """Split SDF text on '$$$$' lines; a plain MOL file is one record. Blank tail blocks are dropped."""
    blocks, current = [], []
    for line in text.splitlines():
        if line.strip() == "$$$$":
            blocks.append("\n".join(current))
            current = []
        else:
            current.append(line)
    if any(line.strip() for line in current):
        blocks.append("\n".join(current))
    return [b for b in blocks if b.strip()]
