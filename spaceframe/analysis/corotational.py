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

Inertia: the tangent is factorised by SuperLU with diagonal pivots only and a
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
from typing import TYPE_CHECKING

import numpy as np
import scipy.sparse as sp

from spaceframe.assembly import free_dof_map, member_dofs
from spaceframe.solvers import SingularFactor, factorize_ldlt

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["Bars", "State", "Tangent"]


class Tangent:
    """A factorised tangent stiffness with its negative-pivot count (-1: unknown)."""

    def __init__(self, K: sp.csr_matrix) -> None:
        try:
            self._factor = factorize_ldlt(K)
        except SingularFactor as exc:
            raise RuntimeError(str(exc)) from exc
        inertia = self._factor.inertia
        self.negative = inertia.negative if inertia is not None and inertia.zero == 0 else -1

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """Solve K x = rhs for a (m,) or (m, k) right-hand side."""
        return self._factor.solve(rhs)


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


class Bars:
    """The reduced nonlinear system of one model and one reference load.

    The sparsity pattern of the reduced tangent is found once; each assembly
    only sums the member values into it (one bincount, no sparse build).
    """

    def __init__(
        self, model: Model, f: np.ndarray, strain: np.ndarray | None = None,
        settlement: np.ndarray | None = None,
    ) -> None:
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
        self._keep = keep
        self._pos = inv[: keys.size]
        self._diag_pos = inv[keys.size :]
        self._nnz = uniq.size
        self._indices = uniq % max(nf, 1)
        self._indptr = np.searchsorted(uniq // max(nf, 1), np.arange(nf + 1))

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
        data = np.asarray(np.bincount(self._pos, K6.reshape(-1)[self._keep], self._nnz), float)
        data[self._diag_pos] += self.spring
        if not np.all(np.isfinite(data)):
            raise RuntimeError("non-finite tangent stiffness")
        K = sp.csr_matrix((data, self._indices, self._indptr), shape=(self.nf, self.nf))
        return Tangent(K)

    def reactions(self, s: State) -> np.ndarray:
        """(n, 3): forces of supports (restrained) and springs on the nodes."""
        r = np.zeros(3 * self.n)
        held = self.restrained
        r[held] = s.fint[held] - s.lam * self.f[held]
        r[self.free] = -self.spring * s.uf
        return r.reshape(self.n, 3)
