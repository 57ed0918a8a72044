"""Calibration from measured positions: recovery, identifiability, the corrected design file."""

import shutil

import numpy as np
import pytest

from cablekit.calibration import (calibrate, calibrated_path, corrected_design, synthetic_measurements,
                                  write_corrected)
from cablekit.cli import main
from cablekit.design import load_design
from cablekit.iso9283 import read_measurements, write_measurements
from cablekit.kinematics import forward_kinematics, home_lengths, length_per_count

from conftest import EXAMPLES

# the invented "true" rig of the tests: offsets from the greenhouse demo design
DA = np.array([[4.0, -3.0, 2.0], [-2.0, 3.0, -1.0], [1.0, 2.0, -3.0]]) * 1e-3  # exit points [m]
DH = np.array([1.5, -2.0, 1.0]) * 1e-3  # home lengths [m]
DD = np.array([0.08, -0.05, 0.03]) * 1e-3  # drum pitch diameters [m]


def _truth(d):
    pitch = np.array([w.drum_diameter + d.cable.diameter for w in d.winches])
    return np.concatenate([np.r_[DA[i], DH[i], DD[i] / pitch[i]] for i in range(d.m)])


def _poses(d, n, seed, volume=None):
    lo, hi = (np.array(d.task.box_lower), np.array(d.task.box_upper)) if volume is None else map(np.array, volume)
    return lo + (hi - lo) * np.random.default_rng(seed).uniform(0.05, 0.95, (n, 3))


def test_noise_free_data_recover_the_perturbation_exactly(greenhouse):
    # measured over the whole bench area (wider than the task box): well conditioned
    benches = ((1.0, 0.5, 0.35), (2.0, 1.2, 1.4))
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 20, 1, benches), exit_offsets=DA, home_offsets=DH,
                                  drum_offsets=DD, noise=0.0, seed=2)
    res = calibrate(greenhouse, meas)
    assert res.identified.all() and res.rank == 15
    # noise-free data: exact up to the least-squares stopping tolerance (a few nm here)
    np.testing.assert_allclose(res.estimate, _truth(greenhouse), atol=1e-8)
    assert res.rms_after < 1e-9 < res.rms_before


def test_noisy_data_recover_the_perturbation_within_the_noise(greenhouse):
    # Least-squares estimates scatter about the truth with the covariance s^2 (J^T J)^-1
    # (Seber and Wild, Nonlinear Regression, 1989, sec. 2.1): every parameter within 4 of its
    # standard uncertainties, and the residual matches the simulated noise.
    noise = 0.2e-3
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 40, 3), exit_offsets=DA, home_offsets=DH,
                                  drum_offsets=DD, noise=noise, cycles=2, seed=4)
    res = calibrate(greenhouse, meas)
    z = (res.estimate - _truth(greenhouse)) / res.std
    assert np.all(np.abs(z) < 4), z
    assert res.sigma == pytest.approx(noise, rel=0.15)
    assert res.rms_before > 5 * res.rms_after
    # the corrected design predicts the true rig at fresh poses to within the measurement noise
    fresh = _poses(greenhouse, 30, 5)
    truth = synthetic_measurements(greenhouse, fresh, exit_offsets=DA, home_offsets=DH, drum_offsets=DD,
                                   deadband=False, seed=6)
    cd = res.corrected
    L = home_lengths(cd) + truth.counts * length_per_count(cd)
    pred = forward_kinematics(cd, L).poses
    err = np.linalg.norm(pred - truth.measured, axis=1)
    assert np.sqrt(np.mean(err**2)) < np.sqrt(3) * noise


def test_counts_recomputed_from_commanded_poses(greenhouse):
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 20, 7), exit_offsets=DA, home_offsets=DH,
                                  drum_offsets=DD, deadband=False, log_counts=False, seed=8)
    res = calibrate(greenhouse, meas)
    assert "commanded" in res.counts_source
    # only the rounding of commanded counts is left as noise (a fraction of a count: < 0.1 mm here)
    assert res.rms_after < 1e-4 < res.rms_before


def test_redundant_rig_reports_what_it_cannot_identify(camera4):
    # with four cables on a point platform the least-squares pose ignores one combination of length
    # changes at every pose, so one parameter combination never shows in measured positions
    rng = np.random.default_rng(9)
    da, dh = rng.uniform(-3, 3, (4, 3)) * 1e-3, rng.uniform(-2, 2, 4) * 1e-3
    meas = synthetic_measurements(camera4, _poses(camera4, 25, 10), exit_offsets=da, home_offsets=dh,
                                  deadband=False, seed=11)
    res = calibrate(camera4, meas)
    assert res.rank == 19 and (~res.identified).sum() == 1
    assert np.all(np.isnan(res.std[~res.identified])) and res.estimate[~res.identified] == 0.0
    assert res.rms_after < 1e-6  # the rest explains the data anyway
    text = "\n".join(res.summary())
    assert "not identifiable" in text


def test_too_few_distinct_poses_are_flagged(greenhouse):
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 3, 12), exit_offsets=DA, noise=1e-4, cycles=4,
                                  seed=13)
    res = calibrate(greenhouse, meas)
    assert res.rank <= 9 and (~res.identified).sum() >= 6  # 3 distinct positions carry 9 numbers


def test_too_few_rows_is_a_clear_error(greenhouse):
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 2, 14), seed=15)
    with pytest.raises(ValueError, match="at least 6 positions"):
        calibrate(greenhouse, meas)


def test_corrected_design_applies_the_offsets(greenhouse):
    from cablekit.calibration import _parameters
    from cablekit.accuracy import error_budget

    params = _parameters(greenhouse, ("exits", "home", "scale"), error_budget(greenhouse))
    cd = corrected_design(greenhouse, params, _truth(greenhouse))
    np.testing.assert_allclose(cd.exits, greenhouse.exits + DA, atol=1e-15)
    np.testing.assert_allclose([e.home_length for e in cd.frame.exits], home_lengths(greenhouse) + DH, atol=1e-15)
    pitch = np.array([w.drum_diameter + greenhouse.cable.diameter for w in greenhouse.winches])
    np.testing.assert_allclose([w.drum_diameter + cd.cable.diameter for w in cd.winches], pitch + DD, rtol=1e-12)


def test_write_corrected_never_touches_the_original(tmp_path, greenhouse):
    src = tmp_path / "rig.toml"
    shutil.copy(EXAMPLES / "greenhouse_tray_3cable.toml", src)
    before = src.read_bytes()
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 12, 16), exit_offsets=DA, seed=17)
    res = calibrate(greenhouse, meas)
    out = write_corrected(res, src)
    assert out == calibrated_path(src) == tmp_path / "rig.calibrated.toml"
    assert src.read_bytes() == before
    back = load_design(out)
    np.testing.assert_allclose(back.exits, res.corrected.exits, atol=1e-12)
    assert "Calibrated by cablekit" in out.read_text()
    with pytest.raises(ValueError, match="refusing"):
        write_corrected(res, src, src)
    assert src.read_bytes() == before


def test_cli_calibrate_on_the_demo_measurements(tmp_path, capsys):
    src = tmp_path / "greenhouse.toml"
    shutil.copy(EXAMPLES / "greenhouse_tray_3cable.toml", src)
    before = src.read_bytes()
    rc = main(["calibrate", str(src), str(EXAMPLES / "greenhouse_measurements.csv")])
    out = capsys.readouterr().out
    assert rc == 0, out
    assert "residual before" in out and "residual after" in out and "+/-" in out
    assert src.read_bytes() == before
    corrected = tmp_path / "greenhouse.calibrated.toml"
    assert corrected.exists()
    # the demo data were made with exit points up to 3.5 mm off (tools/make_demo_measurements.py):
    # the corrected design moves the exits by millimetres, not metres
    shift = np.abs(load_design(corrected).exits - load_design(src).exits)
    assert 0.5e-3 < shift.max() < 8e-3


def test_cli_calibrate_bad_input(tmp_path, capsys):
    src = tmp_path / "g.toml"
    shutil.copy(EXAMPLES / "greenhouse_tray_3cable.toml", src)
    bad = tmp_path / "m.csv"
    bad.write_text("pose,x_cmd [mm],y_cmd [mm],z_cmd [mm],x_meas [mm],y_meas [mm],z_meas [mm],counts_1\n"
                   "P1,1,2,3,1,2,3,5\nP2,1,2,3,1,2,3,5\n")
    assert main(["calibrate", str(src), str(bad)]) == 3
    assert "counts_2" in capsys.readouterr().err
    assert main(["calibrate", str(src), str(EXAMPLES / "greenhouse_measurements.csv"), "-o", str(src)]) == 3
    assert "refusing" in capsys.readouterr().err
    assert main(["calibrate", str(src), str(EXAMPLES / "greenhouse_measurements.csv"), "--params", "exits,wheels"]) == 3
    assert not (tmp_path / "g.calibrated.toml").exists()


def test_synthetic_measurements_round_trip_through_csv(tmp_path, greenhouse):
    meas = synthetic_measurements(greenhouse, _poses(greenhouse, 4, 18), cycles=2, seed=19)
    path = write_measurements(meas, tmp_path / "m.csv", comment="synthetic")
    back = read_measurements(path, cables=greenhouse.m)
    np.testing.assert_array_equal(back.counts, meas.counts)
    np.testing.assert_allclose(back.measured, meas.measured, atol=1e-7)
