"""The solve of a block of right-hand sides into an array the caller owns (solvers.solve_into)."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

import spaceframe as sf
from spaceframe.solvers import factorize, needs_upper, solve_into


def _spd(n: int = 40) -> sp.csr_matrix:
    # A 1D chain of springs plus a stiffer diagonal: symmetric positive definite
    # (diagonally dominant, common practice).
    main = np.full(n, 4.0)
    off = np.full(n - 1, -1.0)
    return sp.diags([off, main, off], [-1, 0, 1], format="csr")


def test_solve_into_writes_the_solution_into_the_callers_array(backend: str) -> None:
    K = _spd()
    given = sp.triu(K, format="csr") if needs_upper(backend) else K
    f = factorize(given, backend, refine=False)
    rng = np.random.default_rng(5)
    B = np.asfortranarray(rng.normal(size=(40, 7)))
    before = B.copy()
    wide = np.full((40, 9), np.nan, order="F")
    out = wide[:, :7]  # a block of a wider work array, as the static solve passes
    got = solve_into(f, B, out)
    assert got is out
    np.testing.assert_allclose(K @ out, B, rtol=0, atol=1e-12)
    np.testing.assert_allclose(out, f.solve(B), rtol=1e-13, atol=0)
    np.testing.assert_array_equal(B, before)  # the right-hand sides are left as they were
    assert np.isnan(wide[:, 7:]).all()  # nothing written past the block


def test_pardiso_solve_into_refuses_arrays_it_cannot_take() -> None:
    from spaceframe.solvers import available_backends

    if "pardiso" not in available_backends():
        pytest.skip("pardiso not installed")
    f = factorize(sp.triu(_spd(), format="csr"), "pardiso", refine=False)
    B = np.asfortranarray(np.ones((40, 3)))
    with pytest.raises(sf.SolverError, match=r"out must be \(40, k\) float64 column by column"):
        solve_into(f, B, np.ones((40, 3)))  # row by row
    with pytest.raises(sf.SolverError, match="rhs must be"):
        solve_into(f, np.ones((39, 3), order="F"), np.ones((39, 3), order="F"))
    with pytest.raises(sf.SolverError, match="not overlap"):
        solve_into(f, B, B)
    # No columns: nothing to solve, and no call into the library.
    empty = np.empty((40, 0), order="F")
    assert solve_into(f, empty, np.empty((40, 0), order="F")).shape == (40, 0)
