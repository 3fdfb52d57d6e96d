"""The ``lexbuild`` command: one thin sub-command per stage over an importable function.

Each module in ``COMMAND_MODULES`` defines ``register(subparsers)``, which adds its commands and
sets ``handler`` (a function ``(args) -> int``) on each. Handlers import heavy parts lazily.
Exit codes: 0 clean, 1 findings (check or validation problems), 2 usage, input or I/O error.
"""

from __future__ import annotations

import argparse
import importlib
import sys
from collections.abc import Sequence

from lexbuild.cli.common import EXIT_FINDINGS, EXIT_OK, EXIT_USAGE, command_gc
from lexbuild.errors import LexbuildError

__all__ = ["EXIT_FINDINGS", "EXIT_OK", "EXIT_USAGE", "build_parser", "main"]

COMMAND_MODULES = (
    "lexbuild.cli.lexicon",  # check, schema
    "lexbuild.cli.xml",  # export, validate
    "lexbuild.cli.parse",  # parse
    "lexbuild.cli.corpus",  # frames
    "lexbuild.cli.induce",  # induce
    "lexbuild.cli.evaluation",  # evaluate, calibrate
    "lexbuild.cli.editions",  # merge, release, diff
    "lexbuild.cli.demo",  # demo
    "lexbuild.cli.schemas",  # schemas fetch, schemas status
    "lexbuild.cli.preview",  # preview
)


def build_parser() -> argparse.ArgumentParser:
    from lexbuild import __version__

    parser = argparse.ArgumentParser(
        prog="lexbuild",
        description="Build, check, publish and compare valency dictionaries of verbs.",
    )
    parser.add_argument("--version", action="version", version=f"lexbuild {__version__}")
    subparsers = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module_name in COMMAND_MODULES:
        try:
            module = importlib.import_module(module_name)
        except ModuleNotFoundError as error:  # a command group not built yet
            if error.name != module_name:
                raise
            continue
        module.register(subparsers)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    handler = getattr(args, "handler", None)
    if handler is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    try:
        with command_gc():
            return int(handler(args))
    except LexbuildError as error:
        print(f"lexbuild {args.command}: error: {error}", file=sys.stderr)
        return EXIT_USAGE
    except OSError as error:
        print(f"lexbuild {args.command}: error: {error}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print(f"lexbuild {args.command}: interrupted", file=sys.stderr)
        return 130
