"""How precisely the platform lands: error budget, propagation, Monte Carlo and accuracy maps.

The error model
---------------
The controller commands encoder counts computed from the **nominal** design: for a pose ``q``
it pays out ``L_i(q) - h_i`` from the home length ``h_i`` of cable ``i``.  The built rig
differs from the drawing, so the cables end up with the straight lengths

``L_act,i = h_i + dh_i + (L_i(q) - h_i + e_q,i + e_d,i) (1 + dD_i / (D_i + d)) + S_i + g_i``

where ``dh`` is the home-length calibration error, ``e_q`` the encoder quantisation,
``e_d`` the position error the controller ignores (deadband), ``dD`` the error of the drum's
pitch diameter ``D + d`` (a scale error of the payout), ``S`` the change of elastic stretch
from the home pose (``T L / EA``, :func:`cablekit.cables.elastic_stretch`; the controller
does not know the rope's ``EA`` exactly) and ``g`` the chord lost to sag: minus the change
from home of the extra rope a sagging cable needs (Irvine's elastic catenary,
:func:`cablekit.cables.sag_map`).  The true exit points are ``a_i + da_i`` (measured with
a tape), turned with the whole frame by its tilt ``(theta_1, theta_2)`` about two horizontal
axes through ``tilt_pivot``.  The platform settles where the true rig's straight lengths
match ``L_act`` (least squares for ``m > n``, as :func:`~cablekit.kinematics.forward_kinematics`).

To first order (``J = dL/dq``, ``J_a = dL_i/da_i``, ``J+`` the pseudo-inverse)::

    dq = J+ (dL - J_a da)

which gives, per pose, a **bias** (stretch and sag: known sign, not compensated), a
**systematic** part (fixed for a built rig but unknown before measuring it: exit points,
home lengths, drum diameters, frame tilt, rope stiffness, quantisation of the commanded
counts) and a **random** part (different on every visit: the deadband).  Every error size is
the half-width ``a`` of a rectangular distribution ``[-a, a]`` (GUM, JCGM 100:2008, 4.3.7:
``u = a / sqrt(3)``); worst-case interval bounds add ``|dq/ds| a`` over all sources.

:func:`monte_carlo` draws the same errors and solves the forward kinematics of every
perturbed rig (JCGM 101:2008, GUM Supplement 1); :meth:`MonteCarloCheck.validated` applies
its section 8 comparison to the first-order result.

Caution: these are design estimates of a rigid-frame, straight-cable model.  Measure the
built rig (:mod:`cablekit.iso9283`) before relying on its accuracy near people or suspended
loads; local codes and licensed practice govern.

References
----------
JCGM 100:2008, *Evaluation of measurement data - Guide to the expression of uncertainty in
measurement* (GUM), 4.3.7 (rectangular distribution), 5.1 (law of propagation).
JCGM 101:2008, *Propagation of distributions using a Monte Carlo method* (GUM Supplement 1),
7 (Monte Carlo) and 8 (validation of the GUM uncertainty framework).
Widrow, B. and Kollar, I. *Quantization Noise*, Cambridge University Press, 2008, ch. 4
(uniform quantisation error, variance q^2/12).
"""

from __future__ import annotations

import io
import json
import math
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Mapping

import numpy as np

from .limits import MAX_DEADBAND_LENGTH
from .units import UnitError, parse_quantity, parse_vector

__all__ = [
    "ErrorBudget",
    "BUDGET_KEYS",
    "parse_errors_section",
    "error_budget",
    "SOURCES",
    "LinearModel",
    "linear_model",
    "draw_errors",
    "perturbed_rig",
    "MonteCarloCheck",
    "monte_carlo",
    "AccuracyResult",
    "effective_step",
    "accuracy_map",
    "load_accuracy_map",
    "design_checks",
    "latex_equations",
]

BIAS, SYSTEMATIC, RANDOM = "bias", "systematic", "random"
# 95 % quantile of the chi-square distribution with 3 degrees of freedom (NIST/SEMATECH
# e-Handbook of Statistical Methods, 1.3.6.7.4, table of critical values): scales the
# 1-sigma position ellipsoid of a Gaussian error to the one holding 95 % of it
_CHI2_95_3DOF = 7.814727903251178
_DEG = math.pi / 180.0


# --------------------------------------------------------------------------------------
# the error budget ([errors] in the design file)
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class ErrorBudget:
    """Sizes of every error source, SI.  Sizes are half-widths ``a`` of ``[-a, a]``.

    exit_position : error of each exit-point coordinate [m].
    home_length : error of each cable's home (calibration) length [m].
    frame_tilt : tilt of the frame about each of two horizontal axes [rad].
    drum_diameter : error of each drum's pitch diameter (drum + rope) [m]; a scale error of
        the cable paid out.
    quantisation_counts : rounding of commanded lengths to whole counts [counts]; 0.5 for
        rounding to the nearest count.
    deadband_counts : position error the controller ignores [counts]; ``None`` takes each
        winch's ``deadband_counts``.
    axial_stiffness_error : relative error of the rope's axial stiffness EA [-].
    stretch : include elastic stretch from tension changes (uses the tensions of the
        static tension distribution).
    stretch_compensated : the controller adds the nominal stretch to its commands; then only
        the stiffness error remains.
    sag : include the cables' sag (elastic catenary at the static tensions).
    tilt_pivot : point the frame tilts about [m]; ``None``: below the exits' centre, at the
        lowest point of exits, task region and obstacles (the floor).
    required_accuracy : what the task needs: 95 % of builds within this radius [m]
        (``None``: not judged).
    step_fraction : the effective motion step should not exceed this share of the required
        accuracy [-].
    given : keys the design file set (the others are defaults).
    """

    exit_position: float = 5e-3
    home_length: float = 2e-3
    frame_tilt: float = 1e-3
    drum_diameter: float = 0.1e-3
    quantisation_counts: float = 0.5
    deadband_counts: float | None = None
    axial_stiffness_error: float = 0.2
    stretch: bool = True
    stretch_compensated: bool = False
    sag: bool = True
    tilt_pivot: tuple[float, float, float] | None = None
    required_accuracy: float | None = None
    step_fraction: float = 0.25
    given: frozenset = field(default_factory=frozenset)


@dataclass(frozen=True)
class _Key:
    kind: str  # "length", "angle", "number", "bool", "vector"
    label: str
    source: str
    minimum: float = 0.0
    maximum: float | None = None
    positive: bool = False


# one entry per [errors] key: what it is and where its default comes from
BUDGET_KEYS: dict[str, _Key] = {
    "exit_position": _Key("length", "exit-point position, each coordinate (+/-)",
                          "common practice, no source: exit points located with a tape measure on a "
                          "site-built frame, +/- 5 mm", maximum=0.1),
    "home_length": _Key("length", "home (calibration) length of each cable (+/-)",
                        "common practice, no source: cable set to a mark at the home pose by hand, +/- 2 mm",
                        maximum=0.1),
    "frame_tilt": _Key("angle", "frame tilt about each horizontal axis (+/-)",
                       "common practice, no source: frame levelled with a builder's spirit level, "
                       "about 1 mm per metre (1 mrad)", maximum=0.1),
    "drum_diameter": _Key("length", "pitch diameter of each drum, drum + rope (+/-)",
                          "common practice, no source: turned drum plus rope-diameter variation, +/- 0.1 mm",
                          maximum=0.01),
    "quantisation_counts": _Key("number", "rounding of commanded lengths to counts (+/-) [counts]",
                                "rounding to the nearest count: +/- 0.5 count (Widrow and Kollar, "
                                "Quantization Noise, 2008)", maximum=1000.0),
    "deadband_counts": _Key("number", "position error the controller ignores (+/-) [counts]",
                            "each winch's deadband_counts from the design file", maximum=1e6),
    "axial_stiffness_error": _Key("number", "relative error of the rope's axial stiffness EA (+/-)",
                                  "common practice, no source: wire-rope EA varies with load history and "
                                  "bedding-in, +/- 20 %", maximum=0.9),
    "stretch": _Key("bool", "include elastic stretch from tension changes", "on: Hooke's law T L / EA"),
    "stretch_compensated": _Key("bool", "controller compensates the nominal stretch",
                                "off: commands are geometric lengths"),
    "sag": _Key("bool", "include cable sag (elastic catenary)", "on: Irvine, Cable Structures, 1981"),
    "tilt_pivot": _Key("vector", "point the frame tilts about",
                       "below the exits' centre at floor level (lowest exit, task or obstacle point)"),
    "required_accuracy": _Key("length", "required accuracy: 95 % of builds within this radius",
                              "not judged unless given", positive=True, maximum=10.0),
    "step_fraction": _Key("number", "largest effective motion step as a share of the required accuracy",
                          "common practice, no source: positioning resolution about 4x finer than the "
                          "tolerance", positive=True, maximum=1.0),
}


def parse_errors_section(raw, add_problem: Callable[[str, Any, str], None], path: str, design) -> ErrorBudget | None:
    """Parse the optional ``[errors]`` table of a design file into an :class:`ErrorBudget`.

    Every problem is reported through ``add_problem(field_path, value, expected)``; the
    return value is then ``None``.  Quantities take units (``"5 mm"``, ``"0.05 deg"``);
    counts and shares are plain numbers (``0.2`` or ``"20 %"`` for a share).
    """
    if not isinstance(raw, Mapping):
        add_problem(path, raw, "a table of error sizes such as exit_position = '5 mm'")
        return None
    ok = True
    values: dict[str, Any] = {}
    for key, value in raw.items():
        full = f"{path}.{key}"
        spec = BUDGET_KEYS.get(key)
        if spec is None:
            add_problem(full, value, f"unknown key; allowed here: {', '.join(sorted(BUDGET_KEYS))}")
            ok = False
            continue
        try:
            if spec.kind == "bool":
                if not isinstance(value, bool):
                    raise UnitError("expected true or false")
                values[key] = value
                continue
            if spec.kind == "vector":
                values[key] = tuple(parse_vector(value, "length", field=full))
                continue
            if spec.kind == "number":
                if isinstance(value, str) and value.strip().endswith("%"):
                    v = parse_quantity(value.strip()[:-1], "dimensionless", field=full) / 100.0
                else:
                    v = parse_quantity(value, "dimensionless", field=full)
            else:
                v = parse_quantity(value, spec.kind, field=full)
        except UnitError as exc:
            add_problem(full, value, str(exc).split(": ", 1)[-1])
            ok = False
            continue
        if spec.positive and not v > 0:
            add_problem(full, value, "must be greater than zero")
            ok = False
        elif v < spec.minimum:
            add_problem(full, value, "must not be negative")
            ok = False
        elif spec.maximum is not None and v > spec.maximum:
            shown = {"length": f"{spec.maximum * 1e3:g} mm", "angle": f"{spec.maximum / _DEG:.3g} deg"}.get(
                spec.kind, f"{spec.maximum:g}")
            add_problem(full, value, f"at most {shown}: larger errors are outside the small-error model; "
                                     "fix the rig or the design first")
            ok = False
        elif key in ("deadband_counts", "quantisation_counts") and _count_length(design, v) > MAX_DEADBAND_LENGTH:
            add_problem(full, value, f"at most {MAX_DEADBAND_LENGTH * 1e3:g} mm of cable ({_count_length(design, v):.3g} m "
                                     "here): larger errors are outside the small-error model (cablekit.limits)")
            ok = False
        else:
            values[key] = float(v)
    if not ok:
        return None
    return ErrorBudget(**values, given=frozenset(values))


def _count_length(design, counts: float) -> float:
    """The longest cable length ``counts`` encoder counts stand for on any winch [m]."""
    from .kinematics import length_per_count

    return float(counts * np.max(length_per_count(design)))


def error_budget(design) -> ErrorBudget:
    """The design's parsed ``[errors]`` budget, or the defaults when the section is absent."""
    budget = design.sections.get("errors") if design is not None else None
    return budget if isinstance(budget, ErrorBudget) else ErrorBudget()


# --------------------------------------------------------------------------------------
# error sources
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class Source:
    key: str
    label: str
    kind: str  # bias / systematic / random


SOURCES: tuple[Source, ...] = (
    Source("quantisation", "encoder quantisation", SYSTEMATIC),
    Source("deadband", "controller deadband", RANDOM),
    Source("home_length", "home length", SYSTEMATIC),
    Source("drum_diameter", "drum diameter (scale)", SYSTEMATIC),
    Source("exit_position", "exit points", SYSTEMATIC),
    Source("frame_tilt", "frame tilt", SYSTEMATIC),
    Source("axial_stiffness", "rope stiffness EA", SYSTEMATIC),
    Source("stretch", "elastic stretch", BIAS),
    Source("sag", "cable sag", BIAS),
)
_SOURCE_INDEX = {s.key: k for k, s in enumerate(SOURCES)}


def _horizontal_axes(design) -> np.ndarray:
    """Two orthonormal axes perpendicular to gravity, shape (2, 3)."""
    g = np.asarray(design.frame.gravity_direction, float)
    g = g / np.linalg.norm(g)
    trial = np.array([1.0, 0.0, 0.0]) if abs(g[0]) < 0.9 else np.array([0.0, 1.0, 0.0])
    e1 = trial - (trial @ g) * g
    e1 /= np.linalg.norm(e1)
    e2 = np.cross(g, e1)
    if e2 @ np.array([0.0, 1.0, 0.0]) < 0 and abs(g[2]) > 0.9:
        e2 = -e2  # x and y for the usual z-up world
    return np.array([e1, e2])


def tilt_pivot(design, budget: ErrorBudget | None = None) -> np.ndarray:
    """The point the frame tilts about [m] (see :class:`ErrorBudget`)."""
    budget = error_budget(design) if budget is None else budget
    if budget.tilt_pivot is not None:
        return np.asarray(budget.tilt_pivot, float)
    g = np.asarray(design.frame.gravity_direction, float)
    g = g / np.linalg.norm(g)
    pts = [design.exits]
    t = design.task
    if t.box_lower is not None:
        pts.append(np.array([t.box_lower, t.box_upper]))
    if t.points:
        pts.append(np.array(t.points))
    for o in design.frame.obstacles:
        pts.append(np.array([o.lower, o.upper]))
    allpts = np.vstack(pts)
    centre = design.exits.mean(axis=0)
    lowest = float(np.max(allpts @ g))  # furthest along gravity
    return centre - (centre @ g) * g + lowest * g


def _rotation_vectors(omega) -> np.ndarray:
    """Rotation matrices for rotation vectors (K, 3) (Rodrigues' formula)."""
    w = np.asarray(omega, float)
    th = np.linalg.norm(w, axis=1)
    k = np.divide(w, th[:, None], out=np.zeros_like(w), where=th[:, None] > 0)
    K = np.zeros((len(w), 3, 3))
    K[:, 0, 1], K[:, 0, 2], K[:, 1, 2] = -k[:, 2], k[:, 1], -k[:, 0]
    K[:, 1, 0], K[:, 2, 0], K[:, 2, 1] = k[:, 2], -k[:, 1], k[:, 0]
    s, c = np.sin(th)[:, None, None], np.cos(th)[:, None, None]
    return np.eye(3) + s * K + (1 - c) * (K @ K)


def _sag_deficit(design, poses, tensions) -> np.ndarray:
    """Rope a sagging cable needs beyond the straight elastic cable, (N, m) [m]; NaN where
    the catenary is not solved (:func:`cablekit.cables.sag_map`, Irvine's elastic catenary)."""
    from .cables import sag_map

    sm = sag_map(design, poses=poses, tensions=tensions)
    return np.where(sm.valid, sm.length_change, np.nan)


def _tensions(design, poses, progress=None, chunk: int = 500):
    """Static tensions (N, m) and feasibility (N,), in chunks with progress reports."""
    from .statics import tensions_at

    N = len(poses)
    T = np.empty((N, design.m))
    ok = np.empty(N, bool)
    for s in range(0, N, chunk):
        e = min(N, s + chunk)
        res = tensions_at(design, poses[s:e])
        T[s:e] = res.tensions
        ok[s:e] = res.feasible & np.all(np.isfinite(res.tensions), axis=1)
        if progress is not None:
            progress("tensions", e, N)
    return T, ok


# --------------------------------------------------------------------------------------
# first order
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class LinearModel:
    """First-order pose error at N poses: ``dq = bias + sensitivity @ s``.

    ``s`` holds every elementary error (k of them) in the order of :data:`SOURCES`:
    quantisation (m) [m], deadband (m) [m], home length (m) [m], drum pitch diameter (m) [m],
    exit points (3m, cable-major) [m], frame tilt (2) [rad], rope stiffness (m) [-].

    poses : (N, n); lengths : (N, m) nominal lengths [m]; pinv : (N, n, m) ``J+`` [m/m];
    sensitivity : (N, n, k) ``dq/ds``; half_width : (k,) bound of each ``s``;
    source_of : (k,) index into :data:`SOURCES`; bias_by_source : (N, n, S) [m, rad];
    stretch_change : (N, m) stretch relative to home [m]; sag_change : (N, m) or None;
    feasible : (N,) the pose is inside the wrench-feasible workspace (tensions exist) and
    every cable's sag was solved; sag_unsolved : poses left out because a catenary was not
    solved; pivot : (3,) tilt pivot [m]; budget : the :class:`ErrorBudget` used.  Rows where
    ``feasible`` is False carry numbers that mean nothing physically (no tension holds the
    platform there, so its stretch is taken at zero tension); :func:`accuracy_map` blanks them.
    """

    poses: np.ndarray
    lengths: np.ndarray
    pinv: np.ndarray
    sensitivity: np.ndarray
    half_width: np.ndarray
    source_of: np.ndarray
    bias_by_source: np.ndarray
    stretch_change: np.ndarray
    sag_change: np.ndarray | None
    feasible: np.ndarray
    sag_unsolved: int
    pivot: np.ndarray
    budget: ErrorBudget

    @property
    def bias(self) -> np.ndarray:
        """Deterministic pose error (N, n) [m, rad]."""
        return self.bias_by_source.sum(axis=2)

    def variance_weights(self) -> np.ndarray:
        """Variance of each elementary error, ``a^2 / 3`` (rectangular, GUM 4.3.7)."""
        return self.half_width**2 / 3.0

    def covariance(self, *, kinds: tuple[str, ...] | None = None, source: str | None = None) -> np.ndarray:
        """Pose-error covariance (N, n, n) of the chosen sources (all by default)."""
        sel = np.ones(len(self.half_width), bool)
        if kinds is not None:
            sel &= np.isin(self.source_of, [k for k, s in enumerate(SOURCES) if s.kind in kinds])
        if source is not None:
            sel &= self.source_of == _SOURCE_INDEX[source]
        G = self.sensitivity[:, :, sel]
        return (G * self.variance_weights()[sel]) @ np.swapaxes(G, 1, 2)

    def worst_case(self) -> np.ndarray:
        """Interval bound of each pose component (N, n): ``|bias| + sum |dq/ds| a``."""
        return np.abs(self.bias) + np.abs(self.sensitivity) @ self.half_width

    def source_contributions(self) -> np.ndarray:
        """Each source's share of the mean-square position error, (N, S) [m^2].

        Bias sources contribute ``|b|^2``, the others the trace of their position covariance.
        """
        N = self.poses.shape[0]
        out = np.zeros((N, len(SOURCES)))
        w = self.variance_weights()
        Gp2 = np.sum(self.sensitivity[:, :3, :] ** 2, axis=1) * w  # (N, k)
        for k in range(len(SOURCES)):
            sel = self.source_of == k
            if np.any(sel):
                out[:, k] = Gp2[:, sel].sum(axis=1)
        out += np.sum(self.bias_by_source[:, :3, :] ** 2, axis=1)
        return out

    def sample(self, draws: np.ndarray, rows=slice(None)) -> np.ndarray:
        """Linear pose errors for elementary-error draws (K, k) at ``rows``: (N_rows, K, n)."""
        G = self.sensitivity[rows]
        return self.bias[rows][:, None, :] + np.swapaxes(G @ np.asarray(draws).T, 1, 2)


def _layout(m: int) -> dict[str, slice]:
    sizes = [("quantisation", m), ("deadband", m), ("home_length", m), ("drum_diameter", m),
             ("exit_position", 3 * m), ("frame_tilt", 2), ("axial_stiffness", m)]
    out, s = {}, 0
    for key, n in sizes:
        out[key] = slice(s, s + n)
        s += n
    return out


def _half_widths(design, budget: ErrorBudget) -> np.ndarray:
    from .kinematics import length_per_count

    m = design.m
    lay = _layout(m)
    hw = np.zeros(lay["axial_stiffness"].stop)
    lpc = length_per_count(design)
    # the winch's dead band as a +/- half-width (deadband_definition read by Winch.deadband_half_counts)
    db = np.array([w.deadband_half_counts for w in design.winches], float) if budget.deadband_counts is None \
        else np.full(m, budget.deadband_counts)
    hw[lay["quantisation"]] = budget.quantisation_counts * lpc
    hw[lay["deadband"]] = db * lpc
    hw[lay["home_length"]] = budget.home_length
    hw[lay["drum_diameter"]] = budget.drum_diameter
    hw[lay["exit_position"]] = budget.exit_position
    hw[lay["frame_tilt"]] = budget.frame_tilt
    hw[lay["axial_stiffness"]] = budget.axial_stiffness_error if budget.stretch else 0.0
    return hw


def _pitch_diameters(design) -> np.ndarray:
    return np.array([w.drum_diameter + design.cable.diameter for w in design.winches], float)


def linear_model(design, poses, *, budget: ErrorBudget | None = None, tensions=None, progress=None) -> LinearModel:
    """First-order propagation of the error budget to the pose at ``poses`` (N, n).

    Parameters
    ----------
    design : Design
    poses : array (N, n) [m, rad]
    budget : ErrorBudget; default the design's ``[errors]`` (or the defaults).
    tensions : optional (tensions (N, m) [N], feasible (N,)) already computed for ``poses``.
    progress : optional ``progress(stage, done, total)`` callback.

    Notes
    -----
    ``dq = J+ (dL - J_a da)``, GUM (JCGM 100:2008) 5.1.2 law of propagation applied to the
    model in the module notes; ``J+ = (J^T J)^-1 J^T`` (the unweighted least-squares pose
    of :func:`~cablekit.kinematics.forward_kinematics`; the real equilibrium of a redundant
    rig weighs each cable by its stiffness ``EA / L``).
    """
    from .cables import elastic_stretch
    from .kinematics import (as_poses, cable_lengths, count_jacobians, home_lengths, length_jacobian,
                             parameter_jacobians)

    budget = error_budget(design) if budget is None else budget
    q = as_poses(design, poses)
    N, n = q.shape
    m = design.m
    L = cable_lengths(design, q)
    # a cable of zero length (attachment at its exit) has no direction: NaN derivatives; such a
    # pose is infeasible ("no solution / singular", see statics.tensions_at) and its numbers are not shown
    J = np.nan_to_num(length_jacobian(design, q), nan=0.0)
    Ja = np.nan_to_num(parameter_jacobians(design, q).exits, nan=0.0)  # (N, m, 3)
    Jp = np.linalg.pinv(J)  # (N, n, m)
    h = home_lengths(design)
    # the counts the controller holds fixed: c(L, h, D) = c_cmd, so an error in the home
    # length or the drum diameter moves the cable length by -(dc/dh dh + dc/dD dD) / (dc/dL)
    cj = count_jacobians(design, L)
    lay = _layout(m)
    k_total = lay["axial_stiffness"].stop
    G = np.zeros((N, n, k_total))
    G[:, :, lay["quantisation"]] = Jp
    G[:, :, lay["deadband"]] = Jp
    G[:, :, lay["home_length"]] = Jp * (-cj.home_length / cj.length)[:, None, :]
    G[:, :, lay["drum_diameter"]] = Jp * (-cj.drum_diameter / cj.length)[:, None, :]
    # exits: dL_i = -J_a,i . da_i  ->  dq = -J+_i (J_a,i . da_i)
    G[:, :, lay["exit_position"]] = -(Jp[:, :, :, None] * Ja[:, None, :, :]).reshape(N, n, 3 * m)
    # tilt: da_i = omega x (a_i - c), omega = theta_1 e_1 + theta_2 e_2
    pivot = tilt_pivot(design, budget)
    axes = _horizontal_axes(design)
    arm = design.exits - pivot  # (m, 3)
    da_dtheta = np.stack([np.cross(axes[k], arm) for k in range(2)], axis=-1)  # (m, 3, 2)
    dL_dtheta = -np.einsum("Nij,ijk->Nik", Ja, da_dtheta)  # (N, m, 2)
    G[:, :, lay["frame_tilt"]] = Jp @ dL_dtheta
    # stretch relative to home, from the static tensions
    if tensions is None:
        T, feasible = _tensions(design, q, progress=progress)
    else:
        T, feasible = (np.asarray(tensions[0], float), np.asarray(tensions[1], bool))
    bias = np.zeros((N, n, len(SOURCES)))
    stretch = np.zeros((N, m))
    sag = None
    sag_unsolved = 0
    if budget.stretch or budget.sag:
        T_home, _ = _tensions(design, np.asarray(design.home_pose, float)[None, :])
        if not np.all(np.isfinite(T_home)):
            raise ValueError("no tension holds the platform at the home pose: stretch and sag cannot be referred "
                             "to home; move home.position into the workspace or set stretch = false in [errors]")
        T_ref = np.where(np.isfinite(T), T, 0.0)
        if budget.stretch:
            EA = design.cable.axial_stiffness
            stretch = elastic_stretch(T_ref, L, EA) - elastic_stretch(T_home[0], h, EA)
            G[:, :, lay["axial_stiffness"]] = Jp * (-stretch)[:, None, :]
            if not budget.stretch_compensated:
                bias[:, :, _SOURCE_INDEX["stretch"]] = (Jp @ stretch[..., None])[..., 0]
        if budget.sag:
            # the controller pays out straight-cable lengths; a sagging cable short of rope
            # pulls its chord in by the rope it lacks (relative to home, where it was set)
            home_deficit = _sag_deficit(design, np.asarray(design.home_pose, float)[None, :], T_home)
            if not np.all(np.isfinite(home_deficit)):
                raise ValueError("the sag of a cable at the home pose cannot be solved; set sag = false in [errors]")
            sag = -(_sag_deficit(design, q, np.where(feasible[:, None], T_ref, np.nan)) - home_deficit)
            unsolved = feasible & ~np.all(np.isfinite(sag), axis=1)
            sag_unsolved = int(np.sum(unsolved))
            feasible = feasible & ~unsolved
            sag = np.where(np.isfinite(sag), sag, 0.0)
            bias[:, :, _SOURCE_INDEX["sag"]] = (Jp @ sag[..., None])[..., 0]
    return LinearModel(poses=q, lengths=L, pinv=Jp, sensitivity=G, half_width=_half_widths(design, budget),
                       source_of=_source_of(m), bias_by_source=bias, stretch_change=stretch, sag_change=sag,
                       feasible=feasible, sag_unsolved=sag_unsolved, pivot=pivot, budget=budget)


def _source_of(m: int) -> np.ndarray:
    lay = _layout(m)
    out = np.empty(lay["axial_stiffness"].stop, int)
    for key, sl in lay.items():
        out[sl] = _SOURCE_INDEX[key]
    return out


# --------------------------------------------------------------------------------------
# sampling: the same draws feed the linear model and the perturbed rigs
# --------------------------------------------------------------------------------------
def draw_errors(design, budget: ErrorBudget | None, samples: int, rng) -> np.ndarray:
    """Elementary errors (samples, k), each uniform in ``[-a, a]`` (layout of :class:`LinearModel`)."""
    budget = error_budget(design) if budget is None else budget
    hw = _half_widths(design, budget)
    return rng.uniform(-1.0, 1.0, (int(samples), hw.size)) * hw


def perturbed_rig(design, draws, *, budget: ErrorBudget | None = None, pivot=None) -> np.ndarray:
    """True exit points of the sampled rigs (K, m, 3) [m]: measured errors, then frame tilt."""
    budget = error_budget(design) if budget is None else budget
    m = design.m
    lay = _layout(m)
    S = np.atleast_2d(draws)
    pivot = tilt_pivot(design, budget) if pivot is None else np.asarray(pivot, float)
    a = design.exits[None] + S[:, lay["exit_position"]].reshape(-1, m, 3)
    omega = S[:, lay["frame_tilt"]] @ _horizontal_axes(design)
    R = _rotation_vectors(omega)
    return pivot + np.einsum("Kij,Kmj->Kmi", R, a - pivot)


def _actual_lengths(design, model: LinearModel, row: int, draws) -> np.ndarray:
    """Straight lengths the sampled rigs reach when commanded to ``model.poses[row]`` (K, m)."""
    from .kinematics import home_lengths

    lay = _layout(design.m)
    S = np.atleast_2d(draws)
    h = home_lengths(design)
    L = model.lengths[row]
    scale = 1.0 + S[:, lay["drum_diameter"]] / _pitch_diameters(design)
    Lact = h + S[:, lay["home_length"]] + (L - h + S[:, lay["quantisation"]] + S[:, lay["deadband"]]) * scale
    b = model.budget
    if b.stretch:
        dS = model.stretch_change[row]
        true_stretch = dS / (1.0 + S[:, lay["axial_stiffness"]])
        Lact = Lact + (true_stretch - dS if b.stretch_compensated else true_stretch)
    if model.sag_change is not None:
        Lact = Lact + model.sag_change[row]
    return Lact


@dataclass(frozen=True)
class MonteCarloCheck:
    """Monte Carlo propagation at a few poses (JCGM 101:2008) beside the first-order result.

    rows : (P,) rows of the map checked; poses : (P, n); samples : M draws per pose;
    errors : (P, M, n) pose errors of the perturbed rigs (forward kinematics) [m, rad];
    linear : (P, M, n) first-order errors for the same draws; solved : (P, M) the forward
    kinematics converged; mean_fo, cov_fo : first-order mean (bias) (P, n) and covariance
    (P, n, n); worst_case : (P, n) first-order interval bounds.
    """

    rows: np.ndarray
    poses: np.ndarray
    samples: int
    errors: np.ndarray
    linear: np.ndarray
    solved: np.ndarray
    mean_fo: np.ndarray
    cov_fo: np.ndarray
    worst_case: np.ndarray

    @property
    def mean_mc(self) -> np.ndarray:
        return np.array([self.errors[p][self.solved[p]].mean(axis=0) for p in range(len(self.rows))])

    @property
    def cov_mc(self) -> np.ndarray:
        return np.array([np.cov(self.errors[p][self.solved[p]], rowvar=False) for p in range(len(self.rows))])

    def inside_worst_case(self) -> np.ndarray:
        """(P,) share of solved samples inside the first-order worst-case box."""
        inside = np.all(np.abs(self.errors) <= self.worst_case[:, None, :] * (1 + 1e-9) + 1e-15, axis=2)
        return np.array([inside[p][self.solved[p]].mean() for p in range(len(self.rows))])

    def validated(self, *, coverage: float = 0.95, digits: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """JCGM 101:2008 section 8.2: is the first-order (GUM framework) interval confirmed?

        For each pose and pose component: the first-order interval ``y +/- k u`` (``k`` of a
        Gaussian at ``coverage``) against the probabilistically symmetric Monte Carlo
        interval ``[y_low, y_high]``; validated when ``|y - U - y_low|`` and ``|y + U - y_high|``
        are both within the numerical tolerance ``delta = 10^l / 2`` of ``u`` written with
        ``digits`` significant digits (7.9.2).  The Monte Carlo interval ends carry their own
        sampling error (7.9 would add samples until it is below ``delta``); here the
        tolerance is widened by twice that error, ``sqrt(p (1 - p) / M) / f(y_p)`` with the
        density ``f`` of the first-order Gaussian.  Returns (validated (P, n) bool, the larger
        endpoint difference (P, n) [m, rad]).
        """
        from statistics import NormalDist

        k = NormalDist().inv_cdf(0.5 + coverage / 2)
        P, _, n = self.errors.shape
        ok = np.zeros((P, n), bool)
        dmax = np.zeros((P, n))
        tail = (1 - coverage) / 2
        for p in range(P):
            e = self.errors[p][self.solved[p]]
            if len(e) < 2:
                continue
            lo, hi = np.quantile(e, [tail, 1 - tail], axis=0)
            u = np.sqrt(np.diag(self.cov_fo[p]))
            y = self.mean_fo[p]
            d = np.maximum(np.abs(y - k * u - lo), np.abs(y + k * u - hi))
            with np.errstate(divide="ignore"):
                ell = np.floor(np.log10(np.where(u > 0, u, 1e-300))) - (digits - 1)
            delta = 0.5 * 10.0**ell
            se = np.sqrt(tail * (1 - tail) / len(e)) * u / NormalDist().pdf(k)
            ok[p] = np.where(u > 0, d <= delta + 2 * se, d < 1e-12)
            dmax[p] = d
        return ok, dmax


def monte_carlo(design, model: LinearModel, rows, *, samples: int = 10_000, seed: int = 0,
                progress=None) -> MonteCarloCheck:
    """Monte Carlo propagation (JCGM 101:2008, 7) at ``model.poses[rows]``.

    Every sample is a whole perturbed rig: exit points, frame tilt, home lengths, drum
    diameters, rope stiffness, quantisation and deadband drawn from their rectangular
    distributions; its pose is found by :func:`~cablekit.kinematics.forward_kinematics`
    with ``exits=`` the sampled exit points (vectorised over samples).  The draws are shared
    with the first-order model (``linear``) so the two can be compared sample by sample.
    """
    from .kinematics import cable_lengths, forward_kinematics, length_jacobian

    rows = np.atleast_1d(np.asarray(rows, int))
    rng = np.random.default_rng(seed)
    draws = draw_errors(design, model.budget, samples, rng)
    exits = perturbed_rig(design, draws, budget=model.budget, pivot=model.pivot)
    P, n = len(rows), design.dof
    errors = np.empty((P, samples, n))
    solved = np.empty((P, samples), bool)
    for j, r in enumerate(rows):
        Lact = _actual_lengths(design, model, r, draws)
        fk = forward_kinematics(design, Lact, guess=model.poses[r], exits=exits, consistency_tol=np.inf,
                                starts=1)  # warm start: no restarts
        q = fk.poses
        errors[j] = q - model.poses[r]
        # at a least-squares solution J^T (L(q) - L_act) = 0, so the Gauss-Newton step still to
        # take, J+ (L(q) - L_act), measures how far the sample is from its solution
        res = cable_lengths(design, q, exits=exits) - Lact
        left = np.linalg.norm((np.linalg.pinv(length_jacobian(design, q, exits=exits)) @ res[..., None])[..., 0],
                              axis=1)
        tol = 1e-9 * np.maximum(1.0, Lact.max(axis=1)) + 1e-6 * np.linalg.norm(errors[j], axis=1)
        solved[j] = np.all(np.isfinite(q), axis=1) & (left <= tol)
        if progress is not None:
            progress("Monte Carlo", j + 1, P)
    linear = model.sample(draws, rows)
    return MonteCarloCheck(rows=rows, poses=model.poses[rows], samples=int(samples), errors=errors, linear=linear,
                           solved=solved, mean_fo=model.bias[rows], cov_fo=model.covariance()[rows],
                           worst_case=model.worst_case()[rows])


# --------------------------------------------------------------------------------------
# maps over the task region
# --------------------------------------------------------------------------------------
@dataclass(frozen=True)
class AccuracyResult:
    """Predicted accuracy over the task region (arrays ready to plot, SI units).

    Per pose (N rows; NaN where ``feasible`` is False: no tension holds the platform there,
    so no accuracy is given):

    poses (N, n); positions (N, 3); feasible (N,); bias (N, n) deterministic error;
    cov_systematic, cov_random (N, n, n); std_position (N,) RMS of the random and
    systematic position error [m]; worst_case (N, n) interval bounds per component;
    worst_position (N,) norm of the position bounds [m]; p95_position (N,) 95th percentile of
    the position error over ``builds`` sampled rigs [m]; ellipsoid_axes (N, 3) semi-axes of
    the 95 % position-error ellipsoid (Gaussian approximation), ellipsoid_dirs (N, 3, 3)
    their directions (columns); random_3sigma (N,) three times the largest random standard
    deviation (a repeatability estimate) [m]; source_ms (N, S) each source's contribution to
    the mean-square position error [m^2]; dominant (N,) index into ``source_keys`` (-1 where
    infeasible); step (N,) effective motion step at the platform: the largest platform move
    from one effective step (the dead band's width, at least one count) on a single cable,
    see :func:`effective_step` [m]; orientation_std, orientation_worst (N, 3) for rigid platforms
    [rad] (``None`` for points).

    Grid: position_index, orientation_index (N,), grid_shape, grid_step [m], coarsened
    (the grid step was enlarged to keep the pose count within ``max_poses``).
    """

    design_name: str
    kind: str
    poses: np.ndarray
    positions: np.ndarray
    feasible: np.ndarray
    bias: np.ndarray
    cov_systematic: np.ndarray
    cov_random: np.ndarray
    std_position: np.ndarray
    worst_case: np.ndarray
    worst_position: np.ndarray
    p95_position: np.ndarray
    ellipsoid_axes: np.ndarray
    ellipsoid_dirs: np.ndarray
    random_3sigma: np.ndarray
    source_ms: np.ndarray
    dominant: np.ndarray
    step: np.ndarray
    orientation_std: np.ndarray | None
    orientation_worst: np.ndarray | None
    position_index: np.ndarray
    orientation_index: np.ndarray
    grid_shape: tuple | None
    grid_step: float
    coarsened: bool
    builds: int
    budget: ErrorBudget
    sag_modelled: bool
    sag_unsolved: int
    monte_carlo: MonteCarloCheck | None = None
    source_keys: tuple[str, ...] = tuple(s.key for s in SOURCES)
    source_labels: tuple[str, ...] = tuple(s.label for s in SOURCES)
    source_kinds: tuple[str, ...] = tuple(s.kind for s in SOURCES)

    # -- reductions -------------------------------------------------------------------
    def _finite(self, values) -> np.ndarray:
        v = np.asarray(values, float)
        return v[self.feasible & np.isfinite(v)]

    def worst_p95(self) -> tuple[float, np.ndarray | None]:
        """Largest 95 % position error over feasible poses [m] and where."""
        v = np.where(self.feasible, self.p95_position, -np.inf)
        if not np.any(self.feasible):
            return math.nan, None
        k = int(np.argmax(v))
        return float(v[k]), self.positions[k]

    def per_position(self, values, reduce=np.nanmax) -> np.ndarray:
        """Reduce a per-pose array (N,) to one value per distinct position (max over orientations)."""
        P = int(self.position_index.max()) + 1 if len(self.position_index) else 0
        out = np.full(P, np.nan)
        vals = np.where(self.feasible, np.asarray(values, float), np.nan)
        for p in range(P):
            sel = vals[self.position_index == p]
            if np.any(np.isfinite(sel)):
                out[p] = reduce(sel)
        return out

    def dominant_counts(self) -> dict[str, int]:
        out = {}
        for k, key in enumerate(self.source_keys):
            c = int(np.sum(self.dominant == k))
            if c:
                out[key] = c
        return out

    # -- text -------------------------------------------------------------------------
    def summary(self) -> list[str]:
        mm = 1e3
        b = self.budget
        N = len(self.poses)
        nf = int(np.sum(self.feasible))
        lines = [f"Accuracy of {self.design_name}: {N:,} poses over the task region "
                 f"(grid step {self.grid_step * mm:g} mm{', enlarged to keep the run short' if self.coarsened else ''})"]
        lines.append("  error sources (+/- half-widths of rectangular distributions; '*' = default, not in [errors]):")
        for key, text in _budget_lines(b):
            lines.append(f"    {'*' if key not in b.given else ' '} {text}")
        if nf < N:
            lines.append(f"  {N - nf:,} of {N:,} poses lie outside the wrench-feasible workspace (a cable would be "
                         "slack or overloaded)" + (f" or have a cable whose sag was not solved ({self.sag_unsolved})"
                                                    if self.sag_unsolved else "") + ": no accuracy is given there")
        if nf == 0:
            lines.append("  no feasible pose: nothing to report")
            return lines + _CAUTION
        p95 = self._finite(self.p95_position)
        wc = self._finite(self.worst_position)
        rnd = self._finite(self.random_3sigma)
        stp = self._finite(self.step)
        worst, where = self.worst_p95()
        bias_norm = self._finite(np.linalg.norm(self.bias[:, :3], axis=1))
        lines.append(f"  position error over {nf:,} feasible poses ({self.builds:,} sampled builds of the rig):")
        lines.append(f"    95 % of builds within : median {np.median(p95) * mm:.2f} mm, worst {worst * mm:.2f} mm "
                     f"at ({', '.join(f'{v:.3g}' for v in where)}) m")
        lines.append(f"    worst-case bound      : median {np.median(wc) * mm:.2f} mm, worst {np.max(wc) * mm:.2f} mm")
        lines.append(f"    bias (stretch, sag)   : up to {np.max(bias_norm) * mm:.2f} mm")
        lines.append(f"    random (3 sigma)      : up to {np.max(rnd) * mm:.3f} mm  (visit-to-visit; compare with ISO "
                     "9283 RP)")
        ms = self.source_ms[self.feasible]
        share = ms / np.maximum(ms.sum(axis=1, keepdims=True), 1e-300)
        med = np.median(share, axis=0)
        order = np.argsort(-med)
        lines.append("    share of the mean-square error (median over the region): "
                     + ", ".join(f"{self.source_labels[k]} {med[k] * 100:.0f} %" for k in order if med[k] >= 0.005))
        counts = self.dominant_counts()
        lines.append("    dominant source: " + ", ".join(
            f"{self.source_labels[self.source_keys.index(k)]} at {c / nf * 100:.0f} % of poses"
            for k, c in sorted(counts.items(), key=lambda kv: -kv[1])))
        lines.append(f"  effective motion step at the platform (dead band width on one cable): median "
                     f"{np.median(stp) * mm:.3f} mm, "
                     f"largest {np.max(stp) * mm:.3f} mm")
        if self.orientation_std is not None:
            ow = self.orientation_worst[self.feasible]
            os_ = self.orientation_std[self.feasible]
            lines.append(f"  orientation error: RMS up to {np.nanmax(np.linalg.norm(os_, axis=1)) / _DEG:.3f} deg, "
                         f"worst-case bound up to {np.nanmax(ow) / _DEG:.3f} deg about one axis")
        if self.monte_carlo is not None:
            lines += _mc_lines(self.monte_carlo, self.kind)
        if b.required_accuracy is not None:
            ok = worst <= b.required_accuracy
            lines.append(f"  required accuracy {b.required_accuracy * mm:g} mm: 95 % error worst {worst * mm:.2f} mm "
                         f"-> {'PASS' if ok else 'FAIL'}")
            lim = b.step_fraction * b.required_accuracy
            lines.append(f"  effective step {np.max(stp) * mm:.3f} mm vs {b.step_fraction:g} x required = "
                         f"{lim * mm:.3f} mm -> {'PASS' if np.max(stp) <= lim else 'FAIL'}")
        else:
            lines.append("  required accuracy: not given (add required_accuracy to [errors] to judge it)")
        return lines + _CAUTION

    # -- plots ------------------------------------------------------------------------
    def figure(self):
        """A plotly figure: 95 % position error over the region and each source's share."""
        import plotly.graph_objects as go
        from plotly.subplots import make_subplots

        P = int(self.position_index.max()) + 1
        pos = np.empty((P, 3))
        pos[self.position_index] = self.positions
        p95 = self.per_position(self.p95_position) * 1e3
        dom = np.full(P, -1)
        for p in range(P):
            sel = (self.position_index == p) & self.feasible
            if np.any(sel):
                k = np.flatnonzero(sel)[np.argmax(self.p95_position[sel])]
                dom[p] = self.dominant[k]
        ok = np.isfinite(p95)
        hover = [f"95 %: {v:.2f} mm<br>dominant: {self.source_labels[d]}" if d >= 0 else "outside workspace"
                 for v, d in zip(p95, dom)]
        fig = make_subplots(rows=1, cols=2, column_widths=[0.62, 0.38],
                            specs=[[{"type": "scene"}, {"type": "xy"}]],
                            subplot_titles=("95 % position error [mm]", "share of mean-square error (median)"))
        fig.add_trace(go.Scatter3d(x=pos[ok, 0], y=pos[ok, 1], z=pos[ok, 2], mode="markers",
                                   marker=dict(size=3, color=p95[ok], colorscale="Viridis", showscale=True,
                                               colorbar=dict(title="mm", x=0.58)),
                                   text=[hover[i] for i in np.flatnonzero(ok)], hoverinfo="text+x+y+z",
                                   name="95 % error"), row=1, col=1)
        if np.any(~ok):
            fig.add_trace(go.Scatter3d(x=pos[~ok, 0], y=pos[~ok, 1], z=pos[~ok, 2], mode="markers",
                                       marker=dict(size=2, color="lightgrey"), name="outside workspace",
                                       hoverinfo="skip"), row=1, col=1)
        ms = self.source_ms[self.feasible]
        if len(ms):
            share = np.median(ms / np.maximum(ms.sum(axis=1, keepdims=True), 1e-300), axis=0) * 100
        else:
            share = np.zeros(len(self.source_keys))
        fig.add_trace(go.Bar(x=list(self.source_labels), y=share, name="share", marker_color="#4c72b0",
                             showlegend=False), row=1, col=2)
        fig.update_yaxes(title_text="%", row=1, col=2)
        fig.update_layout(title=f"Predicted accuracy: {self.design_name}", height=520,
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"), legend=dict(x=0.0, y=0.0))
        return fig

    # -- files ------------------------------------------------------------------------
    def arrays(self) -> dict[str, np.ndarray]:
        """Everything as plain arrays (no objects), e.g. for :meth:`save`."""
        out = {k: getattr(self, k) for k in (
            "poses", "positions", "feasible", "bias", "cov_systematic", "cov_random", "std_position",
            "worst_case", "worst_position", "p95_position", "ellipsoid_axes", "ellipsoid_dirs", "random_3sigma",
            "source_ms", "dominant", "step", "position_index", "orientation_index")}
        if self.orientation_std is not None:
            out["orientation_std"] = self.orientation_std
            out["orientation_worst"] = self.orientation_worst
        out["source_keys"] = np.array(self.source_keys)
        out["source_labels"] = np.array(self.source_labels)
        out["source_kinds"] = np.array(self.source_kinds)
        budget = {k: (sorted(v) if isinstance(v, frozenset) else v) for k, v in asdict(self.budget).items()}
        meta = {"format": "cablekit-accuracy-map/1", "design_name": self.design_name, "kind": self.kind,
                "grid_shape": list(self.grid_shape) if self.grid_shape else None, "grid_step_m": self.grid_step,
                "coarsened": self.coarsened, "builds": self.builds, "sag_modelled": self.sag_modelled,
                "budget": budget, "units": "SI: m, rad"}
        if self.monte_carlo is not None:
            mc = self.monte_carlo
            ok, d = mc.validated()
            out["mc_rows"] = mc.rows
            out["mc_mean"] = mc.mean_mc
            out["mc_cov"] = mc.cov_mc
            out["mc_validated"] = ok
            out["mc_endpoint_difference"] = d
            out["mc_inside_worst_case"] = mc.inside_worst_case()
            meta["mc_samples"] = mc.samples
        out["meta_json"] = np.array(json.dumps(meta))
        return out

    def save(self, path) -> "Path":
        """Write the map as ``.npz`` (atomic; plain arrays, readable with ``allow_pickle=False``)."""
        from .design import atomic_write_bytes

        buf = io.BytesIO()
        np.savez_compressed(buf, **self.arrays())
        return atomic_write_bytes(path, buf.getvalue())


def load_accuracy_map(path) -> dict[str, Any]:
    """Read a map written by :meth:`AccuracyResult.save`: arrays plus ``meta`` (a dict)."""
    with np.load(path, allow_pickle=False) as z:
        out = {k: z[k] for k in z.files}
    if "meta_json" not in out:
        raise ValueError(f"{path}: not a cablekit accuracy map (no meta_json)")
    out["meta"] = json.loads(str(out.pop("meta_json")))
    return out


_CAUTION = ["  caution: a design estimate for a rigid frame and straight cables. Measure the built rig "
            "(cablekit iso9283) before relying on it; keep people clear of suspended loads and follow local codes "
            "and licensed practice."]


def _budget_lines(b: ErrorBudget) -> list[tuple[str, str]]:
    out = [("exit_position", f"exit points       +/- {b.exit_position * 1e3:g} mm per coordinate"),
           ("home_length", f"home lengths      +/- {b.home_length * 1e3:g} mm"),
           ("frame_tilt", f"frame tilt        +/- {b.frame_tilt / _DEG:.3g} deg about each horizontal axis"),
           ("drum_diameter", f"drum pitch dia.   +/- {b.drum_diameter * 1e3:g} mm"),
           ("quantisation_counts", f"quantisation      +/- {b.quantisation_counts:g} count"),
           ("deadband_counts", "deadband          " + (f"+/- {b.deadband_counts:g} counts" if b.deadband_counts
                                                     is not None else "each winch's deadband_counts"))]
    if b.stretch:
        out.append(("axial_stiffness_error", f"rope stiffness EA +/- {b.axial_stiffness_error * 100:g} %, stretch "
                    + ("compensated by the controller" if b.stretch_compensated else "not compensated (a bias)")))
    else:
        out.append(("stretch", "elastic stretch   not included"))
    out.append(("sag", "cable sag         " + ("included (elastic catenary at the static tensions)" if b.sag
                                               else "not included (straight cables)")))
    return out


def _mc_lines(mc: MonteCarloCheck, kind: str) -> list[str]:
    ok, d = mc.validated()
    inside = mc.inside_worst_case()
    solved = mc.solved.mean()
    cov_fo = mc.cov_fo[:, :3, :3]
    cov_mc = mc.cov_mc[:, :3, :3]
    rel = np.linalg.norm(cov_mc - cov_fo, axis=(1, 2)) / np.maximum(np.linalg.norm(cov_fo, axis=(1, 2)), 1e-300)
    comps = 3 if kind == "point" else 6
    warn = []
    if solved < 0.99:
        warn = [f"    {(1 - solved) * 100:.1f} % of the perturbed rigs have no unique least-squares pose: the rig is "
                "weakly constrained at some checked poses (close to a singularity); first-order results there are "
                "unreliable"]
    return [f"  Monte Carlo check (JCGM 101:2008): {len(mc.rows)} poses x {mc.samples:,} perturbed rigs solved by "
            f"forward kinematics ({solved * 100:.1f} % converged)",
            f"    first order validated (section 8, 1 significant digit) for {int(ok.sum())} of {ok.size} pose "
            f"components ({comps} per pose); largest interval-end difference {np.max(d[:, :3]) * 1e3:.3f} mm",
            f"    position covariance: first order vs Monte Carlo differ by {np.max(rel) * 100:.1f} % at most; "
            f"samples inside the worst-case bound: {np.min(inside) * 100:.1f} %"] + warn


def _coarse_step(design, step: float, max_poses: int) -> tuple[float, bool]:
    """The given step, or the next round step (1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6, 7.5, 8 x 10^k)
    whose grid has at most ``max_poses`` poses."""
    from .region import task_poses

    if len(task_poses(design, step=step).poses) <= max_poses:
        return step, False
    decade = 10.0 ** math.floor(math.log10(step))
    for k in range(12):
        for mant in (1, 1.25, 1.5, 2, 2.5, 3, 4, 5, 6, 7.5, 8):
            s = mant * decade * 10**k
            if s > step and len(task_poses(design, step=s).poses) <= max_poses:
                return s, True
    raise ValueError(f"no grid step gives at most {max_poses} poses")


def _default_mc_rows(model: LinearModel, feasible, count: int) -> np.ndarray:
    """Poses for the Monte Carlo check: the worst-case pose, the centre, then extreme corners."""
    pos = model.poses[:, :3]
    rows = []
    idx = np.flatnonzero(feasible)
    if idx.size == 0:
        return np.array([], int)
    wc = np.linalg.norm(model.worst_case()[idx, :3], axis=1)
    rows.append(int(idx[np.argmax(wc)]))
    lo, hi = pos[idx].min(axis=0), pos[idx].max(axis=0)
    targets = [0.5 * (lo + hi)] + [np.where([i & 1, i & 2, i & 4], hi, lo) for i in (0, 7, 3, 4, 1, 6, 2, 5)]
    for t in targets:
        k = int(idx[np.argmin(np.linalg.norm(pos[idx] - t, axis=1))])
        if k not in rows:
            rows.append(k)
    return np.array(rows[:count], int)


def accuracy_map(design, *, step: float | None = None, budget: ErrorBudget | None = None, builds: int = 1000,
                 monte_carlo_samples: int = 2000, monte_carlo_poses: int = 5, seed: int = 0, max_poses: int = 2000,
                 poses=None,
                 progress: Callable[[str, int, int], None] | None = None) -> AccuracyResult:
    """Predicted accuracy at every pose of the task region.

    Parameters
    ----------
    design : Design
    step : grid step [m]; default ``design.task.step`` (enlarged when the grid has more than
        ``max_poses`` poses; the summary says so).
    budget : ErrorBudget; default the design's ``[errors]`` table or the defaults.
    builds : number of sampled rigs for the 95th percentiles (first-order model, shared
        draws for every pose).
    monte_carlo_samples : samples per pose of the nonlinear Monte Carlo check; 0 skips it.
    monte_carlo_poses : how many poses it checks: the worst-case pose, the centre of the
        region, then its extreme corners.
    seed : random seed (results are reproducible).
    poses : evaluate these poses (N, n) instead of the task grid.
    progress : ``progress(stage, done, total)`` callback for long runs.
    """
    from .region import task_poses

    budget = error_budget(design) if budget is None else budget
    coarsened = False
    if poses is None:
        step0 = design.task.step if step is None else float(step)
        step_used, coarsened = _coarse_step(design, step0, max_poses)
        grid = task_poses(design, step=step_used)
        q = grid.poses
        pidx, oidx, shape = grid.position_index, grid.orientation_index, grid.shape
    else:
        from .kinematics import as_poses

        q = as_poses(design, poses)
        step_used = math.nan
        pidx, oidx, shape = np.arange(len(q)), np.zeros(len(q), int), None
    model = linear_model(design, q, budget=budget, progress=progress)
    N, n = q.shape
    feas = model.feasible
    rng = np.random.default_rng(seed)
    draws = draw_errors(design, budget, builds, rng)
    p95 = np.empty(N)
    for s in range(0, N, 256):
        e = min(N, s + 256)
        err = model.sample(draws, slice(s, e))[:, :, :3]
        p95[s:e] = np.quantile(np.linalg.norm(err, axis=2), 0.95, axis=1)
        if progress is not None:
            progress("sampled builds", e, N)
    cov_sys = model.covariance(kinds=(SYSTEMATIC,))
    cov_rnd = model.covariance(kinds=(RANDOM,))
    cov = cov_sys + cov_rnd
    wc = model.worst_case()
    evals, evecs = np.linalg.eigh(cov[:, :3, :3])
    k95 = _CHI2_95_3DOF
    ell = np.sqrt(np.clip(evals, 0, None) * k95)
    ms = model.source_contributions()
    dominant = np.argmax(ms, axis=1)
    step_move = effective_step(model.pinv, design)
    rnd3 = 3 * np.sqrt(np.clip(np.linalg.eigvalsh(cov_rnd[:, :3, :3])[:, -1], 0, None))

    def nanout(a):
        a = np.array(a, float)
        a[~feas] = np.nan
        return a

    res = AccuracyResult(
        design_name=design.meta.name, kind=design.platform.kind, poses=q, positions=q[:, :3].copy(),
        feasible=feas, bias=nanout(model.bias), cov_systematic=nanout(cov_sys), cov_random=nanout(cov_rnd),
        std_position=nanout(np.sqrt(np.trace(cov[:, :3, :3], axis1=1, axis2=2))), worst_case=nanout(wc),
        worst_position=nanout(np.linalg.norm(wc[:, :3], axis=1)), p95_position=nanout(p95),
        ellipsoid_axes=nanout(ell), ellipsoid_dirs=nanout(evecs), random_3sigma=nanout(rnd3),
        source_ms=nanout(ms), dominant=np.where(feas, dominant, -1), step=nanout(step_move),
        orientation_std=nanout(np.sqrt(np.clip(np.einsum("nii->ni", cov[:, 3:, 3:]), 0, None))) if n == 6 else None,
        orientation_worst=nanout(wc[:, 3:]) if n == 6 else None,
        position_index=pidx, orientation_index=oidx, grid_shape=shape, grid_step=step_used, coarsened=coarsened,
        builds=int(builds), budget=budget, sag_modelled=model.sag_change is not None,
        sag_unsolved=model.sag_unsolved)
    if monte_carlo_samples and np.any(feas):
        rows = _default_mc_rows(model, feas, monte_carlo_poses)
        mc = monte_carlo(design, model, rows, samples=monte_carlo_samples, seed=seed + 1, progress=progress)
        res = replace(res, monte_carlo=mc)
    return res


# --------------------------------------------------------------------------------------
# checks
# --------------------------------------------------------------------------------------
def design_checks(design, *, accuracy: AccuracyResult | None = None) -> list:
    """Accuracy checks: the 95 % position error and the effective motion step against the
    required accuracy of ``[errors]`` (nothing is judged when no required accuracy is given),
    and the Monte Carlo confirmation of the first-order model when ``accuracy`` carries one."""
    from .checks import WARN, PASS, Check, judge

    budget = error_budget(design)
    if budget.required_accuracy is None and (accuracy is None or accuracy.monte_carlo is None):
        return []
    res = accuracy if accuracy is not None else accuracy_map(design, monte_carlo_samples=0)
    out = []
    mm = 1e3
    req = res.budget.required_accuracy
    if req is not None:
        worst, where = res.worst_p95()
        margin, status = judge(worst * mm, req * mm, upper=True)
        at = f" at ({', '.join(f'{v:.3g}' for v in where)}) m" if where is not None else ""
        out.append(Check(key="accuracy_p95", subject="task region", title="95 % position error (sampled builds)",
                         value=worst * mm, limit=req * mm, unit="mm", margin=margin, status=status,
                         source="required_accuracy in the design's [errors] table",
                         detail=f"worst over {int(res.feasible.sum())} feasible poses{at}; dominant source there: "
                                f"{_dominant_label(res)}"))
        stp = float(np.nanmax(np.where(res.feasible, res.step, np.nan))) if np.any(res.feasible) else math.nan
        lim = res.budget.step_fraction * req
        margin, status = judge(stp * mm, lim * mm, upper=True)
        out.append(Check(key="accuracy_step", subject="task region", title="effective motion step (dead band)",
                         value=stp * mm, limit=lim * mm, unit="mm", margin=margin, status=status,
                         source=f"{res.budget.step_fraction:g} x required accuracy; "
                                + BUDGET_KEYS["step_fraction"].source,
                         detail="largest platform move from one effective step on a single cable: "
                                + _step_text(design)))
    if res.monte_carlo is not None:
        ok, _ = res.monte_carlo.validated()
        share = float(ok[:, :3].mean()) if ok.size else 0.0
        out.append(Check(key="accuracy_first_order", subject="accuracy model",
                         title="first-order propagation confirmed by Monte Carlo", value=share * 100, limit=100.0,
                         unit="%", margin=share * 100 - 100.0, status=PASS if share == 1.0 else WARN,
                         source="JCGM 101:2008, section 8 (validation of the GUM uncertainty framework)",
                         detail="share of checked position components whose 95 % interval agrees"))
    return out


def effective_step(pinv, design) -> np.ndarray:
    """Effective motion step at the platform per pose [m], shape (N,).

    ``max_i |J+[:3, i]| s_i``: the largest platform move when one cable changes by its
    effective step ``s_i`` (:func:`cablekit.drive.cable_step`: the dead band's width in counts,
    ``2k + 1`` for a +/- k-count band, at least one count, times the length per count).

    Parameters
    ----------
    pinv : (N, n, m) pseudo-inverses of the length Jacobian ``J = dL/dq`` [m/m].
    design : Design

    Notes
    -----
    A controller with a +/- k-count dead band stops anywhere within 2k + 1 counts of its
    target, so commands closer together than that are not resolved (common practice, no
    source).
    """
    from .drive import cable_step

    return np.max(np.linalg.norm(np.asarray(pinv, float)[:, :3, :], axis=1) * cable_step(design), axis=1)


def _step_text(design) -> str:
    parts = sorted({(w.deadband_counts, w.deadband_definition, w.step_counts) for w in design.winches})
    return "; ".join((f"dead band +/- {k:g} counts -> {sc:g} counts" if how == "plus_minus"
                      else f"dead band {k:g} counts wide -> {sc:g} counts") for k, how, sc in parts) \
        + " (deadband_definition in the design file; common practice, no source)"


def _dominant_label(res: AccuracyResult) -> str:
    _, where = res.worst_p95()
    if where is None:
        return "none"
    k = int(np.argmax(np.where(res.feasible, res.p95_position, -np.inf)))
    d = int(res.dominant[k])
    return res.source_labels[d] if d >= 0 else "none"


def latex_equations() -> dict[str, str]:
    """LaTeX of the error model for notebooks, the equations view and the review sheet."""
    return {
        "cable length reached at fixed counts": r"L_{act,i} = h_i + \delta h_i + (L_i(\mathbf{q}) - h_i + e_{q,i} + "
                                                r"e_{d,i})\left(1 + \frac{\delta D_i}{D_i + d}\right) + \Delta S_i + g_i",
        "stretch from home": r"\Delta S_i = \frac{T_i L_i - T_{i,0} h_i}{EA}",
        "first-order pose error": r"\delta\mathbf{q} = J^{+}\left(\delta\mathbf{L} - J_a\,\delta\mathbf{a}\right),"
                                  r"\quad J^{+} = (J^T J)^{-1} J^T",
        "rectangular error of half-width a (GUM 4.3.7)": r"u = \frac{a}{\sqrt{3}},\qquad "
                                                         r"u_{quantisation} = \frac{q}{\sqrt{12}}",
        "covariance (GUM 5.1.2)": r"\Sigma_{\mathbf{q}} = \sum_k G_k\,u_k^2\,G_k^T,\quad G = "
                                  r"\frac{\partial \mathbf{q}}{\partial \mathbf{s}}",
        "worst-case interval bound": r"|\delta q_j| \le |b_j| + \sum_k |G_{jk}|\,a_k",
        "ISO 9283 pose accuracy (7.2.1)": r"AP_P = \sqrt{(\bar x - x_c)^2 + (\bar y - y_c)^2 + (\bar z - z_c)^2}",
        "ISO 9283 pose repeatability (7.2.2)": r"RP_l = \bar l + 3 S_l,\quad S_l = "
                                               r"\sqrt{\frac{\sum_j (l_j - \bar l)^2}{n - 1}}",
    }
