"""The command line: check, points, new; exit codes and one-line reasons."""

import csv
import os
import subprocess
import sys

import numpy as np
import pytest

from cablekit.cli import main
from cablekit.design import load_design
from cablekit.kinematics import cable_lengths

from conftest import EXAMPLES, ROOT, example_paths

POINTS = {
    "greenhouse_tray_3cable.toml": "greenhouse_points.csv",
    "workshop_camera_4cable.toml": "workshop_camera_points.csv",
    "hall_sander_8cable.toml": "hall_sander_points.csv",
}


def _cablekit(*args, cwd=ROOT):
    env = dict(os.environ)
    return subprocess.run([sys.executable, "-m", "cablekit", *args], capture_output=True, text=True, cwd=cwd,
                          env=env, timeout=120)


@pytest.mark.parametrize("path", example_paths(), ids=lambda p: p.name)
def test_check_passes_on_every_example(path, capsys):
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    assert "valid" in out and load_design(path).meta.name in out


def test_every_example_has_a_points_file():
    assert set(POINTS) == {p.name for p in example_paths()}


@pytest.mark.parametrize("design_name", sorted(POINTS))
def test_points_writes_a_csv_for_each_demo(design_name, tmp_path, capsys):
    out = tmp_path / "out.csv"
    assert main(["points", str(EXAMPLES / design_name), str(EXAMPLES / POINTS[design_name]), "-o", str(out)]) == 0
    d = load_design(EXAMPLES / design_name)
    rows = [r for r in csv.reader(l for l in out.read_text().splitlines() if not l.startswith("#"))]
    header, data = rows[0], rows[1:]
    assert len(data) >= 4
    assert header[:3] == ["x [m]", "y [m]", "z [m]"]
    # the lengths written are the inverse kinematics of the poses written
    n = d.dof
    poses = np.array([[float(v) for v in r[:n]] for r in data])
    lengths = np.array([[float(v) for v in r[n:n + d.m]] for r in data])
    np.testing.assert_allclose(lengths, cable_lengths(d, poses), rtol=0, atol=1e-12)
    assert {r[-2] for r in data} <= {"yes", "no"}


def test_points_reason_for_a_slack_cable(tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text("x [mm],y [mm],z [mm]\n100,100,2000\n")
    assert main(["points", str(EXAMPLES / "greenhouse_tray_3cable.toml"), str(pts)]) == 0
    assert "slack" in capsys.readouterr().out


@pytest.mark.parametrize("content, fragment", [
    ("x [mm],y [mm]\n1,2\n", "missing column 'z"),
    ("x,y [mm],z [mm]\n1,2,3\n", "has no unit"),
    ("x [kg],y [mm],z [mm]\n1,2,3\n", "not a length unit"),
    ("x [mm],y [mm],z [mm]\n1,nan,3\n", "line 2, column 'y': 'nan' is not a finite number"),
    ("x [mm],y [mm],z [mm]\n1,abc,3\n", "line 2, column 'y'"),
    ("x [mm],y [mm],z [mm]\n", "0 data rows"),
    ("", "empty file"),
])
def test_points_bad_csv(content, fragment, tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text(content)
    code = main(["points", str(EXAMPLES / "greenhouse_tray_3cable.toml"), str(pts)])
    err = capsys.readouterr().err
    assert code == 3
    assert fragment in err
    assert "Traceback" not in err


def test_new_writes_a_valid_commented_starter(tmp_path, capsys):
    target = tmp_path / "mine.toml"
    assert main(["new", str(target)]) == 0
    text = target.read_text()
    assert text.count("#") > 20  # commented
    load_design(target)
    assert main(["check", str(target)]) == 0
    # refuses to overwrite without --force, and refuses a wrong suffix
    assert main(["new", str(target)]) == 3
    assert main(["new", str(tmp_path / "mine.txt")]) == 3
    assert "exists" in capsys.readouterr().err


def test_console_command_exit_codes(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text((EXAMPLES / "greenhouse_tray_3cable.toml").read_text().replace('"2 mm"', '"2"'))
    r = _cablekit("check", str(bad))
    assert r.returncode == 3
    assert "cable.diameter" in r.stderr and "missing unit" in r.stderr and "Traceback" not in r.stderr
    r = _cablekit("check", str(tmp_path / "missing.toml"))
    assert r.returncode == 3 and "an existing design file" in r.stderr
    r = _cablekit("frobnicate")
    assert r.returncode == 2
    r = _cablekit("check", str(EXAMPLES / "workshop_camera_4cable.toml"))
    assert r.returncode == 0, r.stderr


def test_cache_command_lists_and_clears(tmp_path, monkeypatch, capsys):
    import sympy as sp

    from cablekit import codegen

    monkeypatch.setenv("CABLEKIT_CACHE_DIR", str(tmp_path))
    x = sp.Symbol("x")
    codegen.generate("probe_cache_cli", [x + 3], [x])
    assert main(["cache"]) == 0
    assert f"{tmp_path} (1 modules" in capsys.readouterr().out
    assert main(["cache", "--clear"]) == 0
    assert "removed 1 modules" in capsys.readouterr().out
    assert not list(tmp_path.glob("ck_*.py"))
