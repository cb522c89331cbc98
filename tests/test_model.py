"""Model construction and the errors bad input must give."""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf


@pytest.fixture
def two_nodes() -> sf.Model:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [0, 1, 0]])
    return m


def test_ids_are_consecutive(two_nodes: sf.Model) -> None:
    np.testing.assert_array_equal(two_nodes.add_nodes([[0, 0, 1], [1, 1, 1]]), [3, 4])
    ids = two_nodes.add_members([[0, 1], [1, 2]], area=1e-4, E=2e11, group="top")
    np.testing.assert_array_equal(ids, [0, 1])
    np.testing.assert_array_equal(two_nodes.groups["top"], [0, 1])
    np.testing.assert_allclose(two_nodes.lengths, [1.0, np.sqrt(2)])
    assert two_nodes.members.dtype == np.int64 and two_nodes.nodes.shape == (5, 3)


@pytest.mark.parametrize(
    ("xyz", "match"),
    [
        ([[0, 0, np.nan]], r"coordinate z of new node 0 \(node id 3\) is nan"),
        ([[np.inf, 0, 0]], r"coordinate x of new node 0 \(node id 3\) is inf"),
        ([[0, 0]], r"expected \(k, 3\) coordinates, got shape \(1, 2\)"),
    ],
)
def test_bad_nodes(two_nodes: sf.Model, xyz: list[list[float]], match: str) -> None:
    with pytest.raises(sf.ModelError, match=match):
        two_nodes.add_nodes(xyz)
    assert two_nodes.n_nodes == 3  # nothing changed


@pytest.mark.parametrize(
    ("pairs", "kw", "match"),
    [
        ([[0, 7]], {}, r"member 0 refers to node 7, which does not exist"),
        ([[1, 1]], {}, r"member 0 runs from node 1 to itself"),
        ([[0, 1], [1, 0]], {}, r"member 1 duplicates member 0 \(both join nodes 0 and 1\)"),
        ([[0, 1]], {"area": 0.0}, r"area\[0\] = 0.0: must be a positive"),
        ([[0, 1]], {"E": -1.0}, r"E\[0\] = -1.0: must be a positive"),
        ([[0, 1], [1, 2]], {"area": [1e-4, 1e-4, 1e-4]}, r"expected a scalar or 2 values"),
        ([[0, 1, 2]], {}, r"expected \(k, 2\) node ids"),
    ],
)
def test_bad_members(two_nodes: sf.Model, pairs: list[list[int]], kw: dict[str, object],
                     match: str) -> None:
    args: dict[str, object] = {"area": 1e-4, "E": 2e11, **kw}
    with pytest.raises(sf.ModelError, match=match):
        two_nodes.add_members(pairs, **args)  # type: ignore[arg-type]
    assert two_nodes.n_members == 0


def test_zero_length_member() -> None:
    m = sf.Model()
    m.add_nodes([[1, 2, 3], [1, 2, 3]])
    with pytest.raises(sf.ModelError, match=r"member 0 between nodes 0 and 1 has zero length"):
        m.add_members([[0, 1]], area=1, E=1)


def test_duplicate_against_existing(two_nodes: sf.Model) -> None:
    two_nodes.add_members([[0, 1]], area=1e-4, E=2e11)
    with pytest.raises(sf.ModelError, match=r"member 1 duplicates member 0"):
        two_nodes.add_members([[1, 0]], area=1e-4, E=2e11)


def test_loads_and_supports_on_missing_nodes(two_nodes: sf.Model) -> None:
    with pytest.raises(sf.ModelError, match=r"add_load\('P'\): entry 1 refers to node 9"):
        two_nodes.add_load("P", [0, 9], (0, 0, -1))
    with pytest.raises(sf.ModelError, match=r"add_support: entry 0 refers to node -1"):
        two_nodes.add_support([-1])
    with pytest.raises(sf.ModelError, match=r"2 nodes but 3 force vectors"):
        two_nodes.add_load("P", [0, 1], np.zeros((3, 3)))
    with pytest.raises(sf.ModelError, match=r"component \(1,\) = nan is not finite"):
        two_nodes.add_load("P", [0], (0, np.nan, 0))


def test_unknown_case_in_combination(two_nodes: sf.Model) -> None:
    two_nodes.add_load("G", [0], (0, 0, -1))
    with pytest.raises(sf.ModelError, match=r"unknown load case 'Q' \(cases: G\)"):
        two_nodes.add_combination("ULS", {"G": 1.35, "Q": 1.5})


def test_settlement_only_in_restrained_directions(two_nodes: sf.Model) -> None:
    two_nodes.add_support([0], z=False)
    with pytest.raises(sf.ModelError, match="node 0 is not restrained along z"):
        two_nodes.add_settlement("S", [0], (0, 0, -0.01))


def test_unassigned_properties_rejected_at_solve(two_nodes: sf.Model) -> None:
    two_nodes.add_members([[0, 1]], group="chords")
    with pytest.raises(sf.ModelError, match=r"member 0 \(group 'chords'\) has no area"):
        two_nodes.solve()


def test_loads_add_up(two_nodes: sf.Model) -> None:
    two_nodes.add_load("P", [0, 0], (1.0, 2.0, 3.0))
    two_nodes.add_load("P", [0], (1.0, 0.0, 0.0))
    np.testing.assert_allclose(two_nodes.cases["P"].forces[0], [3.0, 4.0, 6.0])


def test_self_weight_half_to_each_end(two_nodes: sf.Model) -> None:
    two_nodes.add_members([[0, 1]], area=2e-3, E=2e11, density=7850.0)
    two_nodes.add_self_weight("G")
    # Half of rho A L g to each end (common practice for pin-jointed members).
    w = 7850.0 * 2e-3 * 1.0 * 9.80665
    np.testing.assert_allclose(two_nodes.cases["G"].forces[:2, 2], [-w / 2, -w / 2])


def test_exceptions_inherit_builtins() -> None:
    assert issubclass(sf.ModelError, ValueError)
    assert issubclass(sf.MechanismError, np.linalg.LinAlgError)
    assert issubclass(sf.ReadError, OSError)
    assert all(issubclass(e, sf.SpaceframeError) for e in
               (sf.ModelError, sf.MechanismError, sf.ReadError, sf.SolverError))


# --------------------------------------------- a model that cannot go stale
def _two_bars(rise: float = 1.0) -> sf.Model:
    """Two bars from (0,0,0) and (2,0,0) to an apex at (1,0,rise), load P down at the apex.

    Joint equilibrium at the apex (closed form, common practice): each bar carries
    N = -P / (2 sin θ), sin θ = rise / sqrt(1 + rise²).
    """
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, rise], [2, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=1e-4, E=210e9)
    m.add_support([0, 2])
    m.add_support([1], False, True, False)  # out of plane only
    m.add_load("P", [1], (0, 0, -1e3))
    return m


def _bar_force(rise: float, p: float = 1e3) -> float:
    return -p / (2 * rise / np.hypot(1.0, rise))


def test_geometry_cannot_be_changed_in_place_after_a_solve() -> None:
    m = _two_bars()
    m.solve()
    lengths = m.lengths.copy()
    with pytest.raises(ValueError, match="read-only"):
        m.nodes[1, 2] += 1.0
    with pytest.raises(ValueError, match="read-only"):
        m.members[0, 0] = 2
    np.testing.assert_array_equal(m.lengths, lengths)  # nothing changed


def test_assigned_geometry_is_seen_by_the_next_solve() -> None:
    m = _two_bars(rise=1.0)
    first = m.solve()["P"].axial_forces.copy()
    np.testing.assert_allclose(first, [_bar_force(1.0)] * 2, rtol=1e-12)
    _ = m.lengths, m.directions  # cached
    nodes = m.nodes.copy()
    nodes[1, 2] = 2.0
    m.nodes = nodes
    np.testing.assert_allclose(m.lengths, [np.sqrt(5.0)] * 2, rtol=1e-15)
    np.testing.assert_allclose(m.solve()["P"].axial_forces, [_bar_force(2.0)] * 2, rtol=1e-12)
    nodes[1, 2] = 3.0  # the caller's array is not the model's
    np.testing.assert_allclose(m.lengths, [np.sqrt(5.0)] * 2, rtol=1e-15)


def test_assigned_geometry_is_checked() -> None:
    m = _two_bars()
    with pytest.raises(sf.ModelError, match=r"nodes must be an \(n, 3\) float array"):
        m.nodes = np.zeros((3, 2))
    with pytest.raises(sf.ModelError, match="node 1: coordinate y is inf"):
        m.nodes = [[0, 0, 0], [1, np.inf, 1], [2, 0, 0]]
    with pytest.raises(sf.ModelError, match=r"members must be a \(b, 2\) integer array"):
        m.members = [[0.0, 1.0]]
    np.testing.assert_array_equal(m.nodes[1], [1, 0, 1])  # unchanged


def test_copies_and_pickles_stay_read_only() -> None:
    import copy
    import pickle

    m = _two_bars()
    for other in (copy.deepcopy(m), pickle.loads(pickle.dumps(m)), copy.copy(m)):
        assert not other.nodes.flags.writeable and not other.members.flags.writeable
        np.testing.assert_array_equal(other.nodes, m.nodes)


def test_results_own_their_areas() -> None:
    m = _two_bars()
    before = m.solve()["P"]
    stress = before.stress.copy()
    m.set_member_properties([0, 1], area=2e-4)
    m.area[0] = 4e-4  # in place, too
    np.testing.assert_array_equal(before.stress, stress)
    np.testing.assert_allclose(stress, [_bar_force(1.0) / 1e-4] * 2, rtol=1e-12)
    after = m.solve()["P"]
    np.testing.assert_allclose(after.stress, _bar_force(1.0) / np.array([4e-4, 2e-4]),
                               rtol=1e-12)


def test_solve_is_late_bound_and_a_function(monkeypatch: pytest.MonkeyPatch) -> None:
    import ast
    from pathlib import Path

    import spaceframe.model as model_module

    m = _two_bars()
    np.testing.assert_array_equal(sf.solve(m)["P"].axial_forces, m.solve()["P"].axial_forces)
    # The Model imports no analysis, not even inside a function: no import circle.
    tree = ast.parse(Path(model_module.__file__).read_text(encoding="utf-8"))
    imported = {n.module for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    imported |= {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    assert not {i for i in imported if i and i.startswith("spaceframe.analysis")}, imported
    monkeypatch.delitem(model_module.ANALYSES, "default")
    with pytest.raises(sf.ModelError, match="no analysis registered"):
        m.solve()


def test_write_error_at_the_root() -> None:
    assert issubclass(sf.WriteError, sf.SpaceframeError) and issubclass(sf.WriteError, OSError)
    assert str(sf.WriteError("out.vtu: disk full\nreally")) == "out.vtu: disk full\\nreally"
