"""[analysis] mode shapes in the results folder (vtk/modes) and the report's section.

The values compared are the library's own (:func:`spaceframe.linear_buckling`,
:func:`spaceframe.natural_frequencies`), whose tests check them against closed
forms; here the files must carry exactly those numbers.
"""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
from test_project import CANOPY

import spaceframe as sf
from spaceframe.io.vtk import decode_text
from spaceframe.project import parse_project
from spaceframe.project.analysis import run_analyses, run_analyses_with_modes

ANALYSIS = """
[analysis.buckling]
results = ["ULS", "SLS"]
modes = 2
[analysis.frequencies]
modes = 3
mass = "lumped"
"""


def _project(tmp_path):
    path = tmp_path / "canopy.toml"
    path.write_text(CANOPY + ANALYSIS, encoding="utf-8")
    return parse_project(path.read_text(encoding="utf-8"), path)


def test_run_writes_one_vtu_per_mode_equal_to_the_library(tmp_path):
    from spaceframe.cli import main

    p = _project(tmp_path)
    assert main(["run", str(tmp_path / "canopy.toml"), "--no-pictures"]) == 0
    out = tmp_path / "out"
    res = p.solve()
    for name in ("ULS", "SLS"):
        b = sf.linear_buckling(p.model, res[name], n_modes=2)
        assert b.factors.size == 2
        for k in range(2):
            mesh = meshio.read(out / "vtk" / "modes" / f"buckling_{name}_mode{k + 1}.vtu")
            shape = mesh.point_data["mode_shape"]
            np.testing.assert_allclose(shape, b.modes[k], rtol=1e-9, atol=1e-12)
            assert np.linalg.norm(shape, axis=1).max() == pytest.approx(1.0)
            assert mesh.field_data["load_factor"][0] == pytest.approx(b.factors[k], rel=1e-12)
            assert decode_text(mesh.field_data["mode_result"]) == [name]
            assert decode_text(mesh.field_data["mode_kind"]) == ["buckling"]
            assert int(mesh.field_data["mode_number"][0]) == k + 1
    f = sf.natural_frequencies(p.model, n_modes=3, mass="lumped")
    for k in range(3):
        mesh = meshio.read(out / "vtk" / "modes" / f"frequency_mode{k + 1}.vtu")
        np.testing.assert_allclose(mesh.point_data["mode_shape"], f.modes[k],
                                   rtol=1e-9, atol=1e-12)
        assert mesh.field_data["frequency_hz"][0] == pytest.approx(f.frequencies[k], rel=1e-12)
    assert sorted(q.name for q in (out / "vtk" / "modes").iterdir()) == sorted(
        [f"buckling_{n}_mode{k}.vtu" for n in ("ULS", "SLS") for k in (1, 2)]
        + [f"frequency_mode{k}.vtu" for k in (1, 2, 3)] + ["modes.pvd"])
    # The series lists every mode file once, in order, for viewers to step through.
    import xml.etree.ElementTree as ET

    sets = ET.parse(out / "vtk" / "modes" / "modes.pvd").getroot().iter("DataSet")
    listed = [(d.get("timestep"), d.get("file")) for d in sets]
    assert [t for t, _ in listed] == [str(i) for i in range(7)]
    assert sorted(f for _, f in listed) == sorted(
        q.name for q in (out / "vtk" / "modes").iterdir() if q.suffix == ".vtu")
    # No temporary file left beside them; the summary block is unchanged by the files.
    summary = json.loads((out / "summary.json").read_text())
    assert summary["analysis"]["buckling"]["results"]["ULS"]["factors"] == pytest.approx(
        list(sf.linear_buckling(p.model, res["ULS"], n_modes=2).factors))


def test_run_analyses_keeps_its_block_and_returns_the_modes(tmp_path):
    p = _project(tmp_path)
    res = p.solve()
    block, modes = run_analyses_with_modes(p.analysis, p.model, res)
    assert block == run_analyses(p.analysis, p.model, res)
    assert [(m.kind, m.result, m.number) for m in modes] == [
        ("buckling", "ULS", 1), ("buckling", "ULS", 2), ("buckling", "SLS", 1),
        ("buckling", "SLS", 2), ("frequency", "", 1), ("frequency", "", 2), ("frequency", "", 3)]
    assert [m.value for m in modes[:2]] == block["buckling"]["results"]["ULS"]["factors"]


def test_mode_file_names_are_safe_and_unique(tmp_path):
    from spaceframe.io.vtk import write_modes
    from spaceframe.project.analysis import Mode

    p = _project(tmp_path)
    res = p.solve()
    shape = np.zeros((p.model.n_nodes, 3))
    shape[0] = (0.0, 0.0, 1.0)
    files = write_modes(tmp_path / "m", res, [Mode("buckling", "a/b", 1, 2.0, shape),
                                              Mode("buckling", "a b", 1, 3.0, shape)])
    assert [f.name for f in files] == ["buckling_a_b_mode1.vtu", "buckling_a_b_mode1_2.vtu",
                                       "modes.pvd"]
    assert sorted(q.name for q in (tmp_path / "m").iterdir()) == [f.name for f in files]
    bad = shape.copy()
    bad[1, 0] = np.nan
    with pytest.raises(sf.errors.WriteError, match="mode 1"):
        write_modes(tmp_path / "n", res, [Mode("frequency", "", 1, 1.0, bad)])
    assert list((tmp_path / "n").iterdir()) == []


def test_report_has_the_buckling_and_frequencies_section(tmp_path):
    from spaceframe.run.report import write_report

    p = _project(tmp_path)
    res = p.solve()
    block = run_analyses(p.analysis, p.model, res)
    page = write_report(tmp_path / "r.html", res, analysis=block).read_text(encoding="utf-8")
    assert "<h2>Buckling and frequencies</h2>" in page
    low = block["buckling"]["lowest"]
    assert f"Lowest buckling load factor: {sf.results.summary.format_number(low['factor'])} " \
           f"({low['result']})" in page
    assert "first-order estimate" in page and "qualified engineer" in page
    f1 = sf.natural_frequencies(p.model, n_modes=3, mass="lumped").frequencies[0]
    assert f"<td>{sf.results.summary.format_number(f1)}</td>" in page
    # No block, no section.
    plain = write_report(tmp_path / "p.html", res).read_text(encoding="utf-8")
    assert "Buckling and frequencies" not in plain


def test_run_with_pictures_reports_the_lowest_factor_and_pyvista_reads_the_modes(tmp_path):
    import pyvista as pv

    from spaceframe.cli import main

    pv.OFF_SCREEN = True
    p = _project(tmp_path)
    assert main(["run", str(tmp_path / "canopy.toml")]) == 0
    out = tmp_path / "out"
    res = p.solve()
    b = sf.linear_buckling(p.model, res["ULS"], n_modes=2)
    grid = pv.read(out / "vtk" / "modes" / "buckling_ULS_mode1.vtu")
    np.testing.assert_allclose(grid.point_data["mode_shape"], b.modes[0], rtol=1e-9, atol=1e-12)
    low = json.loads((out / "summary.json").read_text())["analysis"]["buckling"]["lowest"]
    assert low["factor"] == pytest.approx(min(
        sf.linear_buckling(p.model, res[n], n_modes=2).factors[0] for n in ("ULS", "SLS")))
    page = (out / "report.html").read_text(encoding="utf-8")
    assert (f"Lowest buckling load factor: {sf.results.summary.format_number(low['factor'])} "
            f"({low['result']})") in page
    # Pictures of the lowest modes (up to three of each buckling result and of the
    # frequencies), listed with the VTK files in the summary.
    listed = json.loads((out / "summary.json").read_text())["mode_files"]
    assert sorted(listed["vtk"]) == sorted(  # every mode file and the series over them
        f"vtk/modes/{q.name}" for q in (out / "vtk" / "modes").iterdir())
    pics = sorted(q.name for q in (out / "pictures" / "modes").iterdir())
    assert len(pics) == 2 + 2 + 3 and all(q.endswith("_iso.png") for q in pics)
    assert sorted(listed["pictures"]) == [f"pictures/modes/{q}" for q in pics]
    assert any(q.startswith("buckling_ULS_mode_1_factor_") for q in pics)
