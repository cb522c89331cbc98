"""Load cases, combinations and envelopes of the model file.

The ``[loads]``, ``[combinations]`` and ``[envelopes]`` tables, read after the
geometry, sections and selections (:mod:`~spaceframe.project.parse`).
"""

from __future__ import annotations

import difflib
from typing import Any

import numpy as np

from spaceframe.geometry import selection as sel
from spaceframe.model import STANDARD_GRAVITY
from spaceframe.project.schema import _Ctx, _key, _named_tables, _plain_number, _quantity, _Table
from spaceframe.project.selectors import _selector
from spaceframe.project.spec import _Area, _Case, _MemberLoad, _Nodal, _SelfWeight, _Settlement

_CASE_KEYS = {"self_weight", "nodal", "area", "temperature", "lack_of_fit", "settlement"}


def _items(ctx: _Ctx, t: _Table, key: str) -> list[_Table]:
    raw = t.raw(key, [])
    if not isinstance(raw, list):
        ctx.fail(t.path(key), raw, f"expected an array of tables [[{t.where}.{key}]]")
    return [_Table(ctx, item, _key(t.path(key), i)) for i, item in enumerate(raw)]


def _parse_loads(ctx: _Ctx, t: _Table | None) -> dict[str, _Case]:
    return _named_tables(t, _parse_case)


def _parse_case(ctx: _Ctx, name: str, c: _Table) -> _Case:
    case = _Case(name, c.where)
    case.self_weight = _self_weight(ctx, c)
    case.nodal = [_nodal(ctx, n) for n in _items(ctx, c, "nodal")]
    case.area = [_area(ctx, a) for a in _items(ctx, c, "area")]
    case.temperature = [_temperature(ctx, m) for m in _items(ctx, c, "temperature")]
    case.lack_of_fit = [_lack_of_fit(ctx, m) for m in _items(ctx, c, "lack_of_fit")]
    case.settlement = [_settlement(ctx, s) for s in _items(ctx, c, "settlement")]
    c.done(_CASE_KEYS)
    return case


def _self_weight(ctx: _Ctx, c: _Table) -> _SelfWeight | None:
    sw = c.raw("self_weight", None)
    if sw is None or sw is False:
        return None
    where = c.path("self_weight")
    if sw is True:
        return _SelfWeight(where, 1.0, STANDARD_GRAVITY, None)
    if not isinstance(sw, dict):
        ctx.fail(where, sw, "expected true, false or { factor = ..., members = ... }")
    s = _Table(ctx, sw, where)
    s.expect({"factor", "g", "members"})
    factor = s.number("factor", 1.0)
    if factor <= 0:
        ctx.fail(s.path("factor"), sw["factor"], "must be positive")
    g = s.quantity("g", "acceleration", STANDARD_GRAVITY)
    if not g > 0:
        ctx.fail(s.path("g"), sw["g"], "must be positive: self-weight acts along -z "
                 "by definition (use nodal loads for another direction)")
    members = _selector(ctx, s.path("members"), s.raw("members")) if s.has("members") else None
    s.done()
    return _SelfWeight(where, factor, g, members)


def _nodal(ctx: _Ctx, n: _Table) -> _Nodal:
    n.expect({"nodes", "force", "total"})
    nodes = _selector(ctx, n.path("nodes"), n.raw("nodes"))
    has_f, has_t = n.has("force"), n.has("total")
    if has_f == has_t:
        ctx.fail(n.where, n.data, "give exactly one of force (applied at every node) "
                 "or total (shared equally by the nodes)")
    vec = n.vector("force" if has_f else "total", "force")
    n.done()
    return _Nodal(n.where, nodes, vec, total=has_t)


def _area(ctx: _Ctx, a: _Table) -> _Area:
    a.expect({"kind", "value", "panels", "nodes", "outline"})
    kind = a.text("kind", choices=("pressure", "plan", "surface"))
    value = a.quantity("value", "pressure")
    has_p, has_n = a.has("panels"), a.has("nodes")
    if has_p == has_n:
        ctx.fail(a.where, a.data, "give exactly one of panels (load panels) or nodes "
                 "(plan tributary areas of those nodes)")
    panels = _selector(ctx, a.path("panels"), a.raw("panels")) if has_p else None
    nodes_sel = _selector(ctx, a.path("nodes"), a.raw("nodes")) if has_n else None
    if has_n and kind != "plan":
        ctx.fail(a.path("kind"), kind, "loads on nodes by tributary area are per plan "
                 "area: use kind = \"plan\", or load panels")
    outline = None
    if a.has("outline"):
        if not has_n:
            ctx.fail(a.path("outline"), a.data["outline"], "only used with nodes")
        outline = _outline(ctx, a.path("outline"), a.raw("outline"))
    a.done()
    return _Area(a.where, kind, value, panels, nodes_sel, outline)


def _temperature(ctx: _Ctx, m: _Table) -> _MemberLoad:
    members, change = _selection_and_value(m, "members", "change", "temperature")
    return _MemberLoad(m.where, members, change)


def _lack_of_fit(ctx: _Ctx, m: _Table) -> _MemberLoad:
    m.expect({"members", "strain", "excess_length"})
    members = _selector(ctx, m.path("members"), m.raw("members"))
    has_s, has_l = m.has("strain"), m.has("excess_length")
    if has_s == has_l:
        ctx.fail(m.where, m.data, "give exactly one of strain or excess_length")
    value = m.quantity("strain", "strain") if has_s else m.quantity("excess_length", "length")
    m.done()
    return _MemberLoad(m.where, members, value, per_length=has_l)


def _settlement(ctx: _Ctx, s: _Table) -> _Settlement:
    nodes, disp = _selection_and_value(s, "nodes", "displacement", "length", vector=True)
    return _Settlement(s.where, nodes, disp)


def _selection_and_value(t: _Table, target: str, key: str, role: str,
                         vector: bool = False) -> tuple[sel.Selector, Any]:
    """A load given by a selection and one quantity (or vector) and nothing else."""
    t.expect({target, key})
    chosen = _selector(t.ctx, t.path(target), t.raw(target))
    value = t.vector(key, role) if vector else t.quantity(key, role)
    t.done()
    return chosen, value


def _outline(ctx: _Ctx, where: str, value: Any) -> np.ndarray:
    if not isinstance(value, list) or len(value) < 3:
        ctx.fail(where, value, "expected a list of at least 3 plan points [x, y]")
    pts = []
    for i, p in enumerate(value):
        if not isinstance(p, list) or len(p) != 2:
            ctx.fail(_key(where, i), p, "expected a plan point [x, y]")
        pts.append([_quantity(ctx, _key(_key(where, i), j), v, "length") for j, v in enumerate(p)])
    return np.asarray(pts, dtype=float)


def _parse_combinations(ctx: _Ctx, t: _Table | None,
                        cases: dict[str, _Case]) -> dict[str, dict[str, float]]:
    out: dict[str, dict[str, float]] = {}
    if t is None:
        return out
    for name in t.data:
        c = t.sub(name)
        if name in cases:
            ctx.fail(c.where, c.data, f"a load case is also called {name!r}; rename one")
        if not c.data:
            ctx.fail(c.where, c.data, "a combination needs at least one case and factor")
        factors: dict[str, float] = {}
        for case, factor in c.data.items():
            c.used.add(case)
            where = c.path(case)
            if case not in cases:
                close = difflib.get_close_matches(case, list(cases), n=3)
                hint = f"did you mean {' or '.join(repr(x) for x in close)}? " if close else ""
                ctx.fail(where, factor,
                         f"unknown load case {case!r}; {hint}(cases: {', '.join(cases) or 'none'})")
            factors[case] = _plain_number(ctx, where, factor)
        out[name] = factors
    return out


def _parse_envelopes(ctx: _Ctx, t: _Table | None, cases: dict[str, _Case],
                     combinations: dict[str, dict[str, float]]) -> dict[str, list[str]]:
    out: dict[str, list[str]] = {}
    if t is None:
        return out
    known = list(combinations) + list(cases)
    for name, members in t.data.items():
        t.used.add(name)
        where = t.path(name)
        if not isinstance(members, list) or not members:
            ctx.fail(where, members, "expected a non-empty list of combination names")
        for i, m in enumerate(members):
            if not isinstance(m, str) or m not in known:
                close = difflib.get_close_matches(str(m), known, n=3)
                hint = f"did you mean {' or '.join(repr(x) for x in close)}? " if close else ""
                ctx.fail(_key(where, i), m,
                         f"not a combination or load case; {hint}(known: {', '.join(known)})")
        out[name] = list(members)
    return out


