"""Selections over a small double-layer grid whose ids are known by construction."""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.errors import ModelError
from spaceframe.geometry import selection as s

TOP = [0, 1, 2, 3, 4, 5, 6, 7, 8]  # z = 1, a 3 x 3 grid at 2 m spacing, row by row
BOTTOM = [9, 10, 11, 12]  # z = 0, at the bay centres


def grid() -> sf.Model:
    m = sf.Model()
    top = [[2 * i, 2 * j, 1.0] for j in range(3) for i in range(3)]
    bottom = [[1 + 2 * i, 1 + 2 * j, 0.0] for j in range(2) for i in range(2)]
    m.add_nodes(top + bottom)
    chords = [[0, 1], [1, 2], [3, 4], [4, 5], [6, 7], [7, 8],
              [0, 3], [3, 6], [1, 4], [4, 7], [2, 5], [5, 8]]
    m.add_members(chords, group="TOP")  # members 0..11
    m.add_members([[9, 10], [11, 12], [9, 11], [10, 12]], group="BOTTOM")  # 12..15
    diag = [[b, t] for b, ts in zip(BOTTOM, [[0, 1, 3, 4], [1, 2, 4, 5], [3, 4, 6, 7],
                                               [4, 5, 7, 8]], strict=True) for t in ts]
    m.add_members(diag, group="DIAG")  # 16..31
    m.add_node_set("EDGE", [0, 1, 2])
    m.add_panels([[0, 1, 4, 3], [1, 2, 5, 4], [3, 4, 7, 6], [4, 5, 8, 7]], group="ROOF")
    # Corner markers drawn 0.3 mm off the nodes, and one far from any node.
    m.add_markers([[0.0003, 0, 1], [4, 0.0003, 1], [0, 4, 1.0003], [4, 4, 1]], "SUPPORTS")
    m.add_markers([[10, 10, 10]], "STRAY")
    return m


@pytest.fixture
def model() -> sf.Model:
    return grid()


def ids(model: sf.Model, selector: s.Selector, target: s.Target = "nodes",
        **kw: object) -> list[int]:
    return s.select(model, selector, target, **kw).tolist()  # type: ignore[arg-type]


def test_all_and_ids(model: sf.Model) -> None:
    assert ids(model, s.All()) == list(range(13))
    assert ids(model, s.All(), "members") == list(range(32))
    assert ids(model, s.Ids((5, 2, 5))) == [2, 5]
    with pytest.raises(ModelError, match=r"where: entry 1 refers to node 13, which does not exist"):
        s.select(model, s.Ids((0, 13)), "nodes", where="where")


def test_groups_pick_members_their_nodes_and_panels(model: sf.Model) -> None:
    assert ids(model, s.Group(("BOTTOM",)), "members") == [12, 13, 14, 15]
    assert ids(model, s.Group(("BOTTOM",))) == BOTTOM
    assert ids(model, s.Group(("TOP", "BOTTOM")), "members") == list(range(16))
    assert ids(model, s.Group(("ROOF",)), "panels") == [0, 1, 2, 3]
    assert ids(model, s.Group(("ROOF",))) == TOP
    with pytest.raises(ModelError, match=r"k: no group named 'DIAGS'; did you mean 'DIAG'"):
        s.select(model, s.Group(("DIAGS",)), "members", where="k")
    with pytest.raises(ModelError, match="holds panels only"):
        s.select(model, s.Group(("ROOF",)), "members")


def test_node_criteria_pick_members_with_both_ends_and_panels_with_all_corners(
    model: sf.Model,
) -> None:
    edge = s.NodeSet(("EDGE",))
    assert ids(model, edge) == [0, 1, 2]
    assert ids(model, edge, "members") == [0, 1]  # [0,1] and [1,2] only
    top = s.Plane((0, 0, 1), "max")
    assert ids(model, top, "panels") == [0, 1, 2, 3]
    assert ids(model, top, "members") == list(range(12))
    left_half = s.Box((-np.inf, -np.inf, 0.9), (2, np.inf, 1.1))
    assert ids(model, left_half, "panels") == [0, 2]


def test_planes(model: sf.Model) -> None:
    assert ids(model, s.Plane((0, 0, 1), "min")) == BOTTOM
    assert ids(model, s.Plane((0, 0, 1), "max")) == TOP
    assert ids(model, s.Plane((1, 0, 0), 4.0)) == [2, 5, 8]
    # Diagonal plane x + y = 4 (distance 4 / sqrt 2 along the unit normal): nodes 2, 4, 6
    # of the top and none of the bottom (1+3 = 4: nodes 10 and 11).
    assert ids(model, s.Plane((1, 1, 0), 4 / np.sqrt(2))) == [2, 4, 6, 10, 11]
    with pytest.raises(ModelError, match="normal"):
        s.Plane((0, 0, 0), 1.0)
    with pytest.raises(ModelError, match="'lowest'"):
        s.Plane((0, 0, 1), "lowest")  # type: ignore[arg-type]


def test_box_bounds_are_widened_by_the_tolerance(model: sf.Model) -> None:
    box = s.Box((0, 0, 0), (1.9995, 1.9995, 1))  # 0.5 mm short of x = 2 and y = 2
    assert ids(model, box) == [0, 1, 3, 4, 9]  # default tolerance 1 mm
    assert ids(model, box, tolerance=1e-4) == [0, 9]
    assert ids(model, s.Box((0, 0, 0), (1.9995, 1.9995, 1), tolerance=0.0)) == [0, 9]
    with pytest.raises(ModelError, match=r"lower y = 3\.0 is above upper y = 1\.0"):
        s.Box((0, 3, 0), (1, 1, 1))


def test_markers_pick_the_nearest_nodes(model: sf.Model) -> None:
    assert ids(model, s.Markers(("SUPPORTS",))) == [0, 2, 6, 8]
    with pytest.raises(ModelError) as info:
        s.select(model, s.Markers(("SUPPORTS",), tolerance=1e-4), "nodes", where="supports[0]")
    text = str(info.value)
    assert "supports[0]: marker 0 at [0.0003, 0.0, 1.0] m has no node within 0.0001 m" in text
    assert "3 such points" in text  # three of the four are 0.3 mm off
    with pytest.raises(ModelError, match=r"marker 0 at \[10.0, 10.0, 10.0\] m has no node"):
        s.select(model, s.Markers(("STRAY",)), "nodes")
    with pytest.raises(ModelError, match="no marker points on layer 'SUPORTS'; did you mean"):
        s.select(model, s.Markers(("SUPORTS",)), "nodes")


def test_points(model: sf.Model) -> None:
    assert ids(model, s.Points(((2, 2, 1.0005), (1, 1, 0)))) == [4, 9]
    with pytest.raises(ModelError, match=r"point 1 at \[5.0, 5.0, 5.0\] m"):
        s.select(model, s.Points(((2, 2, 1), (5, 5, 5))), "nodes")


def test_set_algebra_and_references(model: sf.Model) -> None:
    top = s.Plane((0, 0, 1), "max")
    corners = s.Markers(("SUPPORTS",))
    named: dict[str, s.Selector] = {"top": top, "corners": corners,
                                    "inner": s.Difference((s.Ref("top"), s.Ref("corners")))}
    assert ids(model, s.Ref("inner"), named=named) == [1, 3, 4, 5, 7]
    assert ids(model, s.Union((s.Ref("corners"), s.Ids((9,)))), named=named) == [0, 2, 6, 8, 9]
    both = s.Intersection((s.NodeSet(("EDGE",)), s.Ref("corners")))
    assert ids(model, both, named=named) == [0, 2]
    # Members not in the chord groups: the diagonals.
    not_chords = s.Difference((s.All(), s.Group(("TOP", "BOTTOM"))))
    assert ids(model, not_chords, "members") == list(range(16, 32))
    assert s.references(named["inner"]) == {"top", "corners"}


def test_reference_errors(model: sf.Model) -> None:
    with pytest.raises(ModelError, match="no selection named 'tpo'; did you mean 'top'"):
        s.select(model, s.Ref("tpo"), "nodes", named={"top": s.All()})
    loop: dict[str, s.Selector] = {"a": s.Union((s.Ref("b"),)), "b": s.Ref("a")}
    with pytest.raises(ModelError, match="cycle: a -> b -> a"):
        s.select(model, s.Ref("a"), "nodes", named=loop)


def test_empty_selection_names_itself(model: sf.Model) -> None:
    high = s.Plane((0, 0, 1), 7.0)
    with pytest.raises(ModelError, match=r"loads.x.nodal\[0\].nodes \(plane normal \[0, 0, 1\] "
                                         r"at 7.0\) selects no nodes"):
        s.select(model, high, "nodes", where="loads.x.nodal[0].nodes")
    assert ids(model, high, allow_empty=True) == []
    # A node set of two unconnected nodes selects nodes but no member.
    model.add_node_set("PAIR", [0, 8])
    with pytest.raises(ModelError, match="selects no members"):
        s.select(model, s.NodeSet(("PAIR",)), "members")


def test_conversions_are_vectorised_masks(model: sf.Model) -> None:
    mask = np.zeros(13, dtype=bool)
    mask[[0, 1, 9]] = True
    within = s.members_within(model.members, mask)
    # Members among nodes 0, 1, 9: [0, 1] (member 0) and diagonals 9-0, 9-1 (16, 17).
    assert np.flatnonzero(within).tolist() == [0, 16, 17]
    nodes = s.nodes_of_members(model.members, within, 13)
    assert np.flatnonzero(nodes).tolist() == [0, 1, 9]
    panels = np.array([False, False, False, True])
    assert np.flatnonzero(
        s.nodes_of_panels(model.panel_nodes, model.panel_offsets, panels, 13)
    ).tolist() == [4, 5, 7, 8]


def test_selections_at_site_coordinates() -> None:
    # The same grid on a survey grid position (UTM-like, m): every geometric
    # selection picks the same ids as at the origin.
    shift = np.array([451234.3, 5712345.7, 87.0])
    m = grid()
    m.nodes = m.nodes + shift
    m.markers = m.markers + shift
    ox, oy, oz = shift.tolist()
    box = s.Box((ox, oy, oz), (ox + 1.9995, oy + 1.9995, oz + 1))
    assert ids(m, box) == [0, 1, 3, 4, 9]
    assert ids(m, box, tolerance=1e-4) == [0, 9]
    assert ids(m, s.Plane((0, 0, 1), "min")) == BOTTOM
    assert ids(m, s.Plane((1, 0, 0), ox + 4.0)) == [2, 5, 8]
    assert ids(m, s.Plane((1, 1, 0), (ox + oy + 4) / np.sqrt(2))) == [2, 4, 6, 10, 11]
    assert ids(m, s.Markers(("SUPPORTS",))) == [0, 2, 6, 8]
    assert ids(m, s.Points(((ox + 2, oy + 2, oz + 1.0005), (ox + 1, oy + 1, oz)))) == [4, 9]


def test_model_file_box_bounds_may_be_infinite(tmp_path) -> None:
    # README: box bounds take inf / -inf for "no bound". The canopy's centre box,
    # opened downwards in z and to +x / +y, picks the nodes with x >= 1.5 and
    # y >= 1.5: top nodes 4, 5, 7, 8 and bottom node 12 at (3, 3, 0) (ids known by
    # construction).
    from test_project import CANOPY

    from spaceframe.project import load_project

    old = "centre = { box = { min = [1.5, 1.5, 0.5], max = [2.5, 2.5, 1.5] } }"
    assert old in CANOPY
    text = CANOPY.replace(
        old, 'centre = { box = { min = [1.5, 1.5, -inf], max = [inf, "inf", 1.5] } }'
    )
    path = tmp_path / "canopy.toml"
    path.write_text(text, encoding="utf-8")
    r = load_project(path).solve()["service"]
    # 1.5 kN down on each picked node (plus the 0.9 kN along x shared by the top nodes).
    fz = r.loads[:, 2]
    assert np.flatnonzero(fz).tolist() == [4, 5, 7, 8, 12]
    np.testing.assert_allclose(fz[[4, 5, 7, 8, 12]], -1.5e3, rtol=1e-12)
    # NaN is still refused, naming the key.
    bad = CANOPY.replace(old, "centre = { box = { min = [1.5, nan, 0.5], max = [2.5, 2.5, 1.5] } }")
    path.write_text(bad, encoding="utf-8")
    with pytest.raises(sf.SpaceframeError, match=r"selections\.centre\.box\.min\[1\]"):
        load_project(path)


def test_box_with_open_bounds_selects_by_the_finite_ones(model: sf.Model) -> None:
    inf = float("inf")
    assert ids(model, s.Box((-inf, -inf, -inf), (inf, inf, 0.5))) == BOTTOM
    assert ids(model, s.Box((3.0, -inf, -inf), (inf, inf, inf))) == [2, 5, 8, 10, 12]


def test_points_see_nodes_moved_after_an_earlier_selection(model: sf.Model) -> None:
    # The node tree is kept between selections; new geometry must replace it.
    first = model.nodes[0].copy()
    assert s.select(model, s.Points((tuple(first),)), "nodes").tolist() == [0]
    moved = model.nodes.copy()
    moved[0] += (0.0, 0.0, 5.0)
    model.nodes = moved
    with pytest.raises(ModelError, match="has no node within"):
        s.select(model, s.Points((tuple(first),)), "nodes")
    assert s.select(model, s.Points((tuple(moved[0]),)), "nodes").tolist() == [0]
    model.add_nodes([[100.0, 100.0, 100.0]])
    new = model.n_nodes - 1
    assert s.select(model, s.Points(((100.0, 100.0, 100.0),)), "nodes").tolist() == [new]
