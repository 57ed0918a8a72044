"""``cablekit accuracy DESIGN.toml [-o MAP.npz]``: predicted accuracy over the task region."""

from __future__ import annotations

import sys
from pathlib import Path

from ..cli import EXIT_CHECK_FAILED, EXIT_OK, InputError, option_quantity, output_path
from ..design import load_design

NAME = "accuracy"
HELP = "predict how precisely the platform lands over the task region (error budget, maps)"
DESCRIPTION = ("Propagates the error budget of the design's [errors] table (or the defaults) to the platform "
               "pose at every point of the task grid: first order, worst-case bounds, sampled builds for the "
               "95 %% error, and a Monte Carlo check that solves the forward kinematics of perturbed rigs "
               "(JCGM 101:2008). Prints a summary and writes the map as .npz (plain arrays).")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("-o", "--output", metavar="MAP.npz",
                   help="where to write the map (default: DESIGN.accuracy.npz in the current folder)")
    p.add_argument("--html", metavar="MAP.html", help="also write the map figure as a self-contained HTML page")
    p.add_argument("--step", metavar="LENGTH", help="grid step with a unit, e.g. '100 mm' (default: task.step)")
    p.add_argument("--max-poses", type=int, default=2000, metavar="N",
                   help="enlarge the grid step until the grid has at most N poses (default 2000)")
    p.add_argument("--builds", type=int, default=1000, metavar="N",
                   help="sampled rigs for the 95 %% error (default 1000)")
    p.add_argument("--mc-samples", type=int, default=2000, metavar="N",
                   help="Monte Carlo samples per checked pose; 0 skips the check (default 2000)")
    p.add_argument("--mc-poses", type=int, default=5, metavar="N", help="poses the Monte Carlo check visits (default 5)")
    p.add_argument("--seed", type=int, default=0, help="random seed (default 0)")
    p.add_argument("--quiet", action="store_true", help="no progress messages")


class _Progress:
    """Progress lines on stderr, about every 20 % of each stage."""

    def __init__(self, quiet: bool):
        self.quiet = quiet
        self.last: dict[str, int] = {}

    def __call__(self, stage: str, done: int, total: int) -> None:
        if self.quiet or total <= 0:
            return
        tenth = int(5 * done / total)
        if self.last.get(stage) == tenth and done != total:
            return
        self.last[stage] = tenth
        print(f"  {stage}: {done:,}/{total:,}", file=sys.stderr, flush=True)


def run(args) -> int:
    from ..accuracy import accuracy_map, design_checks
    from ..checks import FAIL

    d = load_design(args.design)
    step = option_quantity(args.step, "length", "--step")
    for name in ("max_poses", "builds", "mc_poses"):
        if getattr(args, name) < 1:
            raise InputError(f"--{name.replace('_', '-')}: must be at least 1, got {getattr(args, name)}")
    if args.mc_samples < 0:
        raise InputError(f"--mc-samples: must not be negative, got {args.mc_samples}")
    from .. import limits

    for name, cap in (("max_poses", limits.MAX_GRID_POSES), ("builds", limits.MAX_BUILDS),
                      ("mc_samples", limits.MAX_MC_SAMPLES), ("mc_poses", limits.MAX_MC_POSES)):
        if getattr(args, name) > cap:
            raise InputError(f"--{name.replace('_', '-')}: at most {cap:,} (cablekit.limits), got {getattr(args, name):,}")
    if args.builds * args.max_poses > limits.MAX_BUILD_EVALUATIONS:
        raise InputError(f"--builds x --max-poses: at most {limits.MAX_BUILD_EVALUATIONS:,} pose evaluations "
                         f"(cablekit.limits.MAX_BUILD_EVALUATIONS), got {args.builds * args.max_poses:,}")
    out = output_path(args.output or Path(args.design).stem + ".accuracy.npz", "-o/--output",
                      inputs=[args.design], suffixes=(".npz",))
    html = output_path(args.html, "--html", inputs=[args.design, out], suffixes=(".html", ".htm"))
    try:
        res = accuracy_map(d, step=step, builds=args.builds, monte_carlo_samples=args.mc_samples,
                           monte_carlo_poses=args.mc_poses, seed=args.seed, max_poses=args.max_poses,
                           progress=_Progress(args.quiet))
    except ValueError as exc:  # e.g. an impossible grid step or an unreachable home pose
        raise InputError(str(exc)) from None
    print("\n".join(res.summary()))
    checks = design_checks(d, accuracy=res)
    for c in checks:
        print(f"  [{c.status}] {c.title}: {c.value:.3f} {c.unit} (limit {c.limit:.3f} {c.unit})")
    res.save(out)
    print(f"wrote {out}")
    if html:
        from ..design import atomic_write_text

        atomic_write_text(html, res.figure().to_html(include_plotlyjs=True, full_html=True))
        print(f"wrote {html}")
    return EXIT_CHECK_FAILED if any(c.status == FAIL for c in checks) else EXIT_OK
