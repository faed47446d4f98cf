"""Accuracy benchmark: mean absolute error of predicted band positions against the reference set, per
chemical class and overall, in eV and nm, for every parameter set and option combination.

    PYTHONPATH=. python benchmarks/accuracy.py                 # all sets, planar and conformer geometry
    PYTHONPATH=. python benchmarks/accuracy.py --class-fits    # plus per-class ppp fit with k-fold CV
    PYTHONPATH=. python benchmarks/accuracy.py --quick         # planar geometry only
    PYTHONPATH=. python benchmarks/accuracy.py --solvents gas  # gas phase only (ppp's default model)

Solvent: by default (``--solvents both``) every configuration is evaluated twice: in the gas phase (the
default of ppp) and with each entry in the solvent of its measurement (the CSV's solvent column,
qualifiers such as "(acidic)" dropped) with the generalized-Born reaction field of ppp.model.solvent;
those rows are labelled "solv". ``--solvents reference`` gives only the latter.

A set that was fitted to this same reference set (its file has a [provenance] table naming the same
SHA-256) is marked "training": its figures on the reference set are training errors, and the
cross-validated errors from its provenance are printed beside them; those are its accuracy.
"""
from __future__ import annotations

import argparse
import sys
import time
import tomllib
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

from ppp.calibration import evaluate as ev  # noqa: E402
from ppp.calibration import fit as fitting  # noqa: E402
from ppp.calibration import reference  # noqa: E402
from ppp.driver import Options  # noqa: E402
from ppp.model import params  # noqa: E402

DEFAULT_REF = ROOT / "tests" / "data" / "reference_absorption.csv"
CLASS_ORDER = ("polyene", "benzenoid", "non-alternant", "hydrocarbon", "cyanine", "azo", "carbonyl", "coumarin",
               "xanthene", "thiophene", "push-pull", "all")


def _run_geometry(args):
    """Worker: prepare every molecule once for one geometry, then evaluate each (set, bond-order beta)
    combination on it. Returns plain data (picklable)."""
    ref_path, coords, combos = args
    ref = reference.load(ref_path)
    t0 = time.perf_counter()
    prep = ev.prepare_set(ref.entries, Options(coordinates=coords), 1.40)
    t_prep = time.perf_counter() - t0
    out = []
    for set_name, vb, solv, resp in combos:
        pset = params.load(set_name)
        if pset.bond_length_angstrom != 1.40 and coords == "depiction":
            prep_s = ev.prepare_set(ref.entries, Options(coordinates=coords), pset.bond_length_angstrom)
        else:
            prep_s = prep
        opts = Options(parameters=set_name, bond_order_beta=vb, coordinates=coords, n_triplets=0, response=resp)
        t1 = time.perf_counter()
        result = ev.evaluate(prep_s, pset, opts, reference_solvents=solv)
        out.append((set_name, vb, coords, solv, resp, result.energies, t_prep, time.perf_counter() - t1))
    return out


def _provenance(pset) -> dict:
    return tomllib.loads(pset.text).get("provenance", {})


def _label(set_name, vb, coords, solv=False, resp="cis"):
    return (f"{set_name} {'bo-beta' if vb else 'fixed-beta'} {'3D+twist' if coords == 'conformer' else 'planar'}"
            f"{' solv' if solv else ''}{' rpa' if resp == 'rpa' else ''}")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--reference", default=str(DEFAULT_REF))
    ap.add_argument("--sets", help="comma-separated parameter sets (default: all shipped)")
    ap.add_argument("--quick", action="store_true", help="planar geometry only (no conformer embedding)")
    ap.add_argument("--class-fits", action="store_true", help="per-class ppp fit with cross-validation")
    ap.add_argument("--no-auto-prior", action="store_true",
                    help="class fits without the nested-CV rows of --prior-scale auto (about 20x quicker)")
    ap.add_argument("--jobs", type=int, default=1, help="worker processes (the machine has 2 cores)")
    ap.add_argument("--folds", type=int, default=5)
    ap.add_argument("--solvents", choices=("gas", "reference", "both"), default="both",
                    help="gas phase, each entry's own measurement solvent (reaction field), or both")
    ap.add_argument("--responses", choices=("cis", "rpa", "both"), default="both",
                    help="singlets from CIS (default engine setting), RPA (--response rpa), or both")
    args = ap.parse_args(argv)

    ref = reference.load(args.reference)
    sets = args.sets.split(",") if args.sets else params.available()
    coords = ("depiction",) if args.quick else ("depiction", "conformer")
    solv_flags = {"gas": (False,), "reference": (True,), "both": (False, True)}[args.solvents]
    responses = ("cis", "rpa") if args.responses == "both" else (args.responses,)
    # the solvent's state-specific term is built on CIS states: no RPA rows in a solvent
    combos = [(s, vb, sv, r) for s in sets for vb in (False, True) for sv in solv_flags for r in responses
              if not (sv and r == "rpa")]
    jobs = [(args.reference, c, combos) for c in coords]
    print(f"reference {args.reference} [{ref.sha256[:12]}], {len(ref.entries)} bands, "
          f"{len(ref.classes)} classes; default set '{params.default_name()}'")
    if args.solvents != "gas":
        print("rows marked 'solv': each entry computed in the solvent of its measurement (solvent column of the "
              "reference CSV) with the generalized-Born reaction field (ppp.model.solvent); others: gas phase")
    t0 = time.perf_counter()
    if args.jobs > 1:
        with ProcessPoolExecutor(args.jobs) as pool:
            results = [r for batch in pool.map(_run_geometry, jobs) for r in batch]
    else:
        results = [r for job in jobs for r in _run_geometry(job)]
    wall = time.perf_counter() - t0

    measured = np.array([e.energy_ev for e in ref.entries])
    summaries = []
    for set_name, vb, c, solv, resp, energies, t_prep, t_eval in results:
        evaluation = ev.Evaluation(ref.entries, energies, measured)
        pset = params.load(set_name)
        prov = _provenance(pset)
        training = prov.get("reference_sha256") == ref.sha256
        summaries.append((_label(set_name, vb, c, solv, resp), evaluation.by_class(), training, prov, t_prep, t_eval))

    # columns: the usual classes found in this reference, then any others it has (a lab's own reference,
    # or molecules of no class: "other"), then all rows
    present = set().union(*(by.keys() for _, by, *_ in summaries))
    order = ([k for k in CLASS_ORDER if k in present and k != "all"] + sorted(present - set(CLASS_ORDER))
             + ["all"])
    print("\nMean absolute error, eV (nm), per class; n = rows, x = rows without a matched state")
    head = f"| {'configuration':<38} | " + " | ".join(f"{k:>13}" for k in order) + " |"
    print(head)
    print("|" + "-" * 40 + "|" + "|".join("-" * 15 for _ in order) + "|")
    counts = None
    for label, by, training, prov, *_ in summaries:
        cells = []
        for k in order:
            s = by.get(k)
            cells.append(f"{s.mae_ev:.3f} ({s.mae_nm:4.0f})" + ("x" * min(s.n_failed, 1)) if s else "-")
        tag = " [training]" if training else ""
        print(f"| {label + tag:<38} | " + " | ".join(f"{c:>13}" for c in cells) + " |")
        counts = by
    print("| n rows" + " " * 33 + "| " + " | ".join(f"{counts[k].n if k in counts else 0:>13}" for k in order)
          + " |")
    for label, by, training, prov, *_ in summaries:
        if training and "cross_validated_mae_ev" in prov:
            cv = prov["cross_validated_mae_ev"]
            print(f"| {label.split()[0] + ' cross-validated (provenance)':<38} | " +
                  " | ".join(f"{cv[k]:>13.3f}" if k in cv else f"{'-':>13}" for k in order) + " |")
            break
    print("\nMean signed error (computed - measured), eV, per class (> 0: predicted too blue)")
    for label, by, *_ in summaries:
        print(f"| {label:<38} | " + " | ".join(f"{by[k].mean_signed_ev:>+13.3f}" if k in by else f"{'-':>13}"
                                              for k in order) + " |")
    print("\nfailures (unmatched or errors) per configuration:")
    for label, by, *_ in summaries:
        print(f"  {label}: {by['all'].n_failed}")
    print("\ntiming (s): prepare (once per geometry) / evaluate")
    for label, by, training, prov, t_prep, t_eval in summaries:
        print(f"  {label:<38} {t_prep:7.1f} {t_eval:7.1f}")
    print(f"  wall {wall:.1f} s with {args.jobs} worker(s)")

    if args.class_fits:
        for solv in solv_flags:
            class_fits(ref, args.folds, solv, jobs=args.jobs, auto=not args.no_auto_prior)
    return 0


def _class_fit_rows(job) -> list[str]:
    """Table rows of one class: ppp fit with fixed beta and with bond-order beta at the standard prior, and
    with ``prior_scale="auto"`` (nested cross-validation; with bond-order beta, the default's setting)."""
    ref_path, cls, k_max, solvents, auto = job
    ref = reference.load(ref_path)
    name = params.default_name()
    pset = params.load(name)
    base_opts = Options(parameters=name, n_triplets=0)
    prep = tuple(pe for pe in ev.prepare_set(ref.of_class(cls), base_opts, pset.bond_length_angstrom)
                 if not pe.error)
    default_mae = ev.evaluate(prep, pset, base_opts, reference_solvents=solvents).by_class()["all"].mae_ev
    plist = [fitting.FitParameter("beta", "C-C"), fitting.FitParameter("u", "C")]
    plist += fitting.default_parameters(prep, pset, min_count=max(2, len(prep) // 4))
    k = min(k_max, len(prep))
    meas = np.array([pe.entry.energy_ev for pe in prep])
    runs = [("fixed beta", False, 1.0), ("bo-beta", True, 1.0)] + ([("bo-beta auto", True, "auto")] if auto else [])
    rows = []
    for label, vb, prior in runs:
        opts = Options(parameters=name, n_triplets=0, bond_order_beta=vb)
        t0 = time.perf_counter()
        scale = prior
        if prior == "auto":
            scale = fitting.select_prior_scale(prep, pset, plist, opts, k=k, max_nfev=15,
                                               reference_solvents=solvents).scale
        res = fitting.fit(prep, pset, plist, opts, max_nfev=15, prior_scale=scale, reference_solvents=solvents)
        cv = fitting.cross_validate(prep, pset, plist, opts, k=k, max_nfev=15, prior_scale=prior,
                                    reference_solvents=solvents)
        train_mae = float(np.nanmean(np.abs(res.energies - meas)))
        cv_mae = float(np.nanmean(np.abs(cv.energies - meas)))
        ratio = cv_mae / default_mae
        note = ""
        if prior == "auto":
            note = f"prior {scale:g}; folds chose {', '.join(f'{x:g}' for x in cv.prior_scales)}; "
        rows.append(f"| {cls:<14} | {len(prep):>3} | {default_mae:10.3f} | {label:<12} | {train_mae:11.3f} | "
                    f"{cv_mae:7.3f} | {ratio:10.2f} | {'yes' if ratio <= 2 / 3 else 'no':>6} | "
                    f"{note}{', '.join(p.name for p in plist)} ({time.perf_counter() - t0:.0f} s, {k}-fold)")
    return rows


def class_fits(ref, k_max: int, solvents: bool = False, jobs: int = 1, auto: bool = True) -> None:
    """For each class: default-settings error, then ppp fit on the class with k-fold CV, once with fixed
    beta (ppp fit --bond-order-beta off), once with bond-order beta on (ppp fit --bond-order-beta on), both
    at the standard prior, and with ``auto``, with bond-order beta and the prior's strength chosen by an
    inner cross-validation (ppp fit --prior-scale auto; nested CV, about 20 times the time)."""
    name = params.default_name()
    print(f"\nPer-class calibration, starting from the default set '{name}'"
          f"{' (every row in its own solvent, reaction field)' if solvents else ' (gas phase)'}; target: "
          f"cross-validated MAE <= 2/3 of the default's")
    print(f"| {'class':<14} | {'n':>3} | {'default eV':>10} | {'fit options':<12} | {'training eV':>11} | "
          f"{'CV eV':>7} | {'CV/default':>10} | {'<= 2/3':>6} | fitted values")
    print("|" + "|".join("-" * w for w in (16, 5, 12, 14, 13, 9, 12, 8, 15)) + "|")
    work = [(str(ref.path), cls, k_max, solvents, auto) for cls in ref.classes]
    if jobs > 1:
        with ProcessPoolExecutor(jobs) as pool:
            for rows in pool.map(_class_fit_rows, work):
                print("\n".join(rows), flush=True)
    else:
        for job in work:
            print("\n".join(_class_fit_rows(job)), flush=True)


if __name__ == "__main__":
    sys.exit(main())
