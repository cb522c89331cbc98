"""Co-rotational bars with engineering strain: internal forces and tangent stiffness.

In the current configuration x = X + u a member has length l, unit vector c
along its current chord and

    N = EA (l - L0) / L0                      (tension positive)

acting along c.  A pretension P (tension in the drawn, straight geometry of
drawn length L) makes the unstressed length L0 = L EA/(EA + P), i.e. shorter
than L by P L/(EA + P), so that N = P at l = L.

Imposed strains and settlements (both scaled by the load factor lambda): a
free strain eps = alpha dT + eps0 of the load set lengthens the unstressed
length to L0(lambda) = L0 (1 + lambda eps); a settlement moves the restrained
directions to lambda u_p.  The internal forces then depend on lambda too, and
the path's load vector is the full derivative of the out-of-balance force,
h = q - d f_int/d lambda (:meth:`Bars.load_rate`), with per member
dN/dlambda = -EA l L0 eps / L0(lambda)^2 along c and k_t (u_p,j - u_p,i) from
the settlement.  Without either, h = q exactly.

Tension-only members: where N would be negative the member is slack, its
force and both tangent terms are zero.  The internal force stays continuous
(N -> 0 from either side) but its derivative jumps at N = 0, so Newton on it
is a semismooth Newton: at N = 0 exactly the member counts as taut (the
generalised derivative of the taut side), which keeps the unloaded tangent
of an unpretensioned frame the full one.  The internal force vector is the sum over members of
N (-c, +c) at its two ends, plus spring forces k u at sprung directions (the
springs keep their global directions).  Its exact derivative, the tangent
stiffness, is per member

    k_t = EA/L0 c c^T + N/l (I - c c^T)       (material + geometric)

in the 6x6 pattern [[k_t, -k_t], [-k_t, k_t]], summed into the reduced
(free-dof) matrix with one bincount on a pattern found once.  Supports
restrain global directions as in the linear static analysis.

Inertia: with PARDISO installed (``solver="auto"`` or ``"pardiso"``) the tangent is
first factorised by its Cholesky (matrix type 2), given the assembled upper
triangle; it refuses any pivot that is not clearly positive, so success means
a positive definite tangent, no negative eigenvalue.  The pattern never
changes along a path, so PARDISO's ordering and symbolic analysis are done
once and each tangent after the first costs only its numerical factorisation
(about a quarter of the whole at 10k members); one such factorisation is
alive at a time, and a Tangent whose factorisation was replaced refuses to
solve.  After a tangent that is not positive definite the next one goes
straight to the symmetric LU below, until that finds one positive definite
again.  Otherwise, and with
``solver="scipy"``, the tangent is factorised by SuperLU with diagonal pivots only and a
symmetric ordering; then P K P^T = L D L^T with U = D L^T, so by Sylvester's
law of inertia the negative entries of diag(U) count K's negative
eigenvalues.  When SuperLU had to leave the diagonal (its row and column
permutations differ) or needed partial pivoting, the count is unknown (-1).

The blocks are those of :func:`spaceframe.assembly.elastic_stiffness` and
:func:`spaceframe.analysis.matrices.geometric_stiffness` in the current
geometry, but the tangent is not built by
:func:`spaceframe.assembly.assemble_blocks`: a Newton step assembles it many
times, and summing into a pattern found once avoids a sparse build each time
(the sums run in member order, so the entries differ from that routine's in
the last bits).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import scipy.sparse as sp

from spaceframe.assembly import free_dof_map, member_dofs
from spaceframe.errors import MechanismError, ModelError
from spaceframe.solvers import (
    PardisoFactor,
    SingularFactor,
    factorize,
    factorize_ldlt,
    resolve_backend,
)

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["Bars", "CholeskySlot", "State", "Tangent", "first_state", "reference_load"]


class CholeskySlot:
    """One live PARDISO Cholesky for the tangents of one pattern (module notes)."""

    def __init__(self) -> None:
        self._factor: PardisoFactor | None = None
        self.generation = 0
        self.worth_trying = True  # the last tangent was positive definite

    def factor(self, upper: sp.csr_matrix) -> int | None:
        """Factorise; this factorisation's generation, or None if not positive definite."""
        self.generation += 1
        try:
            if self._factor is None:
                # No iterative refinement in its solves (half their time): the
                # Newton iteration corrects what the direct solve leaves.
                self._factor = PardisoFactor(upper, refine=False)
            else:
                self._factor.refactor(upper)
        except SingularFactor:
            self._factor = None
            return None
        return self.generation

    def solve(self, rhs: np.ndarray, generation: int) -> np.ndarray:
        """Solve with factorisation ``generation``, if it is still the live one."""
        if self._factor is None or generation != self.generation:
            raise RuntimeError("the tangent's factorisation was replaced by a later one")
        return np.asarray(self._factor.solve(rhs))


class Tangent:
    """A factorised tangent stiffness with its negative-pivot count (-1: unknown).

    ``backend="pardiso"`` tries PARDISO's Cholesky of ``upper`` (K's upper
    triangle, taken from K when not given) first, in ``slot`` when given
    (module notes).
    """

    def __init__(
        self, K: sp.csr_matrix, upper: sp.csr_matrix | None = None, backend: str = "scipy",
        slot: CholeskySlot | None = None,
    ) -> None:
        self._factor: Any = None
        self._slot: CholeskySlot | None = None
        self._generation = 0
        if backend == "pardiso" and K.shape[0] and (slot is None or slot.worth_trying):
            if slot is not None:
                g = slot.factor(sp.triu(K, format="csr") if upper is None else upper)
                if g is not None:
                    self._slot, self._generation, self.negative = slot, g, 0
                    return
            else:
                try:
                    self._factor = factorize(K if upper is None else upper, "pardiso")
                    self.negative = 0
                    return
                except SingularFactor:
                    pass  # not positive definite: the symmetric LU counts
        if slot is not None:
            slot.worth_trying = False
        if self._factor is None:
            try:
                self._factor = factorize_ldlt(K)
            except SingularFactor as exc:
                raise RuntimeError(str(exc)) from exc
            inertia = self._factor.inertia
            self.negative = inertia.negative if inertia is not None and inertia.zero == 0 else -1
        if slot is not None and self.negative == 0:
            slot.worth_trying = True

    @classmethod
    def cholesky(cls, upper: sp.csr_matrix, slot: CholeskySlot) -> Tangent | None:
        """PARDISO's Cholesky of ``upper`` in ``slot``; None when not positive definite."""
        generation = slot.factor(upper)
        if generation is None:
            return None
        t = cls.__new__(cls)
        t._factor, t._slot, t._generation, t.negative = None, slot, generation, 0
        return t

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """Solve K x = rhs for a (m,) or (m, k) right-hand side."""
        if self._slot is not None:
            return self._slot.solve(rhs, self._generation)
        if self._factor is None:
            raise RuntimeError("the tangent's factorisation was released")
        return np.asarray(self._factor.solve(rhs))

    def release(self) -> None:
        """Free the factorisation (kept: the negative-pivot count)."""
        self._factor = None
        self._slot = None


@dataclass
class State:
    """A configuration: free displacements, load factor and what follows from them."""

    uf: np.ndarray
    lam: float
    N: np.ndarray
    length: np.ndarray
    c: np.ndarray
    fint: np.ndarray  # (3n,) member forces on the nodes, springs excluded
    residual: float = 0.0
    iterations: int = 0
    slack: np.ndarray | None = None  # (b,) bool: tension-only members with N < 0 zeroed
    tangent: Tangent | None = None
    rate: float = 0.0  # d lambda / d s along the path at this state
    dut: np.ndarray | None = None  # K_t^-1 h here: the next step's predictor


class Bars:
    """The reduced nonlinear system of one model and one reference load.

    The sparsity pattern of the reduced tangent is found once; each assembly
    only sums the member values into it (one bincount, no sparse build).
    """

    def __init__(
        self, model: Model, f: np.ndarray, strain: np.ndarray | None = None,
        settlement: np.ndarray | None = None, solver: str = "scipy",
    ) -> None:
        self.backend = resolve_backend(solver)
        self._slot = CholeskySlot() if self.backend == "pardiso" else None
        self.n = model.n_nodes
        self.X = model.nodes.astype(float).copy()
        self.members = model.members.astype(np.int64).copy()
        self.L = model.lengths.copy()  # drawn lengths
        self.D = self.X[self.members[:, 1]] - self.X[self.members[:, 0]]
        self.EA = model.E * model.area
        b = self.members.shape[0]
        pre = np.asarray(getattr(model, "pretension", np.zeros(b)), dtype=float)
        self.pretension = pre if pre.shape == (b,) else np.zeros(b)
        t_only = np.asarray(getattr(model, "tension_only", np.zeros(b, bool)), dtype=bool)
        self.tension_only = t_only if t_only.shape == (b,) else np.zeros(b, bool)
        # Unstressed length: L - L0 = P L/(EA + P) (module notes), kept as a
        # separate term so the elongation keeps full relative accuracy.
        self.shorten = self.pretension * self.L / (self.EA + self.pretension)
        self.L0 = self.L - self.shorten
        self.f = f
        self.restrained = model.restraint.ravel().copy()
        # Free strain (b,) and settlement (3n,) at load factor 1 (module notes);
        # None when absent, so that the plain path keeps its arithmetic.
        self.strain = strain if strain is not None and np.any(strain) else None
        up = None if settlement is None else np.where(self.restrained, settlement, 0.0)
        self.settlement = up if up is not None and np.any(up) else None
        dof_map, self.free = free_dof_map(model.restraint)
        self.spring_all = model.springs.ravel().copy()
        self.spring = self.spring_all[self.free]
        self.q = f[self.free]
        nf = self.free.size
        self.nf = nf
        self.dofs = member_dofs(self.members).astype(np.int64)  # (b, 6)
        loc = dof_map[self.dofs]
        rows = np.repeat(loc, 6, axis=1)  # entry 6a + b of a member: row of its dof a
        cols = np.tile(loc, (1, 6))  # ... and column of its dof b
        keep = ((rows >= 0) & (cols >= 0)).ravel()
        keys = rows.ravel()[keep] * nf + cols.ravel()[keep]
        diag = np.arange(nf, dtype=np.int64) * (nf + 1)
        uniq, inv = np.unique(np.concatenate([keys, diag]), return_inverse=True)
        # Position of each of the 36 b block entries in the pattern; entries of
        # restrained directions go to a dummy slot past the end (no masking).
        self._nnz = uniq.size
        self._pos = np.full(keep.size, uniq.size, dtype=np.int64)
        self._pos[keep] = inv[: keys.size]
        self._diag_pos = inv[keys.size :]
        self._indices = uniq % max(nf, 1)
        self._indptr = np.searchsorted(uniq // max(nf, 1), np.arange(nf + 1))
        # The upper triangle of the same pattern, for PARDISO.
        rows_u = uniq // max(nf, 1)
        self._upper = np.flatnonzero(self._indices >= rows_u)
        self._upper_indptr = np.searchsorted(rows_u[self._upper], np.arange(nf + 1))
        self._nnz_up = self._upper.size
        to_upper = np.full(uniq.size + 1, self._nnz_up, dtype=np.int64)
        to_upper[self._upper] = np.arange(self._nnz_up)
        self._pos_up = to_upper[self._pos]  # lower entries also to the dummy slot
        self._diag_pos_up = to_upper[self._diag_pos]

    @property
    def imposed(self) -> bool:
        """Whether the load set has free strains or settlements (scaled by lambda)."""
        return self.strain is not None or self.settlement is not None

    def displacements(self, uf: np.ndarray, lam: float) -> np.ndarray:
        """(3n,) all nodal displacements: ``uf`` on the free directions, settlements held."""
        u = np.zeros(3 * self.n) if self.settlement is None else lam * self.settlement
        u[self.free] = uf
        return u

    def state(self, uf: np.ndarray, lam: float) -> State:
        """Member forces and nodal internal forces at free displacements ``uf``."""
        u = self.displacements(uf, lam)
        u3 = u.reshape(self.n, 3)
        i, j = self.members[:, 0], self.members[:, 1]
        delta = u3[j] - u3[i]
        d = self.D + delta
        length = np.sqrt(np.einsum("ij,ij->i", d, d))
        with np.errstate(invalid="ignore", divide="ignore"):
            c = d / length[:, None]
        # l - L = (l^2 - L^2)/(l + L) with l^2 - L^2 = 2 D.delta + delta.delta:
        # no cancellation when the elongation is tiny beside the length, so
        # small loads keep full relative accuracy; l - L0 = (l - L) + (L - L0).
        grow = 2.0 * np.einsum("ij,ij->i", self.D, delta) + np.einsum("ij,ij->i", delta, delta)
        if self.strain is None:
            N = self.EA * (grow / (length + self.L) + self.shorten) / self.L0
        else:
            # L0(lambda) = L0 (1 + lambda eps): l - L0(lambda) = (l - L) + (L - L0) - lambda eps L0.
            extra = lam * self.strain * self.L0
            N = self.EA * (grow / (length + self.L) + self.shorten - extra) / (self.L0 + extra)
        slack = self.tension_only & (N < 0)
        N = np.where(slack, 0.0, N)
        Nc = N[:, None] * c
        fint = np.bincount(
            self.dofs.ravel(), np.concatenate([-Nc, Nc], axis=1).ravel(), 3 * self.n
        )
        return State(uf=uf, lam=lam, N=N, length=length, c=c, fint=fint, slack=slack)

    def load_rate(self, s: State) -> np.ndarray:
        """(nf,) h = q - d f_int/d lambda at ``s``: the load vector of the path (module notes)."""
        if not self.imposed:
            return self.q
        taut = ~s.slack if s.slack is not None else np.ones(s.N.shape, bool)
        t = np.zeros_like(s.c)
        if self.strain is not None:
            L0 = self.L0 * (1.0 + s.lam * self.strain)
            dN = np.where(taut, -self.EA * s.length * self.L0 * self.strain / (L0 * L0), 0.0)
            t += dN[:, None] * s.c
        if self.settlement is not None:
            up = self.settlement.reshape(self.n, 3)
            delta = up[self.members[:, 1]] - up[self.members[:, 0]]
            along = np.einsum("ij,ij->i", s.c, delta)
            L0 = self.L0 if self.strain is None else self.L0 * (1.0 + s.lam * self.strain)
            ka = np.where(taut, self.EA / L0, 0.0)
            t += (ka * along)[:, None] * s.c + (s.N / s.length)[:, None] * (
                delta - along[:, None] * s.c
            )
        rate = np.bincount(self.dofs.ravel(), np.concatenate([-t, t], axis=1).ravel(), 3 * self.n)
        return self.q - rate[self.free]

    def out_of_balance(self, s: State) -> tuple[np.ndarray, float]:
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

    def tangent(self, s: State) -> Tangent:
        """Factorised tangent stiffness EA/L0 cc^T + N/l (I - cc^T), springs added.

        Slack members add nothing (their N is already zero; the material term
        is dropped here).
        """
        c = s.c
        cc = c[:, :, None] * c[:, None, :]
        ka = self.EA / self.L0 if self.strain is None else self.EA / (
            self.L0 * (1.0 + s.lam * self.strain)
        )
        if s.slack is not None:
            ka = np.where(s.slack, 0.0, ka)
        k = ka[:, None, None] * cc + (s.N / s.length)[:, None, None] * (
            np.eye(3) - cc
        )
        b = k.shape[0]
        K6 = np.empty((b, 6, 6))
        K6[:, :3, :3] = k
        K6[:, 3:, 3:] = k
        K6[:, :3, 3:] = -k
        K6[:, 3:, :3] = -k
        flat = K6.reshape(-1)
        if self._slot is not None and self._slot.worth_trying and self.nf:
            # PARDISO's Cholesky needs only the upper triangle (module notes).
            up = np.bincount(self._pos_up, flat, self._nnz_up + 1)[: self._nnz_up]
            up[self._diag_pos_up] += self.spring
            if not np.all(np.isfinite(up)):
                raise RuntimeError("non-finite tangent stiffness")
            upper = sp.csr_matrix((up, self._indices[self._upper], self._upper_indptr),
                                  shape=(self.nf, self.nf))
            t = Tangent.cholesky(upper, self._slot)
            if t is not None:
                return t
        data = np.bincount(self._pos, flat, self._nnz + 1)[: self._nnz]
        data[self._diag_pos] += self.spring
        if not np.all(np.isfinite(data)):
            raise RuntimeError("non-finite tangent stiffness")
        K = sp.csr_matrix((data, self._indices, self._indptr), shape=(self.nf, self.nf))
        return Tangent(K, slot=self._slot)

    def locked(self, first: State) -> bool:
        """Whether the load set moves no free direction at ``first`` (none free, or all held).

        Factorises ``first``'s tangent when there are free directions.
        """
        if self.nf == 0:
            return True
        first.tangent = self.tangent(first)
        moves = float(np.linalg.norm(first.tangent.solve(self.load_rate(first))))
        ref = float(np.linalg.norm(first.tangent.solve(self.q))) if np.any(self.q) else 0.0
        if self.strain is not None:
            ref += float(np.abs(self.strain * self.L0).max())
        if self.settlement is not None:
            ref += float(np.abs(self.settlement).max())
        return moves <= 1e-10 * ref

    def reactions(self, s: State) -> np.ndarray:
        """(n, 3): forces of supports (restrained) and springs on the nodes."""
        r = np.zeros(3 * self.n)
        held = self.restrained
        r[held] = s.fint[held] - s.lam * self.f[held]
        r[self.free] = -self.spring * s.uf
        return r.reshape(self.n, 3)


def reference_load(
    model: Model, name: str
) -> tuple[str, np.ndarray, dict[str, float], np.ndarray, np.ndarray]:
    """Kind, (3n,) reference forces, factors, (b,) free strains and (3n,) settlements.

    The free strain alpha dT + eps0 and the settlements are those of load
    factor 1, summed over the factored cases like the forces.
    """
    n, b = model.n_nodes, model.n_members
    if name in model.cases:
        kind, factors = "case", {name: 1.0}
    elif name in model.combinations:
        kind, factors = "combination", dict(model.combinations[name])
    else:
        known = ", ".join(sorted([*model.cases, *model.combinations])) or "none defined"
        raise ModelError(f"solve_nonlinear: no load case or combination {name!r} (known: {known})")
    f = np.zeros(3 * n)
    strain = np.zeros(b)
    up = np.zeros(3 * n)
    for case, factor in factors.items():
        lc = model.cases[case]
        lc.resize(n, b)
        f += factor * lc.forces.ravel()
        strain += factor * (model.alpha * lc.temperature + lc.initial_strain)
        up += factor * np.where(lc.settlement_mask, lc.settlement, 0.0).ravel()
    for what, arr in (("loads", f), ("temperature changes or initial strains", strain),
                      ("settlements", up)):
        if not np.all(np.isfinite(arr)):
            raise ModelError(f"solve_nonlinear: {kind} {name!r} has non-finite {what}")
    bad = np.flatnonzero(strain <= -1.0)
    if bad.size:
        raise ModelError(
            f"solve_nonlinear: {kind} {name!r}: member {int(bad[0])} has a free strain "
            f"{strain[bad[0]]:.6g} <= -1 (alpha dT + eps0), which leaves it no unstressed length"
        )
    return kind, f, factors, strain, up


def first_state(model: Model, bars: Bars, tolerance: float) -> State:
    """Step 0 of a path: the drawn (prestressed) state at load factor 0, checked.

    See the notes of :mod:`spaceframe.analysis.nonlinear` on pretension.
    """
    from spaceframe.analysis.stability import check_stability

    mechanism: MechanismError | None = None
    try:
        check_stability(model)
    except MechanismError as exc:
        if not np.any(bars.pretension):
            if np.any(model.tension_only):
                # A cable net without pretension has no transverse stiffness in its
                # drawn geometry: the path starts from a prestressed state, never from
                # a stated artificial stiffening (module notes).
                raise MechanismError(
                    f"{exc}; a tension-only member (cable) without pretension has no "
                    "stiffness across its line in the drawn geometry: give the cables a "
                    "pretension (set_member_properties(ids, pretension=...), or "
                    "[analysis.tension_only] pretension in the model file)",
                    exc.nodes, exc.directions) from None
            raise
        mechanism = exc  # the prestressed tangent at step 0 decides (module notes)
    first = bars.state(np.zeros(bars.nf), 0.0)
    if np.any(bars.pretension):
        _, res0 = bars.out_of_balance(first)
        if not res0 <= tolerance:
            raise ModelError(
                f"solve_nonlinear: the pretension is not self-equilibrated in the drawn "
                f"geometry (relative out-of-balance {res0:.3g} > tolerance {tolerance:.3g})"
            )
    if mechanism is not None:
        try:
            t0 = bars.tangent(first)
        except RuntimeError:
            raise mechanism from None
        if t0.negative != 0:
            raise mechanism
        first.tangent = t0
    return first
