"""Tests of spaceframe.geometry: healing raw centrelines into a clean frame.

Expected values are closed forms derived in each test from the geometry it
builds (counts of a grid from its dimensions, distances from Pythagoras);
the source of each is named beside the check.
"""

from __future__ import annotations

import json
import math
import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

from spaceframe.errors import ModelError, SpaceframeWarning
from spaceframe.geometry import (
    STEP_NAMES,
    connected_components,
    find_mid_member_nodes,
    heal,
    merge_close_nodes,
    merge_collinear_chains,
    remap_groups,
    remap_node_sets,
)
from spaceframe.tolerances import GEOMETRY_TOLERANCE

TOL = GEOMETRY_TOLERANCE


# ---------------------------------------------------------------------------
# Model builders
# ---------------------------------------------------------------------------


def drawn_grid(
    nx: int,
    ny: int,
    *,
    pitch: float = 3.0,
    depth: float = 2.0,
    jitter: float = 0.0,
    soup: bool = False,
    seed: int = 0,
) -> tuple[np.ndarray, np.ndarray]:
    """Square-on-square double-layer grid as drawn, chords as full-length lines.

    Top joints T(i, j) = (i p, j p, h), i = 0..nx, j = 0..ny; bottom joints at
    the bay centres B(i, j) = ((i + 1/2) p, (j + 1/2) p, 0), i < nx, j < ny.
    Diagonals run from each bottom joint to the 4 top joints around it.  Top
    chords are drawn as one line per grid line (along x for each j, along y
    for each i), bottom chords likewise.  With ``soup`` every line has its
    own two end points (as in a drawing exchange file), each jittered by up
    to ``jitter`` per axis; otherwise lines share the joint ids.
    """
    rng = np.random.default_rng(seed)
    i, j = np.meshgrid(np.arange(nx + 1), np.arange(ny + 1), indexing="ij")
    top = np.stack([i * pitch, j * pitch, np.full(i.shape, depth)], axis=-1).astype(float)
    ib, jb = np.meshgrid(np.arange(nx), np.arange(ny), indexing="ij")
    bot = np.stack([(ib + 0.5) * pitch, (jb + 0.5) * pitch, np.zeros(ib.shape)], axis=-1)
    top_id = np.arange(top[..., 0].size).reshape(top.shape[:2])
    bot_id = top_id.size + np.arange(bot[..., 0].size).reshape(bot.shape[:2])
    nodes = np.concatenate([top.reshape(-1, 3), bot.reshape(-1, 3)])
    b = bot_id.reshape(-1)
    lines = [
        np.stack([b, c.reshape(-1)], axis=1)
        for c in (top_id[:-1, :-1], top_id[1:, :-1], top_id[:-1, 1:], top_id[1:, 1:])
    ]
    lines.append(np.stack([top_id[0, :], top_id[-1, :]], axis=1))
    lines.append(np.stack([top_id[:, 0], top_id[:, -1]], axis=1))
    if nx >= 2:
        lines.append(np.stack([bot_id[0, :], bot_id[-1, :]], axis=1))
    if ny >= 2:
        lines.append(np.stack([bot_id[:, 0], bot_id[:, -1]], axis=1))
    members = np.concatenate(lines)
    if soup:
        nodes = nodes[members.reshape(-1)]
        members = np.arange(nodes.shape[0]).reshape(-1, 2)
    if jitter:
        nodes = nodes + rng.uniform(-jitter, jitter, nodes.shape)
    return nodes, members


def grid_counts(nx: int, ny: int) -> tuple[int, int]:
    """Healed (nodes, members) of :func:`drawn_grid`, derived from its layout.

    Nodes: (nx+1)(ny+1) top joints + nx ny bottom joints.
    Members: top chords nx (ny+1) along x + ny (nx+1) along y; bottom chords
    (nx-1) ny + nx (ny-1); diagonals 4 nx ny.  The sum simplifies to
    nx ny + nx + nx ny + ny + nx ny - ny + nx ny - nx + 4 nx ny = 8 nx ny.
    """
    return (nx + 1) * (ny + 1) + nx * ny, 8 * nx * ny


@pytest.fixture
def quiet() -> object:
    """Silence the several-parts warning in tests that are not about it."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SpaceframeWarning)
        yield


# ---------------------------------------------------------------------------
# Merging close nodes
# ---------------------------------------------------------------------------


def test_near_coincident_endpoints_inside_tolerance_merge() -> None:
    # Second line starts 0.5 tol from the end of the first: |(0.4, 0.3)| tol.
    nodes = np.array([[0, 0, 0], [1, 0, 0], [1 + 0.4 * TOL, 0.3 * TOL, 0], [1, 1, 0]])
    res = heal(nodes, [[0, 1], [2, 3]])
    assert len(res.nodes) == 3
    np.testing.assert_array_equal(res.members, [[0, 1], [1, 2]])
    # Representative is the first node of the cluster, exactly as drawn.
    np.testing.assert_array_equal(res.nodes[1], [1.0, 0.0, 0.0])
    np.testing.assert_array_equal(res.node_map, [0, 1, 1, 2])
    assert res.report.n_components == 1
    merge = res.report.step("merge_nodes")
    assert merge.count == 1  # 4 nodes became 3
    np.testing.assert_allclose(merge.locations, [[1.0, 0.0, 0.0]], rtol=0, atol=1e-12)


def test_near_coincident_endpoints_outside_tolerance_stay_apart() -> None:
    # 1.5 tol apart (|(1.2, 0.9)| tol): two separate lines, two parts.
    nodes = np.array([[0, 0, 0], [1, 0, 0], [1 + 1.2 * TOL, 0.9 * TOL, 0], [1, 1, 0]])
    with pytest.warns(SpaceframeWarning, match="2 separate parts"):
        res = heal(nodes, [[0, 1], [2, 3]])
    assert len(res.nodes) == 4
    assert res.report.step("merge_nodes").count == 0
    assert res.report.n_components == 2
    np.testing.assert_array_equal(res.components, [0, 0, 1, 1])


def test_chain_of_close_nodes_does_not_collapse() -> None:
    # Steps of 0.6 tol, ends 1.8 tol apart.  Greedy centres in id order:
    # 0 is kept, 0.6 joins it; 1.2 is 1.2 tol from 0 so it is kept, 1.8
    # joins it.  Single linkage would collapse all four into one node and
    # move the last one 1.8 tol.
    x = np.array([0.0, 0.6, 1.2, 1.8]) * TOL
    nodes = np.stack([x, np.zeros(4), np.zeros(4)], axis=1)
    unique, node_map = merge_close_nodes(nodes, TOL)
    np.testing.assert_array_equal(node_map, [0, 0, 1, 1])
    np.testing.assert_array_equal(unique, nodes[[0, 2]])


def _greedy_reference(points: np.ndarray, tol: float) -> np.ndarray:
    """Labels by the plain definition: O(n^2) loop, for checking only."""
    centres: list[int] = []
    labels = np.empty(len(points), dtype=np.int64)
    for i, p in enumerate(points):
        d = [np.linalg.norm(p - points[c]) for c in centres]
        near = [k for k, v in enumerate(d) if v < tol]
        if near:
            labels[i] = near[0]
        else:
            labels[i] = len(centres)
            centres.append(i)
    return labels


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_merge_matches_the_greedy_definition_and_moves_no_node_beyond_tol(seed: int) -> None:
    # 300 points in a 10 tol cube: dense clusters and chains of every kind.
    pts = np.random.default_rng(seed).uniform(0, 10 * TOL, (300, 3))
    unique, node_map = merge_close_nodes(pts, TOL)
    np.testing.assert_array_equal(node_map, _greedy_reference(pts, TOL))
    assert np.linalg.norm(pts - unique[node_map], axis=1).max() < TOL
    # Kept nodes are at least tol apart (otherwise the later one would have joined).
    gaps = np.linalg.norm(unique[:, None] - unique[None], axis=2)
    assert gaps[np.triu_indices(len(unique), 1)].min() >= TOL


def _tie_in_pieces(origin: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    # A 100 mm tie drawn as 200 pieces of 0.5 mm, then a 3 m post down from its end.
    x = np.linspace(0.0, 0.1, 201)
    tie = np.stack([x, np.zeros_like(x), np.full_like(x, 3.0)], axis=1)
    nodes = np.vstack([tie, [[0.1, 0.0, 0.0]]]) + origin
    members = np.array([[i, i + 1] for i in range(200)] + [[200, 201]])
    return nodes, members


@pytest.mark.parametrize("origin", [(0.0, 0.0, 0.0), (451234.0, 5712345.0, 0.0)])
def test_tie_of_short_pieces_keeps_its_length_and_warns(origin: tuple[float, ...]) -> None:
    nodes, members = _tie_in_pieces(np.array(origin))
    with pytest.warns(SpaceframeWarning, match=r"removed \d+ drawn member\(s\) shorter than"):
        res = heal(nodes, members)
    # No node moves more than tol, so the tie keeps its 100 mm (to within
    # tol), a kept node at least every 2 tol along it, and the post foot
    # (a clean joint) does not move.
    assert 0 < res.largest_move < TOL
    assert np.ptp(res.nodes[:, 0]) > 0.1 - TOL
    assert 0.1 / (2 * TOL) <= len(res.nodes) - 1 <= 0.1 / TOL + 1
    foot = res.node_map[201]
    np.testing.assert_array_equal(res.nodes[foot], nodes[201])
    assert res.short_removed.size == 200 - (len(res.members) - 1)
    assert res.short_removed.size > 50
    text = res.report.step("merge_nodes").format(scale=0.001, unit="mm")
    move = float(text.split("largest move ")[1].split(" mm")[0])
    assert 0 < move <= 1.0  # printed to 4 digits; the exact value is < tol above


def test_largest_move_is_shown_in_the_drawing_unit() -> None:
    nodes = np.array([[0, 0, 0], [2, 0, 0], [2 + 0.4 * TOL, 0, 0], [2, 2, 0]])
    res = heal(nodes, [[0, 1], [2, 3]])
    step = res.report.step("merge_nodes")
    assert "largest move 0.0004 m" in step.format(scale=1.0, unit="m")
    assert "largest move 0.4 mm" in step.format(scale=0.001, unit="mm")
    assert "within 1 mm" in step.format(scale=0.001, unit="mm")
    np.testing.assert_allclose(res.largest_move, 0.4 * TOL, rtol=1e-12)


def test_round_off_merge_is_not_printed_as_a_tiny_number() -> None:
    # Points equal in millimetres that differ in metres by round-off.
    a = np.array([1234.567, 0.0, 0.0]) * 0.001
    b = a + np.array([2.36e-13, 0.0, 0.0])
    res = heal(np.array([[0, 0, 0], a, b, [1.2, 1.0, 0.0]]), [[0, 1], [2, 3]])
    text = res.report.step("merge_nodes").format(scale=1.0, unit="m")
    assert "round-off only" in text and "e-" not in text


def test_merge_is_not_transitive_through_gaps() -> None:
    # 0.6 tol pair, then a node 2 tol further: two clusters, first-node order.
    nodes = np.array([[3.0, 0, 0], [3.0 + 0.6 * TOL, 0, 0], [3.0 + 2.6 * TOL, 0, 0]])
    unique, node_map = merge_close_nodes(nodes, TOL)
    np.testing.assert_array_equal(node_map, [0, 0, 1])
    np.testing.assert_array_equal(unique, nodes[[0, 2]])


# ---------------------------------------------------------------------------
# Zero-length members, duplicates and groups
# ---------------------------------------------------------------------------


def test_zero_length_and_duplicate_members_keep_groups_of_both() -> None:
    nodes = np.array(
        [
            [0, 0, 0],
            [2, 0, 0],
            [2, 0, 0.3 * TOL],  # merges with node 1: member 2 becomes zero length
            [2, 2, 0],
        ]
    )
    members = np.array([[0, 1], [1, 0], [1, 2], [1, 3], [3, 2]])
    # Member 1 is member 0 reversed; member 4 (3 -> 2 = 3 -> 1) duplicates member 3.
    # Member 2 was drawn 0.3 tol long: its removal is warned about.
    with pytest.warns(SpaceframeWarning, match=r"removed 1 drawn member\(s\) shorter .* ids 2\)"):
        res = heal(nodes, members)
    np.testing.assert_array_equal(res.short_removed, [2])
    np.testing.assert_array_equal(res.members, [[0, 1], [1, 2]])
    np.testing.assert_array_equal(res.origin, [0, 3])
    np.testing.assert_array_equal(res.duplicates, [[1, 0], [4, 1]])
    assert res.report.step("remove_zero_length").count == 1
    assert res.report.step("remove_duplicates").count == 2
    groups = remap_groups({"a": [0], "b": [1], "zero": [2], "c": [4], "all": [0, 1, 2, 3, 4]}, res)
    np.testing.assert_array_equal(groups["a"], [0])
    np.testing.assert_array_equal(groups["b"], [0])  # removed duplicate -> kept member
    np.testing.assert_array_equal(groups["c"], [1])
    assert groups["zero"].size == 0
    np.testing.assert_array_equal(groups["all"], [0, 1])
    assert all(g.dtype == np.int64 for g in groups.values())


def test_chord_drawn_twice_pieces_carry_both_groups() -> None:
    # Two copies of a line through a joint at x = 1: both split into 2 pieces;
    # the second copy's pieces duplicate the first's.
    nodes = np.array([[0, 0, 0], [2, 0, 0], [1, 0, 0], [1, 1, 0]])
    res = heal(nodes, [[0, 1], [2, 3], [1, 0]])
    assert len(res.members) == 3  # 2 chord pieces + the branch
    groups = remap_groups({"first": [0], "second": [2], "branch": [1]}, res)
    np.testing.assert_array_equal(groups["first"], groups["second"])
    assert groups["first"].size == 2
    np.testing.assert_array_equal(res.origin[groups["first"]], [0, 0])


def test_remove_duplicates_switched_off_keeps_them_and_says_so() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0]])
    res = heal(nodes, [[0, 1], [1, 0]], remove_duplicates=False)
    assert len(res.members) == 2
    step = res.report.step("remove_duplicates")
    assert step.skipped and step.count == 0 and "skipped" in step.detail


# ---------------------------------------------------------------------------
# Splitting at nodes
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(("nx", "ny"), [(3, 4), (5, 2), (1, 1)])
def test_double_layer_grid_with_continuous_chords(nx: int, ny: int) -> None:
    nodes, members = drawn_grid(nx, ny)
    res = heal(nodes, members)
    n_nodes, n_members = grid_counts(nx, ny)
    assert len(res.nodes) == n_nodes
    assert len(res.members) == n_members
    # Lines through joints: (ny+1) + (nx+1) top, ny + nx bottom, each with at
    # least one interior joint when it has 3 or more joints.
    lines_with_joints = (ny + 1) * (nx >= 2) + (nx + 1) * (ny >= 2)
    lines_with_joints += ny * (nx >= 3) + nx * (ny >= 3)
    assert res.report.step("split_at_nodes").count == lines_with_joints
    # Every healed member is a bay-long chord (pitch 3) or a diagonal:
    # sqrt(1.5^2 + 1.5^2 + 2^2) by Pythagoras.
    length = np.linalg.norm(res.nodes[res.members[:, 1]] - res.nodes[res.members[:, 0]], axis=1)
    diagonal = math.sqrt(1.5**2 + 1.5**2 + 2.0**2)
    near = np.minimum(np.abs(length - 3.0), np.abs(length - diagonal))
    np.testing.assert_allclose(near, np.zeros_like(near), rtol=0, atol=1e-9)
    assert int(np.sum(np.abs(length - diagonal) < 1e-9)) == 4 * nx * ny


def test_line_soup_grid_with_jitter_heals_to_the_same_counts() -> None:
    nx, ny = 6, 4
    # Jitter 0.2 tol per axis: two ends of one joint are at most 2 sqrt(3) 0.2
    # = 0.69 tol apart, so every joint merges; joints are 2.9 m apart.
    nodes, members = drawn_grid(nx, ny, soup=True, jitter=0.2 * TOL, seed=3)
    res = heal(nodes, members)
    assert (len(res.nodes), len(res.members)) == grid_counts(nx, ny)
    assert res.report.n_components == 1
    # Each raw line is the origin of at least one healed member.
    np.testing.assert_array_equal(np.unique(res.origin), np.arange(len(members)))


def test_member_split_at_many_nodes_in_parameter_order() -> None:
    # Nodes on the line at x = 7, 2, 5 (given out of order), each also used
    # by a branch so they stay.
    nodes = np.array(
        [
            [0, 0, 0],
            [10, 0, 0],
            [7, 0.4 * TOL, 0],
            [2, 0, -0.4 * TOL],
            [5, 0, 0],
            [7, 1, 0],
            [2, 1, 0],
            [5, 1, 0],
        ]
    )
    members = [[0, 1], [2, 5], [3, 6], [4, 7]]
    res = heal(nodes, members)
    chord = res.members[res.origin == 0]
    np.testing.assert_array_equal(chord, [[0, 3], [3, 4], [4, 2], [2, 1]])
    # Piece lengths 2, 3, 2, 3 along x from the break points.
    dx = res.nodes[chord[:, 1], 0] - res.nodes[chord[:, 0], 0]
    np.testing.assert_allclose(dx, [2.0, 3.0, 2.0, 3.0], rtol=0, atol=1e-12)
    step = res.report.step("split_at_nodes")
    assert step.count == 1
    assert "3 points" in step.detail


def test_split_needs_node_near_the_inside_of_the_member(quiet: object) -> None:
    del quiet
    # merge off so the near-end node is not merged away first
    nodes = np.array(
        [
            [0, 0, 0],
            [1, 0, 0],
            [0.5 * TOL, 0, 0],  # foot within tol of an end: no split
            [0.5, 1.5 * TOL, 0],  # off the line by 1.5 tol: no split
            [0.25, 0.5 * TOL, 0],  # on the line inside: split
        ]
    )
    res = heal(nodes, [[0, 1]], merge_nodes=False, keep_nodes=[2, 3, 4])
    np.testing.assert_array_equal(res.members, [[0, 4], [4, 1]])
    assert res.report.step("merge_nodes").skipped


# ---------------------------------------------------------------------------
# Crossings
# ---------------------------------------------------------------------------


@pytest.fixture
def cross() -> tuple[np.ndarray, np.ndarray]:
    # Two lines crossing at the origin with a 0.3 tol gap in z.
    nodes = np.array([[-1, 0, 0], [1, 0, 0], [0, -1, 0.3 * TOL], [0, 1, 0.3 * TOL]])
    return nodes, np.array([[0, 1], [2, 3]])


def test_crossing_lines_not_split_by_default(cross: tuple[np.ndarray, np.ndarray]) -> None:
    with pytest.warns(SpaceframeWarning):
        res = heal(*cross)
    assert len(res.members) == 2
    assert res.report.step("split_crossings").skipped


def test_crossing_lines_split_when_asked(cross: tuple[np.ndarray, np.ndarray]) -> None:
    res = heal(*cross, split_crossings=True)
    assert len(res.nodes) == 5 and len(res.members) == 4
    assert res.report.n_components == 1
    # New node halfway across the gap: (0, 0, 0.15 tol).
    np.testing.assert_allclose(res.nodes[4], [0, 0, 0.15 * TOL], rtol=0, atol=1e-12)
    np.testing.assert_array_equal(np.sort(res.origin), [0, 0, 1, 1])
    assert res.report.step("split_crossings").count == 1


def test_skew_lines_beyond_tolerance_not_split(quiet: object) -> None:
    del quiet
    nodes = np.array([[-1, 0, 0], [1, 0, 0], [0, -1, 2 * TOL], [0, 1, 2 * TOL]])
    res = heal(nodes, [[0, 1], [2, 3]], split_crossings=True)
    assert len(res.members) == 2 and len(res.nodes) == 4


def test_three_lines_through_one_point_share_one_crossing_node() -> None:
    # Three lines in the z = 0 plane through (0.3, 0.2, 0) at 0, 60, 120 deg.
    angles = np.radians([0.0, 60.0, 120.0])
    u = np.stack([np.cos(angles), np.sin(angles), np.zeros(3)], axis=1)
    centre = np.array([0.3, 0.2, 0.0])
    nodes = np.concatenate([centre - u, centre + u])
    members = np.array([[0, 3], [1, 4], [2, 5]])
    res = heal(nodes, members, split_crossings=True)
    assert len(res.nodes) == 7 and len(res.members) == 6
    np.testing.assert_allclose(res.nodes[6], centre, rtol=0, atol=1e-9)


# ---------------------------------------------------------------------------
# Unused nodes, components
# ---------------------------------------------------------------------------


def test_unused_nodes_dropped_except_keep_nodes() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0], [5, 5, 5], [0, 0, 1]])
    with pytest.warns(SpaceframeWarning, match="2 separate parts"):
        res = heal(nodes, [[0, 1]], keep_nodes=[3])
    np.testing.assert_array_equal(res.node_map, [0, 1, -1, 2])
    np.testing.assert_array_equal(res.nodes, nodes[[0, 1, 3]])
    step = res.report.step("drop_unused_nodes")
    assert step.count == 1
    np.testing.assert_array_equal(step.locations, [[5, 5, 5]])
    # Node sets follow; a set holding the dropped node warns and loses it.
    with pytest.warns(SpaceframeWarning, match="dropped"):
        sets = remap_node_sets({"support": [3, 0], "stray": [2, 1]}, res)
    np.testing.assert_array_equal(sets["support"], [0, 2])
    np.testing.assert_array_equal(sets["stray"], [1])


def test_two_parts_counted_and_warned() -> None:
    tri = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0]], dtype=float)
    nodes = np.concatenate([tri, tri + np.array([10.0, 0.0, 0.0])])
    members = [[0, 1], [1, 2], [2, 0], [3, 4], [4, 5], [5, 3]]
    with pytest.warns(SpaceframeWarning, match="2 separate parts"):
        res = heal(nodes, members)
    assert res.report.n_components == 2
    np.testing.assert_array_equal(res.components, [0, 0, 0, 1, 1, 1])
    np.testing.assert_array_equal(res.report.step("components").locations, nodes[[0, 3]])


def test_connected_components_counts_isolated_nodes() -> None:
    count, labels = connected_components(5, [[3, 4], [0, 1]])
    assert count == 3
    np.testing.assert_array_equal(labels, [0, 0, 1, 2, 2])


# ---------------------------------------------------------------------------
# Mid-member nodes and collinear chains
# ---------------------------------------------------------------------------


@pytest.fixture
def subdivided() -> tuple[np.ndarray, np.ndarray]:
    # A line from (0,0,0) to (4,2,1) cut into 4 equal pieces (nodes 0..4),
    # a branch at node 4, and a bent pair at node 6 (90 degrees).
    line = np.linspace([0.0, 0.0, 0.0], [4.0, 2.0, 1.0], 5)
    extra = np.array([[4.0, 5.0, 1.0], [7.0, 5.0, 1.0], [7.0, 8.0, 1.0]])
    nodes = np.concatenate([line, extra])
    members = np.array([[0, 1], [2, 1], [2, 3], [3, 4], [4, 5], [5, 6], [6, 7]])
    return nodes, members


def test_find_mid_member_nodes(subdivided: tuple[np.ndarray, np.ndarray]) -> None:
    nodes, members = subdivided
    # Node 5 joins (4,2,1)->(4,5,1) along y and (4,5,1)->(7,5,1) along x:
    # bent, not mid.  Nodes 1, 2, 3 are on the straight line.
    np.testing.assert_array_equal(find_mid_member_nodes(nodes, members), [1, 2, 3])


def test_mid_member_angle_tolerance() -> None:
    # A kink with sine 1e-3 (offset 1e-3 over a 1 m arm, small-angle form
    # sin = 1e-3 / hypot(1, 1e-3) ~ 1e-3): not straight at 1e-6, straight at 1e-2.
    nodes = np.array([[-1.0, 0, 0], [0, 0, 0], [1.0, 1e-3, 0]])
    members = [[0, 1], [1, 2]]
    assert find_mid_member_nodes(nodes, members).size == 0
    np.testing.assert_array_equal(find_mid_member_nodes(nodes, members, 1e-2), [1])


def test_hairpin_is_not_a_mid_member_node() -> None:
    # Both members leave node 0 the same way (angle 0, sine 0): the node is
    # the end of two overlapping lines, not the inside of one.
    nodes = np.array([[0.0, 0, 0], [1.0, 0, 0], [2.0, 0, 0]])
    members = [[0, 1], [0, 2]]
    assert find_mid_member_nodes(nodes, members).size == 0


def test_merge_collinear_chains(subdivided: tuple[np.ndarray, np.ndarray]) -> None:
    nodes, members = subdivided
    mids = find_mid_member_nodes(nodes, members)
    new, origin = merge_collinear_chains(nodes, members, mids)
    np.testing.assert_array_equal(new, [[0, 4], [4, 5], [5, 6], [6, 7]])
    np.testing.assert_array_equal(origin, [0, 4, 5, 6])
    # Keeping node 2 (a support, say) cuts the chain there.
    new, origin = merge_collinear_chains(nodes, members, mids, keep_nodes=[2])
    np.testing.assert_array_equal(new, [[0, 2], [2, 4], [4, 5], [5, 6], [6, 7]])
    np.testing.assert_array_equal(origin, [0, 2, 4, 5, 6])


def test_merge_collinear_chains_rejects_node_with_three_members(
    subdivided: tuple[np.ndarray, np.ndarray],
) -> None:
    nodes, members = subdivided
    members = np.concatenate([members, [[2, 6]]])
    with pytest.raises(ModelError, match=r"mid_nodes\[1\] = node 2 has 3"):
        merge_collinear_chains(nodes, members, [1, 2])


def test_subdivided_line_split_by_heal_and_merged_back() -> None:
    # A long line through 3 joints heals into 4 pieces; the joints with only
    # the two pieces are mid-member nodes and merge back into one member.
    x = np.array([0.0, 1.0, 2.5, 3.0, 4.0])
    nodes = np.stack([x, np.zeros(5), np.zeros(5)], axis=1)
    res = heal(nodes, [[0, 4]], keep_nodes=[1, 2, 3])
    assert len(res.members) == 4
    mids = find_mid_member_nodes(res.nodes, res.members)
    np.testing.assert_array_equal(mids, [1, 2, 3])
    new, origin = merge_collinear_chains(res.nodes, res.members, mids)
    np.testing.assert_array_equal(new, [[0, 4]])
    np.testing.assert_array_equal(origin, [0])


# ---------------------------------------------------------------------------
# Reports
# ---------------------------------------------------------------------------


def test_report_lists_every_step_and_converts_units() -> None:
    nodes = np.array([[0, 0, 0], [2, 0, 0], [1, 0, 0], [1, 1, 0]])
    res = heal(nodes, [[0, 1], [2, 3]], split_crossings=False)
    assert [s.name for s in res.report.steps] == list(STEP_NAMES)
    text = str(res.report)
    assert all(name in text for name in STEP_NAMES)
    assert "skipped" in res.report.step("split_crossings").format()
    step = res.report.step("split_at_nodes")
    assert step.count == 1
    # Split at (1, 0, 0) m: 1000 in millimetre drawing units (1 mm = 0.001 m).
    assert "(1000, 0, 0) mm" in step.format(scale=0.001, unit="mm")
    data = json.loads(json.dumps(res.report.as_dict()))
    assert data["n_components"] == 1
    assert data["steps"][2]["locations"] == [[1.0, 0.0, 0.0]]
    with pytest.raises(ModelError, match="scale"):
        step.format(scale=0.0)


# ---------------------------------------------------------------------------
# Bad input
# ---------------------------------------------------------------------------


def test_bad_nodes_name_the_index() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0], [np.nan, 0, 0]])
    with pytest.raises(ModelError, match=r"node 2 .*nan"):
        heal(nodes, [[0, 1]])
    with pytest.raises(ModelError, match=r"shape \(n, 3\).*\(2, 2\)"):
        heal(np.zeros((2, 2)), [[0, 1]])


def test_bad_members_name_the_index() -> None:
    nodes = np.zeros((3, 3)) + np.arange(3)[:, None]
    with pytest.raises(ModelError, match=r"member 1 .*\[2, 3\]"):
        heal(nodes, [[0, 1], [2, 3]])
    with pytest.raises(ModelError, match=r"member 0 .*\[-1, 1\]"):
        heal(nodes, [[-1, 1]])
    with pytest.raises(ModelError, match=r"members\[1\] has value 1.5"):
        heal(nodes, [[0.0, 1.0], [1.5, 2.0]])
    with pytest.raises(ModelError, match=r"shape \(b, 2\)"):
        heal(nodes, [[0, 1, 2]])


def test_bad_tolerance_and_keep_nodes() -> None:
    nodes = np.array([[0, 0, 0], [1, 0, 0]])
    for bad in (0.0, -1e-3, float("nan"), float("inf")):
        with pytest.raises(ModelError, match="tolerance"):
            heal(nodes, [[0, 1]], tolerance=bad)
    with pytest.raises(ModelError, match=r"keep_nodes\[1\] = 7"):
        heal(nodes, [[0, 1]], keep_nodes=[0, 7])
    with pytest.raises(ModelError, match=r"group 'g'\[0\] = 5"):
        remap_groups({"g": [5]}, heal(nodes, [[0, 1]]))


# ---------------------------------------------------------------------------
# Properties
# ---------------------------------------------------------------------------

# Lattice edges along the axes and the (1, 1, 1) cube diagonals: no edge
# passes near another edge's end or crosses it (common practice: a body
# diagonal stays sqrt(2/3) = 0.82 from the cube's other corners), so a
# subset with nodes moved by up to 0.1 is a clean frame at any mm tolerance.
_OFFSETS = np.array([[1, 0, 0], [0, 1, 0], [0, 0, 1], [1, 1, 1]])


@st.composite
def clean_frames(draw: st.DrawFn) -> tuple[np.ndarray, np.ndarray]:
    size = draw(st.integers(2, 4))
    ijk = np.stack(np.meshgrid(*[np.arange(size)] * 3, indexing="ij"), -1).reshape(-1, 3)
    ends = (ijk[:, None, :] + _OFFSETS[None]).reshape(-1, 3)
    starts = np.repeat(ijk, len(_OFFSETS), axis=0)
    inside = (ends < size).all(axis=1)
    starts, ends = starts[inside], ends[inside]
    flags = draw(st.lists(st.booleans(), min_size=len(starts), max_size=len(starts)))
    chosen = np.flatnonzero(flags)
    if chosen.size == 0:
        chosen = np.array([0])
    seed = draw(st.integers(0, 2**32 - 1))
    pairs = np.stack([starts[chosen], ends[chosen]], axis=1).reshape(-1, 3)
    used, inverse = np.unique(pairs @ [size * size, size, 1], return_inverse=True)
    del used
    # Number nodes in order of first use so healing need not renumber them.
    first = np.unique(inverse, return_index=True)[1]
    order = np.argsort(first)
    rank = np.empty_like(order)
    rank[order] = np.arange(order.size)
    members = rank[inverse].reshape(-1, 2)
    coords = np.empty((order.size, 3))
    coords[rank[inverse]] = pairs.astype(float)
    coords += np.random.default_rng(seed).uniform(-0.1, 0.1, coords.shape)
    return coords, members


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(frame=clean_frames(), crossings=st.booleans())
def test_healing_a_clean_frame_changes_nothing(
    frame: tuple[np.ndarray, np.ndarray], crossings: bool
) -> None:
    nodes, members = frame
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", SpaceframeWarning)
        res = heal(nodes, members, split_crossings=crossings)
    np.testing.assert_array_equal(res.nodes, nodes)
    np.testing.assert_array_equal(res.members, members)
    np.testing.assert_array_equal(res.origin, np.arange(len(members)))
    np.testing.assert_array_equal(res.node_map, np.arange(len(nodes)))
    assert res.duplicates.shape == (0, 2)
    assert all(s.count == 0 for s in res.report.steps if s.name != "components")


@settings(max_examples=25, deadline=None)
@given(
    nx=st.integers(1, 4),
    ny=st.integers(1, 4),
    rotation_seed=st.integers(0, 2**32 - 1),
    shift=st.tuples(*[st.floats(-1000.0, 1000.0)] * 3),
)
def test_healing_invariant_under_rigid_motion(
    nx: int, ny: int, rotation_seed: int, shift: tuple[float, float, float]
) -> None:
    # Jitter 0.2 tol: worst gaps 0.69 tol, far from the tol boundary, so
    # rounding of a rotation (~1e-13 m at 1 km) cannot change a decision.
    nodes, members = drawn_grid(nx, ny, soup=True, jitter=0.2 * TOL, seed=rotation_seed)
    base = heal(nodes, members)
    rot = Rotation.random(random_state=rotation_seed).as_matrix()
    moved = heal(nodes @ rot.T + np.array(shift), members)
    assert (len(moved.nodes), len(moved.members)) == (len(base.nodes), len(base.members))
    assert (len(base.nodes), len(base.members)) == grid_counts(nx, ny)
    assert [s.count for s in moved.report.steps] == [s.count for s in base.report.steps]
    np.testing.assert_array_equal(moved.origin, base.origin)


def test_coordinates_too_large_for_the_tolerance_are_refused() -> None:
    # float64 spacing near 1e10 m is ~2e-6 m; the bound is eps * |x| * 1000 <= tol.
    nodes = np.array([[0.0, 0, 0], [1e10, 0, 0], [0, 1, 0], [4e307, 0, 0]])
    with pytest.raises(ModelError, match=r"coordinates reach 4e\+307 m"):
        heal(nodes, [[0, 1], [2, 3]])
    with pytest.raises(ModelError, match=r"coordinates reach 1e\+10 m.*within 4\.5e\+09 m"):
        heal(nodes[:3], [[0, 1], [0, 2]])
    # Site coordinates (a survey grid in metres) are far inside the bound.
    site = nodes[:3] * [1e-5, 1, 1] + [451234.0, 5712345.0, 0.0]
    assert len(heal(site, [[0, 1], [0, 2]]).members) == 2
