"""The main job's load paths: [analysis.nonlinear] and [analysis.tension_only] of a model file.

Check values come from closed forms derived here (the two-bar truss of the
co-rotational engineering-strain bar, statics of an X-braced panel) or from
the path the library itself returns (files read back with meshio).
"""

from __future__ import annotations

import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from spaceframe.run import job

pytest.importorskip("pyvista")
meshio = pytest.importorskip("meshio")

# Shallow two-bar (von Mises) truss: half-span a, rise h (m); E A of each bar.
A_HALF, RISE = 1.0, 0.1
E, AREA = 210e9, 100e-6  # steel preset (EN 1993-1-1 §3.2.6), 100 mm²
LOAD = 12.0  # kN, downward at the apex: above the limit load, so the path snaps through


def _model_file(title: str, nodes: str, members: str, area_mm2: float, rest: str) -> str:
    """A model file in m, mm (sections) and kN; members of one user section of steel."""
    return f"""
title = "{title}"
output = "out"
[units]
length = "m"
section = "mm"
force = "kN"
[geometry]
nodes = {nodes}
members = {members}
[sections]
bar = {{ shape = "user", area = {area_mm2} }}
[assign]
default = {{ section = "bar", material = "steel" }}
""" + rest


# Apex (node 1) held out of plane only.
TWO_BAR = _model_file("two-bar truss", f"[[{-A_HALF}, 0, 0], [0, 0, {RISE}], [{A_HALF}, 0, 0]]",
                      "[[0, 1], [1, 2]]", AREA * 1e6, f"""
[[supports]]
nodes = [0, 2]
restrain = "pinned"
[[supports]]
nodes = [1]
restrain = "y"
[loads.P]
[[loads.P.nodal]]
nodes = [1]
force = [0, 0, {-LOAD}]
[analysis.nonlinear]
results = ["P"]
max_load_factor = 1.0
""")


def limit_load() -> float:
    """The first limit load (N) of the two-bar truss, by the closed form maximised with numpy.

    Derivation (co-rotational bar, engineering strain N = EA (L - L0)/L0):
    after the apex moves down by w each bar has length L = sqrt(a² + (h - w)²)
    and force N along its chord (a, 0, h - w)/L; vertical equilibrium of the
    apex, 2 N (h - w)/L + P = 0, gives the downward load
    P(w) = 2 EA (L0 - L)/L0 · (h - w)/L.  Its first maximum lies between
    w = 0 and w = h (P is odd in h - w); a grid of 400001 points finds it to
    about 1e-10 relative (P is flat there, the error quadratic in the step).
    """
    ea, l0 = E * AREA, np.hypot(A_HALF, RISE)
    w = np.linspace(0.0, RISE, 400_001)
    length = np.sqrt(A_HALF**2 + (RISE - w) ** 2)
    p = 2.0 * ea * (l0 - length) / l0 * (RISE - w) / length
    return float(p.max())


def _run(tmp_path, text, **kw):
    (tmp_path / "m.toml").write_text(text, encoding="utf-8")
    told: list[str] = []
    out = job.run(tmp_path / "m.toml", progress=told.append, **kw)
    return out, json.loads((out.output / "summary.json").read_text()), told


def test_two_bar_limit_load_factor_in_the_summary_matches_the_closed_form(tmp_path):
    out, summary, told = _run(tmp_path, TWO_BAR)
    entry = summary["nonlinear"]["results"]["P"]
    # limit_load(): the closed-form maximum of P(w); the load factor is P_max / LOAD.
    first = entry["limit_points"][0]
    assert first["load_factor"] == pytest.approx(limit_load() / (LOAD * 1e3), rel=1e-3)
    # The snap-through: a maximum, then the mirrored minimum -P_max (P odd in h - w).
    assert [x["load_factor"] for x in entry["limit_points"]] == pytest.approx(
        [first["load_factor"], -first["load_factor"]], rel=1e-6)
    assert entry["stopped"] == "" and entry["final_load_factor"] == pytest.approx(1.0)
    assert "engineering strain" in entry["strain_measure"]
    # Default node: the one that moves most at the last step, the apex (node 1).
    assert entry["nodes"] == [1] and entry["max_displacement"]["node"] == 1
    assert any(t.startswith("nonlinear P: step ") and "load factor" in t for t in told)
    page = (out.output / "report.html").read_text(encoding="utf-8")
    assert "Nonlinear analysis" in page and "co-rotational" in page
    assert "qualified engineer" in page


def test_two_bar_series_csv_and_plot_hold_the_path(tmp_path):
    import spaceframe as sf

    out, summary, _ = _run(tmp_path, TWO_BAR)
    path = sf.solve_nonlinear(out.results.model, "P", max_load_factor=1.0)
    pvd = out.output / "vtk" / "paths" / "P.pvd"
    files = [d.get("file") for d in ET.parse(pvd).getroot().iter("DataSet")]
    # One file per step of the path (step 0, the unloaded state, included).
    assert len(files) == path.n_steps == summary["nonlinear"]["results"]["P"]["steps"] + 1
    lam = []
    for k, f in enumerate(files):
        mesh = meshio.read(pvd.parent / f)
        lam.append(float(mesh.field_data["load_factor"][0]))
        assert int(mesh.field_data["step"][0]) == k
        np.testing.assert_allclose(mesh.point_data["displacement"], path.displacements[k],
                                   atol=1e-12)
        np.testing.assert_allclose(mesh.cell_data["axial_force"][0], path.axial_forces[k],
                                   rtol=1e-12, atol=1e-6)
    # The path the library returns: the same load factors, step by step.
    np.testing.assert_allclose(lam, path.load_factors, rtol=1e-12)
    table = np.genfromtxt(out.output / "paths" / "P.csv", delimiter=",", names=True)
    np.testing.assert_allclose(table["load_factor_"], path.load_factors, rtol=1e-6)
    np.testing.assert_allclose(table["uz_node_1_m"], path.displacements[:, 1, 2],
                               rtol=1e-6, atol=1e-12)
    png = out.output / "pictures" / "paths" / "P.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


H = 10.0  # kN, horizontal at the top left of the panel
# A 3 m square panel in the x-z plane: posts, top beam, two diagonals (BRACING).
PANEL = _model_file("braced panel", "[[0, 0, 0], [3, 0, 0], [0, 0, 3], [3, 0, 3]]",
                    "[[0, 2], [1, 3], [2, 3], [0, 3], [1, 2]]", 1000, f"""
[geometry.groups]
FRAME = [0, 1, 2]
BRACING = [3, 4]
[[supports]]
nodes = [0, 1]
restrain = "pinned"
[[supports]]
nodes = [2, 3]
restrain = "y"
[loads.H]
[[loads.H.nodal]]
nodes = [2]
force = [{H}, 0, 0]
[analysis.tension_only]
groups = ["BRACING"]
[analysis.nonlinear]
results = ["H"]
nodes = [2]
""")


def test_tension_only_panel_leaves_the_compression_diagonal_slack(tmp_path):
    out, summary, _ = _run(tmp_path, PANEL, pictures=False)
    entry = summary["nonlinear"]["results"]["H"]
    # The top moves along +x: diagonal 1-2 (member 4) shortens, 0-3 (member 3) lengthens.
    assert entry["slack"] == {"count": 1, "members": [4]}
    assert entry["nodes"] == [2] and entry["nodes_chosen"] == "given"
    files = [d.get("file") for d in ET.parse(out.output / "vtk" / "paths" / "H.pvd")
             .getroot().iter("DataSet")]
    last = meshio.read(out.output / "vtk" / "paths" / files[-1])
    # Statics with member 4 slack: the other diagonal carries the shear H at 45°, H√2
    # (small displacements: strain ~7e-5, so the drawn geometry holds to ~1e-4).
    assert last.cell_data["axial_force"][0][3] == pytest.approx(H * 1e3 * np.sqrt(2), rel=1e-3)
    assert last.cell_data["slack"][0].tolist() == [0, 0, 0, 0, 1]
    assert not (out.output / "pictures").exists()


def test_a_path_stopped_early_is_reported_and_still_written(tmp_path):
    text = TWO_BAR.replace("max_load_factor = 1.0", "max_load_factor = 1.0\nsteps = 3")
    out, summary, _ = _run(tmp_path, text, pictures=False)
    entry = summary["nonlinear"]["results"]["P"]
    # Three steps allowed, about twenty needed (the full path above): a PathError.
    assert entry["steps"] == 3 and entry["final_load_factor"] < 1.0
    assert entry["stopped"] and "\n" not in entry["stopped"]
    assert any(w.startswith("nonlinear P: the path stopped early") for w in summary["warnings"])
    rows = (out.output / "paths" / "P.csv").read_text().splitlines()
    assert len(rows) == 1 + 4  # header and steps 0-3
    files = list(ET.parse(out.output / "vtk" / "paths" / "P.pvd").getroot().iter("DataSet"))
    assert len(files) == 4


def test_the_command_line_says_the_limit_load_factor(tmp_path, capsys):
    from spaceframe.cli import main

    (tmp_path / "m.toml").write_text(TWO_BAR, encoding="utf-8")
    assert main(["run", str(tmp_path / "m.toml"), "-o", str(tmp_path / "out"),
                 "--no-pictures"]) == 0
    line = next(t for t in capsys.readouterr().out.splitlines() if t.startswith("nonlinear P:"))
    # The closed-form limit load (limit_load() above) as a factor on the case's load.
    lam = float(line.split("a limit load factor of ")[1].split(" ")[0])
    assert lam == pytest.approx(limit_load() / (LOAD * 1e3), rel=1e-3)
    assert "reached load factor 1" in line
