"""DXF drawings: centrelines in, centrelines out, through ezdxf.

Reading takes every straight piece of the model space as a member: LINE,
the straight segments of LWPOLYLINE and POLYLINE (2D ones converted from
their object coordinate system with elevation and extrusion), including the
closing segment of a closed polyline, and the same inside block references,
expanded recursively with their transforms (nested, mirrored, MINSERT grids).
POINT becomes a marker; 3DFACE, MESH and polyface/polygon-mesh POLYLINE
become load panels.  Layers become member (and panel) groups.  Curves (arcs,
circles, ellipses, splines, bulged polyline segments) are not members: they
are counted, with their layers, in ``model.meta["io:ignored"]``.

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

import math
import os
import re
import warnings
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
        from ezdxf.lldxf.const import DXFError

        for e in entities:
            kind = e.dxftype()
            layer = e.dxf.layer
            if inherit is not None and layer == "0":
                # Entities on layer 0 inside a block take the insert's layer.
                layer = inherit
            if kind == "LINE":
                li = self._layer(layer)
                if li < 0:
                    self._filtered(layer)
                    continue
                dxf = e.dxf
                self.xyz.extend(dxf.start)
                self.xyz.extend(dxf.end)
                k = len(self.xyz) // 3
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
                try:
                    self._other(e, kind, layer, li)
                except (DXFError, ValueError, IndexError) as exc:
                    # One broken entity of a damaged file is skipped and
                    # listed; the rest of the drawing is still read.
                    self._ignore(f"damaged {kind} ({type(exc).__name__})", layer)

    def _filtered(self, layer: str) -> None:
        self.filtered[layer] = self.filtered.get(layer, 0) + 1

    def _insert(self, insert: Any, layer: str, depth: int) -> None:
        name = insert.dxf.name
        if depth >= _MAX_BLOCK_DEPTH:
            raise ReadError(
                f"{self.where}: block {name!r} is nested more than {_MAX_BLOCK_DEPTH} levels "
                "deep (a block that inserts itself?)"
            )
        from ezdxf.lldxf.const import DXFError

        try:
            # MINSERT grids expand to one virtual INSERT per cell; a plain
            # virtual_entities() call would give only the first cell.
            inserts = list(insert.multi_insert()) if insert.mcount > 1 else [insert]
            for ins in inserts:
                children = list(ins.virtual_entities())
                self.visit(children, layer, depth + 1)
        except (DXFError, KeyError, ValueError, ZeroDivisionError, ArithmeticError) as exc:
            self._ignore(f"INSERT of block {name!r} ({type(exc).__name__})", layer)

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
        raise ReadError(
            f"{path}: is not a DXF file (a DXF starts with group code 0 and SECTION; "
            f"this one starts with {head!r})"
        )
    try:
        return ezdxf.readfile(str(path)), None
    except Exception as exc:
        first = exc
    try:
        doc, auditor = recover.readfile(str(path))
    except Exception as exc:
        raise ReadError(
            f"{path}: damaged DXF that ezdxf.recover could not read either "
            f"({type(first).__name__}: {first}; then {type(exc).__name__}: {exc})"
        ) from exc
    info = {
        "reason": f"{type(first).__name__}: {first}".rstrip(": "),
        "fixes": [str(entry.message) for entry in auditor.fixes],
        "errors": [str(entry.message) for entry in auditor.errors],
    }
    return doc, info


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
        ``ezdxf.recover``; what it did is in ``model.meta["dxf:recover"]``
        and a SpaceframeWarning says so.
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
        "io:extents" and, for a damaged file, "dxf:recover".

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
    doc, recovered = _open(p)

    layer_names = {entry.dxf.name.lower(): entry.dxf.name for entry in doc.layers}
    collector = _Collector(where, keep_layer, layer_names)
    collector.visit(doc.modelspace(), None, 0)
    raw = collector.raw()

    meta: dict[str, Any] = {}
    if recovered is not None:
        meta["dxf:recover"] = recovered
        warnings.warn(
            f"{where}: damaged DXF ({recovered['reason']}), read with ezdxf.recover: "
            f"{len(recovered['fixes'])} fixes, {len(recovered['errors'])} unfixed errors; "
            "check the model (details in model.meta['dxf:recover'])",
            SpaceframeWarning,
            stacklevel=2,
        )
    if collector.filtered:
        meta["dxf:filtered_layers"] = dict(collector.filtered)

    curves = describe_ignored(raw.ignored, CURVE_KINDS)
    if curves:
        warnings.warn(
            f"{where}: curves are not members and were ignored: {curves}",
            SpaceframeWarning,
            stacklevel=2,
        )
    hints = []
    if recovered is not None:
        hints.append(f"the file is damaged ({recovered['reason']})")
    if raw.n_faces and not edges_as_members:
        hints.append("the drawing has faces: read with edges_as_members=True")
    if collector.filtered:
        hints.append(f"layers filtered out: {', '.join(sorted(collector.filtered))}")
    hint = "; ".join(hints)
    # Nothing to read is the first thing to say, before any question of units.
    require_members(raw, where, edges_as_members, hint)
    file_units = _file_units(doc, where, units, raw)
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
