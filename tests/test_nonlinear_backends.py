"""The tangent's two factorisations: PARDISO's Cholesky (analysis reused) and the symmetric LU.

Reference: the same path traced with the symmetric LU alone (``solver="scipy"``),
whose negative-pivot counts test_nonlinear checks against dense eigenvalues.
"""

from __future__ import annotations

import numpy as np
import pytest
from test_nonlinear import limit_exact, two_bar

import spaceframe as sf
from spaceframe.analysis.corotational import Bars
from spaceframe.solvers import available_backends

pytestmark = pytest.mark.skipif("pardiso" not in available_backends(),
                                reason="PARDISO is not installed")


def test_both_factorisations_trace_the_same_snap_through(dome: sf.Model) -> None:
    """Through both limit points of the two-bar truss (indefinite tangents between them)
    and over the star dome's snap: same steps, same counts, same values to round-off."""
    _, pmax = limit_exact()
    for model, name in ((two_bar(1.5 * pmax), "P"), (dome, "P")):
        a = sf.solve_nonlinear(model, name, solver="scipy")
        b = sf.solve_nonlinear(model, name, solver="pardiso")
        assert a.n_steps == b.n_steps
        np.testing.assert_array_equal(a.limit_points, b.limit_points)
        away = np.ones(a.n_steps, dtype=bool)
        away[a.limit_points] = False  # at a limit point the tangent is singular: either count
        np.testing.assert_array_equal(a.negative_pivots[away], b.negative_pivots[away])
        assert (a.negative_pivots > 0).any()
        np.testing.assert_allclose(b.load_factors, a.load_factors, rtol=1e-7, atol=1e-9)
        scale = np.abs(a.displacements).max()
        # (At a limit point the load factor is flat: the point is located to sqrt(tolerance).)
        np.testing.assert_allclose(b.displacements[away], a.displacements[away], rtol=0,
                                   atol=1e-7 * scale)
        np.testing.assert_allclose(b.displacements, a.displacements, rtol=0, atol=1e-4 * scale)


def test_a_replaced_factorisation_refuses_to_solve() -> None:
    m = two_bar(1e3)
    bars = Bars(m, m.cases["P"].forces.ravel(), solver="pardiso")
    s = bars.state(np.zeros(bars.nf), 0.0)
    first = bars.tangent(s)
    x = first.solve(bars.q)
    second = bars.tangent(s)  # the same pattern: PARDISO's analysis is reused
    np.testing.assert_allclose(second.solve(bars.q), x, rtol=1e-12)
    with pytest.raises(RuntimeError, match="replaced by a later one"):
        first.solve(bars.q)
