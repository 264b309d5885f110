"""The ``hwfilter`` command line: one module per subcommand in :mod:`hwfilter.commands`.

Each command module defines ``NAME``, ``HELP``, ``add_arguments(parser)`` and
``run(args) -> int``. User mistakes raise :class:`~hwfilter.errors.FilterFileError`
(or another ``ValueError``/``OSError`` from loading); they become one line on stderr and
exit status 2, never a traceback.
"""

from __future__ import annotations

import argparse
import importlib
import sys

from .errors import FilterFileError

__all__ = ["main", "COMMANDS"]

#: command modules, in the order ``--help`` lists them
COMMANDS = ("new", "check", "simulate", "analyze", "build", "verify", "estimate")


def _parser() -> tuple[argparse.ArgumentParser, dict]:
    parser = argparse.ArgumentParser(
        prog="hwfilter",
        description="Fixed-point digital filters for FPGAs: from a filter file to proven Verilog.",
    )
    from . import __version__

    parser.add_argument("--version", action="version", version=f"hwfilter {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    modules = {}
    for name in COMMANDS:
        try:
            mod = importlib.import_module(f".commands.{name}", __package__)
        except ModuleNotFoundError as e:
            if e.name == f"{__package__}.commands.{name}":
                continue  # not built yet
            raise
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=mod.HELP)
        mod.add_arguments(p)
        modules[mod.NAME] = mod
    return parser, modules


def main(argv: list[str] | None = None) -> int:
    parser, modules = _parser()
    args = parser.parse_args(argv)
    if not args.command:
        parser.print_help()
        return 2
    try:
        return int(modules[args.command].run(args) or 0)
    except FilterFileError as e:
        print(f"hwfilter {args.command}: error: {e}", file=sys.stderr)
        return 2
    except (OSError, ValueError) as e:
        print(f"hwfilter {args.command}: error: {e}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"hwfilter {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
