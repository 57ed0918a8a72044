"""Sweep throughput: variants per second in this process, on 1 Dask worker, on every local core,
and on a 2-worker Dask cluster started here as separate processes (real ``dask.distributed``:
``dask scheduler`` and ``dask worker`` on 127.0.0.1, reached through its address like
``cablekit sweep --scheduler ADDRESS``).

The sweep is the bundled 1,000-variant grid over the 4-cable workshop camera rig
(examples/sweeps/workshop_camera_sweep.toml), or its first ``--variants N`` variants.  Each run
writes to its own fresh folder.  Reported per run: start-up (cluster start and a warm-up variant
on every worker: imports, numba compilation), the sweep's wall time and variants per second, the
speed-up against the 1-worker cluster in the same run, and whether its table is identical to the
in-process (serial) table.

Run:  .venv/bin/python benchmarks/bench_sweep.py                 (several minutes on 2 cores)
      .venv/bin/python benchmarks/bench_sweep.py --variants 100  (a quick look)
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SWEEP = ROOT / "examples" / "sweeps" / "workshop_camera_sweep.toml"


def _subset(spec, n: int):
    """At most ``n`` variants of the grid: the last parameters lose values first."""
    params = list(spec.parameters)
    for k in range(len(params) - 1, -1, -1):
        rest = 1
        for p in params[:k] + params[k + 1:]:
            rest *= len(p.values)
        keep = max(1, min(len(params[k].values), n // rest))
        params[k] = dataclasses.replace(params[k], values=params[k].values[:keep])
        if rest * keep <= n:
            break
    return dataclasses.replace(spec, parameters=tuple(params))


def _warm(spec_doc, options):
    """One evaluation on a worker: imports and numba compilation out of the timed part."""
    from cablekit.sweep import evaluate_document

    return evaluate_document(spec_doc, options)["valid"]


def _timed(label, spec, *, client=None, serial=False, startup=0.0):
    from cablekit.sweep import run_sweep

    folder = tempfile.mkdtemp(prefix="cablekit-bench-sweep-")
    t0 = time.perf_counter()
    res = run_sweep(spec, folder, serial=serial, client=client)
    wall = time.perf_counter() - t0
    assert res.evaluated == spec.size and res.reused == 0
    return {"label": label, "startup": startup, "wall": wall, "rate": spec.size / wall, "table": res.table}


def _external_cluster(tmp: Path, workers: int):
    """``dask scheduler`` and ``dask worker`` processes on 127.0.0.1; returns (address, processes)."""
    dask = Path(sys.executable).with_name("dask")
    sched_file = tmp / "scheduler.json"
    procs = [subprocess.Popen([str(dask), "scheduler", "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                               "--scheduler-file", str(sched_file)], stdout=subprocess.DEVNULL,
                              stderr=subprocess.DEVNULL)]
    deadline = time.monotonic() + 60
    while not sched_file.exists() and time.monotonic() < deadline:
        time.sleep(0.1)
    time.sleep(0.2)
    address = json.loads(sched_file.read_text())["address"]
    procs.append(subprocess.Popen([str(dask), "worker", "--scheduler-file", str(sched_file), "--host", "127.0.0.1",
                                   "--nworkers", str(workers), "--nthreads", "1", "--no-dashboard"],
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL))
    return address, procs


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--variants", type=int, default=1000)
    ap.add_argument("--out", default=str(ROOT / "benchmarks" / "results_sweep.txt"))
    args = ap.parse_args()

    import logging

    from distributed import Client, LocalCluster

    logging.getLogger("distributed").setLevel(logging.ERROR)  # no shutdown chatter in the report

    from cablekit.sweep import grid_variants, load_sweep, variant_document

    spec = _subset(load_sweep(SWEEP), args.variants)
    first = variant_document(spec, grid_variants(spec)[0].values)
    cores = os.cpu_count() or 1
    runs = []

    t0 = time.perf_counter()
    _warm(first, spec.options)
    runs.append(_timed("this process (serial, no Dask)", spec, serial=True, startup=time.perf_counter() - t0))
    for label, n in (("local cluster, 1 worker", 1), (f"local cluster, every core ({cores} workers)", cores)):
        t0 = time.perf_counter()
        with LocalCluster(n_workers=n, threads_per_worker=1, processes=True, host="127.0.0.1",
                          dashboard_address=None) as cluster, Client(cluster) as client:
            client.run(_warm, first, dict(spec.options))
            runs.append(_timed(label, spec, client=client, startup=time.perf_counter() - t0))
    with tempfile.TemporaryDirectory() as tmp:
        t0 = time.perf_counter()
        address, procs = _external_cluster(Path(tmp), 2)
        try:
            with Client(address, timeout="60s") as client:
                client.wait_for_workers(2, timeout=120)
                client.run(_warm, first, dict(spec.options))
                runs.append(_timed(f"2-worker cluster started here ({address})", spec, client=client,
                                   startup=time.perf_counter() - t0))
        finally:
            for p in procs:
                p.terminate()
            for p in procs:
                try:
                    p.wait(timeout=30)
                except subprocess.TimeoutExpired:
                    p.kill()

    base = next(r for r in runs if r["label"] == "local cluster, 1 worker")
    ref = runs[0]["table"]
    lines = [f"# cablekit sweep benchmark, {time.strftime('%Y-%m-%d')}, {platform.python_version()}, "
             f"{cores} cores, {platform.machine()}",
             f"# sweep: {SWEEP.relative_to(ROOT)}, {spec.size} variants (4-cable workshop camera rig)",
             f"# evaluation options: {spec.options_text()}",
             f"# load average at the end (1, 5, 15 min): {', '.join(f'{x:.1f}' for x in os.getloadavg())}",
             f"# {'run':<58} {'start-up [s]':>12} {'sweep [s]':>10} {'variants/s':>11} {'vs 1 worker':>12} "
             f"{'identical table':>16}"]
    for r in runs:
        same = r["table"].equals(ref)
        lines.append(f"  {r['label']:<58} {r['startup']:12.1f} {r['wall']:10.1f} {r['rate']:11.2f} "
                     f"{r['rate'] / base['rate']:11.2f}x {str(same):>16}")
    text = "\n".join(lines) + "\n"
    print(text, end="")
    Path(args.out).write_text(text)
    return 0 if all(r["table"].equals(ref) for r in runs) else 1


if __name__ == "__main__":
    sys.exit(main())
