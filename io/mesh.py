"""Meshes as bar networks: line cells become members, surface cells load panels.

One adapter for several formats, each read by the library that keeps what a
frame needs:

- ``.msh`` Gmsh 4.1 (text and binary) and 2.x are read here, by
  :mod:`spaceframe.io._gmsh` (meshio 5.3 fails on 4.1 files in which some
  entities have no physical group or that are partitioned, and loses
  numeric groups of binary files); Gmsh 4.0 goes to meshio.  Groups follow
  the same rules whatever the save format.
- ``.vtu``, ``.vtk``, ``.vtp`` are read through VTK (pyvista): meshio drops
  VTK poly-line cells from ``.vtu`` and stops the interpreter on legacy
  POLYDATA ``.vtk`` files.
- ``.obj`` is read here: meshio drops its ``l`` (line) statements and VTK's
  reader keeps the lines but not their groups.
- ``.inp`` (Abaqus) and ``.stl`` go to meshio.

Higher-order lines are split into straight members through their interior
nodes.  A mesher that subdivides one line into several elements leaves nodes
where exactly two collinear members meet; they are reported in
``model.meta["mesh:mid_member_nodes"]`` and ``merge_mid_nodes=True`` merges
such chains back into single members.  Gmsh physical groups and meshio
``cell_sets`` become member and panel groups, ``point_sets`` and physical
points node sets.  Mesh files carry no units: metres unless ``units=`` says
otherwise.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe.errors import ReadError, SpaceframeWarning
from spaceframe.io._build import build_model
from spaceframe.io._cells import _Cells
from spaceframe.io._common import Units, parse_units
from spaceframe.io._gmsh import (
    GMSH_TYPES,
    HIGH_ORDER_FACES,
    gmsh_dim,
    read_gmsh2,
    read_gmsh41,
)
from spaceframe.io._obj import _read_obj
from spaceframe.io._options import read_settings
from spaceframe.io._raw import RawGeometry, count_ignored, describe_ignored
from spaceframe.model import Model

__all__ = ["FACE_CELLS", "LINE_CELLS", "read"]

#: Line cells: name -> order of the nodes along the line.  meshio, VTK and
#: Gmsh all store the two end nodes first, then the interior nodes from the
#: first end to the second.
LINE_CELLS: dict[str, tuple[int, ...]] = {
    "line": (0, 1),
    "line3": (0, 2, 1),
    "line4": (0, 2, 3, 1),
    "line5": (0, 2, 3, 4, 1),
    "line6": (0, 2, 3, 4, 5, 1),
}

#: Surface cells: name -> (nodes per cell, boundary nodes in order round the
#: face, positions of the corners in that ring).  Corners first, then the
#: nodes on each edge from its first corner to its second, edge by edge, then
#: nodes inside the face (not on the ring), in meshio, VTK and Gmsh alike
#: (Gmsh reference manual, "Node ordering"; VTK's vtkCellType.h cells
#: 22, 23, 28, 34).  "pixel" is VTK's axis-aligned quad whose third and
#: fourth nodes are swapped.  Members along the ring run through the edge
#: nodes; panels take the corners.
FACE_CELLS: dict[str, tuple[int, tuple[int, ...], tuple[int, ...]]] = {
    "triangle": (3, (0, 1, 2), (0, 1, 2)),
    "quad": (4, (0, 1, 2, 3), (0, 1, 2, 3)),
    "pixel": (4, (0, 1, 3, 2), (0, 1, 2, 3)),
    "triangle7": (7, (0, 3, 1, 4, 2, 5), (0, 2, 4)),  # VTK biquadratic triangle
}


def _high_order_ring(corners: int, order: int) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """Ring of a Gmsh-ordered face: corner k, then its edge's order-1 nodes."""
    ring: list[int] = []
    for k in range(corners):
        ring.append(k)
        start = corners + k * (order - 1)
        ring.extend(range(start, start + order - 1))
    return tuple(ring), tuple(range(0, corners * order, order))


_NODES_OF = {name: n for name, n in GMSH_TYPES.values()}
for _name, (_corners, _order) in HIGH_ORDER_FACES.items():
    FACE_CELLS[_name] = (_NODES_OF[_name], *_high_order_ring(_corners, _order))

# VTK cell type numbers (vtkCellType.h) of the cells used here; "poly_line"
# and "polygon" have any number of nodes.
_VTK_TYPES: dict[int, str] = {
    1: "vertex",
    3: "line",
    4: "poly_line",
    21: "line3",
    35: "line4",
    68: "lagrange_curve",
    5: "triangle",
    7: "polygon",
    8: "pixel",
    9: "quad",
    22: "triangle6",
    23: "quad8",
    28: "quad9",
    34: "triangle7",
    # Read as the triangles they stand for (see _strip_triangles).
    6: "triangle_strip",
    # Not used, named when counted as ignored: volumes, and cells whose
    # nodes are not all on the boundary in the order above (Bezier control
    # points lie off the curve; Lagrange surfaces order edges differently).
    2: "poly_vertex",
    10: "tetra",
    11: "voxel",
    12: "hexahedron",
    13: "wedge",
    14: "pyramid",
    24: "quadratic tetra",
    25: "quadratic hexahedron",
    26: "quadratic wedge",
    27: "quadratic pyramid",
    30: "quadratic-linear quad",
    36: "quadratic polygon",
    42: "polyhedron",
    69: "Lagrange triangle",
    70: "Lagrange quadrilateral",
    71: "Lagrange tetrahedron",
    72: "Lagrange hexahedron",
    75: "Bezier curve",
    76: "Bezier triangle",
    77: "Bezier quadrilateral",
}


def _strip_triangles(strips: np.ndarray, ids: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Triangles of VTK triangle strips of one length, and the strip each came from.

    A strip of points p0 p1 p2 p3 ... is the triangles (p0 p1 p2), (p2 p1 p3),
    (p2 p3 p4), ...: every second triangle is flipped so that all keep one
    orientation (VTK's vtkTriangleStrip).
    """
    _, size = strips.shape
    j = np.arange(size - 2)
    tri = np.stack([strips[:, j], strips[:, j + 1], strips[:, j + 2]], axis=2)
    odd = j % 2 == 1
    tri[:, odd, 0], tri[:, odd, 1] = strips[:, j[odd] + 1], strips[:, j[odd]]
    return tri.reshape(-1, 3), np.repeat(ids, size - 2)



# ---------------------------------------------------------------------------
# Cells -> raw geometry
# ---------------------------------------------------------------------------


def _line_order(kind: str, size: int) -> tuple[int, ...] | None:
    if kind in LINE_CELLS:
        return LINE_CELLS[kind]
    if kind == "poly_line":
        return tuple(range(size))
    if kind == "lagrange_curve" or (kind.startswith("line") and kind[4:].isdigit()):
        return (0, *range(2, size), 1)
    return None


def _face_ring(kind: str, size: int) -> tuple[tuple[int, ...], tuple[int, ...]] | None:
    """(ring, corner positions in the ring) of a surface cell, None if not one."""
    entry = FACE_CELLS.get(kind)
    if entry is not None:
        return (entry[1], entry[2]) if entry[0] == size else None
    if kind.startswith("polygon"):
        ring = tuple(range(size))
        return ring, ring
    return None


def _set_names_of(sets: dict[str, np.ndarray], ids: np.ndarray) -> list[str]:
    return [name for name, members in sets.items() if np.isin(members, ids).any()]


def _to_raw(cells: _Cells, where: str) -> RawGeometry:
    pts = np.asarray(cells.points, dtype=np.float64)
    if pts.size == 0:
        raise ReadError(f"{where}: the mesh holds no points")
    if pts.ndim != 2 or pts.shape[1] not in (2, 3):
        raise ReadError(f"{where}: points have shape {pts.shape}, expected (n, 3)")
    if pts.shape[1] == 2:
        pts = np.column_stack([pts, np.zeros(pts.shape[0])])
    seg, seg_owner = [], []
    face_nodes, face_sizes, face_owner = [], [], []
    edges, edge_face = [], []
    vertex_ids, vertex_nodes = [], []
    n_face = 0
    ignored = dict(cells.ignored)
    for kind, conn, ids in cells.blocks:  # one pass per block of cells
        k, size = conn.shape
        if k == 0:
            continue
        bad = np.flatnonzero(((conn < 0) | (conn >= pts.shape[0])).any(axis=1))
        if bad.size:
            i = int(bad[0])
            raise ReadError(
                f"{where}: {kind} cell {int(ids[i])} refers to point(s) {conn[i].tolist()}, "
                f"outside 0..{pts.shape[0] - 1}"
            )
        order = _line_order(kind, size)
        ring = _face_ring(kind, size)
        if order is not None and len(order) == size and size >= 2:
            chain = conn[:, list(order)]
            seg.append(np.stack([chain[:, :-1], chain[:, 1:]], axis=2).reshape(-1, 2))
            seg_owner.append(np.repeat(ids, size - 1))
        elif ring is not None and len(ring[1]) >= 3:
            ring_nodes = conn[:, list(ring[0])]
            corners = ring_nodes[:, list(ring[1])]
            face_nodes.append(corners.reshape(-1))
            face_sizes.append(np.full(k, corners.shape[1], dtype=np.int64))
            face_owner.append(ids)
            r = ring_nodes.shape[1]
            nxt = np.roll(ring_nodes, -1, axis=1)
            edges.append(np.stack([ring_nodes, nxt], axis=2).reshape(-1, 2))
            edge_face.append(np.repeat(np.arange(n_face, n_face + k), r))
            n_face += k
        elif kind in ("vertex", "poly_vertex"):
            vertex_ids.append(np.repeat(ids, size))
            vertex_nodes.append(conn.reshape(-1))
        else:
            layers = _set_names_of(cells.sets, ids) or ["(no group)"]
            for layer in layers:
                count_ignored(ignored, f"{kind} cells", layer, k)

    def cat(parts: list[np.ndarray], shape: tuple[int, ...]) -> np.ndarray:
        return np.concatenate(parts).astype(np.int64) if parts else np.zeros(shape, np.int64)

    sizes = cat(face_sizes, (0,))
    node_sets = {name: np.asarray(v, dtype=np.int64) for name, v in cells.point_sets.items()}
    if vertex_ids:
        vid, vnode = cat(vertex_ids, (0,)), cat(vertex_nodes, (0,))
        for name, members in cells.sets.items():  # one pass per set
            hit = np.isin(vid, members)
            if hit.any():
                prev = node_sets.get(name, np.zeros(0, dtype=np.int64))
                node_sets[name] = np.union1d(prev, vnode[hit])
    return RawGeometry(
        points=pts,
        segments=cat(seg, (0, 2)),
        segment_owner=cat(seg_owner, (0,)),
        face_nodes=cat(face_nodes, (0,)),
        face_offsets=np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64),
        face_owner=cat(face_owner, (0,)),
        edges=cat(edges, (0, 2)),
        edge_face=cat(edge_face, (0,)),
        sets={k: np.asarray(v, dtype=np.int64) for k, v in cells.sets.items()},
        node_sets=node_sets,
        ignored=ignored,
    )


# ---------------------------------------------------------------------------
# Gmsh
# ---------------------------------------------------------------------------


def _gmsh_header(path: Path) -> tuple[str, int] | None:
    """(version, file type 0 = ASCII / 1 = binary) from $MeshFormat, None if absent."""
    with open(path, "rb") as fh:
        head = fh.read(256).decode("latin-1", errors="replace").split()
    if len(head) >= 3 and head[0] == "$MeshFormat":
        try:
            return head[1], int(head[2])
        except ValueError:
            return None
    return None


def _read_gmsh41(path: Path, where: str, binary: bool) -> _Cells:
    mesh = read_gmsh41(path, where, binary)
    cells = _Cells(mesh.points)
    for kind, conn in mesh.blocks:
        cells.add(kind, conn)
    cells.sets = mesh.sets
    return cells


# ---------------------------------------------------------------------------
# meshio
# ---------------------------------------------------------------------------


def _gmsh_cells_from_meshio(mesh: Any, cells: _Cells) -> None:
    """Gmsh 2.x / 4.0 cells and groups (read by read_gmsh2 or by meshio), by the 4.1 rules.

    Groups come from the "gmsh:physical" tags (named by $PhysicalNames, else
    "physical-<dim>-<tag>"), named or not; tag 0 means no physical group.
    MSH 2 writes an element once per physical group it belongs to: copies
    (same nodes, same elementary entity) become one cell in all their groups.
    """
    physical = (mesh.cell_data or {}).get("gmsh:physical")
    entity = (mesh.cell_data or {}).get("gmsh:geometrical")
    by_tag = {(int(v[1]), int(v[0])): name for name, v in (mesh.field_data or {}).items()}
    # Blocks of one kind together: MSH 2 may write an element's copies in
    # different blocks (binary files start a block per physical group).
    parts: dict[str, list[tuple[np.ndarray, np.ndarray, np.ndarray]]] = {}
    for b, block in enumerate(mesh.cells):  # one pass per block of cells
        conn = np.asarray(block.data, dtype=np.int64).reshape(len(block.data), -1)
        k = conn.shape[0]
        tags = np.asarray(physical[b], dtype=np.int64) if physical else np.zeros(k, np.int64)
        ent = np.asarray(entity[b], dtype=np.int64) if entity else np.zeros(k, np.int64)
        parts.setdefault(str(block.type), []).append((conn, tags, ent))
    sets: dict[str, list[np.ndarray]] = {}
    for kind, pieces in parts.items():  # one pass per kind of cell
        conn = np.concatenate([c for c, _, _ in pieces])
        tags = np.concatenate([t for _, t, _ in pieces])
        ent = np.concatenate([e for _, _, e in pieces])
        key = np.column_stack([ent, conn])
        _, first, inverse = np.unique(key, axis=0, return_index=True, return_inverse=True)
        inverse = inverse.reshape(-1)
        order = np.argsort(first, kind="stable")  # keep the file's order
        rank = np.empty_like(order)
        rank[order] = np.arange(order.size)
        ids = cells.add(kind, conn[np.sort(first)])
        dim = gmsh_dim(kind)
        for t in np.unique(tags[tags != 0]).tolist():
            name = by_tag.get((dim, int(t)), f"physical-{dim}-{int(t)}")
            sets.setdefault(name, []).append(np.unique(ids[rank[inverse[tags == t]]]))
    cells.sets = {name: np.unique(np.concatenate(chunks)) for name, chunks in sets.items()}


def _read_meshio(path: Path, where: str, gmsh: bool = False) -> _Cells:
    try:
        import meshio
    except ImportError as exc:
        raise ReadError(f"{where}: reading {path.suffix} needs the meshio package ({exc})") from exc
    with tempfile.TemporaryFile("w+", encoding="utf-8") as sink:
        try:
            # meshio prints warnings and, for some files, calls sys.exit:
            # keep both behind this adapter.
            with (
                contextlib.redirect_stdout(sink),
                contextlib.redirect_stderr(sink),
                warnings.catch_warnings(),
                np.errstate(all="ignore"),
            ):
                warnings.simplefilter("ignore")
                mesh = meshio.read(str(path))
        except (Exception, SystemExit) as exc:  # a library failure becomes a ReadError
            sink.seek(0)
            said = " ".join(sink.read().split())[:500]
            advice = (
                "; saving the mesh as Gmsh 4.1 (text or binary) lets spaceframe read it "
                "without meshio"
                if path.suffix.lower() == ".msh"
                else ""
            )
            raise ReadError(
                f"{where}: meshio could not read it ({type(exc).__name__}: {str(exc)[:200]})"
                + (f"; meshio said: {said}" if said else "")
                + advice
            ) from None
    cells = _Cells(np.asarray(mesh.points, dtype=np.float64))
    if gmsh:
        _gmsh_cells_from_meshio(mesh, cells)
    else:
        block_ids = [cells.add(str(block.type), np.asarray(block.data)) for block in mesh.cells]
        sets: dict[str, list[np.ndarray]] = {}
        for name, per_block in (mesh.cell_sets or {}).items():
            for ids, local in zip(block_ids, per_block, strict=False):
                if local is not None and len(local):
                    sets.setdefault(name, []).append(ids[np.asarray(local, dtype=np.int64)])
        cells.sets = {name: np.concatenate(parts) for name, parts in sets.items()}
    cells.point_sets = {
        name: np.asarray(ids, dtype=np.int64) for name, ids in (mesh.point_sets or {}).items()
    }
    return cells


# ---------------------------------------------------------------------------
# VTK (pyvista)
# ---------------------------------------------------------------------------


@contextlib.contextmanager
def _quiet_vtk() -> Iterator[None]:
    """Keep VTK from printing to the terminal; failures show as an empty result."""
    from vtkmodules.vtkCommonCore import vtkLogger, vtkObject

    shown = vtkObject.GetGlobalWarningDisplay()
    cutoff = vtkLogger.GetCurrentVerbosityCutoff()
    vtkObject.GlobalWarningDisplayOff()
    vtkLogger.SetStderrVerbosity(vtkLogger.VERBOSITY_OFF)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            yield
    finally:
        vtkObject.SetGlobalWarningDisplay(shown)
        vtkLogger.SetStderrVerbosity(vtkLogger.ConvertToVerbosity(cutoff))


def _read_vtk(path: Path, where: str, group_field: str | None) -> _Cells:
    try:
        import pyvista as pv
    except ImportError as exc:
        raise ReadError(f"{where}: reading {path.suffix} needs pyvista and vtk ({exc})") from exc
    try:
        with _quiet_vtk():
            data = pv.read(str(path))
    except Exception as exc:
        raise ReadError(f"{where}: VTK could not read it ({type(exc).__name__}: {exc})") from None
    if isinstance(data, pv.MultiBlock):
        data = data.combine()
    if data is None or data.n_points == 0:
        raise ReadError(f"{where}: VTK read no points from it (not a VTK file, or empty)")
    grid = data if isinstance(data, pv.UnstructuredGrid) else data.cast_to_unstructured_grid()
    cells = _Cells(np.asarray(grid.points, dtype=np.float64))
    cells.extra["mesh:cell_arrays"] = list(grid.cell_data.keys())
    types = np.asarray(grid.celltypes, dtype=np.int64)
    offsets = np.asarray(
        grid.cell_offsets if hasattr(grid, "cell_offsets") else grid.offset, dtype=np.int64
    )
    conn = np.asarray(grid.cell_connectivity, dtype=np.int64)
    sizes = np.diff(offsets)
    cells.n_cells = types.size
    kinds: Any = np.unique(np.stack([types, sizes], axis=1), axis=0) if types.size else []
    for vtype, size in kinds:  # one pass per (cell type, size) pair
        ids = np.flatnonzero((types == vtype) & (sizes == size))
        kind = _VTK_TYPES.get(int(vtype), f"VTK cell type {int(vtype)}")
        block = conn[offsets[ids][:, None] + np.arange(size)]
        if kind == "triangle_strip" and size >= 3:
            kind, (block, ids) = "triangle", _strip_triangles(block, ids)
        cells.add(kind, block, ids)
    if group_field is not None:
        if group_field not in grid.cell_data:
            have = ", ".join(grid.cell_data.keys()) or "none"
            raise ReadError(f"{where}: no cell array {group_field!r} (cell arrays: {have})")
        values = np.asarray(grid.cell_data[group_field])
        if values.ndim != 1:
            raise ReadError(f"{where}: cell array {group_field!r} has {values.shape[1]} components")
        uniq, inverse = np.unique(values, return_inverse=True)
        inverse = inverse.reshape(-1)
        for j, value in enumerate(uniq.tolist()):
            name = (
                str(int(value)) if isinstance(value, float) and value.is_integer() else str(value)
            )
            cells.sets[name] = np.flatnonzero(inverse == j)
    return cells


# ---------------------------------------------------------------------------
# Wavefront OBJ
# ---------------------------------------------------------------------------


# ---------------------------------------------------------------------------
# Entry point
# ---------------------------------------------------------------------------

_VTK_SUFFIXES = frozenset({".vtu", ".vtk", ".vtp"})


def read(
    path: str | os.PathLike[str],
    *,
    units: str | None = None,
    tolerance: float | None = None,
    heal: bool = True,
    edges_as_members: bool = False,
    merge_mid_nodes: bool = False,
    group_field: str | None = None,
    **heal_options: bool,
) -> Model:
    """Read a mesh file into a Model.

    Parameters
    ----------
    path : str or path-like
        ``.msh``, ``.vtu``, ``.vtk``, ``.vtp``, ``.obj``, ``.inp`` or ``.stl``.
    units : str, optional
        Length unit of the coordinates (meshes carry none); default metres.
    tolerance : float, optional
        Healing tolerance in metres (default GEOMETRY_TOLERANCE).
    heal : bool
        Heal the bar network (see :func:`spaceframe.geometry.heal`).
    edges_as_members : bool
        Also make members of the unique edges of surface cells (a
        triangulated canopy or dome becomes a bar network).
    merge_mid_nodes : bool
        Merge chains of members through mid-member nodes (exactly two
        collinear members) back into single members.  Nodes in node sets,
        panel corners and nodes where the group changes are kept.
    group_field : str, optional
        For VTK files: an integer or string cell array whose values become
        groups (VTK has no named sets).
    **heal_options : bool
        Healing step switches, e.g. ``split_crossings=True``.

    Returns
    -------
    Model
        Members without area or E; ``meta`` holds "source", "units",
        "heal:report", "io:ignored", "io:extents" and
        "mesh:mid_member_nodes" (``{"count", "merged", "nodes", ...}``).

    Raises
    ------
    ReadError
        Missing or unreadable file, no line cells (and no faces taken as
        edges), or a bad option.
    """
    settings = read_settings(
        path, tolerance=tolerance, heal=heal, edges_as_members=edges_as_members,
        heal_options=heal_options,
    )
    p, where = settings.path, settings.where
    suffix = p.suffix.lower()
    if group_field is not None and suffix not in _VTK_SUFFIXES:
        raise ReadError(f"{where}: group_field applies to VTK files only")
    if p.stat().st_size == 0:
        raise ReadError(f"{where}: the file is empty")
    if suffix == ".msh":
        header = _gmsh_header(p)
        if header is None:
            with open(p, "rb") as fh:
                old = fh.read(8).startswith(b"$NOD")
            raise ReadError(
                f"{where}: Gmsh's first file format ($NOD), not read here: save as MSH 4.1"
                if old
                else f"{where}: not a Gmsh mesh (no $MeshFormat at the start)"
            )
        version, file_type = header
        if version == "4.1":
            cells = _read_gmsh41(p, where, binary=file_type == 1)
        elif version.startswith("2"):
            msh2 = read_gmsh2(p, where, binary=file_type == 1)
            cells = _Cells(np.asarray(msh2.points, dtype=np.float64))
            _gmsh_cells_from_meshio(msh2, cells)
        else:  # 4.0 and any other version meshio knows
            cells = _read_meshio(p, where, gmsh=True)
    elif suffix in _VTK_SUFFIXES:
        cells = _read_vtk(p, where, group_field)
    elif suffix == ".obj":
        cells = _read_obj(p, where)
    else:
        cells = _read_meshio(p, where)
    raw = _to_raw(cells, where)
    if raw.ignored and (raw.segments.shape[0] or (edges_as_members and raw.edges.shape[0])):
        # Shown, not only kept in meta: volumes and unknown cells are skipped.
        kinds = list(raw.ignored)
        more = f"; and {len(kinds) - 4} more kinds" if len(kinds) > 4 else ""
        warnings.warn(
            f"{where}: not used (no members or panels are made of them): "
            f"{describe_ignored(raw.ignored, kinds[:4])}{more}",
            SpaceframeWarning,
            stacklevel=2,
        )

    if units is None:
        file_units = Units("m", 1.0, "assumed: mesh files carry no units")
    else:
        name, scale = parse_units(units, where=where)
        file_units = Units(name, scale, "units= option")
    hint = (
        f"the mesh has {raw.n_faces} surface cells: read with edges_as_members=True "
        "to make members of their edges"
        if raw.n_faces and not edges_as_members
        else ""
    )
    return build_model(
        raw,
        settings,
        units=file_units,
        meta=dict(cells.extra),
        mid_member_key="mesh:mid_member_nodes",
        merge_mid_nodes=merge_mid_nodes,
        no_members_hint=hint,
    )
