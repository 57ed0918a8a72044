"""Fast, exact tension distribution for many poses at once.

Given the structure matrix ``W`` (N, n, m), the external wrench ``w`` (N, n) and per-cable
limits ``t_min <= t <= t_max`` [N], find for every pose the **tension margin**

    s* = max s  subject to  W t + w = 0,  t_min + s <= t <= t_max - s

(the distance of the best tension vector to its nearest limit, see :mod:`cablekit.statics`),
the tensions that reach it ("max-margin", i.e. centred in the limits), the cable that binds
and whether it binds at its lower (slack) or upper limit.  The pose is wrench-feasible when
``s* >= 0`` (Gouttefarde, Merlet and Daney 2007).

Method (exact, no tolerance on the verdict)
-------------------------------------------
Write ``t = t0 + N lam`` with ``t0`` any particular solution and ``N`` (m, r) a basis of the
null space of ``W`` (``r = m - n`` redundant cables), ``h_i = (t_max,i - t_min,i) / 2`` and
``c_i = t0_i - (t_max,i + t_min,i) / 2``.  Then ``s* = max_lam min_i (h_i - |c_i + n_i . lam|)``,
an LP in ``r + 1`` unknowns.  By LP duality its optimum is the least value over the vertices
of the dual, and a dual vertex uses at most ``r + 1`` constraints (Helly-type / combinatorial
dimension ``r + 1``).  For a set ``S`` of ``r + 1`` cables let ``alpha`` (supported on ``S``)
span the vectors of the row space of ``W`` that vanish outside ``S``
(``sum_i alpha_i n_i = 0``; for ``r = 2`` the 2-D cross products
``alpha_i = n_j x n_k``, ``alpha_j = n_k x n_i``, ``alpha_k = n_i x n_j``).  Its value is

    v(S) = (sum |alpha_i| h_i - |sum alpha_i c_i|) / sum |alpha_i|

and ``s* = min( min_i h_i , min_S v(S) )``.  This is the null-space polygon test: for
``r = 2`` the feasible tensions form a polygon in the 2-D null space, non-empty exactly when
every triple of cable strips meets (Helly's theorem in the plane); ``v(S)`` is the margin at
which the triple ``S`` stops meeting.  ``sum alpha_i c_i`` does not depend on the choice of
``t0`` because ``alpha`` is orthogonal to the null space.

A **wrench box** ``w + sum_k delta_k d_k``, ``|delta_k| <= 1`` is feasible exactly when all its
vertices are (the feasible wrench set is convex); its margin is the least vertex margin.  Since
``sum alpha_i c_i`` is affine in the wrench, the worst vertex adds
``sum_k |sum_i alpha_i p_ik|`` to ``|sum alpha_i c_i|`` (``p_k`` a particular solution for
``d_k``), so the box costs one extra sum per candidate instead of ``2^k`` solves.

Paths: m = n has unique tensions: :func:`cablekit.statics.solve_square` in NumPy, Cramer's rule
compiled for three cables, the same row reduction as below for a wrench box.  r = 1 and 2 use
the candidate formula above, in a compiled kernel (row reduction with complete pivoting, then
the candidates) when numba is installed and in NumPy (QR null space) otherwise; the tests hold
every path to the others and to scipy's LP.  Where the optimum is tied (the optimal tensions
form a segment, not a vertex: a binding dependency of only ``r`` cables, as at symmetric poses
of box-shaped rigs, or the narrowest cable pinned at its centre) the tensions are the middle of
the optimal interval along the line that binding fixes, checked to reach the margin.  Larger
redundancy, rank-deficient poses and the rare pose that check still rejects go to the per-pose
HiGHS linear program (:func:`cablekit.statics.solve_lp`), so the classification is always
exact.  Poses marked ``singular`` (a cable of zero length) are not solved: no solution.

References
----------
Gouttefarde, M., Merlet, J.-P., Daney, D. "Wrench-feasible workspace of parallel cable-driven
mechanisms". IEEE ICRA 2007 (definition of the wrench-feasible workspace).
Bosscher, P., Riechel, A. T., Ebert-Uphoff, I. "Wrench-feasible workspace generation for
cable-driven robots". IEEE Trans. Robotics 22(5), 2006 (feasibility of a wrench set from its
vertices / convexity).
Gosselin, C., Grenier, M. "On the determination of the force distribution in overconstrained
cable-driven parallel mechanisms". Meccanica 46, 2011 (two-degree redundancy: the polygon in
the null space).
Pott, A. *Cable-Driven Parallel Robots: Theory and Application*. Springer, 2018, ch. 3
(force distribution; closed-form methods are conservative as feasibility tests).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from itertools import combinations

import numpy as np

from .statics import TensionResult, solve_lp, solve_square, without_singular

__all__ = ["TensionDetail", "distribute", "box_generators", "box_vertices", "HAVE_NUMBA", "BACKENDS"]

try:  # optional: a compiled kernel of the same exact test (about 10x the NumPy path)
    import numba as _numba
except ImportError:  # pragma: no cover - exercised on machines without numba
    _numba = None

HAVE_NUMBA = _numba is not None
BACKENDS = ("auto", "numba", "numpy", "lp")
CHUNK = 1024  # poses per chunk (keeps the NumPy temporaries in cache)

# per-pose status of the fast path
_DONE, _TENSIONS_BY_LP, _BY_LP = 0, 1, 2


@dataclass(frozen=True)
class TensionDetail(TensionResult):
    """A :class:`~cablekit.statics.TensionResult` with what the workspace map needs.

    tensions : (N, m) max-margin tensions for the nominal wrench [N]; margin : (N,) least
    tension margin over the wrench box (the nominal wrench when no box) [N]; feasible :
    ``margin >= 0``; limiting_cable : (N,) the binding cable with the largest dual weight at
    the worst wrench (-1 when no tensions balance the load); nominal_margin : (N,) margin for
    the nominal wrench alone [N]; active_lower / active_upper : (N, m) cables at their lower
    (slack side) / upper limit in the max-margin solution of the worst wrench; by_lp : (N,)
    poses (partly) solved by the per-pose linear program.
    """

    nominal_margin: np.ndarray
    active_lower: np.ndarray
    active_upper: np.ndarray
    by_lp: np.ndarray


# --------------------------------------------------------------------------------------
# wrench boxes
# --------------------------------------------------------------------------------------
def box_generators(half_widths, n: int) -> np.ndarray:
    """Edge half-vectors ``d_k`` (k, n) of an axis-aligned wrench box with ``half_widths``.

    Only non-zero half-widths make a generator; ``half_widths`` (n,) [N, N*m].
    """
    hw = np.asarray(half_widths, float).reshape(-1)
    if hw.shape != (n,):
        raise ValueError(f"wrench box needs {n} half-widths, got {hw.shape[0]}")
    if not np.all(np.isfinite(hw)) or np.any(hw < 0):
        raise ValueError(f"wrench box half-widths must be finite and not negative, got {hw.tolist()}")
    idx = np.flatnonzero(hw > 0)
    D = np.zeros((len(idx), n))
    D[np.arange(len(idx)), idx] = hw[idx]
    return D


def box_vertices(w_ext, half_widths) -> np.ndarray:
    """All ``2^k`` vertices of the wrench box around each wrench: (N, 2^k, n) [N, N*m]."""
    w = np.atleast_2d(np.asarray(w_ext, float))
    D = box_generators(half_widths, w.shape[1])
    signs = np.array(np.meshgrid(*[[-1.0, 1.0]] * len(D), indexing="ij")).reshape(len(D), -1).T
    return w[:, None, :] + (signs @ D)[None, :, :]


# --------------------------------------------------------------------------------------
# the exact candidate test: shared pieces
# --------------------------------------------------------------------------------------
def _subsets(m: int, r: int) -> np.ndarray:
    return np.array(list(combinations(range(m), r + 1)), dtype=np.int64).reshape(-1, r + 1)


def _alphas(Nn: np.ndarray, sub: np.ndarray, r: int) -> list[np.ndarray]:
    """Dependency coefficients on each candidate subset: Nn (c, m, r), sub (K, r+1) -> r+1 arrays (c, K)."""
    if r == 1:
        x = Nn[:, :, 0]
        return [x[:, sub[:, 1]], -x[:, sub[:, 0]]]
    x, y = Nn[:, :, 0], Nn[:, :, 1]
    X = x[:, :, None] * y[:, None, :] - y[:, :, None] * x[:, None, :]  # 2-D cross products of all pairs
    i, j, k = sub.T
    return [X[:, j, k], X[:, k, i], X[:, i, j]]


def _numpy_block(W, Rhs, mid, h, t_min, t_max):
    """Exact test for one chunk in NumPy (r = 1 or 2).  Returns the per-pose arrays."""
    c_, n, m = W.shape
    r = m - n
    Q, Rr = np.linalg.qr(np.swapaxes(W, 1, 2), mode="complete")  # W^T = Q R
    R1 = Rr[:, :n, :]
    d = np.abs(np.diagonal(R1, axis1=1, axis2=2))
    scale = np.max(np.abs(W), axis=(1, 2))
    ok = np.all(d > 1e-10 * np.maximum(scale, 1e-300)[:, None], axis=1)
    R1 = np.where(ok[:, None, None], R1, np.eye(n))
    Y = np.linalg.solve(np.swapaxes(R1, 1, 2), Rhs)  # R1^T Y = rhs
    P = Q[:, :, :n] @ Y  # (c, m, nr): particular solutions (minimum norm)
    Nn = Q[:, :, n:]  # (c, m, r): orthonormal null-space basis
    cc = P[:, :, 0] - mid

    sub = _subsets(m, r)  # (K, r+1)
    cols = _alphas(Nn, sub, r)
    aa = [np.abs(a) for a in cols]
    S = sum(aa)
    A = sum(a * h[sub[:, q]] for q, a in enumerate(aa))
    B = sum(a * cc[:, sub[:, q]] for q, a in enumerate(cols))
    G = sum(np.abs(sum(a * P[:, sub[:, q], g] for q, a in enumerate(cols))) for g in range(1, P.shape[2]))
    good = S > 1e-12 * np.max(np.sum(Nn * Nn, axis=2), axis=1)[:, None]
    Ssafe = np.where(good, S, 1.0)
    vn = np.where(good, (A - np.abs(B)) / Ssafe, np.inf)
    vb = vn - G / Ssafe if P.shape[2] > 1 else vn
    hmin_i = int(np.argmin(h))
    rows = np.arange(c_)
    kn = np.argmin(vn, axis=1)
    kb = np.argmin(vb, axis=1)
    nom = np.minimum(vn[rows, kn], h[hmin_i])
    box = np.minimum(vb[rows, kb], h[hmin_i])
    single_n = h[hmin_i] <= vn[rows, kn]
    single_b = h[hmin_i] <= vb[rows, kb]

    # tensions at the nominal optimum: the active constraints of the binding subset
    aln = np.stack([a[rows, kn] for a in cols], axis=1)  # (c, r+1)
    sn = np.where(B[rows, kn] >= 0, 1.0, -1.0)
    Sn = S[rows, kn]
    degenerate = single_n | np.any(np.abs(aln) <= 1e-9 * Sn[:, None], axis=1)
    sig = np.sign(aln) * sn[:, None]
    cs = sub[kn]  # (c, r+1) cable indices
    nsub = Nn[rows[:, None], cs]  # (c, r+1, r)
    rhs = sig * (h[cs] - nom[:, None]) - cc[rows[:, None], cs]
    if r == 1:
        j = np.argmax(np.abs(nsub[:, :, 0]), axis=1)
        den = nsub[rows, j, 0]
        lam = (rhs[rows, j] / np.where(den == 0, 1.0, den))[:, None]
    else:
        big = np.argmax(np.abs(aln), axis=1)  # solve with the other two cables
        ja = np.where(big == 0, 1, 0)
        jb = np.where(big == 2, 1, 2)
        na, nb = nsub[rows, ja], nsub[rows, jb]
        det = na[:, 0] * nb[:, 1] - na[:, 1] * nb[:, 0]
        det = np.where(det == 0, 1.0, det)
        ra, rb = rhs[rows, ja], rhs[rows, jb]
        lam = np.stack([(ra * nb[:, 1] - na[:, 1] * rb) / det, (na[:, 0] * rb - ra * nb[:, 0]) / det], axis=1)
    if np.any(degenerate):  # a tied optimum: a point of the optimal segment instead of the vertex
        lam, degenerate = _degenerate_lambda(Nn, cc, h, nom, lam, degenerate, single_n, hmin_i, aln, sn, Sn, cs)
    T = P[:, :, 0] + np.einsum("cir,cr->ci", Nn, lam)
    mt = np.min(np.minimum(T - t_min, t_max - T), axis=1)
    tol = 1e-9 * (1.0 + np.max(np.abs(t_max)))
    degenerate |= ~(np.abs(mt - nom) <= tol)

    # active set at the worst wrench
    alb = np.stack([a[rows, kb] for a in cols], axis=1)
    sb = np.where(B[rows, kb] >= 0, 1.0, -1.0)
    sigb = np.sign(alb) * sb[:, None]
    live = np.abs(alb) > 1e-9 * S[rows, kb][:, None]
    act_lo = np.zeros((c_, m), bool)
    act_hi = np.zeros((c_, m), bool)
    cb = sub[kb]
    act_lo[rows[:, None], cb] = live & (sigb < 0)
    act_hi[rows[:, None], cb] = live & (sigb > 0)
    lim = cb[rows, np.argmax(np.abs(alb), axis=1)]
    act_lo[single_b] = False
    act_hi[single_b] = False
    act_lo[single_b, hmin_i] = True
    act_hi[single_b, hmin_i] = True
    lim = np.where(single_b, hmin_i, lim)

    status = np.where(ok, np.where(degenerate, _TENSIONS_BY_LP, _DONE), _BY_LP).astype(np.int8)
    return T, box, nom, lim, act_lo, act_hi, status


def _interval_middle(f, g, room, tiny):
    """Middle of ``{mu : |f_i + g_i mu| <= room_i for every i}`` (rows of (c, m) arrays).

    Rows with ``|g_i| <= tiny`` do not bound ``mu``; a half-open set gives its one end, an
    unbounded one ``mu = 0``.  At the optimal margin the set is not empty (up to round-off,
    which the caller's check of the tensions catches).
    """
    use = np.abs(g) > tiny
    gs = np.where(use, g, 1.0)
    a = (-room - f) / gs
    b = (room - f) / gs
    lo = np.max(np.where(use, np.minimum(a, b), -np.inf), axis=1)
    hi = np.min(np.where(use, np.maximum(a, b), np.inf), axis=1)
    both = np.isfinite(lo) & np.isfinite(hi)
    return np.where(both, 0.5 * (lo + hi), np.where(np.isfinite(lo), lo, np.where(np.isfinite(hi), hi, 0.0)))


def _degenerate_lambda(Nn, cc, h, nom, lam, degenerate, single_n, hmin_i, aln, sn, Sn, cs):
    """Optimal null-space coordinates where the optimum is not one vertex (NumPy path).

    At the optimal margin ``s`` the feasible set of ``lam`` shrinks to a point, a segment or
    (rarely) more.  A segment arises when the binding dependency involves only ``r`` cables (a
    zero ``alpha``: for ``r = 2`` two cables with parallel null-space rows, as in symmetric poses
    of box-shaped rigs) or when the narrowest cable sits at its centre (``s = min h``).  Then
    ``lam`` lies on a known line (``r = 2``) or anywhere in an interval (``r = 1``), and every
    cable bounds it to an interval along that line; the middle of their intersection is an
    optimal point.  Returns the updated ``lam`` and the poses still unresolved (they go to the LP).
    """
    c_, m, r = Nn.shape
    rows = np.arange(c_)
    room = h[None, :] - nom[:, None]
    tiny = 1e-12 * np.sqrt(np.max(np.sum(Nn * Nn, axis=2), axis=1))[:, None]
    lam = lam.copy()
    if r == 1:
        sel = np.flatnonzero(degenerate)
        mu = _interval_middle(cc[sel], Nn[sel, :, 0], room[sel], tiny[sel])
        lam[sel, 0] = mu
        return lam, np.zeros_like(degenerate)
    # r = 2: the line n_a . lam = beta of the anchor cable a
    zero = np.abs(aln) <= 1e-9 * Sn[:, None]
    nzero = np.sum(zero, axis=1)
    nrm = np.sum(Nn[rows[:, None], cs] ** 2, axis=2)  # (c, 3) squared null-space row norms of the triple
    q = np.argmax(np.where(zero, -1.0, nrm), axis=1)  # the better-conditioned cable of the live pair
    anchor = np.where(single_n, hmin_i, cs[rows, q])
    sig = np.sign(aln[rows, q]) * sn
    beta = np.where(single_n, -cc[:, hmin_i], sig * (h[anchor] - nom) - cc[rows, anchor])
    na = Nn[rows, anchor]
    nn = np.sum(na * na, axis=1)
    line = degenerate & (single_n | (nzero == 1)) & (nn > tiny[:, 0] ** 2)
    sel = np.flatnonzero(line)
    if len(sel):
        na, nn, beta = na[sel], nn[sel], beta[sel]
        lam0 = na * (beta / nn)[:, None]
        d = np.stack([-na[:, 1], na[:, 0]], axis=1) / np.sqrt(nn)[:, None]
        g = np.einsum("cir,cr->ci", Nn[sel], d)
        f = cc[sel] + np.einsum("cir,cr->ci", Nn[sel], lam0)
        mu = _interval_middle(f, g, room[sel], tiny[sel])
        lam[sel] = lam0 + mu[:, None] * d
    return lam, degenerate & ~line


def _run_numpy(W, Rhs, mid, h, t_min, t_max, chunk):
    N, n, m = W.shape
    out = _alloc(N, m)
    for s in range(0, N, chunk):
        e = min(N, s + chunk)
        res = _numpy_block(W[s:e], Rhs[s:e], mid, h, t_min, t_max)
        for arr, val in zip(out, res):
            arr[s:e] = val
    return out


def _alloc(N, m):
    return (np.empty((N, m)), np.empty(N), np.empty(N), np.empty(N, np.int64), np.zeros((N, m), bool),
            np.zeros((N, m), bool), np.empty(N, np.int8))


# --------------------------------------------------------------------------------------
# the same test as a compiled kernel (numba): one pose at a time, no temporaries
# --------------------------------------------------------------------------------------
def _member_py(q, c0, c1, c2, a0, a1, a2):  # pragma: no cover - compiled by numba
    """Cable and dependency coefficient of member ``q`` of a candidate subset kept as scalars."""
    if q == 0:
        return c0, a0
    if q == 1:
        return c1, a1
    return c2, a2


def _kernel_py(W, Rhs, mid, h, t_min, t_max, T, box, nom, lim, act_lo, act_hi, status):  # pragma: no cover
    """Reduced row echelon form with complete pivoting, then the candidate subsets.

    Compiled by numba (the pure-Python body would be far too slow to use); the NumPy path
    :func:`_numpy_block` computes the same quantities and the tests compare the two.
    """
    N, n, m = W.shape
    nr = Rhs.shape[2]
    r = m - n
    hmin_i = 0
    for i in range(m):
        if h[i] < h[hmin_i]:
            hmin_i = i
    tmax_abs = 0.0
    for i in range(m):
        tmax_abs = max(tmax_abs, abs(t_max[i]))
    tol_t = 1e-9 * (1.0 + tmax_abs)
    A = np.empty((n, m + nr))
    piv = np.empty(n, np.int64)
    used = np.empty(m, np.bool_)
    free = np.empty(max(r, 1), np.int64)
    Nn = np.empty((m, max(r, 1)))
    P = np.empty((m, nr))
    cc = np.empty(m)
    lam = np.empty(2)
    for p in range(N):
        for i in range(m):
            act_lo[p, i] = False
            act_hi[p, i] = False
        scale = 0.0
        for i in range(n):
            for j in range(m):
                A[i, j] = W[p, i, j]
                scale = max(scale, abs(W[p, i, j]))
            for g in range(nr):
                A[i, m + g] = Rhs[p, i, g]
        for j in range(m):
            used[j] = False
        ok = True
        for row in range(n):
            best = 0.0
            bi = -1
            bj = -1
            for i in range(row, n):
                for j in range(m):
                    if not used[j]:
                        v = abs(A[i, j])
                        if v > best:
                            best = v
                            bi = i
                            bj = j
            if best <= 1e-10 * scale or bi < 0:
                ok = False
                break
            if bi != row:
                for j in range(m + nr):
                    tmp = A[row, j]
                    A[row, j] = A[bi, j]
                    A[bi, j] = tmp
            used[bj] = True
            piv[row] = bj
            inv = 1.0 / A[row, bj]
            for j in range(m + nr):
                A[row, j] *= inv
            for i in range(n):
                if i != row:
                    f = A[i, bj]
                    if f != 0.0:
                        for j in range(m + nr):
                            A[i, j] -= f * A[row, j]
        if not ok:
            status[p] = 2
            box[p] = -np.inf
            nom[p] = -np.inf
            lim[p] = -1
            for i in range(m):
                T[p, i] = np.nan
            continue
        q = 0
        for j in range(m):
            if not used[j]:
                free[q] = j
                q += 1
        for i in range(m):
            for k in range(r):
                Nn[i, k] = 0.0
            for g in range(nr):
                P[i, g] = 0.0
        for k in range(r):
            Nn[free[k], k] = 1.0
        for row in range(n):
            j = piv[row]
            for k in range(r):
                Nn[j, k] = -A[row, free[k]]
            for g in range(nr):
                P[j, g] = A[row, m + g]
        for i in range(m):
            cc[i] = P[i, 0] - mid[i]
        st = 0
        if r == 0:
            bn = np.inf
            bb = np.inf
            ib = 0
            for i in range(m):
                vn = h[i] - abs(cc[i])
                G = 0.0
                for g in range(1, nr):
                    G += abs(P[i, g])
                if vn < bn:
                    bn = vn
                if vn - G < bb:
                    bb = vn - G
                    ib = i
            for i in range(m):
                T[p, i] = P[i, 0]
                G = 0.0
                for g in range(1, nr):
                    G += abs(P[i, g])
                # unique tensions: every cable out of its range is a reason, plus the binding one
                if i == ib or h[i] - abs(cc[i]) - G < 0.0:
                    if cc[i] < 0.0:
                        act_lo[p, i] = True
                    else:
                        act_hi[p, i] = True
            box[p] = bb
            nom[p] = bn
            lim[p] = ib
            status[p] = 0
            continue
        nsc = 0.0
        for i in range(m):
            s2 = 0.0
            for k in range(r):
                s2 += Nn[i, k] * Nn[i, k]
            nsc = max(nsc, s2)
        stol = 1e-12 * nsc
        # candidates: (value, cables i, j, k, alphas, sign of B)
        bn = h[hmin_i]
        bb = h[hmin_i]
        n_single = True
        b_single = True
        ni0 = nj0 = nk0 = 0
        bi0 = bj0 = bk0 = 0
        na_i = na_j = na_k = 0.0
        ba_i = ba_j = ba_k = 0.0
        n_sgn = 1.0
        b_sgn = 1.0
        n_S = 1.0
        b_S = 1.0
        if r == 1:
            for i in range(m):
                for j in range(i + 1, m):
                    ai = Nn[j, 0]
                    aj = -Nn[i, 0]
                    S = abs(ai) + abs(aj)
                    if S <= stol:
                        continue
                    Av = abs(ai) * h[i] + abs(aj) * h[j]
                    B = ai * cc[i] + aj * cc[j]
                    G = 0.0
                    for g in range(1, nr):
                        G += abs(ai * P[i, g] + aj * P[j, g])
                    num = Av - abs(B)  # compare before dividing: no division for most candidates
                    if num < bn * S:
                        bn = num / S
                        n_single = False
                        ni0 = i
                        nj0 = j
                        na_i = ai
                        na_j = aj
                        n_sgn = 1.0 if B >= 0 else -1.0
                        n_S = S
                    if num - G < bb * S:
                        bb = (num - G) / S
                        b_single = False
                        bi0 = i
                        bj0 = j
                        ba_i = ai
                        ba_j = aj
                        b_sgn = 1.0 if B >= 0 else -1.0
                        b_S = S
        else:
            for i in range(m):
                xi = Nn[i, 0]
                yi = Nn[i, 1]
                for j in range(i + 1, m):
                    xj = Nn[j, 0]
                    yj = Nn[j, 1]
                    ak0 = xi * yj - yi * xj
                    for k in range(j + 1, m):
                        xk = Nn[k, 0]
                        yk = Nn[k, 1]
                        ai = xj * yk - yj * xk
                        aj = xk * yi - yk * xi
                        ak = ak0
                        S = abs(ai) + abs(aj) + abs(ak)
                        if S <= stol:
                            continue
                        Av = abs(ai) * h[i] + abs(aj) * h[j] + abs(ak) * h[k]
                        B = ai * cc[i] + aj * cc[j] + ak * cc[k]
                        G = 0.0
                        for g in range(1, nr):
                            G += abs(ai * P[i, g] + aj * P[j, g] + ak * P[k, g])
                        num = Av - abs(B)  # compare before dividing: no division for most candidates
                        if num < bn * S:
                            bn = num / S
                            n_single = False
                            ni0 = i
                            nj0 = j
                            nk0 = k
                            na_i = ai
                            na_j = aj
                            na_k = ak
                            n_sgn = 1.0 if B >= 0 else -1.0
                            n_S = S
                        if num - G < bb * S:
                            bb = (num - G) / S
                            b_single = False
                            bi0 = i
                            bj0 = j
                            bk0 = k
                            ba_i = ai
                            ba_j = aj
                            ba_k = ak
                            b_sgn = 1.0 if B >= 0 else -1.0
                            b_S = S
        box[p] = bb
        nom[p] = bn
        # tensions at the nominal optimum
        if n_single:
            st = 1
        elif r == 1:
            if abs(na_i) <= 1e-9 * n_S or abs(na_j) <= 1e-9 * n_S:
                st = 1
            else:
                # the cable with the larger null-space component fixes lam
                l0 = ni0 if abs(Nn[ni0, 0]) >= abs(Nn[nj0, 0]) else nj0
                al0 = na_i if l0 == ni0 else na_j
                sg = (1.0 if al0 > 0 else -1.0) * n_sgn
                lam[0] = (sg * (h[l0] - bn) - cc[l0]) / Nn[l0, 0]
        else:
            amin = min(abs(na_i), min(abs(na_j), abs(na_k)))
            if amin <= 1e-9 * n_S:
                st = 1
            else:
                # solve with the two cables whose null-space rows are the least parallel
                if abs(na_i) >= abs(na_j) and abs(na_i) >= abs(na_k):
                    la = nj0
                    lb = nk0
                    sa = na_j
                    sb = na_k
                elif abs(na_j) >= abs(na_k):
                    la = ni0
                    lb = nk0
                    sa = na_i
                    sb = na_k
                else:
                    la = ni0
                    lb = nj0
                    sa = na_i
                    sb = na_j
                ga = (1.0 if sa > 0 else -1.0) * n_sgn
                gb = (1.0 if sb > 0 else -1.0) * n_sgn
                ra = ga * (h[la] - bn) - cc[la]
                rb = gb * (h[lb] - bn) - cc[lb]
                det = Nn[la, 0] * Nn[lb, 1] - Nn[la, 1] * Nn[lb, 0]
                lam[0] = (ra * Nn[lb, 1] - Nn[la, 1] * rb) / det
                lam[1] = (Nn[la, 0] * rb - ra * Nn[lb, 0]) / det
        if st == 1:
            # a tied optimum (see _degenerate_lambda): the middle of the optimal interval along a
            # line (r = 2) or of lam itself (r = 1)
            tiny = 1e-12 * np.sqrt(nsc)
            l00 = 0.0
            l01 = 0.0
            d0 = 1.0
            d1 = 0.0
            line = False
            if r == 1:
                line = True
            else:
                anchor = -1
                beta = 0.0
                if n_single:
                    anchor = hmin_i
                    beta = -cc[hmin_i]
                else:
                    nz = 0
                    best = -1.0
                    for q in range(3):
                        l0, a0 = _member(q, ni0, nj0, nk0, na_i, na_j, na_k)
                        if abs(a0) <= 1e-9 * n_S:
                            nz += 1
                        else:
                            v = Nn[l0, 0] * Nn[l0, 0] + Nn[l0, 1] * Nn[l0, 1]
                            if v > best:
                                best = v
                                anchor = l0
                                beta = ((1.0 if a0 > 0 else -1.0) * n_sgn) * (h[l0] - bn) - cc[l0]
                    if nz != 1:
                        anchor = -1
                if anchor >= 0:
                    nn = Nn[anchor, 0] * Nn[anchor, 0] + Nn[anchor, 1] * Nn[anchor, 1]
                    if nn > tiny * tiny:
                        line = True
                        l00 = Nn[anchor, 0] * (beta / nn)
                        l01 = Nn[anchor, 1] * (beta / nn)
                        sq = np.sqrt(nn)
                        d0 = -Nn[anchor, 1] / sq
                        d1 = Nn[anchor, 0] / sq
            if line:
                lo = -np.inf
                hi = np.inf
                for i in range(m):
                    if r == 1:
                        g = Nn[i, 0]
                        f = cc[i]
                    else:
                        g = Nn[i, 0] * d0 + Nn[i, 1] * d1
                        f = cc[i] + (Nn[i, 0] * l00 + Nn[i, 1] * l01)
                    if abs(g) > tiny:
                        room = h[i] - bn
                        ea = (-room - f) / g
                        eb = (room - f) / g
                        lo = max(lo, min(ea, eb))
                        hi = min(hi, max(ea, eb))
                if np.isfinite(lo) and np.isfinite(hi):
                    mu = 0.5 * (lo + hi)
                elif np.isfinite(lo):
                    mu = lo
                elif np.isfinite(hi):
                    mu = hi
                else:
                    mu = 0.0
                if r == 1:
                    lam[0] = mu
                else:
                    lam[0] = l00 + mu * d0
                    lam[1] = l01 + mu * d1
                st = 0
        if st == 0:
            mt = np.inf
            for i in range(m):
                t = P[i, 0]
                for k in range(r):
                    t += Nn[i, k] * lam[k]
                T[p, i] = t
                mt = min(mt, min(t - t_min[i], t_max[i] - t))
            if not abs(mt - bn) <= tol_t:
                st = 1
        if st == 1:
            for i in range(m):
                T[p, i] = np.nan
        status[p] = st
        # active set at the worst wrench of the box
        if b_single:
            act_lo[p, hmin_i] = True
            act_hi[p, hmin_i] = True
            lim[p] = hmin_i
        else:
            best = -1.0
            lbest = bi0
            for q in range(r + 1):
                l0, a0 = _member(q, bi0, bj0, bk0, ba_i, ba_j, ba_k)
                if abs(a0) > 1e-9 * b_S:
                    if a0 * b_sgn < 0:
                        act_lo[p, l0] = True
                    else:
                        act_hi[p, l0] = True
                if abs(a0) > best:
                    best = abs(a0)
                    lbest = l0
            lim[p] = lbest


def _square3_py(W, w, mid, h, T, box, nom, lim, act_lo, act_hi, status):  # pragma: no cover
    """m = n = 3 without a wrench box: Cramer's rule per pose (compiled by numba).

    The same unique tensions as :func:`~cablekit.statics.solve_square`; the tests compare them.
    """
    N = W.shape[0]
    for p in range(N):
        a00, a01, a02 = W[p, 0, 0], W[p, 0, 1], W[p, 0, 2]
        a10, a11, a12 = W[p, 1, 0], W[p, 1, 1], W[p, 1, 2]
        a20, a21, a22 = W[p, 2, 0], W[p, 2, 1], W[p, 2, 2]
        c0 = a11 * a22 - a12 * a21
        c1 = a12 * a20 - a10 * a22
        c2 = a10 * a21 - a11 * a20
        det = a00 * c0 + a01 * c1 + a02 * c2
        n0 = a00 * a00 + a01 * a01 + a02 * a02
        n1 = a10 * a10 + a11 * a11 + a12 * a12
        n2 = a20 * a20 + a21 * a21 + a22 * a22
        for i in range(3):
            act_lo[p, i] = False
            act_hi[p, i] = False
        if not abs(det) > 1e-12 * np.sqrt(n0 * n1 * n2):
            status[p] = 2
            box[p] = -np.inf
            nom[p] = -np.inf
            lim[p] = -1
            for i in range(3):
                T[p, i] = np.nan
            continue
        b0, b1, b2 = -w[p, 0], -w[p, 1], -w[p, 2]
        inv = 1.0 / det
        T[p, 0] = (b0 * c0 + b1 * (a02 * a21 - a01 * a22) + b2 * (a01 * a12 - a02 * a11)) * inv
        T[p, 1] = (b0 * c1 + b1 * (a00 * a22 - a02 * a20) + b2 * (a02 * a10 - a00 * a12)) * inv
        T[p, 2] = (b0 * c2 + b1 * (a01 * a20 - a00 * a21) + b2 * (a00 * a11 - a01 * a10)) * inv
        best = np.inf
        ib = 0
        for i in range(3):
            v = h[i] - abs(T[p, i] - mid[i])
            if v < best:
                best = v
                ib = i
        for i in range(3):
            if i == ib or h[i] - abs(T[p, i] - mid[i]) < 0.0:
                if T[p, i] < mid[i]:
                    act_lo[p, i] = True
                else:
                    act_hi[p, i] = True
        box[p] = best
        nom[p] = best
        lim[p] = ib
        status[p] = 0


if _numba is not None:
    _member = _numba.njit(cache=True, nogil=True, inline="always")(_member_py)
    _kernel = _numba.njit(cache=True, nogil=True)(_kernel_py)
    _square3 = _numba.njit(cache=True, nogil=True)(_square3_py)
else:  # pragma: no cover
    _member = _kernel = _square3 = None


def _threads() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def _in_threads(work, N, chunk):
    starts = range(0, N, chunk)
    if len(starts) > 1 and _threads() > 1:
        with ThreadPoolExecutor(max_workers=_threads()) as pool:
            list(pool.map(work, starts))
    else:
        for s in starts:
            work(s)


def _run_numba(W, Rhs, mid, h, t_min, t_max, chunk):
    """The compiled kernel over chunks, one thread per core (the kernel releases the GIL)."""
    N, n, m = W.shape
    out = _alloc(N, m)

    def work(s):
        e = min(N, s + chunk)
        _kernel(np.ascontiguousarray(W[s:e]), np.ascontiguousarray(Rhs[s:e]), mid, h, t_min, t_max,
                *(a[s:e] for a in out))

    _in_threads(work, N, chunk)
    return out


def _run_square3(W, w, mid, h, chunk):
    N = W.shape[0]
    out = _alloc(N, 3)
    chunk = 16 * chunk  # a few flops per pose: bigger chunks, less thread overhead

    def work(s):
        e = min(N, s + chunk)
        _square3(np.ascontiguousarray(W[s:e]), np.ascontiguousarray(w[s:e]), mid, h, *(a[s:e] for a in out))

    _in_threads(work, N, chunk)
    return out


# --------------------------------------------------------------------------------------
# the reference path and the public entry point
# --------------------------------------------------------------------------------------
def _lp_active(t, s, t_min, t_max):
    """Active sets of LP tensions: cables within a small tolerance of the margin."""
    tol = 1e-7 * (1.0 + np.max(np.abs(t_max)))
    ok = np.isfinite(s)
    lo = ok[:, None] & ((t - t_min) <= s[:, None] + tol)
    hi = ok[:, None] & ((t_max - t) <= s[:, None] + tol)
    return lo, hi


def _by_lp(W, w, D, t_min, t_max):
    """Per-pose LP for the nominal wrench and every box vertex (the exact fallback)."""
    N, n, m = W.shape
    res = solve_lp(W, w, t_min, t_max)
    margin = res.margin.copy()
    lo, hi = _lp_active(res.tensions, res.margin, t_min, t_max)
    lim = res.limiting_cable.copy()
    if len(D):
        verts = box_vertices(w, np.abs(D).sum(axis=0))
        for v in range(verts.shape[1]):
            rv = solve_lp(W, verts[:, v], t_min, t_max)
            worse = rv.margin < margin
            if np.any(worse):
                margin[worse] = rv.margin[worse]
                vlo, vhi = _lp_active(rv.tensions[worse], rv.margin[worse], t_min, t_max)
                lo[worse], hi[worse] = vlo, vhi
                lim[worse] = rv.limiting_cable[worse]
    return res.tensions, margin, res.margin, lim, lo, hi


def distribute(W, w_ext, t_min, t_max, *, wrench_box=None, backend: str = "auto",
               chunk: int = CHUNK, singular=None) -> TensionDetail:
    """Max-margin tensions, exact feasibility and margin for N poses.

    Parameters
    ----------
    W : (N, n, m) structure matrices (``W t + w_ext = 0``), m >= n.
    w_ext : (N, n) or (n,) external wrench on the platform [N, N*m].
    t_min, t_max : (m,) or scalar tension limits [N].
    wrench_box : optional (n,) half-widths of an axis-aligned box of extra wrenches around
        ``w_ext`` [N, N*m]; the margin is then the least over the whole box (its vertices).
    backend : "auto" (compiled kernel when numba is installed, else NumPy), "numba",
        "numpy", or "lp" (the per-pose scipy HiGHS reference, slow).
    chunk : poses per chunk (NumPy temporaries; one compiled call per chunk and thread).
    singular : optional (N,) bool, poses whose ``W`` is undefined (a cable of zero length, see
        :func:`cablekit.kinematics.zero_length_cables`; their ``W`` may hold NaN).  They are
        not solved and come back infeasible, "no solution / singular" (margin ``-inf``).

    Returns
    -------
    TensionDetail
        ``method`` names the distribution ("max-margin (centred)") and the path used.

    Notes
    -----
    The classification is exact: see the module notes.  Poses the fast path cannot settle
    (rank-deficient ``W``, redundancy above 2) are solved by :func:`cablekit.statics.solve_lp`.
    """
    if backend not in BACKENDS:
        raise ValueError(f"backend must be one of {', '.join(BACKENDS)}, got {backend!r}")
    if backend == "numba" and _kernel is None:
        raise ValueError("backend 'numba' needs the numba package; use 'numpy' or 'auto'")
    W = np.asarray(W, float)
    if W.ndim == 2:
        W = W[None]
    if W.ndim != 3:
        raise ValueError(f"W must have shape (N, n, m), got {W.shape}")
    N, n, m = W.shape
    if m < n:
        raise ValueError(f"{m} cables cannot hold {n} degrees of freedom (need m >= n)")
    if singular is not None and np.any(singular):
        return without_singular(lambda Ws, ws: distribute(Ws, ws, t_min, t_max, wrench_box=wrench_box,
                                                          backend=backend, chunk=chunk), W, w_ext, singular)
    w = np.broadcast_to(np.asarray(w_ext, float), (N, n))
    t_min = np.broadcast_to(np.asarray(t_min, float), (m,)).copy()
    t_max = np.broadcast_to(np.asarray(t_max, float), (m,)).copy()
    for name, arr in (("W", W), ("w_ext", w), ("t_min", t_min), ("t_max", t_max)):
        if not np.all(np.isfinite(arr)):
            where = f" (first at pose {int(np.argwhere(~np.isfinite(arr))[0, 0])})" if arr.ndim >= 2 else ""
            hint = ("; a pose with a cable of zero length has no structure matrix: mark it with singular="
                    if name == "W" else "")
            raise ValueError(f"{name} contains NaN or infinite values{where}{hint}")
    D = np.zeros((0, n)) if wrench_box is None else box_generators(wrench_box, n)
    r = m - n
    mid = 0.5 * (t_max + t_min)
    h = 0.5 * (t_max - t_min)

    if backend == "lp" or r > 2:
        T, margin, nom, lim, lo, hi = _by_lp(W, w, D, t_min, t_max)
        return TensionDetail(tensions=T, feasible=margin >= 0, margin=margin, limiting_cable=lim,
                             method="max-margin (centred) tensions; per-pose linear program (scipy HiGHS)",
                             nominal_margin=nom, active_lower=lo, active_upper=hi, by_lp=np.ones(N, bool))

    use_numba = backend == "numba" or (backend == "auto" and _kernel is not None)
    if r == 0 and n == 3 and len(D) == 0 and use_numba:
        T, margin, nom, lim, lo, hi, status = _run_square3(W, w, mid, h, chunk)
        path = "unique solution (m = n), compiled"
    elif r == 0 and not use_numba:
        T, margin, nom, lim, lo, hi, status = _square_numpy(W, w, D, mid, h, t_min, t_max)
        path = "unique solution (m = n)"
    else:  # the general kernel: right-hand sides are the load and the box generators
        Rhs = np.concatenate([-w[:, :, None], np.broadcast_to(D.T, (N, n, len(D)))], axis=2)
        if use_numba:
            T, margin, nom, lim, lo, hi, status = _run_numba(W, Rhs, mid, h, t_min, t_max, chunk)
            path = "unique solution (m = n), compiled" if r == 0 else f"exact null-space test (m - n = {r}), compiled"
        else:
            T, margin, nom, lim, lo, hi, status = _run_numpy(W, Rhs, mid, h, t_min, t_max, chunk)
            path = f"exact null-space test (m - n = {r}), NumPy"

    # the exact fallback: LP for rank-deficient poses; LP tensions where the optimum is not a vertex
    full = np.flatnonzero(status == _BY_LP)
    if len(full):  # includes singular square W: no tensions or infinitely many
        Tl, ml, nl, ll, lol, hil = _by_lp(W[full], w[full], D, t_min, t_max)
        T[full], margin[full], nom[full], lim[full], lo[full], hi[full] = Tl, ml, nl, ll, lol, hil
    part = np.flatnonzero(status == _TENSIONS_BY_LP)
    if len(part):
        T[part] = solve_lp(W[part], w[part], t_min, t_max).tensions
    by_lp = status != _DONE
    method = f"max-margin (centred) tensions; {path}"
    if np.any(by_lp):
        method += f"; {int(by_lp.sum())} pose(s) by linear program (scipy HiGHS)"
    return TensionDetail(tensions=T, feasible=margin >= 0, margin=margin, limiting_cable=lim, method=method,
                         nominal_margin=nom, active_lower=lo, active_upper=hi, by_lp=by_lp)


def _square_numpy(W, w, D, mid, h, t_min, t_max):
    """m = n in NumPy: :func:`~cablekit.statics.solve_square`, plus the box by linearity."""
    N, n, m = W.shape
    sq = solve_square(W, w, t_min, t_max)
    T = sq.tensions
    ok = np.all(np.isfinite(T), axis=1)
    G = np.zeros((N, m))
    if len(D) and np.any(ok):
        G[ok] = np.abs(np.linalg.solve(W[ok], np.broadcast_to(D.T, (int(ok.sum()), n, len(D))))).sum(axis=2)
    c = T - mid
    slack = h - np.abs(c) - G
    lim = np.where(ok, np.argmin(np.where(ok[:, None], slack, 0.0), axis=1), -1)
    rows = np.arange(N)
    margin = np.where(ok, slack[rows, np.maximum(lim, 0)], -np.inf)
    # unique tensions: every cable out of its range is a reason, plus the binding one
    act = ok[:, None] & ((slack < 0) | (np.arange(m) == lim[:, None]))
    lo = act & (c < 0)
    hi = act & (c >= 0)
    status = np.where(ok, _DONE, _BY_LP).astype(np.int8)
    return T, margin, sq.margin, lim, lo, hi, status
