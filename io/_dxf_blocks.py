"""Entities of a DXF model space into raw geometry, block references expanded.

Every straight piece becomes a segment, POINT a marker, 3DFACE, MESH and
polyface POLYLINE faces; block references are expanded recursively with
their transforms.  What is not read is counted by kind and layer.
"""

from __future__ import annotations

import contextlib
import functools
import math
from typing import Any

import numpy as np

from spaceframe.errors import ReadError
from spaceframe.io._raw import RawGeometry, count_ignored

__all__ = ["CURVE_KINDS"]

#: Entities (and parts of entities) that are curves, not straight members.
#: Finding them in a drawing of centrelines is worth a warning.
CURVE_KINDS = (
    "ARC",
    "CIRCLE",
    "ELLIPSE",
    "SPLINE",
    "HELIX",
    "bulged polyline segment",
    "curve-fit POLYLINE",
)

# Block nesting deeper than this is a block that (indirectly) inserts
# itself; real drawings nest a handful of levels.
_MAX_BLOCK_DEPTH = 32

# Entity kinds that are never geometry of the frame and are passed over
# without being listed as ignored (they are annotation or structure).
_SILENT = frozenset({"ATTDEF", "ATTRIB", "VIEWPORT", "SEQEND", "VERTEX"})

# What a broken entity of a damaged file raises inside ezdxf: besides its
# own DXFError (which includes DXFAttributeError for an entity whose type
# name was damaged), the plain errors of bad values, missing tags and
# degenerate transforms.
_ENTITY_ERRORS: tuple[type[Exception], ...] = (
    AttributeError,
    ArithmeticError,
    IndexError,
    KeyError,
    TypeError,
    ValueError,
)


@functools.lru_cache(maxsize=1)
def _broken_entity_errors() -> tuple[type[Exception], ...]:
    """The error class of ezdxf and the plain ones a broken entity raises."""
    from ezdxf.lldxf.const import DXFError

    return (DXFError, *_ENTITY_ERRORS)


def _kind_of(e: Any) -> str:
    """The type name of an entity that may be damaged."""
    try:
        return str(e.dxftype())
    except _ENTITY_ERRORS:
        return type(e).__name__


def _layer_of(e: Any) -> str:
    """The layer of an entity that may be damaged ("?" when it has none)."""
    try:
        return str(e.dxf.layer)
    except _ENTITY_ERRORS:
        pass
    # An entity with a damaged type name is kept by ezdxf as raw tags.
    with contextlib.suppress(*_ENTITY_ERRORS):
        for tags in e.xtags.subclasses:
            for tag in tags:
                if tag.code == 8:
                    return str(tag.value)
    return "?"


class _Collector:
    """Walks the model space once, appending coordinates to flat Python lists.

    One list append per coordinate and one array build at the end: per-entity
    numpy arrays would cost more than ezdxf's parsing.
    """

    def __init__(self, where: str, keep_layer: Any, layer_names: dict[str, str]) -> None:
        self.where = where
        self.keep_layer = keep_layer
        self.layer_names = layer_names  # lower-case -> spelling in the layer table
        self.xyz: list[float] = []
        self.seg: list[int] = []
        self.seg_owner: list[int] = []
        self.face_nodes: list[int] = []
        self.face_sizes: list[int] = []
        self.face_owner: list[int] = []
        self.edges: list[int] = []
        self.edge_face: list[int] = []
        self.marker_xyz: list[float] = []
        self.marker_layer: list[str] = []
        self.owner_layer: list[int] = []
        self.layer_index: dict[str, int] = {}  # raw spelling -> index, -1 filtered out
        self.layers: list[str] = []  # canonical names by index
        self._canon_index: dict[str, int] = {}
        self.ignored: dict[str, dict[str, Any]] = {}
        self.filtered: dict[str, int] = {}
        # Block references with z-scale 0 read with z-scale 1 (their block
        # is flat), by block name.
        self.zscale0: dict[str, int] = {}
        self._nested_zero: dict[str, list[int]] = {}  # by block name, see _zero_nested
        self._zero_ids: set[int] = set()  # nested copies whose z-scale was 0

    # -- helpers
    def _layer(self, name: str) -> int:
        idx = self.layer_index.get(name)
        if idx is None:
            low = name.lower()
            canon = self.layer_names.get(low, name)
            if not self.keep_layer(canon):
                idx = -1
            else:
                idx = self._canon_index.get(low)
                if idx is None:
                    idx = self._canon_index[low] = len(self.layers)
                    self.layers.append(canon)
            self.layer_index[name] = idx
        return idx

    def _owner(self, layer_idx: int) -> int:
        self.owner_layer.append(layer_idx)
        return len(self.owner_layer) - 1

    def _point(self, p: Any) -> int:
        self.xyz.extend((p[0], p[1], p[2]))
        return len(self.xyz) // 3 - 1

    def _ignore(self, kind: str, layer: str, n: int = 1) -> None:
        count_ignored(self.ignored, kind, self.layer_names.get(layer.lower(), layer), n)

    # -- traversal
    def visit(self, entities: Any, inherit: str | None, depth: int) -> None:
        broken = _broken_entity_errors()
        isfinite = math.isfinite
        for e in entities:
            try:
                kind = e.dxftype()
                layer = e.dxf.layer
            except broken as exc:
                # A damaged type name leaves an entity without DXF
                # attributes: skipped and listed like any broken entity.
                self._ignore(f"damaged {_kind_of(e)} ({type(exc).__name__})", _layer_of(e))
                continue
            if inherit is not None and layer == "0":
                # Entities on layer 0 inside a block take the insert's layer.
                layer = inherit
            if kind == "LINE":
                li = self._layer(layer)
                if li < 0:
                    self._filtered(layer)
                    continue
                dxf, xyz = e.dxf, self.xyz
                n0 = len(xyz)
                try:
                    xyz.extend(dxf.start)
                    xyz.extend(dxf.end)
                except broken as exc:
                    del xyz[n0:]
                    self._ignore(f"damaged LINE ({type(exc).__name__})", layer)
                    continue
                if not isfinite(sum(xyz[-6:])):
                    del xyz[-6:]
                    self._ignore("damaged LINE (coordinate not a finite number)", layer)
                    continue
                k = len(xyz) // 3
                self.seg.extend((k - 2, k - 1))
                self.seg_owner.append(self._owner(li))
            elif kind == "INSERT":
                self._insert(e, layer, depth)
            elif kind in _SILENT:
                continue
            else:
                li = self._layer(layer)
                if li < 0:
                    self._filtered(layer)
                    continue
                mark = self._mark()
                try:
                    self._other(e, kind, layer, li)
                except broken as exc:
                    # One broken entity of a damaged file is skipped and
                    # listed; the rest of the drawing is still read.  What
                    # it had added before failing is taken back.
                    self._rollback(mark)
                    self._ignore(f"damaged {kind} ({type(exc).__name__})", layer)
                    continue
                if not self._finite_since(mark):
                    self._rollback(mark)
                    self._ignore(f"damaged {kind} (coordinate not a finite number)", layer)

    def _mark(self) -> tuple[int, ...]:
        return (
            len(self.xyz),
            len(self.seg),
            len(self.seg_owner),
            len(self.face_nodes),
            len(self.face_sizes),
            len(self.face_owner),
            len(self.edges),
            len(self.edge_face),
            len(self.marker_xyz),
            len(self.marker_layer),
            len(self.owner_layer),
        )

    def _finite_since(self, mark: tuple[int, ...]) -> bool:
        # A sum is finite only if every term is (short of overflow near
        # 1e308, which a drawing of a frame does not reach).
        return math.isfinite(sum(self.xyz[mark[0] :])) and math.isfinite(
            sum(self.marker_xyz[mark[8] :])
        )

    def _counts(self) -> tuple[dict[str, Any], dict[str, int], dict[str, int]]:
        ignored = {
            k: {"count": v["count"], "layers": dict(v["layers"])} for k, v in self.ignored.items()
        }
        return ignored, dict(self.filtered), dict(self.zscale0)

    def _rollback(
        self,
        mark: tuple[int, ...],
        counts: tuple[dict[str, Any], dict[str, int], dict[str, int]] | None = None,
    ) -> None:
        """Take back what was added since ``mark`` (and the counts, if given)."""
        if counts is not None:
            self.ignored, self.filtered, self.zscale0 = counts
        lists: tuple[list[Any], ...] = (
            self.xyz,
            self.seg,
            self.seg_owner,
            self.face_nodes,
            self.face_sizes,
            self.face_owner,
            self.edges,
            self.edge_face,
            self.marker_xyz,
            self.marker_layer,
            self.owner_layer,
        )
        for values, n in zip(lists, mark, strict=True):
            del values[n:]

    def _filtered(self, layer: str) -> None:
        self.filtered[layer] = self.filtered.get(layer, 0) + 1

    def _insert(self, insert: Any, layer: str, depth: int) -> None:
        broken = _broken_entity_errors()
        try:
            name = str(insert.dxf.name)
            zscale = 0.0 if id(insert) in self._zero_ids else float(insert.dxf.zscale)
        except broken as exc:
            self._ignore(f"damaged INSERT ({type(exc).__name__})", layer)
            return
        if depth >= _MAX_BLOCK_DEPTH:
            raise ReadError(
                f"{self.where}: block {name!r} is nested more than {_MAX_BLOCK_DEPTH} levels "
                "deep (a block that inserts itself?)"
            )
        if zscale == 0.0:
            self._flat_insert(insert, name, layer, depth)
            return
        mark, before = self._mark(), self._counts()
        try:
            self._expand(insert, layer, depth)
        except broken as exc:
            # The whole reference is skipped (not half of a MINSERT grid).
            self._rollback(mark, before)
            self._ignore(f"INSERT of block {name!r} ({type(exc).__name__})", layer)

    def _expand(self, insert: Any, layer: str, depth: int) -> None:
        # MINSERT grids expand to one virtual INSERT per cell; a plain
        # virtual_entities() call would give only the first cell.
        inserts = list(insert.multi_insert()) if insert.mcount > 1 else [insert]
        for ins in inserts:
            children = list(ins.virtual_entities())
            zero = self._zero_nested(ins)
            marked: list[int] = []
            if zero:
                # ezdxf's copy of a nested reference with z-scale 0 comes
                # out with z-scale 1 (and ezdxf will not set 0): it is
                # marked so that the rule for such references
                # (_flat_insert) applies here too.
                nested = [c for c in children if c.dxftype() == "INSERT"]
                marked = [id(nested[k]) for k in zero if k < len(nested)]
                self._zero_ids.update(marked)
            try:
                self.visit(children, layer, depth + 1)
            finally:
                self._zero_ids.difference_update(marked)

    def _zero_nested(self, insert: Any) -> list[int]:
        """Positions, among the block's nested references, of those with z-scale 0."""
        name = str(insert.dxf.name)
        found = self._nested_zero.get(name)
        if found is None:
            block = insert.block()
            nested = [e for e in block if e.dxftype() == "INSERT"] if block is not None else []
            found = [k for k, e in enumerate(nested) if float(e.dxf.zscale) == 0.0]
            self._nested_zero[name] = found
        return found

    def _flat_insert(self, insert: Any, name: str, layer: str, depth: int) -> None:
        """A block reference with z-scale 0, as some 2D exporters write them.

        The transform is singular (ezdxf cannot expand a nested reference
        through it), but for a flat block (every point at the base point's
        z) the z-scale changes nothing: such a block is read with z-scale 1.
        A block with depth would be squashed flat by z-scale 0, which is
        hardly what a frame drawing means, so it is skipped and listed.
        """
        broken = _broken_entity_errors()
        mark, before = self._mark(), self._counts()
        try:
            # Set on the document in memory, which is never saved.
            insert.dxf.zscale = 1.0
            origin = np.asarray(insert.ocs().to_wcs(insert.dxf.insert), dtype=float)
            normal = np.asarray(insert.dxf.extrusion, dtype=float)
            self._expand(insert, layer, depth)
        except broken as exc:
            self._rollback(mark, before)
            self._ignore(f"INSERT of block {name!r} ({type(exc).__name__})", layer)
            return
        pts = np.asarray(self.xyz[mark[0] :] + self.marker_xyz[mark[8] :], dtype=float)
        rel = pts.reshape(-1, 3) - origin
        depth_off = np.abs(rel @ (normal / np.linalg.norm(normal))) if rel.size else rel
        size = float(np.abs(rel).max()) if rel.size else 0.0
        if rel.size and not float(depth_off.max()) <= 1e-9 * max(size, 1e-300):
            self._rollback(mark, before)
            self._ignore(f"INSERT of block {name!r} with z-scale 0 and depth", layer)
            return
        self.zscale0[name] = self.zscale0.get(name, 0) + 1

    def _other(self, e: Any, kind: str, layer: str, li: int) -> None:
        if kind == "LWPOLYLINE":
            pts = list(e.vertices_in_wcs())
            bulges = [b for (b,) in e.get_points("b")]
            self._polyline(pts, bulges, bool(e.closed), layer, li)
        elif kind == "POLYLINE":
            self._polyline_entity(e, layer, li)
        elif kind == "POINT":
            loc = e.dxf.location
            self.marker_xyz.extend((loc[0], loc[1], loc[2]))
            self.marker_layer.append(self.layers[li])
        elif kind == "3DFACE":
            dxf = e.dxf
            corners = [dxf.vtx0, dxf.vtx1, dxf.vtx2, dxf.get("vtx3", dxf.vtx2)]
            ids = [self._point(c) for c in corners]
            triangle = corners[3] == corners[2]
            owner = self._owner(li)
            face = self._face(ids[:3] if triangle else ids, owner)
            # The four edges run v0-v1, v1-v2, v2-v3, v3-v0 with one
            # invisibility bit each (bit 3 closes a triangle, whose v2-v3
            # edge has zero length), as ezdxf's own renderer draws them.
            flags = int(dxf.get("invisible_edges", 0))
            for k in range(4):
                if not flags & (1 << k):
                    self.edges.extend((ids[k], ids[(k + 1) % 4]))
                    self.edge_face.append(face)
        elif kind == "MESH":
            base = len(self.xyz) // 3
            for v in e.vertices:
                self._point(v)
            owner = self._owner(li)
            for f in e.faces:
                ring = [base + int(i) for i in f]
                if len(ring) >= 3:
                    face = self._face(ring, owner)
                    self._ring_edges(ring, face)
        else:
            self._ignore(kind, layer)

    def _face(self, ring: list[int], owner: int) -> int:
        self.face_nodes.extend(ring)
        self.face_sizes.append(len(ring))
        self.face_owner.append(owner)
        return len(self.face_sizes) - 1

    def _ring_edges(self, ring: list[int], face: int) -> None:
        for k in range(len(ring)):
            self.edges.extend((ring[k], ring[(k + 1) % len(ring)]))
            self.edge_face.append(face)

    def _polyline(
        self, pts: list[Any], bulges: list[float], closed: bool, layer: str, li: int
    ) -> None:
        n = len(pts)
        if n < 2:
            self._ignore("polyline with fewer than 2 vertices", layer)
            return
        base = len(self.xyz) // 3
        for p in pts:
            self._point(p)
        owner = self._owner(li)
        for i in range(n - 1 + (1 if closed and n > 2 else 0)):
            if bulges and bulges[i]:
                self._ignore("bulged polyline segment", layer)
                continue
            self.seg.extend((base + i, base + (i + 1) % n))
            self.seg_owner.append(owner)

    def _polyline_entity(self, e: Any, layer: str, li: int) -> None:
        if e.is_poly_face_mesh:
            owner = self._owner(li)
            vertices, faces = e.indexed_faces()
            base = len(self.xyz) // 3
            for v in vertices:
                self._point(v.dxf.location)
            for fp in faces:
                ring = [base + i for i in fp.indices]
                if len(ring) < 3:
                    continue
                face = self._face(ring, owner)
                for k in range(len(ring)):
                    # A negative index in the face record marks the edge that
                    # starts at that vertex as invisible.
                    if fp.is_edge_visible(k):
                        self.edges.extend((ring[k], ring[(k + 1) % len(ring)]))
                        self.edge_face.append(face)
        elif e.is_polygon_mesh:
            owner = self._owner(li)
            m, n = int(e.dxf.m_count), int(e.dxf.n_count)
            cache = e.get_mesh_vertex_cache()
            base = len(self.xyz) // 3
            for i in range(m):
                for j in range(n):
                    self._point(cache[i, j])
            rows = m if e.is_m_closed else m - 1
            cols = n if e.is_n_closed else n - 1
            for i in range(rows):
                for j in range(cols):
                    i2, j2 = (i + 1) % m, (j + 1) % n
                    ring = [
                        base + i * n + j,
                        base + i * n + j2,
                        base + i2 * n + j2,
                        base + i2 * n + j,
                    ]
                    face = self._face(ring, owner)
                    self._ring_edges(ring, face)
        elif int(e.dxf.flags) & (e.CURVE_FIT_VERTICES_ADDED | e.SPLINE_FIT_VERTICES_ADDED):
            self._ignore("curve-fit POLYLINE", layer)
        else:
            pts = list(e.points_in_wcs())
            bulges = [float(v.dxf.bulge) for v in e.vertices] if e.is_2d_polyline else []
            self._polyline(pts, bulges, bool(e.is_closed), layer, li)

    # -- result
    def raw(self) -> RawGeometry:
        owner_layer = np.asarray(self.owner_layer, dtype=np.int64)
        order = np.argsort(owner_layer, kind="stable")
        counts = np.bincount(owner_layer, minlength=len(self.layers))
        pieces = np.split(order, np.cumsum(counts)[:-1]) if len(self.layers) else []
        sets = {name: ids for name, ids in zip(self.layers, pieces, strict=True) if ids.size}
        sizes = np.asarray(self.face_sizes, dtype=np.int64)
        return RawGeometry(
            points=np.asarray(self.xyz, dtype=np.float64).reshape(-1, 3),
            segments=np.asarray(self.seg, dtype=np.int64).reshape(-1, 2),
            segment_owner=np.asarray(self.seg_owner, dtype=np.int64),
            face_nodes=np.asarray(self.face_nodes, dtype=np.int64),
            face_offsets=np.concatenate([[0], np.cumsum(sizes)]).astype(np.int64),
            face_owner=np.asarray(self.face_owner, dtype=np.int64),
            edges=np.asarray(self.edges, dtype=np.int64).reshape(-1, 2),
            edge_face=np.asarray(self.edge_face, dtype=np.int64),
            sets=sets,
            marker_points=np.asarray(self.marker_xyz, dtype=np.float64).reshape(-1, 3),
            marker_layers=np.asarray(self.marker_layer, dtype=object),
            ignored=self.ignored,
        )


