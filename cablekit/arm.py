"""The tool arm under the platform: a Denavit-Hartenberg chain, its reach and its servo loads.

The ``[arm]`` section of a design file describes a small serial arm hanging from (or standing
on) the platform.  Its kinematics are derived once per arm with SymPy and lambdified through
:func:`cablekit.codegen.generate`, so every evaluation is vectorised NumPy over joint samples
on the leading axis.

Conventions
-----------
* **Standard Denavit-Hartenberg table** (Spong, Hutchinson and Vidyasagar 2006, sec. 3.2):
  ``A_i = Rz(theta_i) Tz(d_i) Tx(a_i) Rx(alpha_i)`` maps frame {i} to frame {i-1}; joint ``i``
  turns about (revolute) or slides along (prismatic) the axis ``z_{i-1}``.  A revolute joint
  adds its variable ``q_i`` to ``theta_i`` (the table's theta is the offset), a prismatic one
  adds it to ``d_i``.  Missing DH entries are 0, as in a printed DH table.
* **Base frame {0}** sits at ``mount`` in the platform frame, turned by ``mount_orientation``
  (roll, pitch, yaw; ``R = Rz(yaw) Ry(pitch) Rx(roll)`` as for platform poses).  A hanging
  arm usually has roll 180 deg so that ``z_0`` points down.
* **Tool tip** at ``tool`` in the last frame {n}; the gripper's centre of mass in {n}; the
  payload held by the gripper sits at the tool tip.  Link ``i``'s centre of mass is given in
  frame {i} (default: half-way between the origins of {i-1} and {i} at the home value, which
  the summary marks as assumed).
* **Joint roles**: ``levelling`` joints (revolute, first in the chain, at most two) keep the
  arm's base level when the platform tilts; ``wrist_roll`` and ``wrist_tilt`` set the tool
  orientation; ``reach`` joints (lifts, elbows) are held at their home value unless a task
  says otherwise.  The ``gripper`` role belongs to the ``[arm.gripper]`` table: its jaw servo
  does not move the tool tip, so it is not a row of the DH table.
* **Payload**: ``[arm] payload`` is a load the gripper holds in addition to the design's
  ``[payload]``.  Without it, the design's ``[payload]`` *is* what the gripper holds: it is then
  counted at the tool tip while the gripper is closed and not at all while it is open.
* Static servo load ``tau = dP/dq`` with ``P`` the potential energy of the links, gripper and
  payload (Spong et al. 2006, sec. 7.1, the gravity vector ``g(q)``): torque [N*m] for revolute
  joints, force [N] for prismatic ones.

References
----------
Spong, M. W., Hutchinson, S., Vidyasagar, M. *Robot Modeling and Control*. Wiley, 2006
(ch. 3 forward kinematics, ch. 4 Jacobian, ch. 7 gravity vector).
Yoshikawa, T. "Manipulability of robotic mechanisms". Int. J. Robotics Research 4(2), 1985.
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import dataclass
from functools import lru_cache

import numpy as np
import sympy as sp

from .checks import FAIL, WARN, Check, judge
from .codegen import GeneratedFunction, generate
from .limits import MAX_ARM_JOINTS

__all__ = [
    "ROLES",
    "RESERVED_NAMES",
    "Joint",
    "Gripper",
    "Arm",
    "parse_arm_section",
    "dh_transform",
    "as_joints",
    "ArmPose",
    "forward_kinematics",
    "ArmPoints",
    "arm_points",
    "mass_list",
    "jacobian",
    "manipulability",
    "static_loads",
    "LevellingResult",
    "levelling_angles",
    "mount_rotation",
    "ArmReach",
    "reach",
    "design_checks",
    "latex_equations",
    "SERVO_WARN_SHARE",
    "LEVEL_TOLERANCE",
]

ROLES = ("levelling", "reach", "wrist_roll", "wrist_tilt")
# column names of the task CSV (cablekit.task): a joint may not be called like one of them
RESERVED_NAMES = ("label", "x", "y", "z", "tool roll", "tool tilt", "gripper", "platform roll", "platform pitch",
                  "platform yaw")
SERVO_WARN_SHARE = 0.8  # warn above 80 % of a servo's rated load: common practice, no source
LEVEL_TOLERANCE = math.radians(0.1)  # residual tilt of a levelled base that still counts as level
_PAYLOAD_SOURCE = {"arm": "declared in [arm]", "design": "the design's payload, held by the gripper",
                   "none": "no gripper"}
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_ ]{0,39}$")


# --------------------------------------------------------------------------------------
# the arm in SI
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Joint:
    """One row of the DH table with its servo.

    name; type ``"revolute"`` or ``"prismatic"``; role (see :data:`ROLES`); DH parameters
    a [m], alpha [rad], d [m], theta [rad] (the joint variable is added to theta or d);
    lower, upper, home: joint limits and home value [rad or m]; mass of the link it moves
    [kg]; center_of_mass in frame {i} [m] (com_assumed: True when defaulted to the link
    midpoint); rated, stall: servo rated and stall load [N*m or N]; speed: top servo speed
    [rad/s or m/s].
    """

    name: str
    type: str
    role: str
    a: float
    alpha: float
    d: float
    theta: float
    lower: float
    upper: float
    home: float
    mass: float
    center_of_mass: tuple[float, float, float]
    com_assumed: bool
    rated: float
    stall: float
    speed: float

    @property
    def revolute(self) -> bool:
        return self.type == "revolute"

    @property
    def load_unit(self) -> str:
        return "N*m" if self.revolute else "N"

    def display(self, value: float) -> str:
        """A joint value as text in deg or mm."""
        return f"{math.degrees(value):.1f} deg" if self.revolute else f"{value * 1e3:.1f} mm"


@dataclass(frozen=True)
class Gripper:
    """The gripper: mass [kg], centre of mass in the last frame {n} [m], largest jaw opening
    [m], time to open or close [s]."""

    mass: float
    center_of_mass: tuple[float, float, float]
    opening: float
    time: float


@dataclass(frozen=True)
class Arm:
    """A serial arm on the platform (see the module notes for every convention).

    mount : base origin in the platform frame [m]; mount_orientation : roll, pitch, yaw of the
    base frame in the platform frame [rad]; tool : tool tip in the last frame [m];
    joints : the DH rows; gripper : or ``None`` for a tool without jaws; payload : mass the
    gripper holds [kg]; payload_source : ``"arm"`` (declared in [arm], carried in addition to
    the design's payload), ``"design"`` (the design's [payload] is what the gripper holds) or
    ``"none"`` (no gripper).
    """

    name: str
    mount: tuple[float, float, float]
    mount_orientation: tuple[float, float, float]
    tool: tuple[float, float, float]
    joints: tuple[Joint, ...]
    gripper: Gripper | None
    payload: float
    payload_source: str

    @property
    def n(self) -> int:
        """Number of joints."""
        return len(self.joints)

    @property
    def names(self) -> list[str]:
        return [j.name for j in self.joints]

    @property
    def home(self) -> np.ndarray:
        return np.array([j.home for j in self.joints])

    @property
    def lower(self) -> np.ndarray:
        return np.array([j.lower for j in self.joints])

    @property
    def upper(self) -> np.ndarray:
        return np.array([j.upper for j in self.joints])

    @property
    def rated(self) -> np.ndarray:
        return np.array([j.rated for j in self.joints])

    @property
    def speeds(self) -> np.ndarray:
        return np.array([j.speed for j in self.joints])

    @property
    def levelling(self) -> tuple[int, ...]:
        """Indices of the levelling joints (always the first ones)."""
        return tuple(k for k, j in enumerate(self.joints) if j.role == "levelling")

    def role_index(self, role: str) -> int | None:
        """Index of the joint with ``role`` (wrist_roll, wrist_tilt), or None."""
        for k, j in enumerate(self.joints):
            if j.role == role:
                return k
        return None

    @property
    def structure_mass(self) -> float:
        """Links and gripper [kg] (no payload)."""
        return sum(j.mass for j in self.joints) + (self.gripper.mass if self.gripper else 0.0)

    @property
    def total_mass(self) -> float:
        """What the arm adds to the platform's load [kg]: links, gripper, and its own payload
        (a payload taken from the design's [payload] is already counted there)."""
        return self.structure_mass + (self.payload if self.payload_source == "arm" else 0.0)

    def lumped_mass(self) -> tuple[float, np.ndarray]:
        """Mass [kg] and centre of mass in the platform frame [m] at the home joint values.

        Used by :func:`cablekit.statics.external_wrench` for the design-level workspace; the
        tool-tip functions in :mod:`cablekit.tooltip` count the arm at its actual pose.
        """
        mass, centre = _lumped(self)
        return mass, centre.copy()


@lru_cache(maxsize=32)
def _lumped(arm: Arm) -> tuple[float, np.ndarray]:
    masses, centres = mass_list(arm, arm_points(arm, arm.home[None, :]), holding=arm.payload_source == "arm")
    M = float(masses[0].sum())
    base = (masses[0][:, None] * centres[0]).sum(axis=0) / M if M > 0 else np.zeros(3)
    return M, np.asarray(arm.mount) + mount_rotation(arm) @ base


def mass_list(arm: Arm, pts: "ArmPoints", *, holding) -> tuple[np.ndarray, np.ndarray]:
    """Masses (N, k) [kg] of links, gripper and payload, and their centres in the base frame
    (N, k, 3) [m]; the payload's mass is zero where ``holding`` (bool or (N,)) is False."""
    N = pts.tip.shape[0]
    masses = [j.mass for j in arm.joints]
    centres = [pts.coms]
    if arm.gripper is not None:
        masses.append(arm.gripper.mass)
        centres.append(pts.gripper_com[:, None, :])
    centres.append(pts.tip[:, None, :])
    m = np.tile(np.array(masses + [0.0]), (N, 1))
    m[:, -1] = np.where(np.broadcast_to(holding, (N,)), arm.payload, 0.0)
    return m, np.concatenate(centres, axis=1)


# --------------------------------------------------------------------------------------
# parsing the [arm] section
# --------------------------------------------------------------------------------------
def _forwarding_collector(add_problem):
    from .design import _Collector  # the design file's typed getters, reused

    class _Forward(_Collector):
        def add(self, path, value, expected):
            self.problems.append(path)  # only counted here; the design's collector keeps them
            add_problem(path, value, expected)

    return _Forward()


_ARM_KEYS = {"name", "mount", "mount_orientation", "tool", "payload", "joints", "gripper"}
_JOINT_KEYS = {"name", "type", "role", "a", "alpha", "d", "theta", "lower", "upper", "home", "mass",
               "center_of_mass", "rated_torque", "stall_torque", "rated_force", "stall_force", "speed"}
_GRIPPER_KEYS = {"mass", "center_of_mass", "opening", "time"}


def parse_arm_section(raw, add_problem, path: str, design) -> Arm | None:
    """Validate the ``[arm]`` table and build an :class:`Arm` (SI).

    Every problem is reported through ``add_problem(path, value, expected)``; bad user data
    never raises.  Returns ``None`` when the section has problems.

    Example (one row of a hanging gripper arm; see examples/greenhouse_tray_3cable.toml)::

        [arm]
        mount = "0, 0, -0.04 m"
        mount_orientation = "180, 0, 0 deg"   # base z axis points down
        tool = "0, 0, 0 m"                     # tip in the last joint frame

        [[arm.joints]]
        name = "tilt"
        type = "revolute"                      # or "prismatic"
        role = "wrist_tilt"                    # levelling, reach, wrist_roll or wrist_tilt
        theta = "90 deg"                       # DH row; missing a, alpha, d, theta are 0
        a = "110 mm"
        lower = "-90 deg"
        upper = "90 deg"                       # home defaults to 0 when inside the limits
        mass = "0.04 kg"
        center_of_mass = "-0.06, 0, 0 m"       # in this joint's frame; default link midpoint
        rated_torque = "1.0 N*m"               # prismatic: rated_force, stall_force [N]
        stall_torque = "2.2 N*m"
        speed = "45 rpm"                       # prismatic: a speed such as "60 mm/s"

        [arm.gripper]
        mass = "0.12 kg"
        center_of_mass = "-0.03, 0, 0 m"       # in the last joint frame
        opening = "120 mm"
        time = "0.6 s"                         # to open or to close
    """
    c = _forwarding_collector(add_problem)
    if not isinstance(raw, Mapping):
        c.add(path, raw, "a table: [arm] with mount, tool and [[arm.joints]]")
        return None
    c.unknown(raw, _ARM_KEYS, path)
    name = c.text(raw, "name", path, default="arm")
    mount = c.vector(raw, "mount", "length", path)
    mount_ori = c.vector(raw, "mount_orientation", "angle", path, required=False, default=(0.0, 0.0, 0.0))
    tool = c.vector(raw, "tool", "length", path)
    joints_raw = raw.get("joints")
    joints: list[Joint] = []
    if not isinstance(joints_raw, list) or not joints_raw:
        c.add(f"{path}.joints", joints_raw if joints_raw is not None else "missing",
              "a list of [[arm.joints]] tables, one per DH row")
        joints_raw = []
    elif len(joints_raw) > MAX_ARM_JOINTS:
        c.add(f"{path}.joints", f"{len(joints_raw)} joints", f"at most {MAX_ARM_JOINTS} joints (cablekit.limits)")
        return None
    seen: set[str] = set()
    for k, jt in enumerate(joints_raw):
        jp = f"{path}.joints[{k}]"
        if not isinstance(jt, Mapping):
            c.add(jp, jt, "a table with name, type, role, DH parameters, limits, mass and servo")
            continue
        j = _parse_joint(c, jt, jp, k)
        if j is None:
            continue
        if j.name.lower() in seen:
            c.add(f"{jp}.name", j.name, "joint names must be unique")
        seen.add(j.name.lower())
        joints.append(j)
    gripper = None
    if "gripper" in raw:
        g = c.table(raw, "gripper", path)
        if g is not None:
            gp = f"{path}.gripper"
            c.unknown(g, _GRIPPER_KEYS, gp)
            gm = c.quantity(g, "mass", "mass", gp, nonnegative=True)
            gc = c.vector(g, "center_of_mass", "length", gp)
            go = c.quantity(g, "opening", "length", gp, positive=True)
            gt = c.quantity(g, "time", "time", gp, nonnegative=True)
            if None not in (gm, gc, go, gt):
                gripper = Gripper(mass=gm, center_of_mass=gc, opening=go, time=gt)
    payload = c.quantity(raw, "payload", "mass", path, required=False, nonnegative=True, default=None)
    if "payload" in raw and "gripper" not in raw:
        c.add(f"{path}.payload", raw["payload"], "a payload needs a gripper to hold it: add [arm.gripper]")
    # roles: levelling joints first and revolute, at most one of each wrist role
    roles = [j.role for j in joints]
    if len(joints) == len(joints_raw):
        n_lev = roles.count("levelling")
        if n_lev > 2:
            c.add(f"{path}.joints", f"{n_lev} levelling joints", "at most two levelling joints (roll and pitch)")
        if any(r == "levelling" for r in roles[n_lev:]):
            c.add(f"{path}.joints", ", ".join(roles), "levelling joints come first in the chain")
        for role in ("wrist_roll", "wrist_tilt"):
            if roles.count(role) > 1:
                c.add(f"{path}.joints", ", ".join(roles), f"at most one {role} joint")
        for k, j in enumerate(joints):
            if j.role in ("levelling", "wrist_roll", "wrist_tilt") and not j.revolute:
                c.add(f"{path}.joints[{k}].type", j.type, f"a {j.role} joint is revolute")
    if c.problems or None in (name, mount, mount_ori, tool) or len(joints) != len(joints_raw):
        return None
    if gripper is None:
        pay, source = 0.0, "none"
    elif payload is not None:
        pay, source = payload, "arm"
    else:
        pay, source = float(design.payload.mass), "design"
    return Arm(name=name, mount=mount, mount_orientation=mount_ori, tool=tool, joints=tuple(joints),
               gripper=gripper, payload=pay, payload_source=source)


def _parse_joint(c, t, p: str, k: int) -> Joint | None:
    c.unknown(t, _JOINT_KEYS, p)
    name = c.text(t, "name", p, required=True)
    if name is not None and not _NAME.match(name):
        c.add(f"{p}.name", name, "a name of letters, digits, spaces or _ starting with a letter (at most 40)")
        name = None
    elif name is not None and name.lower() in RESERVED_NAMES:
        c.add(f"{p}.name", name, f"a name other than the task-table columns {', '.join(RESERVED_NAMES)}")
        name = None
    kind = c.text(t, "type", p, required=True, choices=("revolute", "prismatic"))
    role = c.text(t, "role", p, required=True, choices=ROLES)
    a = c.quantity(t, "a", "length", p, required=False, default=0.0)
    alpha = c.quantity(t, "alpha", "angle", p, required=False, default=0.0)
    d = c.quantity(t, "d", "length", p, required=False, default=0.0)
    theta = c.quantity(t, "theta", "angle", p, required=False, default=0.0)
    lower = upper = home = None
    if kind is not None:  # the limits' unit depends on the type; a bad type is reported already
        var_dim = "angle" if kind == "revolute" else "length"
        lower = c.quantity(t, "lower", var_dim, p)
        upper = c.quantity(t, "upper", var_dim, p)
        home = c.quantity(t, "home", var_dim, p, required=False, default=None)
    mass = c.quantity(t, "mass", "mass", p, nonnegative=True)
    com = c.vector(t, "center_of_mass", "length", p, required=False, default=None)
    if kind == "revolute":
        load_keys, load_dim, speed_dim = ("rated_torque", "stall_torque"), "torque", "angular_speed"
        wrong = ("rated_force", "stall_force")
    else:
        load_keys, load_dim, speed_dim = ("rated_force", "stall_force"), "force", "speed"
        wrong = ("rated_torque", "stall_torque")
    for key in wrong:
        if key in t and kind is not None:
            c.add(f"{p}.{key}", t[key], f"a {kind} joint's servo is rated with {' and '.join(load_keys)}")
    rated = stall = speed = None
    if kind is not None:
        rated = c.quantity(t, load_keys[0], load_dim, p, positive=True)
        stall = c.quantity(t, load_keys[1], load_dim, p, positive=True)
        speed = c.quantity(t, "speed", speed_dim, p, positive=True)
        if rated is not None and stall is not None and stall < rated:
            c.add(f"{p}.{load_keys[1]}", t.get(load_keys[1]), f"must not be below {load_keys[0]}")
    if lower is not None and upper is not None:
        if not upper > lower:
            c.add(f"{p}.upper", t.get("upper"), "must exceed lower")
        elif home is None and "home" not in t:
            if lower <= 0.0 <= upper:
                home = 0.0
            else:
                c.add(f"{p}.home", "missing", "a home value is required when 0 lies outside the joint limits")
        elif home is not None and not lower <= home <= upper:
            c.add(f"{p}.home", t.get("home"), "must lie within lower .. upper")
    values = (name, kind, role, a, alpha, d, theta, lower, upper, home, mass, rated, stall, speed)
    if any(v is None for v in values) or "center_of_mass" in t and com is None:
        return None
    assumed = com is None
    if assumed:
        # half-way between the origins of {i-1} and {i}; o_{i-1} in frame {i} is
        # -(a, d sin(alpha), d cos(alpha)) (invert A_i; Spong et al. 2006, eq. 3.10)
        dd = d + (home if kind == "prismatic" else 0.0)
        com = (-0.5 * a, -0.5 * dd * math.sin(alpha), -0.5 * dd * math.cos(alpha))
    return Joint(name=name, type=kind, role=role, a=a, alpha=alpha, d=d, theta=theta, lower=lower, upper=upper,
                 home=home, mass=mass, center_of_mass=tuple(float(v) for v in com), com_assumed=assumed,
                 rated=rated, stall=stall, speed=speed)


# --------------------------------------------------------------------------------------
# symbolic derivation (once per arm), lambdified through codegen
# --------------------------------------------------------------------------------------
def dh_transform(theta, d, a, alpha) -> sp.Matrix:
    """``A = Rz(theta) Tz(d) Tx(a) Rx(alpha)`` (Spong, Hutchinson and Vidyasagar 2006, eq. 3.10)."""
    ct, st, ca, sa = sp.cos(theta), sp.sin(theta), sp.cos(alpha), sp.sin(alpha)
    return sp.Matrix([[ct, -st * ca, st * sa, a * ct],
                      [st, ct * ca, -ct * sa, a * st],
                      [0, sa, ca, d],
                      [0, 0, 0, 1]])


def _angle(x: float) -> sp.Expr:
    """Exact multiples of pi/2 stay exact (cos(pi/2) is 0, not 6e-17); others become Floats."""
    k = x / (math.pi / 2)
    if abs(k - round(k)) < 1e-12:
        return sp.Integer(round(k)) * sp.pi / 2
    return sp.Float(x)


def _length(x: float) -> sp.Expr:
    return sp.Integer(0) if x == 0 else sp.Float(x)


@dataclass(frozen=True)
class _Chain:
    q: tuple[sp.Symbol, ...]
    frames: tuple[sp.Matrix, ...]  # T_0^0 (identity), T_0^1, ..., T_0^n
    tip: sp.Matrix  # 3 x 1 in the base frame
    coms: tuple[sp.Matrix, ...]  # link centres of mass in the base frame
    gripper_com: sp.Matrix | None


@lru_cache(maxsize=32)
def _chain(arm: Arm) -> _Chain:
    q = sp.symbols(f"q1:{arm.n + 1}", real=True)
    T = sp.eye(4)
    frames = [T]
    for k, j in enumerate(arm.joints):
        theta = _angle(j.theta) + (q[k] if j.revolute else 0)
        d = _length(j.d) + (0 if j.revolute else q[k])
        T = T * dh_transform(theta, d, _length(j.a), _angle(j.alpha))
        frames.append(T)

    def point(Tm, p):
        return (Tm * sp.Matrix([*map(_length, p), 1]))[:3, 0]

    coms = tuple(point(frames[k + 1], j.center_of_mass) for k, j in enumerate(arm.joints))
    grip = point(frames[-1], arm.gripper.center_of_mass) if arm.gripper else None
    return _Chain(q=tuple(q), frames=tuple(frames), tip=point(frames[-1], arm.tool), coms=coms, gripper_com=grip)


@lru_cache(maxsize=64)
def _function(arm: Arm, what: str) -> GeneratedFunction:
    ch = _chain(arm)
    n = arm.n
    if what == "fk":
        R = ch.frames[-1][:3, :3]
        exprs = [*ch.tip, *R]
        names = ["tip_x", "tip_y", "tip_z"] + [f"R_{r}{c}" for r in range(3) for c in range(3)]
        return generate("arm_fk", exprs, ch.q, output_names=names,
                        doc="Tool-tip position and last-frame rotation in the arm base frame (DH chain).")
    if what == "points":
        exprs, names = [], []
        for k in range(1, n + 1):
            exprs += list(ch.frames[k][:3, 3])
            names += [f"o{k}_{a}" for a in "xyz"]
        for k, cm in enumerate(ch.coms):
            exprs += list(cm)
            names += [f"c{k + 1}_{a}" for a in "xyz"]
        if ch.gripper_com is not None:
            exprs += list(ch.gripper_com)
            names += [f"cg_{a}" for a in "xyz"]
        exprs += list(ch.tip)
        names += ["tip_x", "tip_y", "tip_z"]
        return generate("arm_points", exprs, ch.q, output_names=names,
                        doc="Joint-frame origins, link and gripper centres of mass, and the tool tip (base frame).")
    if what == "jacobian":
        Jv = ch.tip.jacobian(sp.Matrix(ch.q))
        Jw = sp.zeros(3, n)
        for k, j in enumerate(arm.joints):
            if j.revolute:
                Jw[:, k] = ch.frames[k][:3, 2]  # z_{k-1}: the joint's axis (Spong et al. 2006, eq. 4.x)
        J = Jv.col_join(Jw)
        names = [f"J_{r}{c}" for r in range(6) for c in range(n)]
        return generate("arm_jacobian", list(J), ch.q, output_names=names,
                        doc="Geometric Jacobian of the tool tip (rows vx vy vz wx wy wz) in the base frame.")
    if what == "gravity":
        g = sp.symbols("g_x g_y g_z", real=True)
        m_p = sp.Symbol("m_p", real=True)
        gv = sp.Matrix(g)
        P = -sum((sp.Float(j.mass) * gv.dot(cm) for j, cm in zip(arm.joints, ch.coms)), sp.Integer(0))
        if ch.gripper_com is not None:
            P -= sp.Float(arm.gripper.mass) * gv.dot(ch.gripper_com)
        P -= m_p * gv.dot(ch.tip)
        tau = [sp.diff(P, qi) for qi in ch.q]
        return generate("arm_gravity", tau, (*ch.q, *g, m_p), output_names=[f"tau_{k + 1}" for k in range(n)],
                        doc="Static servo loads tau = dP/dq (gravity vector in the base frame, payload mass m_p).")
    if what == "level":
        L = len(arm.levelling)
        if L == 0:
            raise ValueError(f"the arm '{arm.name}' has no levelling joints")
        v = sp.symbols("v_x v_y v_z", real=True)
        e = ch.frames[L][:3, :3].T * sp.Matrix(v)
        de = e.jacobian(sp.Matrix(ch.q[:L]))
        names = ["e_x", "e_y", "e_z"] + [f"de{r}_dq{c + 1}" for r in "xyz" for c in range(L)]
        return generate("arm_level", [*e, *de], (*ch.q[:L], *v), output_names=names,
                        doc="The up direction seen from the frame after the levelling joints, and its derivative.")
    raise ValueError(f"unknown arm function {what!r}")


# --------------------------------------------------------------------------------------
# numeric evaluation (joint samples on the leading axis)
# --------------------------------------------------------------------------------------
def as_joints(arm: Arm, joints) -> np.ndarray:
    """Check and return joint values as a float array (N, n) [rad or m]."""
    q = np.asarray(joints, dtype=float)
    if q.ndim == 1:
        q = q[None, :]
    if q.ndim != 2 or q.shape[1] != arm.n:
        raise ValueError(f"joint values must have shape (N, {arm.n}) for the arm's {arm.n} joints, got {q.shape}")
    if not np.all(np.isfinite(q)):
        bad = int(np.argwhere(~np.isfinite(q))[0, 0])
        raise ValueError(f"joint sample {bad} is not finite: {q[bad].tolist()}")
    return q


def _call(fn: GeneratedFunction, q: np.ndarray, *extra) -> np.ndarray:
    return fn(*[q[:, k] for k in range(q.shape[1])], *extra)


@dataclass(frozen=True)
class ArmPose:
    """Tool tip position (N, 3) [m] and last-frame rotation (N, 3, 3), in the base frame."""

    tip: np.ndarray
    rotation: np.ndarray


def forward_kinematics(arm: Arm, joints) -> ArmPose:
    """Tool tip of the DH chain in the arm's base frame {0}."""
    q = as_joints(arm, joints)
    out = _call(_function(arm, "fk"), q)
    return ArmPose(tip=out[:, :3], rotation=out[:, 3:].reshape(-1, 3, 3))


@dataclass(frozen=True)
class ArmPoints:
    """Points of the arm in its base frame [m]: frame origins o_1..o_n (N, n, 3), link centres
    of mass (N, n, 3), gripper centre of mass (N, 3) or None, tool tip (N, 3)."""

    origins: np.ndarray
    coms: np.ndarray
    gripper_com: np.ndarray | None
    tip: np.ndarray

    def polyline(self) -> np.ndarray:
        """Base origin, every frame origin and the tip: the arm's centre line (N, n + 2, 3)."""
        N = self.tip.shape[0]
        return np.concatenate([np.zeros((N, 1, 3)), self.origins, self.tip[:, None, :]], axis=1)


def arm_points(arm: Arm, joints) -> ArmPoints:
    q = as_joints(arm, joints)
    out = _call(_function(arm, "points"), q)
    n = arm.n
    origins = out[:, : 3 * n].reshape(-1, n, 3)
    coms = out[:, 3 * n: 6 * n].reshape(-1, n, 3)
    grip = out[:, 6 * n: 6 * n + 3] if arm.gripper is not None else None
    return ArmPoints(origins=origins, coms=coms, gripper_com=grip, tip=out[:, -3:])


def jacobian(arm: Arm, joints) -> np.ndarray:
    """Geometric Jacobian (N, 6, n) of the tool tip in the base frame: rows vx, vy, vz [m/rad or
    m/m], wx, wy, wz [rad/rad or 0] (Spong et al. 2006, sec. 4.6)."""
    q = as_joints(arm, joints)
    return _call(_function(arm, "jacobian"), q).reshape(-1, 6, arm.n)


def manipulability(arm: Arm, joints, *, J=None) -> np.ndarray:
    """Yoshikawa's manipulability of the tip position, the product of the singular values of
    the translational Jacobian (``sqrt(det(Jv Jv^T))`` when the arm has three or more joints).

    Units mix m and rad when the arm has prismatic and revolute joints; compare values of one
    arm, not across arms.  (Yoshikawa 1985.)
    """
    Jv = (jacobian(arm, joints) if J is None else J)[:, :3, :]
    s = np.linalg.svd(Jv, compute_uv=False)
    return np.prod(s, axis=1)


def static_loads(arm: Arm, joints, *, gravity, payload) -> np.ndarray:
    """Servo loads holding the arm still (N, n) [N*m for revolute, N for prismatic joints].

    Parameters
    ----------
    gravity : (3,) or (N, 3) gravity acceleration in the arm's base frame [m/s**2].
    payload : float or (N,) mass held at the tool tip [kg] (0 when the gripper is open).

    Notes
    -----
    ``tau_i = dP/dq_i`` with ``P = -sum_k m_k g . r_k(q)`` over links, gripper and payload
    (Spong et al. 2006, eq. 7.x, the gravity vector).  The sign is the load the servo must
    supply; compare ``|tau|`` with its rating.
    """
    q = as_joints(arm, joints)
    g = np.broadcast_to(np.asarray(gravity, float), (q.shape[0], 3))
    m = np.broadcast_to(np.asarray(payload, float), (q.shape[0],))
    return _call(_function(arm, "gravity"), q, g[:, 0], g[:, 1], g[:, 2], m)


def mount_rotation(arm: Arm) -> np.ndarray:
    """Rotation of the base frame in the platform frame (3, 3)."""
    from .statics import rotation_matrices

    return rotation_matrices(np.array(arm.mount_orientation))[0]


@dataclass(frozen=True)
class LevellingResult:
    """Levelling joint angles (N, L) [rad], the residual tilt of the levelled frame (N,) [rad],
    and whether the angles lie within the joints' limits (N,)."""

    angles: np.ndarray
    residual: np.ndarray
    within_limits: np.ndarray

    @property
    def ok(self) -> np.ndarray:
        return (self.residual <= LEVEL_TOLERANCE) & self.within_limits


def levelling_angles(arm: Arm, platform_rotations, up, *, max_iter: int = 40) -> LevellingResult:
    """Levelling joint angles that keep the arm level when the platform is turned.

    The frame after the levelling joints must see the world's up direction exactly as it does
    on a level platform with the joints at home.  Solved by damped Gauss-Newton on the
    symbolic derivative, vectorised over poses, starting from home.

    Parameters
    ----------
    platform_rotations : (N, 3, 3) platform orientations in the world.
    up : (3,) world up direction (opposite to gravity).
    """
    Rp = np.asarray(platform_rotations, float).reshape(-1, 3, 3)
    N = Rp.shape[0]
    up = np.asarray(up, float) / np.linalg.norm(up)
    Rm = mount_rotation(arm)
    v = np.einsum("ji,nkj,k->ni", Rm, Rp, up)  # up in the base frame: Rm^T Rp^T up
    v_ref = Rm.T @ up
    L = len(arm.levelling)
    home = arm.home[:L]
    if L == 0:
        cosang = np.clip(v @ v_ref, -1.0, 1.0)
        return LevellingResult(np.zeros((N, 0)), np.arccos(cosang), np.ones(N, bool))
    fn = _function(arm, "level")
    target = fn(*home, *v_ref)[:3]
    q = np.tile(home, (N, 1))
    for _ in range(max_iter):
        out = fn(*[q[:, k] for k in range(L)], v[:, 0], v[:, 1], v[:, 2])
        r = out[:, :3] - target
        J = out[:, 3:].reshape(N, 3, L)
        JT = np.swapaxes(J, 1, 2)
        H = JT @ J + 1e-12 * np.eye(L)
        dq = -np.linalg.solve(H, (JT @ r[..., None]))[..., 0]
        dq = np.clip(dq, -0.5, 0.5)
        q += dq
        if np.max(np.abs(dq)) < 1e-13:
            break
    e = fn(*[q[:, k] for k in range(L)], v[:, 0], v[:, 1], v[:, 2])[:, :3]
    e /= np.linalg.norm(e, axis=1, keepdims=True)
    residual = np.arccos(np.clip(e @ (target / np.linalg.norm(target)), -1.0, 1.0))
    lo, hi = arm.lower[:L], arm.upper[:L]
    within = np.all((q >= lo - 1e-12) & (q <= hi + 1e-12), axis=1)
    return LevellingResult(angles=q, residual=residual, within_limits=within)


# --------------------------------------------------------------------------------------
# reach, manipulability and servo loads over the joint space
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ArmReach:
    """The arm sampled over its joint space (levelling joints at home, platform level).

    joints : (N, n) samples [rad, m]; tips : (N, 3) tool tip in the platform frame [m];
    manipulability : (N,); loads : (N, n) static servo loads with ``payload`` held
    [N*m or N]; use : (N, n) ``|load| / rated``; weakest : index of the joint whose servo
    comes closest to (or beyond) its rating; weakest_sample : the sample where it does.
    """

    arm: Arm
    joints: np.ndarray
    tips: np.ndarray
    manipulability: np.ndarray
    loads: np.ndarray
    use: np.ndarray
    payload: float
    weakest: int
    weakest_sample: int

    @property
    def peak_use(self) -> np.ndarray:
        """Highest ``|load| / rated`` of each servo over the samples (n,)."""
        return self.use.max(axis=0)

    @property
    def peak_load(self) -> np.ndarray:
        """Highest ``|load|`` of each servo (n,) [N*m or N]."""
        return np.abs(self.loads).max(axis=0)

    def describe_sample(self, k: int) -> str:
        """The joint values of sample ``k`` as text, e.g. ``lift 40.0 mm, tilt -90.0 deg``."""
        return ", ".join(f"{j.name} {j.display(v)}" for j, v in zip(self.arm.joints, self.joints[k]))

    def summary(self) -> list[str]:
        arm = self.arm
        lines = [f"arm '{arm.name}': {arm.n} joints "
                 f"({', '.join(f'{j.name}: {j.type} {j.role}' for j in arm.joints)}), "
                 f"links + gripper {arm.structure_mass:.3g} kg, payload {self.payload:.3g} kg "
                 f"({_PAYLOAD_SOURCE[arm.payload_source]})"]
        lo, hi = self.tips.min(axis=0), self.tips.max(axis=0)
        far = np.linalg.norm(self.tips - np.asarray(arm.mount), axis=1).max()
        lines.append(f"  reach (platform frame, level, {len(self.tips)} samples): "
                     f"x {lo[0]:+.3f}..{hi[0]:+.3f} m, y {lo[1]:+.3f}..{hi[1]:+.3f} m, "
                     f"z {lo[2]:+.3f}..{hi[2]:+.3f} m; farthest tip {far:.3f} m from the mount")
        mu = self.manipulability
        lines.append(f"  manipulability: min {mu.min():.3g}, median {np.median(mu):.3g}, max {mu.max():.3g}"
                     + (f" ({int(np.sum(mu < 1e-6 * max(mu.max(), 1e-300)))} near-singular samples)"
                        if mu.max() > 0 else ""))
        lines.append("  servo            static peak     rated      use")
        for k, j in enumerate(arm.joints):
            lines.append(f"  {j.name:<15} {self.peak_load[k]:8.3g} {j.load_unit:<4} {j.rated:8.3g} {j.load_unit:<4}"
                         f" {100 * self.peak_use[k]:5.0f} %")
        w = arm.joints[self.weakest]
        lines.append(f"  weakest servo: {w.name} at {100 * self.peak_use[self.weakest]:.0f} % of its rated "
                     f"{'torque' if w.revolute else 'force'} ({self.describe_sample(self.weakest_sample)})")
        assumed = [j.name for j in arm.joints if j.com_assumed]
        if assumed:
            lines.append(f"  centre of mass assumed at the link midpoint for: {', '.join(assumed)}")
        return lines

    def figure(self, *, color: str = "manipulability", max_points: int = 6000):
        """3-D scatter of the tip samples (platform frame) coloured by manipulability or by the
        weakest servo's use; the weakest-servo sample is marked."""
        import plotly.graph_objects as go

        if color not in ("manipulability", "servo"):
            raise ValueError("color must be 'manipulability' or 'servo'")
        idx = np.arange(len(self.tips))
        if len(idx) > max_points:
            idx = np.unique(np.r_[np.linspace(0, len(idx) - 1, max_points).astype(int), self.weakest_sample])
        vals = self.manipulability if color == "manipulability" else 100 * self.use[:, self.weakest]
        label = "manipulability" if color == "manipulability" else f"{self.arm.joints[self.weakest].name} use [%]"
        t = self.tips[idx]
        fig = go.Figure()
        fig.add_trace(go.Scatter3d(x=t[:, 0], y=t[:, 1], z=t[:, 2], mode="markers", name="tool tip",
                                   marker=dict(size=2.5, color=vals[idx], colorscale="Viridis",
                                               colorbar=dict(title=label))))
        w = self.tips[self.weakest_sample]
        fig.add_trace(go.Scatter3d(x=[w[0]], y=[w[1]], z=[w[2]], mode="markers", name="weakest servo's worst",
                                   marker=dict(size=7, color="#d62728", symbol="x")))
        m = np.asarray(self.arm.mount)
        fig.add_trace(go.Scatter3d(x=[m[0]], y=[m[1]], z=[m[2]], mode="markers", name="mount",
                                   marker=dict(size=6, color="#333333", symbol="square")))
        fig.update_layout(title=f"Reach of '{self.arm.name}' (platform frame, level)",
                          legend=dict(orientation="h", yanchor="bottom", y=0.0, x=0.0),
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"),
                          margin=dict(l=0, r=0, t=40, b=0))
        return fig


def _joint_grid(arm: Arm, max_samples: int) -> np.ndarray:
    free = [k for k, j in enumerate(arm.joints) if j.role != "levelling"]
    if not free:
        return arm.home[None, :]
    per = max(2, min(41, int(math.floor(max_samples ** (1.0 / len(free)) + 1e-9))))
    axes = [np.unique(np.r_[np.linspace(arm.joints[k].lower, arm.joints[k].upper, per), arm.joints[k].home])
            for k in free]  # the limits and the home value are always sampled
    mesh = np.meshgrid(*axes, indexing="ij")
    q = np.tile(arm.home, (mesh[0].size, 1))
    for k, m in zip(free, mesh):
        q[:, k] = m.ravel()
    return q


def reach(arm: Arm, *, gravity=(0.0, 0.0, -9.80665), max_samples: int = 20_000, holding: bool = True,
          joints=None) -> ArmReach:
    """Sample the arm over its joint space: reach envelope, manipulability, servo loads.

    Parameters
    ----------
    gravity : world gravity [m/s**2]; the platform is level and the levelling joints at home.
    max_samples : budget for the joint grid (every non-levelling joint from lower to upper, its
        home value included).
    holding : count the payload at the tool tip (the worst case for the servos).
    joints : (N, n) explicit samples instead of the grid.
    """
    q = _joint_grid(arm, max_samples) if joints is None else as_joints(arm, joints)
    Rm = mount_rotation(arm)
    pts = forward_kinematics(arm, q)
    tips = np.asarray(arm.mount) + pts.tip @ Rm.T
    J = jacobian(arm, q)
    mu = manipulability(arm, q, J=J)
    payload = arm.payload if holding else 0.0
    loads = static_loads(arm, q, gravity=Rm.T @ np.asarray(gravity, float), payload=payload)
    use = np.abs(loads) / arm.rated
    k_sample, k_joint = np.unravel_index(int(np.argmax(use)), use.shape)
    return ArmReach(arm=arm, joints=q, tips=tips, manipulability=mu, loads=loads, use=use, payload=payload,
                    weakest=int(k_joint), weakest_sample=int(k_sample))


# --------------------------------------------------------------------------------------
# checks for the review sheet
# --------------------------------------------------------------------------------------
def design_checks(design, *, arm_reach: ArmReach | None = None) -> list[Check]:
    """Servo static loads over the reach (with the payload) and, on tilting platforms, the
    levelling range.  Empty when the design has no arm."""
    arm = design.sections.get("arm")
    if arm is None:
        return []
    r = reach(arm, gravity=design.gravity) if arm_reach is None else arm_reach
    out: list[Check] = []
    for k, j in enumerate(arm.joints):
        peak = float(r.peak_load[k])
        margin, status = judge(peak, j.rated, upper=True, warn_limit=SERVO_WARN_SHARE * j.rated)
        where = np.argmax(r.use[:, k])
        out.append(Check(key="arm_servo_static", subject=f"arm joint {j.name}",
                         title=f"static servo {'torque' if j.revolute else 'force'} over the reach, payload held",
                         value=peak, limit=j.rated, unit=j.load_unit, margin=margin, status=status,
                         source=f"servo rating from the design file; warn above {SERVO_WARN_SHARE:.0%} of rated: "
                                "common practice, no source",
                         detail=f"peak at {r.describe_sample(int(where))}; stall {j.stall:.3g} {j.load_unit}"))
    if design.dof == 6:
        out.extend(_levelling_checks(design, arm))
    return out


def _levelling_checks(design, arm: Arm) -> list[Check]:
    from .statics import rotation_matrices

    oris = np.array([design.home_pose[3:], *design.task.orientations], float)
    lev = levelling_angles(arm, rotation_matrices(oris), -np.asarray(design.frame.gravity_direction))
    worst = int(np.argmax(lev.residual))
    o = np.degrees(oris[worst])
    where = f"platform roll {o[0]:.1f}, pitch {o[1]:.1f}, yaw {o[2]:.1f} deg"
    value, limit = math.degrees(float(lev.residual[worst])), math.degrees(LEVEL_TOLERANCE)
    source = "0.1 deg residual tilt: common practice, no source"
    if not arm.levelling:
        if value <= limit:
            return []
        return [Check(key="arm_levelling", subject="arm levelling", title="arm base stays level", value=value,
                      limit=limit, unit="deg", margin=limit - value, status=WARN, source=source,
                      detail=f"the arm has no levelling joints and tilts with the platform (worst at {where})")]
    margin, status = judge(value, limit, upper=True)
    detail = f"worst at {where}"
    if not np.all(lev.within_limits):
        bad = int(np.argmin(lev.within_limits))
        ob = np.degrees(oris[bad])
        status, detail = FAIL, (f"levelling joints beyond their limits at platform roll {ob[0]:.1f}, "
                                f"pitch {ob[1]:.1f} deg")
    return [Check(key="arm_levelling", subject="arm levelling", title="levelling joints cancel the task's platform tilts",
                  value=value, limit=limit, unit="deg", margin=margin, status=status, source=source, detail=detail)]


def latex_equations(kind: str) -> dict[str, str]:
    """LaTeX of the arm's equations for notebooks and the review sheet (``kind`` is the
    platform kind; the arm's equations do not depend on it)."""
    th, d, a, al = sp.symbols(r"\theta_i d_i a_i \alpha_i", real=True)
    return {
        "DH link transform": r"A_i = R_z(\theta_i)\,T_z(d_i)\,T_x(a_i)\,R_x(\alpha_i) = "
                             + sp.latex(dh_transform(th, d, a, al)),
        "forward kinematics": r"T^0_n(\mathbf{q}) = A_1 A_2 \cdots A_n,\quad "
                              r"\mathbf{p}_{tip} = T^0_n\,\mathbf{t}_{tool}",
        "geometric Jacobian": r"J_v = \frac{\partial \mathbf{p}_{tip}}{\partial \mathbf{q}},\quad "
                              r"J_{\omega,i} = \mathbf{z}_{i-1}\ \text{(revolute)},\ \mathbf{0}\ \text{(prismatic)}",
        "static servo load": r"\boldsymbol{\tau} = \frac{\partial P}{\partial \mathbf{q}},\quad "
                             r"P = -\sum_k m_k\,\mathbf{g}\cdot\mathbf{r}_k(\mathbf{q})",
        "manipulability": r"w = \prod_i \sigma_i(J_v) = \sqrt{\det J_v J_v^T}",
        "levelling": r"R^0_L(\mathbf{q}_L)^T R_m^T R_p^T \mathbf{e}_{up} = "
                     r"R^0_L(\mathbf{q}_{L,home})^T R_m^T \mathbf{e}_{up}",
    }
