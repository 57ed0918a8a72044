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
    # Fact of the trade on a small hobby winch rig (common practice, no source): an encoder step of
    # about 0.5 mm with a dead band 3 counts wide (+/- 1 count) moves the cable in 1.5 mm steps.
    assert deadband_length(3, 0.5e-3) == pytest.approx(1.5e-3, rel=1e-15)
    # the same through a whole design: pitch diameter 31.8 mm, direct drive, 50 lines x4 -> 0.4995 mm
    d = _changed(greenhouse, "winch", drum_diameter="29.8 mm", gear_ratio=1, encoder_lines=50, decoding=4,
                 deadband_counts=3, deadband_definition="width", flange_diameter="60 mm", drum_width="30 mm")
    r = size_drives(d, step=0.3).rows[0]
    assert r.length_per_count == pytest.approx(0.5e-3, rel=2e-3)
    assert r.motion_step == pytest.approx(1.5e-3, rel=2e-3)
    assert r.deadband == pytest.approx(0.5e-3, rel=2e-3)  # the +/- 1 count it leaves
    # the same step written as +/- 1 count: a band of 2k + 1 = 3 counts
    pm = _changed(d, "winch", deadband_counts=1, deadband_definition="plus_minus")
    assert size_drives(pm, step=0.3).rows[0].motion_step == pytest.approx(r.motion_step, rel=1e-12)
    # +/- 3 counts is a band 7 counts wide: 3.5 mm, not 1.5 mm
    pm3 = _changed(d, "winch", deadband_definition="plus_minus")
    assert size_drives(pm3, step=0.3).rows[0].motion_step == pytest.approx(7 * r.length_per_count, rel=1e-12)


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
    assert rope_class("6x25 FW IWRC") == "6x19" and rope_class("6 x 36 WS") == "6x36"
    assert rope_class("") == "unknown" and rope_class("9x9 mystery") == "unknown"
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
    assert brake.status == PASS and math.isfinite(brake.limit)  # a rated brake, judged against a number
    lines = greenhouse_drive.summary()
    assert any("limiting item" in line for line in lines)
    assert any("competent person" in line for line in lines)
    fig = greenhouse_drive.figure()
    assert len(fig.data) == 3
    assert all(y is None or math.isfinite(y) for t in fig.data for y in t.y)
    assert "holding brake" in fig.data[0].x


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


# --------------------------------------------------------------------------------------
# holding brake (issue 11, item 1)
# --------------------------------------------------------------------------------------
def _no_brake(design, **extra):
    doc = design_to_dict(design)
    doc["winch"]["brake"] = False
    doc["winch"].pop("brake_holding_torque", None)
    doc["winch"].update(extra)
    return design_from_dict(doc)


def test_a_brake_weaker_than_125_percent_of_the_load_torque_fails(greenhouse):
    # ASME B30.7 / B30.16 ask a brake to hold 125 % of the rated load torque (from memory): the check
    # compares the brake's rating with 1.25 x F r / i at the motor shaft (worked by hand below)
    res = size_drives(_changed(greenhouse, "winch", brake_holding_torque="0.05 N*m"), step=0.3)
    for r in res.rows:
        c = next(c for c in r.checks if c.key == "brake")
        need = 1.25 * r.max_tension * 0.5 * r.fill.top_pitch_diameter / 5.0  # gear ratio 5, losses not counted
        assert c.limit == pytest.approx(need, rel=1e-12) and math.isfinite(c.limit)
        assert c.value == pytest.approx(0.05) and c.status == FAIL and c.margin < 0
        assert "from memory" in c.source
    # the demo's 0.5 N*m brake holds more than that
    ok = size_drives(greenhouse, step=0.3)
    assert all(c.status == PASS and c.value >= c.limit for c in ok.checks if c.key == "brake")


def test_no_brake_on_a_suspended_load_fails_unless_the_drive_is_self_locking(greenhouse):
    res = size_drives(_no_brake(greenhouse), step=0.3)
    brakes = [c for c in res.checks if c.key == "brake"]
    assert len(brakes) == greenhouse.m and all(c.status == FAIL for c in brakes)
    assert "falls on power loss" in brakes[0].detail and math.isfinite(brakes[0].limit)
    locked = size_drives(_no_brake(greenhouse, self_locking=True), step=0.3)
    brakes = [c for c in locked.checks if c.key == "brake"]
    assert all(c.status == WARN and "self-locking" in c.detail for c in brakes)
    from cablekit.drive import design_assumptions

    assert any("self-locking" in a for a in design_assumptions(_no_brake(greenhouse, self_locking=True)))


@pytest.mark.parametrize("winch, path, words", [
    ({"brake_holding_torque": None}, "winch.brake_holding_torque", "required when brake = true"),
    ({"brake": False}, "winch.brake_holding_torque", "only with brake = true"),
    ({"brake_holding_torque": "-1 N*m"}, "winch.brake_holding_torque", "greater than zero"),
    ({"brake_holding_torque": "2 kg"}, "winch.brake_holding_torque", ""),
    ({"self_locking": "yes"}, "winch.self_locking", "true or false"),
    ({"deadband_definition": "half"}, "winch.deadband_definition", "plus_minus"),
])
def test_bad_brake_and_dead_band_fields_are_refused_by_name(greenhouse, winch, path, words):
    doc = design_to_dict(greenhouse)
    for k, v in winch.items():
        if v is None:
            doc["winch"].pop(k)
        else:
            doc["winch"][k] = v
    with pytest.raises(DesignError, match=path.replace(".", r"\.")) as err:
        design_from_dict(doc)
    assert words in str(err.value)


def test_new_winch_and_rope_fields_survive_a_save_round_trip(greenhouse, tmp_path):
    from cablekit.design import save_design

    d = _changed(_no_brake(greenhouse, self_locking=True, deadband_definition="width"), "cable",
                 use_class="over_people")
    back = load_design(save_design(d, tmp_path / "rig.toml"))
    assert back == d
    w = back.winches[0]
    assert (w.brake, w.brake_holding_torque, w.self_locking, w.deadband_definition) == (False, None, True, "width")
    assert back.cable.use_class == "over_people"
    with_brake = load_design(save_design(greenhouse, tmp_path / "gh.toml"))
    assert with_brake.winches[0].brake_holding_torque == pytest.approx(0.5)


# --------------------------------------------------------------------------------------
# sizing tensions are not bounded by the ratings they are checked against (item 6)
# --------------------------------------------------------------------------------------
def _slsqp_min_norm(W, w, t_min):
    # reference: scipy.optimize.minimize (SLSQP) on min |t|^2 s.t. W t + w = 0, t >= t_min
    from scipy.optimize import minimize

    from cablekit.statics import solve_lp

    m = W.shape[1]
    start = solve_lp(W[None], w[None], t_min, 1e6).tensions[0]  # a feasible start (scipy HiGHS)
    s = np.abs(start).max()  # scaled to order 1 so the line search is well conditioned
    res = minimize(lambda x: x @ x, start / s, jac=lambda x: 2 * x, method="SLSQP",
                   constraints=[{"type": "eq", "fun": lambda x: W @ x + w / s, "jac": lambda x: W}],
                   bounds=[(t_min / s, None)] * m, options={"ftol": 1e-15, "maxiter": 1000})
    assert res.success, res.message
    return res.x * s


@pytest.mark.parametrize("fixture, k", [("camera4", 7), ("sander8", 5)])
def test_sizing_tensions_are_the_minimum_norm_distribution(fixture, k, request):
    from cablekit.drive import sizing_tensions
    from cablekit.kinematics import structure_matrix
    from cablekit.statics import external_wrench

    d = request.getfixturevalue(fixture)
    if any(d.task.wrench_box):  # the reference below solves the nominal load only
        d = d.with_changes(task=__import__("dataclasses").replace(d.task, wrench_box=(0.0,) * 6))
    q = task_poses(d, step=0.4).poses
    q = q[np.linspace(0, len(q) - 1, k).astype(int)]
    st = sizing_tensions(d, q)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    for i in range(len(q)):
        if not st.held[i]:
            continue
        ref = _slsqp_min_norm(W[i], w[i], d.cable.min_tension)
        # SLSQP stops at ftol 1e-14 on |t|^2: 1e-5 relative on the tensions is well inside its accuracy
        np.testing.assert_allclose(st.tensions[i], ref, rtol=1e-5, atol=1e-6 * np.abs(ref).max())
        np.testing.assert_allclose(W[i] @ st.tensions[i] + w[i], 0.0, atol=1e-9 * np.abs(w[i]).max())
    assert st.held.sum() >= 3  # the comparison above really ran


def test_sizing_tensions_of_a_three_cable_point_rig_are_the_unique_ones(greenhouse):
    from cablekit.drive import sizing_tensions

    q = task_poses(greenhouse, step=0.3).poses
    ref = tensions_at(greenhouse, q)  # unique (m = n): Cramer's rule
    st = sizing_tensions(greenhouse, q)
    ok = ref.feasible
    np.testing.assert_allclose(st.tensions[ok], ref.tensions[ok], rtol=1e-9)


def test_a_rope_and_motor_too_weak_for_a_redundant_rig_fail(camera4):
    # the camera rig has 4 cables for 3 DOF; its highest sizing tension is about 30 N.  A rope of
    # 100 N breaking force has a 20 N limit at the 5:1 factor: it must fail, and so must a motor whose
    # rated torque holds only a few newtons.  (Tensions clipped to those limits could never fail.)
    base = size_drives(camera4, step=0.3)
    weak = size_drives(_changed(camera4, "cable", breaking_force="100 N"), step=0.3)
    for a, b in zip(base.rows, weak.rows):
        assert b.max_tension == pytest.approx(a.max_tension, rel=1e-12)  # not bounded by the rope's limit
        rope = next(c for c in b.checks if c.key == "rope_design_factor")
        assert rope.status == FAIL and rope.value == pytest.approx(100 / a.max_tension, rel=1e-12)
    assert weak.poses_used == base.poses_used
    assert base.poses_over_rating == 0 and 0 < weak.poses_over_rating <= weak.poses_used
    assert any("more than its rope or motor limit" in line for line in weak.summary())
    slow = size_drives(_changed(camera4, "winch", motor_rated_torque="0.02 N*m"), step=0.3)
    motor = [c for c in slow.checks if c.key == "motor_torque_rated"]
    assert len(motor) == camera4.m and all(c.status == FAIL for c in motor)


def test_working_loads_raise_the_sizing_tension(sander8):
    from dataclasses import replace as dc_replace

    from cablekit.drive import sizing_tensions

    q = task_poses(sander8, step=0.5).poses[:40]
    with_box = sizing_tensions(sander8, q)
    nominal = sizing_tensions(sander8.with_changes(task=dc_replace(sander8.task, wrench_box=(0.0,) * 6)), q)
    both = with_box.held & nominal.held
    assert with_box.corners == 64 and nominal.corners == 1 and both.any()
    assert np.all(with_box.tensions[both] >= nominal.tensions[both] - 1e-9)
    assert np.any(with_box.tensions[both] > nominal.tensions[both] + 1.0)


# --------------------------------------------------------------------------------------
# rope practice: construction, freeboard, use class (item 7)
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("construction, d_min, d_des, status", [
    # Wire Rope Technical Board, Wire Rope Users Manual, D/d table (from memory): 6x19 Seale 34 / 51,
    # 6x36 WS 23 / 35, 8x19 Seale 27 / 41, 6x7 42 / 72; aircraft-cable pulley guides: 7x19 18 / 24,
    # 7x7 28 / 42 (common practice, no standard).  The greenhouse drum is 25:1.
    ("7x19 galvanised steel", 18, 24, PASS),
    ("6x19 Seale IWRC", 34, 51, FAIL),
    ("6x36 WS IWRC", 23, 35, WARN),
    ("8x19 Seale", 27, 41, FAIL),
    ("6x7 fibre core", 42, 72, FAIL),
    ("7x7 galvanised", 28, 42, FAIL),
    ("steel rope", 42, 72, FAIL),  # construction not recognised: the strictest limits
])
def test_drum_d_ratio_limits_by_rope_construction(greenhouse, construction, d_min, d_des, status):
    res = size_drives(_changed(greenhouse, "cable", construction=construction), step=0.3)
    dd = [c for c in res.checks if c.key == "drum_d_ratio"]
    assert len(dd) == greenhouse.m
    for c in dd:
        assert c.value == pytest.approx(25) and c.limit == d_min and c.status == status
        assert f"{d_des:g} desirable" in c.detail


def test_an_unrecognised_construction_is_never_a_plain_pass(greenhouse):
    big = _changed(greenhouse, "winch", drum_diameter="200 mm", drum_width="160 mm", flange_diameter="240 mm")
    known = size_drives(_changed(big, "cable", construction="6x7"), step=0.3)
    unknown = size_drives(_changed(big, "cable", construction="mystery rope"), step=0.3)
    assert {c.status for c in known.checks if c.key == "drum_d_ratio"} == {PASS}  # 100:1 passes 72:1
    assert {c.status for c in unknown.checks if c.key == "drum_d_ratio"} == {WARN}
    assert "not recognised" in next(c for c in unknown.checks if c.key == "drum_d_ratio").detail


def test_flange_freeboard_takes_the_greater_of_its_two_terms(greenhouse):
    # ASME B30.7 (from memory): the flange projects at least 1/2 in or 2 rope diameters above the top
    # layer, whichever is greater.  2 mm rope: 2 d = 4 mm < 12.7 mm, so 12.7 mm governs.
    low = _changed(greenhouse, "winch", flange_diameter="70 mm")  # (70 - 54) / 2 = 8 mm above one layer
    fb = [c for c in size_drives(low, step=0.3).checks if c.key == "flange_freeboard"]
    assert len(fb) == greenhouse.m
    assert all(c.value == pytest.approx(8.0) and c.limit == pytest.approx(12.7) and c.status == FAIL for c in fb)
    assert "from memory" in fb[0].source
    # the demo's 82 mm flange stands 14 mm above its one layer
    ok = [c for c in size_drives(greenhouse, step=0.3).checks if c.key == "flange_freeboard"]
    assert all(c.value == pytest.approx(14.0) and c.status == PASS for c in ok)
    # where 2 d is the greater term it governs: a 1 mm local length rule leaves 2 d = 4 mm
    doc = design_to_dict(low)
    doc["practice"] = {"flange_freeboard_length_min": "1 mm"}
    loose = [c for c in size_drives(design_from_dict(doc), step=0.3).checks if c.key == "flange_freeboard"]
    assert all(c.limit == pytest.approx(4.0) and c.status == PASS for c in loose)


def test_a_load_over_people_needs_the_higher_design_factor(greenhouse):
    # entertainment-rigging practice (ANSI E1.6-1: 8:1; DGUV Vorschrift 17/18: 10:1; from memory)
    rope = _changed(greenhouse, "cable", breaking_force="140 N")  # about 8:1 on the ~17 N winch tension
    general = [c for c in size_drives(rope, step=0.3).checks if c.key == "rope_design_factor"]
    people = [c for c in size_drives(_changed(rope, "cable", use_class="over_people"), step=0.3).checks
              if c.key == "rope_design_factor"]
    assert all(c.status == PASS and c.limit == 5 for c in general)
    assert all(c.status == FAIL and c.limit == 10 and "over people" in c.detail for c in people)
    assert "from memory" in PRACTICE["rope_design_factor_over_people"].source
    # the workspace's tension window uses the same factor: MBF / 10 over people, MBF / 5 otherwise
    from cablekit.statics import tension_limits

    assert np.all(tension_limits(rope).rope_limit == pytest.approx(140 / 5, rel=1e-12))
    over = tension_limits(_changed(rope, "cable", use_class="over_people"))
    assert np.all(over.rope_limit == pytest.approx(140 / 10, rel=1e-12)) and over.design_factor == 10
    with pytest.raises(DesignError, match=r"cable\.use_class"):
        _changed(greenhouse, "cable", use_class="sometimes")


def test_design_assumptions_name_what_the_drive_verdicts_rest_on(greenhouse):
    from cablekit.checks import run_assumptions
    from cablekit.drive import design_assumptions

    text = " ".join(design_assumptions(greenhouse))
    for words in ("minimum-norm", "no upper limit", "1.25", "7 counts", "class 7x19", "12.7 mm"):
        assert words in text
    assert set(design_assumptions(greenhouse)) <= set(run_assumptions(greenhouse))


# --------------------------------------------------------------------------------------
# the effective motion step includes the dead band (item 10)
# --------------------------------------------------------------------------------------
def _orthogonal_rig(deadband_counts, definition, required="5 mm"):
    """A point rig whose three cables meet the task point along orthonormal directions (each rising
    at 1/sqrt(3)), so one cable's length change moves the platform by exactly that much (J is
    orthogonal); 100 lines x4, direct drive, pitch diameter 0.2 m / pi: 0.5 mm per count."""
    p = np.array([1.5, 1.5, 1.0])
    c = np.array([1.0, 1.0, 1.0]) / math.sqrt(3.0)  # Rodrigues rotation taking c onto +z
    k = np.cross(c, [0, 0, 1.0])
    s, co = np.linalg.norm(k), c[2]
    K = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]]) / s
    R = np.eye(3) + s * K + (1 - co) * K @ K
    exits = [p + 2.0 * R[:, i] for i in range(3)]
    vec = lambda v: ", ".join(f"{x:.12g}" for x in v) + " m"  # noqa: E731
    doc = {
        "meta": {"name": "orthogonal test rig"},
        "frame": {"exits": [{"name": n, "position": vec(a), "pulley_diameter": "60 mm", "drum_distance": "2 m"}
                            for n, a in zip("ABC", exits)]},
        "platform": {"kind": "point", "mass": "1 kg"},
        "cable": {"construction": "7x19", "diameter": "2 mm", "breaking_force": "2.4 kN",
                  "axial_stiffness": "170 kN", "mass_per_length": "0.016 kg/m", "min_tension": "3 N"},
        "winch": {"drum_diameter": f"{0.2 / math.pi * 1e3 - 2.0:.12g} mm", "drum_width": "40 mm",
                  "flange_diameter": "100 mm", "grooved": True, "gear_ratio": 1, "efficiency": 0.9,
                  "encoder_lines": 100, "decoding": 4, "deadband_counts": deadband_counts,
                  "deadband_definition": definition, "count_rate_limit": "100 kHz",
                  "motor_rated_torque": "1 N*m", "motor_peak_torque": "3 N*m", "motor_rated_speed": "3000 rpm",
                  "brake": True, "brake_holding_torque": "2 N*m", "dead_wraps": 3},
        "payload": {"mass": "0.5 kg"},
        "task": {"points": [vec(p)], "speed": "0.2 m/s", "acceleration": "1 m/s^2"},
        "home": {"position": vec(p)},
        "errors": {"required_accuracy": required, "step_fraction": 0.25},
    }
    return design_from_dict(doc)


@pytest.mark.parametrize("counts, definition", [(3, "width"), (1, "plus_minus")])
def test_a_half_millimetre_count_and_a_three_count_dead_band_fail_a_1_25_mm_step_rule(counts, definition):
    # common practice, no source: a controller with a +/- k-count dead band stops anywhere in a band
    # 2k + 1 counts wide, so with 0.5 mm per count and a 3-count band the platform moves in ~1.5 mm steps;
    # the resolution rule (step_fraction 0.25 x required accuracy 5 mm = 1.25 mm) must fail it.
    from cablekit.accuracy import design_checks as accuracy_checks

    d = _orthogonal_rig(counts, definition)
    assert length_per_count(d) == pytest.approx(np.full(3, 0.5e-3), rel=1e-9)
    assert d.winches[0].step_counts == 3
    step = next(c for c in accuracy_checks(d) if c.key == "accuracy_step")
    # at the platform: J is orthogonal, so one cable's 1.5 mm is 1.5 mm of platform travel
    assert step.value == pytest.approx(1.5, rel=1e-6) and step.unit == "mm"
    assert step.limit == pytest.approx(1.25) and step.status == FAIL
    assert "3 counts" in step.detail
    # a 10 mm requirement (limit 2.5 mm) passes the same rig; one count alone would be 0.5 mm
    loose = next(c for c in accuracy_checks(_orthogonal_rig(counts, definition, "10 mm")) if c.key == "accuracy_step")
    assert loose.value == pytest.approx(1.5, rel=1e-6) and loose.status == PASS
    assert size_drives(d).rows[0].motion_step == pytest.approx(1.5e-3, rel=1e-9)


def test_the_dead_band_error_half_width_follows_its_definition():
    from cablekit.accuracy import ErrorBudget, _half_widths, _layout

    # +/- 1 count written either way leaves the same +/- 0.5 mm (GUM 4.3.7: a rectangular half-width)
    for counts, definition in ((3, "width"), (1, "plus_minus")):
        d = _orthogonal_rig(counts, definition)
        hw = _half_widths(d, ErrorBudget())
        np.testing.assert_allclose(hw[_layout(3)["deadband"]], 0.5e-3, rtol=1e-9)


def test_no_taut_pose_fails_every_tension_check_instead_of_passing_on_nan(greenhouse):
    # a minimum tension above what the three cables can share: no pose holds every cable taut, so
    # the tension-based checks have no number to pass on and must fail (a NaN limit is never a pass)
    res = size_drives(_changed(greenhouse, "cable", min_tension="200 N"), step=0.3)
    assert res.poses_used == 0
    for key in ("rope_design_factor", "motor_torque_rated", "motor_torque_peak", "brake"):
        got = [c for c in res.checks if c.key == key]
        assert len(got) == greenhouse.m and all(c.status == FAIL for c in got), key


def test_the_review_inputs_show_the_brake_rating_dead_band_and_use_class(greenhouse):
    from cablekit.review import _render_inputs

    text = _render_inputs(greenhouse)
    assert "holds 0.5 N" in text and "+/- 3 counts (motion step 7 counts)" in text and "general" in text
    people = _render_inputs(_changed(_no_brake(greenhouse, self_locking=True), "cable", use_class="over_people"))
    assert "self-locking" in people and "over people" in people


def test_a_brake_without_a_rating_built_in_code_fails(greenhouse):
    from dataclasses import replace as dc_replace

    unrated = tuple(dc_replace(w, brake_holding_torque=None) for w in greenhouse.winches)
    res = size_drives(dc_replace(greenhouse, winches=unrated), step=0.3)
    brakes = [c for c in res.checks if c.key == "brake"]
    assert len(brakes) == greenhouse.m and all(c.status == FAIL and "not given" in c.detail for c in brakes)
