"""Options shared by the subcommands that compute molecules."""
from __future__ import annotations

from ..driver import Options
from ..model.params import GAMMA_FORMULAS


def add_model_arguments(p) -> None:
    g = p.add_argument_group("model")
    g.add_argument("--parameters", metavar="SET", help="parameter set name or TOML path (see 'ppp parameters')")
    g.add_argument("--gamma", choices=GAMMA_FORMULAS, help="two-centre repulsion formula (default: the set's)")
    g.add_argument("--singlets", type=int, default=10, metavar="N", help="singlet states per chromophore (10)")
    g.add_argument("--triplets", type=int, default=10, metavar="N", help="triplet states per chromophore (10)")
    g.add_argument("--input-coordinates", action="store_true",
                   help="use the coordinates of the MOL/SDF records instead of idealised planar ones")
    g.add_argument("--max-centres", type=int, default=300, metavar="N",
                   help="refuse chromophores with more pi-centres than this (300)")
    g.add_argument("--bond-order-beta", choices=("on", "off"),
                   help="beta follows the SCF bond orders (default: the parameter set's choice)")
    g.add_argument("--conformer", action="store_true",
                   help="3D coordinates from an RDKit conformer (ETKDG + MMFF94) instead of planar ones")
    g.add_argument("--no-twist", action="store_true",
                   help="with 3D coordinates, do not scale beta by the cosine of the p-orbital twist")


def options_from(args) -> Options:
    if args.conformer and args.input_coordinates:
        from ..errors import InputError
        raise InputError("--conformer and --input-coordinates exclude each other")
    coords = "input" if args.input_coordinates else ("conformer" if args.conformer else "depiction")
    vb = None if args.bond_order_beta is None else args.bond_order_beta == "on"
    return Options(parameters=args.parameters, gamma=args.gamma, n_singlets=args.singlets,
                   n_triplets=args.triplets, coordinates=coords, max_centres=args.max_centres,
                   bond_order_beta=vb, twist=not args.no_twist)
