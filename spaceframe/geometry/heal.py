"""The healing pipeline: raw centrelines to a clean frame, step by step; group remapping."""

from __future__ import annotations

import time
import warnings
from collections.abc import Mapping

import numpy as np
from numpy.typing import ArrayLike, NDArray

from spaceframe.errors import SpaceframeWarning
from spaceframe.geometry.checks import (
    _as_ids,
    _as_members,
    _as_nodes,
    _check_resolution,
    _check_tolerance,
)
from spaceframe.geometry.graph import (
    _first_locations,
    _first_of_each_label,
    _merge_labels,
    _ordered_labels,
)
from spaceframe.geometry.members import _crossing_points, _points_on_members, _split_members
from spaceframe.geometry.reports import (
    _MAX_LOCATIONS,
    _ROUND_OFF,
    HealReport,
    HealResult,
    StepReport,
    _fmt_length,
    _no_locations,
    _skipped,
    _step,
)
from spaceframe.tolerances import GEOMETRY_TOLERANCE


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
    timer = _StepTimer()
    largest_move = 0.0

    # 1. merge close nodes
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
    timer.record(rep)

    # 2. zero-length members
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
    timer.record(rep)

    # 3. split at nodes lying on members
    if split_at_nodes:
        hm, hn, ht = _points_on_members(cur_nodes, cur_members, tol)
        n_split = int(np.unique(hm).size)
        cur_members, src = _split_members(cur_members, hm, hn, ht)
        origin = origin[src]
        rep = _step("split_at_nodes", n_split, _first_locations(cur_nodes[hn]),
                    f"split {n_split} members at {hm.size} points where nodes lie on them "
                    f"(within {{0}}) into {n_split + hm.size} pieces", (tol,))
    else:
        rep = _skipped("split_at_nodes")
    timer.record(rep)

    # 4. split at crossings
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
        rep = _step("split_crossings", n_new, _first_locations(new_pts),
                    f"added {n_new} nodes where members cross (closer than {{0}}) and split "
                    f"{n_split} members into {n_split + hm.size} pieces", (tol,))
    else:
        rep = _skipped("split_crossings")
    timer.record(rep)

    # 5. duplicates
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
    timer.record(rep)

    # 6. unused nodes
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
    timer.record(rep)

    # 7. components
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
    timer.record(rep)

    return HealResult(
        nodes=cur_nodes,
        members=cur_members.astype(np.int64, copy=False),
        origin=origin,
        duplicates=duplicates.astype(np.int64, copy=False),
        node_map=node_map.astype(np.int64, copy=False),
        components=labels,
        report=HealReport(timer.steps, n_comp),
        n_raw_members=len(raw_members),
        largest_move=largest_move,
        short_removed=short_removed,
    )


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

    As :func:`remap_groups`, for node sets: ``sets`` maps each set name to
    raw node ids, and the sorted unique healed node ids (int64) come back
    per set name.
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


class _StepTimer:
    """The healing steps' reports, each timed from the end of the one before."""

    def __init__(self) -> None:
        self.steps: list[StepReport] = []
        self.clock = time.perf_counter()

    def record(self, rep: StepReport) -> None:
        rep.seconds = time.perf_counter() - self.clock
        self.steps.append(rep)
        self.clock = time.perf_counter()
