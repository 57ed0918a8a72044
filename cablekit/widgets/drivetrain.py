"""Drivetrain panel: per-winch sizing with pass / warn / fail.

Shows :func:`cablekit.drive.size_drives` for the shared design (on the shared workspace
result): one row per winch with the highest tension, the motor torque against its ratings,
speed, encoder count rate, length per count, deadband, fleet angle, D/d and drum layers, the
worst status and the limiting item; below it every check that did not pass, with its source;
and the module's bar chart of the share of each limit used.
"""

from __future__ import annotations

import html
import math

import ipywidgets as W

from .base import Panel
from .figure import PlotFigure, show_figure
from .results import drive_result
from .state import DesignState
from .style import MUTED, status_badge, table_html

__all__ = ["DrivetrainPanel"]


class DrivetrainPanel(Panel):
    """Per-winch drivetrain sizing and its checks for the shared design."""

    title = "drivetrain"

    def __init__(self, state: DesignState, **kwargs):
        self.table = W.HTML()
        self.table.add_class("ck-drive-table")
        self.fig = PlotFigure()
        self.fig.update_layout(height=360)
        super().__init__(state, **kwargs)
        self.children = [self.table, self.fig, self.status]
        self.add_class("ck-drivetrain")
        self.refresh()

    def compute(self, design):
        return drive_result(self.state)

    def draw(self, result) -> None:
        rows = []
        for r in result.rows:
            rated = next((c for c in r.checks if c.key == "motor_torque_rated"), None)
            peak = next((c for c in r.checks if c.key == "motor_torque_peak"), None)
            use = (f"{100 * r.torque / rated.limit:.0f} % / {100 * r.peak_torque / peak.limit:.0f} %"
                   if rated and peak and rated.limit > 0 and peak.limit > 0 else "-")
            lim = r.limiting
            rows.append([r.name, f"{r.max_tension:.1f}", f"{r.torque:.3f}", use,
                         f"{r.motor_speed * 60 / (2 * math.pi):.0f}", f"{r.count_rate / 1e3:.1f}",
                         f"{r.length_per_count * 1e6:.1f}", f"{r.deadband * 1e3:.2f}",
                         f"{math.degrees(r.fleet_angle):.2f}" if math.isfinite(r.fleet_angle) else "-",
                         f"{r.drum_ratio:.0f}", f"{r.fill.layers}", (status_badge(r.status),),
                         f"{lim.title} ({lim.status})" if lim is not None else "-"])
        head = ["winch", "F max [N]", "torque [N·m]", "of rated / peak", "motor [rpm]", "counts [kHz]",
                "per count [µm]", "deadband [mm]", "fleet [deg]", "D/d [-]", "layers", "status", "limiting item"]
        notable = [c for c in result.checks if c.status != "pass"]
        checks = table_html(["status", "winch", "check", "value", "limit", "source"],
                            [[(status_badge(c.status),), c.subject, c.title,
                              f"{c.value:.4g} {c.unit}", f"{c.limit:.4g} {c.unit}", c.source] for c in notable])
        counts = {s: sum(c.status == s for c in result.checks) for s in ("pass", "warn", "fail")}
        self.table.value = (
            f"<div style='color:{MUTED};font-size:12px'>highest tensions from {html.escape(result.tension_source)}; "
            f"{result.poses_used} of {result.poses_total} task poses used. Overall {status_badge(result.status)} "
            f"&middot; {len(result.checks)} checks: {counts['pass']} pass, {counts['warn']} warn, "
            f"{counts['fail']} fail</div>" + table_html(head, rows)
            + ("<div style='margin-top:6px'><b>checks not passed</b></div>" + checks if notable else ""))
        show_figure(self.fig, result.figure())
