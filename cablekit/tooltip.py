"""Platform and arm together: the tool tip, levelling, pivoting about the tip, the tip workspace.

The tool tip in the world is ``p + R_p (m + R_m t(q))`` with ``p, R_p`` the platform pose,
``m, R_m`` the arm's mount in the platform frame and ``t(q)`` the tip of the DH chain in the
arm's base frame (:mod:`cablekit.arm`).  Levelling joints keep the base level whatever the
platform's tilt (:func:`cablekit.arm.levelling_angles`).

**Pivoting.** For a wanted tip position and tool orientation (wrist roll and tilt, relative to
the levelled base, i.e. to the floor up to the platform's yaw) the joint values are fixed, so
the platform position follows in closed form, ``p = tip - R_p (m + R_m t(q))``: turning or
tilting the wrist while the platform moves this way keeps the tip where it is.

**Loads.** The arm's links, gripper and the payload it holds hang at their actual positions:
their weight adds to the platform's force and, on a rigid platform, their offset adds the
moment ``sum r_k x m_k g`` about the platform's reference point.

**Point platforms** are taken level here (``R_p = I``).  The moment of the arm's offset weight
tilts a real one (it hangs like a pendulum from the point where its cables meet, or from
separate attachments); :mod:`cablekit.suspended` finds that tilt and the tool-tip error it
causes, and the task check and the review sheet judge it.

SI inside: positions [m], angles [rad], masses [kg], forces [N], moments [N*m].
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .arm import LEVEL_TOLERANCE, Arm, arm_points, as_joints, forward_kinematics, levelling_angles, mass_list, mount_rotation
from .kinematics import as_poses, structure_matrix
from .statics import TensionResult, rotation_matrices, solve_tensions, tension_limits, tensions_at

__all__ = [
    "design_arm",
    "platform_rotations",
    "TipPose",
    "tip_pose",
    "arm_world_polyline",
    "inside_frame",
    "PivotResult",
    "solve_platform",
    "pivot",
    "load_wrench",
    "tip_tensions",
    "TipWorkspace",
    "tip_workspace",
    "latex_equations",
]


def design_arm(design) -> Arm:
    """The design's arm; ``ValueError`` naming the missing section when there is none."""
    arm = design.sections.get("arm")
    if arm is None:
        raise ValueError(f"design {design.meta.name!r} has no [arm] section; add one to use the tool tip")
    return arm


def platform_rotations(design, poses) -> np.ndarray:
    """Platform orientations (N, 3, 3): identity for a point platform (taken level; its real
    tilt is :func:`cablekit.suspended.suspended_poses`)."""
    q = as_poses(design, poses)
    if design.dof == 3:
        return np.broadcast_to(np.eye(3), (q.shape[0], 3, 3)).copy()
    return rotation_matrices(q[:, 3:])


def _up(design) -> np.ndarray:
    return -np.asarray(design.frame.gravity_direction, float)


@dataclass(frozen=True)
class TipPose:
    """Tool tip in the world: position (N, 3) [m], last-frame rotation (N, 3, 3), and the arm
    base origin (N, 3) [m]."""

    tip: np.ndarray
    rotation: np.ndarray
    base: np.ndarray


def tip_pose(design, platform_poses, joints) -> TipPose:
    """The tool tip for platform poses (N, n) and joint values (N, n_joints)."""
    arm = design_arm(design)
    q = as_poses(design, platform_poses)
    j = np.broadcast_to(as_joints(arm, joints), (q.shape[0], arm.n))
    Rp = platform_rotations(design, q)
    Rm = mount_rotation(arm)
    fk = forward_kinematics(arm, j)
    base = q[:, :3] + Rp @ np.asarray(arm.mount)
    tip = base + np.einsum("nij,jk,nk->ni", Rp, Rm, fk.tip)
    return TipPose(tip=tip, rotation=Rp @ Rm @ fk.rotation, base=base)


def arm_world_polyline(design, platform_poses, joints) -> np.ndarray:
    """The arm's centre line in the world (N, n + 3, 3) [m]: platform reference point, arm
    base, every joint-frame origin, tool tip."""
    arm = design_arm(design)
    q = as_poses(design, platform_poses)
    j = np.broadcast_to(as_joints(arm, joints), (q.shape[0], arm.n))
    Rp = platform_rotations(design, q)
    Rm = mount_rotation(arm)
    line = arm_points(arm, j).polyline()  # base frame, starting at the base origin
    world = q[:, None, :3] + np.einsum("nij,nkj->nki", Rp, np.asarray(arm.mount) + line @ Rm.T)
    return np.concatenate([q[:, None, :3], world], axis=1)


def inside_frame(design, positions, *, tol: float = 1e-9) -> np.ndarray:
    """Platform positions inside the frame (N,) bool: within the exits' bounding box across
    gravity, and on the gravity side of the highest exit along it (a suspended platform may
    hang below every exit)."""
    p = np.atleast_2d(np.asarray(positions, float))
    lo, hi = design.exits.min(axis=0), design.exits.max(axis=0)
    outside = (p < lo - tol) | (p > hi + tol)
    g = np.asarray(design.frame.gravity_direction, float)
    axis = int(np.argmax(np.abs(g)))
    if g[axis] < 0:
        outside[:, axis] = p[:, axis] > hi[axis] + tol
    elif g[axis] > 0:
        outside[:, axis] = p[:, axis] < lo[axis] - tol
    return ~np.any(outside, axis=1)


# --------------------------------------------------------------------------------------
# pivoting: the platform position that puts the tip where it is wanted
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PivotResult:
    """Platform poses that put the tool tip at ``tips``.

    tips : (N, 3) wanted tip [m]; platform_poses : (N, n); joints : (N, n_joints) every joint
    (levelling solved, wrist set, reach joints as given or at home); levelling_residual : (N,)
    tilt of the levelled base [rad]; joints_ok : (N,) all joints within their limits and the
    base level; first_bad_joint : (N,) index of the first joint beyond its limits (-1: none);
    inside_frame : (N,) the platform position lies inside the frame; achieved : (N, 3) the tip
    recomputed from the solved poses [m].
    """

    design: object
    tips: np.ndarray
    platform_poses: np.ndarray
    joints: np.ndarray
    levelling_residual: np.ndarray
    joints_ok: np.ndarray
    first_bad_joint: np.ndarray
    inside_frame: np.ndarray
    achieved: np.ndarray

    @property
    def ok(self) -> np.ndarray:
        """Reachable: joints within limits, base level, platform inside the frame (N,)."""
        return self.joints_ok & self.inside_frame

    @property
    def tip_error(self) -> np.ndarray:
        """Distance between the wanted and the achieved tip (N,) [m]."""
        return np.linalg.norm(self.achieved - self.tips, axis=1)

    def reason(self, k: int) -> str | None:
        """Why pose ``k`` is out of reach, or None."""
        arm = design_arm(self.design)
        b = int(self.first_bad_joint[k])
        if b >= 0:
            j = arm.joints[b]
            return (f"unreachable: joint {j.name} would need {j.display(self.joints[k, b])}, "
                    f"limits {j.display(j.lower)} .. {j.display(j.upper)}")
        if not self.joints_ok[k]:
            return (f"unreachable: the levelling joints leave the arm base tilted by "
                    f"{np.degrees(self.levelling_residual[k]):.2f} deg")
        if not self.inside_frame[k]:
            p = self.platform_poses[k, :3]
            return f"unreachable: the platform would be at ({p[0]:.3f}, {p[1]:.3f}, {p[2]:.3f}) m, outside the frame"
        return None

    def summary(self) -> list[str]:
        n = len(self.tips)
        lines = [f"{n} tip pose{'s' if n != 1 else ''}: {int(self.ok.sum())} reachable; largest tip error "
                 f"{self.tip_error.max():.2e} m"]
        lines += [f"  pose {k}: {self.reason(k)}" for k in np.flatnonzero(~self.ok)[:10]]
        return lines

    def figure(self):
        """The platform path around the tip(s), with the arm drawn at a few poses."""
        import plotly.graph_objects as go

        P = self.platform_poses[:, :3]
        fig = go.Figure()
        fig.add_trace(go.Scatter3d(x=P[:, 0], y=P[:, 1], z=P[:, 2], mode="lines+markers", name="platform",
                                   marker=dict(size=2, color="#1f77b4"), line=dict(color="#1f77b4")))
        fig.add_trace(go.Scatter3d(x=self.tips[:, 0], y=self.tips[:, 1], z=self.tips[:, 2], mode="markers",
                                   name="tool tip", marker=dict(size=5, color="#d62728")))
        show = np.unique(np.linspace(0, len(P) - 1, min(len(P), 7)).astype(int))
        lines = arm_world_polyline(self.design, self.platform_poses[show], self.joints[show])
        for k, line in zip(show, lines):
            fig.add_trace(go.Scatter3d(x=line[:, 0], y=line[:, 1], z=line[:, 2], mode="lines",
                                       line=dict(color="#555555", width=4), name=f"arm at pose {k}",
                                       showlegend=bool(k == show[0])))
        fig.update_layout(title="Pivoting about the tool tip", margin=dict(l=0, r=0, t=40, b=0),
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"))
        return fig


def _column(values, N: int, what: str) -> np.ndarray:
    v = np.broadcast_to(np.asarray(values, float), (N,)).copy()
    if not np.all(np.isfinite(v)):
        raise ValueError(f"{what} must be finite")
    return v


def solve_platform(design, tips, *, roll=None, tilt=None, joints: Mapping[str, object] | None = None,
                   orientation=None) -> PivotResult:
    """Platform poses that put the tool tip at ``tips`` with the wanted tool orientation.

    Parameters
    ----------
    tips : (N, 3) tool-tip positions in the world [m].
    roll, tilt : (N,) or scalar wrist roll and tilt [rad] (the joints with roles wrist_roll and
        wrist_tilt); default: their home values.
    joints : {name: (N,) values} for reach joints [rad or m]; the others stay at home.
    orientation : (N, 3) or (3,) platform roll, pitch, yaw [rad] for a rigid platform; default
        the home orientation.  The levelling joints are solved to keep the arm base level.

    Notes
    -----
    With the joint values fixed the tip offset from the platform is fixed, so the platform
    position is ``p = tip - R_p (m + R_m t(q))``: exact, no iteration.
    """
    arm = design_arm(design)
    T = np.atleast_2d(np.asarray(tips, float))
    if T.ndim != 2 or T.shape[1] != 3 or not np.all(np.isfinite(T)):
        raise ValueError(f"tips must be finite positions of shape (N, 3), got shape {T.shape}")
    N = T.shape[0]
    q = np.tile(arm.home, (N, 1))
    for role, value in (("wrist_roll", roll), ("wrist_tilt", tilt)):
        if value is None:
            continue
        k = arm.role_index(role)
        if k is None:
            raise ValueError(f"the arm '{arm.name}' has no {role} joint")
        q[:, k] = _column(value, N, role.replace("_", " "))
    for name, value in (joints or {}).items():
        if name not in arm.names:
            raise ValueError(f"unknown joint {name!r}; the arm's joints are {', '.join(arm.names)}")
        k = arm.names.index(name)
        if arm.joints[k].role != "reach":
            raise ValueError(f"joint {name!r} has role {arm.joints[k].role}; only reach joints are set directly")
        q[:, k] = _column(value, N, f"joint {name}")
    if design.dof == 3:
        if orientation is not None and np.any(np.asarray(orientation, float) != 0):
            raise ValueError("a point platform has no orientation")
        ori = np.zeros((N, 0))
        Rp = np.broadcast_to(np.eye(3), (N, 3, 3)).copy()
    else:
        ori = np.broadcast_to(np.asarray(design.home_pose[3:] if orientation is None else orientation, float),
                              (N, 3)).copy()
        if not np.all(np.isfinite(ori)):
            raise ValueError("platform orientations must be finite")
        Rp = rotation_matrices(ori)
    lev = levelling_angles(arm, Rp, _up(design))
    L = len(arm.levelling)
    q[:, :L] = lev.angles
    fk = forward_kinematics(arm, q)
    offset = np.einsum("nij,nj->ni", Rp, np.asarray(arm.mount) + fk.tip @ mount_rotation(arm).T)
    poses = np.concatenate([T - offset, ori], axis=1)
    beyond = (q < arm.lower - 1e-12) | (q > arm.upper + 1e-12)
    first_bad = np.where(beyond.any(axis=1), np.argmax(beyond, axis=1), -1)
    joints_ok = ~beyond.any(axis=1) & (lev.residual <= LEVEL_TOLERANCE)
    achieved = tip_pose(design, poses, q).tip
    return PivotResult(design=design, tips=T, platform_poses=poses, joints=q, levelling_residual=lev.residual,
                       joints_ok=joints_ok, first_bad_joint=first_bad, inside_frame=inside_frame(design, poses[:, :3]),
                       achieved=achieved)


def pivot(design, tip, *, roll=None, tilt=None, joints=None, orientation=None) -> PivotResult:
    """Turn and tilt the tool about a fixed tip: the platform poses for every (roll, tilt) pair.

    ``roll`` and ``tilt`` broadcast against each other (e.g. a sweep of one with the other
    fixed); ``tip`` is one position (3,) [m].
    """
    r = None if roll is None else np.asarray(roll, float)
    t = None if tilt is None else np.asarray(tilt, float)
    shapes = [np.shape(x) for x in (r, t) if x is not None]
    N = int(np.prod(np.broadcast_shapes(*shapes))) if shapes else 1
    tips = np.broadcast_to(np.asarray(tip, float).reshape(1, 3), (N, 3))
    return solve_platform(design, tips, roll=None if r is None else np.broadcast_to(r, (N,)),
                          tilt=None if t is None else np.broadcast_to(t, (N,)), joints=joints,
                          orientation=orientation)


# --------------------------------------------------------------------------------------
# loads: the arm's weight and offset on the platform
# --------------------------------------------------------------------------------------
def load_wrench(design, platform_poses, joints, *, holding) -> np.ndarray:
    """External wrench on the platform (N, n) [N, N*m] with the arm at its actual pose.

    Counts the platform, the design's payload (unless the gripper holds it), the arm's links
    and gripper, and the payload at the tool tip where ``holding`` ((N,) bool or bool) is True.
    The moment (rigid platforms) is taken about the platform's reference point.
    """
    arm = design_arm(design)
    q = as_poses(design, platform_poses)
    N = q.shape[0]
    j = np.broadcast_to(as_joints(arm, joints), (N, arm.n))
    Rp = platform_rotations(design, q)
    Rm = mount_rotation(arm)
    masses, centres = mass_list(arm, arm_points(arm, j), holding=holding)  # base frame
    r = np.einsum("nij,nkj->nki", Rp, np.asarray(arm.mount) + centres @ Rm.T)  # offsets in the world
    own = [(design.platform.mass, design.platform.center_of_mass)]
    if arm.payload_source != "design":
        own.append((design.payload.mass, design.payload.center_of_mass))
    m_own = np.array([m for m, _ in own])
    r_own = np.einsum("nij,kj->nki", Rp, np.array([c for _, c in own], float))
    m_all = np.concatenate([np.broadcast_to(m_own, (N, len(own))), masses], axis=1)
    r_all = np.concatenate([r_own, r], axis=1)
    g = design.gravity
    w = np.zeros((N, design.dof))
    w[:, :3] = m_all.sum(axis=1)[:, None] * g
    if design.dof == 6:
        w[:, 3:] = np.cross((m_all[..., None] * r_all).sum(axis=1), g)
    return w


def tip_tensions(design, platform_poses, joints, *, holding, method: str = "auto") -> TensionResult:
    """Cable tensions with the arm at its actual pose (see :func:`load_wrench`).

    Solves with :func:`cablekit.statics.solve_tensions` (the fast exact solver) for the arm's
    actual load wrench instead of the design-level lumped one.
    """
    q = as_poses(design, platform_poses)
    lim = tension_limits(design)
    return solve_tensions(structure_matrix(design, q), load_wrench(design, q, joints, holding=holding), lim.t_min,
                          lim.t_max, method=method)


# --------------------------------------------------------------------------------------
# the combined workspace: where the tip can go with feasible tensions
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class TipWorkspace:
    """Where the tool tip can go.

    tips : (P, 3) sampled tip positions [m]; wrist : (K, 2) tool orientations tried (wrist
    roll, tilt) [rad]; platform_poses : (P, K, n); reach_ok : (P, K) joints within limits and
    platform inside the frame; feasible : (P, K) reach_ok and feasible tensions; margin :
    (P, K) tension margin [N]; platform_only : (P,) the design-level answer with the tip taken
    as the platform point and the arm lumped (what a plain workspace map shows).
    """

    tips: np.ndarray
    wrist: np.ndarray
    platform_poses: np.ndarray
    reach_ok: np.ndarray
    feasible: np.ndarray
    margin: np.ndarray
    platform_only: np.ndarray
    holding: bool

    @property
    def reachable(self) -> np.ndarray:
        """Tip positions feasible for at least one tool orientation (P,)."""
        return self.feasible.any(axis=1)

    @property
    def dexterous(self) -> np.ndarray:
        """Tip positions feasible for every tool orientation tried (P,)."""
        return self.feasible.all(axis=1)

    def summary(self) -> list[str]:
        P, K = self.feasible.shape
        pct = lambda m: 100.0 * np.mean(m)  # noqa: E731
        return [f"tool-tip workspace: {P} tip positions x {K} tool orientation{'s' if K != 1 else ''}, payload "
                f"{'held' if self.holding else 'not held'}",
                f"  reachable with feasible tensions (some orientation): {int(self.reachable.sum())} ({pct(self.reachable):.1f} %)",
                f"  at every orientation tried: {int(self.dexterous.sum())} ({pct(self.dexterous):.1f} %)",
                f"  out of the arm's reach or the frame: {int((~self.reach_ok.any(axis=1)).sum())}",
                f"  for comparison, the platform point itself is feasible at {pct(self.platform_only):.1f} % "
                "of these positions (arm lumped)"]

    def figure(self):
        """3-D scatter of tip positions: every orientation, some, none."""
        import plotly.graph_objects as go

        fig = go.Figure()
        groups = [("every orientation", self.dexterous, "#2ca02c"),
                  ("some orientations", self.reachable & ~self.dexterous, "#ff7f0e"),
                  ("none", ~self.reachable, "#d62728")]
        for name, mask, colour in groups:
            t = self.tips[mask]
            fig.add_trace(go.Scatter3d(x=t[:, 0], y=t[:, 1], z=t[:, 2], mode="markers", name=name,
                                       marker=dict(size=2.5, color=colour)))
        fig.update_layout(title="Where the tool tip can go (feasible tensions, arm weight and offset counted)",
                          margin=dict(l=0, r=0, t=40, b=0),
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"))
        return fig


def tip_workspace(design, *, tips=None, step: float | None = None, wrist=None, joints=None,
                  orientation=None, holding: bool = True, method: str = "auto") -> TipWorkspace:
    """Sample tip positions and tell where the tip can go with feasible cable tensions.

    Parameters
    ----------
    tips : (P, 3) tip positions [m]; default the task box grid (``design.task``, ``step``).
    wrist : (K, 2) wrist roll and tilt pairs [rad]; default the wrist's home values.
    joints, orientation : as for :func:`solve_platform` (one value for every sample).
    holding : count the payload at the tip.
    """
    arm = design_arm(design)
    if tips is None:
        from .region import task_poses

        tips = task_poses(design, step=step).positions
    T = np.atleast_2d(np.asarray(tips, float))
    if wrist is None:
        wr = [arm.home[k] if (k := arm.role_index(r)) is not None else np.nan for r in ("wrist_roll", "wrist_tilt")]
        wrist = np.array([wr])
    W = np.atleast_2d(np.asarray(wrist, float))
    if W.shape[1] != 2:
        raise ValueError(f"wrist must have shape (K, 2): roll and tilt, got {W.shape}")
    P, K = len(T), len(W)
    tips_rep = np.repeat(T, K, axis=0)
    rolls, tilts = np.tile(W[:, 0], P), np.tile(W[:, 1], P)
    res = solve_platform(design, tips_rep,
                         roll=None if arm.role_index("wrist_roll") is None else rolls,
                         tilt=None if arm.role_index("wrist_tilt") is None else tilts,
                         joints={k: np.broadcast_to(np.asarray(v, float), (P * K,)) for k, v in (joints or {}).items()},
                         orientation=orientation)
    ten = tip_tensions(design, res.platform_poses, res.joints, holding=holding, method=method)
    feasible = res.ok & ten.feasible
    plat = np.concatenate([T, np.broadcast_to(np.asarray(design.home_pose[3:], float), (P, design.dof - 3))], axis=1)
    plain = tensions_at(design, plat, method=method).feasible & inside_frame(design, T)
    n = design.dof
    return TipWorkspace(tips=T, wrist=W, platform_poses=res.platform_poses.reshape(P, K, n),
                        reach_ok=res.ok.reshape(P, K), feasible=feasible.reshape(P, K),
                        margin=ten.margin.reshape(P, K), platform_only=plain, holding=holding)


def latex_equations(kind: str) -> dict[str, str]:
    """LaTeX of the platform-plus-arm equations (rigid platforms also carry the moment)."""
    R = "R_p" if kind == "rigid" else ""
    out = {
        "tool tip": rf"\mathbf{{p}}_{{tip}} = \mathbf{{p}} + {R}\left(\mathbf{{m}} + R_m\,\mathbf{{t}}(\mathbf{{q}})\right)",
        "pivoting about the tip": rf"\mathbf{{p}} = \mathbf{{p}}_{{tip}} - {R}\left(\mathbf{{m}} + R_m\,"
                                  rf"\mathbf{{t}}(\mathbf{{q}})\right)",
        "arm load on the platform": r"\mathbf{f} = \sum_k m_k\,\mathbf{g}",
    }
    if kind == "rigid":
        out["offset moment"] = r"\mathbf{M} = \sum_k \mathbf{r}_k \times m_k\,\mathbf{g}"
    return out
