"""The ``cubeloupe`` command line: ``cubeloupe check`` and ``cubeloupe demo``, and the JupyterLab launcher.

The top layer: it imports the delivery check (`cubeloupe.analysis.check`) and
the core analysis; nothing below imports it. `cli.main` is the console
script; each subcommand is a module with a ``register(subparsers)`` function.

Examples
--------
>>> from cubeloupe.analysis.commands import main
>>> main(["check", "--help"])  # doctest: +SKIP
"""

from .cli import build_parser, main

__all__ = ["build_parser", "main"]
