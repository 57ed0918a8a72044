"""The ``cablekit`` command line.

Each sub-command lives in its own module under :mod:`cablekit.commands` and provides
``NAME``, ``HELP``, ``add_arguments(parser)`` and ``run(args) -> int``; this file discovers
them, so adding a command never edits a shared list.

Exit codes (also in README and DEVELOPERS.md):

* 0 - done, every check passed
* 2 - bad command-line usage (argparse)
* 3 - bad input: invalid design file, bad CSV, impossible geometry (the reason is printed)
* 4 - done, but the design fails at least one check (review sheet, drive table, task check)
* 70 - internal error (a bug: please report it with ``--debug`` output)
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys

from . import __version__

EXIT_OK = 0
EXIT_USAGE = 2
EXIT_INVALID = 3
EXIT_CHECK_FAILED = 4
EXIT_INTERNAL = 70

__all__ = ["main", "EXIT_OK", "EXIT_USAGE", "EXIT_INVALID", "EXIT_CHECK_FAILED", "EXIT_INTERNAL", "InputError",
           "option_quantity"]


class InputError(ValueError):
    """Bad input from the user (not a bug): printed as one clear message, exit code 3."""


def option_quantity(text, dimension: str, option: str, *, positive: bool = True):
    """Parse a command-line quantity such as ``--step "20 mm"`` into an SI float.

    ``None`` passes through (option not given). Raises :class:`InputError` naming the option
    for a missing or wrong unit, a non-finite value, or a value that is not greater than zero
    (``positive``) or is negative.
    """
    import math

    from .units import UnitError, parse_quantity

    if text is None:
        return None
    try:
        value = parse_quantity(text, dimension, field=option)
    except UnitError as exc:
        raise InputError(str(exc)) from None
    if not math.isfinite(value) or (positive and not value > 0) or value < 0:
        kind = dimension.replace("_", " ")
        raise InputError(f"{option}: {text!r} must be a positive {kind}" if positive
                         else f"{option}: {text!r} must be a {kind} of zero or more")
    return value


def _commands():
    from . import commands

    mods = []
    for info in pkgutil.iter_modules(commands.__path__):
        if info.name.startswith("_"):
            continue
        mods.append(importlib.import_module(f"{commands.__name__}.{info.name}"))
    order = getattr(commands, "ORDER", [])
    mods.sort(key=lambda m: (order.index(m.NAME) if m.NAME in order else len(order), m.NAME))
    return mods


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="cablekit",
        description="Design checks for cable-driven parallel robots. Quantities take units: '20 mm', '3000 rpm'.",
        epilog="Exit codes: 0 ok, 2 usage, 3 bad input, 4 a design check failed, 70 internal error.",
    )
    parser.add_argument("--version", action="version", version=f"cablekit {__version__}")
    parser.add_argument("--debug", action="store_true", help="show the full traceback on internal errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for mod in _commands():
        p = sub.add_parser(mod.NAME, help=mod.HELP, description=getattr(mod, "DESCRIPTION", mod.HELP))
        mod.add_arguments(p)
        p.set_defaults(_run=mod.run)
    return parser


def main(argv=None) -> int:
    from .design import DesignError
    from .tables import TableError

    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_run", None):
        parser.print_help()
        return EXIT_USAGE
    try:
        return int(args._run(args))
    except DesignError as exc:
        print(str(exc), file=sys.stderr)
        return EXIT_INVALID
    except (InputError, TableError) as exc:
        print(f"cablekit {args.command}: {exc}", file=sys.stderr)
        return EXIT_INVALID
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except Exception as exc:  # a bug: one line by default, the traceback with --debug
        if args.debug:
            raise
        print(f"cablekit {args.command}: internal error: {type(exc).__name__}: {exc} "
              "(run again with --debug for the traceback)", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
