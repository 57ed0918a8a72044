"""3-D rig view: frame, cables coloured by tension, platform, task region and obstacles.

The platform is shown at a *view pose* picked with three sliders inside the task box
(starting at the design's home pose); the cable tensions there come from
:func:`cablekit.statics.tensions_at`, the cable geometry from
:func:`cablekit.kinematics.cable_vectors`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import partial

import ipywidgets as W
import numpy as np

from ..kinematics import cable_vectors
from ..statics import TensionResult, rotation_matrices, tension_limits, tensions_at
from .base import Panel, set_range
from .figure import PlotFigure
from .state import DesignState
from .style import (FRAME, INFEASIBLE, INK, MUTED, OBSTACLE, PLATFORM, TASK, TENSION_SCALE, figure_layout,
                    table_html)

__all__ = ["RigView", "RigSnapshot"]

# the 12 edges of a box given by its 8 corners in binary order (x fastest)
_EDGES = [(0, 1), (1, 3), (3, 2), (2, 0), (4, 5), (5, 7), (7, 6), (6, 4), (0, 4), (1, 5), (2, 6), (3, 7)]
_CORNERS = np.array([[i & 1, (i >> 1) & 1, (i >> 2) & 1] for i in range(8)], dtype=float)
# two triangles per face of that box, for Mesh3d
_FACES = np.array([[0, 1, 3], [0, 3, 2], [4, 5, 7], [4, 7, 6], [0, 1, 5], [0, 5, 4], [2, 3, 7], [2, 7, 6],
                   [0, 2, 6], [0, 6, 4], [1, 3, 7], [1, 7, 5]])


def _box_corners(lower, upper) -> np.ndarray:
    lo, hi = np.asarray(lower, float), np.asarray(upper, float)
    return lo + _CORNERS * (hi - lo)


def _polyline(corners: np.ndarray, edges=_EDGES) -> np.ndarray:
    """Line segments separated by NaN rows (plotly breaks the line there)."""
    out = []
    for i, j in edges:
        out += [corners[i], corners[j], [np.nan] * 3]
    return np.array(out) if out else np.empty((0, 3))


def _xyz(points: np.ndarray) -> dict:
    """x, y, z lists for plotly, NaN written as None (a gap)."""
    return {k: [None if not np.isfinite(v) else float(v) for v in points[:, i]] for i, k in enumerate("xyz")}


@dataclass(frozen=True)
class RigSnapshot:
    """What the rig view shows: the pose [m, rad], the attachment points in the world [m],
    the tensions at that pose and the cable tension limits [N]."""

    pose: np.ndarray
    attachments_world: np.ndarray
    tensions: TensionResult
    t_max: np.ndarray
    t_min: np.ndarray


class RigView(Panel):
    """The rig in 3-D at a view pose chosen with sliders (x, y, z [m])."""

    title = "rig view"

    def __init__(self, state: DesignState, *, height: int = 520, **kwargs):
        self.fig = PlotFigure()
        self.fig.add_scatter3d(name="frame", mode="lines", line=dict(color=FRAME, width=3), hoverinfo="skip")
        self.fig.add_scatter3d(name="exit points", mode="markers+text", marker=dict(size=4, color=INK),
                               textposition="top center", textfont=dict(size=11, color=INK))
        self.fig.add_scatter3d(name="cables", mode="lines",
                               line=dict(width=6, colorscale=TENSION_SCALE, cmin=0.0, cmax=1.0,
                                         colorbar=dict(title="tension [N]", len=0.6, thickness=12)),
                               hoverinfo="text")
        self.fig.add_scatter3d(name="platform", mode="lines+markers", line=dict(color=PLATFORM, width=5),
                               marker=dict(size=5, color=PLATFORM))
        self.fig.add_scatter3d(name="task region", mode="lines", line=dict(color=TASK, width=3, dash="dash"),
                               hoverinfo="skip")
        self.fig.add_mesh3d(name="obstacles", color=OBSTACLE, opacity=0.35, flatshading=True, hoverinfo="name",
                            showlegend=True)
        self.fig.update_layout(**figure_layout("Rig", height=height, scene=True))
        self.sliders = [W.FloatSlider(description=f"view pose {k} [m]", continuous_update=False, step=0.01,
                                      readout_format=".2f", style={"description_width": "120px"})
                        for k in "xyz"]
        for i, s in enumerate(self.sliders):
            s.observe(partial(self._pose_changed, i), "value")
        self.summary = W.HTML()
        self.summary.add_class("ck-rig-summary")
        self._pose: np.ndarray | None = None
        self._syncing = False
        super().__init__(state, children=[], **kwargs)
        self.children = [W.HBox(self.sliders[:2]), self.sliders[2], self.fig, self.summary, self.status]
        self.add_class("ck-rig-view")
        self._reset_pose(state.design)
        self.refresh()

    # -- the view pose ---------------------------------------------------------------------
    def _reset_pose(self, design) -> None:
        lo = np.array(design.task.box_lower if design.task.box_lower is not None else design.exits.min(axis=0))
        hi = np.array(design.task.box_upper if design.task.box_upper is not None else design.exits.max(axis=0))
        home = np.array(design.home_pose, float)
        pose = home.copy()
        self._syncing = True
        try:
            for k, s in enumerate(self.sliders):
                a, b = float(min(lo[k], home[k])), float(max(hi[k], home[k]))
                if b <= a:
                    b = a + 0.01
                set_range(s, a, b, float(np.clip(pose[k], a, b)))
                pose[k] = s.value
        finally:
            self._syncing = False
        self._pose = pose

    def _pose_changed(self, index: int, change) -> None:
        if self._syncing or self._pose is None:
            return
        self._pose = self._pose.copy()
        self._pose[index] = change.new
        self.refresh()

    def _on_design(self, change) -> None:
        old, new = change.old, change.new
        if old is None or old.dof != new.dof or old.task.box_lower != new.task.box_lower \
                or old.task.box_upper != new.task.box_upper or old.home_pose != new.home_pose:
            self._reset_pose(new)
        super()._on_design(change)

    # -- compute and draw ------------------------------------------------------------------
    def compute(self, design) -> RigSnapshot:
        pose = np.array(self._pose if self._pose is not None else design.home_pose, float)
        if len(pose) != design.dof:
            pose = np.array(design.home_pose, float)
        lim = tension_limits(design)
        tens = tensions_at(design, pose[None, :])
        att = design.exits - cable_vectors(design, pose[None, :])[0]
        return RigSnapshot(pose=pose, attachments_world=att, tensions=tens, t_max=lim.t_max, t_min=lim.t_min)

    def draw(self, snap: RigSnapshot) -> None:
        d = self.state.design
        a = d.exits
        # frame: posts from the floor to each exit above it, plus the exits' bounding box
        posts = []
        for p in a:
            if p[2] > 0:
                posts += [[p[0], p[1], 0.0], p, [np.nan] * 3]
        frame = np.vstack([np.array(posts).reshape(-1, 3), _polyline(_box_corners(a.min(axis=0), a.max(axis=0)))])
        t = snap.tensions.tensions[0]
        scale = float(np.max(snap.t_max))
        cab, colour, text = [], [], []
        for i, name in enumerate(d.cable_names):
            ti = float(t[i]) if np.isfinite(t[i]) else 0.0
            cab += [a[i], snap.attachments_world[i], [np.nan] * 3]
            colour += [ti, ti, ti]
            label = f"{name}: {t[i]:.1f} N" if np.isfinite(t[i]) else f"{name}: no tension solution"
            text += [label, label, ""]
        cab = np.array(cab)
        att = snap.attachments_world
        if d.platform.kind == "rigid" and any(d.platform.body_half_size):
            R = rotation_matrices(snap.pose[None, 3:])[0]
            hb = np.array(d.platform.body_half_size)
            body = snap.pose[:3] + (_box_corners(-hb, hb) @ R.T)
            plat = _polyline(body)
        else:
            plat = att[:1] if d.platform.kind == "point" else np.vstack([att, att[:1]])
        task = (_polyline(_box_corners(d.task.box_lower, d.task.box_upper)) if d.task.box_lower is not None
                else np.array(d.task.points, float).reshape(-1, 3))
        if d.frame.obstacles:
            verts = np.vstack([_box_corners(o.lower, o.upper) for o in d.frame.obstacles])
            faces = np.vstack([_FACES + 8 * k for k in range(len(d.frame.obstacles))])
        else:
            verts, faces = np.zeros((0, 3)), np.zeros((0, 3), int)
        ok = bool(snap.tensions.feasible[0])
        with self.fig.batch_update():
            self.fig.data[0].update(**_xyz(frame))
            self.fig.data[1].update(**_xyz(a), text=d.cable_names)
            self.fig.data[2].update(**_xyz(cab), text=text)
            self.fig.data[2].line.color = colour
            self.fig.data[2].line.cmax = scale
            self.fig.data[3].update(**_xyz(plat))
            self.fig.data[3].line.color = PLATFORM if ok else INFEASIBLE
            self.fig.data[3].marker.color = PLATFORM if ok else INFEASIBLE
            self.fig.data[4].update(**_xyz(task), mode="lines" if d.task.box_lower is not None else "markers")
            self.fig.data[5].update(x=verts[:, 0], y=verts[:, 1], z=verts[:, 2], i=faces[:, 0], j=faces[:, 1],
                                    k=faces[:, 2], visible=bool(d.frame.obstacles))
            self.fig.layout.title.text = (f"platform at ({', '.join(f'{v:.2f}' for v in snap.pose[:3])}) m: "
                                          + ("cables within limits" if ok else "tension limits violated"))
        rows = []
        for i, name in enumerate(d.cable_names):
            ti = t[i]
            use = ti / snap.t_max[i] * 100 if np.isfinite(ti) else np.nan
            rows.append([name, f"{ti:.1f}", f"{snap.t_min[i]:.1f}", f"{snap.t_max[i]:.1f}", f"{use:.0f} %"])
        verdict = ("<span style='color:%s'>every cable between taut and its limit</span>" % TASK if ok else
                   "<span style='color:%s'>a cable is slack or over its limit here</span>" % INFEASIBLE)
        self.summary.value = (f"<div style='color:{MUTED}'>tensions at the view pose ({snap.tensions.method}): "
                              f"{verdict}</div>"
                              + table_html(["cable", "tension [N]", "taut from [N]", "limit [N]", "of limit"], rows))
