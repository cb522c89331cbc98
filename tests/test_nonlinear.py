"""Large-displacement path following against closed forms.

Every reference value here comes from a closed form derived in the test's
docstring for the co-rotational bar with engineering strain, N = EA (l - L0)/L0,
or from the linear solve, or from a general-purpose library (numpy, scipy).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import scipy.optimize as so
import scipy.sparse as sp
from _bars import pinned_bar
from hypothesis import given, settings
from hypothesis import strategies as st

import spaceframe as sf
from spaceframe.analysis.corotational import Tangent
from spaceframe.analysis.nonlinear import STRAIN_MEASURE, PathError

# Shallow two-bar truss: half-span a, rise h, E A of each bar.
A_HALF, RISE, E, AREA = 1.0, 0.1, 210e9, 1.0e-4
EA = E * AREA
L0 = float(np.hypot(A_HALF, RISE))


def p_exact(w: np.ndarray | float) -> np.ndarray:
    """Apex load (downward positive) of the two-bar truss at apex deflection w.

    Derivation (engineering strain, co-rotational bars).  The bars run from
    (-a, 0, 0) and (a, 0, 0) to the apex, which after moving down by w sits at
    (0, 0, h - w).  Each bar then has length L(w) = sqrt(a² + (h - w)²),
    strain (L - L0)/L0 with L0 = sqrt(a² + h²), and force N = EA (L - L0)/L0
    along its current direction (a, 0, h - w)/L.  Vertical equilibrium of the
    apex under the downward load P:  2 N (h - w)/L + P = 0, so

        P(w) = 2 EA (L0 - L)/L0 · (h - w)/L = 2 EA (1/L - 1/L0)(h - w)

    (with P counted positive upward the same curve reads 2 EA (1/L0 - 1/L)(h - w)).
    The same shallow truss is the classic snap-through example of Crisfield,
    Non-linear Finite Element Analysis of Solids and Structures, Vol. 1 (Wiley
    1991), ch. 1, and the von Mises truss of Bažant & Cedolin, Stability of
    Structures (1991) (chapter references from memory; the curve is derived here).
    """
    L = np.hypot(A_HALF, RISE - np.asarray(w))
    return 2.0 * EA * (1.0 / L - 1.0 / L0) * (RISE - np.asarray(w))


def limit_exact() -> tuple[float, float]:
    """Apex deflection and load at the first limit point of ``p_exact``.

    With y = h - w, dP/dy = 2 EA (a²/L³ - 1/L0), which vanishes at
    L* = (a² L0)^(1/3), y* = sqrt(L*² - a²): P_max = 2 EA y* (1/L* - 1/L0).
    By the oddness of P in y the second limit (a minimum) is -P_max at
    w = h + y*.
    """
    Ls = (A_HALF**2 * L0) ** (1.0 / 3.0)
    ys = float(np.sqrt(Ls**2 - A_HALF**2))
    return RISE - ys, 2.0 * EA * ys * (1.0 / Ls - 1.0 / L0)


def two_bar(load: float, spring_bar: float | None = None) -> sf.Model:
    """The two-bar truss; with ``spring_bar`` (N/m) the load acts through a vertical bar."""
    m = sf.Model()
    m.add_nodes([[-A_HALF, 0, 0], [0, 0, RISE], [A_HALF, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=AREA, E=E)
    m.add_support([0, 2])
    m.add_support([1], x=False, y=True, z=False)  # out of plane only
    top = 1
    if spring_bar is not None:
        top = int(m.add_nodes([[0, 0, RISE + 1.0]])[0])
        m.add_members([[1, top]], area=spring_bar * 1.0 / E, E=E)  # EA/L = spring_bar
        m.add_support([top], x=True, y=True, z=False)
    m.add_load("P", [top], (0.0, 0.0, -load))
    return m


def test_two_bar_path_lies_on_the_exact_curve_through_both_limits() -> None:
    _, pmax = limit_exact()
    p0 = 1.5 * pmax  # beyond the snap: only the inverted branch reaches it
    path = sf.solve_nonlinear(two_bar(p0), "P", max_load_factor=1.0)
    w = -path.displacements[:, 1, 2]
    # Every converged step on the closed-form curve of p_exact.
    np.testing.assert_allclose(path.load_factors * p0, p_exact(w), rtol=0, atol=1e-7 * pmax)
    np.testing.assert_allclose(path.displacements[:, 1, :2], 0.0, atol=1e-12)  # symmetry
    # The path snaps through: the load factor rises, falls below zero, rises again.
    assert path.load_factors.min() < -0.5
    assert path.limit_points.size == 2
    assert np.all(path.residuals <= 1e-9)
    assert path.strain_measure == STRAIN_MEASURE
    assert "engineering" in path.strain_measure and "co-rotational" in path.strain_measure


def test_two_bar_limit_loads_match_the_closed_form() -> None:
    w_lim, pmax = limit_exact()
    p0 = 1.5 * pmax
    path = sf.solve_nonlinear(two_bar(p0), "P", limit_tolerance=1e-10)
    # limit_exact: P_max and its mirror -P_max, located to the stated tolerance.
    np.testing.assert_allclose(path.limit_load_factors * p0, [pmax, -pmax], rtol=1e-8)
    # P is flat there (quadratic), so the deflection is located to ~sqrt(tol).
    w = -path.displacements[path.limit_points, 1, 2]
    np.testing.assert_allclose(w, [w_lim, 2 * RISE - w_lim], atol=1e-4 * RISE)
    # The load factor turns at each: a maximum, then a minimum.
    i, j = path.limit_points
    lam = path.load_factors
    assert lam[i - 1] < lam[i] > lam[i + 1]
    assert lam[j - 1] > lam[j] < lam[j + 1]


def test_two_bar_lands_exactly_on_max_load_factor_past_the_snap() -> None:
    _, pmax = limit_exact()
    p0 = 1.5 * pmax
    path = sf.solve_nonlinear(two_bar(p0), "P", max_load_factor=1.0)
    assert path.load_factors[-1] == 1.0
    assert np.all(path.load_factors[:-1] < 1.0)
    # The inverted branch: the root of p_exact(w) = p0 beyond the second limit
    # (scipy.optimize.brentq on the closed form).
    w_end = so.brentq(lambda w: p_exact(w) - p0, 2 * RISE, 10 * RISE, xtol=1e-15)
    assert -path.displacements[-1, 1, 2] == pytest.approx(w_end, rel=1e-9)
    # Both bars in tension there: N = EA (L - L0)/L0 with L at w_end.
    n_end = EA * (np.hypot(A_HALF, RISE - w_end) - L0) / L0
    np.testing.assert_allclose(path.axial_forces[-1], n_end, rtol=1e-8)
    assert n_end > 0


def test_two_bar_stops_on_the_rising_branch_below_the_limit() -> None:
    """A target below P_max is met on the first branch: no limit point, no snap."""
    _, pmax = limit_exact()
    path = sf.solve_nonlinear(two_bar(pmax), "P", max_load_factor=0.5)
    assert path.load_factors[-1] == 0.5
    assert path.limit_points.size == 0
    assert np.all(np.diff(path.load_factors) > 0)
    w_end = so.brentq(lambda w: p_exact(w) - 0.5 * pmax, 0.0, limit_exact()[0], xtol=1e-15)
    assert -path.displacements[-1, 1, 2] == pytest.approx(w_end, rel=1e-9)


def test_two_bar_negative_pivots_follow_the_slope_of_the_curve() -> None:
    """The reduced tangent (apex x, z) has one negative eigenvalue where dP/dw < 0.

    The apex's internal force along z is f_z = -P(w) with w = -u_z, so the z
    stiffness is d f_z/d u_z = dP/dw; by symmetry x and z do not couple, and
    the x stiffness stays positive (the bars' axial stiffness EA/L0 (a/L)²
    dwarfs the geometric N/L (h - w)²/L²).
    """
    _, pmax = limit_exact()
    path = sf.solve_nonlinear(two_bar(1.5 * pmax), "P")
    w = -path.displacements[:, 1, 2]
    slope = np.gradient(p_exact(np.r_[w - 1e-7, w + 1e-7]).reshape(2, -1), axis=0)[0]
    away = np.ones(path.n_steps, dtype=bool)
    away[path.limit_points] = False  # at a limit point the count is either
    np.testing.assert_array_equal(path.negative_pivots[away], (slope[away] < 0).astype(int))
    assert path.bifurcation_points.size == 0


def test_snap_back_through_a_soft_spring_in_series() -> None:
    """A soft vertical bar between load and apex makes the load point snap back.

    Closed form: the vertical bar stays vertical and straight, so its force is
    exactly P = k (w_top - w) with k its EA/L (engineering strain of a straight
    bar is linear in its shortening), and the apex obeys p_exact(w).  Hence
    w_top = w + P(w)/k.  The slope dw_top/dw = 1 + P'(w)/k turns negative
    (snap-back: the loaded point moves back up while the load falls) when
    k < -P'(h) = 2 EA (1/a - 1/L0); here k is half that.
    """
    k = EA * (1.0 / A_HALF - 1.0 / L0)
    _, pmax = limit_exact()
    p0 = 1.5 * pmax
    path = sf.solve_nonlinear(two_bar(p0, spring_bar=k), "P")
    w = -path.displacements[:, 1, 2]
    w_top = -path.displacements[:, 3, 2]
    P = path.load_factors * p0
    np.testing.assert_allclose(P, p_exact(w), atol=1e-7 * pmax)
    np.testing.assert_allclose(w_top, w + P / k, atol=1e-9 * RISE)
    # The loaded point moved back up at some steps: snap-back was traced.
    assert np.any(np.diff(w_top) < -0.05 * RISE)
    assert path.load_factors[-1] == 1.0
    np.testing.assert_allclose(path.limit_load_factors * p0, [pmax, -pmax], rtol=1e-7)


def test_straight_bar_in_tension_is_exact_and_matches_the_linear_solve() -> None:
    """Engineering strain of a bar stretched along its axis is exactly u/L.

    So N = EA u/L = P and u = P L/(EA) at any load (a Green strain bar would
    give P = EA (u/L)(1 + u/(2L))(1 + u/L) instead); for small loads this is
    also the linear answer.
    """
    L, P = 2.0, 0.05 * EA  # 5 % strain: far from small
    m = pinned_bar(L, AREA, E)
    m.add_support([1], x=False)
    m.add_load("T", [1], (P, 0, 0))
    path = sf.solve_nonlinear(m, "T")
    lam = path.load_factors
    np.testing.assert_allclose(path.displacements[:, 1, 0], lam * P * L / EA, rtol=1e-12)
    np.testing.assert_allclose(path.axial_forces[:, 0], lam * P, rtol=1e-12)
    np.testing.assert_allclose(path.reactions[:, 0, 0], -lam * P, rtol=1e-12)
    assert lam[-1] == 1.0
    # Small load: the linear solve of the same bar.
    m2 = pinned_bar(L, AREA, E)
    m2.add_support([1], x=False)
    m2.add_load("T", [1], (1e3, 0, 0))
    lin = m2.solve()["T"]
    small = sf.solve_nonlinear(m2, "T")
    np.testing.assert_allclose(small.displacements[-1], lin.displacements, rtol=1e-12, atol=0)
    np.testing.assert_allclose(small.axial_forces[-1], lin.axial_forces, rtol=1e-12)


def test_spring_in_parallel_with_a_bar() -> None:
    """Bar and axial spring k at its free end share the load: P = (EA/L + k) u, exactly."""
    L, k, P = 1.0, 3.0e7, 2.0e5
    m = pinned_bar(L, AREA, E)
    m.add_support([1], x=False)
    m.add_spring([1], kx=k)
    m.add_load("T", [1], (P, 0, 0))
    path = sf.solve_nonlinear(m, "T")
    u = P / (EA / L + k)
    assert path.displacements[-1, 1, 0] == pytest.approx(u, rel=1e-12)
    assert path.reactions[-1, 1, 0] == pytest.approx(-k * u, rel=1e-12)
    assert path.reactions[-1, 0, 0] == pytest.approx(-EA * u / L, rel=1e-12)


def test_load_free_run_stays_at_zero() -> None:
    m = two_bar(0.0)
    path = sf.solve_nonlinear(m, "P", max_load_factor=2.0)
    np.testing.assert_array_equal(path.load_factors, [0.0, 2.0])
    np.testing.assert_array_equal(path.displacements, 0.0)
    np.testing.assert_array_equal(path.axial_forces, 0.0)
    assert path.limit_points.size == 0


def test_loads_only_on_supports_go_straight_into_the_reactions() -> None:
    m = two_bar(0.0)
    m.add_load("S", [0], (1e3, 2e3, -3e3))
    path = sf.solve_nonlinear(m, "S", max_load_factor=1.5)
    np.testing.assert_array_equal(path.displacements, 0.0)
    np.testing.assert_allclose(path.reactions[-1, 0], [-1.5e3, -3e3, 4.5e3])


def test_small_loads_agree_with_the_linear_solve_to_second_order(dome: sf.Model) -> None:
    """Levy & Spillers' star dome (data in conftest): as lambda -> 0 the path
    leaves the linear solution quadratically, |u(lambda) - lambda u_lin| ~ C lambda²
    (a Taylor expansion of a smooth path; common practice)."""
    lin = dome.solve()["P"].displacements
    diffs = []
    for lam in (1e-6, 2e-6):
        path = sf.solve_nonlinear(dome, "P", max_load_factor=lam)
        assert path.load_factors[-1] == lam
        d = np.abs(path.displacements[-1] - lam * lin).max()
        assert d <= 1e-6 * np.abs(lam * lin).max()
        diffs.append(d)
    assert diffs[1] / diffs[0] == pytest.approx(4.0, rel=0.02)


def test_star_dome_snaps_below_its_reference_load(dome: sf.Model) -> None:
    """Levy & Spillers, Analysis of Geometrically Nonlinear Structures, 2nd ed.,
    §2.4.2 state qualitatively (as recalled, from memory) that the nonlinear crown
    deflection reaches the linear one at about 60 % of the 220.46 lbf load and
    that the dome snaps through below that load."""
    lin = dome.solve()["P"].displacements[0, 2]
    path = sf.solve_nonlinear(dome, "P", max_load_factor=1.0)
    assert path.limit_points.size >= 1
    first = path.limit_load_factors[0]
    assert 0.3 < first < 0.9
    crown = path.displacements[:, 0, 2]
    k = int(np.argmax(crown <= lin))  # first step at or past the linear deflection
    lam_at_lin = np.interp(lin, crown[k : k - 2 : -1], path.load_factors[k : k - 2 : -1])
    assert 0.5 < lam_at_lin < 0.7
    # Equilibrium as a whole at every step: reactions balance the applied load (statics).
    total = path.reactions.sum(axis=1) + path.load_factors[:, None] * path.loads.sum(axis=0)
    np.testing.assert_allclose(total, 0.0, atol=1e-8 * 220.46)


def test_combination_is_its_factored_cases() -> None:
    _, pmax = limit_exact()
    m = two_bar(0.4 * pmax)
    m.add_combination("C", {"P": 2.0})
    a = sf.solve_nonlinear(m, "P", max_load_factor=1.0)
    b = sf.solve_nonlinear(m, "C", max_load_factor=0.5)
    assert b.kind == "combination" and b.factors == {"P": 2.0}
    np.testing.assert_allclose(b.loads, 2.0 * a.loads)
    np.testing.assert_allclose(b.displacements[-1], a.displacements[-1], rtol=1e-9, atol=1e-15)


def test_bad_requests_are_refused_in_one_line() -> None:
    m = two_bar(1e3)
    with pytest.raises(sf.ModelError, match="no load case or combination 'Q'"):
        sf.solve_nonlinear(m, "Q")
    with pytest.raises(sf.ModelError, match="max_load_factor"):
        sf.solve_nonlinear(m, "P", max_load_factor=0.0)
    m.add_initial_strain("crush", [0], -1.0)
    with pytest.raises(sf.ModelError, match="'crush': member 0 has a free strain -1 <= -1"):
        sf.solve_nonlinear(m, "crush")


def test_a_step_that_cannot_converge_fails_closed_with_the_path_so_far(dome: sf.Model) -> None:
    # (On the two-bar truss the cylindrical constraint fixes the one free
    # deflection, so its steps converge exactly; the dome has many.)
    with pytest.raises(PathError) as info:
        sf.solve_nonlinear(dome, "P", tolerance=1e-30, max_iterations=1, max_cutbacks=2)
    text = str(info.value)
    assert "\n" not in text
    assert "step 1 did not converge" in text and "load factor 0" in text
    assert isinstance(info.value, sf.SolverError)
    assert info.value.path is not None and info.value.path.n_steps == 1
    _, pmax = limit_exact()
    with pytest.raises(PathError, match="3 steps used before reaching load factor 1"):
        sf.solve_nonlinear(two_bar(1.5 * pmax), "P", max_steps=3)


@pytest.mark.parametrize("seed", range(5))
def test_negative_pivot_count_matches_dense_eigenvalues(seed: int) -> None:
    """The LU inertia count against numpy.linalg.eigvalsh of the same matrix."""
    rng = np.random.default_rng(seed)
    n = 40
    R = sp.random(n, n, density=0.1, random_state=seed).toarray()
    K = R + R.T + np.diag(rng.normal(scale=2.0, size=n))
    t = Tangent(sp.csr_matrix(K))
    assert t.negative == int(np.count_nonzero(np.linalg.eigvalsh(K) < 0))
    x = t.solve(np.ones(n))
    np.testing.assert_allclose(K @ x, 1.0, atol=1e-9 * np.abs(x).max())


def test_readme_load_path_example_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """README's load-path block, run after its first Python block (which builds ``m``)."""
    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text()
    blocks = re.findall(r"```python\n(.*?)```", readme, re.S)
    ours = [b for b in blocks if "solve_nonlinear" in b]
    assert len(ours) == 1
    monkeypatch.chdir(tmp_path)
    scope: dict[str, Any] = {}
    exec(compile(blocks[0] + ours[0], "README.md", "exec"), scope)
    p = scope["p"]
    assert p.load_factors[0] == 0.0 and p.load_factors[-1] == 1.0
    # The README's frame strains by ~1e-3 under its load, so the path's end is
    # the linear answer (r, from the first block) to within terms of that
    # relative size (common practice).
    u_lin = scope["r"].displacements
    np.testing.assert_allclose(p.displacements[-1], u_lin, atol=2e-3 * np.abs(u_lin).max())
    assert not np.allclose(p.displacements[-1], u_lin, rtol=0, atol=1e-6 * np.abs(u_lin).max())


def test_progress_reports_each_converged_step() -> None:
    _, pmax = limit_exact()
    seen: list[tuple[int, float]] = []
    path = sf.solve_nonlinear(
        two_bar(1.5 * pmax), "P", progress=lambda k, lam: seen.append((k, lam))
    )
    assert seen[-1] == (path.n_steps - 1, 1.0)
    ks = [k for k, _ in seen]
    assert ks == sorted(ks) and ks[-1] == path.n_steps - 1
    for k, lam in seen:
        assert lam == path.load_factors[k]


def braced_strut(ell: float, k: float, p0: float) -> sf.Model:
    """Two collinear bars 0-1-2 along z (length ell each), a lateral spring k at node 1.

    Node 0 pinned, node 1 free in x and z, node 2 free in z only; load case
    "P" pushes node 2 down by p0.
    """
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [0, 0, ell], [0, 0, 2 * ell]])
    m.add_members([[0, 1], [1, 2]], area=AREA, E=E)
    m.add_support([0])
    m.add_support([1], x=False, y=True, z=False)
    m.add_support([2], x=True, y=True, z=False)
    m.add_spring([1], kx=k)
    m.add_load("P", [2], (0.0, 0.0, -p0))
    return m


def test_branch_point_of_a_spring_braced_strut_is_located() -> None:
    """Two collinear bars of length l, a lateral spring k at the middle node.

    Closed form (derived here; the classic spring-braced strut of stability
    texts): under an axial load P the straight strut has N = -P in both bars
    and current bar length l (1 - P/EA) (engineering strain, straight bars).
    The middle node's lateral stiffness is k + 2 N/l_current, so it vanishes at

        P_cr = (k l / 2) / (1 + k l / (2 EA)).

    The straight path goes on rising through P_cr (no limit point), and one
    eigenvalue of the tangent turns negative there: a branch point.
    """
    ell, k, p0 = 1.0, 1.0e5, 1.0e5
    p_cr = (k * ell / 2) / (1 + k * ell / (2 * EA))
    path = sf.solve_nonlinear(braced_strut(ell, k, p0), "P", limit_tolerance=1e-10)
    assert path.limit_points.size == 0
    assert np.all(np.diff(path.load_factors) > 0)
    (b,) = path.bifurcation_points
    assert path.load_factors[b] * p0 == pytest.approx(p_cr, rel=1e-8)
    np.testing.assert_array_equal(path.negative_pivots[:b], 0)
    np.testing.assert_array_equal(path.negative_pivots[b:], 1)
    # Still straight: the primary path is traced past the branch point.
    np.testing.assert_allclose(path.displacements[:, :, 0], 0.0, atol=1e-15)
    np.testing.assert_allclose(path.axial_forces[-1], -p0, rtol=1e-10)


def _random_mast(seed: int) -> sf.Model:
    """A tetrahedral mast: each new node braced to the three before it (determinate, stable)."""
    rng = np.random.default_rng(seed)
    m = sf.Model()
    ang = np.deg2rad([90.0, 210.0, 330.0]) + rng.uniform(-0.3, 0.3, 3)
    m.add_nodes(np.c_[2.0 * np.cos(ang), 2.0 * np.sin(ang), np.zeros(3)])
    for k in range(3, 3 + int(rng.integers(1, 5))):
        p = m.nodes[k - 3 : k]
        normal = np.cross(p[1] - p[0], p[2] - p[0])
        normal *= np.sign(normal[2]) / np.linalg.norm(normal)
        new = p.mean(axis=0) + rng.uniform(1.5, 3.0) * normal + rng.uniform(-0.3, 0.3, 3)
        m.add_nodes([new])
        m.add_members(np.c_[np.arange(k - 3, k), np.full(3, k)], area=2e-4, E=200e9)
    m.add_support([0, 1, 2])
    return m


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 2**32 - 1))
def test_random_masts_leave_the_linear_path_at_second_order(seed: int) -> None:
    """u(lambda) = lambda u_lin + O(lambda²) on any smooth path (Taylor; common practice)."""
    m = _random_mast(seed)
    top = m.n_nodes - 1
    direction = np.random.default_rng(seed + 1).normal(size=3)
    m.add_load("P", [top], direction / np.linalg.norm(direction) * 1e4)
    lin = m.solve()["P"]
    # Scale the reference load so that the linear strain reaches 1 % at load factor 1.
    strain = np.abs(lin.axial_forces).max() / (200e9 * 2e-4)
    scale = 1e-2 / strain
    m.cases["P"].forces *= scale
    u_lin = scale * lin.displacements
    diffs = []
    for lam in (1e-3, 2e-3):
        path = sf.solve_nonlinear(m, "P", max_load_factor=lam)
        d = float(np.abs(path.displacements[-1] - lam * u_lin).max())
        assert d <= 1e-3 * lam * np.abs(u_lin).max()  # strain 1e-5 at this load
        diffs.append(d)
    assert diffs[1] / diffs[0] == pytest.approx(4.0, rel=0.02)
