"""Large displacements of pin-jointed bars, traced by an arc-length method.

Formulation
-----------
Each member is a co-rotational bar with **engineering strain**: in the
current configuration x = X + u a member has length l, unit vector c along
its current chord and

    N = EA (l - L0) / L0                      (tension positive)

acting along c.  The internal force vector is the sum over members of
N (-c, +c) at its two ends, plus spring forces k u at sprung directions (the
springs keep their global directions).  Its exact derivative, the tangent
stiffness, is per member

    k_t = EA/L0 c c^T + N/l (I - c c^T)       (material + geometric)

in the 6x6 pattern [[k_t, -k_t], [-k_t, k_t]].  Supports restrain global
directions as in the linear static analysis (see analysis.static).  The
loads of one case or combination form the reference load q; equilibrium
f_int(u) = lambda q is followed in the load factor lambda.

Path following
--------------
Crisfield's cylindrical arc-length method (M. A. Crisfield, "A fast
incremental/iterative solution procedure that handles snap-through",
Computers & Structures 13, 1981, 55-62; and Non-linear Finite Element
Analysis of Solids and Structures, Vol. 1, Wiley 1991, §9.3): each step
keeps ||Delta u|| = Delta l with full Newton corrections, the quadratic
constraint's root nearest the previous increment, and the predictor's sign
from the previous increment (the dot-product rule, which follows snap-back
where the sign of det K_t alone would not).  The arc length adapts to the
iterations used (Crisfield's sqrt(I_desired / I) rule); a step that fails
(no convergence, complex roots, singular tangent, NaN) is halved and retried.

Limit points of the load factor are located where the tangent load rate
d lambda / d s (oriented along the path) changes sign: the step is repeated
from its start with shorter arc lengths (regula falsi on the rate) until the
load factor at the found point is within ``limit_tolerance`` of the maximum,
and that point is inserted into the path.  Where the count of negative
pivots (below) changes with no such sign change, a branch point (bifurcation)
is passed; it is located by bisection in the arc length to the same
tolerance and inserted too.  Branches are reported, not followed.  The path stops with a step that
lands exactly on ``max_load_factor`` (load-controlled Newton from the
interpolated state) the first time the load factor rises through it.

Inertia
-------
The number of negative eigenvalues of the tangent is counted at every
converged step from a sparse LU (SuperLU) with diagonal pivots only and a
symmetric ordering: then P K P^T = L D L^T with U = D L^T, so by Sylvester's
law of inertia the negative entries of diag(U) count K's negative
eigenvalues.  When SuperLU had to leave the diagonal (its row and column
permutations differ) or needed partial pivoting, the count is unknown (-1).

Results must be checked by a qualified engineer.

The member assembly here duplicates the geometric-stiffness assembly planned
for a shared module of element matrices; to be unified with it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp

from spaceframe.analysis.stability import check_stability
from spaceframe.assembly import member_dofs
from spaceframe.errors import ModelError, SolverError

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["STRAIN_MEASURE", "LoadPath", "PathError", "solve_nonlinear"]

#: The strain measure and formulation, stated in every result.
STRAIN_MEASURE = "engineering strain (l - L0)/L0, co-rotational bar"

#: Newton iterations aimed at per step when the arc length adapts.
_DESIRED_ITERATIONS = 5

#: Bounds on the arc length relative to the first one: it may grow this much
#: on easy stretches and shrink this much before a step is given up.
_MAX_GROWTH = 10.0
_MIN_SHRINK = 1.0e-6


class PathError(SolverError):
    """The path could not be continued; ``path`` holds the converged steps so far."""

    def __init__(self, message: str, path: LoadPath | None = None) -> None:
        super().__init__(message)
        self.path = path


@dataclass
class LoadPath:
    """An equilibrium path under a growing load factor (SI units, tension positive).

    Attributes
    ----------
    name : str
        Load case or combination.
    kind : {"case", "combination"}
    load_factors : (s,) float
        Load factor of each converged step; step 0 is the unloaded state.  It
        may fall after a limit point; the last step is exactly
        ``max_load_factor``.
    displacements : (s, n, 3) float
        Nodal displacements, m.
    axial_forces : (s, b) float
        Member axial forces N = EA (l - L0)/L0, N.
    reactions : (s, n, 3) float
        Forces that supports and springs exert on the nodes, N.
    loads : (n, 3) float
        Reference load (load factor 1), N.
    limit_points : (k,) int
        Indices into the steps where the load factor passes a maximum or a
        minimum (sign change of its increment; located steps, see module notes).
    negative_pivots : (s,) int
        Negative eigenvalues of the tangent stiffness at each step (-1: unknown).
    iterations : (s,) int
        Newton iterations of each step.
    residuals : (s,) float
        Relative equilibrium residual of each step,
        ||f_int - lambda q|| / (||lambda q|| + || sum |N c| ||).
    cutbacks : int
        Steps that failed and were retried with a shorter arc length.
    max_load_factor : float
    strain_measure : str
    factors : dict
        For a combination, its case factors.
    """

    name: str
    kind: str
    load_factors: np.ndarray
    displacements: np.ndarray
    axial_forces: np.ndarray
    reactions: np.ndarray
    loads: np.ndarray
    limit_points: np.ndarray
    negative_pivots: np.ndarray
    iterations: np.ndarray
    residuals: np.ndarray
    cutbacks: int
    max_load_factor: float
    strain_measure: str = STRAIN_MEASURE
    factors: dict[str, float] = field(default_factory=dict)

    @property
    def n_steps(self) -> int:
        """Number of steps, the unloaded state included."""
        return int(self.load_factors.shape[0])

    @property
    def limit_load_factors(self) -> np.ndarray:
        """(k,) float: load factors at the limit points."""
        return self.load_factors[self.limit_points]

    @property
    def bifurcation_points(self) -> np.ndarray:
        """(k,) int: steps where the negative-pivot count changes away from a limit point.

        Step k is the first with the new count; its load factor is within
        ``limit_tolerance`` of the point where an eigenvalue of the tangent
        passed zero with no extremum of the load factor: a branch point of
        the path.  Branches are detected, not followed.
        """
        neg = self.negative_pivots
        known = (neg[:-1] >= 0) & (neg[1:] >= 0)
        change = np.flatnonzero(known & (neg[:-1] != neg[1:])) + 1
        near = np.union1d(self.limit_points, self.limit_points + 1)
        return np.setdiff1d(change, near)

    def __repr__(self) -> str:
        return (
            f"LoadPath({self.kind} {self.name!r}, {self.n_steps} steps to load factor "
            f"{self.load_factors[-1]:.6g}, {self.limit_points.size} limit points, "
            f"{self.strain_measure})"
        )


# --------------------------------------------------------------------- system
class _Tangent:
    """A factorised tangent stiffness with its negative-pivot count."""

    def __init__(self, K: sp.csr_matrix) -> None:
        import scipy.sparse.linalg as spla

        Kc = sp.csc_matrix(K)
        self.negative = -1
        try:
            # Diagonal pivots in a symmetric ordering: an LDL^T in LU clothing,
            # whose pivots give the inertia (module notes).
            lu = spla.splu(
                Kc,
                permc_spec="MMD_AT_PLUS_A",
                diag_pivot_thresh=0.0,
                options={"SymmetricMode": True},
            )
        except RuntimeError:
            lu = None
        if lu is not None and np.array_equal(lu.perm_r, lu.perm_c):
            d = lu.U.diagonal()
            if np.all(np.isfinite(d)) and np.all(d != 0):
                self.negative = int(np.count_nonzero(d < 0))
        if lu is None:
            # Partial pivoting: a sound solve, but the inertia is unknown.
            lu = spla.splu(Kc)  # raises RuntimeError when exactly singular
        self._lu = lu

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        return np.asarray(self._lu.solve(np.asarray(rhs, dtype=float)))


@dataclass
class _State:
    """A configuration: free displacements, load factor and what follows from them."""

    uf: np.ndarray
    lam: float
    N: np.ndarray
    length: np.ndarray
    c: np.ndarray
    fint: np.ndarray  # (3n,) member forces on the nodes, springs excluded
    residual: float = 0.0
    iterations: int = 0
    tangent: _Tangent | None = None
    rate: float = 0.0  # d lambda / d s along the path at this state


class _Bars:
    """The reduced nonlinear system of one model and one reference load.

    The sparsity pattern of the reduced tangent is found once; each assembly
    only sums the member values into it (one bincount, no sparse build).
    """

    def __init__(self, model: Model, f: np.ndarray) -> None:
        self.n = model.n_nodes
        self.X = model.nodes.astype(float).copy()
        self.members = model.members.astype(np.int64).copy()
        self.L0 = model.lengths.copy()
        self.D = self.X[self.members[:, 1]] - self.X[self.members[:, 0]]
        self.EA = model.E * model.area
        self.f = f
        self.restrained = model.restraint.ravel().copy()
        self.free = np.flatnonzero(~self.restrained)
        self.spring_all = model.springs.ravel().copy()
        self.spring = self.spring_all[self.free]
        self.q = f[self.free]
        nf = self.free.size
        self.nf = nf
        dof_map = np.full(3 * self.n, -1, dtype=np.int64)
        dof_map[self.free] = np.arange(nf)
        self.dofs = member_dofs(self.members).astype(np.int64)  # (b, 6)
        loc = dof_map[self.dofs]
        rows = np.repeat(loc, 6, axis=1)  # entry 6a + b of a member: row of its dof a
        cols = np.tile(loc, (1, 6))  # ... and column of its dof b
        keep = ((rows >= 0) & (cols >= 0)).ravel()
        keys = rows.ravel()[keep] * nf + cols.ravel()[keep]
        diag = np.arange(nf, dtype=np.int64) * (nf + 1)
        uniq, inv = np.unique(np.concatenate([keys, diag]), return_inverse=True)
        self._keep = keep
        self._pos = inv[: keys.size]
        self._diag_pos = inv[keys.size :]
        self._nnz = uniq.size
        self._indices = uniq % max(nf, 1)
        self._indptr = np.searchsorted(uniq // max(nf, 1), np.arange(nf + 1))

    def state(self, uf: np.ndarray, lam: float) -> _State:
        """Member forces and nodal internal forces at free displacements ``uf``."""
        u = np.zeros(3 * self.n)
        u[self.free] = uf
        u3 = u.reshape(self.n, 3)
        i, j = self.members[:, 0], self.members[:, 1]
        delta = u3[j] - u3[i]
        d = self.D + delta
        length = np.sqrt(np.einsum("ij,ij->i", d, d))
        with np.errstate(invalid="ignore", divide="ignore"):
            c = d / length[:, None]
        # l - L0 = (l^2 - L0^2)/(l + L0) with l^2 - L0^2 = 2 D.delta + delta.delta:
        # no cancellation when the elongation is tiny beside the length, so
        # small loads keep full relative accuracy.
        grow = 2.0 * np.einsum("ij,ij->i", self.D, delta) + np.einsum("ij,ij->i", delta, delta)
        N = self.EA * (grow / (length + self.L0)) / self.L0
        Nc = N[:, None] * c
        fint = np.bincount(
            self.dofs.ravel(), np.concatenate([-Nc, Nc], axis=1).ravel(), 3 * self.n
        )
        return _State(uf=uf, lam=lam, N=N, length=length, c=c, fint=fint)

    def out_of_balance(self, s: _State) -> tuple[np.ndarray, float]:
        """Free-dof residual f_int - lambda q and its relative size."""
        g = s.fint[self.free] + self.spring * s.uf - s.lam * self.q
        absnc = np.abs(s.N[:, None] * s.c)
        scale_vec = np.bincount(
            self.dofs.ravel(), np.concatenate([absnc, absnc], axis=1).ravel(), 3 * self.n
        )[self.free] + np.abs(self.spring * s.uf)
        scale = float(np.linalg.norm(s.lam * self.q) + np.linalg.norm(scale_vec))
        norm = float(np.linalg.norm(g))
        if not np.isfinite(norm):
            return g, np.inf
        return g, norm / scale if scale > 0 else norm

    def tangent(self, s: _State) -> _Tangent:
        """Factorised tangent stiffness EA/L0 cc^T + N/l (I - cc^T), springs added."""
        c = s.c
        cc = c[:, :, None] * c[:, None, :]
        k = (self.EA / self.L0)[:, None, None] * cc + (s.N / s.length)[:, None, None] * (
            np.eye(3) - cc
        )
        b = k.shape[0]
        K6 = np.empty((b, 6, 6))
        K6[:, :3, :3] = k
        K6[:, 3:, 3:] = k
        K6[:, :3, 3:] = -k
        K6[:, 3:, :3] = -k
        data = np.asarray(np.bincount(self._pos, K6.reshape(-1)[self._keep], self._nnz), float)
        data[self._diag_pos] += self.spring
        if not np.all(np.isfinite(data)):
            raise RuntimeError("non-finite tangent stiffness")
        K = sp.csr_matrix((data, self._indices, self._indptr), shape=(self.nf, self.nf))
        return _Tangent(K)

    def reactions(self, s: _State) -> np.ndarray:
        """(n, 3): forces of supports (restrained) and springs on the nodes."""
        r = np.zeros(3 * self.n)
        held = self.restrained
        r[held] = s.fint[held] - s.lam * self.f[held]
        r[self.free] = -self.spring * s.uf
        return r.reshape(self.n, 3)


# ---------------------------------------------------------------- iterations
@dataclass
class _Control:
    tolerance: float
    max_iterations: int


def _rate(bars: _Bars, s: _State, direction: np.ndarray | None) -> float:
    """Factorise the tangent at ``s`` and return d lambda/d s oriented along ``direction``."""
    s.tangent = bars.tangent(s)
    dut = s.tangent.solve(bars.q)
    norm = float(np.linalg.norm(dut))
    if not np.isfinite(norm) or norm == 0.0:
        raise RuntimeError("tangent solve failed")
    sign = -1.0 if direction is not None and float(direction @ dut) < 0 else 1.0
    return sign / norm


def _arc_step(
    bars: _Bars, start: _State, dl: float, direction: np.ndarray | None, ctl: _Control
) -> _State | None:
    """One cylindrical arc-length step of length ``dl`` from a converged state.

    Returns the converged state (its tangent factorised and rate set), or
    None when the step fails (the caller cuts back).
    """
    try:
        assert start.tangent is not None
        dut = start.tangent.solve(bars.q)
        du = dut * (dl / np.linalg.norm(dut))
        dlam = start.rate * dl
        if start.rate < 0:
            du = -du
        for it in range(ctl.max_iterations + 1):
            s = bars.state(start.uf + du, start.lam + dlam)
            g, res = bars.out_of_balance(s)
            if not np.isfinite(res):
                return None
            if res <= ctl.tolerance:
                s.residual, s.iterations = res, it
                s.rate = _rate(bars, s, du)
                return s if np.isfinite(s.rate) else None
            if it == ctl.max_iterations:
                return None
            tan = bars.tangent(s)
            sol = tan.solve(np.column_stack([-g, bars.q]))
            dur, dut = sol[:, 0], sol[:, 1]
            w = du + dur
            a1 = float(dut @ dut)
            a2 = 2.0 * float(dut @ w)
            a3 = float(w @ w) - dl * dl
            disc = a2 * a2 - 4.0 * a1 * a3
            if not (a1 > 0 and np.isfinite(disc)) or disc < 0:
                return None
            # Stable roots of a1 x^2 + a2 x + a3 = 0.
            qq = -0.5 * (a2 + np.copysign(np.sqrt(disc), a2))
            roots = [qq / a1, a3 / qq if qq != 0 else qq / a1]
            # The root whose increment turns least from the one before.
            cos = [float((w + r * dut) @ du) for r in roots]
            root = roots[int(np.argmax(cos))]
            du = w + root * dut
            dlam += root
    except (RuntimeError, FloatingPointError, ZeroDivisionError):
        return None
    return None


def _land(
    bars: _Bars, a: _State, b: _State, target: float, ctl: _Control
) -> _State | None:
    """Load-controlled Newton at ``target`` from the state interpolated between a and b."""
    t = (target - a.lam) / (b.lam - a.lam)
    guess = a.uf + t * (b.uf - a.uf)
    reach = float(np.linalg.norm(b.uf - a.uf))
    uf = guess
    try:
        for it in range(ctl.max_iterations + 1):
            s = bars.state(uf, target)
            g, res = bars.out_of_balance(s)
            if not np.isfinite(res):
                return None
            if res <= ctl.tolerance:
                # Must be the crossing on this stretch, not another equilibrium.
                if np.linalg.norm(uf - guess) > reach + 1e-12 * (1.0 + reach):
                    return None
                s.residual, s.iterations = res, it
                s.tangent = bars.tangent(s)
                return s
            if it == ctl.max_iterations:
                return None
            uf = uf - bars.tangent(s).solve(g)
    except (RuntimeError, FloatingPointError, ZeroDivisionError):
        return None
    return None


def _locate_limit(
    bars: _Bars,
    start: _State,
    end: _State,
    dl: float,
    direction: np.ndarray | None,
    ctl: _Control,
    limit_tolerance: float,
) -> _State | None:
    """The point of zero load rate between ``start`` and ``end`` (regula falsi in s)."""
    s_lo, r_lo = 0.0, start.rate
    s_hi, r_hi = dl, end.rate
    best: _State | None = None
    side = 0
    for _ in range(40):
        s_try = (s_lo * r_hi - s_hi * r_lo) / (r_hi - r_lo)
        if not (s_lo < s_try < s_hi):
            s_try = 0.5 * (s_lo + s_hi)
        p = _arc_step(bars, start, s_try, direction, ctl)
        if p is None:
            return best
        if best is None or abs(p.rate) < abs(best.rate):
            best = p
        # |lambda* - lambda(s)| <= |rate| * bracket, the rate being monotone here.
        if abs(p.rate) * (s_hi - s_lo) <= limit_tolerance * max(abs(p.lam), 1e-300):
            return best
        if np.sign(p.rate) == np.sign(r_lo):
            s_lo, r_lo = s_try, p.rate
            if side == -1:
                r_hi *= 0.5  # Illinois: keep the stale end from stalling
            side = -1
        else:
            s_hi, r_hi = s_try, p.rate
            if side == 1:
                r_lo *= 0.5
            side = 1
    return best


def _negative(s: _State) -> int:
    return s.tangent.negative if s.tangent is not None else -1


def _locate_branch(
    bars: _Bars,
    start: _State,
    end: _State,
    dl: float,
    direction: np.ndarray | None,
    ctl: _Control,
    limit_tolerance: float,
) -> _State | None:
    """The first state with ``end``'s negative-pivot count, by bisection in s.

    Stops when the load factors either side of the change are within
    ``limit_tolerance`` (relative) of each other.
    """
    s_lo, s_hi = 0.0, dl
    lam_lo, lam_hi = start.lam, end.lam
    before = _negative(start)
    found: _State | None = None
    for _ in range(60):
        if abs(lam_hi - lam_lo) <= limit_tolerance * max(abs(lam_hi), 1e-300):
            break
        mid = 0.5 * (s_lo + s_hi)
        p = _arc_step(bars, start, mid, direction, ctl)
        if p is None or _negative(p) < 0:
            break
        if _negative(p) == before:
            s_lo, lam_lo = mid, p.lam
        else:
            s_hi, lam_hi, found = mid, p.lam, p
    return found


# -------------------------------------------------------------------- driver
def _reference_load(model: Model, name: str) -> tuple[str, np.ndarray, dict[str, float]]:
    """Kind, (3n,) reference force vector and factors of a case or combination."""
    n, b = model.n_nodes, model.n_members
    if name in model.cases:
        kind, factors = "case", {name: 1.0}
    elif name in model.combinations:
        kind, factors = "combination", dict(model.combinations[name])
    else:
        known = ", ".join(sorted([*model.cases, *model.combinations])) or "none defined"
        raise ModelError(f"solve_nonlinear: no load case or combination {name!r} (known: {known})")
    f = np.zeros(3 * n)
    for case, factor in factors.items():
        lc = model.cases[case]
        lc.resize(n, b)
        for what, arr in (
            ("temperature changes", lc.temperature),
            ("initial strains", lc.initial_strain),
            ("settlements", lc.settlement_mask),
        ):
            if np.any(arr):
                raise ModelError(
                    f"solve_nonlinear: load case {case!r} has {what}; the nonlinear analysis "
                    "takes nodal forces only"
                )
        f += factor * lc.forces.ravel()
    if not np.all(np.isfinite(f)):
        raise ModelError(f"solve_nonlinear: {kind} {name!r} has non-finite loads")
    return kind, f, factors


def _check_options(max_load_factor: float, initial_increment: float | None, **kw: float) -> None:
    if not (np.isfinite(max_load_factor) and max_load_factor > 0):
        raise ModelError(f"solve_nonlinear: max_load_factor = {max_load_factor!r}: must be > 0")
    if initial_increment is not None and not (
        np.isfinite(initial_increment) and 0 < initial_increment <= max_load_factor
    ):
        raise ModelError(
            f"solve_nonlinear: initial_increment = {initial_increment!r}: must be in "
            f"(0, max_load_factor = {max_load_factor}]"
        )
    for key, value in kw.items():
        if not (np.isfinite(value) and value > 0):
            raise ModelError(f"solve_nonlinear: {key} = {value!r}: must be positive")


def solve_nonlinear(
    model: Model,
    case_or_combination: str,
    max_load_factor: float = 1.0,
    *,
    initial_increment: float | None = None,
    max_steps: int = 500,
    tolerance: float = 1.0e-9,
    max_iterations: int = 25,
    max_cutbacks: int = 12,
    limit_tolerance: float = 1.0e-9,
    progress: Callable[[int, float], Any] | None = None,
) -> LoadPath:
    """Trace the large-displacement equilibrium path of one case or combination.

    Bars are co-rotational with engineering strain, N = EA (l - L0)/L0
    (module notes); the path is followed by Crisfield's cylindrical
    arc-length method through limit points, snap-through and snap-back.

    Parameters
    ----------
    model : Model
        Nodal forces only (temperature, initial strain or settlement in the
        chosen cases raise ModelError).  Supports and springs as in the
        linear analysis; springs keep their global directions.
    case_or_combination : str
        Its loads are the reference load (load factor 1).
    max_load_factor : float
        The path stops with a step landing exactly on this load factor the
        first time the load factor rises to it (past any limit point).
    initial_increment : float, optional
        Load factor of the first step (default ``max_load_factor / 20``); it
        fixes the first arc length, which then adapts.
    max_steps : int
        Steps allowed before giving up.
    tolerance : float
        Relative equilibrium residual accepted at a step.
    max_iterations : int
        Newton iterations per step before it is cut back.
    max_cutbacks : int
        Halvings of one step's arc length before the analysis stops.
    limit_tolerance : float
        Relative accuracy of the load factor at each located limit point and
        branch point.
    progress : callable, optional
        Called as ``progress(step, load_factor)`` after each converged step.

    Returns
    -------
    LoadPath

    Raises
    ------
    PathError (a SolverError)
        When a step cannot be converged, values turn non-finite, or
        ``max_steps`` pass before ``max_load_factor`` is reached; one line
        naming the step and the load factor reached.  ``err.path`` holds the
        converged steps up to there.
    MechanismError, ModelError
        As for the linear analysis.
    """
    max_load_factor = float(max_load_factor)
    _check_options(
        max_load_factor, initial_increment, tolerance=tolerance, limit_tolerance=limit_tolerance,
        max_steps=max_steps, max_iterations=max_iterations, max_cutbacks=max_cutbacks,
    )
    model.validate()
    kind, f, factors = _reference_load(model, case_or_combination)
    check_stability(model)
    bars = _Bars(model, f)
    ctl = _Control(tolerance=float(tolerance), max_iterations=int(max_iterations))
    label = f"nonlinear {kind} {case_or_combination!r}"

    steps: list[_State] = [bars.state(np.zeros(bars.nf), 0.0)]
    cutbacks = 0

    def path() -> LoadPath:
        return _make_path(bars, steps, kind, case_or_combination, factors, max_load_factor,
                          cutbacks)

    def fail(text: str) -> PathError:
        k = len(steps)
        return PathError(
            f"{label}: step {k} {text} (last converged load factor "
            f"{steps[-1].lam:.6g} at step {k - 1}); the path up to there is in err.path",
            path(),
        )

    try:
        if not np.any(bars.q):
            # No load on a free direction: equilibrium stays at the drawn shape.
            steps[0].tangent = bars.tangent(steps[0])
            end = bars.state(np.zeros(bars.nf), max_load_factor)
            end.tangent = steps[0].tangent
            steps.append(end)
            return path()
        steps[0].rate = _rate(bars, steps[0], None)
    except RuntimeError as exc:
        raise fail(f"could not factorise the unloaded tangent stiffness ({exc})") from exc

    incr0 = max_load_factor / 20.0 if initial_increment is None else float(initial_increment)
    dl0 = incr0 / abs(steps[0].rate)
    dl = dl0
    # Longest arc: a few default first steps, however small the first one was.
    dl_max = _MAX_GROWTH * max(dl0, max_load_factor / 20.0 / abs(steps[0].rate))
    direction: np.ndarray | None = None
    tries = 0
    while True:
        if len(steps) > max_steps:
            raise fail(f"not taken: {max_steps} steps used before reaching load factor "
                       f"{max_load_factor:.6g}")
        start = steps[-1]
        new = _arc_step(bars, start, dl, direction, ctl)
        pieces: list[_State] = []
        if new is not None:
            pieces = [new]
            if np.sign(new.rate) != np.sign(start.rate) and new.rate != 0:
                limit = _locate_limit(bars, start, new, dl, direction, ctl, limit_tolerance)
                if limit is not None:
                    pieces = [limit, new]
            elif _negative(start) >= 0 and _negative(new) >= 0 and (
                _negative(new) != _negative(start)
            ):
                branch = _locate_branch(bars, start, new, dl, direction, ctl, limit_tolerance)
                if branch is not None:
                    pieces = [branch, new]
            crossed, landed = _finish(bars, start, pieces, max_load_factor, ctl)
            if crossed and landed is None:
                new = None  # crossed the target but could not land: retry shorter
            elif landed is not None:
                steps.extend(landed)
                if progress is not None:
                    progress(len(steps) - 1, steps[-1].lam)
                return path()
        if new is None:
            tries += 1
            cutbacks += 1
            dl *= 0.5
            if tries > max_cutbacks or dl < _MIN_SHRINK * dl0:
                raise fail(f"did not converge after {tries - 1} cutbacks of the arc length "
                           f"(down to {dl * 2:.3g} m)")
            continue
        tries = 0
        direction = new.uf - start.uf
        steps.extend(pieces)
        if progress is not None:
            progress(len(steps) - 1, new.lam)
        grow = np.sqrt(_DESIRED_ITERATIONS / max(new.iterations, 1))
        dl = min(dl * float(np.clip(grow, 0.5, 2.0)), dl_max)


def _finish(
    bars: _Bars, start: _State, pieces: list[_State], target: float, ctl: _Control
) -> tuple[bool, list[_State] | None]:
    """Whether this step rises through ``target``, and the states ending exactly on it.

    (False, None): not crossed; (True, None): crossed, but landing failed.
    """
    prev = start
    for k, p in enumerate(pieces):
        if prev.lam < target <= p.lam:
            end = _land(bars, prev, p, target, ctl)
            return True, None if end is None else [*pieces[:k], end]
        prev = p
    return False, None


def _make_path(
    bars: _Bars,
    steps: list[_State],
    kind: str,
    name: str,
    factors: dict[str, float],
    max_load_factor: float,
    cutbacks: int,
) -> LoadPath:
    n = bars.n
    lam = np.array([s.lam for s in steps])
    U = np.zeros((len(steps), 3 * n))
    U[:, bars.free] = np.array([s.uf for s in steps]).reshape(len(steps), bars.nf)
    N = np.array([s.N for s in steps])
    R = np.array([bars.reactions(s) for s in steps])
    for what, arr in (("load factors", lam), ("displacements", U), ("axial forces", N),
                      ("reactions", R)):
        if not np.all(np.isfinite(arr)):
            raise SolverError(f"nonlinear {kind} {name!r}: non-finite {what} in a converged step")
    d = np.diff(lam)
    nz = np.flatnonzero(d != 0)
    turn = nz[1:][np.sign(d[nz[1:]]) != np.sign(d[nz[:-1]])]
    # A turn between increments nz[j-1] and nz[j] sits at step nz[j].
    return LoadPath(
        name=name,
        kind=kind,
        load_factors=lam,
        displacements=U.reshape(len(steps), n, 3),
        axial_forces=N,
        reactions=R,
        loads=bars.f.reshape(n, 3).copy(),
        limit_points=turn.astype(np.int64),
        negative_pivots=np.array(
            [s.tangent.negative if s.tangent is not None else -1 for s in steps], dtype=np.int64
        ),
        iterations=np.array([s.iterations for s in steps], dtype=np.int64),
        residuals=np.array([s.residual for s in steps]),
        cutbacks=cutbacks,
        max_load_factor=max_load_factor,
        factors=dict(factors),
    )
