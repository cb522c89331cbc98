"""Equilibrium matrix and stiffness, built from index arrays in one sparse build.

Conventions (tension positive):

- The equilibrium matrix ``A`` is (3n, b).  Column k holds ``-c_k`` in the
  three rows of its first node i and ``+c_k`` in those of its second node j,
  where ``c_k`` is the unit vector from i to j.  Then ``A @ t = p``: member
  tensions t balance the external nodal forces p (loads plus reactions).
- Its transpose is the compatibility matrix: elongations ``e = A.T @ u``.
- The stiffness is ``K = A diag(EA/L) A.T``; it is assembled directly from
  the 6x6 member matrices, never by a sparse product.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Literal, TypedDict, Unpack

import numpy as np
import scipy.sparse as sp

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = [
    "Numbering",
    "assemble_blocks",
    "elastic_stiffness",
    "equilibrium_matrix",
    "free_dof_map",
    "full_symmetric",
    "index_dtype",
    "member_dofs",
    "reduced_stiffness",
    "stiffness_matrix",
]

Triangle = Literal["full", "upper"]


class Numbering(TypedDict, total=False):
    """How an assembled matrix is numbered and stored (keywords of every assembly routine).

    dof_map : (3n,) int
        Renumbering of global dofs; entries < 0 are dropped (restrained).
        Used to assemble the reduced (free-free) matrix without slicing.
    n_dof : int
        Size of the renumbered system (default ``dof_map.max() + 1``).
    triangle : {"full", "upper"}
        All entries (default), or only the upper triangle (for symmetric solvers).
    """

    dof_map: np.ndarray | None
    n_dof: int | None
    triangle: Triangle


def index_dtype(n: int) -> type[np.signedinteger]:
    """int32 where indices up to ``n`` fit (halves index memory), else int64."""
    return np.int32 if n < np.iinfo(np.int32).max else np.int64


def member_dofs(members: np.ndarray) -> np.ndarray:
    """(b, 6) int: global degrees of freedom (3*node + axis) of each member's ends."""
    idx = index_dtype(3 * (int(members.max(initial=0)) + 1))
    base = (3 * members).astype(idx)
    offs = np.arange(3, dtype=idx)
    return np.concatenate([base[:, :1] + offs, base[:, 1:] + offs], axis=1)


def equilibrium_matrix(model: Model) -> sp.csc_matrix:
    """The (3n, b) equilibrium matrix A, so that A t = f.

    Parameters
    ----------
    model : Model

    Returns
    -------
    A : (3n, b) scipy.sparse.csc_matrix
        Six non-zeros per column: -c at the first node, +c at the second.
    """
    b = model.n_members
    c = model.directions
    data = np.concatenate([-c, c], axis=1).ravel()
    rows = member_dofs(model.members).ravel()
    idx = index_dtype(max(3 * model.n_nodes, b))
    indptr = np.arange(0, 6 * b + 1, 6, dtype=idx)
    # Built straight in CSC form: each column's six entries are contiguous.
    return sp.csc_matrix((data, rows.astype(idx), indptr), shape=(3 * model.n_nodes, b))


#: Upper-triangle positions (row, column) of a symmetric 3x3 block.
_UPPER3 = np.triu_indices(3)


def _outer6(c: np.ndarray) -> np.ndarray:
    """(b, 6) upper triangles of c cᵀ."""
    return c[:, _UPPER3[0]] * c[:, _UPPER3[1]]


def assemble_blocks(
    members: np.ndarray,
    n_nodes: int,
    diag: np.ndarray,
    off: np.ndarray,
    *,
    nodal: np.ndarray | None = None,
    **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Assemble member matrices [[D, O], [O, D]] on the elastic stiffness's pattern.

    Parameters
    ----------
    members : (b, 2) int
        End node ids.
    n_nodes : int
    diag, off : (b, 6) float
        Upper triangles of each member's blocks D and O.
    nodal : (n, 3) float, optional
        Extra diagonal terms per node and axis (springs, added masses).
    **numbering
        ``dof_map``, ``n_dof``, ``triangle``: see :class:`Numbering`.

    Returns
    -------
    scipy.sparse.csr_matrix
        Duplicates summed, indices sorted; zeros in the pattern kept.
    """
    dof_map = numbering.get("dof_map")
    n_dof = numbering.get("n_dof")
    triangle = numbering.get("triangle", "full")
    members = np.asarray(members)
    b = members.shape[0]
    n = int(n_nodes)
    i, j = members[:, 0], members[:, 1]
    node = np.empty((n, 6))
    # bincount with weights is a single pass in C per component; np.add.at
    # on (b, 3, 3) is several times slower.  Each node's diagonal block is
    # summed before the sparse build and each member adds only its
    # off-diagonal block: no duplicates reach the sparse constructor.
    for a in range(6):
        node[:, a] = np.bincount(i, diag[:, a], n) + np.bincount(j, diag[:, a], n)
    if nodal is not None:
        node[:, [0, 3, 5]] += nodal
    C = np.empty((b, 3, 3))
    C[:, _UPPER3[0], _UPPER3[1]] = off
    C[:, _UPPER3[1], _UPPER3[0]] = off
    axes = np.arange(3)
    if triangle == "upper":
        da, db = _UPPER3
        dblock = node
    else:
        da, db = np.divmod(np.arange(9), 3)
        full = np.empty((n, 3, 3))
        full[:, _UPPER3[0], _UPPER3[1]] = node
        full[:, _UPPER3[1], _UPPER3[0]] = node
        dblock = full.reshape(n, 9)
    base_n = 3 * np.arange(n)[:, None]
    base_i = 3 * members[:, :1, None]
    base_j = 3 * members[:, 1:, None]
    rows = [(base_n + da).ravel(), np.broadcast_to(base_i + axes[:, None], (b, 3, 3)).ravel()]
    cols = [(base_n + db).ravel(), np.broadcast_to(base_j + axes[None, :], (b, 3, 3)).ravel()]
    vals = [dblock.ravel(), C.ravel()]
    if triangle == "full":
        rows.append(cols[1])
        cols.append(rows[1])
        vals.append(vals[1])
    r = np.concatenate(rows)
    c = np.concatenate(cols)
    v = np.concatenate(vals)
    if dof_map is not None:
        r, c = dof_map[r], dof_map[c]
        size = int(dof_map.max(initial=-1)) + 1 if n_dof is None else int(n_dof)
        keep = (r >= 0) & (c >= 0)
        r, c, v = r[keep], c[keep], v[keep]
    else:
        size = 3 * n
    if triangle == "upper":
        # Blocks are symmetric: fold entries below the diagonal onto their mirror.
        r, c = np.minimum(r, c), np.maximum(r, c)
    idx = index_dtype(size)
    M = sp.csr_matrix((v, (r.astype(idx), c.astype(idx))), shape=(size, size))
    M.sum_duplicates()
    return M


def free_dof_map(restraint: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Renumbering that eliminates restrained directions.

    Parameters
    ----------
    restraint : (n, 3) bool

    Returns
    -------
    dof_map : (3n,) int
        New number of each global dof, -1 where restrained.
    free : (m,) int
        Global dof of each new number.
    """
    flat = np.asarray(restraint, dtype=bool).ravel()
    free = np.flatnonzero(~flat)
    dof_map = np.full(flat.size, -1, dtype=np.int64)
    dof_map[free] = np.arange(free.size)
    return dof_map, free


def elastic_stiffness(
    members: np.ndarray,
    n_nodes: int,
    directions: np.ndarray,
    axial_stiffness: np.ndarray,
    *,
    springs: np.ndarray | None = None,
    **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Elastic stiffness Σ (EA/L) [[ccᵀ, -ccᵀ], [-ccᵀ, ccᵀ]], plus springs (n, 3) N/m.

    From arrays, so that an analysis can pass modified geometry; numbered as
    ``numbering`` says (:class:`Numbering`), on the pattern of
    :func:`assemble_blocks`.
    """
    D = np.asarray(axial_stiffness, dtype=float)[:, None] * _outer6(directions)
    return assemble_blocks(members, n_nodes, D, -D, nodal=springs, **numbering)


def stiffness_matrix(model: Model, **numbering: Unpack[Numbering]) -> sp.csr_matrix:
    """The member stiffness K = A diag(EA/L) A^T of a model, assembled directly.

    ``numbering`` (:class:`Numbering`) gives the reduced (free-free) matrix
    without slicing, or its upper triangle.  Springs are not included.

    Returns
    -------
    K : scipy.sparse.csr_matrix
        Duplicates summed, indices sorted.
    """
    return elastic_stiffness(model.members, model.n_nodes, model.directions,
                             model.axial_stiffness, **numbering)


def reduced_stiffness(
    model: Model, triangle: Triangle = "full"
) -> tuple[sp.csr_matrix, np.ndarray]:
    """Stiffness on the free directions (springs on the diagonal) and their dof numbers.

    ``triangle="upper"`` stores the upper triangle only (what PARDISO is given).
    """
    dof_map, free = free_dof_map(model.restraint)
    K = elastic_stiffness(model.members, model.n_nodes, model.directions, model.axial_stiffness,
                          springs=model.springs, dof_map=dof_map, n_dof=free.size,
                          triangle=triangle)
    return K, free


def full_symmetric(K: sp.spmatrix, triangle: Triangle) -> sp.spmatrix:
    """The full symmetric matrix from one stored as ``triangle``."""
    if triangle == "full":
        return K
    return K + sp.triu(K, k=1).T
