"""Batch runs: readers, errors as data, identical files from 1 worker, 2 workers and a Dask cluster,
sharding + merge, export, and refusal to overwrite.

The reference for "identical" is the project's own clean run with 2 local workers: these are
consistency laws of the batch layer (the same inputs give the same numbers however they are
scheduled), not accuracy checks of the model.
"""
from __future__ import annotations

import csv
import gzip

import numpy as np
import pytest
from batch_helpers import BAD_LINES, assert_same_results, error_rows, n_rows, run, small_library

import ppp
from ppp.batch import inputs
from ppp.io.delimited import header_delimiter
from ppp.batch.export import export
from ppp.batch.merge import merge
from ppp.batch.reader import ResultsFile
from ppp.errors import InputError, StorageError


@pytest.fixture(scope="module")
def library(tmp_path_factory):
    d = tmp_path_factory.mktemp("lib")
    inp = d / "lib.smi"
    small_library(inp, n=30)
    ref = d / "ref.h5"
    summary = run(inp, ref, jobs=2)
    assert summary.complete
    return inp, ref


# -- readers -------------------------------------------------------------------------------------
def test_smiles_reader_numbers_lines_and_names(tmp_path):
    p = tmp_path / "a.smi"
    p.write_text("# header\n\nC=CC=C butadiene one\nc1ccccc1\n")
    items = list(inputs.read_items(p))
    assert [(i.index, i.source, i.name, i.payload) for i in items] == [
        (0, 3, "butadiene one", "C=CC=C"), (1, 4, "", "c1ccccc1")]


def test_csv_reader_columns_and_missing_value(tmp_path):
    p = tmp_path / "a.csv"
    p.write_text('code,structure,note\nX1,C=CC=C,"a, b"\nX2,,empty\nX3,c1ccccc1,\n')
    items = list(inputs.read_items(p, smiles_column="structure", id_column="code"))
    assert [(i.source, i.name, i.payload) for i in items] == [(2, "X1", "C=CC=C"), (3, "X2", ""), (4, "X3", "c1ccccc1")]
    assert "no value in column 'structure'" in items[1].problem
    with pytest.raises(InputError, match="no column 'smiles_here'"):
        list(inputs.read_items(p, smiles_column="smiles_here"))
    with pytest.raises(InputError, match="no SMILES column"):
        list(inputs.read_items(p))


def test_csv_from_a_spreadsheet_byte_order_mark_and_semicolons(tmp_path):
    # spreadsheet programs save "CSV UTF-8" with a byte-order mark, and with ";" between columns where the
    # decimal separator is a comma (common practice); both must read like a plain CSV, line numbers kept
    rows = [("X1", "C=CC=C"), ("X2", "c1ccccc1")]
    for sep in (",", ";", "\t", "|"):
        p = tmp_path / "sheet.csv"
        p.write_bytes(("\ufeff" + f"id{sep}smiles{sep}note\r\n"
                       + "".join(f"{k}{sep}{smi}{sep}x\r\n" for k, smi in rows)).encode("utf-8"))
        items = list(inputs.read_items(p))
        assert [(i.source, i.name, i.payload) for i in items] == [(2, "X1", "C=CC=C"), (3, "X2", "c1ccccc1")], sep
    # quoted commas in a ";" file do not count as separators
    p.write_text('name;smiles;comment\nA;C=CC=C;"red, bright"\n')
    assert [(i.name, i.payload) for i in inputs.read_items(p)] == [("A", "C=CC=C")]
    assert header_delimiter("smiles") == ","  # one column


def test_csv_smiles_column_of_database_exports(tmp_path):
    # column names as public database exports write them (common practice): the one column named like
    # SMILES is used; of a canonical and an isomeric one, the isomeric (E/Z kept)
    p = tmp_path / "pub.csv"
    p.write_text("CID,CanonicalSMILES,IsomericSMILES\n1,CC=CC,C/C=C/C\n")
    assert [i.payload for i in inputs.read_items(p)] == ["C/C=C/C"]
    p.write_text("Molecule ChEMBL ID;Name;Smiles\nCHEMBL1;butadiene;C=CC=C\n")
    assert [(i.name, i.payload) for i in inputs.read_items(p)] == [("butadiene", "C=CC=C")]
    p.write_text("smiles_a,smiles_b\nC=C,C=CC=C\n")  # two candidates, neither preferred: ask
    with pytest.raises(InputError, match="--smiles-column"):
        list(inputs.read_items(p))


def test_input_folder_and_output_over_input_are_refused(tmp_path):
    folder = tmp_path / "lib.smi"
    folder.mkdir()
    with pytest.raises(InputError, match="is a folder"):
        list(inputs.read_items(folder))
    inp = tmp_path / "a.smi"
    inp.write_text("C=CC=C\n")
    with pytest.raises(InputError, match="would replace the input"):
        run(inp, inp, jobs=1, overwrite=True)
    assert inp.read_text() == "C=CC=C\n"


def test_sdf_gz_reader_records_and_truncation(tmp_path):
    from rdkit import Chem
    blocks = []
    for name, smi in (("azo", "c1ccccc1/N=N/c1ccccc1"), ("diene", "C=CC=C")):
        m = Chem.MolFromSmiles(smi)
        m.SetProp("_Name", name)
        blocks.append(Chem.MolToMolBlock(m) + "$$$$\n")
    truncated = blocks[1].split("M  END")[0]  # a record cut before its end line
    p = tmp_path / "lib.sdf.gz"
    with gzip.open(p, "wt") as fh:
        fh.write("".join(blocks) + truncated)
    items = list(inputs.read_items(p))
    assert [(i.source, i.name, i.kind) for i in items] == [(1, "azo", "molblock"), (2, "diene", "molblock"),
                                                          (3, "diene", "molblock")]
    assert items[2].problem.startswith("truncated MOL block")
    out = tmp_path / "sdf.h5"
    run(p, out, jobs=1)
    rows = error_rows(out)
    with ResultsFile(out) as rf:
        assert rf.text("error_kind") == ["", "", "parse"]
        assert rf.text("error_message")[2].startswith("record 3:")
        # the ID of record 3 repeats record 2's, so its key is refused even though it failed anyway
        assert rf.text("key") == ["azo", "diene", "diene"]
    assert rows["azo"][0] == ""


def test_unknown_format_is_refused(tmp_path):
    p = tmp_path / "lib.xyz"
    p.write_text("C=C\n")
    with pytest.raises(InputError, match="--format"):
        list(inputs.read_items(p))


# -- errors are data ------------------------------------------------------------------------------
def test_every_bad_input_kind_lands_in_the_file(library):
    inp, ref = library
    rows = error_rows(ref)
    for smi, name, kind in BAD_LINES:
        got_kind, msg = rows[name]
        assert got_kind, f"{name} ({smi}) should have failed"
        if kind is not None:
            assert got_kind == kind, (name, got_kind, msg)
        assert msg.startswith("line "), msg  # the line number travels with the error
        line_no = int(msg.split()[1].rstrip(":"))
        assert inp.read_text().splitlines()[line_no - 1].startswith(smi)
    with ResultsFile(ref) as rf:
        status = rf.column("status")
        assert rf.n_rows == 34 and int((status == 0).sum()) >= 25
        # failed rows have no states; ok rows point at theirs
        counts = rf.column("state_count")
        assert np.all(counts[status == 1] == 0) and np.all(counts[status == 0] > 0)


#: 245 centres: several seconds, far beyond a 0.5 s limit, while hexatriene takes a few ms even on a
#: loaded machine (workers pay one-time costs, such as loading cached numba kernels, before the first input)
SLOW = "CN(C)" + "c1ccc(cc1)" * 40 + "C#N"


def run_with_half_second_limit(tmp_path, lines: str):
    """Batch of ``lines`` on one worker with a 0.5 s time limit: (error kinds, error messages)."""
    inp, out = tmp_path / "x.smi", tmp_path / "x.h5"
    inp.write_text(lines)
    run(inp, out, jobs=1, time_limit=0.5)
    with ResultsFile(out) as rf:
        return rf.text("error_kind"), rf.text("error_message")


def test_scf_failure_timeout_and_duplicate_are_recorded(tmp_path):
    kinds, msgs = run_with_half_second_limit(tmp_path, f"C=CC=CC=C\n{SLOW} big\nC=CC=CC=C\n")
    inp = tmp_path / "x.smi"
    assert kinds == ["", "timeout", "duplicate"]
    assert msgs[1] == "line 2: stopped after the time limit of 0.5 s"
    assert "already used by line 1" in msgs[2]
    out2 = tmp_path / "y.h5"
    run(inp, out2, jobs=1, options=ppp.Options(max_iter=1), time_limit=None)
    with ResultsFile(out2) as rf:
        assert rf.text("error_kind")[0] == "convergence"
        assert "SCF did not converge" in rf.text("error_message")[0]


def test_time_limit_holds_in_workers_forked_from_a_process_with_a_watchdog(tmp_path):
    # Local workers are forked on Linux. A watchdog thread started in the parent (here: this test
    # process computing a chunk itself) does not survive the fork; a worker that inherited the parent's
    # watchdog object would arm deadlines nobody checks and the time limit would silently not hold.
    from ppp.batch import worker
    worker.compute_chunk([(0, 1, "", "C=C", "smiles", "")], ppp.Options(), ppp.model.params.load().sha256,
                         False, 30.0)
    assert worker._WATCHDOG is not None
    kinds, _ = run_with_half_second_limit(tmp_path, f"{SLOW} big\n")
    assert kinds == ["timeout"]


# -- same file whatever the scheduling --------------------------------------------------------------
def test_one_worker_gives_the_same_file(library, tmp_path):
    inp, ref = library
    out = tmp_path / "one.h5"
    run(inp, out, jobs=1)
    assert_same_results(ref, out)


def test_dask_cluster_gives_the_same_file(library, tmp_path, monkeypatch):
    distributed = pytest.importorskip("distributed")  # the 'test' extra installs it; CI runs this
    from ppp.batch.runner import THREAD_ENV
    inp, ref = library
    for key, val in THREAD_ENV.items():  # as docs/batch.md asks of cluster workers
        monkeypatch.setenv(key, val)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        assert cluster.scheduler_address.startswith("tcp://127.0.0.1:")
        out = tmp_path / "dask.h5"
        summary = run(inp, out, scheduler=cluster.scheduler_address)
        assert summary.complete and "Dask" in summary.workers
    assert_same_results(ref, out)


def test_shards_merged_equal_the_whole_run(library, tmp_path):
    inp, ref = library
    parts = []
    for k in (1, 2, 3):
        p = tmp_path / f"shard{k}.h5"
        # shard 1 on a cluster ppp starts itself (loopback only), the others on local processes
        run(inp, p, jobs=2 if k == 1 else 1, shard=(k, 3), scheduler="local" if k == 1 else None)
        parts.append(p)
    with ResultsFile(parts[0]) as rf:
        assert set(rf.column("input_index") % 3) == {0}
    merged = tmp_path / "merged.h5"
    rep = merge([parts[1], parts[0], parts[2], parts[1]], merged)  # a shard given twice
    assert rep["complete"] and rep["rows"] == n_rows(ref) and rep["duplicates_dropped"] == n_rows(parts[1])
    assert_same_results(ref, merged, ignore_attrs=("shard",))
    with pytest.raises(StorageError, match="exists"):
        merge(parts, merged)
    # an incomplete set of shards is marked so that it can never be taken for a whole run
    partial = tmp_path / "partial.h5"
    rep = merge(parts[:2], partial)
    assert not rep["complete"]
    with ResultsFile(partial) as rf:
        assert rf.attrs["shard"] == "merged" and rf.attrs["status"] == "incomplete"


def test_different_input_or_options_refuse_to_resume(library, tmp_path):
    inp, ref = library
    with pytest.raises(StorageError, match="differs in: options"):
        run(inp, ref, jobs=1, options=ppp.Options(n_singlets=3))
    other = tmp_path / "other.smi"
    other.write_text("C=CC=C\n")
    with pytest.raises(StorageError, match="input_sha256"):
        run(other, ref, jobs=1)
    summary = run(inp, ref, jobs=1)  # complete file, same run: nothing to do
    assert summary.complete and summary.written == 0


# -- export ----------------------------------------------------------------------------------------
def test_export_csv_filters_by_status(library, tmp_path):
    inp, ref = library
    out = tmp_path / "all.csv"
    n = export(ref, out)
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert n == len(rows) == n_rows(ref)
    with ResultsFile(ref) as rf:
        s1 = rf.column("s1_nm")
        ok = rf.column("status") == 0
    got = np.array([float(r["s1_nm"]) if r["s1_nm"] else np.nan for r in rows])
    assert np.array_equal(got, s1, equal_nan=True)  # full precision survives the CSV
    bad = tmp_path / "failed.csv"
    assert export(ref, bad, status="failed") == int((~ok).sum())
    with open(bad, newline="") as fh:
        failed = list(csv.DictReader(fh))
    assert {r["name"] for r in failed} >= {name for _, name, _ in BAD_LINES}
    assert all(r["status"] == "failed" and r["error_message"] for r in failed)
    with pytest.raises(StorageError, match="exists"):
        export(ref, out)
    with pytest.raises(StorageError, match="would replace the results file"):
        export(ref, ref, overwrite=True)
    assert n_rows(ref) == len(rows)


def test_export_states_one_row_per_stored_state(library, tmp_path, cli):
    # consistency law of the store: the long table holds exactly the stored states, in order, with the
    # numbers unchanged, and its S1/T1 rows agree with the molecules table's summary columns
    inp, ref = library
    out = tmp_path / "states.csv"
    n = export(ref, out, table="states")
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    with ResultsFile(ref) as rf:
        energy = rf.states("energy_ev")
        f = rf.states("oscillator_strength")
        count = rf.column("state_count")
        keys = rf.text("key")
        s1 = dict(zip(keys, rf.column("s1_ev")))
        t1 = dict(zip(keys, rf.column("t1_ev")))
    assert n == len(rows) == len(energy) == int(count.sum()) > 0
    assert np.array_equal([float(r["energy_ev"]) for r in rows], energy)
    assert np.array_equal([float(r["oscillator_strength"]) for r in rows], f)
    assert {r["key"] for r in rows} == {k for k, c in zip(keys, count) if c > 0}
    for r in rows:
        assert r["state"] == ("S" if r["multiplicity"] == "1" else "T") + r["root"]  # one chromophore each
        if r["state"] in ("S1", "T1"):
            assert float(r["energy_ev"]) == (s1 if r["state"] == "S1" else t1)[r["key"]]
        assert r["dominant"] == ("H" + (f"-{r['dominant_homo_minus']}" if r["dominant_homo_minus"] != "0" else "")
                                 + "->L" + (f"+{r['dominant_lumo_plus']}" if r["dominant_lumo_plus"] != "0" else ""))
    with pytest.raises(InputError, match="no states"):
        export(ref, tmp_path / "x.csv", table="states", status="failed")
    code, text, _ = cli("export", ref, "-o", tmp_path / "cli.csv", "--states")
    assert code == 0 and f"wrote {n} state(s)" in text
    assert (tmp_path / "cli.csv").read_bytes() == out.read_bytes()


def test_export_ranking_selects_and_orders_like_sorting_the_full_table(library, tmp_path, cli):
    # law of a ranking: the same rows and order as sorting the full export (stable, NaN left out)
    from ppp.batch.export import Selection
    inp, ref = library
    full = tmp_path / "all.csv"
    export(ref, full)
    with open(full, newline="") as fh:
        rows = list(csv.DictReader(fh))
    val = np.array([float(r["bright_f"]) if r["bright_f"] else np.nan for r in rows])
    ok = np.isfinite(val)
    expect = [rows[i]["key"] for i in np.flatnonzero(ok)[np.argsort(-val[ok], kind="stable")][:5]]
    out = tmp_path / "top.csv"
    assert export(ref, out, select=Selection(by="bright_f", top=5)) == 5
    with open(out, newline="") as fh:
        assert [r["key"] for r in csv.DictReader(fh)] == expect
    # smallest first; a band window on the brightest band; the states of the selected molecules, grouped
    e1 = np.array([float(r["s1_ev"]) if r["s1_ev"] else np.nan for r in rows])
    low = [rows[i]["key"] for i in np.flatnonzero(np.isfinite(e1))[np.argsort(e1[np.isfinite(e1)], kind="stable")][:3]]
    st = tmp_path / "st.csv"
    export(ref, st, table="states", select=Selection(by="s1_ev", ascending=True, top=3))
    with open(st, newline="") as fh:
        keys = [r["key"] for r in csv.DictReader(fh)]
    assert list(dict.fromkeys(keys)) == low and keys == sorted(keys, key=low.index)
    nm = np.array([float(r["bright_nm"]) if r["bright_nm"] else np.nan for r in rows])
    lo, hi = np.nanpercentile(nm, 25), np.nanpercentile(nm, 75)
    band = tmp_path / "band.csv"
    n = export(ref, band, select=Selection(band_nm=(lo, hi)))
    assert n == int(np.sum((nm >= lo) & (nm <= hi))) > 0
    code, _, err = cli("export", ref, "-o", tmp_path / "x.csv", "--by", "colour")
    assert code == 1 and "cannot rank by 'colour'" in err and "bright_f" in err
    # '-o -': the same CSV on standard output, the count on standard error
    code, text, err = cli("export", ref, "-o", "-", "--by", "bright_f", "--top", "5")
    assert code == 0 and text.replace("\r\n", "\n") == out.read_text() and "5 molecule(s)" in err


def test_export_uncertainty_is_the_one_a_run_shows(library, tmp_path):
    # the class and class error of each molecule equal those 'ppp run' attaches to the same molecule
    # (ppp.calibration.uncertainty.for_result), taken from the parameter set kept in the results file
    from ppp.calibration.uncertainty import for_result
    inp, ref = library
    out = tmp_path / "u.csv"
    export(ref, out, uncertainty=True)
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    ok = [r for r in rows if r["status"] == "ok"]
    assert all(r["class"] == "" and r["class_error_ev"] == "" for r in rows if r["status"] == "failed")
    for r in ok[:4]:
        u = for_result(ppp.compute(r["smiles"]))
        assert r["class"] == u.cls or u.cls == "all"
        assert float(r["class_error_ev"]) == pytest.approx(u.sigma_ev, abs=1e-12)
        nm = float(r["bright_nm"])
        assert float(r["bright_uncertainty_nm"]) == pytest.approx(nm * u.sigma_ev / float(r["bright_ev"]),
                                                                   rel=1e-12)
    # a solvent run gets no gas-phase figure (the class errors were measured in the gas phase)
    solv = tmp_path / "solv.h5"
    lines = inp.read_text().splitlines()
    sub = tmp_path / "sub.smi"
    sub.write_text("\n".join(lines[:4]) + "\n")
    run(sub, solv, jobs=1, options=ppp.Options(solvent="ethanol"))
    export(solv, tmp_path / "s.csv", uncertainty=True, status="ok")
    with open(tmp_path / "s.csv", newline="") as fh:
        srows = list(csv.DictReader(fh))
    assert srows and all(r["class"] and r["class_error_ev"] == "" for r in srows)


def test_export_colour_equals_the_spectrum_command(library, tmp_path, cli):
    # the colour column of a molecule is the colour 'ppp spectrum' gives for the same stored states
    import json
    inp, ref = library
    out = tmp_path / "c.csv"
    code, _, err = cli("export", ref, "-o", out, "--colour", "--concentration", "2e-5")
    assert code == 0, err
    with open(out, newline="") as fh:
        rows = list(csv.DictReader(fh))
    ok = [r for r in rows if r["status"] == "ok"]
    assert all(r["colour_hex"].startswith("#") for r in ok)
    assert all(r["colour_hex"] == "" and r["colour_L_star"] == "" for r in rows if r["status"] == "failed")
    for r in ok[:3]:
        code, text, err = cli("spectrum", "--record", ref, "--molecule", r["key"], "--json", "--concentration",
                              "2e-5", "--out", tmp_path / r["key"].replace(" ", "_"))
        assert code == 0, err
        doc = json.loads(text)["colour"]
        assert doc["hex"] == r["colour_hex"]
        assert [float(r["colour_L_star"]), float(r["colour_a_star"]), float(r["colour_b_star"])] == \
            pytest.approx(doc["Lab"], abs=2e-3)  # the JSON rounds to 3 decimals
    code, _, err = cli("export", ref, "-o", tmp_path / "s.csv", "--states", "--colour")
    assert code == 1 and "molecules table" in err


def test_export_parquet_when_pyarrow_is_present(library, tmp_path):
    inp, ref = library
    try:
        import pyarrow.parquet as pq
    except ImportError:
        with pytest.raises(InputError, match="pyarrow"):
            export(ref, tmp_path / "x.parquet")
        return
    n = export(ref, tmp_path / "x.parquet", status="ok")
    table = pq.read_table(tmp_path / "x.parquet")
    assert table.num_rows == n and "bright_nm" in table.column_names
    n = export(ref, tmp_path / "s.parquet", table="states")
    table = pq.read_table(tmp_path / "s.parquet")
    assert table.num_rows == n and table.column("state")[0].as_py() == "S1"
    from ppp.batch.export import Selection
    export(ref, tmp_path / "r.parquet", select=Selection(by="bright_f", top=3))
    table = pq.read_table(tmp_path / "r.parquet")
    assert table.num_rows == 3 and "_rank" not in table.column_names
    f = table.column("bright_f").to_pylist()
    assert f == sorted(f, reverse=True)


def test_cli_batch_refuses_a_foreign_file_without_overwrite(tmp_path, cli):
    inp = tmp_path / "a.smi"
    inp.write_text("C=CC=C\n")
    out = tmp_path / "r.h5"
    out.write_text("not a results file\n")
    code, _, err = cli("batch", inp, "-o", out, "--jobs", "1")
    assert code == 1 and err.startswith("error:") and "not an HDF5 file" in err and "--overwrite" in err
    assert len(err.strip().splitlines()) == 1


def test_unexpected_library_error_is_one_line_in_the_store(monkeypatch):
    """An exception that is not ppp's own (a bug, or a library failure nobody foresaw) is recorded as
    kind 'internal' with a one-line message, however many lines the library's message had (RDKit's
    invariant violations span five; found with RDKit's NCI test set, 2026-12-02); the rest of the chunk
    goes on."""
    from ppp.batch import worker

    def broken(mol, name=None, options=None):
        if mol.GetNumAtoms() == 2:
            raise RuntimeError("Invariant Violation\n\tbad lower bound\n\tViolation occurred on line 204")
        return ppp.compute(mol, name=name, options=options)

    monkeypatch.setattr(worker, "compute", broken)
    res = worker.compute_chunk([(0, 1, "", "C=C", "smiles", ""), (1, 2, "", "C=CC=C", "smiles", "")],
                               ppp.Options(), ppp.model.params.load().sha256)
    assert res.error_kind == ["internal", ""]
    msg = res.error_message[0]
    assert "\n" not in msg and "\t" not in msg and "bad lower bound" in msg
