"""Writer of a batch results file: one process appends blocks of results, crash-safely.

Crash safety
------------
The file is written in HDF5's single-writer/multiple-reader (SWMR) mode: HDF5 then orders its
metadata writes so that the file on disk is readable at every instant, which is also what a
``kill -9`` leaves behind (the operating system keeps what the process had written). A block is
committed in two steps: (1) the rows of every table are appended and the file is flushed; (2) one
row of sizes (the length of every dataset after the block, with a check value) is appended to the
``commits`` log and the file is flushed again. Readers trust only the last commit row whose check
value verifies and take every dataset up to its committed length; anything beyond is ignored, and
is cut away when a run resumes. A file left by a killed writer keeps HDF5's "open for writing" flag,
so it can only be opened in SWMR-read mode; resuming copies its committed rows into a fresh file.
"""
from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import h5py
import numpy as np

from ..errors import StorageError
from . import schema as S
from .worker import ChunkResult, STATE_FIELDS

LIBVER = ("v110", "v110")  # SWMR needs the HDF5 1.10 file format; files open with HDF5 >= 1.10
_COMPRESSION = {"compression": "gzip", "compression_opts": 4, "shuffle": True, "fletcher32": True}
_CHUNK_ROWS = {"molecules": 8192, "states": 32768, "bytes": 1 << 18, "heavy": 1 << 16}


def now_utc() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def _key_hash(key: str) -> int:
    # 64-bit hash of a record key (Python's str hash is salted per process, so it cannot be used)
    import hashlib
    return int.from_bytes(hashlib.blake2b(key.encode(), digest_size=8).digest(), "little")


class KeyIndex:
    """Key hash -> source number of its first row, for duplicate detection over a whole results file.

    16 bytes per key in sorted numpy arrays (a Python dict would take about 150), so the writer's memory
    stays nearly flat up to millions of molecules: new keys go to a small dict that is merged into the
    sorted arrays when it reaches ``merge_at`` entries.
    """

    def __init__(self, merge_at: int = 65536):
        self.hashes = np.zeros(0, np.uint64)
        self.sources = np.zeros(0, np.int64)
        self.recent: dict[int, int] = {}
        self.merge_at = merge_at

    def __len__(self) -> int:
        return len(self.hashes) + len(self.recent)

    def get(self, h: int) -> int | None:
        src = self.recent.get(h)
        if src is not None or not len(self.hashes):
            return src
        pos = int(np.searchsorted(self.hashes, np.uint64(h)))
        if pos < len(self.hashes) and int(self.hashes[pos]) == h:
            return int(self.sources[pos])
        return None

    def setdefault(self, h: int, source: int) -> int:
        first = self.get(h)
        if first is not None:
            return first
        self.recent[h] = source
        if len(self.recent) >= self.merge_at:
            self._merge()
        return source

    def _merge(self) -> None:
        h = np.concatenate([self.hashes, np.fromiter(self.recent.keys(), np.uint64, len(self.recent))])
        s = np.concatenate([self.sources, np.fromiter(self.recent.values(), np.int64, len(self.recent))])
        order = np.argsort(h, kind="stable")
        self.hashes, self.sources = h[order], s[order]
        self.recent = {}


def _create_datasets(h5: h5py.File, heavy: bool, version: int) -> None:
    def make(path: str, dtype, shape: tuple, chunk_rows: int):
        h5.create_dataset(path, shape=(0,) + shape, maxshape=(None,) + shape, dtype=dtype,
                          chunks=(chunk_rows,) + shape, **_COMPRESSION)

    for name, dt in S.MOLECULE_NUMERIC:
        make(f"molecules/{name}", dt, (), _CHUNK_ROWS["molecules"])
    for name in S.molecule_text(version):
        make(f"molecules/{name}/bytes", np.uint8, (), _CHUNK_ROWS["bytes"])
        make(f"molecules/{name}/end", np.int64, (), _CHUNK_ROWS["molecules"])
    for name, dt, shape in S.STATE_COLUMNS:
        make(f"states/{name}", dt, shape, _CHUNK_ROWS["states"])
    if heavy:
        for name, dt in S.HEAVY_CHROMOPHORES:
            make(f"heavy/chromophores/{name}", dt, (), _CHUNK_ROWS["molecules"])
        for name, (dt, shape, _) in S.HEAVY_ARRAYS.items():
            make(f"heavy/{name}", dt, shape, _CHUNK_ROWS["heavy"])
    paths = S.dataset_paths(heavy, version)
    n = len(paths)
    log = h5.create_dataset("commits", shape=(0, n + 2), maxshape=(None, n + 2), dtype=np.int64,
                            chunks=(64, n + 2), fletcher32=True)
    log.attrs["columns"] = json.dumps(["block"] + paths + ["check"])


def _new_file(path: Path) -> h5py.File:
    """New HDF5 file in the 1.10 format whose root attributes stay in the (checksummed) root object
    header instead of moving to dense storage after 8 of them: a damaged file then fails its
    checksums rather than sending attribute iteration into corrupt heap blocks."""
    fapl = h5py.h5p.create(h5py.h5p.FILE_ACCESS)
    fapl.set_libver_bounds(h5py.h5f.LIBVER_V110, h5py.h5f.LIBVER_V110)
    fapl.set_fclose_degree(h5py.h5f.CLOSE_STRONG)
    fapl.set_cache(0, 521, 0, 0.75)  # no raw-chunk cache: blocks are written once, whole
    fcpl = h5py.h5p.create(h5py.h5p.FILE_CREATE)
    fcpl.set_attr_phase_change(64, 48)
    fid = h5py.h5f.create(str(path).encode(), h5py.h5f.ACC_TRUNC, fcpl=fcpl, fapl=fapl)
    return h5py.File(fid)


class ResultsWriter:
    """Appends :class:`~ppp.batch.worker.ChunkResult` objects in input order; the only writer.

    Use :meth:`create` for a new file or :meth:`append_to` for a cleanly closed one; then
    :meth:`add` chunks, :meth:`commit` blocks and finally :meth:`close`.
    """

    def __init__(self, h5: h5py.File, path: Path):
        self.h5, self.path = h5, path
        self.heavy = bool(h5.attrs["heavy"])
        self.version = int(h5.attrs.get("format_version", 1))
        self.text_columns = S.molecule_text(self.version)
        self.unit = "record" if h5.attrs.get("input_format") == "sdf" else "line"
        self.paths = S.dataset_paths(self.heavy, self.version)
        self.ds = {p: h5[p] for p in self.paths}
        self.log = h5["commits"]
        self.sizes = {p: self.ds[p].shape[0] for p in self.paths}
        self.blocks = self.log.shape[0]
        self.seen = KeyIndex()  # key hash -> source number of its first row
        self.pending: list[ChunkResult] = []
        self.pending_rows = 0
        self.rows_added = 0
        self.counts: dict[str, int] = {}  # error kinds (and "ok") written by this writer

    # -- opening -------------------------------------------------------------------------------
    @classmethod
    def create(cls, path: str | Path, attrs: dict, parameter_text: str,
               version: int = S.FORMAT_VERSION) -> "ResultsWriter":
        """New file at ``path`` (replaced if present: the caller checks permission).

        ``version``: format version of the new file; an older one only to copy rows of a file of that
        version (salvage, merge, compaction), so that its rows never claim a column they lacked.
        """
        path = Path(path)
        if version not in S.READABLE_VERSIONS:
            raise StorageError(f"cannot write results format version {version} (this ppp writes "
                               f"{', '.join(map(str, S.READABLE_VERSIONS))})")
        try:
            h5 = _new_file(path)
            # root attributes are written once, here, and never changed (the root object header then
            # stays at the start of the file, where a truncated file still has it); what changes from
            # run to run lives on the group /run
            static = {k: v for k, v in attrs.items() if k not in S.VOLATILE_ATTRS}
            h5.attrs.update({"format": S.FORMAT, "format_version": version})
            h5.attrs.update(static)
            run = h5.create_group("run")
            run.attrs.update({"status": "running", "created": now_utc(), "finished": "", "history": "[]"})
            run.attrs.update({k: v for k, v in attrs.items() if k in S.VOLATILE_ATTRS})
            h5.create_dataset("parameter_file", data=np.frombuffer(parameter_text.encode(), np.uint8))
            # the root attributes again as JSON text in a small dataset: salvage reads this copy
            prov = {k: (v.item() if isinstance(v, np.generic) else v) for k, v in h5.attrs.items()}
            prov["created"] = str(run.attrs["created"])
            h5.create_dataset("provenance", data=np.frombuffer(json.dumps(prov).encode(), np.uint8))
            _create_datasets(h5, bool(attrs["heavy"]), version)
            h5.flush()
            h5.swmr_mode = True
        except OSError as exc:
            raise StorageError(f"cannot create '{path}': {exc}") from None
        return cls(h5, path)

    @classmethod
    def append_to(cls, path: str | Path, committed: dict[str, int]) -> "ResultsWriter":
        """Reopen a cleanly closed file for appending, cutting every dataset to its committed size.

        Only a file of the current format version: rows computed now must not lose a column (the batch
        runner refuses an older file with a message saying what to do before it gets here)."""
        path = Path(path)
        try:
            h5 = h5py.File(path, "r+", libver=LIBVER, rdcc_nbytes=0)
            version = int(h5.attrs.get("format_version", 1))
            if version != S.FORMAT_VERSION:
                h5.close()
                raise StorageError(f"'{path}' has results format version {version}; this ppp appends only to "
                                   f"version {S.FORMAT_VERSION}")
            h5["run"].attrs["status"] = "running"
            for p in S.dataset_paths(bool(h5.attrs["heavy"])):
                h5[p].resize(committed[p], axis=0)
            n_blocks = committed["__blocks__"]
            h5["commits"].resize(n_blocks, axis=0)
            h5.flush()
            h5.swmr_mode = True
        except (OSError, KeyError) as exc:
            raise StorageError(f"cannot reopen '{path}' for appending: {exc}") from None
        w = cls(h5, path)
        n = committed["molecules/input_index"]
        for start in range(0, n, 65536):  # in slices: memory stays flat for any file size
            stop = min(start + 65536, n)
            keys = _read_text(h5, "key", start, stop)
            kinds = _read_text(h5, "error_kind", start, stop)
            sources = h5["molecules/source"][start:stop]
            for k, src, kind in zip(keys, sources, kinds):
                if kind == "":
                    w.seen.setdefault(_key_hash(k), int(src))
        return w

    # -- writing -------------------------------------------------------------------------------
    def add(self, chunk: ChunkResult) -> None:
        """Queue a chunk (the next in input order) for the current block."""
        self.pending.append(chunk)
        self.pending_rows += len(chunk)

    def commit(self) -> int:
        """Write the queued chunks as one block, flush, then log the block. Returns rows written."""
        if not self.pending:
            return 0
        chunks, self.pending, self.pending_rows = self.pending, [], 0
        try:
            n = self._write_block(chunks)
            self.h5.flush()
            self.blocks += 1
            sizes = [self.sizes[p] for p in self.paths]
            self.log.resize(self.blocks, axis=0)
            self.log[self.blocks - 1] = [self.blocks] + sizes + [S.commit_check(self.blocks, sizes)]
            self.h5.flush()
        except OSError as exc:
            raise StorageError(f"cannot write to '{self.path}': {exc}") from None
        self.rows_added += n
        return n

    def _append(self, path: str, data: np.ndarray) -> None:
        n0 = self.sizes[path]
        n = len(data)
        if n:
            ds = self.ds[path]
            ds.resize(n0 + n, axis=0)
            ds[n0:n0 + n] = data
        self.sizes[path] = n0 + n

    def _append_text(self, name: str, values: list[str]) -> None:
        enc = [v.encode("utf-8") for v in values]
        lengths = np.fromiter((len(b) for b in enc), np.int64, len(enc))
        start = self.sizes[f"molecules/{name}/bytes"]
        self._append(f"molecules/{name}/bytes", np.frombuffer(b"".join(enc), np.uint8))
        self._append(f"molecules/{name}/end", start + np.cumsum(lengths))

    def _write_block(self, chunks: list[ChunkResult]) -> int:
        cat = np.concatenate
        index = cat([c.index for c in chunks])
        source = cat([c.source for c in chunks])
        n = len(index)
        text = {name: [v for c in chunks for v in getattr(c, name)] for name in self.text_columns}
        bad = [name for name in self.text_columns if len(text[name]) != n]
        if bad:  # a programming error (a ChunkResult built by hand without every column): nothing written
            raise StorageError(f"cannot write to '{self.path}': text column(s) {', '.join(bad)} do not have "
                               f"one entry per molecule")
        ints = cat([c.ints for c in chunks])
        floats = cat([c.floats for c in chunks])
        n_states = cat([c.n_states for c in chunks])
        states = {f: cat([c.states[f] for c in chunks]) for f in STATE_FIELDS}
        heavy = [h for c in chunks for h in (c.heavy or [])] if self.heavy else None
        # duplicates: a key already used by an earlier row makes this row a failed "duplicate"
        keep = np.ones(n, bool)
        for i in range(n):
            kind = text["error_kind"][i]
            if kind and kind != "duplicate":
                continue  # failed rows keep their own reason and do not claim their key
            h = _key_hash(text["key"][i])
            first = self.seen.get(h)
            if first is None:
                if not kind:
                    self.seen.setdefault(h, int(source[i]))
                continue
            # (a row already marked duplicate, e.g. in a shard file, gets its message renewed so that it
            # names the first occurrence over the whole input)
            keep[i] = False
            text["error_kind"][i] = "duplicate"
            text["error_message"][i] = (f"{self.unit} {int(source[i])}: key '{text['key'][i]}' already used by "
                                        f"{self.unit} {first}")
            if "warnings" in text:
                text["warnings"][i] = ""  # a failed row has no result, so no warnings
        status = np.where([k == "" for k in text["error_kind"]], S.OK, S.FAILED).astype(np.int8)
        if not keep.all():
            state_keep = np.repeat(keep, n_states)
            states = {f: a[state_keep] for f, a in states.items()}
            ints = ints.copy()
            floats = floats.copy()
            ints[~keep] = 0
            floats[~keep] = np.nan
            n_states = np.where(keep, n_states, 0)
            if heavy is not None:
                heavy = [h if k else [] for h, k in zip(heavy, keep)]
        state_start = self.sizes["states/energy_ev"] + cat([[0], np.cumsum(n_states)[:-1]])
        n_chrom = [len(h) for h in heavy] if heavy is not None else None
        heavy_start = (self.sizes["heavy/chromophores/molecule"] + cat([[0], np.cumsum(n_chrom)[:-1]])
                       if heavy is not None else np.full(n, -1))
        mol_row0 = self.sizes["molecules/input_index"]
        cols = {"input_index": index, "source": source, "status": status, "n_chromophores": ints[:, 0],
                "n_centres": ints[:, 1], "n_electrons": ints[:, 2], "state_start": state_start,
                "state_count": n_states, "heavy_start": heavy_start}
        cols.update({name: floats[:, j] for j, name in enumerate(S.SUMMARY_FLOATS)})
        for name, dt in S.MOLECULE_NUMERIC:
            self._append(f"molecules/{name}", np.asarray(cols[name], dt))
        for name in self.text_columns:
            self._append_text(name, text[name])
        for name, dt, _ in S.STATE_COLUMNS:
            self._append(f"states/{name}", np.asarray(states[name], dt))
        if heavy is not None:
            self._write_heavy(heavy, mol_row0)
        for kind in text["error_kind"]:
            self.counts[kind or "ok"] = self.counts.get(kind or "ok", 0) + 1
        return n

    def _write_heavy(self, heavy: list[list[dict]], mol_row0: int) -> None:
        rows = {name: [] for name, _ in S.HEAVY_CHROMOPHORES}
        flat = {name: [] for name in S.HEAVY_ARRAYS}
        offs = {"vec_start": self.sizes["heavy/atom_indices"], "mat_start": self.sizes["heavy/core_ev"],
                "ci_singlet_start": self.sizes["heavy/singlet_amplitudes"],
                "ci_triplet_start": self.sizes["heavy/triplet_amplitudes"]}
        for m, chroms in enumerate(heavy):
            for c in chroms:
                nc = len(c["atom_indices"])
                sa, ta = c["singlet_amplitudes"], c["triplet_amplitudes"]
                vals = {"molecule": mol_row0 + m, "chromophore": c["chromophore"], "n_centres": nc,
                        "n_occ": c["n_occ"], "n_singlets": len(sa), "n_triplets": len(ta),
                        "e_total_ev": c["e_total_ev"], **offs}
                for name, _ in S.HEAVY_CHROMOPHORES:
                    rows[name].append(vals[name])
                for name in S.HEAVY_ARRAYS:
                    a = c[name]
                    flat[name].append(a.reshape(-1, 3) if name == "coordinates_angstrom" else a.ravel())
                offs["vec_start"] += nc
                offs["mat_start"] += nc * nc
                offs["ci_singlet_start"] += sa.size
                offs["ci_triplet_start"] += ta.size
        for name, dt in S.HEAVY_CHROMOPHORES:
            self._append(f"heavy/chromophores/{name}", np.asarray(rows[name], dt))
        for name, (dt, shape, _) in S.HEAVY_ARRAYS.items():
            data = np.concatenate(flat[name]) if flat[name] else np.zeros((0,) + shape)
            self._append(f"heavy/{name}", np.asarray(data, dt))

    # -- closing -------------------------------------------------------------------------------
    def close(self, complete: bool, run_record: dict | None = None) -> None:
        """Commit what is queued, close, then (outside SWMR mode) record status and history."""
        try:
            self.commit()
        finally:
            self.h5.close()
        try:
            with h5py.File(self.path, "r+", libver=LIBVER) as h5:
                run = h5["run"].attrs
                if complete:
                    run["status"] = "complete"
                    run["finished"] = now_utc()
                else:
                    run["status"] = "incomplete"
                if run_record is not None:
                    hist = json.loads(run.get("history", "[]"))
                    hist.append(run_record)
                    run["history"] = json.dumps(hist)
        except OSError as exc:
            raise StorageError(f"cannot finalise '{self.path}': {exc}") from None


def _read_text(h5, name: str, start: int, stop: int) -> list[str]:
    """Rows start:stop of a text column."""
    if stop <= start:
        return []
    end = h5[f"molecules/{name}/end"][max(start - 1, 0):stop]
    first = int(end[0]) if start > 0 else 0
    end = end[1:] if start > 0 else end
    blob = h5[f"molecules/{name}/bytes"][first:int(end[-1])].tobytes()
    starts = np.concatenate([[first], end[:-1]]) - first
    return [blob[s:e].decode("utf-8") for s, e in zip(starts.tolist(), (end - first).tolist())]
