"""ISO 9283 pose accuracy and repeatability, and the measurement CSV reader."""

import io
import math

import numpy as np
import pytest

from cablekit.cli import main
from cablekit.iso9283 import pose_characteristics, read_measurements, write_measurements
from cablekit.tables import TableError

HEADER = "pose,cycle,x_cmd [mm],y_cmd [mm],z_cmd [mm],x_meas [mm],y_meas [mm],z_meas [mm]\n"


def _csv(text):
    return io.StringIO(text)


def test_ap_rp_hand_worked_example():
    # ISO 9283:1998 clause 7.2.1 (pose accuracy) and 7.2.2 (pose repeatability), worked by hand:
    # commanded (100, 200, 300) mm; four visits measured at
    #   (101, 202, 302), (103, 202, 302), (101, 204, 302), (103, 204, 306) mm
    # barycentre (102, 203, 303) -> AP_x, AP_y, AP_z = 2, 3, 3 mm; AP_P = sqrt(4 + 9 + 9) = sqrt(22)
    # distances to the barycentre: |(-1,-1,-1)| = |(1,-1,-1)| = |(-1,1,-1)| = sqrt(3), |(1,1,3)| = sqrt(11)
    # l_bar = (3 sqrt(3) + sqrt(11)) / 4 = 2.128194...; S_l = sqrt(sum (l_j - l_bar)^2 / 3) = 0.792287...
    # RP = l_bar + 3 S_l = 4.505055... mm
    text = HEADER + "".join(f"P1,{k + 1},100,200,300,{x},{y},{z}\n" for k, (x, y, z) in enumerate(
        [(101, 202, 302), (103, 202, 302), (101, 204, 302), (103, 204, 306)]))
    res = pose_characteristics(read_measurements(_csv(text)))
    np.testing.assert_allclose(res.barycentre[0], [0.102, 0.203, 0.303], rtol=1e-12)
    np.testing.assert_allclose(res.ap_xyz[0], [0.002, 0.003, 0.003], atol=1e-12)
    assert res.ap[0] == pytest.approx(math.sqrt(22) * 1e-3, rel=1e-12)
    l_bar = (3 * math.sqrt(3) + math.sqrt(11)) / 4
    s_l = math.sqrt((3 * (math.sqrt(3) - l_bar) ** 2 + (math.sqrt(11) - l_bar) ** 2) / 3)
    assert res.l_mean[0] == pytest.approx(l_bar * 1e-3, rel=1e-12)
    assert res.s_l[0] == pytest.approx(s_l * 1e-3, rel=1e-12)
    assert res.rp[0] == pytest.approx(4.505055e-3, abs=1e-9)  # the hand value above, to 1 nm
    assert res.rp[0] == pytest.approx((l_bar + 3 * s_l) * 1e-3, rel=1e-12)


def test_orientation_accuracy_and_repeatability_hand_example():
    # ISO 9283:1998 7.2.1 / 7.2.2 for the angle a (about x): commanded 0 deg, measured 0.1, 0.3, 0.2, 0.2 deg
    # a_bar = 0.2 deg -> AP_a = 0.2 deg; S_a = sqrt((0.01 + 0.01 + 0 + 0) / 3) deg; RP_a = 3 S_a = 0.244949 deg
    head = HEADER.strip() + ",roll_cmd [deg],pitch_cmd [deg],yaw_cmd [deg],roll_meas [deg],pitch_meas [deg],yaw_meas [deg]\n"
    rows = "".join(f"P1,{k + 1},0,0,0,0,0,0,0,0,0,{a},0,0\n" for k, a in enumerate([0.1, 0.3, 0.2, 0.2]))
    res = pose_characteristics(read_measurements(_csv(head + rows)))
    assert math.degrees(res.ap_abc[0, 0]) == pytest.approx(0.2, abs=1e-12)
    assert math.degrees(res.rp_abc[0, 0]) == pytest.approx(3 * math.sqrt(0.02 / 3), abs=1e-12)
    assert math.degrees(res.rp_abc[0, 0]) == pytest.approx(0.244949, abs=1e-6)
    assert res.rp_abc[0, 1] == 0.0 and res.ap[0] == 0.0


def test_angles_across_180_degrees_average_correctly():
    head = HEADER.strip() + ",roll_cmd [deg],pitch_cmd [deg],yaw_cmd [deg],roll_meas [deg],pitch_meas [deg],yaw_meas [deg]\n"
    rows = "".join(f"P1,{k + 1},0,0,0,0,0,0,0,0,180,0,0,{c}\n" for k, c in enumerate([179.9, -179.9]))
    res = pose_characteristics(read_measurements(_csv(head + rows)))
    assert abs(res.ap_abc[0, 2]) < 1e-9  # mean of 179.9 and -179.9 is 180, not 0
    # ISO 9283:1998 7.2.2 by hand: deviations +/-0.1 deg from the mean 180 deg, n = 2,
    # S_c = sqrt((0.1^2 + 0.1^2) / (2 - 1)), RP_c = 3 S_c
    assert math.degrees(res.rp_abc[0, 2]) == pytest.approx(3 * math.sqrt(2 * 0.1**2), rel=1e-9)


def test_rows_group_by_commanded_position_without_labels():
    text = ("x_cmd [m],y_cmd [m],z_cmd [m],x_meas [m],y_meas [m],z_meas [m]\n"
            "1,1,1,1.001,1,1\n2,2,2,2,2,2.002\n1,1,1,1.003,1,1\n2,2,2,2,2,2.004\n")
    res = pose_characteristics(read_measurements(_csv(text)))
    assert res.labels == ("pose 1", "pose 2")
    # ISO 9283:1998 7.2.1 by hand: pose 1 barycentre x = 1.002 m (AP 2 mm), pose 2 z = 2.003 m (AP 3 mm)
    np.testing.assert_allclose(res.ap, [0.002, 0.003], atol=1e-12)


@pytest.mark.parametrize("text, words", [
    (HEADER.replace(",z_meas [mm]", "") + "P1,1,1,2,3,1,2\nP1,2,1,2,3,1,2\n", ["missing column", "z_meas"]),
    (HEADER.replace("x_cmd [mm]", "x_cmd [bananas]") + "P1,1,1,2,3,1,2,3\nP1,2,1,2,3,1,2,3\n", ["x_cmd", "bananas"]),
    (HEADER.replace("x_cmd [mm]", "x_cmd [kg]") + "P1,1,1,2,3,1,2,3\nP1,2,1,2,3,1,2,3\n", ["x_cmd", "length"]),
    (HEADER + "P1,1,1,2,3,1,2,3\nP1,2,1,2,3,1,nan,3\n", ["line 3", "y_meas", "nan"]),
    (HEADER + "P1,1,1,2,3,1,2,3\nP1,2,1,2,3,1,,3\n", ["line 3", "y_meas"]),
    (HEADER + "P1,1,1,2,3,1,2,3\n", ["line 2", "only one"]),
    (HEADER + "P1,1,1,2,3,1,2,3\nP1,2,1,2,3,1,2,3\nP2,1,5,5,5,5,5,5\n", ["line 4", "'pose'", "P2", "1 measurement"]),
    (HEADER + "P1,1,1,2,3,1,2,3\nP1,2,1,2.5,3,1,2,3\n", ["line 3", "y_cmd", "P1"]),
    (HEADER.strip() + ",roll_meas [deg]\n" + "P1,1,1,2,3,1,2,3,0\nP1,2,1,2,3,1,2,3,0\n", ["pitch_meas", "yaw_meas"]),
])
def test_bad_csv_names_row_and_column(text, words):
    with pytest.raises(TableError) as exc:
        read_measurements(_csv(text))
    msg = str(exc.value)
    for w in words:
        assert w in msg, (w, msg)


def test_write_then_read_round_trip(tmp_path):
    text = HEADER + "A,1,1,2,3,1.5,2,3\nA,2,1,2,3,1.25,2,3\n"
    meas = read_measurements(_csv(text))
    path = write_measurements(meas, tmp_path / "m.csv", comment="synthetic")
    back = read_measurements(path)
    np.testing.assert_allclose(back.measured, meas.measured, rtol=1e-12)
    assert list(back.labels) == ["A", "A"]


def test_cli_on_demo_measurements(tmp_path, examples_dir, capsys):
    out = tmp_path / "iso.csv"
    rc = main(["iso9283", str(examples_dir / "greenhouse_measurements.csv"), "-o", str(out)])
    text = capsys.readouterr().out
    assert rc == 0
    assert "P1" in text and "RP" in text and "7.2.1" in text
    assert out.exists() and "AP [mm]" in out.read_text()


def test_cli_bad_csv_exit_code(tmp_path, capsys):
    bad = tmp_path / "bad.csv"
    bad.write_text(HEADER + "P1,1,1,2,3,1,2,3\n")
    assert main(["iso9283", str(bad)]) == 3
    assert "only one" in capsys.readouterr().err
