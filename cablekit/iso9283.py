"""Measured accuracy: ISO 9283:1998 pose accuracy (AP) and pose repeatability (RP).

The measurements come as a CSV with units in the header (see :mod:`cablekit.tables`): one
row per visit of a commanded pose, e.g. from a tape, a camera rig or a laser tracker::

    pose, cycle, x_cmd [mm], y_cmd [mm], z_cmd [mm], x_meas [mm], y_meas [mm], z_meas [mm]
    P1,   1,     1500,       867,        900,        1502.1,      866.2,       899.0

``pose`` (a label) and ``cycle`` are optional (without ``pose`` rows are grouped by their
commanded position).  Rigid platforms may add ``roll_cmd``, ``pitch_cmd``, ``yaw_cmd`` and
``roll_meas``, ``pitch_meas``, ``yaw_meas`` (angles about x, y, z).  Encoder readings logged by
the controller may come as ``counts_1`` .. ``counts_m`` (one per cable, in the design's cable
order); :mod:`cablekit.calibration` uses them.

Definitions (ISO 9283:1998, clause 7.2.1 pose accuracy and 7.2.2 pose repeatability; clause
numbers from memory), for the n measured positions ``(x_j, y_j, z_j)`` of one commanded pose
``(x_c, y_c, z_c)``:

* barycentre ``x_bar = (1/n) sum x_j`` (likewise y, z);
* ``AP_P = sqrt((x_bar - x_c)^2 + (y_bar - y_c)^2 + (z_bar - z_c)^2)`` with the components
  ``AP_x = x_bar - x_c``, ``AP_y``, ``AP_z``; orientation ``AP_a = a_bar - a_c`` (b, c alike);
* ``l_j = sqrt((x_j - x_bar)^2 + (y_j - y_bar)^2 + (z_j - z_bar)^2)``, ``l_bar = (1/n) sum l_j``,
  ``S_l = sqrt(sum (l_j - l_bar)^2 / (n - 1))`` and ``RP_l = l_bar + 3 S_l``;
  orientation ``RP_a = +/- 3 S_a`` with ``S_a = sqrt(sum (a_j - a_bar)^2 / (n - 1))``.

The standard asks for 30 cycles per pose (and five poses on a diagonal plane of the test
cube); fewer cycles are accepted here with a note.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .tables import Column, TableError, read_table, write_table

__all__ = ["Measurements", "read_measurements", "write_measurements", "measurement_columns", "PoseCharacteristics",
           "pose_characteristics", "ISO_CYCLES"]

ISO_CYCLES = 30  # cycles per pose the standard asks for (ISO 9283:1998, from memory)
_AXES = ("x", "y", "z")
_ANGLES = ("roll", "pitch", "yaw")


@dataclass(frozen=True)
class Measurements:
    """Commanded and measured poses, one row per visit (SI: m, rad).

    labels (N,) pose labels; cycles (N,) cycle numbers (NaN when not given);
    commanded, measured (N, 3) [m]; commanded_orientation, measured_orientation (N, 3)
    [rad] or ``None``; counts (N, m) encoder counts from home or ``None``; lines (N,) file
    line of each row; source : the file name.
    """

    labels: np.ndarray
    cycles: np.ndarray
    commanded: np.ndarray
    measured: np.ndarray
    commanded_orientation: np.ndarray | None
    measured_orientation: np.ndarray | None
    counts: np.ndarray | None
    lines: np.ndarray
    source: str

    def __len__(self) -> int:
        return len(self.lines)

    def pose_labels(self) -> list[str]:
        """Distinct pose labels in order of first appearance."""
        seen: dict[str, None] = {}
        for lab in self.labels:
            seen.setdefault(str(lab), None)
        return list(seen)


def measurement_columns(cables: int = 0) -> list[Column]:
    """The columns of a measurement CSV (``cables`` adds optional ``counts_1..counts_m``)."""
    cols = [Column("pose", "text", required=False), Column("cycle", "dimensionless", required=False)]
    for suffix in ("cmd", "meas"):
        cols += [Column(f"{a}_{suffix}", "length") for a in _AXES]
    for suffix in ("cmd", "meas"):
        cols += [Column(f"{a}_{suffix}", "angle", required=False) for a in _ANGLES]
    cols += [Column(f"counts_{i + 1}", "dimensionless", required=False) for i in range(cables)]
    return cols


def read_measurements(path, *, cables: int = 0, min_cycles: int = 2) -> Measurements:
    """Read and check a measurement CSV.

    Parameters
    ----------
    path : file path (or ``io.StringIO``).
    cables : number of cables of the design; enables the ``counts_i`` columns (all or none).
    min_cycles : fewest visits of every pose (2 for repeatability, 1 for calibration data).

    Raises
    ------
    TableError
        Missing columns, unknown units, cells that are not finite numbers, a single row, a
        pose visited fewer than ``min_cycles`` times, or a pose label commanded at two
        different places, each naming the line and column.
    """
    table = read_table(path, measurement_columns(cables), allow_extra=cables == 0)
    src = table.source
    N = len(table)
    c = table.columns
    lines = table.lines
    if N < 2:
        raise TableError(f"{src} line {lines[0]}: only one measurement row; at least two visits of a pose are "
                         f"needed (ISO 9283 asks for {ISO_CYCLES} cycles per pose)")
    commanded = np.column_stack([c[f"{a}_cmd"] for a in _AXES])
    measured = np.column_stack([c[f"{a}_meas"] for a in _AXES])
    ori = {}
    for suffix in ("cmd", "meas"):
        have = [f"{a}_{suffix}" for a in _ANGLES if table.has(f"{a}_{suffix}")]
        if have and len(have) != 3:
            missing = [f"{a}_{suffix}" for a in _ANGLES if not table.has(f"{a}_{suffix}")]
            raise TableError(f"{src}: orientation columns come as a set of three; have {', '.join(have)}, "
                             f"missing {', '.join(repr(m) + ' [deg]' for m in missing)}")
        ori[suffix] = np.column_stack([c[f"{a}_{suffix}"] for a in _ANGLES]) if have else None
    if (ori["cmd"] is None) != (ori["meas"] is None):
        given, other = ("cmd", "meas") if ori["cmd"] is not None else ("meas", "cmd")
        raise TableError(f"{src}: orientation given as *_{given} but not as *_{other}; give roll_{other}, "
                         f"pitch_{other}, yaw_{other} too, or neither")
    counts = None
    if cables:
        have = [i for i in range(cables) if table.has(f"counts_{i + 1}")]
        if have and len(have) != cables:
            missing = [f"counts_{i + 1}" for i in range(cables) if i not in have]
            raise TableError(f"{src}: encoder counts must be given for every cable; missing {', '.join(missing)}")
        if have:
            counts = np.column_stack([c[f"counts_{i + 1}"] for i in range(cables)])
    if table.has("pose"):
        labels = np.array([str(v).strip() for v in c["pose"]], dtype=object)
        for k, lab in enumerate(labels):
            if not lab:
                raise TableError(f"{src} line {lines[k]}, column 'pose': empty pose label")
    else:
        # no labels: the commanded position (to 1 um) names the pose
        keys = [tuple(np.round(p * 1e6).astype(np.int64)) for p in commanded]
        order: dict[tuple, int] = {}
        labels = np.array([f"pose {order.setdefault(key, len(order)) + 1}" for key in keys], dtype=object)
    cycles = c["cycle"] if table.has("cycle") else np.full(N, np.nan)
    meas = Measurements(labels=labels, cycles=cycles, commanded=commanded, measured=measured,
                        commanded_orientation=ori["cmd"], measured_orientation=ori["meas"], counts=counts,
                        lines=lines, source=src)
    _check_groups(meas, min_cycles)
    return meas


def _check_groups(meas: Measurements, min_cycles: int) -> None:
    src = meas.source
    for lab in meas.pose_labels():
        idx = np.flatnonzero(meas.labels == lab)
        first = idx[0]
        if len(idx) < min_cycles:
            raise TableError(f"{src} line {meas.lines[first]}, column 'pose': pose {lab!r} has {len(idx)} "
                             f"measurement{'s' if len(idx) != 1 else ''}; repeatability needs at least {min_cycles} "
                             f"visits (ISO 9283 asks for {ISO_CYCLES})")
        for arr, names, tol, unit, f in ((meas.commanded, [f"{a}_cmd" for a in _AXES], 1e-6, "m", 1.0),
                                         (meas.commanded_orientation, [f"{a}_cmd" for a in _ANGLES], 1e-6, "deg",
                                          180 / math.pi)):
            if arr is None:
                continue
            dev = np.abs(arr[idx] - arr[first])
            bad = np.argwhere(dev > tol)
            if len(bad):
                r, col = bad[0]
                k = idx[r]
                raise TableError(f"{src} line {meas.lines[k]}, column {names[col]!r}: pose {lab!r} was commanded at "
                                 f"{arr[first, col] * f:.6g} {unit} on line {meas.lines[first]} but at "
                                 f"{arr[k, col] * f:.6g} {unit} here; give each commanded pose its own label")


@dataclass(frozen=True)
class PoseCharacteristics:
    """ISO 9283 pose characteristics, one entry per commanded pose (SI: m, rad).

    labels (P,); cycles (P,) visits; commanded (P, 3); barycentre (P, 3) mean measured
    position; ap (P,) AP_P; ap_xyz (P, 3) AP_x, AP_y, AP_z; l_mean (P,) mean distance from the
    barycentre; s_l (P,) its standard deviation; rp (P,) RP_l = l_mean + 3 s_l; ap_abc,
    rp_abc (P, 3) orientation accuracy and repeatability (``None`` without orientation);
    source : the measurement file.
    """

    labels: tuple[str, ...]
    cycles: np.ndarray
    commanded: np.ndarray
    barycentre: np.ndarray
    ap: np.ndarray
    ap_xyz: np.ndarray
    l_mean: np.ndarray
    s_l: np.ndarray
    rp: np.ndarray
    ap_abc: np.ndarray | None
    rp_abc: np.ndarray | None
    source: str

    def summary(self) -> list[str]:
        mm = 1e3
        lines = [f"ISO 9283:1998 pose characteristics from {self.source} ({len(self.labels)} poses)",
                 "  pose          cycles   AP [mm]  (AP_x, AP_y, AP_z) [mm]        RP [mm]"]
        for k, lab in enumerate(self.labels):
            d = ", ".join(f"{v * mm:+7.3f}" for v in self.ap_xyz[k])
            lines.append(f"  {lab:<14}{int(self.cycles[k]):>5}  {self.ap[k] * mm:8.3f}  ({d})  {self.rp[k] * mm:8.3f}")
        if self.ap_abc is not None:
            lines.append("  orientation   AP_a, AP_b, AP_c [deg]          RP_a, RP_b, RP_c [+/- deg]")
            for k, lab in enumerate(self.labels):
                a = ", ".join(f"{math.degrees(v):+.4f}" for v in self.ap_abc[k])
                r = ", ".join(f"{math.degrees(v):.4f}" for v in self.rp_abc[k])
                lines.append(f"  {lab:<14}{a}    {r}")
        worst_ap = int(np.argmax(self.ap))
        worst_rp = int(np.argmax(self.rp))
        lines.append(f"  largest AP {self.ap[worst_ap] * mm:.3f} mm at {self.labels[worst_ap]}; "
                     f"largest RP {self.rp[worst_rp] * mm:.3f} mm at {self.labels[worst_rp]}")
        few = [lab for lab, n in zip(self.labels, self.cycles) if n < ISO_CYCLES]
        if few:
            lines.append(f"  note: ISO 9283 asks for {ISO_CYCLES} cycles per pose; {len(few)} pose(s) have fewer, so "
                         "RP is less certain")
        lines.append("  AP is the barycentre's distance from the commanded position (clause 7.2.1); RP the radius "
                     "l_mean + 3 S_l around it (clause 7.2.2).")
        return lines

    def table_rows(self) -> tuple[list[str], list[list]]:
        """Header and rows for a CSV of the results (lengths in mm, angles in deg)."""
        header = ["pose", "cycles", "x_cmd [mm]", "y_cmd [mm]", "z_cmd [mm]", "x_bar [mm]", "y_bar [mm]",
                  "z_bar [mm]", "AP [mm]", "AP_x [mm]", "AP_y [mm]", "AP_z [mm]", "l_mean [mm]", "S_l [mm]",
                  "RP [mm]"]
        if self.ap_abc is not None:
            header += ["AP_a [deg]", "AP_b [deg]", "AP_c [deg]", "RP_a [deg]", "RP_b [deg]", "RP_c [deg]"]
        rows = []
        for k, lab in enumerate(self.labels):
            r = [lab, int(self.cycles[k]), *(self.commanded[k] * 1e3), *(self.barycentre[k] * 1e3), self.ap[k] * 1e3,
                 *(self.ap_xyz[k] * 1e3), self.l_mean[k] * 1e3, self.s_l[k] * 1e3, self.rp[k] * 1e3]
            if self.ap_abc is not None:
                r += [*np.degrees(self.ap_abc[k]), *np.degrees(self.rp_abc[k])]
            rows.append([float(v) if isinstance(v, (np.floating, float)) else v for v in r])
        return header, rows

    def write_csv(self, path) -> Path:
        header, rows = self.table_rows()
        return write_table(path, header, rows, comment=f"ISO 9283:1998 pose accuracy and repeatability from {self.source}")

    def figure(self):
        """Bar chart of AP and RP per pose [mm]."""
        import plotly.graph_objects as go

        labels = list(self.labels)
        fig = go.Figure()
        fig.add_trace(go.Bar(x=labels, y=self.ap * 1e3, name="pose accuracy AP", marker_color="#4c72b0"))
        fig.add_trace(go.Bar(x=labels, y=self.rp * 1e3, name="pose repeatability RP", marker_color="#dd8452"))
        fig.update_layout(title=f"ISO 9283 pose characteristics ({self.source})", barmode="group",
                          yaxis_title="mm", xaxis_title="pose", height=420)
        return fig


def _wrap(angle):
    return (np.asarray(angle) + np.pi) % (2 * np.pi) - np.pi


def pose_characteristics(meas: Measurements) -> PoseCharacteristics:
    """ISO 9283:1998 AP and RP (clauses 7.2.1 and 7.2.2) for every pose of ``meas``."""
    labels = meas.pose_labels()
    P = len(labels)
    cycles = np.zeros(P, int)
    cmd = np.zeros((P, 3))
    bary = np.zeros((P, 3))
    lmean = np.zeros(P)
    sl = np.zeros(P)
    has_ori = meas.measured_orientation is not None
    ap_abc = np.zeros((P, 3)) if has_ori else None
    rp_abc = np.zeros((P, 3)) if has_ori else None
    for k, lab in enumerate(labels):
        idx = np.flatnonzero(meas.labels == lab)
        n = len(idx)
        if n < 2:
            raise TableError(f"{meas.source} line {meas.lines[idx[0]]}, column 'pose': pose {lab!r} has one "
                             "measurement; repeatability needs at least 2")
        cycles[k] = n
        cmd[k] = meas.commanded[idx[0]]
        pts = meas.measured[idx]
        bary[k] = pts.mean(axis=0)
        lj = np.linalg.norm(pts - bary[k], axis=1)
        lmean[k] = lj.mean()
        sl[k] = math.sqrt(np.sum((lj - lmean[k]) ** 2) / (n - 1))
        if has_ori:
            # angles near +/-180 deg: average the differences to the first visit, then unwrap
            a = meas.measured_orientation[idx]
            rel = _wrap(a - a[0])
            abar = a[0] + rel.mean(axis=0)
            ap_abc[k] = _wrap(abar - meas.commanded_orientation[idx[0]])
            dev = rel - rel.mean(axis=0)
            rp_abc[k] = 3.0 * np.sqrt(np.sum(dev**2, axis=0) / (n - 1))
    ap_xyz = bary - cmd
    return PoseCharacteristics(labels=tuple(labels), cycles=cycles, commanded=cmd, barycentre=bary,
                               ap=np.linalg.norm(ap_xyz, axis=1), ap_xyz=ap_xyz, l_mean=lmean, s_l=sl,
                               rp=lmean + 3.0 * sl, ap_abc=ap_abc, rp_abc=rp_abc, source=meas.source)


def write_measurements(meas: Measurements, path, *, comment: str | None = None) -> Path:
    """Write measurements in the CSV form :func:`read_measurements` reads (mm, deg), atomically."""
    header = ["pose", "cycle", "x_cmd [mm]", "y_cmd [mm]", "z_cmd [mm]", "x_meas [mm]", "y_meas [mm]", "z_meas [mm]"]
    if meas.measured_orientation is not None:
        header += [f"{a}_{s} [deg]" for s in ("cmd", "meas") for a in _ANGLES]
    if meas.counts is not None:
        header += [f"counts_{i + 1}" for i in range(meas.counts.shape[1])]
    rows = []
    for k in range(len(meas)):
        cyc = meas.cycles[k]
        r = [meas.labels[k], int(cyc) if np.isfinite(cyc) else "", *np.round(meas.commanded[k] * 1e3, 6),
             *np.round(meas.measured[k] * 1e3, 4)]
        if meas.measured_orientation is not None:
            r += [*np.round(np.degrees(meas.commanded_orientation[k]), 6),
                  *np.round(np.degrees(meas.measured_orientation[k]), 5)]
        if meas.counts is not None:
            r += [int(v) for v in meas.counts[k]]
        rows.append([float(v) if isinstance(v, np.floating) else v for v in r])
    return write_table(path, header, rows, comment=comment)
