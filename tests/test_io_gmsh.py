"""Gmsh files as users save them: text and binary 4.1, 2.2, empty entity blocks,
partitions, high-order cells; plus other mesh-reader messages and site coordinates.

Every file is written here: by hand following the Gmsh reference manual
("MSH file format", 4.1, and "MSH file format version 2 (Legacy)"), or by
meshio.  Check values are counts and coordinates of the meshes written.
"""

from __future__ import annotations

import struct
import warnings
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pytest
from test_io_mesh import gmsh41, key, member_keys

import spaceframe as sf
from spaceframe.errors import SpaceframeWarning
from spaceframe.io import mesh as sfmesh

meshio = pytest.importorskip("meshio")

pytestmark = pytest.mark.filterwarnings(
    "ignore:healed frame is in:spaceframe.errors.SpaceframeWarning"
)

Names = Sequence[tuple[int, int, str]]
Entities = dict[int, list[tuple[int, list[int]]]]
Nodes = Sequence[tuple[int, int, list[tuple[int, tuple[float, float, float]]]]]
Elements = Sequence[tuple[int, int, int, list[tuple[int, list[int]]]]]


def gmsh41_binary(names: Names, entities: Entities, nodes: Nodes, elements: Elements) -> bytes:
    """The same mesh as :func:`gmsh41`, in the binary 4.1 encoding (little-endian,
    size_t of 8 bytes): counts as size_t, tags and types as int, coordinates
    as double, in the order the manual's format description gives."""
    out = bytearray(b"$MeshFormat\n4.1 1 8\n" + struct.pack("<i", 1) + b"\n$EndMeshFormat\n")
    out += f"$PhysicalNames\n{len(names)}\n".encode()
    out += "".join(f'{d} {t} "{n}"\n' for d, t, n in names).encode() + b"$EndPhysicalNames\n"
    out += b"$Entities\n" + struct.pack("<4Q", *(len(entities.get(d, [])) for d in range(4)))
    for d in range(4):
        for tag, phys in entities.get(d, []):
            out += struct.pack("<i", tag) + struct.pack(
                "<3d" if d == 0 else "<6d", *[0.0] * (3 if d == 0 else 6)
            )
            out += struct.pack("<Q", len(phys)) + struct.pack(f"<{len(phys)}i", *phys)
            if d:
                out += struct.pack("<Q", 0)  # no bounding entities
    out += b"\n$EndEntities\n"
    tags = [t for _, _, block in nodes for t, _ in block]
    out += b"$Nodes\n" + struct.pack("<4Q", len(nodes), len(tags), min(tags), max(tags))
    for d, tag, block in nodes:
        out += struct.pack("<iiiQ", d, tag, 0, len(block))
        out += struct.pack(f"<{len(block)}Q", *(t for t, _ in block))
        out += struct.pack(f"<{3 * len(block)}d", *(c for _, xyz in block for c in xyz))
    out += b"\n$EndNodes\n"
    el = [t for *_, block in elements for t, _ in block]
    out += b"$Elements\n" + struct.pack("<4Q", len(elements), len(el), min(el), max(el))
    for d, tag, etype, block in elements:
        out += struct.pack("<iiiQ", d, tag, etype, len(block))
        flat = [v for t, conn in block for v in (t, *conn)]
        out += struct.pack(f"<{len(flat)}Q", *flat)
    out += b"\n$EndElements\n"
    return bytes(out)


# A fictional gantry: beam in two elements (curve 1, physical 5 without a
# name), a post (curve 2, physical 7 "POST"), a bracing curve 3 in no group,
# a surface entity 1 with an empty node block as Gmsh writes for entities
# meshed elsewhere, and a roof triangle in group "ROOF" (2, 9).
GANTRY: dict = dict(
    names=[(1, 7, "POST"), (2, 9, "ROOF")],
    entities={1: [(1, [5]), (2, [7]), (3, [])], 2: [(1, [9])]},
    nodes=[
        (1, 1, [(1, (0.0, 0.0, 4.0)), (2, (3.0, 0.0, 4.0)), (3, (6.0, 0.0, 4.0))]),
        (1, 2, [(4, (6.0, 0.0, 0.0))]),
        (1, 7, []),  # an entity block with zero nodes: "1 7 0 0"
        (2, 1, []),
    ],
    elements=[
        (1, 1, 1, [(1, [1, 2]), (2, [2, 3])]),
        (1, 2, 1, [(3, [3, 4])]),
        (1, 3, 1, [(4, [2, 4])]),
        (2, 1, 2, [(5, [1, 3, 4])]),
    ],
)
GANTRY_GROUPS = {"physical-1-5": 2, "POST": 1}


def groups_of(model: sf.Model) -> dict[str, int]:
    return {name: int(ids.size) for name, ids in model.groups.items()}


def test_entity_block_with_zero_nodes_is_read(tmp_path: Path) -> None:
    text = gmsh41(**GANTRY)
    assert "\n1 7 0 0\n" in text  # the line Gmsh writes for an entity without nodes
    path = tmp_path / "gantry.msh"
    path.write_text(text)
    model = sfmesh.read(path)
    assert (model.n_nodes, model.n_members, model.n_panels) == (4, 4, 1)
    assert groups_of(model) == GANTRY_GROUPS
    assert model.panel_groups["ROOF"].tolist() == [0]


def test_binary_41_gives_the_groups_of_ascii_41(tmp_path: Path) -> None:
    text, binary = tmp_path / "text.msh", tmp_path / "binary.msh"
    text.write_text(gmsh41(**GANTRY))
    binary.write_bytes(gmsh41_binary(**GANTRY))
    a, b = sfmesh.read(text), sfmesh.read(binary)
    # numeric physical 5 is kept although other groups have names
    assert groups_of(a) == groups_of(b) == GANTRY_GROUPS
    np.testing.assert_array_equal(a.nodes, b.nodes)
    np.testing.assert_array_equal(a.members, b.members)
    assert b.panel_groups["ROOF"].tolist() == [0]


def test_binary_41_cut_short_is_a_read_error(tmp_path: Path) -> None:
    data = gmsh41_binary(**GANTRY)
    path = tmp_path / "cut.msh"
    path.write_bytes(data[: data.index(b"$Elements") + 40])
    with pytest.raises(sf.ReadError, match=r"cut\.msh: .*(ends inside a section|no \$End)"):
        sfmesh.read(path)


def _gmsh22(
    tmp_path: Path,
    physical: list[int],
    roof: list[int],
    names: dict[str, list[int]],
    binary: bool = False,
) -> Path:
    """2.2 text file of the gantry's three line elements and roof triangle
    written by meshio; the post and the triangle are listed twice (once per
    physical group) as Gmsh's MSH 2 writer does."""
    pts = np.array([[0, 0, 4], [3, 0, 4], [6, 0, 4], [6, 0, 0]], dtype=float)
    lines = np.array([[0, 1], [1, 2], [2, 3], [2, 3]])
    mesh = meshio.Mesh(
        pts,
        # the roof's copies in two blocks, as Gmsh's binary writer leaves them
        [("line", lines), ("triangle", np.array([[0, 2, 3]])), ("triangle", np.array([[0, 2, 3]]))],
        cell_data={
            "gmsh:physical": [np.array(physical), np.array(roof[:1]), np.array(roof[1:])],
            "gmsh:geometrical": [np.array([1, 1, 2, 2]), np.array([1]), np.array([1])],
        },
        field_data={name: np.array(v) for name, v in names.items()},
    )
    path = tmp_path / "old.msh"
    meshio.write(path, mesh, file_format="gmsh22", binary=binary)
    return path


@pytest.mark.parametrize("binary", [False, True])
def test_gmsh22_groups_follow_the_41_rules(tmp_path: Path, binary: bool) -> None:
    # the post (elementary curve 2) is in physical 7 "POST" and physical 8:
    # MSH 2 writes it twice; numeric 5 has no name
    path = _gmsh22(tmp_path, [5, 5, 7, 8], [9, 11], {"POST": [7, 1], "ROOF": [9, 2]}, binary)
    model = sfmesh.read(path)
    assert groups_of(model) == {"physical-1-5": 2, "POST": 1, "physical-1-8": 1}
    assert model.n_members == 3  # the copy is one member in both groups
    np.testing.assert_array_equal(model.groups["POST"], model.groups["physical-1-8"])
    # one roof panel (not two, which would carry its load twice), in both groups
    assert model.n_panels == 1
    assert {k: v.tolist() for k, v in model.panel_groups.items()} == {
        "ROOF": [0], "physical-2-11": [0]
    }  # fmt: skip


@pytest.mark.parametrize("binary", [False, True])
def test_gmsh22_without_physical_groups_has_no_groups(tmp_path: Path, binary: bool) -> None:
    path = _gmsh22(tmp_path, [0, 0, 0, 0], [0, 0], {}, binary)
    model = sfmesh.read(path)
    assert model.groups == {}  # not a made-up "physical-1-0"
    assert model.n_members == 3


def test_partitioned_41_file_keeps_groups(tmp_path: Path) -> None:
    # Two partitions of one curve (model curve 1, physical 3 "CHORD"): the
    # mesh is stored on partition entities 2 and 3, whose physical tags are
    # in $PartitionedEntities (tag parentDim parentTag numPartitions
    # partitions, bounding box, physical tags, bounding entities).
    text = "\n".join(
        [
            "$MeshFormat", "4.1 0 8", "$EndMeshFormat",
            "$PhysicalNames", "1", '1 3 "CHORD"', "$EndPhysicalNames",
            "$Entities", "0 1 0 0", "1 0 0 0 6 0 0 1 3 0", "$EndEntities",
            "$PartitionedEntities", "2", "0", "0 2 0 0",
            "2 1 1 1 1 0 0 0 3 0 0 1 3 0",
            "3 1 1 1 2 3 0 0 6 0 0 1 3 0",
            "$EndPartitionedEntities",
            "$Nodes", "2 3 1 3",
            "1 2 0 2", "1", "2", "0 0 0", "3 0 0",
            "1 3 0 1", "3", "6 0 0",
            "$EndNodes",
            "$Elements", "2 2 1 2",
            "1 2 1 1", "1 1 2",
            "1 3 1 1", "2 2 3",
            "$EndElements", "",
        ]
    )  # fmt: skip
    path = tmp_path / "parts.msh"
    path.write_text(text)
    model = sfmesh.read(path)
    assert groups_of(model) == {"CHORD": 2}


def _square_cells(etype: int) -> tuple[list, list]:
    """A 4 x 4 m square panel as one Gmsh high-order element (node ordering:
    Gmsh reference manual, "Node ordering": corners, then edge nodes edge by
    edge from the first corner, then interior nodes)."""
    c = [(0.0, 0.0, 0.0), (4.0, 0.0, 0.0), (4.0, 4.0, 0.0), (0.0, 4.0, 0.0)]
    if etype == 10:  # quad9: 4 corners, 4 mid-sides, centre
        mids = [(2.0, 0.0, 0.0), (4.0, 2.0, 0.0), (2.0, 4.0, 0.0), (0.0, 2.0, 0.0)]
        pts = [*c, *mids, (2.0, 2.0, 0.0)]
    elif etype == 16:  # quad8
        pts = [*c, (2.0, 0.0, 0.0), (4.0, 2.0, 0.0), (2.0, 4.0, 0.0), (0.0, 2.0, 0.0)]
    elif etype == 9:  # triangle6 on corners 0 1 2
        pts = [*c[:3], (2.0, 0.0, 0.0), (4.0, 2.0, 0.0), (2.0, 2.0, 0.0)]
    else:  # 21, triangle10: edge thirds, then the centroid
        a, b, d = np.array(c[0]), np.array(c[1]), np.array(c[2])
        e = [a + (b - a) / 3, a + 2 * (b - a) / 3, b + (d - b) / 3, b + 2 * (d - b) / 3,
             d + (a - d) / 3, d + 2 * (a - d) / 3, (a + b + d) / 3]  # fmt: skip
        pts = c[:3] + [tuple(p.tolist()) for p in e]
    nodes = [(2, 1, [(i + 1, p) for i, p in enumerate(pts)])]
    elements = [(2, 1, etype, [(1, list(range(1, len(pts) + 1)))])]
    return nodes, elements


@pytest.mark.parametrize(
    ("etype", "corners", "ring"), [(10, 4, 8), (16, 4, 8), (9, 3, 6), (21, 3, 9)]
)
def test_high_order_faces_give_panels_and_edge_members(
    tmp_path: Path, etype: int, corners: int, ring: int
) -> None:
    nodes, elements = _square_cells(etype)
    path = tmp_path / f"type{etype}.msh"
    path.write_text(gmsh41([], {2: [(1, [])]}, nodes, elements))
    model = sfmesh.read(path, edges_as_members=True)
    assert model.n_panels == 1 and model.panel(0).size == corners
    assert model.n_members == ring  # the sides, through their edge nodes
    merged = sfmesh.read(path, edges_as_members=True, merge_mid_nodes=True)
    assert merged.n_members == corners and merged.n_nodes == corners
    # panel area: 16 m² square, 8 m² half
    area = 16.0 if corners == 4 else 8.0
    xy = merged.nodes[merged.panel(0)][:, :2]
    shoelace = 0.5 * abs(
        np.dot(xy[:, 0], np.roll(xy[:, 1], -1)) - np.dot(xy[:, 1], np.roll(xy[:, 0], -1))
    )
    assert shoelace == pytest.approx(area, rel=1e-12)


def test_vtk_triangle_strip_becomes_triangles(tmp_path: Path) -> None:
    pv = pytest.importorskip("pyvista")
    pts = np.array([[0, 0, 0], [0, 2, 0], [2, 0, 0], [2, 2, 0], [4, 0, 0]], dtype=float)
    poly = pv.PolyData(pts, strips=np.array([5, 0, 1, 2, 3, 4]))
    path = tmp_path / "strip.vtp"
    poly.save(path)
    model = sfmesh.read(path, edges_as_members=True)
    # 5 points -> 3 triangles; 7 distinct edges (2 x 3 boundary... counted:
    # 0-1 0-2 1-2 1-3 2-3 2-4 3-4)
    assert model.n_panels == 3 and model.n_members == 7
    normals = [
        np.cross(*(model.nodes[model.panel(i)][1:] - model.nodes[model.panel(i)][0]))[2]
        for i in range(3)
    ]
    assert len({np.sign(n) for n in normals}) == 1  # one orientation for all


def test_vtk_volume_cells_are_named_when_ignored(tmp_path: Path) -> None:
    pts = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], dtype=float)
    path = tmp_path / "tet.vtu"
    meshio.write(
        path, meshio.Mesh(pts, [("tetra", np.array([[0, 1, 2, 3]])), ("line", np.array([[0, 3]]))])
    )
    with pytest.warns(sf.SpaceframeWarning, match=r"tet\.vtu: not used .*: tetra cells x1"):
        model = sfmesh.read(path)
    assert model.meta["io:ignored"] == {"tetra cells": {"count": 1, "layers": {"(no group)": 1}}}


def test_node_set_off_the_members_warns_without_api_advice(tmp_path: Path) -> None:
    # physical point 4 "LIFT" at (9, 9, 9) is on no line
    text = gmsh41(
        names=[(0, 4, "LIFT")],
        entities={0: [(1, [4])], 1: [(1, [])]},
        nodes=[
            (0, 1, [(1, (9.0, 9.0, 9.0))]),
            (1, 1, [(2, (0.0, 0.0, 0.0)), (3, (3.0, 0.0, 0.0))]),
        ],
        elements=[(0, 1, 15, [(1, [1])]), (1, 1, 1, [(2, [2, 3])])],
    )
    path = tmp_path / "lift.msh"
    path.write_text(text)
    with pytest.warns(
        SpaceframeWarning, match=r"node set 'LIFT': 1 node\(s\) are on no member"
    ) as rec:
        model = sfmesh.read(path)
    assert not any("keep_nodes" in str(w.message) for w in rec)
    assert "[9.0, 9.0, 9.0] m" in str(rec[0].message)
    assert "LIFT" not in model.node_sets


@pytest.mark.parametrize(
    ("content", "match"),
    [
        (
            "\n".join(f"word{i} text" for i in range(5000)),
            r"not a Wavefront OBJ file: line 1 starts with 'word0'",
        ),
        (
            "%PDF-1.4\n" + "x " * 60000 + "\nv 1 2\n",
            r"not a Wavefront OBJ file: line 1 starts with '%PDF-1.4'",
        ),
        ("v 0 0 0\nv " + "9" * 90000 + "\n", r"line 2: vertex needs x y z, got 'v 9{38}\.\.\.'"),
    ],
)
def test_non_obj_text_gives_a_short_message(tmp_path: Path, content: str, match: str) -> None:
    path = tmp_path / "drawing.obj"
    path.write_text(content)
    with pytest.raises(sf.ReadError, match=match) as err:
        sfmesh.read(path)
    assert len(str(err.value)) < 200 and "\n" not in str(err.value)


def test_binary_obj_and_empty_files(tmp_path: Path) -> None:
    path = tmp_path / "blob.obj"
    path.write_bytes(bytes(range(256)) * 400)
    with pytest.raises(sf.ReadError, match=r"blob\.obj: binary data, not a Wavefront OBJ"):
        sfmesh.read(path)
    empty = tmp_path / "empty.stl"
    empty.write_bytes(b"")
    with pytest.raises(sf.ReadError, match=r"empty\.stl: the file is empty"):
        sfmesh.read(empty)
    old = tmp_path / "old.msh"
    old.write_text("$NOD\n1\n1 0 0 0\n$ENDNOD\n")
    with pytest.raises(sf.ReadError, match=r"old\.msh: Gmsh's first file format \(\$NOD\)"):
        sfmesh.read(old)


def test_dome_demo_prints_nothing(tmp_path: Path, capfd: pytest.CaptureFixture[str]) -> None:
    from spaceframe.demos import write_demo

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        write_demo(tmp_path, "dome")
    out, err = capfd.readouterr()
    assert (out, err) == ("", "")
    assert sfmesh.read(tmp_path / "dome.vtu", edges_as_members=True).n_panels == 160


def test_mesh_at_site_coordinates_reads_and_heals_like_at_the_origin(tmp_path: Path) -> None:
    # A rafter in three pieces whose middle joint is drawn twice, 0.4 mm
    # apart (within the default 1 mm tolerance), plus a post; once near the
    # origin and once at national-grid coordinates (E 451234 m, N 5712345 m).
    def model_at(origin: tuple[float, float, float]) -> sf.Model:
        o = np.array(origin)
        p = [o + d for d in ([0, 0, 0], [3, 0, 0], [3.0004, 0, 0], [6, 0, 0], [6, 0, -3])]
        text = gmsh41(
            names=[(1, 1, "RAFTER")],
            entities={1: [(1, [1]), (2, [])]},
            nodes=[
                (1, 1, [(i + 1, tuple(p[i].tolist())) for i in range(4)]),
                (1, 2, [(5, tuple(p[4].tolist()))]),
            ],
            elements=[(1, 1, 1, [(1, [1, 2]), (2, [3, 4])]), (1, 2, 1, [(3, [4, 5])])],
        )
        path = tmp_path / f"site{int(origin[0])}.msh"
        path.write_text(text)
        return sfmesh.read(path)

    near, far = model_at((0.0, 0.0, 0.0)), model_at((451234.0, 5712345.0, 102.5))
    assert (far.n_nodes, far.n_members) == (near.n_nodes, near.n_members) == (4, 3)
    assert groups_of(far) == groups_of(near) == {"RAFTER": 2}
    np.testing.assert_allclose(far.nodes - [451234.0, 5712345.0, 102.5], near.nodes, atol=1e-6)
    np.testing.assert_allclose(far.lengths, near.lengths, rtol=1e-9)
    assert member_keys(near, near.groups["RAFTER"]) == {
        key((0, 0, 0), tuple(near.nodes[1])), key(tuple(near.nodes[1]), (6, 0, 0))
    }  # fmt: skip


def test_gmsh2_node_numbers_from_zero_and_cut_files(tmp_path: Path) -> None:
    # node number 0 (Gmsh's own benchmark files have it); three tags per
    # element: physical, elementary, and a partition count of 0
    text = (
        "$MeshFormat\n2 0 8\n$EndMeshFormat\n$Nodes\n3\n0 0 0 0\n1 4 0 0\n2 4 0 3\n"
        "$EndNodes\n$Elements\n2\n1 1 3 6 1 0 0 1\n2 1 3 6 1 0 1 2\n$EndElements\n"
    )
    path = tmp_path / "zero.msh"
    path.write_text(text)
    model = sfmesh.read(path)
    assert model.n_members == 2 and groups_of(model) == {"physical-1-6": 2}
    assert member_keys(model) == {key((0, 0, 0), (4, 0, 0)), key((4, 0, 0), (4, 0, 3))}
    cut = tmp_path / "cut.msh"
    cut.write_text(text.replace("2 1 3 6 1 0 1 2\n", ""))
    with pytest.raises(sf.ReadError, match=r"cut\.msh: \$Elements holds fewer than the 2"):
        sfmesh.read(cut)


def test_sparse_node_tags_need_no_table_as_long_as_the_largest(tmp_path: Path) -> None:
    # Tags need not be dense (Gmsh reference manual, "MSH file format"); a
    # tag of 10^15 must not ask for a 10^15-entry lookup table.
    big = 10**15
    text = gmsh41(
        names=[],
        entities={1: [(1, [])]},
        nodes=[(1, 1, [(1, (0.0, 0.0, 0.0)), (big, (5.0, 0.0, 0.0))])],
        elements=[(1, 1, 1, [(1, [1, big])])],
    )
    path = tmp_path / "sparse.msh"
    path.write_text(text)
    model = sfmesh.read(path)
    assert member_keys(model) == {key((0, 0, 0), (5, 0, 0))}
    binary = tmp_path / "sparse-bin.msh"
    binary.write_bytes(
        gmsh41_binary(
            names=[],
            entities={1: [(1, [])]},
            nodes=[(1, 1, [(1, (0.0, 0.0, 0.0)), (big, (5.0, 0.0, 0.0))])],
            elements=[(1, 1, 1, [(1, [1, big + 1])])],  # a tag not in $Nodes
        )
    )
    with pytest.raises(sf.ReadError, match=rf"refers to node tag {big + 1}, which is not in"):
        sfmesh.read(binary)
