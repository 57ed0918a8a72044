"""The one table of input bounds: sizes, counts and ranges cablekit refuses beyond.

These are not design rules (those live in :mod:`cablekit.practice`).  They keep every command
finite: a unit text pint can parse in microseconds, a sampling that fits in memory and time,
a number far outside any cable robot taken as a slip (wrong unit, missing decimal point) and
refused with exit code 3 instead of a hang, a ``MemoryError`` or an overflow deep inside a
computation.  Every error message that applies one of them names the limit.

Unless stated otherwise a bound is **common practice, no source**: chosen one to three orders
of magnitude beyond the largest rigs and parts the project knows of, so that no real design
meets it.
"""

from __future__ import annotations

__all__ = [
    "MAX_UNIT_TEXT", "MAX_UNIT_TOKENS", "MAX_UNIT_DEPTH", "MAX_UNIT_EXPONENT", "MAGNITUDE",
    "MAX_CABLES", "MAX_ARM_JOINTS", "MAX_TASK_POINTS", "MAX_ORIENTATIONS", "MAX_OBSTACLES",
    "MAX_GRID_POSES", "MAX_FIXED_POSES", "MAX_TASK_SAMPLES", "MAX_BUILDS", "MAX_MC_SAMPLES", "MAX_MC_POSES", "MAX_BUILD_EVALUATIONS", "MAX_DESIGN_BYTES", "MAX_TABLE_BYTES", "MAX_TABLE_ROWS",
    "MAX_TABLE_CELL", "FRAME_SPAN", "GRAVITY", "MIN_DRUM_DIAMETER", "MIN_CABLE_DIAMETER",
    "MIN_DESIGN_FACTOR", "MAX_ROPE_DENSITY", "MAX_BREAKING_STRAIN", "PRACTICE_OVERRIDE_FACTOR", "MAX_GEAR_RATIO", "MAX_ENCODER_LINES", "MAX_LENGTH_PER_COUNT", "MAX_DEADBAND_LENGTH",
    "MIN_TOKEN_LENGTH",
]

# -- unit text (units.py) -----------------------------------------------------------------
# pint evaluates powers exactly: "m**9**9**9" is 9**(9**9), minutes of big-integer work.  A unit
# text is therefore checked by our own tokenizer before pint sees it.
MAX_UNIT_TEXT = 40  # characters of the unit part ("kg*m**2/s**2" has 12)
MAX_UNIT_TOKENS = 16  # names, numbers, operators and parentheses
MAX_UNIT_DEPTH = 2  # nested parentheses
MAX_UNIT_EXPONENT = 4  # |n| in "m**n"; one power per factor, never a chain "m**2**3"

# -- magnitudes per dimension (SI) --------------------------------------------------------
# (smallest positive size, largest |value|).  The largest applies to every quantity, the
# smallest to sizes (positive fields such as a mass or a diameter), not to coordinates.
MAGNITUDE: dict[str, tuple[float, float]] = {
    "length": (1e-9, 1e4),  # 1 nm .. 10 km (the largest cable robots span a few hundred metres)
    "mass": (1e-9, 1e6),  # 1 ug .. 1000 t
    "force": (1e-9, 1e9),  # .. 1 GN
    "torque": (1e-9, 1e8),
    "angle": (1e-12, 1e5),  # .. about 16000 turns (drum turns, joint ranges, orientations)
    "angular_speed": (1e-9, 1e6),  # .. about 10^7 rpm
    "speed": (1e-12, 1e3),
    "acceleration": (1e-12, 1e5),
    "time": (1e-9, 1e8),
    "frequency": (1e-6, 1e12),
    "mass_per_length": (1e-12, 1e4),
    "stiffness": (1e-9, 1e13),
    "pressure": (1e-3, 1e13),  # .. 10 TPa (steel has about 0.2 TPa)
    "area": (1e-15, 1e2),
    "inertia": (1e-15, 1e9),
    "power": (1e-9, 1e9),
    "dimensionless": (0.0, 1e12),
}

# -- counts (design.py, arm.py, tables.py) --------------------------------------------------
MAX_CABLES = 64  # rigs use 3 to about 16 cables
MAX_ARM_JOINTS = 10  # levelling (2) + reach + wrist roll and tilt, with room to spare
MAX_TASK_POINTS = 2_000  # explicit [task] points (use a CSV and 'cablekit points' for more)
MAX_ORIENTATIONS = 1_000  # orientation set of a rigid platform
MAX_OBSTACLES = 1_000
# poses of one sampling of the task region (box grid x orientations, plus points); the
# design's task.step must stay within it too, so that 'check' refuses what 'review' cannot do.
# About 0.4 GB for the structure matrices of a rigid rig with 8 cables.
MAX_GRID_POSES = 1_000_000
# poses sampled whatever the grid step: (task points + one box position) x orientations.  The
# accuracy map (and so the review sheet) thins the box grid to its default of 2,000 poses
# (accuracy.accuracy_map max_poses) and cannot thin these, so 'check' refuses more.
MAX_FIXED_POSES = 2_000
# poses checked by 'cablekit task' over all its targets and moves (--step, --angle-step)
MAX_TASK_SAMPLES = 200_000
# 'cablekit accuracy': sampled rigs (--builds) and Monte Carlo samples per pose (--mc-samples),
# poses the Monte Carlo check visits (--mc-poses), and builds x grid poses in all
MAX_BUILDS = 100_000
MAX_MC_SAMPLES = 100_000
MAX_MC_POSES = 100
MAX_BUILD_EVALUATIONS = 100_000_000

# -- file sizes -------------------------------------------------------------------------------
MAX_DESIGN_BYTES = 4 * 2**20  # a design file (10^4 task points take about 0.3 MB)
MAX_TABLE_BYTES = 64 * 2**20  # a CSV file
MAX_TABLE_ROWS = 200_000  # data rows of a CSV file
MAX_TABLE_CELL = 1_000  # characters in one CSV cell (labels included)

# -- ranges of single fields (design.py) ------------------------------------------------------
FRAME_SPAN = (0.01, 1e4)  # [m] diagonal of the exit points' bounding box: 1 cm .. 10 km
GRAVITY = (0.1, 100.0)  # [m/s**2] frame.g: from small bodies to centrifuge tests (Earth: 9.81)
MIN_DRUM_DIAMETER = 1e-3  # [m] a winch drum or exit pulley smaller than 1 mm is a unit slip
MIN_CABLE_DIAMETER = 1e-5  # [m] 10 um: thinner than any rope or fibre line in use
# [kg/m**3] rope mass per length / (pi d**2 / 4): a steel wire rope has about 4000-5000, fibre
# ropes about 1000; no rope is denser than tungsten (19,300), so more is a unit slip
MAX_ROPE_DENSITY = 2e4
# breaking force / EA: the rope's elastic strain at break.  Steel wire rope about 0.01-0.02,
# fibre ropes up to about 0.15-0.2 (from memory); more is a unit slip in EA
MAX_BREAKING_STRAIN = 0.25
MIN_DESIGN_FACTOR = 1.0  # a rope design factor below 1 allows working tensions above breaking
# a [practice] override further than this factor from the table's value is taken as a slip (wide
# enough to loosen a flag threshold out of the way, e.g. a sag threshold of 1 m)
PRACTICE_OVERRIDE_FACTOR = 1e4
MAX_GEAR_RATIO = 1e5
# [m] cable length per encoder count, and the winch deadband as a length: the accuracy model
# is a small-error model that takes length errors up to 0.1 m (accuracy.BUDGET_KEYS), so half a
# count and the deadband must stay within it
MAX_LENGTH_PER_COUNT = 0.1
MAX_DEADBAND_LENGTH = 0.1
MAX_ENCODER_LINES = 2**31 - 1  # fits the controllers' 32-bit counters

# -- the dashboard server (commands/serve.py) ------------------------------------------------
MIN_TOKEN_LENGTH = 16  # characters; secrets.token_urlsafe(24) gives 32
