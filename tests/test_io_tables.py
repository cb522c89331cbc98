"""CSV tables and the JSON summary, read back with numpy and the json module."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from conftest import AREA, H_APEX, L_LEG, E, W, loaded_tripod

import spaceframe as sf
from spaceframe.errors import WriteError
from spaceframe.io import tables
from spaceframe.results.summary import summary


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
    assert header[:4] == ["node [-]", "x [m]", "y [m]", "z [m]"]
    assert header[4:10] == ["snow: ux [m]", "snow: uy [m]", "snow: uz [m]",
                            "snow: Rx [N]", "snow: Ry [N]", "snow: Rz [N]"]
    assert len(header) == 4 + 6 * 3
    data = _numbers(nodes, header)
    np.testing.assert_array_equal(data[:, 0], np.arange(4))
    # 15 digits: coordinates come back as given (to the last float64 bit or two).
    np.testing.assert_allclose(data[:, 1:4], results.model.nodes, rtol=5e-15, atol=1e-15)
    for name in results:
        cols = [f"{name}: u{a} [m]" for a in "xyz"]
        # 7 significant digits: half a unit of the 7th digit at most.
        np.testing.assert_allclose(_numbers(nodes, cols), results[name].displacements,
                                   rtol=5e-7, atol=1e-22)
    # Closed form (compatibility of the symmetric tripod): apex drop W L³ / (3 h² E A).
    uz = _numbers(nodes, ["snow: uz [m]"])[3, 0]
    assert uz == pytest.approx(-W * L_LEG**3 / (3 * H_APEX**2 * E * AREA), rel=5e-7)


def test_members_table(tmp_path: Path, results: sf.Results) -> None:
    members = tables.write(tmp_path, results)[1]
    header = _header(members)
    assert header[:7] == ["member [-]", "node_i [-]", "node_j [-]", "group [-]", "length [m]",
                          "area [m2]", "E [Pa]"]
    with members.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["group [-]"] for r in rows] == ["legs, main;north", "legs, main", "legs, main"]
    ends = _numbers(members, ["node_i [-]", "node_j [-]"])
    np.testing.assert_array_equal(ends, results.model.members)
    # Closed form, joint equilibrium of the apex under W: N = -W L / (3 h).
    n_snow = _numbers(members, ["snow: N [N]"])[:, 0]
    np.testing.assert_allclose(n_snow, -W * L_LEG / (3 * H_APEX), rtol=5e-7)
    stress = _numbers(members, ["snow+wind: stress [Pa]"])[:, 0]
    np.testing.assert_allclose(stress, results["snow+wind"].stress, rtol=5e-7)
    np.testing.assert_allclose(_numbers(members, ["length [m]"])[:, 0], L_LEG, rtol=1e-14)


def test_reactions_table_lists_supports_only(tmp_path: Path, results: sf.Results) -> None:
    reactions = tables.write(tmp_path, results)[2]
    with reactions.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [int(r["node [-]"]) for r in rows] == [0, 1, 2]
    assert {r["restrained [-]"] for r in rows} == {"xyz"}
    rz = _numbers(reactions, ["snow: Rz [N]"])[:, 0]
    # Closed form: by symmetry each foot carries a third of W.
    np.testing.assert_allclose(rz, W / 3, rtol=5e-7)


def test_summary_json_matches_summary(tmp_path: Path, results: sf.Results) -> None:
    path = tables.write(tmp_path, results)[3]
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data.pop("tables") == {"significant_digits": {"model": 15, "results": 7},
                                  "units": "SI, in each column name"}
    assert data == json.loads(json.dumps(summary(results)))
    d = data["results"]["snow"]["max_displacement"]["value"]
    assert d == pytest.approx(W * L_LEG**3 / (3 * H_APEX**2 * E * AREA), rel=1e-10)


def test_extra_summary_entries(tmp_path: Path, results: sf.Results) -> None:
    path = tables.write(tmp_path, results, extra={"source": "mast.toml", "warnings": ["w"]})[3]
    data = json.loads(path.read_text(encoding="utf-8"))
    assert data["source"] == "mast.toml" and data["warnings"] == ["w"]
    assert "results" in data
    with pytest.raises(sf.WriteError, match="'results' is already"):
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
    with pytest.raises(sf.WriteError, match="prefix 'sub/x_'"):
        tables.write(tmp_path, results, prefix="sub/x_")
    with pytest.raises(sf.WriteError, match="no load cases"):
        tables.write(tmp_path, sf.Results(results.model, {}))
    assert list(tmp_path.iterdir()) == []


def _raw_fields(path: Path) -> list[list[str]]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.reader(fh))


def test_every_header_has_a_unit(tmp_path: Path, results: sf.Results) -> None:
    paths = tables.write(tmp_path, results)[:3]
    env = results.envelope("all", list(results))
    paths += tables.write_envelopes(tmp_path, results, {"all": env})
    for path in paths:
        for name in _header(path):
            assert name.endswith("]") and " [" in name, (path.name, name)


def test_stated_precision(tmp_path: Path) -> None:
    # A fictional bar drawn with coordinates that are not exact in binary
    # (0.1 + 0.2 is 0.30000000000000004 in float64).
    m = sf.Model()
    m.add_nodes([[0.0, 0.0, 0.0], [0.1 + 0.2, 0.0, 0.0], [0.0, 0.7, 0.0]])
    m.add_members([[0, 1], [0, 2], [1, 2]], area=AREA, E=E)
    m.add_support([0])
    m.add_support([1], x=False)
    m.add_support([2], x=False, y=False)
    m.add_load("pull", [2], (1000.0 / 3.0, 0.0, 0.0))
    res = m.solve()
    nodes, members = tables.write(tmp_path, res)[:2]
    rows = _raw_fields(nodes)
    col = rows[0].index("x [m]")
    assert rows[2][col] == "0.3"  # 15 digits: as given, without the binary noise
    for row in _raw_fields(members)[1:]:
        for field in row[7:]:
            mantissa = field.lower().split("e")[0].lstrip("-").replace(".", "").lstrip("0")
            assert len(mantissa) <= 7, field
    # digits=17 round-trips every float64 exactly.
    exact = tables.write(tmp_path / "exact", res, digits=17)[1]
    n = _numbers(exact, ["pull: N [N]"])[:, 0]
    np.testing.assert_array_equal(n, res["pull"].axial_forces)
    with pytest.raises(sf.WriteError, match="digits=0"):
        tables.write(tmp_path / "bad", res, digits=0)


def test_arrays_file_holds_every_result_at_full_precision(tmp_path: Path) -> None:
    res = _mast_base().solve()
    m = res.model
    (path,) = tables.write_arrays(tmp_path, res, prefix="mast_")
    assert path.name == "mast_results.npz"
    with np.load(path) as z:  # allow_pickle is False by default: no object arrays inside
        assert list(z["result_names"]) == list(res.keys())
        assert list(z["result_kinds"]) == ["case", "case", "combination"]  # snow, wind, snow+wind
        for i, r in enumerate(res.values()):
            np.testing.assert_array_equal(z["axial_forces"][i], r.axial_forces)
            np.testing.assert_array_equal(z["displacements"][i], r.displacements)
            # Reactions at the nodes that have any (the supports), zero at the others.
            at = z["reaction_nodes"]
            np.testing.assert_array_equal(at, sf.results.summary.supported_nodes(m))
            np.testing.assert_array_equal(z["reactions"][i], r.reactions[at])
            assert not np.any(np.delete(r.reactions, at, axis=0))
            # Stresses are not stored: they follow from the forces and areas.
            np.testing.assert_array_equal(z["axial_forces"][i] / z["area"], r.stress)
        assert "stress" not in z.files
        np.testing.assert_array_equal(z["nodes"], m.nodes)
        np.testing.assert_array_equal(z["members"], m.members)
        assert z["groups"][0] == "legs, main;north"
        assert json.loads(str(z["units"]))["axial_forces"] == "N"
    # Statics of the symmetric tripod (closed form, as in test_members_table): each leg
    # carries W / (3 cos α) in compression under the snow case.
    np.testing.assert_allclose(res["snow"].axial_forces, -W * L_LEG / (3 * H_APEX), rtol=1e-9)


def test_arrays_file_refuses_bad_prefix_and_leaves_nothing(tmp_path: Path,
                                                           results: sf.Results) -> None:
    with pytest.raises(WriteError, match="prefix"):
        tables.write_arrays(tmp_path, results, prefix="a/b_")
    with pytest.raises(WriteError, match="no load cases"):
        tables.write_arrays(tmp_path, sf.Results(results.model, {}))
    assert list(tmp_path.iterdir()) == []


def test_text_columns_quote_each_value_once(tmp_path: Path) -> None:
    m = _mast_base()
    m.add_group('say "hi"', [1])
    paths = tables.write(tmp_path, m.solve())
    with paths[1].open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert [r[3] for r in rows[1:]] == ["legs, main;north", 'legs, main;say "hi"', "legs, main"]


def test_arrays_file_reads_back_as_the_same_results(tmp_path: Path, results: sf.Results) -> None:
    (path,) = tables.write_arrays(tmp_path, results)
    back = tables.read_arrays(path, results.model)
    assert list(back) == list(results)
    for name, r in results.items():
        b = back[name]
        assert (b.kind, b.factors, b.residual) == (r.kind, r.factors, r.residual)
        for attr in ("displacements", "axial_forces", "reactions", "loads", "elongations",
                     "stress"):
            np.testing.assert_array_equal(getattr(b, attr), getattr(r, attr))
        assert b.slack is None
    assert back.solver == results.solver


def test_arrays_file_of_another_model_is_refused(tmp_path: Path, results: sf.Results) -> None:
    (path,) = tables.write_arrays(tmp_path, results)
    moved = _mast_base()
    moved.nodes = moved.nodes + np.array([0.0, 0.0, 0.01])
    with pytest.raises(sf.ReadError, match="the model changed since the run"):
        tables.read_arrays(path, moved)
    (tmp_path / "junk.npz").write_bytes(b"not a zip")
    with pytest.raises(sf.ReadError, match=r"junk\.npz: cannot be read"):
        tables.read_arrays(tmp_path / "junk.npz", results.model)


def test_arrays_file_of_an_earlier_version_reads_back(tmp_path: Path,
                                                      results: sf.Results) -> None:
    # Files written before reaction_nodes and load_nodes held the reactions
    # and loads of every node.
    (path,) = tables.write_arrays(tmp_path, results)
    with np.load(path) as z:
        data = {k: z[k] for k in z.files
                if k not in ("reaction_nodes", "load_counts", "load_nodes", "load_values")}
    data["reactions"] = np.stack([r.reactions for r in results.values()])
    data["loads"] = np.stack([r.loads for r in results.values()])
    old = tmp_path / "old.npz"
    np.savez(old, **data)
    back = tables.read_arrays(old, results.model)
    for name, r in results.items():
        np.testing.assert_array_equal(back[name].reactions, r.reactions)
        np.testing.assert_array_equal(back[name].loads, r.loads)


def test_arrays_file_keeps_loads_at_loaded_nodes_only(tmp_path: Path,
                                                      results: sf.Results) -> None:
    (path,) = tables.write_arrays(tmp_path, results)
    with np.load(path) as z:
        assert "loads" not in z.files
        counts, nodes, values = z["load_counts"], z["load_nodes"], z["load_values"]
    start = np.r_[0, np.cumsum(counts)]
    for i, r in enumerate(results.values()):
        at = np.flatnonzero(np.any(r.loads != 0, axis=1))
        np.testing.assert_array_equal(nodes[start[i]:start[i + 1]], at)
        np.testing.assert_array_equal(values[start[i]:start[i + 1]], r.loads[at])
        assert 0 < at.size < r.loads.shape[0]  # the mast is loaded at some nodes only


def test_streamed_arrays_file_reads_as_numpy_writes_it(tmp_path: Path) -> None:
    # The stacks are written part after part behind one header; numpy.load must
    # read them as the stacked arrays (texts and parts above 1 MB included).
    from spaceframe.io.tables import _Rows, _save_npz, _Stack

    texts = np.array([f"group {i}" for i in range(50_000)])  # 2 MB of unicode
    parts = [np.random.default_rng(i).random(200_000) for i in range(3)]  # 1.6 MB each
    flags = [np.arange(5) % (i + 2) == 0 for i in range(3)]
    rows = [np.arange(6.0).reshape(2, 3), np.zeros((0, 3)), np.ones((1, 3))]
    _save_npz(tmp_path / "x.npz", {"texts": texts, "parts": _Stack(parts),
                                   "flags": _Stack(flags), "one": np.array("text"),
                                   "rows": _Rows(rows, np.float64)})
    with np.load(tmp_path / "x.npz") as z:
        np.testing.assert_array_equal(z["texts"], texts)
        np.testing.assert_array_equal(z["parts"], np.stack(parts))
        np.testing.assert_array_equal(z["flags"], np.stack(flags))
        assert z["parts"].dtype == np.float64 and z["flags"].dtype == bool
        assert str(z["one"]) == "text"
        np.testing.assert_array_equal(z["rows"], np.concatenate(rows))
    with pytest.raises(WriteError, match="a part of shape"):
        _save_npz(tmp_path / "bad.npz", {"parts": _Stack([np.zeros(3), np.zeros(4)])})
    with pytest.raises(WriteError, match="a part of shape"):
        _save_npz(tmp_path / "bad.npz", {"rows": _Rows([np.zeros((2, 3)), np.zeros((1, 2))],
                                                       np.float64)})
