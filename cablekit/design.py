"""The design file: frozen dataclasses in SI, TOML load/validate/save.

A design file is TOML; every physical quantity is written as text with its unit
(``"2.4 m"``, ``"35 mm"``, ``"0.6 N*m"``, ``"3000 rpm"``).  :func:`load_design` reads a file,
checks **every** field and raises :class:`DesignError` carrying the full list of problems
(field path, value, what was expected).  :func:`save_design` writes atomically (temporary
file in the same folder, then rename), so a crash never leaves a half-written design.

Inside, every number is an SI float: m, kg, N, N*m, rad, rad/s, s, Hz.

Conventions (see DEVELOPERS.md, "Sign convention"):

* World frame: z up unless ``frame.gravity`` says otherwise; positions in metres.
* Exit point ``a_i``: where cable ``i`` leaves the frame (the fixed-point model: an eyelet,
  or the tangent point of a small pulley treated as fixed; the pulley radius is kept for
  D/d checks but does not move the exit point).
* Attachment ``b_i``: where cable ``i`` meets the platform, in the platform frame.
"""

from __future__ import annotations

import glob
import hashlib
import math
import os
import tempfile
import time
import tomllib
from dataclasses import dataclass, field, fields, replace
from importlib import import_module
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from . import limits
from .units import DIMENSIONS, UnitError, format_quantity, format_vector, parse_quantity, parse_vector

__all__ = [
    "FORMAT",
    "Problem",
    "DesignError",
    "Exit",
    "Obstacle",
    "Frame",
    "Platform",
    "Cable",
    "Winch",
    "Payload",
    "Task",
    "Meta",
    "Design",
    "load_design",
    "loads_design",
    "design_from_dict",
    "design_to_dict",
    "save_design",
    "dumps_design",
    "atomic_write_text",
    "atomic_write_bytes",
    "content_hash",
]

FORMAT = "cablekit-design/1"


# --------------------------------------------------------------------------------------
# problems
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Problem:
    """One thing wrong with a design: where, what was found, what was expected."""

    path: str
    value: str
    expected: str

    def __str__(self) -> str:
        if f"got {self.value}" in self.expected or self.value in self.expected:
            return f"{self.path}: {self.expected}"
        return f"{self.path}: {self.expected} (got {self.value})"


class DesignError(ValueError):
    """A design that cannot be used; ``.problems`` lists every reason found."""

    def __init__(self, problems: list[Problem], source: str | None = None):
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        n = len(self.problems)
        lines = [f"{head}{n} problem{'s' if n != 1 else ''} in the design:"]
        lines += [f"  - {p}" for p in self.problems]
        super().__init__("\n".join(lines))


def _short(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class _Collector:
    """Gathers problems while parsing so that all of them are reported at once."""

    def __init__(self) -> None:
        self.problems: list[Problem] = []

    def add(self, path: str, value: Any, expected: str) -> None:
        self.problems.append(Problem(path, _short(value), expected))

    # -- typed getters: return None (and record a problem) when the field is unusable --
    def quantity(self, table: Mapping, key: str, dimension: str, path: str, *, required: bool = True,
                 positive: bool = False, nonnegative: bool = False, default: float | None = None) -> float | None:
        full = f"{path}.{key}" if path else key
        if key not in table:
            if required:
                self.add(full, "missing", f"a {dimension.replace('_', ' ')} such as {_EX[dimension]!r} is required")
            return default
        raw = table[key]
        try:
            value = parse_quantity(raw, dimension, field=full)
        except UnitError as exc:
            self.add(full, raw, str(exc).split(": ", 1)[-1])
            return None
        if positive and not value > 0:
            self.add(full, raw, "must be greater than zero")
            return None
        low = limits.MAGNITUDE[dimension][0]
        if (positive or nonnegative) and 0 < value < low:
            self.add(full, raw, f"{'0 or ' if nonnegative else ''}at least {low:g}{_si_unit(dimension)} "
                     "(cablekit.limits.MAGNITUDE; a unit slip?)")
            return None
        if nonnegative and value < 0:
            self.add(full, raw, "must not be negative")
            return None
        return value

    def vector(self, table: Mapping, key: str, dimension: str, path: str, *, required: bool = True,
               length: int = 3, default=None):
        full = f"{path}.{key}" if path else key
        if key not in table:
            if required:
                self.add(full, "missing", f"{length} values with a unit such as '0, 0, 2.4 m' are required")
            return default
        raw = table[key]
        try:
            return parse_vector(raw, dimension, length=length, field=full)
        except UnitError as exc:
            self.add(full, raw, str(exc).split(": ", 1)[-1])
            return None

    def number(self, table: Mapping, key: str, path: str, *, required: bool = True, default=None,
               integer: bool = False, minimum: float | None = None, maximum: float | None = None,
               exclusive_min: bool = False):
        full = f"{path}.{key}" if path else key
        if key not in table:
            if required:
                self.add(full, "missing", "a number is required")
            return default
        raw = table[key]
        if isinstance(raw, bool) or not isinstance(raw, (int, float)):
            # accept "0.9" written as text with no unit for dimensionless numbers
            if isinstance(raw, str):
                try:
                    raw_num = parse_quantity(raw, "dimensionless", field=full)
                except UnitError as exc:
                    self.add(full, raw, str(exc).split(": ", 1)[-1])
                    return None
            else:
                self.add(full, raw, "expected a number")
                return None
        else:
            raw_num = raw
        if isinstance(raw_num, float) and not math.isfinite(raw_num):
            self.add(full, raw, "expected a finite number")
            return None
        if integer:
            if float(raw_num) != int(raw_num) or abs(raw_num) > 2**53:
                self.add(full, raw, "expected a whole number")
                return None
            raw_num = int(raw_num)
        if minimum is not None and (raw_num < minimum or (exclusive_min and raw_num == minimum)):
            self.add(full, raw, f"must be {'greater than' if exclusive_min else 'at least'} {minimum}")
            return None
        if maximum is not None and raw_num > maximum:
            self.add(full, raw, f"must be at most {maximum}")
            return None
        return raw_num

    def text(self, table: Mapping, key: str, path: str, *, required: bool = False, default: str = "",
             choices: tuple[str, ...] | None = None) -> str | None:
        full = f"{path}.{key}" if path else key
        if key not in table:
            if required:
                self.add(full, "missing", "a text is required" + (f", one of {', '.join(choices)}" if choices else ""))
                return None
            return default
        raw = table[key]
        if not isinstance(raw, str):
            self.add(full, raw, "expected a text")
            return None
        if choices is not None and raw not in choices:
            self.add(full, raw, f"expected one of {', '.join(repr(c) for c in choices)}")
            return None
        if len(raw) > 4000:
            self.add(full, raw, "text longer than 4000 characters")
            return None
        return raw

    def boolean(self, table: Mapping, key: str, path: str, *, default: bool) -> bool | None:
        full = f"{path}.{key}" if path else key
        if key not in table:
            return default
        raw = table[key]
        if not isinstance(raw, bool):
            self.add(full, raw, "expected true or false")
            return None
        return raw

    def table(self, parent: Mapping, key: str, path: str, *, required: bool = True) -> Mapping | None:
        full = f"{path}.{key}" if path else key
        if key not in parent:
            if required:
                self.add(full, "missing", "a table is required")
            return None
        raw = parent[key]
        if not isinstance(raw, Mapping):
            self.add(full, raw, "expected a table")
            return None
        return raw

    def unknown(self, table: Mapping, allowed: set[str], path: str) -> None:
        for key in table:
            if key not in allowed:
                self.add(f"{path}.{key}" if path else str(key), table[key],
                         f"unknown key; allowed here: {', '.join(sorted(allowed))}")


_EX = {
    "length": "35 mm", "mass": "1.8 kg", "force": "2.2 kN", "torque": "0.6 N*m",
    "angle": "5 deg", "angular_speed": "3000 rpm", "speed": "0.5 m/s", "acceleration": "2 m/s^2",
    "time": "2 s", "frequency": "200 kHz", "mass_per_length": "0.06 kg/m", "stiffness": "50 kN/m",
    "pressure": "100 GPa", "area": "8 mm^2", "inertia": "0.02 kg*m^2", "power": "200 W",
    "dimensionless": "0.9",
}


# --------------------------------------------------------------------------------------
# the design, in SI
# --------------------------------------------------------------------------------------
Vec3 = tuple[float, float, float]


@dataclass(frozen=True)
class Exit:
    """Where one cable leaves the frame.

    name : label used in tables and plots.
    position : exit point ``a_i`` in the world frame [m].
    pulley_diameter : diameter of the exit pulley [m]; 0 for an eyelet. The exit point is
        treated as fixed (fixed-point model); the diameter is used for D/d checks.
    drum_distance : distance from the winch drum to this exit point along the cable [m];
        used for the fleet angle; 0 when unknown.
    home_length : measured or calibrated cable length at the home pose [m]; ``None`` means
        "computed from ``home.pose`` by inverse kinematics".
    min_tension : this cable's least taut tension [N]; ``None`` means ``cable.min_tension``.
    max_tension : a tension limit stated for this cable [N]; ``None`` means ``cable.max_tension``
        (if any).  The limit in force is the lowest of it, rope and motor
        (:func:`cablekit.statics.tension_limits`).
    """

    name: str
    position: Vec3
    pulley_diameter: float = 0.0
    drum_distance: float = 0.0
    home_length: float | None = None
    min_tension: float | None = None
    max_tension: float | None = None


@dataclass(frozen=True)
class Obstacle:
    """An axis-aligned box the cables and platform must not pass through [m]."""

    name: str
    lower: Vec3
    upper: Vec3


@dataclass(frozen=True)
class Frame:
    exits: tuple[Exit, ...]
    obstacles: tuple[Obstacle, ...] = ()
    gravity_direction: Vec3 = (0.0, 0.0, -1.0)  # unit vector
    g: float = 9.80665  # standard gravity [m/s**2] (ISO 80000-3)


@dataclass(frozen=True)
class Platform:
    """The moving platform.

    kind : ``"point"`` (3 DOF, all cables meet at one point) or ``"rigid"`` (6 DOF).
    mass [kg]; center_of_mass in the platform frame [m]; inertia about the centre of mass,
    3x3 row-major [kg*m**2] (zero for a point); attachments ``b_i`` in the platform frame [m],
    one per cable; body_half_size: half-extents of the platform body box [m] (used to find
    cables passing through the body; zero for a point).

    built_attachments : point platforms only: where each cable really meets the platform, in
    the platform frame [m], one per cable (``()`` when not stated: the attachments coincide).
    The point model (``attachments`` all zero) still drives the kinematics and the controller;
    :mod:`cablekit.suspended` uses these to find the tilt the point model assumes away.
    """

    kind: str
    mass: float
    attachments: tuple[Vec3, ...]
    center_of_mass: Vec3 = (0.0, 0.0, 0.0)
    inertia: tuple[float, ...] = (0.0,) * 9
    body_half_size: Vec3 = (0.0, 0.0, 0.0)
    built_attachments: tuple[Vec3, ...] = ()

    @property
    def dof(self) -> int:
        return 3 if self.kind == "point" else 6


@dataclass(frozen=True)
class Cable:
    """Rope data, shared by every cable of the rig.

    diameter [m]; breaking_force: minimum breaking force [N]; axial_stiffness: EA [N];
    mass_per_length [kg/m]; min_tension: the least tension that counts as taut [N];
    construction: free text such as ``"7x19 galvanised"``; its strand pattern (7x19, 7x7,
    6x7, 6x19, 6x36, 8x19, 19x7) picks the D/d limits; max_tension: a tension limit stated
    for every cable [N] (``None``: only rope and motor limit it).
    use_class: how the rope is used, ``"general"`` or ``"over_people"`` (a load that may
    hang over people: a higher rope design factor applies, see ``practice.py``).
    """

    diameter: float
    breaking_force: float
    axial_stiffness: float
    mass_per_length: float
    min_tension: float
    construction: str = ""
    max_tension: float | None = None
    use_class: str = "general"


@dataclass(frozen=True)
class Winch:
    """One winch drivetrain: drum, gears, encoder, motor.

    drum_diameter: bare drum (barrel) diameter [m]; drum_width: between flanges [m];
    flange_diameter [m] (0 = not given); grooved: helically grooved drum;
    gear_ratio: motor turns per drum turn [-]; efficiency of the gear train in (0, 1];
    encoder_lines: lines per motor revolution; decoding: 1, 2 or 4 counts per line;
    deadband_counts: position error the controller ignores [counts];
    count_rate_limit: highest count rate the controller can decode [Hz];
    motor_rated_torque, motor_peak_torque [N*m]; motor_rated_speed [rad/s];
    brake: the winch has a holding brake; dead_wraps: turns always left on the drum.
    brake_holding_torque: the brake's rated static holding torque at the motor shaft [N*m]
        (required when ``brake``; a brake on the drum: its torque divided by the gear ratio).
    self_locking: the gear train cannot be driven backwards by the load (e.g. a self-locking
        worm gear); without a brake such a winch is a warning instead of a failure.
    deadband_definition: what ``deadband_counts`` means. ``"plus_minus"``: the controller
        ignores errors up to +/- k counts, so it settles anywhere in a band 2k + 1 counts
        wide; ``"width"``: ``deadband_counts`` is the band's whole width in counts (a 3-count
        band is +/- 1 count).  The effective motion step is the band's width (at least one
        count), see :attr:`step_counts`.
    """

    drum_diameter: float
    drum_width: float
    gear_ratio: float
    efficiency: float
    encoder_lines: int
    decoding: int
    deadband_counts: float
    count_rate_limit: float
    motor_rated_torque: float
    motor_peak_torque: float
    motor_rated_speed: float
    dead_wraps: float
    flange_diameter: float = 0.0
    grooved: bool = False
    brake: bool = False
    brake_holding_torque: float | None = None
    self_locking: bool = False
    deadband_definition: str = "plus_minus"

    @property
    def counts_per_motor_rev(self) -> int:
        return int(self.encoder_lines * self.decoding)

    @property
    def step_counts(self) -> float:
        """Effective motion step [counts]: the width of the band the controller settles in.

        ``2k + 1`` for a +/- k dead band, the given width for ``"width"``, never below one
        count (common practice, no source: the controller can stop on any count of the band,
        so commands closer than the band's width are not resolved)."""
        k = float(self.deadband_counts)
        return 2.0 * k + 1.0 if self.deadband_definition == "plus_minus" else max(k, 1.0)

    @property
    def deadband_half_counts(self) -> float:
        """Half-width of the dead band [counts]: the +/- error it leaves (``(width - 1) / 2``)."""
        return 0.5 * (self.step_counts - 1.0)


@dataclass(frozen=True)
class Payload:
    """What the platform carries: mass [kg], centre of mass in the platform frame [m]."""

    mass: float
    center_of_mass: Vec3 = (0.0, 0.0, 0.0)
    name: str = "payload"


@dataclass(frozen=True)
class Task:
    """Where the platform must go.

    box_lower/box_upper: corners of the task box [m] (``None`` when only points are given);
    points: explicit poses' positions [m]; orientations: roll, pitch, yaw [rad] (extrinsic
    x-y-z, see DEVELOPERS.md), one or several for rigid platforms; step: default grid step
    [m]; speed: highest platform speed [m/s]; acceleration [m/s**2].
    """

    box_lower: Vec3 | None
    box_upper: Vec3 | None
    points: tuple[Vec3, ...] = ()
    orientations: tuple[Vec3, ...] = ((0.0, 0.0, 0.0),)
    step: float = 0.05
    speed: float = 0.0
    acceleration: float = 0.0
    wrench_box: tuple[float, ...] = (0.0,) * 6  # +/- half-widths [N, N, N, N*m, N*m, N*m]
    # a range of roll, pitch, yaw [rad] as ((lo, hi), (lo, hi), (lo, hi)), sampled on a grid of
    # orientation_samples values per angle (both bounds included); see cablekit.region.task_orientations
    orientation_range: tuple[tuple[float, float], ...] | None = None
    orientation_samples: int = 3


@dataclass(frozen=True)
class Meta:
    name: str
    scenario: str = ""
    job: str = ""
    notes: str = ""


@dataclass(frozen=True)
class Design:
    """A whole rig in SI units. Build it with :func:`load_design` or :func:`design_from_dict`."""

    meta: Meta
    frame: Frame
    platform: Platform
    cable: Cable
    winches: tuple[Winch, ...]  # one per cable
    payload: Payload
    task: Task
    home_pose: tuple[float, ...]  # position [m] (+ roll, pitch, yaw [rad] for rigid)
    practice: Mapping[str, float] = field(default_factory=dict)  # overrides of the defaults table
    sections: Mapping[str, Any] = field(default_factory=dict)  # parsed optional sections (arm, errors)
    raw_sections: Mapping[str, Any] = field(default_factory=dict)  # their TOML text, for saving

    # -- convenience views as arrays --------------------------------------------------
    @property
    def m(self) -> int:
        """Number of cables."""
        return len(self.frame.exits)

    @property
    def dof(self) -> int:
        return self.platform.dof

    @property
    def exits(self) -> np.ndarray:
        """Exit points, shape (m, 3) [m]."""
        return np.array([e.position for e in self.frame.exits], dtype=float)

    @property
    def attachments(self) -> np.ndarray:
        """Attachment points in the platform frame, shape (m, 3) [m]."""
        return np.array(self.platform.attachments, dtype=float)

    @property
    def gravity(self) -> np.ndarray:
        """Gravity acceleration vector [m/s**2]."""
        return np.asarray(self.frame.gravity_direction, float) * self.frame.g

    @property
    def total_mass(self) -> float:
        """Platform plus payload (plus the arm when one is declared) [kg]."""
        arm = self.sections.get("arm")
        arm_mass = float(getattr(arm, "total_mass", 0.0)) if arm is not None else 0.0
        return self.platform.mass + self.payload.mass + arm_mass

    @property
    def cable_names(self) -> list[str]:
        return [e.name for e in self.frame.exits]

    def with_changes(self, **changes) -> "Design":
        """A copy with top-level fields replaced (validated again)."""
        return revalidate(replace(self, **changes))


# --------------------------------------------------------------------------------------
# optional sections parsed by other modules (the arm, the error budget)
# --------------------------------------------------------------------------------------
# name -> "module:function"; the function takes (raw_table, collector_add, path, design_so_far)
# and returns a parsed object or None.  Listed here, imported lazily, so that each module
# owns its own section without design.py importing it at start-up.
OPTIONAL_SECTIONS: dict[str, str] = {
    "arm": "cablekit.arm:parse_arm_section",
    "errors": "cablekit.accuracy:parse_errors_section",
    "control": "cablekit.workspace:parse_control_section",
    "sweep": "cablekit.sweep:parse_sweep_section",  # how a design written by 'cablekit best' was chosen
}

_TOP_KEYS = {"format", "meta", "frame", "platform", "cable", "winch", "winches", "payload", "task",
             "home", "practice", *OPTIONAL_SECTIONS}


# --------------------------------------------------------------------------------------
# parsing
# --------------------------------------------------------------------------------------
def _parse_meta(c: _Collector, doc: Mapping) -> Meta | None:
    t = c.table(doc, "meta", "")
    if t is None:
        return None
    c.unknown(t, {"name", "scenario", "job", "notes"}, "meta")
    name = c.text(t, "name", "meta", required=True)
    return Meta(name=name or "", scenario=c.text(t, "scenario", "meta") or "",
                job=c.text(t, "job", "meta") or "", notes=c.text(t, "notes", "meta") or "")


def _parse_frame(c: _Collector, doc: Mapping) -> Frame | None:
    t = c.table(doc, "frame", "")
    if t is None:
        return None
    c.unknown(t, {"exits", "obstacles", "gravity_direction", "g"}, "frame")
    exits_raw = t.get("exits")
    exits: list[Exit] = []
    ok = True
    if not isinstance(exits_raw, list) or not exits_raw:
        c.add("frame.exits", exits_raw if exits_raw is not None else "missing",
              "a list of [[frame.exits]] tables, one per cable")
        ok = False
        exits_raw = []
    elif len(exits_raw) > limits.MAX_CABLES:
        c.add("frame.exits", f"{len(exits_raw)} cables", f"at most {limits.MAX_CABLES} cables (cablekit.limits)")
        return None
    seen = set()
    for k, e in enumerate(exits_raw):
        p = f"frame.exits[{k}]"
        if not isinstance(e, Mapping):
            c.add(p, e, "expected a table with name and position")
            ok = False
            continue
        c.unknown(e, {"name", "position", "pulley_diameter", "drum_distance", "home_length", "min_tension",
                      "max_tension"}, p)
        name = c.text(e, "name", p, default=f"C{k + 1}")
        if name is not None and name in seen:
            c.add(f"{p}.name", name, "cable names must be unique")
        seen.add(name)
        pos = c.vector(e, "position", "length", p)
        pd = c.quantity(e, "pulley_diameter", "length", p, required=False, nonnegative=True, default=0.0)
        if pd and pd < limits.MIN_DRUM_DIAMETER:
            c.add(f"{p}.pulley_diameter", e.get("pulley_diameter"),
                  f"0 (an eyelet) or at least {limits.MIN_DRUM_DIAMETER * 1e3:g} mm (cablekit.limits)")
            pd = None
        dd = c.quantity(e, "drum_distance", "length", p, required=False, nonnegative=True, default=0.0)
        hl = c.quantity(e, "home_length", "length", p, required=False, positive=True, default=None)
        tlo = c.quantity(e, "min_tension", "force", p, required=False, positive=True, default=None)
        thi = c.quantity(e, "max_tension", "force", p, required=False, positive=True, default=None)
        if None in (name, pos, pd, dd) or ("home_length" in e and hl is None) or \
                any(k in e and v is None for k, v in (("min_tension", tlo), ("max_tension", thi))):
            ok = False
            continue
        exits.append(Exit(name=name, position=pos, pulley_diameter=pd, drum_distance=dd, home_length=hl,
                          min_tension=tlo, max_tension=thi))
    obstacles: list[Obstacle] = []
    obs_raw = t.get("obstacles", [])
    if not isinstance(obs_raw, list):
        c.add("frame.obstacles", obs_raw, "a list of [[frame.obstacles]] tables")
        obs_raw = []
    elif len(obs_raw) > limits.MAX_OBSTACLES:
        c.add("frame.obstacles", f"{len(obs_raw)} obstacles", f"at most {limits.MAX_OBSTACLES} (cablekit.limits)")
        obs_raw = []
    for k, o in enumerate(obs_raw):
        p = f"frame.obstacles[{k}]"
        if not isinstance(o, Mapping):
            c.add(p, o, "expected a table with name, lower, upper")
            continue
        c.unknown(o, {"name", "lower", "upper"}, p)
        name = c.text(o, "name", p, default=f"obstacle {k + 1}")
        lo = c.vector(o, "lower", "length", p)
        hi = c.vector(o, "upper", "length", p)
        if lo is not None and hi is not None:
            if not all(h > l for l, h in zip(lo, hi)):
                c.add(f"{p}.upper", o.get("upper"), "every coordinate of upper must exceed lower")
                continue
            if name is not None:
                obstacles.append(Obstacle(name, lo, hi))
    gd = c.vector(t, "gravity_direction", "dimensionless", "frame", required=False, default=(0.0, 0.0, -1.0))
    if gd is not None:
        n = math.sqrt(sum(v * v for v in gd))
        if not n > 0:
            c.add("frame.gravity_direction", t.get("gravity_direction"), "a non-zero direction vector")
            gd = None
        else:
            gd = tuple(v / n for v in gd)
    g = c.quantity(t, "g", "acceleration", "frame", required=False, positive=True, default=9.80665)
    if g is not None and not limits.GRAVITY[0] <= g <= limits.GRAVITY[1]:
        c.add("frame.g", t.get("g"), f"between {limits.GRAVITY[0]:g} and {limits.GRAVITY[1]:g} m/s^2 "
              "(Earth: 9.81 m/s^2; cablekit.limits)")
        g = None
    if not ok or gd is None or g is None:
        return Frame(exits=tuple(exits), obstacles=tuple(obstacles)) if exits else None
    return Frame(exits=tuple(exits), obstacles=tuple(obstacles), gravity_direction=gd, g=g)


def _parse_platform(c: _Collector, doc: Mapping, m: int | None) -> Platform | None:
    t = c.table(doc, "platform", "")
    if t is None:
        return None
    c.unknown(t, {"kind", "mass", "center_of_mass", "inertia", "attachments", "body_half_size"}, "platform")
    kind = c.text(t, "kind", "platform", required=True, choices=("point", "rigid"))
    mass = c.quantity(t, "mass", "mass", "platform", positive=True)
    com = c.vector(t, "center_of_mass", "length", "platform", required=False, default=(0.0, 0.0, 0.0))
    built = ()
    if kind == "point":
        for key in ("inertia", "body_half_size"):
            if key in t:
                c.add(f"platform.{key}", t[key], "not used by a point platform (kind = 'point'); remove it")
        if "attachments" in t and (m is None or m >= 3):  # where the cables really meet it (cablekit.suspended)
            built = _parse_attachment_list(c, t.get("attachments"), m)
            if built is None:
                return None
        att = tuple((0.0, 0.0, 0.0) for _ in range(m or 0))
        inertia = (0.0,) * 9
        body = (0.0, 0.0, 0.0)
    else:
        att_raw = t.get("attachments")
        att_list = []
        if not isinstance(att_raw, list):
            c.add("platform.attachments", att_raw if att_raw is not None else "missing",
                  "a list with one attachment point per cable, e.g. ['0.1, 0.1, 0 m', ...]")
        else:
            if m is not None and len(att_raw) != m:
                c.add("platform.attachments", f"{len(att_raw)} points",
                      f"one attachment per cable: {m} expected")
            for k, a in enumerate(att_raw):
                try:
                    att_list.append(parse_vector(a, "length", field=f"platform.attachments[{k}]"))
                except UnitError as exc:
                    c.add(f"platform.attachments[{k}]", a, str(exc).split(": ", 1)[-1])
        att = tuple(att_list)
        inertia = None
        if "inertia" not in t:
            c.add("platform.inertia", "missing",
                  "principal moments '0.02, 0.02, 0.03 kg*m^2' (3 values) or a full 3x3 row-major (9 values)")
        else:
            raw = t["inertia"]
            nvals = len(raw) if isinstance(raw, list) else (raw.count(",") + 1 if isinstance(raw, str) else 0)
            try:
                if nvals == 9:
                    vals = parse_vector(raw, "inertia", length=9, field="platform.inertia")
                else:
                    d = parse_vector(raw, "inertia", length=3, field="platform.inertia")
                    vals = (d[0], 0.0, 0.0, 0.0, d[1], 0.0, 0.0, 0.0, d[2])
                mat = np.array(vals).reshape(3, 3)
                if not np.allclose(mat, mat.T) or np.any(np.linalg.eigvalsh(0.5 * (mat + mat.T)) <= 0):
                    c.add("platform.inertia", raw, "a symmetric positive-definite inertia")
                else:
                    inertia = tuple(float(v) for v in vals)
            except UnitError as exc:
                c.add("platform.inertia", raw, str(exc).split(": ", 1)[-1])
        body = c.vector(t, "body_half_size", "length", "platform", required=False, default=(0.0, 0.0, 0.0))
        if body is not None and any(v < 0 for v in body):
            c.add("platform.body_half_size", t.get("body_half_size"), "half-sizes must not be negative")
            body = None
        if inertia is None or body is None:
            return None
    if None in (kind, mass, com):
        return None
    return Platform(kind=kind, mass=mass, attachments=att, center_of_mass=com, inertia=inertia,
                    body_half_size=body, built_attachments=built)


def _parse_attachment_list(c: _Collector, att_raw, m: int | None) -> tuple[Vec3, ...] | None:
    """A point platform's stated attachments: one '0.1, 0, 0 m' per cable (None on a problem)."""
    if not isinstance(att_raw, list):
        c.add("platform.attachments", att_raw, "a list with one attachment point per cable, e.g. ['0.1, 0.1, 0 m', ...]")
        return None
    if m is not None and len(att_raw) != m:
        c.add("platform.attachments", f"{len(att_raw)} points", f"one attachment per cable: {m} expected")
        return None
    out = []
    for k, a in enumerate(att_raw):
        try:
            out.append(parse_vector(a, "length", field=f"platform.attachments[{k}]"))
        except UnitError as exc:
            c.add(f"platform.attachments[{k}]", a, str(exc).split(": ", 1)[-1])
    return tuple(out) if len(out) == len(att_raw) else None


USE_CLASSES = ("general", "over_people")  # rope use classes (cable.use_class)


def _parse_cable(c: _Collector, doc: Mapping) -> Cable | None:
    t = c.table(doc, "cable", "")
    if t is None:
        return None
    c.unknown(t, {"diameter", "breaking_force", "axial_stiffness", "modulus", "metallic_area",
                  "mass_per_length", "min_tension", "construction", "max_tension", "use_class"}, "cable")
    d = c.quantity(t, "diameter", "length", "cable", positive=True)
    if d is not None and d < limits.MIN_CABLE_DIAMETER:
        c.add("cable.diameter", t.get("diameter"), f"at least {limits.MIN_CABLE_DIAMETER * 1e3:g} mm (cablekit.limits)")
        d = None
    mbf = c.quantity(t, "breaking_force", "force", "cable", positive=True)
    if "axial_stiffness" in t:
        for key in ("modulus", "metallic_area"):
            if key in t:
                c.add(f"cable.{key}", t[key], "give either axial_stiffness (EA) or modulus with metallic_area, not both")
        ea = c.quantity(t, "axial_stiffness", "force", "cable", positive=True)
    elif "modulus" in t or "metallic_area" in t:
        e = c.quantity(t, "modulus", "pressure", "cable", positive=True)
        a = c.quantity(t, "metallic_area", "area", "cable", positive=True)
        ea = e * a if e is not None and a is not None else None
    else:
        c.add("cable.axial_stiffness", "missing", "EA such as '800 kN', or modulus and metallic_area")
        ea = None
    mpl = c.quantity(t, "mass_per_length", "mass_per_length", "cable", positive=True)
    tmin = c.quantity(t, "min_tension", "force", "cable", positive=True)
    construction = c.text(t, "construction", "cable", default="")
    use_class = c.text(t, "use_class", "cable", default="general", choices=USE_CLASSES)
    if mbf is not None and tmin is not None and tmin >= mbf:
        c.add("cable.min_tension", t.get("min_tension"), "must be below the breaking force")
    if mbf is not None and ea is not None and mbf > limits.MAX_BREAKING_STRAIN * ea:
        c.add("cable.axial_stiffness" if "axial_stiffness" in t else "cable.modulus", t.get("axial_stiffness", t.get("modulus")),
              f"EA of at least {mbf / limits.MAX_BREAKING_STRAIN:.3g} N: the breaking force would stretch the rope by "
              f"more than {limits.MAX_BREAKING_STRAIN:.0%} (cablekit.limits.MAX_BREAKING_STRAIN)")
        ea = None
    if d is not None and mpl is not None and mpl > limits.MAX_ROPE_DENSITY * math.pi * d * d / 4:
        c.add("cable.mass_per_length", t.get("mass_per_length"),
              f"at most {limits.MAX_ROPE_DENSITY * math.pi * d * d / 4:.3g} kg/m for a {d * 1e3:g} mm rope (a density "
              f"of {limits.MAX_ROPE_DENSITY:g} kg/m^3, denser than any rope; cablekit.limits)")
        mpl = None
    tmax = c.quantity(t, "max_tension", "force", "cable", required=False, positive=True, default=None)
    if None in (d, mbf, ea, mpl, tmin, construction, use_class) or ("max_tension" in t and tmax is None):
        return None
    return Cable(diameter=d, breaking_force=mbf, axial_stiffness=ea, mass_per_length=mpl,
                 min_tension=tmin, construction=construction, max_tension=tmax, use_class=use_class)


_WINCH_KEYS = {"drum_diameter", "drum_width", "flange_diameter", "grooved", "gear_ratio", "efficiency",
               "encoder_lines", "decoding", "deadband_counts", "count_rate_limit", "motor_rated_torque",
               "motor_peak_torque", "motor_rated_speed", "brake", "dead_wraps",
               "brake_holding_torque", "self_locking", "deadband_definition"}
DEADBAND_DEFINITIONS = ("plus_minus", "width")  # meanings of winch deadband_counts


def _parse_one_winch(c: _Collector, t: Mapping, p: str) -> Winch | None:
    c.unknown(t, _WINCH_KEYS, p)
    dd = c.quantity(t, "drum_diameter", "length", p, positive=True)
    if dd is not None and dd < limits.MIN_DRUM_DIAMETER:
        c.add(f"{p}.drum_diameter", t.get("drum_diameter"),
              f"at least {limits.MIN_DRUM_DIAMETER * 1e3:g} mm (cablekit.limits)")
        dd = None
    dw = c.quantity(t, "drum_width", "length", p, positive=True)
    fd = c.quantity(t, "flange_diameter", "length", p, required=False, nonnegative=True, default=0.0)
    gr = c.number(t, "gear_ratio", p, minimum=0.0, exclusive_min=True, maximum=limits.MAX_GEAR_RATIO)
    eff = c.number(t, "efficiency", p, minimum=0.0, exclusive_min=True, maximum=1.0)
    lines = c.number(t, "encoder_lines", p, integer=True, minimum=1, maximum=limits.MAX_ENCODER_LINES)
    dec = c.number(t, "decoding", p, integer=True)
    if dec is not None and dec not in (1, 2, 4):
        c.add(f"{p}.decoding", t.get("decoding"), "1, 2 or 4 (x1, x2, x4 quadrature decoding)")
        dec = None
    db = c.number(t, "deadband_counts", p, minimum=0.0)
    crl = c.quantity(t, "count_rate_limit", "frequency", p, positive=True)
    tr = c.quantity(t, "motor_rated_torque", "torque", p, positive=True)
    tp = c.quantity(t, "motor_peak_torque", "torque", p, positive=True)
    sp = c.quantity(t, "motor_rated_speed", "angular_speed", p, positive=True)
    gro = c.boolean(t, "grooved", p, default=False)
    brk = c.boolean(t, "brake", p, default=False)
    dwr = c.number(t, "dead_wraps", p, minimum=0.0)  # no default: a design choice, asked for explicitly
    bht = c.quantity(t, "brake_holding_torque", "torque", p, required=False, positive=True)
    slk = c.boolean(t, "self_locking", p, default=False)
    dbd = c.text(t, "deadband_definition", p, default="plus_minus", choices=DEADBAND_DEFINITIONS)
    if brk and "brake_holding_torque" not in t:
        c.add(f"{p}.brake_holding_torque", "missing", "the brake's rated holding torque at the motor shaft such as "
                                                      "'0.5 N*m' is required when brake = true")
    if brk is False and "brake_holding_torque" in t:
        c.add(f"{p}.brake_holding_torque", t["brake_holding_torque"], "only with brake = true (set brake = true or "
                                                                      "remove the holding torque)")
    if tr is not None and tp is not None and tp < tr:
        c.add(f"{p}.motor_peak_torque", t.get("motor_peak_torque"), "must not be below the rated torque")
    if dd is not None and fd not in (None, 0.0) and fd <= dd:
        c.add(f"{p}.flange_diameter", t.get("flange_diameter"), "must exceed the drum diameter")
    vals = (dd, dw, fd, gr, eff, lines, dec, db, crl, tr, tp, sp, gro, brk, dwr, slk, dbd)
    if any(v is None for v in vals) or (brk and bht is None):
        return None
    return Winch(drum_diameter=dd, drum_width=dw, flange_diameter=fd, gear_ratio=float(gr), efficiency=float(eff),
                 encoder_lines=int(lines), decoding=int(dec), deadband_counts=float(db), count_rate_limit=crl,
                 motor_rated_torque=tr, motor_peak_torque=tp, motor_rated_speed=sp, grooved=gro, brake=brk,
                 dead_wraps=float(dwr), brake_holding_torque=bht if brk else None, self_locking=slk,
                 deadband_definition=dbd)


def _parse_winches(c: _Collector, doc: Mapping, m: int | None) -> tuple[Winch, ...] | None:
    if "winch" in doc and "winches" in doc:
        c.add("winches", "both [winch] and [[winches]]", "give one shared [winch] or a [[winches]] list, not both")
        return None
    if "winch" in doc:
        t = c.table(doc, "winch", "")
        if t is None:
            return None
        w = _parse_one_winch(c, t, "winch")
        return None if w is None or m is None else tuple([w] * m)
    if "winches" in doc:
        lst = doc["winches"]
        if not isinstance(lst, list):
            c.add("winches", lst, "a list of [[winches]] tables, one per cable")
            return None
        if m is not None and len(lst) != m:
            c.add("winches", f"{len(lst)} winches", f"one per cable: {m} expected")
        out = []
        for k, t in enumerate(lst):
            if not isinstance(t, Mapping):
                c.add(f"winches[{k}]", t, "expected a table")
                continue
            out.append(_parse_one_winch(c, t, f"winches[{k}]"))
        if any(w is None for w in out) or (m is not None and len(out) != m):
            return None
        return tuple(out)
    c.add("winch", "missing", "a [winch] table (shared by every cable) or a [[winches]] list")
    return None


def _parse_payload(c: _Collector, doc: Mapping) -> Payload | None:
    t = c.table(doc, "payload", "")
    if t is None:
        return None
    c.unknown(t, {"mass", "center_of_mass", "name"}, "payload")
    mass = c.quantity(t, "mass", "mass", "payload", nonnegative=True)
    com = c.vector(t, "center_of_mass", "length", "payload", required=False, default=(0.0, 0.0, 0.0))
    name = c.text(t, "name", "payload", default="payload")
    if None in (mass, com, name):
        return None
    return Payload(mass=mass, center_of_mass=com, name=name)


def _parse_task(c: _Collector, doc: Mapping, kind: str | None) -> Task | None:
    t = c.table(doc, "task", "")
    if t is None:
        return None
    c.unknown(t, {"box_lower", "box_upper", "points", "orientations", "step", "speed", "acceleration",
                  "wrench_box", "orientation_range", "orientation_samples"}, "task")
    lo = c.vector(t, "box_lower", "length", "task", required=False)
    hi = c.vector(t, "box_upper", "length", "task", required=False)
    ok = True
    if ("box_lower" in t) != ("box_upper" in t):
        c.add("task.box_upper" if "box_lower" in t else "task.box_lower", "missing",
              "a task box needs both box_lower and box_upper")
        ok = False
    if lo is not None and hi is not None and not all(h >= l for l, h in zip(lo, hi)):
        c.add("task.box_upper", t.get("box_upper"), "every coordinate of box_upper must be at least box_lower")
        ok = False
    pts_raw = t.get("points", [])
    pts = []
    if not isinstance(pts_raw, list):
        c.add("task.points", pts_raw, "a list of points such as ['0.5, 0.5, 0.3 m']")
        ok = False
        pts_raw = []
    elif len(pts_raw) > limits.MAX_TASK_POINTS:
        c.add("task.points", f"{len(pts_raw):,} points", f"at most {limits.MAX_TASK_POINTS:,} (cablekit.limits); "
              "check longer lists from a CSV with 'cablekit points'")
        return None
    for k, pt in enumerate(pts_raw):
        try:
            pts.append(parse_vector(pt, "length", field=f"task.points[{k}]"))
        except UnitError as exc:
            c.add(f"task.points[{k}]", pt, str(exc).split(": ", 1)[-1])
            ok = False
    if "box_lower" not in t and not pts_raw:
        c.add("task", "no box and no points", "a task region: box_lower and box_upper, and/or a list of points")
        ok = False
    # without a list the platform is level, unless a range says which orientations the task needs
    ori_raw = t.get("orientations", ["0, 0, 0 deg"] if "orientation_range" not in t or kind == "point" else None)
    oris = []
    if ori_raw is None:
        ori_raw = []
    elif not isinstance(ori_raw, list) or not ori_raw:
        c.add("task.orientations", ori_raw, "a non-empty list of roll, pitch, yaw such as ['0, 0, 15 deg']")
        ok = False
        ori_raw = []
    elif len(ori_raw) > limits.MAX_ORIENTATIONS:
        c.add("task.orientations", f"{len(ori_raw):,} orientations", f"at most {limits.MAX_ORIENTATIONS:,} (cablekit.limits)")
        return None
    for k, o in enumerate(ori_raw):
        try:
            oris.append(parse_vector(o, "angle", field=f"task.orientations[{k}]"))
        except UnitError as exc:
            c.add(f"task.orientations[{k}]", o, str(exc).split(": ", 1)[-1])
            ok = False
    if kind == "point" and "orientations" in t:
        c.add("task.orientations", t["orientations"], "a point platform has no orientation; remove it")
        ok = False
    o_range, o_samples, range_ok = _parse_orientation_range(c, t, kind)
    ok &= range_ok
    step = c.quantity(t, "step", "length", "task", required=False, positive=True, default=0.05)
    speed = c.quantity(t, "speed", "speed", "task", required=False, nonnegative=True, default=0.0)
    acc = c.quantity(t, "acceleration", "acceleration", "task", required=False, nonnegative=True, default=0.0)
    wb = (0.0,) * 6
    if "wrench_box" in t:
        wt = t["wrench_box"]
        if not isinstance(wt, Mapping):
            c.add("task.wrench_box", wt, "a table with force (3 values, N) and torque (3 values, N*m) half-widths")
            ok = False
        else:
            c.unknown(wt, {"force", "torque"}, "task.wrench_box")
            f_ = c.vector(wt, "force", "force", "task.wrench_box", required=False, default=(0.0,) * 3)
            m_ = c.vector(wt, "torque", "torque", "task.wrench_box", required=False, default=(0.0,) * 3)
            if f_ is None or m_ is None:
                ok = False
            elif any(v < 0 for v in (*f_, *m_)):
                c.add("task.wrench_box", wt, "half-widths must not be negative")
                ok = False
            else:
                wb = (*f_, *m_)
    if not ok or None in (step, speed, acc) or (("box_lower" in t) and (lo is None or hi is None)):
        return None
    return Task(box_lower=lo, box_upper=hi, points=tuple(pts), orientations=tuple(oris), step=step,
                speed=speed, acceleration=acc, wrench_box=wb, orientation_range=o_range,
                orientation_samples=o_samples)


_ANGLES = ("roll", "pitch", "yaw")
ORIENTATION_SAMPLES_MAX = 9  # per angle: 9**3 = 729 orientations at most


def _parse_orientation_range(c: _Collector, t: Mapping, kind: str | None):
    """``orientation_range = { roll = "-10, 10 deg", pitch = ..., yaw = ... }`` (an angle left out
    stays 0) and ``orientation_samples`` (values per angle, both bounds included).
    Returns (range or None, samples, ok)."""
    ok = True
    samples = 3
    if "orientation_samples" in t:
        v = t["orientation_samples"]
        if isinstance(v, bool) or not isinstance(v, int) or not 2 <= v <= ORIENTATION_SAMPLES_MAX:
            c.add("task.orientation_samples", v, f"a whole number of values per angle, 2..{ORIENTATION_SAMPLES_MAX} "
                  "(2: the bounds only; 3: the bounds and the middle)")
            ok = False
        else:
            samples = v
        if "orientation_range" not in t:
            c.add("task.orientation_samples", v, "only used with task.orientation_range; give the range too")
            ok = False
    if "orientation_range" not in t:
        return None, samples, ok
    raw = t["orientation_range"]
    if kind == "point":
        c.add("task.orientation_range", raw, "a point platform has no orientation; remove it")
        return None, samples, False
    if not isinstance(raw, Mapping) or not raw:
        c.add("task.orientation_range", raw, "a table such as { roll = \"-10, 10 deg\", pitch = \"-10, 10 deg\" }")
        return None, samples, False
    c.unknown(raw, set(_ANGLES), "task.orientation_range")
    out = []
    for name in _ANGLES:
        if name not in raw:
            out.append((0.0, 0.0))
            continue
        field_ = f"task.orientation_range.{name}"
        try:
            lo, hi = parse_vector(raw[name], "angle", length=2, field=field_)
        except UnitError as exc:
            c.add(field_, raw[name], str(exc).split(": ", 1)[-1])
            ok = False
            continue
        if not (math.isfinite(lo) and math.isfinite(hi)) or hi < lo:
            c.add(field_, raw[name], "two finite angles 'lower, upper' with lower <= upper, such as '-10, 10 deg'")
            ok = False
        elif hi - lo > 2 * math.pi:
            c.add(field_, raw[name], "a range of at most 360 deg")
            ok = False
        out.append((lo, hi))
    return (tuple(out) if ok and len(out) == 3 else None), samples, ok


def _parse_home(c: _Collector, doc: Mapping, kind: str | None):
    t = c.table(doc, "home", "")
    if t is None:
        return None
    c.unknown(t, {"position", "orientation"}, "home")
    pos = c.vector(t, "position", "length", "home")
    if kind == "rigid":
        ori = c.vector(t, "orientation", "angle", "home", required=False, default=(0.0, 0.0, 0.0))
        if pos is None or ori is None:
            return None
        return (*pos, *ori)
    if "orientation" in t:
        c.add("home.orientation", t["orientation"], "a point platform has no orientation; remove it")
    return pos


def _parse_practice(c: _Collector, doc: Mapping) -> dict[str, float]:
    from .practice import PRACTICE  # the one table of common-practice defaults

    t = c.table(doc, "practice", "", required=False)
    if t is None:
        return {}
    out = {}
    for key, raw in t.items():
        if key not in PRACTICE:
            c.add(f"practice.{key}", raw, f"unknown key; allowed here: {', '.join(sorted(PRACTICE))}")
            continue
        entry = PRACTICE[key]
        if entry.dimension == "dimensionless":
            val = c.number(t, key, "practice", minimum=0.0, exclusive_min=True)
        else:
            val = c.quantity(t, key, entry.dimension, "practice", positive=True)
        if val is not None:
            low, high = entry.value / limits.PRACTICE_OVERRIDE_FACTOR, entry.value * limits.PRACTICE_OVERRIDE_FACTOR
            if key == "rope_design_factor":
                low = max(low, limits.MIN_DESIGN_FACTOR)
            if not low <= val <= high:
                c.add(f"practice.{key}", raw, f"between {low:g} and {high:g}{_si_unit(entry.dimension)} (the common-practice "
                      f"value {entry.value:g} within a factor {limits.PRACTICE_OVERRIDE_FACTOR:g}; cablekit.limits)")
                continue
            out[key] = float(val)
    return out


def _si_unit(dimension: str) -> str:
    unit = DIMENSIONS[dimension][0]
    return f" {unit}" if unit else ""


# --------------------------------------------------------------------------------------
# geometric validation (needs the whole design)
# --------------------------------------------------------------------------------------
def _check_geometry(c: _Collector, d: Design) -> None:
    m, n = d.m, d.dof
    if m < n:
        c.add("frame.exits", f"{m} cables", f"at least as many cables as degrees of freedom ({n} for a {d.platform.kind} platform)")
        return
    exits = d.exits
    task = d.task
    # the task region should sit inside the frame's bounding box (exit points)
    lo, hi = exits.min(axis=0), exits.max(axis=0)
    span = float(np.linalg.norm(hi - lo))
    if not limits.FRAME_SPAN[0] <= span <= limits.FRAME_SPAN[1]:
        c.add("frame.exits", f"exit points spanning {span:g} m",
              f"a frame between {limits.FRAME_SPAN[0]:g} m and {limits.FRAME_SPAN[1]:g} m across (cablekit.limits)")
        return
    if not _grid_fits(c, d):
        return
    tol = 1e-9
    region = [("home.position", np.array(d.home_pose[:3], float))]
    if task.box_lower is not None:
        region += [("task.box_lower", np.array(task.box_lower)), ("task.box_upper", np.array(task.box_upper))]
    region += [(f"task.points[{k}]", np.array(p)) for k, p in enumerate(task.points)]
    for path, pt in region:
        outside = (pt < lo - tol) | (pt > hi + tol)
        # suspended rigs: the region may lie below every exit; only the horizontal extent and
        # the top matter along gravity
        gdir = np.asarray(d.frame.gravity_direction)
        axis = int(np.argmax(np.abs(gdir)))
        if gdir[axis] < 0:
            outside[axis] = pt[axis] > hi[axis] + tol
        elif gdir[axis] > 0:
            outside[axis] = pt[axis] < lo[axis] - tol
        if np.any(outside):
            c.add(path, f"{', '.join(f'{v:g}' for v in pt)} m",
                  f"inside the frame spanned by the exit points ({', '.join(f'{v:g}' for v in lo)}) .. "
                  f"({', '.join(f'{v:g}' for v in hi)}) m")
    # controllability at the home pose and the task centre: the structure matrix must have
    # full rank (otherwise some direction cannot be resisted by any tension)
    from .kinematics import structure_matrix

    poses = [np.array(d.home_pose, float)]
    if task.box_lower is not None:
        centre = 0.5 * (np.array(task.box_lower) + np.array(task.box_upper))
        poses.append(np.concatenate([centre, np.zeros(n - 3)]))
    for pose in poses:
        try:
            W = structure_matrix(d, pose[None, :])[0]
        except ZeroDivisionError:
            W = np.full((n, m), np.nan)
        if not np.all(np.isfinite(W)):
            c.add("frame.exits", "exit point on the platform", "exit points must not coincide with an attachment at the home pose")
            return
        s = np.linalg.svd(W, compute_uv=False)
        if s[-1] < 1e-9 * max(s[0], 1e-300):
            c.add("frame.exits", f"structure matrix rank {int(np.sum(s > 1e-9 * s[0]))} at pose "
                  f"{', '.join(f'{v:g}' for v in pose[:3])} m",
                  f"rank {n}: these exit points leave the platform uncontrollable in some direction "
                  "(e.g. all exits in one plane with the platform)")
            return


def _check_tension_limits(c: _Collector, d: Design) -> None:
    """Each cable's least taut tension below its stated limit and the breaking force."""
    found: dict[str, tuple[str, str]] = {}  # one problem per field, even when shared by every cable
    for k, e in enumerate(d.frame.exits):
        lo = d.cable.min_tension if e.min_tension is None else e.min_tension
        hi = d.cable.max_tension if e.max_tension is None else e.max_tension
        where = f"frame.exits[{k}].min_tension" if e.min_tension is not None else "cable.min_tension"
        if lo >= d.cable.breaking_force:
            found.setdefault(where, (f"{lo:g} N", f"below the breaking force {d.cable.breaking_force:g} N"))
        elif hi is not None and lo >= hi:
            found.setdefault(where, (f"{lo:g} N", f"below the stated max_tension {hi:g} N of cable {e.name}"))
    for where, (value, expected) in found.items():
        c.add(where, value, expected)


def _check_rope_weight(c: _Collector, d: Design) -> None:
    """The rope carries its own weight over the longest cable run (breaking length, MBF / (w g))."""
    points = [np.array(d.home_pose[:3], float), *(np.array(p, float) for p in d.task.points)]
    if d.task.box_lower is not None:
        lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
        points += [np.where([i & 1, i & 2, i & 4], hi, lo) for i in range(8)]
    longest = max(float(np.max(np.linalg.norm(d.exits - p, axis=1))) for p in points)
    breaking_length = d.cable.breaking_force / (d.cable.mass_per_length * d.frame.g)
    if breaking_length < longest:
        c.add("cable.breaking_force", format_quantity(d.cable.breaking_force, "force"),
              f"more than the weight of the longest cable run ({longest:g} m of rope weigh "
              f"{d.cable.mass_per_length * d.frame.g * longest:.3g} N): the rope would break under its own weight")


def _check_holding(c: _Collector, d: Design) -> None:
    """The platform hangs at the home pose with every cable pulling and none breaking: the home
    lengths, stretch and sag are all referred to it.  A rig whose limits allow no tension window
    (t_max <= t_min) is left to the workspace and drive checks, which fail it."""
    from .statics import tension_limits, tensions_at

    lim = tension_limits(d)
    if np.any(lim.t_max <= lim.t_min):
        return  # no pose can be held: the workspace and drive checks fail it (a design verdict, not bad input)
    tensions = tensions_at(d, np.asarray(d.home_pose, float)[None, :]).tensions[0]
    if not np.all(np.isfinite(tensions) & (tensions > 0)):
        slack = [d.cable_names[i] for i in np.flatnonzero(~(np.isfinite(tensions) & (tensions > 0)))]
        c.add("home.position", format_vector(d.home_pose[:3], "length"),
              f"a pose where the platform hangs with every cable pulling (here {', '.join(slack)} would go slack): "
              "home lengths, stretch and sag are referred to it")
    elif np.max(tensions) >= d.cable.breaking_force:
        i = int(np.argmax(tensions))
        c.add("home.position", format_vector(d.home_pose[:3], "length"),
              f"a pose where the platform hangs without breaking a cable (cable {d.cable_names[i]} would carry "
              f"{tensions[i]:.3g} N, over the breaking force {d.cable.breaking_force:.3g} N)")


def _check_drums(c: _Collector, d: Design, shared: bool) -> None:
    """Each drum holds at least one wrap of the rope (the drivetrain sizing needs it), and a count
    and the deadband stay within the accuracy model's small errors (limits.MAX_LENGTH_PER_COUNT,
    MAX_DEADBAND_LENGTH)."""
    from .kinematics import length_per_count
    from .practice import practice_value

    lpc = length_per_count(d)
    for k, w in enumerate(d.winches[:1] if shared else d.winches):
        p = "winch" if shared else f"winches[{k}]"
        pitch = d.cable.diameter * (practice_value("groove_pitch", d.practice) if w.grooved else 1.0)
        if w.drum_width < pitch:
            c.add(f"{p}.drum_width", format_quantity(w.drum_width, "length"),
                  f"room for at least one wrap of the {d.cable.diameter * 1e3:g} mm rope ({pitch * 1e3:g} mm)")
        if lpc[k] > limits.MAX_LENGTH_PER_COUNT:
            c.add(f"{p}.encoder_lines", f"{lpc[k]:.3g} m of cable per count",
                  f"at most {limits.MAX_LENGTH_PER_COUNT * 1e3:g} mm of cable per encoder count (drum, gear_ratio, "
                  "encoder_lines and decoding together; cablekit.limits)")
        elif w.deadband_counts * lpc[k] > limits.MAX_DEADBAND_LENGTH:
            c.add(f"{p}.deadband_counts", f"{w.deadband_counts:g} counts = {w.deadband_counts * lpc[k]:.3g} m",
                  f"a deadband of at most {limits.MAX_DEADBAND_LENGTH * 1e3:g} mm of cable (cablekit.limits)")


def _grid_fits(c: _Collector, d: Design) -> bool:
    """The task region sampled at ``task.step`` stays within :data:`limits.MAX_GRID_POSES`."""
    from .region import box_counts, task_orientations

    t = d.task
    positions = float(len(t.points))
    if t.box_lower is not None:
        positions += float(np.prod(box_counts(t, t.step)))
    if d.dof == 6:
        k = len(task_orientations(t))  # the list and the range's grid
    else:
        k = 1
    fixed = (len(t.points) + (t.box_lower is not None)) * k
    if fixed > limits.MAX_FIXED_POSES:
        c.add("task.points", f"{len(t.points):,} points{f' x {k} orientations' if k > 1 else ''}",
              f"at most {limits.MAX_FIXED_POSES:,} poses sampled whatever the step (task points plus one box "
              "position, times the orientations; cablekit.limits.MAX_FIXED_POSES)")
        return False
    poses = positions * k
    if poses > limits.MAX_GRID_POSES:
        c.add("task.step", format_quantity(t.step, "length"),
              f"a step giving at most {limits.MAX_GRID_POSES:,} poses over the task region (this one gives "
              f"{poses:,.0f}; cablekit.limits.MAX_GRID_POSES): use a coarser step")
        return False
    return True


def design_from_dict(doc: Mapping, *, source: str | None = None) -> Design:
    """Validate a parsed TOML document and build a :class:`Design` (SI floats).

    Raises
    ------
    DesignError
        With every problem found.
    """
    c = _Collector()
    if not isinstance(doc, Mapping):
        raise DesignError([Problem("<file>", _short(doc), "a TOML document")], source)
    fmt = doc.get("format", FORMAT)
    if fmt != FORMAT:
        c.add("format", fmt, f"{FORMAT!r}")
    c.unknown(doc, _TOP_KEYS, "")
    meta = _parse_meta(c, doc)
    frame = _parse_frame(c, doc)
    m = len(frame.exits) if frame is not None and frame.exits else None
    platform = _parse_platform(c, doc, m)
    kind = platform.kind if platform is not None else (doc.get("platform", {}) or {}).get("kind") if isinstance(doc.get("platform"), Mapping) else None
    cable = _parse_cable(c, doc)
    winches = _parse_winches(c, doc, m)
    payload = _parse_payload(c, doc)
    task = _parse_task(c, doc, kind)
    home = _parse_home(c, doc, kind)
    practice = _parse_practice(c, doc)
    if c.problems or None in (meta, frame, platform, cable, winches, payload, task, home):
        if not c.problems:  # pragma: no cover - every None comes with a problem
            c.add("<file>", "incomplete", "a complete design")
        raise DesignError(c.problems, source)
    design = Design(meta=meta, frame=frame, platform=platform, cable=cable, winches=winches, payload=payload,
                    task=task, home_pose=tuple(home), practice=practice)
    _check_geometry(c, design)
    _check_tension_limits(c, design)
    _check_drums(c, design, "winch" in doc)
    _check_rope_weight(c, design)
    if not c.problems:
        _check_holding(c, design)
    if c.problems:
        raise DesignError(c.problems, source)
    # optional sections owned by other modules
    sections, raw_sections = {}, {}
    for name, target in OPTIONAL_SECTIONS.items():
        if name not in doc:
            continue
        raw = doc[name]
        mod_name, func_name = target.split(":")
        parser = getattr(import_module(mod_name), func_name)
        parsed = parser(raw, c.add, name, design)
        sections[name] = parsed
        raw_sections[name] = raw
    if c.problems:
        raise DesignError(c.problems, source)
    return replace(design, sections=sections, raw_sections=raw_sections)


def revalidate(design: Design) -> Design:
    """Check a programmatically changed design by a round trip through its dictionary form."""
    return design_from_dict(design_to_dict(design))


def loads_design(text: str, *, source: str | None = None) -> Design:
    """Parse design-file text. Raises :class:`DesignError` on any problem."""
    from .limits import MAX_DESIGN_BYTES

    if len(text) > MAX_DESIGN_BYTES:
        raise DesignError([Problem("<file>", f"{len(text):,} characters",
                                   f"a design file of at most {MAX_DESIGN_BYTES:,} characters (cablekit.limits)")], source)
    text = text.removeprefix("\ufeff")  # a UTF-8 byte-order mark some editors write
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise DesignError([Problem("<file>", "TOML syntax", f"valid TOML ({exc})")], source) from None
    except RecursionError:  # tables or arrays nested thousands deep
        raise DesignError([Problem("<file>", "nesting too deep", "valid TOML of ordinary depth")], source) from None
    try:
        return design_from_dict(doc, source=source)
    except RecursionError:
        raise DesignError([Problem("<file>", "nesting too deep", "tables and lists nested a few levels deep")],
                          source) from None


def load_design(path) -> Design:
    """Read and validate a design file. Raises :class:`DesignError` on any problem."""
    from .limits import MAX_DESIGN_BYTES

    path = Path(path)
    try:
        if path.is_file() and path.stat().st_size > MAX_DESIGN_BYTES:
            raise DesignError([Problem(str(path), f"{path.stat().st_size:,} bytes",
                                       f"a design file of at most {MAX_DESIGN_BYTES:,} bytes (cablekit.limits)")],
                              str(path))
        if not path.is_file() and path.exists():
            raise DesignError([Problem(str(path), "not a regular file", "a design file (not a folder or device)")],
                              str(path))
        raw = path.read_bytes()
    except FileNotFoundError:
        raise DesignError([Problem(str(path), "missing", "an existing design file")], str(path)) from None
    except OSError as exc:
        raise DesignError([Problem(str(path), type(exc).__name__, f"a readable file ({exc.strerror})")], str(path)) from None
    if raw.startswith((b"\xff\xfe", b"\xfe\xff")):
        raise DesignError([Problem(str(path), "UTF-16 text", "a UTF-8 TOML text file: save it again as UTF-8 "
                                   "(in most editors: 'Save with encoding' -> UTF-8)")], str(path))
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise DesignError([Problem(str(path), f"not UTF-8 (byte {exc.start})", "a UTF-8 TOML text file")],
                          str(path)) from None
    return loads_design(text, source=str(path))


# --------------------------------------------------------------------------------------
# writing
# --------------------------------------------------------------------------------------
def _q(v, dim):
    return format_quantity(v, dim)


def _v(v, dim):
    return format_vector(v, dim)


def design_to_dict(d: Design) -> dict:
    """The TOML document of a design (units written in SI, floats exact)."""
    doc: dict[str, Any] = {"format": FORMAT}
    meta = {"name": d.meta.name}
    for k in ("scenario", "job", "notes"):
        if getattr(d.meta, k):
            meta[k] = getattr(d.meta, k)
    doc["meta"] = meta
    exits = []
    for e in d.frame.exits:
        t = {"name": e.name, "position": _v(e.position, "length")}
        if e.pulley_diameter:
            t["pulley_diameter"] = _q(e.pulley_diameter, "length")
        if e.drum_distance:
            t["drum_distance"] = _q(e.drum_distance, "length")
        if e.home_length is not None:
            t["home_length"] = _q(e.home_length, "length")
        for key in ("min_tension", "max_tension"):
            if getattr(e, key) is not None:
                t[key] = _q(getattr(e, key), "force")
        exits.append(t)
    frame: dict[str, Any] = {"gravity_direction": _v(d.frame.gravity_direction, "dimensionless"),
                             "g": _q(d.frame.g, "acceleration"), "exits": exits}
    if d.frame.obstacles:
        frame["obstacles"] = [{"name": o.name, "lower": _v(o.lower, "length"), "upper": _v(o.upper, "length")}
                              for o in d.frame.obstacles]
    doc["frame"] = frame
    p = d.platform
    plat: dict[str, Any] = {"kind": p.kind, "mass": _q(p.mass, "mass"), "center_of_mass": _v(p.center_of_mass, "length")}
    if p.kind == "point" and p.built_attachments:
        plat["attachments"] = [_v(a, "length") for a in p.built_attachments]
    if p.kind == "rigid":
        plat["attachments"] = [_v(a, "length") for a in p.attachments]
        plat["inertia"] = _v(p.inertia, "inertia")
        plat["body_half_size"] = _v(p.body_half_size, "length")
    doc["platform"] = plat
    cb = d.cable
    cable = {"diameter": _q(cb.diameter, "length"), "breaking_force": _q(cb.breaking_force, "force"),
             "axial_stiffness": _q(cb.axial_stiffness, "force"),
             "mass_per_length": _q(cb.mass_per_length, "mass_per_length"),
             "min_tension": _q(cb.min_tension, "force")}
    if cb.construction:
        cable["construction"] = cb.construction
    if cb.max_tension is not None:
        cable["max_tension"] = _q(cb.max_tension, "force")
    if cb.use_class != "general":
        cable["use_class"] = cb.use_class
    doc["cable"] = cable

    def winch(w: Winch) -> dict:
        t = {"drum_diameter": _q(w.drum_diameter, "length"), "drum_width": _q(w.drum_width, "length"),
             "gear_ratio": w.gear_ratio, "efficiency": w.efficiency, "encoder_lines": w.encoder_lines,
             "decoding": w.decoding, "deadband_counts": w.deadband_counts,
             "count_rate_limit": _q(w.count_rate_limit, "frequency"),
             "motor_rated_torque": _q(w.motor_rated_torque, "torque"),
             "motor_peak_torque": _q(w.motor_peak_torque, "torque"),
             "motor_rated_speed": _q(w.motor_rated_speed, "angular_speed"),
             "grooved": w.grooved, "brake": w.brake, "dead_wraps": w.dead_wraps}
        if w.flange_diameter:
            t["flange_diameter"] = _q(w.flange_diameter, "length")
        if w.brake_holding_torque is not None:
            t["brake_holding_torque"] = _q(w.brake_holding_torque, "torque")
        if w.self_locking:
            t["self_locking"] = True
        t["deadband_definition"] = w.deadband_definition
        return t

    if all(w == d.winches[0] for w in d.winches):
        doc["winch"] = winch(d.winches[0])
    else:
        doc["winches"] = [winch(w) for w in d.winches]
    doc["payload"] = {"name": d.payload.name, "mass": _q(d.payload.mass, "mass"),
                      "center_of_mass": _v(d.payload.center_of_mass, "length")}
    t = d.task
    task: dict[str, Any] = {}
    if t.box_lower is not None:
        task["box_lower"] = _v(t.box_lower, "length")
        task["box_upper"] = _v(t.box_upper, "length")
    if t.points:
        task["points"] = [_v(pt, "length") for pt in t.points]
    if p.kind == "rigid" and (t.orientations or t.orientation_range is None):
        task["orientations"] = [_v(o, "angle") for o in t.orientations]
    task["step"] = _q(t.step, "length")
    task["speed"] = _q(t.speed, "speed")
    task["acceleration"] = _q(t.acceleration, "acceleration")
    if t.orientation_range is not None:
        task["orientation_range"] = {n: _v(r, "angle") for n, r in zip(_ANGLES, t.orientation_range)
                                     if r != (0.0, 0.0)}
        task["orientation_samples"] = t.orientation_samples
    if any(t.wrench_box):
        task["wrench_box"] = {"force": _v(t.wrench_box[:3], "force"), "torque": _v(t.wrench_box[3:], "torque")}
    doc["task"] = task
    home: dict[str, Any] = {"position": _v(d.home_pose[:3], "length")}
    if p.kind == "rigid":
        home["orientation"] = _v(d.home_pose[3:], "angle")
    doc["home"] = home
    if d.practice:
        from .practice import PRACTICE

        doc["practice"] = {k: (v if PRACTICE[k].dimension == "dimensionless" else _q(v, PRACTICE[k].dimension))
                           for k, v in sorted(d.practice.items())}
    for name, raw in d.raw_sections.items():
        doc[name] = raw
    return doc


def dumps_design(d: Design, *, header: str | None = None) -> str:
    import tomli_w

    text = tomli_w.dumps(design_to_dict(d))
    if header:
        text = "".join(f"# {line}\n" if line else "#\n" for line in header.splitlines()) + "\n" + text
    return text


def atomic_write_bytes(path, data: bytes) -> Path:
    """Write ``data`` to ``path`` through a temporary file in the same folder and a rename.

    A crash at any point leaves either the old file or the new one, never a mix.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    remove_stale_temporaries(folder, f".{path.name}.")
    # the writer's process id is part of the name, so a later save can tell a temporary file
    # left by a killed writer from one that is still being written
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.{os.getpid()}.", suffix=".tmp", dir=folder)
    try:
        # mkstemp creates the file private (0600); give it the mode a normal open() would
        # (or keep the mode of the file being replaced)
        try:
            mode = path.stat().st_mode & 0o7777
        except FileNotFoundError:
            umask = os.umask(0)
            os.umask(umask)
            mode = 0o666 & ~umask
        os.chmod(tmp, mode)
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise
    return path


def remove_stale_temporaries(folder, prefix: str) -> int:
    """Delete ``prefix<pid>.<random>.tmp`` files in ``folder`` whose writing process is gone.

    A save killed between creating its temporary file and the rename leaves it behind; the next
    save into the same folder removes it.  Files of a process still running are kept.  Returns
    the number of files removed.
    """
    removed = 0
    try:
        candidates = list(Path(folder).glob(f"{glob.escape(prefix)}*.tmp"))
    except OSError:
        return 0
    for f in candidates:
        pid_text = f.name[len(prefix):].split(".", 1)[0]
        if pid_text.isdigit() and _process_alive(int(pid_text)):
            continue
        if not pid_text.isdigit():  # an older name without a process id: only when clearly abandoned
            try:
                if f.stat().st_mtime > time.time() - 3600:
                    continue
            except OSError:
                continue
        try:
            f.unlink()
            removed += 1
        except OSError:
            pass
    return removed


def _process_alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except (PermissionError, OverflowError):
        return pid < 2**22  # another user's process (or an impossible id: not alive)
    return True


def atomic_write_text(path, text: str) -> Path:
    return atomic_write_bytes(path, text.encode("utf-8"))


def save_design(d: Design, path, *, header: str | None = None) -> Path:
    """Validate ``d`` again and write it atomically as a design file."""
    text = dumps_design(d, header=header)
    loads_design(text, source=str(path))  # never write a file we could not read back
    return atomic_write_text(path, text)


def content_hash(d: Design) -> str:
    """SHA-256 of the design's canonical TOML (independent of comments and unit spelling)."""
    return hashlib.sha256(dumps_design(d).encode("utf-8")).hexdigest()


def _field_names(cls) -> list[str]:  # used by widgets to list editable fields
    return [f.name for f in fields(cls)]
