"""``ppp run``: compute a few molecules given on the command line or in a file (MOL/SDF, SMILES list, CSV)."""
from __future__ import annotations

import json
import sys
import time
import traceback
from pathlib import Path

from .. import __version__
from ..analysis.timings import StageTimer, maybe_stage
from ..driver import compute
from ..errors import InputError, ParseError, PPPError, StorageError
from ..io import h5_io
from ..structure.readers import read_molfile
from .common import add_model_arguments, options_from

NAME = "run"
#: Process-relative reference for --timings' "other (start-up etc.)" line: the time at which this
#: module was imported, which is after interpreter start-up but covers the package imports that follow.
_START = time.perf_counter()

HELP = "excited states of molecules given as SMILES or in a file (MOL/SDF, SMILES list, CSV)"


def add_arguments(p) -> None:
    p.add_argument("smiles", nargs="*", metavar="SMILES", help="one or more SMILES strings")
    p.add_argument("--file", "-f", metavar="FILE",
                   help="MOL or SDF file, or a SMILES list or CSV table as for ppp batch (every record is "
                        "computed)")
    p.add_argument("--json", action="store_true", help="print JSON (schema: ppp/io/result.schema.json)")
    p.add_argument("--save", metavar="FILE.h5", help="write the full record (model, orbitals, CI vectors) to HDF5")
    p.add_argument("--overwrite", action="store_true", help="allow --save to replace an existing file")
    p.add_argument("--timings", action="store_true",
                   help="print the wall time of each stage (parse, perception, ..., SCF, CIS, output) to stderr")
    add_model_arguments(p)


def main(args) -> int:
    timer = StageTimer() if args.timings else None
    try:
        return _main(args, timer)
    finally:
        if timer is not None:
            print("\ntimings (wall clock):\n" + timer.report(wall=time.perf_counter() - _START), file=sys.stderr)


def _file_jobs(path: str) -> list[tuple[str, object]]:
    """(label, SMILES, molecule or error) of every record of ``path``: a MOL/SDF file, or a SMILES list
    or CSV table read as ``ppp batch`` reads them (told apart by the file name, as there)."""
    from ..batch.inputs import detect_format, read_items
    try:
        fmt = detect_format(path)
    except InputError:
        fmt = "sdf"  # no telling suffix: a MOL/SDF file, as this option has always read
    if fmt == "sdf":
        return [(rec.label, rec.mol if rec.mol is not None else rec.error) for rec in read_molfile(path)]
    jobs = []
    for item in read_items(path, fmt):
        label = item.name or item.payload or f"{Path(path).name} {item.where}"
        jobs.append((label, ParseError(f"{item.where}: {item.problem}") if item.problem else item.payload))
    return jobs


def _main(args, timer) -> int:
    options = options_from(args)
    if args.save and args.file and Path(args.save).exists() \
            and Path(args.save).resolve() == Path(args.file).resolve():
        raise StorageError(f"--save '{args.save}' would replace the input file; choose another name")
    if args.save and Path(args.save).exists() and not args.overwrite:
        raise StorageError(f"'{args.save}' exists; add --overwrite to replace it")
    jobs = [(s, s) for s in args.smiles]
    if args.file:
        jobs += _file_jobs(args.file)
    if not jobs:
        raise PPPError("nothing to compute: give SMILES strings or --file")
    results, errors = [], []
    for label, item in jobs:
        try:
            if isinstance(item, PPPError):
                raise item
            res = compute(item, name=label, options=options, timer=timer)
        except PPPError as err:
            err.with_molecule(label)
            errors.append(err)
            if getattr(args, "traceback", False):
                traceback.print_exception(err, file=sys.stderr)
            if not args.json:
                print(f"error: {err}", file=sys.stderr)
            continue
        results.append(res)
        if not args.json:
            with maybe_stage(timer, "output"):
                print(res.table())
                print()
    if args.json:
        doc = {"program": {"name": "ppp", "version": __version__},
               "results": [r.to_dict() for r in results],
               "errors": [{"name": e.molecule, "kind": e.kind, "reason": e.reason} for e in errors]}
        with maybe_stage(timer, "output"):
            json.dump(doc, sys.stdout, indent=1)
        sys.stdout.write("\n")
        for e in errors:
            print(f"error: {e}", file=sys.stderr)
    if args.save and results:
        with maybe_stage(timer, "output"):
            h5_io.save(results, args.save, overwrite=args.overwrite)
        if not args.json:
            print(f"saved {len(results)} molecule(s) to {args.save}")
    return 1 if errors else 0
