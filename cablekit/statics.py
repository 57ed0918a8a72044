"""Static equilibrium: the external wrench, tension limits, and tension distribution.

Equilibrium ``W t + w_ext = 0`` with ``t_min <= t <= t_max`` (see :mod:`cablekit.symbolic`
for the sign convention).  This module holds the reference path (scipy's LP solver, one
pose at a time) and the exactly determined case (m = n, batched).

The **tension margin** of a pose is the largest ``s`` such that some tension vector with
``t_min + s <= t <= t_max - s`` balances the wrench: positive inside the wrench-feasible
workspace, zero on its border, negative outside (Gouttefarde, Merlet and Daney, "Wrench-
feasible workspace of parallel cable-driven mechanisms", ICRA 2007, for the definition of the
wrench-feasible set).
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace

import numpy as np

from .kinematics import as_poses, structure_matrix, zero_length_cables
from .practice import practice_value

__all__ = [
    "TensionLimits",
    "tension_limits",
    "external_wrench",
    "TensionResult",
    "solve_square",
    "solve_lp",
    "rotation_matrices",
    "motor_cable_force",
    "tensions_at",
    "solve_tensions",
    "SINGULAR_NOTE",
    "without_singular",
]


@dataclass(frozen=True)
class TensionLimits:
    """Per-cable tension limits [N], shape (m,) each.

    t_min : least tension that counts as taut (the cable's own ``min_tension`` where stated,
    else ``cable.min_tension``); rope_limit : breaking force / design factor; motor_limit : what
    the winch motor's rated torque pulls through gears and drum; stated_limit : the design's
    ``max_tension`` for the cable (inf where none is stated); t_max : the lowest of the three;
    limited_by : "stated", "rope" or "motor" per cable (the first of these on a tie).
    """

    t_min: np.ndarray
    rope_limit: np.ndarray
    motor_limit: np.ndarray
    t_max: np.ndarray
    limited_by: tuple[str, ...]
    design_factor: float
    stated_limit: np.ndarray


def motor_cable_force(torque, drum_diameter, rope_diameter, gear_ratio, efficiency):
    """Cable force a motor torque holds through gears and drum [N].

    ``F = tau * i * eta / r``, ``r = (D_drum + d_rope) / 2`` (pitch radius of the first layer).
    Pulling against the load, losses reduce the force the motor can deliver, hence ``* eta``.
    """
    r = 0.5 * (np.asarray(drum_diameter, float) + rope_diameter)
    return np.asarray(torque, float) * gear_ratio * efficiency / r


def rope_design_factor(design) -> tuple[str, float]:
    """(practice key, value) of the rope design factor in force for the design's use class: the
    general one, or for ``use_class = "over_people"`` the higher of it and the over-people one."""
    general = practice_value("rope_design_factor", design.practice)
    if design.cable.use_class == "over_people":
        return ("rope_design_factor_over_people",
                max(general, practice_value("rope_design_factor_over_people", design.practice)))
    return "rope_design_factor", general


def tension_limits(design) -> TensionLimits:
    """Tension limits of every cable: ``t_max = min(stated max_tension, MBF / design factor, motor limit)``.

    The stated limit is the cable's own ``[[frame.exits]] max_tension``, else ``[cable]
    max_tension``, else none; ``t_min`` likewise the cable's own ``min_tension`` or the shared one.
    """
    m = design.m
    df = rope_design_factor(design)[1]
    rope = np.full(m, design.cable.breaking_force / df)
    motor = np.array([motor_cable_force(w.motor_rated_torque, w.drum_diameter, design.cable.diameter,
                                        w.gear_ratio, w.efficiency) for w in design.winches], dtype=float)
    exits = design.frame.exits
    shared = np.inf if design.cable.max_tension is None else design.cable.max_tension
    stated = np.array([shared if e.max_tension is None else e.max_tension for e in exits], dtype=float)
    t_min = np.array([design.cable.min_tension if e.min_tension is None else e.min_tension for e in exits], float)
    t_max = np.minimum(stated, np.minimum(rope, motor))
    by = tuple("stated" if st <= min(r, mo) else "rope" if r <= mo else "motor" for st, r, mo in zip(stated, rope, motor))
    return TensionLimits(t_min=t_min, rope_limit=rope, motor_limit=motor, t_max=t_max, limited_by=by,
                         design_factor=df, stated_limit=stated)


def rotation_matrices(angles) -> np.ndarray:
    """``R = Rz(psi) Ry(theta) Rx(phi)`` for angles (N, 3) [rad] -> (N, 3, 3)."""
    a = np.atleast_2d(np.asarray(angles, float))
    cx, sx = np.cos(a[:, 0]), np.sin(a[:, 0])
    cy, sy = np.cos(a[:, 1]), np.sin(a[:, 1])
    cz, sz = np.cos(a[:, 2]), np.sin(a[:, 2])
    R = np.empty((a.shape[0], 3, 3))
    R[:, 0, 0] = cz * cy
    R[:, 0, 1] = cz * sy * sx - sz * cx
    R[:, 0, 2] = cz * sy * cx + sz * sx
    R[:, 1, 0] = sz * cy
    R[:, 1, 1] = sz * sy * sx + cz * cx
    R[:, 1, 2] = sz * sy * cx - cz * sx
    R[:, 2, 0] = -sy
    R[:, 2, 1] = cy * sx
    R[:, 2, 2] = cy * cx
    return R


def external_wrench(design, poses, *, extra=None, masses=None) -> np.ndarray:
    """Wrench of gravity (platform, payload and arm when declared) plus ``extra`` [N, N*m].

    Returns shape (N, n): force (3) and, for rigid platforms, the moment about the platform
    reference point (3): ``(R c) x (M g)`` with ``c`` the combined centre of mass in the
    platform frame.

    ``masses`` optionally overrides the list of (mass [kg], centre of mass in the platform
    frame [m]) pairs; by default platform and payload (and the arm's lumped mass).
    """
    q = as_poses(design, poses)
    N, n = q.shape
    if masses is None:
        masses = [(design.platform.mass, design.platform.center_of_mass),
                  (design.payload.mass, design.payload.center_of_mass)]
        arm = design.sections.get("arm")
        if arm is not None and hasattr(arm, "lumped_mass"):
            masses.append(arm.lumped_mass())
    M = sum(mm for mm, _ in masses)
    c = sum(mm * np.asarray(cc, float) for mm, cc in masses) / M if M > 0 else np.zeros(3)
    f = M * design.gravity
    w = np.zeros((N, n))
    w[:, :3] = f
    if n == 6:
        r = rotation_matrices(q[:, 3:]) @ c
        w[:, 3:] = np.cross(r, f)
    if extra is not None:
        w += np.broadcast_to(np.asarray(extra, float), (N, n))
    return w


@dataclass(frozen=True)
class TensionResult:
    """Tensions for N poses.

    tensions : (N, m) [N]; feasible : (N,) bool; margin : (N,) tension margin [N] (see the
    module notes); limiting_cable : (N,) index of the cable at the binding limit (-1 when
    undetermined); method : how the tensions were chosen.
    """

    tensions: np.ndarray
    feasible: np.ndarray
    margin: np.ndarray
    limiting_cable: np.ndarray
    method: str


def solve_square(W, w_ext, t_min, t_max) -> TensionResult:
    """Exactly determined rigs (m = n): the unique ``t = -W^{-1} w_ext``, batched.

    For 3 x 3 (a point on three cables) Cramer's rule on component arrays, which avoids the
    fixed per-matrix cost of stacked LAPACK calls; ``numpy.linalg.solve`` otherwise.
    Singular poses get NaN tensions, ``feasible=False`` and margin ``-inf``.
    """
    W = np.asarray(W, float)
    w = np.asarray(w_ext, float)
    N, n, m = W.shape
    if m != n:
        raise ValueError(f"solve_square needs as many cables as DOF, got m={m}, n={n}")
    if n == 3:
        t, ok = _cramer3(W, -w)
    else:
        t = np.full((N, m), np.nan)
        det = np.linalg.det(W)
        scale = np.prod(np.linalg.norm(W, axis=1), axis=1)
        ok = np.abs(det) > 1e-12 * np.maximum(scale, 1e-300)
        if np.any(ok):
            t[ok] = np.linalg.solve(W[ok], -w[ok][..., None])[..., 0]
    lo = t - np.asarray(t_min, float)
    hi = np.asarray(t_max, float) - t
    slack = np.where(np.isnan(t), -np.inf, np.minimum(lo, hi))
    margin = np.where(ok, np.min(slack, axis=1), -np.inf)
    limiting = np.where(ok, np.argmin(slack, axis=1), -1)
    return TensionResult(tensions=t, feasible=margin >= 0, margin=margin, limiting_cable=limiting,
                         method="unique solution (m = n)")


def _cramer3(W, f):
    """Solve ``W t = f`` for stacked 3 x 3 ``W`` (N, 3, 3) by Cramer's rule.

    Returns tensions (N, 3) (NaN where singular) and the non-singular mask. The columns' cross
    products give both the determinant and the adjugate rows:
    ``t_1 = f . (c_2 x c_3) / det``, ``t_2 = f . (c_3 x c_1) / det``, ``t_3 = f . (c_1 x c_2) / det``.
    """
    c1x, c1y, c1z = W[:, 0, 0], W[:, 1, 0], W[:, 2, 0]
    c2x, c2y, c2z = W[:, 0, 1], W[:, 1, 1], W[:, 2, 1]
    c3x, c3y, c3z = W[:, 0, 2], W[:, 1, 2], W[:, 2, 2]
    fx, fy, fz = f[:, 0], f[:, 1], f[:, 2]
    ax, ay, az = c2y * c3z - c2z * c3y, c2z * c3x - c2x * c3z, c2x * c3y - c2y * c3x  # c2 x c3
    bx, by, bz = c3y * c1z - c3z * c1y, c3z * c1x - c3x * c1z, c3x * c1y - c3y * c1x  # c3 x c1
    cx, cy, cz = c1y * c2z - c1z * c2y, c1z * c2x - c1x * c2z, c1x * c2y - c1y * c2x  # c1 x c2
    det = c1x * ax + c1y * ay + c1z * az
    scale = (np.sqrt(c1x**2 + c1y**2 + c1z**2) * np.sqrt(c2x**2 + c2y**2 + c2z**2)
             * np.sqrt(c3x**2 + c3y**2 + c3z**2))
    ok = np.abs(det) > 1e-12 * np.maximum(scale, 1e-300)
    inv = np.where(ok, 1.0 / np.where(ok, det, 1.0), np.nan)
    t = np.empty((W.shape[0], 3))
    t[:, 0] = (fx * ax + fy * ay + fz * az) * inv
    t[:, 1] = (fx * bx + fy * by + fz * bz) * inv
    t[:, 2] = (fx * cx + fy * cy + fz * cz) * inv
    return t, ok


def solve_lp(W, w_ext, t_min, t_max) -> TensionResult:
    """Reference path: per pose, ``max s`` s.t. ``W t = -w``, ``t_min + s <= t <= t_max - s``.

    Uses :func:`scipy.optimize.linprog` (HiGHS). Slow (hundreds of poses per second); the
    fast exact batched path lives in :mod:`cablekit.tension` and is checked against this.
    Returns the max-margin ("centred") tensions.
    """
    from scipy.optimize import linprog

    W = np.asarray(W, float)
    w = np.asarray(w_ext, float)
    N, n, m = W.shape
    t_min = np.broadcast_to(np.asarray(t_min, float), (m,))
    t_max = np.broadcast_to(np.asarray(t_max, float), (m,))
    tens = np.full((N, m), np.nan)
    margin = np.full(N, -np.inf)
    limiting = np.full(N, -1)
    c = np.zeros(m + 1)
    c[-1] = -1.0
    A_ub = np.zeros((2 * m, m + 1))
    A_ub[:m, :m] = -np.eye(m)
    A_ub[:m, -1] = 1.0  # -t + s <= -t_min
    A_ub[m:, :m] = np.eye(m)
    A_ub[m:, -1] = 1.0  # t + s <= t_max
    b_ub = np.concatenate([-t_min, t_max])
    bounds = [(None, None)] * (m + 1)
    for k in range(N):
        A_eq = np.hstack([W[k], np.zeros((n, 1))])
        res = linprog(c, A_ub=A_ub, b_ub=b_ub, A_eq=A_eq, b_eq=-w[k], bounds=bounds, method="highs")
        if res.status == 0:
            t = res.x[:m]
            tens[k] = t
            margin[k] = res.x[-1]
            slack = np.minimum(t - t_min, t_max - t)
            limiting[k] = int(np.argmin(slack))
    return TensionResult(tensions=tens, feasible=margin >= 0, margin=margin, limiting_cable=limiting,
                         method="max-margin (linear program, HiGHS)")


# what a singular pose (undefined structure matrix) gets in every per-pose field of a result
_SINGULAR_FILL = {"tensions": np.nan, "feasible": False, "margin": -np.inf, "limiting_cable": -1,
                  "nominal_margin": -np.inf, "active_lower": False, "active_upper": False, "by_lp": False}
SINGULAR_NOTE = "no solution / singular (a cable of zero length: attachment at its exit)"


def without_singular(solve, W, w_ext, singular):
    """Run ``solve(W, w_ext)`` on the poses not marked ``singular`` and fill in the others.

    ``singular`` (N,) bool marks poses whose structure matrix is undefined (a cable of zero
    length, see :func:`cablekit.kinematics.zero_length_cables`); their ``W`` may hold NaN.  They
    come back infeasible with no tensions (NaN), margin ``-inf`` and limiting cable -1, and the
    result's ``method`` counts them.  ``solve`` returns a :class:`TensionResult` (or subclass).
    """
    W = np.asarray(W, float)
    N = W.shape[0]
    w = np.broadcast_to(np.asarray(w_ext, float), (N, W.shape[1]))
    sing = np.broadcast_to(np.asarray(singular, bool), (N,))
    if not np.any(sing):
        return solve(W, w)
    keep = np.flatnonzero(~sing)
    res = solve(W[keep], w[keep])
    out = {}
    for f in fields(res):
        v = getattr(res, f.name)
        if f.name in _SINGULAR_FILL:
            full = np.full((N,) + v.shape[1:], _SINGULAR_FILL[f.name], dtype=v.dtype)
            full[keep] = v
            out[f.name] = full
    out["method"] = f"{res.method}; {int(sing.sum())} pose(s) {SINGULAR_NOTE}"
    return replace(res, **out)


def solve_tensions(W, w_ext, t_min, t_max, *, method: str = "auto", singular=None) -> TensionResult:
    """Tension distribution for stacked structure matrices (N, n, m) and wrenches (N, n).

    ``method="auto"``: the unique solution when m = n, else the fast exact batched path of
    :func:`cablekit.tension.distribute`; ``"lp"``: the per-pose linear program.
    ``singular``: optional (N,) bool of poses with an undefined structure matrix (see
    :func:`without_singular`); they are classified "no solution / singular", not solved.
    """
    if method not in ("auto", "lp"):
        raise ValueError(f"method must be 'auto' or 'lp', got {method!r}")
    if singular is not None:
        return without_singular(lambda Ws, ws: solve_tensions(Ws, ws, t_min, t_max, method=method), W, w_ext,
                                singular)
    W = np.asarray(W, float)
    if method == "lp":
        return solve_lp(W, w_ext, t_min, t_max)
    if W.shape[1] == W.shape[2]:
        return solve_square(W, w_ext, t_min, t_max)
    from .tension import distribute

    return distribute(W, w_ext, t_min, t_max)


def tensions_at(design, poses, *, extra=None, method: str = "auto") -> TensionResult:
    """Tensions for the design at ``poses`` under gravity (+ ``extra`` wrench).

    ``method="auto"`` uses the fast exact batched path, ``"lp"`` the per-pose linear program.
    A pose with a cable of zero length (an attachment exactly at its exit) has no structure
    matrix: it comes back infeasible, "no solution / singular" (see :func:`without_singular`).
    """
    q = as_poses(design, poses)
    lim = tension_limits(design)
    sing = np.any(zero_length_cables(design, q), axis=1)
    return solve_tensions(structure_matrix(design, q), external_wrench(design, q, extra=extra), lim.t_min,
                          lim.t_max, method=method, singular=sing if np.any(sing) else None)
