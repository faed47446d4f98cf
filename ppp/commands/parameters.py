"""``ppp parameters``: list the parameter sets, or show one."""
from __future__ import annotations

from ..model import params as registry

NAME = "parameters"
HELP = "list the parameter sets, or show one with its sources"


def add_arguments(p) -> None:
    p.add_argument("name", nargs="?", help="set to show in full")


def main(args) -> int:
    if args.name is None:
        default = registry.default_name()
        for name in registry.available():
            s = registry.load(name)
            mark = " (default)" if name == default else ""
            print(f"{name}{mark}  v{s.version}  [{s.short_hash}]  {s.description}")
        return 0
    s = registry.load(args.name)
    print(f"{s.name} v{s.version} [{s.sha256}]\n{s.path}\n{s.description}")
    print(f"gamma: {s.gamma_formula}; bond length {s.bond_length_angstrom} A")
    print(f"{'type':<10} {'Z':>2} {'I/eV':>7} {'U/eV':>7}  source")
    for t in s.types.values():
        print(f"{t.name:<10} {t.z:>2} {t.ip_ev:7.3f} {t.u_ev:7.3f}  {t.source}")
    print(f"{'bond':<20} {'beta/eV':>8}")
    for (a, b), v in sorted(s.beta.items()):
        print(f"{a + '-' + b:<20} {v:8.3f}")
    if s.bond_order_beta is not None:
        bo = s.bond_order_beta
        print(f"bond-order beta: {'on' if s.bond_order_beta_enabled else 'off'} by default for "
              f"{', '.join('-'.join(p) for p in bo.pairs)}; r = {bo.length_intercept} - {bo.length_slope} p A, "
              f"{bo.law} law, r_ref {bo.reference_length} A")
    if s.alkyl_shift:
        print("alkyl shift (I lowered per saturated carbon on the centre, eV): "
              + ", ".join(f"{t} {v:.3f}" for t, v in s.alkyl_shift.items()))
    if s.uncertainty:
        print("band uncertainty (MAE per class, eV): "
              + ", ".join(f"{k} {v:.2f}" for k, v in s.uncertainty.items()))
        if s.uncertainty_source:
            print(f"  from: {s.uncertainty_source}")
    return 0
