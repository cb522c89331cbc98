"""Parse stage of the model file: the TOML text read into a :class:`_Spec`.

Unknown keys, wrong types, wrong dimensions, missing files, references to unknown
sections, materials, selections or cases are all found here, before any array is
built.  This module reads the top level, geometry, materials, sections, assignment
and supports; :mod:`~spaceframe.project.loads` the load cases, combinations and
envelopes; :mod:`~spaceframe.project.selectors` the selections.
"""

from __future__ import annotations

import difflib
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from spaceframe.errors import ModelError, ProjectError
from spaceframe.geometry import selection as sel
from spaceframe.materials import PRESETS, Material, preset
from spaceframe.project.loads import _parse_combinations, _parse_envelopes, _parse_loads
from spaceframe.project.schema import _MISSING, _Ctx, _id_list, _key, _named_tables, _Table, _vector
from spaceframe.project.selectors import _check_references, _parse_selections, _selector
from spaceframe.project.spec import _Geometry, _Rule, _Spec, _Support
from spaceframe.sections import (
    CORNER_RULES,
    SPIRAL_STRAND_FILL,
    Section,
    circular_hollow,
    rectangular_hollow,
    round_bar,
    user_section,
)
from spaceframe.sections import cable as cable_section
from spaceframe.tolerances import GEOMETRY_TOLERANCE
from spaceframe.units import SETTINGS, InputUnits, unit_factor

#: Restraint words besides letter sets such as "xyz", "xy", "z".  A pin-jointed
#: node has translations only, so a pin holds all three and a roller (on a
#: horizontal bearing) the vertical one.
RESTRAINT_ALIASES: Mapping[str, str] = {"pinned": "xyz", "fixed": "xyz", "roller": "z"}

#: A plain section dimension above this (m) is far larger than any member
#: section and most likely a millimetre value read as metres.
_IMPLAUSIBLE_SECTION_SIZE = 2.0


_TOP_KEYS = {
    "title", "output", "units", "geometry", "materials", "sections", "assign",
    "selections", "supports", "loads", "combinations", "envelopes", "design", "actions",
    "analysis",
}


def _parse(text: str, path: Path) -> _Spec:
    ctx = _Ctx(path)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise ProjectError(f"{path.name}: not valid TOML: {exc}") from None
    top = _Table(ctx, data, "")
    top.done(_TOP_KEYS)

    title = top.text("title", path.stem)
    out_text = top.text("output", f"{path.stem}-results")
    output = (path.parent / out_text).resolve() if not Path(out_text).is_absolute() \
        else Path(out_text)

    units_t = top.table("units", None)
    if units_t is not None:
        units_t.done(set(SETTINGS))
        names: dict[str, str] = {}
        factors: dict[str, float] = {}
        for key in units_t.data:
            names[key] = units_t.text(key)
            try:
                factors[key] = unit_factor(names[key], SETTINGS[key])
            except ModelError as exc:
                ctx.fail(units_t.path(key), names[key], str(exc))
        ctx.units = InputUnits(names=names, factors=factors)

    geometry = _parse_geometry(ctx, top.table("geometry", None))
    materials = _parse_materials(ctx, top.table("materials", None))
    sections = _parse_sections(ctx, top.table("sections", None))
    selections = _parse_selections(ctx, top.table("selections", None))
    rules = _parse_assign(ctx, top.table("assign", None), sections, materials)
    supports = _parse_supports(ctx, top.raw("supports", []))
    cases = _parse_loads(ctx, top.table("loads", None))
    combinations = _parse_combinations(ctx, top.table("combinations", None), cases)
    envelopes = _parse_envelopes(ctx, top.table("envelopes", None), cases, combinations)
    from spaceframe.project.design import parse_design

    design = parse_design(ctx, top.table("design", None), top.table("actions", None), _selector)
    from spaceframe.project.analysis import parse_analysis

    analysis = parse_analysis(ctx, top.table("analysis", None), cases, combinations)

    # Every reference to a named selection must resolve, without cycles.
    _check_references(ctx, selections, rules, supports, cases)
    # What is missing is reported after what is wrong in what was written.
    if not rules:
        ctx.fail("assign", _MISSING, "missing: members need a section and a material "
                 "(assign.default, assign.groups or [[assign.rules]])")

    return _Spec(
        path=path, title=title, output=output, units=ctx.units, geometry=geometry,
        materials=materials, sections=sections, rules=rules, selections=selections,
        supports=supports, cases=cases, combinations=combinations, envelopes=envelopes,
        warnings=ctx.warnings, design=design, section_extras=ctx.section_extras,
        analysis=analysis,
    )


def _parse_geometry(ctx: _Ctx, t: _Table | None) -> _Geometry:
    if t is None:
        ctx.fail("geometry", _MISSING, "missing: give geometry.file or geometry.nodes")
    t.expect({"file", "file_units", "heal", "tolerance", "options", "nodes", "members",
              "groups", "node_sets", "panels"})
    file_path, file_units, heal, tolerance, options = _geometry_file(ctx, t)
    nodes = _inline_nodes(ctx, t)
    members = _inline_members(ctx, t, nodes.shape[0])
    if file_path is None and nodes.shape[0] == 0:
        ctx.fail("geometry", _MISSING, "give a drawing or mesh (file) or inline nodes")
    if file_path is None and members.shape[0] == 0:
        ctx.fail(t.path("members"), _MISSING, "no members: list them or give a file")

    groups = _inline_sets(ctx, t.table("groups", None), members.shape[0], "member")
    node_sets = _inline_sets(ctx, t.table("node_sets", None), nodes.shape[0], "node")
    panels = _inline_panels(ctx, t.table("panels", None), nodes.shape[0])
    t.done()
    return _Geometry(file_path, t.path("file"), file_units, heal, float(tolerance), options,
                     nodes, members, groups, node_sets, panels, t.data.get("tolerance"))


def _geometry_file(ctx: _Ctx, t: _Table) -> tuple[Path | None, str | None, bool, float,
                                                   dict[str, Any]]:
    """geometry.file and what goes with it: file_units, heal, tolerance, options."""
    file_name = t.text("file", None)
    file_path: Path | None = None
    if file_name is not None:
        file_path = Path(file_name)
        if not file_path.is_absolute():
            file_path = ctx.path.parent / file_path
        if not file_path.is_file():
            ctx.fail(t.path("file"), file_name, f"file not found (looked for {file_path})")
    file_units = t.text("file_units", None)
    if file_units is not None and file_name is None:
        ctx.fail(t.path("file_units"), file_units, "only used with geometry.file")
    heal = t.flag("heal", True)
    tolerance = t.quantity("tolerance", "length", GEOMETRY_TOLERANCE)
    if not tolerance > 0:
        ctx.fail(t.path("tolerance"), t.data.get("tolerance"), "must be positive")
    opt_t = t.table("options", None)
    options: dict[str, Any] = {}
    if opt_t is not None:
        if file_name is None:
            ctx.fail(t.path("options"), opt_t.data, "only used with geometry.file")
        options = dict(opt_t.data)
    return file_path, file_units, heal, tolerance, options


def _inline_nodes(ctx: _Ctx, t: _Table) -> np.ndarray:
    raw_nodes = t.raw("nodes", [])
    if not isinstance(raw_nodes, list):
        ctx.fail(t.path("nodes"), raw_nodes, "expected a list of [x, y, z] coordinates")
    return np.array(
        [_vector(ctx, _key(t.path("nodes"), i), v, "length") for i, v in enumerate(raw_nodes)]
    ).reshape(-1, 3)


def _inline_members(ctx: _Ctx, t: _Table, n_nodes: int) -> np.ndarray:
    raw_members = t.raw("members", [])
    if not isinstance(raw_members, list):
        ctx.fail(t.path("members"), raw_members, "expected a list of [node, node] pairs")
    pairs = []
    for i, pair in enumerate(raw_members):
        where = _key(t.path("members"), i)
        ids = _id_list(ctx, where, pair)
        if ids.size != 2:
            ctx.fail(where, pair, "expected two node ids [i, j]")
        _check_inline_nodes(ctx, where, ids, n_nodes,
                            f"geometry.nodes has {n_nodes}: 0..{n_nodes - 1}")
        pairs.append(ids)
    return np.array(pairs, dtype=np.int64).reshape(-1, 2)


def _check_inline_nodes(ctx: _Ctx, where: str, ids: np.ndarray, n_nodes: int,
                        known: str) -> None:
    bad = np.flatnonzero(ids >= n_nodes)
    if bad.size:
        ctx.fail(_key(where, int(bad[0])), int(ids[bad[0]]), f"no such inline node ({known})")


def _inline_panels(ctx: _Ctx, pt: _Table | None, n_nodes: int) -> dict[str, list[np.ndarray]]:
    panels: dict[str, list[np.ndarray]] = {}
    if pt is None:
        return panels
    for name, polys in pt.data.items():
        where = pt.path(name)
        pt.used.add(name)
        if not isinstance(polys, list) or not polys:
            ctx.fail(where, polys, "expected a list of panels, each a list of node ids")
        group: list[np.ndarray] = []
        for i, poly in enumerate(polys):
            ids = _id_list(ctx, _key(where, i), poly)
            if ids.size < 3:
                ctx.fail(_key(where, i), poly, "a panel needs at least 3 nodes")
            if np.unique(ids).size != ids.size:
                ctx.fail(_key(where, i), poly, "a panel lists a node twice")
            _check_inline_nodes(ctx, _key(where, i), ids, n_nodes, f"0..{n_nodes - 1}")
            group.append(ids)
        panels[name] = group
    return panels


def _inline_sets(ctx: _Ctx, t: _Table | None, size: int, what: str) -> dict[str, np.ndarray]:
    out: dict[str, np.ndarray] = {}
    if t is None:
        return out
    for name, value in t.data.items():
        t.used.add(name)
        where = t.path(name)
        ids = _id_list(ctx, where, value)
        if ids.size == 0:
            ctx.fail(where, value, f"an empty {what} list")
        bad = np.flatnonzero(ids >= size)
        if bad.size:
            ctx.fail(_key(where, int(bad[0])), int(ids[bad[0]]),
                     f"no such inline {what} (there are {size}: 0..{size - 1})")
        out[name] = ids
    return out


def _parse_materials(ctx: _Ctx, t: _Table | None) -> dict[str, Material]:
    return _named_tables(t, _parse_material)


def _parse_material(ctx: _Ctx, name: str, m: _Table) -> Material:
    m.expect({"like", "E", "density", "alpha", "yield", "ultimate"})
    where = m.where
    if name in PRESETS:
        ctx.fail(where, m.data, "this is the name of a preset material; use it directly "
                 "or choose another name")
    base: Material | None = None
    like = m.text("like", None)
    if like is not None:
        try:
            base = preset(like)
        except ModelError as exc:
            ctx.fail(m.path("like"), like, str(exc))
    e_mod = m.quantity("E", "stress", base.E if base else _MISSING)
    density = m.quantity("density", "density", base.density if base else _MISSING)
    alpha = m.quantity("alpha", "expansion", base.alpha if base else 0.0)
    fy = m.quantity("yield", "stress", base.yield_strength if base else None)
    fu = m.quantity("ultimate", "stress", base.ultimate_strength if base else None)
    m.done()
    try:
        return Material(
            name=name, E=e_mod, density=density, alpha=alpha, yield_strength=fy,
            ultimate_strength=fu,
            source=f"model file, based on {base.name}" if base else "model file",
        )
    except ModelError as exc:
        ctx.fail(where, m.data, str(exc))


#: Section shape -> {key: (unit role, required)}; roles are those of spaceframe.units.
_SECTION_KEYS: dict[str, dict[str, tuple[str, bool]]] = {
    "chs": {"diameter": ("section", True), "thickness": ("section", True)},
    "shs": {"width": ("section", True), "thickness": ("section", True),
            "outer_radius": ("section", False)},
    "rhs": {"width": ("section", True), "height": ("section", True),
            "thickness": ("section", True), "outer_radius": ("section", False)},
    "bar": {"diameter": ("section", True)},
    "cable": {"diameter": ("section", True)},
    "user": {"area": ("section_area", True), "second_moment": ("second_moment", False)},
}


def _parse_sections(ctx: _Ctx, t: _Table | None) -> dict[str, Section]:
    return _named_tables(t, _parse_section)


def _parse_section(ctx: _Ctx, name: str, s: _Table) -> Section:
    shape = s.text("shape", choices=tuple(_SECTION_KEYS))
    extra = {"corners"} if shape in ("shs", "rhs") else {"fill"} if shape == "cable" else set()
    design_keys = {"breaking_force"} if shape == "cable" else {"buckling_curve", "fabrication"}
    s.expect({"shape", *_SECTION_KEYS[shape], *extra, *design_keys})
    ctx.section_extras[name] = _section_design_data(ctx, s, shape)
    dims: dict[str, float] = {}
    for key, (role, required) in _SECTION_KEYS[shape].items():
        value = s.quantity(key, role, _MISSING if required else None)
        if value is not None:
            dims[key] = value
    corners = "hot-finished"
    fill = SPIRAL_STRAND_FILL
    if shape in ("shs", "rhs"):
        corners = s.text("corners", "hot-finished", choices=tuple(CORNER_RULES))
        if "outer_radius" in dims and s.has("corners"):
            ctx.fail(s.path("corners"), s.data["corners"],
                     "give either corners or outer_radius, not both")
    if shape == "cable":
        fill = s.number("fill", SPIRAL_STRAND_FILL)
    s.done()
    try:
        section = _make_section(name, shape, dims, corners, fill)
    except ModelError as exc:
        ctx.fail(s.where, s.data, str(exc))
    lengths = {k: v for k, v in dims.items() if _SECTION_KEYS[shape][k][0] == "section"}
    big = {k: v for k, v in lengths.items() if v > _IMPLAUSIBLE_SECTION_SIZE}
    if big:
        key = next(iter(big))
        ctx.warn(f"{s.path(key)} is {big[key]:g} m: did you mean millimetres? "
                 "(set [units] section = \"mm\")")
    return section


def _section_design_data(ctx: _Ctx, s: _Table, shape: str) -> dict[str, Any]:
    """Breaking force of a cable; buckling curve and fabrication of any other section."""
    ex: dict[str, Any] = {}
    if shape == "cable":
        if s.has("breaking_force"):
            ex["breaking_force"] = s.quantity("breaking_force", "force")
            if ex["breaking_force"] <= 0:
                ctx.fail(s.path("breaking_force"), s.data["breaking_force"],
                         "must be positive")
        return ex
    if s.has("buckling_curve"):
        ex["buckling_curve"] = s.text("buckling_curve", choices=("a0", "a", "b", "c", "d"))
    if s.has("fabrication"):
        ex["fabrication"] = s.text("fabrication", choices=("hot", "cold"))
    elif shape in ("shs", "rhs") and s.data.get("corners") == "cold-formed":
        ex["fabrication"] = "cold"
    return ex


def _make_section(name: str, shape: str, d: dict[str, float], corners: str,
                  fill: float) -> Section:
    if shape == "chs":
        return circular_hollow(name, d["diameter"], d["thickness"])
    if shape in ("shs", "rhs"):
        return rectangular_hollow(name, d["width"], d["thickness"], d.get("height"),
                                  corners, d.get("outer_radius"))
    if shape == "bar":
        return round_bar(name, d["diameter"])
    if shape == "cable":
        return cable_section(name, d["diameter"], fill)
    return user_section(name, d["area"], d.get("second_moment"))



def _material_ref(ctx: _Ctx, where: str, name: Any, materials: dict[str, Material]) -> str:
    if not isinstance(name, str):
        ctx.fail(where, name, "expected a material name")
    if name in materials or name in PRESETS:
        return name
    try:
        return preset(name).name
    except ModelError:
        known = sorted(set(materials) | set(PRESETS))
        close = difflib.get_close_matches(name, known, n=3)
        hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
        ctx.fail(where, name, f"unknown material; {hint}(materials: {', '.join(known)})")


def _section_ref(ctx: _Ctx, where: str, name: Any, sections: dict[str, Section]) -> str:
    if not isinstance(name, str):
        ctx.fail(where, name, "expected a section name")
    if name not in sections:
        close = difflib.get_close_matches(name, list(sections), n=3)
        hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
        ctx.fail(where, name,
                 f"unknown section; {hint}(sections: {', '.join(sections) or 'none defined'})")
    return name


def _rule(ctx: _Ctx, t: _Table, selector: sel.Selector | None, selector_where: str,
          sections: dict[str, Section], materials: dict[str, Material]) -> _Rule:
    section = t.raw("section", None)
    material = t.raw("material", None)
    if section is None and material is None:
        ctx.fail(t.where, t.data, "give a section, a material or both")
    rule = _Rule(
        t.where, selector, selector_where,
        None if section is None else _section_ref(ctx, t.path("section"), section, sections),
        None if material is None else _material_ref(ctx, t.path("material"), material, materials),
    )
    return rule


def _parse_assign(ctx: _Ctx, t: _Table | None, sections: dict[str, Section],
                  materials: dict[str, Material]) -> list[_Rule]:
    rules: list[_Rule] = []
    if t is None:
        return rules
    d = t.table("default", None)
    if d is not None:
        d.expect({"section", "material"})
        rules.append(_rule(ctx, d, None, d.where, sections, materials))
        d.done({"section", "material"})
    g = t.table("groups", None)
    if g is not None:
        for name in g.data:
            gt = g.sub(name)
            gt.expect({"section", "material"})
            rules.append(_rule(ctx, gt, sel.Group((name,)), gt.where, sections, materials))
            gt.done({"section", "material"})
    raw_rules = t.raw("rules", [])
    if not isinstance(raw_rules, list):
        ctx.fail(t.path("rules"), raw_rules, "expected an array of tables [[assign.rules]]")
    for i, item in enumerate(raw_rules):
        rt = _Table(ctx, item, _key(t.path("rules"), i))
        rt.expect({"members", "section", "material"})
        selector = _selector(ctx, rt.path("members"), rt.raw("members"))
        rules.append(_rule(ctx, rt, selector, rt.path("members"), sections, materials))
        rt.done({"members", "section", "material"})
    t.done()
    if not rules:
        ctx.fail("assign", t.data, "assigns nothing")
    return rules


def _restraint(ctx: _Ctx, where: str, value: Any) -> tuple[bool, bool, bool]:
    if not isinstance(value, str):
        ctx.fail(where, value, "expected a string such as \"xyz\", \"z\", \"pinned\" or \"roller\"")
    letters = RESTRAINT_ALIASES.get(value.lower(), value.lower())
    if not letters or set(letters) - set("xyz") or len(set(letters)) != len(letters):
        close = difflib.get_close_matches(value, list(RESTRAINT_ALIASES), n=1)
        hint = f"did you mean {close[0]!r}? " if close else ""
        ctx.fail(where, value, f"{hint}expected letters from x, y, z (each once) or one of "
                 + ", ".join(RESTRAINT_ALIASES))
    return ("x" in letters, "y" in letters, "z" in letters)


def _parse_supports(ctx: _Ctx, raw: Any) -> list[_Support]:
    if not isinstance(raw, list):
        ctx.fail("supports", raw, "expected an array of tables [[supports]]")
    out: list[_Support] = []
    for i, item in enumerate(raw):
        t = _Table(ctx, item, _key("supports", i))
        t.expect({"nodes", "restrain", "spring"})
        nodes = _selector(ctx, t.path("nodes"), t.raw("nodes"))
        restrain = None
        if t.has("restrain"):
            restrain = _restraint(ctx, t.path("restrain"), t.raw("restrain"))
        spring = t.vector("spring", "spring", None)
        if spring is not None and np.any(spring < 0):
            j = int(np.flatnonzero(spring < 0)[0])
            ctx.fail(_key(t.path("spring"), j), t.data["spring"][j], "must not be negative")
        if restrain is None and spring is None:
            ctx.fail(t.where, t.data, "give restrain, spring or both")
        t.done()
        out.append(_Support(t.where, nodes, restrain, spring))
    return out


