"""Bad input never hangs, never crashes and never destroys a file (one test family per kind).

Every case here runs the command line as a user would and expects exit code 3 with a one-line
reason naming the field or path, no traceback, and every input file unchanged.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from cablekit import limits
from cablekit.cli import main
from cablekit.design import DesignError, load_design, loads_design, save_design
from cablekit.units import UnitError, parse_quantity, parse_vector, unit_text_problem

from conftest import EXAMPLES, ROOT

GREENHOUSE = EXAMPLES / "greenhouse_tray_3cable.toml"  # point platform with an [arm]
SANDER = EXAMPLES / "hall_sander_8cable.toml"  # rigid platform, 8 cables


def _variant(tmp_path: Path, old: str, new: str, *, base: Path = GREENHOUSE, name: str = "d.toml") -> Path:
    text = base.read_text()
    assert old in text, old
    path = tmp_path / name
    path.write_text(text.replace(old, new, 1))
    return path


def _exit3(argv, capsys, *fragments) -> str:
    rc = main(argv)
    err = capsys.readouterr().err
    assert rc == 3, err
    assert "Traceback" not in err and "internal error" not in err
    for f in fragments:
        assert f in err, (f, err)
    return err


def _cablekit(*args, cwd=ROOT, timeout=60):
    # the timeout only guards against a hang (the bug under test); it is not a speed claim
    return subprocess.run([sys.executable, "-m", "cablekit", *args], capture_output=True, text=True, cwd=cwd,
                          timeout=timeout)


# --------------------------------------------------------------------------------------
# 1. unit text
# --------------------------------------------------------------------------------------
@settings(max_examples=200, deadline=None)
@given(base=st.sampled_from(["m", "mm", "s", "(m)", "kg"]), op=st.sampled_from(["**", "^"]),
       exps=st.lists(st.integers(min_value=2, max_value=99), min_size=2, max_size=6))
def test_exponent_chains_are_refused_before_pint(base, op, exps):
    unit = base + "".join(f"{op}{e}" for e in exps)
    assert unit_text_problem(unit) is not None
    with pytest.raises(UnitError, match="exponent"):
        parse_quantity(f"1 {unit}", "length", field="x")


@pytest.mark.parametrize("unit", ["m" + "*m" * 20, "((((m))))", "m**9", "(m**2)**2", "m**2.5", "m**(2)", "m-s"])
def test_oversized_or_odd_unit_expressions_are_refused(unit):
    assert unit_text_problem(unit) is not None
    with pytest.raises(UnitError):
        parse_quantity(f"1 {unit}", "length")


@pytest.mark.parametrize("text, dim", [("0.02 kg*m^2", "inertia"), ("9.81 m/s**2", "acceleration"),
                                       ("1 (kg*m)/s^2", "force"), ("8 mm^2", "area"), ("3 m**-1*m**2", "length")])
def test_ordinary_unit_expressions_still_parse(text, dim):
    assert unit_text_problem(text.split(" ", 1)[1]) is None
    assert np.isfinite(parse_quantity(text, dim))


@pytest.mark.parametrize("old, new, field", [
    ('drum_diameter = "50 mm"', 'drum_diameter = "50 m**9**9**9"', "winch.drum_diameter"),
    ('position = "0, 0, 2.4 m"', 'position = "0, 0, 2.4 m^9^9^9"', "frame.exits[0].position"),
    ('upper = "240 mm"', 'upper = "240 mm**9**9**9"', "arm.joints[0].upper"),
])
def test_check_refuses_a_hanging_unit_in_every_kind_of_field(tmp_path, old, new, field):
    path = _variant(tmp_path, old, new)
    res = _cablekit("check", str(path))
    assert res.returncode == 3 and field in res.stderr and "Traceback" not in res.stderr


def test_points_refuses_a_hanging_unit_in_a_csv_header(tmp_path):
    csv = tmp_path / "p.csv"
    csv.write_text("x [mm**9**9**9],y [mm],z [mm]\n1500,800,900\n")
    res = _cablekit("points", str(GREENHOUSE), str(csv))
    assert res.returncode == 3 and "column 'x'" in res.stderr and "Traceback" not in res.stderr


_FOREIGN_DIGITS = [chr(c) for c in range(0x110000) if chr(c).isdecimal() and not chr(c).isascii()][:400]


@settings(max_examples=100, deadline=None)
@given(digit=st.sampled_from(_FOREIGN_DIGITS), where=st.integers(0, 2))
def test_non_ascii_digits_are_refused(digit, where):
    # float() and re's \d accept Arabic-Indic or full-width digits; a design file must not
    number = ["1", "2", "5"]
    number[where] = digit
    text = "".join(number) + " mm"
    with pytest.raises(UnitError, match="digits 0-9"):
        parse_quantity(text, "length", field="cable.diameter")
    with pytest.raises(UnitError):
        parse_vector(f"0, 0, {text}", "length")


def test_non_ascii_digits_in_a_csv_cell_are_refused(tmp_path, capsys):
    csv = tmp_path / "p.csv"
    csv.write_text("x [mm],y [mm],z [mm]\n١٥٠٠,800,900\n", encoding="utf-8")
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "line 2", "column 'x'", "not a number")


@pytest.mark.parametrize("old, new, field", [
    ("gear_ratio = 5", 'gear_ratio = "5 deg"', "winch.gear_ratio"),
    ('motor_rated_speed = "3000 rpm"', 'motor_rated_speed = "50 Hz"', "winch.motor_rated_speed"),
    ('count_rate_limit = "100 kHz"', 'count_rate_limit = "6000 rpm"', "winch.count_rate_limit"),
    ("efficiency = 0.85", 'efficiency = "85 percent"', "winch.efficiency"),
    ('alpha = "90 deg"', 'alpha = "90 percent"', "arm.joints[1].alpha"),
])
def test_a_quantity_field_accepts_only_its_own_dimension(tmp_path, old, new, field):
    with pytest.raises(DesignError) as info:
        load_design(_variant(tmp_path, old, new))
    assert field in str(info.value)


# --------------------------------------------------------------------------------------
# 2. outputs never overwrite inputs, folders, links or special files
# --------------------------------------------------------------------------------------
def _task_files(tmp_path):
    design = tmp_path / "d.toml"
    design.write_text(GREENHOUSE.read_text())
    task = tmp_path / "t.csv"
    task.write_text((EXAMPLES / "greenhouse_task.csv").read_text())
    points = tmp_path / "p.csv"
    points.write_text((EXAMPLES / "greenhouse_points.csv").read_text())
    meas = tmp_path / "m.csv"
    meas.write_text((EXAMPLES / "greenhouse_measurements.csv").read_text())
    return design, task, points, meas


def _commands(files, out):
    """Each command with ``out`` as one of its output paths, and the inputs it reads."""
    design, task, points, meas = (str(f) for f in files)
    return [
        (["workspace", design, "--quiet", "-o", out], [0]),
        (["points", design, points, "-o", out], [0, 2]),
        (["task", design, task, "-o", out], [0, 1]),
        (["iso9283", meas, "-o", out], [3]),
        (["iso9283", meas, "--html", out], [3]),
        (["accuracy", design, "--quiet", "-o", out], [0]),
        (["calibrate", design, meas, "-o", out], [0, 3]),
        (["review", design, "-q", "-o", out], [0]),
    ]


@pytest.mark.parametrize("k", range(8))
def test_no_command_writes_onto_its_own_input(tmp_path, capsys, k):
    files = _task_files(tmp_path)
    before = [p.read_bytes() for p in files]
    inputs = _commands(files, "")[k][1]
    targets = [files[i] for i in inputs]
    # the same files through a symbolic link, a hard link and a path with '..' in it
    for i in inputs:
        link = tmp_path / f"link{i}{files[i].suffix}"
        link.symlink_to(files[i])
        hard = tmp_path / f"hard{i}{files[i].suffix}"
        os.link(files[i], hard)
        targets += [link, hard, tmp_path / "x" / ".." / files[i].name]
    (tmp_path / "x").mkdir()
    for target in targets:
        argv = _commands(files, str(target))[k][0]
        assert main(argv) == 3, argv
        err = capsys.readouterr().err
        assert "Traceback" not in err and str(target) in err
        assert [p.read_bytes() for p in files] == before, argv


@pytest.mark.parametrize("kind", ["folder", "fifo", "device", "proc", "symlink", "missing-folder"])
def test_outputs_that_are_not_plain_files_are_refused(tmp_path, capsys, kind):
    files = _task_files(tmp_path)
    if kind == "folder":
        out = tmp_path / "sub.csv"
        out.mkdir()
    elif kind == "fifo":
        out = tmp_path / "pipe.csv"
        os.mkfifo(out)
    elif kind == "device":
        out = Path("/dev/null")
    elif kind == "proc":
        out = Path("/proc/self/comm")
    elif kind == "symlink":
        out = tmp_path / "elsewhere.csv"
        out.symlink_to(tmp_path / "victim.csv")
    else:
        out = tmp_path / "no" / "such" / "out.csv"
    err = _exit3(["points", str(files[0]), str(files[2]), "-o", str(out)], capsys, str(out))
    assert "-o/--output" in err
    assert not (tmp_path / "victim.csv").exists() and not (tmp_path / "no").exists()


def test_review_refuses_a_pipe_as_its_sheet(tmp_path, capsys):
    # review creates a missing output folder (documented); special files are refused all the same
    files = _task_files(tmp_path)
    fifo = tmp_path / "pipe.html"
    os.mkfifo(fifo)
    _exit3(["review", str(files[0]), "-q", "-o", str(fifo)], capsys, "pipe")


@pytest.mark.skipif(os.geteuid() == 0, reason="root may write into any folder")
def test_unwritable_folder_gives_exit_3_with_the_path(tmp_path, capsys):
    files = _task_files(tmp_path)
    locked = tmp_path / "locked"
    locked.mkdir(mode=0o500)
    _exit3(["points", str(files[0]), str(files[2]), "-o", str(locked / "o.csv")], capsys, str(locked))


def test_a_write_refused_by_the_system_gives_exit_3_with_the_path(tmp_path, capsys, monkeypatch):
    # (as root no folder is unwritable; the refusal is simulated where the file is written)
    import cablekit.tables as tables_module

    def refuse(path, text):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(tables_module, "atomic_write_text", refuse)  # where the CSV is written
    files = _task_files(tmp_path)
    out = tmp_path / "o.csv"
    _exit3(["points", str(files[0]), str(files[2]), "-o", str(out)], capsys, str(out), "Permission denied")


# --------------------------------------------------------------------------------------
# 4. unbounded work is refused with the limit named
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("option", [["--step", "1 um"], ["--angle-step", "1e-9 deg"]])
def test_task_sampling_is_capped(tmp_path, capsys, option):
    _exit3(["task", str(GREENHOUSE), str(EXAMPLES / "greenhouse_task.csv"), *option], capsys,
           "MAX_TASK_SAMPLES", f"{limits.MAX_TASK_SAMPLES:,}")


def test_workspace_step_is_capped(capsys):
    _exit3(["workspace", str(GREENHOUSE), "--step", "0.1 mm", "--quiet"], capsys, "MAX_GRID_POSES")


def test_check_refuses_absurd_cable_counts(tmp_path, capsys):
    exit_text = '[[frame.exits]]\nname = "C{k}"\nposition = "{x}, 0, 2.4 m"\n\n'
    text = GREENHOUSE.read_text()
    start, end = text.index("[[frame.exits]]"), text.index("[[frame.obstacles]]")
    many = "".join(exit_text.format(k=k, x=k * 0.003) for k in range(1000))
    path = tmp_path / "d.toml"
    path.write_text(text[:start] + many + text[end:])
    _exit3(["check", str(path)], capsys, "frame.exits", "1000 cables", f"at most {limits.MAX_CABLES}")


def test_check_refuses_a_30_joint_arm(tmp_path, capsys):
    text = GREENHOUSE.read_text()
    start = text.index("[[arm.joints]]\nname = \"turn\"")
    end = text.index("[", start + 20)
    joint = text[start:end]
    joints = "".join(joint.replace('name = "turn"', f'name = "turn{k}"').replace('role = "wrist_roll"', 'role = "reach"')
                     for k in range(30))
    path = tmp_path / "d.toml"
    path.write_text(text[:start] + joints + text[end:])
    _exit3(["check", str(path)], capsys, "arm.joints", f"at most {limits.MAX_ARM_JOINTS} joints")


def test_a_million_row_csv_is_refused(tmp_path, capsys):
    csv = tmp_path / "p.csv"
    with open(csv, "w") as fh:
        fh.write("x [mm],y [mm],z [mm]\n")
        fh.write("1500,800,900\n" * 1_000_000)
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "MAX_TABLE_ROWS")


def test_check_refuses_a_step_later_commands_cannot_sample(tmp_path, capsys):
    path = _variant(tmp_path, 'step = "50 mm"', 'step = "0.1 mm"')
    _exit3(["check", str(path)], capsys, "task.step", "MAX_GRID_POSES")


# --------------------------------------------------------------------------------------
# 5. exit 3, not 70: what check accepts, later commands can compute
# --------------------------------------------------------------------------------------
def test_deeply_nested_toml_gives_exit_3(tmp_path, capsys):
    path = tmp_path / "d.toml"
    path.write_text("x = " + "[" * 100_000 + "]" * 100_000 + "\n")
    _exit3(["check", str(path)], capsys, "<file>")
    path.write_text(GREENHOUSE.read_text() + "\n[arm.gripper.x]\ny = " + "[" * 5000 + "1" + "]" * 5000 + "\n")
    _exit3(["check", str(path)], capsys)


def test_a_128_kb_csv_cell_gives_exit_3(tmp_path, capsys):
    csv = tmp_path / "p.csv"
    csv.write_text("label,x [mm],y [mm],z [mm]\n" + "a" * 131_072 + ",1500,800,900\n")
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "line 2", "cell")
    csv.write_text("label,x [mm],y [mm],z [mm]\n\"" + "a" * 200_000 + "\",1500,800,900\n")
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "cell")


def test_a_target_at_1e300_mm_gives_exit_3(tmp_path, capsys):
    csv = tmp_path / "t.csv"
    csv.write_text("label,x [mm],y [mm],z [mm],gripper\nfar,1e300,800,900,open\n")
    _exit3(["task", str(GREENHOUSE), str(csv)], capsys, "line 2", "column 'x'")
    csv.write_text("x [mm],y [mm],z [mm]\n1e300,800,900\n")
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "column 'x'")


@pytest.mark.parametrize("old, new, field", [
    ('position = "1.5, 0.8667, 1.2 m"', 'position = "1.5, 0.8667, 3.2 m"', "home.position"),
    ('position = "1.5, 0.8667, 1.2 m"', 'position = "9, 0.8667, 1.2 m"', "home.position"),
    ('mass = "1.2 kg"', 'mass = "1e300 kg"', "platform.mass"),
    ('g = "9.80665 m/s^2"', 'g = "1e308 m/s^2"', "frame.g"),
    ('g = "9.80665 m/s^2"', 'g = "50000 m/s^2"', "frame.g"),
    ('drum_diameter = "50 mm"', 'drum_diameter = "1e-300 m"', "winch.drum_diameter"),
    ('drum_diameter = "50 mm"', 'drum_diameter = "0.01 mm"', "winch.drum_diameter"),
    ('pulley_diameter = "50 mm"', 'pulley_diameter = "1 um"', "frame.exits[0].pulley_diameter"),
    ("gear_ratio = 5", "gear_ratio = 1e9", "winch.gear_ratio"),
    ('drum_width = "40 mm"', 'drum_width = "1 mm"', "winch.drum_width"),  # review gave exit 70
    ('diameter = "2 mm"', 'diameter = "9 km"', "winch.drum_width"),
    ('mass_per_length = "0.016 kg/m"', 'mass_per_length = "1e4 kg/m"', "cable.mass_per_length"),  # review: 70
    ("deadband_counts = 3", "deadband_counts = 1e12", "winch.deadband_counts"),  # review gave exit 70
    ('axial_stiffness = "170 kN"', 'axial_stiffness = "1e-9 N"', "cable.axial_stiffness"),  # review gave 70
    ('mass = "0.5 kg"', 'mass = "9e5 kg"', "home.position"),  # breaks a cable at home (sag unsolvable: 70 on a rigid rig)
    ("gear_ratio = 5", "gear_ratio = 1e-9", "winch.encoder_lines"),  # 150,000 km of cable per count
    ('[payload]', '[practice]\nrope_design_factor = 1e-9\n\n[payload]', "practice.rope_design_factor"),
    ('[payload]', '[practice]\nrope_design_factor = 0.5\n\n[payload]', "practice.rope_design_factor"),
    ('[payload]', '[practice]\nsag_length_threshold = "1e3 m"\n\n[payload]', "practice.sag_length_threshold"),
])
def test_check_rejects_values_later_commands_cannot_compute(tmp_path, capsys, old, new, field):
    path = _variant(tmp_path, old, new)
    _exit3(["check", str(path)], capsys, field)


@pytest.mark.slow
def test_a_motor_too_weak_to_hold_any_pose_is_a_failing_design_not_bad_input(tmp_path, capsys):
    # review once gave exit 70 here; a motor that cannot pull even the least taut tension is a design
    # that fails its checks (exit 4 with the sheet), never an input error that hides the sheet
    path = _variant(tmp_path, 'motor_rated_torque = "0.25 N*m"', 'motor_rated_torque = "1e-6 N*m"')
    assert main(["check", str(path)]) == 0
    capsys.readouterr()
    assert main(["review", str(path), "-o", str(tmp_path / "weak.html")]) == 4
    assert "FAIL motor torque (static vs rated)" in capsys.readouterr().out


@pytest.mark.parametrize("key", ["deadband_counts", "quantisation_counts"])
def test_error_budget_counts_stay_within_the_small_error_model(tmp_path, capsys, key):
    # greenhouse with gear_ratio 0.5: 0.82 mm of cable per count, so 1000 counts are 0.82 m
    path = _variant(tmp_path, 'exit_position = "1 mm"', f'exit_position = "1 mm"\n{key} = 1000')
    path.write_text(path.read_text().replace("gear_ratio = 5", "gear_ratio = 0.5"))
    _exit3(["check", str(path)], capsys, f"errors.{key}", "small-error model")


def test_check_rejects_a_rope_that_breaks_under_its_own_weight(tmp_path, capsys):
    # 0.06 kg/m weighs 0.59 N per metre; the longest run (exit to a task-box corner) is about 2.8 m
    path = _variant(tmp_path, 'mass_per_length = "0.016 kg/m"', 'mass_per_length = "0.06 kg/m"')
    text = path.read_text().replace('breaking_force = "2.4 kN"', 'breaking_force = "1.5 N"')
    path.write_text(text.replace('min_tension = "3 N"', 'min_tension = "1 N"'))
    _exit3(["check", str(path)], capsys, "cable.breaking_force", "its own weight")
    path.write_text(text.replace('breaking_force = "1.5 N"', 'breaking_force = "2 N"').replace('min_tension = "3 N"', 'min_tension = "1 N"'))
    main(["check", str(path)])
    assert "its own weight" not in capsys.readouterr().err


def test_check_rejects_a_hundred_thousand_task_points(tmp_path, capsys):
    points = ", ".join(['"1.5, 0.8, 1.0 m"'] * 100_000)
    path = _variant(tmp_path, 'step = "50 mm"', f'step = "50 mm"\npoints = [{points}]')
    _exit3(["check", str(path)], capsys, "task.points", f"at most {limits.MAX_TASK_POINTS:,}")


@pytest.mark.parametrize("scale", [1e-6, 1e6])
def test_check_rejects_micrometre_and_thousand_km_frames(tmp_path, capsys, scale):
    d = load_design(GREENHOUSE)
    text = GREENHOUSE.read_text()
    for e in d.frame.exits:
        x, y, z = e.position
        text = text.replace(f'position = "{x:g}, {y:g}, {z:g} m"'.replace("3, 0", "3.0, 0"),
                            f'position = "{x * scale!r}, {y * scale!r}, {z * scale!r} m"')
    path = tmp_path / "d.toml"
    path.write_text(text)
    _exit3(["check", str(path)], capsys, "frame.exits")


@pytest.mark.parametrize("n", [limits.MAX_FIXED_POSES])
def test_check_rejects_more_fixed_poses_than_the_accuracy_map_can_thin(tmp_path, capsys, n):
    points = ", ".join(['"1.5, 0.8, 1.0 m"'] * n)  # plus one box position: one too many
    path = _variant(tmp_path, 'step = "50 mm"', f'step = "50 mm"\npoints = [{points}]')
    _exit3(["check", str(path)], capsys, "task.points", "MAX_FIXED_POSES")
    # a rigid platform: (3 points + 1 box position) x 504 orientations = 2016 poses
    orientations = ", ".join(['"0, 0, 0 deg"'] * 500)
    path = _variant(tmp_path, 'orientations = [', f'orientations = [{orientations}, ', base=SANDER)
    points = ", ".join(['"1.3, 1.0, 0.9 m"'] * 3)
    path.write_text(path.read_text().replace('step = "100 mm"', f'step = "100 mm"\npoints = [{points}]'))
    _exit3(["check", str(path)], capsys, "MAX_FIXED_POSES", "504 orientations")


def test_every_example_stays_within_the_limits():
    for path in sorted(EXAMPLES.glob("*.toml")):
        load_design(path)  # raises DesignError if a limit were too tight for the demos


# --------------------------------------------------------------------------------------
# 6. encodings and leftovers
# --------------------------------------------------------------------------------------
def test_a_utf8_bom_design_is_read(tmp_path):
    path = tmp_path / "bom.toml"
    path.write_bytes(b"\xef\xbb\xbf" + GREENHOUSE.read_bytes())
    assert load_design(path).meta.name == load_design(GREENHOUSE).meta.name


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-be"])
def test_a_utf16_design_gets_a_clear_message(tmp_path, capsys, encoding):
    path = tmp_path / "u16.toml"
    text = GREENHOUSE.read_text()
    path.write_bytes(("\ufeff" + text).encode(encoding) if encoding.endswith("be") else text.encode(encoding))
    _exit3(["check", str(path)], capsys, "UTF-16", "UTF-8")


def test_a_utf16_csv_gets_a_clear_message(tmp_path, capsys):
    csv = tmp_path / "p.csv"
    csv.write_bytes("x [mm],y [mm],z [mm]\n1500,800,900\n".encode("utf-16"))
    _exit3(["points", str(GREENHOUSE), str(csv)], capsys, "UTF-16")


def test_a_killed_save_leaves_no_temporary_file_after_the_next_save(tmp_path):
    d = load_design(GREENHOUSE)
    target = tmp_path / "d.toml"
    # a save killed before its rename leaves its temporary file (named with the writer's pid)
    child = subprocess.run([sys.executable, "-c", (
        "import os, sys, tempfile; "
        f"tempfile.mkstemp(prefix='.d.toml.' + str(os.getpid()) + '.', suffix='.tmp', dir={str(tmp_path)!r}); "
        "os._exit(9)")])
    assert child.returncode == 9
    left = list(tmp_path.glob(".d.toml.*.tmp"))
    assert len(left) == 1
    # a temporary file of a writer still running is kept
    running = tmp_path / f".d.toml.{os.getppid()}.abc123.tmp"
    running.write_text("")
    save_design(d, target)
    assert not left[0].exists() and running.exists()
    assert loads_design(target.read_text()).meta.name == d.meta.name


# --------------------------------------------------------------------------------------
# 8. the generated-code cache
# --------------------------------------------------------------------------------------
def _fresh_cache(monkeypatch, folder: Path):
    from cablekit import codegen

    monkeypatch.setenv("CABLEKIT_CACHE_DIR", str(folder))
    codegen.clear_cache(disk=False)
    return codegen


def test_a_changed_cached_module_is_not_imported(tmp_path, monkeypatch):
    import sympy as sp

    codegen = _fresh_cache(monkeypatch, tmp_path / "cache")
    x = sp.Symbol("x")
    fn = codegen.generate("robust_probe", [x * 2], [x])
    assert fn(3.0)[..., 0] == 6.0
    assert fn.path.with_suffix(".sha256").read_text().strip() == __import__("hashlib").sha256(fn.path.read_bytes()).hexdigest()
    # someone edits the cached file: it must be regenerated, never run
    marker = tmp_path / "ran"
    fn.path.write_text(fn.path.read_text() + f"\nopen({str(marker)!r}, 'w').close()\n")
    codegen.clear_cache(disk=False)
    again = codegen.generate("robust_probe", [x * 2], [x])
    assert not marker.exists() and again(4.0)[..., 0] == 8.0
    assert "open(" not in again.path.read_text()
    # a module without its recorded hash is regenerated too
    again.path.with_suffix(".sha256").unlink()
    again.path.write_text(again.path.read_text() + f"\nopen({str(marker)!r}, 'w').close()\n")
    codegen.clear_cache(disk=False)
    codegen.generate("robust_probe", [x * 2], [x])
    assert not marker.exists()


@pytest.mark.parametrize("mode", [0o777, 0o775, 0o757])
def test_a_cache_folder_writable_by_others_is_refused(tmp_path, monkeypatch, capsys, mode):
    import sympy as sp

    folder = tmp_path / "shared-cache"
    folder.mkdir()
    folder.chmod(mode)
    codegen = _fresh_cache(monkeypatch, folder)
    with pytest.raises(codegen.CacheError, match="writable by others"):
        codegen.generate("robust_probe", [sp.Symbol("x") + 1], [sp.Symbol("x")])
    assert not list(folder.iterdir())
    env = dict(os.environ, CABLEKIT_CACHE_DIR=str(folder))  # a new process: nothing generated yet
    res = subprocess.run([sys.executable, "-m", "cablekit", "check", str(GREENHOUSE)], capture_output=True,
                         text=True, env=env, timeout=300)
    assert res.returncode == 3 and "chmod go-w" in res.stderr and "Traceback" not in res.stderr
    assert not list(folder.iterdir())


# --------------------------------------------------------------------------------------
# 7. the dashboard server
# --------------------------------------------------------------------------------------
def test_serve_token_rules():
    from cablekit.cli import InputError
    from cablekit.commands.serve import choose_token

    made = {choose_token(None, False, "127.0.0.1") for _ in range(3)}
    assert len(made) == 3 and all(len(t) >= limits.MIN_TOKEN_LENGTH for t in made)  # a new one each start
    assert choose_token("a" * limits.MIN_TOKEN_LENGTH, False, "0.0.0.0") == "a" * limits.MIN_TOKEN_LENGTH
    assert choose_token(None, True, "127.0.0.1") == ""  # only when asked for explicitly
    for token, no_token, ip in [("short", False, "127.0.0.1"), ("a" * 15, False, "0.0.0.0"),
                                ("spaces are bad in a url", False, "127.0.0.1"), (None, True, "0.0.0.0"),
                                ("a" * 20, True, "127.0.0.1")]:
        with pytest.raises(InputError):
            choose_token(token, no_token, ip)


def test_serve_refuses_a_broken_notebook_file(tmp_path, capsys):
    nb = tmp_path / "broken.ipynb"
    nb.write_text("{ not json")
    _exit3(["serve", str(nb), "--port", "0"], capsys, "broken.ipynb", "cannot be read")


def test_serve_config_checks_host_and_culls_kernels():
    from cablekit.commands.serve import voila_config

    local = voila_config(ip="127.0.0.1", port=1234, token="t" * 16, cull_idle=600.0)
    assert local["Voila"]["tornado_settings"] == {"allow_remote_access": False, "local_hostnames": ["localhost"]}
    assert local["Voila"]["token"] == "t" * 16
    cull = local["MappingKernelManager"]
    assert cull["cull_idle_timeout"] == 600 and 0 < cull["cull_interval"] <= 60 and cull["cull_connected"] is False


_PROBE_NOTEBOOK = {
    "cells": [
        {"cell_type": "code", "metadata": {"tags": ["parameters"]}, "source": "DESIGN = 'x'\nDESIGN_FOLDER = 'x'\n",
         "outputs": [], "execution_count": None},
        {"cell_type": "code", "metadata": {}, "source": "print('saving-into:' + str(DESIGN_FOLDER))",
         "outputs": [], "execution_count": None},
    ],
    "metadata": {"kernelspec": {"name": "python3", "display_name": "Python 3", "language": "python"}},
    "nbformat": 4, "nbformat_minor": 5,
}


def _children(pid: int) -> list[int]:
    out = []
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        if int(fields[1]) == pid:
            out.append(int(stat.parent.name))
    return out


def _start_serve(tmp_path, *extra):
    import json
    import re
    import time

    nb = tmp_path / "probe.ipynb"
    nb.write_text(json.dumps(_PROBE_NOTEBOOK))
    env = dict(os.environ, CABLEKIT_CACHE_DIR=os.environ.get("CABLEKIT_CACHE_DIR", str(tmp_path / "cache")))
    proc = subprocess.Popen([sys.executable, "-m", "cablekit", "serve", str(nb), "--port", "0", *extra],
                            cwd=tmp_path, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
    lines = []
    end = time.monotonic() + 120
    while time.monotonic() < end and proc.poll() is None:
        line = proc.stdout.readline()
        lines.append(line)
        if "saved to" in line:
            break
    url = next(re.search(r"http://\S+", line).group(0) for line in lines if "http://" in line)
    return proc, url, lines


def _get(url, host=None, timeout=60):
    import urllib.error
    import urllib.request

    class NoRedirect(urllib.request.HTTPRedirectHandler):
        def redirect_request(self, *args, **kwargs):
            return None

    request = urllib.request.Request(url, headers={"Host": host} if host else {})
    try:
        with urllib.request.build_opener(NoRedirect).open(request, timeout=timeout) as response:
            return response.status, response.read().decode("utf-8", "replace")
    except urllib.error.HTTPError as exc:
        return exc.code, ""


def _alive(pid: int) -> bool:
    """A running process (a zombie waiting to be reaped by its new parent does not count)."""
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def _port_open(port: int) -> bool:
    import socket

    try:
        socket.create_connection(("127.0.0.1", port), timeout=2).close()
        return True
    except OSError:
        return False


@pytest.mark.slow
def test_served_dashboard_is_locked_down_culls_kernels_and_dies_with_cablekit(tmp_path):
    import signal
    import time

    proc, url, lines = _start_serve(tmp_path, "--cull-idle", "4 s")
    try:
        base, token = url.split("?token=")
        port = int(base.rstrip("/").rsplit(":", 1)[1])
        assert len(token) >= limits.MIN_TOKEN_LENGTH  # a token by default, on loopback too
        assert any(str(tmp_path) in line for line in lines)
        assert _get(base)[0] in (302, 403)  # no token, no page
        assert _get(f"{base}?token={token}", host=f"attacker.example:{port}")[0] == 403  # DNS rebinding
        for _ in range(3):
            status, page = _get(f"{base}?token={token}", host=f"localhost:{port}")
            assert status == 200 and f"saving-into:{tmp_path}" in page  # saves go where serve started
        voila = _children(proc.pid)
        assert len(voila) == 1
        assert _children(voila[0])  # the pages' kernels (no browser ever connected)
        end = time.monotonic() + 60
        while _children(voila[0]) and time.monotonic() < end:
            time.sleep(1)
        assert not _children(voila[0])  # culled
        os.kill(proc.pid, signal.SIGKILL)  # cablekit dies without a chance to clean up
        proc.wait(timeout=10)
        end = time.monotonic() + 30
        while (_port_open(port) or _alive(voila[0])) and time.monotonic() < end:
            time.sleep(0.5)
        assert not _port_open(port) and not _alive(voila[0])
    finally:
        if proc.poll() is None:
            proc.kill()


@pytest.mark.slow
def test_serve_stops_voila_on_sighup(tmp_path):
    import signal
    import time

    proc, url, lines = _start_serve(tmp_path, "--no-token")
    try:
        assert "token" not in url
        port = int(url.split("//")[1].split("/")[0].rsplit(":", 1)[1])
        voila = _children(proc.pid)
        proc.send_signal(signal.SIGHUP)  # the terminal was closed
        assert proc.wait(timeout=60) == 0
        time.sleep(0.5)
        assert not _port_open(port) and not any(_alive(v) for v in voila)
    finally:
        if proc.poll() is None:
            proc.kill()


@pytest.mark.parametrize("option, value, fragment", [
    ("--builds", "1000000000", "--builds"),
    ("--mc-samples", "1000000000", "--mc-samples"),
    ("--mc-poses", "100000", "--mc-poses"),
    ("--max-poses", "100000000", "--max-poses"),
    ("--max-poses", "900000", "MAX_BUILD_EVALUATIONS"),
])
def test_accuracy_sampling_options_are_capped(tmp_path, capsys, option, value, fragment):
    _exit3(["accuracy", str(GREENHOUSE), option, value, "--quiet", "-o", str(tmp_path / "a.npz")], capsys, fragment)
    assert not (tmp_path / "a.npz").exists()
