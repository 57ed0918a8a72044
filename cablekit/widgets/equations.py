"""The equations behind the numbers, rendered from the engine's own LaTeX.

:func:`cablekit.equations.collect_equations` asks :func:`cablekit.symbolic.latex_equations` for the cable
kinematics of the design's platform kind, and every other installed module that offers a
``latex_equations`` function (workspace, drive, accuracy, arm, ...) for its own; the
:class:`EquationsView` widget renders them with MathJax (``ipywidgets.HTMLMath``) and follows
the shared design (a rigid design shows the rigid-platform equations).
"""

from __future__ import annotations

import html

import ipywidgets as W

from ..equations import EQUATION_MODULES, collect_equations

from .state import DesignState
from .style import MUTED

__all__ = ["EQUATION_MODULES", "collect_equations", "EquationsView"]

class EquationsView(W.VBox):
    """Rendered equations of the modules named in ``modules`` for the shared design."""

    def __init__(self, state: DesignState, *, modules=EQUATION_MODULES, **kwargs):
        self.state = state
        self.modules = tuple(modules)
        self.math = W.HTMLMath()
        self.math.add_class("ck-equations")
        self.groups: list = []
        super().__init__(children=[self.math], **kwargs)
        state.observe(lambda change: self._render(), "design")
        self._render()

    def _render(self) -> None:
        kind = self.state.design.platform.kind
        self.groups = collect_equations(self.state.design, self.modules)
        parts = [f"<div style='color:{MUTED};font-size:12px'>Equations as the library derives and uses them "
                 f"({html.escape(kind)} platform). Symbols: a exit point, b attachment in the platform frame, "
                 "p platform position, R its orientation, t cable tensions, W structure matrix.</div>"]
        for title, eqs in self.groups:
            parts.append(f"<h4 style='margin:8px 0 2px 0'>{html.escape(title)}</h4>")
            for name, latex in eqs:
                parts.append(f"<div style='margin:2px 0'><span style='color:{MUTED}'>{html.escape(name)}:</span> "
                             f"$${html.escape(latex, quote=False)}$$</div>")
        text = "\n".join(parts)
        if text != self.math.value:
            self.math.value = text
