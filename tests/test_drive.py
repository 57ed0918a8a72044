"""Drivetrain sizing per winch, the rope catalogue, and ``cablekit drive``."""

import math

import numpy as np
import pytest

from cablekit.cables import rope_catalogue, smallest_rope
from cablekit.checks import FAIL, PASS, WARN, run_all
from cablekit.cli import main
from cablekit.design import DesignError, design_from_dict, design_to_dict, load_design, loads_design
from cablekit.drive import (count_rate, deadband_length, design_checks, drum_fill, fleet_angle, motor_torque,
                            pitch_diameter, rope_class, size_drives)
from cablekit.kinematics import length_per_count
from cablekit.practice import PRACTICE
from cablekit.region import task_poses
from cablekit.statics import tensions_at

LBF = 4.4482216152605  # N per pound-force (NIST SP 811, exact definition)


def _changed(design, section, **values):
    doc = design_to_dict(design)
    doc[section].update(values)
    return design_from_dict(doc)


def _row(result, name):
    return next(r for r in result.rows if r.name == name)


@pytest.fixture(scope="module")
def greenhouse_drive(greenhouse):
    return size_drives(greenhouse, step=0.15)


def test_length_per_count_and_count_rate_by_hand(greenhouse, greenhouse_drive):
    # greenhouse winch: drum 50 mm + rope 2 mm, gear 5, 100 lines x4:
    # pi * 52 mm / (5 * 400) = 81.681 um per count (worked by hand)
    lpc = math.pi * 52e-3 / 2000
    r = greenhouse_drive.rows[0]
    assert r.length_per_count == pytest.approx(lpc, rel=1e-12)
    assert length_per_count(greenhouse)[0] == pytest.approx(lpc, rel=1e-12)
    assert pitch_diameter(50e-3, 2e-3) == pytest.approx(52e-3)
    # 0.4 m/s over 81.681 um per count = 4897.1 counts/s; deadband 3 counts = 0.245 mm (by hand)
    assert r.count_rate == pytest.approx(0.4 / lpc, rel=1e-12)
    assert r.count_rate == pytest.approx(4897.1, abs=0.05)
    assert r.deadband == pytest.approx(3 * lpc, rel=1e-12)
    # drum 0.4 m/s / 26 mm = 15.38 rad/s; motor 5x that = 734.6 rpm (by hand)
    assert r.motor_speed * 60 / (2 * math.pi) == pytest.approx(734.6, abs=0.1)


def test_motor_torque_is_force_times_radius_over_ratio_and_efficiency(greenhouse_drive):
    # F r / (i eta): 100 N on a 26 mm pitch radius through 5:1 at 85 % needs 0.6118 N*m (by hand)
    assert motor_torque(100.0, 0.026, 5.0, 0.85) == pytest.approx(100 * 0.026 / (5 * 0.85), rel=1e-15)
    assert motor_torque(100.0, 0.026, 5.0, 0.85) == pytest.approx(0.6118, abs=1e-4)
    r = greenhouse_drive.rows[0]
    assert r.fill.layers == 1
    assert r.torque == pytest.approx(r.max_tension * 0.026 / (5 * 0.85), rel=1e-12)
    # accelerating upwards at a = 0.5 m/s^2 (the demo task): tension x (g + a)/g (Newton's second law on
    # the hanging load)
    assert r.peak_torque == pytest.approx(r.torque * (9.80665 + 0.5) / 9.80665, rel=1e-12)


def test_half_millimetre_steps_and_a_three_count_deadband_make_1_5_mm_steps(greenhouse):
    # Fact of the trade on a small hobby winch rig (no published source): an encoder step of about
    # 0.5 mm with a deadband of 3 counts moves the cable in 1.5 mm steps.
    assert deadband_length(3, 0.5e-3) == pytest.approx(1.5e-3, rel=1e-15)
    # the same through a whole design: pitch diameter 31.8 mm, direct drive, 50 lines x4 -> 0.4995 mm
    d = _changed(greenhouse, "winch", drum_diameter="29.8 mm", gear_ratio=1, encoder_lines=50, decoding=4,
                 deadband_counts=3, flange_diameter="50 mm", drum_width="30 mm")
    r = size_drives(d, step=0.3).rows[0]
    assert r.length_per_count == pytest.approx(0.5e-3, rel=2e-3)
    assert r.deadband == pytest.approx(1.5e-3, rel=2e-3)


def test_cable_weight_raises_the_tension_at_the_winch(greenhouse, greenhouse_drive):
    # exit-side tension = platform tension + w h (Irvine 1981, sec. 1.2): a suspended rig's winch
    # carries a little more than the platform end of its cable
    q = task_poses(greenhouse, step=0.15).poses
    t = tensions_at(greenhouse, q).tensions
    r = greenhouse_drive.rows[0]
    w = greenhouse.cable.mass_per_length * greenhouse.frame.g
    assert np.nanmax(t[:, 0]) < r.max_tension <= np.nanmax(t[:, 0]) + w * 2.4


def test_precomputed_tensions_give_the_same_sizing(greenhouse, greenhouse_drive):
    q = task_poses(greenhouse, step=0.15).poses
    t = tensions_at(greenhouse, q).tensions
    res = size_drives(greenhouse, tensions=t, poses=q)
    assert res.tension_source == "the tensions given"
    for a, b in zip(res.rows, greenhouse_drive.rows):
        assert a.max_tension == pytest.approx(b.max_tension, rel=1e-9)
    with pytest.raises(ValueError, match="tensions must have shape"):
        size_drives(greenhouse, tensions=t[:, :2], poses=q)


def test_drum_fill_by_hand():
    # D 50 mm, d 2 mm, 40 mm wide, grooved at 1.09 d: floor(40 / 2.18) = 18 wraps per layer;
    # layer 1 holds 18 * pi * 52 mm = 2.9405 m; layer 2: 18 * pi * 56 mm = 3.1667 m (by hand)
    f = drum_fill(1.0, 0.050, 0.040, 0.002, flange_diameter=0.070, grooved=True, groove_pitch=1.09)
    assert f.wraps_per_layer == 18
    assert f.layers == 1
    assert f.turns == pytest.approx(1.0 / (math.pi * 0.052), rel=1e-12)
    # flange 70 mm keeping 2 d freeboard: floor((70 - 50 - 8) / 4) = 3 layers allowed
    assert f.layers_allowed == 3
    assert f.capacity == pytest.approx(18 * math.pi * (0.052 + 0.056 + 0.060), rel=1e-12)
    assert f.freeboard == pytest.approx((70 - 54) / 4)  # rope diameters above one layer
    f2 = drum_fill(4.0, 0.050, 0.040, 0.002, flange_diameter=0.070, grooved=True)
    assert f2.layers == 2 and f2.top_pitch_diameter == pytest.approx(0.056)
    # no flange diameter: one layer only
    assert drum_fill(1.0, 0.050, 0.040, 0.002).layers_allowed == 1
    with pytest.raises(ValueError, match="does not fit one wrap"):
        drum_fill(1.0, 0.050, 0.001, 0.002)


def test_fleet_angle_and_limits_match_their_sources(sander8):
    # atan(half the drum width / distance): 80 mm drum 1 m from the pulley -> atan(0.04) = 2.291 deg
    assert math.degrees(fleet_angle(0.080, 1.0)) == pytest.approx(2.2906, abs=1e-4)
    # Wire Rope Technical Board, Wire Rope Users Manual: 1.5 deg smooth, 2 deg grooved, avoid < 0.5 deg
    assert math.degrees(PRACTICE["fleet_angle_smooth"].value) == pytest.approx(1.5)
    assert math.degrees(PRACTICE["fleet_angle_grooved"].value) == pytest.approx(2.0)
    assert math.degrees(PRACTICE["fleet_angle_min"].value) == pytest.approx(0.5)
    # aircraft-cable suppliers' pulley guides (common practice, no standard): 7x19 24:1 desired,
    # 18:1 critical; 7x7 42:1 and 28:1
    assert (PRACTICE["drum_d_ratio_min"].value, PRACTICE["drum_d_ratio_desired"].value) == (18.0, 24.0)
    assert (PRACTICE["pulley_d_ratio_min"].value, PRACTICE["pulley_d_ratio_desired"].value) == (18.0, 24.0)
    assert (PRACTICE["d_ratio_min_7x7"].value, PRACTICE["d_ratio_desired_7x7"].value) == (28.0, 42.0)
    for key in ("drum_d_ratio_min", "d_ratio_min_7x7"):
        assert "common practice" in PRACTICE[key].source
    for key in ("rope_design_factor", "flange_freeboard_min", "brake_torque_factor"):
        assert "from memory" in PRACTICE[key].source
    # the demo's grooved 80 mm drum 1 m away exceeds 2 deg; a 1.5 m distance passes
    res = size_drives(sander8, step=0.4)
    fa = [c for c in res.checks if c.key == "fleet_angle"]
    assert len(fa) == sander8.m  # one per winch: all() over an empty list would pass
    assert all(c.status == FAIL and c.limit == pytest.approx(2.0) for c in fa)
    smooth = size_drives(_changed(sander8, "winch", grooved=False), step=0.4)
    fa = [c for c in smooth.checks if c.key == "fleet_angle"]
    assert len(fa) == sander8.m and all(c.limit == pytest.approx(1.5) for c in fa)


def test_d_ratio_limits_follow_the_rope_construction(greenhouse, camera4):
    assert rope_class("7x7 galvanised steel, 2 mm") == "7x7"
    assert rope_class("7x19 galvanised") == "7x19"
    assert rope_class("") == "7x19"
    d_ratio = {c.subject: c for c in size_drives(camera4, step=0.4).checks if c.key == "drum_d_ratio"}
    c = next(iter(d_ratio.values()))
    assert c.value == pytest.approx(72 / 3) and c.limit == 18 and c.status == PASS  # 24:1, right at "desired"
    # the demo's 7x19 rope on a 25:1 drum passes the 18:1 minimum and the 24:1 desirable ratio
    gh = {c.key: c for c in size_drives(greenhouse, step=0.3).rows[0].checks}
    assert gh["drum_d_ratio"].value == pytest.approx(25) and gh["drum_d_ratio"].status == PASS
    # the same drum with 7x7 rope fails the 28:1 minimum
    seven = _changed(greenhouse, "cable", construction="7x7 galvanised steel, 2 mm")
    gh7 = {c.key: c for c in size_drives(seven, step=0.3).rows[0].checks}
    assert gh7["drum_d_ratio"].limit == 28 and gh7["drum_d_ratio"].status == FAIL


def test_rope_catalogue_values_from_the_handbook_table():
    # FAA AC 43.13-1B (1998), Table 7-3, MIL-W-83420 comp. A: 1/8 in 7x19 = 2,000 lbf, 3/16 in = 4,200 lbf,
    # 3/32 in 7x7 = 920 lbf; comp. B (stainless) 1/8 in 7x19 = 1,760 lbf
    cat = {r.designation: r for r in rope_catalogue()}
    assert cat["1/8 7x19 A"].breaking_force == pytest.approx(2000 * LBF, rel=1e-12)
    assert cat["1/8 7x19 A"].diameter == pytest.approx(3.175e-3, rel=1e-12)
    assert cat["3/16 7x19 A"].breaking_force == pytest.approx(4200 * LBF, rel=1e-12)
    assert cat["3/32 7x7 A"].breaking_force == pytest.approx(920 * LBF, rel=1e-12)
    assert cat["1/8 7x19 B"].breaking_force == pytest.approx(1760 * LBF, rel=1e-12)
    assert "43.13-1B" in cat["1/8 7x19 A"].source
    # 300 N at a design factor of 5 needs 1500 N: 1/16 in (480 lbf = 2135 N) is the thinnest 7x19 carbon
    assert smallest_rope(300.0, 5.0).designation == "1/16 7x19 A"
    # 1200 N x 5 = 6000 N: 3/32 in (4448 N) is too weak, 1/8 in (8896 N) is enough
    assert smallest_rope(1200.0, 5.0).designation == "1/8 7x19 A"
    assert smallest_rope(1200.0, 5.0, material="stainless").designation == "1/8 7x19 B"  # 1760 lbf = 7829 N
    assert smallest_rope(1e6, 5.0) is None


def test_a_weak_rope_fails_the_design_factor_and_names_a_stronger_one(greenhouse):
    weak = _changed(greenhouse, "cable", breaking_force="60 N", min_tension="3 N")
    rope = [c for c in size_drives(weak, step=0.3).checks if c.key == "rope_design_factor"]
    assert all(c.status == FAIL for c in rope)
    assert all(c.value < 5 and c.limit == 5 for c in rope)
    assert "43.13-1B" in rope[0].detail


def test_local_practice_overrides_a_limit(greenhouse):
    doc = design_to_dict(greenhouse)
    doc["cable"]["construction"] = "7x7 galvanised steel, 2 mm"
    doc["practice"] = {"d_ratio_min_7x7": 20, "d_ratio_desired_7x7": 24}
    res = size_drives(design_from_dict(doc), step=0.3)
    dd = [c for c in res.checks if c.key == "drum_d_ratio"]
    assert len(dd) == greenhouse.m  # one per winch: all() over an empty list would pass
    assert all(c.status == PASS and c.source == "design file [practice]" for c in dd)


def test_checks_carry_value_limit_margin_status_and_source(greenhouse_drive):
    keys = {c.key for c in greenhouse_drive.rows[0].checks}
    assert keys == {"rope_design_factor", "drum_d_ratio", "pulley_d_ratio", "fleet_angle", "count_rate",
                    "motor_speed", "motor_torque_rated", "motor_torque_peak", "drum_capacity", "flange_freeboard",
                    "brake"}
    for c in greenhouse_drive.checks:
        assert c.source and c.status in (PASS, WARN, FAIL)
    brake = next(c for c in greenhouse_drive.rows[0].checks if c.key == "brake")
    assert brake.status == PASS  # the greenhouse winches have brakes
    from conftest import EXAMPLES

    greenhouse = load_design(EXAMPLES / "greenhouse_tray_3cable.toml")
    no_brake = size_drives(_changed(greenhouse, "winch", brake=False), step=0.3)
    assert next(c for c in no_brake.rows[0].checks if c.key == "brake").status == WARN
    lines = greenhouse_drive.summary()
    assert any("limiting item" in line for line in lines)
    assert any("competent person" in line for line in lines)
    fig = greenhouse_drive.figure()
    assert len(fig.data) == 3
    assert all(y is None or math.isfinite(y) for t in fig.data for y in t.y)
    assert "holding brake" not in fig.data[0].x


def test_design_checks_provider_is_found_by_run_all(greenhouse):
    mine = design_checks(greenhouse)
    keys = {c.key for c in run_all(greenhouse)}
    assert {c.key for c in mine} <= keys


@pytest.mark.parametrize("bad, path", [
    ('drum_diameter = "0 mm"', "winch.drum_diameter"),
    ("efficiency = 0", "winch.efficiency"),
    ("efficiency = 1.2", "winch.efficiency"),
    ("deadband_counts = -1", "winch.deadband_counts"),
    ("encoder_lines = -100", "winch.encoder_lines"),
])
def test_bad_winch_fields_are_refused_by_the_loader(bad, path):
    from conftest import EXAMPLES

    text = (EXAMPLES / "greenhouse_tray_3cable.toml").read_text()
    key = bad.split(" = ")[0]
    lines = [bad if ln.startswith(f"{key} = ") else ln for ln in text.splitlines()]
    with pytest.raises(DesignError, match=path.replace(".", r"\.")):
        loads_design("\n".join(lines))


def test_bad_numbers_are_refused_by_the_functions():
    with pytest.raises(ValueError, match="drum_diameter"):
        pitch_diameter(0.0, 0.002)
    for eta in (0.0, -0.5, 1.2, float("nan")):
        with pytest.raises(ValueError, match="efficiency"):
            motor_torque(100.0, 0.026, 5.0, eta)
    with pytest.raises(ValueError, match="gear_ratio"):
        motor_torque(100.0, 0.026, 0.0, 0.9)
    with pytest.raises(ValueError, match="deadband counts"):
        deadband_length(-3, 0.5e-3)
    with pytest.raises(ValueError, match="cable_speed"):
        count_rate(-1.0, 0.5e-3)
    with pytest.raises(ValueError, match="length_per_count"):
        count_rate(1.0, 0.0)
    with pytest.raises(ValueError, match="drum_distance"):
        fleet_angle(0.08, 0.0)
    with pytest.raises(ValueError, match="layer"):
        pitch_diameter(0.05, 0.002, layer=0)


@pytest.mark.parametrize("name", ["greenhouse_tray_3cable.toml", "workshop_camera_4cable.toml",
                                  "hall_sander_8cable.toml"])
def test_cablekit_drive_runs_on_every_example(name, capsys):
    from conftest import EXAMPLES, example_paths
    from cablekit.design import load_design

    assert name in {p.name for p in example_paths()}
    code = main(["drive", str(EXAMPLES / name), "--step", "300 mm"])
    out = capsys.readouterr().out
    d = load_design(EXAMPLES / name)
    assert "limiting item" in out
    for e in d.frame.exits:
        assert f"  {e.name[:8]}" in out
    failed = "fail" in {c.status for c in size_drives(d, step=0.3).checks}
    assert code == (4 if failed else 0)


def test_every_example_file_runs_at_its_own_step(capsys):
    from conftest import example_paths

    for p in example_paths():
        assert main(["drive", str(p)]) in (0, 4)
        assert "checks:" in capsys.readouterr().out


def test_cablekit_drive_bad_input_exits_3(tmp_path, capsys):
    from conftest import EXAMPLES

    assert main(["drive", str(EXAMPLES / "greenhouse_tray_3cable.toml"), "--step", "-5 mm"]) == 3
    assert "--step" in capsys.readouterr().err
    assert main(["drive", str(EXAMPLES / "greenhouse_tray_3cable.toml"), "--step", "5 kg"]) == 3
    bad = tmp_path / "bad.toml"
    bad.write_text((EXAMPLES / "greenhouse_tray_3cable.toml").read_text().replace('drum_diameter = "50 mm"',
                                                                                  'drum_diameter = "0 mm"'))
    assert main(["drive", str(bad)]) == 3
    assert "winch.drum_diameter" in capsys.readouterr().err


def test_latex_equations_of_the_drivetrain():
    from cablekit.drive import latex_equations

    eqs = latex_equations()
    assert r"\tau_m = \frac{F\,r}{i\,\eta}" == eqs["motor torque"]
    assert all(tex.count("{") == tex.count("}") for tex in eqs.values())
