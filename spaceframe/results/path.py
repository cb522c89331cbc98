"""Result kind of a nonlinear analysis: the equilibrium path of load steps.

Made by :func:`spaceframe.solve_nonlinear`; every step carries its own
equilibrium residual, and the strain measure is stated in the result.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np

__all__ = ["STRAIN_MEASURE", "LoadPath"]

#: The strain measure and formulation, stated in every result.
STRAIN_MEASURE = "engineering strain (l - L0)/L0, co-rotational bar"


@dataclass
class LoadPath:
    """An equilibrium path under a growing load factor (SI units, tension positive).

    Attributes
    ----------
    name : str
        Load case or combination.
    kind : {"case", "combination"}
    load_factors : (s,) float
        Load factor of each converged step; step 0 is the unloaded state.  It
        may fall after a limit point; the last step is exactly
        ``max_load_factor``.
    displacements : (s, n, 3) float
        Nodal displacements, m.
    axial_forces : (s, b) float
        Member axial forces N = EA (l - L0)/L0, N.
    reactions : (s, n, 3) float
        Forces that supports and springs exert on the nodes, N.
    loads : (n, 3) float
        Reference load (load factor 1), N.
    limit_points : (k,) int
        Indices into the steps where the load factor passes a maximum or a
        minimum (sign change of its increment; located steps, see module notes).
    slack : (s, b) bool
        Tension-only members that are slack (would be in compression, carry
        nothing) at each step.
    negative_pivots : (s,) int
        Negative eigenvalues of the tangent stiffness at each step (-1: unknown).
    iterations : (s,) int
        Newton iterations of each step.
    residuals : (s,) float
        Relative equilibrium residual of each step,
        ||f_int - lambda q|| / (||lambda q|| + || sum |N c| ||).
    cutbacks : int
        Steps that failed and were retried with a shorter arc length.
    max_load_factor : float
    strain_measure : str
    factors : dict
        For a combination, its case factors.
    imperfection : (n, 3) float
        Node offsets, m, of the imperfect geometry the path was traced on
        (``solve_nonlinear(imperfection=...)``); zeros for the drawn
        geometry.  Displacements are measured from the nodes plus these.
    imperfection_amplitude : float
        Largest node offset, m (0: perfect geometry).
    imperfection_mode : int
        Linear buckling mode (1 = lowest) the offsets follow (0: none).
    notes : list of str
        Remarks on how the path was traced (say, on imperfect geometry).
    """

    #: The analysis that made the result (every result kind has one).
    analysis: ClassVar[str] = "nonlinear"

    name: str
    kind: str
    load_factors: np.ndarray
    displacements: np.ndarray
    axial_forces: np.ndarray
    reactions: np.ndarray
    loads: np.ndarray
    limit_points: np.ndarray
    negative_pivots: np.ndarray
    iterations: np.ndarray
    residuals: np.ndarray
    cutbacks: int
    max_load_factor: float
    slack: np.ndarray = field(default_factory=lambda: np.zeros((0, 0), dtype=bool))
    strain_measure: str = STRAIN_MEASURE
    factors: dict[str, float] = field(default_factory=dict)
    imperfection: np.ndarray = field(default_factory=lambda: np.zeros((0, 3)))
    imperfection_amplitude: float = 0.0
    imperfection_mode: int = 0
    notes: list[str] = field(default_factory=list)

    @property
    def n_steps(self) -> int:
        """Number of steps, the unloaded state included."""
        return int(self.load_factors.shape[0])

    @property
    def limit_load_factors(self) -> np.ndarray:
        """(k,) float: load factors at the limit points."""
        return self.load_factors[self.limit_points]

    @property
    def bifurcation_points(self) -> np.ndarray:
        """(k,) int: steps where the negative-pivot count changes away from a limit point.

        Step k is the first with the new count; its load factor is within
        ``limit_tolerance`` of the point where an eigenvalue of the tangent
        passed zero with no extremum of the load factor: a branch point of
        the path.  Branches are detected, not followed.
        """
        neg = self.negative_pivots
        known = (neg[:-1] >= 0) & (neg[1:] >= 0)
        change = np.flatnonzero(known & (neg[:-1] != neg[1:])) + 1
        near = np.union1d(self.limit_points, self.limit_points + 1)
        return np.setdiff1d(change, near)

    def __repr__(self) -> str:
        return (
            f"LoadPath({self.kind} {self.name!r}, {self.n_steps} steps to load factor "
            f"{self.load_factors[-1]:.6g}, {self.limit_points.size} limit points, "
            f"{self.strain_measure})"
        )
