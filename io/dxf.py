"""DXF drawings: centrelines in, centrelines out, through ezdxf.

Reading takes every straight piece of the model space as a member: LINE,
the straight segments of LWPOLYLINE and POLYLINE (2D ones converted from
their object coordinate system with elevation and extrusion), including the
closing segment of a closed polyline, and the same inside block references,
expanded recursively with their transforms (nested, mirrored, MINSERT grids).
POINT becomes a marker; 3DFACE, MESH and polyface/polygon-mesh POLYLINE
become load panels.  Layers become member (and panel) groups.  Curves (arcs,
circles, ellipses, splines, bulged polyline segments) are not members: they
are counted, with their layers, in ``model.meta["io:ignored"]``, as is every
other entity that is not read (text, hatches, damaged entities, block
references that cannot be expanded); each kind is named in a
SpaceframeWarning.  A block reference with z-scale 0, as 2D exporters write
them, is read with z-scale 1 when its block is flat.  ezdxf's repairs of a
damaged file and its log messages become warnings too.

Writing puts the centrelines on one layer per group, markers as POINT and
panels as 3DFACE (MESH beyond four corners), with ``$INSUNITS`` set, and
the supports as POINT entities on layers of their own:
``SUPPORT_<directions>`` for restrained nodes (e.g. ``SUPPORT_XYZ``,
``SUPPORT_Z``) and ``SPRING_<kx>_<ky>_<kz>`` for nodes on springs
(stiffnesses in N/m).  Reading turns the points on those layers back into
supports at the nearest node, so a drawing written here and read again
keeps its supports.
"""

from __future__ import annotations

import contextlib
import functools
import logging
import math
import os
import re
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ReadError, SpaceframeWarning
from spaceframe.io._common import (
    HEAL_OPTIONS,
    RawGeometry,
    Units,
    WriteError,
    atomic_write,
    build_model,
    check_options,
    check_path,
    count_ignored,
    describe_ignored,
    insunits_code,
    layer_filter,
    parse_units,
    require_members,
    units_from_insunits,
)
from spaceframe.model import Model

if TYPE_CHECKING:
    from ezdxf.document import Drawing

__all__ = ["CURVE_KINDS", "read", "write"]

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

# Ignored-table kinds that mean "an entity was lost" rather than "an entity
# of a kind that is not a member": they start with these words.
_SKIPPED_PREFIXES = ("damaged ", "INSERT of block ")

# At most this many items of a list are named in a warning; the rest are counted.
_SHOW = 5


@functools.lru_cache(maxsize=1)
def _broken_entity_errors() -> tuple[type[Exception], ...]:
    """ezdxf's own error class and the plain ones a broken entity raises."""
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


def _open(path: Path) -> tuple[Drawing, dict[str, Any] | None]:
    """The document, and what ezdxf.recover did (None when the file read cleanly)."""
    try:
        import ezdxf
        from ezdxf import recover
        from ezdxf.lldxf import validator
    except ImportError as exc:
        raise ReadError(f"{path}: reading DXF needs the ezdxf package ({exc})") from exc

    if validator.is_dwg_file(str(path)):
        raise ReadError(f"{path}: is a DWG drawing, not DXF; save it as DXF from the CAD program")
    if not (validator.is_dxf_file(str(path)) or validator.is_binary_dxf_file(str(path))):
        with open(path, "rb") as fh:
            head = fh.read(40)
        if head.startswith(b"\xef\xbb\xbf") and head[3:].lstrip()[:1] == b"0":
            # A UTF-8 byte-order mark (some editors add one): read what follows it.
            import io as _io

            try:
                doc, auditor = recover.read(_io.BytesIO(path.read_bytes()[3:]))
            except Exception as exc:
                raise ReadError(f"{path}: DXF after a UTF-8 byte-order mark could not be "
                                f"read ({_exc_text(exc)})") from exc
            rep = _repairs(auditor, "the file starts with a UTF-8 byte-order mark")
            return doc, rep
        raise ReadError(
            f"{path}: is not a DXF file (a DXF starts with group code 0 and SECTION; "
            f"this one starts with {head!r})"
        )
    # Any exception of ezdxf's parser means a damaged file here (the file is
    # known to exist and to look like DXF): it goes to the recover reader.
    try:
        doc = ezdxf.readfile(str(path))
    except Exception as exc:
        first = exc
    else:
        # A file that parses may still hold broken structure (pointers to
        # missing layers or blocks, invalid values): ezdxf's audit repairs
        # it, and every repair is reported.
        try:
            auditor = doc.audit()
        except Exception as exc:
            raise ReadError(
                f"{path}: damaged DXF: ezdxf's audit failed ({_exc_text(exc)})"
            ) from exc
        if auditor.fixes or auditor.errors:
            return doc, _repairs(auditor, None)
        return doc, None
    try:
        doc, auditor = recover.readfile(str(path))
    except Exception as exc:
        raise ReadError(
            f"{path}: damaged DXF that ezdxf.recover could not read either "
            f"({_exc_text(first)}; then {_exc_text(exc)})"
        ) from exc
    return doc, _repairs(auditor, _exc_text(first))


def _exc_text(exc: BaseException) -> str:
    """ "Type: message", without the type twice (ezdxf repeats it in some texts)."""
    name, text = type(exc).__name__, str(exc).strip()
    while text.startswith(name + ":"):
        text = text[len(name) + 1 :].strip()
    return f"{name}: {text}" if text else name


def _repairs(auditor: Any, reason: str | None) -> dict[str, Any]:
    """What ezdxf's recover (``reason`` given) or audit (None) did, for ``model.meta``."""
    return {
        "reason": reason,
        "fixes": [str(entry.message) for entry in auditor.fixes],
        "errors": [str(entry.message) for entry in auditor.errors],
    }


class _LogRecords(logging.Handler):
    """Keeps ezdxf's log records (warnings and worse) of one read."""

    def __init__(self) -> None:
        super().__init__(logging.WARNING)
        self.messages: list[str] = []

    def emit(self, record: logging.LogRecord) -> None:
        with contextlib.suppress(Exception):
            self.messages.append(record.getMessage())


@contextlib.contextmanager
def _ezdxf_log() -> Iterator[_LogRecords]:
    """Collect what ezdxf logs while reading, so it does not reach stderr bare.

    A handler on the "ezdxf" logger means Python's last-resort handler (which
    prints to stderr) is no longer used; an application that set up its own
    logging still gets the records.
    """
    logger = logging.getLogger("ezdxf")
    handler = _LogRecords()
    logger.addHandler(handler)
    try:
        yield handler
    finally:
        logger.removeHandler(handler)


# ezdxf log messages that say nothing about the drawing's members (ezdxf
# copying dimension associations while expanding a block, for example).
_LOG_NOISE = ("copy process ignored",)


def read(
    path: str | os.PathLike[str],
    *,
    units: str | None = None,
    tolerance: float | None = None,
    heal: bool = True,
    layers: list[str] | str | None = None,
    exclude_layers: list[str] | str | None = None,
    edges_as_members: bool = False,
    **heal_options: bool,
) -> Model:
    """Read the model space of a DXF drawing into a Model.

    Parameters
    ----------
    path : str or path-like
        The DXF file (ASCII or binary).  A damaged file is read through
        ``ezdxf.recover``; what it did is in ``model.meta["dxf:recover"]``.
        Every drawing is checked by ezdxf's audit; its repairs are in
        ``model.meta["dxf:audit"]``.  Each repair is named in a
        SpaceframeWarning (the first few, then a count).
    units : str, optional
        Drawing unit ("mm", "m", "inch", "ft", ...).  Required when the header
        has ``$INSUNITS = 0`` (unitless); overrides the header otherwise.
    tolerance : float, optional
        Healing tolerance in metres (default GEOMETRY_TOLERANCE).
    heal : bool
        Heal the centrelines (see :func:`spaceframe.geometry.heal`).
    layers : list of str, optional
        Read only these layers (names compare case-insensitively).
    exclude_layers : list of str, optional
        Skip these layers.
    edges_as_members : bool
        Also make members of the edges of 3DFACE, MESH and polyface entities
        (3DFACE and polyface edges flagged invisible are left out).
    **heal_options : bool
        Healing step switches, e.g. ``split_crossings=True``.

    Returns
    -------
    Model
        Members without area or E; groups from layers (the layer table's
        spelling); panels in ``panel_groups`` by layer; markers from POINT.
        ``meta`` holds "source", "units", "heal:report", "io:ignored",
        "io:extents" and, when they apply, "dxf:recover" or "dxf:audit"
        (repairs), "dxf:log" (ezdxf's log messages), "dxf:zscale0" (block
        references with z-scale 0 read with z-scale 1, by block name) and
        "dxf:filtered_layers".

    Raises
    ------
    ReadError
        Missing file, not a DXF, damaged beyond recovery, no usable entities,
        a unitless drawing without ``units=``, or a bad option.
    """
    p = check_path(path)
    where = str(p)
    check_options(where, heal_options, HEAL_OPTIONS)
    keep_layer = layer_filter(where, layers, exclude_layers)
    with _ezdxf_log() as log:
        doc, recovered = _open(p)
        try:
            layer_names = {entry.dxf.name.lower(): entry.dxf.name for entry in doc.layers}
        except _ENTITY_ERRORS:
            layer_names = {}
        collector = _Collector(where, keep_layer, layer_names)
        collector.visit(doc.modelspace(), None, 0)
        raw = collector.raw()

    meta: dict[str, Any] = {}
    notes: list[str] = []  # warnings, issued below in this order
    if recovered is not None:
        # A file that needed the recover reader is "dxf:recover" (with the
        # reason); one that only needed the audit's repairs is "dxf:audit".
        meta["dxf:recover" if recovered["reason"] else "dxf:audit"] = recovered
        notes += _repair_notes(where, recovered)
        for kind, n in _removed_by_repair(recovered).items():
            # Gone from the drawing before it was read: counted as skipped.
            count_ignored(raw.ignored, f"damaged {kind} (removed by ezdxf's repair)", "unknown", n)
    logged = [m for m in log.messages if not m.startswith(_LOG_NOISE)]
    if logged:
        meta["dxf:log"] = logged
        notes.append(f"{where}: ezdxf reported {_items(logged, 3)} while reading")
    if collector.filtered:
        meta["dxf:filtered_layers"] = dict(collector.filtered)
    if collector.zscale0:
        meta["dxf:zscale0"] = dict(collector.zscale0)
        n = sum(collector.zscale0.values())
        notes.append(
            f"{where}: {_count(n, 'block reference')} with z-scale 0, as 2D exporters write them "
            f"({_named(collector.zscale0)}): their blocks are flat and were read with z-scale 1"
        )
    skipped = {k: v for k, v in raw.ignored.items() if k.startswith(_SKIPPED_PREFIXES)}
    if skipped:
        notes.append(
            f"{where}: {_count(sum(v['count'] for v in skipped.values()), 'entity')} skipped "
            f"(damaged or not expandable): {_describe(skipped)}"
        )
    curves = {k: v for k, v in raw.ignored.items() if k in CURVE_KINDS}
    if curves:
        notes.append(f"{where}: curves are not members and were ignored: {_describe(curves)}")
    other = {k: v for k, v in raw.ignored.items() if k not in skipped and k not in curves}
    if other:
        n_other = sum(v["count"] for v in other.values())
        notes.append(
            f"{where}: {_count(n_other, 'entity')} of kinds that are not members were ignored: "
            f"{_describe(other)}"
        )

    for note in notes:
        warnings.warn(note, SpaceframeWarning, stacklevel=2)

    hints = []
    if recovered is not None and recovered["reason"]:
        hints.append(f"the file is damaged ({recovered['reason']})")
    if raw.n_faces and not edges_as_members:
        hints.append("the drawing has faces: read with edges_as_members=True")
    if collector.filtered:
        hints.append(f"layers filtered out: {', '.join(sorted(collector.filtered))}")
    if not raw.segments.shape[0]:
        paper = _paper_space_count(doc)
        if paper:
            hints.append(
                f"only the model space is read, and {_count(paper, 'entity')} "
                f"{'is' if paper == 1 else 'are'} in paper space"
            )
    hint = "; ".join(hints)
    # Nothing to read is the first thing to say, before any question of units.
    require_members(raw, where, edges_as_members, hint)
    file_units = _file_units(doc, where, units, raw)
    on_zero = _layer_zero_note(where, raw, file_units.name)
    if on_zero:
        warnings.warn(on_zero, SpaceframeWarning, stacklevel=2)
    model = build_model(
        raw,
        where=where,
        units=file_units,
        tolerance=tolerance,
        heal=heal,
        heal_options=heal_options,
        edges_as_members=edges_as_members,
        meta=meta,
        no_members_hint=hint,
    )
    _supports_from_markers(model, where, tolerance)
    return model


def _paper_space_count(doc: Drawing) -> int:
    """Entities drawn in the paper-space layouts (0 when they cannot be counted)."""
    try:
        return sum(
            1
            for layout in doc.layouts
            if not layout.is_modelspace
            for e in layout
            if e.dxftype() != "VIEWPORT"  # every layout has one; it is no drawing
        )
    except _ENTITY_ERRORS:
        return 0


def _count(n: int, noun: str) -> str:
    """'1 entity', '3 entities', '2 block references'."""
    if n == 1:
        return f"1 {noun}"
    return f"{n} {noun[:-1]}ies" if noun.endswith("y") else f"{n} {noun}s"


def _items(texts: list[str], show: int = _SHOW) -> str:
    """'3 problems: "a"; "b" and 1 more' for a list of messages."""
    shown = "; ".join(repr(t) for t in texts[:show])
    more = f" and {len(texts) - show} more" if len(texts) > show else ""
    return f"{len(texts)} problem(s): {shown}{more}"


def _named(counts: dict[str, int], show: int = _SHOW) -> str:
    """ "block 'A' x2, block 'B' x1" for a name -> count table."""
    parts = [f"block {k!r} x{v}" for k, v in list(counts.items())[:show]]
    more = f", {len(counts) - show} more blocks" if len(counts) > show else ""
    return ", ".join(parts) + more


def _describe(ignored: dict[str, dict[str, Any]], show: int = _SHOW) -> str:
    """Like :func:`describe_ignored`, naming at most a few kinds and layers each."""
    kinds = list(ignored)
    text = describe_ignored({k: _few_layers(ignored[k], show) for k in kinds[:show]}, kinds[:show])
    if len(kinds) > show:
        rest = sum(ignored[k]["count"] for k in kinds[show:])
        text += f"; {rest} more of {len(kinds) - show} other kinds"
    return text


def _few_layers(entry: dict[str, Any], show: int) -> dict[str, Any]:
    layers = dict(entry["layers"])
    if len(layers) <= show:
        return entry
    kept = dict(list(layers.items())[:show])
    kept[f"{len(layers) - show} more layers"] = 0
    return {"count": entry["count"], "layers": kept}


# A repair message of ezdxf that concerns an entity that can become a
# member, a marker or a panel, e.g. "Removed entity LINE(#10) with a
# conflicting handle ...": such repairs are named first.
_MEMBER_REPAIR = re.compile(r"\b(LINE|LWPOLYLINE|POLYLINE|VERTEX|INSERT|POINT|3DFACE|MESH)\(#")
_REMOVED = re.compile(r"^Removed (?:entity )?([A-Z0-9_]+)\(#")


def _repair_notes(where: str, recovered: dict[str, Any]) -> list[str]:
    """One warning per repair ezdxf made (the first few), then a count of the rest.

    Repairs of entities that could be members come first, so that a removed
    LINE is never hidden behind repairs of the layer table.
    """
    fixes = sorted(recovered["fixes"], key=lambda t: not _MEMBER_REPAIR.search(t))
    errors = recovered["errors"]
    how = (
        f"damaged DXF ({recovered['reason']}), read with ezdxf.recover"
        if recovered["reason"]
        else "ezdxf's audit found damage in the DXF"
    )
    on_members = sum(1 for t in fixes if _MEMBER_REPAIR.search(t))
    notes = [
        f"{where}: {how}: {len(fixes)} repairs ({on_members} of line, polyline, block reference, "
        f"point or face entities), {len(errors)} unrepaired errors; check the model"
    ]
    notes += [f"{where}: ezdxf repaired: {text}" for text in fixes[:_SHOW]]
    notes += [f"{where}: ezdxf could not repair: {text}" for text in errors[:_SHOW]]
    rest = max(len(fixes) - _SHOW, 0) + max(len(errors) - _SHOW, 0)
    if rest:
        notes.append(f"{where}: ... and {rest} more repairs or errors reported by ezdxf")
    return notes


def _removed_by_repair(recovered: dict[str, Any]) -> dict[str, int]:
    """Entities ezdxf's repair removed, by type ("Removed entity LINE(#10) ...")."""
    removed: dict[str, int] = {}
    for text in recovered["fixes"]:
        found = _REMOVED.match(text)
        if found:
            removed[found.group(1)] = removed.get(found.group(1), 0) + 1
    return removed


def _layer_zero_note(where: str, raw: RawGeometry, unit: str) -> str:
    """A warning when some lines are on layer 0 and all the others on named layers.

    A damaged file that lost an entity's layer (group code 8) puts it on
    layer 0, where it silently gets another group, hence another section.
    """
    if "0" not in raw.sets or len(raw.sets) < 2 or raw.segments.shape[0] == 0:
        return ""
    owners0 = np.asarray(raw.sets["0"], dtype=np.int64)
    on_zero = np.zeros(1 + max(int(raw.segment_owner.max()), int(owners0.max())), dtype=bool)
    on_zero[owners0] = True
    seg_on = on_zero[raw.segment_owner]
    n0, n = int(seg_on.sum()), int(seg_on.size)
    if n0 == 0 or n0 == n:
        return ""
    first = raw.points[raw.segments[np.flatnonzero(seg_on)[:3], 0]]
    at = "; ".join("(" + ", ".join(f"{c:.6g}" for c in p) + ")" for p in first.tolist())
    more = ", ..." if n0 > 3 else ""
    return (
        f"{where}: {n0} of {n} lines are on layer '0' while the others are on named layers "
        f"(starting at {at}{more} {unit}); a damaged file puts lines that lost their "
        "layer on '0': check the groups of these lines"
    )


def _file_units(doc: Drawing, where: str, units: str | None, raw: RawGeometry) -> Units:
    code = doc.header.get("$INSUNITS", 0)
    header = units_from_insunits(code, where=where)
    if units is not None:
        name, scale = parse_units(units, where=where)
        if header is not None and not math.isclose(header.scale, scale, rel_tol=1e-12):
            warnings.warn(
                f"{where}: units={units!r} overrides the header ({header.source}, {header.name})",
                SpaceframeWarning,
                stacklevel=3,
            )
        return Units(name, scale, "units= option")
    if header is None:
        extent = ""
        if raw.points.shape[0]:
            lo, hi = raw.points.min(axis=0), raw.points.max(axis=0)
            extent = (
                "; its extents are "
                + ", ".join(f"{a} {lo[i]:.6g}..{hi[i]:.6g}" for i, a in enumerate("xyz"))
                + " drawing units"
            )
        raise ReadError(
            f"{where}: the drawing is unitless ($INSUNITS = 0); pass units= (e.g. "
            f"units='mm' or units='m'){extent}"
        )
    return header


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------


#: Layers of the support points :func:`write` draws (case-insensitive on reading).
_SUPPORT_LAYER = re.compile(r"^SUPPORT_([XYZ]{1,3})$", re.IGNORECASE)
_FLOAT = r"([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)"
_SPRING_LAYER = re.compile(rf"^SPRING_{_FLOAT}_{_FLOAT}_{_FLOAT}$", re.IGNORECASE)


def _is_support_layer(name: str) -> bool:
    return bool(_SUPPORT_LAYER.match(name) or _SPRING_LAYER.match(name))


def _supports_from_markers(model: Model, where: str, tolerance: float | None) -> None:
    """Supports and springs from POINTs on ``SUPPORT_*`` and ``SPRING_*`` layers.

    Each point is put on the nearest node; one farther than the healing
    tolerance from every node is a ReadError naming it.  The points stay
    markers as well (a model file may select them by layer).
    """
    from scipy.spatial import cKDTree

    from spaceframe.tolerances import GEOMETRY_TOLERANCE

    layers = [str(v) for v in model.marker_layers.tolist()]
    picked = [k for k, name in enumerate(layers) if _is_support_layer(name)]
    if not picked or model.n_nodes == 0:
        return
    tol = GEOMETRY_TOLERANCE if tolerance is None else float(tolerance)
    dist, node = cKDTree(model.nodes).query(model.markers[picked])
    far = np.flatnonzero(dist > tol)
    if far.size:
        k = picked[int(far[0])]
        raise ReadError(
            f"{where}: support point on layer {layers[k]!r} at "
            f"({', '.join(f'{v:.6g}' for v in model.markers[k])}) m is "
            f"{dist[far[0]]:.3g} m from the nearest node (tolerance {tol:.3g} m)"
        )
    for k, i in zip(picked, node.tolist(), strict=True):
        name = layers[k]
        held = _SUPPORT_LAYER.match(name)
        if held:
            dirs = held.group(1).lower()
            model.add_support([i], x="x" in dirs, y="y" in dirs, z="z" in dirs)
        else:
            spring = _SPRING_LAYER.match(name)
            assert spring is not None
            model.add_spring([i], *(float(v) for v in spring.groups()))


def _layer_name(name: str) -> str:
    from ezdxf.lldxf.validator import is_valid_layer_name

    if is_valid_layer_name(name):
        return name
    clean = "".join(c if is_valid_layer_name(c) else "_" for c in name) or "_"
    return clean


def write(
    path: str | os.PathLike[str],
    model: Model,
    *,
    units: str = "m",
    default_layer: str = "0",
    panel_layer: str = "PANELS",
    dxfversion: str = "R2013",
) -> Path:
    """Write the model's centrelines, markers and panels to a DXF drawing.

    Each member is a LINE on the layer of its first group (``model.groups``
    order); members in no group go on ``default_layer``.  Markers are POINT
    entities on their layers; panels are 3DFACE entities (MESH for more
    than four corners) on the layer of their first panel group, else on
    ``panel_layer``.  Supports are POINT entities at their nodes on
    ``SUPPORT_<directions>`` layers, springs on ``SPRING_<kx>_<ky>_<kz>``
    layers (N/m); :func:`read` turns them back into supports.  Nodes no
    member uses and loads are not part of a drawing and are not written.

    Parameters
    ----------
    path : str or path-like
        Output file, written atomically.
    model : Model
    units : str
        Drawing unit; ``$INSUNITS`` is set to match and coordinates are
        converted from metres.
    default_layer : str
        Layer for members in no group.
    panel_layer : str
        Layer for panels in no panel group.
    dxfversion : str
        DXF version understood by ezdxf ("R2000" ... "R2018").

    Returns
    -------
    Path
        The written file.

    Raises
    ------
    WriteError
        Unknown unit, ezdxf missing, or the file cannot be written.
    """
    target = Path(path)
    where = str(target)
    code, scale = insunits_code(units, where=where)
    try:
        import ezdxf
        from ezdxf.lldxf.const import DXFError
    except ImportError as exc:
        raise WriteError(f"{where}: writing DXF needs the ezdxf package ({exc})") from exc
    try:
        doc = ezdxf.new(dxfversion, setup=False)
    except DXFError as exc:
        raise WriteError(f"{where}: {exc}") from exc
    doc.header["$INSUNITS"] = code
    msp = doc.modelspace()

    used: dict[str, str] = {}

    def layer(name: str) -> str:
        clean = _layer_name(name)
        key = clean.lower()
        if key in used:
            if used[key] != name:
                warnings.warn(
                    f"{where}: groups {used[key]!r} and {name!r} share DXF layer {clean!r} "
                    "(layer names are case-insensitive and some characters are not allowed)",
                    SpaceframeWarning,
                    stacklevel=3,
                )
            return doc.layers.get(clean).dxf.name if key != "0" else "0"
        used[key] = name
        if clean != name:
            warnings.warn(
                f"{where}: group {name!r} written on layer {clean!r} (DXF layer names "
                'cannot hold <>/\\":;?*|=`)',
                SpaceframeWarning,
                stacklevel=3,
            )
        if key != "0" and not doc.layers.has_entry(clean):
            doc.layers.add(clean)
        return clean

    b = model.n_members
    member_layer = np.full(b, -1, dtype=np.int64)
    names = list(model.groups)
    for gi, name in enumerate(names):  # one pass per group: members take their first
        ids = model.groups[name]
        free = ids[member_layer[ids] < 0]
        member_layer[free] = gi
    layer_of_group = [layer(name) for name in names]
    default = layer(default_layer) if np.any(member_layer < 0) else default_layer
    # ezdxf creates one Python object per entity: this loop is the writer's
    # unavoidable cost (the drawing is written once), not an analysis path.
    xyz = (model.nodes / scale).tolist()
    for (i, j), gi in zip(model.members.tolist(), member_layer.tolist(), strict=True):
        msp.add_line(
            xyz[i], xyz[j], dxfattribs={"layer": layer_of_group[gi] if gi >= 0 else default}
        )

    marker_xyz = (np.asarray(model.markers, dtype=float).reshape(-1, 3) / scale).tolist()
    for pt, lay in zip(marker_xyz, model.marker_layers.tolist(), strict=True):
        if _is_support_layer(str(lay)):
            continue  # a support read from a drawing: written below from the model's supports
        msp.add_point(pt, dxfattribs={"layer": layer(str(lay))})

    # Supports: one point per node and kind, on a layer that names it.
    held = np.flatnonzero(model.restraint.any(axis=1))
    letters = np.array(list("XYZ"))
    for i in held.tolist():
        name = "SUPPORT_" + "".join(letters[model.restraint[i]])
        if not doc.layers.has_entry(name):
            doc.layers.add(name, color=3)
        msp.add_point(xyz[i], dxfattribs={"layer": name})
    for i in np.flatnonzero((model.springs > 0).any(axis=1)).tolist():
        name = "SPRING_" + "_".join(repr(float(k)) for k in model.springs[i])
        if not doc.layers.has_entry(name):
            doc.layers.add(name, color=2)
        msp.add_point(xyz[i], dxfattribs={"layer": name})

    panel_layer_idx = np.full(model.n_panels, -1, dtype=np.int64)
    pnames = list(model.panel_groups)
    for gi, name in enumerate(pnames):
        ids = model.panel_groups[name]
        free = ids[panel_layer_idx[ids] < 0]
        panel_layer_idx[free] = gi
    for k in range(model.n_panels):
        corners = [xyz[i] for i in model.panel(k).tolist()]
        gi = int(panel_layer_idx[k])
        lay = layer(pnames[gi]) if gi >= 0 else layer(panel_layer)
        if len(corners) <= 4:
            msp.add_3dface(corners, dxfattribs={"layer": lay})
        else:
            mesh = msp.add_mesh(dxfattribs={"layer": lay})
            with mesh.edit_data() as data:
                data.vertices = corners
                data.faces = [list(range(len(corners)))]

    def save(tmp: Path) -> None:
        doc.saveas(tmp)

    return atomic_write(target, save)
