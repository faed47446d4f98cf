"""``ppp salvage``: copy what a damaged or truncated results file still holds into a new file."""
from __future__ import annotations

NAME = "salvage"
HELP = "recover the readable results of a damaged or truncated batch results file into a new file"


def add_arguments(p) -> None:
    p.add_argument("damaged", metavar="DAMAGED.h5", help="results file that cannot be read or resumed")
    p.add_argument("-o", "--output", required=True, metavar="NEW.h5", help="new results file")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    p.add_argument("--stall-timeout", type=float, default=60.0, metavar="SECONDS",
                   help="give up when reading the damaged file makes no progress for this long (60)")


def main(args) -> int:
    from ..batch.reader import salvage
    got, claimed = salvage(args.damaged, args.output, overwrite=args.overwrite, stall_seconds=args.stall_timeout)
    print(f"recovered {got} of {claimed} committed molecule(s) into {args.output}; "
          f"run the same 'ppp batch' command with -o {args.output} to compute the rest")
    return 0
