"""The shipped demo projects solve, balance and match hand calculations."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from spaceframe.demos import CANOPY, DOME, MAST, write_demo
from spaceframe.project import load_project

pytest.importorskip("ezdxf")
pytest.importorskip("meshio")

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture
def demo(tmp_path: Path, request: pytest.FixtureRequest) -> Path:
    files = write_demo(tmp_path, request.param)
    return next(f for f in files if f.suffix == ".toml")


@pytest.mark.parametrize("name", ["canopy", "mast", "dome"])
def test_shipped_examples_are_what_the_generator_writes(tmp_path: Path, name: str) -> None:
    for f in write_demo(tmp_path, name):
        shipped = ROOT / "examples" / name / f.name
        assert shipped.exists(), f"{shipped} missing: run examples/{name}/generate.py"
        if f.suffix == ".toml":
            assert shipped.read_text() == f.read_text()


@pytest.mark.parametrize("demo", ["canopy"], indirect=True)
def test_canopy(demo: Path) -> None:
    proj = load_project(demo)
    m = proj.model
    nx, ny, bay = int(CANOPY["nx"]), int(CANOPY["ny"]), CANOPY["bay"]
    # Counts after healing the continuous chords, derived from the layout:
    # top (nx+1)(ny+1) and bottom nx*ny nodes; top chords nx(ny+1) + (nx+1)ny,
    # bottom (nx-1)ny + nx(ny-1), four diagonals per bottom node.
    assert m.n_nodes == (nx + 1) * (ny + 1) + nx * ny
    assert m.groups["TOP_CHORD"].size == nx * (ny + 1) + (nx + 1) * ny
    assert m.groups["BOTTOM_CHORD"].size == (nx - 1) * ny + nx * (ny - 1)
    assert m.groups["DIAGONALS"].size == 4 * nx * ny
    assert m.restraint.any(axis=1).sum() == 6  # one node under each column-head marker
    res = proj.solve()
    plan = nx * bay * ny * bay
    # Hand calculation: snow 0.8 kN/m² on the plan area is carried by the columns.
    assert res["snow"].reaction_total[2] == pytest.approx(0.8e3 * plan, rel=1e-10)
    # Dead: 1.15 x steel weight (rho A L g) + 0.35 kN/m² sheeting on the flat roof.
    steel = 1.15 * np.sum(m.mass) * 9.80665
    assert res["dead"].reaction_total[2] == pytest.approx(steel + 0.35e3 * plan, rel=1e-10)
    # Uplift 0.6 kN/m² suction on the upward-facing panels pulls the roof up.
    assert res["wind_uplift"].reaction_total[2] == pytest.approx(-0.6e3 * plan, rel=1e-10)
    uls = res["ULS_snow"]
    np.testing.assert_allclose(
        uls.axial_forces, 1.35 * res["dead"].axial_forces + 1.5 * res["snow"].axial_forces,
        rtol=1e-10, atol=1e-6,
    )
    for r in res.values():
        assert r.residual < 1e-10


@pytest.mark.parametrize("demo", ["mast"], indirect=True)
def test_mast(demo: Path) -> None:
    proj = load_project(demo)
    m = proj.model
    n = int(MAST["panels"])
    assert {k: v.size for k, v in m.groups.items()} == {
        "legs": 4 * n, "bracing": 8 * n, "horizontals": 4 * n
    }
    res = proj.solve()
    wind = res["wind_x"]
    # Hand calculation: 1.2 kN at the two windward nodes of each of the n levels
    # (z = 2.5 m ... 30 m); the base overturning moment is the sum of force times
    # height, and the vertical reactions must make the opposite couple.
    z = np.arange(1, n + 1) * MAST["panel"]
    moment = 2 * 1.2e3 * z.sum()
    base = np.flatnonzero(m.restraint.any(axis=1))
    resisting = np.sum(m.nodes[base, 0] * wind.reactions[base, 2])
    assert resisting == pytest.approx(moment, rel=1e-10)
    assert wind.reaction_total[0] == pytest.approx(-2 * 1.2e3 * n, rel=1e-12)
    # Thermal bowing, beam analogy (closed form for a free beam): legs on one
    # side warmer by dT give curvature alpha dT / w and a tip deflection
    # alpha dT H² / (2 w).  The unheated bracing of the warm face restrains it
    # a little, so only near agreement is expected (approximation stated).
    H, w = n * MAST["panel"], MAST["width"]
    tip = 12e-6 * 25.0 * H**2 / (2 * w)
    top = np.flatnonzero(np.isclose(m.nodes[:, 2], H))
    ux = res["sun"].displacements[top, 0]
    assert np.all(ux > 0)  # the warm side (x = -w/2) grows longer: the top leans to +x
    assert ux.mean() == pytest.approx(tip, rel=0.10)
    assert res["sun"].reaction_total == pytest.approx(np.zeros(3), abs=1e-6)


@pytest.mark.parametrize("demo", ["dome"], indirect=True)
def test_dome(demo: Path) -> None:
    proj = load_project(demo)
    m = proj.model
    # A 4-frequency geodesic hemisphere: 160 triangles; Euler for a disc
    # V - E + F = 1 with E = (3F + boundary edges)/2, 20 edges on the base ring.
    F, ring = 160, 20
    E = (3 * F + ring) // 2
    assert (m.n_members, m.n_nodes) == (E, 1 + E - F)
    assert m.restraint.any(axis=1).sum() == ring
    res = proj.solve()
    # Hand calculation: snow 0.6 kN/m² per plan area over the base polygon, a
    # regular 20-gon of circumradius R: area = (N/2) R² sin(2 pi / N).
    R = DOME["radius"]
    plan = ring / 2 * R**2 * np.sin(2 * np.pi / ring)
    assert res["snow"].reaction_total[2] == pytest.approx(0.6e3 * plan, rel=1e-10)
    assert res["ULS"].residual < 1e-10
