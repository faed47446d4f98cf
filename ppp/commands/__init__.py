"""Subcommands of the ``ppp`` command line. Each module defines ``NAME``, ``HELP``, ``add_arguments(p)``
and ``main(args) -> int``; register new ones in ``ppp.cli.COMMANDS``."""
