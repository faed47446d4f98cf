"""``ppp spectrum`` with several molecules: their broadened spectra drawn over each other, in one table,
each with its predicted solution colour (for choosing between candidates, e.g. the hits of a batch)."""
from __future__ import annotations

import csv
import json
import sys

from ..spectra import lineshapes, output, perceived
from ..units import EV_CM1, HC_EV_NM


def _unique(names: list[str]) -> list[str]:
    """Names made distinct for column headers and the legend ("dye", "dye (2)")."""
    seen: dict[str, int] = {}
    out = []
    for n in names:
        seen[n] = seen.get(n, 0) + 1
        out.append(n if seen[n] == 1 else f"{n} ({seen[n]})")
    return out


def overlay_main(args, srcs, shape, prog, grid, window, notes) -> int:
    """Write PREFIX-curves.csv (one epsilon column per molecule), PREFIX-sticks.csv (with a molecule
    column) and PREFIX-overlay.png/.svg; print each molecule's maxima and colour (or JSON)."""
    from ..spectra import plots

    prefix = args.out
    files = {"curves": f"{prefix}-curves.csv", "sticks": f"{prefix}-sticks.csv",
             "plot_png": f"{prefix}-overlay.png", "plot_svg": f"{prefix}-overlay.svg"}
    output.check_writable(files.values(), args.overwrite)
    names = _unique([s.name for s in srcs])
    curves = [lineshapes.simulate(s.sticks, shape, grid, prog) for s in srcs]
    colours = [perceived.colour_of_solution(
        lambda wl, s=s: lineshapes.epsilon(HC_EV_NM / wl, s.sticks, shape, prog), args.concentration,
        args.path_length) for s in srcs]
    output.write_curves_csv(files["curves"], curves, names, notes,
                            ascending="wavelength" if args.axis == "wavelength" else "energy")
    with open(files["sticks"], "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["molecule", "state", "energy (eV)", "wavelength (nm)", "wavenumber (cm-1)",
                    "oscillator strength"])
        for n, s in zip(names, srcs):
            for lab, ek, f in zip(s.sticks.labels, s.sticks.energy_ev, s.sticks.f):
                w.writerow([n, lab, f"{ek:.6f}", f"{HC_EV_NM / ek:.4f}", f"{ek * EV_CM1:.3f}", f"{f:.6f}"])
    peaks = [[(pe, eps) for pe, eps in c.peaks() if grid[0] < pe < grid[-1]] for c in curves]
    sample = f"{args.concentration:g} M, {args.path_length:g} cm"
    plots.plot_overlay(curves, names, colours, [files["plot_png"], files["plot_svg"]], axis=args.axis,
                       window=window, title=f"{len(srcs)} molecules; colours of {sample} solutions",
                       subtitle="; ".join(notes[:-1]) + "; colour: CIE 1931 2\u00b0, D65")
    if args.json:
        doc = {"band_shape": shape.kind, "fwhm_ev": shape.fwhm_ev, "molecules": [
            {"name": n, "smiles": s.smiles,
             "maxima": [{"wavelength_nm": HC_EV_NM / pe, "energy_ev": pe, "epsilon": eps} for pe, eps in pk],
             "colour": {"concentration_M": args.concentration, "path_cm": args.path_length, **c.to_dict()},
             "warnings": list(s.warnings)}
            for n, s, pk, c in zip(names, srcs, peaks, colours)], "files": files}
        json.dump(doc, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    print(f"\u25b8 {len(srcs)} molecules; {notes[0]}; colour at {sample}")
    for n, s, pk, c in zip(names, srcs, peaks, colours):
        first = (f"{HC_EV_NM / pk[0][0]:.0f} nm, \u03b5 {pk[0][1]:,.0f}" if pk else "no maximum in the window")
        print(f"  {n:<40s} strongest maximum {first};  {c.hex}{' (clipped)' if c.out_of_gamut else ''}")
        for wmsg in s.warnings:
            print(f"    warning: {wmsg}")
    for f in files.values():
        print(f"  wrote {f}")
    return 0
