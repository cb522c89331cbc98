"""Linear static analysis of every load case, combinations by superposition.

The reduced system is K_ff u_f = f_f + (A k e0)_f - (A k A^T u_p)_f, where
u_p holds the prescribed (settlement) displacements and e0 = L (alpha dT + eps0)
the free elongations.  Member forces are t = k (A^T u - e0) and the reactions
follow from equilibrium, R = A t - f, at supported and sprung directions.
Each result then checks itself (finite values, residual, balance per axis).
"""

from __future__ import annotations

import time
from typing import TYPE_CHECKING, Literal

import numpy as np

from spaceframe.analysis.stability import check_stability, describe_dofs, mechanism_modes
from spaceframe.assembly import equilibrium_matrix, stiffness_matrix
from spaceframe.errors import MechanismError, SolverError
from spaceframe.results import CaseResult, Results
from spaceframe.solvers import SingularFactor, factorize, needs_upper, resolve_backend
from spaceframe.tolerances import BALANCE_TOLERANCE, RESIDUAL_TOLERANCE

if TYPE_CHECKING:
    import scipy.sparse as sp

    from spaceframe.model import Model

__all__ = ["reduced_system", "solve_static"]

#: A linear displacement larger than this multiple of the model's size means
#: the factorisation divided by a pivot that is round-off, not stiffness: a
#: near-mechanism.  Genuine linear results are smaller by many orders.
_IMPLAUSIBLE_DISPLACEMENT = 1.0e3


def reduced_system(model: Model, backend: str = "scipy") -> tuple[sp.csr_matrix, np.ndarray]:
    """Reduced stiffness (free dofs, springs on the diagonal) and the free dof numbers."""
    free = np.flatnonzero(~model.restraint.ravel())
    dof_map = np.full(3 * model.n_nodes, -1, dtype=np.int64)
    dof_map[free] = np.arange(free.size)
    tri: Literal["full", "upper"] = "upper" if needs_upper(backend) else "full"
    K = stiffness_matrix(model, dof_map=dof_map, n_dof=free.size, triangle=tri)
    spring = model.springs.ravel()[free]
    if np.any(spring):
        K.setdiag(K.diagonal() + spring)
    return K, free


def _check_plausible(
    model: Model, names: list[str], uf: np.ndarray, free: np.ndarray, K: sp.spmatrix, backend: str
) -> None:
    """Reject displacements that only a round-off pivot can produce."""
    if not np.all(np.isfinite(uf)):
        col = int(np.flatnonzero(~np.isfinite(uf).all(axis=0))[0])
        raise SolverError(f"case {names[col]!r}: the solver returned non-finite displacements")
    big = np.abs(uf).max(initial=0.0)
    if big <= _IMPLAUSIBLE_DISPLACEMENT * model.size:
        return
    row, col = (int(i) for i in np.unravel_index(int(np.argmax(np.abs(uf))), uf.shape))
    dof = np.array([free[row]])
    exc = SingularFactor(
        f"case {names[col]!r}: displacement {big:.3g} m at {describe_dofs(dof)} is over "
        f"{_IMPLAUSIBLE_DISPLACEMENT:g} times the model size ({model.size:.3g} m)",
        np.array([row]),
    )
    _name_singular(model, _full(K, backend), free, exc)


def _full(K: sp.spmatrix, backend: str) -> sp.spmatrix:
    """The full symmetric matrix from what the back-end was given."""
    if not needs_upper(backend):
        return K
    import scipy.sparse as sp

    return K + sp.triu(K, k=1).T


def _name_singular(model: Model, K: sp.spmatrix, free: np.ndarray, exc: SingularFactor) -> None:
    try:
        _, modes = mechanism_modes(K, free)
    except Exception:
        modes = []
    if modes:
        text = "; ".join(f"mode {j + 1} moves {describe_dofs(d)}" for j, d in enumerate(modes))
        dofs = np.unique(np.concatenate(modes))
    else:
        dofs = free[exc.dofs] if exc.dofs.size else np.zeros(0, dtype=np.int64)
        text = f"zero stiffness at {describe_dofs(dofs)}" if dofs.size else str(exc)
        text += f" ({exc})" if dofs.size else ""
    nodes, axes = np.divmod(dofs, 3)
    raise MechanismError(
        f"the frame is a mechanism (singular stiffness): {text}",
        nodes=nodes,
        directions=["xyz"[a] for a in axes],
    ) from exc


def solve_static(model: Model, solver: str = "auto") -> Results:
    """Solve all load cases with one factorisation; see :meth:`Model.solve`."""
    t0 = time.perf_counter()
    timings: dict[str, float] = {}
    model.validate()
    backend = resolve_backend(solver)
    check_stability(model)
    timings["stability"] = time.perf_counter() - t0

    n, b = model.n_nodes, model.n_members
    names = list(model.cases)
    for lc in model.cases.values():
        lc.resize(n, b)
    m = len(names)

    t = time.perf_counter()
    A = equilibrium_matrix(model)
    K, free = reduced_system(model, backend)
    k = model.axial_stiffness
    timings["assemble"] = time.perf_counter() - t

    # Loads as columns: applied forces, free elongations, prescribed displacements.
    F = np.zeros((3 * n, m))
    E0 = np.zeros((b, m))
    UP = np.zeros((3 * n, m))
    for j, name in enumerate(names):
        lc = model.cases[name]
        F[:, j] = lc.forces.ravel()
        E0[:, j] = model.lengths * (model.alpha * lc.temperature + lc.initial_strain)
        UP[:, j] = np.where(lc.settlement_mask, lc.settlement, 0.0).ravel()
    restrained = model.restraint.ravel()
    UP[~restrained] = 0.0
    # Free elongations and settlements are rare; skip their two products with
    # A when every case is free of them.
    if np.any(E0) or np.any(UP):
        rhs = (F + A @ (k[:, None] * (E0 - A.T @ UP)))[free]
    else:
        rhs = F[free]

    t = time.perf_counter()
    if free.size == 0:
        # Every direction is restrained: nothing to solve, forces come from
        # the prescribed displacements and free strains alone.
        solver_name = "none"
        uf = np.zeros((0, m))
        sol = uf
    else:
        try:
            factor = factorize(K, backend)
        except SingularFactor as exc:
            _name_singular(model, _full(K, backend), free, exc)
        solver_name = factor.name
        timings["factorise"] = time.perf_counter() - t
        t = time.perf_counter()
        # Both back-ends reject zero pivots (solvers.PIVOT_TOLERANCE), so a
        # mechanism the loads happen to miss is caught without a probe column.
        sol = factor.solve(rhs).reshape(free.size, m)
        uf = sol
    timings["solve"] = time.perf_counter() - t

    _check_plausible(model, names, sol, free, K, backend)

    t = time.perf_counter()
    U = UP.copy()
    U[free] = uf
    elong = A.T @ U
    T = k[:, None] * (elong - E0)
    P = A @ T  # external force each node needs for equilibrium
    spring = model.springs.ravel()
    held = restrained | (spring > 0)
    R = np.where(held[:, None], P - F, 0.0)
    absA = abs(A)  # once: the residual's scale for every result
    items: dict[str, CaseResult] = {}
    for j, name in enumerate(names):
        items[name] = _make_result(model, name, "case", U[:, j], T[:, j], R[:, j], F[:, j],
                                   elong[:, j], E0[:, j], A, absA, spring, restrained)
    for cname, factors in model.combinations.items():
        w = np.zeros(m)
        for case, f in factors.items():
            w[names.index(case)] += f
        items[cname] = _make_result(model, cname, "combination", U @ w, T @ w, R @ w, F @ w,
                                    elong @ w, E0 @ w, A, absA, spring, restrained,
                                    factors=factors)
    timings["recover"] = time.perf_counter() - t
    timings["total"] = time.perf_counter() - t0
    return Results(model, items, solver=solver_name, timings=timings,
                   info={"dofs": int(free.size), "nnz": int(K.nnz)})


def _make_result(
    model: Model,
    name: str,
    kind: str,
    u: np.ndarray,
    t: np.ndarray,
    r: np.ndarray,
    f: np.ndarray,
    elong: np.ndarray,
    e0: np.ndarray,
    A: sp.spmatrix,
    absA: sp.spmatrix,
    spring: np.ndarray,
    restrained: np.ndarray,
    factors: dict[str, float] | None = None,
) -> CaseResult:
    n = model.n_nodes
    for label, arr in (("displacements", u), ("axial forces", t), ("reactions", r)):
        if not np.all(np.isfinite(arr)):
            raise SolverError(f"{kind} {name!r}: the solver returned non-finite {label}")
    # Residual: supports take what equilibrium asks at restrained dofs, springs
    # must supply -k u at free ones, and free dofs must balance exactly.
    out_of_balance = A @ t - f
    res_free = np.where(restrained, 0.0, out_of_balance - r)
    sprung = ~restrained & (spring > 0)
    res_free[sprung] = out_of_balance[sprung] + spring[sprung] * u[sprung]
    # Scale: the member forces from total and from free elongation separately,
    # so a case of free thermal expansion (t ~ 0) is judged against the forces
    # its strain would cause if restrained, not against round-off.
    k = model.axial_stiffness
    scale = (
        np.linalg.norm(absA @ (np.abs(k * elong) + np.abs(k * e0)))
        + np.linalg.norm(f)
        + np.linalg.norm(r)
    )
    residual = float(np.linalg.norm(res_free) / scale) if scale > 0 else 0.0
    if residual > RESIDUAL_TOLERANCE:
        raise SolverError(
            f"{kind} {name!r}: relative equilibrium residual {residual:.2e} exceeds "
            f"{RESIDUAL_TOLERANCE:.0e}; the result is not trustworthy"
        )
    f3 = f.reshape(n, 3)
    r3 = r.reshape(n, 3)
    imbalance = np.abs(f3.sum(axis=0) + r3.sum(axis=0))
    ref = max(
        float(np.abs(f3).sum(axis=0).max()), float(np.abs(r3).sum(axis=0).max()), float(scale)
    )
    if ref > 0 and imbalance.max() > BALANCE_TOLERANCE * ref:
        axis = "xyz"[int(np.argmax(imbalance))]
        raise SolverError(
            f"{kind} {name!r}: reactions do not balance the loads along {axis} "
            f"(off by {imbalance.max():.3g} N)"
        )
    return CaseResult(
        name=name,
        kind=kind,
        displacements=u.reshape(n, 3),
        axial_forces=t,
        reactions=r3,
        loads=f3,
        elongations=elong,
        residual=residual,
        area=model.area,
        factors=dict(factors or {}),
    )
