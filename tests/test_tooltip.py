"""Platform + arm: tool-tip pose, pivoting about the tip, loads on the platform, tip workspace."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import linprog

from cablekit.design import loads_design
from cablekit.kinematics import structure_matrix
from cablekit.statics import rotation_matrices, tension_limits
from cablekit.tooltip import (arm_world_polyline, inside_frame, load_wrench, pivot, solve_platform, tip_pose,
                              tip_tensions, tip_workspace)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
RNG = np.random.default_rng(7)


def dh_numpy(theta, d, a, alpha):
    """Spong, Hutchinson and Vidyasagar, Robot Modeling and Control, 2006, eq. 3.10, in plain NumPy."""
    ct, st, ca, sa = np.cos(theta), np.sin(theta), np.cos(alpha), np.sin(alpha)
    return np.array([[ct, -st * ca, st * sa, a * ct], [st, ct * ca, -ct * sa, a * st], [0, sa, ca, d], [0, 0, 0, 1]])


def tip_by_hand(design, pose, q):
    """World tool tip from a platform pose and joint values, composed in plain NumPy:
    T_world = T_platform T_mount A_1 ... A_n T_tool (no cablekit kinematics involved)."""
    arm = design.sections["arm"]
    T = np.eye(4)
    T[:3, 3] = pose[:3]
    if len(pose) == 6:
        T[:3, :3] = rotation_matrices(np.asarray(pose[3:])[None])[0]
    Tm = np.eye(4)
    Tm[:3, :3] = rotation_matrices(np.array(arm.mount_orientation)[None])[0]
    Tm[:3, 3] = arm.mount
    T = T @ Tm
    for j, qi in zip(arm.joints, q):
        T = T @ dh_numpy(j.theta + (qi if j.revolute else 0.0), j.d + (0.0 if j.revolute else qi), j.a, j.alpha)
    return (T @ np.r_[arm.tool, 1.0])[:3]


@pytest.fixture(scope="module")
def sander_arm():
    from test_arm import SANDER_ARM  # the rigid test rig's levelled wrist (tests/test_arm.py)

    return loads_design((EXAMPLES / "hall_sander_8cable.toml").read_text() + SANDER_ARM)


def test_tip_pose_matches_hand_composition(greenhouse, sander_arm):
    for d in (greenhouse, sander_arm):
        arm = d.sections["arm"]
        N = 20
        q = RNG.uniform(arm.lower, arm.upper, (N, arm.n))
        lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
        poses = RNG.uniform(lo, hi, (N, 3))
        if d.dof == 6:
            poses = np.column_stack([poses, RNG.uniform(-0.3, 0.3, (N, 3))])
        tips = tip_pose(d, poses, q).tip
        for k in range(N):
            np.testing.assert_allclose(tips[k], tip_by_hand(d, poses[k], q[k]), atol=1e-12)
        line = arm_world_polyline(d, poses, q)
        np.testing.assert_allclose(line[:, 0], poses[:, :3], atol=1e-15)
        np.testing.assert_allclose(line[:, -1], tips, atol=1e-12)


def test_pivoting_keeps_the_tip_fixed_while_the_wrist_turns(greenhouse):
    # the tip, recomputed with the independent NumPy chain from every solved platform pose,
    # stays within 1e-9 m while the wrist rolls through its whole range, then tilts through its range
    d = greenhouse
    arm = d.sections["arm"]
    tip = np.array([1.4, 0.9, 0.6])
    wr, wt = arm.joints[arm.role_index("wrist_roll")], arm.joints[arm.role_index("wrist_tilt")]
    roll = np.linspace(wr.lower, wr.upper, 73)
    tilt = np.linspace(wt.lower, wt.upper, 37)
    for res in (pivot(d, tip, roll=roll, tilt=math.radians(60)), pivot(d, tip, roll=math.radians(30), tilt=tilt)):
        assert np.all(res.ok)
        for k in range(len(res.tips)):
            assert np.linalg.norm(tip_by_hand(d, res.platform_poses[k], res.joints[k]) - tip) < 1e-9
        assert res.tip_error.max() < 1e-9
        # the platform really moves: it circles the tip (roll) or swings over it (tilt)
        assert np.ptp(res.platform_poses[:, :2], axis=0).max() > 0.1
    # rolling at 60 deg tilt: the platform circles the tip at radius 110 mm * sin(60 deg) (by hand)
    res = pivot(d, tip, roll=roll, tilt=math.radians(60))
    r = np.linalg.norm(res.platform_poses[:, :2] - tip[:2], axis=1)
    np.testing.assert_allclose(r, 0.11 * math.sin(math.radians(60)), atol=1e-12)


def test_pivoting_on_a_tilted_rigid_platform_levels_the_arm(sander_arm):
    d = sander_arm
    tip = np.array([2.0, 1.5, 0.9])
    ori = np.radians([8.0, -5.0, 20.0])
    tilt = np.linspace(-math.pi / 2, math.pi / 2, 31)
    for res in (pivot(d, tip, roll=np.linspace(-math.pi, math.pi, 49), tilt=0.5, orientation=ori),
                pivot(d, tip, roll=1.0, tilt=tilt, orientation=ori)):
        assert np.all(res.ok) and np.all(res.levelling_residual < 1e-9)
        np.testing.assert_allclose(res.platform_poses[:, 3:], np.broadcast_to(ori, (len(res.tips), 3)))
        for k in range(len(res.tips)):
            assert np.linalg.norm(tip_by_hand(d, res.platform_poses[k], res.joints[k]) - tip) < 1e-9
        # the levelling angles are the same for every wrist angle (they only answer the platform tilt)
        assert np.ptp(res.joints[:, :2], axis=0).max() < 1e-12


def test_unreachable_tips_are_explained(greenhouse):
    res = solve_platform(greenhouse, [[3.6, 1.0, 1.0], [1.5, 0.9, 0.8]], tilt=[0.0, math.radians(120)])
    assert not res.ok.any()
    assert "outside the frame" in res.reason(0)
    assert "joint tilt would need 120.0 deg" in res.reason(1) and "-90.0 deg .. 90.0 deg" in res.reason(1)
    with pytest.raises(ValueError, match="unknown joint"):
        solve_platform(greenhouse, [[1.5, 0.9, 0.8]], joints={"elbow": 0.1})
    with pytest.raises(ValueError, match="only reach joints"):
        solve_platform(greenhouse, [[1.5, 0.9, 0.8]], joints={"tilt": 0.1})
    with pytest.raises(ValueError, match="no orientation"):
        solve_platform(greenhouse, [[1.5, 0.9, 0.8]], orientation=[0.1, 0, 0])


def test_inside_frame_rule(greenhouse):
    # exits span x 0..3, y 0..2.6 at z 2.4; a suspended platform may hang anywhere below
    ok = inside_frame(greenhouse, [[1.5, 1.0, 0.1], [1.5, 1.0, 2.5], [-0.1, 1.0, 1.0], [1.5, 2.7, 1.0], [0, 0, -3]])
    assert ok.tolist() == [True, False, False, False, True]


def test_point_platform_carries_the_whole_weight(greenhouse):
    # Newton's first law: the cables' vertical pull equals the total weight (platform 1.2 kg,
    # arm 0.42 kg with its levelling gimbal, and the 0.5 kg tray only while the gripper holds it)
    d = greenhouse
    arm = d.sections["arm"]
    res = solve_platform(d, RNG.uniform([1.2, 0.7, 0.5], [1.8, 1.1, 1.0], (30, 3)),
                         roll=RNG.uniform(-3, 3, 30), tilt=RNG.uniform(-1.5, 1.5, 30))
    for holding, mass in ((True, 2.12), (False, 1.62)):
        w = load_wrench(d, res.platform_poses, res.joints, holding=holding)
        np.testing.assert_allclose(w, np.broadcast_to([0, 0, -mass * d.frame.g], w.shape), atol=1e-12)
        ten = tip_tensions(d, res.platform_poses, res.joints, holding=holding)
        W = structure_matrix(d, res.platform_poses)
        np.testing.assert_allclose(np.einsum("nij,nj->ni", W, ten.tensions)[:, 2], mass * d.frame.g, rtol=1e-10)
    assert arm.payload == 0.5


def test_offset_moment_on_a_rigid_platform():
    # one horizontal link of 2 kg sticking out 0.5 m along x from a mount 0.1 m below the
    # platform point; its centre of mass at r = (0.25, 0, -0.1) m. Moment about the platform
    # point, by hand: M = r x F with F = (0, 0, -2 g) -> (0, 0.5 g, 0) N*m
    # (Meriam and Kraige, Engineering Mechanics: Statics, 7th ed., 2012, sec. 2/5, M = r x F).
    arm_text = '''
[arm]
mount = "0, 0, -0.1 m"
tool = "0, 0, 0 m"
[[arm.joints]]
name = "swing"
type = "revolute"
role = "reach"
a = "0.5 m"
lower = "-180 deg"
upper = "180 deg"
mass = "2 kg"
center_of_mass = "-0.25, 0, 0 m"
rated_torque = "50 N*m"
stall_torque = "90 N*m"
speed = "1 rad/s"
'''
    d = loads_design((EXAMPLES / "hall_sander_8cable.toml").read_text() + arm_text)
    g = d.frame.g
    pose = np.array([[2.0, 1.5, 1.2, 0.0, 0.0, 0.0]])
    w_arm = load_wrench(d, pose, [[0.0]], holding=False)[0]
    plain = d.platform.mass + d.payload.mass
    # platform and payload centres lie on the z axis: level, they add no moment
    np.testing.assert_allclose(w_arm[:3], [0, 0, -(plain + 2.0) * g], atol=1e-12)
    np.testing.assert_allclose(w_arm[3:], [0.0, 0.5 * g, 0.0], atol=1e-12)
    # turned 90 deg about the mount's z: r = (0, 0.25, -0.1) -> M = (-0.5 g, 0, 0)
    w90 = load_wrench(d, pose, [[math.pi / 2]], holding=False)[0]
    np.testing.assert_allclose(w90[3:], [-0.5 * g, 0.0, 0.0], atol=1e-12)
    # tensions balance that wrench: checked against scipy's LP feasibility on W t = -w
    ten = tip_tensions(d, pose, [[0.0]], holding=False)
    W = structure_matrix(d, pose)[0]
    lim = tension_limits(d)
    np.testing.assert_allclose(W @ ten.tensions[0], -w_arm, atol=1e-6)
    ref = linprog(np.zeros(d.m), A_eq=W, b_eq=-w_arm, bounds=list(zip(lim.t_min, lim.t_max)), method="highs")
    assert (ref.status == 0) == bool(ten.feasible[0])


def test_tip_workspace(greenhouse):
    d = greenhouse
    tips = np.array([[1.5, 0.9, 0.7], [1.5, 0.34, 0.8], [3.5, 1.0, 0.8], [1.5, 0.9, 0.1]])
    wrist = np.radians([[0, 0], [0, 90], [90, 90], [180, 90]])
    ws = tip_workspace(d, tips=tips, wrist=wrist, holding=False)
    assert ws.feasible.shape == (4, 4)
    assert np.all(ws.feasible <= ws.reach_ok) and np.all(ws.dexterous <= ws.reachable)
    # middle of the bench area: every orientation; near the front edge (y = 0.34 m) rolling the
    # tilted tool to 90 deg swings the platform out where post C goes slack; outside the frame: none
    assert ws.dexterous[0] and ws.reachable[1] and not ws.dexterous[1] and not ws.feasible[1, 2]
    assert not ws.reachable[2] and not ws.reach_ok[2].any()
    # holding the 0.5 kg tray pulls every cable tighter: the front-edge pose becomes feasible
    assert tip_workspace(d, tips=tips[1:2], wrist=wrist[2:3], holding=True).feasible[0, 0]
    text = "\n".join(ws.summary())
    assert "4 tip positions x 4 tool orientations, payload not held" in text
    assert len(ws.figure().data) == 3
    grid = tip_workspace(d, step=0.3)
    assert len(grid.tips) > 10 and grid.reachable.mean() > 0.5
