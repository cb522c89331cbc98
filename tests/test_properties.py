"""Properties of linear elastic pin-jointed frames, checked on random frames.

The frames grow like a tetrahedral mast: three pinned base nodes, then each
new node joined to three earlier nodes that it does not lie in a plane with,
which makes the frame stable and statically determinate; extra members between
random pairs of nodes add states of self-stress and keep it stable.  The
checks are facts of linear elasticity and statics, each named where it is
used.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.spatial.transform import Rotation

import spaceframe as sf

#: Quick runs: each example is a frame of at most a few dozen members.
SETTINGS = settings(max_examples=30, deadline=None)

#: The properties are checked on SuperLU, which costs ~1 ms per frame this
#: small.  PARDISO has a fixed cost per factorisation (0.1-0.2 s with
#: pypardiso 0.4, most of it locating the MKL library), so it is compared
#: against SuperLU on fewer frames instead (test_backends_agree).
BACKEND = "scipy"

#: Smallest singular value accepted for the three unit vectors from a new
#: node to its parents: keeps every frame well conditioned (angles between a
#: node's members stay well away from coplanar).
MIN_SPREAD = 0.3
#: Nearest distance, m, a new node may come to an earlier one.
MIN_GAP = 0.8


@dataclass(frozen=True)
class Frame:
    """Recipe for a random frame, all of it drawn by hypothesis."""

    seed: int
    n_free: int
    n_extra: int


frames = st.builds(
    Frame,
    seed=st.integers(0, 2**32 - 1),
    n_free=st.integers(1, 8),
    n_extra=st.integers(0, 6),
)
determinate_frames = st.builds(Frame, seed=st.integers(0, 2**32 - 1),
                               n_free=st.integers(1, 10), n_extra=st.just(0))


def build_frame(recipe: Frame) -> sf.Model:
    """A stable frame from a recipe (test code: small, so plain loops are fine)."""
    rng = np.random.default_rng(recipe.seed)
    side = 4.0
    ang = np.deg2rad([90.0, 210.0, 330.0])
    xyz = [np.array([side * np.cos(a), side * np.sin(a), 0.0]) / np.sqrt(3) for a in ang]
    pairs: list[tuple[int, int]] = []
    for k in range(3, 3 + recipe.n_free):
        for _ in range(1000):
            parents = rng.choice(k, size=3, replace=False)
            centre = np.mean([xyz[p] for p in parents], axis=0)
            offset = rng.normal(size=3)
            offset[2] = abs(offset[2]) + 0.5
            p = centre + rng.uniform(1.5, 3.0) * offset / np.linalg.norm(offset)
            units = np.array([xyz[q] - p for q in parents])
            units /= np.linalg.norm(units, axis=1)[:, None]
            gap = min(np.linalg.norm(p - q) for q in xyz)
            if np.linalg.svd(units, compute_uv=False)[-1] >= MIN_SPREAD and gap >= MIN_GAP:
                break
        else:
            raise RuntimeError(f"no well-placed node {k} for seed {recipe.seed}")
        xyz.append(p)
        pairs += [(int(q), k) for q in parents]
    n = len(xyz)
    have = {tuple(sorted(pq)) for pq in pairs}
    candidates = [(i, j) for i in range(n) for j in range(i + 1, n)
                  if (i, j) not in have and not (i < 3 and j < 3)]
    extra = rng.permutation(len(candidates))[: recipe.n_extra]
    pairs += [candidates[int(c)] for c in extra]

    m = sf.Model()
    m.add_nodes(np.array(xyz))
    b = len(pairs)
    # Sections and materials vary member to member, so that indeterminate
    # frames share load by stiffness and not by a symmetry of the data.
    m.add_members(pairs, area=rng.uniform(5e-4, 5e-3, b), E=rng.uniform(70e9, 210e9, b))
    m.add_support([0, 1, 2])
    return m


def random_loads(model: sf.Model, seed: int) -> np.ndarray:
    """(n, 3) forces of order 10 kN on the free nodes, none on the pinned base."""
    f = np.random.default_rng(seed ^ 0x5EED).normal(scale=10e3, size=(model.n_nodes, 3))
    f[:3] = 0.0
    return f


@pytest.fixture(scope="module")
def make_frame() -> Callable[[Frame], sf.Model]:
    return build_frame


def _allclose(actual: np.ndarray, desired: np.ndarray, rtol: float) -> None:
    # Scaled absolute floor: members and dofs near zero otherwise defeat rtol.
    atol = rtol * float(np.abs(desired).max(initial=0.0))
    np.testing.assert_allclose(actual, desired, rtol=rtol, atol=atol)


def _solve(model: sf.Model, backend: str, forces: dict[str, np.ndarray]) -> sf.Results:
    for name, f in forces.items():
        model.add_load(name, np.arange(model.n_nodes), f)
    return model.solve(solver=backend)


@SETTINGS
@given(recipe=frames)
def test_equilibrium_and_residual(
    make_frame: Callable[[Frame], sf.Model], recipe: Frame
) -> None:
    m = make_frame(recipe)
    f = random_loads(m, recipe.seed)
    r = _solve(m, BACKEND, {"F": f})["F"]
    assert r.residual < 1e-9
    # Nodal equilibrium (statics), summed member by member without the
    # package's equilibrium matrix: sum of t c at each free node plus the load
    # is zero; at the pinned base it is the reaction.
    d = m.nodes[m.members[:, 1]] - m.nodes[m.members[:, 0]]
    length = np.linalg.norm(d, axis=1)
    c = d / length[:, None]
    net = f + r.reactions
    np.add.at(net, m.members[:, 0], r.axial_forces[:, None] * c)
    np.add.at(net, m.members[:, 1], -r.axial_forces[:, None] * c)
    np.testing.assert_allclose(net, 0.0, atol=1e-9 * np.abs(f).max())
    # Compatibility: t = EA/L times the elongation of the displaced end points.
    du = r.displacements[m.members[:, 1]] - r.displacements[m.members[:, 0]]
    _allclose(r.axial_forces, m.E * m.area / length * np.einsum("ij,ij->i", du, c), 1e-9)
    # Clapeyron's theorem: the work of the loads, f.u / 2, equals the strain
    # energy stored in the members, sum of t^2 L / (2 E A).
    work = 0.5 * float(np.sum(f * r.displacements))
    energy = 0.5 * float(np.sum(r.axial_forces**2 * length / (m.E * m.area)))
    assert work == pytest.approx(energy, rel=1e-9)


@SETTINGS
@given(recipe=frames, quat=st.lists(st.floats(-1, 1), min_size=4, max_size=4),
       shift=st.lists(st.floats(-500, 500), min_size=3, max_size=3))
def test_rigid_motion_of_the_geometry(
    make_frame: Callable[[Frame], sf.Model],
    recipe: Frame,
    quat: list[float],
    shift: list[float],
) -> None:
    q = np.array(quat)
    if np.linalg.norm(q) < 0.1:
        q = np.array([0.3, -0.2, 0.5, 0.8])
    R = Rotation.from_quat(q).as_matrix()  # scipy normalises the quaternion
    m1 = make_frame(recipe)
    f = random_loads(m1, recipe.seed)
    r1 = _solve(m1, BACKEND, {"F": f})["F"]

    # Frame indifference: the same frame, turned by R and shifted, with its
    # loads turned alike, carries the same member forces and its displacements
    # and reactions turn with it (pins restrain all three directions, so the
    # supports are unchanged by the rotation).
    m2 = sf.Model()
    m2.add_nodes(m1.nodes @ R.T + np.array(shift))
    m2.add_members(m1.members, area=m1.area, E=m1.E)
    m2.add_support(np.flatnonzero(m1.restraint.all(axis=1)))
    r2 = _solve(m2, BACKEND, {"F": f @ R.T})["F"]
    _allclose(r2.axial_forces, r1.axial_forces, 1e-8)
    _allclose(r2.displacements, r1.displacements @ R.T, 1e-8)
    _allclose(r2.reactions, r1.reactions @ R.T, 1e-8)


@SETTINGS
@given(recipe=frames, alpha=st.floats(-5, 5).filter(lambda a: abs(a) > 1e-3))
def test_superposition(
    make_frame: Callable[[Frame], sf.Model], recipe: Frame, alpha: float
) -> None:
    m = make_frame(recipe)
    fa = random_loads(m, recipe.seed)
    fb = random_loads(m, recipe.seed + 1)
    # Linearity: cases solved separately must add up, each scaled by its
    # factor, and a combination must equal the case of the summed loads.
    every = np.arange(m.n_nodes)
    for name, f in {"A": fa, "B": fb, "scaled": alpha * fa, "A+B": fa + fb}.items():
        m.add_load(name, every, f)
    m.add_combination("combo", {"A": 1.0, "B": 1.0})
    results = m.solve(solver=BACKEND)
    a, b = results["A"], results["B"]
    for field in ("displacements", "axial_forces", "reactions"):
        ra, rb = getattr(a, field), getattr(b, field)
        _allclose(getattr(results["scaled"], field), alpha * ra, 1e-9)
        _allclose(getattr(results["A+B"], field), ra + rb, 1e-9)
        _allclose(getattr(results["combo"], field), getattr(results["A+B"], field), 1e-9)


@SETTINGS
@given(recipe=frames, factor=st.floats(0.01, 100.0))
def test_displacements_scale_with_compliance(
    make_frame: Callable[[Frame], sf.Model], recipe: Frame, factor: float
) -> None:
    m1 = make_frame(recipe)
    m2 = make_frame(recipe)
    m2.set_member_properties(np.arange(m2.n_members), E=m1.E * factor)
    f = random_loads(m1, recipe.seed)
    r1 = _solve(m1, BACKEND, {"F": f})["F"]
    r2 = _solve(m2, BACKEND, {"F": f})["F"]
    # Scaling every E by a common factor scales K by it: u = K^-1 f shrinks by
    # the factor and the forces, set by stiffness ratios only, stay put.
    _allclose(r2.displacements, r1.displacements / factor, 1e-9)
    _allclose(r2.axial_forces, r1.axial_forces, 1e-9)


@pytest.mark.parametrize("recipes", [determinate_frames, frames], ids=["determinate", "any"])
@SETTINGS
@given(data=st.data())
def test_determinacy_counts(
    make_frame: Callable[[Frame], sf.Model], recipes: st.SearchStrategy[Frame],
    data: st.DataObject,
) -> None:
    recipe = data.draw(recipes, label="recipe")
    m = make_frame(recipe)
    d = sf.determinacy(m)
    # Extended Maxwell rule 3j - b - k = m - s (Calladine, Int. J. Solids
    # Struct. 14, 1978): the frame is stable, so each extra member is one
    # state of self-stress.
    n_extra = m.n_members - 3 * recipe.n_free  # beyond the three members of each new node
    assert d.mechanisms == 0
    assert d.self_stress == n_extra
    f = random_loads(m, recipe.seed)
    if n_extra:
        with pytest.raises(sf.ModelError, match="not statically determinate"):
            sf.solve_determinate(m, f)
        return
    assert d.statically_determinate
    # Maxwell's rule for a determinate frame: b = 3j - k (Maxwell, "On the
    # calculation of the equilibrium and stiffness of frames", Phil. Mag. 27, 1864).
    assert m.n_members == 3 * m.n_nodes - int(m.restraint.sum())
    t_statics = sf.solve_determinate(m, f)
    r = _solve(m, BACKEND, {"F": f})["F"]
    _allclose(r.axial_forces, t_statics, 1e-9)
    # Statics alone fixes the forces of a determinate frame: other sections
    # and materials leave them unchanged.
    rng = np.random.default_rng(recipe.seed)
    m.set_member_properties(np.arange(m.n_members), area=rng.uniform(1e-4, 1e-2, m.n_members),
                            E=rng.uniform(1e9, 300e9, m.n_members))
    _allclose(m.solve(solver=BACKEND)["F"].axial_forces, t_statics, 1e-9)


@SETTINGS
@given(recipe=frames, picks=st.tuples(st.integers(0, 10**6), st.integers(0, 10**6)))
def test_maxwell_betti_reciprocity(
    make_frame: Callable[[Frame], sf.Model],
    recipe: Frame,
    picks: tuple[int, int],
) -> None:
    m = make_frame(recipe)
    free = np.flatnonzero(~m.restraint.ravel())
    i, j = (int(free[p % free.size]) for p in picks)
    unit_i = np.zeros(3 * m.n_nodes)
    unit_i[i] = 1.0
    unit_j = np.zeros(3 * m.n_nodes)
    unit_j[j] = 1.0
    results = _solve(m, BACKEND, {"at i": unit_i.reshape(-1, 3), "at j": unit_j.reshape(-1, 3)})
    u_i = results["at i"].displacements.ravel()
    u_j = results["at j"].displacements.ravel()
    # Maxwell's reciprocal theorem (J. C. Maxwell, "On the calculation of the
    # equilibrium and stiffness of frames", Phil. Mag. 27, 1864; generalised
    # by E. Betti, "Teoria della elasticita", Il Nuovo Cimento 7-8, 1872): the
    # displacement at i due to a unit load at j equals the displacement at j
    # due to a unit load at i.
    assert u_j[i] == pytest.approx(u_i[j], rel=1e-9, abs=1e-9 * max(u_i[i], u_j[j]))
    # Betti's theorem for general loads: f1 . u2 = f2 . u1.
    f1, f2 = random_loads(m, recipe.seed), random_loads(m, recipe.seed + 7)
    both = _solve(m, BACKEND, {"f1": f1, "f2": f2})
    w12 = float(np.sum(f1 * both["f2"].displacements))
    w21 = float(np.sum(f2 * both["f1"].displacements))
    scale = float(np.sum(f1 * both["f1"].displacements))
    assert w12 == pytest.approx(w21, rel=1e-9, abs=1e-12 * scale)


@settings(max_examples=8, deadline=None,
          # `backend` is a function-scoped fixture, but only an immutable string.
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(recipe=frames)
def test_backends_agree(make_frame: Callable[[Frame], sf.Model], backend: str,
                        recipe: Frame) -> None:
    # SuperLU (scipy) serves as the reference for each back-end, PARDISO included.
    m = make_frame(recipe)
    f = random_loads(m, recipe.seed)
    ref = _solve(m, "scipy", {"F": f})["F"]
    r = m.solve(solver=backend)["F"]
    assert r.residual < 1e-9
    _allclose(r.displacements, ref.displacements, 1e-9)
    _allclose(r.axial_forces, ref.axial_forces, 1e-9)
    _allclose(r.reactions, ref.reactions, 1e-9)
