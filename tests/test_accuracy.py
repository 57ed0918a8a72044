"""Error budget, first-order propagation, Monte Carlo cross-check and accuracy maps."""

import numpy as np
import pytest

from cablekit.accuracy import (SOURCES, ErrorBudget, accuracy_map, design_checks, draw_errors, error_budget,
                               linear_model, load_accuracy_map, monte_carlo, perturbed_rig)
from cablekit.cli import main
from cablekit.design import DesignError, loads_design
from cablekit.kinematics import (cable_lengths, counts_to_lengths, forward_kinematics, home_lengths,
                                 length_per_count, lengths_to_counts)

from conftest import EXAMPLES, example_paths

GREENHOUSE_TEXT = (EXAMPLES / "greenhouse_tray_3cable.toml").read_text()

# a small budget: first order should hold to well within Monte Carlo noise
SMALL = ErrorBudget(exit_position=0.5e-3, home_length=0.2e-3, frame_tilt=1e-4, drum_diameter=0.01e-3,
                    axial_stiffness_error=0.2)


def _with_errors(section: str):
    import re

    base = re.sub(r"(?ms)^\[errors\].*", "", GREENHOUSE_TEXT)  # the demo may carry its own [errors]
    return loads_design(base + "\n[errors]\n" + section)


def _layout_slice(design, key):
    from cablekit.accuracy import _layout

    return _layout(design.m)[key]


# -------------------------------------------------------------------------------- the budget
def test_errors_section_parses_to_si():
    d = _with_errors('exit_position = "3 mm"\nframe_tilt = "0.05 deg"\nhome_length = "1.5 mm"\n'
                     'axial_stiffness_error = "10 %"\nrequired_accuracy = "5 mm"\ndeadband_counts = 2\n'
                     'stretch_compensated = true\ntilt_pivot = "1.5, 1, 0 m"\n')
    b = error_budget(d)
    assert b.exit_position == pytest.approx(3e-3)
    assert b.frame_tilt == pytest.approx(np.radians(0.05))
    assert b.axial_stiffness_error == pytest.approx(0.1)
    assert b.required_accuracy == pytest.approx(5e-3)
    assert b.deadband_counts == 2 and b.stretch_compensated is True
    assert b.tilt_pivot == pytest.approx((1.5, 1.0, 0.0))
    assert b.drum_diameter == ErrorBudget().drum_diameter  # default kept
    assert "exit_position" in b.given and "drum_diameter" not in b.given


def test_errors_section_absent_gives_defaults(greenhouse):
    import re

    d = loads_design(re.sub(r"(?ms)^\[errors\].*", "", GREENHOUSE_TEXT))
    assert error_budget(d) == ErrorBudget()


@pytest.mark.parametrize("section, path, words", [
    ('exit_posiion = "3 mm"\n', "errors.exit_posiion", "unknown key"),
    ('exit_position = "3 kg"\n', "errors.exit_position", "wrong dimension"),
    ('exit_position = 3\n', "errors.exit_position", "missing unit"),
    ('home_length = "-1 mm"\n', "errors.home_length", "negative"),
    ('frame_tilt = "20 deg"\n', "errors.frame_tilt", "small-error model"),
    ('required_accuracy = "0 mm"\n', "errors.required_accuracy", "greater than zero"),
    ('stretch = "yes"\n', "errors.stretch", "true or false"),
    ('tilt_pivot = "1, 2 m"\n', "errors.tilt_pivot", "3 components"),
])
def test_errors_section_problems_name_the_field(section, path, words):
    with pytest.raises(DesignError) as exc:
        _with_errors(section)
    assert any(p.path == path and words in p.expected for p in exc.value.problems), exc.value


# -------------------------------------------------------------------------------- quantisation
def test_quantisation_variance_is_q_squared_over_12(greenhouse):
    # Uniform quantiser with step q: error uniform on [-q/2, q/2], variance q^2/12
    # (Widrow and Kollar, Quantization Noise, 2008, ch. 4; GUM JCGM 100:2008 F.2.2.1).
    d = greenhouse
    q = length_per_count(d)
    rng = np.random.default_rng(5)
    L = home_lengths(d) + rng.uniform(-0.5, 0.5, (200_000, d.m))
    err = counts_to_lengths(d, np.rint(lengths_to_counts(d, L))) - L
    var = err.var(axis=0)
    # the sample variance of a uniform variable has relative standard error sqrt(0.8 / N) (its kurtosis is 1.8)
    np.testing.assert_allclose(var, q**2 / 12, rtol=5 * np.sqrt(0.8 / len(L)))
    # the budget gives the rounding source exactly that variance
    model = linear_model(d, np.array([d.home_pose]))
    np.testing.assert_allclose(model.variance_weights()[_layout_slice(d, "quantisation")], q**2 / 12, rtol=1e-12)


# -------------------------------------------------------------------------------- first order
def test_sensitivities_match_finite_differences_of_the_perturbed_rig(camera4):
    # every column of dq/ds against a central difference of the nonlinear model (forward kinematics)
    from cablekit.accuracy import _actual_lengths

    from dataclasses import replace

    d = camera4
    # no stretch or sag: their bias would move the base point of the difference off the nominal pose
    budget = replace(SMALL, stretch=False, sag=False)
    model = linear_model(d, np.array([[1.4, 1.1, 1.2]]), budget=budget)
    k = model.half_width.size
    eps = 1e-3 * model.half_width
    fd = np.zeros((3, k))
    for j in np.flatnonzero(eps > 0):
        S = np.zeros((2, k))
        S[0, j], S[1, j] = eps[j], -eps[j]
        L = _actual_lengths(d, model, 0, S)
        q = forward_kinematics(d, L, guess=model.poses[0], exits=perturbed_rig(d, S, budget=budget)).poses
        fd[:, j] = (q[0] - q[1]) / (2 * eps[j])
    np.testing.assert_allclose(model.sensitivity[0], fd, rtol=1e-4, atol=1e-6 * np.abs(fd).max())


def test_drum_and_home_sensitivities_match_hand_formula(greenhouse):
    # with the counts held fixed, a pitch-diameter error dD changes the paid-out length by (L - h) dD / (D + d)
    d = greenhouse
    q = np.array([[1.2, 0.7, 0.6], [1.8, 1.1, 1.3]])
    model = linear_model(d, q)
    L, h = cable_lengths(d, q), home_lengths(d)
    pitch = np.array([w.drum_diameter + d.cable.diameter for w in d.winches])
    expect = model.pinv * ((L - h) / pitch)[:, None, :]
    np.testing.assert_allclose(model.sensitivity[:, :, _layout_slice(d, "drum_diameter")], expect, rtol=1e-10)
    np.testing.assert_allclose(model.sensitivity[:, :, _layout_slice(d, "home_length")], model.pinv, rtol=1e-10)


def test_stretch_bias_equals_forward_kinematics_of_stretched_cables(greenhouse):
    from cablekit.cables import elastic_stretch
    from cablekit.statics import tensions_at

    d = greenhouse
    budget = ErrorBudget(exit_position=0, home_length=0, frame_tilt=0, drum_diameter=0, quantisation_counts=0,
                         deadband_counts=0, axial_stiffness_error=0, sag=False)
    q = np.array([[1.0, 0.6, 0.5], [2.0, 1.2, 1.3]])
    model = linear_model(d, q, budget=budget)
    T = tensions_at(d, q).tensions
    T0 = tensions_at(d, np.array([d.home_pose])).tensions[0]
    EA = d.cable.axial_stiffness
    L = cable_lengths(d, q) + elastic_stretch(T, cable_lengths(d, q), EA) - elastic_stretch(T0, home_lengths(d), EA)
    exact = forward_kinematics(d, L).poses - q
    np.testing.assert_allclose(model.bias, exact, rtol=1e-3, atol=1e-9)
    assert np.all(model.worst_case() >= np.abs(model.bias) - 1e-15)


def test_sag_bias_appears_only_when_sag_is_on(camera4):
    q = np.array([[3.3, 2.4, 2.1]])  # a far corner, low tension in one cable
    on = linear_model(camera4, q, budget=ErrorBudget(sag=True))
    off = linear_model(camera4, q, budget=ErrorBudget(sag=False))
    k = [s.key for s in SOURCES].index("sag")
    assert np.abs(on.bias_by_source[0, :, k]).max() > 1e-5
    assert np.all(off.bias_by_source[0, :, k] == 0.0)


# -------------------------------------------------------------------------------- Monte Carlo
@pytest.mark.parametrize("name", ["greenhouse", "camera4"])
def test_worst_case_bound_contains_every_monte_carlo_sample(name, request):
    d = request.getfixturevalue(name)
    lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
    q = np.array([0.5 * (lo + hi), lo + 0.1 * (hi - lo), hi - 0.1 * (hi - lo)])
    model = linear_model(d, q)  # the default (large) budget
    mc = monte_carlo(d, model, [0, 1, 2], samples=2000, seed=3)
    assert mc.solved.all()
    assert np.all(np.abs(mc.errors) <= mc.worst_case[:, None, :])
    assert np.all(mc.inside_worst_case() == 1.0)


@pytest.mark.parametrize("name", ["greenhouse", "camera4", "sander8"])
def test_first_order_and_monte_carlo_covariances_agree(name, request):
    # JCGM 101:2008 (GUM Supplement 1), 8: a Monte Carlo propagation through the nonlinear model
    # (forward kinematics of every perturbed rig) validates the first-order (GUM 5.1.2) covariance.
    # Tolerance: each element of the sample covariance is a mean of M products, so by the central
    # limit theorem its standard error is std(product) / sqrt(M); we allow 4.5 of those.
    d = request.getfixturevalue(name)
    q = np.array([d.home_pose])
    model = linear_model(d, q, budget=SMALL)
    M = 3000
    mc = monte_carlo(d, model, [0], samples=M, seed=11)
    # the sander's roll is weakly constrained at home: a few damped solves stop a hair short
    assert mc.solved.mean() > 0.99
    e = mc.errors[0][mc.solved[0]]
    dev = e - e.mean(axis=0)
    prod = dev[:, :, None] * dev[:, None, :]
    se = prod.std(axis=0) / np.sqrt(len(e))
    cov_mc = prod.mean(axis=0)
    diff = np.abs(cov_mc - mc.cov_fo[0])
    assert np.all(diff <= 4.5 * se + 1e-18), (diff / se).max()
    # and the means: the first-order bias against the Monte Carlo mean (standard error of a mean)
    assert np.all(np.abs(e.mean(axis=0) - mc.mean_fo[0]) <= 4.5 * e.std(axis=0) / np.sqrt(len(e)) + 1e-12)
    ok, _ = mc.validated()
    assert ok.all()


def test_monte_carlo_is_reproducible(greenhouse):
    model = linear_model(greenhouse, np.array([greenhouse.home_pose]))
    a = monte_carlo(greenhouse, model, [0], samples=200, seed=4)
    b = monte_carlo(greenhouse, model, [0], samples=200, seed=4)
    np.testing.assert_array_equal(a.errors, b.errors)


def test_draws_are_uniform_within_the_half_widths(greenhouse):
    model = linear_model(greenhouse, np.array([greenhouse.home_pose]))
    S = draw_errors(greenhouse, None, 5000, np.random.default_rng(0))
    assert np.all(np.abs(S) <= model.half_width)
    # rectangular distribution of half-width a: variance a^2 / 3 (JCGM 100:2008, GUM 4.3.7);
    # the sample variance of 5000 draws scatters by sqrt(0.8 / 5000) = 1.3 %, so 6 % is ~5 sigma
    np.testing.assert_allclose(S.var(axis=0), model.half_width**2 / 3.0, rtol=0.06)
    np.testing.assert_allclose(model.variance_weights(), model.half_width**2 / 3.0, rtol=1e-15)


# -------------------------------------------------------------------------------- maps
@pytest.fixture(scope="module")
def greenhouse_map():
    d = _with_errors('required_accuracy = "12 mm"\n')
    return d, accuracy_map(d, step=0.25, builds=400, monte_carlo_samples=300, monte_carlo_poses=3, seed=1)


def test_map_arrays_are_consistent(greenhouse_map):
    d, res = greenhouse_map
    N = len(res.poses)
    f = res.feasible
    assert f.any() and res.p95_position.shape == (N,) and res.source_ms.shape == (N, len(SOURCES))
    assert np.all(np.isnan(res.p95_position[~f])) and np.all(np.isfinite(res.p95_position[f]))
    # the 95th percentile of sampled builds lies below the worst-case bound and above zero
    assert np.all(res.p95_position[f] <= res.worst_position[f] + 1e-12)
    assert np.all(res.p95_position[f] > 0)
    # systematic + random covariance equals the sum of the per-source contributions (position trace)
    tr = np.trace(res.cov_systematic[f][:, :3, :3] + res.cov_random[f][:, :3, :3], axis1=1, axis2=2)
    bias2 = np.sum(res.bias[f][:, :3] ** 2, axis=1)
    np.testing.assert_allclose(res.source_ms[f].sum(axis=1), tr + bias2, rtol=0.05)
    assert set(np.unique(res.dominant[f])) <= set(range(len(SOURCES)))
    assert np.all(res.step[f] > 0) and np.all(res.step[f] < 1e-3)
    text = "\n".join(res.summary())
    assert "95 %" in text and "dominant source" in text and "Monte Carlo" in text and "caution" in text


def test_map_save_and_load_without_pickle(greenhouse_map, tmp_path):
    _, res = greenhouse_map
    path = res.save(tmp_path / "map.npz")
    z = load_accuracy_map(path)
    np.testing.assert_array_equal(z["p95_position"], res.p95_position)
    assert z["meta"]["format"] == "cablekit-accuracy-map/1" and z["meta"]["budget"]["required_accuracy"] == 0.012
    assert list(z["source_keys"]) == [s.key for s in SOURCES]
    fig = res.figure()
    assert len(fig.data) >= 2 and "95 %" in fig.layout.title.text + str(fig.layout.annotations)


def test_design_checks_judge_the_required_accuracy(greenhouse_map):
    d, res = greenhouse_map
    checks = {c.key: c for c in design_checks(d, accuracy=res)}
    worst, _ = res.worst_p95()
    assert checks["accuracy_p95"].value == pytest.approx(worst * 1e3)
    assert checks["accuracy_p95"].status == ("pass" if worst <= 0.012 else "fail")
    assert "accuracy_step" in checks and "accuracy_first_order" in checks
    tight = _with_errors('required_accuracy = "0.1 mm"\n')
    assert {c.key: c.status for c in design_checks(tight, accuracy=res)}["accuracy_p95"] in ("pass", "fail")
    from dataclasses import replace

    strict = replace(res, budget=replace(res.budget, required_accuracy=1e-4))
    assert {c.key: c.status for c in design_checks(d, accuracy=strict)}["accuracy_p95"] == "fail"


def test_no_required_accuracy_no_checks():
    import re

    d = loads_design(re.sub(r"(?ms)^\[errors\].*", "", GREENHOUSE_TEXT))
    assert design_checks(d) == []


@pytest.mark.parametrize("path", example_paths(), ids=lambda p: p.stem)
def test_cli_accuracy_runs_on_every_demo(path, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    rc = main(["accuracy", str(path), "--step", "400 mm", "--builds", "200", "--mc-samples", "150",
               "--mc-poses", "2", "--quiet"])
    out = capsys.readouterr().out
    assert rc in (0, 4), out
    assert "95 % of builds within" in out
    written = tmp_path / f"{path.stem}.accuracy.npz"
    assert written.exists() and load_accuracy_map(written)["poses"].shape[0] > 0


def test_cli_accuracy_bad_input(tmp_path, capsys):
    design = EXAMPLES / "greenhouse_tray_3cable.toml"
    assert main(["accuracy", str(design), "--step", "3 kg"]) == 3
    assert "--step" in capsys.readouterr().err
    assert main(["accuracy", str(design), "-o", str(tmp_path / "map.txt")]) == 3
    assert ".npz" in capsys.readouterr().err
