"""Batch results keep every molecule's warnings (``MoleculeResult.warnings``): the ``warnings`` text
column of format version 2, its export, and the handling of version-1 files (written before the column
existed) by the reader, export, salvage, merge and resume.

The molecules with warnings are real ones whose warning comes from the engine itself:
square cyclobutadiene (``C1=CC=C1``) and octacene have a triplet-unstable closed-shell reference with
default options (lowest CIS triplet measured -0.122 eV and -0.109 eV; that the closed-shell reference of
square cyclobutadiene is triplet-unstable is common practice, see also tests/test_scf.py), so their T1 is
not reported and the result says why. A version-1 file is made from a version-2 one with h5py alone
(the warnings datasets and their commit-log columns removed, the version attributes set to 1), i.e.
the layout ppp wrote before this column existed (listed in ``V1_TEXT`` below), not by ppp's writer.
"""
from __future__ import annotations

import csv
import json
import math

import h5py
import numpy as np
import pytest
from batch_helpers import assert_same_results, contents, run

import ppp
from ppp.batch import schema as S
from ppp.batch.export import export
from ppp.batch.merge import merge
from ppp.batch.reader import ResultsFile, rewrite, salvage
from ppp.batch.store import ResultsWriter
from ppp.errors import InputError, StorageError

CBD = "C1=CC=C1"  # square cyclobutadiene: triplet instability (see module docstring)
OCTACENE = "c1ccc2cc3cc4cc5cc6cc7cc8ccccc8cc7cc6cc5cc4cc3cc2c1"
LIBRARY = [
    (CBD, "cbd"),
    ("c1ccccc1", "benzene"),                   # no warnings
    ("C1CC(", "bad"),                          # failed: parse error
    (f"{CBD}.{CBD}", "two-cbd"),               # two chromophores, one warning each, numbered
    (OCTACENE, "octacene"),
    ("CN(C)c1ccc(cc1)/N=N/c1ccccc1", "dab"),   # no warnings
    ("C1=CC=C1", "cbd"),                       # same ID again: failed as duplicate
]
#: text columns of the molecules table in format version 1 (before the warnings column)
V1_TEXT = ("key", "name", "smiles", "canonical_smiles", "error_kind", "error_message")


def _write_library(path):
    path.write_text("".join(f"{s} {n}\n" for s, n in LIBRARY))
    return path


@pytest.fixture(scope="module")
def v2(tmp_path_factory):
    d = tmp_path_factory.mktemp("warn")
    inp = _write_library(d / "lib.smi")
    out = d / "lib.h5"
    run(inp, out, jobs=1)
    return inp, out


def _downgrade_to_v1(path) -> None:
    """Turn a cleanly closed version-2 file into the version-1 layout, with h5py only."""
    with h5py.File(path, "r+") as h5:
        cols = json.loads(h5["commits"].attrs["columns"])
        keep = [i for i, c in enumerate(cols) if not c.startswith("molecules/warnings/")]
        log = h5["commits"][()][:, keep]
        for row in log:  # the check value covers the sizes, so it changes with the columns
            row[-1] = S.commit_check(int(row[0]), row[1:-1])
        del h5["commits"]
        n = log.shape[1]
        ds = h5.create_dataset("commits", data=log, maxshape=(None, n), chunks=(64, n), fletcher32=True)
        ds.attrs["columns"] = json.dumps([cols[i] for i in keep])
        del h5["molecules/warnings"]
        h5.attrs["format_version"] = 1
        prov = json.loads(h5["provenance"][()].tobytes().decode())
        prov["format_version"] = 1
        del h5["provenance"]
        h5.create_dataset("provenance", data=np.frombuffer(json.dumps(prov).encode(), np.uint8))


@pytest.fixture(scope="module")
def v1(v2, tmp_path_factory):
    inp, out2 = v2
    out1 = tmp_path_factory.mktemp("warn1") / "lib_v1.h5"
    out1.write_bytes(out2.read_bytes())
    _downgrade_to_v1(out1)
    return inp, out1


def test_each_molecule_keeps_its_warnings_in_order(v2):
    _, out = v2
    with ResultsFile(out) as rf:
        assert rf.version == S.FORMAT_VERSION == 2
        names, kinds = rf.text("name"), rf.text("error_kind")
        cells, warns, t1 = rf.text("warnings"), rf.warnings(), rf.column("t1_ev")
    assert len(cells) == len(LIBRARY)
    for row, (smi, name) in enumerate(LIBRARY):
        assert names[row] == name
        if kinds[row]:  # failed rows (the parse error, the duplicate ID) carry no warnings
            assert cells[row] == "" and warns[row] == ()
            continue
        expected = ppp.compute(smi).warnings  # the same engine in this process
        assert warns[row] == expected
        assert cells[row] == " | ".join(expected)
    assert kinds[2] == "parse" and kinds[6] == "duplicate"
    assert cells[1] == "" and cells[5] == ""
    for row in (0, 4):  # T1 is missing and the row says why
        assert math.isnan(t1[row])
        assert len(warns[row]) == 1 and warns[row][0].startswith("triplet instability of the closed-shell")
    # two chromophores: both warnings, numbered, in the order of the result
    assert [w.split(":")[0] for w in warns[3]] == ["chromophore 1", "chromophore 2"]
    assert not math.isnan(t1[1]) and not math.isnan(t1[5])


def test_worker_joins_several_warnings_of_one_chromophore_in_order(monkeypatch):
    """Two warnings of one molecule, one of which contains "; ": the RPA fall-back note is forced here
    by making the RPA solver report an instability (no molecule found whose RPA falls back with the
    default model), the triplet-instability note is cyclobutadiene's own."""
    from ppp.batch.worker import compute_chunk
    from ppp.model import params
    from ppp.solvers import rpa

    def unstable(*a, **k):
        raise rpa.RPAInstabilityError("A - B is not positive definite (forced by the test)")

    monkeypatch.setattr(rpa, "kernel", unstable)
    opts = ppp.Options(response="rpa")
    res = compute_chunk([(0, 1, "cbd", CBD, "smiles", "")], opts, params.load(None).sha256)
    warns = ppp.compute(CBD, options=opts).warnings
    assert len(warns) == 2 and warns[0].startswith("RPA singlets not possible") and "; " in warns[0]
    assert warns[1].startswith("triplet instability")
    assert res.warnings == [warns[0] + " | " + warns[1]]
    assert S.split_warnings(res.warnings[0]) == warns


def test_join_and_split_are_inverse_and_stay_one_line():
    assert S.join_warnings(()) == "" and S.split_warnings("") == ()
    ws = ("plain", "with; semicolon", "two\nlines", "a | b")
    cell = S.join_warnings(ws)
    assert "\n" not in cell
    assert S.split_warnings(cell) == ("plain", "with; semicolon", "two lines", "a / b")


def test_export_has_the_warnings_column(v2, tmp_path):
    _, out = v2
    assert export(out, tmp_path / "t.csv") == len(LIBRARY)
    text = (tmp_path / "t.csv").read_text()
    assert len(text.splitlines()) == len(LIBRARY) + 1  # every row one line, warnings included
    rows = list(csv.DictReader(text.splitlines()))
    assert list(rows[0])[-1] == "warnings"
    with ResultsFile(out) as rf:
        assert [r["warnings"] for r in rows] == rf.text("warnings")
    assert rows[0]["warnings"].startswith("triplet instability") and rows[1]["warnings"] == ""
    try:
        import pyarrow.parquet as pq
    except ImportError:  # Parquet is optional: without pyarrow it is refused with a clear message
        with pytest.raises(InputError, match="pyarrow"):
            export(out, tmp_path / "t.parquet", status="ok")
        return
    export(out, tmp_path / "t.parquet", status="ok")
    table = pq.read_table(tmp_path / "t.parquet")
    assert table.column_names[-1] == "warnings"
    assert table.column("warnings").to_pylist() == [r["warnings"] for r in rows if r["status"] == "ok"]


def test_two_workers_and_a_sharded_run_give_the_same_file(v2, tmp_path):
    inp, out = v2
    run(inp, tmp_path / "j2.h5", jobs=2)
    assert_same_results(out, tmp_path / "j2.h5")
    shards = [tmp_path / f"s{k}.h5" for k in (1, 2)]
    for k, s in enumerate(shards, 1):
        run(inp, s, jobs=1, shard=(k, 2))
    merge(shards, tmp_path / "m.h5")
    assert_same_results(out, tmp_path / "m.h5", ignore_attrs=("shard",))


# -- version 1 ---------------------------------------------------------------------------------------

def test_version_1_layout_is_the_old_one(v1):
    _, path = v1
    with h5py.File(path, "r") as h5:
        assert sorted(h5["molecules"]) == sorted([n for n, _ in S.MOLECULE_NUMERIC] + list(V1_TEXT))
        assert h5.attrs["format_version"] == 1
        assert json.loads(h5["commits"].attrs["columns"])[1:-1] == S.dataset_paths(False, version=1)


def test_version_1_file_reads_with_empty_warnings(v1, v2, tmp_path):
    _, p1 = v1
    _, p2 = v2
    d1, a1 = contents(p1)
    d2, a2 = contents(p2)
    assert a1.pop("format_version") == 1 and a2.pop("format_version") == 2
    assert a1 == a2
    assert d1["molecules/warnings"] == [""] * len(LIBRARY)
    assert any(d2["molecules/warnings"])
    for key in d1:
        if key != "molecules/warnings":
            x, y = d1[key], d2[key]
            assert x == y if isinstance(x, list) else x.tobytes() == y.tobytes(), key
    with ResultsFile(p1) as rf:
        assert rf.version == 1 and rf.complete and rf.warnings() == [()] * len(LIBRARY)
        chunk = rf.chunk(0, rf.n_rows)
        assert chunk.warnings == [""] * len(LIBRARY) and chunk.key == d2["molecules/key"]
    assert export(p1, tmp_path / "v1.csv") == len(LIBRARY)
    rows = list(csv.DictReader((tmp_path / "v1.csv").read_text().splitlines()))
    assert [r["warnings"] for r in rows] == [""] * len(LIBRARY)
    export(p2, tmp_path / "v2.csv")
    rows2 = list(csv.DictReader((tmp_path / "v2.csv").read_text().splitlines()))
    assert [{k: v for k, v in r.items() if k != "warnings"} for r in rows] == \
        [{k: v for k, v in r.items() if k != "warnings"} for r in rows2]


def test_version_1_file_is_salvaged_and_compacted_in_its_own_layout(v1, tmp_path):
    _, p1 = v1
    got, claimed = salvage(p1, tmp_path / "saved.h5", stall_seconds=20)
    assert got == claimed == len(LIBRARY)
    copy = tmp_path / "copy.h5"
    copy.write_bytes(p1.read_bytes())
    rewrite(copy)
    for path in (tmp_path / "saved.h5", copy):
        with ResultsFile(path) as rf:
            assert rf.version == 1 and "warnings" not in rf.h5["molecules"]
        assert_same_results(p1, path, ignore_attrs=("status",))
    # a truncated version-1 file is refused with the usual one-line message
    cut = tmp_path / "cut.h5"
    cut.write_bytes(p1.read_bytes()[: p1.stat().st_size // 2])
    with pytest.raises(StorageError, match="damaged or truncated|not an HDF5 file"):
        ResultsFile(cut)


def test_version_1_shards_merge_and_mixed_versions_are_refused(v2, tmp_path):
    inp, _ = v2
    shards = [tmp_path / f"s{k}.h5" for k in (1, 2)]
    for k, s in enumerate(shards, 1):
        run(inp, s, jobs=1, shard=(k, 2))
    merge(shards, tmp_path / "m2.h5")
    _downgrade_to_v1(shards[0])
    with pytest.raises(StorageError) as err:
        merge(shards, tmp_path / "mixed.h5")
    msg = str(err.value)
    assert str(shards[0]) in msg and "format version 1" in msg and "--overwrite" in msg and "\n" not in msg
    assert not (tmp_path / "mixed.h5").exists()
    _downgrade_to_v1(shards[1])
    merge(shards, tmp_path / "m1.h5")
    with ResultsFile(tmp_path / "m1.h5") as rf1, ResultsFile(tmp_path / "m2.h5") as rf2:
        assert rf1.version == 1 and rf1.complete
        assert rf1.text("key") == rf2.text("key")
        np.testing.assert_array_equal(rf1.column("s1_ev"), rf2.column("s1_ev"))


def test_resuming_a_version_1_file_is_refused_with_what_to_do(v1, tmp_path, cli):
    inp, p1 = v1
    done = tmp_path / "done.h5"
    done.write_bytes(p1.read_bytes())
    assert run(inp, done, jobs=1).complete  # complete: nothing to add, nothing refused
    part = tmp_path / "part.h5"
    part.write_bytes(p1.read_bytes())
    with h5py.File(part, "r+") as h5:
        h5["run"].attrs["status"] = "incomplete"
    before = part.read_bytes()
    code, _, err = cli("batch", inp, "-o", part, "--jobs", "1", "--no-progress")
    assert code == 1 and len(err.strip().splitlines()) == 1
    assert "older ppp" in err and "format version 1" in err and "--overwrite" in err
    assert part.read_bytes() == before  # left untouched
    with pytest.raises(StorageError, match="format version 1"):
        ResultsWriter.append_to(part, {})
    summary = run(inp, part, jobs=1, overwrite=True)
    assert summary.complete
    with ResultsFile(part) as rf:
        assert rf.version == 2 and any(rf.text("warnings"))
    # the summary printed at the end of a batch says how many results carry warnings (cbd, two-cbd, octacene)
    assert summary.warned == 3 and "ok                    5 (3 with warnings" in "\n".join(summary.lines())
