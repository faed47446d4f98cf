"""``ppp export``: the molecules table of a results file (S1, T1, brightest band) as CSV or Parquet."""
from __future__ import annotations

NAME = "export"
HELP = ("write the molecules table of a batch results file (S1, T1, brightest band), or all its states, "
        "to CSV or Parquet")


def add_arguments(p) -> None:
    p.add_argument("results", metavar="RESULTS.h5", help="batch results file")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="output file; .parquet writes Parquet (needs pyarrow), anything else CSV")
    p.add_argument("--status", choices=("all", "ok", "failed"), default="all", help="which molecules (all)")
    p.add_argument("--states", action="store_true",
                   help="one row per computed state (energy, wavelength, f, transition dipole, polarization, "
                        "dominant configuration) instead of one per molecule")
    p.add_argument("--format", choices=("csv", "parquet"), help="output format (default: from the file name)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")


def main(args) -> int:
    from ..batch.export import export
    table = "states" if args.states else "molecules"
    n = export(args.results, args.output, fmt=args.format, status=args.status, overwrite=args.overwrite,
               table=table)
    print(f"wrote {n} {'state' if args.states else 'molecule'}(s) to {args.output}")
    return 0
