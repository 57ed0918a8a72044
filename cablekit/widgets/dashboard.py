"""A ready-made dashboard: the layout editor beside a stack of result panels.

Notebooks stay a few lines long::

    from cablekit.widgets import Dashboard, choose_design
    path, note = choose_design(DESIGN, query=os.environ.get("QUERY_STRING", ""))
    Dashboard(path, panels=["rig", "workspace"], note=note)

:func:`choose_design` picks the design a served notebook opens: an explicit file (``cablekit
serve --design``), else a bundled demo named in the page address (``?design=NAME``), else the
default demo.  Only bundled demo names are accepted from an address, never a path.
"""

from __future__ import annotations

import html
from pathlib import Path
from urllib.parse import parse_qs

import ipywidgets as W

from ..design import Design
from .base import ProblemsBanner
from .layout import LayoutEditor
from .state import DesignState
from .style import CAUTION, INK, MUTED

__all__ = ["PANELS", "DEFAULT_DEMO", "demo_designs", "choose_design", "make_panel", "Dashboard"]

DEFAULT_DEMO = "greenhouse_tray_3cable"


def _panel_factories():
    from .arm_view import ArmReachView
    from .drivetrain import DrivetrainPanel
    from .equations import EquationsView
    from .error_map import ErrorMap
    from .files import SaveLoadPanel
    from .review_panel import ReviewPanel
    from .rig import RigView
    from .sweep_explorer import SweepExplorer
    from .workspace_map import WorkspaceMap

    return {
        "rig": ("Rig in 3-D", RigView),
        "workspace": ("Workspace and tensions", WorkspaceMap),
        "drive": ("Drivetrain, per winch", DrivetrainPanel),
        "errors": ("Error-propagation map", ErrorMap),
        "arm": ("Arm reach", ArmReachView),
        "review": ("Checks and review sheet", ReviewPanel),
        "equations": ("Equations", EquationsView),
        "files": ("Design file", SaveLoadPanel),
        "sweep": ("Sweep: Pareto front and parallel coordinates", SweepExplorer),
    }


PANELS = ("rig", "workspace", "drive", "errors", "arm", "review", "equations", "files", "sweep")


def demo_designs(extra_folders=()) -> dict[str, Path]:
    """Bundled demo designs by name (file stem), from ``examples/`` beside the package."""
    folders = [*map(Path, extra_folders), Path(__file__).resolve().parents[2] / "examples", Path.cwd() / "examples",
               Path.cwd().parent / "examples"]
    found: dict[str, Path] = {}
    for folder in folders:
        if folder.is_dir():
            for p in sorted(folder.glob("*.toml")):
                found.setdefault(p.stem, p.resolve())
    return found


def choose_design(design=None, *, query: str = "") -> tuple[Path, str]:
    """The design file a dashboard opens and a note for the user ('' when nothing to say).

    design : an explicit file (the notebook's ``DESIGN`` parameter); wins when given.
    query : the page's query string (Voila passes it to the kernel as ``QUERY_STRING``);
        ``design=NAME`` picks the bundled demo ``NAME``.
    """
    if design:
        return Path(design), ""
    demos = demo_designs()
    if not demos:
        raise FileNotFoundError("no demo designs found (examples/ folder); pass a design file")
    default = demos.get(DEFAULT_DEMO) or next(iter(demos.values()))
    wanted = parse_qs(query or "").get("design", [""])[0].strip()
    if not wanted:
        return default, ""
    name = wanted[:-5] if wanted.endswith(".toml") else wanted
    if name in demos:
        return demos[name], ""
    return default, (f"design {wanted!r} in the address is not a bundled demo; showing {default.stem}. "
                     f"Demos: {', '.join(sorted(demos))}")


def make_panel(name: str, state: DesignState, **kwargs) -> W.Widget:
    """One of :data:`PANELS` bound to ``state``."""
    factories = _panel_factories()
    if name not in factories:
        raise ValueError(f"unknown panel {name!r}; choose from {', '.join(PANELS)}")
    return factories[name][1](state, **kwargs)


class Dashboard(W.VBox):
    """Header, validation banner, the layout editor (left) and result panels (right).

    design : a :class:`Design`, a design file path or a :class:`DesignState` to share.
    panels : names from :data:`PANELS`, shown top to bottom.
    editor : show the layout editor.
    folder : where the design-file panel saves and loads (default: the design's folder).
    note : a message shown under the header (e.g. from :func:`choose_design`).
    """

    def __init__(self, design, *, panels=("rig", "workspace", "files"), editor: bool = True, folder=None,
                 note: str = "", panel_options: dict | None = None, **kwargs):
        self.state = design if isinstance(design, DesignState) else DesignState(design)
        if folder is None:
            folder = Path(self.state.path).parent if self.state.path else Path.cwd()
        options = {"files": {"folder": folder}, "review": {"folder": folder}}
        for k, v in (panel_options or {}).items():
            options.setdefault(k, {}).update(v)
        self.panels = {name: make_panel(name, self.state, **options.get(name, {})) for name in panels}
        self.header = W.HTML()
        self.header.add_class("ck-header")
        self.state.observe(self._head, "design")
        self._note = note
        self._head()
        self.editor = LayoutEditor(self.state) if editor else None
        titles = dict((k, v[0]) for k, v in _panel_factories().items())
        column = []
        for name, panel in self.panels.items():
            column += [W.HTML(f"<h3 style='margin:10px 0 4px 0;color:{INK}'>{html.escape(titles[name])}</h3>"), panel]
        right = W.VBox(column, layout=W.Layout(flex="1 1 0%", min_width="0", overflow="hidden"))
        if self.editor is not None:
            self.editor.layout = W.Layout(flex="0 0 460px", margin="0 12px 0 0")
            body = W.HBox([self.editor, right], layout=W.Layout(align_items="flex-start", width="100%"))
            top = [self.header]
        else:
            body = right
            top = [self.header, ProblemsBanner(self.state)]
        super().__init__(children=[*top, body], **kwargs)
        self.add_class("ck-dashboard")

    @property
    def design(self) -> Design:
        return self.state.design

    def _head(self, change=None) -> None:
        d = self.state.design
        note = (f"<div style='color:#c98a12'>{html.escape(self._note)}</div>" if self._note else "")
        self.header.value = (
            f"<div style='color:{INK}'><span style='font-size:18px;font-weight:600'>{html.escape(d.meta.name)}</span>"
            f"<span style='color:{MUTED}'> &middot; {d.m} cables, {html.escape(d.platform.kind)} platform "
            f"({d.dof} DOF), {d.total_mass:.3g} kg moving mass</span></div>"
            f"<div style='color:{MUTED};font-size:12px;max-width:1100px'>{html.escape(d.meta.job or d.meta.scenario)}</div>"
            f"{note}<div style='color:{MUTED};font-size:11px;margin-top:2px'>&#9888; {html.escape(CAUTION)}</div>")
