"""Checking a task: a list of tool-tip targets, step by step, before anyone runs it.

A task CSV lists tool-tip targets in order (units in the headers, read by
:func:`cablekit.tables.read_table`)::

    label, x [mm], y [mm], z [mm], tool roll [deg], tool tilt [deg], gripper
    pick 1, 1000, 500, 300, 0, 0, closed

* ``x, y, z``: the tool tip in the world (required).
* ``tool roll``, ``tool tilt``: the wrist roll and tilt joints (relative to the levelled arm
  base, i.e. to the floor); default their home values.
* ``gripper``: ``open`` or ``closed`` *after* arriving at the target (required when the arm
  has a gripper).  While closed the gripper holds the payload.
* one optional column per ``reach`` joint, named like the joint (``lift [mm]``).
* rigid platforms: optional ``platform roll``, ``platform pitch``, ``platform yaw``; default the
  home orientation.  The levelling joints are solved to keep the arm base level.

:func:`check_task` solves the platform pose of every target (tool-tip pivoting, see
:mod:`cablekit.tooltip`), then checks every target and the straight moves between them
(sampled: tip, wrist and joints interpolated linearly) for, in this order: **reach** (joint
limits, levelling, platform inside the frame), **interference** (arm centre line and cables
against the frame's obstacle boxes), **tension** (feasible cable tensions with the arm's
weight and offset and the payload while held) and **servo load** (static load within the
rated load).  It estimates each move's time from the platform speed and acceleration, the
winches' top cable speed and the servos' speeds, and reports the first failing step and why.

This is a static check: no dynamics, no cable sag, links as centre lines.  It does not make a
rig safe: keep people clear of suspended loads and follow local codes and licensed practice.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .arm import mount_rotation, static_loads
from .kinematics import cable_lengths, home_lengths, length_per_count, lengths_to_counts
from .limits import MAX_TASK_SAMPLES
from .practice import practice_value
from .statics import TensionResult, tension_limits
from .tables import Column, TableError, read_table, write_table
from .tooltip import arm_world_polyline, design_arm, platform_rotations, solve_platform, tip_tensions
from .workspace import segment_hits_box

__all__ = [
    "CAUTION",
    "TaskTargets",
    "task_columns",
    "read_task",
    "segments_hit_boxes",
    "trapezoid_time",
    "cable_speed_limits",
    "StepResult",
    "TaskReport",
    "check_task",
    "write_plan",
    "latex_equations",
]

CAUTION = ("Static check only (no dynamics, no cable sag, arm links as centre lines). A suspended load can fall: "
           "keep people clear of the platform and its path, use brakes, and follow local codes and licensed practice.")
_OPEN = {"open": False, "opened": False, "closed": True, "close": True}


# --------------------------------------------------------------------------------------
# reading the task
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class TaskTargets:
    """Tool-tip targets in SI.

    labels : (K,) texts; lines : (K,) file line numbers; tips : (K, 3) [m]; roll, tilt : (K,)
    wrist roll and tilt [rad] (None when not given: home); gripper_closed : (K,) bool, the
    state after arriving; joints : {reach joint name: (K,) [rad or m]}; orientation : (K, 3)
    platform roll, pitch, yaw [rad] or None; source : file name.
    """

    labels: tuple[str, ...]
    lines: np.ndarray
    tips: np.ndarray
    roll: np.ndarray | None
    tilt: np.ndarray | None
    gripper_closed: np.ndarray
    joints: dict = field(default_factory=dict)
    orientation: np.ndarray | None = None
    source: str = "<task>"

    def __len__(self) -> int:
        return len(self.tips)


def task_columns(design) -> list[Column]:
    """The columns a task CSV may have for this design."""
    arm = design_arm(design)
    cols = [Column("label", "text", required=False), Column("x", "length"), Column("y", "length"),
            Column("z", "length")]
    if arm.role_index("wrist_roll") is not None:
        cols.append(Column("tool roll", "angle", required=False))
    if arm.role_index("wrist_tilt") is not None:
        cols.append(Column("tool tilt", "angle", required=False))
    cols.append(Column("gripper", "text", required=arm.gripper is not None))
    cols += [Column(j.name, "angle" if j.revolute else "length", required=False)
             for j in arm.joints if j.role == "reach"]
    if design.dof == 6:
        cols += [Column(f"platform {a}", "angle", required=False) for a in ("roll", "pitch", "yaw")]
    return cols


def read_task(design, path_or_text, *, source: str | None = None) -> TaskTargets:
    """Read and check a task CSV. Raises :class:`~cablekit.tables.TableError` naming the line
    and column of every problem found."""
    arm = design_arm(design)
    table = read_table(path_or_text, task_columns(design), source=source)
    src = table.source
    K = len(table)
    cols = table.columns
    labels = tuple(str(v) for v in cols["label"]) if table.has("label") else tuple(f"target {k + 1}" for k in range(K))
    tips = np.column_stack([cols["x"], cols["y"], cols["z"]])
    problems = []
    closed = np.zeros(K, bool)
    if table.has("gripper"):
        for k, v in enumerate(cols["gripper"]):
            key = str(v).strip().lower()
            if key not in _OPEN:
                problems.append(f"{src} line {table.lines[k]}, column 'gripper': {v!r} is not 'open' or 'closed'")
            else:
                closed[k] = _OPEN[key]
        if arm.gripper is None and closed.any():
            problems.append(f"{src}: the arm '{arm.name}' has no gripper ([arm.gripper]) but the task closes one")
    ori = None
    if design.dof == 6 and any(table.has(f"platform {a}") for a in ("roll", "pitch", "yaw")):
        home = np.asarray(design.home_pose[3:], float)
        ori = np.column_stack([cols.get(f"platform {a}", np.full(K, home[i])) for i, a in enumerate(("roll", "pitch", "yaw"))])
    if problems:
        raise TableError("\n".join(problems[:20]))
    return TaskTargets(labels=labels, lines=np.asarray(table.lines), tips=tips,
                       roll=cols.get("tool roll"), tilt=cols.get("tool tilt"), gripper_closed=closed,
                       joints={j.name: cols[j.name] for j in arm.joints if table.has(j.name)}, orientation=ori,
                       source=src)


# --------------------------------------------------------------------------------------
# helpers: interference, speeds, times
# --------------------------------------------------------------------------------------
def segments_hit_boxes(p0, p1, lower, upper, *, clearance: float = 0.0, tol: float = 1e-9) -> np.ndarray:
    """Which segments ``p0 -> p1`` (..., 3) pass through which boxes (B, 3) (..., B) bool.

    Boxes grow by ``clearance`` [m]; a segment that only touches a face (within ``tol``) does
    not count, so a tool set down on a bench top is not a collision.  Uses
    :func:`cablekit.workspace.segment_hits_box`, the slab test shared with the workspace map.
    """
    lo = np.asarray(lower, float) - clearance + tol
    hi = np.asarray(upper, float) + clearance - tol
    p0 = np.asarray(p0, float)[..., None, :]
    p1 = np.asarray(p1, float)[..., None, :]
    return segment_hits_box(p0, p1, lo, hi)


def trapezoid_time(distance, speed: float, acceleration: float = 0.0):
    """Time to travel ``distance`` [m] from rest to rest with top ``speed`` [m/s] and
    ``acceleration`` [m/s**2] (0: instant, constant-speed estimate).

    ``t = d/v + v/a`` when the top speed is reached (``d >= v**2/a``), else ``2 sqrt(d/a)``
    (trapezoidal and triangular velocity profiles; Biagiotti and Melchiorri, *Trajectory
    Planning for Automatic Machines and Robots*, 2008, sec. 3.2).
    """
    d = np.abs(np.asarray(distance, float))
    if speed <= 0:
        return np.zeros_like(d)
    if acceleration <= 0:
        return d / speed
    return np.where(d >= speed**2 / acceleration, d / speed + speed / acceleration, 2.0 * np.sqrt(d / acceleration))


def cable_speed_limits(design) -> np.ndarray:
    """Top cable speed of each winch (m,) [m/s]: the lower of the motor's rated speed through
    gear and drum and the encoder count rate the controller may decode."""
    lpc = length_per_count(design)
    use = practice_value("count_rate_use", design.practice)
    motor = np.array([w.motor_rated_speed / w.gear_ratio * 0.5 * (w.drum_diameter + design.cable.diameter)
                      for w in design.winches])
    counts = np.array([w.count_rate_limit * use for w in design.winches]) * lpc
    return np.minimum(motor, counts)


# --------------------------------------------------------------------------------------
# the check
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class StepResult:
    """One step of the task: arriving at a target or moving between two.

    number : 1-based step number; kind : ``"target"`` or ``"move"``; target : index of the
    target (for a move, the one moved to); title : what the step is; ok : every check passed;
    category : first failing check (reach, interference, tension, servo) or None; reason :
    why; where : for a move, the fraction of the way [0..1] where it first fails; time : the
    estimated duration [s] (gripper time for a target); limited_by : what sets the time;
    min_margin : smallest tension margin over the step's samples [N]; servo_use : highest
    servo load / rating; samples : how many poses were checked.
    """

    number: int
    kind: str
    target: int
    title: str
    ok: bool
    category: str | None
    reason: str | None
    where: float | None
    time: float
    limited_by: str
    min_margin: float
    servo_use: float
    samples: int


@dataclass(frozen=True)
class TaskReport:
    """The outcome of :func:`check_task`.

    Per target (after the gripper action): platform_poses (K, n), joints (K, n_joints),
    lengths (K, m) [m], counts (K, m) encoder counts from home, tensions (K, m) [N], margin
    (K,) [N], servo_use (K, n_joints).  steps : every target and move in order.
    """

    design: object
    targets: TaskTargets
    platform_poses: np.ndarray
    joints: np.ndarray
    lengths: np.ndarray
    counts: np.ndarray
    tensions: np.ndarray
    margin: np.ndarray
    servo_use: np.ndarray
    steps: tuple[StepResult, ...]
    sample_tips: np.ndarray
    sample_platform: np.ndarray
    interference_method: str

    @property
    def ok(self) -> bool:
        return all(s.ok for s in self.steps)

    @property
    def first_failure(self) -> StepResult | None:
        return next((s for s in self.steps if not s.ok), None)

    @property
    def total_time(self) -> float:
        return float(sum(s.time for s in self.steps))

    def summary(self) -> list[str]:
        d, t = self.design, self.targets
        n_moves = sum(s.kind == "move" for s in self.steps)
        lines = [f"task {t.source} on '{d.meta.name}': {len(t)} targets, {n_moves} moves, "
                 f"{sum(s.samples for s in self.steps)} poses checked"]
        lines.append("  step  what                                  check   time [s]  min margin [N]  servo use")
        for s in self.steps:
            status = "ok" if s.ok else "FAIL"
            margin = f"{s.min_margin:14.1f}" if np.isfinite(s.min_margin) else f"{'-':>14}"
            lines.append(f"  {s.number:>4}  {s.title[:36]:<36}  {status:<6} {s.time:8.2f}  {margin}  "
                         f"{100 * s.servo_use:7.0f} %")
        f = self.first_failure
        if f is None:
            lines.append(f"every step passes; estimated time {self.total_time:.1f} s")
        else:
            at = f" at {100 * f.where:.0f} % of the way" if f.where is not None else ""
            lines.append(f"first failing step: {f.number} ({f.title}){at}: {f.reason}")
            others = [s for s in self.steps if not s.ok and s is not f]
            if others:
                lines.append(f"  {len(others)} more failing step{'s' if len(others) != 1 else ''}: "
                             + "; ".join(f"{s.number} ({s.category})" for s in others[:8]))
        lines.append(f"note: {CAUTION}")
        return lines

    def figure(self):
        """Tip targets and moves, the platform's path, and the first failure."""
        import plotly.graph_objects as go

        d = self.design
        tips = self.targets.tips
        fig = go.Figure()
        fig.add_trace(go.Scatter3d(x=tips[:, 0], y=tips[:, 1], z=tips[:, 2], mode="lines+markers+text",
                                   text=list(self.targets.labels), name="tool tip",
                                   marker=dict(size=4, color="#d62728"), line=dict(color="#d62728", dash="dash")))
        P = self.sample_platform
        fig.add_trace(go.Scatter3d(x=P[:, 0], y=P[:, 1], z=P[:, 2], mode="lines", name="platform path",
                                   line=dict(color="#1f77b4", width=3)))
        ex = d.exits
        fig.add_trace(go.Scatter3d(x=ex[:, 0], y=ex[:, 1], z=ex[:, 2], mode="markers+text", name="cable exits",
                                   text=d.cable_names, marker=dict(size=5, color="#333333", symbol="square")))
        for o in d.frame.obstacles:
            e = _box_edges(np.array(o.lower), np.array(o.upper))
            fig.add_trace(go.Scatter3d(x=e[:, 0], y=e[:, 1], z=e[:, 2], mode="lines", name=o.name,
                                       line=dict(color="#8c564b")))
        f = self.first_failure
        if f is not None:
            k = f.target
            if f.kind == "move" and f.where is not None:
                p = tips[k - 1] + f.where * (tips[k] - tips[k - 1])
            else:
                p = tips[k]
            fig.add_trace(go.Scatter3d(x=[p[0]], y=[p[1]], z=[p[2]], mode="markers", name=f"first failure: {f.category}",
                                       marker=dict(size=9, color="#d62728", symbol="x")))
        fig.update_layout(title="Task check", margin=dict(l=0, r=0, t=40, b=0),
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"))
        return fig


def _box_edges(lo, hi) -> np.ndarray:
    """The 12 edges of a box as one polyline with NaN gaps (for a plotly line trace)."""
    c = np.array([[hi[0] if i & 1 else lo[0], hi[1] if i & 2 else lo[1], hi[2] if i & 4 else lo[2]]
                  for i in range(8)])
    pairs = [(a, a | b) for a in range(8) for b in (1, 2, 4) if not a & b]
    return np.concatenate([np.vstack([c[a], c[b], np.full(3, np.nan)]) for a, b in pairs])


@dataclass
class _Samples:
    """Every pose checked, built step by step (lists, then arrays)."""

    tips: list = field(default_factory=list)
    roll: list = field(default_factory=list)
    tilt: list = field(default_factory=list)
    joints: dict = field(default_factory=dict)
    orientation: list = field(default_factory=list)
    holding: list = field(default_factory=list)
    step: list = field(default_factory=list)
    where: list = field(default_factory=list)
    checked: list = field(default_factory=list)

    def add(self, tip, roll, tilt, joints, ori, holding, step, where, checked=True):
        self.tips.append(tip)
        self.roll.append(roll)
        self.tilt.append(tilt)
        for k, v in joints.items():
            self.joints.setdefault(k, []).append(v)
        self.orientation.append(ori)
        self.holding.append(holding)
        self.step.append(step)
        self.where.append(where)
        self.checked.append(checked)


def check_task(design, targets: TaskTargets, *, move_step: float = 0.01, angle_step: float = math.radians(2.0),
               clearance: float = 0.0, method: str = "auto", progress=None) -> TaskReport:
    """Check every target and move of a task (see the module notes for the order of checks).

    Parameters
    ----------
    move_step : largest tip travel between checked poses on a move [m].
    angle_step : largest wrist or joint turn between checked poses [rad].
    clearance : grow every obstacle box by this much [m].
    progress : optional callable(text) told what is being computed.
    """
    arm = design_arm(design)
    if not move_step > 0 or not angle_step > 0:
        raise ValueError("move_step and angle_step must be positive")
    K = len(targets)
    home = arm.home
    ri, ti = arm.role_index("wrist_roll"), arm.role_index("wrist_tilt")
    roll = targets.roll if targets.roll is not None else np.full(K, home[ri] if ri is not None else 0.0)
    tilt = targets.tilt if targets.tilt is not None else np.full(K, home[ti] if ti is not None else 0.0)
    jv = {name: np.asarray(v, float) for name, v in targets.joints.items()}
    ori = targets.orientation
    if ori is None:
        ori = np.tile(np.asarray(design.home_pose[3:], float), (K, 1))
    closed = targets.gripper_closed
    S = _Samples()
    titles, kinds, step_target = [], [], []

    def at(k, s=None, k0=None):
        if s is None:
            return targets.tips[k], roll[k], tilt[k], {n: v[k] for n, v in jv.items()}, ori[k]
        mix = lambda a: a[k0] + s * (a[k] - a[k0])  # noqa: E731
        return mix(targets.tips), mix(roll), mix(tilt), {n: mix(v) for n, v in jv.items()}, mix(ori)

    for k in range(K):
        if k > 0:
            number = len(titles)
            titles.append(f"move {targets.labels[k - 1]!r} -> {targets.labels[k]!r}")
            kinds.append("move")
            step_target.append(k)
            spans = [np.linalg.norm(targets.tips[k] - targets.tips[k - 1]) / move_step,
                     abs(roll[k] - roll[k - 1]) / angle_step, abs(tilt[k] - tilt[k - 1]) / angle_step,
                     *(np.abs(ori[k] - ori[k - 1]) / angle_step)]
            for name, v in jv.items():
                per = angle_step if arm.joints[arm.names.index(name)].revolute else move_step
                spans.append(abs(v[k] - v[k - 1]) / per)
            need = max(spans)
            if not need <= MAX_TASK_SAMPLES - len(S.tips):
                raise ValueError(f"the move {targets.labels[k - 1]!r} -> {targets.labels[k]!r} needs {need:.3g} checked "
                                 f"poses at this step ({move_step * 1e3:g} mm, {math.degrees(angle_step):g} deg); a task "
                                 f"may check at most {MAX_TASK_SAMPLES:,} poses (cablekit.limits.MAX_TASK_SAMPLES): "
                                 "use a coarser --step or --angle-step")
            count = max(2, int(math.ceil(need)))
            for i in range(count + 1):
                s = i / count
                S.add(*at(k, s, k - 1), holding=bool(closed[k - 1]), step=number, where=s,
                      checked=0 < i < count)
        number = len(titles)
        titles.append(f"target {targets.labels[k]!r}")
        kinds.append("target")
        step_target.append(k)
        arriving = bool(closed[k - 1]) if k > 0 else bool(closed[k])
        S.add(*at(k), holding=arriving, step=number, where=None)
        if arriving != bool(closed[k]):
            S.add(*at(k), holding=bool(closed[k]), step=number, where=None)
    step_of = np.array(S.step)
    checked = np.array(S.checked)
    holding = np.array(S.holding)
    tips = np.array(S.tips)
    N = len(tips)
    if progress:
        progress(f"solving {N} platform poses")
    piv = solve_platform(design, tips, roll=np.array(S.roll) if ri is not None else None,
                         tilt=np.array(S.tilt) if ti is not None else None,
                         joints={n: np.array(v) for n, v in S.joints.items()},
                         orientation=np.array(S.orientation) if design.dof == 6 else None)
    poses, q = piv.platform_poses, piv.joints
    # interference: arm centre line and cables against the obstacle boxes
    hits_text = [None] * N
    obstacles = design.frame.obstacles
    if obstacles:
        lo = np.array([o.lower for o in obstacles])
        hi = np.array([o.upper for o in obstacles])
        line = arm_world_polyline(design, poses, q)
        seg_names = ["arm mount"] + [f"arm link {j.name}" for j in arm.joints] + ["tool"]
        arm_hit = segments_hit_boxes(line[:, :-1], line[:, 1:], lo, hi, clearance=clearance)  # (N, s, B)
        Rp = platform_rotations(design, poses)
        att = poses[:, None, :3] + np.einsum("nij,mj->nmi", Rp, design.attachments)
        cable_hit = segments_hit_boxes(att, np.broadcast_to(design.exits, att.shape), lo, hi, clearance=clearance)
        for n in np.flatnonzero(arm_hit.any(axis=(1, 2)) | cable_hit.any(axis=(1, 2))):
            if arm_hit[n].any():
                s_, b_ = np.argwhere(arm_hit[n])[0]
                hits_text[n] = f"interference: {seg_names[s_]} passes through {obstacles[b_].name}"
            else:
                c_, b_ = np.argwhere(cable_hit[n])[0]
                hits_text[n] = f"interference: cable {design.cable_names[c_]} passes through {obstacles[b_].name}"
    if progress:
        progress(f"tensions at {N} poses")
    ten = tip_tensions(design, poses, q, holding=holding, method=method)
    lim = tension_limits(design)
    Rb = platform_rotations(design, poses) @ mount_rotation(arm)
    g_base = np.einsum("nji,j->ni", Rb, design.gravity)
    loads = static_loads(arm, q, gravity=g_base, payload=np.where(holding, arm.payload, 0.0))
    use = np.abs(loads) / arm.rated
    # first reason per sample, in check order
    reasons: list[tuple[str, str] | None] = []
    for n in range(N):
        r = piv.reason(n)
        if r is not None:
            reasons.append(("reach", r))
        elif hits_text[n] is not None:
            reasons.append(("interference", hits_text[n]))
        elif not ten.feasible[n]:
            reasons.append(("tension", _tension_reason(ten, n, lim, design.cable_names)))
        elif use[n].max() > 1.0:
            b = int(np.argmax(use[n]))
            j = arm.joints[b]
            reasons.append(("servo", f"servo overload: joint {j.name} needs {abs(loads[n, b]):.3g} {j.load_unit} "
                                     f"static, rated {j.rated:.3g} {j.load_unit} "
                                     f"({'payload held' if holding[n] else 'gripper empty'})"))
        else:
            reasons.append(None)
    # times
    L = cable_lengths(design, poses)
    v_cable = cable_speed_limits(design)
    steps = []
    for number, (title, kind, k) in enumerate(zip(titles, kinds, step_target)):
        idx = np.flatnonzero(step_of == number)
        chk = idx[checked[idx]]
        if kind == "move":
            time, limited = _move_time(design, arm, poses[idx], q[idx], L[idx], v_cable)
        else:
            actuates = len(idx) > 1  # a second sample: the gripper opens or closes here
            time = arm.gripper.time if (actuates and arm.gripper is not None) else 0.0
            limited = "gripper" if time > 0 else ""
        bad = [n for n in chk if reasons[n] is not None]
        first = bad[0] if bad else None
        margins = ten.margin[chk] if len(chk) else np.array([np.nan])
        steps.append(StepResult(number=number + 1, kind=kind, target=int(k), title=title, ok=first is None,
                                category=None if first is None else reasons[first][0],
                                reason=None if first is None else reasons[first][1],
                                where=None if (first is None or kind == "target") else float(S.where[first]),
                                time=float(time), limited_by=limited,
                                min_margin=float(np.nanmin(margins)) if np.any(np.isfinite(margins)) else float("nan"),
                                servo_use=float(use[chk].max()) if len(chk) else 0.0, samples=int(len(chk))))
    # per target: the last sample of its step (after the gripper action)
    last = np.array([np.flatnonzero(step_of == number)[-1] for number, kind in enumerate(kinds) if kind == "target"])
    counts = np.rint(lengths_to_counts(design, L[last], home=home_lengths(design))).astype(np.int64)
    return TaskReport(design=design, targets=targets, platform_poses=poses[last], joints=q[last], lengths=L[last],
                      counts=counts, tensions=ten.tensions[last], margin=ten.margin[last], servo_use=use[last],
                      steps=tuple(steps), sample_tips=tips, sample_platform=poses[:, :3],
                      interference_method="segment vs box (cablekit.workspace)")


def _tension_reason(res: TensionResult, n: int, lim, names) -> str:
    t = res.tensions[n]
    if not np.all(np.isfinite(t)):
        return (f"tension: no cable tensions between {lim.t_min.min():.1f} and {lim.t_max.min():.1f} N balance "
                "the load here (outside the wrench-feasible workspace)")
    i = int(res.limiting_cable[n])
    if t[i] < lim.t_min[i]:
        return f"slack cable: {names[i]} at {t[i]:.1f} N, below the {lim.t_min[i]:.1f} N that counts as taut"
    return f"over tension: cable {names[i]} at {t[i]:.1f} N, above its {lim.limited_by[i]} limit {lim.t_max[i]:.1f} N"


def _move_time(design, arm, poses, q, L, v_cable) -> tuple[float, str]:
    """Estimated duration of one move from its samples (endpoints included)."""
    cands = []
    path = float(np.sum(np.linalg.norm(np.diff(poses[:, :3], axis=0), axis=1)))
    if design.task.speed > 0:
        cands.append((float(trapezoid_time(path, design.task.speed, design.task.acceleration)), "platform speed"))
    travel = np.sum(np.abs(np.diff(L, axis=0)), axis=0)
    tc = travel / v_cable
    i = int(np.argmax(tc))
    cands.append((float(tc[i]), f"winch {design.cable_names[i]}"))
    tj = np.sum(np.abs(np.diff(q, axis=0)), axis=0) / arm.speeds
    j = int(np.argmax(tj))
    cands.append((float(tj[j]), f"servo {arm.joints[j].name}"))
    return max(cands)


# --------------------------------------------------------------------------------------
# the plan file
# --------------------------------------------------------------------------------------
def write_plan(report: TaskReport, path):
    """Write the plan CSV (one row per target, atomically): tip, platform pose, joints, cable
    lengths and encoder counts, tensions, the move into the target and both checks."""
    d = report.design
    arm = design_arm(d)
    t = report.targets
    names = d.cable_names
    header = ["step", "label", "gripper", "x [m]", "y [m]", "z [m]", "platform x [m]", "platform y [m]",
              "platform z [m]"]
    if d.dof == 6:
        header += ["platform roll [deg]", "platform pitch [deg]", "platform yaw [deg]"]
    header += [f"{j.name} [{'deg' if j.revolute else 'm'}]" for j in arm.joints]
    header += [f"length {n} [m]" for n in names] + [f"counts {n}" for n in names]
    header += [f"tension {n} [N]" for n in names]
    header += ["margin [N]", "servo use [%]", "move time [s]", "move limited by", "move check", "target check"]
    moves = {s.target: s for s in report.steps if s.kind == "move"}
    tsteps = {s.target: s for s in report.steps if s.kind == "target"}
    rows = []
    for k in range(len(t)):
        p = report.platform_poses[k]
        row = [k + 1, t.labels[k], "closed" if t.gripper_closed[k] else "open", *map(float, t.tips[k]),
               *map(float, p[:3])]
        if d.dof == 6:
            row += [float(np.degrees(v)) for v in p[3:]]
        row += [float(np.degrees(v)) if j.revolute else float(v) for j, v in zip(arm.joints, report.joints[k])]
        row += [float(v) for v in report.lengths[k]] + [int(c) for c in report.counts[k]]
        row += [float(v) for v in report.tensions[k]]
        mv = moves.get(k)
        row += [float(report.margin[k]), float(100 * report.servo_use[k].max()),
                float(mv.time) if mv else 0.0, mv.limited_by if mv else "",
                ("ok" if mv.ok else mv.reason) if mv else "", "ok" if tsteps[k].ok else tsteps[k].reason]
        rows.append(row)
    f = report.first_failure
    comment = (f"cablekit task plan: {d.meta.name}\n"
               + ("every step passes" if f is None else f"FIRST FAILING STEP {f.number} ({f.title}): {f.reason}")
               + f"\n{CAUTION}")
    return write_table(path, header, rows, comment=comment)


def latex_equations(kind: str) -> dict[str, str]:
    """LaTeX of the task check's move-time and encoder equations."""
    return {
        "move time (trapezoidal profile)": r"t = \frac{s}{v} + \frac{v}{a}\ \ (s \ge v^2/a),\qquad "
                                           r"t = 2\sqrt{s/a}\ \ \text{otherwise}",
        "top cable speed": r"v_{cable} = \min\left(\frac{\omega_{rated}}{i}\,\frac{D + d}{2},\ "
                           r"u\,f_{count}\,\Delta L_{count}\right)",
        "encoder counts": r"n_i = \operatorname{round}\left(\frac{L_i - L_{i,home}}{\Delta L_{count}}\right)",
    }
