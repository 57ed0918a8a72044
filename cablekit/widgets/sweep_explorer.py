"""Sweep explorer: the Pareto front and parallel coordinates of a sweep; a clicked design goes
to the layout editor.

The panel reads a results folder written by ``cablekit sweep`` (or runs a small sweep file here,
in this process, when its folder holds no results yet), plots two metrics against each other
with the Pareto front highlighted and every parameter and objective in parallel coordinates.
Clicking a point selects that variant and lists its parameters and figures; **Load into the
editor** builds its design (the same edit of the base design the sweep made, validated again)
and proposes it to the shared :class:`~cablekit.widgets.state.DesignState`, so the layout editor
and every panel show it.  Nothing numeric lives here: :mod:`cablekit.sweep` does the work.
"""

from __future__ import annotations

import hashlib
import html
import tempfile
from pathlib import Path

import ipywidgets as W

from .figure import PlotFigure, show_figure
from .state import DesignState
from .style import MUTED, message_html, summary_block, table_html

__all__ = ["SweepExplorer", "demo_sweep", "default_results_folder", "sweep_dashboard"]


def demo_sweep() -> Path:
    """The bundled NSGA-II demo sweep over the workshop camera rig (examples/sweeps/)."""
    return Path(__file__).resolve().parents[2] / "examples" / "sweeps" / "workshop_camera_pareto.toml"


def default_results_folder(sweep) -> Path:
    """A results folder for ``sweep`` outside the project (the temporary folder), one per sweep
    hash (sweep file and base design), so that reopening the dashboard reuses what was computed
    and an edited sweep starts afresh."""
    from ..sweep import SweepError, load_sweep

    try:
        key = load_sweep(sweep).hash[:16]
    except SweepError:  # reported when the sweep is run
        key = hashlib.sha256(str(Path(sweep).resolve()).encode()).hexdigest()[:16]
    return Path(tempfile.gettempdir()) / "cablekit-sweeps" / f"{Path(sweep).stem}-{key}"


class SweepExplorer(W.VBox):
    """Pareto front, parallel coordinates and the selected variant of a sweep.

    state : the shared design state (a selected design is proposed to it).
    results : a results folder; sweep : a sweep file (run here, serially, when ``run`` is true
    and the folder holds no results).
    """

    title = "sweep"

    def __init__(self, state: DesignState, *, results=None, sweep=None, run: bool = False, **kwargs):
        from ..sweep import METRICS

        self.state = state
        self.table = self.meta = None
        self.selected: int | None = None
        # shown, not typed: a served page must not name files anywhere on the server (set them in
        # the notebook or through `cablekit serve --design SWEEP.toml`)
        self.sweep_file = W.Text(value=str(sweep or ""), description="sweep file", disabled=True,
                                 layout=W.Layout(width="520px"))
        self.folder = W.Text(value=str(results or (default_results_folder(sweep) if sweep else "")),
                             description="results folder", disabled=True, layout=W.Layout(width="520px"))
        self.run_button = W.Button(description="Run the sweep here", tooltip="serially, in this kernel; use "
                                   "'cablekit sweep' (Dask) for large sweeps")
        self.load_button = W.Button(description="Load results")
        metrics = list(METRICS)
        self.x = W.Dropdown(options=metrics, description="x", layout=W.Layout(width="260px"))
        self.y = W.Dropdown(options=metrics, description="y", layout=W.Layout(width="260px"))
        self.front = PlotFigure()
        self.front.update_layout(height=380)
        self.parallel = PlotFigure()
        self.parallel.update_layout(height=360)
        self.summary = W.HTML()
        self.detail = W.HTML()
        self.to_editor = W.Button(description="Load into the editor", disabled=True, button_style="primary")
        self.message = W.HTML()
        self.run_button.on_click(lambda _: self.run())
        self.load_button.on_click(lambda _: self.load())
        self.to_editor.on_click(lambda _: self.send_to_editor())
        self.x.observe(lambda _: self.redraw(), "value")
        self.y.observe(lambda _: self.redraw(), "value")
        super().__init__(children=[W.HBox([self.sweep_file, self.run_button]), W.HBox([self.folder, self.load_button]),
                                   self.summary, W.HBox([self.x, self.y]), self.front, self.parallel,
                                   W.HBox([self.to_editor]), self.detail, self.message], **kwargs)
        self.add_class("ck-sweep")
        if self.folder.value and (Path(self.folder.value) / "results.parquet").exists():
            self.load()
        elif run and self.sweep_file.value:
            self.run()

    # -- actions ---------------------------------------------------------------------------
    def _say(self, text: str, level: str = "info") -> None:
        self.message.value = message_html(text, level=level)

    def run(self) -> bool:
        """Run the sweep file into the results folder (serially, here) and show it."""
        from ..sweep import SweepError, load_sweep, run_sweep

        path, folder = self.sweep_file.value.strip(), self.folder.value.strip()
        if not path:
            self._say("give a sweep file to run", "error")
            return False
        folder = folder or str(default_results_folder(path))
        self.folder.value = folder
        try:
            spec = load_sweep(path)
            self._say(f"running {spec.method} sweep {Path(path).name} ...")
            run_sweep(spec, folder, serial=True, sweep_text=Path(path).read_text(encoding="utf-8"))
        except (SweepError, OSError) as exc:
            self._say(str(exc), "error")
            return False
        return self.load()

    def load(self) -> bool:
        """Read the results folder and draw it."""
        from ..sweep import SweepError, load_results

        try:
            self.table, self.meta = load_results(self.folder.value.strip())
        except SweepError as exc:
            self._say(str(exc), "error")
            return False
        objs = list(self.meta["objectives"])
        self.x.value = objs[0]
        self.y.value = objs[1] if len(objs) > 1 else (next(iter(self.meta["constraints"]), objs[0]))
        t = self.table
        self.summary.value = summary_block([
            f"sweep {self.meta['sweep_file']} ({self.meta['method']}): {len(t)} variants, {int(t['valid'].sum())} "
            f"valid, {int(t['meets_constraints'].sum())} meet every constraint, {int(t['pareto'].sum())} on the "
            f"Pareto front", f"options: {self.meta['options_text']}", self.meta["caution"]])
        self.redraw()
        self._say(f"loaded {self.folder.value}; click a point to select a variant", "ok")
        return True

    def redraw(self) -> None:
        from ..sweep import parallel_figure, pareto_figure

        if self.table is None:
            return
        show_figure(self.front, pareto_figure(self.table, self.meta, x=self.x.value, y=self.y.value))
        for trace in self.front.data:
            trace.on_click(self._clicked)
        show_figure(self.parallel, parallel_figure(self.table, self.meta))

    def _clicked(self, trace, points, selector=None) -> None:
        if points.point_inds:
            self.select(int(trace.customdata[points.point_inds[0]]))

    def select(self, variant: int) -> bool:
        """Select a variant: list its parameters and figures, enable loading it."""
        from ..sweep import METRICS, metric_display

        rows = self.table[self.table["variant"] == variant] if self.table is not None else []
        if len(rows) == 0:
            self._say(f"no variant {variant} in the results", "error")
            return False
        r = rows.iloc[0]
        self.selected = int(variant)
        params = [(c[6:], f"{r[c]:.6g} {self.meta['parameters'][c[6:]]['unit']}".strip()
                   if isinstance(r[c], float) else str(r[c])) for c in self.table.columns if c.startswith("param:")]
        figures = [(m, metric_display(m, float(r[m]))) for m in METRICS]
        state = ("on the Pareto front" if r["pareto"] else "meets every constraint" if r["meets_constraints"]
                 else "valid, misses a constraint" if r["valid"] else "invalid")
        self.detail.value = (f"<div style='color:{MUTED}'>variant {self.selected}: {html.escape(state)}"
                             + (f" ({html.escape(r['reason'])})" if not r["valid"] else "") + "</div>"
                             + table_html(["parameter", "value"], params) + table_html(["figure", "value"], figures))
        self.to_editor.disabled = not bool(r["valid"])
        return True

    def send_to_editor(self) -> bool:
        """Build the selected variant's design and propose it to the shared state."""
        from ..design import DesignError
        from ..sweep import SweepError, build_variant, row_values, spec_of_results

        if self.selected is None:
            self._say("select a variant first (click a point)", "error")
            return False
        try:
            spec = spec_of_results(self.folder.value.strip())
            row = self.table[self.table["variant"] == self.selected].iloc[0]
            design = build_variant(spec, row_values(spec, row))
        except (SweepError, DesignError) as exc:
            self._say(str(exc), "error")
            return False
        ok = self.state.propose(design, what=f"sweep variant {self.selected}")
        self._say(f"variant {self.selected} loaded into the editor" if ok else self.state.status,
                  "ok" if ok else "error")
        return ok


def sweep_dashboard(sweep=None, *, results=None, run: bool = True, panels=("sweep", "rig", "workspace", "drive"),
                    folder=None):
    """A dashboard on the sweep's base design with the sweep explorer first (default: the
    bundled demo sweep, run here on first open)."""
    from ..sweep import load_sweep
    from .dashboard import Dashboard

    sweep = Path(sweep) if sweep else demo_sweep()
    spec = load_sweep(sweep)
    return Dashboard(spec.design_path, panels=panels, folder=folder,
                     panel_options={"sweep": {"sweep": sweep, "results": results, "run": run}})
