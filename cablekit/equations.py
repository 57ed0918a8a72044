"""The equations behind the numbers: every module's own LaTeX, gathered in one place.

A module that wants its equations shown (notebooks, the equations widget, the review sheet)
defines ``latex_equations()``, ``latex_equations(kind)`` or ``latex_equations(design)``
returning ``{name: latex}``.  :func:`collect_equations` asks each installed module in
:data:`EQUATION_MODULES`; the widget and the sheet both use it.
"""

from __future__ import annotations

import inspect
from importlib import import_module
from typing import Mapping

__all__ = ["EQUATION_MODULES", "module_equations", "collect_equations"]

# modules that may provide latex_equations(); missing ones are skipped
EQUATION_MODULES = ("symbolic", "tension", "workspace", "cables", "stiffness", "drive", "accuracy", "arm",
                    "tooltip", "task", "suspended")


def module_equations(mod, design) -> tuple[tuple[str, str], ...]:
    """The module's own ``(name, latex)`` pairs for ``design``; empty when it has none."""
    fn = getattr(mod, "latex_equations", None)
    if fn is None:
        return ()
    params = list(inspect.signature(fn).parameters)
    if not params:
        eqs = fn()
    elif params[0] == "kind":
        eqs = fn(design.platform.kind)
    else:
        eqs = fn(design)
    return tuple(eqs.items()) if isinstance(eqs, Mapping) else tuple(eqs)


def collect_equations(design, modules=EQUATION_MODULES) -> list[tuple[str, list[tuple[str, str]]]]:
    """``[(module title, [(equation name, latex), ...]), ...]`` from every installed module
    for ``design`` (a rigid design gets the rigid-platform equations)."""
    groups = []
    for name in modules:
        try:
            mod = import_module(f"cablekit.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"cablekit.{name}":
                continue
            raise
        eqs = module_equations(mod, design)
        if eqs:
            groups.append((f"cablekit.{name}", list(eqs)))
    return groups
