"""Make examples/greenhouse_measurements.csv: SYNTHETIC measurements for the demos.

Nothing here was measured.  The "true" rig is the greenhouse demo design with invented errors
(exit points a few mm off, home lengths and drum diameters slightly wrong); the controller
commands the nominal design's counts, its deadband leaves each cable within +/- 3 counts,
and a camera rig "measures" the platform with 0.3 mm of Gaussian noise per coordinate.
Stretch and sag are left out, so a calibration can explain every residual but the noise.

Rows: five ISO 9283 test poses P1..P5 on a diagonal plane of the task box (P1 at the centre,
P2..P5 on the plane's diagonals 10 % of their length from the corners; the layout of ISO
9283:1998, recalled from memory) visited 30 times each, and 16 calibration poses C01..C16
spread over the task box, visited 3 times each.  The controller's encoder counts are logged.

Run:  .venv/bin/python tools/make_demo_measurements.py
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from cablekit.calibration import synthetic_measurements
from cablekit.design import load_design
from cablekit.iso9283 import Measurements, write_measurements

ROOT = Path(__file__).resolve().parents[1]
DESIGN = ROOT / "examples" / "greenhouse_tray_3cable.toml"
OUT = ROOT / "examples" / "greenhouse_measurements.csv"

# the invented "true" rig, offsets from the design file
EXIT_OFFSETS_MM = [[3.0, -2.0, 1.5], [-2.5, 1.0, -1.0], [1.0, 3.5, -2.0]]
HOME_OFFSETS_MM = [1.2, -1.8, 0.8]
DRUM_OFFSETS_MM = [0.06, -0.04, 0.02]  # pitch diameter
NOISE_MM = 0.3


def iso_poses(lo, hi) -> np.ndarray:
    """P1..P5 on the diagonal plane through the box corners (lo,lo,lo), (hi,hi,lo), (hi,hi,hi), (lo,lo,hi)."""
    c1, c2 = np.array([lo[0], lo[1], lo[2]]), np.array([hi[0], hi[1], lo[2]])
    c7, c8 = np.array([hi[0], hi[1], hi[2]]), np.array([lo[0], lo[1], hi[2]])
    centre = 0.5 * (c1 + c7)
    return np.array([centre, c1 + 0.1 * (c7 - c1), c2 + 0.1 * (c8 - c2), c7 - 0.1 * (c7 - c1),
                     c8 - 0.1 * (c8 - c2)])


def main() -> None:
    d = load_design(DESIGN)
    lo, hi = np.array(d.task.box_lower), np.array(d.task.box_upper)
    rng = np.random.default_rng(20240601)
    cal = lo + (hi - lo) * rng.uniform(0.05, 0.95, (16, 3))
    kw = dict(exit_offsets=np.array(EXIT_OFFSETS_MM) * 1e-3, home_offsets=np.array(HOME_OFFSETS_MM) * 1e-3,
              drum_offsets=np.array(DRUM_OFFSETS_MM) * 1e-3, noise=NOISE_MM * 1e-3)
    a = synthetic_measurements(d, iso_poses(lo, hi), cycles=30, seed=1, **kw)
    b = synthetic_measurements(d, cal, cycles=3, labels=[f"C{k + 1:02d}" for k in range(16)], seed=2, **kw)
    both = Measurements(labels=np.concatenate([a.labels, b.labels]), cycles=np.concatenate([a.cycles, b.cycles]),
                        commanded=np.vstack([a.commanded, b.commanded]), measured=np.vstack([a.measured, b.measured]),
                        commanded_orientation=None, measured_orientation=None,
                        counts=np.vstack([a.counts, b.counts]), lines=np.arange(len(a) + len(b)), source="synthetic")
    comment = ("SYNTHETIC demo data (nothing was measured): made by tools/make_demo_measurements.py from\n"
               "examples/greenhouse_tray_3cable.toml with invented errors: exit points off by up to 3.5 mm, home\n"
               "lengths by up to 1.8 mm, drum pitch diameters by up to 0.06 mm; deadband +/- 3 counts; 0.3 mm\n"
               "measurement noise. P1..P5: ISO 9283 test poses x 30 cycles; C01..C16: calibration poses x 3.\n"
               "counts_i: the controller's encoder counts from home for cable i (post A, post B, post C).")
    write_measurements(both, OUT, comment=comment)
    print(f"wrote {OUT} ({len(both.lines)} rows)")


if __name__ == "__main__":
    main()
