"""CSV tables and the JSON summary, read back with numpy and the json module."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from conftest import AREA, H_APEX, L_LEG, E, W, loaded_tripod

import spaceframe as sf
from spaceframe.io import tables
from spaceframe.summary import summary


def _mast_base() -> sf.Model:
    """The tripod foot of a fictional telecom mast (the shared loaded tripod)."""
    m = loaded_tripod()
    m.add_group("legs, main", [0, 1, 2])
    m.add_group("north", [0])
    return m


@pytest.fixture
def results() -> sf.Results:
    return _mast_base().solve()


def _header(path: Path) -> list[str]:
    with path.open(newline="", encoding="utf-8") as fh:
        return next(csv.reader(fh))


def _numbers(path: Path, columns: list[str]) -> np.ndarray:
    header = _header(path)
    idx = [header.index(c) for c in columns]
    # numpy's own parser, independent of the csv module that wrote the file.
    return np.loadtxt(path, delimiter=",", skiprows=1, usecols=idx, ndmin=2, quotechar='"')


def test_files_written(tmp_path: Path, results: sf.Results) -> None:
    paths = tables.write(tmp_path / "tables", results, prefix="mast_")
    assert [p.name for p in paths] == ["mast_nodes.csv", "mast_members.csv",
                                       "mast_reactions.csv", "mast_summary.json"]
    assert sorted(p.name for p in (tmp_path / "tables").iterdir()) == sorted(
        p.name for p in paths)


def test_nodes_table(tmp_path: Path, results: sf.Results) -> None:
    nodes = tables.write(tmp_path, results)[0]
    header = _header(nodes)
    assert header[:4] == ["node", "x [m]", "y [m]", "z [m]"]
    assert header[4:10] == ["snow: ux [m]", "snow: uy [m]", "snow: uz [m]",
                            "snow: Rx [N]", "snow: Ry [N]", "snow: Rz [N]"]
    assert len(header) == 4 + 6 * 3
    data = _numbers(nodes, header)
    np.testing.assert_array_equal(data[:, 0], np.arange(4))
    np.testing.assert_array_equal(data[:, 1:4], results.model.nodes)  # repr round-trips
    for name in results:
        cols = [f"{name}: u{a} [m]" for a in "xyz"]
        np.testing.assert_array_equal(_numbers(nodes, cols), results[name].displacements)
    # Closed form (compatibility of the symmetric tripod): apex drop W L³ / (3 h² E A).
    uz = _numbers(nodes, ["snow: uz [m]"])[3, 0]
    assert uz == pytest.approx(-W * L_LEG**3 / (3 * H_APEX**2 * E * AREA), rel=1e-10)


def test_members_table(tmp_path: Path, results: sf.Results) -> None:
    members = tables.write(tmp_path, results)[1]
    header = _header(members)
    assert header[:7] == ["member", "node_i", "node_j", "group", "length [m]", "area [m2]",
                          "E [Pa]"]
    with members.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["group"] for r in rows] == ["legs, main;north", "legs, main", "legs, main"]
    ends = _numbers(members, ["node_i", "node_j"])
    np.testing.assert_array_equal(ends, results.model.members)
    # Closed form, joint equilibrium of the apex under W: N = -W L / (3 h).
    n_snow = _numbers(members, ["snow: N [N]"])[:, 0]
    np.testing.assert_allclose(n_snow, -W * L_LEG / (3 * H_APEX), rtol=1e-10)
    stress = _numbers(members, ["snow+wind: stress [Pa]"])[:, 0]
    np.testing.assert_array_equal(stress, results["snow+wind"].stress)
    np.testing.assert_allclose(_numbers(members, ["length [m]"])[:, 0], L_LEG, rtol=1e-14)


def test_reactions_table_lists_supports_only(tmp_path: Path, results: sf.Results) -> None:
    reactions = tables.write(tmp_path, results)[2]
    with reactions.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["node"]) for r in rows] == [0, 1, 2]
    assert {r["restrained"] for r in rows} == {"xyz"}
    rz = _numbers(reactions, ["snow: Rz [N]"])[:, 0]
    # Closed form: by symmetry each foot carries a third of W.
    np.testing.assert_allclose(rz, W / 3, rtol=1e-10)


def test_summary_json_matches_summary(tmp_path: Path, results: sf.Results) -> None:
    path = tables.write(tmp_path, results)[3]
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data == json.loads(json.dumps(summary(results)))
    d = data["results"]["snow"]["max_displacement"]["value"]
    assert d == pytest.approx(W * L_LEG**3 / (3 * H_APEX**2 * E * AREA), rel=1e-10)


def test_extra_summary_entries(tmp_path: Path, results: sf.Results) -> None:
    path = tables.write(tmp_path, results, extra={"source": "mast.toml", "warnings": ["w"]})[3]
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["source"] == "mast.toml" and data["warnings"] == ["w"]
    assert "results" in data
    with pytest.raises(sf.ModelError, match="'results' is already"):
        tables.write(tmp_path / "x", results, extra={"results": {}})
    assert not (tmp_path / "x").exists()


def test_failure_leaves_nothing_behind(tmp_path: Path, results: sf.Results,
                                       monkeypatch: pytest.MonkeyPatch) -> None:
    def broken(*args: object, **kwargs: object) -> str:
        raise OSError("disk full")

    monkeypatch.setattr(tables.json, "dumps", broken)
    with pytest.raises(OSError, match="disk full"):
        tables.write(tmp_path, results)
    assert list(tmp_path.iterdir()) == []


def test_bad_prefix_and_empty_results(tmp_path: Path, results: sf.Results) -> None:
    with pytest.raises(sf.ModelError, match="prefix 'sub/x_'"):
        tables.write(tmp_path, results, prefix="sub/x_")
    with pytest.raises(sf.ModelError, match="no load cases"):
        tables.write(tmp_path, sf.Results(results.model, {}))
    assert list(tmp_path.iterdir()) == []
