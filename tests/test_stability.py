"""Mechanism diagnosis and determinacy."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial.transform import Rotation

import spaceframe as sf


def planar_truss() -> sf.Model:
    """A flat Warren truss in z = 0 with only in-plane supports."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0.5, 1, 0], [1.5, 1, 0]])
    m.add_members(
        [[0, 1], [1, 2], [0, 3], [1, 3], [1, 4], [2, 4], [3, 4]], area=1e-4, E=2e11
    )
    m.add_support([0])
    m.add_support([2], x=False)
    m.add_load("P", [3], (0, -1e3, 0))
    return m


def cube(load: tuple[float, float, float] = (1e3, 0.0, 0.0)) -> sf.Model:
    """A unit cube of edges only on four pinned corners: a sway mechanism."""
    m = sf.Model()
    m.add_nodes([[x, y, z] for z in (0, 1) for y in (0, 1) for x in (0, 1)])
    edges = [[0, 1], [2, 3], [4, 5], [6, 7], [0, 2], [1, 3], [4, 6], [5, 7],
             [0, 4], [1, 5], [2, 6], [3, 7]]
    m.add_members(edges, area=1e-4, E=2e11)
    m.add_support([0, 1, 2, 3])
    m.add_load("P", [4], load)
    return m


def tetra(supported: bool = True) -> sf.Model:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    m.add_members([[0, 1], [0, 2], [0, 3], [1, 2], [1, 3], [2, 3]], area=1e-4, E=2e11)
    if supported:
        m.add_support([0])
    return m


def test_planar_truss_out_of_plane(backend: str) -> None:
    with pytest.raises(sf.MechanismError, match=r"node 1 has no stiffness along z: all its "
                       r"members lie in the plane z = 0") as err:
        planar_truss().solve(solver=backend)
    np.testing.assert_array_equal(err.value.nodes, [1, 3, 4])
    assert err.value.directions == ["z", "z", "z"]
    assert isinstance(err.value, np.linalg.LinAlgError)


def test_rotated_planar_truss_names_normal() -> None:
    m = planar_truss()
    R = Rotation.from_euler("xyz", [0.3, 0.5, 0.7]).as_matrix()
    m2 = sf.Model()
    m2.add_nodes(m.nodes @ R.T)
    m2.add_members(m.members, area=1e-4, E=2e11)
    m2.add_support([0, 2])
    with pytest.raises(sf.MechanismError, match="lie in the plane through") as err:
        m2.solve()
    normal = R @ np.array([0.0, 0, 1])
    text = str(err.value)
    assert f"{abs(normal[0]):.3f}" in text and f"{abs(normal[2]):.3f}" in text


def test_collinear_members_at_a_node() -> None:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [2, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=1e-4, E=2e11)
    m.add_support([0, 2])
    with pytest.raises(sf.MechanismError, match=r"node 1 has no stiffness along .*one line "
                       r"\(along x\)"):
        m.solve()


def test_free_node_without_members() -> None:
    m = tetra()
    m.add_support([1, 2], x=True, y=True, z=True)
    m.add_nodes([[5, 5, 5]])
    with pytest.raises(sf.MechanismError, match=r"node 4 \(free along xyz\)") as err:
        m.solve()
    np.testing.assert_array_equal(err.value.nodes, [4])


def test_unsupported_model() -> None:
    m = tetra(supported=False)
    with pytest.raises(sf.MechanismError, match=r"not connected to any support.*0, 1, 2, 3"):
        m.solve()


def test_part_without_support() -> None:
    m = tetra()
    m.add_support([1, 2])
    extra = m.add_nodes([[5, 0, 0], [6, 0, 0], [5, 1, 0], [5, 0, 1]])
    m.add_members(np.array([[0, 1], [0, 2], [0, 3], [1, 2], [1, 3], [2, 3]]) + extra[0],
                  area=1e-4, E=2e11)
    with pytest.raises(sf.MechanismError, match="has 4 nodes: 4, 5, 6, 7"):
        m.solve()


def test_too_few_supports_rigid_rotation() -> None:
    m = tetra()
    m.add_support([1], x=False, z=False)  # node 1 held along y only
    m.add_support([2], x=False, y=False)  # node 2 held along z only
    # Five restrained directions: one rigid-body motion (a rotation) is free.
    with pytest.raises(sf.MechanismError, match=r"too few supports.*rotation about"):
        m.solve()


@pytest.mark.parametrize("load", [(1e3, 0.0, 0.0), (0.0, 0.0, -1e3)])
def test_cube_without_diagonals(backend: str, load: tuple[float, float, float]) -> None:
    # The vertical load does not excite the sway: it is still a mechanism.
    with pytest.raises(sf.MechanismError, match=r"mechanism.*node 4") as err:
        cube(load).solve(solver=backend)
    assert set(err.value.nodes.tolist()) <= {4, 5, 6, 7}


def test_cube_with_diagonals_is_stable() -> None:
    m = cube()
    m.add_members([[4, 7], [0, 5], [1, 7], [2, 7], [0, 6]], area=1e-4, E=2e11)
    r = m.solve()["P"]
    assert r.residual < 1e-12


def test_determinacy_counts() -> None:
    # Pellegrino & Calladine (1986): s = b - r, m = 3j - k - r.
    # Ferreira's 4-bar truss: one free node (3 dofs), four bars: r = 3, s = 1.
    from conftest import ferreira_truss

    d = sf.determinacy(ferreira_truss())
    assert (d.rank, d.self_stress, d.mechanisms) == (3, 1, 0)
    # Cube without diagonals on 4 pins: j = 8, k = 12 restrained, b = 12.  The
    # 4 base bars join pinned nodes only (zero columns), the 4 top bars and 4
    # verticals are independent: r = 8, so s = 12 - 8 = 4 (the base bars) and
    # m = 24 - 12 - 8 = 4 (two sways, a twist and the top square's shear).
    d = sf.determinacy(cube())
    assert (d.rank, d.self_stress, d.mechanisms) == (8, 4, 4)
    # A tripod is statically determinate.
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [0, 2, 0], [0.5, 0.5, 2]])
    m.add_members([[0, 3], [1, 3], [2, 3]], area=1e-4, E=2e11)
    m.add_support([0, 1, 2])
    assert sf.determinacy(m).statically_determinate


def test_determinate_solve_needs_no_stiffness() -> None:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [0, 2, 0], [0.5, 0.5, 2]])
    m.add_members([[0, 3], [1, 3], [2, 3]], area=[1e-4, 3e-4, 7e-4], E=[2e11, 7e10, 2e11])
    m.add_support([0, 1, 2])
    f = np.zeros((4, 3))
    f[3] = (1e3, -2e3, -5e3)
    m.add_load("P", [3], f[3])
    t_statics = sf.solve_determinate(m, f)
    np.testing.assert_allclose(m.solve()["P"].axial_forces, t_statics, rtol=1e-10)
    from conftest import ferreira_truss

    with pytest.raises(sf.ModelError, match="1 state"):
        sf.solve_determinate(ferreira_truss(), np.zeros((5, 3)))


def test_ldlt_inertia_matches_tridiagonal_closed_form() -> None:
    # Eigenvalues of tridiag(-1, 2, -1) of order n are 2 - 2 cos(k pi / (n + 1)),
    # k = 1..n (Strang, "Introduction to Linear Algebra", 5th ed., section 8.3 /
    # common practice): shifting by s leaves as many negative pivots as
    # eigenvalues below s (Sylvester's law of inertia).
    import numpy as np
    import scipy.sparse as sp

    from spaceframe.solvers import factorize_ldlt

    n = 40
    T = sp.diags([-np.ones(n - 1), 2 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1])
    lam = 2 - 2 * np.cos(np.arange(1, n + 1) * np.pi / (n + 1))
    for s in (0.0, 0.5, 1.7, 3.9):
        inertia = factorize_ldlt(sp.csr_matrix(T - s * sp.eye(n))).inertia
        assert inertia is not None
        below = int(np.count_nonzero(lam < s))
        assert (inertia.negative, inertia.zero, inertia.positive) == (below, 0, n - below)
