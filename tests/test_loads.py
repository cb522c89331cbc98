"""Area loads to nodal forces: closed forms derived here, and an independent
nearest-node rasterisation (scipy.spatial.cKDTree) for tributary areas."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.spatial import cKDTree

from spaceframe.errors import ModelError
from spaceframe.model.loads import (
    panel_normal_loads,
    panel_plan_loads,
    panel_surface_loads,
    panel_vector_areas,
    tributary_plan_areas,
    tributary_plan_loads,
)


def _one(poly: list[list[float]]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    nodes = np.asarray(poly, dtype=float)
    return nodes, np.arange(len(poly)), np.array([0, len(poly)])


@pytest.fixture
def square() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    a = 3.0
    # Counter-clockwise seen from +z: by the right-hand rule the normal is +z.
    return _one([[0, 0, 2], [a, 0, 2], [a, a, 2], [0, a, 2]])


def test_flat_square_under_pressure(square: tuple[np.ndarray, ...]) -> None:
    nodes, pn, po = square
    a, p = 3.0, 1200.0
    f = panel_normal_loads(nodes, pn, po, p)
    # Total p a² against the normal (-z), a quarter at each corner (centroid fan: each
    # corner has 2 triangles of a²/4 -> 2 * a²/12, plus a quarter of the centre's a²/3).
    np.testing.assert_allclose(f.sum(axis=0), [0, 0, -p * a * a], rtol=1e-14)
    np.testing.assert_allclose(f[:, 2], -p * a * a / 4, rtol=1e-14)
    np.testing.assert_allclose(f[:, :2], 0, atol=1e-9)
    # Reversing the node order flips the normal, so the same pressure pushes up.
    g = panel_normal_loads(nodes, pn[::-1].copy(), po, p)
    np.testing.assert_allclose(g.sum(axis=0), [0, 0, p * a * a], rtol=1e-14)
    np.testing.assert_allclose(panel_vector_areas(nodes, pn, po), [[0, 0, a * a]], rtol=1e-14)


def test_triangle_gets_a_third_at_each_corner() -> None:
    nodes, pn, po = _one([[0, 0, 0], [4, 0, 0], [1, 3, 0]])
    f = panel_surface_loads(nodes, pn, po, 600.0)
    area = 0.5 * 4 * 3  # base x height / 2
    np.testing.assert_allclose(f[:, 2], -600.0 * area / 3, rtol=1e-14)


def test_l_shaped_panel_is_statically_exact() -> None:
    # L of three unit squares: (0,0)-(2,0)-(2,1)-(1,1)-(1,2)-(0,2), counter-clockwise.
    nodes, pn, po = _one([[0, 0, 0], [2, 0, 0], [2, 1, 0], [1, 1, 0], [1, 2, 0], [0, 2, 0]])
    p = 1000.0
    f = panel_normal_loads(nodes, pn, po, p)
    # Area 3; centroid of squares centred (0.5,0.5), (1.5,0.5), (0.5,1.5): (5/6, 5/6).
    np.testing.assert_allclose(f.sum(axis=0), [0, 0, -3 * p], rtol=1e-14)
    moment = np.cross(nodes, f).sum(axis=0)
    resultant_moment = np.cross([5 / 6, 5 / 6, 0.0], [0, 0, -3 * p])
    np.testing.assert_allclose(moment, resultant_moment, rtol=1e-13)


def test_pitched_panel_under_snow_cladding_and_wind() -> None:
    # Roof plane rising along x at angle theta: plan a x b, slope length a / cos(theta).
    a, b, theta = 4.0, 5.0, math.radians(25.0)
    rise = a * math.tan(theta)
    nodes, pn, po = _one([[0, 0, 0], [a, 0, rise], [a, b, rise], [0, b, 0]])
    s, q, w = 800.0, 250.0, 600.0
    plan = panel_plan_loads(nodes, pn, po, s).sum(axis=0)
    np.testing.assert_allclose(plan, [0, 0, -s * a * b], rtol=1e-13)  # s x plan area
    surface = panel_surface_loads(nodes, pn, po, q).sum(axis=0)
    np.testing.assert_allclose(surface, [0, 0, -q * a * b / math.cos(theta)], rtol=1e-13)
    # Normal by the right-hand rule: (-sin t, 0, cos t); pressure pushes against it.
    wind = panel_normal_loads(nodes, pn, po, w).sum(axis=0)
    true_area = a * b / math.cos(theta)
    np.testing.assert_allclose(
        wind, -w * true_area * np.array([-math.sin(theta), 0, math.cos(theta)]), rtol=1e-13
    )


def test_vertical_panel_carries_no_plan_load() -> None:
    nodes, pn, po = _one([[0, 0, 0], [2, 0, 0], [2, 0, 3], [0, 0, 3]])
    np.testing.assert_allclose(panel_plan_loads(nodes, pn, po, 500.0), 0.0, atol=1e-12)
    assert panel_surface_loads(nodes, pn, po, 500.0)[:, 2].sum() == pytest.approx(-3000.0)


def test_warped_quad_total_is_the_vector_area() -> None:
    pts = np.array([[0, 0, 0], [2, 0, 0.4], [2, 2, 0], [0, 2, 0.4]])
    nodes, pn, po = _one(pts.tolist())
    # Vector area of a closed loop, written out: 1/2 sum p_i x p_(i+1).
    vec = 0.5 * sum(np.cross(pts[i], pts[(i + 1) % 4]) for i in range(4))
    f = panel_normal_loads(nodes, pn, po, 900.0)
    np.testing.assert_allclose(f.sum(axis=0), -900.0 * vec, rtol=1e-13, atol=1e-9)


def test_several_panels_with_values_per_panel_share_nodes() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0], [1, 1, 0], [2, 1, 0.0]])
    pn = np.array([0, 1, 4, 3, 1, 2, 5, 4])
    po = np.array([0, 4, 8])
    f = panel_plan_loads(nodes, pn, po, np.array([100.0, 300.0]))
    # Each unit panel sends a quarter to its corners; nodes 1 and 4 are shared.
    np.testing.assert_allclose(f[:, 2], -np.array([25, 100, 75, 25, 100, 75]), rtol=1e-14)


@pytest.mark.parametrize(
    ("po", "pn", "value", "fragment"),
    [
        (np.array([0, 2]), np.array([0, 1]), 1.0, "needs 3"),
        (np.array([0, 4]), np.array([0, 1, 2, 9]), 1.0, "node 9"),
        (np.array([0, 3]), np.array([0, 1, 2]), [1.0, 2.0], "one per panel"),
        (np.array([0, 3]), np.array([0, 1, 2]), math.nan, "nan"),
        (np.array([1, 3]), np.array([0, 1, 2]), 1.0, "start at 0"),
    ],
)
def test_bad_panels_are_refused(po: np.ndarray, pn: np.ndarray, value: object,
                                fragment: str, square: tuple[np.ndarray, ...]) -> None:
    with pytest.raises(ModelError, match=fragment):
        panel_normal_loads(square[0], pn, po, value)


# ------------------------------------------------------------ tributary areas
def _grid(nx: int, ny: int, dx: float, dy: float) -> np.ndarray:
    x, y = np.meshgrid(np.arange(nx) * dx, np.arange(ny) * dy)
    return np.c_[x.ravel(), y.ravel()]


def test_regular_grid_on_its_hull() -> None:
    dx, dy = 2.0, 3.0
    xy = _grid(5, 4, dx, dy)
    areas = tributary_plan_areas(xy).reshape(4, 5)
    bay = dx * dy
    assert areas.sum() == pytest.approx(4 * dx * 3 * dy, rel=1e-12)  # the hull, 8 m x 9 m
    np.testing.assert_allclose(areas[1:-1, 1:-1], bay, rtol=1e-12)  # interior: a full bay
    np.testing.assert_allclose(areas[0, 1:-1], bay / 2, rtol=1e-12)  # edges: half
    np.testing.assert_allclose(areas[[0, 0, -1, -1], [0, -1, 0, -1]], bay / 4, rtol=1e-12)


def test_outline_half_a_bay_beyond_the_grid_gives_every_node_a_full_bay() -> None:
    xy = _grid(5, 4, 2.0, 3.0)
    outline = [[-1, -1.5], [9, -1.5], [9, 10.5], [-1, 10.5]]
    np.testing.assert_allclose(tributary_plan_areas(xy, outline), 6.0, rtol=1e-12)


def test_non_convex_outline() -> None:
    xy = _grid(5, 4, 2.0, 3.0)
    # L-shaped roof: the 10 m x 12 m rectangle above less x > 3, y > 4.5 (6 m x 6 m).
    outline = [[-1, -1.5], [9, -1.5], [9, 4.5], [3, 4.5], [3, 10.5], [-1, 10.5]]
    areas = tributary_plan_areas(xy, outline).reshape(4, 5)
    assert areas.sum() == pytest.approx(10 * 12 - 6 * 6, rel=1e-12)
    np.testing.assert_allclose(areas[2:, 2:], 0.0, atol=1e-12)  # cells outside the L
    np.testing.assert_allclose(areas[:2, :], 6.0, rtol=1e-12)
    # Clockwise outlines give the same.
    np.testing.assert_allclose(tributary_plan_areas(xy, outline[::-1]).reshape(4, 5), areas,
                               rtol=1e-12)


def test_random_points_against_nearest_node_rasterisation() -> None:
    rng = np.random.default_rng(7)
    xy = rng.random((60, 2)) * [12.0, 8.0]
    outline = [[0, 0], [12, 0], [12, 8], [0, 8]]
    areas = tributary_plan_areas(xy, outline)
    assert areas.sum() == pytest.approx(96.0, rel=1e-12)
    n = 1200
    gx, gy = np.meshgrid((np.arange(n) + 0.5) / n * 12, (np.arange(n) + 0.5) / n * 8)
    owner = cKDTree(xy).query(np.c_[gx.ravel(), gy.ravel()])[1]
    raster = np.bincount(owner, minlength=60) * (12 / n) * (8 / n)
    np.testing.assert_allclose(areas, raster, rtol=0.02, atol=0.01)


def test_collinear_points_with_an_outline_are_strips() -> None:
    xy = [[0, 0], [1, 0], [3, 0]]
    outline = [[-0.5, -1], [3.5, -1], [3.5, 1], [-0.5, 1]]
    # Bisectors at x = 0.5 and x = 2: strips 1, 1.5 and 1.5 m wide, 2 m deep.
    np.testing.assert_allclose(tributary_plan_areas(xy, outline), [2.0, 3.0, 3.0], rtol=1e-12)
    np.testing.assert_allclose(tributary_plan_areas([[1, 1]], outline), [8.0], rtol=1e-12)


def test_tributary_loads_on_selected_nodes() -> None:
    xy = _grid(3, 3, 2.0, 2.0)
    nodes = np.c_[xy, np.full(9, 5.0)]
    nodes = np.vstack([nodes, [[1, 1, 4.0]]])  # a lower node that is not loaded
    ids = np.arange(9)
    f = tributary_plan_loads(nodes, ids, 800.0)
    assert f[:, 2].sum() == pytest.approx(-800.0 * 16, rel=1e-12)
    assert f[4, 2] == pytest.approx(-800.0 * 4, rel=1e-12)
    assert f[9, 2] == 0.0 and not np.any(f[:, :2])


def test_tributary_errors() -> None:
    nodes = np.array([[0, 0, 1], [1, 0, 1], [0, 1, 1], [0, 0, 0.0]])
    with pytest.raises(ModelError, match="nodes 0 and 3 share the plan position"):
        tributary_plan_loads(nodes, [0, 1, 2, 3], 1.0)
    with pytest.raises(ModelError, match="one line"):
        tributary_plan_areas([[0, 0], [1, 1], [2, 2]])
    with pytest.raises(ModelError, match="zero area"):
        tributary_plan_areas([[0, 0], [1, 1]], [[0, 0], [1, 0], [2, 0]])
    with pytest.raises(ModelError, match="fewer than three"):
        tributary_plan_areas([[0, 0], [1, 1]])
    with pytest.raises(ModelError, match=r"shape \(3,\)"):
        tributary_plan_areas([1.0, 2.0, 3.0])


# ------------------------------------------------------------ site coordinates
#: A plan position of the kind a survey grid gives (UTM-like, metres).
SITE = np.array([451234.0, 5712345.0])


def test_random_roof_nodes_at_site_coordinates_share_the_outline_area() -> None:
    # 30 random nodes on a 10 m x 10 m roof: the cells tile the outline, so
    # they add up to its 100 m² wherever the roof is (closed form).
    xy = np.random.default_rng(30).random((30, 2)) * 10.0
    outline = np.array([[0, 0], [10, 0], [10, 10], [0, 10]], dtype=float)
    here = tributary_plan_areas(xy, outline)
    there = tributary_plan_areas(xy + SITE, outline + SITE)
    assert there.sum() == pytest.approx(100.0, rel=1e-9)
    np.testing.assert_allclose(there, here, rtol=1e-6, atol=1e-6)
    # Default outline (the convex hull) too.
    np.testing.assert_allclose(tributary_plan_areas(xy + SITE), tributary_plan_areas(xy),
                               rtol=1e-6, atol=1e-6)


def test_tributary_loads_at_site_coordinates() -> None:
    # 3 x 3 nodes at 2 m on a 4 m x 4 m roof under 800 Pa: 12.8 kN in all,
    # 3.2 kN on the middle node (a 2 m x 2 m cell), closed form.
    xy = _grid(3, 3, 2.0, 2.0) + SITE
    nodes = np.c_[xy, np.full(9, 5.0)]
    f = tributary_plan_loads(nodes, np.arange(9), 800.0)
    assert f[:, 2].sum() == pytest.approx(-12800.0, rel=1e-9)
    assert f[4, 2] == pytest.approx(-3200.0, rel=1e-9)


def test_panel_areas_and_normals_at_site_coordinates() -> None:
    # A 3 m x 2 m panel sloping at 30 degrees about x: area 6 m², normal
    # (0, -sin 30, cos 30) (right-hand rule), closed form.
    c, s = math.cos(math.radians(30)), math.sin(math.radians(30))
    local = np.array([[0, 0, 0], [3, 0, 0], [3, 2 * c, 2 * s], [0, 2 * c, 2 * s]])
    for shift in (np.zeros(3), np.array([*SITE, 120.0])):
        nodes, pn, po = _one((local + shift).tolist())
        a = panel_vector_areas(nodes, pn, po)[0]
        np.testing.assert_allclose(np.linalg.norm(a), 6.0, rtol=1e-9)
        np.testing.assert_allclose(a / np.linalg.norm(a), [0, -s, c], atol=1e-9)
        f = panel_plan_loads(nodes, pn, po, 1000.0)
        # Plan area 3 m x 2 cos 30 m.
        assert f[:, 2].sum() == pytest.approx(-1000.0 * 6 * c, rel=1e-9)


def test_zero_area_panel_is_refused_by_id() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0], [2, 0, 0], [3, 0, 0.0]])
    # Panel 1 has its three corners on one line (the x axis).
    pn = np.array([0, 1, 2, 3, 1, 4, 5])
    po = np.array([0, 4, 7])
    with pytest.raises(ModelError, match="load panel 1 has zero area"):
        panel_plan_loads(nodes, pn, po, 1000.0)
    with pytest.raises(ModelError, match="load panel 1 has zero area"):
        panel_normal_loads(nodes, pn, po, [0.0, 500.0])
    # Not loaded: no complaint, and the other panel carries its 1 m² load.
    f = panel_surface_loads(nodes, pn, po, [1000.0, 0.0])
    assert f[:, 2].sum() == pytest.approx(-1000.0, rel=1e-12)


def test_self_intersecting_outline_is_refused() -> None:
    # A bow-tie-like outline: its signed area (2 m²) is not the area the
    # cells cover, so the areas cannot add up and the outline is refused.
    xy = [[1, 1], [3, 1], [1, 3], [3, 3]]
    with pytest.raises(ModelError, match="does the outline cross itself"):
        tributary_plan_areas(xy, [[0, 0], [4, 4], [4, 0], [1, 5]])
