"""One road from raw geometry to a Model: units, healing, groups, node sets, panels."""

from __future__ import annotations

import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp

from spaceframe.errors import ModelError, ReadError, SpaceframeWarning
from spaceframe.io._options import ReadSettings
from spaceframe.io._raw import RawGeometry, require_members
from spaceframe.model import Model
from spaceframe.tolerances import GEOMETRY_TOLERANCE

if TYPE_CHECKING:
    from spaceframe.io._common import Units

__all__ = ["build_model"]


# A space frame spans from a few metres (one canopy bay) to a few hundred
# metres (the largest roof grids).  A model far outside that range almost
# always means a units slip (a millimetre drawing read as metres comes out
# 1000 times too big), so it is worth a warning.  Common practice.
_PLAUSIBLE_SIZE_M = (0.05, 5000.0)


def _max_id(ids: np.ndarray) -> int:
    return int(np.max(ids)) if len(ids) else -1


def _pair_keys(pairs: np.ndarray) -> np.ndarray:
    lo = np.minimum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    hi = np.maximum(pairs[:, 0], pairs[:, 1]).astype(np.int64)
    return (lo << 31) | hi


def _incidence(rows: np.ndarray, cols: np.ndarray, shape: tuple[int, int]) -> sp.csr_matrix:
    data = np.ones(rows.shape[0], dtype=np.int32)
    return sp.csr_matrix((data, (rows, cols)), shape=shape)


def _columns_to_lists(mat: sp.spmatrix, names: list[str]) -> dict[str, np.ndarray]:
    """Row ids of the non-zeros in each column, keyed by that column's name."""
    csc = sp.csc_matrix(mat)
    csc.sum_duplicates()
    out: dict[str, np.ndarray] = {}
    for j, name in enumerate(names):  # one pass per set, not per member
        rows = csc.indices[csc.indptr[j] : csc.indptr[j + 1]]
        out[name] = np.unique(rows).astype(np.int64)
    return out


def _dedupe_ring(flat: np.ndarray, offsets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Drop repeated consecutive corners of each polygon (cyclically)."""
    n_poly = offsets.shape[0] - 1
    if flat.size == 0:
        return flat, offsets
    sizes = np.diff(offsets)
    nxt = np.arange(1, flat.size + 1, dtype=np.int64)
    ends = offsets[1:][sizes > 0] - 1
    nxt[ends] = offsets[:-1][sizes > 0]
    keep = flat != flat[nxt]
    # A polygon whose corners are all one node keeps nothing.
    poly_of = np.repeat(np.arange(n_poly), sizes)
    new_sizes = np.bincount(poly_of[keep], minlength=n_poly)
    new_offsets = np.concatenate([[0], np.cumsum(new_sizes)]).astype(np.int64)
    return flat[keep], new_offsets


def _member_signature(n_members: int, groups: Mapping[str, np.ndarray]) -> np.ndarray:
    """(b,) uint64 fingerprint of each member's group membership.

    Two members with the same groups have the same value; different groups
    give equal values only by a 2**-64 accident (sum of random 64-bit words).
    """
    rng = np.random.default_rng(20240601)
    sig = np.zeros(n_members, dtype=np.uint64)
    for ids in groups.values():
        word = rng.integers(1, np.iinfo(np.int64).max, dtype=np.int64).astype(np.uint64)
        sig[ids] += word  # uint64 wraps, which is what a fingerprint wants
    return sig


def _mid_member_step(
    nodes: np.ndarray,
    members: np.ndarray,
    groups: dict[str, np.ndarray],
    protected: np.ndarray,
    merge: bool,
) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray], np.ndarray, dict[str, Any]]:
    """Find nodes that only subdivide a straight member; optionally merge them away.

    Returns members, node renumbering (old -> new, -1 dropped), groups, kept
    node mask and the meta entry.
    """
    from spaceframe.geometry import find_mid_member_nodes, merge_collinear_chains

    n = nodes.shape[0]
    mids = find_mid_member_nodes(nodes, members)
    info: dict[str, Any] = {"count": int(mids.size), "merged": False}
    identity = np.arange(n, dtype=np.int64)
    if not merge or mids.size == 0:
        info["nodes"] = mids
        return members, identity, groups, np.ones(n, dtype=bool), info
    # Never merge through a node that carries something (a node set, a panel
    # corner) or where the group changes: the merged member would lose it.
    sig = _member_signature(members.shape[0], groups)
    ends = np.concatenate([members[:, 0], members[:, 1]])
    member_of_end = np.concatenate([np.arange(members.shape[0])] * 2)
    order = np.argsort(ends, kind="stable")
    ends_sorted, mem_sorted = ends[order], member_of_end[order]
    first = np.searchsorted(ends_sorted, mids)
    differ = sig[mem_sorted[first]] != sig[mem_sorted[first + 1]]
    keep = np.union1d(protected, mids[differ]).astype(np.int64)
    new_members, origin = merge_collinear_chains(nodes, members, mids, keep_nodes=keep)
    new_groups = {}
    for name, ids in groups.items():  # one pass per group
        in_group = np.zeros(members.shape[0], dtype=bool)
        in_group[ids] = True
        new_groups[name] = np.flatnonzero(in_group[origin]).astype(np.int64)
    used = np.zeros(n, dtype=bool)
    used[new_members.reshape(-1)] = True
    used[protected] = True
    renumber = np.cumsum(used) - 1
    renumber[~used] = -1
    merged_away = np.flatnonzero(~used)
    info.update(
        {
            "merged": True,
            "removed_nodes": int(merged_away.size),
            "removed_members": int(members.shape[0] - new_members.shape[0]),
            "locations": nodes[merged_away[:10]],
            "nodes": np.zeros(0, dtype=np.int64),
        }
    )
    return renumber[new_members], renumber, new_groups, used, info


def build_model(
    raw: RawGeometry,
    settings: ReadSettings,
    *,
    units: Units,
    meta: dict[str, Any],
    mid_member_key: str | None = None,
    merge_mid_nodes: bool = False,
    no_members_hint: str = "",
) -> Model:
    """Turn raw geometry into a Model: units, healing, groups, node sets, panels.

    Parameters
    ----------
    raw : RawGeometry
        Geometry in file units.
    settings : ReadSettings
        The file name for messages, the healing tolerance (metres, default
        GEOMETRY_TOLERANCE), whether to heal (without it only exactly
        coincident points become one node), the heal step switches, and
        whether face edges also become members.
    units : Units
        File units.
    meta : dict
        Extra ``model.meta`` entries from the reader.
    mid_member_key : str, optional
        ``meta`` key under which to report mid-member nodes (not looked for
        when None).
    merge_mid_nodes : bool
        Merge chains through mid-member nodes into single members.
    no_members_hint : str
        Added to the error raised when nothing became a member.

    Returns
    -------
    Model

    Raises
    ------
    ReadError
        No usable entities, non-finite coordinates, or (without healing) a
        drawing the Model refuses (duplicate or zero-length members).
    """
    where = settings.where
    pts = _scaled_points(raw, where, units.scale)
    require_members(raw, where, settings.edges_as_members, no_members_hint)
    point_node, nodes0 = _coincident_nodes(pts)
    raw_members = _raw_members(raw, point_node, settings.edges_as_members)
    tol = GEOMETRY_TOLERANCE if settings.tolerance is None else settings.tolerance
    frame = _heal_step(raw_members, nodes0, point_node, raw, settings, tol, units)
    panels = _panels(raw, point_node, frame.node_map)
    if mid_member_key is not None:
        meta[mid_member_key] = _merge_mid_nodes(frame, panels, merge_mid_nodes)
    model = _fill_model(frame, panels, raw_members.panel_sets, settings)
    if raw.marker_points.shape[0]:
        model.add_markers(np.asarray(raw.marker_points, dtype=float) * units.scale,
                          raw.marker_layers)
    _report_dropped_panels(panels, raw, pts, units, where, meta)
    _finish_meta(model, meta, raw, frame.report, units, where)
    return model


def _scaled_points(raw: RawGeometry, where: str, scale: float) -> np.ndarray:
    """(n, 3) points in metres; ReadError naming the first non-finite one."""
    pts = np.asarray(raw.points, dtype=np.float64).reshape(-1, 3)
    bad = np.flatnonzero(~np.isfinite(pts).all(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ReadError(f"{where}: point {i} has non-finite coordinates {pts[i].tolist()}")
    # +0.0 turns -0.0 into 0.0 so that both sort as one point.
    return pts * scale + 0.0


def _coincident_nodes(pts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Node of each point, and the nodes: exactly coincident points are one node.

    Joining them changes no coordinate, so it happens whatever the options.
    Ids follow the first appearance in the file.
    """
    _, first, inverse = np.unique(pts, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    rank = np.empty(first.size, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(first.size)
    return rank[inverse], pts[np.sort(first)]


@dataclass
class _RawMembers:
    """Members before healing (as node pairs) and the groups of members and panels."""

    members: np.ndarray
    groups: dict[str, np.ndarray]
    panel_sets: dict[str, np.ndarray]


@dataclass
class _Frame:
    """Nodes, members, groups and node sets after healing, and the raw -> node map."""

    nodes: np.ndarray
    members: np.ndarray
    node_map: np.ndarray
    groups: dict[str, np.ndarray]
    node_sets: dict[str, np.ndarray]
    report: Any


@dataclass
class _Panels:
    """Panel corners (flat, with offsets) as nodes, which are kept, and which dropped."""

    flat: np.ndarray
    offsets: np.ndarray
    keep: np.ndarray
    dropped: np.ndarray


def _owner_sets(raw: RawGeometry) -> sp.csr_matrix:
    """(owners, sets) incidence of the sets of owners."""
    n_sets = len(raw.sets)
    n_owner = 1 + max(
        [_max_id(raw.segment_owner), _max_id(raw.face_owner)]
        + [_max_id(v) for v in raw.sets.values()]
    )
    if not n_sets:
        return sp.csr_matrix((n_owner, 0), dtype=np.int32)
    rows = np.concatenate([np.asarray(v, dtype=np.int64) for v in raw.sets.values()])
    cols = np.repeat(np.arange(n_sets), [len(v) for v in raw.sets.values()])
    return _incidence(rows, cols, (n_owner, n_sets))


def _edge_members(
    seg_n: np.ndarray, edge_n: np.ndarray, edge_face: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Members along face edges: all members, and (member, face) pairs of the edges.

    A face edge that is also a drawn segment is that segment, not a second member.
    """
    n_seg = seg_n.shape[0]
    real = edge_n[:, 0] != edge_n[:, 1]
    edge_n, edge_face = edge_n[real], edge_face[real]
    ukeys, ufirst, uinv = np.unique(_pair_keys(edge_n), return_index=True, return_inverse=True)
    uinv = uinv.reshape(-1)
    seg_keys = _pair_keys(seg_n) if n_seg else np.zeros(0, dtype=np.int64)
    seg_order = np.argsort(seg_keys, kind="stable")
    pos = np.searchsorted(seg_keys[seg_order], ukeys)
    pos_c = np.minimum(pos, max(n_seg - 1, 0))
    on_seg = (
        (pos < n_seg) & (seg_keys[seg_order][pos_c] == ukeys)
        if n_seg
        else np.zeros(ukeys.size, dtype=bool)
    )
    member_of_unique = np.empty(ukeys.size, dtype=np.int64)
    member_of_unique[on_seg] = seg_order[pos_c[on_seg]]
    new = np.flatnonzero(~on_seg)
    member_of_unique[new] = n_seg + np.arange(new.size)
    members = np.concatenate([seg_n, edge_n[ufirst[new]]])
    return members, member_of_unique[uinv], edge_face


def _raw_members(raw: RawGeometry, point_node: np.ndarray, edges_as_members: bool) -> _RawMembers:
    """Members from segments (and face edges), with groups from the sets of their owners.

    Sets of owners become groups of raw members and panels by sparse
    products (member -> owner -> set), not by looping over members.
    """
    seg_n = point_node[np.asarray(raw.segments, dtype=np.int64).reshape(-1, 2)]
    n_seg, n_faces = seg_n.shape[0], raw.n_faces
    set_names = list(raw.sets)
    owner_set = _owner_sets(raw)
    n_owner = owner_set.shape[0]
    face_owner = _incidence(np.arange(n_faces), raw.face_owner, (n_faces, n_owner))
    members = seg_n
    m_face = None
    edges = np.asarray(raw.edges, dtype=np.int64).reshape(-1, 2)
    if edges_as_members and edges.shape[0]:
        members, face_rows, face_cols = _edge_members(
            seg_n, point_node[edges], np.asarray(raw.edge_face, dtype=np.int64)
        )
        m_face = _incidence(face_rows, face_cols, (members.shape[0], n_faces))
    m_owner = _incidence(
        np.arange(n_seg), np.asarray(raw.segment_owner, dtype=np.int64),
        (members.shape[0], n_owner),
    )
    member_set = m_owner @ owner_set
    if m_face is not None:
        member_set = member_set + m_face @ (face_owner @ owner_set)
    if not set_names:
        return _RawMembers(members, {}, {})
    return _RawMembers(
        members,
        _columns_to_lists(member_set, set_names),
        _columns_to_lists(face_owner @ owner_set, set_names),
    )


def _heal_step(
    raw_members: _RawMembers,
    nodes0: np.ndarray,
    point_node: np.ndarray,
    raw: RawGeometry,
    settings: ReadSettings,
    tol: float,
    units: Units,
) -> _Frame:
    """Heal (or, without healing, only drop unused nodes) and carry groups and node sets."""
    where = settings.where
    members0 = raw_members.members
    raw_node_sets = {
        name: np.unique(point_node[np.asarray(ids, dtype=np.int64)])
        for name, ids in raw.node_sets.items()
    }
    if not settings.heal:
        used = np.zeros(nodes0.shape[0], dtype=bool)
        used[members0.reshape(-1)] = True
        node_map = np.cumsum(used) - 1
        node_map[~used] = -1
        node_sets = _map_node_sets(raw_node_sets, node_map, None, units, where, "")
        return _Frame(nodes0[used], node_map[members0], node_map, raw_members.groups,
                      node_sets, None)

    from spaceframe.geometry import heal as heal_frame
    from spaceframe.geometry import remap_groups

    try:
        result = heal_frame(nodes0, members0, tolerance=tol, **dict(settings.heal_options))
    except ModelError as exc:
        raise ReadError(f"{where}: healing failed: {exc}") from exc
    if result.members.shape[0] == 0 and members0.shape[0]:
        _no_members_left(nodes0, members0, tol, units, where)
    # remap_node_sets' advice (keep_nodes) is for heal() callers; a reader's
    # user gets what happened, and where, in file units.
    node_sets = _map_node_sets(
        raw_node_sets, result.node_map, nodes0, units, where, " after healing"
    )
    return _Frame(result.nodes, result.members, result.node_map,
                  remap_groups(raw_members.groups, result), node_sets, result.report)


def _map_node_sets(
    sets: Mapping[str, np.ndarray],
    node_map: np.ndarray,
    nodes0: np.ndarray | None,
    units: Units,
    where: str,
    when: str,
) -> dict[str, np.ndarray]:
    """Node sets through ``node_map``; a warning for each set that lost nodes on no member.

    The warning gives the first lost node's place (in file units) when
    ``nodes0`` holds the raw nodes.
    """
    out = {}
    for name, ids in sets.items():  # one pass per set
        new = node_map[ids]
        if np.any(new < 0):
            _warn_lost_nodes(where, name, ids[new < 0], nodes0, units, when)
        out[name] = np.unique(new[new >= 0]).astype(np.int64)
    return out


def _warn_lost_nodes(
    where: str, name: str, lost: np.ndarray, nodes0: np.ndarray | None, units: Units, when: str
) -> None:
    """Warn that node set ``name`` lost the raw nodes ``lost`` (the first placed if known)."""
    at = (
        f" (first at {(nodes0[lost[0]] / units.scale).round(6).tolist()} {units.name})"
        if nodes0 is not None
        else ""
    )
    warnings.warn(
        f"{where}: node set {name!r}: {lost.size} node(s) are on no member{when} "
        f"and were left out{at}",
        SpaceframeWarning,
        stacklevel=6,
    )


def _panels(raw: RawGeometry, point_node: np.ndarray, node_map: np.ndarray) -> _Panels:
    """Panel corners through the node map.

    A panel that lost a corner (on no member) or collapsed below three
    corners is dropped (and reported by the caller).
    """
    n_faces = raw.n_faces
    flat = node_map[point_node[np.asarray(raw.face_nodes, dtype=np.int64)]]
    poly_of = np.repeat(np.arange(n_faces), np.diff(raw.face_offsets))
    lost = np.zeros(n_faces, dtype=bool)
    lost[poly_of[flat < 0]] = True
    flat, offsets = _dedupe_ring(flat, raw.face_offsets)
    drop = lost | (np.diff(offsets) < 3)
    return _Panels(flat, offsets, ~drop, np.flatnonzero(drop))


def _merge_mid_nodes(frame: _Frame, panels: _Panels, merge: bool) -> dict[str, Any]:
    """Find (and with ``merge``, merge away) mid-member nodes, renumbering in place."""
    protected = np.unique(
        np.concatenate(
            [panels.flat[np.repeat(panels.keep, np.diff(panels.offsets))]]
            + [np.asarray(v, dtype=np.int64) for v in frame.node_sets.values()]
        )
    ).astype(np.int64)
    frame.members, renumber, frame.groups, kept_nodes, info = _mid_member_step(
        frame.nodes, frame.members, frame.groups, protected, merge
    )
    frame.nodes = frame.nodes[kept_nodes]
    frame.node_sets = {k: renumber[v] for k, v in frame.node_sets.items()}
    panels.flat = renumber[panels.flat]
    return info


def _fill_model(
    frame: _Frame, panels: _Panels, panel_sets: dict[str, np.ndarray], settings: ReadSettings
) -> Model:
    """The Model of nodes, members, groups, node sets, panels and panel groups."""
    model = Model()
    model.add_nodes(frame.nodes)
    try:
        model.add_members(frame.members)
    except ModelError as exc:
        hint = (
            "switch the healing steps back on"
            if settings.heal
            else "read with heal=True to remove such members"
        )
        raise ReadError(
            f"{settings.where}: the members do not form a valid frame ({exc}); {hint}"
        ) from exc
    for name, ids in frame.groups.items():
        if ids.size:
            model.add_group(name, ids)
    for name, ids in frame.node_sets.items():
        if ids.size:
            model.add_node_set(name, ids)
    sizes = np.diff(panels.offsets)
    face_ids = np.flatnonzero(panels.keep)
    model.add_panels_flat(
        panels.flat[np.repeat(panels.keep, sizes)],
        np.concatenate([[0], np.cumsum(sizes[panels.keep])]),
    )
    new_face_id = np.full(panels.keep.size, -1, dtype=np.int64)
    new_face_id[face_ids] = np.arange(face_ids.size)
    for name, ids in panel_sets.items():
        mapped = new_face_id[ids]
        mapped = mapped[mapped >= 0]
        if mapped.size:
            model.panel_groups[name] = np.unique(mapped)
    return model


def _report_dropped_panels(
    panels: _Panels, raw: RawGeometry, pts: np.ndarray, units: Units, where: str,
    meta: dict[str, Any],
) -> None:
    """``meta["io:dropped_panels"]`` and a warning, when panels were dropped."""
    dropped = panels.dropped
    if not dropped.size:
        return
    corner_pts = pts[np.asarray(raw.face_nodes, dtype=np.int64)[raw.face_offsets[dropped]]]
    meta["io:dropped_panels"] = {"count": int(dropped.size), "locations": corner_pts[:10]}
    warnings.warn(
        f"{where}: {dropped.size} panel(s) dropped: a corner is on no member or the "
        f"panel has fewer than three distinct corners (first near "
        f"{(corner_pts[0] / units.scale).round(6).tolist()} {units.name})",
        SpaceframeWarning,
        stacklevel=4,
    )


def _finish_meta(
    model: Model, meta: dict[str, Any], raw: RawGeometry, report: Any, units: Units, where: str
) -> None:
    """Fill ``model.meta``; warn when the model's size suggests a units slip."""
    model.meta.update(meta)
    model.meta["source"] = where
    model.meta["units"] = units.as_dict()
    model.meta["io:ignored"] = raw.ignored
    if report is not None:
        model.meta["heal:report"] = report
    lo, hi = model.extents()
    model.meta["io:extents"] = {"min": lo.tolist(), "max": hi.tolist()}
    size = float(np.linalg.norm(hi - lo))
    if not (_PLAUSIBLE_SIZE_M[0] <= size <= _PLAUSIBLE_SIZE_M[1]):
        warnings.warn(
            f"{where}: the model is {size:.6g} m across (units {units.name!r}, "
            f"{units.source}); check the units",
            SpaceframeWarning,
            stacklevel=4,
        )


def _no_members_left(
    nodes: np.ndarray, members: np.ndarray, tol: float, units: Units, where: str
) -> None:
    """ReadError for a heal that left no member: say why, in the file's unit."""
    length = np.linalg.norm(nodes[members[:, 1]] - nodes[members[:, 0]], axis=1)
    n = int(members.shape[0])
    tol_text = f"{tol / units.scale:.4g} {units.name}"
    longest = f"{float(length.max()) / units.scale:.4g} {units.name}"
    if bool(np.all(length < tol)):
        why = f"all {n} members are shorter than the tolerance {tol_text}"
    else:
        why = (f"all {n} members collapsed when nodes closer than the tolerance {tol_text} "
               f"were merged (longest member {longest})")
    raise ReadError(f"{where}: healing left no member: {why}: are the units right "
                    f"(read as {units.name}, {units.source})?")
