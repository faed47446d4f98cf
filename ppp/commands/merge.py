"""``ppp merge``: join the shard files of one library into one results file."""
from __future__ import annotations

import sys

NAME = "merge"
HELP = "join results files of shards of one library (ppp batch --shard K/N) without duplicates"


def add_arguments(p) -> None:
    p.add_argument("files", nargs="+", metavar="SHARD.h5", help="results files to join")
    p.add_argument("-o", "--output", required=True, metavar="RESULTS.h5", help="merged results file")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")


def main(args) -> int:
    from ..batch.merge import merge
    rep = merge(args.files, args.output, overwrite=args.overwrite)
    print(f"{args.output}: {rep['rows']} of {rep['expected']} inputs"
          f"{'' if rep['complete'] else ' (incomplete: some inputs are in no file given)'}; "
          f"{rep['duplicates_dropped']} duplicate row(s) dropped")
    if not rep["complete"]:
        print("warning: the merged file is incomplete", file=sys.stderr)
    return 0
