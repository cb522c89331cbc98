"""Following a buckling branch: the path on geometry imperfect by a buckling mode.

Reference values come from closed forms derived in each test's docstring for
the co-rotational bar with engineering strain, N = EA (l - L0)/L0.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.optimize as so
from test_nonlinear import braced_strut

import spaceframe as sf
from spaceframe.analysis.nonlinear import PathError

E, AREA = 210e9, 1.0e-4
EA = E * AREA
ELL, K, P0 = 1.0, 1.0e5, 1.0e5  # bar length, lateral spring, reference load


def strut() -> sf.Model:
    """The spring-braced strut of test_nonlinear's branch-point test (P down at node 2)."""
    return braced_strut(ELL, K, P0)


def p_cr() -> float:
    """Bifurcation load of the perfect strut (derived in test_nonlinear's branch-point test):
    P_cr = (k l/2)/(1 + k l/(2 EA))."""
    return (K * ELL / 2) / (1 + K * ELL / (2 * EA))


def p_imperfect(x1: np.ndarray | float, w0: float) -> np.ndarray:
    """Load P on the symmetric path of the strut built with node 1 at (w0, 0, l).

    Derivation (engineering strain).  Both bars have the unstressed length
    L = sqrt(l² + w0²).  On the symmetric path node 1 sits at (x1, 0, z1) and
    node 2 at (0, 0, 2 z1) (vertical balance of node 1 then holds for equal
    forces N in both bars of equal length l = sqrt(x1² + z1²)).  Horizontal
    balance of node 1: 2 N x1/l + k (x1 - w0) = 0; vertical balance of node 2:
    P = -N z1/l; the bar law N = EA (l - L)/L.  Eliminating N:

        l = EA / (EA/L + k (x1 - w0)/(2 x1)),   z1 = sqrt(l² - x1²),
        P(x1) = -EA (l - L)/L · z1/l.
    """
    x1 = np.asarray(x1, dtype=float)
    L = np.hypot(ELL, w0)
    ell = EA / (EA / L + K * (x1 - w0) / (2 * x1))
    z1 = np.sqrt(ell**2 - x1**2)
    return -EA * (ell - L) / L * z1 / ell


def traced(w0: float) -> sf.LoadPath:
    """The path on the imperfect strut until it has passed its maximum (60 steps)."""
    with pytest.raises(PathError, match="60 steps used") as err:
        sf.solve_nonlinear(strut(), "P", imperfection=w0, max_steps=60, limit_tolerance=1e-10,
                           tolerance=1e-12)
    path = err.value.path
    assert path is not None
    return path


@pytest.mark.parametrize("w0", [1e-3, 1e-4])
def test_imperfect_strut_follows_the_branch_to_a_maximum_just_below_p_cr(w0: float) -> None:
    """The maximum of p_imperfect (scipy.optimize.minimize_scalar on the closed form) lies
    below P_cr and tends to it as w0 -> 0.  For rigid bars P = (k/2)(1 - w0/x)
    sqrt(l² - x²), whose maximum at x* = (w0 l²)^(1/3) gives
    1 - P_max/P_cr = 1.5 (w0/l)^(2/3) + O((w0/l)^(4/3)), Koiter's two-thirds
    power law of an unstable symmetric bifurcation (derived here; Koiter 1945
    from memory)."""
    path = traced(w0)
    # The imperfection: node 1 moved by w0 along x, the mode of the lateral spring.
    np.testing.assert_allclose(path.imperfection, [[0, 0, 0], [w0, 0, 0], [0, 0, 0]], atol=1e-12)
    assert path.imperfection_amplitude == w0 and path.imperfection_mode == 1
    assert "imperfect geometry" in path.notes[0] and f"{w0:.6g} m" in path.notes[0]
    # Every step on the closed-form curve, node 2 at twice node 1's height.
    x1 = w0 + path.displacements[1:, 1, 0]
    np.testing.assert_allclose(path.load_factors[1:] * P0, p_imperfect(x1, w0),
                               rtol=1e-9, atol=1e-9 * P0)
    np.testing.assert_allclose(path.displacements[:, 2, 2], 2 * path.displacements[:, 1, 2],
                               rtol=1e-7, atol=1e-12)
    # One limit point: the maximum of the closed form, located to limit_tolerance.
    best = so.minimize_scalar(lambda x: -p_imperfect(x, w0), bounds=(w0 * 1.0001, 0.5 * ELL),
                              method="bounded", options={"xatol": 1e-12})
    p_max = -float(best.fun)
    (i,) = path.limit_points
    assert path.load_factors[i] * P0 == pytest.approx(p_max, rel=1e-8)
    assert path.load_factors.max() * P0 == pytest.approx(p_max, rel=1e-8)
    # From below: the maximum load is short of P_cr by Koiter's law (its
    # O((w0/l)^(4/3)) rest and the bars' extension: within 5 %).
    gap = 1.0 - p_max / p_cr()
    assert gap > 0
    assert gap == pytest.approx(1.5 * (w0 / ELL) ** (2 / 3), rel=0.05)
    # Past the maximum the branch falls: the tangent has a negative eigenvalue.
    assert path.load_factors[-1] < path.load_factors[i]
    assert np.all(path.negative_pivots[i + 1 :] == 1)


def test_negative_amplitude_buckles_the_other_way() -> None:
    a = traced(1e-3)
    b = traced(-1e-3)
    np.testing.assert_allclose(b.limit_load_factors, a.limit_load_factors, rtol=1e-8)
    assert np.sign(b.displacements[-1, 1, 0]) == -np.sign(a.displacements[-1, 1, 0])


def test_perfect_path_says_nothing_about_imperfections() -> None:
    path = sf.solve_nonlinear(strut(), "P", max_load_factor=0.2)
    np.testing.assert_array_equal(path.imperfection, 0.0)
    assert path.imperfection.shape == (3, 3)
    assert path.imperfection_amplitude == 0.0 and path.imperfection_mode == 0
    assert path.notes == []


def test_bad_imperfection_options_are_refused() -> None:
    with pytest.raises(sf.ModelError, match="imperfection = nan"):
        sf.solve_nonlinear(strut(), "P", imperfection=float("nan"))
    with pytest.raises(sf.ModelError, match="imperfection_mode = 0"):
        sf.solve_nonlinear(strut(), "P", imperfection=1e-3, imperfection_mode=0)
    with pytest.raises(sf.ModelError, match="imperfection_mode = 2: case 'P' has only 1"):
        sf.solve_nonlinear(strut(), "P", imperfection=1e-3, imperfection_mode=2)
