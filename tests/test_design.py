"""Design files: validation reports every problem, exact round trips, atomic saves."""

import os
from pathlib import Path

import pytest

from cablekit import design as D
from cablekit.design import DesignError, dumps_design, load_design, loads_design, save_design

from conftest import example_paths

GOOD = (Path(__file__).resolve().parents[1] / "examples" / "greenhouse_tray_3cable.toml").read_text()


def _problems(text):
    with pytest.raises(DesignError) as info:
        loads_design(text)
    return info.value.problems


def _paths(text):
    return {p.path for p in _problems(text)}


@pytest.mark.parametrize("path", example_paths(), ids=lambda p: p.name)
def test_examples_load_and_round_trip_exactly(path, tmp_path):
    d = load_design(path)
    out = tmp_path / "copy.toml"
    save_design(d, out)
    d2 = load_design(out)
    assert d2 == d
    # a second save writes byte-identical text
    assert dumps_design(d2) == out.read_text()


def test_si_values_from_units(greenhouse):
    d = greenhouse
    assert d.cable.diameter == pytest.approx(0.002)
    assert d.winches[0].drum_diameter == pytest.approx(0.05)
    assert d.winches[0].count_rate_limit == pytest.approx(100e3)
    assert d.winches[0].motor_rated_speed == pytest.approx(3000 * 2 * 3.141592653589793 / 60)
    assert d.m == 3 and d.dof == 3
    assert d.total_mass >= d.platform.mass + d.payload.mass


def test_modulus_and_area_give_ea(camera4):
    assert camera4.cable.axial_stiffness == pytest.approx(90e9 * 4.2e-6)


def test_every_problem_is_reported_at_once():
    text = (GOOD.replace('diameter = "2 mm"', 'diameter = "2"')
            .replace('mass = "1.2 kg"', 'mass = "-1.2 kg"')
            .replace('gear_ratio = 5', 'gear_ratio = 0')
            .replace('efficiency = 0.85', 'efficiency = 1.5')
            .replace('motor_rated_torque = "0.25 N*m"', 'motor_rated_torque = "0.25 N"')
            .replace('[payload]', '[payload]\ncolour = "red"'))
    paths = _paths(text)
    assert {"cable.diameter", "platform.mass", "winch.gear_ratio", "winch.efficiency",
            "winch.motor_rated_torque", "payload.colour"} <= paths
    msgs = {p.path: str(p) for p in _problems(text)}
    assert "missing unit" in msgs["cable.diameter"]
    assert "greater than zero" in msgs["platform.mass"]
    assert "wrong dimension" in msgs["winch.motor_rated_torque"]
    assert "unknown key" in msgs["payload.colour"]
    assert "'2'" in msgs["cable.diameter"]  # the value found is shown


def test_missing_tables_and_keys():
    text = GOOD.replace("[payload]", "[payloadx]")
    paths = _paths(text)
    assert "payload" in paths and "payloadx" in paths


def test_fewer_cables_than_dof():
    text = GOOD.split("[[frame.exits]]")
    one_exit = text[0] + "[[frame.exits]]" + text[1] + "[[frame.obstacles]]" + GOOD.split("[[frame.obstacles]]")[1]
    probs = _problems(one_exit)
    assert any(p.path == "frame.exits" and "at least as many cables" in p.expected for p in probs)


def test_uncontrollable_layout():
    # all three exits on one line (x axis): the structure matrix loses rank everywhere
    text = (GOOD.replace('position = "3.0, 0, 2.4 m"', 'position = "1.5, 0, 2.4 m"')
            .replace('position = "1.5, 2.6, 2.4 m"', 'position = "3.0, 0, 2.4 m"'))
    probs = _problems(text)
    assert any("uncontrollable" in p.expected for p in probs)


def test_task_outside_frame():
    probs = _problems(GOOD.replace('box_upper = "2.0, 0.95, 1.4 m"', 'box_upper = "4.1, 1.3, 1.4 m"'))
    assert any(p.path == "task.box_upper" and "inside the frame" in p.expected for p in probs)
    probs = _problems(GOOD.replace('box_upper = "2.0, 0.95, 1.4 m"', 'box_upper = "2.1, 1.3, 2.9 m"'))
    assert any(p.path == "task.box_upper" for p in probs)


def test_bad_toml_and_bad_files(tmp_path):
    assert _paths("this is = not = toml") == {"<file>"}
    with pytest.raises(DesignError) as info:
        load_design(tmp_path / "nope.toml")
    assert "an existing design file" in str(info.value)
    binary = tmp_path / "bin.toml"
    binary.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(DesignError):
        load_design(binary)


def test_rigid_platform_needs_attachments_and_inertia(sander8):
    text = dumps_design(sander8)
    doc_text = text.replace("attachments", "attachmentz")
    paths = _paths(doc_text)
    assert "platform.attachments" in paths and "platform.attachmentz" in paths
    bad_inertia = text.split("inertia = ")[0] + 'inertia = "0.1, -0.1, 0.1 kg*m**2"\n' + text.split("inertia = ")[1].split("\n", 1)[1]
    assert "platform.inertia" in _paths(bad_inertia)


def test_point_platform_rejects_orientations():
    text = GOOD.replace('step = "50 mm"', 'step = "50 mm"\norientations = ["0, 0, 0 deg"]')
    assert "task.orientations" in _paths(text)


def test_per_cable_winches(sander8, tmp_path):
    from dataclasses import replace

    w = sander8.winches
    changed = replace(sander8, winches=(replace(w[0], gear_ratio=12.0),) + w[1:])
    out = tmp_path / "w.toml"
    save_design(changed, out)
    assert "[[winches]]" in out.read_text()
    again = load_design(out)
    assert again.winches[0].gear_ratio == 12.0 and again.winches[1].gear_ratio == w[1].gear_ratio
    assert again == changed


def test_save_is_atomic_when_the_write_fails(greenhouse, tmp_path, monkeypatch):
    target = tmp_path / "rig.toml"
    save_design(greenhouse, target)
    before = target.read_bytes()

    def boom(*args, **kwargs):
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(D.os, "replace", boom)
    from dataclasses import replace

    with pytest.raises(OSError):
        save_design(replace(greenhouse, payload=replace(greenhouse.payload, mass=9.0)), target)
    assert target.read_bytes() == before  # the old file is untouched
    assert [p.name for p in tmp_path.iterdir()] == ["rig.toml"]  # no temporary file left behind


def test_save_refuses_an_invalid_design(greenhouse, tmp_path):
    from dataclasses import replace

    target = tmp_path / "rig.toml"
    save_design(greenhouse, target)
    before = target.read_bytes()
    broken = replace(greenhouse, platform=replace(greenhouse.platform, mass=-1.0))
    with pytest.raises(DesignError):
        save_design(broken, target)
    assert target.read_bytes() == before


def test_content_hash_ignores_comments_and_spelling(tmp_path):
    a = loads_design(GOOD)
    b = loads_design("# a comment\n" + GOOD.replace('mass = "1.2 kg"', 'mass = "1200 g"'))
    assert D.content_hash(a) == D.content_hash(b)
    c = loads_design(GOOD.replace('mass = "1.2 kg"', 'mass = "1.3 kg"'))
    assert D.content_hash(a) != D.content_hash(c)


def test_with_changes_revalidates(greenhouse):
    from dataclasses import replace

    with pytest.raises(DesignError):
        greenhouse.with_changes(payload=replace(greenhouse.payload, mass=-2.0))
    ok = greenhouse.with_changes(payload=replace(greenhouse.payload, mass=0.7))
    assert ok.payload.mass == 0.7


def test_temporary_file_lives_beside_the_target(tmp_path, monkeypatch):
    seen = {}
    real = os.replace

    def spy(src, dst):
        seen["src"] = Path(src)
        return real(src, dst)

    monkeypatch.setattr(D.os, "replace", spy)
    D.atomic_write_text(tmp_path / "x.toml", "a = 1\n")
    assert seen["src"].parent == tmp_path  # same folder: rename is atomic on one file system


def test_saved_files_get_normal_permissions(greenhouse, tmp_path):
    # mkstemp makes private files; a saved design must be readable like any other file
    target = tmp_path / "perm.toml"
    save_design(greenhouse, target)
    umask = os.umask(0)
    os.umask(umask)
    assert target.stat().st_mode & 0o777 == 0o666 & ~umask
    target.chmod(0o640)
    save_design(greenhouse, target)
    assert target.stat().st_mode & 0o777 == 0o640  # an existing file keeps its mode
