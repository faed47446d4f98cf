"""The ``ppp`` command line. Each subcommand lives in ``ppp.commands.<name>``.

Errors of the project's own kinds become one line ``error: <molecule>: <reason>`` and exit status 1;
``--traceback`` shows the full trace. Any other exception is a bug and is reported as such.
"""
from __future__ import annotations

import argparse
import importlib
import signal
import sys

from . import __version__
from .errors import PPPError, one_line

#: Subcommand modules, in the order ``ppp --help`` lists them.
COMMANDS = ["run", "batch", "demo", "export", "merge", "salvage", "spectrum", "compare", "fit", "parameters"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="ppp", description="UV-visible absorption of conjugated molecules (PPP pi-electron model + CIS).")
    parser.add_argument("--version", action="version", version=f"ppp {__version__}")
    parser.add_argument("--traceback", action="store_true", help="show the full traceback on errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMANDS:
        mod = importlib.import_module(f"ppp.commands.{name}")
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.HELP)
        p.add_argument("--traceback", action="store_true", default=argparse.SUPPRESS,
                       help="show the full traceback on errors")
        mod.add_arguments(p)
        p.set_defaults(_main=mod.main)
    return parser


def main(argv: list[str] | None = None) -> int:
    try:
        parser = build_parser()  # imports the subcommands, and with them numpy, scipy and RDKit
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    args = parser.parse_args(argv)
    if not getattr(args, "command", None):
        parser.print_help()
        return 2
    try:
        return int(args._main(args) or 0)
    except PPPError as err:
        if args.traceback:
            raise
        print(f"error: {err}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:  # a bug: say so in one line, full trace on request
        if args.traceback:
            raise
        print(f"internal error (a bug in ppp, please report it with --traceback output): "
              f"{type(exc).__name__}: {one_line(exc)}", file=sys.stderr)
        return 3


def run() -> None:
    """Process entry point (the ``ppp`` script, ``python -m ppp``): :func:`main`, then exit with its status.
    Once the command has returned, its work is done and saved; a Ctrl-C that lands while the interpreter
    shuts down (pool threads, atexit handlers) is ignored rather than printed as a stray traceback."""
    code = main()
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    sys.exit(code)


if __name__ == "__main__":  # pragma: no cover
    run()
