"""``ppp demo``: the batch workflow on the bundled demo library, ending with a CSV to open."""
from __future__ import annotations

from pathlib import Path

from ..errors import StorageError

NAME = "demo"
HELP = "screen the bundled library of ~200 candidate dyes into RESULTS.h5 and a CSV next to it"

DEMO_LIBRARY = Path(__file__).resolve().parent.parent / "data" / "demo_library.smi"


def add_arguments(p) -> None:
    p.add_argument("-o", "--output", default="ppp-demo.h5", metavar="RESULTS.h5",
                   help="results file (default: ppp-demo.h5); the CSV is written next to it")
    p.add_argument("--jobs", "-j", type=int, default=0, metavar="N", help="worker processes (default: all cores)")
    p.add_argument("--overwrite", action="store_true", help="replace existing demo output files")


def main(args) -> int:
    import numpy as np

    from ..batch.export import ColourSample, export
    from ..batch.reader import ResultsFile
    from ..batch.runner import BatchConfig, run_batch

    out = Path(args.output)
    csv_path = out.with_suffix(".csv")
    if not args.overwrite:
        for p in (out, csv_path):
            if p.exists() and not (p == out and not csv_path.exists() and _incomplete(out)):
                raise StorageError(f"'{p}' exists; add --overwrite to replace it (or choose another -o)")
    if not DEMO_LIBRARY.is_file():
        raise StorageError(f"the demo library is missing from this installation ({DEMO_LIBRARY})")
    print(f"library: {DEMO_LIBRARY}")
    summary = run_batch(BatchConfig(input=DEMO_LIBRARY, output=out, jobs=args.jobs, overwrite=args.overwrite))
    print("\n".join(summary.lines()))
    if not summary.complete:
        return 130 if summary.interrupted else 1
    n = export(out, csv_path, overwrite=True, colour=ColourSample(), uncertainty=True)
    print(f"wrote {n} rows to {csv_path} (open it in a spreadsheet; failed rows carry their reason; "
          f"colour_*: predicted colour of a 5e-5 M solution, 1 cm; class_error_ev: the measured error of "
          f"the molecule's class)")
    with ResultsFile(out) as rf:
        names = rf.text("name")
        nm, f = rf.column("bright_nm"), rf.column("bright_f")
    visible = np.flatnonzero((nm >= 400) & (nm <= 700))
    top = visible[np.argsort(-f[visible], kind="stable")][:8]
    if len(top):
        import csv
        with open(csv_path, newline="", encoding="utf-8") as fh:
            hexes = {row["name"]: row["colour_hex"] for row in csv.DictReader(fh)}
        print("strongest computed absorbers in the visible (400-700 nm):")
        for i in top:
            print(f"  {names[i]:<45s} {nm[i]:6.0f} nm  f = {f[i]:.2f}  {hexes.get(names[i], '')}")
    return 0


def _incomplete(path: Path) -> bool:
    from ..batch.reader import ResultsFile
    try:
        with ResultsFile(path) as rf:
            return not rf.complete
    except StorageError:
        return False
