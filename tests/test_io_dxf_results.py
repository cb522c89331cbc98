"""Coloured result drawings, read back with ezdxf (and its recover loader)."""

from __future__ import annotations

from pathlib import Path

import ezdxf
import numpy as np
import pytest
from conftest import H_APEX, L_LEG, W, loaded_tripod, tripod_wind_forces
from ezdxf import recover

import spaceframe as sf
from spaceframe.io import dxf_results as dr


def _tripod() -> sf.Model:
    """A camera tripod for a fictional stadium mast (the shared loaded tripod)."""
    m = loaded_tripod(wind_case="wind:+x")
    m.add_group("legs", [0, 1, 2])
    return m


def _wind_forces() -> np.ndarray:
    return tripod_wind_forces()


@pytest.fixture
def results() -> sf.Results:
    return _tripod().solve()


@pytest.fixture
def drawing(tmp_path: Path, results: sf.Results) -> ezdxf.document.Drawing:
    path = dr.write_results(tmp_path / "tripod.dxf", results, labels=True,
                            deformed_scale="auto")
    assert path == tmp_path / "tripod.dxf"
    return ezdxf.readfile(path)


def _lines(doc: ezdxf.document.Drawing, layer: str) -> list:
    return list(doc.modelspace().query(f'LINE[layer=="{layer}"]'))


def test_layers_per_result_and_first_on(drawing: ezdxf.document.Drawing) -> None:
    names = {layer.dxf.name for layer in drawing.layers}
    # ":" is not allowed in DXF layer names (DXF reference, LAYER table, common practice).
    for tag in ("snow", "wind_+x", "snow+wind"):
        for kind in ("N", "KEY", "L", "D"):
            assert f"{kind}_{tag}" in names
    assert {"FRAME", "SUPPORTS"} <= names
    assert drawing.layers.get("N_snow").is_on()
    assert not drawing.layers.get("N_wind_+x").is_on()
    assert not drawing.layers.get("D_snow+wind").is_on()
    assert drawing.header["$INSUNITS"] == 6


def test_audit_passes_on_read_back(tmp_path: Path, results: sf.Results) -> None:
    path = dr.write_results(tmp_path / "t.dxf", results, labels=True, deformed_scale="auto")
    doc, auditor = recover.readfile(path)
    assert not auditor.has_errors
    assert not doc.audit().has_errors


def test_member_colours_follow_force_sign(drawing: ezdxf.document.Drawing) -> None:
    lines = _lines(drawing, "N_wind_+x")
    assert len(lines) == 3
    colours = [tuple(e.rgb) for e in lines]
    # Leg 1 (210°) is in tension and carries the largest |N|: darkest tension band.
    assert colours[1] == dr.TENSION_COLORS[-1]
    # Leg 2 (330°) in compression with the same |N|: darkest compression band.
    assert colours[2] == dr.COMPRESSION_COLORS[-1]
    # Leg 0 carries nothing (closed form): the zero colour.
    assert colours[0] == dr.ZERO_COLOR
    snow = [tuple(e.rgb) for e in _lines(drawing, "N_snow")]
    assert snow == [dr.COMPRESSION_COLORS[-1]] * 3  # all legs equally compressed
    for e in lines:
        assert 1 <= e.dxf.color <= 255 and e.dxf.color != 7  # an ACI fallback is set


def test_band_colours_are_distinct_and_ordered() -> None:
    allc = [*dr.TENSION_COLORS, *dr.COMPRESSION_COLORS, dr.ZERO_COLOR]
    assert len(set(allc)) == 11
    assert all(r > b for r, _, b in dr.TENSION_COLORS)  # reddish
    assert all(b > r for r, _, b in dr.COMPRESSION_COLORS)  # bluish


def test_force_bands() -> None:
    # Five equal bands of |N| / max|N| on each side (hand-worked values).
    bands, top = dr.force_bands(np.array([10.0, -10.0, 1.9, 2.1, -6.5, 0.0, 1e-12]))
    assert top == 10.0
    assert bands.tolist() == [5, -5, 1, 2, -4, 0, 0]
    assert dr.force_bands(np.zeros(3))[0].tolist() == [0, 0, 0]


def test_labels_are_forces_in_kn(drawing: ezdxf.document.Drawing,
                                 results: sf.Results) -> None:
    texts = list(drawing.modelspace().query('TEXT[layer=="L_snow+wind"]'))
    assert len(texts) == 3
    # Closed form by superposition: snow N = -W L / (3 h) in each leg, plus 1.5 x wind.
    expected = -W * L_LEG / (3 * H_APEX) + 1.5 * _wind_forces()
    assert [t.dxf.text for t in texts] == [f"{v / 1e3:.2f}" for v in expected]
    nodes = results.model.nodes
    for t, (a, b) in zip(texts, results.model.members, strict=True):
        np.testing.assert_allclose(t.dxf.align_point, (nodes[a] + nodes[b]) / 2, atol=1e-12)
    zero = next(t.dxf.text for t in drawing.modelspace().query('TEXT[layer=="L_wind_+x"]'))
    assert zero == "0.00"  # no "-0.00" for the unloaded leg


def test_deformed_layer_uses_auto_scale(drawing: ezdxf.document.Drawing,
                                        results: sf.Results) -> None:
    model = results.model
    u = results["snow"].displacements
    # Common practice: the largest displacement drawn at 5 % of the bounding-box diagonal.
    scale = 0.05 * np.linalg.norm(np.ptp(model.nodes, axis=0)) / np.linalg.norm(u, axis=1).max()
    moved = model.nodes + scale * u
    for e, (a, b) in zip(_lines(drawing, "D_snow"), model.members, strict=True):
        np.testing.assert_allclose(e.dxf.start, moved[a], atol=1e-9)
        np.testing.assert_allclose(e.dxf.end, moved[b], atol=1e-9)
    assert "displacements x" in drawing.layers.get("D_snow").description


def test_options(tmp_path: Path, results: sf.Results) -> None:
    path = dr.write_results(tmp_path / "one.dxf", results, cases=["snow"],
                            deformed_scale=None)
    doc = ezdxf.readfile(path)
    names = {layer.dxf.name for layer in doc.layers}
    assert "N_snow" in names and "N_wind_+x" not in names
    assert not any(n.startswith(("D_", "L_")) for n in names)
    path = dr.write_results(tmp_path / "fixed.dxf", results, cases=["snow"],
                            deformed_scale=100.0)
    doc = ezdxf.readfile(path)
    top = _lines(doc, "D_snow")[0]
    np.testing.assert_allclose(top.dxf.start,
                               results.model.nodes[3] + 100.0 * results["snow"].displacements[3])


def test_bad_input_names_the_problem(tmp_path: Path, results: sf.Results) -> None:
    with pytest.raises(sf.WriteError, match="'rain'"):
        dr.write_results(tmp_path / "x.dxf", results, cases=["rain"])
    with pytest.raises(sf.WriteError, match="deformed_scale=-1"):
        dr.write_results(tmp_path / "x.dxf", results, deformed_scale=-1.0)
    with pytest.raises(sf.WriteError, match="no load cases"):
        dr.write_results(tmp_path / "x.dxf", results, cases=[])
    assert list(tmp_path.iterdir()) == []


def test_layer_names_unique_without_case() -> None:
    m = _tripod()
    m.add_load("Snow", [3], (0.0, 0.0, -1.0))
    tags = dr.layer_names(m.solve())
    assert tags["snow"] == "snow" and tags["Snow"] == "Snow_2"
    assert tags["wind:+x"] == "wind_+x"


def _frame_points(doc: ezdxf.document.Drawing) -> np.ndarray:
    return np.array([[*ln.dxf.start, *ln.dxf.end] for ln in _lines(doc, "FRAME")]).reshape(-1, 3)


def test_written_in_the_source_drawings_units(tmp_path: Path, results: sf.Results) -> None:
    # The model came from a drawing in millimetres: the results overlay it 1:1.
    results.model.meta["units"] = {"name": "mm", "scale": 1e-3, "source": "$INSUNITS = 4"}
    doc = ezdxf.readfile(dr.write_results(tmp_path / "mm.dxf", results, deformed_scale="auto"))
    assert doc.header["$INSUNITS"] == 4  # DXF reference: 4 = millimetres
    assert doc.header["$MEASUREMENT"] == 1
    model = results.model
    pts = _frame_points(doc)
    expected = np.concatenate([model.nodes[model.members[:, 0]],
                               model.nodes[model.members[:, 1]]], axis=1).reshape(-1, 3) * 1e3
    np.testing.assert_allclose(pts, expected, rtol=1e-12, atol=1e-9)
    lo, hi = np.array(doc.header["$EXTMIN"]), np.array(doc.header["$EXTMAX"])
    assert np.all(lo <= model.nodes.min(axis=0) * 1e3 + 1e-9)
    assert np.all(hi >= model.nodes.max(axis=0) * 1e3 - 1e-9)
    # Every entity lies inside the declared extents (ezdxf's own bounding boxes).
    from ezdxf import bbox

    box = bbox.extents(doc.modelspace())
    assert np.all(np.asarray(box.extmin)[:2] >= lo[:2] - 1e-6 * np.ptp(pts))
    assert np.all(np.asarray(box.extmax)[:2] <= hi[:2] + 1e-6 * np.ptp(pts))
    # Deformed shape, displacements converted to mm as well: the automatic scale
    # draws the apex drop (closed form, compatibility) at 5 % of the diagonal.
    size = float(np.linalg.norm(np.ptp(model.nodes, axis=0)))
    apex = max((ln.dxf.start for ln in _lines(doc, "D_snow")), key=lambda v: v[2])
    assert apex[2] == pytest.approx((H_APEX - 0.05 * size) * 1e3, rel=1e-9)


def test_inline_model_in_the_model_files_unit(tmp_path: Path, results: sf.Results) -> None:
    results.model.meta["project:length_unit"] = {"name": "ft", "scale": 0.3048}
    doc = ezdxf.readfile(dr.write_results(tmp_path / "ft.dxf", results))
    assert doc.header["$INSUNITS"] == 2  # feet
    assert doc.header["$MEASUREMENT"] == 0  # imperial
    z = _frame_points(doc)[:, 2].max()
    assert z == pytest.approx(H_APEX / 0.3048, rel=1e-12)
    # Explicit choice wins, and the default without any unit is metres.
    doc = ezdxf.readfile(dr.write_results(tmp_path / "cm.dxf", results, units="cm"))
    assert doc.header["$INSUNITS"] == 5
    assert _frame_points(doc)[:, 2].max() == pytest.approx(H_APEX * 100, rel=1e-12)
    del results.model.meta["project:length_unit"]
    doc = ezdxf.readfile(dr.write_results(tmp_path / "m.dxf", results))
    assert doc.header["$INSUNITS"] == 6
    assert _frame_points(doc)[:, 2].max() == pytest.approx(H_APEX, rel=1e-12)


# ----------------------------------------------------------- streamed LINEs
def _grid_results() -> sf.Results:
    from benchmarks.grids import double_layer_grid

    m = double_layer_grid(6, 5)  # 240 members, invented demo data
    m.add_load("side", [0, 1, 2], (3.0e3, 0.0, 0.0))
    m.add_combination("both", {"roof": 1.35, "side": 1.5})
    return m.solve()


def _line_arrays(doc: ezdxf.document.Drawing, layer: str) -> tuple[np.ndarray, list, list]:
    lines = _lines(doc, layer)
    seg = np.array([[tuple(e.dxf.start), tuple(e.dxf.end)] for e in lines]).reshape(-1, 2, 3)
    return seg, [e.dxf.get("color") for e in lines], [e.dxf.get("true_color") for e in lines]


def test_streamed_drawing_reads_back_and_audits_clean(tmp_path: Path) -> None:
    results = _grid_results()
    results.model.meta["units"] = {"name": "mm", "scale": 1e-3, "source": "$INSUNITS = 4"}
    path = dr.write_results(tmp_path / "grid.dxf", results)
    doc = ezdxf.readfile(path)
    auditor = doc.audit()
    assert not auditor.has_errors, [e.message for e in auditor.errors]
    assert not auditor.has_fixes, [e.message for e in auditor.fixes]
    assert doc.header["$INSUNITS"] == 4
    model = results.model
    b = model.n_members
    frame = np.stack([model.nodes[model.members[:, 0]],
                      model.nodes[model.members[:, 1]]], axis=1) * 1e3
    # Default: frame and force layers only; no deformed shapes or labels.
    names = {layer.dxf.name for layer in doc.layers}
    assert not any(n.startswith(("D_", "L_")) for n in names)
    msp = doc.modelspace()
    assert len(msp.query("LINE")) == b * (1 + len(results)) + 11 * len(results)  # + legends
    assert len(msp.query("TEXT")) == 12 * len(results)  # the legends' rows only
    seg, aci, rgb = _line_arrays(doc, "FRAME")
    np.testing.assert_array_equal(seg, frame)  # repr() round-trips doubles exactly
    assert set(aci) == {None} and set(rgb) == {None}  # BYLAYER
    for name in results:
        bands, _ = dr.force_bands(results[name].axial_forces)
        seg, aci, rgb = _line_arrays(doc, f"N_{name}")
        np.testing.assert_array_equal(seg, frame)
        from ezdxf.colors import rgb2int

        assert rgb == [rgb2int(dr._band_color(int(k))) for k in bands]
        assert aci == [dr._nearest_aci(dr._band_color(int(k))) for k in bands]
    assert {"N_roof", "N_side", "N_both"} <= names
    assert doc.layers.get("N_roof").is_on() and not doc.layers.get("N_both").is_on()
    # Handles are unique and below the seed for new ones.
    handles = [int(e.dxf.handle, 16) for e in msp]
    assert len(set(handles)) == len(handles)
    assert int(doc.header["$HANDSEED"], 16) > max(handles)
    # ezdxf's recover loader finds nothing to repair either.
    _, recovered = recover.readfile(path)
    assert not recovered.has_errors and not recovered.has_fixes


def test_deformed_shapes_and_labels_only_on_request(tmp_path: Path) -> None:
    results = _grid_results()
    doc = ezdxf.readfile(dr.write_results(tmp_path / "d.dxf", results, labels=True,
                                          deformed_scale=10.0))
    assert not doc.audit().has_errors
    model = results.model
    for name in results:
        moved = model.nodes + 10.0 * results[name].displacements
        seg, _, _ = _line_arrays(doc, f"D_{name}")
        np.testing.assert_allclose(seg, np.stack([moved[model.members[:, 0]],
                                                  moved[model.members[:, 1]]], axis=1),
                                   rtol=0, atol=1e-12)
        assert len(doc.modelspace().query(f'TEXT[layer=="L_{name}"]')) == model.n_members


def test_extra_layer_of_segments_is_streamed(tmp_path: Path) -> None:
    results = _grid_results()
    seg = np.array([[[0.0, 0.0, 0.0], [1.0, 2.0, 3.0]], [[0.5, -1.0, 2.0], [7.0, 8.0, 9.25]]])
    extra = dr.LineLayer("MARKED", seg, aci=np.array([1, 5]), color=1, description="two lines")
    doc = ezdxf.readfile(dr.write_results(tmp_path / "e.dxf", results, extra=[extra]))
    assert not doc.audit().has_errors
    got, aci, rgb = _line_arrays(doc, "MARKED")
    np.testing.assert_array_equal(got, seg)
    assert aci == [1, 5] and rgb == [None, None]
    lay = doc.layers.get("MARKED")
    assert lay.color == 1 and lay.description == "two lines"
    assert np.all(np.array(doc.header["$EXTMAX"]) >= seg.max(axis=(0, 1)))


def test_stream_lines_refuses_non_finite_coordinates() -> None:
    import io

    seg = np.zeros((3, 2, 3))
    seg[2, 1, 0] = np.nan
    with pytest.raises(sf.SpaceframeError, match="layer X: line 2 "):
        dr.stream_lines(io.StringIO(), seg, "X", 0x100, "17")


def test_stream_lines_chunks_give_the_same_text() -> None:
    import io

    rng = np.random.default_rng(1)
    seg = rng.normal(size=(7, 2, 3))
    a, b = io.StringIO(), io.StringIO()
    assert dr.stream_lines(a, seg, "L", 0x2A, "17", aci=np.arange(1, 8)) == 7
    dr.stream_lines(b, seg, "L", 0x2A, "17", aci=np.arange(1, 8), chunk=3)
    assert a.getvalue() == b.getvalue()
    assert a.getvalue().count("  0\nLINE\n") == 7 and "  5\n2A\n" in a.getvalue()


def test_no_audit_on_the_tools_own_drawing(tmp_path: Path, results: sf.Results,
                                          monkeypatch: pytest.MonkeyPatch) -> None:
    def refuse(self: object) -> None:
        raise AssertionError("audit called")

    monkeypatch.setattr(ezdxf.document.Drawing, "audit", refuse)
    assert dr.write_results(tmp_path / "a.dxf", results).exists()


def test_large_models_get_the_drawing_only_on_request(tmp_path: Path,
                                                     results: sf.Results) -> None:
    path, note = dr.write_if_wanted(tmp_path / "r.dxf", results, limit=2)
    assert path is None and note is not None
    assert "3 members is above 2" in note and "r.dxf" in note
    assert list(tmp_path.iterdir()) == []
    path, note = dr.write_if_wanted(tmp_path / "r.dxf", results, limit=2, requested=True)
    assert path == tmp_path / "r.dxf" and path.exists() and note is None
    path, note = dr.write_if_wanted(tmp_path / "s.dxf", results, requested=False)
    assert path is None and note is None and not (tmp_path / "s.dxf").exists()
    path, note = dr.write_if_wanted(tmp_path / "t.dxf", results, labels=True)
    assert path is not None and note is None
    assert len(ezdxf.readfile(path).modelspace().query('TEXT[layer=="L_snow"]')) == 3


def test_run_says_when_the_drawing_is_left_out(tmp_path: Path,
                                               monkeypatch: pytest.MonkeyPatch) -> None:
    from spaceframe.io import dxf_results as mod
    from spaceframe.run import job

    assert mod.dxf_wanted(200_001) == (False, "results.dxf: results DXF not written: 200001 "
                                       "members is above 200000; ask for it with --dxf yes "
                                       "(write_if_wanted(requested=True))")
    assert mod.dxf_wanted(200_000) == (True, None)
    model = Path(__file__).parent.parent / "examples" / "canopy" / "canopy.toml"
    monkeypatch.setattr(mod, "MEMBER_LIMIT", 1)
    out = job.run(model, output=tmp_path / "out", pictures=False)
    assert not (out.output / "results.dxf").exists()
    assert (out.output / "members.csv").exists()
    assert any("results DXF not written" in w for w in out.summary["warnings"])
    summary = (out.output / "summary.json").read_text(encoding="utf-8")
    assert "results DXF not written" in summary


def test_run_options_choose_the_results_drawing(tmp_path):
    import ezdxf
    from test_project import CANOPY

    from spaceframe.cli import main

    (tmp_path / "canopy.toml").write_text(CANOPY, encoding="utf-8")
    model = str(tmp_path / "canopy.toml")
    assert main(["run", "-q", model, "--no-pictures", "--dxf", "no"]) == 0
    assert not (tmp_path / "out" / "results.dxf").exists()
    assert main(["run", "-q", model, "--no-pictures", "--dxf-deformed"]) == 0
    layers = {la.dxf.name for la in ezdxf.readfile(tmp_path / "out" / "results.dxf").layers}
    assert any(name.startswith("D_") or "DEFORM" in name.upper() for name in layers)
    assert main(["run", "-q", model, "--no-pictures"]) == 0
    layers = {la.dxf.name for la in ezdxf.readfile(tmp_path / "out" / "results.dxf").layers}
    assert not any(name.startswith("D_") or "DEFORM" in name.upper() for name in layers)
