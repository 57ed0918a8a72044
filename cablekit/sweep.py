"""Design exploration: sweeps over design fields and multi-objective search, on Dask.

A **sweep file** (TOML, format ``cablekit-sweep/1``) names a base design and the fields to vary by
their path in the design file, with units::

    format = "cablekit-sweep/1"
    design = "../workshop_camera_4cable.toml"      # relative to the sweep file

    [search]
    method = "grid"                                 # or "nsga2" (population, generations, seed)

    [evaluate]                                      # coarse options: every row states them
    step = "200 mm"

    [[parameter]]
    name = "exit_height"
    path = "frame.exits[*].position[2]"             # [*]: every exit, so all four stay equal
    range = ["2.6 m", "3.4 m"]
    steps = 5

    [[parameter]]
    name = "drum"
    path = "winch.drum_diameter"
    values = ["54 mm", "72 mm", "90 mm"]

    [[parameter]]                                   # several fields at once: named choices
    name = "rope"
    [parameter.choices."3 mm"]
    "cable.diameter" = "3 mm"
    "cable.breaking_force" = "5.4 kN"
    [parameter.choices."4 mm"]
    "cable.diameter" = "4 mm"
    "cable.breaking_force" = "9.6 kN"

    [[link]]                                        # fields that follow a parameter
    path = "winch.flange_diameter"                  # value = scale * drum + offset
    from = "drum"
    scale = 1.0
    offset = "38 mm"

    [objectives]
    peak_motor_torque = "min"
    coverage = "max"

    [constraints]
    tension_margin = ">= 2 N"
    rope_design_factor = ">= 5"

Paths use the design file's own keys: ``table.key``, ``[k]`` picks an element of a list of
tables (``frame.exits[2]``) or one component of a vector written as text
(``position[2]`` is z), ``[*]`` every element.  Paths, links and conditions are read by the small
grammar of this module (no ``eval``); values carry units checked against the field they go to.

Each **variant** edits the raw TOML document of the base design and is validated by
:func:`cablekit.design.design_from_dict`: an invalid variant is recorded with its reason and the
sweep goes on.  A valid one is evaluated by the library's own functions (workspace map, drive
sizing, accuracy map, stiffness map, every check) into one row of figures (:data:`METRICS`).

Variants run on Dask (a local cluster by default, or an existing scheduler), each completed chunk
is written at once as its own Parquet file (atomic rename), keyed by the variant's parameter hash
and the sweep hash, so an interrupted sweep continues where it stopped.  ``results.parquet``
holds the whole table with the sweep file's hash and the evaluation options in its metadata.

Sweeps explore; they do not certify.  The figures are computed with coarse options; write the
chosen design with :func:`write_variant_design` and review it at full resolution
(``cablekit review``): the sheet's checks govern, and local codes and licensed practice decide.

References
----------
K. Deb, A. Pratap, S. Agarwal and T. Meyarivan, "A fast and elitist multiobjective genetic
algorithm: NSGA-II", IEEE Transactions on Evolutionary Computation 6(2), 182-197, 2002
(non-dominated sorting, section III-A; the search itself is pymoo's ``NSGA2``: J. Blank and
K. Deb, "pymoo: Multi-Objective Optimization in Python", IEEE Access 8, 2020).
"""

from __future__ import annotations

import copy
import hashlib
import itertools
import json
import math
import os
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

from .design import DesignError, Problem, atomic_write_bytes, design_from_dict
from .units import DIMENSIONS, UnitError, format_quantity, format_vector, parse_quantity, parse_vector

__all__ = [
    "FORMAT",
    "RESULTS_FORMAT",
    "CAUTION",
    "METRICS",
    "SweepError",
    "Parameter",
    "Link",
    "Condition",
    "SweepSpec",
    "Variant",
    "load_sweep",
    "loads_sweep",
    "grid_variants",
    "build_variant",
    "evaluate_document",
    "non_dominated_sort",
    "SweepResult",
    "pareto_figure",
    "parallel_figure",
    "run_sweep",
    "load_results",
    "choose_best",
    "variant_document",
    "write_variant_design",
    "SweepProvenance",
    "parse_sweep_section",
]

FORMAT = "cablekit-sweep/1"
RESULTS_FORMAT = "cablekit-sweep-results/1"
CAUTION = ("A sweep explores designs with coarse options; it certifies nothing. Review the chosen design at full "
           "resolution (cablekit review): suspended loads and loaded winches can kill, and local codes and licensed "
           "practice decide.")


class SweepError(ValueError):
    """A sweep file, results folder or request that cannot be used; names the field and value."""

    def __init__(self, problems: list[Problem] | str, source: str | None = None):
        if isinstance(problems, str):
            problems = [Problem(source or "<sweep>", "", problems)]
        self.problems = list(problems)
        head = f"{source}: " if source else ""
        n = len(self.problems)
        super().__init__("\n".join([f"{head}{n} problem{'s' if n != 1 else ''} in the sweep:"]
                                   + [f"  - {p}" for p in self.problems]))


# --------------------------------------------------------------------------------------
# the figures of one design
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Metric:
    """One column of figures: key, dimension (a key of units.DIMENSIONS), display unit, title,
    better: "max" or "min" (which way is better when no objective says)."""

    key: str
    dimension: str
    unit: str
    title: str
    better: str = "min"


METRICS: dict[str, Metric] = {m.key: m for m in (
    Metric("coverage", "dimensionless", "%", "share of the task positions inside the wrench-feasible workspace",
           "max"),
    Metric("tension_margin", "force", "N", "least tension margin over the task region", "max"),
    Metric("peak_motor_torque", "torque", "N*m", "highest motor torque while accelerating, over the winches"),
    Metric("static_motor_torque", "torque", "N*m", "highest static motor torque, over the winches"),
    Metric("p95_error", "length", "mm", "largest 95th-percentile position error over the task region"),
    Metric("lowest_frequency", "frequency", "Hz", "lowest natural frequency over the feasible task poses", "max"),
    Metric("rope_design_factor", "dimensionless", "", "least rope design factor (breaking force / tension)", "max"),
    Metric("rope_length", "length", "m", "rope bought: drum-to-exit runs, longest free lengths and dead wraps, "
                                         "summed over the cables"),
    Metric("drum_diameter", "length", "mm", "largest bare drum diameter"),
    Metric("checks_failed", "dimensionless", "", "number of failed checks (all providers, coarse options)"),
)}

_DISPLAY = {"%": 100.0, "mm": 1e3}  # display unit -> factor from SI (the rest are SI already)


def metric_display(key: str, value: float) -> str:
    """``"2.31 N*m"``-style text of a metric value (SI in)."""
    m = METRICS[key]
    if value is None or not math.isfinite(value):
        return "n/a"
    v = value * _DISPLAY.get(m.unit, 1.0)
    return f"{v:.4g} {m.unit}".strip()


# --------------------------------------------------------------------------------------
# the sweep file
# --------------------------------------------------------------------------------------
_SEG = re.compile(r"([A-Za-z_][A-Za-z0-9_]*)((?:\[(?:\d+|\*)\])*)")
_IDX = re.compile(r"\[(\d+|\*)\]")
_COND = re.compile(r"^\s*(>=|<=|>|<)\s*(.+?)\s*$")


def parse_path(text: str) -> tuple[tuple[str, tuple], ...]:
    """``"frame.exits[*].position[2]"`` -> ``(("frame", ()), ("exits", ("*",)), ("position", (2,)))``.

    Raises ValueError for anything else (no expressions, no quotes, at most 200 characters).
    """
    if not isinstance(text, str) or not text or len(text) > 200:
        raise ValueError("a path such as 'frame.exits[2].position[2]' or 'winch.gear_ratio'")
    out = []
    for part in text.split("."):
        mt = _SEG.fullmatch(part.strip())
        if mt is None:
            raise ValueError("a path of keys separated by '.', each optionally followed by [index] or [*], "
                             "such as 'frame.exits[2].position[2]'")
        idx = tuple("*" if i == "*" else int(i) for i in _IDX.findall(mt.group(2)))
        out.append((mt.group(1), idx))
    return tuple(out)


def _dims_of(value) -> tuple[str, ...]:
    """Dimensions a quantity text can be read as (a vector text when it has commas); none for
    anything else."""
    if not isinstance(value, str):
        return ()
    out = []
    for dim in DIMENSIONS:
        if dim == "dimensionless":
            continue
        try:
            if "," in value:
                parse_vector(value, dim, length=value.count(",") + 1)
            else:
                parse_quantity(value, dim)
        except (UnitError, ValueError):
            continue
        out.append(dim)
    return tuple(out)


@dataclass(frozen=True)
class Target:
    """One field a parameter writes: the path to its container, the key, an optional component."""

    text: str  # the concrete path, e.g. frame.exits[2].position[2]
    where: tuple  # keys/indices leading to the container holding `key`
    key: str
    component: int | None  # vector component, or None
    kind: str  # "quantity", "vector", "number", "integer", "bool", "text"
    dims: tuple[str, ...]  # dimensions the current value reads as (quantity/vector)


def resolve_targets(doc: Mapping, path: str, *, field_name: str) -> list[Target]:
    """Every concrete field ``path`` names in the raw design document (``[*]`` expanded).

    Raises
    ------
    SweepError
        Naming ``field_name`` (the sweep-file field), the path and what exists instead.
    """
    try:
        segs = parse_path(path)
    except ValueError as exc:
        raise SweepError([Problem(field_name, repr(path), str(exc))]) from None
    found: list[Target] = []

    def walk(node, k: int, where: tuple, shown: str):
        name, idx = segs[k]
        last = k == len(segs) - 1
        if not isinstance(node, Mapping):
            raise SweepError([Problem(field_name, path, f"'{shown}' is not a table, so it has no '{name}'")])
        if name not in node:
            raise SweepError([Problem(field_name, path, f"no field '{name}' in [{shown or 'the design file'}]; "
                                      f"fields there: {', '.join(sorted(map(str, node)))}")])
        value = node[name]
        here = f"{shown}.{name}" if shown else name
        if not idx:
            if last:
                found.append(_target(here, (*where,), name, None, value, field_name, path))
            else:
                walk(value, k + 1, (*where, name), here)
            return
        if isinstance(value, list):  # a list of tables (or of texts)
            i, rest = idx[0], idx[1:]
            picks = range(len(value)) if i == "*" else [i]
            for j in picks:
                if not 0 <= j < len(value):
                    raise SweepError([Problem(field_name, path, f"'{here}' has {len(value)} elements: index 0 to "
                                              f"{len(value) - 1}")])
                item = value[j]
                if rest:  # a vector inside a list: points[3][2]
                    if not last or len(rest) != 1 or rest[0] == "*":
                        raise SweepError([Problem(field_name, path, "at most one component index after a list index")])
                    found.append(_target(f"{here}[{j}][{rest[0]}]", (*where, name), j, rest[0], item, field_name,
                                         path))
                elif last:
                    found.append(_target(f"{here}[{j}]", (*where, name), j, None, item, field_name, path))
                else:
                    walk(item, k + 1, (*where, name, j), f"{here}[{j}]")
            return
        if isinstance(value, str) and "," in value and last and len(idx) == 1:  # a vector component
            comps = value.count(",") + 1
            picks = range(comps) if idx[0] == "*" else [idx[0]]
            for j in picks:
                if not 0 <= j < comps:
                    raise SweepError([Problem(field_name, path, f"'{here}' has {comps} components: index 0 to "
                                              f"{comps - 1}")])
                found.append(_target(f"{here}[{j}]", (*where,), name, j, value, field_name, path))
            return
        raise SweepError([Problem(field_name, path, f"'{here}' is neither a list nor a vector: it takes no index")])

    walk(doc, 0, (), "")
    return found


def _target(text, where, key, component, value, field_name, path) -> Target:
    if isinstance(value, bool):
        kind, dims = "bool", ()
    elif isinstance(value, int):
        kind, dims = "integer", ()
    elif isinstance(value, float):
        kind, dims = "number", ()
    elif isinstance(value, str):
        dims = _dims_of(value)
        if component is not None:
            if not dims:
                raise SweepError([Problem(field_name, path, f"'{text}': the field {value!r} is not a vector with a "
                                          "unit")])
            kind = "vector"
        elif "," in value and dims:
            kind = "whole vector"  # only a choice may set it whole; a parameter names a component
        else:
            kind = "quantity" if dims else "text"
    else:
        raise SweepError([Problem(field_name, path, f"'{text}' is a table or list, not a value; name one of its "
                                  "fields")])
    return Target(text=text, where=where, key=key, component=component, kind=kind, dims=dims)


@dataclass(frozen=True)
class Parameter:
    """A design choice the sweep varies.

    name; targets : the fields it writes (all get the same value); kind : "quantity", "number",
    "bool", "text" or "choice"; dimension : for quantities; values : the grid (SI floats,
    numbers, bools, texts or choice labels); low, high : the continuous range [SI] (None for
    lists); integer : whole numbers only (``integer = true``; the search rounds to them);
    choices : label -> {path: raw value} for choice parameters.
    """

    name: str
    targets: tuple[Target, ...]
    kind: str
    dimension: str | None
    values: tuple
    low: float | None = None
    high: float | None = None
    integer: bool = False
    choices: Mapping[str, tuple[tuple[Target, Any], ...]] = field(default_factory=dict)

    @property
    def column(self) -> str:
        unit = DIMENSIONS[self.dimension][0] if self.dimension else ""
        return f"{self.name} [{unit}]" if unit else self.name

    @property
    def continuous(self) -> bool:
        return self.low is not None


@dataclass(frozen=True)
class Link:
    """Fields that follow a parameter: ``value = scale * parameter + offset`` (SI)."""

    targets: tuple[Target, ...]
    source: str
    scale: float
    offset: float


@dataclass(frozen=True)
class Condition:
    """A constraint on a metric: ``metric op limit`` (limit in SI), as written (``text``)."""

    metric: str
    op: str
    limit: float
    text: str

    def holds(self, value: float) -> bool:
        if value is None or not math.isfinite(value):
            return False
        return {"<": value < self.limit, "<=": value <= self.limit, ">": value > self.limit,
                ">=": value >= self.limit}[self.op]

    def violation(self, value: float) -> float:
        """How far past the limit (0 when it holds; inf for a missing value) [SI]."""
        if value is None or not math.isfinite(value):
            return math.inf
        return max(0.0, (value - self.limit) if self.op in ("<", "<=") else (self.limit - value))


@dataclass(frozen=True)
class SweepSpec:
    """A parsed sweep file (see the module notes)."""

    source: str
    folder: Path  # where the sweep file is: its design path is relative to it
    text_hash: str  # SHA-256 of the sweep file's bytes
    design_path: Path
    design_hash: str  # SHA-256 of the base design file's bytes
    base: Mapping  # the base design's raw TOML document (without a [sweep] section)
    parameters: tuple[Parameter, ...]
    links: tuple[Link, ...]
    objectives: Mapping[str, str]  # metric -> "min" | "max", in file order
    constraints: tuple[Condition, ...]
    method: str  # "grid" | "nsga2"
    population: int
    generations: int
    seed: int
    options: Mapping[str, Any]  # evaluation options (SI)

    @property
    def hash(self) -> str:
        """The key the results are stored under: sweep file and base design together."""
        return hashlib.sha256(f"{self.text_hash}:{self.design_hash}".encode()).hexdigest()

    @property
    def size(self) -> int:
        """Number of grid variants."""
        return int(np.prod([len(p.values) for p in self.parameters])) if self.parameters else 1

    def options_text(self) -> str:
        o = self.options
        return (f"workspace grid step {o['step'] * 1e3:g} mm; accuracy grid step {o['accuracy_step'] * 1e3:g} mm "
                f"(at most {o['accuracy_max_poses']} poses), {o['accuracy_builds']} sampled builds, no Monte Carlo "
                f"check; stiffness and frequency on the feasible workspace poses; drive sizing from the workspace "
                f"tensions; every check provider on these results")


_TOP = {"format", "design", "search", "evaluate", "parameter", "link", "objectives", "constraints", "meta"}


def loads_sweep(text: str, *, source: str = "<sweep>", folder: Path | None = None) -> SweepSpec:
    """Parse sweep-file text; ``folder`` resolves the relative design path (default: cwd)."""
    problems: list[Problem] = []

    def bad(path, value, expected):
        problems.append(Problem(path, repr(value) if not isinstance(value, str) else value, expected))

    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SweepError([Problem("<file>", "TOML syntax", f"valid TOML ({exc})")], source) from None
    for key in doc:
        if key not in _TOP:
            bad(key, doc[key], f"unknown key; allowed here: {', '.join(sorted(_TOP))}")
    if doc.get("format", FORMAT) != FORMAT:
        bad("format", doc.get("format"), repr(FORMAT))
    folder = Path(folder) if folder is not None else Path.cwd()
    design_rel = doc.get("design")
    base, design_path, design_hash = None, None, ""
    if not isinstance(design_rel, str) or not design_rel:
        bad("design", design_rel if design_rel is not None else "missing", "the base design file, relative to the "
                                                                             "sweep file, e.g. 'rig.toml'")
    else:
        design_path = (folder / design_rel).resolve()
        try:
            raw = design_path.read_bytes()
            base = tomllib.loads(raw.decode("utf-8"))
            design_hash = hashlib.sha256(raw).hexdigest()
            base.pop("sweep", None)  # a design written by a sweep carries its provenance: not a variant field
            design_from_dict(copy.deepcopy(base), source=str(design_path))
        except FileNotFoundError:
            bad("design", design_rel, f"an existing design file (looked for {design_path})")
            base = None
        except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
            bad("design", design_rel, f"a readable TOML design file ({type(exc).__name__}: {exc})")
            base = None
        except DesignError as exc:
            bad("design", design_rel, "a valid base design; it has: " + "; ".join(str(p) for p in exc.problems))
            base = None
    # search
    search = doc.get("search", {})
    method, pop, gens, seed = "grid", 40, 25, 1
    if not isinstance(search, Mapping):
        bad("search", search, "a table")
    else:
        for key in search:
            if key not in ("method", "population", "generations", "seed"):
                bad(f"search.{key}", search[key], "unknown key; allowed here: generations, method, population, seed")
        method = search.get("method", "grid")
        if method not in ("grid", "nsga2"):
            bad("search.method", method, "'grid' (every combination) or 'nsga2' (multi-objective search)")
        for key, lo, default in (("population", 4, 40), ("generations", 1, 25), ("seed", 0, 1)):
            v = search.get(key, default)
            if isinstance(v, bool) or not isinstance(v, int) or v < lo:
                bad(f"search.{key}", v, f"a whole number of at least {lo}")
            elif key == "population":
                pop = v
            elif key == "generations":
                gens = v
            else:
                seed = v
    options = _parse_options(doc.get("evaluate", {}), base, bad)
    # parameters
    params: list[Parameter] = []
    raw_params = doc.get("parameter", [])
    if not isinstance(raw_params, list) or not raw_params:
        bad("parameter", raw_params if raw_params else "missing", "one or more [[parameter]] tables")
        raw_params = []
    names: set[str] = set()
    for k, rp in enumerate(raw_params):
        where = f"parameter[{k}]"
        if not isinstance(rp, Mapping):
            bad(where, rp, "a table")
            continue
        try:
            p = _parse_parameter(rp, where, base)
        except SweepError as exc:
            problems.extend(exc.problems)
            continue
        if p.name in names:
            bad(f"{where}.name", p.name, "parameter names must be unique")
        names.add(p.name)
        params.append(p)
    links: list[Link] = []
    raw_links = doc.get("link", [])
    if not isinstance(raw_links, list):
        bad("link", raw_links, "a list of [[link]] tables")
        raw_links = []
    by_name = {p.name: p for p in params}
    for k, rl in enumerate(raw_links):
        try:
            links.append(_parse_link(rl, f"link[{k}]", base, by_name))
        except SweepError as exc:
            problems.extend(exc.problems)
    # objectives and constraints
    objectives: dict[str, str] = {}
    raw_obj = doc.get("objectives", {})
    if not isinstance(raw_obj, Mapping) or not raw_obj:
        bad("objectives", raw_obj or "missing", f"a table of metric = 'min' or 'max'; metrics: {', '.join(METRICS)}")
        raw_obj = {}
    for key, sense in raw_obj.items():
        if key not in METRICS:
            bad(f"objectives.{key}", sense, f"a metric: {', '.join(METRICS)}")
        elif sense not in ("min", "max"):
            bad(f"objectives.{key}", sense, "'min' or 'max'")
        else:
            objectives[key] = sense
    constraints: list[Condition] = []
    raw_con = doc.get("constraints", {})
    if not isinstance(raw_con, Mapping):
        bad("constraints", raw_con, "a table of metric = '>= 2 N'-style conditions")
        raw_con = {}
    for key, cond in raw_con.items():
        try:
            constraints.append(parse_condition(key, cond))
        except SweepError as exc:
            problems.extend(exc.problems)
    if method == "nsga2" and params and not any(p.continuous for p in params):
        bad("search.method", method, "nsga2 needs at least one parameter with a continuous range = [low, high]")
    if problems:
        raise SweepError(problems, source)
    spec = SweepSpec(source=source, folder=folder.resolve(),
                     text_hash=hashlib.sha256(text.encode("utf-8")).hexdigest(),
                     design_path=design_path, design_hash=design_hash, base=base, parameters=tuple(params),
                     links=tuple(links), objectives=objectives, constraints=tuple(constraints), method=method,
                     population=pop, generations=gens, seed=seed, options=options)
    if method == "grid" and spec.size > 200_000:
        raise SweepError([Problem("parameter", f"{spec.size:,} variants", "at most 200,000 grid variants; use fewer "
                                  "steps or method = 'nsga2'")], source)
    return spec


def load_sweep(path) -> SweepSpec:
    """Read and check a sweep file. Raises :class:`SweepError` naming every bad field."""
    path = Path(path)
    try:
        text = path.read_bytes().decode("utf-8")
    except FileNotFoundError:
        raise SweepError([Problem(str(path), "missing", "an existing sweep file")], str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise SweepError([Problem(str(path), type(exc).__name__, "a readable UTF-8 TOML file")], str(path)) from None
    return loads_sweep(text, source=str(path), folder=path.resolve().parent)


def _parse_options(t, base, bad) -> dict:
    if not isinstance(t, Mapping):
        bad("evaluate", t, "a table")
        t = {}
    allowed = {"step", "accuracy_step", "accuracy_builds", "accuracy_max_poses"}
    for key in t:
        if key not in allowed:
            bad(f"evaluate.{key}", t[key], f"unknown key; allowed here: {', '.join(sorted(allowed))}")
    step = None
    if base is not None:
        try:
            step = parse_quantity(base.get("task", {}).get("step", "50 mm"), "length")
        except UnitError:
            step = 0.05
    out = {"step": step, "accuracy_step": None, "accuracy_builds": 200, "accuracy_max_poses": 300}
    for key in ("step", "accuracy_step"):
        if key in t:
            try:
                v = parse_quantity(t[key], "length", field=f"evaluate.{key}")
                if not v > 0:
                    raise UnitError(f"evaluate.{key}: must be greater than zero")
                out[key] = v
            except UnitError as exc:
                bad(f"evaluate.{key}", t[key], str(exc).split(": ", 1)[-1])
    for key, lo in (("accuracy_builds", 20), ("accuracy_max_poses", 10)):
        if key in t:
            v = t[key]
            if isinstance(v, bool) or not isinstance(v, int) or v < lo:
                bad(f"evaluate.{key}", v, f"a whole number of at least {lo}")
            else:
                out[key] = v
    if out["accuracy_step"] is None and out["step"] is not None:
        out["accuracy_step"] = 2 * out["step"]
    return out


def _quantity_values(texts, where, key, dims_allowed) -> tuple[str, list[float]]:
    """The one dimension every text reads as (among ``dims_allowed``) and the SI values."""
    common = None
    for k, v in enumerate(texts):
        d = set(_dims_of(v)) if isinstance(v, str) and "," not in v else set()
        if not d:
            raise SweepError([Problem(f"{where}.{key}[{k}]", repr(v), "a quantity with a unit such as '2.8 m'")])
        common = d if common is None else common & d
    usable = [d for d in DIMENSIONS if common and d in common and d in dims_allowed]
    if not usable:
        raise SweepError([Problem(f"{where}.{key}", repr(list(texts)), "values in the unit of the field they set ("
                                  + ", ".join(d.replace("_", " ") for d in dims_allowed) + ")")])
    dim = usable[0]
    return dim, [parse_quantity(v, dim, field=f"{where}.{key}[{k}]") for k, v in enumerate(texts)]


def _parse_parameter(rp: Mapping, where: str, base) -> Parameter:
    allowed = {"name", "path", "paths", "values", "range", "steps", "step", "choices", "integer"}
    for key in rp:
        if key not in allowed:
            raise SweepError([Problem(f"{where}.{key}", repr(rp[key]), f"unknown key; allowed here: "
                                      f"{', '.join(sorted(allowed))}")])
    name = rp.get("name")
    if not isinstance(name, str) or not re.fullmatch(r"[A-Za-z_][A-Za-z0-9_ -]{0,40}", name or ""):
        raise SweepError([Problem(f"{where}.name", repr(name), "a short name of letters, digits, '_', '-' or spaces")])
    where = f"{where} ({name})"
    if base is None:
        raise SweepError([])  # the design's own problem is reported already
    if "choices" in rp:
        return _parse_choice(rp, where, name, base)
    if ("path" in rp) == ("paths" in rp):
        raise SweepError([Problem(f"{where}.path", "missing" if "path" not in rp else "both", "give path = '...' or "
                                  "paths = ['...', ...] (every path gets the same value)")])
    paths = [rp["path"]] if "path" in rp else rp["paths"]
    if not isinstance(paths, list) or not paths:
        raise SweepError([Problem(f"{where}.paths", repr(paths), "a non-empty list of paths")])
    targets = [t for p in paths for t in resolve_targets(base, p, field_name=f"{where}.path")]
    for t in targets:
        if t.kind == "whole vector":
            raise SweepError([Problem(f"{where}.path", t.text, f"a vector: name one component, e.g. '{t.text}[2]' "
                                      "(or set it whole in a choice)")])
    kinds = {("quantity" if t.kind in ("quantity", "vector") else t.kind) for t in targets}
    if len(kinds) != 1:
        raise SweepError([Problem(f"{where}.path", repr(paths), "fields of one kind (all quantities, numbers, "
                                  "switches or texts)")])
    kind = kinds.pop()
    kind = "number" if kind == "integer" else kind
    integer = rp.get("integer", False)  # whole numbers only (e.g. encoder lines); the search rounds to them
    if not isinstance(integer, bool) or (integer and kind != "number"):
        raise SweepError([Problem(f"{where}.integer", repr(integer), "true or false, for a plain-number field")])
    dims_allowed = set.intersection(*(set(t.dims) for t in targets)) if kind == "quantity" else set()
    has_values, has_range = "values" in rp, "range" in rp
    if has_values == has_range:
        raise SweepError([Problem(f"{where}.values", "missing" if not has_values else "both",
                                  "give values = [...] or range = [low, high]")])
    if has_values:
        vals = rp["values"]
        if not isinstance(vals, list) or not vals or len(vals) > 10_000:
            raise SweepError([Problem(f"{where}.values", repr(vals), "a non-empty list (at most 10,000 values)")])
        if kind == "quantity":
            dim, si = _quantity_values(vals, where, "values", dims_allowed)
            return Parameter(name, tuple(targets), "quantity", dim, tuple(si))
        if kind == "number":
            for k, v in enumerate(vals):
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
                    raise SweepError([Problem(f"{where}.values[{k}]", repr(v), f"a plain number: the field "
                                              f"{targets[0].text} takes no unit")])
                if integer and float(v) != int(v):
                    raise SweepError([Problem(f"{where}.values[{k}]", repr(v), "a whole number (integer = true)")])
            return Parameter(name, tuple(targets), "number", None,
                             tuple(int(v) if integer else float(v) for v in vals), integer=integer)
        if kind == "bool":
            if not all(isinstance(v, bool) for v in vals):
                raise SweepError([Problem(f"{where}.values", repr(vals), "true or false values")])
            return Parameter(name, tuple(targets), "bool", None, tuple(vals))
        if not all(isinstance(v, str) for v in vals):
            raise SweepError([Problem(f"{where}.values", repr(vals), "texts")])
        return Parameter(name, tuple(targets), "text", None, tuple(vals))
    rng = rp["range"]
    if kind not in ("quantity", "number") or not isinstance(rng, list) or len(rng) != 2:
        raise SweepError([Problem(f"{where}.range", repr(rng), "[low, high] of a quantity or number field")])
    if kind == "quantity":
        dim, (lo, hi) = _quantity_values(rng, where, "range", dims_allowed)
    else:
        if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in rng):
            raise SweepError([Problem(f"{where}.range", repr(rng), "two plain numbers")])
        dim, (lo, hi) = None, map(float, rng)
    if not (math.isfinite(lo) and math.isfinite(hi) and hi > lo):
        raise SweepError([Problem(f"{where}.range", repr(rng), "low below high")])
    if "step" in rp and "steps" in rp:
        raise SweepError([Problem(f"{where}.steps", "both", "give steps (a count) or step (a spacing), not both")])
    if "step" in rp:
        try:
            st = parse_quantity(rp["step"], dim, field=f"{where}.step") if dim else float(rp["step"])
        except (UnitError, TypeError, ValueError) as exc:
            raise SweepError([Problem(f"{where}.step", repr(rp["step"]), str(exc).split(": ", 1)[-1])]) from None
        if not st > 0:
            raise SweepError([Problem(f"{where}.step", repr(rp["step"]), "greater than zero")])
        n = int(math.floor((hi - lo) / st + 1e-9)) + 1
        grid = [lo + k * st for k in range(n)]
    else:
        n = rp.get("steps", 5)
        if isinstance(n, bool) or not isinstance(n, int) or not 2 <= n <= 10_000:
            raise SweepError([Problem(f"{where}.steps", repr(n), "a whole number from 2 to 10,000")])
        grid = list(np.linspace(lo, hi, n))
    if integer:
        grid = sorted({int(round(v)) for v in grid})
    return Parameter(name, tuple(targets), kind, dim, tuple(float(v) if not integer else v for v in grid),
                     low=lo, high=hi, integer=integer)


def _parse_choice(rp, where, name, base) -> Parameter:
    ch = rp["choices"]
    if not isinstance(ch, Mapping) or not ch:
        raise SweepError([Problem(f"{where}.choices", repr(ch), "a table of label = { 'path' = value, ... }")])
    for key in ("path", "paths", "values", "range"):
        if key in rp:
            raise SweepError([Problem(f"{where}.{key}", repr(rp[key]), "not used with choices (each choice names "
                                      "its own fields)")])
    out = {}
    for label, sets in ch.items():
        if not isinstance(sets, Mapping) or not sets:
            raise SweepError([Problem(f"{where}.choices.{label}", repr(sets), "a table of 'path' = value")])
        pairs = []
        for path, value in sets.items():
            for t in resolve_targets(base, path, field_name=f"{where}.choices.{label}"):
                pairs.append((t, _check_raw_value(t, value, f"{where}.choices.{label}.{path}")))
        out[str(label)] = tuple(pairs)
    return Parameter(name, (), "choice", None, tuple(out), choices=out)


def _check_raw_value(t: Target, value, where: str):
    """A raw value for one target, checked against the field's kind and unit."""
    if t.kind in ("quantity", "vector"):
        dim, (si,) = _quantity_values([value], where.rsplit(".", 1)[0], where.rsplit(".", 1)[-1], set(t.dims))
        return (dim, si)
    if t.kind == "whole vector":  # its length is the design's to check (an invalid variant, not a crash)
        if not isinstance(value, str) or not any(_parses_vector(value, d) for d in t.dims):
            raise SweepError([Problem(where, repr(value), f"a vector in the unit of {t.text} such as '0, 3, 2.8 m'")])
        return value
    if t.kind in ("number", "integer"):
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise SweepError([Problem(where, repr(value), f"a plain number ({t.text} takes no unit)")])
        return value
    if t.kind == "bool" and not isinstance(value, bool):
        raise SweepError([Problem(where, repr(value), "true or false")])
    if t.kind == "text" and not isinstance(value, str):
        raise SweepError([Problem(where, repr(value), "a text")])
    return value


def _parses_vector(value: str, dim: str) -> bool:
    try:
        parse_vector(value, dim, length=value.count(",") + 1)
    except UnitError:
        return False
    return True


def _parse_link(rl, where, base, by_name) -> Link:
    if not isinstance(rl, Mapping):
        raise SweepError([Problem(where, repr(rl), "a table with path, from, scale, offset")])
    for key in rl:
        if key not in ("path", "paths", "from", "scale", "offset"):
            raise SweepError([Problem(f"{where}.{key}", repr(rl[key]), "unknown key; allowed here: from, offset, "
                                      "path, paths, scale")])
    if ("path" in rl) == ("paths" in rl):
        raise SweepError([Problem(f"{where}.path", "missing" if "path" not in rl else "both",
                                  "give path = '...' or paths = ['...', ...]")])
    paths = [rl["path"]] if "path" in rl else rl["paths"]
    if not isinstance(paths, list) or not paths:
        raise SweepError([Problem(f"{where}.paths", repr(paths), "a non-empty list of paths")])
    src = rl.get("from")
    if src not in by_name:
        raise SweepError([Problem(f"{where}.from", repr(src), f"the name of a parameter: {', '.join(by_name)}")])
    p = by_name[src]
    if p.kind not in ("quantity", "number"):
        raise SweepError([Problem(f"{where}.from", src, "a quantity or number parameter")])
    targets = [t for path in paths for t in resolve_targets(base, path, field_name=f"{where}.path")]
    for t in targets:
        ok = (p.kind == "number" and t.kind in ("number", "integer")) or (
            p.kind == "quantity" and t.kind in ("quantity", "vector") and p.dimension in t.dims)
        if not ok:
            raise SweepError([Problem(f"{where}.path", t.text, f"a field in the unit of parameter {src!r} "
                                      f"({(p.dimension or 'plain number').replace('_', ' ')})")])
    scale = rl.get("scale", 1.0)
    if isinstance(scale, bool) or not isinstance(scale, (int, float)) or not math.isfinite(scale):
        raise SweepError([Problem(f"{where}.scale", repr(scale), "a plain number")])
    offset = rl.get("offset", 0.0 if p.kind == "number" else None)
    if p.kind == "quantity":
        if offset is None:
            offset = 0.0
        else:
            try:
                offset = parse_quantity(offset, p.dimension, field=f"{where}.offset")
            except UnitError as exc:
                raise SweepError([Problem(f"{where}.offset", repr(offset), str(exc).split(": ", 1)[-1])]) from None
    elif isinstance(offset, bool) or not isinstance(offset, (int, float)):
        raise SweepError([Problem(f"{where}.offset", repr(offset), "a plain number")])
    return Link(tuple(targets), src, float(scale), float(offset))


def parse_condition(metric: str, text) -> Condition:
    """``parse_condition("tension_margin", ">= 2 N")``; ``%`` is accepted for share metrics."""
    where = f"constraints.{metric}"
    if metric not in METRICS:
        raise SweepError([Problem(where, repr(text), f"a metric: {', '.join(METRICS)}")])
    mt = _COND.match(text) if isinstance(text, str) else None
    if mt is None:
        raise SweepError([Problem(where, repr(text), "a condition such as '>= 2 N' (operators >=, <=, >, <)")])
    op, qty = mt.groups()
    dim = METRICS[metric].dimension
    try:
        if dim == "dimensionless" and qty.endswith("%"):
            limit = parse_quantity(qty[:-1].strip(), "dimensionless", field=where) / 100.0
        else:
            limit = parse_quantity(qty, dim, field=where)
    except UnitError as exc:
        raise SweepError([Problem(where, repr(text), str(exc).split(": ", 1)[-1])]) from None
    return Condition(metric, op, limit, text)


# --------------------------------------------------------------------------------------
# variants
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Variant:
    """One design of the sweep: its index, parameter values (SI / labels) and key."""

    index: int
    values: Mapping[str, Any]
    key: str
    generation: int = 0


def _canonical(values: Mapping[str, Any]) -> str:
    return json.dumps({k: (repr(float(v)) if isinstance(v, float) else v) for k, v in values.items()},
                      sort_keys=True)


def variant_key(spec: SweepSpec, values: Mapping[str, Any]) -> str:
    """The stored key of a variant: a hash of its parameter values and the sweep hash."""
    return hashlib.sha256(f"{spec.hash}:{_canonical(values)}".encode()).hexdigest()[:24]


def grid_variants(spec: SweepSpec) -> list[Variant]:
    """Every combination of the parameters' values, first parameter slowest."""
    names = [p.name for p in spec.parameters]
    out = []
    for k, combo in enumerate(itertools.product(*(p.values for p in spec.parameters))):
        values = dict(zip(names, combo))
        out.append(Variant(k, values, variant_key(spec, values)))
    return out


def _container(doc, where):
    node = doc
    for k in where:
        node = node[k]
    return node


def _write(doc, t: Target, value) -> None:
    """Write one value (SI float for quantities) into the raw document at ``t``."""
    node = _container(doc, t.where)
    if t.kind == "vector":
        dim = value[0]
        text = node[t.key]
        comps = list(parse_vector(text, dim, length=text.count(",") + 1))
        comps[t.component] = value[1]
        node[t.key] = format_vector(comps, dim)
    elif t.kind == "quantity":
        node[t.key] = format_quantity(value[1], value[0])
    elif t.kind == "integer":  # written as a whole number in the base: kept so when the value is whole
        node[t.key] = int(value) if float(value).is_integer() else float(value)
    elif t.kind == "number":
        node[t.key] = float(value)
    else:
        node[t.key] = value


def variant_document(spec: SweepSpec, values: Mapping[str, Any]) -> dict:
    """The raw design document of a variant: the base with every parameter and link applied."""
    doc = copy.deepcopy(dict(spec.base))
    by_name = {p.name: p for p in spec.parameters}
    for p in spec.parameters:
        v = values[p.name]
        if p.kind == "choice":
            for t, raw in p.choices[v]:
                _write(doc, t, raw)
            continue
        for t in p.targets:
            _write(doc, t, (p.dimension, float(v)) if p.kind == "quantity" else v)
    for link in spec.links:
        p = by_name[link.source]
        v = link.scale * float(values[p.name]) + link.offset
        for t in link.targets:
            _write(doc, t, (p.dimension, v) if p.kind == "quantity" else v)
    return doc


def build_variant(spec: SweepSpec, values: Mapping[str, Any]):
    """The validated :class:`~cablekit.design.Design` of a variant (raises DesignError if invalid)."""
    return design_from_dict(variant_document(spec, values), source=f"variant {_canonical(values)}")


# --------------------------------------------------------------------------------------
# evaluation of one design (runs on the workers)
# --------------------------------------------------------------------------------------
def evaluate_design(design, options: Mapping[str, Any]) -> dict[str, float]:
    """The figures of :data:`METRICS` for one valid design, with the library's own functions.

    Parameters
    ----------
    design : Design
    options : mapping
        ``step`` workspace grid step [m]; ``accuracy_step`` accuracy grid step [m];
        ``accuracy_builds`` sampled builds for the 95th percentile; ``accuracy_max_poses``.

    Returns
    -------
    dict
        Metric key -> value in SI (coverage as a share in [0, 1]); NaN where a figure does
        not exist (e.g. no pose with every cable taut).

    Notes
    -----
    Workspace map (:func:`cablekit.workspace.compute_workspace`) -> coverage and least margin;
    drive sizing on its tensions (:func:`cablekit.drive.size_drives`) -> motor torques and the
    rope design factor ``MBF / max T``; accuracy map without the Monte Carlo check
    (:func:`cablekit.accuracy.accuracy_map`) -> the largest 95th-percentile error; stiffness
    map on the feasible workspace poses (:func:`cablekit.stiffness.stiffness_map`) -> the lowest
    natural frequency; every check provider on these results -> failed checks.  Rope length
    per cable: drum-to-exit distance + longest free length over the task grid + dead wraps on
    the first layer, ``n_dead * pi * (D + d)``.
    """
    from .accuracy import accuracy_map
    from .checks import FAIL, run_all
    from .drive import size_drives
    from .kinematics import cable_lengths
    from .stiffness import stiffness_map
    from .workspace import compute_workspace

    ws = compute_workspace(design, step=options["step"])
    drv = size_drives(design, workspace=ws)
    acc = accuracy_map(design, step=options["accuracy_step"], builds=options["accuracy_builds"],
                       monte_carlo_samples=0, max_poses=options["accuracy_max_poses"])
    ok = ws.feasible
    freq = math.nan
    if np.any(ok):
        st = stiffness_map(design, poses=ws.poses[ok], tensions=ws.tensions[ok])
        if np.any(st.valid):
            freq = float(np.nanmin(st.frequency))
    checks = run_all(design, workspace=ws, accuracy=acc)
    rows = drv.rows

    def worst(values, fn):
        v = np.array(values, float)
        return float(fn(v)) if np.all(np.isfinite(v)) else math.nan

    L = cable_lengths(design, ws.poses).max(axis=0)
    rope = float(np.sum(L + np.array([e.drum_distance for e in design.frame.exits])
                        + np.array([w.dead_wraps * math.pi * r.pitch_diameter for w, r in zip(design.winches, rows)])))
    return {
        "coverage": float(ws.coverage),
        "tension_margin": float(np.min(ws.margin)) if ws.n_poses else math.nan,
        "peak_motor_torque": worst([r.peak_torque for r in rows], np.max),
        "static_motor_torque": worst([r.torque for r in rows], np.max),
        "p95_error": float(acc.worst_p95()[0]),
        "lowest_frequency": freq,
        "rope_design_factor": worst([design.cable.breaking_force / r.max_tension for r in rows], np.min),
        "rope_length": rope,
        "drum_diameter": float(max(w.drum_diameter for w in design.winches)),
        "checks_failed": float(sum(c.status == FAIL for c in checks)),
    }


def evaluate_document(doc: Mapping, options: Mapping[str, Any]) -> dict[str, Any]:
    """One row: ``valid``, ``reason`` and the metrics of a raw design document (never raises for
    an invalid design or a failing computation: the reason is recorded instead)."""
    row: dict[str, Any] = {"valid": False, "reason": ""}
    row.update({k: math.nan for k in METRICS})
    try:
        design = design_from_dict(copy.deepcopy(dict(doc)))
    except DesignError as exc:
        row["reason"] = "invalid design: " + "; ".join(str(p) for p in exc.problems)
        return row
    try:
        row.update(evaluate_design(design, options))
    except (ValueError, ArithmeticError, np.linalg.LinAlgError) as exc:
        row["reason"] = f"evaluation failed: {type(exc).__name__}: {exc}"
        return row
    row["valid"] = True
    return row


def _evaluate_chunk(payload: tuple) -> list[dict]:
    """Worker task: evaluate ``[(index, key, generation, values, doc), ...]`` with ``options``."""
    items, options = payload
    out = []
    for index, key, gen, values, doc in items:
        row = {"variant": index, "key": key, "generation": gen}
        row.update({f"param:{k}": v for k, v in values.items()})
        row.update(evaluate_document(doc, options))
        out.append(row)
    return out


# --------------------------------------------------------------------------------------
# Pareto sets (Deb et al. 2002, fast non-dominated sorting)
# --------------------------------------------------------------------------------------
def non_dominated_sort(F) -> list[np.ndarray]:
    """Fronts of ``F`` (N, k), every objective minimised: front 0 is the Pareto set.

    Row ``a`` dominates ``b`` when it is no worse in every objective and better in one.
    Follows the fast non-dominated sort of Deb et al. 2002, section III-A.
    """
    F = np.asarray(F, float)
    N = len(F)
    if N == 0:
        return []
    le = np.all(F[:, None, :] <= F[None, :, :], axis=2)
    lt = np.any(F[:, None, :] < F[None, :, :], axis=2)
    dom = le & lt  # dom[a, b]: a dominates b
    count = dom.sum(axis=0)  # how many dominate each row
    fronts = []
    current = np.flatnonzero(count == 0)
    while current.size:
        fronts.append(current)
        count = count - dom[current].sum(axis=0)
        count[current] = -1
        current = np.flatnonzero(count == 0)
    return fronts


def _objective_matrix(table, objectives: Mapping[str, str]) -> np.ndarray:
    return np.column_stack([(-1.0 if s == "max" else 1.0) * table[m].to_numpy(float) for m, s in objectives.items()])


def rank_table(table, spec_objectives: Mapping[str, str], constraints) -> Any:
    """Add ``meets_constraints``, ``rank`` (front number, -1 when not ranked) and ``pareto``."""
    meets = table["valid"].to_numpy(bool).copy()
    for c in constraints:
        meets &= np.array([c.holds(v) for v in table[c.metric].to_numpy(float)], bool)
    F = _objective_matrix(table, spec_objectives) if len(table) else np.zeros((0, len(spec_objectives)))
    usable = meets & np.all(np.isfinite(F), axis=1)
    rank = np.full(len(table), -1, int)
    idx = np.flatnonzero(usable)
    for r, front in enumerate(non_dominated_sort(F[idx])):
        rank[idx[front]] = r
    table = table.copy()
    table["meets_constraints"] = meets
    table["rank"] = rank
    table["pareto"] = rank == 0
    return table


# --------------------------------------------------------------------------------------
# storage: one Parquet file per completed chunk, then the whole table
# --------------------------------------------------------------------------------------
def _rows_to_frame(rows: list[dict], spec: SweepSpec):
    import pandas as pd

    cols = (["variant", "generation", "key"] + [f"param:{p.name}" for p in spec.parameters]
            + ["valid", "reason"] + list(METRICS))
    df = pd.DataFrame(rows, columns=cols)
    for p in spec.parameters:
        c = f"param:{p.name}"
        if p.kind in ("choice", "text"):
            df[c] = df[c].astype(str)
        elif p.kind == "bool":
            df[c] = df[c].astype(bool)
        else:
            df[c] = df[c].astype(float)
    df["variant"] = df["variant"].astype("int64")
    df["generation"] = df["generation"].astype("int64")
    df["valid"] = df["valid"].astype(bool)
    df["reason"] = df["reason"].astype(str)
    for m in METRICS:
        df[m] = df[m].astype(float)
    return df


def _write_parquet(df, path: Path, meta: Mapping) -> None:
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    t = pa.Table.from_pandas(df, preserve_index=False)
    t = t.replace_schema_metadata({**(t.schema.metadata or {}), b"cablekit": json.dumps(meta).encode()})
    buf = io.BytesIO()
    pq.write_table(t, buf)
    atomic_write_bytes(path, buf.getvalue())


def _read_parquet(path: Path):
    import pyarrow.parquet as pq

    t = pq.read_table(path)
    meta = json.loads((t.schema.metadata or {}).get(b"cablekit", b"{}"))
    return t.to_pandas(), meta


@dataclass(frozen=True)
class SweepResult:
    """A finished (or resumed) sweep.

    table : pandas DataFrame, one row per variant (parameters ``param:NAME`` in SI, ``valid``,
    ``reason``, the metrics of :data:`METRICS` in SI, ``meets_constraints``, ``rank``,
    ``pareto``); folder; evaluated : variants computed in this run; reused : variants read
    back from earlier runs; meta : what ``results.parquet`` carries (sweep hash, options...);
    damaged : stored part files that could not be read (their variants were computed again).
    """

    table: Any
    folder: Path
    evaluated: int
    reused: int
    meta: Mapping[str, Any]
    damaged: tuple[str, ...] = ()

    @property
    def pareto(self):
        return self.table[self.table["pareto"]]

    def summary(self) -> list[str]:
        t, meta = self.table, self.meta
        lines = [f"sweep {meta['sweep_file']} ({meta['method']}), sweep hash {meta['sweep_hash'][:16]}",
                 f"  {len(t)} variants: {int(t['valid'].sum())} valid, {int(t['meets_constraints'].sum())} meet "
                 f"every constraint, {int(t['pareto'].sum())} on the Pareto front "
                 f"({self.evaluated} evaluated now, {self.reused} from earlier runs)",
                 f"  objectives: {', '.join(f'{k} ({v})' for k, v in meta['objectives'].items())}",
                 "  constraints: " + (", ".join(f"{k} {v}" for k, v in meta["constraints"].items()) or "none"),
                 f"  options: {meta['options_text']}"]
        if self.damaged:
            lines.append(f"  {len(self.damaged)} stored part file(s) could not be read and were computed again: "
                         + ", ".join(self.damaged[:3]))
        bad = t[~t["valid"]]
        if len(bad):
            lines.append(f"  first invalid variant ({len(bad)} in all): #{int(bad['variant'].iloc[0])}: "
                         f"{bad['reason'].iloc[0][:200]}")
        lines.append(f"  {CAUTION}")
        return lines

    def figure(self, x: str | None = None, y: str | None = None):
        """Scatter of two objectives, the Pareto front highlighted."""
        return pareto_figure(self.table, self.meta, x=x, y=y)


def pareto_figure(table, meta, *, x: str | None = None, y: str | None = None):
    import plotly.graph_objects as go

    objs = list(meta["objectives"]) + [m for m in METRICS if m not in meta["objectives"]]
    x = x or objs[0]
    y = y or (objs[1] if len(objs) > 1 else objs[0])
    fig = go.Figure()
    for name, sel, color in (("not meeting the constraints", ~table["meets_constraints"], "#b0b7bf"),
                             ("meets the constraints", table["meets_constraints"] & ~table["pareto"], "#5b8bd0"),
                             ("Pareto front", table["pareto"], "#c0392b")):
        s = table[sel]
        fx, fy = _DISPLAY.get(METRICS[x].unit, 1.0), _DISPLAY.get(METRICS[y].unit, 1.0)
        fig.add_trace(go.Scatter(x=s[x] * fx, y=s[y] * fy, mode="markers", name=name,
                                 customdata=s["variant"],
                                 marker=dict(color=color, size=7 if name == "Pareto front" else 5),
                                 hovertemplate="variant %{customdata}<br>%{x:.4g}, %{y:.4g}<extra></extra>"))
    fig.update_layout(title=f"Sweep: {y} against {x}", xaxis_title=f"{x} [{METRICS[x].unit or '-'}]",
                      yaxis_title=f"{y} [{METRICS[y].unit or '-'}]", margin=dict(l=60, r=10, t=50, b=50))
    return fig


def parallel_figure(table, meta):
    """Parallel coordinates: every parameter and objective, one line per valid variant, the
    Pareto front in red (display units: mm, %, as in :data:`METRICS`)."""
    import plotly.graph_objects as go

    t = table[table["valid"]]
    dims = []
    for c in [c for c in table.columns if c.startswith("param:")]:
        name = c[6:]
        unit = meta["parameters"].get(name, {}).get("unit", "")
        try:
            vals = t[c].to_numpy(float)
            dims.append(dict(label=f"{name} [{unit}]" if unit else name, values=vals))
        except ValueError:  # choices and texts: their position in the list
            labels = sorted(set(t[c]))
            dims.append(dict(label=name, values=[labels.index(v) for v in t[c]], tickvals=list(range(len(labels))),
                             ticktext=labels))
    for m in list(meta["objectives"]) + [c for c in meta["constraints"] if c not in meta["objectives"]]:
        f = _DISPLAY.get(METRICS[m].unit, 1.0)
        dims.append(dict(label=f"{m} [{METRICS[m].unit or '-'}]", values=t[m].to_numpy(float) * f))
    colour = np.where(t["pareto"], 2, np.where(t["meets_constraints"], 1, 0))
    fig = go.Figure(go.Parcoords(dimensions=dims, line=dict(
        color=colour, cmin=0, cmax=2, colorscale=[[0, "#b0b7bf"], [0.5, "#5b8bd0"], [1, "#c0392b"]])))
    fig.update_layout(title="Sweep: parameters and objectives (red: Pareto front; blue: meets the constraints)",
                      margin=dict(l=70, r=50, t=70, b=30))
    return fig


def _meta(spec: SweepSpec) -> dict:
    return {"format": RESULTS_FORMAT, "sweep_file": spec.source, "sweep_folder": str(spec.folder),
            "sweep_hash": spec.hash,
            "sweep_file_hash": spec.text_hash, "design_file": str(spec.design_path), "design_hash": spec.design_hash,
            "method": spec.method, "population": spec.population, "generations": spec.generations, "seed": spec.seed,
            "objectives": dict(spec.objectives), "constraints": {c.metric: c.text for c in spec.constraints},
            "options": {k: v for k, v in spec.options.items()}, "options_text": spec.options_text(),
            "parameters": {p.name: {"kind": p.kind, "unit": DIMENSIONS[p.dimension][0] if p.dimension else "",
                                    "low": p.low, "high": p.high} for p in spec.parameters},
            "units": {m.key: DIMENSIONS[m.dimension][0] for m in METRICS.values()},
            "caution": CAUTION}


class _Store:
    """The results folder: ``sweep.toml`` (a copy), ``parts/`` (one Parquet per chunk), results.parquet."""

    def __init__(self, folder: Path, spec: SweepSpec, sweep_text: str | None, *, fresh: bool = False):
        self.folder = Path(folder)
        self.parts = self.folder / "parts"
        self.spec = spec
        self.folder.mkdir(parents=True, exist_ok=True)
        self.parts.mkdir(exist_ok=True)
        existing = self.folder / "results.parquet"
        if existing.exists() and not fresh:
            try:
                _, meta = _read_parquet(existing)
            except Exception:  # an unreadable table is rebuilt from the parts below
                meta = {}
            if meta.get("sweep_hash") not in (None, spec.hash):
                raise SweepError(f"{self.folder} holds the results of another sweep (hash {meta['sweep_hash'][:16]}; "
                                 f"this one {spec.hash[:16]}): choose another folder or pass --fresh")
        if fresh:
            for p in self.parts.glob("part-*.parquet"):
                p.unlink()
            existing.unlink(missing_ok=True)
        if sweep_text is not None:
            atomic_write_bytes(self.folder / "sweep.toml", sweep_text.encode("utf-8"))
        self.done: dict[str, dict] = {}
        self.skipped: list[str] = []
        for p in sorted(self.parts.glob(f"part-{spec.hash[:16]}-*.parquet")):
            try:
                df, meta = _read_parquet(p)
            except Exception as exc:  # a damaged part: its variants are computed again
                self.skipped.append(f"{p.name}: {type(exc).__name__}")
                continue
            if meta.get("sweep_hash") != spec.hash:
                continue
            for row in df.to_dict("records"):
                self.done[row["key"]] = row

    def save_chunk(self, rows: list[dict]) -> None:
        keys = "".join(sorted(r["key"] for r in rows))
        name = f"part-{self.spec.hash[:16]}-{hashlib.sha256(keys.encode()).hexdigest()[:16]}.parquet"
        _write_parquet(_rows_to_frame(rows, self.spec), self.parts / name, {"sweep_hash": self.spec.hash})
        for r in rows:
            self.done[r["key"]] = r


# --------------------------------------------------------------------------------------
# the engine
# --------------------------------------------------------------------------------------
class _Engine:
    """Evaluates batches of variants serially or on Dask, through the store (skipping done ones)."""

    def __init__(self, spec, store, *, client=None, progress=None, chunk=None):
        self.spec, self.store, self.client = spec, store, client
        self.progress = progress
        self.chunk = chunk
        self.evaluated = 0
        self.reused = 0

    def _chunks(self, todo: list[Variant]) -> list[list[Variant]]:
        if self.chunk:
            size = self.chunk
        else:
            workers = len(self.client.scheduler_info().get("workers", {})) if self.client is not None else 1
            size = max(1, min(25, math.ceil(len(todo) / max(1, 4 * workers))))
        return [todo[k:k + size] for k in range(0, len(todo), size)]

    def run(self, variants: list[Variant], *, done_before: int = 0, total: int | None = None) -> list[dict]:
        total = len(variants) if total is None else total
        rows: dict[str, dict] = {}
        todo = []
        for v in variants:
            if v.key in self.store.done:
                r = dict(self.store.done[v.key])
                r["variant"], r["generation"] = v.index, v.generation
                rows[v.key] = r
                self.reused += 1
            else:
                todo.append(v)
        todo = list({v.key: v for v in todo}.values())  # a value repeated in the grid is computed once
        count = done_before + len(rows)
        if self.progress is not None:
            self.progress(count, total)
        opts = dict(self.spec.options)
        payloads = [([(v.index, v.key, v.generation, dict(v.values), variant_document(self.spec, v.values))
                      for v in ch], opts) for ch in self._chunks(todo)]
        for chunk_rows in self._map(payloads):
            self.store.save_chunk(chunk_rows)
            for r in chunk_rows:
                rows[r["key"]] = r
            self.evaluated += len(chunk_rows)
            count += len(chunk_rows)
            if self.progress is not None:
                self.progress(count, total)
        return [rows[v.key] | {"variant": v.index, "generation": v.generation} for v in variants]

    def _map(self, payloads):
        if self.client is None:
            for p in payloads:
                yield _evaluate_chunk(p)
            return
        from distributed import as_completed

        futures = self.client.map(_evaluate_chunk, payloads, pure=False)
        try:
            for fut in as_completed(futures):
                yield fut.result()
        finally:
            for f in futures:
                f.cancel()


def _nsga2(spec: SweepSpec, engine: _Engine) -> list[dict]:
    """pymoo's NSGA-II over the continuous parameters (the others at their first value)."""
    from pymoo.algorithms.moo.nsga2 import NSGA2
    from pymoo.core.evaluator import Evaluator
    from pymoo.core.problem import Problem as MooProblem
    from pymoo.problems.static import StaticProblem

    free = [p for p in spec.parameters if p.continuous]
    fixed = {p.name: p.values[0] for p in spec.parameters if not p.continuous}
    objectives = spec.objectives
    problem = MooProblem(n_var=len(free), n_obj=len(objectives), n_ieq_constr=1 + len(spec.constraints),
                         xl=np.array([p.low for p in free]), xu=np.array([p.high for p in free]))
    algorithm = NSGA2(pop_size=spec.population, eliminate_duplicates=True)
    algorithm.setup(problem, termination=("n_gen", spec.generations), seed=spec.seed, verbose=False)
    all_rows: dict[str, dict] = {}
    gen, index = 0, 0
    total = spec.population * spec.generations
    while algorithm.has_next():
        pop = algorithm.ask()
        X = pop.get("X")
        variants = []
        for x in X:
            values = dict(fixed)
            for p, v in zip(free, x):
                values[p.name] = int(round(v)) if p.integer else float(v)
            key = variant_key(spec, values)
            if key in all_rows:
                variants.append(Variant(all_rows[key]["variant"], values, key, all_rows[key]["generation"]))
            else:
                variants.append(Variant(index, values, key, gen))
                index += 1
        rows = engine.run(variants, done_before=len(all_rows), total=max(total, len(all_rows) + len(variants)))
        for r in rows:
            all_rows.setdefault(r["key"], r)
        F = np.array([[(-1.0 if s == "max" else 1.0) * r[m] for m, s in objectives.items()] for r in rows], float)
        G = np.array([[0.0 if r["valid"] else 1.0] + [c.violation(r[c.metric]) for c in spec.constraints]
                      for r in rows], float)
        bad = ~np.all(np.isfinite(F), axis=1)
        F[bad] = 1e30  # invalid or unevaluable: infeasible through G, and never preferred
        G[~np.isfinite(G)] = 1e30
        G[bad, 0] = np.maximum(G[bad, 0], 1.0)
        Evaluator().eval(StaticProblem(problem, F=F, G=G), pop)
        algorithm.tell(infills=pop)
        gen += 1
    if engine.progress is not None:  # duplicates the search skipped: the bar ends at 100 %
        engine.progress(len(all_rows), len(all_rows))
    return sorted(all_rows.values(), key=lambda r: r["variant"])


def _dask_client(scheduler: str | None, workers: int | None):
    """A Dask client: to ``scheduler`` when given, else a new local cluster on 127.0.0.1."""
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout="20s"), None
        except (ValueError, OSError, TimeoutError, RuntimeError) as exc:  # a malformed address, or nobody there
            raise SweepError(f"scheduler {scheduler!r}: {exc}; expected the address of a running Dask scheduler "
                             "such as tcp://10.0.0.5:8786") from None
    cluster = LocalCluster(n_workers=workers or os.cpu_count() or 1, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address=None)
    return Client(cluster), cluster


def run_sweep(spec: SweepSpec, folder, *, scheduler: str | None = None, workers: int | None = None,
              serial: bool = False, client=None, progress: Callable[[int, int], None] | None = None,
              fresh: bool = False, sweep_text: str | None = None, chunk: int | None = None) -> SweepResult:
    """Evaluate a sweep into ``folder`` and return the ranked table.

    Parameters
    ----------
    spec : SweepSpec
    folder : results folder (created); completed chunks there are reused, so a rerun continues.
    scheduler : address of an existing Dask scheduler (``tcp://host:port``).
    workers : processes of the local cluster (default: every core).
    serial : evaluate in this process, no Dask.
    client : an existing ``distributed.Client`` to use (it is not closed).
    progress : ``progress(done, total)`` after each completed chunk.
    fresh : discard earlier results in ``folder``.
    sweep_text : the sweep file's text, copied into the folder for ``cablekit best``.
    chunk : variants per task (default: a few tasks per worker, at most 25 variants).

    Returns
    -------
    SweepResult
    """
    store = _Store(Path(folder), spec, sweep_text, fresh=fresh)
    own_client = cluster = None
    if not serial and client is None:
        own_client, cluster = _dask_client(scheduler, workers)
        client = own_client
    engine = _Engine(spec, store, client=None if serial else client, progress=progress, chunk=chunk)
    try:
        if spec.method == "grid":
            rows = engine.run(grid_variants(spec))
        else:
            rows = _nsga2(spec, engine)
    finally:
        if own_client is not None:
            own_client.close()
        if cluster is not None:
            cluster.close()
    table = rank_table(_rows_to_frame(rows, spec), spec.objectives, spec.constraints)
    meta = _meta(spec)
    _write_parquet(table, store.folder / "results.parquet", meta)
    return SweepResult(table=table, folder=store.folder, evaluated=engine.evaluated, reused=engine.reused, meta=meta,
                       damaged=tuple(store.skipped))


def load_results(folder) -> tuple[Any, dict]:
    """The ranked table and metadata of a results folder (``results.parquet``)."""
    path = Path(folder) / "results.parquet"
    if not path.exists():
        raise SweepError(f"{folder}: no results.parquet; run 'cablekit sweep SWEEP.toml -o {folder}' first")
    try:
        table, meta = _read_parquet(path)
    except Exception as exc:
        raise SweepError(f"{path}: not a readable results table ({type(exc).__name__})") from None
    if meta.get("format") != RESULTS_FORMAT:
        raise SweepError(f"{path}: format {meta.get('format')!r}, expected {RESULTS_FORMAT!r}")
    return table, meta


def spec_of_results(folder) -> SweepSpec:
    """The sweep of a results folder, read from its copy ``sweep.toml`` (the base design must still
    be where the sweep file said and unchanged)."""
    folder = Path(folder)
    table, meta = load_results(folder)
    copy_path = folder / "sweep.toml"
    if not copy_path.exists():
        raise SweepError(f"{folder}: sweep.toml is missing (the copy of the sweep file)")
    spec = loads_sweep(copy_path.read_text(encoding="utf-8"), source=meta["sweep_file"],
                       folder=Path(meta["sweep_folder"]))
    if spec.hash != meta["sweep_hash"]:
        raise SweepError(f"{folder}: the base design {spec.design_path} changed since the sweep ran "
                         f"(hash {spec.design_hash[:16]}); run the sweep again")
    return spec


def choose_best(table, meta, *, by: str | None = None, variant: int | None = None):
    """The row to write: ``variant`` when given, else the Pareto member best in ``by`` (default
    the first objective; ties broken by the next objectives). Returns (row, rule text)."""
    objectives = meta["objectives"]
    if variant is not None:
        sel = table[table["variant"] == variant]
        if sel.empty:
            raise SweepError(f"--variant: no variant {variant} in the results (0 to {int(table['variant'].max())})")
        return sel.iloc[0], f"variant {variant}, chosen by hand"
    front = table[table["pareto"]]
    if front.empty:
        raise SweepError("no variant is valid and meets every constraint: nothing to choose; relax the constraints "
                         "or widen the ranges")
    by = by or next(iter(objectives))
    if by not in METRICS:
        raise SweepError(f"--by: {by!r} is not a metric; metrics: {', '.join(METRICS)}")
    order = [by] + [m for m in objectives if m != by]
    sense = {m: objectives.get(m, METRICS[m].better) for m in order}
    keys = np.lexsort([(-1.0 if sense[m] == "max" else 1.0) * front[m].to_numpy(float) for m in reversed(order)])
    row = front.iloc[int(keys[0])]
    return row, (f"from the Pareto front of {len(front)} variants (objectives: "
                 f"{', '.join(f'{k} {v}' for k, v in objectives.items())}), the one with the "
                 f"{'largest' if sense[by] == 'max' else 'smallest'} {by}")


def row_values(spec: SweepSpec, row) -> dict[str, Any]:
    """Parameter values of a table row, typed as the sweep expects."""
    out = {}
    for p in spec.parameters:
        v = row[f"param:{p.name}"]
        out[p.name] = (str(v) if p.kind in ("choice", "text") else bool(v) if p.kind == "bool"
                       else int(round(v)) if p.integer else float(v))
    return out


def _param_text(p: Parameter, v) -> str:
    if p.kind == "quantity":
        return format_quantity(float(v), p.dimension)
    return str(v)


def write_variant_design(spec: SweepSpec, table, meta, row, path, *, rule: str) -> Path:
    """Write the design of ``row`` with a ``[sweep]`` section saying how it was chosen (atomic,
    validated before writing)."""
    import tomli_w

    values = row_values(spec, row)
    doc = variant_document(spec, values)
    by_name = {p.name: p for p in spec.parameters}
    doc["sweep"] = {
        "file": str(meta["sweep_file"]), "file_hash": meta["sweep_file_hash"], "design_file": meta["design_file"],
        "design_hash": meta["design_hash"], "method": meta["method"], "variant": int(row["variant"]),
        "chosen_by": rule, "variants": int(len(table)), "valid": int(table["valid"].sum()),
        "meeting_constraints": int(table["meets_constraints"].sum()), "pareto_size": int(table["pareto"].sum()),
        "options": meta["options_text"],
        "parameters": {k: _param_text(by_name[k], v) for k, v in values.items()},
        "objectives": dict(meta["objectives"]), "constraints": dict(meta["constraints"]),
        "metrics": {m: metric_display(m, float(row[m])) for m in METRICS},
    }
    text = tomli_w.dumps(doc)
    header = (f"# cablekit design written by 'cablekit best' from sweep {meta['sweep_file']}, variant "
              f"{int(row['variant'])}.\n# {CAUTION}\n\n")
    design_from_dict(tomllib.loads(text), source=str(path))  # never write a file we could not read back
    return atomic_write_bytes(Path(path), (header + text).encode("utf-8"))


# --------------------------------------------------------------------------------------
# the [sweep] section of a design written from a sweep (optional section plug-in)
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class SweepProvenance:
    """How a design was chosen: the sweep, the rule, the figures (texts with units)."""

    file: str
    file_hash: str
    design_file: str
    design_hash: str
    method: str
    variant: int
    chosen_by: str
    variants: int
    valid: int
    meeting_constraints: int
    pareto_size: int
    options: str
    parameters: Mapping[str, str]
    objectives: Mapping[str, str]
    constraints: Mapping[str, str]
    metrics: Mapping[str, str]


_TEXT_KEYS = ("file", "file_hash", "design_file", "design_hash", "method", "chosen_by", "options")
_INT_KEYS = ("variant", "variants", "valid", "meeting_constraints", "pareto_size")
_TABLE_KEYS = ("parameters", "objectives", "constraints", "metrics")


def parse_sweep_section(raw, add_problem, path: str, design) -> SweepProvenance | None:
    """Parser of the optional ``[sweep]`` design-file section (see design.OPTIONAL_SECTIONS)."""
    if not isinstance(raw, Mapping):
        add_problem(path, raw, "a table written by 'cablekit best'")
        return None
    ok = True
    for key in raw:
        if key not in (*_TEXT_KEYS, *_INT_KEYS, *_TABLE_KEYS):
            add_problem(f"{path}.{key}", raw[key], "unknown key; allowed here: "
                        + ", ".join(sorted((*_TEXT_KEYS, *_INT_KEYS, *_TABLE_KEYS))))
            ok = False
    vals: dict[str, Any] = {}
    for key in _TEXT_KEYS:
        v = raw.get(key)
        if not isinstance(v, str) or len(v) > 4000:
            add_problem(f"{path}.{key}", v if v is not None else "missing", "a text")
            ok = False
        vals[key] = v
    for key in _INT_KEYS:
        v = raw.get(key)
        if isinstance(v, bool) or not isinstance(v, int) or v < 0:
            add_problem(f"{path}.{key}", v if v is not None else "missing", "a whole number, 0 or more")
            ok = False
        vals[key] = v
    for key in _TABLE_KEYS:
        v = raw.get(key, {})
        if not isinstance(v, Mapping) or not all(isinstance(x, str) for x in v.values()):
            add_problem(f"{path}.{key}", v, "a table of texts")
            ok = False
            v = {}
        vals[key] = dict(v)
    return SweepProvenance(**vals) if ok else None

