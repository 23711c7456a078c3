"""The `boundwise` command: one subcommand module per verb under ``service.commands``."""

from __future__ import annotations

import argparse
import importlib
import logging
import sys
from collections.abc import Sequence

# Each module provides ``register(subparsers)``, which adds its subparser and
# sets ``func(args) -> int`` as the default.
COMMANDS = (
    "service.commands.solve",
    "service.commands.serve",
    "service.commands.worker",
    "service.commands.keys",
)


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser with every available subcommand registered."""
    parser = argparse.ArgumentParser(
        prog="boundwise",
        description="Anytime planning with proven bounds: solve locally, or run the service and its workers.",
    )
    parser.add_argument("--log-level", default="WARNING", help="logging level (default WARNING)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", required=True)
    for name in COMMANDS:
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
    parser = build_parser()
    args = parser.parse_args(argv)
    if not logging.getLogger().handlers:
        logging.basicConfig(level=args.log_level.upper(), stream=sys.stderr,
                            format="%(asctime)s %(levelname)s %(name)s: %(message)s")
    return int(args.func(args) or 0)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
