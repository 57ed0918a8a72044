"""The design-review sheet: one self-contained HTML document a reviewer can check and sign.

:func:`build_review` gathers, for one design, the inputs with units, the derived quantities,
every check of :func:`cablekit.checks.run_all` (value, limit, margin, status, source), the
plots of the result objects, the equations used, the common-practice table in force, the
assumptions and what was not checked, the safety cautions and a sign-off block.
:func:`write_review` writes the sheet atomically as HTML and, when asked, as PDF.

The sheet works offline: plotly.js is inlined once, equations are MathML produced here from
the LaTeX the modules provide (no CDN, no MathJax).  It is deterministic: the same design
gives byte-identical HTML apart from the date (stable plot ids, no timestamps elsewhere).

Each analysis module (workspace, drivetrain and cables, accuracy, arm) fills its own section
from its public result objects when it is installed; a module that is missing leaves a
section saying plainly that it was **not checked**.  Heavy results are computed once and
handed to :func:`~cablekit.checks.run_all`, so the checks and the plots show the same numbers.

PDF export prints the HTML page with a headless Chromium (``chromium --headless
--print-to-pdf``); see :func:`render_pdf`.
"""

from __future__ import annotations

import datetime
import html
import math
import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from importlib import import_module
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

from . import __version__
from .checks import FAIL, PASS, WARN, Check, run_all, run_assumptions, worst_status
from .design import atomic_write_text, content_hash
from .equations import module_equations

__all__ = [
    "Quantity",
    "Part",
    "ReviewSheet",
    "build_review",
    "write_review",
    "render_pdf",
    "find_browser",
    "check_line",
    "RendererError",
    "LatexError",
    "latex_to_mathml",
    "ASSUMPTIONS",
    "CAUTIONS",
]


# ======================================================================================
# LaTeX -> MathML (the small subset the modules' equations use)
# ======================================================================================
class LatexError(ValueError):
    """LaTeX outside the subset :func:`latex_to_mathml` understands."""


_SYMBOLS = {
    # greek
    "alpha": "α", "beta": "β", "gamma": "γ", "delta": "δ", "epsilon": "ϵ", "varepsilon": "ε", "zeta": "ζ",
    "eta": "η", "theta": "θ", "vartheta": "ϑ", "iota": "ι", "kappa": "κ", "lambda": "λ", "mu": "μ", "nu": "ν",
    "xi": "ξ", "pi": "π", "rho": "ρ", "sigma": "σ", "tau": "τ", "upsilon": "υ", "phi": "ϕ", "varphi": "φ",
    "chi": "χ", "psi": "ψ", "omega": "ω", "Gamma": "Γ", "Delta": "Δ", "Theta": "Θ", "Lambda": "Λ", "Xi": "Ξ",
    "Pi": "Π", "Sigma": "Σ", "Phi": "Φ", "Psi": "Ψ", "Omega": "Ω", "ell": "ℓ", "infty": "∞", "partial": "∂",
    "nabla": "∇",
}
_OPERATORS = {
    "le": "≤", "leq": "≤", "ge": "≥", "geq": "≥", "ne": "≠", "neq": "≠", "approx": "≈", "sim": "∼",
    "equiv": "≡", "times": "×", "cdot": "⋅", "pm": "±", "mp": "∓", "to": "→", "rightarrow": "→",
    "leftarrow": "←", "Rightarrow": "⇒", "in": "∈", "forall": "∀", "sum": "∑", "prod": "∏", "int": "∫",
    "lVert": "‖", "rVert": "‖", "Vert": "‖", "|": "‖", "lvert": "|", "rvert": "|", "mid": "|",
    "langle": "⟨", "rangle": "⟩", "lfloor": "⌊", "rfloor": "⌋", "lceil": "⌈", "rceil": "⌉",
    "{": "{", "}": "}", "%": "%", "_": "_", "#": "#", "ldots": "…", "dots": "…", "cdots": "⋯",
    "circ": "∘", "propto": "∝", "ll": "≪", "gg": "≫", "cap": "∩", "cup": "∪", "setminus": "∖",
}
_ASCII_OPERATORS = {"-": "−", "*": "∗"}
_NON_STRETCHY = {"lVert", "rVert", "Vert", "|", "lvert", "rvert", "mid"}
_FUNCTIONS = {"sin", "cos", "tan", "cot", "sec", "csc", "arcsin", "arccos", "arctan", "sinh", "cosh", "tanh",
              "log", "ln", "exp", "max", "min", "det", "arg", "sup", "inf", "lim", "sgn", "atan2", "operatorname"}
_SPACES = {",": "0.1667em", ":": "0.2222em", ";": "0.2778em", " ": "0.25em", "quad": "1em", "qquad": "2em"}
_IGNORED = {"!", "displaystyle", "textstyle", "limits", "nolimits", "left.", "right."}
_ACCENTS = {"hat": "^", "bar": "‾", "overline": "‾", "dot": "˙", "ddot": "¨", "tilde": "~", "vec": "→",
            "widehat": "^", "widetilde": "~"}
_FONTS = {"mathbf": "bold", "boldsymbol": "bold", "bm": "bold", "mathrm": "normal", "mathit": "italic",
          "mathcal": "normal", "mathsf": "normal"}
_MATRIX_FENCES = {"matrix": ("", ""), "bmatrix": ("[", "]"), "pmatrix": ("(", ")"), "vmatrix": ("|", "|"),
                  "Bmatrix": ("{", "}"), "smallmatrix": ("", ""), "array": ("", ""), "cases": ("{", "")}
_TOKEN = re.compile(r"\\[A-Za-z]+|\\.|[{}^_&']|\s+|[0-9]+(?:\.[0-9]+)?|[A-Za-z]|.", re.S)


class _LatexParser:
    """Recursive descent over LaTeX tokens, producing presentation MathML text."""

    def __init__(self, text: str):
        self.tokens = _TOKEN.findall(text)  # whitespace kept for \\text{...}; skipped in maths
        self.pos = 0

    def _skip_space(self) -> None:
        while self.pos < len(self.tokens) and self.tokens[self.pos].isspace():
            self.pos += 1

    def peek(self) -> str | None:
        self._skip_space()
        return self.tokens[self.pos] if self.pos < len(self.tokens) else None

    def take(self, *, raw: bool = False) -> str:
        if not raw:
            self._skip_space()
        if self.pos >= len(self.tokens):
            raise LatexError("unexpected end of the equation")
        tok = self.tokens[self.pos]
        self.pos += 1
        return tok

    def expect(self, tok: str) -> None:
        got = self.take()
        if got != tok:
            raise LatexError(f"expected {tok!r}, got {got!r}")

    # -- sequences -------------------------------------------------------------------
    def sequence(self, stops: tuple[str, ...]) -> str:
        parts = []
        while True:
            tok = self.peek()
            if tok is None or tok in stops:
                break
            parts.append(self.scripted())
        return "".join(parts)

    def group(self) -> str:
        """A required argument: ``{...}`` or one token."""
        if self.peek() == "{":
            self.take()
            inner = self.sequence(("}",))
            self.expect("}")
            return f"<mrow>{inner}</mrow>"
        return self.atom()

    def raw_group(self) -> str:
        """The literal text of a ``{...}`` argument (for ``\\text``)."""
        self.expect("{")
        depth, out = 1, []
        while True:
            tok = self.take(raw=True)
            if tok == "{":
                depth += 1
            elif tok == "}":
                depth -= 1
                if depth == 0:
                    break
            out.append(tok[1:] if tok.startswith("\\") and len(tok) == 2 else tok)
        return "".join(out)

    def scripted(self) -> str:
        base = self.atom()
        sub = sup = None
        while self.peek() in ("_", "^", "'"):
            tok = self.take()
            if tok == "'":
                sup = "<mo>′</mo>" if sup is None else sup + "<mo>′</mo>"
            elif tok == "_":
                sub = self.group()
            else:
                sup = self.group()
        if sub is not None and sup is not None:
            return f"<msubsup>{base}{sub}{sup}</msubsup>"
        if sub is not None:
            return f"<msub>{base}{sub}</msub>"
        if sup is not None:
            return f"<msup>{base}{sup}</msup>"
        return base

    # -- atoms -----------------------------------------------------------------------
    def atom(self) -> str:
        tok = self.take()
        if tok == "{":
            inner = self.sequence(("}",))
            self.expect("}")
            return f"<mrow>{inner}</mrow>"
        if tok[0].isalpha():
            return f"<mi>{tok}</mi>"
        if tok[0].isdigit():
            return f"<mn>{tok}</mn>"
        if tok.startswith("\\"):
            return self.command(tok[1:])
        if tok in "}&^_":
            raise LatexError(f"unexpected {tok!r}")
        return f"<mo>{html.escape(_ASCII_OPERATORS.get(tok, tok))}</mo>"

    def delimiter(self) -> str:
        tok = self.take()
        if tok == ".":
            return ""
        if tok.startswith("\\"):
            name = tok[1:]
            if name in _OPERATORS:
                return f"<mo>{html.escape(_OPERATORS[name])}</mo>"
            raise LatexError(f"unknown delimiter {tok!r}")
        return f"<mo>{html.escape(tok)}</mo>"

    def matrix(self, env: str) -> str:
        if env not in _MATRIX_FENCES:
            raise LatexError(f"unknown environment {env!r}")
        if env == "array" and self.peek() == "{":
            self.raw_group()  # column spec
        rows, cells = [], []
        while True:
            cells.append(self.sequence(("&", "\\\\", "\\end")))
            tok = self.take()
            if tok == "&":
                continue
            rows.append(cells)
            cells = []
            if tok == "\\end":
                end = self.raw_group()
                if end != env:
                    raise LatexError(f"\\begin{{{env}}} closed by \\end{{{end}}}")
                break
        if rows and rows[-1] == [""]:
            rows.pop()  # a trailing \\ before \end
        table = "<mtable>" + "".join(
            "<mtr>" + "".join(f"<mtd>{c}</mtd>" for c in r) + "</mtr>" for r in rows) + "</mtable>"
        left, right = _MATRIX_FENCES[env]
        fence = (lambda s: f"<mo>{html.escape(s)}</mo>" if s else "")
        return f"<mrow>{fence(left)}{table}{fence(right)}</mrow>"

    def command(self, name: str) -> str:
        if name in _SYMBOLS:
            return f"<mi>{_SYMBOLS[name]}</mi>"
        if name in _OPERATORS:
            stretch = ' stretchy="false"' if name in _NON_STRETCHY else ""
            return f"<mo{stretch}>{html.escape(_OPERATORS[name])}</mo>"
        if name in _SPACES:
            return f'<mspace width="{_SPACES[name]}"></mspace>'
        if name in _IGNORED:
            return ""
        if name in _FUNCTIONS:
            if name == "operatorname":
                return f"<mi>{html.escape(self.raw_group())}</mi>"
            return f"<mi>{name}</mi>"
        if name == "frac" or name == "dfrac" or name == "tfrac":
            num = self.group()
            den = self.group()
            return f"<mfrac>{num}{den}</mfrac>"
        if name == "sqrt":
            if self.peek() == "[":
                self.take()
                index = self.sequence(("]",))
                self.expect("]")
                return f"<mroot>{self.group()}<mrow>{index}</mrow></mroot>"
            return f"<msqrt>{self.group()}</msqrt>"
        if name == "left":
            left = self.delimiter()
            inner = self.sequence(("\\right",))
            self.expect("\\right")
            right = self.delimiter()
            return f"<mrow>{left}{inner}{right}</mrow>"
        if name in ("text", "textrm", "mbox", "textit"):
            return f"<mtext>{html.escape(self.raw_group())}</mtext>"
        if name in _FONTS:
            body = self.group()
            variant = _FONTS[name]
            if variant == "bold":
                return body.replace("<mi>", '<mi mathvariant="normal" class="bf">').replace("<mn>", '<mn class="bf">')
            if variant == "normal":
                return body.replace("<mi>", '<mi mathvariant="normal">')
            return body
        if name in _ACCENTS:
            return f'<mover accent="true">{self.group()}<mo>{html.escape(_ACCENTS[name])}</mo></mover>'
        if name == "begin":
            return self.matrix(self.raw_group())
        raise LatexError(f"unsupported LaTeX command \\{name}")


def latex_to_mathml(latex: str, *, display: bool = True) -> str:
    """Presentation MathML for a LaTeX equation (the subset SymPy and cablekit write).

    Covers letters, numbers, operators, sub/superscripts, ``\\frac``, ``\\sqrt``,
    ``\\left..\\right``, matrices, ``\\text``, ``\\mathbf``, accents, Greek letters and the
    usual relations and functions.  Anything else raises :class:`LatexError`, so a caller can
    show the LaTeX source instead of a wrong rendering.
    """
    p = _LatexParser(latex)
    body = p.sequence(())
    if p.peek() is not None:  # pragma: no cover - sequence(()) consumes everything or raises
        raise LatexError(f"unexpected {p.peek()!r}")
    mode = "block" if display else "inline"
    return f'<math display="{mode}"><mrow>{body}</mrow></math>'


# ======================================================================================
# the sheet's data
# ======================================================================================
_PLAIN_UNITS = ("", "%", "counts", "poses")  # shown as stored, not converted from SI


@dataclass(frozen=True)
class Quantity:
    """A derived number shown on the sheet.

    key : stable identifier (``"cable_length:post A"``); label : what it is; low, high : the
    range in SI units (equal for a single value); unit : the display unit (``"mm"``, ``"N"``;
    ``""`` and ``"%"`` are shown as stored);
    cable : the cable it belongs to (``None`` for the whole rig); source : the library function
    that computed it.
    """

    key: str
    label: str
    low: float
    high: float
    unit: str
    cable: str | None = None
    source: str = ""

    def display(self) -> str:
        from .units import to_unit

        plain = self.unit in _PLAIN_UNITS
        lo = self.low if plain else to_unit(self.low, self.unit)
        hi = self.high if plain else to_unit(self.high, self.unit)
        return _num(lo) if lo == hi else f"{_num(lo)} … {_num(hi)}"


@dataclass(frozen=True)
class Part:
    """One module's contribution to the sheet.

    key : ``"workspace"``, ``"drive"``, ...; title : the section heading; module : the module
    that fills it; available : False when that module is not installed (the section then says
    plainly that it was not checked); summary : text lines from the result objects; figures :
    (caption, plotly figure) pairs; quantities : derived numbers; equations : (name, LaTeX)
    pairs; not_checked : what this part leaves out; options : the result objects handed to
    :func:`~cablekit.checks.run_all` by option name (e.g. ``{"accuracy": AccuracyResult}``).
    """

    key: str
    title: str
    module: str
    available: bool
    summary: tuple[str, ...] = ()
    figures: tuple[tuple[str, Any], ...] = ()
    quantities: tuple[Quantity, ...] = ()
    equations: tuple[tuple[str, str], ...] = ()
    not_checked: tuple[str, ...] = ()
    options: Mapping[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class ReviewSheet:
    """A built review sheet.

    html : the whole self-contained HTML document; checks : every check shown, in order;
    status : the overall status (``"pass"``, ``"warn"`` or ``"fail"``); parts : the sections
    filled by each module; quantities : every derived number shown; missing : modules that were
    not installed (their sections say "not checked"); content_hash : SHA-256 of the design's
    canonical text; date : the date printed on the sheet (``YYYY-MM-DD``).
    """

    html: str
    checks: tuple[Check, ...]
    status: str
    parts: tuple[Part, ...]
    quantities: tuple[Quantity, ...]
    missing: tuple[str, ...]
    content_hash: str
    date: str
    version: str = __version__

    @property
    def failures(self) -> tuple[Check, ...]:
        return tuple(c for c in self.checks if c.status == FAIL)

    @property
    def warnings(self) -> tuple[Check, ...]:
        return tuple(c for c in self.checks if c.status == WARN)

    @property
    def complete(self) -> bool:
        """True when every analysis module was installed and contributed its checks."""
        return not self.missing

    def quantity(self, key: str) -> Quantity:
        for q in self.quantities:
            if q.key == key:
                return q
        raise KeyError(key)


ASSUMPTIONS: tuple[str, ...] = (
    "Exit points are fixed: each cable leaves the frame at one point (an eyelet or the tangent point of a small "
    "pulley treated as fixed); the pulley radius is used for D/d checks but does not move the exit point.",
    "Quasi-static motion: forces balance at every pose under gravity (and the task wrench box where given); "
    "inertial loads, vibration and controller dynamics are not part of the equilibrium unless a section below "
    "says otherwise.",
    "Cables are straight lines between exit point and attachment; where sag is large the drivetrain and cables "
    "section flags it, and straight-cable results there are approximate.",
    "Cables only pull: a cable below its least taut tension counts as slack.",
    "Rigid frame and rigid platform: the frame, posts and anchors do not deflect.",
    "Every number comes from the design file as written: masses, ratings and rope data are the designer's; "
    "nothing here measures the built rig.",
)

NOT_CHECKED: tuple[str, ...] = (
    "Strength of the frame, posts, anchors, fixings and the platform itself.",
    "Rope end terminations, fittings, pulleys' and drums' own strength, fatigue and wear life.",
    "Dynamic and shock loads (snatch loads, sudden stops, emergency braking, a cable breaking).",
    "Electrical safety, the control system, its software and its failure modes.",
    "Cable collisions with people, the building or anything not declared as an obstacle.",
)

CAUTIONS: tuple[str, ...] = (
    "A suspended load can fall. Keep people out from under the platform and its load, and out of the space the "
    "cables sweep, whenever the rig is powered or carrying a load.",
    "Winches store energy in the load, the rope and the drive. Fit holding brakes that engage on power loss, an "
    "emergency stop that every operator can reach, and limits on travel and tension; test them before use.",
    "Inspect ropes, terminations, pulleys and drums before each use and replace worn, kinked, corroded or "
    "broken-wire rope; keep an inspection record.",
    "Check that the rope runs correctly onto the drum and through every pulley before loading the rig; never "
    "exceed the rated load.",
    "This sheet is a design aid, not a certificate. Local codes, standards and regulations govern; a competent "
    "person and, where required, a licensed engineer must review and approve the rig before it is built and "
    "used.",
)


# ======================================================================================
# number and unit formatting
# ======================================================================================
def _num(v: float) -> str:
    """Four significant digits, no exponent for everyday magnitudes."""
    try:
        v = float(v)
    except (TypeError, ValueError):
        return html.escape(str(v))
    if math.isnan(v):
        return "n/a"  # not computed (e.g. a fleet angle without the drum distance)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    a = abs(v)
    if a < 1e-12:  # rounding noise of a zero (values are in display units: mm, N, %, ...)
        return "0"
    if 1e-3 <= a < 1e7:
        decimals = max(0, 3 - int(math.floor(math.log10(a))))
        text = f"{v:.{decimals}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
        return text.replace("-", "−")
    return f"{v:.3e}".replace("-", "−")


def _h(text: Any) -> str:
    return html.escape(str(text), quote=True)


_UNIT_GLYPHS = (("**2", "²"), ("**3", "³"), ("^2", "²"), ("^3", "³"), ("*", "·"))


def _unit(unit: str) -> str:
    """A unit as printed on the sheet: ``N*m`` -> ``N·m``, ``m^2`` -> ``m²``, ``um`` -> ``µm``."""
    for a, b in _UNIT_GLYPHS:
        unit = unit.replace(a, b)
    return {"um": "µm", "-": ""}.get(unit, unit)


def _si(value: float, unit: str) -> str:
    """An SI value shown in ``unit`` with the unit."""
    from .units import to_unit

    return f"{_num(to_unit(value, unit))} {_unit(unit)}".strip()


def _vec(values, unit: str) -> str:
    from .units import to_unit

    return "(" + ", ".join(_num(to_unit(v, unit)) for v in values) + f") {_unit(unit)}"


def _table(headers: list[str], rows: list[list[str]], *, cls: str = "", row_attrs: list[str] | None = None) -> str:
    """An HTML table; ``headers`` are plain text, cells are HTML already."""
    head = "".join(f"<th>{_h(x)}</th>" for x in headers)
    body = []
    for k, r in enumerate(rows):
        attrs = f" {row_attrs[k]}" if row_attrs else ""
        body.append(f"<tr{attrs}>" + "".join(f"<td>{c}</td>" for c in r) + "</tr>")
    c = f' class="{cls}"' if cls else ""
    return f"<table{c}><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def _kv(rows: list[tuple[str, str]]) -> str:
    """A two-column table of (label, HTML value)."""
    return "<table class=\"kv\"><tbody>" + "".join(
        f"<tr><th>{_h(k)}</th><td>{v}</td></tr>" for k, v in rows) + "</tbody></table>"


# ======================================================================================
# the parts: one per module; each is filled from the module's public result objects
# ======================================================================================
Progress = Callable[[str], None]


def _rig_part(design, results: Mapping[str, Any], progress: Progress) -> Part:
    """What the foundation computes: lengths, encoder resolution, tension limits and range."""
    from .kinematics import cable_lengths, home_lengths, length_per_count
    from .region import task_poses
    from .statics import tension_limits

    progress("cable lengths and tension limits over the task region")
    names = design.cable_names
    grid = task_poses(design)
    L = cable_lengths(design, grid.poses)
    home = home_lengths(design)
    lpc = length_per_count(design)
    lim = tension_limits(design)
    q: list[Quantity] = [
        Quantity("suspended_mass", "moving mass: platform + payload (+ arm)", design.total_mass, design.total_mass,
                 "kg", source="Design.total_mass"),
        Quantity("task_poses", "poses sampled in the task region", len(grid.poses), len(grid.poses), "",
                 source="cablekit.region.task_poses"),
    ]
    for i, n in enumerate(names):
        q += [
            Quantity(f"home_length:{n}", "length at home", home[i], home[i], "m", n, "cablekit.kinematics.home_lengths"),
            Quantity(f"cable_length:{n}", "length over the task region", float(L[:, i].min()), float(L[:, i].max()),
                     "m", n, "cablekit.kinematics.cable_lengths"),
            Quantity(f"length_per_count:{n}", "encoder resolution: cable length per count", lpc[i], lpc[i], "um", n,
                     "cablekit.kinematics.length_per_count"),
            Quantity(f"t_min:{n}", "least taut tension", lim.t_min[i], lim.t_min[i], "N", n,
                     "cablekit.statics.tension_limits"),
            Quantity(f"rope_limit:{n}", "rope limit (breaking force / design factor)", lim.rope_limit[i],
                     lim.rope_limit[i], "N", n, "cablekit.statics.tension_limits"),
            Quantity(f"motor_limit:{n}", "motor limit (rated torque through gears and drum)", lim.motor_limit[i],
                     lim.motor_limit[i], "N", n, "cablekit.statics.tension_limits"),
            *([Quantity(f"stated_limit:{n}", "stated tension limit (max_tension in the design)", lim.stated_limit[i],
                        lim.stated_limit[i], "N", n, "cablekit.statics.tension_limits")]
              if np.isfinite(lim.stated_limit[i]) else []),
            Quantity(f"t_max:{n}", "highest allowed tension (limited by the "
                     f"{'stated max_tension' if lim.limited_by[i] == 'stated' else lim.limited_by[i]})", lim.t_max[i],
                     lim.t_max[i], "N", n, "cablekit.statics.tension_limits"),
        ]
    q += _tension_range(design, grid, results, progress)
    summary = [f"{len(grid.poses):,} poses sampled in the task region "
               f"({'grid ' + 'x'.join(map(str, grid.shape)) if grid.shape else 'points only'}"
               f"{', ' + str(len(design.task.points)) + ' task points' if design.task.points else ''}).",
               f"Rope design factor in force: {lim.design_factor:g}."]
    return Part(key="rig", title="Rig geometry, cable lengths and tension limits", module="cablekit.kinematics",
                available=True, summary=tuple(summary), figures=(("Rig layout: plan and elevation at the home pose",
                                                                  _layout_figure(design)),),
                quantities=tuple(q))


def _tension_range(design, grid, results, progress) -> list[Quantity]:
    """Tension range per cable over the task region's feasible poses (equilibrium tensions)."""
    from . import statics

    ws = results.get("workspace")
    tens = getattr(ws, "tensions", None) if ws is not None else None
    feas = getattr(ws, "feasible", None) if ws is not None else None
    source = "workspace result"
    if tens is None:
        fast = design.m == design.dof
        try:
            import_module("cablekit.tension")
            fast = True
        except ModuleNotFoundError:
            pass
        if not fast:
            return []  # only the per-pose LP would do: left to the workspace section
        progress("tensions over the task region")
        res = statics.tensions_at(design, grid.poses)
        tens, feas, source = res.tensions, res.feasible, f"cablekit.statics.tensions_at ({res.method})"
    tens = np.asarray(tens, float)
    ok = np.asarray(feas, bool) & np.all(np.isfinite(tens), axis=1)
    out = []
    if not np.any(ok):
        return out
    for i, n in enumerate(design.cable_names):
        t = tens[ok, i]
        out.append(Quantity(f"tension:{n}", "tension over the feasible task poses", float(t.min()), float(t.max()),
                            "N", n, source))
    return out


def _layout_figure(design):
    """Plan (x-y) and elevation (x-z) of exits, task box, obstacles and the cables at home."""
    import plotly.graph_objects as go
    from plotly.subplots import make_subplots

    from .statics import rotation_matrices

    home = np.asarray(design.home_pose, float)
    R = rotation_matrices(home[None, 3:])[0] if design.dof == 6 else np.eye(3)
    att = home[:3] + design.attachments @ R.T
    ex = design.exits
    fig = make_subplots(rows=1, cols=2, subplot_titles=("plan (x-y)", "elevation (x-z)"), horizontal_spacing=0.12)
    for col, (a, b) in enumerate(((0, 1), (0, 2)), start=1):
        show = col == 1
        xs, ys = [], []
        for i in range(design.m):
            xs += [ex[i, a], att[i, a], None]
            ys += [ex[i, b], att[i, b], None]
        fig.add_trace(go.Scatter(x=xs, y=ys, mode="lines", line=dict(color="#6b7b8c", width=1.5),
                                 name="cables at home", showlegend=show, legendgroup="c"), row=1, col=col)
        fig.add_trace(go.Scatter(x=ex[:, a], y=ex[:, b], mode="markers+text", text=design.cable_names,
                                 textposition="top center", marker=dict(color="#1f4e79", size=8, symbol="square"),
                                 name="exit points", showlegend=show, legendgroup="e"), row=1, col=col)
        if design.task.box_lower is not None:
            lo, hi = design.task.box_lower, design.task.box_upper
            fig.add_trace(go.Scatter(x=[lo[a], hi[a], hi[a], lo[a], lo[a]], y=[lo[b], lo[b], hi[b], hi[b], lo[b]],
                                     mode="lines", line=dict(color="#2e7d32", dash="dash"), name="task box",
                                     showlegend=show, legendgroup="t"), row=1, col=col)
        if design.task.points:
            pts = np.asarray(design.task.points, float)
            fig.add_trace(go.Scatter(x=pts[:, a], y=pts[:, b], mode="markers", marker=dict(color="#2e7d32", size=4),
                                     name="task points", showlegend=show, legendgroup="p"), row=1, col=col)
        for k, o in enumerate(design.frame.obstacles):
            fig.add_trace(go.Scatter(x=[o.lower[a], o.upper[a], o.upper[a], o.lower[a], o.lower[a]],
                                     y=[o.lower[b], o.lower[b], o.upper[b], o.upper[b], o.lower[b]], mode="lines",
                                     fill="toself", line=dict(color="#b26a00"), fillcolor="rgba(178,106,0,0.2)",
                                     name="obstacles", showlegend=show and k == 0, legendgroup="o"), row=1, col=col)
        fig.add_trace(go.Scatter(x=[home[a]], y=[home[b]], mode="markers", marker=dict(color="#c62828", size=9),
                                 name="home pose", showlegend=show, legendgroup="h"), row=1, col=col)
    fig.update_xaxes(title_text="x [m]", row=1, col=1)
    fig.update_yaxes(title_text="y [m]", scaleanchor="x", scaleratio=1, row=1, col=1)
    fig.update_xaxes(title_text="x [m]", row=1, col=2)
    fig.update_yaxes(title_text="z [m]", scaleanchor="x2", scaleratio=1, row=1, col=2)
    fig.update_layout(template="plotly_white", height=420, margin=dict(l=50, r=20, t=40, b=40),
                      legend=dict(orientation="h", y=-0.18))
    return fig


def _missing_part(key: str, title: str, module: str, what: str) -> Part:
    return Part(key=key, title=title, module=module, available=False,
                not_checked=(f"{what}: not checked ({module} is not installed).",))


def _module(name: str):
    """The module, or None when it is not installed (an ImportError inside it propagates)."""
    try:
        return import_module(name)
    except ModuleNotFoundError as exc:
        if exc.name == name:
            return None
        raise


def _stage_progress(progress: Progress) -> Callable[[str, int, int], None]:
    """Adapt ``progress(text)`` to the modules' ``progress(stage, done, total)``: once a stage."""
    seen: set[str] = set()

    def report(stage: str, done: int = 0, total: int = 0) -> None:
        if stage not in seen:
            seen.add(stage)
            progress(f"  {stage}")

    return report


# key, title, module, what the section covers, builder
def _analysis_parts():
    return [
        ("workspace", "Workspace: task-region coverage and tension margins", "cablekit.workspace",
         "task-region coverage, tension margins and interference", _workspace_part),
        ("drive", "Drivetrain, cables and stiffness", "cablekit.drive",
         "drum, gears, motor, encoder, rope and stiffness checks", _drive_part),
        ("accuracy", "Accuracy: predicted positioning error over the task region", "cablekit.accuracy",
         "positioning accuracy", _accuracy_part),
        ("arm", "Arm: reach and servo loads", "cablekit.arm", "arm reach and servo loads", _arm_part),
        ("suspended", "Suspended platform: real tilt under the arm and payload", "cablekit.suspended",
         "the platform's real tilt and the tool-tip error it causes", _suspended_part),
    ]


def _drive_part(key, title, mod, design, results, progress) -> Part:
    """Drivetrain sizing (cablekit.drive), stiffness and natural frequency (cablekit.stiffness),
    cable sag against the straight-cable model (cablekit.cables), on the workspace's feasible
    poses and tensions when there is a workspace result."""
    ws = results.get("workspace")
    drive = results.get("drive")
    if drive is None:
        drive = mod.size_drives(design, workspace=ws)
    summary = list(drive.summary())
    figures = [("Drivetrain and rope checks: share of each limit used, per winch (100 % = at the limit)",
                drive.figure())]
    q: list[Quantity] = []
    for r in drive.rows:
        src = "cablekit.drive.size_drives"
        q += [Quantity(f"winch_tension:{r.name}", "highest tension at the winch end", r.max_tension, r.max_tension,
                       "N", r.name, src),
              Quantity(f"motor_torque:{r.name}", "static motor torque at that tension", r.torque, r.torque, "N*m",
                       r.name, src),
              Quantity(f"brake_torque:{r.name}", "holding torque a brake must give (motor shaft)", r.brake_torque,
                       r.brake_torque, "N*m", r.name, src),
              Quantity(f"travel:{r.name}", "cable travel (longest - shortest length)", r.travel, r.travel, "m",
                       r.name, src)]
    eqs = list(module_equations(mod, design))
    not_checked = ["Drivetrain: rotor and drum inertia, gear backlash and the motor's thermal limits."]
    if ws is not None and np.any(ws.feasible):
        poses, tensions = ws.poses[ws.feasible], ws.tensions[ws.feasible]
    else:
        poses = tensions = None
    stiff_mod, cables_mod = _module("cablekit.stiffness"), _module("cablekit.cables")
    if stiff_mod is not None and hasattr(stiff_mod, "stiffness_map"):
        progress("  stiffness and natural frequency")
        st = stiff_mod.stiffness_map(design, poses=poses, tensions=tensions)
        summary += [""] + list(st.summary())
        figures.append(("Lowest natural frequency of the platform over the feasible task poses (winches locked)",
                        st.figure(color="frequency")))
        eqs += module_equations(stiff_mod, design)
        if np.any(st.valid):
            src = "cablekit.stiffness.stiffness_map"
            k, f, dn = st.min_stiffness[st.valid], st.frequency[st.valid], st.deflection_norm[st.valid]
            q += [Quantity("stiffness", "platform stiffness, weakest direction (lowest … median)", float(k.min()),
                           float(np.median(k)), "N/mm", source=src),
                  Quantity("natural_frequency", "lowest natural frequency (lowest … median)", float(f.min()),
                           float(np.median(f)), "Hz", source=src),
                  Quantity("deflection", f"largest deflection when the payload changes by {st.payload_change:g} kg",
                           float(dn.max()), float(dn.max()), "mm", source=src)]
        not_checked.append("Stiffness: drum, gear, pulley and frame compliance are not included (winches locked).")
    else:
        not_checked.append("Stiffness and natural frequency: not checked (cablekit.stiffness is not installed).")
    if cables_mod is not None and hasattr(cables_mod, "sag_map"):
        progress("  cable sag")
        sg = cables_mod.sag_map(design, poses=poses, tensions=tensions)
        summary += [""] + list(sg.summary())
        eqs += module_equations(cables_mod, design)
        if np.any(sg.valid):
            src = "cablekit.cables.sag_map"
            big = float(np.max(np.where(sg.valid, sg.sag, -np.inf)))
            q.append(Quantity("sag", "largest cable sag (elastic catenary)", big, big, "mm", source=src))
            n_flag = int(np.sum(sg.pose_flagged))
            q.append(Quantity("sag_flagged", "poses where sag changes a cable's length or direction beyond the "
                              "sag thresholds", n_flag, n_flag, "poses", source=src))
            if n_flag:
                not_checked.append(f"Sag: at {n_flag} of {len(sg.poses)} poses the sag changes a cable's length or "
                                   "direction beyond the sag thresholds; the straight-cable results (lengths, "
                                   "counts, tensions) are approximate there.")
    else:
        not_checked.append("Cable sag: not checked (cablekit.cables has no sag model installed).")
    return Part(key=key, title=title, module=mod.__name__, available=True, summary=tuple(summary),
                figures=tuple(figures), quantities=tuple(q), equations=tuple(eqs), not_checked=tuple(not_checked))


def _workspace_part(key, title, mod, design, results, progress) -> Part:
    ws = results.get("workspace")
    if ws is None:
        stage = _stage_progress(progress)
        ws = mod.compute_workspace(design, progress=lambda done, total: stage(f"{total:,} poses"))
    src = "cablekit.workspace.compute_workspace"
    q = [Quantity("coverage", "task positions covered (every orientation feasible)", 100 * ws.coverage,
                  100 * ws.coverage, "%", source=src)]
    if ws.box_lower is not None:
        q.append(Quantity("feasible_volume", "feasible share of the task box volume", ws.feasible_volume,
                          ws.feasible_volume, "m^3", source=src))
    if np.any(ws.feasible):
        least = float(np.min(ws.margin[ws.feasible]))
        q.append(Quantity("least_margin", "least tension margin on feasible poses", least, least, "N", source=src))
    if np.any(np.isfinite(ws.clearance)):
        gap = float(np.min(ws.clearance))
        q.append(Quantity("least_clearance", "least gap between cables", gap, gap, "mm", source=src))
    figures = [("Task-region coverage: each position coloured by its status (worst orientation)",
                ws.figure("scatter"))]
    if ws.axes is not None:
        figures.append(("Least tension margin on horizontal slices of the task box (negative: infeasible)",
                        ws.figure("slices")))
    eqs = module_equations(mod, design) or (
        ("tension margin", r"s^{*} = \max s \quad\text{such that}\quad W\mathbf{t} + \mathbf{w} = 0,\;"
                           r"t_{min} + s \le t_i \le t_{max} - s"),)
    return Part(key=key, title=title, module=mod.__name__, available=True, summary=tuple(ws.summary()),
                figures=tuple(figures), quantities=tuple(q), equations=eqs, options={"workspace": ws})


_ACCURACY_EQUATIONS = (
    ("first-order propagation", r"\delta\mathbf{q} = J^{+} \left(\delta\mathbf{L} - J_a\,\delta\mathbf{a}\right),"
                                r"\quad J = \frac{\partial \mathbf{L}}{\partial \mathbf{q}}"),
    ("rectangular error of half-width a (GUM 4.3.7)", r"u = \frac{a}{\sqrt{3}}"),
)


def _accuracy_part(key, title, mod, design, results, progress) -> Part:
    res = results.get("accuracy")
    if res is None:
        res = mod.accuracy_map(design, progress=_stage_progress(progress))
    feas = np.asarray(res.feasible, bool)
    q: list[Quantity] = []
    if np.any(feas):
        worst, _ = res.worst_p95()
        p95 = np.asarray(res.p95_position, float)[feas]
        step = np.asarray(res.step, float)[feas]
        src = "cablekit.accuracy.accuracy_map"
        q += [Quantity("accuracy_p95", "95 % position error over sampled builds (median … worst)",
                       float(np.median(p95)), float(worst), "mm", source=src),
              Quantity("accuracy_worst_case", "worst-case position bound (largest)",
                       float(np.nanmax(np.asarray(res.worst_position)[feas])),
                       float(np.nanmax(np.asarray(res.worst_position)[feas])), "mm", source=src),
              Quantity("motion_step", "encoder resolution at the platform: move from one count (median … largest)",
                       float(np.median(step)), float(np.max(step)), "mm", source=src),
              Quantity("repeatability_3sigma", "random error, 3 sigma (largest)",
                       float(np.nanmax(np.asarray(res.random_3sigma)[feas])),
                       float(np.nanmax(np.asarray(res.random_3sigma)[feas])), "mm", source=src)]
    not_checked = []
    if not res.sag_modelled:
        not_checked.append("Accuracy: cable sag not modelled (straight cables).")
    if res.budget.required_accuracy is None:
        not_checked.append("Accuracy: no required accuracy in the design's [errors] table, so the predicted error "
                           "is shown but not judged.")
    eqs = module_equations(mod, design) or _ACCURACY_EQUATIONS
    return Part(key=key, title=title, module=mod.__name__, available=True, summary=tuple(res.summary()),
                figures=(("Accuracy map over the task region", res.figure()),), quantities=tuple(q),
                equations=eqs, not_checked=tuple(not_checked), options={"accuracy": res})


def _arm_part(key, title, mod, design, results, progress) -> Part:
    arm = design.sections.get("arm")
    if arm is None:
        return Part(key=key, title=title, module=mod.__name__, available=True,
                    summary=("This design has no [arm] section: no arm to check.",))
    r = results.get("arm_reach")
    if r is None:
        r = mod.reach(arm, gravity=design.gravity)
    q = [Quantity("arm_mass", "arm: links, gripper (and its own payload)", arm.total_mass, arm.total_mass, "kg",
                  source="cablekit.arm.Arm.total_mass")]
    for k, j in enumerate(arm.joints):
        unit = "N*m" if j.revolute else "N"
        q.append(Quantity(f"arm_servo_load:{j.name}", f"arm joint {j.name}: peak static servo load, payload held",
                          float(r.peak_load[k]), float(r.peak_load[k]), unit, source="cablekit.arm.reach"))
    return Part(key=key, title=title, module=mod.__name__, available=True, summary=tuple(r.summary()),
                figures=(("Arm reach (platform frame, level), coloured by the most loaded servo's use",
                          r.figure(color="servo")),),
                quantities=tuple(q), equations=module_equations(mod, design), options={"arm_reach": r})


def _suspended_part(key, title, mod, design, results, progress) -> Part:
    """The real tilt of a point platform (cablekit.suspended): summary, figure, equations."""
    if not mod.tilt_matters(design):
        why = ("a rigid platform is held in orientation by its cables" if design.platform.kind != "point" else
               "no arm and the centre of mass below the point where the cables meet: nothing tilts the platform")
        return Part(key=key, title=title, module=mod.__name__, available=True, summary=(f"Not needed: {why}.",))
    res = results.get("suspended")
    if res is None:
        progress("  real platform tilt over the arm's reach")
        res = mod.design_poses(design)
    k = res.worst
    tilt = math.degrees(float(res.tilt.max()))
    q = [Quantity("suspended_tilt", "largest real platform tilt (arm reaching out)", tilt, tilt, "deg",
                  source="cablekit.suspended.design_poses"),
         Quantity("suspended_tip_error", "largest tool-tip error from that tilt", 1e3 * float(res.tip_error[k]),
                  1e3 * float(res.tip_error[k]), "mm", source="cablekit.suspended.design_poses")]
    return Part(key=key, title=title, module=mod.__name__, available=True, summary=tuple(res.summary()),
                figures=(("Real platform tilt and tool-tip error at the poses checked", res.figure()),),
                quantities=tuple(q), equations=module_equations(mod, design),
                not_checked=("The real tilt is found at the task box's centre, corners and home, with the arm at its "
                             "home, limits and 45 deg steps; moves between task targets are not checked for tilt.",),
                options={"suspended": res})


# ======================================================================================
# building the sheet
# ======================================================================================
def build_review(design, *, source_path=None, date: str | None = None, results: Mapping[str, Any] | None = None,
                 progress: Progress | None = None) -> ReviewSheet:
    """Build the design-review sheet of ``design``.

    Parameters
    ----------
    design : Design
        A validated design (see :func:`cablekit.design.load_design`).
    source_path : str or Path, optional
        The design file the sheet names (shown as given; nothing is read from it).
    date : str, optional
        The date printed on the sheet (``YYYY-MM-DD``); default today.  The date is the only
        part of the sheet that changes between builds of the same design.
    results : mapping, optional
        Result objects already computed for this design, by the option name
        :func:`~cablekit.checks.run_all` passes them under (``"workspace"``, ``"drive"``,
        ``"accuracy"``, ``"arm_reach"``, ``"suspended"``); reused instead of computed again (the dashboard
        passes what it already shows).  They must belong to ``design``.
    progress : callable, optional
        Called with a short text before each long step.

    Returns
    -------
    ReviewSheet
        The HTML, the checks, the overall status and the derived quantities.
    """
    progress = progress or (lambda msg: None)
    date = date or datetime.date.today().isoformat()
    results = dict(results or {})
    parts, missing = [], []
    for key, title, module, what, builder in _analysis_parts():
        mod = _module(module)
        if mod is None:
            parts.append(_missing_part(key, title, module, what))
            missing.append(module)
            continue
        progress(title.split(":")[0].lower())
        part = builder(key, title, mod, design, results, progress)
        parts.append(part)
        results.update(part.options)
    parts.insert(0, _rig_part(design, results, progress))  # uses the workspace's tensions when there
    progress("design checks")
    checks = tuple(run_all(design, **results))
    status = worst_status(checks)
    digest = content_hash(design)
    quantities = tuple(q for p in parts for q in p.quantities)
    doc = _render(design, parts=parts, checks=checks, status=status, missing=missing, digest=digest, date=date,
                  source_path=source_path)
    return ReviewSheet(html=doc, checks=checks, status=status, parts=tuple(parts), quantities=quantities,
                       missing=tuple(missing), content_hash=digest, date=date)


# ======================================================================================
# rendering
# ======================================================================================
_CSS = """
:root { --pass:#1b6e2d; --warn:#8a5a00; --fail:#b3261e; --ink:#1d2733; --muted:#5b6773; --rule:#c9d1d9; }
* { box-sizing: border-box; }
body { font-family: "DejaVu Sans", "Liberation Sans", Arial, sans-serif; color: var(--ink); margin: 0 auto;
       max-width: 190mm; padding: 12mm 8mm; font-size: 10.5pt; line-height: 1.4; }
h1 { font-size: 18pt; margin: 0 0 4pt 0; }
h2 { font-size: 13.5pt; border-bottom: 2px solid var(--ink); padding-bottom: 2pt; margin-top: 18pt; }
h3 { font-size: 11.5pt; margin: 12pt 0 4pt 0; }
p, li { margin: 3pt 0; }
table { border-collapse: collapse; width: 100%; margin: 4pt 0 8pt 0; font-size: 9pt; }
th, td { border: 1px solid var(--rule); padding: 2pt 4pt; text-align: left; vertical-align: top; }
thead th { background: #eef2f6; }
table.checks td:nth-child(n+4):nth-child(-n+6) { white-space: nowrap; }
table.checks td:nth-child(3) { width: 24%; }
table.checks .source { font-size: 8pt; color: var(--muted); margin-top: 2pt; }
table.practice .source { font-size: 8pt; }
table.kv th { width: 38%; font-weight: normal; color: var(--muted); background: none; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
.meta { color: var(--muted); font-size: 9pt; }
.status { display: inline-block; font-weight: bold; padding: 0 4pt; border-radius: 3px; color: #fff; }
.status.pass { background: var(--pass); } .status.warn { background: var(--warn); }
.status.fail { background: var(--fail); } .status.none { background: var(--muted); }
tr.fail td { background: #fbe9e7; } tr.warn td { background: #fff4e0; }
.banner { border: 3px solid var(--ink); padding: 6pt 8pt; margin: 8pt 0; }
.banner.pass { border-color: var(--pass); } .banner.warn { border-color: var(--warn); }
.banner.fail { border-color: var(--fail); }
.banner .big { font-size: 15pt; font-weight: bold; }
.notchecked { border-left: 4px solid var(--warn); padding: 2pt 6pt; background: #fff8ec; }
.caution { border: 2px solid var(--fail); padding: 4pt 8pt; }
.figure { margin: 6pt 0 10pt 0; break-inside: avoid; page-break-inside: avoid; }
.figure .caption { font-size: 9pt; color: var(--muted); }
.figure .title { font-weight: bold; font-size: 10pt; }
.eq { margin: 4pt 0 8pt 0; break-inside: avoid; page-break-inside: avoid; }
.eq .name { font-weight: bold; font-size: 9.5pt; }
.eq .math { overflow-x: auto; padding: 2pt 0; }
.eq.long .math { font-size: 7pt; }
.eq code { display: block; font-size: 7.5pt; color: var(--muted); white-space: pre-wrap; word-break: break-all; }
math { font-family: "DejaVu Math TeX Gyre", math; }
math .bf { font-weight: bold; }
pre { font-size: 8.5pt; background: #f5f7f9; padding: 4pt; white-space: pre-wrap; }
.sign td { height: 26pt; }
.modebar, .modebar-container { display: none !important; }
footer { margin-top: 16pt; border-top: 1px solid var(--rule); padding-top: 4pt; }
@page { size: A4; margin: 12mm 10mm; }
@media print {
  body { padding: 0; max-width: none; }
  h2 { break-after: avoid; page-break-after: avoid; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  .eq .math { overflow: visible; }
  .sign { break-inside: avoid; page-break-inside: avoid; }
}
"""

# Every plot is stored as plotly JSON beside its <div> and drawn by this one script.  WebGL
# plots (3-D scatter, surfaces, scattergl) print blank, so when the page is opened for
# printing (address ending in #print, as render_pdf does) they are drawn as PNG images
# (Plotly.toImage) instead.  body[data-plots] becomes "ready" (or "failed") when every plot
# is drawn, for a printer or a test to wait on.
_PLOT_SCRIPT = """
(function () {
  var GL = /(3d|gl)$|^(surface|cone|streamtube|volume|isosurface|splom|parcoords)$/;
  var printing = location.hash === "#print";
  var config = {displayModeBar: false, responsive: false};
  var jobs = [];
  document.querySelectorAll("div.plot").forEach(function (div) {
    var fig = JSON.parse(document.getElementById(div.id + "-data").textContent);
    var layout = fig.layout || {};
    var webgl = (fig.data || []).some(function (t) { return GL.test(t.type || "scatter"); });
    if (printing && webgl) {
      jobs.push(Plotly.toImage({data: fig.data, layout: layout, config: config},
                               {format: "png", width: layout.width, height: layout.height, scale: 2})
        .then(function (url) {
          var img = document.createElement("img");
          img.src = url; img.alt = "the plot, drawn as an image for printing"; img.style.width = layout.width + "px";
          div.appendChild(img);
        }));
    } else {
      jobs.push(Plotly.newPlot(div, fig.data, layout, config));
    }
  });
  Promise.all(jobs).then(function () { document.body.setAttribute("data-plots", "ready"); },
                         function (err) { document.body.setAttribute("data-plots", "failed"); throw err; });
})();
"""

_STATUS_TEXT = {PASS: "PASS", WARN: "WARN", FAIL: "FAIL"}
_FIG_WIDTH = 640  # px: fits the sheet column and an A4 page between the margins


def _badge(status: str) -> str:
    return f'<span class="status {status}">{_STATUS_TEXT.get(status, status.upper())}</span>'


def _figure_html(fig, div_id: str) -> tuple[str, str]:
    """A plot's ``<div>`` with its plotly JSON (drawn by :data:`_PLOT_SCRIPT`), and its title,
    moved out of the plot so that a long title wraps in the page instead of being cut."""
    import plotly.graph_objects as go
    import plotly.io as pio

    fig = go.Figure(fig)  # a copy: never change the caller's figure
    title = fig.layout.title.text or ""
    if title:
        fig.update_layout(title_text="")
        if fig.layout.margin.t is None or fig.layout.margin.t > 40:
            fig.update_layout(margin_t=40)
    width = fig.layout.width
    fig.update_layout(width=min(int(width), _FIG_WIDTH) if width else _FIG_WIDTH)
    if not fig.layout.height:
        fig.update_layout(height=420)
    spec = pio.to_json(fig, validate=False).replace("</", "<\\/")  # never end the <script> early
    div = (f'<div id="{div_id}" class="plot" style="width:{fig.layout.width}px; height:{fig.layout.height}px">'
           f'</div>\n<script type="application/json" id="{div_id}-data">{spec}</script>')
    return div, title


def _render(design, *, parts, checks, status, missing, digest, date, source_path) -> str:
    from plotly.offline import get_plotlyjs

    meta = design.meta
    body = [_render_header(design, checks=checks, status=status, missing=missing, digest=digest, date=date,
                           source_path=source_path)]
    body.append(_section("scenario", "1. Scenario and job", _kv([
        ("rig", _h(meta.name)), ("scenario", _h(meta.scenario or "(not given)")),
        ("job the rig must do", _h(meta.job or "(not given)"))] + ([("notes", _h(meta.notes))] if meta.notes else []))))
    if design.sections.get("sweep") is not None:  # written by 'cablekit best' from a sweep
        body.append(_section("chosen", "1a. How this design was chosen", _render_chosen(design.sections["sweep"])))
    body.append(_section("inputs", "2. Inputs", _render_inputs(design)))
    body.append(_section("derived", "3. Derived quantities", _render_quantities(design, parts)))
    body.append(_section("checks", "4. Checks", _render_checks(checks, parts)))
    body.append(_section("plots", "5. Plots and module results", _render_parts(parts)))
    body.append(_section("equations", "6. Equations used", _render_equations(design, parts)))
    body.append(_section("practice", "7. Common-practice values in force", _render_practice(design, checks)))
    body.append(_section("assumptions", "8. Assumptions and what was not checked", _render_assumptions(design, parts)))
    body.append(_section("safety", "9. Safety", _render_cautions()))
    body.append(_section("signoff", "10. Sign-off", _render_signoff(digest, date)))
    body.append(f'<footer class="meta">cablekit {_h(__version__)} · design {digest[:16]} · '
                f'<span class="date">{_h(date)}</span></footer>')
    title = f"Design review: {meta.name}"
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            f"<title>{_h(title)}</title>\n<meta name=\"generator\" content=\"cablekit {_h(__version__)}\">\n"
            f"<style>{_CSS}</style>\n<script>{get_plotlyjs()}</script>\n</head>\n<body>\n"
            + "\n".join(body) + f"\n<script>{_PLOT_SCRIPT}</script>\n</body>\n</html>\n")


def _section(anchor: str, title: str, content: str) -> str:
    return f'<section id="{anchor}">\n<h2>{_h(title)}</h2>\n{content}\n</section>'


def _render_header(design, *, checks, status, missing, digest, date, source_path) -> str:
    n = len(checks)
    fails = [(k, c) for k, c in enumerate(checks, start=1) if c.status == FAIL]
    warns = [(k, c) for k, c in enumerate(checks, start=1) if c.status == WARN]
    if n == 0:
        headline, cls = "NO CHECKS RAN", "none"
    elif fails:
        headline, cls = f"FAIL: {len(fails)} of {n} checks fail", FAIL
    elif warns:
        headline, cls = f"PASS WITH WARNINGS: {len(warns)} of {n} checks warn", WARN
    else:
        headline, cls = f"PASS: all {n} checks pass", PASS
    lines = [f'<div class="banner {cls}" id="overall" data-status="{status}"><div class="big">{_h(headline)}</div>']
    if fails:
        lines.append("<p><b>What fails and why:</b></p><ul>")
        lines += [f"<li>{_check_sentence(c, k)}</li>" for k, c in fails]
        lines.append("</ul>")
    if warns:
        lines.append("<p><b>Warnings:</b></p><ul>")
        lines += [f"<li>{_check_sentence(c, k)}</li>" for k, c in warns]
        lines.append("</ul>")
    if missing:
        lines.append(f'<p class="notchecked"><b>Incomplete:</b> not checked because the module is not installed: '
                     f'{_h(", ".join(missing))}.</p>')
    lines.append("</div>")
    src = _h(str(source_path)) if source_path else "(built in memory)"
    info = _kv([("design file", f"<code>{src}</code>"), ("design content hash (SHA-256)", f"<code>{digest}</code>"),
                ("cablekit version", _h(__version__)), ("date", f'<span class="date">{_h(date)}</span>')])
    return (f"<header>\n<h1>Design review: {_h(design.meta.name)}</h1>\n"
            f'<p class="meta">A design-review sheet written by cablekit. Check it, then sign it in section 10.</p>\n'
            + "\n".join(lines) + "\n" + info + "\n</header>")


def check_line(c: Check) -> str:
    """One plain-text line for a check: status, title, subject, value against limit, reason."""
    u = f" {_unit(c.unit)}" if _unit(c.unit) else ""
    line = (f"{c.status.upper()} {c.title} ({c.subject}): {_num(c.value)}{u} against the limit {_num(c.limit)}{u}"
            + (f" - {c.detail}" if c.detail else ""))
    return line.replace("−", "-")  # plain ASCII minus for terminals and scripts


def _check_sentence(c: Check, k: int) -> str:
    """One line for the banner: what, where, value against limit, and why (the source is in the table)."""
    u = f" {_h(_unit(c.unit))}" if _unit(c.unit) else ""
    text = (f"{_badge(c.status)} <b>{_h(c.title)}</b> ({_h(c.subject)}): {_num(c.value)}{u} against "
            f"the limit {_num(c.limit)}{u}, margin {_num(c.margin)}{u}")
    return text + (f". {_h(c.detail)}" if c.detail else "") + f' <a href="#check-{k}">(check {k})</a>'


# -- inputs -----------------------------------------------------------------------------
def _render_inputs(design) -> str:
    d = design
    out = []
    out.append("<h3>Frame and exit points</h3>")
    out.append(_kv([("gravity", f"{_num(d.frame.g)} m/s² along {_vec(d.frame.gravity_direction, '')}"),
                    ("number of cables", str(d.m))]))
    rows = []
    for e in d.frame.exits:
        rows.append([_h(e.name)] + [f'<span class="num">{_num(v)}</span>' for v in e.position]
                    + [_num(e.pulley_diameter * 1e3) if e.pulley_diameter else "eyelet",
                       _num(e.drum_distance) if e.drum_distance else "not given",
                       _num(e.home_length) if e.home_length is not None else "from the home pose"])
    out.append(_table(["cable", "x [m]", "y [m]", "z [m]", "pulley diameter [mm]", "drum to exit [m]",
                       "home length [m]"], rows))
    if d.frame.obstacles:
        out.append("<h3>Obstacles</h3>")
        out.append(_table(["name", "lower corner [m]", "upper corner [m]"],
                          [[_h(o.name), _vec(o.lower, "m"), _vec(o.upper, "m")] for o in d.frame.obstacles]))
    p = d.platform
    out.append("<h3>Platform and payload</h3>")
    prow = [("kind", f"{_h(p.kind)} ({p.dof} degrees of freedom)"), ("platform mass", _si(p.mass, "kg")),
            ("platform centre of mass", _vec(p.center_of_mass, "mm"))]
    if p.kind == "rigid":
        prow += [("inertia about the centre of mass", _vec(p.inertia, "kg*m^2")),
                 ("body half-size", _vec(p.body_half_size, "mm"))]
    prow += [("payload", f"{_h(d.payload.name)}: {_si(d.payload.mass, 'kg')}"),
             ("payload centre of mass", _vec(d.payload.center_of_mass, "mm")),
             ("total moving mass", _si(d.total_mass, "kg"))]
    out.append(_kv(prow))
    if p.kind == "rigid":
        out.append(_table(["cable", "attachment in the platform frame [mm]"],
                          [[_h(n), _vec(a, "mm")] for n, a in zip(d.cable_names, p.attachments)]))
    elif p.built_attachments:  # a point platform's stated attachments (cablekit.suspended)
        out.append(_table(["cable", "attachment as built, platform frame [mm]"],
                          [[_h(n), _vec(a, "mm")] for n, a in zip(d.cable_names, p.built_attachments)]))
    c = d.cable
    out.append("<h3>Cable</h3>")
    out.append(_kv([("construction", _h(c.construction or "(not given)")), ("diameter", _si(c.diameter, "mm")),
                    ("minimum breaking force", _si(c.breaking_force, "kN")),
                    ("axial stiffness EA", _si(c.axial_stiffness, "kN")),
                    ("mass per length", _si(c.mass_per_length, "kg/m")),
                    ("least taut tension", _si(c.min_tension, "N")),
                    ("use class", "load may hang over people" if c.use_class == "over_people" else "general")]
                   + ([("stated tension limit (max_tension)", _si(c.max_tension, "N"))] if c.max_tension else [])))
    own = [[_h(e.name), _si(e.min_tension, "N") if e.min_tension is not None else "shared",
            _si(e.max_tension, "N") if e.max_tension is not None else "shared"]
           for e in d.frame.exits if e.min_tension is not None or e.max_tension is not None]
    if own:
        out.append(_table(["cable", "own least taut tension", "own stated tension limit"], own))
    out.append("<h3>Winches</h3>")
    shared = all(w == d.winches[0] for w in d.winches)
    winches = [d.winches[0]] if shared else list(d.winches)
    heads = ["quantity", "every winch"] if shared else ["quantity"] + d.cable_names
    labels = [("drum diameter", lambda w: _si(w.drum_diameter, "mm")),
              ("drum width", lambda w: _si(w.drum_width, "mm")),
              ("flange diameter", lambda w: _si(w.flange_diameter, "mm") if w.flange_diameter else "not given"),
              ("drum grooved", lambda w: "yes" if w.grooved else "no"),
              ("gear ratio (motor turns per drum turn)", lambda w: _num(w.gear_ratio)),
              ("gear efficiency", lambda w: _num(w.efficiency)),
              ("encoder lines per motor turn", lambda w: str(w.encoder_lines)),
              ("decoding (counts per line)", lambda w: f"x{w.decoding}"),
              ("controller deadband", lambda w: (f"+/- {_num(w.deadband_counts)} counts" if w.deadband_definition
                                                  == "plus_minus" else f"{_num(w.deadband_counts)} counts wide")
               + f" (motion step {_num(w.step_counts)} counts)"),
              ("count-rate limit", lambda w: _si(w.count_rate_limit, "kHz")),
              ("motor rated torque", lambda w: _si(w.motor_rated_torque, "N*m")),
              ("motor peak torque", lambda w: _si(w.motor_peak_torque, "N*m")),
              ("motor rated speed", lambda w: _si(w.motor_rated_speed, "rpm")),
              ("holding brake", lambda w: f"yes, holds {_si(w.brake_holding_torque, 'N*m')} at the motor shaft"
               if w.brake else "<b>no</b>" + (" (drive declared self-locking)" if w.self_locking else "")),
              ("dead wraps", lambda w: _num(w.dead_wraps))]
    out.append(_table(heads, [[_h(lab)] + [f(w) for w in winches] for lab, f in labels]))
    t = d.task
    out.append("<h3>Task</h3>")
    trow = []
    if t.box_lower is not None:
        trow += [("task box, lower corner", _vec(t.box_lower, "m")), ("task box, upper corner", _vec(t.box_upper, "m"))]
    if t.points:
        trow.append(("task points", f"{len(t.points)}: " + "; ".join(_vec(pt, "m") for pt in t.points[:12])
                     + (" …" if len(t.points) > 12 else "")))
    if d.dof == 6:
        trow.append(("orientations (roll, pitch, yaw)", "; ".join(_vec(o, "deg") for o in t.orientations)
                     or "none listed: the range below"))
        if t.orientation_range is not None:
            trow.append(("orientation range (roll; pitch; yaw)", "; ".join(_vec(r, "deg") for r in t.orientation_range)
                         + f", {t.orientation_samples} values per angle, every combination"))
    trow += [("grid step", _si(t.step, "mm")),
             ("highest speed", _si(t.speed, "m/s") if t.speed else "not given"),
             ("highest acceleration", _si(t.acceleration, "m/s^2") if t.acceleration
              else "not given")]
    if any(t.wrench_box):
        trow.append(("task wrench box (± half-widths)", _vec(t.wrench_box[:3], "N") + "; "
                     + _vec(t.wrench_box[3:], "N*m")))
    home = d.home_pose
    trow.append(("home pose", _vec(home[:3], "m") + ("; " + _vec(home[3:], "deg") if d.dof == 6 else "")))
    out.append(_kv(trow))
    if d.raw_sections:
        import tomli_w

        for name, raw in d.raw_sections.items():
            out.append(f"<h3>[{_h(name)}] section (as written in the design file)</h3>")
            out.append(f"<pre>{_h(tomli_w.dumps({name: raw}))}</pre>")
    return "\n".join(out)


# -- derived quantities -------------------------------------------------------------------
def _render_quantities(design, parts) -> str:
    names = design.cable_names
    rig_wide = [q for p in parts for q in p.quantities if q.cable is None]
    per_cable = [q for p in parts for q in p.quantities if q.cable is not None]
    out = []
    if rig_wide:
        rows = [[_h(q.label), f'<span data-key="{_h(q.key)}">{q.display()}</span>', _h(_unit(q.unit)),
                 f'<span class="meta">{_h(q.source)}</span>'] for q in rig_wide]
        out.append(_table(["quantity", "value", "unit", "computed by"], rows))
    if per_cable:
        kinds: dict[str, tuple[str, str]] = {}
        for q in per_cable:
            kinds.setdefault(q.key.split(":", 1)[0], (q.label, q.unit))
        by_key = {q.key: q for q in per_cable}
        rows = []
        for kind, (label, unit) in kinds.items():
            cells = [f"{_h(label)} [{_h(_unit(unit))}]"]
            for n in names:
                q = by_key.get(f"{kind}:{n}")
                cells.append(f'<span data-key="{_h(q.key)}">{q.display()}</span>' if q else "–")
            rows.append(cells)
        out.append(_table(["per cable"] + names, rows, cls="percable"))
        sources = sorted({q.source for q in per_cable})
        out.append(f'<p class="meta">Computed by: {_h("; ".join(sources))}.</p>')
    return "\n".join(out)


# -- checks ---------------------------------------------------------------------------------
def _render_checks(checks, parts) -> str:
    if not checks:
        return ('<p class="notchecked"><b>No checks ran.</b> None of the modules that own checks is installed; '
                "see section 8.</p>")
    counts = {s: sum(1 for c in checks if c.status == s) for s in (PASS, WARN, FAIL)}
    out = [f"<p>{len(checks)} checks: {counts[PASS]} pass, {counts[WARN]} warn, {counts[FAIL]} fail. "
           "Margin is the distance from the limit in the check's unit, positive on the safe side.</p>"]
    rows, attrs = [], []
    for k, c in enumerate(checks, start=1):
        unit = f" {_h(_unit(c.unit))}" if _unit(c.unit) else ""
        why = f'<div class="detail">{_h(c.detail)}</div>' if c.detail else ""
        rows.append([str(k), _badge(c.status), f'<b>{_h(c.title)}</b><div class="meta">{_h(c.subject)}</div>',
                     f'<span class="num">{_num(c.value)}</span>{unit}', f'<span class="num">{_num(c.limit)}</span>{unit}',
                     f'<span class="num">{_num(c.margin)}</span>{unit}',
                     f'{why}<div class="source">source: {_h(c.source)}</div>'])
        attrs.append(f'id="check-{k}" class="{c.status}" data-key="{_h(c.key)}" data-status="{c.status}"')
    out.append(_table(["#", "status", "check", "value", "limit", "margin", "reason and source of the limit"],
                      rows, cls="checks", row_attrs=attrs))
    return "\n".join(out)


# -- module sections --------------------------------------------------------------------------
def _render_parts(parts) -> str:
    out = ['<p class="meta">The plots are interactive on screen (hover for values). 3-D plots print from a browser '
           "when the address ends in <code>#print</code>; <code>cablekit review --pdf</code> does this itself.</p>"]
    for p in parts:
        out.append(f'<h3 id="part-{p.key}">{_h(p.title)}</h3>')
        if not p.available:
            out.append(f'<p class="notchecked"><b>Not checked.</b> {_h(" ".join(p.not_checked))}</p>')
            continue
        if p.summary:
            out.append('<pre class="summary">' + _h("\n".join(p.summary)) + "</pre>")
        for k, (caption, fig) in enumerate(p.figures, start=1):
            plot, title = _figure_html(fig, f"fig-{p.key}-{k}")
            head = f'<div class="title">{_h(title)}</div>' if title else ""
            out.append(f'<div class="figure">{head}{plot}'
                       f'<div class="caption">Figure {p.key}-{k}: {_h(caption)}</div></div>')
        if p.not_checked:
            out.append('<p class="notchecked">Not covered here: ' + _h(" ".join(p.not_checked)) + "</p>")
    return "\n".join(out)


# -- equations ----------------------------------------------------------------------------------
def _render_equations(design, parts) -> str:
    from .symbolic import latex_equations

    groups = [("Cable kinematics and statics (cablekit.symbolic)", list(latex_equations(design.platform.kind).items()))]
    groups += [(p.title, list(p.equations)) for p in parts if p.equations]
    out = ["<p>Equations as derived by the library (LaTeX source under each). Symbols: <i>a</i> exit point, "
           "<i>b</i> attachment in the platform frame, <i>p</i> platform position, <i>R</i> its orientation, "
           "<i>t</i> cable tensions, <i>W</i> structure matrix.</p>"]
    for title, eqs in groups:
        out.append(f"<h3>{_h(title)}</h3>")
        for name, latex in eqs:
            shown = _typeset_part(latex)
            try:
                math_html = latex_to_mathml(shown) if shown else '<span class="meta">(too long to typeset: ' \
                                                                 "see the LaTeX source)</span>"
            except LatexError as exc:
                math_html = f'<span class="meta">(shown as LaTeX: {_h(exc)})</span>'
            cls = "eq long" if len(shown or "") > 240 else "eq"
            out.append(f'<div class="{cls}"><div class="name">{_h(name)}</div><div class="math">{math_html}</div>'
                       f"<code>{_h(latex)}</code></div>")
    return "\n".join(out)


_COMMAND = re.compile(r"\\([A-Za-z]+)")
_LONG_EQUATION = 900  # characters of LaTeX beyond which a typeset equation no longer fits an A4 line


def _split_top_level(latex: str, sep: str = "=") -> list[str]:
    """Split ``latex`` at ``sep`` outside braces and ``\\left..\\right`` pairs."""
    parts, depth, start, k = [], 0, 0, 0
    while k < len(latex):
        command = _COMMAND.match(latex, k)
        if command:
            depth += {"left": 1, "begin": 1, "right": -1, "end": -1}.get(command.group(1), 0)
            k = command.end()
            continue
        if latex[k] == "\\":
            k += 2  # an escaped character such as \{ or \,
            continue
        if latex[k] == "{":
            depth += 1
        elif latex[k] == "}":
            depth -= 1
        elif latex[k] == sep and depth == 0:
            parts.append(latex[start:k])
            start = k + 1
        k += 1
    parts.append(latex[start:])
    return parts


def _typeset_part(latex: str) -> str | None:
    """What to typeset of an equation: all of it, or for a very long one its short left part
    (``L_i = ||l_i|| = <expanded>`` -> ``L_i = ||l_i|| = (expanded...)``); ``None`` when even
    that is too long.  The full LaTeX is always printed under the equation."""
    if len(latex) <= _LONG_EQUATION:
        return latex
    parts = _split_top_level(latex)
    head = "=".join(parts[:-1]).strip()
    if len(parts) >= 2 and head and len(head) <= _LONG_EQUATION:
        return head + r" = \text{(expanded: see the LaTeX source below)}"
    return None


# -- practice -------------------------------------------------------------------------------------
_PRACTICE_UNITS = {"angle": "deg", "length": "mm", "dimensionless": ""}


def _render_practice(design, checks) -> str:
    from .practice import PRACTICE, practice_value
    from .units import to_unit

    rows = []
    for key, e in PRACTICE.items():
        unit = _PRACTICE_UNITS.get(e.dimension, "")
        val = practice_value(key, design.practice)
        shown = to_unit(val, unit) if unit else val
        default = to_unit(e.value, unit) if unit else e.value
        over = key in design.practice
        cited = sorted({c.title for c in checks if e.source in c.source})
        rows.append([f"<code>{_h(key)}</code>", _h(e.label), f"<b>{_num(shown)}</b> {_h(unit)}",
                     (f"design file (default {_num(default)})" if over else "default"),
                     _h("; ".join(cited)) if cited else ("(the design file's value)" if over else "–"),
                     f'<span class="source">{_h(e.source)}</span>'])
    return ("<p>The one table of common-practice defaults, with the value in force for this design and the checks "
            "whose stated source cites the entry. A design file overrides an entry in its <code>[practice]</code> "
            "table; local codes win over every default here.</p>"
            + _table(["key", "what", "value in force", "from", "cited by the checks", "source"], rows, cls="practice"))


# -- assumptions, cautions, sign-off ----------------------------------------------------------------
def _render_assumptions(design, parts) -> str:
    from .commands.check import summary_lines

    _, warnings = summary_lines(design)
    own = run_assumptions(design, **{k: v for p in parts if p.available for k, v in p.options.items()})
    out = ["<h3>Assumptions</h3><ul>" + "".join(f"<li>{_h(a)}</li>" for a in ASSUMPTIONS) + "</ul>"]
    if own:
        out.append("<h3>Assumptions the verdicts on this design rest on</h3><ul>"
                   + "".join(f"<li>{_h(a)}</li>" for a in own) + "</ul>")
    missing = [p for p in parts if not p.available]
    notes = [n for p in parts if p.available for n in p.not_checked]
    out.append("<h3>Not checked</h3><ul>")
    for p in missing:
        out.append(f'<li class="notchecked"><b>{_h(p.title)}</b>: {_h(" ".join(p.not_checked))}</li>')
    out += [f"<li>{_h(n)}</li>" for n in notes]
    out += [f"<li>{_h(n)}</li>" for n in NOT_CHECKED]
    out.append("</ul>")
    if warnings:
        out.append("<h3>Notes on this design</h3><ul>" + "".join(f"<li>{_h(w)}</li>" for w in warnings) + "</ul>")
    return "\n".join(out)


def _render_chosen(prov) -> str:
    """The ``[sweep]`` section of a design chosen from a sweep (see cablekit.sweep)."""
    out = [_kv([("sweep file", _h(prov.file)), ("sweep file SHA-256", f"<code>{_h(prov.file_hash)}</code>"),
                ("base design", _h(prov.design_file)), ("base design SHA-256", f"<code>{_h(prov.design_hash)}</code>"),
                ("search", _h({"grid": "every combination of the parameter values (grid)",
                               "nsga2": "multi-objective search (NSGA-II, Deb et al. 2002)"}.get(prov.method,
                                                                                                  prov.method))),
                ("variants evaluated", f"{prov.variants} ({prov.valid} valid, {prov.meeting_constraints} meeting every "
                                       f"constraint, {prov.pareto_size} on the Pareto front)"),
                ("this design", f"variant {prov.variant}: {_h(prov.chosen_by)}"),
                ("objectives", _h(", ".join(f"{k} ({v})" for k, v in prov.objectives.items()))),
                ("constraints", _h(", ".join(f"{k} {v}" for k, v in prov.constraints.items()) or "none")),
                ("evaluation options", _h(prov.options))])]
    out.append("<h3>Parameter values of this design</h3>")
    out.append(_table(["parameter", "value"], [[_h(k), _h(v)] for k, v in prov.parameters.items()]))
    out.append("<h3>Its figures in the sweep</h3>")
    out.append(_table(["figure", "value"], [[_h(k), _h(v)] for k, v in prov.metrics.items()]))
    out.append('<p class="notchecked">The sweep used the coarse options above to compare designs; it certifies '
               "nothing. The checks in section 4 were computed again for this design and govern.</p>")
    return "\n".join(out)


def _render_cautions() -> str:
    return ('<div class="caution"><p><b>Suspended loads and stored energy.</b></p><ul>'
            + "".join(f"<li>{_h(c)}</li>" for c in CAUTIONS) + "</ul></div>")


def _render_signoff(digest: str, date: str) -> str:
    rows = [[_h(role), "", "", ""] for role in ("Prepared by (designer)", "Checked by (reviewer)",
                                                "Approved by (responsible engineer)")]
    return (f"<p>This sheet covers the design whose content hash is <code>{digest}</code>. Any change to the design "
            "file changes the hash and needs a new sheet. Signing confirms that the reviewer has read every section, "
            "including what was not checked, and accepts the failures and warnings listed above or has had them "
            "fixed.</p>"
            + _table(["role", "name", "signature", "date"], rows, cls="sign")
            + "<p>Conditions, remarks:</p><div style=\"border:1px solid #c9d1d9; height:48pt\"></div>")


# ======================================================================================
# writing: HTML (atomic) and PDF through a headless Chromium
# ======================================================================================
class RendererError(RuntimeError):
    """No PDF renderer was found, or it failed."""


_BROWSER_NAMES = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable")
# flags measured to work on these machines (see /work/shared/TOOLING.md): no GPU, no sandbox
# inside containers, and no background network traffic
_BROWSER_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--disable-extensions", "--hide-scrollbars", "--no-pdf-header-footer",
                  "--run-all-compositor-stages-before-draw", "--virtual-time-budget=15000")


def _readable(path) -> None:
    """Give a written file the usual permissions (the temporary file it came from was private)."""
    mask = os.umask(0o022)
    os.umask(mask)
    os.chmod(path, 0o666 & ~mask)


def find_browser(browser: str | os.PathLike | None = None) -> str:
    """The path of a Chromium-family browser for PDF export.

    ``browser`` names an executable explicitly; otherwise ``chromium`` (Debian's package),
    ``chromium-browser``, ``google-chrome`` are looked up on ``PATH``.

    Raises
    ------
    RendererError
        When none is found (the message says how to install one).
    """
    if browser is not None:
        path = shutil.which(str(browser))
        if path is None:
            raise RendererError(f"PDF renderer {str(browser)!r} not found or not executable")
        return path
    for name in _BROWSER_NAMES:
        path = shutil.which(name)
        if path:
            return path
    raise RendererError("no PDF renderer found: PDF export prints the HTML sheet with a headless Chromium; "
                        "install one (Debian/Ubuntu: 'apt-get install chromium') or leave out --pdf "
                        "(the HTML sheet prints from any browser)")


def render_pdf(html_path, pdf_path, *, browser: str | os.PathLike | None = None, timeout: float = 180.0) -> Path:
    """Print an HTML file to PDF with a headless Chromium; the PDF is written atomically.

    Parameters
    ----------
    html_path : path of the HTML sheet.
    pdf_path : where to write the PDF.
    browser : the browser executable (default: found by :func:`find_browser`).
    timeout : seconds to wait for the browser [s].

    Raises
    ------
    RendererError
        No browser, the browser failed or timed out, or it wrote no PDF.
    """
    exe = find_browser(browser)
    html_path = Path(html_path).resolve()
    pdf_path = Path(pdf_path)
    folder = pdf_path.parent if str(pdf_path.parent) else Path(".")
    with tempfile.TemporaryDirectory(prefix="cablekit-pdf-") as profile:
        fd, tmp = tempfile.mkstemp(prefix=f".{pdf_path.name}.", suffix=".tmp", dir=folder)
        os.close(fd)
        try:
            cmd = [exe, *_BROWSER_FLAGS, f"--user-data-dir={profile}", f"--print-to-pdf={tmp}",
                   html_path.as_uri() + "#print"]
            try:
                proc = subprocess.run(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, timeout=timeout,
                                      check=False)
            except subprocess.TimeoutExpired:
                raise RendererError(f"{exe} did not finish printing the PDF within {timeout:g} s") from None
            with open(tmp, "rb") as fh:
                head = fh.read(5)
            if proc.returncode != 0 or head != b"%PDF-":
                err = proc.stderr.decode("utf-8", "replace").strip().splitlines()[-3:]
                raise RendererError(f"{exe} failed to print the PDF (exit {proc.returncode}): " + " | ".join(err))
            _readable(tmp)
            os.replace(tmp, pdf_path)
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)
    return pdf_path


def write_review(design, path, *, pdf=None, source_path=None, date: str | None = None,
                 results: Mapping[str, Any] | None = None, progress: Progress | None = None,
                 browser: str | os.PathLike | None = None) -> ReviewSheet:
    """Build the review sheet of ``design`` and write it to ``path`` (HTML, atomic).

    Parameters
    ----------
    design : Design
        A validated design.
    path : str or Path
        Where to write the HTML sheet; its folder is created when missing.
    pdf : str or Path, optional
        Also print the sheet to this PDF file (needs a headless Chromium, see
        :func:`render_pdf`).  The renderer is looked up before anything is written, so a
        missing renderer leaves no half-finished output.
    source_path, date, results, progress
        As for :func:`build_review`.
    browser : optional
        The browser executable for the PDF.

    Returns
    -------
    ReviewSheet
        What was written (``.status`` tells whether every check passed).

    Raises
    ------
    RendererError
        ``pdf`` was asked for and no browser was found or it failed (the HTML is written
        in the second case).
    """
    if pdf is not None:
        find_browser(browser)
    sheet = build_review(design, source_path=source_path, date=date, results=results, progress=progress)
    path = Path(path)
    if str(path.parent):
        path.parent.mkdir(parents=True, exist_ok=True)
    atomic_write_text(path, sheet.html)
    _readable(path)
    if pdf is not None:
        if progress:
            progress("printing the PDF")
        pdf = Path(pdf)
        if str(pdf.parent):
            pdf.parent.mkdir(parents=True, exist_ok=True)
        render_pdf(path, pdf, browser=browser)
    return sheet
