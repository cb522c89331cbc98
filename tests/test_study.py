"""Parameter studies: Dask local cluster against one-by-one runs, failures in rows, resume."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.errors import ModelError
from spaceframe.study import evaluate_variant, run_study, variants


def _grid() -> sf.Model:
    """A small double-layer grid (invented demo data), supported at four corners."""
    m = sf.Model()
    bottom = np.array([[i, j, 0.0] for j in range(3) for i in range(3)], dtype=float) * 4.0
    top = bottom[[0, 1, 3, 4]] + np.array([2.0, 2.0, 2.5])
    m.add_nodes(np.vstack([bottom, top]))
    chords = [[0, 1], [1, 2], [3, 4], [4, 5], [6, 7], [7, 8], [0, 3], [3, 6], [1, 4],
              [4, 7], [2, 5], [5, 8], [9, 10], [11, 12], [9, 11], [10, 12]]
    web = []
    for t, c in zip(range(9, 13), [0, 1, 3, 4], strict=True):
        web += [[c, t], [c + 1, t], [c + 3, t], [c + 4, t]]
    m.add_members(chords, area=2e-3, E=210e9, density=7850.0, group="chords")
    m.add_members(web, area=1e-3, E=210e9, density=7850.0, group="web")
    m.set_member_properties(np.arange(m.n_members), yield_strength=355e6,
                            second_moment=1e-6, buckling_curve="a")
    m.add_support([0, 2, 6, 8])
    m.add_node_set("corners", [0, 2, 6, 8])
    m.add_self_weight("G")
    m.add_load("Q", [9, 10, 11, 12], (0.0, 0.0, -20e3))
    m.add_combination("ULS", {"G": 1.35, "Q": 1.5})
    return m


VARY = {
    "section.web": ["CHS 48.3x3.2", "CHS 60.3x4", "CHS 76.1x4", "CHS 88.9x5"],
    "case.Q": [0.5, 1.0, 2.0],
    "restraint.corners": ["xyz", "z"],  # "z" alone: a mechanism (free to slide)
}


def test_variants_product_and_zip():
    assert len(variants(VARY)) == 24
    z = variants({"case.Q": [1.0, 2.0], "scale.z": [1.0, 1.5]}, mode="zip")
    assert z == [{"case.Q": 1.0, "scale.z": 1.0}, {"case.Q": 2.0, "scale.z": 1.5}]
    with pytest.raises(ModelError, match="zip"):
        variants({"case.Q": [1.0], "scale.z": [1.0, 1.5]}, mode="zip")


def test_one_variant_matches_a_direct_solve_and_leaves_the_base_alone():
    m = _grid()
    before = m.area.copy()
    row = evaluate_variant(m, {"case.Q": 2.0})
    np.testing.assert_array_equal(m.area, before)
    direct = _grid()
    direct.cases["Q"].forces *= 2.0
    res = direct.solve()
    expect = max(float(np.linalg.norm(res[n].displacements, axis=1).max()) for n in res)
    assert row["max_displacement_m"] == pytest.approx(expect, rel=1e-12)
    assert row["mass_kg"] == pytest.approx(direct.mass.sum())
    assert row["error"] == ""


def test_scale_depth_follows_self_weight():
    m = _grid()
    row = evaluate_variant(m, {"scale.z": 2.0})
    deep = _grid()
    deep.nodes = deep.nodes * np.array([1.0, 1.0, 2.0])
    # Longer web members: more mass (density x A x L, geometry).
    lengths = np.linalg.norm(deep.nodes[deep.members[:, 1]] - deep.nodes[deep.members[:, 0]],
                             axis=1)
    assert row["mass_kg"] == pytest.approx(float(np.sum(7850.0 * m.area * lengths)))


def test_study_on_a_local_dask_cluster_equals_one_by_one(tmp_path):
    pytest.importorskip("distributed")
    m = _grid()
    serial = run_study(m, VARY, scheduler="serial")
    dask_t = run_study(m, VARY, workers=2)
    assert len(serial.rows) == len(dask_t.rows) == 24
    for a, b in zip(serial.rows, dask_t.rows, strict=True):
        for k, v in a.items():
            if isinstance(v, float) and math.isnan(v):
                assert math.isnan(b[k])
            else:
                assert b[k] == v, k
    # Every "z"-only layout is a mechanism, reported in its row, and the rest ran.
    failed = [r for r in serial.rows if r["error"]]
    assert len(failed) == 12 and all(r["restraint.corners"] == "z" for r in failed)
    assert all("rigid body" in r["error"] for r in failed)
    assert all(r["error"] == "" for r in serial.rows if r["restraint.corners"] == "xyz")
    # Heavier web sections cost mass; more load, more displacement.
    ok = [r for r in serial.rows if not r["error"] and r["case.Q"] == 1.0]
    masses = [r["mass_kg"] for r in ok]
    assert masses == sorted(masses)


def test_study_resumes_from_its_journal(tmp_path):
    m = _grid()
    journal = tmp_path / "study.jsonl"
    calls: list[int] = []
    small = {"case.Q": [0.5, 1.0, 2.0]}
    first = run_study(m, {"case.Q": [0.5, 1.0]}, scheduler="serial", journal=journal)
    assert first.skipped == 0
    lines = journal.read_text().splitlines()
    assert len(lines) == 2 and json.loads(lines[0])["case.Q"] == 0.5
    journal.write_text(journal.read_text() + '{"key": "cut sho')  # an interrupted write
    again = run_study(m, small, scheduler="serial", journal=journal,
                      progress=lambda k, n: calls.append(k))
    assert again.skipped == 2 and calls == [3]
    assert [r["case.Q"] for r in again.rows] == [0.5, 1.0, 2.0]
    again.to_csv(tmp_path / "study.csv")
    head = (tmp_path / "study.csv").read_text().splitlines()[0]
    assert head.startswith("case.Q,mass_kg,max_displacement_m")


def test_bad_parameters_are_refused_before_running():
    m = _grid()
    with pytest.raises(ModelError, match="no section"):
        run_study(m, {"section.web": ["CHS 1x1"]}, scheduler="serial")
    row = evaluate_variant(m, {"case.nope": 1.0})
    assert "no load case 'nope'" in row["error"]
    row = evaluate_variant(m, {"wobble.x": 1.0})
    assert "must start with" in row["error"]


def test_study_command_writes_one_table_and_resumes(tmp_path, capsys):
    from test_project import CANOPY

    from spaceframe.cli import main

    (tmp_path / "canopy.toml").write_text(CANOPY, encoding="utf-8")
    (tmp_path / "sweep.toml").write_text(
        '[study]\nmodel = "canopy.toml"\noutput = "sweep-out"\n'
        '[study.vary]\n"section.TOP" = ["CHS 76.1x3.2", "CHS 88.9x4"]\n'
        '"case.snow" = [1.0, 1.5]\n', encoding="utf-8")
    assert main(["study", str(tmp_path / "sweep.toml"), "--serial"]) == 0
    text = capsys.readouterr().out
    assert "4 variants" in text and "qualified engineer" in text
    rows = (tmp_path / "sweep-out" / "study.csv").read_text().splitlines()
    assert rows[0].startswith("section.TOP,case.snow,mass_kg") and len(rows) == 5
    # Heavier top chords weigh more (same other members), whatever the load factor.
    by = {tuple(r.split(",")[:2]): float(r.split(",")[2]) for r in rows[1:]}
    assert by[("CHS 88.9x4", "1")] > by[("CHS 76.1x3.2", "1")]
    assert main(["study", str(tmp_path / "sweep.toml"), "--serial"]) == 0
    assert "4 taken from the journal" in capsys.readouterr().out
    (tmp_path / "bad.toml").write_text('[study]\nmodel = "canopy.toml"\n', encoding="utf-8")
    assert main(["study", str(tmp_path / "bad.toml"), "--serial"]) == 2
    assert "study.vary" in capsys.readouterr().err


def test_study_on_dask_in_batches_counts_each_variant_and_resumes(tmp_path):
    pytest.importorskip("distributed")
    from spaceframe.study import MAX_BATCH, batch_size

    assert batch_size(12, 1) == 3 and batch_size(5, 2) == 1 and batch_size(10**4, 2) == MAX_BATCH
    m = _grid()
    serial = run_study(m, VARY, scheduler="serial")
    journal = tmp_path / "study.jsonl"
    half = {**VARY, "section.web": VARY["section.web"][:2]}
    run_study(m, half, scheduler="serial", journal=journal)
    calls: list[tuple[int, int]] = []
    # 12 variants left on one worker: tasks of 3, each holding sound and failing variants.
    again = run_study(m, VARY, workers=1, journal=journal,
                      progress=lambda k, n: calls.append((k, n)))
    assert again.skipped == 12
    assert calls == [(k, 24) for k in range(13, 25)]
    assert len(journal.read_text().splitlines()) == 24
    assert again.failed == serial.failed and len(again.failed) == 12
    for a, b in zip(serial.rows, again.rows, strict=True):
        assert a["error"] == b["error"]
        for k in ("mass_kg", "max_displacement_m", "max_utilisation"):
            assert (math.isnan(a[k]) and math.isnan(b[k])) or a[k] == b[k], k


def test_worker_settings_example_matches_the_local_cluster() -> None:
    # examples/dask-workers.yaml is what README tells users of their own cluster to use.
    yaml = pytest.importorskip("yaml")
    from spaceframe import study

    path = Path(__file__).resolve().parents[1] / "examples" / "dask-workers.yaml"
    cfg = yaml.safe_load(path.read_text(encoding="utf-8"))

    def get(key: str) -> object:
        node: object = cfg
        for part in key.split("."):
            assert isinstance(node, dict) and part in node, key
            node = node[part]
        return node

    assert get("distributed.nanny.pre-spawn-environ") == study.WORKER_ENVIRON
    for key, value in study.CLUSTER_CONFIG.items():
        assert get(key) == value, key
