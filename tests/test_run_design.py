"""Design checks in `spaceframe run`: the members table, VTK cell data, summary block,
the failing-members DXF layer, the report and the command line.

The check values come from :func:`spaceframe.check_results`, whose own tests
(tests/test_design.py) check them against EN 1993-1-1:2005; here the run's
outputs are asserted equal to it on the same model, plus one hand value.
"""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from test_project import CANOPY

import spaceframe as sf
from spaceframe.run import job

DESIGN = """
[design]
gamma_M1 = 1.1
[design.deflection]
ratio = 200
nodes = "top"
"""

#: The canopy with 400 kN at its centre node: the braces there buckle.
HEAVY = CANOPY.replace("force = [0, 0, -1.5]", "force = [0, 0, -400]")


#: The braces of a material without a yield strength; the chords stay S355.
PLAIN_BRACES = CANOPY.replace(
    'default = { section = "brace", material = "S355" }',
    'default = { section = "brace", material = "plain" }',
).replace('TOP = { section = "chord" }, BOTTOM = { section = "chord" }',
          'TOP = { section = "chord", material = "S355" }, '
          'BOTTOM = { section = "chord", material = "S355" }',
          ) + '\n[materials.plain]\nE = 210000\ndensity = "7850 kg/m^3"\n'


def _write(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "canopy.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def _reference(outcome: job.RunOutcome) -> sf.GoverningCheck:
    """The library's check of the run's own results (ULS, SLS and the envelope)."""
    results = outcome.results
    model = results.model
    proj = job.load(outcome.summary["source"]).project
    envelopes = proj.envelope_results(results)
    pool = {**{n: results[n] for n in results}, **envelopes}
    return sf.check_results(model, pool, ["ULS", "SLS", "design"], gamma_M1=1.1)


@pytest.fixture(scope="module")
def heavy_run(tmp_path_factory: pytest.TempPathFactory) -> job.RunOutcome:
    tmp = tmp_path_factory.mktemp("heavy")
    return job.run(_write(tmp, HEAVY + DESIGN), pictures=False)


def test_members_table_equals_the_library_check(heavy_run):
    g = _reference(heavy_run)
    rows = _rows(heavy_run.output / "member_design.csv")
    assert list(rows[0]) == ["member [-]", "group [-]", "section [-]", "material [-]",
                             "governing force [N]", "resistance [N]", "utilisation [-]",
                             "passes [-]", "governing result [-]", "governing check [-]",
                             "slenderness [-]", "slenderness limit [-]"]
    b = heavy_run.results.model.n_members
    assert len(rows) == b
    util = np.array([float(r["utilisation [-]"]) for r in rows])
    np.testing.assert_allclose(util, g.utilisation, rtol=1e-6)  # 7 significant digits
    for j, r in enumerate(rows):
        name = g.governing_result(j)
        c = g.checks[name]
        assert r["governing result [-]"] == name
        assert r["governing check [-]"] == g.governing_check(j)
        assert math.isclose(float(r["resistance [N]"]), c.resistance[j], rel_tol=1e-6)
        assert math.isclose(float(r["governing force [N]"]), c.demand[j], rel_tol=1e-6,
                            abs_tol=1e-9)
        assert r["passes [-]"] == ("yes" if g.passes[j] else "no")
        lam = c.slenderness[j]
        assert (r["slenderness [-]"] == "") if not np.isfinite(lam) else math.isclose(
            float(r["slenderness [-]"]), lam, rel_tol=1e-6)
        assert r["material [-]"] == "S355"
    top = heavy_run.results.model.groups["TOP"]
    assert {rows[j]["section [-]"] for j in top} == {"chord"}


def test_tension_resistance_of_a_chord_by_hand(heavy_run):
    # CHS 88.9 x 4.0: A = pi/4 (88.9^2 - 80.9^2) mm^2 = 1066.88 mm^2 (geometry);
    # N_t,Rd = A f_y / gamma_M0, EN 1993-1-1 §6.2.3 Eq. (6.6), f_y = 355 MPa
    # (S355, t <= 40 mm, EN 1993-1-1 Table 3.1), gamma_M0 = 1.0 (§6.1 Note 2B).
    n_t = math.pi / 4 * (88.9**2 - 80.9**2) * 355.0  # N
    rows = _rows(heavy_run.output / "member_design.csv")
    tension = [r for r in rows if r["governing check [-]"] == "tension (6.6)"
               and r["section [-]"] == "chord"]
    assert tension
    for r in tension:
        assert math.isclose(float(r["resistance [N]"]), n_t, rel_tol=1e-6)


def test_summary_block_and_failing_members(heavy_run):
    g = _reference(heavy_run)
    d = json.loads((heavy_run.output / "summary.json").read_text(encoding="utf-8"))["design"]
    assert d["failing"] == g.failing.size > 0
    assert d["failing_members"] == g.failing.tolist()
    j = int(np.argmax(g.utilisation))
    assert d["worst"]["member"] == j
    assert math.isclose(d["worst"]["utilisation"], g.utilisation[j], rel_tol=1e-12)
    assert d["worst"]["result"] == g.governing_result(j)
    assert d["worst"]["check"] == g.governing_check(j)
    order = np.argsort(-g.utilisation, kind="stable")[:10]
    assert [v["member"] for v in d["most_utilised"]] == order.tolist()
    assert d["gammas"] == {"gamma_M0": 1.0, "gamma_M1": 1.1, "gamma_M2": 1.25,
                           "gamma_cable": 1.5}
    assert "Note 2B" in d["gammas_note"] and "national annexes" in d["gammas_note"]
    model = heavy_run.results.model
    top = model.groups["TOP"]
    k = int(top[np.argmax(g.utilisation[top])])
    assert d["groups"]["TOP"]["member"] == k
    # Deflection of the top nodes against span / 200 (span: supports' plan extent, 4 m).
    top_nodes = np.flatnonzero(model.nodes[:, 2] == model.nodes[:, 2].max())
    assert [de["result"] for de in d["deflection"]] == ["ULS", "SLS"]
    for de in d["deflection"]:
        ref = sf.check_deflection(model, heavy_run.results[de["result"]], nodes=top_nodes,
                                  ratio=200)
        assert de["limit"] == pytest.approx(4.0 / 200) == pytest.approx(ref.limit)
        assert de["deflection"] == pytest.approx(ref.deflection, rel=1e-12)
        assert de["passes"] == ref.passes
    assert "fail" in heavy_run.design.line()


def test_failing_layer_in_the_results_drawing(heavy_run):
    ezdxf = pytest.importorskip("ezdxf")
    g = _reference(heavy_run)
    doc = ezdxf.readfile(heavy_run.output / "results.dxf")
    lines = doc.modelspace().query('LINE[layer=="FAILING"]')
    assert len(lines) == g.failing.size
    nodes = heavy_run.results.model.nodes
    ends = heavy_run.results.model.members[g.failing]
    drawn = sorted(tuple(round(v, 6) for v in (*ln.dxf.start, *ln.dxf.end)) for ln in lines)
    want = sorted(tuple(round(float(v), 6) for v in (*nodes[a], *nodes[b])) for a, b in ends)
    assert drawn == want


def test_utilisation_cell_data_in_the_vtk_files(heavy_run):
    meshio = pytest.importorskip("meshio")
    g = _reference(heavy_run)
    grid = meshio.read(heavy_run.output / "vtk" / "results_ULS.vtu")
    np.testing.assert_allclose(grid.cell_data["utilisation"][0],
                               g.checks["ULS"].utilisation, rtol=1e-12)
    np.testing.assert_allclose(grid.cell_data["utilisation_governing"][0], g.utilisation,
                               rtol=1e-12)
    # Load cases are not checked when there are combinations: no per-result array.
    dead = meshio.read(heavy_run.output / "vtk" / "results_dead.vtu")
    assert "utilisation" not in dead.cell_data


def test_report_first_page_and_utilisation_picture(tmp_path):
    pytest.importorskip("pyvista")
    out = job.run(_write(tmp_path, HEAVY + DESIGN), pictures="ULS")
    text = (out.output / "report.html").read_text(encoding="utf-8")
    g = _reference(out)
    design_at = text.index("Design checks")
    assert design_at < text.index("<h2>Job</h2>")  # first on the page
    assert f"{g.failing.size} of {out.results.model.n_members} checked members fail" in text
    assert "EN 1993-1-1 §6.1 Note 2B; national annexes change them" in text
    assert "γ_M1 = 1.10" in text
    assert "Most utilised members" in text and "Worst member per group" in text
    assert ("member resistance to axial force only; joints, connections, local effects, "
            "fatigue, fire and the national annex are the engineer&#x27;s") in text
    assert "Results must be checked by a qualified engineer" in text
    pic = out.output / "pictures" / "utilisation" / "utilisation_ULS_iso.png"
    assert pic in out.files and pic.stat().st_size > 0


def test_model_without_yield_strengths_says_which_members(tmp_path):
    text = PLAIN_BRACES
    out = job.run(_write(tmp_path, text), pictures=False)
    model = out.results.model
    braces = np.setdiff1d(np.arange(model.n_members),
                          np.r_[model.groups["TOP"], model.groups["BOTTOM"]])
    notes = [w for w in out.summary["warnings"] if w.startswith("design checks not run")]
    assert len(notes) == 1 and "\n" not in notes[0]
    assert f"{braces.size} of {model.n_members} members cannot be checked" in notes[0]
    assert f"no yield strength: members {braces[0]}-{braces[-1]}" in notes[0]
    assert out.design is None and not (out.output / "member_design.csv").exists()


def test_design_table_checks_the_others_and_names_the_rest(tmp_path):
    text = PLAIN_BRACES + "[design]\n"
    out = job.run(_write(tmp_path, text), pictures=False)
    model = out.results.model
    chords = np.r_[model.groups["TOP"], model.groups["BOTTOM"]]
    rows = _rows(out.output / "member_design.csv")
    checked = [int(r["member [-]"]) for r in rows if r["passes [-]"]]
    assert checked == sorted(chords.tolist())
    unchecked = [r for r in rows if not r["passes [-]"]]
    assert all(r["governing check [-]"] == "not checked" and r["utilisation [-]"] == ""
               for r in unchecked)
    assert any("design checks: 16 of 32 members cannot be checked (no yield strength"
               in w for w in out.summary["warnings"])


def test_solve_warnings_are_recorded_in_the_run(tmp_path):
    # E of 1 kPa: displacements far beyond the linear range, which the solve warns of.
    text = CANOPY.replace(
        'default = { section = "brace", material = "S355" }',
        'default = { section = "brace", material = "soft" }',
    ).replace('TOP = { section = "chord" }, BOTTOM = { section = "chord" }',
              'TOP = { section = "chord", material = "soft" }, '
              'BOTTOM = { section = "chord", material = "soft" }')
    text += '\n[materials.soft]\nE = 0.001\ndensity = "7850 kg/m^3"\n'
    out = job.run(_write(tmp_path, text), pictures=False)
    assert any("a linear analysis is not valid" in w for w in out.summary["warnings"])
    saved = json.loads((out.output / "summary.json").read_text(encoding="utf-8"))
    assert saved["warnings"] == out.summary["warnings"]


def test_command_line_prints_a_design_line(tmp_path, capsys):
    from spaceframe.cli import main

    path = _write(tmp_path, HEAVY + DESIGN)
    assert main(["run", str(path), "--no-pictures"]) == 0
    lines = capsys.readouterr().out.splitlines()
    design = [ln for ln in lines if ln.startswith("design: ")]
    assert len(design) == 1 and "checked members fail" in design[0]
    assert "worst utilisation member" in design[0]


def test_viewer_utilisation_colours(tmp_path):
    pytest.importorskip("pyvista")
    import pyvista

    pyvista.OFF_SCREEN = True
    from spaceframe import viewer

    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])
    m.add_members([[0, 3], [1, 3], [2, 3]], area=1e-4, E=210e9)
    m.add_support([0, 1, 2])
    m.add_load("P", 3, [0, 0, -1e3])
    res = m.solve()
    with pytest.raises(sf.ModelError, match="needs the utilisation"):
        viewer.FrameScene(res, color_by="utilisation", off_screen=True)
    util = {"P": np.array([0.2, 0.9, 1.7])}
    scene = viewer.FrameScene(res, color_by="utilisation", off_screen=True,
                              window_size=(400, 300), utilisation=util)
    try:
        assert scene.clim == (0.0, 1.0)
        lut = scene._members_actor.mapper.lookup_table
        assert lut.n_values == viewer.UTILISATION_BANDS
        from matplotlib.colors import to_rgb

        np.testing.assert_allclose(lut.above_range_color.float_rgb,
                                   to_rgb(viewer.UTILISATION_OVER), atol=1 / 255)
        assert "utilisation = 1.7" in scene.pick(0.5 * (m.nodes[2] + m.nodes[3]))
        path = scene.save(tmp_path / "u.png")
        assert path.stat().st_size > 0
    finally:
        scene.close()


def test_sizing_runs_before_the_final_solve_and_reports_iterations(tmp_path):
    text = HEAVY + "\n[design]\n[design.sizing]\ngroups = [\"BOTTOM\"]\n"
    out = job.run(_write(tmp_path, text), pictures=False)
    d = out.summary["design"]["sizing"]
    # The library on a fresh copy of the same model gives the same choice and iterations.
    loaded = job.load(out.summary["source"])
    ref = sf.size_groups(loaded.model, ["BOTTOM"], names=["ULS", "SLS"])
    assert d["sections"] == {"BOTTOM": ref.sections["BOTTOM"].name}
    assert d["converged"] is ref.converged is True
    assert len(d["iterations"]) == len(ref.iterations) >= 2
    for step, want in zip(d["iterations"], ref.iterations, strict=True):
        assert step["BOTTOM"]["section"] == want["BOTTOM"][0]
        assert step["BOTTOM"]["utilisation"] == pytest.approx(want["BOTTOM"][1], rel=1e-12)
    model = out.results.model
    bottom = model.groups["BOTTOM"]
    np.testing.assert_allclose(model.area[bottom], ref.sections["BOTTOM"].area)  # final solve
    rows = _rows(out.output / "member_design.csv")
    assert {rows[j]["section [-]"] for j in bottom} == {ref.sections["BOTTOM"].name}


def test_deflection_of_an_unknown_result_names_the_key(tmp_path):
    text = CANOPY + '\n[design]\n[design.deflection]\nresults = ["NOPE"]\n'
    with pytest.raises(sf.ProjectError) as exc:
        job.run(_write(tmp_path, text), pictures=False)
    msg = str(exc.value)
    assert "design.deflection.results" in msg and "'NOPE'" in msg and "\n" not in msg
    assert not (tmp_path / "out").exists()  # nothing half-written


def _flagged_by_the_library(tmp_path: Path, text: str, flagged: Callable[[Any], np.ndarray]
                            ) -> tuple[job.RunOutcome, np.ndarray]:
    """Run ``text``; the members the library's own check flags in any result (some must be).

    The run's failing members are the library's (default partial factors).
    """
    out = job.run(_write(tmp_path, text), pictures=False)
    model = out.results.model
    proj = job.load(out.summary["source"]).project
    pool = {**{n: out.results[n] for n in out.results}, **proj.envelope_results(out.results)}
    ref = sf.check_results(model, pool, ["ULS", "SLS", "design"])
    mask = np.zeros(model.n_members, dtype=bool)
    for c in ref.checks.values():
        mask |= flagged(c)
    assert mask.any()
    assert out.summary["design"]["failing_members"] == ref.failing.tolist()
    return out, mask


def test_members_without_a_second_moment_are_named_and_fail(tmp_path):
    # A user section given by its area only: no buckling check in compression
    # (EN 1993-1-1 §6.3.1 needs the radius of gyration), so those members fail.
    text = HEAVY.replace(
        'brace = { shape = "chs", diameter = 60.3, thickness = 3.2 }',
        'brace = { shape = "user", area = 574 }',
    )
    out, bad = _flagged_by_the_library(tmp_path, text, lambda c: c.unchecked)
    d = out.summary["design"]
    assert d["buckling_not_checked"] == np.flatnonzero(bad).tolist()
    assert set(d["buckling_not_checked"]) <= set(d["failing_members"])
    assert any("have no second moment, so their buckling is not checked" in w
               for w in out.summary["warnings"])


def test_too_slender_members_fail_and_are_counted(tmp_path):
    # A limit on L_cr/i of 20 for the TOP group (set per group; EN 1993-1-1 sets
    # none): the chords in compression (L = 2 m, i about 30 mm) exceed it.
    text = CANOPY + "\n[design]\n[design.groups.TOP]\nslenderness_limit = 20\n"
    out, slender = _flagged_by_the_library(tmp_path, text, lambda c: ~c.slenderness_ok)
    assert set(np.flatnonzero(slender)) <= set(out.results.model.groups["TOP"])
    d = out.summary["design"]
    assert d["too_slender_members"] == np.flatnonzero(slender).tolist()
    assert f"({slender.sum()} too slender" in out.design.line()
    rows = _rows(out.output / "member_design.csv")
    for j in np.flatnonzero(slender):
        assert rows[j]["passes [-]"] == "no"


def test_view_colours_by_utilisation(tmp_path, capsys):
    from test_project import CANOPY

    from spaceframe.cli import main

    (tmp_path / "canopy.toml").write_text(CANOPY, encoding="utf-8")
    shot = tmp_path / "u.png"
    assert main(["view", str(tmp_path / "canopy.toml"), "--case", "ULS", "--color-by",
                 "utilisation", "--screenshot", str(shot), "--size", "400x300"]) == 0
    assert shot.stat().st_size > 1000
    assert main(["view", str(tmp_path / "canopy.toml"), "--case", "snow", "--color-by",
                 "utilisation", "--screenshot", str(shot), "--size", "400x300"]) == 2
    assert "no design check of 'snow'" in capsys.readouterr().err
