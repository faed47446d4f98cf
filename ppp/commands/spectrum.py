"""``ppp spectrum``: broadened absorption spectrum (eps against wavelength), sticks, solution colour and,
on request, pictures of the orbitals and of the charge moved by a transition."""
from __future__ import annotations

import json
import sys

import numpy as np

from ..errors import InputError
from ..spectra import density, lineshapes, output, perceived, sources
from ..units import EV_CM1, HC_EV_NM
from .common import add_model_arguments, options_from

NAME = "spectrum"
HELP = "simulated UV-vis spectrum (CSV + PNG/SVG plot), solution colour and orbital pictures"

DEFAULT_RANGE = {"wavelength": (200.0, 800.0), "energy": (1.5, 6.5), "wavenumber": (12000.0, 52000.0)}


# --- options shared with ``ppp compare`` -------------------------------------------------------------

def add_source_arguments(p, several: bool = False) -> None:
    """SMILES / --record / --molecule / --name; ``several``: more than one molecule may be given (each
    SMILES, each --molecule), for an overlay."""
    if several:
        p.add_argument("smiles", nargs="*", metavar="SMILES",
                       help="molecule(s) to compute; several are drawn as an overlay")
    else:
        p.add_argument("smiles", nargs="?", metavar="SMILES", help="molecule to compute")
    p.add_argument("--record", metavar="FILE.h5",
                   help="take the states from a 'ppp run --save' record or a 'ppp batch' results file instead")
    p.add_argument("--molecule", metavar="NAME|N", action="append" if several else "store",
                   help="which molecule of the record (name or 1-based number; in a batch file its ID, name or "
                        "input record number)" + ("; repeat it for an overlay" if several else ""))
    p.add_argument("--name", help="label for titles and files (default: the SMILES or record name)")


def add_band_arguments(p) -> None:
    g = p.add_argument_group("band shape")
    g.add_argument("--shape", choices=lineshapes.SHAPES, default="gaussian", help="line shape (gaussian)")
    g.add_argument("--fwhm", metavar="W", help="band FWHM: a number in eV, or with a unit, e.g. 0.3eV, 2400cm-1 "
                   f"(default {lineshapes.DEFAULT_FWHM_EV} eV; {lineshapes.DEFAULT_VIBRONIC_FWHM_EV} eV per "
                   "vibronic line with --vibronic)")
    g.add_argument("--lorentz-share", type=float, default=0.5, metavar="X",
                   help="voigt: Lorentzian FWHM as a fraction of the total FWHM (0.5)")
    g.add_argument("--vibronic", action="store_true", help="shape each band as a single-mode vibronic progression")
    g.add_argument("--huang-rhys", type=float, default=lineshapes.DEFAULT_HUANG_RHYS, metavar="S",
                   help=f"Huang-Rhys factor of the progression ({lineshapes.DEFAULT_HUANG_RHYS})")
    g.add_argument("--mode-energy", default=str(lineshapes.DEFAULT_MODE_EV), metavar="E",
                   help=f"vibrational quantum, eV or e.g. 1400cm-1 ({lineshapes.DEFAULT_MODE_EV} eV)")


def add_sample_arguments(p, default_c) -> None:
    g = p.add_argument_group("sample (for the colour)")
    g.add_argument("--concentration", type=float, default=default_c, metavar="MOL_PER_L",
                   help="molar concentration, M" + (f" ({default_c:g})" if default_c else ""))
    g.add_argument("--path-length", type=float, default=perceived.DEFAULT_PATH_CM, metavar="CM",
                   help=f"cell path length, cm ({perceived.DEFAULT_PATH_CM:g})")


def band_from_args(args) -> tuple[lineshapes.LineShape, lineshapes.Progression | None]:
    prog = None
    if args.vibronic:
        prog = lineshapes.Progression(args.huang_rhys, output.energy_value(args.mode_energy, "mode energy"))
    if args.fwhm is None:
        width = lineshapes.DEFAULT_VIBRONIC_FWHM_EV if args.vibronic else lineshapes.DEFAULT_FWHM_EV
    else:
        width = output.energy_value(args.fwhm, "FWHM")
    return lineshapes.LineShape(args.shape, width, args.lorentz_share), prog


def sources_from_args(args) -> list[sources.SpectrumSource]:
    """The molecules named on the command line: each SMILES computed, or each --molecule of --record."""
    smiles = [args.smiles] if isinstance(args.smiles, str) else list(args.smiles or [])
    picks = args.molecule if isinstance(args.molecule, list) else [args.molecule]
    if args.record and smiles:
        raise InputError("give a SMILES or --record, not both")
    if not args.record and any(m is not None for m in picks):
        raise InputError("--molecule chooses from a --record file; give SMILES directly otherwise")
    if args.record:
        out = [sources.from_record(args.record, m) for m in picks]
    elif smiles:
        from ..driver import compute
        options = options_from(args)
        out = [sources.from_result(compute(s, name=args.name if len(smiles) == 1 else None, options=options))
               for s in smiles]
    else:
        raise InputError("nothing to do: give a SMILES or --record FILE.h5")
    if args.name:
        if len(out) > 1:
            raise InputError("--name labels one molecule; an overlay takes the molecules' own names")
        out = [sources.SpectrumSource(args.name, out[0].smiles, out[0].sticks, out[0].chromophores, out[0].warnings)]
    return out


def source_from_args(args) -> sources.SpectrumSource:
    (src,) = sources_from_args(args)
    return src


def band_notes(shape, prog) -> list[str]:
    notes = [f"band shape: {shape.describe()}"]
    if prog is not None:
        notes.append(prog.describe() + "; band mean kept at the computed vertical energy")
    notes.append("eps from f = 4.319e-9 M cm^2 * integral eps d(wavenumber); axis mapped without Jacobian")
    return notes


# --- the command ---------------------------------------------------------------------------------------

def add_arguments(p) -> None:
    add_source_arguments(p, several=True)
    p.add_argument("--out", "-o", required=True, metavar="PREFIX",
                   help="output prefix: PREFIX-curve.csv (and .jdx, JCAMP-DX), PREFIX-sticks.csv, "
                        "PREFIX-spectrum.png/.svg, ...")
    p.add_argument("--overwrite", action="store_true", help="allow replacing existing output files")
    p.add_argument("--axis", choices=("wavelength", "energy", "wavenumber"), default="wavelength", help="x axis of the plot and CSV order")
    p.add_argument("--range", nargs=2, type=float, metavar=("LO", "HI"),
                   help="plot window in axis units (default 200-800 nm, 1.5-6.5 eV, 12000-52000 cm-1)")
    p.add_argument("--pictures", action="store_true",
                   help="also draw HOMO, LUMO, transition density, charge change and the orbital level diagram")
    p.add_argument("--state", type=int, metavar="N",
                   help="singlet S<N> for the transition pictures (default: the first allowed band, f >= 0.05)")
    p.add_argument("--json", action="store_true", help="print a JSON summary instead of text")
    add_band_arguments(p)
    add_sample_arguments(p, perceived.DEFAULT_CONCENTRATION_M)
    add_model_arguments(p)


def _grid_for(axis: str, window) -> np.ndarray:
    lo, hi = sorted(window)
    if lo <= 0:
        raise InputError(f"--range values must be positive, got {lo:g}")
    e = np.array([lo, hi])
    if axis == "wavelength":
        e = HC_EV_NM / np.array([lo, hi])
    elif axis == "wavenumber":
        e = np.array([lo, hi]) / EV_CM1
    e_lo, e_hi = float(min(e)), float(max(e))
    return lineshapes.energy_grid(e_lo, e_hi, min(0.002, (e_hi - e_lo) / 2000.0))


def main(args) -> int:
    from ..spectra import plots  # matplotlib is loaded only by the commands that draw

    shape, prog = band_from_args(args)
    window = tuple(args.range) if args.range else DEFAULT_RANGE[args.axis]
    grid = _grid_for(args.axis, window)
    srcs = sources_from_args(args)
    if len(srcs) > 1:
        from .overlay import overlay_main
        if args.pictures or args.state is not None:
            raise InputError("orbital pictures are drawn for one molecule at a time; leave out --pictures")
        return overlay_main(args, srcs, shape, prog, grid, window, band_notes(shape, prog))
    (src,) = srcs
    prefix = args.out
    files = {"curve": f"{prefix}-curve.csv", "curve_jcamp": f"{prefix}-curve.jdx",
             "sticks": f"{prefix}-sticks.csv", "plot_png": f"{prefix}-spectrum.png",
             "plot_svg": f"{prefix}-spectrum.svg"}
    picture_jobs = []
    if args.pictures:
        picture_jobs, pic_files = _plan_pictures(src, args.state, prefix)
        files.update(pic_files)
    output.check_writable(files.values(), args.overwrite)

    curve = lineshapes.simulate(src.sticks, shape, grid, prog)
    colour = perceived.colour_of_solution(
        lambda wl: lineshapes.epsilon(HC_EV_NM / wl, src.sticks, shape, prog), args.concentration, args.path_length)
    notes = band_notes(shape, prog)
    output.write_curve_csv(files["curve"], curve, src.name, notes,
                           ascending="wavelength" if args.axis == "wavelength" else "energy")
    output.write_curve_jcamp(files["curve_jcamp"], curve, src.name, notes)
    output.write_sticks_csv(files["sticks"], src.sticks, src.name)
    sample = f"{args.concentration:g} M, {args.path_length:g} cm"
    plots.plot_spectrum(curve, src.sticks, [files["plot_png"], files["plot_svg"]], axis=args.axis, window=window,
                        title=src.name, colour=colour, colour_text=f"solution colour\n{sample}\n{colour.hex}",
                        subtitle="; ".join(notes[:-1]) + "; colour: CIE 1931 2\u00b0, D65")
    for job in picture_jobs:
        job()

    peaks = [(e, eps) for e, eps in curve.peaks() if grid[0] < e < grid[-1]]
    if args.json:
        doc = {"name": src.name, "smiles": src.smiles, "band_shape": shape.kind, "fwhm_ev": shape.fwhm_ev,
               "vibronic": None if prog is None else {"huang_rhys": prog.huang_rhys, "mode_ev": prog.mode_ev},
               "maxima": [{"wavelength_nm": HC_EV_NM / e, "energy_ev": e, "epsilon": eps} for e, eps in peaks],
               "sticks": [{"state": lab, "energy_ev": float(e), "wavelength_nm": float(HC_EV_NM / e), "f": float(f)}
                          for lab, e, f in zip(src.sticks.labels, src.sticks.energy_ev, src.sticks.f)],
               "colour": {"concentration_M": args.concentration, "path_cm": args.path_length, **colour.to_dict()},
               "warnings": list(src.warnings), "files": files}
        json.dump(doc, sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    print(f"\u25b8 {src.name}")
    print(f"  {notes[0]}" + (f"; {notes[1]}" if prog is not None else ""))
    if peaks:
        print("  maxima in the window:  " + ";  ".join(
            f"{HC_EV_NM / e:.0f} nm ({e:.2f} eV) \u03b5 {eps:,.0f} M\u207b\u00b9cm\u207b\u00b9" for e, eps in peaks[:4]))
    else:
        k = int(np.argmax(src.sticks.f))
        print(f"  no band maximum inside the window; the strongest computed band is {src.sticks.labels[k]} at "
              f"{HC_EV_NM / src.sticks.energy_ev[k]:.0f} nm (f = {src.sticks.f[k]:.3f}); widen it with --range")
    print(f"  colour at {sample}: {colour.describe()}")
    for w in src.warnings:
        print(f"  warning: {w}")
    for f in files.values():
        print(f"  wrote {f}")
    return 0


def _plan_pictures(src: sources.SpectrumSource, state: int | None, prefix: str):
    """File names and deferred drawing jobs for the orbital and transition pictures."""
    from ..spectra import drawing, plots

    if not src.chromophores:
        raise InputError(f"{src.name}: no orbitals available for pictures")
    chroms = src.chromophores
    mol = drawing.structure_for_pictures(src.smiles, [c.atom_indices for c in chroms], [c.types for c in chroms])
    files, jobs = {}, []
    multi = len(chroms) > 1
    # the state: S<N> counted over all singlets sorted by energy, as in the sticks
    labels = src.sticks.labels
    if state is None:
        from ..results import BRIGHT_F
        bright = [k for k, f in enumerate(src.sticks.f) if f >= BRIGHT_F]
        k_state = bright[0] if bright else 0
    else:
        if not 1 <= state <= len(labels):
            raise InputError(f"{src.name}: --state {state} outside 1-{len(labels)}")
        k_state = state - 1
    target_e = src.sticks.energy_ev[k_state]
    for c in chroms:
        tag = f"-c{c.index + 1}" if multi else ""
        for which, p in (("homo", c.n_occ - 1), ("lumo", c.n_occ)):
            if p >= len(c.mo_energy):
                continue
            for ext in ("png", "svg"):
                path = f"{prefix}{tag}-{which}.{ext}"
                files[f"{which}{tag}_{ext}"] = path
                legend = (f"{src.name}: {which.upper()}, {c.mo_energy[p]:.2f} eV\n"
                          "disc radius ~ |coefficient|; red/blue = opposite signs")
                jobs.append(lambda path=path, c=c, p=p, legend=legend:
                            drawing.draw_values(mol, c.atom_indices, c.mo_coeff[:, p], legend, path, "linear"))
        ref, ref_text = density.reference_level(c.types, c.ip, c.u)
        classes = density.classify_orbitals(c.mo_energy, ref)
        lv = [f"{prefix}{tag}-levels.png", f"{prefix}{tag}-levels.svg"]
        files[f"levels{tag}_png"], files[f"levels{tag}_svg"] = lv
        jobs.append(lambda c=c, ref=ref, ref_text=ref_text, classes=classes, lv=lv, tag=tag:
                    plots.plot_levels(c.mo_energy, c.n_occ, classes, ref, ref_text, lv,
                                      title=f"{src.name}{tag}: \u03c0 orbitals"))
        # the chosen state, if it belongs to this chromophore
        k = int(np.argmin(np.abs(c.singlet_energy - target_e))) if len(c.singlet_energy) else -1
        if k < 0 or abs(c.singlet_energy[k] - target_e) > 1e-9:
            continue
        pic = density.excitation_picture(c.mo_coeff, c.n_occ, c.singlet_amplitudes[k])
        lab = labels[k_state].replace(":", "-")
        head = f"{src.name}: {labels[k_state]} {HC_EV_NM / target_e:.0f} nm, f = {src.sticks.f[k_state]:.2f}"
        for kind, values, text in (
                ("transition", pic.transition, "transition density; disc area ~ |value|;\nred: positive, "
                                                "blue: negative (overall sign arbitrary)"),
                ("charge", pic.charge_change, "change of pi charge on excitation; disc area ~ |dq|;\n"
                                               "red: becomes more positive, blue: more negative")):
            for ext in ("png", "svg"):
                path = f"{prefix}-{lab}-{kind}.{ext}"
                files[f"{lab}_{kind}_{ext}"] = path
                jobs.append(lambda path=path, c=c, values=values, legend=f"{head}\n{text}":
                            drawing.draw_values(mol, c.atom_indices, values, legend, path, "area"))
    return jobs, files
