"""The model file's design tables: [design] and [actions].

Read into a plain spec by :func:`parse_design` (with the model file's typed
table reader, so every error names the file and key), then applied to the
built Model by :func:`apply_design`: per-member design properties, generated
combinations.  The checks themselves run after the analysis (``run``).

```toml
[design]
gamma_M0 = 1.0            # EN 1993-1-1 §6.1 Note 2B recommended values; national
gamma_M1 = 1.0            # annexes change them
gamma_M2 = 1.25
[design.groups.CHORDS]    # per member group
buckling_length_factor = 0.9
slenderness_limit = 150
net_area_factor = 0.85
[design.deflection]
ratio = 250               # span / ratio (common practice for roofs)
span = "24 m"             # default: the supports' plan extent
nodes = "top"             # a selection; default all nodes
[design.sizing]
groups = ["CHORDS"]
catalogue = "tubes.csv"   # default: the shipped circular hollow sections
[design.combinations]     # generated from [actions] (EN 1990)
ultimate = "6.10"         # or "6.10ab"
serviceability = ["characteristic", "frequent", "quasi-permanent"]

[actions.dead]  kind = "permanent"
[actions.snow]  kind = "variable"  psi0 = 0.5  psi1 = 0.2  psi2 = 0.0
```
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.design.combinations import Action, generate_combinations
from spaceframe.errors import ModelError
from spaceframe.project.schema import _MISSING, _Ctx, _named_tables, _Table

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["DesignSpec", "apply_design", "parse_design"]

_GROUP_KEYS = {"buckling_length_factor", "slenderness_limit", "net_area_factor"}


@dataclass
class DeflectionSpec:
    """[design.deflection]."""

    ratio: float = 250.0
    span: float | None = None
    nodes: Any = None
    nodes_where: str = ""
    direction: str = "z"
    results: list[str] | None = None
    node_ids: Any = None  # ``nodes`` resolved when the model is built


@dataclass
class SizingSpec:
    """[design.sizing]."""

    groups: list[str]
    catalogue: Path | None = None
    fabrication: str = "hot"
    max_iterations: int = 10


@dataclass
class DesignSpec:
    """What the model file says about design."""

    given: bool = False
    gammas: dict[str, float] = field(default_factory=dict)
    groups: dict[str, dict[str, float]] = field(default_factory=dict)
    deflection: DeflectionSpec | None = None
    sizing: SizingSpec | None = None
    actions: list[Action] = field(default_factory=list)
    generate: dict[str, Any] | None = None
    generated: list[str] = field(default_factory=list)


def parse_design(ctx: Any, design: Any, actions: Any, selector: Any) -> DesignSpec:
    """Read [design] and [actions] with the model file's table reader.

    ``design`` and ``actions`` are the reader's tables (or None); ``selector``
    turns a selection value into a selector (for deflection nodes).
    """
    spec = DesignSpec(given=design is not None)
    if design is not None:
        design.expect({"gamma_M0", "gamma_M1", "gamma_M2", "gamma_cable", "groups",
                       "deflection", "sizing", "combinations"})
        for key in ("gamma_M0", "gamma_M1", "gamma_M2", "gamma_cable"):
            if design.has(key):
                spec.gammas[key] = _positive(ctx, design, key)
        spec.groups = _named_tables(design.table("groups", None), _group_properties)
        spec.deflection = _parse_deflection(ctx, design.table("deflection", None), selector)
        spec.sizing = _parse_sizing(ctx, design.table("sizing", None))
        spec.generate = _parse_generate(ctx, design.table("combinations", None))
    spec.actions = list(_named_tables(actions, _action).values())
    if spec.generate is not None and not spec.actions:
        ctx.fail("design.combinations", _MISSING, "needs [actions.CASE] tables to combine")
    return spec


def _positive(ctx: _Ctx, t: _Table, key: str, at_most_one: bool = False) -> float:
    v = t.number(key)
    if v <= 0 or (at_most_one and v > 1):
        ctx.fail(t.path(key), t.data[key], "must be positive" + (" and at most 1"
                                                                 if at_most_one else ""))
    return float(v)


def _group_properties(ctx: _Ctx, gname: str, g: _Table) -> dict[str, float]:
    """[design.groups.NAME]: the design properties given for that member group."""
    g.expect(_GROUP_KEYS)
    return {key: _positive(ctx, g, key, at_most_one=key == "net_area_factor")
            for key in _GROUP_KEYS if g.has(key)}


def _parse_generate(ctx: _Ctx, combos: _Table | None) -> dict[str, Any] | None:
    """[design.combinations]: what generate_combinations is called with."""
    if combos is None:
        return None
    combos.expect({"ultimate", "serviceability", "gamma_G_sup", "gamma_G_inf", "gamma_Q", "xi"})
    gen: dict[str, Any] = {
        "ultimate": combos.text("ultimate", "6.10", choices=("6.10", "6.10ab", "none")),
    }
    sls = combos.raw("serviceability", ["characteristic", "frequent", "quasi-permanent"])
    if not isinstance(sls, list) or not all(isinstance(x, str) for x in sls):
        ctx.fail(combos.path("serviceability"), sls, "expected a list of set names")
    gen["serviceability"] = sls
    for key in ("gamma_G_sup", "gamma_G_inf", "gamma_Q", "xi"):
        if combos.has(key):
            gen[key] = combos.number(key)
    return gen


def _action(ctx: _Ctx, cname: str, a: _Table) -> Action:
    """[actions.CASE]: how a load case takes part in generated combinations."""
    a.expect({"kind", "psi0", "psi1", "psi2"})
    kind = a.text("kind", choices=("permanent", "variable"))
    psi = {k: a.number(k, 1.0) for k in ("psi0", "psi1", "psi2")}
    try:
        return Action(cname, kind, **psi)
    except ModelError as exc:
        ctx.fail(a.where, a.data, str(exc))


def _parse_deflection(ctx: Any, t: Any, selector: Any) -> DeflectionSpec | None:
    if t is None:
        return None
    t.expect({"ratio", "span", "nodes", "direction", "results"})
    d = DeflectionSpec()
    d.ratio = t.number("ratio", 250.0)
    if d.ratio <= 0:
        ctx.fail(t.path("ratio"), t.data["ratio"], "must be positive")
    d.span = t.quantity("span", "length", None)
    if d.span is not None and d.span <= 0:
        ctx.fail(t.path("span"), t.data["span"], "must be positive")
    if t.has("nodes"):
        d.nodes = selector(ctx, t.path("nodes"), t.raw("nodes"))
        d.nodes_where = t.path("nodes")
    d.direction = t.text("direction", "z", choices=("x", "y", "z"))
    res = t.raw("results", None)
    if res is not None and (not isinstance(res, list) or not all(isinstance(r, str) for r in res)):
        ctx.fail(t.path("results"), res, "expected a list of case or combination names")
    d.results = res
    return d


def _parse_sizing(ctx: Any, t: Any) -> SizingSpec | None:
    if t is None:
        return None
    t.expect({"groups", "catalogue", "fabrication", "max_iterations"})
    groups = t.raw("groups")
    if not isinstance(groups, list) or not groups or not all(isinstance(g, str) for g in groups):
        ctx.fail(t.path("groups"), groups, "expected a non-empty list of group names")
    s = SizingSpec(groups=list(groups))
    cat = t.text("catalogue", None)
    if cat is not None:
        s.catalogue = ctx.path.parent / cat
    s.fabrication = t.text("fabrication", "hot", choices=("hot", "cold"))
    s.max_iterations = int(t.number("max_iterations", 10))
    if s.max_iterations < 1:
        ctx.fail(t.path("max_iterations"), t.data["max_iterations"], "must be at least 1")
    return s


def apply_design(spec: DesignSpec, model: Model, file: str) -> list[str]:
    """Per-group design properties and generated combinations; returns their names.

    Raises
    ------
    ModelError
        On a group or action case the model does not have (named).
    """
    for gname, props in spec.groups.items():
        if gname not in model.groups:
            raise ModelError(f"{file}: design.groups.{gname}: no member group of that name")
        model.set_member_properties(model.groups[gname], **props)
    if spec.sizing is not None:
        for g in spec.sizing.groups:
            if g not in model.groups:
                raise ModelError(f"{file}: design.sizing.groups: no member group {g!r}")
    for a in spec.actions:
        if a.case not in model.cases:
            raise ModelError(f"{file}: actions.{a.case}: no load case of that name")
    names: list[str] = []
    if spec.generate is not None:
        gen = dict(spec.generate)
        if gen["ultimate"] == "none":
            gen["ultimate"] = ""
        for c in generate_combinations(spec.actions, **gen):
            if c.name in model.combinations:
                raise ModelError(
                    f"{file}: generated combination {c.name!r} has the name of one in "
                    "[combinations]; rename that one"
                )
            model.add_combination(c.name, c.factors)
            names.append(c.name)
    spec.generated = names
    return names


def member_design_properties(model: Model, sections: list[Any], sec_of: np.ndarray,
                             materials: list[Any], mat_of: np.ndarray,
                             extras: dict[str, dict[str, Any]], *, analysis: Any = None,
                             pick: Any = None, file: str = "") -> None:
    """Second moment, strengths, buckling curve and cable data per member.

    The buckling curve follows EN 1993-1-1 Table 6.2 from the section's shape
    and fabrication unless the section states one.  Cable sections are
    tension-only; so are the groups of ``analysis`` ([analysis.tension_only],
    with their pretension), applied after them.
    """
    from spaceframe.design.steel import buckling_curve_for

    b = model.n_members
    if b == 0:
        return
    inertia = np.array([s.second_moment for s in sections])[sec_of]
    fy = np.array([np.nan if m.yield_strength is None else m.yield_strength
                   for m in materials])[mat_of]
    fu = np.array([np.nan if m.ultimate_strength is None else m.ultimate_strength
                   for m in materials])[mat_of]
    model.second_moment = inertia.astype(float)
    model.yield_strength = fy.astype(float)
    model.ultimate_strength = fu.astype(float)
    curves = np.full(b, "", dtype=object)
    t_only = np.zeros(b, dtype=bool)
    breaking = np.full(b, np.nan)
    for i in np.unique(sec_of):
        s = sections[i]
        ex = extras.get(s.name, {})
        ids = np.flatnonzero(sec_of == i)
        if s.shape == "cable":
            t_only[ids] = True
            if "breaking_force" in ex:
                breaking[ids] = ex["breaking_force"]
            continue
        if "buckling_curve" in ex:
            curves[ids] = ex["buckling_curve"]
            continue
        if s.shape in ("chs", "rhs", "shs", "bar"):
            fab = ex.get("fabrication", "hot")
            for j in np.unique(mat_of[ids]):
                sub = ids[mat_of[ids] == j]
                f = materials[j].yield_strength
                curves[sub] = buckling_curve_for(s.shape, fab, 355e6 if f is None else f)
    model.buckling_curve = curves
    model.tension_only = t_only
    model.breaking_force = breaking
    from spaceframe.project.analysis import apply_analysis

    apply_analysis(analysis, model, pick, file)
