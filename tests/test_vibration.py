"""Natural frequencies against closed forms derived here (sources named beside each)."""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf
import spaceframe.analysis.eigen as eigen
from spaceframe.analysis.matrices import consistent_mass, lumped_mass

E, A, RHO = 210e9, 1e-3, 7850.0  # Pa, m², kg/m³


def axial_chain(n: int, L: float = 10.0, density: float = RHO) -> sf.Model:
    """A straight bar along x of n equal elements, node 0 fixed, free at the far end;
    every node held in y and z so that only axial motion is left."""
    m = sf.Model()
    m.add_nodes(np.c_[np.linspace(0.0, L, n + 1), np.zeros(n + 1), np.zeros(n + 1)])
    m.add_members(np.c_[np.arange(n), np.arange(1, n + 1)], area=A, E=E, density=density)
    m.add_support(np.arange(n + 1), x=False, y=True, z=True)
    m.add_support([0])
    return m


def test_mass_on_massless_bar(backend: str) -> None:
    # Closed form, single degree of freedom: f = sqrt(EA / (L M)) / (2π).
    L, M = 2.0, 500.0
    m = axial_chain(1, L=L, density=0.0)
    f = sf.natural_frequencies(m, n_modes=1, added_mass=np.array([0.0, M]), solver=backend)
    np.testing.assert_allclose(f.frequencies, [np.sqrt(E * A / (L * M)) / (2 * np.pi)],
                               rtol=1e-12)
    np.testing.assert_allclose(f.modes[0, 1], [1.0, 0.0, 0.0])
    assert f.total_mass == pytest.approx(M)
    # With the bar's own mass m_b: lumped adds m_b/2 at the end, consistent m_b/3
    # (Rayleigh's one-third rule for a spring's mass, exact for the linear-shape bar).
    m = axial_chain(1, L=L)
    mb = RHO * A * L
    for kind, share in (("lumped", 0.5), ("consistent", 1.0 / 3.0)):
        f = sf.natural_frequencies(m, n_modes=1, mass=kind, added_mass=[0.0, M])
        expected = np.sqrt(E * A / L / (M + share * mb)) / (2 * np.pi)
        np.testing.assert_allclose(f.frequencies, [expected], rtol=1e-12)


@pytest.mark.parametrize("n", [4, 12])
def test_fixed_free_bar_discrete_closed_forms(n: int) -> None:
    # Closed forms derived for a chain of n elements (k = EA/h, m_e = ρAh): a fixed-free
    # chain is half of a fixed-fixed chain of 2n elements in its symmetric modes, so
    # u_p = sin(p θ_j), θ_j = (2j - 1)π / (2n).  Lumped mass:
    # ω² = (2k/m_e)(1 - cos θ); consistent mass (m_e/6)[[2, 1], [1, 2]]:
    # ω² = (6k/m_e)(1 - cos θ)/(2 + cos θ).
    L = 10.0
    m = axial_chain(n, L=L)
    h = L / n
    k, me = E * A / h, RHO * A * h
    j = np.arange(1, min(n, 6) + 1)
    th = (2 * j - 1) * np.pi / (2 * n)
    lumped = np.sqrt(2 * k / me * (1 - np.cos(th))) / (2 * np.pi)
    consistent = np.sqrt(6 * k / me * (1 - np.cos(th)) / (2 + np.cos(th))) / (2 * np.pi)
    fl = sf.natural_frequencies(m, n_modes=j.size, mass="lumped")
    fc = sf.natural_frequencies(m, n_modes=j.size, mass="consistent")
    np.testing.assert_allclose(fl.frequencies, lumped, rtol=1e-10)
    np.testing.assert_allclose(fc.frequencies, consistent, rtol=1e-10)
    # Continuous bar, fixed-free: f_j = (2j - 1)/(4L) sqrt(E/ρ) (Blevins, Formulas for
    # Natural Frequency and Mode Shape, 1979, axial vibration of a uniform bar; from
    # memory, and the limit of the forms above).  Consistent mass bounds it from above,
    # lumped from below.
    exact = (2 * j - 1) / (4 * L) * np.sqrt(E / RHO)
    assert np.all(fc.frequencies > exact) and np.all(fl.frequencies < exact)


def test_convergence_to_continuous_bar() -> None:
    # Same source as above: f_1 = sqrt(E/ρ)/(4L); errors shrink as 1/n².
    L = 10.0
    exact = np.sqrt(E / RHO) / (4 * L)
    err = [sf.natural_frequencies(axial_chain(n, L), 1).frequencies[0] / exact - 1
           for n in (10, 20)]
    assert 0 < err[1] < err[0] / 3.5 and err[1] < 2e-3


def test_beaded_string_lateral_frequencies() -> None:
    # A chain under tension T, lateral stiffness from the geometric stiffness only,
    # masses m at the n - 1 inner nodes: Lagrange's beaded string,
    # ω_j = 2 sqrt(T / (m h)) sin(j π / (2n)) (Rayleigh, The Theory of Sound, vol. 1,
    # §120; from memory), tending to the taut string f_j = j/(2L) sqrt(T/μ).
    n, L, T, mu = 40, 8.0, 2e4, 3.0
    h = L / n
    m = sf.Model()
    m.add_nodes(np.c_[np.linspace(0.0, L, n + 1), np.zeros(n + 1), np.zeros(n + 1)])
    m.add_members(np.c_[np.arange(n), np.arange(1, n + 1)], area=A, E=E)
    m.add_support([0, n])
    m.add_support(np.arange(1, n), x=True, y=False, z=True)  # lateral y only
    added = np.full(n + 1, mu * h)
    f = sf.natural_frequencies(m, n_modes=5, mass="lumped", added_mass=added,
                               prestress=np.full(n, T))
    j = np.arange(1, 6)
    beads = 2 * np.sqrt(T / (mu * h * h)) * np.sin(j * np.pi / (2 * n)) / (2 * np.pi)
    np.testing.assert_allclose(f.frequencies, beads, rtol=1e-10)
    # Relative gap to the taut string: (jπ/2n)²/6, 0.64 % for j = 5.
    np.testing.assert_allclose(f.frequencies, j / (2 * L) * np.sqrt(T / mu), rtol=7e-3)
    # Without the prestress the chain is a mechanism, named by its nodes.
    with pytest.raises(sf.MechanismError) as info:
        sf.natural_frequencies(m, n_modes=2, added_mass=added)
    assert info.value.nodes.size > 0
    # Compressed instead of tensioned, it is unstable: no frequencies.
    with pytest.raises(sf.MechanismError, match="unstable under its prestress"):
        sf.natural_frequencies(m, n_modes=2, added_mass=added, prestress=np.full(n, -T))


@pytest.mark.parametrize(("e_scale", "rho_scale"), [(4.0, 1.0), (1.0, 9.0), (2.5, 0.4)])
def test_frequencies_scale_with_sqrt_E_over_rho(dome: sf.Model, e_scale: float,
                                                rho_scale: float) -> None:
    # Closed form: K scales with E and M with ρ, so every ω scales with sqrt(E/ρ).
    dome.set_member_properties(np.arange(dome.n_members), density=RHO)
    f0 = sf.natural_frequencies(dome, n_modes=5).frequencies
    dome.set_member_properties(np.arange(dome.n_members), E=dome.E * e_scale,
                               density=RHO * rho_scale)
    f1 = sf.natural_frequencies(dome, n_modes=5).frequencies
    np.testing.assert_allclose(f1, f0 * np.sqrt(e_scale / rho_scale), rtol=1e-9)


def test_lanczos_agrees_with_dense(monkeypatch: pytest.MonkeyPatch) -> None:
    from benchmarks.grids import double_layer_grid

    m = double_layer_grid(6, 6)
    dense = sf.natural_frequencies(m, n_modes=8, mass="lumped")
    monkeypatch.setattr(eigen, "DENSE_EIGEN_LIMIT", 0)
    sparse = sf.natural_frequencies(m, n_modes=8, mass="lumped")
    np.testing.assert_allclose(sparse.frequencies, dense.frequencies, rtol=1e-9)
    assert np.all(np.diff(sparse.frequencies) >= 0)
    np.testing.assert_allclose(np.linalg.norm(sparse.modes, axis=2).max(axis=1), 1.0)


def test_mass_from_load_case(ferreira: sf.Model) -> None:
    # Common practice: a permanent load's downward part over g becomes mass.  The
    # Ferreira truss's only load is horizontal (y): no mass, a counted note; then a
    # downward load W at node 0 gives the same frequencies as added mass W/g there.
    with pytest.raises(sf.ModelError, match="no mass"):
        sf.natural_frequencies(ferreira, n_modes=2, mass_from="P")
    W = 9.80665e3
    ferreira.add_load("G", [0], (0.0, 0.0, -W))
    ferreira.add_combination("1.35G", {"G": 1.35})
    f = sf.natural_frequencies(ferreira, n_modes=3, mass_from="1.35G")
    ref = sf.natural_frequencies(ferreira, n_modes=3, added_mass=[1.35e3, 0, 0, 0, 0])
    np.testing.assert_allclose(f.frequencies, ref.frequencies, rtol=1e-12)
    assert "common practice" in f.notes[0]
    with pytest.raises(sf.ModelError, match="no load case or combination named 'nope'"):
        sf.natural_frequencies(ferreira, mass_from="nope", added_mass=1.0)


def test_bad_input_one_line(ferreira: sf.Model) -> None:
    with pytest.raises(sf.ModelError, match="more modes than the 3 free"):
        sf.natural_frequencies(ferreira, n_modes=4, added_mass=1.0)
    with pytest.raises(sf.ModelError, match=r"added_mass\[2\] = -1.0"):
        sf.natural_frequencies(ferreira, n_modes=1, added_mass=[1.0, 1.0, -1.0, 0, 0])
    with pytest.raises(sf.ModelError, match="mass = 'heavy'"):
        sf.natural_frequencies(ferreira, n_modes=1, mass="heavy", added_mass=1.0)


def test_unsupported_frame_is_mechanism_not_zero_hertz(ferreira: sf.Model) -> None:
    ferreira.restraint[:] = False
    ferreira.add_support([1, 2])
    with pytest.raises(sf.MechanismError) as info:
        sf.natural_frequencies(ferreira, n_modes=2, added_mass=1.0)
    assert info.value.nodes.size > 0


def test_mass_matrices_total_and_blocks() -> None:
    # Consistent bar mass (ρAL/6)[[2I, I], [I, 2I]]: every row of a bar's matrix in one
    # direction sums to ρAL/2, the lumped value (closed form).
    members = np.array([[0, 1]])
    Mc = consistent_mass(members, 2, np.array([6.0])).toarray()
    np.testing.assert_allclose(Mc[:3, :3], 2.0 * np.eye(3))
    np.testing.assert_allclose(Mc[:3, 3:], 1.0 * np.eye(3))
    Ml = lumped_mass(members, 2, np.array([6.0]), added=np.array([1.0, 0.0])).toarray()
    np.testing.assert_allclose(np.diag(Ml), [4, 4, 4, 3, 3, 3])
    np.testing.assert_allclose(Mc.sum(axis=1), 3.0)
