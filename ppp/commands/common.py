"""Options shared by the subcommands that compute molecules."""
from __future__ import annotations

from ..driver import RESPONSES, Options
from ..model.params import GAMMA_FORMULAS
from ..solvers.cis import SOLVERS


def add_model_arguments(p) -> None:
    g = p.add_argument_group("model")
    g.add_argument("--parameters", metavar="SET", help="parameter set name or TOML path (see 'ppp parameters')")
    g.add_argument("--gamma", choices=GAMMA_FORMULAS, help="two-centre repulsion formula (default: the set's)")
    g.add_argument("--singlets", type=int, default=10, metavar="N", help="singlet states per chromophore (10)")
    g.add_argument("--triplets", type=int, default=10, metavar="N", help="triplet states per chromophore (10)")
    g.add_argument("--input-coordinates", action="store_true",
                   help="use the coordinates of the MOL/SDF records instead of idealised planar ones")
    g.add_argument("--max-centres", type=int, default=Options.max_centres, metavar="N",
                   help=f"refuse chromophores with more pi-centres than this ({Options.max_centres})")
    g.add_argument("--response", choices=RESPONSES, default="cis",
                   help="singlet method: cis (Tamm-Dancoff, default) or rpa (random-phase approximation, "
                        "time-dependent Hartree-Fock; lower, usually closer bands for dyes; triplets stay CIS)")
    g.add_argument("--cis-solver", choices=SOLVERS, default="auto",
                   help="CIS eigensolver: dense matrix, matrix-free iterative (Davidson), or auto "
                        "(dense for small pi-systems)")
    g.add_argument("--threads", type=int, default=1, metavar="N",
                   help="BLAS threads per molecule (1; more can help one large molecule on an idle machine)")
    g.add_argument("--bond-order-beta", choices=("on", "off"),
                   help="beta follows the SCF bond orders (default: the parameter set's choice)")
    g.add_argument("--conformer", action="store_true",
                   help="twist angles from an RDKit 3D conformer (ETKDG + MMFF94), centres kept planar")
    g.add_argument("--no-twist", action="store_true",
                   help="with 3D coordinates, do not scale beta by the cosine of the p-orbital twist")
    g.add_argument("--solvent", metavar="NAME",
                   help="solvent for the generalized-Born reaction field (e.g. ethanol, water, hexane; "
                        "see docs/accuracy.md); default: gas phase")


def options_from(args) -> Options:
    if getattr(args, "conformer", False) and args.input_coordinates:
        from ..errors import InputError
        raise InputError("--conformer and --input-coordinates exclude each other")
    coords = "input" if args.input_coordinates else ("conformer" if getattr(args, "conformer", False)
                                                     else "depiction")
    bo = getattr(args, "bond_order_beta", None)
    vb = None if bo is None else bo == "on"
    return Options(parameters=args.parameters, gamma=args.gamma, n_singlets=args.singlets,
                   n_triplets=args.triplets, coordinates=coords, max_centres=args.max_centres,
                   cis_solver=getattr(args, "cis_solver", "auto"), threads=getattr(args, "threads", 1),
                   bond_order_beta=vb, twist=not getattr(args, "no_twist", False),
                   solvent=getattr(args, "solvent", None), response=getattr(args, "response", "cis"))
