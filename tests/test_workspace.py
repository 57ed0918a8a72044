"""Workspace maps (cablekit.workspace) and the ``cablekit workspace`` command."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import plotly.graph_objects as go
import pytest

from cablekit.cli import main
from cablekit.design import Obstacle, load_design
from cablekit.statics import solve_square, tension_limits
from cablekit.kinematics import structure_matrix
from cablekit.statics import external_wrench
from cablekit.workspace import (COLOURS, REASON_BITS, WorkspaceResult, compute_workspace, design_assumptions,
                                design_checks, load_workspace, segment_distances, segment_hits_box,
                                triangle_hits_box)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
GREENHOUSE = EXAMPLES / "greenhouse_tray_3cable.toml"
SANDER = EXAMPLES / "hall_sander_8cable.toml"
DEMOS = ["greenhouse_tray_3cable.toml", "workshop_camera_4cable.toml", "hall_sander_8cable.toml"]


def at_points(d, points, orientations=((0.0, 0.0, 0.0),)):
    """The design with its task region replaced by explicit points (no box)."""
    task = replace(d.task, box_lower=None, box_upper=None, points=tuple(map(tuple, points)),
                   orientations=tuple(map(tuple, orientations)), orientation_range=None)
    return replace(d, task=task)


def static(d, **kw):
    """The map under gravity (and the wrench box) alone: no accelerations, no length errors."""
    return compute_workspace(d, acceleration=0.0, length_errors=0.0, **kw)


def has(ws, reason):
    return (ws.reasons & REASON_BITS[reason]) != 0


# --------------------------------------------------------------------------------------
# geometry, hand cases
# --------------------------------------------------------------------------------------
def test_segment_distances_hand_cases():
    # distances worked by hand (Pythagoras); closest points of segments as in Ericson,
    # Real-Time Collision Detection, 2005, sec. 5.1.9
    o = np.zeros(3)
    x2 = np.array([2.0, 0, 0])
    cases = [
        ((o, x2, [1, -1, 0], [1, 1, 0]), 0.0),  # crossing at (1, 0, 0)
        ((o, x2, [1, -1, 0.3], [1, 1, 0.3]), 0.3),  # skew, perpendicular, 0.3 apart
        ((o, [1, 0, 0], [0, 0.2, 0], [1, 0.2, 0]), 0.2),  # parallel, overlapping
        ((o, [1, 0, 0], [2, 0.2, 0], [3, 0.2, 0]), np.hypot(1.0, 0.2)),  # parallel, end to end
        ((o, [1, 0, 0], [2, 1, 0], [2, -1, 0]), 1.0),  # clamped at the end of the first
        ((o, [1, 1, 1], [1, 1, 1], [2, 0, 5]), 0.0),  # touching end points
    ]
    for (p1, q1, p2, q2), want in cases:
        got = segment_distances(np.array(p1, float), np.array(q1, float), np.array(p2, float), np.array(q2, float))
        assert got == pytest.approx(want, abs=1e-12)
        # symmetric in the two segments and in their direction
        assert segment_distances(np.array(q2, float), np.array(p2, float), np.array(p1, float),
                                 np.array(q1, float)) == pytest.approx(want, abs=1e-12)


def test_segment_hits_box_hand_cases():
    lo, hi = np.zeros(3), np.ones(3)
    seg = np.array([
        [[-1, 0.5, 0.5], [2, 0.5, 0.5]],  # straight through
        [[-1, 2.0, 0.5], [2, 2.0, 0.5]],  # passes beside
        [[-1, -1, 0.5], [0.4, 0.4, 0.5]],  # ends inside
        [[0.5, 0.5, 2.0], [0.5, 0.5, 1.0]],  # touches the top face (closed box)
        [[2, 2, 2], [3, 3, 3]],  # away
        [[-1, 0.5, 1.5], [2, 0.5, 1.5]],  # above, parallel to the top
    ])
    got = segment_hits_box(seg[:, 0], seg[:, 1], lo, hi)
    assert got.tolist() == [True, False, True, True, False, False]


def test_crossing_cables_are_interference_and_uncrossed_are_not():
    # Hand case: the 8-cable frame with bottom cables B1 (exit 0,0,0) and B2 (exit 4,0,0) tied to
    # the far bottom corners (+0.15 and -0.15 in x, -0.15 in y, -0.1 in z).  At the pose
    # (2, 1.5, 1.25) both segments lie in the plane through the x axis and the direction
    # (0, 1.35, 1.15), and their x coordinates meet at the fraction 4 / 4.3 of their length:
    # they cross (distance 0 < 4 mm, the sum of their radii).
    d = load_design(SANDER)
    att = np.array(d.platform.attachments)
    att[4] = [0.15, -0.15, -0.1]
    att[5] = [-0.15, -0.15, -0.1]
    crossed = replace(d, platform=replace(d.platform, attachments=tuple(map(tuple, att))))
    ws = compute_workspace(at_points(crossed, [(2.0, 1.5, 1.25)]))
    assert has(ws, "interference")[0] and not ws.feasible[0]
    assert ws.clearance[0] == pytest.approx(-d.cable.diameter, abs=1e-9)
    a, b = np.array(d.exits[4]), np.array(d.exits[5])
    pa, pb = np.array([2, 1.5, 1.25]) + att[4], np.array([2, 1.5, 1.25]) + att[5]
    assert segment_distances(a, pa, b, pb) == pytest.approx(0.0, abs=1e-12)
    s = 4 / 4.3  # the crossing point, by hand
    assert np.allclose(a + s * (pa - a), b + s * (pb - b), atol=1e-12)


def test_cable_through_an_obstacle_box():
    # the straight cable from post A (0, 0, 2.4) to the platform at (1.5, 0.8667, 1.0) passes
    # (0.75, 0.43335, 1.7) at half length (by hand); a small shelf around that point blocks it
    d = load_design(GREENHOUSE)
    pose = (1.5, 0.8667, 1.0)
    free = compute_workspace(at_points(d, [pose]))
    assert not has(free, "obstacle")[0]
    shelf = Obstacle(name="shelf", lower=(0.70, 0.40, 1.65), upper=(0.80, 0.47, 1.75))
    blocked = replace(d, frame=replace(d.frame, obstacles=(*d.frame.obstacles, shelf)))
    ws = compute_workspace(at_points(blocked, [pose]))
    assert has(ws, "obstacle")[0] and not ws.feasible[0]
    # moved 10 cm aside (more than the 1 mm cable radius) the shelf is clear again
    aside = Obstacle(name="shelf", lower=(0.70, 0.55, 1.65), upper=(0.80, 0.60, 1.75))
    clear = replace(d, frame=replace(d.frame, obstacles=(*d.frame.obstacles, aside)))
    assert not has(compute_workspace(at_points(clear, [pose])), "obstacle")[0]


def test_cable_through_the_platform_body():
    # T1 (exit 0, 0, 2.5) tied to the body's far bottom corner (0.15, 0.15, -0.1): at the pose
    # (2, 1.5, 1.25) the cable runs along (-2.15, -1.65, 1.35); 5 % along it sits at
    # (0.04, 0.07, -0.03), inside the 0.3 x 0.3 x 0.2 m body (by hand)
    d = load_design(SANDER)
    att = np.array(d.platform.attachments)
    ok = compute_workspace(at_points(d, [(2.0, 1.5, 1.25)]))
    assert not has(ok, "body")[0]
    att[0] = [0.15, 0.15, -0.1]
    bad = replace(d, platform=replace(d.platform, attachments=tuple(map(tuple, att))))
    ws = compute_workspace(at_points(bad, [(2.0, 1.5, 1.25)]))
    assert has(ws, "body")[0]


# --------------------------------------------------------------------------------------
# tension limits and reasons
# --------------------------------------------------------------------------------------
def test_motor_limited_t_max_worked_by_hand_and_reasons():
    # Worked by hand: F = tau * i * eta / r with r = (D_drum + d_rope) / 2:
    # 0.25 N*m * 5 * 0.85 / ((0.050 + 0.002) / 2 m) = 1.0625 / 0.026 = 40.865 N < 2400 N / 5.
    d = load_design(GREENHOUSE)
    lim = tension_limits(d)
    assert lim.motor_limit == pytest.approx(np.full(3, 1.0625 / 0.026), rel=1e-12)
    assert lim.t_max == pytest.approx(lim.motor_limit) and lim.limited_by == ("motor",) * 3
    rng = np.random.default_rng(2)
    pts = np.column_stack([rng.uniform(0.2, 2.8, 400), rng.uniform(0.1, 2.3, 400), rng.uniform(1.6, 2.3, 400)])
    ws = static(at_points(d, pts))
    # independent: the unique tensions from numpy.linalg.solve (LAPACK) for m = n
    t = solve_square(structure_matrix(d, pts), external_wrench(d, pts), lim.t_min, lim.t_max).tensions
    over = np.any(t > lim.t_max, axis=1)
    slack = np.any(t < lim.t_min, axis=1)
    assert over.sum() > 20 and slack.sum() > 20
    assert np.array_equal(has(ws, "motor"), over)
    assert np.array_equal(has(ws, "slack"), slack)
    assert not has(ws, "rope").any()
    # a strong motor and a weak rope: the same poses now fail on the rope limit
    strong = tuple(replace(w, motor_rated_torque=50.0) for w in d.winches)
    weak = replace(d, winches=strong, cable=replace(d.cable, breaking_force=5 * 40.865))
    ws2 = static(at_points(weak, pts))
    assert tension_limits(weak).limited_by == ("rope",) * 3
    assert np.array_equal(has(ws2, "rope"), over) and not has(ws2, "motor").any()


def test_suspended_three_cables_taut_exactly_inside_the_anchor_prism():
    # A point mass on three cables from anchors at one height, gravity only, is held with every
    # cable taut exactly when it lies inside the vertical prism under the anchor triangle
    # (Riechel and Ebert-Uphoff, "Force-feasible workspace analysis for underconstrained,
    # point-mass cable robots", ICRA 2004, from memory; by hand: the upward reaction must be a
    # positive combination of the cable directions, i.e. the vertical line through the point
    # must meet the anchor triangle).  Minimum tension made tiny and the motors strong so that
    # only the sign of the tensions matters.
    d = load_design(GREENHOUSE)
    winches = tuple(replace(w, motor_rated_torque=200.0) for w in d.winches)
    d = replace(d, winches=winches, cable=replace(d.cable, min_tension=1e-6, breaking_force=1e7),
                frame=replace(d.frame, obstacles=()), sections={})
    task = replace(d.task, box_lower=(-0.6, -0.6, 0.4), box_upper=(3.6, 3.2, 2.0), points=(), step=0.1)
    ws = static(replace(d, task=task))
    a = np.array(d.exits)[:, :2]
    p = ws.positions[:, :2]

    def side(u, v, x):  # signed distance of x from the edge u -> v [m]
        e = v - u
        return (e[0] * (x[:, 1] - u[1]) - e[1] * (x[:, 0] - u[0])) / np.hypot(*e)

    s = np.column_stack([side(a[0], a[1], p), side(a[1], a[2], p), side(a[2], a[0], p)])
    inside = np.all(s > 2e-3, axis=1)
    outside = np.any(s < -2e-3, axis=1)
    assert inside.sum() > 500 and outside.sum() > 500
    assert np.all(ws.position_feasible[inside])
    assert not np.any(ws.position_feasible[outside])
    assert np.array_equal(ws.static_feasible, ws.feasible)  # gravity is the only load here
    assert ws.suspended


# --------------------------------------------------------------------------------------
# result object: summary, figures, file
# --------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def sander_ws():
    return compute_workspace(load_design(SANDER), step=0.2)


def test_summary_figures_and_checks(sander_ws):
    ws = sander_ws
    text = "\n".join(ws.summary())
    assert f"{100 * ws.coverage:.1f} %" in text and "Caution" in text and "wrench box" in text
    assert ws.n_poses == len(ws.positions) * len(ws.orientations)
    assert ws.feasible_volume == pytest.approx(np.mean(ws.position_feasible[ws.from_box]) * ws.box_volume)
    fig = ws.figure("scatter")
    assert isinstance(fig, go.Figure)
    colours = {t.marker.color for t in fig.data if t.mode == "markers"}
    assert colours <= set(COLOURS.values())
    assert sum(len(t.x) for t in fig.data if t.mode == "markers") == len(ws.positions)
    sl = ws.figure("slices", orientation=1, levels=3)
    assert len([t for t in sl.data if isinstance(t, go.Heatmap)]) == 3
    with pytest.raises(ValueError, match="scatter"):
        ws.figure("pie")
    checks = {c.key: c for c in design_checks(load_design(SANDER), workspace=ws)}
    assert {"workspace_coverage", "tension_margin", "cable_interference", "cable_body"} <= set(checks)
    cov = checks["workspace_coverage"]
    assert cov.value == pytest.approx(100 * ws.coverage)
    assert cov.status == ("pass" if ws.coverage == 1 else "fail")
    assert checks["tension_margin"].value == pytest.approx(ws.margin.min())


def test_save_and_load_round_trip(sander_ws, tmp_path):
    path = tmp_path / "map.npz"
    sander_ws.save(path)
    back = load_workspace(path)
    assert isinstance(back, WorkspaceResult)
    assert back.summary() == sander_ws.summary()
    for name in ("poses", "feasible", "margin", "tensions", "reasons", "clearance", "static_margin"):
        assert np.array_equal(getattr(back, name), getattr(sander_ws, name))
    assert [list(a) for a in back.axes] == [list(a) for a in sander_ws.axes]
    assert [p.name for p in tmp_path.iterdir()] == ["map.npz"]  # no temporary file left behind


def test_damaged_or_foreign_files_are_refused(sander_ws, tmp_path):
    path = tmp_path / "map.npz"
    sander_ws.save(path)
    good = path.read_bytes()
    path.write_bytes(good[: len(good) // 2])
    with pytest.raises(ValueError, match="map.npz"):
        load_workspace(path)
    np.savez(tmp_path / "other.npz", format=np.array("something-else/1"), x=np.zeros(3))
    with pytest.raises(ValueError, match="cablekit-workspace/2"):
        load_workspace(tmp_path / "other.npz")


def test_progress_is_reported():
    calls = []
    ws = compute_workspace(load_design(GREENHOUSE), step=0.1, progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (0, ws.n_poses) and calls[-1] == (ws.n_poses, ws.n_poses)
    assert [c[0] for c in calls] == sorted(c[0] for c in calls)


def test_bad_inputs_raise_clear_errors():
    d = load_design(SANDER)
    with pytest.raises(ValueError, match="positive"):
        compute_workspace(d, step=0.0)
    with pytest.raises(ValueError, match="positive"):
        compute_workspace(d, step=-0.1)
    with pytest.raises(ValueError, match="orientation set is empty"):
        compute_workspace(d, orientations=np.zeros((0, 3)))
    empty = replace(d, task=replace(d.task, box_lower=None, box_upper=None, points=()))
    with pytest.raises(ValueError, match="task region is empty"):
        compute_workspace(empty)
    with pytest.raises(ValueError, match="extra wrench"):
        compute_workspace(d, extra_wrench=[1.0, 2.0])
    for bad in (-1.0, float("nan"), float("inf")):
        with pytest.raises(ValueError, match="acceleration"):
            compute_workspace(d, acceleration=bad)
    with pytest.raises(ValueError, match="length errors"):
        compute_workspace(d, length_errors=-1e-3)
    with pytest.raises(ValueError, match="length errors"):
        compute_workspace(d, length_errors=[1e-3] * 7 + [float("nan")])


# --------------------------------------------------------------------------------------
# the command line
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("demo", DEMOS)
def test_command_runs_on_every_demo(demo, tmp_path, capsys):
    out = tmp_path / "result.npz"
    rc = main(["workspace", str(EXAMPLES / demo), "--step", "150 mm", "-o", str(out), "--quiet"])
    text = capsys.readouterr().out
    assert rc == 0
    assert "covered" in text and f"wrote {out}" in text
    ws = load_workspace(out)
    assert f"{100 * ws.coverage:.1f} %" in text


@pytest.mark.parametrize("args, message", [
    (["--step", "0 mm"], "positive length"),
    (["--step", "-20 mm"], "positive length"),
    (["--step", "20"], "missing unit"),
    (["--orientations", " ; "], "orientation set is empty"),
    (["-o", "/nonexistent-folder/x.npz"], "does not exist"),
    (["--acceleration", "-1 m/s^2"], "zero or more"),
    (["--acceleration", "1 m/s"], "--acceleration"),
])
def test_command_bad_input_exits_3(args, message, capsys):
    rc = main(["workspace", str(SANDER), *args])
    err = capsys.readouterr().err
    assert rc == 3 and message in err and "Traceback" not in err


def test_command_empty_task_region_exits_3(tmp_path, capsys):
    text = SANDER.read_text()
    start = text.index("[task]")
    end = text.index("[task.wrench_box]")
    body = "\n".join(line for line in text[start:end].splitlines() if not line.startswith("box_"))
    bad = tmp_path / "no_region.toml"
    bad.write_text(text[:start] + body + "\n" + text[end:])
    assert main(["workspace", str(bad)]) == 3
    assert "task" in capsys.readouterr().err


def test_three_redundant_cables_map_through_the_exact_lp():
    # six cables on a point platform (m - n = 3) have no fast path: every pose goes to scipy's
    # HiGHS; the map says so, and its tensions balance gravity and reach the reported margin
    text = (EXAMPLES / "workshop_camera_4cable.toml").read_text()
    extra = "".join(f'\n[[frame.exits]]\nname = "{n}"\nposition = "{x}, {y}, 3.0 m"\npulley_diameter = "60 mm"\n'
                    f'drum_distance = "1.5 m"\n' for n, x, y in (("N", 2.0, 3.0), ("S", 2.0, 0.0)))
    i = text.index("[[frame.obstacles]]")
    from cablekit.design import loads_design

    d6 = loads_design(text[:i] + extra.lstrip("\n") + "\n" + text[i:])
    assert d6.m == 6
    pts = np.array([(2.0, 1.5, 1.8), (1.0, 1.0, 2.5), (3.9, 2.9, 0.5)])
    ws6 = static(at_points(d6, pts))
    assert "linear program" in ws6.method and ws6.lp_poses == 3
    assert ws6.feasible[0] and not ws6.feasible[2]
    W, w = structure_matrix(d6, pts), external_wrench(d6, pts)
    assert np.allclose(np.einsum("nij,nj->ni", W, ws6.tensions) + w, 0, atol=1e-6)
    own = np.min(np.minimum(ws6.tensions - ws6.t_min, ws6.t_max - ws6.tensions), axis=1)
    assert np.allclose(own, ws6.margin, atol=1e-6)


@pytest.mark.parametrize("demo", DEMOS)
def test_map_without_numba_is_the_same_map(demo, monkeypatch):
    # numba is optional at import: with the compiled kernels removed, "auto" takes the NumPy path
    # and the map must not change
    from cablekit import tension

    d = load_design(EXAMPLES / demo)
    compiled = compute_workspace(d, step=0.25)
    monkeypatch.setattr(tension, "_kernel", None)
    monkeypatch.setattr(tension, "_square3", None)
    plain = compute_workspace(d, step=0.25)
    assert "compiled" not in plain.method
    assert np.array_equal(plain.reasons, compiled.reasons)
    assert np.allclose(plain.margin, compiled.margin, atol=1e-8)


# --------------------------------------------------------------------------------------
# accelerations (issue 11 item 3)
# --------------------------------------------------------------------------------------
def _tripod(d, *, R=1.5, h=0.5, H=2.4, t_min=17.0):
    """The greenhouse rig rebuilt as an exact equilateral tripod: exits on a circle of radius R at
    height H, no arm, no obstacles, strong motors; one task point at the centre, h below the exits."""
    ang = np.radians([90.0, 210.0, 330.0])
    exits = tuple(replace(e, position=(R * np.cos(t), R * np.sin(t), H)) for e, t in zip(d.frame.exits, ang))
    winches = tuple(replace(w, motor_rated_torque=50.0) for w in d.winches)
    d = replace(d, frame=replace(d.frame, exits=exits, obstacles=()), winches=winches, sections={},
                cable=replace(d.cable, min_tension=t_min))
    return at_points(d, [(0.0, 0.0, H - h)])


def test_acceleration_fails_a_pose_that_holds_at_rest():
    # Worked by hand (statics of a symmetric tripod): exits at radius R = 1.5 m, the mass
    # M = 1.2 + 0.5 = 1.7 kg hanging h = 0.5 m below their centre, cable length L = sqrt(R^2 + h^2).
    # At rest each cable holds t0 = M g L / (3 h) = 17.57 N.  Accelerating horizontally by a away
    # from exit 1 needs (t1 - t2) R / L = -M a (horizontal) with t1 + 2 t2 = M g L / h (vertical),
    # so t1 = t0 - (2/3) M a L / R = 17.57 - 1.19 = 16.38 N at a = 1 m/s^2: below t_min = 17 N.
    d = _tripod(load_design(GREENHOUSE))
    M, g, R, h = 1.7, d.frame.g, 1.5, 0.5
    L = np.hypot(R, h)
    t0 = M * g * L / (3 * h)
    t1 = t0 - 2 / 3 * M * 1.0 * L / R
    assert t0 == pytest.approx(17.57, abs=0.01) and t1 < 17.0 < t0
    rest = compute_workspace(d, acceleration=0.0)
    assert rest.feasible[0] and rest.tensions[0] == pytest.approx(np.full(3, t0), rel=1e-9)
    moving = compute_workspace(d, acceleration=1.0)
    assert not moving.feasible[0] and has(moving, "slack")[0]
    assert moving.rest_margin[0] == pytest.approx(t0 - 17.0, rel=1e-9)  # the margin at rest is kept
    # The exact least tension over the ball |a| <= a_max is t0 - M a_max |row_i(W^-1)| (Cauchy-Schwarz);
    # with unique tensions the map is exact over the ball
    W = structure_matrix(d, np.zeros((1, 3)) + [0.0, 0.0, 1.9])[0]
    rows = np.linalg.norm(np.linalg.inv(W), axis=1)  # t = -W^-1 (w_g - M a)
    exact = np.min(t0 - M * 1.0 * rows) - 17.0
    assert moving.margin[0] == pytest.approx(exact, abs=1e-9)  # m = n: exact over the ball
    # the hand-worked direction alone already fails: the ball's worst is at most t1
    assert np.min(t0 - M * rows) <= t1 + 1e-12
    # a gentle acceleration within the rest margin passes
    gentle = (t0 - 17.0) / (M * np.max(rows) * moving.accel_overshoot) * 0.9
    assert compute_workspace(d, acceleration=gentle).feasible[0]


def test_acceleration_polytope_encloses_the_ball():
    # Every unit direction's support value of the polytope must be >= 1 (it contains the unit
    # ball); faces from scipy.spatial.ConvexHull (Qhull) of the returned vertices.
    from scipy.spatial import ConvexHull

    from cablekit.workspace import acceleration_polytope

    for level, count in ((0, 12), (1, 42)):
        v, over = acceleration_polytope(level)
        assert v.shape == (count, 3)
        assert np.allclose(np.linalg.norm(v, axis=1), over, rtol=1e-12)
        hull = ConvexHull(v)
        assert np.min(-hull.equations[:, 3]) == pytest.approx(1.0, rel=1e-12)  # nearest face touches the ball
        dirs = np.random.default_rng(level).normal(size=(20000, 3))
        dirs /= np.linalg.norm(dirs, axis=1)[:, None]
        assert np.min(np.max(dirs @ v.T, axis=1)) >= 1.0 - 1e-12
    # regular icosahedron of edge 1: circumradius sqrt(10 + 2 sqrt 5) / 4, inradius sqrt 3 (3 + sqrt 5) / 12
    # (standard solid-geometry formulas, from memory): their ratio is the level-0 overshoot
    r5 = np.sqrt(5.0)
    assert acceleration_polytope(0)[1] == pytest.approx(np.sqrt(10 + 2 * r5) / 4 / (np.sqrt(3) * (3 + r5) / 12),
                                                        rel=1e-12)


def test_rigid_platform_acceleration_includes_the_moment_of_the_inertial_force():
    # An offset centre of mass c (platform frame) accelerating by a needs the moment m c x a from the
    # cables (Newton-Euler about the reference point); with the acceleration along x and c along -z
    # the moment is about y.  Checked through the map's margins: moving the payload's centre of mass
    # further off the reference point must lower the least margin under acceleration but not at rest.
    d = load_design(SANDER)
    d = at_points(replace(d, sections={}), [(2.0, 1.5, 1.25)])
    near = compute_workspace(d, acceleration=2.0, length_errors=0.0)
    far_d = replace(d, payload=replace(d.payload, center_of_mass=(0.0, 0.0, -0.6)))
    far = compute_workspace(far_d, acceleration=2.0, length_errors=0.0)
    rest_near = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    rest_far = compute_workspace(far_d, acceleration=0.0, length_errors=0.0)
    loss_near = rest_near.margin[0] - near.margin[0]
    loss_far = rest_far.margin[0] - far.margin[0]
    assert loss_far > loss_near > 0


# --------------------------------------------------------------------------------------
# length errors on redundant rigs (issue 11 item 4)
# --------------------------------------------------------------------------------------
CAMERA = EXAMPLES / "workshop_camera_4cable.toml"


def test_length_error_spread_matches_a_nonlinear_spring_solve():
    # Reference: the full nonlinear equilibrium of the platform on linear springs
    # t_i = k_i (L_i(q) - L0_i), k_i = EA / L_i (Behzadipour and Khajepour 2006 for the cable model),
    # solved with scipy.optimize.root for every vertex of the length-error box; the largest tension
    # change of each cable must match the first-order spread sum_j |S_ij| delta_j.
    from scipy.optimize import root

    from cablekit.kinematics import cable_lengths
    from cablekit.workspace import length_error_spread

    d = replace(load_design(CAMERA), sections={})
    q0 = np.array([[2.0, 1.5, 1.8]])
    lim = tension_limits(d)
    t0 = compute_workspace(at_points(d, q0), acceleration=0.0, length_errors=0.0).tensions[0]
    delta = 1e-3
    spread = length_error_spread(d, q0, t0[None], np.full(d.m, delta))[0]
    L = cable_lengths(d, q0)[0]
    k = d.cable.axial_stiffness / L
    L0 = L - t0 / k
    w = external_wrench(d, q0)[0]
    worst = np.zeros(d.m)
    for signs in np.array(np.meshgrid(*[[-1.0, 1.0]] * d.m)).reshape(d.m, -1).T:
        L0e = L0 + delta * signs

        def residual(p):
            Lp = cable_lengths(d, p[None])[0]
            t = k * (Lp - L0e)
            return structure_matrix(d, p[None])[0] @ t + w

        sol = root(residual, q0[0], method="hybr", options={"xtol": 1e-13})
        assert np.max(np.abs(residual(sol.x))) < 1e-6  # balanced to a micro-newton
        t = k * (cable_lengths(d, sol.x[None])[0] - L0e)
        worst = np.maximum(worst, np.abs(t - t0))
    # 1 mm on 2.5 m cables: second-order terms well under 1 %
    assert spread == pytest.approx(worst, rel=1e-2)
    assert np.all(spread > 100.0)  # stiff steel: a 1 mm error moves the tensions by more than 100 N
    assert np.all(lim.t_max - lim.t_min < 2 * spread)


def test_length_errors_fail_a_redundant_rig_that_holds_with_exact_lengths():
    # The camera's four stiff cables hold the pod at home with a positive margin when the lengths
    # are exact; a +/-2 mm error shifts each tension by about 300 N (test above), far beyond the
    # 5..61 N window, so the pose must fail for the length-error reason (and only for it).
    d = at_points(load_design(CAMERA), [(2.0, 1.5, 1.8)])
    exact = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    assert exact.feasible[0] and exact.margin[0] > 5.0
    ws = compute_workspace(d, acceleration=0.0)
    assert np.all(ws.length_error > 2e-3)  # budget: home 2 mm + quantisation + deadband counts
    assert not ws.feasible[0] and ws.reasons[0] == REASON_BITS["length"]
    assert ws.margin[0] == pytest.approx(exact.margin[0] - np.max(ws.length_spread[0]), rel=1e-9)
    checks = {c.key: c for c in design_checks(d, workspace=ws)}
    assert checks["length_error_tensions"].status == "fail"
    assert "NW" in checks["length_error_tensions"].detail
    text = "\n".join(ws.summary())
    assert "length errors" in text and "NW" in text
    # a tiny error (0.01 mm) keeps the pose: the check is not a blanket refusal
    tiny = compute_workspace(d, acceleration=0.0, length_errors=1e-5)
    assert tiny.feasible[0] and 0 < np.max(tiny.length_spread[0]) < exact.margin[0]


def test_square_rigs_have_no_length_spread_and_say_why():
    # m = n: the elastic self-stress S = K_c - K_c W^T (W K_c W^T)^-1 W K_c is zero (W invertible):
    # length errors move the pose, not the tensions
    d = load_design(GREENHOUSE)
    ws = compute_workspace(d, step=0.2)
    assert not np.any(ws.length_spread) and not has(ws, "length").any()
    assert "length_error_tensions" not in {c.key for c in design_checks(d, workspace=ws)}
    text = " ".join(design_assumptions(d, workspace=ws))
    assert "move the pose" in text


# --------------------------------------------------------------------------------------
# orientation ranges (issue 11 item 5)
# --------------------------------------------------------------------------------------
def _with_task_lines(path, old, new):
    from cablekit.design import loads_design

    text = path.read_text()
    assert text.count(old) == 1
    return loads_design(text.replace(old, new))


SANDER_ORIS = '''orientations = ["0, 0, 10 deg"]
orientation_range = { roll = "-10, 10 deg", pitch = "-10, 10 deg" }
orientation_samples = 3'''


def test_orientation_range_is_sampled_at_every_bound_combination_and_inside():
    from cablekit.region import task_orientations

    d = load_design(SANDER)
    assert d.task.orientation_range is not None
    deg = np.degrees(task_orientations(d.task))
    # the list first, then the 3 x 3 grid of roll and pitch (yaw left out: 0)
    assert deg.shape == (10, 3)
    want = {(r, p, 0.0) for r in (-10.0, 0.0, 10.0) for p in (-10.0, 0.0, 10.0)} | {(0.0, 0.0, 10.0)}
    assert {tuple(np.round(o, 9) + 0.0) for o in deg} == want
    corners = {(r, p, 0.0) for r in (-10.0, 10.0) for p in (-10.0, 10.0)}
    assert corners <= {tuple(np.round(o, 9) + 0.0) for o in deg}
    # five values per angle over three angles: 125 orientations, the 8 corners among them
    d5 = _with_task_lines(SANDER, SANDER_ORIS, 'orientation_range = { roll = "-10, 10 deg", pitch = "-10, 10 deg", '
                                               'yaw = "0, 20 deg" }\norientation_samples = 5')
    o5 = np.degrees(task_orientations(d5.task))
    assert len(o5) == 125  # (0, 0, 0) of the default list is one of the grid's values
    for corner in [(r, p, y) for r in (-10, 10) for p in (-10, 10) for y in (0, 20)]:
        assert np.any(np.all(np.isclose(o5, corner), axis=1))
    # the map uses the same set, and the design file round-trips through save
    from cablekit.design import dumps_design, loads_design

    back = loads_design(dumps_design(d))
    # the angles are written as repr text: they come back to the last bit
    assert np.allclose(back.task.orientation_range, d.task.orientation_range, rtol=1e-12, atol=0)
    assert back.task.orientation_samples == 3


@pytest.mark.parametrize("text, field", [
    ('orientation_range = { roll = "10, -10 deg" }', "task.orientation_range.roll"),
    ('orientation_range = { roll = "-10, 10 mm" }', "task.orientation_range.roll"),
    ('orientation_range = { roll = "-10 deg" }', "task.orientation_range.roll"),
    ('orientation_range = { spin = "-10, 10 deg" }', "task.orientation_range.spin"),
    ('orientation_range = "10 deg"', "task.orientation_range"),
    ('orientation_range = { roll = "-10, 10 deg" }\norientation_samples = 1', "task.orientation_samples"),
    ('orientation_range = { roll = "-10, 10 deg" }\norientation_samples = 2.5', "task.orientation_samples"),
    ('orientation_range = { roll = "-10, 10 deg" }\norientation_samples = 10', "task.orientation_samples"),
    ('orientation_samples = 3', "task.orientation_samples"),
    ('orientation_range = { roll = "-200, 200 deg" }', "task.orientation_range.roll"),
])
def test_bad_orientation_ranges_name_the_field(text, field):
    from cablekit.design import DesignError

    with pytest.raises(DesignError) as err:
        _with_task_lines(SANDER, SANDER_ORIS, text)
    assert field in str(err.value)


def test_a_point_platform_refuses_an_orientation_range():
    from cablekit.design import DesignError

    with pytest.raises(DesignError, match="task.orientation_range"):
        _with_task_lines(GREENHOUSE, 'step = "50 mm"', 'step = "50 mm"\norientation_range = { roll = "-5, 5 deg" }')


def test_orientation_range_finds_a_combined_tilt_the_single_axis_list_misses():
    # At (1.3, 1.1, 1.3) m the sander holds its load tilted 10 deg about x alone or about y alone
    # (either sign), but not tilted -10 deg about x and +10 deg about y together: only a range that
    # samples every bound combination sees it.  Reference for the failing corner: scipy's HiGHS LP
    # (cablekit.statics.solve_lp) at every vertex of the wrench box.
    from cablekit.statics import solve_lp
    from cablekit.tension import box_vertices

    d = load_design(SANDER)
    single = np.radians([[0, 0, 0], [10, 0, 0], [-10, 0, 0], [0, 10, 0], [0, -10, 0]])
    p = [(1.3, 1.1, 1.3)]
    listed = at_points(d, p, orientations=single)
    ws_list = compute_workspace(listed, acceleration=0.0, length_errors=0.0)
    assert ws_list.position_feasible[0]
    ranged = replace(listed, task=replace(listed.task, orientations=((0.0, 0.0, 0.0),),
                                          orientation_range=((-np.radians(10), np.radians(10)),
                                                             (-np.radians(10), np.radians(10)), (0.0, 0.0))))
    ws_range = compute_workspace(ranged, acceleration=0.0, length_errors=0.0)
    assert not ws_range.position_feasible[0]
    k = int(np.argmin(ws_range.margin))
    assert np.degrees(ws_range.poses[k, 3:]) == pytest.approx([-10.0, 10.0, 0.0])
    q = ws_range.poses[k:k + 1]
    lim = tension_limits(d)
    verts = box_vertices(external_wrench(d, q), d.task.wrench_box)[0]
    lp = [solve_lp(structure_matrix(d, q), v[None], lim.t_min, lim.t_max).margin[0] for v in verts]
    assert min(lp) < 0
    assert ws_range.margin[k] == pytest.approx(min(lp), abs=1e-6)


# --------------------------------------------------------------------------------------
# sampling is not a proof (issue 11 item 8)
# --------------------------------------------------------------------------------------
def test_triangle_hits_box_hand_cases():
    # separating-axis test of a triangle against a box (Akenine-Moller, "Fast 3D triangle-box
    # overlap testing", 2001); cases worked by hand against the unit box
    lo, hi = np.zeros(3), np.ones(3)
    tri = np.array([
        [[-1, -1, 0.5], [3, -1, 0.5], [-1, 3, 0.5]],  # a big triangle slicing the box at z = 0.5
        [[2, 2, 2], [3, 2, 2], [2, 3, 2]],  # far away
        [[-1, 0.5, 0.5], [-0.5, 0.5, 0.5], [-1, 0.9, 0.5]],  # beside the x = 0 face
        [[1.5, 1.5, -1], [1.5, 1.5, 2], [3, 3, 0.5]],  # off the diagonal edge: only x+y separates
        [[1.2, 0.5, 0.5], [0.5, 1.2, 0.5], [1.2, 1.2, 0.5]],  # cuts the box's vertical edge x = y = 1
        [[0.2, 0.2, 0.2], [0.3, 0.2, 0.2], [0.2, 0.3, 0.2]],  # inside
        [[-1, 0.5, 0.5], [2, 0.5, 0.5], [2, 0.5, 0.5]],  # degenerate: a segment straight through
        [[-1, -1, 1.5], [2, -1, 1.5], [2, 2, 1.5]],  # a plane above the box, parallel to its top
    ])
    got = triangle_hits_box(tri[:, 0], tri[:, 1], tri[:, 2], lo, hi)
    assert got.tolist() == [True, False, False, False, True, True, True, False]
    # a segment (degenerate triangle) gives the slab test's answer (Ericson 2005, sec. 5.3.3)
    rng = np.random.default_rng(3)
    p, q = rng.uniform(-1, 2, (2, 2000, 3))
    assert np.array_equal(triangle_hits_box(p, q, q, lo, hi), segment_hits_box(p, q, lo, hi))


def test_grid_resolution_warns_on_a_coarse_grid_and_states_the_step():
    d = load_design(GREENHOUSE)
    need = 10  # practice.py grid_points_per_axis_min (common practice, no source)
    fine = {c.key: c for c in design_checks(d, workspace=compute_workspace(d, step=0.05))}
    assert fine["grid_resolution"].status == "pass" and fine["grid_resolution"].value >= need
    coarse_ws = compute_workspace(d, step=0.2)
    coarse = {c.key: c for c in design_checks(d, workspace=coarse_ws)}["grid_resolution"]
    assert coarse.status == "warn" and coarse.value == 3 and coarse.limit == need  # y: 0.5..0.95 m by 0.2 m
    assert "200 mm" in coarse.detail and "6 x 3 x 6" in coarse.detail
    assert "grid step 200 mm, 6 x 3 x 6 points" in "\n".join(coarse_ws.summary())
    # a box thinner than the step has one point along that axis: both faces unsampled, fail
    thin = replace(d, task=replace(d.task, box_upper=(2.0, 0.55, 1.4)))
    c = {c.key: c for c in design_checks(thin, workspace=compute_workspace(thin, step=0.1))}["grid_resolution"]
    assert c.status == "fail" and c.value == 1
    # a flat box (a plane of work) is judged on its two real axes only
    flat = replace(d, task=replace(d.task, box_lower=(1.0, 0.5, 1.0), box_upper=(2.0, 0.95, 1.0)))
    c = {c.key: c for c in design_checks(flat, workspace=compute_workspace(flat, step=0.05))}["grid_resolution"]
    assert c.status == "pass" and c.value == 10
    # the design's [practice] table may ask for more
    strict = replace(d, practice={"grid_points_per_axis_min": 30})
    assert {c.key: c for c in design_checks(strict, workspace=compute_workspace(strict))}[
        "grid_resolution"].status == "warn"


def test_obstacle_between_two_grid_nodes_is_found_on_the_move():
    # Worked by hand: the cable from post A (0, 0, 2.4) to the platform at (1.0, 0.50, 1.0) passes
    # (0.5, 0.25, 1.7) at half length, and to (1.0, 0.55, 1.0) it passes (0.5, 0.275, 1.7).  A small
    # box around (0.5, 0.2625, 1.7), 10 mm wide, clears both straight cables (by 7.5 mm less the 1 mm
    # radius along y at x = 0.5), but the cable sweeps across it on the 50 mm move between the nodes.
    d = load_design(GREENHOUSE)
    post = Obstacle(name="post", lower=(0.495, 0.2575, 1.695), upper=(0.505, 0.2675, 1.705))
    d = replace(d, frame=replace(d.frame, obstacles=(post,)), sections={},
                task=replace(d.task, box_lower=(1.0, 0.5, 1.0), box_upper=(1.0, 0.55, 1.0), points=(), step=0.05))
    ws = compute_workspace(d, acceleration=0.0)
    assert ws.n_poses == 2 and ws.sweep_moves == 1
    assert not has(ws, "obstacle").any()  # the nodes alone pass
    assert has(ws, "sweep").all() and not ws.feasible.any()
    checks = {c.key: c for c in design_checks(d, workspace=ws)}
    assert checks["cable_sweep"].status == "fail" and checks["cable_sweep"].value == 1
    assert checks["cable_obstacle"].status == "pass"
    # the same post moved 30 mm further out along y is clear on the move too
    d2 = replace(d, frame=replace(d.frame, obstacles=(Obstacle(name="post", lower=(0.495, 0.2875, 1.695),
                                                                upper=(0.505, 0.2975, 1.705)),)))
    assert not has(compute_workspace(d2, acceleration=0.0), "sweep").any()


def test_cables_touching_between_two_grid_nodes_are_found_on_the_move():
    # B2 re-tied to (0.279, 0.087, 0.268) m on the sander: at two nodes 1 m apart along z, cables T3
    # and B2 are 32 mm and 11 mm apart, but they touch on the way.  Reference: dense sampling of the
    # move (2001 poses) with the closest points of segments (Ericson 2005, sec. 5.1.9).
    d = load_design(SANDER)
    att = np.array(d.platform.attachments)
    att[5] = [0.279, 0.087, 0.268]
    d = replace(d, sections={}, platform=replace(d.platform, attachments=tuple(map(tuple, att)),
                                                 body_half_size=(0.0, 0.0, 0.0)),
                task=replace(d.task, box_lower=(2.0, 1.5, 0.75), box_upper=(2.0, 1.5, 1.75), points=(),
                             orientations=((0.0, 0.0, 0.0),), orientation_range=None, step=1.0))
    ws = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    assert ws.n_poses == 2 and np.all(ws.clearance > 0.01) and not has(ws, "interference").any()
    assert has(ws, "sweep").all()
    s = np.linspace(0.0, 1.0, 2001)
    p = np.column_stack([np.full_like(s, 2.0), np.full_like(s, 1.5), 0.75 + s])
    a2, a5 = d.exits[2], d.exits[5]
    gap = segment_distances(np.broadcast_to(a2, p.shape), p + att[2], np.broadcast_to(a5, p.shape), p + att[5])
    assert gap[0] > 0.03 and gap[-1] > 0.01  # centre lines at the nodes
    assert np.min(gap) < d.cable.diameter  # closer than the sum of the radii somewhere on the move
    # without the sweep the two nodes would pass the geometry
    assert not has(compute_workspace(d, acceleration=0.0, length_errors=0.0, sweep=False), "sweep").any()


def test_new_fields_survive_the_result_file(tmp_path):
    d = load_design(SANDER)
    ws = compute_workspace(d, step=0.25)
    path = tmp_path / "map.npz"
    ws.save(path)
    back = load_workspace(path)
    for name in ("rest_margin", "length_spread", "length_error", "sweep_failures"):
        assert np.array_equal(getattr(back, name), getattr(ws, name))
    assert (back.acceleration, back.accel_overshoot, back.sweep_moves) == (ws.acceleration, ws.accel_overshoot,
                                                                          ws.sweep_moves)
    assert back.reasons.dtype == np.uint16 and back.summary() == ws.summary()


def test_assumptions_name_what_the_verdict_rests_on():
    from cablekit.checks import run_assumptions

    d = load_design(SANDER)
    ws = compute_workspace(d, step=0.25)
    text = " ".join(run_assumptions(d, workspace=ws))
    for phrase in ("0.5 m/s^2", "7.0 %", "Angular accelerations", "length-controlled", "orientation range",
                   "grid step 250 mm", "turns between neighbouring orientations", "diagonal moves are not swept"):
        assert phrase in text
    still = replace(d, task=replace(d.task, acceleration=0.0))
    assert "quasi-static" in " ".join(design_assumptions(still))


def test_acceleration_margins_are_never_more_optimistic_than_sampled_accelerations():
    # Brute force: 400 accelerations of size a_max spread over the sphere, each solved exactly
    # (cablekit.tension.distribute, held to scipy's LP in test_tension.py).  The map's margin is a
    # lower bound of the margin over the ball, so it may not exceed any sampled one; and every pose it
    # passes must pass every sample.
    from cablekit.stiffness import mass_matrix
    from cablekit.tension import distribute

    d = load_design(SANDER)
    ws = compute_workspace(d, step=0.35, acceleration=2.0, length_errors=0.0, sweep=False)
    q = ws.poses
    W, w = structure_matrix(d, q), external_wrench(d, q)
    G = mass_matrix(d, q)[:, :, :3]
    lim = tension_limits(d)
    dirs = np.random.default_rng(11).normal(size=(400, 3))
    dirs /= np.linalg.norm(dirs, axis=1)[:, None]
    sampled = np.full(len(q), np.inf)
    for a in 2.0 * dirs:
        sampled = np.minimum(sampled, distribute(W, w - G @ a, lim.t_min, lim.t_max,
                                                 wrench_box=d.task.wrench_box).margin)
    tension_ok = ws.margin >= 0
    assert np.all(ws.margin <= sampled + 1e-7)
    assert np.all(sampled[tension_ok] >= -1e-7)
    assert 0 < tension_ok.sum() < len(q)  # the case has both verdicts


def test_command_quasi_static_option(capsys):
    assert main(["workspace", str(GREENHOUSE), "--step", "150 mm", "--acceleration", "0 m/s^2", "--quiet"]) == 0
    text = capsys.readouterr().out
    assert "accelerations" not in text and "grid step 150 mm" in text
    assert main(["workspace", str(GREENHOUSE), "--step", "150 mm", "--quiet"]) == 0
    assert "accelerations up to 0.5 m/s^2" in capsys.readouterr().out


def test_check_command_counts_the_orientation_range(capsys):
    assert main(["check", str(SANDER)]) == 0
    assert "orientations: 10 (list and a range, 3 values per angle)" in capsys.readouterr().out


def _one_point_turn(d, p, orientation_range, orientations, obstacles=None):
    """The design at one task point with an orientation range sampled at its two bounds."""
    task = replace(d.task, box_lower=None, box_upper=None, points=(tuple(p),), orientations=orientations,
                   orientation_range=orientation_range, orientation_samples=2)
    frame = d.frame if obstacles is None else replace(d.frame, obstacles=obstacles)
    return replace(d, task=task, frame=frame, sections={})


def _dense_turn(d, p, qa, qb, count=801):
    """Attachment points (count, m, 3) along the turn qa -> qb at position p (angles linear)."""
    from cablekit.statics import rotation_matrices

    s = np.linspace(0.0, 1.0, count)
    ang = qa + s[:, None] * (qb - qa)
    return np.asarray(p)[None, None, :] + np.einsum("nij,mj->nmi", rotation_matrices(ang), d.attachments)


def test_cables_touching_while_the_platform_turns_between_sampled_orientations():
    # The sander at (1.6, 1.2, 1.3) m tilted (-10, -10, 0) deg and (0, -10, 0) deg, the two bounds of a
    # roll range: every cable pair is clear at both (least gaps 6.5 mm and 31 mm), but turning between
    # them T2 and T3 pass through each other.  Reference: 801 orientations along the turn with the
    # closest points of segments (Ericson 2005, sec. 5.1.9).
    deg = np.pi / 180
    d = _one_point_turn(load_design(SANDER), (1.6, 1.2, 1.3), ((-10 * deg, 0.0), (-10 * deg, -10 * deg), (0.0, 0.0)),
                        ((-10 * deg, -10 * deg, 0.0),))
    ws = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    assert ws.n_poses == 2 and ws.sweep_moves == 1
    assert np.all(ws.clearance > 0.005) and not has(ws, "interference").any()
    assert has(ws, "sweep").all()
    att = _dense_turn(d, (1.6, 1.2, 1.3), ws.poses[0, 3:], ws.poses[1, 3:])
    a = d.exits
    gap = segment_distances(att[:, 1], np.broadcast_to(a[1], att[:, 1].shape), att[:, 2],
                            np.broadcast_to(a[2], att[:, 2].shape))
    assert gap[0] > d.cable.diameter and gap[-1] > d.cable.diameter and np.min(gap) < d.cable.diameter


def test_an_obstacle_the_cable_sweeps_while_the_platform_turns():
    # Worked by hand: cable B1 at the pose (2.0, 1.5, 1.25) m, level, passes its midpoint
    # (0.925, 0.825, 0.575) m; tilted -10 or +10 deg about x the attachment moves about 36 mm and the
    # cable passes 11.2 mm and 11.7 mm from that point.  A 4 mm cube there is clear at both bounds
    # of the roll range but in the cable's way at roll 0, between them.  Reference: the slab test
    # (Ericson 2005, sec. 5.3.3) on 801 orientations along the turn.
    deg = np.pi / 180
    d0 = load_design(SANDER)
    p = np.array([2.0, 1.5, 1.25])
    mid = 0.5 * (d0.exits[4] + p + np.array(d0.attachments[4]))
    assert mid == pytest.approx([0.925, 0.825, 0.575])
    lamp = Obstacle(name="lamp", lower=tuple(mid - 0.002), upper=tuple(mid + 0.002))
    d = _one_point_turn(d0, p, ((-10 * deg, 10 * deg), (0.0, 0.0), (0.0, 0.0)), ((-10 * deg, 0.0, 0.0),),
                        obstacles=(lamp,))
    ws = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    assert ws.n_poses == 2 and ws.sweep_moves == 1
    assert not has(ws, "obstacle").any() and has(ws, "sweep").all()
    assert {c.key: c for c in design_checks(d, workspace=ws)}["cable_sweep"].status == "fail"  # points only
    att = _dense_turn(d, p, ws.poses[0, 3:], ws.poses[1, 3:])
    r = 0.5 * d.cable.diameter
    hits = segment_hits_box(np.broadcast_to(d.exits[4], att[:, 4].shape), att[:, 4], mid - 0.002 - r, mid + 0.002 + r)
    assert not hits[0] and not hits[-1] and hits.any()
    # moved 30 mm aside the lamp is clear on the turn as well
    aside = Obstacle(name="lamp", lower=tuple(mid + [0, 0.03, 0] - 0.002), upper=tuple(mid + [0, 0.03, 0] + 0.002))
    d2 = _one_point_turn(d0, p, ((-10 * deg, 10 * deg), (0.0, 0.0), (0.0, 0.0)), ((-10 * deg, 0.0, 0.0),),
                         obstacles=(aside,))
    assert not has(compute_workspace(d2, acceleration=0.0, length_errors=0.0), "sweep").any()


def test_a_range_alone_is_the_orientation_set():
    # no list: the range says which orientations the task needs (no extra level pose)
    from cablekit.design import dumps_design, loads_design
    from cablekit.region import task_orientations

    d = _with_task_lines(SANDER, SANDER_ORIS, 'orientation_range = { roll = "5, 15 deg" }')
    assert d.task.orientations == ()
    assert np.allclose(np.degrees(task_orientations(d.task)), [[5, 0, 0], [10, 0, 0], [15, 0, 0]], atol=1e-12)
    back = loads_design(dumps_design(d))
    assert back.task.orientations == () and np.array_equal(task_orientations(back.task), task_orientations(d.task))
    assert compute_workspace(d, step=0.35, acceleration=0.0, length_errors=0.0).orientations.shape == (3, 3)


def test_a_cable_through_the_platform_body_while_it_turns():
    # Worked by hand, in the platform frame: T1 re-tied to an outrigger at (0.3, 0, 0) m on a head
    # 0.3 x 0.02 x 0.2 m at the point (2.0, 0.0, 2.3) m; the exit (0, 0, 2.5) m lies along
    # (-2, 0, 0.2) m when the head is square (yaw 0), so the cable crosses x = 0.15 m at
    # z = 0.013 m (inside the body), but turned -10 or +10 deg about z it crosses at |y| >= 0.023 m,
    # beside the 10 mm half-width.  Reference: the slab test (Ericson 2005, sec. 5.3.3) on 801 yaws.
    from cablekit.statics import rotation_matrices

    d0 = load_design(SANDER)
    deg = np.pi / 180
    p = np.array([2.0, 0.0, 2.3])

    def rig(b0):
        att = np.array(d0.platform.attachments)
        att[0] = b0
        return _one_point_turn(replace(d0, platform=replace(d0.platform, attachments=tuple(map(tuple, att)),
                                                            body_half_size=(0.15, 0.01, 0.1))),
                               p, ((0.0, 0.0), (0.0, 0.0), (-10 * deg, 10 * deg)), ((0.0, 0.0, -10 * deg),))

    d = rig((0.3, 0.0, 0.0))
    ws = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    assert ws.n_poses == 2 and ws.sweep_moves == 1
    assert not has(ws, "body").any() and has(ws, "sweep").all()
    s = np.linspace(0.0, 1.0, 801)
    R = rotation_matrices(np.column_stack([0 * s, 0 * s, (-10 + 20 * s) * deg]))
    far = np.einsum("nji,j->ni", R, d.exits[0] - p)
    half = np.array([0.15, 0.01, 0.1])
    hits = segment_hits_box(np.broadcast_to([0.3, 0.0, 0.0], far.shape), far, -half, half)
    assert not hits[0] and not hits[-1] and hits[400]
    # the outrigger raised 0.2 m: the cable passes above the body all the way round
    assert not has(compute_workspace(rig((0.3, 0.0, 0.2)), acceleration=0.0, length_errors=0.0), "sweep").any()


# --------------------------------------------------------------------------------------
# [control]: winches that hold tensions instead of lengths
# --------------------------------------------------------------------------------------
def _camera_with(section):
    from cablekit.design import loads_design

    return loads_design(CAMERA.read_text() + "\n" + section)


def test_tension_controlled_winches_take_their_accuracy_off_the_margin():
    # A redundant rig whose winches hold tensions does not see the length-error self-stress; its
    # cables stay within the stated accuracy of their set tensions, and that is what the window
    # must hold (the designer's statement; no outside reference: a definition).
    d = _camera_with('[control]\nwinches = "tension"\ntension_accuracy = "2 N"\n')
    d = at_points(d, [(2.0, 1.5, 1.8)])
    exact = compute_workspace(d, acceleration=0.0, length_errors=0.0)
    held = compute_workspace(d, acceleration=0.0)
    assert held.winch_control == "tension" and held.feasible[0]
    from cablekit.design import dumps_design, loads_design

    assert loads_design(dumps_design(d)).sections["control"] == d.sections["control"]  # saved and read back
    assert np.all(held.length_spread[0] == 2.0)
    assert held.margin[0] == pytest.approx(exact.margin[0] - 2.0, rel=1e-12)
    checks = {c.key: c for c in design_checks(d, workspace=held)}
    assert checks["length_error_tensions"].status == "pass" and "tension control" in checks["length_error_tensions"].title
    assert "within +/-2 N" in "\n".join(held.summary())
    assert "winches holding tensions" in " ".join(design_assumptions(d, workspace=held))
    # a sloppy tension loop (+/- 40 N on a 5..61 N window) fails the pose for that reason
    sloppy = at_points(_camera_with('[control]\nwinches = "tension"\ntension_accuracy = "40 N"\n'), [(2.0, 1.5, 1.8)])
    ws = compute_workspace(sloppy, acceleration=0.0)
    assert not ws.feasible[0] and ws.reasons[0] == REASON_BITS["length"]
    assert {c.key: c for c in design_checks(sloppy, workspace=ws)}["length_error_tensions"].status == "fail"


@pytest.mark.parametrize("section, field", [
    ('[control]\nwinches = "torque"\n', "control.winches"),
    ('[control]\nwinches = "tension"\n', "control.tension_accuracy"),
    ('[control]\nwinches = "tension"\ntension_accuracy = "2 mm"\n', "control.tension_accuracy"),
    ('[control]\nwinches = "tension"\ntension_accuracy = "-2 N"\n', "control.tension_accuracy"),
    ('[control]\nwinches = "length"\ntension_accuracy = "2 N"\n', "control.tension_accuracy"),
    ('[control]\nmode = "tension"\n', "control.mode"),
])
def test_bad_control_sections_name_the_field(section, field):
    from cablekit.design import DesignError

    with pytest.raises(DesignError) as err:
        _camera_with(section)
    assert field in str(err.value)


def test_square_rigs_say_tension_control_has_no_freedom():
    from cablekit.design import loads_design

    d = loads_design(GREENHOUSE.read_text() + '\n[control]\nwinches = "tension"\ntension_accuracy = "1 N"\n')
    assert "no freedom" in " ".join(design_assumptions(d))
    assert not np.any(compute_workspace(d, step=0.2).length_spread)


def test_arm_levelling_sees_the_orientation_range(monkeypatch):
    # the arm's levelling check samples every task orientation, the range's included
    from cablekit import arm as arm_mod

    seen = []
    real = arm_mod.levelling_angles

    def spy(arm, R, up):
        seen.append(len(R))
        return real(arm, R, up)

    monkeypatch.setattr(arm_mod, "levelling_angles", spy)
    d = load_design(SANDER)
    the_arm = load_design(GREENHOUSE).sections["arm"]
    arm_mod._levelling_checks(d, the_arm)
    assert seen == [1 + 10]  # home + the listed yaw + the 3 x 3 roll-pitch grid


def test_square_rig_acceleration_and_wrench_box_match_brute_force():
    # m = n: the map's exact margin over wrench box + acceleration ball against brute force: every box
    # vertex with 4000 accelerations on the sphere, tensions by numpy.linalg.solve (LAPACK); the
    # sampled least margin can only be above the true one, and by little (dense sampling)
    from cablekit.stiffness import mass_matrix
    from cablekit.tension import box_vertices

    d = _tripod(load_design(GREENHOUSE), t_min=10.0)
    d = replace(d, task=replace(d.task, wrench_box=(1.0, 2.0, 0.5, 0.0, 0.0, 0.0)))
    ws = compute_workspace(d, acceleration=1.5)
    q = ws.poses
    W = structure_matrix(d, q)[0]
    G = mass_matrix(d, q)[0, :, :3]
    lim = tension_limits(d)
    dirs = np.random.default_rng(5).normal(size=(4000, 3))
    dirs /= np.linalg.norm(dirs, axis=1)[:, None]
    worst = np.inf
    for v in box_vertices(external_wrench(d, q), (1.0, 2.0, 0.5))[0]:
        t = np.linalg.solve(W, -(v[None, :] - 1.5 * dirs @ G.T).T).T  # (4000, 3)
        worst = min(worst, float(np.min(np.minimum(t - lim.t_min, lim.t_max - t))))
    assert ws.margin[0] <= worst + 1e-9
    assert ws.margin[0] == pytest.approx(worst, abs=0.02)


def test_length_error_spread_of_a_rigid_platform_matches_a_nonlinear_spring_solve():
    # As for the camera above, on the 8-cable rigid sander (elastic and geometric stiffness, the
    # moment of gravity turning with the head): springs t_i = k_i (L_i(q) - L0_i), k_i = EA / L_i,
    # every vertex of the +/-1 mm length-error box solved for the full 6-D equilibrium with
    # scipy.optimize.root.  About 260 N per mm on 2 m cables; the first-order spread agrees to 2 %
    # (the tensions change by a large share of themselves: second-order terms).
    from scipy.optimize import root

    from cablekit.kinematics import cable_lengths
    from cablekit.workspace import length_error_spread

    d = at_points(replace(load_design(SANDER), sections={}), [(2.0, 1.5, 1.25)])
    q0 = np.array([[2.0, 1.5, 1.25, 0.0, 0.0, 0.0]])
    t0 = compute_workspace(d, acceleration=0.0, length_errors=0.0).tensions[0]
    delta = 1e-3
    spread = length_error_spread(d, q0, t0[None], np.full(d.m, delta))[0]
    k = d.cable.axial_stiffness / cable_lengths(d, q0)[0]
    L0 = cable_lengths(d, q0)[0] - t0 / k
    worst = np.zeros(d.m)
    for signs in np.array(np.meshgrid(*[[-1.0, 1.0]] * d.m)).reshape(d.m, -1).T:
        L0e = L0 + delta * signs

        def residual(p):
            t = k * (cable_lengths(d, p[None])[0] - L0e)
            return structure_matrix(d, p[None])[0] @ t + external_wrench(d, p[None])[0]

        sol = root(residual, q0[0], method="hybr", options={"xtol": 1e-13})
        assert np.max(np.abs(residual(sol.x))) < 1e-5  # balanced to 10 uN / 10 uN*m
        worst = np.maximum(worst, np.abs(k * (cable_lengths(d, sol.x[None])[0] - L0e) - t0))
    assert spread == pytest.approx(worst, rel=2e-2)
    assert np.all(spread > 200.0)


# --------------------------------------------------------------------------------------
# a task region reaching the exits: singular poses are classified, the rest mapped
# --------------------------------------------------------------------------------------
LOFT = Path(__file__).resolve().parent / "data" / "loft_box_8cable.toml"


def test_attachment_at_an_exit_is_no_solution_and_the_rest_is_mapped(tmp_path, capsys):
    # the loft rig's task box corners put an attachment exactly on a frame corner (zero-length cable)
    from cablekit.commands.check import exit_contact_warnings
    from cablekit.statics import solve_lp

    d = load_design(LOFT)
    # both the loaded and the static map; no accelerations or length errors, so that the LP below is the reference
    ws = compute_workspace(d, extra_wrench=[0.0, 0.0, -5.0, 0.0, 0.0, 0.0], acceleration=0.0, length_errors=0.0)
    sing = has(ws, "no_solution")
    assert int(sing.sum()) == 8 and ws.primary_reason()[sing].tolist() == ["no_solution"] * 8
    corners = {tuple(np.round(p, 6)) for p in ws.poses[sing, :3]}
    assert corners == {(x, y, z) for x in (0.2, 3.8) for y in (0.15, 3.75) for z in (0.1, 3.7)}
    assert np.all(np.isfinite(ws.margin[~sing])) and not ws.static_feasible[sing].any()
    # the other poses keep their exact verdicts (scipy.optimize.linprog, HiGHS, as the reference)
    q = ws.poses[~sing][::9]
    lim = tension_limits(d)
    ref = solve_lp(structure_matrix(d, q), external_wrench(d, q, extra=[0, 0, -5.0, 0, 0, 0]), lim.t_min, lim.t_max)
    geometry = REASON_BITS["interference"] | REASON_BITS["body"] | REASON_BITS["obstacle"]
    assert np.array_equal(ws.feasible[~sing][::9], ref.feasible & ((ws.reasons[~sing][::9] & geometry) == 0))
    # check warns, once per touched exit; a region clear of the exits gets no such warning
    assert len(exit_contact_warnings(d)) == 8
    assert exit_contact_warnings(load_design(SANDER)) == []
    g = load_design(GREENHOUSE)  # a point platform: a task point on an exit
    touching = replace(g, task=replace(g.task, points=(tuple(g.exits[1]),)))
    assert [w.split(":")[0] for w in exit_contact_warnings(touching)] == [f"the task region touches exit {g.cable_names[1]}"]
    assert main(["check", str(LOFT)]) == 0
    assert "the task region touches exit B1" in capsys.readouterr().out
    assert main(["workspace", str(LOFT), "-o", str(tmp_path / "loft.npz"), "--quiet"]) == 0
    assert "no solution / singular pose 8" in capsys.readouterr().out
    pts = tmp_path / "loft_points.csv"
    pts.write_text("x [m],y [m],z [m],roll [deg],pitch [deg],yaw [deg]\n2,1.95,1.9,0,0,0\n0.2,0.15,0.1,0,0,0\n")
    assert main(["points", str(LOFT), str(pts)]) == 0
    assert "row 2: no solution / singular: cable B1 has zero length" in capsys.readouterr().out


def test_singular_corners_do_not_break_the_error_model():
    # the first-order error model once stopped with "SVD did not converge" on the NaN Jacobian
    # of a zero-length cable; the pose is infeasible (no solution) and the others are computed
    from cablekit.accuracy import linear_model

    d = load_design(LOFT)
    q = np.array([[0.2, 0.15, 0.1, 0, 0, 0], [2.0, 1.95, 1.9, 0, 0, 0]])
    model = linear_model(d, q)
    assert model.feasible.tolist() == [False, True]
    assert np.all(np.isfinite(model.sensitivity[1])) and np.all(np.isfinite(model.bias_by_source[1]))


def test_exit_contact_warning_covers_the_orientation_range():
    # the loft rig's box corners put an attachment on its exit at identity orientation; a task
    # that states its tilt only as a range through zero must be warned about them too
    from cablekit.commands.check import exit_contact_warnings
    from cablekit.design import design_from_dict, design_to_dict

    doc = design_to_dict(load_design(LOFT))
    doc["task"]["orientations"] = ["20, 0, 0 deg"]
    listed = design_from_dict(doc)
    assert not any("orientation 0, 0, 0 deg" in w for w in exit_contact_warnings(listed))
    del doc["task"]["orientations"]
    doc["task"]["orientation_range"] = {"roll": "-20, 20 deg"}
    doc["task"]["orientation_samples"] = 3  # -20, 0, +20 deg
    ranged = design_from_dict(doc)
    assert sum("orientation 0, 0, 0 deg" in w for w in exit_contact_warnings(ranged)) == 8
