"""Helpers shared by the batch tests: small libraries and file comparison."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from ppp.batch.reader import ResultsFile
from ppp.batch.runner import BatchConfig, run_batch
from ppp.batch.schema import VOLATILE_ATTRS
from ppp.batch.synthetic import dye_library

#: Attributes that describe how a file was made (timestamps, run history, merge/salvage bookkeeping)
#: rather than what it holds.
BOOKKEEPING = set(VOLATILE_ATTRS) | {"merged_from", "salvaged_from"}

#: Named inputs that must fail, one per reason kind, with the kind they must be recorded under.
BAD_LINES = [
    ("C1CC(", "bad-syntax", "parse"),
    ("C[CH2]", "ethyl-radical", "radical"),
    ("CC(=[Se])c1ccccc1", "selenoketone", "unsupported_element"),
    ("CCCCCC", "hexane", "no_pi_system"),
]


def small_library(path: Path, n: int = 30, seed: int = 11, with_bad: bool = True, max_centres: int = 18) -> list[str]:
    """Write a SMILES file of ``n`` small generated dyes (8 to ``max_centres`` pi-centres), the bad lines
    interleaved. Returns the lines written (SMILES and name)."""
    lines = [f"{s} dye-{k:03d}" for k, s in enumerate(dye_library(n, seed=seed, min_centres=8,
                                                                   max_centres=max_centres))]
    if with_bad:
        for j, (smi, name, _) in enumerate(BAD_LINES):
            lines.insert(3 + 5 * j, f"{smi} {name}")
    path.write_text("# generated test library\n" + "\n".join(lines) + "\n")
    return lines


def run(inp: Path, out: Path, **kw):
    kw.setdefault("progress", False)
    return run_batch(BatchConfig(input=inp, output=out, **kw))


def contents(path: Path) -> tuple[dict, dict]:
    """(datasets, attributes) of a results file, bookkeeping attributes left out."""
    with ResultsFile(path) as rf:
        data = rf.read_all()
        attrs = {k: v for k, v in rf.attrs.items() if k not in BOOKKEEPING}
    return data, attrs


def assert_same_results(a: Path, b: Path, ignore_attrs: tuple[str, ...] = ()) -> None:
    """Every dataset bitwise equal (NaN equal to NaN) and every non-bookkeeping attribute equal."""
    da, aa = contents(a)
    db, ab = contents(b)
    assert sorted(da) == sorted(db)
    for key in da:
        x, y = da[key], db[key]
        if isinstance(x, list):
            assert x == y, f"{key} differs between {a.name} and {b.name}"
        else:
            assert x.dtype == y.dtype and x.shape == y.shape, key
            # bitwise: compare the raw bytes, so that -0.0 != 0.0 and NaN payloads count
            assert x.tobytes() == y.tobytes(), f"{key} differs between {a.name} and {b.name}"
    for k in ignore_attrs:
        aa.pop(k, None)
        ab.pop(k, None)
    assert aa == ab


def error_rows(path: Path) -> dict[str, tuple[str, str]]:
    """name -> (error_kind, error_message) of every row."""
    with ResultsFile(path) as rf:
        return dict(zip(rf.text("name"), zip(rf.text("error_kind"), rf.text("error_message"))))


def n_rows(path: Path) -> int:
    with ResultsFile(path) as rf:
        return rf.n_rows


def states_of(path: Path) -> np.ndarray:
    with ResultsFile(path) as rf:
        return rf.states("energy_ev")
