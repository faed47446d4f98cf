"""``ppp export``: the molecules table of a results file (S1, T1, brightest band) as CSV or Parquet."""
from __future__ import annotations

from ..spectra import perceived
from .spectrum import add_band_arguments, add_sample_arguments, band_from_args

NAME = "export"
HELP = ("write the molecules table of a batch results file (S1, T1, brightest band), or all its states, "
        "to CSV or Parquet")


def add_arguments(p) -> None:
    p.add_argument("results", metavar="RESULTS.h5", help="batch results file")
    p.add_argument("-o", "--output", required=True, metavar="FILE",
                   help="output file; .parquet writes Parquet (needs pyarrow), anything else CSV; "
                        "'-': CSV to the terminal (standard output)")
    p.add_argument("--status", choices=("all", "ok", "failed"), default="all", help="which molecules (all)")
    p.add_argument("--colour", action="store_true",
                   help="add the predicted colour of each molecule's solution (sRGB hex, CIE L*a*b*) from its "
                        "broadened singlets; band shape and sample as for 'ppp spectrum'")
    p.add_argument("--uncertainty", action="store_true",
                   help="add each molecule's structure class, the measured error of its class (eV) and that "
                        "error in nm at the brightest band: the '±' of 'ppp run'")
    p.add_argument("--states", action="store_true",
                   help="one row per computed state (energy, wavelength, f, transition dipole, polarization, "
                        "dominant configuration) instead of one per molecule")
    g = p.add_argument_group("ranking (the molecules a screen keeps)")
    g.add_argument("--by", metavar="COLUMN",
                   help="rank the molecules by a numeric column, largest first (e.g. bright_f, s1_nm; "
                        "molecules without a value are left out)")
    g.add_argument("--ascending", action="store_true", help="with --by: smallest first")
    g.add_argument("--top", type=int, metavar="N", help="keep only the first N molecules (of the ranking)")
    g.add_argument("--band-nm", nargs=2, type=float, metavar=("LO", "HI"),
                   help="keep only molecules whose brightest band lies between LO and HI nm")
    p.add_argument("--format", choices=("csv", "parquet"), help="output format (default: from the file name)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing output file")
    add_band_arguments(p)
    add_sample_arguments(p, perceived.DEFAULT_CONCENTRATION_M)


def main(args) -> int:
    from ..batch.export import ColourSample, Selection, export
    from ..errors import InputError
    table = "states" if args.states else "molecules"
    if args.ascending and not args.by:
        raise InputError("--ascending orders a ranking: give --by COLUMN too")
    select = Selection(by=args.by, top=args.top, ascending=args.ascending,
                       band_nm=tuple(args.band_nm) if args.band_nm else None)
    colour = None
    if args.colour:
        shape, prog = band_from_args(args)
        colour = ColourSample(shape, prog, args.concentration, args.path_length)
    n = export(args.results, args.output, fmt=args.format, status=args.status, overwrite=args.overwrite,
               table=table, colour=colour, select=select, uncertainty=args.uncertainty)
    import sys
    print(f"wrote {n} {'state' if args.states else 'molecule'}(s) to "
          f"{'standard output' if args.output == '-' else args.output}",
          file=sys.stderr if args.output == "-" else sys.stdout)
    return 0
