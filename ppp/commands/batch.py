"""``ppp batch``: compute a library into a resumable HDF5 results file."""
from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from .common import add_model_arguments, options_from

NAME = "batch"
HELP = "compute a library of molecules (SMILES, CSV or SDF file) into an HDF5 results file; resumable"


def parse_shard(text: str) -> tuple[int, int]:
    try:
        k, n = (int(x) for x in text.split("/"))
    except ValueError:
        raise InputError(f"--shard must look like K/N (e.g. 3/10), got '{text}'") from None
    if not (n >= 1 and 1 <= k <= n):
        raise InputError(f"--shard K/N needs 1 <= K <= N, got {text}")
    return k, n


def add_input_arguments(p) -> None:
    g = p.add_argument_group("input")
    g.add_argument("--format", choices=("smiles", "csv", "tsv", "sdf"),
                   help="input format (default: from the file name; .gz is looked through)")
    g.add_argument("--smiles-column", metavar="NAME",
                   help="CSV column holding the SMILES (default: 'smiles', else the one column named like it)")
    g.add_argument("--id-column", metavar="NAME",
                   help="CSV column (or SDF data field) holding the molecule ID (default: 'id' or 'name' "
                        "column; SDF title line)")


def add_run_arguments(p) -> None:
    g = p.add_argument_group("run")
    g.add_argument("--jobs", "-j", type=int, default=0, metavar="N", help="worker processes (default: all cores)")
    g.add_argument("--time-limit", type=float, default=120.0, metavar="SECONDS",
                   help="per-molecule time limit; a molecule past it is recorded as failed (120; 0: none)")
    g.add_argument("--scf-max-iter", type=int, default=100, metavar="N", help="SCF iterations per attempt (100)")
    g.add_argument("--heavy", action="store_true",
                   help="also store model matrices, orbitals and CI vectors of every molecule (large)")
    g.add_argument("--block-size", type=int, default=1000, metavar="N",
                   help="molecules per committed block: at most this many are recomputed after a crash (1000)")
    g.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on a Dask cluster (tcp://host:port), or 'local' for a cluster of --jobs processes "
                        "on this machine (loopback only); needs the 'cluster' extra")
    g.add_argument("--shard", metavar="K/N", help="compute only inputs K, K+N, K+2N, ... (for job arrays; join "
                                                  "the shard files with 'ppp merge')")
    g.add_argument("--progress", dest="progress", action="store_true", default=None,
                   help="show the progress bar even when stderr is not a terminal")
    g.add_argument("--no-progress", dest="progress", action="store_false", help="never show the progress bar")
    g.add_argument("--overwrite", action="store_true", help="start again, replacing an existing results file")


def add_arguments(p) -> None:
    p.add_argument("input", metavar="INPUT", help="SMILES file (.smi), CSV/TSV table, or SDF file (.sdf, .sdf.gz)")
    p.add_argument("-o", "--output", required=True, metavar="RESULTS.h5", help="results file (created or resumed)")
    add_input_arguments(p)
    add_run_arguments(p)
    add_model_arguments(p)


def config_from(args, input_path: Path, output: Path):
    from dataclasses import replace

    from ..batch.runner import BatchConfig
    if args.jobs < 0:
        raise InputError("--jobs must be positive (0: all cores)")
    if args.block_size < 1:
        raise InputError("--block-size must be at least 1")
    if args.time_limit < 0:
        raise InputError("--time-limit must not be negative")
    options = replace(options_from(args), max_iter=args.scf_max_iter)
    return BatchConfig(input=input_path, output=output, options=options, fmt=args.format,
                       smiles_column=args.smiles_column, id_column=args.id_column, jobs=args.jobs,
                       heavy=args.heavy, time_limit=args.time_limit or None,
                       shard=parse_shard(args.shard) if args.shard else (1, 1), scheduler=args.scheduler,
                       overwrite=args.overwrite, block_size=args.block_size, progress=args.progress)


def main(args) -> int:
    from ..batch.runner import run_batch
    cfg = config_from(args, Path(args.input), Path(args.output))
    summary = run_batch(cfg)
    print("\n".join(summary.lines()))
    if summary.complete:
        out = args.output
        print(f"next: ppp export {out} -o {Path(out).with_suffix('.csv').name} (the table; --by bright_f --top 100 "
              f"--band-nm 450 650 for ranked hits, --colour for colours); ppp spectrum --record {out} --molecule ID")
    if summary.interrupted:
        return 130
    return 0
