"""``ppp fit``: calibrate parameter values against measured band positions, with cross-validated error."""
from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

from ..calibration import evaluate as ev
from ..calibration import reference
from ..driver import Options
from ..errors import InputError, StorageError
from ..model import params as registry

NAME = "fit"
HELP = "fit parameter values to measured absorption maxima (least squares, k-fold cross-validated)"


def add_arguments(p) -> None:
    p.add_argument("reference", metavar="REFERENCE.csv",
                   help="measured bands: name,smiles,class,solvent,band,match,lambda_nm,uncertainty_nm,source")
    p.add_argument("--parameters", metavar="SET", help="starting parameter set (default: the registry default)")
    p.add_argument("--fit", metavar="LIST", help="comma-separated values to fit: beta:A-B, ip:TYPE, u:TYPE, alkyl:TYPE "
                   "(default: heteroatom ip, heteroatom-bond beta and alkyl shifts present in >= 3 molecules)")
    p.add_argument("--classes", metavar="LIST", help="use only rows of these classes (comma-separated)")
    p.add_argument("--folds", type=int, default=5, metavar="K", help="cross-validation folds (5)")
    p.add_argument("--seed", type=int, default=20240601, help="seed of the fold assignment")
    p.add_argument("--prior-scale", type=_prior_scale, default=1.0, metavar="S",
                   help="width multiplier of the pull towards the starting values; 0 = none; 'auto' = chosen "
                        "by cross-validation, with a nested cross-validated error (about 20 times the fits) (1)")
    p.add_argument("--max-evaluations", type=int, default=30, metavar="N",
                   help="objective evaluations per fit (30)")
    p.add_argument("--bond-order-beta", choices=("on", "off"),
                   help="bond-order-dependent beta during the fit and in the written set (default: the set's)")
    p.add_argument("--coordinates", choices=("depiction", "conformer"), default="depiction",
                   help="idealised planar centres, or RDKit 3D conformers with twisted-bond beta")
    p.add_argument("--solvents", choices=("gas", "reference"), default="gas",
                   help="compute the rows in the gas phase (default) or each in its own solvent column's "
                        "solvent with the reaction field (then use the set with --solvent)")
    p.add_argument("--output", "-o", metavar="FILE.toml", required=True, help="parameter file to write")
    p.add_argument("--name", help="name of the new set (default: the output file's stem)")
    p.add_argument("--overwrite", action="store_true", help="allow replacing an existing output file")


def _prior_scale(text: str):
    """--prior-scale: 'auto' or a number >= 0."""
    if text.strip().lower() == "auto":
        return "auto"
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"'{text}' is neither a number nor 'auto'") from None
    if not value >= 0:
        raise argparse.ArgumentTypeError(f"'{text}' is negative (or not a number)")
    return value


def _mae(energies: np.ndarray, prepared) -> dict[str, float]:
    """Mean absolute error (eV) per class and "all" of energies against the prepared entries."""
    evaluation = ev.Evaluation(tuple(pe.entry for pe in prepared), np.asarray(energies, dtype=float),
                               np.array([pe.entry.energy_ev for pe in prepared]))
    return {k: v.mae_ev for k, v in evaluation.by_class().items() if np.isfinite(v.mae_ev)}


def main(args) -> int:
    # imported here, not at the top: it pulls in scipy.optimize (~0.2 s), which every other command
    # would pay at start-up because the parser imports all command modules
    from ..calibration import fit as fitting

    out = Path(args.output)
    if out.exists() and not args.overwrite:
        raise StorageError(f"'{out}' exists; add --overwrite to replace it")
    if out.suffix != ".toml":
        raise InputError(f"output '{out}' must end in .toml")
    ref = reference.load(args.reference)
    pset = registry.load(args.parameters)
    entries = ref.entries
    if args.classes:
        wanted = [c.strip() for c in args.classes.split(",") if c.strip()]
        unknown = [c for c in wanted if c not in ref.classes]
        if unknown:
            raise InputError(f"class(es) {', '.join(unknown)} not in {ref.path}; it has {', '.join(ref.classes)}")
        entries = tuple(e for e in entries if e.cls in wanted)
    vb = None if args.bond_order_beta is None else args.bond_order_beta == "on"
    options = Options(parameters=pset.path, bond_order_beta=vb, coordinates=args.coordinates, n_triplets=0)
    prepared = ev.prepare_set(entries, options, pset.bond_length_angstrom)
    failed = [pe for pe in prepared if pe.error]
    for pe in failed:
        print(f"skipped: {pe.error}")
    prepared = tuple(pe for pe in prepared if not pe.error)
    if args.fit:
        params = [fitting.parse_parameter(s, pset) for s in args.fit.split(",") if s.strip()]
    else:
        params = fitting.default_parameters(prepared, pset)
    if not params:
        raise InputError("no parameters to fit (none given with --fit, none found in the data)")
    if not 2 <= args.folds <= len(prepared):
        raise InputError(f"--folds must lie between 2 and the number of usable rows ({len(prepared)})")
    print(f"reference {ref.path} [{ref.sha256[:12]}]: {len(prepared)} rows; start set {pset.name} "
          f"[{pset.short_hash}]; fitting {', '.join(p.name for p in params)}")

    solv = getattr(args, "solvents", "gas") == "reference"
    if solv:
        print("each row computed in the solvent of its measurement (solvent column; reaction field)")
    before = ev.evaluate(prepared, pset, options, reference_solvents=solv)
    scale, prior = args.prior_scale, {"scale": args.prior_scale, "chosen_by": "given"}
    if scale == "auto":
        sel = fitting.select_prior_scale(prepared, pset, params, options, k=args.folds, seed=args.seed,
                                         max_nfev=args.max_evaluations, reference_solvents=solv)
        scale = sel.scale
        print("prior scale by cross-validation: " + ", ".join(
            f"{s:g} {e:.3f} eV" for s, e in zip(sel.grid, sel.cv_error_ev)) + f" -> {scale:g}")
        prior = {"scale": scale, "chosen_by": f"{args.folds}-fold cross-validation",
                 "grid": list(sel.grid), "grid_cv_error_ev": [round(e, 4) for e in sel.cv_error_ev]}
    result = fitting.fit(prepared, pset, params, options, max_nfev=args.max_evaluations,
                         prior_scale=scale, reference_solvents=solv)
    cv = fitting.cross_validate(prepared, pset, params, options, k=args.folds, seed=args.seed,
                                max_nfev=args.max_evaluations, prior_scale=args.prior_scale,
                                reference_solvents=solv)
    if args.prior_scale == "auto":
        prior["nested_fold_scales"] = list(cv.prior_scales)
        print("cross-validated error of the whole procedure (each fold chose its own scale: "
              + ", ".join(f"{s:g}" for s in cv.prior_scales) + ")")
    start = _mae(before.energies, prepared)
    train = _mae(result.energies, prepared)
    cross = _mae(cv.energies, prepared)

    print(f"\n{'parameter':<22}{'start/eV':>10}{'fitted/eV':>11}")
    for p, a, b in zip(params, result.x0, result.x):
        print(f"{p.name:<22}{a:10.3f}{b:11.3f}")
    print(f"\nmean absolute error / eV   ({args.folds}-fold cross-validation, seed {args.seed})")
    print(f"{'class':<16}{'n':>4}{'start':>9}{'training':>10}{'cross-val':>11}")
    counts = {c: sum(1 for pe in prepared if pe.entry.cls == c) for c in start}
    counts["all"] = len(prepared)
    counts["hydrocarbon"] = sum(1 for pe in prepared if pe.entry.cls in ev.HYDROCARBON_CLASSES)
    for c in sorted(start, key=lambda k: (k == "all", k == "hydrocarbon", k)):
        print(f"{c:<16}{counts.get(c, 0):>4}{start[c]:9.3f}{train.get(c, float('nan')):10.3f}"
              f"{cross.get(c, float('nan')):11.3f}")
    name = args.name or out.stem
    desc = (f"{pset.name} with {', '.join(p.name for p in params)} fitted to {Path(ref.path).name}; "
            f"cross-validated MAE {cross.get('all', float('nan')):.3f} eV")
    text = fitting.write_parameter_file(pset, result, name, str(ref.path), ref.sha256, desc,
                                        uncertainty=cross, cv_summary=cross, train_summary=train,
                                        bond_order_beta=vb, solvents="reference" if solv else "gas",
                                        prior=prior)
    if out.exists() and not args.overwrite:  # checked again: the fit takes a while
        raise StorageError(f"'{out}' exists; add --overwrite to replace it")
    out.write_text(text, encoding="utf-8")
    registry.load(str(out))  # the written file must load
    print(f"\nwrote {out} (set '{name}'); its [uncertainty] holds the cross-validated errors")
    return 0
