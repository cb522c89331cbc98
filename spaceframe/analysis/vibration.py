"""Natural frequencies and mode shapes of undamped free vibration.

Solved: K φ = ω² M φ on the free degrees of freedom (restrained directions
eliminated, springs on the diagonal of K as in the static solve), f = ω/2π
in Hz.  Mass, in kg:

- members: ρAL from each member's density, either consistent (linear shape
  functions, (ρAL/6)[[2I, I], [I, 2I]]) or lumped (half at each end);
  pin-jointed bars carry no bending, so a member's own lateral (string or
  beam) modes between its end nodes are not represented;
- ``added_mass``: a point mass at each node, acting in all three directions;
- ``mass_from``: the downward loads of a load case or combination divided by
  g, at their nodes, in all three directions (common practice for turning
  permanent loads into mass; loads upward or horizontal are not turned into
  mass and are counted in ``notes``).

K may include the geometric stiffness of a prestress (``prestress``: a static
result or member forces), as for cable nets, whose lateral stiffness comes
from their tension.  A frame that is a mechanism, or would be unstable under
its prestress, has no frequencies: MechanismError names the nodes.  Results
must be checked by a qualified engineer; frequencies of real frames also
depend on joints, cladding and mass not modelled here.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np

from spaceframe.analysis.buckling import axial_forces_of
from spaceframe.analysis.eigen import (
    extreme_pairs,
    factor_or_mechanism,
    full_modes,
    mode_count,
    positive_definite,
)
from spaceframe.analysis.matrices import (
    elastic_stiffness,
    free_dof_map,
    geometric_stiffness,
    mass_matrix,
)
from spaceframe.analysis.stability import check_stability, describe_dofs
from spaceframe.errors import MechanismError, ModelError
from spaceframe.model import STANDARD_GRAVITY
from spaceframe.results.modes import VibrationResult
from spaceframe.solvers import resolve_backend

if TYPE_CHECKING:
    from spaceframe.model import Model

__all__ = ["VibrationResult", "natural_frequencies"]

#: ω² below this fraction of max_i K_ii / M_ii (the squared angular frequency
#: of the stiffest single direction) is a mechanism, not a frequency.  A
#: fixed-free chain of n equal bars has ω₁² / max(K_ii/M_ii) ~ 0.8 / n², so
#: genuine modes of chains up to 10⁴ bars stay above 1e-9; the stiffness
#: pivot tolerance (spaceframe.solvers, 1e-11) lets through near-mechanisms
#: near 1e-11.
MECHANISM_RATIO = 1.0e-10


def _added_mass(model: Model, added_mass: Any) -> np.ndarray:
    n = model.n_nodes
    if added_mass is None:
        return np.zeros(n)
    try:
        a = np.asarray(added_mass, dtype=float)
    except (TypeError, ValueError):
        raise ModelError(f"added_mass: expected {n} masses in kg, got {added_mass!r}") from None
    if a.ndim == 0:
        a = np.full(n, float(a))
    if a.shape != (n,):
        raise ModelError(f"added_mass: expected a scalar or {n} masses (one per node), "
                         f"got shape {a.shape}")
    bad = np.flatnonzero(~np.isfinite(a) | (a < 0))
    if bad.size:
        i = int(bad[0])
        raise ModelError(f"added_mass[{i}] = {float(a[i])}: must be a finite mass >= 0 kg")
    return a


def _load_mass(model: Model, name: str, g: float) -> tuple[np.ndarray, list[str]]:
    """Downward load of a case or combination divided by g, per node (common practice)."""
    if not (np.isfinite(g) and g > 0):
        raise ModelError(f"g = {g!r}: must be a positive acceleration in m/s²")
    n = model.n_nodes
    if name in model.cases:
        cases = {name: 1.0}
    elif name in model.combinations:
        cases = model.combinations[name]
    else:
        known = ", ".join(sorted([*model.cases, *model.combinations])) or "none defined"
        raise ModelError(f"mass_from: no load case or combination named {name!r} "
                         f"(have: {known})")
    F = np.zeros((n, 3))
    for case, factor in cases.items():
        lc = model.cases[case]
        lc.resize(n, model.n_members)
        F += factor * lc.forces[:n]
    mass = np.maximum(-F[:, 2], 0.0) / g
    notes = [f"mass from the downward loads of {name!r} divided by g = {g:g} m/s² "
             f"({mass.sum():.6g} kg; common practice)"]
    up = int(np.count_nonzero(F[:, 2] > 0))
    side = int(np.count_nonzero(np.any(F[:, :2] != 0, axis=1)))
    if up:
        notes.append(f"{up} node(s) with upward loads in {name!r} were given no mass for them")
    if side:
        notes.append(f"{side} node(s) with horizontal loads in {name!r} were given no mass "
                     "for them")
    return mass, notes


def natural_frequencies(
    model: Model,
    n_modes: int = 10,
    mass: str = "consistent",
    added_mass: Any = None,
    *,
    mass_from: str | None = None,
    g: float = STANDARD_GRAVITY,
    member_mass: bool = True,
    prestress: Any = None,
    solver: str = "auto",
) -> VibrationResult:
    """Lowest natural frequencies of the frame.

    Parameters
    ----------
    model : Model
    n_modes : int
        Number of frequencies wanted (at most the number of free directions).
    mass : {"consistent", "lumped"}
        How member mass ρAL is distributed to the nodes.
    added_mass : float or (n_nodes,) float, optional
        Point mass at each node, kg, acting in all three directions.
    mass_from : str, optional
        A load case or combination whose downward loads, divided by ``g``,
        are added as nodal mass (common practice for permanent loads; do not
        also count self-weight twice: see ``member_mass``).
    g : float
        Acceleration of gravity for ``mass_from``, m/s².
    member_mass : bool
        Count the members' own mass from their density.
    prestress : CaseResult or (b,) float, optional
        Member axial forces, N (tension positive), whose geometric stiffness
        is added to K.
    solver : {"auto", "scipy", "pardiso"}

    Returns
    -------
    VibrationResult

    Raises
    ------
    ModelError
        On bad input, more modes than free directions, or a model without mass.
    MechanismError
        If the frame is a mechanism or its prestress makes it unstable.
    """
    model.validate()
    backend = resolve_backend(solver)
    if mass not in ("consistent", "lumped"):
        raise ModelError(f"mass = {mass!r}: choose 'consistent' or 'lumped'")
    added = _added_mass(model, added_mass)
    notes: list[str] = []
    if mass_from is not None:
        load, load_notes = _load_mass(model, mass_from, g)
        added = added + load
        notes += load_notes
    m_members = model.mass if member_mass else np.zeros(model.n_members)
    total = float(m_members.sum() + added.sum())
    if not total > 0:
        raise ModelError(
            "natural_frequencies: the model has no mass (give members a density, or use "
            "added_mass or mass_from)"
        )
    if prestress is None:
        check_stability(model)
        N = None
    else:
        _, N = axial_forces_of(model, prestress, "natural_frequencies: prestress")
    dof_map, free = free_dof_map(model.restraint)
    k = mode_count(n_modes, free.size)
    args = (model.members, model.n_nodes)
    K = elastic_stiffness(*args, model.directions, model.axial_stiffness,
                          springs=model.springs, dof_map=dof_map, n_dof=free.size)
    if N is not None:
        K = K + geometric_stiffness(*args, model.directions, model.lengths, N,
                                    dof_map=dof_map, n_dof=free.size)
    what = "natural frequencies"
    try:
        factor = factor_or_mechanism(K, free, backend, what)
    except MechanismError as exc:
        if N is None or not np.any(N < 0):
            raise
        # PARDISO (run for positive definite matrices) refuses an indefinite one.
        raise MechanismError(
            f"natural frequencies: the frame is unstable under its prestress or a "
            f"mechanism ({exc})", nodes=exc.nodes, directions=exc.directions
        ) from exc
    if N is not None and not positive_definite(factor):
        raise MechanismError(
            "natural frequencies: the frame is unstable under its prestress (the stiffness "
            "with the prestress's geometric stiffness is not positive definite)"
        )
    M = mass_matrix(*args, m_members, mass == "lumped", added=added, dof_map=dof_map,
                    n_dof=free.size)
    massed = int(np.count_nonzero(M.diagonal() > 0))
    if massed == 0:
        raise ModelError("natural_frequencies: all of the model's mass sits on supports")
    want = min(k, massed)
    nu, V = extreme_pairs(K, factor, M, want, "LA", what)
    omega2 = 1.0 / nu
    _check_mechanism(K, M, omega2, V, free)
    if omega2.size < k:
        notes.append(f"only {omega2.size} frequencies exist, fewer than the {k} asked "
                     f"({massed} free directions carry mass)")
    freq = np.sqrt(omega2) / (2.0 * np.pi)
    return VibrationResult(freq, full_modes(V, free, model.n_nodes), mass, total, notes)


def _check_mechanism(K: Any, M: Any, omega2: np.ndarray, V: np.ndarray, free: np.ndarray
                     ) -> None:
    """Raise MechanismError for modes of (near) zero frequency, naming their nodes."""
    kd, md = K.diagonal(), M.diagonal()
    ref = float(np.max(kd[md > 0] / md[md > 0], initial=0.0))
    low = np.flatnonzero(omega2 <= MECHANISM_RATIO * ref)
    if low.size == 0:
        return
    vec = np.abs(V[:, low[0]])
    dofs = free[vec >= 0.1 * vec.max()]
    nodes, axes = np.divmod(dofs, 3)
    raise MechanismError(
        f"natural frequencies: {low.size} mode(s) of (near) zero frequency: the frame is a "
        f"mechanism moving {describe_dofs(dofs)}",
        nodes=nodes,
        directions=["xyz"[a] for a in axes],
    )
