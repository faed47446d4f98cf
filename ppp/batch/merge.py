"""Join shard files of one library (``ppp batch --shard K/N``) into one results file.

Rows are ordered by input position and each input appears once (a row present in two files, e.g. a
shard given twice, is kept from the first file). The duplicate-key rule of a single run is applied
again over the joined rows, so the merged file holds the same rows as an unsharded run.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import StorageError
from . import schema as S
from .reader import ResultsFile
from .runner import IDENTITY_ATTRS
from .store import ResultsWriter
from .worker import STATE_FIELDS, ChunkResult


def concat(chunks: list[ChunkResult]) -> ChunkResult:
    """One ChunkResult holding the rows of several, in order."""
    cat = np.concatenate
    out = ChunkResult(index=cat([c.index for c in chunks]), source=cat([c.source for c in chunks]))
    for name in S.MOLECULE_TEXT:
        setattr(out, name, [v for c in chunks for v in getattr(c, name)])
    out.ints = cat([c.ints for c in chunks])
    out.floats = cat([c.floats for c in chunks])
    out.n_states = cat([c.n_states for c in chunks])
    out.states = {f: cat([c.states[f] for c in chunks]) for f in STATE_FIELDS}
    out.heavy = None if chunks[0].heavy is None else [h for c in chunks for h in c.heavy]
    return out


def take(chunk: ChunkResult, rows: np.ndarray) -> ChunkResult:
    """Rows ``rows`` (indices, any order) of a chunk, with their states and heavy data."""
    starts = np.concatenate([[0], np.cumsum(chunk.n_states)[:-1]]).astype(np.int64)
    sel = np.concatenate([np.arange(starts[r], starts[r] + chunk.n_states[r]) for r in rows]
                         + [np.zeros(0, np.int64)]).astype(np.int64)
    out = ChunkResult(index=chunk.index[rows], source=chunk.source[rows])
    for name in S.MOLECULE_TEXT:
        vals = getattr(chunk, name)
        setattr(out, name, [vals[r] for r in rows])
    out.ints, out.floats, out.n_states = chunk.ints[rows], chunk.floats[rows], chunk.n_states[rows]
    out.states = {f: a[sel] for f, a in chunk.states.items()}
    out.heavy = None if chunk.heavy is None else [chunk.heavy[r] for r in rows]
    return out


def merge(files: list[str | Path], out: str | Path, overwrite: bool = False, window: int = 8192) -> dict:
    """Join results files of shards of one library. Returns a small report dict."""
    out = Path(out)
    if not files:
        raise StorageError("merge needs at least one results file")
    if out.exists() and not overwrite:
        raise StorageError(f"'{out}' exists; add --overwrite to replace it")
    if any(Path(f).resolve() == out.resolve() for f in files):
        raise StorageError("the merged file must be a new file, not one of the inputs")
    srcs = [ResultsFile(f) for f in files]
    try:
        first = srcs[0].attrs
        for rf in srcs[1:]:
            diff = [k for k in IDENTITY_ATTRS if k != "shard" and str(rf.attrs.get(k)) != str(first.get(k))]
            if diff:
                raise StorageError(f"'{rf.path}' and '{srcs[0].path}' come from different runs "
                                   f"(differ in: {', '.join(diff)})")
        versions = sorted({rf.version for rf in srcs})
        if len(versions) > 1:
            old = next(rf for rf in srcs if rf.version == versions[0])
            raise StorageError(f"'{old.path}' has results format version {old.version}, older than the other "
                               f"files' (written by an older ppp, without per-molecule warnings): recompute that "
                               f"shard with this ppp (add --overwrite) and merge again")
        total = int(first["input_records"])
        indices = [rf.column("input_index") for rf in srcs]
        present = np.unique(np.concatenate(indices)) if indices else np.zeros(0, np.int64)
        complete = len(present) == total and all(not rf.interrupted for rf in srcs)
        attrs = {k: v for k, v in first.items()
                 if k not in ("format", "format_version", "status", "created", "finished", "history")}
        attrs.update(shard="1/1" if complete else "merged", expected_rows=total,
                     merged_from=", ".join(str(rf.path) for rf in srcs))
        text = srcs[0].h5["parameter_file"][()].tobytes().decode()
        tmp = out.with_name(f".{out.name}.merge.tmp")
        writer = ResultsWriter.create(tmp, attrs, text, version=versions[0])
        kept = 0
        try:
            for lo in range(0, total, window):
                hi = lo + window
                parts = []
                for rf, idx in zip(srcs, indices):
                    a, b = np.searchsorted(idx, lo), np.searchsorted(idx, hi)
                    if b > a:
                        parts.append(rf.chunk(int(a), int(b)))
                if not parts:
                    continue
                joined = concat(parts)
                # first occurrence of each input index, in input order (stable sort keeps file order)
                order = np.argsort(joined.index, kind="stable")
                _, first_pos = np.unique(joined.index[order], return_index=True)
                rows = order[first_pos]
                writer.add(take(joined, rows))
                writer.commit()
                kept += len(rows)
        finally:
            writer.close(complete=complete)
        tmp.replace(out)
    finally:
        for rf in srcs:
            rf.close()
    return {"rows": kept, "expected": total, "complete": complete,
            "duplicates_dropped": int(sum(len(i) for i in indices) - kept)}
