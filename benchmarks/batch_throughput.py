"""Batch throughput: molecules per second of ``ppp batch`` (HDF5 writes included) next to the same
molecules computed one by one in a plain loop, peak memory as the library grows, file size per molecule.

Usage::

    python benchmarks/batch_throughput.py                 # demo library + 20,000 generated dyes
    python benchmarks/batch_throughput.py --n 2000        # quicker
    python benchmarks/batch_throughput.py --jobs 2 --loop-n 300

The plain loop runs in this process on ``--loop-n`` molecules drawn evenly from each library (the full
library for the demo), so its rate is an estimate for the whole library. BLAS is limited to one thread
per process here and in the workers (as ``ppp batch`` does), so the ratio measures parallel speed-up
and batch overhead rather than BLAS threading.
"""
from __future__ import annotations

import os

for _k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_k, "1")

import argparse  # noqa: E402
import json  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

import ppp  # noqa: E402
from ppp.batch import inputs  # noqa: E402
from ppp.batch.synthetic import dye_library, write_smiles_file  # noqa: E402
from ppp.commands.demo import DEMO_LIBRARY  # noqa: E402

_CHILD = r"""
import json, resource, sys, time
from pathlib import Path
sys.path.insert(0, {root!r})
from ppp.batch.runner import BatchConfig, run_batch
t = time.perf_counter()
s = run_batch(BatchConfig(input=Path({inp!r}), output=Path({out!r}), jobs={jobs}, overwrite=True, progress=False))
wall = time.perf_counter() - t
ru_s, ru_c = resource.getrusage(resource.RUSAGE_SELF), resource.getrusage(resource.RUSAGE_CHILDREN)
print(json.dumps({{"wall": wall, "startup": s.startup_seconds,
                  "cpu": ru_s.ru_utime + ru_s.ru_stime + ru_c.ru_utime + ru_c.ru_stime, "rows": sum(s.counts.values()), "ok": s.counts.get("ok", 0),
                  "parent_rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                  "worker_rss_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024}}))
"""


_WRITER_CHILD = r"""
import os, resource, sys, time
import numpy as np
sys.path.insert(0, {root!r})
from pathlib import Path
from ppp.batch.reader import rewrite
from ppp.batch.store import ResultsWriter
from ppp.batch.worker import ChunkResult
n_total, rows, k = {n}, 500, 20  # 20 states per molecule, as with 10 singlets + 10 triplets
out = Path({out!r})
attrs = dict(input_sha256="-", input_format="smiles", options="{{}}", parameters_sha256="-", shard="1/1",
             heavy=False, smiles_column="", id_column="", program_version="-", parameters="-", input_name="-",
             input_records=n_total, expected_rows=n_total, time_limit=0.0)
w = ResultsWriter.create(out, attrs, "")
rng = np.random.default_rng(0)
t = time.perf_counter()
for start in range(0, n_total, rows):
    n = min(rows, n_total - start)
    m = n * k
    c = ChunkResult(index=np.arange(start, start + n), source=np.arange(start, start + n) + 1)
    c.key = [f"id-{{i}}" for i in range(start, start + n)]
    c.name = list(c.key)
    c.smiles = ["CN(C)c1ccc(cc1)/N=N/c1ccc(cc1)[N+](=O)[O-]"] * n
    c.canonical_smiles = list(c.smiles)
    c.error_kind, c.error_message, c.warnings = [""] * n, [""] * n, [""] * n
    c.ints, c.floats, c.n_states = np.ones((n, 3), np.int64), rng.random((n, 10)), np.full(n, k)
    c.states = {{"chromophore": np.zeros(m, np.int16), "multiplicity": np.ones(m, np.int8),
                "root": np.ones(m, np.int16), "energy_ev": rng.random(m), "wavelength_nm": rng.random(m),
                "oscillator_strength": rng.random(m), "transition_dipole": rng.random((m, 3)),
                "polarization_deg": rng.random(m), "dominant_homo_minus": np.zeros(m, np.int16),
                "dominant_lumo_plus": np.zeros(m, np.int16), "dominant_weight": rng.random(m)}}
    w.add(c)
    if w.pending_rows >= 1000:
        w.commit()
w.close(complete=True)
write_s = time.perf_counter() - t
rss_write = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
rewrite(out)
print(n_total / write_s, rss_write, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
      os.path.getsize(out) / n_total)
"""


def writer_only(sizes: list[int], tmp: Path) -> None:
    """Memory and speed of the writer alone (synthetic rows, no chemistry), to large sizes."""
    print("writer alone (synthetic rows, 20 states each; parent side of a batch):")
    for n in sizes:
        code = _WRITER_CHILD.format(root=str(ROOT), n=n, out=str(tmp / f"w{n}.h5"))
        res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
        rate, rss_w, rss_r, size = (float(x) for x in res.stdout.split())
        print(f"  {n:>8d} molecules  {rate:8.0f} mol/s written  peak RSS {rss_w:5.0f} MB writing, "
              f"{rss_r:5.0f} MB after compaction  file {size:6.0f} B/mol")


def batch_in_subprocess(inp: Path, out: Path, jobs: int) -> dict:
    code = _CHILD.format(root=str(ROOT), inp=str(inp), out=str(out), jobs=jobs)
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    data = json.loads(res.stdout.strip().splitlines()[-1])
    data["file_bytes"] = out.stat().st_size
    return data


def loop_rate(path: Path, count: int) -> tuple[float, int]:
    """Molecules per second of ppp.compute in a plain loop over ``count`` evenly spaced inputs."""
    items = [it for it in inputs.read_items(path)]
    step = max(1, len(items) // count)
    pick = items[::step][:count]
    ppp.compute("C=CC=C")  # imports and caches outside the timing
    t, c = time.perf_counter(), time.process_time()
    for it in pick:
        try:
            ppp.compute(it.payload, name=it.name)
        except ppp.PPPError:
            pass
    return len(pick) / (time.perf_counter() - t), len(pick), (time.process_time() - c) / len(pick)


def write_repeated(src: Path, dst: Path, times: int) -> None:
    """The SMILES file ``src`` repeated ``times`` times, each copy's IDs suffixed with "#k" so that no
    record is a duplicate of another."""
    items = list(inputs.read_items(src))
    with open(dst, "w") as fh:
        for k in range(times):
            for it in items:  # the deliberately bad lines stay bad
                fh.write(f"{it.payload} {it.name or 'x'}#{k}\n")


def report(label: str, path: Path, jobs: int, loop_n: int, tmp: Path) -> dict:
    b = batch_in_subprocess(path, tmp / f"{label}.h5", jobs)
    rate = b["rows"] / b["wall"]
    steady = b["rows"] / max(b["wall"] - b["startup"], 1e-9)
    lrate, ln, lcpu = loop_rate(path, loop_n)
    print(f"{label:<20s} {b['rows']:>6d} mol  batch {rate:7.1f} mol/s overall, {steady:7.1f} after "
          f"{b['startup']:.1f} s start-up ({jobs} workers, HDF5 incl.)  "
          f"plain loop {lrate:6.1f} mol/s (on {ln})  ratio {rate / lrate:4.2f} / {steady / lrate:4.2f}  "
          f"file {b['file_bytes'] / b['rows']:7.0f} B/mol  peak RSS parent {b['parent_rss_mb']:.0f} MB, "
          f"worker {b['worker_rss_mb']:.0f} MB  CPU per molecule: batch {1000 * b['cpu'] / b['rows']:.1f} ms "
          f"(all processes, start-up included), loop {1000 * lcpu:.1f} ms")
    return b


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=20000, help="size of the generated library (20000)")
    ap.add_argument("--jobs", type=int, default=2, help="worker processes (2)")
    ap.add_argument("--loop-n", type=int, default=300, help="molecules in the plain-loop reference (300)")
    ap.add_argument("--seed", type=int, default=20240601, help="seed of the generated library")
    ap.add_argument("--min-centres", type=int, default=10)
    ap.add_argument("--max-centres", type=int, default=60)
    ap.add_argument("--writer-sizes", default="10000,50000,200000",
                    help="library sizes for the writer-only memory check (comma-separated; empty: skip)")
    ap.add_argument("--demo-repeat", type=int, default=10,
                    help="also run the demo library repeated this many times, IDs made unique (10; 1: skip)")
    args = ap.parse_args()
    print(f"ppp {ppp.__version__}, python {sys.version.split()[0]}, {os.cpu_count()} cores, "
          f"load average {os.getloadavg()[0]:.1f}")
    with tempfile.TemporaryDirectory(prefix="ppp-bench-") as td:
        tmp = Path(td)
        if args.writer_sizes:
            writer_only([int(x) for x in args.writer_sizes.split(",")], tmp)
        report("demo library", DEMO_LIBRARY, args.jobs, 10_000, tmp)
        if args.demo_repeat > 1:
            # the same real dyes, enough of them that the run is not mostly start-up and compaction
            rep = tmp / f"demo_x{args.demo_repeat}.smi"
            write_repeated(DEMO_LIBRARY, rep, args.demo_repeat)
            report(f"demo x{args.demo_repeat}", rep, args.jobs, 10_000, tmp)
        smiles = dye_library(args.n, seed=args.seed, min_centres=args.min_centres, max_centres=args.max_centres)
        print(f"memory and size as the generated library ({args.min_centres}-{args.max_centres} centres) grows:")
        for frac in (4, 2, 1):
            n = args.n // frac
            lib = tmp / f"gen{n}.smi"
            write_smiles_file(lib, smiles[:n])
            report(f"generated {n}", lib, args.jobs, args.loop_n if frac == 1 else max(50, args.loop_n // 4), tmp)


if __name__ == "__main__":
    main()
