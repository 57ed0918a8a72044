"""The real pose of a point platform: how far the arm's and payload's weight tilt it.

cablekit's point model lets every cable meet the platform at one point and keeps it level.
Forces through one point cannot resist a moment, so a real platform hangs from that point
like a pendulum and turns until its centre of mass lies below it
(:func:`pendulum_equilibrium`, closed form).  A platform hanging from separate attachments
``b_i`` is **under-constrained** (three cables, six degrees of freedom) and tilts until the
potential energy of everything it carries is least for the cable lengths the winches hold
(:func:`hanging_equilibrium`).  :func:`suspended_poses` finds the pose for a design with the
arm at given joints, verifies it by force and moment balance (and, for separate attachments,
a second-order test), and reports the tilt, the shift and the tool-tip error it causes;
:func:`design_checks` judges the error against the required accuracy.

Model
-----
* The winches hold the lengths of the **point model** at the nominal position ``p_c``,
  ``L_i = |a_i - p_c|``, as cablekit's kinematics and the task plan write them (or, with
  ``controller="level"``, those of the level platform with its attachments,
  ``L_i = |a_i - p_c - b_i|``).
* The platform, payload and arm (joints fixed) are one rigid body of mass ``M`` with centre of
  mass ``c`` in the platform frame.  The equilibrium pose ``(p, R)`` minimises the height of
  the centre of mass, ``V = -M g . (p + R c)``, subject to ``|a_i - p - R b_i| <= L_i`` (a
  cable can go slack, never stretch: inextensible cables).  Solved with SLSQP from several
  starts; ``R = Exp(w) `` with the rotation vector ``w``.
* Check of the result, independent of the optimiser: the tensions ``t`` solving
  ``W t + w_ext = 0`` in the least-squares sense (``W`` columns ``[u_i; R b_i x u_i]``,
  ``w_ext = [M g; R c x M g]``) must balance the load (small residual) with ``t >= 0``; the
  Hessian of the Lagrangian reduced to the tangent space of the taut cables must be positive
  definite (a stable equilibrium; Carricato and Merlet 2013 discuss this stability test).
* Arm levelling joints re-level the arm base for the tilt found (repeated until the tilt
  settles), so their effect on the centre of mass is counted.

SI inside: positions [m], angles [rad], masses [kg], forces [N].

This is a static model: no swing, no cable stretch or sag, rigid bodies.  It does not make a
rig safe; keep people clear of suspended loads and follow local codes and licensed practice.

References
----------
Carricato, M., Merlet, J.-P. "Stability analysis of underconstrained cable-driven parallel
robots". IEEE Transactions on Robotics 29(1), 2013, pp. 288-296.
Barfoot, T. D. *State Estimation for Robotics*. Cambridge University Press, 2017, sec. 7.1
(the left Jacobian of SO(3)).
Nocedal, J., Wright, S. J. *Numerical Optimization*, 2nd ed. Springer, 2006, thm. 12.6
(second-order sufficient conditions).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .checks import Check, judge

__all__ = [
    "COINCIDE_TOL",
    "SUSPENDED_WARN_SHARE",
    "BodyEquilibrium",
    "hanging_equilibrium",
    "pendulum_equilibrium",
    "level_lengths",
    "SuspendedResult",
    "has_spread_attachments",
    "meeting_attachments",
    "suspended_poses",
    "design_poses",
    "tilt_matters",
    "required_accuracy",
    "design_checks",
    "design_assumptions",
    "latex_equations",
]

COINCIDE_TOL = 1e-4  # attachments closer than this [m] are taken to coincide (one meeting point)
# warn when the tilt's tool-tip error alone uses more than half the required accuracy: the
# rest of the error budget needs the other half (common practice, no source)
SUSPENDED_WARN_SHARE = 0.5
_METHOD = "least potential energy subject to the cable lengths (Carricato and Merlet 2013)"
_PENDULUM = "a pendulum about the point where the cables meet (centre of mass below it)"


# --------------------------------------------------------------------------------------
# rotations
# --------------------------------------------------------------------------------------
def _skew(v) -> np.ndarray:
    return np.array([[0.0, -v[2], v[1]], [v[2], 0.0, -v[0]], [-v[1], v[0], 0.0]])


def _exp(w) -> np.ndarray:
    """Rotation matrix of the rotation vector ``w`` [rad] (Rodrigues)."""
    th = float(np.linalg.norm(w))
    K = _skew(w)
    if th < 1e-8:
        return np.eye(3) + K + 0.5 * K @ K
    return np.eye(3) + math.sin(th) / th * K + (1.0 - math.cos(th)) / th**2 * K @ K


def _left_jacobian(w) -> np.ndarray:
    """``Exp(w + dw) = Exp(J_l(w) dw) Exp(w)`` to first order (Barfoot 2017, sec. 7.1)."""
    th = float(np.linalg.norm(w))
    K = _skew(w)
    if th < 1e-6:
        return np.eye(3) + 0.5 * K + K @ K / 6.0
    return np.eye(3) + (1.0 - math.cos(th)) / th**2 * K + (th - math.sin(th)) / th**3 * K @ K


# --------------------------------------------------------------------------------------
# one rigid body hanging on cables: the core, on plain arrays
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class BodyEquilibrium:
    """The equilibrium of one hanging body.

    position : (3,) reference point [m]; rotation : (3, 3) platform to world; tensions : (m,)
    [N] from force and moment balance; residual : unbalanced wrench / weight [-] (force part in
    N per N, moment part in N*m per N, i.e. m); stable : the reduced Hessian is positive
    semi-definite (neutral directions allowed); min_curvature : its least eigenvalue [m] (per
    unit weight); slack : (m,) cables
    shorter than their commanded length (not pulling); height : centre-of-mass height along
    up [m]; starts : optimiser starts run; agree : starts that reached the same least height.
    ``stable`` is False as well when the result does not balance the load with pulling cables
    (residual above 1e-6 of the weight, or a negative tension): no equilibrium was found.
    """

    position: np.ndarray
    rotation: np.ndarray
    tensions: np.ndarray
    residual: float
    stable: bool
    min_curvature: float
    slack: np.ndarray
    height: float
    starts: int
    agree: int


def level_lengths(exits, attachments, positions) -> np.ndarray:
    """Cable lengths (N, m) [m] holding the platform level at ``positions`` (N, 3) [m]:
    ``L_i = |a_i - p - b_i|`` with exits ``a`` (m, 3) and attachments ``b`` (m, 3) [m]."""
    p = np.atleast_2d(np.asarray(positions, float))
    a, b = np.asarray(exits, float), np.asarray(attachments, float)
    return np.linalg.norm(a[None] - p[:, None, :] - b[None], axis=2)


def _structure(a, p, r) -> np.ndarray:
    """Structure matrix (6, m) ``[u_i; r_i x u_i]`` of cables from exits ``a`` (m, 3) to the
    attachments ``p + r_i`` (``r`` (m, 3) in world axes) [m] (DEVELOPERS.md sign convention)."""
    l = a - p - r
    u = l / np.linalg.norm(l, axis=1, keepdims=True)
    return np.vstack([u.T, np.cross(r, u).T])


def _unbalance(W, t, mass: float, g, c_world) -> float:
    """``|W t + w_ext|`` per unit weight, ``w_ext`` the weight at ``c_world`` (about the
    reference point) [-]."""
    weight = mass * np.asarray(g, float)
    w_ext = np.concatenate([weight, np.cross(c_world, weight)])
    return float(np.linalg.norm(W @ t + w_ext) / np.linalg.norm(weight))


def _starts(p0, lengths, count: int, rng) -> list[np.ndarray]:
    """Start points (p, w): the level nominal pose, then tilted and shifted ones."""
    out = [np.concatenate([p0, np.zeros(3)])]
    scale = 0.05 * float(np.min(lengths))
    tilts = [np.array([0.35, 0, 0]), np.array([-0.35, 0, 0]), np.array([0, 0.35, 0]), np.array([0, -0.35, 0])]
    for k in range(1, count):
        w = tilts[(k - 1) % 4] if k <= 4 else rng.normal(0.0, 0.4, 3)
        out.append(np.concatenate([p0 + rng.normal(0.0, scale, 3) * (k > 4), w]))
    return out


def hanging_equilibrium(exits, attachments, lengths, *, mass: float, center_of_mass, gravity, guess,
                        starts: int = 5, seed: int = 0) -> BodyEquilibrium:
    """The stable equilibrium of a rigid body hanging on cables of fixed greatest lengths.

    Parameters
    ----------
    exits : (m, 3) cable exit points ``a_i`` in the world [m].
    attachments : (m, 3) attachments ``b_i`` in the body frame [m].
    lengths : (m,) cable lengths ``L_i`` [m] (a cable may be slack, never longer).
    mass : total mass [kg]; center_of_mass : (3,) in the body frame [m].
    gravity : (3,) gravity acceleration [m/s**2].
    guess : (3,) reference-point position to start from, the body level [m].
    starts : optimiser starts (the first is the level guess); the lowest result is kept.

    Returns
    -------
    BodyEquilibrium

    Notes
    -----
    Minimises ``V = M |g| e_up . (p + R c)`` subject to ``L_i - |a_i - p - R b_i| >= 0`` with
    ``R = Exp(w)`` (the potential-energy formulation of Carricato and Merlet 2013), with
    analytic gradients through the left Jacobian of SO(3).  At the optimum the Lagrange
    multipliers are the tensions; they are recomputed here from ``W t + w_ext = 0``.
    """
    from scipy.optimize import minimize

    a = np.asarray(exits, float)
    b = np.asarray(attachments, float)
    L = np.asarray(lengths, float)
    c = np.asarray(center_of_mass, float)
    g = np.asarray(gravity, float)
    gn = float(np.linalg.norm(g))
    if not (mass > 0 and gn > 0 and np.all(np.isfinite(L)) and np.all(L > 0)):
        raise ValueError("mass, gravity and cable lengths must be positive and finite")
    up = -g / gn

    def split(x):
        return x[:3], _exp(x[3:])

    def energy(x):  # centre-of-mass height [m]; times M|g| it is the potential energy
        p, R = split(x)
        return float(up @ (p + R @ c))

    def energy_grad(x):
        p, R = split(x)
        return np.concatenate([up, _left_jacobian(x[3:]).T @ np.cross(R @ c, up)])

    def cons(x):
        p, R = split(x)
        return L - np.linalg.norm(a - p - b @ R.T, axis=1)

    def cons_jac(x):
        p, R = split(x)
        W = _structure(a, p, b @ R.T)
        return np.hstack([W[:3].T, W[3:].T @ _left_jacobian(x[3:])])

    rng = np.random.default_rng(seed)
    found = []
    for x0 in _starts(np.asarray(guess, float), L, max(1, int(starts)), rng):
        res = minimize(energy, x0, jac=energy_grad, method="SLSQP",
                       constraints=[{"type": "ineq", "fun": cons, "jac": cons_jac}],
                       options={"ftol": 1e-14, "maxiter": 500})
        if np.all(np.isfinite(res.x)) and np.min(cons(res.x)) > -1e-7:
            found.append((float(res.fun), res.x))
    if not found:
        raise ValueError("no equilibrium found: the cable lengths cannot hold the body (check the geometry)")
    found.sort(key=lambda f: f[0])
    best_h, x = found[0]
    agree = sum(abs(h - best_h) < 1e-7 for h, _ in found)
    p, R = split(x)
    # force and moment balance, independent of the optimiser's multipliers
    W = _structure(a, p, b @ R.T)  # (6, m)
    weight = mass * g
    w_ext = np.concatenate([weight, np.cross(R @ c, weight)])
    slack = cons(x) > 1e-7 * float(np.max(L))
    t = np.zeros(len(L))
    taut = ~slack
    if taut.any():
        t[taut] = np.linalg.lstsq(W[:, taut], -w_ext, rcond=None)[0]
    residual = _unbalance(W, t, mass, g, R @ c)
    curvature = _reduced_curvature(a, b, L, c, up, p, R, t / (mass * gn), W[:, taut].T)
    # an equilibrium only if the load balances with pulling cables; stable if the curvature is positive
    balanced = residual < 1e-6 and bool(np.all(t >= -1e-9 * mass * gn))
    # a neutral direction (a turn about the vertical through one suspension point) is not
    # unstable: the bound is the finite-difference noise of the Hessian (about 1e-8 m)
    return BodyEquilibrium(position=p, rotation=R, tensions=t, residual=residual,
                           stable=bool(balanced and curvature > -1e-6), min_curvature=curvature, slack=slack,
                           height=best_h, starts=len(found), agree=int(agree))


def _no_pose(m: int) -> BodyEquilibrium:
    """The stand-in when no equilibrium exists: NaN pose, not stable (every check on it fails)."""
    nan3 = np.full(3, np.nan)
    return BodyEquilibrium(position=nan3, rotation=np.full((3, 3), np.nan), tensions=np.full(m, np.nan),
                           residual=math.inf, stable=False, min_curvature=math.nan, slack=np.zeros(m, bool),
                           height=math.nan, starts=0, agree=0)


def _rotation_between(v, w) -> np.ndarray:
    """The least rotation taking unit vector ``v`` to unit vector ``w`` (no turn about ``w``)."""
    axis = np.cross(v, w)
    s, c = float(np.linalg.norm(axis)), float(np.clip(v @ w, -1.0, 1.0))
    if s < 1e-15:
        if c > 0:
            return np.eye(3)
        perp = np.cross(v, [1.0, 0.0, 0.0] if abs(v[0]) < 0.9 else [0.0, 1.0, 0.0])
        return _exp(math.pi * perp / np.linalg.norm(perp))
    return _exp(axis / s * math.atan2(s, c))


def pendulum_equilibrium(exits, meeting, point, *, mass: float, center_of_mass, gravity) -> BodyEquilibrium:
    """The equilibrium of a body whose cables all meet it at one point: a pendulum.

    Parameters
    ----------
    exits : (m, 3) exit points [m]; meeting : (3,) the common attachment in the body frame [m];
    point : (3,) where the cables hold that attachment in the world (the point model's
    position) [m]; mass [kg]; center_of_mass : (3,) body frame [m]; gravity : (3,) [m/s**2].

    Notes
    -----
    Forces through one point cannot resist a moment: the body turns about the meeting point
    until its centre of mass lies on the vertical below it (a body hanging from one point,
    statics).  ``R`` is the least rotation doing that; the turn about the vertical is free
    (not held by the cables) and taken as zero.  Tensions: ``U t = -M g``; with more than three
    cables the least-norm solution, not checked for slack here (the point model's tension
    checks own that).
    """
    a = np.asarray(exits, float)
    b0 = np.asarray(meeting, float)
    O = np.asarray(point, float)
    c = np.asarray(center_of_mass, float)
    g = np.asarray(gravity, float)
    gn = float(np.linalg.norm(g))
    v = c - b0
    lever = float(np.linalg.norm(v))
    R = _rotation_between(v / lever, g / gn) if lever > 1e-12 else np.eye(3)
    p = O - R @ b0
    W = _structure(a, p, np.broadcast_to(R @ b0, a.shape))
    t = np.linalg.lstsq(W[:3], -mass * g, rcond=None)[0]
    residual = _unbalance(W, t, mass, g, R @ c)
    up = -g / gn
    return BodyEquilibrium(position=p, rotation=R, tensions=t, residual=residual, stable=lever > 1e-12,
                           min_curvature=lever, slack=(t < 0) if len(t) == 3 else np.zeros(len(t), bool),
                           height=float(up @ (p + R @ c)), starts=1, agree=1)


def _reduced_curvature(a, b, L, c, up, p, R, lam, G, h: float = 1e-4) -> float:
    """Least eigenvalue of the Lagrangian's Hessian on the taut cables' tangent space [m].

    Local coordinates ``(dp, dw)`` with ``R' = Exp(dw) R``; Hessian by central differences of
    ``Lag = e_up . (p + R c) - sum lam_i (L_i - |a_i - p - R b_i|)``; the tangent space is the
    null space of the taut cables' length gradients ``G`` (k, 6) (Nocedal and Wright 2006,
    thm. 12.6).
    """
    def lag(x):
        Rx = _exp(x[3:]) @ R
        px = p + x[:3]
        return float(up @ (px + Rx @ c) - lam @ (L - np.linalg.norm(a - px - b @ Rx.T, axis=1)))

    n = 6
    H = np.zeros((n, n))
    E = np.eye(n) * h
    for i in range(n):
        for j in range(i, n):
            H[i, j] = H[j, i] = (lag(E[i] + E[j]) - lag(E[i] - E[j]) - lag(-E[i] + E[j])
                                 + lag(-E[i] - E[j])) / (4 * h * h)
    if len(G):
        _, s, Vt = np.linalg.svd(G)
        rank = int(np.sum(s > 1e-9 * s[0]))
        Z = Vt[rank:].T
    else:
        Z = np.eye(n)
    if Z.shape[1] == 0:
        return math.inf  # fully constrained: no motion left
    return float(np.min(np.linalg.eigvalsh(Z.T @ H @ Z)))


# --------------------------------------------------------------------------------------
# a design: platform + payload + arm
# --------------------------------------------------------------------------------------
def has_spread_attachments(design) -> bool:
    """A point platform whose stated attachments do not all coincide."""
    b = np.asarray(getattr(design.platform, "built_attachments", ()), float)
    if design.platform.kind != "point" or b.size == 0:
        return False
    return bool(np.max(np.linalg.norm(b - b.mean(axis=0), axis=1)) > COINCIDE_TOL)


def _arm_frame(design, arm, joints, holding):
    """Masses (k,) [kg] and centres (k, 3) in the platform frame [m] of the arm's parts."""
    from .arm import arm_points, mass_list, mount_rotation

    m, c = mass_list(arm, arm_points(arm, np.asarray(joints, float)[None]), holding=holding)
    return m[0], np.asarray(arm.mount) + c[0] @ mount_rotation(arm).T


def _body(design, joints, holding) -> tuple[float, np.ndarray]:
    """Total mass [kg] and centre of mass in the platform frame [m] with the arm at ``joints``."""
    pl, pay = design.platform, design.payload
    parts = [(np.array([pl.mass]), np.array([pl.center_of_mass], float))]
    arm = design.sections.get("arm")
    if arm is None or arm.payload_source != "design":
        parts.append((np.array([pay.mass]), np.array([pay.center_of_mass], float)))
    if arm is not None:
        parts.append(_arm_frame(design, arm, joints, holding))
    m = np.concatenate([p[0] for p in parts])
    r = np.concatenate([p[1] for p in parts])
    M = float(m.sum())
    return M, (m[:, None] * r).sum(axis=0) / M


def _tip(arm, position, R, joints):
    from .arm import forward_kinematics, mount_rotation

    fk = forward_kinematics(arm, np.asarray(joints, float)[None])
    return position + R @ (np.asarray(arm.mount) + mount_rotation(arm) @ fk.tip[0])


@dataclass(frozen=True)
class SuspendedResult:
    """The real poses of a point platform, per commanded pose.

    labels : (N,) what each pose is; commanded : (N, 3) nominal platform position [m];
    joints : (N, n_joints) arm joints (levelling solved for the tilt) or (N, 0); holding : (N,)
    payload held; lengths : (N, m) commanded cable lengths [m]; position : (N, 3) equilibrium
    reference point [m]; rotation : (N, 3, 3); tilt : (N,) angle between the platform's up axis
    and the world's [rad]; shift : (N,) reference point's move [m]; tip_nominal, tip_actual :
    (N, 3) tool tip of the level and the real platform [m] (NaN without an arm); tip_error :
    (N,) [m] (without an arm:
    the reference point's shift); tensions : (N, m) [N]; slack : (N, m); residual : (N,) force
    and moment balance residual per unit weight; stable : (N,); attachments : (m, 3) [m];
    spread : the attachments are separate (False: they meet at one point, a pendulum).
    """

    design: object
    labels: tuple[str, ...]
    commanded: np.ndarray
    joints: np.ndarray
    holding: np.ndarray
    lengths: np.ndarray
    position: np.ndarray
    rotation: np.ndarray
    tilt: np.ndarray
    shift: np.ndarray
    tip_nominal: np.ndarray
    tip_actual: np.ndarray
    tip_error: np.ndarray
    tensions: np.ndarray
    slack: np.ndarray
    residual: np.ndarray
    stable: np.ndarray
    attachments: np.ndarray
    spread: bool = True

    @property
    def worst(self) -> int:
        """Index of the pose with the largest tool-tip error (a pose not found counts as worst)."""
        return int(np.argmax(np.where(np.isnan(self.tip_error), np.inf, self.tip_error)))

    def summary(self) -> list[str]:
        d = self.design
        k = self.worst
        how = _METHOD if self.spread else _PENDULUM
        lines = [f"suspended platform: real pose from {how}; {len(self.labels)} pose"
                 f"{'s' if len(self.labels) != 1 else ''}",
                 f"  largest tilt {math.degrees(float(np.max(self.tilt))):.2f} deg, largest tool-tip error "
                 f"{1e3 * float(self.tip_error[k]):.1f} mm at {self.labels[k]}",
                 "  tilt [deg]  shift [mm]  tip error [mm]  tensions [N]          pose"]
        for i, lab in enumerate(self.labels):
            ten = ", ".join(f"{t:.1f}" + (" slack" if s else "") for t, s in zip(self.tensions[i], self.slack[i]))
            lines.append(f"  {math.degrees(self.tilt[i]):10.2f}  {1e3 * self.shift[i]:10.1f}  "
                         f"{1e3 * self.tip_error[i]:14.1f}  {ten:<21} {lab}")
        if np.any(self.slack):
            i = int(np.argmax(self.slack.any(axis=1)))
            names = [n for n, s in zip(d.cable_names, self.slack[i]) if s]
            lines.append(f"  slack cable at {self.labels[i]}: {', '.join(names)} (the platform hangs on the others)")
        if not np.all(self.stable):
            lines.append(f"  {int((~self.stable).sum())} pose(s) with no stable equilibrium found")
        lines.append(f"  checked by force and moment balance: largest residual {float(np.max(self.residual)):.1e} "
                     "of the weight")
        return lines

    def figure(self):
        """Tilt and tool-tip error per pose (bars), against the accuracy requirement."""
        import plotly.graph_objects as go
        from plotly.subplots import make_subplots

        fig = make_subplots(rows=1, cols=2, subplot_titles=("platform tilt [deg]", "tool-tip error [mm]"))
        x = np.arange(1, len(self.labels) + 1)  # pose numbers (labels may repeat); the label on hover
        for col, y, name, colour in ((1, np.degrees(self.tilt), "tilt [deg]", "#1f77b4"),
                                     (2, 1e3 * self.tip_error, "tip error [mm]", "#d62728")):
            fig.add_trace(go.Bar(x=x, y=y, name=name, marker_color=colour, hovertext=list(self.labels)), row=1, col=col)
            fig.update_xaxes(title_text="pose", row=1, col=col)
        req = required_accuracy(self.design)
        if req is not None:
            fig.add_hline(y=1e3 * req, line_dash="dash", line_color="#333333", row=1, col=2,
                          annotation_text="required accuracy")
        fig.update_layout(title="Suspended platform: tilt under the arm's offset weight", showlegend=False,
                          margin=dict(l=40, r=10, t=60, b=80))
        return fig


def meeting_attachments(design) -> np.ndarray:
    """The attachments the real pose is computed with (m, 3) [m]: the stated ``[platform]
    attachments``, else every cable at the platform's reference point."""
    b = np.asarray(design.platform.built_attachments, float)
    return b if b.size else np.zeros((design.m, 3))


def suspended_poses(design, positions, *, joints=None, holding=False, labels=None,
                    controller: str = "point", starts: int = 5, max_level_iter: int = 30) -> SuspendedResult:
    """The real pose of the platform at each commanded position, the arm at ``joints``.

    Parameters
    ----------
    design : a design with a point platform (attachments stated or taken to coincide).
    positions : (N, 3) nominal platform positions the controller commands [m].
    joints : (N, n_joints) or (n_joints,) arm joint values [rad or m]; default home.  The
        levelling joints (if any) are solved for the tilt found, within their limits.
    holding : bool or (N,) the gripper holds the payload.
    labels : names of the poses for the summary.
    controller : the cable lengths the winches hold: ``"point"`` (``|a_i - p|``, the point model,
        as cablekit's kinematics and the task plan write them) or ``"level"``
        (``|a_i - p - b_i|``, a controller that knows the attachments and aims the level platform).

    Notes
    -----
    Spread attachments: :func:`hanging_equilibrium` (least potential energy).  Coinciding
    attachments: :func:`pendulum_equilibrium` (closed form).
    """
    if design.platform.kind != "point":
        raise ValueError("the suspended-platform model is for point platforms (a rigid one is held by its cables)")
    b = meeting_attachments(design)
    spread = has_spread_attachments(design)
    P = np.atleast_2d(np.asarray(positions, float))
    N = len(P)
    if P.shape[1] != 3 or not np.all(np.isfinite(P)):
        raise ValueError(f"positions must be finite, shape (N, 3); got shape {P.shape}")
    arm = design.sections.get("arm")
    n_j = arm.n if arm is not None else 0
    if arm is not None:
        J = np.array(np.broadcast_to(arm.home if joints is None else np.asarray(joints, float), (N, n_j)), float)
    else:
        J = np.zeros((N, 0))
    hold = np.broadcast_to(np.asarray(holding, bool), (N,))
    labels = tuple(labels) if labels is not None else tuple(f"pose {k + 1}" for k in range(N))
    a = design.exits
    up = -np.asarray(design.frame.gravity_direction, float)
    if controller not in ("point", "level"):
        raise ValueError(f"controller must be 'point' or 'level', got {controller!r}")
    L = level_lengths(a, b if controller == "level" else np.zeros_like(b), P)
    lev = list(arm.levelling) if arm is not None else []

    def levelled(q, R):
        from .arm import levelling_angles

        q = q.copy()
        q[lev] = np.clip(levelling_angles(arm, R[None], up).angles[0], arm.lower[lev], arm.upper[lev])
        return q

    out = {k: [] for k in ("position", "rotation", "tensions", "slack", "residual", "stable", "tip_n", "tip_a")}
    for k in range(N):
        q = J[k].copy()
        R = np.eye(3)
        for _ in range(max_level_iter if lev else 1):
            if lev:
                q = levelled(q, R)
            M, c = _body(design, q, bool(hold[k]))
            if spread:
                try:
                    eq = hanging_equilibrium(a, b, L[k], mass=M, center_of_mass=c, gravity=design.gravity,
                                             guess=P[k], starts=starts)
                except ValueError:  # the lengths cannot hold the body: no pose, judged as a failure
                    eq = _no_pose(len(a))
                    break
            else:
                O = P[k] + b[0] if controller == "level" else P[k]  # where the lengths put the meeting point
                eq = pendulum_equilibrium(a, b[0], O, mass=M, center_of_mass=c, gravity=design.gravity)
            moved = float(np.linalg.norm(eq.rotation - R))
            R = eq.rotation
            if moved < 1e-8:  # rad: the tilt has settled
                break
        else:
            if lev and moved > 1e-6:  # the levelling and the tilt did not settle: no pose to trust
                eq = replace(eq, stable=False)
        J[k] = q
        for key, v in (("position", eq.position), ("rotation", eq.rotation), ("tensions", eq.tensions),
                       ("slack", eq.slack), ("residual", eq.residual), ("stable", eq.stable)):
            out[key].append(v)
        if arm is not None:
            q_level = levelled(J[k], np.eye(3)) if lev else J[k]
            out["tip_n"].append(_tip(arm, P[k], np.eye(3), q_level))
            out["tip_a"].append(_tip(arm, eq.position, eq.rotation, J[k]))
        else:
            out["tip_n"].append(np.full(3, np.nan))
            out["tip_a"].append(np.full(3, np.nan))
    pos = np.array(out["position"])
    Rs = np.array(out["rotation"])
    tilt = np.arccos(np.clip(np.einsum("nij,j,i->n", Rs, up, up), -1.0, 1.0))
    shift = np.linalg.norm(pos - P, axis=1)
    tn, ta = np.array(out["tip_n"]), np.array(out["tip_a"])
    err = np.linalg.norm(ta - tn, axis=1) if arm is not None else shift
    return SuspendedResult(design=design, labels=labels, commanded=P, joints=J, holding=np.array(hold), lengths=L,
                           position=pos, rotation=Rs, tilt=tilt, shift=shift, tip_nominal=tn, tip_actual=ta,
                           tip_error=err, tensions=np.array(out["tensions"]), slack=np.array(out["slack"]),
                           residual=np.array(out["residual"]), stable=np.array(out["stable"]), attachments=b,
                           spread=spread)


def _joint_samples(arm, *, cap: int = 2000) -> tuple[np.ndarray, list[str]]:
    """Arm joint sets for the design check: every combination of each non-levelling joint's
    limits, home and (revolute joints) the multiples of 45 deg between them (the arm reaching
    out in every direction); limits and home only when that would exceed ``cap`` sets."""
    import itertools

    free = [k for k, j in enumerate(arm.joints) if j.role != "levelling"]

    def values(k, fine):
        j = arm.joints[k]
        v = {j.lower, arm.home[k], j.upper}
        if fine and j.revolute:
            v |= {s * math.pi / 4 for s in range(-8, 9) if j.lower < s * math.pi / 4 < j.upper}
        return sorted(v)

    grid = [values(k, True) for k in free]
    if math.prod(len(g) for g in grid) > cap:
        grid = [values(k, False) for k in free]
    rows, names = [arm.home.copy()], ["arm at home"]
    for combo in itertools.product(*grid):
        q = arm.home.copy()
        q[free] = combo
        rows.append(q)
        names.append("arm " + ", ".join(f"{arm.joints[k].name} {arm.joints[k].display(v)}"
                                        for k, v in zip(free, combo)))
    return np.array(rows), names


def design_poses(design, *, top: int = 6, starts: int = 3) -> SuspendedResult:
    """The design-level sweep: the home position and the task box centre with the arm at its
    home and at the ``top`` joint sets (of :func:`_joint_samples`, payload held and not) that
    move the centre of mass furthest off the vertical through the attachments' centre, then
    the worst of those and the first (arm at home, payload held) at the task box's corners."""
    arm = design.sections.get("arm")
    home = np.asarray(design.home_pose[:3], float)
    places = [("home", home)]
    t = design.task
    corners = []
    if t.box_lower is not None:
        lo, hi = np.asarray(t.box_lower, float), np.asarray(t.box_upper, float)
        places.append(("task box centre", 0.5 * (lo + hi)))
        pts = [np.array([x, y, z]) for x in (lo[0], hi[0]) for y in (lo[1], hi[1]) for z in (lo[2], hi[2])]
        corners = [(f"task box corner ({', '.join(f'{v:.2f}' for v in c)}) m", c) for c in pts]
    elif t.points:
        places += [(f"task point {k + 1}", np.asarray(p, float)) for k, p in enumerate(t.points[:8])]
    up = -np.asarray(design.frame.gravity_direction, float)
    b_mid = meeting_attachments(design).mean(axis=0)
    cases = [(None, "no arm", False)]
    if arm is not None:
        rows, names = _joint_samples(arm)
        scored = []
        for q, name in zip(rows, names):
            for hold in (False, True):
                M, c = _body(design, q, hold)
                v = c - b_mid
                lever = float(np.linalg.norm(v - (v @ up) * up))
                scored.append((lever, q, name + (", payload held" if hold else ""), hold))
        scored.sort(key=lambda s: -s[0])
        cases = [(rows[0], names[0] + ", payload held", True)] + [(q, n, h) for _, q, n, h in scored[:top]]
    labels, P, Js, H = [], [], [], []
    for pname, p in places:
        for q, cname, hold in cases:
            labels.append(f"{pname}, {cname}")
            P.append(p)
            Js.append(q if q is not None else np.zeros(0))
            H.append(hold)
    res = suspended_poses(design, np.array(P), joints=np.array(Js) if arm is not None else None,
                          holding=np.array(H), labels=labels, starts=starts)
    # the corners with the worst arm pose found and with the first case (arm at home, payload
    # held): separate attachments tilt the platform off-centre even with the arm at home
    for k in dict.fromkeys([res.worst, 0]) if corners else ():
        more = suspended_poses(design, np.array([c for _, c in corners]),
                               joints=res.joints[k] if arm is not None else None, holding=bool(res.holding[k]),
                               labels=[f"{n}, {labels[k].split(', ', 1)[1]}" for n, _ in corners], starts=starts)
        res = _concat(res, more)
    return res


def _concat(r1: SuspendedResult, r2: SuspendedResult) -> SuspendedResult:
    from dataclasses import fields

    vals = {}
    for f in fields(SuspendedResult):
        if f.name in ("design", "attachments", "spread"):
            continue
        v1, v2 = getattr(r1, f.name), getattr(r2, f.name)
        vals[f.name] = v1 + v2 if f.name == "labels" else np.concatenate([v1, v2])
    return replace(r1, **vals)


def required_accuracy(design) -> float | None:
    """``[errors] required_accuracy`` [m], or None when the design gives none."""
    if design.sections.get("errors") is None:
        return None
    from .accuracy import error_budget

    return error_budget(design).required_accuracy


def tilt_matters(design) -> bool:
    """Point platforms whose tilt can matter: separate attachments, an arm, or a centre of mass
    off the vertical through the meeting point."""
    if design.platform.kind != "point":
        return False
    if has_spread_attachments(design) or design.sections.get("arm") is not None:
        return True
    up = -np.asarray(design.frame.gravity_direction, float)
    b0 = meeting_attachments(design)[0]
    M, c = _body(design, None, False)
    v = c - b0
    return bool(np.linalg.norm(v - (v @ up) * up) > COINCIDE_TOL or v @ up > 0)


def design_checks(design, *, suspended: SuspendedResult | None = None) -> list[Check]:
    """The real tilt of a point platform against the accuracy needed.

    Judged on the tool-tip error the tilt causes, against ``[errors] required_accuracy`` (fail
    above it, warn above half of it); without a required accuracy, on the tilt against the
    practice limit ``platform_tilt_max``.  A slack cable at the real pose fails.  Empty when
    nothing can tilt the platform (no arm, centre of mass below the meeting point; see
    :func:`design_assumptions`).
    """
    if not tilt_matters(design):
        return []
    from .practice import PRACTICE, practice_value

    res = design_poses(design) if suspended is None else suspended
    how = _METHOD if res.spread else _PENDULUM
    k = res.worst
    where = f"worst at {res.labels[k]}: tilt {math.degrees(float(res.tilt[k])):.2f} deg"
    req = required_accuracy(design)
    out = []
    if req is not None:
        value = 1e3 * float(res.tip_error[k])
        margin, status = judge(value, 1e3 * req, upper=True, warn_limit=SUSPENDED_WARN_SHARE * 1e3 * req)
        out.append(Check(key="suspended_tip_error", subject="suspended platform",
                         title="tool-tip error at the real platform pose (tilt and shift)",
                         value=value, limit=1e3 * req, unit="mm", margin=margin, status=status,
                         source=f"required_accuracy in the design's [errors] table; warn above "
                                f"{SUSPENDED_WARN_SHARE:.0%} of it: common practice, no source",
                         detail=f"{where}; pose from {how}"))
    else:
        lim = practice_value("platform_tilt_max", design.practice)
        i = int(np.argmax(res.tilt))
        value = math.degrees(float(res.tilt[i]))
        margin, status = judge(value, math.degrees(lim), upper=True)
        out.append(Check(key="suspended_tilt", subject="suspended platform",
                         title="platform tilt under the arm and payload weight", value=value,
                         limit=math.degrees(lim), unit="deg", margin=margin, status=status,
                         source=PRACTICE["platform_tilt_max"].source,
                         detail=f"worst at {res.labels[i]} (no required_accuracy in [errors] to judge the tool tip); "
                                f"pose from {how}"))
    slack = res.slack.any(axis=1)
    if slack.any() or not np.all(res.stable):
        i = int(np.argmax(slack)) if slack.any() else int(np.argmin(res.stable))
        names = [n for n, s in zip(design.cable_names, res.slack[i]) if s]
        why = (f"cable {', '.join(names)} goes slack" if slack.any() else "no stable equilibrium found")
        n_bad = float(np.sum(slack | ~res.stable))
        out.append(Check(key="suspended_taut", subject="suspended platform",
                         title="every cable taut and the pose stable at the real (tilted) pose", value=n_bad,
                         limit=0.0, unit="poses", margin=-n_bad, status="fail",
                         source="cables only pull (statics); pose from " + how, detail=f"{why} at {res.labels[i]}"))
    return out


def design_assumptions(design, **options) -> list[str]:
    """What the verdicts on a point platform rest on (printed on the review sheet)."""
    if design.platform.kind != "point":
        return []
    if has_spread_attachments(design):
        return ["The platform hangs from separate attachments and is under-constrained: its real pose (tilt and "
                "shift under the weight of the platform, the arm at its pose and the payload) is the "
                "least-potential-energy pose for the commanded cable lengths (Carricato and Merlet 2013), checked by "
                "force and moment balance. The winches are taken to hold the point model's lengths to the nominal "
                "position (as the task plan writes them); the arm's joints are held; levelling joints re-level the "
                "arm base (the controller is taken to know the platform's tilt).",
                "The workspace, tension and drivetrain checks use the point model (cables meeting at the platform's "
                "reference point); the suspended-platform check reports the tensions at the real pose."]
    if not tilt_matters(design):
        return ["The platform is taken to stay level: its cables meet it at one point and its centre of mass lies "
                "on the vertical through that point (not above it), so nothing turns it. An offset load (an arm "
                "reaching out) would swing it like a pendulum; add the [arm] or state [platform] attachments to have "
                "the tilt computed."]
    return ["The cables meet the platform at one point, so they cannot resist a moment: the platform hangs like a "
            "pendulum from that point and tilts until its centre of mass (with the arm at its pose and the payload) "
            "lies below it. The point model's positions and tensions still hold; the tilt and the tool-tip error it "
            "causes are computed in closed form; levelling joints re-level the arm base (the controller is taken to "
            "know the platform's tilt). The platform's turn about the vertical is not held by the cables and is "
            "taken as zero."]


def latex_equations(design) -> dict[str, str]:
    """The equations of the real pose of a point platform (empty for a rigid one)."""
    if design.platform.kind != "point":
        return {}
    if has_spread_attachments(design):
        return {
            "real pose (least potential energy)": r"\min_{\mathbf{p},R}\ -M\,\mathbf{g}\cdot(\mathbf{p} + "
                                                  r"R\,\mathbf{c})\quad \text{s.t.}\quad \lVert \mathbf{a}_i - "
                                                  r"\mathbf{p} - R\,\mathbf{b}_i \rVert \le L_i",
            "commanded lengths (point model)": r"L_i = \lVert \mathbf{a}_i - \mathbf{p}_c \rVert",
            "check: force and moment balance": r"W\,\mathbf{t} + \mathbf{w} = \mathbf{0},\quad \mathbf{t} \ge 0",
        }
    return {
        "real pose (a pendulum about the meeting point)": r"R\,(\mathbf{c} - \mathbf{b}_0) = \lambda\,\mathbf{g},"
                                                          r"\quad \lambda > 0",
        "tool-tip error": r"e = \lVert \mathbf{p}_{tip}(R) - \mathbf{p}_{tip}(I) \rVert",
    }
