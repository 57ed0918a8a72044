"""Arm reach view: the reach envelope coloured by manipulability or the weakest servo's load,
and a tool-tip pivot demonstration (the platform moves while the wrist turns, the tip stays),
with the real tilt of a point platform at that pose (:mod:`cablekit.suspended`).

The envelope is :func:`cablekit.arm.reach` drawn by its own ``.figure()``; the pivot is
:func:`cablekit.tooltip.pivot` for the tip at the centre of the task box, with the arm drawn
by :func:`cablekit.tooltip.arm_world_polyline`.
"""

from __future__ import annotations

from dataclasses import dataclass

import ipywidgets as W
import numpy as np

from ..kinematics import cable_vectors, unit_vectors
from .base import NotAvailable, Panel, optional_module
from .figure import PlotFigure, show_figure
from .results import arm_reach_result, need
from .state import DesignState
from .style import FRAME, PLATFORM, TASK, figure_layout, summary_block

__all__ = ["ArmReachView", "ArmSnapshot"]

_SWEEP = 73  # roll samples of the platform path drawn for the full wrist turn
_STUB = 0.25  # [m] length of cable drawn from the platform in the pivot view


@dataclass(frozen=True)
class ArmSnapshot:
    """What the arm view shows: the reach result, the pivot at the chosen wrist angles, the
    platform path over a full wrist turn (tilt fixed), and the arm's centre line [m]."""

    reach: object
    pivot: object
    sweep: object
    polyline: np.ndarray
    real: object = None  # cablekit.suspended.SuspendedResult at the pivot pose (point platforms), or None


class ArmReachView(Panel):
    """Reach envelope and tool-tip pivoting of the design's arm."""

    title = "arm view"

    def __init__(self, state: DesignState, **kwargs):
        self.colour = W.ToggleButtons(options=[("manipulability", "manipulability"), ("weakest servo", "servo")],
                                      value="servo", style={"button_width": "120px"})
        self.roll = W.FloatSlider(value=0.0, min=-180.0, max=180.0, step=5.0, description="wrist roll [deg]",
                                  continuous_update=False, style={"description_width": "110px"})
        self.tilt = W.FloatSlider(value=30.0, min=-90.0, max=90.0, step=5.0, description="wrist tilt [deg]",
                                  continuous_update=False, style={"description_width": "110px"})
        self.reach_fig = PlotFigure()
        self.reach_fig.update_layout(height=420)
        self.pivot_fig = PlotFigure()
        self.pivot_fig.add_scatter3d(name="cables (first 25 cm)", mode="lines", line=dict(color=FRAME, width=3),
                                     hoverinfo="skip")
        self.pivot_fig.add_scatter3d(name="platform path for a full wrist turn", mode="lines",
                                     line=dict(color=TASK, width=4))
        self.pivot_fig.add_scatter3d(name="arm", mode="lines+markers", line=dict(color=PLATFORM, width=7),
                                     marker=dict(size=3, color=PLATFORM))
        self.pivot_fig.add_scatter3d(name="tool tip (held)", mode="markers",
                                     marker=dict(size=6, color="#b23a2e", symbol="x"))
        self.pivot_fig.update_layout(**figure_layout("Tool-tip pivot", height=420, scene=True))
        self.summary = W.HTML()
        self.summary.add_class("ck-arm-summary")
        super().__init__(state, **kwargs)
        self.children = [self.colour, self.reach_fig, W.HBox([self.roll, self.tilt]), self.pivot_fig, self.summary,
                         self.status]
        self.add_class("ck-arm-view")
        for w in (self.colour, self.roll, self.tilt):
            w.observe(lambda c: self.refresh(), "value")
        self.refresh()

    def compute(self, design) -> ArmSnapshot:
        tooltip = need("tooltip", "tool-tip pivot")
        reach = arm_reach_result(self.state)
        if reach is None:
            raise NotAvailable("this design has no [arm] section: no arm to show")
        if design.task.box_lower is not None:
            tip = 0.5 * (np.asarray(design.task.box_lower) + np.asarray(design.task.box_upper))
        else:
            tip = np.asarray(design.task.points[0], float)
        roll, tilt = np.radians(self.roll.value), np.radians(self.tilt.value)
        piv = tooltip.pivot(design, tip, roll=roll, tilt=tilt)
        sweep = tooltip.pivot(design, tip, roll=np.radians(np.linspace(-180.0, 180.0, _SWEEP)), tilt=tilt)
        line = tooltip.arm_world_polyline(design, piv.platform_poses, piv.joints)[0]
        sus = optional_module("suspended")  # the real tilt the point model assumes away
        real = None
        if sus is not None and sus.tilt_matters(design):
            real = sus.suspended_poses(design, piv.platform_poses[:, :3], joints=piv.joints, holding=True)
        return ArmSnapshot(reach=reach, pivot=piv, sweep=sweep, polyline=line, real=real)

    def draw(self, snap: ArmSnapshot) -> None:
        d = self.state.design
        show_figure(self.reach_fig, snap.reach.figure(color=self.colour.value))
        # the first stretch of each cable from the platform (the scene stays around the arm)
        pose = snap.pivot.platform_poses[:1]
        start = d.exits - cable_vectors(d, pose)[0]
        end = start + _STUB * unit_vectors(d, pose)[0]
        cables = np.concatenate([start[:, None], end[:, None], np.full((d.m, 1, 3), np.nan)], axis=1).reshape(-1, 3)
        path = snap.sweep.platform_poses[:, :3]
        tip = snap.pivot.tips[0]

        def xyz(arr):
            return {k: [None if not np.isfinite(v) else float(v) for v in arr[:, i]] for i, k in enumerate("xyz")}

        with self.pivot_fig.batch_update():
            self.pivot_fig.data[0].update(**xyz(cables))
            self.pivot_fig.data[1].update(**xyz(path))
            self.pivot_fig.data[2].update(**xyz(snap.polyline))
            self.pivot_fig.data[3].update(x=[tip[0]], y=[tip[1]], z=[tip[2]])
            self.pivot_fig.layout.title.text = (f"Tool tip held at ({', '.join(f'{v:.3f}' for v in tip)}) m; "
                                                f"wrist roll {self.roll.value:.0f} deg, tilt {self.tilt.value:.0f} deg")
        err = float(np.max(snap.sweep.tip_error))
        span = float(np.max(np.ptp(path, axis=0))) * 1e3
        ok = bool(np.all(snap.sweep.ok))
        lines = list(snap.reach.summary()) + [
            f"pivot: over a full wrist turn the platform moves within {span:.1f} mm while the tip stays within "
            f"{err:.1e} m of its target; " + ("every pose reachable (joints within limits, platform inside the frame)"
                                              if ok else "some poses are NOT reachable (joint limits or frame)")]
        if snap.real is not None:
            lines.append(f"real platform tilt at this pose, payload held: {np.degrees(snap.real.tilt[0]):.1f} deg; "
                         f"the tool tip lands {1e3 * snap.real.tip_error[0]:.1f} mm from where the level platform "
                         "would put it (cablekit.suspended)")
        self.summary.value = summary_block(lines)
