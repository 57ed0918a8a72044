"""Dashboard latency: from a layout-slider change to updated figure data, 40 x 40 x 20 grid.

For each demo point rig (3-cable and 4-cable) the task box is set so that the workspace grid
is exactly 40 x 40 x 20 = 32,000 positions, and a dashboard with the layout editor and the
workspace map is built.  The footprint-width slider is then stepped back and forth
(``editor.width.value = ...``, exactly what the browser's slider sends), and per step:

* **compute** : the map's computation (cablekit.workspace.compute_workspace over the grid and
  its reshaping for plotting), as recorded by the panel;
* **figure update** : writing the result into the FigureWidget traces (one ``batch_update``)
  *including* encoding the messages the kernel sends to the page (JSON + binary buffers,
  captured by a recording comm);
* **validation and the rest** : the whole slider change minus the two (the edited design is
  validated like a loaded file, and the editor shows it).

Baselines in the same run: compute against scipy's per-pose linear program (HiGHS) on a
sample of the same grid, scaled to the grid (the reference method of cablekit.statics); the
figure update of the project's ``PlotFigure`` against a plain ``go.FigureWidget`` with the same
traces.  Targets: compute under 50 ms, figure update under 200 ms (medians, 2 cores).

Run:  .venv/bin/python benchmarks/bench_latency.py          (about a minute)
      .venv/bin/python benchmarks/bench_latency.py --quick  (fewer steps)
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
SHAPE = (40, 40, 20)
STEP = 0.05  # [m] grid step
TARGET_COMPUTE = 0.050  # [s]
TARGET_FIGURE = 0.200  # [s]


class Recorder:
    """Counts what the kernel would send: JSON text and binary buffers of every message."""

    def __init__(self):
        self.messages = 0
        self.json_bytes = 0
        self.buffer_bytes = 0


def install_recording_comm(recorder: Recorder) -> None:
    """Make every widget created from now on JSON-encode its messages like the kernel does."""
    import comm
    from comm.base_comm import BaseComm

    class RecordingComm(BaseComm):
        def publish_msg(self, msg_type, data=None, metadata=None, buffers=None, **keys):
            text = json.dumps({"msg_type": msg_type, "data": data, "metadata": metadata or {}}, default=str)
            recorder.messages += 1
            recorder.json_bytes += len(text)
            recorder.buffer_bytes += sum(len(memoryview(b).cast("B")) for b in (buffers or []))

    comm.create_comm = lambda *a, **k: RecordingComm(*a, **k)


def grid_design(path):
    """The demo with its task box moved so that a 50 mm grid is exactly 40 x 40 x 20."""
    from cablekit.design import load_design, revalidate

    d = load_design(path)
    a = d.exits
    centre = 0.5 * (a[:, :2].min(axis=0) + a[:, :2].max(axis=0))
    size = (np.array(SHAPE) - 1) * STEP
    z_top = a[:, 2].max() - 0.45 if d.m > 3 else a[:, 2].max() - 1.15
    lo = np.array([centre[0] - size[0] / 2, centre[1] - size[1] / 2, z_top - size[2]])
    task = replace(d.task, box_lower=tuple(lo), box_upper=tuple(lo + size), step=STEP, points=())
    return revalidate(replace(d, task=task))


def lp_baseline(design, n: int) -> float:
    """Seconds per pose of the per-pose HiGHS LP on the first ``n`` grid poses."""
    from cablekit.kinematics import structure_matrix
    from cablekit.region import task_poses
    from cablekit.statics import external_wrench, solve_lp, tension_limits

    q = task_poses(design, step=STEP).poses[:: max(1, int(np.prod(SHAPE)) // n)][:n]
    W, w, lim = structure_matrix(design, q), external_wrench(design, q), tension_limits(design)
    t0 = time.perf_counter()
    solve_lp(W, w, lim.t_min, lim.t_max)
    return (time.perf_counter() - t0) / len(q)


def plain_figure_update(panel, recorder: Recorder) -> float:
    """The same slice update written into a plain go.FigureWidget (no PlotFigure additions)."""
    import plotly.graph_objects as go

    data = panel.result
    fig = go.FigureWidget(panel.slice_fig)
    x, y, z = data.axes
    k = panel.slice_z.value
    t0 = time.perf_counter()
    with fig.batch_update():
        fig.data[0].update(x=x, y=y, z=data.margin[:, :, k].T)
        fig.data[1].update(x=x, y=y, z=np.where(np.isfinite(data.margin[:, :, k].T), data.margin[:, :, k].T, -1e9))
        fig.layout.title.text = "plain " + str(time.perf_counter())
    return time.perf_counter() - t0


def bench(name, path, steps, recorder):
    from cablekit.widgets import Dashboard

    design = grid_design(path)
    dash = Dashboard(design, panels=["workspace"], folder=ROOT / "artifacts")
    ws = dash.panels["workspace"]
    assert ws.result is not None, ws.status.value
    assert ws.result.margin.shape == SHAPE, ws.result.margin.shape
    editor = dash.editor
    w0 = editor.width.value
    rows = {"compute": [], "figure": [], "total": [], "bytes": [], "cloud": []}
    for i in range(steps):
        before = (recorder.json_bytes + recorder.buffer_bytes)
        t0 = time.perf_counter()
        editor.width.value = w0 + (0.05 if i % 2 == 0 else 0.0)  # the slider moves one step and back
        total = time.perf_counter() - t0
        rows["compute"].append(ws.timings["compute"])
        rows["figure"].append(ws.timings["draw"])
        rows["total"].append(total)
        rows["bytes"].append(recorder.json_bytes + recorder.buffer_bytes - before)
    ws.view.value = "3d"  # the 3-D cloud of the feasible positions (up to 32,000 markers)
    for i in range(max(3, steps // 3)):
        editor.width.value = w0 + (0.05 if i % 2 == 0 else 0.0)
        rows["cloud"].append(ws.timings["draw"])
    ws.view.value = "slice"
    plain = [plain_figure_update(ws, recorder) for _ in range(steps)]
    lp_per_pose = lp_baseline(dash.design, 200)
    feasible = float(ws.result.feasible.mean()) * 100
    med = {k: float(np.median(v)) for k, v in rows.items()}
    return {"name": name, "m": design.m, "poses": int(np.prod(SHAPE)), "feasible": feasible, **med,
            "plain": float(np.median(plain)), "lp_grid": lp_per_pose * np.prod(SHAPE),
            "method": ws.result.result.method}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="fewer slider steps (a smoke run)")
    ap.add_argument("-o", "--output", default=str(ROOT / "benchmarks" / "results_latency.txt"))
    args = ap.parse_args(argv)
    os.environ.setdefault("CABLEKIT_CACHE_DIR", str(ROOT / "artifacts" / "codegen-cache"))
    recorder = Recorder()
    install_recording_comm(recorder)
    steps = 6 if args.quick else 20
    rigs = [("3-cable suspended (greenhouse)", ROOT / "examples" / "greenhouse_tray_3cable.toml"),
            ("4-cable suspended (camera)", ROOT / "examples" / "workshop_camera_4cable.toml")]
    results = [bench(name, path, steps, recorder) for name, path in rigs]
    load = " ".join(f"{v:.1f}" for v in os.getloadavg())
    import numpy
    import plotly

    lines = ["cablekit dashboard latency benchmark (benchmarks/bench_latency.py)",
             f"date {time.strftime('%Y-%m-%d %H:%M')}, python {platform.python_version()}, numpy {numpy.__version__}, "
             f"plotly {plotly.__version__}, cores {os.cpu_count()}, load average {load}",
             f"slider change -> updated figure data; grid {SHAPE[0]} x {SHAPE[1]} x {SHAPE[2]} = {np.prod(SHAPE):,} "
             f"positions; medians of {steps} slider steps",
             "",
             f"{'rig':<32}{'compute':>10}{'figure':>10}{'valid.+rest':>12}{'total':>9}{'sent/step':>11}"
             f"{'3-D cloud':>11}{'plain FW':>10}{'LP, grid':>10}{'vs LP':>9}",
             f"{'':<32}{'[ms]':>10}{'[ms]':>10}{'[ms]':>12}{'[ms]':>9}{'[kB]':>11}{'[ms]':>11}{'[ms]':>10}{'[s]':>10}"]
    ok = True
    for r in results:
        rest = r["total"] - r["compute"] - r["figure"]
        lines.append(f"{r['name']:<32}{r['compute'] * 1e3:10.1f}{r['figure'] * 1e3:10.1f}{rest * 1e3:12.1f}"
                     f"{r['total'] * 1e3:9.1f}{r['bytes'] / 1e3:11.1f}{r['cloud'] * 1e3:11.1f}{r['plain'] * 1e3:10.1f}"
                     f"{r['lp_grid']:10.1f}{r['lp_grid'] / r['compute']:8,.0f}x")
        ok &= r["compute"] < TARGET_COMPUTE and r["figure"] < TARGET_FIGURE
    lines.append("")
    for r in results:
        lines.append(f"{r['name']}: {r['feasible']:.1f} % of the grid feasible; tensions: {r['method']}")
    lines += [
        "",
        "compute: cablekit.workspace.compute_workspace on the grid + reshaping for the map (the panel's own timing);",
        "figure: the slice map's batch_update incl. JSON/buffer encoding of the messages to the page;",
        "valid.+rest: validating the edited design and updating the editor; 3-D cloud: the figure update when the",
        "3-D view of up to 32,000 feasible positions is shown; plain FW: the same slice update on a plain",
        "go.FigureWidget (PlotFigure keeps its synced state current on top of it); LP, grid: scipy HiGHS per pose,",
        "measured on 200 grid poses and scaled to the grid (the reference path); vs LP: ratio to compute.",
        f"targets: compute < {TARGET_COMPUTE * 1e3:.0f} ms, figure update < {TARGET_FIGURE * 1e3:.0f} ms: "
        + ("met" if ok else "NOT met"),
        "The page then redraws: plotly.js in the browser (not measured here; the browser test checks that it does).",
    ]
    text = "\n".join(lines) + "\n"
    print(text)
    Path(args.output).write_text(text, encoding="utf-8")
    print(f"written to {args.output}", file=sys.stderr)
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
