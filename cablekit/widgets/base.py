"""The common shape of a result panel: compute on a design change, then redraw in place.

A panel subclasses :class:`Panel` (an ``ipywidgets.VBox``) and implements

* ``compute(design) -> result``: calls the package's public functions (no numerics here);
* ``draw(result)``: writes the result into its ``go.FigureWidget`` traces with
  ``batch_update`` and into its summary HTML.

``refresh()`` runs both, guarded: a failing computation leaves the last valid ``result`` and
figure in place and shows the reason in the panel's status line.  Design changes reach
``refresh`` through a :class:`~cablekit.widgets.state.Debouncer`.
"""

from __future__ import annotations

import time
from typing import Any

import ipywidgets as W

from .state import Debouncer, DesignState, guarded
from .style import message_html

__all__ = ["Panel", "ProblemsBanner", "NotAvailable", "optional_module", "set_range"]


def optional_module(name: str):
    """Import ``cablekit.<name>`` if it is installed, else ``None`` (a panel then says so)."""
    from importlib import import_module

    try:
        return import_module(f"cablekit.{name}")
    except ModuleNotFoundError as exc:
        if exc.name == f"cablekit.{name}":
            return None
        raise


def set_range(slider, lo, hi, value) -> None:
    """Set a slider's bounds and value in an order the bounds checks accept."""
    if lo > slider.max:
        slider.max = hi
        slider.min = lo
    else:
        slider.min = lo
        slider.max = hi
    slider.value = min(max(value, lo), hi)


class NotAvailable(Exception):
    """Raised by ``compute`` when a module the panel needs is not installed."""


class Panel(W.VBox):
    """Base of every result panel; ``title`` names it in messages."""

    title = "panel"

    def __init__(self, state: DesignState, *, delay: float = 0.15, children=(), **kwargs):
        self.state = state
        self.result: Any = None
        self.timings: dict[str, float] = {}
        self.status = W.HTML(layout=W.Layout(min_height="20px"))
        self.status.add_class("ck-status")
        super().__init__(children=list(children), **kwargs)
        self.add_class("ck-panel")
        self._debounced = Debouncer(self.refresh, delay)
        state.observe(self._on_design, "design")

    def _on_design(self, change) -> None:
        self._debounced()

    def flush(self) -> None:
        """Run a refresh that is waiting for its debounce delay."""
        self._debounced.flush()

    def set_status(self, text: str, level: str = "info") -> None:
        self.status.value = message_html(text, level=level)

    def _error(self, text: str) -> None:
        self.set_status(text + " (showing the last valid results)" if self.result is not None else text, "error")

    def compute(self, design):  # pragma: no cover - abstract
        raise NotImplementedError

    def draw(self, result) -> None:  # pragma: no cover - abstract
        raise NotImplementedError

    def refresh(self) -> bool:
        """Compute for the current design and redraw; return whether both succeeded."""
        design = self.state.design
        unavailable = []

        def compute():
            try:
                return self.compute(design)
            except NotAvailable as exc:
                unavailable.append(str(exc))
                return None

        t0 = time.perf_counter()
        result = guarded(self._error, self.title, compute)
        if unavailable:
            self.set_status(unavailable[0], "warn")
        t1 = time.perf_counter()
        if result is None:
            return False
        self.status.value = ""
        ok = guarded(self._error, self.title, lambda: self.draw(result) or True)
        t2 = time.perf_counter()
        if ok:
            self.result = result
            self.timings = {"compute": t1 - t0, "draw": t2 - t1}
        return bool(ok)


class ProblemsBanner(W.HTML):
    """Shows the state's status line and the validation problems of the last rejected edit."""

    def __init__(self, state: DesignState, **kwargs):
        super().__init__(**kwargs)
        self.add_class("ck-problems")
        self.state = state
        state.observe(self._show, ["problems", "status"])
        self._show()

    def _show(self, change=None) -> None:
        s = self.state
        if s.problems:
            self.value = message_html(s.status, level="error", lines=s.problems)
        else:
            self.value = message_html(s.status, level="ok" if s.status else "info")
