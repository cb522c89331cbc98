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

import os
import re
import warnings
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import ReadError, SpaceframeWarning
from spaceframe.io._build import build_model
from spaceframe.io._common import WriteError, atomic_write, insunits_code
from spaceframe.io._dxf_blocks import _ENTITY_ERRORS, CURVE_KINDS, _Collector
from spaceframe.io._dxf_read import (
    _ezdxf_log,
    _file_units,
    _layer_zero_note,
    _open,
    no_member_hint,
    read_notes,
)
from spaceframe.io._dxf_stream import open_stream
from spaceframe.io._options import layer_filter, read_settings
from spaceframe.io._raw import require_members
from spaceframe.model import Model

if TYPE_CHECKING:
    from ezdxf.document import Drawing

__all__ = ["CURVE_KINDS", "read", "write"]


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
    settings = read_settings(
        path, tolerance=tolerance, heal=heal, edges_as_members=edges_as_members,
        heal_options=heal_options,
    )
    where = settings.where
    keep_layer = layer_filter(where, layers, exclude_layers)
    with _ezdxf_log() as log:
        streamed = _read_streamed(settings.path, where, keep_layer)
        if streamed is not None:
            collector, raw, insunits = streamed
            doc, recovered = None, None
        else:
            # What ezdxf said during a stream given up belongs to no read: the
            # whole-file read below says its own.
            log.messages.clear()
            doc, recovered = _open(settings.path)
            try:
                layer_names = {entry.dxf.name.lower(): entry.dxf.name for entry in doc.layers}
            except _ENTITY_ERRORS:
                layer_names = {}
            collector = _Collector(where, keep_layer, layer_names)
            collector.visit(doc.modelspace(), None, 0)
            raw = collector.raw()
            insunits = int(doc.header.get("$INSUNITS", 0))

    meta, notes = read_notes(where, raw, recovered, log.messages, collector)
    if streamed is not None:
        meta["dxf:streamed"] = ("read entity by entity with ezdxf's iterdxf (a big drawing of "
                                "model-space entities only); ezdxf's audit was not run")
    for note in notes:
        warnings.warn(note, SpaceframeWarning, stacklevel=2)
    hint = no_member_hint(doc, raw, recovered, collector, edges_as_members)
    # Nothing to read is the first thing to say, before any question of units.
    require_members(raw, where, edges_as_members, hint)
    file_units = _file_units(insunits, where, units, raw)
    on_zero = _layer_zero_note(where, raw, file_units.name)
    if on_zero:
        warnings.warn(on_zero, SpaceframeWarning, stacklevel=2)
    model = build_model(raw, settings, units=file_units, meta=meta, no_members_hint=hint)
    _supports_from_markers(model, where, tolerance)
    return model


def _read_streamed(path: Path, where: str, keep_layer: Any) -> Any:
    """(collector, raw, $INSUNITS) of a drawing streamed with iterdxf, or None.

    None when the drawing is not one to stream (see :mod:`._dxf_stream`), when
    streaming fails part-way (the whole-file reader then reads it again, with
    ezdxf's recover), and when it found no members (the whole-file reader then
    says why, paper space included).
    """
    stream = open_stream(path)
    if stream is None:
        return None
    try:
        collector = _Collector(where, keep_layer, stream.layer_names)
        collector.visit(stream.entities, None, 0)
        raw = collector.raw()
    except Exception:
        return None
    finally:
        stream.close()
    if not raw.segments.shape[0]:
        return None
    return collector, raw, stream.insunits


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
    doc = _new_drawing(where, dxfversion)
    doc.header["$INSUNITS"] = code
    msp = doc.modelspace()
    layers = _Layers(doc, where)

    member_group = _first_group(model.n_members, model.groups)
    names = list(model.groups)
    layer_of_group = [layers.get(name) for name in names]
    default = layers.get(default_layer) if np.any(member_group < 0) else default_layer
    # ezdxf creates one Python object per entity: these loops are the
    # writer's unavoidable cost (the drawing is written once), not an
    # analysis path.
    xyz = (model.nodes / scale).tolist()
    for (i, j), gi in zip(model.members.tolist(), member_group.tolist(), strict=True):
        msp.add_line(
            xyz[i], xyz[j], dxfattribs={"layer": layer_of_group[gi] if gi >= 0 else default}
        )

    marker_xyz = (np.asarray(model.markers, dtype=float).reshape(-1, 3) / scale).tolist()
    for pt, lay in zip(marker_xyz, model.marker_layers.tolist(), strict=True):
        if _is_support_layer(str(lay)):
            continue  # a support read from a drawing: written below from the model's supports
        msp.add_point(pt, dxfattribs={"layer": layers.get(str(lay))})
    _add_supports(doc, model, xyz)
    pnames = list(model.panel_groups)
    panel_layers = [
        layers.get(pnames[gi]) if gi >= 0 else layers.get(panel_layer)
        for gi in _first_group(model.n_panels, model.panel_groups).tolist()
    ]
    _add_panels(msp, model, xyz, panel_layers)

    def save(tmp: Path) -> None:
        doc.saveas(tmp)

    return atomic_write(target, save)


def _new_drawing(where: str, dxfversion: str) -> Drawing:
    try:
        import ezdxf
        from ezdxf.lldxf.const import DXFError
    except ImportError as exc:
        raise WriteError(f"{where}: writing DXF needs the ezdxf package ({exc})") from exc
    try:
        return ezdxf.new(dxfversion, setup=False)
    except DXFError as exc:
        raise WriteError(f"{where}: {exc}") from exc


class _Layers:
    """The drawing's layers for group names, made valid and added on first use."""

    def __init__(self, doc: Drawing, where: str) -> None:
        self.doc = doc
        self.where = where
        self.used: dict[str, str] = {}  # lower-case layer -> group name first put there

    def get(self, name: str) -> str:
        """The layer for group ``name``, with a warning when it is renamed or shared."""
        clean = _layer_name(name)
        key = clean.lower()
        if key in self.used:
            if self.used[key] != name:
                warnings.warn(
                    f"{self.where}: groups {self.used[key]!r} and {name!r} share DXF layer "
                    f"{clean!r} (layer names are case-insensitive and some characters are "
                    "not allowed)",
                    SpaceframeWarning,
                    stacklevel=3,
                )
            return self.doc.layers.get(clean).dxf.name if key != "0" else "0"
        self.used[key] = name
        if clean != name:
            warnings.warn(
                f"{self.where}: group {name!r} written on layer {clean!r} (DXF layer names "
                'cannot hold <>/\\":;?*|=`)',
                SpaceframeWarning,
                stacklevel=3,
            )
        if key != "0" and not self.doc.layers.has_entry(clean):
            self.doc.layers.add(clean)
        return clean


def _first_group(n: int, groups: dict[str, np.ndarray]) -> np.ndarray:
    """(n,) index of each item's first group in ``groups`` order; -1 for none."""
    first = np.full(n, -1, dtype=np.int64)
    for gi, ids in enumerate(groups.values()):  # one pass per group
        free = ids[first[ids] < 0]
        first[free] = gi
    return first


def _add_supports(doc: Drawing, model: Model, xyz: list[list[float]]) -> None:
    """One point per supported node and kind, on a layer that names the support."""
    msp = doc.modelspace()
    held = np.flatnonzero(model.restraint.any(axis=1))
    letters = np.array(list("XYZ"))
    points = [("SUPPORT_" + "".join(letters[model.restraint[i]]), i, 3) for i in held.tolist()]
    points += [
        ("SPRING_" + "_".join(repr(float(k)) for k in model.springs[i]), i, 2)
        for i in np.flatnonzero((model.springs > 0).any(axis=1)).tolist()
    ]
    for name, i, color in points:
        if not doc.layers.has_entry(name):
            doc.layers.add(name, color=color)
        msp.add_point(xyz[i], dxfattribs={"layer": name})


def _add_panels(msp: Any, model: Model, xyz: list[list[float]], layers: list[str]) -> None:
    """Panels as 3DFACE (MESH beyond four corners), panel k on ``layers[k]``."""
    for k, lay in enumerate(layers):
        corners = [xyz[i] for i in model.panel(k).tolist()]
        if len(corners) <= 4:
            msp.add_3dface(corners, dxfattribs={"layer": lay})
        else:
            mesh = msp.add_mesh(dxfattribs={"layer": lay})
            with mesh.edit_data() as data:
                data.vertices = corners
                data.faces = [list(range(len(corners)))]
