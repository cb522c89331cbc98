"""Mesh reading (spaceframe.io.mesh); every input file is written here (text, meshio or pyvista)."""

from __future__ import annotations

import itertools
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from _frame_keys import member_keys

import spaceframe as sf
from spaceframe.io import mesh as sfmesh
from spaceframe.io import read_report

meshio = pytest.importorskip("meshio")

pytestmark = pytest.mark.filterwarnings(
    "ignore:healed frame is in:spaceframe.errors.SpaceframeWarning"
)


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------


def gmsh41(
    names: Sequence[tuple[int, int, str]],
    entities: dict[int, list[tuple[int, list[int]]]],
    nodes: Sequence[tuple[int, int, list[tuple[int, tuple[float, float, float]]]]],
    elements: Sequence[tuple[int, int, int, list[tuple[int, list[int]]]]],
) -> str:
    """MSH 4.1 ASCII text, laid out as in the Gmsh reference manual ("MSH file format").

    ``entities``: dim -> [(tag, physical tags)]; ``nodes``: [(dim, tag,
    [(node tag, xyz)])]; ``elements``: [(dim, tag, element type, [(element
    tag, node tags)])].  Bounding boxes are written as zeros and no
    bounding entities are listed (both are optional information).
    """
    out = ["$MeshFormat", "4.1 0 8", "$EndMeshFormat", "$PhysicalNames", str(len(names))]
    out += [f'{d} {t} "{n}"' for d, t, n in names]
    out += ["$EndPhysicalNames", "$Entities"]
    out.append(" ".join(str(len(entities.get(d, []))) for d in range(4)))
    for d in range(4):
        for tag, phys in entities.get(d, []):
            box = "0 0 0" if d == 0 else "0 0 0 0 0 0"
            tail = "" if d == 0 else " 0"
            out.append(f"{tag} {box} {len(phys)} {' '.join(map(str, phys))}{tail}".rstrip())
    out.append("$EndEntities")
    all_nodes = [t for _, _, block in nodes for t, _ in block]
    out += ["$Nodes", f"{len(nodes)} {len(all_nodes)} {min(all_nodes)} {max(all_nodes)}"]
    for d, tag, block in nodes:
        out.append(f"{d} {tag} 0 {len(block)}")
        out += [str(t) for t, _ in block]
        out += [" ".join(repr(float(c)) for c in xyz) for _, xyz in block]
    out.append("$EndNodes")
    all_el = [t for *_, block in elements for t, _ in block]
    out += ["$Elements", f"{len(elements)} {len(all_el)} {min(all_el)} {max(all_el)}"]
    for d, tag, etype, block in elements:
        out.append(f"{d} {tag} {etype} {len(block)}")
        out += [f"{t} {' '.join(map(str, conn))}" for t, conn in block]
    out.append("$EndElements")
    return "\n".join(out) + "\n"


@pytest.fixture
def canopy_msh(tmp_path: Path) -> Path:
    """A fictional bus-shelter frame in Gmsh 4.1: a rafter meshed in three
    elements (group RAFTER), a post with no physical group, a second-order
    tie (group TIE), a roof triangle (group ROOF), a support point (group
    SUPPORTS) and one tetrahedron (ignored)."""
    text = gmsh41(
        names=[(0, 10, "SUPPORTS"), (1, 1, "RAFTER"), (1, 2, "TIE"), (2, 3, "ROOF")],
        entities={0: [(1, [10])], 1: [(1, [1]), (2, []), (3, [2])], 2: [(1, [3])], 3: [(1, [])]},
        nodes=[
            (0, 1, [(1, (0.0, 0.0, 0.0))]),
            (1, 1, [(2, (2.0, 0.0, 0.0)), (3, (4.0, 0.0, 0.0)), (4, (6.0, 0.0, 0.0))]),
            (1, 2, [(5, (6.0, 0.0, 3.0))]),
            (1, 3, [(6, (3.0, 0.0, 1.5))]),
        ],
        elements=[
            (0, 1, 15, [(1, [1])]),
            (1, 1, 1, [(2, [1, 2]), (3, [2, 3]), (4, [3, 4])]),
            (1, 2, 1, [(5, [4, 5])]),
            (1, 3, 8, [(6, [1, 5, 6])]),  # 3-node line: ends first, then the middle
            (2, 1, 2, [(7, [1, 4, 5])]),
            (3, 1, 4, [(8, [1, 2, 5, 6])]),
        ],
    )
    path = tmp_path / "shelter.msh"
    path.write_text(text)
    return path


def icosphere(radius: float) -> tuple[np.ndarray, np.ndarray]:
    """Icosahedron subdivided once and pushed onto a sphere (42 vertices, 80 triangles).

    The icosahedron's 12 vertices are the cyclic permutations of
    (0, +-1, +-phi); its 20 faces are the vertex triples at mutual distance 2.
    """
    phi = (1 + 5**0.5) / 2
    verts = []
    for a, b in itertools.product((-1.0, 1.0), repeat=2):
        verts += [(0.0, a, b * phi), (a, b * phi, 0.0), (b * phi, 0.0, a)]
    v = np.array(verts)
    faces = [
        f
        for f in itertools.combinations(range(12), 3)
        if all(
            abs(np.linalg.norm(v[i] - v[j]) - 2.0) < 1e-9 for i, j in itertools.combinations(f, 2)
        )
    ]
    assert len(faces) == 20
    pts = list(map(tuple, v))
    index = {p: i for i, p in enumerate(pts)}

    def mid(i: int, j: int) -> int:
        m = tuple(((v[i] + v[j]) / 2).tolist())
        if m not in index:
            index[m] = len(pts)
            pts.append(m)
        return index[m]

    tris = []
    for a, b, c in faces:
        ab, bc, ca = mid(a, b), mid(b, c), mid(c, a)
        tris += [(a, ab, ca), (b, bc, ab), (c, ca, bc), (ab, bc, ca)]
    p = np.array(pts)
    p = radius * p / np.linalg.norm(p, axis=1)[:, None]
    return p, np.array(tris)


def key(*points: tuple[float, float, float]) -> frozenset[tuple[float, ...]]:
    return frozenset(tuple(float(c) for c in p) for p in points)


# ---------------------------------------------------------------------------
# Gmsh
# ---------------------------------------------------------------------------


def test_gmsh41_physical_groups_and_an_ungrouped_curve(canopy_msh: Path) -> None:
    with pytest.warns(sf.SpaceframeWarning, match=r"shelter\.msh: not used .*tetra cells x1"):
        model = sfmesh.read(canopy_msh)
    # 6 distinct points; rafter 3 + post 1 + tie split at its middle node 2
    assert model.n_nodes == 6 and model.n_members == 6
    assert member_keys(model, model.groups["RAFTER"]) == {
        key((0, 0, 0), (2, 0, 0)), key((2, 0, 0), (4, 0, 0)), key((4, 0, 0), (6, 0, 0))
    }  # fmt: skip
    assert member_keys(model, model.groups["TIE"]) == {
        key((0, 0, 0), (3, 0, 1.5)), key((3, 0, 1.5), (6, 0, 3))
    }  # fmt: skip
    assert key((6, 0, 0), (6, 0, 3)) in member_keys(model)  # the post without a group
    assert set(model.groups) == {"RAFTER", "TIE"}
    np.testing.assert_array_equal(model.nodes[model.node_sets["SUPPORTS"]], [[0, 0, 0]])
    assert model.n_panels == 1 and model.panel_groups["ROOF"].tolist() == [0]
    assert model.meta["io:ignored"] == {
        "tetra cells": {"count": 1, "layers": {"(no group)": 1}}
    }
    assert model.meta["units"]["source"].startswith("assumed")


@pytest.mark.filterwarnings("ignore:.*not used:spaceframe.errors.SpaceframeWarning")
def test_mid_member_nodes_reported_and_merged(canopy_msh: Path) -> None:
    model = sfmesh.read(canopy_msh)
    mid = model.meta["mesh:mid_member_nodes"]
    # the rafter's two inner nodes and the tie's middle node: each has
    # exactly two members, opposite along one line
    assert mid["count"] == 3 and not mid["merged"]
    assert {tuple(model.nodes[i]) for i in mid["nodes"]} == {(2, 0, 0), (4, 0, 0), (3, 0, 1.5)}
    assert "mid-member nodes: 3 found" in read_report(model)

    merged = sfmesh.read(canopy_msh, merge_mid_nodes=True)
    assert merged.meta["mesh:mid_member_nodes"]["merged"]
    assert merged.n_nodes == 3 and merged.n_members == 3
    assert member_keys(merged, merged.groups["RAFTER"]) == {key((0, 0, 0), (6, 0, 0))}
    assert member_keys(merged, merged.groups["TIE"]) == {key((0, 0, 0), (6, 0, 3))}
    np.testing.assert_array_equal(merged.nodes[merged.node_sets["SUPPORTS"]], [[0, 0, 0]])
    assert merged.n_panels == 1


def test_gmsh22_through_meshio(tmp_path: Path) -> None:
    pts = np.array([[0, 0, 0], [3, 0, 0], [6, 0, 0], [3, 2, 0]], dtype=float)
    mesh = meshio.Mesh(
        pts,
        [("line", np.array([[0, 1], [1, 2], [1, 3]])), ("vertex", np.array([[0], [2]]))],
        cell_data={
            "gmsh:physical": [np.array([1, 1, 2]), np.array([5, 5])],
            "gmsh:geometrical": [np.array([1, 1, 2]), np.array([1, 2])],
        },
        field_data={
            "CHORD": np.array([1, 1]),
            "HANGER": np.array([2, 1]),
            "PINS": np.array([5, 0]),
        },
    )
    path = tmp_path / "old.msh"
    meshio.write(path, mesh, file_format="gmsh22", binary=False)
    model = sfmesh.read(path)
    assert member_keys(model, model.groups["CHORD"]) == {
        key((0, 0, 0), (3, 0, 0)), key((3, 0, 0), (6, 0, 0))
    }  # fmt: skip
    assert member_keys(model, model.groups["HANGER"]) == {key((3, 0, 0), (3, 2, 0))}
    assert {tuple(model.nodes[i]) for i in model.node_sets["PINS"]} == {(0, 0, 0), (6, 0, 0)}


# ---------------------------------------------------------------------------
# VTK family and OBJ
# ---------------------------------------------------------------------------


@pytest.fixture
def polyline_network() -> Any:
    """pyvista PolyData: a 4-point poly line, a 2-point line, a group array."""
    pv = pytest.importorskip("pyvista")
    pts = np.array([[0, 0, 0], [2, 0, 0], [4, 0, 0], [6, 0, 0], [2, 2, 0]], dtype=float)
    lines = np.array([4, 0, 1, 2, 3, 2, 1, 4])
    poly = pv.PolyData(pts, lines=lines)
    poly.cell_data["part"] = np.array([7, 9])
    return poly


@pytest.mark.parametrize("suffix", [".vtu", ".vtk", ".vtp"])
def test_vtk_line_networks(tmp_path: Path, polyline_network: Any, suffix: str) -> None:
    path = tmp_path / f"net{suffix}"
    data = polyline_network.cast_to_unstructured_grid() if suffix == ".vtu" else polyline_network
    data.save(path)
    model = sfmesh.read(path, group_field="part")
    # the poly line of 4 points gives 3 members, the line 1
    assert model.n_members == 4 and model.n_nodes == 5
    assert member_keys(model, model.groups["7"]) == {
        key((0, 0, 0), (2, 0, 0)), key((2, 0, 0), (4, 0, 0)), key((4, 0, 0), (6, 0, 0))
    }  # fmt: skip
    assert member_keys(model, model.groups["9"]) == {key((2, 0, 0), (2, 2, 0))}
    assert model.meta["mesh:cell_arrays"] == ["part"]
    with pytest.raises(sf.ReadError, match=r"no cell array 'colour' \(cell arrays: part\)"):
        sfmesh.read(path, group_field="colour")


def test_vtu_second_order_quad_as_panel_and_edges(tmp_path: Path) -> None:
    # corners, then mid-side nodes edge by edge (VTK_QUADRATIC_QUAD order)
    pts = np.array(
        [[0, 0, 0], [4, 0, 0], [4, 4, 0], [0, 4, 0], [2, 0, 0], [4, 2, 0], [2, 4, 0], [0, 2, 0]],
        dtype=float,
    )
    path = tmp_path / "plate.vtu"
    meshio.write(path, meshio.Mesh(pts, [("quad8", np.arange(8)[None, :])]))
    model = sfmesh.read(path, edges_as_members=True)
    assert model.n_panels == 1 and model.panel(0).size == 4
    np.testing.assert_allclose(model.nodes[model.panel(0)], pts[:4])
    assert model.n_members == 8  # each side split at its mid-side node
    assert model.meta["mesh:mid_member_nodes"]["count"] == 4
    merged = sfmesh.read(path, edges_as_members=True, merge_mid_nodes=True)
    assert merged.n_members == 4 and merged.n_nodes == 4


def test_obj_lines_faces_groups(tmp_path: Path) -> None:
    path = tmp_path / "mast.obj"
    path.write_text(
        "# fictional telecom mast, one panel of the lattice\n"
        "o mast\n"
        "v 0 0 0\nv 2 0 0\nv 2 0 3\nv 0 0 3\n"
        "g legs\n"
        "l 1 4\n"
        "l 2 3\n"
        "g bracing\n"
        "l -4 -2 \\\n -3\n"  # relative indices and a continued line: 1 -> 3 -> 2
        "g cladding\n"
        "f 1/1 2/2 3/3 4/4\n"
        "usemtl steel\n"
        "p 1\n"
    )
    with pytest.warns(sf.SpaceframeWarning, match=r"not used .*OBJ statement 'p' x1"):
        model = sfmesh.read(path)
    assert member_keys(model, model.groups["legs"]) == {
        key((0, 0, 0), (0, 0, 3)), key((2, 0, 0), (2, 0, 3))
    }  # fmt: skip
    assert member_keys(model, model.groups["bracing"]) == {
        key((0, 0, 0), (2, 0, 3)), key((2, 0, 3), (2, 0, 0))
    }  # fmt: skip
    # the second bracing segment lies on a leg: healing keeps one member for both
    assert model.n_members == 3
    assert model.groups["mast"].size == 3  # the object name is a group too
    assert model.n_panels == 1 and model.panel_groups["cladding"].tolist() == [0]
    assert model.meta["io:ignored"]["OBJ statement 'p'"]["count"] == 1


def test_obj_bad_index_names_the_line(tmp_path: Path) -> None:
    path = tmp_path / "bad.obj"
    path.write_text("v 0 0 0\nv 1 0 0\nl 1 5\n")
    with pytest.raises(sf.ReadError, match=r"bad\.obj: line 3: vertex index 5 refers to no vertex"):
        sfmesh.read(path)


# ---------------------------------------------------------------------------
# meshio formats: Abaqus sets, STL surfaces
# ---------------------------------------------------------------------------


@pytest.fixture
def split_line_inp(tmp_path: Path) -> Callable[..., Path]:
    """Abaqus file of a straight 9 m line in three 3 m elements, with or without a post."""

    def write(
        cell_sets: dict[str, list[np.ndarray]], point_sets: dict[str, np.ndarray], post: bool = True
    ) -> Path:
        pts = np.array([[0, 0, 0], [3, 0, 0], [6, 0, 0], [9, 0, 0], [3, 0, -2]], dtype=float)
        lines = [[0, 1], [1, 2], [2, 3]] + ([[1, 4]] if post else [])
        cells = [("line", np.array(lines))]
        path = tmp_path / "line.inp"
        meshio.write(path, meshio.Mesh(pts, cells, cell_sets=cell_sets, point_sets=point_sets))
        return path

    return write


def test_abaqus_sets_become_groups_and_node_sets(split_line_inp: Callable[..., Path]) -> None:
    path = split_line_inp(
        {"BEAM": [np.array([0, 1, 2])], "POST": [np.array([3])]}, {"BASE": np.array([4])}
    )
    model = sfmesh.read(path)
    assert model.groups["BEAM"].size == 3 and model.groups["POST"].size == 1
    np.testing.assert_array_equal(model.nodes[model.node_sets["BASE"]], [[3, 0, -2]])


def test_merge_keeps_nodes_where_the_group_changes_or_a_node_set_sits(
    split_line_inp: Callable[..., Path],
) -> None:
    # both inner nodes are mid-member nodes; (6,0,0) joins members of two groups
    path = split_line_inp({"A": [np.array([0, 1])], "B": [np.array([2])]}, {}, post=False)
    merged = sfmesh.read(path, merge_mid_nodes=True)
    assert merged.meta["mesh:mid_member_nodes"]["count"] == 2
    assert member_keys(merged, merged.groups["A"]) == {key((0, 0, 0), (6, 0, 0))}
    assert member_keys(merged, merged.groups["B"]) == {key((6, 0, 0), (9, 0, 0))}
    # a node set on the inner node (6,0,0) keeps it too
    path = split_line_inp({"A": [np.array([0, 1, 2])]}, {"LOAD": np.array([2])}, post=False)
    kept = sfmesh.read(path, merge_mid_nodes=True)
    assert member_keys(kept, kept.groups["A"]) == {
        key((0, 0, 0), (6, 0, 0)), key((6, 0, 0), (9, 0, 0))
    }  # fmt: skip
    np.testing.assert_array_equal(kept.nodes[kept.node_sets["LOAD"]], [[6, 0, 0]])
    # with the post, (3,0,0) has three members and is no mid-member node
    path = split_line_inp({"A": [np.array([0, 1, 2])]}, {}, post=True)
    post = sfmesh.read(path, merge_mid_nodes=True)
    assert post.meta["mesh:mid_member_nodes"]["count"] == 1
    assert member_keys(post, post.groups["A"]) == {
        key((0, 0, 0), (3, 0, 0)), key((3, 0, 0), (9, 0, 0))
    }  # fmt: skip


def test_triangulated_sphere_as_bar_network(tmp_path: Path) -> None:
    pts, tris = icosphere(radius=10.0)
    path = tmp_path / "dome.stl"
    meshio.write(path, meshio.Mesh(pts, [("triangle", tris)]), binary=True)
    model = sfmesh.read(path, edges_as_members=True)
    v, e, f = model.n_nodes, model.n_members, model.n_panels
    # closed triangulated surface: every edge is shared by two triangles, so
    # E = 3F/2; Euler's polyhedron formula V - E + F = 2
    assert f == len(tris) == 80
    assert 2 * e == 3 * f
    assert v - e + f == 2
    np.testing.assert_allclose(np.linalg.norm(model.nodes, axis=1), 10.0, rtol=1e-6)
    with pytest.raises(sf.ReadError, match=r"no usable entities.*edges_as_members=True"):
        sfmesh.read(path)


def test_units_option_scales_a_mesh(split_line_inp: Callable[..., Path]) -> None:
    path = split_line_inp({}, {})
    model = sfmesh.read(path, units="ft")
    # 9 ft = 2.7432 m (1 ft = 0.3048 m exactly, 1959 international agreement)
    assert model.nodes[:, 0].max() == pytest.approx(9 * 0.3048, rel=1e-12)
    assert model.meta["units"] == {"name": "ft", "scale": 0.3048, "source": "units= option"}


# ---------------------------------------------------------------------------
# bad files
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("name", "content", "match"),
    [
        ("junk.msh", "not a mesh at all\n", r"junk\.msh: not a Gmsh mesh"),
        (
            "cut.msh",
            "$MeshFormat\n4.1 0 8\n$EndMeshFormat\n$Nodes\n1 1 1 1\n",
            r"cut\.msh: section \$Nodes",
        ),
        (
            "empty.msh",
            "$MeshFormat\n4.1 0 8\n$EndMeshFormat\n",
            r"empty\.msh: Gmsh file has no \$Nodes",
        ),
        (
            "short.msh",
            "$MeshFormat\n4.1 0 8\n$EndMeshFormat\n$Entities\n0 3 0 0\n$EndEntities\n"
            "$Nodes\n0 0 0 0\n$EndNodes\n$Elements\n0 0 0 0\n$EndElements\n",
            r"short\.msh: malformed Gmsh 4\.1 ASCII file",
        ),
        ("junk.vtu", "<html>not vtk</html>", r"junk\.vtu: VTK read no points"),
        ("junk.inp", "*NODE\n1, a, b\n", r"junk\.inp: meshio could not read it"),
    ],
)
def test_unreadable_files(tmp_path: Path, name: str, content: str, match: str) -> None:
    path = tmp_path / name
    path.write_text(content)
    with pytest.raises(sf.ReadError, match=match):
        sfmesh.read(path)


def test_missing_file_and_bad_options(tmp_path: Path, canopy_msh: Path) -> None:
    with pytest.raises(sf.ReadError, match=r"gone\.msh: no such file"):
        sfmesh.read(tmp_path / "gone.msh")
    with pytest.raises(sf.ReadError, match="group_field applies to VTK files only"):
        sfmesh.read(canopy_msh, group_field="x")
    with pytest.raises(sf.ReadError, match="unknown option 'layers'"):
        sfmesh.read(canopy_msh, layers=["A"])
