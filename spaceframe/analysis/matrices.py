"""Elastic, geometric and mass matrices of bars, from plain arrays.

Every matrix here is assembled by one routine,
:func:`spaceframe.assembly.assemble_blocks` (which also builds
:func:`spaceframe.assembly.stiffness_matrix`): a member
from node i to node j contributes the symmetric 6x6 matrix

    [[D, O],
     [O, D]]

with D and O symmetric 3x3 blocks (given by their upper triangles, in the
order xx, xy, xz, yy, yz, zz).  Each node's diagonal block is summed before
the sparse build and each member adds only its off-diagonal block, so no
duplicates reach the sparse constructor.  Matrices built by it for the same
members and degree-of-freedom map have identical ``indptr`` and ``indices``
(explicit zeros are kept), so they can be combined entry by entry.

The blocks (tension positive, c the unit vector from i to j, L the length):

- elastic stiffness: D = (EA/L) c cᵀ, O = -D;
- geometric stiffness: D = (N/L) (I - c cᵀ), O = -D, N the axial force
  (a string's lateral stiffness: T/L per unit of sideways movement of one
  end; cf. Cook, Malkus, Plesha and Witt, Concepts and Applications of
  Finite Element Analysis, 4th ed., §18.3, from memory);
- consistent mass of a bar with linear shape functions in all three
  directions: D = (m/3) I, O = (m/6) I, m = ρAL (the 6x6 matrix
  (ρAL/6)[[2I, I], [I, 2I]]);
- lumped mass: m/2 at each end in each direction (a diagonal matrix).

Arguments are arrays, not a Model, so that an analysis can pass modified
geometry or forces; :func:`member_geometry` gives lengths and directions.
The elastic stiffness and the renumbering of free directions live beside
the assembly (:func:`spaceframe.assembly.elastic_stiffness`,
:func:`spaceframe.assembly.free_dof_map`) and are re-exported here; every
routine takes the keywords of :class:`spaceframe.assembly.Numbering`.
"""

from __future__ import annotations

from typing import Literal, Unpack

import numpy as np
import scipy.sparse as sp

from spaceframe.assembly import (
    Numbering,
    _outer6,
    assemble_blocks,
    elastic_stiffness,
    free_dof_map,
)

__all__ = [
    "assemble_blocks",
    "consistent_mass",
    "elastic_stiffness",
    "free_dof_map",
    "geometric_stiffness",
    "lumped_mass",
    "mass_matrix",
    "member_geometry",
]

Triangle = Literal["full", "upper"]

#: The identity as an upper triangle (xx, xy, xz, yy, yz, zz).
_EYE6 = np.array([1.0, 0.0, 0.0, 1.0, 0.0, 1.0])


def member_geometry(nodes: np.ndarray, members: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(b,) lengths, m, and (b, 3) unit vectors from each member's first node to its second."""
    d = nodes[members[:, 1]] - nodes[members[:, 0]]
    length = np.sqrt(np.einsum("ij,ij->i", d, d))
    with np.errstate(invalid="ignore", divide="ignore"):
        return length, d / length[:, None]


def geometric_stiffness(
    members: np.ndarray,
    n_nodes: int,
    directions: np.ndarray,
    lengths: np.ndarray,
    axial_forces: np.ndarray,
    **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Geometric stiffness Σ (N/L) [[G, -G], [-G, G]], G = I - ccᵀ, N in N (tension +).

    Tension stiffens sideways movement of a member's ends, compression
    softens it; there is no term along the member.
    """
    w = np.asarray(axial_forces, dtype=float) / np.asarray(lengths, dtype=float)
    D = w[:, None] * (_EYE6[None, :] - _outer6(directions))
    return assemble_blocks(members, n_nodes, D, -D, **numbering)


def mass_matrix(
    members: np.ndarray,
    n_nodes: int,
    member_mass: np.ndarray,
    lumped: bool = False,
    *,
    added: np.ndarray | None = None,
    **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Consistent (default) or lumped mass of bars plus added nodal masses, kg.

    Parameters
    ----------
    member_mass : (b,) float
        ρAL of each member, kg.
    lumped : bool
        Half of each member's mass at each end (a diagonal matrix, the same
        for either triangle) instead of the consistent Σ (m/6) [[2I, I], [I, 2I]].
    added : (n,) float, optional
        Point mass at each node, kg, in all three directions.
    **numbering
        See :class:`spaceframe.assembly.Numbering`.
    """
    if lumped:
        return _lumped(members, n_nodes, member_mass, added, **numbering)
    m = np.asarray(member_mass, dtype=float)[:, None] * _EYE6[None, :]
    nodal = None if added is None else np.repeat(np.asarray(added, dtype=float)[:, None], 3, 1)
    return assemble_blocks(members, n_nodes, m / 3.0, m / 6.0, nodal=nodal, **numbering)


def consistent_mass(
    members: np.ndarray, n_nodes: int, member_mass: np.ndarray, *,
    added: np.ndarray | None = None, **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Consistent mass Σ (m/6) [[2I, I], [I, 2I]] plus added masses, kg (:func:`mass_matrix`)."""
    return mass_matrix(members, n_nodes, member_mass, False, added=added, **numbering)


def lumped_mass(
    members: np.ndarray, n_nodes: int, member_mass: np.ndarray, *,
    added: np.ndarray | None = None, **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    """Diagonal mass: half of each member's ρAL at each end, plus added masses, kg.

    The lumped :func:`mass_matrix`; the same matrix for either triangle.
    """
    return mass_matrix(members, n_nodes, member_mass, True, added=added, **numbering)


def _lumped(
    members: np.ndarray,
    n_nodes: int,
    member_mass: np.ndarray,
    added: np.ndarray | None,
    **numbering: Unpack[Numbering],
) -> sp.csr_matrix:
    n = int(n_nodes)
    half = 0.5 * np.asarray(member_mass, dtype=float)
    node = np.bincount(members[:, 0], half, n) + np.bincount(members[:, 1], half, n)
    if added is not None:
        node = node + np.asarray(added, dtype=float)
    d = np.repeat(node, 3)
    dof_map = numbering.get("dof_map")
    if dof_map is not None:
        keep = dof_map >= 0
        n_dof = numbering.get("n_dof")
        size = int(dof_map.max(initial=-1)) + 1 if n_dof is None else int(n_dof)
        diag = np.zeros(size)
        diag[dof_map[keep]] = d[keep]
        d = diag
    return sp.csr_matrix(sp.diags(d, format="csr"))
