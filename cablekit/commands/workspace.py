"""``cablekit workspace DESIGN.toml [--step "20 mm"] [-o RESULT.npz]``: the workspace map."""

from __future__ import annotations

import sys
import time

import numpy as np

from ..cli import InputError, option_quantity, output_path
from ..design import load_design
from ..units import UnitError, parse_vector

NAME = "workspace"
HELP = "map where the platform can hold its load over the task region"
DESCRIPTION = ("Samples the task box (and task points) of the design, in every orientation of the set for rigid "
               "platforms, and classifies each pose: feasible, or why not (a slack cable, over the rope or motor "
               "limit, cables touching, a cable through the platform body or an obstacle). Prints a summary; "
               "-o writes every pose to a .npz result file (see cablekit.workspace for its keys).")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("--step", metavar="LENGTH", help="grid step with a unit, e.g. '20 mm' (default: the design's task.step)")
    p.add_argument("--orientations", metavar="LIST",
                   help="rigid platforms: roll, pitch, yaw sets separated by ';', e.g. '0, 0, 0 deg; 0, 10, 0 deg' "
                        "(default: the design's task.orientations)")
    p.add_argument("-o", "--output", metavar="RESULT.npz", help="write the per-pose result here")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


class _Bar:
    """A progress bar on stderr, shown once a run has taken more than half a second."""

    def __init__(self, stream=None, delay: float = 0.5):
        self.stream = stream or sys.stderr
        self.t0 = time.monotonic()
        self.delay = delay
        self.shown = False
        self.last = -1

    def __call__(self, done: int, total: int) -> None:
        if time.monotonic() - self.t0 < self.delay and done < total:
            return
        if not self.shown and done >= total:
            return  # finished before the bar was due
        pct = int(100 * done / max(total, 1))
        tty = getattr(self.stream, "isatty", lambda: False)()
        if not tty and pct // 25 == self.last // 25 and done < total:
            return
        self.shown = True
        self.last = pct
        bar = "#" * (pct // 4) + "." * (25 - pct // 4)
        text = f"workspace [{bar}] {pct:3d} % {done:,}/{total:,} poses"
        self.stream.write(("\r" + text) if tty else (text + "\n"))
        if tty and done >= total:
            self.stream.write("\n")
        self.stream.flush()


def _orientations(text, design):
    if text is None:
        return None
    if design.dof != 6:
        raise InputError("--orientations: a point platform has no orientation")
    parts = [s for s in text.split(";") if s.strip()]
    if not parts:
        raise InputError("--orientations: the orientation set is empty; give at least one roll, pitch, yaw "
                         "such as '0, 0, 0 deg'")
    out = []
    for k, s in enumerate(parts):
        try:
            out.append(parse_vector(s.strip(), "angle", length=3, field=f"--orientations item {k + 1}"))
        except UnitError as exc:
            raise InputError(str(exc)) from None
    return np.array(out)


def run(args) -> int:
    from ..workspace import compute_workspace

    d = load_design(args.design)
    step = option_quantity(args.step, "length", "--step")
    oris = _orientations(args.orientations, d)
    out = output_path(args.output, "-o/--output", inputs=[args.design], suffixes=(".npz",))
    bar = None if args.quiet else _Bar()
    try:
        ws = compute_workspace(d, step=step, orientations=oris, progress=bar)
    except ValueError as exc:
        raise InputError(str(exc)) from None
    print("\n".join(ws.summary()))
    if out is not None:
        ws.save(out)
        print(f"wrote {out}")
    return 0
