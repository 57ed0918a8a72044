"""``cablekit check DESIGN.toml``: validate and summarise a design."""

from __future__ import annotations

import numpy as np

from ..design import load_design

NAME = "check"
HELP = "validate a design file and print a summary"


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")


def summary_lines(d) -> tuple[list[str], list[str]]:
    """Summary lines and warnings of a valid design (also used by the review sheet)."""
    from ..kinematics import home_lengths, length_per_count  # (SymPy: imported only when needed)
    from ..statics import tension_limits

    lines, warnings = [], []
    lines.append(f"{d.meta.name}")
    lines.append(f"  platform : {d.platform.kind} ({d.dof} DOF), {d.platform.mass:g} kg; payload "
                 f"{d.payload.name} {d.payload.mass:g} kg; total {d.total_mass:g} kg")
    lines.append(f"  cables   : {d.m} x {d.cable.construction or 'rope'}, d = {d.cable.diameter * 1e3:g} mm, "
                 f"MBF {d.cable.breaking_force / 1e3:g} kN, EA {d.cable.axial_stiffness / 1e3:g} kN, "
                 f"taut above {d.cable.min_tension:g} N")
    lim = tension_limits(d)
    hl = home_lengths(d)
    lpc = length_per_count(d)
    lines.append("  cable      exit point [m]            home length [m]  per count [um]  t_max [N] (limited by)  t_min [N]")
    for i, e in enumerate(d.frame.exits):
        pos = ", ".join(f"{v:6.3f}" for v in e.position)
        lines.append(f"  {e.name:<10} ({pos})   {hl[i]:10.4f}     {lpc[i] * 1e6:12.3f}  {lim.t_max[i]:9.1f} "
                     f"({lim.limited_by[i]}){'':<{8 - len(lim.limited_by[i])}} {lim.t_min[i]:9.1f}")
    w = d.winches[0]
    shared = all(x == w for x in d.winches)
    lines.append(f"  winches  : {'one shared spec' if shared else 'per cable'}: drum {w.drum_diameter * 1e3:g} mm, "
                 f"gear {w.gear_ratio:g}:1, encoder {w.encoder_lines} lines x{w.decoding}, "
                 f"motor {w.motor_rated_torque:g} N*m rated / {w.motor_peak_torque:g} N*m peak")
    t = d.task
    if t.box_lower is not None:
        lo, hi = np.array(t.box_lower), np.array(t.box_upper)
        lines.append(f"  task box : ({', '.join(f'{v:g}' for v in lo)}) .. ({', '.join(f'{v:g}' for v in hi)}) m, "
                     f"{np.prod(hi - lo):.3g} m^3, grid step {t.step * 1e3:g} mm")
    if t.points:
        lines.append(f"  points   : {len(t.points)}")
    if d.dof == 6:
        from ..region import task_orientations

        rng = f" (list and a range, {t.orientation_samples} values per angle)" if t.orientation_range else ""
        lines.append(f"  orientations: {len(task_orientations(t))}{rng}")
    if d.frame.obstacles:
        lines.append("  obstacles: " + ", ".join(o.name for o in d.frame.obstacles))
    for name in d.sections:
        lines.append(f"  section  : [{name}]")
    if d.m == d.dof:
        warnings.append(f"{d.m} cables for {d.dof} DOF: no redundancy; the platform relies on gravity "
                        "to keep cables taut")
    if t.speed == 0:
        warnings.append("task.speed not given: speed and count-rate checks will be skipped")
    if any(e.pulley_diameter == 0 for e in d.frame.exits):
        warnings.append("some exits are eyelets (pulley_diameter 0): the D/d check cannot be done for them")
    if not all(w.brake for w in d.winches):
        warnings.append("not every winch has a holding brake: a suspended load drops on power loss")
    warnings += exit_contact_warnings(d)
    return lines, warnings


def exit_contact_warnings(d) -> list[str]:
    """Warnings where the task region (box or points, any task orientation) reaches a pose that
    puts an attachment exactly at its exit: a zero-length cable, a singular pose."""
    from ..kinematics import ZERO_LENGTH, positions_at_exits  # (SymPy: imported only when needed)
    from ..region import task_orientations

    t = d.task
    # every orientation the task asks for: the list and the range grid
    orient = [tuple(o) for o in task_orientations(t)] if d.dof == 6 else [(0.0, 0.0, 0.0)]
    P = positions_at_exits(d, orient)  # (K, m, 3)
    tol = ZERO_LENGTH * max(1.0, float(np.max(np.abs(d.exits))))
    hit = np.zeros(P.shape[:2], bool)
    if t.box_lower is not None:
        hit |= np.all((P >= np.array(t.box_lower) - tol) & (P <= np.array(t.box_upper) + tol), axis=2)
    for pt in t.points:
        hit |= np.linalg.norm(P - np.array(pt), axis=2) <= tol
    out = []
    for k, i in zip(*np.nonzero(hit)):
        pos = ", ".join(f"{v:g}" for v in P[k, i])
        ang = f", orientation {', '.join(f'{np.degrees(v):g}' for v in orient[k])} deg" if d.dof == 6 else ""
        out.append(f"the task region touches exit {d.cable_names[i]}: at position ({pos}) m{ang} its cable has "
                   "zero length; that pose is singular (no solution) and is mapped infeasible")
    return out


def run(args) -> int:
    d = load_design(args.design)
    lines, warnings = summary_lines(d)
    print("\n".join(lines))
    for w in warnings:
        print(f"  warning: {w}")
    print(f"{args.design}: valid")
    return 0
