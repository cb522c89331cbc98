"""Meshes as bar networks: line cells become members, surface cells load panels.

One adapter for several formats, each read by the library that keeps what a
frame needs:

- ``.msh`` Gmsh 4.1 ASCII is read here (meshio 5.3 fails on a file in which
  some entities have no physical group); other Gmsh versions go to meshio.
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
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe.errors import ReadError
from spaceframe.io._common import (
    HEAL_OPTIONS,
    RawGeometry,
    Units,
    build_model,
    check_options,
    check_path,
    count_ignored,
    parse_units,
)
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

#: Surface cells: name -> (boundary nodes in order round the face, positions
#: of the corners in that ring).  Corners first, then mid-side nodes edge by
#: edge, in meshio, VTK and Gmsh alike; "pixel" is VTK's axis-aligned quad
#: whose third and fourth nodes are swapped.
FACE_CELLS: dict[str, tuple[tuple[int, ...], tuple[int, ...]]] = {
    "triangle": ((0, 1, 2), (0, 1, 2)),
    "triangle6": ((0, 3, 1, 4, 2, 5), (0, 2, 4)),
    "triangle10": ((0, 3, 4, 1, 5, 6, 2, 7, 8), (0, 3, 6)),
    "quad": ((0, 1, 2, 3), (0, 1, 2, 3)),
    "quad8": ((0, 4, 1, 5, 2, 6, 3, 7), (0, 2, 4, 6)),
    "quad9": ((0, 4, 1, 5, 2, 6, 3, 7), (0, 2, 4, 6)),
    "pixel": ((0, 1, 3, 2), (0, 1, 2, 3)),
}

# Gmsh element type numbers (Gmsh reference manual, "MSH file format",
# element types) of the cells used here; other types are ignored.
_GMSH_TYPES: dict[int, str] = {
    1: "line",
    8: "line3",
    26: "line4",
    27: "line5",
    28: "line6",
    2: "triangle",
    9: "triangle6",
    21: "triangle10",
    3: "quad",
    16: "quad8",
    10: "quad9",
    15: "vertex",
}

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
}


@dataclass
class _Cells:
    """Cells of a mesh, grouped in blocks of one kind and size."""

    points: np.ndarray
    blocks: list[tuple[str, np.ndarray, np.ndarray]] = field(default_factory=list)
    sets: dict[str, np.ndarray] = field(default_factory=dict)
    point_sets: dict[str, np.ndarray] = field(default_factory=dict)
    ignored: dict[str, dict[str, Any]] = field(default_factory=dict)
    n_cells: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def add(self, kind: str, conn: np.ndarray, ids: np.ndarray | None = None) -> np.ndarray:
        """Add a block; returns its global cell ids (consecutive unless given)."""
        conn = np.asarray(conn, dtype=np.int64)
        if conn.ndim == 1:
            conn = conn.reshape(-1, 1)
        if ids is None:
            ids = np.arange(self.n_cells, self.n_cells + conn.shape[0], dtype=np.int64)
            self.n_cells += conn.shape[0]
        self.blocks.append((kind, conn, ids))
        return ids


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
    if kind in FACE_CELLS:
        return FACE_CELLS[kind]
    if kind.startswith("polygon"):
        ring = tuple(range(size))
        return ring, ring
    return None


def _set_names_of(sets: dict[str, np.ndarray], ids: np.ndarray) -> list[str]:
    return [name for name, members in sets.items() if np.isin(members, ids).any()]


def _to_raw(cells: _Cells, where: str) -> RawGeometry:
    pts = np.asarray(cells.points, dtype=np.float64)
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
        elif ring is not None and len(ring[0]) == size and len(ring[1]) >= 3:
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
# Gmsh 4.1 ASCII
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


def _sections(lines: list[str], where: str) -> dict[str, tuple[int, int]]:
    """Section name -> (first line, end line) of its body."""
    out: dict[str, tuple[int, int]] = {}
    i, n = 0, len(lines)
    while i < n:
        line = lines[i].strip()
        if line.startswith("$") and not line.startswith("$End"):
            name = line[1:]
            j = i + 1
            while j < n and lines[j].strip() != f"$End{name}":
                j += 1
            if j == n:
                raise ReadError(f"{where}: section ${name} (line {i + 1}) has no $End{name}")
            out.setdefault(name, (i + 1, j))
            i = j + 1
        else:
            i += 1
    return out


def _ints(lines: list[str], where: str, what: str, line_no: int) -> np.ndarray:
    try:
        return np.array(" ".join(lines).split(), dtype=np.int64)
    except ValueError as exc:
        raise ReadError(f"{where}: bad number in {what} near line {line_no}: {exc}") from None


def _read_gmsh41(path: Path, where: str) -> _Cells:
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError as exc:
        raise ReadError(f"{where}: cannot read: {exc}") from exc
    try:
        return _parse_gmsh41(text.splitlines(), where)
    except (ValueError, IndexError) as exc:
        # Counts that do not match the lines that follow (a cut or edited file).
        raise ReadError(f"{where}: malformed Gmsh 4.1 file ({type(exc).__name__}: {exc})") from None


def _parse_gmsh41(lines: list[str], where: str) -> _Cells:
    sec = _sections(lines, where)
    for need in ("Nodes", "Elements"):
        if need not in sec:
            raise ReadError(f"{where}: Gmsh file has no ${need} section")

    names: dict[tuple[int, int], str] = {}
    if "PhysicalNames" in sec:
        a, b = sec["PhysicalNames"]
        for k in range(a + 1, b):
            parts = lines[k].split(maxsplit=2)
            if len(parts) == 3:
                names[(int(parts[0]), int(parts[1]))] = parts[2].strip().strip('"')

    physical: dict[tuple[int, int], list[int]] = {}
    if "Entities" in sec:
        a, b = sec["Entities"]
        counts = [int(v) for v in lines[a].split()[:4]]
        k = a + 1
        for dim, count in enumerate(counts):
            for _ in range(count):
                tok = lines[k].split()
                # Points: tag x y z nPhys tags; others: tag 6 bounds nPhys tags ...
                at = 4 if dim == 0 else 7
                n_phys = int(tok[at])
                physical[(dim, int(tok[0]))] = [int(t) for t in tok[at + 1 : at + 1 + n_phys]]
                k += 1

    # Nodes: blocks of "dim tag parametric count", then the tags, then the coordinates.
    a, b = sec["Nodes"]
    n_blocks, n_nodes = (int(v) for v in lines[a].split()[:2])
    tags_parts, xyz_parts = [], []
    k = a + 1
    for _ in range(n_blocks):
        head = lines[k].split()
        count = int(head[3])
        tags_parts.append(_ints(lines[k + 1 : k + 1 + count], where, "$Nodes", k + 2))
        block = lines[k + 1 + count : k + 1 + 2 * count]
        try:
            coords = np.array(" ".join(block).split(), dtype=np.float64).reshape(count, -1)
        except ValueError as exc:
            raise ReadError(
                f"{where}: bad coordinates in $Nodes near line {k + 2}: {exc}"
            ) from None
        xyz_parts.append(coords[:, :3])
        k += 1 + 2 * count
    tags = np.concatenate(tags_parts) if tags_parts else np.zeros(0, dtype=np.int64)
    points = np.concatenate(xyz_parts) if xyz_parts else np.zeros((0, 3))
    if tags.size != n_nodes:
        raise ReadError(f"{where}: $Nodes announces {n_nodes} nodes but holds {tags.size}")
    lookup = np.full(int(np.max(tags)) + 1 if tags.size else 1, -1, dtype=np.int64)
    lookup[tags] = np.arange(tags.size)

    cells = _Cells(points)
    sets: dict[str, list[np.ndarray]] = {}
    a, b = sec["Elements"]
    n_blocks = int(lines[a].split()[0])
    k = a + 1
    for _ in range(n_blocks):  # one pass per Gmsh entity, not per element
        dim, tag, etype, count = (int(v) for v in lines[k].split()[:4])
        data = _ints(lines[k + 1 : k + 1 + count], where, "$Elements", k + 2)
        data = data.reshape(count, -1) if count else data.reshape(0, 1)
        node_tags = data[:, 1:]
        mapped = np.full(node_tags.shape, -1, dtype=np.int64)
        known = (node_tags >= 0) & (node_tags < lookup.size)
        mapped[known] = lookup[node_tags[known]]
        if np.any(mapped < 0):
            bad = node_tags[mapped < 0]
            raise ReadError(
                f"{where}: element block of entity ({dim}, {tag}) refers to node tag "
                f"{int(bad[0])}, which is not in $Nodes"
            )
        group_names = [
            names.get((dim, p), f"physical-{dim}-{p}") for p in physical.get((dim, tag), [])
        ]
        kind = _GMSH_TYPES.get(etype)
        if kind is None:
            for g in group_names or ["(no group)"]:
                count_ignored(cells.ignored, f"Gmsh element type {etype}", g, count)
        else:
            ids = cells.add(kind, mapped)
            for g in group_names:
                sets.setdefault(g, []).append(ids)
        k += 1 + count
    cells.sets = {name: np.concatenate(parts) for name, parts in sets.items()}
    return cells


# ---------------------------------------------------------------------------
# meshio
# ---------------------------------------------------------------------------


def _read_meshio(path: Path, where: str) -> _Cells:
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
                "; saving the mesh as Gmsh 4.1 ASCII lets spaceframe read it without meshio"
                if path.suffix.lower() == ".msh"
                else ""
            )
            raise ReadError(
                f"{where}: meshio could not read it ({type(exc).__name__}: {exc})"
                + (f"; meshio said: {said}" if said else "")
                + advice
            ) from None
    cells = _Cells(np.asarray(mesh.points, dtype=np.float64))
    block_ids = []
    for block in mesh.cells:
        block_ids.append(cells.add(str(block.type), np.asarray(block.data)))
    sets: dict[str, list[np.ndarray]] = {}
    for name, per_block in (mesh.cell_sets or {}).items():
        if name.startswith("gmsh:"):
            continue
        for ids, local in zip(block_ids, per_block, strict=False):
            if local is not None and len(local):
                sets.setdefault(name, []).append(ids[np.asarray(local, dtype=np.int64)])
    physical = mesh.cell_data.get("gmsh:physical") if mesh.cell_data else None
    if not sets and physical is not None:
        by_tag = {(int(v[1]), int(v[0])): name for name, v in (mesh.field_data or {}).items()}
        for block, ids, tags in zip(mesh.cells, block_ids, physical, strict=False):
            dim = 0 if block.type == "vertex" else (1 if _line_order(block.type, 2) else 2)
            tags = np.asarray(tags, dtype=np.int64)
            for t in np.unique(tags):
                name = by_tag.get((dim, int(t)), f"physical-{dim}-{int(t)}")
                sets.setdefault(name, []).append(ids[tags == t])
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


def _obj_index(token: str, n_vertices: int, where: str, line_no: int) -> int:
    head = token.split("/", 1)[0]
    try:
        i = int(head)
    except ValueError:
        raise ReadError(f"{where}: line {line_no}: bad vertex index {token!r}") from None
    # OBJ indices start at 1; negative ones count back from the latest vertex.
    j = n_vertices + i if i < 0 else i - 1
    if not 0 <= j < n_vertices:
        raise ReadError(
            f"{where}: line {line_no}: vertex index {i} refers to no vertex "
            f"({n_vertices} defined so far)"
        )
    return j


def _read_obj(path: Path, where: str) -> _Cells:
    """Vertices, ``l`` polylines, ``f`` faces and ``g``/``o`` groups of an OBJ file."""
    try:
        text = path.read_text(encoding="utf-8", errors="replace")
    except OSError as exc:
        raise ReadError(f"{where}: cannot read: {exc}") from exc
    xyz: list[list[str]] = []
    xyz_lines: list[int] = []
    polylines: list[list[int]] = []
    faces: list[list[int]] = []
    line_owner: list[int] = []
    face_owner: list[int] = []
    owner_groups: list[tuple[str, ...]] = []
    current: tuple[str, ...] = ()
    obj_name: tuple[str, ...] = ()
    ignored: dict[str, dict[str, Any]] = {}
    pending = ""
    for line_no, raw_line in enumerate(text.splitlines(), start=1):
        line = pending + raw_line.split("#", 1)[0]
        if line.endswith("\\"):
            pending = line[:-1] + " "
            continue
        pending = ""
        tok = line.split()
        if not tok:
            continue
        key = tok[0]
        if key == "v":
            if len(tok) < 4:
                raise ReadError(
                    f"{where}: line {line_no}: vertex needs x y z, got {line.strip()!r}"
                )
            xyz.append(tok[1:4])
            xyz_lines.append(line_no)
        elif key in ("l", "f"):
            ids = [_obj_index(t, len(xyz), where, line_no) for t in tok[1:]]
            owner = len(owner_groups)
            owner_groups.append(current + obj_name)
            if key == "l":
                if len(ids) >= 2:
                    polylines.append(ids)
                    line_owner.append(owner)
            elif len(ids) >= 3:
                faces.append(ids)
                face_owner.append(owner)
        elif key == "g":
            current = tuple(t for t in tok[1:] if t != "default")
        elif key == "o":
            obj_name = tuple(tok[1:2])
        elif key in ("vt", "vn", "vp", "s", "usemtl", "mtllib"):
            continue
        else:
            count_ignored(ignored, f"OBJ statement {key!r}", " ".join(current) or "(no group)")
    try:
        points = np.array(xyz, dtype=np.float64).reshape(-1, 3)
    except ValueError:
        for values, line_no in zip(xyz, xyz_lines, strict=True):
            try:
                [float(v) for v in values]
            except ValueError:
                raise ReadError(f"{where}: line {line_no}: bad vertex {values!r}") from None
        raise
    cells = _Cells(points)
    cells.ignored = ignored
    # Polylines of any length become one block per length (one array each).
    for kind, items, owners in (
        ("poly_line", polylines, line_owner),
        ("polygon", faces, face_owner),
    ):
        by_size: dict[int, list[int]] = {}
        for k, ids in enumerate(items):
            by_size.setdefault(len(ids), []).append(k)
        for size, ks in by_size.items():
            conn = np.array([items[k] for k in ks], dtype=np.int64).reshape(-1, size)
            cells.add(kind, conn, np.asarray([owners[k] for k in ks], dtype=np.int64))
    cells.n_cells = len(owner_groups)
    sets: dict[str, list[int]] = {}
    for owner, names in enumerate(owner_groups):
        for name in names:
            sets.setdefault(name, []).append(owner)
    cells.sets = {name: np.asarray(ids, dtype=np.int64) for name, ids in sets.items()}
    return cells


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
    p = check_path(path)
    where = str(p)
    check_options(where, heal_options, HEAL_OPTIONS)
    suffix = p.suffix.lower()
    if group_field is not None and suffix not in _VTK_SUFFIXES:
        raise ReadError(f"{where}: group_field applies to VTK files only")
    if suffix == ".msh":
        header = _gmsh_header(p)
        if header is None:
            raise ReadError(f"{where}: not a Gmsh mesh (no $MeshFormat at the start)")
        version, file_type = header
        own = version.startswith("4") and file_type == 0
        cells = _read_gmsh41(p, where) if own else _read_meshio(p, where)
    elif suffix in _VTK_SUFFIXES:
        cells = _read_vtk(p, where, group_field)
    elif suffix == ".obj":
        cells = _read_obj(p, where)
    else:
        cells = _read_meshio(p, where)
    raw = _to_raw(cells, where)

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
        where=where,
        units=file_units,
        tolerance=tolerance,
        heal=heal,
        heal_options=heal_options,
        edges_as_members=edges_as_members,
        meta=dict(cells.extra),
        mid_member_key="mesh:mid_member_nodes",
        merge_mid_nodes=merge_mid_nodes,
        no_members_hint=hint,
    )
