"""VTK output read back with two other readers: meshio and VTK's own (through PyVista)."""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
import pytest
import pyvista as pv

import spaceframe as sf
from spaceframe.io import vtk as sfvtk

pv.OFF_SCREEN = True

E, AREA_CHORD, AREA_DIAG = 210e9, 8e-4, 6e-4


def _canopy() -> sf.Model:
    """A two-bay bus-station canopy: a base grid on six supports, two raised apex nodes."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [3, 0, 0], [6, 0, 0], [0, 3, 0], [3, 3, 0], [6, 3, 0],
                 [1.5, 1.5, 1.2], [4.5, 1.5, 1.2]])
    m.add_members([[0, 1], [1, 2], [3, 4], [4, 5], [0, 3], [1, 4], [2, 5]],
                  area=AREA_CHORD, E=E, group="chords")
    m.add_members([[6, 0], [6, 1], [6, 3], [6, 4], [7, 1], [7, 2], [7, 4], [7, 5]],
                  area=AREA_DIAG, E=E, group="diagonals")
    m.add_members([[6, 7]], area=5e-4, E=E, group="ridge")
    m.add_support([0, 2, 3, 5])
    m.add_support([1, 4], x=False, y=False, z=True)
    m.add_load("dead", [6, 7], (0.0, 0.0, -20e3))
    m.add_load("wind/uplift", [6, 7], (5e3, 0.0, 8e3))
    m.add_temperature("heat", [15], 30.0)
    m.alpha[:] = 12e-6
    m.add_combination("ULS", {"dead": 1.35, "wind/uplift": 1.5})
    m.add_panels([[0, 1, 4, 3], [1, 2, 5, 4]], group="roof")
    m.add_panels([[0, 6, 1]], group="gable")
    return m


@pytest.fixture
def results() -> sf.Results:
    return _canopy().solve()


@pytest.fixture
def written(tmp_path: Path, results: sf.Results) -> Path:
    return sfvtk.write(tmp_path / "canopy.pvd", results)


def _text(array: np.ndarray) -> list[str]:
    # Independent decoding: UTF-8 bytes, NUL between items.
    raw = bytes(np.asarray(array, dtype=np.uint8))
    return raw.decode("utf-8").split("\0") if raw else []


def test_series_lists_every_result(written: Path, results: sf.Results) -> None:
    assert written.name == "canopy.pvd"
    reader = pv.get_reader(str(written))
    assert reader.time_values == [float(k) for k in range(len(results))]
    for step, name in enumerate(results):
        reader.set_active_time_point(step)
        blocks = reader.read()
        assert blocks.n_blocks == 2  # members and panels
        members = blocks[0]
        assert _text(members.field_data["case_name"]) == [name]
        np.testing.assert_allclose(members.cell_data["axial_force"],
                                   results[name].axial_forces, rtol=1e-12)


def test_meshio_reads_every_array(written: Path, results: sf.Results) -> None:
    model = results.model
    files = {p.name for p in written.parent.iterdir()}
    assert "canopy_wind_uplift.vtu" in files  # "/" is not kept in a file name
    for name in results:
        res = results[name]
        stem = {"wind/uplift": "wind_uplift"}.get(name, name)
        mesh = meshio.read(written.parent / f"canopy_{stem}.vtu")
        np.testing.assert_allclose(mesh.points, model.nodes, rtol=1e-15)
        assert [c.type for c in mesh.cells] == ["line"]
        np.testing.assert_array_equal(mesh.cells[0].data, model.members)
        np.testing.assert_allclose(mesh.point_data["displacement"], res.displacements,
                                   rtol=1e-15, atol=0)
        np.testing.assert_allclose(mesh.point_data["reaction"], res.reactions, rtol=1e-15)
        np.testing.assert_allclose(mesh.point_data["load"], res.loads, rtol=1e-15)
        np.testing.assert_array_equal(mesh.point_data["restraint"], model.restraint)
        cd = {k: v[0] for k, v in mesh.cell_data.items()}
        np.testing.assert_array_equal(cd["member_id"], np.arange(model.n_members))
        np.testing.assert_allclose(cd["axial_force"], res.axial_forces, rtol=1e-15)
        # Stress and elastic strain by definition: N/A and N/(EA).
        np.testing.assert_allclose(cd["stress"], res.axial_forces / model.area, rtol=1e-14)
        np.testing.assert_allclose(cd["strain"], res.axial_forces / (E * model.area),
                                   rtol=1e-14)
        np.testing.assert_allclose(cd["length"], model.lengths, rtol=1e-15)
        np.testing.assert_array_equal(cd["group"], [0] * 7 + [1] * 8 + [2])
        # The legend is in the arrays' names: readable in any viewer's array list.
        assert sfvtk.group_legend(mesh.field_data) == ["chords", "diagonals", "ridge"]
        assert [int(mesh.field_data[f"group {k}: {g}"][0])
                for k, g in enumerate(["chords", "diagonals", "ridge"])] == [0, 1, 2]
        assert "group_names" not in mesh.field_data  # no byte array of names
        assert int(mesh.field_data[f"result: {name} ({res.kind})"][0]) == \
            list(results).index(name)
        assert _text(mesh.field_data["case_name"]) == [name]
        assert _text(mesh.field_data["result_kind"]) == [res.kind]
        units = dict(u.split("=") for u in _text(mesh.field_data["units"]))
        assert units["displacement"] == "m" and units["axial_force"] == "N"
        assert units["stress"] == "Pa"


def test_strain_is_hooke_for_a_load_only_case(written: Path, results: sf.Results) -> None:
    # Common practice (Hooke's law): without free strain the elastic strain
    # is the total elongation over the length.
    res = results["dead"]
    mesh = pv.read(written.parent / "canopy_dead.vtu")
    np.testing.assert_allclose(mesh.cell_data["strain"], res.elongations / results.model.lengths,
                               rtol=1e-9, atol=1e-18)
    # With a temperature change the elastic strain is the total less alpha dT.
    heat = results["heat"]
    mesh = pv.read(written.parent / "canopy_heat.vtu")
    free = np.zeros(16)
    free[15] = 12e-6 * 30.0
    np.testing.assert_allclose(mesh.cell_data["strain"],
                               heat.elongations / results.model.lengths - free,
                               rtol=1e-9, atol=1e-15)


def test_vtk_reader_and_combination_fields(written: Path, results: sf.Results) -> None:
    mesh = pv.read(written.parent / "canopy_ULS.vtu")
    assert mesh.n_cells == 16 and mesh.n_points == 8
    assert set(np.unique(mesh.celltypes)) == {pv.CellType.LINE}
    np.testing.assert_allclose(mesh.point_data["displacement"],
                               results["ULS"].displacements, rtol=1e-15)
    assert _text(mesh.field_data["factors"]) == ["dead=1.35", "wind/uplift=1.5"]
    assert int(mesh.field_data["case_index"][0]) == list(results).index("ULS")


def test_warp_by_displacement_moves_points_exactly(written: Path, results: sf.Results) -> None:
    mesh = pv.read(written.parent / "canopy_dead.vtu")
    factor = float(mesh.field_data["auto_scale"][0])
    u = results["dead"].displacements
    # Common practice: the suggested factor draws the largest |u| at 5 % of
    # the bounding-box diagonal.
    size = np.linalg.norm(np.ptp(results.model.nodes, axis=0))
    assert factor * np.linalg.norm(u, axis=1).max() == pytest.approx(0.05 * size, rel=1e-12)
    warped = mesh.warp_by_vector("displacement", factor=factor)
    np.testing.assert_allclose(warped.points, results.model.nodes + factor * u,
                               rtol=1e-12, atol=1e-12)


def test_panels_file_holds_polygons(written: Path, results: sf.Results) -> None:
    model = results.model
    mesh = meshio.read(written.parent / "canopy_dead_panels.vtu")
    polys = [row.tolist() for block in mesh.cells for row in block.data]
    assert polys == [model.panel(k).tolist() for k in range(model.n_panels)]
    groups = np.concatenate(mesh.cell_data["panel_group"])
    assert groups.tolist() == [0, 0, 1]
    assert sfvtk.group_legend(mesh.field_data, "panel_group") == ["roof", "gable"]
    np.testing.assert_allclose(mesh.point_data["displacement"], results["dead"].displacements,
                               rtol=1e-15)


def test_folder_target_and_no_panels(tmp_path: Path, results: sf.Results) -> None:
    pvd = sfvtk.write(tmp_path / "out", results, prefix="run1", panels=False)
    assert pvd == tmp_path / "out" / "run1.pvd"
    names = sorted(p.name for p in pvd.parent.iterdir())
    assert names == sorted(["run1.pvd", "run1_dead.vtu", "run1_wind_uplift.vtu",
                            "run1_heat.vtu", "run1_ULS.vtu"])


def test_ascii_files_read_back(tmp_path: Path, results: sf.Results) -> None:
    pvd = sfvtk.write(tmp_path, results, binary=False)
    assert pvd.name == "results.pvd"
    mesh = meshio.read(tmp_path / "results_wind_uplift.vtu")
    np.testing.assert_allclose(mesh.cell_data["axial_force"][0],
                               results["wind/uplift"].axial_forces, rtol=1e-12)


def test_colliding_names_get_distinct_files(tmp_path: Path) -> None:
    m = _canopy()
    m.add_load("wind uplift", [6], (0.0, 0.0, 1e3))  # sanitises like "wind/uplift"
    pvd = sfvtk.write(tmp_path, m.solve(), panels=False)
    files = [p.name for p in tmp_path.iterdir()]
    assert "results_wind_uplift.vtu" in files and "results_wind_uplift_2.vtu" in files
    assert len(pv.get_reader(str(pvd)).time_values) == 5


def test_failure_leaves_nothing_behind(tmp_path: Path, results: sf.Results,
                                       monkeypatch: pytest.MonkeyPatch) -> None:
    old = sfvtk.write(tmp_path, results)
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    calls = {"n": 0}
    real = sfvtk.member_grid

    def failing(res: sf.Results, name: str) -> pv.UnstructuredGrid:
        calls["n"] += 1
        if calls["n"] == 3:
            raise RuntimeError("disk full")
        return real(res, name)

    monkeypatch.setattr(sfvtk, "member_grid", failing)
    with pytest.raises(RuntimeError, match="disk full"):
        sfvtk.write(tmp_path, results)
    after = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    assert after == before  # no temporary files, the earlier series untouched
    assert old.exists()


def test_bad_prefix_and_empty_results(tmp_path: Path, results: sf.Results) -> None:
    with pytest.raises(sf.WriteError, match="prefix 'a/b'"):
        sfvtk.write(tmp_path, results, prefix="a/b")
    empty = sf.Results(results.model, {})
    with pytest.raises(sf.WriteError, match="no load cases"):
        sfvtk.write(tmp_path / "x.pvd", empty)
    assert not (tmp_path / "x.pvd").exists()


def test_decode_text_round_trip() -> None:
    names = ["chords", "Diagonalen über", ""]
    assert sfvtk.decode_text(sfvtk.encode_text(names)) == names
    assert sfvtk.decode_text(np.zeros(0, dtype=np.uint8)) == []


def test_group_legend_read_by_vtk_and_meshio(tmp_path: Path) -> None:
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    m.add_members([[0, 3]], area=1e-3, E=2e11, group="legs & braces")
    m.add_members([[1, 3], [2, 3]], area=1e-3, E=2e11, group="TOP CHORD <main>")
    m.add_support([0, 1, 2])
    m.add_load("snow", [3], (0.0, 0.0, -1e3))
    pvd = sfvtk.write(tmp_path / "r.pvd", m.solve())
    vtu = pvd.parent / "r_snow.vtu"
    want = ["legs _ braces", "TOP CHORD _main_"]
    by_vtk = pv.read(vtu)  # VTK's own XML reader
    assert sfvtk.group_legend(by_vtk.field_data) == want
    assert by_vtk.cell_data["group"].tolist() == [0, 1, 1]
    assert sfvtk.group_legend(meshio.read(vtu).field_data) == want


def test_a_failed_vtu_write_is_one_oserror_and_silent(tmp_path: Path, results: sf.Results,
                                                      capfd: pytest.CaptureFixture[str]) -> None:
    grid = sfvtk.member_grid(results, next(iter(results)))
    with pytest.raises(OSError, match=r"x\.vtu: Error opening output file"):
        sfvtk._save(grid, tmp_path / "missing" / "x.vtu", True)
    assert capfd.readouterr().err == ""  # VTK's own multi-line log is not let through
    # Written with zlib at level 1: meshio (an independent reader) reads every array.
    sfvtk._save(grid, tmp_path / "x.vtu", True)
    back = meshio.read(tmp_path / "x.vtu")
    np.testing.assert_array_equal(back.cell_data["axial_force"][0],
                                  results[next(iter(results))].axial_forces)
    assert b'compressor="vtkZLibDataCompressor"' in (tmp_path / "x.vtu").read_bytes()[:2000]


def test_progress_counts_the_results_written(tmp_path: Path, results: sf.Results) -> None:
    told: list[str] = []
    sfvtk.write(tmp_path / "vtk", results, progress=told.append)
    n = len(results)
    assert told == [f"writing VTK {k}/{n} results" for k in range(1, n + 1)]
