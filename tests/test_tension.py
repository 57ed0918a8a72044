"""Fast exact tension distribution (cablekit.tension) against outside references.

The reference is scipy's general-purpose LP solver (``scipy.optimize.linprog``, HiGHS), solving
the same max-margin problem pose by pose (cablekit.statics.solve_lp builds that LP); the
definition of a wrench-feasible pose is Gouttefarde, Merlet and Daney, "Wrench-feasible
workspace of parallel cable-driven mechanisms", ICRA 2007.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from cablekit import tension
from cablekit.design import load_design
from cablekit.kinematics import structure_matrix
from cablekit.statics import external_wrench, solve_lp, solve_square, tension_limits, tensions_at
from cablekit.tension import box_vertices, distribute

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
RIGS = ["greenhouse_tray_3cable.toml", "workshop_camera_4cable.toml", "hall_sander_8cable.toml"]
BACKENDS = ["numpy"] + (["numba"] if tension.HAVE_NUMBA else [])


@pytest.fixture(scope="module", params=RIGS)
def rig(request):
    return load_design(EXAMPLES / request.param)


def random_poses(d, N, rng, *, grow=0.25, tilt_deg=15.0):
    """Uniform poses in the task box grown by ``grow`` of its size on each side (some infeasible)."""
    lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
    span = hi - lo
    p = lo - grow * span + (1 + 2 * grow) * span * rng.random((N, 3))
    if d.dof == 3:
        return p
    ang = np.radians(tilt_deg) * (2 * rng.random((N, 3)) - 1)
    return np.hstack([p, ang])


def margins(d, q, backend="auto", box=None):
    lim = tension_limits(d)
    return distribute(structure_matrix(d, q), external_wrench(d, q), lim.t_min, lim.t_max,
                      wrench_box=box, backend=backend)


def near_boundary(d, rng, count, backend="auto"):
    """Poses whose exact margin is a chosen value within 0.1 N of zero (bisection along segments
    from a feasible to an infeasible pose; the margin is continuous in the pose)."""
    q = random_poses(d, 40 * count, rng)
    ok = margins(d, q, backend).feasible
    a = q[ok][:count]
    b = q[~ok][:count]
    k = min(len(a), len(b))
    a, b = a[:k], b[:k]
    target = rng.uniform(1e-4, 0.1, k) * rng.choice([-1.0, 1.0], k)  # keep clear of LP round-off at exactly 0
    lo, hi = np.zeros(k), np.ones(k)
    for _ in range(45):
        mid = 0.5 * (lo + hi)
        m = margins(d, a + mid[:, None] * (b - a), backend).margin
        above = m > target
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid)
    return a + lo[:, None] * (b - a)


def _lp(d, q):
    lim = tension_limits(d)
    return solve_lp(structure_matrix(d, q), external_wrench(d, q), lim.t_min, lim.t_max)


# --------------------------------------------------------------------------------------
# agreement with scipy.optimize.linprog (HiGHS): verdict and margin on every pose
# --------------------------------------------------------------------------------------
def _agree(d, q, fast):
    ref = _lp(d, q)
    assert np.array_equal(fast.feasible, ref.feasible), f"{np.sum(fast.feasible != ref.feasible)} mismatches"
    # HiGHS optimality tolerance is about 1e-7 relative; the margins are a few hundred newtons at most
    assert np.allclose(fast.margin, ref.margin, rtol=0, atol=1e-6)
    # the fast tensions balance the load and reach the margin they report
    lim = tension_limits(d)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    assert np.allclose(np.einsum("nij,nj->ni", W, fast.tensions) + w, 0, atol=1e-8)
    own = np.min(np.minimum(fast.tensions - lim.t_min, lim.t_max - fast.tensions), axis=1)
    assert np.allclose(own, fast.margin, atol=1e-7)


def test_agrees_with_linprog_random_and_near_boundary(rig):
    # Reference: scipy.optimize.linprog (HiGHS); feasibility as defined by Gouttefarde, Merlet
    # and Daney 2007.  The default backend here (compiled when numba is installed; the NumPy path
    # is held to it on 2 x 10^4 poses below); the full 10^4-pose run per rig is
    # test_agrees_with_linprog_10k (slow).
    rng = np.random.default_rng(7)
    q = random_poses(rig, 600, rng)
    fast = margins(rig, q)
    assert 0.05 < np.mean(fast.feasible) < 0.99  # both verdicts are exercised
    _agree(rig, q, fast)
    qb = near_boundary(rig, rng, 110)
    fb = margins(rig, qb)
    assert np.all(np.abs(fb.margin) <= 0.1) and len(qb) >= 100
    assert 20 < np.sum(fb.feasible) < len(qb) - 20  # both sides of the boundary
    _agree(rig, qb, fb)


@pytest.mark.slow
def test_agrees_with_linprog_10k(rig):
    # Reference: scipy.optimize.linprog (HiGHS), 10^4 random poses per demo rig including 10^3
    # within 0.1 N of a tension limit (Gouttefarde, Merlet and Daney 2007 for the definition).
    rng = np.random.default_rng(11)
    q = np.vstack([random_poses(rig, 9000, rng), near_boundary(rig, rng, 1000)])
    assert len(q) >= 10_000 - 50
    _agree(rig, q, margins(rig, q))


@pytest.mark.skipif(not tension.HAVE_NUMBA, reason="numba not installed")
@pytest.mark.parametrize("with_box", [False, True])
def test_compiled_kernel_matches_numpy_on_many_poses(rig, with_box):
    # the two implementations of the same exact test, on 2 x 10^4 poses, with and without a
    # wrench box (m = n without a box uses the compiled Cramer's rule, with one the general kernel)
    rng = np.random.default_rng(3)
    q = random_poses(rig, 20_000, rng)
    box = np.r_[5.0, 5.0, 5.0, 0.5, 0.5, 0.5][: rig.dof] if with_box else None
    a, b = margins(rig, q, "numba", box), margins(rig, q, "numpy", box)
    assert np.array_equal(a.feasible, b.feasible)
    assert np.allclose(a.margin, b.margin, atol=1e-8)
    assert np.allclose(a.nominal_margin, b.nominal_margin, atol=1e-8)
    both = np.isfinite(a.tensions).all(1) & np.isfinite(b.tensions).all(1)
    assert both.mean() > 0.99
    assert np.allclose(a.tensions[both], b.tensions[both], atol=1e-6)
    assert np.array_equal(a.limiting_cable, b.limiting_cable)
    assert np.array_equal(a.active_lower, b.active_lower) and np.array_equal(a.active_upper, b.active_upper)


def test_tensions_at_uses_the_fast_path(rig):
    q = random_poses(rig, 50, np.random.default_rng(5))
    res = tensions_at(rig, q)
    assert ("max-margin" in res.method) == (rig.m > rig.dof)  # m = n keeps statics.solve_square
    ref = tensions_at(rig, q, method="lp")  # scipy HiGHS reference
    assert np.array_equal(res.feasible, ref.feasible)
    assert np.allclose(res.margin, ref.margin, atol=1e-6)


# --------------------------------------------------------------------------------------
# m = n: the unique solution
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("backend", BACKENDS)
def test_square_gives_the_unique_solution(backend):
    # Reference: numpy.linalg.solve (LAPACK gesv) for W t = -w; with m = n the tensions are unique.
    rng = np.random.default_rng(0)
    N, n = 500, 3
    W = rng.normal(size=(N, n, n))
    t_true = rng.uniform(-5, 60, size=(N, n))
    w = -np.einsum("nij,nj->ni", W, t_true)
    res = distribute(W, w, 3.0, 40.0, backend=backend)
    assert np.allclose(res.tensions, np.linalg.solve(W, -w[..., None])[..., 0], atol=1e-8)
    assert np.allclose(res.margin, np.min(np.minimum(t_true - 3.0, 40.0 - t_true), axis=1), atol=1e-8)
    assert np.array_equal(res.feasible, np.all((t_true >= 3.0) & (t_true <= 40.0), axis=1))
    sq = solve_square(W, w, 3.0, 40.0)  # the foundation's square solver gives the same
    assert np.allclose(sq.margin, res.margin, atol=1e-8)


def test_singular_square_pose_goes_to_the_exact_fallback():
    # a 3-cable point rig with two parallel cables: W is singular; the LP decides (no solution here)
    W = np.array([[[1.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, 0.0]]])
    res = distribute(W, np.array([0.0, 0.0, -5.0]), 1.0, 50.0)
    assert not res.feasible[0] and res.margin[0] == -np.inf and res.by_lp[0]


# --------------------------------------------------------------------------------------
# wrench boxes: feasible exactly when every vertex is (convexity)
# --------------------------------------------------------------------------------------
def test_wrench_box_margin_is_the_least_vertex_margin_lp():
    # Bosscher, Riechel and Ebert-Uphoff, "Wrench-feasible workspace generation for cable-driven
    # robots", IEEE T-RO 2006: a convex wrench set is feasible iff its vertices are; checked here by
    # running every vertex through scipy's linprog (HiGHS) as a separate problem.
    d = load_design(EXAMPLES / "hall_sander_8cable.toml")
    rng = np.random.default_rng(21)
    q = random_poses(d, 400, rng, grow=0.3, tilt_deg=12.0)
    half = np.array([10.0, 10.0, 10.0, 1.0, 1.0, 1.0])
    fast = margins(d, q, box=half)
    # keep a few poses on each side of the verdict
    q = np.vstack([q[fast.feasible][:6], q[~fast.feasible][:6]])
    fast = margins(d, q, box=half)
    lim = tension_limits(d)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    verts = box_vertices(w, half)
    assert verts.shape == (len(q), 64, 6)
    vm = np.column_stack([solve_lp(W, verts[:, v], lim.t_min, lim.t_max).margin for v in range(64)])
    assert np.allclose(fast.margin, vm.min(axis=1), atol=1e-6)
    assert np.array_equal(fast.feasible, np.all(vm >= 0, axis=1))
    assert 0 < np.sum(fast.feasible) < len(q)


@pytest.mark.parametrize("backend", BACKENDS)
def test_wrench_box_is_feasible_exactly_when_all_vertices_are(backend):
    # convexity (Bosscher et al. 2006): the box margin from the closed form equals the least margin
    # of its 2^k vertices solved one by one, on many poses, and never exceeds the nominal margin
    d = load_design(EXAMPLES / "hall_sander_8cable.toml")
    q = random_poses(d, 1500, np.random.default_rng(4), grow=0.1, tilt_deg=10.0)
    half = np.array([10.0, 0.0, 10.0, 1.0, 0.0, 1.0])  # zero half-widths make no generator: 16 vertices
    box = margins(d, q, backend, half)
    lim = tension_limits(d)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    verts = box_vertices(w, half)
    assert verts.shape[1] == 16
    vm = np.column_stack([distribute(W, verts[:, v], lim.t_min, lim.t_max, backend=backend).margin
                          for v in range(16)])
    assert np.allclose(box.margin, vm.min(axis=1), atol=1e-8)
    assert np.array_equal(box.feasible, np.all(vm >= 0, axis=1))
    assert 0.02 < np.mean(box.feasible) < np.mean(box.nominal_margin >= 0)
    assert np.all(box.margin <= box.nominal_margin + 1e-9)


def test_box_vertices_and_generators():
    v = box_vertices(np.zeros(3), [1.0, 0.0, 2.0])
    assert v.shape == (1, 4, 3)
    assert {tuple(x) for x in v[0]} == {(-1, 0, -2), (-1, 0, 2), (1, 0, -2), (1, 0, 2)}
    with pytest.raises(ValueError, match="not negative"):
        distribute(np.eye(3)[None], np.zeros(3), 1, 2, wrench_box=[1, -1, 0])


# --------------------------------------------------------------------------------------
# hand-made cases
# --------------------------------------------------------------------------------------
def test_two_redundant_cables_worked_by_hand():
    # Worked by hand: one DOF, three cables on a bead, t1 + t2 - t3 = 5 N (w = -5 N), limits
    # 1..11 N (mid 6 N, half-range 5 N).  With |t_i - 6| <= 5 - s = delta, t1 + t2 - t3 spans
    # [6 - 3 delta, 6 + 3 delta]; it reaches 5 N once delta >= 1/3, so s* = 14/3 N and the only
    # tensions at that margin are t1 = t2 = 17/3 N, t3 = 19/3 N.
    W = np.array([[[1.0, 1.0, -1.0]]])
    res = distribute(W, np.array([-5.0]), 1.0, 11.0)
    assert res.margin[0] == pytest.approx(14 / 3, abs=1e-12)
    assert np.allclose(res.tensions[0], [17 / 3, 17 / 3, 19 / 3], atol=1e-12)
    assert res.active_lower[0].tolist() == [True, True, False]
    assert res.active_upper[0].tolist() == [False, False, True]


def test_input_errors():
    with pytest.raises(ValueError, match="m >= n"):
        distribute(np.ones((1, 3, 2)), np.zeros(3), 1, 2)
    with pytest.raises(ValueError, match="NaN"):
        distribute(np.full((1, 3, 4), np.nan), np.zeros(3), 1, 2)
    with pytest.raises(ValueError, match="backend"):
        distribute(np.ones((1, 1, 2)), np.zeros(1), 1, 2, backend="gpu")


def test_three_redundant_cables_use_the_exact_lp():
    # m - n = 3 has no fast path: every pose goes to scipy's HiGHS.  Worked by hand as above:
    # t1 + t2 - t3 - t4 = 5 N spans [-4 delta, 4 delta], so delta = 5/4 and s* = 5 - 5/4 = 15/4 N.
    W = np.array([[[1.0, 1.0, -1.0, -1.0]]])
    res = distribute(W, np.array([-5.0]), 1.0, 11.0)
    assert res.by_lp.all() and "linear program" in res.method
    assert res.margin[0] == pytest.approx(15 / 4, abs=1e-7)


# --------------------------------------------------------------------------------------
# rigs of the kind an independent check used: box to box, plain grids, singular corners
# --------------------------------------------------------------------------------------
DATA = Path(__file__).resolve().parent / "data"


@pytest.fixture(scope="module")
def loft_grid():
    """The 9 x 9 x 9 grid of a box-to-box 8-cable rig (identity orientation, gravity only).

    Its eight corners put an attachment exactly at an exit (singular poses)."""
    from cablekit.kinematics import zero_length_cables
    from cablekit.region import task_poses

    d = load_design(DATA / "loft_box_8cable.toml")
    q = task_poses(d).poses
    assert q.shape == (729, 6)
    sing = np.any(zero_length_cables(d, q), axis=1)
    return d, q, sing


@pytest.mark.parametrize("backend", BACKENDS)
def test_plain_grid_of_a_box_to_box_rig_stays_on_the_exact_fast_path(loft_grid, backend):
    # Symmetric poses of a box-to-box rig tie: the binding dependency involves two cables with
    # parallel null-space rows, so the optimal tensions are a segment, not a vertex.  Those poses
    # once went to the per-pose LP (about half the grid); now under 1 % may.
    # Reference: scipy.optimize.linprog (HiGHS), pose by pose, for verdict and margin.
    d, q, sing = loft_grid
    assert int(sing.sum()) == 8
    q = q[~sing]
    fast = margins(d, q, backend)
    assert fast.by_lp.mean() < 0.01, f"{int(fast.by_lp.sum())} of {len(q)} poses by LP"
    assert 0.1 < np.mean(fast.feasible) < 0.9
    _agree(d, q, fast)


def test_singular_poses_are_classified_not_raised(loft_grid):
    # an attachment exactly at its exit: that cable's direction is undefined (NaN column of W)
    d, q, sing = loft_grid
    lim = tension_limits(d)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    assert not np.all(np.isfinite(W[sing]))
    with pytest.raises(ValueError, match="first at pose .*singular="):
        distribute(W, w, lim.t_min, lim.t_max)
    res = distribute(W, w, lim.t_min, lim.t_max, singular=sing)
    assert not res.feasible[sing].any() and np.all(res.margin[sing] == -np.inf)
    assert np.all(res.limiting_cable[sing] == -1) and np.isnan(res.tensions[sing]).all()
    assert "8 pose(s) no solution / singular" in res.method
    rest = distribute(W[~sing], w[~sing], lim.t_min, lim.t_max)  # the other poses as if alone
    assert np.array_equal(res.feasible[~sing], rest.feasible)
    assert np.array_equal(res.margin[~sing], rest.margin)
    # tensions_at finds them itself, on both paths (scipy HiGHS as the reference for the rest)
    for method in ("auto", "lp"):
        r = tensions_at(d, q[::7], method=method)
        s7 = sing[::7]
        assert s7.any() and not r.feasible[s7].any() and np.all(r.margin[s7] == -np.inf)
    ref = tensions_at(d, q[::7], method="lp")
    assert np.array_equal(tensions_at(d, q[::7]).feasible, ref.feasible)


def test_six_cable_rigid_rig_maps_on_every_path():
    # m = n = 6 once reached the compiled kernel without right-hand sides (TypeError).  The
    # unique tensions are checked against numpy.linalg.solve (LAPACK gesv) and scipy's linprog.
    from cablekit.workspace import compute_workspace

    d = load_design(DATA / "orchard_plate_6cable.toml")
    assert d.m == d.dof == 6
    q = random_poses(d, 300, np.random.default_rng(12), tilt_deg=8.0)
    lim = tension_limits(d)
    W, w = structure_matrix(d, q), external_wrench(d, q)
    t_ref = np.linalg.solve(W, -w[..., None])[..., 0]
    lp = solve_lp(W, w, lim.t_min, lim.t_max)
    for backend in BACKENDS:
        for box in (None, np.r_[2.0, 2.0, 2.0, 0.1, 0.1, 0.1]):
            res = margins(d, q, backend, box)
            assert np.allclose(res.tensions, t_ref, atol=1e-8)
            if box is None:
                assert np.array_equal(res.feasible, lp.feasible)
                assert np.allclose(res.margin, lp.margin, atol=1e-6)
            else:  # the box margin is the least margin of its 64 vertices (Bosscher et al. 2006)
                verts = box_vertices(w, box)
                tv = np.linalg.solve(W[:, None], -verts[..., None])[..., 0]  # (N, 64, 6)
                vm = np.min(np.minimum(tv - lim.t_min, lim.t_max - tv), axis=2).min(axis=1)
                assert np.allclose(res.margin, vm, atol=1e-8)
        ws = compute_workspace(d, backend=backend)
        assert 0 < ws.coverage < 1 and len(ws.poses) == 882


@pytest.mark.parametrize("backend", BACKENDS)
def test_tied_optima_are_solved_exactly_on_the_fast_path(backend):
    # Two ways the optimal tensions form a segment instead of a vertex: (a) the other six cables'
    # columns span only five dimensions, so a dependency binds cables 6 and 7 alone; (b) one cable
    # has a 2 mN range and must sit at its centre (margin = its half-range).  Both once went to
    # the per-pose LP (241 of 3000 and every pose); verdict and margin against
    # scipy.optimize.linprog (HiGHS), and the tensions must balance the load and reach the margin.
    rng = np.random.default_rng(0)
    N = 600
    W = rng.normal(size=(N, 6, 8))
    W[:, :, 5] = np.einsum("nij,nj->ni", W[:, :, :5], rng.normal(size=(N, 5)))
    w = -np.einsum("nij,nj->ni", W, rng.uniform(5, 60, (N, 8))) + rng.normal(0, 20, (N, 6))
    lo, hi = np.full(8, 10.0), np.full(8, 50.0)
    W2 = rng.normal(size=(N, 6, 8))
    t2 = rng.uniform(12, 48, (N, 8))
    t2[:, 2] = 30.001
    w2 = -np.einsum("nij,nj->ni", W2, t2)
    lo2, hi2 = lo.copy(), hi.copy()
    lo2[2], hi2[2] = 30.0, 30.002
    for Wc, wc, a, b in ((W, w, lo, hi), (W2, w2, lo2, hi2)):
        res = distribute(Wc, wc, a, b, backend=backend)
        ref = solve_lp(Wc, wc, a, b)
        assert not res.by_lp.any()
        assert np.array_equal(res.feasible, ref.feasible) and 0 < ref.feasible.sum()
        assert np.allclose(res.margin, ref.margin, rtol=0, atol=1e-6)  # HiGHS tolerance, about 1e-7 relative
        assert np.allclose(np.einsum("nij,nj->ni", Wc, res.tensions) + wc, 0, atol=1e-8)
        own = np.min(np.minimum(res.tensions - a, b - res.tensions), axis=1)
        assert np.allclose(own, res.margin, atol=1e-7)
    assert np.allclose(res.margin, 0.001, atol=1e-9)  # (b): every pose holds with cable 3 centred
