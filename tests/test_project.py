"""The model file: a complete project that balances, closed-form member loads, and
every validation error (file name, key path and value in the message)."""

from __future__ import annotations

import math
import re
import warnings
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from _helpers import BAR_GEOMETRY, BAR_SUPPORTS

from spaceframe.errors import ProjectError, SpaceframeWarning
from spaceframe.model import STANDARD_GRAVITY
from spaceframe.project import Project, load_project, parse_project

ROOT = Path(__file__).resolve().parents[1]

# A fictional bus-station canopy bay: 3 x 3 top nodes at 2 m (z = 1 m), 2 x 2 bottom nodes
# at the bay centres (z = 0), pinned at the four top corners.
CANOPY = """
title = "Canopy bay C (demo)"
output = "out"

[units]
length = "m"
section = "mm"
force = "kN"
pressure = "kN/m^2"
stress = "MPa"

[geometry]
nodes = [
  [0, 0, 1], [2, 0, 1], [4, 0, 1], [0, 2, 1], [2, 2, 1], [4, 2, 1],
  [0, 4, 1], [2, 4, 1], [4, 4, 1],
  [1, 1, 0], [3, 1, 0], [1, 3, 0], [3, 3, 0],
]
members = [
  [0, 1], [1, 2], [3, 4], [4, 5], [6, 7], [7, 8],
  [0, 3], [3, 6], [1, 4], [4, 7], [2, 5], [5, 8],
  [9, 10], [11, 12], [9, 11], [10, 12],
  [9, 0], [9, 1], [9, 3], [9, 4], [10, 1], [10, 2], [10, 4], [10, 5],
  [11, 3], [11, 4], [11, 6], [11, 7], [12, 4], [12, 5], [12, 7], [12, 8],
]
[geometry.groups]
TOP = [0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11]
BOTTOM = [12, 13, 14, 15]
[geometry.panels]
ROOF = [[0, 1, 4, 3], [1, 2, 5, 4], [3, 4, 7, 6], [4, 5, 8, 7]]

[sections]
chord = { shape = "chs", diameter = 88.9, thickness = 4.0 }
brace = { shape = "chs", diameter = 60.3, thickness = 3.2 }

[assign]
default = { section = "brace", material = "S355" }
groups = { TOP = { section = "chord" }, BOTTOM = { section = "chord" } }

[selections]
corners = { points = [[0, 0, 1], [4, 0, 1], [0, 4, 1], [4, 4, 1]] }
centre = { box = { min = [1.5, 1.5, 0.5], max = [2.5, 2.5, 1.5] } }
top = { plane = "z", at = "max" }

[[supports]]
nodes = "corners"
restrain = "pinned"

[loads.dead]
self_weight = { factor = 1.1 }
[[loads.dead.area]]
kind = "surface"
panels = { group = "ROOF" }
value = 0.25

[loads.snow]
[[loads.snow.area]]
kind = "plan"
panels = { group = "ROOF" }
value = "0.8 kN/m^2"

[loads.snow_lines]
[[loads.snow_lines.area]]
kind = "plan"
nodes = "top"
value = 0.8

[loads.service]
[[loads.service.nodal]]
nodes = "centre"
force = [0, 0, -1.5]
[[loads.service.nodal]]
nodes = "top"
total = ["0.9 kN", 0, 0]

[combinations]
ULS = { dead = 1.35, snow = 1.5, service = 1.05 }
SLS = { dead = 1.0, snow = 1.0 }

[envelopes]
design = ["ULS", "SLS"]
"""


def write(tmp_path: Path, text: str, name: str = "canopy.toml") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def canopy(tmp_path: Path) -> Project:
    return load_project(write(tmp_path, CANOPY))


def _chs_area(d_mm: float, t_mm: float) -> float:
    return math.pi / 4 * (d_mm**2 - (d_mm - 2 * t_mm) ** 2) * 1e-6


def test_complete_inline_project_solves_and_balances(canopy: Project, tmp_path: Path) -> None:
    p = canopy
    assert p.title == "Canopy bay C (demo)"
    assert p.output == (tmp_path / "out").resolve()
    assert p.envelopes == {"design": ["ULS", "SLS"]}
    assert p.heal_report is None
    m = p.model
    assert (m.n_nodes, m.n_members, m.n_panels) == (13, 32, 4)
    r = p.solve()
    # Self-weight derived here: S355 at 7850 kg/m³ (common practice), 12 + 4 chords of 2 m
    # (CHS 88.9x4.0) and 16 diagonals of sqrt(1 + 1 + 1) m (CHS 60.3x3.2), plus 10 %.
    chord, brace = _chs_area(88.9, 4.0), _chs_area(60.3, 3.2)
    weight = 1.1 * 7850 * STANDARD_GRAVITY * (chord * 16 * 2.0 + brace * 16 * math.sqrt(3))
    plan = 4.0 * 4.0  # the roof is flat: plan area = surface area
    expected_rz = {
        "dead": weight + 0.25e3 * plan,
        "snow": 0.8e3 * plan,
        "snow_lines": 0.8e3 * plan,  # tributary areas of the top nodes cover the hull
        "service": 1.5e3,  # one node in the centre box
    }
    expected_rz["ULS"] = (1.35 * expected_rz["dead"] + 1.5 * expected_rz["snow"]
                          + 1.05 * expected_rz["service"])
    expected_rz["SLS"] = expected_rz["dead"] + expected_rz["snow"]
    for name, rz in expected_rz.items():
        assert r[name].reaction_total[2] == pytest.approx(rz, rel=1e-9), name
        assert r[name].applied_total[2] == pytest.approx(-rz, rel=1e-9), name
    # The 0.9 kN total is shared by the nine top nodes and balanced along x.
    np.testing.assert_allclose(r["service"].loads[:9, 0], 100.0, rtol=1e-12)
    assert r["service"].reaction_total[0] == pytest.approx(-900.0, rel=1e-9)
    env = p.envelope_results(r)["design"]
    np.testing.assert_array_equal(
        env.axial_max, np.maximum(r["ULS"].axial_forces, r["SLS"].axial_forces)
    )
    # Sections and materials are kept for member checks.
    assert m.meta["project:section_index"].tolist() == [0] * 16 + [1] * 16
    assert m.area[0] == pytest.approx(chord, rel=1e-14)
    assert m.E[20] == 210e9


def test_unused_selection_and_cable_are_warned_about(tmp_path: Path) -> None:
    text = CANOPY.replace('brace = { shape = "chs", diameter = 60.3, thickness = 3.2 }',
                          'brace = { shape = "cable", diameter = 16 }')
    text = text.replace('[selections]', '[selections]\nspare = { ids = [1] }')
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        p = load_project(write(tmp_path, text))
    texts = [str(w.message) for w in caught if issubclass(w.category, SpaceframeWarning)]
    assert texts == p.warnings
    assert any("selections.spare is defined but not used" in t for t in texts)
    assert any("'brace' are cables" in t for t in texts)


def test_section_dimensions_that_look_like_millimetres_read_as_metres(tmp_path: Path) -> None:
    text = CANOPY.replace('section = "mm"\n', "")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        load_project(write(tmp_path, text))
    texts = [str(w.message) for w in caught]
    assert any("sections.chord.diameter is 88.9 m: did you mean millimetres?" in t
               for t in texts)
    assert any("sections.brace.diameter is 60.3 m" in t for t in texts)


# -------------------------------------------------- closed-form member loads
BAR = """
[units]
section = "mm"
stress = "GPa"
""" + BAR_GEOMETRY + """\
[materials.m]
E = 200
density = 0
alpha = "10e-6 1/K"
[sections]
s = { shape = "user", area = 1000 }
[assign]
default = { section = "s", material = "m" }
""" + BAR_SUPPORTS


def test_temperature_lack_of_fit_and_settlement_in_a_restrained_bar(tmp_path: Path) -> None:
    text = BAR + """
[loads.heat]
[[loads.heat.temperature]]
members = "all"
change = 25
[loads.fit]
[[loads.fit.lack_of_fit]]
members = [0]
excess_length = "2 mm"
[loads.strain]
[[loads.strain.lack_of_fit]]
members = "all"
strain = 1e-4
[loads.settle]
[[loads.settle.settlement]]
nodes = [2]
displacement = ["1 mm", 0, 0]
"""
    r = load_project(write(tmp_path, text, "bar.toml")).solve()
    ea, length = 200e9 * 1000e-6, 3.0
    # Bar held at both ends, heated uniformly: N = -E A alpha dT (e.g. Gere & Goodno,
    # Mechanics of Materials, thermal stress sigma = -E alpha dT in a restrained bar).
    np.testing.assert_allclose(r["heat"].axial_forces, -ea * 10e-6 * 25, rtol=1e-9)
    # Two equal bars in series between fixed ends, one made delta too long: compatibility
    # N L/EA + N L/EA + delta = 0, so N = -delta EA / (2 L) in both (derived here).
    np.testing.assert_allclose(r["fit"].axial_forces, -0.002 * ea / (2 * length), rtol=1e-9)
    np.testing.assert_allclose(r["strain"].axial_forces, -ea * 1e-4, rtol=1e-9)
    # Moving one end out by d stretches the pair: N = EA d / (2 L) (derived here).
    np.testing.assert_allclose(r["settle"].axial_forces, ea * 0.001 / (2 * length), rtol=1e-9)


def test_spring_support_takes_its_share(tmp_path: Path) -> None:
    text = BAR.replace('nodes = [1]\nrestrain = "yz"',
                       'nodes = [1]\nrestrain = "yz"\n[[supports]]\nnodes = [1]\n'
                       'spring = ["50 kN/mm", 0, 0]') + """
[loads.push]
[[loads.push.nodal]]
nodes = [1]
force = ["30 kN", 0, 0]
"""
    r = load_project(write(tmp_path, text, "bar.toml")).solve()["push"]
    k_bar = 200e9 * 1000e-6 / 3.0
    k_spring = 50e6
    # Node 1 between two bars and a spring, all in parallel along x: u = P / sum k.
    u = 30e3 / (2 * k_bar + k_spring)
    assert r.displacements[1, 0] == pytest.approx(u, rel=1e-9)
    assert r.reactions[1, 0] == pytest.approx(-k_spring * u, rel=1e-9)


# --------------------------------------------------------- a file-based model
def _dxf(path: Path) -> None:
    import ezdxf

    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 4  # millimetres
    msp = doc.modelspace()
    top = [(0, 0, 1000), (2000, 0, 1000), (2000, 2000, 1000), (0, 2000, 1000)]
    for i in range(4):
        msp.add_line(top[i], top[(i + 1) % 4], dxfattribs={"layer": "RING"})
    for p in top:
        msp.add_line(p, (1000, 1000, 0), dxfattribs={"layer": "LEGS"})
    for p in top[:3]:
        msp.add_point(p, dxfattribs={"layer": "PINS"})
    doc.saveas(path)


def test_project_from_a_drawing(tmp_path: Path) -> None:
    _dxf(tmp_path / "pyramid.dxf")
    text = """
[units]
section = "mm"
[geometry]
file = "pyramid.dxf"
[sections]
ring = { shape = "shs", width = 60, thickness = 4 }
leg = { shape = "bar", diameter = 30 }
[assign]
groups = { RING = { section = "ring", material = "S275" }, LEGS = { section = "leg" } }
[[assign.rules]]
members = { group = "LEGS" }
material = "steel"
[selections]
apex = { plane = "z", at = "min" }
[[supports]]
nodes = { markers = "PINS" }
restrain = "pinned"
[[supports]]
nodes = { points = [[0, 2, 1]] }
restrain = "z"
[loads.p]
[[loads.p.nodal]]
nodes = "apex"
force = [0, 0, "-12 kN"]
[loads.snow]
[[loads.snow.area]]
kind = "plan"
nodes = { plane = "z", at = "max" }
value = "1 kN/m^2"
"""
    p = load_project(write(tmp_path, text, "pyramid.toml"))
    m = p.model
    assert sorted(m.groups) == ["LEGS", "RING"]
    assert p.heal_report is not None
    r = p.solve()
    assert r["p"].reaction_total[2] == pytest.approx(12e3, rel=1e-9)
    # Four ring nodes on a 2 m x 2 m square: their hull is the square, 4 m².
    assert r["snow"].reaction_total[2] == pytest.approx(4e3, rel=1e-9)
    assert m.restraint.sum() == 3 * 3 + 1


def test_parse_errors_come_before_reading_the_drawing(tmp_path: Path) -> None:
    (tmp_path / "broken.dxf").write_text("this is not a drawing")
    text = """
[geometry]
file = "broken.dxf"
[sections]
s = { shape = "bar", diameter = 0.02 }
[assign]
default = { section = "s", material = "steel" }
[loads.p]
[[loads.p.nodal]]
nodes = "all"
forse = [0, 0, -1]
"""
    with pytest.raises(ProjectError, match=r"loads.p.nodal\[0\].forse = \[0, 0, -1\]: unknown"):
        load_project(write(tmp_path, text, "m.toml"))
    fixed = text.replace("forse", "force")
    with pytest.raises(ProjectError, match=r"m.toml: geometry.file = 'broken.dxf': .*broken.dxf"):
        load_project(write(tmp_path, fixed, "m.toml"))


# -------------------------------------------------------- validation errors
Edit = Callable[[str], str]


def sub(old: str, new: str) -> Edit:
    def edit(text: str) -> str:
        assert old in text, old
        return text.replace(old, new, 1)

    return edit


def add(extra: str) -> Edit:
    return lambda text: text + extra


ERRORS: list[tuple[str, Edit, str, str]] = [
    # (what, edit, key path, value as shown)
    ("unknown top key", sub("title =", "titel ="), "titel", "did you mean 'title'"),
    ("unknown section key", sub("diameter = 88.9", "diamter = 88.9"), "sections.chord.diamter",
     "did you mean 'diameter'"),
    ("wrong type", sub('title = "Canopy bay C (demo)"', "title = 5"), "title", "5"),
    ("unit of the wrong kind", sub('force = "kN"', 'force = "MPa"'), "units.force", "'MPa'"),
    ("unknown unit setting", sub('force = "kN"', 'forces = "kN"'), "units.forces",
     "did you mean 'force'"),
    ("quantity of the wrong dimension", sub('value = "0.8 kN/m^2"', 'value = "0.8 kN"'),
     "loads.snow.area[0].value", "'0.8 kN'"),
    ("ambiguous quantity", sub('value = "0.8 kN/m^2"', 'value = "0.8 kN/m2"'),
     "loads.snow.area[0].value", "'0.8 kN/m2'"),
    ("boolean for a number", sub("value = 0.25", "value = true"),
     "loads.dead.area[0].value", "True"),
    ("missing geometry file", sub("[geometry]\n", '[geometry]\nfile = "nowhere.dxf"\n'),
     "geometry.file", "'nowhere.dxf'"),
    ("inline member to a missing node", sub("[12, 7], [12, 8],", "[12, 7], [12, 80],"),
     "geometry.members[31][1]", "80"),
    ("empty selection", sub("at = \"max\"", "at = 9.0"), "loads.snow_lines.area[0].nodes",
     "selects no nodes"),
    ("point with no node near", sub("[4, 4, 1]] }", "[4, 4, 1.5]] }"), "supports[0].nodes",
     "[4.0, 4.0, 1.5]"),
    ("unknown selection", sub('nodes = "corners"', 'nodes = "corner"'), "supports[0].nodes",
     "did you mean 'corners'"),
    ("selection cycle", sub("top = { plane", "top = { union = [\"loop\"] }\nloop = { union = "
                            "[\"top\"] }\nx = { plane"), "selections.loop", "cycle"),
    ("selection with two criteria", sub('centre = { box', 'centre = { ids = [4], box'),
     "selections.centre", "exactly one of"),
    ("unknown group", sub('panels = { group = "ROOF" }\nvalue = 0.25',
                          'panels = { group = "RUF" }\nvalue = 0.25'),
     "loads.dead.area[0].panels", "did you mean 'ROOF'"),
    ("unknown case in a combination", sub("snow = 1.5, service", "snw = 1.5, service"),
     "combinations.ULS.snw", "did you mean 'snow'"),
    ("combination named like a case", add("\n[combinations.dead]\ndead = 1.0\n"),
     "combinations.dead", "a load case is also called"),
    ("unknown envelope member", sub('["ULS", "SLS"]', '["ULS", "SL"]'), "envelopes.design[1]",
     "'SL'"),
    ("unknown section", sub('{ section = "brace"', '{ section = "brase"'),
     "assign.default.section", "did you mean 'brace'"),
    ("unknown material", sub('material = "S355"', 'material = "S356"'),
     "assign.default.material", "did you mean 'S355'"),
    ("preset name for a user material", add('\n[materials.S355]\nE = 1\ndensity = 1\n'),
     "materials.S355", "preset"),
    ("bad restraint", sub('restrain = "pinned"', 'restrain = "pined"'), "supports[0].restrain",
     "did you mean 'pinned'"),
    ("repeated restraint letter", sub('restrain = "pinned"', 'restrain = "xyy"'),
     "supports[0].restrain", "'xyy'"),
    ("force and total", sub("force = [0, 0, -1.5]", "force = [0, 0, -1.5]\ntotal = [0, 0, 1]"),
     "loads.service.nodal[0]", "exactly one of force"),
    ("vector of two", sub("force = [0, 0, -1.5]", "force = [0, -1.5]"),
     "loads.service.nodal[0].force", "[0, -1.5]"),
    ("tributary pressure", sub('kind = "plan"\nnodes = "top"', 'kind = "pressure"\nnodes = "top"'),
     "loads.snow_lines.area[0].kind", "'pressure'"),
    ("unknown area kind", sub('kind = "surface"', 'kind = "surfac"'), "loads.dead.area[0].kind",
     "did you mean 'surface'"),
    ("unknown case key", sub("[[loads.service.nodal]]\nnodes = \"centre\"",
                             "[[loads.service.nodel]]\nnodes = \"centre\""),
     "loads.service.nodel", "did you mean 'nodal'"),
    ("settlement of a free direction",
     add('\n[loads.sink]\n[[loads.sink.settlement]]\nnodes = "centre"\n'
         'displacement = [0, 0, "-5 mm"]\n'),
     "loads.sink.settlement[0].displacement", "not restrained along z"),
    ("negative spring", add('\n[[supports]]\nnodes = [1]\nspring = [0, 0, -2]\n'),
     "supports[1].spring[2]", "-2"),
    ("shape", sub('shape = "chs", diameter = 88.9', 'shape = "tube", diameter = 88.9'),
     "sections.chord.shape", "'tube'"),
    ("section too thick",
     sub("diameter = 88.9, thickness = 4.0", "diameter = 88.9, thickness = 50"),
     "sections.chord", "not less than half the diameter"),
    ("negative tolerance", sub("max = [2.5, 2.5, 1.5] } }", "max = [2.5, 2.5, 1.5] }, "
                               "tolerance = -1 }"), "selections.centre.tolerance", "-1"),
    ("not TOML", sub("[geometry]", "[geometry"), "not valid TOML", "line"),
    ("unknown geometry key", sub("[geometry]\n", "[geometry]\nheel = true\n"),
     "geometry.heel", "did you mean 'heal'"),
    ("heal not a flag", sub("[geometry]\n", "[geometry]\nheal = \"yes\"\n"),
     "geometry.heal", "'yes'"),
    ("file units without a file", sub("[geometry]\n", "[geometry]\nfile_units = \"mm\"\n"),
     "geometry.file_units", "'mm'"),
    ("bad inline panel", sub("[4, 5, 8, 7]]", "[4, 5]]"), "geometry.panels.ROOF[3]", "[4, 5]"),
    ("bad inline group id", sub("BOTTOM = [12, 13, 14, 15]", "BOTTOM = [12, 13, 14, 99]"),
     "geometry.groups.BOTTOM[3]", "99"),
    ("negative id", sub('nodes = "centre"', "nodes = [-1]"), "loads.service.nodal[0].nodes[0]",
     "-1"),
    ("plane axis", sub('plane = "z"', 'plane = "w"'), "selections.top.plane", "'w'"),
    ("box corners", sub("box = { min = [1.5, 1.5, 0.5], max = [2.5, 2.5, 1.5] }",
                        "box = [1, 2]"), "selections.centre.box[0]", "= 1: expected a list"),
    ("empty union", sub('top = { plane = "z", at = "max" }', "top = { union = [] }"),
     "selections.top.union", "[]"),
    ("unknown preset in like", add('\n[materials.alloy]\nlike = "aluminum-7075"\n'),
     "materials.alloy.like", "'aluminum-7075'"),
    ("user material with zero E", add('\n[materials.soft]\nE = 0\ndensity = 1\n'),
     "materials.soft", "E = 0.0"),
    ("user material missing density", add('\n[materials.soft]\nE = 1\n'),
     "materials.soft.density", "missing required key"),
    ("self-weight of the wrong type", sub("self_weight = { factor = 1.1 }", "self_weight = 1.1"),
     "loads.dead.self_weight", "1.1"),
    ("self-weight factor", sub("self_weight = { factor = 1.1 }", "self_weight = { factor = 0 }"),
     "loads.dead.self_weight.factor", "0"),
    ("outline without nodes", sub("value = 0.25", "value = 0.25\noutline = [[0, 0], [1, 0], "
                                  "[1, 1]]"), "loads.dead.area[0].outline", "[[0, 0]"),
    ("support with nothing to do", add('\n[[supports]]\nnodes = [1]\n'), "supports[1]",
     "give restrain, spring or both"),
    ("supports as a table", sub("[[supports]]", "[supports]"), "supports", "expected an array"),
    ("no assign", sub('[assign]\ndefault = { section = "brace", material = "S355" }\n'
                      'groups = { TOP = { section = "chord" }, BOTTOM = { section = "chord" } }',
                      ""), "assign", "missing"),
    ("output not a string", sub('output = "out"', "output = 3"), "output", "3"),
    ("factor not a number", sub("SLS = { dead = 1.0", 'SLS = { dead = "1.0"'),
     "combinations.SLS.dead", "'1.0'"),
    # The shortest canopy member is a diagonal of sqrt(3) = 1.732 m: a plain 2 is
    # 2 m ([units] length), more than half of it.
    ("tolerance as long as a member", sub("[geometry]\n", "[geometry]\ntolerance = 2\n"),
     "geometry.tolerance = 2 m", "shortest member (member 16, 1.73205 m long): a plain number"),
    ("tolerance with a malformed unit", sub("[geometry]\n", '[geometry]\ntolerance = "2 m()"\n'),
     "geometry.tolerance", "empty parentheses"),
    ("upward gravity", sub("self_weight = { factor = 1.1 }",
                           'self_weight = { factor = 1.1, g = "-9.81 m/s^2" }'),
     "loads.dead.self_weight.g", "must be positive"),
    ("zero gravity", sub("self_weight = { factor = 1.1 }", "self_weight = { g = 0 }"),
     "loads.dead.self_weight.g", "must be positive"),
    ("overflowing section", sub("diameter = 88.9", "diameter = 1e200"), "sections.chord",
     "larger than 1000 m"),
    ("coordinates beyond resolution", sub("[2, 0, 1], [4, 0, 1]", "[4e307, 0, 1], [4, 0, 1]"),
     "geometry", "coordinates reach 4e+307 m"),
    ("zero-area panel", sub("[4, 5, 8, 7]]", "[4, 5, 8, 7], [0, 1, 2]]"), "geometry.panels.ROOF",
     "panel 4 (nodes [0, 1, 2]) has zero area"),
]


@pytest.mark.parametrize(("edit", "where", "shown"), [e[1:] for e in ERRORS],
                         ids=[e[0] for e in ERRORS])
def test_every_error_names_file_key_and_value(tmp_path: Path, edit: Edit, where: str,
                                              shown: str) -> None:
    path = write(tmp_path, edit(CANOPY))
    with pytest.raises(ProjectError) as info:
        load_project(path)
    text = str(info.value)
    assert text.startswith("canopy.toml: "), text
    assert where in text, text
    assert shown in text, text


def test_members_left_without_a_section_are_named(tmp_path: Path) -> None:
    text = CANOPY.replace('default = { section = "brace", material = "S355" }',
                          'default = { material = "S355" }')
    text = text.replace("BOTTOM = [12, 13, 14, 15]", "BOTTOM = [12, 13, 14, 15]\nDIAG = [16, 17]")
    with pytest.raises(ProjectError) as info:
        load_project(write(tmp_path, text))
    assert re.search(r"canopy.toml: assign: 16 of 32 members have no section in group 'DIAG' "
                     r"\(members 16, 17, 18, .* \.\.\.\)", str(info.value)), str(info.value)


def test_missing_model_file(tmp_path: Path) -> None:
    with pytest.raises(ProjectError, match=r"nope\.toml: model file not found"):
        load_project(tmp_path / "nope.toml")


def test_defaults_for_title_and_output(tmp_path: Path) -> None:
    text = CANOPY.replace('title = "Canopy bay C (demo)"\noutput = "out"\n', "")
    p = parse_project(text, tmp_path / "bay.toml")
    assert p.title == "bay"
    assert p.output == (tmp_path / "bay-results").resolve()


def test_the_documented_example_runs(tmp_path: Path) -> None:
    doc = (ROOT / "README.md").read_text(encoding="utf-8")
    doc = doc[doc.index("## The model file"):]  # the example is the first block there
    block = re.findall(r"```toml\n(.*?)```", doc, re.S)[0]
    with warnings.catch_warnings():
        warnings.simplefilter("error", SpaceframeWarning)  # the example warns of nothing
        p = parse_project(block, tmp_path / "example.toml")
    r = p.solve()
    # Snow on panels and the same snow by tributary areas of the top nodes (outline = the
    # 4 m x 4 m roof) both total 0.8 kN/m² x 16 m².
    assert r["snow"].reaction_total[2] == pytest.approx(12.8e3, rel=1e-9)
    assert r["snow_lines"].reaction_total[2] == pytest.approx(12.8e3, rel=1e-9)
    # Suction of 0.6 kN/m² on the upward-facing roof lifts it: reactions pull down.
    assert r["wind_up"].reaction_total[2] == pytest.approx(-0.6e3 * 16, rel=1e-9)
    assert set(p.envelope_results(r)) == {"ULS"}


# -------------------------------------------------- odd files and site coordinates
def test_byte_order_mark_is_accepted(tmp_path: Path) -> None:
    path = tmp_path / "canopy.toml"
    path.write_bytes(b"\xef\xbb\xbf" + CANOPY.encode("utf-8"))
    assert load_project(path).model.n_members == 32


@pytest.mark.parametrize(
    "extra",
    ["\ndeep = " + "[" * 1000 + "]" * 1000 + "\n",
     "\n[" + ".".join(["a"] * 2000) + "]\n"],
    ids=["nested arrays", "nested table header"],
)
def test_deep_nesting_is_one_line(tmp_path: Path, extra: str) -> None:
    with pytest.raises(ProjectError, match=r"^canopy\.toml: arrays or tables are nested too "
                                           r"deeply to read") as info:
        load_project(write(tmp_path, CANOPY + extra))
    assert "\n" not in str(info.value)


def _at_site(text: str, dx: float, dy: float) -> str:
    """The canopy moved in plan: every coordinate triple before the supports."""
    head, tail = text.split("[[supports]]", 1)

    def shift(m: re.Match[str]) -> str:
        x, y, z = (float(v) for v in m.groups())
        return f"[{x + dx!r}, {y + dy!r}, {z!r}]"

    head = re.sub(r"\[(-?[\d.]+), (-?[\d.]+), (-?[\d.]+)\]", shift, head)
    return head + "[[supports]]" + tail


def test_loads_and_selections_at_site_coordinates(tmp_path: Path) -> None:
    # The canopy moved to a survey grid position (UTM-like, m).  Plan snow of
    # 0.8 kN/m^2 on the 4 m x 4 m roof is 12.8 kN whether it goes through the
    # panels or through the tributary areas of the top nodes (closed form).
    here = load_project(write(tmp_path, CANOPY))
    there = load_project(write(tmp_path, _at_site(CANOPY, 451234.3, 5712345.7), "site.toml"))
    np.testing.assert_allclose(there.model.nodes[:, :2] - [451234.3, 5712345.7],
                               here.model.nodes[:, :2], atol=1e-9)
    r = there.solve()
    for case in ("snow", "snow_lines"):
        assert r[case].applied_total[2] == pytest.approx(-12.8e3, rel=1e-9), case
    # Selections pick the same nodes: the corner supports and the centre box node.
    r0 = here.solve()
    np.testing.assert_allclose(r["service"].loads, r0["service"].loads, rtol=0, atol=1e-9)
    np.testing.assert_allclose(r["snow_lines"].loads, r0["snow_lines"].loads, rtol=1e-9,
                               atol=1e-9)
    np.testing.assert_allclose(r["ULS"].axial_forces, r0["ULS"].axial_forces, rtol=1e-6,
                               atol=1e-3)
