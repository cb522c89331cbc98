"""The eigenvalue core shared by linear buckling and natural frequencies.

Both analyses reduce to B φ = μ K φ with K, the stiffness of the free
degrees of freedom (springs included), symmetric positive definite and B
symmetric: B = K_G for buckling (μ = -1/λ) and B = M for vibration
(μ = 1/ω²).  The wanted eigenvalues (the lowest load factors, the lowest
frequencies) are the extreme μ, so Lanczos on the operator K⁻¹B, which is
self-adjoint in the K inner product, finds them fast: this is shift-invert
about zero, with one factorisation of K by the project's own back-ends
(spaceframe.solvers) and one solve per Lanczos step.  scipy's ``eigsh``
(ARPACK) runs the iteration in its generalised mode with M = K and
Minv = that factorisation; a well-kept library is preferred to a
hand-written Lanczos.  For buckling on large systems the shift is moved
from zero to below the lowest factor (see :func:`lowest_positive_factors`).
Every Lanczos run keeps OpenBLAS on one thread
(:func:`spaceframe.solvers.single_blas_thread`), and its factors do not
refine their solves (``factorize(..., refine=False)``): both cost several
times the solves themselves on a shared 2-core machine.  Small systems use
LAPACK's dense generalised solver instead (robust for any number of modes,
and no slower there).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, Literal

import numpy as np
import scipy.linalg as sla
import scipy.sparse as sp
from scipy.sparse.linalg import ArpackError, ArpackNoConvergence, LinearOperator, eigsh

from spaceframe.analysis.stability import mechanism_error
from spaceframe.errors import ModelError, SolverError
from spaceframe.solvers import (
    Factor,
    SingularFactor,
    factorize,
    shift_invert,
    single_blas_thread,
)
from spaceframe.tolerances import (
    BUCKLING_SHIFT_FRACTION,
    BUCKLING_SHIFT_TRIES,
    DENSE_EIGEN_LIMIT,
    EIGEN_ESTIMATE_TOLERANCE,
    EIGEN_RESIDUAL,
    SHIFTED_LANCZOS_TOLERANCE,
    ZERO_EIGENVALUE,
)

__all__ = [
    "DENSE_EIGEN_LIMIT",
    "extreme_pairs",
    "factor_or_mechanism",
    "factor_upper_bound",
    "full_modes",
    "lowest_positive_factors",
    "mode_count",
    "positive_definite",
]

def factor_or_mechanism(K: sp.spmatrix, free: np.ndarray, backend: str, what: str) -> Factor:
    """Factorise K, or raise MechanismError naming the nodes of its zero-energy modes."""
    try:
        return factorize(K, backend, refine=False)
    except SingularFactor as exc:
        raise mechanism_error(K, free, exc, what, detail=False) from exc


def spectral_scale(K: sp.spmatrix, B: sp.spmatrix) -> float:
    """max_i |B_ii| / K_ii: a Rayleigh quotient, so a lower bound on max |μ|."""
    kd = K.diagonal()
    bd = np.abs(B.diagonal())
    with np.errstate(divide="ignore", invalid="ignore"):
        r = np.where(kd > 0, bd / kd, 0.0)
    return float(r.max(initial=0.0))


def _check_pairs(K: sp.spmatrix, B: sp.spmatrix, w: np.ndarray, V: np.ndarray, what: str) -> None:
    """Fail closed on non-finite values or a pair that does not satisfy B φ = μ K φ."""
    if not (np.all(np.isfinite(w)) and np.all(np.isfinite(V))):
        raise SolverError(f"{what}: the eigen solver returned non-finite values")
    if w.size == 0:
        return
    KV = K @ V
    res = np.linalg.norm(B @ V - KV * w, axis=0)
    ref = np.abs(w).max() * np.linalg.norm(KV, axis=0)
    bad = np.flatnonzero(~(res <= EIGEN_RESIDUAL * ref))
    if bad.size:
        j = int(bad[0])
        raise SolverError(
            f"{what}: eigenpair {j + 1} does not check out (relative residual "
            f"{float(res[j] / ref[j]):.2e} exceeds {EIGEN_RESIDUAL:.0e})"
        )


def _start_vector(m: int) -> np.ndarray:
    # A fixed start vector makes results reproducible run to run.
    return np.random.default_rng(12).standard_normal(m)


def _arpack(what: str, k: int, call: Callable[[], tuple[np.ndarray, np.ndarray]]
            ) -> tuple[np.ndarray, np.ndarray]:
    try:
        with single_blas_thread():
            return call()
    except ArpackNoConvergence as exc:
        raise SolverError(
            f"{what}: the Lanczos iteration did not converge for {k} modes "
            f"({len(exc.eigenvalues)} converged)"
        ) from exc
    except ArpackError as exc:
        raise SolverError(f"{what}: the Lanczos iteration failed ({exc})") from exc


def extreme_pairs(
    K: sp.spmatrix,
    factor: Factor,
    B: sp.spmatrix,
    k: int,
    which: Literal["LA", "SA"],
    what: str,
    tol: float = 0.0,
    check: bool = True,
) -> tuple[np.ndarray, np.ndarray]:
    """The k largest ("LA") or smallest ("SA") μ of B φ = μ K φ that are not zero.

    Parameters
    ----------
    K : (m, m) sparse
        Full symmetric positive definite matrix (its factor is ``factor``).
    B : (m, m) sparse
        Full symmetric matrix.
    k : int
        Number of pairs wanted; fewer come back when fewer non-zero μ of that
        sign exist.
    what : str
        Names the analysis in error messages.
    tol : float
        Relative accuracy asked of the iteration (0: machine precision).
    check : bool
        Check each pair's residual (off only for a loose estimate).

    Returns
    -------
    mu : (j,) float
        Eigenvalues, j <= k, largest magnitude first, all of the sign asked.
    V : (m, j) float
        Eigenvectors (columns).

    Raises
    ------
    SolverError
        If the iteration fails or a pair does not satisfy the equation.
    """
    m = K.shape[0]
    sign = 1.0 if which == "LA" else -1.0
    if m <= DENSE_EIGEN_LIMIT or k >= m - 1:
        try:
            w, V = sla.eigh(B.toarray(), K.toarray())
        except (np.linalg.LinAlgError, ValueError) as exc:
            raise SolverError(f"{what}: dense eigen solver failed ({exc})") from exc
    else:
        op = LinearOperator((m, m), matvec=factor.solve, dtype=float)
        w, V = _arpack(what, k, lambda: eigsh(B, k=k, M=K, Minv=op, which=which,
                                              v0=_start_vector(m), tol=tol,
                                              ncv=min(m, max(2 * k + 1, 20))))
    order = np.argsort(-sign * w)[:k]
    w, V = w[order], V[:, order]
    if not np.all(np.isfinite(w)):
        raise SolverError(f"{what}: the eigen solver returned non-finite values")
    scale = max(spectral_scale(K, B), float(np.abs(w).max(initial=0.0)))
    keep = sign * w > ZERO_EIGENVALUE * scale
    w, V = w[keep], V[:, keep]
    if check:
        _check_pairs(K, B, w, V, what)
    return w, V


def positive_definite(factor: Factor) -> bool:
    """Whether a factorised symmetric matrix is positive definite (its inertia)."""
    inertia = getattr(factor, "inertia", None)
    return bool(inertia is not None and inertia.positive_definite)


#: Single directions (the lowest single-direction bounds) that start the
#: Rayleigh-Ritz bound of :func:`factor_upper_bound`.
_BOUND_DIRECTIONS = 16


def factor_upper_bound(K: sp.spmatrix, G: sp.spmatrix, factor: Factor | None = None
                       ) -> float | None:
    """An upper bound on the lowest λ > 0 of (K + λ G) φ = 0, or None if none is found.

    For K positive definite the lowest positive λ is the least Rayleigh
    quotient φᵀKφ / (-φᵀGφ) over the φ with -φᵀGφ > 0 (Courant-Fischer), so
    the least Ritz value of any subspace bounds it from above.  The
    subspace: the unit vectors of the _BOUND_DIRECTIONS directions i of
    least K_ii / -G_ii (each alone a bound), and, given K's ``factor``, one
    step of inverse iteration K⁻¹(-G) from them (a 100k-member grid: 18.6
    from single directions, 10.0 with the step, lowest factor 9.44).
    """
    kd = K.diagonal()
    gd = G.diagonal()
    soft = np.flatnonzero(gd < 0)
    if soft.size == 0:
        return None
    q = kd[soft] / -gd[soft]
    pick = soft[np.argsort(q)[:_BOUND_DIRECTIONS]]
    bound = float(np.min(q))
    if factor is not None:
        X = np.zeros((K.shape[0], pick.size))
        X[pick, np.arange(pick.size)] = 1.0
        Y = np.asarray(factor.solve(-(G @ X)))
        # The Ritz values of a subspace do not depend on its basis: no QR.
        Z = np.hstack([X, Y / np.linalg.norm(Y, axis=0)])
        try:
            mu = sla.eigh(-(Z.T @ (G @ Z)), Z.T @ (K @ Z), eigvals_only=True)
        except (np.linalg.LinAlgError, ValueError):  # a basis too near dependence
            mu = np.zeros(0)
        if mu.size and mu[-1] > 0 and np.isfinite(mu[-1]):
            bound = min(bound, float(1.0 / mu[-1]))
    return bound if np.isfinite(bound) and bound > 0 else None


def _safe_shift(K: sp.spmatrix, G: sp.spmatrix, sigma: float, backend: str
                ) -> tuple[float, LinearOperator] | None:
    """(σ, (K + σG)⁻¹) for the first σ of sigma, sigma/2, ... with K + σG positive definite."""
    for _ in range(BUCKLING_SHIFT_TRIES + 1):
        try:
            return sigma, shift_invert(K, -G, sigma, backend)
        except SingularFactor:
            sigma *= 0.5
    return None


def lowest_positive_factors(
    K: sp.spmatrix,
    factor: Factor,
    G: sp.spmatrix,
    k: int,
    backend: str,
    what: str,
) -> tuple[np.ndarray, np.ndarray]:
    """The k smallest λ > 0 of (K + λ G) φ = 0, ascending, and their vectors.

    Large systems: Lanczos runs in ARPACK's buckling mode, ν = λ / (λ - σ),
    about a shift σ below the lowest factor, with K + σ G factorised and
    checked positive definite (which proves σ below it).  Factors of the
    reversed loads then fall in (0, 1) and no longer crowd the wanted end of
    the spectrum: about zero they are the largest |μ| = 1/|λ| on a grid
    whose tension chords are stiffened, and cost thousands of iterations
    (measured: 1300 solves against 50 on a 20k-member grid).  The first σ is
    0.9 of the upper bound of :func:`factor_upper_bound`, halved until
    K + σ G is positive definite: σ then lies between half the lowest
    factor and the lowest factor (a 100k-member grid: one factorisation,
    σ = 0.95 of the lowest factor, about 60 solves).
    Only when that fails (a lowest factor far below every single-direction
    bound) does a short, loose Lanczos run about zero estimate the lowest
    factor (a Ritz value, from above) for the shift, and if even that shift
    fails, Lanczos runs about zero (slower, same answer).
    """
    m = K.shape[0]
    if m <= DENSE_EIGEN_LIMIT or k >= m - 1:
        mu, V = extreme_pairs(K, factor, G, k, "SA", what)
        return -1.0 / mu, V
    bound = factor_upper_bound(K, G, factor)
    shifted = None if bound is None else _safe_shift(
        K, G, BUCKLING_SHIFT_FRACTION * bound, backend)
    if shifted is None:
        mu1, _ = extreme_pairs(K, factor, G, 1, "SA", what, tol=EIGEN_ESTIMATE_TOLERANCE,
                                check=False)
        if mu1.size == 0:
            return np.zeros(0), np.zeros((m, 0))
        shifted = _safe_shift(K, G, BUCKLING_SHIFT_FRACTION * (-1.0 / float(mu1[0])), backend)
    if shifted is None:
        # No safe shift found: Lanczos about zero (slower, same answer).
        mu, V = extreme_pairs(K, factor, G, k, "SA", what)
        return -1.0 / mu, V
    sigma, op = shifted
    lam, V = _arpack(what, k, lambda: eigsh(K, k=k, M=-G, sigma=sigma, mode="buckling",
                                            OPinv=op, which="LM",
                                            v0=_start_vector(m), tol=SHIFTED_LANCZOS_TOLERANCE,
                                            ncv=min(m, max(2 * k + 1, 20))))
    if not np.all(np.isfinite(lam)):
        raise SolverError(f"{what}: the eigen solver returned non-finite values")
    # Back to μ = -1/λ, so that "infinite" factors (G φ = 0) are judged as
    # zero eigenvalues exactly as in extreme_pairs.
    with np.errstate(divide="ignore"):
        mu = np.where(lam != 0, -1.0 / lam, np.inf)
    scale = max(spectral_scale(K, G), float(np.abs(mu[np.isfinite(mu)]).max(initial=0.0)))
    keep = np.isfinite(mu) & (-mu > ZERO_EIGENVALUE * scale)
    mu, V = mu[keep], V[:, keep]
    order = np.argsort(mu)
    mu, V = mu[order], V[:, order]
    _check_pairs(K, G, mu, V, what)
    return -1.0 / mu, V


def mode_count(n_modes: Any, free: int) -> int:
    """Check a requested number of modes against the free degrees of freedom."""
    try:
        k = int(n_modes)
    except (TypeError, ValueError):
        raise ModelError(f"n_modes = {n_modes!r}: must be a whole number") from None
    if k != n_modes or k < 1:
        raise ModelError(f"n_modes = {n_modes!r}: must be a whole number of at least 1")
    if k > free:
        raise ModelError(
            f"n_modes = {k} asks for more modes than the {free} free degrees of freedom"
        )
    return k


def full_modes(V: np.ndarray, free: np.ndarray, n_nodes: int) -> np.ndarray:
    """(k, n, 3) modes from free-dof columns, each scaled to a largest nodal movement of 1.

    The sign is fixed so that the largest component of each mode is positive.
    """
    k = V.shape[1]
    flat0 = np.zeros((k, 3 * n_nodes))
    flat0[:, free] = V.T
    U: np.ndarray = flat0.reshape(k, n_nodes, 3)
    if k == 0:
        return U
    peak = np.linalg.norm(U, axis=2).max(axis=1)
    flat = U.reshape(k, -1)
    big = flat[np.arange(k), np.argmax(np.abs(flat), axis=1)]
    return U * (np.sign(big) / peak)[:, None, None]
