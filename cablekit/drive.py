"""Drivetrain sizing per winch: drum, gears, encoder, motor, brake, and the rope checks.

For every winch this module works out, from the design and the highest tension its cable
sees over the task region:

* cable length per encoder count on the first layer's pitch diameter (drum + one rope
  diameter), the dead band and the effective motion step (the band's width, ``2k + 1``
  counts for a +/- k-count band) in millimetres;
* top cable speed -> drum and motor speed, and the encoder count rate against the
  controller's counting limit;
* motor torque ``F r / (i eta)`` at the highest tension (static, against the rated torque)
  and with the task's acceleration (against the peak torque); power; the brake's rated
  holding torque against the brake factor times the highest static load torque (no brake on
  a suspended load fails, unless the drive is declared self-locking: a warning);
* drum capacity: wraps per layer, layers, turns, stored rope, dead wraps, flange freeboard;
* fleet angle from the drum width and the distance to the exit pulley; D/d of drum and pulley
  by rope construction; the rope design factor (higher for a load over people);

and returns one :class:`cablekit.checks.Check` per item with its limit and source.

The highest tension is taken at the **winch end** of the cable: the tension at the platform
plus the weight of the cable's rise, ``T + w h`` (:func:`cablekit.cables.exit_side_tension`).
The platform-end tensions come from :func:`sizing_tensions`: the minimum-norm distribution
with every cable at least ``t_min`` and **no upper limit**, so a rope or motor too weak for
the task region shows as a failure instead of being hidden by tensions already clipped to
its own limit.

Sizing aid only: suspended loads and the energy stored in a loaded winch can kill.  Confirm
every rating with the component makers' data and local codes, and have a competent person
review the rig.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from .checks import FAIL, PASS, WARN, Check, judge, worst_status
from .practice import PRACTICE, practice_value

__all__ = [
    "CAUTION",
    "pitch_diameter",
    "motor_torque",
    "deadband_length",
    "count_rate",
    "fleet_angle",
    "DrumFill",
    "drum_fill",
    "SizingTensions",
    "sizing_tensions",
    "cable_step",
    "DriveRow",
    "DriveResult",
    "size_drives",
    "design_checks",
]

CAUTION = ("Sizing aid only. Suspended loads and loaded winches store energy that can kill: confirm every "
           "rating with the component makers' data and your local codes, and have a competent person review "
           "the rig before anyone stands under it.")

LAYER_RISE = 2.0  # each layer adds this many rope diameters to the pitch diameter (conservative; nested ~1.73)


# --------------------------------------------------------------------------------------
# small formulas (validated inputs, SI)
# --------------------------------------------------------------------------------------
def _check_positive(name, value, unit):
    arr = np.asarray(value, float)
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0):
        raise ValueError(f"{name} must be a finite number > 0 [{unit}], got {value!r}")
    return arr


def pitch_diameter(drum_diameter, rope_diameter, *, layer: int = 1):
    """Pitch (rope centreline) diameter of a layer [m]: ``D + d + 2 (layer - 1) d``.

    Parameters
    ----------
    drum_diameter : bare drum (barrel) diameter D [m], > 0.
    rope_diameter : rope diameter d [m], > 0.
    layer : 1 for the first layer on the barrel.

    Notes
    -----
    The rope centreline sits half a rope diameter above the surface it lies on (Shigley's
    Mechanical Engineering Design, 10th ed., 2015, sec. 17-6).  Upper layers are taken to add
    ``2 d`` each (rope on rope without nesting; conservative for torque and freeboard).
    """
    D = _check_positive("drum_diameter", drum_diameter, "m")
    d = _check_positive("rope_diameter", rope_diameter, "m")
    if int(layer) != layer or layer < 1:
        raise ValueError(f"layer must be a whole number >= 1, got {layer!r}")
    out = D + d + LAYER_RISE * (layer - 1) * d
    return float(out) if np.ndim(out) == 0 else out


def motor_torque(force, pitch_radius, gear_ratio, efficiency):
    """Motor torque to pull a cable force through drum and gears [N*m]: ``F r / (i eta)``.

    Parameters
    ----------
    force : cable tension at the drum F [N].
    pitch_radius : rope centreline radius on the drum r [m], > 0.
    gear_ratio : motor turns per drum turn i [-], > 0.
    efficiency : gear-train efficiency eta in (0, 1].

    Notes
    -----
    Power balance of a lossy reduction driven by the motor: ``tau_m omega_m eta = F v`` with
    ``v = r omega_d`` and ``omega_m = i omega_d`` (Shigley's Mechanical Engineering Design,
    10th ed., 2015, ch. 13 on gear trains).
    """
    r = _check_positive("pitch_radius", pitch_radius, "m")
    i = _check_positive("gear_ratio", gear_ratio, "-")
    eta = np.asarray(efficiency, float)
    if not np.all(np.isfinite(eta)) or np.any(eta <= 0) or np.any(eta > 1):
        raise ValueError(f"efficiency must lie in (0, 1], got {efficiency!r}")
    out = np.asarray(force, float) * r / (i * eta)
    return float(out) if out.ndim == 0 else out


def deadband_length(counts, length_per_count):
    """Cable length the controller ignores [m]: ``deadband counts * length per count``."""
    c = np.asarray(counts, float)
    if not np.all(np.isfinite(c)) or np.any(c < 0):
        raise ValueError(f"deadband counts must be a finite number >= 0, got {counts!r}")
    out = c * _check_positive("length_per_count", length_per_count, "m")
    return float(out) if np.ndim(out) == 0 else out


def count_rate(cable_speed, length_per_count):
    """Encoder count rate at a cable speed [counts/s]: ``v / (length per count)``."""
    v = np.asarray(cable_speed, float)
    if not np.all(np.isfinite(v)) or np.any(v < 0):
        raise ValueError(f"cable_speed must be a finite number >= 0 [m/s], got {cable_speed!r}")
    out = v / _check_positive("length_per_count", length_per_count, "m")
    return float(out) if np.ndim(out) == 0 else out


def fleet_angle(drum_width, drum_distance):
    """Fleet angle [rad]: ``atan((drum width / 2) / distance from drum to the exit pulley)``.

    The exit (lead) pulley is taken to be in line with the middle of the drum, so the rope
    swings half the drum width to either side.
    """
    w = _check_positive("drum_width", drum_width, "m")
    L = _check_positive("drum_distance", drum_distance, "m")
    out = np.arctan2(0.5 * w, L)
    return float(out) if np.ndim(out) == 0 else out


@dataclass(frozen=True)
class DrumFill:
    """How a drum holds its rope.

    wraps_per_layer; layers needed; turns on the drum when it holds the most rope; capacity
    [m] of the layers the flange allows (one layer when no flange is given); layers_allowed;
    top_pitch_diameter [m] of the highest layer used; freeboard: flange height above the top
    layer in rope diameters (NaN without a flange diameter).
    """

    wraps_per_layer: int
    layers: int
    turns: float
    capacity: float
    layers_allowed: int
    top_pitch_diameter: float
    freeboard: float


def drum_fill(stored_length, drum_diameter, drum_width, rope_diameter, *, flange_diameter: float = 0.0,
              grooved: bool = False, groove_pitch: float = 1.09, freeboard_min: float = 2.0) -> DrumFill:
    """Layers, turns and capacity of a drum holding ``stored_length`` of rope.

    Parameters
    ----------
    stored_length : rope on the drum at its fullest [m] (travel + dead wraps).
    drum_diameter, drum_width, rope_diameter : [m].
    flange_diameter : [m]; 0 when not given (then one layer is allowed).
    grooved : wraps sit ``groove_pitch * d`` apart, else ``d`` apart (smooth drum).
    freeboard_min : flange height above the top layer [rope diameters] the capacity keeps.

    Notes
    -----
    Layer ``k`` (from 1) holds ``n * pi * (D + d + 2 (k - 1) d)`` of rope, ``n`` wraps per layer.
    """
    D = _check_positive("drum_diameter", drum_diameter, "m")
    d = _check_positive("rope_diameter", rope_diameter, "m")
    W = _check_positive("drum_width", drum_width, "m")
    if not math.isfinite(stored_length) or stored_length < 0:
        raise ValueError(f"stored_length must be a finite length >= 0 [m], got {stored_length!r}")
    pitch = d * (groove_pitch if grooved else 1.0)
    n = int(math.floor(W / pitch + 1e-9))
    if n < 1:
        raise ValueError(f"drum_width {W * 1e3:g} mm does not fit one wrap of {d * 1e3:g} mm rope")
    per_layer = [n * math.pi * (D + d + LAYER_RISE * k * d) for k in range(1000)]
    if flange_diameter and flange_diameter > 0:
        allowed = int(math.floor((flange_diameter - D - 2.0 * freeboard_min * d) / (LAYER_RISE * d) + 1e-9))
        allowed = max(allowed, 0)
    else:
        allowed = 1
    capacity = float(sum(per_layer[:allowed]))
    left, layers, turns = float(stored_length), 0, 0.0
    while left > 1e-12 and layers < len(per_layer):
        take = min(left, per_layer[layers])
        turns += take / (math.pi * (D + d + LAYER_RISE * layers * d))
        left -= take
        layers += 1
    layers = max(layers, 1)
    top = float(D + d + LAYER_RISE * (layers - 1) * d)
    fb = float((flange_diameter - (D + 2.0 * layers * d)) / (2.0 * d)) if flange_diameter else float("nan")
    return DrumFill(wraps_per_layer=n, layers=layers, turns=turns, capacity=capacity, layers_allowed=allowed,
                    top_pitch_diameter=top, freeboard=fb)


# --------------------------------------------------------------------------------------
# the tensions a winch must hold (not bounded above by its own limit)
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SizingTensions:
    """Platform-end tensions to size ropes, motors and brakes with.

    poses (N, n); tensions (N, m) [N]: per cable the highest over the corners of the task's
    wrench box (the nominal load when there is none), NaN where ``held`` is False; held (N,):
    some tensions of at least ``t_min`` balance every corner; corners: wrench-box corners
    taken per pose; method: text for the sheet.
    """

    poses: np.ndarray
    tensions: np.ndarray
    held: np.ndarray
    corners: int
    method: str


def _min_norm_lower(W, B, t_min, tol=1e-9):
    """Minimum-norm ``t`` with ``W t = B`` and ``t >= t_min``, batched.

    W (N, n, m); B (N, V, n) right-hand sides (V per pose); t_min (m,).  Returns t (N, V, m),
    NaN where no such t exists (or W has not full rank).

    With ``t = t_p + N lam`` (``t_p = W^+ B`` orthogonal to the null space ``N`` of W),
    ``|t|^2 = |t_p|^2 + |lam|^2``: a least-distance problem ``min |lam|`` subject to
    ``N lam >= t_min - t_p``.  Its optimum is the minimum-norm point of the affine set of at
    most ``r = m - n`` linearly independent active constraints (the KKT conditions and
    Caratheodory's theorem), so trying every subset of at most r cables as the active set and
    keeping the feasible candidate of least norm is exact.
    """
    from itertools import combinations

    N, n, m = W.shape
    r = m - n
    U, S, Vt = np.linalg.svd(W)
    full = S[:, -1] > 1e-10 * np.maximum(S[:, 0], 1e-300)
    Sinv = np.where(full[:, None], 1.0 / np.where(S > 0, S, 1.0), 0.0)
    V_row = np.swapaxes(Vt[:, :n, :], 1, 2)  # (N, m, n): the row space
    Nul = np.swapaxes(Vt[:, n:, :], 1, 2)  # (N, m, r)
    tp = np.einsum("nij,nvj->nvi", V_row, Sinv[:, None, :] * np.einsum("nji,nvj->nvi", U, B))
    h = t_min[None, None, :] - tp
    best = np.full(tp.shape, np.nan)
    best_cost = np.full(tp.shape[:2], np.inf)
    scale = np.maximum(1.0, np.max(np.abs(tp), axis=2, initial=0.0) + np.max(np.abs(t_min), initial=0.0))
    for k in range(0, r + 1):
        for sub in combinations(range(m), k):
            if k == 0:
                lam = np.zeros(tp.shape[:2] + (r,))
            else:
                P = np.linalg.pinv(Nul[:, list(sub), :])  # (N, r, k)
                lam = np.einsum("nrk,nvk->nvr", P, h[:, :, list(sub)])
            t = tp + np.einsum("nir,nvr->nvi", Nul, lam)
            ok = np.all(t >= t_min[None, None, :] - tol * scale[..., None], axis=2)
            cost = np.sum(lam * lam, axis=2)
            take = ok & (cost < best_cost)
            best = np.where(take[..., None], t, best)
            best_cost = np.where(take, cost, best_cost)
    best[~full] = np.nan
    return best


def sizing_tensions(design, poses, *, chunk: int = 512, progress=None) -> SizingTensions:
    """Tensions to size each winch with: minimum-norm, at least ``t_min``, no upper limit.

    Parameters
    ----------
    design : Design
    poses : (N, n) array [m, rad]
    chunk : poses per batch.
    progress : callable, optional
        ``progress(done, total)`` after each batch.

    Returns
    -------
    SizingTensions

    Notes
    -----
    Per pose and per corner of the task's wrench box (the nominal gravity load when no box is
    given) the tensions minimise ``|t|^2`` subject to ``W t + w = 0`` and ``t >= t_min``; the
    upper limit ``t_max`` (rope and motor rating) is deliberately **not** imposed, so the
    highest tension over the task region can exceed a rating and fail its check.  A rig with
    as many cables as degrees of freedom has one solution, which this returns.  A controller
    that pre-tensions above the minimum-norm tensions draws more: size for what it commands.

    References
    ----------
    .. [1] A. Pott, *Cable-Driven Parallel Robots: Theory and Application*, Springer, 2018,
       ch. 3 (force distribution; minimal-norm tensions).
    .. [2] C. L. Lawson and R. J. Hanson, *Solving Least Squares Problems*, Prentice-Hall,
       1974, ch. 23 (least-distance programming).
    """
    from .kinematics import as_poses, structure_matrix
    from .statics import external_wrench
    from .tension import box_generators, box_vertices

    q = as_poses(design, poses)
    n, m = design.dof, design.m
    t_min = np.full(m, float(design.cable.min_tension))
    box = np.asarray(design.task.wrench_box[:n], float)
    boxed = len(box_generators(box, n)) > 0
    corners = box_vertices(np.zeros(n), box)[0] if boxed else np.zeros((1, n))  # (V, n); nominal load only
    T = np.full((len(q), m), np.nan)
    held = np.zeros(len(q), bool)
    for s in range(0, len(q), chunk):
        e = min(len(q), s + chunk)
        W = structure_matrix(design, q[s:e])
        B = -(external_wrench(design, q[s:e])[:, None, :] + corners[None, :, :])
        t = _min_norm_lower(W, B, t_min)
        ok = np.all(np.isfinite(t), axis=(1, 2))
        held[s:e] = ok
        T[s:e][ok] = np.max(t[ok], axis=1)
        if progress is not None:
            progress(e, len(q))
    method = ("the minimum-norm tension distribution (every cable at least t_min, no upper limit)"
              + (f" at the {len(corners)} corners of the task's wrench box" if boxed else ""))
    return SizingTensions(poses=q, tensions=T, held=held, corners=len(corners), method=method)


def cable_step(design) -> np.ndarray:
    """Effective motion step of each cable [m], shape (m,): the dead band's width in counts
    (:attr:`cablekit.design.Winch.step_counts`, at least one count) times the cable length
    per count on the first layer."""
    from .kinematics import length_per_count

    return np.array([w.step_counts for w in design.winches], float) * length_per_count(design)


# --------------------------------------------------------------------------------------
# sizing over the task region
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class DriveRow:
    """Sizing of one winch (SI units; angles in rad, speeds in rad/s and m/s).

    name : cable name; pitch_diameter : first layer [m]; length_per_count [m]; deadband : the
    +/- cable length the controller ignores [m]; motion_step : effective motion step of the
    cable, the dead band's width (at least one count) [m]; cable_speed [m/s]; drum_speed,
    motor_speed [rad/s]; count_rate, count_rate_limit [Hz];
    max_tension : highest tension at the winch end over the usable poses [N] (from
    :func:`sizing_tensions` unless tensions were given);
    max_tension_pose : the pose where it occurs; torque : static motor torque at it [N*m];
    peak_torque : with the task acceleration [N*m]; power : at top speed [W];
    brake_torque : holding torque a brake must give at the motor shaft [N*m];
    travel : longest minus shortest cable length [m]; stored_length : rope on the drum at its
    fullest [m]; fill : DrumFill; fleet_angle [rad] (NaN without drum_distance); drum_ratio,
    pulley_ratio : D/d (pulley NaN for an eyelet); checks : this winch's checks;
    status : worst status; limiting : the check closest to (or furthest past) its limit.
    """

    name: str
    pitch_diameter: float
    length_per_count: float
    deadband: float
    motion_step: float
    cable_speed: float
    drum_speed: float
    motor_speed: float
    count_rate: float
    count_rate_limit: float
    max_tension: float
    max_tension_pose: np.ndarray
    torque: float
    peak_torque: float
    power: float
    brake_torque: float
    travel: float
    stored_length: float
    fill: DrumFill
    fleet_angle: float
    drum_ratio: float
    pulley_ratio: float
    checks: tuple[Check, ...] = field(default_factory=tuple)
    status: str = PASS
    limiting: Check | None = None


_LOWER_BOUND = {"rope_design_factor", "drum_d_ratio", "pulley_d_ratio", "flange_freeboard", "brake"}  # value >= limit


def _use(c: Check) -> float:
    """How much of its limit a check uses (1 = at the limit; > 1 past it; 0 when not measurable)."""
    if not math.isfinite(c.value) or not math.isfinite(c.limit):
        return math.inf if c.status == FAIL else 0.0
    if c.key in _LOWER_BOUND:
        return c.limit / c.value if c.value > 0 else math.inf
    return c.value / c.limit if c.limit > 0 else math.inf


def numbers_text(c: Check) -> str:
    """``": 25 (limit 28)"`` with the unit spelled for reading; empty when there is nothing to compare."""
    if not (math.isfinite(c.value) and math.isfinite(c.limit)):
        return ""
    unit = {"-": "", "d": " rope diameters"}.get(c.unit, f" {c.unit}")
    return f": {c.value:.4g}{unit} (limit {c.limit:.4g}{unit})"


@dataclass(frozen=True)
class DriveResult:
    """Per-winch drivetrain sizing and checks.

    rows : one DriveRow per cable; checks : every check, winch by winch; tension_source :
    where the tensions came from; poses_used / poses_total : poses with every cable taut that
    the highest tensions were taken from (not filtered by the tension limits); poses_over_rating :
    of those, the poses where some cable's sizing tension exceeds its rope or motor limit
    (:func:`cablekit.statics.tension_limits`); design_name.
    """

    design_name: str
    rows: tuple[DriveRow, ...]
    checks: tuple[Check, ...]
    tension_source: str
    poses_used: int
    poses_total: int
    poses_over_rating: int = 0

    @property
    def status(self) -> str:
        return worst_status(self.checks)

    def summary(self) -> list[str]:
        """The per-winch table, the checks that are not a plain pass, and the caution."""
        lines = [f"drive sizing: {self.design_name}",
                 f"  highest tensions from {self.tension_source}",
                 f"  {self.poses_used} of {self.poses_total} task poses can hold every cable taut and were used "
                 "(whether or not the ratings allow the tensions there: that is what the checks judge)"]
        if self.poses_over_rating:
            lines.append(f"  at {self.poses_over_rating} of them some cable needs more than its rope or motor limit "
                         "(the workspace map shows where)")
        head = (f"  {'winch':<8}{'F max':>8}{'torque':>8}{'rated':>7}{'peak':>7}{'motor':>7}{'counts':>8}"
                f"{'per cnt':>8}{'step':>7}{'fleet':>6}{'D/d':>5}{'layers':>7}  {'status':<6} limiting item")
        unit = (f"  {'':<8}{'[N]':>8}{'[N*m]':>8}{'[%]':>7}{'[%]':>7}{'[rpm]':>7}{'[kHz]':>8}"
                f"{'[um]':>8}{'[mm]':>7}{'[deg]':>6}{'[-]':>5}{'':>7}")
        lines += [head, unit]
        for r in self.rows:
            w_rated = next((c for c in r.checks if c.key == "motor_torque_rated"), None)
            w_peak = next((c for c in r.checks if c.key == "motor_torque_peak"), None)
            rated = 100 * r.torque / w_rated.limit if w_rated and w_rated.limit > 0 else float("nan")
            peak = 100 * r.peak_torque / w_peak.limit if w_peak and w_peak.limit > 0 else float("nan")
            lim = r.limiting
            lim_text = f"{lim.title} ({lim.status})" if lim is not None else "-"
            lines.append(f"  {r.name[:8]:<8}{r.max_tension:8.1f}{r.torque:8.3f}{rated:7.0f}{peak:7.0f}"
                         f"{r.motor_speed * 60 / (2 * math.pi):7.0f}{r.count_rate / 1e3:8.1f}"
                         f"{r.length_per_count * 1e6:8.1f}{r.motion_step * 1e3:7.2f}{math.degrees(r.fleet_angle):6.2f}"
                         f"{r.drum_ratio:5.0f}{r.fill.layers:7d}  {r.status:<6} {lim_text}")
        notable = [c for c in self.checks if c.status != PASS]
        if notable:
            lines.append("  checks not passed:")
            for c in notable:
                lines.append(f"    {c.status.upper():<4} {c.subject}: {c.title}{numbers_text(c)} - {c.detail}")
        counts = {s: sum(c.status == s for c in self.checks) for s in (PASS, WARN, FAIL)}
        lines.append(f"  {len(self.checks)} checks: {counts[PASS]} pass, {counts[WARN]} warn, {counts[FAIL]} fail")
        lines.append(f"  {CAUTION}")
        return lines

    def figure(self):
        """Grouped bars: share of each limit used, per check and winch (100 % = at the limit)."""
        import plotly.graph_objects as go

        keys = []
        for c in self.checks:
            if c.key not in keys and math.isfinite(c.value) and math.isfinite(c.limit):
                keys.append(c.key)
        titles = {c.key: c.title for c in self.checks}
        fig = go.Figure()
        for r in self.rows:
            by_key = {c.key: c for c in r.checks}
            ys = [100 * _use(by_key[k]) if k in by_key and math.isfinite(_use(by_key[k])) else None for k in keys]
            fig.add_trace(go.Bar(name=r.name, x=[titles[k] for k in keys], y=ys,
                                 hovertemplate="%{x}: %{y:.0f} % of the limit<extra>" + r.name + "</extra>"))
        fig.add_hline(y=100, line_dash="dash", line_color="#c0392b", annotation_text="limit")
        fig.update_layout(barmode="group", title="Drivetrain: share of each limit used (per winch)",
                          yaxis_title="share of limit [%]", margin=dict(l=50, r=10, t=50, b=120))
        return fig


def _task_tensions(design, *, workspace=None, tensions=None, poses=None, step=None, progress=None):
    """Poses, platform-end tensions (N, m) and a description of their source.

    Without ``tensions``, the tensions are :func:`sizing_tensions` at the workspace map's
    poses (every pose of the task grid, feasible or not) or at the task grid."""
    from .region import task_poses

    if tensions is not None:
        t = np.asarray(tensions, float)
        q = task_poses(design, step=step).poses if poses is None else np.asarray(poses, float)
        if t.shape != (len(q), design.m):
            raise ValueError(f"tensions must have shape ({len(q)}, {design.m}) to match the poses, got {t.shape}")
        return q, t, "the tensions given"
    if poses is not None:
        q = np.asarray(poses, float)
    elif workspace is not None:
        q = np.asarray(workspace.poses, float)
    else:
        q = task_poses(design, step=step).poses
    st = sizing_tensions(design, q, progress=progress)
    return q, st.tensions, st.method


def size_drives(design, *, workspace=None, tensions=None, poses=None, step: float | None = None,
                progress=None) -> DriveResult:
    """Size every winch's drivetrain and check it against good practice.

    Parameters
    ----------
    design : Design
    workspace : WorkspaceResult, optional
        A computed workspace map: its poses (all of them, feasible or not) are used.
    tensions, poses : arrays, optional
        Precomputed platform-end tensions (N, m) [N] at poses (N, n) (default poses: the task
        grid).  Without ``tensions`` they are :func:`sizing_tensions` (minimum-norm, no upper
        limit), so a rope or motor too weak for the task region fails its check.
    step : float, optional
        Task-grid step [m] when the poses are the task grid.
    progress : callable, optional
        ``progress(done, total)`` while the tensions are computed.

    Returns
    -------
    DriveResult
    """
    from .cables import exit_side_tension, smallest_rope
    from .kinematics import cable_vectors, home_lengths, length_per_count
    from .statics import rope_design_factor, tension_limits

    q, t, source = _task_tensions(design, workspace=workspace, tensions=tensions, poses=poses, step=step,
                                  progress=progress)
    pv = design.practice
    d = design.cable.diameter
    w_len = design.cable.mass_per_length * design.frame.g
    lv = cable_vectors(design, q)
    L = np.linalg.norm(lv, axis=-1)
    up = -np.asarray(design.frame.gravity_direction, float)
    t_exit = exit_side_tension(t, lv @ up, w_len)
    # poses where some tensions hold the platform with every cable taut (per-cable t_min where the
    # design states one); NOT filtered by t_max, so a rope or motor too weak for the region fails
    limits = tension_limits(design)
    taut = np.all(np.isfinite(t) & (t >= limits.t_min * (1.0 - 1e-9)), axis=1)
    lpc = length_per_count(design)
    steps = cable_step(design)
    L_home = home_lengths(design)
    v = design.task.speed
    acc = design.task.acceleration
    g = design.frame.g
    suspended = g > 0 and design.total_mass > 0
    over_people = design.cable.use_class == "over_people"
    fb_len = _freeboard_min(design)
    rows, all_checks = [], []
    for i, (e, wn) in enumerate(zip(design.frame.exits, design.winches)):
        subject = f"winch {e.name}"
        ck: list[Check] = []
        # tensions
        if np.any(taut):
            col = np.where(taut, t_exit[:, i], -np.inf)
            k = int(np.argmax(col))
            F, F_pose = float(col[k]), q[k].copy()
        else:
            F, F_pose = float("nan"), np.full(q.shape[1], np.nan)
        # rope on the drum
        Ls = np.concatenate([L[:, i], [L_home[i]]])
        travel = float(Ls.max() - Ls.min())
        D1 = pitch_diameter(wn.drum_diameter, d)
        stored = travel + wn.dead_wraps * math.pi * D1
        fill = drum_fill(stored, wn.drum_diameter, wn.drum_width, d, flange_diameter=wn.flange_diameter,
                         grooved=wn.grooved, groove_pitch=practice_value("groove_pitch", pv),
                         freeboard_min=fb_len / d)
        r_top = 0.5 * fill.top_pitch_diameter
        tau = motor_torque(F, r_top, wn.gear_ratio, wn.efficiency) if math.isfinite(F) else float("nan")
        tau_peak = tau * (g + acc) / g
        brake_factor = practice_value("brake_torque_factor", pv)
        brake_tau = brake_factor * F * r_top / wn.gear_ratio
        drum_w = v / (0.5 * D1)
        motor_w = drum_w * wn.gear_ratio
        rate = count_rate(v, lpc[i])
        power = F * v / wn.efficiency if math.isfinite(F) else float("nan")
        dead = deadband_length(wn.deadband_half_counts, lpc[i])
        fa = fleet_angle(wn.drum_width, e.drum_distance) if e.drum_distance > 0 else float("nan")
        drum_ratio = wn.drum_diameter / d
        pulley_ratio = e.pulley_diameter / d if e.pulley_diameter > 0 else float("nan")
        where = (f"highest tension {F:.1f} N at the winch end, pose {', '.join(f'{x:.3g}' for x in F_pose[:3])} m"
                 if math.isfinite(F) else "no pose of the task region has every cable taut")

        def add(key, title, value, limit, unit, *, upper, source, detail, warn_limit=None, status=None, scale=1.0):
            if status is None:
                margin, status = judge(value, limit, upper=upper, warn_limit=warn_limit)
                if not math.isfinite(limit):  # a limit that cannot be worked out is never a pass
                    status, detail = FAIL, detail + "; the limit could not be worked out (no usable pose)"
            else:
                margin = (limit - value) if upper else (value - limit)
            ck.append(Check(key=key, subject=subject, title=title, value=value * scale, limit=limit * scale,
                            unit=unit, margin=margin * scale, status=status, source=source, detail=detail))

        def src(key):
            return "design file [practice]" if key in pv else PRACTICE[key].source

        # rope design factor (higher when the load may hang over people)
        df_key, df = rope_design_factor(design)
        rope_detail = (f"breaking force {design.cable.breaking_force:.0f} N / {where}"
                       + ("; use class over people" if over_people else ""))
        if math.isfinite(F) and design.cable.breaking_force < df * F:
            better = smallest_rope(F, df)
            rope_detail += (f"; the thinnest 7x19 carbon-steel aircraft cable strong enough is {better.designation} "
                            f"({better.breaking_force / 1e3:.1f} kN, {better.source})" if better is not None
                            else "; no cable in the bundled catalogue is strong enough")
        add("rope_design_factor", "rope design factor", design.cable.breaking_force / F if F > 0 else float("nan"),
            df, "-", upper=False, source=src(df_key), detail=rope_detail)
        # D/d of drum and exit pulley, by rope construction
        dd_min, dd_des, cls, cls_src = _d_ratio_limits(design, "drum")
        known = cls != "unknown"
        add("drum_d_ratio", "drum D/d", drum_ratio, dd_min, "-", upper=False, warn_limit=dd_des, source=cls_src,
            detail=f"drum {wn.drum_diameter * 1e3:g} mm / rope {d * 1e3:g} mm; {_class_text(design, cls)} limits "
                   f"{dd_min:g} minimum, {dd_des:g} desirable")
        pd_min, pd_des, cls, cls_src = _d_ratio_limits(design, "pulley")
        if e.pulley_diameter > 0:
            add("pulley_d_ratio", "exit pulley D/d", pulley_ratio, pd_min, "-", upper=False, warn_limit=pd_des,
                source=cls_src, detail=f"pulley {e.pulley_diameter * 1e3:g} mm / rope {d * 1e3:g} mm; "
                                       f"{_class_text(design, cls)} limits {pd_min:g} minimum, {pd_des:g} desirable")
        else:
            add("pulley_d_ratio", "exit pulley D/d", 0.0, pd_min, "-", upper=False, status=WARN, source=cls_src,
                detail="the exit is an eyelet (pulley_diameter 0): the rope bends sharply there; use a pulley")
        if not known:  # judged against the strictest limits, and never better than a warning
            ck[-2:] = [c if c.status == FAIL else replace(c, status=WARN) for c in ck[-2:]]
        # fleet angle
        fl_key = "fleet_angle_grooved" if wn.grooved else "fleet_angle_smooth"
        fl_lim = practice_value(fl_key, pv)
        drum_kind = "grooved" if wn.grooved else "smooth"
        if math.isfinite(fa):
            if not wn.grooved and fa < practice_value("fleet_angle_min", pv):
                add("fleet_angle", "fleet angle", fa, fl_lim, "deg", upper=True, status=WARN, scale=180 / math.pi,
                    source=src("fleet_angle_min"),
                    detail=f"{drum_kind} drum {wn.drum_width * 1e3:g} mm wide, exit {e.drum_distance:g} m away: "
                           "below the smallest advisable angle, the rope may pile up at the flange")
            else:
                add("fleet_angle", "fleet angle", fa, fl_lim, "deg", upper=True, scale=180 / math.pi,
                    source=src(fl_key),
                    detail=f"{drum_kind} drum {wn.drum_width * 1e3:g} mm wide, exit pulley {e.drum_distance:g} m "
                           "from the drum, in line with the drum's middle")
        else:
            add("fleet_angle", "fleet angle", float("nan"), fl_lim, "deg", upper=True, status=WARN,
                scale=180 / math.pi, source=src(fl_key),
                detail=f"frame.exits '{e.name}' has no drum_distance: the fleet angle cannot be checked")
        # encoder count rate and motor speed
        use = practice_value("count_rate_use", pv)
        if v > 0:
            add("count_rate", "encoder count rate", rate, wn.count_rate_limit, "kHz", upper=True,
                warn_limit=use * wn.count_rate_limit, scale=1e-3, source=src("count_rate_use"),
                detail=f"{v:g} m/s / {lpc[i] * 1e6:.2f} um per count; warn above {use:.0%} of the controller limit")
            sp_use = practice_value("motor_speed_use", pv)
            add("motor_speed", "motor speed", motor_w, sp_use * wn.motor_rated_speed, "rpm", upper=True,
                scale=60 / (2 * math.pi), source=src("motor_speed_use"),
                detail=f"{v:g} m/s on the first layer (pitch diameter {D1 * 1e3:.1f} mm), gear {wn.gear_ratio:g}:1")
        else:
            for key, title, lim, unit, sc in (("count_rate", "encoder count rate", wn.count_rate_limit, "kHz", 1e-3),
                                              ("motor_speed", "motor speed", wn.motor_rated_speed, "rpm",
                                               60 / (2 * math.pi))):
                add(key, title, float("nan"), lim, unit, upper=True, status=WARN, scale=sc,
                    source="design file", detail="task.speed is not given: not checked")
        # motor torque, static and with acceleration
        ru = practice_value("motor_rated_use", pv)
        add("motor_torque_rated", "motor torque (static vs rated)", tau, ru * wn.motor_rated_torque, "N*m",
            upper=True, source=src("motor_rated_use"),
            detail=f"F r / (i eta) with r = {r_top * 1e3:.1f} mm (layer {fill.layers}), i = {wn.gear_ratio:g}, "
                   f"eta = {wn.efficiency:g}; {where}")
        add("motor_torque_peak", "motor torque (accelerating vs peak)", tau_peak, wn.motor_peak_torque, "N*m",
            upper=True, source="motor maker's peak torque (design file)",
            detail=f"static torque x (g + a)/g with a = {acc:g} m/s^2 (lifting while accelerating); rotor and drum "
                   "inertia not included")
        # drum capacity and flange freeboard
        fill_use = practice_value("drum_fill_max", pv)
        add("drum_capacity", "drum capacity", stored, fill_use * fill.capacity, "m", upper=True,
            source=src("drum_fill_max"),
            detail=f"travel {travel:.3f} m + {wn.dead_wraps:g} dead wraps; {fill.wraps_per_layer} wraps per layer, "
                   f"{fill.layers} layer(s) needed, {fill.layers_allowed} allowed"
                   + ("" if wn.flange_diameter else " (no flange diameter given: one layer assumed)"))
        fb_src = ("design file [practice]" if {"flange_freeboard_min", "flange_freeboard_length_min"} & set(pv)
                  else PRACTICE["flange_freeboard_min"].source)
        fb_rule = (f"the greater of {practice_value('flange_freeboard_min', pv):g} rope diameters "
                   f"({practice_value('flange_freeboard_min', pv) * d * 1e3:.3g} mm) and "
                   f"{practice_value('flange_freeboard_length_min', pv) * 1e3:.3g} mm")
        if wn.flange_diameter > 0:
            add("flange_freeboard", "flange freeboard", fill.freeboard * d, fb_len, "mm", upper=False, scale=1e3,
                source=fb_src, detail=f"flange {wn.flange_diameter * 1e3:g} mm over {fill.layers} layer(s) of "
                                      f"{d * 1e3:g} mm rope; at least {fb_rule}")
        else:
            add("flange_freeboard", "flange freeboard", float("nan"), fb_len, "mm", upper=False, status=WARN,
                scale=1e3, source=fb_src,
                detail="no flange_diameter given: the rope may run off the drum; give the flange diameter")
        # holding brake: its rating against the factor times the highest static load torque
        need = (f"{brake_factor:g} x the highest static load torque F r / i = {brake_tau:.3g} N*m at the motor shaft "
                f"(r = {r_top * 1e3:.1f} mm, gear losses not counted)")
        if wn.brake and wn.brake_holding_torque is None:  # only a Winch built in code can lack it
            add("brake", "holding brake", 0.0, brake_tau, "N*m", upper=False, status=FAIL,
                source=src("brake_torque_factor"),
                detail=f"a brake is fitted but its holding torque is not given (brake_holding_torque): it must hold "
                       f"{need}")
        elif wn.brake:
            add("brake", "holding brake", wn.brake_holding_torque, brake_tau, "N*m", upper=False,
                source=src("brake_torque_factor"),
                detail=f"brake rated {wn.brake_holding_torque:.3g} N*m; it must hold {need}")
        elif not suspended:
            add("brake", "holding brake", 0.0, brake_tau, "N*m", upper=False, status=WARN,
                source=src("brake_torque_factor"),
                detail=f"no brake; no mass hangs from the rig (no gravity load), but a brake is still advised: {need}")
        elif wn.self_locking:
            add("brake", "holding brake", 0.0, brake_tau, "N*m", upper=False, status=WARN,
                source=src("brake_torque_factor"),
                detail="no brake: the load is held only by the self-locking drive (design file self_locking = true); "
                       "vibration, wear and heat can let a self-locking gear creep; confirm it with the gear maker "
                       f"or fit a brake: {need}")
        else:
            add("brake", "holding brake", 0.0, brake_tau, "N*m", upper=False, status=FAIL,
                source=src("brake_torque_factor"),
                detail="no brake on a suspended load and the drive is not declared self-locking: the load falls on "
                       f"power loss; fit a brake that holds {need}")
        status = worst_status(ck)
        ranked = sorted(ck, key=lambda c: ({FAIL: 0, WARN: 1, PASS: 2}[c.status], -_use(c)))
        limiting = ranked[0] if ranked else None
        rows.append(DriveRow(name=e.name, pitch_diameter=D1, length_per_count=float(lpc[i]), deadband=dead,
                             motion_step=float(steps[i]), cable_speed=v, drum_speed=drum_w, motor_speed=motor_w,
                             count_rate=rate, count_rate_limit=wn.count_rate_limit, max_tension=F,
                             max_tension_pose=F_pose, torque=tau, peak_torque=tau_peak, power=power,
                             brake_torque=brake_tau, travel=travel, stored_length=stored, fill=fill, fleet_angle=fa,
                             drum_ratio=drum_ratio, pulley_ratio=pulley_ratio, checks=tuple(ck), status=status,
                             limiting=limiting))
        all_checks.extend(ck)
    over = taut & np.any(t_exit > limits.t_max * (1.0 + 1e-9), axis=1)
    return DriveResult(design_name=design.meta.name, rows=tuple(rows), checks=tuple(all_checks),
                       tension_source=source, poses_used=int(np.sum(taut)), poses_total=len(q),
                       poses_over_rating=int(np.sum(over)))


def _freeboard_min(design) -> float:
    """Least flange height above the top layer [m]: the greater of its two terms."""
    pv = design.practice
    return max(practice_value("flange_freeboard_min", pv) * design.cable.diameter,
               practice_value("flange_freeboard_length_min", pv))


# rope classes read from cable.construction: (strands, wires per strand) -> class
_ROPE_CLASSES = {
    (7, 7): "7x7", (7, 19): "7x19",  # aircraft cable
    (6, 7): "6x7",
    (6, 19): "6x19", (6, 21): "6x19", (6, 25): "6x19", (6, 26): "6x19",
    (6, 36): "6x36", (6, 41): "6x36", (6, 49): "6x36",
    (8, 19): "8x19", (8, 25): "8x19",
    (19, 7): "19x7", (18, 7): "19x7",
}
_STRICTEST = "6x7"  # used for a construction cablekit does not know


def rope_class(construction: str) -> str:
    """The D/d class of a rope from the free-text ``cable.construction``.

    ``"7x7"`` and ``"7x19"`` (aircraft cable), ``"6x7"``, ``"6x19"`` (6x19 Seale, 6x21,
    6x25 and 6x26), ``"6x36"`` (6x36, 6x41, 6x49), ``"8x19"`` (8x19, 8x25), ``"19x7"``
    (19x7, 18x7 rotation-resistant), or ``"unknown"`` when the text names no known strand
    pattern (then the strictest limits apply and the check is at best a warning).
    """
    import re

    mt = re.search(r"(\d+)\s*[x×X]\s*(\d+)", construction or "")
    if mt is None:
        return "unknown"
    return _ROPE_CLASSES.get((int(mt.group(1)), int(mt.group(2))), "unknown")


def _class_text(design, cls: str) -> str:
    if cls == "unknown":
        return (f"rope construction {design.cable.construction!r} not recognised, so the strictest ({_STRICTEST}) "
                "D/d")
    return {"7x7": "7x7 aircraft cable", "7x19": "7x19 aircraft cable"}.get(cls, f"{cls} wire rope")


def _d_ratio_limits(design, where: str):
    """(minimum, desirable, class name, source) of D/d for the design's rope."""
    pv = design.practice
    cls = rope_class(design.cable.construction)
    look = _STRICTEST if cls == "unknown" else cls
    if look == "7x19":
        keys = (f"{where}_d_ratio_min", f"{where}_d_ratio_desired")
    else:
        keys = (f"d_ratio_min_{look}", f"d_ratio_desired_{look}")
    src = "design file [practice]" if any(k in pv for k in keys) else PRACTICE[keys[0]].source
    return practice_value(keys[0], pv), practice_value(keys[1], pv), cls, src


def design_checks(design, *, workspace=None) -> list[Check]:
    """Every drivetrain and rope check of the design (see :func:`size_drives`)."""
    return list(size_drives(design, workspace=workspace).checks)


def design_assumptions(design, **options) -> list[str]:
    """The modelling assumptions the drivetrain verdicts rest on, one sentence each."""
    from .statics import rope_design_factor

    pv = design.practice
    out = ["Drivetrain: the highest tension each winch must hold comes from the minimum-norm tension distribution "
           "with every cable at least its minimum tension and no upper limit, over every pose of the task grid "
           + ("and every corner of the task's wrench box " if any(design.task.wrench_box[:design.dof]) else "")
           + "(not from tensions already limited by the rope and motor ratings); a controller that pre-tensions "
           "the cables more draws more.",
           "Drivetrain: tension at the winch end = platform-end tension + cable weight per metre x rise; torque on "
           f"the top rope layer used; accelerating torque = static x (g + a) / g, rotor and drum inertia left out.",
           f"Holding brake: must hold {practice_value('brake_torque_factor', pv):g} x the highest static load torque "
           "at the motor shaft, gear losses not counted (they would help the brake); every winch of a rig that hangs "
           "a mass counts as holding a suspended load."]
    for e, w in zip(design.frame.exits, design.winches):
        if not w.brake and w.self_locking:
            out.append(f"Winch {e.name}: no brake; the design declares the drive self-locking (it is trusted, not "
                       "checked).")
    defs = {(w.deadband_counts, w.deadband_definition, w.step_counts) for w in design.winches}
    for k, how, sc in sorted(defs):
        meaning = (f"+/- {k:g} counts, so the controller settles anywhere in a band {sc:g} counts wide"
                   if how == "plus_minus" else f"a band {k:g} counts wide in all (+/- {(sc - 1) / 2:g} counts)")
        out.append(f"Motion step: deadband_counts = {k:g} read as {meaning} (deadband_definition = '{how}'); the "
                   f"effective motion step is {sc:g} counts (common practice, no source).")
    cls = rope_class(design.cable.construction)
    out.append(f"Rope: construction {design.cable.construction or '(not given)'!r} read as "
               + (f"class {cls}" if cls != "unknown" else f"unknown, so the strictest ({_STRICTEST}) D/d limits apply")
               + f"; use class '{design.cable.use_class}', rope design factor {rope_design_factor(design)[1]:g}.")
    out.append("Fleet angle: each exit pulley is taken in line with the middle of its drum (the rope swings half "
               "the drum width to either side); motor speed and encoder count rate are taken at the task's top "
               "cable speed on the first rope layer.")
    out.append("Flange freeboard: the flange must stand above the top rope layer by the greater of "
               f"{practice_value('flange_freeboard_min', pv):g} rope diameters and "
               f"{practice_value('flange_freeboard_length_min', pv) * 1e3:g} mm; upper layers are taken 2 rope "
               "diameters apart (no nesting).")
    return out


def latex_equations() -> dict[str, str]:
    """LaTeX of the drivetrain formulas for notebooks and the review sheet."""
    return {
        "pitch diameter": r"D_p = D_{drum} + d + 2(n_{layer} - 1)\,d",
        "length per count": r"\Delta L = \frac{\pi D_p}{i\,N_{lines}\,k_{dec}}",
        "count rate": r"f_{count} = \frac{v}{\Delta L}",
        "motor speed": r"\omega_m = i\,\frac{2 v}{D_p}",
        "motor torque": r"\tau_m = \frac{F\,r}{i\,\eta}",
        "fleet angle": r"\alpha = \arctan\frac{b/2}{L_{drum\to exit}}",
        "rope design factor": r"n = \frac{F_{break}}{F_{max}}",
    }
