"""The tool arm: DH forward kinematics, Jacobian, servo loads, reach, the [arm] section, checks."""

from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest

from cablekit.arm import (Arm, design_checks, forward_kinematics, jacobian, levelling_angles, manipulability,
                          parse_arm_section, reach, static_loads)
from cablekit.design import DesignError, loads_design
from cablekit.statics import external_wrench, rotation_matrices

RNG = np.random.default_rng(11)
EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
G = 9.80665


# --------------------------------------------------------------------------------------
# helpers: build arms through the section parser, and an independent NumPy DH chain
# --------------------------------------------------------------------------------------
def joint(name, kind="revolute", *, role="reach", a=0.0, alpha=0.0, d=0.0, theta=0.0, lower=-math.pi,
          upper=math.pi, home=None, mass=0.0, com=None, rated=100.0, speed=1.0):
    row = {"name": name, "type": kind, "role": role, "a": f"{a!r} m", "alpha": f"{alpha!r} rad", "d": f"{d!r} m",
           "theta": f"{theta!r} rad", "mass": f"{mass!r} kg"}
    unit = "rad" if kind == "revolute" else "m"
    row["lower"], row["upper"] = f"{lower!r} {unit}", f"{upper!r} {unit}"
    if home is not None:
        row["home"] = f"{home!r} {unit}"
    if com is not None:
        row["center_of_mass"] = ", ".join(repr(float(v)) for v in com) + " m"
    if kind == "revolute":
        row.update(rated_torque=f"{rated!r} N*m", stall_torque=f"{2 * rated!r} N*m", speed=f"{speed!r} rad/s")
    else:
        row.update(rated_force=f"{rated!r} N", stall_force=f"{2 * rated!r} N", speed=f"{speed!r} m/s")
    return row


def make_arm(rows, *, mount=(0, 0, 0), mount_orientation=(0, 0, 0), tool=(0, 0, 0), gripper=None,
             payload=None) -> Arm:
    raw = {"name": "test arm", "mount": ", ".join(map(repr, map(float, mount))) + " m",
           "mount_orientation": ", ".join(map(repr, map(float, mount_orientation))) + " rad",
           "tool": ", ".join(map(repr, map(float, tool))) + " m", "joints": rows}
    if gripper is not None:
        raw["gripper"] = gripper
    if payload is not None:
        raw["payload"] = payload
    problems = []
    arm = parse_arm_section(raw, lambda p, v, e: problems.append((p, v, e)), "arm", None)
    assert problems == [] and arm is not None
    return arm


def dh_numpy(theta, d, a, alpha):
    """Spong, Hutchinson and Vidyasagar, Robot Modeling and Control, 2006, eq. 3.10, in plain NumPy."""
    ct, st, ca, sa = np.cos(theta), np.sin(theta), np.cos(alpha), np.sin(alpha)
    return np.array([[ct, -st * ca, st * sa, a * ct], [st, ct * ca, -ct * sa, a * st], [0, sa, ca, d], [0, 0, 0, 1]])


def chain_numpy(arm: Arm, q):
    """Frames T_0^i (i = 0..n) of the DH chain, independent of the SymPy derivation."""
    T = [np.eye(4)]
    for j, qi in zip(arm.joints, q):
        th = j.theta + (qi if j.revolute else 0.0)
        d = j.d + (0.0 if j.revolute else qi)
        T.append(T[-1] @ dh_numpy(th, d, j.a, j.alpha))
    return T


def spatial_arm() -> Arm:
    """A 5-joint spatial arm with a prismatic joint, offsets and twists, links with masses."""
    rows = [joint("j1", a=0.05, alpha=math.pi / 2, d=0.30, mass=1.2, com=(0.0, -0.1, 0.02)),
            joint("j2", a=0.40, theta=0.3, mass=0.9, com=(-0.2, 0.0, 0.01)),
            joint("slide", "prismatic", alpha=-math.pi / 2, d=0.05, lower=0.0, upper=0.3, home=0.1, mass=0.5,
                  com=(0.0, 0.02, -0.05)),
            joint("j4", a=0.02, alpha=math.pi / 2, d=0.10, mass=0.3, com=(0.0, 0.0, -0.03)),
            joint("j5", a=0.0, alpha=0.7, d=0.08, theta=-0.2, mass=0.2, com=(0.01, 0.0, 0.02))]
    return make_arm(rows, tool=(0.01, 0.02, 0.12),
                    gripper={"mass": "0.3 kg", "center_of_mass": "0, 0, 0.05 m", "opening": "50 mm", "time": "0.5 s"},
                    payload="0.7 kg")


def random_joints(arm: Arm, n: int) -> np.ndarray:
    return RNG.uniform(arm.lower, arm.upper, (n, arm.n))


# --------------------------------------------------------------------------------------
# forward kinematics against textbook arms
# --------------------------------------------------------------------------------------
def test_planar_two_link_arm_matches_the_textbook():
    # Spong, Hutchinson and Vidyasagar, Robot Modeling and Control, 2006, sec. 3.3 (planar
    # elbow manipulator; section number from memory): x = a1 c1 + a2 c12, y = a1 s1 + a2 s12,
    # the end frame turned by theta1 + theta2.
    a1, a2 = 0.7, 0.45
    arm = make_arm([joint("shoulder", a=a1), joint("elbow", a=a2)])
    q = random_joints(arm, 200)
    pose = forward_kinematics(arm, q)
    t1, t12 = q[:, 0], q[:, 0] + q[:, 1]
    np.testing.assert_allclose(pose.tip[:, 0], a1 * np.cos(t1) + a2 * np.cos(t12), atol=1e-14)
    np.testing.assert_allclose(pose.tip[:, 1], a1 * np.sin(t1) + a2 * np.sin(t12), atol=1e-14)
    np.testing.assert_allclose(pose.tip[:, 2], 0.0, atol=1e-15)
    np.testing.assert_allclose(pose.rotation[:, 0, 0], np.cos(t12), atol=1e-14)
    np.testing.assert_allclose(pose.rotation[:, 1, 0], np.sin(t12), atol=1e-14)


def test_three_link_cylindrical_arm_matches_the_textbook():
    # Spong et al. 2006, sec. 3.3 (three-link cylindrical manipulator, from memory; the matrix
    # below was also worked by hand from the DH table a = 0, alpha = (0, -90 deg, 0),
    # d = (d1, d2*, d3*), theta = (theta1*, 0, 0)):
    #   T_3^0 = [[c1, 0, -s1, -s1 d3], [s1, 0, c1, c1 d3], [0, -1, 0, d1 + d2]]
    d1 = 0.35
    arm = make_arm([joint("base", d=d1),
                    joint("lift", "prismatic", alpha=-math.pi / 2, lower=0.0, upper=0.8),
                    joint("reach", "prismatic", lower=0.0, upper=0.6)])
    q = random_joints(arm, 100)
    pose = forward_kinematics(arm, q)
    c1, s1, d2, d3 = np.cos(q[:, 0]), np.sin(q[:, 0]), q[:, 1], q[:, 2]
    np.testing.assert_allclose(pose.tip, np.column_stack([-s1 * d3, c1 * d3, d1 + d2]), atol=1e-14)
    R = np.zeros((len(q), 3, 3))
    R[:, 0, 0], R[:, 0, 2] = c1, -s1
    R[:, 1, 0], R[:, 1, 2] = s1, c1
    R[:, 2, 1] = -1.0
    np.testing.assert_allclose(pose.rotation, R, atol=1e-14)


def test_three_link_planar_arm_matches_the_textbook_and_modern_robotics():
    # Craig, Introduction to Robotics, 3rd ed., 2005, sec. 3.6 (three-link planar arm, from
    # memory): x = l1 c1 + l2 c12 + l3 c123, y = l1 s1 + l2 s12 + l3 s123.
    l1, l2, l3 = 0.5, 0.35, 0.12
    arm = make_arm([joint("j1", a=l1), joint("j2", a=l2), joint("j3", a=l3)])
    q = random_joints(arm, 100)
    tip = forward_kinematics(arm, q).tip
    c = np.cumsum(q, axis=1)
    expect = np.column_stack([l1 * np.cos(c[:, 0]) + l2 * np.cos(c[:, 1]) + l3 * np.cos(c[:, 2]),
                              l1 * np.sin(c[:, 0]) + l2 * np.sin(c[:, 1]) + l3 * np.sin(c[:, 2]), 0 * c[:, 0]])
    np.testing.assert_allclose(tip, expect, atol=1e-14)
    mr = pytest.importorskip("modern_robotics")
    # Lynch and Park, Modern Robotics, 2017, Example 4.1 (3R planar open chain, product of
    # exponentials): M = translation (l1 + l2 + l3, 0, 0), S_i = (0, 0, 1, 0, -x_i, 0) with x_i
    # the joint's distance along x at the zero configuration. Written by hand, not from DH.
    M = np.eye(4)
    M[0, 3] = l1 + l2 + l3
    S = np.array([[0, 0, 1, 0, 0, 0], [0, 0, 1, 0, -l1, 0], [0, 0, 1, 0, -(l1 + l2), 0]], float).T
    for qk, tk in zip(q[:20], tip[:20]):
        np.testing.assert_allclose(mr.FKinSpace(M, S, qk)[:3, 3], tk, atol=1e-12)


def _poe_model(arm: Arm):
    """Zero-configuration frames, screw axes (space frame) and link frames for modern_robotics,
    built in plain NumPy from the DH table."""
    T0 = chain_numpy(arm, np.zeros(arm.n))
    S = []
    for k, j in enumerate(arm.joints):
        z, p = T0[k][:3, 2], T0[k][:3, 3]
        S.append(np.r_[z, -np.cross(z, p)] if j.revolute else np.r_[np.zeros(3), z])
    M = T0[-1].copy()
    M[:3, 3] = T0[-1][:3, :3] @ np.asarray(arm.tool) + T0[-1][:3, 3]
    return T0, np.array(S).T, M


def test_spatial_arm_matches_modern_robotics_product_of_exponentials():
    # Reference: Lynch and Park, Modern Robotics, 2017, eq. 4.14 (space-frame product of
    # exponentials) as implemented by the 'modern_robotics' package (the book's code library).
    mr = pytest.importorskip("modern_robotics")
    arm = spatial_arm()
    _, S, M = _poe_model(arm)
    q = random_joints(arm, 30)
    pose = forward_kinematics(arm, q)
    for k in range(len(q)):
        T = mr.FKinSpace(M, S, q[k])
        np.testing.assert_allclose(pose.tip[k], T[:3, 3], atol=1e-12)
        np.testing.assert_allclose(pose.rotation[k], T[:3, :3], atol=1e-12)


def test_jacobian_against_finite_differences_and_modern_robotics():
    arm = spatial_arm()
    q = random_joints(arm, 10)
    J = jacobian(arm, q)
    h = 1e-6
    for k in range(len(q)):
        for i in range(arm.n):
            dq = np.zeros(arm.n)
            dq[i] = h
            plus, minus = forward_kinematics(arm, q[k] + dq), forward_kinematics(arm, q[k] - dq)
            # central differences: error O(h^2) ~ 1e-12, rounding ~ 1e-16 / h ~ 1e-10
            np.testing.assert_allclose(J[k, :3, i], (plus.tip[0] - minus.tip[0]) / (2 * h), atol=1e-8)
            dR = (plus.rotation[0] - minus.rotation[0]) / (2 * h)
            W = dR @ forward_kinematics(arm, q[k]).rotation[0].T  # skew(omega) = dR/dq R^T
            np.testing.assert_allclose(J[k, 3:, i], [W[2, 1], W[0, 2], W[1, 0]], atol=1e-8)
    mr = pytest.importorskip("modern_robotics")
    # Lynch and Park 2017, sec. 5.1.1: the space Jacobian's linear rows give the velocity of the
    # point at the space origin; the tip moves with v_tip = v_s + omega x p_tip.
    _, S, _ = _poe_model(arm)
    tips = forward_kinematics(arm, q).tip
    for k in range(len(q)):
        Js = mr.JacobianSpace(S, q[k])
        w, v = Js[:3], Js[3:]
        np.testing.assert_allclose(J[k, 3:], w, atol=1e-12)
        np.testing.assert_allclose(J[k, :3], v + np.cross(w.T, tips[k]).T, atol=1e-12)


# --------------------------------------------------------------------------------------
# servo loads
# --------------------------------------------------------------------------------------
def test_single_link_gravity_torque_by_hand():
    # Spong et al. 2006, sec. 7.1 (single link, from memory): holding torque m g l_c cos(theta)
    # for a link turning about a horizontal axis, centre of mass l_c from the axis.
    m, lc = 1.5, 0.2
    arm = make_arm([joint("j", a=0.5, mass=m, com=(lc - 0.5, 0.0, 0.0))])
    th = np.linspace(-np.pi, np.pi, 25)
    tau = static_loads(arm, th[:, None], gravity=(0.0, -G, 0.0), payload=0.0)[:, 0]
    np.testing.assert_allclose(tau, m * G * lc * np.cos(th), atol=1e-12)
    # with a payload at the tip (0.5 m from the axis)
    tau = static_loads(arm, th[:, None], gravity=(0.0, -G, 0.0), payload=2.0)[:, 0]
    np.testing.assert_allclose(tau, (m * lc + 2.0 * 0.5) * G * np.cos(th), atol=1e-12)


def test_gravity_loads_match_modern_robotics():
    # Lynch and Park 2017, sec. 8.3 (Newton-Euler inverse dynamics at rest gives the gravity
    # torques) via modern_robotics.GravityForces; gripper and payload merged into the last link.
    mr = pytest.importorskip("modern_robotics")
    arm = spatial_arm()
    T0, S, M = _poe_model(arm)
    masses = [j.mass for j in arm.joints]
    coms = [np.asarray(j.center_of_mass) for j in arm.joints]
    extra = [(arm.gripper.mass, np.asarray(arm.gripper.center_of_mass)), (arm.payload, np.asarray(arm.tool))]
    m_last = masses[-1] + sum(m for m, _ in extra)
    coms[-1] = (masses[-1] * coms[-1] + sum(m * c for m, c in extra)) / m_last
    masses[-1] = m_last
    frames = []
    for k in range(arm.n):
        F = T0[k + 1].copy()
        F[:3, 3] = T0[k + 1][:3, :3] @ coms[k] + T0[k + 1][:3, 3]
        frames.append(F)
    Mlist = [frames[0]] + [np.linalg.inv(frames[k - 1]) @ frames[k] for k in range(1, arm.n)]
    Mlist.append(np.linalg.inv(frames[-1]) @ M)
    Glist = [np.diag([1e-3, 1e-3, 1e-3, m, m, m]) for m in masses]
    g = np.array([0.3, -1.1, -9.7])
    q = random_joints(arm, 12)
    ours = static_loads(arm, q, gravity=g, payload=arm.payload)
    for k in range(len(q)):
        ref = mr.GravityForces(q[k], g, Mlist, Glist, S)
        np.testing.assert_allclose(ours[k], ref, atol=1e-10)


def test_manipulability_of_the_two_link_arm():
    # Yoshikawa, "Manipulability of robotic mechanisms", IJRR 4(2), 1985: for the planar 2R
    # arm w = l1 l2 |sin theta2| (we use the 3-row translational Jacobian; z rows are zero).
    arm = make_arm([joint("j1", a=0.6), joint("j2", a=0.4)])
    q = random_joints(arm, 50)
    np.testing.assert_allclose(manipulability(arm, q), 0.6 * 0.4 * np.abs(np.sin(q[:, 1])), atol=1e-13)


# --------------------------------------------------------------------------------------
# the demo arm and the design file
# --------------------------------------------------------------------------------------
def test_demo_arm_in_the_design(greenhouse):
    arm = greenhouse.sections["arm"]
    assert [j.role for j in arm.joints] == ["levelling", "levelling", "reach", "wrist_roll", "wrist_tilt"]
    assert arm.payload_source == "design" and arm.payload == greenhouse.payload.mass
    assert arm.total_mass == pytest.approx(0.05 + 0.05 + 0.10 + 0.06 + 0.04 + 0.12)  # links + gripper, by hand
    assert greenhouse.total_mass == pytest.approx(1.2 + 0.5 + 0.42)
    w = external_wrench(greenhouse, [[1.5, 0.8, 1.0]])[0]
    assert w[2] == pytest.approx(-greenhouse.total_mass * greenhouse.frame.g)
    # tip straight below the mount at home (gimbal at the mount, levelling at home): 40 mm slide
    # offset + 80 mm lift + 30 mm + 110 mm tool
    tip = np.asarray(arm.mount) + forward_kinematics(arm, arm.home).tip[0] @ rotation_matrices(
        np.array(arm.mount_orientation))[0].T
    np.testing.assert_allclose(tip, [0.0, 0.0, -0.26], atol=1e-12)


def test_reach_and_weakest_servo_of_the_demo(greenhouse):
    arm = greenhouse.sections["arm"]
    r = reach(arm, gravity=greenhouse.gravity, max_samples=3000)
    # worked by hand: the tilt servo holds tray (0.5 kg at 110 mm), gripper (0.12 kg at 80 mm)
    # and tilt link (0.04 kg at 50 mm) at 90 deg: (0.055 + 0.0096 + 0.002) kg*m * g
    assert arm.joints[r.weakest].name == "tilt"
    assert r.peak_load[r.weakest] == pytest.approx((0.5 * 0.11 + 0.12 * 0.08 + 0.04 * 0.05) * G, rel=1e-9)
    assert abs(r.joints[r.weakest_sample, 4]) == pytest.approx(math.pi / 2)
    # the lift carries everything below it, whatever the pose: (0.10 + 0.06 + 0.04 + 0.12 + 0.5) kg * g
    np.testing.assert_allclose(np.abs(r.loads[:, 2]), 0.82 * G, rtol=1e-12)
    # a vertical wrist-roll axis takes no gravity torque
    np.testing.assert_allclose(r.loads[:, 3], 0.0, atol=1e-12)
    # reach: tip from 110 mm (lift 40 mm, tilted 90 deg) to 420 mm below the platform point
    assert r.tips[:, 2].max() == pytest.approx(-0.04 - 0.04 - 0.03, abs=1e-12)
    assert r.tips[:, 2].min() == pytest.approx(-0.04 - 0.24 - 0.03 - 0.11, abs=1e-12)
    text = "\n".join(r.summary())
    assert "weakest servo: tilt at 65 %" in text and "turn" in text
    fig = r.figure(color="servo")
    assert len(fig.data) == 3 and len(fig.data[0].x) == len(r.tips)


def test_demo_checks_pass_and_a_weak_servo_fails(greenhouse):
    checks = design_checks(greenhouse)
    assert [c.subject for c in checks] == ["arm joint level roll", "arm joint level pitch", "arm joint lift",
                                           "arm joint turn", "arm joint tilt"]
    assert all(c.status == "pass" for c in checks)
    text = (EXAMPLES / "greenhouse_tray_3cable.toml").read_text()
    weak = loads_design(text.replace('rated_torque = "1.0 N*m"', 'rated_torque = "0.5 N*m"'))
    tilt = [c for c in design_checks(weak) if c.subject == "arm joint tilt"][0]
    # the tilt servo's peak static torque, worked by hand in test_reach_and_weakest_servo_of_the_demo:
    # (0.5 kg * 110 mm + 0.12 kg * 80 mm + 0.04 kg * 50 mm) g = 0.6531 N*m
    need = (0.5 * 0.11 + 0.12 * 0.08 + 0.04 * 0.05) * G
    assert tilt.status == "fail" and tilt.margin == pytest.approx(0.5 - need, rel=1e-9)
    close = loads_design(text.replace('rated_torque = "1.0 N*m"', 'rated_torque = "0.7 N*m"'))
    assert [c for c in design_checks(close) if c.subject == "arm joint tilt"][0].status == "warn"  # 93 % > 80 %


SANDER_ARM = '''
[arm]
name = "levelled wrist"
mount = "0, 0, -0.12 m"
mount_orientation = "0, 90, 0 deg"
tool = "0, 0, 0 m"

[[arm.joints]]
name = "level roll"
type = "revolute"
role = "levelling"
alpha = "90 deg"
lower = "-30 deg"
upper = "30 deg"
mass = "0.3 kg"
rated_torque = "20 N*m"
stall_torque = "40 N*m"
speed = "30 rpm"

[[arm.joints]]
name = "level pitch"
type = "revolute"
role = "levelling"
theta = "90 deg"
alpha = "90 deg"
lower = "-30 deg"
upper = "30 deg"
mass = "0.3 kg"
rated_torque = "20 N*m"
stall_torque = "40 N*m"
speed = "30 rpm"

[[arm.joints]]
name = "turn"
type = "revolute"
role = "wrist_roll"
d = "60 mm"
alpha = "90 deg"
lower = "-180 deg"
upper = "180 deg"
mass = "0.2 kg"
rated_torque = "5 N*m"
stall_torque = "10 N*m"
speed = "60 rpm"

[[arm.joints]]
name = "tilt"
type = "revolute"
role = "wrist_tilt"
theta = "90 deg"
a = "150 mm"
lower = "-90 deg"
upper = "90 deg"
mass = "0.25 kg"
center_of_mass = "-0.07, 0, 0 m"
rated_torque = "5 N*m"
stall_torque = "10 N*m"
speed = "60 rpm"
'''


@pytest.fixture(scope="module")
def sander_arm_design():
    text = (EXAMPLES / "hall_sander_8cable.toml").read_text()
    return loads_design(text + SANDER_ARM)


def test_levelling_keeps_the_base_level(sander_arm_design):
    d = sander_arm_design
    arm = d.sections["arm"]
    assert arm.levelling == (0, 1) and arm.gripper is None and arm.payload_source == "none"
    oris = np.column_stack([RNG.uniform(-0.3, 0.3, 40), RNG.uniform(-0.3, 0.3, 40), RNG.uniform(-3, 3, 40)])
    Rp = rotation_matrices(oris)
    lev = levelling_angles(arm, Rp, (0.0, 0.0, 1.0))
    assert np.all(lev.residual < 1e-9) and np.all(lev.within_limits)
    # the wrist-roll axis (z of the frame after the levelling joints) is vertical in the world,
    # checked with the independent NumPy chain
    Rm = rotation_matrices(np.array(arm.mount_orientation))[0]
    for k in range(len(oris)):
        q = np.r_[lev.angles[k], 0.0, 0.0]
        z2 = Rp[k] @ Rm @ chain_numpy(arm, q)[2][:3, 2]
        np.testing.assert_allclose(z2, [0.0, 0.0, -1.0], atol=1e-9)
    # tilt beyond the levelling range: flagged
    far = levelling_angles(arm, rotation_matrices(np.array([[0.8, 0.0, 0.0]])), (0, 0, 1))
    assert not far.ok[0]
    checks = design_checks(d)
    lev_check = [c for c in checks if c.key == "arm_levelling"][0]
    assert lev_check.status == "pass" and lev_check.value < 1e-6


# --------------------------------------------------------------------------------------
# the [arm] section: every problem reported, none raised
# --------------------------------------------------------------------------------------
def test_every_problem_in_the_arm_section_is_reported():
    text = (EXAMPLES / "greenhouse_tray_3cable.toml").read_text()
    bad = (text.replace('mount = "0, 0, 0 m"', 'mount = "0, 0, -4 kg"')
               .replace('alpha = "90 deg"', 'alpha = "90 mm"')
               .replace('stall_torque = "0.9 N*m"', 'stall_torque = "0.1 N*m"')
               .replace('home = "80 mm"', 'home = "300 mm"')
               .replace('name = "turn"', 'name = "tool roll"')
               .replace('rated_torque = "1.0 N*m"', 'rated_force = "1.0 N"')
               .replace('opening = "120 mm"', 'opening = "-5 mm"\ncolour = "green"'))
    with pytest.raises(DesignError) as info:
        loads_design(bad)
    paths = {p.path for p in info.value.problems}
    assert {"arm.mount", "arm.joints[3].alpha", "arm.joints[3].stall_torque", "arm.joints[2].home",
            "arm.joints[3].name", "arm.joints[4].rated_force", "arm.joints[4].rated_torque",
            "arm.gripper.opening", "arm.gripper.colour"} <= paths
    msg = str(info.value)
    assert "wrong dimension" in msg and "within lower .. upper" in msg


@pytest.mark.parametrize("change, path, words", [
    ({"role": "levelling"}, "arm.joints", "levelling joints come first"),
    ({"type": "prismatic", "lower": "0 m", "upper": "0.1 m", "rated_force": "5 N", "stall_force": "9 N",
      "speed": "0.1 m/s", "rated_torque": None, "stall_torque": None}, "arm.joints[1].type", "revolute"),
    ({"lower": "10 deg", "home": None}, "arm.joints[1].home", "home value is required"),
    ({"upper": "-200 deg"}, "arm.joints[1].upper", "must exceed lower"),
    ({"mass": None}, "arm.joints[1].mass", "required"),
    ({"speed": "0 rpm"}, "arm.joints[1].speed", "greater than zero"),
])
def test_single_problems_name_the_field(change, path, words):
    rows = [joint("lift", "prismatic", lower=0.0, upper=0.2, rated=20.0),
            joint("turn", role="wrist_roll", rated=1.0)]
    row = rows[1]
    for k, v in change.items():
        if v is None:
            row.pop(k, None)
        else:
            row[k] = v
    problems = []
    raw = {"mount": "0, 0, 0 m", "tool": "0, 0, 0.1 m", "joints": rows}
    out = parse_arm_section(raw, lambda p, v, e: problems.append((p, v, e)), "arm", None)
    assert out is None
    assert any(p == path and words in e for p, _, e in problems), problems


def test_payload_without_gripper_and_missing_joints():
    problems = []
    out = parse_arm_section({"mount": "0, 0, 0 m", "tool": "0, 0, 0 m", "payload": "1 kg"},
                            lambda p, v, e: problems.append((p, v, e)), "arm", None)
    assert out is None
    assert {p for p, _, _ in problems} == {"arm.joints", "arm.payload"}
    problems.clear()
    assert parse_arm_section("not a table", lambda p, v, e: problems.append((p, v, e)), "arm", None) is None
    assert problems and problems[0][0] == "arm"


def test_joint_samples_are_checked():
    arm = make_arm([joint("j1", a=0.5)])
    with pytest.raises(ValueError, match="shape"):
        forward_kinematics(arm, np.zeros((3, 2)))
    with pytest.raises(ValueError, match="not finite"):
        forward_kinematics(arm, [[np.nan]])


def test_midpoint_centre_of_mass_is_assumed_and_said():
    # a prismatic slide along z: o_{i-1} sits d below o_i in frame {i}; the midpoint is -d/2 (by hand)
    arm = make_arm([joint("slide", "prismatic", lower=0.0, upper=0.4, home=0.2, mass=1.0)])
    assert arm.joints[0].com_assumed and arm.joints[0].center_of_mass == pytest.approx((0.0, 0.0, -0.1))
    text = "\n".join(reach(arm, max_samples=10).summary())
    assert re.search(r"assumed at the link midpoint for: slide", text)


def test_equations_for_the_sheet_come_from_the_derivation():
    import sympy as sp

    from cablekit.arm import dh_transform, latex_equations
    from cablekit.tooltip import latex_equations as tip_equations

    th, d, a, al = sp.symbols(r"\theta_i d_i a_i \alpha_i", real=True)
    eqs = latex_equations("point")
    assert eqs["DH link transform"].endswith(sp.latex(dh_transform(th, d, a, al)))
    assert "offset moment" in tip_equations("rigid") and "offset moment" not in tip_equations("point")
