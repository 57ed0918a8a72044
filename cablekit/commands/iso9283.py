"""``cablekit iso9283 MEASUREMENTS.csv [-o RESULTS.csv]``: measured pose accuracy and repeatability."""

from __future__ import annotations

from ..cli import EXIT_OK, output_path

NAME = "iso9283"
HELP = "ISO 9283 pose accuracy (AP) and repeatability (RP) from measured poses"
DESCRIPTION = ("Reads a CSV of commanded and measured positions (columns pose, cycle, x_cmd [mm], y_cmd [mm], "
               "z_cmd [mm], x_meas [mm], y_meas [mm], z_meas [mm]; optional roll/pitch/yaw _cmd and _meas in deg) "
               "and prints, per pose, the ISO 9283:1998 pose accuracy AP and pose repeatability RP.")


def add_arguments(p) -> None:
    p.add_argument("measurements", metavar="MEASUREMENTS.csv")
    p.add_argument("-o", "--output", metavar="RESULTS.csv", help="write the per-pose results as a CSV")
    p.add_argument("--html", metavar="RESULTS.html", help="write a bar chart of AP and RP as an HTML page")


def run(args) -> int:
    from ..iso9283 import pose_characteristics, read_measurements

    out = output_path(args.output, "-o/--output", inputs=[args.measurements], suffixes=(".csv",))
    html = output_path(args.html, "--html", inputs=[args.measurements, out], suffixes=(".html", ".htm"))
    res = pose_characteristics(read_measurements(args.measurements))
    print("\n".join(res.summary()))
    if out:
        res.write_csv(out)
        print(f"wrote {out}")
    if html:
        from ..design import atomic_write_text

        atomic_write_text(html, res.figure().to_html(include_plotlyjs=True, full_html=True))
        print(f"wrote {html}")
    return EXIT_OK
