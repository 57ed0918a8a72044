"""``cablekit task DESIGN.toml TASK.csv [-o PLAN.csv]``: check a list of tool-tip targets."""

from __future__ import annotations

import sys

from ..cli import EXIT_CHECK_FAILED, EXIT_OK, InputError, option_quantity, output_path
from ..design import load_design

NAME = "task"
HELP = "check a task's tool-tip targets and the moves between them; write the plan"
DESCRIPTION = (
    "Reads a CSV of tool-tip targets (columns 'label', 'x [mm]', 'y [mm]', 'z [mm]', optional 'tool roll [deg]' "
    "and 'tool tilt [deg]', 'gripper' open/closed after arriving, optional columns named like the arm's reach "
    "joints, and for rigid platforms 'platform roll/pitch/yaw [deg]'). Solves the platform pose of each target "
    "so the tool tip lands on it, and checks every target and the straight moves between them for reach, "
    "interference with obstacles, cable tensions (arm weight, offset and payload counted) and servo loads. "
    "Prints the first failing step and why; exit code 4 when a step fails, 3 on bad input. The design needs "
    "an [arm] section.")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("task", metavar="TASK.csv")
    p.add_argument("-o", "--output", metavar="PLAN.csv",
                   help="write the plan: per target the platform pose, joints, cable lengths, encoder counts, "
                        "tensions, move times and checks (written even when a step fails)")
    p.add_argument("--step", default="10 mm", metavar="LENGTH",
                   help="largest tool-tip travel between checked poses on a move (default: 10 mm)")
    p.add_argument("--angle-step", default="2 deg", metavar="ANGLE",
                   help="largest wrist or joint turn between checked poses (default: 2 deg)")
    p.add_argument("--clearance", default="0 mm", metavar="LENGTH",
                   help="grow every obstacle box by this much (default: 0 mm)")


def run(args) -> int:
    from ..task import check_task, read_task, write_plan

    step = option_quantity(args.step, "length", "--step", positive=True)
    angle_step = option_quantity(args.angle_step, "angle", "--angle-step", positive=True)
    clearance = option_quantity(args.clearance, "length", "--clearance", positive=False)
    out = output_path(args.output, "-o/--output", inputs=[args.design, args.task], suffixes=(".csv",))
    d = load_design(args.design)
    if d.sections.get("arm") is None:
        raise InputError(f"{args.design} has no [arm] section: the task check needs the tool arm "
                         "(for platform poses alone use 'cablekit points')")
    targets = read_task(d, args.task)  # a TableError becomes exit 3 with its message
    try:
        report = check_task(d, targets, move_step=step, angle_step=angle_step, clearance=clearance,
                            progress=lambda text: print(f"  ... {text}", file=sys.stderr))
    except ValueError as exc:  # a sampling beyond the documented limit
        raise InputError(str(exc)) from None
    print("\n".join(report.summary()))
    if args.output:
        write_plan(report, out)
        print(f"wrote {out}")
    return EXIT_OK if report.ok else EXIT_CHECK_FAILED
