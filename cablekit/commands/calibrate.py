"""``cablekit calibrate DESIGN.toml MEASUREMENTS.csv [-o CORRECTED.toml]``: correct a design from measurements."""

from __future__ import annotations

from ..cli import EXIT_OK, InputError, output_path

NAME = "calibrate"
HELP = "identify exit points, home lengths and drum scale from measured positions; write a corrected design"
DESCRIPTION = ("Fits the rig's exit points, home lengths and drum scale to measured platform positions (the CSV of "
               "'cablekit iso9283', optionally with the controller's encoder counts counts_1 .. counts_m) by "
               "nonlinear least squares, reports the residual before and after, the parameter uncertainties and "
               "what the data cannot identify, and writes a corrected design beside the original "
               "(NAME.calibrated.toml); the original is never overwritten.")


def add_arguments(p) -> None:
    p.add_argument("design", metavar="DESIGN.toml")
    p.add_argument("measurements", metavar="MEASUREMENTS.csv")
    p.add_argument("-o", "--output", metavar="CORRECTED.toml",
                   help="where to write the corrected design (default: DESIGN.calibrated.toml beside DESIGN)")
    p.add_argument("--params", default="exits,home,scale", metavar="LIST",
                   help="parameter groups to identify, comma separated: exits, home, scale (default: all three)")
    p.add_argument("--dry-run", action="store_true", help="report only; write no file")


def run(args) -> int:
    from ..calibration import GROUPS, calibrate, calibrated_path, write_corrected
    from ..design import load_design
    from ..iso9283 import read_measurements

    groups = tuple(g.strip() for g in args.params.split(",") if g.strip())
    bad = [g for g in groups if g not in GROUPS]
    if bad or not groups:
        raise InputError(f"--params: unknown group(s) {', '.join(bad) or '(none given)'}; choose from {', '.join(GROUPS)}")
    d = load_design(args.design)
    out = output_path(args.output or calibrated_path(args.design), "-o/--output",
                      inputs=[args.design, args.measurements], suffixes=(".toml",))
    meas = read_measurements(args.measurements, cables=d.m, min_cycles=1)
    try:
        res = calibrate(d, meas, groups=groups)
    except ValueError as exc:
        raise InputError(str(exc)) from None
    print("\n".join(res.summary()))
    if not args.dry_run:
        write_corrected(res, args.design, out)
        print(f"wrote {out} (the original {args.design} is unchanged)")
    return EXIT_OK
