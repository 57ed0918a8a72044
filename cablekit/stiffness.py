"""Stiffness of cables and platform, deflection under a payload change, lowest natural frequency.

The platform's Cartesian stiffness ``K`` relates a small displacement of the platform
``dx = (dp, dtheta)`` (translation [m] and small rotation vector in the world frame [rad]) to
the change of the wrench the cables and gravity put on it: ``dw = -K dx``, with the winches
locked.  It has two parts (Behzadipour and Khajepour 2006):

* the **elastic** part ``sum_i A_i^T k_i u_i u_i^T A_i``, from the cables' axial stiffness
  ``k_i = EA / L_i`` (or Ernst's equivalent value for sagging cables), and
* the **geometric** part, from the tensions turning with the cables,
  ``sum_i A_i^T (t_i / L_i)(I - u_i u_i^T) A_i``, and for rigid platforms the moments of the
  cable forces and of gravity turning with the platform, ``-[f_i x][r_i x]`` and
  ``-[F_g x][c x]`` in the rotational block;

with ``A_i = [I, -[r_i x]]`` mapping ``dx`` to the motion of attachment ``i`` and ``r_i = R b_i``.

References
----------
.. [1] S. Behzadipour and A. Khajepour, "Stiffness of cable-based parallel manipulators with
   application to stability analysis", *J. Mech. Design* 128(1), 2006, pp. 303-310.
.. [2] A. Pott, *Cable-Driven Parallel Robots: Theory and Application*, Springer, 2018, ch. 6
   (stiffness), ch. 3 (structure matrix).
.. [3] H. J. Ernst, "Der E-Modul von Seilen unter Berücksichtigung des Durchhanges",
   *Der Bauingenieur* 40(2), 1965, pp. 52-55.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .cables import ernst_modulus

__all__ = [
    "axial_stiffness",
    "sag_axial_stiffness",
    "cable_stiffness_matrices",
    "PlatformStiffness",
    "platform_stiffness",
    "mass_matrix",
    "natural_frequencies",
    "StiffnessMap",
    "stiffness_map",
]


def axial_stiffness(axial_stiffness, length):
    """Axial stiffness of a straight cable, ``EA / L`` [N/m].

    Parameters
    ----------
    axial_stiffness : float or array_like
        EA [N], > 0.
    length : float or array_like
        Free cable length L [m], > 0.
    """
    ea = np.asarray(axial_stiffness, float)
    L = np.asarray(length, float)
    if not np.all(np.isfinite(ea)) or np.any(ea <= 0):
        raise ValueError(f"axial_stiffness must be finite and > 0 [N], got {axial_stiffness!r}")
    if not np.all(np.isfinite(L)) or np.any(L <= 0):
        raise ValueError(f"length must be finite and > 0 [m], got {length!r}")
    out = ea / L
    return float(out) if out.ndim == 0 else out


def sag_axial_stiffness(axial_stiffness, length, weight_per_length, horizontal_span, tension):
    """Chord stiffness of a sagging cable, ``E_eq A / L`` with Ernst's equivalent modulus [N/m].

    Parameters
    ----------
    axial_stiffness : EA [N]; length : free length [m]; weight_per_length : w [N/m];
    horizontal_span : horizontal projection of the chord [m]; tension : mean tension [N].

    References
    ----------
    .. [1] H. J. Ernst, *Der Bauingenieur* 40(2), 1965, pp. 52-55.
    """
    return ernst_modulus(axial_stiffness, weight_per_length, horizontal_span, tension) / np.asarray(length, float)


def cable_stiffness_matrices(unit_vectors, lengths, tensions, stiffness):
    """Elastic and geometric 3x3 stiffness of each cable at its platform end [N/m].

    Parameters
    ----------
    unit_vectors : (..., 3)
        Unit vectors from the attachment towards the exit.
    lengths : (...,)
        Free cable lengths [m].
    tensions : (...,)
        Tensions [N].
    stiffness : (...,)
        Axial stiffness k [N/m] (``EA / L`` or a sag-reduced value).

    Returns
    -------
    elastic, geometric : (..., 3, 3)
        ``k u u^T`` and ``(t / L)(I - u u^T)``.

    References
    ----------
    .. [1] S. Behzadipour and A. Khajepour, *J. Mech. Design* 128(1), 2006, eq. for a single cable.
    """
    u = np.asarray(unit_vectors, float)
    uu = u[..., :, None] * u[..., None, :]
    k = np.asarray(stiffness, float)[..., None, None]
    g = (np.asarray(tensions, float) / np.asarray(lengths, float))[..., None, None]
    return k * uu, g * (np.eye(3) - uu)


def _skew(v):
    v = np.asarray(v, float)
    S = np.zeros(v.shape[:-1] + (3, 3))
    S[..., 0, 1], S[..., 0, 2] = -v[..., 2], v[..., 1]
    S[..., 1, 0], S[..., 1, 2] = v[..., 2], -v[..., 0]
    S[..., 2, 0], S[..., 2, 1] = -v[..., 1], v[..., 0]
    return S


def _bodies(design):
    """(mass [kg], centre of mass in the platform frame [m], inertia about it (3, 3) [kg*m**2])."""
    p = design.platform
    out = [(p.mass, np.asarray(p.center_of_mass, float), np.asarray(p.inertia, float).reshape(3, 3))]
    out.append((design.payload.mass, np.asarray(design.payload.center_of_mass, float), np.zeros((3, 3))))
    arm = design.sections.get("arm")
    if arm is not None and hasattr(arm, "lumped_mass"):
        mass, com = arm.lumped_mass()
        out.append((float(mass), np.asarray(com, float), np.zeros((3, 3))))
    return out


@dataclass(frozen=True)
class PlatformStiffness:
    """Cartesian stiffness of the platform, (N, n, n) each: ``total = elastic + geometric``.

    Units: [N/m] in the translational block, [N/rad] and [N*m/m] off-diagonal, [N*m/rad] in the
    rotational block (rigid platforms).  ``geometric`` holds the gravity term for rigid
    platforms.  ``cable_stiffness`` (N, m): the axial stiffness used per cable [N/m].
    """

    total: np.ndarray
    elastic: np.ndarray
    geometric: np.ndarray
    cable_stiffness: np.ndarray


def platform_stiffness(design, poses, tensions, *, sag: bool = False) -> PlatformStiffness:
    """Cartesian stiffness of the platform at each pose (winches locked).

    Parameters
    ----------
    design : Design
    poses : (N, n)
    tensions : (N, m)
        Cable tensions at the platform [N].
    sag : bool
        Use Ernst's equivalent modulus (with the mean tension ``t + w h / 2``) instead of
        ``EA / L`` for the axial stiffness.

    Returns
    -------
    PlatformStiffness

    Notes
    -----
    See the module notes for the formula (Behzadipour and Khajepour 2006).
    """
    from .kinematics import as_poses, cable_vectors
    from .statics import rotation_matrices

    q = as_poses(design, poses)
    t = np.asarray(tensions, float)
    if t.shape != (q.shape[0], design.m):
        raise ValueError(f"tensions must have shape ({q.shape[0]}, {design.m}), got {t.shape}")
    lv = cable_vectors(design, q)
    L = np.linalg.norm(lv, axis=-1)
    u = lv / L[..., None]
    EA = design.cable.axial_stiffness
    if sag:
        up = -np.asarray(design.frame.gravity_direction, float)
        h = lv @ up
        span = np.linalg.norm(lv - h[..., None] * up, axis=-1)
        w = design.cable.mass_per_length * design.frame.g
        t_mean = np.maximum(t + 0.5 * w * h, 1e-9)
        k = sag_axial_stiffness(EA, L, w, span, np.where(np.isfinite(t_mean), t_mean, 1.0))
    else:
        k = EA / L
    Ke_c, Kg_c = cable_stiffness_matrices(u, L, t, k)
    if design.dof == 3:
        return PlatformStiffness(total=(Ke_c + Kg_c).sum(axis=1), elastic=Ke_c.sum(axis=1),
                                 geometric=Kg_c.sum(axis=1), cable_stiffness=k)
    N, m = t.shape
    r = design.exits[None] - q[:, None, :3] - lv  # R b_i in the world (N, m, 3)
    A = np.zeros((N, m, 3, 6))
    A[..., :3] = np.eye(3)
    A[..., 3:] = -_skew(r)
    At = np.swapaxes(A, -1, -2)
    elastic = (At @ Ke_c @ A).sum(axis=1)
    geometric = (At @ Kg_c @ A).sum(axis=1)
    f = t[..., None] * u
    geometric[:, 3:, 3:] -= (_skew(f) @ _skew(r)).sum(axis=1)
    # gravity acting at the combined centre of mass turns with the platform
    R = rotation_matrices(q[:, 3:])
    bodies = _bodies(design)
    M = sum(b[0] for b in bodies)
    if M > 0:
        c_body = sum(b[0] * b[1] for b in bodies) / M
        c = R @ c_body
        F = M * design.gravity
        geometric[:, 3:, 3:] -= _skew(np.broadcast_to(F, c.shape)) @ _skew(c)
    return PlatformStiffness(total=elastic + geometric, elastic=elastic, geometric=geometric, cable_stiffness=k)


def mass_matrix(design, poses) -> np.ndarray:
    """Mass matrix about the platform reference point, (N, n, n) [kg, kg*m, kg*m**2].

    Platform (mass, centre of mass, inertia), payload and lumped arm mass (point masses):
    ``[[m I, -m [c x]], [m [c x], R I_c R^T + m [c x]^T [c x]]]`` summed over the bodies,
    ``c = R c_body`` (kinetic energy with ``v_c = v - [c x] omega``).  A point platform gets
    ``m_total I``.
    """
    from .kinematics import as_poses
    from .statics import rotation_matrices

    q = as_poses(design, poses)
    N = q.shape[0]
    bodies = _bodies(design)
    if design.dof == 3:
        return np.broadcast_to(sum(b[0] for b in bodies) * np.eye(3), (N, 3, 3)).copy()
    R = rotation_matrices(q[:, 3:])
    Mm = np.zeros((N, 6, 6))
    for mass, com, inertia in bodies:
        c = R @ com
        S = _skew(c)
        Mm[:, :3, :3] += mass * np.eye(3)
        Mm[:, :3, 3:] += -mass * S
        Mm[:, 3:, :3] += mass * S
        Mm[:, 3:, 3:] += R @ inertia @ np.swapaxes(R, 1, 2) + mass * np.swapaxes(S, 1, 2) @ S
    return Mm


def natural_frequencies(stiffness, mass) -> np.ndarray:
    """Undamped natural frequencies [Hz] from stiffness and mass matrices, (N, n) ascending.

    Solves ``K x = omega**2 M x`` with the symmetric part of ``K`` through the Cholesky factor
    of ``M``.  A negative eigenvalue (an unstable pose) gives a negative number: ``-sqrt(-l)``
    in Hz, so the sign survives.
    """
    K = np.asarray(stiffness, float)
    M = np.asarray(mass, float)
    Ks = 0.5 * (K + np.swapaxes(K, -1, -2))
    Lc = np.linalg.cholesky(M)
    Li = np.linalg.inv(Lc)
    lam = np.linalg.eigvalsh(Li @ Ks @ np.swapaxes(Li, -1, -2))
    return np.sign(lam) * np.sqrt(np.abs(lam)) / (2.0 * np.pi)


@dataclass(frozen=True)
class StiffnessMap:
    """Stiffness, deflection and lowest natural frequency over a set of poses.

    poses (N, n); tensions (N, m) [N]; stiffness : PlatformStiffness; min_stiffness (N,):
    smallest translational stiffness with the rotations free to follow, ``1 / max eig`` of the
    translational block of ``K^-1`` [N/m]; deflection (N, n): ``K^-1 dw`` for the payload
    change [m, rad]; deflection_norm (N,): its translational length [m]; frequency (N,): the
    lowest natural frequency [Hz]; valid (N,): every cable taut and ``K`` positive definite;
    payload_change [kg]; cable_model: "straight (EA/L)" or "sag (Ernst)".
    """

    poses: np.ndarray
    tensions: np.ndarray
    stiffness: PlatformStiffness
    min_stiffness: np.ndarray
    deflection: np.ndarray
    deflection_norm: np.ndarray
    frequency: np.ndarray
    valid: np.ndarray
    payload_change: float
    cable_model: str
    frequency_note: str = ""

    def _at(self, k) -> str:
        return ", ".join(f"{x:.3g}" for x in self.poses[k][:3]) + " m"

    def summary(self) -> list[str]:
        N = len(self.poses)
        v = self.valid
        lines = [f"stiffness over {N} poses, cables {self.cable_model}, winches locked "
                 "(drum, gear and frame compliance not included)"]
        if not np.any(v):
            lines.append("  no pose has every cable taut and a stable platform")
            return lines
        ks = np.where(v, self.min_stiffness, np.inf)
        k = int(np.argmin(ks))
        lines.append(f"  lowest stiffness      : {ks[k] / 1e3:10.3f} N/mm at {self._at(k)} "
                     f"(median {np.median(self.min_stiffness[v]) / 1e3:.3f} N/mm)")
        dn = np.where(v, self.deflection_norm, -np.inf)
        k = int(np.argmax(dn))
        lines.append(f"  largest deflection    : {dn[k] * 1e3:10.3f} mm at {self._at(k)} "
                     f"when the payload changes by {self.payload_change:g} kg")
        fr = np.where(v, self.frequency, np.inf)
        k = int(np.argmin(fr))
        lines.append(f"  lowest natural freq.  : {fr[k]:10.3f} Hz at {self._at(k)} "
                     f"(median {np.median(self.frequency[v]):.3f} Hz)")
        if self.frequency_note:
            lines.append(f"  note: {self.frequency_note}")
        bad = int(np.sum(~v))
        if bad:
            lines.append(f"  {bad} poses left out: a slack cable or an unstable platform")
        return lines

    def figure(self, *, color: str = "frequency"):
        """3D map of the poses coloured by ``"frequency"``, ``"stiffness"`` or ``"deflection"``."""
        import plotly.graph_objects as go

        choices = {"frequency": (self.frequency, 1.0, "lowest natural frequency [Hz]"),
                   "stiffness": (self.min_stiffness, 1e-3, "lowest stiffness [N/mm]"),
                   "deflection": (self.deflection_norm, 1e3, "deflection [mm]")}
        if color not in choices:
            raise ValueError(f"color must be one of {', '.join(choices)}, got {color!r}")
        vals, scale, title = choices[color]
        v = self.valid
        p = self.poses[v, :3]
        text = [f"{f:.2f} Hz<br>{k / 1e3:.3f} N/mm<br>{d * 1e3:.3f} mm" for f, k, d in
                zip(self.frequency[v], self.min_stiffness[v], self.deflection_norm[v])]
        fig = go.Figure(go.Scatter3d(x=p[:, 0], y=p[:, 1], z=p[:, 2], mode="markers", name="poses",
                                     marker=dict(size=3, color=vals[v] * scale, colorscale="Viridis",
                                                 colorbar=dict(title=title)),
                                     text=text, hoverinfo="text"))
        fig.update_layout(title=f"Platform {title.split(' [')[0]}",
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"),
                          margin=dict(l=0, r=0, t=40, b=0))
        return fig


def stiffness_map(design, *, poses=None, step: float | None = None, tensions=None, sag: bool = False,
                  payload_change: float | None = None) -> StiffnessMap:
    """Stiffness, payload-change deflection and lowest natural frequency over the task region.

    Parameters
    ----------
    design : Design
    poses : (N, n), optional
        Default :func:`cablekit.region.task_poses` with grid step ``step`` [m].
    tensions : (N, m), optional
        Default :func:`cablekit.statics.tensions_at` at the poses [N].
    sag : bool
        Sag-reduced axial stiffness (Ernst) instead of ``EA / L``.
    payload_change : float, optional
        Mass added at the payload's centre of mass [kg]; default the payload mass (picking
        the payload up with the winches holding their lengths).

    Returns
    -------
    StiffnessMap

    Notes
    -----
    Deflection ``dx = K^-1 dw`` with ``dw`` the added weight (and its moment about the
    platform reference point).  Frequencies from ``K x = omega**2 M x`` with :func:`mass_matrix`;
    a rigid platform with no inertia given gets translational frequencies only (noted).
    """
    from .region import task_poses
    from .statics import rotation_matrices, tensions_at

    if poses is None:
        poses = task_poses(design, step=step).poses
    q = np.asarray(poses, float)
    if tensions is None:
        tensions = tensions_at(design, q).tensions
    t = np.asarray(tensions, float)
    dm = design.payload.mass if payload_change is None else float(payload_change)
    if not np.isfinite(dm):
        raise ValueError(f"payload_change must be a finite mass [kg], got {payload_change!r}")
    taut = np.all(np.isfinite(t) & (t > 0), axis=1)
    tt = np.where(taut[:, None], t, 1.0)
    ps = platform_stiffness(design, q, tt, sag=sag)
    K = ps.total
    n = design.dof
    N = len(q)
    dw = np.zeros((N, n))
    F = dm * design.gravity
    dw[:, :3] = F
    if n == 6:
        c = rotation_matrices(q[:, 3:]) @ np.asarray(design.payload.center_of_mass, float)
        dw[:, 3:] = np.cross(c, F)
    Ks = 0.5 * (K + np.swapaxes(K, 1, 2))
    eig = np.linalg.eigvalsh(Ks)
    pd = eig[:, 0] > 1e-9 * np.maximum(np.abs(eig[:, -1]), 1e-300)
    valid = taut & pd
    Kv = np.where(valid[:, None, None], K, np.eye(n))
    C = np.linalg.inv(Kv)
    defl = (C @ dw[..., None])[..., 0]
    Ctt = 0.5 * (C[:, :3, :3] + np.swapaxes(C[:, :3, :3], 1, 2))
    kmin = 1.0 / np.linalg.eigvalsh(Ctt)[:, -1]
    M = mass_matrix(design, q)
    note = ""
    if n == 6 and not np.all(np.linalg.eigvalsh(M)[:, 0] > 0):
        note = "platform inertia not given: frequencies of the translational block only"
        freq = natural_frequencies(Kv[:, :3, :3], M[:, :3, :3])[:, 0]
    else:
        freq = natural_frequencies(Kv, M)[:, 0]
    nan = np.where(valid, 1.0, np.nan)
    return StiffnessMap(poses=q, tensions=t, stiffness=ps, min_stiffness=kmin * nan,
                        deflection=defl * nan[:, None], deflection_norm=np.linalg.norm(defl[:, :3], axis=1) * nan,
                        frequency=freq * nan, valid=valid, payload_change=dm,
                        cable_model="sag (Ernst)" if sag else "straight (EA/L)", frequency_note=note)


def latex_equations(kind: str = "point") -> dict[str, str]:
    """LaTeX of the stiffness model for notebooks and the review sheet."""
    out = {
        "cable axial stiffness": r"k_i = \frac{EA}{L_i}\quad\left(\text{sagging: } \frac{E_{eq}A}{L_i}\right)",
        "cable stiffness at the platform": r"K_i = k_i\,\mathbf{u}_i\mathbf{u}_i^T + "
                                           r"\frac{t_i}{L_i}\left(I - \mathbf{u}_i\mathbf{u}_i^T\right)",
        "deflection under a payload change": r"\delta\mathbf{x} = K^{-1}\,\delta\mathbf{w}",
        "natural frequencies": r"K\mathbf{x} = \omega^2 M \mathbf{x},\quad f = \frac{\omega}{2\pi}",
    }
    if kind == "rigid":
        out["platform stiffness"] = (r"K = \sum_i A_i^T K_i A_i - \begin{bmatrix}0 & 0\\ 0 & \sum_i [\mathbf{f}_i\times]"
                                     r"[\mathbf{r}_i\times] + [\mathbf{F}_g\times][\mathbf{c}\times]\end{bmatrix},"
                                     r"\quad A_i = \begin{bmatrix} I & -[\mathbf{r}_i\times]\end{bmatrix}")
    else:
        out["platform stiffness"] = r"K = \sum_i K_i"
    return out
