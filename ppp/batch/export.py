"""Export the molecules table of a results file (with S1, T1 and the brightest band) to CSV or Parquet.

Rows are streamed in slices, so a file of a million molecules never sits in memory whole.
"""
from __future__ import annotations

import csv
import math
from pathlib import Path

import numpy as np

from ..errors import InputError, StorageError
from . import schema as S
from .reader import ResultsFile

#: exported columns, in order (text columns are decoded; "status" becomes ok/failed; "warnings" is last,
#: so that the columns before it keep their positions of format version 1; a molecule's warnings are
#: joined by schema.WARNING_SEPARATOR, " | ")
COLUMNS = ("key", "name", "input_index", "source", "status", "error_kind", "error_message", "smiles",
           "canonical_smiles", "n_chromophores", "n_centres", "n_electrons", "homo_ev", "lumo_ev",
           "s1_ev", "s1_nm", "s1_f", "t1_ev", "t1_nm", "bright_ev", "bright_nm", "bright_f", "warnings")
STATUS_FILTERS = ("all", "ok", "failed")
_TEXT = set(S.MOLECULE_TEXT)


def _slices(rf: ResultsFile, status: str, rows: int):
    n = rf.n_rows
    for start in range(0, n, rows):
        stop = min(start + rows, n)
        st = rf.column("status", start, stop)
        keep = np.ones(len(st), bool) if status == "all" else (st == (S.OK if status == "ok" else S.FAILED))
        if not keep.any():
            continue
        out = {}
        for name in COLUMNS:
            if name == "status":
                out[name] = [S.STATUS_NAMES[int(v)] for v in st[keep]]
            elif name in _TEXT:
                vals = rf.text(name, start, stop)
                out[name] = [v for v, k in zip(vals, keep) if k]
            else:
                out[name] = rf.column(name, start, stop)[keep]
        yield out


def _cell(v) -> str:
    if isinstance(v, float):
        return "" if math.isnan(v) else repr(v)
    return str(v)


def export(path: str | Path, out: str | Path, fmt: str | None = None, status: str = "all",
           overwrite: bool = False, rows: int = 65536) -> int:
    """Write the molecules table of ``path`` to ``out`` (CSV, or Parquet when ``fmt`` or the suffix says
    so). Returns the number of rows written. NaN (no such state) becomes an empty CSV cell / a null."""
    out = Path(out)
    if status not in STATUS_FILTERS:
        raise InputError(f"status filter must be one of {', '.join(STATUS_FILTERS)}, got '{status}'")
    fmt = fmt or ("parquet" if out.suffix.lower() in (".parquet", ".pq") else "csv")
    if fmt not in ("csv", "parquet"):
        raise InputError(f"export format must be csv or parquet, got '{fmt}'")
    if out.exists() and out.resolve() == Path(path).resolve():
        raise StorageError(f"the export '{out}' would replace the results file itself; choose another name")
    if out.exists() and not overwrite:
        raise StorageError(f"'{out}' exists; add --overwrite to replace it")
    tmp = out.with_name(f".{out.name}.tmp")
    n = 0
    with ResultsFile(path) as rf:
        if fmt == "parquet":
            try:
                import pyarrow as pa
                import pyarrow.parquet as pq
            except ImportError:
                raise InputError("Parquet export needs pyarrow (pip install pyarrow); CSV works without it") from None
            writer = None
            try:
                for part in _slices(rf, status, rows):
                    table = pa.table({k: (pa.array(v, from_pandas=True) if not isinstance(v, list) else pa.array(v, pa.string()))
                                      for k, v in part.items()})
                    if writer is None:
                        writer = pq.ParquetWriter(tmp, table.schema)
                    writer.write_table(table)
                    n += table.num_rows
                if writer is None:
                    empty = {k: pa.array([], pa.string() if (k in _TEXT or k == "status") else pa.float64())
                             for k in COLUMNS}
                    pq.write_table(pa.table(empty), tmp)
            finally:
                if writer is not None:
                    writer.close()
        else:
            with open(tmp, "w", newline="", encoding="utf-8") as fh:
                w = csv.writer(fh)
                w.writerow(COLUMNS)
                for part in _slices(rf, status, rows):
                    cols = [part[c].tolist() if isinstance(part[c], np.ndarray) else part[c] for c in COLUMNS]
                    for row in zip(*cols):
                        w.writerow([_cell(v) for v in row])
                        n += 1
    tmp.replace(out)
    return n
