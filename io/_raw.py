"""Geometry straight from a file, before units, healing or ids are settled."""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from spaceframe.errors import ReadError

__all__ = ["RawGeometry", "count_ignored", "describe_ignored", "require_members"]


def _empty_int(*shape: int) -> np.ndarray:
    return np.zeros(shape if shape else (0,), dtype=np.int64)


@dataclass
class RawGeometry:
    """Geometry straight from a file, before units, healing or ids are settled.

    Every segment and face belongs to an *owner*: the drawing entity or mesh
    cell it came from.  Sets (layers, physical groups) are lists of owners,
    so one set can hold members and panels alike.

    Attributes
    ----------
    points : (n, 3) float
        Coordinates in file units.
    segments : (s, 2) int
        Straight pieces as point ids.
    segment_owner : (s,) int
        Owner of each segment.
    face_nodes : (p,) int
        Corner point ids of all faces, one after the other.
    face_offsets : (f + 1,) int
        Face k has corners ``face_nodes[face_offsets[k]:face_offsets[k + 1]]``.
    face_owner : (f,) int
        Owner of each face.
    edges : (e, 2) int
        Candidate members along face edges (only those meant to be seen).
    edge_face : (e,) int
        Face of each edge.
    sets : dict of str to (k,) int
        Owner ids per set name; these become member and panel groups.
    node_sets : dict of str to (k,) int
        Point ids per set name.
    marker_points : (m, 3) float
        Marker positions in file units.
    marker_layers : (m,) object
        Layer (or set) name of each marker.
    ignored : dict
        What was not used: kind -> {"count": int, "layers": {name: count}}.
    """

    points: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    segments: np.ndarray = field(default_factory=lambda: _empty_int(0, 2))
    segment_owner: np.ndarray = field(default_factory=_empty_int)
    face_nodes: np.ndarray = field(default_factory=_empty_int)
    face_offsets: np.ndarray = field(default_factory=lambda: np.zeros(1, dtype=np.int64))
    face_owner: np.ndarray = field(default_factory=_empty_int)
    edges: np.ndarray = field(default_factory=lambda: _empty_int(0, 2))
    edge_face: np.ndarray = field(default_factory=_empty_int)
    sets: dict[str, np.ndarray] = field(default_factory=dict)
    node_sets: dict[str, np.ndarray] = field(default_factory=dict)
    marker_points: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    marker_layers: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=object))
    ignored: dict[str, dict[str, Any]] = field(default_factory=dict)

    @property
    def n_faces(self) -> int:
        """Number of faces."""
        return int(self.face_offsets.shape[0] - 1)


def count_ignored(ignored: dict[str, dict[str, Any]], kind: str, layer: str, n: int = 1) -> None:
    """Add ``n`` ignored things of ``kind`` on ``layer`` to an ignored-table."""
    entry = ignored.setdefault(kind, {"count": 0, "layers": {}})
    entry["count"] += n
    entry["layers"][layer] = entry["layers"].get(layer, 0) + n


def describe_ignored(ignored: Mapping[str, Mapping[str, Any]], kinds: Iterable[str]) -> str:
    """Short text "ARC x2 on 'A', 'B'; ..." for the given kinds present in ``ignored``."""
    parts = []
    for kind in kinds:
        if kind in ignored:
            entry = ignored[kind]
            layers = ", ".join(repr(name) for name in entry["layers"])
            parts.append(f"{kind} x{entry['count']} on {layers}")
    return "; ".join(parts)


def require_members(raw: RawGeometry, where: str, edges_as_members: bool, hint: str) -> None:
    """ReadError when nothing in ``raw`` can become a member.

    Raises
    ------
    ReadError
        Naming the file, what was found instead, and ``hint``.
    """
    if raw.segments.shape[0] or (edges_as_members and raw.edges.shape[0]):
        return
    raise ReadError(
        f"{where}: no usable entities: nothing to make members of ({_found_text(raw)})"
        + (f"; {hint}" if hint else "")
    )


def _found_text(raw: RawGeometry) -> str:
    parts = []
    if raw.n_faces:
        parts.append(f"{raw.n_faces} faces")
    if raw.marker_points.shape[0]:
        parts.append(f"{raw.marker_points.shape[0]} points")
    for kind, entry in raw.ignored.items():
        parts.append(f"{entry['count']} ignored {kind}")
    return "found " + ", ".join(parts) if parts else "the file holds no geometry"
