"""``ppp compare``: overlay a simulated spectrum on a measured one, fit shift / scale / width, score the
likeness and show the colours."""
from __future__ import annotations

import json
import math
import sys

import numpy as np

from ..errors import InputError
from ..spectra import fitting, lineshapes, measured, output, perceived
from ..units import EV_CM1, HC_EV_NM
from .common import add_model_arguments
from .spectrum import add_band_arguments, add_sample_arguments, add_source_arguments, band_from_args, source_from_args

NAME = "compare"
HELP = "overlay a simulated spectrum on a measured CSV or JCAMP-DX spectrum and fit shift, scale and width"


def add_arguments(p) -> None:
    add_source_arguments(p)
    p.add_argument("--measured", "-m", required=True, metavar="FILE",
                   help="measured spectrum: CSV with a unit-naming header, or JCAMP-DX (.jdx/.dx)")
    p.add_argument("--out", "-o", required=True, metavar="PREFIX",
                   help="output prefix: PREFIX-compare.png/.svg and PREFIX-compare.csv")
    p.add_argument("--overwrite", action="store_true", help="allow replacing existing output files")
    p.add_argument("--axis", choices=("wavelength", "energy", "wavenumber"), default="wavelength",
                   help="x axis of the plot")
    p.add_argument("--fit-range", nargs=2, type=float, metavar=("LO", "HI"),
                   help="fit only inside this window, in --axis units (default: the whole measured range)")
    p.add_argument("--fix-width", action="store_true", help="keep the band FWHM fixed; fit shift and scale only")
    p.add_argument("--json", action="store_true", help="print the fit as JSON instead of text")
    add_band_arguments(p)
    add_sample_arguments(p, None)
    add_model_arguments(p)


def _window_ev(axis: str, rng) -> tuple[float, float] | None:
    if rng is None:
        return None
    lo, hi = sorted(rng)
    if lo <= 0:
        raise InputError(f"--fit-range values must be positive, got {lo:g}")
    if axis == "wavelength":
        return HC_EV_NM / hi, HC_EV_NM / lo
    if axis == "wavenumber":
        return lo / EV_CM1, hi / EV_CM1
    return lo, hi


def main(args) -> int:
    from ..spectra import plots

    shape, prog = band_from_args(args)
    meas = measured.read_measured(args.measured)
    if meas.quantity == "absorbance" and args.concentration is not None:
        meas = measured.to_epsilon(meas, args.concentration, args.path_length)
    src = source_from_args(args)
    files = {"plot_png": f"{args.out}-compare.png", "plot_svg": f"{args.out}-compare.svg",
             "table": f"{args.out}-compare.csv"}
    output.check_writable(files.values(), args.overwrite)

    fit = fitting.fit_spectrum(src.sticks, meas, shape, prog, _window_ev(args.axis, args.fit_range),
                               fit_width=not args.fix_width)
    e = meas.energy_ev
    raw_eps = lineshapes.epsilon(e, src.sticks, shape, prog)
    lo, hi = fit.window_ev
    inside = (e >= lo) & (e <= hi)
    raw_scale = fitting.best_scale(raw_eps[inside], meas.values[inside])
    raw = raw_scale * raw_eps
    fitted = fit.model(src.sticks, e)

    # colours: the sample as measured (absorbance) and the fitted model of the same sample, or both at
    # the chosen concentration when the data are molar absorptivities
    if meas.quantity == "absorbance":
        c_meas = perceived.colour_of_absorbance(meas.wavelength_nm, meas.values)
        c_fit = perceived.colour_of_solution(lambda wl: fit.model(src.sticks, HC_EV_NM / wl), 1.0, 1.0)
        sample = "the measured sample (outside the measured range: transparent)"
    else:
        conc = args.concentration or perceived.DEFAULT_CONCENTRATION_M
        c_meas = perceived.colour_of_solution(
            lambda wl: np.interp(HC_EV_NM / wl, meas.energy_ev, meas.values, left=0.0, right=0.0),
            conc, args.path_length)
        c_fit = perceived.colour_of_solution(lambda wl: fit.model(src.sticks, HC_EV_NM / wl), conc, args.path_length)
        sample = f"{conc:g} M, {args.path_length:g} cm"

    notes = [f"band shape: {fit.shape.kind}; fit window {HC_EV_NM / hi:.0f}-{HC_EV_NM / lo:.0f} nm"]
    output.write_compare_csv(files["table"], meas, raw, fitted, src.name, notes)
    plots.plot_compare(meas, raw, fitted, fit, [files["plot_png"], files["plot_svg"]], axis=args.axis,
                       title=f"{src.name} vs {meas.source}",
                       colours=[(c_meas, f"measured\n{c_meas.hex}"), (c_fit, f"fitted model\n{c_fit.hex}")],
                       subtitle=f"{fit.shape.describe().split(',')[0]} bands; shift added to every computed band; "
                                f"similarity = Pearson r on 400 energies in the fit window; colours: {sample}")

    doc = {"name": src.name, "measured": meas.source, "measured_quantity": meas.quantity,
           "fit": fit.to_dict(), "colour_measured": c_meas.to_dict(), "colour_fitted": c_fit.to_dict(),
           "colour_sample": sample, "warnings": list(src.warnings), "files": files}
    from ..results import BRIGHT_F  # the output's and the accuracy benchmark's "allowed" threshold
    first = next((k for k, f in enumerate(src.sticks.f) if f >= BRIGHT_F), None)
    if first is not None:
        e0 = float(src.sticks.energy_ev[first])
        doc["first_bright_band"] = {"state": src.sticks.labels[first], "computed_nm": HC_EV_NM / e0,
                                    "fitted_nm": HC_EV_NM / (e0 + fit.shift_ev)}
    if args.json:
        json.dump(_clean(doc), sys.stdout, indent=1)
        sys.stdout.write("\n")
        return 0
    print(f"\u25b8 {src.name} vs {meas.source} ({meas.quantity}, {len(meas.energy_ev)} points; "
          f"{fit.n_points} in the fit window {HC_EV_NM / hi:.0f}-{HC_EV_NM / lo:.0f} nm)")
    print(f"  energy shift   {fit.shift_ev:+.4f} \u00b1 {fit.shift_err:.4f} eV  ({fit.shift_cm1:+.0f} cm\u207b\u00b9)")
    if "first_bright_band" in doc:
        b = doc["first_bright_band"]
        print(f"                 {b['state']}: computed {b['computed_nm']:.1f} nm \u2192 fitted {b['fitted_nm']:.1f} nm")
    unit = "M cm (= c\u00b7l if the computed f were exact)" if meas.quantity == "absorbance" else \
        "(measured/computed intensity)"
    print(f"  intensity scale {fit.scale:.4g} \u00b1 {fit.scale_err:.2g} {unit}")
    width = f"{fit.fwhm_ev:.4f} \u00b1 {fit.fwhm_err:.4f} eV ({fit.fwhm_ev * EV_CM1:.0f} cm\u207b\u00b9)"
    print(f"  band FWHM      {width}" + (" (fixed)" if args.fix_width else ""))
    print(f"  rms residual   {fit.rms:.4g}   similarity (Pearson r) {fit.before.pearson:.3f} as computed \u2192 "
          f"{fit.after.pearson:.3f} fitted; cosine {fit.before.cosine:.3f} \u2192 {fit.after.cosine:.3f}")
    for w in src.warnings:
        print(f"  warning: {w}")
    if fit.at_bounds:
        print(f"  warning: the fit stopped at the limit of {' and '.join(fit.at_bounds)} (shift within "
              f"\u00b1{fitting.SHIFT_BOUND_EV:g} eV, FWHM {fitting.WIDTH_BOUNDS_EV[0]:g}-{fitting.WIDTH_BOUNDS_EV[1]:g} eV): "
              "the computed bands do not match this measurement; check the molecule or the fit range")
    if not fit.success:
        print(f"  warning: the least-squares fit did not report convergence: {fit.message}")
    print(f"  colour of {sample} (CIE 1931 2\u00b0, D65):")
    print(f"    measured      {c_meas.describe()}")
    print(f"    fitted model  {c_fit.describe()}")
    for f in files.values():
        print(f"  wrote {f}")
    return 0


def _clean(obj):
    """JSON-safe copy: NaN/inf become null."""
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    if isinstance(obj, float) and not math.isfinite(obj):
        return None
    return obj
