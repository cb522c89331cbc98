"""Results held compactly: reactions at the held nodes, sparse loads, elongations A^T u.

Check values: a pinned-base grid of vertical posts under point loads, where
each post carries exactly the load on its top (method of joints, common
practice), and elongations u_top - u_base of the posts (vertical members);
the model data are invented.
"""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.io import tables
from spaceframe.results.static import LinearElongations, NodeRows

E, AREA, H = 200e9, 1e-3, 4.0


def _posts(k: int = 12) -> tuple[sf.Model, np.ndarray, np.ndarray]:
    # k vertical posts on pinned feet, their tops held sideways (x, y) and
    # joined by a chain of horizontal members, which then carry nothing.
    m = sf.Model()
    xs = np.arange(k, dtype=float) * 3.0
    feet = m.add_nodes(np.c_[xs, np.zeros(k), np.zeros(k)])
    tops = m.add_nodes(np.c_[xs, np.zeros(k), np.full(k, H)])
    m.add_members(np.c_[feet, tops], area=AREA, E=E)
    m.add_members(np.c_[tops[:-1], tops[1:]], area=AREA, E=E)
    m.add_support(feet)  # pinned
    m.add_support(tops, True, True, False)
    return m, feet, tops


def test_point_loads_and_reactions_are_held_at_their_nodes_and_read_back_in_full() -> None:
    m, feet, tops = _posts()
    for j, t in enumerate(tops):
        m.add_load(f"p{j}", [t], (0.0, 0.0, -1.0e3 * (j + 1)))
    m.add_load("all", tops, (0.0, 0.0, -1.0e3))  # every top loaded: a dense array
    res = m.solve()
    for j, t in enumerate(tops):
        r = res[f"p{j}"]
        held_loads, held_reactions = r.__dict__["_loads"], r.__dict__["_reactions"]
        assert isinstance(held_loads, NodeRows) and held_loads.rows.tolist() == [t]
        assert isinstance(held_reactions, NodeRows)
        full = r.loads
        assert full.shape == (m.n_nodes, 3)
        assert full[t, 2] == -1.0e3 * (j + 1) and np.count_nonzero(full) == 1
        # The load goes straight down its post (statics of the joint): the post
        # carries it all, and the reaction under it balances it, to round-off.
        post = int(np.flatnonzero((m.members == [feet[j], t]).all(axis=1))[0])
        assert r.axial_forces[post] == pytest.approx(-1.0e3 * (j + 1), rel=1e-9)
        assert r.reactions[feet[j], 2] == pytest.approx(1.0e3 * (j + 1), rel=1e-9)
        assert r.reactions.shape == (m.n_nodes, 3)
        np.testing.assert_allclose(r.reaction_total, -r.applied_total, rtol=1e-12, atol=1e-9)
        # Changing the array read changes nothing held: each read is a new array.
        full[t, 2] = 0.0
        assert r.loads[t, 2] == -1.0e3 * (j + 1)
    dense = res["all"].__dict__["_loads"]
    assert isinstance(dense, np.ndarray)  # more than one node in four loaded
    # The non-zero rows read from what is held equal those of the full arrays.
    for r in (res["p3"], res["all"]):
        for name in ("loads", "reactions"):
            full = getattr(r, name)
            rows, values = r.nonzero_rows(name)
            np.testing.assert_array_equal(rows, np.flatnonzero(full.any(axis=1)))
            np.testing.assert_array_equal(values, full[rows])
    assert res["p3"].nonzero_rows("loads")[0].tolist() == [tops[3]]


def test_linear_elongations_are_a_transpose_u_and_survive_results_npz(tmp_path) -> None:  # type: ignore[no-untyped-def]
    m, feet, tops = _posts()
    m.add_load("p", [tops[3]], (0.0, 0.0, -5.0e3))
    m.add_temperature("warm", list(range(m.n_members)), 20.0)
    res = m.solve()
    for name in res:
        r = res[name]
        assert isinstance(r.__dict__["_elongations"], LinearElongations)
        u = r.displacements
        # A vertical post stretches by u_z(top) - u_z(foot): the definition.
        for j in range(len(tops)):
            assert r.elongations[j] == pytest.approx(u[tops[j], 2] - u[feet[j], 2],
                                                     rel=1e-12, abs=1e-18)
    # The file still holds every elongation, and reads back exactly.
    tables.write_arrays(tmp_path, res)
    with np.load(tmp_path / "results.npz") as z:
        np.testing.assert_array_equal(z["elongations"], np.stack([res[n].elongations for n in res]))
        np.testing.assert_array_equal(z["reactions"][0], res["p"].reactions[z["reaction_nodes"]])
    back = tables.read_arrays(tmp_path / "results.npz", m)
    for name in res:
        np.testing.assert_array_equal(back[name].elongations, res[name].elongations)
        np.testing.assert_array_equal(back[name].reactions, res[name].reactions)
        np.testing.assert_array_equal(back[name].loads, res[name].loads)


def test_cases_solved_through_one_work_array_keep_their_own_loads(
        monkeypatch: pytest.MonkeyPatch) -> None:
    from spaceframe.analysis import static

    # Blocks of 4 columns solved 8 at a time: 30 cases pass through the work
    # array of loads four times over; each result must keep its own loads, and
    # each combination the sum of its cases' (superposition, common practice).
    monkeypatch.setattr(static, "_RECOVER_BLOCK", 4)
    monkeypatch.setattr(static, "_SOLVE_COLUMNS", 8)
    monkeypatch.setattr(static, "_SOLVE_BYTES", 2**40)  # the columns, not the bytes, decide
    m, _, tops = _posts()
    rng = np.random.default_rng(9)
    for j in range(30):
        if j % 7 == 0:  # every top loaded: kept as a dense copy
            m.add_load(f"c{j}", tops, (0.0, 0.0, -100.0 * (j + 1)))
        else:
            m.add_load(f"c{j}", [tops[j % len(tops)]], (0.0, 0.0, -1.0e3 * (j + 1)))
    factors = {f"c{j}": float(rng.uniform(0.5, 1.5)) for j in range(0, 30, 3)}
    m.add_combination("ULS", factors)
    m.add_combination("first and last", {"c0": 1.35, "c29": 1.5})
    res = m.solve()
    for j in range(30):
        np.testing.assert_array_equal(res[f"c{j}"].loads, m.cases[f"c{j}"].forces)
    want = sum(f * m.cases[c].forces for c, f in factors.items())
    np.testing.assert_allclose(res["ULS"].loads, want, rtol=1e-15, atol=1e-9)
    np.testing.assert_allclose(res["first and last"].loads,
                               1.35 * m.cases["c0"].forces + 1.5 * m.cases["c29"].forces,
                               rtol=1e-15, atol=1e-9)
    # And each combination's forces are its cases' forces combined.
    np.testing.assert_allclose(
        res["ULS"].axial_forces, sum(f * res[c].axial_forces for c, f in factors.items()),
        rtol=1e-9, atol=1e-6)
