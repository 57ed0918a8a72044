"""``cablekit new NAME.toml``: write a commented starter design."""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from ..cli import InputError, output_path
from ..design import atomic_write_text, loads_design

NAME = "new"
HELP = "write a commented starter design file"


def starter_text() -> str:
    return resources.files("cablekit").joinpath("templates/starter.toml").read_text(encoding="utf-8")


def add_arguments(p) -> None:
    p.add_argument("path", metavar="NAME.toml", help="file to create")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")


def run(args) -> int:
    path = Path(args.path)
    if path.suffix != ".toml":
        raise InputError(f"{path}: a design file name ends in .toml")
    if path.exists() and not args.force:
        raise InputError(f"{path} exists; choose another name or pass --force")
    path = output_path(path, "NAME.toml", suffixes=(".toml",))
    text = starter_text()
    loads_design(text, source="starter template")  # the template itself must stay valid
    atomic_write_text(path, text)
    print(f"wrote {path}; edit it, then run: cablekit check {path}")
    return 0
