"""The suspended platform with separate attachments: equilibrium pose, tilt, checks."""

import math
from pathlib import Path

import numpy as np
import pytest

from cablekit.checks import CHECK_PROVIDERS, run_all, run_assumptions
from cablekit.design import DesignError, dumps_design, loads_design
from cablekit.suspended import (design_assumptions, design_checks, design_poses, hanging_equilibrium,
                                has_spread_attachments, level_lengths, meeting_attachments, suspended_poses)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"

G = np.array([0.0, 0.0, -9.80665])
GREENHOUSE_TEXT = (EXAMPLES / "greenhouse_tray_3cable.toml").read_text()


def _triangle(r):
    return np.array([[r * math.cos(t), r * math.sin(t), 0.0] for t in (0.0, 2 * math.pi / 3, 4 * math.pi / 3)])


def test_body_hanging_from_one_point_rests_with_its_centre_of_mass_below_it():
    # Three cables from ONE exit point with equal lengths hold the body rigidly to that point: a
    # body hanging from one point rests with its centre of gravity vertically below the point of
    # suspension (statics of a pendulum; e.g. Meriam and Kraige, Engineering Mechanics: Statics,
    # centre of gravity chapter; from memory).  Apex height h = sqrt(L^2 - r^2) above the
    # attachment plane, centre of mass at (e, 0, -c): tilt = atan(e / (h + c)).
    r, L, e, c = 0.2, 1.0, 0.05, 0.1
    b = _triangle(r)
    apex = np.array([0.0, 0.0, 3.0])
    h = math.sqrt(L * L - r * r)
    eq = hanging_equilibrium(np.tile(apex, (3, 1)), b, np.full(3, L), mass=2.0, center_of_mass=[e, 0, -c],
                             gravity=G, guess=apex - [0, 0, h])
    up = np.array([0.0, 0.0, 1.0])
    tilt = math.acos(eq.rotation[:, 2] @ up)
    assert tilt == pytest.approx(math.atan2(e, h + c), abs=1e-6)  # SLSQP ftol 1e-14: micro-radian agreement
    com = eq.position + eq.rotation @ [e, 0, -c]
    assert np.allclose(com[:2], apex[:2], atol=1e-6)
    assert eq.stable and eq.residual < 1e-6 and np.all(eq.tensions > 0)


def test_parallel_cables_share_the_weight_by_the_lever_rule_and_stay_level():
    # Three vertical cables of equal length (a trapeze): with the centre of mass inside the
    # attachment triangle the platform hangs level and each tension is the weight times the
    # barycentric coordinate of the centre of mass (lever rule, statics; from memory).
    b = np.array([[0.0, 0.0, 0.0], [0.4, 0.0, 0.0], [0.0, 0.3, 0.0]])
    a = b + [0.0, 0.0, 2.0]
    com = np.array([0.1, 0.1, -0.05])
    eq = hanging_equilibrium(a, b, np.full(3, 2.0), mass=3.0, center_of_mass=com, gravity=G, guess=[0, 0, 0])
    lam = np.array([1 - com[0] / 0.4 - com[1] / 0.3, com[0] / 0.4, com[1] / 0.3])  # barycentric coordinates
    assert np.allclose(eq.tensions, lam * 3.0 * 9.80665, rtol=1e-6)  # optimiser tolerance
    assert np.allclose(eq.rotation, np.eye(3), atol=1e-6) and not eq.slack.any()


def test_centre_of_mass_outside_the_attachments_slackens_a_cable():
    # the same trapeze with the centre of mass beyond the edge b0-b1: cable 2 cannot push, so
    # it goes slack and the platform hangs from the two others (cables only pull)
    b = np.array([[0.0, 0.0, 0.0], [0.4, 0.0, 0.0], [0.0, 0.3, 0.0]])
    eq = hanging_equilibrium(b + [0, 0, 2.0], b, np.full(3, 2.0), mass=3.0, center_of_mass=[0.2, -0.1, -0.05],
                             gravity=G, guess=[0, 0, 0])
    assert eq.slack.tolist() == [False, False, True] and eq.tensions[2] == 0.0
    assert eq.residual < 1e-6 and eq.stable


def test_two_cable_planar_body_three_forces_meet_at_one_point():
    # A bar on two cables in the x-z plane with its centre of mass off-centre: three forces in
    # equilibrium are concurrent (three-force member; Meriam and Kraige, Engineering Mechanics:
    # Statics, sec. 3/3; from memory): the cable lines and the vertical through the centre of
    # mass meet at one point.
    a = np.array([[-1.0, 0.0, 2.0], [1.2, 0.0, 2.0]])
    b = np.array([[-0.3, 0.0, 0.0], [0.3, 0.0, 0.0]])
    L = level_lengths(a, b, [[0.0, 0.0, 0.5]])[0]
    com = np.array([0.15, 0.0, -0.1])
    eq = hanging_equilibrium(a, b, L, mass=1.5, center_of_mass=com, gravity=G, guess=[0, 0, 0.5])
    att = eq.position + b @ eq.rotation.T
    d0, d1 = a[0] - att[0], a[1] - att[1]
    # intersection of the two cable lines in the x-z plane
    M = np.array([[d0[0], -d1[0]], [d0[2], -d1[2]]])
    s = np.linalg.solve(M, (att[1] - att[0])[[0, 2]])
    X = att[0] + s[0] * d0
    c_world = eq.position + eq.rotation @ com
    assert X[0] == pytest.approx(c_world[0], abs=1e-6)
    assert abs(eq.position[1]) < 1e-6 and eq.residual < 1e-6  # stays in its plane (optimiser tolerance)
    tilt = math.degrees(math.acos(eq.rotation[2, 2]))
    assert tilt > 1.0  # an offset centre of mass tilts a two-point suspension


ONE_SHACKLE = 'attachments = ["0, 0, 0 m", "0, 0, 0 m", "0, 0, 0 m"]'
RING = 'attachments = ["-0.0433, -0.025, 0 m", "0.0433, -0.025, 0 m", "0, 0.05, 0 m"]'  # 50 mm ring


NO_ARM = (GREENHOUSE_TEXT.split("# The servo arm under the platform")[0]
          + GREENHOUSE_TEXT[GREENHOUSE_TEXT.index("[errors]"):])  # the demo without its [arm]


def _without_levelling(text):
    """The demo arm without its levelling gimbal, hung 40 mm below the platform point, the
    platform's own centre of mass at the shackle (the greenhouse design before it was fixed)."""
    head, rest = text.split('[[arm.joints]]\nname = "level roll"', 1)
    rest = rest[rest.index('[[arm.joints]]\nname = "lift"'):]
    text = (head + rest).replace('mount = "0, 0, 0 m"\nmount_orientation = "0, 90, 0 deg"',
                                  'mount = "0, 0, -0.04 m"\nmount_orientation = "180, 0, 0 deg"')
    text = text.replace('d = "40 mm"   # the slide starts 40 mm below the gimbal\n', "")
    return text.replace('center_of_mass = "0, 0, -0.25 m"\n', "", 1)


def _greenhouse(text=GREENHOUSE_TEXT):
    return loads_design(text)


def test_point_platform_attachments_parse_and_save():
    d = _greenhouse(GREENHOUSE_TEXT.replace(ONE_SHACKLE, RING))
    assert d.platform.kind == "point" and len(d.platform.built_attachments) == 3
    assert has_spread_attachments(d)
    assert np.allclose(d.attachments, 0.0)  # the point model still drives the kinematics
    again = loads_design(dumps_design(d))
    assert np.allclose(again.platform.built_attachments, d.platform.built_attachments, rtol=0, atol=1e-12)
    shackle = _greenhouse()
    assert not has_spread_attachments(shackle) and len(shackle.platform.built_attachments) == 3
    # without attachments the cables meet at the reference point, as on one shackle
    bare = _greenhouse(GREENHOUSE_TEXT.replace(ONE_SHACKLE + "\n", ""))
    assert bare.platform.built_attachments == () and np.allclose(meeting_attachments(bare), 0.0)


def test_centred_point_platform_states_that_it_stays_level():
    # no arm and the centre of mass below the point: nothing to check, the sheet says why
    text = NO_ARM
    d = loads_design(text)
    assert design_checks(d) == []
    assert "stay level" in " ".join(design_assumptions(d))
    assert any("stay level" in a for a in run_assumptions(d))
    # the same platform with its centre of mass 30 mm off the vertical is checked (tilt)
    off = loads_design(text.replace('center_of_mass = "0, 0, -0.25 m"', 'center_of_mass = "0.03, 0, -0.25 m"'))
    c = design_checks(off)[0]
    # no arm: the point where the cables meet is where the point model puts it (the judged
    # error is 0); the tilt, atan(30 / 250) = 6.8 deg (a body hanging from one point), is shown
    assert c.key == "suspended_tip_error" and c.status == "pass" and c.value < 1e-9
    assert "tilt 6.84 deg" in c.detail
@pytest.mark.parametrize("bad, field", [
    ('["0, 0, 0 m", "0, 0, 0 m"]', "platform.attachments"),
    ('["0, 0, 0 m", "0, 0, 0 m", "1, 2 m"]', "platform.attachments[2]"),
    ('["0, 0, 0 m", "0, 0, 0 m", "1, 2, nan m"]', "platform.attachments[2]"),
    ('"0, 0, 0 m"', "platform.attachments"),
])
def test_bad_attachments_name_the_field(bad, field):
    text = GREENHOUSE_TEXT.replace(ONE_SHACKLE, "attachments = " + bad)
    with pytest.raises(DesignError) as exc:
        loads_design(text)
    assert field in [p.path for p in exc.value.problems]


def test_point_platform_with_an_arm_tilts_about_ten_degrees_and_fails():
    # the greenhouse rig before its fix: cables on one point, the arm hung without levelling.
    # Closed form (a body hanging from one point, statics): tilt = atan(horizontal / vertical
    # offset of the centre of mass from the point), with the centre of mass summed by hand.
    d = _greenhouse(_without_levelling(GREENHOUSE_TEXT))
    arm = d.sections["arm"]
    q = np.array([0.08, math.pi / 2, math.radians(30)])  # 'turn to shelf': wrist turned 90, tilted 30 deg
    res = suspended_poses(d, [[1.8, 1.1, 0.9]], joints=q, holding=True, labels=["turn to shelf"])
    from cablekit.arm import arm_points, mass_list, mount_rotation

    m, c = mass_list(arm, arm_points(arm, q[None]), holding=True)
    r = np.asarray(arm.mount) + c[0] @ mount_rotation(arm).T
    com = (m[0] @ r) / (m[0].sum() + 1.2)  # platform 1.2 kg at the point
    assert math.degrees(res.tilt[0]) == pytest.approx(math.degrees(math.atan2(math.hypot(*com[:2]), -com[2])),
                                                      abs=1e-9)  # closed form both ways: rounding only
    assert 8.0 < math.degrees(res.tilt[0]) < 14.0  # "of the order of 10 deg"
    assert res.tip_error[0] > 0.02 and res.shift[0] < 1e-12 and res.residual[0] < 1e-9
    # independent force balance: the tensions carry the total weight
    u = d.exits - res.position[0]
    u /= np.linalg.norm(u, axis=1, keepdims=True)
    assert np.allclose(res.tensions[0] @ u, [0, 0, d.total_mass * 9.80665], rtol=1e-9)
    assert res.summary() and res.figure().data
    c = next(c for c in design_checks(d) if c.key == "suspended_tip_error")
    assert c.status == "fail" and c.value > 20 and c.limit == pytest.approx(5.0)
    assert "required_accuracy" in c.source and "pendulum" in c.detail
    assert any(c.key == "suspended_tip_error" and c.status == "fail" for c in run_all(d))
    assert "cablekit.suspended:design_checks" in CHECK_PROVIDERS
    assert "pendulum" in " ".join(design_assumptions(d))


def test_without_required_accuracy_the_tilt_limit_judges():
    text = _without_levelling(GREENHOUSE_TEXT).replace('required_accuracy = "5 mm"\n', "")
    c = next(c for c in design_checks(_greenhouse(text)) if c.key == "suspended_tilt")
    assert c.status == "fail" and c.unit == "deg" and c.limit == pytest.approx(1.0) and c.value > 10
    assert "common practice, no source" in c.source


def test_the_fixed_demo_tilts_but_its_levelled_arm_keeps_the_tip():
    d = _greenhouse()
    res = design_poses(d)
    # the platform swings by up to about 13 deg when the arm reaches out with the tray ...
    assert 8.0 < math.degrees(res.tilt.max()) < 16.0
    # ... but the gimbal at the shackle keeps the arm level: the tip moves only by the small turn
    # about the vertical a two-axis gimbal leaves (second order in the tilt)
    assert res.tip_error.max() < 2.5e-3 and np.all(res.residual < 1e-9)
    checks = design_checks(d, suspended=res)
    assert [(c.key, c.status) for c in checks] == [("suspended_tip_error", "pass")]
    # the same rig with its counterweight removed tilts further and warns or fails
    light = _greenhouse(GREENHOUSE_TEXT.replace('center_of_mass = "0, 0, -0.25 m"', 'center_of_mass = "0, 0, -0.12 m"'))
    assert design_checks(light)[0].status in ("warn", "fail")


def test_spread_attachments_tilt_the_platform_even_with_the_arm_at_home():
    # a 50 mm ring of eyes, each facing its post, on the rig without levelling, the winches
    # aiming the level platform (controller="level"): under the exits' centroid the three cable
    # lines meet on the axis and the platform hangs level; off-centre they do not, and it tilts
    # with no arm offset at all (checked by the force and moment residual)
    d = _greenhouse(_without_levelling(GREENHOUSE_TEXT).replace(ONE_SHACKLE, RING))
    centre = suspended_poses(d, [[1.5, 0.8667, 1.2]], holding=True, controller="level")
    assert math.degrees(centre.tilt[0]) < 1e-3 and centre.tip_error[0] < 2e-4  # exits 1 mm off symmetric
    side = suspended_poses(d, [[1.8, 1.1, 0.9]], holding=True, controller="level")
    assert math.degrees(side.tilt[0]) > 1.0 and side.residual[0] < 1e-6 and side.stable[0]
    # with the point model's lengths (what the task plan writes) the ring's offsets alone put
    # the platform several centimetres low
    point = suspended_poses(d, [[1.5, 0.8667, 1.2]], holding=True)
    assert point.shift[0] > 0.03 and point.position[0, 2] < 1.2
    assert "least-potential-energy" in " ".join(design_assumptions(d))
    with pytest.raises(ValueError, match="controller"):
        suspended_poses(d, [[1.5, 0.8667, 1.2]], controller="ideal")


def test_point_model_lengths_on_a_ring_drop_the_platform_by_the_closed_form():
    # exits on a circle (radius D, height H above the platform), eyes on a ring of radius r
    # facing them, lengths of the point model |a_i - p|: by symmetry the platform stays level
    # and drops by dz with (D - r)^2 + (H + dz)^2 = D^2 + H^2 (Pythagoras, by hand)
    D, H, r = 1.5, 1.2, 0.05
    ang = np.radians([90.0, 210.0, 330.0])
    dirs = np.column_stack([np.cos(ang), np.sin(ang), np.zeros(3)])
    a = D * dirs + [0, 0, H]
    b = r * dirs
    L = level_lengths(a, np.zeros((3, 3)), [[0.0, 0.0, 0.0]])[0]
    eq = hanging_equilibrium(a, b, L, mass=2.0, center_of_mass=[0, 0, -0.3], gravity=G, guess=[0, 0, 0])
    dz = math.sqrt(D * D + H * H - (D - r) ** 2) - H
    assert eq.position == pytest.approx([0.0, 0.0, -dz], abs=1e-7)  # SLSQP tolerance
    assert np.allclose(eq.rotation, np.eye(3), atol=1e-6) and eq.stable
    assert np.allclose(eq.tensions, eq.tensions[0], rtol=1e-6)  # symmetric share


def test_nearly_coincident_attachments_pass():
    # a bare platform (no arm) whose eyes sit on a 0.5 mm ring, centre of mass 50 mm below: tilt
    # and shift stay small over the task box and the check passes (a check that can pass; a 2 mm
    # ring already warns, its point-model lengths dropping the platform about 3 mm)
    text = NO_ARM.replace(ONE_SHACKLE, 'attachments = ["-0.433, -0.25, 0 mm", "0.433, -0.25, 0 mm", "0, 0.5, 0 mm"]')
    text = text.replace('center_of_mass = "0, 0, -0.25 m"', 'center_of_mass = "0, 0, -0.05 m"')
    d = loads_design(text)
    assert has_spread_attachments(d)
    checks = design_checks(d)
    assert [c.status for c in checks] == ["pass"], checks
    res = design_poses(d)
    assert np.all(res.stable) and np.all(res.residual < 1e-6)


def test_task_check_fails_a_target_the_tilt_puts_off_target(tmp_path):
    from cablekit.task import check_task, read_task

    task = EXAMPLES / "greenhouse_task.csv"
    # the rig before its fix: every target with the wrist turned or tilted lands far off
    before = _greenhouse(_without_levelling(GREENHOUSE_TEXT))
    report = check_task(before, read_task(before, task))
    bad = [s for s in report.steps if not s.ok]
    assert bad and {s.category for s in bad} == {"tilt"}
    assert "tool tip lands" in bad[0].reason and "required accuracy 5 mm" in bad[0].reason
    assert report.suspended is not None and math.degrees(report.suspended.tilt.max()) > 8.0
    assert any("real platform tilt" in line for line in report.summary())
    # the fixed demo: it still tilts, reports it, and every step passes
    after = _greenhouse()
    fixed = check_task(after, read_task(after, task))
    assert fixed.ok and math.degrees(fixed.suspended.tilt.max()) > 3.0
    assert fixed.suspended.tip_error.max() < 1e-3


def test_a_cable_going_slack_at_the_real_pose_fails():
    # a 500 mm ring and a 2 kg load 0.5 m off the axis: at the real (tilted) pose one cable
    # carries nothing although the point model holds every cable taut (cables only pull)
    text = NO_ARM
    ring = 'attachments = ["-0.433, -0.25, 0 m", "0.433, -0.25, 0 m", "0, 0.5, 0 m"]'
    heavy = 'name = "seedling tray"\nmass = "2 kg"\ncenter_of_mass = "0.5, 0, 0 m"'
    text = text.replace(ONE_SHACKLE, ring).replace('name = "seedling tray"\nmass = "0.5 kg"', heavy)
    # the task box out to y = 1.2 m (the demo's box ends at 0.95 m): the far corner is where it goes slack
    text = text.replace('box_upper = "2.0, 0.95, 1.4 m"', 'box_upper = "2.0, 1.2, 1.4 m"')
    checks = {c.key: c for c in design_checks(loads_design(text))}
    assert checks["suspended_taut"].status == "fail" and "goes slack" in checks["suspended_taut"].detail
    assert checks["suspended_tip_error"].status == "fail"


def test_left_jacobian_of_the_rotation_vector():
    # Exp(w + dw) = Exp(J_l(w) dw) Exp(w) to first order (Barfoot, State Estimation for
    # Robotics, 2017, sec. 7.1), checked by central differences
    from cablekit.suspended import _exp, _left_jacobian

    w = np.array([0.3, -0.7, 0.4])
    h = 1e-6
    J = _left_jacobian(w)
    for k in range(3):
        dw = np.eye(3)[k] * h
        dR = (_exp(w + dw) - _exp(w - dw)) / (2 * h)  # = [J_l e_k]x Exp(w)
        omega = dR @ _exp(w).T
        np.testing.assert_allclose([omega[2, 1], omega[0, 2], omega[1, 0]], J[:, k], atol=1e-8)  # FD error ~h^2


def test_changing_the_winch_count_keeps_one_shackle_and_refuses_spread_eyes():
    from cablekit.widgets.edits import EditError, with_winch_count

    four = with_winch_count(_greenhouse(), 4)
    assert four.m == 4 and four.platform.built_attachments == ((0.0, 0.0, 0.0),) * 4
    with pytest.raises(EditError, match="separate attachments"):
        with_winch_count(_greenhouse(GREENHOUSE_TEXT.replace(ONE_SHACKLE, RING)), 4)


def test_the_plan_lists_the_real_tilt_per_target(tmp_path):
    import csv

    from cablekit.task import check_task, read_task, write_plan

    d = _greenhouse(_without_levelling(GREENHOUSE_TEXT))
    report = check_task(d, read_task(d, EXAMPLES / "greenhouse_task.csv"))
    rows = list(csv.reader(line for line in write_plan(report, tmp_path / "plan.csv").read_text().splitlines()
                           if not line.startswith("#")))
    col = rows[0].index("platform tilt [deg]")
    k = [r[1] for r in rows[1:]].index("turn to shelf")
    # the same pose worked in test_point_platform_with_an_arm_tilts_about_ten_degrees_and_fails
    one = suspended_poses(d, report.platform_poses[k, :3], joints=report.joints[k], holding=True)
    assert float(rows[1 + k][col]) == pytest.approx(math.degrees(one.tilt[0]), rel=1e-9)
    assert float(rows[1 + k][col + 1]) == pytest.approx(1e3 * one.tip_error[0], rel=1e-9)


def test_attachments_the_cables_cannot_reach_fail_without_a_traceback():
    # eyes 10 m from the reference point on cables about 2 m long: no pose exists; the check
    # fails (it must never pass, nor crash the sheet)
    d = _greenhouse(_without_levelling(GREENHOUSE_TEXT).replace(
        ONE_SHACKLE, 'attachments = ["-10, 0, 0 m", "10, 0, 0 m", "0, 10, 0 m"]'))
    checks = {c.key: c for c in design_checks(d)}
    assert checks["suspended_tip_error"].status == "fail"
    assert checks["suspended_taut"].status == "fail" and "no stable equilibrium" in checks["suspended_taut"].detail
    from cablekit.task import check_task, read_task

    report = check_task(d, read_task(d, EXAMPLES / "greenhouse_task.csv"))
    targets = [s for s in report.steps if s.kind == "target"]
    assert not report.ok and all(s.category == "tilt" and "no stable pose" in s.reason for s in targets)


def test_second_order_test_tells_a_hanging_body_from_an_inverted_one():
    # three equal cables from one apex: a body with its centre of mass below the apex sits in a
    # stable equilibrium, one balanced with it straight above (an inverted pendulum) in an
    # unstable one.  Tilting by theta about the apex changes the height by -d theta^2 / 2 for a
    # centre of mass d above it (inverted pendulum, by hand); the tangent vector (dp, dw) of that
    # tilt has length sqrt(1 + h^2) per radian (the reference point h below the apex moves h),
    # so the least eigenvalue of the reduced Hessian is -d / (1 + h^2)
    from cablekit.suspended import _reduced_curvature, _structure

    r = 0.2
    b = _triangle(r)
    a = np.tile([0.0, 0.0, 3.0], (3, 1))
    h = math.sqrt(1.0 - r * r)
    p = np.array([0.0, 0.0, 3.0 - h])
    up = np.array([0.0, 0.0, 1.0])
    W = _structure(a, p, b)
    for c, sign in (([0.0, 0.0, -0.1], 1.0), ([0.0, 0.0, 1.5], -1.0)):
        c = np.array(c)
        t = np.linalg.lstsq(W, -np.concatenate([2 * G, np.cross(c, 2 * G)]), rcond=None)[0]
        k = _reduced_curvature(a, b, np.ones(3), c, up, p, np.eye(3), t / (2 * 9.80665), W.T)
        if sign < 0:
            assert k == pytest.approx(-(c[2] - h) / (1 + h * h), rel=1e-4)  # finite-difference Hessian
        else:
            assert abs(k) < 1e-6  # the turn about the vertical through the apex is neutral


def test_equations_typeset_for_both_models():
    from cablekit.review import latex_to_mathml
    from cablekit.suspended import latex_equations

    for d in (_greenhouse(), _greenhouse(GREENHOUSE_TEXT.replace(ONE_SHACKLE, RING))):
        eqs = latex_equations(d)
        assert eqs and all(latex_to_mathml(latex) for latex in eqs.values())


@pytest.mark.filterwarnings("ignore:delta_grad == 0.0")  # trust-constr on a height linear in p: harmless
def test_spread_equilibrium_matches_an_independent_optimiser():
    # the greenhouse on a 50 mm ring, off-centre, wrist reaching out: the same least-energy
    # pose from scipy's trust-constr on Euler angles with numerical derivatives (a different
    # algorithm and parameterisation; general-purpose reference library scipy.optimize)
    from scipy.optimize import NonlinearConstraint, minimize
    from scipy.spatial.transform import Rotation

    from cablekit.suspended import _body

    d = _greenhouse(_without_levelling(GREENHOUSE_TEXT).replace(ONE_SHACKLE, RING))
    q = np.array([0.08, math.pi / 2, math.radians(30)])
    P = np.array([1.8, 1.1, 0.9])
    res = suspended_poses(d, [P], joints=q, holding=True)
    M, c = _body(d, q, True)
    a, b = d.exits, res.attachments
    L = np.linalg.norm(a - P, axis=1)  # the point model's lengths
    rot = lambda x: Rotation.from_euler("xyz", x[3:]).as_matrix()  # noqa: E731
    height = lambda x: (x[:3] + rot(x) @ c)[2]  # noqa: E731
    lengths = lambda x: np.linalg.norm(a - x[:3] - b @ rot(x).T, axis=1)  # noqa: E731
    ref = minimize(height, np.concatenate([P, np.zeros(3)]), method="trust-constr",
                   constraints=[NonlinearConstraint(lengths, -np.inf, L)], options={"gtol": 1e-12, "xtol": 1e-12,
                                                                                     "maxiter": 5000})
    assert height(ref.x) == pytest.approx((res.position[0] + res.rotation[0] @ c)[2], abs=1e-6)
    np.testing.assert_allclose(ref.x[:3], res.position[0], atol=1e-4)  # flat optimum: position to 0.1 mm
    np.testing.assert_allclose(rot(ref.x), res.rotation[0], atol=1e-3)
