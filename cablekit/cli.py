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
           "option_quantity", "output_path"]


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


_SYSTEM_TREES = ("/proc", "/sys", "/dev")


def output_path(path, option: str, *, inputs=(), suffixes: tuple[str, ...] = (), create_folder: bool = False):
    """Check a file the command is about to write and return it as a ``Path``.

    Refused with :class:`InputError` (exit 3) naming ``option`` and the path: the same file as
    any of ``inputs`` (after resolving symbolic links, or a hard link to it), an existing folder,
    a symbolic link, anything but a regular file (a pipe, a device, a file under /proc, /sys or
    /dev), a name not ending in one of ``suffixes``, a folder that does not exist (created
    instead when ``create_folder``) and a folder this user cannot write into.  ``None`` passes
    through (option not given).
    """
    import os
    from pathlib import Path

    if path is None:
        return None
    out = Path(path)
    shown = str(path)
    if not shown.strip():
        raise InputError(f"{option}: empty file name")
    if suffixes and out.suffix.lower() not in suffixes:
        raise InputError(f"{option}: {shown!r} must end in {' or '.join(suffixes)}")
    if out.is_symlink():
        raise InputError(f"{option}: {shown!r} is a symbolic link; give the real file name")
    resolved = out.resolve()
    if any(resolved == Path(t) or str(resolved).startswith(t + "/") for t in _SYSTEM_TREES):
        raise InputError(f"{option}: {shown!r} is a system file; give a file in one of your folders")
    if out.exists():
        if out.is_dir():
            raise InputError(f"{option}: {shown!r} is a folder; give a file name inside it")
        if not out.is_file():
            raise InputError(f"{option}: {shown!r} is not a regular file (a pipe or device); give a file name")
    for item in inputs:
        if item is None:
            continue
        source = Path(item)
        same = resolved == source.resolve()
        if not same and out.exists() and source.exists():
            try:
                same = os.path.samefile(out, source)
            except OSError:
                same = False
        if same:
            raise InputError(f"{option}: {shown!r} is the input file {str(item)!r}; refusing to overwrite an "
                             "input, choose another output name")
    folder = resolved.parent
    if not folder.is_dir():
        if folder.exists():
            raise InputError(f"{option}: cannot write {shown!r}: {str(folder)!r} is not a folder")
        if not create_folder:
            raise InputError(f"{option}: cannot write {shown!r}: folder {str(folder)!r} does not exist; create it first")
        try:
            folder.mkdir(parents=True)
        except OSError as exc:
            raise InputError(f"{option}: cannot write {shown!r}: cannot create folder {str(folder)!r} "
                                 f"({exc.strerror or exc})") from None
    if not os.access(folder, os.W_OK | os.X_OK):
        raise InputError(f"{option}: cannot write {shown!r}: no permission to write into folder {str(folder)!r}")
    return out


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
    except OSError as exc:
        # a file the user named could not be read or written (permissions, a full disk, a
        # folder removed meanwhile): the user's environment, not a bug
        if exc.filename is None:
            return _internal_error(args, exc)
        print(f"cablekit {args.command}: cannot access {exc.filename}: {exc.strerror or exc}", file=sys.stderr)
        return EXIT_INVALID
    except Exception as exc:
        return _internal_error(args, exc)


def _internal_error(args, exc: Exception) -> int:
    """A bug: one line by default, the traceback with --debug."""
    if args.debug:
        raise exc
    print(f"cablekit {args.command}: internal error: {type(exc).__name__}: {exc} "
          "(run again with --debug for the traceback)", file=sys.stderr)
    return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
