"""The `boundwise` command: one subcommand module per verb under ``service.commands``."""

from __future__ import annotations

import argparse
import importlib
import logging
import sys
from collections.abc import Sequence

# Each module provides ``register(subparsers)``, which adds its subparser and
# sets ``func(args) -> int`` as the default. Only the module of the command
# being run is imported (a local solve need not load the web stack).
COMMANDS = {
    "solve": "service.commands.solve",
    "serve": "service.commands.serve",
    "worker": "service.commands.worker",
    "keys": "service.commands.keys",
}


def _wanted(argv: Sequence[str] | None) -> list[str]:
    """Return the command modules to load: the named command's, or all of them (for help)."""
    args = list(sys.argv[1:] if argv is None else argv)
    named = [a for a in args if a in COMMANDS]
    return [COMMANDS[named[0]]] if named else list(COMMANDS.values())


def build_parser(argv: Sequence[str] | None = None) -> argparse.ArgumentParser:
    """Return the argument parser with the subcommands ``argv`` needs (all of them by default)."""
    parser = argparse.ArgumentParser(
        prog="boundwise",
        description="Anytime planning with proven bounds: solve locally, or run the service and its workers.",
    )
    parser.add_argument("--log-level", default="WARNING", help="logging level (default WARNING)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name in _wanted(argv) if argv is not None else COMMANDS.values():
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as err:
            if err.name != name:
                raise
            continue
        module.register(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    """Run the `boundwise` command line; return the process exit status."""
    argv = list(sys.argv[1:] if argv is None else argv)
    args = build_parser(argv).parse_args(argv)
    if not logging.getLogger().handlers:
        logging.basicConfig(level=args.log_level.upper(), stream=sys.stderr,
                            format="%(asctime)s %(levelname)s %(name)s: %(message)s")
    return int(args.func(args) or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
