"""Determinacy at any size: the sparse inertia count against closed forms and the dense count."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
import spaceframe.analysis.stability as st
from spaceframe.assembly import equilibrium_matrix

sys.path.insert(0, str(Path(__file__).resolve().parent / "benchmarks"))

from bench_determinacy import tower
from grids import double_layer_grid


def _counts(d: sf.Determinacy) -> tuple[int, int, int]:
    return d.rank, d.self_stress, d.mechanisms


def sparse(model: sf.Model, monkeypatch: pytest.MonkeyPatch, modes: bool = True) -> sf.Determinacy:
    """determinacy() forced onto its sparse path (the dense limit set to 0)."""
    with monkeypatch.context() as mp:
        mp.setattr(st, "DENSE_LIMIT", 0)
        d = st.determinacy(model, modes=modes)
    assert d.method == "sparse"
    return d


def flat_grid(n: int) -> sf.Model:
    """n x n squares in z = 0, one diagonal each, perimeter nodes pinned in x, y, z."""
    ij = np.arange((n + 1) ** 2).reshape(n + 1, n + 1)
    y, x = np.divmod(np.arange((n + 1) ** 2), n + 1)
    m = sf.Model()
    m.add_nodes(np.c_[x, y, np.zeros_like(x)].astype(float))
    bars = np.concatenate([
        np.c_[ij[:, :-1].ravel(), ij[:, 1:].ravel()],
        np.c_[ij[:-1, :].ravel(), ij[1:, :].ravel()],
        np.c_[ij[:-1, :-1].ravel(), ij[1:, 1:].ravel()],
    ])
    m.add_members(bars, area=1e-4, E=2e11)
    rim = np.zeros(ij.shape, dtype=bool)
    rim[[0, -1], :] = rim[:, [0, -1]] = True
    m.add_support(ij[rim])
    return m


@pytest.mark.parametrize("n", [2, 5, 12])
def test_flat_grid_one_mechanism_per_interior_node(n: int, monkeypatch: pytest.MonkeyPatch) -> None:
    # A triangulated plane grid pinned on its rim is stiff in its plane; every
    # interior node can move out of the plane with first-order inextensional
    # length change zero: one infinitesimal mechanism per interior node
    # (Pellegrino and Calladine 1986, section on first-order mechanisms;
    # common practice).  In-plane the grid is determinate per Maxwell, so the
    # rank is 2 per interior node and s = b - 2 (n-1)^2.
    m = flat_grid(n)
    interior = (n - 1) ** 2
    b = 2 * n * (n + 1) + n * n
    assert m.n_members == b
    expect = (2 * interior, b - 2 * interior, interior)
    assert _counts(st.determinacy(m)) == expect
    d = sparse(m, monkeypatch)
    assert _counts(d) == expect
    if interior <= st.SPARSE_MODE_LIMIT:
        assert d.mechanism_modes is not None
        # Every mechanism is out of plane: no x or y movement anywhere.
        np.testing.assert_allclose(d.mechanism_modes[:, :, :2], 0.0, atol=1e-8)


def test_maxwell_determinate_space_truss(monkeypatch: pytest.MonkeyPatch) -> None:
    # A tetrahedron on three pins, and a chain of tetrahedra built one node
    # and three bars at a time (Henneberg construction): b = 3j - k,
    # statically and kinematically determinate (Maxwell, "On the calculation
    # of the equilibrium and stiffness of frames", Phil. Mag. 27, 1864).
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [1, 1.7, 0]])
    rng = np.random.default_rng(3)
    for i in range(40):
        m.add_nodes([rng.uniform(-1, 3, 3) + np.array([0.0, 0.0, 1 + i * 0.5])])
        new = 3 + i
        prev = rng.choice(new, 3, replace=False)
        m.add_members([[int(p), new] for p in prev], area=1e-4, E=2e11)
    m.add_support([0, 1, 2])
    assert m.n_members == 3 * m.n_nodes - int(m.restraint.sum())
    for d in (st.determinacy(m), sparse(m, monkeypatch)):
        assert (d.self_stress, d.mechanisms) == (0, 0)


def test_cube_sparse_matches_dense_and_bases_are_null_vectors(
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    from test_stability import cube

    m = cube()
    free = np.flatnonzero(~m.restraint.ravel())
    A = equilibrium_matrix(m).toarray()[free]
    for d in (st.determinacy(m), sparse(m, monkeypatch)):
        # j = 8, k = 12, b = 12: r = 8, s = 4, m = 4 (see test_stability).
        assert _counts(d) == (8, 4, 4)
        assert d.mechanism_modes is not None and d.self_stress_states is not None
        D = d.mechanism_modes.reshape(4, -1)[:, free]
        np.testing.assert_allclose(D @ A, 0.0, atol=1e-9)  # A^T d = 0: inextensional
        assert np.linalg.matrix_rank(D) == 4
        np.testing.assert_allclose(np.abs(d.mechanism_modes).max(axis=(1, 2)) > 0, True)
        np.testing.assert_allclose(A @ d.self_stress_states.T, 0.0, atol=1e-9)  # A t = 0
        assert np.linalg.matrix_rank(d.self_stress_states) == 4
        np.testing.assert_allclose(np.abs(d.self_stress_states).max(axis=1), 1.0)


def test_tower_storey_without_bracing(monkeypatch: pytest.MonkeyPatch) -> None:
    # The open storey's four vertical legs leave the braced part above it
    # free to translate in x and y and to twist about z: three mechanisms
    # (rigid-body motions of the upper block not stopped by four parallel
    # bars, derived here).  Every other storey and level is braced.
    m = tower(60, 30)
    d = sparse(m, monkeypatch)
    assert d.mechanisms == 3
    k = int(m.restraint.sum())
    assert d.self_stress == m.n_members - (3 * m.n_nodes - k - 3)
    assert _counts(d) == _counts(st.determinacy(m))
    assert d.mechanism_modes is not None
    moving = np.linalg.norm(d.mechanism_modes, axis=2).max(axis=0) > 1e-6
    # Only nodes above the open storey (levels 31..60) move.
    np.testing.assert_array_equal(np.flatnonzero(moving), np.arange(4 * 31, 4 * 61))


def test_random_frames_sparse_count_equals_dense(monkeypatch: pytest.MonkeyPatch) -> None:
    # Random frames, some with mechanisms and some with self-stress: the two
    # paths count alike, and s - m = b - 3j + k (Calladine, Int. J. Solids
    # Struct. 14, 1978) holds for both.
    rng = np.random.default_rng(12)
    for trial in range(12):
        n = int(rng.integers(6, 25))
        m = sf.Model()
        m.add_nodes(rng.uniform(0, 10, (n, 3)))
        pairs = np.array([(i, j) for i in range(n) for j in range(i + 1, n)])
        size = min(len(pairs), int(rng.integers(n, 3 * n + 5)))
        pick = rng.choice(len(pairs), size, replace=False)
        m.add_members(pairs[pick], area=1e-4, E=2e11)
        m.add_support(rng.choice(n, 3, replace=False))
        dd, ds = st.determinacy(m), sparse(m, monkeypatch)
        assert _counts(dd) == _counts(ds), trial
        k = int(m.restraint.sum())
        assert ds.self_stress - ds.mechanisms == m.n_members - 3 * n + k


def test_large_grid_counts_without_dense_svd() -> None:
    # About 50k members: far above the dense limit, so the sparse count runs.
    # The grid is stable (m = 0; tests/test_benchmark_grids.py), hence
    # s = b - 3j + k (extended Maxwell rule, Calladine 1978).
    m = double_layer_grid(79, 79)
    assert m.n_members == 8 * 79 * 79
    d = st.determinacy(m, modes=False)
    assert d.method == "sparse"
    k = int(m.restraint.sum())
    assert d.mechanisms == 0
    assert d.self_stress == m.n_members - 3 * m.n_nodes + k


def test_large_model_says_when_bases_are_not_computed() -> None:
    m = double_layer_grid(20, 20)  # 3200 members, s = 3200 - 3 * 841 + 240 = 917
    d = st.determinacy(m)
    assert d.method == "sparse" and d.self_stress == 917
    assert d.self_stress_states is None
    assert "917 states of self-stress: more than 50" in d.note
    assert d.mechanism_modes is not None and d.mechanism_modes.shape == (0, m.n_nodes, 3)


def test_sparse_naming_names_the_same_nodes(monkeypatch: pytest.MonkeyPatch) -> None:
    from test_hardening import pyramid_model

    from spaceframe.analysis.static import full_matrix, reduced_system

    m = pyramid_model()
    K, free = reduced_system(m, "scipy")
    K = full_matrix(K, "scipy")
    _, dense = st.mechanism_modes(K, free)
    monkeypatch.setattr(st, "_DENSE_NAMING", 0)
    w, modes = st.mechanism_modes(K, free)
    # Two geometric mechanisms (test_hardening); the spring at node 2 holds
    # one of them in the stiffness, so one zero-energy mode remains.
    assert len(modes) == len(dense) == 1
    assert np.all(w < 1e-12)
    np.testing.assert_array_equal(modes[0], dense[0])
    assert {int(x) // 3 for x in modes[0]} == {2, 3, 4}


@pytest.mark.parametrize("force_sparse", [False, True])
def test_two_collinear_bars(force_sparse: bool, monkeypatch: pytest.MonkeyPatch) -> None:
    # Two collinear bars between two pins, the joint between them free: the
    # introductory example of Pellegrino and Calladine (1986), there in the
    # plane with one mechanism and one state of self-stress (from memory).
    # In space the joint has a second transverse direction: r = 1 (only the
    # axial direction is held), s = 2 - 1 = 1, m = 3 - 1 = 2.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [2, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=1e-4, E=2e11)
    m.add_support([0, 2])
    d = sparse(m, monkeypatch) if force_sparse else st.determinacy(m)
    assert _counts(d) == (1, 1, 2)
    assert d.self_stress_states is not None and d.mechanism_modes is not None
    # The self-stress is equal tension (or compression) in both bars.
    np.testing.assert_allclose(np.abs(d.self_stress_states), [[1.0, 1.0]], atol=1e-9)
    # The mechanisms move the joint across the line only.
    np.testing.assert_allclose(d.mechanism_modes[:, [0, 2]], 0.0, atol=1e-12)
    np.testing.assert_allclose(d.mechanism_modes[:, 1, 0], 0.0, atol=1e-9)


def test_cholesky_shortcut_and_ldlt_count_alike(monkeypatch: pytest.MonkeyPatch) -> None:
    # A stable grid (m = 0; s = b - 3j + k, Calladine 1978): the PARDISO
    # Cholesky shortcut, where installed, proves it; the L D L^T inertia count
    # alone gives the same counts.  A frame with mechanisms is never proved
    # stable by the shortcut (the tower's open storey sways).
    m = double_layer_grid(20, 20)
    fast = st.determinacy(m, modes=False)
    with monkeypatch.context() as mp:
        mp.setattr(st, "_positive_definite_above", lambda Ks, tau: False)
        slow = st.determinacy(m, modes=False)
    assert _counts(fast) == _counts(slow)
    assert slow.self_stress == m.n_members - 3 * m.n_nodes + int(m.restraint.sum())
    t = tower(60, 30)
    A_f = equilibrium_matrix(t).tocsr()[np.flatnonzero(~t.restraint.ravel())]
    As = st.sp.diags(st._scaled_rows(A_f)) @ A_f
    assert not st._positive_definite_above(As @ As.T, st.PIVOT_TOLERANCE)
    assert sparse(t, monkeypatch, modes=False).mechanisms > 0
