"""The self-checks of static results: finite values, residual, balance per axis.

Each result of :mod:`spaceframe.analysis.static` checks itself here:
:func:`_make_results` checks a block of columns at once (the sparse products
over all columns), :func:`_make_result` one column, the reference that the
block's checks are tested against.  Both fail closed: a NaN, an infinity or a
value above its tolerance raises :class:`~spaceframe.errors.SolverError`
naming the result.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.errors import SolverError
from spaceframe.results import CaseResult
from spaceframe.results.static import LinearElongations, NodeRows
from spaceframe.tolerances import BALANCE_TOLERANCE, RESIDUAL_TOLERANCE

if TYPE_CHECKING:
    import scipy.sparse as sp

    from spaceframe.model import Model

__all__ = ["ROUND_OFF", "check_equilibrium"]

#: Relative size, against the magnitudes a member force is computed from,
#: below which the force is round-off: 64 units of float64 round-off (2**-52),
#: room for the few additions in A^T u and k (e - e0).
ROUND_OFF = 64 * 2.0**-52


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
    root of one fused sum of squares; only the others are scaled first.  A
    sum of squares s with rows * 1e-300 < s < 1e300 proves that of its column
    without a pass for the sizes (the largest square is at most s and at
    least s / rows); only the other columns are sized.
    """
    rows = X.shape[0]
    squares = np.einsum("ij,ij->j", X, X)
    out = np.sqrt(squares)
    # Comparisons with NaN are False: such columns are sized below.
    rest = np.flatnonzero(~((squares < 1e300) & (squares > max(rows, 1) * 1e-300)))
    if not rest.size:
        return out
    sub = X[:, rest]
    # The largest size in each column (NaN where the column holds one).
    hi = np.maximum(sub.max(axis=0, initial=-np.inf), -sub.min(axis=0, initial=np.inf))
    risky = ~((hi < 1e150) & (hi > 1e-150)) & (hi > 0)
    if np.any(risky):
        cols = np.flatnonzero(risky)
        big = hi[cols]
        ok = np.isfinite(big)
        safe = np.where(ok, big, 1.0)
        with np.errstate(over="ignore", invalid="ignore"):
            scaled = np.sqrt(((sub[:, cols] / safe) ** 2).sum(axis=0)) * safe
        out[rest[cols]] = np.where(ok, scaled, big)
    return out


def _scale_terms(U: np.ndarray, E0: np.ndarray | None, absA: sp.spmatrix,
                 k: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Member scales k (|A^T| |u| + |e0|), and |A| times them per direction.

    The sizes of the terms that round-off works on: a member force k (u_j -
    u_i - e0) is computed from displacements that may be far larger than
    their difference (a rigid-body settlement, a stiff chord carried on soft
    diagonals), so its scale is k (|A^T| |u| + |e0|), not |k A^T u|.
    """
    with np.errstate(over="ignore", invalid="ignore"):
        stretch = absA.T @ np.abs(U)
        if E0 is not None:
            stretch += np.abs(E0)
        stretch *= k[:, None]  # the member scales, in place of a new array
        return stretch, absA @ stretch


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
    E0: np.ndarray | None,
    A: sp.spmatrix,
    absA: sp.spmatrix,
    spring: np.ndarray,
    restrained: np.ndarray,
    *,
    area: np.ndarray | None = None,
    known: tuple[np.ndarray, tuple[np.ndarray, np.ndarray] | None] | None = None,
) -> dict[str, CaseResult]:
    """Every result's self-checks, with the sparse products over all columns at once.

    Column j is (kind, name, factors) ``labels[j]``; the same checks as
    :func:`_make_result` column by column (a sparse product with a block of
    columns gives each column exactly what it gives that column alone), so
    the results are identical, at one pass over A per product instead of one
    per result.  ``R`` None: the reactions follow from equilibrium here
    (``A T - F`` at held directions); ``E0`` None: no free strains.
    ``known``: ``A T - F`` and, or None, :func:`_scale_terms`, when the
    caller has them.  T may be changed in place (round-off forces set to 0).
    """
    n = model.n_nodes
    sprung = ~restrained & (spring > 0)
    held = restrained | (spring > 0)
    k = model.axial_stiffness
    with np.errstate(over="ignore", invalid="ignore"):
        out_of_balance = A @ T - F if known is None else known[0]
        scales = None if known is None else known[1]
    for what, arr in (("displacements", U), ("axial forces", T)):
        _finite_columns(labels, what, arr)
    member_scale, scale_terms = _scale_terms(U, E0, absA, k) if scales is None else scales
    with np.errstate(over="ignore", invalid="ignore"):
        # As in _make_result: forces within round-off of their scale shown as 0,
        # before the reactions are taken from equilibrium.
        # Forces already 0 (members whose ends move alike) need no setting,
        # nor the product again: only columns where a non-zero force is set.
        size = np.abs(T)
        tiny = (size <= ROUND_OFF * member_scale) & (size > 0.0)
        redo = np.flatnonzero(tiny.any(axis=0))
        if redo.size:
            np.copyto(T, 0.0, where=tiny)
            out_of_balance = A @ T - F
        if R is None:
            # Only the held rows have reactions: written into zeros, stored
            # column by column as the results hold them.
            held_rows = np.flatnonzero(held)
            R = np.zeros(out_of_balance.shape, order="F")
            R[held_rows] = out_of_balance[held_rows]
            # The residual at free directions, in place of the out-of-balance
            # forces: what is left there (R is 0), 0 where a support holds,
            # and with the spring's k u where one does.
            res_free = out_of_balance
            res_free[np.flatnonzero(restrained)] = 0.0
            res_free[sprung] = R[sprung] + spring[sprung, None] * U[sprung]
        else:
            if redo.size:
                R = R.copy()
                R[:, redo] = np.where(held[:, None], out_of_balance[:, redo], 0.0)
            res_free = np.where(restrained[:, None], 0.0, out_of_balance - R)
            res_free[sprung] = out_of_balance[sprung] + spring[sprung, None] * U[sprung]
    _finite_columns(labels, "reactions", R)
    with np.errstate(over="ignore", invalid="ignore"):
        scale = _column_norms(scale_terms) + _column_norms(F) + _column_norms(R)
        num = _column_norms(res_free)
        # Reactions are 0 but at the nodes that can have one (supports, springs).
        at = np.flatnonzero(held.reshape(n, 3).any(axis=1))
        f_total, f_size = _node_sums(F, n)
        r_total, r_size = _node_sums(R, n, at)
        imbalance = np.abs(f_total + r_total)  # (3, columns)
        ref = np.maximum(f_size.max(axis=0, initial=0.0), r_size.max(axis=0, initial=0.0))
    # Each result's arrays are views of its column of the block arrays, which
    # the results own together, stored column by column: one copy of each
    # block, after which every result's array is contiguous (a column of a
    # row-major block of 64 would be read one cache line per value by every
    # table, picture and check that follows).
    U, T, F = (_column_major(X) for X in (U, T, F))
    # Reactions kept at the nodes that can have one (supports and springs),
    # all results' in one array (results, nodes, axes); elongations are A^T u,
    # made from U when read (static.LinearElongations).
    R_at = np.ascontiguousarray(np.moveaxis(R.reshape(n, 3, -1)[at], 2, 0))
    items: dict[str, CaseResult] = {}
    for j, (kind, name, factors) in enumerate(labels):
        # Loads at a few nodes (a point-load case) kept as those nodes' rows.
        f3 = F[:, j].reshape(n, 3)
        loaded = _loaded_nodes(F[:, j], n)
        # Otherwise a copy: F may be a work array that the next block fills.
        loads = NodeRows.of(f3, loaded) if loaded is not None else f3.copy()
        residual = _check_numbers(f"{kind} {name!r}", float(num[j]), float(scale[j]),
                                  imbalance[:, j], float(ref[j]))
        items[name] = CaseResult(
            name=name,
            kind=kind,
            displacements=U[:, j].reshape(n, 3),
            axial_forces=T[:, j],
            reactions=NodeRows(n, at, R_at[j]),  # type: ignore[arg-type]  # held compactly
            loads=loads,  # type: ignore[arg-type]  # held compactly when sparse
            elongations=LinearElongations(A, U[:, j]),  # type: ignore[arg-type]  # made when read
            residual=residual,
            area=model.area if area is None else area,
            factors=dict(factors or {}),
        )
    return items


def _loaded_nodes(f: np.ndarray, n: int) -> np.ndarray | None:
    """The nodes (ascending) with a non-zero entry of one load column f (3n), or None.

    None when at least one node in :data:`_SPARSE_LOADS` is loaded (the loads
    are then kept whole).  The column's non-zero entries come in node order,
    so their nodes need no sort: a pass of the column instead of numpy's
    any() over rows of 3 (0.4 ms a column of a 100k-member model).
    """
    rows = np.flatnonzero(f)  # NaN counts as not 0: such loads are kept
    if rows.size * _SPARSE_LOADS >= 3 * n:  # at least rows / 3 nodes: n / 4 or more
        return None
    nodes = rows // 3
    nodes = nodes[np.r_[True, nodes[1:] != nodes[:-1]]] if nodes.size else nodes
    return nodes if nodes.size * _SPARSE_LOADS < n else None


def _node_sums(X: np.ndarray, n: int,
               nodes: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Sums over the nodes of X (3n x columns) and of |X|, each (3, columns).

    Read as the block lies (column by column or row by row), without a copy;
    each column's sum adds node after node in either layout.  ``nodes``: the
    only nodes where X may not be 0 (a block's reactions); without them, when
    fewer than one row in 4 is not 0 (a block of point-load cases), only
    those rows' nodes are summed: a pass of 20-30 ms per block of a 100k-member
    model becomes one of about 1 ms (adding zeros changes no sum).
    """
    if nodes is None:
        rows = np.flatnonzero(X.any(axis=1))  # NaN counts as not 0: it reaches the sums
        if rows.size * 4 < X.shape[0]:
            nodes = np.unique(rows // 3)
    if nodes is not None:
        X3 = X.reshape(n, 3, -1)[nodes]  # (nodes, axes, columns): a copy of those rows
        return X3.sum(axis=0), np.abs(X3).sum(axis=0)
    if X.flags.f_contiguous and not X.flags.c_contiguous:
        by_node = X.T.reshape(X.shape[1], n, 3)  # a view: columns, nodes, axes
        return by_node.sum(axis=1).T, np.abs(by_node).sum(axis=1).T
    X3 = X.reshape(n, 3, -1)
    return X3.sum(axis=0), np.abs(X3).sum(axis=0)


#: A result's loads are kept as their loaded nodes' rows when fewer than one
#: node in this many is loaded.
_SPARSE_LOADS = 4

#: Rows copied together by :func:`_column_major`.
_BAND_ROWS = 2048


def _column_major(X: np.ndarray) -> np.ndarray:
    """X stored column by column, copied a band of rows at a time.

    Measured on a (90k x 64) block: numpy's own copy to column-major order
    takes 48-130 ms (it reads the source one cache line per value), a band of
    2048 rows at a time 20 ms; for a few columns numpy's copy is as fast.
    """
    if X.flags.f_contiguous or X.ndim != 2 or X.shape[1] <= 8:
        return np.asfortranarray(X)
    out = np.empty(X.shape, dtype=X.dtype, order="F")
    for lo in range(0, X.shape[0], _BAND_ROWS):
        out[lo:lo + _BAND_ROWS] = X[lo:lo + _BAND_ROWS]
    return out


def _finite_columns(labels: list[tuple[str, str, Any]], what: str, arr: np.ndarray) -> None:
    """Fail closed, naming the first result whose column of ``arr`` is not all finite."""
    bad = ~np.all(np.isfinite(arr), axis=0)
    if np.any(bad):
        kind, name, _ = labels[int(np.flatnonzero(bad)[0])]
        raise SolverError(
            f"{kind} {name!r}: the solver returned non-finite {what} (numbers beyond the "
            "range of float64: check the units of E, areas and loads)"
        )
