"""Checks table and the button that writes the design-review sheet for the design being edited.

The table lists every check of every installed module (:func:`cablekit.checks.run_all`, fed
the results the dashboard already computed) with its value, limit, margin, status and the
source of its limit.  The button calls :func:`cablekit.review.write_review` for the current
(last valid) design and writes the sheet into the dashboard's folder.
"""

from __future__ import annotations

import html
from pathlib import Path

import ipywidgets as W

from ..checks import run_all, worst_status
from .base import NotAvailable, Panel
from .files import resolve_in_folder
from .results import accuracy_result, arm_reach_result, need, review_results, workspace_result
from .state import DesignState
from .style import CAUTION, MUTED, message_html, status_badge, table_html

__all__ = ["ReviewPanel"]


def _safe(fn, *args):
    try:
        return fn(*args)
    except NotAvailable:
        return None


class ReviewPanel(Panel):
    """Every check for the shared design, and a button writing the review sheet."""

    title = "checks"

    def __init__(self, state: DesignState, *, folder=None, **kwargs):
        self.folder = Path(folder) if folder is not None else Path.cwd()
        stem = Path(state.path).stem if state.path else "design"
        self.sheet_name = W.Text(value=f"{stem}_review.html", description="sheet file (.html)",
                                 style={"description_width": "120px"}, layout=W.Layout(width="400px"))
        self.button = W.Button(description="Write review sheet", icon="file", button_style="primary")
        self.button.on_click(lambda _: self.write_sheet())
        self.message = W.HTML()
        self.message.add_class("ck-review-message")
        self.table = W.HTML()
        self.table.add_class("ck-checks")
        self.last_sheet = None
        super().__init__(state, **kwargs)
        self.children = [W.HBox([self.sheet_name, self.button]), self.message, self.table, self.status]
        self.add_class("ck-review")
        self.refresh()

    def compute(self, design):
        options = {"workspace": _safe(workspace_result, self.state), "accuracy": _safe(accuracy_result, self.state),
                   "arm_reach": _safe(arm_reach_result, self.state)}
        return run_all(design, **{k: v for k, v in options.items() if v is not None})

    def draw(self, checks) -> None:
        rows = [[(status_badge(c.status),), c.subject, c.title, f"{c.value:.4g} {c.unit}", f"{c.limit:.4g} {c.unit}",
                 f"{c.margin:.3g}", c.source] for c in checks]
        overall = worst_status(checks) if checks else "pass"
        self.table.value = (
            f"<div>{len(checks)} checks, overall {status_badge(overall)}</div>"
            + table_html(["status", "subject", "check", "value", "limit", "margin", "source of the limit"], rows)
            + f"<div style='color:{MUTED};font-size:11px;margin-top:4px'>&#9888; {html.escape(CAUTION)}</div>")

    def write_sheet(self) -> bool:
        """Write the review sheet of the current design; report where (or why not)."""
        try:
            review = need("review", "review sheet")
            name = self.sheet_name.value.strip()
            if not name.endswith(".html"):
                raise ValueError(f"sheet file: {name!r} should end in .html")
            path = resolve_in_folder(self.folder, name[:-5] + ".toml").with_suffix(".html")
        except (NotAvailable, ValueError) as exc:
            self.message.value = message_html(str(exc), level="error")
            return False
        self.message.value = message_html(f"writing {path.name} ...")
        try:
            sheet = review.write_review(self.state.design, path, results=review_results(self.state),
                                        source_path=self.state.path or None)
        except Exception as exc:  # keep the dashboard alive and say what happened
            self.message.value = message_html(f"the sheet was not written: {type(exc).__name__}: {exc}", level="error")
            return False
        self.last_sheet = sheet
        level = {"pass": "ok", "warn": "warn", "fail": "error"}[sheet.status]
        self.message.value = message_html(f"review sheet written to {path} (overall: {sheet.status}; "
                                          f"{len(sheet.failures)} failing, {len(sheet.warnings)} warning checks)",
                                          level=level)
        return True
