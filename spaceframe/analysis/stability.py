"""Stability diagnosis: find mechanisms and name the nodes and directions.

Cheap checks run before any factorisation (all vectorised):

1. nodes with no members and a free direction without a spring;
2. free nodes whose members are all collinear or all coplanar (the 3x3 nodal
   stiffness has a zero eigenvalue; its eigenvector is the free direction);
3. parts (connected components) with no support at all;
4. parts whose supports cannot stop all six rigid-body motions.

Whatever still makes the stiffness singular is named from the zero-energy
modes of the reduced stiffness (:func:`mechanism_modes`).

:func:`determinacy` gives, at any size, the rank r of the equilibrium
matrix, the number of states of self-stress s = b - r and of inextensional
mechanisms m = 3j - k - r (Pellegrino and Calladine, "Matrix analysis of
statically and kinematically indeterminate frameworks", Int. J. Solids
Structures 22(4), 1986): by a dense SVD for small models, by a sparse
inertia count above, with bases of both null spaces where they are few.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components

from spaceframe.assembly import equilibrium_matrix, full_symmetric, reduced_stiffness
from spaceframe.errors import MechanismError, ModelError, SolverError
from spaceframe.solvers import (
    PIVOT_TOLERANCE,
    LDLFactor,
    SingularFactor,
    available_backends,
    factorize,
    factorize_ldlt,
)
from spaceframe.tolerances import MAX_STIFFNESS_RATIO, NODE_STIFFNESS_RATIO, RANK_TOLERANCE

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = [
    "Determinacy",
    "check_conditioning",
    "check_stability",
    "describe_dofs",
    "determinacy",
    "full_stability",
    "mechanism_error",
    "mechanism_modes",
    "name_singular",
    "solve_determinate",
]

_AXES = "xyz"
#: How many nodes an error message lists before saying "and N more".
_LIST = 8


def _direction_name(v: np.ndarray) -> str:
    v = v / np.linalg.norm(v)
    k = int(np.argmax(np.abs(v)))
    if abs(abs(v[k]) - 1.0) < 1e-6:
        return _AXES[k]
    return "(" + ", ".join(f"{x:+.3f}" for x in v) + ")"


def _list_nodes(ids: np.ndarray) -> str:
    shown = ", ".join(str(int(i)) for i in ids[:_LIST])
    more = f" and {ids.size - _LIST} more" if ids.size > _LIST else ""
    return shown + more


def describe_dofs(dofs: np.ndarray) -> str:
    """'node 12 (z), node 13 (x, y)' for global degree-of-freedom numbers."""
    dofs = np.unique(np.asarray(dofs, dtype=np.int64))
    nodes, axes = np.divmod(dofs, 3)
    parts = []
    for n in np.unique(nodes)[:_LIST]:
        dirs = ", ".join(_AXES[a] for a in axes[nodes == n])
        parts.append(f"node {int(n)} ({dirs})")
    extra = np.unique(nodes).size - _LIST
    return ", ".join(parts) + (f" and {extra} more nodes" if extra > 0 else "")


def _plane_text(model: Model, node: int, normal: np.ndarray) -> str:
    name = _direction_name(normal)
    p = model.nodes[node]
    if name in _AXES:
        return f"the plane {name} = {p[_AXES.index(name)]:.6g}"
    return f"the plane through ({p[0]:.6g}, {p[1]:.6g}, {p[2]:.6g}) with normal {name}"


def _nodal_directions(model: Model) -> np.ndarray:
    """(n, 3, 3): sum over each node's members of c c^T (unit weights), plus springs.

    The geometric counterpart of the nodal stiffness: its eigenvalues say how
    the members' directions span space at each node, whatever their EA/L.
    """
    c = model.directions
    iu, ju = np.triu_indices(3)
    member = c[:, iu] * c[:, ju]
    n = model.n_nodes
    i, j = model.members[:, 0], model.members[:, 1]
    S = np.empty((n, 3, 3))
    for a in range(6):
        col = np.bincount(i, member[:, a], n) + np.bincount(j, member[:, a], n)
        S[:, iu[a], ju[a]] = col
        S[:, ju[a], iu[a]] = col
    S[:, [0, 1, 2], [0, 1, 2]] += model.springs > 0
    return S


def check_conditioning(model: Model) -> None:
    """Refuse member stiffnesses EA/L further apart than MAX_STIFFNESS_RATIO.

    Beyond that ratio float64 cannot promise the member forces: round-off in
    the stiff members' forces grows as ratio x 1e-16 of the load, so the
    answer would be refused by the self-checks or, worse, be wrong in the
    last digits that matter.  The message names the two members.

    Raises
    ------
    SolverError
        With the ratio and the stiffest and softest members.
    """
    k = model.axial_stiffness
    if k.size == 0:
        return
    bad = np.flatnonzero(~(np.isfinite(k) & (k > 0)))
    if bad.size:
        i = int(bad[0])
        raise SolverError(
            f"member {i}: axial stiffness EA/L = {float(k[i]):.3g} N/m is not a positive "
            f"finite number (E = {float(model.E[i]):.3g} Pa, A = {float(model.area[i]):.3g} m², "
            f"L = {float(model.lengths[i]):.3g} m)"
        )
    hi, lo = int(np.argmax(k)), int(np.argmin(k))
    ratio = float(k[hi] / k[lo])
    if not ratio <= MAX_STIFFNESS_RATIO:
        raise SolverError(
            f"ill-conditioned: stiffness ratio {ratio:.3g} between member {hi} "
            f"(EA/L = {float(k[hi]):.3g} N/m) and member {lo} (EA/L = {float(k[lo]):.3g} N/m) "
            f"exceeds {MAX_STIFFNESS_RATIO:.0e}, beyond which float64 cannot promise the forces"
        )


def mechanism_error(
    K: sp.spmatrix, free: np.ndarray, exc: SingularFactor, what: str = "", *,
    detail: bool = True,
) -> MechanismError:
    """MechanismError naming the zero-energy modes of a singular reduced stiffness.

    ``K`` is the full (not triangular) reduced stiffness, ``free`` the global
    dof of each row, ``exc`` the factorisation's complaint and ``what`` the
    analysis (a prefix of the message).  Where no mode is found the message
    names the zero pivots, followed by ``exc`` when ``detail``.  The caller
    raises the error ``from exc``.
    """
    try:
        _, modes = mechanism_modes(K, free)
    except Exception:  # naming is best effort; the mechanism is certain
        modes = []
    if modes:
        text = "; ".join(f"mode {j + 1} moves {describe_dofs(d)}" for j, d in enumerate(modes))
        dofs = np.unique(np.concatenate(modes))
    else:
        dofs = free[exc.dofs] if exc.dofs.size else np.zeros(0, dtype=np.int64)
        text = f"zero stiffness at {describe_dofs(dofs)}" if dofs.size else str(exc)
        text += f" ({exc})" if detail and dofs.size else ""
    nodes, axes = np.divmod(dofs, 3)
    return MechanismError(
        f"{what}{': ' if what else ''}the frame is a mechanism (singular stiffness): {text}",
        nodes=nodes,
        directions=["xyz"[a] for a in axes],
    )


def name_singular(model: Model, K: sp.spmatrix, free: np.ndarray, exc: SingularFactor) -> None:
    """Raise MechanismError naming the zero-energy modes of a singular reduced stiffness.

    ``K`` is the full (not triangular) reduced stiffness, ``free`` the global
    dof of each row, ``exc`` the factorisation's complaint.
    """
    raise mechanism_error(K, free, exc) from exc


def full_stability(model: Model, solver: str = "auto", quick: bool = False) -> None:
    """The whole stability test that a solve relies on, without solving.

    The cheap checks (:func:`check_stability`), the stiffness-ratio limit
    (:func:`check_conditioning`) and, unless ``quick``, a factorisation of the
    reduced stiffness by the same back-end and pivot test as the solve: a
    frame that passes here is not refused as a mechanism by the solve.

    Raises
    ------
    MechanismError
        Naming nodes and directions (from the zero-energy modes).
    SolverError
        On a stiffness ratio the solver cannot promise.
    """
    from spaceframe.solvers import factorize, needs_upper, resolve_backend

    check_stability(model)
    check_conditioning(model)
    if quick:
        return
    backend = resolve_backend(solver)
    triangle: Literal["full", "upper"] = "upper" if needs_upper(backend) else "full"
    K, free = reduced_stiffness(model, triangle)
    if free.size == 0:
        return
    try:
        factorize(K, backend)
    except SingularFactor as exc:
        name_singular(model, full_symmetric(K, triangle), free, exc)


def check_stability(model: Model) -> None:
    """Raise MechanismError for mechanisms that are cheap to find.

    Raises
    ------
    MechanismError
        With ``nodes`` and ``directions`` of the first problems found.
    """
    n = model.n_nodes
    free = ~model.restraint
    degree = np.bincount(model.members.ravel(), minlength=n)

    # 1. nodes that nothing holds in a free direction
    lonely = free & (degree[:, None] == 0) & (model.springs <= 0)
    bad = np.flatnonzero(lonely.any(axis=1))
    if bad.size:
        dirs = ["".join(_AXES[a] for a in np.flatnonzero(lonely[i])) for i in bad]
        raise MechanismError(
            f"{bad.size} node(s) have no members and are not supported in every direction: "
            + ", ".join(
                f"node {int(i)} (free along {d})"
                for i, d in zip(bad[:_LIST], dirs, strict=False)
            )
            + (f" and {bad.size - _LIST} more" if bad.size > _LIST else ""),
            nodes=bad,
            directions=dirs,
        )

    # 2. collinear / coplanar members at free nodes.  A geometric test: each
    # member counts with unit weight (only its direction matters), so a soft
    # member beside stiff ones, or a modulus of 1e-300, is never mistaken for
    # a missing one; what this test reports about lines and planes is true of
    # the drawn geometry.  Springs hold their direction like a member along it.
    S = _nodal_directions(model)
    # Restrained directions cannot move: make them stiff before looking.
    S[:, [0, 1, 2], [0, 1, 2]] += model.restraint * (degree[:, None] + 1.0)
    w, v = np.linalg.eigh(S)
    weak = w[:, 0] <= NODE_STIFFNESS_RATIO * np.maximum(w[:, 2], 1e-300)
    weak &= degree > 0
    bad = np.flatnonzero(weak)
    if bad.size:
        msgs = []
        dirs = []
        for i in bad[:_LIST]:
            vec = v[i][:, 0]
            name = _direction_name(vec)
            dirs.append(name)
            rank = int(np.sum(w[i] > NODE_STIFFNESS_RATIO * w[i, 2]))
            if rank == 1:
                line = _direction_name(v[i][:, 2])
                why = f"all its members lie on one line (along {line})"
            else:
                why = f"all its members lie in {_plane_text(model, int(i), vec)}"
            if np.any(model.restraint[i] | (model.springs[i] > 0)):
                why += " and its supports do not hold that direction"
            msgs.append(f"node {int(i)} has no stiffness along {name}: {why}")
        more = f" (and {bad.size - _LIST} more nodes)" if bad.size > _LIST else ""
        raise MechanismError("; ".join(msgs) + more, nodes=bad, directions=dirs)

    # 3. and 4. parts without (enough) support
    adj = sp.coo_matrix(
        (np.ones(model.n_members), (model.members[:, 0], model.members[:, 1])), shape=(n, n)
    )
    n_parts, label = connected_components(adj, directed=False)
    held = model.restraint | (model.springs > 0)
    held_parts = np.bincount(label, weights=held.any(axis=1), minlength=n_parts) > 0
    used = degree > 0
    loose = np.flatnonzero(~held_parts & (np.bincount(label, weights=used, minlength=n_parts) > 0))
    if loose.size:
        nodes = np.flatnonzero(label == loose[0])
        raise MechanismError(
            f"{loose.size} part(s) of the frame are not connected to any support; the first "
            f"has {nodes.size} nodes: {_list_nodes(nodes)}",
            nodes=nodes,
            directions=["any"] * nodes.size,
        )
    _check_rigid_body(model, label, n_parts, held)


def _rigid_body_fields(r: np.ndarray) -> np.ndarray:
    """(p, 3, 6): velocities at points ``r`` (p, 3) of the 3 translations and 3 rotations."""
    fields = np.zeros((r.shape[0], 3, 6))
    fields[:, [0, 1, 2], [0, 1, 2]] = 1.0
    for axis, e in enumerate(np.eye(3)):
        fields[:, :, 3 + axis] = np.cross(e, r)
    return fields


def _check_rigid_body(model: Model, label: np.ndarray, n_parts: int, held: np.ndarray) -> None:
    """Each part's supports must stop its three translations and three rotations."""
    names = ("translation along x", "translation along y", "translation along z",
             "rotation about x", "rotation about y", "rotation about z")
    held_nodes = np.flatnonzero(held.any(axis=1))
    used = np.bincount(model.members.ravel(), minlength=model.n_nodes) > 0
    for part in np.unique(label[held_nodes]):
        nodes_p = held_nodes[label[held_nodes] == part]
        # The nodes of this part that have members (a node mask, not a sort
        # of the part's member ends).
        all_nodes = np.flatnonzero((label == part) & used)
        if all_nodes.size < 2:
            continue
        centre = model.nodes[all_nodes].mean(axis=0)
        # Rigid-body velocity fields (translations, rotations) at the held dofs.
        G = _rigid_body_fields(model.nodes[nodes_p] - centre)[held[nodes_p]]  # rows: held dofs
        # A part that is flat or a line has fewer genuine rigid-body modes to
        # check: rotations about its own line do not move anything.
        span = model.nodes[all_nodes] - centre
        Rf = _rigid_body_fields(span).reshape(-1, 6)
        # Right singular vectors of Rf from its 6x6 Gram matrix: the same
        # subspace at a cost linear in the nodes (a thin SVD of a 3N x 6
        # matrix is not).  Squared singular values, so the threshold is squared.
        lam, vec = np.linalg.eigh(Rf.T @ Rf)
        lam, vec = lam[::-1], vec[:, ::-1]
        genuine = vec[:, lam > (RANK_TOLERANCE * 1e3) ** 2 * lam[0]].T
        Gm = G @ genuine.T if G.size else np.zeros((0, genuine.shape[0]))
        sg = np.linalg.svd(Gm, compute_uv=False) if Gm.size else np.zeros(0)
        scale = max(float(np.linalg.norm(span, axis=1).max()), 1.0)
        rank = int(np.sum(sg > 1e-9 * scale))
        if rank < genuine.shape[0]:
            _, _, vg = np.linalg.svd(Gm if Gm.size else np.zeros((1, genuine.shape[0])))
            free_mode = vg[-1] @ genuine
            k = int(np.argmax(np.abs(free_mode)))
            raise MechanismError(
                f"too few supports: the part with nodes {_list_nodes(all_nodes)} can move as a "
                f"rigid body ({names[k]} is not prevented; {int(held[nodes_p].sum())} restrained "
                f"directions at nodes {_list_nodes(nodes_p)})",
                nodes=nodes_p,
                directions=[names[k]] * nodes_p.size,
            )


def _inertia_count(Ks: sp.spmatrix, tau: float) -> int:
    """The number of eigenvalues of Ks below tau, from a factorisation of ``Ks - tau I``.

    Sylvester's law of inertia: K - tau I = L D L^T has as many negative
    pivots as K has eigenvalues below tau (the Sturm sequence check of
    structural eigenvalue solvers, Bathe, "Finite Element Procedures", 1996,
    section 11.4.3).  :func:`spaceframe.solvers.factorize_ldlt` is such an
    L D L^T (SuperLU in symmetric mode with diagonal pivoting); its
    ``pivots`` are D.  Here the pivots are judged against the shift, not
    against their diagonals as its ``inertia`` does.  A mechanism's pivot is
    -tau plus round-off and its column below is round-off too (Ks is
    positive semi-definite), so the elimination does not grow; a pivot that
    lands almost on zero (an eigenvalue within a hair of tau) is retried
    with a shift moved by a factor 1.5.
    """
    if _positive_definite_above(Ks, tau):
        return 0
    last: Exception | None = None
    for shift in (tau, tau * 1.5, tau / 1.5):
        try:
            d = _shifted_ldlt(Ks, shift).pivots
        except SingularFactor as exc:
            last = exc
            continue
        if d is None:
            last = SolverError("an exactly zero pivot in the symmetric elimination")
            continue
        if not np.all(np.isfinite(d)):
            last = SolverError("non-finite pivots")
            continue
        if np.any(np.abs(d) < 1e-3 * shift):
            last = SolverError("a pivot within round-off of zero")
            continue
        return int(np.sum(d < 0))
    raise SolverError(f"determinacy: the inertia count failed ({last})")


def _positive_definite_above(Ks: sp.spmatrix, tau: float) -> bool:
    """Whether PARDISO's Cholesky of Ks - tau I proves every eigenvalue above tau.

    Only a positive definite matrix has one, and ``factorize`` refuses pivots
    below PIVOT_TOLERANCE of their diagonal (about 1 here): a stable frame in
    one factorisation, several times faster than the L D L^T.  A refusal
    proves nothing; the L D L^T count decides.  Without PARDISO: False.
    """
    if available_backends()[0] != "pardiso":
        return False
    eye = sp.identity(Ks.shape[0], format="csr")
    try:
        factorize(sp.csr_matrix(Ks - tau * eye), "pardiso", refine=False)
    except SingularFactor:
        return False
    return True


def _shifted_ldlt(Ks: sp.spmatrix, shift: float) -> LDLFactor:
    """L D L^T of Ks - shift I (solvers.factorize_ldlt) in COLAMD order."""
    eye = sp.identity(Ks.shape[0], format="csc")
    # COLAMD: on these matrices (not pre-ordered) it fills several times less
    # than MMD on A^T + A; with diagonal pivoting in symmetric mode the row
    # order follows the column order, so this is an L D L^T.
    return factorize_ldlt(sp.csc_matrix(Ks - shift * eye), ordering="COLAMD")


def _lowest_modes(Ks: sp.spmatrix, k: int, tau: float) -> tuple[np.ndarray, np.ndarray]:
    """The k lowest eigenpairs of Ks by block inverse (subspace) iteration.

    Hand-written rather than scipy's eigsh: a null space of dimension k is one
    eigenvalue of multiplicity k, and Lanczos finds the copies of a multiple
    eigenvalue only one at a time and unreliably (a flat grid's mechanisms
    came back mixed with in-plane vectors); a block of k + a few vectors
    holds them all at once (Bathe, "Finite Element Procedures", 1996,
    section 11.6, subspace iteration).  The shift sits just below zero
    (-tau/100): Ks + (tau/100) I is positive definite, its factorisation
    stable, and each step multiplies the zero modes by about 100/tau against
    1/lambda for the others, so a few steps suffice; a Rayleigh-Ritz step on
    the block then sorts them.  The number of steps is capped.
    """
    n = Ks.shape[0]
    k = max(1, min(k, n))
    p = min(n, k + min(k, 8) + 2)
    lu = _shifted_ldlt(Ks, -tau / 100.0)
    X = np.random.default_rng(0).standard_normal((n, p))
    w = np.zeros(p)
    for _ in range(8):
        X, _r = np.linalg.qr(np.asarray(lu.solve(X)))
        H = X.T @ (Ks @ X)
        w, Q = np.linalg.eigh((H + H.T) / 2)
        X = X @ Q
        res = np.linalg.norm(Ks @ X[:, :k] - X[:, :k] * w[:k], axis=0)
        if np.all(res <= 1e-3 * np.sqrt(tau)):
            break
    return w[:k], X[:, :k]


#: Largest number of rows of the reduced stiffness for a dense eigen-solve
#: when naming a mechanism (about a second on two cores); above, the sparse
#: factor and a shift-invert Lanczos are used.
_DENSE_NAMING = 1500


def mechanism_modes(
    K: sp.spmatrix, free_dofs: np.ndarray, k: int = 3
) -> tuple[np.ndarray, list[np.ndarray]]:
    """Zero-energy modes of a singular reduced stiffness.

    Parameters
    ----------
    K : (m, m) sparse
        Reduced stiffness (free degrees of freedom).
    free_dofs : (m,) int
        Global dof number of each row.
    k : int
        Number of modes to look for.

    Returns
    -------
    energies : (j,) float
        Eigenvalues of the diagonally scaled stiffness (order one for a stiff
        direction) of the modes found near zero.
    dofs : list of (p,) int
        For each mode, the global dofs that move most (>= 10 % of its peak).
    """
    m = K.shape[0]
    # Symmetric diagonal (Jacobi) scaling S K S with S = diag(K)^-1/2: each
    # direction is judged against its own stiffness, as the pivot test of the
    # factorisation does, so a soft member beside stiff ones is not a "mode"
    # and a modulus of 1e-300 is not either.  A pivot below PIVOT_TOLERANCE
    # of its diagonal implies an eigenvalue of S K S below it (Schur
    # complements interlace), so a mechanism the factorisation found is named.
    diag = np.abs(K.diagonal())
    s = 1.0 / np.sqrt(np.where(diag > 0, diag, 1.0))
    S = sp.diags(s)
    Ks = sp.csc_matrix(S @ K @ S)
    k = max(1, min(k, m - 1))
    if m <= _DENSE_NAMING:
        w, V = np.linalg.eigh(Ks.toarray())
        w, V = w[:k], V[:, :k]
    else:
        # A factorisation of Ks - tau I counts the modes below tau
        # (inertia); a short shift-invert Lanczos run finds them.
        count = _inertia_count(Ks, PIVOT_TOLERANCE)
        if count == 0:
            return np.zeros(0), []
        w, V = _lowest_modes(Ks, min(k, count), PIVOT_TOLERANCE)
    zero = np.flatnonzero(w < PIVOT_TOLERANCE)
    out = []
    for j in zero:
        vec = np.abs(s * V[:, j])  # back to displacements
        out.append(free_dofs[vec >= 0.1 * vec.max()])
    return w[zero], out


@dataclass
class Determinacy:
    """Counts from the rank of the equilibrium matrix, and the null spaces.

    Attributes
    ----------
    rank : int
        Rank r of A restricted to the free degrees of freedom.
    self_stress : int
        States of self-stress s = b - r.
    mechanisms : int
        Inextensional mechanisms m = 3j - k - r (k restrained directions).
    mechanism_modes : (m, n_nodes, 3) float or None
        A basis of the inextensional mechanisms (nodal movements with
        A^T d = 0 at the free directions), each scaled to a largest nodal
        movement of 1; None when not computed (see ``note``).
    self_stress_states : (s, b) float or None
        A basis of the states of self-stress (member forces with A t = 0 at
        the free directions), each scaled to a largest force of 1; None when
        not computed (see ``note``).
    method : str
        "dense" (singular value decomposition) or "sparse" (inertia count of
        a sparse factorisation).
    note : str
        Why a basis was not computed, or empty.
    """

    rank: int
    self_stress: int
    mechanisms: int
    mechanism_modes: np.ndarray | None = None
    self_stress_states: np.ndarray | None = None
    method: str = "dense"
    note: str = ""

    @property
    def statically_determinate(self) -> bool:
        """No self-stress and no mechanism: A t = f has one solution."""
        return self.self_stress == 0 and self.mechanisms == 0


#: Largest number of free degrees of freedom and of members for which
#: determinacy uses a dense singular value decomposition (seconds on two
#: cores); above it the counts come from a sparse inertia count.
DENSE_LIMIT = 2000

#: Largest number of mechanisms or states of self-stress whose basis a large
#: (sparse) model gets, by shift-invert Lanczos; beyond it only the count.
SPARSE_MODE_LIMIT = 50


def _scaled_rows(A_f: sp.spmatrix) -> np.ndarray:
    """D^-1/2 for D = diag(A_f A_f^T) (1 where a row is empty)."""
    d = np.asarray(A_f.multiply(A_f).sum(axis=1)).ravel()
    return 1.0 / np.sqrt(np.where(d > 0, d, 1.0))


def _unit_rows(V: np.ndarray) -> np.ndarray:
    """Each row scaled to a largest absolute entry of 1, its largest entry positive."""
    if V.size == 0:
        return V
    k = np.argmax(np.abs(V), axis=1)
    peak = V[np.arange(V.shape[0]), k]
    return V / peak[:, None]


def _mechanism_array(model: Model, free: np.ndarray, D: np.ndarray) -> np.ndarray:
    """(k, n_nodes, 3) nodal movements from (n_free, k) columns, largest node movement 1."""
    flat = np.zeros((D.shape[1], 3 * model.n_nodes))
    flat[:, free] = D.T
    out = flat.reshape(D.shape[1], model.n_nodes, 3)
    if out.size:
        peak = np.linalg.norm(out, axis=2).max(axis=1)
        out /= np.where(peak > 0, peak, 1.0)[:, None, None]
    return out


def determinacy(model: Model, modes: bool = True) -> Determinacy:
    """Rank of the equilibrium matrix, the counts s and m, and their bases.

    The rank criterion is one for all sizes: with A_f the equilibrium matrix
    at the free directions and D = diag(A_f A_f^T), a mechanism is an
    eigenvalue of D^-1/2 A_f A_f^T D^-1/2 below PIVOT_TOLERANCE (a singular
    value of D^-1/2 A_f below its square root, 1e-6).  A_f holds direction
    cosines only, so the count is geometric: independent of units, sections,
    materials and the frame's size; springs are not restraints in it.

    - Up to DENSE_LIMIT free directions and members: a singular value
      decomposition of D^-1/2 A_f, which also gives both bases.
    - Above: m is the number of negative pivots of a sparse factorisation of
      D^-1/2 A_f A_f^T D^-1/2 - tau I (Sylvester's law of inertia), the rank
      r = 3j - k - m and s = b - r (Pellegrino and Calladine, "Matrix
      analysis of statically and kinematically indeterminate frameworks",
      Int. J. Solids Structures 22(4), 1986).  Bases are computed by
      shift-invert Lanczos when there are at most SPARSE_MODE_LIMIT of them
      (and ``modes``); otherwise ``note`` says so.

    Parameters
    ----------
    modes : bool
        Compute the bases (mechanism modes, states of self-stress).
    """
    free = np.flatnonzero(~model.restraint.ravel())
    b = model.n_members
    A_f = equilibrium_matrix(model).tocsr()[free]
    if free.size == 0 or b == 0:
        states = np.eye(b) if modes else None
        mech = _mechanism_array(model, free, np.eye(free.size)) if modes else None
        return Determinacy(0, b, free.size, mech, states)
    dr = _scaled_rows(A_f)
    As = sp.diags(dr) @ A_f
    tau = PIVOT_TOLERANCE
    if free.size <= DENSE_LIMIT and b <= DENSE_LIMIT:
        dense = As.toarray()
        if not modes:
            sv = np.linalg.svd(dense, compute_uv=False)
            r = int(np.sum(sv**2 >= tau))
            return Determinacy(r, b - r, free.size - r)
        U, sv, Vt = np.linalg.svd(dense, full_matrices=True)
        r = int(np.sum(sv**2 >= tau))
        mech = _mechanism_array(model, free, dr[:, None] * U[:, r:])
        return Determinacy(r, b - r, free.size - r, mech, _unit_rows(Vt[r:]))
    Ks = sp.csc_matrix(As @ As.T)
    m = _inertia_count(Ks, tau)
    r = free.size - m
    s = b - r
    out = Determinacy(r, s, m, method="sparse")
    if not modes:
        return out
    notes = []
    if m <= SPARSE_MODE_LIMIT:
        if m:
            _, V = _lowest_modes(Ks, m, tau)
            out.mechanism_modes = _mechanism_array(model, free, dr[:, None] * V)
        else:
            out.mechanism_modes = np.zeros((0, model.n_nodes, 3))
    else:
        notes.append(f"{m} mechanisms: more than {SPARSE_MODE_LIMIT}, modes not computed")
    if s <= SPARSE_MODE_LIMIT:
        if s:
            Gs = sp.csc_matrix(As.T @ As)
            count = _inertia_count(Gs, tau)
            if count != s:
                notes.append(f"states of self-stress: the member-side count {count} differs "
                             f"from s = {s}; states not computed")
            else:
                _, V = _lowest_modes(Gs, s, tau)
                out.self_stress_states = _unit_rows(V.T)
        else:
            out.self_stress_states = np.zeros((0, b))
    else:
        notes.append(f"{s} states of self-stress: more than {SPARSE_MODE_LIMIT}, "
                     "states not computed")
    out.note = "; ".join(notes)
    return out


def solve_determinate(model: Model, forces: np.ndarray) -> np.ndarray:
    """Member forces from equilibrium alone, A_f t = f_f, for a determinate frame.

    No stiffness is used: for a statically determinate frame the member forces
    follow from statics only (and do not depend on E or A).

    Parameters
    ----------
    forces : (n, 3) float
        Applied nodal loads, N.

    Returns
    -------
    t : (b,) float
        Axial forces, N, tension positive.

    Raises
    ------
    ModelError
        If the frame is not statically determinate.
    """
    d = determinacy(model, modes=False)
    if not d.statically_determinate:
        raise ModelError(
            f"not statically determinate: {d.self_stress} state(s) of self-stress and "
            f"{d.mechanisms} mechanism(s)"
        )
    free = np.flatnonzero(~model.restraint.ravel())
    A = equilibrium_matrix(model).tocsr()[free].tocsc()
    # At free dofs there are no reactions: A t = f there.
    from scipy.sparse.linalg import spsolve

    t = spsolve(A, np.asarray(forces, dtype=float).ravel()[free])
    return np.asarray(t, dtype=float)
