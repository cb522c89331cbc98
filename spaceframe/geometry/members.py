"""Nodes lying on members and members crossing: sampling, splitting, collinear chains."""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike
from scipy.spatial import cKDTree

from spaceframe.errors import ModelError
from spaceframe.geometry._types import FloatArray, IntArray
from spaceframe.geometry.checks import _as_ids, _as_members, _as_nodes, _check_tolerance
from spaceframe.geometry.graph import (
    _ball_query,
    _first_of_each_label,
    _incidences,
    _ordered_labels,
    _rows,
)
from spaceframe.geometry.reports import _MAX_SAMPLES, _QUERY_CHUNK
from spaceframe.tolerances import ANGLE_TOLERANCE


def find_mid_member_nodes(
    nodes: ArrayLike, members: ArrayLike, tolerance: float = ANGLE_TOLERANCE
) -> IntArray:
    """Nodes where a straight line was merely subdivided.

    A mid-member node has exactly two members, and they leave it in opposite
    directions along one line (sine of the angle between the line through
    one and the other below ``tolerance``), as when a mesher subdivides a
    line.

    Parameters
    ----------
    nodes : (n, 3) float
        Node coordinates, metres.
    members : (b, 2) int
        Node-id pairs.
    tolerance : float
        Sine of the largest angle still taken as straight, in (0, 1).

    Returns
    -------
    (k,) int64
        Sorted ids of the mid-member nodes.
    """
    pts = _as_nodes(nodes)
    mem = _as_members(members, len(pts))
    tol = _check_tolerance(tolerance)
    if tol >= 1.0:
        raise ModelError(f"tolerance is the sine of an angle and must be < 1; got {tolerance!r}")
    degree = np.bincount(mem.reshape(-1), minlength=len(pts))
    node, member, other = _incidences(mem)
    sel = degree[node] == 2
    node, member, other = node[sel].reshape(-1, 2), member[sel].reshape(-1, 2), other[sel]
    other = other.reshape(-1, 2)
    centre = node[:, 0]
    u1 = pts[other[:, 0]] - pts[centre]
    u2 = pts[other[:, 1]] - pts[centre]
    n1 = np.linalg.norm(u1, axis=1)
    n2 = np.linalg.norm(u2, axis=1)
    # A member with both ends here, or of zero length, gives no direction.
    valid = (member[:, 0] != member[:, 1]) & (n1 > 0) & (n2 > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        u1 = u1 / n1[:, None]
        u2 = u2 / n2[:, None]
    sine = np.linalg.norm(np.cross(u1, u2), axis=1)
    cosine = np.einsum("ij,ij->i", u1, u2)
    straight = valid & (sine < tol) & (cosine < 0)
    return np.sort(centre[straight]).astype(np.int64)


def merge_collinear_chains(
    nodes: ArrayLike,
    members: ArrayLike,
    mid_nodes: ArrayLike,
    *,
    keep_nodes: ArrayLike | None = None,
) -> tuple[IntArray, IntArray]:
    """Merge chains of members through mid-member nodes into single members.

    Members meeting at a node of ``mid_nodes`` (not in ``keep_nodes``) are
    joined; a chain becomes one member between its two end nodes.  Chains
    that close on themselves or whose ends coincide are left as they are.
    Straightness is not checked here: pass nodes from
    :func:`find_mid_member_nodes`.  Nodes at the inside of a chain are no
    longer used by any member afterwards.

    Parameters
    ----------
    nodes, members : (n, 3) float, (b, 2) int
        As for :func:`find_mid_member_nodes`.
    mid_nodes : (k,) int
        Nodes to merge through; each must have exactly two members.
    keep_nodes : (j,) int, optional
        Nodes never merged through (supports, load points).

    Returns
    -------
    members_new : (c, 2) int64
        Merged members, ordered by their origin, each pointing the same way
        as the member it came from.
    origin : (c,) int64
        For each new member, the lowest-numbered input member of its chain.
    """
    pts = _as_nodes(nodes)
    n = len(pts)
    mem = _as_members(members, n)
    b = len(mem)
    mids = _as_ids(mid_nodes, n, "mid_nodes")
    degree = np.bincount(mem.reshape(-1), minlength=n)
    bad = np.flatnonzero(degree[mids] != 2)
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"mid_nodes[{i}] = node {int(mids[i])} has {int(degree[mids[i]])} member ends; "
            "a mid-member node must have exactly 2"
        )
    loops = mem[:, 0] == mem[:, 1]
    is_mid = np.zeros(n, dtype=bool)
    is_mid[mids] = True
    is_mid[mem[loops, 0]] = False  # a member with both ends here cannot be merged through
    if keep_nodes is not None:
        is_mid[_as_ids(keep_nodes, n, "keep_nodes")] = False
    if b == 0:
        return mem.copy(), np.zeros(0, dtype=np.int64)

    inc_node = mem.reshape(-1)
    inc_member = np.repeat(np.arange(b, dtype=np.int64), 2)
    at_mid = is_mid[inc_node]
    order = np.argsort(inc_node[at_mid], kind="stable")
    links = inc_member[at_mid][order].reshape(-1, 2)
    n_chain, chain = _ordered_labels(b, links[:, 0], links[:, 1])

    # The ends of a chain are its member ends not at a mid node; a proper
    # chain has exactly two, at different nodes.
    end_member = inc_member[~at_mid]
    end_node = inc_node[~at_mid]
    end_chain = chain[end_member]
    n_ends = np.bincount(end_chain, minlength=n_chain)
    order = np.argsort(end_chain, kind="stable")
    end_node = end_node[order]
    start = np.cumsum(n_ends) - n_ends
    good = n_ends == 2
    a_end = np.full(n_chain, -1, dtype=np.int64)
    b_end = np.full(n_chain, -1, dtype=np.int64)
    a_end[good] = end_node[start[good]]
    b_end[good] = end_node[start[good] + 1]
    good &= a_end != b_end

    first = _first_of_each_label(chain, n_chain)
    chain_ok = good[chain]
    # Members of a chain that cannot be merged stay as they are.
    loose = np.flatnonzero(~chain_ok)
    merged = np.flatnonzero(good)
    new_a = a_end[merged]
    new_b = b_end[merged]
    src = first[merged]
    # Point each merged member the way its first member points.
    ref = pts[mem[src, 1]] - pts[mem[src, 0]]
    flip = np.einsum("ij,ij->i", pts[new_b] - pts[new_a], ref) < 0
    new_a, new_b = np.where(flip, new_b, new_a), np.where(flip, new_a, new_b)

    all_src = np.concatenate([src, loose])
    all_members = np.concatenate([np.stack([new_a, new_b], axis=1), mem[loose]])
    order = np.argsort(all_src, kind="stable")
    return all_members[order].astype(np.int64), all_src[order].astype(np.int64)


def _sample_spacing(tree: cKDTree, points: FloatArray, lengths: FloatArray, tol: float) -> float:
    """Spacing of sample points along members for the neighbour search.

    Balls around samples this far apart hold only a few points when the
    spacing is near the typical distance between nodes: the median
    nearest-neighbour distance (estimated on a stride of at most ~20 000
    nodes), capped by the median member length so short members need one
    sample.
    """
    spacing = float(np.median(lengths)) if lengths.size else 1.0
    if len(points) >= 2:
        probe = points[:: max(1, len(points) // 20000)]
        dist, _ = tree.query(probe, k=2, workers=-1)
        nearest = dist[:, 1]
        nearest = nearest[nearest > tol]
        if nearest.size:
            spacing = min(spacing, float(np.median(nearest)))
    spacing = max(spacing, 4.0 * tol)
    total = float(np.ceil(lengths / spacing).sum()) if lengths.size else 0.0
    if total > _MAX_SAMPLES:
        spacing *= total / _MAX_SAMPLES
    return spacing


def _segment_samples(
    start: FloatArray, vec: FloatArray, lengths: FloatArray, spacing: float
) -> tuple[IntArray, FloatArray]:
    """Centres of equal sub-segments no longer than ``spacing``: (segment, centre)."""
    pieces = np.ceil(lengths / spacing).astype(np.int64)
    pieces[pieces < 1] = 1
    seg = np.repeat(np.arange(lengths.size, dtype=np.int64), pieces)
    offset = np.cumsum(pieces) - pieces
    local = np.arange(seg.size, dtype=np.int64) - _rows(offset, seg)
    frac = (local + 0.5) / _rows(pieces, seg)
    centres = _rows(start, seg)
    centres += _rows(vec, seg) * frac[:, None]
    return seg, centres


def _points_on_members(
    nodes: FloatArray,
    members: IntArray,
    tol: float,
    point_ids: IntArray | None = None,
) -> tuple[IntArray, IntArray, FloatArray]:
    """Nodes lying on the inside of members.

    A node is on a member when its distance to the member is below ``tol``
    and its foot on the member is more than ``tol`` from both ends (so no
    piece shorter than the tolerance is made).  Only the nodes in
    ``point_ids`` are tried when given.

    Returns
    -------
    member : (h,) int64
    node : (h,) int64
    param : (h,) float
        Position of the foot along the member, 0 at the first end, 1 at the
        second.
    """
    empty = (np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64), np.zeros(0))
    ids = np.arange(len(nodes), dtype=np.int64) if point_ids is None else point_ids
    if ids.size == 0 or len(members) == 0:
        return empty
    a = _rows(nodes, members[:, 0])
    vec = _rows(nodes, members[:, 1]) - a
    length = np.sqrt(np.einsum("ij,ij->i", vec, vec))
    eligible = np.flatnonzero(length > 2.0 * tol)
    if eligible.size == 0:
        return empty
    cand_pts = _rows(nodes, ids)
    tree = cKDTree(cand_pts, balanced_tree=False, compact_nodes=False)
    spacing = _sample_spacing(tree, cand_pts, length[eligible], tol)

    hit_m: list[IntArray] = []
    hit_n: list[IntArray] = []
    hit_t: list[FloatArray] = []
    # Chunks of members keep the sample and candidate arrays bounded.
    mean_samples = max(1.0, float(np.ceil(length[eligible] / spacing).mean()))
    per_chunk = max(1, int(_QUERY_CHUNK / mean_samples))
    for lo in range(0, eligible.size, per_chunk):
        segs = eligible[lo : lo + per_chunk]
        seg_local, centres = _segment_samples(a[segs], vec[segs], length[segs], spacing)
        # Any point within tol of a sub-segment (length <= spacing) is within
        # this radius of its centre.
        radius = math.hypot(0.5 * spacing, tol) * (1.0 + 1e-9)
        rows, cols = _ball_query(tree, centres, radius)
        m = _rows(segs, _rows(seg_local, rows))
        p = _rows(ids, cols)
        # Ends of the member itself are the commonest hit; drop them early.
        ends = _rows(members, m)
        keep = (p != ends[:, 0]) & (p != ends[:, 1])
        m, p = m[keep], p[keep]
        v = _rows(vec, m)
        w = _rows(nodes, p) - _rows(a, m)
        len_m = _rows(length, m)
        t = np.einsum("ij,ij->i", w, v) / (len_m * len_m)
        w -= v * t[:, None]  # now the perpendicular offset
        d2 = np.einsum("ij,ij->i", w, w)
        along = t * len_m
        keep = (d2 < tol * tol) & (along > tol) & (along < len_m - tol)
        hit_m.append(m[keep])
        hit_n.append(p[keep])
        hit_t.append(t[keep])
    m = np.concatenate(hit_m)
    p = np.concatenate(hit_n)
    t = np.concatenate(hit_t)
    # Neighbouring samples of one member can find the same node twice.
    key = m * len(nodes) + p
    _, first = np.unique(key, return_index=True)
    return m[first], p[first], t[first]


def _split_members(
    members: IntArray, hit_member: IntArray, hit_node: IntArray, hit_param: FloatArray
) -> tuple[IntArray, IntArray]:
    """Split members at the given nodes into consecutive pieces.

    Returns
    -------
    pieces : (b + h, 2) int64
        Pieces in the order of their members, then along each member.
    source : (b + h,) int64
        Member each piece came from.
    """
    b = len(members)
    order = np.lexsort((hit_param, hit_member))
    hm = hit_member[order]
    hn = hit_node[order]
    n_hits = np.bincount(hm, minlength=b)
    n_pieces = n_hits + 1
    offset = np.cumsum(n_pieces) - n_pieces
    pieces = np.empty((int(n_pieces.sum()), 2), dtype=np.int64)
    pieces[offset, 0] = members[:, 0]
    pieces[offset + n_hits, 1] = members[:, 1]
    hit_start = np.cumsum(n_hits) - n_hits
    rank = np.arange(hm.size, dtype=np.int64) - hit_start[hm]
    pos = offset[hm] + rank
    pieces[pos, 1] = hn
    pieces[pos + 1, 0] = hn
    source = np.repeat(np.arange(b, dtype=np.int64), n_pieces)
    return pieces, source


def _crossing_points(nodes: FloatArray, members: IntArray, tol: float) -> FloatArray:
    """Points where two members pass closer than ``tol`` inside both.

    Returns the midpoints of the closest-approach segments of each crossing
    pair; pairs sharing a node, near-parallel pairs (left to splitting at
    nodes, which handles overlaps) and approaches within ``tol`` of an end
    are not crossings.
    """
    if len(members) < 2:
        return np.zeros((0, 3))
    a = _rows(nodes, members[:, 0])
    vec = _rows(nodes, members[:, 1]) - a
    length = np.sqrt(np.einsum("ij,ij->i", vec, vec))
    eligible = np.flatnonzero(length > 2.0 * tol)
    if eligible.size < 2:
        return np.zeros((0, 3))
    node_tree = cKDTree(nodes, balanced_tree=False, compact_nodes=False)
    # Finer samples than for nodes: the number of candidate pairs grows with
    # the sample spacing, the number of samples only with its inverse; a
    # quarter of the node spacing was the fastest on a drawn double-layer grid.
    spacing = 0.25 * _sample_spacing(node_tree, nodes, length[eligible], tol)
    spacing = max(spacing, 4.0 * tol)
    # The pair search holds all samples at once (no chunks): half the cap.
    total = float(np.ceil(length[eligible] / spacing).sum())
    if total > _MAX_SAMPLES // 2:
        spacing *= total / (_MAX_SAMPLES // 2)
    seg_local, centres = _segment_samples(a[eligible], vec[eligible], length[eligible], spacing)
    tree = cKDTree(centres, balanced_tree=False, compact_nodes=False)
    # Two sub-segments (each <= spacing long) closer than tol have centres
    # closer than spacing + tol.  Around joints the pairs are many, and the
    # pair query is far faster there than bounded k-nearest queries.
    pairs = tree.query_pairs((spacing + tol) * (1.0 + 1e-9), output_type="ndarray")
    s1 = _rows(seg_local, pairs[:, 0])
    s2 = _rows(seg_local, pairs[:, 1])
    del pairs
    keep = s1 != s2
    m1 = _rows(eligible, s1[keep])
    m2 = _rows(eligible, s2[keep])
    del s1, s2, keep
    # Members meeting at a node cannot cross anywhere else (two lines meet
    # once); around joints these are nearly all the candidate pairs.
    e1 = _rows(members, m1)
    e2 = _rows(members, m2)
    apart = (e1[:, 0] != e2[:, 0]) & (e1[:, 0] != e2[:, 1])
    apart &= (e1[:, 1] != e2[:, 0]) & (e1[:, 1] != e2[:, 1])
    m1, m2 = m1[apart], m2[apart]
    del e1, e2, apart
    key = np.unique(np.minimum(m1, m2) * len(members) + np.maximum(m1, m2))
    m1, m2 = key // len(members), key % len(members)

    d1, d2 = vec[m1], vec[m2]
    r = a[m1] - a[m2]
    aa = length[m1] ** 2
    ee = length[m2] ** 2
    bb = np.einsum("ij,ij->i", d1, d2)
    cc = np.einsum("ij,ij->i", d1, r)
    ff = np.einsum("ij,ij->i", d2, r)
    denom = aa * ee - bb * bb
    # denom / (aa ee) is the squared sine of the angle between the members.
    crossing = denom > (ANGLE_TOLERANCE**2) * aa * ee
    with np.errstate(invalid="ignore", divide="ignore"):
        s = (bb * ff - cc * ee) / denom
        t = (aa * ff - bb * cc) / denom
    # Parallel pairs get parameter -1 (outside), so only crossings pass.
    s[~crossing] = -1.0
    t[~crossing] = -1.0
    s_along = s * length[m1]
    t_along = t * length[m2]
    crossing &= (s_along > tol) & (s_along < length[m1] - tol)
    crossing &= (t_along > tol) & (t_along < length[m2] - tol)
    p1 = a[m1] + d1 * s[:, None]
    p2 = a[m2] + d2 * t[:, None]
    gap = p1 - p2
    crossing &= np.einsum("ij,ij->i", gap, gap) < tol * tol
    result: FloatArray = 0.5 * (p1[crossing] + p2[crossing])
    return result
