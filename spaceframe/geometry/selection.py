"""Selections: safe, declarative descriptions of sets of nodes, members or panels.

A selection is a small tree of frozen dataclasses - never code to evaluate.
The same tree can pick nodes, members or load panels; criteria that are
naturally about nodes (a box, a plane, marker points, a node set) pick the
members whose two end nodes are both picked, and the panels whose corners
are all picked.  Criteria that are naturally about members pick the nodes
at their ends.

=================  ==========================================================
Selector           picks
=================  ==========================================================
:class:`All`       everything
:class:`Ids`       the listed ids (node, member or panel ids by context)
:class:`Group`     member groups / panel groups by name (DXF layer, mesh group)
:class:`NodeSet`   named node sets (e.g. mesh point sets)
:class:`Box`       nodes inside an axis-aligned box (bounds widened by the tolerance)
:class:`Plane`     nodes on a plane n.x = at, ``at`` a value or "min" / "max"
:class:`Markers`   for each marker point on the layers, the node nearest to it
:class:`Points`    for each listed point, the node nearest to it
:class:`Union`, :class:`Intersection`, :class:`Difference`   set algebra
:class:`Ref`       another named selection
=================  ==========================================================

Every function raises :class:`~spaceframe.errors.ModelError` with the
caller's label (``where``), e.g. ``selections.base``, in its message: for an
unknown group or layer, a marker with no node within the tolerance, a
reference cycle, and a selection that selects nothing.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Literal

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.model.arrays import checked_ids
from spaceframe.tolerances import GEOMETRY_TOLERANCE

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = [
    "All",
    "Box",
    "Difference",
    "Group",
    "Ids",
    "Intersection",
    "Markers",
    "NodeSet",
    "Plane",
    "Points",
    "Ref",
    "Selector",
    "Target",
    "Union",
    "describe",
    "members_within",
    "nodes_of_members",
    "nodes_of_panels",
    "panels_within",
    "references",
    "select",
    "select_members",
    "select_nodes",
    "select_panels",
]

Target = Literal["nodes", "members", "panels"]


@dataclass(frozen=True)
class All:
    """Every node, member or panel."""


@dataclass(frozen=True)
class Ids:
    """Explicit ids, read as node, member or panel ids by context."""

    ids: tuple[int, ...]


@dataclass(frozen=True)
class _Named:
    """A selector of named sets (its subclasses say which sets)."""

    names: tuple[str, ...]


class Group(_Named):
    """Named groups: member groups, and panel groups of the same names."""


class NodeSet(_Named):
    """Named node sets."""


@dataclass(frozen=True)
class Box:
    """Nodes with lower <= x <= upper per axis (m), the bounds widened by the tolerance."""

    lower: tuple[float, float, float]
    upper: tuple[float, float, float]
    tolerance: float | None = None

    def __post_init__(self) -> None:
        lo, hi = np.asarray(self.lower, dtype=float), np.asarray(self.upper, dtype=float)
        if lo.shape != (3,) or hi.shape != (3,):
            raise ModelError(
                f"box: corners must have 3 coordinates, got {self.lower}, {self.upper}"
            )
        if np.any(np.isnan(lo)) or np.any(np.isnan(hi)):
            raise ModelError(f"box: a corner coordinate is NaN ({self.lower}, {self.upper})")
        bad = np.flatnonzero(lo > hi)
        if bad.size:
            j = int(bad[0])
            raise ModelError(
                f"box: lower {'xyz'[j]} = {float(lo[j])!r} is above upper {'xyz'[j]} = "
                f"{float(hi[j])!r}"
            )


@dataclass(frozen=True)
class Plane:
    """Nodes within the tolerance of the plane n.x = at (n normalised here).

    ``at`` is a distance along the unit normal in metres, or "min" / "max"
    for the lowest / highest value of n.x over all nodes.
    """

    normal: tuple[float, float, float]
    at: float | Literal["min", "max"]
    tolerance: float | None = None

    def __post_init__(self) -> None:
        n = np.asarray(self.normal, dtype=float)
        if n.shape != (3,) or not np.all(np.isfinite(n)) or not np.any(n):
            raise ModelError(f"plane: normal {self.normal!r} must be 3 finite numbers, not all 0")
        if isinstance(self.at, str):
            if self.at not in ("min", "max"):
                raise ModelError(f"plane: at = {self.at!r} must be a number, 'min' or 'max'")
        elif not math.isfinite(self.at):
            raise ModelError(f"plane: at = {self.at!r} must be finite")


@dataclass(frozen=True)
class Markers:
    """For every marker point on the layers, the node nearest to it."""

    layers: tuple[str, ...]
    tolerance: float | None = None


@dataclass(frozen=True)
class Points:
    """For every point (m), the node nearest to it."""

    xyz: tuple[tuple[float, float, float], ...]
    tolerance: float | None = None


@dataclass(frozen=True)
class _Combined:
    """Set algebra over parts (its subclasses say which)."""

    parts: tuple[Selector, ...]


class Union(_Combined):
    """Picked by any part."""


class Intersection(_Combined):
    """Picked by every part."""


class Difference(_Combined):
    """Picked by the first part and by none of the others."""


@dataclass(frozen=True)
class Ref:
    """Another selection, by its name in the table of named selections."""

    name: str


Selector = (
    All | Ids | Group | NodeSet | Box | Plane | Markers | Points | Union | Intersection
    | Difference | Ref
)

_NODE_CRITERIA = (NodeSet, Box, Plane, Markers, Points)


# --------------------------------------------------------------- conversions
def members_within(members: np.ndarray, node_mask: np.ndarray) -> np.ndarray:
    """(b,) bool: members whose two end nodes are both in ``node_mask`` ((n,) bool)."""
    return np.asarray(node_mask[members].all(axis=1), dtype=bool)


def nodes_of_members(members: np.ndarray, member_mask: np.ndarray, n_nodes: int) -> np.ndarray:
    """(n,) bool: nodes at either end of a member in ``member_mask`` ((b,) bool)."""
    mask = np.zeros(n_nodes, dtype=bool)
    mask[members[member_mask].ravel()] = True
    return mask


def panels_within(
    panel_nodes: np.ndarray, panel_offsets: np.ndarray, node_mask: np.ndarray
) -> np.ndarray:
    """(k,) bool: panels whose corner nodes are all in ``node_mask`` ((n,) bool)."""
    if panel_offsets.size <= 1:
        return np.zeros(0, dtype=bool)
    return np.logical_and.reduceat(node_mask[panel_nodes], panel_offsets[:-1])


def nodes_of_panels(
    panel_nodes: np.ndarray, panel_offsets: np.ndarray, panel_mask: np.ndarray, n_nodes: int
) -> np.ndarray:
    """(n,) bool: corner nodes of the panels in ``panel_mask`` ((k,) bool)."""
    owner = np.repeat(np.arange(panel_offsets.size - 1), np.diff(panel_offsets))
    mask = np.zeros(n_nodes, dtype=bool)
    mask[panel_nodes[panel_mask[owner]]] = True
    return mask


# ---------------------------------------------------------------- evaluation
@dataclass
class _Context:
    model: Model
    where: str
    named: Mapping[str, Selector]
    tolerance: float
    stack: list[str] = field(default_factory=list)


def _size(model: Model, target: Target) -> int:
    return {"nodes": model.n_nodes, "members": model.n_members, "panels": model.n_panels}[target]


def _hint(name: str, known: Iterable[str]) -> str:
    known = sorted(known)
    # Layer names are short and often abbreviated: a lower cutoff than difflib's.
    close = difflib.get_close_matches(name, known, n=3, cutoff=0.5)
    text = f"; did you mean {' or '.join(repr(c) for c in close)}?" if close else ""
    listed = ", ".join(repr(k) for k in known[:20]) + (" ..." if len(known) > 20 else "")
    return f"{text} (known: {listed or 'none'})"


def _group(ctx: _Context, sel: Group, target: Target) -> np.ndarray:
    m = ctx.model
    out = np.zeros(_size(m, target), dtype=bool)
    for name in sel.names:
        in_members = name in m.groups
        in_panels = name in m.panel_groups
        if not (in_members or in_panels):
            raise ModelError(
                f"{ctx.where}: no group named {name!r}"
                + _hint(name, set(m.groups) | set(m.panel_groups))
            )
        if target == "members":
            if not in_members:
                raise ModelError(
                    f"{ctx.where}: group {name!r} holds panels only, no members"
                )
            out[m.groups[name]] = True
        elif target == "panels":
            if not in_panels:
                raise ModelError(
                    f"{ctx.where}: group {name!r} holds members only, no load panels"
                    + _hint(name, m.panel_groups)
                )
            out[m.panel_groups[name]] = True
        else:
            if in_members:
                out |= nodes_of_members(m.members, _ids_mask(m.groups[name], m.n_members),
                                        m.n_nodes)
            if in_panels:
                out |= nodes_of_panels(m.panel_nodes, m.panel_offsets,
                                       _ids_mask(m.panel_groups[name], m.n_panels), m.n_nodes)
    return out


def _ids_mask(ids: np.ndarray, size: int) -> np.ndarray:
    mask = np.zeros(size, dtype=bool)
    mask[ids] = True
    return mask


def _nearest(ctx: _Context, points: np.ndarray, tol: float, what: str) -> np.ndarray:
    m = ctx.model
    mask = np.zeros(m.n_nodes, dtype=bool)
    if points.shape[0] == 0:
        return mask
    if m.n_nodes == 0:
        raise ModelError(f"{ctx.where}: the model has no nodes to match {what} to")
    tree = m.node_tree()
    dist, idx = tree.query(points, k=1, distance_upper_bound=tol)
    missing = np.flatnonzero(~np.isfinite(dist))
    if missing.size:
        j = int(missing[0])
        d_near, i_near = tree.query(points[j], k=1)
        raise ModelError(
            f"{ctx.where}: {what} {j} at {points[j].tolist()} m has no node within "
            f"{tol:g} m (nearest is node {int(i_near)} at {d_near:.4g} m)"
            + (f"; {missing.size} such points in all" if missing.size > 1 else "")
        )
    mask[idx] = True
    return mask


def _node_mask(ctx: _Context, sel: Selector) -> np.ndarray:
    m = ctx.model
    n = m.n_nodes
    if isinstance(sel, NodeSet):
        out = np.zeros(n, dtype=bool)
        for name in sel.names:
            if name not in m.node_sets:
                raise ModelError(f"{ctx.where}: no node set named {name!r}"
                                 + _hint(name, m.node_sets))
            out[m.node_sets[name]] = True
        return out
    if isinstance(sel, Box):
        tol = ctx.tolerance if sel.tolerance is None else sel.tolerance
        lo = np.asarray(sel.lower, dtype=float) - tol
        hi = np.asarray(sel.upper, dtype=float) + tol
        return np.asarray(np.all((m.nodes >= lo) & (m.nodes <= hi), axis=1), dtype=bool)
    if isinstance(sel, Plane):
        tol = ctx.tolerance if sel.tolerance is None else sel.tolerance
        normal = np.asarray(sel.normal, dtype=float)
        dist = m.nodes @ (normal / np.linalg.norm(normal))
        if dist.size == 0:
            return np.zeros(0, dtype=bool)
        at = dist.min() if sel.at == "min" else dist.max() if sel.at == "max" else float(sel.at)
        return np.asarray(np.abs(dist - at) <= tol, dtype=bool)
    if isinstance(sel, Markers):
        tol = ctx.tolerance if sel.tolerance is None else sel.tolerance
        layers = np.asarray(m.marker_layers, dtype=object)
        take = np.zeros(layers.shape[0], dtype=bool)
        for name in sel.layers:
            hit = layers == name
            if not np.any(hit):
                raise ModelError(f"{ctx.where}: no marker points on layer {name!r}"
                                 + _hint(name, {str(v) for v in layers}))
            take |= hit
        return _nearest(ctx, np.asarray(m.markers, dtype=float)[take], tol, "marker")
    if isinstance(sel, Points):
        tol = ctx.tolerance if sel.tolerance is None else sel.tolerance
        return _nearest(ctx, np.asarray(sel.xyz, dtype=float).reshape(-1, 3), tol, "point")
    raise TypeError(f"not a node criterion: {sel!r}")


def _mask(ctx: _Context, sel: Selector, target: Target) -> np.ndarray:
    m = ctx.model
    size = _size(m, target)
    if isinstance(sel, All):
        return np.ones(size, dtype=bool)
    if isinstance(sel, Ids):
        ids = checked_ids(sel.ids, ctx.where, target[:-1], size)
        return _ids_mask(ids, size)
    if isinstance(sel, Group):
        return _group(ctx, sel, target)
    if isinstance(sel, _NODE_CRITERIA):
        nodes = _node_mask(ctx, sel)
        if target == "nodes":
            return nodes
        if target == "members":
            return members_within(m.members, nodes)
        return panels_within(m.panel_nodes, m.panel_offsets, nodes)
    if isinstance(sel, Union | Intersection | Difference):
        masks = [_mask(ctx, part, target) for part in sel.parts]
        if not masks:
            return np.zeros(size, dtype=bool)
        if isinstance(sel, Union):
            return np.logical_or.reduce(masks)
        if isinstance(sel, Intersection):
            return np.logical_and.reduce(masks)
        rest = np.logical_or.reduce(masks[1:]) if len(masks) > 1 else np.zeros(size, dtype=bool)
        return masks[0] & ~rest
    if isinstance(sel, Ref):
        if sel.name not in ctx.named:
            raise ModelError(f"{ctx.where}: no selection named {sel.name!r}"
                             + _hint(sel.name, ctx.named))
        if sel.name in ctx.stack:
            cycle = " -> ".join([*ctx.stack[ctx.stack.index(sel.name):], sel.name])
            raise ModelError(f"{ctx.where}: selections refer to each other in a cycle: {cycle}")
        ctx.stack.append(sel.name)
        try:
            return _mask(ctx, ctx.named[sel.name], target)
        finally:
            ctx.stack.pop()
    raise TypeError(f"not a selector: {sel!r}")


def select(
    model: Model,
    selector: Selector,
    target: Target,
    *,
    where: str = "selection",
    named: Mapping[str, Selector] | None = None,
    tolerance: float = GEOMETRY_TOLERANCE,
    allow_empty: bool = False,
) -> np.ndarray:
    """Ids picked by a selector.

    Parameters
    ----------
    model : Model
    selector : Selector
    target : {"nodes", "members", "panels"}
    where : str
        Label for messages, e.g. the key path ``supports[0].nodes``.
    named : dict, optional
        Named selections that :class:`Ref` may refer to.
    tolerance : float
        Default geometric tolerance, m, for boxes, planes, markers and points.
    allow_empty : bool
        Return an empty array instead of raising when nothing is picked.

    Returns
    -------
    ids : (k,) int
        Sorted, unique.

    Raises
    ------
    ModelError
        Naming ``where``: unknown names, out-of-range ids, a marker or point
        with no node near it, a reference cycle, or an empty result.
    """
    ctx = _Context(model, where, named or {}, float(tolerance))
    mask = _mask(ctx, selector, target)
    ids = np.flatnonzero(mask).astype(np.int64)
    if ids.size == 0 and not allow_empty:
        raise ModelError(f"{where} ({describe(selector)}) selects no {target}")
    return ids


def select_nodes(model: Model, selector: Selector, **kwargs: object) -> np.ndarray:
    """Node ids picked by ``selector``; keywords as for :func:`select`."""
    return select(model, selector, "nodes", **kwargs)  # type: ignore[arg-type]


def select_members(model: Model, selector: Selector, **kwargs: object) -> np.ndarray:
    """Member ids picked by ``selector``; keywords as for :func:`select`."""
    return select(model, selector, "members", **kwargs)  # type: ignore[arg-type]


def select_panels(model: Model, selector: Selector, **kwargs: object) -> np.ndarray:
    """Panel ids picked by ``selector``; keywords as for :func:`select`."""
    return select(model, selector, "panels", **kwargs)  # type: ignore[arg-type]


def references(selector: Selector) -> set[str]:
    """Names of the named selections that ``selector`` refers to directly."""
    if isinstance(selector, Ref):
        return {selector.name}
    if isinstance(selector, Union | Intersection | Difference):
        return set().union(*(references(p) for p in selector.parts))
    return set()


#: Selectors described by a word and the names they list: type -> (word, attribute).
_LISTED: dict[type, tuple[str, str]] = {
    Group: ("group", "names"),
    NodeSet: ("node set", "names"),
    Markers: ("markers on", "layers"),
}


def describe(selector: Selector) -> str:
    """A short human-readable description, for messages and reports."""
    s = selector
    if isinstance(s, All):
        return "all"
    if isinstance(s, Ids):
        shown = ", ".join(str(i) for i in s.ids[:6]) + (", ..." if len(s.ids) > 6 else "")
        return f"ids [{shown}]"
    if isinstance(s, Group | NodeSet | Markers):
        word, attribute = _LISTED[type(s)]
        return f"{word} " + ", ".join(repr(n) for n in getattr(s, attribute))
    if isinstance(s, Box):
        return f"box {list(s.lower)} to {list(s.upper)}"
    if isinstance(s, Plane):
        return f"plane normal {list(s.normal)} at {s.at}"
    if isinstance(s, Points):
        return f"{len(s.xyz)} points"
    if isinstance(s, Ref):
        return f"selection {s.name!r}"
    word = {Union: "union", Intersection: "intersection", Difference: "difference"}[type(s)]
    return f"{word} of " + "; ".join(describe(p) for p in s.parts)
