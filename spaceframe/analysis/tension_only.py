"""Tension-only members (cables, slender braces): an active-set iteration per load set.

A member marked tension-only carries no compression.  Because which members
go slack depends on the whole load, superposition no longer holds: every load
case and every combination is solved as its own factored load set.  Per set:

1. solve with every member that is not slack (linear statics);
2. a tension-only member whose force is compressive goes slack (leaves the
   set); a slack member whose elastic elongation A^T u - e0 has turned
   positive comes back;
3. repeat until the set does not change.  A set met twice means the
   iteration cycles: no consistent set is reported, never a guess.

Pretension P of a member (its tension in the drawn, straight geometry) enters
each load set once as the initial strain -P/(EA), so a pretensioned member of
an otherwise free frame carries exactly P.

Results must be checked by a qualified engineer.
"""

from __future__ import annotations

import copy
from typing import TYPE_CHECKING

import numpy as np

from spaceframe.errors import MechanismError, SolverError
from spaceframe.results import CaseResult, Results

if TYPE_CHECKING:
    from spaceframe.model import LoadCase, Model

__all__ = ["MAX_ITERATIONS", "needs_load_sets", "solve_tension_only"]

#: Active-set iterations per load set before giving up.
MAX_ITERATIONS = 100
#: A force below this fraction of the load set's force scale counts as zero
#: when deciding slack (round-off must not flip a member in and out).
SLACK_TOLERANCE = 1e-9


def needs_load_sets(model: Model) -> bool:
    """True when superposition does not hold: tension-only members or pretension."""
    t_only = getattr(model, "tension_only", None)
    pre = getattr(model, "pretension", None)
    return bool((t_only is not None and np.any(t_only)) or (pre is not None and np.any(pre)))


def _load_set(model: Model, factors: dict[str, float]) -> LoadCase:
    """One factored load set: the sum of factor x case, plus pretension once."""
    from spaceframe.model import LoadCase

    n, b = model.n_nodes, model.n_members
    lc = LoadCase(name="set")
    lc.resize(n, b)
    for case, f in factors.items():
        src = model.cases[case]
        src.resize(n, b)
        lc.forces += f * src.forces
        lc.temperature += f * src.temperature
        lc.initial_strain += f * src.initial_strain
        lc.settlement = np.where(src.settlement_mask, lc.settlement + f * src.settlement,
                                 lc.settlement)
        lc.settlement_mask |= src.settlement_mask
    pre = np.asarray(getattr(model, "pretension", np.zeros(b)), dtype=float)
    if np.any(pre):
        lc.initial_strain -= pre / (model.E * model.area)
    return lc


def _submodel(model: Model, active: np.ndarray, lc: LoadCase) -> Model:
    """The model with only the active members and one load case (shared node arrays)."""
    sub = copy.copy(model)
    sub.members = model.members[active]
    for name in ("area", "E", "density", "alpha"):
        setattr(sub, name, getattr(model, name)[active])
    part = copy.copy(lc)
    part.temperature = lc.temperature[active]
    part.initial_strain = lc.initial_strain[active]
    sub.cases = {lc.name: part}
    sub.combinations = {}
    sub.groups = {}
    sub._cache = {}
    return sub


def _ids(ids: np.ndarray) -> str:
    return ", ".join(str(i) for i in ids[:10]) + (" …" if ids.size > 10 else "")


def _solve_set(model: Model, name: str, kind: str, factors: dict[str, float],
               solver: str) -> CaseResult:
    from spaceframe.analysis.static import solve_static

    lc = _load_set(model, factors)
    b = model.n_members
    t_only = np.asarray(model.tension_only, dtype=bool)
    active = np.ones(b, dtype=bool)
    seen: set[bytes] = set()
    k_all = model.axial_stiffness
    e0_all = model.lengths * (model.alpha * lc.temperature + lc.initial_strain)
    for _ in range(MAX_ITERATIONS):
        key = np.packbits(active).tobytes()
        if key in seen:
            raise SolverError(
                f"{kind} {name!r}: no consistent set of slack tension-only members "
                f"(the iteration cycles; {int(np.sum(t_only & ~active))} members slack)"
            )
        seen.add(key)
        if np.any(active):
            sub = _submodel(model, active, lc)
            try:
                res = solve_static(sub, solver=solver)[lc.name]
            except MechanismError as exc:
                raise MechanismError(
                    f"with members {_ids(np.flatnonzero(~active))} slack the frame is a "
                    f"mechanism under {kind} {name!r}: {exc}",
                    nodes=exc.nodes, directions=exc.directions,
                ) from None
        else:  # every member slack: the supports and springs alone (no Model of no members)
            res = _held_alone(model, lc, f"with members {_ids(np.arange(b))} slack the frame "
                              f"is a mechanism under {kind} {name!r}")
        u = res.displacements
        d = u[model.members[:, 1]] - u[model.members[:, 0]]
        elong = np.einsum("ij,ij->i", d, model.directions)
        trial = k_all * (elong - e0_all)
        scale = max(float(np.abs(trial).max(initial=0.0)),
                    float(np.abs(lc.forces).max(initial=0.0)), 1e-300)
        tol = SLACK_TOLERANCE * scale
        new = active.copy()
        new[t_only & active & (trial < -tol)] = False
        new[t_only & ~active & (trial > tol)] = True
        if np.array_equal(new, active):
            forces = np.where(active, trial, 0.0)
            forces[active] = res.axial_forces
            return CaseResult(
                name=name, kind=kind, displacements=u, axial_forces=forces,
                reactions=res.reactions, loads=res.loads, elongations=elong,
                residual=res.residual, area=model.area.copy(), factors=dict(factors),
                slack=t_only & ~active,
            )
        active = new
    raise SolverError(
        f"{kind} {name!r}: the slack members did not settle in {MAX_ITERATIONS} iterations"
    )


def _held_alone(model: Model, lc: LoadCase, label: str) -> CaseResult:
    """The nodes on their supports and springs alone, as a solve with no member would give.

    Each free direction moves by its load over its spring stiffness, each
    restrained one by its settlement; the supports and springs take the loads
    (R = -f).  A free direction without a spring is a mechanism, named.
    """
    free = ~model.restraint
    springs = model.springs
    loose = free & ~(springs > 0)
    if np.any(loose):
        nodes = np.flatnonzero(np.any(loose, axis=1))
        first = nodes[np.argmax(np.any(lc.forces[nodes] != 0, axis=1))]  # a loaded one first
        axis = "xyz"[int(np.argmax(loose[first]))]
        raise MechanismError(
            f"{label}: no member is left to carry the load, and node {int(first)} is free "
            f"along {axis} with no spring"
            + (f" ({nodes.size} such nodes)" if nodes.size > 1 else ""),
            nodes=nodes, directions=[],
        )
    with np.errstate(divide="ignore", invalid="ignore"):
        u = np.where(free, lc.forces / np.where(free, springs, 1.0),
                     np.where(lc.settlement_mask, lc.settlement, 0.0))
    reactions = np.where(free, -springs * u, -lc.forces) + 0.0  # no -0.0 in the tables
    if not (np.all(np.isfinite(u)) and np.all(np.isfinite(reactions))):
        raise SolverError(f"{label}: the displacements on the springs are not finite")
    scale = float(np.abs(lc.forces).sum() + np.abs(reactions).sum())
    residual = float(np.abs(lc.forces + reactions).sum()) / scale if scale > 0 else 0.0
    # Of the members that carry anything -- none (as a solve of the active
    # members returns the forces of those alone).
    return CaseResult(name=lc.name, kind="case", displacements=u, axial_forces=np.zeros(0),
                      reactions=reactions, loads=lc.forces.copy(), elongations=np.zeros(0),
                      residual=residual, area=np.zeros(0))


def solve_tension_only(model: Model, solver: str = "auto") -> Results:
    """Every case and every combination as its own load set, with slack members.

    Returns
    -------
    Results
        Each result has ``slack`` (b,) bool: tension-only members carrying
        no force in it.

    Raises
    ------
    MechanismError
        When removing the slack members leaves a mechanism (members and nodes named).
    SolverError
        When no consistent set of slack members exists (cycling) or it does
        not settle.
    """
    model.validate()
    items: dict[str, CaseResult] = {}
    for name in model.cases:
        items[name] = _solve_set(model, name, "case", {name: 1.0}, solver)
    for cname, factors in model.combinations.items():
        items[cname] = _solve_set(model, cname, "combination", dict(factors), solver)
    return Results(model, items, solver=solver, timings={},
                   info={"analysis": "tension-only active set, load sets solved directly"})
