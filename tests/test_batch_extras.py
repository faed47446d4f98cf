"""Batch extras: heavy data on request, the demo command and its bundled library, the progress bar,
and command-line behaviour (one-line errors, refusal to overwrite)."""
from __future__ import annotations

import io

import numpy as np
import pytest
from batch_helpers import run

import ppp
from ppp.batch import inputs
from ppp.batch.progress import Progress
from ppp.batch.reader import ResultsFile
from ppp.commands.demo import DEMO_LIBRARY


def test_heavy_data_matches_a_direct_computation(tmp_path):
    inp = tmp_path / "h.smi"
    inp.write_text("CN(C)c1ccc(cc1)/N=N/c1ccccc1 dab\nC=CC=C.c1ccccc1 two-chromophores\nCCC none\n")
    out = tmp_path / "h.h5"
    run(inp, out, jobs=1, heavy=True)
    with ResultsFile(out) as rf:
        assert rf.heavy
        chunk = rf.chunk(0, rf.n_rows)
    assert [len(h) for h in chunk.heavy] == [1, 2, 0]
    for row, smi in ((0, "CN(C)c1ccc(cc1)/N=N/c1ccccc1"), (1, "C=CC=C.c1ccccc1")):
        ref = ppp.compute(smi)
        for stored, c in zip(chunk.heavy[row], ref.chromophores):
            # a re-computation in this process agrees with what the worker stored (same code, same input)
            np.testing.assert_allclose(stored["mo_energy_ev"], c.scf.mo_energy, rtol=0, atol=1e-10)
            np.testing.assert_allclose(stored["gamma_ev"], c.model.gamma, rtol=0, atol=1e-12)
            np.testing.assert_allclose(np.abs(stored["mo_coeff"]), np.abs(c.scf.mo_coeff), atol=1e-8)
            assert stored["singlet_amplitudes"].shape == c.singlet_amplitudes.shape
            assert stored["coordinates_angstrom"].shape == (c.model.n_centres, 3)
    # the light tables agree with the heavy data: S1 of the azo dye
    with ResultsFile(out) as rf:
        s1 = rf.column("s1_ev")[0]
    assert s1 == pytest.approx(ppp.compute("CN(C)c1ccc(cc1)/N=N/c1ccccc1").s1.energy_ev, abs=1e-10)


def test_demo_library_is_bundled_and_has_its_bad_lines():
    assert DEMO_LIBRARY.is_file() and DEMO_LIBRARY.parent.name == "data" and DEMO_LIBRARY.parent.parent.name == "ppp"
    items = list(inputs.read_items(DEMO_LIBRARY))
    assert 180 <= len(items) <= 220
    assert len({it.name for it in items}) == len(items)  # IDs are unique
    assert all(it.name.startswith("HC-") for it in items)


def test_demo_command_writes_results_and_csv_and_refuses_to_overwrite(tmp_path, cli):
    out = tmp_path / "demo.h5"
    code, stdout, err = cli("demo", "-o", out, "--jobs", "2")
    assert code == 0, err
    assert out.is_file() and (tmp_path / "demo.csv").is_file()
    assert "(complete)" in stdout and "failed" in stdout
    with ResultsFile(out) as rf:
        kinds = set(rf.text("error_kind"))
        assert rf.complete and rf.n_rows == len(list(inputs.read_items(DEMO_LIBRARY)))
    assert {"parse", "radical", "unsupported_element", "no_pi_system"} <= kinds
    csv_lines = (tmp_path / "demo.csv").read_text().splitlines()
    assert len(csv_lines) == rf.n_rows + 1 and csv_lines[0].startswith("key,name,")
    assert csv_lines[0].endswith(",colour_hex,colour_L_star,colour_a_star,colour_b_star,class,class_error_ev,"
                                 "bright_uncertainty_nm")
    code, _, err = cli("demo", "-o", out)
    assert code == 1 and "exists" in err and "--overwrite" in err


def test_progress_bar_is_quiet_off_a_terminal_and_shows_rate_and_eta():
    quiet = io.StringIO()
    p = Progress(10, quiet)
    p.advance(5)
    p.show(force=True)
    p.finish()
    assert quiet.getvalue() == ""
    loud = io.StringIO()
    p = Progress(10, loud, enabled=True)
    p.advance(4, failed=1)
    p.show(force=True)
    p.finish()
    text = loud.getvalue()
    assert "4/10" in text and "mol/s" in text and "ETA" in text and "failed 1" in text


def test_cli_batch_errors_are_one_line(tmp_path, cli):
    code, _, err = cli("batch", tmp_path / "missing.smi", "-o", tmp_path / "r.h5")
    assert code == 1 and err.strip() == f"error: input file '{tmp_path / 'missing.smi'}' does not exist"
    p = tmp_path / "a.smi"
    p.write_text("C=C\n")
    for bad in ("3/2", "x", "0/4"):
        code, _, err = cli("batch", p, "-o", tmp_path / "r.h5", "--shard", bad)
        assert code == 1 and "--shard" in err and len(err.strip().splitlines()) == 1
    code, _, err = cli("export", tmp_path / "nothing.h5", "-o", tmp_path / "x.csv")
    assert code == 1 and "does not exist" in err


def test_key_index_behaves_like_a_first_wins_dict_across_merges():
    """The writer's compact duplicate index (ppp.batch.store.KeyIndex) against a plain dict, with merges
    forced every 7 keys and repeated keys (fixed seed)."""
    from ppp.batch.store import KeyIndex
    rng = np.random.default_rng(7)
    keys = rng.integers(0, 2**64 - 1, size=300, dtype=np.uint64).tolist()
    keys += keys[::5]  # repeats: the first source must win
    idx, ref = KeyIndex(merge_at=7), {}
    for src, h in enumerate(keys):
        assert idx.get(h) == ref.get(h)
        assert idx.setdefault(h, src) == ref.setdefault(h, src)
    assert len(idx) == len(ref)
    assert idx.get(12345) is None
