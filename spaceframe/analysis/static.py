"""Linear static analysis of every load case, combinations by superposition.

The reduced system is K_ff u_f = f_f + (A k e0)_f - (A k A^T u_p)_f, where
u_p holds the prescribed (settlement) displacements and e0 = L (alpha dT + eps0)
the free elongations.  Member forces are t = k (A^T u - e0) and the reactions
follow from equilibrium, R = A t - f, at supported and sprung directions.
Each result then checks itself (finite values, residual, balance per axis).
"""

from __future__ import annotations

import time
import warnings
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.analysis.stability import check_conditioning, check_stability, name_singular
from spaceframe.assembly import equilibrium_matrix, full_symmetric, reduced_stiffness
from spaceframe.errors import SolverError, SpaceframeWarning
from spaceframe.results import CaseResult, Results
from spaceframe.solvers import Factor, SingularFactor, factorize, needs_upper, resolve_backend
from spaceframe.tolerances import BALANCE_TOLERANCE, RESIDUAL_TOLERANCE

if TYPE_CHECKING:
    import scipy.sparse as sp

    from spaceframe.model import Model

__all__ = ["check_equilibrium", "full_matrix", "reduced_system", "solve_static"]

#: Largest displacement, as a fraction of the model size (diagonal of the
#: bounding box), beyond which a result carries a warning.  Linear analysis
#: assumes that the frame's geometry does not change under load; common
#: practice limits deflections to span/250 .. span/100 for serviceability, and
#: a displacement of several times that (2 % of the size) means geometric
#: nonlinearity changes the member forces: the linear answer is then not a
#: valid answer at all.
LARGE_DISPLACEMENT_FRACTION = 0.02

#: Componentwise backward error (|K u - f| / (|K| |u| + |f|), largest entry)
#: above which a solution is improved by iterative refinement.  A sound
#: direct solve of a well-scaled system gives ~1e-16; stiffness contrasts
#: push it up, and one or two refinement steps with the same factor bring it
#: back (Skeel, "Iterative refinement implies numerical stability for
#: Gaussian elimination", Math. Comp. 35, 1980).
REFINE_ABOVE = 1.0e-14
_REFINE_STEPS = 3
#: Results recovered and checked together: the temporaries of the checks are a
#: few arrays of (model rows x this many columns), whatever the number of cases.
_RECOVER_BLOCK = 64

#: Relative size, against the magnitudes a member force is computed from,
#: below which the force is round-off: 64 units of float64 round-off (2**-52),
#: room for the few additions in A^T u and k (e - e0).
ROUND_OFF = 64 * 2.0**-52


def reduced_system(model: Model, backend: str = "scipy") -> tuple[sp.csr_matrix, np.ndarray]:
    """Reduced stiffness (free dofs, springs on the diagonal) in the back-end's triangle."""
    return reduced_stiffness(model, "upper" if needs_upper(backend) else "full")


def _norm(x: np.ndarray) -> float:
    """Euclidean norm that does not overflow for entries near the float64 limit."""
    big = float(np.abs(x).max(initial=0.0))
    if big == 0.0 or not np.isfinite(big):
        return big
    return big * float(np.linalg.norm(x / big))


def _column_norms(X: np.ndarray) -> np.ndarray:
    """:func:`_norm` of every column of X (rows x columns) at once.

    Columns whose entries are all within 1e-150..1e150 in size cannot
    overflow or underflow in their squares: their norm is the plain square
    root of one fused sum of squares; only the others are scaled first.
    """
    # The largest size in each column (NaN where the column holds one).
    hi = np.maximum(X.max(axis=0, initial=-np.inf), -X.min(axis=0, initial=np.inf))
    out = np.sqrt(np.einsum("ij,ij->j", X, X))
    risky = ~((hi < 1e150) & (hi > 1e-150)) & (hi > 0)
    if np.any(risky):
        cols = np.flatnonzero(risky)
        big = hi[cols]
        ok = np.isfinite(big)
        safe = np.where(ok, big, 1.0)
        with np.errstate(over="ignore", invalid="ignore"):
            scaled = np.sqrt(((X[:, cols] / safe) ** 2).sum(axis=0)) * safe
        out[cols] = np.where(ok, scaled, big)
    return out


def _check_finite(names: list[str], uf: np.ndarray, what: str = "displacements") -> None:
    """Fail closed on NaN or infinity in a solution (one column per case)."""
    if uf.size and not np.all(np.isfinite(uf)):
        col = int(np.flatnonzero(~np.isfinite(uf).all(axis=0))[0])
        raise SolverError(
            f"case {names[col]!r}: the solver returned non-finite {what} (numbers beyond "
            "the range of float64: check the units of E, areas and loads)"
        )


def _symmetric_products(K: sp.spmatrix, upper: bool) -> tuple[Any, Any]:
    """The products K x and |K| x, for K stored whole or as its upper triangle U.

    With the upper triangle, K x = U x + Uᵀ x − diag(U) x: two products on
    the stored triangle instead of building the full matrix (which costs more
    than the products at 100k members).
    """
    absK = abs(K)
    if not upper:
        return (lambda x: K @ x), (lambda x: absK @ x)
    d = K.diagonal()[:, None]
    KT, absKT, absd = K.T, absK.T, np.abs(d)

    def dot(x: np.ndarray) -> np.ndarray:
        return K @ x + KT @ x - d * x

    def absdot(x: np.ndarray) -> np.ndarray:
        return absK @ x + absKT @ x - absd * x

    return dot, absdot


def _refine(factor: Factor, K: sp.spmatrix, upper: bool, rhs: np.ndarray,
            sol: np.ndarray) -> np.ndarray:
    """Iterative refinement in working precision until the backward error is small."""
    if sol.ndim == 1:
        return _refine(factor, K, upper, rhs[:, None], sol[:, None])[:, 0]
    dot, absdot = _symmetric_products(K, upper)
    sol = sol.copy()
    cols = np.arange(sol.shape[1])  # the columns still refined
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        for _ in range(_REFINE_STEPS):
            x, b = sol[:, cols], rhs[:, cols]
            r = b - dot(x)
            denom = absdot(np.abs(x)) + np.abs(b)
            omega = np.where(denom > 0, np.abs(r) / np.where(denom > 0, denom, 1.0), 0.0)
            worst = omega.max(axis=0, initial=0.0)
            # Only the columns whose backward error is still above the bar are
            # solved again (with many cases, most need no second solve).
            again = ~(worst <= REFINE_ABOVE) & np.isfinite(worst)
            if not np.any(again):
                break
            cols, r = cols[again], r[:, again]
            sol[:, cols] = sol[:, cols] + factor.solve(r).reshape(r.shape)
    return sol


def full_matrix(K: sp.spmatrix, backend: str) -> sp.spmatrix:
    """The full symmetric matrix from what the back-end was given."""
    return full_symmetric(K, "upper" if needs_upper(backend) else "full")


def _warn_large(model: Model, names: list[str], items: dict[str, CaseResult]) -> None:
    """One SpaceframeWarning when displacements exceed the linear range."""
    if not items or model.n_nodes == 0:
        return
    peaks, nodes = [], []
    for name in names:
        u = items[name].displacements
        big = float(np.abs(u).max(initial=0.0))
        big = big if big > 0 and np.isfinite(big) else 1.0
        mag = np.sqrt(((u / big) ** 2).sum(axis=1)) * big  # no overflow in the squares
        nodes.append(int(np.argmax(mag)))
        peaks.append(float(mag[nodes[-1]]))
    peak = np.array(peaks)
    limit = LARGE_DISPLACEMENT_FRACTION * model.size
    over = np.flatnonzero(peak > limit)
    if not over.size:
        return
    j = int(over[np.argmax(peak[over])])
    node = nodes[j]
    others = f" ({over.size} results in all)" if over.size > 1 else ""
    warnings.warn(
        f"result {names[j]!r}: largest displacement {peak[j]:.3g} m at node {node} is "
        f"{peak[j] / model.size:.3g} times the model size ({model.size:.3g} m), beyond "
        f"{LARGE_DISPLACEMENT_FRACTION:.0%}{others}: a linear analysis is not valid at such "
        "displacements; a geometrically nonlinear analysis is needed",
        SpaceframeWarning,
        stacklevel=4,
    )


def solve_static(model: Model, solver: str = "auto") -> Results:
    """Solve all load cases with one factorisation; see :meth:`Model.solve`."""
    t0 = time.perf_counter()
    timings: dict[str, float] = {}
    model.validate()
    backend = resolve_backend(solver)
    check_stability(model)
    check_conditioning(model)
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
    # Free elongations and settlements are rare: their arrays exist only when
    # some case has them (at 1000 cases of a 100k-member model each would be
    # 0.6-0.8 GB of zeros).
    F = np.zeros((3 * n, m))
    for j, name in enumerate(names):
        F[:, j] = model.cases[name].forces.ravel()
    restrained = model.restraint.ravel()
    E0 = UP = None
    if any(np.any(lc.temperature) or np.any(lc.initial_strain) for lc in model.cases.values()):
        E0 = np.zeros((b, m))
        for j, name in enumerate(names):
            lc = model.cases[name]
            E0[:, j] = model.lengths * (model.alpha * lc.temperature + lc.initial_strain)
    if any(np.any(lc.settlement_mask) for lc in model.cases.values()):
        UP = np.zeros((3 * n, m))
        for j, name in enumerate(names):
            lc = model.cases[name]
            UP[:, j] = np.where(lc.settlement_mask, lc.settlement, 0.0).ravel()
        UP[~restrained] = 0.0
    if E0 is not None or UP is not None:
        # Free elongations less those the prescribed displacements impose.
        e = (0.0 if E0 is None else E0) - (0.0 if UP is None else A.T @ UP)
        rhs = (F + A @ (k[:, None] * e))[free]
    else:
        rhs = F[free]

    t = time.perf_counter()
    if free.size == 0:
        # Every direction is restrained: nothing to solve, forces come from
        # the prescribed displacements and free strains alone.
        solver_name = "none"
        uf = np.zeros((0, m))
    else:
        try:
            # No refinement inside PARDISO: _refine below measures every column's
            # backward error and solves again only those above the bar (PARDISO's
            # own refinement would solve every column two more times).
            factor = factorize(K, backend, refine=False)
        except SingularFactor as exc:
            name_singular(model, full_matrix(K, backend), free, exc)
        solver_name = factor.name
        timings["factorise"] = time.perf_counter() - t
        t = time.perf_counter()
        # Both back-ends reject zero pivots (solvers.PIVOT_TOLERANCE), so a
        # mechanism the loads happen to miss is caught without a probe column.
        sol = factor.solve(rhs).reshape(free.size, m)
        _check_finite(names, sol)
        sol = _refine(factor, K, needs_upper(backend), rhs, sol)
        _check_finite(names, sol)
        uf = sol
    del rhs
    timings["solve"] = time.perf_counter() - t

    t = time.perf_counter()
    U = np.zeros((3 * n, m)) if UP is None else UP
    U[free] = uf
    del uf
    labels: list[tuple[str, str, dict[str, float] | None]] = [
        ("case", name, None) for name in names]
    labels += [("combination", cname, factors)
               for cname, factors in model.combinations.items()]
    # Every result as a column, cases then combinations; a combination's
    # column is U @ w, solved as one load vector, so each result is what it
    # would be on its own.
    weights = np.zeros((m, len(model.combinations)))
    for i, factors in enumerate(model.combinations.values()):
        for case, f in factors.items():
            weights[names.index(case), i] += f
    absA = abs(A)  # once: the residual's scale for every result
    spring = model.springs.ravel()
    area = np.array(model.area, dtype=float)
    area.flags.writeable = False  # one snapshot, shared by every result of this solve
    items: dict[str, CaseResult] = {}
    # Recovery and self-checks a block of columns at a time: the temporaries
    # of the checks stay bounded however many cases there are.
    for lo in range(0, len(labels), _RECOVER_BLOCK):
        cols = np.arange(lo, min(lo + _RECOVER_BLOCK, len(labels)))
        UJ, FJ = _columns(U, cols, weights), _columns(F, cols, weights)
        E0J = None if E0 is None else _columns(E0, cols, weights)
        elongJ = A.T @ UJ
        with np.errstate(over="ignore", invalid="ignore"):
            TJ = k[:, None] * (elongJ if E0J is None else elongJ - E0J)
        # Reactions from equilibrium inside the checks (one product with A, not two).
        items.update(_make_results(model, [labels[j] for j in cols], UJ, TJ, None, FJ, elongJ,
                                   E0J, A, absA, spring, restrained, area=area))
    _warn_large(model, names + list(model.combinations), items)
    timings["recover"] = time.perf_counter() - t
    timings["total"] = time.perf_counter() - t0
    return Results(model, items, solver=solver_name, timings=timings,
                   info={"dofs": int(free.size), "nnz": int(K.nnz)})


def _columns(X: np.ndarray, cols: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Result columns ``cols`` of case columns X: a case's own, a combination's X @ w."""
    m = X.shape[1]
    case_cols, comb_cols = cols[cols < m], cols[cols >= m] - m
    with np.errstate(over="ignore", invalid="ignore"):  # checked in _make_results
        return np.column_stack([X[:, case_cols], X @ weights[:, comb_cols]])


def check_equilibrium(
    label: str, res_free: np.ndarray, scale: float, f3: np.ndarray, r3: np.ndarray
) -> float:
    """The self-checks of one result; returns its relative residual.

    Fails closed: a residual, scale, imbalance or reference that is NaN or
    infinite raises, as does one above its tolerance (NaN compares False with
    every tolerance, so each test is written as "not below").

    Raises
    ------
    SolverError
        One line naming the result and the check.
    """
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        imbalance = np.abs(f3.sum(axis=0) + r3.sum(axis=0))
        ref = max(float(np.abs(f3).sum(axis=0).max(initial=0.0)),
                  float(np.abs(r3).sum(axis=0).max(initial=0.0)))
    return _check_numbers(label, _norm(res_free), scale, imbalance, ref)


def _check_numbers(label: str, num: float, scale: float, imbalance: np.ndarray,
                   ref: float) -> float:
    """The checks of :func:`check_equilibrium` on the numbers it computes.

    ``num`` is the residual's norm, ``imbalance`` the (3,) sum of loads and
    reactions, ``ref`` the larger of their totals.
    """
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        residual = num / scale if scale > 0 else (0.0 if num == 0 else float("inf"))
        if not (np.isfinite(scale) and np.isfinite(residual)):
            raise SolverError(
                f"{label}: the equilibrium residual is not a finite number (residual "
                f"{num:.3g} N against a force scale of {scale:.3g} N): the numbers exceed the "
                "range of float64; check the units of E, areas and loads"
            )
        if not residual <= RESIDUAL_TOLERANCE:
            raise SolverError(
                f"{label}: relative equilibrium residual {residual:.2e} exceeds "
                f"{RESIDUAL_TOLERANCE:.0e}; the result is not trustworthy"
            )
        ref = max(float(ref), float(scale))
        worst = float(imbalance.max(initial=0.0))
        if not (np.isfinite(ref) and np.isfinite(worst)):
            raise SolverError(
                f"{label}: the balance of loads and reactions is not a finite number: the "
                "numbers exceed the range of float64; check the units of E, areas and loads"
            )
        if ref > 0 and not worst <= BALANCE_TOLERANCE * ref:
            axis = "xyz"[int(np.argmax(imbalance))]
            raise SolverError(
                f"{label}: reactions do not balance the loads along {axis} "
                f"(off by {worst:.3g} N)"
            )
    return float(residual)


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
    """One result's self-checks, column by column.

    The reference that :func:`_make_results` (used by the solve) is tested against.
    """
    n = model.n_nodes
    label = f"{kind} {name!r}"
    for what, arr in (("displacements", u), ("axial forces", t), ("reactions", r)):
        if not np.all(np.isfinite(arr)):
            raise SolverError(
                f"{label}: the solver returned non-finite {what} (numbers beyond the range "
                "of float64: check the units of E, areas and loads)"
            )
    # Residual: supports take what equilibrium asks at restrained dofs, springs
    # must supply -k u at free ones, and free dofs must balance exactly.
    with np.errstate(over="ignore", invalid="ignore"):
        out_of_balance = A @ t - f
        res_free = np.where(restrained, 0.0, out_of_balance - r)
        sprung = ~restrained & (spring > 0)
        res_free[sprung] = out_of_balance[sprung] + spring[sprung] * u[sprung]
        # Scale: the size of the terms that round-off works on.  A member force
        # k (u_j - u_i - e0) is computed from displacements that may be far
        # larger than their difference (a rigid-body settlement, a stiff chord
        # carried on soft diagonals), so the member term is k (|A^T| |u| + |e0|)
        # rather than |k A^T u|: it includes the forces that the prescribed
        # displacements (|A^T u_p| <= |A^T| |u|) and free strains would cause
        # if the frame resisted them.
        k = model.axial_stiffness
        member_scale = k * (abs(A.T) @ np.abs(u) + np.abs(e0))
        # A force within round-off of that scale is zero (a member of a
        # determinate frame under free expansion or settlement, a zero-force
        # member): report it as 0 and the reactions that follow from it, so
        # that round-off never shows as a force or reaction.
        tiny = np.abs(t) <= ROUND_OFF * member_scale
        if np.any(tiny):
            t = np.where(tiny, 0.0, t)
            out_of_balance = A @ t - f
            held = restrained | (spring > 0)
            r = np.where(held, out_of_balance, 0.0)
            res_free = np.where(restrained, 0.0, out_of_balance - r)
            res_free[sprung] = out_of_balance[sprung] + spring[sprung] * u[sprung]
        scale = _norm(absA @ member_scale) + _norm(f) + _norm(r)
    f3 = f.reshape(n, 3)
    r3 = r.reshape(n, 3)
    residual = check_equilibrium(label, res_free, scale, f3, r3)
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


def _make_results(
    model: Model,
    labels: list[tuple[str, str, dict[str, float] | None]],
    U: np.ndarray,
    T: np.ndarray,
    R: np.ndarray | None,
    F: np.ndarray,
    elong: np.ndarray,
    E0: np.ndarray | None,
    A: sp.spmatrix,
    absA: sp.spmatrix,
    spring: np.ndarray,
    restrained: np.ndarray,
    *,
    area: np.ndarray | None = None,
) -> dict[str, CaseResult]:
    """Every result's self-checks, with the sparse products over all columns at once.

    Column j is (kind, name, factors) ``labels[j]``; the same checks as
    :func:`_make_result` column by column (a sparse product with a block of
    columns gives each column exactly what it gives that column alone), so
    the results are identical, at one pass over A per product instead of one
    per result.  ``R`` None: the reactions follow from equilibrium here
    (``A T - F`` at held directions); ``E0`` None: no free strains.
    """
    n = model.n_nodes
    sprung = ~restrained & (spring > 0)
    held = restrained | (spring > 0)
    with np.errstate(over="ignore", invalid="ignore"):
        out_of_balance = A @ T - F
    if R is None:
        R = np.where(held[:, None], out_of_balance, 0.0)
    for what, arr in (("displacements", U), ("axial forces", T), ("reactions", R)):
        bad = ~np.all(np.isfinite(arr), axis=0)
        if np.any(bad):
            kind, name, _ = labels[int(np.flatnonzero(bad)[0])]
            raise SolverError(
                f"{kind} {name!r}: the solver returned non-finite {what} (numbers beyond the "
                "range of float64: check the units of E, areas and loads)"
            )
    k = model.axial_stiffness
    with np.errstate(over="ignore", invalid="ignore"):
        stretch = absA.T @ np.abs(U)
        if E0 is not None:
            stretch += np.abs(E0)
        member_scale = k[:, None] * stretch
        tiny = np.abs(T) <= ROUND_OFF * member_scale
        redo = np.flatnonzero(tiny.any(axis=0))
        if redo.size:  # as in _make_result: round-off forces shown as 0
            T = T.copy()
            R = R.copy()
            T[:, redo] = np.where(tiny[:, redo], 0.0, T[:, redo])
            out_of_balance[:, redo] = A @ T[:, redo] - F[:, redo]
            R[:, redo] = np.where(held[:, None], out_of_balance[:, redo], 0.0)
        res_free = np.where(restrained[:, None], 0.0, out_of_balance - R)
        res_free[sprung] = out_of_balance[sprung] + spring[sprung, None] * U[sprung]
        scale_terms = absA @ member_scale
    with np.errstate(over="ignore", invalid="ignore"):
        scale = _column_norms(scale_terms) + _column_norms(F) + _column_norms(R)
        num = _column_norms(res_free)
        F3, R3 = F.reshape(n, 3, -1), R.reshape(n, 3, -1)
        imbalance = np.abs(F3.sum(axis=0) + R3.sum(axis=0))  # (3, columns)
        ref = np.maximum(np.abs(F3).sum(axis=0).max(axis=0, initial=0.0),
                         np.abs(R3).sum(axis=0).max(axis=0, initial=0.0))
    # Each result's arrays are views of its column of the block arrays, which
    # the results own together: no copy per result (a transposed copy costs
    # as much as the checks at 100k members).
    items: dict[str, CaseResult] = {}
    for j, (kind, name, factors) in enumerate(labels):
        residual = _check_numbers(f"{kind} {name!r}", float(num[j]), float(scale[j]),
                                  imbalance[:, j], float(ref[j]))
        items[name] = CaseResult(
            name=name,
            kind=kind,
            displacements=U[:, j].reshape(n, 3),
            axial_forces=T[:, j],
            reactions=R[:, j].reshape(n, 3),
            loads=F[:, j].reshape(n, 3),
            elongations=elong[:, j],
            residual=residual,
            area=model.area if area is None else area,
            factors=dict(factors or {}),
        )
    return items
