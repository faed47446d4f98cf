"""Layout of a batch results file (format ``ppp-batch``), shared by the writer and the reader.

Every table is a group of 1-D (or (n, 3)) resizable, chunked, compressed datasets of equal length.
Text columns are stored SWMR-safe as a ``bytes`` (uint8, UTF-8) dataset plus an ``end`` (int64)
dataset of cumulative end offsets, one per row. See ``docs/batch.md`` for the full description.
"""
from __future__ import annotations

import numpy as np

FORMAT = "ppp-batch"
FORMAT_VERSION = 2
#: format versions this ppp reads; version 1 lacks the molecules' ``warnings`` column (it reads as "")
READABLE_VERSIONS = (1, 2)

#: status codes of the molecules table
OK, FAILED = 0, 1
STATUS_NAMES = {OK: "ok", FAILED: "failed"}

#: molecules table: numeric columns (name, dtype)
MOLECULE_NUMERIC = (
    ("input_index", np.int64), ("source", np.int64), ("status", np.int8),
    ("n_chromophores", np.int16), ("n_centres", np.int32), ("n_electrons", np.int32),
    ("state_start", np.int64), ("state_count", np.int32), ("heavy_start", np.int64),
    ("homo_ev", np.float64), ("lumo_ev", np.float64),
    ("s1_ev", np.float64), ("s1_nm", np.float64), ("s1_f", np.float64),
    ("t1_ev", np.float64), ("t1_nm", np.float64),
    ("bright_ev", np.float64), ("bright_nm", np.float64), ("bright_f", np.float64),
)
#: summary float columns computed by the workers, in the order of ``ChunkResult.floats``
SUMMARY_FLOATS = ("homo_ev", "lumo_ev", "s1_ev", "s1_nm", "s1_f", "t1_ev", "t1_nm",
                  "bright_ev", "bright_nm", "bright_f")
#: molecules table: text columns
MOLECULE_TEXT = ("key", "name", "smiles", "canonical_smiles", "error_kind", "error_message", "warnings")
#: text columns added after format version 1: name -> first version that has it
TEXT_SINCE = {"warnings": 2}
#: joins a molecule's warnings (``MoleculeResult.warnings``, in that order) in the ``warnings`` column.
#: Not "; ": a warning may itself contain one (the RPA fall-back does). The cell stays one line (a CSV
#: row stays one line): :func:`join_warnings` turns a line break inside a warning into a space and the
#: separator inside a warning (none of ppp's has one) into " / ", so :func:`split_warnings` is exact.
WARNING_SEPARATOR = " | "

#: states table (concatenated over molecules; a molecule's rows are state_start : state_start+state_count)
STATE_COLUMNS = (
    ("chromophore", np.int16, ()), ("multiplicity", np.int8, ()), ("root", np.int16, ()),
    ("energy_ev", np.float64, ()), ("wavelength_nm", np.float64, ()),
    ("oscillator_strength", np.float64, ()), ("transition_dipole", np.float64, (3,)),
    ("polarization_deg", np.float64, ()), ("dominant_homo_minus", np.int16, ()),
    ("dominant_lumo_plus", np.int16, ()), ("dominant_weight", np.float64, ()),
)

#: heavy data, only when asked: one row per chromophore, pointing into flat arrays
HEAVY_CHROMOPHORES = (
    ("molecule", np.int64), ("chromophore", np.int16), ("n_centres", np.int32), ("n_occ", np.int32),
    ("n_singlets", np.int32), ("n_triplets", np.int32), ("e_total_ev", np.float64),
    ("vec_start", np.int64), ("mat_start", np.int64), ("ci_singlet_start", np.int64),
    ("ci_triplet_start", np.int64),
)
#: flat heavy arrays: name -> (dtype, row shape, which offset column indexes it)
HEAVY_ARRAYS = {
    "atom_indices": (np.int64, (), "vec_start"),
    "core_charges": (np.float64, (), "vec_start"),
    "mo_energy_ev": (np.float64, (), "vec_start"),
    "coordinates_angstrom": (np.float64, (3,), "vec_start"),
    "core_ev": (np.float64, (), "mat_start"),
    "gamma_ev": (np.float64, (), "mat_start"),
    "mo_coeff": (np.float64, (), "mat_start"),
    "singlet_amplitudes": (np.float64, (), "ci_singlet_start"),
    "triplet_amplitudes": (np.float64, (), "ci_triplet_start"),
}

#: attributes that record when and how a file was made rather than what it holds
VOLATILE_ATTRS = ("created", "finished", "history", "status")


def molecule_text(version: int = FORMAT_VERSION) -> tuple[str, ...]:
    """Text columns of the molecules table stored in a file of format ``version``."""
    return tuple(n for n in MOLECULE_TEXT if TEXT_SINCE.get(n, 1) <= version)


def join_warnings(warnings) -> str:
    """The ``warnings`` cell of one molecule: "" when none, else joined with WARNING_SEPARATOR."""
    return WARNING_SEPARATOR.join(" ".join(str(w).splitlines()).replace(WARNING_SEPARATOR, " / ")
                                  for w in warnings)


def split_warnings(cell: str) -> tuple[str, ...]:
    """Inverse of :func:`join_warnings`."""
    return tuple(cell.split(WARNING_SEPARATOR)) if cell else ()


def dataset_paths(heavy: bool, version: int = FORMAT_VERSION) -> list[str]:
    """Every growing dataset of a file of format ``version``, in the fixed order of the commit log's
    size columns."""
    paths = [f"molecules/{n}" for n, _ in MOLECULE_NUMERIC]
    for n in molecule_text(version):
        paths += [f"molecules/{n}/bytes", f"molecules/{n}/end"]
    paths += [f"states/{n}" for n, _, _ in STATE_COLUMNS]
    if heavy:
        paths += [f"heavy/chromophores/{n}" for n, _ in HEAVY_CHROMOPHORES]
        paths += [f"heavy/{n}" for n in HEAVY_ARRAYS]
    return paths


def commit_check(block: int, sizes) -> int:
    """Check value stored with each commit-log row: a row read back as fill-value zeros, or half
    written, does not pass."""
    acc = (block * 1_000_003 + 7) % (1 << 61)
    for s in sizes:
        acc = (acc * 31 + int(s) + 1) % (1 << 61)
    return acc
