"""The task check: targets and moves, the reasons a step fails, move times, the plan, the command."""

from __future__ import annotations

import csv
import io
import math
from pathlib import Path

import numpy as np
import pytest

from cablekit.cli import main
from cablekit.design import loads_design
from cablekit.kinematics import home_lengths, length_per_count
from cablekit.tables import TableError
from cablekit.task import (cable_speed_limits, check_task, read_task, segments_hit_boxes, trapezoid_time,
                           write_plan)

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
DESIGN = EXAMPLES / "greenhouse_tray_3cable.toml"
DEMO_TASK = EXAMPLES / "greenhouse_task.csv"
HEADER = "label,x [mm],y [mm],z [mm],tool roll [deg],tool tilt [deg],gripper\n"


def task(text: str):
    return io.StringIO(HEADER + text)


def check(design, text: str):
    return check_task(design, read_task(design, task(text)))


def test_demo_task_passes_and_the_plan_is_consistent(greenhouse, tmp_path):
    targets = read_task(greenhouse, DEMO_TASK)
    assert len(targets) == 9 and targets.labels[2] == "grip tray" and targets.gripper_closed[2]
    report = check_task(greenhouse, targets)
    assert report.ok and report.first_failure is None
    assert [s.kind for s in report.steps[:3]] == ["target", "move", "target"]
    # every pose puts the tool tip on its target (recomputed from the solved platform poses)
    from cablekit.tooltip import tip_pose

    np.testing.assert_allclose(tip_pose(greenhouse, report.platform_poses, report.joints).tip, targets.tips,
                               atol=1e-12)
    # 'above tray' -> 'grip tray': the tip goes 120 mm down while the lift extends 120 mm, so
    # the platform stands still and the lift servo sets the time: 0.12 m / 0.06 m/s = 2.0 s (by hand)
    move = report.steps[3]
    assert move.title == "move 'above tray' -> 'grip tray'"
    assert move.limited_by == "servo lift" and move.time == pytest.approx(2.0, rel=1e-12)
    np.testing.assert_allclose(report.platform_poses[1], report.platform_poses[2], atol=1e-12)
    # closing the gripper takes its 0.6 s
    assert report.steps[4].time == pytest.approx(0.6)
    # encoder counts: (L - L_home) / length per count, rounded
    expect = np.rint((report.lengths - home_lengths(greenhouse)) / length_per_count(greenhouse))
    np.testing.assert_array_equal(report.counts, expect)
    out = write_plan(report, tmp_path / "plan.csv")
    rows = list(csv.reader(line for line in out.read_text().splitlines() if not line.startswith("#")))
    assert len(rows) == 10 and rows[0][:3] == ["step", "label", "gripper"]
    col = rows[0].index("counts post A")
    assert [int(r[col]) for r in rows[1:]] == report.counts[:, 0].tolist()
    assert rows[3][rows[0].index("target check")] == "ok"
    text = "\n".join(report.summary())
    assert "every step passes" in text and "local codes" in text
    assert len(report.figure().data) >= 4


def test_unreachable_targets_are_flagged_with_the_reason(greenhouse):
    # beyond post B (x = 3 m): the platform would have to leave the frame
    r = check(greenhouse, "far,3600,900,800,0,0,open\nstart,1500,900,800,0,0,open\n")
    f = r.first_failure
    assert not r.ok and f.number == 1 and f.category == "reach"
    assert f.reason == "unreachable: the platform would be at (3.600, 0.900, 1.060) m, outside the frame"
    # reached from inside, the move fails first: post A goes slack as the platform nears the
    # edge between posts B and C (opposite A), before it leaves the frame
    r = check(greenhouse, "start,1500,900,800,0,0,open\nfar,3600,900,800,0,0,open\n")
    assert r.first_failure.kind == "move" and r.first_failure.category == "tension"
    assert r.first_failure.reason.startswith("slack cable: post A")
    assert r.steps[-1].category == "reach" and "outside the frame" in r.steps[-1].reason
    # a tool tilt beyond the wrist's 90 deg
    r = check(greenhouse, "start,1500,900,800,0,0,open\ntoo steep,1500,900,800,0,120,open\n")
    assert r.steps[-1].category == "reach"
    assert "joint tilt would need 120.0 deg, limits -90.0 deg .. 90.0 deg" in r.steps[-1].reason
    # the move into it fails where the tilt passes 90 deg: 3/4 of the way from 0 to 120 deg
    assert r.first_failure.kind == "move" and r.first_failure.where == pytest.approx(0.75, abs=0.02)


def test_slack_cable_move_between_two_feasible_targets(greenhouse):
    # the tip stays put near the front edge (y = 0.34 m) while the tilted tool rolls from 0 to
    # 180 deg: both ends are feasible, but half-way the platform swings 110 mm towards the
    # edge between posts A and B and the opposite cable, post C, goes slack
    r = check(greenhouse, "a,1500,340,800,0,90,open\nb,1500,340,800,180,90,open\n")
    assert r.steps[0].ok and r.steps[2].ok
    f = r.first_failure
    assert f.number == 2 and f.kind == "move" and f.category == "tension"
    assert f.reason.startswith("slack cable: post C at") and "below the 3.0 N" in f.reason
    assert 0.1 < f.where < 0.5
    assert f.min_margin < 0 < r.steps[0].min_margin
    # the same move with the tray in the gripper keeps every cable taut
    assert check(greenhouse, "a,1500,340,800,0,90,closed\nb,1500,340,800,180,90,closed\n").ok


@pytest.fixture(scope="module")
def weak_tilt():
    # the demo with a 0.3 N*m tilt servo (rated 1.0 N*m in the demo)
    return loads_design(DESIGN.read_text().replace('rated_torque = "1.0 N*m"', 'rated_torque = "0.3 N*m"'))


def test_servo_overload_when_the_gripper_closes(weak_tilt):
    # tool tilted 60 deg: empty, the tilt servo holds the gripper and link,
    # (0.12 kg * 80 mm + 0.04 kg * 50 mm) g sin 60 = 0.099 N*m; with the 0.5 kg tray at 110 mm it
    # needs (0.055 + 0.0096 + 0.002) kg*m * g * sin 60 = 0.566 N*m > 0.3 N*m (by hand)
    r = check(weak_tilt, "tilted,1500,900,800,0,60,open\ngrip,1500,900,800,0,60,closed\n")
    assert r.steps[0].ok and r.steps[1].ok
    f = r.first_failure
    assert f.number == 3 and f.kind == "target" and f.category == "servo"
    assert f.reason.startswith("servo overload: joint tilt needs 0.566 N*m static, rated 0.3 N*m (payload held)")
    assert f.servo_use == pytest.approx(0.0666 * 9.80665 * math.sin(math.radians(60)) / 0.3, rel=1e-3)


def test_interference_with_the_bench(greenhouse):
    # the potting bench is 0.25 m high at x 0.9..2.1 m, y 0.35..0.75 m; a tip at 0.15 m is inside
    r = check(greenhouse, "above,1500,550,450,0,0,open\ninto bench,1500,550,150,0,0,open\n")
    f = r.first_failure
    assert f.category == "interference" and f.reason == "interference: arm link tilt passes through potting bench"
    # the tip enters the bench top (0.25 m) at (0.45 - 0.25) / (0.45 - 0.15) = 2/3 of the move
    assert f.where == pytest.approx(2 / 3, abs=0.04)


def test_segments_against_boxes_by_dense_sampling():
    # reference: points sampled densely along each segment, tested inside the box directly
    rng = np.random.default_rng(3)
    lo = np.array([[0.0, 0.0, 0.0], [0.5, -0.2, 0.1]])
    hi = np.array([[0.4, 0.3, 0.2], [0.9, 0.3, 0.6]])
    p0 = rng.uniform(-0.3, 1.2, (400, 3))
    p1 = rng.uniform(-0.3, 1.2, (400, 3))
    hit = segments_hit_boxes(p0, p1, lo, hi)
    s = np.linspace(0, 1, 4001)[:, None, None]
    pts = p0[None] + s * (p1 - p0)[None]  # (S, N, 3)
    inside = np.all((pts[:, :, None, :] > lo) & (pts[:, :, None, :] < hi), axis=-1).any(axis=0)
    # dense sampling can miss a corner clip shorter than the sample spacing: allow only misses
    assert np.all(hit | ~inside) and np.mean(hit == inside) > 0.99
    assert hit.any() and not hit.all()
    # touching a face is not a hit; a point inside is; clearance grows the box
    box_lo, box_hi = np.zeros((1, 3)), np.ones((1, 3))
    assert not segments_hit_boxes([0, 0, 1.0], [1, 1, 1.0], box_lo, box_hi)[0]
    assert segments_hit_boxes([0.5, 0.5, 0.5], [0.5, 0.5, 0.5], box_lo, box_hi)[0]
    assert segments_hit_boxes([0, 0, 1.05], [1, 1, 1.05], box_lo, box_hi, clearance=0.1)[0]


def test_move_time_formulas(greenhouse):
    # trapezoidal profile (Biagiotti and Melchiorri, Trajectory Planning for Automatic Machines
    # and Robots, 2008, sec. 3.2): 1 m at 0.4 m/s, 1 m/s^2 -> 1/0.4 + 0.4/1 = 2.9 s; 0.09 m is
    # too short to reach 0.4 m/s (0.16 m needed) -> triangular 2 sqrt(0.09/1) = 0.6 s (by hand)
    np.testing.assert_allclose(trapezoid_time([1.0, 0.09, 0.0], 0.4, 1.0), [2.9, 0.6, 0.0], rtol=1e-12)
    assert trapezoid_time(1.0, 0.4) == pytest.approx(2.5)
    # demo winch: 3000 rpm / 5 on a 26 mm pitch radius = 1.634 m/s; the decoder allows
    # 80 % of 100 kHz x (pi 52 mm / 2000) = 6.53 m/s: the motor sets the limit (by hand)
    np.testing.assert_allclose(cable_speed_limits(greenhouse), 3000 * 2 * math.pi / 60 / 5 * 0.026, rtol=1e-12)


def test_bad_task_files_name_the_line(greenhouse, sander8):
    with pytest.raises(TableError, match=r"line 3, column 'gripper': 'half'"):
        read_task(greenhouse, task("a,1500,900,800,0,0,open\nb,1500,900,800,0,0,half\n"))
    with pytest.raises(TableError, match="missing column 'gripper'"):
        read_task(greenhouse, io.StringIO("x [mm],y [mm],z [mm]\n1500,900,800\n"))
    with pytest.raises(TableError, match="unknown column 'turn'"):  # wrist joints are set by 'tool roll'
        read_task(greenhouse, io.StringIO("x [mm],y [mm],z [mm],gripper,turn [deg]\n1500,900,800,open,10\n"))
    with pytest.raises(ValueError, match=r"no \[arm\] section"):
        read_task(sander8, task("a,1500,900,800,0,0,open\n"))


def test_the_command(tmp_path, capsys):
    plan = tmp_path / "plan.csv"
    assert main(["task", str(DESIGN), str(DEMO_TASK), "-o", str(plan)]) == 0
    out = capsys.readouterr().out
    assert "every step passes" in out and plan.exists()
    bad = tmp_path / "slack.csv"
    bad.write_text(HEADER + "a,1500,340,800,0,90,open\nb,1500,340,800,180,90,open\n")
    assert main(["task", str(DESIGN), str(bad), "-o", str(plan)]) == 4
    out = capsys.readouterr().out
    assert "first failing step: 2 (move 'a' -> 'b')" in out and "slack cable: post C" in out
    assert "FIRST FAILING STEP 2" in plan.read_text()
    bad.write_text(HEADER + "a,1500,340,800,0,90,shut\n")
    assert main(["task", str(DESIGN), str(bad)]) == 3
    assert "line 2" in capsys.readouterr().err
    assert main(["task", str(EXAMPLES / "workshop_camera_4cable.toml"), str(DEMO_TASK)]) == 3
    assert "no [arm] section" in capsys.readouterr().err
    assert main(["task", str(DESIGN), str(DEMO_TASK), "--step", "-3 mm"]) == 3
    assert main(["task", str(DESIGN), str(tmp_path / "missing.csv")]) == 3
