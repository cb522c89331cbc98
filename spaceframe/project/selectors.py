"""Selections in the model file: a name, "all", a list of ids or a table with one criterion.

Read into :mod:`spaceframe.geometry.selection` selectors; named selections
(``[selections]``) are checked here for unknown names and cycles once every table
that refers to them has been read.
"""

from __future__ import annotations

import difflib
import math
from typing import Any, Literal

import numpy as np

from spaceframe.errors import ModelError
from spaceframe.geometry import selection as sel
from spaceframe.project.schema import (
    _Ctx,
    _id_list,
    _key,
    _names,
    _plain_number,
    _quantity,
    _Table,
    _vector,
)
from spaceframe.project.spec import _Case, _Rule, _Support

# -------------------------------------------------------------- selections
_SELECTOR_KEYS = (
    "all", "ids", "group", "node_set", "box", "plane", "markers", "points",
    "union", "intersection", "difference",
)
_TOLERANT = {"box", "plane", "markers", "points"}


def _selector(ctx: _Ctx, where: str, value: Any) -> sel.Selector:
    """Read a selection: a name, "all", a list of ids or a table with one criterion."""
    if isinstance(value, str):
        return sel.All() if value == "all" else sel.Ref(value)
    if isinstance(value, list):
        return sel.Ids(tuple(int(i) for i in _id_list(ctx, where, value)))
    t = _Table(ctx, value, where)
    given = [k for k in _SELECTOR_KEYS if k in t.data]
    if len(given) != 1:
        extra = set(t.data) - set(_SELECTOR_KEYS) - {"tolerance", "at"}
        if extra and not given:
            t.done(set(_SELECTOR_KEYS) | {"tolerance", "at"})
        ctx.fail(
            where, value,
            "a selection needs exactly one of " + ", ".join(_SELECTOR_KEYS)
            + (f" (got {', '.join(given)})" if given else ""),
        )
    kind = given[0]
    tol = t.quantity("tolerance", "length", None) if kind in _TOLERANT else None
    if tol is not None and tol < 0:
        ctx.fail(t.path("tolerance"), t.data["tolerance"], "must not be negative")
    out: sel.Selector
    try:
        if kind == "all":
            if t.raw("all") is not True:
                ctx.fail(t.path("all"), t.data["all"], "write all = true")
            out = sel.All()
        elif kind == "ids":
            out = sel.Ids(tuple(int(i) for i in _id_list(ctx, t.path("ids"), t.raw("ids"))))
        elif kind == "group":
            out = sel.Group(_names(ctx, t.path("group"), t.raw("group")))
        elif kind == "node_set":
            out = sel.NodeSet(_names(ctx, t.path("node_set"), t.raw("node_set")))
        elif kind == "markers":
            out = sel.Markers(_names(ctx, t.path("markers"), t.raw("markers")), tol)
        elif kind == "points":
            pts = t.raw("points")
            if not isinstance(pts, list) or not pts:
                ctx.fail(t.path("points"), pts, "expected a list of [x, y, z] points")
            xyz = tuple(
                tuple(float(v) for v in _vector(ctx, _key(t.path("points"), i), p, "length"))
                for i, p in enumerate(pts)
            )
            out = sel.Points(xyz, tol)  # type: ignore[arg-type]
        elif kind == "box":
            out = _box(ctx, t, tol)
        elif kind == "plane":
            out = _plane(ctx, t, tol)
        else:
            parts = t.raw(kind)
            if not isinstance(parts, list) or not parts:
                ctx.fail(t.path(kind), parts, "expected a non-empty list of selections")
            items = tuple(_selector(ctx, _key(t.path(kind), i), p) for i, p in enumerate(parts))
            if kind == "union":
                out = sel.Union(items)
            elif kind == "intersection":
                out = sel.Intersection(items)
            else:
                out = sel.Difference(items)
    except ModelError as exc:
        ctx.fail(where, value, str(exc))
    t.done()
    return out


def _box_corner(ctx: _Ctx, where: str, value: Any) -> np.ndarray:
    # A box's bounds may be open: TOML's inf / -inf (or the strings "inf",
    # "-inf") stand for "no bound on this axis"; NaN is still refused.
    if not isinstance(value, list) or len(value) != 3:
        ctx.fail(where, value, "expected a list of 3 components [x, y, z]")
    out = []
    for i, v in enumerate(value):
        if isinstance(v, str) and v.strip().lower() in ("inf", "+inf", "-inf"):
            v = float(v)
        if isinstance(v, float) and math.isinf(v):
            out.append(v)
        else:
            out.append(_quantity(ctx, _key(where, i), v, "length"))
    return np.array(out)


def _box(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Box:
    spec = t.raw("box")
    where = t.path("box")
    if isinstance(spec, dict):
        b = _Table(ctx, spec, where)
        lo = _box_corner(ctx, b.path("min"), b.raw("min"))
        hi = _box_corner(ctx, b.path("max"), b.raw("max"))
        b.done()
    elif isinstance(spec, list) and len(spec) == 2:
        lo = _box_corner(ctx, _key(where, 0), spec[0])
        hi = _box_corner(ctx, _key(where, 1), spec[1])
    else:
        ctx.fail(where, spec, "expected { min = [x, y, z], max = [x, y, z] }")
    return sel.Box((float(lo[0]), float(lo[1]), float(lo[2])),
                   (float(hi[0]), float(hi[1]), float(hi[2])), tol)


def _plane(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Plane:
    spec = t.raw("plane")
    where = t.path("plane")
    axes = {"x": (1.0, 0.0, 0.0), "y": (0.0, 1.0, 0.0), "z": (0.0, 0.0, 1.0)}
    normal: tuple[float, float, float]
    if isinstance(spec, str):
        if spec not in axes:
            ctx.fail(where, spec, "expected 'x', 'y', 'z' or a normal vector [nx, ny, nz]")
        normal = axes[spec]
    elif isinstance(spec, list) and len(spec) == 3:
        nx, ny, nz = (_plain_number(ctx, _key(where, i), v) for i, v in enumerate(spec))
        normal = (nx, ny, nz)
    else:
        ctx.fail(where, spec, "expected 'x', 'y', 'z' or a normal vector [nx, ny, nz]")
    at_raw = t.raw("at")
    at: float | Literal["min", "max"]
    if at_raw in ("min", "max"):
        at = at_raw
    else:
        at = _quantity(ctx, t.path("at"), at_raw, "length")
    try:
        return sel.Plane(normal, at, tol)
    except ModelError as exc:
        ctx.fail(where, spec, str(exc))



def _parse_selections(ctx: _Ctx, t: _Table | None) -> dict[str, sel.Selector]:
    out: dict[str, sel.Selector] = {}
    if t is None:
        return out
    for name, value in t.data.items():
        t.used.add(name)
        if name == "all":
            ctx.fail(t.path(name), value, "'all' is reserved for every node or member")
        out[name] = _selector(ctx, t.path(name), value)
    return out



def _check_references(ctx: _Ctx, selections: dict[str, sel.Selector], rules: list[_Rule],
                      supports: list[_Support], cases: dict[str, _Case]) -> None:
    def check(where: str, selector: sel.Selector | None) -> None:
        if selector is None:
            return
        for name in sel.references(selector):
            if name not in selections:
                close = difflib.get_close_matches(name, list(selections), n=3)
                hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
                ctx.fail(where, name, f"no selection of that name; {hint}(selections: "
                         f"{', '.join(selections) or 'none defined'})")

    for name, selector in selections.items():
        check(_key("selections", name), selector)
    # Cycles among named selections (depth-first, with the path for the message).
    state: dict[str, int] = {}

    def visit(name: str, trail: list[str]) -> None:
        state[name] = 1
        for ref in sorted(sel.references(selections[name])):
            if state.get(ref) == 1:
                cycle = " -> ".join([*trail[trail.index(ref):], ref])
                ctx.fail(_key("selections", name), ref, f"selections refer to each other in a "
                         f"cycle: {cycle}")
            if state.get(ref) is None:
                visit(ref, [*trail, ref])
        state[name] = 2

    for name in selections:
        if state.get(name) is None:
            visit(name, [name])

    used: set[str] = set()

    def note(selector: sel.Selector | None) -> None:
        if selector is not None:
            stack = [selector]
            while stack:
                s = stack.pop()
                for r in sel.references(s):
                    if r not in used:
                        used.add(r)
                        stack.append(selections[r])

    for r in rules:
        check(r.selector_where, r.selector)
        note(r.selector)
    for s in supports:
        check(s.where + ".nodes", s.nodes)
        note(s.nodes)
    for case in cases.values():
        items: list[tuple[str, sel.Selector | None]] = []
        if case.self_weight is not None:
            items.append((case.self_weight.where + ".members", case.self_weight.members))
        items += [(n.where + ".nodes", n.nodes) for n in case.nodal]
        items += [(a.where + (".panels" if a.panels is not None else ".nodes"),
                   a.panels if a.panels is not None else a.nodes) for a in case.area]
        items += [(m.where + ".members", m.members) for m in case.temperature + case.lack_of_fit]
        items += [(s.where + ".nodes", s.nodes) for s in case.settlement]
        for where, item in items:
            check(where, item)
            note(item)
    for name in selections:
        if name not in used:
            ctx.warn(f"selections.{name} is defined but not used")

