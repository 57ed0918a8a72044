"""``cablekit points DESIGN.toml POINTS.csv [-o OUT.csv]``: lengths, counts and tensions per pose."""

from __future__ import annotations

import numpy as np

from ..cli import InputError, output_path
from ..design import load_design
from ..tables import Column, read_table, write_table

NAME = "points"
HELP = "cable lengths, encoder counts and tensions for the poses in a CSV"
DESCRIPTION = ("Reads a CSV with columns 'x [unit]', 'y [unit]', 'z [unit]' (and 'roll [deg]', 'pitch [deg]', "
               "'yaw [deg]' for rigid platforms) and writes, per pose, each cable's length, its change from home "
               "in encoder counts, the tensions, and whether the pose is feasible (or why not).")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("points", metavar="POINTS.csv")
    p.add_argument("-o", "--output", metavar="OUT.csv", help="write the table here (default: print a summary only)")


def pose_columns(kind: str) -> list[Column]:
    cols = [Column("x", "length"), Column("y", "length"), Column("z", "length")]
    if kind == "rigid":
        cols += [Column("roll", "angle", required=False), Column("pitch", "angle", required=False),
                 Column("yaw", "angle", required=False)]
    return cols


def read_poses(design, path) -> np.ndarray:
    table = read_table(path, pose_columns(design.platform.kind) + [Column("label", "text", required=False)])
    n = len(table)
    cols = [table.columns["x"], table.columns["y"], table.columns["z"]]
    if design.dof == 6:
        cols += [table.columns.get(k, np.zeros(n)) for k in ("roll", "pitch", "yaw")]
    return np.column_stack(cols)


def pose_report(design, poses):
    """Per pose: lengths (N, m), counts (N, m), TensionResult and a reason text (N,)."""
    from ..kinematics import cable_lengths, lengths_to_counts, zero_length_cables  # (SymPy: imported only when needed)
    from ..statics import tension_limits, tensions_at

    L = cable_lengths(design, poses)
    counts = np.rint(lengths_to_counts(design, L)).astype(np.int64)
    res = tensions_at(design, poses)
    lim = tension_limits(design)
    names = design.cable_names
    zero = zero_length_cables(design, poses)
    reasons = []
    for k in range(len(poses)):
        if res.feasible[k]:
            reasons.append("feasible")
            continue
        t = res.tensions[k]
        if np.any(zero[k]):
            reasons.append("no solution / singular: cable " + ", ".join(n for n, z in zip(names, zero[k]) if z)
                           + " has zero length (attachment at its exit)")
            continue
        if not np.all(np.isfinite(t)):
            reasons.append("no tension balances the load here (outside the wrench-feasible workspace)")
            continue
        i = int(res.limiting_cable[k])
        if t[i] < lim.t_min[i]:
            reasons.append(f"cable {names[i]} slack ({t[i]:.1f} N < {lim.t_min[i]:.1f} N)")
        else:
            reasons.append(f"cable {names[i]} over its {lim.limited_by[i]} limit ({t[i]:.1f} N > {lim.t_max[i]:.1f} N)")
    return L, counts, res, reasons


def run(args) -> int:
    out = output_path(args.output, "-o/--output", inputs=[args.design, args.points], suffixes=(".csv",))
    d = load_design(args.design)
    poses = read_poses(d, args.points)
    for k, pose in enumerate(poses):
        if np.min(np.linalg.norm(d.exits - pose[:3], axis=1)) < 1e-9:
            raise InputError(f"{args.points} row {k + 1}: pose coincides with an exit point")
    L, counts, res, reasons = pose_report(d, poses)
    names = d.cable_names
    n_ok = int(np.sum(res.feasible))
    print(f"{d.meta.name}: {len(poses)} poses, {n_ok} feasible, {len(poses) - n_ok} not ({res.method})")
    for k, r in enumerate(reasons):
        if r != "feasible":
            print(f"  row {k + 1}: {r}")
    if args.output:
        pose_names = ["x [m]", "y [m]", "z [m]"] + (["roll [rad]", "pitch [rad]", "yaw [rad]"] if d.dof == 6 else [])
        header = (pose_names + [f"length {n} [m]" for n in names] + [f"counts {n}" for n in names]
                  + [f"tension {n} [N]" for n in names] + ["margin [N]", "feasible", "reason"])
        rows = [list(poses[k]) + list(L[k]) + [int(c) for c in counts[k]] + list(res.tensions[k])
                + [float(res.margin[k]), "yes" if res.feasible[k] else "no", reasons[k]] for k in range(len(poses))]
        write_table(out, header, rows, comment=f"cablekit points: {d.meta.name}")
        print(f"wrote {out}")
    return 0
