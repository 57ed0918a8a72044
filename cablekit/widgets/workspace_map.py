"""Workspace and tension map: where the platform can hold its load, by how much, and why not.

Shows, over the task grid, the tension margin (distance of the best tensions to the nearest
limit [N]), the highest cable tension [N] or the limiting reason, as a horizontal slice at a
chosen height or as a 3-D cloud of the feasible positions.  The numbers come from
:func:`cablekit.workspace.compute_workspace`; the map only reshapes them for plotting.
"""

from __future__ import annotations

from dataclasses import dataclass

import ipywidgets as W
import numpy as np

from ..region import task_poses
from .base import Panel
from .figure import PlotFigure
from .results import workspace_result
from .state import DesignState
from .style import (FEASIBLE, INFEASIBLE, INK, MARGIN_SCALE, OBSTACLE, TENSION_SCALE, figure_layout, summary_block,
                    table_html)

__all__ = ["WorkspaceMap", "MapData"]

MAX_MAP_POSES = 250_000  # poses an interactive map computes and draws (finer maps: the command line)
QUANTITIES = {"margin": "tension margin [N]", "tension": "highest cable tension [N]", "reason": "limiting reason"}


@dataclass(frozen=True)
class MapData:
    """A workspace result reshaped for plotting (per grid position, worst orientation).

    result : the workspace module's result object (kept for other panels and the sheet);
    axes : grid axes x, y, z [m]; margin, tension : (nx, ny, nz) [N]; feasible : (nx, ny, nz)
    bool; reason : (nx, ny, nz) index into ``reasons`` (labels) and ``reason_keys`` (names of
    :data:`cablekit.workspace.REASONS`, "feasible" first); summary : the result's text lines.
    """

    result: object
    axes: tuple
    margin: np.ndarray
    tension: np.ndarray
    feasible: np.ndarray
    reason: np.ndarray
    reasons: tuple
    reason_keys: tuple
    summary: tuple


def map_data(ws) -> MapData:
    """Reshape a :func:`cablekit.workspace.compute_workspace` result onto its box grid.

    Per grid position: the worst orientation's margin and status (the result's own
    ``position_margin`` and ``position_status``), and the highest cable tension over the
    orientations.
    """
    if ws.axes is None:
        raise ValueError("the task region has no box: the map needs a task box (task points alone are "
                         "listed by `cablekit workspace`, not mapped)")
    from ..workspace import REASONS

    shape = tuple(len(a) for a in ws.axes)
    box = ws.from_box
    names = ("feasible", *REASONS)
    status = ws.position_status()[box]
    code = np.zeros(len(status), int)
    for i, name in enumerate(names):
        code[status == name] = i
    per_pose = np.max(np.where(np.isfinite(ws.tensions), ws.tensions, -np.inf), axis=1)
    tension = np.full(len(ws.positions), -np.inf)
    np.maximum.at(tension, ws.position_index, per_pose)
    tension[~np.isfinite(tension)] = np.nan
    labels = ("feasible", *(REASONS[k][1] for k in REASONS))
    return MapData(result=ws, axes=ws.axes, margin=ws.position_margin[box].reshape(shape),
                   tension=tension[box].reshape(shape), feasible=ws.position_feasible[box].reshape(shape),
                   reason=code.reshape(shape), reasons=labels, reason_keys=names, summary=tuple(ws.summary()))


class WorkspaceMap(Panel):
    """Feasible region, tension margin and limiting reason over the task grid."""

    title = "workspace map"

    def __init__(self, state: DesignState, *, height: int = 460, step: float | None = None, **kwargs):
        self.quantity = W.Dropdown(options=[(v, k) for k, v in QUANTITIES.items()], value="margin",
                                   description="show", layout=W.Layout(width="290px"))
        self.view = W.ToggleButtons(options=[("slice", "slice"), ("3-D", "3d")], value="slice",
                                    style={"button_width": "70px"})
        self.slice_z = W.SelectionSlider(options=[("-", 0)], description="slice height z [m]",
                                         continuous_update=False, style={"description_width": "120px"},
                                         layout=W.Layout(width="420px"))
        self.slice_z.add_class("ck-slice")
        self.step = W.FloatText(value=round((step or state.design.task.step) * 1e3, 6), description="grid step [mm]",
                                continuous_update=False, style={"description_width": "100px"},
                                layout=W.Layout(width="200px"))
        self.slice_fig = PlotFigure()
        self.slice_fig.add_heatmap(name="map", colorscale=MARGIN_SCALE, zmid=0.0,
                                   colorbar=dict(title="", thickness=12), hoverongaps=False)
        self.slice_fig.add_contour(name="feasible border", showscale=False, contours=dict(
            start=0.0, end=0.0, size=1.0, coloring="lines"), line=dict(color=INK, width=2), hoverinfo="skip")
        self.slice_fig.add_scatter(name="exit points", mode="markers+text", marker=dict(color=INK, size=8,
                                   symbol="diamond"), textposition="top center")
        self.slice_fig.update_layout(**figure_layout("", height=height))
        self.slice_fig.update_xaxes(title="x [m]")
        self.slice_fig.update_yaxes(title="y [m]", scaleanchor="x")
        self.cloud_fig = PlotFigure()
        self.cloud_fig.add_scatter3d(name="feasible positions", mode="markers",
                                     marker=dict(size=3, colorscale=MARGIN_SCALE, colorbar=dict(thickness=12)))
        self.cloud_fig.add_scatter3d(name="exit points", mode="markers", marker=dict(size=4, color=INK))
        self.cloud_fig.update_layout(**figure_layout("", height=height, scene=True))
        self.summary = W.HTML()
        self.summary.add_class("ck-ws-summary")
        super().__init__(state, **kwargs)
        self._figs = W.Box([self.slice_fig])
        self.children = [W.HBox([self.quantity, self.view, self.step]), self.slice_z, self._figs, self.summary,
                         self.status]
        self.add_class("ck-workspace-map")
        self.quantity.observe(lambda c: self._redraw(), "value")
        self.slice_z.observe(lambda c: self._redraw(), "value")
        self.view.observe(self._switch, "value")
        self.step.observe(lambda c: self.refresh(), "value")
        self.refresh()

    # -- compute ----------------------------------------------------------------------------
    def compute(self, design) -> MapData:
        step = self.step.value * 1e-3
        if not np.isfinite(step) or step <= 0:
            raise ValueError(f"grid step: a positive length in mm, got {self.step.value!r}")
        n = len(task_poses(design, step=step).poses)
        if n > MAX_MAP_POSES:
            raise ValueError(f"grid step: {self.step.value:g} mm gives {n:,} poses, more than the "
                             f"{MAX_MAP_POSES:,} an interactive map draws; use a coarser step here, or "
                             "`cablekit workspace DESIGN --step ...` for a finer map")
        return map_data(workspace_result(self.state, step))

    # -- draw -------------------------------------------------------------------------------
    def _switch(self, change) -> None:
        self._figs.children = [self.slice_fig if change.new == "slice" else self.cloud_fig]
        self._redraw()

    def _redraw(self) -> None:
        if self.result is not None:
            self.draw(self.result, levels=False)

    def _values(self, data: MapData):
        q = self.quantity.value
        if q == "margin":
            return data.margin, MARGIN_SCALE, "margin [N]"
        if q == "tension":
            return data.tension, TENSION_SCALE, "tension [N]"
        return data.reason.astype(float), None, "reason"

    def draw(self, data: MapData, *, levels: bool = True) -> None:
        d = self.state.design
        x, y, z = data.axes
        if levels:
            opts = [(f"{v:.2f}", k) for k, v in enumerate(z)]
            if [o[0] for o in self.slice_z.options] != [o[0] for o in opts]:
                first = self.result is None  # the first map opens at mid-height
                keep = len(z) // 2 if first else min(self.slice_z.value, len(z) - 1)
                self.slice_z.options = opts
                self.slice_z.value = keep
        k = self.slice_z.value
        values, scale, label = self._values(data)
        reason_scale = None
        if scale is None:
            from ..workspace import COLOURS

            n = len(data.reasons)
            reason_scale = []
            for i, key in enumerate(data.reason_keys):
                reason_scale += [[i / n, COLOURS[key]], [(i + 1) / n, COLOURS[key]]]
        a = d.exits
        share = float(data.feasible.mean() * 100)
        title = f"{share:.1f} % of the task grid feasible; {QUANTITIES[self.quantity.value]}"
        if self.view.value == "slice":
            sl = values[:, :, k].T
            sl = np.where(np.isfinite(sl), sl, np.nan)
            with self.slice_fig.batch_update():
                hm = self.slice_fig.data[0]
                hm.update(x=x, y=y, z=sl, colorscale=scale or reason_scale, zmid=0.0 if scale is MARGIN_SCALE else None)
                hm.colorbar.title.text = label
                if scale is None:
                    hm.update(zmin=-0.5, zmax=len(data.reasons) - 0.5, zauto=False,
                              colorbar=dict(tickvals=list(range(len(data.reasons))), ticktext=list(data.reasons)))
                else:
                    hm.update(zauto=True, colorbar=dict(tickvals=None, ticktext=None))
                self.slice_fig.data[1].update(x=x, y=y, z=np.where(np.isfinite(data.margin[:, :, k].T),
                                                                   data.margin[:, :, k].T, -1e9))
                self.slice_fig.data[2].update(x=a[:, 0], y=a[:, 1], text=d.cable_names)
                self.slice_fig.layout.shapes = [
                    dict(type="rect", x0=o.lower[0], x1=o.upper[0], y0=o.lower[1], y1=o.upper[1],
                         line=dict(color=OBSTACLE, dash="dot"), fillcolor="rgba(0,0,0,0)")
                    for o in d.frame.obstacles if o.lower[2] <= z[k] <= o.upper[2]]
                self.slice_fig.layout.title.text = f"{title}, slice at z = {z[k]:.2f} m"
        else:
            X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
            # margin and tension: the feasible region; reason: every position, coloured by why
            mask = data.feasible if scale is not None else np.ones_like(data.feasible)
            with self.cloud_fig.batch_update():
                cl = self.cloud_fig.data[0]
                cl.update(x=X[mask], y=Y[mask], z=Z[mask])
                cl.marker.color = values[mask]
                cl.marker.colorscale = scale or reason_scale
                cl.marker.colorbar.title.text = label
                self.cloud_fig.data[1].update(x=a[:, 0], y=a[:, 1], z=a[:, 2])
                self.cloud_fig.layout.title.text = title + (" (feasible positions shown)" if scale is not None else "")
        counts = np.bincount(data.reason.ravel(), minlength=len(data.reasons))
        reason_rows = [[label, f"{c:,}", f"{c / data.reason.size * 100:.1f} %"]
                       for label, c in zip(data.reasons, counts) if c]
        self.summary.value = (
            f"<div class='ck-ws-headline' style='font-size:14px;color:{FEASIBLE if share > 99.999 else INFEASIBLE}'>"
            f"feasible share of the task grid: <b class='ck-ws-share'>{share:.1f} %</b></div>"
            + summary_block(data.summary)
            + table_html(["grid positions by limiting reason", "positions", "share"], reason_rows))
