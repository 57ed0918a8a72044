"""Inverse/forward kinematics, trilateration and the length <-> count map."""

from pathlib import Path

import numpy as np
import pytest

from cablekit.kinematics import (KinematicsError, cable_lengths, counts_to_lengths, forward_kinematics, home_lengths,
                                 length_per_count, lengths_to_counts, trilaterate)

RNG = np.random.default_rng(11)


def _poses(d, n):
    p = RNG.uniform(d.task.box_lower, d.task.box_upper, (n, 3))
    if d.dof == 6:
        p = np.hstack([p, RNG.uniform(-0.25, 0.25, (n, 3))])
    return p


@pytest.mark.parametrize("name", ["greenhouse", "camera4", "sander8"])
def test_fk_inverts_ik_on_10k_random_poses(name, request):
    d = request.getfixturevalue(name)
    q = _poses(d, 10_000)
    fk = forward_kinematics(d, cable_lengths(d, q))
    assert fk.converged.all()
    assert np.max(np.abs(fk.poses[:, :3] - q[:, :3])) < 1e-9  # the requirement: 1e-9 m
    if d.dof == 6:
        assert np.max(np.abs(fk.poses[:, 3:] - q[:, 3:])) < 1e-9


def test_trilateration_matches_a_hand_example():
    # anchors of a 3-4-5 right triangle at height 2 m; the point (1, 1, 0) is 2 m below the plane
    # distances by Pythagoras: |(1,1,-2)| = sqrt(6), |(1-3,1,-2)| = 3, |(1,1-4,-2)| = sqrt(14)
    a = np.array([[0.0, 0, 2], [3, 0, 2], [0, 4, 2]])
    L = np.array([[np.sqrt(6), 3.0, np.sqrt(14)]])
    np.testing.assert_allclose(trilaterate(a, L), [[1.0, 1.0, 0.0]], atol=1e-12)
    # the mirror solution (above the plane) is returned when gravity points up
    np.testing.assert_allclose(trilaterate(a, L, gravity_direction=(0, 0, 1)), [[1.0, 1.0, 4.0]], atol=1e-12)


def test_incompatible_lengths_fail_clearly(greenhouse):
    with pytest.raises(KinematicsError, match="incompatible"):
        forward_kinematics(greenhouse, [[0.5, 0.5, 0.5]])  # too short to meet
    with pytest.raises(KinematicsError):
        forward_kinematics(greenhouse, [[np.nan, 1.0, 1.0]])
    with pytest.raises(ValueError, match="shape"):
        forward_kinematics(greenhouse, [[1.0, 1.0]])


def test_inconsistent_redundant_lengths_are_reported(camera4):
    q = np.array([[2.0, 1.5, 1.5]])
    L = cable_lengths(camera4, q)
    L[0, 0] += 0.05  # one cable 50 mm off: no pose matches all four lengths
    fk = forward_kinematics(camera4, L)
    assert not fk.converged[0] and fk.residual[0] > 1e-3


def test_bad_poses_are_rejected(greenhouse):
    with pytest.raises(ValueError, match="not finite"):
        cable_lengths(greenhouse, [[1.0, np.inf, 1.0]])
    with pytest.raises(ValueError, match="shape"):
        cable_lengths(greenhouse, [[1.0, 1.0, 1.0, 0.0, 0.0, 0.0]])


def test_length_per_count_by_hand(greenhouse):
    # pitch diameter = drum + rope = 50 + 2 mm; 100 lines x4 = 400 counts per motor turn; gear 5:1
    # length per count = pi * 0.052 / (5 * 400) = 81.68 um (worked by hand)
    assert length_per_count(greenhouse)[0] == pytest.approx(np.pi * 0.052 / 2000, rel=1e-12)


def test_counts_round_trip_and_home(greenhouse):
    h = home_lengths(greenhouse)
    np.testing.assert_allclose(lengths_to_counts(greenhouse, h[None]), 0.0, atol=1e-9)
    L = h[None] + np.array([[0.1, -0.05, 0.0]])
    c = lengths_to_counts(greenhouse, L)
    np.testing.assert_allclose(counts_to_lengths(greenhouse, c), L, atol=1e-12)
    assert c[0, 0] > 0 > c[0, 1]  # paying out is positive


def test_count_jacobians_match_hand_formula_and_differences(greenhouse):
    from cablekit.kinematics import count_jacobians

    q = np.array([[1.2, 0.7, 0.9], [1.8, 1.1, 0.5]])
    L = cable_lengths(greenhouse, q)
    cj = count_jacobians(greenhouse, L)
    np.testing.assert_allclose(cj.counts, lengths_to_counts(greenhouse, L), rtol=1e-12)
    lpc = length_per_count(greenhouse)
    np.testing.assert_allclose(cj.length, 1.0 / lpc[None, :] * np.ones_like(L), rtol=1e-12)
    np.testing.assert_allclose(cj.home_length, -cj.length, rtol=1e-12)
    # dc/dD = -c / (D + d): counts scale with 1 / pitch diameter (worked by hand)
    D = greenhouse.winches[0].drum_diameter
    np.testing.assert_allclose(cj.drum_diameter, -cj.counts / (D + greenhouse.cable.diameter), rtol=1e-12)


def test_noisy_redundant_lengths_converge_with_a_consistency_tolerance(sander8):
    # measured lengths of a redundant rig are never exactly consistent: with the expected
    # length error given, the least-squares pose is reported as converged and stays close
    q = _poses(sander8, 50)
    L = cable_lengths(sander8, q) + RNG.normal(0, 1e-4, (50, sander8.m))
    fk = forward_kinematics(sander8, L, guess=q, consistency_tol=1e-3)
    assert fk.converged.all()
    assert np.max(np.abs(fk.poses[:, :3] - q[:, :3])) < 2e-3
    strict = forward_kinematics(sander8, L, guess=q)
    assert not strict.converged.any()  # 0.1 mm noise is far above float64 round-off, the default
    assert "given length precision 0.001 m" in fk.tolerance_basis and "exact" in strict.tolerance_basis


# --------------------------------------------------------------------------------------
# "converged" means the pose: lengths' precision, starts compared, conditioning, wrapped angles
# --------------------------------------------------------------------------------------
DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def loft():
    from cablekit.design import load_design

    return load_design(DATA / "loft_box_8cable.toml")


def _tilted(d, N, tilt, seed):
    rng = np.random.default_rng(seed)
    lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
    return np.hstack([lo + (hi - lo) * rng.random((N, 3)), rng.uniform(-tilt, tilt, (N, 3))])


@pytest.mark.parametrize("tilt", [0.1, 0.35])
def test_converged_fk_poses_are_the_truth_on_a_tilted_box_to_box_rig(loft, tilt):
    # Reference truth: the poses the exact lengths were generated from (inverse kinematics).
    # Before, on this rig about 60 % of 0.1-rad poses came back "converged" with angles off by
    # multiples of 2 pi (or as the other roll-pitch-yaw triple), and local minima with an RMS
    # residual of a few um passed the old 1e-6 x longest-cable tolerance.
    q = _tilted(loft, 1000, tilt, seed=3)
    fk = forward_kinematics(loft, cable_lengths(loft, q))
    assert np.all(fk.starts >= 9) and "exact" in fk.tolerance_basis
    assert "converged means: RMS length residual <=" in "\n".join(fk.summary())
    assert np.mean(fk.converged) >= 0.995
    err = np.abs(fk.poses - q)
    assert np.max(err[fk.converged, :3]) < 1e-9  # the requirement: 1e-9 m
    assert np.max(err[fk.converged, 3:]) < 1e-9  # and 1e-9 rad
    assert np.all(fk.residual[fk.converged] <= fk.tolerance[fk.converged])
    assert np.all((fk.poses[:, 3:] > -np.pi) & (fk.poses[:, 3:] <= np.pi))


def test_a_local_minimum_is_not_converged(loft):
    # one start only, from the home pose: these two tilted poses end in local minima with RMS
    # residuals of 4.5 um and 0.5 um, 0.47 m / 0.03 m away from the truth (found by search)
    q = _tilted(loft, 3000, 0.35, seed=3)[[515, 2685]]
    one = forward_kinematics(loft, cable_lengths(loft, q), starts=1)
    assert np.all(one.starts == 1)
    assert np.all(one.residual > 1e-7) and np.all(one.residual < 1e-5)
    assert np.all(np.linalg.norm(one.poses - q, axis=1) > 0.01)
    assert not one.converged.any()
    every = forward_kinematics(loft, cable_lengths(loft, q))  # the seeds find the true pose
    assert every.converged.all() and np.max(np.abs(every.poses - q)) < 1e-9


def test_ambiguous_and_ill_conditioned_poses_are_flagged():
    from cablekit.design import load_design

    d6 = load_design(DATA / "orchard_plate_6cable.toml")
    # m = n = 6: some lengths fit more than one pose; the starts are compared and such a pose is
    # ambiguous, never converged (each flagged pose has two distinct exact fits)
    q = _tilted(d6, 400, 0.15, seed=8)
    fk = forward_kinematics(d6, cable_lengths(d6, q))
    err = np.linalg.norm(fk.poses - q, axis=1)
    assert np.max(err[fk.converged]) < 1e-9
    assert not (fk.converged & fk.ambiguous).any()
    # the platform a hair below its exit plane: the lengths barely fix the height (condition
    # number ~ 2e7 > CONDITION_LIMIT); flagged and not converged although the residual is tiny
    qs = np.array([[2.0, 2.0, 3.0 - 0.05 - 1e-7, 0.0, 0.0, 0.0]])
    f = forward_kinematics(d6, cable_lengths(d6, qs), guess=qs[0] + 0.001)
    assert f.ill_conditioned[0] and not f.converged[0] and f.residual[0] <= f.tolerance[0]
    assert any("ill-conditioned" in line for line in f.summary())


def test_wrapped_angles_are_the_same_rotation():
    # Reference: the rotation matrix R = Rz(psi) Ry(theta) Rx(phi) itself; every rotation has two
    # roll-pitch-yaw triples, (phi, theta, psi) and (phi + pi, pi - theta, psi + pi)
    from cablekit.kinematics import wrap_angles
    from cablekit.statics import rotation_matrices

    rng = np.random.default_rng(2)
    a = rng.uniform(-3, 3, (500, 3))
    twins = np.column_stack([a[:, 0] + np.pi, np.pi - a[:, 1], a[:, 2] + np.pi]) + 2 * np.pi * rng.integers(-2, 3, (500, 3))
    w = wrap_angles(twins)
    np.testing.assert_allclose(rotation_matrices(w), rotation_matrices(a), atol=1e-12)
    assert np.all((w > -np.pi) & (w <= np.pi)) and np.all(np.abs(w[:, 1]) <= np.pi / 2)
    ok = np.abs(a[:, 1]) < np.pi / 2  # a itself is canonical there: wrapping gives it back
    np.testing.assert_allclose(w[ok], a[ok], atol=1e-9)
    assert wrap_angles([[-np.pi, 0.0, -np.pi]])[0].tolist() == [np.pi, 0.0, np.pi]
