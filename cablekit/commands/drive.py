"""``cablekit drive DESIGN.toml``: per-winch drivetrain sizing with pass/warn/fail."""

from __future__ import annotations

import sys

from ..cli import EXIT_CHECK_FAILED, EXIT_OK, InputError, option_quantity
from ..design import load_design

NAME = "drive"
HELP = "size each winch (torque, speed, encoder, drum, fleet angle, D/d, rope) and check it"
DESCRIPTION = ("Size every winch's drivetrain from the highest cable tension over the task region and check rope "
               "design factor, D/d of drum and pulley, fleet angle, encoder count rate, motor speed and torque, "
               "drum capacity, flange freeboard and brake. Exit code 4 when a check fails.")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("--step", metavar="LENGTH", default=None,
                   help="task-grid step with its unit, e.g. '50 mm' (default: task.step of the design)")
    p.add_argument("--all-checks", action="store_true", help="list every check, not only those not passed")


def _progress(done: int, total: int) -> None:
    if total >= 2000 and sys.stderr.isatty():
        print(f"\r  tensions over the task region: {done}/{total} poses", end="" if done < total else "\n",
              file=sys.stderr, flush=True)


def run(args) -> int:
    from ..drive import numbers_text, size_drives

    d = load_design(args.design)
    step = option_quantity(args.step, "length", "--step")
    try:
        res = size_drives(d, step=step, progress=_progress)
    except ValueError as exc:  # an impossible grid or drum (e.g. a drum narrower than one wrap)
        raise InputError(str(exc)) from None
    lines = res.summary()
    print("\n".join(lines[:-1]))
    if args.all_checks:
        print("  every check:")
        for c in res.checks:
            print(f"    {c.status.upper():<4} {c.subject}: {c.title}{numbers_text(c)} - {c.detail} [source: {c.source}]")
    print(lines[-1])
    return EXIT_CHECK_FAILED if res.status == "fail" else EXIT_OK
