"""Inverse and forward kinematics on arrays (poses on the leading axis).

All functions take a :class:`~cablekit.design.Design` for the rig's shape and accept
keyword-only ``exits=`` / ``attachments=`` overrides (arrays of shape (m, 3) or broadcastable
(N, m, 3)) so that perturbed rigs (calibration, Monte Carlo) use the same code.

Poses: shape (N, 3) for a point platform, (N, 6) for a rigid one (see
:mod:`cablekit.symbolic` for the orientation convention).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .symbolic import numeric

__all__ = [
    "as_poses",
    "ZERO_LENGTH",
    "zero_length_cables",
    "positions_at_exits",
    "cable_vectors",
    "cable_lengths",
    "unit_vectors",
    "structure_matrix",
    "length_jacobian",
    "parameter_jacobians",
    "ParameterJacobians",
    "home_lengths",
    "length_per_count",
    "lengths_to_counts",
    "counts_to_lengths",
    "CountJacobians",
    "count_jacobians",
    "FKResult",
    "forward_kinematics",
    "wrap_angles",
    "EXACT_LENGTH_PRECISION",
    "CONDITION_LIMIT",
    "trilaterate",
    "KinematicsError",
]

CHUNK = 4096  # poses per evaluation chunk: keeps temporaries in cache (see README benchmarks)
# a cable shorter than this share of the rig's size (at least 1 m) counts as zero length: its
# attachment sits at its exit and its direction is undefined [m/m]
ZERO_LENGTH = 1e-9


class KinematicsError(ValueError):
    """Lengths or poses that no rig configuration matches."""


def as_poses(design, poses) -> np.ndarray:
    """Check and return poses as a float array of shape (N, n)."""
    n = design.dof
    arr = np.asarray(poses, dtype=float)
    if arr.ndim == 1:
        arr = arr[None, :]
    if arr.ndim != 2 or arr.shape[1] != n:
        raise ValueError(f"poses must have shape (N, {n}) for a {design.platform.kind} platform, got {arr.shape}")
    if not np.all(np.isfinite(arr)):
        bad = int(np.argwhere(~np.isfinite(arr))[0, 0])
        raise ValueError(f"pose {bad} is not finite: {arr[bad].tolist()}")
    return arr


def _geometry(design, exits, attachments):
    a = design.exits if exits is None else np.asarray(exits, dtype=float)
    b = design.attachments if attachments is None else np.asarray(attachments, dtype=float)
    return a, b


def _evaluate(design, what: str, poses, exits=None, attachments=None) -> np.ndarray:
    """Evaluate a generic-cable function for every pose and cable: shape (N, m, k)."""
    q = as_poses(design, poses)
    a, b = _geometry(design, exits, attachments)
    fn = numeric(design.platform.kind, what)
    n = q.shape[1]
    N = q.shape[0]
    m = design.m
    k = len(fn.output_names)
    out = np.empty((N, m, k))
    for s in range(0, N, CHUNK):
        e = min(N, s + CHUNK)
        qc = q[s:e, None, :]  # (c, 1, n)
        ac = a[s:e] if a.ndim == 3 else a[None]
        bc = b[s:e] if b.ndim == 3 else b[None]
        args = [qc[..., j] for j in range(n)] + [ac[..., j] for j in range(3)] + [bc[..., j] for j in range(3)]
        with np.errstate(divide="ignore", invalid="ignore"):  # zero-length cables: NaN, see zero_length_cables
            out[s:e] = np.broadcast_to(fn(*args), (e - s, m, k))
    return out


def zero_length_cables(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """(N, m) True where a cable has (near) zero length: its attachment sits at its exit.

    There the cable's direction, and so its column of the structure matrix, is undefined (NaN):
    no tensions can be computed and the pose counts as singular.  "Zero" is
    ``L <= ZERO_LENGTH * max(1 m, largest exit coordinate)``.
    """
    a, _ = _geometry(design, exits, attachments)
    L = cable_lengths(design, poses, exits=exits, attachments=attachments)
    return ~(L > ZERO_LENGTH * max(1.0, float(np.max(np.abs(a)))))


def positions_at_exits(design, orientations=((0.0, 0.0, 0.0),)) -> np.ndarray:
    """Platform positions that put an attachment exactly at its exit: ``p = a_i - R b_i`` [m].

    orientations : (K, 3) roll, pitch, yaw [rad] (ignored for a point platform, where the
    positions are the exits).  Returns (K, m, 3); at these positions the cable has zero length
    and the pose is singular (see :func:`zero_length_cables`).
    """
    a, b = _geometry(design, None, None)
    if design.dof == 3:
        return a[None].copy()
    from .statics import rotation_matrices

    R = rotation_matrices(np.asarray(orientations, float).reshape(-1, 3))
    return a[None] - np.einsum("kij,mj->kmi", R, b)


def cable_vectors(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """Cable vectors ``l_i = a_i - p - R b_i`` [m], shape (N, m, 3)."""
    return _evaluate(design, "vector", poses, exits, attachments)


def cable_lengths(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """Straight-line cable lengths ``L_i`` [m] (inverse kinematics), shape (N, m)."""
    return _evaluate(design, "length", poses, exits, attachments)[..., 0]


def unit_vectors(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """Unit vectors ``u_i`` from the platform towards the exits, shape (N, m, 3)."""
    return _evaluate(design, "unit", poses, exits, attachments)


def structure_matrix(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """Structure (wrench) matrix ``W`` with ``W t + w_ext = 0``, shape (N, n, m)."""
    return np.swapaxes(_evaluate(design, "wrench", poses, exits, attachments), 1, 2)


def length_jacobian(design, poses, *, exits=None, attachments=None) -> np.ndarray:
    """``dL/dq`` [m/m, m/rad], shape (N, m, n)."""
    return _evaluate(design, "jac_pose", poses, exits, attachments)


@dataclass(frozen=True)
class ParameterJacobians:
    """Derivatives of the cable lengths with respect to design parameters.

    exits : dL_i/da_i, shape (N, m, 3) [m/m]; cable i depends only on its own exit.
    attachments : dL_i/db_i, shape (N, m, 3) [m/m] (zero for a point platform).
    """

    exits: np.ndarray
    attachments: np.ndarray


def parameter_jacobians(design, poses, *, exits=None, attachments=None) -> ParameterJacobians:
    """Jacobians of the lengths with respect to exit and attachment points."""
    return ParameterJacobians(
        exits=_evaluate(design, "jac_exit", poses, exits, attachments),
        attachments=_evaluate(design, "jac_attachment", poses, exits, attachments),
    )


# --------------------------------------------------------------------------------------
# cable length <-> encoder counts
# --------------------------------------------------------------------------------------
def home_lengths(design) -> np.ndarray:
    """Cable lengths at the home pose [m]: calibrated ``home_length`` where given, else IK."""
    ik = cable_lengths(design, np.array(design.home_pose)[None, :])[0]
    return np.array([e.home_length if e.home_length is not None else ik[i] for i, e in enumerate(design.frame.exits)])


def length_per_count(design, *, drum_scale: float | np.ndarray = 1.0) -> np.ndarray:
    """Cable length paid out per encoder count [m], shape (m,).

    ``pi * (D_drum + d_rope) / (gear_ratio * lines * decoding)``: the rope's centreline sits
    on the pitch diameter, drum plus one rope diameter (first layer).

    References
    ----------
    Shigley's Mechanical Engineering Design, 10th ed., 2015, sec. 17-6 (wire rope: pitch
    diameter of a sheave/drum is measured to the rope centreline).
    """
    d = design.cable.diameter
    out = np.array([np.pi * (w.drum_diameter * drum_scale + d) / (w.gear_ratio * w.counts_per_motor_rev)
                    for w in design.winches], dtype=float)
    return out


def lengths_to_counts(design, lengths, *, home=None) -> np.ndarray:
    """Encoder counts from home for cable lengths (N, m): ``(L - L_home) / length_per_count``.

    Positive counts pay cable out. Returns floats; round to the nearest count to command.
    """
    L = np.asarray(lengths, dtype=float)
    h = home_lengths(design) if home is None else np.asarray(home, float)
    return (L - h) / length_per_count(design)


@dataclass(frozen=True)
class CountJacobians:
    """Derivatives of the encoder counts of every cable, each shape (N, m).

    length : dc/dL [1/m]; home_length : dc/dL_0 [1/m]; drum_diameter : dc/dD [1/m].
    """

    counts: np.ndarray
    length: np.ndarray
    home_length: np.ndarray
    drum_diameter: np.ndarray


def count_jacobians(design, lengths, *, home=None) -> CountJacobians:
    """Counts from home and their derivatives with respect to length, home length and drum
    diameter (generated from :func:`cablekit.symbolic.encoder_template`)."""
    from .symbolic import encoder_numeric

    L = np.atleast_2d(np.asarray(lengths, float))
    h = home_lengths(design) if home is None else np.asarray(home, float)
    D = np.array([w.drum_diameter for w in design.winches])
    i = np.array([w.gear_ratio for w in design.winches])
    nc = np.array([w.counts_per_motor_rev for w in design.winches], dtype=float)
    out = encoder_numeric()(L, h, D, design.cable.diameter, i, nc)
    return CountJacobians(counts=out[..., 0], length=out[..., 1], home_length=out[..., 2], drum_diameter=out[..., 3])


def counts_to_lengths(design, counts, *, home=None) -> np.ndarray:
    h = home_lengths(design) if home is None else np.asarray(home, float)
    return h + np.asarray(counts, float) * length_per_count(design)


# --------------------------------------------------------------------------------------
# forward kinematics
# --------------------------------------------------------------------------------------
# lengths taken as exact (float64, round-off about 2e-16 x length): the RMS residual allowed,
# with room for evaluating L(q) and the solver's last step [m/m]
EXACT_LENGTH_PRECISION = 1e-12
# condition number of the scaled length Jacobian above which a pose counts as ill-conditioned:
# the lengths then fix the pose only to about this many times their precision (common practice,
# no source: with float64 lengths of a few metres, 1e6 x round-off reaches about 1e-9 m)
CONDITION_LIMIT = 1e6


@dataclass(frozen=True)
class FKResult:
    """Forward-kinematics answer.

    poses : (N, n), angles wrapped to (-pi, pi] with pitch in [-pi/2, pi/2] (one of the two
    roll-pitch-yaw triples of each rotation); residual : (N,) RMS of ``L(q) - L_given`` [m];
    converged : (N,) bool, True only where (1) the solver stopped at a stationary point, (2) the
    residual is at most ``tolerance`` (the lengths' own precision, see ``tolerance_basis``),
    (3) no other start reached a different pose that fits the lengths as well (``ambiguous``)
    and (4) the pose is not ``ill_conditioned``; iterations : int (solver iterations used, 0 for
    closed form); tolerance : (N,) RMS residual that counts as fitting the lengths [m];
    tolerance_basis : what that tolerance stands for; error_bound : (N,) first-order distance from
    the returned pose to the pose that gives the lengths exactly, ``||r|| / sigma_min(J)``
    [m and rad, Euclidean norm of the pose change]; condition : (N,) condition number of the
    length Jacobian with rotation columns scaled to metres by the platform radius [-];
    ill_conditioned : (N,) ``condition > CONDITION_LIMIT``; ambiguous : (N,) another start fit
    the lengths to ``tolerance`` at a pose more than 1 um (or 1 urad x radius) away;
    starts : (N,) number of starting poses compared for each pose.
    """

    poses: np.ndarray
    residual: np.ndarray
    converged: np.ndarray
    iterations: int
    tolerance: np.ndarray
    tolerance_basis: str
    error_bound: np.ndarray
    condition: np.ndarray
    ill_conditioned: np.ndarray
    ambiguous: np.ndarray
    starts: np.ndarray

    def summary(self) -> list[str]:
        """Text lines: how many poses converged and what "converged" means here."""
        N = len(self.poses)
        k0, k1 = (int(np.min(self.starts)), int(np.max(self.starts))) if N else (0, 0)
        lines = [f"forward kinematics: {int(np.sum(self.converged))} of {N} poses converged "
                 f"({k0 if k0 == k1 else f'{k0}-{k1}'} start(s) compared per pose)",
                 f"  converged means: RMS length residual <= {float(np.max(self.tolerance)):.3g} m "
                 f"({self.tolerance_basis}), no other start fits as well at another pose, condition number "
                 f"<= {CONDITION_LIMIT:g}"]
        if np.any(self.ambiguous):
            lines.append(f"  ambiguous: {int(np.sum(self.ambiguous))} poses (another pose fits the lengths as well)")
        if np.any(self.ill_conditioned):
            lines.append(f"  ill-conditioned: {int(np.sum(self.ill_conditioned))} poses (lengths barely fix the pose)")
        if N:
            lines.append(f"  largest RMS residual {float(np.max(self.residual)):.3g} m; largest error bound "
                         f"{float(np.max(self.error_bound)):.3g} (m and rad)")
        return lines


def trilaterate(exits, lengths, *, gravity_direction=(0.0, 0.0, -1.0)) -> np.ndarray:
    """Closed-form position of a point hanging on three cables.

    Parameters
    ----------
    exits : array (3, 3) [m]
    lengths : array (N, 3) [m]
    gravity_direction : the solution on the side of the exit plane that gravity points to
        (the hanging one) is returned.

    Returns
    -------
    array (N, 3) [m]; rows whose spheres do not meet raise :class:`KinematicsError`.

    Notes
    -----
    Classical three-sphere intersection: in a frame with ``a_1`` at the origin, ``a_2`` on the
    x axis and ``a_3`` in the x-y plane, ``x = (L1^2 - L2^2 + d^2) / 2d``,
    ``y = (L1^2 - L3^2 + i^2 + j^2) / 2j - i x / j``, ``z = +-sqrt(L1^2 - x^2 - y^2)``.
    (Fang, S. "Trilateration", see also Manolakis, IEEE Trans. AES 32(4), 1996.)
    """
    a = np.asarray(exits, float)
    L = np.atleast_2d(np.asarray(lengths, float))
    ex = a[1] - a[0]
    d = np.linalg.norm(ex)
    ex = ex / d
    i = ex @ (a[2] - a[0])
    ey = a[2] - a[0] - i * ex
    j = np.linalg.norm(ey)
    if d < 1e-12 or j < 1e-12:
        raise KinematicsError("the three exit points are collinear: the position is not determined")
    ey = ey / j
    ez = np.cross(ex, ey)
    g = np.asarray(gravity_direction, float)
    if ez @ g < 0:
        ez = -ez  # choose the side gravity points to
    L1, L2, L3 = L[:, 0], L[:, 1], L[:, 2]
    x = (L1**2 - L2**2 + d**2) / (2 * d)
    y = (L1**2 - L3**2 + i**2 + j**2) / (2 * j) - (i / j) * x
    z2 = L1**2 - x**2 - y**2
    tol = 1e-12 * np.maximum(1.0, L1**2)
    if np.any(z2 < -tol):
        bad = int(np.argmax(z2 < -tol))
        raise KinematicsError(f"cable lengths {L[bad].tolist()} m are incompatible with the exit points "
                              f"(row {bad}: the three spheres do not meet)")
    z = np.sqrt(np.clip(z2, 0.0, None))
    return a[0] + x[:, None] * ex + y[:, None] * ey + z[:, None] * ez


_ORIENTATION_SEEDS = [np.array(v) for v in ([0.3, 0, 0], [-0.3, 0, 0], [0, 0.3, 0], [0, -0.3, 0], [0, 0, 0.3],
                                            [0, 0, -0.3], [0.3, 0.3, 0.3], [-0.3, -0.3, -0.3])]


# the second round, for poses none of the first starts fits: every combination of 0 and +-0.6 rad
_WIDE_SEEDS = [np.array(v) for v in np.array(np.meshgrid(*[[-0.6, 0.0, 0.6]] * 3, indexing="ij")).reshape(3, -1).T
               if np.any(v)]


def _rows(geometry, idx):
    """Per-pose exit/attachment arrays (N, m, 3) restricted to rows ``idx``; shared ones (m, 3) as they are."""
    return geometry[idx] if geometry.ndim == 3 else geometry


def wrap_angles(angles) -> np.ndarray:
    """Roll, pitch, yaw (N, 3) [rad] of the same rotations, wrapped to (-pi, pi], pitch in [-pi/2, pi/2].

    ``R = Rz(psi) Ry(theta) Rx(phi)`` is rebuilt and read back: ``theta = -asin(R_20)``,
    ``phi = atan2(R_21, R_22)``, ``psi = atan2(R_10, R_00)`` (every rotation has two such triples;
    this picks the one with ``|theta| <= pi/2``).
    """
    from .statics import rotation_matrices

    R = rotation_matrices(angles)
    out = np.stack([np.arctan2(R[:, 2, 1], R[:, 2, 2]), -np.arcsin(np.clip(R[:, 2, 0], -1.0, 1.0)),
                    np.arctan2(R[:, 1, 0], R[:, 0, 0])], axis=1)
    return np.where(out <= -np.pi, out + 2 * np.pi, out)


def _levenberg_marquardt(design, L, q, a, b, tol, max_iter):
    """Vectorised Levenberg-Marquardt on ``L(q) = L_given`` (one damping factor per pose).

    Marquardt, D. W. "An algorithm for least-squares estimation of nonlinear parameters",
    J. SIAM 11(2), 1963 (diagonal scaling of the damping term).
    """
    N, n = q.shape
    q = q.copy()
    r = cable_lengths(design, q, exits=a, attachments=b) - L
    cost = np.sum(r**2, axis=1)
    lam = np.full(N, 1e-3)
    active = np.ones(N, bool)
    eye = np.eye(n)
    it = 0
    for it in range(1, max_iter + 1):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        ai, bi = _rows(a, idx), _rows(b, idx)
        J = length_jacobian(design, q[idx], exits=ai, attachments=bi)
        JT = np.swapaxes(J, 1, 2)
        H = JT @ J
        g = (JT @ r[idx][..., None])[..., 0]
        diag = np.einsum("kii->ki", H)
        A = H + (lam[idx][:, None] * np.maximum(diag, 1e-12))[:, :, None] * eye
        dq = -np.linalg.solve(A, g[..., None])[..., 0]
        qn = q[idx] + dq
        rn = cable_lengths(design, qn, exits=ai, attachments=bi) - L[idx]
        cn = np.sum(rn**2, axis=1)
        better = cn < cost[idx]
        ib = idx[better]
        q[ib] = qn[better]
        r[ib] = rn[better]
        cost[ib] = cn[better]
        lam[ib] = np.maximum(lam[ib] / 3.0, 1e-12)
        lam[idx[~better]] *= 4.0
        small = np.linalg.norm(dq, axis=1) < tol * np.maximum(1.0, np.max(L[idx], axis=1))
        done = (better & small) | (cost[idx] < 1e-28) | (lam[idx] > 1e12)
        active[idx[done]] = False
    residual = np.sqrt(cost / L.shape[1])
    return q, residual, ~active | (cost < 1e-28), it


def _platform_radius(b) -> float:
    """Largest attachment distance from the platform reference point [m] (at least 1 mm)."""
    return max(float(np.max(np.linalg.norm(np.atleast_2d(b).reshape(-1, 3), axis=1))), 1e-3)


def _conditioning(design, q, residual, a, b):
    """Error bound ``||r|| / sigma_min(J)`` and the condition number of the scaled Jacobian."""
    J = length_jacobian(design, q, exits=a, attachments=b)
    m, n = J.shape[1], J.shape[2]
    sv = np.linalg.svd(J, compute_uv=False)
    bound = np.sqrt(m) * residual / np.maximum(sv[:, -1], 1e-300)
    if n == 6:
        scale = np.r_[np.ones(3), np.full(3, 1.0 / _platform_radius(b))]  # angle x radius: arc length [m]
        sv = np.linalg.svd(J * scale, compute_uv=False)
    cond = sv[:, 0] / np.maximum(sv[:, -1], 1e-300)
    return bound, cond


def forward_kinematics(design, lengths, *, guess=None, exits=None, attachments=None, tol: float = 1e-12,
                       max_iter: int = 50, consistency_tol: float | None = None,
                       starts: int | None = None) -> FKResult:
    """Poses that produce the given cable lengths.

    A point platform on exactly three cables uses closed-form trilateration (the hanging
    solution).  Otherwise Levenberg-Marquardt on the symbolic length Jacobian (least squares
    for m > n), vectorised over poses, from ``guess`` (default: the home pose) and, for rigid
    platforms, from a few more orientation seeds; the starts are compared pose by pose.

    Parameters
    ----------
    lengths : (N, m) cable lengths [m].
    guess : (n,) or (N, n) starting pose(s); default the home pose.
    tol : relative step size that ends the iteration [-].
    consistency_tol : the lengths' own precision as an RMS residual [m].  Default: the lengths
        are exact (computed) float64 numbers: ``1e-12 * max(1 m, longest cable)``, a few
        thousand times their round-off.
        Measured or perturbed lengths of a redundant rig are never exactly consistent: pass
        their expected error.  ``numpy.inf`` accepts any least-squares fit.
    starts : starting poses to compare for rigid platforms: ``None`` (default) the guess and
        8 orientation seeds, plus 26 wider ones for a pose none of these fits; k the guess and
        k - 1 seeds; 1 the guess alone (a warm start: then "converged" cannot rule out another
        pose that fits as well).

    Returns
    -------
    FKResult
        ``converged`` holds only where the residual is within the lengths' precision, no other
        start found a different pose that fits as well and the pose is not ill-conditioned;
        ``tolerance_basis`` says which precision was used.  Angles are wrapped (see
        :func:`wrap_angles`).

    Raises
    ------
    KinematicsError
        When lengths are not finite or, for the closed form, incompatible. For the iterative
        path, rows that do not converge are reported in ``converged`` and ``residual``.
    """
    L = np.atleast_2d(np.asarray(lengths, float))
    m, n = design.m, design.dof
    if L.shape[1] != m:
        raise ValueError(f"lengths must have shape (N, {m}), got {L.shape}")
    if not np.all(np.isfinite(L)) or np.any(L <= 0):
        raise KinematicsError("cable lengths must be finite and positive")
    if starts is not None and (int(starts) != starts or starts < 1):
        raise ValueError(f"starts must be a positive whole number or None, got {starts!r}")
    a, b = _geometry(design, exits, attachments)
    N = L.shape[0]
    scale_len = np.maximum(1.0, np.max(L, axis=1))
    if consistency_tol is not None:
        if not consistency_tol >= 0:
            raise ValueError(f"consistency_tol must be a length >= 0 [m], got {consistency_tol!r}")
        good = np.full(N, float(consistency_tol))
        basis = f"the given length precision {float(consistency_tol):.3g} m"
    else:
        good = EXACT_LENGTH_PRECISION * scale_len
        basis = (f"lengths taken as exact float64 numbers: {EXACT_LENGTH_PRECISION:g} x longest cable (>= 1 m), "
                 "a few thousand times their round-off")
    if design.platform.kind == "point" and m == 3 and a.ndim == 2:
        p = trilaterate(a, L, gravity_direction=design.frame.gravity_direction)
        res = np.sqrt(np.mean((cable_lengths(design, p, exits=a) - L) ** 2, axis=1))
        bound, cond = _conditioning(design, p, res, a, b)
        ill = ~(cond <= CONDITION_LIMIT)
        return FKResult(poses=p, residual=res, converged=(res <= good) & ~ill, iterations=0, tolerance=good,
                        tolerance_basis=basis + "; closed form, the solution on the side gravity points to",
                        error_bound=bound, condition=cond, ill_conditioned=ill, ambiguous=np.zeros(N, bool),
                        starts=np.ones(N, int))
    q0 = np.broadcast_to(np.asarray(design.home_pose if guess is None else guess, float), (N, n)).copy()

    def solve_from(orientations, rows, *, guess_too=True):
        """LM from the guess of ``rows`` and from the guess's position with each seed orientation."""
        seeds = [q0[rows]] if guess_too else []
        for o in orientations:
            s0 = q0[rows].copy()
            s0[:, 3:] = o
            seeds.append(s0)
        K = len(seeds)

        def tiled(g):
            g = _rows(g, rows)
            return g if g.ndim == 2 else np.tile(g, (K, 1, 1))

        qk, rk, sk, itk = _levenberg_marquardt(design, np.tile(L[rows], (K, 1)), np.vstack(seeds), tiled(a),
                                               tiled(b), tol, max_iter)
        if n == 6:
            qk[:, 3:] = wrap_angles(qk[:, 3:])
        return qk.reshape(K, len(rows), n), rk.reshape(K, len(rows)), sk.reshape(K, len(rows)), itk

    rows = np.arange(N)
    first = _ORIENTATION_SEEDS[: (len(_ORIENTATION_SEEDS) if starts is None else int(starts) - 1)] if n == 6 else []
    qs, rs, st, it = solve_from(first, rows)
    used = np.full(N, len(qs))
    need = np.flatnonzero(~np.any(st & (rs <= good), axis=0)) if (n == 6 and starts is None) else rows[:0]
    if need.size:  # none of the first starts fits: a second round from wider orientation seeds
        q2, r2, s2, it2 = solve_from(_WIDE_SEEDS, need, guess_too=False)
        K2 = len(q2)
        Q2, R2, S2 = np.full((K2, N, n), np.nan), np.full((K2, N), np.inf), np.zeros((K2, N), bool)
        Q2[:, need], R2[:, need], S2[:, need] = q2, r2, s2
        qs, rs, st = np.concatenate([qs, Q2]), np.concatenate([rs, R2]), np.concatenate([st, S2])
        used[need] += K2
        it = max(it, it2)
    K = len(qs)
    best = np.argmin(np.where(np.isfinite(rs), rs, np.inf), axis=0)
    q, residual, stationary = qs[best, rows], rs[best, rows], st[best, rows]
    # another start that fits as well at a different pose: the lengths do not decide
    fits = st & (rs <= good)
    ambiguous = np.zeros(N, bool)
    if K > 1:
        from .statics import rotation_matrices

        radius = _platform_radius(b)
        near = 1e-6 * scale_len
        Rb = rotation_matrices(q[:, 3:])
        for k in range(K):
            dp = np.linalg.norm(qs[k, :, :3] - q[:, :3], axis=1)
            dr = np.linalg.norm(rotation_matrices(qs[k, :, 3:]) - Rb, axis=(1, 2)) * radius
            ambiguous |= fits[k] & ((dp > near) | (dr > near))
    bound, cond = _conditioning(design, q, residual, a, b)
    ill = ~(cond <= CONDITION_LIMIT)
    converged = stationary & (residual <= good) & ~ambiguous & ~ill
    return FKResult(poses=q, residual=residual, converged=converged, iterations=it, tolerance=good,
                    tolerance_basis=basis, error_bound=bound, condition=cond, ill_conditioned=ill,
                    ambiguous=ambiguous, starts=used)
