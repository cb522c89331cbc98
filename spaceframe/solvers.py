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

``factorize_ldlt(K)`` factorises a symmetric matrix that may be indefinite
(a tangent past a limit point, a shifted stiffness) and reports its inertia;
``shift_invert(K, M, sigma)`` is the operator (K - sigma M)^-1 that ARPACK's
shift-invert and buckling modes take as OPinv.

A factor never vouches for its answer: the caller checks residuals.
"""

from __future__ import annotations

import ctypes
import importlib.util
import os
import platform
import sys
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Literal, Protocol

import numpy as np
import scipy.sparse as sp

from spaceframe.errors import SolverError

__all__ = [
    "Factor",
    "Inertia",
    "LDLFactor",
    "PardisoFactor",
    "SingularFactor",
    "available_backends",
    "factorize",
    "factorize_ldlt",
    "resolve_backend",
    "shift_invert",
    "single_blas_thread",
]

Backend = Literal["auto", "scipy", "pardiso"]
#: Fill-reducing orderings SuperLU offers for a symmetric elimination.
Ordering = Literal["MMD_AT_PLUS_A", "COLAMD"]

#: Pivot size, relative to the diagonal entry of the same degree of freedom
#: (the stiffness that direction had before elimination), below which a pivot
#: is taken as zero (a mechanism).  Judging each pivot against its own
#: diagonal, not against the largest one, makes the test independent of the
#: units and of the stiffness scale: a frame with E = 1e-300 or a chord 1e10
#: times stiffer than the diagonals is judged by its geometry.  The pivot of a
#: mechanism is round-off, of order 1e-16 to 1e-14 of its diagonal; a stiffness
#: contrast up to MAX_STIFFNESS_RATIO (1e10, checked before factorising) leaves
#: relative pivots of about 1e-10 or more, and members 1e-5 rad from a line
#: about 1e-10.
PIVOT_TOLERANCE = 1.0e-12


class SingularFactor(SolverError):
    """The factorisation met zero pivots; ``dofs`` are the positions, if known."""

    def __init__(self, message: str, dofs: np.ndarray | None = None) -> None:
        super().__init__(message)
        self.dofs = np.asarray(dofs if dofs is not None else [], dtype=np.int64)


@dataclass(frozen=True)
class Inertia:
    """Counts of negative, zero and positive pivots of an L D L^T factorisation.

    By Sylvester's law of inertia these are the counts of negative, zero and
    positive eigenvalues of the matrix.
    """

    negative: int
    zero: int
    positive: int

    @property
    def positive_definite(self) -> bool:
        """True when every pivot is positive."""
        return self.negative == 0 and self.zero == 0


def pivot_inertia(pivots: np.ndarray, diag: np.ndarray) -> Inertia:
    """Inertia of pivots, each judged zero against its own diagonal entry.

    A pivot is zero when |pivot| <= PIVOT_TOLERANCE * |diagonal entry of its
    degree of freedom| (scale-free, as in factorize).  Non-finite pivots are
    refused.
    """
    d = np.asarray(pivots, dtype=float)
    if not np.all(np.isfinite(d)):
        raise SingularFactor("non-finite pivots")
    zero = np.abs(d) <= PIVOT_TOLERANCE * np.abs(np.asarray(diag, dtype=float))
    neg = int(np.count_nonzero((d < 0) & ~zero))
    nz = int(np.count_nonzero(zero))
    return Inertia(negative=neg, zero=nz, positive=int(d.size) - neg - nz)


class Factor(Protocol):
    """A factorised symmetric matrix."""

    name: str
    inertia: Inertia | None

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

        Kc, self._scale = _scaled(sp.csc_matrix(K))
        diag = Kc.diagonal()
        zero = np.flatnonzero(~(diag > 0))
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
        # U's column j is the original column i with perm_c[i] == j (diagonal
        # pivoting in symmetric mode: perm_r == perm_c).
        inv = np.argsort(self._lu.perm_c)
        udiag = self._lu.U.diagonal()
        small = np.flatnonzero(~(udiag > PIVOT_TOLERANCE * diag[inv]))
        if small.size:
            raise SingularFactor(f"{small.size} zero pivots", inv[small])
        # Every pivot passed the test above: positive definite.
        self.inertia: Inertia | None = Inertia(0, 0, Kc.shape[0])

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        x = np.asarray(self._lu.solve(np.asarray(rhs, dtype=float)))
        with np.errstate(over="ignore"):
            return x / self._scale


class PardisoFactor:
    """PARDISO's Cholesky of a symmetric positive definite matrix (its upper triangle).

    What :func:`factorize` returns for the "pardiso" back-end; :meth:`refactor`
    factorises another matrix of the same pattern reusing the analysis.
    """

    name = "pardiso"

    def __init__(self, K_upper: sp.spmatrix, refine: bool = True) -> None:
        import pypardiso

        self._refine = refine
        self._A, self._scale = _scaled(sp.csr_matrix(K_upper))
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
            # At most two steps of iterative refinement; none for the operator
            # of an iterative eigen solver (each step is another solve, and
            # Cholesky is backward stable; the eigenpairs are checked).
            8: 2 if refine else 0,
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
        self._indices()
        try:
            solver.factorize(self._A)
        except pypardiso.pardiso_wrapper.PyPardisoError as exc:
            solver.free_memory(everything=True)
            # -4: zero pivot; for SPD matrices this is how PARDISO reports a
            # singular or indefinite matrix.
            raise SingularFactor(f"PARDISO: {exc}") from exc
        self._check_pivots(solver)
        # Matrix type 2 refuses non-positive pivots: positive definite.
        self.inertia: Inertia | None = Inertia(0, 0, self._A.shape[0])

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
        # Both arrays come in PARDISO's own (permuted) order, so each pivot is
        # judged against the diagonal of its own degree of freedom.
        small = np.flatnonzero(~(pivots > PIVOT_TOLERANCE * diag))
        if small.size:
            solver.free_memory(everything=True)
            # Pivots come in PARDISO's fill-reducing order, so their dofs are
            # not known here; the caller names the mechanism from its modes.
            raise SingularFactor(f"PARDISO: {small.size} zero pivots")

    def refactor(self, K_upper: sp.spmatrix) -> None:
        """Factorise a matrix of the first one's pattern: the numerical phase only.

        The ordering and symbolic factorisation are reused (a load path
        factorises tangents of one pattern many times).  Raises SingularFactor
        as the first factorisation does (the handle is then freed).
        """
        import pypardiso

        A, scale = _scaled(sp.csr_matrix(K_upper))
        A.sort_indices()
        solver = self._solver
        if not hasattr(solver, "_call_pardiso"):  # another pypardiso: analyse afresh
            solver.free_memory(everything=True)
            self.__init__(K_upper, self._refine)  # type: ignore[misc]
            return
        solver.set_phase(22)
        try:
            solver._call_pardiso(A, np.zeros((A.shape[0], 1)))
        except pypardiso.pardiso_wrapper.PyPardisoError as exc:
            solver.free_memory(everything=True)
            raise SingularFactor(f"PARDISO: {exc}") from exc
        # What pypardiso's own factorize records, so that its solve uses this factor.
        solver.factorized_A = A.copy()
        self._A, self._scale = A, scale
        self._indices()
        self._check_pivots(solver)

    def _indices(self) -> None:
        # PARDISO's one-based int32 indices of the matrix, made once (pypardiso
        # converts them on every call: 2 x nnz of int64 work per solve).
        self._ia = self._A.indptr.astype(np.int32) + 1
        self._ja = self._A.indices.astype(np.int32) + 1

    def solve_into(self, rhs: np.ndarray, out: np.ndarray) -> np.ndarray:
        """K⁻¹ rhs written into ``out``, both (m, k) float64 stored column by column.

        One call of PARDISO's solve phase on arrays the caller owns (and can
        use again for the next block): pypardiso's own call makes a zeroed
        array for the solution and then a row-major copy of it, that is two
        new arrays the size of the block per call (1000 right-hand sides of a
        100k-member model: 1.2 GB paged in and copied, 2-3 s of a 4-5 s
        solve).  ``out`` must not share memory with ``rhs``.
        """
        s = self._solver
        m = self._A.shape[0]
        for name, x in (("rhs", rhs), ("out", out)):
            if not (x.ndim == 2 and x.shape[0] == m and x.dtype == np.float64
                    and x.flags.f_contiguous):
                raise SolverError(f"PARDISO solve: {name} must be ({m}, k) float64 "
                                  f"column by column, not {x.shape} {x.dtype}")
        if rhs.shape != out.shape or np.shares_memory(rhs, out):
            raise SolverError("PARDISO solve: out must match rhs and not overlap it")
        direct = all(hasattr(s, a) for a in ("_mkl_pardiso", "pt", "_pt_type", "perm",
                                              "iparm", "mtype", "msglvl"))
        if not direct or s.iparm[5] != 0:  # another pypardiso: its own call
            out[...] = self.solve(rhs)
            return out
        if rhs.shape[1]:
            i32, f64 = ctypes.POINTER(ctypes.c_int32), ctypes.POINTER(ctypes.c_double)

            def ref(v: int) -> Any:
                return ctypes.byref(ctypes.c_int32(v))

            err = ctypes.c_int32(0)
            # The argument list of MKL's pardiso(), as pypardiso passes it,
            # with phase 33 (solve) on the stored factor.
            s._mkl_pardiso(s.pt.ctypes.data_as(ctypes.POINTER(s._pt_type[0])), ref(1), ref(1),
                           ref(s.mtype), ref(33), ref(m), self._A.data.ctypes.data_as(f64),
                           self._ia.ctypes.data_as(i32), self._ja.ctypes.data_as(i32),
                           s.perm.ctypes.data_as(i32), ref(rhs.shape[1]),
                           s.iparm.ctypes.data_as(i32), ref(s.msglvl),
                           rhs.ctypes.data_as(f64), out.ctypes.data_as(f64),
                           ctypes.byref(err))
            if err.value != 0:
                raise SolverError(f"PARDISO solve failed: error {err.value}")
        with np.errstate(over="ignore"):
            out /= self._scale
        return out

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """K⁻¹ rhs for one column or several."""
        import pypardiso

        b = np.asfortranarray(np.asarray(rhs, dtype=float))
        if b.shape[0] != self._A.shape[0]:
            raise SolverError(f"PARDISO solve: {b.shape[0]} rows for a matrix of "
                              f"{self._A.shape[0]}")
        try:
            # Phase 33 (solve) on the stored factor.  pypardiso's own solve
            # first compares the matrix entry by entry with the factorised one
            # (a quarter of a solve at 100k members); this factor's matrix is
            # private and never changes.
            self._solver.set_phase(33)
            x = np.asarray(self._solver._call_pardiso(self._A, b))
            with np.errstate(over="ignore"):
                if x is not b and x.flags.writeable and x.dtype == np.float64:
                    x /= self._scale  # PARDISO's own new array: no second copy
                    return x
                return x / self._scale
        except pypardiso.pardiso_wrapper.PyPardisoError as exc:
            raise SolverError(f"PARDISO solve failed: {exc}") from exc

    def __del__(self) -> None:
        try:
            self._solver.free_memory(everything=True)
        except Exception:
            pass


def solve_into(factor: Factor, rhs: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``out[:] = factor.solve(rhs)``, in place where the back-end can (PARDISO)."""
    into = getattr(factor, "solve_into", None)
    if into is not None:
        return into(rhs, out)
    out[...] = factor.solve(rhs).reshape(out.shape)
    return out


def _scaled(K: sp.spmatrix) -> tuple[sp.spmatrix, float]:
    """K divided by its largest diagonal entry, and that entry.

    Factorising a matrix of order one keeps every product inside the range of
    float64 whatever the units or the size of E (a modulus of 1e300 or 1e-300
    would otherwise overflow or underflow in the elimination).
    """
    diag = np.abs(K.diagonal())
    scale = float(diag.max(initial=0.0))
    if not (np.isfinite(scale) and scale > 0):
        if not np.isfinite(scale):
            raise SolverError("the stiffness matrix holds non-finite entries")
        return K.copy(), 1.0
    out = K.copy()
    out.data = out.data / scale
    if not np.all(np.isfinite(out.data)):
        raise SolverError("the stiffness matrix holds non-finite entries")
    return out, scale


def needs_upper(backend: str) -> bool:
    """True when the back-end wants only the upper triangle."""
    return resolve_backend(backend) == "pardiso"


def factorize(K: sp.spmatrix, backend: str = "auto", *, refine: bool = True) -> Factor:
    """Factorise a symmetric positive definite matrix.

    Parameters
    ----------
    K : (m, m) sparse
        Full matrix for "scipy"; full or upper triangle for "pardiso" (the
        upper triangle is taken).
    backend : {"auto", "scipy", "pardiso"}
    refine : bool
        Let PARDISO refine each solve iteratively (up to two steps, each one
        more solve).  Off for the operators of iterative eigen solvers, whose
        pairs are checked by their residuals.  SuperLU does not refine.

    Raises
    ------
    SingularFactor
        On zero pivots (a mechanism); ``dofs`` holds positions where known.
    SolverError
        On an unknown or unavailable back-end.
    """
    name = resolve_backend(backend)
    if name == "pardiso":
        return PardisoFactor(K if _is_upper_csr(K) else sp.triu(K, format="csr"), refine)
    return _SuperLUFactor(K)


def _is_upper_csr(K: sp.spmatrix) -> bool:
    """True when K is CSR with sorted indices and nothing below the diagonal.

    What the assembly gives PARDISO already; then ``sp.triu`` (a copy, about
    10 ms at 100k members) is skipped.
    """
    if not (sp.isspmatrix_csr(K) or isinstance(K, sp.csr_array)) or not K.has_sorted_indices:
        return False
    rows = np.flatnonzero(np.diff(K.indptr))
    return bool(np.all(K.indices[K.indptr[rows]] >= rows))


class LDLFactor:
    """A symmetric, possibly indefinite matrix factorised as L D L^T, with its inertia.

    scipy has no sparse L D L^T; SuperLU in symmetric mode with diagonal
    pivots and one ordering for rows and columns is one (U = D L^T), so the
    signs of U's diagonal are those of D (Golub and Van Loan, "Matrix
    Computations", 4th ed., section 4.1 and Sylvester's law of inertia,
    section 8.1.5).  Where that elimination meets an exactly zero pivot, or
    SuperLU departs from the symmetric ordering, partial pivoting gives a
    sound solve and ``inertia`` is None (unknown).  ``inertia`` is also None
    when a pivot is non-finite.  ``pivots`` holds D (in elimination order)
    where the symmetric elimination went through, else None.  ``ordering``
    is SuperLU's column ordering (applied to rows too).
    """

    name = "scipy-ldlt"

    def __init__(self, K: sp.spmatrix, ordering: Ordering = "MMD_AT_PLUS_A") -> None:
        import scipy.sparse.linalg as spla

        Kc = sp.csc_matrix(K)
        self.inertia: Inertia | None = None
        self.pivots: np.ndarray | None = None
        try:
            lu = spla.splu(
                Kc,
                permc_spec=ordering,
                diag_pivot_thresh=0.0,
                options={"SymmetricMode": True},
            )
        except RuntimeError:
            lu = None
        if lu is not None and np.array_equal(lu.perm_r, lu.perm_c):
            inv = np.argsort(lu.perm_c)
            self.pivots = lu.U.diagonal()
            try:
                self.inertia = pivot_inertia(self.pivots, Kc.diagonal()[inv])
            except SingularFactor:
                self.inertia = None
        if lu is None:
            try:
                lu = spla.splu(Kc)
            except RuntimeError as exc:  # "Factor is exactly singular"
                raise SingularFactor(f"SuperLU: {exc}") from exc
        self._lu = lu

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """Solve K x = rhs for a (m,) or (m, k) right-hand side."""
        return np.asarray(self._lu.solve(np.asarray(rhs, dtype=float)))


def factorize_ldlt(K: sp.spmatrix, ordering: Ordering = "MMD_AT_PLUS_A") -> LDLFactor:
    """Factorise a symmetric (possibly indefinite) matrix and count its inertia.

    ``ordering``: minimum degree on A^T + A (the default), or COLAMD, which
    fills less on matrices that are not pre-ordered and have many nodes
    sharing few directions (the Gram matrices of determinacy).

    Raises
    ------
    SingularFactor
        When even partial pivoting finds the matrix exactly singular.
    """
    return LDLFactor(K, ordering)


def _shifted(K: sp.spmatrix, M: sp.spmatrix, sigma: float) -> sp.spmatrix:
    """K - sigma M, entry by entry when both are CSR on one pattern (as assembled)."""
    same = (sp.isspmatrix_csr(K) and sp.isspmatrix_csr(M) and K.shape == M.shape
            and K.nnz == M.nnz and np.array_equal(K.indptr, M.indptr)
            and np.array_equal(K.indices, M.indices))
    if not same:
        return K - sigma * M
    out = K.copy()
    out.data = K.data - sigma * M.data
    return out


def shift_invert(
    K: sp.spmatrix, M: sp.spmatrix, sigma: float, backend: str = "auto"
) -> Any:
    """(K - sigma M)^-1 as a scipy LinearOperator, for eigsh's ``OPinv``.

    K - sigma M must be positive definite (the shift lies below the lowest
    eigenvalue); it is factorised by :func:`factorize`.

    Raises
    ------
    SingularFactor
        When K - sigma M is singular or not positive definite.
    """
    from scipy.sparse.linalg import LinearOperator

    factor = factorize(_shifted(K, M, sigma), backend, refine=False)
    if factor.inertia is not None and not factor.inertia.positive_definite:
        raise SingularFactor(f"K - {sigma:g} M is not positive definite")
    m = K.shape[0]
    return LinearOperator((m, m), matvec=factor.solve, dtype=float)


def _openblas_libraries() -> list[Any]:
    """The OpenBLAS libraries loaded in this process (numpy's and scipy's), by ctypes."""
    if not sys.platform.startswith("linux"):
        return []
    try:
        with open("/proc/self/maps") as fh:
            paths = sorted({line.split()[-1] for line in fh if "openblas" in line.lower()})
    except OSError:
        return []
    libs = []
    for path in paths:
        try:
            lib = ctypes.CDLL(path)
            fn = lib.openblas_set_num_threads_local
        except (OSError, AttributeError):
            continue
        fn.restype = ctypes.c_int
        fn.argtypes = [ctypes.c_int]
        libs.append(fn)
    return libs


@contextmanager
def single_blas_thread() -> Iterator[None]:
    """Run OpenBLAS on one thread in this block (MKL's own threads are left alone).

    ARPACK's Lanczos steps call BLAS on a few long vectors between solves
    with a factor whose threads (MKL's, for PARDISO) are still spinning;
    OpenBLAS's threads then fight them for the cores.  On 2 cores this made
    a shift-invert eigsh run 13 times slower (13 s against 1 s, 100k-member
    grid, 60 solves).  The work is memory-bound, so one thread loses nothing.
    OpenBLAS's thread-local setting (``openblas_set_num_threads_local``,
    OpenBLAS 0.3.27 and later) is used, so other threads are not affected;
    where it is missing, nothing changes.
    """
    setters = _openblas_libraries()
    old = [fn(1) for fn in setters]
    try:
        yield
    finally:
        for fn, n in zip(setters, old, strict=True):
            fn(max(int(n), 1))
