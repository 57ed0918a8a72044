"""Colours, fonts and small HTML helpers shared by the widgets (cablekit's own look)."""

from __future__ import annotations

import html

__all__ = ["INK", "MUTED", "FRAME", "TASK", "OBSTACLE", "PLATFORM", "FEASIBLE", "INFEASIBLE",
           "TENSION_SCALE", "MARGIN_SCALE", "ERROR_SCALE", "STATUS_COLOURS",
           "figure_layout", "status_badge", "message_html", "table_html", "summary_block", "CAUTION"]

INK = "#23303b"
MUTED = "#7a8791"
FRAME = "#8a94a0"
TASK = "#2a9d8f"
OBSTACLE = "#b5651d"
PLATFORM = "#264653"
FEASIBLE = "#2a9d8f"
INFEASIBLE = "#e76f51"

# low tension (slack side) teal -> sand -> brick red at the limit
TENSION_SCALE = [[0.0, "#3a86a8"], [0.5, "#e9c46a"], [1.0, "#b23a2e"]]
# negative margin (outside) warm, positive (inside) cool, zero pale
MARGIN_SCALE = [[0.0, "#b23a2e"], [0.5, "#f4efe6"], [1.0, "#2a7f74"]]
ERROR_SCALE = [[0.0, "#f4efe6"], [0.5, "#e9a23b"], [1.0, "#6b2d5c"]]

STATUS_COLOURS = {"pass": "#2a7f74", "warn": "#c98a12", "fail": "#b23a2e"}
CAUTION = ("Suspended loads and winches store energy: keep people out from under the platform, fit "
           "brakes and an emergency stop, inspect ropes before use. These numbers support a design "
           "review; local codes and licensed practice decide.")


def figure_layout(title: str = "", *, height: int = 420, scene: bool = False) -> dict:
    """Common layout of every cablekit figure."""
    layout = dict(title=dict(text=title, font=dict(size=14, color=INK)), height=height,
                  margin=dict(l=50, r=20, t=45, b=40), paper_bgcolor="white", plot_bgcolor="#fbfaf7",
                  font=dict(family="DejaVu Sans, Arial, sans-serif", size=12, color=INK),
                  legend=dict(orientation="h", y=-0.08))
    if scene:
        axis = dict(backgroundcolor="#fbfaf7", gridcolor="#e3ded4", zerolinecolor="#cfc8bb")
        layout["scene"] = dict(aspectmode="data", xaxis=dict(title="x [m]", **axis),
                               yaxis=dict(title="y [m]", **axis), zaxis=dict(title="z [m]", **axis))
        layout["margin"] = dict(l=0, r=0, t=45, b=0)
    return layout


def status_badge(status: str) -> str:
    colour = STATUS_COLOURS.get(status, MUTED)
    return (f'<span style="background:{colour};color:white;border-radius:3px;padding:0 6px;'
            f'font-weight:600">{html.escape(status)}</span>')


def message_html(text: str, *, level: str = "info", lines=()) -> str:
    """A status line; ``level`` is info, ok, warn or error; ``lines`` an optional list below."""
    colour = {"info": MUTED, "ok": STATUS_COLOURS["pass"], "warn": STATUS_COLOURS["warn"],
              "error": STATUS_COLOURS["fail"]}[level]
    body = f'<div style="color:{colour}">{html.escape(text)}</div>' if text else ""
    if lines:
        body += "<ul style='margin:2px 0 2px 18px;padding:0'>" + "".join(
            f"<li style='color:{colour}'>{html.escape(str(s))}</li>" for s in lines) + "</ul>"
    return body


def table_html(header, rows, *, css_class: str = "ck-table") -> str:
    """A small HTML table; cells are escaped unless they are pre-rendered badges (tuples)."""
    def cell(v, tag):
        if isinstance(v, tuple) and len(v) == 1:  # ("<span...>",): trusted, pre-rendered
            return f"<{tag} style='padding:2px 8px'>{v[0]}</{tag}>"
        return f"<{tag} style='padding:2px 8px;text-align:left'>{html.escape(str(v))}</{tag}>"

    head = "".join(cell(h, "th") for h in header)
    body = "".join("<tr>" + "".join(cell(v, "td") for v in r) + "</tr>" for r in rows)
    return (f"<table class='{css_class}' style='border-collapse:collapse;font-size:12px'>"
            f"<thead style='border-bottom:1px solid {FRAME}'><tr>{head}</tr></thead><tbody>{body}</tbody></table>")


def summary_block(lines) -> str:
    """A result's ``.summary()`` lines as a compact monospace block."""
    text = html.escape("\n".join(str(x) for x in lines))
    return (f"<div style='color:{MUTED};font-size:11.5px;line-height:1.35;white-space:pre-wrap;"
            f"font-family:DejaVu Sans Mono, monospace;margin:4px 0'>{text}</div>")
