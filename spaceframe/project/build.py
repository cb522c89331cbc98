"""Build stage of the model file: a parsed :class:`~spaceframe.project.spec._Spec` made a Model.

The geometry is read or listed, sections and materials are assigned, selections are
evaluated against the model and the loads are turned into arrays.  What can only be
known from the geometry (an unknown layer, an empty selection, a marker with no node
near it, members left without a section) is found here.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from typing import NoReturn

import numpy as np

from spaceframe.errors import ModelError, ProjectError, SpaceframeError, SpaceframeWarning
from spaceframe.geometry import check_coordinate_range
from spaceframe.geometry import selection as sel
from spaceframe.materials import PRESETS
from spaceframe.model import Model
from spaceframe.model import loads as load_math
from spaceframe.project.schema import _key, _show
from spaceframe.project.spec import _Case, _Spec

#: Largest geometric tolerance accepted, as a fraction of the shortest
#: member.  Below half, a point selection within the tolerance of a node
#: cannot reach the node at the other end of any member, and a box widened
#: by it cannot take in a neighbour that lies outside by a member length.
_TOLERANCE_FRACTION = 0.5

#: Evaluates a selection on the model being built: (selector, target, key path) -> ids.
_Pick = Callable[[sel.Selector, sel.Target, str], np.ndarray]
#: Raises a ProjectError naming the file and the key path: (key path, error).
_Fail = Callable[[str, Exception], NoReturn]


def _build(spec: _Spec, cache: bool = False) -> tuple[Model, dict[str, list[str]], list[str]]:
    """The model, the envelopes (with any generated ones) and every warning, in that order."""
    name = spec.path.name
    own: list[str] = list(spec.warnings)
    notes: list[str] = []  # build-stage warnings, prefixed with the file name below
    geo = spec.geometry

    def fail(where: str, exc: Exception) -> NoReturn:
        raise ProjectError(f"{name}: {where}: {exc}") from exc

    # The reader's warnings are recorded for Project.warnings and handed on
    # unchanged once the build has succeeded.
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = _read_geometry(spec, fail, cache)
    captured = list(caught)
    reader_notes = [str(w.message) for w in captured if issubclass(w.category, SpaceframeWarning)]

    tol = geo.tolerance
    _check_tolerance_scale(spec, model)

    def pick(selector: sel.Selector, target: sel.Target, where: str) -> np.ndarray:
        try:
            return sel.select(model, selector, target, where=where, named=spec.selections,
                              tolerance=tol)
        except ModelError as exc:
            raise ProjectError(f"{name}: {exc}") from exc

    _assign(spec, model, pick, notes)

    _build_supports(spec, model, pick, fail)
    for case in spec.cases.values():
        _build_case(case, model, pick, fail, notes)
    for cname, factors in spec.combinations.items():
        try:
            model.add_combination(cname, factors)
        except ModelError as exc:
            fail(_key("combinations", cname), exc)
    envelopes = dict(spec.envelopes)
    if spec.design is not None:
        envelopes = _build_design(spec, model, pick, envelopes)

    model.meta["project:file"] = str(spec.path)
    # The model file's length unit: reports and the results drawing use it.
    model.meta["project:length_unit"] = {"name": spec.units.names.get("length", "m"),
                                         "scale": float(spec.units.factors.get("length", 1.0))}
    model.meta.setdefault("source", str(geo.file) if geo.file else str(spec.path))
    own += [f"{name}: {text}" for text in notes]
    for w in captured:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    for text in own:
        warnings.warn(text, SpaceframeWarning, stacklevel=3)
    return model, envelopes, reader_notes + own


def _build_supports(spec: _Spec, model: Model, pick: _Pick, fail: _Fail) -> None:
    for s in spec.supports:
        ids = pick(s.nodes, "nodes", s.where + ".nodes")
        try:
            if s.restrain is not None:
                model.add_support(ids, *s.restrain)
            if s.spring is not None:
                model.add_spring(ids, *(float(v) for v in s.spring))
        except ModelError as exc:
            fail(s.where, exc)


def _build_design(spec: _Spec, model: Model, pick: _Pick,
                  envelopes: dict[str, list[str]]) -> dict[str, list[str]]:
    """Apply [design] and [actions]; the envelopes, with ULS and SLS ones of the generated."""
    from spaceframe.project.design import apply_design

    try:
        generated = apply_design(spec.design, model, spec.path.name)
    except ModelError as exc:
        raise ProjectError(str(exc)) from None
    envelopes = dict(envelopes)
    for label in ("ULS", "SLS"):
        members = [c for c in generated if c.startswith(label)]
        if members and f"{label} envelope" not in envelopes:
            envelopes[f"{label} envelope"] = members
    d = spec.design.deflection
    if d is not None and d.nodes is not None:
        d.node_ids = pick(d.nodes, "nodes", d.nodes_where)
    return envelopes


def _check_tolerance_scale(spec: _Spec, model: Model) -> None:
    """Refuse a tolerance that is not small against the shortest member (or the coordinates)."""
    try:
        check_coordinate_range(model.nodes, spec.geometry.tolerance)
    except ModelError as exc:
        raise ProjectError(f"{spec.path.name}: geometry: {exc}") from None
    if model.n_members == 0:
        return
    ends = model.members
    length = np.linalg.norm(model.nodes[ends[:, 1]] - model.nodes[ends[:, 0]], axis=1)
    i = int(np.argmin(length))
    shortest = float(length[i])
    tol = spec.geometry.tolerance
    if tol < _TOLERANCE_FRACTION * shortest:
        return
    unit = spec.units.names.get("length", "m")
    scale = spec.units.factors.get("length", 1.0)
    raw = spec.geometry.tolerance_raw
    hint = (f": a plain number is in [units] length ({unit}); give the unit, "
            "e.g. tolerance = \"2 mm\"" if not isinstance(raw, str) else "")
    raise ProjectError(
        f"{spec.path.name}: geometry.tolerance = {tol / scale:.6g} {unit} is not less than "
        f"{_TOLERANCE_FRACTION:g} x the shortest member (member {i}, {shortest / scale:.6g} "
        f"{unit} long){hint}"
    )


def _read_geometry(spec: _Spec, fail: _Fail, cache: bool = False) -> Model:
    geo = spec.geometry
    if geo.file is not None:
        model = _read_file(spec, fail, cache)
    else:
        model = Model()
    if geo.nodes.shape[0] == 0:
        return model
    node_offset, member_offset = model.n_nodes, model.n_members
    try:
        model.add_nodes(geo.nodes)
    except ModelError as exc:
        fail("geometry.nodes", exc)
    try:
        if geo.members.shape[0]:
            model.add_members(geo.members + node_offset)
    except ModelError as exc:
        fail("geometry.members", exc)
    for gname, ids in geo.groups.items():
        model.add_group(gname, ids + member_offset)
    for sname, ids in geo.node_sets.items():
        model.add_node_set(sname, ids + node_offset)
    for pname, polys in geo.panels.items():
        try:
            model.add_panels([p + node_offset for p in polys], group=pname)
        except ModelError as exc:
            fail(f"geometry.panels.{pname}", exc)
    return model


def _read_file(spec: _Spec, fail: _Fail, cache: bool) -> Model:
    """Read geometry.file, through the geometry cache when ``cache`` (warnings replayed)."""
    from spaceframe.project import cache as geometry_cache

    geo = spec.geometry
    assert geo.file is not None
    key = folder = None
    if cache:
        key = geometry_cache.cache_key(geo.file, units=geo.file_units, tolerance=geo.tolerance,
                                       heal=geo.heal, options=geo.options)
        folder = spec.path.parent / geometry_cache.FOLDER
        if key is not None:
            cached = geometry_cache.load(folder, key)
            if cached is not None:
                return cached
    try:
        from spaceframe.io import read
    except ImportError as exc:
        fail(geo.file_key, ProjectError(f"no drawing or mesh reader is available ({exc})"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            model: Model = read(geo.file, units=geo.file_units, tolerance=geo.tolerance,
                                heal=geo.heal, **geo.options)
        except SpaceframeError as exc:
            fail(f"{geo.file_key} = {_show(str(geo.file.name))}", exc)
        except TypeError as exc:  # an option the reader does not take
            fail("geometry.options", exc)
    for w in caught:
        warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
    if key is not None and folder is not None and key == geometry_cache.cache_key(
            geo.file, units=geo.file_units, tolerance=geo.tolerance, heal=geo.heal,
            options=geo.options):  # not if the drawing changed while it was read
        geometry_cache.save(folder, key, model, list(caught))
    return model


def _assign(spec: _Spec, model: Model, pick: _Pick, warnings_out: list[str]) -> None:
    b = model.n_members
    sec_names = list(spec.sections)
    mat_table = {**PRESETS, **spec.materials}
    mat_names = list(mat_table)
    sec_of = np.full(b, -1, dtype=np.int64)
    mat_of = np.full(b, -1, dtype=np.int64)
    for rule in spec.rules:
        ids = (np.arange(b) if rule.selector is None
               else pick(rule.selector, "members", rule.selector_where))
        if rule.section is not None:
            sec_of[ids] = sec_names.index(rule.section)
        if rule.material is not None:
            mat_of[ids] = mat_names.index(rule.material)
    for what, index in (("section", sec_of), ("material", mat_of)):
        missing = np.flatnonzero(index < 0)
        if missing.size:
            groups = sorted({g for g, ids in model.groups.items()
                             if np.intersect1d(ids, missing).size})
            shown = ", ".join(str(i) for i in missing[:10]) + (" ..." if missing.size > 10 else "")
            in_groups = (f" in group{'s' if len(groups) > 1 else ''} "
                         + ", ".join(repr(g) for g in groups)) if groups else ""
            raise ProjectError(
                f"{spec.path.name}: assign: {missing.size} of {b} members have no {what}"
                f"{in_groups} (members {shown}); give one with assign.default.{what}, "
                "assign.groups or [[assign.rules]]"
            )
    sections = [spec.sections[n] for n in sec_names]
    materials = [mat_table[n] for n in mat_names]
    area = np.array([s.area for s in sections])[sec_of]
    e_mod = np.array([m.E for m in materials])[mat_of]
    density = np.array([m.density for m in materials])[mat_of]
    alpha = np.array([m.alpha for m in materials])[mat_of]
    if b:
        model.set_member_properties(np.arange(b), area=area, E=e_mod, density=density,
                                    alpha=alpha)
    cables = sorted({sections[i].name for i in np.unique(sec_of) if sections[i].shape == "cable"})
    if cables:
        warnings_out.append(
            f"sections {', '.join(repr(c) for c in cables)} are cables: analysed as "
            "tension-only members, each case and combination solved as its own load set"
        )
    from spaceframe.project.design import member_design_properties

    member_design_properties(model, sections, sec_of, materials, mat_of, spec.section_extras,
                             analysis=spec.analysis, pick=pick, file=spec.path.name)
    model.meta["project:sections"] = sections
    model.meta["project:section_index"] = sec_of
    model.meta["project:materials"] = materials
    model.meta["project:material_index"] = mat_of


def _build_case(case: _Case, model: Model, pick: _Pick, fail: _Fail,
                warnings_out: list[str]) -> None:
    name = case.name
    try:
        model.case(name)
    except ModelError as exc:
        fail(case.where, exc)
    if case.self_weight is not None:
        sw = case.self_weight
        members = None if sw.members is None else pick(sw.members, "members", sw.where + ".members")
        model.add_self_weight(name, g=sw.g, factor=sw.factor, members=members)
    for n in case.nodal:
        ids = pick(n.nodes, "nodes", n.where + ".nodes")
        force = n.force / ids.size if n.total else n.force
        model.add_load(name, ids, force)
    for a in case.area:
        try:
            if a.panels is not None:
                panels = pick(a.panels, "panels", a.where + ".panels")
                value = np.zeros(model.n_panels)
                value[panels] = a.value
                fn = {"pressure": load_math.panel_normal_loads,
                      "plan": load_math.panel_plan_loads,
                      "surface": load_math.panel_surface_loads}[a.kind]
                forces = fn(model.nodes, model.panel_nodes, model.panel_offsets, value)
            else:
                ids = pick(a.nodes, "nodes", a.where + ".nodes")  # type: ignore[arg-type]
                forces = load_math.tributary_plan_loads(model.nodes, ids, a.value, a.outline)
        except ModelError as exc:
            fail(a.where, exc)
        loaded = np.flatnonzero(np.any(forces != 0, axis=1))
        if loaded.size == 0 and a.value != 0:
            warnings_out.append(f"{a.where} puts no load on the frame (panels with no plan "
                                "area, or nodes outside the outline?)")
        if loaded.size:
            model.add_load(name, loaded, forces[loaded])
    for t in case.temperature:
        ids = pick(t.members, "members", t.where + ".members")
        if np.any(model.alpha[ids] == 0) and t.value != 0:
            warnings_out.append(f"{t.where}: some members have no thermal expansion "
                                "coefficient (alpha = 0), so the temperature change does nothing")
        model.add_temperature(name, ids, t.value)
    for f in case.lack_of_fit:
        ids = pick(f.members, "members", f.where + ".members")
        strain = f.value / model.lengths[ids] if f.per_length else f.value
        model.add_initial_strain(name, ids, strain)
    for s in case.settlement:
        ids = pick(s.nodes, "nodes", s.where + ".nodes")
        try:
            model.add_settlement(name, ids, s.displacement)
        except ModelError as exc:
            fail(s.where + ".displacement", exc)
    if model.cases[name].is_empty:
        warnings_out.append(f"{case.where} applies no load")
