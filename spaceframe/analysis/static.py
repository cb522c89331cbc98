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
from typing import TYPE_CHECKING

import numpy as np

from spaceframe.analysis.selfchecks import (
    _finite_columns,
    _make_results,
    _scale_terms,
    check_equilibrium,
)
from spaceframe.analysis.stability import check_conditioning, check_stability, name_singular
from spaceframe.assembly import equilibrium_matrix, full_symmetric, reduced_stiffness
from spaceframe.errors import SpaceframeWarning
from spaceframe.results import CaseResult, Results
from spaceframe.solvers import (
    Factor,
    SingularFactor,
    factorize,
    needs_upper,
    resolve_backend,
    solve_into,
)

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
#: (labels, U, F, E0, refine, kept) as :meth:`_Static.results` takes them.
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


def reduced_system(model: Model, backend: str = "scipy") -> tuple[sp.csr_matrix, np.ndarray]:
    """Reduced stiffness (free dofs, springs on the diagonal) in the back-end's triangle."""
    return reduced_stiffness(model, "upper" if needs_upper(backend) else "full")


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
    """Largest displacement magnitude of each column of U (3n x columns), and its node.

    From the squared magnitudes in one pass; a column whose largest square
    is outside 1e-290..1e290 (where squares overflow, or underflow enough to
    hide the largest) is scaled by its largest entry first.
    """
    n, c = U.shape[0] // 3, U.shape[1]
    if n == 0:
        return np.zeros(c), np.zeros(c, dtype=int)
    U3 = U.reshape(n, 3, c)
    with np.errstate(over="ignore", invalid="ignore"):
        squares = np.einsum("ijk,ijk->ik", U3, U3)
    nodes = np.argmax(squares, axis=0)
    top = squares[nodes, np.arange(c)]
    peaks = np.sqrt(top)
    rest = np.flatnonzero(~((top < 1e290) & (top > 1e-290)))
    if rest.size:
        sub = U3[:, :, rest]
        big = np.abs(sub).max(axis=(0, 1))
        big = np.where((big > 0) & np.isfinite(big), big, 1.0)
        scaled = sub / big  # no overflow in the squares
        mag = np.sqrt(np.einsum("ijk,ijk->ik", scaled, scaled))
        nodes[rest] = np.argmax(mag, axis=0)
        peaks[rest] = mag[nodes[rest], np.arange(rest.size)] * big
    return peaks, nodes


def _case_columns(model: Model, names: list[str], temperature: bool, settlement: bool,
                  F: np.ndarray | None = None
                  ) -> tuple[np.ndarray, np.ndarray | None, np.ndarray | None]:
    """Forces F (3n x c), free elongations E0 (b x c) and settlements UP of some cases.

    E0 and UP are None when no case of the model has any (at 1000 cases of a
    100k-member model each would be 0.6-0.8 GB of zeros).  ``F``: the array
    to fill (column-major), else a new one.
    """
    n, b, c = model.n_nodes, model.n_members, len(names)
    # Column by column (each case's column contiguous): filled a column at a
    # time, solved as PARDISO takes them, and recovered from there.
    if F is None:
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
        self.buffers: dict[str, np.ndarray] = {}

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
                rhs = self.buffer("rhs", free.size, F.shape[1])
                self._copy_rows(F, rhs, gather=True)
            # Both back-ends reject zero pivots (solvers.PIVOT_TOLERANCE), so a
            # mechanism the loads happen to miss is caught without a probe column.
            sol = solve_into(self.factor, rhs, self.buffer("solution", free.size, F.shape[1]))
            _check_finite(names, sol)
            self._copy_rows(U, sol, gather=False)
        self.timings["solve"] += time.perf_counter() - t
        return U

    def buffer(self, key: str, rows: int, columns: int) -> np.ndarray:
        """A (``rows`` x ``columns``) work array, column by column, the same one each block.

        The cases' loads, the solve's right-hand sides and its solutions pass
        through these on their way into U: one array each for the whole solve
        rather than new ones per block, each paged in afresh.
        """
        buf = self.buffers.get(key)
        if buf is None or buf.shape[1] < columns:
            buf = self.buffers[key] = np.empty((rows, columns), order="F")
        return buf[:, :columns]

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
                ) -> tuple[dict[str, CaseResult], tuple[np.ndarray, np.ndarray]]:
        """The checked results of the columns U (refined first when ``refine``).

        Also each result's largest displacement and its node
        (:func:`_peak_displacements`).  ``kept``: the same U and F stored
        column by column, for the results to hold (refined columns are copied
        into it); without it the results hold column-major copies.  Safe to
        call from several threads at once (the factor's solves take turns).
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
        if kept is not None:  # the results hold these (_make_results keeps them as they are)
            if refined:
                cols = np.unique(np.concatenate(refined))
                kept[0][:, cols] = U[:, cols]
            U, F = kept
        items = _make_results(self.model, labels, U, T, None, F, E0, A, self.absA,
                              self.spring, self.restrained, area=self.area,
                              known=(out, scales))
        return items, peak

    def recover(self, blocks: list[_Block]) -> list[dict[str, CaseResult]]:
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
        self.peaks.extend(peak for _, peak in done)
        self.timings["recover"] += time.perf_counter() - t
        return [items for items, _ in done]


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
    blocks: list[tuple[slice, np.ndarray, np.ndarray | None]] = []
    width = _block_columns(model)
    wide = _solve_columns(model, width)
    # Combinations: a combination's column is U @ w over the cases, so each
    # result is what the combined load vector gives on its own.  Their loads
    # F @ w are summed block by block as the cases are solved: the cases'
    # load columns then pass through one work array (the results keep each
    # case's loads themselves, compactly where they are sparse).
    comb = list(model.combinations.items())
    weights = np.zeros((len(names), len(comb)))
    for i, (_, factors) in enumerate(comb):
        for case, f in factors.items():
            weights[names.index(case), i] += f
    FC_all = np.zeros((3 * model.n_nodes, len(comb)), order="F")
    for lo in range(0, len(names), wide):
        part = names[lo:lo + wide]
        F, E0, UP = _case_columns(model, part, temperature, settlement,
                                  F=run.buffer("loads", 3 * model.n_nodes, len(part)))
        U = run.solve_cases(part, F, E0, UP)
        subs = [slice(a, a + width) for a in range(0, len(part), width)]
        # Each block computed row by row (what the sparse products take), kept
        # column by column as U and F are: the results hold views of them, and
        # the combinations are made from them.
        todo: list[_Block] = [
            ([("case", name, None) for name in part[c]], np.ascontiguousarray(U[:, c]),
             np.ascontiguousarray(F[:, c]),
             None if E0 is None else np.ascontiguousarray(E0[:, c]), True,
             (U[:, c], F[:, c])) for c in subs]
        for c, done, job in zip(subs, run.recover(todo), todo, strict=True):
            items.update(done)
            cols = slice(lo + c.start, lo + c.stop)
            blocks.append((cols, U[:, c], job[3]))
            if comb:
                with np.errstate(over="ignore", invalid="ignore"):  # checked in the results
                    FC_all += F[:, c] @ weights[cols]
    starts = list(range(0, len(comb) if blocks else 0, width))
    for group in range(0, len(starts), _RECOVER_THREADS):  # as many blocks as threads
        todo = []
        for lo in starts[group:group + _RECOVER_THREADS]:
            cc = slice(lo, lo + width)
            with np.errstate(over="ignore", invalid="ignore"):  # checked in the results
                UC = sum(U @ weights[cols, cc] for cols, U, _ in blocks)
                EC = (sum(E0 @ weights[cols, cc] for cols, _, E0 in blocks
                          if E0 is not None) if temperature else None)
            todo.append(([("combination", c, f) for c, f in comb[cc]], np.asarray(UC),
                         np.ascontiguousarray(FC_all[:, cc]),
                         None if EC is None else np.asarray(EC), False, None))
        for done in run.recover(todo):
            items.update(done)
    if run.peaks:
        _warn_large(model, list(items), np.concatenate([p for p, _ in run.peaks]),
                    np.concatenate([q for _, q in run.peaks]))
    timings["total"] = time.perf_counter() - t0
    return Results(model, items, solver=factor.name if factor is not None else "none",
                   timings=timings, info={"dofs": int(free.size), "nnz": int(K.nnz)})
