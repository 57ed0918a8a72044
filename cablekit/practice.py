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

# Sources, named once (each entry says whether its value was checked or recalled)
_WRTB = "Wire Rope Technical Board, Wire Rope Users Manual (4th ed.), section on fleet angle"
_DD_GUIDE = ("aircraft-cable suppliers' pulley guides, D:d tables by construction (tread diameter / cable "
             "diameter): 6x19 and 7x19 'desired minimum' 24:1 and 'critical minimum' 18:1; 6x7 and 7x7 42:1 and "
             "28:1 (common practice, no standard; checked against one published supplier table)")

_WIRE_DD = ("Wire Rope Technical Board, Wire Rope Users Manual (4th ed.), table of suggested and minimum sheave "
            "and drum D/d ratios by rope construction (from memory; the same table appears in rope makers' "
            "catalogues)")

PRACTICE: dict[str, PracticeEntry] = {
    e.key: e
    for e in [
        PracticeEntry("rope_design_factor", 5.0, "dimensionless",
                      "rope design factor: minimum breaking force / highest working tension",
                      "common practice for hanging loads on small steel cable: 5:1 (suppliers commonly assume 4:1 to "
                      "5:1); ASME B30.7 asks at least 3.5 for running ropes of base-mounted drum hoists (from memory). "
                      "Local codes and a competent person's judgement override."),
        PracticeEntry("fleet_angle_smooth", 1.5 * _DEG, "angle",
                      "largest fleet angle on a smooth (plain) drum",
                      f"{_WRTB}: at most 1.5 deg for a smooth drum (checked against a published copy of the text)"),
        PracticeEntry("fleet_angle_grooved", 2.0 * _DEG, "angle",
                      "largest fleet angle on a grooved drum",
                      f"{_WRTB}: at most 2 deg for a grooved drum (checked against a published copy of the text); "
                      "some rope makers allow up to 4 deg for 6- and 8-strand ropes on grooved drums"),
        PracticeEntry("fleet_angle_min", 0.5 * _DEG, "angle",
                      "smallest fleet angle on a smooth drum (below it the rope piles up at the flange: warn)",
                      f"{_WRTB}: fleet angles under 0.5 deg should be avoided on smooth drums"),
        PracticeEntry("drum_d_ratio_min", 18.0, "dimensionless",
                      "smallest drum diameter / rope diameter (D/d) for 7x19 aircraft cable",
                      _DD_GUIDE),
        PracticeEntry("drum_d_ratio_desired", 24.0, "dimensionless",
                      "desirable drum diameter / rope diameter (D/d) for 7x19 aircraft cable (below it: warn)",
                      _DD_GUIDE),
        PracticeEntry("pulley_d_ratio_min", 18.0, "dimensionless",
                      "smallest exit-pulley diameter / rope diameter for 7x19 aircraft cable",
                      _DD_GUIDE),
        PracticeEntry("pulley_d_ratio_desired", 24.0, "dimensionless",
                      "desirable exit-pulley diameter / rope diameter for 7x19 aircraft cable (below it: warn)",
                      _DD_GUIDE),
        PracticeEntry("d_ratio_min_7x7", 28.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 7x7 aircraft cable (stiffer than 7x19)",
                      _DD_GUIDE),
        PracticeEntry("d_ratio_desired_7x7", 42.0, "dimensionless",
                      "desirable drum or pulley diameter / rope diameter for 7x7 aircraft cable (below it: warn)",
                      _DD_GUIDE),
        # D/d of stranded wire rope by construction (drum and sheave alike); aircraft cable (7x7,
        # 7x19) keeps the supplier pulley-guide values above
        PracticeEntry("d_ratio_min_6x7", 42.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 6x7 wire rope", _WIRE_DD),
        PracticeEntry("d_ratio_desired_6x7", 72.0, "dimensionless",
                      "suggested drum or pulley diameter / rope diameter for 6x7 wire rope (below it: warn)", _WIRE_DD),
        PracticeEntry("d_ratio_min_6x19", 34.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 6x19 class wire rope (6x19 Seale, the "
                      "stiffest of the class)", _WIRE_DD),
        PracticeEntry("d_ratio_desired_6x19", 51.0, "dimensionless",
                      "suggested drum or pulley diameter / rope diameter for 6x19 class wire rope (below it: warn)",
                      _WIRE_DD),
        PracticeEntry("d_ratio_min_6x36", 23.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 6x36 Warrington-Seale wire rope", _WIRE_DD),
        PracticeEntry("d_ratio_desired_6x36", 35.0, "dimensionless",
                      "suggested drum or pulley diameter / rope diameter for 6x36 wire rope (below it: warn)", _WIRE_DD),
        PracticeEntry("d_ratio_min_8x19", 27.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 8x19 Seale wire rope", _WIRE_DD),
        PracticeEntry("d_ratio_desired_8x19", 41.0, "dimensionless",
                      "suggested drum or pulley diameter / rope diameter for 8x19 wire rope (below it: warn)", _WIRE_DD),
        PracticeEntry("d_ratio_min_19x7", 34.0, "dimensionless",
                      "smallest drum or pulley diameter / rope diameter for 19x7 rotation-resistant wire rope",
                      _WIRE_DD),
        PracticeEntry("d_ratio_desired_19x7", 51.0, "dimensionless",
                      "suggested drum or pulley diameter / rope diameter for 19x7 wire rope (below it: warn)", _WIRE_DD),
        PracticeEntry("rope_design_factor_over_people", 10.0, "dimensionless",
                      "rope design factor when the load may hang over people (cable.use_class = 'over_people')",
                      "entertainment-rigging practice: at least 8:1 for wire rope in powered hoists over people "
                      "(ANSI E1.6-1) and 10:1 under the German stage rules (DGUV Vorschrift 17/18, formerly BGV C1); "
                      "the higher value is taken (both from memory). Local codes and a competent person's judgement "
                      "override."),
        PracticeEntry("flange_freeboard_length_min", 12.7e-3, "length",
                      "flange must stand at least this far above the top layer (whichever is greater of this and "
                      "flange_freeboard_min rope diameters)",
                      "ASME B30.7 asks the flange to project at least 1/2 in or 2 rope diameters above the top layer, "
                      "whichever is greater (from memory)"),
        PracticeEntry("tension_margin_warn", 0.10, "dimensionless",
                      "share of a cable's tension range below which a feasible pose is flagged 'warn'",
                      "common practice, no source"),
        PracticeEntry("sag_length_threshold", 0.5e-3, "length",
                      "sag-induced change of effective cable length above which straight-cable results are flagged "
                      "(used only when the design file sets it; by default the threshold is each cable's effective "
                      "motion step, see cablekit.cables.sag_map)",
                      "common practice, no source"),
        PracticeEntry("sag_angle_threshold", 0.5 * _DEG, "angle",
                      "sag-induced change of cable direction at the platform above which straight-cable results are flagged",
                      "common practice, no source"),
        PracticeEntry("motor_rated_use", 1.0, "dimensionless",
                      "highest static motor torque as a share of rated torque (pass up to this)",
                      "common practice, no source: continuous holding torque within the motor's rated torque"),
        PracticeEntry("motor_speed_use", 1.0, "dimensionless",
                      "motor speed at the top cable speed as a share of the rated speed (pass up to this)",
                      "common practice, no source: run within the rated speed"),
        PracticeEntry("count_rate_use", 0.8, "dimensionless",
                      "highest encoder count rate as a share of the controller's counting limit",
                      "common practice, no source: keep 20 % headroom on the decoder"),
        PracticeEntry("drum_fill_max", 1.0, "dimensionless",
                      "share of the drum's rope capacity that may be used",
                      "common practice, no source"),
        PracticeEntry("groove_pitch", 1.09, "dimensionless",
                      "distance between neighbouring wraps on a grooved drum, in rope diameters (smooth drum: 1)",
                      "rope makers' drum-groove guidance: groove radius about 0.53 d and a single-layer pitch of at "
                      "least 2.065 groove radii, about 1.09 d (checked against one published rope-maker table; "
                      "common practice)"),
        PracticeEntry("flange_freeboard_min", 2.0, "dimensionless",
                      "flange must stand at least this many rope diameters above the top layer (whichever is "
                      "greater of this and flange_freeboard_length_min)",
                      "ASME B30.7 asks the flange to project at least 1/2 in or 2 rope diameters above the top layer, "
                      "whichever is greater (from memory)"),
        PracticeEntry("brake_torque_factor", 1.25, "dimensionless",
                      "holding brake torque / highest static load torque at the brake (motor shaft, gear losses "
                      "not counted)",
                      "hoist and winch standards commonly ask a brake to hold 125 % of the rated load torque "
                      "(ASME B30.7 / B30.16, from memory)"),
    ]
}


def practice_value(key: str, overrides: Mapping[str, float] | None = None) -> float:
    """The value in force for ``key``: the design's override, else the table's default."""
    if overrides and key in overrides:
        return float(overrides[key])
    return PRACTICE[key].value
