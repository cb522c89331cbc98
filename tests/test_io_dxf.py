"""DXF reading and writing (spaceframe.io.dxf); every input drawing is built here with ezdxf."""

from __future__ import annotations

import math
import os
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from _frame_keys import coords_set, member_keys

import spaceframe as sf
from spaceframe.io import WriteError, read_report
from spaceframe.io import dxf as sfdxf
from spaceframe.io._common import INSUNITS, UNIT_CODES

ezdxf = pytest.importorskip("ezdxf")

Saver = Callable[..., Path]

# Several drawings here are deliberately in more than one part.
pytestmark = pytest.mark.filterwarnings(
    "ignore:healed frame is in:spaceframe.errors.SpaceframeWarning"
)


# ---------------------------------------------------------------------------
# fixtures and helpers
# ---------------------------------------------------------------------------


@pytest.fixture(autouse=True, params=["whole", "streamed"])
def reader(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> str:
    """Every test twice: drawings read whole, and streamed whenever they can be.

    Streaming (ezdxf's iterdxf) is for big drawings; a size threshold of 0 makes
    every drawing of model-space entities streamed, so each reading test here
    checks that both readers give the same model.
    """
    if request.param == "streamed":
        monkeypatch.setattr("spaceframe.io._dxf_stream.STREAM_MIN_BYTES", 0)
    return str(request.param)


@pytest.fixture
def new_doc() -> Callable[..., Any]:
    """Factory of fresh drawings, $INSUNITS metres unless told."""

    def make(insunits: int = 6) -> Any:
        doc = ezdxf.new("R2013")
        doc.header["$INSUNITS"] = insunits
        return doc

    return make


@pytest.fixture
def save(tmp_path: Path) -> Saver:
    """Save a drawing under tmp_path and return the path."""

    def saver(doc: Any, name: str = "drawing.dxf") -> Path:
        path = tmp_path / name
        doc.saveas(path)
        return path

    return saver


@pytest.fixture
def small_frame() -> sf.Model:
    """A square pyramid frame with disjoint groups, markers and panels."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [4, 0, 0], [4, 3, 0], [0, 3, 0], [2, 1.5, 2.5], [2, -1.5, 0]])
    m.add_members([[0, 1], [1, 2], [2, 3], [3, 0]], group="Base")
    m.add_members([[0, 4], [1, 4], [2, 4], [3, 4]], group="Rafters")
    m.add_members([[0, 5], [5, 1]])
    m.add_panels([[0, 1, 4]], group="ROOF")
    m.add_panels([[1, 2, 4], [0, 1, 2, 3], [0, 5, 1, 2, 3]])
    m.add_markers([[2, 1.5, 0]], ["Survey"])
    return m


def arbitrary_axes(normal: np.ndarray) -> np.ndarray:
    """Rows Ax, Ay, Az of the object coordinate system of an extrusion vector.

    The "arbitrary axis algorithm" of the DXF reference (Autodesk, DXF
    Reference, "Advanced DXF Issues: Arbitrary Axis Algorithm"): Az = N;
    Ax = Wy x N if |Nx| < 1/64 and |Ny| < 1/64, else Wz x N; Ay = Az x Ax.
    """
    az = normal / np.linalg.norm(normal)
    if abs(az[0]) < 1 / 64 and abs(az[1]) < 1 / 64:
        ax = np.cross([0.0, 1.0, 0.0], az)
    else:
        ax = np.cross([0.0, 0.0, 1.0], az)
    ax /= np.linalg.norm(ax)
    ay = np.cross(az, ax)
    return np.array([ax, ay, az])


def insert_matrix(
    insert: tuple[float, float, float],
    rotation_deg: float = 0.0,
    scale: tuple[float, float, float] = (1.0, 1.0, 1.0),
    base: tuple[float, float, float] = (0.0, 0.0, 0.0),
) -> np.ndarray:
    """4x4 matrix of a block reference in the plane z = const (extrusion +z).

    From the INSERT definition in the DXF reference: a block point p goes to
    insert + Rz(rotation) . diag(scale) . (p - base).
    """
    c, s = math.cos(math.radians(rotation_deg)), math.sin(math.radians(rotation_deg))
    rot = np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])
    lin = rot @ np.diag(scale)
    out = np.eye(4)
    out[:3, :3] = lin
    out[:3, 3] = np.asarray(insert) - lin @ np.asarray(base)
    return out


def apply(mat: np.ndarray, pts: list[tuple[float, float, float]]) -> np.ndarray:
    p = np.c_[np.asarray(pts, dtype=float), np.ones(len(pts))]
    return (mat @ p.T).T[:, :3]


# ---------------------------------------------------------------------------
# lines, polylines, layers
# ---------------------------------------------------------------------------


def test_lines_on_layers_become_groups_named_as_the_layer_table(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc()
    doc.layers.add("Chord")
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (2, 0, 0), dxfattribs={"layer": "Chord"})
    msp.add_line((2, 0, 0), (2, 2, 0), dxfattribs={"layer": "CHORD"})
    msp.add_line((2, 2, 0), (0, 0, 0), dxfattribs={"layer": "diag"})
    model = sfdxf.read(save(doc))
    # Layer names compare case-insensitively in CAD (common practice); the
    # layer table's spelling is kept.
    assert set(model.groups) == {"Chord", "diag"}
    np.testing.assert_array_equal(model.groups["Chord"], [0, 1])
    np.testing.assert_array_equal(model.groups["diag"], [2])
    assert model.n_nodes == 3 and model.n_members == 3
    assert np.all(np.isnan(model.area)) and np.all(np.isnan(model.E))
    assert model.meta["units"] == {"name": "m", "scale": 1.0, "source": "$INSUNITS = 6"}
    with pytest.raises(sf.ModelError, match="has no area assigned"):
        model.validate()


@pytest.mark.parametrize("normal", [(0.0, 0.0, -1.0), (0.6, 0.0, 0.8), (0.01, 0.0, 1.0)])
@pytest.mark.parametrize("kind", ["LWPOLYLINE", "POLYLINE"])
def test_ocs_polyline_to_world(
    new_doc: Callable[..., Any], save: Saver, normal: tuple[float, float, float], kind: str
) -> None:
    ocs_xy = [(1.0, 2.0), (3.0, 4.0), (5.0, 4.0)]
    elevation = 2.5
    doc = new_doc()
    msp = doc.modelspace()
    if kind == "LWPOLYLINE":
        attribs = {"extrusion": normal, "elevation": elevation, "layer": "RIB"}
        msp.add_lwpolyline(ocs_xy, close=True, dxfattribs=attribs)
    else:
        attribs = {"extrusion": normal, "elevation": (0, 0, elevation), "layer": "RIB"}
        msp.add_polyline2d(ocs_xy, close=True, dxfattribs=attribs)
    model = sfdxf.read(save(doc))
    # Expected world points by the arbitrary axis algorithm, derived here:
    # for N = (0, 0, -1), Ax = Wy x N = (-1, 0, 0), Ay = N x Ax = (0, 1, 0),
    # so OCS (x, y, e) is WCS (-x, y, -e): OCS x is minus WCS x.
    axes = arbitrary_axes(np.asarray(normal))
    ocs = np.c_[np.asarray(ocs_xy), np.full(3, elevation)]
    expected = ocs @ axes
    if normal == (0.0, 0.0, -1.0):
        np.testing.assert_allclose(expected, [[-1, 2, -2.5], [-3, 4, -2.5], [-5, 4, -2.5]])
    got = np.array(sorted(model.nodes.tolist()))
    np.testing.assert_allclose(got, np.array(sorted(expected.tolist())), rtol=0, atol=1e-12)
    # closed: three straight segments including the closing one
    assert model.n_members == 3
    assert member_keys(model) == {
        frozenset((tuple(np.round(expected[a], 9)), tuple(np.round(expected[b], 9))))
        for a, b in [(0, 1), (1, 2), (2, 0)]
    }


def test_3d_polyline_open_and_closed(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    pts = [(0, 0, 0), (1, 0, 1), (2, 1, 1), (2, 2, 0)]
    msp.add_polyline3d(pts, dxfattribs={"layer": "OPEN"})
    msp.add_polyline3d([(p[0] + 10, p[1], p[2]) for p in pts], close=True)
    model = sfdxf.read(save(doc))
    # open: n - 1 segments; closed: n segments (common practice)
    assert model.groups["OPEN"].size == 3
    assert model.groups["0"].size == 4
    assert model.n_nodes == 8


def test_curves_are_ignored_and_reported_with_layers(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    # straight, bulged, straight: only the two straight segments are members
    msp.add_lwpolyline(
        [(0, 0, 0, 0, 0), (2, 0, 0, 0, 0.5), (4, 0, 0, 0, 0), (6, 0, 0, 0, 0)],
        format="xyseb",
        dxfattribs={"layer": "RIB"},
    )
    msp.add_arc((0, 0), 1.0, 0, 90, dxfattribs={"layer": "ARCS"})
    msp.add_arc((5, 5), 1.0, 0, 90, dxfattribs={"layer": "ARCS"})
    msp.add_circle((0, 0), 2.0, dxfattribs={"layer": "Hoops"})
    msp.add_spline([(0, 0), (1, 1), (2, 0), (3, 1)], dxfattribs={"layer": "SPL"})
    msp.add_text("canopy", dxfattribs={"layer": "NOTES"})
    with pytest.warns(sf.SpaceframeWarning, match=r"ARC x2 on 'ARCS'"):
        model = sfdxf.read(save(doc))
    ignored = model.meta["io:ignored"]
    assert ignored["ARC"] == {"count": 2, "layers": {"ARCS": 2}}
    assert ignored["CIRCLE"] == {"count": 1, "layers": {"Hoops": 1}}
    assert ignored["SPLINE"] == {"count": 1, "layers": {"SPL": 1}}
    assert ignored["bulged polyline segment"] == {"count": 1, "layers": {"RIB": 1}}
    assert ignored["TEXT"]["count"] == 1
    assert model.n_members == 2
    assert "ARC x2 on 'ARCS'" in read_report(model)


# ---------------------------------------------------------------------------
# blocks
# ---------------------------------------------------------------------------


def test_nested_and_mirrored_blocks_with_layer_zero_inheritance(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc()
    inner = doc.blocks.new("INNER")
    inner_lines = [((0, 0, 0), (1, 0, 0)), ((0, 0, 0), (0, 2, 0))]
    inner.add_line(*inner_lines[0])  # layer 0: takes the insert's layer
    inner.add_line(*inner_lines[1], dxfattribs={"layer": "FIXED"})
    outer = doc.blocks.new("OUTER")
    outer.add_blockref("INNER", (10, 0, 0), dxfattribs={"rotation": 90})  # on layer 0
    outer.add_blockref("INNER", (0, 10, 0), dxfattribs={"layer": "OWN", "xscale": 2})
    msp = doc.modelspace()
    msp.add_blockref(
        "OUTER", (100, 0, 0), dxfattribs={"layer": "TOP", "xscale": -1, "rotation": 30}
    )
    model = sfdxf.read(save(doc))

    top = insert_matrix((100, 0, 0), 30, (-1, 1, 1))
    a = top @ insert_matrix((10, 0, 0), 90)
    b = top @ insert_matrix((0, 10, 0), 0, (2, 1, 1))
    expected_layers = {"TOP": [], "OWN": [], "FIXED": []}
    for mat, zero_layer in ((a, "TOP"), (b, "OWN")):
        p = apply(mat, [inner_lines[0][0], inner_lines[0][1]])
        expected_layers[zero_layer].append(p)
        expected_layers["FIXED"].append(apply(mat, [inner_lines[1][0], inner_lines[1][1]]))
    assert set(model.groups) == set(expected_layers)
    for layer, lines in expected_layers.items():
        want = {frozenset(tuple(np.round(q, 9)) for q in pair) for pair in lines}
        assert member_keys(model, model.groups[layer]) == want, layer
    # mirroring keeps lengths: the xscale=2 copy of the 1 m line is 2 m long
    lengths = sorted(np.round(model.lengths, 12).tolist())
    assert lengths == [1.0, 2.0, 2.0, 2.0]


@pytest.mark.parametrize("rotation", [0.0, 90.0])
def test_minsert_grid_expands_every_cell(
    new_doc: Callable[..., Any], save: Saver, rotation: float
) -> None:
    doc = new_doc()
    blk = doc.blocks.new("BAY")
    blk.add_line((0, 0, 0), (1, 0, 0))
    msp = doc.modelspace()
    ins = msp.add_blockref("BAY", (3, 4, 0), dxfattribs={"layer": "GRID", "rotation": rotation})
    rows, cols, row_spacing, col_spacing = 2, 3, 5.0, 7.0
    ins.grid(size=(rows, cols), spacing=(row_spacing, col_spacing))
    model = sfdxf.read(save(doc))
    # DXF reference (MINSERT): columns step along the block x axis by the
    # column spacing, rows along its y axis by the row spacing, all rotated
    # with the insert.
    want = set()
    for r in range(rows):
        for c in range(cols):
            cell = insert_matrix((3, 4, 0), rotation) @ insert_matrix(
                (c * col_spacing, r * row_spacing, 0)
            )
            p = apply(cell, [(0, 0, 0), (1, 0, 0)])
            want.add(frozenset(tuple(np.round(q, 9)) for q in p))
    assert model.n_members == rows * cols
    assert member_keys(model, model.groups["GRID"]) == want


def test_points_become_markers_with_layers(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    blk = doc.blocks.new("TAG")
    blk.add_point((0.5, 0, 0))  # layer 0 inside a block: the insert's layer
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (10, 0, 0))
    msp.add_point((1, 2, 3), dxfattribs={"layer": "Supports"})
    msp.add_blockref("TAG", (5, 5, 0), dxfattribs={"layer": "Loads"})
    model = sfdxf.read(save(doc))
    np.testing.assert_allclose(model.markers, [[1, 2, 3], [5.5, 5, 0]], rtol=0, atol=1e-12)
    assert model.marker_layers.tolist() == ["Supports", "Loads"]
    assert model.n_nodes == 2  # markers are not nodes


# ---------------------------------------------------------------------------
# units
# ---------------------------------------------------------------------------


def test_insunits_table_matches_the_code_list_and_pint() -> None:
    pint = pytest.importorskip("pint")
    from ezdxf.enums import InsertUnits

    # Code numbering cross-checked with ezdxf's InsertUnits enum (which
    # follows the DXF reference list of $INSUNITS values).
    names = {u.value: u.name for u in InsertUnits}
    assert set(INSUNITS) == set(names) - {0}
    ureg = pint.UnitRegistry()
    pint_name = {
        1: "inch", 2: "foot", 3: "mile", 4: "mm", 5: "cm", 6: "m", 7: "km", 8: "microinch",
        9: "thou", 10: "yard", 11: "angstrom", 12: "nm", 13: "micrometer", 14: "dm", 15: "dam",
        16: "hm", 17: "Gm", 18: "astronomical_unit", 19: "light_year", 20: "parsec",
        21: "survey_foot", 22: "survey_foot / 12", 23: "survey_foot * 3", 24: "survey_mile",
    }  # fmt: skip
    for code, (_, metres) in INSUNITS.items():
        ref = ureg(pint_name[code]).to("m").magnitude
        # pint's parsec differs from 648000/pi au in the 11th digit
        rtol = 1e-9 if code == 20 else 1e-12
        assert metres == pytest.approx(ref, rel=rtol), (code, names[code])
    # the inverse table is derived, so it round-trips
    assert all(INSUNITS[UNIT_CODES[name]][0] == name for name in UNIT_CODES)


@pytest.mark.parametrize(
    ("code", "length_in_file", "metres"),
    [
        (4, 1000.0, 1.0),  # 1000 mm = 1 m (SI)
        (1, 100.0, 2.54),  # 100 in = 2.54 m (1 in = 25.4 mm exactly, 1959 agreement)
        (2, 10.0, 3.048),  # 10 ft = 3.048 m (1 ft = 0.3048 m exactly, same agreement)
    ],
)
def test_insunits_converted_to_metres(
    new_doc: Callable[..., Any], save: Saver, code: int, length_in_file: float, metres: float
) -> None:
    doc = new_doc(code)
    doc.modelspace().add_line((0, 0, 0), (length_in_file, 0, 0))
    model = sfdxf.read(save(doc))
    assert model.lengths[0] == pytest.approx(metres, rel=1e-12)
    assert model.meta["units"]["source"] == f"$INSUNITS = {code}"


def test_unitless_drawing_needs_units(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc(0)
    doc.modelspace().add_line((0, 0, 0), (12000, 0, 0))
    path = save(doc)
    with pytest.raises(sf.ReadError, match=r"drawing\.dxf.*unitless.*units=.*x 0\.\.12000"):
        sfdxf.read(path)
    model = sfdxf.read(path, units="mm")
    assert model.lengths[0] == pytest.approx(12.0, rel=1e-12)
    assert model.meta["units"] == {"name": "mm", "scale": 1e-3, "source": "units= option"}
    # a long spelling goes through the alias table, an unknown name is refused
    assert sfdxf.read(path, units="millimetre").lengths[0] == pytest.approx(12.0, rel=1e-12)
    with pytest.raises(sf.ReadError, match=r"units='furlongs per fortnight'"):
        sfdxf.read(path, units="furlongs per fortnight")


def test_units_option_overrides_header_with_a_warning(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc(6)
    doc.modelspace().add_line((0, 0, 0), (5000, 0, 0))
    with pytest.warns(sf.SpaceframeWarning, match=r"overrides the header \(\$INSUNITS = 6"):
        model = sfdxf.read(save(doc), units="mm")
    assert model.lengths[0] == pytest.approx(5.0, rel=1e-12)


def test_extents_in_report_show_a_units_slip(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc(6)  # says metres, but drawn in millimetres
    doc.modelspace().add_line((0, 0, 0), (24000, 0, 0))
    with pytest.warns(sf.SpaceframeWarning, match=r"24000 m across.*check the units"):
        model = sfdxf.read(save(doc))
    text = read_report(model)
    assert "x 0..24000 m" in text and "units: m ($INSUNITS = 6)" in text


# ---------------------------------------------------------------------------
# healing
# ---------------------------------------------------------------------------


def double_layer_grid(msp: Any, nx: int, ny: int, a: float, h: float) -> None:
    """Square-on-square grid, chords drawn as continuous lines through the joints."""
    for j in range(ny + 1):
        msp.add_line((0, j * a, h), (nx * a, j * a, h), dxfattribs={"layer": "TOP"})
    for i in range(nx + 1):
        msp.add_line((i * a, 0, h), (i * a, ny * a, h), dxfattribs={"layer": "TOP"})
    for j in range(ny):
        y = (j + 0.5) * a
        msp.add_line((0.5 * a, y, 0), ((nx - 0.5) * a, y, 0), dxfattribs={"layer": "BOTTOM"})
    for i in range(nx):
        x = (i + 0.5) * a
        msp.add_line((x, 0.5 * a, 0), (x, (ny - 0.5) * a, 0), dxfattribs={"layer": "BOTTOM"})
    for i in range(nx):
        for j in range(ny):
            c = ((i + 0.5) * a, (j + 0.5) * a, 0)
            for di in (0, 1):
                for dj in (0, 1):
                    msp.add_line(c, ((i + di) * a, (j + dj) * a, h), dxfattribs={"layer": "DIAG"})


def test_double_layer_grid_chords_split_at_joints(new_doc: Callable[..., Any], save: Saver) -> None:
    nx, ny, a, h = 4, 3, 2.0, 1.5
    doc = new_doc()
    double_layer_grid(doc.modelspace(), nx, ny, a, h)
    model = sfdxf.read(save(doc))
    # Counts derived for a square-on-square grid of nx x ny top squares:
    # top nodes (nx+1)(ny+1), bottom nodes nx*ny (one per square);
    # top chords nx(ny+1) + ny(nx+1), bottom chords (nx-1)ny + nx(ny-1),
    # diagonals 4 nx ny.
    n_top, n_bot = (nx + 1) * (ny + 1), nx * ny
    top = nx * (ny + 1) + ny * (nx + 1)
    bottom = (nx - 1) * ny + nx * (ny - 1)
    diag = 4 * nx * ny
    assert model.n_nodes == n_top + n_bot
    assert model.n_members == top + bottom + diag
    assert model.groups["TOP"].size == top
    assert model.groups["BOTTOM"].size == bottom
    assert model.groups["DIAG"].size == diag
    # every drawn chord line passes through interior joints, so all are split
    split = model.meta["heal:report"].step("split_at_nodes")
    assert split.count == (ny + 1) + (nx + 1) + ny + nx
    # the healed grid is a proper frame: every member shorter than a bay diagonal
    assert model.lengths.max() <= math.hypot(a, a) + 1e-12


@pytest.mark.parametrize(
    ("gap", "tolerance", "n_nodes"),
    [
        (0.4e-3, None, 3),  # inside the default 1 mm: merged
        (3.0e-3, None, 4),  # outside: kept apart
        (3.0e-3, 5.0e-3, 3),  # inside a wider tolerance given in metres
    ],
)
def test_near_coincident_endpoints(
    new_doc: Callable[..., Any],
    save: Saver,
    gap: float,
    tolerance: float | None,
    n_nodes: int,
) -> None:
    doc = new_doc(4)  # millimetres: the tolerance applies after conversion to metres
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (2000, 0, 0))
    msp.add_line((2000 + gap * 1e3, 0, 0), (2000, 1500, 0))
    model = sfdxf.read(save(doc), tolerance=tolerance)
    assert model.n_nodes == n_nodes and model.n_members == 2


def test_duplicate_and_zero_length_lines(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (3, 0, 0), dxfattribs={"layer": "A"})
    msp.add_line((3, 0, 0), (0, 0, 0), dxfattribs={"layer": "B"})  # same member drawn again
    msp.add_line((3, 0, 0), (3, 4, 0), dxfattribs={"layer": "A"})
    msp.add_line((3, 4, 0), (3, 4, 0), dxfattribs={"layer": "A"})  # zero length
    path = save(doc)
    model = sfdxf.read(path)
    report = model.meta["heal:report"]
    assert report.step("remove_duplicates").count == 1
    assert report.step("remove_zero_length").count == 1
    assert model.n_members == 2
    # the kept member carries the groups of both drawings of it
    np.testing.assert_array_equal(model.groups["B"], [0])
    np.testing.assert_array_equal(model.groups["A"], [0, 1])
    with pytest.raises(sf.ReadError, match=r"drawing\.dxf.*heal=True"):
        sfdxf.read(path, heal=False)


def test_heal_step_switches_pass_through(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (2, 2, 0))
    msp.add_line((0, 2, 0), (2, 0, 0))  # crosses the first at (1, 1, 0), no node there
    path = save(doc)
    plain = sfdxf.read(path)
    assert (plain.n_nodes, plain.n_members) == (4, 2)
    crossed = sfdxf.read(path, split_crossings=True)
    assert (crossed.n_nodes, crossed.n_members) == (5, 4)
    assert [1.0, 1.0, 0.0] in np.round(crossed.nodes, 12).tolist()
    with pytest.raises(sf.ReadError, match=r"unknown option 'split_everything'"):
        sfdxf.read(path, split_everything=True)
    with pytest.raises(sf.ReadError, match=r"split_crossings='yes' must be True or False"):
        sfdxf.read(path, split_crossings="yes")


def test_layer_include_and_exclude(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    msp.add_line((0, 0, 0), (1, 0, 0), dxfattribs={"layer": "Frame"})
    msp.add_line((1, 0, 0), (1, 1, 0), dxfattribs={"layer": "frame"})
    msp.add_line((0, 5, 0), (9, 5, 0), dxfattribs={"layer": "GRIDLINES"})
    path = save(doc)
    assert sfdxf.read(path, layers=["FRAME"]).n_members == 2
    model = sfdxf.read(path, exclude_layers="gridlines")
    assert model.n_members == 2 and model.meta["dxf:filtered_layers"] == {"GRIDLINES": 1}
    with pytest.raises(sf.ReadError, match=r"no usable entities.*layers filtered out: Frame"):
        sfdxf.read(path, layers=["GRIDLINES"], exclude_layers=["gridlines"])


# ---------------------------------------------------------------------------
# faces
# ---------------------------------------------------------------------------


def test_faces_become_panels_and_optionally_members(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc()
    msp = doc.modelspace()
    quad = [(0, 0, 0), (3, 0, 0), (3, 3, 0), (0, 3, 0)]
    face = msp.add_3dface(quad, dxfattribs={"layer": "ROOF"})
    face.set_edge_visibility(1, visible=False)  # edge v1-v2, (3,0)-(3,3), is hidden
    msp.add_3dface([(3, 0, 0), (6, 0, 0), (6, 3, 0)], dxfattribs={"layer": "ROOF"})
    mesh = msp.add_mesh(dxfattribs={"layer": "CANOPY"})
    with mesh.edit_data() as data:
        data.vertices = [(0, 3, 0), (3, 3, 0), (1.5, 5, 0)]
        data.faces = [(0, 1, 2)]
    pface = msp.add_polyface(dxfattribs={"layer": "PF"})
    pface.append_face([(6, 0, 0), (8, 0, 0), (6, 3, 0)])
    msp.add_line((0, 0, 0), (3, 0, 0), dxfattribs={"layer": "EDGE"})
    path = save(doc)

    # Without edge members only (0,0)-(3,0) is a member: every panel has a
    # corner on no member and is dropped, with a warning.
    with pytest.warns(sf.SpaceframeWarning, match="4 panel"):
        frame_only = sfdxf.read(path)
    assert frame_only.n_panels == 0 and frame_only.meta["io:dropped_panels"]["count"] == 4

    model = sfdxf.read(path, edges_as_members=True)
    want = [
        ((0, 0), (3, 0)), ((3, 3), (0, 3)), ((0, 3), (0, 0)),  # quad; v1-v2 hidden
        ((3, 0), (6, 0)), ((6, 0), (6, 3)), ((6, 3), (3, 0)),  # triangle
        ((3, 3), (1.5, 5)), ((1.5, 5), (0, 3)),  # mesh; (0,3)-(3,3) is the quad's
        ((6, 0), (8, 0)), ((8, 0), (6, 3)),  # polyface; (6,3)-(6,0) is the triangle's
    ]  # fmt: skip
    want_keys = {frozenset(((*a, 0.0), (*b, 0.0))) for a, b in want}
    got_keys = {frozenset(tuple(float(v) for v in p) for p in pair) for pair in member_keys(model)}
    assert got_keys == {frozenset(tuple(float(v) for v in p) for p in k) for k in want_keys}
    assert model.n_panels == 4
    assert [model.panel(k).size for k in range(model.n_panels)] == [4, 3, 3, 3]
    assert {k: v.size for k, v in model.panel_groups.items()} == {"ROOF": 2, "CANOPY": 1, "PF": 1}
    # the drawn line and the quad edge over it are one member in both groups
    edge = model.groups["EDGE"]
    assert edge.size == 1 and edge[0] in model.groups["ROOF"]


def test_polygon_mesh_polyline_closed_in_one_direction(
    new_doc: Callable[..., Any], save: Saver
) -> None:
    doc = new_doc()
    m, n = 3, 4  # 3 rings of 4 vertices round a vertical tube, closed round n
    mesh = doc.modelspace().add_polymesh(size=(m, n), dxfattribs={"layer": "TUBE"})
    for i in range(m):
        for j in range(n):
            a = j * math.pi / 2
            mesh.set_mesh_vertex((i, j), (2 * math.cos(a), 2 * math.sin(a), 1.5 * i))
    mesh.close(m_close=False, n_close=True)
    model = sfdxf.read(save(doc), edges_as_members=True)
    # quads: (m - 1) rows x n columns (closed round n); edges: m rings of n
    # plus n lines of (m - 1) along the tube
    assert model.n_panels == (m - 1) * n
    assert model.n_members == m * n + n * (m - 1)
    assert model.n_nodes == m * n


def test_binary_dxf(new_doc: Callable[..., Any], tmp_path: Path) -> None:
    doc = new_doc(4)
    doc.modelspace().add_line((0, 0, 0), (2500, 0, 0), dxfattribs={"layer": "PURLIN"})
    path = tmp_path / "binary.dxf"
    doc.saveas(path, fmt="bin")
    assert path.read_bytes().startswith(b"AutoCAD Binary DXF")
    model = sfdxf.read(path)
    assert model.lengths.tolist() == [pytest.approx(2.5, rel=1e-12)]
    assert set(model.groups) == {"PURLIN"}


# ---------------------------------------------------------------------------
# damaged and wrong files
# ---------------------------------------------------------------------------


def _line_drawing(new_doc: Callable[..., Any], save: Saver, n: int = 20) -> Path:
    doc = new_doc()
    msp = doc.modelspace()
    for i in range(n):
        msp.add_line((i, 0, 0), (i, 1, 0), dxfattribs={"layer": "POSTS"})
    return save(doc)


def test_truncated_in_the_header_is_a_read_error(
    new_doc: Callable[..., Any], save: Saver, tmp_path: Path
) -> None:
    data = _line_drawing(new_doc, save).read_bytes()
    cut = tmp_path / "cut_header.dxf"
    cut.write_bytes(data[:300])
    with pytest.raises(sf.ReadError, match=r"cut_header\.dxf.*(no usable entities|damaged)"):
        with pytest.warns(sf.SpaceframeWarning):
            sfdxf.read(cut)


def test_truncated_after_the_entities_is_recovered_and_reported(
    new_doc: Callable[..., Any], save: Saver, tmp_path: Path
) -> None:
    data = _line_drawing(new_doc, save).read_bytes()
    cut = tmp_path / "cut_objects.dxf"
    cut.write_bytes(data[: data.index(b"OBJECTS") + 40])
    with pytest.warns(sf.SpaceframeWarning, match=r"damaged DXF.*ezdxf\.recover"):
        model = sfdxf.read(cut)
    assert model.n_members == 20
    info = model.meta["dxf:recover"]
    assert set(info) == {"reason", "fixes", "errors"} and info["reason"]
    assert "ezdxf.recover" in read_report(model)


@pytest.mark.parametrize(
    ("content", "match"),
    [
        (b"hello, this is a text file\n", r"not_dxf\.dxf: is not a DXF file"),
        (b"", r"not_dxf\.dxf: is not a DXF file"),
        (b"AC1032" + bytes(200), r"not_dxf\.dxf: is a DWG drawing"),
        (bytes(range(256)) * 4, r"not_dxf\.dxf: is not a DXF file"),
    ],
)
def test_files_that_are_not_dxf(tmp_path: Path, content: bytes, match: str) -> None:
    path = tmp_path / "not_dxf.dxf"
    path.write_bytes(content)
    with pytest.raises(sf.ReadError, match=match):
        sfdxf.read(path)


def test_missing_file_and_folder(tmp_path: Path) -> None:
    with pytest.raises(sf.ReadError, match=r"nowhere\.dxf: no such file"):
        sfdxf.read(tmp_path / "nowhere.dxf")
    with pytest.raises(sf.ReadError, match="is not a file"):
        sfdxf.read(tmp_path)


def test_drawing_without_lines(new_doc: Callable[..., Any], save: Saver) -> None:
    doc = new_doc()
    doc.modelspace().add_circle((0, 0), 1.0, dxfattribs={"layer": "C"})
    doc.modelspace().add_3dface([(0, 0, 0), (1, 0, 0), (1, 1, 0)])
    with pytest.raises(sf.ReadError, match=r"no usable entities.*1 faces.*edges_as_members=True"):
        with pytest.warns(sf.SpaceframeWarning, match="CIRCLE"):
            sfdxf.read(save(doc))


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------


def test_write_read_round_trip(small_frame: sf.Model, tmp_path: Path) -> None:
    path = tmp_path / "frame.dxf"
    sfdxf.write(path, small_frame, units="mm")
    # clean under ezdxf's own audit
    doc = ezdxf.readfile(path)
    auditor = doc.audit()
    assert not auditor.errors and not auditor.fixes
    assert doc.header["$INSUNITS"] == 4
    lines = doc.modelspace().query("LINE")
    assert len(lines) == small_frame.n_members
    # coordinates in the file are millimetres
    assert max(abs(v) for e in lines for v in e.dxf.end) == pytest.approx(4000.0, rel=1e-12)

    back = sfdxf.read(path)
    assert back.meta["units"]["name"] == "mm"
    assert coords_set(back) == coords_set(small_frame)
    assert member_keys(back) == member_keys(small_frame)
    for name, ids in small_frame.groups.items():
        assert member_keys(back, back.groups[name]) == member_keys(small_frame, ids)
    ungrouped = np.setdiff1d(np.arange(back.n_members), np.concatenate(list(back.groups.values())))
    assert set(back.groups) == {"Base", "Rafters", "0"} and ungrouped.size == 0
    np.testing.assert_allclose(back.markers, small_frame.markers, rtol=1e-12)
    assert back.marker_layers.tolist() == ["Survey"]

    def panel_coords(m: sf.Model, k: int) -> list[tuple[float, ...]]:
        return [tuple(np.round(m.nodes[i], 9)) for i in m.panel(k).tolist()]

    assert sorted(panel_coords(back, k) for k in range(back.n_panels)) == sorted(
        panel_coords(small_frame, k) for k in range(small_frame.n_panels)
    )
    assert {k: v.size for k, v in back.panel_groups.items()} == {"ROOF": 1, "PANELS": 3}


def test_write_member_in_two_groups_goes_on_its_first(
    small_frame: sf.Model, tmp_path: Path
) -> None:
    small_frame.add_group("Special", [0, 4])  # already in Base / Rafters
    path = tmp_path / "frame.dxf"
    sfdxf.write(path, small_frame, default_layer="Misc")
    layers = [e.dxf.layer for e in ezdxf.readfile(path).modelspace().query("LINE")]
    assert layers.count("Base") == 4 and layers.count("Rafters") == 4
    assert layers.count("Special") == 0 and layers.count("Misc") == 2


def test_write_is_atomic(
    small_frame: sf.Model, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    path = tmp_path / "frame.dxf"
    path.write_text("old content")

    def broken_save(self: Any, filename: Any, *args: Any, **kwargs: Any) -> None:
        Path(filename).write_text("half a draw")
        raise OSError("disk full")

    monkeypatch.setattr(ezdxf.document.Drawing, "saveas", broken_save)
    with pytest.raises(WriteError, match=r"frame\.dxf.*disk full"):
        sfdxf.write(path, small_frame)
    assert path.read_text() == "old content"
    assert sorted(os.listdir(tmp_path)) == ["frame.dxf"]


def test_write_errors(small_frame: sf.Model, tmp_path: Path) -> None:
    with pytest.raises(WriteError, match=r"folder .* does not exist"):
        sfdxf.write(tmp_path / "missing" / "frame.dxf", small_frame)
    with pytest.raises(WriteError, match="units='parsnips'"):
        sfdxf.write(tmp_path / "frame.dxf", small_frame, units="parsnips")
    assert not (tmp_path / "frame.dxf").exists()


def test_write_cleans_layer_names(small_frame: sf.Model, tmp_path: Path) -> None:
    small_frame.groups = {"Top/Chords": small_frame.groups["Base"]}
    with pytest.warns(sf.SpaceframeWarning, match=r"'Top/Chords' written on layer 'Top_Chords'"):
        sfdxf.write(tmp_path / "frame.dxf", small_frame)
    back = sfdxf.read(tmp_path / "frame.dxf")
    assert back.groups["Top_Chords"].size == 4
