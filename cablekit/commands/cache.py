"""``cablekit cache [--clear]``: where the generated kinematics code is cached, and clearing it."""

from __future__ import annotations

NAME = "cache"
HELP = "show or clear the cache of generated kinematics code"


def add_arguments(p) -> None:
    p.add_argument("--clear", action="store_true", help="delete every cached generated module")


def run(args) -> int:
    from ..codegen import cache_dir, clear_cache

    folder = cache_dir()
    files = sorted(folder.glob("ck_*.py"))
    size = sum(f.stat().st_size for f in files)
    print(f"generated-code cache: {folder} ({len(files)} modules, {size / 1024:.0f} kB)")
    if args.clear:
        print(f"removed {clear_cache()} modules")
    return 0
