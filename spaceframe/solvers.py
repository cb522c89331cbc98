"""Sparse direct solver back-ends behind one small interface.

``factorize(K, backend)`` returns a :class:`Factor` with ``solve(B)`` for a
multi-column right-hand side.  Back-ends:

- ``"scipy"``: SuperLU from scipy, always available.  Stiffness matrices are
  symmetric positive definite, so it runs in symmetric mode with a minimum
  degree ordering of A^T + A and no threshold pivoting (diagonal pivots),
  which keeps the fill of a Cholesky-like factorisation.
- ``"pardiso"``: Intel MKL PARDISO through pypardiso, for large models.  It is
  given only the upper triangle with matrix type 2 (real symmetric positive
  definite), every iparm set explicitly (recent MKL releases return wrong
  answers with pypardiso's all-zero defaults), and a solver object of its own
  per factorisation (pypardiso's module-level solver is shared global state).

A factor never vouches for its answer: the caller checks residuals.
"""

from __future__ import annotations

import importlib.util
import os
import platform
from typing import Any, Literal, Protocol

import numpy as np
import scipy.sparse as sp

from spaceframe.errors import SolverError

__all__ = ["Factor", "SingularFactor", "available_backends", "factorize", "resolve_backend"]

Backend = Literal["auto", "scipy", "pardiso"]

#: Pivot size, relative to the largest diagonal entry of the matrix, below
#: which a pivot is taken as zero (a mechanism).  Round-off in a sound
#: factorisation stays near 1e-16 times the diagonal; genuine stiffness
#: ratios in frames (a slack cable beside a main chord) stay above 1e-9.
PIVOT_TOLERANCE = 1.0e-11


class SingularFactor(SolverError):
    """The factorisation met zero pivots; ``dofs`` are the positions, if known."""

    def __init__(self, message: str, dofs: np.ndarray | None = None) -> None:
        super().__init__(message)
        self.dofs = np.asarray(dofs if dofs is not None else [], dtype=np.int64)


class Factor(Protocol):
    """A factorised symmetric matrix."""

    name: str

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """Solve K x = rhs for a (m,) or (m, k) right-hand side."""
        ...


def available_backends() -> list[str]:
    """Names of the back-ends that can run here."""
    names = ["scipy"]
    if importlib.util.find_spec("pypardiso") is not None and platform.machine() in (
        "x86_64",
        "AMD64",
    ):
        names.insert(0, "pardiso")
    return names


def resolve_backend(backend: str) -> str:
    """Turn "auto" into a concrete back-end name; check the name."""
    if backend == "auto":
        return available_backends()[0]
    if backend not in ("scipy", "pardiso"):
        raise SolverError(f"unknown solver {backend!r}: choose 'auto', 'scipy' or 'pardiso'")
    if backend not in available_backends():
        raise SolverError(
            f"solver {backend!r} is not available here (install the 'fast' extra: "
            "pip install 'spaceframe[fast]')"
        )
    return backend


class _SuperLUFactor:
    name = "scipy"

    def __init__(self, K: sp.spmatrix) -> None:
        import scipy.sparse.linalg as spla

        Kc = sp.csc_matrix(K)
        diag = np.abs(Kc.diagonal())
        scale = float(diag.max(initial=0.0))
        if scale > 0:
            zero = np.flatnonzero(diag <= PIVOT_TOLERANCE * scale)
        else:
            zero = np.arange(K.shape[0])
        if zero.size:
            raise SingularFactor(f"{zero.size} zero diagonal entries", zero)
        try:
            self._lu = spla.splu(
                Kc,
                permc_spec="MMD_AT_PLUS_A",
                diag_pivot_thresh=0.0,
                options={"SymmetricMode": True},
            )
        except RuntimeError as exc:  # "Factor is exactly singular"
            raise SingularFactor(f"SuperLU: {exc}") from exc
        udiag = np.abs(self._lu.U.diagonal())
        small = np.flatnonzero(udiag <= PIVOT_TOLERANCE * scale)
        if small.size:
            # U's column j is the original column i with perm_c[i] == j.
            inv = np.argsort(self._lu.perm_c)
            raise SingularFactor(f"{small.size} zero pivots", inv[small])

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        return np.asarray(self._lu.solve(np.asarray(rhs, dtype=float)))


class _PardisoFactor:
    name = "pardiso"

    def __init__(self, K_upper: sp.spmatrix) -> None:
        import pypardiso

        self._A = sp.csr_matrix(K_upper)
        self._A.sort_indices()
        solver = pypardiso.PyPardisoSolver(mtype=2)
        # pypardiso searches for the MKL runtime (a linker query and a
        # recursive glob of sys.prefix, 0.1-0.2 s) on every new solver unless
        # PYPARDISO_MKL_RT names it; the library is loaded now, so name it for
        # the solvers that follow.
        os.environ.setdefault("PYPARDISO_MKL_RT", solver.libmkl._name)
        iparm = {
            1: 1,  # use the values below, not MKL's defaults
            2: 2,  # nested-dissection ordering (METIS)
            8: 2,  # at most two steps of iterative refinement
            10: 8,  # pivot perturbation 1e-8 (only used if a pivot is tiny)
            11: 0,  # no scaling (SPD)
            13: 0,  # no weighted matching (SPD)
            18: -1,  # report non-zeros in the factor
            21: 0,  # 1x1 diagonal pivoting (SPD)
            24: 0,  # classic parallel factorisation
            25: 0,  # sequential forward/backward solve is fine for few columns
            27: 0,  # no matrix checker (we build sorted CSR ourselves)
            35: 0,  # one-based indices (pypardiso shifts them)
            56: 1,  # keep the pivots for pardiso_getdiag (checked below)
        }
        for i, v in iparm.items():
            solver.set_iparm(i, v)
        self._solver = solver
        try:
            solver.factorize(self._A)
        except pypardiso.pardiso_wrapper.PyPardisoError as exc:
            solver.free_memory(everything=True)
            # -4: zero pivot; for SPD matrices this is how PARDISO reports a
            # singular or indefinite matrix.
            raise SingularFactor(f"PARDISO: {exc}") from exc
        self._check_pivots(solver)

    def _check_pivots(self, solver: Any) -> None:
        # A Cholesky factorisation of a singular matrix need not fail: round-off
        # leaves a tiny positive pivot.  Read the pivots back and judge them as
        # the SuperLU back-end does.
        import ctypes

        n = self._A.shape[0]
        pivots = np.zeros(n)
        diag = np.zeros(n)
        error = ctypes.c_int32(0)
        getdiag = solver.libmkl.pardiso_getdiag
        getdiag.restype = None
        getdiag(
            solver.pt.ctypes.data_as(ctypes.c_void_p),
            pivots.ctypes.data_as(ctypes.c_void_p),
            diag.ctypes.data_as(ctypes.c_void_p),
            ctypes.byref(ctypes.c_int32(1)),
            ctypes.byref(error),
        )
        if error.value != 0:
            return  # pivots unavailable: the caller's residual checks remain
        scale = float(np.abs(diag).max(initial=0.0))
        small = np.flatnonzero(pivots <= PIVOT_TOLERANCE * scale)
        if small.size:
            solver.free_memory(everything=True)
            # Pivots come in PARDISO's fill-reducing order, so their dofs are
            # not known here; the caller names the mechanism from its modes.
            raise SingularFactor(f"PARDISO: {small.size} zero pivots")

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        import pypardiso

        b = np.asfortranarray(np.asarray(rhs, dtype=float))
        try:
            return np.asarray(self._solver.solve(self._A, b))
        except pypardiso.pardiso_wrapper.PyPardisoError as exc:
            raise SolverError(f"PARDISO solve failed: {exc}") from exc

    def __del__(self) -> None:
        try:
            self._solver.free_memory(everything=True)
        except Exception:
            pass


def needs_upper(backend: str) -> bool:
    """True when the back-end wants only the upper triangle."""
    return resolve_backend(backend) == "pardiso"


def factorize(K: sp.spmatrix, backend: str = "auto") -> Factor:
    """Factorise a symmetric positive definite matrix.

    Parameters
    ----------
    K : (m, m) sparse
        Full matrix for "scipy"; full or upper triangle for "pardiso" (the
        upper triangle is taken).
    backend : {"auto", "scipy", "pardiso"}

    Raises
    ------
    SingularFactor
        On zero pivots (a mechanism); ``dofs`` holds positions where known.
    SolverError
        On an unknown or unavailable back-end.
    """
    name = resolve_backend(backend)
    if name == "pardiso":
        return _PardisoFactor(sp.triu(K, format="csr"))
    return _SuperLUFactor(K)
