"""Calibration: exit points, home lengths and drum scale from measured platform positions.

The controller's encoder counts ``c_ij`` (logged, or recomputed from the commanded poses of
the nominal design) turn into cable lengths through the rig's true parameters::

    L_ij = (h_i + dh_i) + c_ij * q_i * (1 + s_i)

(``h_i`` home length, ``q_i`` length per count, ``s_i`` the relative error of the drum's
pitch diameter); the platform sits where the straight cables from the true exit points
``a_i + da_i`` have these lengths (:func:`cablekit.kinematics.forward_kinematics`).
:func:`calibrate` finds ``da``, ``dh`` and ``s`` that bring the predicted positions closest to
the measured ones (nonlinear least squares, :func:`scipy.optimize.least_squares`, with the
analytic Jacobian ``dq/dtheta = J+ dL/dtheta`` of :mod:`cablekit.accuracy`'s model).

Identifiability: the Jacobian, scaled by each parameter's error budget, is factored by QR
with column pivoting; parameters beyond its numerical rank cannot be told apart by these
data and keep their design values (a frame tilt, for one, is absorbed by the exit points).
Parameter uncertainties are ``s^2 (J^T J)^-1`` with ``s^2`` the residual variance.

References
----------
Seber, G. A. F. and Wild, C. J. *Nonlinear Regression*, Wiley, 1989, ch. 2 (least-squares
estimates and their asymptotic covariance).
Hollerbach, J. M. and Wampler, C. W. "The calibration index and taxonomy for robot kinematic
calibration methods", Int. J. Robotics Research 15(6), 1996 (identifiability, scaling).
Golub, G. H. and Van Loan, C. F. *Matrix Computations*, 4th ed., 2013, sec. 5.4.2 (QR with
column pivoting for rank determination).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from .iso9283 import Measurements

__all__ = ["Parameter", "CalibrationResult", "calibrate", "corrected_design", "calibrated_path", "write_corrected",
           "synthetic_measurements", "GROUPS"]

GROUPS = ("exits", "home", "scale")
_RANK_TOL = 1e-4  # budget-scaled singular values below this share of the largest count as zero:
# such a parameter combination moves the platform 10^4 times less than the best-seen one


@dataclass(frozen=True)
class Parameter:
    """One calibration parameter: ``group`` exits/home/scale, ``cable`` index, ``axis`` (0-2
    for exits), ``prior`` its error-budget half-width (m, or a share for scale)."""

    name: str
    group: str
    cable: int
    axis: int
    prior: float


def _parameters(design, groups, budget) -> list[Parameter]:
    pitch = np.array([w.drum_diameter + design.cable.diameter for w in design.winches])
    out = []
    for i, name in enumerate(design.cable_names):
        if "exits" in groups:
            out += [Parameter(f"exit {name} {ax}", "exits", i, k, budget.exit_position or 1e-3)
                    for k, ax in enumerate("xyz")]
        if "home" in groups:
            out.append(Parameter(f"home length {name}", "home", i, -1, budget.home_length or 1e-3))
        if "scale" in groups:
            out.append(Parameter(f"drum scale {name}", "scale", i, -1, (budget.drum_diameter / pitch[i]) or 1e-3))
    return out


def _unpack(design, params: list[Parameter], theta):
    m = design.m
    da = np.zeros((m, 3))
    dh = np.zeros(m)
    s = np.zeros(m)
    for p, v in zip(params, theta):
        if p.group == "exits":
            da[p.cable, p.axis] = v
        elif p.group == "home":
            dh[p.cable] = v
        else:
            s[p.cable] = v
    return da, dh, s


def _counts(design, meas: Measurements) -> tuple[np.ndarray, np.ndarray, str]:
    """Encoder counts (N, m), the commanded poses (N, n) used as starting guesses, and where
    the counts came from."""
    from .kinematics import cable_lengths, lengths_to_counts

    q_cmd = meas.commanded
    if design.dof == 6:
        ori = meas.commanded_orientation if meas.commanded_orientation is not None else \
            np.broadcast_to(np.asarray(design.home_pose[3:], float), (len(meas), 3))
        q_cmd = np.hstack([q_cmd, ori])
    if meas.counts is not None:
        return meas.counts.astype(float), q_cmd, "encoder counts logged with the measurements"
    c = np.rint(lengths_to_counts(design, cable_lengths(design, q_cmd)))
    return c, q_cmd, "counts recomputed from the commanded poses (deadband errors count as noise)"


def _predict(design, params, theta, counts, guess):
    """Predicted poses (N, n) for parameter offsets ``theta``, and the exit points used.

    Poses are found by a few Gauss-Newton steps from ``guess`` (the previous prediction:
    calibration moves the rig by millimetres); rows that do not settle are solved again by
    :func:`~cablekit.kinematics.forward_kinematics` from the same start.
    """
    from .kinematics import (KinematicsError, cable_lengths, forward_kinematics, home_lengths, length_jacobian,
                             length_per_count)

    da, dh, s = _unpack(design, params, theta)
    exits = design.exits + da
    L = home_lengths(design) + dh + counts * length_per_count(design) * (1.0 + s)
    if np.any(L <= 0):
        return np.full_like(guess, np.nan), exits
    q = np.array(guess, float)
    step = np.full(len(q), np.inf)
    for _ in range(25):
        r = cable_lengths(design, q, exits=exits) - L
        dq = -(np.linalg.pinv(length_jacobian(design, q, exits=exits)) @ r[..., None])[..., 0]
        q = q + dq
        step = np.linalg.norm(dq, axis=1)
        if np.all(step < 1e-11):
            break
    bad = ~(step < 1e-9) | ~np.all(np.isfinite(q), axis=1)
    if np.any(bad):
        try:
            q[bad] = forward_kinematics(design, L[bad], guess=guess[bad], exits=exits, consistency_tol=np.inf,
                                        starts=1).poses
        except KinematicsError:
            q[bad] = np.nan
    return q, exits


def _jacobian(design, params, q, exits, counts) -> np.ndarray:
    """d(predicted position)/d(theta), shape (3N, p)."""
    from .kinematics import length_jacobian, length_per_count, parameter_jacobians

    J = length_jacobian(design, q, exits=exits)
    Ja = parameter_jacobians(design, q, exits=exits).exits
    Jp = np.linalg.pinv(J)[:, :3, :]  # (N, 3, m)
    lpc = length_per_count(design)
    cols = []
    for p in params:
        i = p.cable
        if p.group == "exits":
            cols.append(-Jp[:, :, i] * Ja[:, i, p.axis][:, None])
        elif p.group == "home":
            cols.append(Jp[:, :, i])
        else:
            cols.append(Jp[:, :, i] * (counts[:, i] * lpc[i])[:, None])
    return np.stack(cols, axis=-1).reshape(-1, len(params))


@dataclass(frozen=True)
class CalibrationResult:
    """What :func:`calibrate` found.

    parameters : every candidate parameter; estimate (p,) offsets from the design (m, or a
    share for drum scale); std (p,) standard uncertainties (NaN where not identified);
    identified (p,) fitted; weak (p,) fitted but less certain than the error budget;
    singular_values : of the budget-scaled Jacobian at the design; rank;
    residual_before, residual_after (N, 3) measured minus predicted position [m];
    sigma : estimated measurement noise per coordinate [m]; lines (N,) CSV line of every row;
    counts_source : where the counts came from; corrected : the corrected Design;
    design : the original; source : the measurement file; success, message : from the solver.
    """

    parameters: tuple[Parameter, ...]
    estimate: np.ndarray
    std: np.ndarray
    identified: np.ndarray
    weak: np.ndarray
    singular_values: np.ndarray
    rank: int
    residual_before: np.ndarray
    residual_after: np.ndarray
    sigma: float
    lines: np.ndarray
    counts_source: str
    corrected: object
    design: object
    source: str
    success: bool
    message: str

    @staticmethod
    def _rms(r):
        return float(np.sqrt(np.mean(np.sum(r**2, axis=1))))

    @property
    def rms_before(self) -> float:
        """RMS distance between predicted and measured positions with the design [m]."""
        return self._rms(self.residual_before)

    @property
    def rms_after(self) -> float:
        return self._rms(self.residual_after)

    def _fmt(self, p: Parameter, v: float, sign: str = "+") -> str:
        if p.group == "scale":
            pitch = self.design.winches[p.cable].drum_diameter + self.design.cable.diameter
            return f"{v * pitch * 1e3:{sign}.4f} mm pitch dia. ({v * 100:{sign}.4f} %)"
        return f"{v * 1e3:{sign}.3f} mm"

    def summary(self) -> list[str]:
        mm = 1e3
        nb = np.linalg.norm(self.residual_before, axis=1)
        na = np.linalg.norm(self.residual_after, axis=1)
        kb, ka = int(np.nanargmax(nb)), int(np.nanargmax(na))
        lines = [f"Calibration of {self.design.meta.name} from {self.source}: {len(self.lines)} measured positions; "
                 f"{self.counts_source}",
                 f"  position residual before: RMS {self.rms_before * mm:.3f} mm, largest {nb[kb] * mm:.3f} mm "
                 f"(line {self.lines[kb]})",
                 f"  position residual after : RMS {self.rms_after * mm:.3f} mm, largest {na[ka] * mm:.3f} mm "
                 f"(line {self.lines[ka]})",
                 f"  estimated measurement noise: {self.sigma * mm:.3f} mm per coordinate"
                 + ("" if self.success else f"  (solver: {self.message})"),
                 "  identified (offset from the design file +/- standard uncertainty):"]
        for k, p in enumerate(self.parameters):
            if self.identified[k]:
                unc = self._fmt(p, self.std[k], sign="")
                lines.append(f"    {p.name:<28} {self._fmt(p, self.estimate[k]):>14}  +/- {unc}"
                             + ("   (weak: less certain than the error budget)" if self.weak[k] else ""))
        fixed = [p.name for k, p in enumerate(self.parameters) if not self.identified[k]]
        if fixed:
            lines.append(f"  not identifiable from these data (kept at the design value): {', '.join(fixed)}")
            lines.append("    measure more poses spread over the whole task region (all three directions) to "
                         "separate them")
        sv = self.singular_values
        lines.append(f"  identifiability: rank {self.rank} of {len(self.parameters)}; budget-scaled singular values "
                     f"{sv[0]:.3g} .. {sv[-1]:.3g} (condition {sv[0] / max(sv[-1], 1e-300):.3g})")
        if self.rms_after > 3 * math.sqrt(3) * self.sigma + 1e-12:
            lines.append("  note: some rows fit much worse than the noise: check them for blunders")
        lines.append("  caution: verify the corrected design on the rig (cablekit iso9283) before trusting it with "
                     "loads; keep people clear of suspended loads.")
        return lines

    def figure(self):
        """Residual per measured row before and after calibration [mm]."""
        import plotly.graph_objects as go

        x = [int(v) for v in self.lines]
        fig = go.Figure()
        fig.add_trace(go.Scatter(x=x, y=np.linalg.norm(self.residual_before, axis=1) * 1e3, mode="markers",
                                 name="design file", marker=dict(color="#c44e52")))
        fig.add_trace(go.Scatter(x=x, y=np.linalg.norm(self.residual_after, axis=1) * 1e3, mode="markers",
                                 name="calibrated", marker=dict(color="#55a868")))
        fig.update_layout(title=f"Calibration residuals ({self.source})", xaxis_title="CSV line",
                          yaxis_title="|measured - predicted| [mm]", height=420)
        return fig


def calibrate(design, meas: Measurements, *, groups=GROUPS, budget=None) -> CalibrationResult:
    """Identify exit points, home lengths and drum scale from measured positions.

    Parameters
    ----------
    design : Design (the nominal design the controller used).
    meas : Measurements (commanded and measured positions, optionally encoder counts).
    groups : which of ``"exits"``, ``"home"``, ``"scale"`` to identify.
    budget : ErrorBudget scaling the parameters; default the design's ``[errors]``.

    Raises
    ------
    ValueError
        Too few measurements for the parameters, or data the design cannot reach.
    """
    from scipy.linalg import qr
    from scipy.optimize import least_squares

    from .accuracy import error_budget

    groups = tuple(groups)
    bad = [g for g in groups if g not in GROUPS]
    if bad or not groups:
        raise ValueError(f"unknown parameter group(s) {bad or groups}; choose from {', '.join(GROUPS)}")
    budget = error_budget(design) if budget is None else budget
    counts, guess, counts_source = _counts(design, meas)
    params = _parameters(design, groups, budget)
    prior = np.array([p.prior for p in params])
    y = meas.measured
    N = len(y)
    if 3 * N <= len(params):
        raise ValueError(f"{meas.source}: {N} measured positions give {3 * N} equations for {len(params)} parameters; "
                         f"measure at least {len(params) // 3 + 1} positions (better: several times that)")
    theta0 = np.zeros(len(params))
    q0, ex0 = _predict(design, params, theta0, counts, guess)
    if not np.all(np.isfinite(q0)):
        raise ValueError(f"{meas.source}: the design cannot reach the logged counts (cable lengths incompatible with "
                         "the exit points); check the units and that the counts are from home")
    res_before = y - q0[:, :3]
    J0 = _jacobian(design, params, q0, ex0, counts) * prior
    sv = np.linalg.svd(J0, compute_uv=False)
    rank = int(np.sum(sv > _RANK_TOL * sv[0]))
    _, _, perm = qr(J0, mode="economic", pivoting=True)
    free = np.zeros(len(params), bool)
    free[perm[:rank]] = True
    fparams = [p for p, f in zip(params, free) if f]
    fprior = prior[free]

    last = {"q": q0}  # warm start: each prediction starts from the previous one

    def solve(t):
        q, ex = _predict(design, fparams, t, counts, last["q"])
        ok = np.all(np.isfinite(q), axis=1)
        if np.all(ok):
            last["q"] = q
        return q, ex, ok

    def resid(t):
        q, _, _ = solve(t)
        r = (q[:, :3] - y).ravel()
        return np.where(np.isfinite(r), r, 1.0)  # unreachable rows count as 1 m off

    def jac(t):
        q, ex, ok = solve(t)
        Jf = _jacobian(design, fparams, np.where(ok[:, None], q, guess), ex, counts)
        return np.where(np.isfinite(Jf), Jf, 0.0)

    sol = least_squares(resid, np.zeros(len(fparams)), jac=jac, x_scale=fprior, method="trf",
                        bounds=(-50 * fprior, 50 * fprior), xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=200)
    theta = np.zeros(len(params))
    theta[free] = sol.x
    q1, ex1 = _predict(design, params, theta, counts, last["q"])
    res_after = y - q1[:, :3]
    Jf = _jacobian(design, fparams, q1, ex1, counts)
    dof = max(3 * N - len(fparams), 1)
    s2 = float(np.nansum(res_after**2)) / dof
    cov = s2 * np.linalg.pinv(Jf.T @ Jf)
    std = np.full(len(params), np.nan)
    std[free] = np.sqrt(np.clip(np.diag(cov), 0, None))
    weak = free & (std > prior / math.sqrt(3))
    corrected = corrected_design(design, params, theta)
    return CalibrationResult(parameters=tuple(params), estimate=theta, std=std, identified=free, weak=weak,
                             singular_values=sv, rank=rank, residual_before=res_before, residual_after=res_after,
                             sigma=math.sqrt(s2), lines=meas.lines, counts_source=counts_source, corrected=corrected,
                             design=design, source=meas.source, success=bool(sol.success), message=str(sol.message))


def corrected_design(design, params, theta):
    """The design with identified offsets applied: exit positions, explicit home lengths and
    drum diameters ``D' = (D + d)(1 + s) - d`` (one winch table per cable when they differ)."""
    from .design import revalidate
    from .kinematics import home_lengths

    da, dh, s = _unpack(design, params, theta)
    groups = {p.group for p in params}
    h = home_lengths(design)
    exits = []
    for i, e in enumerate(design.frame.exits):
        pos = tuple(float(v) for v in np.asarray(e.position) + da[i])
        hl = float(h[i] + dh[i]) if "home" in groups else e.home_length
        exits.append(replace(e, position=pos, home_length=hl))
    d = design.cable.diameter
    winches = tuple(replace(w, drum_diameter=float((w.drum_diameter + d) * (1.0 + s[i]) - d)) if s[i] else w
                    for i, w in enumerate(design.winches))
    return revalidate(replace(design, frame=replace(design.frame, exits=tuple(exits)), winches=winches))


def calibrated_path(design_path) -> Path:
    """Where the corrected design goes by default: ``NAME.calibrated.toml`` beside the original."""
    p = Path(design_path)
    return p.with_name(p.stem + ".calibrated.toml")


def write_corrected(result: CalibrationResult, design_path, output=None) -> Path:
    """Write the corrected design (atomically), never over the original design file."""
    from .design import save_design

    out = Path(output) if output is not None else calibrated_path(design_path)
    if out.suffix != ".toml":
        raise ValueError(f"{out}: a design file name ends in .toml")
    if out.resolve() == Path(design_path).resolve():
        raise ValueError(f"{out}: refusing to overwrite the original design; choose another output name")
    header = (f"Calibrated by cablekit calibrate from {result.source} ({len(result.lines)} measured positions).\n"
              f"Original design: {Path(design_path).name}. Position residual RMS {result.rms_before * 1e3:.3f} mm "
              f"-> {result.rms_after * 1e3:.3f} mm.\n"
              "Identified: " + ", ".join(p.name for k, p in enumerate(result.parameters) if result.identified[k]) + ".")
    return save_design(result.corrected, out, header=header)


def synthetic_measurements(design, commanded, *, exit_offsets=None, home_offsets=None, drum_offsets=None,
                           noise: float = 0.0, cycles: int = 1, labels=None, deadband: bool = True,
                           log_counts: bool = True, seed: int = 0) -> Measurements:
    """Simulated measurements of a rig that differs from ``design`` (for demos and tests).

    The controller commands the counts of the nominal design for each pose of ``commanded``
    (P, n); the deadband leaves each cable anywhere within +/- ``Winch.deadband_half_counts`` of them;
    the true rig has exit points ``a + exit_offsets`` [m], home lengths ``h + home_offsets``
    [m] and drum pitch diameters ``D + d + drum_offsets`` [m]; its pose comes from the forward
    kinematics; the measured position adds Gaussian noise of ``noise`` [m] per coordinate.
    """
    from .kinematics import cable_lengths, forward_kinematics, home_lengths, length_per_count, lengths_to_counts

    rng = np.random.default_rng(seed)
    q = np.asarray(commanded, float)
    if q.ndim == 1:
        q = q[None, :]
    P, m = len(q), design.m
    da = np.zeros((m, 3)) if exit_offsets is None else np.asarray(exit_offsets, float)
    dh = np.zeros(m) if home_offsets is None else np.asarray(home_offsets, float)
    dD = np.zeros(m) if drum_offsets is None else np.asarray(drum_offsets, float)
    pitch = np.array([w.drum_diameter + design.cable.diameter for w in design.winches])
    qc = np.repeat(q, cycles, axis=0)
    c = np.rint(lengths_to_counts(design, cable_lengths(design, qc)))
    if deadband:
        db = np.array([int(w.deadband_half_counts) for w in design.winches])  # +/- counts, per its definition
        c = c + rng.integers(-db, db + 1, size=c.shape)
    L = home_lengths(design) + dh + c * length_per_count(design) * (1.0 + dD / pitch)
    fk = forward_kinematics(design, L, guess=qc, exits=design.exits + da, consistency_tol=np.inf, starts=1)
    measured = fk.poses[:, :3] + rng.normal(0.0, noise, (len(qc), 3))
    names = [f"P{k + 1}" for k in range(P)] if labels is None else list(labels)
    return Measurements(labels=np.array(np.repeat(names, cycles), dtype=object),
                        cycles=np.tile(np.arange(1, cycles + 1), P).astype(float), commanded=qc[:, :3],
                        measured=measured, commanded_orientation=qc[:, 3:] if design.dof == 6 else None,
                        measured_orientation=fk.poses[:, 3:] if design.dof == 6 else None,
                        counts=c if log_counts else None,
                        lines=np.arange(2, len(qc) + 2), source="synthetic")
