"""Shared fixtures: small frames from published examples, built fresh per test."""

from __future__ import annotations

import numpy as np
import pytest

import spaceframe as sf


def ferreira_truss() -> sf.Model:
    """Four-bar space truss of Ferreira, MATLAB Codes for Finite Element
    Analysis (Springer 2010), §5.3: node 1 free, nodes 2-5 pinned, E = 210 GPa,
    A = 1e-4 m², Fy = -10 kN at node 1 (book node k is our node k - 1)."""
    m = sf.Model()
    m.add_nodes([[4, 4, 3], [0, 4, 0], [0, 4, 6], [4, 0, 3], [8, -1, 1]])
    m.add_members([[0, 1], [0, 2], [0, 3], [0, 4]], area=1e-4, E=210e9)
    m.add_support([1, 2, 3, 4])
    m.add_load("P", [0], (0.0, -10e3, 0.0))
    return m


def star_dome() -> sf.Model:
    """24-member star dome of Levy & Spillers, Analysis of Geometrically
    Nonlinear Structures, 2nd ed., §2.4.2 (inches, psi, lbf)."""
    m = sf.Model()
    a_in = np.deg2rad(np.arange(6) * 60.0)
    a_out = a_in + np.deg2rad(30.0)
    m.add_nodes([[0.0, 0.0, 3.2346]])
    inner = m.add_nodes(
        np.c_[9.8425 * np.cos(a_in), 9.8425 * np.sin(a_in), np.full(6, 2.4472)]
    )
    outer = m.add_nodes(np.c_[19.685 * np.cos(a_out), 19.685 * np.sin(a_out), np.zeros(6)])
    k = np.arange(6)
    pairs = np.concatenate(
        [
            np.c_[np.zeros(6, dtype=int), inner],
            np.c_[inner, inner[(k + 1) % 6]],
            np.c_[inner, outer[k]],
            np.c_[inner, outer[(k - 1) % 6]],
        ]
    )
    m.add_members(pairs, area=0.0155, E=30e6)
    m.add_support(outer)
    m.add_load("P", [0], (0.0, 0.0, -220.46))
    return m


@pytest.fixture
def ferreira() -> sf.Model:
    return ferreira_truss()


@pytest.fixture
def dome() -> sf.Model:
    return star_dome()


@pytest.fixture(params=["scipy", "pardiso"])
def backend(request: pytest.FixtureRequest) -> str:
    from spaceframe.solvers import available_backends

    if request.param not in available_backends():
        pytest.skip(f"{request.param} not installed")
    return str(request.param)


# A loaded tripod shared by the output tests (tables, summary, viewer, DXF):
# feet on a circle at 90°, 210° and 330°, members from the apex to each foot.
H_APEX, A_FOOT = 3.0, 2.0  # tripod height and foot radius, m
E, AREA = 210e9, 4e-4  # Pa, m²
W, H = 30e3, 6e3  # vertical and horizontal apex loads, N
L_LEG = float(np.hypot(H_APEX, A_FOOT))


def loaded_tripod(wind_case: str = "wind", density: float = 0.0) -> sf.Model:
    """The tripod with cases "snow" (W down at the apex), ``wind_case`` (H along +x)
    and the combination "snow+wind" = snow + 1.5 wind; no groups."""
    m = sf.Model()
    ang = np.deg2rad([90.0, 210.0, 330.0])
    feet = m.add_nodes(np.c_[A_FOOT * np.cos(ang), A_FOOT * np.sin(ang), np.zeros(3)])
    apex = m.add_nodes([[0.0, 0.0, H_APEX]])
    m.add_members(np.c_[np.repeat(apex, 3), feet], area=AREA, E=E, density=density)
    m.add_support(feet)
    m.add_load("snow", apex, (0.0, 0.0, -W))
    m.add_load(wind_case, apex, (H, 0.0, 0.0))
    m.add_combination("snow+wind", {"snow": 1.0, wind_case: 1.5})
    return m


def tripod_wind_forces() -> np.ndarray:
    """Leg forces under H along +x (closed form, joint equilibrium at the apex): the leg
    at 90° carries nothing, the leg at 210° +H L / (sqrt(3) a), the one at 330° the same
    in compression."""
    n = H * L_LEG / (np.sqrt(3.0) * A_FOOT)
    return np.array([0.0, n, -n])
