"""Many load cases: blocked solves and checks, refinement, and which results get files.

Check values are closed-form statics of a symmetric tripod (method of joints,
common practice): under a vertical load P at the apex each leg carries
N = -P / (3 cos(theta)), theta the leg's angle from the vertical, and the apex
drops by N L / (E A) / cos(theta).  The model data are invented.
"""

from __future__ import annotations

import csv
import json
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.analysis import static
from spaceframe.io import tables
from spaceframe.run import job, outputs

H, A_BASE, AREA, E = 3.0, 2.0, 2e-4, 200e9
L = float(np.hypot(H, A_BASE))
COS_T = H / L


def _tripod(cases: int) -> sf.Model:
    m = sf.Model()
    ang = np.deg2rad([90.0, 210.0, 330.0])
    base = m.add_nodes(np.c_[A_BASE * np.cos(ang), A_BASE * np.sin(ang), np.zeros(3)])
    top = m.add_nodes([[0.0, 0.0, H]])
    m.add_members(np.c_[base, np.repeat(top, 3)], area=AREA, E=E)
    m.add_support(base)
    for k in range(cases):
        m.add_load(f"p{k}", top, (0.0, 0.0, -1.0e3 * (k + 1)))
    return m


def _leg_force(p: float) -> float:
    return -p / (3 * COS_T)


def test_cases_in_several_blocks_match_closed_form() -> None:
    # More cases than one block of the solve, and combinations of cases in
    # different blocks: every column is its own closed-form answer.
    n = 2 * static._RECOVER_BLOCK + 7
    m = _tripod(n)
    m.add_combination("far", {"p0": 1.35, f"p{n - 1}": 1.5})
    m.add_combination("mid", {f"p{static._RECOVER_BLOCK}": 1.0, "p1": -0.5})
    res = m.solve()
    assert len(res) == n + 2
    for k in (0, 1, static._RECOVER_BLOCK - 1, static._RECOVER_BLOCK, n - 1):
        r = res[f"p{k}"]
        N = _leg_force(1.0e3 * (k + 1))
        np.testing.assert_allclose(r.axial_forces, N, rtol=1e-12)
        assert r.displacements[3, 2] == pytest.approx(N * L / (E * AREA) / COS_T, rel=1e-12)
        np.testing.assert_allclose(r.reactions[:3, 2], 1.0e3 * (k + 1) / 3, rtol=1e-12)
    far = 1.35 * 1.0e3 + 1.5 * 1.0e3 * n
    np.testing.assert_allclose(res["far"].axial_forces, _leg_force(far), rtol=1e-12)
    mid = 1.0e3 * (static._RECOVER_BLOCK + 1) - 0.5 * 2.0e3
    np.testing.assert_allclose(res["mid"].axial_forces, _leg_force(mid), rtol=1e-12)


def test_blocks_recovered_side_by_side_equal_one_at_a_time(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # Blocks recovered on threads (and refined there, through one factor)
    # give the very numbers of one block after another, in the same order.
    m = _tripod(3 * static._RECOVER_BLOCK + 5)
    for k in range(0, 3 * static._RECOVER_BLOCK, 37):
        m.add_combination(f"c{k}", {f"p{k}": 1.35, f"p{k + 5}": -0.5})
    monkeypatch.setattr(static, "REFINE_ABOVE", -1.0)  # every column refined
    monkeypatch.setattr(static, "_SOLVE_COLUMNS", 2 * static._RECOVER_BLOCK)
    monkeypatch.setattr(static, "_RECOVER_THREADS", 2)
    two = m.solve()
    monkeypatch.setattr(static, "_RECOVER_THREADS", 1)
    one = m.solve()
    assert list(two) == list(one)
    for name in one:
        for what in ("displacements", "axial_forces", "reactions", "loads", "elongations"):
            np.testing.assert_array_equal(getattr(two[name], what), getattr(one[name], what))
    np.testing.assert_allclose(two["c74"].axial_forces,
                               _leg_force(1.35 * 75e3 - 0.5 * 80e3), rtol=1e-12)


def test_free_rows_copied_by_runs_or_by_columns_alike(monkeypatch: pytest.MonkeyPatch) -> None:
    # A flat grid held along z at every node: its free directions are short
    # runs (x, y of each node), copied run by run or column by column.
    m = sf.Model()
    xy = np.array([[i, j, 0.0] for j in range(4) for i in range(4)], dtype=float)
    m.add_nodes(xy)
    ids = np.arange(16).reshape(4, 4)
    bars = [*zip(ids[:, :-1].ravel(), ids[:, 1:].ravel(), strict=True),
            *zip(ids[:-1].ravel(), ids[1:].ravel(), strict=True),
            *zip(ids[:-1, :-1].ravel(), ids[1:, 1:].ravel(), strict=True)]
    m.add_members(bars, area=AREA, E=E)
    m.add_support(np.arange(16), (False, False, True))
    m.add_support([0])
    m.add_support([3], (False, True, True))
    for k in range(5):
        m.add_load(f"p{k}", [15 - k], (1.0e3 * (k + 1), -2.0e3, 0.0))
    by_runs = m.solve()
    monkeypatch.setattr(static, "_FEW_RUNS", 0)  # 15 runs of 29 free rows: by columns
    by_columns = m.solve()
    for name in by_runs:
        np.testing.assert_array_equal(by_runs[name].displacements, by_columns[name].displacements)
        assert np.abs(by_runs[name].displacements[:, 2]).max() == 0.0
    # Equilibrium of the whole (common practice): the reactions balance the load.
    np.testing.assert_allclose(by_runs["p2"].reactions.sum(axis=0), [-3.0e3, 2.0e3, 0.0],
                               atol=1e-6)


def test_refinement_from_the_recovery_residual(monkeypatch: pytest.MonkeyPatch) -> None:
    # A bar of 0 forces every column through every refinement step: the
    # steps solve the recovery's own residual and keep the answer.
    m = _tripod(70)
    calls = []
    original = static._Static._refine

    def counted(self, *args):  # type: ignore[no-untyped-def]
        calls.append(1)
        return original(self, *args)

    monkeypatch.setattr(static, "REFINE_ABOVE", -1.0)
    monkeypatch.setattr(static._Static, "_refine", counted)
    res = m.solve()
    assert len(calls) == 2 * static._REFINE_STEPS  # two blocks, every step taken
    np.testing.assert_allclose(res["p69"].axial_forces, _leg_force(70e3), rtol=1e-12)


def test_refined_displacements_are_the_ones_kept(monkeypatch: pytest.MonkeyPatch) -> None:
    # The results hold the solve's column-major block; a refinement step works
    # on a row-major copy, and its columns must be copied back.  Each step
    # here also moves the apex by a part in 1e12 (within every tolerance), so
    # that an unrefined column could not pass for a refined one.
    m = _tripod(70)
    last: dict[int, np.ndarray] = {}
    original = static._Static._refine

    def nudged(self, names, U, F, out, scales):  # type: ignore[no-untyped-def]
        again = original(self, names, U, F, out, scales)
        U[9:12, again] *= 1.0 + 1e-12
        for j in again:
            last[int(names[j][1:])] = U[:, j].copy()
        return again

    monkeypatch.setattr(static, "REFINE_ABOVE", -1.0)
    monkeypatch.setattr(static._Static, "_refine", nudged)
    res = m.solve()
    assert sorted(last) == list(range(70))
    for k, u in last.items():
        np.testing.assert_array_equal(res[f"p{k}"].displacements.ravel(), u)


def test_a_nan_in_the_residual_is_not_refined_and_fails_closed(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # The solve's own checks refuse a NaN; refinement must not hide it.
    m = _tripod(3)
    original = static._Static.solve_cases

    def poisoned(self, names, F, E0, UP):  # type: ignore[no-untyped-def]
        U = original(self, names, F, E0, UP)
        U[9, 1] = np.nan  # apex z of case p1
        return U

    monkeypatch.setattr(static._Static, "solve_cases", poisoned)
    with pytest.raises(sf.SolverError, match=r"case .p1.*non-finite displacements"):
        m.solve()


MODEL = """title = "tripod, many cases (demo)"
[geometry]
nodes = [[0,0,3],[2,0,0],[-1,1.732,0],[-1,-1.732,0]]
members = [[0,1],[0,2],[0,3]]
[sections]
s = { shape = "bar", diameter = 0.02 }
[assign]
default = { section = "s", material = "steel" }
[[supports]]
nodes = [1, 2, 3]
restrain = "pinned"
[combinations]
ULS = { p1 = 1.35, p2 = 1.5 }
SLS = { p3 = 1.0 }
"""


def _many_file(folder: Path, cases: int) -> Path:
    """The file's tripod with cases p1..p<cases>: k kN down at the apex."""
    text = MODEL + "".join(
        f'[loads.p{k}]\n[[loads.p{k}.nodal]]\nnodes = [0]\nforce = ["0 kN", "0 kN", "-{k} kN"]\n'
        for k in range(1, cases + 1))
    path = folder / "many.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _header(path: Path) -> list[str]:
    with path.open(newline="", encoding="utf-8") as fh:
        return next(csv.reader(fh))


def test_above_the_limit_only_some_results_get_files(tmp_path: Path) -> None:
    cases = outputs.PER_RESULT_LIMIT + 10
    path = _many_file(tmp_path, cases)
    out = job.run(path, tmp_path / "out", pictures=False)
    assert len(out.results) == cases + 2
    # The combinations, then the case of the largest displacement and compression
    # (no member is in tension: no case of largest tension).
    chosen = ["ULS", "SLS", f"p{cases}"]
    assert out.summary["results_with_files"] == chosen
    note = [w for w in out.summary["warnings"] if "results.npz" in w]
    assert len(note) == 1 and f"{cases + 2} results" in note[0] and "3 of them" in note[0]
    members = _header(out.output / "members.csv")
    assert [h[:-len(": N [N]")] for h in members if h.endswith(": N [N]")] == chosen
    pvd = ET.parse(out.output / "vtk" / "results.pvd").getroot()
    assert len(pvd.findall(".//DataSet")) == 3
    summary = json.loads((out.output / "summary.json").read_text(encoding="utf-8"))
    assert len(summary["results"]) == cases + 2
    assert summary["tables"]["results"] == chosen
    # Every result is in results.npz, at full precision, and near the closed
    # form (the file's feet at 1.732 for sqrt(3) are symmetric to 3e-5).
    back = tables.read_arrays(out.output / "results.npz", out.results.model)
    assert len(back) == cases + 2
    for k in (1, 17, cases):
        name = f"p{k}"
        np.testing.assert_array_equal(back[name].axial_forces, out.results[name].axial_forces)
        np.testing.assert_allclose(back[name].axial_forces, _leg_force(1.0e3 * k), rtol=1e-4)


def test_every_result_on_request(tmp_path: Path) -> None:
    cases = outputs.PER_RESULT_LIMIT + 1
    out = job.run(_many_file(tmp_path, cases), tmp_path / "out", pictures=False,
                  every_result=True)
    members = _header(out.output / "members.csv")
    assert sum(h.endswith(": N [N]") for h in members) == cases + 2
    assert "results_with_files" not in out.summary
    assert not [w for w in out.summary["warnings"] if "results.npz" in w]


def test_up_to_the_limit_every_result_gets_files(tmp_path: Path) -> None:
    cases = outputs.PER_RESULT_LIMIT - 2  # with the two combinations: at the limit
    out = job.run(_many_file(tmp_path, cases), tmp_path / "out", pictures=False)
    members = _header(out.output / "members.csv")
    assert sum(h.endswith(": N [N]") for h in members) == outputs.PER_RESULT_LIMIT
    assert "tables" in json.loads((out.output / "summary.json").read_text(encoding="utf-8"))
    assert "results" not in json.loads(
        (out.output / "summary.json").read_text(encoding="utf-8"))["tables"]


def test_command_line_lists_the_results_with_files(tmp_path: Path,
                                                   capsys: pytest.CaptureFixture[str]) -> None:
    from spaceframe.cli import main

    cases = outputs.PER_RESULT_LIMIT + 5
    path = _many_file(tmp_path, cases)
    assert main(["run", str(path), "-o", str(tmp_path / "out"), "--no-pictures"]) == 0
    text = capsys.readouterr().out
    assert f"and {cases + 2 - 3} more results" in text
    assert "--every-result" in text


def test_a_result_pictured_by_name_is_drawn_though_it_has_no_files(tmp_path: Path) -> None:
    pytest.importorskip("pyvista")
    cases = outputs.PER_RESULT_LIMIT + 1
    out = job.run(_many_file(tmp_path, cases), tmp_path / "out", pictures="p17")
    assert "p17" not in out.summary["results_with_files"]
    pics = sorted(p.name for p in (out.output / "pictures").glob("p17_*.png"))
    assert "p17_iso.png" in pics
    assert not list((out.output / "pictures").glob("p16_*.png"))


def test_a_run_says_when_it_waits_for_results_npz(tmp_path: Path,
                                                   monkeypatch: pytest.MonkeyPatch) -> None:
    # results.npz is written on its own thread; when the other files are done
    # first, the wait for it is said as a step of its own.
    import threading

    from spaceframe.demos import write_demo

    model_file = write_demo(tmp_path / "proj", "canopy")[1]
    go = threading.Event()
    original = tables.write_arrays

    def held(*args, **kwargs):  # type: ignore[no-untyped-def]
        go.wait(30)  # until the run has said it waits
        return original(*args, **kwargs)

    said: list[str] = []

    def progress(text: str) -> None:
        said.append(text)
        if text.startswith("write results.npz"):
            go.set()

    monkeypatch.setattr(tables, "write_arrays", held)
    out = job.run(model_file, tmp_path / "res", pictures=False, progress=progress)
    assert said[-1] == "write results.npz (every result)"
    assert (out.output / "results.npz").is_file()
