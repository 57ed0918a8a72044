"""The one table of good-practice defaults, each with its source.

A design file may override any entry in its ``[practice]`` table (local codes win).  The
review sheet prints the entries it used and where each came from.  Entries recalled from
memory say so; rules of thumb without a published source say "common practice, no source".
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

__all__ = ["PracticeEntry", "PRACTICE", "practice_value"]


@dataclass(frozen=True)
class PracticeEntry:
    key: str
    value: float  # SI
    dimension: str  # a key of cablekit.units.DIMENSIONS
    label: str
    source: str


_DEG = 0.017453292519943295

PRACTICE: dict[str, PracticeEntry] = {
    e.key: e
    for e in [
        PracticeEntry("rope_design_factor", 5.0, "dimensionless",
                      "rope design factor: minimum breaking force / highest working tension",
                      "ASME B30.7 (winches) asks at least 3.5 for running rope on base-mounted drum hoists; "
                      "5 is the common general-lifting choice (EN 13001-3-2 / ISO 4308 group M4 ~ 4.5). "
                      "From memory; local codes override."),
        PracticeEntry("fleet_angle_smooth", 1.5 * _DEG, "angle",
                      "largest fleet angle on a smooth (plain) drum",
                      "ASME B30.7, fleet angle: 1.5 deg for smooth drums (from memory)"),
        PracticeEntry("fleet_angle_grooved", 2.0 * _DEG, "angle",
                      "largest fleet angle on a grooved drum",
                      "ASME B30.7, fleet angle: 2 deg for grooved drums (from memory)"),
        PracticeEntry("drum_d_ratio_min", 18.0, "dimensionless",
                      "smallest drum pitch diameter / rope diameter (D/d)",
                      "aircraft-cable pulley practice for 7x19: 18:1 minimum (FAA AC 43.13-1B ch. 7, from memory)"),
        PracticeEntry("drum_d_ratio_desired", 24.0, "dimensionless",
                      "desirable drum pitch diameter / rope diameter (D/d) (below it: warn)",
                      "aircraft-cable pulley practice for 7x19: 24:1 desirable (FAA AC 43.13-1B ch. 7, from memory)"),
        PracticeEntry("pulley_d_ratio_min", 18.0, "dimensionless",
                      "smallest exit-pulley diameter / rope diameter",
                      "aircraft-cable pulley practice for 7x19: 18:1 minimum (FAA AC 43.13-1B ch. 7, from memory)"),
        PracticeEntry("pulley_d_ratio_desired", 24.0, "dimensionless",
                      "desirable exit-pulley diameter / rope diameter (below it: warn)",
                      "aircraft-cable pulley practice for 7x19: 24:1 desirable (FAA AC 43.13-1B ch. 7, from memory)"),
        PracticeEntry("tension_margin_warn", 0.10, "dimensionless",
                      "share of a cable's tension range below which a feasible pose is flagged 'warn'",
                      "common practice, no source"),
        PracticeEntry("sag_length_threshold", 0.5e-3, "length",
                      "sag-induced change of effective cable length above which straight-cable results are flagged",
                      "common practice, no source"),
        PracticeEntry("sag_angle_threshold", 0.5 * _DEG, "angle",
                      "sag-induced change of cable direction at the platform above which straight-cable results are flagged",
                      "common practice, no source"),
        PracticeEntry("motor_rated_use", 1.0, "dimensionless",
                      "highest static motor torque as a share of rated torque (pass up to this)",
                      "common practice, no source: continuous holding torque within the motor's rated torque"),
        PracticeEntry("count_rate_use", 0.8, "dimensionless",
                      "highest encoder count rate as a share of the controller's counting limit",
                      "common practice, no source: keep 20 % headroom on the decoder"),
        PracticeEntry("drum_fill_max", 1.0, "dimensionless",
                      "share of the drum's rope capacity that may be used",
                      "common practice, no source"),
        PracticeEntry("flange_freeboard_min", 2.0, "dimensionless",
                      "flange must stand at least this many rope diameters above the top layer",
                      "ASME B30.7 asks the flange to project at least 1/2 in or 2 rope diameters above the top layer (from memory)"),
    ]
}


def practice_value(key: str, overrides: Mapping[str, float] | None = None) -> float:
    """The value in force for ``key``: the design's override, else the table's default."""
    if overrides and key in overrides:
        return float(overrides[key])
    return PRACTICE[key].value
