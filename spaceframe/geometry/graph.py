"""Close points and graphs: k-d tree queries, merging near nodes without chaining, parts."""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from spaceframe.errors import ModelError
from spaceframe.geometry._types import FloatArray, IntArray
from spaceframe.geometry.checks import _as_members, _as_nodes, _check_tolerance
from spaceframe.geometry.reports import _MAX_LOCATIONS, _QUERY_CHUNK


def _rows(array: NDArray[Any], index: IntArray) -> NDArray[Any]:
    """``array[index]`` for row gathers on hot paths.

    ``np.take`` along axis 0 is several times faster than fancy indexing
    for (k, 3) gathers of millions of rows with numpy 2.
    """
    return np.take(array, index, axis=0)


def _first_locations(points: FloatArray) -> FloatArray:
    return np.array(points[:_MAX_LOCATIONS], dtype=np.float64).reshape(-1, 3)


def _ordered_labels(n: int, rows: IntArray, cols: IntArray) -> tuple[int, IntArray]:
    """Connected components of an undirected graph, labelled by first vertex.

    Labels are renumbered so that label ``k`` is the component whose lowest
    vertex is the ``k``-th lowest: results then follow input order and do not
    depend on the traversal order of the graph library.
    """
    if n == 0:
        return 0, np.zeros(0, dtype=np.int64)
    if rows.size == 0:
        return n, np.arange(n, dtype=np.int64)
    graph = sparse.coo_matrix((np.ones(rows.size, dtype=bool), (rows, cols)), shape=(n, n)).tocsr()
    count, raw = csgraph.connected_components(graph, directed=False)
    raw = raw.astype(np.int64, copy=False)
    # Labels are in first-vertex order exactly when each new label is one
    # more than the largest seen so far; only renumber when that fails.
    running = np.maximum.accumulate(raw)
    if raw[0] == 0 and bool(np.all(np.diff(running) <= 1)):
        return int(count), raw
    _, first = np.unique(raw, return_index=True)
    rank = np.empty(count, dtype=np.int64)
    rank[np.argsort(first, kind="stable")] = np.arange(count, dtype=np.int64)
    return int(count), rank[raw]


def _first_of_each_label(labels: IntArray, count: int) -> IntArray:
    """Index of the first element carrying each label ``0..count-1``."""
    first = np.full(count, labels.size, dtype=np.int64)
    np.minimum.at(first, labels, np.arange(labels.size, dtype=np.int64))
    return first


def _ball_query(tree: cKDTree, points: FloatArray, radius: float) -> tuple[IntArray, IntArray]:
    """All (query row, tree point) pairs closer than ``radius`` (maybe a few more).

    Uses k-nearest queries bounded by ``radius`` (multi-threaded, array
    output) and re-asks only the rows whose k-th neighbour was still inside
    the ball, with a larger k, so no neighbour is missed.
    """
    n_tree = int(tree.n)
    out_rows: list[IntArray] = []
    out_cols: list[IntArray] = []
    if n_tree == 0 or len(points) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64)
    for start in range(0, len(points), _QUERY_CHUNK):
        rows = np.arange(start, min(start + _QUERY_CHUNK, len(points)), dtype=np.int64)
        k = 4
        while rows.size:
            kk = min(k, n_tree)
            _, idx = tree.query(_rows(points, rows), k=kk, distance_upper_bound=radius, workers=-1)
            idx = np.asarray(idx, dtype=np.int64).reshape(rows.size, kk)
            if kk < n_tree:
                overflow = idx[:, -1] < n_tree
            else:
                overflow = np.zeros(rows.size, dtype=bool)
            if overflow.any():
                done = ~overflow
                flat = idx[done].reshape(-1)
                done_rows = rows[done]
            else:
                flat = idx.reshape(-1)
                done_rows = rows
            hit = np.flatnonzero(flat < n_tree)
            out_rows.append(done_rows[hit // kk])
            out_cols.append(flat[hit])
            rows = rows[overflow]
            k *= 4
    return np.concatenate(out_rows), np.concatenate(out_cols)


def _close_pairs(points: FloatArray, tol: float) -> tuple[IntArray, IntArray]:
    """Pairs ``i < j`` of points closer than ``tol`` (strictly).

    The work grows with the square of the number of points in a cluster,
    which is harmless for joints (a few tens of line ends each).
    """
    # An unbalanced (sliding-midpoint) tree builds ~3x faster than a median
    # one and answers these tiny-radius pair queries as fast.
    tree = cKDTree(points, balanced_tree=False, compact_nodes=False)
    pairs = tree.query_pairs(tol, output_type="ndarray").astype(np.int64, copy=False)
    rows, cols = pairs[:, 0], pairs[:, 1]
    gap = _rows(points, rows) - _rows(points, cols)
    keep = np.einsum("ij,ij->i", gap, gap) < tol * tol
    return rows[keep], cols[keep]


#: Rounds of the vectorised centre clustering before the remaining
#: (chained) points are settled one by one; see :func:`_merge_labels`.
_CLUSTER_ROUNDS = 32


def _merge_labels(points: FloatArray, tol: float) -> tuple[int, IntArray, IntArray]:
    """Greedy centre clustering at radius ``tol``: (count, labels, centre index).

    Greedy centre clustering in id order: a point not within ``tol`` of an
    earlier centre becomes a centre, and every other point joins the
    lowest-id centre within ``tol``.  So no point is ever more than ``tol``
    from its cluster's kept position (single linkage would let a chain of
    close points collapse to one however long it is), and two centres are
    never closer than ``tol``.

    The order is resolved in vectorised rounds over the close pairs: a point
    is a member as soon as a lower neighbour is a centre, and a centre once
    all its lower neighbours are members.  Joints settle in a few rounds; a
    long chain of close points settles one point per round, so after
    :data:`_CLUSTER_ROUNDS` rounds the rest (chains only, a handful of
    points in real drawings) are settled by a plain loop in id order.
    """
    n = len(points)
    rows, cols = _close_pairs(points, tol)
    lo = np.minimum(rows, cols)
    hi = np.maximum(rows, cols)
    # 0 undecided, 1 centre, 2 member of an earlier centre
    state = np.zeros(n, dtype=np.int8)
    plo, phi = lo, hi
    for _ in range(_CLUSTER_ROUNDS):
        if plo.size == 0:
            break
        s_lo = state[plo]
        joined = np.zeros(n, dtype=bool)
        joined[phi[s_lo == 1]] = True
        waiting = np.zeros(n, dtype=bool)
        waiting[phi[s_lo == 0]] = True
        undecided = state == 0
        state[undecided & joined] = 2
        state[undecided & ~joined & ~waiting] = 1
        keep = state[phi] == 0
        plo, phi = plo[keep], phi[keep]
    if plo.size:
        # Chains left after the rounds: settle them in id order (see above).
        order = np.argsort(phi, kind="stable")
        plo, phi = plo[order], phi[order]
        starts = np.searchsorted(phi, np.unique(phi))
        bounds = np.append(starts, phi.size)
        for a, b in zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True):
            j = int(phi[a])
            if state[j] == 0:
                state[j] = 2 if bool(np.any(state[plo[a:b]] == 1)) else 1
    state[state == 0] = 1
    centres = np.flatnonzero(state == 1)
    centre_rank = np.full(n, -1, dtype=np.int64)
    centre_rank[centres] = np.arange(centres.size, dtype=np.int64)
    labels = centre_rank.copy()
    # Each member joins its lowest-id centre within tol (always a lower id).
    link = state[lo] == 1
    link &= state[hi] == 2
    best = np.full(n, n, dtype=np.int64)
    np.minimum.at(best, hi[link], lo[link])
    members = np.flatnonzero(state == 2)
    labels[members] = centre_rank[best[members]]
    return int(centres.size), labels, centres


def merge_close_nodes(nodes: ArrayLike, tolerance: float) -> tuple[FloatArray, IntArray]:
    """Merge nodes closer than ``tolerance`` to a kept node.

    Greedy centre clustering in id order: a node farther than ``tolerance``
    from every earlier kept node is kept, and every other node merges into
    the lowest-id kept node within ``tolerance``.  No node moves more than
    the tolerance, however many close nodes are chained (a tie drawn as
    short pieces keeps a node every tolerance along it), and no two kept
    nodes are closer than the tolerance.  The kept node is a drawn node, not
    the mean: its coordinates are exactly as drawn, merging does not move
    any node of a clean frame, and members drawn to that node keep their
    exact direction.

    Parameters
    ----------
    nodes : (n, 3) float
        Node coordinates, metres.
    tolerance : float
        Merge distance, metres, > 0.

    Returns
    -------
    unique_nodes : (m, 3) float
        One node per cluster, in order of each cluster's first node.
    node_map : (n,) int64
        For each input node, its row in ``unique_nodes``.
    """
    pts = _as_nodes(nodes)
    tol = _check_tolerance(tolerance)
    if len(pts) == 0:
        return pts.copy(), np.zeros(0, dtype=np.int64)
    _, labels, first = _merge_labels(pts, tol)
    return pts[first], labels


def connected_components(n_nodes: int, members: ArrayLike) -> tuple[int, IntArray]:
    """Connected parts of a frame.

    Parameters
    ----------
    n_nodes : int
        Number of nodes; nodes that no member uses are parts of their own.
    members : (b, 2) int
        Node-id pairs.

    Returns
    -------
    count : int
        Number of parts.
    labels : (n_nodes,) int64
        Part of each node, numbered from 0 in order of each part's lowest node.
    """
    if isinstance(n_nodes, bool) or not isinstance(n_nodes, int | np.integer) or n_nodes < 0:
        raise ModelError(f"n_nodes must be a non-negative integer; got {n_nodes!r}")
    mem = _as_members(members, int(n_nodes))
    return _ordered_labels(int(n_nodes), mem[:, 0], mem[:, 1])


def _incidences(members: IntArray) -> tuple[IntArray, IntArray, IntArray]:
    """(node, member, other end) per member end, sorted by node (stable)."""
    b = len(members)
    node = members.reshape(-1)
    member = np.repeat(np.arange(b, dtype=np.int64), 2)
    other = members[:, ::-1].reshape(-1)
    order = np.argsort(node, kind="stable")
    return node[order], member[order], other[order]
