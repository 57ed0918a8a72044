"""Where the payload can go: the workspace map over the task region.

:func:`compute_workspace` samples the task region (:func:`cablekit.region.task_poses`),
finds for every pose whether the platform can hold its load with every cable between taut
and its limit (exact, :func:`cablekit.tension.distribute`), and checks the geometry: cables
touching each other, a cable through the platform body, a cable through a declared obstacle.
The result, :class:`WorkspaceResult`, carries per-pose verdicts, margins, tensions and reason
codes, and gives a text summary, plotly figures and a result file.

A pose is **feasible** when its tension margin over the whole load set is >= 0
(wrench-feasible workspace, Gouttefarde, Merlet and Daney 2007) and no geometric reason
forbids it.  The load set is gravity (+ an extra wrench) plus the task's wrench box plus the
inertial wrench of every acceleration up to ``task.acceleration`` in any direction (below);
for redundant rigs the margin is then reduced by the tension spread of length errors (below).

Accelerations
-------------
The platform, payload and arm (lumped) accelerating by ``a`` need the cables to supply
``M a`` more: the load is ``w_g - M_q[:, :3] a`` with ``M_q`` the mass matrix about the
reference point (:func:`cablekit.stiffness.mass_matrix`: ``m a`` and, for a rigid platform,
its moment ``m c x a`` through the combined centre of mass).  The ball ``|a| <= a_max`` is
(for m = n exactly: the tensions are unique, so each cable's extremes over the wrench box and
the ball add, ``t_i +- (sum_k |(W^-1)_ik| box_k + a_max |row_i(W^-1 G)|)``; otherwise)
enclosed in a polytope (:func:`acceleration_polytope`: a geodesic polyhedron of 42 vertices
whose faces touch the ball, vertices 7.0 % outside it), so the check is conservative.  The
margin is concave in the load, so its least value over (polytope + wrench box) is at a vertex
(Bosscher, Riechel and Ebert-Uphoff 2006): every polytope vertex is solved with the wrench box
around it.  To spare that work where it cannot change a verdict, a bound for the whole ball
comes first: the tensions ``t + W^+ G a`` balance the accelerated load ``w - G a``, so the
margin is at least ``s - a_max max_i |row_i(W^+ G)|`` (Cauchy-Schwarz); only poses where this
bound falls below the warning level are solved on the polytope, and the larger of the two lower
bounds is kept.  Poses that already fail at rest
keep the bound, those failing for their length errors alone their rest margin (less the spread).
Angular acceleration and velocity are not in the design file and not included.

Length errors on redundant rigs (m > n)
---------------------------------------
Length-controlled winches set lengths, not tensions.  An error ``e`` of the cables' unstretched
lengths (home length, quantisation, deadband: the ``[errors]`` budget) changes the tensions
through the stiffness model (winches locked, ``k_i = EA / L_i``; Behzadipour and Khajepour
2006): with ``t_i = k_i (L_i(q) - L0_i)``, ``J = -W^T`` and ``K`` the platform stiffness
(:func:`cablekit.stiffness.platform_stiffness`, elastic + geometric),
equilibrium gives ``dx = -K^-1 W K_c e`` and

    dt = -S e,   S = K_c - K_c W^T K^-1 W K_c,   K_c = diag(k)

(a self-stress: ``W dt = 0`` for the elastic part).  The worst case over the error box
``|e_j| <= delta_j`` is, per cable, exactly ``spread_i = sum_j |S_ij| delta_j`` (a linear
function's extreme on a box is at a vertex).  The pose margin becomes
``margin - max_i spread_i`` (conservative).  For m = n, ``S = 0`` to first order: length
errors move the pose (:mod:`cablekit.accuracy`), not the tensions.  A design whose winches hold
tensions says so in ``[control]`` (``winches = "tension"``, ``tension_accuracy = "3 N"``,
:func:`parse_control_section`): then each cable's spread is that accuracy instead.

Sampling
--------
Tensions are judged at the grid nodes only; the summary states the grid step and points per
axis, and the ``grid_resolution`` check warns below ``grid_points_per_axis_min``
(:mod:`cablekit.practice`).  Contact is also checked on the straight moves between
neighbouring nodes of the box grid (each orientation): cable pairs by bisection with a
Lipschitz bound (a cable point moves at most as far as the platform, so the gap changes by at
most ``2 |dp|`` along a move: a span whose end gaps sum to more than that is clear), cables
against obstacles and the platform body exactly, on the triangle each cable sweeps
(Akenine-Moller 2001, separating axes).  With an orientation range, the turns between
neighbouring orientations of its grid (at every position) are swept too, by bisection on the
same kind of bound (the attachment moves at most ``|b_i|`` times the summed angle changes):
cable pairs, obstacles and, in the platform frame, the body (a span is clear when a face plane of
the body has the attachment and every position of the exit on that span beyond it).

A **position** is covered when every orientation of the set is feasible there.
The **static workspace** uses gravity alone as the load (no wrench box, no extra wrench);
for a suspended rig (every exit above the task region) it is the classic static workspace.

Reason codes (a bit mask per pose, 0 = feasible)
------------------------------------------------
===  ==============  ===========================================================
bit  name            meaning
===  ==============  ===========================================================
1    slack           the best tensions leave a cable below its minimum tension
2    rope            the best tensions need more than a rope's working limit
4    motor           the best tensions need more than a winch motor can pull
8    interference    two cable segments closer than the sum of their radii
16   body            a cable passes through the platform body box
32   obstacle        a cable passes through a declared obstacle box
64   no_solution     no tensions balance the load at all (singular pose, e.g. an attachment at its exit)
128  stated          the best tensions need more than a tension limit stated in the design
256  length          length errors push a cable out of its window (m > n)
512  sweep           cables touch, or a cable hits the body or an obstacle, on a
                     move to a neighbouring grid node
===  ==============  ===========================================================

"Best tensions" are the max-margin tensions at the worst wrench of the box; the tension bits
name every cable that binds there (a pose can be slack on one cable and over the motor limit
on another).

Result file (``.npz``, written atomically)
------------------------------------------
A NumPy ``.npz`` archive, read with ``numpy.load(path, allow_pickle=False)`` (no pickled
objects inside).  ``format`` holds ``"cablekit-workspace/1"``; ``meta`` a JSON text (design
name, platform kind, cable names, limiting kinds, tension method, flags); the arrays keep
the names of the :class:`WorkspaceResult` fields (SI units: m, rad, N, N*m):
``poses`` (N, n), ``positions`` (P, 3), ``orientations`` (K, 3), ``orientation_index``,
``position_index`` (N,), ``from_box`` (P,), ``axis_x``/``axis_y``/``axis_z`` (empty when
only points were sampled), ``box_lower``/``box_upper`` (3,) (empty without a box),
``exits`` (m, 3), ``feasible``, ``margin``, ``static_feasible``, ``static_margin``,
``clearance`` (N,), ``tensions`` (N, m), ``limiting_cable`` (N,), ``reasons`` (N,) uint16,
``t_min``, ``t_max`` (m,), ``wrench_box``, ``extra_wrench`` (n,), ``rest_margin`` (N,) (the
margin without accelerations and length errors), ``length_spread`` (N, m), ``length_error``
(m,) [m]; ``meta`` also holds ``acceleration`` [m/s**2], the polytope's ``accel_overshoot``
and the sweep counts.

References
----------
Gouttefarde, M., Merlet, J.-P., Daney, D. "Wrench-feasible workspace of parallel cable-driven
mechanisms". IEEE ICRA 2007.
Ericson, C. *Real-Time Collision Detection*. Morgan Kaufmann, 2005, sec. 5.1.9 (closest
points of two segments) and sec. 5.3.3 (segment against an axis-aligned box, slab test).
Akenine-Moller, T. "Fast 3D triangle-box overlap testing". J. Graphics Tools 6(1), 2001.
Bosscher, P., Riechel, A. T., Ebert-Uphoff, I. "Wrench-feasible workspace generation for
cable-driven robots". IEEE Trans. Robotics 22(5), 2006.
Behzadipour, S., Khajepour, A. "Stiffness of cable-based parallel manipulators with
application to stability analysis". J. Mech. Design 128(1), 2006.
"""

from __future__ import annotations

import io
import json
import math
import zipfile
import zlib
from dataclasses import dataclass, fields
from pathlib import Path

import numpy as np

from .checks import Check, judge
from .design import atomic_write_bytes
from .kinematics import structure_matrix, zero_length_cables
from .practice import PRACTICE, practice_value
from .region import task_orientations, task_poses
from .statics import external_wrench, rotation_matrices, tension_limits
from .tension import distribute

__all__ = [
    "REASONS",
    "REASON_BITS",
    "COLOURS",
    "FORMAT",
    "WorkspaceResult",
    "compute_workspace",
    "load_workspace",
    "segment_distances",
    "segment_hits_box",
    "triangle_hits_box",
    "acceleration_polytope",
    "length_error_spread",
    "design_checks",
    "design_assumptions",
]

FORMAT = "cablekit-workspace/2"
CHUNK = 8192  # poses per step of the map (progress is reported after each)

# name -> (bit, label); the order is the order of precedence when one reason is shown
REASONS: dict[str, tuple[int, str]] = {
    "no_solution": (64, "no solution / singular pose"),
    "interference": (8, "cables touch each other"),
    "body": (16, "cable through the platform body"),
    "obstacle": (32, "cable through an obstacle"),
    "stated": (128, "over the stated tension limit"),
    "motor": (4, "over the motor limit"),
    "rope": (2, "over the rope limit"),
    "slack": (1, "a cable goes slack"),
    "length": (256, "length (or tension-control) errors push a cable out of its window"),
    "sweep": (512, "contact on a move between grid nodes"),
}
REASON_BITS = {k: v[0] for k, v in REASONS.items()}

# cablekit's own colours for workspace plots
COLOURS = {
    "feasible": "#2f9e77",
    "no_solution": "#1d1d1f",
    "interference": "#7b4fa0",
    "body": "#8a8f98",
    "obstacle": "#3b5b7a",
    "stated": "#b0478a",
    "motor": "#e0662b",
    "rope": "#a8232f",
    "slack": "#e8b93b",
    "length": "#c77dbb",
    "sweep": "#5a8fd6",
    "exit": "#20262e",
    "box": "#9aa5b1",
}

_CAUTION = ("Caution: a map of a simplified model (straight massless cables, fixed exit points). "
            "Suspended loads and loaded winches can hurt people; check the rig against local codes "
            "and have it reviewed by a qualified person before use.")


# --------------------------------------------------------------------------------------
# geometry
# --------------------------------------------------------------------------------------
def segment_distances(p1, q1, p2, q2) -> np.ndarray:
    """Least distance between segments ``p1-q1`` and ``p2-q2`` [m], batched (..., 3) -> (...).

    Closest points of two segments, clamped to both (Ericson 2005, sec. 5.1.9).
    """
    p1, q1, p2, q2 = (np.asarray(v, float) for v in (p1, q1, p2, q2))
    d1 = q1 - p1
    d2 = q2 - p2
    r = p1 - p2
    a = np.maximum(np.einsum("...k,...k->...", d1, d1), 1e-300)
    e = np.maximum(np.einsum("...k,...k->...", d2, d2), 1e-300)
    f = np.einsum("...k,...k->...", d2, r)
    c = np.einsum("...k,...k->...", d1, r)
    b = np.einsum("...k,...k->...", d1, d2)
    denom = a * e - b * b
    parallel = denom <= 1e-12 * a * e
    s = np.where(parallel, 0.0, np.clip((b * f - c * e) / np.where(parallel, 1.0, denom), 0.0, 1.0))
    t = (b * s + f) / e
    s = np.where(t < 0, np.clip(-c / a, 0.0, 1.0), np.where(t > 1, np.clip((b - c) / a, 0.0, 1.0), s))
    t = np.clip(t, 0.0, 1.0)
    gap = (p1 + s[..., None] * d1) - (p2 + t[..., None] * d2)
    return np.sqrt(np.einsum("...k,...k->...", gap, gap))


def segment_hits_box(p, q, lower, upper) -> np.ndarray:
    """True where segment ``p-q`` meets the closed axis-aligned box [lower, upper] (slab test).

    ``p``, ``q`` (..., 3) [m]; ``lower``, ``upper`` (3,) or broadcastable (..., 3) [m]
    (Ericson 2005, sec. 5.3.3).  Segments whose bounding box misses the box are rejected
    first (cheap), the slab test runs only on the rest.
    """
    p, q, lo, hi = np.broadcast_arrays(np.asarray(p, float), np.asarray(q, float), np.asarray(lower, float),
                                       np.asarray(upper, float))
    cand = np.all((np.minimum(p, q) <= hi) & (np.maximum(p, q) >= lo), axis=-1)
    out = np.zeros(cand.shape, bool)
    if np.any(cand):
        out[cand] = _slab_test(p[cand], q[cand], lo[cand], hi[cand])
    return out


def _slab_test(p, q, lo, hi) -> np.ndarray:
    d = q - p
    small = np.abs(d) < 1e-15
    dd = np.where(small, 1.0, d)
    t1 = (lo - p) / dd
    t2 = (hi - p) / dd
    tn = np.where(small, -np.inf, np.minimum(t1, t2))
    tf = np.where(small, np.inf, np.maximum(t1, t2))
    inside_slab = (p >= lo) & (p <= hi)
    ok_axis = ~small | inside_slab
    t_enter = np.maximum(np.max(tn, axis=-1), 0.0)
    t_exit = np.minimum(np.min(tf, axis=-1), 1.0)
    return np.all(ok_axis, axis=-1) & (t_enter <= t_exit)


def triangle_hits_box(v0, v1, v2, lower, upper) -> np.ndarray:
    """True where triangle ``v0 v1 v2`` meets the closed axis-aligned box [lower, upper].

    ``v0``, ``v1``, ``v2`` (..., 3) [m]; ``lower``, ``upper`` broadcastable (..., 3) [m].
    Separating-axis test on the 13 axes (3 box normals, the triangle normal, 9 edge x box-axis
    products; Akenine-Moller 2001).  A degenerate triangle (a segment or a point) works too: its
    zero axes separate nothing and the remaining ones are the segment's full set.  Triangles whose
    bounding box misses the box are rejected first (cheap), the full test runs on the rest.
    """
    v0, v1, v2, lo, hi = np.broadcast_arrays(*(np.asarray(v, float) for v in (v0, v1, v2, lower, upper)))
    cand = np.all((np.minimum(np.minimum(v0, v1), v2) <= hi) & (np.maximum(np.maximum(v0, v1), v2) >= lo), axis=-1)
    out = np.zeros(cand.shape, bool)
    if np.any(cand):
        out[cand] = _triangle_sat(v0[cand], v1[cand], v2[cand], lo[cand], hi[cand])
    return out


def _triangle_sat(v0, v1, v2, lo, hi) -> np.ndarray:
    c = 0.5 * (lo + hi)
    h = 0.5 * (hi - lo)
    a, b, d = v0 - c, v1 - c, v2 - c
    # box normals: the triangle's bounding box against the box
    sep = np.any((np.minimum(np.minimum(a, b), d) > h) | (np.maximum(np.maximum(a, b), d) < -h), axis=-1)
    edges = (b - a, d - b, a - d)
    axes = [np.cross(edges[0], edges[1])]
    eye = np.eye(3)
    for e in edges:
        axes += [np.cross(e, eye[k]) for k in range(3)]
    for ax in axes:
        pa, pb, pd = (np.einsum("...k,...k->...", v, ax) for v in (a, b, d))
        r = np.einsum("...k,...k->...", h, np.abs(ax))
        tol = 1e-12 * (np.abs(pa) + np.abs(pb) + np.abs(pd) + r)
        sep |= (np.minimum(np.minimum(pa, pb), pd) > r + tol) | (np.maximum(np.maximum(pa, pb), pd) < -r - tol)
    return ~sep


def acceleration_polytope(level: int = 1) -> tuple[np.ndarray, float]:
    """Vertices (k, 3) of a polytope that contains the unit ball, and how far out they reach.

    A geodesic polyhedron (the icosahedron with each face split into ``4**level`` triangles,
    vertices pushed onto the sphere) scaled so that its nearest face touches the unit sphere:
    every direction of the ball is inside, the vertices lie ``overshoot`` (> 1) from the centre.
    ``level=1``: 42 vertices, overshoot 1.0705; ``level=0``: 12 vertices, 1.2584.
    """
    from scipy.spatial import ConvexHull

    t = 0.5 * (1.0 + math.sqrt(5.0))
    v = np.array([(-1, t, 0), (1, t, 0), (-1, -t, 0), (1, -t, 0), (0, -1, t), (0, 1, t), (0, -1, -t), (0, 1, -t),
                  (t, 0, -1), (t, 0, 1), (-t, 0, -1), (-t, 0, 1)], float)
    v /= np.linalg.norm(v, axis=1)[:, None]
    for _ in range(level):
        faces = ConvexHull(v).simplices
        mids = {}
        for f in faces:
            for i, j in ((f[0], f[1]), (f[1], f[2]), (f[2], f[0])):
                key = (min(i, j), max(i, j))
                if key not in mids:
                    mid = v[i] + v[j]
                    mids[key] = mid / np.linalg.norm(mid)
        v = np.vstack([v, np.array(list(mids.values()))])
    hull = ConvexHull(v)
    inradius = float(np.min(-hull.equations[:, 3]))  # unit outward normals: n . x + d <= 0 inside
    return v / inradius, 1.0 / inradius


def length_error_spread(design, poses, tensions, errors) -> np.ndarray:
    """Worst-case tension change of each cable from unstretched-length errors [N], (N, m).

    ``errors`` (m,) or (N, m): half-widths ``delta`` of each cable's length error [m].
    ``spread_i = sum_j |S_ij| delta_j`` with ``S = K_c - K_c W^T K^-1 W K_c`` (see the module
    notes; Behzadipour and Khajepour 2006 for ``K``).  Poses whose stiffness is singular or whose
    tensions are not finite get ``inf``.  For m = n the elastic ``S`` vanishes; this function
    still returns the (second-order) geometric remainder.
    """
    from .stiffness import platform_stiffness

    q = np.asarray(poses, float)
    t = np.asarray(tensions, float)
    good = np.all(np.isfinite(t), axis=1)
    out = np.full(t.shape, np.inf)
    if not np.any(good):
        return out
    q, tg = q[good], t[good]
    ps = platform_stiffness(design, q, tg)
    W = structure_matrix(design, q)
    k = ps.cable_stiffness
    WK = W * k[:, None, :]  # W K_c (N, n, m)
    K = ps.total
    # a stiffness matrix that is singular, or nearly so, gives no bound: inf (checked on its determinant
    # against the product of its diagonal, cheaper than a condition number per pose)
    scale = np.prod(np.abs(np.diagonal(K, axis1=1, axis2=2)), axis=1)
    ok = np.abs(np.linalg.det(K)) > 1e-12 * np.maximum(scale, 1e-300)
    X = np.linalg.solve(np.where(ok[:, None, None], K, np.eye(K.shape[1])), WK)  # K^-1 W K_c
    S = k[:, :, None] * np.eye(design.m) - np.swapaxes(WK, 1, 2) @ X
    delta = np.broadcast_to(np.asarray(errors, float), t.shape)[good]
    sp = np.einsum("nij,nj->ni", np.abs(S), delta)
    sp[~ok] = np.inf
    out[good] = sp
    return out


def _cable_pairs(design) -> list[tuple[int, int]]:
    """Pairs of cables that may touch: those sharing no end point (by design they meet there)."""
    a, b = design.exits, design.attachments
    pairs = []
    for i in range(design.m):
        for j in range(i + 1, design.m):
            if np.linalg.norm(a[i] - a[j]) > 1e-9 and np.linalg.norm(b[i] - b[j]) > 1e-9:
                pairs.append((i, j))
    return pairs


def _geometry(design, q, pairs):
    """Clearance [m] (N,) and body / obstacle hits (N,) for poses q."""
    N = len(q)
    a = design.exits  # (m, 3)
    b = design.attachments
    if design.dof == 6:
        R = rotation_matrices(q[:, 3:])
        rb = np.einsum("nij,mj->nmi", R, b)
    else:
        R = None
        rb = np.zeros((N, design.m, 3))
    att = q[:, None, :3] + rb  # attachment points in the world (N, m, 3)
    radius = 0.5 * design.cable.diameter
    clearance = np.full(N, np.inf)
    if pairs:
        clearance = np.min(_pair_clearance(design, att, *_pair_index(pairs), radius), axis=1)
    body = np.zeros(N, bool)
    half = np.asarray(design.platform.body_half_size, float)
    if design.dof == 6 and np.all(half > 0):
        # the cable in the platform frame runs from b_i to R^T (a_i - p); the attachment sits on the
        # body surface, so the box is shrunk by a hair: touching the surface is not passing through
        far = np.einsum("nji,nmj->nmi", R, a[None] - q[:, None, :3])
        shrink = 1e-6 * max(1.0, float(np.max(half)))
        body = np.any(segment_hits_box(np.broadcast_to(b, far.shape), far, -half + shrink, half - shrink), axis=1)
    obstacle = np.zeros(N, bool)
    for ob in design.frame.obstacles:
        lo = np.asarray(ob.lower) - radius
        hi = np.asarray(ob.upper) + radius
        obstacle |= np.any(segment_hits_box(att, np.broadcast_to(a, att.shape), lo, hi), axis=1)
    return clearance, body, obstacle


SWEEP_DEPTH = 14  # bisection levels for a cable pair on one move (2**-14 of the step)
_SWEEP_CHUNK = 4096  # moves per step


def _grid_moves(grid, K: int) -> np.ndarray:
    """(E, 2) pose indices of neighbouring box-grid nodes (along x, y, z) at each orientation."""
    if grid.shape is None:
        return np.zeros((0, 2), np.int64)
    idx = np.arange(int(np.prod(grid.shape))).reshape(grid.shape)
    out = []
    for ax in range(3):
        a = np.moveaxis(idx, ax, 0)
        if a.shape[0] > 1:
            out.append(np.column_stack([a[:-1].ravel(), a[1:].ravel()]))
    if not out:
        return np.zeros((0, 2), np.int64)
    pos = np.vstack(out)
    k = np.arange(K)
    return np.column_stack([(pos[:, 0, None] * K + k).ravel(), (pos[:, 1, None] * K + k).ravel()])


def _pair_index(pairs):
    """Index arrays (I, J) of the cable pairs."""
    return np.array([p[0] for p in pairs]), np.array([p[1] for p in pairs])


def _pair_clearance(design, att, I, J, radius):
    """(c, pairs) clearance of cable pairs for attachment points att (c, m, 3)."""
    a = design.exits
    return segment_distances(att[:, I], np.broadcast_to(a[I], att[:, I].shape),
                             att[:, J], np.broadcast_to(a[J], att[:, J].shape)) - 2 * radius


def _sweep_hits(design, qa, qb, pairs) -> np.ndarray:
    """(c,) True where a straight move qa -> qb (same orientation) brings cables into contact
    with each other, the platform body or an obstacle (see the module notes)."""
    c = len(qa)
    a = design.exits
    radius = 0.5 * design.cable.diameter
    if design.dof == 6:
        R = rotation_matrices(qa[:, 3:])
        rb = np.einsum("nij,mj->nmi", R, design.attachments)
    else:
        R = None
        rb = np.zeros((c, design.m, 3))
    pa, pb = qa[:, :3], qb[:, :3]
    att_a = pa[:, None] + rb
    att_b = pb[:, None] + rb
    hit = np.zeros(c, bool)
    for ob in design.frame.obstacles:
        hit |= np.any(triangle_hits_box(np.broadcast_to(a, att_a.shape), att_a, att_b,
                                        np.asarray(ob.lower) - radius, np.asarray(ob.upper) + radius), axis=1)
    half = np.asarray(design.platform.body_half_size, float)
    if design.dof == 6 and np.all(half > 0):
        fa = np.einsum("nji,nmj->nmi", R, a[None] - pa[:, None])
        fb = np.einsum("nji,nmj->nmi", R, a[None] - pb[:, None])
        shrink = 1e-6 * max(1.0, float(np.max(half)))
        hit |= np.any(triangle_hits_box(np.broadcast_to(design.attachments, fa.shape), fa, fb, -half + shrink,
                                        half - shrink), axis=1)
    if not pairs:
        return hit
    I, J = _pair_index(pairs)
    c0 = _pair_clearance(design, att_a, I, J, radius)
    c1 = _pair_clearance(design, att_b, I, J, radius)
    D = 2.0 * np.linalg.norm(pb - pa, axis=1)  # the gap changes at most this much over the move
    hit |= np.any((c0 < 0) | (c1 < 0), axis=1)
    e, k = np.nonzero((c0 + c1 < D[:, None]) & ~hit[:, None])
    s0, s1 = np.zeros(len(e)), np.ones(len(e))
    g0, g1 = c0[e, k], c1[e, k]
    for _ in range(SWEEP_DEPTH):
        if not len(e):
            break
        keep = ~hit[e]
        e, k, s0, s1, g0, g1 = e[keep], k[keep], s0[keep], s1[keep], g0[keep], g1[keep]
        if not len(e):
            break
        sm = 0.5 * (s0 + s1)
        att = (pa[e] + sm[:, None] * (pb[e] - pa[e]))[:, None] + rb[e]
        gm = segment_distances(att[np.arange(len(e)), I[k]], a[I[k]], att[np.arange(len(e)), J[k]], a[J[k]]) \
            - 2 * radius
        hit[e[gm < 0]] = True
        half_len = 0.5 * (s1 - s0) * D[e]
        left = (gm >= 0) & (g0 + gm < half_len)
        right = (gm >= 0) & (gm + g1 < half_len)
        e = np.concatenate([e[left], e[right]])
        k = np.concatenate([k[left], k[right]])
        s0, s1 = np.concatenate([s0[left], sm[right]]), np.concatenate([sm[left], s1[right]])
        g0, g1 = np.concatenate([g0[left], gm[right]]), np.concatenate([gm[left], g1[right]])
    hit[e] = True  # not cleared after SWEEP_DEPTH halvings: taken as contact (conservative)
    return hit


def _orientation_neighbours(oris, orientation_range, samples) -> np.ndarray:
    """(E, 2) indices of orientations one range step apart in exactly one angle (both on the range
    grid of ``task.orientation_range``); empty without a range."""
    if orientation_range is None or len(oris) < 2:
        return np.zeros((0, 2), np.int64)
    lo = np.array([r[0] for r in orientation_range])
    hi = np.array([r[1] for r in orientation_range])
    step = (hi - lo) / (samples - 1)
    tol = 1e-9 * max(1.0, float(np.max(np.abs(hi))))
    idx = np.where(step > 0, (oris - lo) / np.where(step > 0, step, 1.0), 0.0)
    on = np.all((np.abs(idx - np.round(idx)) * np.where(step > 0, step, 0.0) <= tol) & (oris >= lo - tol)
                & (oris <= hi + tol), axis=1)
    cand = np.flatnonzero(on)
    g = np.round(idx[cand]).astype(np.int64)
    diff = np.abs(g[:, None, :] - g[None, :, :])
    i, j = np.nonzero((np.sum(diff, axis=2) == 1) & (np.arange(len(cand))[:, None] < np.arange(len(cand))[None, :]))
    return np.column_stack([cand[i], cand[j]])


def _turn_hits(design, qa, qb, pairs) -> np.ndarray:
    """(c,) True where a move qa -> qb that turns the platform (angles interpolated linearly) brings
    cables into contact with each other, an obstacle or the platform body.

    Bisection on a Lipschitz bound: over a span of the move, attachment i moves at most
    ``|dp| + |b_i| (|d roll| + |d pitch| + |d yaw|)`` times the span (each Euler angle turns the
    platform about a unit axis), and every point of the cable at most as far.  A cable pair is
    clear on a span when its end gaps sum to more than the two cables' motion over it; a cable is
    clear of a box on a span when the cable at the span's middle misses the box grown by half that
    motion.  Spans not cleared after ``SWEEP_DEPTH`` halvings count as contact (conservative).
    """
    c = len(qa)
    a = design.exits
    b = design.attachments
    radius = 0.5 * design.cable.diameter
    dq = qb - qa
    motion = (np.linalg.norm(dq[:, :3], axis=1)[:, None]
              + np.linalg.norm(b, axis=1)[None, :] * np.sum(np.abs(dq[:, 3:]), axis=1)[:, None])  # (c, m)

    def att(rows, s):
        q = qa[rows] + s[:, None] * dq[rows]
        return q[:, None, :3] + np.einsum("nij,mj->nmi", rotation_matrices(q[:, 3:]), b)

    hit = np.zeros(c, bool)
    ends = (att(np.arange(c), np.zeros(c)), att(np.arange(c), np.ones(c)))
    # cable pairs
    if pairs:
        I, J = _pair_index(pairs)
        c0 = _pair_clearance(design, ends[0], I, J, radius)
        c1 = _pair_clearance(design, ends[1], I, J, radius)
        hit |= np.any((c0 < 0) | (c1 < 0), axis=1)
        D = motion[:, I] + motion[:, J]
        e, k = np.nonzero((c0 + c1 < D) & ~hit[:, None])
        s0, s1, g0, g1 = np.zeros(len(e)), np.ones(len(e)), c0[e, k], c1[e, k]
        for _ in range(SWEEP_DEPTH):
            keep = ~hit[e]
            e, k, s0, s1, g0, g1 = e[keep], k[keep], s0[keep], s1[keep], g0[keep], g1[keep]
            if not len(e):
                break
            sm = 0.5 * (s0 + s1)
            pt = att(e, sm)
            r = np.arange(len(e))
            gm = segment_distances(pt[r, I[k]], a[I[k]], pt[r, J[k]], a[J[k]]) - 2 * radius
            hit[e[gm < 0]] = True
            half_len = 0.5 * (s1 - s0) * D[e, k]
            left = (gm >= 0) & (g0 + gm < half_len)
            right = (gm >= 0) & (gm + g1 < half_len)
            e, k = np.concatenate([e[left], e[right]]), np.concatenate([k[left], k[right]])
            s0, s1 = np.concatenate([s0[left], sm[right]]), np.concatenate([sm[left], s1[right]])
            g0, g1 = np.concatenate([g0[left], gm[right]]), np.concatenate([gm[left], g1[right]])
        hit[e] = True
    # obstacles
    for ob in design.frame.obstacles:
        lo, hi = np.asarray(ob.lower) - radius, np.asarray(ob.upper) + radius

        def obstacle_step(e, i, s0, s1, sm, lo=lo, hi=hi):
            pt = att(e, sm)[np.arange(len(e)), i]
            hit[e[segment_hits_box(a[i], pt, lo, hi)]] = True
            grow = (0.5 * (s1 - s0) * motion[e, i])[:, None]
            return segment_hits_box(a[i], pt, lo - grow, hi + grow)

        _bisect_moves(hit, design.m, obstacle_step)
    # the platform body, in the platform frame: the cable runs from b_i to f(s) = R(s)^T (a_i - p(s)),
    # and f moves at most |a_i - p| (summed angle changes) + |dp| per unit of the move.  On a span, the
    # cables lie in the hull of b_i and the ball around f(middle); a face plane of the body with that
    # hull on its outer side separates them (a sufficient test, so the answer stays conservative).
    half = np.asarray(design.platform.body_half_size, float)
    if design.dof == 6 and np.all(half > 0):
        shrink = 1e-6 * max(1.0, float(np.max(half)))
        hb = half - shrink
        shift = np.linalg.norm(dq[:, :3], axis=1)[:, None]  # (c, 1)
        far_motion = ((np.linalg.norm(a[None] - qa[:, None, :3], axis=2) + shift)
                      * np.sum(np.abs(dq[:, 3:]), axis=1)[:, None] + shift)  # |d f / d s| bound (c, m)

        def far(rows, cab, s):
            q = qa[rows] + s[:, None] * dq[rows]
            return np.einsum("nji,nj->ni", rotation_matrices(q[:, 3:]), a[cab] - q[:, :3])

        def body_step(e, i, s0, s1, sm):
            fm = far(e, i, sm)
            hit[e[segment_hits_box(b[i], fm, -hb, hb)]] = True
            rho = 0.5 * (s1 - s0) * far_motion[e, i]
            # separated by a face x_k = +-hb_k: b_i and the whole ball beyond the plane
            sep = np.zeros(len(e), bool)
            for k in range(3):
                sep |= (b[i, k] > hb[k]) & (fm[:, k] - rho > hb[k])
                sep |= (b[i, k] < -hb[k]) & (fm[:, k] + rho < -hb[k])
            return ~sep

        _bisect_moves(hit, design.m, body_step)
    return hit


def _bisect_moves(hit, m, step) -> None:
    """Bisect every (move, cable) span not yet marked in ``hit`` (moves,) down to SWEEP_DEPTH.

    ``step(e, i, s0, s1, sm)`` gets the spans' moves ``e``, cables ``i``, ends and middles (as
    fractions of the move), marks the moves it finds hit in ``hit`` and returns the spans that
    may still hit (they are split in two); what is left after the last level counts as hit
    (conservative)."""
    e, i = np.nonzero(np.ones((len(hit), m), bool) & ~hit[:, None])
    s0, s1 = np.zeros(len(e)), np.ones(len(e))
    for _ in range(SWEEP_DEPTH + 1):
        keep = ~hit[e]
        e, i, s0, s1 = e[keep], i[keep], s0[keep], s1[keep]
        if not len(e):
            break
        sm = 0.5 * (s0 + s1)
        split = step(e, i, s0, s1, sm) & ~hit[e]
        e, i = np.concatenate([e[split], e[split]]), np.concatenate([i[split], i[split]])
        s0, s1 = np.concatenate([s0[split], sm[split]]), np.concatenate([sm[split], s1[split]])
    hit[e] = True


def _sweeps(design, grid, K, node_bad, pairs, turns=None):
    """Check every move between neighbouring grid nodes whose ends are clear: along x, y, z at each
    orientation, and (``turns``: (E, 2) orientation indices) between neighbouring orientations of the
    range at each position.

    Returns (per-pose mask of poses on a failing move, moves checked, failing moves (F, 2))."""
    moves = _grid_moves(grid, K)
    n_shift = len(moves)
    if turns is not None and len(turns):
        P = len(grid.positions)
        base = np.arange(P)[:, None] * K
        moves = np.vstack([moves, np.column_stack([(base + turns[:, 0]).ravel(), (base + turns[:, 1]).ravel()])])
    shift = np.arange(len(moves)) < n_shift
    ok = ~(node_bad[moves[:, 0]] | node_bad[moves[:, 1]])
    moves, shift = moves[ok], shift[ok]
    bad = np.zeros(len(node_bad), bool)
    failed = []
    for s in range(0, len(moves), _SWEEP_CHUNK):
        mv, sh = moves[s:s + _SWEEP_CHUNK], shift[s:s + _SWEEP_CHUNK]
        h = np.zeros(len(mv), bool)
        if np.any(sh):
            h[sh] = _sweep_hits(design, grid.poses[mv[sh, 0]], grid.poses[mv[sh, 1]], pairs)
        if np.any(~sh):
            h[~sh] = _turn_hits(design, grid.poses[mv[~sh, 0]], grid.poses[mv[~sh, 1]], pairs)
        bad[mv[h].ravel()] = True
        failed.append(mv[h])
    failed = np.vstack(failed) if failed else np.zeros((0, 2), np.int64)
    return bad, len(moves), failed


# --------------------------------------------------------------------------------------
# the result
# --------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)  # arrays inside: compare fields explicitly
class WorkspaceResult:
    """Per-pose verdicts over the task region (SI units; see the module notes for fields)."""

    design_name: str
    kind: str
    cable_names: tuple[str, ...]
    limited_by: tuple[str, ...]
    method: str
    suspended: bool
    step: float
    poses: np.ndarray
    positions: np.ndarray
    orientations: np.ndarray
    orientation_index: np.ndarray
    position_index: np.ndarray
    from_box: np.ndarray
    axes: tuple[np.ndarray, np.ndarray, np.ndarray] | None
    box_lower: np.ndarray | None
    box_upper: np.ndarray | None
    exits: np.ndarray
    feasible: np.ndarray
    margin: np.ndarray
    static_feasible: np.ndarray
    static_margin: np.ndarray
    clearance: np.ndarray
    tensions: np.ndarray
    limiting_cable: np.ndarray
    reasons: np.ndarray
    t_min: np.ndarray
    t_max: np.ndarray
    wrench_box: np.ndarray
    extra_wrench: np.ndarray
    lp_poses: int = 0
    acceleration: float = 0.0  # a_max [m/s**2] of the acceleration ball
    accel_overshoot: float = 1.0  # the enclosing polytope's vertices lie this many a_max out
    rest_margin: np.ndarray | None = None  # (N,) margin without accelerations and length errors [N]
    length_spread: np.ndarray | None = None  # (N, m) worst tension change from length errors [N]
    length_error: np.ndarray | None = None  # (m,) length-error half-widths used [m]
    sweep_moves: int = 0  # moves between neighbouring grid nodes checked for contact
    sweep_failures: np.ndarray | None = None  # (F, 2) pose indices of the moves that failed
    winch_control: str = "length"  # what the winches hold: "length" or "tension" ([control])

    @property
    def points_per_axis(self) -> tuple[int, int, int] | None:
        """Grid points along x, y, z of the task box (``None`` without a box)."""
        return None if self.axes is None else tuple(len(a) for a in self.axes)

    def max_length_spread(self) -> np.ndarray:
        """(m,) the largest tension spread from length errors of each cable over the poses [N]
        (zeros for m = n or without length errors; inf where a pose's stiffness is singular)."""
        sp = self.length_spread
        if sp is None or not sp.size:
            return np.zeros(len(self.cable_names))
        return np.max(sp, axis=0)

    # -- derived views ------------------------------------------------------------------
    @property
    def n_poses(self) -> int:
        return len(self.poses)

    @property
    def position_feasible(self) -> np.ndarray:
        """(P,) True where every orientation is feasible."""
        out = np.ones(len(self.positions), bool)
        np.logical_and.at(out, self.position_index, self.feasible)
        return out

    @property
    def position_static_feasible(self) -> np.ndarray:
        out = np.ones(len(self.positions), bool)
        np.logical_and.at(out, self.position_index, self.static_feasible)
        return out

    @property
    def position_margin(self) -> np.ndarray:
        """(P,) least tension margin over the orientations [N]."""
        out = np.full(len(self.positions), np.inf)
        np.minimum.at(out, self.position_index, self.margin)
        return out

    @property
    def coverage(self) -> float:
        """Share of the task positions (box grid and points) covered, in [0, 1]."""
        return float(np.mean(self.position_feasible)) if len(self.positions) else 0.0

    @property
    def box_volume(self) -> float:
        """Volume of the task box [m**3] (0 without a box)."""
        if self.box_lower is None:
            return 0.0
        return float(np.prod(np.asarray(self.box_upper) - np.asarray(self.box_lower)))

    @property
    def feasible_volume(self) -> float:
        """Covered share of the box grid times the box volume [m**3] (a node-count estimate)."""
        fb = self.from_box
        if not np.any(fb):
            return 0.0
        return float(np.mean(self.position_feasible[fb])) * self.box_volume

    def reason_counts(self) -> dict[str, int]:
        """Number of poses failing for each reason (a pose may count under several)."""
        return {k: int(np.count_nonzero(self.reasons & bit)) for k, bit in REASON_BITS.items()}

    def primary_reason(self) -> np.ndarray:
        """(N,) the first reason in :data:`REASONS` order, or "feasible"."""
        out = np.full(self.n_poses, "feasible", dtype=object)
        for name in reversed(list(REASONS)):
            out[(self.reasons & REASON_BITS[name]) != 0] = name
        return out

    def position_status(self) -> np.ndarray:
        """(P,) "feasible" or the primary reason of the worst orientation at each position."""
        prim = self.primary_reason()
        worst = np.full(len(self.positions), -1)
        order = np.argsort(self.margin)[::-1]  # write the worst last
        fail = ~self.feasible[order]
        worst[self.position_index[order[fail]]] = order[fail]
        return np.where(worst >= 0, prim[np.maximum(worst, 0)], "feasible").astype(object)

    # -- text -----------------------------------------------------------------------------
    def summary(self) -> list[str]:
        """Summary lines for the command line, the widgets and the review sheet."""
        P, K, N = len(self.positions), len(self.orientations), self.n_poses
        lines = [f"Workspace of {self.design_name}"]
        grid = f"{P:,} positions" + (f" x {K} orientations = {N:,} poses" if self.kind == "rigid" else "")
        ppa = self.points_per_axis
        per_axis = f", {' x '.join(map(str, ppa))} points along x, y, z" if ppa is not None else ""
        lines.append(f"  sampled  : {grid}, grid step {self.step * 1e3:g} mm{per_axis}")
        load = "gravity"
        if np.any(self.extra_wrench != 0):
            load += " + extra wrench (" + ", ".join(f"{v:g}" for v in self.extra_wrench) + ")"
        if np.any(self.wrench_box > 0):
            f = ", ".join(f"{v:g}" for v in self.wrench_box[:3])
            load += f" + wrench box +/-({f}) N"
            if len(self.wrench_box) == 6:
                load += " +/-(" + ", ".join(f"{v:g}" for v in self.wrench_box[3:]) + ") N*m"
        if self.acceleration > 0:
            how = "exact over the ball" if self.accel_overshoot == 1.0 else \
                f"polytope, vertices {100 * (self.accel_overshoot - 1):.1f} % beyond"
            load += f" + accelerations up to {self.acceleration:g} m/s^2 in any direction ({how})"
        lines.append(f"  load     : {load}")
        redundant = len(self.cable_names) > len(self.extra_wrench)
        if redundant and self.winch_control == "tension" and self.length_spread is not None:
            lines.append(f"  tensions : tension-controlled winches, each within +/-{np.max(self.max_length_spread()):g} N "
                         "of its set tension")
        elif self.length_error is not None and np.any(self.length_error > 0) and self.length_spread is not None \
                and redundant:
            sp = self.max_length_spread()
            lines.append(f"  lengths  : length errors +/-{np.max(self.length_error) * 1e3:.2f} mm (length control) "
                         "shift tensions by up to " + ", ".join(f"{n} {v:.1f} N" for n, v in zip(self.cable_names, sp)))
        if self.sweep_moves:
            nf = 0 if self.sweep_failures is None else len(self.sweep_failures)
            kinds = " (shifts, and turns within the orientation range)" if self.kind == "rigid" else ""
            lines.append(f"  moves    : {self.sweep_moves:,} moves between neighbouring nodes{kinds} checked for contact, "
                         f"{nf:,} fail")
        pf = self.position_feasible
        lines.append(f"  covered  : {int(pf.sum()):,} of {P:,} task positions ({100 * self.coverage:.1f} %)")
        if self.box_lower is not None:
            lines.append(f"  volume   : {self.feasible_volume:.3g} m^3 feasible of a {self.box_volume:.3g} m^3 task box")
        ps = self.position_static_feasible
        tag = "suspended rig, " if self.suspended else ""
        lines.append(f"  static   : {tag}gravity only: {int(ps.sum()):,} of {P:,} positions ({100 * np.mean(ps):.1f} %)")
        ok = self.feasible
        if np.any(ok):
            k = int(np.argmin(np.where(ok, self.margin, np.inf)))
            lines.append(f"  margin   : least tension margin on feasible poses {self.margin[k]:.1f} N "
                         f"(cable {self.cable_names[self.limiting_cable[k]]} at {self._pose_text(k)})")
        counts = {k: v for k, v in self.reason_counts().items() if v}
        if counts:
            lines.append("  failing  : " + ", ".join(f"{REASONS[k][1]} {v:,}" for k, v in counts.items())
                         + f" (of {int(np.count_nonzero(~ok)):,} failing poses)")
        if np.any(np.isfinite(self.clearance)):
            lines.append(f"  clearance: least gap between cables {np.min(self.clearance) * 1e3:.1f} mm")
        lines.append("  limits   : " + ", ".join(f"{n} {lo:g}..{hi:.1f} N ({by})" for n, lo, hi, by in
                                                  zip(self.cable_names, self.t_min, self.t_max, self.limited_by)))
        lines.append(f"  method   : {self.method}")
        lines.append(f"  {_CAUTION}")
        return lines

    def _pose_text(self, k: int) -> str:
        q = self.poses[k]
        txt = "(" + ", ".join(f"{v:.3f}" for v in q[:3]) + ") m"
        if len(q) == 6:
            txt += ", (" + ", ".join(f"{math.degrees(v):.1f}" for v in q[3:]) + ") deg"
        return txt

    # -- plots ----------------------------------------------------------------------------
    def figure(self, kind: str = "scatter", *, orientation: int | None = None, levels: int = 4):
        """A plotly figure of the map.

        kind : "scatter" (3-D positions coloured by status, with exits and the task box) or
        "slices" (least tension margin [N] on a few horizontal slices of the box grid).
        orientation : show one orientation of the set instead of the worst over all.
        levels : number of slices for ``kind="slices"``.
        """
        if kind == "scatter":
            return self._figure_scatter(orientation)
        if kind == "slices":
            return self._figure_slices(orientation, levels)
        raise ValueError(f"figure kind must be 'scatter' or 'slices', got {kind!r}")

    def _per_position(self, orientation):
        if orientation is None:
            return self.position_status(), self.position_margin
        if not 0 <= orientation < len(self.orientations):
            raise ValueError(f"orientation must be 0..{len(self.orientations) - 1}, got {orientation}")
        sel = self.orientation_index == orientation
        status = np.full(len(self.positions), "feasible", dtype=object)
        margin = np.full(len(self.positions), np.nan)
        status[self.position_index[sel]] = self.primary_reason()[sel]
        margin[self.position_index[sel]] = self.margin[sel]
        return status, margin

    def _title(self, orientation) -> str:
        if orientation is None or self.kind != "rigid":
            what = "worst orientation" if self.kind == "rigid" else "point platform"
        else:
            what = "orientation " + ", ".join(f"{math.degrees(v):.0f}" for v in self.orientations[orientation]) + " deg"
        return f"{self.design_name}: {100 * self.coverage:.1f} % of task positions covered ({what})"

    def _figure_scatter(self, orientation):
        import plotly.graph_objects as go

        status, margin = self._per_position(orientation)
        fig = go.Figure()
        for name in ["feasible", *REASONS]:
            sel = status == name
            if not np.any(sel):
                continue
            label = "feasible" if name == "feasible" else REASONS[name][1]
            xyz = self.positions[sel]
            fig.add_trace(go.Scatter3d(
                x=xyz[:, 0], y=xyz[:, 1], z=xyz[:, 2], mode="markers", name=f"{label} ({int(sel.sum())})",
                marker=dict(size=3 if name == "feasible" else 4, color=COLOURS[name],
                            opacity=0.55 if name == "feasible" else 0.9),
                customdata=margin[sel], hovertemplate="x %{x:.3f} m<br>y %{y:.3f} m<br>z %{z:.3f} m<br>"
                                                      "margin %{customdata:.1f} N<extra>" + label + "</extra>"))
        e = self.exits
        fig.add_trace(go.Scatter3d(x=e[:, 0], y=e[:, 1], z=e[:, 2], mode="markers+text", name="cable exits",
                                   text=list(self.cable_names), textposition="top center",
                                   marker=dict(size=5, symbol="diamond", color=COLOURS["exit"])))
        if self.box_lower is not None:
            x, y, z = _box_edges(self.box_lower, self.box_upper)
            fig.add_trace(go.Scatter3d(x=x, y=y, z=z, mode="lines", name="task box",
                                       line=dict(color=COLOURS["box"], width=3), hoverinfo="skip"))
        fig.update_layout(title=self._title(orientation), legend=dict(itemsizing="constant"),
                          scene=dict(aspectmode="data", xaxis_title="x [m]", yaxis_title="y [m]",
                                     zaxis_title="z [m]"), margin=dict(l=0, r=0, t=40, b=0))
        return fig

    def _figure_slices(self, orientation, levels):
        import plotly.graph_objects as go
        from plotly.subplots import make_subplots

        if self.axes is None:
            raise ValueError("slices need a task box grid; this map has task points only")
        _, margin = self._per_position(orientation)
        nx, ny, nz = (len(a) for a in self.axes)
        grid = margin[self.from_box].reshape(nx, ny, nz)
        ks = np.unique(np.linspace(0, nz - 1, max(1, min(levels, nz))).round().astype(int))
        fig = make_subplots(rows=1, cols=len(ks), shared_yaxes=True,
                            subplot_titles=[f"z = {self.axes[2][k]:.3f} m" for k in ks])
        finite = grid[np.isfinite(grid)]
        lim = float(np.max(np.abs(finite))) if finite.size else 1.0
        lim = lim if lim > 0 else 1.0
        scale = [[0.0, COLOURS["rope"]], [0.5 - 1e-6, COLOURS["motor"]], [0.5, "#f4f1ea"], [1.0, COLOURS["feasible"]]]
        for c, k in enumerate(ks):
            fig.add_trace(go.Heatmap(x=self.axes[0], y=self.axes[1], z=grid[:, :, k].T, zmin=-lim, zmax=lim,
                                     colorscale=scale, showscale=(c == 0),
                                     colorbar=dict(title="margin [N]"),
                                     hovertemplate="x %{x:.3f} m<br>y %{y:.3f} m<br>margin %{z:.1f} N<extra></extra>"),
                          row=1, col=c + 1)
            fig.update_xaxes(title_text="x [m]", row=1, col=c + 1, scaleanchor=f"y{'' if c == 0 else c + 1}")
        fig.update_yaxes(title_text="y [m]", row=1, col=1)
        fig.update_layout(title=self._title(orientation) + "; tension margin, negative = infeasible",
                          margin=dict(l=40, r=20, t=70, b=40))
        return fig

    # -- file -----------------------------------------------------------------------------
    def save(self, path) -> Path:
        """Write the result to a ``.npz`` file atomically (see the module notes for the keys)."""
        meta = {"design_name": self.design_name, "kind": self.kind, "cable_names": list(self.cable_names),
                "limited_by": list(self.limited_by), "method": self.method, "suspended": bool(self.suspended),
                "step": float(self.step), "lp_poses": int(self.lp_poses),
                "acceleration": float(self.acceleration), "accel_overshoot": float(self.accel_overshoot),
                "sweep_moves": int(self.sweep_moves), "winch_control": self.winch_control,
                "reasons": {k: v[0] for k, v in REASONS.items()}}
        arrays = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name == "axes":
                for k, ax in zip("xyz", v if v is not None else ([], [], [])):
                    arrays[f"axis_{k}"] = np.asarray(ax, float)
            elif f.name in ("box_lower", "box_upper"):
                arrays[f.name] = np.asarray([] if v is None else v, float)
            elif isinstance(v, np.ndarray):
                arrays[f.name] = v
            elif f.name in _OPTIONAL_ARRAYS:
                arrays[f.name] = np.zeros((0,) * _OPTIONAL_ARRAYS[f.name])
        buf = io.BytesIO()
        np.savez_compressed(buf, format=np.array(FORMAT), meta=np.array(json.dumps(meta)), **arrays)
        return atomic_write_bytes(path, buf.getvalue())

    @classmethod
    def load(cls, path) -> "WorkspaceResult":
        return load_workspace(path)


def _box_edges(lo, hi):
    lo, hi = np.asarray(lo), np.asarray(hi)
    c = np.array([[lo[0], lo[1], lo[2]], [hi[0], lo[1], lo[2]], [hi[0], hi[1], lo[2]], [lo[0], hi[1], lo[2]]])
    top = c.copy()
    top[:, 2] = hi[2]
    xs, ys, zs = [], [], []
    for ring in (c, top):
        for p in [*ring, ring[0]]:
            xs.append(p[0]), ys.append(p[1]), zs.append(p[2])
        xs.append(None), ys.append(None), zs.append(None)
    for p, q in zip(c, top):
        xs += [p[0], q[0], None]
        ys += [p[1], q[1], None]
        zs += [p[2], q[2], None]
    return xs, ys, zs


_ARRAY_FIELDS = ("poses", "positions", "orientations", "orientation_index", "position_index", "from_box", "exits",
                 "feasible", "margin", "static_feasible", "static_margin", "clearance", "tensions",
                 "limiting_cable", "reasons", "t_min", "t_max", "wrench_box", "extra_wrench")
_OPTIONAL_ARRAYS = {"rest_margin": 1, "length_spread": 2, "length_error": 1, "sweep_failures": 2}  # name -> ndim


def load_workspace(path) -> WorkspaceResult:
    """Read a result file written by :meth:`WorkspaceResult.save`.

    Raises
    ------
    ValueError
        Not a cablekit workspace file, another format version, or missing / inconsistent arrays.
    """
    path = Path(path)
    try:
        with np.load(path, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except (OSError, ValueError, EOFError, zipfile.BadZipFile, zlib.error) as exc:
        raise ValueError(f"{path}: not a readable .npz workspace file ({exc})") from None
    fmt = str(data.get("format", ""))
    if fmt != FORMAT:
        raise ValueError(f"{path}: expected a {FORMAT!r} file, found format {fmt or 'none'!r}")
    missing = [k for k in (*_ARRAY_FIELDS, *_OPTIONAL_ARRAYS, "meta", "axis_x", "axis_y", "axis_z", "box_lower",
                           "box_upper") if k not in data]
    if missing:
        raise ValueError(f"{path}: missing arrays {', '.join(missing)}")
    try:
        meta = json.loads(str(data["meta"]))
        N = len(data["poses"])
        for k in ("feasible", "margin", "static_feasible", "static_margin", "clearance", "limiting_cable", "reasons",
                  "orientation_index", "position_index", "tensions"):
            if len(data[k]) != N:
                raise ValueError(f"array {k} has {len(data[k])} rows, expected {N}")
        axes = tuple(data[f"axis_{k}"] for k in "xyz")
        has_axes = all(len(a) for a in axes)
        return WorkspaceResult(
            design_name=str(meta["design_name"]), kind=str(meta["kind"]), cable_names=tuple(meta["cable_names"]),
            limited_by=tuple(meta["limited_by"]), method=str(meta["method"]), suspended=bool(meta["suspended"]),
            step=float(meta["step"]), lp_poses=int(meta.get("lp_poses", 0)),
            acceleration=float(meta["acceleration"]), accel_overshoot=float(meta["accel_overshoot"]),
            sweep_moves=int(meta["sweep_moves"]), winch_control=str(meta["winch_control"]),
            **{k: (data[k] if data[k].size or k == "sweep_failures" else None) for k in _OPTIONAL_ARRAYS},
            axes=axes if has_axes else None,
            box_lower=data["box_lower"] if len(data["box_lower"]) else None,
            box_upper=data["box_upper"] if len(data["box_upper"]) else None,
            **{k: data[k] for k in _ARRAY_FIELDS})
    except (KeyError, TypeError, json.JSONDecodeError) as exc:
        raise ValueError(f"{path}: damaged workspace file ({exc})") from None
    except ValueError as exc:
        raise ValueError(f"{path}: damaged workspace file ({exc})") from None


# --------------------------------------------------------------------------------------
# the computation
# --------------------------------------------------------------------------------------
def _suspended(design, positions) -> bool:
    """Every exit above every task position (along -gravity): gravity keeps the cables taut."""
    up = -np.asarray(design.frame.gravity_direction, float)
    return bool(np.min(design.exits @ up) > np.max(positions @ up))


def _accel_bound(W, G) -> np.ndarray:
    """(c,) ``max_i |row_i(W^+ G)|`` [N per m/s**2]: the margin lost to any acceleration of unit size.

    If ``t`` balances the load ``w`` with margin ``s``, then ``t + W^+ G a`` balances ``w - G a``
    (``W W^+ = I`` for a full-rank ``W``), so the margin under every ``|a| <= a_max`` is at least
    ``s - a_max max_i |row_i(W^+ G)|`` (Cauchy-Schwarz): a lower bound for the whole ball.
    Rank-deficient poses get ``inf`` (no bound).
    """
    WWt = W @ np.swapaxes(W, 1, 2)
    n = W.shape[1]
    det_ok = np.abs(np.linalg.det(WWt)) > 1e-12 * np.maximum(np.prod(np.diagonal(WWt, axis1=1, axis2=2), axis=1),
                                                             1e-300)
    X = np.linalg.solve(np.where(det_ok[:, None, None], WWt, np.eye(n)), G)
    rows = np.linalg.norm(np.swapaxes(W, 1, 2) @ X, axis=2)  # (c, m)
    return np.where(det_ok, np.max(rows, axis=1), np.inf)


@dataclass(frozen=True)
class WinchControl:
    """The ``[control]`` section: what the winches hold.

    winches : "length" (the default: encoders hold lengths, tensions follow from the stiffness)
    or "tension" (each winch holds a set tension); tension_accuracy : for tension control, how
    closely each winch holds its set tension (+/-) [N].
    """

    winches: str = "length"
    tension_accuracy: float = 0.0


def parse_control_section(raw, add_problem, path: str, design) -> WinchControl | None:
    """Parse ``[control]``: ``winches = "length" | "tension"`` and, for tension control,
    ``tension_accuracy = "3 N"``; every problem goes to ``add_problem(path, value, expected)``."""
    from collections.abc import Mapping

    from .units import UnitError, parse_quantity

    if not isinstance(raw, Mapping):
        add_problem(path, raw, "a table such as winches = 'tension' and tension_accuracy = '3 N'")
        return None
    ok = True
    for key in raw:
        if key not in ("winches", "tension_accuracy"):
            add_problem(f"{path}.{key}", raw[key], "unknown key; allowed here: tension_accuracy, winches")
            ok = False
    mode = raw.get("winches", "length")
    if mode not in ("length", "tension"):
        add_problem(f"{path}.winches", mode, "'length' (encoders hold lengths) or 'tension' (winches hold tensions)")
        return None
    acc = 0.0
    if mode == "tension":
        if "tension_accuracy" not in raw:
            add_problem(f"{path}.tension_accuracy", "missing", "tension control needs how closely each winch holds its "
                        "tension, a force such as '3 N'")
            return None
        try:
            acc = parse_quantity(raw["tension_accuracy"], "force", field=f"{path}.tension_accuracy")
        except UnitError as exc:
            add_problem(f"{path}.tension_accuracy", raw["tension_accuracy"], str(exc).split(": ", 1)[-1])
            return None
        if not math.isfinite(acc) or acc < 0:
            add_problem(f"{path}.tension_accuracy", raw["tension_accuracy"], "a finite force of zero or more")
            return None
    elif "tension_accuracy" in raw:
        add_problem(f"{path}.tension_accuracy", raw["tension_accuracy"], "only used with winches = 'tension'")
        return None
    return WinchControl(winches=mode, tension_accuracy=acc) if ok else None


def _control(design) -> WinchControl:
    ctl = design.sections.get("control") if design is not None else None
    return ctl if isinstance(ctl, WinchControl) else WinchControl()


def _square_ball_margin(W, G, res, box, a_max, t_min, t_max):
    """m = n: the exact margin over the wrench box plus the whole acceleration ball.

    The tensions are unique, ``t(w) = -W^-1 w``, so each cable's extremes over the box and the ball
    add: ``t_i +- (sum_k |(W^-1)_ik| box_k + a_max |row_i(W^-1 G)|)`` (the box by linearity, the ball
    by Cauchy-Schwarz).  Returns margin (c,), active lower / upper (c, m) and the limiting cable (c,);
    singular poses keep ``res``'s verdict (no tensions at all).
    """
    c, n, m = W.shape
    ok = np.isfinite(res.margin) & np.all(np.isfinite(res.tensions), axis=1)
    Winv = np.linalg.inv(np.where(ok[:, None, None], W, np.eye(n)))
    reach = np.abs(Winv) @ np.asarray(box, float) + a_max * np.linalg.norm(Winv @ G, axis=2)  # (c, m)
    T = np.where(ok[:, None], res.tensions, 0.0)
    lo = T - t_min - reach
    hi = t_max - T - reach
    slack = np.minimum(lo, hi)
    lim = np.argmin(slack, axis=1)
    margin = np.where(ok, slack[np.arange(c), lim], res.margin)
    act = ok[:, None] & ((slack < 0) | (np.arange(m) == lim[:, None]))
    act_lo = np.where(ok[:, None], act & (lo <= hi), res.active_lower)
    act_hi = np.where(ok[:, None], act & (hi < lo), res.active_upper)
    return margin, act_lo, act_hi, np.where(ok, lim, res.limiting_cable)


def _length_errors(design) -> np.ndarray:
    """(m,) half-widths of each cable's unstretched-length error under length control [m]:
    home length + (quantisation + deadband counts) x length per count, from the error budget."""
    from .accuracy import error_budget
    from .kinematics import length_per_count

    b = error_budget(design)
    lpc = length_per_count(design)
    dead = np.array([w.deadband_counts if b.deadband_counts is None else b.deadband_counts for w in design.winches],
                    float)
    return b.home_length + (b.quantisation_counts + dead) * lpc


def compute_workspace(design, *, step: float | None = None, orientations=None, extra_wrench=None,
                      acceleration: float | None = None, length_errors=None, sweep: bool = True,
                      progress=None, backend: str = "auto") -> WorkspaceResult:
    """Classify every pose of the task region.

    Parameters
    ----------
    design : Design
    step : grid step [m]; default ``design.task.step``.
    orientations : (K, 3) roll, pitch, yaw [rad] for rigid platforms; default the task's set
        (:func:`cablekit.region.task_orientations`: the list and the range).
    extra_wrench : (n,) constant wrench added to gravity [N, N*m] (e.g. a process force).
    acceleration : largest acceleration in any direction [m/s**2]; default
        ``design.task.acceleration`` (0: quasi-static).
    length_errors : (m,) or scalar half-widths of the cables' length errors [m] for redundant
        rigs; default from the ``[errors]`` budget (home length + quantisation + deadband).
        0 switches the length-error term off.
    sweep : check contact on the moves between neighbouring grid nodes.
    progress : optional callable ``progress(done, total)`` called after each chunk of poses.
    backend : tension backend, see :func:`cablekit.tension.distribute`.

    Returns
    -------
    WorkspaceResult

    Raises
    ------
    ValueError
        A non-positive or non-finite step, an empty task region or orientation set, a bad
        extra wrench, acceleration or length error (see :func:`cablekit.region.task_poses`).

    Notes
    -----
    See the module notes: the load set (gravity, wrench box, accelerations), the length-error
    spread ``dt = -(K_c - K_c W^T K^-1 W K_c) e`` and the sweep test.
    """
    from .stiffness import mass_matrix

    grid = task_poses(design, step=step, orientations=orientations)
    n, m = design.dof, design.m
    extra = np.zeros(n) if extra_wrench is None else np.asarray(extra_wrench, float).reshape(-1)
    if extra.shape != (n,) or not np.all(np.isfinite(extra)):
        raise ValueError(f"extra wrench must be {n} finite numbers [N{', N*m' if n == 6 else ''}], got {extra.tolist()}")
    a_max = float(design.task.acceleration if acceleration is None else acceleration)
    if not math.isfinite(a_max) or a_max < 0:
        raise ValueError(f"acceleration must be a finite, non-negative value [m/s^2], got {acceleration!r}")
    redundant = m > n
    control = _control(design)
    tension_held = control.winches == "tension" and length_errors is None  # an explicit length error wins
    dL = np.zeros(m)
    if redundant and not tension_held:
        dL = _length_errors(design) if length_errors is None else np.broadcast_to(
            np.asarray(length_errors, float), (m,)).copy()
        if not np.all(np.isfinite(dL)) or np.any(dL < 0):
            raise ValueError(f"length errors must be finite, non-negative lengths [m], got {dL.tolist()}")
    box = np.asarray(design.task.wrench_box[:n], float)
    wbox = box if np.any(box > 0) else None
    lim = tension_limits(design)
    pairs = _cable_pairs(design)
    q_all = grid.poses
    N = len(q_all)
    if a_max > 0:
        unit, overshoot = acceleration_polytope()
        accels = a_max * unit
        if m == n:
            overshoot = 1.0  # exact over the ball (see _square_ball_margin)
    else:
        accels, overshoot = np.zeros((0, 3)), 1.0
    out = {k: np.empty(N, t) for k, t in (("margin", float), ("static_margin", float), ("clearance", float),
                                          ("limiting_cable", np.int64), ("reasons", np.uint16),
                                          ("static_ok", bool), ("rest_margin", float), ("geom_bad", bool))}
    tensions = np.empty((N, m))
    spread = np.zeros((N, m))
    methods, lp_poses = set(), 0
    motor = np.array([x == "motor" for x in lim.limited_by])
    stated = np.array([x == "stated" for x in lim.limited_by])
    loaded = bool(wbox is not None or np.any(extra != 0) or a_max > 0)  # else the static map is the same map
    # poses whose acceleration bound stays above this need no polytope: they pass without a warning
    near_level = practice_value("tension_margin_warn", design.practice) * float(np.min(lim.t_max - lim.t_min))
    accel_solved = 0
    if progress is not None:
        progress(0, N)
    for s in range(0, N, CHUNK):
        e = min(N, s + CHUNK)
        q = q_all[s:e]
        W = structure_matrix(design, q)
        w_g = external_wrench(design, q)
        sing = np.any(zero_length_cables(design, q), axis=1)  # attachment at an exit: no solution / singular
        res = distribute(W, w_g + extra, lim.t_min, lim.t_max, wrench_box=wbox, backend=backend, singular=sing)
        stat = distribute(W, w_g, lim.t_min, lim.t_max, backend=backend, singular=sing) if loaded else res
        methods.add(res.method.split("; ")[1])
        lp_poses += int(res.by_lp.sum()) + (int(stat.by_lp.sum()) if loaded else 0)
        margin = res.margin.copy()
        act_lo, act_hi, lcable = res.active_lower.copy(), res.active_upper.copy(), res.limiting_cable.copy()
        worst = np.zeros(e - s)
        if redundant and tension_held:
            spread[s:e] = control.tension_accuracy
            worst = np.full(e - s, control.tension_accuracy)
        elif redundant and np.any(dL > 0):
            sp = length_error_spread(design, q, res.tensions, dL)
            spread[s:e] = sp
            worst = np.max(sp, axis=1)
        if len(accels) and m == n:
            G = mass_matrix(design, q)[:, :, :3]  # inertial wrench of an acceleration a: -G a
            margin, act_lo, act_hi, lcable = _square_ball_margin(W, G, res, box, a_max, lim.t_min, lim.t_max)
        elif len(accels):
            G = mass_matrix(design, q)[:, :, :3]  # inertial wrench of an acceleration a: -G a
            # a lower bound for the whole ball first; the polytope only where the bound comes near a verdict
            bound = res.margin - a_max * _accel_bound(W, G)
            # a pose failing at rest, or for its length errors alone, fails whatever the accelerations
            # add: no polytope (the first keeps the bound and its rest reasons, the second its rest
            # margin so that the length step below names it)
            settled = res.margin - worst < 0
            near = np.flatnonzero((bound - worst < near_level) & ~settled)
            margin = np.where(settled & (res.margin >= 0), res.margin, bound)
            if len(near):
                Wn, wn, Gn = W[near], (w_g + extra)[near], G[near]
                poly = res.margin[near].copy()
                lo_n, hi_n, lc_n = act_lo[near], act_hi[near], lcable[near]
                for acc in accels:
                    rv = distribute(Wn, wn - Gn @ acc, lim.t_min, lim.t_max, wrench_box=wbox, backend=backend,
                                    singular=sing[near])
                    lp_poses += int(rv.by_lp.sum())
                    worse = rv.margin < poly
                    poly[worse] = rv.margin[worse]
                    lo_n[worse], hi_n[worse] = rv.active_lower[worse], rv.active_upper[worse]
                    lc_n[worse] = rv.limiting_cable[worse]
                margin[near] = np.maximum(bound[near], poly)  # both are lower bounds of the ball's margin
                act_lo[near], act_hi[near], lcable[near] = lo_n, hi_n, lc_n
                accel_solved += len(near)
        rest = res.margin  # gravity, extra wrench and wrench box: no accelerations, no length errors
        rs = np.zeros(e - s, np.uint16)
        bad = margin < 0
        rs |= np.where(bad & ~np.isfinite(margin), REASON_BITS["no_solution"], 0).astype(np.uint16)
        tb = bad & np.isfinite(margin)
        rs |= np.where(tb & np.any(act_lo, axis=1), REASON_BITS["slack"], 0).astype(np.uint16)
        rs |= np.where(tb & np.any(act_hi & ~motor & ~stated, axis=1), REASON_BITS["rope"], 0).astype(np.uint16)
        rs |= np.where(tb & np.any(act_hi & stated, axis=1), REASON_BITS["stated"], 0).astype(np.uint16)
        rs |= np.where(tb & np.any(act_hi & motor, axis=1), REASON_BITS["motor"], 0).astype(np.uint16)
        # a failing pose must carry a reason even if no active set was reported (never a silent pass)
        rs |= np.where(bad & (rs == 0), REASON_BITS["slack"], 0).astype(np.uint16)
        if redundant and (tension_held or np.any(dL > 0)):
            short = ~bad & (margin - worst < 0)
            rs |= np.where(short, REASON_BITS["length"], 0).astype(np.uint16)
            lcable = np.where(short, np.argmax(spread[s:e], axis=1), lcable)
            margin = np.where(bad, margin, margin - worst)  # a failing pose keeps its own (worse) margin
        clearance, body, obstacle = _geometry(design, q, pairs)
        rs |= np.where(clearance < 0, REASON_BITS["interference"], 0).astype(np.uint16)
        rs |= np.where(body, REASON_BITS["body"], 0).astype(np.uint16)
        rs |= np.where(obstacle, REASON_BITS["obstacle"], 0).astype(np.uint16)
        geom_ok = (clearance >= 0) & ~body & ~obstacle
        out["margin"][s:e] = margin
        out["rest_margin"][s:e] = rest
        out["static_margin"][s:e] = stat.margin
        out["clearance"][s:e] = clearance
        out["limiting_cable"][s:e] = lcable
        out["reasons"][s:e] = rs
        out["static_ok"][s:e] = stat.feasible & geom_ok
        out["geom_bad"][s:e] = ~geom_ok
        tensions[s:e] = res.tensions
        if progress is not None:
            progress(e, N)
    K = len(grid.orientation_index) // max(len(grid.positions), 1)
    n_moves, failed = 0, np.zeros((0, 2), np.int64)
    turns = None
    if n == 6 and orientations is None:
        turns = _orientation_neighbours(task_orientations(design.task), design.task.orientation_range,
                                        design.task.orientation_samples)
    if sweep and (grid.shape is not None or (turns is not None and len(turns))):
        moved, n_moves, failed = _sweeps(design, grid, K, out["geom_bad"], pairs, turns)
        out["reasons"] |= np.where(moved, REASON_BITS["sweep"], 0).astype(np.uint16)
        out["static_ok"] &= ~moved
    method = "; ".join(sorted(methods))
    if lp_poses:
        method += f"; {lp_poses} pose solve(s) by linear program (scipy HiGHS)"
    if len(accels) and m == n:
        method += "; accelerations: exact over the ball (unique tensions)"
    elif len(accels):
        method += (f"; accelerations: pseudo-inverse bound on {N:,} poses, {len(accels)} polytope vertices on "
                   f"{accel_solved:,} of them")
    t = design.task
    return WorkspaceResult(
        design_name=design.meta.name, kind=design.platform.kind, cable_names=tuple(design.cable_names),
        limited_by=tuple(lim.limited_by), method=f"max-margin (centred) tensions; {method}",
        suspended=_suspended(design, grid.positions), step=float(grid.step), poses=q_all, positions=grid.positions,
        orientations=(np.zeros((1, 3)) if n == 3 else (task_orientations(t) if orientations is None else np.array(
            orientations, float).reshape(-1, 3))),
        orientation_index=grid.orientation_index, position_index=grid.position_index, from_box=grid.from_box,
        axes=grid.axes, box_lower=None if t.box_lower is None else np.array(t.box_lower, float),
        box_upper=None if t.box_upper is None else np.array(t.box_upper, float), exits=design.exits,
        feasible=out["reasons"] == 0, margin=out["margin"], static_feasible=out["static_ok"],
        static_margin=out["static_margin"], clearance=out["clearance"], tensions=tensions,
        limiting_cable=out["limiting_cable"], reasons=out["reasons"], t_min=lim.t_min, t_max=lim.t_max,
        wrench_box=box, extra_wrench=extra, lp_poses=lp_poses, acceleration=a_max, accel_overshoot=overshoot,
        rest_margin=out["rest_margin"], length_spread=spread, length_error=dL, sweep_moves=int(n_moves),
        sweep_failures=failed, winch_control="tension" if tension_held else "length")


# --------------------------------------------------------------------------------------
# checks for the review sheet and the command line
# --------------------------------------------------------------------------------------
_WFW_SOURCE = ("Gouttefarde, Merlet and Daney 2007 (wrench-feasible workspace); the task region must lie inside "
               "it with every cable between its minimum tension and its limit")


def design_checks(design, *, workspace: WorkspaceResult | None = None) -> list[Check]:
    """Task-region coverage, least tension margin and cable clearances as :class:`Check` records."""
    ws = compute_workspace(design) if workspace is None else workspace
    checks: list[Check] = []
    P = len(ws.positions)
    pf = ws.position_feasible
    counts = {k: v for k, v in ws.reason_counts().items() if v}
    detail = (f"{P - int(pf.sum())} of {P} task positions fail: "
              + ", ".join(f"{REASONS[k][1]} ({v} poses)" for k, v in counts.items())) if counts else \
        f"all {P} task positions hold the load in every orientation"
    value = 100.0 * ws.coverage
    margin, status = judge(value, 100.0, upper=False)
    checks.append(Check("workspace_coverage", "task region", "Task region inside the wrench-feasible workspace",
                        value, 100.0, "%", margin, status, _WFW_SOURCE, detail))

    k = int(np.argmin(ws.margin))
    span = float(np.min(ws.t_max - ws.t_min))
    share = practice_value("tension_margin_warn", design.practice)
    value = float(ws.margin[k])
    margin, status = judge(value, 0.0, upper=False, warn_limit=share * span)
    cable = ws.cable_names[ws.limiting_cable[k]] if ws.limiting_cable[k] >= 0 else "none"
    loads = []
    if ws.acceleration > 0:
        loads.append(f"accelerations up to {ws.acceleration:g} m/s^2 in any direction")
    if ws.winch_control == "tension" and len(ws.cable_names) > len(ws.extra_wrench):
        loads.append(f"tension-control errors up to +/-{np.max(ws.max_length_spread()):g} N")
    elif ws.length_error is not None and np.any(ws.length_error > 0) and len(ws.cable_names) > len(ws.extra_wrench):
        loads.append(f"length errors up to +/-{np.max(ws.length_error) * 1e3:.2f} mm")
    checks.append(Check("tension_margin", "task region", "Least tension margin over the task region",
                        value, 0.0, "N", margin, status,
                        f"{_WFW_SOURCE}; warn below {100 * share:g} % of the tension range: "
                        f"{PRACTICE['tension_margin_warn'].source}",
                        f"at {ws._pose_text(k)}, cable {cable}" + (f" (with {' and '.join(loads)})" if loads else "")))

    held = ws.winch_control == "tension"
    if ws.length_spread is not None and len(ws.cable_names) > len(ws.extra_wrench) and (held or (
            ws.length_error is not None and np.any(ws.length_error > 0))):
        short = (ws.reasons & REASON_BITS["length"]) != 0
        value = float(np.count_nonzero(short))
        margin, status = judge(value, 0.0, upper=True)
        sp = ws.max_length_spread()
    if held and ws.length_spread is not None and len(ws.cable_names) > len(ws.extra_wrench):
        checks.append(Check(
            "length_error_tensions", "cables", "Tension window holds with the winches' tension accuracy (tension "
            "control)", value, 0.0, "poses", margin, status,
            "[control] tension_accuracy of the design: each winch holds its set tension to within it (the designer's "
            "statement, to be confirmed on the rig)",
            f"each cable within +/-{np.max(sp):g} N of its set tension"
            + (f"; first failing at {ws._pose_text(int(np.argmax(short)))}" if np.any(short) else "")))
    elif ws.length_spread is not None and len(ws.cable_names) > len(ws.extra_wrench) \
            and ws.length_error is not None and np.any(ws.length_error > 0):
        checks.append(Check(
            "length_error_tensions", "cables", "Tension window holds with length errors (length-controlled winches)",
            value, 0.0, "poses", margin, status,
            "stiffness model of the cable-driven platform (Behzadipour and Khajepour 2006): a length error e "
            "changes the tensions by -(K_c - K_c W^T K^-1 W K_c) e; worst case over the [errors] budget "
            "(home length, quantisation, deadband)",
            f"length errors +/-{np.max(ws.length_error) * 1e3:.2f} mm shift tensions by up to "
            + ", ".join(f"{n} {v:.1f} N" for n, v in zip(ws.cable_names, sp))
            + (f"; first failing at {ws._pose_text(int(np.argmax(short)))}" if np.any(short) else "")))

    ppa = ws.points_per_axis
    # an axis along which the box is flat (a plane or a line of work) has nothing between its faces
    spans = [n for n, lo, hi in zip(ppa or (), ws.box_lower if ws.box_lower is not None else (),
                                    ws.box_upper if ws.box_upper is not None else ()) if hi > lo]
    if spans:
        need = practice_value("grid_points_per_axis_min", design.practice)
        value = float(min(spans))
        margin, status = judge(value, 2.0, upper=False, warn_limit=need)
        checks.append(Check(
            "grid_resolution", "task region", "Grid fine enough to stand for the task box",
            value, need, "points", value - need, status,
            f"at least {need:g} points along each axis: {PRACTICE['grid_points_per_axis_min'].source}; "
            "fewer than 2 fails (the box's faces are not both sampled); flat axes of the box are not counted",
            f"grid step {ws.step * 1e3:g} mm: {ppa[0]} x {ppa[1]} x {ppa[2]} points along x, y, z; tensions are judged "
            "at the nodes only"))
    nf = 0 if ws.sweep_failures is None else len(ws.sweep_failures)
    if ws.sweep_moves or nf:
        margin, status = judge(float(nf), 0.0, upper=True)
        where = (f"first between {ws._pose_text(int(ws.sweep_failures[0, 0]))} and "
                 f"{ws._pose_text(int(ws.sweep_failures[0, 1]))}") if nf else \
            f"all {ws.sweep_moves:,} moves between neighbouring clear nodes are clear"
        checks.append(Check(
            "cable_sweep", "cables", "Cables clear on the moves between grid nodes",
            float(nf), 0.0, "moves", margin, status,
            "geometry: cable pairs by Lipschitz-bounded bisection, obstacles and body on the swept triangles of "
            "shifts (Akenine-Moller 2001, separating axes) and by bisection on turns; common practice, no source, "
            "that running cables must not touch", where))

    if np.any(np.isfinite(ws.clearance)):
        k = int(np.argmin(ws.clearance))
        value = float(ws.clearance[k]) * 1e3
        margin, status = judge(value, 0.0, upper=False)
        checks.append(Check("cable_interference", "cables", "Least gap between cables over the task region",
                            value, 0.0, "mm", margin, status,
                            "cables touch when their centre lines come closer than the sum of their radii "
                            "(geometry; common practice, no source, that running cables must not touch)",
                            f"at {ws._pose_text(k)}"))
    for key, name, title, present in (
            ("cable_body", "body", "Cables clear of the platform body", ws.kind == "rigid"
             and np.all(np.asarray(design.platform.body_half_size) > 0)),
            ("cable_obstacle", "obstacle", "Cables clear of declared obstacles", bool(design.frame.obstacles))):
        if not present:
            continue
        hits = (ws.reasons & REASON_BITS[name]) != 0
        value = float(np.count_nonzero(hits))
        margin, status = judge(value, 0.0, upper=True)
        where = f"first at {ws._pose_text(int(np.argmax(hits)))}" if np.any(hits) else "no task pose affected"
        checks.append(Check(key, "cables", title, value, 0.0, "poses", margin, status,
                            "geometry: a cable segment must not pass through a solid (common practice, no source)",
                            where))
    return checks


def design_assumptions(design, *, workspace: WorkspaceResult | None = None) -> list[str]:
    """The modelling assumptions the workspace verdicts rest on, one sentence each."""
    ws = workspace
    n, m = design.dof, design.m
    t = design.task
    out = []
    a = t.acceleration if ws is None else ws.acceleration
    if a > 0:
        over = acceleration_polytope()[1] if ws is None else ws.accel_overshoot
        how = ("with as many cables as degrees of freedom the tensions are unique and each cable's extremes over the "
               "ball |a| <= a_max are exact" if m == n else
               "the ball |a| <= a_max is enclosed in a polytope whose vertices reach "
               f"{100 * (over - 1):.1f} % beyond a_max (conservative) and every vertex is checked where a "
               "pseudo-inverse bound for the whole ball comes near a verdict")
        out.append(f"Accelerations up to {a:g} m/s^2 in any direction: the inertial wrench -M a of platform, payload "
                   "and arm (their masses lumped at their centres; for a rigid platform its moment through the combined "
                   f"centre of mass) is added to gravity and the wrench box; {how}. Angular accelerations and velocities are not in the design file and are not "
                   "included; nor is the arm's own motion.")
    else:
        out.append("task.acceleration is 0: the workspace map is quasi-static (no inertial loads are checked).")
    control = _control(design)
    if m > n and control.winches == "tension" and (ws is None or ws.winch_control == "tension"):
        out.append(f"{m} cables for {n} degrees of freedom, winches holding tensions ([control] winches = 'tension'): "
                   f"each cable is taken to stay within +/-{control.tension_accuracy:g} N of its set tension, which is "
                   "taken off each pose's margin; the set tensions are assumed to be the max-margin distribution for "
                   "every load, and length errors then move the pose, not the tensions.")
    elif m > n:
        dL = _length_errors(design) if ws is None or ws.length_error is None else ws.length_error
        out.append(f"{m} cables for {n} degrees of freedom: the winches are taken to be length-controlled; length "
                   f"errors up to +/-{np.max(dL) * 1e3:.2f} mm per cable (home length, quantisation and deadband of the "
                   "[errors] budget) shift the tensions through the stiffness model (winches locked, cables EA/L, "
                   "first order); the largest shift of any cable is taken off each pose's margin (conservative). "
                   "Otherwise the verdict assumes the control realises the max-margin tension distribution for "
                   "every load.")
    else:
        out.append(f"{m} cables for {n} degrees of freedom: the tensions are fixed by the load; length errors move the "
                   "pose (see the accuracy section), not the tensions (to first order)"
                   + ("; tension control ([control]) has no freedom to choose them." if control.winches == "tension"
                      else "."))
    try:
        K = len(task_orientations(t)) if n == 6 else 1
    except ValueError:
        K = len(t.orientations)
    if n == 6:
        rng = "" if t.orientation_range is None else (
            f", including the orientation range sampled with {t.orientation_samples} values per angle (every bound "
            "combination and interior samples)")
        out.append(f"Orientations: {K} sampled{rng}; orientations between the samples are not checked.")
    if ws is not None and ws.points_per_axis is not None:
        ppa = ws.points_per_axis
        out.append(f"Sampling: grid step {ws.step * 1e3:g} mm, {ppa[0]} x {ppa[1]} x {ppa[2]} points along x, y, z; "
                   "tensions are judged at the nodes only; contact is checked at the nodes and on the straight moves "
                   "between neighbouring nodes at each sampled orientation; turns between neighbouring orientations "
                   "of the range are swept for cable pairs, obstacles and the platform body; moves to or from the "
                   "listed orientations and diagonal moves are not swept.")
    elif t.box_lower is None:
        out.append("Sampling: task points only; nothing between the points is checked.")
    out.append("Cables are straight and massless with fixed exit points in the workspace map (sag is judged in the "
               "cables section).")
    return out
