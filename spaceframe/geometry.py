"""Healing of raw space-frame centrelines into a clean pin-jointed frame.

Centrelines taken from drawings are rarely a clean frame: joints miss by a
fraction of a millimetre, a chord is drawn as one long line through the
joints where the diagonals end, lines are drawn twice, and some lines have
both ends on the same point.  :func:`heal` turns raw ``(nodes, members)``
into a clean frame and reports every change it made, step by step.

All functions here work on plain arrays: ``nodes`` is an ``(n, 3)`` float
array of coordinates in metres and ``members`` an ``(b, 2)`` integer array of
node ids.  Nothing reads or writes files.

The search for "which nodes lie on which member" and "which members cross"
is done with a k-d tree over points sampled along the members, followed by
an exact vectorised distance test, so the cost grows with the total member
length over the node spacing rather than with the square of the size.
"""

from __future__ import annotations

import math
import time
import warnings
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree

from spaceframe.errors import ModelError, SpaceframeWarning
from spaceframe.tolerances import ANGLE_TOLERANCE, GEOMETRY_TOLERANCE

__all__ = [
    "STEP_NAMES",
    "HealReport",
    "HealResult",
    "StepReport",
    "check_coordinate_range",
    "connected_components",
    "find_mid_member_nodes",
    "heal",
    "merge_close_nodes",
    "merge_collinear_chains",
    "remap_groups",
    "remap_node_sets",
]

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]
BoolArray = NDArray[np.bool_]

#: Names of the healing steps, in the order :func:`heal` runs them.
STEP_NAMES = (
    "merge_nodes",
    "remove_zero_length",
    "split_at_nodes",
    "split_crossings",
    "remove_duplicates",
    "drop_unused_nodes",
    "components",
)

# A report lists only the first few places a step acted: enough to find the
# problem in the drawing without flooding the log for a million-line file.
_MAX_LOCATIONS = 10

# A node moved by less than this fraction of the tolerance moved by
# round-off (exactly coincident points in the drawing's own units that do
# not coincide in metres), not by a drawing error.
_ROUND_OFF = 1e-6

# Queries go to the k-d tree in chunks of this many points so the (chunk, k)
# result arrays stay a few tens of megabytes whatever the model size.
_QUERY_CHUNK = 1 << 20

# Sampling members more finely than this many points in all gives no benefit
# and would exhaust memory for a drawing with a few huge lines among tiny
# details; beyond it the sample spacing is widened.
_MAX_SAMPLES = 1 << 25


# ---------------------------------------------------------------------------
# Reports and result
# ---------------------------------------------------------------------------


def _no_locations() -> FloatArray:
    return np.zeros((0, 3), dtype=np.float64)


@dataclass
class StepReport:
    """What one healing step did.

    Attributes
    ----------
    name : str
        Step name, one of :data:`STEP_NAMES`.
    count : int
        How many things the step changed (nodes removed by merging, members
        removed, members split, crossing nodes added, nodes dropped); for
        ``"components"`` the number of connected parts.  0 when the step did
        nothing or was switched off.
    locations : (k, 3) float
        Coordinates in metres of the first ``k <= 10`` places it acted.
    detail : str
        One human sentence describing what was done.
    skipped : bool
        True when the step was switched off by the caller.
    seconds : float
        Wall-clock time the step took.
    lengths : tuple of float
        Lengths in metres quoted in the detail (tolerance, largest move).
    template : str
        The detail with ``{0}``, ``{1}``, ... in place of ``lengths``, so
        that :meth:`format` prints them in drawing units ("" when the
        detail quotes no length).
    """

    name: str
    count: int
    locations: FloatArray = field(default_factory=_no_locations)
    detail: str = ""
    skipped: bool = False
    seconds: float = 0.0
    lengths: tuple[float, ...] = ()
    template: str = ""

    def format(self, scale: float = 1.0, unit: str = "m") -> str:
        """Describe the step with its locations in drawing units.

        Parameters
        ----------
        scale : float
            Metres per drawing unit; a location is printed as
            ``coordinate / scale`` (e.g. ``scale=0.001, unit="mm"``).
        unit : str
            Name of the drawing unit, printed after the locations.

        Returns
        -------
        str
            ``"name: detail"`` followed by the locations, if any.
        """
        try:
            factor = float(scale)
        except (TypeError, ValueError):
            raise ModelError(f"scale must be a finite positive number; got {scale!r}") from None
        if not (math.isfinite(factor) and factor > 0):
            raise ModelError(f"scale must be a finite positive number; got {scale!r}")
        detail = self.detail
        if self.template:
            detail = self.template.format(*(_unit_length(x, factor, unit) for x in self.lengths))
        text = f"{self.name}: {detail}"
        locs = np.asarray(self.locations, dtype=np.float64).reshape(-1, 3) / factor
        if len(locs):
            points = "; ".join(f"({x:.6g}, {y:.6g}, {z:.6g})" for x, y, z in locs.tolist())
            more = ", ..." if self.count > len(locs) else ""
            text += f" [at {points} {unit}{more}]"
        return text

    def as_dict(self) -> dict[str, Any]:
        """JSON-able dictionary of the step (locations in metres)."""
        return {
            "name": self.name,
            "count": int(self.count),
            "locations": np.asarray(self.locations, dtype=np.float64).reshape(-1, 3).tolist(),
            "detail": self.detail,
            "skipped": bool(self.skipped),
            "seconds": float(self.seconds),
        }


@dataclass
class HealReport:
    """Step-by-step account of a :func:`heal` run.

    Attributes
    ----------
    steps : list of StepReport
        One entry per step in :data:`STEP_NAMES`, in run order.
    n_components : int
        Number of connected parts of the healed frame.
    """

    steps: list[StepReport]
    n_components: int

    def step(self, name: str) -> StepReport:
        """Return the report of the step called ``name``."""
        for rep in self.steps:
            if rep.name == name:
                return rep
        raise KeyError(f"no healing step called {name!r}; steps are {[s.name for s in self.steps]}")

    def format(self, scale: float = 1.0, unit: str = "m") -> str:
        """Multi-line text of every step, locations in drawing units."""
        parts = "part" if self.n_components == 1 else "parts"
        lines = [f"Healing report: frame in {self.n_components} {parts}"]
        lines += ["  " + rep.format(scale, unit) for rep in self.steps]
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.format()

    def as_dict(self) -> dict[str, Any]:
        """JSON-able dictionary of the whole report."""
        return {
            "n_components": int(self.n_components),
            "steps": [rep.as_dict() for rep in self.steps],
        }


@dataclass
class HealResult:
    """A healed frame and the maps back to the raw input.

    Attributes
    ----------
    nodes : (n', 3) float
        Healed node coordinates, metres.
    members : (b', 2) int64
        Healed members as node-id pairs into ``nodes``.
    origin : (b',) int64
        For each healed member, the raw member it came from; the pieces of a
        split member share their origin.
    duplicates : (d, 2) int64
        Pairs ``(removed raw member, kept healed member)``: the kept member
        stands for the removed one too, so it should carry the groups of both.
    node_map : (n,) int64
        Raw node id -> healed node id, ``-1`` when the node was dropped.
    components : (n',) int64
        Connected-component label of each healed node, numbered from 0 in
        order of first node.
    report : HealReport
        What each step did.
    n_raw_members : int
        Number of raw members given to :func:`heal` (for checking ids).
    largest_move : float
        Largest distance, m, a raw node moved by merging (never more than
        the tolerance).
    short_removed : (s,) int64
        Raw members drawn with a length that merging made zero-length and
        healing removed (shorter than the tolerance); they are warned about.
    """

    nodes: FloatArray
    members: IntArray
    origin: IntArray
    duplicates: IntArray
    node_map: IntArray
    components: IntArray
    report: HealReport
    n_raw_members: int = -1
    largest_move: float = 0.0
    short_removed: IntArray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))


# ---------------------------------------------------------------------------
# Input checks
# ---------------------------------------------------------------------------


def _as_nodes(nodes: ArrayLike) -> FloatArray:
    try:
        arr = np.asarray(nodes, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ModelError(f"nodes must be an (n, 3) array of numbers: {exc}") from None
    if arr.ndim != 2 or arr.shape[1] != 3:
        raise ModelError(f"nodes must have shape (n, 3); got shape {arr.shape}")
    bad = np.flatnonzero(~np.isfinite(arr).all(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"node {i} has non-finite coordinates {arr[i].tolist()} "
            f"({bad.size} node(s) with non-finite coordinates)"
        )
    return arr


def _as_int_array(values: ArrayLike, what: str) -> IntArray:
    """Integer array from ints or integral floats, else ModelError naming the index."""
    arr = np.asarray(values)
    if arr.dtype.kind in "iu":
        return arr.astype(np.int64, copy=False)
    if arr.dtype.kind == "f":
        flat = arr.reshape(-1)
        ok = np.isfinite(flat) & (flat == np.round(flat))
        if not ok.all():
            j = int(np.flatnonzero(~ok)[0])
            idx = np.unravel_index(j, arr.shape)
            where = idx[0] if len(idx) else j
            raise ModelError(
                f"{what} must be integer ids; {what}[{where}] has value {float(flat[j])!r}"
            )
        return arr.astype(np.int64)
    if arr.size == 0 and arr.dtype.kind == "O":
        return np.zeros(arr.shape, dtype=np.int64)
    raise ModelError(f"{what} must be integer ids; got an array of dtype {arr.dtype}")


def _as_members(members: ArrayLike, n_nodes: int) -> IntArray:
    arr = np.asarray(members)
    if arr.ndim == 1 and arr.size == 0:
        arr = arr.reshape(0, 2)
    if arr.ndim != 2 or arr.shape[1] != 2:
        raise ModelError(f"members must have shape (b, 2); got shape {arr.shape}")
    ids = _as_int_array(arr, "members")
    bad = np.flatnonzero(((ids < 0) | (ids >= n_nodes)).any(axis=1))
    if bad.size:
        i = int(bad[0])
        raise ModelError(
            f"member {i} has node ids {ids[i].tolist()}, outside 0..{n_nodes - 1} "
            f"({bad.size} member(s) out of range)"
        )
    return ids


def _as_ids(values: ArrayLike, upper: int, what: str) -> IntArray:
    """1-D ids in ``0..upper-1`` (``upper < 0``: no upper check)."""
    arr = np.asarray(values)
    if arr.ndim == 0:
        arr = arr.reshape(1)
    if arr.ndim != 1:
        raise ModelError(f"{what} must be a 1-D array of ids; got shape {arr.shape}")
    ids = _as_int_array(arr, what)
    bad = ids < 0
    if upper >= 0:
        bad |= ids >= upper
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        limit = f"0..{upper - 1}" if upper >= 0 else "0 or more"
        raise ModelError(f"{what}[{i}] = {int(ids[i])} is outside {limit}")
    return ids


def _check_tolerance(tolerance: float, what: str = "tolerance") -> float:
    try:
        tol = float(tolerance)
    except (TypeError, ValueError):
        raise ModelError(f"{what} must be a number; got {tolerance!r}") from None
    if not (math.isfinite(tol) and tol > 0.0):
        raise ModelError(f"{what} must be finite and > 0; got {tolerance!r}")
    return tol


#: Float64 coordinates carry a round-off of about ``eps * |x|``; healing
#: needs it to be this many times smaller than the tolerance, or distances
#: compared with the tolerance are round-off (and squared distances in the
#: k-d tree overflow long before the coordinates do).
_RESOLUTION = 1.0e3


def _check_resolution(nodes: FloatArray, tol: float) -> None:
    """ModelError when coordinates are too large to resolve the tolerance."""
    if len(nodes) == 0:
        return
    big = float(np.abs(nodes).max())
    with np.errstate(over="ignore", invalid="ignore"):
        span = float(np.max(nodes.max(axis=0) - nodes.min(axis=0)))
    limit = tol / (_RESOLUTION * float(np.finfo(np.float64).eps))
    if not (math.isfinite(span) and big <= limit):
        raise ModelError(
            f"coordinates reach {big:.3g} m (the frame is {span:.3g} m across): at that size "
            f"a tolerance of {_fmt_length(tol)} cannot be resolved (coordinates must stay "
            f"within {limit:.3g} m of the origin): are the units right?"
        )


def check_coordinate_range(nodes: ArrayLike, tolerance: float = GEOMETRY_TOLERANCE) -> None:
    """Refuse coordinates too large for ``tolerance`` (m) to be resolved in float64.

    Raises
    ------
    ModelError
        When some coordinate exceeds ``tolerance / (1000 eps)`` (4.5e9 m at
        1 mm) or the frame's extent is not finite, naming both.
    """
    _check_resolution(_as_nodes(nodes), _check_tolerance(tolerance))


# ---------------------------------------------------------------------------
# Small array helpers
# ---------------------------------------------------------------------------


def _fmt_length(x: float) -> str:
    """Length in metres as short text, small lengths in mm."""
    if x < 1.0:
        return f"{x * 1e3:.3g} mm"
    return f"{x:.4g} m"


def _unit_length(x: float, scale: float, unit: str) -> str:
    """Length in metres as short text in a drawing unit (``scale`` metres per unit)."""
    return f"{x / scale:.4g} {unit}"


def _step(name: str, count: int, locations: FloatArray, template: str,
          lengths: tuple[float, ...] = ()) -> StepReport:
    """A step report whose detail quotes ``lengths`` (m) through ``template``."""
    detail = template.format(*(_fmt_length(x) for x in lengths))
    return StepReport(name, count, locations, detail, lengths=lengths, template=template)


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


# ---------------------------------------------------------------------------
# Public building blocks
# ---------------------------------------------------------------------------


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
    nodes : (n, 3) float
        Node coordinates, metres.
    members : (b, 2) int
        Node-id pairs.
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


# ---------------------------------------------------------------------------
# Splitting
# ---------------------------------------------------------------------------


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


# ---------------------------------------------------------------------------
# heal
# ---------------------------------------------------------------------------


def _skipped(name: str) -> StepReport:
    return StepReport(name, 0, _no_locations(), "skipped (switched off)", skipped=True)


def heal(
    nodes: ArrayLike,
    members: ArrayLike,
    *,
    tolerance: float = GEOMETRY_TOLERANCE,
    merge_nodes: bool = True,
    split_at_nodes: bool = True,
    split_crossings: bool = False,
    remove_zero_length: bool = True,
    remove_duplicates: bool = True,
    drop_unused_nodes: bool = True,
    keep_nodes: ArrayLike | None = None,
) -> HealResult:
    """Turn raw centrelines into a clean frame, reporting every change.

    Steps, in order (each can be switched off and is reported either way):

    1. ``merge_nodes``: nodes within ``tolerance`` of an earlier kept node
       merge into it (see :func:`merge_close_nodes`); no node moves more
       than ``tolerance``.
    2. ``remove_zero_length``: members whose two ends are now the same node
       are removed.
    3. ``split_at_nodes``: a member is split at every node closer than
       ``tolerance`` to it whose foot is more than ``tolerance`` from both
       ends, into consecutive pieces.
    4. ``split_crossings`` (off by default): where two members pass closer
       than ``tolerance`` inside both, a node is added (crossing points
       closer than ``tolerance`` share one) and both are split there.
    5. ``remove_duplicates``: of members joining the same two nodes (either
       way round) the first is kept; see ``HealResult.duplicates``.
    6. ``drop_unused_nodes``: nodes no member uses are dropped, except
       ``keep_nodes``.
    7. ``components``: connected parts are counted; more than one gives a
       :class:`~spaceframe.errors.SpaceframeWarning`.

    Parameters
    ----------
    nodes : (n, 3) float
        Raw node coordinates, metres.
    members : (b, 2) int
        Raw members as node-id pairs.
    tolerance : float
        Geometric tolerance, metres, > 0.
    merge_nodes, split_at_nodes, split_crossings, remove_zero_length, \
remove_duplicates, drop_unused_nodes : bool
        Switch each step on or off.
    keep_nodes : (k,) int, optional
        Raw node ids kept even if no member uses them (e.g. supports).

    Returns
    -------
    HealResult
        Healed frame, maps back to the raw ids and the report.

    Raises
    ------
    ModelError
        Nodes not ``(n, 3)`` finite, members not ``(b, 2)`` ids in range,
        tolerance not > 0, keep_nodes out of range.
    """
    raw_nodes = _as_nodes(nodes)
    n_raw = len(raw_nodes)
    raw_members = _as_members(members, n_raw)
    tol = _check_tolerance(tolerance)
    keep_raw = (
        np.zeros(0, dtype=np.int64)
        if keep_nodes is None
        else _as_ids(keep_nodes, n_raw, "keep_nodes")
    )
    tol_text = _fmt_length(tol)
    _check_resolution(raw_nodes, tol)
    steps: list[StepReport] = []
    largest_move = 0.0

    # 1. merge close nodes
    clock = time.perf_counter()
    if merge_nodes and n_raw:
        count, node_map, first = _merge_labels(raw_nodes, tol)
        cur_nodes = raw_nodes[first]
        sizes = np.bincount(node_map, minlength=count)
        multi = np.flatnonzero(sizes > 1)
        merged_nodes = int(sizes[multi].sum())
        spread = np.linalg.norm(raw_nodes - cur_nodes[node_map], axis=1)
        largest_move = float(spread.max())
        if multi.size and largest_move <= _ROUND_OFF * tol:
            rep = _step("merge_nodes", n_raw - count, _first_locations(cur_nodes[multi]),
                        f"merged {merged_nodes} nodes into {multi.size} (each within {{0}} "
                        "of the node kept); they moved by round-off only", (tol,))
        elif multi.size:
            rep = _step("merge_nodes", n_raw - count, _first_locations(cur_nodes[multi]),
                        f"merged {merged_nodes} nodes into {multi.size} (each within {{0}} "
                        "of the node kept); largest move {1}", (tol, largest_move))
        else:
            rep = _step("merge_nodes", 0, _no_locations(), "no nodes closer than {0}", (tol,))
    elif merge_nodes:
        cur_nodes = raw_nodes.copy()
        node_map = np.zeros(0, dtype=np.int64)
        rep = StepReport("merge_nodes", 0, _no_locations(), "no nodes to merge")
    else:
        cur_nodes = raw_nodes.copy()
        node_map = np.arange(n_raw, dtype=np.int64)
        rep = _skipped("merge_nodes")
    cur_members = node_map[raw_members] if len(raw_members) else raw_members.copy()
    origin = np.arange(len(raw_members), dtype=np.int64)
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 2. zero-length members
    clock = time.perf_counter()
    short_removed = np.zeros(0, dtype=np.int64)
    if remove_zero_length:
        zero = cur_members[:, 0] == cur_members[:, 1]
        n_zero = int(zero.sum())
        # Members drawn with a length (not both ends on one point) that
        # merging made zero-length were shorter than twice the tolerance.
        drawn = raw_nodes[raw_members[zero, 1]] - raw_nodes[raw_members[zero, 0]]
        drawn_len = np.linalg.norm(drawn, axis=1)
        short_removed = origin[zero][drawn_len > 0]
        if short_removed.size:
            longest = float(drawn_len.max())
            rep = _step(
                "remove_zero_length", n_zero, _first_locations(cur_nodes[cur_members[zero, 0]]),
                f"removed {n_zero} zero-length members (both ends on the same node), "
                f"{short_removed.size} of them drawn with a length (up to {{0}}) and "
                "shorter than the tolerance {1} apart after merging", (longest, tol))
            warnings.warn(
                f"healing removed {short_removed.size} drawn member(s) shorter than the "
                f"merge tolerance {tol_text} (raw member ids "
                + ", ".join(str(int(i)) for i in short_removed[:_MAX_LOCATIONS])
                + (", ..." if short_removed.size > _MAX_LOCATIONS else "")
                + "); if they are real members, lower the tolerance",
                SpaceframeWarning,
                stacklevel=2,
            )
        else:
            rep = StepReport(
                "remove_zero_length",
                n_zero,
                _first_locations(cur_nodes[cur_members[zero, 0]]),
                f"removed {n_zero} zero-length members (both ends on the same node)",
            )
        cur_members, origin = cur_members[~zero], origin[~zero]
    else:
        rep = _skipped("remove_zero_length")
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 3. split at nodes lying on members
    clock = time.perf_counter()
    if split_at_nodes:
        hm, hn, ht = _points_on_members(cur_nodes, cur_members, tol)
        n_split = int(np.unique(hm).size)
        cur_members, src = _split_members(cur_members, hm, hn, ht)
        origin = origin[src]
        rep = StepReport(
            "split_at_nodes",
            n_split,
            _first_locations(cur_nodes[hn]),
            f"split {n_split} members at {hm.size} points where nodes lie on them "
            f"(within {tol_text}) into {n_split + hm.size} pieces",
            lengths=(tol,),
            template=f"split {n_split} members at {hm.size} points where nodes lie on them "
            f"(within {{0}}) into {n_split + hm.size} pieces",
        )
    else:
        rep = _skipped("split_at_nodes")
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 4. split at crossings
    clock = time.perf_counter()
    if split_crossings:
        cross = _crossing_points(cur_nodes, cur_members, tol)
        if len(cross):
            # Three or more members crossing at one point give several
            # nearly equal points: they must become one node.
            n_new, _, first = _merge_labels(cross, tol)
            new_pts = cross[first]
            new_ids = np.arange(len(cur_nodes), len(cur_nodes) + n_new, dtype=np.int64)
            cur_nodes = np.concatenate([cur_nodes, new_pts])
            hm, hn, ht = _points_on_members(cur_nodes, cur_members, tol, new_ids)
            n_split = int(np.unique(hm).size)
            cur_members, src = _split_members(cur_members, hm, hn, ht)
            origin = origin[src]
        else:
            n_new, n_split, new_pts, hm = 0, 0, cross, np.zeros(0, dtype=np.int64)
        rep = StepReport(
            "split_crossings",
            n_new,
            _first_locations(new_pts),
            f"added {n_new} nodes where members cross (closer than {tol_text}) and split "
            f"{n_split} members into {n_split + hm.size} pieces",
            lengths=(tol,),
            template=f"added {n_new} nodes where members cross (closer than {{0}}) and split "
            f"{n_split} members into {n_split + hm.size} pieces",
        )
    else:
        rep = _skipped("split_crossings")
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 5. duplicates
    clock = time.perf_counter()
    duplicates = np.zeros((0, 2), dtype=np.int64)
    if remove_duplicates and len(cur_members):
        lo = cur_members.min(axis=1)
        hi = cur_members.max(axis=1)
        key = lo * max(len(cur_nodes), 1) + hi
        # return_index gives the first occurrence (numpy sorts stably here).
        _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
        keep = np.zeros(len(cur_members), dtype=bool)
        keep[first] = True
        removed = np.flatnonzero(~keep)
        new_index = np.cumsum(keep) - 1
        kept_for = first[inverse.reshape(-1)[removed]]
        duplicates = np.unique(
            np.stack([origin[removed], new_index[kept_for]], axis=1), axis=0
        ).reshape(-1, 2)
        mid = 0.5 * (cur_nodes[cur_members[removed, 0]] + cur_nodes[cur_members[removed, 1]])
        rep = StepReport(
            "remove_duplicates",
            int(removed.size),
            _first_locations(mid),
            f"removed {removed.size} duplicate members (same two nodes); the first of "
            "each set is kept and takes the groups of the others",
        )
        cur_members, origin = cur_members[keep], origin[keep]
    elif remove_duplicates:
        rep = StepReport("remove_duplicates", 0, _no_locations(), "removed 0 duplicate members")
    else:
        rep = _skipped("remove_duplicates")
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 6. unused nodes
    clock = time.perf_counter()
    if drop_unused_nodes:
        used = np.zeros(len(cur_nodes), dtype=bool)
        used[cur_members.reshape(-1)] = True
        n_unused = int((~used).sum())
        if keep_raw.size:
            used[node_map[keep_raw]] = True
        dropped = np.flatnonzero(~used)
        renumber = np.cumsum(used) - 1
        renumber[dropped] = -1
        rep = StepReport(
            "drop_unused_nodes",
            int(dropped.size),
            _first_locations(cur_nodes[dropped]),
            f"dropped {dropped.size} nodes no member uses"
            + (f" ({n_unused - dropped.size} kept on request)" if keep_raw.size else ""),
        )
        cur_nodes = cur_nodes[used]
        cur_members = renumber[cur_members]
        node_map = renumber[node_map]
    else:
        rep = _skipped("drop_unused_nodes")
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    # 7. components
    clock = time.perf_counter()
    n_comp, labels = _ordered_labels(len(cur_nodes), cur_members[:, 0], cur_members[:, 1])
    if n_comp > 1:
        sizes = np.bincount(labels, minlength=n_comp)
        firsts = _first_of_each_label(labels, n_comp)
        shown = ", ".join(str(int(s)) for s in sizes[:_MAX_LOCATIONS])
        more = ", ..." if n_comp > _MAX_LOCATIONS else ""
        detail = f"the frame is in {n_comp} separate parts (nodes per part: {shown}{more})"
        rep = StepReport("components", n_comp, _first_locations(cur_nodes[firsts]), detail)
        warnings.warn(
            f"healed frame is in {n_comp} separate parts (nodes per part: {shown}{more}); "
            "first nodes of the parts are listed in the heal report",
            SpaceframeWarning,
            stacklevel=2,
        )
    else:
        detail = "the frame is in one part" if n_comp == 1 else "the frame is empty"
        rep = StepReport("components", n_comp, _no_locations(), detail)
    rep.seconds = time.perf_counter() - clock
    steps.append(rep)

    return HealResult(
        nodes=cur_nodes,
        members=cur_members.astype(np.int64, copy=False),
        origin=origin,
        duplicates=duplicates.astype(np.int64, copy=False),
        node_map=node_map.astype(np.int64, copy=False),
        components=labels,
        report=HealReport(steps, n_comp),
        n_raw_members=len(raw_members),
        largest_move=largest_move,
        short_removed=short_removed,
    )


# ---------------------------------------------------------------------------
# Carrying groups and node sets through healing
# ---------------------------------------------------------------------------


def remap_groups(
    groups: Mapping[str, ArrayLike], result: HealResult
) -> dict[str, NDArray[np.int64]]:
    """Carry member groups from raw member ids to healed member ids.

    A group gets every piece of its raw members, and each kept member that
    a raw member of the group duplicated.  Raw members removed as zero
    length have no healed member (the heal report lists them).

    Parameters
    ----------
    groups : dict of str to (g,) int
        Raw member ids per group name.
    result : HealResult
        Result of :func:`heal` on those raw members.

    Returns
    -------
    dict of str to (g',) int64
        Sorted unique healed member ids per group.
    """
    out: dict[str, NDArray[np.int64]] = {}
    dup = result.duplicates.reshape(-1, 2)
    for name, ids in groups.items():  # one pass per group, not per member
        raw = _as_ids(ids, result.n_raw_members, f"group {name!r}")
        pieces = np.flatnonzero(np.isin(result.origin, raw))
        kept = dup[np.isin(dup[:, 0], raw), 1]
        out[name] = np.unique(np.concatenate([pieces, kept])).astype(np.int64)
    return out


def remap_node_sets(
    sets: Mapping[str, ArrayLike], result: HealResult
) -> dict[str, NDArray[np.int64]]:
    """Carry node sets from raw node ids to healed node ids.

    Merged nodes collapse to one id.  A raw node that healing dropped (no
    member used it and it was not in ``keep_nodes``) cannot be carried: it
    is left out with a :class:`~spaceframe.errors.SpaceframeWarning` naming
    the set and the nodes.

    Parameters
    ----------
    sets : dict of str to (s,) int
        Raw node ids per set name.
    result : HealResult
        Result of :func:`heal` on those raw nodes.

    Returns
    -------
    dict of str to (s',) int64
        Sorted unique healed node ids per set.
    """
    out: dict[str, NDArray[np.int64]] = {}
    for name, ids in sets.items():  # one pass per set, not per node
        raw = _as_ids(ids, len(result.node_map), f"node set {name!r}")
        new = result.node_map[raw]
        lost = raw[new < 0]
        if lost.size:
            shown = ", ".join(str(int(i)) for i in lost[:_MAX_LOCATIONS])
            warnings.warn(
                f"node set {name!r}: {lost.size} raw node(s) were dropped by healing "
                f"(e.g. {shown}); pass them as keep_nodes to keep them",
                SpaceframeWarning,
                stacklevel=2,
            )
        out[name] = np.unique(new[new >= 0]).astype(np.int64)
    return out
