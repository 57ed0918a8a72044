"""Cable and platform stiffness, payload-change deflection, natural frequencies."""

import numpy as np
import pytest
from scipy.linalg import eigh
from scipy.optimize import fsolve

from cablekit.cables import ernst_modulus
from cablekit.kinematics import cable_vectors
from cablekit.region import task_poses
from cablekit.statics import rotation_matrices, tensions_at
from cablekit.stiffness import (axial_stiffness, cable_stiffness_matrices, mass_matrix, natural_frequencies,
                                platform_stiffness, sag_axial_stiffness, stiffness_map)

RNG = np.random.default_rng(8)


def test_axial_stiffness_by_hand():
    # EA / L: 170 kN of rope over 2 m is 85 kN/m (worked by hand)
    assert axial_stiffness(170e3, 2.0) == pytest.approx(85e3, rel=1e-15)
    with pytest.raises(ValueError, match="length"):
        axial_stiffness(170e3, 0.0)
    with pytest.raises(ValueError, match="axial_stiffness"):
        axial_stiffness(-1.0, 2.0)
    # the sag-reduced value is Ernst's modulus over the length (Ernst 1965)
    assert sag_axial_stiffness(1e5, 10.0, 1.0, 10.0, 50.0) == pytest.approx(ernst_modulus(1e5, 1.0, 10.0, 50.0) / 10)


def test_single_hanging_cable_is_a_pendulum_and_a_spring():
    # one vertical cable of length L holding a point mass m: across the cable k = m g / L, so the
    # simple pendulum's f = sqrt(g / L) / (2 pi); along it k = EA / L, the spring-mass f = sqrt(k / m) / (2 pi)
    # (classical mechanics, e.g. Halliday, Resnick and Walker, Fundamentals of Physics, ch. 15)
    m, g, L, EA = 2.0, 9.80665, 1.5, 1e5
    Ke, Kg = cable_stiffness_matrices(np.array([0.0, 0.0, 1.0]), L, m * g, EA / L)
    f = natural_frequencies((Ke + Kg)[None], m * np.eye(3)[None])[0]
    np.testing.assert_allclose(f[:2], np.sqrt(g / L) / (2 * np.pi), rtol=1e-12)
    assert f[2] == pytest.approx(np.sqrt(EA / L / m) / (2 * np.pi), rel=1e-12)


def _cable_wrench(design, q0, t0, dx):
    """Wrench of elastic cables and gravity on the platform displaced by dx (small rotation vector)."""
    p = q0[:3] + dx[:3]
    a, b = design.exits, design.attachments
    EA = design.cable.axial_stiffness
    l0 = cable_vectors(design, q0[None])[0]
    L0 = np.linalg.norm(l0, axis=1)
    if design.dof == 3:
        r = np.zeros_like(a)
        R = np.eye(3)
    else:
        R0 = rotation_matrices(q0[None, 3:])[0]
        th = dx[3:]
        ang = np.linalg.norm(th)
        S = np.array([[0, -th[2], th[1]], [th[2], 0, -th[0]], [-th[1], th[0], 0]])
        Rd = np.eye(3) + (np.sin(ang) / ang) * S + ((1 - np.cos(ang)) / ang ** 2) * S @ S if ang > 0 else np.eye(3)
        R = Rd @ R0
        r = b @ R.T
    lv = a - p - r
    L = np.linalg.norm(lv, axis=1)
    u = lv / L[:, None]
    t = t0 + EA / L0 * (L - L0)  # winches locked: linear elastic cables
    f = t[:, None] * u
    F = design.total_mass * design.gravity
    w = np.concatenate([f.sum(0) + F])
    if design.dof == 6:
        com = sum(mm * np.asarray(c) for mm, c in ((design.platform.mass, design.platform.center_of_mass),
                                                   (design.payload.mass, design.payload.center_of_mass)))
        com = com / design.total_mass
        w = np.concatenate([w, np.cross(r, f).sum(0) + np.cross(R @ com, F)])
    return w


@pytest.mark.parametrize("name", ["greenhouse", "sander8"])
def test_platform_stiffness_matches_finite_differences_of_the_wrench(name, request):
    # K = -d(wrench)/dx by central differences of the elastic cables' and gravity's wrench;
    # checks the elastic + geometric formula of Behzadipour and Khajepour (J. Mech. Design 2006)
    d = request.getfixturevalue(name)
    q0 = np.array(d.home_pose, float)
    t0 = tensions_at(d, q0[None]).tensions[0]
    assert np.all(t0 > 0)
    K = platform_stiffness(d, q0[None], t0[None]).total[0]
    n = d.dof
    h = 1e-6
    num = np.empty((n, n))
    for j in range(n):
        e = np.zeros(n)
        e[j] = h
        num[:, j] = -(_cable_wrench(d, q0, t0, e) - _cable_wrench(d, q0, t0, -e)) / (2 * h)
    np.testing.assert_allclose(K, num, rtol=1e-5, atol=1e-6 * np.abs(K).max())


def test_payload_change_deflection_matches_a_nonlinear_solve(greenhouse):
    # dx = K^-1 dw against scipy's fsolve on the elastic equilibrium with the winches locked
    d = greenhouse
    q0 = np.array(d.home_pose, float)
    t0 = tensions_at(d, q0[None]).tensions[0]
    dm = 0.05
    sm = stiffness_map(d, poses=q0[None], tensions=t0[None], payload_change=dm)

    def residual(dx):
        return _cable_wrench(d, q0, t0, dx) + dm * d.gravity

    exact = fsolve(residual, np.zeros(3))
    assert np.abs(residual(exact)).max() < 1e-9
    np.testing.assert_allclose(sm.deflection[0], exact, rtol=1e-2, atol=1e-9)
    assert exact[2] < 0  # more weight: the platform drops


def test_frequencies_match_scipy_generalised_eigenproblem(sander8):
    # scipy.linalg.eigh(K, M) as the reference solver for K x = omega^2 M x
    g = task_poses(sander8, step=0.4)
    res = tensions_at(sander8, g.poses)
    ok = np.flatnonzero(res.feasible)[:5]
    q, t = g.poses[ok], res.tensions[ok]
    K = platform_stiffness(sander8, q, t).total
    M = mass_matrix(sander8, q)
    f = natural_frequencies(K, M)
    for k in range(len(q)):
        lam = eigh(0.5 * (K[k] + K[k].T), M[k], eigvals_only=True)
        np.testing.assert_allclose(f[k], np.sign(lam) * np.sqrt(np.abs(lam)) / (2 * np.pi), rtol=1e-9)


def test_mass_matrix_of_an_offset_point_mass(sander8):
    # a point mass m at c: M = [[m I, -m[c]x], [m[c]x, m [c]x^T [c]x]] (rigid-body kinetic energy)
    M = mass_matrix(sander8, np.array([[2.0, 1.5, 1.25, 0.0, 0.0, 0.0]]))[0]
    np.testing.assert_allclose(M, M.T, atol=1e-12)
    assert np.all(np.linalg.eigvalsh(M) > 0)
    assert M[0, 0] == pytest.approx(sander8.total_mass)
    # the rotational block about x: I_xx + sum m (y^2 + z^2) (parallel-axis, Huygens-Steiner theorem;
    # from memory), with the centres of mass at z = -0.02 m (platform) and -0.05 m (payload)
    Ixx = sander8.platform.inertia[0] + sander8.platform.mass * 0.02 ** 2 + sander8.payload.mass * 0.05 ** 2
    assert M[3, 3] == pytest.approx(Ixx)


def test_stiffness_map_over_the_task_region(greenhouse):
    s = stiffness_map(greenhouse, step=0.3)
    assert s.valid.all()
    assert np.all(s.min_stiffness > 0) and np.all(s.frequency > 0)
    # total = elastic + geometric, and both parts are symmetric for a point platform
    st = s.stiffness
    np.testing.assert_allclose(st.total, st.elastic + st.geometric, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(st.geometric, np.swapaxes(st.geometric, 1, 2), atol=1e-9)
    # the payload pulls the platform down
    assert np.all(s.deflection[:, 2] < 0)
    sag = stiffness_map(greenhouse, step=0.3, sag=True)
    assert np.all(sag.min_stiffness < s.min_stiffness)  # sag makes cables softer (Ernst 1965)
    assert any("lowest natural freq" in line for line in s.summary())
    for c in ("frequency", "stiffness", "deflection"):
        assert len(s.figure(color=c).data) == 1
    with pytest.raises(ValueError, match="color"):
        s.figure(color="mood")


def test_bad_inputs_are_refused(greenhouse):
    q = np.array([greenhouse.home_pose])
    with pytest.raises(ValueError, match="tensions must have shape"):
        platform_stiffness(greenhouse, q, np.ones((1, 2)))
    with pytest.raises(ValueError, match="payload_change"):
        stiffness_map(greenhouse, poses=q, payload_change=float("nan"))


def test_latex_equations_of_the_stiffness_model():
    from cablekit.stiffness import latex_equations

    for kind in ("point", "rigid"):
        eqs = latex_equations(kind)
        assert "platform stiffness" in eqs
        assert all(tex.count("{") == tex.count("}") for tex in eqs.values())
