"""The self-checks of all results in one pass give what the column-by-column checks give."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.analysis import selfchecks, static

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))
from grids import double_layer_grid


def _model() -> sf.Model:
    # Invented demo data: a 3 x 3 bay grid with a spring, a warmed chord, a settled
    # support, an unloaded case and combinations of them all.
    m = double_layer_grid(3, 3)
    m.set_member_properties(np.arange(m.n_members), alpha=12e-6)  # steel, common practice
    m.add_spring([5], kz=2.0e6)
    m.add_load("side", [0, 1], (4.0e3, 0.0, 0.0))
    m.add_temperature("warm", [0, 1, 2], 30.0)
    m.add_settlement("settle", [0], (0.0, 0.0, -0.004))
    m.add_load("nothing", [0], (0.0, 0.0, 0.0))
    m.add_combination("ULS", {"roof": 1.35, "side": 1.5, "warm": 0.6})
    m.add_combination("SLS", {"roof": 1.0, "settle": 1.0})
    m.add_combination("twice", {"side": 1.0, "nothing": 2.0})
    return m


def _per_column(model, labels, U, T, R, F, E0, A, absA, spring, restrained,  # type: ignore[no-untyped-def]
                area=None, known=None):
    # The solve hands over no reactions (they follow from equilibrium) and no free strains
    # when no case has any: the per-result checks get them written out.
    if R is None:
        R = np.where((restrained | (spring > 0))[:, None], A @ T - F, 0.0)
    if E0 is None:
        E0 = np.zeros_like(T)
    # The elongations of the whole block at once, as the solve computed them
    # before results made theirs from u when read: the two must agree exactly.
    elong = A.T @ U
    return {name: selfchecks._make_result(model, name, kind, U[:, j], T[:, j], R[:, j], F[:, j],
                                      elong[:, j], E0[:, j], A, absA, spring, restrained,
                                      factors=factors)
            for j, (kind, name, factors) in enumerate(labels)}


def test_batched_checks_equal_the_per_result_checks(monkeypatch: pytest.MonkeyPatch) -> None:
    batched = _model().solve()
    monkeypatch.setattr(static, "_make_results", _per_column)
    reference = _model().solve()
    assert list(batched) == list(reference)
    for name in reference:
        a, b = batched[name], reference[name]
        assert a.kind == b.kind and a.factors == b.factors
        for field in ("displacements", "axial_forces", "reactions", "loads", "elongations"):
            np.testing.assert_array_equal(getattr(a, field), getattr(b, field), err_msg=name)
        # The residual is the same norm summed in another order (all columns at once).
        assert a.residual == pytest.approx(b.residual, rel=1e-12, abs=1e-300), name
    # The unloaded case's forces are all exactly zero (round-off cleared).
    assert not np.any(batched["nothing"].axial_forces)
    # Warmed chords between pinned perimeter nodes carry force (common practice),
    # and so does a settled support of this statically indeterminate frame.
    assert np.any(batched["warm"].axial_forces)
    assert np.any(batched["settle"].axial_forces)


def test_batched_checks_fail_closed_on_the_right_result() -> None:
    m = _model()
    r = m.solve()
    n3 = 3 * m.n_nodes
    U = np.column_stack([r[k].displacements.ravel() for k in r])
    T = np.column_stack([r[k].axial_forces for k in r])
    R = np.column_stack([r[k].reactions.ravel() for k in r])
    F = np.column_stack([r[k].loads.ravel() for k in r])
    E = np.column_stack([r[k].elongations for k in r])
    E0 = np.zeros_like(E)
    labels = [(r[k].kind, k, None) for k in r]
    U[1, 5] = np.nan  # column 5: ULS, after the five cases
    A = static.equilibrium_matrix(m)
    with pytest.raises(sf.SolverError, match=r"combination 'ULS': the solver returned non-finite "
                       "displacements"):
        static._make_results(m, labels, U, T, R, F, E0, A, abs(A), m.springs.ravel(),
                             m.restraint.ravel())
    assert U.shape[0] == n3


def test_column_norms_equal_the_scaled_norm_of_each_column() -> None:
    # Columns of ordinary size, near the float64 limits, all zero, with inf and NaN: the
    # blocked norm must give what _norm (scaled, no overflow) gives column by column.
    rng = np.random.default_rng(3)
    # Columns 6 and 7 lie where the sum of squares alone cannot tell that no square
    # overflows or underflows (entries near 1e150 and 1e-150): they are sized.
    X = rng.normal(size=(50, 8))
    X[:, 1] *= 1e200
    X[:, 2] *= 1e-200
    X[:, 3] = 0.0
    X[7, 4] = np.inf
    X[9, 5] = np.nan
    X[:, 6] = 9e149 * np.sign(X[:, 6])
    X[:, 7] = 1.2e-150 * np.sign(X[:, 7])
    got = selfchecks._column_norms(X)
    want = [selfchecks._norm(X[:, j]) for j in range(8)]
    np.testing.assert_allclose(got[:3], want[:3], rtol=1e-14)
    np.testing.assert_allclose(got[6:], want[6:], rtol=1e-14)
    assert got[3] == 0.0 and got[4] == np.inf and np.isnan(got[5])
    np.testing.assert_allclose(got[0], np.linalg.norm(X[:, 0]), rtol=1e-14)
    np.testing.assert_allclose(got[6], 9e149 * np.sqrt(50), rtol=1e-14)
    # Ordinary columns are the fused sum of squares, bit for bit, with or without others.
    assert got[0] == np.sqrt(np.einsum("i,i->", X[:, 0], X[:, 0]))
    assert selfchecks._column_norms(X[:, :1])[0] == got[0]


@pytest.mark.parametrize("order", ["C", "F"])
def test_peak_displacements_are_the_largest_node_magnitudes(order: str) -> None:
    # Columns of ordinary size, near the float64 limits and all zero: the largest
    # |u| of a node and that node, as the plain norms of each node give them.
    rng = np.random.default_rng(5)
    U = rng.normal(size=(3 * 40, 5))
    U[:, 1] *= 1e200
    U[:, 2] *= 1e-200
    U[:, 3] = 0.0
    U[3 * 17 + 2, 4] = 50.0  # one node far ahead of the others
    U = np.asarray(U, order=order)
    peaks, nodes = static._peak_displacements(U)
    for j in (0, 1, 2, 4):
        big = float(np.abs(U[:, j]).max())
        mag = [float(np.linalg.norm(U[3 * i:3 * i + 3, j] / big)) * big for i in range(40)]
        assert nodes[j] == int(np.argmax(mag)), j
        np.testing.assert_allclose(peaks[j], max(mag), rtol=1e-14, err_msg=str(j))
    assert peaks[3] == 0.0 and nodes[3] == 0 and nodes[4] == 17


def test_loaded_nodes_are_the_nodes_with_a_load() -> None:
    # A few loaded nodes (one by a NaN) give those nodes, ascending; loads at one
    # node in four or more give None (kept whole), as any() over rows decides.
    n = 40
    f = np.zeros((n, 3))
    f[[3, 9, 9, 30], [2, 0, 1, 1]] = [-1.0, 2.0, 3.0, np.nan]
    got = selfchecks._loaded_nodes(f.reshape(-1), n)
    np.testing.assert_array_equal(got, np.flatnonzero(f.any(axis=1)))
    assert selfchecks._loaded_nodes(np.zeros(3 * n), n).size == 0
    f[: n // 4 + 1, 0] = 1.0
    assert np.flatnonzero(f.any(axis=1)).size * selfchecks._SPARSE_LOADS >= n
    assert selfchecks._loaded_nodes(f.reshape(-1), n) is None


def test_forced_refinement_keeps_springs_settlements_and_temperatures(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # Refinement solves the recovery's own residual K u - f; were a term of it
    # missing (the springs' k u, the forces a settlement or a warmed chord
    # imposes), refining every column every step would move the answer away.
    reference = _model().solve()
    monkeypatch.setattr(static, "REFINE_ABOVE", -1.0)
    refined = _model().solve()
    for name in reference:
        a, b = refined[name], reference[name]
        scale = float(np.abs(b.displacements).max()) or 1.0
        np.testing.assert_allclose(a.displacements, b.displacements, rtol=0.0,
                                   atol=1e-12 * scale, err_msg=name)
        force = float(np.abs(b.axial_forces).max()) or 1.0
        np.testing.assert_allclose(a.axial_forces, b.axial_forces, rtol=0.0,
                                   atol=1e-10 * force, err_msg=name)


@pytest.mark.parametrize("order", ["C", "F"])
def test_node_sums_of_sparse_and_dense_blocks_equal_the_plain_sums(order: str) -> None:
    # A block of point loads (a few rows not 0), one with a dense column, and
    # one with a NaN at a loaded row: the sums over the loaded nodes only must
    # be the plain sums over every node, and the NaN must reach them.
    rng = np.random.default_rng(11)
    n, c = 200, 6
    sparse = np.zeros((3 * n, c), order=order)
    for j in range(c):
        sparse[rng.integers(3 * n, size=2), j] = rng.normal(size=2) * 1e4
    dense = sparse.copy(order=order)
    dense[:, 0] = rng.normal(size=3 * n)
    for X in (sparse, dense):
        X3 = np.asarray(X).reshape(n, 3, c)
        total, size = selfchecks._node_sums(X, n)
        np.testing.assert_allclose(total, X3.sum(axis=0), rtol=1e-13, atol=1e-9)
        np.testing.assert_allclose(size, np.abs(X3).sum(axis=0), rtol=1e-13, atol=0)
    held = np.unique(np.flatnonzero(sparse.any(axis=1)) // 3)
    total, size = selfchecks._node_sums(sparse, n, held)
    np.testing.assert_allclose(total, sparse.reshape(n, 3, c).sum(axis=0), rtol=1e-13, atol=1e-9)
    bad = sparse.copy(order=order)
    bad[int(np.flatnonzero(bad[:, 3])[0]), 3] = np.nan
    total, size = selfchecks._node_sums(bad, n)
    assert np.isnan(total[:, 3]).any() and np.isnan(size[:, 3]).any()
    assert np.isfinite(total[:, [0, 1, 2, 4, 5]]).all()
