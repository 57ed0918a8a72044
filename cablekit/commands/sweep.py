"""``cablekit sweep SWEEP.toml -o results/``: evaluate every variant of a sweep file on Dask."""

from __future__ import annotations

import sys
import time
from pathlib import Path

from ..cli import EXIT_OK, InputError

NAME = "sweep"
HELP = "evaluate a family of designs (grid or NSGA-II search) on Dask; resumable, results as Parquet"
DESCRIPTION = ("Reads a sweep file (the base design, the design fields to vary by their path with units, links, "
               "objectives and constraints; see cablekit/sweep.py), evaluates every variant with the library's own "
               "functions on a local Dask cluster (or --scheduler ADDRESS) and writes OUT/results.parquet with the "
               "sweep file's hash. Completed chunks are kept in OUT/parts/: a rerun continues where it stopped. An "
               "invalid variant is recorded with its reason. A sweep explores; review the chosen design in full.")


def add_arguments(p) -> None:
    p.add_argument("sweep", metavar="SWEEP.toml")
    p.add_argument("-o", "--output", metavar="FOLDER", required=True, help="results folder (created if needed)")
    p.add_argument("--scheduler", metavar="ADDRESS", help="an existing Dask scheduler, e.g. tcp://10.0.0.5:8786 "
                                                            "(cablekit must be installed on its workers)")
    p.add_argument("--workers", type=int, metavar="N", help="processes of the local cluster (default: every core)")
    p.add_argument("--serial", action="store_true", help="evaluate in this process, without Dask")
    p.add_argument("--fresh", action="store_true", help="discard earlier results in the folder and start again")
    p.add_argument("--quiet", action="store_true", help="no progress bar")


class Bar:
    """A progress bar on stderr (a line per quarter when not a terminal), with the rate."""

    def __init__(self, label: str, stream=None):
        self.label = label
        self.stream = stream or sys.stderr
        self.t0 = time.monotonic()
        self.last = -1
        self.first = None

    def __call__(self, done: int, total: int) -> None:
        if self.first is None:
            self.first = done  # variants read back from an earlier run
        pct = int(100 * done / max(total, 1))
        tty = getattr(self.stream, "isatty", lambda: False)()
        if not tty and pct // 25 == self.last // 25 and done < total:
            return
        self.last = pct
        dt = time.monotonic() - self.t0
        rate = (done - self.first) / dt if dt > 0 else 0.0
        bar = "#" * (pct // 4) + "." * (25 - pct // 4)
        text = f"{self.label} [{bar}] {pct:3d} % {done:,}/{total:,} variants, {rate:.1f}/s"
        self.stream.write(("\r" + text) if tty else (text + "\n"))
        if tty and done >= total:
            self.stream.write("\n")
        self.stream.flush()


def run(args) -> int:
    from ..sweep import SweepError, load_sweep, run_sweep

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers: at least 1, got {args.workers}")
    if args.scheduler and args.workers:
        raise InputError("--workers sizes the local cluster; an existing cluster (--scheduler) has its own workers")
    if args.serial and (args.scheduler or args.workers):
        raise InputError("--serial runs without Dask: drop --scheduler/--workers")
    out = Path(args.output)
    if out.exists() and not out.is_dir():
        raise InputError(f"-o: {args.output!r} is a file; give a folder")
    try:
        spec = load_sweep(args.sweep)
        text = Path(args.sweep).read_text(encoding="utf-8")
        res = run_sweep(spec, out, scheduler=args.scheduler, workers=args.workers, serial=args.serial,
                        fresh=args.fresh, sweep_text=text, progress=None if args.quiet else Bar("sweep"))
    except SweepError as exc:  # also a scheduler address that is malformed or cannot be reached
        raise InputError(str(exc)) from None
    except OSError as exc:  # the results folder cannot be written
        raise InputError(f"-o {args.output}: {exc.strerror or exc}") from None
    print("\n".join(res.summary()))
    print(f"wrote {out / 'results.parquet'}; choose and write a design with: cablekit best {out} --write best.toml")
    return EXIT_OK
