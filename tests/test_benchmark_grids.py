"""The benchmark grid generator: counts, geometry and stability against formulas.

Every expected count is derived here from the layout of a square-on-square
offset grid (nx by ny bays; top nodes at bay corners, bottom nodes under bay
centres), not read from the generator.
"""

from __future__ import annotations

import importlib.util
import json
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import numpy as np
import pytest

import spaceframe as sf


@pytest.fixture(scope="module")
def grids() -> ModuleType:
    # Loaded by path: the benchmark folder is not a package that pytest imports.
    path = Path(__file__).parent / "benchmarks" / "grids.py"
    spec = importlib.util.spec_from_file_location("_bench_grids", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


SHAPES = [(1, 1), (1, 4), (3, 2), (4, 4), (6, 5)]


@pytest.fixture(params=SHAPES, ids=[f"{a}x{b}" for a, b in SHAPES])
def grid(request: pytest.FixtureRequest, grids: ModuleType) -> tuple[int, int, sf.Model]:
    nx, ny = request.param
    return nx, ny, grids.double_layer_grid(nx, ny, spacing=3.0, depth=2.0)


def test_counts_match_layout(grid: tuple[int, int, sf.Model]) -> None:
    nx, ny, m = grid
    n_top = (nx + 1) * (ny + 1)
    n_bottom = nx * ny
    assert m.n_nodes == n_top + n_bottom
    top_chords = nx * (ny + 1) + (nx + 1) * ny
    bottom_chords = (nx - 1) * ny + nx * (ny - 1)
    diagonals = 4 * nx * ny
    assert m.groups["top chords"].size == top_chords
    assert m.groups["bottom chords"].size == bottom_chords
    assert m.groups["diagonals"].size == diagonals
    # The three families add up to 8 nx ny (expand the sum above).
    assert m.n_members == top_chords + bottom_chords + diagonals == 8 * nx * ny
    # Perimeter of an (nx + 1) by (ny + 1) lattice of points.
    n_rim = 2 * (nx + 1) + 2 * (ny + 1) - 4
    supported = np.flatnonzero(m.restraint.any(axis=1))
    assert supported.size == n_rim
    assert np.all(m.restraint[supported])
    np.testing.assert_array_equal(m.node_sets["supports"], supported)


def test_geometry(grid: tuple[int, int, sf.Model]) -> None:
    nx, ny, m = grid
    s, d = 3.0, 2.0
    top, bottom = m.node_sets["top"], m.node_sets["bottom"]
    np.testing.assert_array_equal(m.nodes[top, 2], 0.0)
    np.testing.assert_array_equal(m.nodes[bottom, 2], -d)
    # Bottom nodes sit under bay centres: x and y are odd multiples of s/2.
    half = m.nodes[bottom, :2] / (s / 2)
    np.testing.assert_allclose(half % 2, 1.0, rtol=0, atol=1e-12)
    np.testing.assert_allclose(m.lengths[m.groups["top chords"]], s, rtol=1e-12)
    np.testing.assert_allclose(m.lengths[m.groups["bottom chords"]], s, rtol=1e-12)
    # A diagonal spans half a bay in x and in y and the depth in z (Pythagoras).
    np.testing.assert_allclose(
        m.lengths[m.groups["diagonals"]], np.sqrt(2 * (s / 2) ** 2 + d**2), rtol=1e-12
    )
    # Every bottom node carries exactly four diagonals, every top node up to four.
    deg = np.bincount(m.members[m.groups["diagonals"]].ravel(), minlength=m.n_nodes)
    np.testing.assert_array_equal(deg[bottom], 4)
    assert deg[top].sum() == 4 * nx * ny


def test_grid_is_stable_and_maxwell_count_holds(grid: tuple[int, int, sf.Model]) -> None:
    m = grid[2]
    sf.check_stability(m)
    d = sf.determinacy(m)
    assert d.mechanisms == 0
    # Extended Maxwell rule, 3j - b - k = m - s (Calladine, "Buckminster
    # Fuller's tensegrity structures and Clerk Maxwell's rules for the
    # construction of stiff frames", Int. J. Solids Struct. 14, 1978).
    k = int(m.restraint.sum())
    assert 3 * m.n_nodes - m.n_members - k == d.mechanisms - d.self_stress


def test_roof_load_goes_to_the_supports(grids: ModuleType) -> None:
    nx, ny, P = 4, 3, 12.0e3
    m = grids.double_layer_grid(nx, ny, node_load=P)
    r = m.solve(solver="scipy")[grids.ROOF_CASE]
    # Statics: the supports carry the whole load, P on each of the (nx+1)(ny+1) top nodes.
    total = (nx + 1) * (ny + 1) * P
    assert r.applied_total[2] == pytest.approx(-total, rel=1e-12)
    assert r.reaction_total[2] == pytest.approx(total, rel=1e-10)
    assert r.residual < 1e-10


def test_square_grid_is_symmetric(grids: ModuleType) -> None:
    # Closed form (symmetry): a square grid under a uniform load deflects the
    # same under the reflection x <-> y, so node (i, j) and node (j, i) agree.
    n = 5
    m = grids.double_layer_grid(n, n)
    u = m.solve(solver="scipy")[grids.ROOF_CASE].displacements
    top = np.arange((n + 1) ** 2).reshape(n + 1, n + 1)
    uz = u[top, 2]
    np.testing.assert_allclose(uz, uz.T, rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(u[top, 0], u[top.T, 1], rtol=1e-9, atol=1e-15)


def test_hanging_load_on_a_single_bay(grids: ModuleType) -> None:
    # One bay, four pinned corners, a bottom node hung from four equal
    # diagonals.  Statics of the symmetric pyramid: each diagonal carries
    # T = P / (4 sin(theta)), sin(theta) = depth / length.
    s, d, P = 3.0, 2.0, 40.0e3
    m = grids.double_layer_grid(1, 1, spacing=s, depth=d)
    m.add_load("hang", m.node_sets["bottom"], (0.0, 0.0, -P))
    r = m.solve(solver="scipy")["hang"]
    length = np.sqrt(2 * (s / 2) ** 2 + d**2)
    np.testing.assert_allclose(r.axial_forces[m.groups["diagonals"]], P * length / (4 * d),
                               rtol=1e-10)


@pytest.mark.parametrize(
    ("target", "rel"),
    # 1.2 % is the bound for the sizes the benchmark uses; tiny targets round to one bay.
    [(10_000, 0.012), (100_000, 0.012), (1_000_000, 0.012), (123_456, 0.012)],
)
def test_grid_for_members(grids: ModuleType, target: int, rel: float) -> None:
    nx, ny = grids.grid_for_members(target)
    assert abs(8 * nx * ny - target) <= rel * target
    assert abs(nx - ny) <= 1


def test_grid_for_members_small_and_bad(grids: ModuleType) -> None:
    assert grids.grid_for_members(1) == (1, 1)
    with pytest.raises(sf.ModelError, match="target_members = 0"):
        grids.grid_for_members(0)
    with pytest.raises(sf.ModelError, match="nx = 0"):
        grids.double_layer_grid(0, 3)
    with pytest.raises(sf.ModelError, match="ny must be an integer"):
        grids.double_layer_grid(2, 2.5)
    with pytest.raises(sf.ModelError, match="depth = -1"):
        grids.double_layer_grid(2, 2, depth=-1.0)


def test_benchmark_script_runs(tmp_path: Path) -> None:
    # The README's command on a tiny grid: the script runs, and its rows carry
    # the counts derived above (8 nx ny members; 3 dofs per node less the pins).
    script = Path(__file__).parent / "benchmarks" / "bench_static.py"
    out = tmp_path / "rows.json"
    subprocess.run(
        [sys.executable, str(script), "--sizes", "200", "--solver", "scipy", "--repeat", "1",
         "--json", str(out)],
        check=True, capture_output=True, text=True,
    )
    (row,) = json.loads(out.read_text())
    nx, ny = row["nx"], row["ny"]
    assert row["members"] == 8 * nx * ny
    n = (nx + 1) * (ny + 1) + nx * ny
    assert row["dofs"] == 3 * n - 3 * (2 * (nx + ny))
    assert row["residual"] < 1e-10
    assert row["ratio"] > 0
    assert list(tmp_path.iterdir()) == [out]  # no temporary file left behind
