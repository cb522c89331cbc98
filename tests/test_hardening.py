"""Honest checks and scale-aware diagnoses: stability in `check`, settlement,
NaN and overflow in every self-check, bad API input, stiffness contrast and
large displacements."""

from __future__ import annotations

import json
import warnings
from fractions import Fraction
from pathlib import Path

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.analysis.stability import (
    check_stability,
    determinacy,
    full_stability,
    solve_determinate,
)
from spaceframe.analysis.static import _check_finite, check_equilibrium, reduced_system
from spaceframe.cli import main
from spaceframe.results.summary import support_counts, supports_text
from spaceframe.tolerances import MAX_STIFFNESS_RATIO

PYRAMID = """\
[geometry]
nodes = [[0,0,0],[10,0,0],[10,10,0],[0,10,0],[5,5,3]]
members = [[0,1],[1,2],[2,3],[3,0],[0,4],[1,4],[2,4],[3,4]]
[sections]
s = { shape = "bar", diameter = 0.05 }
[assign]
default = { section = "s", material = "steel" }
[[supports]]
nodes = { ids = [0] }
restrain = "pinned"
[[supports]]
nodes = { ids = [1] }
restrain = "yz"
[[supports]]
nodes = { ids = [2] }
spring = [0, 0, 2.0]
[loads.P]
[[loads.P.nodal]]
nodes = { ids = [4] }
force = [0, 0, -10]
"""


def pyramid_model() -> sf.Model:
    """The pyramid roof of PYRAMID through the API."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [10, 0, 0], [10, 10, 0], [0, 10, 0], [5, 5, 3]])
    m.add_members([[0, 1], [1, 2], [2, 3], [3, 0], [0, 4], [1, 4], [2, 4], [3, 4]],
                  area=2e-3, E=2.1e11)
    m.add_support([0])
    m.add_support([1], x=False)
    m.add_spring([2], (0, 0, 2e6))
    return m


def tripod() -> sf.Model:
    """Three legs from the ground to one apex: statically determinate."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [4, 0, 0], [0, 4, 0], [1, 1, 3]])
    m.add_members([[0, 3], [1, 3], [2, 3]], area=1e-3, E=2.1e11)
    m.add_support([0, 1, 2])
    return m


# ------------------------------------------------------------ check = run's test
def test_check_finds_the_mechanism_run_finds(tmp_path: Path,
                                             capsys: pytest.CaptureFixture[str]) -> None:
    toml = tmp_path / "pyramid.toml"
    toml.write_text(PYRAMID)
    # The cheap checks alone pass this frame; the rank says 2 mechanisms
    # (3j - k - r = 15 - 5 - 8, Pellegrino and Calladine 1986; the spring is
    # not a restraint in that count).
    assert determinacy(pyramid_model()).mechanisms == 2
    assert main(["check", str(toml)]) == 1
    err = capsys.readouterr().err
    assert "mechanism (singular stiffness): mode 1 moves node 2 (x), node 3 (x, z), " \
           "node 4 (y, z)" in err
    with pytest.raises(sf.MechanismError) as run_err:
        pyramid_model().solve()
    assert str(run_err.value) in err  # the same words as the run


def test_check_quick_says_so(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    toml = tmp_path / "pyramid.toml"
    toml.write_text(PYRAMID)
    assert main(["check", "--quick", str(toml)]) == 0
    out = capsys.readouterr().out
    assert "stability: quick checks only" in out
    assert "no mechanism found" not in out.replace("no mechanism found by them", "")


def test_check_json_stable_frame_full_test(tmp_path: Path,
                                           capsys: pytest.CaptureFixture[str]) -> None:
    # The same roof with node 3 on a vertical roller as well: 15 - 6 - 8 = 1
    # mechanism remains (rotation of the base about z is held only by the
    # roller at node 1), so pin node 3 in y too: then stable.
    toml = tmp_path / "pyramid2.toml"
    toml.write_text(PYRAMID + '[[supports]]\nnodes = { ids = [3] }\nrestrain = "xz"\n')
    assert main(["check", "--json", str(toml)]) == 0
    rep = json.loads(capsys.readouterr().out)
    assert rep["stable"] is True and rep["mechanism"] == ""


def test_full_stability_names_modes() -> None:
    with pytest.raises(sf.MechanismError, match=r"mode 1 moves node 2 \(x\)") as err:
        full_stability(pyramid_model())
    assert set(err.value.nodes.tolist()) == {2, 3, 4}
    full_stability(pyramid_model(), quick=True)  # cheap checks alone pass it


# ---------------------------------------------------------------- settlement
def test_settlement_of_determinate_tripod_gives_zero_forces(backend: str) -> None:
    m = tripod()
    m.add_settlement("S", [1], (0, 0, -0.010))
    m.add_load("P", [3], (2e3, -1e3, -30e3))
    m.add_combination("S+P", {"S": 1.0, "P": 1.35})
    res = m.solve(solver=backend)
    # A statically determinate frame follows a support settlement as a rigid
    # body: no member force and no reaction (common practice; Megson,
    # "Structural and Stress Analysis", 4th ed., ch. 16: self-straining
    # actions stress only statically indeterminate structures).
    np.testing.assert_array_equal(res["S"].axial_forces, 0.0)
    np.testing.assert_array_equal(res["S"].reactions, 0.0)
    assert res["S"].displacements[1, 2] == -0.010
    # The combination carries the load alone: forces from statics, A t = f.
    t_statics = solve_determinate(m, 1.35 * m.cases["P"].forces)
    np.testing.assert_allclose(res["S+P"].axial_forces, t_statics, rtol=1e-12)


def test_free_thermal_expansion_reports_exact_zero_forces(backend: str) -> None:
    # A wheel (rim and spokes, 1 state of self-stress) heated uniformly,
    # supported so that it may grow: it grows into a similar shape without
    # stress, every node moving radially by alpha dT r (common practice:
    # uniform heating of a freely supported frame).  Round-off of the forces
    # must come out as 0, not as forces of 1e-10 N.
    m = sf.Model()
    a = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    m.add_nodes(np.c_[20 * np.cos(a), 20 * np.sin(a), np.zeros(12)])
    m.add_nodes([[0, 0, 0]])
    rim = np.c_[np.arange(12), (np.arange(12) + 1) % 12]
    spokes = np.c_[np.arange(12), np.full(12, 12)]
    m.add_members(np.r_[rim, spokes], area=2e-3, E=2.1e11, alpha=1.2e-5)
    m.add_support(np.arange(13), x=False, y=False, z=True)
    m.add_support([12])
    m.add_support([0], x=False, y=True, z=True)
    m.add_temperature("T", np.arange(24), 40.0)
    r = m.solve(solver=backend)["T"]
    np.testing.assert_array_equal(r.axial_forces, 0.0)
    np.testing.assert_array_equal(r.reactions, 0.0)
    radial = np.einsum("ij,ij->i", r.displacements[:12, :2], m.nodes[:12, :2] / 20.0)
    np.testing.assert_allclose(radial, 1.2e-5 * 40.0 * 20.0, rtol=1e-12)


# --------------------------------------------------------- springs and counts
def test_add_spring_takes_array_likes() -> None:
    m = pyramid_model()  # add_spring([2], (0, 0, 2e6)) inside
    np.testing.assert_array_equal(m.springs[2], [0, 0, 2e6])
    m.add_spring([3, 4], [[1.0, 2.0, 3.0], [4.0, 5.0, 6.0]])
    np.testing.assert_array_equal(m.springs[3:], [[1, 2, 3], [4, 5, 6]])
    m.add_spring(np.array([0, 1]), kz=np.array([7.0, 8.0]))
    np.testing.assert_array_equal(m.springs[:2, 2], [7, 8])
    with pytest.raises(sf.ModelError, match="add_spring: give the stiffness either"):
        m.add_spring([1], (0, 0, 1.0), kz=2.0)
    with pytest.raises(sf.ModelError, match="add_spring: kx"):
        m.add_spring([1], "stiff")
    with pytest.raises(sf.ModelError, match=r"add_spring: 2 nodes but 3 stiffness rows"):
        m.add_spring([1, 2], np.ones((3, 3)))
    with pytest.raises(sf.ModelError, match="must not be negative"):
        m.add_spring([1], (0, -1.0, 0))


def test_add_support_takes_three_flags() -> None:
    m = tripod()
    m.add_nodes([[5, 5, 5]])
    m.add_support([4], (False, True, True))
    np.testing.assert_array_equal(m.restraint[4], [False, True, True])
    with pytest.raises(sf.ModelError, match="add_support: flag y is 'no'"):
        m.add_support([4], (True, "no", True))


def test_support_counts_include_springs_and_plurals() -> None:
    m = pyramid_model()
    counts = support_counts(m)
    assert counts == {"supported nodes": 3, "restrained directions": 5,
                      "sprung directions": 1}
    assert supports_text(counts) == "3 supported nodes, 5 restrained directions, " \
                                    "1 sprung direction"
    m.add_spring([3], kz=1e6)
    assert supports_text(support_counts(m)) == "4 supported nodes, 5 restrained " \
                                               "directions, 2 sprung directions"


def test_check_counts_a_node_on_a_spring(tmp_path: Path,
                                         capsys: pytest.CaptureFixture[str]) -> None:
    toml = tmp_path / "p.toml"
    toml.write_text(PYRAMID + "[[supports]]\nnodes = { ids = [3] }\nspring = [0, 0, 1.0]\n")
    main(["check", str(toml)])
    assert "supports: 4 supported nodes, 5 restrained directions, 2 sprung directions" \
        in capsys.readouterr().out


# ------------------------------------------------ NaN and overflow fail closed
def test_e_1e300_temperature_never_gives_nan(backend: str) -> None:
    m = tripod()
    m.set_member_properties([0, 1, 2], E=1e300, alpha=1.2e-5)
    m.add_temperature("T", [0], 30.0)
    res = m.solve(solver=backend)
    # Free thermal expansion of a determinate frame: no force, no reaction
    # (common practice, as for settlement above).
    r = res["T"]
    assert np.isfinite(r.residual) and r.residual <= 1e-8
    np.testing.assert_array_equal(r.axial_forces, 0.0)
    np.testing.assert_array_equal(r.reactions, 0.0)
    json.dumps({"residual": r.residual})  # what the CLI writes: no NaN to choke on


def test_overflowing_displacements_fail_closed() -> None:
    m = tripod()
    m.set_member_properties([0, 1, 2], E=1e-300)
    m.add_load("P", [3], (0, 0, -1e10))
    with pytest.raises(sf.SolverError, match="non-finite displacements") as err:
        m.solve()
    assert "\n" not in str(err.value)


def test_overflowing_combination_fails_closed() -> None:
    m = tripod()
    m.add_load("P", [3], (0, 0, -1e307))
    m.add_combination("big", {"P": 1e10})
    with pytest.raises(sf.SolverError, match="combination 'big': the solver returned "
                                             "non-finite"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", sf.SpaceframeWarning)
            m.solve()


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_equilibrium_check_fails_closed_on_non_finite_residual(bad: float) -> None:
    f3 = np.zeros((2, 3))
    with pytest.raises(sf.SolverError, match="residual is not a finite number"):
        check_equilibrium("case 'x'", np.array([bad, 0.0]), 1.0, f3, f3)


@pytest.mark.parametrize("scale", [np.nan, np.inf])
def test_equilibrium_check_fails_closed_on_non_finite_scale(scale: float) -> None:
    f3 = np.zeros((2, 3))
    with pytest.raises(sf.SolverError, match="residual is not a finite number"):
        check_equilibrium("case 'x'", np.array([1.0, 0.0]), scale, f3, f3)


def test_equilibrium_check_fails_closed_on_zero_scale_with_residual() -> None:
    f3 = np.zeros((2, 3))
    with pytest.raises(sf.SolverError, match="not a finite number"):
        check_equilibrium("case 'x'", np.array([1.0, 0.0]), 0.0, f3, f3)


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_balance_check_fails_closed(bad: float) -> None:
    f3 = np.zeros((2, 3))
    r3 = np.zeros((2, 3))
    r3[1, 2] = bad
    with pytest.raises(sf.SolverError, match="balance of loads and reactions is not a finite"):
        check_equilibrium("case 'x'", np.zeros(6), 1.0, f3, r3)


def test_balance_check_still_refuses_an_imbalance() -> None:
    f3 = np.array([[0, 0, -10.0], [0, 0, 0]])
    r3 = np.array([[0, 0, 9.0], [0, 0, 0]])
    with pytest.raises(sf.SolverError, match=r"do not balance the loads along z \(off by 1 N\)"):
        check_equilibrium("case 'x'", np.zeros(6), 10.0, f3, r3)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_solution_check_fails_closed(bad: float) -> None:
    u = np.zeros((4, 2))
    u[2, 1] = bad
    with pytest.raises(sf.SolverError, match="case 'b': the solver returned non-finite"):
        _check_finite(["a", "b"], u)


# --------------------------------------------------------------- bad API input
@pytest.mark.parametrize("xyz, needle", [
    ([[0, 0, 0], [1, 0]], "add_nodes: xyz: not a rectangular array"),
    ([["0", "0", "0"]], "add_nodes: xyz: expected real numbers, got text"),
    ([[0, 0, 1j]], "add_nodes: xyz: expected real numbers, got complex"),
    ([[0, None, 1]], "add_nodes: xyz: entry (0, 1) is None"),
    ([[True, False, True]], "add_nodes: xyz: expected real numbers, got boolean"),
])
def test_add_nodes_refuses_non_real_input(xyz: object, needle: str) -> None:
    m = sf.Model()
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no numpy ComplexWarning on the way
        with pytest.raises(sf.ModelError) as err:
            m.add_nodes(xyz)
    assert needle in str(err.value)
    assert m.n_nodes == 0


def test_loads_and_properties_refuse_strings_and_complex() -> None:
    m = tripod()
    with pytest.raises(sf.ModelError, match=r"add_load\('P'\): force: expected real numbers"):
        m.add_load("P", [3], ("1", "2", "3"))
    with pytest.raises(sf.ModelError, match="E: expected real numbers, got complex"):
        m.set_member_properties([0], E=2e11 + 1j)
    with pytest.raises(sf.ModelError, match="add_members: node ids must be integers"):
        m.add_members([["0", "3"]])
    with pytest.raises(sf.ModelError, match=r"add_load.*ids must be a 1-D list"):
        m.add_load("P", [[0, 1], [2]], (0, 0, 1))
    m.add_load("P", [3], (0, 0, -1))
    with pytest.raises(sf.ModelError, match=r"factor for 'P' is '1\.35', not a number"):
        m.add_combination("c", {"P": "1.35"})


def test_self_weight_and_panels_refuse_bad_values() -> None:
    m = tripod()
    m.set_member_properties([0, 1, 2], density=7850.0)
    with pytest.raises(sf.ModelError, match=r"g = -9\.81 m/s² must be positive"):
        m.add_self_weight("G", g=-9.81)
    with pytest.raises(sf.ModelError, match="factor: expected real numbers, got text"):
        m.add_self_weight("G", factor="1.1")
    assert "G" not in m.cases  # nothing changed
    with pytest.raises(sf.ModelError, match="add_panels: polygon 1: node ids must be integers"):
        m.add_panels([[0, 1, 2], ["0", "1", "3"]])
    with pytest.raises(sf.ModelError, match="add_panels: offsets must be integers"):
        m.add_panels_flat([0, 1, 2], [0.0, 3.0])
    assert m.n_panels == 0


def test_validate_catches_arrays_changed_after_add() -> None:
    m = tripod()
    m.add_load("P", [3], (0, 0, -1e3))
    m.solve()  # fills the cache of lengths
    # Geometry is read-only (in place it would leave cached lengths stale);
    # a new array is checked when it is assigned, and again by every solve.
    with pytest.raises(ValueError, match="read-only"):
        m.nodes[3, 2] = np.nan
    nodes = m.nodes.copy()
    nodes[3, 2] = np.nan
    with pytest.raises(sf.ModelError, match="node 3: coordinate z is nan"):
        m.nodes = nodes
    m = tripod()
    members = m.members.copy()
    members[1, 1] = 17
    m.members = members
    with pytest.raises(sf.ModelError, match="member 1 refers to node 17, which does not exist"):
        m.solve()
    m = tripod()
    nodes = m.nodes.copy()
    nodes[3] = nodes[0]  # member 0 now has zero length
    m.nodes = nodes
    with pytest.raises(sf.ModelError, match="member 0 between nodes 0 and 3 has zero length"):
        m.solve()
    m = tripod()
    m.E[2] = -1.0
    with pytest.raises(sf.ModelError, match=r"member 2: E = -1\.0 must be a positive"):
        m.solve()
    m = tripod()
    m.add_load("P", [3], (0, 0, -1e3))
    m.cases["P"].forces[3, 0] = np.inf
    with pytest.raises(sf.ModelError, match="load case 'P': forces of node 3 is not finite"):
        m.solve()
    m = tripod()
    m.groups["legs"] = np.array([0, 5])
    with pytest.raises(sf.ModelError, match="group 'legs': entry 1 refers to member 5"):
        m.solve()


# ------------------------------------------------------- scale-aware diagnoses
def test_huge_load_on_stable_frame_is_not_a_mechanism() -> None:
    m = tripod()
    m.add_load("P", [3], (0, 0, -1e303))  # 1e300 kN
    with pytest.warns(sf.SpaceframeWarning, match="geometrically nonlinear analysis"):
        res = m.solve()
    np.testing.assert_allclose(res["P"].axial_forces,
                               solve_determinate(m, m.cases["P"].forces), rtol=1e-12)


def test_tiny_modulus_gives_statics_not_a_false_geometry() -> None:
    m = tripod()
    m.set_member_properties([0, 1, 2], E=1e-300)
    m.add_load("P", [3], (0, 0, -1e3))
    with pytest.warns(sf.SpaceframeWarning, match="linear analysis is not valid"):
        res = m.solve()
    np.testing.assert_allclose(res["P"].axial_forces,
                               solve_determinate(m, m.cases["P"].forces), rtol=1e-12)


def test_tiny_modulus_mechanism_still_named_truthfully() -> None:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0.5, 1, 0], [1.5, 1, 0]])
    m.add_members([[0, 1], [1, 2], [0, 3], [1, 3], [1, 4], [2, 4], [3, 4]], area=1e-4, E=1e-300)
    m.add_support([0, 2])
    with pytest.raises(sf.MechanismError, match="all its members lie in the plane z = 0"):
        m.solve()


def box_frame(ratio: float) -> sf.Model:
    """A box: stiff chords in the plane z = 8, soft posts and diagonals below.

    Chords (members 0-5) have EA/L = ratio x that of every other member.
    Four ground nodes are pinned; the frame is stable and indeterminate.
    """
    m = sf.Model()
    top = m.add_nodes([[0, 0, 8], [6, 0, 8], [6, 4, 8], [0, 4, 8]])
    bot = m.add_nodes([[0, 0, 0], [6, 0, 0], [6, 4, 0], [0, 4, 0]])
    chords = [[0, 1], [1, 2], [2, 3], [3, 0], [0, 2], [1, 3]]
    posts = [[int(t), int(b)] for t, b in zip(top, bot, strict=True)]
    diags = [[0, 5], [1, 6], [2, 7], [3, 4], [1, 4], [2, 5], [3, 6], [0, 7]]
    m.add_members(chords + posts + diags, area=1e-3, E=2.1e11)
    k0 = 1e7
    k = np.full(m.n_members, k0)
    k[:6] = ratio * k0
    m.set_member_properties(np.arange(m.n_members), E=k * m.lengths / 1e-3)
    m.add_support(bot)
    m.add_load("P", [0, 2], [(5e3, 2e3, -20e3), (-1e3, 4e3, -10e3)])
    return m


def _exact_solution(m: sf.Model) -> np.ndarray:
    """Member forces from an exact rational solve of the same float64 stiffness.

    Gaussian elimination in fractions.Fraction (standard library; no
    arbitrary-precision solver is installed): a reference free of round-off
    for the system the solver was given.
    """
    K, free = reduced_system(m, "scipy")
    Kd = K.toarray()
    n = Kd.shape[0]
    a = [[Fraction(float(v)) for v in row] for row in Kd]
    b = [Fraction(float(v)) for v in m.cases["P"].forces.ravel()[free]]
    for i in range(n):
        for r in range(i + 1, n):
            if a[r][i] == 0:
                continue
            q = a[r][i] / a[i][i]
            a[r] = [x - q * y for x, y in zip(a[r], a[i], strict=True)]
            b[r] -= q * b[i]
    u = [Fraction(0)] * n
    for i in range(n - 1, -1, -1):
        u[i] = (b[i] - sum(a[i][j] * u[j] for j in range(i + 1, n))) / a[i][i]
    U = np.zeros(3 * m.n_nodes, dtype=object)
    U[:] = Fraction(0)
    U[free] = u
    U = U.reshape(-1, 3)
    t = []
    for e, (i, j) in enumerate(m.members):
        c = [Fraction(float(v)) for v in m.directions[e]]
        d = sum(c[a_] * (U[j, a_] - U[i, a_]) for a_ in range(3))
        t.append(float(Fraction(float(m.axial_stiffness[e])) * d))
    return np.array(t)


def test_stiffness_contrast_below_the_limit_solves(backend: str) -> None:
    m = box_frame(0.9 * MAX_STIFFNESS_RATIO)
    res = m.solve(solver=backend)  # no false "all its members lie in the plane z = 8"
    t_ref = _exact_solution(m)
    # Promise: forces good to about ratio x 1e-16 of the largest force.
    np.testing.assert_allclose(res["P"].axial_forces, t_ref,
                               atol=1e-5 * np.abs(t_ref).max())
    assert res["P"].residual <= 1e-8


def test_stiffness_contrast_above_the_limit_is_refused(backend: str) -> None:
    m = box_frame(3e12)
    with pytest.raises(sf.SolverError, match=r"ill-conditioned: stiffness ratio 3e\+12 between "
                                             r"member \d \(EA/L = 3e\+19 N/m\) and member \d+"):
        m.solve(solver=backend)


def test_stiff_chords_are_not_called_coplanar() -> None:
    # Chords 1e11 stiffer than the posts and diagonals below them: every top
    # node has members out of the plane z = 8, so no node may be said to have
    # "all its members in the plane z = 8"; the contrast itself is what is
    # refused, by name.
    m = box_frame(1e11)
    check_stability(m)  # the geometric checks find nothing: there is nothing
    with pytest.raises(sf.SolverError, match=r"ill-conditioned: stiffness ratio 1e\+11") as err:
        m.solve()
    assert "plane" not in str(err.value)


def test_check_reports_the_stiffness_contrast(tmp_path: Path) -> None:
    m = box_frame(3e12)
    with pytest.raises(sf.SolverError, match="ill-conditioned"):
        full_stability(m)


def test_near_collinear_members_warn_of_large_displacement() -> None:
    # Two bars 3e-5 rad from a straight line, loaded across it: stable in
    # theory, but the linear deflection is many times the span.
    h = 3e-5 * 5.0
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [5, 0, h], [10, 0, 0], [5, 1, h], [5, -1, h]])
    m.add_members([[0, 1], [1, 2], [1, 3], [1, 4]], area=1e-3, E=2.1e11)
    m.add_support([0, 2, 3, 4])
    m.add_load("P", [1], (0, 0, -10e3))
    with pytest.warns(sf.SpaceframeWarning, match=r"result 'P': largest displacement .* at "
                                                  r"node 1 .*geometrically nonlinear"):
        res = m.solve()
    # Statics of the two shallow bars: N = -P / (2 sin theta), compression
    # (common practice: the shallow two-bar arch, loaded at its crown).
    theta = np.arctan2(h, 5.0)
    np.testing.assert_allclose(res["P"].axial_forces[:2], -10e3 / (2 * np.sin(theta)),
                               rtol=1e-6)


def test_ordinary_frame_does_not_warn() -> None:
    m = tripod()
    m.add_load("P", [3], (0, 0, -30e3))
    with warnings.catch_warnings():
        warnings.simplefilter("error", sf.SpaceframeWarning)
        m.solve()


def test_check_reports_determinacy_counts(tmp_path: Path, capsys) -> None:
    """A tripod pinned at three feet is statically determinate: b = 3j - k (Maxwell's rule,
    3 bars, 1 free node, 9 restraints at 3 pinned nodes of 4): 0 mechanisms, 0 self-stress."""
    from spaceframe.cli import main

    (tmp_path / "t.toml").write_text(
        '[geometry]\nnodes = [[0, 0, 0], [2, 0, 0], [1, 1.7, 0], [1, 0.6, 2]]\n'
        'members = [[0, 3], [1, 3], [2, 3]]\n'
        '[sections]\ns = { shape = "chs", diameter = 0.06, thickness = 0.004 }\n'
        '[assign]\ndefault = { section = "s", material = "S355" }\n'
        '[[supports]]\nnodes = [0, 1, 2]\nrestrain = "pinned"\n', encoding="utf-8")
    assert main(["check", str(tmp_path / "t.toml")]) == 0
    out = capsys.readouterr().out
    assert "determinacy: 0 mechanisms, 0 states of self-stress" in out
