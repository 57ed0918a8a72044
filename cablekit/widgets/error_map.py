"""Error-propagation map: how far the platform may land from where it is sent.

Per pose of the task grid, the position error predicted by :func:`cablekit.accuracy.accuracy_map`
(first-order propagation of the design's error budget through the symbolic Jacobians, with
sampled builds of the rig for the 95th percentile): pick **all sources** or one source, and
**95th percentile** or **worst case** (interval bound).  One source is shown by running the
same map with an error budget that keeps only that source (every other size set to zero).
The bars show each source's share of the mean-square position error (median over the poses).
"""

from __future__ import annotations

from dataclasses import replace

import ipywidgets as W
import numpy as np

from .base import Panel, optional_module
from .figure import PlotFigure
from .results import accuracy_result, need
from .state import DesignState
from .style import ERROR_SCALE, INK, figure_layout, summary_block

__all__ = ["ErrorMap", "single_source_budget", "SOURCE_FIELDS"]

METRICS = {"p95": "95th percentile", "worst": "worst case"}

# the ErrorBudget fields that carry each source (cablekit.accuracy.SOURCES keys); a one-source
# budget keeps these and zeroes the others.  EA errors act through the elastic stretch, so the
# "rope stiffness EA" map keeps the stretch on.
SOURCE_FIELDS = {
    "quantisation": ("quantisation_counts",),
    "deadband": ("deadband_counts",),
    "home_length": ("home_length",),
    "drum_diameter": ("drum_diameter",),
    "exit_position": ("exit_position",),
    "frame_tilt": ("frame_tilt",),
    "axial_stiffness": ("axial_stiffness_error", "stretch"),
    "stretch": ("stretch",),
    "sag": ("sag",),
}
_OFF = {"exit_position": 0.0, "home_length": 0.0, "frame_tilt": 0.0, "drum_diameter": 0.0, "quantisation_counts": 0.0,
        "deadband_counts": 0.0, "axial_stiffness_error": 0.0, "stretch": False, "sag": False}


def single_source_budget(budget, key: str):
    """``budget`` with every source but ``key`` switched off."""
    if key not in SOURCE_FIELDS:
        raise ValueError(f"unknown error source {key!r}; choose from {', '.join(SOURCE_FIELDS)}")
    keep = SOURCE_FIELDS[key]
    return replace(budget, **{k: v for k, v in _OFF.items() if k not in keep})


class ErrorMap(Panel):
    """Predicted position error over the task region, by source, 95th percentile or worst case."""

    title = "error map"

    def __init__(self, state: DesignState, *, height: int = 460, **kwargs):
        acc = optional_module("accuracy")  # missing: refresh() says "not available yet"
        options = [("all sources", "all")] + ([(s.label, s.key) for s in acc.SOURCES] if acc else [])
        self.source = W.Dropdown(options=options, value="all", description="error source",
                                 layout=W.Layout(width="320px"))
        self.metric = W.ToggleButtons(options=[(v, k) for k, v in METRICS.items()], value="p95",
                                      style={"button_width": "120px"})
        self.map_fig = PlotFigure()
        self.map_fig.add_scatter3d(name="position error", mode="markers",
                                   marker=dict(size=3, colorscale=ERROR_SCALE, colorbar=dict(title="mm", thickness=12)))
        self.map_fig.add_scatter3d(name="exit points", mode="markers", marker=dict(size=4, color=INK))
        self.map_fig.update_layout(**figure_layout("", height=height, scene=True))
        self.share_fig = PlotFigure()
        self.share_fig.add_bar(name="share", orientation="h", marker=dict(color="#8e5572"))
        self.share_fig.update_layout(**figure_layout("share of the mean-square position error (median over poses)",
                                                     height=300))
        self.share_fig.update_xaxes(title="share [%]")
        self.summary = W.HTML()
        self.summary.add_class("ck-error-summary")
        super().__init__(state, **kwargs)
        self.children = [W.HBox([self.source, self.metric]), self.map_fig, self.share_fig, self.summary, self.status]
        self.add_class("ck-error-map")
        self.source.observe(lambda c: self.refresh(), "value")
        self.metric.observe(lambda c: self.refresh(), "value")
        self.refresh()

    def compute(self, design):
        acc = need("accuracy", "error map")
        full = accuracy_result(self.state)
        key = self.source.value
        if key == "all":
            return full, full
        budget = single_source_budget(acc.error_budget(design), key)
        return accuracy_result(self.state, budget=budget, key=key), full

    def draw(self, results) -> None:
        shown, full = results
        d = self.state.design
        values = shown.p95_position if self.metric.value == "p95" else shown.worst_position
        per_pos = shown.per_position(values) * 1e3
        P = len(per_pos)
        pos = np.empty((P, 3))
        pos[shown.position_index] = shown.positions
        ok = np.isfinite(per_pos)
        source_name = next(k for k, v in self.source.options if v == self.source.value)
        ms = np.nanmedian(np.where(full.feasible[:, None], full.source_ms, np.nan), axis=0)
        total = np.nansum(ms)
        share = 100 * ms / total if total > 0 else np.zeros_like(ms)
        a = d.exits
        title = (f"{METRICS[self.metric.value]} position error, {source_name}: "
                 f"worst {np.nanmax(per_pos):.2f} mm" if np.any(ok) else "no feasible pose: no accuracy to show")
        with self.map_fig.batch_update():
            tr = self.map_fig.data[0]
            tr.update(x=pos[ok, 0], y=pos[ok, 1], z=pos[ok, 2],
                      text=[f"{v:.2f} mm" for v in per_pos[ok]], hoverinfo="text+x+y+z")
            tr.marker.color = per_pos[ok]
            self.map_fig.data[1].update(x=a[:, 0], y=a[:, 1], z=a[:, 2], text=d.cable_names)
            self.map_fig.layout.title.text = title
        with self.share_fig.batch_update():
            self.share_fig.data[0].update(x=share, y=list(full.source_labels))
        self.summary.value = summary_block(shown.summary())
