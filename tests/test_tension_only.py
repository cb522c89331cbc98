"""Tension-only members: active-set iteration, load sets solved directly, pretension.

Closed forms are plane statics of the braced panel (common practice): with the
compression diagonal slack, horizontal equilibrium of the top gives the
tension diagonal N = H d / L.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import spaceframe as sf

L, H_PANEL, EA = 4.0, 3.0, 210e9 * 5e-4
D = math.hypot(L, H_PANEL)


def _panel(tension_only: bool = True) -> sf.Model:
    """A pin-jointed square panel in the x-z plane with crossed diagonals."""
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [L, 0, 0], [0, 0, H_PANEL], [L, 0, H_PANEL]])
    m.add_members([[0, 2], [1, 3], [2, 3]], area=5e-3, E=210e9)
    m.add_members([[0, 3], [1, 2]], area=5e-4, E=210e9, group="braces")
    if tension_only:
        m.set_member_properties([3, 4], tension_only=True)
    m.add_support([0, 1])
    m.add_support([2, 3], x=False, y=True, z=False)
    m.add_load("push", 2, (10e3, 0.0, 0.0))
    m.add_load("pull", 2, (-10e3, 0.0, 0.0))
    return m


def test_compression_diagonal_goes_slack_and_the_other_carries_h_d_over_l():
    res = _panel().solve()
    push = res["push"]
    np.testing.assert_allclose(push.axial_forces[3], 10e3 * D / L, rtol=1e-9)
    assert push.axial_forces[4] == 0.0
    assert push.slack.tolist() == [False, False, False, False, True]
    pull = res["pull"]
    np.testing.assert_allclose(pull.axial_forces[4], 10e3 * D / L, rtol=1e-9)
    assert pull.slack.tolist() == [False, False, False, True, False]
    # Equilibrium is checked by every result; reactions balance the load.
    np.testing.assert_allclose(push.reactions.sum(axis=0), [-10e3, 0.0, 0.0], atol=1e-6)


def test_linear_bracing_shares_the_shear_between_both_diagonals():
    push = _panel(tension_only=False).solve()["push"]
    n3, n4 = push.axial_forces[3], push.axial_forces[4]
    # One in tension, one in compression; horizontal equilibrium of the top
    # (columns carry no shear): (N3 - N4) L / D = H (statics, common practice).
    assert n3 > 0 > n4
    assert (n3 - n4) * L / D == pytest.approx(10e3, rel=1e-9)
    assert push.slack is None


def test_combinations_are_solved_as_their_own_load_sets():
    m = _panel()
    m.add_combination("net", {"push": 1.0, "pull": 0.5})
    r = m.solve()["net"]
    # Net load +5 kN: one diagonal at 5 kN d/L, the other slack (not the sum of cases).
    np.testing.assert_allclose(r.axial_forces[3], 5e3 * D / L, rtol=1e-9)
    assert r.axial_forces[4] == 0.0 and r.slack[4]
    res = m.solve()
    superposed = res["push"].axial_forces + 0.5 * res["pull"].axial_forces
    assert not np.allclose(superposed, r.axial_forces)


def _cable_pair(load: float, pretension: float) -> sf.Model:
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [2, 0, 0], [4, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=5e-4, E=210e9)
    m.set_member_properties([0, 1], tension_only=True, pretension=pretension)
    m.add_support([0, 2])
    m.add_support([1], x=False)
    m.add_load("F", 1, (load, 0.0, 0.0))
    return m


def test_pretension_is_carried_and_shared_until_one_cable_goes_slack():
    # Two equal collinear cables pretensioned P: a load F along them makes
    # P + F/2 (the cable the load stretches) and P - F/2 while F < 2P; beyond,
    # the other is slack and the stretched one takes F
    # (statics and compatibility of two springs in series, common practice).
    r = _cable_pair(load=0.0, pretension=8e3).solve()["F"]
    np.testing.assert_allclose(r.axial_forces, [8e3, 8e3], rtol=1e-9)
    r = _cable_pair(load=6e3, pretension=8e3).solve()["F"]
    np.testing.assert_allclose(r.axial_forces, [11e3, 5e3], rtol=1e-9)
    r = _cable_pair(load=30e3, pretension=8e3).solve()["F"]
    np.testing.assert_allclose(r.axial_forces, [30e3, 0.0], rtol=1e-9, atol=1e-6)
    assert r.slack.tolist() == [False, True]
    # The node moves F/(EA/L) once the left cable is slack, less the pretension shortening.
    k = 210e9 * 5e-4 / 2.0
    assert r.displacements[1, 0] == pytest.approx((30e3 - 8e3) / k, rel=1e-9)


def test_slack_members_that_leave_a_mechanism_are_named():
    m = sf.Model()
    m.add_nodes([[0, 0, 0], [0, 0, 3.0]])
    m.add_members([[0, 1]], area=5e-4, E=210e9)
    m.set_member_properties([0], tension_only=True)
    m.add_support([0])
    m.add_support([1], z=False)
    m.add_load("down", 1, (0.0, 0.0, -1e3))
    with pytest.raises(sf.MechanismError, match=r"with members 0 slack .* case 'down'"):
        m.solve()


def test_cable_presets_give_breaking_force_and_modulus():
    from spaceframe.design.cables import cable_preset

    p = cable_preset("spiral-strand")
    # F_min = K d² R_r (the usual breaking-force form): 0.525 x 40² x 1570 N = 1.319 MN
    assert p.breaking_force(0.040) == pytest.approx(0.525 * 40.0**2 * 1570.0)
    assert p.E == 150e9  # EN 1993-1-11 Table B.2 (from memory)
    with pytest.raises(sf.ModelError, match="presets"):
        cable_preset("rope")


def _cable_on_spring(spring: bool) -> sf.Model:
    # A 2 m cable (EA/L = 1e7 N/m) from a support to a node held by springs of 1e6 N/m
    # (invented demo data); pushing the node puts the cable in compression.
    m = sf.Model()
    m.add_nodes([[0.0, 0.0, 0.0], [2.0, 0.0, 0.0]])
    m.add_members([[0, 1]], area=1e-4, E=200e9)
    m.set_member_properties([0], tension_only=True)
    m.add_support([0])
    if spring:
        m.add_spring([1], kx=1e6, ky=1e6, kz=1e6)
    else:
        m.add_support([1], x=False)
    m.add_load("push", [1], (-1e3, 0.0, 0.0))
    m.add_load("pull", [1], (1e3, 0.0, 0.0))
    return m


def test_every_member_slack_leaves_the_load_to_the_springs():
    # Closed form (common practice): with the cable slack the spring alone takes the
    # push, u = F / k; pulled, cable and spring act in parallel, u = F / (EA/L + k), and
    # each carries its stiffness' share.
    res = _cable_on_spring(True).solve()
    push, pull = res["push"], res["pull"]
    assert push.slack.tolist() == [True] and push.axial_forces.tolist() == [0.0]
    assert push.displacements[1, 0] == pytest.approx(-1e3 / 1e6, rel=1e-12)
    np.testing.assert_allclose(push.reactions[1], [1e3, 0.0, 0.0], rtol=1e-12, atol=0.0)
    assert push.residual <= 1e-15
    u = 1e3 / (1e7 + 1e6)
    assert pull.slack.tolist() == [False]
    assert pull.displacements[1, 0] == pytest.approx(u, rel=1e-12)
    assert pull.axial_forces[0] == pytest.approx(1e7 * u, rel=1e-12)


def test_every_member_slack_without_springs_is_a_mechanism_named():
    with pytest.raises(sf.MechanismError, match="node 1 is free along x with no spring"):
        _cable_on_spring(False).solve()
