"""Bad-input cases for tests/test_bad_input.py, generated in code.

Each case: (id, kind, payload, expected error class or None for accepted, message fragment).
kind "toml": model file text; "dxf"/"msh"/"obj"/"vtk"/...: file text with that suffix;
"api": a callable building a Model that must raise.  Invented data, for error paths only.
"""

from __future__ import annotations

import io as _io
from collections.abc import Callable
from typing import Any

import numpy as np
from _helpers import BAR_GEOMETRY, BAR_SUPPORTS

import spaceframe as sf
from spaceframe.analysis.static import solve_static

# A three-node bar (invented demo data): the base every model-file case damages.
BAR = """\
[units]
section = "mm"
""" + BAR_GEOMETRY + """\
[sections]
s = { shape = "chs", diameter = 60.3, thickness = 3.2 }
[assign]
default = { section = "s", material = "S355" }
""" + BAR_SUPPORTS + """\
[loads.push]
[[loads.push.nodal]]
nodes = [1]
force = ["30 kN", 0, 0]
"""


def _r(old: str, new: str) -> str:
    assert old in BAR, old
    return BAR.replace(old, new, 1)


Case = tuple[str, str, Any, "type[BaseException] | None", str]
TOML: list[tuple[str, str, str]] = [
    # (id, text, fragment)
    ("toml-syntax", BAR + "\n[[[", ""),
    ("toml-empty", "", ""),
    ("toml-bom", "\ufeff" + BAR, ""),  # accepted
    ("toml-nested-1000", BAR + "\nx = " + "[" * 1000 + "]" * 1000 + "\n", ""),
    ("toml-header-2000", BAR + "\n[" + ".".join(["a"] * 2000) + "]\n", ""),
    ("diam-1e200", _r("diameter = 60.3", "diameter = 1e200"), "diameter"),
    ("diam-neg", _r("diameter = 60.3", "diameter = -60.3"), "diameter"),
    ("diam-zero", _r("diameter = 60.3", "diameter = 0"), "diameter"),
    ("diam-nan", _r("diameter = 60.3", "diameter = nan"), "diameter"),
    ("diam-inf", _r("diameter = 60.3", "diameter = inf"), "diameter"),
    ("diam-string", _r("diameter = 60.3", 'diameter = "big"'), "diameter"),
    ("diam-bool", _r("diameter = 60.3", "diameter = true"), "diameter"),
    ("diam-unit-wrong", _r("diameter = 60.3", 'diameter = "60 kN"'), "diameter"),
    ("thick-gt-radius", _r("thickness = 3.2", "thickness = 40"), "thickness"),
    ("thick-neg", _r("thickness = 3.2", "thickness = -1"), "thickness"),
    ("shape-unknown", _r('shape = "chs"', 'shape = "blob"'), "blob"),
    ("section-missing-ref", _r('section = "s", material', 'section = "t", material'), "'t'"),
    ("material-unknown", _r('material = "S355"', 'material = "S999"'), "S999"),
    ("tol-2m()", BAR + '\n[healing]\ntolerance = "2 m()"\n', "tolerance"),
    ("tol-garbage", BAR + '\n[healing]\ntolerance = "abc"\n', "tolerance"),
    ("tol-neg", BAR + "\n[healing]\ntolerance = -1\n", "tolerance"),
    ("tol-huge", BAR + '\n[healing]\ntolerance = "5 m"\n', "tolerance"),
    ("node-string", _r("[3, 0, 0]", '[3, "a", 0]'), "geometry.nodes"),
    ("node-ragged", _r("[3, 0, 0]", "[3, 0]"), "geometry.nodes"),
    ("node-nan", _r("[3, 0, 0]", "[3, nan, 0]"), "geometry.nodes"),
    ("node-inf", _r("[3, 0, 0]", "[3, inf, 0]"), "geometry.nodes"),
    ("node-huge", _r("[3, 0, 0]", "[3e307, 0, 0]"), ""),
    ("node-nested", _r("[3, 0, 0]", "[[3], 0, 0]"), "geometry.nodes"),
    ("nodes-not-list", _r("nodes = [[0, 0, 0], [3, 0, 0], [6, 0, 0]]", "nodes = 3"),
     "geometry.nodes"),
    ("nodes-empty", _r("nodes = [[0, 0, 0], [3, 0, 0], [6, 0, 0]]", "nodes = []"), ""),
    ("member-out-of-range", _r("[1, 2]]", "[1, 7]]"), "7"),
    ("member-negative", _r("[1, 2]]", "[1, -1]]"), "-1"),
    ("member-self", _r("[1, 2]]", "[1, 1]]"), ""),
    ("member-float", _r("[1, 2]]", "[1, 2.5]]"), ""),
    ("member-string", _r("[1, 2]]", '[1, "b"]]'), ""),
    ("member-triple", _r("[1, 2]]", "[1, 2, 0]]"), ""),
    ("members-empty", _r("members = [[0, 1], [1, 2]]", "members = []"), ""),
    ("support-unknown-restrain", _r('restrain = "yz"', 'restrain = "q"'), "restrain"),
    ("support-node-out", _r("nodes = [0, 2]", "nodes = [0, 9]"), "9"),
    ("support-nodes-string", _r("nodes = [0, 2]", 'nodes = "nowhere"'), "nowhere"),
    ("load-force-short", _r('force = ["30 kN", 0, 0]', 'force = ["30 kN", 0]'), "force"),
    ("load-force-unit", _r('force = ["30 kN", 0, 0]', 'force = ["30 m", 0, 0]'), "force"),
    ("load-force-nan", _r('force = ["30 kN", 0, 0]', "force = [nan, 0, 0]"), "force"),
    ("load-force-inf", _r('force = ["30 kN", 0, 0]', "force = [inf, 0, 0]"), "force"),
    ("load-force-str", _r('force = ["30 kN", 0, 0]', 'force = "x"'), "force"),
    ("load-node-out", _r("nodes = [1]\nforce", "nodes = [99]\nforce"), "99"),
    ("load-unknown-kind", BAR.replace("loads.push.nodal", "loads.push.wibble"), "wibble"),
    ("g-negative", BAR + '\n[loads.sw]\nself_weight = { g = "-9.81 m/s^2" }\n', "g"),
    ("g-zero", BAR + "\n[loads.sw]\nself_weight = { g = 0 }\n", "g"),
    ("g-nan", BAR + "\n[loads.sw]\nself_weight = { g = nan }\n", "g"),
    ("sw-factor-str", BAR + '\n[loads.sw]\nself_weight = { factor = "x" }\n', "factor"),
    ("unit-unknown", _r('section = "mm"', 'section = "furlong^7x"'), "units"),
    ("unit-wrong-dim", _r('section = "mm"', 'section = "kN"'), "units"),
    ("unknown-top-key", BAR + "\nwobble = 1\n", "wobble"),
    ("units-not-table", "units = 3\n" + BAR.replace("[units]\nsection = \"mm\"\n", ""),
     "units"),
    ("combo-unknown-case", BAR + "\n[combinations]\nULS = { nope = 1.5 }\n", "nope"),
    ("combo-factor-str", BAR + '\n[combinations]\nULS = { push = "x" }\n', "push"),
    ("combo-factor-nan", BAR + "\n[combinations]\nULS = { push = nan }\n", "push"),
    ("envelope-unknown", BAR + '\n[envelopes]\nd = ["nope"]\n', "nope"),
    ("temp-change-str", BAR + '\n[loads.t]\n[[loads.t.temperature]]\nmembers = "all"\n'
     'change = "hot"\n', "change"),
    ("temp-members-out", BAR + "\n[loads.t]\n[[loads.t.temperature]]\nmembers = [5]\n"
     "change = 10\n", "5"),
    ("settle-node-out", BAR + "\n[loads.s]\n[[loads.s.settlement]]\nnodes = [8]\n"
     "displacement = [0.001, 0, 0]\n", "8"),
    ("group-member-out", _r("members = [[0, 1], [1, 2]]\n",
                            "members = [[0, 1], [1, 2]]\n[geometry.groups]\nA = [0, 4]\n"),
     "4"),
    ("panel-zero-area", _r("members = [[0, 1], [1, 2]]\n",
                           "members = [[0, 1], [1, 2]]\n[geometry.panels]\nP = [[0, 1, 2]]\n"),
     "panel"),
    ("panel-node-out", _r("members = [[0, 1], [1, 2]]\n",
                          "members = [[0, 1], [1, 2]]\n[geometry.panels]\nP = [[0, 1, 9]]\n"),
     "9"),
    ("drawing-missing", "[geometry]\nfile = \"nowhere.dxf\"\n", "nowhere.dxf"),
    ("selection-bad-box", BAR + '\n[selections]\nb = { box = { min = [0, 0], max = 1 } }\n',
     "selections.b"),
    ("selection-bad-plane", BAR + '\n[selections]\nb = { plane = "w", at = 0 }\n',
     "selections.b"),
    ("material-E-neg", BAR + "\n[materials.m]\nE = -200\ndensity = 0\n", "E"),
    ("material-E-nan", BAR + "\n[materials.m]\nE = nan\ndensity = 0\n", "E"),
    ("output-not-str", BAR + "\noutput = 5\n", "output"),
]

DXF_HEAD = "0\nSECTION\n2\nENTITIES\n"
DXF_TAIL = "0\nENDSEC\n0\nEOF\n"


def _line(x1: str, y1: str, x2: str, y2: str, layer: str = "L", name: str = "LINE") -> str:
    return (f"0\n{name}\n8\n{layer}\n10\n{x1}\n20\n{y1}\n30\n0\n"
            f"11\n{x2}\n21\n{y2}\n31\n0\n")


def _dxf(*entities: str) -> str:
    return DXF_HEAD + "".join(entities) + DXF_TAIL


def demo_dxf_text() -> str:
    """A small drawing written with ezdxf (invented demo geometry, millimetres)."""
    import ezdxf

    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    msp = doc.modelspace()
    pts = [(0, 0, 0), (3000, 0, 0), (3000, 3000, 0), (0, 3000, 0)]
    for a, b in zip(pts, pts[1:] + pts[:1], strict=True):
        msp.add_line(a, b, dxfattribs={"layer": "CHORD"})
    for p in pts:
        msp.add_line(p, (1500, 1500, 1000), dxfattribs={"layer": "DIAG"})
    buf = _io.StringIO()
    doc.write(buf)
    return buf.getvalue()


def _demo_replace(old: str, new: str, count: int = 1) -> Callable[[], str]:
    def make() -> str:
        text = demo_dxf_text()
        assert old in text, old
        return text.replace(old, new, count)
    return make


DXF: list[tuple[str, Any, str]] = [
    ("dxf-empty-file", "", ""),
    ("dxf-garbage", "hello world\nthis is not a drawing\n", ""),
    ("dxf-binary-noise", "\x00\x01\x02\xff" * 50, ""),
    ("dxf-odd-lines", "0\nSECTION\n2\n", ""),
    ("dxf-no-entities", "0\nSECTION\n2\nENTITIES\n0\nENDSEC\n0\nEOF\n", ""),
    ("dxf-only-points", _dxf("0\nPOINT\n8\nL\n10\n0\n20\n0\n30\n0\n"), ""),
    ("dxf-LXNE", _dxf(_line("0", "0", "1", "0"), _line("0", "0", "0", "1", name="LXNE"),
                      _line("1", "0", "0", "1")), None),
    ("dxf-4e307-wide", _dxf(_line("-4e307", "0", "4e307", "0"), _line("0", "0", "0", "1")),
     ""),
    ("dxf-coord-nan", _dxf(_line("nan", "0", "1", "0"), _line("0", "0", "0", "1")), None),
    ("dxf-coord-inf", _dxf(_line("inf", "0", "1", "0"), _line("0", "0", "0", "1")), None),
    ("dxf-coord-text", _dxf(_line("abc", "0", "1", "0")), ""),
    ("dxf-zero-length", _dxf(_line("1", "1", "1", "1")), ""),
    ("dxf-bad-groupcode", "0\nSECTION\n2\nENTITIES\n0\nLINE\nXX\nL\n" + DXF_TAIL, ""),
    ("dxf-group-code-dimgap", "0\nSECTION\n2\nHEADER\n$DIMGAP\n1\n0\nENDSEC\n" + DXF_TAIL, ""),
    ("dxf-truncated-demo", lambda: demo_dxf_text()[: len(demo_dxf_text()) // 2], ""),
    ("dxf-demo-no-eof", _demo_replace("  0\nEOF\n", ""), None),
    ("dxf-demo-insunits-bad", _demo_replace("$INSUNITS\n 70\n4\n", "$INSUNITS\n 70\n999\n"),
     ""),
    ("dxf-demo-insunits-text", _demo_replace("$INSUNITS\n 70\n4\n", "$INSUNITS\n 70\nmm\n"),
     ""),
    ("dxf-demo-LXNE", _demo_replace("\nLINE\n", "\nLXNE\n", 3), None),
    ("dxf-demo-all-lxne", _demo_replace("\nLINE\n", "\nLXNE\n", -1), ""),
    ("dxf-demo-bom", lambda: "\ufeff" + demo_dxf_text(), None),  # accepted, warned
    ("dxf-demo-coord-text", _demo_replace(" 10\n3000.0\n", " 10\n3e+x\n"), None),
    ("dxf-demo-crlf", lambda: demo_dxf_text().replace("\n", "\r\n"), None),
    ("dxf-demo-tiny-units", _demo_replace("$INSUNITS\n 70\n4\n", "$INSUNITS\n 70\n9\n"), None),
]

MESH: list[tuple[str, str, Any, str]] = [
    # (id, suffix, text, fragment)
    ("obj-not-wavefront", "obj", "x" * 100_000 + "\n" + "y" * 100, ""),
    ("obj-empty", "obj", "", ""),
    ("obj-face-out", "obj", "v 0 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 9\n", ""),
    ("obj-nan", "obj", "v nan 0 0\nv 1 0 0\nv 0 1 0\nf 1 2 3\n", ""),
    ("msh-empty", "msh", "", ""),
    ("msh-garbage", "msh", "not a mesh\n", ""),
    ("msh-truncated", "msh", "$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n3\n1 0 0 0\n",
     ""),
    ("msh-bad-version", "msh", "$MeshFormat\n9.9 0 8\n$EndMeshFormat\n", ""),
    ("msh-node-text", "msh", "$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n2\n1 0 0 0\n"
     "2 a b c\n$EndNodes\n$Elements\n1\n1 1 2 0 1 1 2\n$EndElements\n", ""),
    ("msh-element-out", "msh", "$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n2\n1 0 0 0\n"
     "2 1 0 0\n$EndNodes\n$Elements\n1\n1 1 2 0 1 1 7\n$EndElements\n", ""),
    ("msh-no-lines", "msh", "$MeshFormat\n2.2 0 8\n$EndMeshFormat\n$Nodes\n1\n1 0 0 0\n"
     "$EndNodes\n$Elements\n1\n1 15 2 0 1 1\n$EndElements\n", ""),
    ("msh41-zero-node-block", "msh", None, None),  # filled below: valid, must read
    ("vtk-empty", "vtk", "", ""),
    ("vtk-garbage", "vtk", "# vtk DataFile Version 4.2\nx\nASCII\nDATASET BLOB\n", ""),
    ("vtu-garbage", "vtu", "<VTKFile><oops", ""),
    ("stl-garbage", "stl", "solid x\nfacet oops\n", ""),
    ("unknown-suffix", "xyz", "1 2 3\n", "no reader for suffix"),
]

MSH41_ZERO_BLOCK = """\
$MeshFormat
4.1 0 8
$EndMeshFormat
$Entities
2 1 0 0
1 0 0 0 0
2 1 0 0 0
7 0 0 0 1 0 0 0 2 1 -2
$EndEntities
$Nodes
3 2 1 2
0 1 0 1
1
0 0 0
0 2 0 1
2
1 0 0
1 7 0 0
$EndNodes
$Elements
1 1 1 1
1 7 1 1
1 1 2
$EndElements
"""


def _model() -> sf.Model:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    m.add_members([[0, 3], [1, 3], [2, 3]], area=1e-4, E=210e9)
    m.add_support([0, 1, 2])
    m.add_load("P", [3], (0.0, 0.0, -1e3))
    return m


def _changed(a: np.ndarray, where: tuple[int, int], value: float) -> np.ndarray:
    out = a.copy()
    out[where] = value
    return out


def _solve_after(change: Callable[[sf.Model], None]) -> Callable[[], None]:
    def run() -> None:
        m = _model()
        change(m)
        m.validate()
        solve_static(m)
    return run


API: list[tuple[str, Callable[[], Any], str]] = [
    ("api-nodes-ragged", lambda: sf.Model().add_nodes([[0, 0, 0], [1, 0]]), "add_nodes"),
    ("api-nodes-string", lambda: sf.Model().add_nodes([["a", 0, 0]]), "add_nodes"),
    ("api-nodes-complex", lambda: sf.Model().add_nodes([[1j, 0, 0]]), "add_nodes"),
    ("api-nodes-nan", lambda: sf.Model().add_nodes([[np.nan, 0, 0]]), "add_nodes"),
    ("api-nodes-inf", lambda: sf.Model().add_nodes([[np.inf, 0, 0]]), "add_nodes"),
    ("api-nodes-2col", lambda: sf.Model().add_nodes([[0, 0]]), "add_nodes"),
    ("api-nodes-none", lambda: sf.Model().add_nodes(None), "add_nodes"),
    ("api-members-out", lambda: _model().add_members([[0, 9]], area=1e-4, E=1e9), "9"),
    ("api-members-neg", lambda: _model().add_members([[0, -1]], area=1e-4, E=1e9), "-1"),
    ("api-members-float", lambda: _model().add_members([[0, 1.5]], area=1e-4, E=1e9), ""),
    ("api-members-self", lambda: _model().add_members([[1, 1]], area=1e-4, E=1e9), ""),
    ("api-members-area-neg", lambda: _model().add_members([[0, 1]], area=-1, E=1e9), "area"),
    ("api-members-E-nan", lambda: _model().add_members([[0, 1]], area=1, E=np.nan), "E"),
    ("api-spring-tuple", lambda: _model().add_spring([1], (0, 0, 2e6)), None),
    ("api-spring-neg", lambda: _model().add_spring([1], (0, 0, -2e6)), ""),
    ("api-support-out", lambda: _model().add_support([42]), "42"),
    ("api-load-out", lambda: _model().add_load("P", [42], (0, 0, 1)), "42"),
    ("api-load-nan", lambda: _model().add_load("P", [3], (np.nan, 0, 1)), ""),
    ("api-load-short", lambda: _model().add_load("P", [3], (0, 1)), ""),
    ("api-load-string", lambda: _model().add_load("P", [3], ("a", 0, 1)), ""),
    ("api-g-negative", lambda: _model().add_self_weight("SW", g=-9.81), "g"),
    ("api-g-zero", lambda: _model().add_self_weight("SW", g=0.0), "g"),
    ("api-temp-out", lambda: _model().add_temperature("T", [7], 10.0), "7"),
    ("api-settle-out", lambda: _model().add_settlement("S", [7], (0, 0, 1e-3)), "7"),
    ("api-combo-unknown", lambda: _model().add_combination("C", {"nope": 1.0}), "nope"),
    ("api-group-out", lambda: _model().add_group("G", [5]), "5"),
    ("api-panel-zero-area", lambda: _model().add_panels([[0, 1, 1]]), "panel"),
    ("api-panel-collinear", lambda: _model().add_panels([[0, 1, 1, 0]]), "panel"),
    # Geometry is read-only: changed by assigning a new array (checked then and at solve).
    ("api-nan-node-after-add",
     _solve_after(lambda m: setattr(m, "nodes", _changed(m.nodes, (3, 2), np.nan))), "node"),
    ("api-member-out-after-add",
     _solve_after(lambda m: setattr(m, "members", _changed(m.members, (0, 1), 99))), "99"),
    ("api-member-neg-after-add",
     _solve_after(lambda m: setattr(m, "members", _changed(m.members, (0, 1), -5))), "-5"),
    ("api-area-nan-after-add", _solve_after(lambda m: m.area.__setitem__(0, np.nan)), "area"),
]
