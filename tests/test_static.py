"""Linear static analysis against published examples and closed forms."""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf


def test_ferreira_four_bar_truss(ferreira: sf.Model, backend: str) -> None:
    r = ferreira.solve(solver=backend)["P"]
    # Ferreira, MATLAB Codes for Finite Element Analysis (2010) §5.3, published
    # to four significant figures: u1 = (-0.3024, -1.5177, 0.2688) mm.
    np.testing.assert_allclose(r.displacements[0] * 1e3, [-0.3024, -1.5177, 0.2688], atol=6e-5)
    # Same source, reactions R2..R5 in N.
    expected = np.array(
        [[270.9, 0, 203.2], [1354.6, 0, -1016.0], [0, 7968.1, 0], [-1625.5, 2031.9, 812.8]]
    )
    np.testing.assert_allclose(r.reactions[1:], expected, atol=0.06)
    np.testing.assert_array_equal(r.reactions[0], 0.0)
    assert r.residual < 1e-12
    np.testing.assert_allclose(r.reaction_total, -r.applied_total, atol=1e-8)


def test_star_dome_linear_crown_deflection(dome: sf.Model, backend: str) -> None:
    r = dome.solve(solver=backend)["P"]
    # Levy & Spillers, Analysis of Geometrically Nonlinear Structures, 2nd ed.,
    # §2.4.2: linear crown deflection -0.20641184 in.  The node coordinates are
    # published to 5 significant figures, which limits agreement to ~1e-5.
    assert r.displacements[0, 2] == pytest.approx(-0.20641184, rel=5e-5)
    np.testing.assert_allclose(r.displacements[0, :2], 0.0, atol=1e-12)
    # Six-fold symmetry (closed form): equal forces in each family of members.
    for family in range(4):
        t = r.axial_forces[6 * family : 6 * family + 6]
        np.testing.assert_allclose(t, t[0], rtol=1e-10)
    assert r.reaction_total[2] == pytest.approx(220.46, rel=1e-12)


def _tripod(h: float = 3.0, a: float = 2.0) -> sf.Model:
    m = sf.Model()
    ang = np.deg2rad([90.0, 210.0, 330.0])
    base = m.add_nodes(np.c_[a * np.cos(ang), a * np.sin(ang), np.zeros(3)])
    top = m.add_nodes([[0.0, 0.0, h]])
    m.add_members(np.c_[base, np.repeat(top, 3)], area=2e-4, E=200e9)
    m.add_support(base)
    return m


def test_symmetric_tripod_vertical_load() -> None:
    # Closed form: each leg of a symmetric tripod under vertical load P carries
    # N = -P / (3 cos(theta)), theta the angle of the leg from the vertical, and
    # the apex drops by N L / (E A) / cos(theta).
    h, a, P = 3.0, 2.0, 30e3
    m = _tripod(h, a)
    m.add_load("V", [3], (0.0, 0.0, -P))
    r = m.solve()["V"]
    L = np.hypot(h, a)
    cos_t = h / L
    N = -P / (3 * cos_t)
    np.testing.assert_allclose(r.axial_forces, N, rtol=1e-12)
    assert r.displacements[3, 2] == pytest.approx(N * L / (200e9 * 2e-4) / cos_t, rel=1e-12)
    np.testing.assert_allclose(r.reactions[:3, 2], P / 3, rtol=1e-12)


def test_tripod_horizontal_load_statics() -> None:
    # Closed form from joint equilibrium at the apex: solve the 3x3 system of
    # leg directions directly; the stiffness solve must give the same forces.
    h, a, H = 3.0, 2.0, 5e3
    m = _tripod(h, a)
    m.add_load("H", [3], (H, 0.0, 0.0))
    r = m.solve()["H"]
    legs = m.nodes[:3] - m.nodes[3]  # unit vectors from apex towards each foot
    c = legs / np.linalg.norm(legs, axis=1)[:, None]
    # Tension t pulls the apex towards the foot: sum t_k c_k + F = 0.
    t = np.linalg.solve(c.T, -np.array([H, 0.0, 0.0]))
    np.testing.assert_allclose(r.axial_forces, t, rtol=1e-10, atol=1e-9 * H)
    assert r.axial_forces[0] == pytest.approx(0.0, abs=1e-9 * H)  # leg in the y-z plane


def test_bar_between_fixed_supports_heated() -> None:
    # Closed form: a fully restrained bar heated by dT carries N = -E A alpha dT.
    E, A, alpha, dT = 210e9, 3e-3, 12e-6, 40.0
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [5, 0, 0]])
    m.add_members([[0, 1]], area=A, E=E, alpha=alpha)
    m.add_support([0, 1])
    m.add_temperature("T", [0], dT)
    r = m.solve()["T"]
    assert r.axial_forces[0] == pytest.approx(-E * A * alpha * dT, rel=1e-12)
    # The compressed bar pushes each end outwards; the supports push back in.
    np.testing.assert_allclose(r.reactions[:, 0], [E * A * alpha * dT, -E * A * alpha * dT])
    assert r.residual < 1e-12


def test_free_thermal_expansion_no_force() -> None:
    # Closed form: a statically determinate tripod heated uniformly expands
    # freely: no forces; in linear theory each leg's elongation alpha dT L is
    # the apex rise projected on the leg, dh h / L, so dh = alpha dT L² / h.
    m = _tripod()
    m.alpha[:] = 12e-6
    m.add_temperature("T", [0, 1, 2], 50.0)
    r = m.solve()["T"]
    np.testing.assert_allclose(r.axial_forces, 0.0, atol=1e-6)
    assert r.displacements[3, 2] == pytest.approx(12e-6 * 50.0 * 13.0 / 3.0, rel=1e-9)


def test_self_weight_reactions_sum_to_weight(dome: sf.Model) -> None:
    # Closed form: the reactions carry the whole weight, sum density*A*L*g.
    dome.density[:] = 7.3e-4  # any density; the check is a sum
    dome.add_self_weight("G")
    r = dome.solve()["G"]
    weight = np.sum(dome.density * dome.area * dome.lengths) * sf.STANDARD_GRAVITY
    assert r.reaction_total[2] == pytest.approx(weight, rel=1e-12)
    np.testing.assert_allclose(r.reaction_total[:2], 0.0, atol=1e-9 * weight)


def test_settlement_of_a_support() -> None:
    # Closed form: a bar whose far support is moved along the bar by d is
    # stretched by d, N = E A d / L.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [4, 0, 0]])
    m.add_members([[0, 1]], area=1e-3, E=200e9)
    m.add_support([0, 1])
    m.add_settlement("S", [1], (0.002, 0.0, 0.0))
    r = m.solve()["S"]
    assert r.axial_forces[0] == pytest.approx(200e9 * 1e-3 * 0.002 / 4.0, rel=1e-12)
    assert r.displacements[1, 0] == pytest.approx(0.002)
    assert r.residual < 1e-12


def test_spring_support_shares_load() -> None:
    # Closed form: a vertical bar (stiffness EA/L) on a spring k in series
    # under P: the spring carries P, the bar top moves P/k + P L/(EA).
    E, A, L, k, P = 200e9, 1e-4, 2.0, 5e6, 1e3
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [0, 0, L]])
    m.add_members([[0, 1]], area=A, E=E)
    m.add_support([0])
    m.add_support([1], z=False)
    m.add_spring([1], kz=k)
    m.add_load("P", [1], (0, 0, P))
    r = m.solve()["P"]
    assert r.displacements[1, 2] == pytest.approx(P / (k + E * A / L), rel=1e-12)
    assert r.reaction_total[2] == pytest.approx(-P, rel=1e-12)
    assert r.reactions[1, 2] == pytest.approx(-k * r.displacements[1, 2], rel=1e-12)


def test_initial_strain_lack_of_fit() -> None:
    # Closed form: a member made too long by e0 between fixed supports is
    # pushed back: N = -E A e0.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [3, 0, 0]])
    m.add_members([[0, 1]], area=1e-3, E=70e9)
    m.add_support([0, 1])
    m.add_initial_strain("F", [0], 1e-4)
    assert m.solve()["F"].axial_forces[0] == pytest.approx(-70e9 * 1e-3 * 1e-4, rel=1e-12)


def test_combination_is_superposition(ferreira: sf.Model) -> None:
    ferreira.add_load("Q", [0], (1e3, 0.0, 2e3))
    ferreira.add_combination("ULS", {"P": 1.35, "Q": 1.5})
    res = ferreira.solve()
    c = res["ULS"]
    np.testing.assert_allclose(
        c.axial_forces, 1.35 * res["P"].axial_forces + 1.5 * res["Q"].axial_forces, rtol=1e-12
    )
    np.testing.assert_allclose(
        c.reactions, 1.35 * res["P"].reactions + 1.5 * res["Q"].reactions, rtol=1e-12, atol=1e-9
    )
    assert c.kind == "combination" and res.combinations == ["ULS"]
    assert c.residual < 1e-12
    env = res.envelope("E", ["P", "Q", "ULS"])
    np.testing.assert_array_equal(
        env.axial_max, np.max([res[k].axial_forces for k in ("P", "Q", "ULS")], axis=0)
    )


def test_temperature_case_residual_is_meaningful() -> None:
    # A load-free case still reports a residual relative to its internal forces.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [4, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=1e-3, E=200e9, alpha=1.2e-5)
    m.add_support([0, 1, 2])
    m.add_temperature("T", [0], 30.0)
    r = m.solve()["T"]
    assert 0.0 <= r.residual < 1e-12
    assert r.axial_forces[0] < 0


def test_solver_names_and_unknown(ferreira: sf.Model) -> None:
    assert ferreira.solve(solver="scipy").solver == "scipy"
    with pytest.raises(sf.SolverError, match="unknown solver 'magic'"):
        ferreira.solve(solver="magic")
    with pytest.raises(KeyError, match="no result named 'X'"):
        ferreira.solve()["X"]
