"""The one observable design state every widget shares.

A :class:`DesignState` holds the **last valid** :class:`~cablekit.design.Design`, the problems
of the last rejected edit, and a per-design cache of results so that two panels never compute
the same workspace twice.  Widgets never change the design themselves: they call
:meth:`DesignState.propose` with a function that returns an edited copy; the state validates
it (the same checks as loading a file) and either accepts it (observers of ``design`` run) or
keeps the previous design and publishes the problems (observers of ``problems`` run).  A bad
value typed in one panel therefore shows its validation message and every panel keeps its
last valid results.

:class:`Debouncer` coalesces bursts of changes (a slider stepped with the arrow keys, several
fields edited in a row) into one heavy computation that runs a moment after the last change,
inside the kernel's event loop, so typing is never blocked.  Without a running event loop (unit
tests, scripts) it runs at once.
"""

from __future__ import annotations

import asyncio
import traceback
from pathlib import Path
from typing import Any, Callable

import traitlets

from ..design import Design, DesignError, load_design, loads_design, revalidate, save_design
from ..units import UnitError

__all__ = ["DesignState", "Debouncer", "EditError"]


class EditError(ValueError):
    """An edit that cannot even be built (e.g. scaling a frame axis of zero extent)."""


class Debouncer:
    """Call ``fn`` once, ``delay`` seconds after the last of a burst of :meth:`__call__`.

    Runs immediately when ``delay`` is 0 or no asyncio event loop is running (scripts,
    unit tests); inside a Jupyter or Voila kernel the call is scheduled on the kernel's loop.
    """

    def __init__(self, fn: Callable[[], Any], delay: float = 0.15):
        self.fn = fn
        self.delay = float(delay)
        self._handle: asyncio.TimerHandle | None = None

    def __call__(self) -> None:
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None
        try:
            loop = asyncio.get_running_loop()
        except RuntimeError:
            loop = None
        if loop is None or self.delay <= 0:
            self.fn()
            return
        self._handle = loop.call_later(self.delay, self._fire)

    def _fire(self) -> None:
        self._handle = None
        self.fn()

    @property
    def pending(self) -> bool:
        return self._handle is not None

    def flush(self) -> None:
        """Run a pending call now (used before saving, and by tests)."""
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None
            self.fn()


def _problem_lines(exc: BaseException) -> list[str]:
    if isinstance(exc, DesignError):
        return [str(p) for p in exc.problems]
    return [str(exc)]


class DesignState(traitlets.HasTraits):
    """The design being edited, shared by every widget of a dashboard.

    Traits (observe them with ``state.observe(callback, "design")``):

    design : the last valid design (never an invalid one).
    problems : validation problems of the last rejected edit or load (empty after a good one).
    status : one line for the status bar ("ready", "edit rejected: ...", "saved to ...").
    revision : increases by one each time a new design is accepted.
    path : the design file last loaded or saved ("" when none).
    """

    design = traitlets.Instance(Design)
    problems = traitlets.List(traitlets.Unicode())
    status = traitlets.Unicode("")
    revision = traitlets.Int(0)
    path = traitlets.Unicode("")

    def __init__(self, design: Design | str | Path, **kwargs):
        if isinstance(design, (str, Path)):
            path = str(design)
            design = load_design(path)
            kwargs.setdefault("path", path)
        super().__init__(design=design, **kwargs)
        self._cache: dict[Any, Any] = {}
        self.status = f"loaded {design.meta.name}"

    # -- editing --------------------------------------------------------------------------
    def propose(self, edit: Callable[[Design], Design] | Design, *, what: str = "edit") -> bool:
        """Validate an edited design and make it current; return whether it was accepted.

        ``edit`` is either a new :class:`Design` or a function taking the current design and
        returning an edited copy.  On any problem (validation, units, impossible geometry) the
        current design is kept, ``problems`` lists why and ``status`` says which edit failed.
        """
        try:
            new = edit(self.design) if callable(edit) else edit
            new = revalidate(new)
        except (DesignError, UnitError, EditError, ValueError) as exc:
            self.problems = _problem_lines(exc)
            self.status = f"{what}: not applied, the design would be invalid (the last valid results stay shown)"
            return False
        self._accept(new, f"{what}: applied")
        return True

    def _accept(self, design: Design, status: str) -> None:
        self._cache.clear()
        self.problems = []
        self.status = status
        if design != self.design:
            self.revision += 1
            self.design = design

    # -- files ----------------------------------------------------------------------------
    def load(self, path) -> bool:
        """Load a design file; on problems keep the current design and list them."""
        try:
            design = load_design(path)
        except DesignError as exc:
            self.problems = _problem_lines(exc)
            self.status = f"could not load {path}: the current design is kept"
            return False
        self.path = str(path)
        self._accept(design, f"loaded {path}")
        return True

    def loads(self, text: str, *, source: str = "uploaded file") -> bool:
        """Load design-file text (an upload); on problems keep the current design."""
        try:
            design = loads_design(text, source=source)
        except DesignError as exc:
            self.problems = _problem_lines(exc)
            self.status = f"could not load {source}: the current design is kept"
            return False
        self._accept(design, f"loaded {source}")
        return True

    def save(self, path, *, header: str | None = None) -> bool:
        """Save the current design atomically (validated again before writing)."""
        path = Path(path)
        if path.suffix != ".toml":
            self.problems = [f"file name: {path.name!r} should end in .toml"]
            self.status = "not saved"
            return False
        try:
            save_design(self.design, path, header=header)
        except (DesignError, OSError) as exc:
            reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            self.problems = [f"{path}: {reason}"]
            self.status = "not saved"
            return False
        self.path = str(path)
        self.problems = []
        self.status = f"saved to {path}"
        return True

    # -- shared results -------------------------------------------------------------------
    def cached(self, key, compute: Callable[[Design], Any]):
        """``compute(design)`` once per accepted design and ``key`` (cleared on every change)."""
        full = (self.revision, key)
        if full not in self._cache:
            self._cache[full] = compute(self.design)
        return self._cache[full]


def guarded(status_setter: Callable[[str], None], what: str, fn: Callable[[], Any]):
    """Run ``fn``; on an exception report it through ``status_setter`` instead of raising.

    Used by every panel's refresh so that a failing computation shows a message and the
    panel keeps its last valid results; the kernel never dies from a widget callback.
    """
    try:
        return fn()
    except (DesignError, UnitError, ValueError, ArithmeticError) as exc:
        status_setter(f"{what}: {'; '.join(_problem_lines(exc))}")
    except Exception as exc:  # a bug: say so plainly, keep the dashboard alive
        last = traceback.extract_tb(exc.__traceback__)[-1] if exc.__traceback__ else None
        where = f" at {Path(last.filename).name}:{last.lineno}" if last else ""
        status_setter(f"{what}: internal error {type(exc).__name__}: {exc}{where} (please report it)")
    return None
