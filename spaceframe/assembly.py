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

from typing import TYPE_CHECKING, Literal

import numpy as np
import scipy.sparse as sp

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["equilibrium_matrix", "index_dtype", "member_dofs", "stiffness_matrix"]


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


def stiffness_matrix(
    model: Model,
    dof_map: np.ndarray | None = None,
    n_dof: int | None = None,
    triangle: Literal["full", "upper"] = "full",
) -> sp.csr_matrix:
    """Assemble the member stiffness K = A diag(EA/L) A^T directly.

    Parameters
    ----------
    model : Model
    dof_map : (3n,) int, optional
        Renumbering of global degrees of freedom; entries < 0 are dropped.
        Used to assemble the reduced (free-free) matrix without slicing.
    n_dof : int, optional
        Size of the renumbered system (default ``dof_map.max() + 1``).
    triangle : {"full", "upper"}
        Keep all entries, or only the upper triangle (for symmetric solvers).

    Returns
    -------
    K : scipy.sparse.csr_matrix
        Duplicates summed, indices sorted.
    """
    c = model.directions
    k = model.axial_stiffness
    # Member matrix k [[C, -C], [-C, C]] with C = c c^T, for all members at once.
    cc = k[:, None, None] * (c[:, :, None] * c[:, None, :])
    local = np.empty((model.n_members, 6, 6))
    local[:, :3, :3] = cc
    local[:, 3:, 3:] = cc
    local[:, :3, 3:] = -cc
    local[:, 3:, :3] = -cc
    dofs = member_dofs(model.members)
    if dof_map is not None:
        dofs = dof_map[dofs]
        size = int(dof_map.max(initial=-1)) + 1 if n_dof is None else n_dof
    else:
        size = 3 * model.n_nodes
    idx = index_dtype(size)
    dofs = dofs.astype(idx, copy=False)
    rows = np.broadcast_to(dofs[:, :, None], local.shape)
    cols = np.broadcast_to(dofs[:, None, :], local.shape)
    keep = (rows >= 0) & (cols >= 0)
    if triangle == "upper":
        keep &= rows <= cols
    K = sp.coo_matrix((local[keep], (rows[keep], cols[keep])), shape=(size, size)).tocsr()
    K.sum_duplicates()
    return K
