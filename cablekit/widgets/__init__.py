"""Reusable notebook widgets sharing one observable design state.

Every widget takes a :class:`DesignState`; editing the design in one (the layout editor, a
loaded file) updates all of them.  See :class:`Dashboard` for a ready-made arrangement.
"""

from .dashboard import PANELS, Dashboard, choose_design, demo_designs, make_panel
from .equations import EquationsView, collect_equations
from .files import SaveLoadPanel
from .layout import LayoutEditor
from .rig import RigView
from .state import Debouncer, DesignState
from .workspace_map import WorkspaceMap

__all__ = ["DesignState", "Debouncer", "Dashboard", "choose_design", "demo_designs", "make_panel", "PANELS",
           "LayoutEditor", "RigView", "WorkspaceMap", "EquationsView", "collect_equations", "SaveLoadPanel"]
