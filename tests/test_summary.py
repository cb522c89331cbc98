"""The run summary: figures checked against closed forms and a published example."""

from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import A_FOOT, AREA, H_APEX, L_LEG, E, W, loaded_tripod, tripod_wind_forces

import spaceframe as sf
from spaceframe.results.summary import (
    SCHEMA,
    auto_scale,
    case_summary,
    critical_members,
    format_number,
    member_group_index,
    member_group_labels,
    summary,
    supported_nodes,
)


def _tripod() -> sf.Model:
    """The shared loaded tripod with overlapping groups and a node set."""
    m = loaded_tripod(density=7850.0)
    m.add_group("back leg", [0])
    m.add_group("front legs", [1, 2])
    m.add_group("marked", [0, 2])  # overlaps both groups above
    m.add_node_set("feet", [0, 1, 2])
    return m


@pytest.fixture
def tripod() -> sf.Model:
    return _tripod()


@pytest.fixture
def tripod_results(tripod: sf.Model) -> sf.Results:
    return tripod.solve()


def _snow_force() -> float:
    # Closed form, joint equilibrium at the apex: 3 N h / L = -W.
    return -W * L_LEG / (3 * H_APEX)


def _snow_drop() -> float:
    # Closed form, compatibility: each leg shortens by N L / (E A) and that is
    # the apex drop projected on the leg, delta h / L: delta = W L³ / (3 h² E A).
    return W * L_LEG**3 / (3 * H_APEX**2 * E * AREA)


def _wind_forces() -> np.ndarray:
    return tripod_wind_forces()


def test_format_number_examples() -> None:
    # Common practice: four significant figures in fixed point, no exponent.
    assert format_number(12.3456) == "12.35"
    assert format_number(-0.0123456) == "-0.01235"
    assert format_number(123456.7) == "123457"
    assert format_number(0.0) == "0"
    assert format_number(-1e-15) == "0"
    assert format_number(2.0, 3) == "2.00"


def test_auto_scale_is_five_percent_of_size(tripod: sf.Model) -> None:
    u = np.zeros((4, 3))
    u[3] = (0.003, -0.004, 0.0)  # |u| = 5 mm
    # Diagonal of the bounding box, from the foot coordinates (closed form).
    lo = np.array([-A_FOOT * np.sqrt(3) / 2, -A_FOOT / 2, 0.0])
    hi = np.array([A_FOOT * np.sqrt(3) / 2, A_FOOT, H_APEX])
    size = np.linalg.norm(hi - lo)
    s = auto_scale(tripod, u)
    assert s * 0.005 == pytest.approx(0.05 * size, rel=1e-12)
    assert auto_scale(tripod, np.zeros((4, 3))) == 1.0


def test_snow_case_figures(tripod: sf.Model, tripod_results: sf.Results) -> None:
    s = case_summary(tripod, tripod_results["snow"])
    d = s["max_displacement"]
    assert d["node"] == 3
    assert d["value"] == pytest.approx(_snow_drop(), rel=1e-10)
    np.testing.assert_allclose(d["vector"], [0.0, 0.0, -_snow_drop()], rtol=1e-10, atol=1e-15)
    assert d["position"] == [0.0, 0.0, H_APEX]
    assert s["max_tension"] is None  # every leg is in compression
    c = s["max_compression"]
    assert c["force"] == pytest.approx(_snow_force(), rel=1e-10)
    assert c["stress"] == pytest.approx(_snow_force() / AREA, rel=1e-10)
    assert c["length"] == pytest.approx(L_LEG, rel=1e-12)
    assert s["applied_total"] == [0.0, 0.0, -W]
    np.testing.assert_allclose(s["reaction_total"], [0.0, 0.0, W], rtol=1e-12, atol=1e-9)
    assert np.abs(s["imbalance"]).max() < 1e-9 * W
    assert s["equilibrium_ok"] is True
    assert s["loaded_nodes"] == 1
    assert s["kind"] == "case" and s["factors"] == {}


def test_wind_case_has_tension_and_compression(
    tripod: sf.Model, tripod_results: sf.Results
) -> None:
    s = case_summary(tripod, tripod_results["wind"])
    t = _wind_forces()
    assert s["max_tension"]["member"] == 1
    assert s["max_tension"]["force"] == pytest.approx(t[1], rel=1e-10)
    assert s["max_tension"]["groups"] == ["front legs"]
    assert s["max_compression"]["member"] == 2
    assert s["max_compression"]["force"] == pytest.approx(t[2], rel=1e-10)
    assert s["max_compression"]["groups"] == ["front legs", "marked"]
    assert s["max_abs_stress"]["value"] == pytest.approx(abs(t[1]) / AREA, rel=1e-10)


def test_combination_is_labelled_with_factors(tripod_results: sf.Results) -> None:
    s = summary(tripod_results)["results"]["snow+wind"]
    assert s["kind"] == "combination"
    assert s["factors"] == {"snow": 1.0, "wind": 1.5}
    # Superposition (closed form): 1.0 x snow + 1.5 x wind.
    expected = _snow_force() + 1.5 * _wind_forces()
    assert s["max_compression"]["force"] == pytest.approx(expected.min(), rel=1e-10)


def test_critical_members_order(tripod: sf.Model, tripod_results: sf.Results) -> None:
    crit = critical_members(tripod, tripod_results["wind"], n=2)
    # Legs 1 and 2 carry equal |N| (closed form above): ties go by member id.
    assert [c["member"] for c in crit] == [1, 2]
    assert critical_members(tripod, tripod_results["wind"], n=10)[-1]["member"] == 0


def test_governing_members_over_all_results(tripod_results: sf.Results) -> None:
    s = summary(tripod_results, n_critical=3)
    crit = s["critical_members"]
    forces = {
        "snow": np.full(3, _snow_force()),
        "wind": _wind_forces(),
        "snow+wind": _snow_force() + 1.5 * _wind_forces(),
    }
    # Independent maximum over the closed-form forces.
    stack = np.abs(np.stack(list(forces.values())))
    best = stack.max(axis=0)
    order = np.argsort(-best, kind="stable")
    assert [c["member"] for c in crit] == order.tolist()
    for c in crit:
        k = c["member"]
        assert abs(c["force"]) == pytest.approx(best[k], rel=1e-10)
        assert abs(forces[c["result"]][k]) == pytest.approx(best[k], rel=1e-10)


def test_model_numbers(tripod_results: sf.Results) -> None:
    m = summary(tripod_results)["model"]
    assert m["nodes"] == 4 and m["members"] == 3
    assert m["supported_nodes"] == 3
    assert m["restrained_directions"] == {"x": 3, "y": 3, "z": 3}
    assert m["groups"]["front legs"]["members"] == 2
    assert m["groups"]["front legs"]["length"] == pytest.approx(2 * L_LEG, rel=1e-12)
    assert m["groups"]["back leg"]["mass"] == pytest.approx(7850.0 * AREA * L_LEG, rel=1e-12)
    assert m["total_length"] == pytest.approx(3 * L_LEG, rel=1e-12)
    assert m["node_sets"] == {"feet": 3}
    assert m["cases"] == ["snow", "wind"]
    assert m["combinations"] == {"snow+wind": {"snow": 1.0, "wind": 1.5}}


def test_summary_is_strict_json_and_stable(tripod_results: sf.Results) -> None:
    s = summary(tripod_results)
    text = json.dumps(s, allow_nan=False)
    back = json.loads(text)
    assert back == s
    assert back["schema"] == SCHEMA
    assert list(back["results"]) == ["snow", "wind", "snow+wind"]
    keys = {
        "kind", "factors", "loaded_nodes", "max_displacement", "max_tension",
        "max_compression", "max_abs_stress", "applied_total", "reaction_total",
        "imbalance", "residual", "equilibrium_ok", "critical_members",
    }
    for r in back["results"].values():
        assert set(r) == keys


def test_published_four_bar_truss(ferreira: sf.Model) -> None:
    s = summary(ferreira.solve())["results"]["P"]
    # Ferreira, MATLAB Codes for Finite Element Analysis (Springer 2010) §5.3:
    # u1 = (-0.3024, -1.5177, 0.2688) mm, four significant figures.
    published = np.array([-0.3024, -1.5177, 0.2688]) * 1e-3
    assert s["max_displacement"]["node"] == 0
    np.testing.assert_allclose(s["max_displacement"]["vector"], published, atol=6e-8)
    # Same source, reactions: R4 = (0, 7968.1, 0) N at node (4, 0, 3), which
    # only the member along y from the loaded node reaches, so by equilibrium
    # of that node N = -7968.1 N, the largest compression; the reactions at
    # all four feet point back towards the loaded node, so no member is in tension.
    assert s["max_tension"] is None
    assert s["max_compression"]["member"] == 2
    assert s["max_compression"]["force"] == pytest.approx(-7968.1, rel=1e-4)


def test_group_index_first_group_wins(tripod: sf.Model) -> None:
    index, names = member_group_index(tripod)
    assert names == ["back leg", "front legs", "marked"]
    assert index.tolist() == [0, 1, 1]
    assert member_group_labels(tripod).tolist() == ["back leg;marked", "front legs",
                                                    "front legs;marked"]
    tripod.add_nodes([[5.0, 0.0, 0.0]])
    tripod.add_members([[3, 4]], area=AREA, E=E)
    assert member_group_index(tripod)[0][-1] == -1
    assert member_group_labels(tripod)[-1] == ""


def test_supported_nodes_include_springs(tripod: sf.Model) -> None:
    tripod.add_nodes([[5.0, 0.0, 0.0]])
    tripod.add_spring([4], kz=1e6)
    assert supported_nodes(tripod).tolist() == [0, 1, 2, 4]


def test_group_lookup_of_the_summary_equals_groups_of() -> None:
    # The summary finds a member's groups by binary search; it must list what
    # Model.groups_of lists, in the same order (unsorted ids, overlaps, none).
    from spaceframe.results.summary import _GroupsOf

    m = sf.Model()
    m.add_nodes(np.c_[np.arange(8.0), np.zeros(8), np.zeros(8)])
    m.add_members(np.c_[np.arange(7), np.arange(1, 8)], area=1e-4, E=200e9)
    m.add_group("b", [5, 1, 3])
    m.add_group("a", [3, 0])
    m.add_group("empty", np.zeros(0, dtype=int))
    look = _GroupsOf(m)
    for member in range(m.n_members):
        assert look(member) == m.groups_of(member), member
    assert look(3) == ["b", "a"] and look(6) == []


def test_top_pick_is_the_partition_pick() -> None:
    # _smallest skips the full partition when the pick is unique: it must give
    # exactly numpy's argpartition set, with or without ties at the k-th place.
    from spaceframe.results.summary import _smallest

    rng = np.random.default_rng(7)
    spread = rng.standard_normal(5000)
    steps = np.round(rng.standard_normal(5000), 1)  # many exact ties
    tied = spread.copy()
    tied[np.argsort(tied)[4:9]] = np.sort(tied)[4]  # five equal across 5th place
    nan = spread.copy()
    nan[::3] = np.nan
    for values in (spread, steps, tied, nan, np.zeros(5000), spread[:40]):
        for k in (1, 5, 40):
            expect = np.argpartition(values, k - 1)[:k]
            assert sorted(_smallest(values, k).tolist()) == sorted(expect.tolist())


def test_node_totals_equal_the_whole_array_sums() -> None:
    # Sums of the non-zero rows only must be the sums of every row, to the bit
    # (signed zeros included): the summary's JSON does not change.
    from spaceframe.results.summary import _node_totals

    rng = np.random.default_rng(3)
    f = np.zeros((3000, 3))
    rows = rng.choice(3000, 40, replace=False)
    f[rows] = rng.standard_normal((40, 3)) * 10.0 ** rng.integers(-6, 6, (40, 1))
    f[rows[:5], 0] = -0.0
    f[7] = -0.0
    dense = rng.standard_normal((3000, 3))
    for a in (f, -f, np.zeros((3000, 3)), -np.zeros((4, 3)), dense, np.asfortranarray(f),
              f[::2], np.zeros((0, 3))):
        loaded, total, ref = _node_totals(a)
        assert loaded == np.count_nonzero(np.any(a != 0.0, axis=1))
        expect = a.sum(axis=0)
        assert total.tobytes() == expect.tobytes()
        assert ref == float(np.abs(a).sum(axis=0).max(initial=0.0))


def test_critical_members_of_a_long_chain() -> None:
    # 2000 members in a line, forces 0..1999 kN with signs alternating and two
    # exact ties: the largest |N| first, ties by member id.
    b = 2000
    m = sf.Model()
    m.add_nodes(np.c_[np.arange(b + 1.0), np.zeros(b + 1), np.zeros(b + 1)])
    m.add_members(np.c_[np.arange(b), np.arange(1, b + 1)], area=AREA, E=E)
    t = np.arange(b) * 1e3 * np.where(np.arange(b) % 2, -1.0, 1.0)
    t[[17, 250]] = [-1998e3, 1998e3]  # tie with member 1998
    res = sf.CaseResult(name="c", kind="case", displacements=np.zeros((b + 1, 3)),
                        axial_forces=t, reactions=np.zeros((b + 1, 3)),
                        loads=np.zeros((b + 1, 3)), elongations=np.zeros(b), residual=0.0,
                        area=m.area)
    crit = critical_members(m, res, n=5)
    assert [c["member"] for c in crit] == [1999, 17, 250, 1998, 1997]
    assert [c["force"] for c in crit] == [-1999e3, -1998e3, 1998e3, 1998e3, -1997e3]
    t[40] = 1997e3  # a tie with member 1997, both in the six largest
    assert [c["member"] for c in critical_members(m, res, n=6)] == [1999, 17, 250, 1998,
                                                                     40, 1997]
