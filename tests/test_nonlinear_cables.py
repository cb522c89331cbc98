"""Large-displacement analysis with pretension and tension-only members.

Reference values come from closed forms derived in each test's docstring for
the co-rotational bar with engineering strain, N = EA (l - L0)/L0, whose
unstressed length with a pretension P (tension in the drawn length L) is
L0 = L EA/(EA + P) so that N = P at l = L; or from the linear active-set
analysis of the same model (``Model.solve``).  Statics of straight and
taut cables: common practice.
"""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf
from spaceframe.errors import MechanismError, ModelError

E, AREA = 210e9, 1.0e-4
EA = E * AREA
P = 1.0e4  # N, pretension


def series_pair(pre: tuple[float, float], load: float) -> sf.Model:
    """Two tension-only bars 0-1-2 along x, ends held, the middle node free along x only."""
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [1.0, 0, 0], [2.0, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=AREA, E=E)
    m.set_member_properties([0, 1], tension_only=True, pretension=np.array(pre))
    m.add_support([0, 2])
    m.add_support([1], x=False, y=True, z=True)
    m.add_load("F", [1], (load, 0.0, 0.0))
    return m


def test_series_pair_shares_the_load_until_one_goes_slack() -> None:
    """Pretensioned pair in series, loaded along its axis at the joint.

    Both bars stay on the x axis (straight), so the engineering-strain forces
    are exact and linear in the joint displacement u:
    N_a = EA (L + u - L0)/L0 = P + EA u/L0 and N_b = P - EA u/L0 (using
    EA (L - L0)/L0 = P).  Joint equilibrium N_a - N_b = F gives
    N_a = P + F/2, N_b = P - F/2, u = F L0/(2 EA) while F <= 2P; beyond that
    bar b is slack, N_a = F and u = (F - P) L0/EA.
    """
    f0 = 3.0 * P
    path = sf.solve_nonlinear(series_pair((P, P), f0), "F", max_load_factor=1.0)
    F = path.load_factors * f0
    L0 = 1.0 * EA / (EA + P)
    taut = F <= 2 * P
    na = np.where(taut, P + F / 2, F)
    nb = np.where(taut, P - F / 2, 0.0)
    np.testing.assert_allclose(path.axial_forces[:, 0], na, rtol=0, atol=1e-7 * P)
    np.testing.assert_allclose(path.axial_forces[:, 1], nb, rtol=0, atol=1e-7 * P)
    u = np.where(taut, F * L0 / (2 * EA), (F - P) * L0 / EA)
    np.testing.assert_allclose(path.displacements[:, 1, 0], u, rtol=1e-7, atol=1e-15)
    # Step 0 is the drawn, prestressed state.
    assert path.load_factors[0] == 0.0
    np.testing.assert_allclose(path.axial_forces[0], [P, P], rtol=1e-12)
    np.testing.assert_allclose(path.displacements[0], 0.0, atol=0)
    # Slack flags: bar b exactly where its closed-form force would be negative.
    assert path.slack.shape == (path.n_steps, 2)
    np.testing.assert_array_equal(path.slack[:, 1], F > 2 * P * (1 + 1e-9))
    assert not path.slack[:, 0].any()
    assert path.slack[-1, 1] and path.load_factors[-1] == 1.0
    # Reactions: the left support takes -N_a, the right one +N_b along x.
    np.testing.assert_allclose(path.reactions[-1, 0, 0], -f0, rtol=1e-9)
    np.testing.assert_allclose(path.reactions[-1, 2, 0], 0.0, atol=1e-6 * P)


def test_pretension_that_does_not_balance_is_refused() -> None:
    """Unequal pretensions in series leave the joint P out of balance in the drawn state."""
    with pytest.raises(ModelError, match="not self-equilibrated"):
        sf.solve_nonlinear(series_pair((P, 2 * P), 1.0), "F")


def midspan_cable(load: float, pre: float = P) -> sf.Model:
    """A cable of span 2a between two pinned supports, node 1 at midspan, load along -z."""
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [A, 0, 0], [2 * A, 0, 0]])
    m.add_members([[0, 1], [1, 2]], area=AREA, E=E)
    m.set_member_properties([0, 1], tension_only=True, pretension=pre)
    m.add_support([0, 2])
    m.add_load("W", [1], (0.0, 0.0, -load))
    return m


A = 1.0  # m, half span


def cable_load(w: np.ndarray) -> np.ndarray:
    """Midspan load of the pretensioned cable at midspan sag w (exact, engineering strain).

    Each half, of drawn length a and unstressed length L0 = a EA/(EA + P),
    runs straight from its support to the sagged node: length
    l = sqrt(a² + w²), force N = EA (l - L0)/L0 along it.  Vertical
    equilibrium of the node: F = 2 N w/l.  For small w, N -> P and l -> a:
    F = 2 P w/a to first order (the taut-string stiffness 2P/a; common
    practice).
    """
    L0 = A * EA / (EA + P)
    length = np.hypot(A, w)
    return 2.0 * EA * (length - L0) / L0 * w / length


def test_pretensioned_cable_follows_the_exact_taut_cable_curve() -> None:
    f0 = 5.0e4  # large: the sag stretches the cable well beyond its pretension
    path = sf.solve_nonlinear(midspan_cable(f0), "W", max_load_factor=1.0)
    w = -path.displacements[:, 1, 2]
    np.testing.assert_allclose(path.load_factors * f0, cable_load(w), rtol=0, atol=1e-7 * f0)
    # The forces along the way: N = EA (l - L0)/L0 in both halves.
    L0 = A * EA / (EA + P)
    n_exact = EA * (np.hypot(A, w) - L0) / L0
    np.testing.assert_allclose(path.axial_forces, np.column_stack([n_exact, n_exact]),
                               rtol=1e-8)
    assert w[-1] > 0.05 and path.axial_forces[-1, 0] > 5 * P  # really large displacement
    assert not path.slack.any()
    np.testing.assert_allclose(path.displacements[:, 1, :2], 0.0, atol=1e-12)


def test_pretensioned_cable_small_load_has_the_taut_string_stiffness() -> None:
    """F = 2 P w/a to first order in w (``cable_load``); here w/a ~ 5e-5.

    The residual is relative to the member forces (~P), not to the 1 N load,
    so the tolerance is tightened for the exact check against ``cable_load``.
    """
    f0 = 1.0
    path = sf.solve_nonlinear(midspan_cable(f0), "W", max_load_factor=1.0, tolerance=1e-12)
    w = -path.displacements[-1, 1, 2]
    assert w == pytest.approx(f0 * A / (2 * P), rel=1e-4)
    assert path.load_factors[-1] * f0 == pytest.approx(float(cable_load(np.array(w))), rel=1e-7)


def test_cable_without_pretension_is_still_a_mechanism() -> None:
    """Straight and unstressed, the midspan node has no lateral stiffness at all."""
    with pytest.raises(MechanismError, match="give the cables a pretension") as info:
        sf.solve_nonlinear(midspan_cable(1.0, pre=0.0), "W")
    assert 1 in info.value.nodes.tolist()  # the midspan node, still named


def braced_panel(load: float) -> sf.Model:
    """A square panel in the x-z plane, pinned at its feet, with two tension-only diagonals."""
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [3.0, 0, 0], [3.0, 0, 3.0], [0.0, 0, 3.0]])
    m.add_members([[0, 3], [1, 2], [3, 2], [0, 2], [1, 3]], area=AREA, E=E)
    m.set_member_properties([3, 4], tension_only=True)
    m.add_support([0, 1])
    m.add_support([2, 3], x=False, y=True, z=False)  # in plane
    m.add_load("H", [3], (load, 0.0, 0.0))
    return m


def test_braced_panel_matches_the_linear_active_set_for_a_small_load() -> None:
    """For a small load the geometric change is negligible (u/L ~ 1e-7), so the
    large-displacement forces equal the linear active-set ones (spaceframe's
    own tension-only analysis) to ~1e-6 relative, with the same diagonal slack."""
    f0 = 1.0
    m = braced_panel(f0)
    lin = m.solve()["H"]
    path = sf.solve_nonlinear(braced_panel(f0), "H", max_load_factor=1.0)
    assert lin.slack is not None and lin.slack.sum() == 1
    np.testing.assert_array_equal(path.slack[-1], lin.slack)
    np.testing.assert_allclose(path.axial_forces[-1], lin.axial_forces, rtol=0,
                               atol=1e-6 * f0)
    # The taut diagonal carries the shear: F sqrt(2) (statics of the panel).
    taut = 3 + int(np.flatnonzero(~lin.slack[3:])[0])
    assert path.axial_forces[-1, taut] == pytest.approx(f0 * np.sqrt(2), rel=1e-6)


# Cable 0-1 along x from a node on two springs: slack first, taut later.
B, KX, KY, FX, PY = 1.0, 1.0e5, 1.0e4, 1.0e3, 1.0e3


def sprung_cable() -> sf.Model:
    """Node 0 at the origin on springs kx, ky (z held), a tension-only cable to node 1 at (b, 0, 0).

    Node 1 is pinned; the load (Fx, Py) acts at node 0.
    """
    m = sf.Model()
    m.add_nodes([[0.0, 0, 0], [B, 0, 0]])
    m.add_members([[0, 1]], area=AREA, E=E)
    m.set_member_properties([0], tension_only=True)
    m.add_support([1])
    m.add_support([0], x=False, y=False, z=True)
    m.add_spring([0], kx=KX, ky=KY)
    m.add_load("F", [0], (FX, PY, 0.0))
    return m


def test_cable_pushed_slack_is_pulled_taut_by_the_sideways_sway() -> None:
    """The load (Fx, Py) moves the node towards the anchor (shortening the cable)
    and sideways (lengthening it to second order).

    While slack the springs alone carry the load, exactly: u = lambda Fx/kx,
    v = lambda Py/ky (springs keep their global directions).  The cable's
    length is then sqrt((b - u)² + v²), back to its unstressed length b when
    v² = 2 b u - u², i.e. at

        lambda* = 2 b (Fx/kx) / ((Fx/kx)² + (Py/ky)²)

    (derived here).  Below lambda* the cable is slack, above it taut (at step
    0 it carries N = 0 and counts as taut).  Once taut the node balances springs,
    load and N = EA (l - b)/b along the cable, checked from the traced positions.
    """
    ux, vy = FX / KX, PY / KY
    lam_star = 2 * B * ux / (ux**2 + vy**2)
    path = sf.solve_nonlinear(sprung_cable(), "F", max_load_factor=2 * lam_star)
    lam = path.load_factors
    assert lam[-1] == 2 * lam_star
    clear = np.abs(lam - lam_star) > 1e-6 * lam_star
    np.testing.assert_array_equal(path.slack[clear, 0], (lam > 0)[clear] & (lam < lam_star)[clear])
    assert path.slack[:, 0].any() and not path.slack[-1, 0]
    slack = path.slack[:, 0]
    np.testing.assert_allclose(path.displacements[slack, 0, :2],
                               np.column_stack([lam * ux, lam * vy])[slack], rtol=1e-9)
    np.testing.assert_array_equal(path.axial_forces[slack, 0], 0.0)
    # Taut: the cable carries N = EA (l - b)/b and the node balances.
    u, v = path.displacements[:, 0, 0], path.displacements[:, 0, 1]
    ell = np.hypot(B - u, v)
    n_cable = np.where(ell > B, EA * (ell - B) / B, 0.0)
    np.testing.assert_allclose(path.axial_forces[:, 0], n_cable, rtol=1e-9, atol=1e-9 * FX)
    np.testing.assert_allclose(lam * FX - KX * u + n_cable * (B - u) / ell, 0.0,
                               atol=1e-8 * FX)
    np.testing.assert_allclose(lam * PY - KY * v - n_cable * v / ell, 0.0, atol=1e-8 * FX)
    assert path.axial_forces[-1, 0] > 0.1 * FX
    # Just short of lambda* the cable is still slack, just past it taut.
    for stop, slack_end in ((0.999, True), (1.001, False)):
        end = sf.solve_nonlinear(sprung_cable(), "F", max_load_factor=stop * lam_star)
        assert end.slack[-1, 0] == slack_end
        assert end.slack[1:-1, 0].all()
