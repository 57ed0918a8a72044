"""Pass/warn/fail rules: one record per check, one place that gathers them all.

Every rule in cablekit returns :class:`Check` records: the value found, the limit, the
margin, a status and the source of the limit (a standard and clause, a handbook table, or
"common practice, no source").  Modules that own checks expose
``design_checks(design) -> list[Check]`` and are listed in :data:`CHECK_PROVIDERS`;
:func:`run_all` calls each one that is installed, so the command line, the widgets and the
review sheet always show the same list.

A provider module may also expose ``design_assumptions(design, **options) -> list[str]``:
the modelling assumptions its verdicts rest on for this design (one sentence each, e.g. "the
platform is a point: its attachments coincide, so it is taken to stay level").
:func:`run_assumptions` gathers them and the review sheet prints every one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from importlib import import_module

__all__ = ["PASS", "WARN", "FAIL", "Check", "judge", "CHECK_PROVIDERS", "run_all", "run_assumptions",
           "worst_status"]

PASS, WARN, FAIL = "pass", "warn", "fail"
_ORDER = {PASS: 0, WARN: 1, FAIL: 2}


@dataclass(frozen=True)
class Check:
    """One check's outcome.

    key : stable identifier, e.g. ``"rope_design_factor"``; subject : what was checked
    (``"cable post A"``, ``"winch 2"``, ``"task region"``); title : human-readable name;
    value, limit : numbers in ``unit`` (display unit, e.g. "deg", "N", "%"); margin : how far
    from the limit, in the same unit, positive when on the good side; status : pass, warn or
    fail; source : where the limit comes from; detail : one sentence on why / where.
    """

    key: str
    subject: str
    title: str
    value: float
    limit: float
    unit: str
    margin: float
    status: str
    source: str
    detail: str = ""

    def __post_init__(self):
        if self.status not in _ORDER:
            raise ValueError(f"status must be pass, warn or fail, got {self.status!r}")


def judge(value: float, limit: float, *, upper: bool, warn_limit: float | None = None) -> tuple[float, str]:
    """Margin and status of ``value`` against ``limit``.

    upper : True when the value must stay at or below the limit (a maximum), False when it
    must stay at or above it (a minimum).  warn_limit : optional stricter limit on the same
    side; between it and ``limit`` the status is "warn".  NaN values fail.
    """
    if not math.isfinite(value):
        return float("nan"), FAIL
    margin = (limit - value) if upper else (value - limit)
    if margin < 0:
        return margin, FAIL
    if warn_limit is not None:
        wm = (warn_limit - value) if upper else (value - warn_limit)
        if wm < 0:
            return margin, WARN
    return margin, PASS


def worst_status(checks) -> str:
    worst = PASS
    for c in checks:
        if _ORDER[c.status] > _ORDER[worst]:
            worst = c.status
    return worst


# module:function providers, imported lazily; a provider whose module is absent is skipped
CHECK_PROVIDERS: list[str] = [
    "cablekit.workspace:design_checks",
    "cablekit.drive:design_checks",
    "cablekit.cables:design_checks",
    "cablekit.accuracy:design_checks",
    "cablekit.arm:design_checks",
]


def _provider_modules():
    """(module, function name) of each installed provider, in order."""
    for target in CHECK_PROVIDERS:
        mod_name, func_name = target.split(":")
        try:
            mod = import_module(mod_name)
        except ModuleNotFoundError as exc:
            if exc.name == mod_name:
                continue
            raise
        yield mod, func_name


def _call(fn, design, options):
    import inspect

    params = inspect.signature(fn).parameters
    return fn(design, **{k: v for k, v in options.items() if k in params})


def run_all(design, **options) -> list[Check]:
    """Every check of every installed provider, in provider order.

    ``options`` are passed to providers that accept them (e.g. ``workspace=`` a precomputed
    workspace result) so the sheet and the widgets do not compute the same map twice.
    """
    out: list[Check] = []
    for mod, func_name in _provider_modules():
        fn = getattr(mod, func_name, None)
        if fn is not None:
            out.extend(_call(fn, design, options))
    return out


def run_assumptions(design, **options) -> list[str]:
    """Every modelling assumption the providers' verdicts rest on for ``design``, in provider
    order, without repeats (see the module docstring); ``options`` as for :func:`run_all`."""
    out: list[str] = []
    for mod, _ in _provider_modules():
        fn = getattr(mod, "design_assumptions", None)
        for text in (_call(fn, design, options) if fn is not None else ()):
            if text not in out:
                out.append(text)
    return out
