"""Linear buckling: load factors at which a static result's forces make the frame unstable.

Solved: (K_E + λ K_G(N)) φ = 0, with K_E the elastic stiffness of the free
degrees of freedom (restrained directions eliminated, springs on the
diagonal, exactly as the static solve builds it), K_G(N) the geometric
stiffness of the result's member axial forces N on the undeformed geometry,
and λ the factor on the whole load of that result.  It is the linearised
(first-order) stability limit: it ignores the change of geometry and of
forces before buckling, so it can overestimate the strength of shallow,
imperfection-sensitive frames (domes, shallow trusses) — a second-order
analysis is the check there.  Results must be checked by a qualified engineer.

:func:`linear_buckling_many` does several results of one model with one
factorisation of K_E.

Decision for a result without compression: tension only stiffens a frame,
so there is no positive factor; :func:`linear_buckling` raises ModelError
with one line saying so (or, with ``negative=True``, returns no positive
factors and the negative ones).  The same error comes when members are in
compression but none of them can move sideways (e.g. a member between two
supports).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import TYPE_CHECKING, Any, Literal, TypeVar, overload

import numpy as np

from spaceframe.analysis.eigen import (
    factor_or_mechanism,
    full_modes,
    lowest_positive_factors,
    mode_count,
)
from spaceframe.analysis.matrices import elastic_stiffness, free_dof_map, geometric_stiffness
from spaceframe.analysis.stability import check_stability
from spaceframe.errors import ModelError, SpaceframeError
from spaceframe.results.modes import BucklingResult
from spaceframe.solvers import Factor, resolve_backend

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["BucklingResult", "linear_buckling", "linear_buckling_many"]

_T = TypeVar("_T")


def axial_forces_of(
    model: Model, result: Any, what: str = "linear_buckling"
) -> tuple[str, np.ndarray]:
    """Name and (b,) axial forces of a static result (or of given forces), checked."""
    name = str(getattr(result, "name", "given forces"))
    forces = getattr(result, "axial_forces", result)
    try:
        N = np.asarray(forces, dtype=float)
    except (TypeError, ValueError):
        raise ModelError(
            f"{what}: result must be a case or combination result (or (b,) axial "
            f"forces), got {type(result).__name__}"
        ) from None
    if N.shape != (model.n_members,):
        raise ModelError(
            f"{what}: result {name!r} has {N.size} axial forces but the model has "
            f"{model.n_members} members (is it a result of this model?)"
        )
    disp = getattr(result, "displacements", None)
    if disp is not None and np.shape(disp) != (model.n_nodes, 3):
        raise ModelError(
            f"{what}: result {name!r} has displacements for {np.shape(disp)[0]} nodes "
            f"but the model has {model.n_nodes} (is it a result of this model?)"
        )
    bad = np.flatnonzero(~np.isfinite(N))
    if bad.size:
        raise ModelError(
            f"{what}: result {name!r}: axial force of member {int(bad[0])} is "
            f"{float(N[bad[0]])}"
        )
    return name, N


def linear_buckling(
    model: Model,
    result: Any,
    n_modes: int = 6,
    *,
    negative: bool = False,
    solver: str = "auto",
) -> BucklingResult:
    """Lowest linear buckling factors of a static result.

    Parameters
    ----------
    model : Model
        The analysed model (unchanged since ``result`` was computed).
    result : CaseResult or (b,) float
        A load case or combination result of ``model`` (its ``axial_forces``
        are used), or member axial forces in N, tension positive.
    n_modes : int
        Number of factors wanted (at most the number of free directions).
    negative : bool
        Also find the factors of the reversed loads (λ < 0).
    solver : {"auto", "scipy", "pardiso"}
        Back-end that factorises K_E.

    Returns
    -------
    BucklingResult

    Raises
    ------
    ModelError
        On a result that does not fit the model, more modes than free
        directions, or no compression (so no buckling factor).
    MechanismError
        If the frame is a mechanism (its elastic stiffness is singular).
    """
    return linear_buckling_many(model, [result], n_modes, negative=negative, solver=solver)[0]


@overload
def linear_buckling_many(
    model: Model, results: Iterable[Any], n_modes: int = 6, *, negative: bool = False,
    solver: str = "auto", errors: Literal["raise"] = "raise",
) -> list[BucklingResult]: ...


@overload
def linear_buckling_many(
    model: Model, results: Iterable[Any], n_modes: int = 6, *, negative: bool = False,
    solver: str = "auto", errors: Literal["keep"],
) -> list[BucklingResult | SpaceframeError]: ...


def linear_buckling_many(
    model: Model,
    results: Iterable[Any],
    n_modes: int = 6,
    *,
    negative: bool = False,
    solver: str = "auto",
    errors: Literal["raise", "keep"] = "raise",
) -> list[BucklingResult] | list[BucklingResult | SpaceframeError]:
    """Linear buckling of several static results of one model, K_E factorised once.

    Each result's factors and modes are those :func:`linear_buckling` gives
    it; the elastic stiffness is assembled and factorised once for all of
    them (only each result's geometric stiffness and shifted factorisation
    are its own).  Every result is checked before anything is factorised.

    Parameters
    ----------
    model : Model
    results : iterable of CaseResult or (b,) float
        Results of ``model`` (cases, combinations) or member axial forces.
    n_modes, negative, solver
        As for :func:`linear_buckling`.
    errors : {"raise", "keep"}
        "raise": the first result that fails raises its error (that of
        :func:`linear_buckling`).  "keep": a result that fails gets its
        error (a SpaceframeError) in its place in the list and the others
        go on; an error of the model itself (a mechanism) is then every
        result's.

    Returns
    -------
    list of BucklingResult (or SpaceframeError with ``errors="keep"``)
        One per result, in the order given.
    """
    model.validate()
    backend = resolve_backend(solver)
    if errors not in ("raise", "keep"):
        raise ModelError(f"linear_buckling_many: errors = {errors!r}: choose 'raise' or 'keep'")
    keep = errors == "keep"
    checked = [_kept(keep, _compression, model, r, negative) for r in results]
    named = [c for c in checked if not isinstance(c, SpaceframeError)]
    if not named:  # every result failed its own check (kept), or there are none
        only: list[BucklingResult | SpaceframeError] = [
            c for c in checked if isinstance(c, SpaceframeError)]
        return only
    try:
        shared = _shared_system(model, [name for name, _ in named], n_modes, backend)
    except SpaceframeError as exc:
        if not keep:
            raise
        failed: list[BucklingResult | SpaceframeError] = [
            c if isinstance(c, SpaceframeError) else exc for c in checked]
        return failed
    return [c if isinstance(c, SpaceframeError)
            else _kept(keep, _buckling, model, shared, *c, negative, backend) for c in checked]


def _kept(keep: bool, fn: Callable[..., _T], *args: Any) -> _T | SpaceframeError:
    """fn(*args), or with ``keep`` the SpaceframeError it raised."""
    try:
        return fn(*args)
    except SpaceframeError as exc:
        if not keep:
            raise
        return exc


def _shared_system(model: Model, names: list[str], n_modes: int, backend: str
                   ) -> tuple[Any, Factor, np.ndarray, np.ndarray, int]:
    """K_E of the free directions, its factor, the dof map, those directions, modes wanted."""
    check_stability(model)
    dof_map, free = free_dof_map(model.restraint)
    k = mode_count(n_modes, free.size)
    K = elastic_stiffness(model.members, model.n_nodes, model.directions,
                          model.axial_stiffness, springs=model.springs,
                          dof_map=dof_map, n_dof=free.size)
    what = "linear buckling of " + ", ".join(repr(name) for name in names)
    return K, factor_or_mechanism(K, free, backend, what), dof_map, free, k


def _compression(model: Model, result: Any, negative: bool) -> tuple[str, np.ndarray]:
    """A result's name and forces, refused when it has nothing that can buckle."""
    name, N = axial_forces_of(model, result)
    if not np.any(N < 0) and not (negative and np.any(N > 0)):
        raise ModelError(
            f"linear_buckling: result {name!r} has no member in compression, so it has no "
            "buckling factor (tension only stiffens the frame)"
        )
    return name, N


def _buckling(
    model: Model,
    shared: tuple[Any, Factor, np.ndarray, np.ndarray, int],
    name: str,
    N: np.ndarray,
    negative: bool,
    backend: str,
) -> BucklingResult:
    """One result's factors from the shared K, its factor and the result's own K_G."""
    K, factor, dof_map, free, k = shared
    G = geometric_stiffness(model.members, model.n_nodes, model.directions, model.lengths, N,
                            dof_map=dof_map, n_dof=free.size)
    n_comp = int(np.count_nonzero(N < 0))
    n_tens = int(np.count_nonzero(N > 0))
    what = f"linear buckling of {name!r}"
    notes: list[str] = []

    def side(sign: float, count: int) -> tuple[np.ndarray, np.ndarray]:
        # Each member's geometric block has rank 2, so the members of one sign
        # give at most 2 * count non-zero eigenvalues of that sign.
        want = min(k, 2 * count)
        if want == 0:
            return np.zeros(0), np.zeros((0, model.n_nodes, 3))
        # Factors of the reversed loads are those of -G: sign = -1.
        lam, V = lowest_positive_factors(K, factor, sign * G, want, backend, what)
        return sign * lam, full_modes(V, free, model.n_nodes)

    factors, modes = side(1.0, n_comp)
    if n_comp and factors.size == 0 and not negative:
        first = int(np.flatnonzero(N < 0)[0])
        raise ModelError(
            f"linear_buckling: result {name!r} has no buckling factor: none of its {n_comp} "
            f"members in compression (e.g. member {first}) can move sideways"
        )
    if factors.size < k:
        notes.append(
            f"only {factors.size} positive factor(s) exist, fewer than the {k} asked "
            f"({n_comp} member(s) in compression)"
        )
    neg_f, neg_m = side(-1.0, n_tens) if negative else (np.zeros(0), modes[:0])
    return BucklingResult(name, factors, modes, neg_f, neg_m, notes)
