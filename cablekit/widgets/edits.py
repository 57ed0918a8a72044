"""Design edits the layout editor offers, as plain functions ``Design -> Design``.

Each returns an edited copy built with :func:`dataclasses.replace`; none validates (the
:class:`~cablekit.widgets.state.DesignState` does that once for every edit, with the same
checks as loading a file).  Keeping them here, outside the widget classes, lets tests and
scripts make the same edits without a user interface.

Frame parameters
----------------
footprint width and depth : the x and y extent of the exit points [m];
height : the highest exit point above the world origin (the floor, z = 0) [m].
Scaling keeps the layout's shape: x and y scale about the centre of the exits' footprint,
z scales from the floor, so floor-level exits stay on the floor.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..design import Design, Exit
from .state import EditError

__all__ = [
    "frame_extent",
    "with_frame_extent",
    "polygon_layout",
    "with_winch_count",
    "with_exit_position",
    "with_masses",
    "with_cable",
    "with_winches",
    "with_task_box",
    "platform_size",
    "with_platform_size",
    "with_catalogue_rope",
]


def frame_extent(design: Design) -> tuple[float, float, float]:
    """Footprint width (x), depth (y) and height (highest exit z) of the exit points [m]."""
    a = design.exits
    return (float(np.ptp(a[:, 0])), float(np.ptp(a[:, 1])), float(a[:, 2].max()))


def _scaled(values: np.ndarray, centre: float, old: float, new: float | None, name: str) -> np.ndarray:
    if new is None or math.isclose(new, old, rel_tol=0, abs_tol=1e-12):
        return values
    if not math.isfinite(new) or new <= 0:
        raise EditError(f"frame {name}: must be a positive length in m, got {new!r}")
    if old <= 0:
        raise EditError(f"frame {name}: every exit point has the same coordinate, so there is no "
                        f"extent to scale; edit the exit points one by one")
    return centre + (values - centre) * (new / old)


def with_frame_extent(design: Design, *, width: float | None = None, depth: float | None = None,
                      height: float | None = None) -> Design:
    """Scale the exit points to a new footprint ``width`` x ``depth`` and ``height`` [m]."""
    a = design.exits.copy()
    w, d, h = frame_extent(design)
    cx = 0.5 * (a[:, 0].min() + a[:, 0].max())
    cy = 0.5 * (a[:, 1].min() + a[:, 1].max())
    a[:, 0] = _scaled(a[:, 0], cx, w, width, "width")
    a[:, 1] = _scaled(a[:, 1], cy, d, depth, "depth")
    a[:, 2] = _scaled(a[:, 2], 0.0, h, height, "height")
    exits = tuple(replace(e, position=tuple(float(v) for v in p)) for e, p in zip(design.frame.exits, a))
    return replace(design, frame=replace(design.frame, exits=exits))


def polygon_layout(count: int, lower, upper) -> np.ndarray:
    """``count`` exit positions (x, y) on a regular polygon stretched to fill a footprint.

    The polygon has a flat lower edge; its bounding box is the rectangle ``lower`` ..
    ``upper`` (x, y) [m].  Three exits give two corners and the middle of the far side, four
    give the corners.
    """
    if count < 3:
        raise EditError(f"number of winches: at least 3 for a suspended point platform, got {count}")
    ang = -0.5 * np.pi - np.pi / count + 2 * np.pi * np.arange(count) / count
    xy = np.column_stack([np.cos(ang), np.sin(ang)])
    lo, hi = xy.min(axis=0), xy.max(axis=0)
    unit = (xy - lo) / (hi - lo)
    lower, upper = np.asarray(lower, float), np.asarray(upper, float)
    return lower + unit * (upper - lower)


def with_winch_count(design: Design, count: int) -> Design:
    """Re-lay a point platform's exits as ``count`` winches around the current footprint.

    The exits sit at the current frame height on a regular polygon filling the footprint;
    new exits copy the first exit's pulley and drum distance and the first winch; existing
    names are kept, new ones are ``W<k>``.
    """
    count = int(count)
    if design.platform.kind != "point":
        raise EditError("number of winches: only a point platform can be re-laid automatically; "
                        "a rigid platform needs one attachment per cable, edit the design file")
    if count == design.m:
        return design
    a = design.exits
    xy = polygon_layout(count, a[:, :2].min(axis=0), a[:, :2].max(axis=0))
    height = float(a[:, 2].max())
    first = design.frame.exits[0]
    names = [e.name for e in design.frame.exits][:count]
    taken = set(names)
    k = 1
    while len(names) < count:
        if f"W{k}" not in taken:
            names.append(f"W{k}")
        k += 1
    exits = tuple(Exit(name=names[i], position=(float(xy[i, 0]), float(xy[i, 1]), height),
                       pulley_diameter=first.pulley_diameter, drum_distance=first.drum_distance)
                  for i in range(count))
    built = design.platform.built_attachments  # stated attachments (cablekit.suspended): one per cable
    if built and any(b != built[0] for b in built):
        raise EditError("number of winches: this platform states separate attachments, one per cable; "
                        "edit them in the design file")
    platform = replace(design.platform, attachments=tuple((0.0, 0.0, 0.0) for _ in range(count)),
                       built_attachments=tuple(built[0] for _ in range(count)) if built else ())
    winches = tuple(design.winches[i] if i < design.m else design.winches[0] for i in range(count))
    return replace(design, frame=replace(design.frame, exits=exits), platform=platform, winches=winches)


def with_exit_position(design: Design, index: int, position) -> Design:
    """Move exit ``index`` to ``position`` (x, y, z) [m]."""
    exits = list(design.frame.exits)
    if not 0 <= index < len(exits):
        raise EditError(f"exit index {index} out of range 0..{len(exits) - 1}")
    pos = tuple(float(v) for v in position)
    if len(pos) != 3 or not all(math.isfinite(v) for v in pos):
        raise EditError(f"frame.exits[{index}].position: three finite coordinates in m, got {position!r}")
    exits[index] = replace(exits[index], position=pos, home_length=None)
    return replace(design, frame=replace(design.frame, exits=tuple(exits)))


def with_masses(design: Design, *, platform: float | None = None, payload: float | None = None) -> Design:
    """Change the platform and/or payload mass [kg]."""
    out = design
    if platform is not None:
        out = replace(out, platform=replace(out.platform, mass=float(platform)))
    if payload is not None:
        out = replace(out, payload=replace(out.payload, mass=float(payload)))
    return out


def with_cable(design: Design, **fields) -> Design:
    """Change rope fields (names of :class:`~cablekit.design.Cable`, SI values)."""
    return replace(design, cable=replace(design.cable, **{k: float(v) for k, v in fields.items()}))


def with_winches(design: Design, **fields) -> Design:
    """Change fields of every winch (names of :class:`~cablekit.design.Winch`, SI values)."""
    return replace(design, winches=tuple(replace(w, **fields) for w in design.winches))


def with_task_acceleration(design: Design, *, acceleration: float) -> Design:
    """Set the task's largest acceleration in any direction [m/s**2] (0: quasi-static)."""
    a = float(acceleration)
    if not (math.isfinite(a) and a >= 0):
        raise EditError(f"task acceleration: a finite value of at least 0 m/s^2, got {acceleration!r}")
    return replace(design, task=replace(design.task, acceleration=a))


def with_task_box(design: Design, lower, upper) -> Design:
    """Move the task box to ``lower`` .. ``upper`` (x, y, z) [m]."""
    lo = tuple(float(v) for v in lower)
    hi = tuple(float(v) for v in upper)
    if not all(math.isfinite(v) for v in (*lo, *hi)):
        raise EditError("task box: corners must be finite lengths in m")
    return replace(design, task=replace(design.task, box_lower=lo, box_upper=hi))


def platform_size(design: Design) -> tuple[float, float, float]:
    """Extent of a rigid platform: its attachment points' bounding box (x, y, z) [m]."""
    b = design.attachments
    return tuple(float(v) for v in np.ptp(b, axis=0)) if len(b) else (0.0, 0.0, 0.0)


def with_platform_size(design: Design, size) -> Design:
    """Scale a rigid platform's attachments and body box to a new extent (x, y, z) [m].

    Each axis scales about the platform's reference point; an axis of zero extent stays as is.
    """
    if design.platform.kind != "rigid":
        raise EditError("platform size: a point platform has no size (every cable meets at one point)")
    old = np.array(platform_size(design))
    new = np.asarray(size, float)
    if new.shape != (3,) or not np.all(np.isfinite(new)) or np.any(new < 0):
        raise EditError(f"platform size: three lengths >= 0 in m, got {size!r}")
    scale = np.where(old > 0, new / np.where(old > 0, old, 1.0), 1.0)
    att = tuple(tuple(float(v) for v in b * scale) for b in design.attachments)
    body = tuple(float(v) for v in np.asarray(design.platform.body_half_size) * scale)
    return replace(design, platform=replace(design.platform, attachments=att, body_half_size=body))


def with_catalogue_rope(design: Design, entry) -> Design:
    """Use a catalogue rope (:class:`cablekit.cables.RopeEntry`): its diameter, breaking force
    and construction; axial stiffness and weight per metre stay as they were (check them)."""
    construction = f"{entry.construction} {entry.material}, {entry.designation}"
    cable = replace(design.cable, diameter=float(entry.diameter), breaking_force=float(entry.breaking_force),
                    construction=construction)
    return replace(design, cable=cable)
