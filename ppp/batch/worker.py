"""Worker side of a batch: compute a chunk of input items and return one lean, array-packed result.

A chunk's result is a :class:`ChunkResult` of a few flat numpy arrays and string lists, so the
cost of sending it back to the writer does not grow with the number of Python objects per state.
Heavy per-molecule data (model matrices, orbitals, CI vectors) is packed only when asked for.

Errors are data: every :class:`~ppp.errors.PPPError` becomes a failed row with its ``kind`` and
message (prefixed by the line or record number). Any other exception is a bug in ppp; it is still
recorded (kind ``internal``) so that the night goes on.

The per-molecule time limit is enforced by a watchdog thread that raises :class:`MoleculeTimeout`
in the computing thread (``PyThreadState_SetAsyncExc``). This works in the main thread of a pool
process and in a Dask worker thread alike; it takes effect at the next Python bytecode, so a single
long call into LAPACK finishes first.
"""
from __future__ import annotations

import ctypes
import hashlib
import os
import threading
import time
from dataclasses import dataclass, field

import numpy as np
from rdkit import Chem, rdBase

from ..driver import Options, compute
from ..errors import ParseError, PPPError, one_line
from ..model import params as param_registry
from ..structure.readers import _sanitize, mol_from_smiles
from .schema import SUMMARY_FLOATS, join_warnings

#: Rows of the per-state arrays, in the order the store keeps them.
STATE_FIELDS = ("chromophore", "multiplicity", "root", "energy_ev", "wavelength_nm", "oscillator_strength",
                "transition_dipole", "polarization_deg", "dominant_homo_minus", "dominant_lumo_plus",
                "dominant_weight")


class MoleculeTimeout(BaseException):
    """Raised inside the computing thread when a molecule runs past its time limit.

    A BaseException so that no ``except Exception`` inside the engine can swallow it."""


class _Watchdog:
    """One thread per process that interrupts computations running past their deadline."""

    def __init__(self):
        self._cond = threading.Condition()
        self._deadlines: dict[int, float] = {}
        self._fired: set[int] = set()  # threads sent a MoleculeTimeout since they were armed
        self._thread = threading.Thread(target=self._run, name="ppp-time-limit", daemon=True)
        self._thread.start()

    def _run(self):
        with self._cond:
            while True:
                now = time.monotonic()
                for tid, deadline in list(self._deadlines.items()):
                    if deadline <= now:
                        del self._deadlines[tid]
                        self._fired.add(tid)
                        ctypes.pythonapi.PyThreadState_SetAsyncExc(ctypes.c_ulong(tid),
                                                                   ctypes.py_object(MoleculeTimeout))
                wait = min(self._deadlines.values(), default=now + 3600.0) - now
                self._cond.wait(timeout=max(wait, 0.0005))

    def arm(self, seconds: float) -> None:
        with self._cond:
            self._deadlines[threading.get_ident()] = time.monotonic() + seconds
            self._cond.notify()

    def disarm(self) -> None:
        tid = threading.get_ident()
        with self._cond:
            self._deadlines.pop(tid, None)
            fired = tid in self._fired
            self._fired.discard(tid)
        if fired:
            _absorb_pending_timeout()


def _absorb_pending_timeout() -> None:
    """Let a MoleculeTimeout that the watchdog set for this thread, but that has not been raised yet
    (the molecule finished just in time), arrive here rather than in the next molecule.

    The exception is raised at the interpreter's next periodic check, which every loop iteration
    makes. (Clearing it instead, PyThreadState_SetAsyncExc(tid, NULL), leaves CPython 3.11's "pending
    asynchronous exception" flag set for good: harmless in plain runs, but it made the thread spin
    forever under a profiler or tracer. So no call of that kind is made unless the watchdog fired.)
    """
    try:
        for _ in range(64):
            pass
    except MoleculeTimeout:
        pass


_WATCHDOG: _Watchdog | None = None
_WATCHDOG_LOCK = threading.Lock()


def _forget_watchdog() -> None:
    """In a forked child: the parent's watchdog thread does not exist here, and its lock may have been
    held at the moment of the fork; start afresh (a new watchdog on first use)."""
    global _WATCHDOG, _WATCHDOG_LOCK
    _WATCHDOG, _WATCHDOG_LOCK = None, threading.Lock()


os.register_at_fork(after_in_child=_forget_watchdog)


def _watchdog() -> _Watchdog:
    global _WATCHDOG
    with _WATCHDOG_LOCK:
        if _WATCHDOG is None:
            _WATCHDOG = _Watchdog()
        return _WATCHDOG


def smiles_key(canonical_smiles: str) -> str:
    """Record key of a molecule given without an ID: hash of its canonical isomeric SMILES.

    (InChIKeys cannot serve: they merge E/Z isomers of charged dyes.)"""
    return "h:" + hashlib.sha256(canonical_smiles.encode()).hexdigest()[:24]


def raw_key(text: str) -> str:
    """Key of an input without an ID whose structure cannot be read: hash of the raw text."""
    return "raw:" + hashlib.sha256(text.encode()).hexdigest()[:24]


@dataclass
class ChunkResult:
    """Results of consecutive input items. Per-molecule lists have one entry per item; state arrays
    are concatenated over the chunk's molecules in order (``n_states`` gives each one's count)."""

    index: np.ndarray            # (n,) int64
    source: np.ndarray           # (n,) int64
    key: list = field(default_factory=list)
    name: list = field(default_factory=list)
    smiles: list = field(default_factory=list)
    canonical_smiles: list = field(default_factory=list)
    error_kind: list = field(default_factory=list)     # "" when ok
    error_message: list = field(default_factory=list)
    warnings: list = field(default_factory=list)       # schema.join_warnings of each result; "" when failed
    ints: np.ndarray = None      # (n, 3) int64: n_chromophores, n_centres, n_electrons
    floats: np.ndarray = None    # (n, 10) float64: schema.SUMMARY_FLOATS (NaN when absent)
    n_states: np.ndarray = None  # (n,) int64
    states: dict = None          # STATE_FIELDS -> (n_states_total,) or (n_states_total, 3)
    heavy: list | None = None    # per molecule: list of per-chromophore dicts of arrays, when asked
    seconds: float = 0.0         # compute time of the chunk (for chunk sizing; never stored)

    def __len__(self) -> int:
        return len(self.index)


def _mol_from_block(block: str) -> Chem.Mol:
    with rdBase.BlockLogs():
        mol = Chem.MolFromMolBlock(block, sanitize=False, removeHs=False, strictParsing=True)
    if mol is None:
        raise ParseError("not a valid MOL block")
    with rdBase.BlockLogs():
        mol = _sanitize(mol, "MOL block")
    if mol.GetNumAtoms() == 0:
        raise ParseError("MOL block has no atoms")
    return mol


def _state_rows(result, out: dict) -> int:
    chrom_nocc = {c.index: c.model.n_occ for c in result.chromophores}
    states = result.states
    for st in states:
        n_occ = chrom_nocc[st.chromophore]
        conf = st.configurations[0] if st.configurations else None
        out["chromophore"].append(st.chromophore)
        out["multiplicity"].append(st.multiplicity)
        out["root"].append(st.index)
        out["energy_ev"].append(st.energy_ev)
        out["wavelength_nm"].append(st.wavelength_nm)
        out["oscillator_strength"].append(st.oscillator_strength)
        out["transition_dipole"].append(st.transition_dipole)
        out["polarization_deg"].append(np.nan if st.polarization_deg is None else st.polarization_deg)
        out["dominant_homo_minus"].append(n_occ - 1 - conf.occupied if conf else -1)
        out["dominant_lumo_plus"].append(conf.virtual - n_occ if conf else -1)
        out["dominant_weight"].append(conf.weight if conf else np.nan)
    return len(states)


def _summary(result) -> tuple[float, ...]:
    """schema.SUMMARY_FLOATS of one molecule: frontier orbitals over its chromophores (highest HOMO,
    lowest LUMO), S1, T1 and the brightest computed singlet."""
    chroms = result.chromophores
    nan3 = (np.nan, np.nan, np.nan)
    s1, t1, b = result.s1, result.t1, result.brightest
    return ((max(c.homo_ev for c in chroms), min(c.lumo_ev for c in chroms))
            + ((s1.energy_ev, s1.wavelength_nm, s1.oscillator_strength) if s1 else nan3)
            + ((t1.energy_ev, t1.wavelength_nm) if t1 else nan3[:2])
            + ((b.energy_ev, b.wavelength_nm, b.oscillator_strength) if b else nan3))


def _heavy_of(result) -> list[dict]:
    out = []
    for c in result.chromophores:
        m = c.model
        out.append({"chromophore": c.index, "n_occ": m.n_occ, "e_total_ev": c.e_total,
                    "atom_indices": np.asarray(c.atom_indices, dtype=np.int64),
                    "core_charges": np.asarray(m.core_charges, dtype=np.float64),
                    "coordinates_angstrom": np.asarray(m.coords, dtype=np.float64).reshape(-1, 3),
                    "core_ev": np.asarray(m.core, dtype=np.float64), "gamma_ev": np.asarray(m.gamma, dtype=np.float64),
                    "mo_energy_ev": np.asarray(c.scf.mo_energy, dtype=np.float64),
                    "mo_coeff": np.asarray(c.scf.mo_coeff, dtype=np.float64),
                    "singlet_amplitudes": np.asarray(c.singlet_amplitudes, dtype=np.float64),
                    "triplet_amplitudes": np.asarray(c.triplet_amplitudes, dtype=np.float64)})
    return out


def compute_chunk(items, options: Options, parameters_sha256: str, heavy: bool = False,
                  time_limit: float | None = None) -> ChunkResult:
    """Compute a list of :class:`~ppp.batch.inputs.Item` (as tuples or Items) in order.

    ``parameters_sha256`` must match the parameter set this process loads for ``options.parameters``
    (a worker on another machine with a different file must not silently compute other numbers).
    """
    t0 = time.perf_counter()
    pset = param_registry.load(options.parameters)
    if pset.sha256 != parameters_sha256:
        raise PPPError(f"parameter set '{options.parameters or pset.name}' on this worker has SHA-256 "
                       f"{pset.sha256[:12]}, not {parameters_sha256[:12]} as on the submitting machine")
    dog = _watchdog() if time_limit else None
    n = len(items)
    res = ChunkResult(index=np.empty(n, np.int64), source=np.empty(n, np.int64),
                      ints=np.zeros((n, 3), np.int64), floats=np.full((n, len(SUMMARY_FLOATS)), np.nan),
                      n_states=np.zeros(n, np.int64), heavy=[] if heavy else None)
    rows = {f: [] for f in STATE_FIELDS}
    for k, item in enumerate(items):
        index, source, name, payload, kind, problem = tuple(item)
        where = f"{'record' if kind == 'molblock' else 'line'} {source}"
        res.index[k], res.source[k] = index, source
        res.name.append(name)
        smiles_in = payload if kind == "smiles" else ""
        canonical, key, err_kind, err_msg, result = "", name, "", "", None
        try:
            if problem:
                raise ParseError(problem)
            if dog:
                dog.arm(time_limit)
            try:
                mol = mol_from_smiles(payload) if kind == "smiles" else _mol_from_block(payload)
                if kind != "smiles":
                    smiles_in = Chem.MolToSmiles(mol)
                canonical = Chem.MolToSmiles(Chem.RemoveHs(mol, sanitize=False))
                result = compute(mol, name=name or smiles_in, options=options)
            finally:
                if dog:
                    dog.disarm()
        except MoleculeTimeout:
            err_kind, err_msg = "timeout", f"{where}: stopped after the time limit of {time_limit:g} s"
        except PPPError as err:
            err_kind, err_msg = err.kind, f"{where}: {err.reason}"
        except Exception as exc:  # a bug in ppp; recorded so that the batch goes on
            err_kind, err_msg = "internal", f"{where}: internal error {type(exc).__name__}: {one_line(exc)}"
        if not key:
            key = smiles_key(canonical) if canonical else raw_key(payload)
        res.key.append(key)
        res.smiles.append(smiles_in)
        res.canonical_smiles.append(canonical)
        res.error_kind.append(err_kind if result is None else "")
        res.error_message.append(err_msg if result is None else "")
        res.warnings.append("" if result is None else join_warnings(result.warnings))
        if result is not None:
            chroms = result.chromophores
            res.ints[k] = (len(chroms), sum(c.model.n_centres for c in chroms),
                           sum(c.model.n_electrons for c in chroms))
            res.floats[k] = _summary(result)
            res.n_states[k] = _state_rows(result, rows)
            if heavy:
                res.heavy.append(_heavy_of(result))
        elif heavy:
            res.heavy.append([])
    res.states = {
        "chromophore": np.asarray(rows["chromophore"], np.int16),
        "multiplicity": np.asarray(rows["multiplicity"], np.int8),
        "root": np.asarray(rows["root"], np.int16),
        "energy_ev": np.asarray(rows["energy_ev"], np.float64),
        "wavelength_nm": np.asarray(rows["wavelength_nm"], np.float64),
        "oscillator_strength": np.asarray(rows["oscillator_strength"], np.float64),
        "transition_dipole": np.asarray(rows["transition_dipole"], np.float64).reshape(-1, 3),
        "polarization_deg": np.asarray(rows["polarization_deg"], np.float64),
        "dominant_homo_minus": np.asarray(rows["dominant_homo_minus"], np.int16),
        "dominant_lumo_plus": np.asarray(rows["dominant_lumo_plus"], np.int16),
        "dominant_weight": np.asarray(rows["dominant_weight"], np.float64),
    }
    res.seconds = time.perf_counter() - t0
    return res
