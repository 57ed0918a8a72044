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
from cablekit.workspace import (COLOURS, REASON_BITS, WorkspaceResult, compute_workspace, design_checks,
                                load_workspace, segment_distances, segment_hits_box)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
GREENHOUSE = EXAMPLES / "greenhouse_tray_3cable.toml"
SANDER = EXAMPLES / "hall_sander_8cable.toml"
DEMOS = ["greenhouse_tray_3cable.toml", "workshop_camera_4cable.toml", "hall_sander_8cable.toml"]


def at_points(d, points, orientations=((0.0, 0.0, 0.0),)):
    """The design with its task region replaced by explicit points (no box)."""
    task = replace(d.task, box_lower=None, box_upper=None, points=tuple(map(tuple, points)),
                   orientations=tuple(map(tuple, orientations)))
    return replace(d, task=task)


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
    ws = compute_workspace(at_points(d, pts))
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
    ws2 = compute_workspace(at_points(weak, pts))
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
    ws = compute_workspace(replace(d, task=task))
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
    with pytest.raises(ValueError, match="cablekit-workspace/1"):
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
    ws6 = compute_workspace(at_points(d6, pts))
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
# a task region reaching the exits: singular poses are classified, the rest mapped
# --------------------------------------------------------------------------------------
LOFT = Path(__file__).resolve().parent / "data" / "loft_box_8cable.toml"


def test_attachment_at_an_exit_is_no_solution_and_the_rest_is_mapped(tmp_path, capsys):
    # the loft rig's task box corners put an attachment exactly on a frame corner (zero-length cable)
    from cablekit.commands.check import exit_contact_warnings
    from cablekit.statics import solve_lp

    d = load_design(LOFT)
    ws = compute_workspace(d, extra_wrench=[0.0, 0.0, -5.0, 0.0, 0.0, 0.0])  # both the loaded and the static map
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
