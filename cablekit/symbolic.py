"""SymPy derivations of the cable kinematics (derive once, evaluate with :mod:`codegen`).

Sign convention (tested in ``tests/test_symbolic.py``):

* pose ``q = (x, y, z)`` for a point platform; ``q = (x, y, z, phi, theta, psi)`` for a rigid
  one, with the orientation ``R = Rz(psi) @ Ry(theta) @ Rx(phi)`` (roll ``phi`` about the
  world x axis first, then pitch ``theta`` about y, then yaw ``psi`` about z: extrinsic x-y-z).
* cable vector ``l_i = a_i - (p + R b_i)`` points **from the platform attachment to the frame
  exit**; length ``L_i = |l_i|``; unit vector ``u_i = l_i / L_i``.
* a cable pulls the platform with force ``t_i u_i`` (``t_i >= 0``); with ``r_i = R b_i`` the
  structure (wrench) matrix has columns ``w_i = [u_i ; r_i x u_i]`` and static equilibrium
  reads ``W t + w_ext = 0``, where ``w_ext`` is the wrench of gravity and other loads on the
  platform about its reference point.
* the length Jacobian ``J = dL/dq``; for the translational part ``dL_i/dp = -u_i^T``, so
  ``J[:, :3] = -W[:3, :].T`` (checked numerically in the tests).

Every cable has the same form, so the expressions are derived for **one generic cable**
and evaluated with NumPy broadcasting over poses (leading axis) and cables; this works for
any number of cables m.  :func:`structure_matrix_expr` builds the m-cable matrix for display.

References
----------
Pott, A. *Cable-Driven Parallel Robots: Theory and Application*. Springer, 2018, ch. 3
(inverse kinematics, structure matrix).
Verhoeven, R. *Analysis of the Workspace of Tendon-based Stewart Platforms*. PhD thesis,
Univ. Duisburg-Essen, 2004 (structure matrix).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import sympy as sp

from .codegen import GeneratedFunction, generate

__all__ = ["CableTemplate", "cable_template", "EncoderTemplate", "encoder_template", "encoder_numeric", "structure_matrix_expr", "rotation_matrix", "latex_equations",
           "numeric"]

POSE_NAMES = {"point": ("x", "y", "z"), "rigid": ("x", "y", "z", "phi", "theta", "psi")}


def rotation_matrix(phi, theta, psi) -> sp.Matrix:
    """``R = Rz(psi) Ry(theta) Rx(phi)`` (extrinsic x-y-z: roll, then pitch, then yaw)."""
    cx, sx = sp.cos(phi), sp.sin(phi)
    cy, sy = sp.cos(theta), sp.sin(theta)
    cz, sz = sp.cos(psi), sp.sin(psi)
    Rx = sp.Matrix([[1, 0, 0], [0, cx, -sx], [0, sx, cx]])
    Ry = sp.Matrix([[cy, 0, sy], [0, 1, 0], [-sy, 0, cy]])
    Rz = sp.Matrix([[cz, -sz, 0], [sz, cz, 0], [0, 0, 1]])
    return Rz * Ry * Rx


@dataclass(frozen=True)
class CableTemplate:
    """Symbolic expressions of one generic cable for a platform kind."""

    kind: str
    pose: tuple[sp.Symbol, ...]  # q
    exit: tuple[sp.Symbol, sp.Symbol, sp.Symbol]  # a
    attachment: tuple[sp.Symbol, sp.Symbol, sp.Symbol]  # b (platform frame)
    R: sp.Matrix
    vector: sp.Matrix  # l = a - p - R b
    length: sp.Expr  # L
    unit: sp.Matrix  # u = l / L
    wrench: sp.Matrix  # column of the structure matrix (3 or 6 rows)
    jac_pose: sp.Matrix  # dL/dq (1 x n)
    jac_exit: sp.Matrix  # dL/da (1 x 3)
    jac_attachment: sp.Matrix  # dL/db (1 x 3)

    @property
    def args(self) -> tuple[sp.Symbol, ...]:
        """The fixed argument order of every generated function: pose, exit, attachment."""
        return (*self.pose, *self.exit, *self.attachment)


@lru_cache(maxsize=None)
def cable_template(kind: str) -> CableTemplate:
    """Derive the generic-cable expressions for ``kind`` in ``{"point", "rigid"}``."""
    if kind not in POSE_NAMES:
        raise ValueError(f"platform kind must be 'point' or 'rigid', got {kind!r}")
    q = sp.symbols(POSE_NAMES[kind], real=True)
    a = sp.symbols("a_x a_y a_z", real=True)
    b = sp.symbols("b_x b_y b_z", real=True)
    p = sp.Matrix(q[:3])
    A = sp.Matrix(a)
    B = sp.Matrix(b)
    if kind == "rigid":
        R = rotation_matrix(*q[3:])
        r = R * B
    else:
        R = sp.eye(3)
        r = sp.zeros(3, 1)
        b = tuple(sp.Integer(0) for _ in range(3))  # a point platform has no attachment offset
    l_vec = A - p - r
    L = sp.sqrt(l_vec.dot(l_vec))
    u = l_vec / L
    if kind == "rigid":
        wrench = sp.Matrix.vstack(u, r.cross(u))
    else:
        wrench = u
    jac_pose = sp.Matrix([[sp.diff(L, qi) for qi in q]])
    jac_exit = sp.Matrix([[sp.diff(L, ai) for ai in a]])
    if kind == "rigid":
        jac_att = sp.Matrix([[sp.diff(L, bi) for bi in b]])
    else:
        jac_att = sp.zeros(1, 3)
    return CableTemplate(kind=kind, pose=tuple(q), exit=tuple(a), attachment=tuple(sp.symbols("b_x b_y b_z", real=True)),
                         R=R, vector=l_vec, length=L, unit=u, wrench=wrench, jac_pose=jac_pose, jac_exit=jac_exit,
                         jac_attachment=jac_att)


@dataclass(frozen=True)
class EncoderTemplate:
    """Cable length <-> encoder counts of one winch, and its parameter derivatives.

    ``c = (L - L_0) * i * N_c / (pi * (D + d))`` with ``i`` the gear ratio (motor turns per
    drum turn), ``N_c`` counts per motor turn (lines x decoding), ``D`` the drum diameter and
    ``d`` the rope diameter (pitch diameter ``D + d``, first layer).
    """

    args: tuple[sp.Symbol, ...]  # L, L_0, D, d, i, N_c
    counts: sp.Expr
    jac: sp.Matrix  # dc / d(L, L_0, D)


@lru_cache(maxsize=None)
def encoder_template() -> EncoderTemplate:
    L, L0, D, d, i, Nc = sp.symbols("L L_0 D d i N_c", positive=True)
    c = (L - L0) * i * Nc / (sp.pi * (D + d))
    jac = sp.Matrix([[sp.diff(c, v) for v in (L, L0, D)]])
    return EncoderTemplate(args=(L, L0, D, d, i, Nc), counts=c, jac=jac)


@lru_cache(maxsize=None)
def encoder_numeric() -> GeneratedFunction:
    """Generated ``(L, L_0, D, d, i, N_c) -> (c, dc/dL, dc/dL_0, dc/dD)``."""
    t = encoder_template()
    return generate("encoder_counts", [t.counts, *t.jac], t.args, output_names=["c", "dc_dL", "dc_dL0", "dc_dD"],
                    doc="Encoder counts from home and their derivatives.")


def _flat(m: sp.Matrix):
    return list(m)


@lru_cache(maxsize=None)
def numeric(kind: str, what: str, *, cse: bool = True) -> GeneratedFunction:
    """The lambdified generic-cable function ``what`` for ``kind``.

    ``what`` is one of ``"length"``, ``"vector"``, ``"unit"``, ``"wrench"``, ``"jac_pose"``,
    ``"jac_exit"``, ``"jac_attachment"``, ``"length_wrench"`` (lengths and wrench columns in
    one pass).  Arguments follow :attr:`CableTemplate.args`: pose components, then the exit
    point, then the attachment point; every argument broadcasts (poses on one axis, cables
    on another).
    """
    t = cable_template(kind)
    n = len(t.pose)
    table = {
        "length": ([t.length], ["L"]),
        "vector": (_flat(t.vector), ["l_x", "l_y", "l_z"]),
        "unit": (_flat(t.unit), ["u_x", "u_y", "u_z"]),
        "wrench": (_flat(t.wrench), [f"w_{k}" for k in range(len(t.wrench))]),
        "jac_pose": (_flat(t.jac_pose), [f"dL_d{s}" for s in t.pose]),
        "jac_exit": (_flat(t.jac_exit), ["dL_da_x", "dL_da_y", "dL_da_z"]),
        "jac_attachment": (_flat(t.jac_attachment), ["dL_db_x", "dL_db_y", "dL_db_z"]),
        "length_wrench": ([t.length, *_flat(t.wrench)], ["L", *[f"w_{k}" for k in range(len(t.wrench))]]),
    }
    if what not in table:
        raise ValueError(f"unknown function {what!r}; choose from {sorted(table)}")
    exprs, names = table[what]
    return generate(f"{kind}_{what}{'' if cse else '_nocse'}", exprs, t.args, output_names=names, cse=cse,
                    doc=f"Generic cable of a {kind} platform ({n} DOF): {what}.")


def structure_matrix_expr(kind: str, m: int) -> sp.Matrix:
    """The symbolic m-cable structure matrix (n x m), cable ``i`` with symbols ``a_i``, ``b_i``."""
    t = cable_template(kind)
    cols = []
    for i in range(1, m + 1):
        sub = {s: sp.Symbol(f"{s.name[0]}_{{{i},{s.name[-1]}}}", real=True) for s in (*t.exit, *t.attachment)}
        cols.append(t.wrench.xreplace(sub))
    return sp.Matrix.hstack(*cols)


@lru_cache(maxsize=None)
def latex_equations(kind: str) -> dict[str, str]:
    """LaTeX of the main equations for notebooks and the review sheet."""
    t = cable_template(kind)
    out = {
        "cable vector": r"\mathbf{l}_i = \mathbf{a}_i - \mathbf{p} - R\,\mathbf{b}_i" if kind == "rigid"
        else r"\mathbf{l}_i = \mathbf{a}_i - \mathbf{p}",
        "length": r"L_i = \lVert \mathbf{l}_i \rVert = " + sp.latex(t.length),
        "unit vector": r"\mathbf{u}_i = \mathbf{l}_i / L_i",
        "equilibrium": r"W\,\mathbf{t} + \mathbf{w}_{ext} = 0,\quad t_{min} \le t_i \le t_{max}",
        "length jacobian": r"\frac{\partial L_i}{\partial \mathbf{q}} = " + sp.latex(t.jac_pose[:, :3])
        + (r" \;(\text{translation part})" if kind == "rigid" else ""),
    }
    out["encoder counts"] = r"c_i = " + sp.latex(encoder_template().counts)
    if kind == "rigid":
        out["structure matrix column"] = (r"\mathbf{w}_i = \begin{bmatrix}\mathbf{u}_i \\ R\mathbf{b}_i \times "
                                          r"\mathbf{u}_i\end{bmatrix}")
        out["rotation"] = r"R = R_z(\psi) R_y(\theta) R_x(\phi) = " + sp.latex(t.R)
    else:
        out["structure matrix column"] = r"\mathbf{w}_i = \mathbf{u}_i"
    return out
