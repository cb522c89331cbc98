"""Large displacements of pin-jointed bars, traced by an arc-length method.

Members are co-rotational bars with **engineering strain**, N = EA (l - L0)/L0
along the current chord, with the consistent tangent EA/L0 cc^T + N/l (I - cc^T)
(analysis.corotational).  The loads of one case or combination form the
reference load q; equilibrium f_int(u) = lambda q is followed in the load
factor lambda.

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
pivots of the tangent (from its factorisation, analysis.corotational)
changes with no such sign change, a branch point (bifurcation) is passed; it
is located by bisection in the arc length to the same tolerance and inserted
too.  On the perfect geometry branches are reported, not followed; with
``imperfection=`` the nodes are first moved by that amplitude times a linear
buckling mode of the case or combination (analysis.buckling on its linear
static result, mode peak 1), so that the bifurcation becomes a smooth path
along the branch, with a limit point just below the bifurcation load of an
unstable (imperfection-sensitive) branch.  The imperfect geometry is the
unstressed one (member lengths follow the moved nodes; a pretension must
balance on it), and displacements are measured from it.  The path stops with a step that
lands exactly on ``max_load_factor`` (load-controlled Newton from the
interpolated state) the first time the load factor rises through it.

Pretension and tension-only members
-----------------------------------
A pretension P shortens the member's unstressed length to L EA/(EA + P), so
that it carries P in the drawn geometry (analysis.corotational).  Step 0 is
the drawn, prestressed state at load factor 0: the pretensions (with the
supports' reactions) must balance there to within ``tolerance``, otherwise
the analysis stops with a ModelError saying the pretension is not
self-equilibrated; the path does not search for a prestressed equilibrium
shape.  Pretension is not scaled by the load factor.  A tension-only member
whose force would turn compressive is slack: no force and no stiffness
(semismooth Newton, analysis.corotational); ``LoadPath.slack`` records it
per step.  A frame that the drawn-geometry mechanism check rejects (say a
cable node on a straight line between supports) is accepted when it has
pretension and its prestressed tangent stiffness at step 0 is positive
definite.  A cable with zero pretension has no stiffness across its line
there: the path is not started from an artificially stiffened state, and
the MechanismError says to give the cables a pretension.

Temperature, initial strain and settlement
------------------------------------------
They are loads of the case or combination like its forces, scaled by the
load factor: a free strain eps = alpha dT + eps0 lengthens a member's
unstressed length to L0 (1 + lambda eps), and a settlement moves its
restrained directions to lambda u_p (analysis.corotational).  The internal
forces then depend on lambda, and the arc-length method uses the full
derivative h = q - d f_int/d lambda of the out-of-balance force in place of
the reference load q.  When such a load moves no free direction at step 0
(every direction held, or held by symmetry, as for a bar heated between two
supports), the arc length in displacements is not defined: the path then
takes equal load increments (``initial_increment``) with Newton at each, and
cannot pass a limit point.

Results must be checked by a qualified engineer.
"""

from __future__ import annotations

import copy
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.analysis.corotational import Bars, State, first_state, reference_load
from spaceframe.errors import ModelError, SolverError
from spaceframe.results.path import STRAIN_MEASURE, LoadPath

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["STRAIN_MEASURE", "LoadPath", "PathError", "solve_nonlinear"]


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


# ---------------------------------------------------------------- iterations
@dataclass
class _Control:
    """Convergence settings of every Newton run on the path."""

    tolerance: float
    max_iterations: int
    limit_tolerance: float


def _rate(bars: Bars, s: State, direction: np.ndarray | None) -> float:
    """Factorise the tangent at ``s`` and return d lambda/d s oriented along ``direction``."""
    s.tangent = bars.tangent(s)
    dut = s.tangent.solve(bars.load_rate(s))
    s.dut = dut
    norm = float(np.linalg.norm(dut))
    if not np.isfinite(norm) or norm == 0.0:
        raise RuntimeError("tangent solve failed")
    sign = -1.0 if direction is not None and float(direction @ dut) < 0 else 1.0
    return sign / norm


def _arc_step(
    bars: Bars, start: State, dl: float, direction: np.ndarray | None, ctl: _Control
) -> State | None:
    """One cylindrical arc-length step of length ``dl`` from a converged state.

    Returns the converged state (its tangent factorised and rate set), or
    None when the step fails (the caller cuts back).
    """
    try:
        # Solved when the start's tangent was factorised (_rate): that
        # factorisation need not be alive any more (analysis.corotational).
        dut = start.dut
        if dut is None:
            raise RuntimeError("no tangent at the start of the step")
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
            sol = tan.solve(np.column_stack([-g, bars.load_rate(s)]))
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


def _newton(bars: Bars, uf: np.ndarray, target: float, ctl: _Control) -> State | None:
    """Load-controlled Newton at load factor ``target`` from ``uf`` (None: no convergence)."""
    try:
        for it in range(ctl.max_iterations + 1):
            s = bars.state(uf, target)
            g, res = bars.out_of_balance(s)
            if not np.isfinite(res):
                return None
            if res <= ctl.tolerance:
                s.residual, s.iterations = res, it
                return s
            if it == ctl.max_iterations:
                return None
            uf = uf - bars.tangent(s).solve(g)
    except (RuntimeError, FloatingPointError, ZeroDivisionError):
        return None
    return None


def _land(
    bars: Bars, a: State, b: State, target: float, ctl: _Control
) -> State | None:
    """Load-controlled Newton at ``target`` from the state interpolated between a and b."""
    t = (target - a.lam) / (b.lam - a.lam)
    guess = a.uf + t * (b.uf - a.uf)
    reach = float(np.linalg.norm(b.uf - a.uf))
    s = _newton(bars, guess, target, ctl)
    # Must be the crossing on this stretch, not another equilibrium.
    if s is None or np.linalg.norm(s.uf - guess) > reach + 1e-12 * (1.0 + reach):
        return None
    try:
        s.tangent = bars.tangent(s)
    except (RuntimeError, FloatingPointError, ZeroDivisionError):
        return None
    return s


def _negative(s: State) -> int:
    return s.tangent.negative if s.tangent is not None else -1


@dataclass
class _Stretch:
    """A converged step from ``start`` to ``end`` (arc length ``dl``) and the points on it."""

    bars: Bars
    start: State
    end: State
    dl: float
    direction: np.ndarray | None
    ctl: _Control

    def step(self, s: float) -> State | None:
        """The arc-length step of length ``s`` from ``start`` in the same direction."""
        return _arc_step(self.bars, self.start, s, self.direction, self.ctl)

    def pieces(self) -> list[State]:
        """``[end]``, or ``[point, end]`` with a limit or branch point located between."""
        start, end = self.start, self.end
        point: State | None = None
        if np.sign(end.rate) != np.sign(start.rate) and end.rate != 0:
            point = self.limit()
        elif _negative(start) >= 0 and _negative(end) >= 0 and (
            _negative(end) != _negative(start)
        ):
            point = self.branch()
        return [end] if point is None else [point, end]

    def limit(self) -> State | None:
        """The point of zero load rate between ``start`` and ``end`` (regula falsi in s)."""
        tol = self.ctl.limit_tolerance
        s_lo, r_lo = 0.0, self.start.rate
        s_hi, r_hi = self.dl, self.end.rate
        best: State | None = None
        side = 0
        for _ in range(40):
            s_try = (s_lo * r_hi - s_hi * r_lo) / (r_hi - r_lo)
            if not (s_lo < s_try < s_hi):
                s_try = 0.5 * (s_lo + s_hi)
            p = self.step(s_try)
            if p is None:
                return best
            if best is None or abs(p.rate) < abs(best.rate):
                best = p
            # |lambda* - lambda(s)| <= |rate| * bracket, the rate being monotone here.
            if abs(p.rate) * (s_hi - s_lo) <= tol * max(abs(p.lam), 1e-300):
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

    def branch(self) -> State | None:
        """The first state with ``end``'s negative-pivot count, by bisection in s.

        Stops when the load factors either side of the change are within
        ``limit_tolerance`` (relative) of each other.
        """
        tol = self.ctl.limit_tolerance
        s_lo, s_hi = 0.0, self.dl
        lam_lo, lam_hi = self.start.lam, self.end.lam
        before = _negative(self.start)
        found: State | None = None
        for _ in range(60):
            if abs(lam_hi - lam_lo) <= tol * max(abs(lam_hi), 1e-300):
                break
            mid = 0.5 * (s_lo + s_hi)
            p = self.step(mid)
            if p is None or _negative(p) < 0:
                break
            if _negative(p) == before:
                s_lo, lam_lo = mid, p.lam
            else:
                s_hi, lam_hi, found = mid, p.lam, p
        return found


def _advance(
    bars: Bars, start: State, dl: float, direction: np.ndarray | None, ctl: _Control,
    target: float,
) -> tuple[list[State] | None, bool]:
    """One step: predictor and corrector, located points, landing on ``target``.

    Returns the new states and whether the path ends with them; no states
    when the step failed (the caller cuts back).
    """
    new = _arc_step(bars, start, dl, direction, ctl)
    if new is None:
        return None, False
    pieces = _Stretch(bars, start, new, dl, direction, ctl).pieces()
    crossed, landed = _finish(bars, start, pieces, target, ctl)
    if crossed:
        return landed, landed is not None  # crossed the target but could not land: retry
    return pieces, False


# -------------------------------------------------------------------- driver
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
    imperfection: float | None = None,
    imperfection_mode: int = 1,
    solver: str = "auto",
) -> LoadPath:
    """Trace the large-displacement equilibrium path of one case or combination.

    Bars are co-rotational with engineering strain, N = EA (l - L0)/L0
    (module notes); the path is followed by Crisfield's cylindrical
    arc-length method through limit points, snap-through and snap-back.

    Parameters
    ----------
    model : Model
        Nodal forces, temperature, initial strain and settlement of the
        chosen cases are all scaled by the load factor (module notes).  Its ``pretension`` and
        ``tension_only`` member arrays are honoured (module notes).  Supports and springs as in the
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
    imperfection : float, optional
        Amplitude, m: trace the path on a geometry whose nodes are moved by
        this times linear buckling mode ``imperfection_mode`` of the case or
        combination (``linear_buckling`` of its linear static result; the
        mode's largest nodal movement is 1, its sign as that analysis gives
        it: a negative amplitude reverses it).  The path then follows the
        branch that grows from the bifurcation instead of only detecting it
        (module notes).  The result says so in ``notes`` and its
        ``imperfection*`` attributes.
    imperfection_mode : int
        Which mode, 1 = the lowest.
    solver : {"auto", "scipy", "pardiso"}
        "auto" and "pardiso" factorise a positive definite tangent by
        PARDISO's Cholesky where installed, any other by the symmetric sparse
        LU that counts its negative pivots; "scipy" always uses that LU.

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
        As for the linear analysis; ModelError also when the pretension is
        not self-equilibrated in the drawn geometry (module notes).
    """
    max_load_factor = float(max_load_factor)
    _check_options(
        max_load_factor, initial_increment, tolerance=tolerance, limit_tolerance=limit_tolerance,
        max_steps=max_steps, max_iterations=max_iterations, max_cutbacks=max_cutbacks,
    )
    model.validate()
    kind, f, factors, strain, up = reference_load(model, case_or_combination)
    extra: dict[str, Any] = {}
    if imperfection is not None:
        model, extra = _imperfect(model, case_or_combination, kind, imperfection,
                                  imperfection_mode)
    bars = Bars(model, f, strain, up, solver)
    first = first_state(model, bars, tolerance)
    ctl = _Control(tolerance=float(tolerance), max_iterations=int(max_iterations),
                   limit_tolerance=limit_tolerance)
    trace = _Trace(bars, kind, case_or_combination, factors, max_load_factor, progress, [first],
                   extra=extra)
    incr0 = max_load_factor / 20.0 if initial_increment is None else float(initial_increment)
    try:
        if not (np.any(bars.q) or bars.imposed):
            # No load on a free direction: equilibrium stays at the drawn shape.
            first.tangent = bars.tangent(first)
            end = bars.state(np.zeros(bars.nf), max_load_factor)
            end.tangent = first.tangent
            trace.steps.append(end)
            return trace.path()
        if bars.imposed and bars.locked(first):
            return _load_control(bars, trace, incr0, ctl)
        first.rate = _rate(bars, first, None)
    except RuntimeError as exc:
        raise trace.fail(f"could not factorise the unloaded tangent stiffness ({exc})") from exc

    dl0 = incr0 / abs(first.rate)
    # Longest arc: a few default first steps, however small the first one was.
    dl_max = _MAX_GROWTH * max(dl0, max_load_factor / 20.0 / abs(first.rate))
    arc = _ArcLength(dl0, dl_max, max_cutbacks)
    direction: np.ndarray | None = None
    while True:
        if len(trace.steps) > max_steps:
            raise trace.fail(f"not taken: {max_steps} steps used before reaching load factor "
                             f"{max_load_factor:.6g}")
        start = trace.steps[-1]
        pieces, done = _advance(bars, start, arc.dl, direction, ctl, max_load_factor)
        if pieces is None:
            trace.cutbacks += 1
            text = arc.cut()
            if text is not None:
                raise trace.fail(text)
            continue
        trace.accept(pieces)
        if done:
            return trace.path()
        direction = pieces[-1].uf - start.uf
        arc.adapt(pieces[-1].iterations)


def _imperfect(
    model: Model, name: str, kind: str, amplitude: float, mode: Any
) -> tuple[Model, dict[str, Any]]:
    """The model on imperfect geometry: nodes + amplitude x buckling mode (module notes)."""
    from spaceframe.analysis.buckling import linear_buckling

    amplitude = float(amplitude)
    if not np.isfinite(amplitude):
        raise ModelError(f"solve_nonlinear: imperfection = {amplitude!r}: must be a finite "
                         "length in m")
    if isinstance(mode, bool) or not isinstance(mode, (int, np.integer)) or mode < 1:
        raise ModelError(f"solve_nonlinear: imperfection_mode = {mode!r}: must be an integer "
                         ">= 1 (1 = the lowest buckling mode)")
    mode = int(mode)
    buckling = linear_buckling(model, model.solve()[name], n_modes=mode)
    if buckling.factors.size < mode:
        raise ModelError(
            f"solve_nonlinear: imperfection_mode = {mode}: {kind} {name!r} has only "
            f"{buckling.factors.size} linear buckling mode(s)"
        )
    shape = amplitude * buckling.modes[mode - 1]
    imperfect = copy.copy(model)
    imperfect.nodes = model.nodes + shape
    note = (
        f"traced on imperfect geometry: nodes moved by {amplitude:.6g} m times linear "
        f"buckling mode {mode} of {kind} {name!r} (load factor "
        f"{float(buckling.factors[mode - 1]):.6g}); displacements are measured from it"
    )
    return imperfect, {"imperfection": shape, "imperfection_amplitude": amplitude,
                       "imperfection_mode": mode, "notes": [note]}


def _load_control(bars: Bars, trace: _Trace, incr: float, ctl: _Control) -> LoadPath:
    """Equal load increments to ``max_load_factor``, Newton at each (module notes)."""
    target = trace.max_load_factor
    count = max(1, int(np.ceil(target / incr - 1e-9)))
    trace.extra.setdefault("notes", []).append(
        "the load moves no free direction at step 0: traced in equal load increments "
        "(load control), which cannot pass a limit point"
    )
    for k in range(1, count + 1):
        lam = target if k == count else k * incr
        s = _newton(bars, trace.steps[-1].uf, lam, ctl)
        if s is None:
            raise trace.fail(f"did not converge at load factor {lam:.6g} (load control)")
        if bars.nf:
            try:
                s.tangent = bars.tangent(s)
            except RuntimeError as exc:
                raise trace.fail(f"could not factorise the tangent stiffness ({exc})") from exc
        trace.accept([s])
    return trace.path()


@dataclass
class _ArcLength:
    """The arc length of the next step: adapted to the iterations used, halved on failure."""

    dl0: float
    dl_max: float
    max_cutbacks: int
    dl: float = field(init=False)
    tries: int = 0

    def __post_init__(self) -> None:
        self.dl = self.dl0

    def cut(self) -> str | None:
        """Halve the arc length; the reason to stop when no more cutbacks are allowed."""
        self.tries += 1
        self.dl *= 0.5
        if self.tries > self.max_cutbacks or self.dl < _MIN_SHRINK * self.dl0:
            return (f"did not converge after {self.tries - 1} cutbacks of the arc length "
                    f"(down to {self.dl * 2:.3g} m)")
        return None

    def adapt(self, iterations: int) -> None:
        """After a converged step: Crisfield's sqrt(I_desired / I) rule, within bounds."""
        self.tries = 0
        grow = np.sqrt(_DESIRED_ITERATIONS / max(iterations, 1))
        self.dl = min(self.dl * float(np.clip(grow, 0.5, 2.0)), self.dl_max)


@dataclass
class _Trace:
    """Bookkeeping of one path: the converged steps and cutbacks, reports and failures."""

    bars: Bars
    kind: str
    name: str
    factors: dict[str, float]
    max_load_factor: float
    progress: Callable[[int, float], Any] | None
    steps: list[State]
    cutbacks: int = 0
    extra: dict[str, Any] = field(default_factory=dict)

    def path(self) -> LoadPath:
        """The steps so far as a LoadPath."""
        return _make_path(self.bars, self.steps, self.kind, self.name, self.factors,
                          self.max_load_factor, self.cutbacks, self.extra)

    def fail(self, text: str) -> PathError:
        """A PathError for the step after the last converged one, holding the path so far."""
        k = len(self.steps)
        return PathError(
            f"nonlinear {self.kind} {self.name!r}: step {k} {text} (last converged load factor "
            f"{self.steps[-1].lam:.6g} at step {k - 1}); the path up to there is in err.path",
            self.path(),
        )

    def accept(self, pieces: list[State]) -> None:
        """Append converged states and report the last one.

        Only the last state's factorised tangent is needed from here on (the
        next predictor); the others are released (their counts are kept).
        """
        for s in self.steps[-1:]:
            if s.tangent is not None:
                s.tangent.release()
        self.steps.extend(pieces)
        for s in pieces[:-1]:
            if s.tangent is not None:
                s.tangent.release()
        if self.progress is not None:
            self.progress(len(self.steps) - 1, self.steps[-1].lam)


def _finish(
    bars: Bars, start: State, pieces: list[State], target: float, ctl: _Control
) -> tuple[bool, list[State] | None]:
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
    bars: Bars,
    steps: list[State],
    kind: str,
    name: str,
    factors: dict[str, float],
    max_load_factor: float,
    cutbacks: int,
    extra: dict[str, Any],
) -> LoadPath:
    n = bars.n
    lam = np.array([s.lam for s in steps])
    U = np.array([bars.displacements(s.uf, s.lam) for s in steps]).reshape(len(steps), 3 * n)
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
        slack=np.array(
            [s.slack if s.slack is not None else np.zeros(bars.members.shape[0], bool)
             for s in steps], dtype=bool,
        ).reshape(len(steps), bars.members.shape[0]),
        factors=dict(factors),
        **{"imperfection": np.zeros((n, 3)), **copy.deepcopy(extra)},
    )
