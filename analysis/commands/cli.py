"""The ``cubeloupe`` command: one argparse dispatcher, one subcommand per module.

Each subcommand lives in its own module with a ``register(subparsers)``
function that adds its parser and sets ``func`` (called with the parsed
arguments, returning the exit status). To add one, list its module below.

Examples
--------
>>> main(["--help"])  # doctest: +SKIP
"""

import argparse
import sys

from . import check_command, demo_command

__all__ = ["SUBCOMMANDS", "build_parser", "main"]

# Modules that register a subcommand.
SUBCOMMANDS = (check_command, demo_command)


def build_parser():
    """The top-level parser with every registered subcommand."""
    parser = argparse.ArgumentParser(
        prog="cubeloupe",
        description="Quick-look inspection of radio and (sub)millimetre spectral-line cubes.",
    )
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for module in SUBCOMMANDS:
        module.register(subparsers)
    return parser


def main(argv=None):
    """Entry point of the ``cubeloupe`` console script; returns the exit status."""
    args = build_parser().parse_args(sys.argv[1:] if argv is None else argv)
    return args.func(args)


if __name__ == "__main__":
    sys.exit(main())
