"""Reading batch results files, checking them, and salvaging damaged ones.

Only committed rows are ever returned (see :mod:`ppp.batch.store`). A file that is not HDF5, is cut
short, or whose data fail their checksums raises :class:`~ppp.errors.StorageError` with one clear line
naming the file and pointing to ``ppp salvage``.
"""
from __future__ import annotations

import json
import shutil
import tempfile
from pathlib import Path

import h5py
import numpy as np

from ..errors import StorageError
from . import schema as S
from .worker import ChunkResult

_READ_ERRORS = (OSError, KeyError, ValueError, RuntimeError, TypeError, IndexError, UnicodeDecodeError)
_HDF5_SIGNATURE = b"\x89HDF\r\n\x1a\n"


def _damaged(path, what: str) -> StorageError:
    err = StorageError(f"'{path}' is damaged or truncated ({what}); "
                       f"'ppp salvage {path} -o NEW.h5' recovers the results it still holds")
    err.detail = what
    return err


class ResultsFile:
    """An open batch results file (read only). Use as a context manager.

    Attributes
    ----------
    attrs : dict of the file's attributes
    interrupted : True when the writer did not close the file (killed, crashed, or still running)
    committed : dataset path -> committed length, plus "__blocks__"
    version : format version of the file (1: no ``warnings`` column; it reads as "" on every row)
    """

    def __init__(self, path: str | Path, salvaging: bool = False):
        self.path = Path(path)
        if not self.path.is_file():
            raise StorageError(f"results file '{self.path}' does not exist")
        self.interrupted = False
        try:
            self.h5 = h5py.File(self.path, "r")
        except OSError as exc:
            msg = str(exc)
            if "already open for write" not in msg and "consistency flags" not in msg:
                if not _looks_like_hdf5(self.path):
                    raise StorageError(f"'{self.path}' is not an HDF5 file") from None
                raise _damaged(self.path, _first_line(msg)) from None
            try:
                self.h5 = h5py.File(self.path, "r", swmr=True)
            except OSError as exc2:
                raise _damaged(self.path, _first_line(str(exc2))) from None
            self.interrupted = True
        try:
            if salvaging:  # the creation-time copy, written near the start of the file
                self.attrs = json.loads(self.h5["provenance"][()].tobytes().decode())
            else:
                self.attrs = {k: _plain(v) for k, v in self.h5.attrs.items()}
                if "run" in self.h5:
                    self.attrs.update({k: _plain(v) for k, v in self.h5["run"].attrs.items()})
            if self.attrs.get("format") != S.FORMAT:
                raise StorageError(f"'{self.path}' is not a ppp batch results file")
            self.version = int(self.attrs.get("format_version", 1))
            if self.version > S.FORMAT_VERSION:
                raise StorageError(f"'{self.path}' has format version {self.version}; "
                                   f"this ppp reads up to {S.FORMAT_VERSION}: update ppp to read it")
            if self.version not in S.READABLE_VERSIONS:
                raise StorageError(f"'{self.path}' has format version {self.version}, which this ppp "
                                   f"does not read")
            self.heavy = bool(self.attrs["heavy"])
            self.text_columns = S.molecule_text(self.version)
            self.paths = S.dataset_paths(self.heavy, self.version)
            try:
                self.committed = self._committed()
            except _READ_ERRORS:
                if not salvaging:
                    raise
                # commit log lost: offer every row the datasets hold; salvage validates block by block
                self.committed = {p: int(self.h5[p].shape[0]) for p in self.paths}
                self.committed["__blocks__"] = -1
        except StorageError:
            self.h5.close()
            raise
        except _READ_ERRORS as exc:
            self.h5.close()
            raise _damaged(self.path, _first_line(str(exc))) from None

    def _committed(self) -> dict[str, int]:
        log = self.h5["commits"][()]
        shapes = [self.h5[p].shape[0] for p in self.paths]
        if log.ndim != 2 or log.shape[1] != len(self.paths) + 2:
            raise _damaged(self.path, "commit log has the wrong shape")
        for row in range(log.shape[0] - 1, -1, -1):
            block, sizes, check = int(log[row, 0]), log[row, 1:-1], int(log[row, -1])
            if block == row + 1 and check == S.commit_check(block, sizes) and all(
                    0 <= s <= n for s, n in zip(sizes, shapes)):
                out = dict(zip(self.paths, (int(s) for s in sizes)))
                out["__blocks__"] = row + 1
                return out
        out = dict.fromkeys(self.paths, 0)
        out["__blocks__"] = 0
        return out

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    def close(self) -> None:
        self.h5.close()

    # -- summary -----------------------------------------------------------------------------------
    @property
    def n_rows(self) -> int:
        return self.committed["molecules/input_index"]

    @property
    def complete(self) -> bool:
        return self.attrs.get("status") == "complete" and not self.interrupted

    @property
    def options(self) -> dict:
        return json.loads(self.attrs["options"])

    def parameter_set(self):
        """The parameter set the file was computed with, from the copy of its file the results file keeps
        (:class:`ppp.model.params.ParameterSet`; the same hash as the file it was read from)."""
        from ..model import params
        try:
            raw = self.h5["parameter_file"][()].tobytes()
        except _READ_ERRORS as exc:
            raise _damaged(self.path, f"parameter_file: {_first_line(str(exc))}") from None
        return params.from_bytes(raw, f"{self.path.name}:parameter_file")

    def block_rows(self) -> list[int]:
        """Molecule count after each committed block."""
        if self.committed["__blocks__"] < 0:  # no usable commit log (salvage): whole chunks
            n = self.n_rows
            return list(range(8192, n, 8192)) + [n]
        col = 1 + self.paths.index("molecules/input_index")
        return [int(x) for x in self.h5["commits"][: self.committed["__blocks__"], col]]

    # -- columns -----------------------------------------------------------------------------------
    def column(self, name: str, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Committed rows of a numeric column of the molecules table."""
        stop = self.n_rows if stop is None else min(stop, self.n_rows)
        try:
            return self.h5[f"molecules/{name}"][start:stop]
        except _READ_ERRORS as exc:
            raise _damaged(self.path, f"molecules/{name}: {_first_line(str(exc))}") from None

    def text(self, name: str, start: int = 0, stop: int | None = None) -> list[str]:
        """Committed rows of a text column of the molecules table.

        A column that the file's format version lacks (``warnings`` in version 1) reads as ""."""
        stop = self.n_rows if stop is None else min(stop, self.n_rows)
        if stop <= start:
            return []
        if name in S.MOLECULE_TEXT and name not in self.text_columns:
            return [""] * (stop - start)
        try:
            ends = self.h5[f"molecules/{name}/end"][max(start - 1, 0):stop]
            first = int(ends[0]) if start > 0 else 0
            ends = ends[1:] if start > 0 else ends
            blob = self.h5[f"molecules/{name}/bytes"][first:int(ends[-1])].tobytes()
            starts = np.concatenate([[first], ends[:-1]]) - first
            return [blob[s:e].decode("utf-8") for s, e in zip(starts.tolist(), (ends - first).tolist())]
        except _READ_ERRORS as exc:
            raise _damaged(self.path, f"molecules/{name}: {_first_line(str(exc))}") from None

    def warnings(self, start: int = 0, stop: int | None = None) -> list[tuple[str, ...]]:
        """Committed rows' warnings (``MoleculeResult.warnings`` of each molecule, in that order; empty
        for a molecule without warnings, a failed one, and every row of a format-version-1 file)."""
        return [S.split_warnings(cell) for cell in self.text("warnings", start, stop)]

    def states(self, name: str, start: int = 0, stop: int | None = None) -> np.ndarray:
        """Committed rows of a column of the states table."""
        stop = self.committed["states/energy_ev"] if stop is None else stop
        try:
            return self.h5[f"states/{name}"][start:stop]
        except _READ_ERRORS as exc:
            raise _damaged(self.path, f"states/{name}: {_first_line(str(exc))}") from None

    def read_all(self) -> dict[str, np.ndarray | list]:
        """Every committed dataset (text columns decoded), keyed by dataset path. For tests and checks."""
        out = {}
        for name, _ in S.MOLECULE_NUMERIC:
            out[f"molecules/{name}"] = self.column(name)
        for name in S.MOLECULE_TEXT:
            out[f"molecules/{name}"] = self.text(name)
        for name, _, _ in S.STATE_COLUMNS:
            out[f"states/{name}"] = self.states(name)
        if self.heavy:
            try:
                for p in self.paths:
                    if p.startswith("heavy/"):
                        out[p] = self.h5[p][: self.committed[p]]
            except _READ_ERRORS as exc:
                raise _damaged(self.path, _first_line(str(exc))) from None
        return out

    def iter_chunks(self, boundaries: list[int] | None = None, rows: int = 4096):
        """Committed rows as :class:`ChunkResult` objects (for copying, resuming and merging).

        boundaries : molecule counts at which chunks end (default: every ``rows`` rows)
        """
        n = self.n_rows
        ends = boundaries if boundaries is not None else list(range(rows, n, rows)) + [n]
        start = 0
        for stop in ends:
            if stop > start:
                yield self.chunk(start, stop)
            start = stop

    def chunk(self, start: int, stop: int) -> ChunkResult:
        """Rows start:stop as a ChunkResult (states and heavy data included)."""
        col = {name: self.column(name, start, stop) for name, _ in S.MOLECULE_NUMERIC}
        res = ChunkResult(index=col["input_index"].astype(np.int64), source=col["source"].astype(np.int64))
        for name in S.MOLECULE_TEXT:
            setattr(res, name, self.text(name, start, stop))
        res.ints = np.stack([col["n_chromophores"], col["n_centres"], col["n_electrons"]], axis=1).astype(np.int64)
        res.floats = np.stack([col[n] for n in S.SUMMARY_FLOATS], axis=1).astype(np.float64)
        res.n_states = col["state_count"].astype(np.int64)
        s0 = int(col["state_start"][0]) if stop > start else 0
        s1 = s0 + int(res.n_states.sum())
        res.states = {name: self.states(name, s0, s1) for name, _, _ in S.STATE_COLUMNS}
        if any(len(a) != s1 - s0 for a in res.states.values()) or any(
                len(getattr(res, name)) != stop - start for name in S.MOLECULE_TEXT):
            raise _damaged(self.path, f"rows {start}-{stop} are incomplete")
        if self.heavy:
            res.heavy = self._heavy(col["heavy_start"], col["n_chromophores"])
        return res

    def _heavy(self, heavy_start: np.ndarray, n_chrom: np.ndarray) -> list[list[dict]]:
        out = []
        try:
            h = self.h5["heavy"]
            for h0, nc in zip(heavy_start.tolist(), n_chrom.tolist()):
                chroms = []
                for r in range(h0, h0 + nc) if h0 >= 0 else ():
                    row = {name: h[f"chromophores/{name}"][r] for name, _ in S.HEAVY_CHROMOPHORES}
                    n, o = int(row["n_centres"]), int(row["n_occ"])
                    v, m = int(row["vec_start"]), int(row["mat_start"])
                    cs, ct = int(row["ci_singlet_start"]), int(row["ci_triplet_start"])
                    ks, kt = int(row["n_singlets"]), int(row["n_triplets"])
                    size = o * (n - o)
                    chroms.append({
                        "chromophore": int(row["chromophore"]), "n_occ": o, "e_total_ev": float(row["e_total_ev"]),
                        "atom_indices": h["atom_indices"][v:v + n], "core_charges": h["core_charges"][v:v + n],
                        "mo_energy_ev": h["mo_energy_ev"][v:v + n],
                        "coordinates_angstrom": h["coordinates_angstrom"][v:v + n],
                        "core_ev": h["core_ev"][m:m + n * n].reshape(n, n),
                        "gamma_ev": h["gamma_ev"][m:m + n * n].reshape(n, n),
                        "mo_coeff": h["mo_coeff"][m:m + n * n].reshape(n, n),
                        "singlet_amplitudes": h["singlet_amplitudes"][cs:cs + ks * size].reshape(ks, o, n - o),
                        "triplet_amplitudes": h["triplet_amplitudes"][ct:ct + kt * size].reshape(kt, o, n - o)})
                out.append(chroms)
        except _READ_ERRORS as exc:
            raise _damaged(self.path, f"heavy data: {_first_line(str(exc))}") from None
        return out


def _plain(v):
    if isinstance(v, bytes):
        return v.decode()
    if isinstance(v, np.generic):
        return v.item()
    return v


def _first_line(msg: str) -> str:
    return msg.strip().splitlines()[0] if msg.strip() else "unreadable"


def _looks_like_hdf5(path: Path) -> bool:
    try:
        with open(path, "rb") as fh:
            return fh.read(8) == _HDF5_SIGNATURE
    except OSError:
        return False


def _padded_copy(path: Path, tmpdir: Path) -> Path:
    """Copy of a truncated HDF5 file padded with zero bytes up to the end-of-file address its
    superblock records (superblock version 2/3 layout, HDF5 file format specification), so that the
    library agrees to open it; lost chunks then fail their checksums instead of reading as zeros."""
    out = tmpdir / "padded.h5"
    shutil.copyfile(path, out)
    with open(out, "rb+") as fh:
        head = fh.read(48)
        if len(head) < 12 or head[:8] != _HDF5_SIGNATURE or head[8] not in (2, 3):
            raise StorageError(f"'{path}' is cut short before the end of its HDF5 superblock: nothing to salvage")
        size_of_offsets = head[9]
        at = 12 + 2 * size_of_offsets
        if len(head) < at + size_of_offsets:
            raise StorageError(f"'{path}' is cut short inside its HDF5 superblock: nothing to salvage")
        eof = int.from_bytes(head[at:at + size_of_offsets], "little")
        fh.seek(0, 2)
        if fh.tell() < eof:
            fh.truncate(eof)
    return out


def salvage(path: str | Path, out: str | Path, overwrite: bool = False,
            stall_seconds: float = 60.0) -> tuple[int, int]:
    """Copy every readable committed block of a damaged results file into a new file.

    Returns (molecules recovered, molecules the commit log claims). The new file keeps the original's
    provenance and is marked incomplete, so that running the same batch command on it resumes.

    The HDF5 library can loop forever on some kinds of damaged metadata, so the reading runs in a
    child process that reports progress; if it makes none for ``stall_seconds`` it is stopped and the
    file is declared damaged beyond salvage.
    """
    import multiprocessing
    import time

    path, out = Path(path), Path(out)
    if out.exists() and not overwrite:
        raise StorageError(f"'{out}' exists; add --overwrite to replace it")
    if out.resolve() == path.resolve():
        raise StorageError("salvage needs a new output file, not the damaged file itself")
    if not path.is_file():
        raise StorageError(f"results file '{path}' does not exist")
    ctx = multiprocessing.get_context("spawn")
    beat = ctx.Value("d", time.monotonic(), lock=False)
    parent_end, child_end = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_salvage_child, args=(str(path), str(out), beat, child_end), daemon=True)
    proc.start()
    child_end.close()
    result = None
    while True:
        if parent_end.poll(0.05):
            try:
                result = parent_end.recv()
            except EOFError:
                result = None
            break
        if not proc.is_alive():
            break
        if time.monotonic() - beat.value > stall_seconds:
            proc.kill()
            proc.join()
            Path(out.with_name(f".{out.name}.salvage.tmp")).unlink(missing_ok=True)
            raise StorageError(f"'{path}' is damaged beyond salvage (reading it made no progress for "
                               f"{stall_seconds:g} s: the HDF5 metadata is corrupt)")
    proc.join()
    if result is None:
        raise StorageError(f"'{path}' is damaged beyond salvage (the reading process failed)")
    if result[0] == "error":
        raise StorageError(result[1])
    return result[1], result[2]


def _salvage_child(path: str, out: str, beat, conn) -> None:
    import time

    def heartbeat():
        beat.value = time.monotonic()
    try:
        got = _salvage(Path(path), Path(out), heartbeat)
        conn.send(("ok",) + got)
    except StorageError as exc:
        conn.send(("error", str(exc)))
    except Exception as exc:  # reported to the parent as one line
        conn.send(("error", f"'{path}' is damaged beyond salvage ({type(exc).__name__}: {exc})"))
    conn.close()


def _salvage(path: Path, out: Path, heartbeat) -> tuple[int, int]:
    from .store import ResultsWriter  # local import: the writer imports this module's siblings
    with tempfile.TemporaryDirectory(prefix="ppp-salvage-") as td:
        try:
            src = ResultsFile(path, salvaging=True)
        except StorageError as first_error:
            if "damaged or truncated" not in str(first_error):
                raise
            try:
                src = ResultsFile(_padded_copy(path, Path(td)), salvaging=True)
            except StorageError as exc:
                raise StorageError(f"'{path}' is damaged beyond salvage "
                                   f"({getattr(exc, 'detail', exc)})") from None
        with src:
            claimed = src.n_rows
            attrs = {k: v for k, v in src.attrs.items()
                     if k not in ("format", "format_version", "status", "created", "finished", "history")}
            attrs["salvaged_from"] = str(path)
            try:
                text = src.h5["parameter_file"][()].tobytes().decode()
            except _READ_ERRORS:
                text = ""
            tmp = out.with_name(f".{out.name}.salvage.tmp")
            writer = ResultsWriter.create(tmp, attrs, text, version=src.version)  # the rows keep their format
            recovered = 0
            try:
                start = 0
                for stop in src.block_rows():
                    if stop <= start:
                        continue
                    try:
                        chunk = src.chunk(start, stop)
                    except StorageError:
                        break
                    heartbeat()
                    writer.add(chunk)
                    writer.commit()
                    recovered = stop
                    start = stop
            finally:
                writer.close(complete=False)
        tmp.replace(out)
    return recovered, claimed


def rewrite(path: str | Path, rows: int = 8192) -> None:
    """Rewrite a results file compactly: its committed rows into a fresh file, swapped in atomically.

    Appending block by block leaves superseded copies of partly filled chunks behind in the file;
    this is run when a batch completes (and to take over the rows of a killed run). The attributes,
    timestamps and history included, are carried over unchanged.
    """
    from .store import LIBVER, ResultsWriter

    path = Path(path)
    tmp = path.with_name(f".{path.name}.rewrite.tmp")
    with ResultsFile(path) as src:
        attrs = dict(src.attrs)
        text = src.h5["parameter_file"][()].tobytes().decode()
        writer = ResultsWriter.create(tmp, {k: v for k, v in attrs.items() if k not in ("format", "format_version")},
                                      text, version=src.version)
        try:
            for chunk in src.iter_chunks(rows=rows):
                writer.add(chunk)
                writer.commit()
        finally:
            writer.close(complete=False)
    with h5py.File(tmp, "r+", libver=LIBVER) as h5:
        h5["run"].attrs.update({k: v for k, v in attrs.items() if k in S.VOLATILE_ATTRS})
    tmp.replace(path)
