"""Equilibrium matrix and stiffness assembly."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

import spaceframe as sf
from spaceframe.assembly import stiffness_matrix


def test_equilibrium_matrix_columns(ferreira: sf.Model) -> None:
    A = sf.equilibrium_matrix(ferreira)
    assert A.shape == (15, 4) and sp.issparse(A)
    D = A.toarray()
    c = ferreira.directions
    for k, (i, j) in enumerate(ferreira.members):
        np.testing.assert_allclose(D[3 * i : 3 * i + 3, k], -c[k])
        np.testing.assert_allclose(D[3 * j : 3 * j + 3, k], c[k])
    # Each column sums to zero per axis: member forces are internal.
    np.testing.assert_allclose(D.reshape(5, 3, 4).sum(axis=0), 0.0, atol=1e-15)


def test_stiffness_equals_A_k_At(dome: sf.Model) -> None:
    A = sf.equilibrium_matrix(dome)
    K_ref = (A @ sp.diags(dome.axial_stiffness) @ A.T).toarray()
    K = stiffness_matrix(dome)
    np.testing.assert_allclose(K.toarray(), K_ref, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(stiffness_matrix(dome, triangle="upper").toarray(),
                               np.triu(K_ref), rtol=1e-12, atol=1e-9)
    assert K.indices.dtype == np.int32


def test_elongation_is_At_u(ferreira: sf.Model) -> None:
    # Compatibility: elongation of a member = c . (u_j - u_i) (small displacement).
    r = ferreira.solve()["P"]
    u = r.displacements
    c = ferreira.directions
    i, j = ferreira.members.T
    np.testing.assert_allclose(r.elongations, np.einsum("ij,ij->i", c, u[j] - u[i]))
    np.testing.assert_allclose(
        r.axial_forces, ferreira.axial_stiffness * r.elongations, rtol=1e-12
    )
