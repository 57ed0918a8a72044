"""Where the payload can go: the workspace map over the task region.

:func:`compute_workspace` samples the task region (:func:`cablekit.region.task_poses`),
finds for every pose whether the platform can hold its load with every cable between taut
and its limit (exact, :func:`cablekit.tension.distribute`), and checks the geometry: cables
touching each other, a cable through the platform body, a cable through a declared obstacle.
The result, :class:`WorkspaceResult`, carries per-pose verdicts, margins, tensions and reason
codes, and gives a text summary, plotly figures and a result file.

A pose is **feasible** when its tension margin over the whole wrench box is >= 0
(wrench-feasible workspace, Gouttefarde, Merlet and Daney 2007) and no geometric reason
forbids it.  A **position** is covered when every orientation of the set is feasible there.
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
``clearance`` (N,), ``tensions`` (N, m), ``limiting_cable`` (N,), ``reasons`` (N,) uint8,
``t_min``, ``t_max`` (m,), ``wrench_box``, ``extra_wrench`` (n,).

References
----------
Gouttefarde, M., Merlet, J.-P., Daney, D. "Wrench-feasible workspace of parallel cable-driven
mechanisms". IEEE ICRA 2007.
Ericson, C. *Real-Time Collision Detection*. Morgan Kaufmann, 2005, sec. 5.1.9 (closest
points of two segments) and sec. 5.3.3 (segment against an axis-aligned box, slab test).
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
from .region import task_poses
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
    "design_checks",
]

FORMAT = "cablekit-workspace/1"
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
        I = np.array([p[0] for p in pairs])
        J = np.array([p[1] for p in pairs])
        dist = segment_distances(att[:, I], np.broadcast_to(a[I], att[:, I].shape),
                                 att[:, J], np.broadcast_to(a[J], att[:, J].shape))
        clearance = np.min(dist, axis=1) - 2 * radius
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
        lines.append(f"  sampled  : {grid}, grid step {self.step * 1e3:g} mm")
        load = "gravity"
        if np.any(self.extra_wrench != 0):
            load += " + extra wrench (" + ", ".join(f"{v:g}" for v in self.extra_wrench) + ")"
        if np.any(self.wrench_box > 0):
            f = ", ".join(f"{v:g}" for v in self.wrench_box[:3])
            load += f" + wrench box +/-({f}) N"
            if len(self.wrench_box) == 6:
                load += " +/-(" + ", ".join(f"{v:g}" for v in self.wrench_box[3:]) + ") N*m"
        lines.append(f"  load     : {load}")
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
    missing = [k for k in (*_ARRAY_FIELDS, "meta", "axis_x", "axis_y", "axis_z", "box_lower", "box_upper")
               if k not in data]
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


def compute_workspace(design, *, step: float | None = None, orientations=None, extra_wrench=None,
                      progress=None, backend: str = "auto") -> WorkspaceResult:
    """Classify every pose of the task region.

    Parameters
    ----------
    design : Design
    step : grid step [m]; default ``design.task.step``.
    orientations : (K, 3) roll, pitch, yaw [rad] for rigid platforms; default the task's set.
    extra_wrench : (n,) constant wrench added to gravity [N, N*m] (e.g. a process force).
    progress : optional callable ``progress(done, total)`` called after each chunk of poses.
    backend : tension backend, see :func:`cablekit.tension.distribute`.

    Returns
    -------
    WorkspaceResult

    Raises
    ------
    ValueError
        A non-positive or non-finite step, an empty task region or orientation set, a bad
        extra wrench (see :func:`cablekit.region.task_poses`).
    """
    grid = task_poses(design, step=step, orientations=orientations)
    n, m = design.dof, design.m
    extra = np.zeros(n) if extra_wrench is None else np.asarray(extra_wrench, float).reshape(-1)
    if extra.shape != (n,) or not np.all(np.isfinite(extra)):
        raise ValueError(f"extra wrench must be {n} finite numbers [N{', N*m' if n == 6 else ''}], got {extra.tolist()}")
    box = np.asarray(design.task.wrench_box[:n], float)
    lim = tension_limits(design)
    pairs = _cable_pairs(design)
    q_all = grid.poses
    N = len(q_all)
    out = {k: np.empty(N, t) for k, t in (("margin", float), ("static_margin", float), ("clearance", float),
                                          ("limiting_cable", np.int64), ("reasons", np.uint8),
                                          ("static_ok", bool))}
    tensions = np.empty((N, m))
    methods, lp_poses = set(), 0
    motor = np.array([x == "motor" for x in lim.limited_by])
    stated = np.array([x == "stated" for x in lim.limited_by])
    loaded = bool(np.any(box > 0) or np.any(extra != 0))  # else the static map is the same map
    if progress is not None:
        progress(0, N)
    for s in range(0, N, CHUNK):
        e = min(N, s + CHUNK)
        q = q_all[s:e]
        W = structure_matrix(design, q)
        w_g = external_wrench(design, q)
        sing = np.any(zero_length_cables(design, q), axis=1)  # attachment at an exit: no solution / singular
        res = distribute(W, w_g + extra, lim.t_min, lim.t_max, wrench_box=box if np.any(box > 0) else None,
                         backend=backend, singular=sing)
        stat = distribute(W, w_g, lim.t_min, lim.t_max, backend=backend, singular=sing) if loaded else res
        methods.add(res.method.split("; ")[1])
        lp_poses += int(res.by_lp.sum()) + (int(stat.by_lp.sum()) if loaded else 0)
        clearance, body, obstacle = _geometry(design, q, pairs)
        rs = np.zeros(e - s, np.uint8)
        bad = ~res.feasible
        rs |= np.where(bad & ~np.isfinite(res.margin), REASON_BITS["no_solution"], 0).astype(np.uint8)
        tb = bad & np.isfinite(res.margin)
        rs |= np.where(tb & np.any(res.active_lower, axis=1), REASON_BITS["slack"], 0).astype(np.uint8)
        rs |= np.where(tb & np.any(res.active_upper & ~motor & ~stated, axis=1), REASON_BITS["rope"], 0).astype(np.uint8)
        rs |= np.where(tb & np.any(res.active_upper & stated, axis=1), REASON_BITS["stated"], 0).astype(np.uint8)
        rs |= np.where(tb & np.any(res.active_upper & motor, axis=1), REASON_BITS["motor"], 0).astype(np.uint8)
        rs |= np.where(clearance < 0, REASON_BITS["interference"], 0).astype(np.uint8)
        rs |= np.where(body, REASON_BITS["body"], 0).astype(np.uint8)
        rs |= np.where(obstacle, REASON_BITS["obstacle"], 0).astype(np.uint8)
        geom_ok = (clearance >= 0) & ~body & ~obstacle
        out["margin"][s:e] = res.margin
        out["static_margin"][s:e] = stat.margin
        out["clearance"][s:e] = clearance
        out["limiting_cable"][s:e] = res.limiting_cable
        out["reasons"][s:e] = rs
        out["static_ok"][s:e] = stat.feasible & geom_ok
        tensions[s:e] = res.tensions
        if progress is not None:
            progress(e, N)
    method = "; ".join(sorted(methods))
    if lp_poses:
        method += f"; {lp_poses} pose solve(s) by linear program (scipy HiGHS)"
    t = design.task
    return WorkspaceResult(
        design_name=design.meta.name, kind=design.platform.kind, cable_names=tuple(design.cable_names),
        limited_by=tuple(lim.limited_by), method=f"max-margin (centred) tensions; {method}",
        suspended=_suspended(design, grid.positions), step=float(grid.step), poses=q_all, positions=grid.positions,
        orientations=(np.zeros((1, 3)) if n == 3 else np.array(
            t.orientations if orientations is None else orientations, float).reshape(-1, 3)),
        orientation_index=grid.orientation_index, position_index=grid.position_index, from_box=grid.from_box,
        axes=grid.axes, box_lower=None if t.box_lower is None else np.array(t.box_lower, float),
        box_upper=None if t.box_upper is None else np.array(t.box_upper, float), exits=design.exits,
        feasible=out["reasons"] == 0, margin=out["margin"], static_feasible=out["static_ok"],
        static_margin=out["static_margin"], clearance=out["clearance"], tensions=tensions,
        limiting_cable=out["limiting_cable"], reasons=out["reasons"], t_min=lim.t_min, t_max=lim.t_max,
        wrench_box=box, extra_wrench=extra, lp_poses=lp_poses)


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
    checks.append(Check("tension_margin", "task region", "Least tension margin over the task region",
                        value, 0.0, "N", margin, status,
                        f"{_WFW_SOURCE}; warn below {100 * share:g} % of the tension range: "
                        f"{PRACTICE['tension_margin_warn'].source}",
                        f"at {ws._pose_text(k)}, cable {cable}"))

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
