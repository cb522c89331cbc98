"""The model file: one readable TOML file that describes a whole analysis.

Reading happens in two separate stages:

1. **Parse** (:func:`_parse`): the TOML text becomes plain, validated
   dataclasses with every value already in SI.  Unknown keys, wrong types,
   wrong dimensions, missing files, references to unknown sections,
   materials, selections or cases are all found here, before any array is
   built.
2. **Build** (:func:`_build`): the geometry is read or listed, sections and
   materials are assigned, selections are evaluated against the model and
   the loads are turned into arrays.  What can only be known from the
   geometry (an unknown layer, an empty selection, a marker with no node near
   it, members left without a section) is found here.

Every problem raises :class:`~spaceframe.errors.ProjectError` whose message
starts with the model file's name and names the key path (e.g.
``loads.snow.area[0].value``) and the offending value.  The schema is
documented, with a complete example, in ``examples/MODEL_FILE.md``.
"""

from __future__ import annotations

import difflib
import math
import os
import re
import tomllib
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, Literal, NoReturn

import numpy as np

from spaceframe.errors import ModelError, ProjectError, SpaceframeError, SpaceframeWarning
from spaceframe.geometry import check_coordinate_range
from spaceframe.geometry import selection as sel
from spaceframe.materials import PRESETS, Material, preset
from spaceframe.model import STANDARD_GRAVITY, Model
from spaceframe.model import loads as load_math
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

if TYPE_CHECKING:
    from spaceframe.results import Envelope, Results

__all__ = ["RESTRAINT_ALIASES", "Project", "load_project", "parse_project"]

#: Restraint words besides letter sets such as "xyz", "xy", "z".  A pin-jointed
#: node has translations only, so a pin holds all three and a roller (on a
#: horizontal bearing) the vertical one.
RESTRAINT_ALIASES: Mapping[str, str] = {"pinned": "xyz", "fixed": "xyz", "roller": "z"}

#: A plain section dimension above this (m) is far larger than any member
#: section and most likely a millimetre value read as metres.
_IMPLAUSIBLE_SECTION_SIZE = 2.0

#: Largest geometric tolerance accepted, as a fraction of the shortest
#: member.  Below half, a point selection within the tolerance of a node
#: cannot reach the node at the other end of any member, and a box widened
#: by it cannot take in a neighbour that lies outside by a member length.
_TOLERANCE_FRACTION = 0.5

_MISSING: Any = object()
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


# ===================================================================== Project
@dataclass
class Project:
    """A model file read and built: the model ready to solve, and what goes with it.

    Attributes
    ----------
    model : Model
        Arrays in SI, every member with a section and a material.
    path : Path
        The model file.
    output : Path
        Default output folder (``output`` key, relative to the model file).
    envelopes : dict
        Envelope name -> names of the combinations (or cases) it spans.
    title : str
    warnings : list of str
        Everything that was warned about while reading and building.
    heal_report : object or None
        The reader's healing report (``model.meta["heal:report"]``) if any.
    sections, materials : dict
        The section and material tables by name.
    """

    model: Model
    path: Path
    output: Path
    envelopes: dict[str, list[str]]
    title: str
    warnings: list[str] = field(default_factory=list)
    heal_report: Any = None
    sections: dict[str, Section] = field(default_factory=dict)
    materials: dict[str, Material] = field(default_factory=dict)
    design: Any = None
    analysis: Any = None

    def solve(self, solver: str = "auto") -> Results:
        """Linear static analysis of every case and combination; see :meth:`Model.solve`."""
        return self.model.solve(solver=solver)

    def envelope_results(self, results: Results) -> dict[str, Envelope]:
        """The envelopes of the model file, computed from ``results``."""
        return {name: results.envelope(name, members) for name, members in self.envelopes.items()}


def load_project(path: str | os.PathLike[str], *, cache: bool = False) -> Project:
    """Read a model file and build its model.

    Parameters
    ----------
    path : str or path-like
        The ``.toml`` model file.
    cache : bool
        Keep the imported, healed ``geometry.file`` in ``.spaceframe-cache/``
        beside the model file and reuse it while the drawing, reader options
        and tolerance are unchanged (see :mod:`spaceframe.project.cache`).
        Off by default: a library call writes nothing unless asked.

    Returns
    -------
    Project

    Raises
    ------
    ProjectError
        On any problem with the file, naming the file, the key path and the value.
    """
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise ProjectError(f"{p}: model file not found") from None
    except UnicodeDecodeError as exc:
        raise ProjectError(f"{p}: not a UTF-8 text file ({exc})") from None
    except OSError as exc:
        raise ProjectError(f"{p}: cannot read the model file ({exc.strerror or exc})") from None
    return parse_project(text, p, cache=cache)


def parse_project(text: str, path: Path, *, cache: bool = False) -> Project:
    """Build a project from model-file text; ``path`` locates relative files and names errors.

    Raises
    ------
    ProjectError
        As :func:`load_project`.
    """
    path = Path(path)
    # A byte-order mark, written by some Windows editors, is not part of TOML.
    text = text.removeprefix("\ufeff")
    try:
        spec = _parse(text, path)
        return _build(spec, cache)
    except RecursionError:
        raise ProjectError(
            f"{path.name}: arrays or tables are nested too deeply to read "
            "(hundreds of levels; a model file needs a few)"
        ) from None


# ============================================================ parsed objects
@dataclass
class _Geometry:
    file: Path | None
    file_key: str
    file_units: str | None
    heal: bool
    tolerance: float
    options: dict[str, Any]
    nodes: np.ndarray
    members: np.ndarray
    groups: dict[str, np.ndarray]
    node_sets: dict[str, np.ndarray]
    panels: dict[str, list[np.ndarray]]
    #: The tolerance as written (None: the default), for messages.
    tolerance_raw: Any = None


@dataclass
class _Rule:
    where: str
    selector: sel.Selector | None  # None: every member (the default)
    selector_where: str
    section: str | None
    material: str | None


@dataclass
class _Support:
    where: str
    nodes: sel.Selector
    restrain: tuple[bool, bool, bool] | None
    spring: np.ndarray | None


@dataclass
class _SelfWeight:
    where: str
    factor: float
    g: float
    members: sel.Selector | None


@dataclass
class _Nodal:
    where: str
    nodes: sel.Selector
    force: np.ndarray
    total: bool


@dataclass
class _Area:
    where: str
    kind: Literal["pressure", "plan", "surface"]
    value: float
    panels: sel.Selector | None
    nodes: sel.Selector | None
    outline: np.ndarray | None


@dataclass
class _MemberLoad:
    where: str
    members: sel.Selector
    value: float
    per_length: bool = False  # lack of fit given as a length, not a strain


@dataclass
class _Settlement:
    where: str
    nodes: sel.Selector
    displacement: np.ndarray


@dataclass
class _Case:
    name: str
    where: str
    self_weight: _SelfWeight | None = None
    nodal: list[_Nodal] = field(default_factory=list)
    area: list[_Area] = field(default_factory=list)
    temperature: list[_MemberLoad] = field(default_factory=list)
    lack_of_fit: list[_MemberLoad] = field(default_factory=list)
    settlement: list[_Settlement] = field(default_factory=list)


@dataclass
class _Spec:
    path: Path
    title: str
    output: Path
    units: InputUnits
    geometry: _Geometry
    materials: dict[str, Material]
    sections: dict[str, Section]
    rules: list[_Rule]
    selections: dict[str, sel.Selector]
    supports: list[_Support]
    cases: dict[str, _Case]
    combinations: dict[str, dict[str, float]]
    envelopes: dict[str, list[str]]
    warnings: list[str]
    design: Any = None
    section_extras: dict[str, dict[str, Any]] = field(default_factory=dict)
    analysis: Any = None


# ================================================================== reading
def _key(path: str, key: str | int) -> str:
    if isinstance(key, int):
        return f"{path}[{key}]"
    k = key if _BARE_KEY.match(key) else '"' + key.replace('"', '\\"') + '"'
    return f"{path}.{k}" if path else k


def _show(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class _Ctx:
    """What every reader needs: the file (for messages), units, warnings."""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.units = InputUnits()
        self.warnings: list[str] = []
        #: Design data of sections (buckling curve, fabrication, breaking force) by name.
        self.section_extras: dict[str, dict[str, Any]] = {}

    def fail(self, where: str, value: Any, problem: str) -> NoReturn:
        if value is _MISSING:
            raise ProjectError(f"{self.path.name}: {where}: {problem}")
        raise ProjectError(f"{self.path.name}: {where} = {_show(value)}: {problem}")

    def warn(self, message: str) -> None:
        self.warnings.append(f"{self.path.name}: {message}")


class _Table:
    """A TOML table being read: typed getters that know their key path; unknown keys rejected."""

    def __init__(self, ctx: _Ctx, data: Any, where: str) -> None:
        if not isinstance(data, dict):
            ctx.fail(where or "(top level)", data, "expected a table")
        self.ctx = ctx
        self.data: dict[str, Any] = data
        self.where = where
        self.used: set[str] = set()

    def path(self, key: str | int) -> str:
        return _key(self.where, key)

    def has(self, key: str) -> bool:
        """Whether ``key`` is given; it counts as known either way (for did-you-mean)."""
        self.used.add(key)
        return key in self.data

    def raw(self, key: str, default: Any = _MISSING) -> Any:
        self.used.add(key)
        if key in self.data:
            return self.data[key]
        if default is _MISSING:
            # A misspelt key is the likeliest reason a required one is missing.
            spare = [k for k in self.data if k not in self.used]
            close = difflib.get_close_matches(key, spare, n=1, cutoff=0.6)
            if close:
                self.ctx.fail(self.path(close[0]), self.data[close[0]],
                              f"unknown key; did you mean {key!r}?")
            self.ctx.fail(self.path(key), _MISSING, "missing required key")
        return default

    def expect(self, allowed: set[str]) -> None:
        """Reject unknown keys now, before reading, so a typo is named as such."""
        self.used |= allowed
        self.done(allowed)

    def done(self, allowed: set[str] | None = None) -> None:
        """Reject keys that were not read (or are not in ``allowed``), with a did-you-mean."""
        known = self.used if allowed is None else allowed
        for key, value in self.data.items():
            if key not in known:
                choices = sorted(known)
                close = difflib.get_close_matches(key, choices, n=3, cutoff=0.6)
                hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
                self.ctx.fail(
                    self.path(key), value,
                    f"unknown key; {hint}(allowed here: {', '.join(choices) or 'none'})",
                )

    # ------------------------------------------------------------- getters
    def table(self, key: str, default: Any = _MISSING) -> _Table | None:
        value = self.raw(key, None if default is not _MISSING else _MISSING)
        if value is None:
            return None
        return _Table(self.ctx, value, self.path(key))

    def sub(self, key: str) -> _Table:
        """A required sub-table."""
        return _Table(self.ctx, self.raw(key), self.path(key))

    def text(self, key: str, default: Any = _MISSING, choices: tuple[str, ...] = ()) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        if not isinstance(value, str):
            self.ctx.fail(self.path(key), value, "expected a string")
        if choices and value not in choices:
            close = difflib.get_close_matches(value, choices, n=1)
            hint = f"did you mean {close[0]!r}? " if close else ""
            self.ctx.fail(self.path(key), value, f"{hint}expected one of {', '.join(choices)}")
        return value

    def flag(self, key: str, default: bool) -> bool:
        value = self.raw(key, default)
        if not isinstance(value, bool):
            self.ctx.fail(self.path(key), value, "expected true or false")
        return value

    def number(self, key: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _plain_number(self.ctx, self.path(key), value)

    def quantity(self, key: str, role: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _quantity(self.ctx, self.path(key), value, role)

    def vector(self, key: str, role: str, default: Any = _MISSING) -> Any:
        value = self.raw(key, default)
        if value is default and default is not _MISSING:
            return value
        return _vector(self.ctx, self.path(key), value, role)


def _plain_number(ctx: _Ctx, where: str, value: Any) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float):
        ctx.fail(where, value, "expected a number")
    if not math.isfinite(value):
        ctx.fail(where, value, "expected a finite number")
    return float(value)


def _quantity(ctx: _Ctx, where: str, value: Any, role: str) -> float:
    try:
        return ctx.units.to_si(value, role)
    except ModelError as exc:
        ctx.fail(where, value, str(exc))


def _vector(ctx: _Ctx, where: str, value: Any, role: str) -> np.ndarray:
    if not isinstance(value, list) or len(value) != 3:
        ctx.fail(where, value, "expected a list of 3 components [x, y, z]")
    return np.array([_quantity(ctx, _key(where, i), v, role) for i, v in enumerate(value)])


def _names(ctx: _Ctx, where: str, value: Any) -> tuple[str, ...]:
    items = [value] if isinstance(value, str) else value
    if not isinstance(items, list) or not items or not all(isinstance(v, str) for v in items):
        ctx.fail(where, value, "expected a name or a non-empty list of names")
    return tuple(items)


def _id_list(ctx: _Ctx, where: str, value: Any) -> np.ndarray:
    if not isinstance(value, list) or not all(
        isinstance(v, int) and not isinstance(v, bool) for v in value
    ):
        ctx.fail(where, value, "expected a list of integer ids")
    arr = np.asarray(value, dtype=np.int64)
    neg = np.flatnonzero(arr < 0)
    if neg.size:
        ctx.fail(_key(where, int(neg[0])), int(arr[neg[0]]), "ids start at 0")
    return arr


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


# ----------------------------------------------------------------- parsing
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

    raw_nodes = t.raw("nodes", [])
    if not isinstance(raw_nodes, list):
        ctx.fail(t.path("nodes"), raw_nodes, "expected a list of [x, y, z] coordinates")
    nodes = np.array(
        [_vector(ctx, _key(t.path("nodes"), i), v, "length") for i, v in enumerate(raw_nodes)]
    ).reshape(-1, 3)
    raw_members = t.raw("members", [])
    if not isinstance(raw_members, list):
        ctx.fail(t.path("members"), raw_members, "expected a list of [node, node] pairs")
    pairs = []
    for i, pair in enumerate(raw_members):
        where = _key(t.path("members"), i)
        ids = _id_list(ctx, where, pair)
        if ids.size != 2:
            ctx.fail(where, pair, "expected two node ids [i, j]")
        bad = np.flatnonzero(ids >= nodes.shape[0])
        if bad.size:
            ctx.fail(_key(where, int(bad[0])), int(ids[bad[0]]),
                     f"no such inline node (geometry.nodes has {nodes.shape[0]}: "
                     f"0..{nodes.shape[0] - 1})")
        pairs.append(ids)
    members = np.array(pairs, dtype=np.int64).reshape(-1, 2)
    if file_name is None and nodes.shape[0] == 0:
        ctx.fail("geometry", _MISSING, "give a drawing or mesh (file) or inline nodes")
    if file_name is None and members.shape[0] == 0:
        ctx.fail(t.path("members"), _MISSING, "no members: list them or give a file")

    groups = _inline_sets(ctx, t.table("groups", None), members.shape[0], "member")
    node_sets = _inline_sets(ctx, t.table("node_sets", None), nodes.shape[0], "node")
    panels: dict[str, list[np.ndarray]] = {}
    pt = t.table("panels", None)
    if pt is not None:
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
                bad = np.flatnonzero(ids >= nodes.shape[0])
                if bad.size:
                    ctx.fail(_key(_key(where, i), int(bad[0])), int(ids[bad[0]]),
                             f"no such inline node (0..{nodes.shape[0] - 1})")
                group.append(ids)
            panels[name] = group
    t.done()
    return _Geometry(file_path, t.path("file"), file_units, heal, float(tolerance), options,
                     nodes, members, groups, node_sets, panels, t.data.get("tolerance"))


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
    out: dict[str, Material] = {}
    if t is None:
        return out
    for name in t.data:
        m = t.sub(name)
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
            out[name] = Material(
                name=name, E=e_mod, density=density, alpha=alpha, yield_strength=fy,
                ultimate_strength=fu,
                source=f"model file, based on {base.name}" if base else "model file",
            )
        except ModelError as exc:
            ctx.fail(where, m.data, str(exc))
    return out


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
    out: dict[str, Section] = {}
    if t is None:
        return out
    for name in t.data:
        s = t.sub(name)
        shape = s.text("shape", choices=tuple(_SECTION_KEYS))
        extra = {"corners"} if shape in ("shs", "rhs") else {"fill"} if shape == "cable" else set()
        design_keys = {"breaking_force"} if shape == "cable" else {"buckling_curve", "fabrication"}
        s.expect({"shape", *_SECTION_KEYS[shape], *extra, *design_keys})
        ex: dict[str, Any] = {}
        if shape == "cable":
            if s.has("breaking_force"):
                ex["breaking_force"] = s.quantity("breaking_force", "force")
                if ex["breaking_force"] <= 0:
                    ctx.fail(s.path("breaking_force"), s.data["breaking_force"],
                             "must be positive")
        else:
            if s.has("buckling_curve"):
                ex["buckling_curve"] = s.text("buckling_curve",
                                              choices=("a0", "a", "b", "c", "d"))
            if s.has("fabrication"):
                ex["fabrication"] = s.text("fabrication", choices=("hot", "cold"))
            elif shape in ("shs", "rhs") and s.data.get("corners") == "cold-formed":
                ex["fabrication"] = "cold"
        ctx.section_extras[name] = ex
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
        out[name] = section
    return out


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


_CASE_KEYS = {"self_weight", "nodal", "area", "temperature", "lack_of_fit", "settlement"}


def _items(ctx: _Ctx, t: _Table, key: str) -> list[_Table]:
    raw = t.raw(key, [])
    if not isinstance(raw, list):
        ctx.fail(t.path(key), raw, f"expected an array of tables [[{t.where}.{key}]]")
    return [_Table(ctx, item, _key(t.path(key), i)) for i, item in enumerate(raw)]


def _parse_loads(ctx: _Ctx, t: _Table | None) -> dict[str, _Case]:
    cases: dict[str, _Case] = {}
    if t is None:
        return cases
    for name in t.data:
        c = t.sub(name)
        case = _Case(name, c.where)
        sw = c.raw("self_weight", None)
        if sw is not None:
            where = c.path("self_weight")
            if sw is True:
                case.self_weight = _SelfWeight(where, 1.0, STANDARD_GRAVITY, None)
            elif sw is False:
                pass
            elif isinstance(sw, dict):
                s = _Table(ctx, sw, where)
                s.expect({"factor", "g", "members"})
                factor = s.number("factor", 1.0)
                if factor <= 0:
                    ctx.fail(s.path("factor"), sw["factor"], "must be positive")
                g = s.quantity("g", "acceleration", STANDARD_GRAVITY)
                if not g > 0:
                    ctx.fail(s.path("g"), sw["g"], "must be positive: self-weight acts along -z "
                             "by definition (use nodal loads for another direction)")
                members = (_selector(ctx, s.path("members"), s.raw("members"))
                           if s.has("members") else None)
                s.done()
                case.self_weight = _SelfWeight(where, factor, g, members)
            else:
                ctx.fail(where, sw, "expected true, false or { factor = ..., members = ... }")
        for n in _items(ctx, c, "nodal"):
            n.expect({"nodes", "force", "total"})
            nodes = _selector(ctx, n.path("nodes"), n.raw("nodes"))
            has_f, has_t = n.has("force"), n.has("total")
            if has_f == has_t:
                ctx.fail(n.where, n.data, "give exactly one of force (applied at every node) "
                         "or total (shared equally by the nodes)")
            vec = n.vector("force" if has_f else "total", "force")
            n.done()
            case.nodal.append(_Nodal(n.where, nodes, vec, total=has_t))
        for a in _items(ctx, c, "area"):
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
            case.area.append(_Area(a.where, kind, value, panels, nodes_sel, outline))
        for m in _items(ctx, c, "temperature"):
            m.expect({"members", "change"})
            members = _selector(ctx, m.path("members"), m.raw("members"))
            change = m.quantity("change", "temperature")
            m.done()
            case.temperature.append(_MemberLoad(m.where, members, change))
        for m in _items(ctx, c, "lack_of_fit"):
            m.expect({"members", "strain", "excess_length"})
            members = _selector(ctx, m.path("members"), m.raw("members"))
            has_s, has_l = m.has("strain"), m.has("excess_length")
            if has_s == has_l:
                ctx.fail(m.where, m.data, "give exactly one of strain or excess_length")
            value = (m.quantity("strain", "strain") if has_s
                     else m.quantity("excess_length", "length"))
            m.done()
            case.lack_of_fit.append(_MemberLoad(m.where, members, value, per_length=has_l))
        for s_t in _items(ctx, c, "settlement"):
            s_t.expect({"nodes", "displacement"})
            nodes = _selector(ctx, s_t.path("nodes"), s_t.raw("nodes"))
            disp = s_t.vector("displacement", "length")
            s_t.done()
            case.settlement.append(_Settlement(s_t.where, nodes, disp))
        c.done(_CASE_KEYS)
        cases[name] = case
    return cases


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


# ================================================================ building
def _build(spec: _Spec, cache: bool = False) -> Project:
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

    for s in spec.supports:
        ids = pick(s.nodes, "nodes", s.where + ".nodes")
        try:
            if s.restrain is not None:
                model.add_support(ids, *s.restrain)
            if s.spring is not None:
                model.add_spring(ids, *(float(v) for v in s.spring))
        except ModelError as exc:
            fail(s.where, exc)

    for case in spec.cases.values():
        _build_case(case, model, pick, fail, notes)

    for cname, factors in spec.combinations.items():
        try:
            model.add_combination(cname, factors)
        except ModelError as exc:
            fail(_key("combinations", cname), exc)

    envelopes = dict(spec.envelopes)
    if spec.design is not None:
        from spaceframe.project.design import apply_design

        try:
            generated = apply_design(spec.design, model, name)
        except ModelError as exc:
            raise ProjectError(str(exc)) from None
        for label in ("ULS", "SLS"):
            members = [c for c in generated if c.startswith(label)]
            if members and f"{label} envelope" not in envelopes:
                envelopes[f"{label} envelope"] = members
        d = spec.design.deflection
        if d is not None and d.nodes is not None:
            d.node_ids = pick(d.nodes, "nodes", d.nodes_where)

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
    return Project(
        model=model,
        path=spec.path,
        output=spec.output,
        envelopes=envelopes,
        title=spec.title,
        warnings=reader_notes + own,
        heal_report=model.meta.get("heal:report"),
        sections=spec.sections,
        materials={**PRESETS, **spec.materials},
        design=spec.design,
        analysis=spec.analysis,
    )


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


def _read_geometry(spec: _Spec, fail: Callable[[str, Exception], NoReturn],
                   cache: bool = False) -> Model:
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


def _read_file(spec: _Spec, fail: Callable[[str, Exception], NoReturn], cache: bool) -> Model:
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


def _assign(spec: _Spec, model: Model,
            pick: Callable[[sel.Selector, sel.Target, str], np.ndarray],
            warnings_out: list[str]) -> None:
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

    member_design_properties(model, sections, sec_of, materials, mat_of, spec.section_extras)
    model.meta["project:sections"] = sections
    model.meta["project:section_index"] = sec_of
    model.meta["project:materials"] = materials
    model.meta["project:material_index"] = mat_of


def _build_case(case: _Case, model: Model,
                pick: Callable[[sel.Selector, sel.Target, str], np.ndarray],
                fail: Callable[[str, Exception], NoReturn], warnings_out: list[str]) -> None:
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
