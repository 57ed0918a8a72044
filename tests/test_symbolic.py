"""Symbolic engine and generated code: sign convention, Jacobians, precision, cse, cache."""

import numpy as np
import pytest
import sympy as sp

from cablekit import codegen
from cablekit.kinematics import cable_lengths, length_jacobian, parameter_jacobians, structure_matrix
from cablekit.symbolic import cable_template, latex_equations, numeric, rotation_matrix, structure_matrix_expr

RNG = np.random.default_rng(7)


def _random_rigid_poses(n):
    p = RNG.uniform([1.2, 0.9, 0.8], [2.8, 2.1, 1.7], (n, 3))
    a = RNG.uniform(-0.3, 0.3, (n, 3))
    return np.hstack([p, a])


def test_sign_convention_point(greenhouse):
    d = greenhouse
    q = np.array([[1.5, 0.8, 1.0]])
    W = structure_matrix(d, q)[0]
    # each column is the unit vector from the platform towards the exit point
    expected = (d.exits - q[0]) / np.linalg.norm(d.exits - q[0], axis=1)[:, None]
    np.testing.assert_allclose(W.T, expected, atol=1e-15)
    # J[:, :3] = -W[:3].T  (moving towards an exit shortens its cable)
    J = length_jacobian(d, q)[0]
    np.testing.assert_allclose(J, -W.T, atol=1e-15)


def test_sign_convention_rigid(sander8):
    q = _random_rigid_poses(50)
    W = structure_matrix(sander8, q)
    J = length_jacobian(sander8, q)
    np.testing.assert_allclose(J[:, :, :3], -np.swapaxes(W[:, :3, :], 1, 2), atol=1e-14)
    # moment rows are (R b_i) x u_i: check one pose by hand with the rotation matrix
    R = np.array(rotation_matrix(*map(float, q[0, 3:])).evalf(), dtype=float)
    b = sander8.attachments
    l = sander8.exits - q[0, :3] - b @ R.T
    u = l / np.linalg.norm(l, axis=1)[:, None]
    np.testing.assert_allclose(W[0, 3:, :].T, np.cross(b @ R.T, u), atol=1e-14)


def test_rotation_is_extrinsic_xyz():
    # R = Rz(psi) Ry(theta) Rx(phi): a pure yaw of 90 deg maps x to y (right-hand rule)
    R = rotation_matrix(0, 0, sp.pi / 2)
    assert R * sp.Matrix([1, 0, 0]) == sp.Matrix([0, 1, 0])
    R = rotation_matrix(sp.pi / 2, 0, 0)
    assert R * sp.Matrix([0, 1, 0]) == sp.Matrix([0, 0, 1])


def _central_difference(f, q, h):
    cols = []
    for k in range(q.shape[1]):
        dq = np.zeros_like(q)
        dq[:, k] = h
        cols.append((f(q + dq) - f(q - dq)) / (2 * h))
    return np.stack(cols, axis=-1)


@pytest.mark.parametrize("name", ["greenhouse", "camera4", "sander8"])
def test_jacobian_matches_central_differences(name, request):
    d = request.getfixturevalue(name)
    if d.dof == 6:
        q = _random_rigid_poses(200)
    else:
        q = RNG.uniform(d.task.box_lower, d.task.box_upper, (200, 3))
    J = length_jacobian(d, q)
    # central differences: truncation error O(h^2) ~ 1e-10 with h = 1e-5 m; rounding ~1e-11
    Jfd = _central_difference(lambda x: cable_lengths(d, x), q, 1e-5)
    np.testing.assert_allclose(J, Jfd, atol=1e-8)


def test_parameter_jacobians_match_central_differences(sander8):
    q = _random_rigid_poses(20)
    pj = parameter_jacobians(sander8, q)
    a0, b0 = sander8.exits, sander8.attachments
    h = 1e-6
    for k in range(3):
        da = np.zeros_like(a0)
        da[:, k] = h
        fd = (cable_lengths(sander8, q, exits=a0 + da) - cable_lengths(sander8, q, exits=a0 - da)) / (2 * h)
        np.testing.assert_allclose(pj.exits[:, :, k], fd, atol=1e-8)
        db = np.zeros_like(b0)
        db[:, k] = h
        fd = (cable_lengths(sander8, q, attachments=b0 + db) - cable_lengths(sander8, q, attachments=b0 - db)) / (2 * h)
        np.testing.assert_allclose(pj.attachments[:, :, k], fd, atol=1e-8)


def test_lambdified_matches_high_precision_evalf():
    # reference: SymPy evaluating the same expression with 50 significant digits
    t = cable_template("rigid")
    f_len = numeric("rigid", "length_wrench")
    vals = {s: v for s, v in zip(t.args, [1.3, 0.7, 1.1, 0.2, -0.1, 0.3, 4.0, 3.0, 2.5, -0.15, 0.15, -0.1])}
    got = f_len(*[vals[s] for s in t.args])
    exprs = [t.length, *t.wrench]
    ref = np.array([float(e.evalf(50, subs=vals)) for e in exprs])
    np.testing.assert_allclose(got, ref, rtol=1e-14, atol=1e-15)  # double precision rounding only


@pytest.mark.parametrize("kind", ["point", "rigid"])
@pytest.mark.parametrize("what", ["length", "wrench", "jac_pose", "jac_exit", "jac_attachment"])
def test_cse_on_and_off_agree(kind, what):
    t = cable_template(kind)
    args = [RNG.uniform(-1, 1, 64) for _ in t.pose] + [RNG.uniform(2, 3, 64) for _ in range(3)] + \
           [RNG.uniform(-0.2, 0.2, 64) for _ in range(3)]
    on = numeric(kind, what, cse=True)(*args)
    off = numeric(kind, what, cse=False)(*args)
    np.testing.assert_allclose(on, off, rtol=1e-13, atol=1e-14)


def test_generated_code_lists_its_arguments_in_order():
    f = numeric("rigid", "length")
    src = f.source
    assert "def rigid_length(x, y, z, phi, theta, psi, a_x, a_y, a_z, b_x, b_y, b_z):" in src
    assert "0. x" in src and "11. b_z" in src
    with pytest.raises(TypeError):
        f(1.0, 2.0)


def test_cache_is_keyed_by_content_and_can_be_cleared():
    x, y = sp.symbols("x y")
    f1 = codegen.generate("probe_fn", [x * y + 1], [x, y])
    f2 = codegen.generate("probe_fn", [x * y + 1], [x, y])
    assert f1 is f2  # in-memory hit
    f3 = codegen.generate("probe_fn", [x * y + 2], [x, y])
    assert f3.key != f1.key and f3.path != f1.path
    f4 = codegen.generate("probe_fn", [x * y + 1], [y, x])  # argument order is part of the key
    assert f4.key != f1.key
    assert f4(2.0, 3.0)[0] == 7.0
    assert f1.path.exists()
    removed = codegen.clear_cache()
    assert removed >= 3 and not f1.path.exists()
    f5 = codegen.generate("probe_fn", [x * y + 1], [x, y])
    assert f5 is not f1 and f5(2.0, 3.0)[0] == 7.0


def test_generate_rejects_missing_symbols():
    x, y = sp.symbols("x y")
    with pytest.raises(ValueError, match="not in the argument list"):
        codegen.generate("probe_bad", [x * y], [x])


def test_structure_matrix_expr_for_display():
    M = structure_matrix_expr("point", 4)
    assert M.shape == (3, 4)
    M6 = structure_matrix_expr("rigid", 8)
    assert M6.shape == (6, 8)
    eq = latex_equations("rigid")
    assert "structure matrix column" in eq and r"\mathbf{a}_i" in eq["cable vector"]


def test_working_directory_and_sys_path_untouched(tmp_path):
    import os
    import sys

    cwd, path = os.getcwd(), list(sys.path)
    x = sp.Symbol("x")
    codegen.generate("probe_cwd", [x**2], [x])
    assert os.getcwd() == cwd and sys.path == path


def test_generate_refuses_text():
    x = sp.Symbol("x")
    with pytest.raises(TypeError, match="never text"):
        codegen.generate("probe_text", ["x + 1"], [x])
    f = codegen.generate("probe_const", [x, 2], [x])  # plain numbers are fine
    np.testing.assert_allclose(f(np.array([1.0, 3.0])), [[1.0, 2.0], [3.0, 2.0]])
