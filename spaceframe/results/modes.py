"""Result kinds of the eigenvalue analyses: buckling factors and natural frequencies.

Both hold mode shapes as (k, n_nodes, 3) arrays, each scaled to a largest
nodal movement of 1; made by :func:`spaceframe.linear_buckling` and
:func:`spaceframe.natural_frequencies`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import ClassVar

import numpy as np

__all__ = ["BucklingResult", "VibrationResult"]


@dataclass
class BucklingResult:
    """Load factors and mode shapes of a linear buckling analysis.

    Attributes
    ----------
    name : str
        The static result (case or combination) whose forces were used.
    factors : (k,) float
        Positive load factors λ, ascending: the result's loads times λ make
        the frame unstable.  k <= n_modes (fewer when fewer exist).
    modes : (k, n_nodes, 3) float
        Buckling mode shapes, each scaled to a largest nodal movement of 1.
    negative_factors : (j,) float
        Only with ``negative=True``: factors λ < 0 (the loads reversed),
        nearest to zero first; empty otherwise.
    negative_modes : (j, n_nodes, 3) float
    notes : list of str
        Plain-words remarks (fewer modes than asked, and why).
    """

    #: The analysis that made the result (every result kind has one).
    analysis: ClassVar[str] = "buckling"

    name: str
    factors: np.ndarray
    modes: np.ndarray
    negative_factors: np.ndarray
    negative_modes: np.ndarray
    notes: list[str] = field(default_factory=list)

    def __repr__(self) -> str:
        f = ", ".join(f"{x:.4g}" for x in self.factors)
        return f"BucklingResult({self.name!r}: factors [{f}])"


@dataclass
class VibrationResult:
    """Natural frequencies and mode shapes.

    Attributes
    ----------
    frequencies : (k,) float
        Natural frequencies, Hz, ascending; k <= n_modes (fewer when fewer
        directions carry mass).
    modes : (k, n_nodes, 3) float
        Mode shapes, each scaled to a largest nodal movement of 1.
    mass : {"consistent", "lumped"}
    total_mass : float
        Mass of the model, kg: members (if counted), added and from loads,
        including what sits on supports.
    notes : list of str
        Plain-words remarks (mass from loads, fewer modes than asked).
    """

    #: The analysis that made the result.
    analysis: ClassVar[str] = "vibration"

    frequencies: np.ndarray
    modes: np.ndarray
    mass: str
    total_mass: float
    notes: list[str] = field(default_factory=list)

    @property
    def periods(self) -> np.ndarray:
        """(k,) float: periods 1/f, s."""
        return 1.0 / self.frequencies

    @property
    def angular_frequencies(self) -> np.ndarray:
        """(k,) float: ω = 2πf, rad/s."""
        return 2.0 * np.pi * self.frequencies

    def __repr__(self) -> str:
        f = ", ".join(f"{x:.4g}" for x in self.frequencies)
        return f"VibrationResult({self.mass} mass {self.total_mass:.4g} kg: [{f}] Hz)"
