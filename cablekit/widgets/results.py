"""Results shared by the panels of one dashboard, computed once per accepted design.

Each accessor calls the owning module's public function through
:meth:`~cablekit.widgets.state.DesignState.cached`, so the workspace map, the drivetrain
panel and the review button use the same workspace result for the same design.  A module
that is not installed raises :class:`~cablekit.widgets.base.NotAvailable` with a message the
panel shows as it is.
"""

from __future__ import annotations

from .base import NotAvailable, optional_module
from .state import DesignState

__all__ = ["need", "workspace_result", "drive_result", "accuracy_result", "arm_reach_result", "review_results"]


def need(name: str, what: str):
    """The module ``cablekit.<name>`` or :class:`NotAvailable` saying ``what`` is missing."""
    mod = optional_module(name)
    if mod is None:
        raise NotAvailable(f"{what}: not available yet (cablekit.{name} is not installed)")
    return mod


def workspace_result(state: DesignState, step: float | None = None):
    """:func:`cablekit.workspace.compute_workspace` for the current design [step in m]."""
    ws = need("workspace", "workspace map")
    step = float(state.design.task.step if step is None else step)
    return state.cached(("workspace", step), lambda d: ws.compute_workspace(d, step=step))


def drive_result(state: DesignState):
    """:func:`cablekit.drive.size_drives` on the shared workspace result."""
    drive = need("drive", "drivetrain sizing")
    return state.cached("drive", lambda d: drive.size_drives(d, workspace=workspace_result(state)))


def accuracy_result(state: DesignState, budget=None, key=None):
    """:func:`cablekit.accuracy.accuracy_map` (no Monte Carlo cross-check: interactive use);
    ``budget`` replaces the design's error budget, ``key`` names it in the cache."""
    acc = need("accuracy", "error map")
    return state.cached(("accuracy", key), lambda d: acc.accuracy_map(d, budget=budget, monte_carlo_samples=0))


def arm_reach_result(state: DesignState):
    """:func:`cablekit.arm.reach` of the design's arm (``None`` when it has none)."""
    arm = need("arm", "arm reach")

    def compute(d):
        a = d.sections.get("arm")
        return None if a is None else arm.reach(a, gravity=tuple(d.gravity))

    return state.cached("arm_reach", compute)


def review_results(state: DesignState) -> dict:
    """Results already computed for the current design, keyed as the review sheet expects."""
    out = {}
    for key, fn in (("workspace", workspace_result), ("drive", drive_result), ("arm_reach", arm_reach_result)):
        try:
            value = fn(state)
        except NotAvailable:
            continue
        if value is not None:
            out[key] = value
    return out
