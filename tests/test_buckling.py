"""Linear buckling against closed forms derived here for pin-jointed frames."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse
from _bars import pinned_bar
from benchmarks.grids import double_layer_grid

import spaceframe as sf
import spaceframe.analysis.eigen as eigen
from spaceframe.analysis.matrices import (
    elastic_stiffness,
    free_dof_map,
    geometric_stiffness,
    member_geometry,
)
from spaceframe.assembly import stiffness_matrix

E, A = 210e9, 1e-3  # Pa, m²


def von_mises(theta_deg: float, L: float = 5.0, P: float = 1e3) -> sf.Model:
    """Two bars of length L at theta from the horizontal, pinned feet, apex load P down;
    the apex is held out of plane (y)."""
    t = np.deg2rad(theta_deg)
    m = sf.Model()
    m.add_nodes([[-L * np.cos(t), 0, 0], [0, 0, L * np.sin(t)], [L * np.cos(t), 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=A, E=E)
    m.add_support([0, 2])
    m.add_support([1], x=False, y=True, z=False)
    m.add_load("P", [1], (0.0, 0.0, -P))
    return m


@pytest.mark.parametrize("theta", [20.0, 60.0])
def test_von_mises_truss_symmetric_and_sway(theta: float, backend: str) -> None:
    # Closed form, derived: each bar carries N = -P / (2 sin θ).  At the apex
    # K_E = 2(EA/L) diag(cos²θ, sin²θ) and K_G = 2(N/L) diag(sin²θ, cos²θ) in (x, z),
    # so det(K_E + λ K_G) = 0 gives the symmetric (z) mode λP = 2EA sin³θ / cos²θ and
    # the sway (x) mode λP = 2EA cos²θ / sin θ (the linearised stability limit of
    # the two-bar truss; the snap-through load itself needs a nonlinear analysis).
    P = 1e3
    m = von_mises(theta, P=P)
    b = sf.linear_buckling(m, m.solve(solver=backend)["P"], n_modes=2, solver=backend)
    t = np.deg2rad(theta)
    sym = 2 * E * A * np.sin(t) ** 3 / np.cos(t) ** 2 / P
    sway = 2 * E * A * np.cos(t) ** 2 / np.sin(t) / P
    np.testing.assert_allclose(b.factors, sorted([sym, sway]), rtol=1e-10)
    # The mode of the symmetric factor moves the apex along z, the sway one along x.
    first = 2 if sym < sway else 0
    np.testing.assert_allclose(np.abs(b.modes[0, 1]), np.eye(3)[first], atol=1e-12)
    assert b.modes.shape == (2, 3, 3)
    np.testing.assert_array_equal(b.modes[:, [0, 2]], 0.0)


def test_bar_on_lateral_spring_and_fewer_factors_than_asked() -> None:
    # Closed form: a bar of length L pinned at one end, the other on a lateral
    # spring k, under axial compression P: k - λP/L = 0, so λ = kL/P.
    L, k, P = 3.0, 1e5, 1e3
    m = pinned_bar(L, A, E)
    m.add_support([1], x=False, y=False, z=True)
    m.add_spring([1], ky=k)
    m.add_load("P", [1], (-P, 0.0, 0.0))
    r = m.solve()["P"]
    b = sf.linear_buckling(m, r, n_modes=2)
    np.testing.assert_allclose(b.factors, [k * L / P], rtol=1e-12)
    assert b.notes and "only 1" in b.notes[0]
    np.testing.assert_allclose(b.modes[0, 1], [0, 1, 0], atol=1e-12)
    # The same bar in tension has no positive factor: one clear line.
    m.cases["P"].forces *= -1
    with pytest.raises(sf.ModelError, match="no member in compression"):
        sf.linear_buckling(m, m.solve()["P"], n_modes=1)
    # ... but asked for, the reversed load (compression again) gives λ = -kL/P.
    b = sf.linear_buckling(m, m.solve()["P"], n_modes=1, negative=True)
    assert b.factors.size == 0
    np.testing.assert_allclose(b.negative_factors, [-k * L / P], rtol=1e-12)
    with pytest.raises(sf.ModelError, match="more modes than the 2 free"):
        sf.linear_buckling(m, r, n_modes=3)


def test_braced_column() -> None:
    # Closed form: a pin-ended vertical column of length L_v held at its top by a
    # horizontal bar of length L_h to a support: the brace is a spring EA_h/L_h, so
    # P_cr = (E A_h / L_h) L_v.
    P = 1e4
    m, Lv, Lh, Ah = braced_column_cases((P,))
    b = sf.linear_buckling(m, m.solve()["P0"], n_modes=1)
    np.testing.assert_allclose(b.factors * P, [E * Ah / Lh * Lv], rtol=1e-12)


def test_factors_scale_inversely_with_load(dome: sf.Model) -> None:
    # Linearity of K_G in N (closed form): doubling the loads halves every factor.
    r = dome.solve()["P"]
    b1 = sf.linear_buckling(dome, r, n_modes=4)
    b2 = sf.linear_buckling(dome, 2.0 * r.axial_forces, n_modes=4)
    np.testing.assert_allclose(b2.factors, b1.factors / 2.0, rtol=1e-10)
    assert np.all(np.diff(b1.factors) >= 0) and np.all(b1.factors > 0)
    np.testing.assert_allclose(np.linalg.norm(b1.modes, axis=2).max(axis=1), 1.0)


def test_lanczos_agrees_with_dense(monkeypatch: pytest.MonkeyPatch) -> None:
    # The sparse path (estimate, shifted factorisation, buckling-mode Lanczos)
    # against LAPACK's dense generalised solver on the same grid.
    m = double_layer_grid(8, 8)
    r = m.solve()["roof"]
    dense = sf.linear_buckling(m, r, n_modes=6, negative=True)
    monkeypatch.setattr(eigen, "DENSE_EIGEN_LIMIT", 0)
    sparse = sf.linear_buckling(m, r, n_modes=6, negative=True)
    np.testing.assert_allclose(sparse.factors, dense.factors, rtol=1e-8)
    np.testing.assert_allclose(sparse.negative_factors, dense.negative_factors, rtol=1e-8)
    # The lowest factor is simple here: its mode is unique up to sign (fixed).
    np.testing.assert_allclose(sparse.modes[0], dense.modes[0], atol=1e-6)


def test_geometric_stiffness_pattern_and_blocks(dome: sf.Model) -> None:
    dof_map, free = free_dof_map(dome.restraint)
    L, c = member_geometry(dome.nodes, dome.members)
    K = elastic_stiffness(dome.members, dome.n_nodes, c, dome.axial_stiffness,
                          dof_map=dof_map, n_dof=free.size)
    K_ref = stiffness_matrix(dome, dof_map=dof_map, n_dof=free.size)
    np.testing.assert_allclose(K.toarray(), K_ref.toarray(), rtol=1e-12, atol=1e-6)
    N = np.linspace(-5.0, 5.0, dome.n_members)
    G = geometric_stiffness(dome.members, dome.n_nodes, c, L, N)
    Gr = geometric_stiffness(dome.members, dome.n_nodes, c, L, N, dof_map=dof_map,
                             n_dof=free.size)
    np.testing.assert_array_equal(Gr.indptr, K.indptr)
    np.testing.assert_array_equal(Gr.indices, K.indices)
    # Per member, (N/L)[[g, -g], [-g, g]] with g = I - c cᵀ (the 6x6 summed densely).
    D = np.zeros((3 * dome.n_nodes,) * 2)
    for k, (i, j) in enumerate(dome.members):
        g = N[k] / L[k] * (np.eye(3) - np.outer(c[k], c[k]))
        d = np.r_[3 * i : 3 * i + 3, 3 * j : 3 * j + 3]
        D[np.ix_(d, d)] += np.block([[g, -g], [-g, g]])
    np.testing.assert_allclose(G.toarray(), D, atol=1e-12)


def braced_column_cases(loads: tuple[float, ...]) -> tuple[sf.Model, float, float, float]:
    """Column L_v pinned at its foot, braced at its top by a bar L_h; case "P<i>" per load."""
    Lv, Lh, Ah = 4.0, 2.5, 2e-4
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [0, 0, Lv], [Lh, 0, Lv]])
    m.add_members([[0, 1]], area=A, E=E)
    m.add_members([[1, 2]], area=Ah, E=E)
    m.add_support([0, 2])
    m.add_support([1], x=False, y=True, z=False)
    for i, P in enumerate(loads):
        m.add_load(f"P{i}", [1], (0.0, 0.0, -P))
    return m, Lv, Lh, Ah


def test_many_results_braced_column_closed_form() -> None:
    # Closed form, derived: the top of the pin-ended column (length L_v) is held
    # sideways only by the brace, a spring of stiffness E A_h / L_h; the column's
    # geometric stiffness there is -P / L_v, so E A_h / L_h - λP / L_v = 0 and
    # λ P = P_cr = (E A_h / L_h) L_v for every load P.
    loads = (1e4, 2.5e4, 4e3)
    m, Lv, Lh, Ah = braced_column_cases(loads)
    res = m.solve()
    out = sf.linear_buckling_many(m, [res[f"P{i}"] for i in range(3)], n_modes=1)
    assert [b.name for b in out] == ["P0", "P1", "P2"]
    for b, P in zip(out, loads, strict=True):
        np.testing.assert_allclose(b.factors * P, [E * Ah / Lh * Lv], rtol=1e-12)


def test_many_results_consistent_with_single_and_factorise_once(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # Consistency check against the library's own single-result function (no
    # outside source): each result's factors and modes are linear_buckling's,
    # on the sparse path, with K_E factorised once for all of them.
    m = double_layer_grid(8, 8)
    m.add_load("side", np.arange(10, 17), (4e3, 0.0, -6e3))
    r = m.solve()
    results = [r["roof"], r["side"], 0.5 * r["roof"].axial_forces]
    monkeypatch.setattr(eigen, "DENSE_EIGEN_LIMIT", 0)
    single = [sf.linear_buckling(m, x, n_modes=4, negative=True) for x in results]
    calls: list[int] = []
    real = eigen.factorize

    def counting(K: object, *a: object, **kw: object) -> object:
        calls.append(1)
        return real(K, *a, **kw)  # type: ignore[arg-type]

    monkeypatch.setattr(eigen, "factorize", counting)
    many = sf.linear_buckling_many(m, results, n_modes=4, negative=True)
    assert len(calls) == 1
    assert [b.name for b in many] == ["roof", "side", "given forces"]
    for a, b in zip(single, many, strict=True):
        np.testing.assert_allclose(b.factors, a.factors, rtol=1e-10)
        np.testing.assert_allclose(b.negative_factors, a.negative_factors, rtol=1e-10)
        np.testing.assert_allclose(np.abs(b.modes[0]), np.abs(a.modes[0]), atol=1e-6)
    # Linearity in N: the third result is half the first, so its factors double.
    np.testing.assert_allclose(many[2].factors, 2.0 * many[0].factors, rtol=1e-8)
    assert sf.linear_buckling_many(m, []) == []


def test_many_results_refuses_a_result_without_compression_or_keeps_its_error() -> None:
    P = 1e4
    m, Lv, Lh, Ah = braced_column_cases((P,))
    m.add_load("up", [1], (0.0, 0.0, P))
    r = m.solve()
    with pytest.raises(sf.ModelError, match="'up' has no member in compression"):
        sf.linear_buckling_many(m, [r["P0"], r["up"]])
    kept = sf.linear_buckling_many(m, [r["up"], r["P0"]], n_modes=1, errors="keep")
    assert isinstance(kept[0], sf.ModelError) and "'up'" in str(kept[0])
    assert isinstance(kept[1], sf.BucklingResult)
    # The closed form of the braced column (above): P_cr = (E A_h / L_h) L_v.
    np.testing.assert_allclose(kept[1].factors * P, [E * Ah / Lh * Lv], rtol=1e-12)
    only = sf.linear_buckling_many(m, [r["up"]], errors="keep")
    assert len(only) == 1 and isinstance(only[0], sf.ModelError)
    with pytest.raises(sf.ModelError, match="errors = 'skip'"):
        sf.linear_buckling_many(m, [r["P0"]], errors="skip")  # type: ignore[call-overload]


def test_many_results_keep_gives_a_mechanism_to_every_result() -> None:
    # A column with no brace: the top node can sway, so K_E is singular and
    # every result gets the same MechanismError.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [0, 0, 4.0]])
    m.add_members([[0, 1]], area=A, E=E)
    m.add_support([0])
    m.add_support([1], x=False, y=True, z=False)
    forces = [np.array([-1e3]), np.array([-2e3])]
    kept = sf.linear_buckling_many(m, forces, errors="keep")
    assert all(isinstance(x, sf.MechanismError) for x in kept) and len(kept) == 2


def test_shift_from_estimate_when_the_bound_is_missing(monkeypatch: pytest.MonkeyPatch) -> None:
    # Without the single-direction bound the sparse path falls back to a loose
    # Lanczos estimate for its shift; same factors as LAPACK's dense solver.
    m = double_layer_grid(8, 8)
    r = m.solve()["roof"]
    dense = sf.linear_buckling(m, r, n_modes=6)
    monkeypatch.setattr(eigen, "DENSE_EIGEN_LIMIT", 0)
    monkeypatch.setattr(eigen, "factor_upper_bound", lambda K, G, factor=None: None)
    sparse = sf.linear_buckling(m, r, n_modes=6)
    np.testing.assert_allclose(sparse.factors, dense.factors, rtol=1e-8)


def test_single_direction_bound_is_above_the_lowest_factor() -> None:
    # Courant-Fischer (the lowest factor is the least Rayleigh quotient): the
    # bound of each single direction lies at or above the lowest factor.
    m = double_layer_grid(6, 6)
    r = m.solve()["roof"]
    dof_map, free = free_dof_map(m.restraint)
    args = (m.members, m.n_nodes, m.directions)
    K = elastic_stiffness(*args, m.axial_stiffness, dof_map=dof_map, n_dof=free.size)
    G = geometric_stiffness(*args, m.lengths, r.axial_forces, dof_map=dof_map, n_dof=free.size)
    bound = eigen.factor_upper_bound(K, G)
    lowest = sf.linear_buckling(m, r, n_modes=1).factors[0]
    assert bound is not None and bound >= lowest * (1 - 1e-12)
    # Tension only (G positive definite): no direction softens, no bound.
    assert eigen.factor_upper_bound(K, scipy.sparse.identity(K.shape[0])) is None
