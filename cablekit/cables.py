"""Cables as they really are: elastic stretch, sag (Irvine's elastic catenary), Ernst's modulus.

SI inside: lengths [m], forces [N], axial stiffness EA [N], weight per metre of unstretched
cable w = mass_per_length * g [N/m].

Conventions of the elastic catenary
-----------------------------------
A cable runs from its **platform end** A (the attachment on the platform) to its **exit end**
B (the exit point on the frame).  In the vertical plane through A and B, ``span`` l >= 0 is
the horizontal distance and ``rise`` h the height of B above A (against gravity).  ``s`` is
the unstretched arc length from A.  The horizontal component ``H`` of the tension is constant
along the cable; the vertical component grows with the weight hung below it,
``V(s) = V_A + w s``, so ``V_B = V_A + w L0``.  The cable pulls the platform with
``F_A = H e_h + V_A e_up`` (``e_h`` the horizontal unit vector from A towards B) and the exit
with ``F_B = -(H e_h + V_B e_up)``.

The two end conditions (Irvine 1981, eqs. 2.x for the elastic catenary with one end as origin)

    l = H L0 / EA + (H / w) [asinh(V_B / H) - asinh(V_A / H)]
    h = (V_B**2 - V_A**2) / (2 w EA) + (T_B - T_A) / w,       T = sqrt(H**2 + V**2)

are solved for ``H`` and ``V_A`` by a damped Newton iteration with the analytic Jacobian,
vectorised over any number of cables.  Differences of nearly equal terms are rewritten in
cancellation-free form, so the weightless limit ``w -> 0`` (and ``w = 0`` exactly) is exact.

References
----------
.. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 1-2 (elastic catenary,
   parabolic cable, the parameter lambda**2).
.. [2] H. J. Ernst, "Der E-Modul von Seilen unter Berücksichtigung des Durchhanges",
   *Der Bauingenieur* 40(2), 1965, pp. 52-55 (equivalent modulus of a sagging cable).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .practice import PRACTICE, practice_value

__all__ = [
    "elastic_stretch",
    "CatenaryResult",
    "catenary_forces",
    "unstretched_length_for_tension",
    "catenary_stiffness",
    "ernst_modulus",
    "exit_side_tension",
    "SagMap",
    "sag_map",
    "sag_thresholds",
    "design_checks",
    "design_assumptions",
    "SagEquilibrium",
    "tensions_with_sag",
    "RopeEntry",
    "rope_catalogue",
    "smallest_rope",
]

_MAX_ITER = 60


# --------------------------------------------------------------------------------------
# straight elastic cable
# --------------------------------------------------------------------------------------
def elastic_stretch(tension, length, axial_stiffness):
    """Elastic elongation of a straight cable, ``T * L / EA``.

    Parameters
    ----------
    tension : float or array_like
        Cable tension T [N].
    length : float or array_like
        Cable length L [m] (unstretched or free length; the difference is second order).
    axial_stiffness : float or array_like
        Axial stiffness E*A of the rope [N].

    Returns
    -------
    numpy.ndarray or float
        Elongation [m], broadcast over the inputs.

    Raises
    ------
    ValueError
        If the axial stiffness is not a finite positive number.

    Notes
    -----
    Hooke's law for a bar in tension, delta = T L / (E A).

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 1.
    """
    ea = _positive("axial_stiffness", axial_stiffness)
    out = np.asarray(tension, dtype=float) * np.asarray(length, dtype=float) / ea
    return float(out) if out.ndim == 0 else out


def ernst_modulus(modulus, weight, horizontal_span, tension):
    """Ernst's equivalent modulus of a sagging cable.

    ``E_eq = E / (1 + (w l)**2 E / (12 T**3))``

    Written with the modulus E [Pa], the specific weight w [N/m**3] and the stress T [Pa] it
    is Ernst's original form; the same formula holds unchanged with the axial stiffness EA [N],
    the weight per metre w [N/m] and the tension T [N], which is how cablekit calls it.

    Parameters
    ----------
    modulus : float or array_like
        E [Pa] or EA [N].
    weight : float or array_like
        Specific weight [N/m**3] or weight per metre [N/m]; finite and >= 0.
    horizontal_span : float or array_like
        Horizontal projection l of the cable chord [m].
    tension : float or array_like
        Stress [Pa] or tension [N] (Ernst uses the mean tension); must be > 0.

    Returns
    -------
    numpy.ndarray or float
        Equivalent modulus, same unit as ``modulus``.

    Raises
    ------
    ValueError
        If an input is not finite, or modulus, tension or weight is out of range.

    Notes
    -----
    The chord stiffness of a sagging cable is ``E_eq A / L``.  The formula is a tangent
    modulus from the parabolic (small-sag) cable; it loses accuracy once the sag exceeds a few
    percent of the span.

    References
    ----------
    .. [1] H. J. Ernst, "Der E-Modul von Seilen unter Berücksichtigung des Durchhanges",
       *Der Bauingenieur* 40(2), 1965, pp. 52-55.
    .. [2] H. M. Irvine, *Cable Structures*, MIT Press, 1981, sec. 2.x (tangent stiffness of
       an inclined cable).
    """
    E = _positive("modulus", modulus)
    t = _positive("tension", tension)
    w = np.asarray(weight, float)
    l = np.asarray(horizontal_span, float)
    if not np.all(np.isfinite(w)) or np.any(w < 0.0):
        raise ValueError(f"weight must be finite and >= 0, got {weight!r}")
    if not np.all(np.isfinite(l)):
        raise ValueError(f"horizontal_span must be finite, got {horizontal_span!r}")
    out = E / (1.0 + (w * l) ** 2 * E / (12.0 * t ** 3))
    return float(out) if out.ndim == 0 else out


def exit_side_tension(platform_tension, rise, weight_per_length):
    """Tension at the exit end of a hanging cable from the tension at its platform end [N].

    ``T_B = T_A + w h``: exact for the inextensible catenary (tension grows with height by the
    weight per metre) and slightly conservative for the elastic one (the vertical stretch is
    left out).  ``rise`` h is the height of the exit above the attachment [m] (negative when
    the cable runs down to the exit); ``weight_per_length`` w [N/m].

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, sec. 1.x (``T = H cosh(...)``,
       hence ``dT/dz = w``).
    """
    return np.asarray(platform_tension, float) + np.asarray(weight_per_length, float) * np.asarray(rise, float)


# --------------------------------------------------------------------------------------
# the elastic catenary in its vertical plane
# --------------------------------------------------------------------------------------
def _positive(name, value):
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)) or np.any(arr <= 0.0):
        raise ValueError(f"{name} must be finite and > 0, got {value!r}")
    return arr


def _nonnegative(name, value, unit=""):
    arr = np.asarray(value, dtype=float)
    if not np.all(np.isfinite(arr)) or np.any(arr < 0.0):
        raise ValueError(f"{name} must be finite and >= 0 {unit}".rstrip() + f", got {value!r}")
    return arr


def _asinhc(x):
    """``asinh(x) / x`` with the limit 1 at x = 0."""
    x = np.asarray(x, float)
    small = np.abs(x) < 1e-6
    safe = np.where(small, 1.0, x)
    return np.where(small, 1.0 - x * x / 6.0, np.arcsinh(safe) / safe)


def _profile(H, VA, L0, EA, w):
    """End point (x, z) of a cable of unstretched length L0 starting at A, and the Jacobian.

    Returns x, z, J11 = dx/dH, J12 = dx/dV_A = dz/dH, J22 = dz/dV_A, and for the inverse
    problem dx/dL0, dz/dL0, plus T_A, T_B, V_B.  Every difference of nearly equal terms is
    written without cancellation (see the module notes); ``w`` may be zero.
    """
    VB = VA + w * L0
    TA = np.hypot(H, VA)
    TB = np.hypot(H, VB)
    S = VA + VB
    P = TA + TB
    same = VA * VB >= 0.0
    Q = VB * TA + VA * TB  # |Q| = |VB| TA + |VA| TB when the signs agree: no cancellation
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(Q != 0.0, S / np.where(Q != 0.0, Q, 1.0), 2.0 / P)  # = 1/T when VA = VB
        Dw_same = L0 * ratio * _asinhc(w * L0 * ratio)
        Gw_same = L0 * H * H * ratio / (TA * TB)
        wsafe = np.where(w > 0, w, 1.0)
        Dw_opp = (np.arcsinh(VB / H) - np.arcsinh(VA / H)) / wsafe
        Gw_opp = (VB / TB - VA / TA) / wsafe
    Dw = np.where(same, Dw_same, Dw_opp)  # (asinh(VB/H) - asinh(VA/H)) / w
    Gw = np.where(same, Gw_same, Gw_opp)  # (VB/TB - VA/TA) / w
    Ew = L0 * S / P  # (TB - TA) / w
    x = H * L0 / EA + H * Dw
    z = VA * L0 / EA + w * L0 * L0 / (2.0 * EA) + Ew
    J11 = L0 / EA + Dw - Gw
    J12 = -H * L0 * S / (P * TA * TB)
    J22 = L0 / EA + Gw
    dx_dL = H / EA + H / TB
    dz_dL = VB / EA + VB / TB
    return x, z, J11, J12, J22, dx_dL, dz_dL, TA, TB, VB


def _plane(platform_points, exit_points, gravity_direction):
    """Span, rise and the in-plane unit vectors of each cable's vertical plane."""
    A = np.asarray(platform_points, float)
    B = np.asarray(exit_points, float)
    A, B = np.broadcast_arrays(A, B)
    if A.shape[-1] != 3:
        raise ValueError(f"points must have 3 coordinates on the last axis, got shape {A.shape}")
    if not (np.all(np.isfinite(A)) and np.all(np.isfinite(B))):
        raise ValueError("platform and exit points must be finite")
    g = np.asarray(gravity_direction, float)
    gn = np.linalg.norm(g)
    if g.shape != (3,) or not np.isfinite(gn) or gn == 0:
        raise ValueError(f"gravity_direction must be a non-zero 3-vector, got {gravity_direction!r}")
    up = -g / gn
    c = B - A
    h = c @ up
    ch = c - h[..., None] * up
    l = np.linalg.norm(ch, axis=-1)
    chord = np.linalg.norm(c, axis=-1)
    if np.any(chord == 0):
        raise ValueError("a platform point coincides with its exit point (zero chord)")
    vertical = l <= 1e-9 * chord
    # horizontal unit vector towards the exit; any horizontal direction for a vertical cable
    ref = np.cross(up, [1.0, 0.0, 0.0])
    if np.linalg.norm(ref) < 0.5:
        ref = np.cross(up, [0.0, 1.0, 0.0])
    ref = ref / np.linalg.norm(ref)
    eh = np.where(vertical[..., None], ref, ch / np.where(vertical, 1.0, l)[..., None])
    return l, h, chord, eh, up, vertical


@dataclass(frozen=True)
class CatenaryResult:
    """Elastic catenaries between platform and exit points (shapes follow the inputs).

    horizontal_force H [N]; vertical_force_platform V_A and vertical_force_exit V_B [N]
    (components of the tension along "up" at each end, see the module notes);
    tension_platform T_A, tension_exit T_B [N]; force_platform (..., 3): force of the cable
    on the platform [N]; force_exit (..., 3): force of the cable on the exit point [N];
    unstretched_length L0 [m]; chord [m]; span l and rise h [m]; sag: largest vertical
    distance between chord and cable [m]; converged: the Newton iteration met its tolerance
    and the cable is taut along its whole length.
    """

    horizontal_force: np.ndarray
    vertical_force_platform: np.ndarray
    vertical_force_exit: np.ndarray
    tension_platform: np.ndarray
    tension_exit: np.ndarray
    force_platform: np.ndarray
    force_exit: np.ndarray
    unstretched_length: np.ndarray
    chord: np.ndarray
    span: np.ndarray
    rise: np.ndarray
    sag: np.ndarray
    converged: np.ndarray
    # in-plane flexibility [[J11, J12], [J12, J22]] = d(l, h)/d(H, V_A) [m/N], for stiffness
    _flex: tuple = ()
    _axes: tuple = ()

    @property
    def direction_platform(self) -> np.ndarray:
        """Unit vector of the cable force at the platform (..., 3)."""
        return self.force_platform / np.linalg.norm(self.force_platform, axis=-1, keepdims=True)


def _newton_hv(l, h, L0, EA, w, H0, V0, tol):
    """Newton's method on (H, V_A) for the two end conditions; all arrays 1-D.

    Plain Newton steps (a line search on the residual stalls in the narrow valley of a nearly
    straight, stiff cable); a step that would make H negative divides H by 10 instead.
    """
    H, VA = H0.copy(), V0.copy()
    scale = np.maximum(l + np.abs(h), L0)
    done = np.zeros(len(l), bool)
    conv = np.zeros(len(l), bool)
    for _ in range(_MAX_ITER):
        act = np.flatnonzero(~done)
        if act.size == 0:
            break
        x, z, J11, J12, J22, *_ = _profile(H[act], VA[act], L0[act], EA[act], w[act])
        f1, f2 = x - l[act], z - h[act]
        ok = np.hypot(f1, f2) <= tol * scale[act]
        conv[act[ok]] = True
        done[act[ok | ~np.isfinite(f1 + f2)]] = True
        det = J11 * J22 - J12 * J12
        det = np.where(det != 0, det, 1e-300)
        dH = -(J22 * f1 - J12 * f2) / det
        dV = -(-J12 * f1 + J11 * f2) / det
        Hn = H[act] + dH
        Hn = np.where(Hn > 0, Hn, 0.1 * H[act])
        upd = ~ok
        H[act[upd]], VA[act[upd]] = Hn[upd], VA[act][upd] + dV[upd]
    return H, VA, conv


def _vertical_forward(h, L0, EA, w):
    """Closed form for a vertical cable (span 0): V_A and whether the cable is taut."""
    up = h >= 0
    VA = np.where(up, (h - L0) * EA / L0 - 0.5 * w * L0, (h + L0) * EA / L0 - 0.5 * w * L0)
    taut = np.where(up, VA >= 0, VA + w * L0 <= 0)
    return VA, taut


def _assemble(H, VA, L0, EA, w, l, h, chord, eh, up, vertical, conv, shape):
    x, z, J11, J12, J22, _, _, TA, TB, VB = _profile(H, VA, L0, EA, w)
    # a vertical cable: T = |V|
    TA = np.where(vertical, np.abs(VA), TA)
    TB = np.where(vertical, np.abs(VB), TB)
    FA = H[:, None] * eh + VA[:, None] * up
    FB = -(H[:, None] * eh + VB[:, None] * up)
    # largest vertical distance between chord and cable: where the slope V/H equals h/l
    with np.errstate(divide="ignore", invalid="ignore"):
        s_star = np.clip((H * h / np.where(l > 0, l, 1.0) - VA) / np.where(w > 0, w, 1.0), 0.0, L0)
    xs, zs, *_ = _profile(H, VA, s_star, EA, w)
    sag = np.where((w > 0) & ~vertical & (l > 0), xs * h / np.where(l > 0, l, 1.0) - zs, 0.0)
    sag = np.maximum(sag, 0.0)
    # slack somewhere along the cable (vertical force changes sign and H ~ 0) counts as failure
    conv = conv & np.isfinite(TA) & np.isfinite(TB) & (TA > 0)

    def r(a, extra=()):
        return np.reshape(a, shape + extra)

    return CatenaryResult(
        horizontal_force=r(H), vertical_force_platform=r(VA), vertical_force_exit=r(VB),
        tension_platform=r(TA), tension_exit=r(TB), force_platform=r(FA, (3,)), force_exit=r(FB, (3,)),
        unstretched_length=r(L0), chord=r(chord), span=r(l), rise=r(h), sag=r(sag), converged=r(conv),
        _flex=(r(J11), r(J12), r(J22), r(vertical)), _axes=(r(eh, (3,)), up))


def _flatten_inputs(platform_points, exit_points, gravity_direction, *others):
    l, h, chord, eh, up, vertical = _plane(platform_points, exit_points, gravity_direction)
    shape = l.shape
    arrs = [np.broadcast_to(np.asarray(o, float), shape).ravel().copy() for o in others]
    return shape, l.ravel(), h.ravel(), chord.ravel(), eh.reshape(-1, 3), up, vertical.ravel(), arrs


def catenary_forces(platform_points, exit_points, unstretched_length, axial_stiffness, weight_per_length, *,
                    gravity_direction=(0.0, 0.0, -1.0), tol: float = 1e-12) -> CatenaryResult:
    """End forces of elastic catenaries hung between platform and exit points.

    Parameters
    ----------
    platform_points, exit_points : array_like, shape (..., 3)
        Cable ends A (platform attachment) and B (frame exit) [m]; broadcast together.
    unstretched_length : array_like
        Unstretched cable length L0 between the two points [m], > 0.
    axial_stiffness : float or array_like
        EA [N], > 0.
    weight_per_length : float or array_like
        Weight per metre of unstretched cable w = mass_per_length * g [N/m], >= 0.
    gravity_direction : 3 floats
        Direction of gravity (any length).
    tol : float
        Tolerance on the end-point closure, relative to the cable size.

    Returns
    -------
    CatenaryResult
        ``converged`` is False where no taut solution was found (a slack cable that folds, or
        a failed iteration); its numbers are then not to be used.

    Notes
    -----
    Irvine's elastic catenary (see the module notes for the equations and conventions).
    For a vertical cable (zero span) the closed form ``V_A = (h - L0) EA / L0 - w L0 / 2``
    is used.

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 2.
    """
    _positive("unstretched_length", unstretched_length)
    _positive("axial_stiffness", axial_stiffness)
    _nonnegative("weight_per_length", weight_per_length, "[N/m]")
    shape, l, h, chord, eh, up, vertical, (L0, EA, w) = _flatten_inputs(
        platform_points, exit_points, gravity_direction, unstretched_length, axial_stiffness, weight_per_length)
    n = l.size
    H = np.zeros(n)
    VA = np.zeros(n)
    conv = np.zeros(n, bool)
    if np.any(vertical):
        v = vertical
        VA[v], conv[v] = _vertical_forward(h[v], L0[v], EA[v], w[v])
    gen = np.flatnonzero(~vertical)
    if gen.size:
        lg, hg, Lg, EAg, wg, cg = l[gen], h[gen], L0[gen], EA[gen], w[gen], chord[gen]
        # starting point: the larger horizontal force of (a) the straight elastic cable and
        # (b) the inextensible catenary guess of Peyrot and Goulois (1979)
        T0 = EAg * np.maximum(cg - Lg, 0.0) / Lg
        H_str = T0 * lg / cg
        with np.errstate(divide="ignore", invalid="ignore"):
            lam2 = 3.0 * ((Lg ** 2 - hg ** 2) / lg ** 2 - 1.0)
        lam = np.where(lam2 > 0.04, np.sqrt(np.maximum(lam2, 0.04)), 0.2)
        H_cat = wg * lg / (2.0 * lam)
        H0 = np.maximum(H_str, H_cat)
        H0 = np.where(H0 > 0, H0, 1e-12 * EAg)  # weightless and not stretched: slack
        V0 = H0 * hg / lg - 0.5 * wg * Lg
        Hg, Vg, cv = _newton_hv(lg, hg, Lg, EAg, wg, H0, V0, tol)
        H[gen], VA[gen], conv[gen] = Hg, Vg, cv
    return _assemble(H, VA, L0, EA, w, l, h, chord, eh, up, vertical, conv, shape)


def unstretched_length_for_tension(platform_points, exit_points, tension, axial_stiffness, weight_per_length, *,
                                   at: str = "platform", gravity_direction=(0.0, 0.0, -1.0),
                                   tol: float = 1e-12) -> CatenaryResult:
    """The inverse catenary: the unstretched length that gives a wanted tension.

    Parameters
    ----------
    platform_points, exit_points : array_like, shape (..., 3)
        Cable ends [m].
    tension : array_like
        Wanted tension magnitude [N], > 0.
    axial_stiffness : float or array_like
        EA [N].
    weight_per_length : float or array_like
        w [N/m], >= 0.
    at : {"platform", "exit"}
        Which end carries the wanted tension.
    gravity_direction : 3 floats
    tol : float
        Relative tolerance.

    Returns
    -------
    CatenaryResult
        The solved catenary; ``unstretched_length`` is the answer.  Of the two lengths that
        can give one end tension (a taut cable and a long, deeply sagging one), the taut one
        is returned.

    Notes
    -----
    Newton's method on (log H, V_A, L0) with the two end conditions of the elastic catenary
    and ``|F_end| = T``, started from the straight elastic cable ``L0 = c / (1 + T / EA)``.
    A vertical cable has the closed form ``w L0**2 / (2 EA) + (1 + T / EA) L0 = h``.

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 2.
    """
    if at not in ("platform", "exit"):
        raise ValueError(f"at must be 'platform' or 'exit', got {at!r}")
    _positive("tension", tension)
    _positive("axial_stiffness", axial_stiffness)
    _nonnegative("weight_per_length", weight_per_length, "[N/m]")
    shape, l, h, chord, eh, up, vertical, (T, EA, w) = _flatten_inputs(
        platform_points, exit_points, gravity_direction, tension, axial_stiffness, weight_per_length)
    n = l.size
    H = np.zeros(n)
    VA = np.zeros(n)
    L0 = chord / (1.0 + T / EA)
    conv = np.zeros(n, bool)
    if np.any(vertical):
        v = np.flatnonzero(vertical)
        hv, Tv, EAv, wv = h[v], T[v], EA[v], w[v]
        upw = hv >= 0
        a = wv / (2.0 * EAv)
        # platform end: V_A = +T going up, -T going down; exit end: V_B = +/-T
        if at == "platform":
            b = np.where(upw, 1.0 + Tv / EAv, -(1.0 + Tv / EAv))
            c0 = -hv
        else:  # with V_B = V_A + w L0 fixed at +/-T: V_A = V_B - w L0
            b = np.where(upw, 1.0 + Tv / EAv, -(1.0 + Tv / EAv))
            a = -a
            c0 = -hv
        disc = b * b - 4.0 * a * c0
        q = -0.5 * (b + np.sign(b) * np.sqrt(np.maximum(disc, 0.0)))
        Lv = c0 / q
        L0[v] = Lv
        sgn = np.where(upw, 1.0, -1.0)
        VA[v] = sgn * Tv if at == "platform" else sgn * Tv - wv * Lv
        VAv, taut = _vertical_forward(hv, Lv, EAv, wv)
        conv[v] = (disc >= 0) & (Lv > 0) & taut & np.isclose(VAv, VA[v], rtol=1e-9, atol=1e-9 * Tv)
    gen = np.flatnonzero(~vertical)
    if gen.size:
        H[gen], VA[gen], L0[gen], conv[gen] = _newton_inverse(l[gen], h[gen], chord[gen], T[gen], EA[gen], w[gen],
                                                              at, tol)
    return _assemble(H, VA, L0, EA, w, l, h, chord, eh, up, vertical, conv, shape)


def _newton_inverse(l, h, c, T, EA, w, at, tol):
    """Newton's method on (H, V_A, L0) for the end conditions and the wanted end tension."""
    L0 = c / (1.0 + T / EA)
    H = T * l / c
    VA = T * h / c - (0.0 if at == "platform" else 1.0) * w * L0
    scale = np.maximum(l + np.abs(h), L0)
    n = len(l)
    done = np.zeros(n, bool)
    conv = np.zeros(n, bool)
    for _ in range(_MAX_ITER):
        act = np.flatnonzero(~done)
        if act.size == 0:
            break
        Hh, V, L, Ta, EAa, wa, s = H[act], VA[act], L0[act], T[act], EA[act], w[act], scale[act]
        x, z, J11, J12, J22, dxL, dzL, TA, TB, VB = _profile(Hh, V, L, EAa, wa)
        Tend = TA if at == "platform" else TB
        f = np.column_stack([(x - l[act]) / s, (z - h[act]) / s, (Tend - Ta) / Ta])
        ok = np.linalg.norm(f, axis=1) <= tol
        conv[act[ok]] = True
        done[act[ok | ~np.all(np.isfinite(f), axis=1)]] = True
        if at == "platform":
            dT = (Hh / TA, V / TA, np.zeros_like(V))
        else:
            dT = (Hh / TB, VB / TB, wa * VB / TB)
        J = np.empty((act.size, 3, 3))
        J[:, 0, :] = np.column_stack([J11, J12, dxL]) / s[:, None]
        J[:, 1, :] = np.column_stack([J12, J22, dzL]) / s[:, None]
        J[:, 2, :] = np.column_stack(dT) / Ta[:, None]
        good = np.isfinite(J).all(axis=(1, 2)) & (np.abs(np.linalg.det(np.where(np.isfinite(J), J, 0.0))) > 0)
        step = np.zeros((act.size, 3))
        if np.any(good):
            step[good] = -np.linalg.solve(J[good], f[good][..., None])[..., 0]
        done[act[~good]] = True
        Hn = np.where(Hh + step[:, 0] > 0, Hh + step[:, 0], 0.1 * Hh)
        Ln = np.where(L + step[:, 2] > 0, L + step[:, 2], 0.5 * L)
        upd = ~ok & good
        H[act[upd]], VA[act[upd]], L0[act[upd]] = Hn[upd], V[upd] + step[upd, 1], Ln[upd]
    return H, VA, L0, conv


def catenary_stiffness(result: CatenaryResult) -> np.ndarray:
    """Tangent stiffness of each catenary at its platform end, shape (..., 3, 3) [N/m].

    A small displacement ``dx`` of the platform end changes the cable's force on the platform
    by ``-K dx``.  In the cable's vertical plane ``K`` is the inverse of the flexibility
    ``d(l, h)/d(H, V_A)`` of the elastic catenary; across the plane it is ``H / l`` (the
    horizontal force turning with the plane); a vertical cable gets ``T / L`` across.

    References
    ----------
    .. [1] H. M. Irvine, *Cable Structures*, MIT Press, 1981, ch. 2 (flexibility of the elastic
       catenary, obtained by differentiating its end conditions).
    """
    J11, J12, J22, vertical = result._flex
    eh, up = result._axes
    det = J11 * J22 - J12 * J12
    with np.errstate(divide="ignore", invalid="ignore"):
        k11, k12, k22 = J22 / det, -J12 / det, J11 / det
        # vertical cable: in-line stiffness dV_A/dh = EA/L0 (J22 = L0/EA), across it T/L
        lat = np.where(vertical, result.tension_platform / result.chord,
                       result.horizontal_force / np.where(result.span > 0, result.span, 1.0))
    k22 = np.where(vertical, 1.0 / J22, k22)
    k11 = np.where(vertical, 0.0, k11)
    k12 = np.where(vertical, 0.0, k12)
    elat = np.cross(up, eh)
    K = (k11[..., None, None] * eh[..., :, None] * eh[..., None, :]
         + k12[..., None, None] * (eh[..., :, None] * up[None, :] + up[:, None] * eh[..., None, :])
         + k22[..., None, None] * np.broadcast_to(np.outer(up, up), eh.shape[:-1] + (3, 3))
         + lat[..., None, None] * elat[..., :, None] * elat[..., None, :])
    if np.any(vertical):  # both horizontal directions get the lateral stiffness
        K = K + np.where(vertical[..., None, None], lat[..., None, None] * eh[..., :, None] * eh[..., None, :], 0.0)
    return K


# --------------------------------------------------------------------------------------
# sag over the task region
# --------------------------------------------------------------------------------------
def _weight_per_length(design) -> float:
    return design.cable.mass_per_length * design.frame.g


def _cable_ends(design, poses):
    """Attachment points in the world (N, m, 3) and exit points (m, 3) [m]."""
    from .kinematics import cable_vectors

    a = design.exits
    return a[None, :, :] - cable_vectors(design, poses), a


@dataclass(frozen=True)
class SagMap:
    """Sag of every cable over a set of poses, against the straight-cable model.

    poses (N, n); tensions (N, m): tension at the platform end used [N]; exit_tensions (N, m):
    tension at the exit end, including the cable's weight [N]; unstretched_length (N, m):
    catenary length that gives that tension [m]; straight_length (N, m): the straight elastic
    cable's ``c / (1 + T / EA)`` [m]; length_change = unstretched - straight [m] (rope the winch
    must pay out beyond the straight-cable command); angle_change (N, m): angle between the
    cable force at the platform and the chord [rad]; sag (N, m): largest vertical distance
    between chord and cable [m]; valid (N, m): taut cable, solved; unsolved (N, m): a taut
    straight cable whose catenary was not found (it would hang slack somewhere);
    flagged (N, m): a change above a threshold; length_threshold (m,) [m] per cable and
    angle_threshold [rad] with their sources (see :func:`sag_thresholds`).
    """

    poses: np.ndarray
    cable_names: tuple[str, ...]
    tensions: np.ndarray
    exit_tensions: np.ndarray
    unstretched_length: np.ndarray
    straight_length: np.ndarray
    length_change: np.ndarray
    angle_change: np.ndarray
    sag: np.ndarray
    valid: np.ndarray
    flagged: np.ndarray
    length_threshold: np.ndarray
    angle_threshold: float
    threshold_sources: tuple[str, str]
    unsolved: np.ndarray | None = None

    @property
    def pose_flagged(self) -> np.ndarray:
        """(N,) True where any cable of the pose is flagged."""
        return np.any(self.flagged, axis=1)

    def summary(self) -> list[str]:
        N, m = self.tensions.shape
        lt = np.atleast_1d(self.length_threshold) * 1e3
        lt_text = f"{lt.min():.3g} mm" if np.ptp(lt) == 0 else f"{lt.min():.3g} .. {lt.max():.3g} mm"
        lines = [f"sag of {m} cables over {N} poses (elastic catenary, Irvine 1981); thresholds "
                 f"{lt_text} length, {np.degrees(self.angle_threshold):g} deg direction"]
        v = self.valid
        if not np.any(v):
            lines.append("  no pose has every cable taut: nothing to compare")
            return lines
        for label, arr, unit, f in (("sag", self.sag, "mm", 1e3), ("length change", np.abs(self.length_change), "mm", 1e3),
                                    ("direction change", self.angle_change, "deg", np.degrees(1.0))):
            a = np.where(v, arr, -np.inf)
            k = np.unravel_index(int(np.argmax(a)), a.shape)
            lines.append(f"  largest {label:<16}: {a[k] * f:8.3f} {unit}  (cable {self.cable_names[k[1]]}, "
                         f"pose {', '.join(f'{x:.3g}' for x in self.poses[k[0]][:3])} m)")
        dT = np.where(v, self.exit_tensions - self.tensions, -np.inf)
        lines.append(f"  cable weight adds up to {np.max(dT):.2f} N between platform and exit")
        nf = int(np.sum(self.pose_flagged))
        lines.append(f"  flagged poses: {nf} of {N} ({100.0 * nf / N:.1f} %)"
                     + (": straight-cable lengths or directions are not to be trusted there" if nf else ""))
        for j, name in enumerate(self.cable_names):
            if np.any(self.flagged[:, j]):
                lines.append(f"    cable {name}: {int(np.sum(self.flagged[:, j]))} poses")
        bad = int(np.sum(~np.all(v, axis=1)))
        if bad:
            lines.append(f"  {bad} poses have a slack or unsolved cable and were left out")
        return lines

    def figure(self):
        import plotly.graph_objects as go

        p = self.poses[:, :3]
        worst = np.max(np.where(self.valid, np.abs(self.length_change), 0.0), axis=1) * 1e3
        ang = np.degrees(np.max(np.where(self.valid, self.angle_change, 0.0), axis=1))
        text = [f"length change {a:.3f} mm<br>direction change {b:.3f} deg" for a, b in zip(worst, ang)]
        fig = go.Figure()
        fig.add_trace(go.Scatter3d(x=p[:, 0], y=p[:, 1], z=p[:, 2], mode="markers", name="poses",
                                   marker=dict(size=3, color=worst, colorscale="Viridis",
                                               colorbar=dict(title="length change [mm]")),
                                   text=text, hoverinfo="text"))
        fl = self.pose_flagged
        if np.any(fl):
            fig.add_trace(go.Scatter3d(x=p[fl, 0], y=p[fl, 1], z=p[fl, 2], mode="markers", name="flagged",
                                       marker=dict(size=5, symbol="x", color="#c0392b")))
        fig.update_layout(title="Cable sag against the straight-cable model",
                          scene=dict(xaxis_title="x [m]", yaxis_title="y [m]", zaxis_title="z [m]",
                                     aspectmode="data"),
                          margin=dict(l=0, r=0, t=40, b=0))
        return fig


def sag_map(design, *, poses=None, step: float | None = None, tensions=None) -> SagMap:
    """Sag, length and direction changes of every cable over the task region.

    Parameters
    ----------
    design : Design
    poses : (N, n) array, optional
        Default: :func:`cablekit.region.task_poses` (grid step ``step``).
    step : float, optional
        Grid step [m] for the default poses.
    tensions : (N, m) array, optional
        Tensions at the platform end [N]; default :func:`cablekit.statics.tensions_at`
        (straight cables).

    Returns
    -------
    SagMap
        Flags where the sag changes a cable's unstretched length by more than its length
        threshold or its direction at the platform by more than ``practice.sag_angle_threshold``
        (:func:`sag_thresholds`).

    Notes
    -----
    For each taut cable the inverse elastic catenary gives the unstretched length that
    produces the straight-cable tension at the platform; that length is compared with the
    straight elastic cable's ``c / (1 + T / EA)`` and the force direction with the chord.
    """
    from .region import task_poses
    from .statics import tensions_at

    if poses is None:
        poses = task_poses(design, step=step).poses
    q = np.asarray(poses, float)
    if tensions is None:
        tensions = tensions_at(design, q).tensions
    t = np.asarray(tensions, float)
    if t.shape != (q.shape[0], design.m):
        raise ValueError(f"tensions must have shape ({q.shape[0]}, {design.m}), got {t.shape}")
    A, B = _cable_ends(design, q)
    EA = design.cable.axial_stiffness
    w = _weight_per_length(design)
    ok = np.isfinite(t) & (t > 0)
    shape = t.shape
    L0 = np.full(shape, np.nan)
    Texit = np.full(shape, np.nan)
    ang = np.full(shape, np.nan)
    sag = np.full(shape, np.nan)
    conv = np.zeros(shape, bool)
    chord = np.linalg.norm(B[None] - A, axis=-1)
    if np.any(ok):
        Bb = np.broadcast_to(B, A.shape)
        res = unstretched_length_for_tension(A[ok], Bb[ok], t[ok], EA, w, gravity_direction=design.frame.gravity_direction)
        L0[ok] = res.unstretched_length
        Texit[ok] = res.tension_exit
        sag[ok] = res.sag
        u = (Bb[ok] - A[ok]) / chord[ok][:, None]
        cosang = np.clip(np.sum(res.direction_platform * u, axis=-1), -1.0, 1.0)
        ang[ok] = np.arccos(cosang)
        conv[ok] = res.converged
    straight = chord / (1.0 + np.where(ok, t, 0.0) / EA)
    dL = L0 - straight
    lt, at, src = sag_thresholds(design)
    valid = ok & conv
    flagged = valid & ((np.abs(dL) > lt[None, :]) | (ang > at))
    return SagMap(poses=q, cable_names=tuple(design.cable_names), tensions=t, exit_tensions=Texit,
                  unstretched_length=L0, straight_length=straight, length_change=dL, angle_change=ang, sag=sag,
                  valid=valid, flagged=flagged, length_threshold=lt, angle_threshold=at, threshold_sources=src,
                  unsolved=ok & ~conv)


def sag_thresholds(design) -> tuple[np.ndarray, float, tuple[str, str]]:
    """Length thresholds per cable (m,) [m], the angle threshold [rad] and their sources.

    The length threshold is each cable's effective motion step (:func:`cablekit.drive.cable_step`:
    the dead band's width in counts times the length per count): a sag-induced length change
    smaller than one step cannot be told from the controller's own resolution, a larger one
    moves the platform by more than a step.  A ``[practice] sag_length_threshold`` in the
    design file replaces it (local practice wins).  The angle threshold is
    ``practice.sag_angle_threshold``.
    """
    from .drive import cable_step

    pv = design.practice
    if "sag_length_threshold" in pv:
        lt = np.full(design.m, practice_value("sag_length_threshold", pv))
        lsrc = "design file [practice]"
    else:
        lt = cable_step(design)
        lsrc = ("each cable's effective motion step (dead band width x length per count): sag below it is within "
                "the controller's own resolution (common practice, no source)")
    asrc = "design file [practice]" if "sag_angle_threshold" in pv else PRACTICE["sag_angle_threshold"].source
    return lt, practice_value("sag_angle_threshold", pv), (lsrc, asrc)


def _sag_poses(design, workspace=None):
    """Poses and platform-end tensions to judge sag at: the workspace map's feasible poses and
    tensions, else the task grid's wrench-feasible poses (:func:`cablekit.statics.tensions_at`)."""
    if workspace is not None:
        ok = np.asarray(workspace.feasible, bool)
        return np.asarray(workspace.poses, float)[ok], np.asarray(workspace.tensions, float)[ok]
    from .region import task_poses
    from .statics import tensions_at

    q = task_poses(design).poses
    res = tensions_at(design, q)
    return q[res.feasible], res.tensions[res.feasible]


def design_checks(design, *, workspace=None) -> list:
    """Sag checks, one pair per cable, over the wrench-feasible task poses.

    * ``sag_length``: the largest sag-induced change of the cable's length (rope the winch
      must pay out beyond the straight-cable command).  WARN above the length threshold (the
      cable's effective motion step, :func:`sag_thresholds`); FAIL above the required
      accuracy of ``[errors]`` when one is given (the straight-cable command alone then misses
      by more than the task allows), and FAIL where a taut straight cable has no catenary (it
      would hang slack).
    * ``sag_direction``: the largest change of the cable's direction at the platform; WARN
      above ``practice.sag_angle_threshold`` (straight-cable tensions and stiffness are
      approximate there).
    """
    from .checks import FAIL, PASS, WARN, Check

    q, t = _sag_poses(design, workspace)
    if len(q) == 0:
        return []
    sm = sag_map(design, poses=q, tensions=t)
    lt, at, (lsrc, asrc) = sag_thresholds(design)
    budget = design.sections.get("errors")
    req = getattr(budget, "required_accuracy", None)
    out = []
    for j, name in enumerate(sm.cable_names):
        subject = f"cable {name}"
        v = sm.valid[:, j]
        dl = np.where(v, np.abs(sm.length_change[:, j]), -np.inf)
        k = int(np.argmax(dl))
        worst = float(dl[k]) if np.any(v) else 0.0
        at_pose = f"pose {', '.join(f'{x:.3g}' for x in sm.poses[k][:3])} m" if np.any(v) else "no pose"
        bad = int(np.sum(sm.unsolved[:, j]))
        if bad:
            status, limit = FAIL, float(lt[j])
            detail = (f"at {bad} pose(s) the straight-cable tension cannot hold this cable taut as a catenary (it "
                      "would hang slack): raise the minimum tension or use a lighter rope")
        elif req is not None and worst > req:
            status, limit = FAIL, float(req)
            detail = (f"sag changes the cable's length by up to {worst * 1e3:.3g} mm at {at_pose}: more than the "
                      f"required accuracy {req * 1e3:g} mm; compensate sag in the controller or raise the tensions")
        else:
            status, limit = (WARN if worst > lt[j] else PASS), float(lt[j])
            detail = (f"largest at {at_pose}; above the threshold the straight-cable lengths (counts) are off by more "
                      "than one motion step" + (f"; fails above the required accuracy {req * 1e3:g} mm" if req is not None
                                                 else ""))
        src = lsrc if limit == float(lt[j]) else "required_accuracy in the design's [errors] table"
        out.append(Check(key="sag_length", subject=subject, title="sag: change of cable length", value=worst * 1e3,
                         limit=limit * 1e3, unit="mm", margin=(limit - worst) * 1e3, status=status, source=src,
                         detail=detail))
        da = np.where(v, sm.angle_change[:, j], -np.inf)
        ka = int(np.argmax(da))
        worst_a = float(da[ka]) if np.any(v) else 0.0
        out.append(Check(key="sag_direction", subject=subject, title="sag: change of cable direction at the platform",
                         value=math.degrees(worst_a), limit=math.degrees(at), unit="deg",
                         margin=math.degrees(at - worst_a), status=WARN if worst_a > at or not np.any(v) else PASS,
                         source=asrc,
                         detail=(f"largest at pose {', '.join(f'{x:.3g}' for x in sm.poses[ka][:3])} m; above the "
                                 "threshold the straight-cable tensions and stiffness are approximate there")
                         if np.any(v) else "not judged: no pose where this cable hangs as a solved catenary"))
    return out


def design_assumptions(design, **options) -> list[str]:
    """The modelling assumptions the sag verdicts rest on."""
    lt, at, (lsrc, _) = sag_thresholds(design)
    return ["Sag: each taut cable is an elastic catenary (Irvine 1981) at the straight-cable tension of the "
            "workspace's feasible poses; the length threshold is "
            + (f"{lt.min() * 1e3:.3g} mm (design file [practice])" if lsrc.startswith("design file")
               else f"each cable's effective motion step ({lt.min() * 1e3:.3g} .. {lt.max() * 1e3:.3g} mm)")
            + f", the direction threshold {math.degrees(at):g} deg."]


@dataclass(frozen=True)
class SagEquilibrium:
    """Static equilibrium with sagging cables.

    result : TensionResult (platform-end tensions [N]); catenary : CatenaryResult (N, m);
    iterations : fixed-point iterations used; converged : (N,) the tensions settled.
    """

    result: object
    catenary: CatenaryResult
    iterations: int
    converged: np.ndarray


def tensions_with_sag(design, poses, *, max_iterations: int = 30, rtol: float = 1e-9) -> SagEquilibrium:
    """Tensions in equilibrium when every cable hangs as an elastic catenary.

    Starts from the straight-cable tensions; then repeatedly (1) finds each cable's catenary
    for its tension at the platform, (2) rebuilds the structure matrix from the catenary force
    directions at the platform, and (3) solves the tension distribution again with the same
    limits, until the tensions change by less than ``rtol`` (relative).

    The cable weight enters twice: the force at the platform tilts away from the chord, and
    the tension at the winch end (``catenary.tension_exit``) exceeds that at the platform.

    Returns
    -------
    SagEquilibrium
    """
    from .kinematics import as_poses
    from .statics import external_wrench, solve_tensions, tension_limits, tensions_at

    q = as_poses(design, poses)
    res = tensions_at(design, q)
    A, B = _cable_ends(design, q)
    Bb = np.broadcast_to(B, A.shape)
    r_att = A - q[:, None, :3]  # R b_i in the world (N, m, 3)
    w_ext = external_wrench(design, q)
    lim = tension_limits(design)
    EA, w = design.cable.axial_stiffness, _weight_per_length(design)
    n, m = design.dof, design.m
    settled = np.zeros(len(q), bool)
    cat = None
    it = 0
    for it in range(1, max_iterations + 1):
        t = res.tensions
        good = np.all(np.isfinite(t) & (t > 0), axis=1)
        tt = np.where(good[:, None], t, 1.0)
        cat = unstretched_length_for_tension(A, Bb, tt, EA, w, gravity_direction=design.frame.gravity_direction)
        d = cat.direction_platform
        chord_u = (Bb - A) / np.linalg.norm(Bb - A, axis=-1, keepdims=True)
        d = np.where((good[:, None] & cat.converged)[..., None], d, chord_u)
        W = np.empty((len(q), n, m))
        W[:, :3, :] = np.swapaxes(d, 1, 2)
        if n == 6:
            W[:, 3:, :] = np.swapaxes(np.cross(r_att, d), 1, 2)
        new = solve_tensions(W, w_ext, lim.t_min, lim.t_max)
        change = np.max(np.abs(new.tensions - t), axis=1) / np.maximum(np.max(np.abs(t), axis=1), 1e-300)
        settled = good & np.isfinite(change) & (change <= rtol)
        res = new
        if np.all(settled | ~good):
            break
    return SagEquilibrium(result=res, catenary=cat, iterations=it, converged=settled)


# --------------------------------------------------------------------------------------
# a small rope catalogue (handbook values)
# --------------------------------------------------------------------------------------
CATALOGUE_SOURCE = ("FAA AC 43.13-1B (1998), Table 7-3, MIL-W-83420 comp. A (carbon steel) and B (stainless); "
                    "minimum breaking strengths")


@dataclass(frozen=True)
class RopeEntry:
    """One catalogue rope: designation, construction ("7x19"), material, diameter [m],
    minimum breaking force [N], source."""

    designation: str
    construction: str
    material: str
    diameter: float
    breaking_force: float
    source: str


def rope_catalogue(path=None) -> tuple[RopeEntry, ...]:
    """Small steel aircraft cables with their handbook breaking strengths.

    Parameters
    ----------
    path : optional CSV with the same columns (``designation, construction, material,
        diameter [unit], breaking_force [unit]``); default the bundled table.

    References
    ----------
    .. [1] FAA Advisory Circular AC 43.13-1B, *Acceptable Methods, Techniques, and Practices -
       Aircraft Inspection and Repair*, 1998, Table 7-3 (reproducing MIL-W-83420).
    """
    from pathlib import Path

    from .tables import Column, read_table

    default = path is None
    p = Path(__file__).with_name("data") / "aircraft_cable_mbf.csv" if default else Path(path)
    t = read_table(p, [Column("designation", "text"), Column("construction", "text"), Column("material", "text"),
                       Column("diameter", "length"), Column("breaking_force", "force")])
    src = CATALOGUE_SOURCE if default else str(p)
    c = t.columns
    return tuple(RopeEntry(str(c["designation"][k]), str(c["construction"][k]), str(c["material"][k]),
                           float(c["diameter"][k]), float(c["breaking_force"][k]), src) for k in range(len(t)))


def smallest_rope(tension, design_factor, *, construction: str = "7x19", material: str = "carbon",
                  catalogue=None) -> RopeEntry | None:
    """The thinnest catalogue rope whose breaking force is at least ``design_factor * tension``.

    ``material`` is matched as text ("carbon", "stainless"); ``None`` when no rope is strong enough.
    """
    need = float(tension) * float(design_factor)
    rows = [r for r in (rope_catalogue() if catalogue is None else catalogue)
            if r.construction == construction and material in r.material and r.breaking_force >= need]
    return min(rows, key=lambda r: r.diameter) if rows else None


def latex_equations() -> dict[str, str]:
    """LaTeX of the cable models for notebooks and the review sheet."""
    return {
        "elastic stretch": r"\Delta L = \frac{T\,L}{EA}",
        "elastic catenary, span": r"l = \frac{H L_0}{EA} + \frac{H}{w}\left[\sinh^{-1}\frac{V_B}{H} - "
                                  r"\sinh^{-1}\frac{V_A}{H}\right]",
        "elastic catenary, rise": r"h = \frac{V_B^2 - V_A^2}{2 w EA} + \frac{T_B - T_A}{w},\quad "
                                  r"V_B = V_A + w L_0,\; T = \sqrt{H^2 + V^2}",
        "tension at the winch end": r"T_B \approx T_A + w\,h",
        "Ernst's equivalent modulus": r"E_{eq} = \frac{E}{1 + \dfrac{(w l)^2 EA}{12\,T^3}}",
        "parabolic sag": r"d = \frac{q\,l^2}{8 H}",
    }
