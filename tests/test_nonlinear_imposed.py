"""Temperature, initial strain and settlement on the large-displacement path.

Both are scaled by the load factor lambda: a free strain eps = alpha dT + eps0
makes the unstressed length L0 (1 + lambda eps), a settlement moves the
restrained directions to lambda u_p.  Reference values come from closed forms
derived in each test's docstring for the co-rotational bar with engineering
strain, N = EA (l - L0)/L0, or from the linear solve of the same model
(``Model.solve``).
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.optimize as so
from _bars import pinned_bar

import spaceframe as sf

E, AREA, ALPHA = 210e9, 1.0e-4, 1.2e-5
EA = E * AREA


def heated_bar(length: float, dT: float, spring: float = 0.0) -> sf.Model:
    """One bar along x, node 0 pinned; node 1 pinned too, or free along x on a spring."""
    m = pinned_bar(length, AREA, E)
    m.set_member_properties([0], alpha=ALPHA)
    if spring:
        m.add_support([1], x=False)
        m.add_spring([1], kx=spring)
    else:
        m.add_support([1])
    m.add_temperature("T", [0], dT)
    return m


def test_bar_between_two_supports_heated_carries_minus_ea_alpha_dt() -> None:
    """Both ends held, so l = L; L0 = L (1 + alpha dT) and
    N = EA (L - L0)/L0 = -EA alpha dT/(1 + alpha dT), which is -EA alpha dT in
    the small-strain limit (the classic restrained-bar result, common practice).
    """
    dT = 2.0  # alpha dT = 2.4e-5: small strain
    path = sf.solve_nonlinear(heated_bar(3.0, dT), "T")
    lam = path.load_factors
    assert lam[-1] == 1.0 and path.n_steps == 21  # nothing free: equal increments
    assert "load control" in path.notes[0]
    exact = -EA * ALPHA * dT * lam / (1.0 + ALPHA * dT * lam)
    np.testing.assert_allclose(path.axial_forces[:, 0], exact, rtol=1e-12, atol=0)
    # Small-strain limit, within its own relative error alpha dT.
    assert path.axial_forces[-1, 0] == pytest.approx(-EA * ALPHA * dT, rel=2 * ALPHA * dT)
    # And the linear solve of the same model: N = -EA alpha dT.
    lin = heated_bar(3.0, dT).solve()["T"]
    assert path.axial_forces[-1, 0] == pytest.approx(lin.axial_forces[0], rel=2 * ALPHA * dT)
    # The supports push back on the compressed bar: -N at node 0 along x, +N at node 1.
    np.testing.assert_allclose(path.reactions[-1, :, 0], [-exact[-1], exact[-1]], rtol=1e-12)
    np.testing.assert_array_equal(path.displacements, 0.0)


def test_heated_bar_on_a_spring_follows_the_exact_large_strain_curve() -> None:
    """Node 1 free along x on a spring k: l = L + u, L0 = L (1 + lambda eps),
    and N = EA (L + u - L0)/L0 = -k u gives, exactly for the straight bar,

        u = EA (L0 - L)/(EA + k L0) = EA lambda eps L/(EA + k L0).

    eps = 0.6 % here (dT = 500 K): far from the small-strain limit.
    """
    L, k, dT = 2.0, 1.0e7, 500.0
    path = sf.solve_nonlinear(heated_bar(L, dT, spring=k), "T")
    lam = path.load_factors
    eps = ALPHA * dT * lam
    L0 = L * (1.0 + eps)
    u = EA * eps * L / (EA + k * L0)
    assert lam[-1] == 1.0 and path.n_steps > 2
    np.testing.assert_allclose(path.displacements[:, 1, 0], u, rtol=1e-8, atol=0)
    np.testing.assert_allclose(path.axial_forces[:, 0], -k * u, rtol=1e-8, atol=0)
    np.testing.assert_allclose(path.reactions[:, 1, 0], -k * u, rtol=1e-8, atol=0)


def test_initial_strain_is_a_longer_unstressed_length() -> None:
    """Lack of fit eps0 acts as alpha dT: the same curve as the heated bar with eps = eps0."""
    L, k, eps0 = 2.0, 1.0e7, 4.0e-3
    m = pinned_bar(L, AREA, E)
    m.add_support([1], x=False)
    m.add_spring([1], kx=k)
    m.add_initial_strain("fit", [0], eps0)
    path = sf.solve_nonlinear(m, "fit")
    eps = eps0 * path.load_factors
    u = EA * eps * L / (EA + k * L * (1.0 + eps))
    np.testing.assert_allclose(path.displacements[:, 1, 0], u, rtol=1e-8, atol=0)


# Shallow two-bar truss as in test_nonlinear: half-span a, rise h.
A_HALF, RISE = 1.0, 0.1


def two_bar_settling(s: float) -> sf.Model:
    """Two bars from (-a, 0, 0) and (a, 0, 0) to the apex; the left support settles by s down."""
    m = sf.Model()
    m.add_nodes([[-A_HALF, 0, 0], [0, 0, RISE], [A_HALF, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=AREA, E=E)
    m.add_support([0, 2])
    m.add_support([1], x=False, y=True, z=False)
    m.add_spring([1], kz=1.0e6)
    m.add_settlement("S", [0], (0.0, 0.0, -s))
    return m


def test_small_settlement_agrees_with_the_linear_solve_to_second_order() -> None:
    """As lambda -> 0 the path leaves the linear solution quadratically (Taylor, common
    practice): |u(s) - u_lin(s)| ~ C s², so doubling s quadruples the difference."""
    diffs = []
    for s in (1e-6, 2e-6):
        m = two_bar_settling(s)
        lin = m.solve()["S"]
        path = sf.solve_nonlinear(m, "S")
        assert path.load_factors[-1] == 1.0
        np.testing.assert_allclose(path.displacements[-1, 0], [0, 0, -s], rtol=1e-15)
        d = float(np.abs(path.displacements[-1] - lin.displacements).max())
        assert d <= 1e-3 * np.abs(lin.displacements).max()
        np.testing.assert_allclose(path.axial_forces[-1], lin.axial_forces,
                                   rtol=1e-3, atol=1e-3 * np.abs(lin.axial_forces).max())
        diffs.append(d)
    assert diffs[1] / diffs[0] == pytest.approx(4.0, rel=0.05)


def test_large_settlement_of_an_inclined_bar_on_a_spring() -> None:
    """Bar from node 0 at the origin to node 1 at (a, 0, h); node 1 held in x, y
    and on a vertical spring k; node 0 settles by s downward.

    With node 1 moved by w (up positive) the bar is d = (a, 0, h + w + s),
    l = |d|, N = EA (l - L)/L.  Vertical equilibrium of node 1:
    -N (h + w + s)/l - k w = 0, one equation in w with a root in (-s, 0)
    (at w = -s the bar has its drawn length and the spring pushes up; at w = 0
    it is stretched and pulls down), found by scipy.optimize.brentq.  The
    settlement is 20 % of the rise: far from small displacements.
    """
    a, h, k = 1.0, 0.5, 2.0e6
    s = 0.1
    m = pinned_bar(a, AREA, E)
    m.nodes = np.array([[0.0, 0, 0], [a, 0, h]])
    m.add_support([1], z=False)
    m.add_spring([1], kz=k)
    m.add_settlement("S", [0], (0.0, 0.0, -s))
    path = sf.solve_nonlinear(m, "S")
    L = float(np.hypot(a, h))

    def balance(w: float, lam: float) -> float:
        dz = h + w + lam * s
        ell = float(np.hypot(a, dz))
        return -EA * (ell - L) / L * dz / ell - k * w

    lam = path.load_factors
    w = [so.brentq(balance, -t * s, 0.0, args=(t,), xtol=1e-16) if t else 0.0 for t in lam]
    np.testing.assert_allclose(path.displacements[:, 1, 2], w, rtol=1e-9, atol=1e-15)
    dz = h + np.array(w) + lam * s
    N = EA * (np.hypot(a, dz) - L) / L
    np.testing.assert_allclose(path.axial_forces[:, 0], N, rtol=1e-9, atol=1e-9 * N.max())
    np.testing.assert_allclose(path.displacements[:, 0, 2], -lam * s, rtol=1e-15)
    # The settling support holds the bar: -N d/l on node 0; the spring: -k w.
    np.testing.assert_allclose(path.reactions[-1, 0, 2], -N[-1] * dz[-1] / np.hypot(a, dz[-1]),
                               rtol=1e-9)
    assert path.reactions[-1, 1, 2] == pytest.approx(-k * w[-1], rel=1e-9)



def test_a_combination_scales_the_free_strain_by_its_factor() -> None:
    """1.5 x (dT = 200 K) follows the curve of dT = 300 K (the closed form above)."""
    L, k = 2.0, 1.0e7
    m = heated_bar(L, 200.0, spring=k)
    m.add_combination("1.5T", {"T": 1.5})
    path = sf.solve_nonlinear(m, "1.5T")
    eps = ALPHA * 300.0 * path.load_factors
    u = EA * eps * L / (EA + k * L * (1.0 + eps))
    np.testing.assert_allclose(path.displacements[:, 1, 0], u, rtol=1e-8, atol=0)
    assert path.kind == "combination" and path.factors == {"T": 1.5}
