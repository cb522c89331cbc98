"""Linear static analysis of every load case, combinations by superposition.

The reduced system is K_ff u_f = f_f + (A k e0)_f - (A k A^T u_p)_f, where
u_p holds the prescribed (settlement) displacements and e0 = L (alpha dT + eps0)
the free elongations.  Member forces are t = k (A^T u - e0) and the reactions
follow from equilibrium, R = A t - f, at supported and sprung directions.
Each result then checks itself (finite values, residual, balance per axis).
"""

from __future__ import annotations

import os
import threading
import time
import warnings
from concurrent.futures import ThreadPoolExecutor
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
#: ... and fewer for a large model, so that each temporary stays within this
#: many bytes: the C library hands larger blocks to the system on every free
#: (above its 32 MB mmap threshold), and every new one is then paged in again
#: (1000 cases of a 100k-member model spent more time on that than on the sums).
_BLOCK_BYTES = 16 * 2**20


#: Right-hand sides solved in one call, at most this many bytes of them:
#: PARDISO's forward and back substitution read the whole factor once per
#: call, so wide blocks cost far less per column (100k members: 8 ms a column
#: in blocks of 20, 4 ms in blocks of 100); they are recovered in narrower ones.
_SOLVE_BYTES = 64 * 2**20
_SOLVE_COLUMNS = 128
#: Threads that recover blocks of columns side by side (numpy's and scipy's
#: loops over large arrays run without the GIL).
_RECOVER_THREADS = min(2, os.cpu_count() or 1)


#: A result's (kind, name, factors), and a block of columns to recover:
#: (labels, U, F, E0, refine).
_Label = tuple[str, str, "dict[str, float] | None"]
_Block = tuple[list[_Label], np.ndarray, np.ndarray, "np.ndarray | None", bool,
               "tuple[np.ndarray, np.ndarray] | None"]


#: Runs of free directions copied run by run up to this many (or one per 256
#: free directions); more and shorter runs are copied column by column.
_FEW_RUNS = 64


def _block_columns(model: Model) -> int:
    """Columns per block of the recovery: :data:`_RECOVER_BLOCK`, fewer for a large model."""
    rows = max(3 * model.n_nodes, model.n_members, 1)
    return max(4, min(_RECOVER_BLOCK, _BLOCK_BYTES // (8 * rows)))


def _solve_columns(model: Model, width: int) -> int:
    """Columns per call of the solve: a multiple of the recovery's ``width``."""
    rows = max(3 * model.n_nodes, model.n_members, 1)
    wide = min(_SOLVE_COLUMNS, _SOLVE_BYTES // (8 * rows))
    return max(width, wide // width * width)

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
    _finite_columns([("case", name, None) for name in names], what, uf)


def full_matrix(K: sp.spmatrix, backend: str) -> sp.spmatrix:
    """The full symmetric matrix from what the back-end was given."""
    return full_symmetric(K, "upper" if needs_upper(backend) else "full")


def _warn_large(model: Model, names: list[str], peaks: np.ndarray, nodes: np.ndarray) -> None:
    """One SpaceframeWarning when displacements exceed the linear range.

    ``peaks`` and ``nodes``: each result's largest displacement and its node
    (:func:`_peak_displacements`).
    """
    if not names or model.n_nodes == 0:
        return
    limit = LARGE_DISPLACEMENT_FRACTION * model.size
    over = np.flatnonzero(peaks > limit)
    if not over.size:
        return
    j = int(over[np.argmax(peaks[over])])
    others = f" ({over.size} results in all)" if over.size > 1 else ""
    warnings.warn(
        f"result {names[j]!r}: largest displacement {peaks[j]:.3g} m at node {nodes[j]} is "
        f"{peaks[j] / model.size:.3g} times the model size ({model.size:.3g} m), beyond "
        f"{LARGE_DISPLACEMENT_FRACTION:.0%}{others}: a linear analysis is not valid at such "
        "displacements; a geometrically nonlinear analysis is needed",
        SpaceframeWarning,
        stacklevel=4,
    )


def _peak_displacements(U: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Largest displacement magnitude of each column of U (3n x columns), and its node."""
    n, c = U.shape[0] // 3, U.shape[1]
    if n == 0:
        return np.zeros(c), np.zeros(c, dtype=int)
    big = np.abs(U).max(axis=0)
    big = np.where((big > 0) & np.isfinite(big), big, 1.0)
    scaled = U.reshape(n, 3, c) / big  # no overflow in the squares
    mag = np.sqrt(np.einsum("ijk,ijk->ik", scaled, scaled))
    nodes = np.argmax(mag, axis=0)
    return mag[nodes, np.arange(c)] * big, nodes


def _case_columns(model: Model, names: list[str], temperature: bool,
                  settlement: bool) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """Forces F (3n x c), free elongations E0 (b x c) and settlements UP of some cases.

    E0 and UP are None when no case of the model has any (at 1000 cases of a
    100k-member model each would be 0.6-0.8 GB of zeros).
    """
    n, b, c = model.n_nodes, model.n_members, len(names)
    # Column by column (each case's column contiguous): filled a column at a
    # time, solved as PARDISO takes them, and kept as the results hold them.
    F = np.empty((3 * n, c), order="F")
    E0 = np.zeros((b, c), order="F") if temperature else None
    UP = np.zeros((3 * n, c), order="F") if settlement else None
    for j, name in enumerate(names):
        lc = model.cases[name]
        F[:, j] = lc.forces.reshape(-1)
        if E0 is not None:
            E0[:, j] = model.lengths * (model.alpha * lc.temperature + lc.initial_strain)
        if UP is not None:
            UP[:, j] = np.where(lc.settlement_mask, lc.settlement, 0.0).reshape(-1)
    if UP is not None:
        UP[~model.restraint.reshape(-1)] = 0.0
    return F, E0, UP


class _Static:
    """What every block of columns of one static solve shares."""

    def __init__(self, model: Model, A: sp.spmatrix, free: np.ndarray,
                 factor: Factor | None, timings: dict[str, float]) -> None:
        self.model, self.A, self.absA, self.free = model, A, abs(A), free
        self.factor, self.timings = factor, timings
        self.k = model.axial_stiffness
        self.spring = model.springs.ravel()
        self.restrained = model.restraint.ravel()
        self.restrained_rows = np.flatnonzero(self.restrained)
        self.has_springs = bool(np.any(self.spring > 0))
        # The free directions as runs of consecutive rows: (first, end, place
        # in the free rows) each.
        cut = np.flatnonzero(np.diff(free) != 1) + 1
        first = np.r_[0, cut] if free.size else np.zeros(0, dtype=np.intp)
        last = np.r_[cut, free.size] if free.size else np.zeros(0, dtype=np.intp)
        self.runs = np.c_[free[first], free[last - 1] + 1, first].astype(np.intp)
        self.area = np.array(model.area, dtype=float)
        self.area.flags.writeable = False  # one snapshot, shared by every result
        self.peaks: list[tuple[np.ndarray, np.ndarray]] = []
        # One solve at a time through the factor (the refinement of blocks
        # recovered side by side): a PARDISO handle is not shared by threads.
        self.lock = threading.Lock()

    def solve_cases(self, names: list[str], F: np.ndarray, E0: np.ndarray | None,
                    UP: np.ndarray | None) -> np.ndarray:
        """Displacements (3n x c, column by column) of the cases whose columns are F, E0, UP."""
        t = time.perf_counter()
        A, k, free = self.A, self.k, self.free
        U = np.zeros(F.shape, order="F") if UP is None else np.asfortranarray(UP)
        if self.factor is not None:
            if E0 is not None or UP is not None:
                # Free elongations less those the prescribed displacements impose.
                e = (0.0 if E0 is None else E0) - (0.0 if UP is None else A.T @ UP)
                rhs = np.asfortranarray((F + A @ (k[:, None] * e))[free])
            else:
                rhs = np.empty((free.size, F.shape[1]), order="F")
                self._copy_rows(F, rhs, gather=True)
            # Both back-ends reject zero pivots (solvers.PIVOT_TOLERANCE), so a
            # mechanism the loads happen to miss is caught without a probe column.
            sol = self.factor.solve(rhs).reshape(free.size, F.shape[1])
            _check_finite(names, sol)
            self._copy_rows(U, sol, gather=False)
        self.timings["solve"] += time.perf_counter() - t
        return U

    def _copy_rows(self, full: np.ndarray, part: np.ndarray, gather: bool) -> None:
        """``part[:] = full[free]`` (``gather``) or ``full[free] = part``, column-major blocks.

        Free directions come in long runs between the few restrained ones:
        slices of runs copy several times faster than numpy's row index
        (measured 60-70 ms for 80 columns of a 100k-member model); with many
        short runs, column by column.
        """
        runs = self.runs
        if runs.shape[0] <= max(_FEW_RUNS, self.free.size // 256):
            for a, b, c in runs:
                if gather:
                    part[c:c + b - a] = full[a:b]
                else:
                    full[a:b] = part[c:c + b - a]
            return
        for j in range(part.shape[1]):
            if gather:
                np.take(full[:, j], self.free, out=part[:, j])
            else:
                full[self.free, j] = part[:, j]

    def _refine(self, names: list[str], U: np.ndarray, F: np.ndarray,
                out: np.ndarray, scale_terms: np.ndarray) -> np.ndarray:
        """One step of iterative refinement of the columns that need it; those columns.

        The out-of-balance forces at free directions, plus the springs' k u,
        are the solve's own residual K u - f; |A| k (|A^T| |u| + |e0|) + |f|
        + s |u| bounds |K| |u| + |f_f + (A k e)_f| entry by entry, so each
        column's componentwise backward error is measured from the recovery's
        own terms (Skeel's test, with a bound no smaller than its own).
        """
        if self.factor is None:
            return np.zeros(0, dtype=np.intp)
        s = self.spring[:, None]
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            # Over every row at once (rows picked out by an index would be
            # copies), the restrained rows set to 0 afterwards: they are few.
            ratio = np.abs(out + s * U if self.has_springs else out)
            denom = scale_terms + np.abs(F)
            if self.has_springs:
                denom += s * np.abs(U)
            np.divide(ratio, denom, out=ratio)
            ratio[self.restrained_rows] = 0.0
            # 0/0 (nothing there) is no error: fmax skips the NaN; r/0 with
            # r > 0 is infinite and left to the self-checks, as is NaN input.
            omega = np.fmax.reduce(ratio, axis=0, initial=0.0)
        again = np.flatnonzero(~(omega <= REFINE_ABOVE) & np.isfinite(omega))
        if not again.size:
            return again
        free = self.free
        res = out[np.ix_(free, again)] + self.spring[free, None] * U[np.ix_(free, again)]
        with self.lock:
            step = self.factor.solve(-res).reshape(free.size, again.size)
        _check_finite([names[j] for j in again], step)
        U[np.ix_(free, again)] += step
        return again

    def results(self, labels: list[tuple[str, str, dict[str, float] | None]],
                U: np.ndarray, F: np.ndarray, E0: np.ndarray | None, refine: bool,
                kept: tuple[np.ndarray, np.ndarray] | None = None
                ) -> tuple[dict[str, CaseResult], np.ndarray, np.ndarray,
                           tuple[np.ndarray, np.ndarray]]:
        """The checked results of the columns U (refined first when ``refine``).

        Also the displacements and loads as the results hold them (column by
        column, shared), for the combinations, and each result's largest
        displacement and its node (:func:`_peak_displacements`).  ``kept``:
        the same U and F stored column by column, for the results to hold
        (refined columns are copied into it), else U and F are copied so.
        Safe to call from several threads at once (the factor's solves take
        turns).
        """
        A, k = self.A, self.k
        refined: list[np.ndarray] = []
        for step in range(_REFINE_STEPS + 1):
            with np.errstate(over="ignore", invalid="ignore"):
                elong = A.T @ U
                T = k[:, None] * (elong if E0 is None else elong - E0)
                out = A @ T - F
            scales = None
            if not refine or step == _REFINE_STEPS:
                break
            scales = _scale_terms(U, E0, self.absA, k)
            again = self._refine([lab[1] for lab in labels], U, F, out, scales[1])
            if not again.size:
                break
            refined.append(again)
        peak = _peak_displacements(U)
        # Stored column by column before the checks, so that the results and
        # the combinations share the one copy (_make_results keeps it as it is).
        if kept is None:
            U, F = _column_major(U), _column_major(F)
        else:
            if refined:
                cols = np.unique(np.concatenate(refined))
                kept[0][:, cols] = U[:, cols]
            U, F = kept
        items = _make_results(self.model, labels, U, T, None, F, elong, E0, A, self.absA,
                              self.spring, self.restrained, area=self.area,
                              known=(out, scales))
        return items, U, F, peak

    def recover(self, blocks: list[_Block]
                ) -> list[tuple[dict[str, CaseResult], np.ndarray, np.ndarray]]:
        """:meth:`results` of each (labels, U, F, E0, refine, kept) block, in order.

        Blocks are recovered side by side on :data:`_RECOVER_THREADS` threads
        (the first error, in block order, is raised); their largest
        displacements go into ``self.peaks``.
        """
        t = time.perf_counter()
        if len(blocks) > 1 and _RECOVER_THREADS > 1:
            with ThreadPoolExecutor(_RECOVER_THREADS, thread_name_prefix="recover") as pool:
                done = list(pool.map(lambda b: self.results(*b), blocks))
        else:
            done = [self.results(*b) for b in blocks]
        self.peaks.extend(d[3] for d in done)
        self.timings["recover"] += time.perf_counter() - t
        return [d[:3] for d in done]


def solve_static(model: Model, solver: str = "auto") -> Results:
    """Solve all load cases with one factorisation; see :meth:`Model.solve`."""
    t0 = time.perf_counter()
    timings: dict[str, float] = {"solve": 0.0, "recover": 0.0}
    model.validate()
    backend = resolve_backend(solver)
    check_stability(model)
    check_conditioning(model)
    timings["stability"] = time.perf_counter() - t0

    names = list(model.cases)
    for lc in model.cases.values():
        lc.resize(model.n_nodes, model.n_members)

    t = time.perf_counter()
    A = equilibrium_matrix(model)
    K, free = reduced_system(model, backend)
    timings["assemble"] = time.perf_counter() - t

    factor: Factor | None = None
    if free.size:  # else every direction is restrained: nothing to solve
        t = time.perf_counter()
        try:
            # No refinement inside PARDISO: the recovery measures every column's
            # backward error and solves again only those above the bar
            # (PARDISO's own refinement would solve every column two more times).
            factor = factorize(K, backend, refine=False)
        except SingularFactor as exc:
            name_singular(model, full_matrix(K, backend), free, exc)
        timings["factorise"] = time.perf_counter() - t
    run = _Static(model, A, free, factor, timings)
    temperature = any(np.any(lc.temperature) or np.any(lc.initial_strain)
                      for lc in model.cases.values())
    settlement = any(np.any(lc.settlement_mask) for lc in model.cases.values())
    items: dict[str, CaseResult] = {}
    # Cases a block of columns at a time, from loads to checked results: the
    # temporaries stay a few arrays of (model rows x block) however many cases.
    # The solve takes wider blocks than the recovery (_solve_columns).
    blocks: list[tuple[slice, np.ndarray, np.ndarray, np.ndarray | None]] = []
    width = _block_columns(model)
    wide = _solve_columns(model, width)
    for lo in range(0, len(names), wide):
        part = names[lo:lo + wide]
        F, E0, UP = _case_columns(model, part, temperature, settlement)
        U = run.solve_cases(part, F, E0, UP)
        subs = [slice(a, a + width) for a in range(0, len(part), width)]
        # Each block computed row by row (what the sparse products take), kept
        # column by column as U and F are (the results hold views of them).
        todo: list[_Block] = [
            ([("case", name, None) for name in part[c]], np.ascontiguousarray(U[:, c]),
             np.ascontiguousarray(F[:, c]),
             None if E0 is None else np.ascontiguousarray(E0[:, c]), True,
             (U[:, c], F[:, c])) for c in subs]
        del U, F, UP
        for c, (done, Ub, Fb), job in zip(subs, run.recover(todo), todo, strict=True):
            items.update(done)
            blocks.append((slice(lo + c.start, lo + c.stop), Ub, Fb, job[3]))
    # Combinations: a combination's column is U @ w over the cases, so each
    # result is what the combined load vector gives on its own.
    comb = list(model.combinations.items())
    weights = np.zeros((len(names), len(comb)))
    for i, (_, factors) in enumerate(comb):
        for case, f in factors.items():
            weights[names.index(case), i] += f
    starts = list(range(0, len(comb) if blocks else 0, width))
    for group in range(0, len(starts), _RECOVER_THREADS):  # as many blocks as threads
        todo = []
        for lo in starts[group:group + _RECOVER_THREADS]:
            cc = slice(lo, lo + width)
            with np.errstate(over="ignore", invalid="ignore"):  # checked in the results
                UC = sum(U @ weights[cols, cc] for cols, U, _, _ in blocks)
                FC = sum(F @ weights[cols, cc] for cols, _, F, _ in blocks)
                EC = (sum(E0 @ weights[cols, cc] for cols, _, _, E0 in blocks
                          if E0 is not None) if temperature else None)
            todo.append(([("combination", c, f) for c, f in comb[cc]], np.asarray(UC),
                         np.asarray(FC), None if EC is None else np.asarray(EC), False, None))
        for done, _, _ in run.recover(todo):
            items.update(done)
    if run.peaks:
        _warn_large(model, list(items), np.concatenate([p for p, _ in run.peaks]),
                    np.concatenate([q for _, q in run.peaks]))
    timings["total"] = time.perf_counter() - t0
    return Results(model, items, solver=factor.name if factor is not None else "none",
                   timings=timings, info={"dofs": int(free.size), "nnz": int(K.nnz)})


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
    elong: np.ndarray,
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
        tiny = np.abs(T) <= ROUND_OFF * member_scale
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
        f_total, f_size = _node_sums(F, n)
        r_total, r_size = _node_sums(R, n)
        imbalance = np.abs(f_total + r_total)  # (3, columns)
        ref = np.maximum(f_size.max(axis=0, initial=0.0), r_size.max(axis=0, initial=0.0))
    # Each result's arrays are views of its column of the block arrays, which
    # the results own together, stored column by column: one copy of each
    # block, after which every result's array is contiguous (a column of a
    # row-major block of 64 would be read one cache line per value by every
    # table, picture and check that follows).
    U, T, R, F, elong = (_column_major(X) for X in (U, T, R, F, elong))
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


def _node_sums(X: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Sums over the nodes of X (3n x columns) and of |X|, each (3, columns).

    Read as the block lies (column by column or row by row), without a copy;
    each column's sum adds node after node in either layout.
    """
    if X.flags.f_contiguous and not X.flags.c_contiguous:
        by_node = X.T.reshape(X.shape[1], n, 3)  # a view: columns, nodes, axes
        return by_node.sum(axis=1).T, np.abs(by_node).sum(axis=1).T
    X3 = X.reshape(n, 3, -1)
    return X3.sum(axis=0), np.abs(X3).sum(axis=0)


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
