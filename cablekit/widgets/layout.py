"""The layout editor: frame, exit points, masses, rope and winch, task box (units in labels).

Every control sends its edit to the shared :class:`~cablekit.widgets.state.DesignState`,
which validates it; a rejected edit leaves the value typed in place, shows the validation
message in the banner at the top, and every panel keeps its last valid results.  Sliders
report on release (``continuous_update=False``) and text boxes on Enter or when they lose
focus, so typing never triggers a computation.
"""

from __future__ import annotations

import math
from functools import partial

import ipywidgets as W

from . import edits
from .base import ProblemsBanner
from .state import DesignState

__all__ = ["LayoutEditor"]

_LABEL = {"description_width": "210px"}
_WIDE = W.Layout(width="420px")
_CELL = W.Layout(width="92px")


def _slider(description: str, value: float, *, lo: float, hi: float, step: float) -> W.FloatSlider:
    s = W.FloatSlider(value=value, min=lo, max=hi, step=step, description=description, continuous_update=False,
                      readout_format=".2f", style=_LABEL, layout=_WIDE)
    s.add_class("ck-slider")
    return s


def _show(widget, value: float) -> None:
    """Show ``value`` unless the widget already shows it (to rounding noise).

    Echoing a value that differs only by rounding would be sent to the page and could
    overwrite a newer value the user is still stepping to with the keyboard.
    """
    value = float(f"{value:.10g}")  # 2.0000000000000004 mm is shown as 2
    if not math.isclose(widget.value, value, rel_tol=1e-9, abs_tol=1e-12):
        widget.value = value


def _number(description: str, value: float) -> W.FloatText:
    return W.FloatText(value=value, description=description, style=_LABEL, layout=W.Layout(width="330px"),
                       continuous_update=False)


class LayoutEditor(W.VBox):
    """Edit the rig's layout; every accepted edit updates every panel sharing ``state``.

    Controls (SI inside, display units in each label):

    * frame: footprint width x [m], depth y [m], height of the top exits z [m], number of
      winches (point platforms: re-lays the exits on a regular polygon), exit points [m];
    * platform size x, y, z [m] (rigid platforms: scales the attachments and the body box),
      platform mass [kg], payload mass [kg];
    * rope: a rope from the catalogue (:func:`cablekit.cables.rope_catalogue`), or diameter
      [mm], minimum breaking force [kN], axial stiffness EA [kN], least taut tension [N];
    * winches (all of them): drum diameter [mm], gear ratio [-], gear efficiency [-], motor
      rated and peak torque [N·m], brake holding torque [N·m] (braked winches only);
    * task box corners [m] and the task's largest acceleration in any direction [m/s²].
    """

    def __init__(self, state: DesignState, **kwargs):
        self.state = state
        self._syncing = False
        d = state.design
        w, dep, h = edits.frame_extent(d)
        self.width = _slider("footprint width x [m]", w, lo=0.2, hi=max(10.0, 3 * w), step=0.05)
        self.depth = _slider("footprint depth y [m]", dep, lo=0.2, hi=max(10.0, 3 * dep), step=0.05)
        self.height = _slider("frame height, top exits z [m]", h, lo=0.2, hi=max(10.0, 3 * h), step=0.05)
        self.winch_count = W.IntSlider(value=d.m, min=3, max=12, description="number of winches [-]",
                                       continuous_update=False, style=_LABEL, layout=_WIDE)
        self.exit_rows = W.VBox()
        self.exit_rows.add_class("ck-exits")
        self.platform_size = [W.FloatText(layout=_CELL, continuous_update=False) for _ in range(3)]
        self.platform_mass = _number("platform mass [kg]", d.platform.mass)
        self.payload_mass = _number("payload mass [kg]", d.payload.mass)
        self._ropes = self._catalogue()
        self.rope_choice = W.Dropdown(options=[("keep the rope below", -1)] + [
            (f"{r.designation}: {r.construction} {r.material}, {r.diameter * 1e3:g} mm, MBF {r.breaking_force / 1e3:.2f} kN", k)
            for k, r in enumerate(self._ropes)], value=-1, description="rope from the catalogue",
            style=_LABEL, layout=W.Layout(width="420px"))
        self.rope_diameter = _number("rope diameter [mm]", d.cable.diameter * 1e3)
        self.rope_mbf = _number("min. breaking force [kN]", d.cable.breaking_force / 1e3)
        self.rope_ea = _number("axial stiffness EA [kN]", d.cable.axial_stiffness / 1e3)
        self.rope_tmin = _number("least taut tension [N]", d.cable.min_tension)
        w0 = d.winches[0]
        self.drum_diameter = _number("drum diameter [mm]", w0.drum_diameter * 1e3)
        self.gear_ratio = _number("gear ratio, motor:drum [-]", w0.gear_ratio)
        self.efficiency = _number("gear efficiency [-]", w0.efficiency)
        self.rated_torque = _number("motor rated torque [N·m]", w0.motor_rated_torque)
        self.peak_torque = _number("motor peak torque [N·m]", w0.motor_peak_torque)
        self.brake_torque = _number("brake holding torque [N·m]", w0.brake_holding_torque or 0.0)
        self.acceleration = _number("task acceleration, any direction [m/s²]", d.task.acceleration)
        self.task_lower = [W.FloatText(layout=_CELL, continuous_update=False) for _ in range(3)]
        self.task_upper = [W.FloatText(layout=_CELL, continuous_update=False) for _ in range(3)]
        self.banner = ProblemsBanner(state)

        self.width.observe(partial(self._frame, "width"), "value")
        self.depth.observe(partial(self._frame, "depth"), "value")
        self.height.observe(partial(self._frame, "height"), "value")
        self.winch_count.observe(self._winches, "value")
        self.platform_mass.observe(lambda c: self._edit("platform mass", edits.with_masses, platform=c.new), "value")
        self.payload_mass.observe(lambda c: self._edit("payload mass", edits.with_masses, payload=c.new), "value")
        self.rope_diameter.observe(lambda c: self._edit("rope diameter", edits.with_cable, diameter=c.new * 1e-3), "value")
        self.rope_mbf.observe(lambda c: self._edit("breaking force", edits.with_cable, breaking_force=c.new * 1e3), "value")
        self.rope_ea.observe(lambda c: self._edit("axial stiffness", edits.with_cable, axial_stiffness=c.new * 1e3), "value")
        self.rope_tmin.observe(lambda c: self._edit("least taut tension", edits.with_cable, min_tension=c.new), "value")
        self.drum_diameter.observe(lambda c: self._edit("drum diameter", edits.with_winches, drum_diameter=c.new * 1e-3), "value")
        self.gear_ratio.observe(lambda c: self._edit("gear ratio", edits.with_winches, gear_ratio=c.new), "value")
        self.efficiency.observe(lambda c: self._edit("gear efficiency", edits.with_winches, efficiency=c.new), "value")
        self.rated_torque.observe(lambda c: self._edit("motor rated torque", edits.with_winches, motor_rated_torque=c.new), "value")
        self.peak_torque.observe(lambda c: self._edit("motor peak torque", edits.with_winches, motor_peak_torque=c.new), "value")
        self.brake_torque.observe(lambda c: self._edit("brake holding torque", edits.with_winches,
                                                       brake_holding_torque=c.new), "value")
        self.acceleration.observe(lambda c: self._edit("task acceleration", edits.with_task_acceleration,
                                                       acceleration=c.new), "value")
        for box in (*self.task_lower, *self.task_upper):
            box.observe(self._task_box, "value")
        for box in self.platform_size:
            box.observe(self._platform_size, "value")
        self.rope_choice.observe(self._rope_choice, "value")

        def section(title, *items):
            head = W.HTML(f"<b>{title}</b>")
            return W.VBox([head, *items], layout=W.Layout(margin="4px 0 6px 0"))

        task_grid = W.GridBox(
            [W.Label(""), W.Label("x [m]"), W.Label("y [m]"), W.Label("z [m]"),
             W.Label("lower corner"), *self.task_lower, W.Label("upper corner"), *self.task_upper],
            layout=W.Layout(grid_template_columns="110px 96px 96px 96px"))
        children = [
            self.banner,
            section("Frame", self.width, self.depth, self.height, self.winch_count,
                    W.HTML("exit points, where each cable leaves the frame [m]:"), self.exit_rows),
            section("Platform and payload",
                    W.HBox([W.Label("platform size x, y, z [m]", layout=W.Layout(width="214px")),
                            *self.platform_size]),
                    self.platform_mass, self.payload_mass),
            section("Rope (every cable)", self.rope_choice, self.rope_diameter, self.rope_mbf, self.rope_ea,
                    self.rope_tmin,
                    W.HTML("<span style='font-size:11px'>a catalogue rope sets diameter and breaking force; "
                           "check its axial stiffness and weight per metre</span>")),
            section("Winches (every winch)", self.drum_diameter, self.gear_ratio, self.efficiency,
                    self.rated_torque, self.peak_torque, self.brake_torque),
            section("Task box", task_grid, self.acceleration),
        ]
        super().__init__(children=children, **kwargs)
        self.add_class("ck-layout-editor")
        state.observe(self._sync, "design")
        self._sync()

    # -- edits ----------------------------------------------------------------------------
    def _edit(self, what: str, fn, **kwargs) -> bool:
        if self._syncing:
            return False
        return self.state.propose(lambda d: fn(d, **kwargs), what=what)

    def _frame(self, name: str, change) -> None:
        self._edit(f"frame {name}", edits.with_frame_extent, **{name: change.new})

    def _winches(self, change) -> None:
        self._edit("number of winches", edits.with_winch_count, count=change.new)

    def _exit(self, index: int, change) -> None:
        row = self.exit_rows.children[index].children
        pos = [box.value for box in row[1:4]]
        self._edit(f"exit point {index + 1}", edits.with_exit_position, index=index, position=pos)

    def _platform_size(self, change) -> None:
        self._edit("platform size", edits.with_platform_size, size=[b.value for b in self.platform_size])

    def _rope_choice(self, change) -> None:
        if change.new is not None and change.new >= 0:
            self._edit("catalogue rope", edits.with_catalogue_rope, entry=self._ropes[change.new])

    @staticmethod
    def _catalogue():
        from .base import optional_module

        cables = optional_module("cables")
        return tuple(cables.rope_catalogue()) if cables is not None and hasattr(cables, "rope_catalogue") else ()

    def _task_box(self, change) -> None:
        self._edit("task box", edits.with_task_box, lower=[b.value for b in self.task_lower],
                   upper=[b.value for b in self.task_upper])

    # -- showing the current design ---------------------------------------------------------
    def _exit_table(self) -> None:
        d = self.state.design
        rows = list(self.exit_rows.children)
        if len(rows) != d.m:
            rows = []
            for i in range(d.m):
                boxes = [W.FloatText(layout=_CELL, continuous_update=False) for _ in range(3)]
                for b in boxes:
                    b.observe(partial(self._exit, i), "value")
                rows.append(W.HBox([W.Label("", layout=W.Layout(width="110px")), *boxes]))
            self.exit_rows.children = rows
        for row, e in zip(rows, d.frame.exits):
            row.children[0].value = f"{e.name}"
            for box, v in zip(row.children[1:4], e.position):
                _show(box, v)

    def _sync(self, change=None) -> None:
        """Show the state's design in every control without sending edits back."""
        d = self.state.design
        self._syncing = True
        try:
            w, dep, h = edits.frame_extent(d)
            for slider, v in ((self.width, w), (self.depth, dep), (self.height, h)):
                if v > slider.max:
                    slider.max = 3 * v
                _show(slider, v)
            self.width.disabled = w <= 0
            self.depth.disabled = dep <= 0
            if d.m > self.winch_count.max:
                self.winch_count.max = d.m
            self.winch_count.value = d.m
            self.winch_count.disabled = d.platform.kind != "point"
            self.winch_count.tooltip = ("re-lays the exits on a regular polygon" if d.platform.kind == "point"
                                        else "a rigid platform needs one attachment per cable: edit the file")
            self._exit_table()
            w0 = d.winches[0]
            for box, v in ((self.platform_mass, d.platform.mass), (self.payload_mass, d.payload.mass),
                           (self.rope_diameter, d.cable.diameter * 1e3), (self.rope_mbf, d.cable.breaking_force / 1e3),
                           (self.rope_ea, d.cable.axial_stiffness / 1e3), (self.rope_tmin, d.cable.min_tension),
                           (self.drum_diameter, w0.drum_diameter * 1e3), (self.gear_ratio, w0.gear_ratio),
                           (self.efficiency, w0.efficiency), (self.rated_torque, w0.motor_rated_torque),
                           (self.peak_torque, w0.motor_peak_torque),
                           (self.brake_torque, w0.brake_holding_torque or 0.0),
                           (self.acceleration, d.task.acceleration)):
                _show(box, v)
            self.brake_torque.disabled = not all(w.brake for w in d.winches)  # a rating needs a brake
            k = self.rope_choice.value
            if k is not None and k >= 0 and (self._ropes[k].diameter, self._ropes[k].breaking_force) != \
                    (d.cable.diameter, d.cable.breaking_force):
                self.rope_choice.value = -1  # the rope was edited since: no longer that catalogue entry
            rigid = d.platform.kind == "rigid"
            for b, v in zip(self.platform_size, edits.platform_size(d)):
                _show(b, v)
                b.disabled = not rigid
            has_box = d.task.box_lower is not None
            for boxes, corner in ((self.task_lower, d.task.box_lower), (self.task_upper, d.task.box_upper)):
                for b, v in zip(boxes, corner or (0.0, 0.0, 0.0)):
                    _show(b, v)
                    b.disabled = not has_box
        finally:
            self._syncing = False
