"""Export the molecules table of a results file (with S1, T1 and the brightest band), or its states table
(every computed state of every molecule, one row each), to CSV or Parquet; optionally with each
molecule's predicted solution colour (:class:`ColourSample`) and class error (the "±"), and only the
molecules a screen keeps, ranked (:class:`Selection`).

Rows are streamed in slices, so a file of a million molecules never sits in memory whole (a ranking
collects the rows it keeps: use its ``top``).
"""
from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..errors import InputError, StorageError
from ..spectra import lineshapes, perceived
from ..units import HC_EV_NM
from . import schema as S
from .reader import ResultsFile

#: exported columns, in order (text columns are decoded; "status" becomes ok/failed; "warnings" is last,
#: so that the columns before it keep their positions of format version 1; a molecule's warnings are
#: joined by schema.WARNING_SEPARATOR, " | ")
COLUMNS = ("key", "name", "input_index", "source", "status", "error_kind", "error_message", "smiles",
           "canonical_smiles", "n_chromophores", "n_centres", "n_electrons", "homo_ev", "lumo_ev",
           "s1_ev", "s1_nm", "s1_f", "t1_ev", "t1_nm", "bright_ev", "bright_nm", "bright_f", "warnings")
#: columns added by ``colour``: the predicted colour of the molecule's solution (sRGB hex of the
#: transmitted D65 light, CIE L*a*b*), from its stored singlets broadened as ``ppp spectrum`` does
COLOUR_COLUMNS = ("colour_hex", "colour_L_star", "colour_a_star", "colour_b_star")
#: columns added by ``uncertainty``: the molecule's structure class (ppp.calibration.classes), the measured
#: error of band positions for that class (or overall) from the parameter set's [uncertainty] table, and
#: that error in nm at the brightest band — the "±" ``ppp run`` shows beside a band
UNCERTAINTY_COLUMNS = ("class", "class_error_ev", "bright_uncertainty_nm")
STATUS_FILTERS = ("all", "ok", "failed")
TABLES = ("molecules", "states")
#: columns of the states export: the molecule's key and name, then the stored state columns
#: (ppp/batch/schema.py, docs/batch.md) with ``chromophore`` counted from 1 like ``root``, a ``state``
#: label (S3, T1; "c2:S1" for chromophore 2 of a molecule with several), the transition dipole as three
#: columns and the dominant configuration also as text ("H-1->L+2")
STATE_EXPORT = ("key", "name", "chromophore", "state", "multiplicity", "root", "energy_ev", "wavelength_nm",
                "oscillator_strength", "transition_dipole_x", "transition_dipole_y", "transition_dipole_z",
                "polarization_deg", "dominant", "dominant_homo_minus", "dominant_lumo_plus", "dominant_weight")
_TEXT = set(S.MOLECULE_TEXT)
_STATE_TEXT = {"key", "name", "state", "dominant"}


@dataclass(frozen=True)
class ColourSample:
    """How a molecule's stored singlets become a colour: band shape and optional vibronic progression as
    in ``ppp spectrum``, and the solution (molar concentration, M; cell path length, cm)."""

    shape: lineshapes.LineShape = field(default_factory=lineshapes.LineShape)
    progression: lineshapes.Progression | None = None
    concentration_m: float = perceived.DEFAULT_CONCENTRATION_M
    path_cm: float = perceived.DEFAULT_PATH_CM


@dataclass(frozen=True)
class Selection:
    """Which molecules an export keeps, and in which order (the ranking of a screen).

    by : numeric column of the molecules table to rank by (:data:`RANK_COLUMNS`), best first: largest
         first, or smallest with ``ascending``; molecules without a value (NaN) are left out. None: file order
    top : keep only the first ``top`` molecules of that order (None: all)
    band_nm : keep only molecules whose brightest band (``bright_nm``) lies in [lo, hi] nm
    """

    by: str | None = None
    top: int | None = None
    ascending: bool = False
    band_nm: tuple[float, float] | None = None

    def __post_init__(self):
        if self.by is not None and self.by not in RANK_COLUMNS:
            raise InputError(f"cannot rank by '{self.by}'; numeric columns: {', '.join(RANK_COLUMNS)}")
        if self.top is not None and not (isinstance(self.top, int) and self.top >= 1):
            raise InputError(f"top must be a whole number of at least 1, got {self.top!r}")
        if self.band_nm is not None:
            lo, hi = self.band_nm
            if not (0 < lo <= hi and math.isfinite(hi)):
                raise InputError(f"band window must be 0 < LO <= HI nm, got {lo:g} {hi:g}")

    @property
    def active(self) -> bool:
        return self.by is not None or self.top is not None or self.band_nm is not None


#: columns a Selection can rank by: the numeric columns of the molecules table
RANK_COLUMNS = tuple(c for c in COLUMNS if c in dict(S.MOLECULE_NUMERIC) and c not in ("status",))


def _ranks(rf: ResultsFile, status: str, sel: Selection) -> np.ndarray:
    """(n_rows,) position of each molecule in the export (0, 1, ...), -1 for a molecule left out."""
    st = rf.column("status")
    keep = np.ones(len(st), bool) if status == "all" else (st == (S.OK if status == "ok" else S.FAILED))
    if sel.band_nm is not None:
        nm = rf.column("bright_nm")
        with np.errstate(invalid="ignore"):
            keep &= (nm >= sel.band_nm[0]) & (nm <= sel.band_nm[1])
    idx = np.flatnonzero(keep)
    if sel.by is not None:
        v = rf.column(sel.by)[idx].astype(float)
        idx = idx[np.isfinite(v)]
        v = v[np.isfinite(v)]
        idx = idx[np.argsort(v if sel.ascending else -v, kind="stable")]  # ties keep file order
    if sel.top is not None:
        idx = idx[:sel.top]
    rank = np.full(len(st), -1, dtype=np.int64)
    rank[idx] = np.arange(len(idx))
    return rank


def _in_rank_order(parts: list[dict]) -> list[dict]:
    """The collected rows of all slices as one part, sorted by their ``_rank`` (stable: the states of one
    molecule keep their order)."""
    if not parts:
        return []
    whole = {}
    for k in parts[0]:
        vals = [p[k] for p in parts]
        whole[k] = np.concatenate(vals) if isinstance(vals[0], np.ndarray) else [x for v in vals for x in v]
    order = np.argsort(whole["_rank"], kind="stable")
    return [{k: (v[order] if isinstance(v, np.ndarray) else [v[i] for i in order.tolist()])
             for k, v in whole.items()}]


#: molecules whose transmittance spectra are held at once while colouring (bounds memory: 421 floats each)
_COLOUR_BLOCK = 4096


def _colours(rf: ResultsFile, start: int, stop: int, rows: np.ndarray, sample: ColourSample) -> dict:
    """COLOUR_COLUMNS of molecules ``start + rows``; empty / NaN for a molecule without singlets."""
    wl, _ = perceived.tristimulus_weights()
    grid = HC_EV_NM / wl
    count = rf.column("state_count", start, stop).astype(np.int64)
    first = rf.column("state_start", start, stop).astype(np.int64)
    has = count > 0
    lo = int(first[has][0]) if has.any() else 0  # the slice's states, read once
    hi = int(first[has][-1] + count[has][-1]) if has.any() else 0
    mult, energy, f = (rf.states(name, lo, hi) for name in ("multiplicity", "energy_ev", "oscillator_strength"))
    if len(energy) != hi - lo or len(mult) != hi - lo or len(f) != hi - lo:
        raise StorageError(f"'{rf.path}' is damaged: the states of rows {start}-{stop} are incomplete")
    out = {"colour_hex": [], "colour_L_star": [], "colour_a_star": [], "colour_b_star": []}
    for b in range(0, len(rows), _COLOUR_BLOCK):
        block = rows[b:b + _COLOUR_BLOCK]
        trans = np.ones((len(block), len(wl)))
        empty = np.zeros(len(block), dtype=bool)
        for j, r in enumerate(block.tolist()):
            s0, s1 = int(first[r]) - lo, int(first[r] + count[r]) - lo
            singlet = mult[s0:s1] == 1 if count[r] > 0 else np.zeros(0, dtype=bool)
            if not singlet.any():
                empty[j] = True
                continue
            sticks = lineshapes.Sticks(energy[s0:s1][singlet], f[s0:s1][singlet])
            eps = lineshapes.epsilon(grid, sticks, sample.shape, sample.progression)
            trans[j] = perceived.transmittance(eps, sample.concentration_m, sample.path_cm)
        col = perceived.colours_of_transmittances(trans)
        lab = col["lab"]
        lab[empty] = np.nan
        out["colour_hex"] += ["" if e else h for e, h in zip(empty.tolist(), col["hex"].tolist())]
        out["colour_L_star"].append(lab[:, 0])
        out["colour_a_star"].append(lab[:, 1])
        out["colour_b_star"].append(lab[:, 2])
    for k in ("colour_L_star", "colour_a_star", "colour_b_star"):
        out[k] = np.concatenate(out[k]) if out[k] else np.zeros(0)
    return out


def _uncertainty_source(rf: ResultsFile):
    """(parameter set, singlet method) whose class errors apply to the file's results, or None when the
    set carries none for them (a solvent run with a gas-phase table, or the reverse:
    ppp.calibration.uncertainty)."""
    from dataclasses import fields

    from ..calibration.uncertainty import measured_with
    from ..driver import Options
    pset = rf.parameter_set()
    known = {f.name for f in fields(Options)}
    try:
        opts = Options(**{k: v for k, v in rf.options.items() if k in known})
    except InputError:  # options this ppp no longer accepts: it cannot tell which figures apply
        return None
    if opts.in_solvent != (measured_with(pset) == "reference"):
        return None
    return pset, opts.response


def _uncertainties(rf: ResultsFile, start: int, stop: int, rows: np.ndarray, source, st: np.ndarray) -> dict:
    """UNCERTAINTY_COLUMNS of molecules ``start + rows`` ("" / NaN for a failed one, NaN where the set
    has no figure); ``st``: the slice's status column, already read."""
    from ..calibration.classes import classify_smiles
    from ..calibration.uncertainty import band_uncertainty
    from ..errors import PPPError
    bright = rf.column("bright_ev", start, stop)
    smiles = rf.text("canonical_smiles", start, stop)
    out = {"class": [], "class_error_ev": np.full(len(rows), np.nan),
           "bright_uncertainty_nm": np.full(len(rows), np.nan)}
    for j, r in enumerate(rows.tolist()):
        if st[r] != S.OK:
            out["class"].append("")
            continue
        try:
            cls = classify_smiles(smiles[r])
        except PPPError:
            cls = "other"
        out["class"].append(cls)
        if source is None:
            continue
        unit = band_uncertainty(1.0, cls, *source)  # the figure itself (eV), whatever the band
        if unit is None:
            continue
        out["class_error_ev"][j] = unit.sigma_ev
        if np.isfinite(bright[r]) and bright[r] > 0:
            out["bright_uncertainty_nm"][j] = band_uncertainty(float(bright[r]), cls, *source).sigma_nm
    return out


def _slices(rf: ResultsFile, status: str, rows: int, colour: ColourSample | None = None,
            rank: np.ndarray | None = None, uncertainty: bool = False):
    """Molecules table rows, slice by slice; with ``rank`` (:func:`_ranks`) only the molecules it keeps,
    each part carrying their ranks as ``_rank``."""
    n = rf.n_rows
    source = _uncertainty_source(rf) if uncertainty else None
    for start in range(0, n, rows):
        stop = min(start + rows, n)
        st = rf.column("status", start, stop)
        if rank is not None:
            keep = rank[start:stop] >= 0
        else:
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
        if colour is not None:
            out.update(_colours(rf, start, stop, np.flatnonzero(keep), colour))
        if uncertainty:
            out.update(_uncertainties(rf, start, stop, np.flatnonzero(keep), source, st))
        if rank is not None:
            out["_rank"] = rank[start:stop][keep]
        yield out


def _orbital(name: str, k: int) -> str:
    return name if k == 0 else f"{name}{'-' if name == 'H' else '+'}{k}"


def _state_slices(rf: ResultsFile, rows: int, rank: np.ndarray | None = None):
    """The states of every computed molecule, molecule slice by slice (failed molecules have none); with
    ``rank`` (:func:`_ranks`) only those of the molecules it keeps, carrying their molecule's rank as
    ``_rank``."""
    n = rf.n_rows
    for start in range(0, n, rows):
        stop = min(start + rows, n)
        count = rf.column("state_count", start, stop).astype(np.int64)
        first = rf.column("state_start", start, stop).astype(np.int64)
        has = count > 0
        if rank is not None and not (has & (rank[start:stop] >= 0)).any():
            continue
        if not has.any():
            continue
        s0 = int(first[has][0])
        s1 = int(first[has][-1] + count[has][-1])
        st = {name: rf.states(name, s0, s1) for name, _, _ in S.STATE_COLUMNS}
        if any(len(v) != s1 - s0 for v in st.values()) or int(count.sum()) != s1 - s0:
            raise StorageError(f"'{rf.path}' is damaged: the states of rows {start}-{stop} are incomplete")
        keys, names = rf.text("key", start, stop), rf.text("name", start, stop)
        n_chrom = rf.column("n_chromophores", start, stop)
        owner = np.repeat(np.arange(stop - start), count)
        chrom = st["chromophore"].astype(np.int64)
        multi = n_chrom[owner] > 1
        mult = st["multiplicity"].astype(np.int64)
        root = st["root"].astype(np.int64)
        hm, lp = st["dominant_homo_minus"].astype(np.int64), st["dominant_lumo_plus"].astype(np.int64)
        dip = st["transition_dipole"]
        part = {
            "key": [keys[i] for i in owner], "name": [names[i] for i in owner],
            "chromophore": chrom + 1,
            "state": [(f"c{c + 1}:" if m else "") + ("S" if k == 1 else "T") + str(r)
                      for c, m, k, r in zip(chrom.tolist(), multi.tolist(), mult.tolist(), root.tolist())],
            "multiplicity": mult, "root": root, "energy_ev": st["energy_ev"], "wavelength_nm": st["wavelength_nm"],
            "oscillator_strength": st["oscillator_strength"], "transition_dipole_x": dip[:, 0],
            "transition_dipole_y": dip[:, 1], "transition_dipole_z": dip[:, 2],
            "polarization_deg": st["polarization_deg"],
            "dominant": [f"{_orbital('H', a)}->{_orbital('L', b)}" if a >= 0 else ""
                         for a, b in zip(hm.tolist(), lp.tolist())],
            "dominant_homo_minus": hm, "dominant_lumo_plus": lp, "dominant_weight": st["dominant_weight"],
        }
        if rank is not None:
            r = rank[start:stop][owner]
            sel = np.flatnonzero(r >= 0)
            part = {k: (v[sel] if isinstance(v, np.ndarray) else [v[i] for i in sel.tolist()])
                    for k, v in part.items()}
            part["_rank"] = r[sel]
        yield part


def _cell(v) -> str:
    if isinstance(v, float):
        return "" if math.isnan(v) else repr(v)
    return str(v)


def _write_csv(fh, columns, parts) -> int:
    """CSV header and rows of ``parts`` (only ``columns``, in that order); returns the rows written."""
    w = csv.writer(fh)
    w.writerow(columns)
    n = 0
    for part in parts:
        cols = [part[c].tolist() if isinstance(part[c], np.ndarray) else part[c] for c in columns]
        for row in zip(*cols):
            w.writerow([_cell(v) for v in row])
            n += 1
    return n


def export(path: str | Path, out: str | Path, fmt: str | None = None, status: str = "all",
           overwrite: bool = False, rows: int = 65536, table: str = "molecules",
           colour: ColourSample | None = None, select: Selection | None = None, stream=None,
           uncertainty: bool = False) -> int:
    """Write the molecules table of ``path`` to ``out`` (CSV, or Parquet when ``fmt`` or the suffix says
    so), or with ``table="states"`` its states, one row per state (:data:`STATE_EXPORT`; only molecules
    that were computed have states, so ``status`` must stay "all" or "ok"). Returns the number of rows
    written. NaN (no such state, an undefined polarization) becomes an empty CSV cell / a null.
    ``colour``: add :data:`COLOUR_COLUMNS` to the molecules table (0.1 s once, then about 0.2 ms per
    molecule). ``select``: only some molecules, ranked (:class:`Selection`; with ``table="states"`` the
    states of those molecules, molecule by molecule in that order). A ranked export holds its rows in
    memory until written: use ``top`` for a large file. ``out`` "-": CSV to ``stream`` (default standard
    output), e.g. to look at the top hits in a terminal. ``uncertainty``: add :data:`UNCERTAINTY_COLUMNS`
    (the class errors of the parameter set the file was computed with, as kept in the file; about 0.3 ms
    per molecule for its class)."""
    to_stream = str(out) == "-"
    out = Path(out)
    if status not in STATUS_FILTERS:
        raise InputError(f"status filter must be one of {', '.join(STATUS_FILTERS)}, got '{status}'")
    if table not in TABLES:
        raise InputError(f"table must be one of {', '.join(TABLES)}, got '{table}'")
    if table == "states" and status == "failed":
        raise InputError("failed molecules have no states; export the molecules table to see why they failed")
    if (colour is not None or uncertainty) and table == "states":
        raise InputError("colour and uncertainty belong to a molecule: export the molecules table to get them")
    columns = STATE_EXPORT if table == "states" else (COLUMNS + (COLOUR_COLUMNS if colour is not None else ())
                                                      + (UNCERTAINTY_COLUMNS if uncertainty else ()))
    text_cols = _STATE_TEXT if table == "states" else _TEXT | {"status", "colour_hex", "class"}

    select = select if select is not None and select.active else None

    def slices(rf):
        rank = _ranks(rf, "ok" if table == "states" else status, select) if select is not None else None
        parts = (_state_slices(rf, rows, rank) if table == "states"
                 else _slices(rf, status, rows, colour, rank, uncertainty))
        return _in_rank_order(list(parts)) if select is not None and select.by is not None else parts

    fmt = fmt or ("parquet" if out.suffix.lower() in (".parquet", ".pq") else "csv")
    if fmt not in ("csv", "parquet"):
        raise InputError(f"export format must be csv or parquet, got '{fmt}'")
    if to_stream:
        if fmt != "csv":
            raise InputError("only CSV goes to standard output ('-o -'); give Parquet a file name")
        import sys
        with ResultsFile(path) as rf:
            return _write_csv(stream if stream is not None else sys.stdout, columns, slices(rf))
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
                for part in slices(rf):
                    chunk = pa.table({k: (pa.array(part[k], from_pandas=True) if not isinstance(part[k], list)
                                          else pa.array(part[k], pa.string())) for k in columns})
                    if writer is None:
                        writer = pq.ParquetWriter(tmp, chunk.schema)
                    writer.write_table(chunk)
                    n += chunk.num_rows
                if writer is None:
                    empty = {k: pa.array([], pa.string() if k in text_cols else pa.float64()) for k in columns}
                    pq.write_table(pa.table(empty), tmp)
            finally:
                if writer is not None:
                    writer.close()
        else:
            with open(tmp, "w", newline="", encoding="utf-8") as fh:
                n = _write_csv(fh, columns, slices(rf))
    tmp.replace(out)
    return n
