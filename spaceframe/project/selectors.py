"""Selections in the model file: a name, "all", a list of ids or a table with one criterion.

Read into :mod:`spaceframe.geometry.selection` selectors; named selections
(``[selections]``) are checked here for unknown names and cycles once every table
that refers to them has been read.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Callable
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
#: A reader of one kind of selection table: (context, table, tolerance) -> selector.
_Reader = Callable[[_Ctx, _Table, float | None], sel.Selector]
_TOLERANT = {"box", "plane", "markers", "points"}


def _selector(ctx: _Ctx, where: str, value: Any) -> sel.Selector:
    """Read a selection: a name, "all", a list of ids or a table with one criterion."""
    if isinstance(value, str):
        return sel.All() if value == "all" else sel.Ref(value)
    if isinstance(value, list):
        return sel.Ids(tuple(int(i) for i in _id_list(ctx, where, value)))
    t = _Table(ctx, value, where)
    kind = _selector_kind(ctx, t, where, value)
    tol = t.quantity("tolerance", "length", None) if kind in _TOLERANT else None
    if tol is not None and tol < 0:
        ctx.fail(t.path("tolerance"), t.data["tolerance"], "must not be negative")
    try:
        out = _READERS[kind](ctx, t, tol)
    except ModelError as exc:
        ctx.fail(where, value, str(exc))
    t.done()
    return out


def _selector_kind(ctx: _Ctx, t: _Table, where: str, value: Any) -> str:
    """The one criterion a selection table gives (unknown keys named first)."""
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
    return given[0]


def _all(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Selector:
    if t.raw("all") is not True:
        ctx.fail(t.path("all"), t.data["all"], "write all = true")
    return sel.All()


def _ids(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Selector:
    return sel.Ids(tuple(int(i) for i in _id_list(ctx, t.path("ids"), t.raw("ids"))))


def _points(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Selector:
    pts = t.raw("points")
    if not isinstance(pts, list) or not pts:
        ctx.fail(t.path("points"), pts, "expected a list of [x, y, z] points")
    xyz = tuple(
        tuple(float(v) for v in _vector(ctx, _key(t.path("points"), i), p, "length"))
        for i, p in enumerate(pts)
    )
    return sel.Points(xyz, tol)  # type: ignore[arg-type]


def _by_name(key: str, make: Callable[..., sel.Selector], tolerant: bool = False) -> _Reader:
    """A reader of ``key = name`` or ``key = [names]`` (markers also take the tolerance)."""
    def read(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Selector:
        names = _names(ctx, t.path(key), t.raw(key))
        return make(names, tol) if tolerant else make(names)
    return read


def _combined(key: str, make: Callable[[tuple[sel.Selector, ...]], sel.Selector]) -> _Reader:
    """A reader of ``key = [selection, ...]`` (union, intersection, difference)."""
    def read(ctx: _Ctx, t: _Table, tol: float | None) -> sel.Selector:
        parts = t.raw(key)
        if not isinstance(parts, list) or not parts:
            ctx.fail(t.path(key), parts, "expected a non-empty list of selections")
        return make(tuple(_selector(ctx, _key(t.path(key), i), p) for i, p in enumerate(parts)))
    return read


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



#: Selection table key -> its reader, in the order the messages list them.
_READERS: dict[str, _Reader] = {
    "all": _all,
    "ids": _ids,
    "group": _by_name("group", sel.Group),
    "node_set": _by_name("node_set", sel.NodeSet),
    "box": _box,
    "plane": _plane,
    "markers": _by_name("markers", sel.Markers, tolerant=True),
    "points": _points,
    "union": _combined("union", sel.Union),
    "intersection": _combined("intersection", sel.Intersection),
    "difference": _combined("difference", sel.Difference),
}
_SELECTOR_KEYS = tuple(_READERS)


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
    """Every named selection referred to exists, none refers to itself; unused ones warned."""
    for name, selector in selections.items():
        _check_known(ctx, selections, _key("selections", name), selector)
    _check_cycles(ctx, selections)
    uses = _selector_uses(rules, supports, cases)
    for where, item in uses:
        _check_known(ctx, selections, where, item)
    used = _reached(selections, [item for _, item in uses])
    for name in selections:
        if name not in used:
            ctx.warn(f"selections.{name} is defined but not used")


def _check_known(ctx: _Ctx, selections: dict[str, sel.Selector], where: str,
                 selector: sel.Selector | None) -> None:
    if selector is None:
        return
    for name in sel.references(selector):
        if name not in selections:
            close = difflib.get_close_matches(name, list(selections), n=3)
            hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
            ctx.fail(where, name, f"no selection of that name; {hint}(selections: "
                     f"{', '.join(selections) or 'none defined'})")


def _check_cycles(ctx: _Ctx, selections: dict[str, sel.Selector]) -> None:
    """Cycles among named selections (depth-first, with the path for the message)."""
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


def _selector_uses(rules: list[_Rule], supports: list[_Support],
                   cases: dict[str, _Case]) -> list[tuple[str, sel.Selector | None]]:
    """Every selection the model file gives outside [selections], with its key path."""
    items: list[tuple[str, sel.Selector | None]] = [(r.selector_where, r.selector) for r in rules]
    items += [(s.where + ".nodes", s.nodes) for s in supports]
    for case in cases.values():
        if case.self_weight is not None:
            items.append((case.self_weight.where + ".members", case.self_weight.members))
        items += [(n.where + ".nodes", n.nodes) for n in case.nodal]
        items += [(a.where + (".panels" if a.panels is not None else ".nodes"),
                   a.panels if a.panels is not None else a.nodes) for a in case.area]
        items += [(m.where + ".members", m.members) for m in case.temperature + case.lack_of_fit]
        items += [(s.where + ".nodes", s.nodes) for s in case.settlement]
    return items


def _reached(selections: dict[str, sel.Selector],
             selectors: list[sel.Selector | None]) -> set[str]:
    """The named selections that ``selectors`` refer to, directly or through others."""
    used: set[str] = set()
    stack = [s for s in selectors if s is not None]
    while stack:
        for r in sel.references(stack.pop()):
            if r not in used:
                used.add(r)
                stack.append(selections[r])
    return used
