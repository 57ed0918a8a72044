"""First statics: closed-form checks of the suspended three-cable rig and the LP reference."""

import numpy as np
import pytest
from scipy.optimize import linprog

from cablekit.design import loads_design
from cablekit.kinematics import structure_matrix
from cablekit.statics import (external_wrench, motor_cable_force, solve_lp, solve_square, tension_limits,
                              tensions_at)

RNG = np.random.default_rng(5)


def _equilateral_rig(R=1.5, H=2.5, mass=2.0):
    xs = [(R * np.cos(a), R * np.sin(a)) for a in (np.pi / 2, np.pi / 2 + 2 * np.pi / 3, np.pi / 2 + 4 * np.pi / 3)]
    exits = "\n".join(f'[[frame.exits]]\nname = "E{k}"\nposition = "{float(x)!r}, {float(y)!r}, {H} m"\n' for k, (x, y) in enumerate(xs))
    text = f'''
format = "cablekit-design/1"
[meta]
name = "equilateral test rig"
[frame]
{exits}
[platform]
kind = "point"
mass = "{mass} kg"
[cable]
diameter = "2 mm"
breaking_force = "10 kN"
axial_stiffness = "200 kN"
mass_per_length = "0.02 kg/m"
min_tension = "0.001 N"
[winch]
drum_diameter = "50 mm"
drum_width = "40 mm"
gear_ratio = 50
efficiency = 1.0
encoder_lines = 100
decoding = 4
deadband_counts = 0
count_rate_limit = "1 MHz"
motor_rated_torque = "10 N*m"
motor_peak_torque = "10 N*m"
motor_rated_speed = "3000 rpm"
dead_wraps = 3
[payload]
mass = "0 kg"
[task]
box_lower = "-0.6, -0.6, 0.2 m"
box_upper = "0.6, 0.6, 1.5 m"
[home]
position = "0, 0, 1 m"
'''
    return loads_design(text)


@pytest.mark.parametrize("h", [0.3, 1.0, 2.2])
def test_tension_below_centroid_of_equilateral_triangle(h):
    # Closed-form statics of a concurrent force system (e.g. Meriam & Kraige, Engineering
    # Mechanics: Statics, 7th ed., 2012, sec. 3/4): three symmetric cables of length l with
    # vertical drop h share the weight, 3 T h / l = m g  =>  T = m g l / (3 h).
    R, H, mass = 1.5, 2.5, 2.0
    d = _equilateral_rig(R, H, mass)
    q = np.array([[0.0, 0.0, H - h]])
    res = tensions_at(d, q)
    l = np.hypot(R, h)
    expected = mass * d.frame.g * l / (3 * h)
    np.testing.assert_allclose(res.tensions[0], expected, rtol=1e-12)
    assert res.feasible[0]


def test_taut_exactly_inside_the_anchor_triangle():
    # A point hanging on three cables from anchors at one height is in equilibrium with all
    # cables taut exactly when its horizontal position lies inside the anchor triangle, i.e.
    # all its barycentric coordinates are positive (the tensions are proportional to them
    # times l_i / h). Riechel and Ebert-Uphoff, "Force-feasible workspace analysis for
    # underconstrained, point-mass cable robots", ICRA 2004 (from memory); derived above by hand.
    d = _equilateral_rig()
    a = d.exits[:, :2]
    n = 4000
    xy = RNG.uniform(-1.6, 1.6, (n, 2))
    z = RNG.uniform(0.2, 2.0, (n, 1))
    q = np.hstack([xy, z])
    T = np.column_stack([a[1] - a[0], a[2] - a[0]])
    lam12 = np.linalg.solve(T, (xy - a[0]).T).T
    bary = np.column_stack([1 - lam12.sum(axis=1), lam12])
    inside = np.all(bary > 1e-9, axis=1)
    W = structure_matrix(d, q)
    w = external_wrench(d, q)
    res = solve_square(W, w, np.zeros(3), np.full(3, np.inf))
    taut = np.all(res.tensions > 0, axis=1)
    assert inside.sum() > 500 and (~inside).sum() > 500
    np.testing.assert_array_equal(taut, inside)


def test_square_solution_agrees_with_linprog(greenhouse):
    # reference: scipy.optimize.linprog (HiGHS), a general-purpose LP solver from the registry
    q = RNG.uniform(np.array(greenhouse.task.box_lower) - 0.5, np.array(greenhouse.task.box_upper) + 0.3, (300, 3))
    q[:, 2] = np.clip(q[:, 2], 0.1, 2.3)
    lim = tension_limits(greenhouse)
    W = structure_matrix(greenhouse, q)
    w = external_wrench(greenhouse, q)
    sq = solve_square(W, w, lim.t_min, lim.t_max)
    for k in range(len(q)):
        r = linprog(np.zeros(3), A_eq=W[k], b_eq=-w[k], bounds=list(zip(lim.t_min, lim.t_max)), method="highs")
        assert (r.status == 0) == bool(sq.feasible[k]), k


@pytest.mark.parametrize("name", ["camera4", "sander8"])
def test_lp_margin_verdict_agrees_with_a_plain_feasibility_lp(name, request):
    # The max-margin LP must say "feasible" exactly when the plain feasibility LP
    # (find t with W t = -w, t_min <= t <= t_max) has a solution (scipy linprog, HiGHS).
    d = request.getfixturevalue(name)
    n = 300
    q = RNG.uniform(d.task.box_lower, d.task.box_upper, (n, 3))
    if d.dof == 6:
        q = np.hstack([q, RNG.uniform(-0.3, 0.3, (n, 3))])
    lim = tension_limits(d)
    W = structure_matrix(d, q)
    w = external_wrench(d, q)
    res = solve_lp(W, w, lim.t_min, lim.t_max)
    agree = 0
    for k in range(n):
        r = linprog(np.zeros(d.m), A_eq=W[k], b_eq=-w[k], bounds=list(zip(lim.t_min, lim.t_max)), method="highs")
        if abs(res.margin[k]) < 1e-7:
            continue  # on the border both answers are right within solver tolerance
        assert (r.status == 0) == bool(res.feasible[k]), k
        agree += 1
        if res.feasible[k]:
            t = res.tensions[k]
            np.testing.assert_allclose(W[k] @ t, -w[k], atol=1e-6)
            assert np.all(t >= lim.t_min - 1e-7) and np.all(t <= lim.t_max + 1e-7)
    assert agree > 250
    assert 0 < res.feasible.sum() or d.dof == 6


def test_motor_limited_force_by_hand():
    # F = tau * i * eta / r with r = (D + d) / 2: 0.25 N*m * 5 * 0.85 / 0.026 m = 40.865 N (worked by hand)
    assert motor_cable_force(0.25, 0.050, 0.002, 5, 0.85) == pytest.approx(0.25 * 5 * 0.85 / 0.026, rel=1e-12)


def test_limits_pick_the_lower_of_rope_and_motor(greenhouse):
    lim = tension_limits(greenhouse)
    assert lim.rope_limit[0] == pytest.approx(2400 / 5.0)  # MBF / design factor 5 (practice table default)
    assert lim.t_max[0] == pytest.approx(min(lim.rope_limit[0], lim.motor_limit[0]))
    assert lim.limited_by[0] == "motor"


def test_gravity_moment_for_rigid_platform(sander8):
    q = np.array([[2.0, 1.5, 1.2, 0.0, 0.0, 0.0]])
    w = external_wrench(sander8, q)[0]
    M = sander8.platform.mass + sander8.payload.mass
    assert w[2] == pytest.approx(-M * sander8.frame.g)
    # centres of mass on the z axis: no moment when level
    np.testing.assert_allclose(w[3:], 0.0, atol=1e-12)
    q[0, 3] = 0.2  # roll: the lowered centre of mass swings sideways and makes a moment about x
    w = external_wrench(sander8, q)[0]
    # by hand (moment = r x F): combined centre of mass at z_c = (8 * -0.02 + 2 * -0.05) / 10 m
    # = -0.026 m; rolled by phi it sits at y = -z_c sin(phi), so M_x = y * (-M g), M_y = M_z = 0
    zc = (8 * -0.02 + 2 * -0.05) / 10
    assert M == pytest.approx(10.0)
    np.testing.assert_allclose(w[3:], [-zc * np.sin(0.2) * -M * sander8.frame.g, 0.0, 0.0], rtol=1e-12, atol=1e-12)


def test_cramer_path_matches_lapack_solve(greenhouse):
    # the 3 x 3 closed form against numpy.linalg.solve (LAPACK gesv) on random matrices,
    # including near-singular ones (tolerance scaled by the condition number)
    from cablekit.statics import _cramer3

    W = RNG.normal(size=(5000, 3, 3))
    W[:10, :, 2] = W[:10, :, 0] + 1e-15 * RNG.normal(size=(10, 3))  # singular to working precision
    f = RNG.normal(size=(5000, 3))
    t, ok = _cramer3(W, f)
    assert not ok[:10].any() and np.isnan(t[:10]).all()
    ref = np.linalg.solve(W[ok], f[ok][..., None])[..., 0]
    cond = np.linalg.cond(W[ok])
    err = np.max(np.abs(t[ok] - ref), axis=1) / np.maximum(np.max(np.abs(ref), axis=1), 1e-300)
    assert np.all(err <= 1e-13 * cond)


# --------------------------------------------------------------------------------------
# stated tension limits: [cable] max_tension, per-cable min_tension / max_tension
# --------------------------------------------------------------------------------------
def _greenhouse_text(cable_extra="", exit0_extra=""):
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "examples" / "greenhouse_tray_3cable.toml").read_text()
    text = text.replace("[cable]\n", f"[cable]\n{cable_extra}\n", 1)
    i = text.index("[[frame.exits]]")
    j = text.index("\n", text.index("position", i))
    return text[:j + 1] + exit0_extra + "\n" + text[j + 1:]


def test_stated_limits_take_the_lowest_and_say_which(greenhouse):
    # greenhouse winch: motor pull 0.25 N*m * 5 * 0.85 / 0.026 m = 40.87 N (worked by hand, see
    # test_motor_limited_force_by_hand); rope 2.4 kN / 5 = 480 N
    motor = 0.25 * 5 * 0.85 / 0.026
    base = tension_limits(greenhouse)
    assert base.limited_by == ("motor",) * 3 and np.all(np.isinf(base.stated_limit))
    d = loads_design(_greenhouse_text('max_tension = "30 N"', 'min_tension = "4 N"\nmax_tension = "25 N"'))
    lim = tension_limits(d)
    np.testing.assert_allclose(lim.t_max, [25.0, 30.0, 30.0], rtol=1e-12)
    np.testing.assert_allclose(lim.t_min, [4.0, 3.0, 3.0], rtol=1e-12)
    assert lim.limited_by == ("stated",) * 3
    d2 = loads_design(_greenhouse_text('max_tension = "100 N"'))  # above the motor's pull: the motor limits
    lim2 = tension_limits(d2)
    np.testing.assert_allclose(lim2.t_max, motor, rtol=1e-12)
    assert lim2.limited_by == ("motor",) * 3 and np.all(lim2.stated_limit == 100.0)
    # the fields survive saving and loading
    from cablekit.design import dumps_design

    again = tension_limits(loads_design(dumps_design(d)))
    np.testing.assert_allclose(again.t_max, lim.t_max, rtol=1e-12)
    np.testing.assert_allclose(again.t_min, lim.t_min, rtol=1e-12)
    # and check prints which one limits
    from cablekit.commands.check import summary_lines

    assert any("(stated)" in line and "4.0" in line for line in summary_lines(d)[0])
    # and so does the review sheet's rig part
    from cablekit.review import _rig_part

    q = {x.key: x for x in _rig_part(d, {}, lambda _: None).quantities}
    name = d.cable_names[0]
    assert q[f"stated_limit:{name}"].low == 25.0 and "stated max_tension" in q[f"t_max:{name}"].label
    from cablekit.review import _render_inputs

    inputs = _render_inputs(d)
    assert "stated tension limit (max_tension)</th><td>30 N" in inputs
    assert f"<td>{name}</td><td>4 N</td><td>25 N</td>" in inputs


@pytest.mark.parametrize("cable_extra, exit0_extra, path, fragment", [
    ('max_tension = "-5 N"', "", "cable.max_tension", "greater than zero"),
    ('max_tension = "30"', "", "cable.max_tension", "unit"),
    ('max_tension = "30 N"', 'min_tension = "35 N"', "frame.exits[0].min_tension", "stated max_tension 30 N"),
    ("", 'min_tension = "9 N"\nmax_tension = "8 N"', "frame.exits[0].min_tension", "stated max_tension 8 N"),
    ("", 'max_tension = "2 m"', "frame.exits[0].max_tension", ""),
    ('max_tension = "2 N"', "", "cable.min_tension", "stated max_tension 2 N"),  # shared: reported once
])
def test_bad_stated_limits_name_the_field(cable_extra, exit0_extra, path, fragment):
    from cablekit.design import DesignError

    with pytest.raises(DesignError) as exc:
        loads_design(_greenhouse_text(cable_extra, exit0_extra))
    probs = [p for p in exc.value.problems if p.path == path]
    assert len(probs) == 1 and fragment in str(probs[0])


def test_a_stated_limit_fails_poses_the_motor_would_hold(greenhouse):
    # must fail: a 14 N stated limit (below the 40.9 N motor pull; task tensions reach about
    # 17 N) rejects task poses that hold without it, with the reason "stated"; the tensions are
    # the unique m = n solution, checked against scipy.optimize.linprog (HiGHS), same limits
    from dataclasses import replace

    from cablekit.workspace import REASON_BITS, compute_workspace

    d = loads_design(_greenhouse_text('max_tension = "14 N"'))
    free = compute_workspace(greenhouse, step=0.1)
    held = compute_workspace(d, step=0.1)
    newly = free.feasible & ~held.feasible
    assert newly.any() and held.feasible.any()
    assert np.all(held.reasons[newly] & REASON_BITS["stated"])
    assert not np.any(held.reasons & (REASON_BITS["rope"] | REASON_BITS["motor"]))
    assert np.all(np.nanmax(held.tensions[newly], axis=1) > 14.0)
    lim = tension_limits(d)
    q = held.poses[newly]
    ref = solve_lp(structure_matrix(d, q), external_wrench(d, q), lim.t_min, lim.t_max)
    assert not ref.feasible.any()
    assert "over the stated tension limit" in "\n".join(held.summary())
    assert replace(d.cable, max_tension=None) == greenhouse.cable
